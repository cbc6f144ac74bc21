//! A stochastic solver of the conjugate fields: Newton steps on sampled means.
//!
//! # What it computes
//!
//! The fields h of a model's imposed means (`occupancy:`) whose ensemble reaches every
//! target mean within its sampling error, and the Monte Carlo run at those fields.
//!
//! # Method
//!
//! ln Z(h) is convex in h, with gradient ⟨n⟩ and Hessian the covariance of the counts
//! C_jk = Cov(n_j, n_k) (the susceptibility), both measured by the sampler in the
//! defect-free ensemble ([`super::ground`]). Each step runs the sampler at h, and moves
//! h by the Newton step C⁻¹ (t − ⟨n⟩) (t: the target counts), each component clamped to
//! ±[`MAX_STEP`] (common practice, against a noisy or nearly singular C far from the
//! solution). It stops as soon as every mean reached lies within [`TOLERANCE`] of its 1σ
//! from its target, and returns that run; step s samples with seed + s, so the whole solve
//! is reproducible.
//!
//! # Complexity
//!
//! Up to `max_steps` sampler runs, and a k×k solve per step for k imposed means.

use super::{Counted, SampleConfig, Sampled, count};
use crate::context::Context;
use crate::error::{Error, Result};
use crate::model::Model;

/// Largest change of one field in one step.
pub const MAX_STEP: f64 = 1.0;

/// A mean counts as reached within this many of its standard errors.
pub const TOLERANCE: f64 = 2.0;

/// How the fields were found.
#[derive(Clone, Debug)]
pub struct FieldSolve {
    /// Sampler runs made (the last is the one returned).
    pub steps: usize,
    /// Whether every mean reached its target within [`TOLERANCE`] σ.
    pub converged: bool,
    /// The fields of every step, in order.
    pub history: Vec<Vec<f64>>,
}

/// Solve for the fields of `model`'s imposed means, starting from `config.fields` (zeros
/// when empty), in at most `max_steps` sampler runs. Returns the last run (at the fields
/// found; its weighing says what was reached) and how the solve went; when it did not
/// converge the run is still returned, with `converged` false.
pub fn solve_fields(
    model: &Model,
    config: &SampleConfig,
    max_steps: usize,
    context: &Context,
) -> Result<(Counted<Sampled>, FieldSolve)> {
    let k = model.means.len();
    if k == 0 {
        return Err(Error::Setting(
            "there is no imposed mean whose field could be solved for".into(),
        ));
    }
    let mut h = if config.fields.is_empty() {
        vec![0.0; k]
    } else {
        config.fields.clone()
    };
    let mut history = Vec::new();
    let mut step = 0;
    loop {
        let run_config = SampleConfig {
            fields: h.clone(),
            seed: config.seed.wrapping_add(step as u64),
            ..config.clone()
        };
        let s = count(model, &run_config, context)?;
        history.push(h.clone());
        step += 1;
        let w = s
            .weighing
            .as_ref()
            .expect("a model with imposed means is weighted");
        let reached = (0..k).all(|j| {
            (w.achieved[j] - model.means[j].mean).abs() <= TOLERANCE * w.sigma_achieved[j]
        });
        if reached || step >= max_steps || context.interrupt.raised() {
            return Ok((
                s.clone(),
                FieldSolve {
                    steps: step,
                    converged: reached,
                    history,
                },
            ));
        }
        let residual: Vec<f64> = (0..k)
            .map(|j| {
                let size = model.means[j].variables.len() as f64;
                (model.means[j].mean - w.achieved[j]) * size
            })
            .collect();
        let Some(delta) = solve_linear(&w.covariance, &residual) else {
            return Err(Error::Setting(
                "the sampled susceptibility of the imposed means is singular (a mean that does not fluctuate): its field cannot be solved for".into(),
            ));
        };
        for (x, d) in h.iter_mut().zip(delta) {
            *x += d.clamp(-MAX_STEP, MAX_STEP);
        }
    }
}

/// Solve A x = b (A row-major k×k) by Gaussian elimination with partial pivoting; `None`
/// when A is singular or not finite.
fn solve_linear(a: &[f64], b: &[f64]) -> Option<Vec<f64>> {
    let k = b.len();
    let mut m: Vec<Vec<f64>> = (0..k)
        .map(|i| {
            let mut row = a[i * k..(i + 1) * k].to_vec();
            row.push(b[i]);
            row
        })
        .collect();
    let scale = a.iter().fold(0.0f64, |s, x| s.max(x.abs()));
    if !(scale > 0.0 && scale.is_finite()) {
        return None;
    }
    for c in 0..k {
        let p = (c..k).max_by(|&i, &j| m[i][c].abs().total_cmp(&m[j][c].abs()))?;
        if m[p][c].abs() <= 1e-12 * scale {
            return None;
        }
        m.swap(c, p);
        let (top, bottom) = m.split_at_mut(c + 1);
        let pivot = &top[c];
        for row in bottom {
            let f = row[c] / pivot[c];
            for (x, y) in row[c..].iter_mut().zip(&pivot[c..]) {
                *x -= f * y;
            }
        }
    }
    let mut x = vec![0.0; k];
    for r in (0..k).rev() {
        let s: f64 = (r + 1..k).map(|c| m[r][c] * x[c]).sum();
        x[r] = (m[r][k] - s) / m[r][r];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;
    use crate::cluster::{Cells, Cluster};

    #[test]
    fn linear_solve_of_a_small_system() {
        let x = solve_linear(&[2.0, 1.0, 1.0, 3.0], &[3.0, 5.0]).unwrap();
        assert!(
            (x[0] - 0.8).abs() < 1e-12 && (x[1] - 1.4).abs() < 1e-12,
            "{x:?}"
        );
        assert!(solve_linear(&[1.0, 2.0, 2.0, 4.0], &[1.0, 1.0]).is_none());
    }

    /// Issue 13: ideal two-state variables at an occupancy of 0.8: the field is
    /// ln(0.8/0.2) (closed form), and the solver reaches the mean with a field near it.
    #[test]
    fn issue13_solver_finds_the_field_of_an_ideal_occupancy() {
        let yaml = "name: ideal\ndimensions: 1\ncell: {vectors: [[1.0]]}\nsites: [{id: A, at: [0.0]}]\n\
                    variables: [{on: sites, kind: occupancy}]\nrules: []\n\
                    occupancy: [{site: A, state: 1, mean: 0.8}]\nformula_unit: {name: site, per: sites}\n";
        let l = Lattice::from_yaml(yaml, "ideal.yaml").unwrap();
        let cluster = Cluster::new(&l.crystal, Cells::parse("40", None, 1).unwrap()).unwrap();
        let m = Model::new(&cluster).unwrap();
        let config = SampleConfig {
            replicas: 8,
            sweeps: 100,
            ..SampleConfig::default()
        };
        let (s, solve) = solve_fields(&m, &config, 8, &Context::new()).unwrap();
        assert!(solve.converged, "{solve:?}");
        let w = s.weighing.as_ref().unwrap();
        let exact = 4f64.ln();
        // The field moves the mean by x(1 − x) = 0.16 per unit of h: a mean within 2σ of
        // 0.8 puts the field within about 2σ / 0.16 of ln 4.
        let allowed = 3.0 * w.sigma_achieved[0] / 0.16;
        assert!(
            (w.fields[0] - exact).abs() < allowed,
            "{} against {exact} ± {allowed}",
            w.fields[0]
        );
        // Entropy of mixing at the field found (closed form).
        let x = 1.0 / (1.0 + (-w.fields[0]).exp());
        let mixing = -x * x.ln() - (1.0 - x) * (1.0 - x).ln();
        assert!((s.estimate.ln_w_per_unit - mixing).abs() < 4.0 * s.estimate.sigma_ln_w.unwrap());
    }
}
