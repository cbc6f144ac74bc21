//! Finite-size extrapolation of Monte Carlo values per formula unit to the infinite crystal.
//!
//! # What it computes
//!
//! Given ln W per formula unit s(N) ± σ(N) on periodic cells of N formula units, the
//! infinite-crystal value s∞ of the weighted least-squares fit
//!
//! s(N) = s∞ + a/N + b ln N / N
//!
//! (three or more cells; with two cells only s∞ + a/N). On a periodic cell the count of an
//! ice-rule model is Ω∞^N times a sum over the conserved fluxes through the cell's faces,
//! which brings the ln N / N and 1/N terms; this is the form used for ice by Kolafa 2014
//! (J. Chem. Phys. 140, 204507).
//!
//! # Uncertainty
//!
//! The covariance (XᵀWX)⁻¹ of the fit, W = diag(1/σ²), gives σ(s∞); with more cells than
//! parameters it is scaled by √(χ²/dof) when that exceeds 1 (the form does not fit within
//! the error bars). The two-term fit s∞ + a/N on the same cells is reported beside it as a
//! diagnostic of the model dependence ([`SizeFit::two_term`]).
//!
//! # Complexity
//!
//! O(cells), a 3×3 solve.

use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method};

/// One cell's value: formula units N, ln W per formula unit and its 1σ.
#[derive(Clone, Copy, Debug)]
pub struct SizePoint {
    /// Formula units in the cell.
    pub units: f64,
    /// ln W per formula unit.
    pub value: f64,
    /// Its 1σ.
    pub sigma: f64,
}

/// The extrapolation to the infinite crystal.
#[derive(Clone, Debug)]
pub struct SizeFit {
    /// s∞, ln W per formula unit of the infinite crystal.
    pub value: f64,
    /// Its 1σ (scaled by √(χ²/dof) when above 1).
    pub sigma: f64,
    /// The fitted coefficients after s∞: a (of 1/N) and, with three or more cells, b (of
    /// ln N / N).
    pub coefficients: Vec<f64>,
    /// χ² of the fit and its degrees of freedom (0 when the fit is exact).
    pub chi2: f64,
    /// Degrees of freedom.
    pub dof: usize,
    /// s∞ and σ from the fit s∞ + a/N alone (when the main fit has three terms).
    pub two_term: Option<(f64, f64)>,
}

impl SizeFit {
    /// The fitted form, in words.
    pub fn form(&self) -> &'static str {
        if self.coefficients.len() == 2 {
            "s(N) = s∞ + a/N + b ln N/N"
        } else {
            "s(N) = s∞ + a/N"
        }
    }

    /// s∞ as a Monte Carlo estimate of the infinite crystal; `seconds` is the time of the
    /// cells behind it.
    pub fn estimate(&self, seconds: f64) -> Estimate {
        Estimate {
            method: Method::MonteCarlo,
            cells: None,
            count: None,
            ln_count: self.value,
            formula_units: 1.0,
            ln_w_per_unit: self.value,
            sigma_ln_w: Some(self.sigma),
            seconds,
            peak_states: None,
        }
    }
}

/// Weighted least squares of `points` on the basis functions `basis`; returns the
/// coefficients, the covariance diagonal and χ².
fn wls(points: &[SizePoint], basis: &[fn(f64) -> f64]) -> Result<(Vec<f64>, Vec<f64>, f64)> {
    let k = basis.len();
    let mut a = vec![vec![0.0; k]; k];
    let mut rhs = vec![0.0; k];
    for p in points {
        let w = 1.0 / (p.sigma * p.sigma);
        let row: Vec<f64> = basis.iter().map(|f| f(p.units)).collect();
        for i in 0..k {
            rhs[i] += w * row[i] * p.value;
            for j in 0..k {
                a[i][j] += w * row[i] * row[j];
            }
        }
    }
    let inv = invert(a).ok_or_else(|| {
        Error::Setting("the finite-size fit is singular: give cells of different sizes".into())
    })?;
    let coef: Vec<f64> = (0..k)
        .map(|i| (0..k).map(|j| inv[i][j] * rhs[j]).sum())
        .collect();
    let chi2 = points
        .iter()
        .map(|p| {
            let fit: f64 = basis.iter().zip(&coef).map(|(f, c)| c * f(p.units)).sum();
            ((p.value - fit) / p.sigma).powi(2)
        })
        .sum();
    Ok((coef, (0..k).map(|i| inv[i][i]).collect(), chi2))
}

/// Gauss–Jordan inverse with partial pivoting of a small matrix; `None` when singular.
fn invert(mut a: Vec<Vec<f64>>) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let scale = a
        .iter()
        .flatten()
        .fold(0.0f64, |m, x| m.max(x.abs()))
        .max(f64::MIN_POSITIVE);
    let mut inv: Vec<Vec<f64>> = (0..n)
        .map(|i| (0..n).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
        .collect();
    for col in 0..n {
        let pivot = (col..n).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[pivot][col].abs() <= 1e-13 * scale {
            return None;
        }
        a.swap(col, pivot);
        inv.swap(col, pivot);
        let d = a[col][col];
        for j in 0..n {
            a[col][j] /= d;
            inv[col][j] /= d;
        }
        for i in 0..n {
            if i != col {
                let f = a[i][col];
                for j in 0..n {
                    a[i][j] -= f * a[col][j];
                    inv[i][j] -= f * inv[col][j];
                }
            }
        }
    }
    Some(inv)
}

fn one(_: f64) -> f64 {
    1.0
}
fn inverse(n: f64) -> f64 {
    1.0 / n
}
fn log_over(n: f64) -> f64 {
    n.ln() / n
}

/// Fit and extrapolate. Needs at least two cells of different sizes, every σ positive.
pub fn extrapolate(points: &[SizePoint]) -> Result<SizeFit> {
    if points.len() < 2 {
        return Err(Error::Setting(
            "a finite-size extrapolation needs at least two cell sizes".into(),
        ));
    }
    if let Some(p) = points
        .iter()
        .find(|p| !(p.sigma > 0.0 && p.sigma.is_finite() && p.value.is_finite() && p.units > 1.0))
    {
        return Err(Error::Setting(format!(
            "a finite-size extrapolation needs finite values with positive error bars on cells of more than one formula unit (got {} ± {} on {} formula units)",
            p.value, p.sigma, p.units
        )));
    }
    let three: [fn(f64) -> f64; 3] = [one, inverse, log_over];
    let two: [fn(f64) -> f64; 2] = [one, inverse];
    let basis: &[fn(f64) -> f64] = if points.len() >= 3 { &three } else { &two };
    let (coef, var, chi2) = wls(points, basis)?;
    let dof = points.len() - basis.len();
    let scale = if dof > 0 {
        (chi2 / dof as f64).sqrt().max(1.0)
    } else {
        1.0
    };
    let two_term = if basis.len() == 3 {
        let (c2, v2, chi2_2) = wls(points, &two)?;
        let dof2 = points.len() - 2;
        let s2 = if dof2 > 0 {
            (chi2_2 / dof2 as f64).sqrt().max(1.0)
        } else {
            1.0
        };
        Some((c2[0], v2[0].sqrt() * s2))
    } else {
        None
    };
    Ok(SizeFit {
        value: coef[0],
        sigma: var[0].sqrt() * scale,
        coefficients: coef[1..].to_vec(),
        chi2,
        dof,
        two_term,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Points on an exact curve s∞ + a/N + b ln N/N are fitted back exactly, and the σ
    /// of an exactly determined fit is the linear propagation of the points' σ (checked
    /// against finite differences of the solution).
    #[test]
    fn recovers_the_curve_and_propagates_errors() {
        let (s, a, b) = (0.4105, -0.8, 0.5);
        let f = |n: f64| s + a / n + b * n.ln() / n;
        let ns = [128.0, 432.0, 1024.0];
        let pts: Vec<SizePoint> = ns
            .iter()
            .map(|&n| SizePoint {
                units: n,
                value: f(n),
                sigma: 1e-4,
            })
            .collect();
        let fit = extrapolate(&pts).unwrap();
        assert!((fit.value - s).abs() < 1e-12, "{}", fit.value);
        assert!((fit.coefficients[0] - a).abs() < 1e-9);
        assert!((fit.coefficients[1] - b).abs() < 1e-9);
        // σ(s∞)² = Σ (∂s∞/∂y_i)² σ²; the derivatives by perturbing one point at a time.
        let mut var = 0.0;
        for i in 0..3 {
            let mut q = pts.clone();
            q[i].value += 1e-6;
            let d = (extrapolate(&q).unwrap().value - fit.value) / 1e-6;
            var += (d * 1e-4).powi(2);
        }
        assert!(
            (fit.sigma - var.sqrt()).abs() < 1e-5 * var.sqrt(),
            "{} {}",
            fit.sigma,
            var.sqrt()
        );
    }

    #[test]
    fn two_cells_use_the_two_term_form_and_one_cell_is_refused() {
        let pts = [
            SizePoint {
                units: 100.0,
                value: 1.0 + 2.0 / 100.0,
                sigma: 1e-3,
            },
            SizePoint {
                units: 400.0,
                value: 1.0 + 2.0 / 400.0,
                sigma: 1e-3,
            },
        ];
        let fit = extrapolate(&pts).unwrap();
        assert!((fit.value - 1.0).abs() < 1e-12);
        assert!(fit.two_term.is_none());
        assert!(extrapolate(&pts[..1]).is_err());
    }
}
