//! Single-variable heat-bath moves on a [`Model`], driven by its constraint tables.
//!
//! # What it computes
//!
//! A Markov chain over the assignments of the model's variables whose stationary
//! distribution is the Boltzmann weight w(σ) exp(−β E), where E is the number of violated
//! constraints and w(σ) = ∏_v w_v(σ_v) the product of the states' weights (`weights:`,
//! with the conjugate fields of imposed means added to their logarithms; 1 without them). [`Kernel`] is the immutable part shared by every replica (for each variable
//! the constraints it touches with the stride of the variable in that constraint's table
//! index; the tables concatenated into one bit set); [`Chain`] is one replica's state (the
//! values, the current table index of every constraint, the energy and the random stream).
//!
//! # Method
//!
//! Heat-bath (Gibbs) update of one variable at a time: the energy change of every value
//! x of variable v is read from the tables by shifting each touched constraint's index by
//! (x − value)·stride, and x is drawn with probability ∝ w_v(x) exp(−β ΔE_x). Each update
//! satisfies detailed balance; a sweep visits the variables in order (Glauber 1963,
//! J. Math. Phys. 4, 294; Newman & Barkema 1999, *Monte Carlo Methods in Statistical
//! Physics*, ch. 3 — from memory).
//!
//! # Defect-focused moves
//!
//! At large β only a handful of constraints are violated, and a sweep spends almost all of
//! its updates far from them: on a 3D ice a defect moves about one step per sweep, so a
//! pair needs hundreds of sweeps to meet and annihilate, and ⟨E⟩ has a correlation time
//! of 100–500 sweeps (ice Ih 8×8×4 at β = 6–10). [`Chain::focused`] is a
//! Metropolis–Hastings move whose proposal picks a violated constraint, then one of its
//! variables, then a new value; from a defect-free assignment it picks any variable. The
//! acceptance ratio carries the proposal probabilities both ways (they depend on how
//! many constraints are violated before and after), so each move leaves w(σ) e^{−βE}
//! invariant (Hastings 1970, Biometrika 57, 97); mixed with sweeps the chain stays
//! ergodic (alone it is not always: on three colours of a triangle it cannot reach the
//! one-colour assignments). Tested against exact enumeration. The sampler makes one per
//! variable after each sweep: the defects must find each other across the cell, which
//! takes moves in proportion to its size; with them the correlation time of the estimate
//! of E on ice Ih 8×8×4 is under 3 sweeps from β = 6 on.
//!
//! # Sweeps that skip the quiet variables
//!
//! On models where every variable is two-state, unweighted and in the same number D of
//! constraints, and no allowed local assignment is one flip from another (the ice rules),
//! a variable whose constraints all hold flips with the one probability 1/(1 + e^{βD}).
//! [`Chain::sweep_skipping`] updates the few variables next to a violation one by one and
//! jumps over the rest by geometric draws: the same transition as the plain sweep for the
//! cost of the work next to the defects (half a one-chain step at β ≥ 5 on ice Ih, the
//! loop and focused moves being the other half). Tested against exact enumeration.
//!
//! # The conditional estimate of E
//!
//! [`Chain::conditional_energy`] and [`Chain::sweep_conditional`] measure
//! Σ_v Σ_{c ∋ v} (1/|c|) P_β(c violated | all variables but v) in place of E: each term
//! has the Boltzmann mean of the indicator of c (a Rao–Blackwell estimate: the variable's
//! heat-bath distribution is known exactly), so the sum has the mean ⟨E⟩_β with less
//! variance: 7 times less at β = 0.5 on ice Ih, 3 times at β = 1, 1.4 times at β = 2,
//! none from β = 3 on. Tested: its mean over the exact distribution equals ⟨E⟩ to
//! rounding on enumerated models.
//!
//! # Complexity
//!
//! One update costs O(q·d) table lookups for a variable with q states in d constraints;
//! memory is O(variables + constraints + table bits).

use rand::Rng;
use rand_pcg::Pcg64Mcg;

use crate::error::{Error, Result};
use crate::model::Model;

/// The part of the sampler shared by all replicas.
#[derive(Clone, Debug)]
pub struct Kernel {
    /// States of each variable.
    states: Vec<u8>,
    /// For variable v, `touches[start[v]..start[v + 1]]` are its (constraint, stride).
    start: Vec<u32>,
    touches: Vec<(u32, u32)>,
    /// Per constraint: offset, in bits, of its table in `bits`.
    table_offset: Vec<u64>,
    /// Every distinct table, each padded to whole words.
    bits: Vec<u64>,
    /// Largest number of constraints one variable touches.
    max_degree: usize,
    /// Whether every variable has two states (the fast path).
    binary: bool,
    /// The states' weights, when some state weighs other than 1 (`None`: every state
    /// weighs 1, and the chain runs exactly as an unweighted one).
    weights: Option<StateWeights>,
    /// For constraint c, `scope[scope_start[c]..scope_start[c + 1]]` are its variables
    /// (the defect-focused moves pick a variable of a violated constraint).
    scope_start: Vec<u32>,
    scope: Vec<u32>,
    /// Per constraint: 1 / the size of its scope.
    inv_size: Vec<f64>,
    /// The variables with two states or more (the others never move).
    free: Vec<u32>,
    /// Where a sweep may skip over the variables that touch no violated constraint
    /// ([`Chain::sweep_skipping`]); `None` on other models.
    quiet: Option<Quiet>,
    /// The largest constraint scope.
    max_scope: usize,
}

/// The shape that lets a heat-bath sweep skip: every variable two-state and unweighted,
/// each in the same number `degree` of constraints, and no allowed assignment of any
/// constraint one flip from another allowed one (the ice rules: two of four arrows in).
/// Then a variable whose constraints all hold flips with the one probability
/// 1/(1 + e^{β·degree}), and between the few variables next to a violation the sweep can
/// jump to the next such flip by a geometric draw.
#[derive(Clone, Copy, Debug)]
struct Quiet {
    /// Constraints per variable.
    degree: usize,
    /// Σ 1/|c| over a variable's constraints (the same for every variable): the term of
    /// the conditional estimate of E per unit of flip probability of a quiet variable.
    share: f64,
}

impl Quiet {
    /// The shape of a model's kernel parts, if a sweep can skip on it.
    fn of(
        model: &Model,
        binary: bool,
        weighted: bool,
        start: &[u32],
        touches: &[(u32, u32)],
        inv_size: &[f64],
    ) -> Option<Quiet> {
        if !binary || weighted || model.variables.is_empty() {
            return None;
        }
        let degree = (start[1] - start[0]) as usize;
        let share_of = |v: usize| -> f64 {
            touches[start[v] as usize..start[v + 1] as usize]
                .iter()
                .map(|&(c, _)| inv_size[c as usize])
                .sum()
        };
        let share = share_of(0);
        let uniform = (0..model.variables.len()).all(|v| {
            (start[v + 1] - start[v]) as usize == degree && (share_of(v) - share).abs() < 1e-12
        });
        // Every table of two-state variables has 2^K entries; an allowed entry x must
        // have every x with one bit flipped forbidden.
        let isolated = model.tables.iter().all(|t| {
            let size = t.size;
            if !size.is_power_of_two() {
                return false;
            }
            let bits = size.trailing_zeros();
            let allowed = |x: u64| (t.bits[(x >> 6) as usize] >> (x & 63)) & 1 == 1;
            (0..size)
                .filter(|&x| allowed(x))
                .all(|x| (0..bits).all(|j| !allowed(x ^ (1 << j))))
        });
        (degree > 0 && uniform && isolated).then_some(Quiet { degree, share })
    }
}

/// The weights of the variables' states, fields included, grouped into profiles (the
/// distinct weight vectors; a few per unit cell).
#[derive(Clone, Debug)]
struct StateWeights {
    /// Per variable: its profile.
    profile: Vec<u32>,
    /// Per profile: ln w of every state (−∞ for a state of weight 0).
    ln: Vec<Vec<f64>>,
    /// Per profile: w / Σ w, the distribution of the variable alone (β = 0).
    prob: Vec<Vec<f64>>,
    /// Per profile: w / max w, the heat-bath factors.
    rel: Vec<Vec<f64>>,
}

impl StateWeights {
    /// Group per-variable ln-weights into profiles.
    fn new(ln_weights: &[Vec<f64>]) -> StateWeights {
        let mut index: std::collections::HashMap<Vec<u64>, u32> = Default::default();
        let mut profile = Vec::with_capacity(ln_weights.len());
        let mut ln: Vec<Vec<f64>> = Vec::new();
        for lw in ln_weights {
            let key: Vec<u64> = lw.iter().map(|x| x.to_bits()).collect();
            let id = *index.entry(key).or_insert_with(|| {
                ln.push(lw.clone());
                (ln.len() - 1) as u32
            });
            profile.push(id);
        }
        let rel: Vec<Vec<f64>> = ln
            .iter()
            .map(|lw| {
                let top = lw.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                lw.iter().map(|&x| (x - top).exp()).collect()
            })
            .collect();
        let prob = rel
            .iter()
            .map(|r| {
                let total: f64 = r.iter().sum();
                r.iter().map(|x| x / total).collect()
            })
            .collect();
        StateWeights {
            profile,
            ln,
            prob,
            rel,
        }
    }
}

/// ln w of every state of every variable: ln of its `weights:` (−∞ for weight 0), plus
/// `fields[j]` on the imposed state of every variable of mean j (`Model::means`; an
/// empty `fields` adds nothing).
pub(crate) fn ln_weights(model: &Model, fields: &[f64]) -> Vec<Vec<f64>> {
    let mut out: Vec<Vec<f64>> = (0..model.variables.len())
        .map(|v| {
            (0..model.variables[v].states)
                .map(|s| match &model.variables[v].weights {
                    None => 0.0,
                    Some(w) => w[s as usize].ln(),
                })
                .collect()
        })
        .collect();
    for (mean, &h) in model.means.iter().zip(fields) {
        for &v in &mean.variables {
            // A held variable has one state (index 0), the state it is held at.
            let index = match model.variables[v].held {
                Some(held) if held == mean.state => Some(0),
                Some(_) => None,
                None => Some(mean.state as usize),
            };
            if let Some(x) = index.and_then(|i| out[v].get_mut(i)) {
                *x += h;
            }
        }
    }
    out
}

/// A uniform number in [0, 1) from 53 random bits.
#[inline(always)]
fn unit(x: u64) -> f64 {
    (x >> 11) as f64 * (1.0 / 9007199254740992.0)
}

/// An index uniform in 0..n from the 64 bits of `r` (Lemire's multiply-shift; the bias
/// is below n/2^64).
#[inline(always)]
fn pick(r: u64, n: usize) -> usize {
    ((r as u128 * n as u128) >> 64) as usize
}

/// A state drawn from the probabilities `p` with the uniform number `u` (the last state of
/// non-zero probability when rounding leaves `u` past the end).
fn draw(p: &[f64], mut u: f64) -> u8 {
    let mut last = 0;
    for (x, &px) in p.iter().enumerate() {
        if px > 0.0 {
            if u < px {
                return x as u8;
            }
            last = x;
        }
        u -= px;
    }
    last as u8
}

impl Kernel {
    /// Precompute the lookups of a model, with the weights of its states (`weights:`) and
    /// no fields on its imposed means. Variables may have at most 255 states.
    pub fn new(model: &Model) -> Result<Kernel> {
        Kernel::with_fields(model, &[])
    }

    /// Precompute the lookups of a model with the conjugate field `fields[j]` added to the
    /// ln-weight of the imposed state of every variable of mean j (`Model::means`; an
    /// empty slice means no fields). Variables may have at most 255 states.
    pub fn with_fields(model: &Model, fields: &[f64]) -> Result<Kernel> {
        let n = model.variables.len();
        let mut states = Vec::with_capacity(n);
        for (i, v) in model.variables.iter().enumerate() {
            if v.states > 255 || v.states == 0 {
                return Err(Error::Model(format!(
                    "variable {i} has {} states; the sampler handles 1 to 255",
                    v.states
                )));
            }
            states.push(v.states as u8);
        }
        let mut word_offset = Vec::with_capacity(model.tables.len());
        let mut bits = Vec::new();
        for t in &model.tables {
            word_offset.push(bits.len() as u64 * 64);
            bits.extend_from_slice(&t.bits);
        }
        let mut lists: Vec<Vec<(u32, u32)>> = vec![Vec::new(); n];
        let mut table_offset = Vec::with_capacity(model.constraints.len());
        let mut scope_start = Vec::with_capacity(model.constraints.len() + 1);
        let mut scope = Vec::new();
        for (c, con) in model.constraints.iter().enumerate() {
            scope_start.push(scope.len() as u32);
            scope.extend(con.scope.iter().map(|&v| v as u32));
            table_offset.push(word_offset[con.table]);
            let mut stride = 1u32;
            for &v in &con.scope {
                lists[v].push((c as u32, stride));
                stride *= model.variables[v].states;
            }
        }
        let mut start = Vec::with_capacity(n + 1);
        let mut touches = Vec::new();
        let mut max_degree = 0;
        for l in &lists {
            start.push(touches.len() as u32);
            max_degree = max_degree.max(l.len());
            touches.extend_from_slice(l);
        }
        start.push(touches.len() as u32);
        scope_start.push(scope.len() as u32);
        let free = (0..n as u32).filter(|&v| states[v as usize] >= 2).collect();
        let binary = states.iter().all(|&q| q == 2);
        if bits.len() as u64 * 64 > u32::MAX as u64 {
            return Err(Error::Model(
                "the rule tables are too large for the sampler (more than 2^32 bits)".into(),
            ));
        }
        let ln_weights = ln_weights(model, fields);
        let weights = ln_weights
            .iter()
            .any(|lw| lw.iter().any(|&x| x != 0.0))
            .then(|| StateWeights::new(&ln_weights));
        let inv_size: Vec<f64> = scope_start
            .windows(2)
            .map(|w| 1.0 / (w[1] - w[0]).max(1) as f64)
            .collect();
        let quiet = Quiet::of(
            model,
            binary,
            weights.is_some(),
            &start,
            &touches,
            &inv_size,
        );
        Ok(Kernel {
            states,
            start,
            touches,
            table_offset,
            bits,
            max_degree,
            binary,
            weights,
            inv_size,
            scope_start,
            scope,
            free,
            quiet,
            max_scope: model
                .constraints
                .iter()
                .map(|c| c.scope.len())
                .max()
                .unwrap_or(0),
        })
    }

    /// Whether [`Chain::sweep_conditional`] gathers the conditional estimate during the
    /// sweep (two-state variables without weights) rather than in a pass after it.
    pub fn conditional_is_fused(&self) -> bool {
        self.binary && self.weights.is_none()
    }

    /// Whether some state weighs other than 1.
    pub fn is_weighted(&self) -> bool {
        self.weights.is_some()
    }

    /// ln w of state `x` of variable `v`, field included (0 unweighted, −∞ for weight 0).
    #[inline]
    pub fn ln_weight(&self, v: usize, x: u8) -> f64 {
        match &self.weights {
            None => 0.0,
            Some(w) => w.ln[w.profile[v] as usize][x as usize],
        }
    }

    /// The probability of state `x` of variable `v` alone (at β = 0): w_v(x) / Σ_s w_v(s).
    pub fn probability(&self, v: usize, x: u8) -> f64 {
        match &self.weights {
            None => 1.0 / self.states[v] as f64,
            Some(w) => w.prob[w.profile[v] as usize][x as usize],
        }
    }

    /// ln Σ_s w_v(s) summed over the variables: ln Z at β = 0.
    pub fn ln_free(&self) -> f64 {
        match &self.weights {
            None => self.states.iter().map(|&q| (q as f64).ln()).sum(),
            Some(w) => {
                let per: Vec<f64> =
                    w.ln.iter()
                        .map(|lw| {
                            let top = lw.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                            top + lw.iter().map(|&x| (x - top).exp()).sum::<f64>().ln()
                        })
                        .collect();
                w.profile.iter().map(|&p| per[p as usize]).sum()
            }
        }
    }

    /// The profile of variable `v` (the same number for variables whose states weigh
    /// alike; 0 for every variable when unweighted).
    pub fn profile(&self, v: usize) -> u32 {
        self.weights.as_ref().map_or(0, |w| w.profile[v])
    }

    /// A value of variable `v` drawn from its distribution alone (β = 0).
    #[inline]
    fn draw(&self, v: usize, rng: &mut Pcg64Mcg) -> u8 {
        match &self.weights {
            None => (rng.next_u64() % self.states[v] as u64) as u8,
            Some(w) => draw(&w.prob[w.profile[v] as usize], unit(rng.next_u64())),
        }
    }

    /// Number of variables.
    pub fn variables(&self) -> usize {
        self.states.len()
    }

    /// Number of states of variable `v`.
    pub fn states(&self, v: usize) -> usize {
        self.states[v] as usize
    }

    /// 1 when the table bit at absolute position `b` (table offset + index) forbids.
    #[inline(always)]
    fn violated(&self, b: u32) -> i32 {
        1 - ((self.bits[(b >> 6) as usize] >> (b & 63)) & 1) as i32
    }

    #[inline(always)]
    fn touches(&self, v: usize) -> &[(u32, u32)] {
        &self.touches[self.start[v] as usize..self.start[v + 1] as usize]
    }

    /// A chain in a random assignment of the exact β = 0 distribution (uniform when
    /// unweighted, each variable drawn from its weights otherwise).
    pub fn chain(&self, mut rng: Pcg64Mcg) -> Chain {
        let values: Vec<u8> = (0..self.states.len())
            .map(|v| self.draw(v, &mut rng))
            .collect();
        self.chain_at(values, rng)
    }
}

impl Kernel {
    /// A chain in the assignment `values` (one value per variable, each within its
    /// states), drawing from `rng`.
    pub fn chain_at(&self, values: Vec<u8>, rng: Pcg64Mcg) -> Chain {
        debug_assert_eq!(values.len(), self.states.len());
        let mut chain = Chain {
            values,
            index: vec![0; self.table_offset.len()],
            energy: 0,
            rng,
            defects: Vec::new(),
            slot: Vec::new(),
            near: Vec::new(),
        };
        chain.recompute(self);
        chain
    }
}

/// One replica: assignment, constraint indices, energy, random stream.
#[derive(Clone, Debug)]
pub struct Chain {
    /// Value of every variable.
    pub values: Vec<u8>,
    /// Current position of every constraint in the concatenated tables: its table's bit
    /// offset plus its table index (one array read per touched constraint in the hot loop).
    index: Vec<u32>,
    /// Number of violated constraints.
    energy: u64,
    rng: Pcg64Mcg,
    /// The violated constraints, in any order, while defect-focused moves run
    /// ([`Chain::focused`]; rebuilt at the start of every call, stale outside).
    defects: Vec<u32>,
    /// Per constraint: its position in `defects`, or [`NOT_VIOLATED`].
    slot: Vec<u32>,
    /// Bit v: variable v touches a violated constraint, while [`Chain::sweep_skipping`]
    /// runs (rebuilt at the start of every call, stale outside).
    near: Vec<u64>,
}

/// A probability p as a threshold on a uniform u64: `next_u64() < threshold_of(p)` with
/// probability p (to 2⁻⁶⁴).
pub(crate) fn threshold_of(p: f64) -> u64 {
    if p >= 1.0 {
        u64::MAX
    } else {
        (p * 18446744073709551616.0) as u64
    }
}

/// The heat-bath flip probability 1/(1 + e^{βΔE}) of a two-state variable for ΔE = −m…m,
/// and the same as thresholds ([`threshold_of`]).
fn heat_bath(beta: f64, m: i32) -> (Vec<f64>, Vec<u64>) {
    let flip: Vec<f64> = (-m..=m)
        .map(|de| 1.0 / (1.0 + (beta * de as f64).exp()))
        .collect();
    let threshold = flip.iter().map(|&p| threshold_of(p)).collect();
    (flip, threshold)
}

/// `Chain::slot` of a constraint that is satisfied.
const NOT_VIOLATED: u32 = u32::MAX;

/// [`Chain::skipping_pays`] when at most one variable in this many touches a violated
/// constraint (each violation counted with its whole scope): below that the plain sweep
/// costs little more than the bookkeeping of the skipping one.
pub const SKIP_WHEN_NEAR_FRACTION: usize = 8;

impl Chain {
    /// Number of violated constraints now.
    pub fn energy(&self) -> u64 {
        self.energy
    }

    /// Replace the chain's random stream.
    pub(crate) fn reseed(&mut self, rng: Pcg64Mcg) {
        self.rng = rng;
    }

    /// The next number of the replica's random stream.
    #[inline(always)]
    pub fn next_u64(&mut self) -> u64 {
        self.rng.next_u64()
    }

    /// Flip a two-state variable, updating the indices and the energy.
    pub fn flip(&mut self, k: &Kernel, v: usize) {
        let de = self.flip_delta(k, v);
        self.apply_flip(k, v, de);
    }

    /// The change in the number of violated constraints if two-state variable `v` flipped.
    #[inline(always)]
    fn flip_delta(&self, k: &Kernel, v: usize) -> i32 {
        let up = self.values[v] == 0;
        let mut de = 0i32;
        for &(c, s) in k.touches(v) {
            let i = self.index[c as usize];
            let j = if up { i + s } else { i - s };
            de += k.violated(j) - k.violated(i);
        }
        de
    }

    /// For two-state variable `v`: the change in the number of violated constraints if it
    /// flipped, and Σ_{c ∋ v} [c violated]/|c| now and after the flip (the two values of
    /// its terms of the conditional estimate of E).
    #[inline(always)]
    fn flip_terms(&self, k: &Kernel, v: usize) -> (i32, f64, f64) {
        let up = self.values[v] == 0;
        let mut de = 0i32;
        let (mut now, mut then) = (0.0, 0.0);
        for &(c, s) in k.touches(v) {
            let i = self.index[c as usize];
            let j = if up { i + s } else { i - s };
            let (vi, vj) = (k.violated(i), k.violated(j));
            de += vj - vi;
            let inv = k.inv_size[c as usize];
            now += vi as f64 * inv;
            then += vj as f64 * inv;
        }
        (de, now, then)
    }

    /// Flip two-state variable `v`, whose energy change `de` is known.
    #[inline(always)]
    fn apply_flip(&mut self, k: &Kernel, v: usize, de: i32) {
        let up = self.values[v] == 0;
        for &(c, s) in k.touches(v) {
            let i = &mut self.index[c as usize];
            *i = if up { *i + s } else { *i - s };
        }
        self.values[v] ^= 1;
        self.energy = (self.energy as i64 + de as i64) as u64;
    }

    /// The change in the number of violated constraints if variable `v` took value `x`.
    pub fn delta(&self, k: &Kernel, v: usize, x: u8) -> i32 {
        let now = self.values[v] as i64;
        let mut d = 0i32;
        for &(c, s) in k.touches(v) {
            let i = self.index[c as usize];
            let j = (i as i64 + (x as i64 - now) * s as i64) as u32;
            d += k.violated(j) - k.violated(i);
        }
        d
    }

    /// Give variable `v` value `x`, whose energy change `de` is known ([`Chain::delta`]).
    pub(crate) fn assign(&mut self, k: &Kernel, v: usize, x: u8, de: i32) {
        let now = self.values[v] as i64;
        for &(c, s) in k.touches(v) {
            let i = &mut self.index[c as usize];
            *i = (*i as i64 + (x as i64 - now) * s as i64) as u32;
        }
        self.values[v] = x;
        self.energy = (self.energy as i64 + de as i64) as u64;
    }

    /// Draw a fresh assignment of the β = 0 distribution (from the chain's own stream).
    pub(crate) fn randomise(&mut self, k: &Kernel) {
        for v in 0..k.variables() {
            self.values[v] = k.draw(v, &mut self.rng);
        }
        self.recompute(k);
    }

    /// Rebuild the indices and the energy from the values.
    pub(crate) fn recompute(&mut self, k: &Kernel) {
        self.index
            .iter_mut()
            .zip(&k.table_offset)
            .for_each(|(i, &o)| *i = o as u32);
        for v in 0..k.variables() {
            for &(c, s) in k.touches(v) {
                self.index[c as usize] += s * self.values[v] as u32;
            }
        }
        self.energy = self.index.iter().map(|&b| k.violated(b) as u64).sum();
    }

    /// `moves` defect-focused Metropolis–Hastings moves at inverse temperature `beta`
    /// (see [the module documentation](self), "Defect-focused moves").
    ///
    /// From an assignment x with E_x > 0 violated constraints, a violated constraint c is
    /// picked uniformly, then a variable v of its scope uniformly, then a new value of v
    /// uniformly among its other states: the proposal probability of the resulting y is
    /// q(x→y) = Σ_{c ∋ v violated in x} 1/(E_x |c| (q_v − 1)). From a defect-free x the
    /// variable is picked uniformly among the free ones, q(x→y) = 1/(n_free (q_v − 1)).
    /// y is accepted with probability min(1, w(y) e^{−βE_y} q(y→x) / (w(x) e^{−βE_x} q(x→y)))
    /// (Metropolis et al. 1953; Hastings 1970, Biometrika 57, 97): detailed balance for
    /// w(σ) e^{−βE}, whatever the mixture with sweeps and loops around it. The point is
    /// where the work goes: at large β a sweep spends O(variables) updates to move each of
    /// a handful of defects by about one step, while these moves spend every update next
    /// to a defect.
    pub fn focused(&mut self, k: &Kernel, beta: f64, moves: usize) {
        if k.free.is_empty() {
            return;
        }
        self.rebuild_defects(k);
        let n_free = k.free.len() as f64;
        let m = k.max_degree as i32;
        let boltzmann: Vec<f64> = (-m..=m).map(|de| (-beta * de as f64).exp()).collect();
        for _ in 0..moves {
            let e_x = self.defects.len();
            let r = self.rng.next_u64();
            let v = if e_x == 0 {
                k.free[pick(r, k.free.len())] as usize
            } else {
                let c = self.defects[pick(r, e_x)] as usize;
                let (a, b) = (k.scope_start[c] as usize, k.scope_start[c + 1] as usize);
                k.scope[a + pick(self.rng.next_u64(), b - a)] as usize
            };
            let q = k.states[v] as usize;
            if q < 2 {
                continue;
            }
            let now = self.values[v] as usize;
            let new = if q == 2 {
                1 - now
            } else {
                let x = pick(self.rng.next_u64(), q - 1);
                if x >= now { x + 1 } else { x }
            };
            let step = new as i64 - now as i64;
            let mut de = 0i32;
            let mut fwd = 0.0;
            let mut rev = 0.0;
            for &(c, s) in k.touches(v) {
                let i = self.index[c as usize];
                let j = (i as i64 + step * s as i64) as u32;
                let (vi, vj) = (k.violated(i), k.violated(j));
                de += vj - vi;
                let inv = k.inv_size[c as usize];
                fwd += vi as f64 * inv;
                rev += vj as f64 * inv;
            }
            let e_y = e_x as i64 + de as i64;
            let q_fwd = if e_x == 0 {
                1.0 / n_free
            } else {
                fwd / e_x as f64
            };
            let q_rev = if e_y == 0 {
                1.0 / n_free
            } else {
                rev / e_y as f64
            };
            if q_rev == 0.0 {
                continue;
            }
            let mut ratio = boltzmann[(de + m) as usize] * q_rev / q_fwd;
            if let Some(w) = &k.weights {
                let rel = &w.rel[w.profile[v] as usize];
                ratio *= rel[new] / rel[now];
            }
            if ratio < 1.0 && unit(self.rng.next_u64()) >= ratio {
                continue;
            }
            for &(c, s) in k.touches(v) {
                let i = self.index[c as usize];
                let j = (i as i64 + step * s as i64) as u32;
                self.index[c as usize] = j;
                match (k.violated(i), k.violated(j)) {
                    (0, 1) => {
                        self.slot[c as usize] = self.defects.len() as u32;
                        self.defects.push(c);
                    }
                    (1, 0) => {
                        let at = self.slot[c as usize] as usize;
                        let last = self.defects.pop().expect("a violated constraint is listed");
                        if last != c {
                            self.defects[at] = last;
                            self.slot[last as usize] = at as u32;
                        }
                        self.slot[c as usize] = NOT_VIOLATED;
                    }
                    _ => {}
                }
            }
            self.values[v] = new as u8;
            self.energy = self.defects.len() as u64;
        }
    }

    /// The conditional (Rao–Blackwell) estimate of the number of violated constraints at
    /// inverse temperature `beta`: Σ_v Σ_{c ∋ v} (1/|c|) P_β(c violated | every variable but
    /// v), where v is given its heat-bath distribution p_v(x) ∝ w_v(x) e^{−β ΔE_x} and the
    /// others keep their values. Each term has the mean of the indicator of c in the
    /// Boltzmann ensemble, so the sum is an unbiased estimate of ⟨E⟩_β at any assignment
    /// drawn from it, with less variance where single variables fluctuate strongly (small
    /// β). The chain is not changed. Cost: about one sweep.
    pub fn conditional_energy(&self, k: &Kernel, beta: f64) -> f64 {
        let m = k.max_degree as i32;
        let boltzmann: Vec<f64> = (-m..=m).map(|de| (-beta * de as f64).exp()).collect();
        let mut total = 0.0;
        let mut viol = [0f64; 256];
        let mut p = [0f64; 256];
        for v in 0..k.variables() {
            let q = k.states[v] as usize;
            let touches = k.touches(v);
            if q < 2 {
                for &(c, _) in touches {
                    total += k.violated(self.index[c as usize]) as f64 * k.inv_size[c as usize];
                }
                continue;
            }
            let now = self.values[v] as i64;
            let mut z = 0.0;
            for x in 0..q {
                let mut d = 0i32;
                let mut w_viol = 0.0;
                for &(c, s) in touches {
                    let i = self.index[c as usize];
                    let j = (i as i64 + (x as i64 - now) * s as i64) as u32;
                    let vj = k.violated(j);
                    d += vj - k.violated(i);
                    w_viol += vj as f64 * k.inv_size[c as usize];
                }
                let weight = match &k.weights {
                    None => boltzmann[(d + m) as usize],
                    Some(w) => boltzmann[(d + m) as usize] * w.rel[w.profile[v] as usize][x],
                };
                p[x] = weight;
                viol[x] = w_viol;
                z += weight;
            }
            let mut sum = 0.0;
            for x in 0..q {
                sum += p[x] * viol[x];
            }
            total += sum / z;
        }
        total
    }

    /// List the violated constraints (for [`Chain::focused`]).
    fn rebuild_defects(&mut self, k: &Kernel) {
        self.defects.clear();
        self.slot.clear();
        self.slot.resize(self.index.len(), NOT_VIOLATED);
        for (c, &i) in self.index.iter().enumerate() {
            if k.violated(i) == 1 {
                self.slot[c] = self.defects.len() as u32;
                self.defects.push(c as u32);
            }
        }
        debug_assert_eq!(self.defects.len() as u64, self.energy);
    }

    /// One heat-bath sweep over all variables at inverse temperature `beta`.
    pub fn sweep(&mut self, k: &Kernel, beta: f64) {
        match (&k.weights, k.binary) {
            (None, true) => self.sweep_binary(k, beta),
            (None, false) => self.sweep_general(k, beta, None),
            (Some(w), true) => self.sweep_binary_weighted(k, w, beta),
            (Some(w), false) => self.sweep_general(k, beta, Some(w)),
        }
    }

    /// The binary sweep with weights: variable v at value a flips with probability
    /// 1/(1 + e^{βΔE − Δ}), Δ = ln w_v(1 − a) − ln w_v(a) (heat-bath).
    fn sweep_binary_weighted(&mut self, k: &Kernel, w: &StateWeights, beta: f64) {
        let m = k.max_degree as i32;
        let span = (2 * m + 1) as usize;
        let mut threshold = Vec::with_capacity(w.ln.len() * 2 * span);
        for lw in &w.ln {
            for a in 0..2 {
                let gain = lw[1 - a] - lw[a];
                for de in -m..=m {
                    threshold.push(threshold_of(1.0 / (1.0 + (beta * de as f64 - gain).exp())));
                }
            }
        }
        for v in 0..k.variables() {
            let de = self.flip_delta(k, v);
            let row = (w.profile[v] as usize * 2 + self.values[v] as usize) * span;
            if self.rng.next_u64() < threshold[row + (de + m) as usize] {
                self.apply_flip(k, v, de);
            }
        }
    }

    /// One heat-bath sweep at inverse temperature `beta`, returning the conditional
    /// estimate of the number of violated constraints ([`Chain::conditional_energy`]):
    /// for two-state variables without weights it is gathered during the sweep, each
    /// variable's terms just before its update (the assignment then is one of the chain,
    /// so each term keeps its mean), for about a third of a sweep's cost; otherwise it is
    /// a pass after the sweep.
    pub fn sweep_conditional(&mut self, k: &Kernel, beta: f64) -> f64 {
        if !k.conditional_is_fused() {
            self.sweep(k, beta);
            return self.conditional_energy(k, beta);
        }
        let m = k.max_degree as i32;
        let (flip, threshold) = heat_bath(beta, m);
        let mut total = 0.0;
        for v in 0..k.variables() {
            let (de, now, then) = self.flip_terms(k, v);
            let p = flip[(de + m) as usize];
            total += now + p * (then - now);
            if self.rng.next_u64() < threshold[(de + m) as usize] {
                self.apply_flip(k, v, de);
            }
        }
        total
    }

    /// Whether [`Chain::sweep_skipping`] applies and pays: the model has the shape
    /// (`Quiet`) and at most one variable in [`SKIP_WHEN_NEAR_FRACTION`] can touch a
    /// violated constraint (each violation marks its scope).
    pub fn skipping_pays(&self, k: &Kernel) -> bool {
        k.quiet.is_some()
            && (self.energy as usize).saturating_mul(k.max_scope)
                <= k.variables() / SKIP_WHEN_NEAR_FRACTION
    }

    /// One heat-bath sweep in variable order at inverse temperature `beta`, the same
    /// transition as [`Chain::sweep_conditional`] and returning the same conditional
    /// estimate of E, but with work only next to the violations, on models of the
    /// `Quiet` shape (two-state, unweighted, one degree, no allowed assignment one flip
    /// from another). A variable whose constraints all hold ("quiet") flips with the
    /// one probability p = 1/(1 + e^{βD}) (every one of its D constraints would break), so
    /// the quiet variables of a sweep are Bernoulli(p) trials in order: a geometric draw
    /// ⌊ln u / ln(1 − p)⌋ says how many of them pass before the next flip, and the count
    /// is carried across the variables next to a violation, which are updated one by one
    /// as in the plain sweep. Which variables are quiet is kept in a bit set, refreshed
    /// around every flip. Each quiet variable's term of the conditional estimate is p·Σ
    /// 1/|c|, so the estimate needs only how many were passed. Same distribution as the
    /// plain sweep, other random numbers. Panics on a model without the shape.
    pub fn sweep_skipping(&mut self, k: &Kernel, beta: f64) -> f64 {
        let quiet = k.quiet.expect("sweep_skipping needs the quiet shape");
        let n = k.variables();
        let m = k.max_degree as i32;
        let (flip, threshold) = heat_bath(beta, m);
        let p_quiet = flip[(quiet.degree as i32 + m) as usize];
        let ln_stay = (-p_quiet).ln_1p();
        self.near.clear();
        self.near.resize(n.div_ceil(64), 0);
        for c in 0..self.index.len() {
            if k.violated(self.index[c]) == 1 {
                self.mark_scope(k, c);
            }
        }
        let mut total = 0.0;
        let mut passed = 0usize;
        let mut budget = self.quiet_budget(ln_stay);
        let mut v = 0usize;
        while v < n {
            let next_near = self.next_near(v, n);
            let run = next_near - v;
            if budget < run {
                // The quiet variable v + budget flips: ΔE = +D.
                let u = v + budget;
                passed += budget + 1;
                self.apply_flip(k, u, quiet.degree as i32);
                self.refresh_near(k, u);
                v = u + 1;
                budget = self.quiet_budget(ln_stay);
                continue;
            }
            passed += run;
            budget -= run;
            if next_near == n {
                break;
            }
            // A variable next to a violation: the plain update.
            let u = next_near;
            let (de, now, then) = self.flip_terms(k, u);
            total += now + flip[(de + m) as usize] * (then - now);
            if self.rng.next_u64() < threshold[(de + m) as usize] {
                self.apply_flip(k, u, de);
                self.refresh_near(k, u);
            }
            v = u + 1;
        }
        total + passed as f64 * p_quiet * quiet.share
    }

    /// How many quiet variables pass before the next one flips, each flipping with
    /// probability p (`ln_stay` = ln(1 − p)): ⌊ln u / ln(1 − p)⌋, u uniform on (0, 1].
    fn quiet_budget(&mut self, ln_stay: f64) -> usize {
        let u = ((self.rng.next_u64() >> 11) + 1) as f64 / 9007199254740992.0;
        let g = u.ln() / ln_stay;
        if g.is_finite() && g < usize::MAX as f64 / 2.0 {
            g as usize
        } else {
            usize::MAX / 2
        }
    }

    /// The first variable at or after `v` next to a violation, or `n`.
    fn next_near(&self, v: usize, n: usize) -> usize {
        let mut w = v >> 6;
        if w >= self.near.len() {
            return n;
        }
        let mut bits = self.near[w] & (u64::MAX << (v & 63));
        loop {
            if bits != 0 {
                return ((w << 6) + bits.trailing_zeros() as usize).min(n);
            }
            w += 1;
            if w == self.near.len() {
                return n;
            }
            bits = self.near[w];
        }
    }

    /// Mark every variable of constraint `c` as next to a violation.
    fn mark_scope(&mut self, k: &Kernel, c: usize) {
        let (a, b) = (k.scope_start[c] as usize, k.scope_start[c + 1] as usize);
        for &u in &k.scope[a..b] {
            self.near[(u >> 6) as usize] |= 1 << (u & 63);
        }
    }

    /// After variable `v` flipped: whether each variable of its constraints is next to a
    /// violation now.
    fn refresh_near(&mut self, k: &Kernel, v: usize) {
        for &(c, _) in k.touches(v) {
            let (a, b) = (
                k.scope_start[c as usize] as usize,
                k.scope_start[c as usize + 1] as usize,
            );
            for &u in &k.scope[a..b] {
                let near = k
                    .touches(u as usize)
                    .iter()
                    .any(|&(d, _)| k.violated(self.index[d as usize]) == 1);
                let bit = 1u64 << (u & 63);
                if near {
                    self.near[(u >> 6) as usize] |= bit;
                } else {
                    self.near[(u >> 6) as usize] &= !bit;
                }
            }
        }
    }

    fn sweep_binary(&mut self, k: &Kernel, beta: f64) {
        let m = k.max_degree as i32;
        let (_, threshold) = heat_bath(beta, m);
        for v in 0..k.variables() {
            let de = self.flip_delta(k, v);
            if self.rng.next_u64() < threshold[(de + m) as usize] {
                self.apply_flip(k, v, de);
            }
        }
    }

    fn sweep_general(&mut self, k: &Kernel, beta: f64, weights: Option<&StateWeights>) {
        let m = k.max_degree as i32;
        let boltzmann: Vec<f64> = (-m..=m).map(|de| (-beta * de as f64).exp()).collect();
        let mut de = [0i32; 256];
        let mut weight = [0f64; 256];
        for v in 0..k.variables() {
            let q = k.states[v] as usize;
            if q < 2 {
                continue;
            }
            let now = self.values[v] as i64;
            let rel = weights.map(|w| &w.rel[w.profile[v] as usize]);
            let mut total = 0.0;
            for x in 0..q {
                let mut d = 0i32;
                if x as i64 != now {
                    for &(c, s) in k.touches(v) {
                        let i = self.index[c as usize];
                        let j = (i as i64 + (x as i64 - now) * s as i64) as u32;
                        d += k.violated(j) - k.violated(i);
                    }
                }
                de[x] = d;
                weight[x] = match rel {
                    None => boltzmann[(d + m) as usize],
                    Some(r) => boltzmann[(d + m) as usize] * r[x],
                };
                total += weight[x];
            }
            let mut u = unit(self.rng.next_u64()) * total;
            let pick = match rel {
                None => {
                    let mut pick = q - 1;
                    for (x, &w) in weight[..q].iter().enumerate() {
                        if u < w {
                            pick = x;
                            break;
                        }
                        u -= w;
                    }
                    pick
                }
                // A state of weight 0 is never picked, whatever the rounding.
                Some(_) => draw(&weight[..q], u) as usize,
            };
            if pick as i64 != now {
                for &(c, s) in k.touches(v) {
                    let i = &mut self.index[c as usize];
                    *i = (*i as i64 + (pick as i64 - now) * s as i64) as u32;
                }
                self.values[v] = pick as u8;
                self.energy = (self.energy as i64 + de[pick] as i64) as u64;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::counters::sampling::testing::{assert_frequencies, boltzmann_weighted, model};

    /// Three colours on a ring of three sites (a triangle), every pair distinct: 27
    /// assignments.
    const COLOURS: &str = r#"
name: triangle colourings
dimensions: 1
cell: {vectors: [[1.0]]}
sites: [{id: A, at: [0.0]}]
bonds: [{id: n, from: A, to: A, shift: [1]}]
variables: [{on: sites, kind: color, states: 3}]
rules: [{kind: distinct, at: bonds}]
formula_unit: {name: site, per: sites}
"#;

    /// The same with the colours weighing 2.5, 1 and 0.5.
    fn weighted_colours() -> String {
        COLOURS.replace(
            "formula_unit:",
            "weights: [{site: A, states: [2.5, 1.0, 0.5]}]\nformula_unit:",
        )
    }

    /// Sampled frequency of every full assignment against the exact Boltzmann weights
    /// (computed by enumeration above, independently of the kernel's index bookkeeping);
    /// a chi-square statistic on thinned samples must stay near its number of degrees of
    /// freedom.
    fn check_balance(m: &Model, beta: f64, samples: usize, thin: usize, with_loops: bool) {
        check_weighted_balance(m, &[], beta, samples, thin, with_loops);
    }

    /// How a chain moves between samples in [`check_moves`].
    #[derive(Clone, Copy)]
    enum Moves {
        /// Heat-bath sweeps, with loop attempts after each when `true`.
        Sweeps(bool),
        /// Defect-focused moves only, this many per sample.
        Focused(usize),
        /// A sweep followed by this many defect-focused moves, `thin` times per sample.
        SweepsAndFocused(usize),
        /// Sweeps that skip over the quiet variables ([`Chain::sweep_skipping`]), with
        /// loop attempts after each when `true`.
        Skipping(bool),
    }

    fn check_weighted_balance(
        m: &Model,
        fields: &[f64],
        beta: f64,
        samples: usize,
        thin: usize,
        with_loops: bool,
    ) {
        check_moves(m, fields, beta, samples, thin, Moves::Sweeps(with_loops));
    }

    fn check_moves(
        m: &Model,
        fields: &[f64],
        beta: f64,
        samples: usize,
        thin: usize,
        moves: Moves,
    ) {
        let with_loops = matches!(moves, Moves::Sweeps(true) | Moves::Skipping(true));
        let k = Kernel::with_fields(m, fields).unwrap();
        let loops = with_loops.then(|| super::super::loops::Loops::new(m).expect("loops apply"));
        let mut walk = loops.as_ref().map(|l| l.walk());
        let mut flipped = 0;
        let exact = boltzmann_weighted(m, beta, fields);
        let mut chain = k.chain(Pcg64Mcg::new(12345));
        let q: Vec<u64> = m.variables.iter().map(|v| v.states as u64).collect();
        let mut counts = vec![0u64; exact.len()];
        for _ in 0..100 {
            chain.sweep(&k, beta);
        }
        for _ in 0..samples {
            if let Moves::Focused(n) = moves {
                chain.focused(&k, beta, n * thin);
            }
            for _ in 0..thin {
                if let Moves::Focused(_) = moves {
                    break;
                }
                if let Moves::Skipping(_) = moves {
                    chain.sweep_skipping(&k, beta);
                } else {
                    chain.sweep(&k, beta);
                }
                if let Moves::SweepsAndFocused(n) = moves {
                    chain.focused(&k, beta, n);
                }
                if let (Some(l), Some(w)) = (&loops, walk.as_mut()) {
                    let before = chain.energy();
                    flipped += l.attempt(&k, &mut chain, w) as usize;
                    assert_eq!(before, chain.energy(), "a loop move changed the energy");
                }
            }
            let mut code = 0u64;
            let mut stride = 1u64;
            for (v, &x) in chain.values.iter().enumerate() {
                code += x as u64 * stride;
                stride *= q[v];
            }
            counts[code as usize] += 1;
        }
        if with_loops {
            assert!(flipped > samples / 10, "loops flipped only {flipped} times");
        }
        let mut check = chain.clone();
        check.recompute(&k);
        assert_eq!(check.energy(), chain.energy(), "incremental energy drifted");
        // Assignments of weight 0 are never visited; the others enter the statistic.
        assert!(
            counts.iter().zip(&exact).all(|(&c, &p)| p > 0.0 || c == 0),
            "an assignment of weight 0 was visited"
        );
        assert_frequencies(&counts, &exact, samples as f64);
    }

    #[test]
    fn heat_bath_binary_satisfies_detailed_balance() {
        // Square ice on the 2×2 torus: 8 arrows, 256 assignments.
        let m = model(
            include_str!("../../../lattices/square-ice.yaml"),
            "square-ice.yaml",
            "2x2",
            2,
        );
        assert_eq!(m.variables.len(), 8);
        check_balance(&m, 1.3, 200_000, 3, false);
    }

    #[test]
    fn heat_bath_with_loop_moves_satisfies_detailed_balance() {
        // The same 256 assignments, with a loop attempt after every sweep, at a β where
        // loops do most of the work among the ground states.
        let m = model(
            include_str!("../../../lattices/square-ice.yaml"),
            "square-ice.yaml",
            "2x2",
            2,
        );
        check_balance(&m, 1.3, 200_000, 3, true);
        check_balance(&m, 3.0, 200_000, 3, true);
    }

    /// Issue 13: the heat-bath and the loop moves with weights on the states and a field
    /// on an imposed mean sample w(σ) e^{−βE}: square ice on the 2×2 torus with the
    /// horizontal arrows weighing [1, 3] and a field 0.7 on the vertical ones' state 1.
    #[test]
    fn issue13_weighted_moves_satisfy_detailed_balance() {
        let yaml = format!(
            "{}weights: [{{bond: h, states: [1.0, 3.0]}}]\noccupancy: [{{bond: v, state: 1, mean: 0.6}}]\n",
            include_str!("../../../lattices/square-ice.yaml")
        );
        let m = model(&yaml, "w.yaml", "2x2", 2);
        check_weighted_balance(&m, &[0.7], 1.3, 200_000, 3, false);
        check_weighted_balance(&m, &[0.7], 1.3, 200_000, 3, true);
        check_weighted_balance(&m, &[-0.4], 3.0, 200_000, 3, true);
        // A state of weight 0 is never entered, by single flips or by loops.
        let zero = yaml.replace("[1.0, 3.0]", "[1.0, 0.0]");
        let m = model(&zero, "w.yaml", "2x2", 2);
        check_weighted_balance(&m, &[0.7], 1.3, 100_000, 3, true);
    }

    /// Issue 13: the many-state heat-bath with weights (three colours, the first weighing
    /// 2.5 and the last 0 on one site).
    #[test]
    fn issue13_weighted_many_states_satisfy_detailed_balance() {
        let yaml = &weighted_colours();
        let m = model(yaml, "colour.yaml", "3", 1);
        check_weighted_balance(&m, &[], 0.9, 100_000, 2, false);
        let zero = yaml.replace("[2.5, 1.0, 0.5]", "[2.5, 1.0, 0.0]");
        let m = model(&zero, "colour.yaml", "3", 1);
        check_weighted_balance(&m, &[], 0.9, 100_000, 2, false);
    }

    /// Issue 15: the defect-focused moves alone (no sweep between them) sample the
    /// Boltzmann weights, with and without weights on the states, at a β where most of
    /// the time some constraint is violated and at one where the chain is mostly in the
    /// defect-free states (where the uniform proposal takes over).
    #[test]
    fn issue15_defect_focused_moves_satisfy_detailed_balance() {
        let ice = include_str!("../../../lattices/square-ice.yaml");
        let m = model(ice, "square-ice.yaml", "2x2", 2);
        check_moves(&m, &[], 0.7, 200_000, 20, Moves::Focused(3));
        check_moves(&m, &[], 3.0, 50_000, 300, Moves::Focused(3));
        let weighted = format!(
            "{ice}weights: [{{bond: h, states: [1.0, 3.0]}}]\noccupancy: [{{bond: v, state: 1, mean: 0.6}}]\n"
        );
        let m = model(&weighted, "w.yaml", "2x2", 2);
        check_moves(&m, &[0.7], 1.3, 200_000, 4, Moves::Focused(3));
        // The triangular antiferromagnet on the 3×3 torus: 512 assignments, each spin in
        // six triangles, zero-cost flips among the ground states.
        let tafm = include_str!("../../../lattices/triangular-afm.yaml");
        let m = model(tafm, "triangular-afm.yaml", "3x3", 2);
        check_moves(&m, &[], 1.0, 300_000, 10, Moves::Focused(2));
        check_moves(&m, &[], 3.0, 300_000, 10, Moves::SweepsAndFocused(4));
        // Many states: three colours on a triangle, every pair distinct. Here the focused
        // moves alone cannot reach the assignments of one colour (the variable that
        // would complete one lies in no violated constraint), so they run between sweeps,
        // as in the sampler.
        let colours = &weighted_colours();
        let m = model(colours, "colour.yaml", "3", 1);
        check_moves(&m, &[], 0.9, 100_000, 2, Moves::SweepsAndFocused(3));
        check_moves(&m, &[], 2.5, 100_000, 2, Moves::SweepsAndFocused(3));
    }

    /// Issue 15: the sweep that skips over the quiet variables samples the Boltzmann
    /// weights, alone and with loop moves, on square ice on the 2×2 torus (256
    /// assignments; the ice rule has the shape), at a β where violations are common (most
    /// variables are updated one by one) and at ones where the cell is mostly defect-free
    /// (most flips come from the geometric draw). Models without the shape have none.
    #[test]
    fn issue15_skipping_sweeps_satisfy_detailed_balance() {
        let ice = include_str!("../../../lattices/square-ice.yaml");
        let m = model(ice, "square-ice.yaml", "2x2", 2);
        assert!(Kernel::new(&m).unwrap().quiet.is_some());
        check_moves(&m, &[], 0.7, 200_000, 3, Moves::Skipping(false));
        check_moves(&m, &[], 1.8, 200_000, 3, Moves::Skipping(false));
        check_moves(&m, &[], 2.5, 100_000, 3, Moves::Skipping(true));
        // Kagome ice (one moment in on up triangles, two on down ones) has the shape too.
        let kagome = include_str!("../../../lattices/kagome-ice.yaml");
        let m = model(kagome, "kagome-ice.yaml", "2x2", 2);
        assert!(Kernel::new(&m).unwrap().quiet.is_some());
        check_moves(&m, &[], 2.0, 100_000, 3, Moves::Skipping(false));
        for (yaml, name, cells, dims) in [
            (
                include_str!("../../../lattices/triangular-afm.yaml"),
                "t.yaml",
                "3x3",
                2,
            ),
            (
                include_str!("../../../lattices/hard-squares.yaml"),
                "h.yaml",
                "3x3",
                2,
            ),
            (COLOURS, "colour.yaml", "3", 1),
        ] {
            let k = Kernel::new(&model(yaml, name, cells, dims)).unwrap();
            assert!(k.quiet.is_none(), "{name} has no quiet shape");
        }
        let weighted = format!("{ice}weights: [{{bond: h, states: [1.0, 3.0]}}]\n");
        assert!(
            Kernel::new(&model(&weighted, "w.yaml", "2x2", 2))
                .unwrap()
                .quiet
                .is_none()
        );
    }

    /// Issue 15: the estimate the skipping sweep returns is the conditional estimate of
    /// the plain sweep: from every one of the 256 assignments of square ice 2×2 and at a
    /// β where no quiet variable can flip within the test (β = 40: p = e^{−80}), both
    /// sweeps return Σ_v of each variable's term taken just before its update, so from
    /// an assignment where no variable flips either way they agree to rounding; and the
    /// mean of the estimate over many skipping sweeps at β = 1.8 equals the exact ⟨E⟩ by
    /// enumeration within 4σ (batch means).
    #[test]
    fn issue15_skipping_sweep_returns_the_conditional_estimate() {
        let ice = include_str!("../../../lattices/square-ice.yaml");
        let m = model(ice, "square-ice.yaml", "2x2", 2);
        let k = Kernel::new(&m).unwrap();
        let mut compared = 0;
        for code in 0..256u32 {
            let mut a = k.chain(Pcg64Mcg::new(3));
            for v in 0..8 {
                a.values[v] = ((code >> v) & 1) as u8;
            }
            a.recompute(&k);
            let mut b = a.clone();
            let before = a.values.clone();
            let ea = a.sweep_skipping(&k, 40.0);
            let eb = b.sweep_conditional(&k, 40.0);
            if a.values == before && b.values == before {
                assert!((ea - eb).abs() < 1e-12, "{code:08b}: {ea} against {eb}");
                compared += 1;
            }
        }
        // At least the 18 defect-free assignments (OEIS A054759), where nothing flips.
        assert!(compared >= 18, "only {compared} assignments compared");
        let beta = 1.8;
        let p = boltzmann_weighted(&m, beta, &[]);
        let exact: f64 = p
            .iter()
            .enumerate()
            .map(|(code, &pc)| {
                let mut c = k.chain(Pcg64Mcg::new(1));
                for v in 0..8 {
                    c.values[v] = ((code >> v) & 1) as u8;
                }
                c.recompute(&k);
                pc * c.energy() as f64
            })
            .sum();
        let mut chain = k.chain(Pcg64Mcg::new(99));
        for _ in 0..1000 {
            chain.sweep_skipping(&k, beta);
        }
        let batches: Vec<f64> = (0..100)
            .map(|_| {
                (0..2000)
                    .map(|_| chain.sweep_skipping(&k, beta))
                    .sum::<f64>()
                    / 2000.0
            })
            .collect();
        let mean = batches.iter().sum::<f64>() / 100.0;
        let sd = (batches.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / 99.0).sqrt();
        assert!(
            (mean - exact).abs() < 4.0 * sd / 10.0,
            "mean of the estimate {mean} ± {}, exact ⟨E⟩ {exact}",
            sd / 10.0
        );
    }

    /// Issue 15: the conditional estimate of E has the exact Boltzmann mean, computed by
    /// enumeration of square ice on the 2×2 torus (256 assignments) and of three colours
    /// on a triangle with weights: the mean of the estimate over the exact distribution,
    /// Σ_σ p(σ) Ê(σ), equals Σ_σ p(σ) E(σ) to rounding.
    #[test]
    fn issue15_conditional_estimate_has_the_exact_mean() {
        let ice = include_str!("../../../lattices/square-ice.yaml");
        let weighted = format!("{ice}weights: [{{bond: h, states: [1.0, 3.0]}}]\n");
        let colours = &weighted_colours();
        let cases = [
            model(ice, "square-ice.yaml", "2x2", 2),
            model(&weighted, "w.yaml", "2x2", 2),
            model(colours, "colour.yaml", "3", 1),
        ];
        for m in &cases {
            let k = Kernel::new(m).unwrap();
            let q: Vec<u64> = m.variables.iter().map(|v| v.states as u64).collect();
            for beta in [0.3, 1.1, 2.7] {
                let p = boltzmann_weighted(m, beta, &[]);
                let mut chain = k.chain(Pcg64Mcg::new(1));
                let (mut exact, mut estimate) = (0.0, 0.0);
                let mut differs = false;
                for (code, &pc) in p.iter().enumerate() {
                    let mut rest = code as u64;
                    for (v, &qv) in q.iter().enumerate() {
                        chain.values[v] = (rest % qv) as u8;
                        rest /= qv;
                    }
                    chain.recompute(&k);
                    let e = chain.energy() as f64;
                    let c = chain.conditional_energy(&k, beta);
                    differs |= (c - e).abs() > 1e-9;
                    exact += pc * e;
                    estimate += pc * c;
                }
                assert!(differs, "the estimate is not E itself");
                assert!(
                    (exact - estimate).abs() < 1e-12 * exact.max(1.0),
                    "β = {beta}: ⟨E⟩ {exact}, mean of the estimate {estimate}"
                );
            }
        }
    }

    #[test]
    fn heat_bath_many_states_satisfies_detailed_balance() {
        // Three colours on a 3-site triangle, every pair distinct: 27 assignments.
        let yaml = COLOURS;
        let m = model(yaml, "colour.yaml", "3", 1);
        assert_eq!(m.variables.len(), 3);
        check_balance(&m, 0.9, 100_000, 2, false);
    }
}
