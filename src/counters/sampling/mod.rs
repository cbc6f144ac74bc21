//! Monte Carlo count of a large cell by thermodynamic integration over inverse temperature.
//!
//! # What it computes
//!
//! ln Ω₀, the logarithm of the number of assignments that satisfy every constraint of a
//! [`Model`], with a statistical error bar, from the identity
//!
//! ln Ω₀ = ln Ω(β=0) − ∫₀^∞ ⟨E⟩_β dβ,  Ω(β=0) = ∏_v q_v,
//!
//! where E is the number of violated constraints and ⟨E⟩_β its Boltzmann mean
//! (d ln Z/dβ = −⟨E⟩, Z(0) = ∏ q_v, Z(∞) = Ω₀). Only the correction to Pauling's
//! independent-constraint reference is integrated: a constraint that allows a fraction p of
//! its local assignments, taken alone, has mean energy
//! e_ref(β) = (1 − p) e^{−β} / (p + (1 − p) e^{−β}), whose integral over β is exactly −ln p,
//! so that
//!
//! ln Ω₀ = ln W_Pauling − ∫₀^∞ (⟨E⟩_β − Σ_c e_ref,c(β)) dβ.
//!
//! # Method
//!
//! The integral is taken over β on [0, β_max] by Simpson's rule on equally spaced nodes
//! (`integrate.rs` says why not in t = e^{−β}); the node β = 0 needs no sampling, since there
//! ⟨E⟩ = E_ref exactly. Beyond β_max the reference part is analytic,
//! ∫_{β_max}^∞ e_ref dβ = ln(p + (1 − p) e^{−β_max}) − ln p, and ∫_{β_max}^∞ ⟨E⟩ dβ lies
//! between 0 and ⟨E⟩(β_max) when ⟨E⟩ ∝ e^{−kβ} with k ≥ 1 (every violation costs at least
//! 1): it is taken as ⟨E⟩(β_max)/k with k the decay rate measured over the last nodes and
//! a quarter of it (at least) as its uncertainty, or, where the rate cannot be measured,
//! as ⟨E⟩(β_max)/2 with the uniform-interval uncertainty ⟨E⟩(β_max)/(2√3)
//! ([`Plan::tail_rate`]).
//! β_max grows with the cell (ln of the number of constraints, plus 3), so that only a
//! handful of violations remain there. The discretisation error is
//! Richardson's |S_n − S_(n+1)/2|/15 on the replica-mean integrand.
//!
//! On models whose variables all have two states and carry no weights (ice and spin-ice
//! arrows, dimers, Ising spins), a replica is 64 chains in the bits of machine words
//! ([`lanes`]), with Metropolis sweeps compiled to bit logic, and its ⟨E⟩ at a node is
//! the mean of the 64; where loop moves apply, one chain takes over from lane 0 at
//! [`LANES_BELOW_BETA`], for the few defects that single flips bring together slowly.
//! Otherwise (and with `lanes` off) a replica is one chain as follows.
//!
//! Every replica starts from a uniformly random assignment (the exact β = 0 ensemble), is
//! annealed through the nodes from β = 0 up to β_max and then back down, with
//! `equilibration` heat-bath sweeps and then half the `sweeps` measured at each node on
//! each pass ([`moves`]); from β = 1 on, every sweep is followed by loop moves that keep
//! every constraint's count where the model allows them ([`loops`]), and from β = 3 on,
//! on the same models, by defect-focused moves that spend their updates next to the few
//! violated constraints, one per variable ([`moves::Chain::focused`],
//! [`DEFECT_MOVES_PER_VARIABLE`]); where few variables touch a violation
//! on ice-rule models, the sweep jumps over the others by geometric draws
//! ([`moves::Chain::sweep_skipping`], the same transition). What is measured at each sweep is
//! the conditional (Rao–Blackwell) estimate of E, whose mean is ⟨E⟩_β and whose variance
//! is smaller ([`moves::Chain::sweep_conditional`]). A chain that lags
//! behind the annealing carries too many violations on the way up and too few on the way
//! down, so the mean of the two passes cancels the lag to first order, and their
//! difference is the equilibration check: when it is significant (and would matter), the
//! run is repeated with twice the sweeps, up to `max_extensions` times, and then a quarter
//! of it ([`RESIDUAL_LAG`]) joins the error budget. Each replica gives its own estimate of
//! ln Ω₀; the statistical error is the standard error of their mean, widened for their
//! number ([`student_factor`]). The reported σ of ln W is the root sum of squares of the
//! statistical, quadrature, tail and equilibration parts. With a `target_error`, batches of
//! replicas are added until that σ is reached.
//!
//! Settings that cannot give an honest number are refused up front: nodes further apart
//! than [`MAX_NODE_SPACING`] in β, and runs that would hold more than [`MAX_MEMORY`].
//! Once the context's interrupt is raised no replica starts; the finished ones give
//! the estimate ([`Sampled::interrupted`]).
//!
//! Thermodynamic integration for the residual entropy of ice: Kolafa 2014, J. Chem. Phys.
//! 140, 204507; Herrero & Ramírez 2014, J. Chem. Phys. 140, 234502.
//!
//! # Parallelism and reproducibility
//!
//! Replicas run in parallel with rayon, in whatever pool the caller installs. Replica r
//! draws from its own `Pcg64Mcg` stream seeded by SplitMix64 from seed ⊕ (r · 0xD1B5…)
//! (its 64 lanes draw from it together, and the chain that takes over from them from a
//! salted stream of the same r),
//! and the replica results are combined in replica order, so the same seed gives bitwise
//! the same numbers on any number of threads.
//!
//! # Arguments and returns
//!
//! [`count`] takes a model, a [`SampleConfig`] and the [`Context`] (interrupt; a deadline
//! past which no repetition starts; an observer told every finished replica) and returns
//! an [`Estimate`] (method [`Method::MonteCarlo`], `sigma_ln_w` set) with [`Sampled`]
//! beside it: the pieces of the error, the integrand and diagnostics.
//! [`Plan`] is the same run taken apart (compile once, run any range of replica indices,
//! combine), which [`shard`] uses to split a run over machines; [`size`] extrapolates
//! several cells to the infinite crystal; [`wang_landau`] is the independent second method.
//!
//! # Complexity
//!
//! Time O(replicas · nodes · (sweeps + 2·equilibration) · Σ_v q_v d_v) for variables with
//! q_v states in d_v constraints; memory O(threads · (variables + constraints)) plus the
//! shared tables.

pub mod allocation;
pub mod calibration;
pub mod ground;
pub(crate) mod integrate;
pub mod lanes;
pub mod loops;
pub mod moves;
pub mod shard;
pub mod size;
pub mod solve;
#[cfg(test)]
pub(crate) mod testing;
pub mod wang_landau;
#[cfg(test)]
mod weighted_tests;

use std::time::Instant;

use rayon::prelude::*;

use super::{Context, Counted};
use crate::context::Progress;
use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method};
use crate::model::Model;
use moves::Kernel;

/// Settings of a Monte Carlo run.
#[derive(Clone, Debug)]
pub struct SampleConfig {
    /// Seed of every random stream.
    pub seed: u64,
    /// Independent replicas (at least 2 for an error bar).
    pub replicas: usize,
    /// Measured sweeps per quadrature node and replica, split between the pass up and the
    /// pass down (at least 2).
    pub sweeps: usize,
    /// Sweeps before measuring at each node, in each pass.
    pub equilibration: usize,
    /// Quadrature nodes on [0, β_max], of the form 4m + 1 (at least 5).
    pub nodes: usize,
    /// Largest β sampled; `None` chooses ln(constraints) + 3, clamped to [5, 14].
    pub beta_max: Option<f64>,
    /// Loop moves after every sweep, where the model allows them ([`loops`]).
    pub loops: bool,
    /// Defect-focused moves after every sweep from β = [`DEFECT_MOVES_FROM_BETA`] on
    /// ([`moves::Chain::focused`]), on models where loop moves apply (elsewhere the
    /// setting has no effect): as many as there are variables
    /// ([`DEFECT_MOVES_PER_VARIABLE`]).
    pub defect_moves: bool,
    /// Share the measured sweeps among the nodes by the variance a short pilot run
    /// measures there ([`allocation`]) instead of equally; ignored when `node_sweeps` is
    /// given.
    pub allocate: bool,
    /// Measured sweeps at every node (index 0, β = 0, unused), each even and at least 2:
    /// an allocation decided before (a shard's settings). Empty: equal, or allocated
    /// when `allocate`.
    pub node_sweeps: Vec<usize>,
    /// Measure the conditional (Rao–Blackwell) estimate of E instead of E itself
    /// ([`moves::Chain::conditional_energy`]): at every β for two-state variables without
    /// weights (gathered during the sweep), below β = [`CONDITIONAL_BELOW_BETA`] otherwise
    /// (a pass after the sweep).
    pub conditional: bool,
    /// Run every replica as 64 chains in the bits of machine words ([`lanes`]) where the
    /// model allows it (two states, no weights); a replica's ⟨E⟩ is then the mean of its
    /// 64 chains, and loop and defect-focused moves are not run.
    pub lanes: bool,
    /// Keep adding batches of `replicas` replicas until the σ of ln W per formula unit is at
    /// most this, or `max_replicas` is reached.
    pub target_error: Option<f64>,
    /// Most replicas a `target_error` run may use.
    pub max_replicas: usize,
    /// How many times the run may be repeated with twice the sweeps and equilibration
    /// when the equilibration check fails (0: never; the check is still reported). No
    /// repetition starts that would, at the pace of the run before it, end after the
    /// context's deadline.
    pub max_extensions: usize,
    /// The conjugate field h_j of every imposed mean of the model (`Model::means`, in
    /// order), added to the ln-weight of its state on its variables; empty when the model
    /// imposes no mean. The sampler does not solve for them: a model with imposed means
    /// is refused without one field per mean.
    pub fields: Vec<f64>,
}

impl Default for SampleConfig {
    fn default() -> Self {
        SampleConfig {
            seed: 1,
            replicas: 8,
            sweeps: 200,
            equilibration: 50,
            nodes: 41,
            beta_max: None,
            loops: true,
            defect_moves: true,
            conditional: true,
            lanes: true,
            allocate: true,
            node_sweeps: Vec::new(),
            target_error: None,
            max_replicas: 1024,
            max_extensions: 3,
            fields: Vec::new(),
        }
    }
}

/// What a Monte Carlo estimate has beside it: its error budget and diagnostics. The
/// estimate's `sigma_ln_w` is the root sum of squares of the statistical, quadrature, tail
/// and equilibration parts.
#[derive(Clone, Debug)]
pub struct Sampled {
    /// Standard error of the replica mean of ln W per formula unit, widened for the number
    /// of replicas ([`student_factor`]).
    pub sigma_statistical: f64,
    /// Quadrature error of ln W per formula unit (Richardson, Simpson n against (n+1)/2).
    pub sigma_quadrature: f64,
    /// Uncertainty of the tail beyond β_max, per formula unit.
    pub sigma_tail: f64,
    /// Allowance for a failed equilibration check (0 when it passed): half the difference
    /// between the passes up and down, the bias of one pass alone.
    pub sigma_equilibration: f64,
    /// ln W per formula unit from the pass up minus that from the pass down, replica mean:
    /// negative when the chains lag behind the annealing (too many violations on the way
    /// up, too few on the way down).
    pub hysteresis: f64,
    /// Standard error of `hysteresis`.
    pub sigma_hysteresis: f64,
    /// Whether the equilibration check passed ([`Sampled::hysteresis`] within
    /// [`HYSTERESIS_LIMIT`] of its standard error, or smaller than half the statistical σ).
    pub equilibrated: bool,
    /// Times the run was repeated with twice the sweeps because the check failed.
    pub extensions: usize,
    /// Measured sweeps per node and replica of the run reported (after extensions).
    pub sweeps: usize,
    /// Equilibration sweeps per node and pass of the run reported.
    pub equilibration: usize,
    /// Whether an interrupt stopped the run before every replica was started: the
    /// estimate then rests on the replicas that finished.
    pub interrupted: bool,
    /// The seed used.
    pub seed: u64,
    /// Replicas run.
    pub replicas: usize,
    /// Measured sweeps in all (replicas × sampled nodes × sweeps).
    pub samples: u64,
    /// Single-variable updates in all, equilibration and runs discarded by extensions
    /// included.
    pub updates: u64,
    /// β of every node, from 0 to β_max.
    pub betas: Vec<f64>,
    /// Replica mean of ⟨E⟩ at every node (both passes).
    pub mean_energy: Vec<f64>,
    /// Pauling reference energy Σ_c e_ref,c at every node.
    pub reference_energy: Vec<f64>,
    /// ln W per formula unit from each replica.
    pub per_replica: Vec<f64>,
    /// Largest β sampled.
    pub beta_max: f64,
    /// The largest β at which each replica ran 64 chains in machine words ([`lanes`]);
    /// `None` when every replica was one chain throughout.
    pub lanes_up_to_beta: Option<f64>,
    /// Loop moves attempted per sweep from β = 1 on (0 when they do not apply or are
    /// switched off).
    pub loop_attempts_per_sweep: usize,
    /// Fraction of loop attempts that flipped a loop.
    pub loop_acceptance: f64,
    /// With a `target_error`: whether the σ reached it.
    pub target_reached: Option<bool>,
    /// For a weighted model (weights, imposed means): ln Z, ⟨ln w⟩ and the means reached,
    /// measured in the defect-free ensemble ([`ground`]). The estimate's ln W is then the
    /// entropy of the weighted ensemble, ln Z − ⟨ln w⟩ per formula unit, and the σ parts
    /// above are those of that entropy (statistical: ln Z and ⟨ln w⟩ propagated together
    /// from the replicas; quadrature, tail and equilibration: those of ln Z).
    pub weighing: Option<SampledWeighing>,
}

/// What a weighted run measures beside its entropy.
#[derive(Clone, Debug)]
pub struct SampledWeighing {
    /// ln Z per formula unit: the weighted sum over the arrangements that keep every
    /// rule, fields included (the replica mean of the integration).
    pub ln_z_per_unit: f64,
    /// Its 1σ: statistical, quadrature, tail and equilibration parts in quadrature.
    pub sigma_ln_z: f64,
    /// ⟨ln w⟩ per formula unit in the defect-free ensemble.
    pub mean_ln_w_per_unit: f64,
    /// Its 1σ (statistical, widened for the number of replicas).
    pub sigma_mean_ln_w: f64,
    /// The field of every imposed mean (as given).
    pub fields: Vec<f64>,
    /// The mean reached by every imposed mean: ⟨n_j⟩ / |j|, the fraction of its variables
    /// in its state.
    pub achieved: Vec<f64>,
    /// 1σ of every `achieved`.
    pub sigma_achieved: Vec<f64>,
    /// The covariance of the counts, Cov(n_j, n_k) in the defect-free ensemble, row-major
    /// (the susceptibility d⟨n_j⟩/dh_k), for a solver of the fields.
    pub covariance: Vec<f64>,
    /// Measured sweeps at β_max with no violated constraint, in all replicas: the samples
    /// of the defect-free ensemble.
    pub ground_samples: u64,
    /// Their fraction of the measured sweeps at β_max.
    pub ground_fraction: f64,
}

/// The equilibration check fails when the passes up and down differ by more than this
/// many standard errors of their difference (and the lag left in their mean exceeds half
/// the statistical σ).
pub const HYSTERESIS_LIMIT: f64 = 3.0;

/// The lag left in the mean of the passes up and down, as a fraction of their difference.
/// Measured on the ice Ih 2x2x24 torus against its exact count (400 replicas each): with
/// 20, 50 and 200 sweeps per node the mean missed by 0.08, 0.12 and (−0.02 ± 0.12) times
/// the difference; a quarter leaves a margin of two.
pub const RESIDUAL_LAG: f64 = 0.25;

/// Largest spacing of the quadrature nodes in β: one violated constraint costs 1 in βE, so
/// ⟨E⟩ changes on a scale of 1 in β, and coarser nodes can step over the whole integrand.
pub const MAX_NODE_SPACING: f64 = 1.0;

/// Most memory a run may plan to hold (replica results, chains, tables), in bytes.
pub const MAX_MEMORY: u64 = 4 << 30;

/// Replica results combined.
struct Combined {
    mean: f64,
    sigma_statistical: f64,
    sigma_quadrature: f64,
    sigma_tail: f64,
    hysteresis: f64,
    sigma_hysteresis: f64,
    per_replica: Vec<f64>,
    mean_energy: Vec<f64>,
    /// For a weighted model: the defect-free measurements; `None` when too few replicas
    /// saw a defect-free arrangement.
    ground: Option<GroundStats>,
}

/// The defect-free measurements of a weighted run, combined over the replicas.
struct GroundStats {
    /// Entropy per formula unit, ln Z − ⟨ln w⟩.
    entropy: f64,
    /// Its statistical σ (ln Z and ⟨ln w⟩ propagated together, widened).
    sigma_entropy: f64,
    /// ⟨ln w⟩ per formula unit and its σ.
    mean_ln_w: f64,
    sigma_ln_w: f64,
    achieved: Vec<f64>,
    sigma_achieved: Vec<f64>,
    covariance: Vec<f64>,
    samples: u64,
    fraction: f64,
}

impl Combined {
    /// What is left of the lag in the mean of the two passes, estimated as a quarter of
    /// their difference ([`RESIDUAL_LAG`]).
    fn residual_lag(&self) -> f64 {
        RESIDUAL_LAG * self.hysteresis.abs()
    }

    /// Whether the equilibration check passes: the passes up and down differ by no more
    /// than [`HYSTERESIS_LIMIT`] standard errors, or the lag left in their mean is below
    /// half the statistical σ.
    fn equilibrated(&self) -> bool {
        let d = self.hysteresis.abs();
        !(d > HYSTERESIS_LIMIT * self.sigma_hysteresis
            && self.residual_lag() > 0.5 * self.sigma_statistical)
    }

    /// The allowance for a failed check: the residual lag.
    fn sigma_equilibration(&self) -> f64 {
        if self.equilibrated() {
            0.0
        } else {
            self.residual_lag()
        }
    }

    /// The statistical σ of the value reported: ln W, or for a weighted model the entropy.
    fn statistical(&self) -> f64 {
        self.ground
            .as_ref()
            .map_or(self.sigma_statistical, |g| g.sigma_entropy)
    }

    /// The σ of ln Z alone (of ln W unweighted).
    fn total_ln_z(&self) -> f64 {
        let parts = [
            self.sigma_statistical,
            self.sigma_quadrature,
            self.sigma_tail,
            self.sigma_equilibration(),
        ];
        parts.iter().map(|x| x * x).sum::<f64>().sqrt()
    }

    fn total(&self) -> f64 {
        let parts = [
            self.statistical(),
            self.sigma_quadrature,
            self.sigma_tail,
            self.sigma_equilibration(),
        ];
        parts.iter().map(|x| x * x).sum::<f64>().sqrt()
    }
}

/// The factor that widens the standard error of the mean of `r` replicas so that
/// (mean − truth)/σ has unit variance when the replica values are normal: the mean over
/// the estimated standard error is Student-t with r − 1 degrees of freedom, whose variance
/// is (r − 1)/(r − 3) (Student 1908, Biometrika 6, 1; 1.18 for 8 replicas, 1.07 for 16).
/// For 2 and 3 replicas, where that variance is infinite, the factor is the t quantile of
/// a central 68.27 % interval (1.837 and 1.321).
pub fn student_factor(r: usize) -> f64 {
    match r {
        0..=2 => 1.8373,
        3 => 1.3213,
        _ => ((r as f64 - 1.0) / (r as f64 - 3.0)).sqrt(),
    }
}

/// Loop moves are attempted only from this β on.
const LOOPS_FROM_BETA: f64 = 1.0;

/// From this β on, every sweep is followed by defect-focused moves (when
/// [`SampleConfig::defect_moves`]). Below it defects are dense and a sweep moves them as
/// well; above it a sweep spends most of its updates far from the few defects, whose
/// slow meeting sets the correlation time (measured on ice Ih 8×8×4, DEVELOPERS.md "How
/// the Monte Carlo works": variance × time per node about equal at β = 3, two to three
/// times smaller at β = 4–5, and from β = 7 on the correlation time falls from 100–500
/// sweeps to under 10).
pub const DEFECT_MOVES_FROM_BETA: f64 = 3.0;

/// Below this β the conditional estimate of E is measured by a pass after the sweep
/// (when [`SampleConfig::conditional`] and the estimate cannot be gathered during the
/// sweep: many states or weights): there single variables fluctuate strongly, and
/// averaging each constraint over the heat-bath distribution of one of its variables
/// removes most of the variance (8 times at β = 0.25, 3 times at β = 1 on ice Ih, for
/// the cost of about one sweep); above it the gain no longer pays for the pass.
pub const CONDITIONAL_BELOW_BETA: f64 = 1.25;

/// On models with loop moves, replicas run as 64 chains in machine words ([`lanes`]) only
/// at the nodes below this β, and as one chain with loop and defect-focused moves from
/// it on. Measured on ice Ih 8×8×4 (`examples/node_variance.rs`, variance × time per
/// node, in equilibrium): the 64 chains are 7–18 times better up to β = 4.5, 3–7 times at
/// 5–6, equal at 7, and from 7.5 on they no longer even reach equilibrium in 500 sweeps
/// (E/N 3e-4 against 1e-5), since Metropolis sweeps move the last few defects one step at
/// a time. Annealed, they lag from β = 4 on; what keeps that honest is the overshoot of
/// `lane_replica` and [`LANE_EQUILIBRATION_FACTOR`]: on the ice Ih 2x2x24 tube (100 seeds,
/// `examples/pulls.rs`) the mean pull was −0.40 without both, −0.20 ± 0.08 with the
/// overshoot and twice the equilibration, and −0.09 ± 0.09 (spread 0.93) with four times.
pub const LANES_BELOW_BETA: f64 = 6.0;

/// The cost of a sweep of 64 chains in machine words against one chain's sweep with loop
/// and defect-focused moves, for the allocation of sweeps over nodes: a fixed number, so
/// that the allocation does not depend on the clock. Measured on ice Ih 8×8×4, quiet
/// machine, 2026-12-04 (`examples/lane_timing.rs`, `examples/chain_timing.rs`, best of
/// 8 × 300 sweeps): 60–64 µs per sweep of 64 chains at β = 5, against 105, 91, 61 and 50 µs
/// for one chain's step (the skipping sweep and one focused move per variable) at β = 6,
/// 6.5, 7 and 8. It was 3 while the one chain made a few dozen focused moves per sweep.
const LANE_SWEEP_COST: f64 = 0.8;

/// Defect-focused moves after every sweep, per variable, at every node from
/// [`DEFECT_MOVES_FROM_BETA`] on: a fixed number per node, so that the kernel of a node
/// never depends on the state it moves. At large β the few defects of a 3D ice must find
/// each other across the cell, which takes moves in proportion to its size, whatever
/// their number. Measured on ice Ih 8×8×4 (2048 variables; `examples/node_variance.rs`,
/// one chain, 40 000 sweeps per β, variance × 2τ × time per sweep summed over β = 6.25 to
/// 7.25, 2026-12-04): 19.3 with 64 moves (what the earlier rule, 32 per violated
/// constraint at the start of the node plus 64, made at a node that starts without
/// defects; at most 150 or so there), 8.2 with 512, 5.2 with 1024, 4.1 with
/// 2048 and 3.8 with 4096 (one move costs about 40 ns, the skipping sweep 20 µs); equal
/// within the noise between 512 and 2048 at β = 3–5.5. Spin ice 6×6×6: 2–4 times smaller
/// at β = 5.5–8 with one move per variable than with 96.
pub const DEFECT_MOVES_PER_VARIABLE: f64 = 1.0;

/// Defect-focused moves after each sweep of a model with `variables` variables
/// ([`DEFECT_MOVES_PER_VARIABLE`]).
pub fn defect_moves_per_sweep(variables: usize) -> usize {
    (variables as f64 * DEFECT_MOVES_PER_VARIABLE).ceil() as usize
}

/// What one replica returns: all a merge needs from it.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Run {
    /// The replica index (it fixes the random stream).
    pub replica: usize,
    /// ⟨E⟩ at every node on the pass up from β = 0 (the β = 0 node filled in exactly).
    pub up: Vec<f64>,
    /// ⟨E⟩ at every node on the pass down from β_max (the β = 0 node filled in exactly).
    pub down: Vec<f64>,
    /// Loops flipped.
    pub flipped: u64,
    /// Loop moves attempted.
    pub attempted: u64,
    /// For a weighted model: the sums over the defect-free samples at β_max ([`ground`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ground: Option<ground::Ground>,
}

impl Run {
    /// ⟨E⟩ at every node, both passes together (weighted by their measured sweeps at that
    /// node, which differ by at most one).
    fn energy(&self, node_sweeps: &[usize]) -> Vec<f64> {
        self.up
            .iter()
            .zip(&self.down)
            .zip(node_sweeps)
            .map(|((u, d), &sweeps)| {
                let (a, b) = split(sweeps.max(2));
                let (a, b) = (a as f64, b as f64);
                (a * u + b * d) / (a + b)
            })
            .collect()
    }
}

/// Measured sweeps of the pass up and of the pass down.
fn split(sweeps: usize) -> (usize, usize) {
    (sweeps - sweeps / 2, sweeps / 2)
}

/// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA): a bijective mixer used to derive
/// independent seeds.
fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The random stream of replica `r`.
pub fn stream(seed: u64, r: usize) -> rand_pcg::Pcg64Mcg {
    let mut s = seed ^ (r as u64).wrapping_mul(0xD1B5_4A32_D192_ED03);
    let lo = splitmix64(&mut s) as u128;
    let hi = splitmix64(&mut s) as u128;
    rand_pcg::Pcg64Mcg::new(lo | (hi << 64))
}

/// Count a model by thermodynamic integration.
///
/// When the equilibration check fails, the whole run is repeated with twice the sweeps
/// and twice the equilibration, up to `max_extensions` times (never past the context's
/// deadline); the result says how often. Once the context's interrupt is raised no
/// replica starts, and the finished ones make the estimate ([`Sampled::interrupted`]), or
/// [`Error::Interrupted`] when fewer than two finished. The observer is told every
/// finished replica ([`Progress::Replica`]).
///
/// ```
/// use groundcount::{Lattice, cluster::{Cells, Cluster}, counters::{sampling, Context}, model::Model};
/// let ice = Lattice::from_yaml(groundcount::ICE_IH_YAML, "ice-ih.yaml").unwrap();
/// let cluster = Cluster::new(&ice.crystal, Cells::periodic(&[2, 1, 1]).unwrap()).unwrap();
/// let model = Model::new(&cluster).unwrap();
/// let config = sampling::SampleConfig { replicas: 4, sweeps: 20, ..Default::default() };
/// let s = sampling::count(&model, &config, &Context::new()).unwrap();
/// // The exact count of this cell is 114 arrangements of 8 waters.
/// let exact = 114f64.ln() / 8.0;
/// let e = &s.estimate;
/// assert!((e.ln_w_per_unit - exact).abs() < 5.0 * e.sigma_ln_w.unwrap());
/// assert_eq!(s.replicas, 4);
/// ```
pub fn count(model: &Model, config: &SampleConfig, context: &Context) -> Result<Counted<Sampled>> {
    let start = Instant::now();
    let mut config = config.clone();
    let mut extensions = 0;
    let mut updates = 0u64;
    loop {
        let attempt = Instant::now();
        let plan = Plan::new(model, &config)?;
        let mut runs = plan.run(0..config.replicas, context);
        if let Some(target) = config.target_error {
            while !context.interrupt.raised()
                && plan.combine(&runs).total() > target
                && runs.len() + config.replicas <= config.max_replicas
            {
                let from = runs.len();
                runs.extend(plan.run(from..from + config.replicas, context));
            }
        }
        let interrupted = context.interrupt.raised();
        if runs.len() < 2 {
            return Err(Error::Interrupted {
                what: format!(
                    "sampling {} ({} of the replicas finished; an error bar needs 2)",
                    model.cells,
                    runs.len()
                ),
            });
        }
        updates = updates.saturating_add(plan.updates(runs.len()));
        // A repetition takes about twice as long as this attempt.
        let late = context
            .deadline
            .is_some_and(|d| Instant::now() + 2 * attempt.elapsed() > d);
        let done = interrupted
            || extensions >= config.max_extensions
            || plan.combine(&runs).equilibrated()
            || late
            || config.sweeps > usize::MAX / 4;
        if done {
            let mut s = plan.finish(&runs, start.elapsed().as_secs_f64())?;
            s.extensions = extensions;
            s.updates = updates;
            // Cut short: a batch left incomplete, or a target abandoned for the interrupt.
            s.interrupted = interrupted
                && (runs.len() % config.replicas != 0 || s.target_reached == Some(false));
            return Ok(s);
        }
        extensions += 1;
        config.sweeps *= 2;
        config.equilibration *= 2;
        config.node_sweeps.iter_mut().for_each(|n| *n *= 2);
    }
}

/// A run prepared for one model and one configuration: the compiled moves, the quadrature
/// nodes and the Pauling reference. Replicas can be run in any ranges (shards) and
/// finished together; the result depends only on which replicas were run.
pub struct Plan<'m> {
    model: &'m Model,
    config: SampleConfig,
    kernel: Kernel,
    loops: Option<loops::Loops>,
    attempts: usize,
    betas: Vec<f64>,
    reference: Vec<f64>,
    /// Pauling's ln W of the whole cell.
    ln_pauling: f64,
    /// The reference integral beyond β_max.
    ref_tail: f64,
    beta_max: f64,
    impossible: bool,
    /// For a weighted model: what is measured in the defect-free ensemble.
    observables: Option<ground::Observables>,
    /// Measured sweeps at every node (index 0 unused).
    node_sweeps: Vec<usize>,
    /// The bit-sliced kernel, when replicas run as 64 chains each.
    lanes: Option<lanes::LaneKernel>,
}

impl<'m> Plan<'m> {
    /// Check the configuration and compile the model for sampling.
    pub fn new(model: &'m Model, config: &SampleConfig) -> Result<Plan<'m>> {
        if config.replicas < 2 {
            return Err(Error::Model(
                "the Monte Carlo needs at least 2 replicas for an error bar".into(),
            ));
        }
        if config.nodes < 5 || config.nodes % 4 != 1 {
            return Err(Error::Model(format!(
                "quadrature nodes must be 4m + 1 and at least 5, not {}",
                config.nodes
            )));
        }
        if config.sweeps < 2 {
            return Err(Error::Model(
                "at least two measured sweeps per node are needed (one on the way up, one on the way down)"
                    .into(),
            ));
        }
        let beta_max = config
            .beta_max
            .unwrap_or_else(|| default_beta_max(model.constraints.len()));
        if !(beta_max > 0.0 && beta_max.is_finite()) {
            return Err(Error::Model(format!(
                "the largest β must be a positive number, not {beta_max}"
            )));
        }
        let spacing = beta_max / (config.nodes - 1) as f64;
        if spacing > MAX_NODE_SPACING {
            return Err(Error::Setting(format!(
                "{} quadrature nodes up to β = {} would lie {} apart, but the mean number of violated constraints changes on a scale of 1 in β (each costs 1 in βE), and nodes further apart than {MAX_NODE_SPACING} can step over that change entirely and return Pauling's value with no error bar; with {} nodes the largest β can be at most {}{}",
                config.nodes,
                crate::text::sig(beta_max, 4),
                crate::text::sig(spacing, 3),
                config.nodes,
                MAX_NODE_SPACING * (config.nodes - 1) as f64,
                smallest_nodes(beta_max)
            )));
        }
        let most = if config.target_error.is_some() {
            config.max_replicas.max(config.replicas)
        } else {
            config.replicas
        };
        let bytes = memory_estimate(model, config.nodes, most);
        if bytes > MAX_MEMORY {
            return Err(Error::Setting(format!(
                "{most} replicas of {} nodes on {} ({} variables) would hold about {} in memory, more than the {} the sampler allows itself; use fewer replicas or nodes, or split the run into shards",
                config.nodes,
                model.cells,
                model.variables.len(),
                bytes_in_words(bytes),
                bytes_in_words(MAX_MEMORY)
            )));
        }
        check_fields(model, &config.fields)?;
        let kernel = Kernel::with_fields(model, &config.fields)?;
        // Defect-focused moves where defects are conserved charges that wander (the
        // models loop moves apply to: ice and spin-ice rules, dimers): there they cut the
        // correlation time at large β many times over. On the triangular antiferromagnet
        // they gave no smaller σ (1.42e-3 against 1.48e-3 over 100 seeds on 6×6) and a
        // pull spread of 1.16 against 0.94, so other models keep the sweeps alone.
        let structure = loops::Loops::new(model);
        // 64-chain replicas only where loop moves apply (where one chain takes over at
        // large β): on the triangular antiferromagnet, lanes at every node left a mean
        // pull of −0.38 over 100 seeds (6×6), so models without loop moves run one chain.
        let lane_kernel = if config.lanes && structure.is_some() {
            lanes::LaneKernel::new(model)
        } else {
            None
        };
        let config = &SampleConfig {
            defect_moves: config.defect_moves && structure.is_some(),
            lanes: lane_kernel.is_some(),
            ..config.clone()
        };
        let loops = if config.loops { structure } else { None };
        let attempts = loops
            .as_ref()
            .map_or(0, |_| (model.constraints.len() / 64).max(1));
        let fractions: Vec<f64> = if kernel.is_weighted() {
            weighted_fractions(model, &kernel)
        } else {
            model
                .constraints
                .iter()
                .map(|c| {
                    let t = &model.tables[c.table];
                    t.allowed as f64 / t.size as f64
                })
                .collect()
        };
        let impossible = model.contradiction.is_some() || fractions.contains(&0.0);
        let betas = integrate::nodes(beta_max, config.nodes);
        let reference: Vec<f64> = betas
            .iter()
            .map(|&b| {
                let x = (-b).exp();
                fractions
                    .iter()
                    .map(|&p| (1.0 - p) * x / (p + (1.0 - p) * x))
                    .sum()
            })
            .collect();
        let ln_free = if kernel.is_weighted() {
            kernel.ln_free()
        } else {
            model.ln_unconstrained()
        };
        let ln_pauling: f64 = ln_free + fractions.iter().map(|p| p.ln()).sum::<f64>();
        let ref_tail: f64 = fractions
            .iter()
            .map(|&p| (p + (1.0 - p) * (-beta_max).exp()).ln() - p.ln())
            .sum();
        let given = !config.node_sweeps.is_empty();
        if given
            && (config.node_sweeps.len() != config.nodes
                || config.node_sweeps[1..].iter().any(|&n| n < 2))
        {
            return Err(Error::Setting(format!(
                "the measured sweeps per node must be given for all {} nodes, each at least 2",
                config.nodes
            )));
        }
        let mut plan = Plan {
            model,
            config: config.clone(),
            kernel,
            loops,
            attempts,
            betas,
            reference,
            ln_pauling,
            ref_tail,
            beta_max,
            impossible,
            observables: model.is_weighted().then(|| ground::Observables::new(model)),
            node_sweeps: if given {
                config.node_sweeps.clone()
            } else {
                vec![config.sweeps; config.nodes]
            },
            lanes: lane_kernel,
        };
        if !given && config.allocate && !impossible {
            let cost = plan.sweep_costs();
            plan.node_sweeps = allocation::allocate(&plan.pilot()?, config, &cost);
            // With weights the last node also samples the defect-free ensemble (⟨ln w⟩
            // and the imposed means), whose variance the pilot's ⟨E⟩ does not see: it
            // keeps at least the equal share, on every model alike (so that zero fields
            // give the unweighted numbers bit for bit).
            let last = config.nodes - 1;
            plan.node_sweeps[last] = plan.node_sweeps[last].max(config.sweeps + config.sweeps % 2);
        }
        Ok(plan)
    }

    /// Measured sweeps at every node (index 0, β = 0, unused): the allocation the run
    /// uses, which every shard of a split run must share.
    pub fn node_sweeps(&self) -> &[usize] {
        &self.node_sweeps
    }

    /// The pilot of an allocation: [`allocation::PILOT_REPLICAS`] replicas on streams of
    /// their own, with a quarter of the sweeps, equal at every node; the ⟨E⟩ of each node
    /// for each replica.
    fn pilot(&self) -> Result<Vec<Vec<f64>>> {
        let config = allocation::pilot_config(&self.config);
        let pilot = Plan::new(self.model, &config)?;
        let runs = pilot.run(0..config.replicas, &Context::new());
        Ok(runs
            .iter()
            .map(|run| run.energy(&pilot.node_sweeps))
            .collect())
    }

    /// The largest β sampled.
    pub fn beta_max(&self) -> f64 {
        self.beta_max
    }

    /// Run the replicas `replicas` in parallel (in the caller's rayon pool), in index order.
    /// Once the context's interrupt is raised no further replica starts; the replicas that
    /// finished are returned (in index order). The observer is told every finished replica.
    pub fn run(&self, replicas: std::ops::Range<usize>, context: &Context) -> Vec<Run> {
        let interrupt = &context.interrupt;
        let runs: Vec<Option<Run>> = replicas
            .into_par_iter()
            .with_max_len(1)
            .map(|r| {
                if interrupt.raised() {
                    return None;
                }
                let run = match &self.lanes {
                    Some(lk) => lane_replica(self, lk, r),
                    None => replica(self, 1, None, r),
                };
                context.tell(Progress::Replica);
                Some(run)
            })
            .collect();
        runs.into_iter().flatten().collect()
    }

    /// Single-variable updates of `replicas` replicas (of every chain, where a replica
    /// runs 64): the sweeps [`lane_replica`] and [`replica`] run, counted from the same
    /// [`LaneSchedule`] they follow.
    fn updates(&self, replicas: usize) -> u64 {
        let schedule = self.lane_schedule();
        let n = self.betas.len();
        let lanes = lanes::LANES as u64;
        let extra = if self.observables.is_some() {
            ground_sweeps(&self.config) as u64
        } else {
            0
        };
        let mut per_replica = extra;
        for i in 1..n {
            let measured = self.node_sweeps[i] as u64;
            let sweeps = if i < schedule.switch {
                (measured + (schedule.equilibration(i) + schedule.down_equilibration(i)) as u64)
                    .saturating_mul(lanes)
            } else {
                // One chain: no equilibration at the turn (β_max) on the way down.
                let down = if i + 1 == n {
                    0
                } else {
                    self.config.equilibration
                };
                measured + (self.config.equilibration + down) as u64
            };
            per_replica = per_replica.saturating_add(sweeps);
        }
        if schedule.overshoot() {
            per_replica = per_replica
                .saturating_add((schedule.equilibration(schedule.switch) as u64) * lanes);
        }
        (replicas as u64)
            .saturating_mul(per_replica)
            .saturating_mul(self.kernel.variables() as u64)
    }

    /// The nodes run as 64 chains in machine words: indices below this (none without
    /// [`lanes`], which run only on models with loop moves).
    fn lane_nodes(&self) -> usize {
        match &self.lanes {
            None => 0,
            Some(_) => self
                .betas
                .iter()
                .position(|&b| b >= LANES_BELOW_BETA)
                .unwrap_or(self.betas.len()),
        }
    }

    /// What the 64 chains of a replica run: the one place [`lane_replica`] and
    /// [`Plan::updates`] read it from.
    fn lane_schedule(&self) -> LaneSchedule<'_> {
        LaneSchedule {
            switch: self.lane_nodes(),
            betas: &self.betas,
            equilibration: self.config.equilibration,
        }
    }

    /// The relative cost of a sweep at every node: [`LANE_SWEEP_COST`] where 64 chains
    /// run in machine words, 1 where one chain runs.
    fn sweep_costs(&self) -> Vec<f64> {
        let lanes = self.lane_nodes();
        (0..self.betas.len())
            .map(|i| if i < lanes { LANE_SWEEP_COST } else { 1.0 })
            .collect()
    }

    /// Chains each replica runs: 64 when they run in the bits of machine words
    /// ([`lanes`]), else 1.
    pub fn chains_per_replica(&self) -> usize {
        if self.lanes.is_some() {
            lanes::LANES
        } else {
            1
        }
    }

    /// The integrand ⟨E⟩ − E_ref at every node.
    fn integrand(&self, energy: &[f64]) -> Vec<f64> {
        energy
            .iter()
            .zip(&self.reference)
            .map(|(e, r)| e - r)
            .collect()
    }

    /// ln W per formula unit from ⟨E⟩ at every node, the integral of ⟨E⟩ beyond β_max
    /// taken as ⟨E⟩(β_max)/`rate` ([`Plan::tail_rate`]).
    fn ln_w(&self, energy: &[f64], rate: f64) -> f64 {
        let last = self.config.nodes - 1;
        let h = self.integrand(energy);
        let tail = energy[last] / rate - self.ref_tail;
        (self.ln_pauling - integrate::simpson(&h, self.beta_max) - tail) / self.model.formula_units
    }

    /// The decay rate k of ⟨E⟩ ∝ e^{−kβ} beyond β_max, whose tail integral is
    /// ⟨E⟩(β_max)/k, and the relative uncertainty of that integral, from the replica-mean
    /// ⟨E⟩ at the last nodes: k from the last two node spacings, its uncertainty the
    /// difference from k over the last spacing alone (the curvature of ln⟨E⟩), at least
    /// [`TAIL_RATE_FLOOR`] of it. The rate is 1 where the cheapest excitation violates one
    /// constraint and 2 where violations come in pairs (ice rules, whose ⟨E⟩/2 was the
    /// tail before), and finite β bends it (0.94 measured on a diluted spin ice); taking
    /// 2 where it is 1 left a bias of 1.5σ on small diluted cells. Where ⟨E⟩ is too small
    /// or not falling to measure it: the bound 0 ≤ tail ≤ ⟨E⟩(β_max) (every violation
    /// costs at least 1), as ⟨E⟩/2 with a uniform uncertainty (rate 2, relative σ 1/√3).
    fn tail_rate(&self, mean_energy: &[f64]) -> (f64, f64) {
        let n = mean_energy.len();
        let bound = (2.0, 1.0 / 3f64.sqrt());
        if n < 3 {
            return bound;
        }
        let (a, b, c) = (mean_energy[n - 3], mean_energy[n - 2], mean_energy[n - 1]);
        let h = self.betas[n - 1] - self.betas[n - 2];
        if !(a > b && b > c && c > 0.0 && h > 0.0) {
            return bound;
        }
        let two = (a / c).ln() / (2.0 * h);
        let one = (b / c).ln() / h;
        // Rates beyond 1/2 only: a slower fall is not an exponential tail, and the bound
        // is the honest answer then.
        if !(two >= 0.5 && one >= 0.5 && two.is_finite() && one.is_finite()) {
            return bound;
        }
        let relative = ((two - one).abs() / two).max(TAIL_RATE_FLOOR);
        if relative >= bound.1 {
            return bound;
        }
        (two, relative)
    }

    /// Combine replicas (in the order given).
    fn combine(&self, runs: &[Run]) -> Combined {
        let units = self.model.formula_units;
        let width = self.beta_max;
        let last = self.config.nodes - 1;
        let sweeps = &self.node_sweeps;
        let r = runs.len() as f64;
        let mean_energy: Vec<f64> = (0..self.config.nodes)
            .map(|i| runs.iter().map(|run| run.energy(sweeps)[i]).sum::<f64>() / r)
            .collect();
        let (rate, sigma_rate) = self.tail_rate(&mean_energy);
        let per_replica: Vec<f64> = runs
            .iter()
            .map(|run| self.ln_w(&run.energy(sweeps), rate))
            .collect();
        let differences: Vec<f64> = runs
            .iter()
            .map(|run| self.ln_w(&run.up, rate) - self.ln_w(&run.down, rate))
            .collect();
        let (mean, se) = mean_and_error(&per_replica);
        let (hysteresis, sigma_hysteresis) = mean_and_error(&differences);
        let h = self.integrand(&mean_energy);
        let ground = self
            .observables
            .as_ref()
            .and_then(|_| self.ground_stats(runs, &per_replica, mean));
        Combined {
            mean,
            sigma_statistical: se * student_factor(runs.len()),
            sigma_quadrature: (integrate::simpson(&h, width) - integrate::simpson_half(&h, width))
                .abs()
                / 15.0
                / units,
            sigma_tail: mean_energy[last] / rate * sigma_rate / units,
            hysteresis,
            sigma_hysteresis,
            per_replica,
            mean_energy,
            ground,
        }
    }

    /// The defect-free measurements of a weighted run combined over the replicas
    /// ([`ground`]), given each replica's ln Z per formula unit and their mean; `None` when
    /// fewer than two replicas saw a defect-free arrangement at β_max.
    fn ground_stats(&self, runs: &[Run], per_replica: &[f64], mean: f64) -> Option<GroundStats> {
        let units = self.model.formula_units;
        let grounds: Vec<&ground::Ground> = runs
            .iter()
            .map(|r| r.ground.as_ref())
            .collect::<Option<_>>()?;
        if grounds.iter().filter(|g| g.samples > 0).count() < 2 {
            return None;
        }
        let widen = student_factor(runs.len());
        let n: Vec<f64> = grounds.iter().map(|g| g.samples as f64).collect();
        let sums: Vec<f64> = grounds.iter().map(|g| g.ln_w).collect();
        let (ln_w, se_ln_w, influence) = ground::ratio(&sums, &n);
        // ln Z − ⟨ln w⟩ per replica, linearised: the spread carries their correlation.
        let y: Vec<f64> = per_replica
            .iter()
            .zip(&influence)
            .map(|(x, u)| x - u / units)
            .collect();
        let (_, se_entropy) = mean_and_error(&y);
        let k = self.model.means.len();
        let total: f64 = n.iter().sum();
        let mut achieved = Vec::with_capacity(k);
        let mut sigma_achieved = Vec::with_capacity(k);
        let mut mean_counts = Vec::with_capacity(k);
        for (j, m) in self.model.means.iter().enumerate() {
            let c: Vec<f64> = grounds.iter().map(|g| g.counts[j]).collect();
            let (mc, se, _) = ground::ratio(&c, &n);
            let size = m.variables.len() as f64;
            mean_counts.push(mc);
            achieved.push(mc / size);
            sigma_achieved.push(se * widen / size);
        }
        let mut covariance = vec![0.0; k * k];
        let mut p = 0;
        for j in 0..k {
            for l in j..k {
                let product: f64 = grounds.iter().map(|g| g.products[p]).sum::<f64>() / total;
                let c = product - mean_counts[j] * mean_counts[l];
                covariance[j * k + l] = c;
                covariance[l * k + j] = c;
                p += 1;
            }
        }
        let measured = runs.len() as f64
            * (self.node_sweeps[self.config.nodes - 1] + ground_sweeps(&self.config)) as f64;
        Some(GroundStats {
            entropy: mean - ln_w / units,
            sigma_entropy: se_entropy * widen,
            mean_ln_w: ln_w / units,
            sigma_ln_w: se_ln_w * widen / units,
            achieved,
            sigma_achieved,
            covariance,
            samples: total as u64,
            fraction: total / measured,
        })
    }

    /// The estimate from the replicas run (at least 2, in replica order), which took
    /// `seconds` of wall time. For a weighted model, refused when fewer than two replicas
    /// saw an arrangement that keeps every rule at β_max (nothing to measure ⟨ln w⟩ on).
    pub fn finish(&self, runs: &[Run], seconds: f64) -> Result<Counted<Sampled>> {
        let config = &self.config;
        let c = self.combine(runs);
        if self.observables.is_some() && !self.impossible && c.ground.is_none() {
            let seen = runs
                .iter()
                .filter(|r| r.ground.as_ref().is_some_and(|g| g.samples > 0))
                .count();
            return Err(Error::Setting(format!(
                "the entropy of a weighted ensemble needs ⟨ln w⟩ over the arrangements that keep every rule, measured at the largest β ({}); only {seen} of the {} replicas saw one there (at least 2 are needed), with {} violated constraints left on average: sample to a larger β, or with more sweeps",
                crate::text::sig(self.beta_max, 3),
                runs.len(),
                crate::text::sig(c.mean_energy[c.mean_energy.len() - 1], 3)
            )));
        }
        let target_reached = config.target_error.map(|t| c.total() <= t);
        let equilibrated = c.equilibrated();
        let sigma_equilibration = c.sigma_equilibration();
        let total = c.total();
        let total_ln_z = c.total_ln_z();
        let sigma_statistical = c.statistical();
        let Combined {
            mean,
            sigma_quadrature,
            sigma_tail,
            hysteresis,
            sigma_hysteresis,
            per_replica,
            mean_energy,
            ground,
            ..
        } = c;
        let units = self.model.formula_units;
        let (ln_w, sigma) = if self.impossible {
            (f64::NEG_INFINITY, 0.0)
        } else if let Some(g) = &ground {
            (g.entropy, total)
        } else {
            (mean, total)
        };
        let replicas = runs.len();
        let samples = (replicas as u64)
            .saturating_mul(self.node_sweeps[1..].iter().map(|&n| n as u64).sum::<u64>());
        let attempted: u64 = runs.iter().map(|r| r.attempted).sum();
        let mut estimate = Estimate::finite(
            Method::MonteCarlo,
            self.model.cells.clone(),
            units,
            ln_w,
            Some(sigma),
            seconds,
        );
        let weighing = self.observables.as_ref().map(|_| {
            let k = self.model.means.len();
            let (ln_z, sigma_ln_z) = if self.impossible {
                (f64::NEG_INFINITY, 0.0)
            } else {
                (mean, total_ln_z)
            };
            match &ground {
                Some(g) => SampledWeighing {
                    ln_z_per_unit: ln_z,
                    sigma_ln_z,
                    mean_ln_w_per_unit: g.mean_ln_w,
                    sigma_mean_ln_w: g.sigma_ln_w,
                    fields: config.fields.clone(),
                    achieved: g.achieved.clone(),
                    sigma_achieved: g.sigma_achieved.clone(),
                    covariance: g.covariance.clone(),
                    ground_samples: g.samples,
                    ground_fraction: g.fraction,
                },
                // No arrangement keeps every rule: nothing was measured.
                None => SampledWeighing {
                    ln_z_per_unit: ln_z,
                    sigma_ln_z,
                    mean_ln_w_per_unit: f64::NAN,
                    sigma_mean_ln_w: f64::NAN,
                    fields: config.fields.clone(),
                    achieved: vec![f64::NAN; k],
                    sigma_achieved: vec![f64::NAN; k],
                    covariance: vec![f64::NAN; k * k],
                    ground_samples: 0,
                    ground_fraction: 0.0,
                },
            }
        });
        if let Some(w) = &weighing {
            estimate = estimate.with_weighing(crate::estimate::Weighing {
                ln_z_per_unit: w.ln_z_per_unit,
                fields: self
                    .model
                    .means
                    .iter()
                    .enumerate()
                    .map(|(j, m)| crate::estimate::FieldValue {
                        label: m.label.clone(),
                        kind: m.kind,
                        target: m.mean,
                        field: w.fields[j],
                        achieved: w.achieved[j],
                        achieved_sigma: w.sigma_achieved[j]
                            .is_finite()
                            .then_some(w.sigma_achieved[j]),
                    })
                    .collect(),
            });
        }
        let details = Sampled {
            sigma_statistical,
            sigma_quadrature,
            sigma_tail,
            sigma_equilibration,
            hysteresis,
            sigma_hysteresis,
            equilibrated,
            extensions: 0,
            sweeps: config.sweeps,
            equilibration: config.equilibration,
            interrupted: false,
            seed: config.seed,
            replicas,
            samples,
            updates: self.updates(replicas),
            betas: self.betas.clone(),
            mean_energy,
            reference_energy: self.reference.clone(),
            per_replica,
            beta_max: self.beta_max,
            target_reached,
            lanes_up_to_beta: match self.lane_nodes() {
                0 | 1 => None,
                k => Some(self.betas[k - 1]),
            },
            loop_attempts_per_sweep: self.attempts,
            loop_acceptance: if self.attempts == 0 {
                0.0
            } else {
                runs.iter().map(|r| r.flipped).sum::<u64>() as f64 / attempted.max(1) as f64
            },
            weighing,
        };
        Ok(Counted::new(estimate, details))
    }
}

/// The smallest relative uncertainty given to the tail beyond β_max when its decay rate
/// is measured ([`Plan::tail_rate`]): the rate is measured at β_max and the tail lies
/// beyond it (a choice, common practice).
const TAIL_RATE_FLOOR: f64 = 0.25;

/// Mixed into the seed of the one chain that takes over from lane 0 at
/// [`LANES_BELOW_BETA`].
const HANDOFF_SALT: u64 = 0x3C6E_F372_FE94_F82B;

/// Mixed into the seed of the copy of a chain that samples the defect-free ensemble.
const GROUND_SALT: u64 = 0x6A09_E667_F3BC_C908;

/// The extra sweeps a weighted replica spends at β_max between its two passes, measuring
/// the defect-free ensemble only: a quarter of its measured sweeps over all nodes, so that
/// ⟨ln w⟩ is measured about as precisely as ln Z is integrated (a choice, common practice).
fn ground_sweeps(config: &SampleConfig) -> usize {
    (config.nodes - 1).saturating_mul(config.sweeps) / 4
}

/// Refuse fields that do not fit the model's imposed means: one finite field per mean, and
/// no `composition:` (a fraction fixed exactly, which a field does not sample).
fn check_fields(model: &Model, fields: &[f64]) -> Result<()> {
    if let Some(m) = model
        .means
        .iter()
        .find(|m| m.kind == crate::crystal::MeanKind::Composition)
    {
        return Err(Error::Setting(format!(
            "the composition '{}' fixes a fraction exactly (canonical), but the Monte Carlo sampler holds a mean only on average, by a conjugate field (grand canonical), which in a finite cell is a different ensemble with a different entropy; count the cell exactly, or write the entry as an occupancy (the maximum-entropy ensemble at that mean)",
            m.label
        )));
    }
    if fields.len() != model.means.len() {
        let labels: Vec<&str> = model.means.iter().map(|m| m.label.as_str()).collect();
        return Err(Error::Setting(if model.means.is_empty() {
            format!(
                "{} conjugate fields given, but the lattice imposes no mean (no occupancy)",
                fields.len()
            )
        } else {
            format!(
                "the Monte Carlo sampler needs the conjugate field of every imposed mean ({} given, {} imposed: {}); it does not solve for them: the exact solver of a small cell provides them, or give them",
                fields.len(),
                labels.len(),
                labels.join(", ")
            )
        }));
    }
    if let Some(h) = fields.iter().find(|h| !h.is_finite()) {
        return Err(Error::Setting(format!(
            "a conjugate field must be a finite number, not {h}"
        )));
    }
    Ok(())
}

/// The probability that each constraint holds when every variable is drawn from its
/// weights alone (the β = 0 distribution): Σ over allowed assignments of ∏ w/Σw. Computed
/// once per table and pattern of weight profiles.
fn weighted_fractions(model: &Model, kernel: &Kernel) -> Vec<f64> {
    let mut cache: std::collections::HashMap<(usize, Vec<u32>), f64> = Default::default();
    model
        .constraints
        .iter()
        .map(|c| {
            let profiles: Vec<u32> = c.scope.iter().map(|&v| kernel.profile(v)).collect();
            *cache.entry((c.table, profiles)).or_insert_with(|| {
                let t = &model.tables[c.table];
                let mut p = 0.0;
                for index in 0..t.size {
                    if !t.allows(index) {
                        continue;
                    }
                    let mut rest = index;
                    let mut w = 1.0;
                    for (&v, &q) in c.scope.iter().zip(&t.radices) {
                        w *= kernel.probability(v, (rest % q as u64) as u8);
                        rest /= q as u64;
                    }
                    p += w;
                }
                p
            })
        })
        .collect()
}

/// Mean and standard error of the mean (plain, n − 1 in the variance).
fn mean_and_error(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}

/// ", and β = B needs at least n nodes" when n is a sensible number of nodes (at most
/// 1001), or nothing.
fn smallest_nodes(beta_max: f64) -> String {
    let intervals = (beta_max / MAX_NODE_SPACING / 4.0).ceil() * 4.0;
    if intervals <= 1000.0 {
        format!(
            ", and β = {} needs at least {} nodes",
            crate::text::sig(beta_max, 4),
            intervals as u64 + 1
        )
    } else {
        String::new()
    }
}

/// Bytes a run of `replicas` replicas with `nodes` nodes plans to hold: the replica results
/// (two energies per node), one chain per worker thread and the compiled tables.
pub(crate) fn memory_estimate(model: &Model, nodes: usize, replicas: usize) -> u64 {
    let per_run = std::mem::size_of::<Run>() as u64 + 16 * nodes as u64;
    let touches: u64 = model.constraints.iter().map(|c| c.scope.len() as u64).sum();
    let tables: u64 = model.tables.iter().map(|t| t.bits.len() as u64 * 8).sum();
    let chain = model.variables.len() as u64 + 4 * model.constraints.len() as u64;
    let threads = rayon::current_num_threads() as u64;
    (replicas as u64)
        .saturating_mul(per_run)
        .saturating_add(threads.saturating_mul(chain))
        .saturating_add(8 * touches + tables + 8 * nodes as u64)
}

/// "48.0 GB", "512 MB".
pub(crate) fn bytes_in_words(b: u64) -> String {
    let b = b as f64;
    if b >= 1e9 {
        format!("{:.1} GB", b / 1e9)
    } else {
        format!("{:.0} MB", (b / 1e6).max(1.0))
    }
}

/// The default largest β for a model with `constraints` constraints: ln(constraints) + 3,
/// clamped to [5, 14], so that a handful of violations remain there.
pub(crate) fn default_beta_max(constraints: usize) -> f64 {
    ((constraints.max(1) as f64).ln() + 3.0).clamp(5.0, 14.0)
}

/// The β from which 64-chain replicas equilibrate [`LANE_EQUILIBRATION_FACTOR`] times
/// longer at each node.
pub const LANE_LONG_EQUILIBRATION_FROM: f64 = 4.0;

/// How many times `equilibration` the 64 chains sweep at a node from
/// [`LANE_LONG_EQUILIBRATION_FROM`] on before measuring. Measured with
/// `examples/node_variance.rs` (lanes, 3000 sweeps) on the ice Ih 2x2x24 tube, where
/// defects meet slowest: the integrated correlation time of the 64-chain mean is 5–10
/// sweeps up to β = 3.75 and 16–48 sweeps from 4 to 6, so 50 sweeps left about e^{−1} of
/// the jump from the node before; four times that leaves about 2 %.
pub const LANE_EQUILIBRATION_FACTOR: usize = 4;

/// The schedule of a replica's 64 chains ([`lane_replica`]): nodes `1..switch` run as
/// 64 chains, the others as one chain. When one chain takes over (`switch` below the
/// node count) the lanes first equilibrate at node `switch` too, the overshoot, so that on
/// the way down they reach their last node from above.
struct LaneSchedule<'a> {
    switch: usize,
    betas: &'a [f64],
    equilibration: usize,
}

impl LaneSchedule<'_> {
    /// Whether one chain takes over from the lanes (and they overshoot by one node);
    /// never without lanes (`switch` 0: one chain throughout).
    fn overshoot(&self) -> bool {
        self.switch > 0 && self.switch < self.betas.len()
    }

    /// Equilibration sweeps of the 64 chains at node `i` on the way up (and at the
    /// overshoot node): [`LANE_EQUILIBRATION_FACTOR`] times longer from
    /// [`LANE_LONG_EQUILIBRATION_FROM`] on.
    fn equilibration(&self, i: usize) -> usize {
        if self.betas[i] >= LANE_LONG_EQUILIBRATION_FROM {
            self.equilibration.saturating_mul(LANE_EQUILIBRATION_FACTOR)
        } else {
            self.equilibration
        }
    }

    /// Equilibration sweeps at node `i` on the way down: as on the way up, except at the
    /// last lane node when there is no overshoot (lanes at every node), where the chains
    /// are in equilibrium already.
    fn down_equilibration(&self, i: usize) -> usize {
        if self.overshoot() || i + 1 != self.switch {
            self.equilibration(i)
        } else {
            0
        }
    }
}

/// One replica run as 64 chains in the bits of machine words ([`lanes`]): the same
/// annealing as [`replica`], with Metropolis sweeps, ⟨E⟩ at each node the mean over the 64
/// chains. On models where the one-chain sampler has loop moves (conserved defects), the
/// nodes from [`LANES_BELOW_BETA`] on are run by one chain instead, started from lane 0's
/// assignment on a stream of its own ([`HANDOFF_SALT`]): there the defects are few, and
/// Metropolis sweeps alone take hundreds of sweeps to bring a pair together.
fn lane_replica(plan: &Plan, kernel: &lanes::LaneKernel, r: usize) -> Run {
    let config = &plan.config;
    let betas = &plan.betas[..];
    let n = betas.len();
    let schedule = plan.lane_schedule();
    let switch = schedule.switch;
    let mut chains = kernel.lanes(stream(config.seed, r));
    let conditional = config.conditional;
    let node = |chains: &mut lanes::Lanes, i: usize, equilibration: usize, sweeps: usize| {
        let beta = betas[i];
        for _ in 0..equilibration {
            chains.sweep(kernel, beta, false);
        }
        let mut sum = 0.0;
        for _ in 0..sweeps {
            sum += chains.sweep(kernel, beta, conditional);
        }
        sum / (sweeps * lanes::LANES) as f64
    };
    let mut up = vec![0.0; n];
    for (i, u) in up.iter_mut().enumerate().take(switch).skip(1) {
        *u = node(
            &mut chains,
            i,
            schedule.equilibration(i),
            split(plan.node_sweeps[i]).0,
        );
    }
    // When one chain takes over, the lanes first go one node further (equilibration
    // only), so that on the way down they reach their last node from above, as at every
    // other node, and its lag cancels against the way up. Without it both passes there
    // came from below and lagged alike: with the switch at β = 6 the ice Ih 2x2x24 tube
    // had a mean pull of −0.40 over 100 seeds.
    let overshoot = schedule.overshoot();
    if overshoot {
        for _ in 0..schedule.equilibration(switch) {
            chains.sweep(kernel, betas[switch], false);
        }
    }
    let mut run = if overshoot {
        let values = chains.lane(0);
        let start = plan
            .kernel
            .chain_at(values, stream(config.seed ^ HANDOFF_SALT, r));
        replica(plan, switch, Some(start), r)
    } else {
        Run {
            replica: r,
            up: vec![0.0; n],
            down: vec![0.0; n],
            flipped: 0,
            attempted: 0,
            ground: None,
        }
    };
    run.up[..switch].copy_from_slice(&up[..switch]);
    run.up[0] = plan.reference[0];
    run.down[0] = plan.reference[0];
    for i in (1..switch).rev() {
        run.down[i] = node(
            &mut chains,
            i,
            schedule.down_equilibration(i),
            split(plan.node_sweeps[i]).1,
        );
    }
    run
}

/// One replica: anneal from β = 0 up through the nodes, then back down, measuring ⟨E⟩ at
/// each node on both passes. Every sweep is followed by `attempts` loop moves when `loops`
/// applies. With `observe` (a weighted model), every measured sweep at β_max that leaves
/// no violated constraint is also a sample of the defect-free ensemble ([`ground`]).
/// Only the nodes from `first` on are run (the others are left at 0 for the caller), from
/// the chain `start` when given (else a random assignment on the replica's stream).
fn replica(plan: &Plan, first: usize, start: Option<moves::Chain>, r: usize) -> Run {
    let node_sweeps = &plan.node_sweeps[..];
    let kernel = &plan.kernel;
    let loops = plan.loops.as_ref();
    let observe = plan.observables.as_ref();
    let attempts = plan.attempts;
    let config = &plan.config;
    let betas = &plan.betas[..];
    let e_at_zero = plan.reference[0];
    let n = betas.len();
    let mut up = vec![0.0; n];
    let mut down = vec![0.0; n];
    // β = 0: every assignment equally likely, ⟨E⟩ = E_ref exactly.
    up[0] = e_at_zero;
    down[0] = e_at_zero;
    let mut chain = start.unwrap_or_else(|| kernel.chain(stream(config.seed, r)));
    let mut walk = loops.map(|l| l.walk());
    let mut flipped = 0u64;
    let mut attempted = 0u64;
    let focused_moves = if config.defect_moves {
        defect_moves_per_sweep(kernel.variables())
    } else {
        0
    };
    // The conditional estimate: gathered during the sweep at every β where that is cheap
    // (two-state variables without weights), else a pass after it below
    // CONDITIONAL_BELOW_BETA.
    let fused = config.conditional && kernel.conditional_is_fused();
    let mut step = |chain: &mut moves::Chain, beta: f64, focused: usize, measure: bool| -> f64 {
        // Where few variables touch a violation (large β on ice-rule models), the sweep
        // skips over the others: the same transition, other random numbers.
        let during = if chain.skipping_pays(kernel) {
            let e = chain.sweep_skipping(kernel, beta);
            (measure && fused).then_some(e)
        } else if measure && fused {
            Some(chain.sweep_conditional(kernel, beta))
        } else {
            chain.sweep(kernel, beta);
            None
        };
        // Below β = 1 single flips mix well and walks are long; loops only above.
        if let (Some(l), Some(w), true) = (loops, walk.as_mut(), beta >= LOOPS_FROM_BETA) {
            for _ in 0..attempts {
                flipped += l.attempt(kernel, chain, w) as u64;
            }
            attempted += attempts as u64;
        }
        if focused > 0 {
            chain.focused(kernel, beta, focused);
        }
        match during {
            Some(e) => e,
            None if measure && config.conditional && beta < CONDITIONAL_BELOW_BETA => {
                chain.conditional_energy(kernel, beta)
            }
            None => chain.energy() as f64,
        }
    };
    let mut ground = observe.map(|o| o.start());
    let mut node = |chain: &mut moves::Chain,
                    ground: &mut Option<ground::Ground>,
                    i: usize,
                    equilibrate: bool,
                    sweeps: usize| {
        let beta = betas[i];
        // A fixed number of focused moves per sweep at every node from
        // DEFECT_MOVES_FROM_BETA on: the kernel of a node does not depend on the state.
        let focused = if beta >= DEFECT_MOVES_FROM_BETA {
            focused_moves
        } else {
            0
        };
        if equilibrate {
            for _ in 0..config.equilibration {
                step(chain, beta, focused, false);
            }
        }
        let mut sum = 0.0;
        for _ in 0..sweeps {
            sum += step(chain, beta, focused, true);
            if let (Some(o), Some(g), true) = (observe, ground.as_mut(), i == n - 1)
                && chain.energy() == 0
            {
                o.add(kernel, chain, g);
            }
        }
        sum / sweeps as f64
    };
    for (i, u) in up.iter_mut().enumerate().skip(first) {
        *u = node(&mut chain, &mut ground, i, true, split(node_sweeps[i]).0);
    }
    // A weighted run samples the defect-free ensemble longer at the turn, on a copy of
    // the chain with a stream of its own: the chain that goes on down, and with it ⟨E⟩
    // and ln Z, is the same as without the copy.
    if let (Some(o), Some(g)) = (observe, ground.as_mut()) {
        let mut side = chain.clone();
        side.reseed(stream(config.seed ^ GROUND_SALT, r));
        let mut side_walk = loops.map(|l| l.walk());
        for _ in 0..ground_sweeps(config) {
            side.sweep(kernel, betas[n - 1]);
            if let (Some(l), Some(w)) = (loops, side_walk.as_mut()) {
                for _ in 0..attempts {
                    l.attempt(kernel, &mut side, w);
                }
            }
            if side.energy() == 0 {
                o.add(kernel, &side, g);
            }
        }
    }
    // The chain is in equilibrium at β_max already: no equilibration at the turn.
    for i in (first..n).rev() {
        down[i] = node(
            &mut chain,
            &mut ground,
            i,
            i != n - 1,
            split(node_sweeps[i]).1,
        );
    }
    Run {
        replica: r,
        up,
        down,
        flipped,
        attempted,
        ground,
    }
}

#[cfg(test)]
mod schedule_tests {
    use super::*;

    /// The three shapes of a schedule: one chain throughout (no lanes), lanes at every
    /// node, and lanes handing over to one chain (with the overshoot node).
    #[test]
    fn lane_schedule_shapes() {
        let betas = [0.0, 2.0, 4.0, 6.0, 7.0];
        let one_chain = LaneSchedule {
            switch: 0,
            betas: &betas,
            equilibration: 50,
        };
        // Without lanes there is nothing to overshoot (the updates count once added 64
        // chains' equilibration to every one-chain run).
        assert!(!one_chain.overshoot());
        let everywhere = LaneSchedule {
            switch: betas.len(),
            betas: &betas,
            equilibration: 50,
        };
        assert!(!everywhere.overshoot());
        assert_eq!(everywhere.equilibration(1), 50);
        assert_eq!(everywhere.equilibration(2), 50 * LANE_EQUILIBRATION_FACTOR);
        // At β_max the chains arrive in equilibrium: none there on the way down.
        assert_eq!(everywhere.down_equilibration(4), 0);
        assert_eq!(
            everywhere.down_equilibration(3),
            50 * LANE_EQUILIBRATION_FACTOR
        );
        let handover = LaneSchedule {
            switch: 3,
            betas: &betas,
            equilibration: 50,
        };
        assert!(handover.overshoot());
        // The lanes come back down to their last node from the overshoot: equilibrated.
        assert_eq!(
            handover.down_equilibration(2),
            50 * LANE_EQUILIBRATION_FACTOR
        );
        assert_eq!(handover.equilibration(3), 50 * LANE_EQUILIBRATION_FACTOR);
    }
}
