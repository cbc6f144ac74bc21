//! The parts of a validated crystal.

use super::Crystal;

/// Cell displacement (unused axes are zero).
pub type Shift = [i64; 3];

/// The kind of a variable family.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum VariableKind {
    /// Two states; on a bond: 0 = points to `from`, 1 = points to `to`; on a site: 0 = along
    /// the site's `axis`, 1 = against it.
    Arrow,
    /// Two states: 0 = down, 1 = up.
    Spin,
    /// Two states: 0 = empty, 1 = occupied.
    Occupancy,
    /// `q` states 0..q-1.
    Color(u32),
}

impl VariableKind {
    /// Number of states.
    pub fn states(self) -> u32 {
        match self {
            VariableKind::Color(q) => q,
            _ => 2,
        }
    }
    /// The word used in lattice files.
    pub fn word(self) -> &'static str {
        match self {
            VariableKind::Arrow => "arrow",
            VariableKind::Spin => "spin",
            VariableKind::Occupancy => "occupancy",
            VariableKind::Color(_) => "color",
        }
    }
}

/// Where a variable family lives.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Target {
    /// One variable per site.
    Sites,
    /// One variable per bond.
    Bonds,
}

impl Target {
    /// The word used in lattice files.
    pub fn word(self) -> &'static str {
        match self {
            Target::Sites => "sites",
            Target::Bonds => "bonds",
        }
    }
}

/// The kind of a rule.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RuleKind {
    /// The number of arrows pointing into the scope is in `allowed`.
    Inward,
    /// The number of occupied variables in the scope is in `allowed`.
    Occupied,
    /// The values in the scope are not all the same.
    NotAllEqual,
    /// The values in the scope are pairwise different.
    Distinct,
    /// The tuple of values (in scope order) is one of `allowed`.
    Table,
}

impl RuleKind {
    /// The word used in lattice files.
    pub fn word(self) -> &'static str {
        match self {
            RuleKind::Inward => "inward",
            RuleKind::Occupied => "occupied",
            RuleKind::NotAllEqual => "not-all-equal",
            RuleKind::Distinct => "distinct",
            RuleKind::Table => "table",
        }
    }
}

/// Where one rule instance sits.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Scope {
    /// One instance per site (optionally only some sites).
    Sites,
    /// One instance per bond.
    Bonds,
    /// One instance per cell for this group.
    Group(usize),
}

/// A crystal entity relative to the cell an instance is anchored in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Entity {
    /// Site `site` in the cell displaced by `shift`.
    Site {
        /// Site index.
        site: usize,
        /// Cell displacement.
        shift: Shift,
    },
    /// Bond `bond` whose `from` end lies in the cell displaced by `shift`.
    Bond {
        /// Bond index.
        bond: usize,
        /// Cell displacement of its `from` end.
        shift: Shift,
    },
}

/// One variable occurrence in a rule instance.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct Slot {
    /// The entity carrying the variable.
    pub entity: Entity,
    /// For `inward` rules: the arrow state that points into the scope.
    pub inward_state: u32,
}

/// What an open boundary does to an instance that reaches outside the cell.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum WhenCut {
    /// Drop the missing variables; the rule applies to what remains (site-centred rules).
    DropSlots,
    /// Drop the whole instance (bond and group rules).
    DropInstance,
}

/// One rule instance per cell.
#[derive(Clone, Debug)]
pub struct Instance {
    /// What the instance is centred on, for messages ("site O", "group up").
    pub label: String,
    /// The variable occurrences, in scope order.
    pub slots: Vec<Slot>,
    /// What open boundaries do to it.
    pub when_cut: WhenCut,
}

/// A site of the cell.
#[derive(Clone, Debug)]
pub struct Site {
    /// Id.
    pub id: String,
    /// Species (defaults to the id).
    pub species: String,
    /// Fractional coordinates (unused axes zero).
    pub frac: [f64; 3],
    /// Local arrow axis, Cartesian.
    pub axis: Option<[f64; 3]>,
}

/// A bond of the crystal: `from` in cell 0 to `to` in cell `shift`.
#[derive(Clone, Debug)]
pub struct Bond {
    /// Id.
    pub id: String,
    /// The id written in the file: the bond's own, or its `between`/`distance` family's.
    pub family: String,
    /// Tail site.
    pub from: usize,
    /// Head site.
    pub to: usize,
    /// Cell of the head.
    pub shift: Shift,
    /// Length in the units of the cell vectors.
    pub length: f64,
}

/// Relative weights (activities) of the states of the variable on one site or bond of the
/// unit cell (`weights:` in the lattice file). The weight of an arrangement is the product
/// of its variables' weights; with every weight 1 it counts once.
#[derive(Clone, Debug, PartialEq)]
pub struct Weight {
    /// Sites or bonds.
    pub target: Target,
    /// Index into `Crystal::sites` or `Crystal::bonds`.
    pub index: usize,
    /// One finite non-negative weight per state, not all zero.
    pub states: Vec<f64>,
}

/// How a mean is imposed.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum MeanKind {
    /// `occupancy:` a measured mean: the maximum-entropy ensemble with that mean, by a
    /// conjugate field.
    Occupancy,
    /// `composition:` a fraction fixed exactly (canonical); in the infinite crystal the
    /// Legendre transform of the weighted count, in a finite cell an exact coefficient.
    Composition,
}

/// A mean imposed on one state over a set of sites or bonds of the unit cell: one
/// `occupancy:` or `composition:` entry, with one conjugate field.
#[derive(Clone, Debug, PartialEq)]
pub struct MeanTarget {
    /// Occupancy or composition.
    pub kind: MeanKind,
    /// The entry as the file names it, for reports ("O-H1 state 1").
    pub label: String,
    /// Sites or bonds.
    pub target: Target,
    /// Indices into `Crystal::sites` or `Crystal::bonds`, sorted and distinct.
    pub members: Vec<usize>,
    /// The state whose mean is imposed.
    pub state: u32,
    /// The mean (a fraction of the members), strictly between 0 and 1.
    pub mean: f64,
    /// Where the entry sits in the file.
    pub position: crate::error::Position,
}

/// Variables held at one state (`pinned:` in the lattice file): every variable on this
/// site or bond of the unit cell, in every cell.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Pin {
    /// Sites or bonds.
    pub target: Target,
    /// Index into `Crystal::sites` or `Crystal::bonds`.
    pub index: usize,
    /// The state held.
    pub state: u32,
}

/// A group of sites.
#[derive(Clone, Debug)]
pub struct Group {
    /// Id.
    pub id: String,
    /// Members: site and cell.
    pub members: Vec<(usize, Shift)>,
}

/// What a formula unit is.
#[derive(Clone, Debug)]
pub struct FormulaUnit {
    /// Its name, e.g. `H2O`.
    pub name: String,
    /// How it is counted.
    pub basis: UnitBasis,
}

/// How formula units are counted.
#[derive(Clone, Debug)]
pub enum UnitBasis {
    /// One per site whose species or id is in the list (all sites if `None`).
    Sites(Option<String>),
    /// One per bond.
    Bonds,
    /// A fixed number per cell.
    Cell(f64),
}

impl FormulaUnit {
    /// Formula units in one unit cell of the crystal.
    pub fn per_cell(&self, crystal: &Crystal) -> f64 {
        match &self.basis {
            UnitBasis::Sites(None) => crystal.sites.len() as f64,
            UnitBasis::Sites(Some(sp)) => {
                crystal.sites.iter().filter(|s| s.matches(sp)).count() as f64
            }
            UnitBasis::Bonds => crystal.bonds.len() as f64,
            UnitBasis::Cell(n) => *n,
        }
    }
    /// "one per O site", for tables.
    pub fn describe(&self) -> String {
        match &self.basis {
            UnitBasis::Sites(None) => "one per site".into(),
            UnitBasis::Sites(Some(sp)) => format!("one per {sp} site"),
            UnitBasis::Bonds => "one per bond".into(),
            UnitBasis::Cell(n) => format!("{n} per cell"),
        }
    }
}

impl Site {
    /// Whether a name from the file refers to this site (by id or species).
    pub fn matches(&self, name: &str) -> bool {
        self.id == name || self.species == name
    }
}
