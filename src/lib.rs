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
//!      ─▶ counters (pauling, bethe, exact, transfer, sampling) ─▶ estimate::Estimate
//!      ─▶ estimate::survey (every counter, the value to cite) ─▶ report / text
//! ```
//!
//! # Entry points
//!
//! A [`Lattice`] (a parsed and validated file) is the way in; from it:
//!
//! - [`Lattice::pauling`]: Pauling's estimate of the infinite crystal;
//! - [`Lattice::count_exact`]: the exact count of a finite cell;
//! - [`Lattice::strips`]: transfer matrices on strips of growing width, extrapolated to the
//!   infinite crystal (two-dimensional crystals, and prisms of three-dimensional ones);
//! - [`Lattice::sample`]: a Monte Carlo estimate of a finite cell with its error bar;
//! - [`Lattice::estimate`]: every method that suits the lattice within a time budget, and
//!   the value to cite ([`estimate::Survey::cited`]).
//!
//! Each returns an [`Estimate`] (ln W per formula unit, its σ, the method and the cell),
//! alone or with the method's details beside it ([`counters::Counted`]). The counters
//! themselves ([`counters`]) share one contract — input, settings and a
//! [`context::Context`] (progress observer, deadline, interrupt) in, [`counters::Counted`]
//! out — for callers that want progress or a way to stop. [`report::Report`] writes the
//! citable report of a survey; every JSON the command line writes is described in
//! docs/json.md.
//!
//! The library never prints, never exits and never names a command-line flag: errors are
//! typed values ([`Error`]) and the binary words them.
//!
//! ```
//! use groundcount::{Lattice, cluster::Cells};
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
//! let pauling = lattice.pauling().unwrap();
//! assert!((pauling.w_per_unit() - 1.5).abs() < 1e-12); // Pauling 1935
//! let cells = Cells::periodic(&[3, 3]).unwrap();
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
pub mod json;
pub mod model;
pub mod report;
pub mod spec;
pub mod text;
pub mod thermo;

#[cfg(test)]
mod validation_tests;

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

    /// Pauling's estimate for the infinite crystal: every local constraint treated as
    /// independent ([`counters::pauling`]).
    ///
    /// ```
    /// let ice = groundcount::Lattice::from_yaml(groundcount::ICE_IH_YAML, "ice-ih.yaml").unwrap();
    /// let p = ice.pauling().unwrap();
    /// assert!((p.w_per_unit() - 1.5).abs() < 1e-12); // 3/2 per H2O, Pauling 1935
    /// assert!(p.cells.is_none()); // the infinite crystal
    /// ```
    pub fn pauling(&self) -> Result<Estimate> {
        counters::pauling::count(&self.crystal, &(), &context::Context::new()).map(|c| c.estimate)
    }

    /// Tile, compile and count one cell exactly, by the route the command line takes
    /// (the frontier counter, or the trace of Tᴸ on a thin torus where that is predicted
    /// cheaper: [`counters::exact::count_cell`]).
    ///
    /// ```
    /// use groundcount::{Lattice, cluster::Cells};
    /// let ice = Lattice::from_yaml(groundcount::ICE_IH_YAML, "ice-ih.yaml").unwrap();
    /// let e = ice.count_exact(&Cells::periodic(&[2, 1, 1]).unwrap(), &Default::default()).unwrap();
    /// assert_eq!(e.count.unwrap().to_string(), "114"); // 8 waters
    /// ```
    pub fn count_exact(
        &self,
        cells: &cluster::Cells,
        config: &counters::exact::ExactConfig,
    ) -> Result<Estimate> {
        counters::exact::check_cell(&self.crystal, cells)?;
        let cluster = cluster::Cluster::new(&self.crystal, cells.clone())?;
        let model = model::Model::new(&cluster)?;
        counters::exact::count_cell(
            &self.crystal,
            cells,
            &model,
            config,
            &context::Context::new(),
        )
        .map(|c| c.estimate)
    }

    /// Transfer matrices on strips of the widths in `config`, extrapolated to infinite
    /// width ([`counters::transfer`]); an error if any width fails.
    ///
    /// ```
    /// use groundcount::{Lattice, counters::transfer::StripConfig};
    /// let path = concat!(env!("CARGO_MANIFEST_DIR"), "/lattices/square-dimers.yaml");
    /// let dimers = Lattice::from_file(path.as_ref()).unwrap();
    /// let config = StripConfig { widths: vec![2, 4, 6, 8], ..Default::default() };
    /// let s = dimers.strips(&config).unwrap();
    /// // Kasteleyn 1961, Temperley & Fisher 1961: W = exp(G/π) = 1.33851 per site
    /// let exact = (0.915_965_594_177_219_f64 / std::f64::consts::PI).exp();
    /// assert!((s.estimate.w_per_unit() - exact).abs() < 1e-3);
    /// assert_eq!(s.widths.len(), 4); // the details: every width
    /// ```
    pub fn strips(
        &self,
        config: &counters::transfer::StripConfig,
    ) -> Result<counters::Counted<counters::transfer::StripSeries>> {
        counters::transfer::count(&self.crystal, config, &context::Context::new())
    }

    /// A Monte Carlo estimate of one periodic cell by thermodynamic integration, with its
    /// error bar ([`counters::sampling`]); the same seed gives the same numbers on any
    /// number of threads.
    ///
    /// ```
    /// use groundcount::{Lattice, cluster::Cells, counters::sampling::SampleConfig};
    /// let ice = Lattice::from_yaml(groundcount::ICE_IH_YAML, "ice-ih.yaml").unwrap();
    /// let config = SampleConfig { replicas: 4, sweeps: 20, seed: 7, ..Default::default() };
    /// let s = ice.sample(&Cells::periodic(&[2, 1, 1]).unwrap(), &config).unwrap();
    /// let exact = 114f64.ln() / 8.0; // the exact count of the same cell
    /// assert!((s.estimate.ln_w_per_unit - exact).abs() < 5.0 * s.estimate.sigma_ln_w.unwrap());
    /// assert_eq!(s.seed, 7); // the details: seed, error budget, integrand
    /// ```
    pub fn sample(
        &self,
        cells: &cluster::Cells,
        config: &counters::sampling::SampleConfig,
    ) -> Result<counters::Counted<counters::sampling::Sampled>> {
        let cluster = cluster::Cluster::new(&self.crystal, cells.clone())?;
        let model = model::Model::new(&cluster)?;
        counters::sampling::count(&model, config, &context::Context::new())
    }

    /// Every counter that suits the lattice within `config.budget` seconds, and the value to
    /// cite ([`estimate::survey`], [`estimate::Survey::cited`]).
    ///
    /// ```
    /// use groundcount::{Lattice, estimate::{CitedReason, SurveyConfig}};
    /// let path = concat!(env!("CARGO_MANIFEST_DIR"), "/lattices/square-ice.yaml");
    /// let square_ice = Lattice::from_file(path.as_ref()).unwrap();
    /// let config = SurveyConfig {
    ///     budget: 60.0,
    ///     max_exact_units: Some(16.0),
    ///     widths: Some((2..=7).collect()),
    ///     ..Default::default()
    /// };
    /// let survey = square_ice.estimate(&config).unwrap();
    /// let cited = survey.cited().value.unwrap();
    /// assert_eq!(cited.reason, CitedReason::TransferMatrix);
    /// // Lieb 1967: W = (4/3)^(3/2) per H2O
    /// let w = cited.estimate.w_per_unit();
    /// assert!((w - (4.0f64 / 3.0).powf(1.5)).abs() < 3.0 * cited.estimate.sigma_w().unwrap());
    /// ```
    pub fn estimate(&self, config: &estimate::SurveyConfig) -> Result<estimate::Survey> {
        estimate::survey(&self.crystal, config, &context::Context::new())
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
