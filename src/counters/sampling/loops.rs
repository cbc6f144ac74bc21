//! Loop moves: flip a closed chain of two-state variables that leaves every constraint's
//! "inward count" unchanged, so that the energy does not change.
//!
//! # What it computes
//!
//! A move of the Markov chain of [`super::moves`] that stays efficient as β → ∞, where
//! single flips are almost always refused. It applies to models in which every variable
//! has two states and lies in exactly two constraints (arrows on bonds between two sites,
//! spins shared by two tetrahedra, bond occupancies between two sites), and every table
//! depends only on a count: for some orientation o (one preferred state per scope
//! variable, found by trying them all), whether an assignment is allowed depends only on
//! how many scope variables take their preferred state. For `inward` rules o is the state
//! pointing into the scope; for "exactly one" `occupied` rules the loops are the
//! alternating cycles of dimer models.
//!
//! # Method
//!
//! A walk on the constraints, as in the short-loop algorithm for ice (Barkema & Newman
//! 1998, Phys. Rev. E 57, 1155 — from memory): start at a random constraint and leave it
//! through a random scope variable; at every constraint entered through a variable whose
//! status (preferred state or not) is s, leave through a uniformly chosen other variable
//! of status ≠ s; step to the other constraint of that variable. When the walk reaches a
//! constraint it has visited, the part of the walk since that first visit is a closed loop;
//! if the entering and leaving variables there have opposite status, the loop is flipped.
//! Each constraint on the loop then has one preferred and one unpreferred variable
//! exchanged, so its count, its allowed status and the energy are unchanged. The number of
//! choices at each constraint is the same for the reversed loop in the flipped
//! configuration, and the tail of the walk is untouched, so proposals are symmetric and the
//! move satisfies detailed balance with respect to any function of the energy; a walk that
//! finds no choice, leaves through a variable in only one constraint, or grows beyond
//! 64 steps is refused (equally in both directions). With weights on the states
//! (`weights:`, fields of imposed means) the closed loop is flipped with the Metropolis
//! probability min(1, ∏_loop w_v(new)/w_v(old)): the proposal is symmetric and the energy
//! unchanged, so this is detailed balance for w(σ) e^{−βE} (Metropolis et al. 1953,
//! J. Chem. Phys. 21, 1087; Hastings 1970, Biometrika 57, 97). A loop that would put a
//! variable into a state of weight 0 is never flipped.
//!
//! # Complexity
//!
//! Building: O(Σ_tables 4^k) for scope size k (refused above k = 12). A move: O(walk
//! length × k).

use super::moves::{Chain, Kernel};
use crate::model::Model;

/// Largest scope whose orientation is searched.
const MAX_SCOPE: usize = 12;

/// Longest walk before an attempt is given up. In a 3D ice with many defects the walk
/// rarely closes soon (measured: loop moves with a cap of 4 × constraints cost ten times
/// the sweeps on an 8×8×4 ice Ih cell); the cap is the same for a loop and its reverse.
const MAX_WALK: usize = 64;

/// What loop moves need beyond the [`Kernel`].
#[derive(Clone, Debug)]
pub struct Loops {
    /// For constraint c, `vars[start[c]..start[c + 1]]` is its scope.
    start: Vec<u32>,
    vars: Vec<u32>,
    /// Per constraint: bit i set when state 1 is the preferred state of scope variable i.
    preferred: Vec<u32>,
    /// Per variable: its two constraints.
    ends: Vec<[u32; 2]>,
}

/// The orientation under which a two-state table depends only on the preferred count.
pub(super) fn orientation(table: &crate::model::Table) -> Option<u32> {
    let k = table.radices.len();
    if k == 0 || k > MAX_SCOPE || table.radices.iter().any(|&q| q != 2) {
        return None;
    }
    let size = 1u32 << k;
    'o: for o in 0..size {
        let mut by_count: [Option<bool>; MAX_SCOPE + 1] = [None; MAX_SCOPE + 1];
        for x in 0..size {
            let count = k - (x ^ o).count_ones() as usize;
            let allowed = table.allows(x as u64);
            match by_count[count] {
                None => by_count[count] = Some(allowed),
                Some(a) if a != allowed => continue 'o,
                Some(_) => {}
            }
        }
        return Some(o);
    }
    None
}

impl Loops {
    /// The loop structure of a model, or `None` when loop moves do not apply to it.
    pub fn new(model: &Model) -> Option<Loops> {
        if model
            .variables
            .iter()
            .any(|v| v.states != 2 && v.held.is_none())
            || model.constraints.is_empty()
        {
            return None;
        }
        let table_orientation: Vec<Option<u32>> = model.tables.iter().map(orientation).collect();
        let mut start = Vec::with_capacity(model.constraints.len() + 1);
        let mut vars = Vec::new();
        let mut preferred = Vec::with_capacity(model.constraints.len());
        let mut ends: Vec<Vec<u32>> = vec![Vec::new(); model.variables.len()];
        for (c, con) in model.constraints.iter().enumerate() {
            preferred.push(table_orientation[con.table]?);
            start.push(vars.len() as u32);
            for &v in &con.scope {
                vars.push(v as u32);
                ends[v].push(c as u32);
            }
        }
        start.push(vars.len() as u32);
        let ends = ends
            .into_iter()
            .map(|e| {
                if e.len() == 2 {
                    Some([e[0], e[1]])
                } else {
                    None
                }
            })
            .collect::<Option<Vec<_>>>()?;
        Some(Loops {
            start,
            vars,
            preferred,
            ends,
        })
    }

    fn scope(&self, c: u32) -> &[u32] {
        &self.vars[self.start[c as usize] as usize..self.start[c as usize + 1] as usize]
    }

    /// Whether variable at scope position `i` of constraint `c` has its preferred state.
    #[inline]
    fn status(&self, chain: &Chain, c: u32, i: usize) -> bool {
        let v = self.scope(c)[i] as usize;
        chain.values[v] as u32 == (self.preferred[c as usize] >> i) & 1
    }

    fn position(&self, c: u32, v: u32) -> usize {
        self.scope(c)
            .iter()
            .position(|&x| x == v)
            .expect("variable in scope")
    }

    /// Attempt one loop move; returns whether a loop was flipped.
    pub fn attempt(&self, kernel: &Kernel, chain: &mut Chain, work: &mut Walk) -> bool {
        let n_c = self.preferred.len();
        work.stamp = work.stamp.wrapping_add(1);
        if work.stamp == 0 {
            work.seen.iter_mut().for_each(|s| *s = (0, 0));
            work.stamp = 1;
        }
        work.path.clear();
        let mut c = (chain.next_u64() % n_c as u64) as u32;
        let mut entering: Option<u32> = None;
        let limit = n_c.min(MAX_WALK);
        loop {
            let (stamp, at) = work.seen[c as usize];
            if stamp == work.stamp {
                let z = entering.expect("a revisit follows a step");
                let leave = work.path[at as usize];
                let (zi, li) = (self.position(c, z), self.position(c, leave));
                if self.status(chain, c, zi) == self.status(chain, c, li) {
                    return false;
                }
                if kernel.is_weighted() {
                    // Metropolis on the weights: the proposal is symmetric and the
                    // energy unchanged, so accept with min(1, ∏ w(new)/w(old)).
                    let gain: f64 = work.path[at as usize..]
                        .iter()
                        .map(|&v| {
                            let x = chain.values[v as usize];
                            kernel.ln_weight(v as usize, 1 - x) - kernel.ln_weight(v as usize, x)
                        })
                        .sum();
                    if gain < 0.0 {
                        let u = (chain.next_u64() >> 11) as f64 * (1.0 / 9007199254740992.0);
                        if u >= gain.exp() {
                            return false;
                        }
                    }
                }
                let before = chain.energy();
                for i in at as usize..work.path.len() {
                    chain.flip(kernel, work.path[i] as usize);
                }
                debug_assert_eq!(before, chain.energy(), "a loop keeps every count");
                return true;
            }
            if work.path.len() >= limit {
                return false;
            }
            work.seen[c as usize] = (work.stamp, work.path.len() as u32);
            let scope = self.scope(c);
            let leave = match entering {
                None => scope[(chain.next_u64() % scope.len() as u64) as usize],
                Some(e) => {
                    let ei = self.position(c, e);
                    let s = self.status(chain, c, ei);
                    let n = (0..scope.len())
                        .filter(|&i| i != ei && self.status(chain, c, i) != s)
                        .count();
                    if n == 0 {
                        return false;
                    }
                    let mut pick = (chain.next_u64() % n as u64) as usize;
                    let mut chosen = 0;
                    for (i, &v) in scope.iter().enumerate() {
                        if i != ei && self.status(chain, c, i) != s {
                            if pick == 0 {
                                chosen = v;
                                break;
                            }
                            pick -= 1;
                        }
                    }
                    chosen
                }
            };
            work.path.push(leave);
            let [a, b] = self.ends[leave as usize];
            c = if a == c { b } else { a };
            entering = Some(leave);
        }
    }

    /// Scratch space for one chain's walks.
    pub fn walk(&self) -> Walk {
        Walk {
            seen: vec![(0, 0); self.preferred.len()],
            stamp: 0,
            path: Vec::new(),
        }
    }
}

/// Per-chain scratch: visit stamps and the current path of leaving variables.
#[derive(Clone, Debug)]
pub struct Walk {
    seen: Vec<(u32, u32)>,
    stamp: u32,
    path: Vec<u32>,
}

#[cfg(test)]
mod tests {
    use super::super::moves::Chain;
    use super::*;
    use crate::Lattice;
    use crate::cluster::{Cells, Cluster};

    fn model(yaml: &str, cells: &str, dims: usize) -> Model {
        let l = Lattice::from_yaml(yaml, "test.yaml").unwrap();
        let cluster = Cluster::new(&l.crystal, Cells::parse(cells, None, dims).unwrap()).unwrap();
        Model::new(&cluster).unwrap()
    }

    #[test]
    fn loops_apply_to_ice_rules_and_not_to_triangles() {
        let ice = model(include_str!("../../../lattices/ice-ih.yaml"), "2x2x2", 3);
        let l = Loops::new(&ice).expect("ice rule tables depend on the inward count");
        assert_eq!(l.preferred.len(), 32);
        // Triangular antiferromagnet: each spin lies in six triangles.
        let afm = model(
            include_str!("../../../lattices/triangular-afm.yaml"),
            "4x4",
            2,
        );
        assert!(Loops::new(&afm).is_none());
    }

    #[test]
    fn loops_keep_moving_where_single_flips_freeze() {
        // Ice Ih 2x2x2 annealed to β = 8: a single flip out of a ground state costs
        // e^{-16}, so heat-bath sweeps alone leave the configuration frozen, while loop
        // moves keep visiting new ground states at zero energy cost.
        let m = model(include_str!("../../../lattices/ice-ih.yaml"), "2x2x2", 3);
        let k = Kernel::new(&m).unwrap();
        let l = Loops::new(&m).unwrap();
        let mut walk = l.walk();
        let mut chain = k.chain(super::super::stream(3, 0));
        for i in 0..400 {
            chain.sweep(&k, 8.0 * i as f64 / 400.0);
            l.attempt(&k, &mut chain, &mut walk);
        }
        for _ in 0..200 {
            chain.sweep(&k, 8.0);
        }
        assert_eq!(chain.energy(), 0, "annealed into a ground state");
        let distinct = |chain: &mut Chain, walk: &mut Walk, loops: bool| {
            let mut seen = std::collections::HashSet::new();
            for _ in 0..300 {
                chain.sweep(&k, 8.0);
                if loops {
                    l.attempt(&k, chain, walk);
                }
                seen.insert(chain.values.clone());
            }
            seen.len()
        };
        let frozen = distinct(&mut chain.clone(), &mut walk, false);
        let moving = distinct(&mut chain, &mut walk, true);
        assert!(frozen <= 3, "heat-bath alone visited {frozen} states");
        assert!(moving >= 100, "loops visited only {moving} states");
    }

    #[test]
    fn orientation_is_found_only_for_count_tables() {
        // "exactly two of four take their preferred state" under orientation 0b0101
        // (variables 0 and 2 prefer state 1), built by enumeration.
        let o = 0b0101u32;
        let mut bits = 0u64;
        for x in 0..16u32 {
            if 4 - (x ^ o).count_ones() == 2 {
                bits |= 1 << x;
            }
        }
        let t = crate::model::Table {
            radices: vec![2; 4],
            bits: vec![bits],
            allowed: 6,
            size: 16,
        };
        let found = orientation(&t).unwrap();
        // Either o or its complement (the rule "two of four" is symmetric under both).
        assert!(found == o || found == !o & 0b1111, "{found:b}");
        // A table that is no function of any count: assignments 001 and 111 only.
        let odd = crate::model::Table {
            radices: vec![2; 3],
            bits: vec![0b10 | 0b1000_0000],
            allowed: 2,
            size: 8,
        };
        assert!(orientation(&odd).is_none());
    }
}
