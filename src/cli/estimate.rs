//! `groundcount estimate [FILE]`: the main job. Pauling's estimate, then exact counts on
//! periodic cells of growing size within a time budget, side by side.

use std::fmt::Write;
use std::path::PathBuf;
use std::time::{Duration, Instant};

use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::{exact, pauling};
use groundcount::model::Model;
use groundcount::report::{self, sig};
use groundcount::{Error, Estimate};
use serde_json::json;

use super::{Common, Format, load, shown, with_threads};

/// Arguments of `estimate`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML); the built-in ice Ih description when omitted.
    file: Option<PathBuf>,
    /// Time budget in seconds for the exact counts.
    #[arg(long, default_value_t = 20.0)]
    budget: f64,
    /// Largest number of partial states an exact count may hold at once.
    #[arg(long, default_value_t = exact::DEFAULT_MAX_STATES)]
    max_states: usize,
    #[command(flatten)]
    common: Common,
}

/// Periodic cells of growing size: L×L in 2D; in 3D n×n×n, then (n+1)×n×n, (n+1)×(n+1)×n.
fn cell_sequence(dimensions: usize) -> impl Iterator<Item = Cells> {
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

pub fn run(args: Args) -> anyhow::Result<String> {
    if !(args.budget.is_finite() && args.budget > 0.0 && args.budget <= 1e7) {
        anyhow::bail!(
            "--budget must be a positive number of seconds (at most 1e7), found {}",
            args.budget
        );
    }
    let lattice = load(args.file.as_deref())?;
    let c = &lattice.crystal;
    let unit = c.formula_unit.name.clone();
    let p = pauling::estimate(c)?;
    let start = Instant::now();
    // Exact counts get the first 40 % of the budget; the rest goes to strips (2D) or
    // sampling (3D).
    let deadline = start + Duration::from_secs_f64(0.4 * args.budget);
    let end = start + Duration::from_secs_f64(args.budget);
    let mut rows: Vec<Estimate> = vec![p.clone()];
    let mut stopped = String::new();
    let largest = 1usize << 20; // never build absurdly large clusters
    for cells in cell_sequence(c.dimensions) {
        if cells.total() * c.sites.len().max(c.bonds.len()) > largest {
            stopped = "cell size limit reached".into();
            break;
        }
        let cluster = Cluster::new(c, cells.clone())?;
        let model = Model::new(&cluster)?;
        let (progress, bar) = args.common.exact_progress(&format!("counting {cells}"));
        let config = exact::ExactConfig {
            max_states: args.max_states,
            deadline: Some(deadline),
            progress,
        };
        let outcome = with_threads(args.common.threads, || exact::count(&model, &config))?;
        if let Some(b) = bar {
            b.finish_and_clear();
        }
        match outcome {
            Ok(e) => rows.push(e),
            Err(Error::Deadline { cells }) => {
                stopped = format!(
                    "the exact counts' share (40 %) of the {} s budget ran out while counting {cells}",
                    args.budget
                );
                break;
            }
            Err(Error::Budget { cells, .. }) => {
                stopped = format!(
                    "{cells} needs more than {} frontier states",
                    args.max_states
                );
                break;
            }
            Err(e) => return Err(e.into()),
        }
        if Instant::now() > deadline {
            stopped = format!(
                "the exact counts' share of the {} s budget is spent",
                args.budget
            );
            break;
        }
    }
    let mut notes: Vec<String> = Vec::new();
    let infinite = match c.dimensions {
        2 => strips(c, end, &args, &mut notes)?,
        3 => sampled(c, &args, &mut notes)?,
        _ => None,
    };
    if let Some(e) = &infinite {
        rows.push(e.clone());
    }
    match args.common.format {
        Format::Json => {
            let v = json!({
                "lattice": c.name,
                "file": shown(&args.file),
                "content_hash": lattice.content_hash,
                "formula_unit": unit,
                "pauling": report::estimate_json(c, &p, None),
                "exact": rows[1..].iter().filter(|e| e.method == groundcount::estimate::Method::Exact).map(|e| report::estimate_json(c, e, Some(&p))).collect::<Vec<_>>(),
                "transfer_matrix": infinite.as_ref().filter(|e| e.method == groundcount::estimate::Method::TransferMatrix).map(|e| report::estimate_json(c, e, Some(&p))),
                "monte_carlo": infinite.as_ref().filter(|e| e.method == groundcount::estimate::Method::MonteCarlo).map(|e| report::estimate_json(c, e, Some(&p))),
                "stopped": stopped,
                "notes": notes,
            });
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(report::comparison_table(&rows, &unit).render_csv()),
        Format::Markdown => Ok(report::comparison_table(&rows, &unit).render_markdown()),
        Format::Table => {
            let mut out = String::new();
            writeln!(out, "{} ({})", c.name, shown(&args.file))?;
            writeln!(
                out,
                "formula unit {unit} ({}); S0 = R ln W per mole of {unit}",
                c.formula_unit.describe()
            )?;
            writeln!(out)?;
            out += &report::comparison_table(&rows, &unit).render();
            writeln!(out)?;
            writeln!(
                out,
                "Exact counts are for finite periodic cells; they approach the infinite crystal as the cell grows. \
                 Cells that wrap a bond onto itself (the smallest) are exact for that torus only."
            )?;
            if let Some(last) = rows
                .iter()
                .rev()
                .find(|e| e.method == groundcount::estimate::Method::Exact)
            {
                writeln!(
                    out,
                    "largest cell counted: {}, W = {} per {unit} (Pauling {}; difference {:+.3} %)",
                    last.cells.as_deref().unwrap_or(""),
                    sig(last.w_per_unit(), 8),
                    sig(p.w_per_unit(), 8),
                    100.0 * (last.w_per_unit() / p.w_per_unit() - 1.0)
                )?;
            }
            if !stopped.is_empty() {
                writeln!(out, "exact counts stopped: {stopped}")?;
            }
            for n in &notes {
                writeln!(out, "{n}")?;
            }
            Ok(out)
        }
    }
}

/// Strips of growing width until the budget ends, extrapolated to infinite width.
fn strips(
    c: &groundcount::crystal::Crystal,
    end: Instant,
    args: &Args,
    notes: &mut Vec<String>,
) -> anyhow::Result<Option<Estimate>> {
    use groundcount::counters::extrapolate::Scaling;
    use groundcount::counters::transfer::{self, StripConfig};
    let config = StripConfig {
        deadline: Some(end),
        ..StripConfig::default()
    };
    let mut results = Vec::new();
    for width in 2.. {
        match with_threads(args.common.threads, || transfer::strip(c, width, &config))? {
            Ok(r) => results.push(r),
            Err(Error::Deadline { .. }) => break,
            Err(e) => {
                notes.push(format!("strips stopped at width {width}: {e}"));
                break;
            }
        }
        if Instant::now() > end {
            break;
        }
    }
    if results.len() < 4 {
        notes.push(format!(
            "transfer matrix: only {} widths within the budget; raise --budget or run `groundcount strip`",
            results.len()
        ));
        return Ok(None);
    }
    let largest = results.last().map_or(0, |r| r.width);
    match transfer::from_widths(c, results, 1, Scaling::Auto, &config) {
        Ok(series) => {
            notes.push(format!(
                "transfer matrix: cylinders of width 2..{largest} along a, extrapolated to infinite width \
                 ({}); `groundcount strip` shows every width",
                match series.extrapolation.scaling {
                    Scaling::Gapped => "gapped: the largest width, error from the last differences".to_string(),
                    _ => format!("critical: fits in 1/W², error from their spread over {} fits", series.extrapolation.fits.len()),
                }
            ));
            Ok(Some(series.estimate))
        }
        Err(e) => {
            notes.push(format!("transfer matrix: no extrapolation ({e})"));
            Ok(None)
        }
    }
}

/// A Monte Carlo estimate on a periodic cell of about a thousand formula units.
fn sampled(
    c: &groundcount::crystal::Crystal,
    args: &Args,
    notes: &mut Vec<String>,
) -> anyhow::Result<Option<Estimate>> {
    use groundcount::counters::sampling::{self, SampleConfig};
    let per_cell = c.formula_unit.per_cell(c).max(1e-9);
    let n = ((1000.0 / per_cell).cbrt().round() as usize).max(2);
    let cells = Cells::cube(n, c.dimensions);
    let cluster = Cluster::new(c, cells.clone())?;
    let model = Model::new(&cluster)?;
    if args.common.progress() {
        eprintln!("sampling {cells} ({} variables)…", model.variables.len());
    }
    let config = SampleConfig::default();
    match with_threads(args.common.threads, || sampling::sample(&model, &config))? {
        Ok(s) => {
            notes.push(format!(
                "Monte Carlo: thermodynamic integration on the {cells} cell, seed {}, {} replicas; \
                 a finite torus gives a larger W than the infinite crystal; `groundcount sample` \
                 runs larger cells and longer",
                s.seed, s.replicas
            ));
            Ok(Some(s.estimate))
        }
        Err(e) => {
            notes.push(format!("Monte Carlo: not run ({e})"));
            Ok(None)
        }
    }
}
