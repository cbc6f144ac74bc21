//! `groundcount exact FILE --cells AxB[xC]`: the exact count of one finite cell.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::cluster::Cluster;
use groundcount::counters::exact;
use groundcount::counters::exact::CellRoute;
use groundcount::json::EstimateOf;
use groundcount::model::Model;
use groundcount::text::{self, sig};

use super::{Common, Format, cell_header, load, pauling_line, with_threads};

/// The JSON document of `exact` (docs/json.md).
#[derive(serde::Serialize)]
struct Document {
    /// The count, with the lattice and Pauling's estimate beside it.
    #[serde(flatten)]
    estimate: EstimateOf,
    /// Variables of the cell's model.
    variables: usize,
    /// Constraints of the cell's model.
    constraints: usize,
    /// FNV-1a hash of the lattice file's text.
    content_hash: String,
    /// How the count was made: `frontier` or `trace`.
    route: &'static str,
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
    /// For a lattice with vacancies: random realisations of the vacancies to count
    /// (default 16); the result is the mean of ln W over them, with their spread.
    #[arg(long, value_name = "N")]
    realisations: Option<usize>,
    /// For a lattice with vacancies: seed of the realisations (realisation r is the same on
    /// any thread count).
    #[arg(long, default_value_t = 1)]
    seed: u64,
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let lattice = load(Some(&args.file), args.block.as_deref())?;
    let c = &lattice.crystal;
    let cells = super::words::cells("--cells", &args.cells, args.open.as_deref(), c.dimensions)?;
    // A cell too wide for the frontier is refused before it is built.
    exact::check_cell(c, &cells)?;
    if c.is_diluted() {
        return super::dilution::run(
            &lattice,
            &args.file,
            &cells,
            args.realisations
                .unwrap_or(groundcount::counters::dilution::DEFAULT_REALISATIONS),
            args.seed,
            super::dilution::Counter::Exact {
                max_states: args.max_states,
            },
            &args.common,
        );
    }
    if args.realisations.is_some() {
        anyhow::bail!(
            "--realisations applies to a lattice with vacancies (`vacancies:` with a fraction above 0); {} has none",
            args.file.display()
        );
    }
    // Pauling's estimate beside the count; a Pauling counter that cannot yet weigh is left
    // out of a weighted file's output rather than compared with a different quantity.
    let p = match super::pauling(c) {
        Ok(p) => Some(p),
        Err(groundcount::Error::Unweighted { .. }) => None,
        Err(e) => return Err(e.into()),
    };
    let cluster = Cluster::new(c, cells.clone())?;
    let model = Model::new(&cluster)?;
    let (context, bar) = args
        .common
        .exact_progress(&format!("counting {}", model.cells));
    let config = exact::ExactConfig {
        max_states: args.max_states,
        ..Default::default()
    };
    // A torus may be cheaper as the trace of T^L: the library compares the predicted work
    // of both routes.
    let counted = with_threads(args.common.threads, || {
        exact::count_cell(c, &cells, &model, &config, &context)
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let groundcount::counters::Counted {
        estimate: e,
        details: route,
    } = counted??;
    let unit = &c.formula_unit.name;
    match args.common.format {
        Format::Json => Ok(groundcount::json::to_string(&Document {
            estimate: EstimateOf::new(c, &e, p.as_ref()),
            variables: model.variables.len(),
            constraints: model.constraints.len(),
            content_hash: lattice.content_hash.clone(),
            route: match route {
                CellRoute::Trace { .. } => "trace",
                CellRoute::Frontier => "frontier",
            },
        })?),
        Format::Csv => Ok(text::comparison_table(
            &p.into_iter().chain([e]).collect::<Vec<_>>(),
            unit,
        )
        .render_csv()),
        Format::Markdown => Ok(text::comparison_table(
            &p.into_iter().chain([e]).collect::<Vec<_>>(),
            unit,
        )
        .render_markdown()),
        Format::Table => {
            let mut out = String::new();
            out += &cell_header(c, &args.file, &e, &model);
            writeln!(out)?;
            if let Some(w) = &e.weighing {
                out += &weighted_lines(&e, w, &model, unit)?;
            } else {
                let count = e.count.as_ref().map(|c| c.to_string()).unwrap_or_default();
                writeln!(out, "arrangements          {count}")?;
                writeln!(out, "ln(arrangements)      {}", sig(e.ln_count, 12))?;
            }
            writeln!(out, "W per {unit:<15} {}", sig(e.w_per_unit(), 12))?;
            writeln!(out, "S0/R per {unit:<12} {}", sig(e.s_over_r(), 12))?;
            writeln!(
                out,
                "S0                    {} J/(mol K) per mole of {unit}",
                sig(e.s_j_per_mol_k(), 8)
            )?;
            if let Some(p) = &p {
                out += &pauling_line(p, unit);
            } else {
                writeln!(
                    out,
                    "Pauling (infinite)    not shown: Pauling's estimate does not yet take weights"
                )?;
            }
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

/// The lines of a weighted count: what the entropy is, ln Z, and every imposed mean.
fn weighted_lines(
    e: &groundcount::Estimate,
    w: &groundcount::estimate::Weighing,
    model: &Model,
    unit: &str,
) -> anyhow::Result<String> {
    use groundcount::crystal::MeanKind;
    let mut out = String::new();
    let canonical = w.fields.iter().any(|f| f.kind == MeanKind::Composition);
    if canonical {
        let count = e.count.as_ref().map(|c| c.to_string()).unwrap_or_default();
        writeln!(
            out,
            "arrangements at the composition  {count} (exact; W and S0 below are from this count)"
        )?;
        writeln!(out, "ln(arrangements)      {}", sig(e.ln_count, 12))?;
    } else {
        writeln!(
            out,
            "weighted ensemble     S/R = ln Z - <ln w> (w: the state weights times exp(field) for every imposed mean); W and S0 below are exp and R times it"
        )?;
        writeln!(
            out,
            "ln Z of the cell      {}  ({} per {unit})",
            sig(w.ln_z_per_unit * e.formula_units, 12),
            sig(w.ln_z_per_unit, 12)
        )?;
        writeln!(out, "S/R of the cell       {}", sig(e.ln_count, 12))?;
    }
    for (f, m) in w.fields.iter().zip(&model.means) {
        writeln!(
            out,
            "{} {:<24} target {}  field h = {}  achieved {}  ({} variables)",
            f.kind.word(),
            f.label,
            sig(f.target, 8),
            sig(f.field, 8),
            sig(f.achieved, 10),
            m.variables.len()
        )?;
    }
    Ok(out)
}
