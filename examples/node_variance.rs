//! Measures, at a grid of β, what one node of the Monte Carlo costs in variance: the mean
//! and variance of the measured quantity per constraint, its integrated correlation time
//! τ (in sweeps, windowed at 6τ), the time per sweep, and var·2τ·time, the variance × time
//! that node adds to an integration (smaller is better). One chain per β, 500 sweeps to
//! settle, then SWEEPS measured.
//!
//! ```text
//! cargo run --release --example node_variance -- lattices/ice-ih.yaml 8x8x4 4000
//! cargo run --release --example node_variance -- lattices/ice-ih.yaml 8x8x4 4000 plain
//! ```
//!
//! `lanes` runs 64 chains in the bits of machine words (the sampler's default on
//! two-state models without weights): the quantity is then the mean over the 64 chains,
//! and its variance × time compares directly with one chain's.
//!
//! `plain` measures E itself with sweeps and loop moves only (the sampler without the
//! defect-focused moves and the conditional estimate); otherwise the chain also makes the
//! sampler's defect-focused moves from β = 3 on (one per variable, or N with `moves=N`),
//! sweeps over the quiet variables by skipping where the sampler does, and measures the
//! conditional estimate of E. The numbers behind DEVELOPERS.md "Defect-focused moves"
//! and "The conditional estimate of E".
use groundcount::counters::sampling::{
    DEFECT_MOVES_FROM_BETA, defect_moves_per_sweep, lanes, loops::Loops, moves, stream,
};
use groundcount::{Lattice, cluster, model};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 4 {
        return Err(
            "usage: node_variance LATTICE.yaml CELLS SWEEPS [plain|lanes] [moves=N]".into(),
        );
    }
    let lattice = Lattice::from_file(std::path::Path::new(&args[1]))?;
    let cells = cluster::Cells::parse(&args[2], None, lattice.crystal.dimensions)?;
    let sweeps: usize = args[3].parse()?;
    let plain = args.get(4).is_some_and(|a| a == "plain");
    let lane_mode = args.get(4).is_some_and(|a| a.starts_with("lanes"));
    let plain = plain || args.get(4).is_some_and(|a| a == "lanes-plain");
    let m = model::Model::new(&cluster::Cluster::new(&lattice.crystal, cells)?)?;
    let k = moves::Kernel::new(&m)?;
    let lk = if lane_mode {
        Some(lanes::LaneKernel::new(&m).ok_or("the model does not run in lanes")?)
    } else {
        None
    };
    let lo = Loops::new(&m);
    let attempts = (m.constraints.len() / 64).max(1);
    let n = m.constraints.len() as f64;
    // `moves=N` sets the focused moves per sweep (default: the sampler's).
    let moves_arg = args.iter().skip(4).find_map(|a| a.strip_prefix("moves="));
    let focused = if plain || lo.is_none() {
        0
    } else if let Some(n) = moves_arg {
        n.parse()?
    } else {
        defect_moves_per_sweep(m.variables.len())
    };
    println!("beta   E/N       var/N     tau     var*2tau/N  us/sweep  var*2tau*us/N");
    for beta in (1..=40).map(|i| i as f64 * 0.25) {
        let mut c = k.chain(stream(7, (beta * 100.0) as usize));
        let mut w = lo.as_ref().map(|l| l.walk());
        let mut ls = lk
            .as_ref()
            .map(|lk| lk.lanes(stream(7, (beta * 100.0) as usize)));
        let mut step = |c: &mut moves::Chain| -> f64 {
            if let (Some(lk), Some(ls)) = (lk.as_ref(), ls.as_mut()) {
                return ls.sweep(lk, beta, !plain) / lanes::LANES as f64;
            }
            let x = if plain {
                c.sweep(&k, beta);
                None
            } else if c.skipping_pays(&k) {
                Some(c.sweep_skipping(&k, beta))
            } else {
                Some(c.sweep_conditional(&k, beta))
            };
            if let (Some(l), Some(w), true) = (lo.as_ref(), w.as_mut(), beta >= 1.0) {
                for _ in 0..attempts {
                    l.attempt(&k, c, w);
                }
            }
            if focused > 0 && beta >= DEFECT_MOVES_FROM_BETA {
                c.focused(&k, beta, focused);
            }
            x.unwrap_or(c.energy() as f64)
        };
        for _ in 0..500 {
            step(&mut c);
        }
        let t = std::time::Instant::now();
        let xs: Vec<f64> = (0..sweeps).map(|_| step(&mut c)).collect();
        let us = t.elapsed().as_secs_f64() * 1e6 / sweeps as f64;
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / xs.len() as f64;
        let mut tau = 0.5;
        for lag in 1..sweeps / 10 {
            let s: f64 = (0..sweeps - lag)
                .map(|i| (xs[i] - mean) * (xs[i + lag] - mean))
                .sum();
            tau += s / ((sweeps - lag) as f64 * var.max(1e-300));
            if lag as f64 > 6.0 * tau {
                break;
            }
        }
        println!(
            "{beta:5.2}  {:.5}  {:.5}  {tau:7.2}  {:.5}    {us:7.1}   {:.3}",
            mean / n,
            var / n,
            var * 2.0 * tau / n,
            var * 2.0 * tau / n * us
        );
    }
    Ok(())
}
