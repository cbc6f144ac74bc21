//! Finite-size extrapolation of Monte Carlo values per formula unit to the infinite crystal.
//!
//! # What it computes
//!
//! Given ln W per formula unit s(N) ± σ(N) on periodic cells of N formula units, the
//! infinite-crystal value s∞ of a weighted least-squares fit
//!
//! s(N) = s∞ + a/N + b ln N / N
//!
//! On a periodic cell the count of an ice-rule model is Ω∞^N times a sum over the conserved
//! fluxes through the cell's faces, which brings the ln N / N and 1/N terms; this is the
//! form used for ice by Kolafa 2014 (J. Chem. Phys. 140, 204507).
//!
//! # Which form, and never a fit without a degree of freedom
//!
//! A fit with as many parameters as points passes through every point whatever the form,
//! so it says nothing about whether the form holds; it is never the value.
//!
//! * Four or more cells: the three-term form, with at least one degree of freedom.
//! * Three cells: the two-term form s∞ + a/N (one degree of freedom), with a systematic
//!   allowance for the dropped ln N/N term: the distance between its s∞ and that of the
//!   three-term form through the same three points, added in quadrature.
//! * Fewer cells: refused.
//!
//! # Uncertainty
//!
//! The covariance (XᵀWX)⁻¹ of the fit, W = diag(1/σ²), gives σ(s∞); it is scaled by
//! √(χ²/dof) when that exceeds 1 (the form does not fit within the error bars). The other
//! form on the same cells is reported beside it ([`SizeFit::alternative`]) to show how much
//! the form matters.
//!
//! # Arguments and returns
//!
//! [`count`], the counter's entry point, takes the sampled cells' estimates and returns the
//! infinite-crystal [`Estimate`] with the [`SizeFit`] beside it; [`extrapolate`] fits given
//! points.
//!
//! # Complexity
//!
//! O(cells), a 3×3 solve.

use crate::counters::{Context, Counted};
use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method};

/// Extrapolate Monte Carlo estimates of periodic cells (smallest first or in any order) to
/// the infinite crystal: the fit of [`extrapolate`] on their formula units, values and σ,
/// and s∞ as an [`Estimate`] of the infinite crystal whose time is that of the cells. Takes
/// no settings; the context is not watched (a 3×3 solve).
pub fn count(cells: &[Estimate], _config: &(), _context: &Context) -> Result<Counted<SizeFit>> {
    let points: Vec<SizePoint> = cells
        .iter()
        .map(|e| SizePoint {
            units: e.formula_units,
            value: e.ln_w_per_unit,
            sigma: e.sigma_ln_w.unwrap_or(0.0),
        })
        .collect();
    let fit = extrapolate(&points)?;
    let seconds = cells.iter().map(|e| e.seconds).sum();
    let estimate = Estimate::infinite(Method::MonteCarlo, fit.value, Some(fit.sigma), seconds);
    Ok(Counted::new(estimate, fit))
}

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
    /// Its 1σ: the fit's σ and the systematic allowance in quadrature.
    pub sigma: f64,
    /// The fit's own σ (scaled by √(χ²/dof) when above 1).
    pub sigma_fit: f64,
    /// Allowance for a term the fit leaves out (three cells only; 0 otherwise).
    pub systematic: f64,
    /// The fitted coefficients after s∞: a (of 1/N) and, in the three-term form, b (of
    /// ln N / N).
    pub coefficients: Vec<f64>,
    /// χ² of the fit.
    pub chi2: f64,
    /// Degrees of freedom (at least 1).
    pub dof: usize,
    /// s∞ and its σ from the other form on the same cells (the two-term form beside a
    /// three-term fit, the three-term form through three points beside a two-term fit).
    pub alternative: Option<(f64, f64)>,
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

    /// The other form, in words.
    pub fn alternative_form(&self) -> &'static str {
        if self.coefficients.len() == 2 {
            "s(N) = s∞ + a/N"
        } else {
            "s(N) = s∞ + a/N + b ln N/N"
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

/// A basis function of the fit, of the formula units N.
type Basis = fn(f64) -> f64;

/// The fewest cells an extrapolation takes.
pub const MIN_CELLS: usize = 3;

/// Fit and extrapolate. Needs at least [`MIN_CELLS`] cells of different sizes, every σ
/// positive.
pub fn extrapolate(points: &[SizePoint]) -> Result<SizeFit> {
    if points.len() < MIN_CELLS {
        return Err(Error::Setting(format!(
            "a finite-size extrapolation needs at least {MIN_CELLS} cell sizes ({} given): a fit with as many parameters as cells passes through every cell and cannot test its form",
            points.len()
        )));
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
    let three: [Basis; 3] = [one, inverse, log_over];
    let two: [Basis; 2] = [one, inverse];
    let fit = |basis: &[Basis]| -> Result<(Vec<f64>, f64, f64, usize)> {
        let (coef, var, chi2) = wls(points, basis)?;
        let dof = points.len() - basis.len();
        let scale = if dof > 0 {
            (chi2 / dof as f64).sqrt().max(1.0)
        } else {
            1.0
        };
        Ok((coef, var[0].sqrt() * scale, chi2, dof))
    };
    let (main, other): (&[Basis], &[Basis]) = if points.len() > 3 {
        (&three, &two)
    } else {
        (&two, &three)
    };
    let (coef, sigma_fit, chi2, dof) = fit(main)?;
    let (alt, alt_sigma, _, _) = fit(other)?;
    let systematic = if main.len() == 2 {
        (coef[0] - alt[0]).abs()
    } else {
        0.0
    };
    Ok(SizeFit {
        value: coef[0],
        sigma: sigma_fit.hypot(systematic),
        sigma_fit,
        systematic,
        coefficients: coef[1..].to_vec(),
        chi2,
        dof,
        alternative: Some((alt[0], alt_sigma)),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn points(ns: &[f64], f: impl Fn(f64) -> f64, sigma: f64) -> Vec<SizePoint> {
        ns.iter()
            .map(|&n| SizePoint {
                units: n,
                value: f(n),
                sigma,
            })
            .collect()
    }

    /// Points on an exact curve s∞ + a/N + b ln N/N are fitted back exactly by the
    /// three-term form, and its σ is the linear propagation of the points' σ (checked
    /// against finite differences of the solution).
    #[test]
    fn recovers_the_curve_and_propagates_errors() {
        let (s, a, b) = (0.4105, -0.8, 0.5);
        let f = |n: f64| s + a / n + b * n.ln() / n;
        let pts = points(&[128.0, 256.0, 432.0, 1024.0], f, 1e-4);
        let fit = extrapolate(&pts).unwrap();
        assert_eq!(fit.dof, 1);
        assert_eq!(fit.systematic, 0.0);
        assert!((fit.value - s).abs() < 1e-12, "{}", fit.value);
        assert!((fit.coefficients[0] - a).abs() < 1e-9);
        assert!((fit.coefficients[1] - b).abs() < 1e-9);
        // σ(s∞)² = Σ (∂s∞/∂y_i)² σ²; the derivatives by perturbing one point at a time.
        let mut var = 0.0;
        for i in 0..pts.len() {
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

    /// Three cells: the two-term form with one degree of freedom, and an allowance for the
    /// dropped ln N/N term large enough to cover the true s∞ of a curve that has one.
    #[test]
    fn three_cells_fit_two_terms_with_an_allowance_for_the_third() {
        let (s, a, b) = (0.4105, -0.8, 0.5);
        let f = |n: f64| s + a / n + b * n.ln() / n;
        let fit = extrapolate(&points(&[128.0, 432.0, 1024.0], f, 1e-5)).unwrap();
        assert_eq!(fit.form(), "s(N) = s∞ + a/N");
        assert_eq!(fit.dof, 1);
        let (three, _) = fit.alternative.unwrap();
        assert!(
            (three - s).abs() < 1e-12,
            "the three-term form through three points"
        );
        assert!((fit.systematic - (fit.value - s).abs()).abs() < 1e-12);
        assert!((fit.value - s).abs() <= fit.sigma);
    }

    /// Issue 11, item 3: a fit with as many parameters as cells ("χ² = 0.000 for 0 degrees
    /// of freedom") was presented as the value. Two cells are refused; from three on, every
    /// fit keeps at least one degree of freedom.
    #[test]
    fn issue11_no_fit_without_a_degree_of_freedom() {
        let f = |n: f64| 1.0 + 2.0 / n;
        let ns = [100.0, 150.0, 230.0, 400.0, 640.0, 1000.0];
        for k in 3..=ns.len() {
            let fit = extrapolate(&points(&ns[..k], f, 1e-3)).unwrap();
            assert!(fit.dof >= 1, "{k} cells: {} degrees of freedom", fit.dof);
            assert!((fit.value - 1.0).abs() < 1e-9);
        }
        let two = extrapolate(&points(&ns[..2], f, 1e-3)).unwrap_err();
        assert!(two.to_string().contains("at least 3"), "{two}");
        assert!(extrapolate(&points(&ns[..1], f, 1e-3)).is_err());
    }
}
