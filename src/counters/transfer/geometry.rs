//! Where things sit in a strip: the column and the *kind* (place within a column) of every
//! variable, the template constraints of one column, and the order in which a column adds
//! its variables.
//!
//! # Method
//!
//! Everything is read from the model's provenance ([`Origin`] of the variables, the rule
//! instance and anchoring cell of the constraints): a variable belongs to the column of
//! its cell (the `from` cell of a bond), and its kind is its (cell across, site or bond)
//! numbered across the strip, the second transverse axis the slower one. A constraint's
//! scope variables sit within `reach` columns of its anchoring cell, and the cluster is
//! 4·reach + 4 columns long, so their signed column offsets from the anchor are
//! unambiguous: the constraint is assigned to its first column, and its translate one
//! column on is the same rule instance anchored one cell further along the strip.
//!
//! # Complexity
//!
//! Linear in the model size (sorting the kinds aside).

use std::collections::HashMap;

use super::StripConfig;
use crate::model::{Model, Origin};

/// The cell axes across a strip along `along`, in increasing order.
pub(super) fn transverse_axes(along: usize, dimensions: usize) -> Vec<usize> {
    (0..dimensions).filter(|&a| a != along).collect()
}

/// Cells along the second transverse axis (1 for a two-dimensional crystal; the width
/// unless [`StripConfig::depth`] says otherwise).
pub(super) fn section_depth(dimensions: usize, width: usize, config: &StripConfig) -> usize {
    if dimensions == 3 {
        config.depth.unwrap_or(width)
    } else {
        1
    }
}

/// Where the model's variables sit in a strip.
pub(super) struct Placement {
    /// Per variable, its column along the strip.
    pub columns: Vec<usize>,
    /// Per variable, its kind within a column.
    pub kinds: Vec<usize>,
    /// Per kind, its cell across the strip (second coordinate 0 in two dimensions).
    pub across: Vec<[usize; 2]>,
}

/// Where each model variable of a strip cluster along `along` sits (see [`Placement`]).
/// Kinds are numbered in the order of (cell across, the second transverse axis first;
/// site before bond; crystal index).
pub(super) fn placement(model: &Model, along: usize, transverse: &[usize]) -> Placement {
    // (cell across, slower axis first; is bond; crystal index) per variable.
    type Id = ([usize; 2], bool, usize);
    let id = |origin: &Origin| -> Id {
        let cell = origin.cell();
        let across = [
            transverse.get(1).map_or(0, |&t| cell[t]),
            cell[transverse[0]],
        ];
        match *origin {
            Origin::Site { site, .. } => (across, false, site),
            Origin::Bond { bond, .. } => (across, true, bond),
        }
    };
    let ids: Vec<Id> = model.variables.iter().map(|v| id(&v.origin)).collect();
    // Every column holds the same kinds (the cluster is periodic along the strip).
    let mut distinct = ids.clone();
    distinct.sort_unstable();
    distinct.dedup();
    let kind: HashMap<Id, usize> = distinct.iter().enumerate().map(|(k, &i)| (i, k)).collect();
    Placement {
        columns: model
            .variables
            .iter()
            .map(|v| v.origin.cell()[along])
            .collect(),
        kinds: ids.iter().map(|i| kind[i]).collect(),
        across: distinct.iter().map(|d| [d.0[1], d.0[0]]).collect(),
    }
}

/// A constraint of one column's template: the constraints whose first column is 0.
pub(super) struct Template {
    /// (kind, column offset) per scope variable, in table order.
    pub entries: Vec<(usize, usize)>,
    pub table: usize,
    /// Columns between the first and the last column the constraint reads.
    pub depth: usize,
    /// The kind, read in the last column, after which the constraint is checked.
    pub last: usize,
    /// Its index in the model.
    pub constraint: usize,
    /// The model index of its translate one column on (the same rule instance anchored
    /// one cell further along the strip).
    pub next: Option<usize>,
}

/// The template constraints of a strip cluster `n` columns long along `along` (n larger
/// than twice the reach of any constraint, so that no constraint wraps onto itself).
pub(super) fn templates(
    model: &Model,
    placement: &Placement,
    kinds: &[usize],
    along: usize,
    n: usize,
) -> Vec<Template> {
    let columns = &placement.columns;
    // Constraints by rule instance and anchoring cell, to find translates.
    let by_instance: HashMap<(usize, usize, [usize; 3]), usize> = model
        .constraints
        .iter()
        .enumerate()
        .map(|(i, c)| ((c.rule, c.instance, c.cell), i))
        .collect();
    let mut out = Vec::new();
    for (index, con) in model.constraints.iter().enumerate() {
        let anchor = con.cell[along];
        // Signed column offsets of the scope from the anchor: within ±reach < n/2.
        let offsets: Vec<i64> = con
            .scope
            .iter()
            .map(|&v| {
                let d = (columns[v] + n - anchor) % n;
                if 2 * d > n {
                    d as i64 - n as i64
                } else {
                    d as i64
                }
            })
            .collect();
        let low = *offsets.iter().min().expect("constraints have a scope");
        let high = *offsets.iter().max().expect("constraints have a scope");
        let span = (high - low) as usize;
        debug_assert!(2 * span < n, "the strip cluster is long enough");
        let first = (anchor as i64 + low).rem_euclid(n as i64);
        if first != 0 {
            continue;
        }
        let entries: Vec<(usize, usize)> = con
            .scope
            .iter()
            .zip(&offsets)
            .map(|(&v, &d)| (kinds[v], (d - low) as usize))
            .collect();
        let last = entries
            .iter()
            .filter(|e| e.1 == span)
            .map(|e| e.0)
            .max()
            .expect("some entry is in the last column");
        let mut cell = con.cell;
        cell[along] = (anchor + 1) % n;
        out.push(Template {
            entries,
            table: con.table,
            depth: span,
            last,
            constraint: index,
            next: by_instance.get(&(con.rule, con.instance, cell)).copied(),
        });
    }
    out
}

/// The order in which a column adds its variables, as a new index for every kind.
///
/// The constraints are taken across the strip in the order of where they sit (on a
/// cylinder, the start of the shortest arc of cells holding the variables they read in
/// the newest column), and each adds the variables of the newest column it reads that
/// are not yet added; variables no constraint reads in the newest column come at their
/// own cell. Sorting the variables by their own cell instead would, on a cylinder, keep
/// the constraint at the seam open for the whole column (for square ice that makes the
/// frontier about four times larger).
pub(super) fn sweep_order(
    templates: &[Template],
    across: &[[usize; 2]],
    size: [usize; 2],
    periodic: bool,
) -> Vec<usize> {
    let m = across.len();
    // Where a set of cells sits along one transverse axis of `n` cells: the start of the
    // shortest arc holding them on a ring, the smallest on an open edge; and the arc length.
    let place1 = |cells: &[usize], n: usize| -> (usize, usize) {
        if !periodic {
            return (cells.iter().copied().min().unwrap_or(0), 0);
        }
        cells
            .iter()
            .map(|&s| (s, cells.iter().map(|&c| (c + n - s) % n).max().unwrap_or(0)))
            .min_by_key(|&(s, span)| (span, s))
            .unwrap_or((0, 0))
    };
    // The second transverse axis is the slower one (the kinds are numbered that way).
    let place = |cells: &[[usize; 2]]| -> (usize, usize) {
        let (a0, s0) = place1(&cells.iter().map(|c| c[0]).collect::<Vec<_>>(), size[0]);
        let (a1, s1) = place1(&cells.iter().map(|c| c[1]).collect::<Vec<_>>(), size[1]);
        (a1 * size[0] + a0, s1 * size[0] + s0)
    };
    // (place across, arc length, 0 for a constraint / 1 for a lone variable, index, kinds)
    let mut items: Vec<(usize, usize, usize, usize, Vec<usize>)> = Vec::new();
    let mut read = vec![false; m];
    for (i, t) in templates.iter().enumerate() {
        let mut newest: Vec<usize> = t
            .entries
            .iter()
            .filter(|e| e.1 == t.depth)
            .map(|e| e.0)
            .collect();
        newest.sort_unstable();
        newest.dedup();
        for &k in &newest {
            read[k] = true;
        }
        let cells: Vec<[usize; 2]> = newest.iter().map(|&k| across[k]).collect();
        let (at, span) = place(&cells);
        items.push((at, span, 0, i, newest));
    }
    for k in (0..m).filter(|&k| !read[k]) {
        items.push((across[k][1] * size[0] + across[k][0], 0, 1, k, vec![k]));
    }
    items.sort_unstable();
    let mut rank = vec![usize::MAX; m];
    let mut next = 0;
    for item in &items {
        for &k in &item.4 {
            if rank[k] == usize::MAX {
                rank[k] = next;
                next += 1;
            }
        }
    }
    rank
}
