//! Extrapolation of strip entropies s(W) = ln W per formula unit to infinite width.
//!
//! # What it computes
//!
//! From the values s(W) of strips or cylinders of several widths W, the limit s∞ with an
//! uncertainty taken from the spread of several extrapolations, and — for critical models —
//! the central charge as a diagnostic.
//!
//! # Method
//!
//! The widths are split into families by W mod (2·step) (sublattice and parity effects make
//! the families converge differently, e.g. square ice on odd cylinders cannot carry zero
//! arrow flux).
//!
//! * **Critical** models (square ice, dimers, the triangular antiferromagnet) approach the
//!   limit as s(W) = s∞ + a₁/W² + a₂/W⁴ + … on periodic cylinders (conformal invariance:
//!   Blöte, Cardy & Nightingale 1986, Phys. Rev. Lett. 56, 742; Affleck 1986, Phys. Rev.
//!   Lett. 56, 746). In every family, the polynomial in 1/W² of the highest order p (up to
//!   5, and at most the family's widths less two) through the p + 1 largest widths and
//!   through the p + 1 widths before the last, and of order p − 1 through the p largest
//!   widths, is evaluated at 1/W² = 0. The central value is the order-p fit ending at the
//!   largest width; the uncertainty is the largest distance from it of every other fit
//!   (order, window and family) — never a least-squares error. The central charge follows from a₁ = π c A / (6 u |t|²), with
//!   A the cell area, t the transverse cell vector and u the formula units per cell.
//! * **Gapped** models (hard squares) converge exponentially: the value is s at the largest
//!   width; the uncertainty is the larger of its last difference within its family and its
//!   distance from the largest width of every other family.
//! * **Automatic** choice: the local exponent p = ln(Δ_{k−1}/Δ_k) / ln(W_k/W_{k−1}) of the
//!   last differences within the family of the largest width is about 3 for a 1/W² law and
//!   grows without bound for exponential convergence; above 8 the model is taken as gapped.
//!
//! # Arguments and returns
//!
//! [`extrapolate`] takes (W, s(W)) pairs, the width step and the [`Scaling`]; it returns an
//! [`Extrapolation`] (s∞, uncertainty, the scaling used, a₁, and every fit made).
//!
//! # Complexity
//!
//! Negligible: a few 4×4 linear systems per family.

use crate::error::{Error, Result};

/// How s(W) approaches its limit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Scaling {
    /// Decide from the last differences.
    Auto,
    /// s∞ + a₁/W² + a₂/W⁴ + … (conformal invariance).
    Critical,
    /// Exponential convergence.
    Gapped,
}

/// One extrapolation of one family.
#[derive(Clone, Debug)]
pub struct Fit {
    /// Residue class W mod (2·step) of the family.
    pub family: usize,
    /// Correction terms (0 for the gapped rule: the last value).
    pub order: usize,
    /// Widths used.
    pub widths: Vec<usize>,
    /// Extrapolated s∞.
    pub value: f64,
    /// Coefficient of 1/W² (critical fits).
    pub a1: Option<f64>,
}

/// The limit W → ∞ with its uncertainty.
#[derive(Clone, Debug)]
pub struct Extrapolation {
    /// s∞ per formula unit.
    pub value: f64,
    /// Uncertainty of s∞ (spread of the fits, or the last difference).
    pub uncertainty: f64,
    /// Scaling used (never `Auto`).
    pub scaling: Scaling,
    /// Coefficient of 1/W² of the central fit (critical only).
    pub a1: Option<f64>,
    /// Every fit made, the central one first.
    pub fits: Vec<Fit>,
}

/// Highest order of the polynomial in 1/W² (five correction terms: with square-ice widths
/// up to 22 the order-5 fits through the largest widths agree to a few 1e-11, order 3 only
/// to a few 1e-9).
const MAX_ORDER: usize = 5;

/// Solve a small dense system by Gaussian elimination with partial pivoting.
fn solve(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    for col in 0..n {
        let p = (col..n).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[p][col] == 0.0 {
            return None;
        }
        a.swap(col, p);
        b.swap(col, p);
        let pivot = a[col].clone();
        for r in col + 1..n {
            let f = a[r][col] / pivot[col];
            for (x, &p) in a[r].iter_mut().zip(&pivot).skip(col) {
                *x -= f * p;
            }
            b[r] -= f * b[col];
        }
    }
    let mut x = vec![0.0; n];
    for r in (0..n).rev() {
        let s: f64 = (r + 1..n).map(|c| a[r][c] * x[c]).sum();
        x[r] = (b[r] - s) / a[r][r];
    }
    Some(x)
}

/// The polynomial in 1/W² through the points, as coefficients (s∞, a₁, …).
fn polynomial(points: &[(usize, f64)]) -> Option<Vec<f64>> {
    let a = points
        .iter()
        .map(|&(w, _)| {
            let u = 1.0 / (w as f64 * w as f64);
            (0..points.len()).map(|k| u.powi(k as i32)).collect()
        })
        .collect();
    solve(a, points.iter().map(|p| p.1).collect())
}

/// Extrapolate s(W) to W → ∞.
pub fn extrapolate(
    points: &[(usize, f64)],
    step: usize,
    scaling: Scaling,
) -> Result<Extrapolation> {
    let mut points = points.to_vec();
    points.sort_by_key(|p| p.0);
    points.dedup_by_key(|p| p.0);
    if points.len() < 2 {
        return Err(Error::Cells(
            "an extrapolation needs at least two widths".into(),
        ));
    }
    let period = 2 * step.max(1);
    let largest = points.last().expect("two points").0;
    let mut families: Vec<(usize, Vec<(usize, f64)>)> = Vec::new();
    for &p in &points {
        let r = p.0 % period;
        match families.iter_mut().find(|f| f.0 == r) {
            Some(f) => f.1.push(p),
            None => families.push((r, vec![p])),
        }
    }
    // The family of the largest width first.
    families.sort_by_key(|f| (f.0 != largest % period, f.0));
    let main = &families[0].1;
    let scaling = match scaling {
        Scaling::Auto => {
            if main.len() >= 3 {
                let k = main.len() - 1;
                let d1 = (main[k - 1].1 - main[k - 2].1).abs();
                let d2 = (main[k].1 - main[k - 1].1).abs();
                let exponent = (d1 / d2).ln() / (main[k].0 as f64 / main[k - 1].0 as f64).ln();
                if d2 == 0.0 || exponent > 8.0 {
                    Scaling::Gapped
                } else {
                    Scaling::Critical
                }
            } else {
                Scaling::Critical
            }
        }
        s => s,
    };
    let central_value = main.last().expect("a family has a point").1;
    if scaling == Scaling::Gapped {
        let mut fits = Vec::new();
        for (r, f) in &families {
            let last = f[f.len() - 1];
            fits.push(Fit {
                family: *r,
                order: 0,
                widths: vec![last.0],
                value: last.1,
                a1: None,
            });
        }
        let mut uncertainty = fits
            .iter()
            .map(|f| (f.value - central_value).abs())
            .fold(0.0, f64::max);
        if main.len() >= 2 {
            uncertainty = uncertainty.max((main[main.len() - 1].1 - main[main.len() - 2].1).abs());
        }
        return Ok(Extrapolation {
            value: central_value,
            uncertainty,
            scaling,
            a1: None,
            fits,
        });
    }
    // The highest order leaves at least one width of the family unused (so that the
    // window can move back by one), and at most MAX_ORDER.
    let top = (main.len().saturating_sub(2)).clamp(1, MAX_ORDER);
    let mut fits = Vec::new();
    for (r, f) in &families {
        for order in (top.saturating_sub(1).max(1)..=top).rev() {
            for back in 0..2 {
                // One order less only through the largest widths.
                if f.len() < order + 1 + back || (order < top && back > 0) {
                    continue;
                }
                let end = f.len() - back;
                let window = &f[end - order - 1..end];
                if let Some(c) = polynomial(window) {
                    fits.push(Fit {
                        family: *r,
                        order,
                        widths: window.iter().map(|p| p.0).collect(),
                        value: c[0],
                        a1: Some(c[1]),
                    });
                }
            }
        }
    }
    if fits.is_empty() {
        return Err(Error::Cells(
            "the widths give no extrapolation; give at least two widths of one family".into(),
        ));
    }
    let central = fits[0].clone();
    let mut uncertainty = fits
        .iter()
        .skip(1)
        .map(|f| (f.value - central.value).abs())
        .fold(0.0, f64::max);
    if fits.len() == 1 {
        // A single fit has no spread: fall back to the size of its own correction.
        uncertainty = (central.value - central_value).abs();
    }
    Ok(Extrapolation {
        value: central.value,
        uncertainty,
        scaling,
        a1: central.a1,
        fits,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_polynomials_in_inverse_square_width_are_reproduced() {
        // s(W) = 0.4 + 0.3/W² − 0.2/W⁴: every fit of order ≥ 2 gives 0.4 exactly.
        let points: Vec<(usize, f64)> = (4..=12)
            .map(|w| {
                let u = 1.0 / (w * w) as f64;
                (w, 0.4 + 0.3 * u - 0.2 * u * u)
            })
            .collect();
        let e = extrapolate(&points, 1, Scaling::Critical).unwrap();
        assert!((e.value - 0.4).abs() < 1e-12, "{}", e.value);
        assert!(e.uncertainty < 1e-10);
        assert!((e.a1.unwrap() - 0.3).abs() < 1e-8);
    }

    #[test]
    fn exponential_convergence_is_recognised() {
        let points: Vec<(usize, f64)> = (2..=12).map(|w| (w, 1.0 + (-(w as f64)).exp())).collect();
        let e = extrapolate(&points, 1, Scaling::Auto).unwrap();
        assert_eq!(e.scaling, Scaling::Gapped);
        assert!((e.value - 1.0).abs() <= e.uncertainty);
        let critical: Vec<(usize, f64)> =
            (2..=12).map(|w| (w, 1.0 + 1.0 / (w * w) as f64)).collect();
        assert_eq!(
            extrapolate(&critical, 1, Scaling::Auto).unwrap().scaling,
            Scaling::Critical
        );
    }
}
