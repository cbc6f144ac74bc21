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

/// Mixed into the seed for the Monte Carlo seed of each realisation.
const MONTE_CARLO_SALT: u64 = 0x2F81_6C4D_A957_0B3E;

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
    /// The exact number of arrangements Ω_r, as decimal digits (`None` for a Monte Carlo
    /// estimate).
    #[serde(serialize_with = "decimal")]
    pub count: Option<BigUint>,
    /// ln Ω_r.
    pub ln_count: f64,
    /// ln Ω_r per formula unit present.
    pub ln_w_per_unit: f64,
    /// The Monte Carlo's 1σ of `ln_w_per_unit` (`None` for an exact count).
    pub sigma_ln_w: Option<f64>,
    /// Whether the Monte Carlo's equilibration check passed (`None` for an exact count;
    /// when it failed, its allowance is in `sigma_ln_w`).
    pub equilibrated: Option<bool>,
}

fn decimal<S: serde::Serializer>(
    n: &Option<BigUint>,
    s: S,
) -> std::result::Result<S::Ok, S::Error> {
    match n {
        Some(n) => s.serialize_str(&n.to_string()),
        None => s.serialize_none(),
    }
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
    over_realisations(
        cluster,
        config.realisations,
        config.seed,
        context,
        |_, model| match exact::count(model, &config.exact, context) {
            Ok(c) => Ok(Some((c.estimate, None))),
            Err(Error::Interrupted { .. }) => Ok(None),
            Err(e) => Err(e),
        },
    )
}

/// Run `one` on the model of each of `realisations` realisations of `cluster` in turn
/// (realisation r has the vacancies [`vacancies`] draws from (`seed`, r)), and summarise ln
/// W per formula unit present over those that finished. `one` returns the realisation's
/// estimate and, for a sampled one, whether it equilibrated; `None` when it was interrupted,
/// which ends the loop.
fn over_realisations(
    cluster: &Cluster,
    realisations: usize,
    seed: u64,
    context: &Context,
    mut one: impl FnMut(usize, &Model) -> Result<Option<(Estimate, Option<bool>)>>,
) -> Result<Counted<Realisations>> {
    if !(2..=MAX_REALISATIONS).contains(&realisations) {
        return Err(Error::Setting(format!(
            "the number of realisations must be from 2 (for a spread) to {MAX_REALISATIONS}, \
             found {realisations}"
        )));
    }
    let start = Instant::now();
    let mut done = Vec::with_capacity(realisations);
    let mut interrupted = false;
    for r in 0..realisations {
        if context.interrupt.raised() {
            interrupted = true;
            break;
        }
        let vacant = vacancies(cluster, seed, r);
        let model = Model::with_vacancies(cluster, &vacant)?;
        let Some((e, equilibrated)) = one(r, &model)? else {
            interrupted = true;
            break;
        };
        let units = formula_units_present(cluster, &vacant);
        let per = |x: f64| if units > 0.0 { x / units } else { 0.0 };
        done.push(Realisation {
            index: r,
            vacant: vacant.iter().filter(|v| **v).count(),
            formula_units: units,
            ln_count: e.ln_count,
            ln_w_per_unit: per(e.ln_count),
            sigma_ln_w: e.sigma_ln_w.map(|s| per(s * e.formula_units)),
            count: e.count,
            equilibrated,
        });
        context.tell(Progress::Realisation {
            done: done.len(),
            all: realisations,
        });
    }
    summarise(cluster, done, realisations, seed, interrupted, start)
}

/// The mean, spread and standard error of finished realisations; [`Error::Interrupted`]
/// when fewer than two finished.
fn summarise(
    cluster: &Cluster,
    done: Vec<Realisation>,
    requested: usize,
    seed: u64,
    interrupted: bool,
    start: Instant,
) -> Result<Counted<Realisations>> {
    if done.len() < 2 {
        return Err(Error::Interrupted {
            what: format!(
                "counting realisations of the vacancies of {} ({} of {} finished; at least 2 \
                 are needed for a spread)",
                cluster.cells,
                done.len(),
                requested
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
    let method = if done.iter().all(|r| r.count.is_some()) {
        Method::Exact
    } else {
        Method::MonteCarlo
    };
    let estimate = Estimate::finite(
        method,
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
            requested,
            seed,
            mean,
            spread,
            standard_error,
            mean_per_undiluted_unit,
            undiluted_formula_units: undiluted,
            interrupted,
        },
    ))
}

/// Settings of a Monte Carlo realisation average.
#[derive(Clone, Debug)]
pub struct DilutionSampleConfig {
    /// Realisations to sample (at least 2, for a spread).
    pub realisations: usize,
    /// Seed of the realisations' vacancies (the same realisations as [`count`]'s with this
    /// seed) and of their Monte Carlo streams.
    pub seed: u64,
    /// The Monte Carlo settings of every realisation; its `seed` is replaced by one
    /// derived from (seed, realisation).
    pub sample: super::sampling::SampleConfig,
}

/// Sample `config.realisations` realisations of a diluted cluster by thermodynamic
/// integration ([`super::sampling::count`]) and average ln W per formula unit present, as
/// [`count`] does with exact counts. Realisation r has the vacancies [`count`] gives it
/// with the same seed, and a Monte Carlo seed derived from (seed, r), so that the result
/// is the same on any thread count. The standard error of the mean comes from the spread
/// of the realisations' estimates, which holds both the sample-to-sample variation and the
/// Monte Carlo noise; each realisation's own σ is listed beside it. A realisation whose run
/// was interrupted is left out.
pub fn sample(
    cluster: &Cluster,
    config: &DilutionSampleConfig,
    context: &Context,
) -> Result<Counted<Realisations>> {
    over_realisations(
        cluster,
        config.realisations,
        config.seed,
        context,
        |r, model| {
            let settings = super::sampling::SampleConfig {
                seed: super::sampling::stream(config.seed ^ MONTE_CARLO_SALT, r).next_u64(),
                ..config.sample.clone()
            };
            match super::sampling::count(model, &settings, context) {
                Ok(s) if s.interrupted => Ok(None),
                Ok(s) => Ok(Some((s.estimate.clone(), Some(s.equilibrated)))),
                Err(Error::Interrupted { .. }) => Ok(None),
                Err(e) => Err(e),
            }
        },
    )
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
            let may: Vec<usize> = (0..entities.len()).filter(|&e| fraction[e] > 0.0).collect();
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
    if per_unit.abs() < 1e-12 {
        0.0
    } else {
        per_unit
    }
}

#[cfg(test)]
mod tests {
    use std::collections::{BTreeSet, HashMap};

    use super::*;
    use crate::Lattice;
    use crate::cluster::Cells;

    const DILUTED: &str = include_str!("../../lattices/diluted-spin-ice.yaml");
    const SPIN_ICE: &str = include_str!("../../lattices/spin-ice.yaml");

    /// The shipped diluted spin ice with vacancy fraction `x`.
    fn diluted(x: f64) -> Lattice {
        let text = DILUTED.replace("fraction: 0.1}", &format!("fraction: {x}}}"));
        assert_ne!(text, DILUTED.replace("0.1}", "0.1 }"));
        Lattice::from_yaml(&text, "diluted.yaml").unwrap()
    }

    fn cluster<'a>(l: &'a Lattice, cells: &str) -> Cluster<'a> {
        Cluster::new(&l.crystal, Cells::parse(cells, None, 3).unwrap()).unwrap()
    }

    /// Independent brute force for diluted pyrochlore spin ice, sharing nothing with the
    /// rule expansion or the model: the tetrahedra are written down from the cell's
    /// geometry (the "up" one of a cell holds its four sites; the "down" one site 0 of the
    /// cell and sites 1, 2, 3 of the cells one step back along a, b, c), state 1 points
    /// into the up tetrahedron and state 0 into the down one (the file's axes), and every
    /// assignment of the sites left is tried against the spin-ice counts for the members
    /// left: 4 → [2], 3 → [1, 2], 2 → [1], 1 → [0, 1], 0 → anything.
    fn brute(cluster: &Cluster, vacant: &[bool]) -> u64 {
        let n = cluster.cells.counts;
        let index: HashMap<(usize, [usize; 3]), usize> = cluster
            .sites
            .iter()
            .enumerate()
            .map(|(i, s)| ((s.site, s.cell), i))
            .collect();
        let cells: BTreeSet<[usize; 3]> = cluster.sites.iter().map(|s| s.cell).collect();
        let back = |c: [usize; 3], axis: usize| {
            let mut c = c;
            c[axis] = (c[axis] + n[axis] - 1) % n[axis];
            c
        };
        let mut tetrahedra: Vec<([usize; 4], u32)> = Vec::new();
        for &cell in &cells {
            tetrahedra.push(([0, 1, 2, 3].map(|k| index[&(k, cell)]), 1));
            tetrahedra.push((
                [
                    index[&(0, cell)],
                    index[&(1, back(cell, 0))],
                    index[&(2, back(cell, 1))],
                    index[&(3, back(cell, 2))],
                ],
                0,
            ));
        }
        let allowed = |members: usize, inward: usize| match members {
            4 => inward == 2,
            3 => inward == 1 || inward == 2,
            2 => inward == 1,
            _ => true,
        };
        let free: Vec<usize> = (0..vacant.len()).filter(|&i| !vacant[i]).collect();
        let mut total = 0;
        let mut values = vec![0u32; vacant.len()];
        for mask in 0u64..(1 << free.len()) {
            for (b, &i) in free.iter().enumerate() {
                values[i] = (mask >> b & 1) as u32;
            }
            let ok = tetrahedra.iter().all(|(m, state)| {
                let left: Vec<usize> = m.iter().copied().filter(|&i| !vacant[i]).collect();
                let inward = left.iter().filter(|&&i| values[i] == *state).count();
                allowed(left.len(), inward)
            });
            total += ok as u64;
        }
        total
    }

    #[test]
    fn issue13_realisation_counts_equal_brute_force_on_tiny_cells() {
        let l = diluted(0.3);
        let mut vacancies_seen = BTreeSet::new();
        for cells in ["1x1x1", "2x1x1", "2x2x1"] {
            let cl = cluster(&l, cells);
            for seed in [1, 2, 3, 17] {
                let config = DilutionConfig {
                    realisations: 5,
                    seed,
                    ..Default::default()
                };
                let r = count(&cl, &config, &Context::new()).unwrap();
                for x in &r.realisations {
                    let vacant = vacancies(&cl, seed, x.index);
                    assert_eq!(vacant.iter().filter(|v| **v).count(), x.vacant);
                    vacancies_seen.insert(x.vacant);
                    assert_eq!(
                        x.count,
                        Some(BigUint::from(brute(&cl, &vacant))),
                        "{cells}, seed {seed}, realisation {}",
                        x.index
                    );
                }
            }
        }
        // The realisations did test vacancies: none, one and several per cell.
        assert!(vacancies_seen.contains(&0) && vacancies_seen.contains(&1));
        assert!(vacancies_seen.iter().any(|&v| v >= 3), "{vacancies_seen:?}");
    }

    /// With fraction 0 nothing is vacant: every realisation is the undiluted cell, whose
    /// count is the shipped spin ice's (2970 for 2x2x2, the frontier counter on the
    /// undiluted file; the same as 2x2x2 ice Ic per bond), and the generalized Pauling
    /// estimate is Pauling's (1/2) ln(3/2) per Dy (Pauling 1935).
    #[test]
    fn issue13_zero_fraction_is_the_undiluted_crystal() {
        let l = diluted(0.0);
        assert!(!l.crystal.is_diluted());
        let cl = cluster(&l, "2x2x2");
        let r = count(&cl, &DilutionConfig::default(), &Context::new()).unwrap();
        let plain = Lattice::from_yaml(SPIN_ICE, "spin-ice.yaml").unwrap();
        let undiluted = plain
            .count_exact(
                &Cells::parse("2x2x2", None, 3).unwrap(),
                &Default::default(),
            )
            .unwrap();
        for x in &r.realisations {
            assert_eq!(x.vacant, 0);
            assert_eq!(x.count.as_ref(), undiluted.count.as_ref());
        }
        assert!(r.spread < 1e-12, "{}", r.spread);
        let gp = generalized_pauling_ln_w(&l.crystal);
        let p = plain.pauling().unwrap().ln_w_per_unit;
        assert!((gp - p).abs() < 1e-12 && (gp - 0.5 * 1.5f64.ln()).abs() < 1e-12);
    }

    #[test]
    fn issue13_model_new_refuses_a_diluted_crystal() {
        let l = diluted(0.1);
        let e = Model::new(&cluster(&l, "2x2x2")).unwrap_err();
        assert!(matches!(e, Error::Model(_)), "{e}");
        assert!(e.to_string().contains("one realisation"), "{e}");
    }

    /// Realisation r depends on (seed, r) only: the same on 1 and 2 threads, and the same
    /// whether 3 or 6 realisations are asked for.
    #[test]
    fn issue13_realisations_are_the_same_on_one_and_two_threads() {
        let l = diluted(0.3);
        let cl = cluster(&l, "3x3x2");
        let config = DilutionConfig {
            realisations: 6,
            seed: 42,
            ..Default::default()
        };
        let run = |threads: usize, config: &DilutionConfig| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| count(&cl, config, &Context::new()).unwrap())
        };
        let one = run(1, &config);
        let two = run(2, &config);
        let key = |r: &Realisations| -> Vec<(usize, String, u64)> {
            r.realisations
                .iter()
                .map(|x| {
                    (
                        x.vacant,
                        format!("{:?}", x.count),
                        x.ln_w_per_unit.to_bits(),
                    )
                })
                .collect()
        };
        assert_eq!(key(&one), key(&two));
        assert_eq!(one.mean.to_bits(), two.mean.to_bits());
        let three = run(
            2,
            &DilutionConfig {
                realisations: 3,
                ..config.clone()
            },
        );
        assert_eq!(key(&three)[..], key(&one)[..3]);
        // Different seeds give different realisations.
        let other = run(1, &DilutionConfig { seed: 43, ..config });
        assert_ne!(key(&other), key(&one));
    }

    /// The standard error of the mean is honest: over 150 seeds of 16 realisations each,
    /// the pulls (mean − reference)/(standard error) have a mean near 0 and a spread near
    /// the Student-t value √(15/13) = 1.07 for 15 degrees of freedom; the reference is the
    /// mean of 3000 realisations of another seed (its own error is 7 % of one run's).
    #[test]
    fn issue13_the_standard_error_of_the_mean_gives_calibrated_pulls() {
        let l = diluted(0.3);
        let cl = cluster(&l, "2x2x2");
        let run = |seed: u64, realisations: usize| {
            let config = DilutionConfig {
                realisations,
                seed,
                ..Default::default()
            };
            count(&cl, &config, &Context::new()).unwrap()
        };
        let reference = run(100_000, 3000).mean;
        let pulls: Vec<f64> = (0..150)
            .map(|seed| {
                let r = run(seed, 16);
                (r.mean - reference) / r.standard_error
            })
            .collect();
        let (mean, spread) = crate::counters::sampling::calibration::mean_and_spread(&pulls);
        eprintln!(
            "realisation pulls: mean {mean:+.3}, spread {spread:.3} over {} seeds",
            pulls.len()
        );
        assert!(mean.abs() < 0.3, "mean pull {mean}");
        assert!((0.8..1.35).contains(&spread), "spread of pulls {spread}");
    }

    /// Ctrl-C between realisations: the finished ones make the result, marked
    /// interrupted; with fewer than two finished there is no spread, and the run is an
    /// [`Error::Interrupted`].
    #[test]
    fn issue13_an_interrupt_keeps_the_finished_realisations() {
        let l = diluted(0.1);
        let cl = cluster(&l, "2x2x2");
        let config = DilutionConfig {
            realisations: 10,
            ..Default::default()
        };
        for stop_after in [3, 1] {
            let context = Context::new();
            let flag = context.interrupt.clone();
            let context = context.with_observer(move |p| {
                if let Progress::Realisation { done, .. } = p
                    && *done == stop_after
                {
                    flag.raise();
                }
            });
            match count(&cl, &config, &context) {
                Ok(r) => {
                    assert_eq!(stop_after, 3);
                    assert!(r.interrupted);
                    assert_eq!(r.realisations.len(), 3);
                    assert_eq!(r.requested, 10);
                }
                Err(e) => {
                    assert_eq!(stop_after, 1);
                    assert!(matches!(e, Error::Interrupted { .. }), "{e}");
                    assert!(e.to_string().contains("1 of 10 finished"), "{e}");
                }
            }
        }
    }

    /// The Monte Carlo of every realisation against its exact count (the same vacancies
    /// for the same seed): each within 4σ of its own error bar, and the same numbers on 1
    /// and 2 threads.
    #[test]
    fn issue13_sampled_realisations_agree_with_their_exact_counts() {
        let l = diluted(0.2);
        let cl = cluster(&l, "2x2x2");
        let exact = count(
            &cl,
            &DilutionConfig {
                realisations: 6,
                seed: 3,
                ..Default::default()
            },
            &Context::new(),
        )
        .unwrap();
        let config = DilutionSampleConfig {
            realisations: 6,
            seed: 3,
            sample: crate::counters::sampling::SampleConfig {
                replicas: 8,
                sweeps: 100,
                ..Default::default()
            },
        };
        let run = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| sample(&cl, &config, &Context::new()).unwrap())
        };
        let sampled = run(2);
        for (e, s) in exact.realisations.iter().zip(&sampled.realisations) {
            assert_eq!((e.index, e.vacant), (s.index, s.vacant));
            let sigma = s.sigma_ln_w.unwrap();
            assert!(
                (e.ln_w_per_unit - s.ln_w_per_unit).abs() < 4.0 * sigma,
                "realisation {}: exact {} against {} ± {sigma}",
                e.index,
                e.ln_w_per_unit,
                s.ln_w_per_unit
            );
        }
        assert!((exact.mean - sampled.mean).abs() < 4.0 * sampled.standard_error);
        let one = run(1);
        let bits = |r: &Realisations| -> Vec<u64> {
            r.realisations
                .iter()
                .map(|x| x.ln_w_per_unit.to_bits())
                .collect()
        };
        assert_eq!(bits(&one), bits(&sampled));
    }

    /// The generalized Pauling estimate of Ke et al. 2007 (Phys. Rev. Lett. 99, 137203;
    /// form reconstructed, see lattices/diluted-spin-ice.yaml) in closed form, computed
    /// here: per Dy present, with p = 1 − x,
    /// ln W = ln 2 + (1/(2p)) Σ_n C(4, n) pⁿ x⁴⁻ⁿ ln f_n, f = 6/16, 6/8, 2/4, 1, 1 for
    /// n = 4 … 0 (two tetrahedra per site, 2p sites present per tetrahedron... per
    /// tetrahedron 4p sites present, each in two tetrahedra).
    #[test]
    fn issue13_generalized_pauling_follows_the_closed_form() {
        let f: [f64; 5] = [1.0, 1.0, 2.0 / 4.0, 6.0 / 8.0, 6.0 / 16.0];
        let binomial = [1.0, 4.0, 6.0, 4.0, 1.0];
        for x in [0.0f64, 0.05, 0.1, 0.3, 0.5, 0.9] {
            let p = 1.0 - x;
            let sum: f64 = (0..=4)
                .map(|n| binomial[n] * p.powi(n as i32) * x.powi(4 - n as i32) * f[n].ln())
                .sum();
            let closed = 2f64.ln() + sum / (2.0 * p);
            let l = diluted(x);
            let estimate = l.pauling().unwrap();
            assert!(
                (estimate.ln_w_per_unit - closed).abs() < 1e-12,
                "x = {x}: {} against {closed}",
                estimate.ln_w_per_unit
            );
        }
        // The limit of high dilution is a free moment per Dy, ln 2 (Ke et al. 2007,
        // abstract: the entropy approaches R ln 2).
        let l = diluted(0.999);
        assert!((l.pauling().unwrap().ln_w_per_unit - 2f64.ln()).abs() < 0.01);
    }

    /// The realisation average against the generalized Pauling curve: Pauling-level
    /// agreement, not an identity. Tolerance: 12 % of the Pauling value plus three
    /// standard errors. Why: these cells are small (72 and 108 sites) and overshoot the
    /// infinite crystal; undiluted, 3x3x2 lies 12 % and 3x3x3 8.6 % above Pauling's
    /// (1/2) ln(3/2) (exact counts of spin-ice.yaml: 0.22734 and 0.22009 per Dy), while
    /// the infinite crystal itself lies 1.4 % above it (Singh & Oitmaa 2012, arXiv:1112.4439,
    /// numerical linked clusters: 0.205507; the journal, Phys. Rev. B 85, 144414, from memory). Measured here: 0.1 on 3x3x2,
    /// 0.3 and 0.5 on 3x3x3 agreed to within 1–6 %.
    #[test]
    fn issue13_realisation_average_is_close_to_the_generalized_pauling_curve() {
        for (x, cells) in [(0.1, "3x3x2"), (0.3, "3x3x3"), (0.5, "3x3x3")] {
            let l = diluted(x);
            let cl = cluster(&l, cells);
            let config = DilutionConfig {
                realisations: 24,
                seed: 5,
                ..Default::default()
            };
            let r = count(&cl, &config, &Context::new()).unwrap();
            let gp = l.pauling().unwrap().ln_w_per_unit;
            let tolerance = 0.12 * gp + 3.0 * r.standard_error;
            assert!(
                (r.mean - gp).abs() < tolerance,
                "x = {x}, {cells}: mean {} ± {} against {gp}",
                r.mean,
                r.standard_error
            );
        }
    }
}
