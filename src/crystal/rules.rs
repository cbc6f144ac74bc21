//! What each rule kind means, and how a rule of the file becomes its instances in one
//! unit cell.

use std::collections::HashSet;

use super::Crystal;
use super::geometry::{add_shift, dot, norm, sub_shift};
use super::types::*;
use super::validate::Checker;
use crate::error::{Position, Result};
use crate::spec::{AllowedSpec, position_of};

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
    /// With vacancies: the allowed counts for each number of remaining members, below the
    /// full scope (`remaining:` in the file; empty when the rule reads no vacant-able site).
    pub remaining: std::collections::BTreeMap<u32, Vec<u32>>,
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

impl Crystal {
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

    pub(super) fn validate_rule(&self, r: &crate::spec::RuleSpec, ck: &Checker) -> Result<Rule> {
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
            remaining: Default::default(),
        })
    }
}
