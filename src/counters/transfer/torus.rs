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
//! state-space bound); [`crate::counters::exact::count_cell`] takes the trace when its
//! work is smaller.
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

use num_bigint::BigUint;

use super::{Column, Sectors, StripConfig};
use crate::cluster::Cells;
use crate::counters::exact::ExactConfig;
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::estimate::Estimate;
use crate::model::Model;

impl Column {
    /// The exact trace of T^L, L ≥ 1, including the free variables: the number of
    /// arrangements of the periodic `width × L` cell when L is larger than the deepest
    /// constraint (so that no constraint of the torus reads a variable twice along the
    /// strip).
    pub fn trace_power(&self, length: usize) -> Result<BigUint> {
        self.trace_power_until(length, &|| Ok(()))
    }

    /// [`Column::trace_power`], calling `stop` before every start state (an error ends the
    /// trace).
    fn trace_power_until(&self, length: usize, stop: &dyn Fn() -> Result<()>) -> Result<BigUint> {
        if self.flip.is_some() {
            return Err(Error::Cells(
                "a torus trace needs every state; this operator pairs each state with its reversal (build it with Sectors::Full)".into(),
            ));
        }
        if let Some(q) = self.sector {
            return Err(Error::Cells(format!(
                "a torus trace needs every charge sector; this operator keeps only charge {q} (build it with Sectors::Full)"
            )));
        }
        if length <= self.depth {
            return Err(Error::Cells(format!(
                "a torus trace needs more than {} columns along the strip",
                self.depth
            )));
        }
        let zero = BigUint::from(0u32);
        let mut total = zero.clone();
        for start in 0..self.keys.len() {
            stop()?;
            let mut cur = vec![zero.clone(); self.keys.len()];
            cur[start] = BigUint::from(1u32);
            for _ in 0..length {
                for s in 0..self.rows.len() {
                    let mut next = vec![zero.clone(); self.sizes[s]];
                    self.rows[s].for_each_row(|j, inputs| {
                        for i in inputs {
                            next[j] += &cur[i];
                        }
                    });
                    cur = next;
                }
            }
            total += &cur[start];
        }
        // Free variables: states^length each, folded in through ln_free.
        Ok(total * BigUint::from(self.free_states).pow(length as u32))
    }
}

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
        self.count_until(formula_units, cells, &|| Ok(()))
    }

    /// [`TorusRoute::count`] for the cell whose model is `model`, stopping at the deadline
    /// or the interrupt of `config` ([`Error::Deadline`], [`Error::Interrupted`]).
    pub fn count_within(&self, model: &Model, config: &ExactConfig) -> Result<Estimate> {
        let stop = || {
            if config.interrupt.raised() {
                return Err(Error::Interrupted {
                    what: format!("counting {}", model.cells),
                });
            }
            if config.deadline.is_some_and(|d| Instant::now() > d) {
                return Err(Error::Deadline {
                    cells: model.cells.clone(),
                });
            }
            Ok(())
        };
        self.count_until(model.formula_units, &model.cells, &stop)
    }

    fn count_until(
        &self,
        formula_units: f64,
        cells: &str,
        stop: &dyn Fn() -> Result<()>,
    ) -> Result<Estimate> {
        let start = Instant::now();
        let count = self.column.trace_power_until(self.length, stop)?;
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;
    use crate::cluster::Cluster;
    use crate::counters::exact;

    fn lattice(name: &str) -> Lattice {
        let path = format!("{}/lattices/{name}", env!("CARGO_MANIFEST_DIR"));
        Lattice::from_file(std::path::Path::new(&path)).unwrap()
    }

    /// The frontier counter's count of the periodic `a × b` cell.
    fn torus(l: &Lattice, a: usize, b: usize) -> BigUint {
        let cells = Cells::parse(&format!("{a}x{b}"), None, 2).unwrap();
        let model = Model::new(&Cluster::new(&l.crystal, cells).unwrap()).unwrap();
        exact::count(&model, &Default::default(), &crate::context::Context::new())
            .unwrap()
            .estimate
            .count
            .unwrap()
    }

    /// The trace of T^L is the torus count of the frontier counter, exactly (two
    /// independent routes through the same model).
    #[test]
    fn trace_equals_torus_count() {
        for name in [
            "square-ice.yaml",
            "hard-squares.yaml",
            "square-dimers.yaml",
            "triangular-afm.yaml",
            "honeycomb-dimers.yaml",
            "kagome-ice.yaml",
            "triangular-4-colourings.yaml",
        ] {
            let l = lattice(name);
            for along in 0..2 {
                for width in 1..=4 {
                    let config = StripConfig {
                        along,
                        sectors: Sectors::Full,
                        ..Default::default()
                    };
                    let column = Column::new(&l.crystal, width, &config).unwrap();
                    for length in 2..=5 {
                        let (a, b) = if along == 0 {
                            (length, width)
                        } else {
                            (width, length)
                        };
                        assert_eq!(
                            column.trace_power(length).unwrap(),
                            torus(&l, a, b),
                            "{name} along {along}, {a}x{b}"
                        );
                    }
                }
            }
        }
    }

    /// OEIS A054759: square ice on the L×L torus, 148 (L = 3), 2970 (L = 4), 143224 (L = 5).
    #[test]
    fn square_ice_tori_by_trace() {
        let l = lattice("square-ice.yaml");
        for (n, expected) in [(3usize, 148u64), (4, 2970), (5, 143224)] {
            let config = StripConfig {
                sectors: Sectors::Full,
                ..Default::default()
            };
            let column = Column::new(&l.crystal, n, &config).unwrap();
            assert_eq!(column.trace_power(n).unwrap(), BigUint::from(expected));
        }
    }
}
