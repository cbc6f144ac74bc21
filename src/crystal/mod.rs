//! The validated crystal: the second parsing stage.
//!
//! [`Crystal::from_spec`] resolves every id, checks dimensions, the cell, the variable kinds
//! and the rules against each other, generates bonds from distance windows, and expands each
//! rule into the local *instances* it imposes on one unit cell (which variables, and how an
//! arrow must point to count as inward). Errors point into the file.
//!
//! One job per file: `types.rs` holds the validated parts (sites, bonds, groups, variable
//! families, rule instances, the formula unit); `validate.rs` the second parsing stage
//! ([`Crystal::from_spec`]) and the range limits it enforces; `geometry.rs` the cell's
//! geometry (positions, distances, the bonds of a distance window, the largest shift in
//! use); `rules.rs` the meaning of every rule kind ([`Rule::allows`]) and the expansion of a
//! rule into its instances; `pins.rs` the variables held at one state (`pinned:`); `weights.rs` the
//! weights of states and the means imposed on them (`weights:`, `occupancy:`, `composition:`);
//! `vacancies.rs` the sites that may be vacant (`vacancies:`) and each rule's allowed counts
//! for fewer remaining members (`remaining:`).

mod geometry;
mod pins;
mod rules;
mod types;
mod vacancies;
mod validate;
mod weights;

pub use rules::Rule;
pub use types::*;
pub use vacancies::{MAX_VACANT_SLOTS, Vacancy};
pub use validate::{
    LENGTH_RANGE, MAX_FRACTION, MAX_PROBE_ENTITIES, MAX_SHIFT, MAX_SITES, MAX_WINDOW_CANDIDATES,
    MAX_WINDOW_COORDINATION, UNITS_PER_CELL_RANGE, number_word,
};

use std::path::PathBuf;

/// A validated crystal description.
#[derive(Clone, Debug)]
pub struct Crystal {
    /// Name from the file.
    pub name: String,
    /// Description from the file.
    pub about: Option<String>,
    /// The file it came from.
    pub path: PathBuf,
    /// 1, 2 or 3.
    pub dimensions: usize,
    /// Cell vectors as rows, padded to 3D with unit vectors.
    pub vectors: [[f64; 3]; 3],
    /// Sites.
    pub sites: Vec<Site>,
    /// Bonds (listed and generated).
    pub bonds: Vec<Bond>,
    /// Groups.
    pub groups: Vec<Group>,
    /// Variables on sites, if any.
    pub site_variables: Option<VariableKind>,
    /// Variables on bonds, if any.
    pub bond_variables: Option<VariableKind>,
    /// Rules.
    pub rules: Vec<Rule>,
    /// Formula unit.
    pub formula_unit: FormulaUnit,
    /// Variables held at one state, sorted by target and index, at most one per entity.
    pub pinned: Vec<Pin>,
    /// Relative weights of states, sorted by target and index, at most one per entity.
    pub weights: Vec<Weight>,
    /// Means imposed on states (`occupancy:` and `composition:`), in file order.
    pub means: Vec<MeanTarget>,
    /// Sites that may be vacant (`vacancies:`), sorted by site, at most one per site.
    pub vacancies: Vec<Vacancy>,
}

impl Crystal {
    /// Whether the file gives weights of states or imposes means: the counts are then
    /// weighted sums, and a counter that cannot weigh must refuse.
    pub fn is_weighted(&self) -> bool {
        !self.weights.is_empty() || !self.means.is_empty()
    }
}
