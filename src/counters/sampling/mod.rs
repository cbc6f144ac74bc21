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
//! ([`integrate`] says why not in t = e^{−β}); the node β = 0 needs no sampling, since there
//! ⟨E⟩ = E_ref exactly. Beyond β_max the reference part is analytic,
//! ∫_{β_max}^∞ e_ref dβ = ln(p + (1 − p) e^{−β_max}) − ln p, and ∫_{β_max}^∞ ⟨E⟩ dβ lies
//! between 0 and ⟨E⟩(β_max) when ⟨E⟩ ∝ e^{−kβ} with k ≥ 1 (every violation costs at least
//! 1): it is taken as ⟨E⟩(β_max)/2 with a uniform-interval uncertainty ⟨E⟩(β_max)/(2√3).
//! β_max grows with the cell (ln of the number of constraints, plus 3), so that only a
//! handful of violations remain there. The discretisation error is
//! Richardson's |S_n − S_(n+1)/2|/15 on the replica-mean integrand.
//!
//! Every replica starts from a uniformly random assignment (the exact β = 0 ensemble) and
//! is annealed through the nodes from β = 0 up to β_max, with `equilibration` heat-bath
//! sweeps and then `sweeps` measured sweeps at each node ([`moves`]); from β = 1 on, every
//! sweep is followed by loop moves that keep every constraint's count where the model
//! allows them ([`loops`]). Each replica gives its own estimate of ln Ω₀; the statistical
//! error is the standard error of their mean. The reported σ of ln W is the sum
//! statistical + quadrature + tail. With a `target_error`, batches of replicas are added
//! until that σ is reached.
//!
//! Thermodynamic integration for the residual entropy of ice: Kolafa 2014, J. Chem. Phys.
//! 140, 204507; Herrero & Ramírez 2014, J. Chem. Phys. 140, 234502.
//!
//! # Parallelism and reproducibility
//!
//! Replicas run in parallel with rayon, in whatever pool the caller installs. Replica r
//! draws from its own `Pcg64Mcg` stream seeded by SplitMix64 from seed ⊕ (r · 0xD1B5…),
//! and the replica results are combined in replica order, so the same seed gives bitwise
//! the same numbers on any number of threads.
//!
//! # Arguments and returns
//!
//! [`sample`] takes a model and a [`SampleConfig`] and returns [`Sampled`]: an
//! [`Estimate`] (method [`Method::MonteCarlo`], `sigma_ln_w` set) and the pieces of the
//! error, the integrand and diagnostics.
//! [`Plan`] is the same run taken apart (compile once, run any range of replica indices,
//! combine), which [`shard`] uses to split a run over machines; [`size`] extrapolates
//! several cells to the infinite crystal; [`wang_landau`] is the independent second method.
//!
//! # Complexity
//!
//! Time O(replicas · nodes · (sweeps + equilibration) · Σ_v q_v d_v) for variables with
//! q_v states in d_v constraints; memory O(threads · (variables + constraints)) plus the
//! shared tables.

pub mod integrate;
pub mod loops;
pub mod moves;
pub mod shard;
pub mod size;
pub mod wang_landau;

use std::time::Instant;

use rayon::prelude::*;

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
    /// Measured sweeps per quadrature node and replica.
    pub sweeps: usize,
    /// Sweeps before measuring at each node.
    pub equilibration: usize,
    /// Quadrature nodes on [0, β_max], of the form 4m + 1 (at least 5).
    pub nodes: usize,
    /// Largest β sampled; `None` chooses ln(constraints) + 3, clamped to [5, 14].
    pub beta_max: Option<f64>,
    /// Loop moves after every sweep, where the model allows them ([`loops`]).
    pub loops: bool,
    /// Keep adding batches of `replicas` replicas until the σ of ln W per formula unit
    /// (statistical + quadrature + tail) is at most this, or `max_replicas` is reached.
    pub target_error: Option<f64>,
    /// Most replicas a `target_error` run may use.
    pub max_replicas: usize,
    /// Start no further replica once raised.
    pub interrupt: crate::context::Interrupt,
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
            target_error: None,
            max_replicas: 1024,
            interrupt: Default::default(),
        }
    }
}

/// A Monte Carlo estimate with its error budget and diagnostics.
#[derive(Clone, Debug)]
pub struct Sampled {
    /// The estimate; `sigma_ln_w` = statistical + quadrature + tail.
    pub estimate: Estimate,
    /// Standard error of the replica mean of ln W per formula unit.
    pub sigma_statistical: f64,
    /// Quadrature error of ln W per formula unit (Richardson, Simpson n against (n+1)/2).
    pub sigma_quadrature: f64,
    /// Uncertainty of the tail beyond β_max, per formula unit.
    pub sigma_tail: f64,
    /// The seed used.
    pub seed: u64,
    /// Replicas run.
    pub replicas: usize,
    /// Measured sweeps in all (replicas × sampled nodes × sweeps).
    pub samples: u64,
    /// Single-variable updates in all, equilibration included.
    pub updates: u64,
    /// β of every node, from 0 to β_max.
    pub betas: Vec<f64>,
    /// Replica mean of ⟨E⟩ at every node.
    pub mean_energy: Vec<f64>,
    /// Pauling reference energy Σ_c e_ref,c at every node.
    pub reference_energy: Vec<f64>,
    /// ln W per formula unit from each replica.
    pub per_replica: Vec<f64>,
    /// Largest β sampled.
    pub beta_max: f64,
    /// Loop moves attempted per sweep from β = 1 on (0 when they do not apply or are
    /// switched off).
    pub loop_attempts_per_sweep: usize,
    /// Fraction of loop attempts that flipped a loop.
    pub loop_acceptance: f64,
    /// With a `target_error`: whether the σ reached it.
    pub target_reached: Option<bool>,
}

/// Replica results combined.
struct Combined {
    mean: f64,
    sigma_statistical: f64,
    sigma_quadrature: f64,
    sigma_tail: f64,
    per_replica: Vec<f64>,
    mean_energy: Vec<f64>,
}

impl Combined {
    fn total(&self) -> f64 {
        self.sigma_statistical + self.sigma_quadrature + self.sigma_tail
    }
}

/// Loop moves are attempted only from this β on.
const LOOPS_FROM_BETA: f64 = 1.0;

/// What one replica returns: all a merge needs from it.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Run {
    /// The replica index (it fixes the random stream).
    pub replica: usize,
    /// ⟨E⟩ at every node (the β = 0 node filled in exactly).
    pub energy: Vec<f64>,
    /// Loops flipped.
    pub flipped: u64,
    /// Loop moves attempted.
    pub attempted: u64,
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
pub fn sample(model: &Model, config: &SampleConfig) -> Result<Sampled> {
    sample_with(model, config, &|| {})
}

/// [`sample`], calling `on_replica` whenever a replica finishes (for progress reports).
pub fn sample_with(
    model: &Model,
    config: &SampleConfig,
    on_replica: &(dyn Fn() + Sync),
) -> Result<Sampled> {
    let start = Instant::now();
    let plan = Plan::new(model, config)?;
    let mut runs = plan.run(0..config.replicas, on_replica);
    if let Some(target) = config.target_error {
        while plan.combine(&runs).total() > target
            && runs.len() + config.replicas <= config.max_replicas
        {
            let from = runs.len();
            runs.extend(plan.run(from..from + config.replicas, on_replica));
        }
    }
    Ok(plan.finish(&runs, start.elapsed().as_secs_f64()))
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
        if config.sweeps == 0 {
            return Err(Error::Model("at least one sweep per node is needed".into()));
        }
        let kernel = Kernel::new(model)?;
        let loops = if config.loops {
            loops::Loops::new(model)
        } else {
            None
        };
        let attempts = loops
            .as_ref()
            .map_or(0, |_| (model.constraints.len() / 64).max(1));
        let fractions: Vec<f64> = model
            .constraints
            .iter()
            .map(|c| {
                let t = &model.tables[c.table];
                t.allowed as f64 / t.size as f64
            })
            .collect();
        let impossible = model.contradiction.is_some() || fractions.contains(&0.0);
        let beta_max = config
            .beta_max
            .unwrap_or_else(|| default_beta_max(model.constraints.len()));
        if !(beta_max > 0.0 && beta_max.is_finite()) {
            return Err(Error::Model(format!(
                "beta_max must be positive, not {beta_max}"
            )));
        }
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
        let ln_pauling: f64 =
            model.ln_unconstrained() + fractions.iter().map(|p| p.ln()).sum::<f64>();
        let ref_tail: f64 = fractions
            .iter()
            .map(|&p| (p + (1.0 - p) * (-beta_max).exp()).ln() - p.ln())
            .sum();
        Ok(Plan {
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
        })
    }

    /// The largest β sampled.
    pub fn beta_max(&self) -> f64 {
        self.beta_max
    }

    /// Run the replicas `replicas` in parallel (in the caller's rayon pool), in index order.
    pub fn run(
        &self,
        replicas: std::ops::Range<usize>,
        on_replica: &(dyn Fn() + Sync),
    ) -> Vec<Run> {
        replicas
            .into_par_iter()
            .with_max_len(1)
            .map(|r| {
                let run = replica(
                    &self.kernel,
                    self.loops.as_ref(),
                    self.attempts,
                    &self.config,
                    &self.betas,
                    self.reference[0],
                    r,
                );
                on_replica();
                run
            })
            .collect()
    }

    /// The integrand ⟨E⟩ − E_ref at every node.
    fn integrand(&self, energy: &[f64]) -> Vec<f64> {
        energy
            .iter()
            .zip(&self.reference)
            .map(|(e, r)| e - r)
            .collect()
    }

    /// Combine replicas (in the order given).
    fn combine(&self, runs: &[Run]) -> Combined {
        let units = self.model.formula_units;
        let width = self.beta_max;
        let last = self.config.nodes - 1;
        let per_replica: Vec<f64> = runs
            .iter()
            .map(|run| {
                let h = self.integrand(&run.energy);
                let tail = run.energy[last] / 2.0 - self.ref_tail;
                (self.ln_pauling - integrate::simpson(&h, width) - tail) / units
            })
            .collect();
        let r = per_replica.len() as f64;
        let mean = per_replica.iter().sum::<f64>() / r;
        let var = per_replica.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (r - 1.0);
        let mean_energy: Vec<f64> = (0..self.config.nodes)
            .map(|i| runs.iter().map(|run| run.energy[i]).sum::<f64>() / r)
            .collect();
        let h = self.integrand(&mean_energy);
        Combined {
            mean,
            sigma_statistical: (var / r).sqrt(),
            sigma_quadrature: (integrate::simpson(&h, width) - integrate::simpson_half(&h, width))
                .abs()
                / 15.0
                / units,
            sigma_tail: mean_energy[last] / (2.0 * 3f64.sqrt()) / units,
            per_replica,
            mean_energy,
        }
    }

    /// The estimate from the replicas run (at least 2, in replica order), which took
    /// `seconds` of wall time.
    pub fn finish(&self, runs: &[Run], seconds: f64) -> Sampled {
        let config = &self.config;
        let c = self.combine(runs);
        let target_reached = config.target_error.map(|t| c.total() <= t);
        let Combined {
            mean,
            sigma_statistical,
            sigma_quadrature,
            sigma_tail,
            per_replica,
            mean_energy,
        } = c;
        let (ln_w, sigma) = if self.impossible {
            (f64::NEG_INFINITY, 0.0)
        } else {
            (mean, sigma_statistical + sigma_quadrature + sigma_tail)
        };
        let units = self.model.formula_units;
        let replicas = runs.len();
        let sampled_nodes = (config.nodes - 1) as u64;
        let samples = replicas as u64 * sampled_nodes * config.sweeps as u64;
        let updates = replicas as u64
            * sampled_nodes
            * (config.sweeps + config.equilibration) as u64
            * self.kernel.variables() as u64;
        let attempted: u64 = runs.iter().map(|r| r.attempted).sum();
        Sampled {
            estimate: Estimate {
                method: Method::MonteCarlo,
                cells: Some(self.model.cells.clone()),
                count: None,
                ln_count: ln_w * units,
                formula_units: units,
                ln_w_per_unit: ln_w,
                sigma_ln_w: Some(sigma),
                seconds,
                peak_states: None,
            },
            sigma_statistical,
            sigma_quadrature,
            sigma_tail,
            seed: config.seed,
            replicas,
            samples,
            updates,
            betas: self.betas.clone(),
            mean_energy,
            reference_energy: self.reference.clone(),
            per_replica,
            beta_max: self.beta_max,
            target_reached,
            loop_attempts_per_sweep: self.attempts,
            loop_acceptance: if self.attempts == 0 {
                0.0
            } else {
                runs.iter().map(|r| r.flipped).sum::<u64>() as f64 / attempted.max(1) as f64
            },
        }
    }
}

/// The default largest β for a model with `constraints` constraints: ln(constraints) + 3,
/// clamped to [5, 14], so that a handful of violations remain there.
pub fn default_beta_max(constraints: usize) -> f64 {
    ((constraints.max(1) as f64).ln() + 3.0).clamp(5.0, 14.0)
}

/// One replica: anneal from β = 0 up through the nodes, measuring ⟨E⟩ at each. Every
/// sweep is followed by `attempts` loop moves when `loops` applies.
fn replica(
    kernel: &Kernel,
    loops: Option<&loops::Loops>,
    attempts: usize,
    config: &SampleConfig,
    betas: &[f64],
    e_at_zero: f64,
    r: usize,
) -> Run {
    let n = betas.len();
    let mut energy = vec![0.0; n];
    energy[0] = e_at_zero; // β = 0: every assignment equally likely, ⟨E⟩ = E_ref exactly
    let mut chain = kernel.chain(stream(config.seed, r));
    let mut walk = loops.map(|l| l.walk());
    let mut flipped = 0u64;
    let mut attempted = 0u64;
    let mut step = |chain: &mut moves::Chain, beta: f64| {
        chain.sweep(kernel, beta);
        // Below β = 1 single flips mix well and walks are long; loops only above.
        if let (Some(l), Some(w), true) = (loops, walk.as_mut(), beta >= LOOPS_FROM_BETA) {
            for _ in 0..attempts {
                flipped += l.attempt(kernel, chain, w) as u64;
            }
            attempted += attempts as u64;
        }
    };
    for i in 1..n {
        let beta = betas[i];
        for _ in 0..config.equilibration {
            step(&mut chain, beta);
        }
        let mut sum = 0u64;
        for _ in 0..config.sweeps {
            step(&mut chain, beta);
            sum += chain.energy();
        }
        energy[i] = sum as f64 / config.sweeps as f64;
    }
    Run {
        replica: r,
        energy,
        flipped,
        attempted,
    }
}
