//! Exact count of a finite cell by dynamic programming over a frontier.
//!
//! # What it computes
//!
//! The number of assignments of the model's variables that satisfy every constraint, as an
//! exact integer.
//!
//! # Method
//!
//! Variables are added one at a time in the order of a [`Plan`]. The frontier holds the
//! partial assignments of the variables that some unfinished constraint still reads, each
//! packed into a `u64` (a bit field per variable), with the number of ways to reach it.
//! Adding a variable multiplies each state by its values; a constraint is checked the
//! moment its last variable arrives; a variable that no unfinished constraint reads is
//! projected out, merging states that then coincide (sort and add). This is the transfer
//! matrix method written variable by variable ("frontier" or path-decomposition counting).
//!
//! Counts run in `u128` with checked additions; on overflow the count restarts in
//! arbitrary precision (`num-bigint`), so no number is ever silently wrapped.
//!
//! # Arguments and returns
//!
//! [`count`] takes a model and an [`ExactConfig`] (state budget, deadline) and returns an
//! [`Estimate`] with `count` set.
//!
//! # Complexity
//!
//! Time O(Σ_t S_t · q_t · log S_t) and memory O(max_t S_t), where S_t is the number of
//! frontier states after step t; for a sweep of an L×L torus S_t grows like q^(2L) at
//! worst (the two cuts of a torus), much less under restrictive rules.
//! Large frontiers are processed in parallel with rayon (in whatever pool the caller
//! installs).

use std::time::Instant;

use num_bigint::BigUint;
use rayon::prelude::*;

use super::order::{self, Plan, width};
use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method, ln_big};
use crate::model::Model;

/// Limits of an exact count.
#[derive(Clone, Debug)]
pub struct ExactConfig {
    /// Largest number of frontier states allowed at once.
    pub max_states: usize,
    /// Stop with [`Error::Deadline`] after this instant.
    pub deadline: Option<Instant>,
}

impl Default for ExactConfig {
    fn default() -> Self {
        ExactConfig {
            max_states: DEFAULT_MAX_STATES,
            deadline: None,
        }
    }
}

/// Default state budget: about 0.8 GB of frontier at 24 bytes a state, doubled while
/// merging.
pub const DEFAULT_MAX_STATES: usize = 1 << 24;

/// Frontiers smaller than this are processed on one thread.
const PARALLEL_MIN: usize = 1 << 15;

/// Counts the frontier can hold.
trait Tally: Clone + Send + Sync + Sized {
    fn zero() -> Self;
    fn one() -> Self;
    /// `self += other`; `false` on overflow.
    fn add(&mut self, other: &Self) -> bool;
    fn into_big(self) -> BigUint;
}

impl Tally for u128 {
    fn zero() -> Self {
        0
    }
    fn one() -> Self {
        1
    }
    #[inline]
    fn add(&mut self, other: &Self) -> bool {
        match self.checked_add(*other) {
            Some(s) => {
                *self = s;
                true
            }
            None => false,
        }
    }
    fn into_big(self) -> BigUint {
        BigUint::from(self)
    }
}

impl Tally for BigUint {
    fn zero() -> Self {
        BigUint::from(0u32)
    }
    fn one() -> Self {
        BigUint::from(1u32)
    }
    #[inline]
    fn add(&mut self, other: &Self) -> bool {
        *self += other;
        true
    }
    fn into_big(self) -> BigUint {
        self
    }
}

/// A constraint compiled against the plan's bit layout.
struct Check<'m> {
    /// (offset, mask, stride) per scope variable.
    fields: Vec<(u32, u64, u64)>,
    table: &'m crate::model::Table,
}

impl Check<'_> {
    #[inline]
    fn allows(&self, key: u64) -> bool {
        let mut index = 0u64;
        for &(off, mask, stride) in &self.fields {
            index += ((key >> off) & mask) * stride;
        }
        self.table.allows(index)
    }
}

enum Failure {
    Overflow,
    Stop(Error),
}

/// Count the model exactly.
pub fn count(model: &Model, config: &ExactConfig) -> Result<Estimate> {
    let start = Instant::now();
    let finish = |count: BigUint, peak: usize| Estimate {
        method: Method::Exact,
        cells: Some(model.cells.clone()),
        ln_count: ln_big(&count),
        formula_units: model.formula_units,
        ln_w_per_unit: ln_big(&count) / model.formula_units,
        count: Some(count),
        sigma_ln_w: None,
        seconds: start.elapsed().as_secs_f64(),
        peak_states: Some(peak),
    };
    if model.contradiction.is_some() {
        return Ok(finish(BigUint::from(0u32), 0));
    }
    let plan = order::choose(model).ok_or_else(|| Error::Budget {
        cells: model.cells.clone(),
        detail: format!(
            "its frontier would need more than 64 bits (up to 2^{:.0} states)",
            order::smallest_frontier_log2(model)
        ),
    })?;
    if plan.max_log2_states > (config.max_states as f64).log2() + 30.0 {
        // Even heavily constrained frontiers rarely beat the bound by 2^30: refuse early.
        return Err(Error::Budget {
            cells: model.cells.clone(),
            detail: format!(
                "its frontier could hold up to 2^{:.0} states (budget {})",
                plan.max_log2_states, config.max_states
            ),
        });
    }
    // Use big integers from the start when the count is sure to overflow u128.
    let bound_bits = model.ln_unconstrained() / std::f64::consts::LN_2;
    let result = if bound_bits < 127.0 {
        run::<u128>(model, &plan, config)
    } else {
        Err(Failure::Overflow)
    };
    let (count, peak) = match result {
        Ok((c, p)) => (c.into_big(), p),
        Err(Failure::Overflow) => match run::<BigUint>(model, &plan, config) {
            Ok(r) => r,
            Err(Failure::Stop(e)) => return Err(e),
            Err(Failure::Overflow) => unreachable!("big integers do not overflow"),
        },
        Err(Failure::Stop(e)) => return Err(e),
    };
    let mut count = count;
    for &v in &plan.free {
        count *= model.variables[v].states;
    }
    Ok(finish(count, peak))
}

/// The plan that [`count`] would follow (for reports and benchmarks).
pub fn plan_for(model: &Model) -> Option<Plan> {
    order::choose(model)
}

fn run<C: Tally>(
    model: &Model,
    plan: &Plan,
    config: &ExactConfig,
) -> std::result::Result<(C, usize), Failure> {
    let mut pos = vec![0u32; model.variables.len()];
    for (t, &v) in plan.order.iter().enumerate() {
        pos[v] = plan.offsets[t];
    }
    let checks: Vec<Vec<Check>> = plan
        .completes
        .iter()
        .map(|cs| {
            cs.iter()
                .map(|&c| {
                    let con = &model.constraints[c];
                    let table = &model.tables[con.table];
                    let mut stride = 1u64;
                    let fields = con
                        .scope
                        .iter()
                        .zip(&table.radices)
                        .map(|(&v, &q)| {
                            let f = (pos[v], (1u64 << width(q)) - 1, stride);
                            stride *= q as u64;
                            f
                        })
                        .collect();
                    Check { fields, table }
                })
                .collect()
        })
        .collect();
    let mut frontier: Vec<(u64, C)> = vec![(0, C::one())];
    let mut peak = 1usize;
    for (t, &v) in plan.order.iter().enumerate() {
        if let Some(d) = config.deadline {
            if Instant::now() > d {
                return Err(Failure::Stop(Error::Deadline {
                    cells: model.cells.clone(),
                }));
            }
        }
        let q = model.variables[v].states as u64;
        let off = plan.offsets[t];
        let keep = !plan.forget[t];
        let checks = &checks[t];
        let extend = |(key, count): &(u64, C), out: &mut Vec<(u64, C)>| {
            for x in 0..q {
                let k = key | (x << off);
                if checks.iter().all(|c| c.allows(k)) {
                    out.push((k & keep, count.clone()));
                }
            }
        };
        let mut next: Vec<(u64, C)> = if frontier.len() >= PARALLEL_MIN {
            frontier
                .par_chunks(PARALLEL_MIN / 4)
                .map(|chunk| {
                    let mut out = Vec::with_capacity(chunk.len() * q as usize);
                    for s in chunk {
                        extend(s, &mut out);
                    }
                    out
                })
                .flatten_iter()
                .collect()
        } else {
            let mut out = Vec::with_capacity(frontier.len() * q as usize);
            for s in &frontier {
                extend(s, &mut out);
            }
            out
        };
        drop(frontier);
        if plan.forget[t] != 0 {
            next = merge(next)?;
        }
        if next.len() > config.max_states {
            return Err(Failure::Stop(Error::Budget {
                cells: model.cells.clone(),
                detail: format!(
                    "the frontier reached {} states at step {} of {} (budget {}); it could grow to 2^{:.0}",
                    next.len(),
                    t + 1,
                    plan.order.len(),
                    config.max_states,
                    plan.max_log2_states
                ),
            }));
        }
        peak = peak.max(next.len());
        if next.is_empty() {
            return Ok((C::zero(), peak));
        }
        frontier = next;
    }
    let mut total = frontier.pop().map(|(_, c)| c).expect("non-empty");
    for (_, c) in &frontier {
        if !total.add(c) {
            return Err(Failure::Overflow);
        }
    }
    Ok((total, peak))
}

/// Sort by key and add the counts of equal keys.
fn merge<C: Tally>(mut v: Vec<(u64, C)>) -> std::result::Result<Vec<(u64, C)>, Failure> {
    if v.len() >= PARALLEL_MIN {
        v.par_sort_unstable_by_key(|e| e.0);
    } else {
        v.sort_unstable_by_key(|e| e.0);
    }
    let mut out: Vec<(u64, C)> = Vec::with_capacity(v.len() / 2 + 1);
    for (k, c) in v {
        match out.last_mut() {
            Some((lk, lc)) if *lk == k => {
                if !lc.add(&c) {
                    return Err(Failure::Overflow);
                }
            }
            _ => out.push((k, c)),
        }
    }
    Ok(out)
}
