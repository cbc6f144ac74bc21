//! A constraint compiled against a key layout: which of a step's value patterns its table
//! allows, given the values already on the frontier.
//!
//! A constraint's table is indexed in mixed radix over its scope (first variable fastest,
//! [`crate::model::Table`]). A check splits the index into the part read from the key
//! (fields (offset, mask, stride) of the scope variables already on the frontier) and, per
//! value pattern of the variables the step adds, the part those add. For a key it forms
//! the first part once and reads the table bit of every pattern: the result is the bit set
//! of the patterns that survive, so no candidate is written only to be thrown away.

use std::sync::Arc;

/// Fields of a key read as one mixed-radix index: (offset, mask, stride) per field.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub(crate) struct Index(pub Vec<(u32, u64, u64)>);

impl Index {
    /// The index of a key.
    #[inline]
    pub fn of(&self, key: u64) -> u64 {
        let mut index = 0u64;
        for &(off, mask, stride) in &self.0 {
            index += ((key >> off) & mask) * stride;
        }
        index
    }
}

/// Whether bit `index` of a bit set is set.
#[inline]
pub(crate) fn bit(bits: &[u64], index: u64) -> bool {
    (bits[(index >> 6) as usize] >> (index & 63)) & 1 == 1
}

/// A constraint compiled for one step.
#[derive(Clone, Debug)]
pub(crate) struct Check {
    /// The scope variables on the frontier before the step, read from the input key.
    before: Index,
    /// Per value pattern of the step, the index part of the variables it adds.
    added: Vec<u64>,
    /// The table's allowed assignments, as bits.
    table: Arc<[u64]>,
}

impl Check {
    /// A check from the index of the variables already on the frontier and the index part
    /// of every pattern.
    pub fn new(before: Index, added: Vec<u64>, table: Arc<[u64]>) -> Check {
        Check {
            before,
            added,
            table,
        }
    }

    /// The patterns (as a bit set over the step's patterns) the table allows after `key`.
    #[inline]
    pub fn allowed(&self, key: u64) -> u64 {
        let index = self.before.of(key);
        let mut allowed = 0u64;
        for (p, &a) in self.added.iter().enumerate() {
            allowed |= u64::from(bit(&self.table, index + a)) << p;
        }
        allowed
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_check_reads_the_table_for_every_pattern() {
        // Two binary variables, not both 1 (bits 0b0111 over index x0 + 2 x1): x0 on the
        // frontier at bit 3, x1 added with patterns 0 and 1 (stride 2).
        let check = Check::new(Index(vec![(3, 1, 1)]), vec![0, 2], Arc::from(vec![0b0111]));
        assert_eq!(check.allowed(0), 0b11);
        assert_eq!(check.allowed(1 << 3), 0b01);
        assert_eq!(Index(vec![(0, 3, 1), (2, 1, 3)]).of(0b110), 5);
    }
}
