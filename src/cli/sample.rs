//! `groundcount sample FILE --cells AxBxC`: Monte Carlo count of a large cell by
//! thermodynamic integration, with error bars from independent replicas; several cells
//! (`--cells 4x4x4,6x6x6`) with an extrapolation to the infinite crystal; one shard of a
//! split run (`--shard K/N --out FILE`, merged by `groundcount merge`).

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::context::Context;
use groundcount::counters::Counted;
use groundcount::counters::sampling::{self, Sampled, shard, size, wang_landau};
use groundcount::json::{EstimateOf, SampledRecord, SizeFitRecord};
use groundcount::model::Model;
use groundcount::text::{self, sig};

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
    /// No defect-focused moves at large β (for comparisons with the sampler without
    /// them).
    #[arg(long)]
    no_defect_moves: bool,
    /// Measure the number of violated constraints itself, not its conditional estimate
    /// (for comparisons).
    #[arg(long)]
    plain_estimator: bool,
    /// The same measured sweeps at every node, not shared by the variance a pilot run
    /// measures (for comparisons).
    #[arg(long)]
    equal_sweeps: bool,
    /// One chain per replica, with loop and defect-focused moves, instead of 64 chains in
    /// the bits of machine words (for comparisons; weighted models, rules over more than
    /// two states and models without loop moves always run one).
    #[arg(long)]
    no_lanes: bool,
    /// The conjugate field of every `occupancy:` entry of the file, in the file's order,
    /// separated by commas (the natural log of each state's activity, e.g. 0.4,-0.25).
    /// The output reports the mean each field reaches.
    #[arg(
        long,
        value_name = "H1,H2,...",
        value_delimiter = ',',
        allow_hyphen_values = true
    )]
    fields: Option<Vec<f64>>,
    /// Solve for the fields of the `occupancy:` entries by Newton steps on the sampled
    /// means and their covariance, in at most STEPS runs (starting from --fields, or 0),
    /// and report the run at the fields found.
    #[arg(long, value_name = "STEPS")]
    solve_fields: Option<usize>,
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
    /// For a lattice with vacancies: random realisations of the vacancies to sample
    /// (default 16); the result is the mean of ln W over them, with their spread.
    #[arg(long, value_name = "N")]
    realisations: Option<usize>,
    #[command(flatten)]
    common: Common,
}

/// `sample` on a diluted lattice: one cell, thermodynamic integration per realisation.
fn diluted(
    args: &Args,
    lattice: &Lattice,
    sizes: &[Cells],
    config: sampling::SampleConfig,
) -> anyhow::Result<String> {
    if args.shard.is_some() {
        anyhow::bail!(
            "--shard does not split the realisations of a lattice with vacancies yet; run the cell whole"
        );
    }
    if args.target_error.is_some() {
        anyhow::bail!(
            "--target-error does not apply to a lattice with vacancies: its error comes from the spread between realisations (raise --realisations)"
        );
    }
    if sizes.len() > 1 {
        anyhow::bail!(
            "--cells: a lattice with vacancies is sampled one cell at a time (no extrapolation over sizes yet); give one size"
        );
    }
    super::dilution::run(
        lattice,
        &args.file,
        &sizes[0],
        args.realisations
            .unwrap_or(groundcount::counters::dilution::DEFAULT_REALISATIONS),
        args.seed,
        super::dilution::Counter::Sample(config),
        &args.common,
    )
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
        .map(|t| super::words::cells("--cells", t.trim(), None, c.dimensions))
        .collect::<anyhow::Result<_>>()?;
    if let Some(t) = args.target_error
        && !(t > 0.0 && t.is_finite())
    {
        anyhow::bail!("--target-error must be a positive number, not {t}");
    }
    if args.method == Sampler::WangLandau {
        if c.is_diluted() {
            anyhow::bail!(
                "--method wang-landau does not take vacancies yet; a lattice with vacancies is sampled by thermodynamic integration"
            );
        }
        return run_wang_landau(&args, &lattice, &sizes);
    }
    let fields = fields_for(&args, c)?;
    if c.is_weighted() && sizes.len() > 1 {
        anyhow::bail!(
            "{} carries weights: the extrapolation of a weighted entropy over several cells is not available yet; give one --cells size",
            args.file.display()
        );
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
        defect_moves: !args.no_defect_moves,
        conditional: !args.plain_estimator,
        lanes: !args.no_lanes,
        allocate: !args.equal_sweeps,
        node_sweeps: Vec::new(),
        target_error: args.target_error,
        max_replicas: args.max_replicas,
        max_extensions: args.max_extensions,
        fields,
    };
    if c.is_diluted() {
        return diluted(&args, &lattice, &sizes, config);
    }
    if args.realisations.is_some() {
        anyhow::bail!(
            "--realisations applies to a lattice with vacancies (`vacancies:` with a fraction above 0); {} has none",
            args.file.display()
        );
    }
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
    if let Some(steps) = args.solve_fields {
        if args.shard.is_some() || steps == 0 {
            anyhow::bail!(
                "--solve-fields takes at least 1 step and runs the sampler several times on one machine: solve first, then run the shards with --fields"
            );
        }
        return run_solve(&args, &lattice, &sizes[0], &config, steps, &shown);
    }
    let mut results = Vec::new();
    for cells in &sizes {
        if super::interrupt().raised() {
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
    };
    let (context, bar) = args.common.replica_progress(&model, config.replicas);
    let w = with_threads(args.common.threads, || {
        wang_landau::count(&model, &config, &context)
    });
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let w = w??;
    let p = super::pauling(c)?;
    let e = &w.estimate;
    let unit = &c.formula_unit.name;
    match args.common.format {
        Format::Json => Ok(groundcount::json::to_string(&WangLandauDocument {
            estimate: EstimateOf::new(c, e, Some(&p)),
            algorithm: "wang-landau",
            seed: w.seed,
            replicas: w.replicas,
            sweeps: w.sweeps,
            energy_window: w.window,
            window_fraction: w.fraction,
            levels_visited: w.levels,
            per_replica_ln_w_per_unit: w.per_replica.clone(),
            interrupted: w.interrupted,
            variables: model.variables.len(),
            constraints: model.constraints.len(),
            content_hash: lattice.content_hash.clone(),
        })?),
        Format::Csv => Ok(text::comparison_table(&[p, e.clone()], unit).render_csv()),
        Format::Markdown => Ok(text::comparison_table(&[p, e.clone()], unit).render_markdown()),
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

/// The conjugate fields of the file's imposed means from --fields: required, one per
/// `occupancy:` entry, when the file has some; refused otherwise.
fn fields_for(args: &Args, c: &groundcount::crystal::Crystal) -> anyhow::Result<Vec<f64>> {
    let labels: Vec<&str> = c.means.iter().map(|m| m.label.as_str()).collect();
    if args.solve_fields.is_some() && labels.is_empty() {
        anyhow::bail!(
            "--solve-fields solves for the fields of `occupancy:` entries, but {} has none",
            args.file.display()
        );
    }
    match &args.fields {
        None if labels.is_empty() || args.solve_fields.is_some() => Ok(Vec::new()),
        None => anyhow::bail!(
            "{} imposes {} mean{} ({}); the Monte Carlo samples the ensemble of given conjugate fields: give one field per entry with --fields H1,H2,... in the file's order (the exact count of a small cell will provide them), or let it search for them with --solve-fields STEPS",
            args.file.display(),
            labels.len(),
            if labels.len() == 1 { "" } else { "s" },
            labels.join(", ")
        ),
        Some(_) if labels.is_empty() => anyhow::bail!(
            "--fields gives the conjugate fields of imposed means (`occupancy:`), but {} imposes none",
            args.file.display()
        ),
        Some(h) if h.len() != labels.len() => anyhow::bail!(
            "--fields gives {} field{}, but {} imposes {} mean{} ({}): give one per entry, in the file's order",
            h.len(),
            if h.len() == 1 { "" } else { "s" },
            args.file.display(),
            labels.len(),
            if labels.len() == 1 { "" } else { "s" },
            labels.join(", ")
        ),
        Some(h) => {
            if let Some(bad) = h.iter().find(|x| !x.is_finite()) {
                anyhow::bail!("--fields must be finite numbers, found {bad}");
            }
            Ok(h.clone())
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

/// `sample --solve-fields`: the fields found by Newton steps on sampled means, and the
/// run at those fields.
fn run_solve(
    args: &Args,
    lattice: &Lattice,
    cells: &Cells,
    config: &sampling::SampleConfig,
    steps: usize,
    shown: &Shown,
) -> anyhow::Result<String> {
    let cluster = Cluster::new(&lattice.crystal, cells.clone())?;
    let model = Model::new(&cluster)?;
    let (context, bar) = args
        .common
        .replica_progress(&model, config.replicas * steps);
    let (s, solve) = with_threads(args.common.threads, || {
        sampling::solve::solve_fields(&model, config, steps, &context)
    })??;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let mut text = render(args.common.format, lattice, shown, &model, &s, None)?;
    if args.common.format == Format::Table {
        let path: Vec<String> = solve
            .history
            .iter()
            .map(|h| {
                let v: Vec<String> = h.iter().map(|x| sig(*x, 4)).collect();
                format!("[{}]", v.join(", "))
            })
            .collect();
        writeln!(
            text,
            "fields solved by Newton steps on the sampled means and their covariance (a stochastic solver; run s used seed {} + s): {} run{}, fields {}; {}",
            config.seed,
            solve.steps,
            if solve.steps == 1 { "" } else { "s" },
            path.join(" → "),
            if solve.converged {
                format!(
                    "every mean reached lies within {}σ of its target",
                    sampling::solve::TOLERANCE
                )
            } else {
                "NOT CONVERGED: some mean is still off its target (see above); allow more steps or sweeps".to_string()
            }
        )?;
    }
    Ok(text)
}

/// Sample one model with a progress line.
fn sample_one(
    common: &Common,
    model: &Model,
    config: &sampling::SampleConfig,
) -> anyhow::Result<Counted<Sampled>> {
    let (context, bar) = common.replica_progress(model, config.replicas);
    let s = with_threads(common.threads, || sampling::count(model, config, &context))??;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    Ok(s)
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
    let (context, bar) = args.common.replica_progress(&model, config.replicas);
    let (part, s) = with_threads(args.common.threads, || {
        shard::run_shard(
            lattice,
            &shown.file,
            cells,
            &model,
            config,
            (k, n),
            &context,
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
    s: &Counted<Sampled>,
    merged: Option<(&[usize], usize)>,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let e = &s.estimate;
    let unit = &c.formula_unit.name;
    if let Some(w) = &s.weighing {
        return render_weighted(format, lattice, shown, model, s, w, merged);
    }
    let p = super::pauling(c)?;
    match format {
        Format::Json => {
            let mut d = SampledDocument::new(lattice, model, s, shown);
            if let Some((present, n)) = merged {
                d.shards = Some(n);
                d.shards_merged = Some(present.to_vec());
            }
            Ok(groundcount::json::to_string(&d)?)
        }
        Format::Csv => Ok(text::comparison_table(&[p, e.clone()], unit).render_csv()),
        Format::Markdown => Ok(text::comparison_table(&[p, e.clone()], unit).render_markdown()),
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

/// The output of one sampled cell of a weighted lattice: the entropy of the weighted
/// ensemble, ln Z, ⟨ln w⟩, and every field with the mean it reached.
fn render_weighted(
    format: Format,
    lattice: &Lattice,
    shown: &Shown,
    model: &Model,
    s: &Counted<Sampled>,
    w: &sampling::SampledWeighing,
    merged: Option<(&[usize], usize)>,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let e = &s.estimate;
    let unit = &c.formula_unit.name;
    // Pauling's estimate beside it only where it takes the weights.
    let p = super::pauling(c).ok();
    let rows: Vec<groundcount::Estimate> = p.iter().cloned().chain([e.clone()]).collect();
    match format {
        Format::Json => {
            let mut d = SampledDocument::new(lattice, model, s, shown);
            if let Some((present, n)) = merged {
                d.shards = Some(n);
                d.shards_merged = Some(present.to_vec());
            }
            Ok(groundcount::json::to_string(&d)?)
        }
        Format::Csv => Ok(text::comparison_table(&rows, unit).render_csv()),
        Format::Markdown => Ok(text::comparison_table(&rows, unit).render_markdown()),
        Format::Table => {
            let mut out = String::new();
            out += &cell_header(c, std::path::Path::new(&shown.file), e, model);
            writeln!(out)?;
            writeln!(
                out,
                "S/R per {unit:<13} {}   entropy of the weighted ensemble, ln Z − ⟨ln w⟩",
                pm(e.s_over_r(), e.sigma_ln_w)
            )?;
            writeln!(
                out,
                "S                     {} J/(mol K) per mole of {unit}",
                pm(e.s_j_per_mol_k(), e.sigma_s_j_per_mol_k())
            )?;
            writeln!(
                out,
                "ln Z per {unit:<12} {}   weighted sum over the arrangements that keep every rule, fields included",
                pm(w.ln_z_per_unit, Some(w.sigma_ln_z))
            )?;
            writeln!(
                out,
                "⟨ln w⟩ per {unit:<10} {}   mean ln-weight of an arrangement, fields included",
                pm(w.mean_ln_w_per_unit, Some(w.sigma_mean_ln_w))
            )?;
            for (j, m) in model.means.iter().enumerate() {
                let (a, sa) = (w.achieved[j], w.sigma_achieved[j]);
                let pull = (a - m.mean) / sa.max(f64::MIN_POSITIVE);
                writeln!(
                    out,
                    "{} '{}': field h = {}, mean reached {} (target {}){}",
                    m.kind.word(),
                    m.label,
                    short(w.fields[j]),
                    pm(a, Some(sa)),
                    short(m.mean),
                    if pull.abs() > 3.0 {
                        format!(
                            " — MISSES the target by {}σ: the entropy above is that of the ensemble at the mean reached, not at the target; adjust the field",
                            sig(pull, 2)
                        )
                    } else {
                        String::new()
                    }
                )?;
            }
            match &p {
                Some(p) => out += &pauling_line(p, unit),
                None => writeln!(
                    out,
                    "Pauling (infinite)    not available for this weighted lattice"
                )?,
            }
            writeln!(out)?;
            out += &diagnostics(s, shown);
            writeln!(
                out,
                "⟨ln w⟩ and the means from {} defect-free sweeps at β_max ({} % of the sweeps there, a quarter of the measured sweeps added at the turn); σ of S/R propagates ln Z and ⟨ln w⟩ together from the replicas",
                w.ground_samples,
                sig(100.0 * w.ground_fraction, 3)
            )?;
            if let Some((present, n)) = merged {
                writeln!(out, "merged {} of {n} shards", present.len())?;
            }
            Ok(out)
        }
    }
}

/// A given number with at most six decimals and no trailing zeros ("0.4", "-0.210923").
fn short(x: f64) -> String {
    let t = format!("{x:.6}");
    let t = t.trim_end_matches('0').trim_end_matches('.');
    if t == "-0" { "0".into() } else { t.to_string() }
}

/// `x ± σ` with 8 and 2 significant digits.
fn pm(x: f64, s: Option<f64>) -> String {
    match s {
        Some(s) => format!("{} ± {}", sig(x, 8), sig(s, 2)),
        None => sig(x, 8),
    }
}

/// The error budget and run lines under a sampled result.
fn diagnostics(s: &Counted<Sampled>, shown: &Shown) -> String {
    let unit_free = |x: f64| sig(x, 2);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "σ of {} per formula unit: statistical {} (standard error of {} replicas × {} for their number), quadrature {}, tail {}{} (root sum of squares reported)",
        if s.weighing.is_some() { "S/R" } else { "ln W" },
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
    if let Some(b) = s.lanes_up_to_beta {
        let _ = writeln!(
            out,
            "each replica: 64 chains in the bits of machine words{}",
            if b >= s.beta_max {
                " at every node (Metropolis sweeps)".to_string()
            } else {
                format!(
                    " up to β = {}, then one chain with loop and defect-focused moves, started from the first of them",
                    sig(b, 3)
                )
            }
        );
    }
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
        "{} per formula unit up minus down {} ± {} ({}σ)",
        if s.weighing.is_some() { "ln Z" } else { "ln W" },
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

/// The JSON document of one sampled cell (docs/json.md).
#[derive(serde::Serialize)]
struct SampledDocument {
    /// The estimate, with the lattice and Pauling's estimate beside it.
    #[serde(flatten)]
    estimate: EstimateOf,
    /// `thermodynamic-integration`.
    algorithm: &'static str,
    /// How the run went and the parts of its 1σ.
    #[serde(flatten)]
    run: SampledRecord,
    /// The target error asked for, if any.
    target_error: Option<f64>,
    variables: usize,
    constraints: usize,
    content_hash: String,
    /// A merge: the number of shards of the run.
    #[serde(skip_serializing_if = "Option::is_none")]
    shards: Option<usize>,
    /// A merge: the shards present (1..N).
    #[serde(skip_serializing_if = "Option::is_none")]
    shards_merged: Option<Vec<usize>>,
}

impl SampledDocument {
    fn new(lattice: &Lattice, model: &Model, s: &Counted<Sampled>, shown: &Shown) -> Self {
        let c = &lattice.crystal;
        let p = super::pauling(c).ok();
        SampledDocument {
            estimate: EstimateOf::new(c, &s.estimate, p.as_ref()),
            algorithm: "thermodynamic-integration",
            run: SampledRecord::from(&s.details),
            target_error: shown.target_error,
            variables: model.variables.len(),
            constraints: model.constraints.len(),
            content_hash: lattice.content_hash.clone(),
            shards: None,
            shards_merged: None,
        }
    }
}

/// The JSON document of a Wang–Landau run (docs/json.md).
#[derive(serde::Serialize)]
struct WangLandauDocument {
    #[serde(flatten)]
    estimate: EstimateOf,
    /// `wang-landau`.
    algorithm: &'static str,
    seed: u64,
    replicas: usize,
    sweeps: u64,
    /// Largest number of violated constraints in the window.
    energy_window: u64,
    /// Fraction of uniform assignments inside the window.
    window_fraction: f64,
    /// Energies visited.
    levels_visited: usize,
    /// ln W per formula unit of every walk.
    per_replica_ln_w_per_unit: Vec<f64>,
    interrupted: bool,
    variables: usize,
    constraints: usize,
    content_hash: String,
}

/// The JSON document of several sampled cells (docs/json.md): the extrapolation to the
/// infinite crystal, or why there is none, and every cell.
#[derive(serde::Serialize)]
struct SizesDocument {
    /// The extrapolated estimate (its `method` is `monte-carlo-extrapolated`), or the
    /// lattice alone (`monte-carlo-cells`) with why there is no extrapolation.
    #[serde(flatten)]
    head: SizesHead,
    /// The fit; `null` when there is none.
    fit: Option<SizeFitRecord>,
    /// Why the cells were not extrapolated.
    #[serde(skip_serializing_if = "Option::is_none")]
    not_extrapolated: Option<String>,
    /// Every cell sampled, smallest first.
    cells_sampled: Vec<SampledDocument>,
}

/// The first keys of [`SizesDocument`].
#[derive(serde::Serialize)]
#[serde(untagged)]
enum SizesHead {
    /// The extrapolation.
    Extrapolated(Box<EstimateOf>),
    /// No extrapolation.
    Cells {
        lattice: String,
        file: String,
        formula_unit: String,
        method: &'static str,
    },
}

/// The output of several cells and their extrapolation to the infinite crystal (when
/// there are enough cells for a fit with a degree of freedom left).
fn render_sizes(
    format: Format,
    lattice: &Lattice,
    shown: &Shown,
    results: &[(Model, Counted<Sampled>)],
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let unit = &c.formula_unit.name;
    let estimates: Vec<groundcount::Estimate> =
        results.iter().map(|(_, s)| s.estimate.clone()).collect();
    let config = size::SizeConfig::of_models(results.iter().map(|(m, _)| m));
    let extrapolated = size::count(&estimates, &config, &Context::new());
    let fit = extrapolated.as_ref().map(|x| &x.details);
    let infinite = extrapolated.as_ref().ok().map(|x| x.estimate.clone());
    let p = super::pauling(c)?;
    let mut rows = vec![p.clone()];
    rows.extend(results.iter().map(|(_, s)| s.estimate.clone()));
    rows.extend(infinite.iter().cloned());
    match format {
        Format::Json => {
            let cells_sampled = results
                .iter()
                .map(|(m, s)| SampledDocument::new(lattice, m, s, shown))
                .collect();
            let d = match (&fit, &infinite) {
                (Ok(fit), Some(infinite)) => {
                    let mut e = EstimateOf::new(c, infinite, Some(&p));
                    e.estimate.method = "monte-carlo-extrapolated";
                    SizesDocument {
                        head: SizesHead::Extrapolated(Box::new(e)),
                        fit: Some(SizeFitRecord::from(*fit)),
                        not_extrapolated: None,
                        cells_sampled,
                    }
                }
                _ => SizesDocument {
                    head: SizesHead::Cells {
                        lattice: c.name.clone(),
                        file: shown.file.clone(),
                        formula_unit: unit.clone(),
                        method: "monte-carlo-cells",
                    },
                    fit: None,
                    not_extrapolated: Some(
                        fit.as_ref().err().map_or(String::new(), |e| e.to_string()),
                    ),
                    cells_sampled,
                },
            };
            Ok(groundcount::json::to_string(&d)?)
        }
        Format::Csv => Ok(text::comparison_table(&rows, unit).render_csv()),
        Format::Markdown => Ok(text::comparison_table(&rows, unit).render_markdown()),
        Format::Table => {
            let mut out = format!("{} ({})\n\n", c.name, shown.file);
            out += &text::comparison_table(&rows, unit).render();
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
                        if fit.systematic > 0.0 && fit.law.is_none() {
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
                    if let Some(words) =
                        text::size_law_words(fit.law.as_ref(), fit.not_one_shape, fit.systematic)
                    {
                        writeln!(out, "{words}")?;
                    }
                    if let Some(words) = text::next_term_words(fit.next_term.as_ref()) {
                        writeln!(out, "{words}")?;
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
