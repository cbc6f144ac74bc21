//! Strips of several widths: every width from the sector that holds its largest
//! eigenvalue, the cross-checks made on the way, what stopped the run early, and the
//! extrapolation to infinite width.
//!
//! # What it computes
//!
//! [`run`] computes the widths of the [`StripConfig`] in the order given and never loses a
//! finished one: a width that exceeds the state budget or the deadline, that does not
//! converge, or that is interrupted ends the run ([`Stopped`], with a rough [`Need`] of
//! states, memory and time for that width from the growth of the finished ones) and the
//! widths done are extrapolated when there are enough of them. [`count`], the counter's
//! entry point, is the same for callers that want every width or an error.
//!
//! # Cross-checks
//!
//! Besides the sector checks of [`super::dominant`] (the full space at the small widths,
//! the neighbouring sectors beyond), the trace of Tᴸ over the full space of the smallest
//! widths is compared with the frontier counter's count of the same periodic
//! `width × L` cell ([`Route::TorusTrace`]): two independent routes to one integer, which
//! checks the column operator itself.
//!
//! # Complexity
//!
//! The widths' own cost (see [`super`]); the checks add at most [`super::dominant`]'s
//! bounded work per width and [`TORUS_CHECKS`] traces over at most [`TORUS_STATES`]
//! states.

use std::time::Instant;

use num_bigint::BigUint;

use super::dominant::Finder;
use super::{Column, Kept, StripConfig, StripResult};
use crate::cluster::{Cells, Cluster};
use crate::context::{Context, Progress};
use crate::counters::extrapolate::{Extrapolation, Scaling, extrapolate_in};
use crate::counters::{Counted, exact};
use crate::crosscheck::{CrossCheck, Route};
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::estimate::{Estimate, FieldValue, Method, Weighing, ln_big};
use crate::model::Model;

/// Torus traces compared with the frontier counter per run.
pub const TORUS_CHECKS: usize = 3;

/// Largest full space (boundary states) whose trace is compared with a torus count.
pub const TORUS_STATES: usize = 256;

/// Strips of several widths and their extrapolation to the infinite crystal.
#[derive(Clone, Debug)]
pub struct StripSeries {
    /// One result per width, in the order asked.
    pub widths: Vec<StripResult>,
    /// The extrapolation W → ∞.
    pub extrapolation: Extrapolation,
    /// Central charge from the 1/W² term (critical models, periodic cylinders of a
    /// two-dimensional crystal only); a diagnostic that assumes the lattice is isotropic
    /// in its cell coordinates.
    pub central_charge: Option<f64>,
    /// Every comparison with a second route made while computing the widths (empty when
    /// the series was extrapolated from widths computed elsewhere, [`from_widths`]).
    pub checks: Vec<CrossCheck>,
    /// The spacing of the widths used (the other widths computed were left out).
    pub step: usize,
}

impl StripSeries {
    /// Whether every cross-check agreed.
    pub fn checks_agree(&self) -> bool {
        self.checks.iter().all(CrossCheck::agrees)
    }
}

/// Roughly what the width that stopped a run would have needed, from the growth of the
/// finished widths of the same residue class (a geometric law in the width).
#[derive(Clone, Debug, PartialEq)]
pub struct Need {
    /// Frontier states at the largest step of a column.
    pub peak_states: f64,
    /// Bytes of memory (index lists and iteration vectors).
    pub bytes: f64,
    /// Seconds on the machine that ran the finished widths.
    pub seconds: f64,
    /// The finished widths the growth was measured on.
    pub from: Vec<usize>,
}

/// The width that ended a run early, and why.
#[derive(Debug)]
pub struct Stopped {
    /// The width that could not be finished.
    pub width: usize,
    /// Why: [`Error::Budget`], [`Error::Deadline`], [`Error::Interrupted`],
    /// [`Error::NotConverged`], or a sector that could not be established.
    pub error: Error,
    /// Roughly what the width would need, when two finished widths show the growth.
    pub need: Option<Need>,
}

/// The outcome of [`run`]: the widths finished, the checks, and their extrapolation.
#[derive(Debug)]
pub struct StripRun {
    /// Every width finished, in the order asked.
    pub widths: Vec<StripResult>,
    /// Every comparison with a second route made.
    pub checks: Vec<CrossCheck>,
    /// Widths computed only to establish the charge sector before the first width asked
    /// (not results).
    pub calibration: Vec<usize>,
    /// The width that ended the run early, if one did.
    pub stopped: Option<Stopped>,
    /// The extrapolation of the finished widths, when there are enough of them.
    pub series: Option<Counted<StripSeries>>,
    /// Why there is no extrapolation.
    pub no_series: Option<String>,
}

/// Widths a stopped run needs before its finished widths are extrapolated.
pub const MIN_PARTIAL_WIDTHS: usize = 3;

/// The largest eigenvalue of one width, from the sector found to hold it (see
/// [`super::dominant`]).
///
/// For a weighted crystal, the entropy of the weighted ensemble with the fields of the
/// imposed means solved at this width ([`StripResult::weighing`]).
pub fn strip(crystal: &Crystal, width: usize, config: &StripConfig) -> Result<StripResult> {
    let mut finder = Finder::new(crystal, config);
    if crystal.is_weighted() {
        super::weighted::width(&mut finder, width, config)
    } else {
        finder.width(width)
    }
}

/// Strips of every width of `config.widths`, extrapolated to the infinite crystal; an error
/// if any width fails (see [`run`] to keep the widths finished before a failure).
///
/// `config.step` is the spacing of the widths (`None`: chosen from the values, see
/// [`from_widths`]); `config.scaling` says how the values approach their limit
/// ([`Scaling::Auto`] decides from the last differences). The context's deadline and
/// interrupt are watched; its observer is told each width ([`Progress::Width`]).
///
/// ```
/// use groundcount::{Lattice, counters::{transfer, Context}};
/// let square_ice = "name: square ice\ndimensions: 2\ncell: {vectors: [[1.0, 0.0], [0.0, 1.0]]}\n\
///     sites: [{id: O, at: [0.0, 0.0]}]\n\
///     bonds: [{id: h, from: O, to: O, shift: [1, 0]}, {id: v, from: O, to: O, shift: [0, 1]}]\n\
///     variables: [{on: bonds, kind: arrow}]\nrules: [{kind: inward, at: sites, allowed: [2]}]\n\
///     formula_unit: {name: H2O, per: sites}\n";
/// let l = Lattice::from_yaml(square_ice, "square-ice.yaml").unwrap();
/// let config = transfer::StripConfig { widths: (2..=7).collect(), ..Default::default() };
/// let s = transfer::count(&l.crystal, &config, &Context::new()).unwrap();
/// // Lieb 1967: W = (4/3)^(3/2) = 1.5396 per H2O
/// let e = &s.estimate;
/// assert!((e.w_per_unit() - (4.0f64 / 3.0).powf(1.5)).abs() < 3.0 * e.sigma_w().unwrap());
/// ```
pub fn count(
    crystal: &Crystal,
    config: &StripConfig,
    context: &Context,
) -> Result<Counted<StripSeries>> {
    let out = run(crystal, config, context)?;
    if let Some(s) = out.stopped {
        return Err(s.error);
    }
    match out.series {
        Some(s) => Ok(s),
        None => Err(Error::Cells(out.no_series.unwrap_or_default())),
    }
}

/// Compute the widths of `config.widths` in order, keeping every finished one; see the
/// module documentation.
///
/// Errors only when the first width fails for a reason other than a budget, a deadline,
/// an interrupt or a non-converging iteration (a lattice that has no strip, say).
pub fn run(crystal: &Crystal, config: &StripConfig, context: &Context) -> Result<StripRun> {
    let config = &config.with_context(context);
    let mut runner = Runner::new(crystal, config);
    let mut stopped = None;
    for &w in &config.widths {
        context.tell(Progress::Width { width: w });
        if let Err(e) = runner.width(w) {
            let budget_like = matches!(
                e,
                Error::Budget { .. }
                    | Error::Deadline { .. }
                    | Error::Interrupted { .. }
                    | Error::NotConverged { .. }
            );
            if runner.results.is_empty() && !budget_like {
                return Err(e);
            }
            stopped = Some(runner.stopped(w, config.step.unwrap_or(1), e));
            break;
        }
    }
    Ok(runner.finish(config.step, config.scaling, stopped))
}

/// Widths computed one at a time, sharing what the checked widths established about the
/// charge sector; [`run`] and the survey's strips use it. Its configuration carries the
/// context's deadline and interrupt ([`StripConfig::with_context`]).
pub(crate) struct Runner<'a> {
    crystal: &'a Crystal,
    config: &'a StripConfig,
    finder: Finder<'a>,
    results: Vec<StripResult>,
    start: Instant,
}

impl<'a> Runner<'a> {
    /// A runner with no width computed.
    pub fn new(crystal: &'a Crystal, config: &'a StripConfig) -> Runner<'a> {
        Runner {
            crystal,
            config,
            finder: Finder::new(crystal, config),
            results: Vec::new(),
            start: Instant::now(),
        }
    }

    /// Compute one more width (widths should grow: the sector of a width is predicted
    /// from the smaller ones).
    pub fn width(&mut self, width: usize) -> Result<&StripResult> {
        let r = if self.crystal.is_weighted() {
            super::weighted::width(&mut self.finder, width, self.config)?
        } else {
            self.finder.width(width)?
        };
        self.results.push(r);
        Ok(self.results.last().expect("just pushed"))
    }

    /// The widths finished so far.
    pub fn results(&self) -> &[StripResult] {
        &self.results
    }

    /// The record of a width that failed with `error`, with what it would have needed.
    pub fn stopped(&self, width: usize, step: usize, error: Error) -> Stopped {
        Stopped {
            width,
            need: need(&self.results, width, step),
            error,
        }
    }

    /// The torus checks, and the extrapolation of the finished widths when there are
    /// enough of them ([`MIN_PARTIAL_WIDTHS`] after a stop, two otherwise).
    pub fn finish(
        mut self,
        step: Option<usize>,
        scaling: Scaling,
        stopped: Option<Stopped>,
    ) -> StripRun {
        let mut checks = std::mem::take(&mut self.finder.checks);
        let calibration = std::mem::take(&mut self.finder.calibration);
        let interrupted = self.config.interrupt.raised();
        if !interrupted {
            checks.extend(torus_checks(self.crystal, &self.results, self.config));
        }
        let enough = if stopped.is_some() {
            MIN_PARTIAL_WIDTHS
        } else {
            2
        };
        let results = self.results;
        let (series, no_series) = if results.len() < enough {
            (
                None,
                Some(format!(
                    "{} {} finished; an extrapolation needs at least {enough}",
                    results.len(),
                    if results.len() == 1 {
                        "width"
                    } else {
                        "widths"
                    }
                )),
            )
        } else {
            match from_widths(self.crystal, results.clone(), step, scaling, self.config) {
                Ok(mut s) => {
                    s.details.checks = checks.clone();
                    s.estimate.seconds = self.start.elapsed().as_secs_f64();
                    (Some(s), None)
                }
                Err(e) => (None, Some(e.to_string())),
            }
        };
        StripRun {
            widths: results,
            checks,
            calibration,
            stopped,
            series,
            no_series,
        }
    }
}

/// Roughly what width `width` would need, from the growth of the finished widths (the
/// last two of its residue class mod 2·step, else mod step, else any two).
fn need(done: &[StripResult], width: usize, step: usize) -> Option<Need> {
    let pick = |period: usize| -> Vec<&StripResult> {
        let mut same: Vec<&StripResult> = done
            .iter()
            .filter(|r| r.width % period == width % period && r.width < width)
            .collect();
        same.sort_by_key(|r| r.width);
        let n = same.len();
        same.split_off(n.saturating_sub(2))
    };
    let step = step.max(1);
    let mut two = pick(2 * step);
    if two.len() < 2 {
        two = pick(step);
    }
    if two.len() < 2 {
        let mut all: Vec<&StripResult> = done.iter().filter(|r| r.width < width).collect();
        all.sort_by_key(|r| r.width);
        let n = all.len();
        two = all.split_off(n.saturating_sub(2));
    }
    let [a, b] = two[..] else {
        return None;
    };
    let span = (b.width - a.width) as f64;
    let ahead = (width - b.width) as f64;
    let grow = |x: f64, y: f64| -> f64 {
        if x <= 0.0 || y <= 0.0 {
            return y;
        }
        y * (y / x).max(1.0).powf(ahead / span)
    };
    let peak = grow(a.peak_states as f64, b.peak_states as f64);
    let transitions = grow(a.transitions as f64, b.transitions as f64);
    Some(Need {
        peak_states: peak,
        bytes: super::memory_estimate(peak, transitions),
        seconds: grow(a.seconds.max(1e-6), b.seconds.max(1e-6)),
        from: vec![a.width, b.width],
    })
}

/// The trace of Tᴸ over the full space of the smallest finished widths against the
/// frontier counter's count of the same periodic cell.
fn torus_checks(
    crystal: &Crystal,
    results: &[StripResult],
    config: &StripConfig,
) -> Vec<CrossCheck> {
    let mut out = Vec::new();
    if crystal.is_weighted() {
        // The trace of Tᴸ is an integer count; a weighted torus is not compared here.
        return out;
    }
    let mut small = config.clone();
    small.max_states = TORUS_STATES;
    small.sectors = super::Sectors::Full;
    for r in results {
        if out.len() >= TORUS_CHECKS {
            break;
        }
        let Ok(layout) = Column::layout(crystal, r.width, &small) else {
            continue;
        };
        let Ok(column) = layout.compiled(Kept::Full, &small) else {
            continue;
        };
        // A cell with no arrangement at all (an odd number of sites for dimers) says
        // little: the next length is tried.
        let first = (column.depth + 1).max(r.width.min(6));
        let Some((length, (trace, frontier))) = (first..first + 2).find_map(|length| {
            torus_pair(crystal, &column, r.width, length, config)
                .filter(|p| p.0.is_finite())
                .map(|p| (length, p))
        }) else {
            continue;
        };
        out.push(CrossCheck {
            method: Method::TransferMatrix,
            route: Route::TorusTrace {
                width: r.width,
                length,
            },
            value: trace,
            reference: frontier,
            tolerance: 0.0,
        });
    }
    out
}

/// (ln Tr Tᴸ, ln count) per formula unit of the periodic `width × length` cell (section
/// `width × depth` in 3D), or `None` when the cell cannot be counted here.
fn torus_pair(
    crystal: &Crystal,
    column: &Column,
    width: usize,
    length: usize,
    config: &StripConfig,
) -> Option<(f64, f64)> {
    let d = crystal.dimensions;
    let across: Vec<usize> = (0..d).filter(|&a| a != config.along).collect();
    let mut counts = [1usize; 3];
    counts[config.along] = length;
    counts[across[0]] = width;
    if let Some(&t) = across.get(1) {
        counts[t] = config.depth.unwrap_or(width);
    }
    let mut periodic = [true; 3];
    periodic[across[0]] = config.periodic;
    if let Some(&t) = across.get(1) {
        periodic[t] = config.periodic;
    }
    let cells = Cells {
        counts,
        periodic,
        dimensions: d,
    };
    let cluster = Cluster::new(crystal, cells).ok()?;
    let model = Model::new(&cluster).ok()?;
    let exact_config = exact::ExactConfig {
        max_states: 1 << 20,
        ..Default::default()
    };
    let context = Context {
        observer: None,
        deadline: config.deadline,
        interrupt: config.interrupt.clone(),
    };
    let frontier = exact::count(&model, &exact_config, &context).ok()?.estimate;
    let trace: BigUint = column.trace_power(length).ok()?;
    let units = frontier.formula_units;
    if units <= 0.0 {
        return None;
    }
    let count = frontier.count?;
    let value = ln_big(&trace) / units;
    // Unequal integers never agree, even where their logarithms round alike.
    let reference = if trace == count {
        value
    } else {
        let r = ln_big(&count) / units;
        if r == value { f64::NAN } else { r }
    };
    Some((value, reference))
}

/// Extrapolate widths already computed (in increasing order) to the infinite crystal.
///
/// With `step` given, every width is used and the families are residues modulo a multiple
/// of it (see [`crate::counters::extrapolate`]). With `None`, the spacing is chosen from
/// the values: every width, in families W mod p, when some period p makes every family
/// smooth; else the multiples of 2 or of 3 (a sublattice structure of period p makes the
/// multiples of p one smooth family) with at least four widths, the smooth one with the
/// smallest uncertainty, its bar widened where the other disagrees beyond its own; else
/// every width with the fallback families (a rough bar, `smooth` false).
pub fn from_widths(
    crystal: &Crystal,
    results: Vec<StripResult>,
    step: Option<usize>,
    scaling: Scaling,
    config: &StripConfig,
) -> Result<Counted<StripSeries>> {
    match step {
        Some(step) => extrapolate_widths(crystal, results, step, scaling, config),
        None => choose_step(crystal, results, scaling, config),
    }
}

/// [`from_widths`] without a given step.
fn choose_step(
    crystal: &Crystal,
    results: Vec<StripResult>,
    scaling: Scaling,
    config: &StripConfig,
) -> Result<Counted<StripSeries>> {
    // Every width, in families W mod p: when every family is smooth this uses all the
    // information, and a family that disagrees widens the bar (dropping it would not).
    let all = extrapolate_widths(crystal, results.clone(), 1, scaling, config);
    if let Ok(s) = &all
        && s.extrapolation.smooth
    {
        return all;
    }
    // Otherwise the multiples of 2 and of 3 (a sublattice period makes them one smooth
    // family); the smooth one with the smallest uncertainty, widened where the other
    // smooth candidates disagree beyond their own uncertainty.
    let mut candidates: Vec<Counted<StripSeries>> = Vec::new();
    for step in 2..=3usize {
        let chosen: Vec<StripResult> = results
            .iter()
            .filter(|r| r.width % step == 0)
            .cloned()
            .collect();
        if chosen.len() < 4 {
            continue;
        }
        if let Ok(s) = extrapolate_widths(crystal, chosen, step, scaling, config)
            && s.extrapolation.smooth
        {
            candidates.push(s);
        }
    }
    let Some(best) = (0..candidates.len()).min_by(|&a, &b| {
        candidates[a]
            .extrapolation
            .uncertainty
            .total_cmp(&candidates[b].extrapolation.uncertainty)
    }) else {
        // Nothing smooth: every width, with the rough bar of the fallback families.
        return all;
    };
    let value = candidates[best].extrapolation.value;
    let widen = candidates
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != best)
        .map(|(_, s)| (s.extrapolation.value - value).abs() - s.extrapolation.uncertainty)
        .fold(0.0, f64::max);
    let mut chosen = candidates.swap_remove(best);
    if widen > chosen.extrapolation.uncertainty {
        chosen.extrapolation.uncertainty = widen;
        chosen.extrapolation.widened = true;
        chosen.estimate.sigma_ln_w = Some(widen);
    }
    Ok(chosen)
}

/// Extrapolate with a given spacing of the widths.
fn extrapolate_widths(
    crystal: &Crystal,
    results: Vec<StripResult>,
    step: usize,
    scaling: Scaling,
    config: &StripConfig,
) -> Result<Counted<StripSeries>> {
    let points: Vec<(usize, f64)> = results.iter().map(|r| (r.width, r.ln_w_per_unit)).collect();
    // Open edges add a 1/W term; a cylinder, or a slab of fixed depth, has 1/W²
    // corrections; square sections of a 3D prism approach the bulk as 1/W³ at leading order.
    let exponent = match (config.periodic, crystal.dimensions, config.depth) {
        (false, _, _) => 1,
        (true, 3, None) => 3,
        _ => 2,
    };
    // Each width's ln λ is converged to the iteration tolerance (relative in λ); a
    // weighted width adds the error bound of its derivatives.
    let errors: Vec<f64> = results
        .iter()
        .map(|r| {
            config.tolerance / r.units_per_column
                + r.weighing.as_ref().map_or(0.0, |w| w.derivative_error)
        })
        .collect();
    let extrapolation = extrapolate_in(&points, &errors, step, scaling, exponent)?;
    let weighing = weighing_of(crystal, &results, &errors, step, scaling, exponent);
    let two_dimensional = crystal.dimensions == 2 && config.periodic;
    let central_charge = extrapolation.a1.filter(|_| two_dimensional).map(|a1| {
        let v = crystal.vectors;
        let area = (v[0][0] * v[1][1] - v[0][1] * v[1][0]).abs();
        let t = v[1 - config.along.min(1)];
        let t2 = t[0] * t[0] + t[1] * t[1];
        let r = &results[results.len() - 1];
        let units_per_cell = r.units_per_column / r.width as f64;
        6.0 * units_per_cell * t2 * a1 / (std::f64::consts::PI * area)
    });
    let estimate = Estimate::infinite(
        Method::TransferMatrix,
        extrapolation.value,
        Some(extrapolation.uncertainty),
        results.iter().map(|r| r.seconds).sum(),
    )
    .with_peak_states(results.iter().map(|r| r.peak_states).max());
    let estimate = match weighing {
        Some(w) => estimate.with_weighing(w),
        None => estimate,
    };
    Ok(Counted::new(
        estimate,
        StripSeries {
            widths: results,
            extrapolation,
            central_charge,
            checks: Vec::new(),
            step,
        },
    ))
}

/// The [`Weighing`] of weighted widths: ln Z per formula unit and every field extrapolated
/// like the entropy (the widest width's value when a series does not extrapolate), and the
/// mean reached at the widest width (every width solves its means to the same targets).
fn weighing_of(
    crystal: &Crystal,
    results: &[StripResult],
    errors: &[f64],
    step: usize,
    scaling: Scaling,
    exponent: i32,
) -> Option<Weighing> {
    let widest = results.iter().max_by_key(|r| r.width)?;
    let w = widest.weighing.as_ref()?;
    let limit = |value: &dyn Fn(&StripResult) -> f64| -> f64 {
        let points: Vec<(usize, f64)> = results.iter().map(|r| (r.width, value(r))).collect();
        extrapolate_in(&points, errors, step, scaling, exponent).map_or(value(widest), |x| x.value)
    };
    let ln_z_per_unit =
        limit(&|r: &StripResult| r.weighing.as_ref().map_or(f64::NAN, |w| w.ln_z_per_unit));
    let fields = crystal
        .means
        .iter()
        .enumerate()
        .map(|(j, m)| FieldValue {
            label: m.label.clone(),
            kind: m.kind,
            target: m.mean,
            field: limit(&|r: &StripResult| r.weighing.as_ref().map_or(f64::NAN, |w| w.fields[j])),
            achieved: w.achieved[j],
            achieved_sigma: None,
        })
        .collect();
    Some(Weighing {
        ln_z_per_unit,
        fields,
    })
}
