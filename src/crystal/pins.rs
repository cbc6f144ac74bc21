//! `pinned:` entries resolved against the crystal: which sites or bonds hold their variable
//! at one state, checked for names, variable kinds, state ranges and contradictions.

use std::collections::BTreeMap;

use super::Crystal;
use super::types::{Pin, Target};
use super::validate::Checker;
use crate::error::Result;
use crate::spec::PinSpec;

impl Crystal {
    /// Resolve `pinned:` entries into [`Pin`]s, one per site or bond of the unit cell,
    /// sorted; the same entity named twice must name the same state.
    pub(super) fn validate_pins(&self, specs: &[PinSpec], ck: &Checker) -> Result<Vec<Pin>> {
        let mut pins: BTreeMap<(u8, usize), u32> = BTreeMap::new();
        for p in specs {
            let (target, name) = super::weights::one_of(&p.site, &p.bond, "pinned", &p.state, ck)?;
            let kind = self.kind_on(target, name, "pinned", ck)?;
            let q = kind.states();
            if p.state.value >= q {
                return ck.at(
                    &p.state,
                    format!(
                        "state {} is out of range: {} variables have states 0 to {}",
                        p.state.value,
                        kind.word(),
                        q - 1
                    ),
                );
            }
            let indices = self.entities_named(target, name, "pinned", ck)?;
            let key_kind = match target {
                Target::Sites => 0,
                Target::Bonds => 1,
            };
            for i in indices {
                if let Some(&other) = pins.get(&(key_kind, i))
                    && other != p.state.value
                {
                    return ck.at(
                        &p.state,
                        format!(
                            "'{}' is pinned at state {other} by an earlier entry and at state {} here",
                            name.value, p.state.value
                        ),
                    );
                }
                pins.insert((key_kind, i), p.state.value);
            }
        }
        Ok(pins
            .into_iter()
            .map(|((k, index), state)| Pin {
                target: if k == 0 { Target::Sites } else { Target::Bonds },
                index,
                state,
            })
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use crate::Lattice;
    use crate::error::Error;

    const SQUARE_ICE: &str = include_str!("../../lattices/square-ice.yaml");

    /// The square-ice file with `pinned:` entries appended; the error's line, column and
    /// words when it is refused.
    fn refusal(pins: &str) -> (usize, usize, String) {
        let text = format!("{SQUARE_ICE}pinned:\n{pins}");
        match Lattice::from_yaml(&text, "held.yaml") {
            Err(Error::Invalid {
                position, message, ..
            }) => (position.line as usize, position.column as usize, message),
            Err(e) => panic!("{e}"),
            Ok(_) => panic!("accepted: {pins}"),
        }
    }

    fn line_of_pins() -> usize {
        SQUARE_ICE.lines().count() + 2
    }

    #[test]
    fn pins_are_resolved_by_bond_id_and_sorted() {
        let text =
            format!("{SQUARE_ICE}pinned:\n  - {{bond: v, state: 1}}\n  - {{bond: h, state: 0}}\n");
        let l = Lattice::from_yaml(&text, "held.yaml").unwrap();
        let p: Vec<(usize, u32)> = l
            .crystal
            .pinned
            .iter()
            .map(|p| (p.index, p.state))
            .collect();
        assert_eq!(p, [(0, 0), (1, 1)]);
    }

    #[test]
    fn bad_pins_are_refused_where_they_are_written() {
        let line = line_of_pins();
        let (l, c, m) = refusal("  - {bond: w, state: 1}\n");
        assert_eq!((l, c), (line, 12), "{m}"); // 1-based: the w
        assert!(
            m.contains("'w'") && m.contains("no bond id or bond family"),
            "{m}"
        );
        let (l, c, m) = refusal("  - {bond: v, state: 2}\n");
        assert_eq!((l, c), (line, 22), "{m}"); // the 2
        assert!(m.contains("states 0 to 1"), "{m}");
        let (l, _, m) = refusal("  - {site: O, state: 1}\n");
        assert_eq!(l, line);
        assert!(m.contains("no variables there"), "{m}");
        let (_, _, m) = refusal("  - {state: 1}\n");
        assert!(m.contains("needs `site: ID` or `bond: ID`"), "{m}");
        let (l, _, m) = refusal("  - {bond: v, state: 1}\n  - {bond: v, state: 0}\n");
        assert_eq!(l, line + 1);
        assert!(m.contains("state 1 by an earlier entry"), "{m}");
    }
}
