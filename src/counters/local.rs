//! What the local estimates share, and what other counters borrow from them: the
//! independent-constraint sum (the Pauling reference) and the cluster on which estimates
//! of the infinite crystal are evaluated.
//!
//! - [`pauling_ln_w`]: ln W_P per formula unit of a model, Σ_v ln q_v + Σ_c ln(allowed_c /
//!   total_c) over the formula units; Pauling's estimate, the exact counter's guess of the
//!   size of a count, the Monte Carlo reference.
//! - [`tree_free_model`]: the model of a periodic cube just large enough that no
//!   constraint reads a variable twice, on which Pauling's and Bethe's estimates are
//!   evaluated as the infinite crystal's.
//! - [`caveat`]: when a local estimate is not a meaningful value of W (below 1).

use serde::Serialize;

use crate::cluster::{Cells, Cluster};
use crate::crystal::Crystal;
use crate::error::Result;
use crate::estimate::Estimate;
use crate::model::Model;

/// Largest number of cells per axis of [`tree_free_model`]'s cube.
pub const TREE_FREE_MAX_CELLS: usize = 9;

/// ln W_P per formula unit of a finite model.
pub fn pauling_ln_w(model: &Model) -> f64 {
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
        if !model.has_repeats || n >= TREE_FREE_MAX_CELLS {
            return Ok(model);
        }
        n += 2;
    }
}

/// Why a local estimate (Pauling's, or the Bethe approximation) is not a meaningful value of
/// W for the rule it was computed for. Derived from the numbers, never from the rule's kind.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Caveat {
    /// 0 < W < 1 per formula unit, i.e. S0 < 0: impossible for a count, which is 0 or at
    /// least 1 in every cell, so that W per formula unit is 0 or at least 1.
    BelowOne {
        /// The estimate's W per formula unit.
        w_per_unit: f64,
    },
}

impl Caveat {
    /// The reason in words (no command-line terms).
    pub fn explain(&self, unit: &str) -> String {
        match self {
            Caveat::BelowOne { w_per_unit } => format!(
                "W = {w_per_unit:.6} per {unit} is below 1 (S0 < 0): the independent-constraint \
                 product is not meaningful for this rule, since a count of arrangements is 0 or \
                 at least 1 and W per {unit} therefore 0 or at least 1"
            ),
        }
    }
}

/// Whether a local estimate is not meaningful, and why (`None`: nothing against it). A
/// tolerance of 1e-9 in ln W keeps rounding noise of an exact 1 from raising it.
pub fn caveat(e: &Estimate) -> Option<Caveat> {
    let ln = e.ln_w_per_unit;
    (ln.is_finite() && ln < -1e-9).then(|| Caveat::BelowOne {
        w_per_unit: ln.exp(),
    })
}
