//! The Monte Carlo kernels: one heat-bath sweep, one bit-sliced sweep of 64 chains and one
//! loop attempt on an ice Ih cell, and a short Wang–Landau run (the cross-check method) on
//! a small one.
//!
//! `cargo bench --bench sampling`. Throughput is reported in variable updates (for the
//! bit-sliced sweep, updates of all 64 chains).

mod common;

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use groundcount::counters::sampling::{
    lanes::{LANES, LaneKernel},
    loops::Loops,
    moves::Kernel,
    stream, wang_landau,
};

fn sweeps(c: &mut Criterion) {
    let mut group = c.benchmark_group("sampling");
    group.sample_size(20);
    let model = common::model("ice-ih.yaml", "8x8x4", None);
    let kernel = Kernel::new(&model).expect("kernel");
    group.throughput(Throughput::Elements(kernel.variables() as u64));
    for beta in [0.5, 3.0] {
        let mut chain = kernel.chain(stream(1, 0));
        group.bench_function(format!("ice-ih 8x8x4 heat-bath sweep, beta {beta}"), |b| {
            b.iter(|| chain.sweep(&kernel, beta))
        });
    }
    let lane_kernel = LaneKernel::new(&model).expect("ice runs in lanes");
    group.throughput(Throughput::Elements((kernel.variables() * LANES) as u64));
    for beta in [0.5, 3.0] {
        let mut lanes = lane_kernel.lanes(stream(1, 0));
        for _ in 0..100 {
            lanes.sweep(&lane_kernel, beta, false);
        }
        group.bench_function(
            format!("ice-ih 8x8x4 sweep of 64 chains, beta {beta}"),
            |b| b.iter(|| lanes.sweep(&lane_kernel, beta, true)),
        );
    }
    let loops = Loops::new(&model).expect("loops apply to ice");
    let mut walk = loops.walk();
    let mut chain = kernel.chain(stream(1, 0));
    for _ in 0..200 {
        chain.sweep(&kernel, 3.0);
    }
    group.throughput(Throughput::Elements(1));
    group.bench_function("ice-ih 8x8x4 loop attempt, beta 3", |b| {
        b.iter(|| loops.attempt(&kernel, &mut chain, &mut walk))
    });
    group.finish();
    let mut group = c.benchmark_group("wang-landau");
    group.sample_size(10);
    let small = common::model("ice-ih.yaml", "2x2x2", None);
    let config = wang_landau::WangLandauConfig {
        seed: 1,
        replicas: 2,
        sweeps: 5_000,
        uniform: 2_000,
    };
    // 2 replicas × 2 stages × 5000 sweeps × 64 variables
    group.throughput(Throughput::Elements(
        2 * 2 * 5_000 * small.variables.len() as u64,
    ));
    group.bench_function("ice-ih 2x2x2, 2 walks of 5000 + 5000 sweeps", |b| {
        b.iter(|| wang_landau::count(&small, &config, &Default::default()).expect("walks"))
    });
    group.finish();
}

criterion_group!(benches, sweeps);
criterion_main!(benches);
