//! Applying T and its largest eigenvalue: the gather passes over the compiled rows, the
//! power iteration with a shift, started from restarted Arnoldi, and the Collatz–Wielandt
//! bracket (see the module documentation of [`super`] for the method).
//!
//! # Complexity
//!
//! One application: O(Σ_steps transitions) reads and additions of `f64`, in parallel over
//! blocks of rows from [`PARALLEL_MIN`] outputs on. Memory: about [`BASIS`] + 6 vectors of
//! the largest step size.

use std::time::Instant;

use rayon::prelude::*;

use super::column::Column;
use super::krylov;
use super::rows::CHUNK;
use super::{SectorBasis, StripConfig, StripResult};
use crate::counters::frontier::PARALLEL_MIN;
use crate::error::{Error, Result};

impl Column {
    /// y = T x, without the factor of free variables; `scratch` is reused between calls.
    pub fn apply(&self, x: &[f64], y: &mut Vec<f64>, scratch: &mut Vec<f64>) {
        y.clear();
        y.extend_from_slice(x);
        for s in 0..self.rows.len() {
            // Every output is written below, so old contents need no clearing.
            scratch.resize(self.sizes[s], 0.0);
            let rows = &self.rows[s];
            debug_assert_eq!(rows.outputs(), self.sizes[s]);
            let input: &[f64] = y;
            if rows.is_weighted() {
                let factors = &self.factors[s];
                if scratch.len() >= PARALLEL_MIN {
                    scratch
                        .par_chunks_mut(CHUNK)
                        .enumerate()
                        .for_each(|(c, out)| rows.gather_weighted(c * CHUNK, out, input, factors));
                } else {
                    rows.gather_weighted(0, scratch, input, factors);
                }
            } else if scratch.len() >= PARALLEL_MIN {
                scratch
                    .par_chunks_mut(CHUNK)
                    .enumerate()
                    .for_each(|(c, out)| rows.gather(c * CHUNK, out, input));
            } else {
                rows.gather(0, scratch, input);
            }
            std::mem::swap(y, scratch);
        }
    }

    /// Power iteration for the largest eigenvalue, certified by the Collatz–Wielandt bracket.
    /// For a weighted crystal this is λ at zero fields, and `ln_w_per_unit` is then ln Z per
    /// formula unit, not an entropy: [`super::strip`] gives the entropy.
    pub fn largest_eigenvalue(&self, config: &StripConfig) -> Result<StripResult> {
        match self.iterate(config)? {
            Some((r, _)) => Ok(r),
            None => Err(Error::Model(format!(
                "a strip {} cells wide has no arrangement of unbounded length",
                self.width
            ))),
        }
    }

    /// [`Column::largest_eigenvalue`] with the last iterate (the eigenvector, L1-normalised,
    /// over the boundary states); `None` when no state has an arbitrarily long past.
    pub(super) fn iterate(&self, config: &StripConfig) -> Result<Option<(StripResult, Vec<f64>)>> {
        let start = Instant::now();
        let n = self.keys.len();
        let (mut y, mut scratch) = (Vec::new(), Vec::new());
        let recurrent = self.recurrent(&mut y, &mut scratch, config)?;
        let size = recurrent.iter().filter(|&&r| r).count();
        if size == 0 {
            return Ok(None);
        }
        let mut x: Vec<f64> = recurrent
            .iter()
            .map(|&r| if r { 1.0 / size as f64 } else { 0.0 })
            .collect();
        // Arnoldi first (it never decides λ; the power iteration below certifies it).
        let restarts = (config.max_iterations / (2 * BASIS)).min(MAX_RESTARTS);
        let mut applied = 0;
        if size >= KRYLOV_MIN && restarts > 0 {
            let mut op = |a: &[f64], b: &mut Vec<f64>| self.apply(a, b, &mut scratch);
            let stop = || self.should_stop(config).is_err();
            let (v, used) = krylov::restarted(&mut op, &x, BASIS, restarts, 1e-13, &stop);
            self.should_stop(config)?;
            x = v;
            applied = used;
        }
        let mut lambda = 0.0;
        for iteration in applied + 1..=config.max_iterations {
            self.apply(&x, &mut y, &mut scratch);
            let sum_x: f64 = x.iter().sum();
            let sum_y: f64 = y.iter().sum();
            let estimate = sum_y / sum_x;
            let top = x.iter().copied().fold(0.0, f64::max);
            let (mut low, mut high) = (f64::INFINITY, 0.0f64);
            for (&a, &b) in x.iter().zip(&y) {
                if a > 0.0 && a >= SUPPORT * top {
                    let r = b / a;
                    low = low.min(r);
                    high = high.max(r);
                }
            }
            if iteration >= 3 && high - low <= config.tolerance * estimate {
                let (lower, upper, certified) = self.certify(&x, &y, &recurrent);
                // The midpoint of the converged bracket (the L1 ratio still carries the
                // decaying components of subdominant sectors), within the certified one.
                let mid = (0.5 * (low + high)).clamp(lower, upper);
                let ln_lambda = mid.ln() + self.ln_free;
                let result = StripResult {
                    width: self.width,
                    states: n,
                    recurrent_states: size,
                    peak_states: self.peak_states(),
                    transitions: self.transitions(),
                    iterations: iteration,
                    ln_lambda,
                    ln_bracket: (lower.ln() + self.ln_free, upper.ln() + self.ln_free),
                    certified,
                    units_per_column: self.units_per_column,
                    ln_w_per_unit: ln_lambda / self.units_per_column,
                    seconds: self.build_seconds + start.elapsed().as_secs_f64(),
                    sector: self.sector,
                    reversal: self.flip.is_some(),
                    basis: if self.sector.is_some() {
                        SectorBasis::Given
                    } else {
                        SectorBasis::Whole
                    },
                    ln_boundary_space: self.ln_boundary_space,
                    depth: self.depth,
                    weighing: None,
                };
                return Ok(Some((result, x)));
            }
            if iteration % 16 == 0 {
                self.should_stop(config)?;
            }
            // x ← (T + σλ̃) x, normalised: removes eigenvalues of modulus λ other than λ.
            let shift = SHIFT * estimate;
            let norm = sum_y + shift * sum_x;
            for (a, &b) in x.iter_mut().zip(&y) {
                *a = (b + shift * *a) / norm;
            }
            lambda = estimate;
        }
        Err(Error::NotConverged {
            what: format!("the transfer matrix of a strip {} cells wide", self.width),
            iterations: config.max_iterations,
            detail: format!("last estimate of λ {lambda}"),
        })
    }

    /// The states with an arbitrarily long past (every one has a predecessor in the set):
    /// T maps this set into itself, and every other state is transient, so λ is the
    /// spectral radius of T on it. Empty when no arrangement continues for ever.
    fn recurrent(
        &self,
        y: &mut Vec<f64>,
        scratch: &mut Vec<f64>,
        config: &StripConfig,
    ) -> Result<Vec<bool>> {
        let mut alive = vec![true; self.keys.len()];
        loop {
            self.should_stop(config)?;
            let f: Vec<f64> = alive.iter().map(|&a| f64::from(u8::from(a))).collect();
            self.apply(&f, y, scratch);
            let mut changed = false;
            for (a, &g) in alive.iter_mut().zip(y.iter()) {
                if *a && g <= 0.0 {
                    *a = false;
                    changed = true;
                }
            }
            if !changed {
                return Ok(alive);
            }
        }
    }

    /// Collatz–Wielandt bounds from the last iterate x (and y = T x) on the recurrent set R:
    /// the lower bound min over the support F of (T x_F)_i / x_i for x restricted to F
    /// (T x_F ≥ a x_F implies λ ≥ a), the upper bound max over R of (T x)_i / x_i, certified
    /// when x is positive on all of R (otherwise the maximum over F, not certified).
    fn certify(&self, x: &[f64], y: &[f64], recurrent: &[bool]) -> (f64, f64, bool) {
        let top = x.iter().copied().fold(0.0, f64::max);
        let in_support = |a: f64| a > 0.0 && a >= SUPPORT * top;
        let masked: Vec<f64> = x
            .iter()
            .map(|&a| if in_support(a) { a } else { 0.0 })
            .collect();
        let (mut yf, mut scratch) = (Vec::new(), Vec::new());
        self.apply(&masked, &mut yf, &mut scratch);
        let lower = masked
            .iter()
            .zip(&yf)
            .filter(|p| *p.0 > 0.0)
            .map(|(&a, &b)| b / a)
            .fold(f64::INFINITY, f64::min);
        let certified = x.iter().zip(recurrent).all(|(&a, &r)| !r || a > 0.0);
        let upper = x
            .iter()
            .zip(y)
            .zip(recurrent)
            .filter(|((a, _), r)| **r && (certified || in_support(**a)))
            .map(|((&a, &b), _)| b / a)
            .fold(0.0, f64::max);
        (lower, upper, certified)
    }
}

/// Bytes a column of these dimensions holds while it is built and iterated: four per
/// index-list entry, and about BASIS + 6 vectors of f64 (Arnoldi basis, iterates,
/// scratch) plus the compile-time key buffers (16 bytes) per state at the largest step.
pub fn memory_estimate(peak_states: f64, transitions: f64) -> f64 {
    4.0 * transitions + (8.0 * (BASIS + 6) as f64 + 16.0) * peak_states
}

/// States holding less than this fraction of the largest component leave the convergence
/// test (subdominant sectors decay below it).
const SUPPORT: f64 = 1e-8;

/// Arnoldi basis size (common practice: a few tens of vectors at most).
const BASIS: usize = 12;

/// Largest number of Arnoldi restarts before the power iteration.
const MAX_RESTARTS: usize = 8;

/// Operators with fewer recurrent states go straight to the power iteration.
const KRYLOV_MIN: usize = 64;

/// Shift of the power iteration, relative to the current estimate of λ.
const SHIFT: f64 = 0.25;
