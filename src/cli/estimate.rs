//! `groundcount estimate [FILE]`: the main job. Pauling's estimate, then exact counts on
//! periodic cells of growing size within a time budget, side by side, the cross-checks of
//! the run, and last one line naming the value to cite ([`Survey::cited`]).

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::counters::{exact, local};
use groundcount::estimate::Method;
use groundcount::estimate::{Survey, SurveyConfig, survey};
use groundcount::json::{
    self, CheckRecord, CitedRecord, EstimateOf, ExtrapolatedRecord, PassedOverRecord, SizeFitRecord,
};
use groundcount::text::{self, Columns};

use super::{Common, Format, load, shown, with_threads};

/// The JSON document of `estimate` (docs/json.md).
#[derive(serde::Serialize)]
struct Document {
    /// The lattice's name.
    lattice: String,
    /// The lattice file as named, or "built-in ice Ih".
    file: String,
    /// FNV-1a hash of the lattice file's text.
    content_hash: String,
    /// The formula unit's name.
    formula_unit: String,
    /// Pauling's estimate.
    pauling: EstimateOf,
    /// The Bethe approximation, when its messages settled.
    bethe: Option<EstimateOf>,
    /// Exact counts, smallest cell first.
    exact: Vec<EstimateOf>,
    /// Strips extrapolated to infinite width.
    transfer_matrix: Option<EstimateOf>,
    /// The largest Monte Carlo cell.
    monte_carlo: Option<EstimateOf>,
    /// Every Monte Carlo cell, smallest first.
    monte_carlo_cells: Vec<EstimateOf>,
    /// The Monte Carlo cells extrapolated to the infinite crystal, with the fit.
    monte_carlo_infinite: Option<ExtrapolatedRecord>,
    /// The cross-checks of the run.
    checks: Vec<CheckRecord>,
    /// The value to cite; `null` when nothing can be cited.
    cited: Option<CitedRecord>,
    /// Better-ranked candidates not cited, and why.
    passed_over: Vec<PassedOverRecord>,
    /// Why the exact counts stopped (empty when they ran to the limit).
    stopped: String,
    /// What ran, what stopped and why, in words.
    notes: Vec<String>,
}

/// Arguments of `estimate`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML) or structure file (CIF); the built-in ice Ih description when omitted.
    file: Option<PathBuf>,
    /// The data block to read when FILE is a structure file (CIF) with several structures.
    #[arg(long, value_name = "NAME")]
    block: Option<String>,
    /// Time budget in seconds for all methods together (exact counts get the first 40 %).
    #[arg(long, default_value_t = 20.0)]
    budget: f64,
    /// Largest number of partial states an exact count may hold at once.
    #[arg(long, default_value_t = exact::DEFAULT_MAX_STATES)]
    max_states: usize,
    /// Count no exact cell with more formula units than this (makes the exact counts
    /// independent of the machine's speed).
    #[arg(long)]
    max_exact_units: Option<f64>,
    /// Monte Carlo cell for a 3D lattice, e.g. 3x3x3; default: up to five cells, from
    /// about 100 formula units to the largest the budget affords, at most about 2500 once
    /// four smaller ones are available (cubes when the rule has a conserved flux),
    /// extrapolated to the infinite crystal.
    #[arg(long)]
    sample_cells: Option<String>,
    /// Seed of the Monte Carlo streams.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Measured Monte Carlo sweeps per quadrature node and replica.
    #[arg(long)]
    sweeps: Option<usize>,
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    super::check_budget(args.budget)?;
    let lattice = load(args.file.as_deref(), args.block.as_deref())?;
    let c = &lattice.crystal;
    let (context, bars) = args.common.survey_progress();
    let sample_cells = match &args.sample_cells {
        Some(s) => Some(super::words::cells(
            "--sample-cells",
            s,
            None,
            c.dimensions,
        )?),
        None => None,
    };
    let mut config = SurveyConfig {
        budget: args.budget,
        max_states: args.max_states,
        max_exact_units: args.max_exact_units,
        sample_cells,
        ..SurveyConfig::default()
    };
    config.sample.seed = args.seed;
    if let Some(s) = args.sweeps {
        if s == 0 {
            anyhow::bail!("--sweeps must be at least 1");
        }
        config.sample.sweeps = s;
    }
    let result = with_threads(args.common.threads, || survey(c, &config, &context))?;
    bars.finish();
    let s = result?;
    if s.interrupted {
        // Print what was finished, then say it was interrupted (exit 130).
        let output = render(&args, &lattice, &s)?;
        return Err(super::Partial {
            output,
            message: "interrupted: the table holds what was finished before Ctrl-C".into(),
            code: 130,
        }
        .into());
    }
    render(&args, &lattice, &s)
}

/// The header line of a diluted crystal's survey (the note below the table says more).
fn diluted_words(unit: &str) -> String {
    format!(
        "with vacancies: W per {unit} present, S0 per mole of {unit} present; exact rows are \
         means over random realisations (see the note below)"
    )
}

/// The output of a finished (or interrupted) survey.
fn render(
    args: &Args,
    lattice: &groundcount::Lattice,
    s: &groundcount::estimate::Survey,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let unit = c.formula_unit.name.clone();
    let p = &s.pauling;
    let transfer = s.strips.as_ref().map(|t| &t.estimate);
    let monte_carlo = s.sampled.as_ref().map(|m| &m.sampled.estimate);
    let table = text::survey_table(s, &unit, Columns::default());
    match args.common.format {
        Format::Json => {
            let of = |e: &groundcount::Estimate| EstimateOf::new(c, e, Some(p));
            Ok(json::to_string(&Document {
                lattice: c.name.clone(),
                file: shown(&args.file),
                content_hash: lattice.content_hash.clone(),
                formula_unit: unit.clone(),
                pauling: EstimateOf::new(c, p, None),
                bethe: s.bethe.as_ref().map(of),
                exact: s.exact.iter().map(of).collect(),
                transfer_matrix: transfer.map(of),
                monte_carlo: monte_carlo.map(of),
                monte_carlo_cells: s
                    .sampled_sizes
                    .iter()
                    .map(|m| of(&m.sampled.estimate))
                    .collect(),
                monte_carlo_infinite: s.extrapolated.as_ref().map(|x| ExtrapolatedRecord {
                    estimate: of(&x.estimate),
                    fit: SizeFitRecord::from(&x.details),
                }),
                checks: json::checks(&s.checks),
                cited: CitedRecord::of(c, s),
                passed_over: json::passed_over(&s.cited(), &unit),
                stopped: super::words::stopped(s),
                notes: super::words::notes(s),
            })?)
        }
        Format::Csv => Ok(table.render_csv()),
        Format::Markdown => {
            let mut out = table.render_markdown();
            writeln!(out)?;

            if s.checks.is_empty() {
                writeln!(out, "cross-checks: none computed in this run\n")?;
            } else {
                writeln!(out, "cross-checks (a second route computed in this run):\n")?;
                out += &text::checks_table(&s.checks, &unit).render_markdown();
                writeln!(out)?;
            }
            for line in below_table(s, &unit) {
                // A leading `*` marks a row, not a list item.
                match line.strip_prefix("* ") {
                    Some(rest) => writeln!(out, "\\* {rest}\n")?,
                    None => writeln!(out, "{line}\n")?,
                }
            }
            Ok(out)
        }
        Format::Table => {
            let mut out = String::new();
            writeln!(out, "{} ({})", c.name, shown(&args.file))?;
            writeln!(
                out,
                "formula unit {unit} ({}); units = formula units in the cell\n\
                 W = arrangements per {unit}; S0 = R ln W per mole of {unit}",
                c.formula_unit.describe()
            )?;
            if c.is_diluted() {
                writeln!(out, "{}", diluted_words(&unit))?;
            }
            writeln!(out)?;
            out += &table.render();
            writeln!(out)?;
            if s.checks.is_empty() {
                writeln!(out, "cross-checks: none computed in this run")?;
            } else {
                writeln!(out, "cross-checks (a second route computed in this run):")?;
                out += &text::checks_table(&s.checks, &unit).render();
            }
            writeln!(out)?;
            for line in below_table(s, &unit) {
                writeln!(out, "{line}")?;
            }
            Ok(out)
        }
    }
}

/// The lines under the tables: failed cross-checks (loudly), what a `*` means, what exact
/// counts are, why stages stopped, notes, and last the value to cite.
fn below_table(s: &Survey, unit: &str) -> Vec<String> {
    let mut lines: Vec<String> = s
        .failed_checks()
        .into_iter()
        .map(|c| text::check_failure(c, unit))
        .collect();
    for e in [Some(&s.pauling), s.bethe.as_ref()].into_iter().flatten() {
        lines.extend(text::weighing_lines(e, unit));
        if let Some(caveat) = local::caveat(e) {
            lines.push(format!(
                "* {}: {}{}",
                text::method_label(e),
                caveat.explain(unit),
                if e.method == Method::Pauling && s.bethe.is_some() {
                    "; the Bethe row carries the mean-field estimate"
                } else {
                    ""
                }
            ));
        }
    }
    if !s.exact.is_empty() {
        lines.push(
            "Exact counts are for finite periodic cells; they approach the infinite crystal as the \
             cell grows. Cells that wrap a bond onto itself (the smallest) are exact for that torus only."
                .into(),
        );
    }
    if s.stopped.is_some() {
        lines.push(format!(
            "exact counts stopped: {}",
            super::words::stopped(s)
        ));
    }
    lines.extend(super::words::notes(s));
    lines.push(text::cited_line(s, unit));
    lines
}
