//! Every counter that suits a lattice, run within one time budget.
//!
//! # What it does
//!
//! [`survey`] is the main job as a library call: Pauling's estimate; exact counts on periodic
//! cells of growing size (L×L in 2D; n×n×n, (n+1)×n×n, (n+1)×(n+1)×n in 3D) within the first
//! 40 % of the budget; then, for a two-dimensional crystal, transfer matrices on cylinders of
//! growing width extrapolated to infinite width, and for a three-dimensional one a Monte
//! Carlo count of a periodic cell of about a thousand formula units. The result, a
//! [`Survey`], holds every estimate and the diagnostics a report needs (strip widths, the
//! thermodynamic-integration integrand), so that `estimate` and `report` read the same data.
//!
//! # Arguments and returns
//!
//! A crystal and a [`SurveyConfig`]: the budget in seconds, the exact counter's state
//! budget, optional limits that make a run independent of the machine's speed (largest
//! exact cell, fixed strip widths, a fixed Monte Carlo cell and settings), and an optional
//! observer told what is being computed (the library never prints; the caller decides how
//! to show progress). Runs on the caller's rayon pool.
//!
//! # Errors
//!
//! A budget out of range ([`Error::Setting`]), a cell too large to build, or a counter failing for
//! a reason other than its budget. Budgets running out are not errors: the survey stops
//! that method and says why in [`Survey::stopped`] and [`Survey::notes`].

use std::sync::Arc;
use std::time::{Duration, Instant};

use crate::cluster::{Cells, Cluster};
use crate::counters::extrapolate::Scaling;
use crate::counters::sampling::size::{self, SizeFit};
use crate::counters::sampling::{self, SampleConfig, Sampled};
use crate::counters::transfer::{self, StripConfig, StripSeries};
use crate::counters::{bethe, exact, pauling};
use crate::crosscheck::{CrossCheck, Route};
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::estimate::{Estimate, Method};
use crate::model::Model;

/// What the survey is doing, for progress displays.
#[derive(Clone, Debug)]
pub enum Stage {
    /// An exact count of this cell begins.
    Exact(String),
    /// A step of the current exact count: (steps done, steps in all, frontier states).
    ExactStep(usize, usize, usize),
    /// The current exact count ended (counted or stopped).
    ExactDone,
    /// The transfer operator of this width is being built and iterated.
    Strip(usize),
    /// A Monte Carlo count of this cell with this many variables begins.
    Sampling(String, usize),
}

/// A callback told every [`Stage`].
#[derive(Clone)]
pub struct Observer(pub Arc<dyn Fn(Stage) + Send + Sync>);

impl std::fmt::Debug for Observer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Observer")
    }
}

/// Settings of a survey.
#[derive(Clone, Debug)]
pub struct SurveyConfig {
    /// Time budget in seconds for everything.
    pub budget: f64,
    /// Largest number of partial states an exact count may hold.
    pub max_states: usize,
    /// Count no exact cell with more formula units than this.
    pub max_exact_units: Option<f64>,
    /// Strip widths to compute (2D); `None` grows the width from 2 until the budget ends.
    pub widths: Option<Vec<usize>>,
    /// The Monte Carlo cell (3D); `None` samples up to four cubes, the largest of about
    /// 1000 formula units, and extrapolates them to the infinite crystal.
    pub sample_cells: Option<Cells>,
    /// Monte Carlo settings.
    pub sample: SampleConfig,
    /// Told what is being computed.
    pub observer: Option<Observer>,
    /// Once raised, the survey stops what it is doing and returns what it has.
    pub interrupt: crate::context::Interrupt,
}

impl Default for SurveyConfig {
    fn default() -> Self {
        SurveyConfig {
            budget: 20.0,
            max_states: exact::DEFAULT_MAX_STATES,
            max_exact_units: None,
            widths: None,
            sample_cells: None,
            sample: SampleConfig::default(),
            observer: None,
            interrupt: Default::default(),
        }
    }
}

/// A Monte Carlo run with the cell it sampled.
#[derive(Clone, Debug)]
pub struct SampledCell {
    /// The cell, as written ("10x10x10 periodic").
    pub cells: String,
    /// The run.
    pub sampled: Sampled,
}

/// The sampled cells in words: "3x3x3, 4x4x4 and 5x5x5 periodic".
pub fn cell_list(cells: &[SampledCell]) -> String {
    let names: Vec<&str> = cells
        .iter()
        .map(|c| c.cells.strip_suffix(" periodic").unwrap_or(&c.cells))
        .collect();
    let joined = match names.split_last() {
        Some((last, rest)) if !rest.is_empty() => format!("{} and {last}", rest.join(", ")),
        _ => names.join(""),
    };
    let all_periodic = cells.iter().all(|c| c.cells.ends_with(" periodic"));
    if all_periodic {
        format!("{joined} periodic")
    } else {
        joined
    }
}

/// Monte Carlo values of several cells extrapolated to the infinite crystal.
#[derive(Clone, Debug)]
pub struct SizeExtrapolation {
    /// The fit s(N) = s∞ + a/N (+ b ln N/N).
    pub fit: SizeFit,
    /// s∞ as an estimate of the infinite crystal.
    pub estimate: Estimate,
}

/// Every estimate a survey made, with its diagnostics.
#[derive(Clone, Debug)]
pub struct Survey {
    /// Pauling's independent-constraint estimate.
    pub pauling: Estimate,
    /// The Bethe approximation (belief propagation), when its messages settled.
    pub bethe: Option<Estimate>,
    /// Exact counts, smallest cell first.
    pub exact: Vec<Estimate>,
    /// Why the exact counts stopped (empty when they ran to the requested limit).
    pub stopped: String,
    /// Transfer matrices on strips, when they ran and extrapolated.
    pub strips: Option<StripSeries>,
    /// The Monte Carlo count of the largest cell sampled, when it ran.
    pub sampled: Option<SampledCell>,
    /// Every cell sampled, smallest first (the largest is also `sampled`).
    pub sampled_sizes: Vec<SampledCell>,
    /// The Monte Carlo values extrapolated to the infinite crystal (two or more cells).
    pub extrapolated: Option<SizeExtrapolation>,
    /// Cited values compared with a second route computed in the same run.
    pub checks: Vec<crate::crosscheck::CrossCheck>,
    /// Plain sentences on what ran, what stopped and why.
    pub notes: Vec<String>,
    /// The budget in seconds.
    pub budget: f64,
}

impl Survey {
    /// Every estimate, Pauling and Bethe first, then exact counts, then the
    /// infinite-crystal methods.
    pub fn estimates(&self) -> Vec<Estimate> {
        let mut v = vec![self.pauling.clone()];
        v.extend(self.bethe.iter().cloned());
        v.extend(self.exact.iter().cloned());
        if let Some(s) = &self.strips {
            v.push(s.estimate.clone());
        }
        v.extend(
            self.sampled_sizes
                .iter()
                .map(|s| s.sampled.estimate.clone()),
        );
        if let Some(x) = &self.extrapolated {
            v.push(x.estimate.clone());
        }
        v
    }

    /// The estimate a user should cite: the transfer-matrix extrapolation, else the Monte
    /// Carlo extrapolation to the infinite crystal, else the Monte Carlo count of the largest
    /// cell, else the largest exact cell with an arrangement, else Pauling's estimate.
    pub fn best(&self) -> &Estimate {
        if let Some(s) = &self.strips {
            return &s.estimate;
        }
        if let Some(x) = &self.extrapolated {
            return &x.estimate;
        }
        if let Some(s) = &self.sampled {
            return &s.sampled.estimate;
        }
        self.largest_exact().unwrap_or(&self.pauling)
    }

    /// The largest exact cell that has at least one arrangement (cells of the wrong parity,
    /// such as odd tori for dimers, have none and say nothing about W).
    pub fn largest_exact(&self) -> Option<&Estimate> {
        self.exact
            .iter()
            .rev()
            .find(|e| e.ln_w_per_unit.is_finite())
    }
}

/// Periodic cells of growing size: L×L in 2D; in 3D n×n×n, then (n+1)×n×n, (n+1)×(n+1)×n.
pub fn cell_sequence(dimensions: usize) -> impl Iterator<Item = Cells> {
    (1usize..).flat_map(move |n| {
        let shapes: Vec<[usize; 3]> = match dimensions {
            1 => vec![[n, 1, 1]],
            2 => vec![[n, n, 1]],
            _ => vec![[n, n, n], [n + 1, n, n], [n + 1, n + 1, n]],
        };
        shapes.into_iter().map(move |counts| Cells {
            counts,
            periodic: [true; 3],
            dimensions,
        })
    })
}

/// Run every counter that suits the crystal; see the module documentation.
pub fn survey(c: &Crystal, config: &SurveyConfig) -> Result<Survey> {
    if !(config.budget.is_finite() && config.budget > 0.0 && config.budget <= 1e7) {
        return Err(Error::Setting(format!(
            "the budget must be a positive number of seconds (at most 1e7), found {}",
            config.budget
        )));
    }
    let tell = |s: Stage| {
        if let Some(o) = &config.observer {
            (o.0)(s)
        }
    };
    let pauling = pauling::estimate(c)?;
    let mut notes = Vec::new();
    let bethe = match bethe::estimate(c) {
        Ok(b) => Some(b),
        Err(e) => {
            notes.push(format!("Bethe approximation left out: {e}"));
            None
        }
    };
    let start = Instant::now();
    // Exact counts get the first 40 % of the budget; the rest goes to strips (2D) or
    // sampling (3D).
    let deadline = start + Duration::from_secs_f64(0.4 * config.budget);
    let end = start + Duration::from_secs_f64(config.budget);
    let mut exact_counts = Vec::new();
    let mut stopped = String::new();
    let largest = 1usize << 20; // never build absurdly large clusters
    let per_cell = c.formula_unit.per_cell(c);
    for cells in cell_sequence(c.dimensions) {
        if config
            .max_exact_units
            .is_some_and(|m| cells.total() as f64 * per_cell > m)
        {
            break;
        }
        if cells.total() * c.sites.len().max(c.bonds.len()) > largest {
            stopped = "cell size limit reached".into();
            break;
        }
        let cluster = Cluster::new(c, cells.clone())?;
        let model = Model::new(&cluster)?;
        tell(Stage::Exact(cells.to_string()));
        let progress = config.observer.as_ref().map(|o| {
            let o = o.clone();
            exact::ProgressHook(Arc::new(move |done, all, states| {
                (o.0)(Stage::ExactStep(done, all, states))
            }))
        });
        let exact_config = exact::ExactConfig {
            max_states: config.max_states,
            deadline: Some(deadline),
            progress,
            interrupt: config.interrupt.clone(),
        };
        let outcome = exact::count(&model, &exact_config);
        tell(Stage::ExactDone);
        match outcome {
            Ok(e) => exact_counts.push(e),
            Err(Error::Deadline { cells }) => {
                stopped = format!(
                    "the exact counts' share (40 %) of the {} s budget ran out while counting {cells}",
                    config.budget
                );
                break;
            }
            Err(Error::Budget { cells, .. }) => {
                stopped = format!(
                    "{cells} needs more than {} frontier states",
                    config.max_states
                );
                break;
            }
            Err(e) => return Err(e),
        }
        if Instant::now() > deadline {
            stopped = format!(
                "the exact counts' share of the {} s budget is spent",
                config.budget
            );
            break;
        }
    }
    let mut strips = None;
    let mut checks = Vec::new();
    let mut sampled_sizes = Vec::new();
    let mut extrapolated = None;
    match c.dimensions {
        2 => {
            strips = strip_series(
                c,
                end,
                config,
                &exact_counts,
                &tell,
                &mut notes,
                &mut checks,
            )?
        }
        3 => {
            (sampled_sizes, extrapolated) = monte_carlo(c, config, end, &tell, &mut notes)?;
        }
        _ => {}
    }
    let sampled = sampled_sizes.last().cloned();
    Ok(Survey {
        pauling,
        bethe,
        exact: exact_counts,
        stopped,
        strips,
        sampled,
        sampled_sizes,
        extrapolated,
        checks,
        notes,
        budget: config.budget,
    })
}

/// Strips of growing (or given) width until the budget ends, extrapolated to infinite width;
/// the cross-checks made on the way, and the bounds the exact torus counts put on the
/// widths, go to `checks` (condensed: every failure, and the largest width of each route
/// that agreed).
fn strip_series(
    c: &Crystal,
    end: Instant,
    config: &SurveyConfig,
    exact_counts: &[Estimate],
    tell: &dyn Fn(Stage),
    notes: &mut Vec<String>,
    checks: &mut Vec<CrossCheck>,
) -> Result<Option<StripSeries>> {
    let strip_config = StripConfig {
        deadline: Some(end),
        interrupt: config.interrupt.clone(),
        ..StripConfig::default()
    };
    let widths: Box<dyn Iterator<Item = usize>> = match &config.widths {
        Some(w) => Box::new(w.clone().into_iter()),
        None => Box::new(2..),
    };
    let mut runner = transfer::Runner::new(c, &strip_config);
    for width in widths {
        tell(Stage::Strip(width));
        match runner.width(width) {
            Ok(_) => {}
            Err(Error::Deadline { .. }) => {
                if config.widths.is_some() {
                    notes.push(format!(
                        "transfer matrix: the {} s budget ran out at width {width}",
                        config.budget
                    ));
                }
                break;
            }
            Err(Error::Interrupted { .. }) => {
                notes.push(format!(
                    "transfer matrix: interrupted at width {width}; the widths before it are kept"
                ));
                break;
            }
            Err(e) => {
                notes.push(format!("transfer matrix: stopped at width {width}: {e}"));
                break;
            }
        }
        if Instant::now() > end || config.interrupt.raised() {
            break;
        }
    }
    let done = runner.results().len();
    let run = runner.finish(None, Scaling::Auto, None);
    let mut all = run.checks.clone();
    all.extend(torus_bounds(&run.widths, exact_counts));
    checks.extend(condensed(&all));
    if let Some(failed) = all.iter().find(|x| !x.agrees()) {
        notes.push(format!(
            "transfer matrix: a cross-check FAILED ({}: ln W per unit {} against {}); its value must not be cited",
            route_words(&failed.route),
            failed.value,
            failed.reference
        ));
    }
    if done < 4 {
        notes.push(format!(
            "transfer matrix: only {done} widths within the budget; raise the budget or run `groundcount strip`"
        ));
        return Ok(None);
    }
    match run.series {
        Some(series) => {
            let first = series.widths.first().map_or(0, |r| r.width);
            let largest = series.widths.last().map_or(0, |r| r.width);
            let step = series.step;
            notes.push(format!(
                "transfer matrix: cylinders of width {first}..{largest}{} along a, extrapolated to infinite width \
                 ({}){}; `groundcount strip` shows every width",
                if step > 1 { format!(" in steps of {step} (the period with the smallest spread)") } else { String::new() },
                match series.extrapolation.scaling {
                    Scaling::Gapped => {
                        "gapped: Aitken's Δ² on the last widths of each family, error from the window before".to_string()
                    }
                    _ => format!(
                        "critical: fits in 1/W², error from their spread over {} fits",
                        series.extrapolation.fits.len()
                    ),
                },
                sector_words(&series.widths)
            ));
            Ok(Some(series))
        }
        None => {
            let why = run
                .no_series
                .unwrap_or_else(|| "too few widths".to_string());
            notes.push(format!("transfer matrix: no extrapolation ({why})"));
            Ok(None)
        }
    }
}

/// How the kept charge sectors were established, in words ("" when no sector was kept).
fn sector_words(widths: &[transfer::StripResult]) -> String {
    use transfer::SectorBasis;
    let of = |f: &dyn Fn(&SectorBasis) -> bool| -> Vec<usize> {
        widths
            .iter()
            .filter(|r| f(&r.basis))
            .map(|r| r.width)
            .collect()
    };
    let full = of(&|b| *b == SectorBasis::FullSpace);
    let local = of(&|b| *b == SectorBasis::LocalMaximum);
    let predicted = of(&|b| matches!(b, SectorBasis::Predicted { .. }));
    if full.is_empty() && local.is_empty() && predicted.is_empty() {
        return String::new();
    }
    let list = |v: &[usize]| match v {
        [] => String::new(),
        [a] => a.to_string(),
        [a, .., b] => format!("{a}..{b}"),
    };
    let mut parts = Vec::new();
    if !full.is_empty() {
        parts.push(format!(
            "checked against the full space at widths {}",
            list(&full)
        ));
    }
    if !local.is_empty() {
        parts.push(format!(
            "against the neighbouring charges at {}",
            list(&local)
        ));
    }
    if !predicted.is_empty() {
        parts.push(format!("predicted from those at {}", list(&predicted)));
    }
    format!("; the charge sector of each width {}", parts.join(", "))
}

/// The route of a check in words.
fn route_words(route: &Route) -> String {
    match route {
        Route::FullSpace { width } => {
            format!("the kept sector against the full space at width {width}")
        }
        Route::NeighbourSectors { width } => {
            format!("the kept sector against its neighbouring charges at width {width}")
        }
        Route::TorusTrace { width, length } => {
            format!(
                "the trace of T^{length} against the frontier count of the {width}×{length} torus"
            )
        }
        Route::TorusBound { width, length } => format!(
            "the width-{width} eigenvalue against the bound from the exact {width}×{length} torus count"
        ),
        other => format!("{other:?}"),
    }
}

/// The lower bounds the exact counts of periodic L×L cells put on the largest eigenvalue
/// of the width-L cylinder along a: Z = Tr T^L ≤ N λ^L, N the assignments of the boundary
/// fields (a cell longer than the deepest constraint along the strip, so that Z is the
/// trace).
fn torus_bounds(widths: &[transfer::StripResult], exact_counts: &[Estimate]) -> Vec<CrossCheck> {
    let mut out = Vec::new();
    for e in exact_counts {
        let Some(size) = e.cells.as_deref().and_then(square_side) else {
            continue;
        };
        let Some(r) = widths.iter().find(|r| r.width == size) else {
            continue;
        };
        if size <= r.depth || !e.ln_count.is_finite() {
            continue;
        }
        let bound = (e.ln_count - r.ln_boundary_space) / size as f64;
        out.push(CrossCheck {
            method: Method::TransferMatrix,
            route: Route::TorusBound {
                width: size,
                length: size,
            },
            value: r.ln_w_per_unit,
            reference: bound / r.units_per_column,
            tolerance: 1e-9 * r.ln_w_per_unit.abs().max(1.0),
        });
    }
    out
}

/// L for a cell written "LxL periodic" (two dimensions).
fn square_side(cells: &str) -> Option<usize> {
    let dims = cells.strip_suffix(" periodic")?;
    let (a, b) = dims.split_once('x')?;
    let (a, b): (usize, usize) = (a.parse().ok()?, b.parse().ok()?);
    (a == b).then_some(a)
}

/// Every failed check, and of each route the agreeing check of the largest width.
fn condensed(all: &[CrossCheck]) -> Vec<CrossCheck> {
    let kind = |r: &Route| std::mem::discriminant(r);
    let width = |r: &Route| match r {
        Route::FullSpace { width }
        | Route::NeighbourSectors { width }
        | Route::TorusTrace { width, .. }
        | Route::TorusBound { width, .. } => *width,
        _ => 0,
    };
    let mut out: Vec<CrossCheck> = all.iter().filter(|c| !c.agrees()).cloned().collect();
    let mut kinds: Vec<_> = all.iter().map(|c| kind(&c.route)).collect();
    kinds.dedup();
    let mut seen = Vec::new();
    for k in kinds {
        if seen.contains(&k) {
            continue;
        }
        seen.push(k);
        if let Some(c) = all
            .iter()
            .filter(|c| kind(&c.route) == k && c.agrees())
            .max_by_key(|c| width(&c.route))
        {
            out.push(c.clone());
        }
    }
    out
}

/// Monte Carlo estimates: on the given cell; or on up to four cubes n − 3 … n (at least
/// 2 cells across), the largest of about a thousand formula units, extrapolated to the
/// infinite crystal. The smallest cube runs first with the configured settings; when the
/// rest of the budget allows, the replicas (up to 8 times) and then the sweeps (up to
/// 20 000) of every cube are raised in proportion and the smallest is run again with them,
/// so that all cubes share one setting. Cubes that would not fit are left out.
fn monte_carlo(
    c: &Crystal,
    config: &SurveyConfig,
    end: Instant,
    tell: &dyn Fn(Stage),
    notes: &mut Vec<String>,
) -> Result<(Vec<SampledCell>, Option<SizeExtrapolation>)> {
    let cubes: Vec<Cells> = match &config.sample_cells {
        Some(cells) => vec![cells.clone()],
        None => {
            let per_cell = c.formula_unit.per_cell(c).max(1e-9);
            let n = ((1000.0 / per_cell).cbrt().round() as usize).max(2);
            (n.saturating_sub(3).max(2)..=n)
                .map(|k| Cells::cube(k, c.dimensions))
                .collect()
        }
    };
    let run = |cells: &Cells, sample: &SampleConfig| -> Result<SampledCell> {
        let cluster = Cluster::new(c, cells.clone())?;
        let model = Model::new(&cluster)?;
        tell(Stage::Sampling(cells.to_string(), model.variables.len()));
        Ok(SampledCell {
            cells: cells.to_string(),
            sampled: sampling::sample(&model, sample)?,
        })
    };
    let mut sample = config.sample.clone();
    let first = match run(&cubes[0], &sample) {
        Ok(s) => s,
        Err(e) => {
            notes.push(format!("Monte Carlo: not run ({e})"));
            return Ok((Vec::new(), None));
        }
    };
    let units = |cells: &Cells| cells.total() as f64 * c.formula_unit.per_cell(c);
    let n1 = units(&cubes[0]);
    // Seconds per formula unit and sweep, from the first cube.
    let rate = first.sampled.estimate.seconds.max(1e-6) / (n1 * sample.sweeps as f64);
    let left = end.saturating_duration_since(Instant::now()).as_secs_f64();
    let mut chosen: Vec<Cells> = vec![cubes[0].clone()];
    let mut cost = 0.0;
    for cells in &cubes[1..] {
        let t = rate * units(cells) * sample.sweeps as f64;
        if cost + t > 0.8 * left {
            break;
        }
        cost += t;
        chosen.push(cells.clone());
    }
    let all_units: f64 = chosen.iter().map(units).sum();
    let base = (sample.replicas, sample.sweeps);
    // How many times the configured run every chosen cube can afford.
    let factor = (0.8 * left / (rate * all_units * sample.sweeps as f64)).floor();
    let mut results = Vec::new();
    if chosen.len() > 1 && factor >= 2.0 {
        // More replicas first (up to 8 times as many: their spread is the error bar, and
        // 8 replicas estimate it only to ±25 %), then longer runs (up to 20 000 sweeps).
        let factor = factor as usize;
        let more = factor.min(8);
        sample.replicas = base.0 * more;
        sample.sweeps = (base.1 * (factor / more)).min(20_000);
        sample.equilibration = sample.sweeps / 4;
        for cells in &chosen {
            results.push(run(cells, &sample)?);
        }
    } else {
        results.push(first);
        for cells in &chosen[1..] {
            results.push(run(cells, &sample)?);
        }
    }
    let s0 = &results[0].sampled;
    notes.push(format!(
        "Monte Carlo: thermodynamic integration on {}, seed {}, {} replicas × {} sweeps per node{}; \
         `groundcount sample` runs larger cells and longer",
        cell_list(&results),
        s0.seed,
        s0.replicas,
        sample.sweeps,
        if (sample.replicas, sample.sweeps) != base {
            " (raised from the default to fill the budget)"
        } else {
            ""
        }
    ));
    let extrapolated = if results.len() >= 2 {
        let points: Vec<size::SizePoint> = results
            .iter()
            .map(|r| size::SizePoint {
                units: r.sampled.estimate.formula_units,
                value: r.sampled.estimate.ln_w_per_unit,
                sigma: r.sampled.estimate.sigma_ln_w.unwrap_or(0.0),
            })
            .collect();
        match size::extrapolate(&points) {
            Ok(fit) => {
                notes.push(format!(
                    "Monte Carlo: {} cells extrapolated to the infinite crystal by the weighted fit {} (χ² = {:.3} for {} degrees of freedom)",
                    results.len(),
                    fit.form(),
                    fit.chi2,
                    fit.dof
                ));
                let estimate =
                    fit.estimate(results.iter().map(|r| r.sampled.estimate.seconds).sum());
                Some(SizeExtrapolation { fit, estimate })
            }
            Err(e) => {
                notes.push(format!("Monte Carlo: no extrapolation ({e})"));
                None
            }
        }
    } else {
        notes.push(
            "Monte Carlo: one cell only, not extrapolated; a finite torus gives a larger W than the infinite crystal"
                .into(),
        );
        None
    };
    Ok((results, extrapolated))
}
