//! A starting vector for the power iteration of a column operator by Arnoldi's method with
//! explicit restarts.
//!
//! # What it computes
//!
//! From a positive vector x₀, an approximation of the eigenvector of the eigenvalue of
//! largest real part of a nonnegative operator T (for a nonnegative matrix that is the
//! Perron root λ, and never −λ or a complex eigenvalue of modulus λ: the guard against
//! periodic spectra). The caller finishes with shifted power iteration, which certifies λ
//! by the Collatz–Wielandt bracket; this module only saves iterations.
//!
//! # Method
//!
//! k steps of Arnoldi's method (modified Gram–Schmidt, applied twice) build an orthonormal
//! basis V of the Krylov space span{x, T x, …, T^(k−1) x} and the k × k upper Hessenberg
//! matrix H = Vᵀ T V. The Ritz value of largest real part θ and its vector z come from power
//! iteration on H + cI with c = |H|∞ (the largest |θ + c| belongs to the largest real part),
//! and the Ritz vector V z is the next start (explicit restart). The relative residual
//! |h_{k+1,k} z_k| / θ says when to stop. A restart whose small problem does not settle
//! (a zero or non-finite iterate, or a Ritz vector with no positive part) ends the
//! acceleration; the power iteration then continues from the last vector.
//!
//! # Arguments and returns
//!
//! [`restarted`] takes the operator as a closure, the start, the basis size k, the number
//! of restarts allowed, the residual to reach and a stop test (asked before every
//! application: a deadline or an interrupt); it returns the vector (made nonnegative,
//! L1-normalised) and the number of operator applications used.
//!
//! # Complexity
//!
//! k applications of T and O(k² n) vector operations per restart; memory k + 1 vectors.
//! All sums run in a fixed order, so the result does not depend on the thread count.
//!
//! # Reference
//!
//! W. E. Arnoldi 1951, Quart. Appl. Math. 9, 17; restarted Arnoldi as in Y. Saad 1980,
//! Linear Algebra Appl. 34, 269 (from memory).

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn norm(a: &[f64]) -> f64 {
    dot(a, a).sqrt()
}

/// The eigenpair of largest real part of a small dense matrix (rows), by power iteration
/// on H + cI; `None` when it breaks down.
fn dominant(h: &[Vec<f64>]) -> Option<(f64, Vec<f64>)> {
    let k = h.len();
    let c = h
        .iter()
        .map(|r| r.iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max);
    let mut z = vec![1.0 / (k as f64).sqrt(); k];
    let mut theta = f64::NAN;
    for _ in 0..20_000 {
        let mut w: Vec<f64> = (0..k).map(|i| dot(&h[i], &z) + c * z[i]).collect();
        let n = norm(&w);
        if n == 0.0 || !n.is_finite() {
            return None;
        }
        let next = dot(&w, &z) - c;
        for v in w.iter_mut() {
            *v /= n;
        }
        let change: f64 = w.iter().zip(&z).map(|(a, b)| (a - b).abs()).sum();
        z = w;
        if change < 1e-14 && (next - theta).abs() <= 1e-15 * next.abs() {
            return Some((next, z));
        }
        theta = next;
    }
    // Not settled to rounding: the caller's residual test decides.
    theta.is_finite().then_some((theta, z))
}

/// Restarted Arnoldi from `start`; returns the improved vector and the applications used.
pub fn restarted(
    apply: &mut dyn FnMut(&[f64], &mut Vec<f64>),
    start: &[f64],
    basis: usize,
    restarts: usize,
    residual: f64,
    stop: &dyn Fn() -> bool,
) -> (Vec<f64>, usize) {
    let n = start.len();
    let mut x = start.to_vec();
    let mut applied = 0;
    let mut w = Vec::with_capacity(n);
    for _ in 0..restarts {
        let s = norm(&x);
        if s == 0.0 {
            break;
        }
        let mut v: Vec<Vec<f64>> = vec![x.iter().map(|a| a / s).collect()];
        let mut h = vec![vec![0.0; basis]; basis + 1];
        let mut size = basis;
        for j in 0..basis {
            if stop() {
                return (x, applied);
            }
            apply(&v[j], &mut w);
            applied += 1;
            for _ in 0..2 {
                for (i, vi) in v.iter().enumerate() {
                    let p = dot(vi, &w);
                    h[i][j] += p;
                    for (a, b) in w.iter_mut().zip(vi) {
                        *a -= p * b;
                    }
                }
            }
            let r = norm(&w);
            h[j + 1][j] = r;
            if r <= 1e-14 * h[j][j].abs().max(1e-300) {
                // An invariant subspace: its Ritz values are exact.
                size = j + 1;
                break;
            }
            v.push(w.iter().map(|a| a / r).collect());
        }
        let small: Vec<Vec<f64>> = (0..size).map(|i| h[i][..size].to_vec()).collect();
        let Some((theta, z)) = dominant(&small) else {
            break;
        };
        let mut u = vec![0.0; n];
        for (vi, &zi) in v.iter().zip(&z) {
            for (a, b) in u.iter_mut().zip(vi) {
                *a += zi * b;
            }
        }
        // The Perron vector has one sign; rounding may leave tiny components of the other.
        let sign = if u.iter().sum::<f64>() < 0.0 {
            -1.0
        } else {
            1.0
        };
        let total: f64 = u.iter().map(|a| (a * sign).max(0.0)).sum();
        if total <= 0.0 || theta <= 0.0 {
            break;
        }
        x = u.iter().map(|a| (a * sign).max(0.0) / total).collect();
        let res = if size < basis {
            0.0
        } else {
            (h[size][size - 1] * z[size - 1]).abs() / theta
        };
        if res <= residual {
            break;
        }
    }
    (x, applied)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_perron_vector_wins_over_minus_lambda() {
        // [[0, 2, 0], [2, 0, 1], [0, 1, 1]]-like nonnegative matrix with a negative
        // eigenvalue close in modulus: compare with the characteristic polynomial.
        let m = [[0.0, 2.0, 0.0], [2.0, 0.0, 1.0], [0.0, 1.0, 1.0]];
        let mut apply = |x: &[f64], y: &mut Vec<f64>| {
            y.clear();
            y.extend((0..3).map(|i| (0..3).map(|j| m[i][j] * x[j]).sum::<f64>()));
        };
        let (x, _) = restarted(&mut apply, &[1.0 / 3.0; 3], 2, 50, 1e-14, &|| false);
        let mut y = Vec::new();
        apply(&x, &mut y);
        let ratios: Vec<f64> = y.iter().zip(&x).map(|(a, b)| a / b).collect();
        // det(M − t) = −t³ + t² + 5t − 4: its largest root by bisection (independent).
        let p = |t: f64| -t * t * t + t * t + 5.0 * t - 4.0;
        let (mut lo, mut hi) = (2.0, 3.0);
        for _ in 0..100 {
            let mid = 0.5 * (lo + hi);
            if p(mid) > 0.0 { lo = mid } else { hi = mid }
        }
        for r in ratios {
            assert!((r - lo).abs() < 1e-10, "{r} against {lo}");
        }
    }
}
