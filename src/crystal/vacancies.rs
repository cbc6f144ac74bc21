//! `vacancies:` entries resolved against the crystal (which sites may be empty, and how
//! often), and each rule's `remaining:` key checked against them: a rule that reads a site
//! that may be vacant must say which counts it allows for every number of members that can
//! remain, and may say nothing else.
//!
//! A vacant site holds no variable: it has no state, adds nothing to ln Ω, and every rule
//! instance that reads it applies the allowed counts for the members that remain (for
//! spin ice: 4 members [2], 3 members [1, 2], 2 members [1], 1 member [0, 1]). An instance
//! with no member left imposes nothing.

use std::collections::{BTreeMap, BTreeSet};

use super::Crystal;
use super::rules::Rule;
use super::types::{Entity, RuleKind, Target};
use super::validate::{Checker, number_word};
use crate::error::Result;
use crate::spec::LatticeSpec;

/// Most members of one rule instance that may be vacant: the generalized Pauling estimate
/// sums over every pattern of vacant members (2^k of them).
pub const MAX_VACANT_SLOTS: usize = 16;

/// Sites of the unit cell that may be vacant, in every cell.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Vacancy {
    /// Index into `Crystal::sites`.
    pub site: usize,
    /// Probability that the site is vacant, 0 ≤ fraction < 1, independently of every other
    /// site.
    pub fraction: f64,
}

impl Crystal {
    /// Whether some site is vacant with a probability above zero: the crystal is then
    /// counted realisation by realisation ([`crate::model::Model::with_vacancies`]).
    pub fn is_diluted(&self) -> bool {
        self.vacancies.iter().any(|v| v.fraction > 0.0)
    }

    /// The probability that site `site` of the unit cell is vacant (0 when it is not listed).
    pub fn vacancy_fraction(&self, site: usize) -> f64 {
        self.vacancies
            .iter()
            .find(|v| v.site == site)
            .map_or(0.0, |v| v.fraction)
    }

    /// Whether site `site` is listed in `vacancies:` (with any fraction, 0 included).
    pub fn may_be_vacant(&self, site: usize) -> bool {
        self.vacancies.iter().any(|v| v.site == site)
    }

    /// Resolve `vacancies:` and check every rule's `remaining:` against them.
    pub(super) fn validate_vacancies(&mut self, spec: &LatticeSpec, ck: &Checker) -> Result<()> {
        let mut vacancies: BTreeMap<usize, f64> = BTreeMap::new();
        for v in &spec.vacancies {
            let x = v.fraction.value;
            if !(x.is_finite() && (0.0..1.0).contains(&x)) {
                return ck.at(
                    &v.fraction,
                    format!(
                        "vacancy fraction {} is out of range; expected a probability from 0 up to \
                         (not including) 1",
                        number_word(x)
                    ),
                );
            }
            if self.site_variables.is_none() {
                return ck.at(
                    &v.site,
                    "`vacancies` empties sites that carry variables, but the file declares no \
                     variables on sites",
                );
            }
            let indices: Vec<usize> = (0..self.sites.len())
                .filter(|&i| self.sites[i].matches(&v.site.value))
                .collect();
            if indices.is_empty() {
                return ck.at(
                    &v.site,
                    format!(
                        "`vacancies` names '{}', which is no site id or species",
                        v.site.value
                    ),
                );
            }
            for i in indices {
                if vacancies.insert(i, x).is_some() {
                    return ck.at(
                        &v.site,
                        format!(
                            "site '{}' is listed in `vacancies` by an earlier entry; expected \
                             one entry per site",
                            self.sites[i].id
                        ),
                    );
                }
                if self
                    .pinned
                    .iter()
                    .any(|p| p.target == Target::Sites && p.index == i)
                {
                    return ck.at(
                        &v.site,
                        format!(
                            "site '{}' is pinned and may be vacant; expected one or the other",
                            self.sites[i].id
                        ),
                    );
                }
            }
        }
        self.vacancies = vacancies
            .into_iter()
            .map(|(site, fraction)| Vacancy { site, fraction })
            .collect();
        for (rule, r) in self.rules.iter_mut().zip(&spec.rules) {
            // The numbers of remaining members that can occur, over the rule's instances.
            let mut occur = BTreeSet::new();
            let mut largest = 0;
            let mut reads_vacant = false;
            for inst in &rule.instances {
                let m = inst.slots.len();
                largest = largest.max(m);
                let k = if rule.target == Target::Sites {
                    inst.slots
                        .iter()
                        .filter(|s| match s.entity {
                            Entity::Site { site, .. } => {
                                self.vacancies.iter().any(|v| v.site == site)
                            }
                            Entity::Bond { .. } => false,
                        })
                        .count()
                } else {
                    0
                };
                if k == 0 {
                    continue;
                }
                reads_vacant = true;
                if k > MAX_VACANT_SLOTS {
                    return ck.at(
                        &r.at,
                        format!(
                            "{} has {k} members that may be vacant (at most {MAX_VACANT_SLOTS}); \
                             expected a smaller scope",
                            inst.label
                        ),
                    );
                }
                occur.extend((m - k).max(1)..m);
            }
            let occur: Vec<u32> = occur.into_iter().map(|n| n as u32).collect();
            if !reads_vacant {
                if let Some(rem) = &r.remaining {
                    return ck.at(
                        rem,
                        format!(
                            "rule '{}' reads no site listed in `vacancies`; `remaining` applies \
                             only to rules whose members may be vacant",
                            rule.label
                        ),
                    );
                }
                continue;
            }
            if !matches!(rule.kind, RuleKind::Inward | RuleKind::Occupied) {
                return ck.at(
                    &r.kind,
                    format!(
                        "rule '{}' reads sites that may be vacant; vacancies are supported in \
                         counting rules (inward, occupied), whose allowed counts can be given \
                         for fewer members",
                        rule.label
                    ),
                );
            }
            let wanted = occur
                .iter()
                .map(|n| n.to_string())
                .collect::<Vec<_>>()
                .join(", ");
            let Some(rem) = &r.remaining else {
                return ck.at(
                    &r.kind,
                    format!(
                        "rule '{}' reads sites that may be vacant; expected `remaining:` with the \
                         allowed counts for {wanted} remaining members (for spin ice: \
                         {{3: [1, 2], 2: [1], 1: [0, 1]}})",
                        rule.label
                    ),
                );
            };
            for (&n, counts) in &rem.value {
                if n == 0 {
                    return ck.at(
                        rem,
                        "`remaining` has an entry for 0 members; an instance with no member \
                         left imposes nothing, so expected entries from 1 member up",
                    );
                }
                if n as usize >= largest {
                    return ck.at(
                        rem,
                        format!(
                            "`remaining` has an entry for {n} members, but the rule's scope has \
                             {largest}; the full scope's counts are `allowed`, expected entries \
                             for {wanted} members"
                        ),
                    );
                }
                if !occur.contains(&n) {
                    return ck.at(
                        rem,
                        format!(
                            "`remaining` has an entry for {n} members, which cannot occur (only \
                             some members may be vacant); expected entries for {wanted} members"
                        ),
                    );
                }
                if counts.is_empty() {
                    return ck.at(
                        rem,
                        format!(
                            "`remaining` for {n} members is empty: no arrangement would be \
                             allowed; expected a list of counts"
                        ),
                    );
                }
                if let Some(c) = counts.iter().find(|&&c| c > n) {
                    return ck.at(
                        rem,
                        format!(
                            "`remaining` allows the count {c} with {n} members; expected counts \
                             from 0 to {n}"
                        ),
                    );
                }
            }
            if let Some(n) = occur.iter().find(|n| !rem.value.contains_key(n)) {
                return ck.at(
                    rem,
                    format!(
                        "`remaining` has no entry for {n} members, which occurs when members \
                         are vacant; expected entries for {wanted} members"
                    ),
                );
            }
            rule.remaining = rem.value.clone();
        }
        Ok(())
    }
}

impl Rule {
    /// Whether the values of the occurrences in scope satisfy the rule when the occurrences
    /// marked `vacant` are empty: with none vacant this is [`Rule::allows`]; with all vacant
    /// it is true (nothing is left to restrict); otherwise the counts of `remaining` for the
    /// number of members left apply to them. `None` when `remaining` has no entry for that
    /// number (a rule cut by an open boundary as well).
    pub fn allows_with_vacancies(
        &self,
        vacant: &[bool],
        inward_states: &[u32],
        values: &[u32],
    ) -> Option<bool> {
        let left = vacant.iter().filter(|v| !**v).count();
        if left == vacant.len() {
            return Some(self.allows(inward_states, values));
        }
        if left == 0 {
            return Some(true);
        }
        let counts = self.remaining.get(&(left as u32))?;
        let n = vacant
            .iter()
            .zip(inward_states.iter().zip(values))
            .filter(|(vac, (s, v))| {
                !**vac
                    && match self.kind {
                        RuleKind::Inward => *s == *v,
                        _ => **v == 1,
                    }
            })
            .count() as u32;
        Some(counts.contains(&n))
    }
}

#[cfg(test)]
mod tests {
    use crate::Lattice;
    use crate::error::Error;

    const SPIN_ICE: &str = include_str!("../../lattices/spin-ice.yaml");

    const REMAINING: &str = "remaining: {3: [1, 2], 2: [1], 1: [0, 1]}";

    /// Spin ice with the two rules given `rules` (one line each) and `vacancies`.
    fn diluted(rules: [&str; 2], vacancies: &str) -> String {
        let head = SPIN_ICE.split("rules:\n").next().unwrap();
        format!(
            "{head}rules:\n  - {}\n  - {}\nformula_unit: {{name: Dy, per: sites}}\nvacancies:\n{vacancies}",
            rules[0], rules[1]
        )
    }

    fn rules_with(remaining: &str) -> [String; 2] {
        [
            format!("{{kind: inward, at: up, allowed: [2], {remaining}}}"),
            format!("{{kind: inward, at: down, allowed: [2], {REMAINING}}}"),
        ]
    }

    fn refusal(text: &str) -> (usize, usize, String) {
        match Lattice::from_yaml(text, "diluted.yaml") {
            Err(Error::Invalid {
                position, message, ..
            }) => (position.line as usize, position.column as usize, message),
            Err(e) => panic!("{e}"),
            Ok(_) => panic!("accepted:\n{text}"),
        }
    }

    fn line_of(text: &str, needle: &str) -> usize {
        text.lines().position(|l| l.contains(needle)).unwrap() + 1
    }

    #[test]
    fn issue13_vacancies_are_resolved_by_species() {
        let r = rules_with(REMAINING);
        let text = diluted([&r[0], &r[1]], "  - {site: Dy, fraction: 0.1}\n");
        let l = Lattice::from_yaml(&text, "diluted.yaml").unwrap();
        assert_eq!(l.crystal.vacancies.len(), 4);
        assert!(l.crystal.is_diluted());
        assert_eq!(l.crystal.rules[0].remaining.len(), 3);
        // x = 0 is accepted and dilutes nothing.
        let text = diluted([&r[0], &r[1]], "  - {site: Dy, fraction: 0}\n");
        assert!(
            !Lattice::from_yaml(&text, "d.yaml")
                .unwrap()
                .crystal
                .is_diluted()
        );
    }

    #[test]
    fn issue13_fractions_out_of_range_are_refused_on_both_sides() {
        let r = rules_with(REMAINING);
        for (x, ok) in [
            ("0", true),
            ("-0.01", false),
            ("0.99", true),
            ("1", false),
            (".nan", false),
        ] {
            let text = diluted(
                [&r[0], &r[1]],
                &format!("  - {{site: Dy, fraction: {x}}}\n"),
            );
            let result = Lattice::from_yaml(&text, "d.yaml");
            assert_eq!(result.is_ok(), ok, "{x}");
            if !ok {
                let (l, c, m) = refusal(&text);
                assert_eq!(l, text.lines().count(), "{m}");
                assert_eq!(c, 26, "{m}"); // the fraction
                assert!(m.contains("expected a probability from 0"), "{m}");
            }
        }
    }

    #[test]
    fn issue13_bad_vacancy_entries_are_refused_where_they_are_written() {
        let r = rules_with(REMAINING);
        let text = diluted([&r[0], &r[1]], "  - {site: Ti, fraction: 0.1}\n");
        let (l, c, m) = refusal(&text);
        assert_eq!((l, c), (text.lines().count(), 12), "{m}");
        assert!(m.contains("'Ti', which is no site id or species"), "{m}");
        let text = diluted(
            [&r[0], &r[1]],
            "  - {site: Dy, fraction: 0.1}\n  - {site: M1, fraction: 0.2}\n",
        );
        let (l, _, m) = refusal(&text);
        assert_eq!(l, text.lines().count(), "{m}");
        assert!(m.contains("earlier entry"), "{m}");
    }

    #[test]
    fn issue13_remaining_counts_are_required_and_checked() {
        let v = "  - {site: Dy, fraction: 0.1}\n";
        // Missing altogether: refused at the rule's kind, naming what is expected.
        let r = rules_with(REMAINING);
        let bare = "{kind: inward, at: up, allowed: [2]}";
        let text = diluted([bare, &r[1]], v);
        let (l, _, m) = refusal(&text);
        assert_eq!(l, line_of(&text, "at: up"));
        assert!(
            m.contains("expected `remaining:`") && m.contains("for 1, 2, 3 remaining"),
            "{m}"
        );
        // One count missing.
        let r = rules_with("remaining: {3: [1, 2], 2: [1]}");
        let text = diluted([&r[0], &r[1]], v);
        let (l, c, m) = refusal(&text);
        assert_eq!(l, line_of(&text, "at: up"));
        assert!(c > 40, "{m}"); // the `remaining` map, not the rule
        assert!(m.contains("no entry for 1 members"), "{m}");
        // Entries for 0 and for the full scope, an impossible count, an empty list.
        for (rem, words) in [
            (
                "remaining: {4: [2], 3: [1, 2], 2: [1], 1: [0, 1]}",
                "full scope",
            ),
            (
                "remaining: {3: [1, 2], 2: [1], 1: [0, 1], 0: [0]}",
                "0 members",
            ),
            (
                "remaining: {3: [1, 4], 2: [1], 1: [0, 1]}",
                "count 4 with 3",
            ),
            ("remaining: {3: [], 2: [1], 1: [0, 1]}", "is empty"),
        ] {
            let r = rules_with(rem);
            let text = diluted([&r[0], &r[1]], v);
            let (_, _, m) = refusal(&text);
            assert!(m.contains(words), "{rem}: {m}");
        }
        // Only M0 may be vacant: 3 members are the only smaller number that can remain.
        let r = rules_with(REMAINING);
        let text = diluted([&r[0], &r[1]], "  - {site: M0, fraction: 0.1}\n");
        let (_, _, m) = refusal(&text);
        assert!(
            m.contains("cannot occur") && m.contains("for 3 members"),
            "{m}"
        );
        let r = [
            "{kind: inward, at: up, allowed: [2], remaining: {3: [1, 2]}}",
            "{kind: inward, at: down, allowed: [2], remaining: {3: [1, 2]}}",
        ];
        let text = diluted(r, "  - {site: M0, fraction: 0.1}\n");
        assert!(Lattice::from_yaml(&text, "d.yaml").is_ok());
    }

    #[test]
    fn issue13_remaining_on_a_rule_without_vacancies_is_refused() {
        let square = include_str!("../../lattices/square-ice.yaml");
        let text = square.replace("allowed: [2]}", "allowed: [2], remaining: {1: [0, 1]}}");
        assert_ne!(text, square);
        let (_, _, m) = refusal(&text);
        assert!(m.contains("reads no site listed in `vacancies`"), "{m}");
    }
}
