//! Brute-force enumeration: the test oracle for tiny cells.
//!
//! Visits every assignment of every variable and checks every constraint. Time grows as
//! ∏ q_v; use only to check the other counters.

use crate::model::Model;

/// Largest number of assignments [`count`] agrees to visit.
pub const LIMIT: u128 = 1 << 28;

/// The number of assignments that satisfy every constraint, or `None` above [`LIMIT`].
pub fn count(model: &Model) -> Option<u128> {
    let total = model
        .variables
        .iter()
        .try_fold(1u128, |a, v| a.checked_mul(v.states as u128))?;
    if total > LIMIT {
        return None;
    }
    if model.contradiction.is_some() {
        return Some(0);
    }
    let n = model.variables.len();
    let mut values = vec![0u32; n];
    let mut found = 0u128;
    for _ in 0..total {
        let ok = model.constraints.iter().all(|c| {
            let t = &model.tables[c.table];
            let mut index = 0u64;
            let mut stride = 1u64;
            for (&v, &q) in c.scope.iter().zip(&t.radices) {
                index += values[v] as u64 * stride;
                stride *= q as u64;
            }
            t.allows(index)
        });
        if ok {
            found += 1;
        }
        // next assignment (odometer)
        for (v, var) in values.iter_mut().zip(&model.variables) {
            *v += 1;
            if *v < var.states {
                break;
            }
            *v = 0;
        }
    }
    Some(found)
}

/// The weighted sum over every allowed assignment, by enumeration (the oracle of the
/// weighted counters): Z = Σ w, ⟨ln w⟩ and ⟨n_j⟩ for every imposed mean, with w the state
/// weights times exp(Σ_j h_j n_j). Pinned variables sit at their held state.
#[derive(Clone, Debug, PartialEq)]
pub struct WeightedSum {
    /// Σ w over the allowed assignments.
    pub z: f64,
    /// ⟨ln w⟩.
    pub ln_w: f64,
    /// ⟨n_j⟩, the number of mean j's variables in its state (a total over the cell).
    pub means: Vec<f64>,
    /// The number of allowed assignments with each number of the first mean's variables in
    /// its state (the polynomial of a composition), when there is a mean.
    pub by_first_mean: Vec<u128>,
}

/// [`WeightedSum`] of `model` at fields `h` (one per imposed mean), or `None` above
/// [`LIMIT`].
pub fn weighted(model: &Model, h: &[f64]) -> Option<WeightedSum> {
    let total = model
        .variables
        .iter()
        .try_fold(1u128, |a, v| a.checked_mul(v.states as u128))?;
    if total > LIMIT {
        return None;
    }
    let m = model.means.len();
    let mut sum = WeightedSum {
        z: 0.0,
        ln_w: 0.0,
        means: vec![0.0; m],
        by_first_mean: vec![0; model.means.first().map_or(0, |f| f.variables.len() + 1)],
    };
    let n = model.variables.len();
    let mut values = vec![0u32; n];
    for _ in 0..total {
        let ok = model.contradiction.is_none()
            && model.constraints.iter().all(|c| {
                let t = &model.tables[c.table];
                let mut index = 0u64;
                let mut stride = 1u64;
                for (&v, &q) in c.scope.iter().zip(&t.radices) {
                    index += values[v] as u64 * stride;
                    stride *= q as u64;
                }
                t.allows(index)
            });
        if ok {
            let mut w = 1.0;
            for (v, &s) in values.iter().enumerate() {
                w *= model.weight(v, s);
            }
            let counts: Vec<usize> = model
                .means
                .iter()
                .map(|mean| {
                    mean.variables
                        .iter()
                        .filter(|&&v| model.variables[v].held.unwrap_or(values[v]) == mean.state)
                        .count()
                })
                .collect();
            let field: f64 = counts.iter().zip(h).map(|(&c, h)| c as f64 * h).sum();
            w *= field.exp();
            if w > 0.0 {
                sum.z += w;
                sum.ln_w += w * w.ln();
                for (a, &c) in sum.means.iter_mut().zip(&counts) {
                    *a += w * c as f64;
                }
            }
            if let Some(&c) = counts.first() {
                sum.by_first_mean[c] += 1;
            }
        }
        for (v, var) in values.iter_mut().zip(&model.variables) {
            *v += 1;
            if *v < var.states {
                break;
            }
            *v = 0;
        }
    }
    if sum.z > 0.0 {
        sum.ln_w /= sum.z;
        for a in &mut sum.means {
            *a /= sum.z;
        }
    }
    Some(sum)
}
