//! Sixty-four chains of a two-state model in the bits of one machine word.
//!
//! # What it computes
//!
//! The same Markov chain as [`super::moves`] in its purpose, the Boltzmann distribution
//! e^{−βE} over the assignments of an unweighted model whose variables all have two states
//! (ice and spin-ice arrows, dimers, Ising spins), but for 64 independent chains at once:
//! bit l of `words[v]` is the value of variable v in chain l (a *lane*). The sampler's
//! per-sweep work, not its variance per sweep, sets the cost of a three-dimensional count
//! once the moves of issue 15 have cut the correlation times; bit-slicing does the work of
//! 64 chains in about the time of a few.
//!
//! # Method
//!
//! *Rules as bit logic.* Every rule table is compiled, once per table and per position of
//! the variable that moves, into a multiplexer tree over the other variables of its scope:
//! its leaves are the table's entries (all-ones words where the table forbids), and each
//! level selects by one variable's word, `lo ^ (x & (hi ^ lo))`. What is left are the two
//! cofactors, violated-if-0 and violated-if-1, for all 64 lanes; the value now and the
//! value after a flip are selected from them by the moving variable's own word.
//!
//! *The energy change* ΔE = Σ_c (a_c − b_c) (after minus before) is added up in bit
//! planes, one counter per lane: S = Σ_c (1 + a_c − b_c) ∈ [0, 2d], whose two bits per term
//! are ¬(a ⊕ b) and a ∧ ¬b. The lanes where ΔE = e are then an equality test on the planes.
//!
//! *Metropolis acceptance with exact Bernoulli masks.* A lane with ΔE < 0 flips, one with
//! ΔE = 0 flips with probability 1/2, and a lane with ΔE = e > 0 flips with probability
//! e^{−βe} (Metropolis, Rosenbluth, Rosenbluth, Teller & Teller 1953, J. Chem. Phys. 21,
//! 1087; the acceptances A(Δ) keep A(Δ)/A(−Δ) = e^{−βΔ}, so each update satisfies detailed
//! balance). Plain Metropolis flips at ΔE = 0 every time; in a sweep in fixed order the
//! zero-energy moves of a ground state then run in fixed cycles, and on the triangular
//! antiferromagnet the chains sampled too few of the ground states (a mean pull of −0.43). The mask of those that flip compares a
//! uniform 64-bit number per lane with p = ⌊e^{−βe}·2⁶⁴⌋/2⁶⁴, bit by bit from the most
//! significant, with one random word per bit for all lanes at once: where p's bit is 1 a
//! lane whose random bit is 0 is decided (below p), where it is 0 a lane whose random bit
//! is 1 is decided (above p); the others go on. Only the lanes with that ΔE are
//! compared, and the comparison stops when none is undecided, so a mask costs about
//! log₂(lanes) + 2 random words. The probabilities are exactly those of the scalar
//! comparison u64 < p. Every single-variable update satisfies detailed balance, so a sweep
//! in a fixed order leaves the Boltzmann distribution invariant in every lane (tested by
//! exact enumeration).
//!
//! *The conditional estimate of E* ([`super::moves::Chain::conditional_energy`]) is
//! gathered during the sweep as there: for a variable all of whose constraints have the
//! same size K, its terms are (B + P_flip(ΔE)·ΔE)/K, with B the violated constraints it
//! touches and P_flip(e) = 1/(1 + e^{βe}) its Boltzmann probability of the other value
//! (the conditional distribution, whatever the move), summed over the lanes by population
//! counts.
//!
//! *Sweeps compiled for a shape.* Where every movable variable touches the same number D
//! of constraints, all of K variables (D = 2, K = 4: the ices and spin ice; 2 and 3:
//! kagome ice and dimers on the honeycomb; 6 and 3: the triangular antiferromagnet), the
//! sweep is compiled for that shape: the loops over a variable's constraints and over the
//! energy classes unroll, and the multiplexer trees are called without dispatch on their
//! size. Same arithmetic and the same random numbers in the same order, so the same bits
//! as the general sweep (tested). Measured (`examples/lane_timing.rs`, best of 8 × 300
//! sweeps, median of 3 runs, 2026-12-04): on ice Ih 8×8×4 113.7, 172.6, 91.4, 68.0 µs per
//! sweep at β = 0.5, 2, 3, 5 against 135.8, 212.8, 113.9, 90.2 before (0.75–0.84 of the
//! time); spin ice 6×6×6 0.75–0.85; the triangular AFM 48×48 0.86–0.91.
//!
//! What lanes cannot do: loop moves and defect-focused moves need one chain's own
//! bookkeeping, so they are not run here ([`LaneKernel::new`] says which models qualify).
//!
//! # Complexity
//!
//! A sweep costs O(Σ_v Σ_{c ∋ v} 2^{|c|}) word operations for 64 lanes, plus about
//! log₂ 64 + 2 random words per variable and positive ΔE present; memory O(variables +
//! Σ_tables |c|·2^{|c|}).

use rand_pcg::Pcg64Mcg;

use crate::model::Model;
use rand::Rng;

/// Chains per word.
pub const LANES: usize = 64;

/// Largest scope compiled to bit logic (its multiplexer tree has 2^8 leaves).
const MAX_SCOPE: usize = 8;

/// One (constraint, variable) incidence, compiled.
#[derive(Clone, Copy, Debug)]
struct Touch {
    /// Offset of its leaves in [`LaneKernel::leaves`]: 2^arity words, the table permuted so
    /// that the moving variable is the most significant position.
    leaves: u32,
    /// Offset of the other scope variables in [`LaneKernel::others`] (arity − 1 of them, in
    /// the order of the tree's levels).
    others: u32,
    /// Size of the constraint's scope.
    arity: u8,
}

/// The part of the bit-sliced sampler shared by all words of chains.
#[derive(Clone, Debug)]
pub struct LaneKernel {
    variables: usize,
    /// The variables with two states (the others are pinned and never move), in order.
    movable: Vec<u32>,
    /// For variable v, `touches[start[v]..start[v + 1]]`.
    start: Vec<u32>,
    touches: Vec<Touch>,
    others: Vec<u32>,
    leaves: Vec<u64>,
    /// Per constraint: its first variable and the touch that evaluates it.
    whole: Vec<(u32, u32)>,
    /// Per variable: 1/K when all its constraints have K variables, else `None`.
    inv_size: Vec<Option<f64>>,
    /// Largest number of constraints one variable touches.
    max_degree: usize,
    /// (D, K) when every movable variable touches exactly D constraints and every
    /// constraint has K variables, for the sweeps compiled for that shape.
    uniform: Option<(usize, usize)>,
}

impl LaneKernel {
    /// Compile a model for bit-sliced sampling, or `None` when it does not qualify:
    /// every variable has two states (or one, pinned), no state carries a weight, no mean
    /// is imposed, every scope has at most 8 variables and no variable touches more than
    /// 15 constraints.
    pub fn new(model: &Model) -> Option<LaneKernel> {
        if model.is_weighted()
            || model.contradiction.is_some()
            || model
                .variables
                .iter()
                .any(|v| v.states > 2 || v.states == 0)
            || model
                .constraints
                .iter()
                .any(|c| c.scope.is_empty() || c.scope.len() > MAX_SCOPE)
        {
            return None;
        }
        let n = model.variables.len();
        if model
            .constraints
            .iter()
            .flat_map(|c| &c.scope)
            .any(|&v| model.variables[v].states != 2)
        {
            return None;
        }
        // Leaves per (table, position), shared by every constraint of that table.
        let mut compiled: std::collections::HashMap<(usize, usize), u32> = Default::default();
        let mut leaves = Vec::new();
        let mut lists: Vec<Vec<Touch>> = vec![Vec::new(); n];
        let mut sizes: Vec<Vec<usize>> = vec![Vec::new(); n];
        let mut others = Vec::new();
        let mut whole = Vec::with_capacity(model.constraints.len());
        for c in &model.constraints {
            let k = c.scope.len();
            let table = &model.tables[c.table];
            for (j, &v) in c.scope.iter().enumerate() {
                let offset = *compiled.entry((c.table, j)).or_insert_with(|| {
                    let at = leaves.len() as u32;
                    // New index: the other positions in scope order, then j on top.
                    let order: Vec<usize> = (0..k).filter(|&p| p != j).chain([j]).collect();
                    for new in 0..1usize << k {
                        let mut index = 0u64;
                        for (bit, &p) in order.iter().enumerate() {
                            index |= (((new >> bit) & 1) as u64) << p;
                        }
                        leaves.push(if table.allows(index) { 0 } else { u64::MAX });
                    }
                    at
                });
                if j == 0 {
                    whole.push((v as u32, lists[v].len() as u32));
                }
                lists[v].push(Touch {
                    leaves: offset,
                    others: others.len() as u32,
                    arity: k as u8,
                });
                sizes[v].push(k);
                others.extend(
                    c.scope
                        .iter()
                        .enumerate()
                        .filter(|&(p, _)| p != j)
                        .map(|(_, &w)| w as u32),
                );
            }
        }
        let max_degree = lists.iter().map(Vec::len).max().unwrap_or(0);
        if max_degree > 15 {
            return None;
        }
        let mut start = Vec::with_capacity(n + 1);
        let mut touches = Vec::new();
        for l in &lists {
            start.push(touches.len() as u32);
            touches.extend_from_slice(l);
        }
        start.push(touches.len() as u32);
        // `whole` held positions within each variable's list; make them absolute.
        for w in &mut whole {
            w.1 += start[w.0 as usize];
        }
        let movable: Vec<u32> = (0..n as u32)
            .filter(|&v| model.variables[v as usize].states == 2)
            .collect();
        let uniform = match (movable.first(), model.constraints.first()) {
            (Some(&v0), Some(c0)) => {
                let (d, a) = (lists[v0 as usize].len(), c0.scope.len());
                let same = movable.iter().all(|&v| lists[v as usize].len() == d)
                    && model.constraints.iter().all(|c| c.scope.len() == a);
                same.then_some((d, a))
            }
            _ => None,
        };
        let inv_size = sizes
            .iter()
            .map(|s| match s.first() {
                Some(&k) if s.iter().all(|&x| x == k) => Some(1.0 / k as f64),
                Some(_) => None,
                None => Some(0.0),
            })
            .collect();
        Some(LaneKernel {
            variables: n,
            movable,
            start,
            touches,
            others,
            leaves,
            whole,
            inv_size,
            max_degree,
            uniform,
        })
    }

    /// Number of variables.
    pub fn variables(&self) -> usize {
        self.variables
    }

    /// Whether the conditional estimate can be gathered during the sweep (every variable's
    /// constraints have one size).
    pub fn conditional_is_fused(&self) -> bool {
        self.inv_size.iter().all(Option::is_some)
    }

    /// 64 chains, each in a uniformly random assignment (the exact β = 0 distribution).
    pub fn lanes(&self, mut rng: Pcg64Mcg) -> Lanes {
        let mut words = vec![0u64; self.variables];
        for &v in &self.movable {
            words[v as usize] = rng.next_u64();
        }
        let mut lanes = Lanes {
            words,
            energy: 0,
            rng,
        };
        lanes.energy = lanes.recount(self);
        lanes
    }

    /// The two cofactors (violated with the moving variable at 0, at 1) of touch `t`, for
    /// all lanes.
    #[inline(always)]
    fn cofactors(&self, t: Touch, words: &[u64]) -> (u64, u64) {
        let leaves = &self.leaves[t.leaves as usize..];
        let others = &self.others[t.others as usize..];
        match t.arity {
            1 => (leaves[0], leaves[1]),
            2 => reduce::<2, 2>(leaves, others, words),
            3 => reduce::<3, 4>(leaves, others, words),
            4 => reduce::<4, 8>(leaves, others, words),
            5 => reduce::<5, 16>(leaves, others, words),
            6 => reduce::<6, 32>(leaves, others, words),
            7 => reduce::<7, 64>(leaves, others, words),
            _ => reduce::<8, 128>(leaves, others, words),
        }
    }
}

/// `lo` where `x` is 0, `hi` where it is 1.
#[inline(always)]
fn select(x: u64, hi: u64, lo: u64) -> u64 {
    lo ^ (x & (hi ^ lo))
}

/// Reduce the 2^K leaves over the K − 1 other variables (H = 2^{K−1} words of scratch),
/// leaving the two cofactors.
#[inline(always)]
fn reduce<const K: usize, const H: usize>(
    leaves: &[u64],
    others: &[u32],
    words: &[u64],
) -> (u64, u64) {
    let mut buf = [0u64; H];
    let x = words[others[0] as usize];
    for i in 0..H {
        buf[i] = select(x, leaves[2 * i + 1], leaves[2 * i]);
    }
    let mut len = H;
    for &o in &others[1..K - 1] {
        let x = words[o as usize];
        len /= 2;
        for i in 0..len {
            buf[i] = select(x, buf[2 * i + 1], buf[2 * i]);
        }
    }
    (buf[0], buf[1])
}

/// Below this acceptance probability a class of lanes is decided by geometric skips
/// ([`Acceptance::flips`]) rather than bit by bit: one random number usually decides all
/// its lanes (none flips), where the bitwise comparison needs about eight.
const SKIP_BELOW: f64 = 1.0 / 16.0;

/// The Metropolis acceptance of one sweep at one β: for every energy rise e = 1..=d, its
/// probability p_e = e^{−βe} as a 64-bit threshold, and for the small ones the tables of
/// the geometric skips.
struct Acceptance {
    /// ⌊p_e·2⁶⁴⌋ (index 0 unused).
    threshold: Vec<u64>,
    /// Per e: whether p_e < [`SKIP_BELOW`].
    skip: Vec<bool>,
    /// Per e: ln(1 − p_e).
    ln_stay: Vec<f64>,
    /// Per e, m = 0..=64: (1 − p_e)^m, the probability that none of m lanes flips
    /// (row-major, 65 per e).
    none: Vec<f64>,
}

impl Acceptance {
    fn new(beta: f64, d_max: usize) -> Acceptance {
        let p: Vec<f64> = (0..=d_max).map(|e| (-beta * e as f64).exp()).collect();
        let threshold = p.iter().map(|&p| super::moves::threshold_of(p)).collect();
        let skip: Vec<bool> = p
            .iter()
            .enumerate()
            .map(|(e, &p)| e > 0 && p < SKIP_BELOW)
            .collect();
        let ln_stay: Vec<f64> = p.iter().map(|&p| (-p).ln_1p()).collect();
        let none = ln_stay
            .iter()
            .flat_map(|&l| (0..=LANES).map(move |m| (l * m as f64).exp()))
            .collect();
        Acceptance {
            threshold,
            skip,
            ln_stay,
            none,
        }
    }

    /// The lanes of `uphill` that flip: a lane in `classes[e]` (disjoint masks, index 0
    /// unused) flips with probability p_e, independently of every other lane.
    ///
    /// Classes with p_e ≥ [`SKIP_BELOW`] are decided together bit by bit: a uniform
    /// 64-bit number per lane is compared with ⌊p_e·2⁶⁴⌋ from the most significant bit,
    /// one random word per bit for all lanes at once, until every lane is decided.
    ///
    /// A class with smaller p_e, of m lanes in bit order, is decided by geometric skips:
    /// the index G of its first lane that flips has P(G ≥ i) = (1 − p)^i, so with u
    /// uniform on (0, 1], G = ⌊ln u / ln(1 − p)⌋; u ≤ (1 − p)^m means none flips (one
    /// random number, most of the time), and otherwise the lanes after G are decided
    /// the same way. Exact up to the rounding of doubles (relative 1e-16).
    ///
    /// With `D` > 0 there are exactly `D` classes after index 0 (the loops unroll), with
    /// `D` = 0 as many as `classes` holds.
    #[inline(always)]
    fn flips<const D: usize>(&self, rng: &mut Pcg64Mcg, classes: &[u64], uphill: u64) -> u64 {
        // A constant length for the compiler to unroll by (the caller's slice has it too).
        let classes = if D == 0 { classes } else { &classes[..=D] };
        let mut below = 0u64;
        let mut bitwise = uphill;
        for (e, &class) in classes.iter().enumerate().skip(1) {
            if class == 0 || !self.skip[e] {
                continue;
            }
            bitwise &= !class;
            let mut rest = class;
            loop {
                let m = rest.count_ones() as usize;
                if m == 0 {
                    break;
                }
                let u = ((rng.next_u64() >> 11) + 1) as f64 * (1.0 / 9007199254740992.0);
                if u <= self.none[e * (LANES + 1) + m] {
                    break;
                }
                let g = ((u.ln() / self.ln_stay[e]) as usize).min(m - 1);
                rest &= u64::MAX << nth_one(rest, g as u32);
                below |= rest & rest.wrapping_neg();
                rest &= rest - 1;
            }
        }
        let mut undecided = bitwise;
        let mut bit = 63;
        while undecided != 0 {
            let r = rng.next_u64();
            // The lanes whose threshold has a 1 at this bit.
            let mut ones = 0u64;
            for (c, &t) in classes.iter().zip(&self.threshold).skip(1) {
                ones |= c & 0u64.wrapping_sub((t >> bit) & 1);
            }
            // Random bit 0 under a 1: below. Random bit equal to the threshold's: undecided.
            below |= undecided & ones & !r;
            undecided &= !(r ^ ones);
            if bit == 0 {
                // Equal to the threshold in all 64 bits: not below.
                break;
            }
            bit -= 1;
        }
        below
    }
}

/// The position of the one bit of `x` with `n` ones below it (`n` < the ones of `x`),
/// found without branches by halving the word: the skips of [`Acceptance::flips`] land
/// anywhere among 64 lanes, where clearing the lowest bit `n` times cost a dependent chain
/// of 2n operations.
#[inline(always)]
fn nth_one(x: u64, n: u32) -> u32 {
    let (mut x, mut n, mut at) = (x, n, 0u32);
    for width in [32u32, 16, 8, 4, 2, 1] {
        let low = (x & ((1u64 << width) - 1)).count_ones();
        let skip = (n >= low) as u32;
        n -= low * skip;
        x >>= width * skip;
        at += width * skip;
    }
    at
}

/// Add a term (two bits, `high`·2 + `low`) to the per-lane counters in bit planes.
#[inline(always)]
fn add_term<const B: usize>(planes: &mut [u64; B], low: u64, high: u64) {
    let mut carry = low;
    for p in planes.iter_mut() {
        let t = *p & carry;
        *p ^= carry;
        carry = t;
    }
    let mut carry = high;
    for p in planes[1..].iter_mut() {
        let t = *p & carry;
        *p ^= carry;
        carry = t;
    }
}

/// The lanes whose counter equals `value`.
#[inline(always)]
fn equal<const B: usize>(planes: &[u64; B], value: usize) -> u64 {
    let mut m = u64::MAX;
    for (i, &p) in planes.iter().enumerate() {
        m &= if (value >> i) & 1 == 1 { p } else { !p };
    }
    m
}

/// 64 chains: the value of every variable in every lane, the number of violated
/// constraints summed over the lanes, and the random stream.
#[derive(Clone, Debug)]
pub struct Lanes {
    /// Bit l of `words[v]`: the value of variable v in lane l.
    pub words: Vec<u64>,
    /// Violated constraints, summed over the 64 lanes.
    energy: u64,
    rng: Pcg64Mcg,
}

impl Lanes {
    /// Violated constraints, summed over the 64 lanes.
    pub fn energy(&self) -> u64 {
        self.energy
    }

    /// The assignment of lane `l`.
    pub fn lane(&self, l: usize) -> Vec<u8> {
        self.words.iter().map(|w| ((w >> l) & 1) as u8).collect()
    }

    /// Violated constraints in every lane, counted afresh from the values.
    pub fn lane_energies(&self, k: &LaneKernel) -> [u64; LANES] {
        let mut e = [0u64; LANES];
        for &(v, t) in &k.whole {
            let mut m = self.violated(k, v, t);
            while m != 0 {
                e[m.trailing_zeros() as usize] += 1;
                m &= m - 1;
            }
        }
        e
    }

    /// The lanes where the constraint evaluated by touch `t` of variable `v` is violated.
    #[inline]
    fn violated(&self, k: &LaneKernel, v: u32, t: u32) -> u64 {
        let (g0, g1) = k.cofactors(k.touches[t as usize], &self.words);
        select(self.words[v as usize], g1, g0)
    }

    /// Violated constraints summed over the lanes, counted afresh.
    fn recount(&self, k: &LaneKernel) -> u64 {
        k.whole
            .iter()
            .map(|&(v, t)| self.violated(k, v, t).count_ones() as u64)
            .sum()
    }

    /// One Metropolis sweep over the variables in order, at inverse temperature `beta`
    /// (> 0), in all lanes. With `measure`, returns the conditional estimate of the
    /// violated constraints summed over the lanes (when the kernel gathers it during the
    /// sweep), else the count after the sweep.
    pub fn sweep(&mut self, k: &LaneKernel, beta: f64, measure: bool) -> f64 {
        match (k.uniform, 2 * k.max_degree) {
            (Some((2, 4)), _) => self.sweep_planes::<3, 2, 4, 8>(k, beta, measure),
            (Some((2, 3)), _) => self.sweep_planes::<3, 2, 3, 4>(k, beta, measure),
            (Some((6, 3)), _) => self.sweep_planes::<4, 6, 3, 4>(k, beta, measure),
            (_, 0..=3) => self.sweep_planes::<2, 0, 2, 2>(k, beta, measure),
            (_, 4..=7) => self.sweep_planes::<3, 0, 2, 2>(k, beta, measure),
            (_, 8..=15) => self.sweep_planes::<4, 0, 2, 2>(k, beta, measure),
            _ => self.sweep_planes::<5, 0, 2, 2>(k, beta, measure),
        }
    }

    /// The sweep with counters of `B` bit planes. With `D` > 0 every movable variable
    /// touches exactly `D` constraints, all of `K` variables (`H` = 2^{K−1}), and the
    /// loops over them are unrolled; with `D` = 0 any model.
    fn sweep_planes<const B: usize, const D: usize, const K: usize, const H: usize>(
        &mut self,
        k: &LaneKernel,
        beta: f64,
        measure: bool,
    ) -> f64 {
        let d_max = k.max_degree;
        let acceptance = Acceptance::new(beta, d_max);
        // Heat-bath probability of the other value, for the conditional estimate, times e.
        let flip_times_e: Vec<f64> = (0..=2 * d_max)
            .map(|s| {
                let e = s as f64 - d_max as f64;
                e / (1.0 + (beta * e).exp())
            })
            .collect();
        let fused = measure && k.conditional_is_fused();
        let mut estimate = 0.0;
        let mut energy = self.energy as i64;
        // The stream in a local, so that it stays in registers through the sweep.
        let mut rng = self.rng.clone();
        for &v in &k.movable {
            let v = v as usize;
            let x = self.words[v];
            let first = k.start[v] as usize;
            let d = if D == 0 {
                k.start[v + 1] as usize - first
            } else {
                D
            };
            let touches = &k.touches[first..first + d];
            let mut planes = [0u64; B];
            let mut before = 0u32;
            for &t in touches {
                let (g0, g1) = if D == 0 {
                    k.cofactors(t, &self.words)
                } else {
                    reduce::<K, H>(
                        &k.leaves[t.leaves as usize..],
                        &k.others[t.others as usize..],
                        &self.words,
                    )
                };
                let b = select(x, g1, g0);
                let a = select(x, g0, g1);
                add_term(&mut planes, !(a ^ b), a & !b);
                before += b.count_ones();
            }
            let mut classes = [0u64; 16];
            let mut uphill = 0u64;
            let mut terms = 0.0;
            for e in 1..=d {
                let down = equal(&planes, d - e);
                let up = equal(&planes, d + e);
                energy -= (e as u32 * down.count_ones()) as i64;
                if fused {
                    terms += flip_times_e[d_max - e] * down.count_ones() as f64
                        + flip_times_e[d_max + e] * up.count_ones() as f64;
                }
                classes[e] = up;
                uphill |= up;
            }
            // ΔE = 0 flips with probability 1/2 (one random bit per lane): flipped every
            // time, as plain Metropolis has it, the zero-energy moves of a ground state
            // run in fixed cycles through a sweep in order, and the chains no longer
            // sample all the ground states (measured: a mean pull of −0.43 on the
            // triangular antiferromagnet 6×6 over 30 seeds).
            let level = equal(&planes, d);
            let mut accept = !uphill & !(level & rng.next_u64());
            if uphill != 0 {
                let flips = acceptance.flips::<D>(&mut rng, &classes[..=d], uphill);
                accept |= flips;
                for (e, &c) in classes[..=d].iter().enumerate().skip(1) {
                    energy += (e as u32 * (flips & c).count_ones()) as i64;
                }
            }
            if fused {
                estimate += (before as f64 + terms) * k.inv_size[v].unwrap_or(0.0);
            }
            self.words[v] = x ^ accept;
        }
        self.energy = energy as u64;
        self.rng = rng;
        if fused { estimate } else { self.energy as f64 }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::counters::sampling::testing::{SQUARE_ICE, assert_frequencies, boltzmann, model};

    /// Every lane's assignment against the exact Boltzmann weights (enumeration), by a
    /// chi-square over all lanes' thinned samples.
    fn check_lanes(m: &Model, beta: f64, samples: usize, thin: usize) {
        let k = LaneKernel::new(m).expect("two-state unweighted model");
        let exact = boltzmann(m, beta);
        let mut lanes = k.lanes(Pcg64Mcg::new(777));
        for _ in 0..50 {
            lanes.sweep(&k, beta, false);
        }
        let mut counts = vec![0u64; exact.len()];
        for _ in 0..samples {
            for _ in 0..thin {
                lanes.sweep(&k, beta, false);
            }
            for l in 0..LANES {
                // Mixed radix as the enumeration: pinned variables (one state) take no digit.
                let (mut code, mut stride) = (0u64, 1u64);
                for (v, var) in m.variables.iter().enumerate() {
                    code += ((lanes.words[v] >> l) & 1) * stride;
                    stride *= var.states as u64;
                }
                counts[code as usize] += 1;
            }
            let fresh: u64 = lanes.lane_energies(&k).iter().sum();
            assert_eq!(fresh, lanes.energy(), "incremental energy drifted");
        }
        assert_frequencies(&counts, &exact, (samples * LANES) as f64);
    }

    #[test]
    fn issue15_lanes_satisfy_detailed_balance() {
        // Square ice 2x2: 8 arrows, 4 vertices with 4-variable rules; triangular AFM 3x3:
        // 9 spins in 6 triangles each (degree 6, three bit planes per counter).
        let ice = model(SQUARE_ICE, "square-ice.yaml", "2x2", 2);
        check_lanes(&ice, 0.7, 3000, 10);
        check_lanes(&ice, 2.5, 3000, 20);
        let tafm = model(
            include_str!("../../../lattices/triangular-afm.yaml"),
            "triangular-afm.yaml",
            "3x3",
            2,
        );
        check_lanes(&tafm, 1.0, 3000, 10);
    }

    #[test]
    fn issue15_lanes_satisfy_detailed_balance_with_vacancies() {
        // Spin ice 2x2x1 with two sites vacant: pinned variables and tetrahedra of 2, 3
        // and 4 spins (several arities, no fused conditional estimate).
        let l = crate::Lattice::from_yaml(
            include_str!("../../../lattices/diluted-spin-ice.yaml"),
            "diluted-spin-ice.yaml",
        )
        .unwrap();
        let cells = crate::cluster::Cells::parse("2x2x1", None, 3).unwrap();
        let cluster = crate::cluster::Cluster::new(&l.crystal, cells).unwrap();
        let mut vacant = vec![false; cluster.sites.len()];
        vacant[0] = true;
        vacant[5] = true;
        let m = Model::with_vacancies(&cluster, &vacant).unwrap();
        let arities: std::collections::BTreeSet<usize> =
            m.constraints.iter().map(|c| c.scope.len()).collect();
        assert_eq!(arities.into_iter().collect::<Vec<_>>(), vec![2, 3, 4]);
        let k = LaneKernel::new(&m).unwrap();
        assert!(!k.conditional_is_fused());
        for beta in [1.0, 3.0, 5.5] {
            check_lanes(&m, beta, 3000, 20);
        }
    }

    #[test]
    fn issue15_nth_one_finds_the_bit_that_clearing_finds() {
        // Against the loop it replaced: clear the lowest one bit n times, take the lowest.
        let mut rng = Pcg64Mcg::new(11);
        for _ in 0..20_000 {
            let x = rng.next_u64() & rng.next_u64() | 1 << (rng.next_u64() % 64);
            let n = (rng.next_u64() % x.count_ones() as u64) as u32;
            let mut rest = x;
            for _ in 0..n {
                rest &= rest - 1;
            }
            assert_eq!(nth_one(x, n), rest.trailing_zeros(), "{x:#x}, n {n}");
            assert_eq!(x & u64::MAX << nth_one(x, n), rest);
        }
        assert_eq!(nth_one(u64::MAX, 63), 63);
        assert_eq!(nth_one(1 << 63, 0), 63);
    }

    #[test]
    fn issue15_sweeps_compiled_for_a_shape_equal_the_general_sweep() {
        // Ice (every arrow in 2 rules of 4), the triangular AFM (6 of 3) and kagome ice
        // (2 of 3): the unrolled sweep and the general one, from the same stream, give the
        // same bits, energies and conditional estimates at every sweep.
        let cases = [
            (SQUARE_ICE, "square-ice.yaml", "4x4", (2, 4)),
            (
                include_str!("../../../lattices/triangular-afm.yaml"),
                "triangular-afm.yaml",
                "6x6",
                (6, 3),
            ),
            (
                include_str!("../../../lattices/kagome-ice.yaml"),
                "kagome-ice.yaml",
                "3x3",
                (2, 3),
            ),
        ];
        for (text, name, cells, shape) in cases {
            let m = model(text, name, cells, 2);
            let k = LaneKernel::new(&m).unwrap();
            assert_eq!(k.uniform, Some(shape), "{name}");
            let mut general = k.clone();
            general.uniform = None;
            let mut a = k.lanes(Pcg64Mcg::new(3));
            let mut b = general.lanes(Pcg64Mcg::new(3));
            for (i, beta) in [0.3, 1.0, 2.0, 3.5, 6.0]
                .into_iter()
                .cycle()
                .take(60)
                .enumerate()
            {
                let measure = i % 2 == 0;
                let (x, y) = (a.sweep(&k, beta, measure), b.sweep(&general, beta, measure));
                assert_eq!(x.to_bits(), y.to_bits(), "{name}: sweep {i}");
                assert_eq!(a.words, b.words, "{name}: sweep {i}");
                assert_eq!(a.energy(), b.energy(), "{name}: sweep {i}");
            }
        }
    }

    #[test]
    fn issue15_acceptance_masks_have_the_probabilities_asked() {
        // β = 2 on degree 3: p = 0.14 (bitwise), 0.018 and 0.0025 (geometric skips), on
        // three disjoint classes of lanes; 40000 masks, each class's rate against p_e
        // within 5σ of the binomial. Then β = 0.05 (all bitwise).
        let mut rng = Pcg64Mcg::new(99);
        for beta in [2.0, 0.05] {
            let a = Acceptance::new(beta, 3);
            let classes = [
                0u64,
                0x0000_0000_FFFF_FFFF,
                0x00FF_FFFF_0000_0000,
                0xFF00_0000_0000_0000,
            ];
            let uphill = classes.iter().fold(0, |x, c| x | c);
            let n = 40_000u64;
            let mut ones = [0u64; 4];
            for _ in 0..n {
                let f = a.flips::<0>(&mut rng, &classes, uphill);
                assert_eq!(f & !uphill, 0, "a lane outside the classes flipped");
                for e in 1..4 {
                    ones[e] += (f & classes[e]).count_ones() as u64;
                }
            }
            for e in 1..4 {
                let p = (-beta * e as f64).exp();
                let trials = (n * classes[e].count_ones() as u64) as f64;
                let mean = ones[e] as f64 / trials;
                let sigma = (p * (1.0 - p) / trials).sqrt();
                assert!(
                    (mean - p).abs() < 5.0 * sigma,
                    "β {beta}, e {e}: {mean} against {p}"
                );
            }
            let small = beta > 1.0;
            assert_eq!(a.skip, vec![false, false, small, small]);
        }
    }

    #[test]
    fn issue15_lane_conditional_estimate_has_the_exact_mean() {
        // The mean of the fused estimate over many sweeps against ⟨E⟩ by enumeration.
        let ice = model(SQUARE_ICE, "square-ice.yaml", "2x2", 2);
        let k = LaneKernel::new(&ice).unwrap();
        for beta in [0.5, 1.5] {
            let exact = boltzmann(&ice, beta);
            let mean_e: f64 = exact
                .iter()
                .enumerate()
                .map(|(code, p)| {
                    p * crate::counters::sampling::testing::energy(&ice, code as u64) as f64
                })
                .sum();
            let mut lanes = k.lanes(Pcg64Mcg::new(5));
            for _ in 0..50 {
                lanes.sweep(&k, beta, false);
            }
            let (mut s, mut s2) = (0.0, 0.0);
            let n = 4000;
            for _ in 0..n {
                let x = lanes.sweep(&k, beta, true) / LANES as f64;
                s += x;
                s2 += x * x;
            }
            let mean = s / n as f64;
            let se = ((s2 / n as f64 - mean * mean) / n as f64).sqrt();
            assert!(
                (mean - mean_e).abs() < 5.0 * se + 1e-9,
                "β {beta}: {mean} ± {se} against {mean_e}"
            );
        }
    }
}
