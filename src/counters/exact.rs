//! Exact count of a finite cell by dynamic programming over a frontier.
//!
//! # What it computes
//!
//! The number of assignments of the model's variables that satisfy every constraint, as an
//! exact integer.
//!
//! # Method
//!
//! Variables are added one at a time in the order of a [`Plan`], by the frontier engine
//! ([`super::frontier`]) with counts as its payload. The frontier holds the partial
//! assignments of the variables that some unfinished constraint still reads, each packed
//! into a `u64` (a bit field per variable, the newest lowest), with the number of ways to
//! reach it, as sorted runs of keys. Adding a variable shifts each key up and writes the
//! variable's value below; a constraint is checked the moment its last variable arrives,
//! by table look-up of the values that survive; a variable that no unfinished constraint
//! reads is squeezed out of the key. Keys that agree on the squeezed-out values keep their
//! order, so states that coincide are merged by a linear merge of a few sorted streams,
//! never a sort. This is the transfer matrix method written variable by variable
//! ("frontier" or path-decomposition counting).
//!
//! [`count_cell`] counts a whole cell by the cheaper of two routes: this one, or for a
//! torus the trace of the L-th power of a column transfer operator
//! ([`super::transfer::torus`]), when its predicted work is smaller.
//!
//! Counts run in `u128`, then in fixed-width integers, then in arbitrary precision
//! (`num-bigint`), every addition checked: an overflow restarts the count one width up, so
//! no number is ever silently wrapped.
//!
//! # Arguments and returns
//!
//! [`count`] takes a model and an [`ExactConfig`] (state budget, deadline) and returns an
//! [`Estimate`] with `count` set; [`count_cell`] takes the crystal and the cell as well and
//! says which route it took ([`CellRoute`]).
//!
//! # Complexity
//!
//! Time O(Σ_t S_t · q_t) and memory O(max_t S_t), where S_t is the number of
//! frontier states after step t; for a sweep of an L×L torus S_t grows like q^(2L) at
//! worst (the two cuts of a torus), much less under restrictive rules.
//! Large frontiers are processed in parallel with rayon (in whatever pool the caller
//! installs).

use std::sync::Arc;
use std::time::Instant;

use num_bigint::BigUint;

use super::frontier::layout::{Layout, width};
use super::frontier::payload::{Count, Wide};
use super::frontier::step::{Completed, Step};
use super::frontier::{Frontier, Piece};
use super::order::{self, Plan};
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
    /// Told after every step: (steps done, steps in all, frontier states).
    pub progress: Option<ProgressHook>,
    /// Stop with [`Error::Interrupted`] once raised.
    pub interrupt: crate::context::Interrupt,
}

/// A callback for progress reports (the library never prints; the caller decides).
#[derive(Clone)]
pub struct ProgressHook(pub std::sync::Arc<dyn Fn(usize, usize, usize) + Send + Sync>);

impl std::fmt::Debug for ProgressHook {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("ProgressHook")
    }
}

impl Default for ExactConfig {
    fn default() -> Self {
        ExactConfig {
            max_states: DEFAULT_MAX_STATES,
            deadline: None,
            progress: None,
            interrupt: Default::default(),
        }
    }
}

/// Default state budget: about 0.8 GB of frontier at 24 bytes a state, doubled while
/// merging.
pub const DEFAULT_MAX_STATES: usize = 1 << 24;

/// A counting run in one integer type, returning the count as a big integer.
type Runner = fn(&Model, &Plan, &ExactConfig) -> std::result::Result<(BigUint, usize), Failure>;

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
    // Start in u128 unless the count will surely not fit: the Pauling sum is a good guide
    // (overflow is detected exactly in any case, and then the count restarts in big integers).
    let guess_bits =
        super::pauling::for_model(model) * model.formula_units / std::f64::consts::LN_2;
    // Try the narrowest integer width the guess allows, widening on overflow.
    let widths: [(u32, Runner); 6] = [
        (120, run::<u128>),
        (250, run::<Wide<4>>),
        (500, run::<Wide<8>>),
        (1000, run::<Wide<16>>),
        (2000, run::<Wide<32>>),
        (u32::MAX, run::<BigUint>),
    ];
    let mut outcome = None;
    for (limit, runner) in widths {
        if (limit as f64) < guess_bits {
            continue;
        }
        match runner(model, &plan, config) {
            Ok(r) => {
                outcome = Some(r);
                break;
            }
            Err(Failure::Overflow) => continue,
            Err(Failure::Stop(e)) => return Err(e),
        }
    }
    let (count, peak) = outcome.expect("big integers do not overflow");
    let mut count = count;
    for &v in &plan.free {
        count *= model.variables[v].states;
    }
    Ok(finish(count, peak))
}

/// Largest column state space tried for the trace route of a torus ([`count_cell`]).
pub const TRACE_MAX_STATES: usize = 1 << 16;

/// How many frontier-plan cost units one predicted big-integer addition of the trace is
/// worth ([`count_cell`]). The plan's cost counts every pattern of the frontier's
/// variables, an upper bound that the rules cut down on wide tori, so there one unit is
/// cheap; on long thin tori the bound is tight and big integers dominate both routes.
/// Measured with `examples/route_cost.rs` (one machine, 2 cores): square ice 10x10 frontier
/// 1.5 s, trace 4.0 s (work ratio 0.58); square ice 6x1000 frontier 5.6 s, trace 1.4 s
/// (ratio 0.39); 4x2000 0.42 s against 0.11 s (ratio 0.38); square dimers 10x10 0.68 s
/// against 1.58 s (ratio 0.30, the one shipped case among these where 2 picks the slower
/// route). With 2 the faster route is taken on the other shipped 2D tori from 8x8 to 12x12
/// and on the long thin tori above.
pub const TRACE_WEIGHT: f64 = 2.0;

/// The route [`count_cell`] took.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum CellRoute {
    /// The frontier counter ([`count`]).
    Frontier,
    /// The trace of Tᴸ of a column transfer operator with this many boundary states.
    Trace {
        /// States at a column boundary (the dimension of T).
        column_states: usize,
    },
}

/// The exact count of the cell `cells` of `crystal`, whose model is `model`: by the
/// frontier counter, or for a periodic cell by the trace of Tᴸ when its predicted work,
/// weighted by [`TRACE_WEIGHT`], is smaller than the frontier plan's cost (its column is tried with at most
/// [`TRACE_MAX_STATES`] states). Both give the same integer; the trace is much cheaper on
/// long thin tori. [`crate::Lattice::count_exact`] and `groundcount exact` call this.
pub fn count_cell(
    crystal: &crate::crystal::Crystal,
    cells: &crate::cluster::Cells,
    model: &Model,
    config: &ExactConfig,
) -> Result<(Estimate, CellRoute)> {
    if model.contradiction.is_none() {
        let frontier_work = plan_for(model).map_or(f64::INFINITY, |p| p.cost);
        let max_states = config.max_states.min(TRACE_MAX_STATES);
        if let Some(trace) = super::transfer::torus::route(crystal, cells, max_states)
            && TRACE_WEIGHT * trace.work() < frontier_work
        {
            let route = CellRoute::Trace {
                column_states: trace.states(),
            };
            return Ok((trace.count_within(model, config)?, route));
        }
    }
    Ok((count(model, config)?, CellRoute::Frontier))
}

/// The plan that [`count`] would follow (for reports and benchmarks).
pub fn plan_for(model: &Model) -> Option<Plan> {
    order::choose(model)
}

/// The steps of a plan, compiled with the newest variable in the lowest bits.
fn steps(model: &Model, plan: &Plan) -> Vec<Step> {
    let tables: Vec<Arc<[u64]>> = model
        .tables
        .iter()
        .map(|t| Arc::from(t.bits.as_slice()))
        .collect();
    let mut layout = Layout::newest();
    let mut steps = Vec::with_capacity(plan.order.len());
    for (t, &v) in plan.order.iter().enumerate() {
        let q = model.variables[v].states;
        let before = layout.occupied();
        let shift = layout.shift(width(q));
        let at = layout
            .add(v, width(q))
            .expect("the plan fits its frontier in 63 bits");
        let completed: Vec<Completed> = plan.completes[t]
            .iter()
            .map(|&c| {
                let con = &model.constraints[c];
                let reads = con
                    .scope
                    .iter()
                    .map(|&u| {
                        let f = layout.field(u).expect("a scope variable on the frontier");
                        (f.offset, model.variables[u].states)
                    })
                    .collect();
                Completed {
                    reads,
                    table: tables[con.table].clone(),
                }
            })
            .collect();
        let (gone, forget) = layout.forget(&plan.leaving[t]);
        steps.push(Step::new(
            before,
            shift,
            &[(at, q)],
            &completed,
            &gone,
            forget,
            layout.occupied(),
        ));
    }
    steps
}

fn run<C: Count>(
    model: &Model,
    plan: &Plan,
    config: &ExactConfig,
) -> std::result::Result<(BigUint, usize), Failure> {
    let steps = steps(model, plan);
    let mut frontier: Frontier<Vec<C>> = Frontier::new(vec![Piece {
        keys: vec![0],
        payload: vec![C::one()],
    }]);
    let mut next: Vec<Piece<Vec<C>>> = Vec::new();
    let mut peak = 1usize;
    for (t, step) in steps.iter().enumerate() {
        if let Some(d) = config.deadline
            && Instant::now() > d
        {
            return Err(Failure::Stop(Error::Deadline {
                cells: model.cells.clone(),
            }));
        }
        if config.interrupt.raised() {
            return Err(Failure::Stop(Error::Interrupted {
                what: format!("counting {}", model.cells),
            }));
        }
        frontier
            .step(step, false, &mut next)
            .map_err(|_| Failure::Overflow)?;
        std::mem::swap(&mut frontier.pieces, &mut next);
        let n = frontier.len();
        if n > config.max_states {
            return Err(Failure::Stop(Error::Budget {
                cells: model.cells.clone(),
                detail: format!(
                    "the frontier reached {n} states at step {} of {} (budget {}, set by --max-states); it could grow to 2^{:.0}",
                    t + 1,
                    plan.order.len(),
                    config.max_states,
                    plan.max_log2_states
                ),
            }));
        }
        peak = peak.max(n);
        if let Some(p) = &config.progress {
            (p.0)(t + 1, steps.len(), n);
        }
        if n == 0 {
            return Ok((BigUint::from(0u32), peak));
        }
    }
    let mut total = C::zero();
    for p in &frontier.pieces {
        for c in &p.payload {
            if !total.add(c) {
                return Err(Failure::Overflow);
            }
        }
    }
    Ok((total.into_big(), peak))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;
    use crate::cluster::{Cells, Cluster};

    #[test]
    fn every_integer_width_gives_the_same_count() {
        let yaml = include_str!("../../lattices/square-ice.yaml");
        let l = Lattice::from_yaml(yaml, "square-ice.yaml").unwrap();
        let cluster = Cluster::new(&l.crystal, Cells::parse("5x5", None, 2).unwrap()).unwrap();
        let model = Model::new(&cluster).unwrap();
        let plan = order::choose(&model).unwrap();
        let config = ExactConfig::default();
        let expected = BigUint::from(143_224u32); // OEIS A054759, L = 5
        let runners: [Runner; 4] = [run::<u128>, run::<Wide<4>>, run::<Wide<16>>, run::<BigUint>];
        for r in runners {
            assert_eq!(r(&model, &plan, &config).ok().unwrap().0, expected);
        }
    }
}
