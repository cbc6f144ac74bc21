//! Pauling's estimate: every local constraint treated as independent.
//!
//! # What it computes
//!
//! W_P per formula unit, from
//! ln W_P = (Σ_v ln q_v + Σ_c ln(allowed_c / total_c)) / (formula units),
//! where q_v is the number of states of variable v and allowed_c / total_c is the fraction
//! of local assignments that constraint c allows. For ice this gives 2² · (6/16) = 3/2 per
//! H2O (Pauling 1935, J. Am. Chem. Soc. 57, 2680).
//!
//! # Arguments and returns
//!
//! [`estimate`] takes a crystal and returns an [`Estimate`] for the infinite crystal
//! (`cells: None`); [`for_model`] evaluates the same sum on a given finite model.
//!
//! # Complexity
//!
//! The crystal is compiled on a periodic cell just large enough that no constraint sees a
//! variable twice (3 cells per axis, more for long shifts); time and memory are linear in
//! that cell's size.

use std::time::Instant;

use crate::cluster::{Cells, Cluster};
use crate::crystal::Crystal;
use crate::error::Result;
use crate::estimate::{Estimate, Method};
use crate::model::Model;

/// ln W_P per formula unit of a finite model.
pub fn for_model(model: &Model) -> f64 {
    let mut ln = model.ln_unconstrained();
    for c in &model.constraints {
        let t = &model.tables[c.table];
        ln += (t.allowed as f64 / t.size as f64).ln();
    }
    if model.contradiction.is_some() {
        return f64::NEG_INFINITY;
    }
    let per_unit = ln / model.formula_units;
    // Sums of logarithms that cancel exactly (ln 4 + ln 1/4 for dimers) leave rounding noise.
    if per_unit.abs() < 1e-12 {
        0.0
    } else {
        per_unit
    }
}

/// The model of a periodic cube just large enough that no constraint reads a variable
/// twice (3 cells per axis, more for long shifts, at most 9), on which local estimates of
/// the infinite crystal are evaluated.
pub fn tree_free_model(crystal: &Crystal) -> Result<Model> {
    let mut n = (2 * crystal.reach() + 1).max(3) as usize;
    loop {
        let cluster = Cluster::new(crystal, Cells::cube(n, crystal.dimensions))?;
        let model = Model::new(&cluster)?;
        if !model.has_repeats || n >= 9 {
            return Ok(model);
        }
        n += 2;
    }
}

/// Pauling's estimate for the infinite crystal.
pub fn estimate(crystal: &Crystal) -> Result<Estimate> {
    let start = Instant::now();
    let model = tree_free_model(crystal)?;
    Ok(infinite_crystal(
        Method::Pauling,
        crystal,
        for_model(&model),
        start,
    ))
}

/// A local estimate of the infinite crystal (no count, no error bar) from ln W per formula
/// unit, reported per unit cell of the crystal.
pub fn infinite_crystal(method: Method, crystal: &Crystal, ln_w: f64, start: Instant) -> Estimate {
    let units = crystal.formula_unit.per_cell(crystal);
    Estimate {
        method,
        cells: None,
        count: None,
        ln_count: ln_w * units,
        formula_units: units,
        ln_w_per_unit: ln_w,
        sigma_ln_w: None,
        seconds: start.elapsed().as_secs_f64(),
        peak_states: None,
    }
}
