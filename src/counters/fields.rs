//! The conjugate fields of imposed means: given a routine that evaluates ln Z(h) and the
//! means ⟨n_j⟩(h) at fields h, find the h at which every mean equals its target.
//!
//! # Method
//!
//! The maximum-entropy ensemble with means m_j is the weighted ensemble whose fields minimise
//! the convex function F(h) = ln Z(h) − Σ_j h_j m_j N_j (N_j variables under mean j); its
//! gradient is ⟨n_j⟩ − m_j N_j and its minimum value is the entropy S/R = ln Z − Σ h·⟨n⟩
//! (plus the weights' own ⟨ln w⟩ term, which the caller keeps). Newton's method on F: the
//! Jacobian of the means (the susceptibilities, a covariance matrix) by forward
//! differences, the step halved until F decreases (F is convex, so a descent direction
//! always decreases it for a short enough step). Converged when every mean is within
//! [`FieldsConfig::tolerance`] of its target.
//!
//! The routine is deterministic (an exact count or an eigenvalue), so the differences are
//! meaningful; a sampled routine would need its covariance measured instead.

use crate::error::{Error, Result};

/// Settings of the field solver.
#[derive(Clone, Debug)]
pub struct FieldsConfig {
    /// Largest |achieved − target| accepted, as a fraction.
    pub tolerance: f64,
    /// Newton iterations before giving up ([`Error::NotConverged`]).
    pub max_iterations: usize,
    /// Forward-difference step in h for the Jacobian.
    pub step: f64,
}

impl Default for FieldsConfig {
    fn default() -> Self {
        FieldsConfig {
            tolerance: 1e-9,
            max_iterations: 60,
            step: 1e-6,
        }
    }
}

/// What a routine returns at fields h: ln Z and each imposed mean reached, as a fraction of
/// its variables.
#[derive(Clone, Debug, PartialEq)]
pub struct AtFields {
    /// ln Z (of whatever the routine counts: a cell, one formula unit).
    pub ln_z: f64,
    /// ⟨n_j⟩ / N_j for every imposed mean j.
    pub means: Vec<f64>,
}

/// The solution.
#[derive(Clone, Debug, PartialEq)]
pub struct Solved {
    /// The fields h_j.
    pub fields: Vec<f64>,
    /// The routine's values there.
    pub at: AtFields,
    /// Routine evaluations used.
    pub evaluations: usize,
}

/// Solve for the fields at which the means reach `targets` (fractions). `sizes[j]` is N_j in
/// the units the routine's ln Z refers to (variables of mean j per cell, or per formula
/// unit). The start is h = 0.
pub fn solve(
    targets: &[f64],
    sizes: &[f64],
    config: &FieldsConfig,
    mut routine: impl FnMut(&[f64]) -> Result<AtFields>,
) -> Result<Solved> {
    let m = targets.len();
    assert_eq!(sizes.len(), m);
    let mut evaluations = 0;
    let mut eval = |h: &[f64]| {
        evaluations += 1;
        routine(h)
    };
    let objective = |h: &[f64], a: &AtFields| {
        a.ln_z
            - h.iter()
                .zip(targets)
                .zip(sizes)
                .map(|((h, t), n)| h * t * n)
                .sum::<f64>()
    };
    let mut h = vec![0.0; m];
    let mut at = eval(&h)?;
    for _ in 0..config.max_iterations {
        let residual: Vec<f64> = targets.iter().zip(&at.means).map(|(t, a)| t - a).collect();
        if residual.iter().all(|r| r.abs() <= config.tolerance) {
            return Ok(Solved {
                fields: h,
                at,
                evaluations,
            });
        }
        // Jacobian by forward differences: column k is ∂means/∂h_k.
        let mut jac = vec![vec![0.0; m]; m];
        for k in 0..m {
            let mut hk = h.clone();
            hk[k] += config.step;
            let ak = eval(&hk)?;
            for (row, (a1, a0)) in jac.iter_mut().zip(ak.means.iter().zip(&at.means)) {
                row[k] = (a1 - a0) / config.step;
            }
        }
        let delta = match solve_linear(jac, residual.clone()) {
            Some(d) => d,
            // A singular susceptibility (a mean the rules fix): a gradient step instead.
            None => residual.clone(),
        };
        let f0 = objective(&h, &at);
        let mut t = 1.0;
        let mut moved = false;
        for _ in 0..40 {
            let trial: Vec<f64> = h.iter().zip(&delta).map(|(h, d)| h + t * d).collect();
            let a = eval(&trial)?;
            let f = objective(&trial, &a);
            if f.is_finite() && f <= f0 + 1e-15 * f0.abs().max(1.0) {
                h = trial;
                at = a;
                moved = true;
                break;
            }
            t *= 0.5;
        }
        if !moved {
            break;
        }
    }
    let worst = targets
        .iter()
        .zip(&at.means)
        .map(|(t, a)| (t - a).abs())
        .fold(0.0, f64::max);
    if worst <= config.tolerance {
        return Ok(Solved {
            fields: h,
            at,
            evaluations,
        });
    }
    Err(Error::NotConverged {
        what: "the fields of the imposed means".into(),
        iterations: config.max_iterations,
        detail: format!(
            "a mean is still {worst:.3e} from its target; the targets may be out of reach under the rules"
        ),
    })
}

/// Solve a·x = b by Gaussian elimination with partial pivoting; `None` when singular.
fn solve_linear(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    let scale = a
        .iter()
        .flat_map(|r| r.iter())
        .fold(0.0f64, |s, x| s.max(x.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return None;
    }
    for c in 0..n {
        let p = (c..n).max_by(|&i, &j| a[i][c].abs().total_cmp(&a[j][c].abs()))?;
        if a[p][c].abs() <= 1e-13 * scale {
            return None;
        }
        a.swap(c, p);
        b.swap(c, p);
        let (top, rest) = a.split_at_mut(c + 1);
        let pivot = &top[c];
        for (r, row) in rest.iter_mut().enumerate() {
            let f = row[c] / pivot[c];
            for (x, p) in row[c..].iter_mut().zip(&pivot[c..]) {
                *x -= f * p;
            }
            b[c + 1 + r] -= f * b[c];
        }
    }
    let mut x = vec![0.0; n];
    for c in (0..n).rev() {
        let s: f64 = (c + 1..n).map(|k| a[c][k] * x[k]).sum();
        x[c] = (b[c] - s) / a[c][c];
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Independent two-state variables: ln Z = N ln(1 + e^h), mean e^h/(1 + e^h); the field
    /// is the logit of the target (closed form).
    #[test]
    fn issue13_fields_of_independent_variables_are_the_logits() {
        let n = [10.0, 4.0];
        let targets = [0.3, 0.85];
        let s = solve(&targets, &n, &FieldsConfig::default(), |h| {
            Ok(AtFields {
                ln_z: n[0] * (1.0 + h[0].exp()).ln() + n[1] * (1.0 + h[1].exp()).ln(),
                means: h.iter().map(|h| 1.0 / (1.0 + (-h).exp())).collect(),
            })
        })
        .unwrap();
        for (h, t) in s.fields.iter().zip(targets) {
            assert!((h - (t / (1.0 - t)).ln()).abs() < 1e-8, "{h} {t}");
        }
        // The minimum of F is the entropy: Σ N (−x ln x − (1−x) ln(1−x)).
        let f = s.at.ln_z
            - s.fields
                .iter()
                .zip(targets)
                .zip(n)
                .map(|((h, t), n)| h * t * n)
                .sum::<f64>();
        let mix = |x: f64| -x * x.ln() - (1.0 - x) * (1.0 - x).ln();
        assert!((f - (10.0 * mix(0.3) + 4.0 * mix(0.85))).abs() < 1e-9);
    }

    /// Two coupled means: one field on a variable x, one on the pair (x, y) with the rule
    /// x ≤ y (allowed: 00, 01, 11). Targets reachable only inside the simplex.
    #[test]
    fn issue13_coupled_means_converge_and_unreachable_ones_are_refused() {
        // Weights: 00 → 1, 01 → e^{h1}, 11 → e^{h0 + 2 h1}; mean 0 = ⟨x⟩, mean 1 = ⟨x + y⟩/2.
        let routine = |h: &[f64]| {
            let w = [1.0, h[1].exp(), (h[0] + 2.0 * h[1]).exp()];
            let z: f64 = w.iter().sum();
            Ok(AtFields {
                ln_z: z.ln(),
                means: vec![w[2] / z, (w[1] + 2.0 * w[2]) / (2.0 * z)],
            })
        };
        let s = solve(&[0.2, 0.45], &[1.0, 2.0], &FieldsConfig::default(), routine).unwrap();
        // p11 = 0.2, p01 = 2·0.45 − 2·0.2 = 0.5, p00 = 0.3.
        assert!(
            (s.fields[1] - (0.5f64 / 0.3).ln()).abs() < 1e-7,
            "{:?}",
            s.fields
        );
        // ⟨x⟩ = 0.6 with ⟨(x + y)/2⟩ = 0.5 needs p11 = 0.6, p01 = −0.2: out of reach.
        let e = solve(&[0.6, 0.5], &[1.0, 2.0], &FieldsConfig::default(), routine).unwrap_err();
        assert!(matches!(e, Error::NotConverged { .. }), "{e}");
    }
}
