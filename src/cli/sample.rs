//! `groundcount sample FILE --cells AxBxC`: Monte Carlo count of a large cell by
//! thermodynamic integration, with error bars from independent replicas; several cells
//! (`--cells 4x4x4,6x6x6`) with an extrapolation to the infinite crystal; one shard of a
//! split run (`--shard K/N --out FILE`, merged by `groundcount merge`).

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::pauling;
use groundcount::counters::sampling::{self, Sampled, shard, size, wang_landau};
use groundcount::model::Model;
use groundcount::report::{self, sig};

use super::{Common, Format, cell_header, load, pauling_line, with_threads};

/// Arguments of `sample`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML) or structure file (CIF).
    file: PathBuf,
    /// The data block to read when FILE is a structure file (CIF) with several structures.
    #[arg(long, value_name = "NAME")]
    block: Option<String>,
    /// Cell size in unit cells along each axis, e.g. 8x8x8 (periodic); several sizes
    /// separated by commas (4x4x4,6x6x6,8x8x8) are extrapolated to the infinite crystal.
    #[arg(long)]
    cells: String,
    /// Seed of the random streams; the same seed gives the same numbers on any thread count.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// The sampler: thermodynamic integration (default), or Wang–Landau with a
    /// multicanonical production stage, an independent cross-check on small cells.
    #[arg(long, value_enum, default_value_t = Sampler::Integration)]
    method: Sampler,
    /// Measured sweeps per quadrature node and replica (default 200); with
    /// `--method wang-landau`, the sweeps of each walk's Wang–Landau stage and again of
    /// its production (default 100000).
    #[arg(long)]
    sweeps: Option<usize>,
    /// With `--method wang-landau`: uniform random assignments per replica that fix the
    /// normalisation of the energy window.
    #[arg(long, default_value_t = 20_000)]
    uniform: usize,
    /// Equilibration sweeps per node (default: a quarter of --sweeps).
    #[arg(long)]
    equilibration: Option<usize>,
    /// Independent replicas (at least 2).
    #[arg(long, default_value_t = 8)]
    replicas: usize,
    /// Quadrature nodes on [0, β_max], 4m + 1.
    #[arg(long, default_value_t = 41)]
    nodes: usize,
    /// Largest inverse temperature sampled (default from the cell size).
    #[arg(long)]
    beta_max: Option<f64>,
    /// Single-variable moves only (no loop moves).
    #[arg(long)]
    no_loops: bool,
    /// Add batches of --replicas replicas until the 1σ error of ln W per formula unit
    /// (the relative error of W) is at most this.
    #[arg(long)]
    target_error: Option<f64>,
    /// Most replicas a --target-error run may use.
    #[arg(long, default_value_t = 1024)]
    max_replicas: usize,
    /// How many times the run may be repeated with twice the sweeps and equilibration when
    /// the passes up and down disagree (the equilibration check); 0 only reports the check.
    #[arg(long, default_value_t = 3)]
    max_extensions: usize,
    /// Run only part K of N of the run (K = 1..N; each part runs --replicas replicas) and
    /// write its raw results to --out for `groundcount merge`.
    #[arg(long, value_name = "K/N", requires = "out")]
    shard: Option<String>,
    /// The shard file to write (with --shard).
    #[arg(long, value_name = "FILE", requires = "shard")]
    out: Option<PathBuf>,
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    if let Some(out) = &args.out {
        super::check_output_file(out, "--out")?; // before any computing
    }
    let lattice = load(Some(&args.file), args.block.as_deref())?;
    let c = &lattice.crystal;
    let sizes: Vec<Cells> = args
        .cells
        .split(',')
        .map(|t| Cells::parse(t.trim(), None, c.dimensions))
        .collect::<Result<_, _>>()?;
    if let Some(t) = args.target_error
        && !(t > 0.0 && t.is_finite())
    {
        anyhow::bail!("--target-error must be a positive number, not {t}");
    }
    if args.method == Sampler::WangLandau {
        return run_wang_landau(&args, &lattice, &sizes);
    }
    let sweeps = args.sweeps.unwrap_or(200);
    let config = sampling::SampleConfig {
        seed: args.seed,
        replicas: args.replicas,
        sweeps,
        equilibration: args.equilibration.unwrap_or(sweeps / 4),
        nodes: args.nodes,
        beta_max: args.beta_max,
        loops: !args.no_loops,
        target_error: args.target_error,
        max_replicas: args.max_replicas,
        max_extensions: args.max_extensions,
        deadline: None,
        interrupt: super::interrupt(),
    };
    let shown = Shown {
        file: args.file.display().to_string(),
        nodes: args.nodes,
        target_error: args.target_error,
        max_replicas: args.max_replicas,
    };
    if let Some(spec) = &args.shard {
        if sizes.len() > 1 {
            anyhow::bail!(
                "--shard runs one cell; give one --cells size (run the shards of each size separately)"
            );
        }
        let (k, n) = parse_shard(spec)?;
        let out = args.out.as_ref().expect("clap requires --out with --shard");
        return run_shard(&args, &lattice, &sizes[0], &config, (k, n), out, &shown);
    }
    let mut results = Vec::new();
    for cells in &sizes {
        if config.interrupt.raised() {
            break;
        }
        let cluster = Cluster::new(c, cells.clone())?;
        let model = Model::new(&cluster)?;
        let s = match sample_one(&args.common, &model, &config) {
            Ok(s) => s,
            // Ctrl-C during a later cell: report the cells already done.
            Err(e)
                if !results.is_empty()
                    && matches!(
                        e.downcast_ref::<groundcount::Error>(),
                        Some(groundcount::Error::Interrupted { .. })
                    ) =>
            {
                break;
            }
            Err(e) => return Err(e),
        };
        results.push((model, s));
    }
    if results.is_empty() {
        return Err(groundcount::Error::Interrupted {
            what: "sampling, before any cell finished".into(),
        }
        .into());
    }
    let mut text = if sizes.len() == 1 {
        let (model, s) = &results[0];
        render(args.common.format, &lattice, &shown, model, s, None)?
    } else {
        render_sizes(args.common.format, &lattice, &shown, &results)?
    };
    if results.len() < sizes.len() && args.common.format == Format::Table {
        writeln!(
            text,
            "INTERRUPTED: {} of the {} cells sampled",
            results.len(),
            sizes.len()
        )?;
    }
    Ok(text)
}

/// The Monte Carlo method of `sample`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Sampler {
    /// Thermodynamic integration over inverse temperature.
    Integration,
    /// Wang–Landau (1/t) sampling of the density of states of the violation count, then
    /// multicanonical production.
    WangLandau,
}

/// What the output shows besides the results.
pub(super) struct Shown {
    /// The lattice file as named.
    pub file: String,
    /// Quadrature nodes.
    pub nodes: usize,
    /// The --target-error asked for.
    pub target_error: Option<f64>,
    /// --max-replicas.
    pub max_replicas: usize,
}

/// `sample --method wang-landau`: one cell, no shards or targets.
fn run_wang_landau(args: &Args, lattice: &Lattice, sizes: &[Cells]) -> anyhow::Result<String> {
    if sizes.len() > 1 || args.shard.is_some() || args.target_error.is_some() {
        anyhow::bail!(
            "--method wang-landau runs one cell with a fixed length: no several --cells, --shard or --target-error"
        );
    }
    let c = &lattice.crystal;
    let cluster = Cluster::new(c, sizes[0].clone())?;
    let model = Model::new(&cluster)?;
    let config = wang_landau::WangLandauConfig {
        seed: args.seed,
        replicas: args.replicas,
        sweeps: args.sweeps.unwrap_or(100_000) as u64,
        uniform: args.uniform,
        interrupt: super::interrupt(),
    };
    let bar = replica_bar(args.common.progress(), &model, config.replicas);
    let on_replica = || {
        if let Some(b) = &bar {
            b.inc(1);
        }
    };
    let w = with_threads(args.common.threads, || {
        wang_landau::wang_landau_with(&model, &config, &on_replica)
    });
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let w = w??;
    let p = pauling::estimate(c)?;
    let e = &w.estimate;
    let unit = &c.formula_unit.name;
    match args.common.format {
        Format::Json => {
            let mut v = report::estimate_json(c, e, Some(&p));
            v["algorithm"] = "wang-landau".into();
            v["seed"] = w.seed.into();
            v["replicas"] = w.replicas.into();
            v["sweeps"] = w.sweeps.into();
            v["energy_window"] = w.window.into();
            v["window_fraction"] = w.fraction.into();
            v["levels_visited"] = w.levels.into();
            v["per_replica_ln_w_per_unit"] = w.per_replica.clone().into();
            v["interrupted"] = w.interrupted.into();
            v["variables"] = model.variables.len().into();
            v["constraints"] = model.constraints.len().into();
            v["content_hash"] = lattice.content_hash.clone().into();
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(report::comparison_table(&[p, e.clone()], unit).render_csv()),
        Format::Markdown => Ok(report::comparison_table(&[p, e.clone()], unit).render_markdown()),
        Format::Table => {
            let mut out = cell_header(c, &args.file, e, &model);
            writeln!(out)?;
            writeln!(out, "W per {unit:<15} {}", pm(e.w_per_unit(), e.sigma_w()))?;
            writeln!(
                out,
                "S0/R per {unit:<12} {}",
                pm(e.s_over_r(), e.sigma_ln_w)
            )?;
            writeln!(
                out,
                "S0                    {} J/(mol K) per mole of {unit}",
                pm(e.s_j_per_mol_k(), e.sigma_s_j_per_mol_k())
            )?;
            out += &pauling_line(&p, unit);
            writeln!(out)?;
            writeln!(
                out,
                "Wang–Landau (1/t schedule) then multicanonical production, seed {}, {} walks of {} + {} sweeps, energy window E ≤ {} violated constraints \
                 (a fraction {} of uniform assignments), {} energies visited, {} s; σ is the standard error of the walks' mean",
                w.seed,
                w.replicas,
                w.sweeps,
                w.sweeps,
                w.window,
                sig(w.fraction, 4),
                w.levels,
                sig(e.seconds, 3)
            )?;
            if w.interrupted {
                writeln!(
                    out,
                    "INTERRUPTED: only {} walks finished; the estimate and its σ rest on those",
                    w.replicas
                )?;
            }
            Ok(out)
        }
    }
}

/// `K/N` with 1 ≤ K ≤ N.
fn parse_shard(spec: &str) -> anyhow::Result<(usize, usize)> {
    let parsed = spec
        .split_once('/')
        .and_then(|(k, n)| Some((k.trim().parse().ok()?, n.trim().parse().ok()?)));
    match parsed {
        Some((k, n)) if k >= 1 && k <= n => Ok((k, n)),
        _ => anyhow::bail!(
            "--shard expects K/N with 1 <= K <= N (e.g. 3/16 for the third of sixteen parts), found '{spec}'"
        ),
    }
}

/// Sample one model with a progress line.
fn sample_one(
    common: &Common,
    model: &Model,
    config: &sampling::SampleConfig,
) -> anyhow::Result<Sampled> {
    let progress = common.progress();
    let bar = replica_bar(progress, model, config.replicas);
    let on_replica = || {
        if let Some(b) = &bar {
            b.inc(1);
        }
    };
    let s = with_threads(common.threads, || {
        sampling::sample_with(model, config, &on_replica)
    })??;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    Ok(s)
}

/// A progress bar over replicas on standard error, when progress is wanted.
fn replica_bar(progress: bool, model: &Model, replicas: usize) -> Option<indicatif::ProgressBar> {
    if !progress {
        return None;
    }
    let bar = indicatif::ProgressBar::new(replicas as u64);
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{prefix} [{bar:30}] {pos}/{len} replicas, ETA {eta}",
        )
        .expect("valid template")
        .progress_chars("=> "),
    );
    bar.set_prefix(format!(
        "sampling {} ({} variables)",
        model.cells,
        model.variables.len()
    ));
    Some(bar)
}

/// Run one shard and write its file.
fn run_shard(
    args: &Args,
    lattice: &Lattice,
    cells: &Cells,
    config: &sampling::SampleConfig,
    (k, n): (usize, usize),
    out: &std::path::Path,
    shown: &Shown,
) -> anyhow::Result<String> {
    if args.target_error.is_some() {
        anyhow::bail!(
            "--shard runs a fixed number of replicas per part: give --replicas, not --target-error"
        );
    }
    let cluster = Cluster::new(&lattice.crystal, cells.clone())?;
    let model = Model::new(&cluster)?;
    let bar = replica_bar(args.common.progress(), &model, config.replicas);
    let on_replica = || {
        if let Some(b) = &bar {
            b.inc(1);
        }
    };
    let (part, s) = with_threads(args.common.threads, || {
        shard::run_shard(
            lattice,
            &shown.file,
            cells,
            &model,
            config,
            (k, n),
            &on_replica,
        )
    })??;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    std::fs::write(out, part.to_json())
        .map_err(|e| anyhow::anyhow!("{}: cannot write the shard file: {e}", out.display()))?;
    let r = config.replicas;
    let mut text = render(args.common.format, lattice, shown, &model, &s, None)?;
    if args.common.format == Format::Table {
        writeln!(
            text,
            "shard {k} of {n} (replicas {}..{}) written to {}; this part alone is the estimate above. \
             Merge the parts with `groundcount merge FILE...`",
            (k - 1) * r,
            k * r - 1,
            out.display()
        )?;
    }
    Ok(text)
}

/// The output of one sampled cell. `merged` says which shards of how many a merge used.
pub(super) fn render(
    format: Format,
    lattice: &Lattice,
    shown: &Shown,
    model: &Model,
    s: &Sampled,
    merged: Option<(&[usize], usize)>,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let p = pauling::estimate(c)?;
    let e = &s.estimate;
    let unit = &c.formula_unit.name;
    match format {
        Format::Json => {
            let mut v = sampled_json(lattice, model, s, shown);
            if let Some((present, n)) = merged {
                v["shards"] = n.into();
                v["shards_merged"] = present.into();
            }
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(report::comparison_table(&[p, e.clone()], unit).render_csv()),
        Format::Markdown => Ok(report::comparison_table(&[p, e.clone()], unit).render_markdown()),
        Format::Table => {
            let mut out = String::new();
            out += &cell_header(c, std::path::Path::new(&shown.file), e, model);
            writeln!(out)?;
            writeln!(out, "W per {unit:<15} {}", pm(e.w_per_unit(), e.sigma_w()))?;
            writeln!(
                out,
                "S0/R per {unit:<12} {}",
                pm(e.s_over_r(), e.sigma_ln_w)
            )?;
            writeln!(
                out,
                "S0                    {} J/(mol K) per mole of {unit}",
                pm(e.s_j_per_mol_k(), e.sigma_s_j_per_mol_k())
            )?;
            out += &pauling_line(&p, unit);
            writeln!(out)?;
            out += &diagnostics(s, shown);
            if let Some((present, n)) = merged {
                let missing: Vec<String> = (1..=n)
                    .filter(|k| !present.contains(k))
                    .map(|k| k.to_string())
                    .collect();
                writeln!(
                    out,
                    "merged {} of {n} shards{}",
                    present.len(),
                    if missing.is_empty() {
                        String::new()
                    } else {
                        format!(
                            " (missing: {}; the estimate uses the replicas present)",
                            missing.join(", ")
                        )
                    }
                )?;
            }
            Ok(out)
        }
    }
}

/// `x ± σ` with 8 and 2 significant digits.
fn pm(x: f64, s: Option<f64>) -> String {
    match s {
        Some(s) => format!("{} ± {}", sig(x, 8), sig(s, 2)),
        None => sig(x, 8),
    }
}

/// The error budget and run lines under a sampled result.
fn diagnostics(s: &Sampled, shown: &Shown) -> String {
    let unit_free = |x: f64| sig(x, 2);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "σ of ln W per formula unit: statistical {} (standard error of {} replicas × {} for their number), quadrature {}, tail {}{} (root sum of squares reported)",
        unit_free(s.sigma_statistical),
        s.replicas,
        sig(sampling::student_factor(s.replicas), 3),
        unit_free(s.sigma_quadrature),
        unit_free(s.sigma_tail),
        if s.sigma_equilibration > 0.0 {
            format!(", equilibration {}", unit_free(s.sigma_equilibration))
        } else {
            String::new()
        }
    );
    let _ = writeln!(
        out,
        "thermodynamic integration, seed {}, {} replicas × {} nodes up to β = {} and back, {} + {} sweeps per node and pass ({} measured sweeps in all), {} updates, {} s",
        s.seed,
        s.replicas,
        shown.nodes,
        sig(s.beta_max, 3),
        s.equilibration,
        s.sweeps.div_ceil(2),
        s.samples,
        s.updates,
        sig(s.estimate.seconds, 3)
    );
    out += &equilibration_line(s);
    if s.interrupted {
        let _ = writeln!(
            out,
            "INTERRUPTED: only {} replicas finished; the estimate and its σ rest on those",
            s.replicas
        );
    }
    let _ = writeln!(
        out,
        "violated constraints left at β_max: {} on average; loop moves: {}",
        sig(s.mean_energy[s.mean_energy.len() - 1], 3),
        if s.loop_attempts_per_sweep == 0 {
            "none".to_string()
        } else {
            format!(
                "{} per sweep, {} % flipped",
                s.loop_attempts_per_sweep,
                sig(100.0 * s.loop_acceptance, 3)
            )
        }
    );
    if let Some(reached) = s.target_reached {
        let _ = writeln!(
            out,
            "target error {}: {}",
            sig(shown.target_error.unwrap_or(0.0), 2),
            if reached {
                format!("reached with {} replicas", s.replicas)
            } else {
                format!(
                    "NOT reached with {} replicas (--max-replicas {})",
                    s.replicas, shown.max_replicas
                )
            }
        );
    }
    out
}

/// The equilibration check in words: the passes up and down against each other, and
/// what was done about a difference.
pub(super) fn equilibration_line(s: &Sampled) -> String {
    let versus = format!(
        "ln W per formula unit up minus down {} ± {} ({}σ)",
        sig(s.hysteresis, 2),
        sig(s.sigma_hysteresis, 2),
        sig(s.hysteresis / s.sigma_hysteresis.max(f64::MIN_POSITIVE), 2)
    );
    let extended = if s.extensions > 0 {
        format!(
            "; the run was repeated {} time{} with twice the sweeps, up to {} per node",
            s.extensions,
            if s.extensions == 1 { "" } else { "s" },
            s.sweeps
        )
    } else {
        String::new()
    };
    if s.equilibrated {
        format!("equilibration check passed: {versus}{extended}\n")
    } else {
        format!(
            "equilibration check FAILED: {versus}{extended}; the lag left in their mean, {}, is added to σ; run longer (more sweeps)\n",
            sig(s.sigma_equilibration, 2)
        )
    }
}

/// The JSON document of one sampled cell.
fn sampled_json(lattice: &Lattice, model: &Model, s: &Sampled, shown: &Shown) -> serde_json::Value {
    let c = &lattice.crystal;
    let p = pauling::estimate(c).ok();
    let mut v = report::estimate_json(c, &s.estimate, p.as_ref());
    v["algorithm"] = "thermodynamic-integration".into();
    v["seed"] = s.seed.into();
    v["samples"] = s.samples.into();
    v["replicas"] = s.replicas.into();
    v["updates"] = s.updates.into();
    v["sigma_ln_w_statistical"] = s.sigma_statistical.into();
    v["sigma_ln_w_quadrature"] = s.sigma_quadrature.into();
    v["sigma_ln_w_tail"] = s.sigma_tail.into();
    v["sigma_ln_w_equilibration"] = s.sigma_equilibration.into();
    v["hysteresis_ln_w_per_unit"] = s.hysteresis.into();
    v["sigma_hysteresis"] = s.sigma_hysteresis.into();
    v["equilibrated"] = s.equilibrated.into();
    v["extensions"] = s.extensions.into();
    v["sweeps"] = s.sweeps.into();
    v["equilibration"] = s.equilibration.into();
    v["interrupted"] = s.interrupted.into();
    v["beta_max"] = s.beta_max.into();
    v["loop_attempts_per_sweep"] = s.loop_attempts_per_sweep.into();
    v["loop_acceptance"] = s.loop_acceptance.into();
    v["target_error"] = shown.target_error.into();
    v["target_reached"] = s.target_reached.into();
    v["violations_at_beta_max"] = s.mean_energy[s.mean_energy.len() - 1].into();
    v["variables"] = model.variables.len().into();
    v["constraints"] = model.constraints.len().into();
    v["content_hash"] = lattice.content_hash.clone().into();
    v
}

/// The output of several cells and their extrapolation to the infinite crystal (when
/// there are enough cells for a fit with a degree of freedom left).
fn render_sizes(
    format: Format,
    lattice: &Lattice,
    shown: &Shown,
    results: &[(Model, Sampled)],
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let unit = &c.formula_unit.name;
    let points: Vec<size::SizePoint> = results
        .iter()
        .map(|(_, s)| size::SizePoint {
            units: s.estimate.formula_units,
            value: s.estimate.ln_w_per_unit,
            sigma: s.estimate.sigma_ln_w.unwrap_or(0.0),
        })
        .collect();
    let fit = size::extrapolate(&points);
    let seconds: f64 = results.iter().map(|(_, s)| s.estimate.seconds).sum();
    let infinite = fit.as_ref().ok().map(|f| f.estimate(seconds));
    let p = pauling::estimate(c)?;
    let mut rows = vec![p.clone()];
    rows.extend(results.iter().map(|(_, s)| s.estimate.clone()));
    rows.extend(infinite.iter().cloned());
    match format {
        Format::Json => {
            let cells: Vec<serde_json::Value> = results
                .iter()
                .map(|(m, s)| sampled_json(lattice, m, s, shown))
                .collect();
            let mut v = match (&fit, &infinite) {
                (Ok(fit), Some(infinite)) => {
                    let mut v = report::estimate_json(c, infinite, Some(&p));
                    v["method"] = "monte-carlo-extrapolated".into();
                    v["fit"] = serde_json::json!({
                        "form": fit.form(),
                        "ln_w_per_unit_infinite": fit.value,
                        "sigma_ln_w": fit.sigma,
                        "sigma_fit": fit.sigma_fit,
                        "systematic": fit.systematic,
                        "coefficients": fit.coefficients,
                        "chi2": fit.chi2,
                        "dof": fit.dof,
                        "alternative_form": fit.alternative_form(),
                        "alternative_ln_w_per_unit": fit.alternative.map(|t| t.0),
                        "alternative_sigma_ln_w": fit.alternative.map(|t| t.1),
                    });
                    v
                }
                _ => {
                    let why = fit.as_ref().err().map_or(String::new(), |e| e.to_string());
                    serde_json::json!({
                        "lattice": c.name,
                        "file": shown.file,
                        "formula_unit": unit,
                        "method": "monte-carlo-cells",
                        "fit": null,
                        "not_extrapolated": why,
                    })
                }
            };
            v["cells_sampled"] = cells.into();
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(report::comparison_table(&rows, unit).render_csv()),
        Format::Markdown => Ok(report::comparison_table(&rows, unit).render_markdown()),
        Format::Table => {
            let mut out = format!("{} ({})\n\n", c.name, shown.file);
            out += &report::comparison_table(&rows, unit).render();
            writeln!(out)?;
            match (&fit, &infinite) {
                (Ok(fit), Some(infinite)) => {
                    writeln!(
                        out,
                        "infinite crystal: W = {} per {unit}, S0 = {} J/(mol K) per mole of {unit}, from the weighted fit {} over {} cells (χ² = {} for {} degrees of freedom; σ scaled by √(χ²/dof) when above 1{})",
                        pm(infinite.w_per_unit(), infinite.sigma_w()),
                        pm(infinite.s_j_per_mol_k(), infinite.sigma_s_j_per_mol_k()),
                        fit.form(),
                        results.len(),
                        sig(fit.chi2, 3),
                        fit.dof,
                        if fit.systematic > 0.0 {
                            format!(
                                "; with three cells the ln N/N term is left out and its effect, {} in ln W, is added to σ as a systematic allowance",
                                sig(fit.systematic, 2)
                            )
                        } else {
                            String::new()
                        }
                    )?;
                    if let Some((v2, s2)) = fit.alternative {
                        writeln!(
                            out,
                            "the other form {}: W = {} per {unit} (a check of the form's influence)",
                            fit.alternative_form(),
                            pm(v2.exp(), Some(v2.exp() * s2))
                        )?;
                    }
                }
                _ => {
                    let why = fit.as_ref().err().map_or(String::new(), |e| e.to_string());
                    writeln!(
                        out,
                        "not extrapolated to the infinite crystal: {why}; every row is a finite periodic cell, whose W is larger than the infinite crystal's"
                    )?;
                }
            }
            for (_, s) in results {
                writeln!(
                    out,
                    "{}: seed {}, {} replicas, σ of ln W statistical {}, quadrature {}, tail {}, equilibration {}{}{}",
                    s.estimate.cells.as_deref().unwrap_or(""),
                    s.seed,
                    s.replicas,
                    sig(s.sigma_statistical, 2),
                    sig(s.sigma_quadrature, 2),
                    sig(s.sigma_tail, 2),
                    sig(s.sigma_equilibration, 2),
                    if s.equilibrated {
                        String::new()
                    } else {
                        " (equilibration check FAILED: run longer)".to_string()
                    },
                    if s.extensions > 0 {
                        format!(", extended to {} sweeps", s.sweeps)
                    } else {
                        String::new()
                    }
                )?;
                if s.interrupted {
                    writeln!(
                        out,
                        "INTERRUPTED: {} rests on the {} replicas that finished",
                        s.estimate.cells.as_deref().unwrap_or(""),
                        s.replicas
                    )?;
                }
            }
            Ok(out)
        }
    }
}
