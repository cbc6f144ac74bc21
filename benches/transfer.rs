//! The transfer-matrix column: one application of T on strips of shipped lattices, and
//! building the operator (symbolic pass and index lists), at the largest widths that build
//! in a few seconds (square ice in its zero-flux sector with reversal pairs, dimers in the
//! balanced sublattice sector, hard squares and the triangular antiferromagnet in the full
//! space). Compare the column time with the frontier states per application
//! (Σ over the steps of their outputs): about 1e9 per second per site step on two cores. Targets on two cores: square ice W = 20 built in under 2 s
//! and one column in under 0.1 s; hard squares W = 28 built in under 3 s. Column benches
//! report transitions per second; build benches one element per build.
//!
//! `cargo bench --bench transfer`.

mod common;

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use groundcount::counters::transfer::{Column, StripConfig};

fn transfer(c: &mut Criterion) {
    let mut group = c.benchmark_group("transfer");
    group.sample_size(10);
    let config = StripConfig::default();
    for (file, width) in [
        ("square-ice.yaml", 12),
        ("square-ice.yaml", 20),
        ("square-ice.yaml", 24),
        ("hard-squares.yaml", 28),
        ("square-dimers.yaml", 20),
        ("triangular-afm.yaml", 18),
    ] {
        let l = common::lattice(file);
        let column = Column::new(&l.crystal, width, &config).expect("operator");
        let x = vec![1.0; column.states()];
        let (mut y, mut scratch) = (Vec::new(), Vec::new());
        let name = file.trim_end_matches(".yaml");
        // Throughput in transitions (one gather-add each) per second.
        group.throughput(Throughput::Elements(column.transitions() as u64));
        group.bench_function(format!("column {name} W={width}"), |b| {
            b.iter(|| column.apply(&x, &mut y, &mut scratch))
        });
        group.throughput(Throughput::Elements(1));
        group.bench_function(format!("build {name} W={width}"), |b| {
            b.iter(|| Column::new(&l.crystal, width, &config).expect("operator"))
        });
    }
    group.finish();
}

criterion_group!(benches, transfer);
criterion_main!(benches);
