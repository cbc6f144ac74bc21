//! The transfer-matrix column: one application of T on strips of shipped lattices, and
//! building the operator (symbolic pass and index lists).
//!
//! `cargo bench --bench transfer`.

mod common;

use criterion::{Criterion, criterion_group, criterion_main};
use groundcount::counters::transfer::{Column, StripConfig};

fn transfer(c: &mut Criterion) {
    let mut group = c.benchmark_group("transfer");
    group.sample_size(10);
    let config = StripConfig::default();
    for (file, width) in [
        ("square-ice.yaml", 10),
        ("square-ice.yaml", 12),
        ("hard-squares.yaml", 20),
        ("square-dimers.yaml", 12),
        ("triangular-afm.yaml", 12),
    ] {
        let l = common::lattice(file);
        let column = Column::new(&l.crystal, width, &config).expect("operator");
        let x = vec![1.0; column.states()];
        let (mut y, mut scratch) = (Vec::new(), Vec::new());
        let name = file.trim_end_matches(".yaml");
        group.bench_function(format!("column {name} W={width}"), |b| {
            b.iter(|| column.apply(&x, &mut y, &mut scratch))
        });
        group.bench_function(format!("build {name} W={width}"), |b| {
            b.iter(|| Column::new(&l.crystal, width, &config).expect("operator"))
        });
    }
    group.finish();
}

criterion_group!(benches, transfer);
criterion_main!(benches);
