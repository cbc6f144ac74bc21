//! The Monte Carlo kernels: one heat-bath sweep and one loop attempt on an ice Ih cell.
//!
//! `cargo bench --bench sampling`. Throughput is reported in variable updates.

mod common;

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use groundcount::counters::sampling::{loops::Loops, moves::Kernel, stream};

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
}

criterion_group!(benches, sweeps);
criterion_main!(benches);
