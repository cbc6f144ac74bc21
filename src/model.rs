//! The intermediate representation every counter reads: variables with their numbers of
//! states, and constraints, each a scope of variables with a table of allowed local
//! assignments.
//!
//! [`Model::new`] compiles the rules of a [`Cluster`]: every rule instance in every cell
//! becomes a constraint. A variable may occur more than once in an instance on tiny
//! periodic cells (a bond that wraps onto itself); the table is built over the distinct
//! variables, evaluating the rule on every occurrence, so such cells are counted honestly.
//! Identical tables are shared.
//!
//! The model remembers where everything comes from: each variable's [`Origin`] (the site or
//! bond of the crystal and the cell of the cluster it sits in) and each constraint's rule
//! instance (rule, instance within the rule, anchoring cell), so that a counter that needs
//! the geometry (the transfer operator places variables in columns and finds the translate
//! of a constraint one column on) reads it instead of re-deriving it.

use std::collections::HashMap;

use crate::cluster::{Cells, Cluster, ClusterEntity};
use crate::crystal::{MeanKind, Target, WhenCut};
use crate::error::{Error, Result};

/// Largest local table, in assignments, a rule may compile to.
pub const MAX_TABLE: u64 = 1 << 24;

/// What makes two compiled tables the same: rule, occurrence pattern, radices.
type TableKey = (usize, Vec<(Read, u32)>, Vec<u32>);

/// What one occurrence of a rule instance reads: a variable of the scope (by its place in
/// the scope), or the state of a pinned variable, which is not in the scope.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
enum Read {
    /// The scope variable at this place.
    Scope(usize),
    /// A pinned variable held at this state.
    Held(u32),
    /// A vacant site: no variable, no value; the rule counts the members that remain.
    Vacant,
}

/// One variable.
#[derive(Clone, Debug)]
pub struct Variable {
    /// Number of states: 1 for a pinned variable, which then appears in no constraint.
    pub states: u32,
    /// The state a pinned variable is held at (`pinned:` in the lattice file).
    pub held: Option<u32>,
    /// Relative weights of its states (`weights:` in the lattice file); `None` when every
    /// state weighs 1 (and always for a pinned variable).
    pub weights: Option<Vec<f64>>,
    /// Position in cell units, used to order sweeps.
    pub position: [f64; 3],
    /// The site or bond of the crystal it lives on, and the cell.
    pub origin: Origin,
}

/// The entity of the crystal a variable lives on, in one cell of the cluster.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Origin {
    /// Site `site` of the crystal (an index into `Crystal::sites`) in cell `cell`.
    Site {
        /// Index into the crystal's sites.
        site: usize,
        /// Cell coordinates in the cluster.
        cell: [usize; 3],
    },
    /// Bond `bond` of the crystal (an index into `Crystal::bonds`) leaving cell `cell`
    /// (the cell of its `from` site).
    Bond {
        /// Index into the crystal's bonds.
        bond: usize,
        /// Cell coordinates in the cluster of the bond's `from` site.
        cell: [usize; 3],
    },
}

impl Origin {
    /// The cell the variable sits in.
    pub fn cell(&self) -> [usize; 3] {
        match *self {
            Origin::Site { cell, .. } | Origin::Bond { cell, .. } => cell,
        }
    }
}

/// A table of allowed assignments of a scope, indexed in mixed radix (first variable
/// fastest).
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct Table {
    /// States of each scope variable.
    pub radices: Vec<u32>,
    /// Allowed assignments as a bit set.
    pub bits: Vec<u64>,
    /// Number of allowed assignments.
    pub allowed: u64,
    /// Number of assignments.
    pub size: u64,
}

impl Table {
    /// Whether the assignment with this mixed-radix index is allowed.
    #[inline]
    pub fn allows(&self, index: u64) -> bool {
        (self.bits[(index >> 6) as usize] >> (index & 63)) & 1 == 1
    }
}

/// One constraint.
#[derive(Clone, Debug)]
pub struct Constraint {
    /// Distinct variables, in table order.
    pub scope: Vec<usize>,
    /// Index into [`Model::tables`].
    pub table: usize,
    /// Index of the crystal rule it comes from.
    pub rule: usize,
    /// Index of the rule instance (`Rule::instances`) it compiles.
    pub instance: usize,
    /// The cell of the cluster the instance is anchored in (its slots' shifts are relative
    /// to it).
    pub cell: [usize; 3],
}

/// A mean imposed on one state of some variables of the cluster (`occupancy:` or
/// `composition:`), with one conjugate field.
#[derive(Clone, Debug, PartialEq)]
pub struct ImposedMean {
    /// Occupancy (maximum entropy at that mean) or composition (fixed exactly).
    pub kind: MeanKind,
    /// The entry as the file names it.
    pub label: String,
    /// The variables it averages over, increasing.
    pub variables: Vec<usize>,
    /// The state whose mean is imposed.
    pub state: u32,
    /// The target mean (fraction of `variables` in `state`).
    pub mean: f64,
}

/// Variables and constraints of a finite cluster.
#[derive(Clone, Debug)]
pub struct Model {
    /// Variables.
    pub variables: Vec<Variable>,
    /// Constraints.
    pub constraints: Vec<Constraint>,
    /// Shared tables.
    pub tables: Vec<Table>,
    /// Formula units in the cluster.
    pub formula_units: f64,
    /// A rule instance that no assignment can satisfy (its scope vanished at an open
    /// boundary), if any: the count is then zero.
    pub contradiction: Option<String>,
    /// Whether some constraint reads one variable more than once (tiny periodic cells).
    pub has_repeats: bool,
    /// "4x4 periodic", for reports.
    pub cells: String,
    /// The repetitions and boundaries the cluster was tiled with (`cells` in words).
    pub tiling: Cells,
    /// Means imposed on states, in the crystal's order (`Crystal::means`).
    pub means: Vec<ImposedMean>,
}

impl Model {
    /// Compile a cluster's rules. A crystal with vacancies (a diluted crystal) is refused
    /// ([`Error::Model`]): its cells are counted one realisation at a time
    /// ([`Model::with_vacancies`]).
    pub fn new(cluster: &Cluster) -> Result<Model> {
        if cluster.crystal.is_diluted() {
            return Err(Error::Model(format!(
                "{} has sites that may be vacant: a cell is counted one realisation of its \
                 vacancies at a time, and the result is the average over realisations",
                cluster.crystal.name
            )));
        }
        Self::compile(cluster, &[])
    }

    /// Compile the rules of one realisation of a diluted cluster: `vacant[i]` says whether
    /// the cluster's site `i` is empty. A vacant site keeps its place in the numbering but
    /// holds one state (no freedom, nothing to ln Ω) and is read by no constraint; every
    /// rule instance that reads it applies the crystal's `remaining` counts for the members
    /// left ([`crate::crystal::Rule::allows_with_vacancies`]). `vacant` must have one entry
    /// per cluster site ([`Error::Model`] otherwise).
    pub fn with_vacancies(cluster: &Cluster, vacant: &[bool]) -> Result<Model> {
        if vacant.len() != cluster.sites.len() {
            return Err(Error::Model(format!(
                "a realisation of vacancies names {} sites, but the cell {} has {}",
                vacant.len(),
                cluster.cells,
                cluster.sites.len()
            )));
        }
        Self::compile(cluster, vacant)
    }

    /// [`Model::new`] with the sites marked in `vacant` empty (none when it is empty).
    fn compile(cluster: &Cluster, vacant: &[bool]) -> Result<Model> {
        let crystal = cluster.crystal;
        let is_vacant = |i: usize| vacant.get(i).copied().unwrap_or(false);
        let site_var = crystal.site_variables.map(|k| k.states());
        let bond_var = crystal.bond_variables.map(|k| k.states());
        let mut variables = Vec::new();
        let mut site_offset = None;
        let mut bond_offset = None;
        let held = |target: Target, index: usize| {
            crystal
                .pinned
                .iter()
                .find(|p| p.target == target && p.index == index)
                .map(|p| p.state)
        };
        let weights = |target: Target, index: usize, h: Option<u32>| {
            crystal
                .weights
                .iter()
                .find(|w| w.target == target && w.index == index && h.is_none())
                .map(|w| w.states.clone())
        };
        if let Some(q) = site_var {
            site_offset = Some(variables.len());
            for (i, s) in cluster.sites.iter().enumerate() {
                let h = held(Target::Sites, s.site);
                variables.push(Variable {
                    states: if h.is_some() || is_vacant(i) { 1 } else { q },
                    held: h,
                    weights: weights(Target::Sites, s.site, h),
                    position: cluster.site_position(i),
                    origin: Origin::Site {
                        site: s.site,
                        cell: s.cell,
                    },
                });
            }
        }
        if let Some(q) = bond_var {
            bond_offset = Some(variables.len());
            for (i, b) in cluster.bonds.iter().enumerate() {
                let h = held(Target::Bonds, b.bond);
                variables.push(Variable {
                    states: if h.is_some() { 1 } else { q },
                    held: h,
                    weights: weights(Target::Bonds, b.bond, h),
                    position: cluster.bond_position(i),
                    origin: Origin::Bond {
                        bond: b.bond,
                        cell: b.cell,
                    },
                });
            }
        }
        let mut tables: Vec<Table> = Vec::new();
        let mut table_ids: HashMap<TableKey, usize> = HashMap::new();
        let mut constraints = Vec::new();
        let mut contradiction = None;
        let mut has_repeats = false;
        for (r, rule) in crystal.rules.iter().enumerate() {
            for cell in cluster.all_cells() {
                'instance: for (instance, inst) in rule.instances.iter().enumerate() {
                    // (variable, inward state) per occurrence.
                    let mut occ: Vec<(usize, u32)> = Vec::with_capacity(inst.slots.len());
                    for slot in &inst.slots {
                        let var = match (cluster.locate(slot.entity, cell), rule.target) {
                            (Some(ClusterEntity::Site(i)), Target::Sites) => {
                                site_offset.map(|o| o + i)
                            }
                            (Some(ClusterEntity::Bond(i)), Target::Bonds) => {
                                bond_offset.map(|o| o + i)
                            }
                            (None, _) => None,
                            _ => unreachable!("slots follow the rule's target"),
                        };
                        match var {
                            Some(v) => occ.push((v, slot.inward_state)),
                            None if inst.when_cut == WhenCut::DropSlots => {}
                            None => continue 'instance,
                        }
                    }
                    // Pinned variables are read as constants and left out of the scope.
                    let mut scope: Vec<usize> = Vec::new();
                    let mut local: Vec<(Read, u32)> = Vec::with_capacity(occ.len());
                    let mut repeats = false;
                    for &(v, w) in &occ {
                        if site_offset.is_some_and(|o| v >= o && is_vacant(v - o))
                            && rule.target == Target::Sites
                        {
                            local.push((Read::Vacant, w));
                            continue;
                        }
                        if let Some(h) = variables[v].held {
                            local.push((Read::Held(h), w));
                            continue;
                        }
                        let p = match scope.iter().position(|&x| x == v) {
                            Some(p) => {
                                repeats = true;
                                p
                            }
                            None => {
                                scope.push(v);
                                scope.len() - 1
                            }
                        };
                        local.push((Read::Scope(p), w));
                    }
                    has_repeats |= repeats;
                    let radices: Vec<u32> = scope.iter().map(|&v| variables[v].states).collect();
                    let key = (r, local, radices);
                    let table = match table_ids.get(&key) {
                        Some(&t) => t,
                        None => {
                            let t = compile_table(rule, &key.1, &key.2, &inst.label).map_err(
                                |message| Error::Invalid {
                                    path: crystal.path.clone(),
                                    position: rule.position,
                                    message,
                                },
                            )?;
                            tables.push(t);
                            table_ids.insert(key, tables.len() - 1);
                            tables.len() - 1
                        }
                    };
                    // A constraint that allows every assignment of its scope restricts
                    // nothing: it is factored out, and a variable no other constraint reads
                    // is free (it multiplies every count by its number of states).
                    if tables[table].allowed == tables[table].size {
                        continue;
                    }
                    if scope.is_empty() {
                        if tables[table].allowed == 0 && contradiction.is_none() {
                            contradiction = Some(format!(
                                "{} ({}) has no variables left and cannot be satisfied",
                                inst.label, rule.label
                            ));
                        }
                        continue;
                    }
                    constraints.push(Constraint {
                        scope,
                        table,
                        rule: r,
                        instance,
                        cell,
                    });
                }
            }
        }
        let means = crystal
            .means
            .iter()
            .map(|m| ImposedMean {
                kind: m.kind,
                label: m.label.clone(),
                variables: (0..variables.len())
                    .filter(|&v| match variables[v].origin {
                        Origin::Site { site, .. } => {
                            m.target == Target::Sites && m.members.binary_search(&site).is_ok()
                        }
                        Origin::Bond { bond, .. } => {
                            m.target == Target::Bonds && m.members.binary_search(&bond).is_ok()
                        }
                    })
                    .collect(),
                state: m.state,
                mean: m.mean,
            })
            .collect();
        Ok(Model {
            variables,
            constraints,
            tables,
            formula_units: cluster.formula_units(),
            contradiction,
            has_repeats,
            cells: cluster.cells.to_string(),
            tiling: cluster.cells.clone(),
            means,
        })
    }

    /// Whether some variable carries weights or some mean is imposed: the count is then a
    /// weighted sum, not a number of arrangements.
    pub fn is_weighted(&self) -> bool {
        !self.means.is_empty() || self.variables.iter().any(|v| v.weights.is_some())
    }

    /// The relative weight of state `s` of variable `v` (1 without `weights:`); imposed
    /// means are not included (their fields are the counter's unknowns).
    pub fn weight(&self, v: usize, s: u32) -> f64 {
        self.variables[v]
            .weights
            .as_ref()
            .map_or(1.0, |w| w[s as usize])
    }

    /// ln of the number of assignments with no constraint at all.
    pub(crate) fn ln_unconstrained(&self) -> f64 {
        self.variables.iter().map(|v| (v.states as f64).ln()).sum()
    }
}

/// Enumerate the local assignments of a scope and keep those the rule allows.
fn compile_table(
    rule: &crate::crystal::Rule,
    local: &[(Read, u32)],
    radices: &[u32],
    label: &str,
) -> std::result::Result<Table, String> {
    let size: u64 = radices
        .iter()
        .map(|&q| q as u64)
        .try_fold(1u64, |a, q| a.checked_mul(q))
        .unwrap_or(u64::MAX);
    if size > MAX_TABLE {
        // The product saturates at u64::MAX: say so rather than print it as a count.
        let size = if size == u64::MAX {
            "more than 2^64".to_string()
        } else {
            size.to_string()
        };
        return Err(format!(
            "rule '{}' at {label} reads {} variables, {size} local assignments (at most {MAX_TABLE}); \
             split it into smaller rules or narrow its scope",
            rule.label,
            radices.len()
        ));
    }
    // The rule reads the occurrences that remain (an open boundary may have dropped some).
    let inward: Vec<u32> = local.iter().map(|&(_, w)| w).collect();
    let mut bits = vec![0u64; size.div_ceil(64) as usize];
    let mut values = vec![0u32; radices.len()];
    let mut occ_values = vec![0u32; local.len()];
    let vacant: Vec<bool> = local.iter().map(|&(r, _)| r == Read::Vacant).collect();
    let diluted = vacant.iter().any(|&v| v);
    let mut allowed = 0;
    for index in 0..size {
        let mut rest = index;
        for (v, &q) in values.iter_mut().zip(radices) {
            *v = (rest % q as u64) as u32;
            rest /= q as u64;
        }
        for (o, &(read, _)) in occ_values.iter_mut().zip(local) {
            *o = match read {
                Read::Scope(p) => values[p],
                Read::Held(h) => h,
                Read::Vacant => 0,
            };
        }
        let allows = if diluted {
            rule.allows_with_vacancies(&vacant, &inward, &occ_values)
                .ok_or_else(|| {
                    format!(
                        "rule '{}' at {label} keeps {} of its members here (vacancies and an open \
                         boundary together); `remaining` has no entry for that number",
                        rule.label,
                        vacant.iter().filter(|v| !**v).count()
                    )
                })?
        } else {
            rule.allows(&inward, &occ_values)
        };
        if allows {
            bits[(index >> 6) as usize] |= 1 << (index & 63);
            allowed += 1;
        }
    }
    Ok(Table {
        radices: radices.to_vec(),
        bits,
        allowed,
        size,
    })
}

#[cfg(test)]
mod tests {
    use crate::Lattice;
    use crate::cluster::{Cells, Cluster};

    use super::*;

    const SQUARE_ICE: &str = include_str!("../lattices/square-ice.yaml");

    fn model(cells: &str, open: Option<&str>) -> Model {
        let l = Lattice::from_yaml(SQUARE_ICE, "square-ice.yaml").unwrap();
        let cluster = Cluster::new(&l.crystal, Cells::parse(cells, open, 2).unwrap()).unwrap();
        Model::new(&cluster).unwrap()
    }

    #[test]
    fn ice_rule_table_allows_six_of_sixteen() {
        let m = model("3x3", None);
        assert_eq!(m.variables.len(), 18);
        assert_eq!(m.constraints.len(), 9);
        assert_eq!(m.tables.len(), 1, "identical tables are shared");
        assert_eq!((m.tables[0].allowed, m.tables[0].size), (6, 16)); // C(4,2) of 2^4
        assert!(!m.has_repeats);
    }

    #[test]
    fn self_loops_on_the_one_cell_torus() {
        // Each bond wraps onto the single site: it points both in and out, so the inward
        // count is always 2 and every one of the 4 assignments is allowed (OEIS A054759: 4).
        // Such a constraint restricts nothing and is factored out: both arrows are free.
        let m = model("1x1", None);
        assert!(m.has_repeats);
        assert!(m.constraints.is_empty());
        assert_eq!(m.variables.len(), 2);
    }

    /// A rule that allows every assignment compiles to no constraint, so that the
    /// counters see free variables (ln q each) instead of a frontier of useless states.
    #[test]
    fn issue11_rules_that_allow_everything_are_factored_out() {
        let yaml = "name: t\ndimensions: 2\ncell: {vectors: [[1, 0], [0, 1]]}\n\
                    sites: [{id: P, at: [0, 0]}]\n\
                    bonds: [{id: h, from: P, to: P, shift: [1, 0]}]\n\
                    variables: [{on: sites, kind: occupancy}]\n\
                    rules: [{kind: occupied, at: bonds, allowed: [0, 1, 2]}]\n\
                    formula_unit: {name: site, per: sites}\n";
        let l = Lattice::from_yaml(yaml, "t.yaml").unwrap();
        let cluster = Cluster::new(&l.crystal, Cells::parse("4x4", None, 2).unwrap()).unwrap();
        let m = Model::new(&cluster).unwrap();
        assert_eq!(m.variables.len(), 16);
        assert!(m.constraints.is_empty());
        // With `allowed: [0, 1]` (hard-core exclusion) every bond is a constraint.
        let hard = yaml.replace("[0, 1, 2]", "[0, 1]");
        let l = Lattice::from_yaml(&hard, "t.yaml").unwrap();
        let cluster = Cluster::new(&l.crystal, Cells::parse("4x4", None, 2).unwrap()).unwrap();
        assert_eq!(Model::new(&cluster).unwrap().constraints.len(), 16);
    }

    #[test]
    fn open_boundaries_drop_bonds() {
        let m = model("3x3", Some("a,b"));
        assert_eq!(m.variables.len(), 12); // 2·3·2 bonds inside a 3×3 open patch
        let sizes: Vec<usize> = m.constraints.iter().map(|c| c.scope.len()).collect();
        assert_eq!(sizes.iter().filter(|&&s| s == 2).count(), 4); // corners
        assert_eq!(sizes.iter().filter(|&&s| s == 4).count(), 1); // centre
    }
}
