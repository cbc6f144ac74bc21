//! ∫ Cp d(ln T) over measured points: a monotone cubic interpolant and the trapezoid rule.
//!
//! # What it computes
//!
//! The entropy gained between measured temperatures, ∫ Cp/T dT = ∫ Cp d(ln T), from points
//! (Tᵢ, Cpᵢ) of one smooth stretch of data (no transition inside).
//!
//! # Method
//!
//! Cp is interpolated against u = ln T by the monotone piecewise-cubic Hermite interpolant of
//! Fritsch & Carlson (1980, SIAM J. Numer. Anal. 17, 238), with the derivatives of Fritsch &
//! Butland (1984, SIAM J. Sci. Stat. Comput. 5, 300): zero at a local extremum of the data,
//! otherwise the weighted harmonic mean of the neighbouring slopes; at the ends the
//! shape-preserving three-point formula. It never overshoots the data, so a steep rise in Cp
//! does not make the interpolant ring. Each cubic is integrated exactly: over an interval of
//! width h in u, ∫ = h (y₀ + y₁)/2 + h² (d₀ − d₁)/12, and over part of it by the integrated
//! Hermite basis. The trapezoid rule in u ([`Interpolant::linear`]) is kept
//! beside it as the quadrature-error estimate. With two points the interpolant is the straight line.
//!
//! # Arguments and returns
//!
//! Temperatures in K (strictly increasing, positive), Cp in J/(mol K); integrals in
//! J/(mol K).
//!
//! # Complexity
//!
//! Building an interpolant is linear in the number of points; an integral to a temperature
//! is then O(log n) and one sensitivity ∂S/∂Cpᵢ ([`monotone_sensitivity`]) O(1).

/// A piecewise-cubic Hermite interpolant of Cp against ln T over one stretch of data:
/// the monotone one ([`Interpolant::monotone`]) or the straight lines of the trapezoid rule
/// ([`Interpolant::linear`]).
#[derive(Clone, Debug)]
pub struct Interpolant {
    u: Vec<f64>,
    y: Vec<f64>,
    /// dCp/d(ln T) at the start of each interval.
    start: Vec<f64>,
    /// dCp/d(ln T) at the end of each interval.
    end: Vec<f64>,
    /// ∫ Cp d(ln T) from the first point to each point.
    cumulative: Vec<f64>,
}

impl Interpolant {
    /// The monotone interpolant through (tᵢ, cpᵢ); needs at least two points, temperatures
    /// strictly increasing (the caller has checked both).
    pub fn monotone(t_k: &[f64], cp: &[f64]) -> Interpolant {
        let u: Vec<f64> = t_k.iter().map(|t| t.ln()).collect();
        let d = derivatives(&u, cp);
        Interpolant::from_parts(u, cp.to_vec(), &d)
    }

    /// The Hermite interpolant through (uᵢ, yᵢ) with derivatives dᵢ.
    fn from_parts(u: Vec<f64>, y: Vec<f64>, d: &[f64]) -> Interpolant {
        let n = u.len();
        Interpolant::with_slopes(u, y, d[..n - 1].to_vec(), d[1..].to_vec())
    }

    fn with_slopes(u: Vec<f64>, y: Vec<f64>, start: Vec<f64>, end: Vec<f64>) -> Interpolant {
        let mut cumulative = vec![0.0; u.len()];
        for k in 0..u.len() - 1 {
            let h = u[k + 1] - u[k];
            cumulative[k + 1] =
                cumulative[k] + h * (y[k] + y[k + 1]) / 2.0 + h * h * (start[k] - end[k]) / 12.0;
        }
        Interpolant {
            u,
            y,
            start,
            end,
            cumulative,
        }
    }

    /// Straight lines in ln T between the points: its integral is the trapezoid rule.
    pub fn linear(t_k: &[f64], cp: &[f64]) -> Interpolant {
        let u: Vec<f64> = t_k.iter().map(|t| t.ln()).collect();
        let slopes: Vec<f64> = (0..u.len() - 1)
            .map(|k| (cp[k + 1] - cp[k]) / (u[k + 1] - u[k]))
            .collect();
        Interpolant::with_slopes(u, cp.to_vec(), slopes.clone(), slopes)
    }

    /// Cp at temperature t (K). Outside the data it continues as the straight line in ln T
    /// through the end point with the end slope (used only up to a transition).
    pub fn value(&self, t_k: f64) -> f64 {
        let u = t_k.ln();
        let n = self.u.len();
        if u <= self.u[0] {
            return self.y[0] + self.start[0] * (u - self.u[0]);
        }
        if u >= self.u[n - 1] {
            return self.y[n - 1] + self.end[n - 2] * (u - self.u[n - 1]);
        }
        let k = self.interval(u);
        let h = self.u[k + 1] - self.u[k];
        let s = (u - self.u[k]) / h;
        let (s2, s3) = (s * s, s * s * s);
        self.y[k] * (2.0 * s3 - 3.0 * s2 + 1.0)
            + h * self.start[k] * (s3 - 2.0 * s2 + s)
            + self.y[k + 1] * (3.0 * s2 - 2.0 * s3)
            + h * self.end[k] * (s3 - s2)
    }

    /// The interval k with u_k ≤ u < u_{k+1} (u inside the data).
    fn interval(&self, u: f64) -> usize {
        let k = self.u.partition_point(|&x| x <= u);
        k.saturating_sub(1).min(self.u.len() - 2)
    }

    /// ∫ Cp d(ln T) over interval k from its start to the fraction s ∈ [0, 1] of it.
    fn partial(&self, k: usize, s: f64) -> f64 {
        let h = self.u[k + 1] - self.u[k];
        let (s2, s3, s4) = (s * s, s * s * s, s * s * s * s);
        h * (self.y[k] * (s4 / 2.0 - s3 + s)
            + h * self.start[k] * (s4 / 4.0 - 2.0 * s3 / 3.0 + s2 / 2.0)
            + self.y[k + 1] * (s3 - s4 / 2.0)
            + h * self.end[k] * (s4 / 4.0 - s3 / 3.0))
    }

    /// ∫ Cp d(ln T) from the first point to each point: `out[i]` for point i (`out[0]` = 0).
    #[cfg(test)]
    pub fn cumulative(&self) -> Vec<f64> {
        self.cumulative.clone()
    }

    /// ∫ Cp d(ln T) from the first point to t (K); negative below the first point. Outside
    /// the data the end lines of [`Interpolant::value`] are integrated. O(log n).
    pub fn integral_to(&self, t_k: f64) -> f64 {
        self.integral_to_u(t_k.ln())
    }

    /// [`Interpolant::integral_to`] at u = ln T.
    fn integral_to_u(&self, u: f64) -> f64 {
        let n = self.u.len();
        if u <= self.u[0] {
            let du = u - self.u[0];
            return du * (self.y[0] + self.start[0] * du / 2.0);
        }
        let cumulative = &self.cumulative;
        if u >= self.u[n - 1] {
            let du = u - self.u[n - 1];
            return cumulative[n - 1] + du * (self.y[n - 1] + self.end[n - 2] * du / 2.0);
        }
        let k = self.interval(u);
        let s = (u - self.u[k]) / (self.u[k + 1] - self.u[k]);
        cumulative[k] + self.partial(k, s)
    }
}

/// ∫ Cp d(ln T) from the first point to the last by the trapezoid rule in ln T: the
/// closed sum that checks [`Interpolant::linear`] in the tests.
#[cfg(test)]
pub fn trapezoid(t_k: &[f64], cp: &[f64]) -> f64 {
    (1..t_k.len())
        .map(|i| (t_k[i] / t_k[i - 1]).ln() * (cp[i] + cp[i - 1]) / 2.0)
        .sum()
}

/// Fritsch–Butland derivatives with shape-preserving end conditions.
fn derivatives(u: &[f64], y: &[f64]) -> Vec<f64> {
    (0..u.len()).map(|k| derivative_at(u, y, k)).collect()
}

/// The Fritsch–Butland derivative at point k, reading points k − 1 … k + 1 (the end
/// conditions read the three points at their end).
fn derivative_at(u: &[f64], y: &[f64], k: usize) -> f64 {
    let n = u.len();
    let h = |j: usize| u[j + 1] - u[j];
    let delta = |j: usize| (y[j + 1] - y[j]) / h(j);
    if n == 2 {
        return delta(0);
    }
    if k == 0 {
        return end_slope(h(0), h(1), delta(0), delta(1));
    }
    if k == n - 1 {
        return end_slope(h(n - 2), h(n - 3), delta(n - 2), delta(n - 3));
    }
    let (a, b) = (delta(k - 1), delta(k));
    if a * b > 0.0 {
        let w1 = 2.0 * h(k) + h(k - 1);
        let w2 = h(k) + 2.0 * h(k - 1);
        (w1 + w2) / (w1 / a + w2 / b)
    } else {
        0.0
    }
}

/// ∂/∂cpᵢ of ∫ Cp d(ln T) from `lower` to `upper` (K) under the monotone interpolant of one
/// stretch, by the central difference of step `step`, in O(1): a change of cpᵢ moves the
/// interpolant only on the intervals that touch points i − 1 … i + 1 (whose derivatives
/// read cpᵢ) and, near an end, on the end intervals and end lines, so only those are
/// integrated again. `cp` is restored before return.
pub fn monotone_sensitivity(
    u: &[f64],
    cp: &mut [f64],
    i: usize,
    step: f64,
    lower: f64,
    upper: f64,
) -> f64 {
    let n = u.len();
    // Points whose value or derivative may change: i − 1 … i + 1, and the three at an end.
    let a = if i <= 3 { 0 } else { i - 2 };
    let b = if i + 3 >= n - 1 { n - 1 } else { i + 2 };
    let (lo, hi) = (lower.ln(), upper.ln());
    // Outside the window nothing changes: clamp the bounds to it, except at the ends of
    // the data, where the end lines change too.
    let clamp = |x: f64| {
        let x = if a > 0 { x.max(u[a]) } else { x };
        if b < n - 1 { x.min(u[b]) } else { x }
    };
    let (lo, hi) = (clamp(lo), clamp(hi));
    let window = |cp: &[f64]| -> f64 {
        let d: Vec<f64> = (a..=b).map(|k| derivative_at(u, cp, k)).collect();
        let p = Interpolant::from_parts(u[a..=b].to_vec(), cp[a..=b].to_vec(), &d);
        p.integral_to_u(hi) - p.integral_to_u(lo)
    };
    let original = cp[i];
    cp[i] = original + step;
    let up = window(cp);
    cp[i] = original - step;
    let down = window(cp);
    cp[i] = original;
    (up - down) / (2.0 * step)
}

/// The shape-preserving three-point end derivative (h0, δ0 the end interval).
fn end_slope(h0: f64, h1: f64, d0: f64, d1: f64) -> f64 {
    let d = ((2.0 * h0 + h1) * d0 - h0 * d1) / (h0 + h1);
    if d * d0 <= 0.0 {
        0.0
    } else if d0 * d1 <= 0.0 && d.abs() > 3.0 * d0.abs() {
        3.0 * d0
    } else {
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cubic_in_ln_t_pieces_integrate_exactly_for_linear_data() {
        // Cp = 2 + 3 ln T is reproduced exactly (all slopes equal); ∫ from 1 to e² of
        // (2 + 3u) du = 4 + 6 = 10 (closed form).
        let t: Vec<f64> = [0.0, 0.5, 1.1, 2.0].iter().map(|u: &f64| u.exp()).collect();
        let cp: Vec<f64> = t.iter().map(|t| 2.0 + 3.0 * t.ln()).collect();
        let p = Interpolant::monotone(&t, &cp);
        assert!((p.cumulative()[3] - 10.0).abs() < 1e-13);
        assert!((p.integral_to(1.0f64.exp()) - 3.5).abs() < 1e-13);
        assert!((p.value(0.7f64.exp()) - 4.1).abs() < 1e-13);
        assert!((trapezoid(&t, &cp) - 10.0).abs() < 1e-13);
    }

    #[test]
    fn partial_integral_meets_the_whole_at_the_ends_of_an_interval() {
        let t = [1.0, 2.0, 5.0, 6.0, 9.0];
        let cp = [0.1, 1.0, 1.2, 3.0, 3.1];
        let p = Interpolant::monotone(&t, &cp);
        let c = p.cumulative();
        for (i, &ti) in t.iter().enumerate() {
            assert!((p.integral_to(ti) - c[i]).abs() < 1e-13, "{i}");
        }
        // Monotone data give a monotone interpolant (Fritsch & Carlson 1980).
        let mut last = 0.0;
        for k in 0..=800 {
            let v = p.value(1.0 + 8.0 * k as f64 / 800.0);
            assert!(v >= last - 1e-12, "not monotone at step {k}");
            last = v;
        }
    }
}
