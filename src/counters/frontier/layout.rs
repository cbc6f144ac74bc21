//! Where the variables of a frontier sit in a packed `u64` key.
//!
//! A variable with q states takes a bit field of ⌈log₂ q⌉ bits ([`width`]) while it is on
//! the frontier. Two placements are in use, and they are the only difference between the
//! exact counter's keys and the transfer operator's:
//!
//! * [`Packing::Newest`] (the exact counter): the newest variable in the lowest bits, the
//!   others above it in the order they arrived; a step shifts the key up by the new field
//!   and squeezes the forgotten fields out ([`Forget::Squeeze`]). Keys stay as short as
//!   the frontier.
//! * [`Packing::Slots`] (the transfer operator): a variable keeps the field it was given
//!   on arrival — the lowest free bits that fit, after any fields placed beforehand — and
//!   a forgotten field is cleared ([`Forget::Mask`]) and free for the next variable. The
//!   fields that cross a column boundary can then sit at the same places after every
//!   column (the caller relabels them at the end of a column).
//!
//! Keys use at most 63 bits: `u64::MAX` marks an exhausted stream in the merge.

/// Bits a variable with `q` states occupies.
pub fn width(q: u32) -> u32 {
    32 - (q - 1).leading_zeros()
}

/// The mask of a field `width` bits wide at bit 0.
#[inline]
pub(crate) fn mask(width: u32) -> u64 {
    (1u64 << width) - 1
}

/// Largest number of key bits in use.
pub(crate) const MAX_BITS: u32 = 63;

/// How a [`Layout`] places fields.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Packing {
    /// Newest lowest, forgotten fields squeezed out.
    Newest,
    /// Fixed slots, first fit, forgotten fields cleared.
    Slots,
}

/// One variable's field.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Field {
    /// The caller's name for the variable.
    pub var: usize,
    /// Lowest bit.
    pub offset: u32,
    /// Bits.
    pub width: u32,
}

/// What forgetting does to a key.
#[derive(Clone, Debug)]
pub(crate) enum Forget {
    /// Move the runs of kept bits down: (source offset, mask, destination offset) per run.
    Squeeze(Vec<(u32, u64, u32)>),
    /// Clear the forgotten bits: the bits kept.
    Mask(u64),
}

impl Forget {
    /// Squeeze the runs of kept bits of `key` together.
    #[inline]
    pub fn squeeze(runs: &[(u32, u64, u32)], key: u64) -> u64 {
        runs.iter().fold(0, |acc, &(src, mask, dst)| {
            acc | (((key >> src) & mask) << dst)
        })
    }
}

/// The fields of the variables on a frontier.
#[derive(Clone, Debug)]
pub(crate) struct Layout {
    packing: Packing,
    /// The fields, lowest first under [`Packing::Newest`].
    fields: Vec<Field>,
}

impl Layout {
    /// An empty frontier placed newest lowest.
    pub fn newest() -> Layout {
        Layout {
            packing: Packing::Newest,
            fields: Vec::new(),
        }
    }

    /// A frontier in fixed slots, starting with fields placed by the caller.
    pub fn slots(placed: Vec<Field>) -> Layout {
        Layout {
            packing: Packing::Slots,
            fields: placed,
        }
    }

    /// The field of a variable on the frontier.
    pub fn field(&self, var: usize) -> Option<Field> {
        self.fields.iter().find(|f| f.var == var).copied()
    }

    /// Bits in use.
    pub fn occupied(&self) -> u64 {
        self.fields
            .iter()
            .fold(0, |a, f| a | (mask(f.width) << f.offset))
    }

    /// Bits from the lowest to the highest in use.
    pub fn bits(&self) -> u32 {
        64 - self.occupied().leading_zeros()
    }

    /// Bits the key moves up when a variable of this width arrives.
    pub fn shift(&self, width: u32) -> u32 {
        match self.packing {
            Packing::Newest => width,
            Packing::Slots => 0,
        }
    }

    /// Place a new variable and return its offset; `None` when it does not fit in
    /// [`MAX_BITS`].
    pub fn add(&mut self, var: usize, width: u32) -> Option<u32> {
        let offset = match self.packing {
            Packing::Newest => {
                for f in &mut self.fields {
                    f.offset += width;
                }
                self.fields.insert(
                    0,
                    Field {
                        var,
                        offset: 0,
                        width,
                    },
                );
                0
            }
            Packing::Slots => {
                let used = self.occupied();
                let field = mask(width);
                let offset =
                    (0..=MAX_BITS.checked_sub(width)?).find(|&o| used & (field << o) == 0)?;
                self.fields.push(Field { var, offset, width });
                offset
            }
        };
        (self.bits() <= MAX_BITS).then_some(offset)
    }

    /// Take variables off the frontier: their fields (before), and what forgetting does to
    /// a key.
    pub fn forget(&mut self, vars: &[usize]) -> (Vec<Field>, Forget) {
        let gone: Vec<Field> = vars.iter().filter_map(|&v| self.field(v)).collect();
        let forget = match self.packing {
            Packing::Slots => {
                let cleared = gone.iter().fold(0, |a, f| a | (mask(f.width) << f.offset));
                Forget::Mask(!cleared)
            }
            Packing::Newest => {
                // Runs of kept fields, packed down.
                let mut runs: Vec<(u32, u64, u32)> = Vec::new();
                let mut dst = 0u32;
                for f in &self.fields {
                    if vars.contains(&f.var) {
                        continue;
                    }
                    match runs.last_mut() {
                        Some((src, m, d))
                            if *src + (64 - m.leading_zeros()) == f.offset
                                && *d + (64 - m.leading_zeros()) == dst =>
                        {
                            *m = (*m << f.width) | mask(f.width);
                        }
                        _ => runs.push((f.offset, mask(f.width), dst)),
                    }
                    dst += f.width;
                }
                Forget::Squeeze(runs)
            }
        };
        self.fields.retain(|f| !vars.contains(&f.var));
        if self.packing == Packing::Newest {
            let mut at = 0;
            for f in &mut self.fields {
                f.offset = at;
                at += f.width;
            }
        }
        (gone, forget)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_widths() {
        assert_eq!([2, 3, 4, 5, 8, 9].map(width), [1, 2, 2, 3, 3, 4]);
    }

    #[test]
    fn newest_lowest_squeezes_what_leaves() {
        let mut l = Layout::newest();
        assert_eq!(l.add(0, 1), Some(0));
        assert_eq!(l.add(1, 2), Some(0));
        assert_eq!(l.add(2, 1), Some(0));
        // Fields: 2 at bit 0, 1 at bits 1–2, 0 at bit 3.
        assert_eq!(l.field(0).unwrap().offset, 3);
        let (gone, forget) = l.forget(&[1]);
        assert_eq!(
            gone,
            vec![Field {
                var: 1,
                offset: 1,
                width: 2
            }]
        );
        let Forget::Squeeze(runs) = forget else {
            panic!("squeezes")
        };
        assert_eq!(Forget::squeeze(&runs, 0b1101), 0b11);
        assert_eq!(l.field(0).unwrap().offset, 1);
    }

    #[test]
    fn slots_fill_the_lowest_free_bits() {
        let mut l = Layout::slots(vec![Field {
            var: 9,
            offset: 0,
            width: 2,
        }]);
        assert_eq!(l.add(0, 1), Some(2));
        let (_, forget) = l.forget(&[9]);
        assert!(matches!(forget, Forget::Mask(m) if m == !0b11));
        assert_eq!(l.add(1, 2), Some(0));
        assert_eq!(l.add(2, 62), None);
    }
}
