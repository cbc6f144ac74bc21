//! Exact counts of a periodic cell (a torus, 2D or 3D) by the trace of T^L, and the
//! estimate of its work that decides between it and the frontier counter.
//!
//! # What it computes
//!
//! For an A × B cell periodic along both axes, the number of arrangements Tr T^L, with T
//! the column operator of a cylinder of width min(A, B) and L = max(A, B) columns along the
//! other axis (every charge sector, every state: [`super::Sectors::Full`]). In 3D, the
//! longest axis is L and the other two make the section of a prism.
//!
//! # Method
//!
//! [`route`] builds the full-space column (refusing, with `None`, cells that are not
//! periodic along every axis, or too short for the template's depth, and columns above the
//! state budget) and estimates the work of the trace: K · L · Σ_steps (transitions +
//! outputs) big-integer additions, K the boundary states (one propagation per start
//! state). The frontier counter's work is bounded by its plan's cost (Σ over steps of the
//! state-space bound); `groundcount exact` takes the trace when its work is smaller.
//! [`TorusRoute::count`] runs [`Column::trace_power`] and returns an [`Estimate`] like the
//! frontier counter's.
//!
//! # Complexity
//!
//! Time K · L · Σ_t S_t q_t big-integer additions; memory the index lists plus two vectors
//! of big integers of length max S_t.
//!
//! # Reference
//!
//! The number of arrangements of a torus as the trace of the L-th power of the transfer
//! matrix: Lieb 1967 (Phys. Rev. 162, 162) for the ice model.

use std::time::Instant;

use super::{Column, Sectors, StripConfig};
use crate::cluster::Cells;
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::estimate::Estimate;

/// A torus count by the trace route, ready to run.
#[derive(Debug)]
pub struct TorusRoute {
    column: Column,
    length: usize,
    build_seconds: f64,
}

/// The trace route for a periodic 2D or 3D cell, or `None` where it does not apply. The
/// longest axis runs along the strip; in 3D the other two make the prism's section.
pub fn route(crystal: &Crystal, cells: &Cells, max_states: usize) -> Option<TorusRoute> {
    let d = cells.dimensions;
    if crystal.dimensions != d || !(2..=3).contains(&d) || !cells.periodic[..d].iter().all(|&p| p) {
        return None;
    }
    let start = Instant::now();
    let along = (0..d)
        .rev()
        .max_by_key(|&a| cells.counts[a])
        .expect("two axes");
    let across: Vec<usize> = (0..d).filter(|&a| a != along).collect();
    let config = StripConfig {
        along,
        depth: across.get(1).map(|&t| cells.counts[t]),
        periodic: true,
        max_states,
        sectors: Sectors::Full,
        ..Default::default()
    };
    let column = Column::new(crystal, cells.counts[across[0]], &config).ok()?;
    let length = cells.counts[along];
    (length > column.depth).then(|| TorusRoute {
        column,
        length,
        build_seconds: start.elapsed().as_secs_f64(),
    })
}

impl TorusRoute {
    /// Predicted big-integer additions of the trace.
    pub fn work(&self) -> f64 {
        let per_column: usize = self.column.transitions() + self.column.sizes.iter().sum::<usize>();
        self.column.states() as f64 * self.length as f64 * per_column as f64
    }

    /// Boundary states of the column (the dimension of T).
    pub fn states(&self) -> usize {
        self.column.states()
    }

    /// The exact count, as the frontier counter would report it; `formula_units` and
    /// `cells` come from the model of the same cell.
    pub fn count(&self, formula_units: f64, cells: &str) -> Result<Estimate> {
        let start = Instant::now();
        let count = self.column.trace_power(self.length)?;
        if formula_units <= 0.0 {
            return Err(Error::Model("the cell holds no formula unit".into()));
        }
        Ok(Estimate::exact(
            cells,
            count,
            formula_units,
            self.build_seconds + start.elapsed().as_secs_f64(),
        )
        .with_peak_states(Some(self.column.peak_states())))
    }
}
