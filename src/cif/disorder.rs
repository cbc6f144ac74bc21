//! Recognising the disorder of an expanded cell: the hydrogen-bond network and its
//! proton sites, target occupancies, and species that share a position.
//!
//! **Hydrogen bonds are defined by the proton sites, not by distances between
//! acceptors.** (In ice VII every oxygen has eight oxygens at the same distance and is
//! bonded to four of them.) A hydrogen (H, D or T) belongs to the one atom within
//! [`COVALENT`] Å of it. A partially occupied hydrogen on an acceptor A (N, O, F, S, Cl,
//! Br, I) must point at a second acceptor B — H···B at most [`HBOND_MAX`] Å, the angle
//! A–H···B at least [`MIN_ANGLE`]° — that holds a partially occupied hydrogen of its own
//! pointing back at A. The two sites are the two ends of one hydrogen bond: one arrow
//! variable, state 1 when the proton sits near the bond's `to` end. Their occupancies
//! must add up to one proton.
//!
//! **Each acceptor takes the protons its own sites give it**: the occupancies of the
//! hydrogens bonded to it add up to a whole number n (4 × 1/2 = 2 for a water in ice),
//! so that its formula is H_nA (H2O); fully occupied (ordered) hydrogens on it count
//! toward n and leave n − (ordered) for the rule on its disordered bonds (`inward`).
//!
//! **Occupancies other than one half** become target occupancies of the bond's state 1,
//! and **species sharing a position** (or a heavy atom with partial occupancy, sharing
//! its position with a vacancy) become variables at a fixed composition. Both need
//! weighted counting (target occupancies, compositions), which is not supported yet;
//! they are recorded as [`Pending`] entries, so that the structure is refused where it
//! would be counted and `import` writes them as comments.
//!
//! Everything else that cannot be interpreted is refused with the labels involved:
//! a hydrogen bonded to no atom or to two, a partially occupied hydrogen with no
//! partner site (or several), a pair whose occupancies do not add up to one proton, an
//! acceptor whose protons do not add up to a whole number, sites closer than any two
//! atoms can be, and partially occupied hydrogens on atoms that accept no hydrogen bond
//! (the orientational disorder of a guest molecule).

use super::expand::{Expansion, MERGE_DISTANCE, SPLIT_DISTANCE};
use super::symmetry::{Cell, dot, norm};

/// A hydrogen this close (Å) to an atom is bonded to it (O–H is 0.96–1.0 Å; common
/// practice).
pub const COVALENT: f64 = 1.25;
/// Longest H···acceptor distance (Å) of a hydrogen bond (common practice).
pub const HBOND_MAX: f64 = 2.5;
/// Smallest donor–H···acceptor angle (degrees) of a hydrogen bond (common practice).
pub const MIN_ANGLE: f64 = 120.0;
/// Elements that accept hydrogen bonds.
pub const ACCEPTORS: [&str; 7] = ["N", "O", "F", "S", "Cl", "Br", "I"];
/// An occupancy within this of 1/2 is one half.
const HALF: f64 = 1e-6;
/// The occupancies of the two ends of a bond may miss one proton by this much, plus twice
/// their combined standard uncertainty.
const SUM_TOLERANCE: f64 = 0.01;

fn is_hydrogen(element: &str) -> bool {
    matches!(element, "H" | "D" | "T")
}

/// One hydrogen bond: two acceptors and the two proton sites between them.
#[derive(Clone, Debug)]
pub struct Bond {
    /// The acceptor atom at the `from` end (in the home cell).
    pub from: usize,
    /// The acceptor atom at the `to` end.
    pub to: usize,
    /// The cell of the `to` end, relative to the home cell.
    pub shift: [i64; 3],
    /// The proton site near `from`.
    pub h_from: usize,
    /// The proton site near `to`.
    pub h_to: usize,
    /// Acceptor–acceptor distance (Å).
    pub length: f64,
}

/// Something the count would need that is not supported yet (weighted counting).
#[derive(Clone, Debug)]
pub enum Pending {
    /// A bond whose proton sites are not at one half: the refined mean of state 1.
    Occupancy {
        /// Index into [`Network::bonds`].
        bond: usize,
        /// The occupancy of the proton site near `to`.
        mean: f64,
        /// Its standard uncertainty, if given.
        su: Option<f64>,
    },
    /// Species (or a species and a vacancy) sharing one position.
    Composition {
        /// The atoms (one per position: the first site's atoms).
        atoms: Vec<usize>,
        /// The species in state order, with their occupancies; "vacancy" for an empty
        /// share.
        species: Vec<(String, f64)>,
        /// The site labels involved.
        labels: Vec<String>,
    },
}

/// What was recognised.
#[derive(Clone, Debug, Default)]
pub struct Network {
    /// The acceptor atoms of the hydrogen-bond network, in site order.
    pub acceptors: Vec<usize>,
    /// The disordered hydrogen bonds (one arrow each).
    pub bonds: Vec<Bond>,
    /// Per acceptor (same order as `acceptors`): protons n, ordered protons, and the
    /// labels of its hydrogen sites with their occupancies.
    pub protons: Vec<Protons>,
    /// Entries that need weighted counting.
    pub pending: Vec<Pending>,
    /// Sites (asymmetric unit indices) that take no part in the count, with why.
    pub inert: Vec<(usize, String)>,
}

/// The protons of one acceptor.
#[derive(Clone, Debug)]
pub struct Protons {
    /// The acceptor atom.
    pub atom: usize,
    /// Total protons (sum of its hydrogen sites' occupancies, a whole number).
    pub total: u32,
    /// Of which on fully occupied (ordered) sites.
    pub ordered: u32,
    /// Its hydrogen sites (atoms).
    pub sites: Vec<usize>,
    /// The hydrogen element its sites carry (H, D, or H for a mixture).
    pub isotope: String,
}

/// Why a structure cannot be interpreted, in words naming the sites.
pub type Refusal = String;

struct Near {
    atom: usize,
    /// Cartesian vector from the first atom to this one (Å).
    offset: [f64; 3],
    distance: f64,
}

/// Every atom (with its image) within `cutoff` Å of atom `i`, itself excluded.
fn neighbours(cell: &Cell, e: &Expansion, i: usize, cutoff: f64) -> Vec<Near> {
    let widths = cell.widths();
    let reach = widths.map(|w| (cutoff / w).ceil() as i64 + 1);
    let p = e.atoms[i].at;
    let mut out = Vec::new();
    for (j, b) in e.atoms.iter().enumerate() {
        let d = [0, 1, 2].map(|k| b.at[k] - p[k]);
        for x in -reach[0]..=reach[0] {
            for y in -reach[1]..=reach[1] {
                for z in -reach[2]..=reach[2] {
                    if j == i && x == 0 && y == 0 && z == 0 {
                        continue;
                    }
                    let f = [d[0] + x as f64, d[1] + y as f64, d[2] + z as f64];
                    let v = cell.cartesian(f);
                    let r = norm(v);
                    if r <= cutoff {
                        out.push(Near {
                            atom: j,
                            offset: v,
                            distance: r,
                        });
                    }
                }
            }
        }
    }
    out
}

fn angle(at: [f64; 3], to_a: [f64; 3], to_b: [f64; 3]) -> f64 {
    let u = [0, 1, 2].map(|k| to_a[k] - at[k]);
    let v = [0, 1, 2].map(|k| to_b[k] - at[k]);
    (dot(u, v) / (norm(u) * norm(v)))
        .clamp(-1.0, 1.0)
        .acos()
        .to_degrees()
}

fn add(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}

/// Recognise the disorder of an expanded cell.
pub fn recognise(cell: &Cell, e: &Expansion) -> Result<Network, Refusal> {
    let n = e.atoms.len();
    let element = |i: usize| e.sites[e.atoms[i].site].element.as_str();
    let occupancy = |i: usize| e.sites[e.atoms[i].site].occupancy;
    let label = |i: usize| e.sites[e.atoms[i].site].label.clone();
    let mut net = Network::default();

    // Atoms of different sites that sit too close.
    let mut shared: Vec<Vec<usize>> = Vec::new(); // groups of atoms at one position
    let mut in_group = vec![false; n];
    for i in 0..n {
        if in_group[i] {
            continue;
        }
        let mut group = vec![i];
        for near in neighbours(cell, e, i, SPLIT_DISTANCE) {
            let j = near.atom;
            if e.atoms[j].site == e.atoms[i].site {
                continue;
            }
            if near.distance >= MERGE_DISTANCE {
                return Err(format!(
                    "{} and {} lie {:.3} Å apart: closer than two atoms can be, yet not at one \
                     position (within {MERGE_DISTANCE} Å); alternative (split) positions are \
                     not interpreted",
                    e.name(i),
                    e.name(j),
                    near.distance
                ));
            }
            if !group.contains(&j) {
                group.push(j);
            }
        }
        if group.len() > 1 {
            for &j in &group {
                in_group[j] = true;
            }
            shared.push(group);
        }
    }
    let mut shared_sites: Vec<Vec<usize>> = Vec::new();
    for g in &shared {
        let mut sites: Vec<usize> = g.iter().map(|&a| e.atoms[a].site).collect();
        sites.sort();
        sites.dedup();
        if !shared_sites.contains(&sites) {
            shared_sites.push(sites);
        }
    }
    for sites in &shared_sites {
        let labels: Vec<String> = sites.iter().map(|&s| e.sites[s].label.clone()).collect();
        let elements: Vec<&str> = sites.iter().map(|&s| e.sites[s].element.as_str()).collect();
        if elements.iter().any(|x| is_hydrogen(x)) {
            return Err(format!(
                "the hydrogen sites {} share a position with other sites; isotope mixtures \
                 and hydrogens on shared positions are not interpreted",
                labels.join(", ")
            ));
        }
        let mut distinct = elements.clone();
        distinct.sort();
        distinct.dedup();
        if distinct.len() < elements.len() {
            return Err(format!(
                "the sites {} sit at one position and two of them have the same element; \
                 expected one site per species",
                labels.join(", ")
            ));
        }
        let total: f64 = sites.iter().map(|&s| e.sites[s].occupancy.value).sum();
        if total > 1.0 + SUM_TOLERANCE {
            return Err(format!(
                "the sites {} share a position, but their occupancies add up to {total:.4}, \
                 more than one atom",
                labels.join(", ")
            ));
        }
        let mut species: Vec<(String, f64)> = sites
            .iter()
            .map(|&s| (e.sites[s].element.clone(), e.sites[s].occupancy.value))
            .collect();
        if total < 1.0 - SUM_TOLERANCE {
            species.push(("vacancy".into(), 1.0 - total));
        }
        let atoms: Vec<usize> = (0..n).filter(|&a| e.atoms[a].site == sites[0]).collect();
        net.pending.push(Pending::Composition {
            atoms,
            species,
            labels,
        });
    }

    // Each hydrogen's atom.
    let mut donor: Vec<Option<(usize, [f64; 3])>> = vec![None; n]; // (atom, offset donor→H)
    for i in (0..n).filter(|&i| is_hydrogen(element(i))) {
        let bonded: Vec<Near> = neighbours(cell, e, i, COVALENT)
            .into_iter()
            .filter(|m| !is_hydrogen(element(m.atom)))
            .collect();
        match bonded.as_slice() {
            [] => {
                return Err(format!(
                    "the hydrogen {} has no atom within {COVALENT} Å; it is bonded to nothing",
                    e.name(i)
                ));
            }
            [one] => donor[i] = Some((one.atom, one.offset.map(|x| -x))),
            many => {
                let names: Vec<String> = many
                    .iter()
                    .map(|m| format!("{} ({:.3} Å)", e.name(m.atom), m.distance))
                    .collect();
                return Err(format!(
                    "the hydrogen {} is within {COVALENT} Å of several atoms ({}); a proton \
                     shared between two atoms (a symmetric hydrogen bond) is not a \
                     two-position disorder",
                    e.name(i),
                    names.join(", ")
                ));
            }
        }
    }
    let partial = |i: usize| occupancy(i).value < 1.0 - HALF;
    // Partially occupied hydrogens on atoms that accept no hydrogen bond.
    let guests: Vec<String> = (0..n)
        .filter(|&i| donor[i].is_some_and(|(d, _)| !ACCEPTORS.contains(&element(d))) && partial(i))
        .map(|i| {
            format!(
                "{} (on {})",
                label(i),
                label(donor[i].map(|(d, _)| d).unwrap_or(i))
            )
        })
        .collect();
    if !guests.is_empty() {
        let mut g = guests;
        g.sort();
        g.dedup();
        return Err(format!(
            "partially occupied hydrogens on atoms that accept no hydrogen bond: {}; the \
             orientational disorder of such a molecule is not interpreted",
            g.join(", ")
        ));
    }

    // The bonds, from each partially occupied hydrogen on an acceptor.
    let is_acceptor = |i: usize| ACCEPTORS.contains(&element(i));
    let mut pair_of: Vec<Option<usize>> = vec![None; n];
    for h in 0..n {
        let Some((a, a_to_h)) = donor[h] else {
            continue;
        };
        if !is_acceptor(a) || !partial(h) {
            continue;
        }
        // Work in a frame with A at the origin.
        let c_h = a_to_h;
        let mut found: Vec<(usize, usize, [f64; 3])> = Vec::new(); // (B, h', A→B)
        for m in neighbours(cell, e, h, HBOND_MAX) {
            let b = m.atom;
            if !is_acceptor(b) || m.distance <= COVALENT {
                continue;
            }
            let c_b = add(c_h, m.offset);
            if angle(c_h, [0.0; 3], c_b) < MIN_ANGLE {
                continue;
            }
            for (j, d_j) in donor.iter().enumerate() {
                let Some((bj, b_to_j)) = *d_j else {
                    continue;
                };
                if bj != b || j == h || !partial(j) {
                    continue;
                }
                let c_j = add(c_b, b_to_j);
                let d = norm(c_j);
                if d <= COVALENT || d > HBOND_MAX || angle(c_j, c_b, [0.0; 3]) < MIN_ANGLE {
                    continue;
                }
                found.push((b, j, c_b));
            }
        }
        match found.as_slice() {
            [] => {
                return Err(format!(
                    "the partially occupied hydrogen {} on {} has no partner: no partially \
                     occupied hydrogen on another acceptor points back along a hydrogen \
                     bond (H···acceptor at most {HBOND_MAX} Å, angle at least {MIN_ANGLE}°); \
                     a proton that is there or not is not a two-position disorder",
                    e.name(h),
                    e.name(a)
                ));
            }
            [(b, j, c_b)] => {
                pair_of[h] = Some(*j);
                // The bond from A (home cell) to B: B's cell is the shift of B's position
                // relative to its home position.
                let pa = e.atoms[a].at;
                let pb = e.atoms[*b].at;
                let frac_b = fractional(cell, *c_b);
                let shift = [0, 1, 2].map(|k| (pa[k] + frac_b[k] - pb[k]).round() as i64);
                let (from, to, shift, h_from, h_to) = if a < *b || (a == *b && shift > [0, 0, 0]) {
                    (a, *b, shift, h, *j)
                } else {
                    (*b, a, shift.map(|x| -x), *j, h)
                };
                if !net
                    .bonds
                    .iter()
                    .any(|x| x.from == from && x.to == to && x.shift == shift)
                {
                    net.bonds.push(Bond {
                        from,
                        to,
                        shift,
                        h_from,
                        h_to,
                        length: norm(*c_b),
                    });
                }
            }
            many => {
                let names: Vec<String> = many
                    .iter()
                    .map(|(b, j, _)| format!("{} with {}", e.name(*b), e.name(*j)))
                    .collect();
                return Err(format!(
                    "the hydrogen {} on {} could belong to several hydrogen bonds ({}); \
                     expected exactly one",
                    e.name(h),
                    e.name(a),
                    names.join("; ")
                ));
            }
        }
    }
    for h in 0..n {
        if let Some(j) = pair_of[h]
            && pair_of[j] != Some(h)
        {
            return Err(format!(
                "the hydrogens {} and {} do not pair up consistently (each should be the \
                 other's partner across one hydrogen bond)",
                e.name(h),
                e.name(j)
            ));
        }
    }
    net.bonds.sort_by_key(|x| (x.from, x.to, x.shift));

    // One proton per bond.
    for (k, b) in net.bonds.iter().enumerate() {
        let (o1, o2) = (occupancy(b.h_from), occupancy(b.h_to));
        let su = (o1.su.unwrap_or(0.0).powi(2) + o2.su.unwrap_or(0.0).powi(2)).sqrt();
        let total = o1.value + o2.value;
        if (total - 1.0).abs() > SUM_TOLERANCE + 2.0 * su {
            return Err(format!(
                "the hydrogens {} ({}) and {} ({}) on the bond {}–{} add up to {:.4} protons; \
                 one proton per hydrogen bond is expected",
                e.name(b.h_from),
                o1.value,
                e.name(b.h_to),
                o2.value,
                e.name(b.from),
                e.name(b.to),
                total
            ));
        }
        if (o2.value - 0.5).abs() > HALF || (o1.value - 0.5).abs() > HALF {
            net.pending.push(Pending::Occupancy {
                bond: k,
                mean: o2.value,
                su: o2.su,
            });
        }
    }

    // The acceptors and their protons.
    for a in (0..n).filter(|&a| is_acceptor(a)) {
        let mine: Vec<usize> = (0..n)
            .filter(|&h| donor[h].is_some_and(|(d, _)| d == a))
            .collect();
        if mine.is_empty() {
            continue;
        }
        if mine.iter().all(|&h| !partial(h)) {
            // Ordered protons only: not part of the disorder.
            continue;
        }
        if partial(a) {
            return Err(format!(
                "the acceptor {} of the hydrogen-bond network is itself partially occupied \
                 ({}); not interpreted",
                e.name(a),
                occupancy(a).value
            ));
        }
        let sum: f64 = mine.iter().map(|&h| occupancy(h).value).sum();
        let total = sum.round();
        if (sum - total).abs() > 0.02 || total < 1.0 {
            let list: Vec<String> = mine
                .iter()
                .map(|&h| format!("{} {}", e.name(h), occupancy(h).value))
                .collect();
            return Err(format!(
                "the hydrogen sites of {} ({}) add up to {sum:.4} protons, not a whole \
                 number; its formula cannot be told",
                e.name(a),
                list.join(", ")
            ));
        }
        let ordered = mine.iter().filter(|&&h| !partial(h)).count() as u32;
        let mut isotopes: Vec<&str> = mine.iter().map(|&h| element(h)).collect();
        isotopes.sort();
        isotopes.dedup();
        net.acceptors.push(a);
        net.protons.push(Protons {
            atom: a,
            total: total as u32,
            ordered,
            sites: mine,
            isotope: if isotopes.len() == 1 {
                isotopes[0].to_string()
            } else {
                "H".into()
            },
        });
    }

    // Partially occupied heavy atoms alone at their position: shared with a vacancy.
    for (s, site) in e.sites.iter().enumerate() {
        let in_shared = shared_sites.iter().any(|g| g.contains(&s));
        if is_hydrogen(&site.element) || in_shared || site.occupancy.value >= 1.0 - HALF {
            continue;
        }
        let atoms: Vec<usize> = (0..n).filter(|&a| e.atoms[a].site == s).collect();
        net.pending.push(Pending::Composition {
            atoms,
            species: vec![
                (site.element.clone(), site.occupancy.value),
                ("vacancy".into(), 1.0 - site.occupancy.value),
            ],
            labels: vec![site.label.clone()],
        });
    }

    // Sites outside the network.
    for (s, site) in e.sites.iter().enumerate() {
        let in_network = net.acceptors.iter().any(|&a| e.atoms[a].site == s)
            || net
                .bonds
                .iter()
                .any(|b| e.atoms[b.h_from].site == s || e.atoms[b.h_to].site == s);
        if in_network {
            continue;
        }
        let why = if is_hydrogen(&site.element) {
            "an ordered hydrogen"
        } else if ACCEPTORS.contains(&site.element.as_str()) {
            "an acceptor with no disordered proton"
        } else {
            "not in the hydrogen-bond network"
        };
        net.inert.push((s, why.into()));
    }
    if net.bonds.is_empty() && net.pending.is_empty() {
        return Err(
            "nothing disordered was found: no partially occupied hydrogen sites between two \
             acceptors and no shared or partially occupied positions; an ordered structure \
             has one arrangement (W = 1)"
                .into(),
        );
    }
    for (p, a) in net.protons.iter().zip(&net.acceptors) {
        let degree = net
            .bonds
            .iter()
            .filter(|b| b.from == *a || b.to == *a)
            .count() as u32;
        let need = p.total - p.ordered.min(p.total);
        if need > degree {
            return Err(format!(
                "{} needs {need} protons from {degree} disordered hydrogen bonds",
                e.name(*a)
            ));
        }
    }
    Ok(net)
}

/// Fractional coordinates of a Cartesian vector.
fn fractional(cell: &Cell, v: [f64; 3]) -> [f64; 3] {
    // Solve v = f · M (rows of M are the cell vectors) by Cramer's rule.
    let [a, b, c] = cell.vectors;
    let det = dot(a, super::symmetry::cross(b, c));
    [
        dot(v, super::symmetry::cross(b, c)) / det,
        dot(a, super::symmetry::cross(v, c)) / det,
        dot(a, super::symmetry::cross(b, v)) / det,
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fractional_inverts_cartesian() {
        let cell = Cell::new([5.0, 6.0, 7.0], [80.0, 95.0, 110.0]).unwrap();
        let f = [0.3, -1.2, 2.5];
        let back = fractional(&cell, cell.cartesian(f));
        for k in 0..3 {
            assert!((back[k] - f[k]).abs() < 1e-12);
        }
    }
}
