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
//! packed into a `u64` (a bit field per variable, the newest lowest), with the number of
//! ways to reach it, as sorted runs of keys. Adding a variable shifts each key up and writes
//! the variable's value below; a constraint is checked the moment its last variable
//! arrives, by table look-up of the values that survive; a variable that no unfinished
//! constraint reads is squeezed out of the key. Keys that agree on the squeezed-out values
//! keep their order, so states that coincide are merged by a linear merge of a few sorted
//! streams, never a sort. This is the transfer matrix method written variable by variable
//! ("frontier" or path-decomposition counting).
//!
//! Counts run in `u128`, then in fixed-width integers, then in arbitrary precision
//! (`num-bigint`), every addition checked: an overflow restarts the count one width up, so
//! no number is ever silently wrapped.
//!
//! # Arguments and returns
//!
//! [`count`] takes a model, an [`ExactConfig`] (the state budget) and the [`Context`]
//! (deadline, interrupt, progress observer told every step) and returns an [`Estimate`]
//! with `count` set.
//!
//! # Complexity
//!
//! Time O(Σ_t S_t · q_t) and memory O(max_t S_t), where S_t is the number of
//! frontier states after step t; for a sweep of an L×L torus S_t grows like q^(2L) at
//! worst (the two cuts of a torus), much less under restrictive rules.
//! Large frontiers are processed in parallel with rayon (in whatever pool the caller
//! installs).

use std::time::Instant;

use num_bigint::BigUint;
use rayon::prelude::*;

use super::order::{self, Plan, width};
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

/// A counting run in one integer type, returning the count as a big integer.
type Runner = fn(&Model, &Plan, &ExactConfig) -> std::result::Result<(BigUint, usize), Failure>;

/// A fixed-width unsigned integer of `N` 64-bit limbs (least significant first): counts
/// beyond u128 without an allocation per state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
struct Wide<const N: usize>([u64; N]);

impl<const N: usize> Tally for Wide<N> {
    fn zero() -> Self {
        Wide([0; N])
    }
    fn one() -> Self {
        let mut w = [0; N];
        w[0] = 1;
        Wide(w)
    }
    #[inline]
    fn add(&mut self, other: &Self) -> bool {
        let mut carry = false;
        for (a, b) in self.0.iter_mut().zip(&other.0) {
            let (s1, c1) = a.overflowing_add(*b);
            let (s2, c2) = s1.overflowing_add(carry as u64);
            *a = s2;
            carry = c1 | c2;
        }
        !carry
    }
    fn into_big(self) -> BigUint {
        let digits: Vec<u32> = self
            .0
            .iter()
            .flat_map(|l| [*l as u32, (*l >> 32) as u32])
            .collect();
        BigUint::new(digits)
    }
}

/// A constraint compiled against the plan's bit layout.
struct Check<'m> {
    /// (offset, mask, stride) per scope variable other than the step's new one.
    fields: Vec<(u32, u64, u64)>,
    /// Stride of the step's new variable (it completes the constraint, so it is in scope).
    new_stride: u64,
    table: &'m crate::model::Table,
}

impl Check<'_> {
    /// The values of the new variable (as a bit mask over `0..states`) that the constraint
    /// allows, given the other variables' values in `key`.
    #[inline]
    fn allowed_values(&self, key: u64, states: u64) -> u64 {
        let mut index = 0u64;
        for &(off, mask, stride) in &self.fields {
            index += ((key >> off) & mask) * stride;
        }
        let mut allowed = 0u64;
        for x in 0..states {
            allowed |= u64::from(self.table.allows(index + x * self.new_stride)) << x;
        }
        allowed
    }
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
    let config = &ExactConfig {
        max_states: config.max_states,
        deadline: context.deadline,
        progress: context.observer.clone().map(|o| {
            ProgressHook(std::sync::Arc::new(move |done, all, states| {
                (o.0)(&Progress::Step { done, all, states })
            }))
        }),
        interrupt: context.interrupt.clone(),
    };
    count_with(model, config).map(Counted::plain)
}

/// [`count`] with the context's parts already in the configuration.
fn count_with(model: &Model, config: &ExactConfig) -> Result<Estimate> {
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

/// The plan that [`count`] would follow (for reports and benchmarks).
pub fn plan_for(model: &Model) -> Option<Plan> {
    order::choose(model)
}

/// A sorted run of frontier states: unique keys in increasing order, with their counts.
struct Piece<C> {
    keys: Vec<u64>,
    counts: Vec<C>,
}

impl<C> Piece<C> {
    fn new() -> Self {
        Piece {
            keys: Vec::new(),
            counts: Vec::new(),
        }
    }
    fn clear(&mut self) {
        self.keys.clear();
        self.counts.clear();
    }
    fn len(&self) -> usize {
        self.keys.len()
    }
}

/// One step of the sweep, compiled: add a variable, check what completes, forget fields.
///
/// Keys are packed with the newest variable in the lowest bits: a step shifts the key up by
/// the new variable's width and writes its value below, then squeezes out the fields of the
/// variables it forgets. Both moves keep the input's order among keys whose forgotten
/// fields agree, so each *stream* (one pattern of forgotten values) comes out sorted and
/// the step is a merge of a few sorted streams (none at all when nothing is forgotten).
struct Step<'m> {
    states: u64,
    width: u32,
    /// Constraints completed by this step, with offsets in the shifted key.
    checks: Vec<Check<'m>>,
    /// (offset, mask) of the forgotten fields in the shifted key.
    dropped: Vec<(u32, u64)>,
    /// (source offset, mask, destination offset) of the runs of kept bits.
    segments: Vec<(u32, u64, u32)>,
    /// Number of streams: patterns of forgotten values.
    streams: usize,
}

impl Step<'_> {
    #[inline]
    fn stream(&self, key: u64) -> usize {
        let mut s = 0usize;
        let mut radix = 1usize;
        for &(off, mask) in &self.dropped {
            s += ((key >> off) & mask) as usize * radix;
            radix *= mask as usize + 1;
        }
        s
    }

    #[inline]
    fn squeeze(&self, key: u64) -> u64 {
        self.segments.iter().fold(0, |acc, &(src, mask, dst)| {
            acc | (((key >> src) & mask) << dst)
        })
    }

    /// Extend a sorted piece into one sorted buffer per stream.
    fn extend<C: Tally>(&self, input: &Piece<C>, out: &mut [Piece<C>]) {
        let all = if self.states == 64 {
            u64::MAX
        } else {
            (1u64 << self.states) - 1
        };
        for (key, count) in input.keys.iter().zip(&input.counts) {
            let base = key << self.width;
            // The completed constraints decide which new values survive, by table look-up,
            // before any candidate is written.
            let mut allowed = all;
            for c in &self.checks {
                allowed &= c.allowed_values(base, self.states);
            }
            while allowed != 0 {
                let x = allowed.trailing_zeros() as u64;
                allowed &= allowed - 1;
                let k = base | x;
                let f = &mut out[self.stream(k)];
                f.keys.push(self.squeeze(k));
                f.counts.push(count.clone());
            }
        }
    }
}

/// A stream read across several sorted slices whose ranges follow one another.
struct Cursor<'a, C> {
    slices: Vec<(&'a [u64], &'a [C])>,
    i: usize,
    j: usize,
}

impl<C> Cursor<'_, C> {
    #[inline]
    fn head(&self) -> u64 {
        self.slices.get(self.i).map_or(u64::MAX, |s| s.0[self.j])
    }
    #[inline]
    fn count(&self) -> &C {
        &self.slices[self.i].1[self.j]
    }
    #[inline]
    fn advance(&mut self) {
        self.j += 1;
        if self.j == self.slices[self.i].0.len() {
            self.i += 1;
            self.j = 0;
        }
    }
}

/// Merge sorted streams into `out`, adding the counts of equal keys. Keys never reach
/// `u64::MAX` (plans use at most 63 bits), which marks an exhausted stream.
fn merge_streams<C: Tally>(
    mut cursors: Vec<Cursor<C>>,
    out: &mut Piece<C>,
) -> std::result::Result<(), Failure> {
    let mut heads: Vec<u64> = cursors.iter().map(|c| c.head()).collect();
    loop {
        let m = heads.iter().copied().min().unwrap_or(u64::MAX);
        if m == u64::MAX {
            return Ok(());
        }
        let mut acc: Option<C> = None;
        for (h, c) in heads.iter_mut().zip(cursors.iter_mut()) {
            if *h == m {
                match &mut acc {
                    None => acc = Some(c.count().clone()),
                    Some(a) => {
                        if !a.add(c.count()) {
                            return Err(Failure::Overflow);
                        }
                    }
                }
                c.advance();
                *h = c.head();
            }
        }
        out.keys.push(m);
        out.counts.push(acc.expect("some stream had the minimum"));
    }
}

/// The frontier as sorted pieces covering increasing key ranges, with scratch buffers
/// kept from step to step (fresh large allocations cost page faults on every step).
struct Frontier<C> {
    pieces: Vec<Piece<C>>,
    next: Vec<Piece<C>>,
    /// scratch[p][s]: stream s of piece p.
    scratch: Vec<Vec<Piece<C>>>,
}

impl<C: Tally> Frontier<C> {
    fn len(&self) -> usize {
        self.pieces.iter().map(|p| p.len()).sum()
    }

    fn step(&mut self, step: &Step) -> std::result::Result<(), Failure> {
        let n = self.len();
        let parallel = n >= PARALLEL_MIN;
        let ways = if parallel {
            2 * rayon::current_num_threads().max(1)
        } else {
            1
        };
        // 1. Extend every piece into its streams.
        self.scratch.resize_with(self.pieces.len(), Vec::new);
        for sc in &mut self.scratch {
            sc.resize_with(step.streams.max(sc.len()), Piece::new);
            sc.iter_mut().for_each(Piece::clear);
        }
        let work = self.pieces.iter().zip(self.scratch.iter_mut());
        if parallel {
            work.par_bridge()
                .for_each(|(p, sc)| step.extend(p, &mut sc[..step.streams]));
        } else {
            work.for_each(|(p, sc)| step.extend(p, &mut sc[..step.streams]));
        }
        if step.streams == 1 {
            // Nothing forgotten: every piece's single stream is already the next piece.
            for (p, sc) in self.pieces.iter_mut().zip(self.scratch.iter_mut()) {
                std::mem::swap(p, &mut sc[0]);
            }
            return Ok(());
        }
        // 2. Split the output key space into `ways` ranges of similar size.
        let mut splitters: Vec<u64> = Vec::new();
        if ways > 1 {
            let mut sample = Vec::new();
            for sc in &self.scratch {
                for piece in &sc[..step.streams] {
                    let len = piece.len();
                    for k in 0..16.min(len) {
                        sample.push(piece.keys[k * len / 16.min(len)]);
                    }
                }
            }
            sample.sort_unstable();
            splitters = (1..ways).map(|r| sample[r * sample.len() / ways]).collect();
            splitters.dedup();
        }
        // 3. Merge each range's streams into its own output piece.
        let ranges = splitters.len() + 1;
        self.next
            .resize_with(ranges.max(self.next.len()), Piece::new);
        self.next.truncate(ranges);
        let scratch = &self.scratch;
        let merge_range = |r: usize, out: &mut Piece<C>| {
            out.clear();
            let lo = if r == 0 { 0 } else { splitters[r - 1] };
            let hi = splitters.get(r).copied().unwrap_or(u64::MAX);
            let cursors: Vec<Cursor<C>> = (0..step.streams)
                .map(|s| {
                    let slices = scratch
                        .iter()
                        .filter_map(|sc| {
                            let p = &sc[s];
                            let a = p.keys.partition_point(|&k| k < lo);
                            let b = p.keys.partition_point(|&k| k < hi);
                            (a < b).then(|| (&p.keys[a..b], &p.counts[a..b]))
                        })
                        .collect();
                    Cursor { slices, i: 0, j: 0 }
                })
                .collect();
            merge_streams(cursors, out)
        };
        if ranges > 1 {
            self.next
                .par_iter_mut()
                .enumerate()
                .map(|(r, out)| merge_range(r, out))
                .collect::<std::result::Result<Vec<()>, Failure>>()?;
        } else {
            merge_range(0, &mut self.next[0])?;
        }
        std::mem::swap(&mut self.pieces, &mut self.next);
        Ok(())
    }
}

fn run<C: Tally>(
    model: &Model,
    plan: &Plan,
    config: &ExactConfig,
) -> std::result::Result<(BigUint, usize), Failure> {
    let leaving = &plan.leaving;
    // Follow the key layout (newest variable lowest) through the sweep.
    let field = |v: usize| width(model.variables[v].states);
    let mut layout: Vec<usize> = Vec::new(); // frontier variables from the lowest bits up
    let mut steps: Vec<Step> = Vec::with_capacity(plan.order.len());
    for (t, &v) in plan.order.iter().enumerate() {
        layout.insert(0, v);
        let mut offset = vec![0u32; 0];
        let mut acc = 0u32;
        for &u in &layout {
            offset.push(acc);
            acc += field(u);
        }
        debug_assert!(acc <= plan.max_bits, "the plan bounds the key width");
        let offset_of = |u: usize| {
            offset[layout
                .iter()
                .position(|&w| w == u)
                .expect("on the frontier")]
        };
        let checks: Vec<Check> = plan.completes[t]
            .iter()
            .map(|&c| {
                let con = &model.constraints[c];
                let table = &model.tables[con.table];
                let mut stride = 1u64;
                let mut new_stride = 0;
                let mut fields = Vec::with_capacity(con.scope.len());
                for (&u, &q) in con.scope.iter().zip(&table.radices) {
                    if u == v {
                        new_stride = stride;
                    } else {
                        fields.push((offset_of(u), (1u64 << width(q)) - 1, stride));
                    }
                    stride *= q as u64;
                }
                Check {
                    fields,
                    new_stride,
                    table,
                }
            })
            .collect();
        let dropped: Vec<(u32, u64)> = leaving[t]
            .iter()
            .map(|&u| (offset_of(u), (1u64 << field(u)) - 1))
            .collect();
        let streams = dropped
            .iter()
            .fold(1usize, |a, &(_, m)| a * (m as usize + 1));
        // Runs of kept fields, packed down.
        let mut segments: Vec<(u32, u64, u32)> = Vec::new();
        let mut dst = 0u32;
        for (i, &u) in layout.iter().enumerate() {
            if leaving[t].contains(&u) {
                continue;
            }
            let w = field(u);
            match segments.last_mut() {
                Some((src, mask, d))
                    if *src + (64 - mask.leading_zeros()) == offset[i]
                        && *d + (64 - mask.leading_zeros()) == dst =>
                {
                    *mask = (*mask << w) | ((1u64 << w) - 1);
                }
                _ => segments.push((offset[i], (1u64 << w) - 1, dst)),
            }
            dst += w;
        }
        layout.retain(|u| !leaving[t].contains(u));
        steps.push(Step {
            states: model.variables[v].states as u64,
            width: field(v),
            checks,
            dropped,
            segments,
            streams,
        });
    }
    let mut frontier: Frontier<C> = Frontier {
        pieces: vec![Piece {
            keys: vec![0],
            counts: vec![C::one()],
        }],
        next: Vec::new(),
        scratch: Vec::new(),
    };
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
        frontier.step(step)?;
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
        for c in &p.counts {
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
    fn wide_integers_carry_and_detect_overflow() {
        let mut a = Wide::<2>([u64::MAX, 0]);
        assert!(a.add(&Wide::<2>::one()));
        assert_eq!(a.0, [0, 1]);
        assert_eq!(a.into_big(), BigUint::from(1u128 << 64));
        let mut full = Wide::<2>([u64::MAX, u64::MAX]);
        assert!(
            !full.add(&Wide::<2>::one()),
            "2^128 does not fit in two limbs"
        );
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
