//! Weighted payloads: a float weight with its first moments, and an exact polynomial in one
//! fugacity.
//!
//! # Float weights ([`Moments`])
//!
//! Every state carries `K` floats `[Z, Y_0, Y_1, …, Y_{K−2}]`: the weighted sum Z = Σ w over
//! the partial assignments that reach the state, Y_0 = Σ w ln w (for ⟨ln w⟩) and
//! Y_j = Σ w n_j (for the mean of the j-th counted quantity). Adding values whose
//! [`Factor`] is `[w_s, ln w_s, n_1(s), …]` maps Z ↦ w_s Z and Y ↦ w_s (Y + (ln w_s or
//! n_j(s)) Z); equal keys add. A value of weight 0 hands on zeros (its ln w is taken as 0,
//! never ln 0). Z grows like e^(N s): [`rescale`] divides every item of a frontier by a power
//! of two (exact in binary floating point) and returns the log of what it took out.
//!
//! # Polynomials ([`Poly`])
//!
//! Every state carries the exact counts of the partial assignments that reach it, indexed
//! by the number of marked values among them (a polynomial in a fugacity, lowest degree
//! first); adding a marked value raises the degree by one. Coefficients are checked
//! [`Count`]s, so an overflow restarts the count one width up, like plain counts.
//!
//! Both payloads take, before each step, what each of the step's value patterns
//! ([`super::step::Step::patterns`]) contributes, through [`Payload::item_at`].

use std::sync::Arc;

use super::Piece;
use super::payload::{Accumulator, Count, Overflow, Payload};

/// What one value (or one pattern of added values) contributes: `[w, ln w, n_1, …]`.
pub(crate) type Factor<const K: usize> = [f64; K];

/// The factor of a value of weight `w` with counted quantities `n` (ln w taken as 0 when w
/// is 0, so no NaN arises).
pub(crate) fn factor<const K: usize>(w: f64, n: &[f64]) -> Factor<K> {
    let mut f = [0.0; K];
    f[0] = w;
    f[1] = if w > 0.0 { w.ln() } else { 0.0 };
    f[2..].copy_from_slice(n);
    f
}

/// The factor of several values added together: weights multiply, logs and counts add.
pub(crate) fn combine<const K: usize>(a: &Factor<K>, b: &Factor<K>) -> Factor<K> {
    let mut f = [0.0; K];
    f[0] = a[0] * b[0];
    for k in 1..K {
        f[k] = a[k] + b[k];
    }
    f
}

/// The factor of every pattern of a step: `added[i]` is (offset, width mask, factors per
/// value) of the i-th added variable; a pattern's factor combines its values' factors.
pub(crate) fn pattern_factors<const K: usize>(
    patterns: &[u64],
    added: &[(u32, u64, &[Factor<K>])],
) -> Arc<[Factor<K>]> {
    patterns
        .iter()
        .map(|&p| {
            let mut f = factor::<K>(1.0, &[0.0; K][2..]);
            for &(offset, mask, values) in added {
                f = combine(&f, &values[((p >> offset) & mask) as usize]);
            }
            f
        })
        .collect()
}

/// Float weights and their first moments, one `[Z, Y_0, Y_1, …]` per state.
#[derive(Clone, Debug)]
pub(crate) struct Moments<const K: usize> {
    pub items: Vec<[f64; K]>,
    /// The factor of every pattern of the step about to run.
    pub factors: Arc<[Factor<K>]>,
}

impl<const K: usize> Default for Moments<K> {
    fn default() -> Self {
        Moments {
            items: Vec::new(),
            factors: Arc::from(Vec::new()),
        }
    }
}

/// `item` times the values of factor `f`.
#[inline(always)]
pub(crate) fn times<const K: usize>(item: &[f64; K], f: &Factor<K>) -> [f64; K] {
    let w = f[0];
    let mut out = [0.0; K];
    out[0] = w * item[0];
    for k in 1..K {
        out[k] = w * (item[k] + f[k] * item[0]);
    }
    out
}

impl<const K: usize> Payload for Moments<K> {
    type Item = [f64; K];
    #[inline]
    fn item(&self, i: usize) -> [f64; K] {
        self.items[i]
    }
    #[inline(always)]
    fn item_at(&self, i: usize, pattern: usize) -> [f64; K] {
        times(&self.items[i], &self.factors[pattern])
    }
}

impl<const K: usize> Accumulator<[f64; K]> for Moments<K> {
    fn clear(&mut self) {
        self.items.clear();
    }
    #[inline]
    fn first(&mut self, item: &[f64; K]) -> Result<(), Overflow> {
        self.items.push(*item);
        Ok(())
    }
    #[inline]
    fn again(&mut self, item: &[f64; K]) -> Result<(), Overflow> {
        let last = self.items.last_mut().expect("a key was started");
        for (a, b) in last.iter_mut().zip(item) {
            *a += b;
        }
        Ok(())
    }
    fn adopt(&mut self, items: &mut Vec<[f64; K]>) -> Result<(), Overflow> {
        std::mem::swap(&mut self.items, items);
        items.clear();
        Ok(())
    }
}

/// Divide every item of `pieces` by the power of two nearest the largest Z, so that Z stays
/// near 1 however long the sweep; returns the natural log of the factor taken out (0 when
/// every Z is 0).
pub(crate) fn rescale<const K: usize>(pieces: &mut [Piece<Moments<K>>]) -> f64 {
    let max = pieces
        .iter()
        .flat_map(|p| p.payload.items.iter().map(|it| it[0]))
        .fold(0.0f64, f64::max);
    if max <= 0.0 || !max.is_finite() {
        return 0.0;
    }
    let e = max.log2().round() as i32;
    if e == 0 {
        return 0.0;
    }
    // 2^-e in two halves, so that neither factor under- or overflows.
    let (a, b) = (-e / 2, -e - (-e / 2));
    let (fa, fb) = (2f64.powi(a), 2f64.powi(b));
    for p in pieces {
        for it in &mut p.payload.items {
            for x in it.iter_mut() {
                *x = *x * fa * fb;
            }
        }
    }
    e as f64 * std::f64::consts::LN_2
}

/// Exact polynomials in one fugacity, one per state (coefficient d: the number of partial
/// assignments with d marked values).
#[derive(Clone, Debug)]
pub(crate) struct Poly<C> {
    pub items: Vec<Vec<C>>,
    /// The number of marked values of every pattern of the step about to run.
    pub degrees: Arc<[u32]>,
}

impl<C> Default for Poly<C> {
    fn default() -> Self {
        Poly {
            items: Vec::new(),
            degrees: Arc::from(Vec::new()),
        }
    }
}

impl<C: Count> Payload for Poly<C> {
    type Item = Vec<C>;
    fn item(&self, i: usize) -> Vec<C> {
        self.items[i].clone()
    }
    fn item_at(&self, i: usize, pattern: usize) -> Vec<C> {
        let d = self.degrees[pattern] as usize;
        let src = &self.items[i];
        if d == 0 {
            return src.clone();
        }
        let mut out = Vec::with_capacity(src.len() + d);
        out.resize(d, C::zero());
        out.extend(src.iter().cloned());
        out
    }
}

impl<C: Count> Accumulator<Vec<C>> for Poly<C> {
    fn clear(&mut self) {
        self.items.clear();
    }
    fn first(&mut self, item: &Vec<C>) -> Result<(), Overflow> {
        self.items.push(item.clone());
        Ok(())
    }
    fn again(&mut self, item: &Vec<C>) -> Result<(), Overflow> {
        let last = self.items.last_mut().expect("a key was started");
        if last.len() < item.len() {
            last.resize(item.len(), C::zero());
        }
        for (a, b) in last.iter_mut().zip(item) {
            if !a.add(b) {
                return Err(Overflow);
            }
        }
        Ok(())
    }
    fn adopt(&mut self, items: &mut Vec<Vec<C>>) -> Result<(), Overflow> {
        std::mem::swap(&mut self.items, items);
        items.clear();
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Two values of weights 2 and 3 (the second counted once), added to the unit item:
    /// Z = 5, Y_0 = 2 ln 2 + 3 ln 3, Y_1 = 3; rescaling keeps the ratios.
    #[test]
    fn moments_multiply_add_and_rescale() {
        let one = [1.0, 0.0, 0.0];
        let a = times(&one, &factor::<3>(2.0, &[0.0]));
        let b = times(&one, &factor::<3>(3.0, &[1.0]));
        let mut m = Moments::<3>::default();
        m.first(&a).unwrap();
        m.again(&b).unwrap();
        let it = m.items[0];
        assert_eq!(it[0], 5.0);
        assert!((it[1] - (2.0 * 2f64.ln() + 3.0 * 3f64.ln())).abs() < 1e-15);
        assert_eq!(it[2], 3.0);
        // Weight 0 hands on zeros, never NaN.
        let z = times(&it, &factor::<3>(0.0, &[1.0]));
        assert_eq!(z, [0.0; 3]);
        let mut pieces = [Piece {
            keys: vec![0],
            payload: m,
        }];
        let ln = rescale(&mut pieces);
        assert!((ln - 2.0 * std::f64::consts::LN_2).abs() < 1e-15, "5 → 5/4");
        assert_eq!(pieces[0].payload.items[0][0], 1.25);
        assert_eq!(pieces[0].payload.items[0][2], 0.75);
    }

    #[test]
    fn polynomials_shift_and_add() {
        let p = Poly::<u128> {
            items: vec![vec![1, 2]],
            degrees: Arc::from(vec![0u32, 2]),
        };
        assert_eq!(p.item_at(0, 1), vec![0, 0, 1, 2]);
        let mut acc = Poly::<u128>::default();
        acc.first(&p.item_at(0, 0)).unwrap();
        acc.again(&p.item_at(0, 1)).unwrap();
        assert_eq!(acc.items[0], vec![1, 2, 1, 2]);
        acc.again(&vec![u128::MAX]).unwrap_err();
    }
}
