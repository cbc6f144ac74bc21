//! Times the sweep of 64 chains in machine words ([`LaneKernel`]) on one cell at a few β,
//! and prints a fingerprint of where the chains end (the summed estimates, the energy and
//! a hash of every bit), so that a change meant to make the sweep faster can show it left
//! every bit where it was: run it before and after and compare the columns after the time.
//!
//! `cargo run --release --example lane_timing -- lattices/ice-ih.yaml 8x8x4`
//!
//! Each time is the best of 8 repetitions of 300 sweeps (the least disturbed by other
//! work on the machine), after 50 sweeps to settle from the random start; "measure" says
//! whether the conditional estimate was gathered during the sweep.

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::sampling::{lanes::LaneKernel, stream};
use groundcount::model::Model;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let (Some(file), Some(cells)) = (args.get(1), args.get(2)) else {
        eprintln!("usage: lane_timing LATTICE.yaml CELLS (e.g. lattices/ice-ih.yaml 8x8x4)");
        std::process::exit(2);
    };
    let lattice = Lattice::from_file(std::path::Path::new(file)).expect("a valid lattice file");
    let cells = Cells::parse(cells, None, lattice.crystal.dimensions).expect("valid cells");
    let cluster = Cluster::new(&lattice.crystal, cells).expect("a cluster");
    let model = Model::new(&cluster).expect("a model");
    let kernel = LaneKernel::new(&model).expect("a model of two-state variables");
    for beta in [0.5, 2.0, 3.0, 5.0] {
        for measure in [false, true] {
            let mut lanes = kernel.lanes(stream(7, 1));
            for _ in 0..50 {
                lanes.sweep(&kernel, beta, false);
            }
            let mut sum = 0.0;
            let mut best = f64::INFINITY;
            for _ in 0..8 {
                let start = std::time::Instant::now();
                for _ in 0..300 {
                    sum += lanes.sweep(&kernel, beta, measure);
                }
                best = best.min(start.elapsed().as_secs_f64() / 300.0);
            }
            let hash = lanes.words.iter().enumerate().fold(0u64, |h, (i, w)| {
                h.wrapping_mul(0x100_0000_01b3).wrapping_add(w ^ i as u64)
            });
            println!(
                "beta {beta} measure {measure}: {:.1} us per sweep of 64 chains; \
                 summed estimates {sum:.17e}, violated constraints (64 chains) {}, bits {hash:016x}",
                best * 1e6,
                lanes.energy()
            );
        }
    }
}
