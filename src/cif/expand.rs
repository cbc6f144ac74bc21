//! The asymmetric unit and its expansion into the full cell.
//!
//! Each atom site of `_atom_site_*` (label, element, fractional coordinates, occupancy) is
//! moved by every symmetry operator; images closer than [`MERGE_DISTANCE`] to one already
//! found are the same atom (a special position) and are merged. The number of images
//! kept is the site's multiplicity, checked against `_atom_site_symmetry_multiplicity`
//! when the file gives it. Images of one site between [`MERGE_DISTANCE`] and
//! [`SPLIT_DISTANCE`] apart are refused: no two atoms sit that close, so the site is a
//! split (disordered) model or its coordinates do not fit the operators.

use super::data::{Block, Measured, Value};
use super::symmetry::{Cell, Operator, norm, reduce};

/// Images of one site closer than this (Å) are one atom on a special position.
pub const MERGE_DISTANCE: f64 = 0.05;
/// Images of one site closer than this (Å), and not merged, are refused.
pub const SPLIT_DISTANCE: f64 = 0.5;

/// One site of the asymmetric unit, as the file gives it.
#[derive(Clone, Debug)]
pub struct Site {
    /// `_atom_site_label`.
    pub label: String,
    /// The chemical element (`D` and `T` kept apart from `H`).
    pub element: String,
    /// Fractional coordinates.
    pub at: [f64; 3],
    /// `_atom_site_occupancy` (1 when not given).
    pub occupancy: Measured,
    /// The Wyckoff letter, when given.
    pub wyckoff: Option<String>,
    /// The multiplicity the file states, when given.
    pub multiplicity: Option<usize>,
    /// Where its label stands.
    pub label_value: Value,
}

/// One atom of the full cell.
#[derive(Clone, Debug)]
pub struct Atom {
    /// Index of its site in the asymmetric unit.
    pub site: usize,
    /// 1-based number among the images of its site.
    pub image: usize,
    /// Fractional coordinates in [0, 1).
    pub at: [f64; 3],
    /// 1-based number of the first operator that gave it.
    pub operator: usize,
}

/// The full cell.
#[derive(Clone, Debug)]
pub struct Expansion {
    /// The asymmetric unit.
    pub sites: Vec<Site>,
    /// The atoms of the cell, site by site.
    pub atoms: Vec<Atom>,
}

impl Expansion {
    /// The multiplicity of a site (its number of atoms in the cell).
    pub fn multiplicity(&self, site: usize) -> usize {
        self.atoms.iter().filter(|a| a.site == site).count()
    }

    /// An atom's name: the site label, with the image number when the site has several.
    pub fn name(&self, atom: usize) -> String {
        let a = &self.atoms[atom];
        let label = &self.sites[a.site].label;
        if self.multiplicity(a.site) == 1 {
            label.clone()
        } else {
            format!("{label}_{}", a.image)
        }
    }
}

/// The shortest distance (Å) between two fractional positions in a periodic cell, and
/// the lattice shift of the second that realises it.
pub fn periodic_distance(cell: &Cell, p: [f64; 3], q: [f64; 3]) -> (f64, [i64; 3]) {
    let d = [0, 1, 2].map(|i| q[i] - p[i]);
    let base = d.map(|x| x.round());
    let mut best = (f64::INFINITY, [0i64; 3]);
    for i in -1..=1 {
        for j in -1..=1 {
            for k in -1..=1 {
                let s = [base[0] + i as f64, base[1] + j as f64, base[2] + k as f64];
                let f = [d[0] - s[0], d[1] - s[1], d[2] - s[2]];
                let r = norm(cell.cartesian(f));
                if r < best.0 {
                    best = (r, s.map(|x| -(x as i64)));
                }
            }
        }
    }
    best
}

/// The element of an atom type or label: `O2-` → O, `Ow1` → O, `Cl1` → Cl, `D` → D.
pub fn element_of(text: &str) -> Option<String> {
    let letters: Vec<char> = text
        .chars()
        .skip_while(|c| !c.is_ascii_alphabetic())
        .take_while(|c| c.is_ascii_alphabetic())
        .collect();
    let first = letters.first()?.to_ascii_uppercase();
    if let Some(second) = letters.get(1) {
        let two = format!("{first}{}", second.to_ascii_lowercase());
        if ELEMENTS.contains(&two.as_str()) {
            return Some(two);
        }
    }
    let one = first.to_string();
    ELEMENTS.contains(&one.as_str()).then_some(one)
}

const ELEMENTS: [&str; 120] = [
    "H", "D", "T", "He", "Li", "Be", "B", "C", "N", "O", "F", "Ne", "Na", "Mg", "Al", "Si", "P",
    "S", "Cl", "Ar", "K", "Ca", "Sc", "Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn", "Ga",
    "Ge", "As", "Se", "Br", "Kr", "Rb", "Sr", "Y", "Zr", "Nb", "Mo", "Tc", "Ru", "Rh", "Pd", "Ag",
    "Cd", "In", "Sn", "Sb", "Te", "I", "Xe", "Cs", "Ba", "La", "Ce", "Pr", "Nd", "Pm", "Sm", "Eu",
    "Gd", "Tb", "Dy", "Ho", "Er", "Tm", "Yb", "Lu", "Hf", "Ta", "W", "Re", "Os", "Ir", "Pt", "Au",
    "Hg", "Tl", "Pb", "Bi", "Po", "At", "Rn", "Fr", "Ra", "Ac", "Th", "Pa", "U", "Np", "Pu", "Am",
    "Cm", "Bk", "Cf", "Es", "Fm", "Md", "No", "Lr", "Rf", "Db", "Sg", "Bh", "Hs", "Mt", "Ds", "Rg",
    "Cn", "Nh", "Fl", "Mc", "Lv", "Ts", "Og",
];

/// What went wrong, and at which value.
pub type Problem = (String, Option<Value>);

/// Read the asymmetric unit of a block.
pub fn read_sites(block: &Block) -> Result<Vec<Site>, Problem> {
    let column = |tags: &[&str]| block.column(tags);
    let Some(xs) = column(&["_atom_site_fract_x"]) else {
        let cart = block.find(&["_atom_site_cartn_x"]).is_some();
        return Err((
            if cart {
                "the atom sites are given only in Cartesian coordinates (_atom_site_Cartn_x); \
                 fractional coordinates (_atom_site_fract_x, _y, _z) are needed"
                    .into()
            } else {
                format!(
                    "block '{}' has no atom sites: expected a loop with _atom_site_label and \
                     _atom_site_fract_x, _y, _z",
                    block.name
                )
            },
            None,
        ));
    };
    let need = |tag: &str| {
        column(&[tag]).ok_or_else(|| {
            (
                format!("the atom sites have _atom_site_fract_x but no {tag}"),
                Some(xs[0].clone()),
            )
        })
    };
    let ys = need("_atom_site_fract_y")?;
    let zs = need("_atom_site_fract_z")?;
    let labels = need("_atom_site_label")?;
    let types = column(&["_atom_site_type_symbol"]);
    let occupancies = column(&["_atom_site_occupancy"]);
    let wyckoff = column(&["_atom_site_wyckoff_symbol"]);
    let multiplicity = column(&["_atom_site_symmetry_multiplicity"]);
    let n = labels.len();
    for c in [&xs, &ys, &zs] {
        if c.len() != n {
            return Err((
                "the atom-site coordinates and labels are not in one loop (their numbers \
                 differ)"
                    .into(),
                Some(c[0].clone()),
            ));
        }
    }
    let mut sites: Vec<Site> = Vec::with_capacity(n);
    for r in 0..n {
        let label_value = labels[r].clone();
        let label = label_value.text.trim().to_string();
        if label_value.is_missing() || label.is_empty() {
            return Err(("an atom site has no label".into(), Some(label_value)));
        }
        if let Some(s) = sites.iter().find(|s| s.label == label) {
            return Err((
                format!(
                    "two atom sites are labelled {label} (the first at line {}); labels must differ",
                    s.label_value.position.line
                ),
                Some(label_value),
            ));
        }
        let mut at = [0.0; 3];
        for (k, c) in [&xs, &ys, &zs].iter().enumerate() {
            let v = c[r];
            at[k] = match v.number() {
                Some(Ok(m)) if m.value.abs() <= 1000.0 => m.value,
                Some(Ok(m)) => {
                    return Err((
                        format!(
                            "the fractional coordinate {} of {label} is outside −1000…1000",
                            m.value
                        ),
                        Some(v.clone()),
                    ));
                }
                Some(Err(e)) => {
                    return Err((format!("the coordinate of {label}: {e}"), Some(v.clone())));
                }
                None => {
                    return Err((
                        format!(
                            "{label} has no value for a fractional coordinate ('{}')",
                            v.text
                        ),
                        Some(v.clone()),
                    ));
                }
            };
        }
        let type_value = types.as_ref().map(|t| t[r]).filter(|v| !v.is_missing());
        let element = type_value
            .and_then(|v| element_of(&v.text))
            .or_else(|| element_of(&label));
        let Some(element) = element else {
            return Err((
                format!(
                    "cannot tell the element of {label} from its type symbol or label; give \
                     _atom_site_type_symbol (such as O or D)"
                ),
                Some(type_value.cloned().unwrap_or(label_value)),
            ));
        };
        let occupancy = match occupancies.as_ref().map(|o| o[r]) {
            None => Measured {
                value: 1.0,
                su: None,
            },
            Some(v) if v.kind == super::data::Kind::Inapplicable => Measured {
                value: 1.0,
                su: None,
            },
            Some(v) => match v.number() {
                Some(Ok(m)) if m.value > 0.0 && m.value <= 1.0 + 1e-6 => m,
                Some(Ok(m)) => {
                    return Err((
                        format!(
                            "the occupancy {} of {label} is not between 0 (excluded) and 1",
                            m.value
                        ),
                        Some(v.clone()),
                    ));
                }
                Some(Err(e)) => {
                    return Err((format!("the occupancy of {label}: {e}"), Some(v.clone())));
                }
                None => {
                    return Err((
                        format!("the occupancy of {label} is unknown ('?'); give a number"),
                        Some(v.clone()),
                    ));
                }
            },
        };
        let multiplicity_given = match multiplicity.as_ref().map(|m| m[r]) {
            Some(v) if !v.is_missing() => match v.number() {
                Some(Ok(m)) if m.value >= 1.0 && m.value.fract() == 0.0 => Some(m.value as usize),
                _ => {
                    return Err((
                        format!("the multiplicity of {label} is not a whole number"),
                        Some(v.clone()),
                    ));
                }
            },
            _ => None,
        };
        sites.push(Site {
            label,
            element,
            at,
            occupancy,
            wyckoff: wyckoff
                .as_ref()
                .map(|w| w[r])
                .filter(|v| !v.is_missing())
                .map(|v| v.text.clone()),
            multiplicity: multiplicity_given,
            label_value,
        });
    }
    Ok(sites)
}

/// Expand the asymmetric unit with the operators.
pub fn expand(cell: &Cell, ops: &[Operator], sites: Vec<Site>) -> Result<Expansion, Problem> {
    if ops.is_empty() {
        return Err((
            "no symmetry operators: at least x, y, z is needed".into(),
            None,
        ));
    }
    let mut atoms: Vec<Atom> = Vec::new();
    for (s, site) in sites.iter().enumerate() {
        let mut mine: Vec<Atom> = Vec::new();
        for (o, op) in ops.iter().enumerate() {
            let p = op.apply(site.at).map(reduce);
            let mut merged = false;
            for a in &mine {
                let (d, _) = periodic_distance(cell, a.at, p);
                if d < MERGE_DISTANCE {
                    merged = true;
                    break;
                }
                if d < SPLIT_DISTANCE {
                    return Err((
                        format!(
                            "two images of {} lie {:.3} Å apart (operators {} and {}): closer \
                             than two atoms can be, yet not at one position (within {} Å); a \
                             split-site model, or coordinates that do not fit the symmetry, is \
                             not interpreted",
                            site.label,
                            d,
                            a.operator,
                            o + 1,
                            MERGE_DISTANCE
                        ),
                        Some(site.label_value.clone()),
                    ));
                }
            }
            if !merged {
                mine.push(Atom {
                    site: s,
                    image: mine.len() + 1,
                    at: p,
                    operator: o + 1,
                });
            }
        }
        if !ops.len().is_multiple_of(mine.len()) {
            return Err((
                format!(
                    "{} has {} images, which does not divide the {} operators: its \
                     coordinates do not fit the symmetry",
                    site.label,
                    mine.len(),
                    ops.len()
                ),
                Some(site.label_value.clone()),
            ));
        }
        if let Some(m) = site.multiplicity
            && m != mine.len()
        {
            return Err((
                format!(
                    "{} expands to {} atoms in the cell, but the file gives its multiplicity \
                     as {m}: the operators or the setting do not match the coordinates",
                    site.label,
                    mine.len()
                ),
                Some(site.label_value.clone()),
            ));
        }
        atoms.extend(mine);
    }
    Ok(Expansion { sites, atoms })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cif::symmetry::parse_operator;

    #[test]
    fn elements_from_types_and_labels() {
        for (t, e) in [
            ("O2-", "O"),
            ("Ow1", "O"),
            ("OW12", "O"),
            ("Cl1", "Cl"),
            ("D", "D"),
            ("H1+", "H"),
            ("Hw3", "H"),
            ("Si4+", "Si"),
            ("C", "C"),
        ] {
            assert_eq!(element_of(t).as_deref(), Some(e), "{t}");
        }
        assert_eq!(element_of("123"), None);
        assert_eq!(element_of("Qz"), None);
    }

    #[test]
    fn special_positions_merge() {
        let cell = Cell::new([4.0, 4.0, 4.0], [90.0, 90.0, 90.0]).unwrap();
        let ops: Vec<Operator> = ["x,y,z", "-x,-y,z", "-x,y,-z", "x,-y,-z"]
            .iter()
            .map(|s| parse_operator(s).unwrap())
            .collect();
        let site = |label: &str, at: [f64; 3]| Site {
            label: label.into(),
            element: "O".into(),
            at,
            occupancy: Measured {
                value: 1.0,
                su: None,
            },
            wyckoff: None,
            multiplicity: None,
            label_value: Value {
                text: label.into(),
                kind: super::super::data::Kind::Plain,
                position: Default::default(),
            },
        };
        let e = expand(
            &cell,
            &ops,
            vec![
                site("A", [0.0, 0.0, 0.0]),
                site("B", [0.1, 0.2, 0.3]),
                site("C", [0.5, 0.0, 0.25]),
            ],
        )
        .unwrap();
        assert_eq!(
            [e.multiplicity(0), e.multiplicity(1), e.multiplicity(2)],
            [1, 4, 2]
        );
        assert_eq!(e.name(0), "A");
        assert_eq!(e.name(2), "B_2");
        // Images 0.16 Å apart are refused.
        let m = expand(&cell, &ops, vec![site("S", [0.02, 0.0, 0.3])]).unwrap_err();
        assert!(m.0.contains("0.160 Å apart"), "{}", m.0);
        let mut wrong = site("W", [0.1, 0.2, 0.3]);
        wrong.multiplicity = Some(2);
        assert!(
            expand(&cell, &ops, vec![wrong])
                .unwrap_err()
                .0
                .contains("multiplicity as 2")
        );
    }
}
