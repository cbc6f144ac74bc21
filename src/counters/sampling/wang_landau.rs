//! A second, independent Monte Carlo count: Wang–Landau sampling of the density of states
//! of the violation count, with the 1/t schedule.
//!
//! # What it computes
//!
//! ln Ω₀, the number of assignments that violate no constraint, as a cross-check of the
//! thermodynamic integration ([`super::sample`]) that shares none of its quadrature,
//! reference or tail: only the model and the energy (violated constraints) are common.
//!
//! # Method
//!
//! A random walk over assignments, restricted to the energy window 0 ≤ E ≤ E_w, accepts a
//! change of one variable to another of its values with probability
//! min(1, g̃(E)/g̃(E′)), and after every move adds ln f to ln g̃ of the current energy
//! (Wang & Landau 2001, Phys. Rev. Lett. 86, 2050). The modification factor follows the
//! 1/t schedule of Belardinelli & Pereyra 2007 (Phys. Rev. E 75, 046701): ln f starts at
//! 1 and, once the walk has reached E = 0, is halved whenever the histogram of the energies
//! seen since the last halving is flat (every level at least 80 % of the mean, common
//! practice); once ln f ≤ 1/t (t = moves per energy level) it is set to 1/t for the rest
//! of the run. After `sweeps` moves per variable the weights are frozen at 1/g̃ and as many
//! moves again sample the histogram H(E) of this multicanonical ensemble (Berg & Neuhaus
//! 1992, Phys. Rev. Lett. 68, 9; used for ice by Berg, Muguruma & Okamoto 2007, Phys. Rev.
//! B 75, 092202): g ∝ g̃·H is then free of the modification factor's bias, and its error
//! falls as 1/√(production length).
//!
//! g̃ is known up to a constant. The window's normalisation comes from the exact β = 0
//! ensemble: a fraction F of the uniformly random assignments has E ≤ E_w, so
//! Σ_{E ≤ E_w} g(E) = F ∏_v q_v and
//!
//! ln Ω₀ = ln ∏ q_v + ln F + ln g̃(0) − ln Σ_{E ≤ E_w} g̃(E).
//!
//! E_w is the largest integer not above the mean energy of the β = 0 ensemble (which is
//! known exactly: Σ_c (1 − p_c)), so F is of order 1/2 and is estimated from independent
//! uniform assignments with a binomial error. Energies never visited (some are impossible,
//! e.g. a single violated vertex in an ice-rule model) count as g = 0.
//!
//! Every replica runs its own walk and its own estimate of F, from its own random stream
//! (seeded from the seed, a salt and the replica index), so that the replicas are
//! independent and the error bar is the standard error of their mean; the same seed gives
//! the same numbers on any number of threads.
//!
//! # Arguments and returns
//!
//! [`wang_landau`] takes a model and a [`WangLandauConfig`]; it returns [`WangLandau`]:
//! an [`Estimate`] (method [`Method::MonteCarlo`]) with σ, and the diagnostics.
//!
//! # Complexity
//!
//! Time O(replicas · (sweeps · n · q·d + uniform · n)) for n variables. Before ln f is
//! first halved the walk must descend the whole window to E = 0 at ln f = 1, which takes
//! of order E_w² visits per level; measured here, ice Ic 2×2×2 (128 variables) needs a few
//! thousand sweeps and 3×3×3 (432 variables) more than 20 000. This method is a cross-check
//! for cells of up to a few hundred variables, not the production counter. Memory
//! O(n + E_w).

use std::time::Instant;

use rayon::prelude::*;

use super::moves::{Chain, Kernel};
use super::stream;
use crate::context::Progress;
use crate::counters::{Context, Counted};
use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method};
use crate::model::Model;

/// Settings of a Wang–Landau run.
#[derive(Clone, Debug)]
pub struct WangLandauConfig {
    /// Seed of every random stream.
    pub seed: u64,
    /// Independent walks (at least 2 for an error bar).
    pub replicas: usize,
    /// Moves per variable of each walk's Wang–Landau stage, and again of its multicanonical
    /// production.
    pub sweeps: u64,
    /// Uniform random assignments per replica that estimate the window fraction F.
    pub uniform: usize,
}

impl Default for WangLandauConfig {
    fn default() -> Self {
        WangLandauConfig {
            seed: 1,
            replicas: 8,
            sweeps: 100_000,
            uniform: 20_000,
        }
    }
}

/// What a Wang–Landau estimate has beside it: its diagnostics. The estimate's `sigma_ln_w`
/// is the standard error of the replica mean, widened for the number of walks
/// ([`super::student_factor`]).
#[derive(Clone, Debug)]
pub struct WangLandau {
    /// The seed used.
    pub seed: u64,
    /// Replicas run.
    pub replicas: usize,
    /// Moves per variable and replica in each of the two stages.
    pub sweeps: u64,
    /// The upper end E_w of the energy window.
    pub window: u64,
    /// Replica mean of the window fraction F.
    pub fraction: f64,
    /// ln W per formula unit from each replica.
    pub per_replica: Vec<f64>,
    /// Energies visited (by every replica), out of E_w + 1.
    pub levels: usize,
    /// Whether an interrupt stopped the run before every walk was started: the estimate
    /// then rests on the walks that finished.
    pub interrupted: bool,
}

/// Salt that separates these streams from the thermodynamic integration's.
const SALT: u64 = 0x57A9_6C3B_1D4E_8F01;

/// Count a model by Wang–Landau sampling. Once the context's interrupt is raised no walk
/// starts, and the finished ones make the estimate ([`WangLandau::interrupted`]), or
/// [`Error::Interrupted`] when fewer than two finished; the observer is told every
/// finished walk ([`Progress::Replica`]).
pub fn count(
    model: &Model,
    config: &WangLandauConfig,
    context: &Context,
) -> Result<Counted<WangLandau>> {
    crate::counters::refuse_weighted(model.is_weighted(), "Wang–Landau sampling")?;
    let start = Instant::now();
    if config.replicas < 2 {
        return Err(Error::Model(
            "Wang–Landau needs at least 2 replicas for an error bar".into(),
        ));
    }
    if config.sweeps < 100 || config.uniform < 100 {
        return Err(Error::Model(
            "Wang–Landau needs at least 100 sweeps and 100 uniform samples".into(),
        ));
    }
    let kernel = Kernel::new(model)?;
    if model.contradiction.is_some() {
        return Err(Error::Model(
            "the rules contradict each other on this cell: no arrangement exists".into(),
        ));
    }
    let mean_e: f64 = model
        .constraints
        .iter()
        .map(|c| {
            let t = &model.tables[c.table];
            1.0 - t.allowed as f64 / t.size as f64
        })
        .sum();
    let window = mean_e.floor().max(0.0) as u64;
    let bytes = (config.replicas as u64)
        .saturating_mul(std::mem::size_of::<Option<Result<Walk>>>() as u64 + 8)
        .saturating_add(
            (rayon::current_num_threads() as u64)
                .saturating_mul(25 * (window + 1) + 5 * model.variables.len() as u64),
        );
    if bytes > super::MAX_MEMORY {
        return Err(Error::Setting(format!(
            "{} Wang–Landau walks on {} would hold about {} in memory, more than the {} the sampler allows itself; use fewer replicas",
            config.replicas,
            model.cells,
            super::bytes_in_words(bytes),
            super::bytes_in_words(super::MAX_MEMORY)
        )));
    }
    let ln_q = model.ln_unconstrained();
    let runs: Vec<Option<Result<Walk>>> = (0..config.replicas)
        .into_par_iter()
        .with_max_len(1)
        .map(|r| {
            if context.interrupt.raised() {
                return None;
            }
            let w = walk(&kernel, config, window, r, &model.cells);
            context.tell(Progress::Replica);
            Some(w)
        })
        .collect();
    let runs: Vec<Walk> = runs.into_iter().flatten().collect::<Result<Vec<_>>>()?;
    let interrupted = runs.len() < config.replicas;
    if runs.len() < 2 {
        return Err(Error::Interrupted {
            what: format!(
                "running Wang–Landau walks on {} ({} finished; an error bar needs 2)",
                model.cells,
                runs.len()
            ),
        });
    }
    let units = model.formula_units;
    let per_replica: Vec<f64> = runs
        .iter()
        .map(|w| (ln_q + w.ln_fraction + w.ln_ratio) / units)
        .collect();
    let r = per_replica.len() as f64;
    let mean = per_replica.iter().sum::<f64>() / r;
    let var = per_replica.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (r - 1.0);
    let levels = runs.iter().map(|w| w.levels).min().unwrap_or(0);
    let estimate = Estimate::finite(
        Method::MonteCarlo,
        model.cells.clone(),
        units,
        mean,
        Some((var / r).sqrt() * super::student_factor(runs.len())),
        start.elapsed().as_secs_f64(),
    );
    let details = WangLandau {
        seed: config.seed,
        replicas: runs.len(),
        sweeps: config.sweeps,
        window,
        fraction: runs.iter().map(|w| w.ln_fraction.exp()).sum::<f64>() / r,
        per_replica,
        levels,
        interrupted,
    };
    Ok(Counted::new(estimate, details))
}

/// What one walk gives.
struct Walk {
    /// ln F.
    ln_fraction: f64,
    /// ln g̃(0) − ln Σ g̃.
    ln_ratio: f64,
    /// Energies visited.
    levels: usize,
}

/// One replica: estimate F, then walk.
fn walk(
    kernel: &Kernel,
    config: &WangLandauConfig,
    window: u64,
    r: usize,
    kernel_cells: &str,
) -> Result<Walk> {
    let mut chain = kernel.chain(stream(config.seed ^ SALT, r));
    let n = kernel.variables();
    // The window fraction F from independent uniform assignments.
    let mut inside = 0usize;
    for _ in 0..config.uniform {
        chain.randomise(kernel);
        inside += (chain.energy() <= window) as usize;
    }
    if inside == 0 {
        return Err(Error::NotConverged {
            what: format!("the Wang–Landau normalisation on {}", kernel_cells),
            iterations: config.uniform,
            detail: format!(
                "no uniform random assignment had at most {window} violated constraints; more uniform samples are needed"
            ),
        });
    }
    let ln_fraction = (inside as f64 / config.uniform as f64).ln();
    // Descend into the window.
    let mut guard = 0;
    while chain.energy() > window {
        chain.sweep(kernel, 4.0);
        guard += 1;
        if guard > 10_000 {
            return Err(Error::NotConverged {
                what: format!("the Wang–Landau walk on {kernel_cells}"),
                iterations: guard,
                detail: format!(
                    "{guard} sweeps at β = 4 did not bring it down to {window} violated constraints"
                ),
            });
        }
    }
    let bins = window as usize + 1;
    let mut ln_g = vec![0.0f64; bins];
    let mut seen = vec![false; bins];
    let mut histogram = vec![0u64; bins];
    let mut levels = 0usize;
    let mut ln_f = 1.0f64;
    let mut one_over_t = false;
    let total = config.sweeps.saturating_mul(n as u64);
    let mut e = chain.energy() as usize;
    for m in 1..=total {
        e = step(kernel, &mut chain, e, &ln_g, window);
        ln_g[e] += ln_f;
        histogram[e] += 1;
        if !seen[e] {
            seen[e] = true;
            levels += 1;
        }
        if m % n as u64 == 0 {
            // Monte Carlo time in moves per energy level (Belardinelli & Pereyra's t).
            let t = m as f64 / levels as f64;
            if one_over_t {
                ln_f = 1.0 / t;
            } else {
                // Halve ln f when the histogram of the levels seen is flat (each at least
                // 80 % of the mean; common practice), and only once the ground level E = 0
                // has been found.
                if seen[0] {
                    let (mut low, mut sum) = (u64::MAX, 0u64);
                    for (h, _) in histogram.iter().zip(&seen).filter(|(_, s)| **s) {
                        low = low.min(*h);
                        sum += h;
                    }
                    if low as f64 >= 0.8 * sum as f64 / levels as f64 {
                        ln_f /= 2.0;
                        histogram.iter_mut().for_each(|h| *h = 0);
                    }
                }
                if ln_f <= 1.0 / t {
                    one_over_t = true;
                    ln_f = 1.0 / t;
                }
            }
        }
    }
    if !seen[0] {
        return Err(Error::NotConverged {
            what: format!("the Wang–Landau walk on {kernel_cells}"),
            iterations: config.sweeps as usize,
            detail: format!(
                "in {} sweeps it never reached an arrangement without violations: none may exist, or the walk is too short for this cell; give it more sweeps, or use thermodynamic integration, which suits large cells",
                config.sweeps
            ),
        });
    }
    // Multicanonical production with the weights fixed at 1/g̃: the histogram H then
    // corrects g̃ without bias, g ∝ g̃·H.
    let mut production = vec![0u64; bins];
    for _ in 0..total {
        e = step(kernel, &mut chain, e, &ln_g, window);
        production[e] += 1;
    }
    if production[0] == 0 {
        return Err(Error::NotConverged {
            what: format!("the Wang–Landau walk on {kernel_cells}"),
            iterations: config.sweeps as usize,
            detail: format!(
                "its multicanonical production of {} sweeps never visited an arrangement without violations; give it more sweeps",
                config.sweeps
            ),
        });
    }
    let corrected: Vec<f64> = ln_g
        .iter()
        .zip(&production)
        .filter(|(_, h)| **h > 0)
        .map(|(g, h)| g + (*h as f64).ln())
        .collect();
    let top = corrected.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let sum: f64 = corrected.iter().map(|g| (g - top).exp()).sum();
    Ok(Walk {
        ln_fraction,
        ln_ratio: ln_g[0] + (production[0] as f64).ln() - (top + sum.ln()),
        levels,
    })
}

/// One move of the walk at energy `e` with weights 1/g̃: a random variable to a random
/// other value, accepted with min(1, g̃(E)/g̃(E′)) inside the window. Returns the new energy.
#[inline]
fn step(kernel: &Kernel, chain: &mut Chain, e: usize, ln_g: &[f64], window: u64) -> usize {
    let n = kernel.variables();
    let v = ((chain.next_u64() as u128 * n as u128) >> 64) as usize;
    let q = kernel.states(v);
    if q < 2 {
        return e;
    }
    let now = chain.values[v];
    let mut x = ((chain.next_u64() as u128 * (q - 1) as u128) >> 64) as u8;
    if x >= now {
        x += 1;
    }
    let de = chain.delta(kernel, v, x);
    let e2 = e as i64 + de as i64;
    if e2 < 0 || e2 as u64 > window {
        return e;
    }
    let e2 = e2 as usize;
    let accept = ln_g[e] - ln_g[e2];
    if accept >= 0.0 || {
        let u = (chain.next_u64() >> 11) as f64 * (1.0 / 9007199254740992.0);
        u < accept.exp()
    } {
        chain.assign(kernel, v, x, de);
        e2
    } else {
        e
    }
}
