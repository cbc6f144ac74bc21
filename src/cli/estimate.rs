//! `groundcount estimate [FILE]`: the main job. Pauling's estimate, then exact counts on
//! periodic cells of growing size within a time budget, side by side, the cross-checks of
//! the run, and last one line naming the value to cite ([`Survey::cited`]).

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::counters::{exact, pauling};
use groundcount::estimate::Method;
use groundcount::report::{self, Columns};
use groundcount::survey::{Survey, SurveyConfig, survey};
use serde_json::json;

use super::{Common, Format, load, shown, with_threads};

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
    /// Monte Carlo cell for a 3D lattice, e.g. 3x3x3; default: up to four cubes, the
    /// largest of about 1000 formula units, extrapolated to the infinite crystal.
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
    let (observer, bars) = args.common.survey_progress();
    let sample_cells = match &args.sample_cells {
        Some(s) => Some(groundcount::cluster::Cells::parse(s, None, c.dimensions)?),
        None => None,
    };
    let mut config = SurveyConfig {
        budget: args.budget,
        max_states: args.max_states,
        max_exact_units: args.max_exact_units,
        sample_cells,
        observer,
        interrupt: super::interrupt(),
        ..SurveyConfig::default()
    };
    config.sample.seed = args.seed;
    if let Some(s) = args.sweeps {
        if s == 0 {
            anyhow::bail!("--sweeps must be at least 1");
        }
        config.sample.sweeps = s;
    }
    config.sample.interrupt = config.interrupt.clone();
    let result = with_threads(args.common.threads, || survey(c, &config))?;
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

/// The output of a finished (or interrupted) survey.
fn render(
    args: &Args,
    lattice: &groundcount::Lattice,
    s: &groundcount::survey::Survey,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let unit = c.formula_unit.name.clone();
    let p = &s.pauling;
    let transfer = s.strips.as_ref().map(|t| &t.estimate);
    let monte_carlo = s.sampled.as_ref().map(|m| &m.sampled.estimate);
    let table = report::survey_table(s, &unit, Columns::default());
    match args.common.format {
        Format::Json => {
            let v = json!({
                "lattice": c.name,
                "file": shown(&args.file),
                "content_hash": lattice.content_hash,
                "formula_unit": unit,
                "pauling": report::estimate_json(c, p, None),
                "bethe": s.bethe.as_ref().map(|e| report::estimate_json(c, e, Some(p))),
                "exact": s.exact.iter().map(|e| report::estimate_json(c, e, Some(p))).collect::<Vec<_>>(),
                "transfer_matrix": transfer.map(|e| report::estimate_json(c, e, Some(p))),
                "monte_carlo": monte_carlo.map(|e| report::estimate_json(c, e, Some(p))),
                "monte_carlo_cells": s.sampled_sizes.iter().map(|m| report::estimate_json(c, &m.sampled.estimate, Some(p))).collect::<Vec<_>>(),
                "monte_carlo_infinite": s.extrapolated.as_ref().map(|x| {
                    let mut v = report::estimate_json(c, &x.estimate, Some(p));
                    v["fit"] = json!({
                        "form": x.fit.form(),
                        "chi2": x.fit.chi2,
                        "dof": x.fit.dof,
                    });
                    v
                }),
                "checks": report::checks_json(&s.checks),
                "cited": report::cited_json(c, s),
                "passed_over": report::passed_over_json(&s.cited(), &unit),
                "stopped": s.stopped,
                "notes": s.notes,
            });
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(table.render_csv()),
        Format::Markdown => {
            let mut out = table.render_markdown();
            writeln!(out)?;
            if s.checks.is_empty() {
                writeln!(out, "cross-checks: none computed in this run\n")?;
            } else {
                writeln!(out, "cross-checks (a second route computed in this run):\n")?;
                out += &report::checks_table(&s.checks, &unit).render_markdown();
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
            writeln!(out)?;
            out += &table.render();
            writeln!(out)?;
            if s.checks.is_empty() {
                writeln!(out, "cross-checks: none computed in this run")?;
            } else {
                writeln!(out, "cross-checks (a second route computed in this run):")?;
                out += &report::checks_table(&s.checks, &unit).render();
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
        .map(|c| report::check_failure(c, unit))
        .collect();
    for e in [Some(&s.pauling), s.bethe.as_ref()].into_iter().flatten() {
        if let Some(caveat) = pauling::caveat(e) {
            lines.push(format!(
                "* {}: {}{}",
                report::method_label(e),
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
    if !s.stopped.is_empty() {
        lines.push(format!("exact counts stopped: {}", s.stopped));
    }
    lines.extend(s.notes.iter().cloned());
    lines.push(report::cited_line(s, unit));
    lines
}
