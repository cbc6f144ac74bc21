//! # groundcount
//!
//! Counts the arrangements a crystal allows under local bonding rules (ice rules, spin-ice
//! rules, dimer coverings, hard-core exclusion, frustrated Ising ground states) and turns the
//! count into a residual molar entropy S0 = R ln W per formula unit.
//!
//! The data flow is one-directional:
//!
//! ```text
//! YAML ─▶ spec::LatticeSpec ─▶ crystal::Crystal ─▶ cluster::Cluster ─▶ model::Model
//!      ─▶ counters (pauling, exact) ─▶ estimate::Estimate ─▶ report
//! ```
//!
//! ```
//! use groundcount::{Lattice, cluster::Cells, counters};
//!
//! let yaml = r#"
//! name: square ice
//! dimensions: 2
//! cell: {vectors: [[1.0, 0.0], [0.0, 1.0]]}
//! sites: [{id: O, at: [0.0, 0.0]}]
//! bonds:
//!   - {id: h, from: O, to: O, shift: [1, 0]}
//!   - {id: v, from: O, to: O, shift: [0, 1]}
//! variables: [{on: bonds, kind: arrow}]
//! rules: [{kind: inward, at: sites, allowed: [2]}]
//! formula_unit: {name: H2O, per: sites}
//! "#;
//! let lattice = Lattice::from_yaml(yaml, "square-ice.yaml").unwrap();
//! let pauling = counters::pauling::estimate(&lattice.crystal).unwrap();
//! assert!((pauling.w_per_unit() - 1.5).abs() < 1e-12); // Pauling 1935
//! let cells = Cells::parse("3x3", None, 2).unwrap();
//! let exact = lattice.count_exact(&cells, &Default::default()).unwrap();
//! assert_eq!(exact.count.unwrap().to_string(), "148"); // OEIS A054759
//! ```

pub mod calorimetry;
pub mod cif;
pub mod cluster;
pub mod context;
pub mod counters;
pub mod crosscheck;
pub mod crystal;
pub mod error;
pub mod estimate;
pub mod model;
pub mod report;
pub mod spec;
pub mod survey;
pub mod thermo;
pub mod writeup;

use std::path::Path;

pub use error::{Error, Result};
pub use estimate::Estimate;

/// The ice Ih description shipped with the binary.
pub const ICE_IH_YAML: &str = include_str!("../lattices/ice-ih.yaml");

/// A lattice file, parsed and validated.
#[derive(Clone, Debug)]
pub struct Lattice {
    /// The validated crystal.
    pub crystal: crystal::Crystal,
    /// FNV-1a hash of the file's text, to tie results to their input.
    pub content_hash: String,
    /// The file's text (shards carry it, so that a merge can rebuild the model).
    pub text: String,
}

impl Lattice {
    /// Read, parse and validate a lattice file.
    pub fn from_file(path: &Path) -> Result<Lattice> {
        Self::from_bytes(&spec::read_file(path)?, path)
    }

    /// Parse and validate the bytes of a lattice file; `path` stands for the file in
    /// messages. Bytes that are not UTF-8 are refused at their byte offset.
    pub fn from_bytes(bytes: &[u8], path: impl AsRef<Path>) -> Result<Lattice> {
        Self::from_yaml(spec::text_of(bytes, path.as_ref())?, path)
    }

    /// Read a structure file (CIF): one data block (`block`, or the only one with atom
    /// sites) is turned into a lattice file by [`cif::import`] and validated. Refused when
    /// its disorder needs weighted counting (target occupancies, a fixed composition),
    /// which is not supported yet.
    pub fn from_cif(bytes: &[u8], path: impl AsRef<Path>, block: Option<&str>) -> Result<Lattice> {
        let options = cif::Options {
            block: block.map(str::to_string),
        };
        cif::import(bytes, path.as_ref(), &options)?.lattice(path)
    }

    /// Parse and validate YAML text; `name` stands for the file in messages.
    pub fn from_yaml(text: &str, name: impl AsRef<Path>) -> Result<Lattice> {
        let spec = spec::LatticeSpec::from_yaml(text, name.as_ref())?;
        Self::from_spec(spec, name.as_ref(), text)
    }

    fn from_spec(spec: spec::LatticeSpec, path: &Path, text: &str) -> Result<Lattice> {
        let crystal = crystal::Crystal::from_spec(spec, path)?;
        Ok(Lattice {
            crystal,
            content_hash: content_hash(text),
            text: text.to_string(),
        })
    }

    /// Tile, compile and count one cell exactly, by the route `groundcount exact` takes
    /// (the frontier counter, or the trace of Tᴸ on a thin torus where that is predicted
    /// cheaper: [`counters::exact::count_cell`]).
    pub fn count_exact(
        &self,
        cells: &cluster::Cells,
        config: &counters::exact::ExactConfig,
    ) -> Result<Estimate> {
        let cluster = cluster::Cluster::new(&self.crystal, cells.clone())?;
        let model = model::Model::new(&cluster)?;
        counters::exact::count_cell(&self.crystal, cells, &model, config).map(|(e, _)| e)
    }
}

/// FNV-1a (64-bit) hash of a text, as 16 hex digits: ties results to their input and
/// detects damaged shard files (not a defence against deliberate tampering).
pub fn content_hash(text: &str) -> String {
    let mut h: u64 = 0xcbf29ce484222325;
    for b in text.bytes() {
        h ^= b as u64;
        h = h.wrapping_mul(0x100000001b3);
    }
    format!("{h:016x}")
}
