//! `groundcount strip FILE --widths 2..12`: transfer matrices on strips (cylinders by
//! default) of growing width, and their extrapolation to the infinite crystal.

use std::fmt::Write;
use std::path::{Path, PathBuf};

use clap::ValueEnum;
use groundcount::Error;
use groundcount::context::{Context, Progress};
use groundcount::counters::extrapolate::Scaling;
use groundcount::counters::transfer::{self, SectorBasis, Sectors, StripConfig};
use groundcount::crosscheck::{CrossCheck, Route};
use groundcount::estimate::EstimateRecord;
use groundcount::json::{CheckRecord, WidthRecord};
use groundcount::text::{self, Table, sig};

use super::{Common, Format, Partial, load, shown, with_threads};

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
    /// The charge sector that holds the largest eigenvalue (when the rule conserves a
    /// charge, such as the arrow flux of ice rules), found and checked width by width;
    /// states paired with their reversals when the rule allows it.
    Largest,
    /// Every state.
    Full,
}

/// Arguments of `strip`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML) or structure file (CIF) of a two-dimensional crystal, or of a
    /// three-dimensional one for thin prisms (infinitely long along `--along`, a finite periodic or open section).
    file: PathBuf,
    /// The data block to read when FILE is a structure file (CIF) with several structures.
    #[arg(long, value_name = "NAME")]
    block: Option<String>,
    /// Widths in cells across the strip: a range `2..12` (inclusive) or a list `4,6,8`.
    #[arg(long, default_value = "2..12")]
    widths: String,
    /// Spacing of the widths in a range (e.g. 3 for a three-sublattice structure); with 1
    /// the spacing used for the extrapolation is chosen from the values.
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
    /// State space: the conserved-charge sector of the largest eigenvalue, or every state.
    #[arg(long, value_enum, default_value_t = SectorsArg::Largest)]
    sectors: SectorsArg,
    /// Power iterations allowed per width before giving up.
    #[arg(long, default_value_t = 200_000)]
    max_iterations: usize,
    #[command(flatten)]
    common: Common,
}

/// The JSON document of `strip` (docs/json.md).
#[derive(serde::Serialize)]
struct Document {
    lattice: String,
    file: String,
    content_hash: String,
    formula_unit: String,
    method: groundcount::estimate::Method,
    /// The cell axis along the strip.
    along: &'static str,
    /// The boundary across the strip: `periodic` or `open`.
    around: &'static str,
    /// Three-dimensional prisms: cells along the second axis across.
    depth: Option<usize>,
    widths: Vec<WidthRecord>,
    /// Widths computed only to check the sector.
    calibration_widths: Vec<usize>,
    checks: Vec<CheckRecord>,
    checks_agree: bool,
    stopped: Option<StopRecord>,
    /// Why there is no extrapolation, in words.
    no_extrapolation: Option<String>,
    step: Option<usize>,
    period: Option<usize>,
    scaling: Option<&'static str>,
    central_charge: Option<f64>,
    w_per_unit: Option<f64>,
    w_uncertainty: Option<f64>,
    s_over_r: Option<f64>,
    s_j_per_mol_k: Option<f64>,
    s_uncertainty: Option<f64>,
    seconds: Option<f64>,
    /// A weighted crystal: ln Z per formula unit, extrapolated (absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    ln_z_per_unit: Option<f64>,
    /// A weighted crystal: the imposed means, their fields and the means reached.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    fields: Vec<groundcount::estimate::FieldValue>,
}

/// Why a run stopped.
#[derive(serde::Serialize)]
struct StopRecord {
    /// The width that did not finish.
    width: usize,
    /// Why, in words.
    reason: String,
    /// What the width would have needed.
    need: Option<NeedRecord>,
}

/// What a width that did not finish would have needed, from the growth of the widths
/// before it.
#[derive(serde::Serialize)]
struct NeedRecord {
    peak_states: f64,
    bytes: f64,
    seconds: f64,
    from_widths: Vec<usize>,
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
    let lattice = load(Some(&args.file), args.block.as_deref())?;
    let c = &lattice.crystal;
    if args.depth.is_some() && c.dimensions != 3 {
        anyhow::bail!(
            "--depth sets the second axis across a prism of a three-dimensional crystal; '{}' has {} dimensions",
            c.name,
            c.dimensions
        );
    }
    let scaling = match args.scaling {
        ScalingArg::Auto => Scaling::Auto,
        ScalingArg::Critical => Scaling::Critical,
        ScalingArg::Gapped => Scaling::Gapped,
    };
    // A step above 1 is the user's spacing (and the families' period); with 1 the spacing
    // is chosen from the values, as `estimate` does.
    let step = (args.step > 1).then_some(args.step);
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
        widths: widths.clone(),
        step,
        scaling,
        ..Default::default()
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
    let mut context = Context::new().with_interrupt(super::interrupt());
    if let Some(b) = bar.clone() {
        let done = std::sync::Mutex::new(0.0f64);
        context = context.with_observer(move |p| {
            if let Progress::Width { width } = p {
                let mut d = done.lock().expect("progress counter");
                b.set_position((1000.0 * *d / total) as u64);
                b.set_message(format!("cylinder of width {width}"));
                *d += cost(*width);
            }
        });
    }
    let outcome = with_threads(args.common.threads, || transfer::run(c, &config, &context));
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let outcome = outcome??;
    let section = Section::of(c.dimensions, config.along, args.depth);
    let output = render(
        args.common.format,
        &args.file,
        &lattice,
        &config,
        &section,
        &outcome,
    )?;
    let failed: Vec<&CrossCheck> = outcome.checks.iter().filter(|x| !x.agrees()).collect();
    if let Some(stop) = &outcome.stopped {
        let code = match stop.error {
            Error::Interrupted { .. } => 130,
            _ => 2,
        };
        return Err(Partial {
            output: if outcome.widths.is_empty() {
                String::new()
            } else {
                output
            },
            message: stop_message(stop, &outcome),
            code,
        }
        .into());
    }
    if let (None, Some(why)) = (&outcome.series, &outcome.no_series) {
        return Err(Partial {
            output,
            message: format!("no extrapolation to infinite width: {why}"),
            code: 2,
        }
        .into());
    }
    if !failed.is_empty() {
        return Err(Partial {
            output,
            message: format!(
                "{} cross-check{} failed ({}); the extrapolated value is not to be cited",
                failed.len(),
                if failed.len() == 1 { "" } else { "s" },
                check_words(failed[0])
            ),
            code: 3,
        }
        .into());
    }
    Ok(output)
}

/// Why a run stopped, what the width would have needed, and what to do.
fn stop_message(stop: &transfer::Stopped, run: &transfer::StripRun) -> String {
    let kept = if run.widths.is_empty() {
        "no width finished".to_string()
    } else {
        let list: Vec<String> = run.widths.iter().map(|r| r.width.to_string()).collect();
        format!(
            "the widths finished ({}) are printed{}",
            list.join(", "),
            if run.series.is_some() {
                " with their extrapolation"
            } else {
                ", without an extrapolation (too few widths)"
            }
        )
    };
    format!("{}; {kept}", stop_reason(stop))
}

/// Why a run stopped and what the width would have needed, without the advice on what
/// was kept.
fn stop_reason(stop: &transfer::Stopped) -> String {
    let w = stop.width;
    let need = stop
        .need
        .as_ref()
        .map(|n| {
            format!(
                "; from the growth between widths {} and {} it would need roughly {} states at the largest step of a column and {} of memory{}",
                n.from[0],
                n.from[1],
                sig(n.peak_states, 2),
                bytes(n.bytes),
                if n.seconds > 1.0 {
                    format!(", about {} s", sig(n.seconds, 2))
                } else {
                    String::new()
                }
            )
        })
        .unwrap_or_default();
    match &stop.error {
        Error::Budget { detail, .. } => format!(
            "width {w} needs more than the state budget ({detail}; set by --max-states){need}; \
             rerun with a larger --max-states if the memory allows, or cite the widths finished"
        ),
        Error::Deadline { .. } => format!("width {w} ran out of time{need}"),
        Error::Interrupted { .. } => format!("interrupted during width {w}"),
        Error::NotConverged { .. } => format!("width {w}: {}; raise --max-iterations", stop.error),
        other => format!("width {w}: {}", super::words::error(other)),
    }
}

/// Bytes in words.
fn bytes(b: f64) -> String {
    if b >= 1e9 {
        format!("{} GB", sig(b / 1e9, 2))
    } else {
        format!("{} MB", sig(b / 1e6, 2))
    }
}

/// A range or list of widths in words.
fn width_list(v: &[usize]) -> String {
    let contiguous = v.windows(2).all(|p| p[1] == p[0] + 1);
    match v {
        [] => String::new(),
        [a] => a.to_string(),
        [a, .., b] if contiguous => format!("{a}..{b}"),
        _ => v
            .iter()
            .map(|w| w.to_string())
            .collect::<Vec<_>>()
            .join(", "),
    }
}

/// "width 4" or "widths 2..8".
fn widths_words(v: &[usize]) -> String {
    if v.len() == 1 {
        format!("width {}", v[0])
    } else {
        format!("widths {}", width_list(v))
    }
}

/// One check in words.
fn check_words(x: &CrossCheck) -> String {
    let what = match &x.route {
        Route::FullSpace { width } => {
            format!("width {width}: the kept sector against the full space")
        }
        Route::NeighbourSectors { width } => {
            format!("width {width}: the kept sector against its neighbouring charges")
        }
        Route::TorusTrace { width, length } => format!(
            "the trace of T^{length} at width {width} against the frontier count of the same cell"
        ),
        Route::TorusBound { width, length } => {
            format!("width {width}: against the bound from the {width}×{length} torus count")
        }
        other => format!("{other:?}"),
    };
    format!(
        "{what}: ln W per unit {} against {}{}",
        sig(x.value, 15),
        sig(x.reference, 15),
        if x.is_bound() { " (a lower bound)" } else { "" }
    )
}

/// The sector column of a width: the charge kept and how it was established.
fn sector_cell(r: &transfer::StripResult) -> String {
    if r.basis == SectorBasis::Whole {
        return "all".to_string();
    }
    let how = sector_basis_word(r);
    format!(
        "{} ({how})",
        r.sector.map_or("—".to_string(), |q| q.to_string())
    )
}

/// How a width's sector was established, in one or two words.
fn sector_basis_word(r: &transfer::StripResult) -> &'static str {
    match r.basis {
        SectorBasis::Whole => "all",
        SectorBasis::Given => "given",
        SectorBasis::FullSpace => "full space",
        SectorBasis::LocalMaximum => "neighbours",
        SectorBasis::Predicted { .. } => "predicted",
    }
}

/// How each width's sector was established, in one line (empty when none was kept).
fn sector_summary(widths: &[transfer::StripResult]) -> String {
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
    let given = of(&|b| *b == SectorBasis::Given);
    let mut parts = Vec::new();
    if !full.is_empty() {
        parts.push(format!(
            "{}: the full space's largest eigenvector lies in it and the eigenvalues agree",
            widths_words(&full)
        ));
    }
    if !local.is_empty() {
        parts.push(format!(
            "{}: larger than the neighbouring charges on both sides",
            widths_words(&local)
        ));
    }
    if !predicted.is_empty() {
        parts.push(format!(
            "{}: predicted from the checked widths, not checked (beyond the cost allowed for checks)",
            widths_words(&predicted)
        ));
    }
    if !given.is_empty() {
        parts.push(format!("{}: given, not checked", widths_words(&given)));
    }
    parts.join("; ")
}

/// The cross-checks in one line each per route (failures in full).
fn check_summary(checks: &[CrossCheck]) -> Vec<String> {
    let mut lines = Vec::new();
    for x in checks.iter().filter(|x| !x.agrees()) {
        lines.push(format!("FAILED: {}", check_words(x)));
    }
    // (words, the width of a check of that route).
    type Group<'a> = (&'a str, fn(&Route) -> Option<usize>);
    let groups: [Group; 4] = [
        ("kept sector = full space at", |r| match r {
            Route::FullSpace { width } => Some(*width),
            _ => None,
        }),
        (
            "kept sector above its neighbouring charges at",
            |r| match r {
                Route::NeighbourSectors { width } => Some(*width),
                _ => None,
            },
        ),
        (
            "trace of T^L = frontier count of the periodic cell at",
            |r| match r {
                Route::TorusTrace { width, .. } => Some(*width),
                _ => None,
            },
        ),
        (
            "eigenvalue above the bound of the exact torus count at",
            |r| match r {
                Route::TorusBound { width, .. } => Some(*width),
                _ => None,
            },
        ),
    ];
    for (words, pick) in groups {
        let agreeing: Vec<&CrossCheck> = checks
            .iter()
            .filter(|x| x.agrees() && pick(&x.route).is_some())
            .collect();
        if agreeing.is_empty() {
            continue;
        }
        let w: Vec<usize> = agreeing.iter().filter_map(|x| pick(&x.route)).collect();
        let largest = agreeing
            .iter()
            .filter(|x| !x.is_bound())
            .map(|x| (x.value - x.reference).abs())
            .fold(0.0, f64::max);
        lines.push(format!(
            "agree: {words} {}{}",
            widths_words(&w),
            if agreeing.iter().all(|x| x.is_bound()) {
                String::new()
            } else {
                format!(" (largest difference {} in ln W per unit)", sig(largest, 2))
            }
        ));
    }
    lines
}

/// The output of a run in the format asked.
fn render(
    format: Format,
    file: &Path,
    lattice: &groundcount::Lattice,
    config: &StripConfig,
    section: &Section,
    run: &transfer::StripRun,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let unit = &c.formula_unit.name;
    let series = run.series.as_ref();
    let failed = run.checks.iter().any(|x| !x.agrees());
    let shown_file = shown(&Some(file.to_path_buf()));
    match format {
        Format::Json => {
            let e = series.map(|s| EstimateRecord::from(&s.estimate));
            Ok(groundcount::json::to_string(&Document {
                lattice: c.name.clone(),
                file: shown_file,
                content_hash: lattice.content_hash.clone(),
                formula_unit: unit.clone(),
                method: groundcount::estimate::Method::TransferMatrix,
                along: AXES[config.along],
                around: if config.periodic { "periodic" } else { "open" },
                depth: section.depth,
                widths: run.widths.iter().map(WidthRecord::from).collect(),
                calibration_widths: run.calibration.clone(),
                checks: groundcount::json::checks(&run.checks),
                checks_agree: !failed,
                stopped: run.stopped.as_ref().map(|s| StopRecord {
                    width: s.width,
                    reason: stop_reason(s),
                    need: s.need.as_ref().map(|n| NeedRecord {
                        peak_states: n.peak_states,
                        bytes: n.bytes,
                        seconds: n.seconds,
                        from_widths: n.from.clone(),
                    }),
                }),
                no_extrapolation: run.no_series.clone(),
                step: series.map(|s| s.step),
                period: series.map(|s| s.extrapolation.period),
                scaling: series.map(|s| groundcount::json::scaling_word(s.extrapolation.scaling)),
                central_charge: series.and_then(|s| s.central_charge),
                w_per_unit: e.as_ref().map(|e| e.w_per_unit),
                w_uncertainty: e.as_ref().and_then(|e| e.w_uncertainty),
                s_over_r: e.as_ref().map(|e| e.s_over_r),
                s_j_per_mol_k: e.as_ref().map(|e| e.s_j_per_mol_k),
                s_uncertainty: e.as_ref().and_then(|e| e.s_uncertainty),
                seconds: e.as_ref().map(|e| e.seconds),
                ln_z_per_unit: e.as_ref().and_then(|e| e.ln_z_per_unit),
                fields: e.as_ref().map(|e| e.fields.clone()).unwrap_or_default(),
            })?)
        }
        format => {
            let w_head = format!("W per {unit}");
            let any_sector = run.widths.iter().any(|r| r.basis != SectorBasis::Whole);
            let mut head = vec!["width", "states", "iter", "ln λ", &w_head, "bracket Δ ln λ"];
            let mut csv_head = vec![
                "width",
                "states",
                "iterations",
                "ln λ",
                &w_head,
                "ln λ bracket lower",
                "ln λ bracket upper",
            ];
            if any_sector {
                head.push("sector");
                csv_head.push("sector");
                csv_head.push("sector basis");
            }
            head.push("time s");
            csv_head.push("time s");
            let mut t = Table::new(&head).with_csv(&csv_head);
            for r in &run.widths {
                let mut row = vec![
                    r.width.to_string(),
                    r.states.to_string(),
                    r.iterations.to_string(),
                    sig(r.ln_lambda, 15),
                    sig(r.ln_w_per_unit.exp(), 13),
                    sig(r.ln_bracket.1 - r.ln_bracket.0, 2),
                ];
                let mut csv = vec![
                    r.width.to_string(),
                    r.states.to_string(),
                    r.iterations.to_string(),
                    text::number(r.ln_lambda),
                    text::number(r.ln_w_per_unit.exp()),
                    text::number(r.ln_bracket.0),
                    text::number(r.ln_bracket.1),
                ];
                if any_sector {
                    row.push(sector_cell(r));
                    csv.push(r.sector.map_or(String::new(), |q| q.to_string()));
                    csv.push(sector_basis_word(r).to_string());
                }
                row.push(format!("{:.3}", r.seconds));
                csv.push(text::number(r.seconds));
                t.row(row);
                t.csv_row(csv);
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
                shown_file,
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
            if c.is_weighted() {
                out += &weighted_words(c, run, unit)?;
            }
            match series {
                Some(s) if !failed => {
                    let e = &s.estimate;
                    let x = &s.extrapolation;
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
                    if let Some(w) = &e.weighing {
                        writeln!(
                            out,
                            "ln Z per {unit}        {} (weighted sum over arrangements, W → ∞)",
                            sig(w.ln_z_per_unit, 13)
                        )?;
                        for f in &w.fields {
                            writeln!(
                                out,
                                "field                {}: h = {} (W → ∞), {} asked, {} reached",
                                f.label,
                                sig(f.field, 10),
                                sig(f.target, 10),
                                sig(f.achieved, 10)
                            )?;
                        }
                    }
                    writeln!(out, "extrapolation        {}", extrapolation_words(s, run))?;
                    writeln!(
                        out,
                        "method               {}, {} s in all",
                        text::method_label(e),
                        sig(e.seconds, 3)
                    )?;
                }
                Some(_) => {
                    writeln!(
                        out,
                        "NO VALUE: a cross-check below FAILED, so the extrapolation of these widths is not to be cited"
                    )?;
                }
                None => {
                    writeln!(
                        out,
                        "no extrapolation: {}",
                        run.no_series.as_deref().unwrap_or("too few widths")
                    )?;
                }
            }
            let sectors = sector_summary(&run.widths);
            if !sectors.is_empty() {
                writeln!(out, "charge sector        {sectors}")?;
            }
            if !run.calibration.is_empty() {
                writeln!(
                    out,
                    "                     (widths {} were computed only to check the sector)",
                    width_list(&run.calibration)
                )?;
            }
            let lines = check_summary(&run.checks);
            for (i, line) in lines.iter().enumerate() {
                writeln!(
                    out,
                    "{}{line}",
                    if i == 0 {
                        "cross-checks         "
                    } else {
                        "                     "
                    }
                )?;
            }
            if let Some(stop) = &run.stopped {
                writeln!(out, "stopped              {}", stop_reason(stop))?;
            }
            Ok(out)
        }
    }
}

/// How the limit was taken, in words.
fn extrapolation_words(s: &transfer::StripSeries, run: &transfer::StripRun) -> String {
    let x = &s.extrapolation;
    let used: Vec<usize> = s.widths.iter().map(|r| r.width).collect();
    let subset = if used.len() < run.widths.len() {
        format!(
            "the widths that are multiples of {} ({}), the spacing with the smallest spread; ",
            s.step,
            width_list(&used)
        )
    } else {
        String::new()
    };
    let families = if x.smooth {
        format!("families W mod {}", x.period)
    } else {
        format!(
            "families W mod {} (too few widths to find the families' period: the bar is rough)",
            x.period
        )
    };
    let widened = if x.widened {
        "; widened to cover the other spacings' extrapolations"
    } else {
        ""
    };
    match (x.scaling, s.central_charge) {
        (Scaling::Gapped, _) => format!(
            "{subset}gapped (exponential convergence): Aitken's Δ² on the last three widths of \
             each family ({families}); value of the family W ≡ {}, uncertainty from its \
             window before, widened where another family disagrees{widened}",
            x.fits[0].family
        ),
        (_, c) => format!(
            "{subset}critical: {} polynomial {} in {} (orders, windows, {families}); \
             value and spread of the family W ≡ {} (mod {}), widened where another \
             family disagrees beyond its own spread{widened}{}",
            x.fits.len(),
            if x.fits.len() == 1 { "fit" } else { "fits" },
            match x.exponent {
                1 => "1/W (open edges)".to_string(),
                2 => "1/W²".to_string(),
                e => format!("1/W^{e} (the leading term only on prisms)"),
            },
            x.fits[0].family,
            x.period,
            c.map(|c| format!("; central charge of the 1/W² term {}", sig(c, 4)))
                .unwrap_or_default()
        ),
    }
}

/// The weighted widths: what `W per unit` means there, and ln Z, ⟨ln w⟩, the fields and the
/// means reached per width.
fn weighted_words(
    c: &groundcount::crystal::Crystal,
    run: &transfer::StripRun,
    unit: &str,
) -> anyhow::Result<String> {
    let mut out = String::new();
    writeln!(
        out,
        "weighted: W per {unit} is exp(S/R), S/R = ln Z − ⟨ln w⟩ per {unit}, the entropy of the \
         weighted ensemble (w includes the fields of the imposed means)"
    )?;
    let labels: Vec<String> = c.means.iter().map(|m| format!("h {}", m.label)).collect();
    let reached: Vec<String> = c
        .means
        .iter()
        .map(|m| format!("mean {}", m.label))
        .collect();
    let ln_z = format!("ln Z per {unit}");
    let ln_w = format!("⟨ln w⟩ per {unit}");
    let mut head: Vec<&str> = vec!["width", &ln_z, &ln_w, "difference error"];
    for (h, m) in labels.iter().zip(&reached) {
        head.push(h);
        head.push(m);
    }
    let mut t = Table::new(&head);
    for r in &run.widths {
        let Some(w) = &r.weighing else { continue };
        let mut row = vec![
            r.width.to_string(),
            sig(w.ln_z_per_unit, 13),
            sig(w.mean_ln_w_per_unit, 13),
            sig(w.derivative_error, 2),
        ];
        for (h, m) in w.fields.iter().zip(&w.achieved) {
            row.push(sig(*h, 10));
            row.push(sig(*m, 10));
        }
        t.row(row);
    }
    writeln!(out)?;
    out += &t.render();
    writeln!(out)?;
    Ok(out)
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

    #[test]
    fn a_failed_cross_check_withholds_the_value() {
        let path = format!("{}/lattices/hard-squares.yaml", env!("CARGO_MANIFEST_DIR"));
        let lattice = groundcount::Lattice::from_file(Path::new(&path)).unwrap();
        let config = StripConfig {
            widths: vec![2, 3, 4, 5, 6, 7],
            ..Default::default()
        };
        let mut run = transfer::run(&lattice.crystal, &config, &Context::new()).unwrap();
        let section = Section::of(2, 0, None);
        let file = Path::new(&path);
        let fine = render(Format::Table, file, &lattice, &config, &section, &run).unwrap();
        assert!(fine.contains("W → ∞") && !fine.contains("FAILED"), "{fine}");
        // A disagreement, as a broken operator would produce it.
        run.checks.push(CrossCheck {
            method: groundcount::estimate::Method::TransferMatrix,
            route: Route::FullSpace { width: 7 },
            value: 0.40,
            reference: 0.41,
            tolerance: 1e-12,
        });
        let text = render(Format::Table, file, &lattice, &config, &section, &run).unwrap();
        assert!(text.contains("FAILED: width 7"), "{text}");
        assert!(
            text.contains("NO VALUE") && !text.contains("W → ∞"),
            "{text}"
        );
        let json = render(Format::Json, file, &lattice, &config, &section, &run).unwrap();
        let v: serde_json::Value = serde_json::from_str(&json).unwrap();
        assert_eq!(v["checks_agree"], false);
        assert_eq!(
            v["checks"].as_array().unwrap().last().unwrap()["agrees"],
            false
        );
    }
}
