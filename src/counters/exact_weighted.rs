//! The exact count of a finite cell with weights, occupancies or a composition.
//!
//! # What it computes
//!
//! * **Weights** (`weights:`): Z = Σ_σ w(σ) over the arrangements σ that satisfy every
//!   rule, w(σ) the product of the variables' state weights, and the entropy of that
//!   ensemble, S/R = ln Z − ⟨ln w⟩ (ln of the count when every weight is 1).
//! * **Occupancies** (`occupancy:`): the fields h_j that make each mean ⟨n_j⟩/N_j equal to
//!   its target (solved by [`super::fields::solve`] on ln Z(h) of the cell), and the entropy
//!   of that maximum-entropy ensemble, S/R = ln Z(h) − Σ_j h_j ⟨n_j⟩ − ⟨ln w⟩.
//! * **A composition** (`composition:`, one entry, no weights): the exact number of
//!   arrangements in which exactly round(x·N) of the entry's N variables hold its state —
//!   the coefficient of that degree of the count's polynomial in the state's fugacity.
//!
//! # Method
//!
//! The frontier engine of [`super::exact`] with the weighted payloads of
//! [`super::frontier::weighted`]: float moments `[Z, Σ w ln w, Σ w n_j]` (rescaled by a power
//! of two after every step, the log of the scale kept aside), or exact polynomials in `u128`
//! that restart in big integers on overflow. Variables that no rule reads contribute their
//! factor in closed form (ln Σ_s w(s), their share of ⟨ln w⟩ and the means; a factor
//! (a + b x) of the polynomial). Pinned variables count as one state, at their held state.
//!
//! # Complexity
//!
//! That of the unweighted count times the payload: K = 2 + (number of means) floats a state,
//! or a polynomial of up to N + 1 coefficients; occupancies need one count per Newton
//! evaluation (m + 1 a Newton step, plus the line search).

use std::sync::Arc;
use std::time::Instant;

use num_bigint::BigUint;

use super::exact::{ExactConfig, checked_plan, steps_at};
use super::fields::{self, AtFields, FieldsConfig};
use super::frontier::layout::{mask, width};
use super::frontier::payload::{Accumulator, Count, Payload};
use super::frontier::step::Step;
use super::frontier::weighted::{Factor, Moments, Poly, factor, pattern_factors, rescale, times};
use super::frontier::{Frontier, Piece};
use super::order::Plan;
use crate::crystal::MeanKind;
use crate::error::{Error, Result};
use crate::estimate::{Estimate, FieldValue, Method, Weighing};
use crate::model::Model;

/// Largest number of occupancies counted at once (the float payload is a fixed-size array).
pub const MAX_OCCUPANCIES: usize = 6;

/// Why a run stopped.
enum Failure {
    Overflow,
    Stop(Error),
}

impl From<Error> for Failure {
    fn from(e: Error) -> Self {
        Failure::Stop(e)
    }
}

/// The weighted sum of the cell at fields `h`: ln Z, ⟨ln w⟩ (w including the fields) and
/// ⟨n_j⟩ for every occupancy (totals over the cell).
#[derive(Clone, Debug)]
struct Moments1 {
    ln_z: f64,
    ln_w: f64,
    means: Vec<f64>,
    peak: usize,
}

/// The weighted exact count of a weighted model (`config` filled from the context).
pub(super) fn count(model: &Model, config: &ExactConfig) -> Result<Estimate> {
    let start = Instant::now();
    let compositions = model
        .means
        .iter()
        .filter(|m| m.kind == MeanKind::Composition)
        .count();
    if compositions > 0 {
        if compositions > 1
            || model.means.len() > 1
            || model.variables.iter().any(|v| v.weights.is_some())
        {
            return Err(Error::Model(
                "the exact count takes one composition: entry at a time, without weights: or \
                 occupancy: beside it (several compositions, or a composition with weights, \
                 are not yet counted exactly)"
                    .into(),
            ));
        }
        return composition(model, config, start);
    }
    if model.means.len() > MAX_OCCUPANCIES {
        return Err(Error::Model(format!(
            "the exact count takes at most {MAX_OCCUPANCIES} occupancy: entries at once; this file has {}",
            model.means.len()
        )));
    }
    if model.contradiction.is_some() {
        return Err(empty(model));
    }
    let plan = checked_plan(model, config, None)?;
    let sizes: Vec<f64> = model
        .means
        .iter()
        .map(|m| m.variables.len() as f64)
        .collect();
    if let Some(j) = sizes.iter().position(|&n| n == 0.0) {
        return Err(Error::Model(format!(
            "the occupancy {} has no variable in the cell {}",
            model.means[j].label, model.cells
        )));
    }
    let evaluate = |h: &[f64]| moments(model, &plan, config, h);
    let (h, at) = if model.means.is_empty() {
        (Vec::new(), evaluate(&[])?)
    } else {
        let targets: Vec<f64> = model.means.iter().map(|m| m.mean).collect();
        let solved = fields::solve(&targets, &sizes, &FieldsConfig::default(), |h| {
            let m = evaluate(h)?;
            Ok(AtFields {
                ln_z: m.ln_z,
                means: m.means.iter().zip(&sizes).map(|(n, s)| n / s).collect(),
            })
        })?;
        let at = evaluate(&solved.fields)?;
        (solved.fields, at)
    };
    if !at.ln_z.is_finite() {
        return Err(empty(model));
    }
    let fu = model.formula_units;
    let s = at.ln_z - at.ln_w;
    let weighing = Weighing {
        ln_z_per_unit: at.ln_z / fu,
        fields: model
            .means
            .iter()
            .enumerate()
            .map(|(j, m)| FieldValue {
                label: m.label.clone(),
                kind: m.kind,
                target: m.mean,
                field: h[j],
                achieved: at.means[j] / sizes[j],
                achieved_sigma: None,
            })
            .collect(),
    };
    Ok(Estimate::finite(
        Method::Exact,
        model.cells.clone(),
        fu,
        s / fu,
        None,
        start.elapsed().as_secs_f64(),
    )
    .with_peak_states(Some(at.peak))
    .with_weighing(weighing))
}

/// The refusal of a cell whose weighted ensemble is empty.
fn empty(model: &Model) -> Error {
    Error::Model(format!(
        "no arrangement of {} satisfies the rules with a nonzero weight (the plain count is 0, \
         or every allowed arrangement holds a state of weight 0), so its weighted ensemble is \
         empty and has no entropy",
        model.cells
    ))
}

/// The factors `[w, ln w, n_1, …]` of every state of every variable at fields `h`: the
/// state's weight times exp(Σ_j h_j n_j), n_j = 1 when the variable is under mean j and
/// holds (or is pinned at) its state.
fn variable_factors(model: &Model, h: &[f64]) -> Vec<Vec<Vec<f64>>> {
    let mut under: Vec<Vec<usize>> = vec![Vec::new(); model.variables.len()];
    for (j, m) in model.means.iter().enumerate() {
        for &v in &m.variables {
            under[v].push(j);
        }
    }
    model
        .variables
        .iter()
        .enumerate()
        .map(|(v, var)| {
            (0..var.states)
                .map(|s| {
                    let actual = var.held.unwrap_or(s);
                    let mut n = vec![0.0; model.means.len()];
                    let mut field = 0.0;
                    for &j in &under[v] {
                        if model.means[j].state == actual {
                            n[j] = 1.0;
                            field += h.get(j).copied().unwrap_or(0.0);
                        }
                    }
                    let mut f = vec![model.weight(v, s) * field.exp()];
                    f.extend(n);
                    f
                })
                .collect()
        })
        .collect()
}

/// ln Z, ⟨ln w⟩ and the means at fields `h`, with the payload sized to the number of means.
fn moments(model: &Model, plan: &Plan, config: &ExactConfig, h: &[f64]) -> Result<Moments1> {
    let r = match model.means.len() {
        0 => run_moments::<2>(model, plan, config, h),
        1 => run_moments::<3>(model, plan, config, h),
        2 => run_moments::<4>(model, plan, config, h),
        3 => run_moments::<5>(model, plan, config, h),
        4 => run_moments::<6>(model, plan, config, h),
        5 => run_moments::<7>(model, plan, config, h),
        6 => run_moments::<8>(model, plan, config, h),
        _ => unreachable!("at most MAX_OCCUPANCIES means"),
    };
    match r {
        Ok(m) => Ok(m),
        Err(Failure::Stop(e)) => Err(e),
        Err(Failure::Overflow) => unreachable!("floats do not overflow the accumulator"),
    }
}

/// The frontier sweep shared by both payloads: before each step `prepare(t, piece)` sets
/// the step's factors on every piece, after it `after(pieces)` may rescale. Returns the final
/// pieces and the peak number of states.
fn sweep<P>(
    model: &Model,
    plan: &Plan,
    config: &ExactConfig,
    steps: &[Step],
    start: P,
    mut prepare: impl FnMut(usize, &mut P),
    mut after: impl FnMut(&mut [Piece<P>]),
) -> std::result::Result<(Vec<Piece<P>>, usize), Failure>
where
    P: Payload + Accumulator<<P as Payload>::Item>,
{
    let mut frontier: Frontier<P> = Frontier::new(vec![Piece {
        keys: vec![0],
        payload: start,
    }]);
    let mut next: Vec<Piece<P>> = Vec::new();
    let mut peak = 1usize;
    for (t, step) in steps.iter().enumerate() {
        super::exact::stop_point(model, config).map_err(Failure::Stop)?;
        for p in &mut frontier.pieces {
            prepare(t, &mut p.payload);
        }
        frontier
            .step(step, false, &mut next)
            .map_err(|_| Failure::Overflow)?;
        std::mem::swap(&mut frontier.pieces, &mut next);
        after(&mut frontier.pieces);
        let n = frontier.len();
        if n > config.max_states {
            return Err(Failure::Stop(Error::Budget {
                cells: model.cells.clone(),
                detail: format!(
                    "the frontier reached {n} states at step {} of {} (budget {})",
                    t + 1,
                    plan.order.len(),
                    config.max_states,
                ),
            }));
        }
        peak = peak.max(n);
        if let Some(p) = &config.progress {
            (p.0)(t + 1, steps.len(), n);
        }
        if n == 0 {
            break;
        }
    }
    Ok((frontier.pieces, peak))
}

fn run_moments<const K: usize>(
    model: &Model,
    plan: &Plan,
    config: &ExactConfig,
    h: &[f64],
) -> std::result::Result<Moments1, Failure> {
    let per_var = variable_factors(model, h);
    let as_factor = |f: &Vec<f64>| factor::<K>(f[0], &f[1..]);
    let (steps, offsets) = steps_at(model, plan);
    let step_factors: Vec<Arc<[Factor<K>]>> = steps
        .iter()
        .zip(plan.order.iter().zip(&offsets))
        .map(|(step, (&v, &at))| {
            let values: Vec<Factor<K>> = per_var[v].iter().map(as_factor).collect();
            let m = mask(width(model.variables[v].states));
            pattern_factors(step.patterns(), &[(at, m, &values[..])])
        })
        .collect();
    let mut one = [0.0; K];
    one[0] = 1.0;
    let mut ln_scale = 0.0;
    let (pieces, peak) = sweep(
        model,
        plan,
        config,
        &steps,
        Moments::<K> {
            items: vec![one],
            factors: Arc::from(Vec::new()),
        },
        |t, p| p.factors = step_factors[t].clone(),
        |pieces| ln_scale += rescale(pieces),
    )?;
    let mut total = [0.0; K];
    for p in &pieces {
        for it in &p.payload.items {
            for (a, b) in total.iter_mut().zip(it) {
                *a += b;
            }
        }
    }
    if total[0] <= 0.0 {
        return Err(Failure::Stop(empty(model)));
    }
    // Free variables, in closed form: their factor sums multiply Z.
    let mut ln_z = total[0].ln() + ln_scale;
    let mut avg: Vec<f64> = total[1..].iter().map(|y| y / total[0]).collect();
    for &v in &plan.free {
        let mut z = [0.0; K];
        for f in &per_var[v] {
            let f = as_factor(f);
            let mut unit = [0.0; K];
            unit[0] = 1.0;
            for (a, b) in z.iter_mut().zip(times(&unit, &f)) {
                *a += b;
            }
        }
        ln_z += z[0].ln();
        for (a, y) in avg.iter_mut().zip(&z[1..]) {
            *a += y / z[0];
        }
    }
    Ok(Moments1 {
        ln_z,
        ln_w: avg[0],
        means: avg[1..].to_vec(),
        peak,
    })
}

/// Whether every composition of the model asks for a whole number of its variables in
/// this cell (a cell that cannot hold the composition is refused by the count).
pub(crate) fn composition_whole(model: &Model) -> bool {
    model
        .means
        .iter()
        .filter(|m| m.kind == crate::crystal::MeanKind::Composition)
        .all(|m| {
            let t = m.mean * m.variables.len() as f64;
            !m.variables.is_empty() && (t - t.round()).abs() <= 1e-9 * m.variables.len() as f64
        })
}

/// The exact count at one composition (no weights, no other mean).
fn composition(model: &Model, config: &ExactConfig, start: Instant) -> Result<Estimate> {
    let mean = &model.means[0];
    let n = mean.variables.len();
    let target = mean.mean * n as f64;
    let k = target.round();
    if n == 0 || (target - k).abs() > 1e-9 * n.max(1) as f64 {
        let (lo, hi) = (target.floor(), target.ceil());
        // The smallest number of variables N' for which x·N' is a whole number.
        let smallest = (1..=100_000usize)
            .find(|&m| {
                let t = mean.mean * m as f64;
                (t - t.round()).abs() < 1e-9 * m as f64
            })
            .map_or(String::new(), |m| {
                format!("; x·N is whole when N is a multiple of {m}")
            });
        return Err(Error::Model(format!(
            "the composition {} asks for a fraction {} of the {n} variables of {} in state {}, \
             i.e. {target:.3} of them, which is not a whole number; the nearest fractions this \
             cell can hold are {lo}/{n} = {:.6} and {hi}/{n} = {:.6}{smallest}",
            mean.label,
            mean.mean,
            model.cells,
            mean.state,
            lo / n.max(1) as f64,
            hi / n.max(1) as f64,
        )));
    }
    let k = k as usize;
    let (poly, peak) = if model.contradiction.is_some() {
        (vec![BigUint::from(0u32)], 0)
    } else {
        let plan = checked_plan(model, config, None)?;
        match run_poly::<u128>(model, &plan, config) {
            Ok(r) => r,
            Err(Failure::Overflow) => match run_poly::<BigUint>(model, &plan, config) {
                Ok(r) => r,
                Err(Failure::Overflow) => unreachable!("big integers do not overflow"),
                Err(Failure::Stop(e)) => return Err(e),
            },
            Err(Failure::Stop(e)) => return Err(e),
        }
    };
    let coefficient = |d: usize| poly.get(d).cloned().unwrap_or_default();
    let count = coefficient(k);
    let fu = model.formula_units;
    let estimate = Estimate::exact(
        model.cells.clone(),
        count.clone(),
        fu,
        start.elapsed().as_secs_f64(),
    )
    .with_peak_states(Some(peak));
    // The conjugate field of a canonical count: −d ln c_d / dd by the centred difference
    // (0 at the ends of the polynomial, where it is unbounded).
    let ln = |d: usize| crate::estimate::ln_big(&coefficient(d));
    let field = if k > 0 && ln(k - 1).is_finite() && ln(k + 1).is_finite() {
        // (+ 0.0: a symmetric polynomial gives 0, not −0)
        (ln(k - 1) - ln(k + 1)) / 2.0 + 0.0
    } else {
        0.0
    };
    let weighing = Weighing {
        ln_z_per_unit: estimate.ln_count / fu,
        fields: vec![FieldValue {
            label: mean.label.clone(),
            kind: mean.kind,
            target: mean.mean,
            field,
            achieved: k as f64 / n as f64,
            achieved_sigma: None,
        }],
    };
    Ok(estimate.with_weighing(weighing))
}

/// The polynomial of the cell in the fugacity of the composition's state, in `C`.
fn run_poly<C: Count>(
    model: &Model,
    plan: &Plan,
    config: &ExactConfig,
) -> std::result::Result<(Vec<BigUint>, usize), Failure> {
    let mean = &model.means[0];
    let marked = |v: usize, s: u32| -> u32 {
        let var = &model.variables[v];
        u32::from(var.held.unwrap_or(s) == mean.state && mean.variables.binary_search(&v).is_ok())
    };
    let (steps, offsets) = steps_at(model, plan);
    let degrees: Vec<Arc<[u32]>> = steps
        .iter()
        .zip(plan.order.iter().zip(&offsets))
        .map(|(step, (&v, &at))| {
            let m = mask(width(model.variables[v].states));
            step.patterns()
                .iter()
                .map(|&p| marked(v, ((p >> at) & m) as u32))
                .collect()
        })
        .collect();
    let (pieces, peak) = sweep(
        model,
        plan,
        config,
        &steps,
        Poly::<C> {
            items: vec![vec![C::one()]],
            degrees: Arc::from(Vec::new()),
        },
        |t, p| p.degrees = degrees[t].clone(),
        |_| {},
    )?;
    let mut total: Vec<BigUint> = Vec::new();
    for p in &pieces {
        for item in &p.payload.items {
            if total.len() < item.len() {
                total.resize(item.len(), BigUint::default());
            }
            for (a, c) in total.iter_mut().zip(item) {
                *a += c.clone().into_big();
            }
        }
    }
    // Free variables: multiply by (unmarked states) + (marked states)·x each.
    for &v in &plan.free {
        let q = model.variables[v].states;
        let b = (0..q).map(|s| marked(v, s)).sum::<u32>();
        let a = q - b;
        let mut next = vec![BigUint::default(); total.len() + 1];
        for (d, c) in total.iter().enumerate() {
            next[d] += c * a;
            next[d + 1] += c * b;
        }
        total = next;
    }
    Ok((total, peak))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;
    use crate::cluster::{Cells, Cluster};
    use crate::counters::{Context, brute, exact};

    const SQUARE_ICE: &str = include_str!("../../lattices/square-ice.yaml");
    const SPIN_ICE: &str = include_str!("../../lattices/spin-ice.yaml");
    const HARD_SQUARES: &str = include_str!("../../lattices/hard-squares.yaml");
    const SQUARE_DIMERS: &str = include_str!("../../lattices/square-dimers.yaml");

    /// A two-state occupancy variable on every site of the square lattice and no rule.
    const NO_RULE: &str = "name: ideal mixing
dimensions: 2
cell: {vectors: [[1.0, 0.0], [0.0, 1.0]]}
sites: [{id: A, at: [0.0, 0.0]}]
variables: [{on: sites, kind: occupancy}]
rules: []
formula_unit: {name: site, per: sites}
";

    fn model(yaml: &str, extra: &str, cells: &str) -> Model {
        let text = format!("{yaml}\n{extra}");
        let l = Lattice::from_yaml(&text, "test.yaml").unwrap();
        let cluster = Cluster::new(
            &l.crystal,
            Cells::parse(cells, None, l.crystal.dimensions).unwrap(),
        )
        .unwrap();
        Model::new(&cluster).unwrap()
    }

    fn exact(m: &Model) -> Result<Estimate> {
        exact::count(m, &ExactConfig::default(), &Context::new()).map(|c| c.estimate)
    }

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol * b.abs().max(1.0)
    }

    /// Random weights on every variable family, and random fields on the means: the float
    /// frontier against brute-force enumeration (Z, ⟨ln w⟩, every mean).
    #[test]
    fn issue13_weighted_frontier_matches_brute_force() {
        use rand::Rng;
        let mut rng = rand_pcg::Pcg64Mcg::new(13);
        let mut w = || 0.05 + 3.0 * (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        let cases = [
            (SQUARE_ICE, vec!["bond: h", "bond: v"], "2x2"),
            (SQUARE_ICE, vec!["bond: h", "bond: v"], "3x3"),
            (
                SPIN_ICE,
                vec!["site: M0", "site: M1", "site: M2", "site: M3"],
                "1x1x1",
            ),
            (
                SPIN_ICE,
                vec!["site: M0", "site: M1", "site: M2", "site: M3"],
                "2x1x1",
            ),
        ];
        for (yaml, ids, cells) in cases {
            for with_means in [false, true] {
                let mut extra = String::from("weights:\n");
                for id in &ids {
                    extra += &format!("  - {{{id}, states: [{}, {}]}}\n", w(), w());
                }
                if with_means {
                    extra += &format!("occupancy:\n  - {{{}, state: 1, mean: 0.5}}\n", ids[0]);
                    extra += &format!("  - {{{}, state: 0, mean: 0.5}}\n", ids[1]);
                }
                let m = model(yaml, &extra, cells);
                let h: Vec<f64> = (0..m.means.len()).map(|j| 0.3 - 0.7 * j as f64).collect();
                let b = brute::weighted(&m, &h).unwrap();
                let plan = checked_plan(&m, &ExactConfig::default(), None).unwrap();
                let f = moments(&m, &plan, &ExactConfig::default(), &h).unwrap();
                let what = format!("{cells} means {with_means}");
                assert!(
                    close(f.ln_z, b.z.ln(), 1e-12),
                    "{what}: {} {}",
                    f.ln_z,
                    b.z.ln()
                );
                assert!(
                    close(f.ln_w, b.ln_w, 1e-11),
                    "{what}: {} {}",
                    f.ln_w,
                    b.ln_w
                );
                for (a, e) in f.means.iter().zip(&b.means) {
                    assert!(close(*a, *e, 1e-11), "{what}: {a} {e}");
                }
                // The reported entropy: S/R = ln Z − ⟨ln w⟩ per formula unit.
                if !with_means {
                    let e = exact(&m).unwrap();
                    let s = (b.z.ln() - b.ln_w) / m.formula_units;
                    assert!(close(e.ln_w_per_unit, s, 1e-11), "{what}");
                    let wz = e.weighing.unwrap();
                    assert!(close(wz.ln_z_per_unit * m.formula_units, b.z.ln(), 1e-12));
                }
            }
        }
    }

    /// Every weight 1: ln of the integer count (OEIS A054759: 2970 on the 4x4 torus); and on
    /// a long torus whose Z is beyond the largest double (square ice 3x600, ln Z > 710) the
    /// rescaled float count agrees with the exact integer.
    #[test]
    fn issue13_unit_weights_give_the_integer_count() {
        let m = model(
            SQUARE_ICE,
            "weights:\n  - {bond: h, states: [1, 1]}\n",
            "4x4",
        );
        assert!(m.is_weighted());
        let e = exact(&m).unwrap();
        assert!((e.ln_count - 2970f64.ln()).abs() < 1e-12, "{}", e.ln_count);
        let long = model(
            SQUARE_ICE,
            "weights:\n  - {bond: h, states: [1, 1]}\n",
            "3x600",
        );
        let plain = model(SQUARE_ICE, "", "3x600");
        let e = exact(&long).unwrap();
        let p = exact(&plain).unwrap();
        assert!(p.ln_count > 710.0, "Z beyond the largest double");
        assert!(
            close(e.ln_count, p.ln_count, 1e-12),
            "{} {}",
            e.ln_count,
            p.ln_count
        );
    }

    /// Ideal mixing (closed form): a two-state variable with no rule at occupancy x has
    /// −x ln x − (1−x) ln(1−x) per variable on any cell; at composition x exactly
    /// ln C(N, xN), which tends to the same value.
    #[test]
    fn issue13_ideal_mixing() {
        for x in [0.5f64, 0.3, 0.85] {
            let m = model(
                NO_RULE,
                &format!("occupancy:\n  - {{site: A, state: 1, mean: {x}}}\n"),
                "3x5",
            );
            let e = exact(&m).unwrap();
            let ideal = -x * x.ln() - (1.0 - x) * (1.0 - x).ln();
            assert!(
                close(e.ln_w_per_unit, ideal, 1e-9),
                "{x}: {}",
                e.ln_w_per_unit
            );
            let f = &e.weighing.unwrap().fields[0];
            assert!(
                close(f.field, (x / (1.0 - x)).ln(), 1e-6),
                "the field is ln(x/(1−x))"
            );
            assert!(close(f.achieved, x, 1e-9));
        }
        // ln C(N, N/2) for N = 16 and 100 sites, and its approach to ln 2.
        let binomial =
            |n: u64, k: u64| (0..k).fold(BigUint::from(1u32), |a, i| a * (n - i) / (i + 1));
        let mut last = 0.0;
        for (cells, n) in [("4x4", 16u64), ("10x10", 100)] {
            let m = model(
                NO_RULE,
                "composition:\n  - {sites: [A], state: 1, fraction: 0.5}\n",
                cells,
            );
            let e = exact(&m).unwrap();
            assert_eq!(e.count.as_ref().unwrap(), &binomial(n, n / 2));
            assert!(e.ln_w_per_unit > last && e.ln_w_per_unit < 2f64.ln());
            last = e.ln_w_per_unit;
        }
        assert!((last - 2f64.ln()).abs() < 0.03, "{last}");
        // A fraction the cell cannot hold is refused with the nearest fractions.
        let m = model(
            NO_RULE,
            "composition:\n  - {sites: [A], state: 1, fraction: 0.3}\n",
            "3x3",
        );
        let err = exact(&m).unwrap_err().to_string();
        assert!(
            err.contains("2/9") && err.contains("3/9") && err.contains("multiple of 10"),
            "{err}"
        );
    }

    /// Partially ordered square ice: occupancies 1/2 on both bond families give the plain
    /// count (fields 0 by symmetry); at 0.9 and 0.99 the entropy and means agree with brute
    /// force at the fields found, and the entropy falls toward 0 as the order grows.
    #[test]
    fn issue13_partial_order_on_ice() {
        let occ = |x: f64| {
            format!(
                "occupancy:\n  - {{bond: h, state: 1, mean: {x}}}\n  - {{bond: v, state: 1, mean: {x}}}\n"
            )
        };
        let e = exact(&model(SQUARE_ICE, &occ(0.5), "3x3")).unwrap();
        assert!((e.ln_count - 148f64.ln()).abs() < 1e-9, "OEIS A054759: 148");
        for f in &e.weighing.as_ref().unwrap().fields {
            assert!(f.field.abs() < 1e-9);
        }
        // The library's entry point takes the same route.
        let l = Lattice::from_yaml(&format!("{SQUARE_ICE}\n{}", occ(0.5)), "t.yaml").unwrap();
        let via = l.count_exact(&Cells::periodic(&[3, 3]).unwrap(), &ExactConfig::default());
        assert_eq!(via.unwrap().ln_w_per_unit, e.ln_w_per_unit);
        let mut last = e.ln_w_per_unit;
        for x in [0.7, 0.9, 0.99] {
            let m = model(SQUARE_ICE, &occ(x), "3x3");
            let e = exact(&m).unwrap();
            let w = e.weighing.as_ref().unwrap();
            let h: Vec<f64> = w.fields.iter().map(|f| f.field).collect();
            let b = brute::weighted(&m, &h).unwrap();
            for (j, mean) in b.means.iter().enumerate() {
                assert!(
                    close(mean / 9.0, x, 1e-8),
                    "{x}: brute-force mean {j} {mean}"
                );
            }
            let s = (b.z.ln() - b.ln_w) / 9.0;
            assert!(
                close(e.ln_w_per_unit, s, 1e-10),
                "{x}: {} {s}",
                e.ln_w_per_unit
            );
            assert!(e.ln_w_per_unit < last);
            last = e.ln_w_per_unit;
        }
        assert!(last < 0.1, "{last}");
        // An open ice cell has no arrangement (inward rules at cut sites): refused in words.
        let text = format!("{SQUARE_ICE}\n{}", occ(0.6));
        let l = Lattice::from_yaml(&text, "t.yaml").unwrap();
        let open = Cells::parse("3x3", Some("a,b"), 2).unwrap();
        let err = l.count_exact(&open, &ExactConfig::default()).unwrap_err();
        assert!(
            err.to_string().contains("no arrangement of 3x3 open"),
            "{err}"
        );
    }

    /// Hard squares at a fixed density (4 particles on the 4x4 torus) and square-lattice
    /// dimers with a fixed number of horizontal dimers (4x3 torus): the exact coefficient
    /// against brute-force enumeration, for every whole composition.
    #[test]
    fn issue13_composition_coefficients_match_brute_force() {
        for (yaml, id, cells, n) in [
            (HARD_SQUARES, "sites: [P]", "4x4", 16),
            (SQUARE_DIMERS, "bonds: [h]", "4x3", 12),
        ] {
            let with = |x: f64| {
                model(
                    yaml,
                    &format!("composition:\n  - {{{id}, state: 1, fraction: {x}}}\n"),
                    cells,
                )
            };
            // The polynomial does not depend on the fraction asked for: enumerate once.
            let b = brute::weighted(&with(0.5), &[0.0]).unwrap();
            assert!(b.by_first_mean.iter().filter(|&&c| c > 0).count() >= 3);
            for k in 1..n {
                let e = exact(&with(k as f64 / n as f64)).unwrap();
                assert_eq!(
                    e.count.unwrap().to_string(),
                    b.by_first_mean[k].to_string(),
                    "{cells} k = {k}"
                );
            }
        }
    }
}
