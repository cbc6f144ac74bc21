//! `groundcount estimate [FILE]`: the main job. Pauling's estimate, then exact counts on
//! periodic cells of growing size within a time budget, side by side.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::counters::exact;
use groundcount::report::{self, sig};
use groundcount::survey::{SurveyConfig, survey};
use serde_json::json;

use super::{Common, Format, load, shown, with_threads};

/// Arguments of `estimate`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML); the built-in ice Ih description when omitted.
    file: Option<PathBuf>,
    /// Time budget in seconds for all methods together (exact counts get the first 40 %).
    #[arg(long, default_value_t = 20.0)]
    budget: f64,
    /// Largest number of partial states an exact count may hold at once.
    #[arg(long, default_value_t = exact::DEFAULT_MAX_STATES)]
    max_states: usize,
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    super::check_budget(args.budget)?;
    let lattice = load(args.file.as_deref())?;
    let c = &lattice.crystal;
    let (observer, bars) = args.common.survey_progress();
    let mut config = SurveyConfig {
        budget: args.budget,
        max_states: args.max_states,
        observer,
        interrupt: super::interrupt(),
        ..SurveyConfig::default()
    };
    config.sample.interrupt = config.interrupt.clone();
    let result = with_threads(args.common.threads, || survey(c, &config))?;
    bars.finish();
    let s = result?;
    if s.interrupted {
        // Print what was finished, then say it was interrupted (exit 130).
        let output = render(&args, &lattice, &s)?;
        return Err(super::Partial {
            output,
            note: "the table holds what was finished before Ctrl-C".into(),
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
    let rows = s.estimates();
    let stopped = &s.stopped;
    let notes = &s.notes;
    let transfer = s.strips.as_ref().map(|t| &t.estimate);
    let monte_carlo = s.sampled.as_ref().map(|m| &m.sampled.estimate);
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
                "monte_carlo_infinite": s.extrapolated.as_ref().map(|x| report::estimate_json(c, &x.estimate, Some(p))),
                "cited": report::estimate_json(c, s.best(), Some(p)),
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
            if let Some(last) = s.largest_exact() {
                // Say so when a larger cell had none (odd tori for dimers).
                let which = if std::ptr::eq(last, s.exact.last().expect("a cell")) {
                    "largest cell counted"
                } else {
                    "largest cell counted with an arrangement"
                };
                writeln!(
                    out,
                    "{which}: {}, W = {} per {unit} (Pauling {}; difference {:+.3} %)",
                    last.cells.as_deref().unwrap_or(""),
                    sig(last.w_per_unit(), 8),
                    sig(p.w_per_unit(), 8),
                    100.0 * (last.w_per_unit() / p.w_per_unit() - 1.0)
                )?;
            }
            if !stopped.is_empty() {
                writeln!(out, "exact counts stopped: {stopped}")?;
            }
            for n in notes {
                writeln!(out, "{n}")?;
            }
            Ok(out)
        }
    }
}
