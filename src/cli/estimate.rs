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
    let deadline = start + Duration::from_secs_f64(args.budget);
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
                    "the time budget of {} s ran out while counting {cells}",
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
            stopped = format!("the time budget of {} s is spent", args.budget);
            break;
        }
    }
    match args.common.format {
        Format::Json => {
            let v = json!({
                "lattice": c.name,
                "file": shown(&args.file),
                "content_hash": lattice.content_hash,
                "formula_unit": unit,
                "pauling": report::estimate_json(c, &p, None),
                "exact": rows[1..].iter().map(|e| report::estimate_json(c, e, Some(&p))).collect::<Vec<_>>(),
                "stopped": stopped,
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
            if let Some(last) = rows.last().filter(|e| e.cells.is_some()) {
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
                writeln!(out, "stopped: {stopped}")?;
            }
            Ok(out)
        }
    }
}
