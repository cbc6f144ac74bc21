//! Diluted crystals: exact counts averaged over random realisations of the vacancies, and
//! the generalized Pauling estimate.
//!
//! # What it computes
//!
//! A diluted crystal (`vacancies:` in the lattice file) has quenched disorder: every listed
//! site is empty with probability x, independently. A *realisation* is one choice of the
//! vacant sites of a finite cell; the count of one realisation, Ω_r, is the number of
//! assignments of the variables that remain under the rules for the members that remain
//! ([`crate::model::Model::with_vacancies`]). [`count`] draws R realisations, counts each
//! exactly ([`super::exact::count`]) and returns the mean of
//!
//! ln W_r = ln Ω_r / (formula units present in realisation r),
//!
//! with the spread between realisations (their standard deviation) and the standard error
//! of the mean (spread/√R). Formula units are counted *as present*: with `per: sites` a
//! vacant site is no formula unit, so for diluted spin ice the value is per mole of
//! magnetic ions actually there — the normalisation of Ke et al. 2007 (Phys. Rev. Lett. 99,
//! 137203), whose entropy tends to R ln 2 per magnetic ion at high dilution (isolated free
//! moments). The mean per formula unit of the undiluted cell is given beside it.
//!
//! [`generalized_pauling_ln_w`] is Pauling's independent-constraint product averaged over
//! the vacancies (Ke et al. 2007): per unit cell,
//!
//! ln W = Σ_sites (1 − x_s) ln q_s + Σ_instances Σ_S P(S) ln f(S),
//!
//! over the patterns S of vacant members of every rule instance, P(S) their probability and
//! f(S) the fraction of the assignments of the remaining members that the rule allows, per
//! formula unit present on average. For spin ice, f = 6/16, 6/8, 2/4, 1, 1 for 4 … 0
//! remaining members.
//!
//! # Realisations
//!
//! Realisation r draws its vacancies from its own `Pcg64Mcg` stream, derived from
//! (seed, r) ([`vacancies`]), so that realisation r is the same on any thread count, in any
//! order and in any shard. Realisations are counted one after another (each count is
//! parallel inside); once the context's interrupt is raised no realisation starts and the
//! finished ones make the result ([`Realisations::interrupted`]), or
//! [`Error::Interrupted`] when fewer than two finished.
//!
//! # Complexity
//!
//! R exact counts; each as [`super::exact::count`] on a model with fewer free variables
//! than the undiluted cell's (vacancies only shrink the frontier). Memory: one count at a
//! time.

use std::time::Instant;

use num_bigint::BigUint;
use rand::Rng;
use serde::Serialize;

use super::exact::{self, ExactConfig};
use super::{Context, Counted};
use crate::cluster::Cluster;
use crate::context::Progress;
use crate::crystal::{Crystal, Entity, Target, UnitBasis};
use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method};
use crate::model::Model;

/// Realisations counted when none is asked for: enough for a spread and a standard error
/// of a few per cent of it (common practice).
pub const DEFAULT_REALISATIONS: usize = 16;

/// Most realisations one run may ask for.
pub const MAX_REALISATIONS: usize = 1_000_000;

/// Mixed into the seed so that realisation r and Monte Carlo replica r of the same seed
/// draw from different streams.
const REALISATION_SALT: u64 = 0x7A3C_95E1_D4B2_F068;

/// Settings of a realisation average.
#[derive(Clone, Debug)]
pub struct DilutionConfig {
    /// Realisations to count (at least 2, for a spread).
    pub realisations: usize,
    /// Seed of the realisations' streams.
    pub seed: u64,
    /// The exact counter's settings for every realisation.
    pub exact: ExactConfig,
}

impl Default for DilutionConfig {
    fn default() -> Self {
        DilutionConfig {
            realisations: DEFAULT_REALISATIONS,
            seed: 1,
            exact: ExactConfig::default(),
        }
    }
}

/// One counted realisation.
#[derive(Clone, Debug, Serialize)]
pub struct Realisation {
    /// Its index r (its stream derives from (seed, r)).
    pub index: usize,
    /// Vacant sites in the cell.
    pub vacant: usize,
    /// Formula units present (vacant sites are none, with `per: sites`).
    pub formula_units: f64,
    /// The exact number of arrangements Ω_r, as decimal digits.
    #[serde(serialize_with = "decimal")]
    pub count: BigUint,
    /// ln Ω_r.
    pub ln_count: f64,
    /// ln Ω_r per formula unit present.
    pub ln_w_per_unit: f64,
}

fn decimal<S: serde::Serializer>(n: &BigUint, s: S) -> std::result::Result<S::Ok, S::Error> {
    s.serialize_str(&n.to_string())
}

/// The realisations of a diluted cell and their average.
#[derive(Clone, Debug, Serialize)]
pub struct Realisations {
    /// Every finished realisation, by index.
    pub realisations: Vec<Realisation>,
    /// Realisations asked for.
    pub requested: usize,
    /// The seed.
    pub seed: u64,
    /// Mean over realisations of ln W per formula unit present.
    pub mean: f64,
    /// Standard deviation of ln W per formula unit present between realisations.
    pub spread: f64,
    /// Standard error of the mean: spread/√(realisations).
    pub standard_error: f64,
    /// Mean over realisations of ln Ω per formula unit of the undiluted cell.
    pub mean_per_undiluted_unit: f64,
    /// Formula units of the undiluted cell.
    pub undiluted_formula_units: f64,
    /// Whether an interrupt stopped the run before every realisation was counted.
    pub interrupted: bool,
}

/// The vacant sites of realisation `r` of a cluster: `vacant[i]` for the cluster's site i.
/// Each site whose crystal site may be vacant with fraction x > 0 draws one uniform number
/// u in [0, 1) (53 bits) from the realisation's stream, in the cluster's site order, and is
/// vacant when u < x.
pub fn vacancies(cluster: &Cluster, seed: u64, r: usize) -> Vec<bool> {
    let mut rng = super::sampling::stream(seed ^ REALISATION_SALT, r);
    cluster
        .sites
        .iter()
        .map(|s| {
            let x = cluster.crystal.vacancy_fraction(s.site);
            x > 0.0 && ((rng.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)) < x
        })
        .collect()
}

/// Formula units present in a realisation: with `per: sites`, the sites that count and
/// are not vacant; otherwise those of the whole cell.
pub fn formula_units_present(cluster: &Cluster, vacant: &[bool]) -> f64 {
    let c = cluster.crystal;
    match &c.formula_unit.basis {
        UnitBasis::Sites(species) => cluster
            .sites
            .iter()
            .zip(vacant)
            .filter(|(s, v)| {
                !**v && species
                    .as_ref()
                    .is_none_or(|sp| c.sites[s.site].matches(sp))
            })
            .count() as f64,
        _ => cluster.formula_units(),
    }
}

/// Count `config.realisations` realisations of a diluted cluster exactly and average
/// ln W per formula unit present; see the module documentation.
///
/// Errors: fewer than 2 or more than [`MAX_REALISATIONS`] realisations
/// ([`Error::Setting`]); a count over the state budget or past the deadline, as
/// [`super::exact::count`]; [`Error::Interrupted`] when fewer than two realisations
/// finished before the interrupt. The observer is told every finished realisation
/// ([`Progress::Realisation`]) and every step of the count under way.
///
/// ```
/// use groundcount::{Lattice, cluster::{Cells, Cluster}, counters::{dilution, Context}};
/// let path = concat!(env!("CARGO_MANIFEST_DIR"), "/lattices/diluted-spin-ice.yaml");
/// let lattice = Lattice::from_file(path.as_ref()).unwrap();
/// let cluster = Cluster::new(&lattice.crystal, Cells::periodic(&[1, 1, 1]).unwrap()).unwrap();
/// let config = dilution::DilutionConfig { realisations: 4, ..Default::default() };
/// let r = dilution::count(&cluster, &config, &Context::new()).unwrap();
/// assert_eq!(r.realisations.len(), 4);
/// assert!(r.standard_error <= r.spread);
/// ```
pub fn count(
    cluster: &Cluster,
    config: &DilutionConfig,
    context: &Context,
) -> Result<Counted<Realisations>> {
    if !(2..=MAX_REALISATIONS).contains(&config.realisations) {
        return Err(Error::Setting(format!(
            "the number of realisations must be from 2 (for a spread) to {MAX_REALISATIONS}, \
             found {}",
            config.realisations
        )));
    }
    let start = Instant::now();
    let mut done = Vec::with_capacity(config.realisations);
    let mut interrupted = false;
    for r in 0..config.realisations {
        if context.interrupt.raised() {
            interrupted = true;
            break;
        }
        let vacant = vacancies(cluster, config.seed, r);
        let model = Model::with_vacancies(cluster, &vacant)?;
        let counted = match exact::count(&model, &config.exact, context) {
            Ok(c) => c.estimate,
            Err(Error::Interrupted { .. }) => {
                interrupted = true;
                break;
            }
            Err(e) => return Err(e),
        };
        let units = formula_units_present(cluster, &vacant);
        let count = counted.count.unwrap_or_default();
        done.push(Realisation {
            index: r,
            vacant: vacant.iter().filter(|v| **v).count(),
            formula_units: units,
            ln_count: counted.ln_count,
            ln_w_per_unit: if units > 0.0 {
                counted.ln_count / units
            } else {
                0.0
            },
            count,
        });
        context.tell(Progress::Realisation {
            done: done.len(),
            all: config.realisations,
        });
    }
    if done.len() < 2 {
        return Err(Error::Interrupted {
            what: format!(
                "counting realisations of the vacancies of {} ({} of {} finished; at least 2 \
                 are needed for a spread)",
                cluster.cells,
                done.len(),
                config.realisations
            ),
        });
    }
    let n = done.len() as f64;
    let mean = done.iter().map(|r| r.ln_w_per_unit).sum::<f64>() / n;
    let variance = done
        .iter()
        .map(|r| (r.ln_w_per_unit - mean).powi(2))
        .sum::<f64>()
        / (n - 1.0);
    let spread = variance.sqrt();
    let standard_error = spread / n.sqrt();
    let undiluted = cluster.formula_units();
    let mean_per_undiluted_unit = done.iter().map(|r| r.ln_count).sum::<f64>() / n / undiluted;
    let units = done.iter().map(|r| r.formula_units).sum::<f64>() / n;
    let estimate = Estimate::finite(
        Method::Exact,
        cluster.cells.to_string(),
        units,
        mean,
        Some(standard_error),
        start.elapsed().as_secs_f64(),
    );
    Ok(Counted::new(
        estimate,
        Realisations {
            realisations: done,
            requested: config.realisations,
            seed: config.seed,
            mean,
            spread,
            standard_error,
            mean_per_undiluted_unit,
            undiluted_formula_units: undiluted,
            interrupted,
        },
    ))
}

/// The generalized Pauling estimate of a diluted crystal (Ke et al. 2007, Phys. Rev. Lett.
/// 99, 137203): ln W per formula unit present, from the unit cell alone; see the module
/// documentation. With every fraction 0 it is Pauling's estimate. Minus infinity when some
/// pattern of vacancies that can occur leaves an instance no allowed assignment.
pub fn generalized_pauling_ln_w(crystal: &Crystal) -> f64 {
    let held = |target: Target, index: usize| {
        crystal
            .pinned
            .iter()
            .find(|p| p.target == target && p.index == index)
            .map(|p| p.state)
    };
    let mut ln = 0.0;
    if let Some(kind) = crystal.site_variables {
        let q = (kind.states() as f64).ln();
        for (i, _) in crystal.sites.iter().enumerate() {
            if held(Target::Sites, i).is_none() {
                ln += (1.0 - crystal.vacancy_fraction(i)) * q;
            }
        }
    }
    if let Some(kind) = crystal.bond_variables {
        let q = (kind.states() as f64).ln();
        for (i, _) in crystal.bonds.iter().enumerate() {
            if held(Target::Bonds, i).is_none() {
                ln += q;
            }
        }
    }
    for rule in &crystal.rules {
        let kind = match rule.target {
            Target::Sites => crystal.site_variables,
            Target::Bonds => crystal.bond_variables,
        };
        let q = kind.map_or(1, |k| k.states());
        for inst in &rule.instances {
            // Distinct entities of the instance, each with its occurrences.
            let mut entities: Vec<Entity> = Vec::new();
            let place: Vec<usize> = inst
                .slots
                .iter()
                .map(|s| match entities.iter().position(|e| *e == s.entity) {
                    Some(p) => p,
                    None => {
                        entities.push(s.entity);
                        entities.len() - 1
                    }
                })
                .collect();
            let inward: Vec<u32> = inst.slots.iter().map(|s| s.inward_state).collect();
            let fixed: Vec<Option<u32>> = entities
                .iter()
                .map(|e| match *e {
                    Entity::Site { site, .. } => held(Target::Sites, site),
                    Entity::Bond { bond, .. } => held(Target::Bonds, bond),
                })
                .collect();
            let fraction: Vec<f64> = entities
                .iter()
                .map(|e| match (*e, rule.target) {
                    (Entity::Site { site, .. }, Target::Sites) => crystal.vacancy_fraction(site),
                    _ => 0.0,
                })
                .collect();
            let may: Vec<usize> = (0..entities.len())
                .filter(|&e| fraction[e] > 0.0)
                .collect();
            for pattern in 0u64..(1u64 << may.len()) {
                let mut vacant = vec![false; entities.len()];
                let mut p = 1.0;
                for (b, &e) in may.iter().enumerate() {
                    if pattern >> b & 1 == 1 {
                        vacant[e] = true;
                        p *= fraction[e];
                    } else {
                        p *= 1.0 - fraction[e];
                    }
                }
                if p == 0.0 {
                    continue;
                }
                let free: Vec<usize> = (0..entities.len())
                    .filter(|&e| !vacant[e] && fixed[e].is_none())
                    .collect();
                let total = (q as u64).pow(free.len() as u32);
                let occ_vacant: Vec<bool> = place.iter().map(|&e| vacant[e]).collect();
                let mut values = vec![0u32; entities.len()];
                let mut allowed = 0u64;
                for index in 0..total {
                    let mut rest = index;
                    for &e in &free {
                        values[e] = (rest % q as u64) as u32;
                        rest /= q as u64;
                    }
                    for (e, f) in fixed.iter().enumerate() {
                        if let Some(h) = f {
                            values[e] = *h;
                        }
                    }
                    let occ: Vec<u32> = place.iter().map(|&e| values[e]).collect();
                    if rule
                        .allows_with_vacancies(&occ_vacant, &inward, &occ)
                        .unwrap_or(false)
                    {
                        allowed += 1;
                    }
                }
                ln += p * (allowed as f64 / total as f64).ln();
            }
        }
    }
    let units: f64 = match &crystal.formula_unit.basis {
        UnitBasis::Sites(species) => crystal
            .sites
            .iter()
            .enumerate()
            .filter(|(_, s)| species.as_ref().is_none_or(|sp| s.matches(sp)))
            .map(|(i, _)| 1.0 - crystal.vacancy_fraction(i))
            .sum(),
        _ => crystal.formula_unit.per_cell(crystal),
    };
    let per_unit = ln / units;
    if per_unit.abs() < 1e-12 { 0.0 } else { per_unit }
}
