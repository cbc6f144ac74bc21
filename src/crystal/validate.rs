//! The second parsing stage: [`Crystal::from_spec`] checks everything that needs the whole
//! file, and the range limits it enforces.

use std::collections::HashSet;
use std::path::Path;

use super::Crystal;
use super::geometry::{determinant, norm, robust_norm, sub_shift};
use super::types::*;
use crate::error::{Error, Position, Result};
use crate::spec::{LatticeSpec, Located, position_of};

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

pub(crate) struct Checker<'a> {
    path: &'a Path,
}

impl Checker<'_> {
    pub(super) fn err<T>(&self, position: Position, message: impl Into<String>) -> Result<T> {
        Err(Error::Invalid {
            path: self.path.to_path_buf(),
            position,
            message: message.into(),
        })
    }
    pub(super) fn at<T, U>(&self, value: &Located<U>, message: impl Into<String>) -> Result<T> {
        self.err(position_of(value), message)
    }
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

impl Crystal {
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
            pinned: Vec::new(),
            weights: Vec::new(),
            means: Vec::new(),
            vacancies: Vec::new(),
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
                    family: b.id.value.clone(),
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
        crystal.pinned = crystal.validate_pins(&spec.pinned, &ck)?;
        crystal.weights = crystal.validate_weights(&spec.weights, &ck)?;
        crystal.means = crystal.validate_means(&spec.occupancy, &spec.composition, &ck)?;
        crystal.validate_vacancies(&spec, &ck)?;
        if crystal.is_diluted() && crystal.is_weighted() {
            let at = spec
                .vacancies
                .first()
                .map(|v| crate::spec::position_of(&v.site))
                .unwrap_or_default();
            return ck.err(
                at,
                "`vacancies` cannot yet be combined with `weights`, `occupancy` or `composition`: \
                 count the diluted crystal or the weighted one",
            );
        }
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
}
