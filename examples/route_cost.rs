//! Times the two exact routes of a periodic cell, the frontier counter and the trace of
//! Tᴸ, beside the costs that `exact::count_cell` compares to choose between them (the
//! measurements behind `exact::TRACE_WEIGHT`).
//!
//! ```text
//! cargo run --release --example route_cost -- lattices/square-ice.yaml 8x8
//! ```
use groundcount::counters::{exact, transfer};
use groundcount::{Lattice, cluster, model};
use std::time::Instant;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let [_, file, cells] = args.as_slice() else {
        return Err("usage: route_cost LATTICE.yaml CELLS (e.g. 8x8)".into());
    };
    let lattice = Lattice::from_file(std::path::Path::new(file))?;
    let cells = cluster::Cells::parse(cells, None, lattice.crystal.dimensions)?;
    let cluster = cluster::Cluster::new(&lattice.crystal, cells.clone())?;
    let model = model::Model::new(&cluster)?;
    let config = exact::ExactConfig::default();
    let cost = exact::plan_for(&model).map_or(f64::INFINITY, |p| p.cost);
    let start = Instant::now();
    let frontier = match exact::count(&model, &config, &Default::default()) {
        Ok(_) => format!("{:.3} s", start.elapsed().as_secs_f64()),
        Err(e) => format!("not finished: {e}"),
    };
    println!(
        "{file} {}: frontier plan cost {cost:.3e}, time {frontier}",
        cells
    );
    match transfer::torus::route(&lattice.crystal, &cells, exact::TRACE_MAX_STATES) {
        Some(trace) => {
            let start = Instant::now();
            let time = match trace.count_within(&model, &config) {
                Ok(_) => format!("{:.3} s", start.elapsed().as_secs_f64()),
                Err(e) => format!("not finished: {e}"),
            };
            println!(
                "  trace work {:.3e} (weighted {:.3e}), time {time}",
                trace.work(),
                exact::TRACE_WEIGHT * trace.work()
            );
        }
        None => println!("  no trace route for this cell"),
    }
    Ok(())
}
