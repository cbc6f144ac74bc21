//! `groundcount exact FILE --cells AxB[xC]`: the exact count of one finite cell.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::exact::CellRoute;
use groundcount::counters::{exact, pauling};
use groundcount::model::Model;
use groundcount::report::{self, sig};

use super::{Common, Format, cell_header, load, pauling_line, with_threads};

/// Memory a cluster and its model take per site and bond, measured on square ice
/// (2000x2000: 12 million sites and bonds, 3 GB).
const BYTES_PER_ENTITY: f64 = 250.0;

/// Bytes in words: "3.0 GB".
fn memory_words(bytes: f64) -> String {
    if bytes >= 1e9 {
        format!("{:.1} GB", bytes / 1e9)
    } else {
        format!("{:.0} MB", (bytes / 1e6).max(1.0))
    }
}

/// Arguments of `exact`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML) or structure file (CIF).
    file: PathBuf,
    /// The data block to read when FILE is a structure file (CIF) with several structures.
    #[arg(long, value_name = "NAME")]
    block: Option<String>,
    /// Cell size in unit cells along each axis, e.g. 4x4 or 3x3x2.
    #[arg(long)]
    cells: String,
    /// Axes with open boundaries (comma-separated, e.g. a,b); the others are periodic.
    #[arg(long)]
    open: Option<String>,
    /// Largest number of partial states the counter may hold at once.
    #[arg(long, default_value_t = exact::DEFAULT_MAX_STATES)]
    max_states: usize,
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let lattice = load(Some(&args.file), args.block.as_deref())?;
    let c = &lattice.crystal;
    let cells = Cells::parse(&args.cells, args.open.as_deref(), c.dimensions)?;
    // A cell whose every sweep keeps more cells open than the frontier's 63 bits can hold
    // is refused before it is built (building 2000x2000 alone takes minutes and gigabytes).
    if let Some(open) = groundcount::cluster::frontier_cells_lower_bound(c, &cells)
        && open > 63
    {
        let entities = cells.total() as f64 * (c.sites.len() + c.bonds.len()) as f64;
        return Err(groundcount::Error::Budget {
            cells: cells.to_string(),
            detail: format!(
                "every order of its variables keeps at least {open} cells on the frontier at once, \
                 and the frontier counter holds at most 63 bits (one per two-state variable); \
                 building the cell alone would take about {} of memory",
                memory_words(entities * BYTES_PER_ENTITY)
            ),
        }
        .into());
    }
    let p = pauling::estimate(c)?;
    let cluster = Cluster::new(c, cells.clone())?;
    let model = Model::new(&cluster)?;
    let (progress, bar) = args
        .common
        .exact_progress(&format!("counting {}", model.cells));
    let config = exact::ExactConfig {
        max_states: args.max_states,
        deadline: None,
        progress,
        interrupt: super::interrupt(),
    };
    // A torus may be cheaper as the trace of T^L: the library compares the predicted work
    // of both routes.
    let counted = with_threads(args.common.threads, || {
        exact::count_cell(c, &cells, &model, &config)
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let (e, route) = counted??;
    let unit = &c.formula_unit.name;
    match args.common.format {
        Format::Json => {
            let mut v = report::estimate_json(c, &e, Some(&p));
            v["variables"] = model.variables.len().into();
            v["constraints"] = model.constraints.len().into();
            v["content_hash"] = lattice.content_hash.clone().into();
            v["route"] = match route {
                CellRoute::Trace { .. } => "trace",
                CellRoute::Frontier => "frontier",
            }
            .into();
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(report::comparison_table(&[p, e], unit).render_csv()),
        Format::Markdown => Ok(report::comparison_table(&[p, e], unit).render_markdown()),
        Format::Table => {
            let mut out = String::new();
            out += &cell_header(c, &args.file, &e, &model);
            writeln!(out)?;
            let count = e.count.as_ref().map(|c| c.to_string()).unwrap_or_default();
            writeln!(out, "arrangements          {count}")?;
            writeln!(out, "ln(arrangements)      {}", sig(e.ln_count, 12))?;
            writeln!(out, "W per {unit:<15} {}", sig(e.w_per_unit(), 12))?;
            writeln!(out, "S0/R per {unit:<12} {}", sig(e.s_over_r(), 12))?;
            writeln!(
                out,
                "S0                    {} J/(mol K) per mole of {unit}",
                sig(e.s_j_per_mol_k(), 8)
            )?;
            out += &pauling_line(&p, unit);
            writeln!(out)?;
            match route {
                CellRoute::Trace { column_states } => writeln!(
                    out,
                    "exact count as the trace of the transfer matrix T^L ({} column states; predicted cheaper than the frontier count), {} s, at most {} states held",
                    column_states,
                    sig(e.seconds, 3),
                    e.peak_states.unwrap_or(0)
                )?,
                CellRoute::Frontier => writeln!(
                    out,
                    "exact frontier count, {} s, at most {} partial states held",
                    sig(e.seconds, 3),
                    e.peak_states.unwrap_or(0)
                )?,
            }
            if model.has_repeats {
                writeln!(
                    out,
                    "note: the cell is so small that some rule reads one variable twice (a bond wraps onto itself); the count is exact for this torus but far from the infinite crystal"
                )?;
            }
            Ok(out)
        }
    }
}
