//! `weights:`, `occupancy:` and `composition:` entries resolved against the crystal: which
//! sites or bonds carry relative weights of their states, and which means are imposed on
//! which states, checked for names, variable kinds, state ranges, values and overlaps.

use std::collections::BTreeMap;

use super::Crystal;
use super::types::{MeanKind, MeanTarget, Target, VariableKind, Weight};
use super::validate::Checker;
use crate::error::Result;
use crate::spec::{CompositionSpec, Located, OccupancySpec, WeightSpec, position_of};

impl Crystal {
    /// The variable kind on `target`, or the refusal of `key` naming an entity that carries
    /// no variables.
    pub(super) fn kind_on(
        &self,
        target: Target,
        name: &Located<String>,
        key: &str,
        ck: &Checker,
    ) -> Result<VariableKind> {
        let kind = match target {
            Target::Sites => self.site_variables,
            Target::Bonds => self.bond_variables,
        };
        match kind {
            Some(k) => Ok(k),
            None => ck.at(
                name,
                format!(
                    "`{key}` names a variable on {}, but the file declares no variables there",
                    target.word()
                ),
            ),
        }
    }

    /// The sites (by id or species) or bonds (by id or family) a name in entry `key`
    /// stands for; refused when there are none.
    pub(super) fn entities_named(
        &self,
        target: Target,
        name: &Located<String>,
        key: &str,
        ck: &Checker,
    ) -> Result<Vec<usize>> {
        let indices: Vec<usize> = match target {
            Target::Sites => (0..self.sites.len())
                .filter(|&i| self.sites[i].matches(&name.value))
                .collect(),
            Target::Bonds => (0..self.bonds.len())
                .filter(|&i| self.bonds[i].id == name.value || self.bonds[i].family == name.value)
                .collect(),
        };
        if indices.is_empty() {
            let what = match target {
                Target::Sites => "site id or species",
                Target::Bonds => "bond id or bond family",
            };
            return ck.at(
                name,
                format!("`{key}` names '{}', which is no {what}", name.value),
            );
        }
        Ok(indices)
    }

    /// Whether the variable on this entity is held by `pinned:`.
    fn is_pinned(&self, target: Target, index: usize) -> bool {
        self.pinned
            .iter()
            .any(|p| p.target == target && p.index == index)
    }

    /// Resolve `weights:` into one [`Weight`] per site or bond of the unit cell, sorted; the
    /// same entity named twice must be given the same weights.
    pub(super) fn validate_weights(
        &self,
        specs: &[WeightSpec],
        ck: &Checker,
    ) -> Result<Vec<Weight>> {
        let mut out: BTreeMap<(u8, usize), Vec<f64>> = BTreeMap::new();
        for w in specs {
            let (target, name) = one_of(&w.site, &w.bond, "weights", &w.states, ck)?;
            let kind = self.kind_on(target, name, "weights", ck)?;
            let q = kind.states() as usize;
            if w.states.value.len() != q {
                return ck.at(
                    &w.states,
                    format!(
                        "{} variables have {q} states: give {q} weights, found {}",
                        kind.word(),
                        w.states.value.len()
                    ),
                );
            }
            if let Some(bad) = w.states.value.iter().find(|x| !x.is_finite() || **x < 0.0) {
                return ck.at(
                    &w.states,
                    format!("weights are finite and non-negative numbers, found {bad}"),
                );
            }
            if let Some(bad) = w
                .states
                .value
                .iter()
                .find(|x| **x != 0.0 && (x.abs() < 1e-250 || x.abs() > 1e250))
            {
                return ck.at(
                    &w.states,
                    format!(
                        "weight {bad} is outside 1e-250 to 1e250; weights are relative: rescale them, or write 0 to forbid a state"
                    ),
                );
            }
            if w.states.value.iter().all(|x| *x == 0.0) {
                return ck.at(
                    &w.states,
                    "every weight is 0: no arrangement would be left; to hold a variable at one state use `pinned`",
                );
            }
            let k = target_key(target);
            for i in self.entities_named(target, name, "weights", ck)? {
                if self.is_pinned(target, i) {
                    return ck.at(
                        name,
                        format!(
                            "'{}' is pinned (one state), so weights of its states have no meaning; remove one of the two entries",
                            name.value
                        ),
                    );
                }
                if let Some(other) = out.get(&(k, i))
                    && other != &w.states.value
                {
                    return ck.at(
                        &w.states,
                        format!(
                            "'{}' is given weights {other:?} by an earlier entry and {:?} here",
                            name.value, w.states.value
                        ),
                    );
                }
                out.insert((k, i), w.states.value.clone());
            }
        }
        Ok(out
            .into_iter()
            .map(|((k, index), states)| Weight {
                target: if k == 0 { Target::Sites } else { Target::Bonds },
                index,
                states,
            })
            .collect())
    }

    /// Resolve `occupancy:` and `composition:` into [`MeanTarget`]s, occupancies first, each
    /// in file order.
    pub(super) fn validate_means(
        &self,
        occupancy: &[OccupancySpec],
        composition: &[CompositionSpec],
        ck: &Checker,
    ) -> Result<Vec<MeanTarget>> {
        let mut out: Vec<MeanTarget> = Vec::new();
        for o in occupancy {
            let (target, name) = one_of(&o.site, &o.bond, "occupancy", &o.state, ck)?;
            let kind = self.kind_on(target, name, "occupancy", ck)?;
            self.check_state(kind, &o.state, ck)?;
            check_fraction(&o.mean, "mean", ck)?;
            let members = self.entities_named(target, name, "occupancy", ck)?;
            out.push(self.mean_target(
                MeanKind::Occupancy,
                format!("{} state {}", name.value, o.state.value),
                target,
                members,
                &o.state,
                &o.mean,
                ck,
            )?);
        }
        for c in composition {
            let (target, names) = match (&c.sites, &c.bonds) {
                (Some(s), None) => (Target::Sites, s),
                (None, Some(b)) => (Target::Bonds, b),
                (Some(s), Some(_)) => {
                    return ck.at(
                        s,
                        "a `composition` entry lists `sites` or `bonds`, not both",
                    );
                }
                (None, None) => {
                    return ck.at(
                        &c.state,
                        "a `composition` entry needs `sites: [IDs]` or `bonds: [IDs]`",
                    );
                }
            };
            if names.value.is_empty() {
                return ck.at(names, "the list of a `composition` entry is empty");
            }
            let mut members = Vec::new();
            let mut first: Option<Located<String>> = None;
            for n in &names.value {
                // The list's own position stands for each of its names.
                let located = Located::new(n.clone(), names.referenced, names.defined);
                let kind = self.kind_on(target, &located, "composition", ck)?;
                self.check_state(kind, &c.state, ck)?;
                members.extend(self.entities_named(target, &located, "composition", ck)?);
                first.get_or_insert(located);
            }
            members.sort_unstable();
            members.dedup();
            check_fraction(&c.fraction, "fraction", ck)?;
            out.push(self.mean_target(
                MeanKind::Composition,
                format!("{} state {}", names.value.join("+"), c.state.value),
                target,
                members,
                &c.state,
                &c.fraction,
                ck,
            )?);
        }
        let states_of = |t: Target| {
            match t {
                Target::Sites => self.site_variables,
                Target::Bonds => self.bond_variables,
            }
            .map_or(0, |k| k.states())
        };
        if let Err((j, message)) = check_independent(&out, states_of) {
            return ck.err(out[j].position, message);
        }
        Ok(out)
    }

    fn check_state(&self, kind: VariableKind, state: &Located<u32>, ck: &Checker) -> Result<()> {
        let q = kind.states();
        if state.value >= q {
            return ck.at(
                state,
                format!(
                    "state {} is out of range: {} variables have states 0 to {}",
                    state.value,
                    kind.word(),
                    q - 1
                ),
            );
        }
        Ok(())
    }

    /// One imposed mean, refused when a member is pinned or when an earlier entry of the
    /// same kind already imposes a mean on the same members (the fields would not be
    /// determined).
    #[allow(clippy::too_many_arguments)]
    fn mean_target(
        &self,
        kind: MeanKind,
        label: String,
        target: Target,
        members: Vec<usize>,
        state: &Located<u32>,
        mean: &Located<f64>,
        ck: &Checker,
    ) -> Result<MeanTarget> {
        if let Some(&i) = members.iter().find(|&&i| self.is_pinned(target, i)) {
            let id = match target {
                Target::Sites => &self.sites[i].id,
                Target::Bonds => &self.bonds[i].id,
            };
            return ck.at(
                state,
                format!("'{id}' is pinned (one state): a mean cannot be imposed on it"),
            );
        }
        Ok(MeanTarget {
            kind,
            label,
            target,
            members,
            state: state.value,
            mean: mean.value,
            position: position_of(state),
        })
    }
}

/// Refuse a second imposed mean over the same members that is fixed by the first (the same
/// state, or the other state of a two-state variable): its field would not be determined.
fn check_independent(
    means: &[MeanTarget],
    states_of: impl Fn(Target) -> u32,
) -> std::result::Result<(), (usize, String)> {
    for (j, b) in means.iter().enumerate() {
        for a in &means[..j] {
            if a.target != b.target || a.members != b.members {
                continue;
            }
            let two = states_of(a.target) == 2;
            if a.state == b.state || two {
                return Err((
                    j,
                    format!(
                        "'{}' imposes a mean on the same variables as '{}'{}: one of the two entries fixes the other",
                        b.label,
                        a.label,
                        if two && a.state != b.state {
                            " (two-state variables: the means of the two states add to 1)"
                        } else {
                            ""
                        }
                    ),
                ));
            }
        }
    }
    Ok(())
}

fn target_key(t: Target) -> u8 {
    match t {
        Target::Sites => 0,
        Target::Bonds => 1,
    }
}

/// The `site:` or `bond:` of an entry that names exactly one of them.
pub(super) fn one_of<'a, U>(
    site: &'a Option<Located<String>>,
    bond: &'a Option<Located<String>>,
    key: &str,
    anchor: &Located<U>,
    ck: &Checker,
) -> Result<(Target, &'a Located<String>)> {
    match (site, bond) {
        (Some(s), None) => Ok((Target::Sites, s)),
        (None, Some(b)) => Ok((Target::Bonds, b)),
        (Some(s), Some(_)) => ck.at(
            s,
            format!("a `{key}` entry names a `site` or a `bond`, not both"),
        ),
        (None, None) => ck.at(
            anchor,
            format!("a `{key}` entry needs `site: ID` or `bond: ID`"),
        ),
    }
}

/// A mean or fraction strictly between 0 and 1.
fn check_fraction(value: &Located<f64>, word: &str, ck: &Checker) -> Result<()> {
    let x = value.value;
    if !(x > 0.0 && x < 1.0) {
        return ck.at(
            value,
            format!(
                "the {word} is a fraction strictly between 0 and 1, found {x}; a state that is always (or never) taken is held with `pinned` (or forbidden with a weight of 0)"
            ),
        );
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use crate::Lattice;
    use crate::cluster::{Cells, Cluster};
    use crate::crystal::{MeanKind, Target};
    use crate::error::Error;
    use crate::model::Model;

    const SQUARE_ICE: &str = include_str!("../../lattices/square-ice.yaml");

    fn lattice(extra: &str) -> crate::error::Result<Lattice> {
        Lattice::from_yaml(&format!("{SQUARE_ICE}{extra}"), "weighted.yaml")
    }

    /// The error's line, column and words when `extra` is refused.
    fn refusal(extra: &str) -> (usize, usize, String) {
        match lattice(extra) {
            Err(Error::Invalid {
                position, message, ..
            }) => (position.line as usize, position.column as usize, message),
            Err(e) => panic!("{e}"),
            Ok(_) => panic!("accepted: {extra}"),
        }
    }

    fn first_line() -> usize {
        SQUARE_ICE.lines().count() + 2
    }

    #[test]
    fn issue13_weights_and_means_reach_the_model() {
        let l = lattice(
            "weights:\n  - {bond: h, states: [1, 2.5]}\n\
             occupancy:\n  - {bond: v, state: 1, mean: 0.6}\n\
             composition:\n  - {bonds: [h, v], state: 1, fraction: 0.5}\n",
        )
        .unwrap();
        let c = &l.crystal;
        assert!(c.is_weighted());
        assert_eq!(c.weights.len(), 1);
        assert_eq!(
            (c.weights[0].index, &c.weights[0].states),
            (0, &vec![1.0, 2.5])
        );
        assert_eq!(c.means.len(), 2);
        assert_eq!(c.means[0].kind, MeanKind::Occupancy);
        assert_eq!(
            (c.means[0].target, &c.means[0].members[..]),
            (Target::Bonds, &[1][..])
        );
        assert_eq!(c.means[1].kind, MeanKind::Composition);
        assert_eq!(c.means[1].members, [0, 1]);
        assert_eq!(c.means[1].label, "h+v state 1");
        let cluster = Cluster::new(c, Cells::parse("3x3", None, 2).unwrap()).unwrap();
        let m = Model::new(&cluster).unwrap();
        assert!(m.is_weighted());
        // 9 h bonds weighted, 9 v bonds not; the occupancy averages over the 9 v bonds, the
        // composition over all 18.
        let weighted = m.variables.iter().filter(|v| v.weights.is_some()).count();
        assert_eq!(weighted, 9);
        assert_eq!(m.means[0].variables.len(), 9);
        assert_eq!(m.means[1].variables.len(), 18);
        for &v in &m.means[0].variables {
            assert!(m.variables[v].weights.is_none());
            assert_eq!(m.weight(v, 1), 1.0);
        }
        let h = (0..m.variables.len())
            .find(|&v| m.variables[v].weights.is_some())
            .unwrap();
        assert_eq!(m.weight(h, 1), 2.5);
        // The plain file is not weighted.
        assert!(!lattice("").unwrap().crystal.is_weighted());
    }

    #[test]
    fn issue13_wang_landau_refuses_weights_and_the_exact_count_weighs() {
        use crate::counters::{Context, exact, sampling::wang_landau};
        let l = lattice("weights:\n  - {bond: h, states: [1, 2]}\n").unwrap();
        let ctx = Context::new();
        let cluster = Cluster::new(&l.crystal, Cells::parse("3x3", None, 2).unwrap()).unwrap();
        let m = Model::new(&cluster).unwrap();
        // Wang–Landau cannot weigh: it refuses rather than count every arrangement once.
        let r = wang_landau::count(&m, &Default::default(), &ctx);
        assert!(matches!(r, Err(Error::Unweighted { .. })), "{:?}", r.err());
        // The exact counter weighs (counters/exact_weighted.rs).
        assert!(exact::count(&m, &Default::default(), &ctx).is_ok());
    }

    #[test]
    fn issue13_bad_weights_and_means_are_refused_where_they_are_written() {
        let line = first_line();
        let (l, c, m) = refusal("weights:\n  - {bond: h, states: [1]}\n");
        assert_eq!((l, c), (line, 23), "{m}"); // the list
        assert!(m.contains("give 2 weights, found 1"), "{m}");
        let (_, _, m) = refusal("weights:\n  - {bond: h, states: [1, -1]}\n");
        assert!(m.contains("non-negative"), "{m}");
        let (_, _, m) = refusal("weights:\n  - {bond: h, states: [0, 0]}\n");
        assert!(m.contains("every weight is 0"), "{m}");
        let (_, _, m) = refusal("weights:\n  - {bond: h, states: [1, 1e300]}\n");
        assert!(m.contains("outside 1e-250 to 1e250"), "{m}");
        // Both sides of the range: 1e250 is accepted.
        assert!(lattice("weights:\n  - {bond: h, states: [1, 1e250]}\n").is_ok());
        let (_, _, m) = refusal("weights:\n  - {bond: x, states: [1, 1]}\n");
        assert!(m.contains("'x'") && m.contains("no bond id"), "{m}");
        let (_, _, m) = refusal("weights:\n  - {site: O, states: [1, 1]}\n");
        assert!(m.contains("no variables there"), "{m}");
        let (l, _, m) =
            refusal("weights:\n  - {bond: h, states: [1, 2]}\n  - {bond: h, states: [1, 3]}\n");
        assert_eq!(l, line + 1);
        assert!(m.contains("earlier entry"), "{m}");
        let (_, _, m) =
            refusal("pinned:\n  - {bond: h, state: 1}\nweights:\n  - {bond: h, states: [1, 2]}\n");
        assert!(m.contains("is pinned"), "{m}");
        // Means: strictly inside (0, 1), in range, independent.
        for bad in ["0", "1", "1.5", "-0.1", ".nan"] {
            let (l, c, m) = refusal(&format!(
                "occupancy:\n  - {{bond: v, state: 1, mean: {bad}}}\n"
            ));
            assert_eq!((l, c), (line, 31), "{bad}: {m}"); // the mean
            assert!(m.contains("strictly between 0 and 1"), "{m}");
        }
        assert!(lattice("occupancy:\n  - {bond: v, state: 1, mean: 0.999}\n").is_ok());
        let (_, _, m) = refusal("occupancy:\n  - {bond: v, state: 2, mean: 0.5}\n");
        assert!(m.contains("states 0 to 1"), "{m}");
        let (l, _, m) = refusal(
            "occupancy:\n  - {bond: v, state: 1, mean: 0.6}\n  - {bond: v, state: 0, mean: 0.4}\n",
        );
        assert_eq!(l, line + 1);
        assert!(m.contains("add to 1"), "{m}");
        let (_, _, m) = refusal("composition:\n  - {bonds: [], state: 1, fraction: 0.5}\n");
        assert!(m.contains("empty"), "{m}");
        let (_, _, m) = refusal("composition:\n  - {state: 1, fraction: 0.5}\n");
        assert!(m.contains("needs `sites: [IDs]` or `bonds: [IDs]`"), "{m}");
        let (_, _, m) = refusal(
            "composition:\n  - {bonds: [h, v], state: 1, fraction: 0.5}\n  - {bonds: [v, h], state: 1, fraction: 0.4}\n",
        );
        assert!(m.contains("fixes the other"), "{m}");
        let (_, _, m) = refusal(
            "pinned:\n  - {bond: h, state: 1}\ncomposition:\n  - {bonds: [h, v], state: 1, fraction: 0.5}\n",
        );
        assert!(m.contains("'h' is pinned"), "{m}");
    }
}
