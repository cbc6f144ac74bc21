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
//! - [`LocalFields`], [`allowed_assignments`], [`independent`] and [`weighted_estimate`]:
//!   what Pauling's and Bethe's estimates share on a weighted model (`weights:`,
//!   `occupancy:`, `composition:`): the single-variable weights at conjugate fields h,
//!   the field solve, and the [`Weighing`] they report.

use serde::Serialize;

use crate::cluster::{Cells, Cluster};
use crate::counters::fields::{self, AtFields, FieldsConfig};
use crate::crystal::Crystal;
use crate::error::Result;
use crate::estimate::{Estimate, FieldValue, Weighing};
use crate::model::{Model, Table};

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

/// Pauling's form on a weighted model at single-variable log-weights ln ψ (weights and
/// fields): independent variables with p_v ∝ ψ_v, and every constraint satisfied with its
/// independent probability P_p(c) = Σ_(allowed x) Π_i p_(v_i)(x_i):
/// ln Z_P = Σ_v ln Σ_s ψ_v(s) + Σ_c ln P_p(c), entropy S_P = Σ_v H(p_v) + Σ_c ln P_p(c)
/// = ln Z_P − ⟨ln ψ⟩_p (see [`super::pauling`] for the derivation), for the whole model.
/// With every ψ = 1 this is [`pauling_ln_w`] times the formula units.
pub fn pauling_weighted(model: &Model, log_priors: &[Vec<f64>]) -> LocalValue {
    let ind = independent(log_priors);
    if model.contradiction.is_some() {
        return LocalValue {
            ln_z: f64::NEG_INFINITY,
            entropy: f64::NEG_INFINITY,
            marginals: ind.marginals,
        };
    }
    let allowed: Vec<Vec<Vec<usize>>> = model.tables.iter().map(allowed_assignments).collect();
    let mut ln_p = 0.0;
    for c in &model.constraints {
        let p: f64 = allowed[c.table]
            .iter()
            .map(|x| {
                c.scope
                    .iter()
                    .zip(x)
                    .map(|(&v, &s)| ind.marginals[v][s])
                    .product::<f64>()
            })
            .sum();
        ln_p += p.ln();
    }
    LocalValue {
        ln_z: ind.ln_z + ln_p,
        entropy: ind.entropy + ln_p,
        marginals: ind.marginals,
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

/// The allowed assignments of a table, decoded (first variable fastest).
pub fn allowed_assignments(t: &Table) -> Vec<Vec<usize>> {
    (0..t.size)
        .filter(|&i| t.allows(i))
        .map(|mut i| {
            t.radices
                .iter()
                .map(|&r| {
                    let x = (i % r as u64) as usize;
                    i /= r as u64;
                    x
                })
                .collect()
        })
        .collect()
}

/// The imposed means of a model seen from its variables: which (state, mean) pairs every
/// variable carries a field on, and each mean's target and number of variables.
#[derive(Clone, Debug)]
pub struct LocalFields {
    /// For every variable, the (state, mean index) pairs whose field acts on it.
    terms: Vec<Vec<(u32, usize)>>,
    /// Target of every mean, as a fraction.
    pub targets: Vec<f64>,
    /// Variables of every mean in the model.
    pub sizes: Vec<f64>,
}

impl LocalFields {
    /// The fields' bookkeeping for a model.
    pub fn new(model: &Model) -> Self {
        let mut terms = vec![Vec::new(); model.variables.len()];
        for (j, m) in model.means.iter().enumerate() {
            for &v in &m.variables {
                terms[v].push((m.state, j));
            }
        }
        LocalFields {
            terms,
            targets: model.means.iter().map(|m| m.mean).collect(),
            sizes: model
                .means
                .iter()
                .map(|m| m.variables.len() as f64)
                .collect(),
        }
    }

    /// ln ψ_v(s) = ln w_v(s) + Σ_j h_j [v in mean j, s = state of j]: the log-weights of
    /// every variable's states at fields h (−∞ for a weight of 0).
    pub fn log_priors(&self, model: &Model, h: &[f64]) -> Vec<Vec<f64>> {
        model
            .variables
            .iter()
            .enumerate()
            .map(|(v, var)| {
                (0..var.states)
                    .map(|s| {
                        let mut x = model.weight(v, s).ln();
                        for &(state, j) in &self.terms[v] {
                            if state == s {
                                x += h[j];
                            }
                        }
                        x
                    })
                    .collect()
            })
            .collect()
    }

    /// Every mean reached by single-variable marginals, as a fraction of its variables (the
    /// target itself for a mean with no variable in the model).
    pub fn means(&self, model: &Model, marginals: &[Vec<f64>]) -> Vec<f64> {
        model
            .means
            .iter()
            .enumerate()
            .map(|(j, m)| {
                if m.variables.is_empty() {
                    return self.targets[j];
                }
                m.variables
                    .iter()
                    .map(|&v| marginals[v][m.state as usize])
                    .sum::<f64>()
                    / self.sizes[j]
            })
            .collect()
    }
}

/// ln Σ_s e^{x_s} and the normalised distribution e^{x_s} / Σ (log-weights may be −∞).
pub fn softmax(x: &[f64]) -> (f64, Vec<f64>) {
    let top = x.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    if top == f64::NEG_INFINITY {
        return (f64::NEG_INFINITY, vec![0.0; x.len()]);
    }
    let e: Vec<f64> = x.iter().map(|v| (v - top).exp()).collect();
    let s: f64 = e.iter().sum();
    (top + s.ln(), e.into_iter().map(|v| v / s).collect())
}

/// Σ_s p_s x_s over the states with p_s > 0 (so that a forbidden state, x = −∞, adds 0).
pub fn mean_log(p: &[f64], x: &[f64]) -> f64 {
    p.iter()
        .zip(x)
        .filter(|(p, _)| **p > 0.0)
        .map(|(p, x)| p * x)
        .sum()
}

/// What a local method returns on a weighted model at given single-variable log-weights:
/// ln Z and the entropy of the whole model (not per formula unit), and every variable's
/// marginal.
#[derive(Clone, Debug)]
pub struct LocalValue {
    /// ln Z of the model.
    pub ln_z: f64,
    /// The entropy S/R of the model, ln Z − ⟨ln ψ⟩.
    pub entropy: f64,
    /// The marginal of every variable.
    pub marginals: Vec<Vec<f64>>,
}

/// Independent variables, no constraint: ln Z₀ = Σ_v ln Σ_s ψ_v(s), marginals p_v ∝ ψ_v,
/// entropy Σ_v H(p_v).
pub fn independent(log_priors: &[Vec<f64>]) -> LocalValue {
    let mut ln_z = 0.0;
    let mut entropy = 0.0;
    let mut marginals = Vec::with_capacity(log_priors.len());
    for x in log_priors {
        let (lz, p) = softmax(x);
        ln_z += lz;
        entropy += lz - mean_log(&p, x);
        marginals.push(p);
    }
    LocalValue {
        ln_z,
        entropy,
        marginals,
    }
}

/// A local estimate of a weighted model: the fields h that bring the means reached by
/// `solve_with` to their targets ([`fields::solve`], from h = 0), then `at_fields` there.
/// Returns the entropy per formula unit and the [`Weighing`] (ln Z per formula unit; per
/// mean the target, the field and the mean `at_fields` reaches).
pub fn weighted_estimate(
    model: &Model,
    config: &FieldsConfig,
    mut solve_with: impl FnMut(&[Vec<f64>]) -> Result<LocalValue>,
    mut at_fields: impl FnMut(&[Vec<f64>]) -> Result<LocalValue>,
) -> Result<(f64, Weighing)> {
    let lf = LocalFields::new(model);
    let solved = fields::solve(&lf.targets, &lf.sizes, config, |h| {
        let v = solve_with(&lf.log_priors(model, h))?;
        Ok(AtFields {
            ln_z: v.ln_z,
            means: lf.means(model, &v.marginals),
        })
    })?;
    let value = at_fields(&lf.log_priors(model, &solved.fields))?;
    let achieved = lf.means(model, &value.marginals);
    let per_unit = |x: f64| {
        let y = x / model.formula_units;
        if y.abs() < 1e-12 { 0.0 } else { y }
    };
    let weighing = Weighing {
        ln_z_per_unit: per_unit(value.ln_z),
        fields: model
            .means
            .iter()
            .enumerate()
            .map(|(j, m)| FieldValue {
                label: m.label.clone(),
                kind: m.kind,
                target: m.mean,
                field: solved.fields[j],
                achieved: achieved[j],
                achieved_sigma: None,
            })
            .collect(),
    };
    Ok((per_unit(value.entropy), weighing))
}
