//! The integration tests: one binary, topic modules, shared helpers in `util`.

mod util;

mod calorimetry;
mod cif;
mod cli_errors;
mod counts;
mod dilution;
mod estimate;
mod fuzz;
mod json;
mod pinned;
mod report;
mod sampling;
mod shards;
mod transfer;
