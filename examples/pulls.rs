//! Pull test of the Monte Carlo error bar on one cell: runs the sampler with seeds
//! FIRST..FIRST+SEEDS−1 and compares each ln W per unit with the exact count of the same
//! cell, printing the mean and spread of the pulls (estimate − exact)/σ, how many lie beyond
//! 2σ and 3σ, the mean equilibration check (passes up − down over its σ) and the time.
//! An honest σ gives pulls of mean 0 and spread 1 (the bounds of
//! `issue11_calibration_over_many_cells` are ±0.3 and 0.8–1.25 over 100 seeds).
//!
//! ```text
//! cargo run --release --example pulls -- lattices/ice-ih.yaml 2x2x24 100
//! cargo run --release --example pulls -- lattices/square-ice.yaml 6x6 50 sweeps=50 lanes=0
//! ```
//!
//! Optional settings after the seed count: `first=N` (first seed, default 1),
//! `sweeps=N`, `replicas=N`, `equilibration=N`, `lanes=0|1`. The cell must be small enough
//! to count exactly.
use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::context::Context;
use groundcount::counters::exact::{self, ExactConfig};
use groundcount::counters::sampling::{SampleConfig, calibration};
use groundcount::model::Model;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 4 {
        return Err("usage: pulls LATTICE.yaml CELLS SEEDS [first=N] [sweeps=N] [replicas=N] [equilibration=N] [lanes=0|1]".into());
    }
    let lattice = Lattice::from_file(std::path::Path::new(&args[1]))?;
    let cells = Cells::parse(&args[2], None, lattice.crystal.dimensions)?;
    let seeds: u64 = args[3].parse()?;
    let mut config = SampleConfig::default();
    let mut first = 1u64;
    for setting in &args[4..] {
        let (key, value) = setting
            .split_once('=')
            .ok_or_else(|| format!("expected KEY=VALUE, not {setting}"))?;
        match key {
            "first" => first = value.parse()?,
            "sweeps" => config.sweeps = value.parse()?,
            "replicas" => config.replicas = value.parse()?,
            "equilibration" => config.equilibration = value.parse()?,
            "lanes" => config.lanes = value != "0",
            _ => return Err(format!("unknown setting {key}").into()),
        }
    }
    let model = Model::new(&Cluster::new(&lattice.crystal, cells)?)?;
    let exact = exact::count(&model, &ExactConfig::default(), &Context::new())?
        .estimate
        .ln_w_per_unit;
    let start = std::time::Instant::now();
    let p = calibration::pulls(
        &model,
        exact,
        &config,
        first..first + seeds,
        &Context::new(),
    )?;
    println!(
        "{} {}: {} seeds from {first}: mean pull {:+.3} ± {:.3}, spread {:.3}, |pull| > 2: {}, > 3: {}; up − down {:+.2}σ on average; {:.0} s",
        args[1],
        args[2],
        p.pulls.len(),
        p.mean(),
        p.standard_error(),
        p.spread(),
        p.beyond(2.0),
        p.beyond(3.0),
        p.mean_check(),
        start.elapsed().as_secs_f64()
    );
    Ok(())
}
