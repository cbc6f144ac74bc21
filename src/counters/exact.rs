//! Exact count of a finite cell by dynamic programming over a frontier.
//!
//! # What it computes
//!
//! The number of assignments of the model's variables that satisfy every constraint, as an
//! exact integer. A weighted model (`weights:`, `occupancy:`, `composition:`) is counted by
//! the weighted frontier of `counters/exact_weighted.rs` instead: the entropy of the weighted
//! ensemble with ln Z and the fields, or the exact count at a composition.
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
//! [`count`] takes a model, an [`ExactConfig`] (the state budget) and the [`Context`]
//! (deadline, interrupt, progress observer told every step) and returns an [`Estimate`]
//! with `count` set; [`count_cell`] takes the crystal and the cell as well and says which
//! route it took ([`CellRoute`]).
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
use super::{Context, Counted};
use crate::context::Progress;
use crate::error::{Error, Result};
use crate::estimate::Estimate;
use crate::model::Model;

/// Limits of an exact count.
#[derive(Clone, Debug)]
pub struct ExactConfig {
    /// Largest number of frontier states allowed at once.
    pub max_states: usize,
    /// Filled from the [`Context`] by [`count`] (whatever is set here is replaced): stop
    /// with [`Error::Deadline`] after this instant.
    #[doc(hidden)]
    pub deadline: Option<Instant>,
    /// Filled from the [`Context`] by [`count`]: told after every step (steps done, steps
    /// in all, frontier states).
    #[doc(hidden)]
    pub progress: Option<ProgressHook>,
    /// Filled from the [`Context`] by [`count`]: stop with [`Error::Interrupted`] once
    /// raised.
    #[doc(hidden)]
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

/// Between two steps of a count: [`Error::Deadline`] past the deadline,
/// [`Error::Interrupted`] once the interrupt is raised.
pub(crate) fn stop_point(model: &Model, config: &ExactConfig) -> Result<()> {
    if let Some(d) = config.deadline
        && Instant::now() > d
    {
        return Err(Error::Deadline {
            cells: model.cells.clone(),
        });
    }
    if config.interrupt.raised() {
        return Err(Error::Interrupted {
            what: format!("counting {}", model.cells),
        });
    }
    Ok(())
}

enum Failure {
    Overflow,
    Stop(Error),
}

/// Count the model exactly: the number of assignments that satisfy every constraint.
///
/// The context's deadline and interrupt are checked after every step
/// ([`Error::Deadline`], [`Error::Interrupted`]); its observer is told every step
/// ([`Progress::Step`]). More frontier states than `config.max_states` is
/// [`Error::Budget`].
///
/// ```
/// use groundcount::{Lattice, cluster::{Cells, Cluster}, counters::{exact, Context}, model::Model};
/// let ice = Lattice::from_yaml(groundcount::ICE_IH_YAML, "ice-ih.yaml").unwrap();
/// let cluster = Cluster::new(&ice.crystal, Cells::periodic(&[2, 1, 1]).unwrap()).unwrap();
/// let model = Model::new(&cluster).unwrap();
/// let e = exact::count(&model, &exact::ExactConfig::default(), &Context::new()).unwrap();
/// assert_eq!(e.estimate.count.unwrap().to_string(), "114");
/// ```
pub fn count(model: &Model, config: &ExactConfig, context: &Context) -> Result<Counted<()>> {
    let config = &filled(config, context);
    if model.is_weighted() {
        return super::exact_weighted::count(model, config).map(Counted::plain);
    }
    count_with(model, config, None).map(Counted::plain)
}

/// `config` with the context's deadline, interrupt and observer in its hidden fields.
pub(super) fn filled(config: &ExactConfig, context: &Context) -> ExactConfig {
    ExactConfig {
        max_states: config.max_states,
        deadline: context.deadline,
        progress: context.observer.clone().map(|o| {
            ProgressHook(std::sync::Arc::new(move |done, all, states| {
                (o.0)(&Progress::Step { done, all, states })
            }))
        }),
        interrupt: context.interrupt.clone(),
    }
}

/// [`count`] with the context's parts already in the configuration, following `plan` when
/// the caller has chosen it already (`None`: choose it here).
fn count_with(model: &Model, config: &ExactConfig, plan: Option<Plan>) -> Result<Estimate> {
    let start = Instant::now();
    let finish = |count: BigUint, peak: usize| {
        Estimate::exact(
            model.cells.clone(),
            count,
            model.formula_units,
            start.elapsed().as_secs_f64(),
        )
        .with_peak_states(Some(peak))
    };
    if model.contradiction.is_some() {
        return Ok(finish(BigUint::from(0u32), 0));
    }
    let plan = checked_plan(model, config, plan)?;
    // Start in u128 unless the count will surely not fit: the Pauling sum is a good guide
    // (overflow is detected exactly in any case, and then the count restarts in big integers).
    let guess_bits =
        super::local::pauling_ln_w(model) * model.formula_units / std::f64::consts::LN_2;
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

/// The plan given, or the one chosen here; [`Error::Budget`] when no order fits the key or
/// its frontier could far exceed the budget.
pub(super) fn checked_plan(
    model: &Model,
    config: &ExactConfig,
    plan: Option<Plan>,
) -> Result<Plan> {
    let plan = plan
        .or_else(|| order::choose(model))
        .ok_or_else(|| Error::Budget {
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
    Ok(plan)
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
/// long thin tori. [`crate::Lattice::count_exact`] and the command line call this.
pub fn count_cell(
    crystal: &crate::crystal::Crystal,
    cells: &crate::cluster::Cells,
    model: &Model,
    config: &ExactConfig,
    context: &Context,
) -> Result<Counted<CellRoute>> {
    let config = &filled(config, context);
    if model.is_weighted() {
        // The torus trace carries plain counts: a weighted cell takes the frontier.
        return Ok(Counted::new(
            super::exact_weighted::count(model, config)?,
            CellRoute::Frontier,
        ));
    }
    let mut plan = None;
    if model.contradiction.is_none() {
        plan = plan_for(model);
        let frontier_work = plan.as_ref().map_or(f64::INFINITY, |p| p.cost);
        let max_states = config.max_states.min(TRACE_MAX_STATES);
        if let Some(trace) = super::transfer::torus::route(crystal, cells, max_states)
            && TRACE_WEIGHT * trace.work() < frontier_work
        {
            let route = CellRoute::Trace {
                column_states: trace.states(),
            };
            return Ok(Counted::new(trace.count_within(model, config)?, route));
        }
    }
    Ok(Counted::new(
        count_with(model, config, plan)?,
        CellRoute::Frontier,
    ))
}

/// Memory a cluster and its model take per site and bond, in bytes, measured on square
/// ice (2000x2000: 12 million sites and bonds, 3 GB).
pub const BYTES_PER_ENTITY: f64 = 250.0;

/// Refuse, before it is built, a cell whose every sweep keeps more cells open than the
/// frontier's 63 bits can hold (building 2000x2000 alone takes minutes and gigabytes):
/// [`Error::Budget`] with the cells kept open and the memory the cell would take.
/// [`crate::Lattice::count_exact`] and the command line check this first.
pub fn check_cell(crystal: &crate::crystal::Crystal, cells: &crate::cluster::Cells) -> Result<()> {
    if let Some(open) = crate::cluster::frontier_cells_lower_bound(crystal, cells)
        && open > 63
    {
        let entities = cells.total() as f64 * (crystal.sites.len() + crystal.bonds.len()) as f64;
        let bytes = entities * BYTES_PER_ENTITY;
        let memory = if bytes >= 1e9 {
            format!("{:.1} GB", bytes / 1e9)
        } else {
            format!("{:.0} MB", (bytes / 1e6).max(1.0))
        };
        return Err(Error::Budget {
            cells: cells.to_string(),
            detail: format!(
                "every order of its variables keeps at least {open} cells on the frontier at once, \
                 and the frontier counter holds at most 63 bits (one per two-state variable); \
                 building the cell alone would take about {memory} of memory"
            ),
        });
    }
    Ok(())
}

/// The plan that [`count`] would follow (for reports and benchmarks).
pub fn plan_for(model: &Model) -> Option<Plan> {
    order::choose(model)
}

/// The steps of a plan, compiled with the newest variable in the lowest bits.
fn steps(model: &Model, plan: &Plan) -> Vec<Step> {
    steps_at(model, plan).0
}

/// [`steps`], with the offset at which each step writes its variable (in the shifted key).
pub(super) fn steps_at(model: &Model, plan: &Plan) -> (Vec<Step>, Vec<u32>) {
    let mut offsets = Vec::with_capacity(plan.order.len());
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
        offsets.push(at);
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
    (steps, offsets)
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
        stop_point(model, config).map_err(Failure::Stop)?;
        frontier
            .step(step, false, &mut next)
            .map_err(|_| Failure::Overflow)?;
        std::mem::swap(&mut frontier.pieces, &mut next);
        let n = frontier.len();
        if n > config.max_states {
            return Err(Failure::Stop(Error::Budget {
                cells: model.cells.clone(),
                detail: format!(
                    "the frontier reached {n} states at step {} of {} (budget {}); it could grow to 2^{:.0}",
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

    /// Issue 12: a cell too wide for the frontier is refused before it is built, by the
    /// library (so that `Lattice::count_exact` and the command line refuse the same cells);
    /// a cell the frontier holds passes.
    #[test]
    fn issue12_too_wide_cells_are_refused_before_they_are_built() {
        let yaml = include_str!("../../lattices/square-ice.yaml");
        let l = Lattice::from_yaml(yaml, "square-ice.yaml").unwrap();
        let wide = Cells::periodic(&[2000, 2000]).unwrap();
        match check_cell(&l.crystal, &wide) {
            Err(Error::Budget { cells, detail }) => {
                assert_eq!(cells, "2000x2000 periodic");
                // 2000² sites and 2·2000² bonds at 250 bytes each.
                assert!(detail.contains("3.0 GB"), "{detail}");
            }
            other => panic!("{other:?}"),
        }
        assert!(matches!(
            l.count_exact(&wide, &ExactConfig::default()),
            Err(Error::Budget { .. })
        ));
        assert!(check_cell(&l.crystal, &Cells::periodic(&[4, 4]).unwrap()).is_ok());
    }

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
