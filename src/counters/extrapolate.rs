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
//! The widths are split into families by W mod p (sublattice and parity effects make the
//! families converge differently, e.g. square ice on odd cylinders cannot carry zero arrow
//! flux). The period p is the smallest of step, 2·step, 3·step and 6·step at which the last
//! five values of every family change monotonically (one sign, shrinking steps); 2·step
//! when none does. For square ice and dimers that gives W mod 2, for the triangular
//! antiferromagnet W mod 3 (with a given spacing of 3, a single family).
//!
//! * **Critical** models (square ice, dimers, the triangular antiferromagnet) approach the
//!   limit as s(W) = s∞ + a₁/W² + a₂/W⁴ + … on periodic cylinders (conformal invariance:
//!   Blöte, Cardy & Nightingale 1986, Phys. Rev. Lett. 56, 742; Affleck 1986, Phys. Rev.
//!   Lett. 56, 746). In every family, the polynomial in 1/W² of the highest order q (up to
//!   5, and at most the widths of the largest width's family less two) through the q + 1
//!   largest widths and through the q + 1 widths before the last, and of order q − 1
//!   through the q largest widths, is evaluated at 1/W² = 0. A family's value is its
//!   order-q fit through its largest widths, its spread the largest distance of its other
//!   fits from it. The central family is the one with the smallest spread among those with
//!   all three fits; its value is the result. The uncertainty is its spread, widened to
//!   |v_f − v| − σ_f for every other family f whose value v_f lies further from it than its
//!   own spread σ_f — never a least-squares error. (The even dimer cylinders, whose
//!   corrections form a slowly converging series, then do not swamp the odd ones, which
//!   reach 1e-10; a family that truly disagrees still shows in the bar.) The central charge
//!   follows from a₁ = π c A / (6 u |t|²), with A the cell area, t the transverse cell
//!   vector and u the formula units per cell.
//! * **Gapped** models (hard squares) converge exponentially. In every family, Aitken's Δ²
//!   limit s₂ − Δ₂²/(Δ₂ − Δ₁) of its last three widths (when the differences keep one sign
//!   and shrink by a ratio below 0.95; else the last value) is its value, and its distance
//!   from the Δ² limit of the three widths before the last its spread. The families are
//!   then combined as for critical models. (Hard squares to width 30: the Δ² value is
//!   off by 6.5e-15 in ln W, the last width by 5.6e-13; the bar, 3.2e-14, exceeds the true
//!   error by a factor of about 5, as it does for every largest width from 10 to 31.)
//! * **Numerical precision**: each s(W) is converged only to the iteration tolerance; those
//!   errors, propagated through the central fit (its Lagrange weights at 1/W^e = 0, or the
//!   derivatives of Aitken's Δ²), are added to the uncertainty (`noise`). It matters where
//!   the fit amplifies them strongly: open strips in powers of 1/W through widths 15…20
//!   amplify by about 5·10⁵, cylinders in 1/W² through 14…24 by about 900.
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
    /// Residue class W mod [`Extrapolation::period`] of the family.
    pub family: usize,
    /// Correction terms (0 for the gapped rule: the last value).
    pub order: usize,
    /// Widths used.
    pub widths: Vec<usize>,
    /// Extrapolated s∞.
    pub value: f64,
    /// Coefficient of the leading correction, 1/W^e (critical fits).
    pub a1: Option<f64>,
}

/// The limit W → ∞ with its uncertainty.
#[derive(Clone, Debug)]
pub struct Extrapolation {
    /// s∞ per formula unit.
    pub value: f64,
    /// Uncertainty of s∞: the spread of the fits (widened by disagreeing families), plus
    /// `noise`.
    pub uncertainty: f64,
    /// The values' own numerical uncertainties propagated through the central fit.
    pub noise: f64,
    /// Scaling used (never `Auto`).
    pub scaling: Scaling,
    /// Coefficient of the leading correction of the central fit (critical only).
    pub a1: Option<f64>,
    /// Every fit made, the central one first.
    pub fits: Vec<Fit>,
    /// The families are the widths of each residue W mod `period`.
    pub period: usize,
    /// The corrections are powers of 1/W^exponent.
    pub exponent: i32,
    /// Whether every family's last values move monotonically with shrinking steps at this
    /// period (the signature of smooth sequences); false when no period tried gave that and
    /// the families are a fallback.
    pub smooth: bool,
    /// Whether the uncertainty was widened by another extrapolation of the same widths
    /// that disagreed with this one (see `transfer::from_widths`).
    pub widened: bool,
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

/// The polynomial in 1/W^e through the points, as coefficients (s∞, a₁, …).
fn polynomial(points: &[(usize, f64)], exponent: i32) -> Option<Vec<f64>> {
    let a = points
        .iter()
        .map(|&(w, _)| {
            let u = (w as f64).powi(-exponent);
            (0..points.len()).map(|k| u.powi(k as i32)).collect()
        })
        .collect();
    solve(a, points.iter().map(|p| p.1).collect())
}

/// Extrapolate s(W) of periodic cylinders (corrections in powers of 1/W²) to W → ∞.
pub fn extrapolate(
    points: &[(usize, f64)],
    step: usize,
    scaling: Scaling,
) -> Result<Extrapolation> {
    extrapolate_in(points, &[], step, scaling, 2)
}

/// [`extrapolate`] with critical corrections in powers of 1/W^`exponent`: 2 on periodic
/// cylinders, 1 on open strips (the edges add a 1/W term), 3 for the leading term on
/// periodic prisms of a three-dimensional crystal.
///
/// `errors` (empty, or one per point) are the numerical uncertainties of the values; they
/// are propagated through the central fit (polynomial fits amplify them: through widths
/// 15…20 in powers of 1/W by about 5·10⁵) and added to the uncertainty.
pub(crate) fn extrapolate_in(
    points: &[(usize, f64)],
    errors: &[f64],
    step: usize,
    scaling: Scaling,
    exponent: i32,
) -> Result<Extrapolation> {
    let error_of: std::collections::HashMap<usize, f64> =
        points.iter().zip(errors).map(|(p, &e)| (p.0, e)).collect();
    let propagated = |fit: &Fit| -> f64 {
        let values: Vec<f64> = fit
            .widths
            .iter()
            .map(|w| points.iter().find(|p| p.0 == *w).map_or(0.0, |p| p.1))
            .collect();
        weights(fit, &values, exponent)
            .iter()
            .zip(&fit.widths)
            .map(|(c, w)| c.abs() * error_of.get(w).copied().unwrap_or(0.0))
            .sum()
    };
    let mut points = points.to_vec();
    points.sort_by_key(|p| p.0);
    points.dedup_by_key(|p| p.0);
    if points.len() < 2 {
        return Err(Error::Cells(
            "an extrapolation needs at least two widths".into(),
        ));
    }
    let (period, smooth) = family_period(&points, step.max(1))?;
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
    if scaling == Scaling::Gapped {
        let mut fits = Vec::new();
        let mut own = Vec::new();
        for (r, f) in &families {
            let n = f.len();
            let last = f[n - 1];
            let step_back = if n >= 2 {
                (last.1 - f[n - 2].1).abs()
            } else {
                0.0
            };
            match (n >= 3).then(|| aitken(&f[n - 3..])).flatten() {
                Some(v) => {
                    fits.push(Fit {
                        family: *r,
                        order: 1,
                        widths: f[n - 3..].iter().map(|p| p.0).collect(),
                        value: v,
                        a1: None,
                    });
                    let before = (n >= 4).then(|| aitken(&f[n - 4..n - 1])).flatten();
                    if let Some(w) = before {
                        fits.push(Fit {
                            family: *r,
                            order: 1,
                            widths: f[n - 4..n - 1].iter().map(|p| p.0).collect(),
                            value: w,
                            a1: None,
                        });
                    }
                    let spread = before.map_or((v - last.1).abs(), |w| (v - w).abs());
                    own.push((*r, v, spread, if before.is_some() { 3 } else { 1 }));
                }
                None => {
                    fits.push(Fit {
                        family: *r,
                        order: 0,
                        widths: vec![last.0],
                        value: last.1,
                        a1: None,
                    });
                    own.push((*r, last.1, step_back, 1));
                }
            }
        }
        let (family, value, uncertainty) = combine(&own);
        fits.sort_by_key(|x| x.family != family);
        let noise = propagated(&fits[0]);
        return Ok(Extrapolation {
            value,
            uncertainty: uncertainty + noise,
            noise,
            scaling,
            a1: None,
            fits,
            period,
            exponent,
            smooth,
            widened: false,
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
                if let Some(c) = polynomial(window, exponent) {
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
    // Per family: its value (the highest order through its largest widths) and its own
    // spread (the distance of its other fits; the size of the correction when it has one).
    let own: Vec<(usize, f64, f64, usize)> = families
        .iter()
        .filter_map(|(r, f)| {
            let mine: Vec<&Fit> = fits.iter().filter(|x| x.family == *r).collect();
            let first = mine.first()?;
            let spread = if mine.len() > 1 {
                mine.iter()
                    .skip(1)
                    .map(|x| (x.value - first.value).abs())
                    .fold(0.0, f64::max)
            } else {
                (first.value - f[f.len() - 1].1).abs()
            };
            Some((*r, first.value, spread, mine.len()))
        })
        .collect();
    let (family, _, uncertainty) = combine(&own);
    fits.sort_by_key(|x| x.family != family);
    let central = fits[0].clone();
    let noise = propagated(&central);
    Ok(Extrapolation {
        value: central.value,
        uncertainty: uncertainty + noise,
        noise,
        scaling,
        a1: central.a1,
        fits,
        period,
        exponent,
        smooth,
        widened: false,
    })
}

/// The combination of the families (family, value, spread, fits made; 3 = every fit): the
/// central family is the one with the smallest spread among those with every fit (the
/// first, the largest width's, when none has); the uncertainty is its spread, widened to
/// |v_f − v| − σ_f by every other family f. Returns (central family, value, uncertainty).
fn combine(own: &[(usize, f64, f64, usize)]) -> (usize, f64, f64) {
    let complete = own
        .iter()
        .filter(|o| o.3 == 3)
        .min_by(|a, b| a.2.total_cmp(&b.2));
    let central = complete.unwrap_or(&own[0]);
    let uncertainty = own
        .iter()
        .filter(|o| o.0 != central.0)
        .map(|o| (o.1 - central.1).abs() - o.2)
        .fold(central.2, f64::max);
    (central.0, central.1, uncertainty)
}

/// d(value of the fit)/d(value at each of its widths): the Lagrange weights at 1/W^e = 0
/// for a polynomial fit, the derivatives of Aitken's Δ² for a gapped one (`values` are the
/// fit's inputs), 1 for the last value.
fn weights(fit: &Fit, values: &[f64], exponent: i32) -> Vec<f64> {
    match (fit.a1, fit.order, values) {
        (None, 1, &[s0, s1, s2]) => {
            let (u, d) = (s2 - s1, s2 - 2.0 * s1 + s0);
            let d2 = d * d;
            vec![
                u * u / d2,
                (2.0 * u * d - 2.0 * u * u) / d2,
                1.0 - (2.0 * u * d - u * u) / d2,
            ]
        }
        (None, _, _) => vec![1.0; values.len()],
        _ => {
            let x: Vec<f64> = fit
                .widths
                .iter()
                .map(|&w| (w as f64).powi(-exponent))
                .collect();
            (0..x.len())
                .map(|i| {
                    (0..x.len())
                        .filter(|&j| j != i)
                        .map(|j| x[j] / (x[j] - x[i]))
                        .product()
                })
                .collect()
        }
    }
}

/// Aitken's Δ² limit of three values converging geometrically (successive differences of
/// one sign shrinking by a ratio below 0.95); `None` otherwise.
fn aitken(p: &[(usize, f64)]) -> Option<f64> {
    let (d1, d2) = (p[1].1 - p[0].1, p[2].1 - p[1].1);
    let r = d2 / d1;
    (d1 != 0.0 && r > 0.0 && r < 0.95).then(|| p[2].1 - d2 * d2 / (d2 - d1))
}

/// The period of the families and whether it is smooth: the smallest of step, 2·step,
/// 3·step and 6·step at which the last values of every family with at least three widths
/// change monotonically (one sign, shrinking steps), the signature of one smooth sequence.
/// When no family has three widths at any of them (too few widths to tell), 2·step (not
/// smooth), unless that leaves every family a single width. When some period was judged
/// and none is smooth, an error: the widths do not fall into families that can be
/// extrapolated.
fn family_period(points: &[(usize, f64)], step: usize) -> Result<(usize, bool)> {
    // Some(true): every judged family smooth; Some(false): one is not; None: none judged.
    let smooth = |period: usize| -> Option<bool> {
        let mut classes: Vec<usize> = points.iter().map(|p| p.0 % period).collect();
        classes.sort_unstable();
        classes.dedup();
        let mut judged = false;
        for r in classes {
            let values: Vec<f64> = points
                .iter()
                .filter(|p| p.0 % period == r)
                .map(|p| p.1)
                .collect();
            // The smallest width of a family is left out when the family has more than
            // MIN_JUDGED widths: the narrowest strips are furthest from the asymptotic law.
            let keep = if values.len() > MIN_JUDGED {
                (values.len() - 1).min(SMOOTH_POINTS)
            } else {
                values.len()
            };
            let tail = &values[values.len() - keep..];
            if tail.len() < MIN_JUDGED {
                continue;
            }
            judged = true;
            let d: Vec<f64> = tail.windows(2).map(|w| w[1] - w[0]).collect();
            // A family that no longer changes (free variables, a gapped model converged to
            // rounding) is as smooth as a family can be.
            let scale = tail.iter().fold(1.0f64, |m, v| m.max(v.abs()));
            if d.iter().all(|x| x.abs() <= FLAT * scale) {
                continue;
            }
            let one_sign = d.iter().all(|&x| x > 0.0) || d.iter().all(|&x| x < 0.0);
            let shrinking = d.windows(2).all(|w| w[1].abs() < w[0].abs());
            if !(one_sign && shrinking) {
                return Some(false);
            }
        }
        judged.then_some(true)
    };
    let split_pays = {
        let mut classes: Vec<usize> = points.iter().map(|p| p.0 % (2 * step)).collect();
        classes.sort_unstable();
        classes.windows(2).any(|w| w[0] == w[1])
    };
    let periods = PERIODS.map(|k| k * step);
    let verdicts: Vec<Option<bool>> = periods.iter().map(|&p| smooth(p)).collect();
    if let Some(i) = verdicts.iter().position(|v| *v == Some(true)) {
        return Ok((periods[i], true));
    }
    if verdicts.contains(&Some(false)) {
        let widths: Vec<String> = points.iter().map(|p| p.0.to_string()).collect();
        return Err(Error::Cells(format!(
            "the widths {} do not fall into families that converge smoothly (widths W mod {} \
             tried): their extrapolation cannot be trusted; compute more widths (for a lattice \
             with a sublattice period, widths that are multiples of it)",
            widths.join(", "),
            periods.map(|p| p.to_string()).join(", ")
        )));
    }
    Ok((if split_pays { 2 * step } else { step }, false))
}

/// Relative change below which successive values of a family count as equal.
const FLAT: f64 = 1e-13;

/// The periods tried for the families, in units of the width step.
const PERIODS: [usize; 4] = [1, 2, 3, 6];

/// Fewest values of a family for its smoothness to be judged (two differences).
const MIN_JUDGED: usize = 3;

/// Values at the end of a family that must change monotonically for it to count as one
/// smooth sequence.
const SMOOTH_POINTS: usize = 5;

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
    fn smooth_residue_classes_become_one_family_each() {
        // Three classes W mod 3 with their own 1/W² coefficients, one limit: with step 1
        // the families are found to be W mod 3 and every fit gives the limit.
        let points: Vec<(usize, f64)> = (2..=20)
            .map(|w| {
                let u = 1.0 / (w * w) as f64;
                (w, 0.3 + [0.45, -0.2, -0.1][w % 3] * u + 0.05 * u * u)
            })
            .collect();
        let e = extrapolate(&points, 1, Scaling::Critical).unwrap();
        assert_eq!(e.period, 3);
        assert!((e.value - 0.3).abs() < 1e-12 && e.uncertainty < 1e-10);
        // Steps of 3 through one class: one family, period 3.
        let every_third: Vec<(usize, f64)> =
            points.iter().copied().filter(|p| p.0 % 3 == 0).collect();
        assert_eq!(
            extrapolate(&every_third, 3, Scaling::Critical)
                .unwrap()
                .period,
            3
        );
    }

    #[test]
    fn a_family_that_disagrees_widens_the_error_bar() {
        // Even and odd widths with exact polynomials but limits 1e-6 apart: each family
        // alone has no spread, so the bar must come from their disagreement.
        let points: Vec<(usize, f64)> = (4..=20)
            .map(|w| {
                let u = 1.0 / (w * w) as f64;
                let limit = if w % 2 == 0 { 0.4 } else { 0.4 + 1e-6 };
                (w, limit + [0.5, -0.25][w % 2] * u)
            })
            .collect();
        let e = extrapolate(&points, 1, Scaling::Critical).unwrap();
        assert_eq!(e.period, 2);
        assert!(
            e.uncertainty >= 0.99e-6 && e.uncertainty < 1.01e-6,
            "{}",
            e.uncertainty
        );
    }

    #[test]
    fn geometric_tails_are_summed_by_aitken() {
        // Two families with their own amplitudes and a faster second term: the Δ² limit
        // is far closer than the last width, and its bar covers the error.
        let points: Vec<(usize, f64)> = (6..=24)
            .map(|w| {
                let a = [0.3, -0.2][w % 2];
                (
                    w,
                    1.0 + a * 0.6f64.powi(w as i32) + 0.05 * 0.3f64.powi(w as i32),
                )
            })
            .collect();
        let e = extrapolate(&points, 1, Scaling::Auto).unwrap();
        assert_eq!((e.scaling, e.period), (Scaling::Gapped, 2));
        let error = (e.value - 1.0).abs();
        let last = (points[points.len() - 1].1 - 1.0).abs();
        assert!(error <= e.uncertainty, "{} ± {}", e.value, e.uncertainty);
        assert!(
            e.uncertainty < last / 100.0,
            "{} against {last}",
            e.uncertainty
        );
    }

    #[test]
    fn the_values_own_errors_are_propagated_through_the_central_fit() {
        // Moving one input by δ moves the result by its weight times δ, and the noise term
        // is Σ |weight| · error: check both for a critical and a gapped series.
        for (gapped, exponent) in [(false, 2), (false, 1), (true, 2)] {
            let value = |w: usize| {
                if gapped {
                    1.0 + 0.3 * 0.5f64.powi(w as i32)
                } else {
                    0.4 + 0.3 / (w as f64).powi(exponent)
                }
            };
            let points: Vec<(usize, f64)> = (8..=20).step_by(2).map(|w| (w, value(w))).collect();
            let scaling = if gapped {
                Scaling::Gapped
            } else {
                Scaling::Critical
            };
            let plain = extrapolate_in(&points, &[], 2, scaling, exponent).unwrap();
            assert_eq!(plain.noise, 0.0);
            let errors = vec![1e-9; points.len()];
            let noisy = extrapolate_in(&points, &errors, 2, scaling, exponent).unwrap();
            let fit = &noisy.fits[0];
            let inputs: Vec<f64> = fit.widths.iter().map(|&w| value(w)).collect();
            let w = weights(fit, &inputs, exponent);
            assert!((w.iter().sum::<f64>() - 1.0).abs() < 1e-6, "{w:?}");
            let expected: f64 = w.iter().map(|c| c.abs() * 1e-9).sum();
            assert!((noisy.noise - expected).abs() < 1e-12 * expected.max(1.0));
            assert!((noisy.uncertainty - plain.uncertainty - noisy.noise).abs() < 1e-15);
            // Finite difference on the last width of the central fit.
            let last = *fit.widths.last().unwrap();
            let moved: Vec<(usize, f64)> = points
                .iter()
                .map(|&(x, v)| (x, if x == last { v + 1e-10 } else { v }))
                .collect();
            let shifted = extrapolate_in(&moved, &[], 2, scaling, exponent).unwrap();
            let slope = (shifted.value - plain.value) / 1e-10;
            let want = w[w.len() - 1];
            assert!(
                (slope - want).abs() < 1e-3 * want.abs().max(1.0),
                "gapped {gapped}, exponent {exponent}: slope {slope}, weight {want}"
            );
        }
    }

    #[test]
    fn a_family_is_judged_without_its_narrowest_width() {
        // Three classes W mod 3 with their own 1/W² terms; the narrowest width of one
        // class is far off its law (as width 2 of the triangular 4-colourings is). Its
        // family is judged on the widths after it, and period 3 is found.
        let mut points: Vec<(usize, f64)> = (2..=11)
            .map(|w| {
                let u = 1.0 / (w * w) as f64;
                (w, 0.38 + [0.8, -1.2, -0.4][w % 3] * u)
            })
            .collect();
        points[0].1 += 0.05;
        let e = extrapolate(&points, 1, Scaling::Critical).unwrap();
        assert_eq!(e.period, 3);
        assert!(e.smooth);
        assert!(
            (e.value - 0.38).abs() <= e.uncertainty,
            "{} ± {}",
            e.value,
            e.uncertainty
        );
    }

    #[test]
    fn widths_without_smooth_families_are_refused() {
        // Values that move up and down at every period tried: no extrapolation, an error.
        let points: Vec<(usize, f64)> = (2..=13)
            .map(|w| (w, 0.3 + 0.01 * ((w * w * 7919) % 13) as f64))
            .collect();
        let e = extrapolate(&points, 1, Scaling::Auto).unwrap_err();
        assert!(e.to_string().contains("smoothly"), "{e}");
        // Too few widths to tell (two): the fallback families, flagged as not smooth.
        let two = extrapolate(&[(1, 0.5), (2, 0.45)], 1, Scaling::Critical).unwrap();
        assert!(!two.smooth);
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
