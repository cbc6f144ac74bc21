//! The validated crystal: the second parsing stage.
//!
//! [`Crystal::from_spec`] resolves every id, checks dimensions, the cell, the variable kinds
//! and the rules against each other, generates bonds from distance windows, and expands each
//! rule into the local *instances* it imposes on one unit cell (which variables, and how an
//! arrow must point to count as inward). Errors point into the file.

use std::collections::HashSet;
use std::path::{Path, PathBuf};

use crate::error::{Error, Position, Result};
use crate::spec::{AllowedSpec, LatticeSpec, Located, position_of};

/// Largest cell shift a bond or group member may use.
pub const MAX_SHIFT: i64 = 64;

/// Shortest and longest cell vector, in the file's length units: far beyond any unit of
/// length a crystal is described in, and far inside the range where lengths, areas and
/// volumes are still ordinary floating-point numbers.
pub const LENGTH_RANGE: (f64, f64) = (1e-30, 1e30);

/// Largest absolute fractional coordinate of a site (sites normally lie in the cell,
/// 0 ≤ x < 1).
pub const MAX_FRACTION: f64 = 1000.0;

/// Most sites a unit cell may list.
pub const MAX_SITES: usize = 10_000;

/// Most bonds one distance window may give a single site: physical coordinations stay far
/// below; a window that gives more is almost surely wider than meant, and would make the
/// rule tables and the clusters built from it enormous.
pub const MAX_WINDOW_COORDINATION: usize = 16;

/// Most (site pair, cell shift) candidates a distance window may test.
pub const MAX_WINDOW_CANDIDATES: u64 = 50_000_000;

/// Most sites and bonds the smallest periodic cluster of a crystal (a cube of 2·reach + 1
/// cells) may hold; longer shifts are refused when the file is read.
pub const MAX_PROBE_ENTITIES: u64 = 1 << 22;

/// Fewest and most formula units a `per: cell` count may give one cell.
pub const UNITS_PER_CELL_RANGE: (f64, f64) = (0.01, 1e6);

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

/// A validated rule.
#[derive(Clone, Debug)]
pub struct Rule {
    /// The rule kind.
    pub kind: RuleKind,
    /// Where it applies.
    pub scope: Scope,
    /// Which variables it reads.
    pub target: Target,
    /// Allowed counts (`inward`, `occupied`).
    pub counts: Vec<u32>,
    /// Allowed tuples (`table`).
    pub tuples: HashSet<Vec<u32>>,
    /// The instances in one cell.
    pub instances: Vec<Instance>,
    /// Where the rule is written.
    pub position: Position,
    /// "inward at sites", for messages.
    pub label: String,
}

impl Rule {
    /// Whether the values of the occurrences in scope satisfy the rule; `inward_states`
    /// gives, for `inward` rules, the state of each occurrence that points into the scope.
    pub fn allows(&self, inward_states: &[u32], values: &[u32]) -> bool {
        match self.kind {
            RuleKind::Inward => {
                let n = inward_states
                    .iter()
                    .zip(values)
                    .filter(|(s, v)| *s == *v)
                    .count() as u32;
                self.counts.contains(&n)
            }
            RuleKind::Occupied => {
                let n = values.iter().filter(|v| **v == 1).count() as u32;
                self.counts.contains(&n)
            }
            RuleKind::NotAllEqual => values.windows(2).any(|w| w[0] != w[1]),
            RuleKind::Distinct => {
                (0..values.len()).all(|i| (i + 1..values.len()).all(|j| values[i] != values[j]))
            }
            RuleKind::Table => self.tuples.contains(values),
        }
    }
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
    /// Tail site.
    pub from: usize,
    /// Head site.
    pub to: usize,
    /// Cell of the head.
    pub shift: Shift,
    /// Length in the units of the cell vectors.
    pub length: f64,
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
}

struct Checker<'a> {
    path: &'a Path,
}

impl Checker<'_> {
    fn err<T>(&self, position: Position, message: impl Into<String>) -> Result<T> {
        Err(Error::Invalid {
            path: self.path.to_path_buf(),
            position,
            message: message.into(),
        })
    }
    fn at<T, U>(&self, value: &Located<U>, message: impl Into<String>) -> Result<T> {
        self.err(position_of(value), message)
    }
}

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

fn norm(a: [f64; 3]) -> f64 {
    dot(a, a).sqrt()
}

fn determinant(m: &[[f64; 3]; 3]) -> f64 {
    m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
}

/// The length of a vector without overflow or underflow in the squares.
fn robust_norm(a: [f64; 3]) -> f64 {
    let m = a.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if m == 0.0 || !m.is_finite() {
        return m;
    }
    m * norm(a.map(|x| x / m))
}

/// A number as a person would write it in the file: `.nan`, `.inf`, `-.inf` or the value.
pub fn number_word(x: f64) -> String {
    if x.is_nan() {
        "NaN (not a number)".into()
    } else if x.is_infinite() {
        if x > 0.0 {
            "infinity".into()
        } else {
            "-infinity".into()
        }
    } else if x != 0.0 && !(1e-4..1e15).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

fn add_shift(a: Shift, b: Shift) -> Shift {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}

fn sub_shift(a: Shift, b: Shift) -> Shift {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

impl Crystal {
    /// Cartesian position of a site in a displaced cell.
    pub fn cartesian(&self, site: usize, shift: Shift) -> [f64; 3] {
        let f = self.sites[site].frac;
        let mut r = [0.0; 3];
        for (k, fk) in f.iter().enumerate() {
            let u = fk + shift[k] as f64;
            for (c, rc) in r.iter_mut().enumerate() {
                *rc += u * self.vectors[k][c];
            }
        }
        r
    }

    /// Volume (area, length) of the unit cell.
    pub fn cell_measure(&self) -> f64 {
        determinant(&self.vectors).abs()
    }

    /// Validate a parsed file.
    pub fn from_spec(spec: LatticeSpec, path: &Path) -> Result<Crystal> {
        let ck = Checker { path };
        let dims = spec.dimensions.value;
        if !(1..=3).contains(&dims) {
            return ck.at(
                &spec.dimensions,
                format!("dimensions must be 1, 2 or 3, found {dims}"),
            );
        }
        // The cell.
        let vecs = &spec.cell.vectors;
        if vecs.value.len() != dims {
            return ck.at(
                vecs,
                format!(
                    "cell.vectors must list {dims} vectors for a {dims}-dimensional crystal, found {}",
                    vecs.value.len()
                ),
            );
        }
        let mut vectors = [[0.0; 3]; 3];
        for (k, v) in vecs.value.iter().enumerate() {
            if v.len() != dims {
                return ck.at(
                    vecs,
                    format!(
                        "cell vector {} has {} components; expected {dims}",
                        k + 1,
                        v.len()
                    ),
                );
            }
            if let Some(x) = v.iter().find(|x| !x.is_finite()) {
                return ck.at(
                    vecs,
                    format!(
                        "cell vector {} has the component {}; expected finite numbers",
                        k + 1,
                        number_word(*x)
                    ),
                );
            }
            vectors[k][..dims].copy_from_slice(v);
            let length = robust_norm(vectors[k]);
            let (shortest, longest) = LENGTH_RANGE;
            if length != 0.0 && !(shortest..=longest).contains(&length) {
                return ck.at(
                    vecs,
                    format!(
                        "cell vector {} is {length:e} length units long; expected a length between \
                         {shortest:e} and {longest:e}",
                        k + 1
                    ),
                );
            }
        }
        for (k, row) in vectors.iter_mut().enumerate().skip(dims) {
            row[k] = 1.0;
        }
        // Linear dependence is judged on the vectors scaled to unit length, so that the test
        // does not depend on the unit of length.
        let lengths = vectors.map(robust_norm);
        let det = if lengths.contains(&0.0) {
            0.0
        } else {
            determinant(&[0, 1, 2].map(|k| vectors[k].map(|x| x / lengths[k])))
        };
        if det.abs() <= 1e-9 {
            return ck.at(
                vecs,
                "the cell vectors are zero or linearly dependent (collinear or coplanar); \
                 expected vectors spanning the space",
            );
        }

        // Sites.
        let mut sites: Vec<Site> = Vec::new();
        let sites_position = position_of(&spec.sites);
        if spec.sites.value.is_empty() {
            return ck.err(
                sites_position,
                "`sites` is an empty list; expected at least one site",
            );
        }
        if spec.sites.value.len() > MAX_SITES {
            return ck.at(
                &spec.sites.value[MAX_SITES].id,
                format!(
                    "the file lists {} sites; at most {MAX_SITES} sites per unit cell are supported",
                    spec.sites.value.len()
                ),
            );
        }
        let mut site_ids: HashSet<&str> = HashSet::new();
        for s in &spec.sites.value {
            if !site_ids.insert(s.id.value.as_str()) {
                return ck.at(&s.id, format!("site id '{}' is used twice", s.id.value));
            }
            if s.at.value.len() != dims {
                return ck.at(
                    &s.at,
                    format!(
                        "site '{}' has {} fractional coordinates; expected {dims}",
                        s.id.value,
                        s.at.value.len()
                    ),
                );
            }
            if let Some(x) =
                s.at.value
                    .iter()
                    .find(|x| x.is_nan() || x.abs() > MAX_FRACTION)
            {
                return ck.at(
                    &s.at,
                    format!(
                        "site '{}' has the fractional coordinate {}; expected a finite number \
                         between -{MAX_FRACTION} and {MAX_FRACTION} (sites normally lie in the cell, 0 to 1)",
                        s.id.value,
                        number_word(*x)
                    ),
                );
            }
            let mut frac = [0.0; 3];
            frac[..dims].copy_from_slice(&s.at.value);
            let axis = match &s.axis {
                None => None,
                Some(a) => {
                    if a.value.len() != dims {
                        return ck.at(
                            a,
                            format!(
                                "axis of site '{}' has {} components; expected {dims}",
                                s.id.value,
                                a.value.len()
                            ),
                        );
                    }
                    if let Some(x) = a.value.iter().find(|x| !x.is_finite()) {
                        return ck.at(
                            a,
                            format!(
                                "the axis of site '{}' has the component {}; expected finite numbers",
                                s.id.value,
                                number_word(*x)
                            ),
                        );
                    }
                    let mut v = [0.0; 3];
                    v[..dims].copy_from_slice(&a.value);
                    let length = robust_norm(v);
                    if length == 0.0 {
                        return ck.at(a, "an arrow axis must not be the zero vector");
                    }
                    // Only the direction matters: keep it as a unit vector, so that huge or
                    // tiny components cannot overflow later products.
                    Some(v.map(|x| x / length))
                }
            };
            sites.push(Site {
                id: s.id.value.clone(),
                species: s.species.clone().unwrap_or_else(|| s.id.value.clone()),
                frac,
                axis,
            });
        }
        let mut crystal = Crystal {
            name: spec.name.clone(),
            about: spec.about.clone(),
            path: path.to_path_buf(),
            dimensions: dims,
            vectors,
            sites,
            bonds: Vec::new(),
            groups: Vec::new(),
            site_variables: None,
            bond_variables: None,
            rules: Vec::new(),
            formula_unit: FormulaUnit {
                name: spec.formula_unit.name.clone(),
                basis: UnitBasis::Cell(1.0),
            },
        };
        let site_index = |name: &Located<String>| -> Result<usize> {
            crystal
                .sites
                .iter()
                .position(|s| s.id == name.value)
                .map_or_else(
                    || {
                        ck.at(
                            name,
                            format!(
                                "unknown site id '{}'; the sites are: {}",
                                name.value,
                                crystal
                                    .sites
                                    .iter()
                                    .map(|s| s.id.as_str())
                                    .collect::<Vec<_>>()
                                    .join(", ")
                            ),
                        )
                    },
                    Ok,
                )
        };
        let read_shift = |shift: &Option<Located<Vec<i64>>>, what: &str| -> Result<Shift> {
            let mut out = [0; 3];
            if let Some(s) = shift {
                if s.value.len() != dims {
                    return ck.at(
                        s,
                        format!(
                            "the shift of {what} has {} components; expected {dims} (one per dimension)",
                            s.value.len()
                        ),
                    );
                }
                if let Some(x) = s.value.iter().find(|x| x.unsigned_abs() > MAX_SHIFT as u64) {
                    return ck.at(
                        s,
                        format!(
                            "the shift of {what} has the component {x}, beyond ±{MAX_SHIFT} cells; \
                             expected a shift to a nearby cell"
                        ),
                    );
                }
                out[..dims].copy_from_slice(&s.value);
            }
            Ok(out)
        };

        // Bonds.
        let mut bonds: Vec<Bond> = Vec::new();
        for b in &spec.bonds {
            let explicit = b.from.is_some() || b.to.is_some() || b.shift.is_some();
            let generated = b.between.is_some() || b.distance.is_some();
            if explicit && generated {
                return ck.at(
                    &b.id,
                    format!(
                        "bond '{}' mixes `from`/`to`/`shift` with `between`/`distance`; \
                         expected either a listed bond or a distance window",
                        b.id.value
                    ),
                );
            }
            if generated {
                let (Some(between), Some(distance)) = (&b.between, &b.distance) else {
                    return ck.at(
                        &b.id,
                        format!(
                            "generated bond '{}' needs both `between: [A, B]` and `distance: [min, max]`",
                            b.id.value
                        ),
                    );
                };
                if between.value.len() != 2 {
                    return ck.at(
                        between,
                        "`between` must name exactly two species or site ids",
                    );
                }
                for name in &between.value {
                    if !crystal.sites.iter().any(|s| s.matches(name)) {
                        return ck.at(
                            between,
                            format!("`between` names '{name}', which is no site id or species"),
                        );
                    }
                }
                let w = &distance.value;
                if w.len() != 2 || !(w[0] >= 0.0 && w[1] > w[0] && w[1].is_finite()) {
                    let found: Vec<String> = w.iter().map(|x| number_word(*x)).collect();
                    return ck.at(
                        distance,
                        format!(
                            "`distance` is [{}]; expected [min, max] with finite numbers, 0 <= min < max",
                            found.join(", ")
                        ),
                    );
                }
                let reach = crystal.window_reach(w[1]);
                if reach > MAX_SHIFT {
                    return ck.at(
                        distance,
                        format!(
                            "the distance window reaches {} length units, more than {MAX_SHIFT} cells along some axis; \
                             expected a window around the bond length",
                            number_word(w[1])
                        ),
                    );
                }
                let found = crystal
                    .generate_bonds(&b.id.value, &between.value, w[0], w[1])
                    .map_err(|why| Error::Invalid {
                        path: path.to_path_buf(),
                        position: position_of(distance),
                        message: why,
                    })?;
                if found.is_empty() {
                    return ck.at(
                        distance,
                        format!(
                            "no {}–{} pair lies between {} and {} length units; check the window, \
                             the cell vectors and the coordinates",
                            between.value[0], between.value[1], w[0], w[1]
                        ),
                    );
                }
                bonds.extend(found);
            } else {
                let (Some(from), Some(to)) = (&b.from, &b.to) else {
                    return ck.at(
                        &b.id,
                        format!(
                            "bond '{}' needs `from` and `to` (and `shift`), or `between` and `distance`",
                            b.id.value
                        ),
                    );
                };
                let f = site_index(from)?;
                let t = site_index(to)?;
                let shift = read_shift(&b.shift, &format!("bond '{}'", b.id.value))?;
                if f == t && shift == [0; 3] {
                    return ck.at(
                        &b.id,
                        format!(
                            "bond '{}' joins site '{}' to itself in the same cell; give a non-zero shift",
                            b.id.value, from.value
                        ),
                    );
                }
                let length = {
                    let a = crystal.cartesian(f, [0; 3]);
                    let c = crystal.cartesian(t, shift);
                    norm([c[0] - a[0], c[1] - a[1], c[2] - a[2]])
                };
                bonds.push(Bond {
                    id: b.id.value.clone(),
                    from: f,
                    to: t,
                    shift,
                    length,
                });
            }
        }
        // Repeated ids and repeated bonds, through hash maps (a window may give thousands).
        let mut bond_ids: HashSet<&str> = HashSet::new();
        let mut bond_ends: std::collections::HashMap<(usize, usize, Shift), usize> =
            std::collections::HashMap::new();
        for (i, b) in bonds.iter().enumerate() {
            if !bond_ids.insert(b.id.as_str()) {
                let spec_bond = spec
                    .bonds
                    .iter()
                    .find(|s| s.id.value == b.id)
                    .unwrap_or(&spec.bonds[0]);
                return ck.at(&spec_bond.id, format!("bond id '{}' is used twice", b.id));
            }
            // The same bond read backwards: (to, from, −shift).
            let key = (b.from, b.to, b.shift);
            let reversed = (b.to, b.from, sub_shift([0; 3], b.shift));
            let earlier = bond_ends
                .get(&key)
                .or_else(|| bond_ends.get(&reversed))
                .copied();
            bond_ends.entry(key).or_insert(i);
            if let Some(o) = earlier.map(|j| &bonds[j]) {
                let spec_bond = spec
                    .bonds
                    .iter()
                    .find(|s| s.id.value == b.id)
                    .unwrap_or(&spec.bonds[0]);
                return ck.at(
                    &spec_bond.id,
                    format!(
                        "bond '{}' repeats bond '{}' (same sites and shift)",
                        b.id, o.id
                    ),
                );
            }
        }
        crystal.bonds = bonds;

        // Groups.
        for g in &spec.groups {
            if crystal.groups.iter().any(|o| o.id == g.id.value)
                || ["sites", "bonds"].contains(&g.id.value.as_str())
            {
                return ck.at(
                    &g.id,
                    format!(
                        "group id '{}' is used twice or is a reserved word",
                        g.id.value
                    ),
                );
            }
            let mut members = Vec::new();
            for m in &g.members.value {
                let s = site_index(&m.site)?;
                let shift = read_shift(&m.shift, &format!("a member of group '{}'", g.id.value))?;
                if members.contains(&(s, shift)) {
                    return ck.at(
                        &m.site,
                        format!(
                            "group '{}' lists site '{}' with the same shift twice",
                            g.id.value, m.site.value
                        ),
                    );
                }
                members.push((s, shift));
            }
            if members.len() < 2 {
                return ck.at(
                    &g.members,
                    format!("group '{}' needs at least two members", g.id.value),
                );
            }
            crystal.groups.push(Group {
                id: g.id.value.clone(),
                members,
            });
        }

        // Variables.
        if spec.variables.value.is_empty() {
            return ck.at(
                &spec.variables,
                "`variables` is an empty list; expected e.g. `- {on: bonds, kind: arrow}`",
            );
        }
        for v in &spec.variables.value {
            let kind = match v.kind.value.as_str() {
                "arrow" => VariableKind::Arrow,
                "spin" => VariableKind::Spin,
                "occupancy" => VariableKind::Occupancy,
                "color" => match &v.states {
                    Some(q) if (2..=64).contains(&q.value) => VariableKind::Color(q.value),
                    Some(q) if q.value > 64 => {
                        return ck.at(q, "a color variable may have at most 64 states");
                    }
                    Some(q) => return ck.at(q, "a color variable needs `states` of at least 2"),
                    None => return ck.at(&v.kind, "a color variable needs `states: q` (q >= 2)"),
                },
                other => return ck.at(
                    &v.kind,
                    format!(
                        "unknown variable kind '{other}'; expected arrow, spin, occupancy or color"
                    ),
                ),
            };
            if let (Some(q), false) = (&v.states, matches!(kind, VariableKind::Color(_)))
                && q.value != 2
            {
                return ck.at(
                    q,
                    format!(
                        "a {} variable has 2 states; `states` applies to color variables",
                        kind.word()
                    ),
                );
            }
            let slot = match v.on.value.as_str() {
                "sites" => &mut crystal.site_variables,
                "bonds" => &mut crystal.bond_variables,
                other => {
                    return ck.at(
                        &v.on,
                        format!("variables live `on: sites` or `on: bonds`, found '{other}'"),
                    );
                }
            };
            if slot.is_some() {
                return ck.at(
                    &v.on,
                    format!("variables on {} are declared twice", v.on.value),
                );
            }
            *slot = Some(kind);
        }
        if crystal.bond_variables.is_some() && crystal.bonds.is_empty() {
            return ck.at(
                &spec.variables.value[0].on,
                "variables are declared on bonds but the file has no bonds",
            );
        }
        if crystal.site_variables == Some(VariableKind::Arrow)
            && let Some(s) = spec.sites.value.iter().find(|s| s.axis.is_none())
        {
            return ck.at(&s.id, format!("site '{}' carries an arrow variable and needs an `axis` (the direction of state 0)", s.id.value));
        }

        // Rules. A file may list none: every variable is then free (W = q per variable).
        for r in &spec.rules {
            let rule = crystal.validate_rule(r, &ck)?;
            crystal.rules.push(rule);
        }

        // Formula unit.
        let fu = &spec.formula_unit;
        let basis = match fu.per.value.as_str() {
            "sites" | "site" => {
                if let Some(sp) = &fu.species {
                    if !crystal.sites.iter().any(|s| s.matches(&sp.value)) {
                        return ck.at(sp, format!("no site has species or id '{}'", sp.value));
                    }
                    UnitBasis::Sites(Some(sp.value.clone()))
                } else {
                    UnitBasis::Sites(None)
                }
            }
            "bonds" | "bond" => {
                if crystal.bonds.is_empty() {
                    return ck.at(&fu.per, "formula unit per bond, but the file has no bonds");
                }
                UnitBasis::Bonds
            }
            "cell" => match &fu.count {
                Some(c) if (UNITS_PER_CELL_RANGE.0..=UNITS_PER_CELL_RANGE.1).contains(&c.value) => {
                    UnitBasis::Cell(c.value)
                }
                Some(c) => {
                    return ck.at(
                        c,
                        format!(
                            "`count` is {}; expected the number of formula units in one cell, \
                             between {} and {:e}",
                            number_word(c.value),
                            UNITS_PER_CELL_RANGE.0,
                            UNITS_PER_CELL_RANGE.1
                        ),
                    );
                }
                None => {
                    return ck.at(
                        &fu.per,
                        "`per: cell` needs `count: N` (formula units per cell)",
                    );
                }
            },
            other => {
                return ck.at(
                    &fu.per,
                    format!("formula_unit.per must be sites, bonds or cell, found '{other}'"),
                );
            }
        };
        if fu.species.is_some() && !matches!(basis, UnitBasis::Sites(_)) {
            return ck.at(&fu.per, "`species` applies only with `per: sites`");
        }
        if fu.count.is_some() && !matches!(basis, UnitBasis::Cell(_)) {
            return ck.at(&fu.per, "`count` applies only with `per: cell`");
        }
        crystal.formula_unit.basis = basis;
        crystal.check_probe_size(&spec, &ck)?;
        Ok(crystal)
    }

    /// Refuse shifts so long that the smallest periodic cluster the counters build (a cube
    /// of 2·reach + 1 cells, at least 3, for Pauling's estimate and `inspect`) would be out of
    /// all proportion, pointing at the longest shift.
    fn check_probe_size(&self, spec: &LatticeSpec, ck: &Checker) -> Result<()> {
        let reach = self.reach();
        let n = (2 * reach + 1).max(3) as u64;
        let per_cell = (self.sites.len() + self.bonds.len()) as u64;
        let cells = n.saturating_pow(self.dimensions as u32);
        let entities = cells.saturating_mul(per_cell);
        if entities <= MAX_PROBE_ENTITIES {
            return Ok(());
        }
        // The written shift (or window) that reaches farthest.
        let longest = |v: &[i64]| v.iter().map(|x| x.unsigned_abs()).max().unwrap_or(0);
        let mut culprit: (u64, Position) = (0, Position::default());
        let mut consider = |r: u64, p: Position| {
            if r > culprit.0 || culprit.1.known().is_none() {
                culprit = (r, p);
            }
        };
        for b in &spec.bonds {
            if let Some(sh) = &b.shift {
                consider(longest(&sh.value), position_of(sh));
            }
            if let Some(d) = &b.distance {
                let r = self
                    .bonds
                    .iter()
                    .filter(|x| x.id.starts_with(&b.id.value))
                    .map(|x| longest(&x.shift))
                    .max()
                    .unwrap_or(0);
                consider(r, position_of(d));
            }
        }
        for g in &spec.groups {
            for m in &g.members.value {
                if let Some(sh) = &m.shift {
                    consider(longest(&sh.value), position_of(sh));
                }
            }
        }
        let size = vec![n.to_string(); self.dimensions].join("x");
        ck.err(
            culprit.1,
            format!(
                "shifts reaching {reach} cells make the smallest periodic cluster {size} cells of {} \
                 sites and bonds each ({entities} in all, at most {MAX_PROBE_ENTITIES}); expected shifts \
                 to nearby cells",
                per_cell
            ),
        )
    }

    /// Cells to search along each axis for pairs up to distance `max` (cell heights bound
    /// the shifts worth trying).
    fn window_reaches(&self, max: f64) -> [i64; 3] {
        let vol = self.cell_measure();
        let mut reach = [0i64; 3];
        for (k, r) in reach.iter_mut().enumerate().take(self.dimensions) {
            let (a, b) = ((k + 1) % 3, (k + 2) % 3);
            let (u, v) = (self.vectors[a], self.vectors[b]);
            let cross = [
                u[1] * v[2] - u[2] * v[1],
                u[2] * v[0] - u[0] * v[2],
                u[0] * v[1] - u[1] * v[0],
            ];
            let height = vol / norm(cross);
            *r = ((max / height).ceil().min(1e6) as i64) + 1;
        }
        reach
    }

    /// The largest of [`Self::window_reaches`].
    fn window_reach(&self, max: f64) -> i64 {
        self.window_reaches(max).into_iter().max().unwrap_or(0)
    }

    /// Every pair of sites of the two species whose distance lies in `[min, max]`; refused
    /// (with the reason, in the file's words) when the search or its result would be far
    /// larger than any physical window gives.
    fn generate_bonds(
        &self,
        prefix: &str,
        between: &[String],
        min: f64,
        max: f64,
    ) -> std::result::Result<Vec<Bond>, String> {
        let reach = self.window_reaches(max);
        let pair_ok = |i: usize, j: usize| {
            let (a, b) = (&self.sites[i], &self.sites[j]);
            (a.matches(&between[0]) && b.matches(&between[1]))
                || (a.matches(&between[1]) && b.matches(&between[0]))
        };
        let first = self.sites.iter().filter(|s| s.matches(&between[0])).count() as u64;
        let second = self.sites.iter().filter(|s| s.matches(&between[1])).count() as u64;
        let shifts: u64 = reach.iter().map(|&r| 2 * r.max(0) as u64 + 1).product();
        let candidates = first.saturating_mul(second).saturating_mul(shifts);
        if candidates > MAX_WINDOW_CANDIDATES {
            return Err(format!(
                "the distance window up to {max} length units would test about {candidates} site pairs \
                 across {shifts} neighbouring cells (at most {MAX_WINDOW_CANDIDATES}); expected a window \
                 around the bond length"
            ));
        }
        let mut coordination = vec![0usize; self.sites.len()];
        let mut out = Vec::new();
        for i in 0..self.sites.len() {
            for j in i..self.sites.len() {
                if !pair_ok(i, j) {
                    continue;
                }
                for n0 in -reach[0]..=reach[0] {
                    for n1 in -reach[1]..=reach[1] {
                        for n2 in -reach[2]..=reach[2] {
                            let n = [n0, n1, n2];
                            if i == j && n <= [0; 3] {
                                continue; // each periodic image pair once
                            }
                            let a = self.cartesian(i, [0; 3]);
                            let c = self.cartesian(j, n);
                            let d = norm([c[0] - a[0], c[1] - a[1], c[2] - a[2]]);
                            if d >= min && d <= max {
                                coordination[i] += 1;
                                coordination[j] += 1;
                                if let Some(k) = [i, j]
                                    .into_iter()
                                    .find(|&k| coordination[k] > MAX_WINDOW_COORDINATION)
                                {
                                    return Err(format!(
                                        "the distance window [{min}, {max}] gives site '{}' more than \
                                         {MAX_WINDOW_COORDINATION} bonds; expected a window around the \
                                         bond length (run `inspect` with a narrower window to see the \
                                         bond lengths)",
                                        self.sites[k].id
                                    ));
                                }
                                out.push(Bond {
                                    id: format!("{prefix}{}", out.len() + 1),
                                    from: i,
                                    to: j,
                                    shift: n,
                                    length: d,
                                });
                            }
                        }
                    }
                }
            }
        }
        Ok(out)
    }

    /// Slots of the arrows on the bonds that join the member set to the rest of the crystal.
    fn boundary_bond_slots(&self, members: &[(usize, Shift)]) -> Vec<Slot> {
        let mut slots = Vec::new();
        for &(s, m) in members {
            for (b, bond) in self.bonds.iter().enumerate() {
                if bond.from == s {
                    let other = (bond.to, add_shift(m, bond.shift));
                    if !members.contains(&other) {
                        slots.push(Slot {
                            entity: Entity::Bond { bond: b, shift: m },
                            inward_state: 0,
                        });
                    }
                }
                if bond.to == s {
                    let cell = sub_shift(m, bond.shift);
                    let other = (bond.from, cell);
                    if !members.contains(&other) {
                        slots.push(Slot {
                            entity: Entity::Bond {
                                bond: b,
                                shift: cell,
                            },
                            inward_state: 1,
                        });
                    }
                }
            }
        }
        slots
    }

    /// Neighbouring site occurrences of a site (one per bond end).
    fn neighbour_slots(&self, s: usize) -> Vec<Slot> {
        let mut slots = vec![Slot {
            entity: Entity::Site {
                site: s,
                shift: [0; 3],
            },
            inward_state: 0,
        }];
        for bond in &self.bonds {
            if bond.from == s {
                slots.push(Slot {
                    entity: Entity::Site {
                        site: bond.to,
                        shift: bond.shift,
                    },
                    inward_state: 0,
                });
            }
            if bond.to == s {
                slots.push(Slot {
                    entity: Entity::Site {
                        site: bond.from,
                        shift: sub_shift([0; 3], bond.shift),
                    },
                    inward_state: 0,
                });
            }
        }
        slots
    }

    fn validate_rule(&self, r: &crate::spec::RuleSpec, ck: &Checker) -> Result<Rule> {
        let kind = match r.kind.value.as_str() {
            "inward" => RuleKind::Inward,
            "occupied" => RuleKind::Occupied,
            "not-all-equal" => RuleKind::NotAllEqual,
            "distinct" => RuleKind::Distinct,
            "table" => RuleKind::Table,
            other => {
                return ck.at(
                    &r.kind,
                    format!("unknown rule kind '{other}'; expected inward, occupied, not-all-equal, distinct or table"),
                )
            }
        };
        let scope = match r.at.value.as_str() {
            "sites" => Scope::Sites,
            "bonds" => Scope::Bonds,
            g => match self.groups.iter().position(|x| x.id == g) {
                Some(i) => Scope::Group(i),
                None => {
                    let known: Vec<&str> = self.groups.iter().map(|x| x.id.as_str()).collect();
                    return ck.at(
                        &r.at,
                        format!(
                            "unknown scope '{g}'; expected sites, bonds or a group id{}",
                            if known.is_empty() {
                                " (the file defines no groups)".to_string()
                            } else {
                                format!(" ({})", known.join(", "))
                            }
                        ),
                    );
                }
            },
        };
        // Which variables does the rule read?
        let target = match &r.of {
            Some(of) => {
                let t = match of.value.as_str() {
                    "sites" => Target::Sites,
                    "bonds" => Target::Bonds,
                    other => return ck.at(of, format!("`of` must be sites or bonds, found '{other}'")),
                };
                let declared = match t {
                    Target::Sites => self.site_variables.is_some(),
                    Target::Bonds => self.bond_variables.is_some(),
                };
                if !declared {
                    return ck.at(of, format!("the rule reads variables on {} but none are declared there", of.value));
                }
                t
            }
            None => match (self.site_variables.is_some(), self.bond_variables.is_some(), &scope) {
                (true, true, _) => {
                    return ck.at(&r.at, "both sites and bonds carry variables: say which this rule reads with `of: sites` or `of: bonds`")
                }
                (false, true, _) => Target::Bonds,
                _ => Target::Sites,
            },
        };
        let var_kind = match target {
            Target::Sites => self.site_variables,
            Target::Bonds => self.bond_variables,
        }
        .expect("target checked above");
        if target == Target::Bonds && scope == Scope::Bonds {
            return ck.at(&r.at, "a rule `at: bonds` reads the variables on the bond's two end sites; declare variables on sites");
        }
        let fits = match kind {
            RuleKind::Inward => var_kind == VariableKind::Arrow,
            RuleKind::Occupied => var_kind == VariableKind::Occupancy,
            RuleKind::NotAllEqual | RuleKind::Distinct => {
                matches!(var_kind, VariableKind::Spin | VariableKind::Color(_))
            }
            RuleKind::Table => true,
        };
        if !fits {
            let wants = match kind {
                RuleKind::Inward => "arrow",
                RuleKind::Occupied => "occupancy",
                _ => "spin or color",
            };
            return ck.at(
                &r.kind,
                format!(
                    "rule '{}' needs {wants} variables, but the variables on {} are of kind {}",
                    kind.word(),
                    target.word(),
                    var_kind.word()
                ),
            );
        }
        if kind == RuleKind::Inward && target == Target::Sites && !matches!(scope, Scope::Group(_))
        {
            return ck.at(&r.at, "an inward rule on arrows that sit on sites needs a group scope (the arrow points into or out of the group)");
        }
        if kind == RuleKind::Table && (target == Target::Bonds || scope == Scope::Sites) {
            return ck.at(&r.at, "a table rule applies to site variables `at: bonds` (from, to) or at a group (member order)");
        }
        // `only`
        let mut only: Option<Vec<String>> = None;
        if let Some(o) = &r.only {
            if scope != Scope::Sites {
                return ck.at(o, "`only` restricts rules `at: sites`");
            }
            for name in &o.value {
                if !self.sites.iter().any(|s| s.matches(name)) {
                    return ck.at(
                        o,
                        format!("`only` names '{name}', which is no site id or species"),
                    );
                }
            }
            only = Some(o.value.clone());
        }
        // Instances in one cell.
        let mut instances = Vec::new();
        match &scope {
            Scope::Sites => {
                for (i, site) in self.sites.iter().enumerate() {
                    if only
                        .as_ref()
                        .is_some_and(|o| !o.iter().any(|n| site.matches(n)))
                    {
                        continue;
                    }
                    let slots = match target {
                        Target::Bonds => self.boundary_bond_slots(&[(i, [0; 3])]),
                        Target::Sites => self.neighbour_slots(i),
                    };
                    instances.push(Instance {
                        label: format!("site {}", site.id),
                        slots,
                        when_cut: WhenCut::DropSlots,
                    });
                }
            }
            Scope::Bonds => {
                if self.bonds.is_empty() {
                    return ck.at(&r.at, "a rule `at: bonds` but the file has no bonds");
                }
                for (b, bond) in self.bonds.iter().enumerate() {
                    let slots = vec![
                        Slot {
                            entity: Entity::Site {
                                site: bond.from,
                                shift: [0; 3],
                            },
                            inward_state: 0,
                        },
                        Slot {
                            entity: Entity::Site {
                                site: bond.to,
                                shift: bond.shift,
                            },
                            inward_state: 0,
                        },
                    ];
                    let _ = b;
                    instances.push(Instance {
                        label: format!("bond {}", bond.id),
                        slots,
                        when_cut: WhenCut::DropInstance,
                    });
                }
            }
            Scope::Group(g) => {
                let group = &self.groups[*g];
                let slots = match (target, kind) {
                    (Target::Bonds, _) => self.boundary_bond_slots(&group.members),
                    (Target::Sites, RuleKind::Inward) => {
                        let pos: Vec<[f64; 3]> = group
                            .members
                            .iter()
                            .map(|&(s, m)| self.cartesian(s, m))
                            .collect();
                        let n = pos.len() as f64;
                        let centre = [0, 1, 2].map(|c| pos.iter().map(|p| p[c]).sum::<f64>() / n);
                        let mut slots = Vec::new();
                        for (&(s, m), p) in group.members.iter().zip(&pos) {
                            let axis = self.sites[s].axis.expect("checked with the variables");
                            let to_centre = [centre[0] - p[0], centre[1] - p[1], centre[2] - p[2]];
                            let d = dot(axis, to_centre);
                            if d.abs() <= 1e-6 * norm(axis) * norm(to_centre) {
                                return ck.at(
                                    &r.at,
                                    format!(
                                        "the axis of site '{}' is perpendicular to the direction of the centre of group '{}': \
                                         whether its arrow points in or out is undefined",
                                        self.sites[s].id, group.id
                                    ),
                                );
                            }
                            slots.push(Slot {
                                entity: Entity::Site { site: s, shift: m },
                                inward_state: if d > 0.0 { 0 } else { 1 },
                            });
                        }
                        slots
                    }
                    (Target::Sites, _) => group
                        .members
                        .iter()
                        .map(|&(s, m)| Slot {
                            entity: Entity::Site { site: s, shift: m },
                            inward_state: 0,
                        })
                        .collect(),
                };
                instances.push(Instance {
                    label: format!("group {}", group.id),
                    slots,
                    when_cut: WhenCut::DropInstance,
                });
            }
        }
        if instances.is_empty() {
            return ck.at(&r.at, "the rule applies nowhere (no site matches `only`)");
        }
        // Allowed values.
        let mut counts = Vec::new();
        let mut tuples = HashSet::new();
        let label = format!("{} at {}", kind.word(), r.at.value);
        let states = var_kind.states();
        match kind {
            RuleKind::Inward | RuleKind::Occupied => {
                let Some(allowed) = &r.allowed else {
                    return ck.at(
                        &r.kind,
                        format!("rule '{}' needs `allowed: [counts]`", kind.word()),
                    );
                };
                let AllowedSpec::Counts(c) = &allowed.value else {
                    return ck.at(allowed, "`allowed` must be a list of counts, e.g. [2]");
                };
                if c.is_empty() {
                    return ck.at(
                        allowed,
                        "`allowed` is empty: no arrangement would be allowed",
                    );
                }
                counts = c.clone();
                for inst in &instances {
                    let n = inst.slots.len() as u32;
                    if !counts.iter().any(|&k| k <= n) {
                        return ck.at(
                            allowed,
                            format!(
                                "no allowed count {:?} is possible at {}, which has {} variables in scope",
                                counts, inst.label, n
                            ),
                        );
                    }
                }
                let largest = instances.iter().map(|i| i.slots.len()).max().unwrap_or(0) as u32;
                if let Some(k) = counts.iter().find(|&&k| k > largest) {
                    return ck.at(
                        allowed,
                        format!("allowed count {k} exceeds the {largest} variables of the largest scope; it can never occur"),
                    );
                }
            }
            RuleKind::Table => {
                let Some(allowed) = &r.allowed else {
                    return ck.at(&r.kind, "a table rule needs `allowed: [[tuple], ...]`");
                };
                let list: Vec<Vec<u32>> =
                    match &allowed.value {
                        AllowedSpec::Tuples(t) => t.clone(),
                        AllowedSpec::Counts(c) if c.is_empty() => Vec::new(),
                        AllowedSpec::Counts(_) => return ck.at(
                            allowed,
                            "a table rule's `allowed` is a list of tuples, e.g. [[0, 1], [1, 0]]",
                        ),
                    };
                let width = instances[0].slots.len();
                for t in &list {
                    if t.len() != width {
                        return ck.at(
                            allowed,
                            format!("tuple {t:?} has {} values; the scope has {width}", t.len()),
                        );
                    }
                    if let Some(v) = t.iter().find(|&&v| v >= states) {
                        return ck.at(
                            allowed,
                            format!(
                                "value {v} in tuple {t:?} is not a state (0..{})",
                                states - 1
                            ),
                        );
                    }
                    tuples.insert(t.clone());
                }
                if tuples.is_empty() {
                    return ck.at(
                        allowed,
                        "`allowed` is empty: no arrangement would be allowed",
                    );
                }
            }
            RuleKind::NotAllEqual | RuleKind::Distinct => {
                if let Some(a) = &r.allowed {
                    return ck.at(a, format!("rule '{}' takes no `allowed` list", kind.word()));
                }
                if kind == RuleKind::Distinct
                    && let Some(inst) = instances.iter().find(|i| i.slots.len() as u32 > states)
                {
                    return ck.at(
                        &r.kind,
                        format!(
                            "{} values at {} cannot be pairwise distinct with only {states} states",
                            inst.slots.len(),
                            inst.label
                        ),
                    );
                }
            }
        }
        Ok(Rule {
            kind,
            scope,
            target,
            counts,
            tuples,
            instances,
            position: position_of(&r.kind),
            label,
        })
    }

    /// The largest absolute cell shift used by any bond, group or rule instance.
    pub fn reach(&self) -> i64 {
        let mut r = 0;
        for b in &self.bonds {
            r = r.max(b.shift.iter().map(|x| x.abs()).max().unwrap_or(0));
        }
        for rule in &self.rules {
            for inst in &rule.instances {
                for s in &inst.slots {
                    let ends = match s.entity {
                        Entity::Site { shift, .. } => [shift, shift],
                        Entity::Bond { bond, shift } => {
                            [shift, add_shift(shift, self.bonds[bond].shift)]
                        }
                    };
                    for sh in ends {
                        r = r.max(sh.iter().map(|x| x.abs()).max().unwrap_or(0));
                    }
                }
            }
        }
        r
    }
}
