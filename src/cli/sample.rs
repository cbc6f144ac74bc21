//! `groundcount sample FILE --cells AxBxC`: Monte Carlo count of a large cell by
//! thermodynamic integration, with error bars from independent replicas.

use std::fmt::Write;
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};

use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::{pauling, sampling};
use groundcount::model::Model;
use groundcount::report::{self, sig};

use super::{Common, Format, cell_header, load, pauling_line, with_threads};

/// Arguments of `sample`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML).
    file: PathBuf,
    /// Cell size in unit cells along each axis, e.g. 8x8x8 (periodic).
    #[arg(long)]
    cells: String,
    /// Seed of the random streams; the same seed gives the same numbers on any thread count.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Measured sweeps per quadrature node and replica.
    #[arg(long, default_value_t = 200)]
    sweeps: usize,
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
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let lattice = load(Some(&args.file))?;
    let c = &lattice.crystal;
    let cells = Cells::parse(&args.cells, None, c.dimensions)?;
    let p = pauling::estimate(c)?;
    let cluster = Cluster::new(c, cells)?;
    let model = Model::new(&cluster)?;
    let config = sampling::SampleConfig {
        seed: args.seed,
        replicas: args.replicas,
        sweeps: args.sweeps,
        equilibration: args.equilibration.unwrap_or(args.sweeps / 4),
        nodes: args.nodes,
        beta_max: args.beta_max,
        loops: !args.no_loops,
        target_error: args.target_error,
        max_replicas: args.max_replicas,
    };
    if let Some(t) = args.target_error
        && !(t > 0.0 && t.is_finite())
    {
        anyhow::bail!("--target-error must be a positive number, not {t}");
    }
    let progress = args.common.progress();
    if progress {
        eprintln!(
            "sampling {} ({} variables, {} constraints), {} replicas…",
            model.cells,
            model.variables.len(),
            model.constraints.len(),
            config.replicas
        );
    }
    let done = AtomicUsize::new(0);
    let on_replica = || {
        let k = done.fetch_add(1, Ordering::Relaxed) + 1;
        if progress {
            eprint!("\r{k} replicas done");
        }
    };
    let s = with_threads(args.common.threads, || {
        sampling::sample_with(&model, &config, &on_replica)
    })??;
    if progress {
        eprintln!();
    }
    let e = &s.estimate;
    let unit = &c.formula_unit.name;
    match args.common.format {
        Format::Json => {
            let mut v = report::estimate_json(c, e, Some(&p));
            v["seed"] = s.seed.into();
            v["samples"] = s.samples.into();
            v["replicas"] = s.replicas.into();
            v["updates"] = s.updates.into();
            v["sigma_ln_w_statistical"] = s.sigma_statistical.into();
            v["sigma_ln_w_quadrature"] = s.sigma_quadrature.into();
            v["sigma_ln_w_tail"] = s.sigma_tail.into();
            v["beta_max"] = s.beta_max.into();
            v["loop_attempts_per_sweep"] = s.loop_attempts_per_sweep.into();
            v["loop_acceptance"] = s.loop_acceptance.into();
            v["target_error"] = args.target_error.into();
            v["target_reached"] = s.target_reached.into();
            v["violations_at_beta_max"] = s.mean_energy[s.mean_energy.len() - 1].into();
            v["variables"] = model.variables.len().into();
            v["constraints"] = model.constraints.len().into();
            v["content_hash"] = lattice.content_hash.clone().into();
            Ok(serde_json::to_string_pretty(&v)? + "\n")
        }
        Format::Csv => Ok(report::comparison_table(&[p, e.clone()], unit).render_csv()),
        Format::Markdown => Ok(report::comparison_table(&[p, e.clone()], unit).render_markdown()),
        Format::Table => {
            let mut out = String::new();
            out += &cell_header(c, &args.file, e, &model);
            writeln!(out)?;
            let pm = |x: f64, s: Option<f64>| match s {
                Some(s) => format!("{} ± {}", sig(x, 8), sig(s, 2)),
                None => sig(x, 8),
            };
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
                "σ of ln W per {unit}: statistical {}, quadrature {}, tail {} (sum reported)",
                sig(s.sigma_statistical, 2),
                sig(s.sigma_quadrature, 2),
                sig(s.sigma_tail, 2)
            )?;
            writeln!(
                out,
                "thermodynamic integration, seed {}, {} replicas × {} nodes up to β = {}, {} measured sweeps, {} updates, {} s",
                s.seed,
                s.replicas,
                args.nodes,
                sig(s.beta_max, 3),
                s.samples,
                s.updates,
                sig(e.seconds, 3)
            )?;
            writeln!(
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
            )?;
            if let Some(reached) = s.target_reached {
                writeln!(
                    out,
                    "target error {}: {}",
                    sig(args.target_error.unwrap_or(0.0), 2),
                    if reached {
                        format!("reached with {} replicas", s.replicas)
                    } else {
                        format!(
                            "NOT reached with {} replicas (--max-replicas {})",
                            s.replicas, args.max_replicas
                        )
                    }
                )?;
            }
            Ok(out)
        }
    }
}
