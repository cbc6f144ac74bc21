//! Necessary conditions on the keys at a column boundary, from the constraints that have
//! read some boundary fields ([`local_filters`]).
//!
//! # Method
//!
//! A key that a constraint still waiting for later variables cannot complete has no
//! successor; a key whose fields a completed constraint could not have produced has no
//! predecessor; neither lies on a cycle of T, so neither is kept. Each filter is the
//! projection of a table onto the boundary fields read, as a bit set indexed like a check
//! ([`Index`]).
//!
//! # Complexity
//!
//! Building: one pass over every template table (up to [`FILTER_TABLE_MAX`] assignments)
//! per column offset. Testing a key: one look-up per filter.

use std::collections::HashMap;

use super::column::Column;
use super::geometry::Template;
use crate::counters::frontier::check::{Index, bit};
use crate::counters::frontier::layout::width as field_width;
use crate::model::Table;

/// A necessary condition on a boundary key: a constraint that has read some boundary
/// fields and still waits for variables of later columns must allow the values read.
#[derive(Clone, Debug)]
pub(super) struct Filter {
    /// The boundary fields read, as a mixed-radix index.
    pub fields: Index,
    /// Allowed patterns of those fields, as bits.
    pub allowed: Vec<u64>,
}

impl Filter {
    #[inline]
    pub fn allows(&self, key: u64) -> bool {
        bit(&self.allowed, self.fields.of(key))
    }
}

impl Column {
    /// Whether a boundary key can lie on a cycle: every constraint that has read some of its
    /// fields allows their values (see [`local_filters`]); a key that fails has no
    /// successor or no predecessor.
    #[inline]
    pub(super) fn feasible(&self, key: u64) -> bool {
        self.filters.iter().all(|f| f.allows(key))
    }
}

/// Largest table (assignments) projected onto its boundary fields for a [`Filter`].
const FILTER_TABLE_MAX: u64 = 1 << 16;

/// The filters of a column layout: for every template constraint and every instance of it
/// that has read some boundary fields — one that completes e ≥ 1 columns after the
/// boundary and waits for later variables, or one that has completed but whose variables
/// are partly still on the boundary — the projection of its table onto those fields (of
/// age D − d − e + 1 for an entry at column offset d of a constraint of depth D). A key
/// outside an open constraint's projection has no completion (no successor); one outside
/// a completed constraint's projection has no past (no predecessor); neither lies on a
/// cycle. Projections that allow every pattern are dropped, so rules whose partial reads
/// never rule anything out (ice rules, hard-core exclusion) have none. Example: one dimer
/// at a honeycomb vertex whose two bonds in the finished column are both boundary fields
/// forbids both being occupied.
pub(super) fn local_filters(
    templates: &[Template],
    tables: &[Table],
    states: &[u32],
    canonical: &HashMap<(usize, usize), u32>,
) -> Vec<Filter> {
    let mut out: Vec<Filter> = Vec::new();
    // (fields, allowed patterns) of the filters kept, to drop repeats.
    type Seen = (Vec<(u32, u64, u64)>, Vec<u64>);
    let mut seen: std::collections::HashSet<Seen> = Default::default();
    let max_age = canonical.keys().map(|k| k.1).max().unwrap_or(0);
    for t in templates {
        let table = &tables[t.table];
        if table.size > FILTER_TABLE_MAX {
            continue;
        }
        // The instance that completes e columns after the boundary (e ≤ 0: before it); an
        // entry at column offset d sits at age D − d − e + 1 when that is at least 1.
        let depth = t.depth as i64;
        for e in (1 - max_age as i64)..=depth {
            let mut known = Vec::new();
            let mut fields = Vec::new();
            let mut size = 1u64;
            let mut ok = true;
            for (i, &(k, d)) in t.entries.iter().enumerate() {
                let age = depth - d as i64 - e + 1;
                if age < 1 {
                    continue;
                }
                match canonical.get(&(k, age as usize)) {
                    Some(&off) => {
                        known.push(i);
                        fields.push((off, (1u64 << field_width(states[k])) - 1, size));
                        size *= states[k] as u64;
                    }
                    // Forgotten already (the instance has completed): projected out.
                    None if e <= 0 => {}
                    None => ok = false,
                }
            }
            if !ok || known.len() < if e <= 0 { 2 } else { 1 } {
                continue;
            }
            let mut allowed = vec![0u64; size.div_ceil(64) as usize];
            for index in 0..table.size {
                if !table.allows(index) {
                    continue;
                }
                // Table index: mixed radix over the scope, first variable fastest.
                let mut rest = index;
                let mut projected = 0u64;
                let mut j = 0;
                for (i, &q) in table.radices.iter().enumerate() {
                    let value = rest % q as u64;
                    rest /= q as u64;
                    if j < known.len() && known[j] == i {
                        projected += value * fields[j].2;
                        j += 1;
                    }
                }
                allowed[(projected >> 6) as usize] |= 1 << (projected & 63);
            }
            let every = (0..size).all(|p| (allowed[(p >> 6) as usize] >> (p & 63)) & 1 == 1);
            if every || !seen.insert((fields.clone(), allowed.clone())) {
                continue;
            }
            out.push(Filter {
                fields: Index(fields),
                allowed,
            });
        }
    }
    out
}
