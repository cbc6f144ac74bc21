//! Times one chain's measured sweep at large β, where defects are few: the plain sweep
//! with the conditional estimate against the sweep that skips over the variables next
//! to no violation (`Chain::sweep_skipping`, on ice-rule models), each followed by the
//! sampler's loop and defect-focused moves, best of 8 × 300 sweeps, and the mean of the
//! estimate each returned (the two must agree within their noise).
//!
//! ```text
//! cargo run --release --example chain_timing -- lattices/ice-ih.yaml 8x8x4
//! ```
use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::sampling::{self, loops::Loops, moves::Kernel, stream};
use groundcount::{Lattice, model::Model};

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let (Some(file), Some(cells)) = (args.get(1), args.get(2)) else {
        eprintln!("usage: chain_timing LATTICE.yaml CELLS (e.g. lattices/ice-ih.yaml 8x8x4)");
        std::process::exit(2);
    };
    let lattice = Lattice::from_file(std::path::Path::new(file)).expect("a valid lattice file");
    let cells = Cells::parse(cells, None, lattice.crystal.dimensions).expect("valid cells");
    let cluster = Cluster::new(&lattice.crystal, cells).expect("a cluster");
    let model = Model::new(&cluster).expect("a model");
    let kernel = Kernel::new(&model).expect("a kernel");
    let loops = Loops::new(&model);
    let attempts = (model.constraints.len() / 64).max(1);
    let focused = sampling::defect_moves_per_sweep(kernel.variables());
    for beta in [5.0, 6.0, 6.5, 7.0, 8.0] {
        for skip in [false, true] {
            let mut chain = kernel.chain(stream(7, 1));
            let mut walk = loops.as_ref().map(|l| l.walk());
            let mut step = |chain: &mut groundcount::counters::sampling::moves::Chain| {
                let e = if skip && chain.skipping_pays(&kernel) {
                    chain.sweep_skipping(&kernel, beta)
                } else {
                    chain.sweep_conditional(&kernel, beta)
                };
                if let (Some(l), Some(w)) = (loops.as_ref(), walk.as_mut()) {
                    for _ in 0..attempts {
                        l.attempt(&kernel, chain, w);
                    }
                }
                chain.focused(&kernel, beta, focused);
                e
            };
            for _ in 0..2000 {
                step(&mut chain);
            }
            let (mut sum, mut n) = (0.0, 0usize);
            let mut best = f64::INFINITY;
            for _ in 0..8 {
                let start = std::time::Instant::now();
                for _ in 0..300 {
                    sum += step(&mut chain);
                    n += 1;
                }
                best = best.min(start.elapsed().as_secs_f64() / 300.0);
            }
            println!(
                "beta {beta} skip {skip}: {:.1} us per sweep with loops and focused moves; mean estimate of E {:.4}",
                best * 1e6,
                sum / n as f64
            );
        }
    }
}
