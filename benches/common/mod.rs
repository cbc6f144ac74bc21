//! Shared inputs for the benchmarks: shipped lattices compiled on given cells.
#![allow(dead_code)]

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::model::Model;

/// A shipped lattice file, parsed and validated.
pub fn lattice(name: &str) -> Lattice {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("lattices")
        .join(name);
    Lattice::from_file(&path).expect("shipped lattice files are valid")
}

/// The model of a shipped lattice on a cell such as "8x8" (periodic unless `open`).
pub fn model(name: &str, cells: &str, open: Option<&str>) -> Model {
    let l = lattice(name);
    let cells = Cells::parse(cells, open, l.crystal.dimensions).expect("valid cells");
    let cluster = Cluster::new(&l.crystal, cells).expect("cluster");
    Model::new(&cluster).expect("model")
}
