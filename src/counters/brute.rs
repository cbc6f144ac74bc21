//! Brute-force enumeration: the test oracle for tiny cells.
//!
//! Visits every assignment of every variable and checks every constraint. Time grows as
//! ∏ q_v; use only to check the other counters.

use crate::model::Model;

/// Largest number of assignments [`count`] agrees to visit.
pub const LIMIT: u128 = 1 << 28;

/// The number of assignments that satisfy every constraint, or `None` above [`LIMIT`].
pub fn count(model: &Model) -> Option<u128> {
    let total = model
        .variables
        .iter()
        .try_fold(1u128, |a, v| a.checked_mul(v.states as u128))?;
    if total > LIMIT {
        return None;
    }
    if model.contradiction.is_some() {
        return Some(0);
    }
    let n = model.variables.len();
    let mut values = vec![0u32; n];
    let mut found = 0u128;
    for _ in 0..total {
        let ok = model.constraints.iter().all(|c| {
            let t = &model.tables[c.table];
            let mut index = 0u64;
            let mut stride = 1u64;
            for (&v, &q) in c.scope.iter().zip(&t.radices) {
                index += values[v] as u64 * stride;
                stride *= q as u64;
            }
            t.allows(index)
        });
        if ok {
            found += 1;
        }
        // next assignment (odometer)
        for (v, var) in values.iter_mut().zip(&model.variables) {
            *v += 1;
            if *v < var.states {
                break;
            }
            *v = 0;
        }
    }
    Some(found)
}
