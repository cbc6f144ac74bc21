//! `groundcount strip FILE --widths 2..12`: transfer matrices on strips (cylinders by
//! default) of growing width, and their extrapolation to the infinite crystal.

use std::fmt::Write;
use std::path::PathBuf;

use clap::ValueEnum;
use groundcount::counters::extrapolate::Scaling;
use groundcount::counters::transfer::{self, Sectors, StripConfig};
use groundcount::report::{self, Table, sig};
use serde_json::json;

use super::{Common, Format, load, shown, with_threads};

/// Widest strip accepted.
const MAX_WIDTH: usize = 64;

/// Axis names.
const AXES: [&str; 3] = ["a", "b", "c"];

/// Boundary across the strip.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Around {
    /// Periodic: a cylinder.
    Periodic,
    /// Open edges.
    Open,
}

/// Cell axis along the strip.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum Axis {
    /// The first cell vector.
    A,
    /// The second cell vector.
    B,
    /// The third cell vector (three-dimensional crystals).
    C,
}

/// How the strip values approach the limit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum ScalingArg {
    /// Decide from the last differences.
    Auto,
    /// Corrections in 1/W², 1/W⁴, … (conformal invariance).
    Critical,
    /// Exponential convergence.
    Gapped,
}

/// Which states the operator keeps.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum SectorsArg {
    /// The charge sector with the most boundary states (when the rule conserves a charge,
    /// such as the arrow flux of ice rules), states paired with their reversals when the
    /// rule allows it.
    Largest,
    /// Every state.
    Full,
}

/// Arguments of `strip`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML) of a two-dimensional crystal, or of a three-dimensional one for
    /// thin prisms (infinitely long along `--along`, a finite periodic or open section).
    file: PathBuf,
    /// Widths in cells across the strip: a range `2..12` (inclusive) or a list `4,6,8`.
    #[arg(long, default_value = "2..12")]
    widths: String,
    /// Spacing of the widths in a range (e.g. 3 for a three-sublattice structure).
    #[arg(long, default_value_t = 1)]
    step: usize,
    /// Cell axis along the strip.
    #[arg(long, value_enum, default_value_t = Axis::A)]
    along: Axis,
    /// Three-dimensional crystals: cells along the second axis across the prism, the width
    /// being along the first (the axes other than `--along`, in the order a, b, c). Without
    /// it the sections are square, width × width.
    #[arg(long)]
    depth: Option<usize>,
    /// Boundary across the strip.
    #[arg(long, value_enum, default_value_t = Around::Periodic)]
    around: Around,
    /// How the values approach the limit.
    #[arg(long, value_enum, default_value_t = ScalingArg::Auto)]
    scaling: ScalingArg,
    /// Largest number of frontier states at any step of a column.
    #[arg(long, default_value_t = 1 << 24)]
    max_states: usize,
    /// State space: the largest conserved-charge sector, or every state.
    #[arg(long, value_enum, default_value_t = SectorsArg::Largest)]
    sectors: SectorsArg,
    /// Power iterations allowed per width before giving up.
    #[arg(long, default_value_t = 200_000)]
    max_iterations: usize,
    #[command(flatten)]
    common: Common,
}

/// The section of a prism of a three-dimensional crystal, for the report.
struct Section {
    /// Cells along the second axis across (null: as many as the width).
    depth: Option<usize>,
    /// "; sections W × 3 cells (across b × c)", or nothing in two dimensions.
    words: String,
}

impl Section {
    fn of(dimensions: usize, along: usize, depth: Option<usize>) -> Section {
        if dimensions != 3 {
            return Section {
                depth: None,
                words: String::new(),
            };
        }
        let across: Vec<&str> = (0..3).filter(|&a| a != along).map(|a| AXES[a]).collect();
        let second = depth.map_or("W".to_string(), |d| d.to_string());
        Section {
            depth,
            words: format!(
                "; sections W × {second} cells (across {} × {}), W the width",
                across[0], across[1]
            ),
        }
    }
}

/// Parse `2..12`, `2..=12` or `4,6,8` with a step.
pub(super) fn parse_widths(text: &str, step: usize) -> anyhow::Result<Vec<usize>> {
    let bad = |why: &str| {
        anyhow::anyhow!(
            "--widths '{text}': {why}; expected a range such as 2..12 or a list such as 4,6,8"
        )
    };
    if step == 0 {
        anyhow::bail!("--step must be at least 1");
    }
    let number = |p: &str| {
        p.trim()
            .parse::<usize>()
            .map_err(|_| bad(&format!("'{}' is not a whole number", p.trim())))
    };
    let widths: Vec<usize> = if let Some((lo, hi)) = text.split_once("..") {
        let (lo, hi) = (number(lo)?, number(hi.trim_start_matches('='))?);
        if hi < lo {
            return Err(bad("the range is empty"));
        }
        (lo..=hi).step_by(step).collect()
    } else {
        text.split(',').map(number).collect::<anyhow::Result<_>>()?
    };
    if widths.contains(&0) {
        return Err(bad("a width must be at least 1"));
    }
    if let Some(w) = widths.iter().find(|&&w| w > MAX_WIDTH) {
        return Err(bad(&format!("width {w} is above the limit of {MAX_WIDTH}")));
    }
    if widths.len() < 2 {
        return Err(bad("at least two widths are needed to extrapolate"));
    }
    Ok(widths)
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let widths = parse_widths(&args.widths, args.step)?;
    let lattice = load(Some(&args.file))?;
    let c = &lattice.crystal;
    if args.depth.is_some() && c.dimensions != 3 {
        anyhow::bail!(
            "--depth sets the second axis across a prism of a three-dimensional crystal; '{}' has {} dimensions",
            c.name,
            c.dimensions
        );
    }
    let config = StripConfig {
        along: match args.along {
            Axis::A => 0,
            Axis::B => 1,
            Axis::C => 2,
        },
        depth: args.depth,
        periodic: args.around == Around::Periodic,
        max_states: args.max_states,
        max_iterations: args.max_iterations,
        sectors: match args.sectors {
            SectorsArg::Largest => Sectors::Largest,
            SectorsArg::Full => Sectors::Full,
        },
        ..Default::default()
    };
    let scaling = match args.scaling {
        ScalingArg::Auto => Scaling::Auto,
        ScalingArg::Critical => Scaling::Critical,
        ScalingArg::Gapped => Scaling::Gapped,
    };
    // Progress in units of a rough cost model, 2^W per width (the state counts of the
    // shipped lattices grow like 1.6^W to 2^W), so that the ETA is not far off.
    let cost = |w: usize| 2f64.powi(w.min(60) as i32);
    let total: f64 = widths.iter().map(|&w| cost(w)).sum();
    let bar = args.common.progress().then(|| {
        let b = indicatif::ProgressBar::new(1000);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "transfer matrix [{bar:30}] {msg}, elapsed {elapsed}, ETA {eta}",
            )
            .expect("valid template")
            .progress_chars("=> "),
        );
        b
    });
    let done = std::sync::Mutex::new(0.0f64);
    let on_width = |w: usize| {
        let mut d = done.lock().expect("progress counter");
        if let Some(b) = &bar {
            b.set_position((1000.0 * *d / total) as u64);
            b.set_message(format!("cylinder of width {w}"));
        }
        *d += cost(w);
    };
    let s = with_threads(args.common.threads, || {
        transfer::series_with(c, &widths, args.step, scaling, &config, &on_width)
    });
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let s = s??;
    let section = Section::of(c.dimensions, config.along, args.depth);
    let e = &s.estimate;
    let x = &s.extrapolation;
    let unit = &c.formula_unit.name;
    let scaling_name = match x.scaling {
        Scaling::Gapped => "gapped",
        _ => "critical",
    };
    match args.common.format {
        Format::Json => {
            let v = json!({
                "lattice": c.name,
                "file": shown(&Some(args.file.clone())),
                "content_hash": lattice.content_hash,
                "formula_unit": unit,
                "method": e.method.name(),
                "along": AXES[config.along],
                "around": if config.periodic { "periodic" } else { "open" },
                "depth": section.depth,
                "widths": s.widths.iter().map(|r| json!({
                    "width": r.width,
                    "ln_lambda": r.ln_lambda,
                    "ln_lambda_bracket": [r.ln_bracket.0, r.ln_bracket.1],
                    "w_per_unit": r.ln_w_per_unit.exp(),
                    "states": r.states,
                    "recurrent_states": r.recurrent_states,
                    "bracket_certified": r.certified,
                    "peak_states": r.peak_states,
                    "iterations": r.iterations,
                    "sector": r.sector,
                    "reversal_pairs": r.reversal,
                    "seconds": r.seconds,
                })).collect::<Vec<_>>(),
                "scaling": scaling_name,
                "central_charge": s.central_charge,
                "w_per_unit": e.w_per_unit(),
                "uncertainty": e.sigma_w(),
                "s_over_r": e.s_over_r(),
                "s_j_per_mol_k": e.s_j_per_mol_k(),
                "s_uncertainty": e.sigma_s_j_per_mol_k(),
                "seconds": e.seconds,
            });
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        format => {
            let w_head = format!("W per {unit}");
            let mut t = Table::new(&[
                "width",
                "states",
                "iterations",
                "ln λ",
                &w_head,
                "ln λ bracket width",
                "time s",
            ])
            .with_csv(&[
                "width",
                "states",
                "iterations",
                "ln λ",
                &w_head,
                "ln λ bracket lower",
                "ln λ bracket upper",
                "time s",
            ]);
            for r in &s.widths {
                t.row(vec![
                    r.width.to_string(),
                    r.states.to_string(),
                    r.iterations.to_string(),
                    sig(r.ln_lambda, 15),
                    sig(r.ln_w_per_unit.exp(), 13),
                    sig(r.ln_bracket.1 - r.ln_bracket.0, 2),
                    format!("{:.3}", r.seconds),
                ]);
                t.csv_row(vec![
                    r.width.to_string(),
                    r.states.to_string(),
                    r.iterations.to_string(),
                    report::number(r.ln_lambda),
                    report::number(r.ln_w_per_unit.exp()),
                    report::number(r.ln_bracket.0),
                    report::number(r.ln_bracket.1),
                    report::number(r.seconds),
                ]);
            }
            match format {
                Format::Csv => return Ok(t.render_csv()),
                Format::Markdown => return Ok(t.render_markdown()),
                _ => {}
            }
            let mut out = String::new();
            writeln!(
                out,
                "{} ({}), {} along {} with {} boundaries across{}",
                c.name,
                shown(&Some(args.file.clone())),
                if c.dimensions == 3 {
                    "prisms"
                } else {
                    "strips"
                },
                AXES[config.along],
                if config.periodic { "periodic" } else { "open" },
                section.words
            )?;
            writeln!(out)?;
            out += &t.render();
            writeln!(out)?;
            let sw = e.sigma_w().unwrap_or(0.0);
            writeln!(
                out,
                "W per {unit} (W → ∞)   {} ± {}",
                sig(e.w_per_unit(), 13),
                sig(sw, 2)
            )?;
            writeln!(
                out,
                "S0/R                 {} ± {}",
                sig(e.s_over_r(), 13),
                sig(x.uncertainty, 2)
            )?;
            writeln!(
                out,
                "S0                   {} ± {} J/(mol K) per mole of {unit}",
                sig(e.s_j_per_mol_k(), 10),
                sig(e.sigma_s_j_per_mol_k().unwrap_or(0.0), 2)
            )?;
            let detail = match (x.scaling, s.central_charge) {
                (Scaling::Gapped, _) => format!(
                    "gapped (exponential convergence): Aitken's Δ² on the last three widths of \
                     each family W mod {}; value of the family W ≡ {}, uncertainty from its \
                     window before, widened where another family disagrees",
                    x.period, x.fits[0].family
                ),
                (_, c) => format!(
                    "critical: {} polynomial {} in {} (orders, windows, families W mod {}); \
                     value and spread of the family W ≡ {} (mod {}), widened where another \
                     family disagrees beyond its own spread{}",
                    x.fits.len(),
                    if x.fits.len() == 1 { "fit" } else { "fits" },
                    match x.exponent {
                        1 => "1/W (open edges)".to_string(),
                        2 => "1/W²".to_string(),
                        e => format!("1/W^{e} (the leading term only on prisms)"),
                    },
                    x.period,
                    x.fits[0].family,
                    x.period,
                    c.map(|c| format!("; central charge of the 1/W² term {}", sig(c, 4)))
                        .unwrap_or_default()
                ),
            };
            writeln!(out, "extrapolation        {detail}")?;
            writeln!(
                out,
                "method               {}, {} s in all",
                report::method_label(e),
                sig(e.seconds, 3)
            )?;
            Ok(out)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn widths_ranges_and_lists() {
        assert_eq!(parse_widths("2..5", 1).unwrap(), vec![2, 3, 4, 5]);
        assert_eq!(parse_widths("3..=12", 3).unwrap(), vec![3, 6, 9, 12]);
        assert_eq!(parse_widths("4, 6,8", 1).unwrap(), vec![4, 6, 8]);
        for bad in ["", "5..2", "0..4", "a..4", "4", "2..100", "2,x"] {
            assert!(parse_widths(bad, 1).is_err(), "{bad}");
        }
        assert!(parse_widths("2..6", 0).is_err());
    }
}
