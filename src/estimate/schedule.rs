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
//! that method and says why in [`Survey::stopped`] and [`Survey::notes`]. Nor is an
//! interrupt ([`SurveyConfig::interrupt`]): the exact counts stop between steps, stages not
//! yet begun are skipped, and the survey returns what it finished with
//! [`Survey::interrupted`] set.
//!
//! This file is the schedule: what runs, in which order, within the time budget.

use std::time::{Duration, Instant};

use super::{SampledCell, SizeExtrapolation, Survey, SurveyConfig, cell_list};
use crate::cluster::{Cells, Cluster};
use crate::context::{Context, Progress};
use crate::counters::bethe::BetheConfig;
use crate::counters::extrapolate::Scaling;
use crate::counters::sampling::size;
use crate::counters::sampling::{self, SampleConfig};
use crate::counters::transfer::{self, StripConfig, StripSeries};
use crate::counters::{Counted, bethe, exact, pauling};
use crate::crosscheck::{CrossCheck, Route};
use crate::crystal::Crystal;
use crate::crystal::MeanKind;
use crate::error::{Error, Result};
use crate::estimate::{Estimate, ExactStop, Hint, Method, Note, SectorWidths, Stage};
use crate::model::Model;

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
pub fn survey(c: &Crystal, config: &SurveyConfig, context: &Context) -> Result<Survey> {
    if !(config.budget.is_finite() && config.budget > 0.0 && config.budget <= 1e7) {
        return Err(Error::Setting(format!(
            "the budget must be a positive number of seconds (at most 1e7), found {}",
            config.budget
        )));
    }
    // A diluted crystal: counts averaged over realisations of its vacancies.
    if c.is_diluted() {
        return super::dilution::survey(c, config, context);
    }
    let tell = |p: Progress| context.tell(p);
    let pauling = pauling::count(c, &(), context)?.estimate;
    let mut notes = Vec::new();
    let bethe = match bethe::count(c, &BetheConfig::default(), context) {
        Ok(b) => Some(b.estimate),
        Err(e) => {
            notes.push(Note::BetheLeftOut {
                error: e.to_string(),
            });
            None
        }
    };
    let start = Instant::now();
    // Exact counts get the first 40 % of the budget; the rest goes to strips (2D) or
    // sampling (3D).
    let deadline = start + Duration::from_secs_f64(0.4 * config.budget);
    let end = start + Duration::from_secs_f64(config.budget);
    let mut exact_counts = Vec::new();
    let mut stopped = None;
    let largest = 1usize << 20; // never build absurdly large clusters
    let per_cell = c.formula_unit.per_cell(c);
    let mut interrupted = false;
    for cells in cell_sequence(c.dimensions) {
        if context.interrupt.raised() {
            interrupted = true;
            stopped = Some(ExactStop::Interrupted);
            break;
        }
        if config
            .max_exact_units
            .is_some_and(|m| cells.total() as f64 * per_cell > m)
        {
            break;
        }
        if cells.total() * c.sites.len().max(c.bonds.len()) > largest {
            stopped = Some(ExactStop::CellSizeLimit);
            break;
        }
        let cluster = Cluster::new(c, cells.clone())?;
        let model = Model::new(&cluster)?;
        // A cell that cannot hold a fixed composition (x·N not whole) is skipped.
        if !crate::counters::exact_weighted::composition_whole(&model) {
            continue;
        }
        tell(Progress::Counting {
            cells: cells.to_string(),
        });
        let exact_config = exact::ExactConfig {
            max_states: config.max_states,
            ..Default::default()
        };
        let outcome = exact::count(&model, &exact_config, &context.until(deadline));
        tell(Progress::Counted);
        match outcome {
            Ok(e) => {
                exact_counts.push((cells.clone(), e.estimate));
                // No constraint left on a cell too large for repeats: every variable is free
                // (no rule, or rules that allow everything), and every larger cell gives the
                // same W per formula unit.
                // (Not so at a fixed composition: ln C(N, xN)/N still grows with N.)
                let canonical = model.means.iter().any(|m| m.kind == MeanKind::Composition);
                if !model.has_repeats && model.constraints.is_empty() && !canonical {
                    stopped = Some(ExactStop::NothingRestricted);
                    break;
                }
            }
            Err(Error::Deadline { cells }) => {
                stopped = Some(ExactStop::Deadline {
                    budget: config.budget,
                    cells,
                });
                break;
            }
            Err(Error::Budget { cells, .. }) => {
                stopped = Some(ExactStop::States {
                    cells,
                    max_states: config.max_states,
                });
                break;
            }
            Err(Error::Unweighted { method }) => {
                notes.push(Note::Unweighted { method });
                break;
            }
            Err(Error::Interrupted { .. }) => {
                interrupted = true;
                stopped = Some(ExactStop::InterruptedWhile {
                    cells: cells.to_string(),
                });
                break;
            }
            Err(e) => return Err(e),
        }
        if Instant::now() > deadline {
            stopped = Some(ExactStop::BudgetSpent {
                budget: config.budget,
            });
            break;
        }
    }
    let mut strips = None;
    let mut checks = Vec::new();
    let mut sampled_sizes = Vec::new();
    let mut extrapolated = None;
    // Stage boundary: an interrupt skips what has not begun; a stage that stops on it
    // keeps what it finished.
    let stage = match c.dimensions {
        2 => Some(Stage::TransferMatrix),
        3 => Some(Stage::MonteCarlo),
        _ => None,
    };
    if interrupted || context.interrupt.raised() {
        interrupted = true;
        if let Some(stage) = stage {
            notes.push(Note::StageNotRun { stage });
        }
    } else {
        let outcome = match c.dimensions {
            2 => strip_series(
                c,
                config,
                &context.until(end),
                &exact_counts,
                &mut notes,
                &mut checks,
            )
            .map(|s| strips = s),
            3 => monte_carlo(
                c,
                config,
                context,
                end,
                &exact_counts,
                &mut notes,
                &mut checks,
            )
            .map(|(sizes, x)| (sampled_sizes, extrapolated) = (sizes, x)),
            _ => Ok(()),
        };
        match outcome {
            Ok(()) => {}
            Err(Error::Interrupted { .. }) => {
                if let Some(stage) = stage {
                    notes.push(Note::StageInterrupted { stage });
                }
                interrupted = true;
            }
            Err(Error::Unweighted { method }) => notes.push(Note::Unweighted { method }),
            Err(e) => return Err(e),
        }
        interrupted |= context.interrupt.raised();
    }
    if interrupted {
        notes.push(Note::Interrupted);
    }
    let sampled = sampled_sizes.last().cloned();
    Ok(Survey {
        pauling,
        bethe,
        exact: exact_counts.into_iter().map(|(_, e)| e).collect(),
        stopped,
        strips,
        sampled,
        sampled_sizes,
        extrapolated,
        checks,
        notes,
        budget: config.budget,
        interrupted,
    })
}

/// Strips of growing (or given) width until the budget ends, extrapolated to infinite width;
/// the cross-checks made on the way, and the bounds the exact torus counts put on the
/// widths, go to `checks` (condensed: every failure, and the largest width of each route
/// that agreed).
fn strip_series(
    c: &Crystal,
    config: &SurveyConfig,
    context: &Context,
    exact_counts: &[(Cells, Estimate)],
    notes: &mut Vec<Note>,
    checks: &mut Vec<CrossCheck>,
) -> Result<Option<Counted<StripSeries>>> {
    // transfer::run refuses a weighted crystal but the Runner used here does not check:
    // refuse here too until the strips weigh, or they would count every arrangement once.
    crate::counters::refuse_weighted(c.is_weighted(), "the transfer matrix")?;
    let strip_config = StripConfig::default().with_context(context);
    let widths: Box<dyn Iterator<Item = usize>> = match &config.widths {
        Some(w) => Box::new(w.clone().into_iter()),
        None => Box::new(2..),
    };
    let mut runner = transfer::Runner::new(c, &strip_config);
    for width in widths {
        context.tell(Progress::Width { width });
        match runner.width(width) {
            Ok(_) => {}
            Err(Error::Deadline { .. }) => {
                if config.widths.is_some() {
                    notes.push(Note::StripBudgetRanOut {
                        budget: config.budget,
                        width,
                    });
                }
                break;
            }
            Err(Error::Interrupted { .. }) => {
                notes.push(Note::StripInterrupted { width });
                break;
            }
            Err(e) => {
                notes.push(Note::StripStopped {
                    width,
                    error: e.to_string(),
                });
                break;
            }
        }
        if context.should_stop() {
            break;
        }
    }
    let done = runner.results().len();
    let run = runner.finish(None, Scaling::Auto, None);
    let mut all = run.checks.clone();
    all.extend(torus_bounds(&run.widths, exact_counts));
    checks.extend(condensed(&all));
    if let Some(failed) = all.iter().find(|x| !x.agrees()) {
        notes.push(Note::StripCheckFailed {
            check: failed.clone(),
        });
    }
    if done < 4 {
        notes.push(Note::StripTooFewWidths {
            done,
            hint: Hint::RaiseBudgetOrStrip,
        });
        return Ok(None);
    }
    match run.series {
        Some(series) => {
            let first = series.widths.first().map_or(0, |r| r.width);
            let largest = series.widths.last().map_or(0, |r| r.width);
            let step = series.step;
            notes.push(Note::StripSeries {
                first,
                largest,
                step,
                scaling: series.extrapolation.scaling,
                fits: series.extrapolation.fits.len(),
                sectors: sector_widths(&series.widths),
                hint: Hint::StripShowsEveryWidth,
            });
            Ok(Some(series))
        }
        None => {
            let why = run
                .no_series
                .unwrap_or_else(|| "too few widths".to_string());
            notes.push(Note::StripNoExtrapolation { why });
            Ok(None)
        }
    }
}

/// The widths whose charge sector was established each way.
fn sector_widths(widths: &[transfer::StripResult]) -> SectorWidths {
    use transfer::SectorBasis;
    let of = |f: &dyn Fn(&SectorBasis) -> bool| -> Vec<usize> {
        widths
            .iter()
            .filter(|r| f(&r.basis))
            .map(|r| r.width)
            .collect()
    };
    SectorWidths {
        full_space: of(&|b| *b == SectorBasis::FullSpace),
        neighbours: of(&|b| *b == SectorBasis::LocalMaximum),
        predicted: of(&|b| matches!(b, SectorBasis::Predicted { .. })),
    }
}

/// The lower bounds the exact counts of periodic L×L cells put on the largest eigenvalue
/// of the width-L cylinder along a: Z = Tr T^L ≤ N λ^L, N the assignments of the boundary
/// fields (a cell longer than the deepest constraint along the strip, so that Z is the
/// trace).
fn torus_bounds(
    widths: &[transfer::StripResult],
    exact_counts: &[(Cells, Estimate)],
) -> Vec<CrossCheck> {
    let mut out = Vec::new();
    for (cells, e) in exact_counts {
        let Some(size) = square_side(cells) else {
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

/// L for a periodic L×L cell (two dimensions).
fn square_side(cells: &Cells) -> Option<usize> {
    let [a, b, c] = cells.counts;
    (a == b && c == 1 && cells.periodic[..2] == [true, true]).then_some(a)
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

/// Formula units of the smallest cell the Monte Carlo samples (about a hundred).
pub const SAMPLE_MIN_UNITS: f64 = 96.0;

/// Most cells the Monte Carlo extrapolation samples.
pub const SAMPLE_MAX_CELLS: usize = 5;

/// Formula units above which the Monte Carlo takes no larger cell once four cells lie
/// below; a longer budget goes into replicas and sweeps instead. Measured on ice Ih
/// (2026-12-04, two cores): `estimate --budget 3600` without the cap took cubes up to
/// 23 328 molecules, spent 97 % of its time on the largest, whose equilibration check
/// failed once, and gave σ(W∞)·√(CPU s) = 2.4e-3; `sample` on four cells of 128 to 2000
/// molecules gave 9.1e-4 (docs/performance.md).
pub const SAMPLE_PRECISION_UNITS: f64 = 2500.0;

/// The index of the largest candidate (`sizes` in formula units, increasing) the Monte
/// Carlo may take: the last of at most [`SAMPLE_PRECISION_UNITS`], or the fourth when fewer
/// lie below (an extrapolation needs three cells and one to spare).
fn last_candidate(sizes: &[f64]) -> usize {
    let below = sizes
        .iter()
        .take_while(|&&u| u <= SAMPLE_PRECISION_UNITS)
        .count();
    below
        .max(size::MIN_CELLS + 1)
        .min(sizes.len())
        .saturating_sub(1)
}

/// Share of the time left that each cell's settings are raised to fill (its part in
/// proportion to its size); the pace is measured again after every cell.
const FILL_SHARE: f64 = 0.95;

/// The cells are chosen so that they fit this many times over at the configured settings.
const PLAN_REPEAT: f64 = 2.0;

/// Share of the time left that the choice of cells plans to use (the rest absorbs the error
/// of the time prediction).
const PLAN_SHARE: f64 = 0.9;

/// The cells the Monte Carlo may sample, smallest first: the near-cubic shapes of
/// [`cell_sequence`] with at least two unit cells along every axis and at least
/// [`SAMPLE_MIN_UNITS`] formula units, for a crystal of `per_cell` formula units per cell.
/// Stops at about 10⁸ formula units.
pub fn sample_candidates(per_cell: f64) -> Vec<Cells> {
    cell_sequence(3)
        .filter(|c| c.counts.iter().all(|&n| n >= 2))
        .take_while(|c| c.total() as f64 * per_cell <= 1e8)
        .filter(|c| c.total() as f64 * per_cell >= SAMPLE_MIN_UNITS)
        .collect()
}

/// Cubes of the cell, k×k×k from k = 2, of at least `SAMPLE_MIN_UNITS` and at most 1e8
/// formula units: cells of one shape, as the flux law of [`size`] needs.
pub fn cube_candidates(per_cell: f64) -> Vec<Cells> {
    (2..)
        .map_while(|k: usize| Cells::periodic(&[k, k, k]).ok())
        .take_while(|c| c.total() as f64 * per_cell <= 1e8)
        .filter(|c| c.total() as f64 * per_cell >= SAMPLE_MIN_UNITS)
        .collect()
}

/// Up to `most` cells spread evenly in ln N from `candidates[0]` to `candidates[last]`
/// (indices into `candidates`, increasing, the first and the last always included).
fn spread(candidates: &[f64], last: usize, most: usize) -> Vec<usize> {
    if last < most {
        return (0..=last).collect();
    }
    let (lo, hi) = (candidates[0].ln(), candidates[last].ln());
    let mut chosen = vec![0];
    for k in 1..most {
        let target = lo + (hi - lo) * k as f64 / (most - 1) as f64;
        // the candidate nearest in ln N, after the one chosen before
        let from = chosen[chosen.len() - 1] + 1;
        let left = most - 1 - k; // cells still to place after this one
        let to = last - left;
        let best = (from..=to)
            .min_by(|&a, &b| {
                (candidates[a].ln() - target)
                    .abs()
                    .total_cmp(&(candidates[b].ln() - target).abs())
            })
            .unwrap_or(from);
        chosen.push(best);
    }
    chosen
}

/// Monte Carlo estimates of a three-dimensional crystal.
///
/// With a fixed cell (`sample_cells`), that cell alone. Otherwise cells chosen by formula
/// units ([`sample_candidates`]): the smallest (about a hundred formula units) runs first
/// with the configured settings and times the sampler; then the largest cell (of at most
/// [`SAMPLE_PRECISION_UNITS`] once four lie below, [`last_candidate`]) is chosen for
/// which up to [`SAMPLE_MAX_CELLS`] cells spread evenly in ln N between the two fit twice
/// over in the time left, and every cell gets a share of it in proportion to its size,
/// filled by twice the replicas, then more sweeps, then up to 8 times the replicas. The cells are extrapolated to the infinite crystal when at least three ran
/// ([`size::extrapolate`] never presents a fit without a degree of freedom).
///
/// First of all, the largest exact cell with an arrangement is sampled with the configured
/// settings and compared with its exact count: a [`CrossCheck`] of the sampler in `checks`.
fn monte_carlo(
    c: &Crystal,
    config: &SurveyConfig,
    context: &Context,
    end: Instant,
    exact_counts: &[(Cells, Estimate)],
    notes: &mut Vec<Note>,
    checks: &mut Vec<CrossCheck>,
) -> Result<(Vec<SampledCell>, Option<SizeExtrapolation>)> {
    let interrupt = &context.interrupt;
    let sample = config.sample.clone();
    let build = |cells: &Cells| -> Result<Model> { Model::new(&Cluster::new(c, cells.clone())?) };
    let run_in = |cells: &Cells,
                  model: &Model,
                  sample: &SampleConfig,
                  context: &Context|
     -> Result<SampledCell> {
        context.tell(Progress::Sampling {
            cells: cells.to_string(),
            variables: model.variables.len(),
        });
        Ok(SampledCell {
            cells: cells.to_string(),
            repeats: cells.counts,
            flux_components: size::flux_components(model),
            sampled: sampling::count(model, sample, context)?,
        })
    };
    // The cross-check and the first cell run to the end; the later cells' repetitions
    // (equilibration extensions) stop at the end of the budget.
    let run = |cells: &Cells, model: &Model, sample: &SampleConfig| -> Result<SampledCell> {
        run_in(cells, model, sample, context)
    };
    let bounded = context.until(end);
    let interrupted_note =
        |notes: &mut Vec<Note>, done: usize| notes.push(Note::MonteCarloInterrupted { done });
    if interrupt.raised() {
        interrupted_note(notes, 0);
        return Ok((Vec::new(), None));
    }
    cross_check(
        c,
        &sample,
        context,
        exact_counts,
        &build,
        &run,
        (notes, checks),
    );

    let per_cell = c.formula_unit.per_cell(c);
    let units = |cells: &Cells| cells.total() as f64 * per_cell;
    // A rule with a conserved flux in three dimensions extrapolates with b = 1/6 of
    // ln N/N fixed, which needs cells of one shape: cubes of the cell (issue 15).
    let cubes = cube_candidates(per_cell);
    let flux = cubes
        .first()
        .and_then(|cells| build(cells).ok())
        .map_or(0, |m| size::flux_components(&m));
    let candidates: Vec<Cells> = match &config.sample_cells {
        Some(cells) => vec![cells.clone()],
        None if flux == 3 => cubes,
        None => sample_candidates(per_cell),
    };
    let Some(first_cells) = candidates.first() else {
        notes.push(Note::MonteCarloNoCell);
        return Ok((Vec::new(), None));
    };
    let mut results = Vec::new();
    let first = match build(first_cells).and_then(|m| run(first_cells, &m, &sample)) {
        Ok(s) => s,
        Err(Error::Interrupted { .. }) => {
            interrupted_note(notes, 0);
            return Ok((Vec::new(), None));
        }
        Err(e) => {
            notes.push(Note::MonteCarloNotRun {
                error: e.to_string(),
            });
            return Ok((Vec::new(), None));
        }
    };
    if config.sample_cells.is_some() || first.sampled.interrupted || interrupt.raised() {
        let stopped = first.sampled.interrupted || interrupt.raised();
        results.push(first);
        describe(&results, (sample.replicas, sample.sweeps), notes);
        if stopped {
            interrupted_note(notes, 1);
        }
        return Ok((results, None));
    }

    // Time per formula unit of one round of replicas (as many as run at once).
    let threads = rayon::current_num_threads().max(1);
    let rounds = |replicas: usize| replicas.div_ceil(threads) as f64;
    let base = (sample.replicas, sample.sweeps);
    let cost_per_sweep = sample.sweeps as f64 + 2.0 * sample.equilibration as f64;
    let rate = first.sampled.estimate.seconds.max(1e-6)
        / (units(first_cells) * rounds(sample.replicas) * cost_per_sweep);
    let left = PLAN_SHARE * end.saturating_duration_since(Instant::now()).as_secs_f64();
    let sizes: Vec<f64> = candidates.iter().map(units).collect();
    let base_cost = |chosen: &[usize]| -> f64 {
        chosen.iter().map(|&i| sizes[i]).sum::<f64>() * rate * rounds(base.0) * cost_per_sweep
    };
    // The largest cell whose spread of cells fits twice over at the configured settings,
    // so that every cell can have about twice the replicas (a steadier σ, and sweeps to
    // spare for the equilibration of the largest); once over when that gives more cells
    // and twice over gives too few for an extrapolation.
    let largest = |times: f64| {
        let mut chosen = vec![0];
        for last in 1..=last_candidate(&sizes) {
            let set = spread(&sizes, last, SAMPLE_MAX_CELLS);
            if times * base_cost(&set[1..]) > left {
                break;
            }
            chosen = set;
        }
        chosen
    };
    let mut chosen = largest(PLAN_REPEAT);
    if chosen.len() < size::MIN_CELLS {
        chosen = largest(1.0);
    }
    results.push(first);
    // Each cell still to run gets a share of the time left in proportion to its size; its
    // replicas (up to 8 times the configured number), then its sweeps, are raised to fill
    // that share. The pace is measured again after every cell.
    let mut rate = rate;
    let mut skipped = Vec::new();
    let mut todo: Vec<usize> = chosen[1..].to_vec();
    while !todo.is_empty() && !interrupt.raised() {
        let remaining = end.saturating_duration_since(Instant::now()).as_secs_f64();
        // When the pace has slowed so much that the rest no longer fits at the configured
        // settings, leave out cells, the middle ones first (the largest gives the range).
        while !todo.is_empty()
            && rate * todo.iter().map(|&j| sizes[j]).sum::<f64>() * rounds(base.0) * cost_per_sweep
                > remaining
        {
            let drop = if todo.len() >= 3 {
                todo.len() - 2
            } else {
                todo.len() - 1
            };
            skipped.push(candidates[todo.remove(drop)].to_string());
        }
        if todo.is_empty() {
            break;
        }
        let i = todo.remove(0);
        let cells = &candidates[i];
        let rest: f64 = sizes[i] + todo.iter().map(|&j| sizes[j]).sum::<f64>();
        let share = FILL_SHARE * remaining * sizes[i] / rest;
        // Rounds of replicas this share affords at the configured sweeps.
        let afford = (share / (rate * sizes[i] * cost_per_sweep)).max(rounds(base.0));
        // Twice the replicas first (a steadier σ), then longer runs (the lag of the
        // largest cells falls with the sweeps), then up to 8 times the replicas.
        let (double, most) = (rounds(base.0 * 2), rounds(base.0 * 8));
        let longer = (afford / double).clamp(1.0, 20_000.0 / base.1 as f64);
        let cell_rounds = (afford / longer).min(most).floor().max(1.0);
        let mut this = sample.clone();
        this.replicas = (cell_rounds as usize * threads).max(base.0);
        if longer >= 1.25 {
            this.sweeps = (base.1 as f64 * longer) as usize;
            this.equilibration = (sample.equilibration as f64 * longer) as usize;
        }
        match build(cells).and_then(|m| run_in(cells, &m, &this, &bounded)) {
            Ok(s) => {
                let e = &s.sampled;
                let pace = e.estimate.seconds
                    / (sizes[i]
                        * rounds(e.replicas)
                        * (e.sweeps as f64 + 2.0 * e.equilibration as f64))
                        .max(1e-9);
                // The latest cell is the largest so far: the best guide to the next.
                rate = pace;
                let stop = e.interrupted;
                results.push(s);
                if stop {
                    break;
                }
            }
            Err(Error::Interrupted { .. }) => break,
            Err(e) => return Err(e),
        }
    }
    describe(&results, base, notes);
    if !skipped.is_empty() {
        notes.push(Note::MonteCarloLeftOut { cells: skipped });
    }
    if interrupt.raised() {
        interrupted_note(notes, results.len());
    }
    let extrapolated = extrapolate_cells(&results, notes);
    Ok((results, extrapolated))
}

/// The note on what the Monte Carlo ran.
fn describe(results: &[SampledCell], base: (usize, usize), notes: &mut Vec<Note>) {
    let Some(s0) = results.first().map(|r| &r.sampled) else {
        return;
    };
    let extended: Vec<&str> = results
        .iter()
        .filter(|r| r.sampled.extensions > 0)
        .map(|r| r.cells.as_str())
        .collect();
    let failed: Vec<&str> = results
        .iter()
        .filter(|r| !r.sampled.equilibrated)
        .map(|r| r.cells.as_str())
        .collect();
    let settings: Vec<(usize, usize)> = results
        .iter()
        .map(|r| (r.sampled.replicas, r.sampled.sweeps))
        .collect();
    let raised = settings.iter().any(|&x| x != base);
    notes.push(Note::MonteCarloRan {
        cells: cell_list(results),
        formula_units: results
            .iter()
            .map(|r| r.sampled.estimate.formula_units)
            .collect(),
        seed: s0.seed,
        settings,
        raised_from: raised.then_some(base),
        failed: failed.into_iter().map(String::from).collect(),
        extended: extended.into_iter().map(String::from).collect(),
        hint: Hint::SampleRunsLonger,
    });
}

/// The extrapolation of the sampled cells, with a note.
fn extrapolate_cells(results: &[SampledCell], notes: &mut Vec<Note>) -> Option<SizeExtrapolation> {
    if results.len() < size::MIN_CELLS {
        notes.push(Note::MonteCarloTooFewCells {
            cells: results.len(),
            needed: size::MIN_CELLS,
        });
        return None;
    }
    let cells: Vec<Estimate> = results.iter().map(|r| r.sampled.estimate.clone()).collect();
    let fluxes: Vec<usize> = results.iter().map(|r| r.flux_components).collect();
    let config = size::SizeConfig {
        flux_components: if fluxes.windows(2).all(|w| w[0] == w[1]) {
            fluxes[0]
        } else {
            0
        },
        dimensions: 3,
        repeats: results.iter().map(|r| r.repeats).collect(),
    };
    match size::count(&cells, &config, &Context::new()) {
        Ok(x) => {
            let fit = &x.details;
            notes.push(Note::MonteCarloExtrapolated {
                cells: results.len(),
                form: fit.form(),
                chi2: fit.chi2,
                dof: fit.dof,
                systematic: fit.systematic,
                alternative_form: fit.alternative_form(),
                alternative: fit.alternative,
                law: fit.law.clone(),
                not_one_shape: fit.not_one_shape,
                next_term: fit.next_term.clone(),
            });
            Some(x)
        }
        Err(e) => {
            notes.push(Note::MonteCarloNoExtrapolation {
                error: e.to_string(),
            });
            None
        }
    }
}

/// Most variables of the cell on which the Wang–Landau walk checks the sampler when no exact
/// count is at hand (its descent costs of order E_w² visits per level).
const WANG_LANDAU_MAX_VARIABLES: usize = 600;

/// With no exact count in the run: the one-cell crystal sampled both ways, thermodynamic
/// integration against a Wang–Landau walk (which shares only the moves), recorded as a
/// [`CrossCheck`] with the tolerance from both error bars.
fn wang_landau_check(
    c: &Crystal,
    sample: &SampleConfig,
    context: &Context,
    build: &dyn Fn(&Cells) -> Result<Model>,
    run: &dyn Fn(&Cells, &Model, &SampleConfig) -> Result<SampledCell>,
    notes: &mut Vec<Note>,
    checks: &mut Vec<CrossCheck>,
) {
    let cells = Cells::cube(1, c.dimensions);
    let name = cells.to_string();
    let model = match build(&cells) {
        Ok(m) if m.variables.len() <= WANG_LANDAU_MAX_VARIABLES => m,
        Ok(m) => {
            notes.push(Note::NoCrossCheckTooLarge {
                cells: name,
                variables: m.variables.len(),
            });
            return;
        }
        Err(e) => {
            notes.push(Note::NoCrossCheck {
                cells: None,
                error: e.to_string(),
            });
            return;
        }
    };
    let walk_config = sampling::wang_landau::WangLandauConfig {
        seed: sample.seed,
        replicas: sample.replicas,
        sweeps: 20_000,
        uniform: 20_000,
    };
    let walk = match sampling::wang_landau::count(&model, &walk_config, context) {
        Ok(w) => w,
        Err(Error::Interrupted { .. }) => return,
        Err(e) => {
            notes.push(Note::WangLandauFailed {
                cells: name,
                error: e.to_string(),
            });
            return;
        }
    };
    let integrated = match run(&cells, &model, sample) {
        Ok(s) => s,
        Err(Error::Interrupted { .. }) => return,
        Err(e) => {
            notes.push(Note::NoCrossCheck {
                cells: Some(name),
                error: e.to_string(),
            });
            return;
        }
    };
    let (a, b) = (&integrated.sampled.estimate, &walk.estimate);
    let (sa, sb) = (a.sigma_ln_w.unwrap_or(0.0), b.sigma_ln_w.unwrap_or(0.0));
    let check = CrossCheck {
        method: Method::MonteCarlo,
        route: Route::WangLandau {
            cells: name.clone(),
        },
        value: a.ln_w_per_unit,
        reference: b.ln_w_per_unit,
        tolerance: CROSS_CHECK_SIGMAS * sa.hypot(sb),
    };
    notes.push(Note::WangLandauCheck {
        cells: name,
        integrated: (a.ln_w_per_unit, sa),
        walk: (b.ln_w_per_unit, sb),
        agrees: check.agrees(),
        sigmas: CROSS_CHECK_SIGMAS,
    });
    checks.push(check);
}

/// Tolerance of the Monte Carlo cross-check, in σ of the sampled value: a correct run
/// misses by more about once in several hundred (σ is widened so that the pull has unit
/// variance; Student t with 7 degrees of freedom for 8 replicas).
pub const CROSS_CHECK_SIGMAS: f64 = 4.0;

/// Sample the largest exact cell that has an arrangement with the configured settings and
/// record the comparison with its exact count.
fn cross_check(
    c: &Crystal,
    sample: &SampleConfig,
    context: &Context,
    exact_counts: &[(Cells, Estimate)],
    build: &dyn Fn(&Cells) -> Result<Model>,
    run: &dyn Fn(&Cells, &Model, &SampleConfig) -> Result<SampledCell>,
    (notes, checks): (&mut Vec<Note>, &mut Vec<CrossCheck>),
) {
    let Some((cells, exact)) = exact_counts
        .iter()
        .rev()
        .find(|(_, e)| e.ln_w_per_unit.is_finite() && e.formula_units >= 2.0)
    else {
        wang_landau_check(c, sample, context, build, run, notes, checks);
        return;
    };
    let name = cells.to_string();
    let outcome = build(cells).and_then(|m| run(cells, &m, sample));
    match outcome {
        Ok(s) => {
            let e = &s.sampled.estimate;
            let sigma = e.sigma_ln_w.unwrap_or(0.0);
            let check = CrossCheck {
                method: Method::MonteCarlo,
                route: Route::ExactCount {
                    cells: name.clone(),
                },
                value: e.ln_w_per_unit,
                reference: exact.ln_w_per_unit,
                tolerance: CROSS_CHECK_SIGMAS * sigma,
            };
            notes.push(Note::ExactCheck {
                cells: name,
                seconds: e.seconds,
                sampled: (e.ln_w_per_unit, sigma),
                exact: exact.ln_w_per_unit,
                agrees: check.agrees(),
                sigmas: CROSS_CHECK_SIGMAS,
            });
            checks.push(check);
        }
        Err(Error::Interrupted { .. }) => {}
        Err(e) => notes.push(Note::NoCrossCheck {
            cells: Some(name),
            error: e.to_string(),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A weighted file: the survey gives the Pauling and Bethe rows with their fields and
    /// leaves out, with a note each, the counters that cannot weigh yet, instead of failing
    /// (or counting every arrangement once). Pauling's value is the closed form of
    /// counters/pauling.rs at a = b = 0.7: 2 H(0.7) + ln(2 (0.21)² + 0.58²).
    #[test]
    fn issue13_survey_leaves_out_what_cannot_weigh() {
        let yaml = format!(
            "{}occupancy:\n  - {{bond: h, state: 1, mean: 0.7}}\n  - {{bond: v, state: 1, mean: 0.7}}\n",
            include_str!("../../lattices/square-ice.yaml")
        );
        let l = crate::Lattice::from_yaml(&yaml, "w.yaml").unwrap();
        let config = SurveyConfig {
            budget: 2.0,
            max_exact_units: Some(16.0),
            widths: Some(vec![2, 3]),
            ..SurveyConfig::default()
        };
        let s = survey(&l.crystal, &config, &Context::new()).unwrap();
        let h = -0.7 * 0.7f64.ln() - 0.3 * 0.3f64.ln();
        let p = 2.0 * h + (2.0 * 0.21f64.powi(2) + 0.58f64.powi(2)).ln();
        assert!((s.pauling.ln_w_per_unit - p).abs() < 1e-9);
        assert_eq!(s.pauling.weighing.as_ref().unwrap().fields.len(), 2);
        assert!(s.bethe.as_ref().unwrap().weighing.is_some());
        for e in s.estimates() {
            assert!(e.weighing.is_some(), "{:?} ran unweighted", e.method);
        }
        let left_out: Vec<&str> = s
            .notes
            .iter()
            .filter_map(|n| match n {
                Note::Unweighted { method } => Some(*method),
                _ => None,
            })
            .collect();
        // Today the exact count and the strips cannot weigh; once they can, their rows carry a
        // weighing (checked above) and this list shrinks.
        assert_eq!(
            left_out.len() + s.exact.len().min(1) + s.strips.iter().count(),
            2
        );
    }

    /// Issue 11, item 3: the Monte Carlo cells were chosen by unit cells (cubes n − 3 … n),
    /// so a 16-water cell got cubes of 128 … 1024 waters and a 46-water cell two cubes. The
    /// candidates now start at about a hundred formula units, with at least two unit cells
    /// along every axis, and grow in small steps (near-cubic shapes).
    #[test]
    fn issue11_sample_cells_are_chosen_by_formula_units() {
        for (per_cell, first) in [(4.0, [3, 3, 3]), (16.0, [2, 2, 2]), (46.0, [2, 2, 2])] {
            let c = sample_candidates(per_cell);
            assert_eq!(c[0].counts, first, "{per_cell} per cell");
            let units: Vec<f64> = c.iter().map(|x| x.total() as f64 * per_cell).collect();
            assert!(units[0] >= SAMPLE_MIN_UNITS && units[0] < 4.0 * SAMPLE_MIN_UNITS);
            assert!(c.iter().all(|x| x.counts.iter().all(|&n| n >= 2)));
            // every step grows the cell by at most a half, and never shrinks it
            assert!(
                units.windows(2).all(|w| w[1] > w[0] && w[1] <= 1.51 * w[0]),
                "{units:?}"
            );
        }
        // ice Ih: 3x3x3, 4x3x3, 4x4x3, 4x4x4, ... (108, 144, 192, 256 waters)
        let ice: Vec<usize> = sample_candidates(4.0)[..4]
            .iter()
            .map(|c| 4 * c.total())
            .collect();
        assert_eq!(ice, [108, 144, 192, 256]);
    }

    /// The cells of an extrapolation are spread evenly in ln N between the smallest and the
    /// Issue 15: the largest Monte Carlo cell is the last candidate of at most
    /// SAMPLE_PRECISION_UNITS formula units, or the fourth when fewer lie below.
    #[test]
    fn issue15_largest_cell_is_capped_for_precision() {
        let units = |per: f64| -> Vec<f64> {
            cube_candidates(per)
                .iter()
                .map(|c| per * c.total() as f64)
                .collect()
        };
        // Ice Ih, 4 molecules a cell: 3³ … 8³ (108 … 2048), not 9³ = 2916.
        let ih = units(4.0);
        assert_eq!(ih[last_candidate(&ih)], 2048.0);
        // A 136-water cell: only 1³ and 2³ = 1088 lie below, so four cubes (to 4³ = 8704).
        let s2 = units(136.0);
        assert_eq!(last_candidate(&s2), 3);
        // Fewer candidates than four: all of them.
        assert_eq!(last_candidate(&[100.0, 300.0]), 1);
    }

    /// Issue 15: the cells offered to a rule with a conserved flux are cubes of the cell
    /// (one shape, as the law with b fixed needs), in increasing size, from the first of
    /// at least SAMPLE_MIN_UNITS formula units.

    #[test]
    fn issue15_flux_cells_are_cubes() {
        let c = cube_candidates(4.0);
        assert_eq!(c[0].counts[..3], [3, 3, 3], "108 units is the first ≥ 100");
        assert!(c.windows(2).all(|w| w[0].total() < w[1].total()));
        assert!(
            c.iter()
                .all(|x| x.counts[0] == x.counts[1] && x.counts[1] == x.counts[2])
        );
        assert!(c.iter().all(|x| x.total() as f64 * 4.0 <= 1e8));
    }

    /// chosen largest: first and last kept, increasing, at most `most`.
    #[test]
    fn spread_keeps_both_ends_and_spaces_the_rest_in_ln_n() {
        let sizes: Vec<f64> = sample_candidates(4.0)
            .iter()
            .map(|c| 4.0 * c.total() as f64)
            .collect();
        for last in 1..20 {
            let s = spread(&sizes, last, SAMPLE_MAX_CELLS);
            assert_eq!(s[0], 0);
            assert_eq!(*s.last().unwrap(), last);
            assert!(s.len() == (last + 1).min(SAMPLE_MAX_CELLS));
            assert!(s.windows(2).all(|w| w[1] > w[0]));
        }
        // 108 … 864 waters: 108, 192, 320, 500, 864 (ratios 1.6–1.8)
        let s = spread(&sizes, 9, 5);
        let picked: Vec<f64> = s.iter().map(|&i| sizes[i]).collect();
        assert_eq!(picked, [108.0, 192.0, 320.0, 500.0, 864.0]);
    }
}
