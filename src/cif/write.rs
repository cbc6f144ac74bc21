//! Writing the lattice file of an imported structure: YAML in the format of README "The
//! lattice file", with comments that say where each part came from (file, block, cell,
//! operators, the expansion of every site, which proton sites made which bond), for the
//! user to read and edit. Disorder that would need weighted counting (not supported yet)
//! is written as comments after a note.

use std::fmt::Write;

use super::Imported;
use super::SymmetrySource;
use super::disorder::{Network, Pending};
use super::expand::Expansion;
use super::symmetry::Cell;

/// Where the structure came from, for the comments.
#[derive(Clone, Debug)]
pub struct Source {
    /// The structure file as named.
    pub file: String,
    /// The data block.
    pub block: String,
    /// The line of `data_BLOCK`.
    pub block_line: u64,
    /// FNV-1a hash of the structure file's text.
    pub content_hash: String,
    /// The cell lengths as written.
    pub lengths: String,
    /// The cell angles as written.
    pub angles: String,
    /// Angles the file left out (90° taken).
    pub defaulted_angles: Vec<String>,
    /// Where the operators came from.
    pub symmetry: SymmetrySource,
    /// The space group's name, when known.
    pub group_name: Option<String>,
    /// Number of operators.
    pub operators: usize,
    /// `_chemical_name_*`, when given.
    pub chemical_name: Option<String>,
    /// `_chemical_formula_sum`, when given.
    pub formula: Option<String>,
}

/// A number in the shortest form that reads back to within 1e-10.
fn num(x: f64) -> String {
    let x = if x.abs() < 1e-12 { 0.0 } else { x };
    let s = format!("{x:.10}");
    let s = s.trim_end_matches('0');
    let s = s
        .strip_suffix('.')
        .map_or(s.to_string(), |t| format!("{t}.0"));
    if s == "-0.0" { "0.0".into() } else { s }
}

/// An id as YAML: plain when it is a simple word, double-quoted otherwise.
fn id(s: &str) -> String {
    let plain = s
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '.' | '-'))
        && s.chars().next().is_some_and(|c| c.is_ascii_alphabetic());
    if plain {
        s.to_string()
    } else {
        format!("\"{}\"", s.replace('\\', "\\\\").replace('"', "\\\""))
    }
}

/// The formula of an acceptor with n protons: H2O, NH4, HF.
fn formula(acceptor: &str, n: u32, isotope: &str) -> String {
    let h = match n {
        0 => String::new(),
        1 => isotope.to_string(),
        _ => format!("{isotope}{n}"),
    };
    if acceptor == "N" {
        format!("{acceptor}{h}")
    } else {
        format!("{h}{acceptor}")
    }
}

/// Build the lattice file.
pub fn lattice_file(src: &Source, cell: &Cell, e: &Expansion, net: &Network) -> Imported {
    let mut summary = Vec::new();
    let mut pending_lines = Vec::new();
    let mut o = String::new();
    let element = |a: usize| e.sites[e.atoms[a].site].element.clone();

    // Site ids: the atom names, made unique.
    let mut lattice_atoms: Vec<usize> = net.acceptors.clone();
    for p in &net.pending {
        if let Pending::Composition { atoms, .. } = p {
            for &a in atoms {
                if !lattice_atoms.contains(&a) {
                    lattice_atoms.push(a);
                }
            }
        }
    }
    lattice_atoms.sort();
    let mut ids: Vec<(usize, String)> = Vec::new();
    for &a in &lattice_atoms {
        let mut name = e.name(a);
        while ids.iter().any(|(_, n)| *n == name) {
            name.push('_');
        }
        ids.push((a, name));
    }
    let id_of = |a: usize| {
        ids.iter()
            .find(|(x, _)| *x == a)
            .map_or_else(|| e.name(a), |(_, n)| n.clone())
    };

    // Header: where everything came from.
    let _ = writeln!(
        o,
        "# Lattice file written by `groundcount import` from a structure file (CIF). Read it,\n\
         # check it against the structure and edit it as needed; the comments say where each\n\
         # part came from."
    );
    let _ = writeln!(o, "#");
    let _ = writeln!(
        o,
        "# source: {}, data block '{}' (line {}); FNV-1a hash of the file {}",
        src.file, src.block, src.block_line, src.content_hash
    );
    if let Some(f) = &src.formula {
        let _ = writeln!(o, "# formula in the file: {f}");
    }
    let _ = writeln!(
        o,
        "# cell: {}; {} (from _cell_length_* and _cell_angle_*)",
        src.lengths, src.angles
    );
    if !src.defaulted_angles.is_empty() {
        let _ = writeln!(
            o,
            "#   the file gives no {}: 90° taken (the CIF dictionary's default)",
            src.defaulted_angles.join(", ")
        );
    }
    let _ = writeln!(
        o,
        "#   Cartesian axes: a along x, b in the xy plane, c completing a right-handed set (Å)"
    );
    let group = src
        .group_name
        .as_ref()
        .map_or(String::new(), |g| format!(" of {g}"));
    match &src.symmetry {
        SymmetrySource::Listed { tag } => {
            let _ = writeln!(
                o,
                "# symmetry: {} operators{group}, as listed in the file under {tag}",
                src.operators
            );
        }
        SymmetrySource::Tables { from, note } => {
            let _ = writeln!(
                o,
                "# symmetry: {} operators{group}, from {from} in the space-group tables of the\n\
                 #   moyo crate{}",
                src.operators,
                note.as_ref().map_or(String::new(), |n| format!(" ({n})"))
            );
        }
    }
    summary.push(format!(
        "{} symmetry operator{}{group} ({})",
        src.operators,
        if src.operators == 1 { "" } else { "s" },
        match &src.symmetry {
            SymmetrySource::Listed { tag } => format!("listed under {tag}"),
            SymmetrySource::Tables { from, .. } => format!("from {from}"),
        }
    ));
    let _ = writeln!(
        o,
        "# asymmetric unit → atoms in the cell (images within {} Å merged: special positions):",
        super::expand::MERGE_DISTANCE
    );
    for (s, site) in e.sites.iter().enumerate() {
        let m = e.multiplicity(s);
        let wyckoff = site
            .wyckoff
            .as_ref()
            .map_or(String::new(), |w| format!(" Wyckoff {w},"));
        let _ = writeln!(
            o,
            "#   {:<6} {:<2} at ({}, {}, {}), occupancy {}:{wyckoff} {} atom{} ({} operators, \
             {} images merged)",
            site.label,
            site.element,
            num(site.at[0]),
            num(site.at[1]),
            num(site.at[2]),
            site.occupancy.value,
            m,
            if m == 1 { "" } else { "s" },
            src.operators,
            src.operators - m
        );
    }
    let sites_line: Vec<String> = e
        .sites
        .iter()
        .enumerate()
        .map(|(s, site)| format!("{} × {}", site.label, e.multiplicity(s)))
        .collect();
    summary.push(format!(
        "{} atoms in the cell from {} sites ({})",
        e.atoms.len(),
        e.sites.len(),
        sites_line.join(", ")
    ));

    // The network.
    if !net.bonds.is_empty() {
        let mut h_labels: Vec<String> = net
            .bonds
            .iter()
            .flat_map(|b| [b.h_from, b.h_to])
            .map(|h| e.sites[e.atoms[h].site].label.clone())
            .collect();
        h_labels.sort();
        h_labels.dedup();
        let _ = writeln!(
            o,
            "# hydrogen bonds: {} per cell, each defined by the two partially occupied proton\n\
             #   sites between its acceptors (from {}; listed beside each bond), one arrow each",
            net.bonds.len(),
            h_labels.join(", ")
        );
        summary.push(format!(
            "{} hydrogen bonds per cell between {} acceptors, from the proton sites {}",
            net.bonds.len(),
            net.acceptors.len(),
            h_labels.join(", ")
        ));
    }
    let mut classes: Vec<(String, u32, u32, String, Vec<usize>)> = Vec::new();
    for p in &net.protons {
        let el = element(p.atom);
        match classes
            .iter_mut()
            .find(|c| c.0 == el && c.1 == p.total && c.2 == p.ordered && c.3 == p.isotope)
        {
            Some(c) => c.4.push(p.atom),
            None => classes.push((el, p.total, p.ordered, p.isotope.clone(), vec![p.atom])),
        }
    }
    for (el, total, ordered, iso, atoms) in &classes {
        let p = net.protons.iter().find(|p| p.atom == atoms[0]).unwrap();
        let sites: Vec<String> = p
            .sites
            .iter()
            .map(|&h| {
                format!(
                    "{} {}",
                    e.sites[e.atoms[h].site].label, e.sites[e.atoms[h].site].occupancy.value
                )
            })
            .collect();
        let line = format!(
            "{} {el} atom{} take{} {total} proton{} each ({} of them ordered; e.g. {}: {}) → \
             {}, rule inward allowed [{}]",
            atoms.len(),
            if atoms.len() == 1 { "" } else { "s" },
            if atoms.len() == 1 { "s" } else { "" },
            if *total == 1 { "" } else { "s" },
            ordered,
            e.name(atoms[0]),
            sites.join(" + "),
            formula(el, *total, iso),
            total - ordered
        );
        let _ = writeln!(o, "# protons: {line}");
        summary.push(format!("protons: {line}"));
    }
    if !net.inert.is_empty() {
        let list: Vec<String> = net
            .inert
            .iter()
            .map(|(s, why)| format!("{} ({why})", e.sites[*s].label))
            .collect();
        let _ = writeln!(o, "# not in the count: {}", list.join(", "));
        summary.push(format!("not in the count: {}", list.join(", ")));
    }

    // Name and description.
    let name = match &src.chemical_name {
        Some(n) => format!("{n}, block {}", src.block),
        None => src.block.clone(),
    };
    let waters: Vec<String> = classes
        .iter()
        .map(|c| format!("{} {}", c.4.len(), formula(&c.0, c.1, &c.3)))
        .collect();
    let about = format!(
        "Imported from {}, data block '{}'{}: {} per cell{}.",
        src.file,
        src.block,
        group,
        if waters.is_empty() {
            "no hydrogen-bond network".to_string()
        } else {
            waters.join(" and ")
        },
        if net.bonds.is_empty() {
            String::new()
        } else {
            format!(
                ", {} hydrogen bonds with their protons disordered between two sites",
                net.bonds.len()
            )
        }
    );
    let _ = writeln!(o, "name: {}", yaml_string(&name));
    let _ = writeln!(o, "about: {}", yaml_string(&about));
    let _ = writeln!(o, "dimensions: 3");
    let _ = writeln!(o, "cell:");
    let _ = writeln!(o, "  vectors:");
    for (v, n) in cell.vectors.iter().zip(["a", "b", "c"]) {
        let _ = writeln!(
            o,
            "    - [{}, {}, {}]   # {n}",
            num(v[0]),
            num(v[1]),
            num(v[2])
        );
    }
    let _ = writeln!(o, "sites:");
    for &a in &lattice_atoms {
        let at = e.atoms[a].at;
        let _ = writeln!(
            o,
            "  - {{id: {}, species: {}, at: [{}, {}, {}]}}   # {} by operator {}",
            id(&id_of(a)),
            id(&element(a)),
            num(at[0]),
            num(at[1]),
            num(at[2]),
            e.sites[e.atoms[a].site].label,
            e.atoms[a].operator
        );
    }
    let _ = writeln!(o, "bonds:");
    if net.bonds.is_empty() {
        let _ = writeln!(o, "  []");
    }
    for (k, b) in net.bonds.iter().enumerate() {
        let occ = |h: usize| e.sites[e.atoms[h].site].occupancy.value;
        let _ = writeln!(
            o,
            "  - {{id: hb{}, from: {}, to: {}, shift: [{}, {}, {}]}}   # {} ({}) near {}, {} ({}) \
             near {}; {:.3} Å",
            k + 1,
            id(&id_of(b.from)),
            id(&id_of(b.to)),
            b.shift[0],
            b.shift[1],
            b.shift[2],
            e.name(b.h_from),
            occ(b.h_from),
            id_of(b.from),
            e.name(b.h_to),
            occ(b.h_to),
            id_of(b.to),
            b.length
        );
    }
    let _ = writeln!(o, "variables:");
    if net.bonds.is_empty() {
        let _ = writeln!(o, "  []");
    } else {
        let _ = writeln!(
            o,
            "  - {{on: bonds, kind: arrow}}   # state 1: the proton sits near `to`"
        );
    }
    // Rules: one per number of protons wanted from the disordered bonds.
    let _ = writeln!(o, "rules:");
    let mut groups: Vec<(u32, Vec<usize>)> = Vec::new();
    for p in &net.protons {
        let need = p.total - p.ordered.min(p.total);
        match groups.iter_mut().find(|g| g.0 == need) {
            Some(g) => g.1.push(p.atom),
            None => groups.push((need, vec![p.atom])),
        }
    }
    if groups.is_empty() {
        let _ = writeln!(o, "  []");
    }
    for (need, atoms) in &groups {
        let everything = groups.len() == 1 && atoms.len() == lattice_atoms.len();
        let only = if everything {
            String::new()
        } else {
            let list: Vec<String> = atoms.iter().map(|&a| id(&id_of(a))).collect();
            format!(", only: [{}]", list.join(", "))
        };
        let _ = writeln!(
            o,
            "  - {{kind: inward, at: sites{only}, allowed: [{need}]}}   # protons near each acceptor \
             from its disordered bonds"
        );
    }
    // The formula unit.
    let fu = if classes.len() == 1 {
        let c = &classes[0];
        let all_of_element =
            lattice_atoms.iter().filter(|&&a| element(a) == c.0).count() == c.4.len();
        if all_of_element {
            format!(
                "{{name: {}, per: sites, species: {}}}",
                formula(&c.0, c.1, &c.3),
                id(&c.0)
            )
        } else {
            format!(
                "{{name: {}, per: cell, count: {}}}",
                formula(&c.0, c.1, &c.3),
                c.4.len()
            )
        }
    } else if classes.is_empty() {
        "{name: cell, per: cell, count: 1}".to_string()
    } else {
        let name: String = classes
            .iter()
            .map(|c| format!("({}){}", formula(&c.0, c.1, &c.3), c.4.len()))
            .collect();
        format!("{{name: {}, per: cell, count: 1}}", yaml_string(&name))
    };
    let _ = writeln!(o, "formula_unit: {fu}");

    // What needs weighted counting.
    if !net.pending.is_empty() {
        let _ = writeln!(
            o,
            "\n# ---- Not supported yet: weighted counting ----\n\
             # The structure refines disorder that is not \"every arrangement equally likely\":\n\
             # target occupancies (proton sites not at one half) or a fixed composition (species\n\
             # sharing a position). Counting them is not supported yet, and the lattice format\n\
             # has no keys for them; the entries below record what was read, in a proposed form\n\
             # (`occupancy:`, `composition:`), as comments only. As written above, the file\n\
             # counts every proton arrangement as equally likely, which is NOT the refined\n\
             # structure. A counting command given this CIF directly refuses it."
        );
        let occupancies: Vec<&Pending> = net
            .pending
            .iter()
            .filter(|p| matches!(p, Pending::Occupancy { .. }))
            .collect();
        if !occupancies.is_empty() {
            let _ = writeln!(o, "# occupancy:");
            for p in occupancies {
                if let Pending::Occupancy { bond, mean, su } = p {
                    let b = &net.bonds[*bond];
                    let su_text = su.map_or(String::new(), |s| format!(" ± {s}"));
                    let _ = writeln!(
                        o,
                        "#   - {{bond: hb{}, state: 1, mean: {}}}   # {} near {}: occupancy {}{su_text}",
                        bond + 1,
                        num(*mean),
                        e.name(b.h_to),
                        id_of(b.to),
                        num(*mean)
                    );
                }
            }
            // Site labels in the file's order, occupancies in increasing order.
            let mut sites: Vec<usize> = Vec::new();
            let mut values: Vec<f64> = Vec::new();
            let mut n = 0;
            for p in &net.pending {
                if let Pending::Occupancy { bond, mean, .. } = p {
                    n += 1;
                    let b = &net.bonds[*bond];
                    sites.extend([b.h_from, b.h_to].map(|a| e.atoms[a].site));
                    values.extend([1.0 - mean, *mean]);
                }
            }
            sites.sort_unstable();
            sites.dedup();
            values.sort_by(f64::total_cmp);
            let mut means: Vec<String> = values.iter().map(|&m| num(m)).collect();
            means.dedup();
            let labels: Vec<&str> = sites.iter().map(|&k| e.sites[k].label.as_str()).collect();
            pending_lines.push(format!(
                "the proton sites {} are refined at occupancies {} instead of one half \
                 ({n} hydrogen bond{}): target occupancies, which are not supported yet",
                labels.join(", "),
                means.join(", "),
                if n == 1 { "" } else { "s" }
            ));
        }
        for p in &net.pending {
            if let Pending::Composition {
                atoms,
                species,
                labels,
            } = p
            {
                let states: Vec<String> = species
                    .iter()
                    .enumerate()
                    .map(|(k, (s, x))| format!("state {k}: {s} {}", num(*x)))
                    .collect();
                let list: Vec<String> = atoms.iter().map(|&a| id(&id_of(a))).collect();
                let _ = writeln!(
                    o,
                    "# shared position {} ({}), {} per cell: a site variable with {} states at a\n\
                     #   fixed composition:",
                    labels.join("/"),
                    states.join(", "),
                    atoms.len(),
                    species.len()
                );
                let _ = writeln!(o, "# composition:");
                for (k, (s, x)) in species.iter().enumerate().skip(1) {
                    let _ = writeln!(
                        o,
                        "#   - {{sites: [{}], state: {k}, fraction: {}}}   # {s}",
                        list.join(", "),
                        num(*x)
                    );
                }
                let what = if labels.len() == 1 {
                    format!("the site {} is partly occupied", labels[0])
                } else {
                    format!("the sites {} share a position", labels.join(", "))
                };
                pending_lines.push(format!(
                    "{what} ({}): a fixed composition, which is not supported yet",
                    states.join(", ")
                ));
            }
        }
    }
    // The first site, in the file's order, that the pending entries name.
    let pending_position = net
        .pending
        .iter()
        .flat_map(|p| match p {
            Pending::Occupancy { bond, .. } => {
                let b = &net.bonds[*bond];
                vec![e.atoms[b.h_from].site, e.atoms[b.h_to].site]
            }
            Pending::Composition { atoms, .. } => atoms.iter().map(|&a| e.atoms[a].site).collect(),
        })
        .min()
        .map(|k| e.sites[k].label_value.position);
    Imported {
        yaml: o,
        block: src.block.clone(),
        summary,
        pending: pending_lines,
        pending_position,
    }
}

/// A string as a YAML double-quoted scalar.
fn yaml_string(s: &str) -> String {
    format!(
        "\"{}\"",
        s.replace('\\', "\\\\")
            .replace('"', "\\\"")
            .replace('\n', " ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_ids_and_formulas() {
        assert_eq!(num(0.25), "0.25");
        assert_eq!(num(1.0 / 3.0), "0.3333333333");
        assert_eq!(num(-1e-15), "0.0");
        assert_eq!(num(7.0), "7.0");
        assert_eq!(id("O1_2"), "O1_2");
        assert_eq!(id("O(1)"), "\"O(1)\"");
        assert_eq!(id("1A"), "\"1A\"");
        assert_eq!(formula("O", 2, "D"), "D2O");
        assert_eq!(formula("N", 4, "H"), "NH4");
        assert_eq!(formula("F", 1, "H"), "HF");
    }
}
