//! What a weighted run measures in the defect-free ensemble: ⟨ln w⟩ and the imposed means.
//!
//! # What it computes
//!
//! With weights w(σ) on the arrangements (`weights:`, and the conjugate fields h_j of
//! imposed means, w(σ) = w₀(σ) e^{Σ_j h_j n_j(σ)}), thermodynamic integration gives ln Z,
//! the logarithm of the weighted sum over the arrangements that keep every rule. The
//! entropy of that ensemble is S/R = ln Z − ⟨ln w⟩, and the mean each field reaches is
//! ⟨n_j⟩ / |j|. Both averages are over the defect-free ensemble, P(σ) = w(σ)/Z.
//!
//! # Method
//!
//! At the last node β_max, the chain's distribution restricted to the arrangements with no
//! violated constraint is exactly w(σ)/Z (e^{−βE} = 1 there), so the samples of that node
//! (both passes) with E = 0 are samples of the defect-free ensemble, with no bias from the
//! finite β. Each replica keeps the number of such samples N_r and the sums of ln w, of
//! every count n_j and of every product n_j n_k ([`Ground`]). The replicas are combined by
//! the ratio estimator Σ_r S_r / Σ_r N_r, whose standard error comes from the spread of the
//! replicas (S_r − m N_r) / N̄ (Cochran 1977, *Sampling Techniques*, ch. 6 — from memory),
//! widened like the ln Z error for the number of replicas; correlations between the
//! sweeps of one replica are inside that spread.
//!
//! # Complexity
//!
//! O(variables) per measured defect-free sample.

use serde::{Deserialize, Serialize};

use super::moves::{Chain, Kernel};
use crate::model::Model;

/// One replica's sums over its defect-free samples at β_max.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Ground {
    /// Measured sweeps at β_max with no violated constraint.
    pub samples: u64,
    /// Σ ln w over them (the whole cell, fields included).
    pub ln_w: f64,
    /// Σ n_j over them, per imposed mean: the number of its variables in its state.
    pub counts: Vec<f64>,
    /// Σ n_j n_k over them, for j ≤ k in row order (j = 0: k = 0, 1, …).
    pub products: Vec<f64>,
}

/// What is measured: the imposed means' variables and states.
#[derive(Clone, Debug)]
pub(crate) struct Observables {
    /// Per imposed mean: its free variables, its state, and the number of its held
    /// variables held at that state (constant).
    means: Vec<(Vec<u32>, u8, u64)>,
}

impl Observables {
    /// The observables of a model's imposed means.
    pub(crate) fn new(model: &Model) -> Observables {
        let means = model
            .means
            .iter()
            .map(|m| {
                let free: Vec<u32> = m
                    .variables
                    .iter()
                    .filter(|&&v| model.variables[v].held.is_none())
                    .map(|&v| v as u32)
                    .collect();
                let held = m
                    .variables
                    .iter()
                    .filter(|&&v| model.variables[v].held == Some(m.state))
                    .count() as u64;
                (free, m.state as u8, held)
            })
            .collect();
        Observables { means }
    }

    /// An empty accumulator.
    pub(crate) fn start(&self) -> Ground {
        let k = self.means.len();
        Ground {
            samples: 0,
            ln_w: 0.0,
            counts: vec![0.0; k],
            products: vec![0.0; k * (k + 1) / 2],
        }
    }

    /// Add the chain's arrangement (which keeps every rule) to `acc`.
    pub(crate) fn add(&self, kernel: &Kernel, chain: &Chain, acc: &mut Ground) {
        acc.samples += 1;
        if kernel.is_weighted() {
            acc.ln_w += chain
                .values
                .iter()
                .enumerate()
                .map(|(v, &x)| kernel.ln_weight(v, x))
                .sum::<f64>();
        }
        let n: Vec<u64> = self
            .means
            .iter()
            .map(|(vars, state, held)| {
                held + vars
                    .iter()
                    .filter(|&&v| chain.values[v as usize] == *state)
                    .count() as u64
            })
            .collect();
        let mut p = 0;
        for j in 0..n.len() {
            acc.counts[j] += n[j] as f64;
            for k in j..n.len() {
                acc.products[p] += (n[j] * n[k]) as f64;
                p += 1;
            }
        }
    }
}

/// The ratio Σ a_r / Σ n_r over replicas and its standard error from their spread,
/// (plain, n − 1 in the variance, not yet widened for the number of replicas), with the
/// per-replica influences (a_r − m n_r)/n̄ whose spread it is.
pub(crate) fn ratio(a: &[f64], n: &[f64]) -> (f64, f64, Vec<f64>) {
    let r = a.len() as f64;
    let total: f64 = n.iter().sum();
    let m = a.iter().sum::<f64>() / total;
    let mean_n = total / r;
    let influence: Vec<f64> = a.iter().zip(n).map(|(a, n)| (a - m * n) / mean_n).collect();
    let var = influence.iter().map(|u| u * u).sum::<f64>() / (r - 1.0);
    (m, (var / r).sqrt(), influence)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ratio_estimator_of_equal_replicas_is_their_mean() {
        // Replicas with the same number of samples: the ratio is the mean of the replica
        // means, and its error the standard error of those means.
        let n = [10.0, 10.0, 10.0, 10.0];
        let a = [10.0, 20.0, 30.0, 40.0];
        let (m, se, u) = ratio(&a, &n);
        assert!((m - 2.5).abs() < 1e-15);
        // Replica means 1, 2, 3, 4: sd √(5/3), standard error √(5/12).
        assert!((se - (5.0f64 / 12.0).sqrt()).abs() < 1e-12, "{se}");
        assert!(u.iter().sum::<f64>().abs() < 1e-12);
    }
}
