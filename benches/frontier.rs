//! The exact frontier counter on shipped lattices (one benchmark per cell).
//!
//! `cargo bench --bench frontier`; the README lists the end-to-end timing command.

mod common;

use criterion::{Criterion, criterion_group, criterion_main};
use groundcount::context::Context;
use groundcount::counters::exact::{ExactConfig, count};

fn frontier(c: &mut Criterion) {
    let mut group = c.benchmark_group("frontier");
    group.sample_size(10);
    for (file, cells, open) in [
        ("square-ice.yaml", "6x6", None),
        ("square-ice.yaml", "8x8", None),
        ("hard-squares.yaml", "10x10", None),
        ("square-dimers.yaml", "12x12", Some("a,b")),
        ("ice-ih.yaml", "3x2x2", None),
        ("spin-ice.yaml", "3x3x2", None),
    ] {
        let model = common::model(file, cells, open);
        let config = ExactConfig::default();
        let name = format!("{} {}", file.trim_end_matches(".yaml"), model.cells);
        group.bench_function(name, |b| {
            b.iter(|| count(&model, &config, &Context::new()).expect("counts"))
        });
    }
    group.finish();
}

criterion_group!(benches, frontier);
criterion_main!(benches);
