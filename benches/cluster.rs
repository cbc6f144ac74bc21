//! Building clusters and compiling models, and planning the frontier order.
//!
//! `cargo bench --bench cluster`.

mod common;

use criterion::{Criterion, criterion_group, criterion_main};
use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::order;
use groundcount::model::Model;

fn build(c: &mut Criterion) {
    let mut group = c.benchmark_group("cluster");
    group.sample_size(10);
    let ice = common::lattice("ice-ih.yaml");
    let cells = Cells::parse("8x8x8", None, 3).expect("cells");
    group.bench_function("ice-ih 8x8x8 cluster+model", |b| {
        b.iter(|| {
            let cluster = Cluster::new(&ice.crystal, cells.clone()).expect("cluster");
            Model::new(&cluster).expect("model")
        })
    });
    let model = common::model("square-ice.yaml", "16x16", None);
    group.bench_function("square-ice 16x16 plan", |b| {
        b.iter(|| order::choose(&model).expect("plan"))
    });
    group.finish();
}

criterion_group!(benches, build);
criterion_main!(benches);
