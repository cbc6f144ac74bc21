//! Transfer matrices on strips and cylinders of a two-dimensional crystal, and on thin
//! prisms of a three-dimensional one.
//!
//! # What it computes
//!
//! For a strip `width` cells wide (transverse axis periodic — a cylinder — or open) and
//! infinitely long along one cell axis — or, for a three-dimensional crystal, a prism
//! whose section is `width` × `depth` cells across the two other axes
//! ([`StripConfig::depth`]) — the largest eigenvalue λ of the column-to-column transfer
//! operator T. The number of arrangements of a strip of M columns grows like λ^M,
//! so ln W per formula unit of the infinite strip is ln λ / (formula units per column).
//! [`Column::trace_power`] gives the exact integer trace of T^L, which is the exact count of
//! the `width × L` torus.
//!
//! # Method
//!
//! The operator is built from the [`Model`] of a periodic `width × n` cluster (n = 4·reach + 3
//! columns, so that no constraint wraps onto itself along the strip): every variable belongs
//! to the column of its cell, every constraint is assigned to the first column it reads, and
//! the constraints assigned to column 0 — with their compiled tables — are the template of
//! one column. One column is then applied as a sequence of frontier steps, exactly as in the
//! exact counter ([`super::exact`]): add one variable of the new column, check the
//! constraints whose last variable it is, forget the variables that no unfinished constraint
//! reads. The variables are added in the order the constraints across the strip need them
//! (`sweep_order`), and a variable that completes no constraint is added in one step with
//! the next one, so that no step holds states that the next check would discard. States
//! are frontier assignments packed into `u64` bit fields; at the end of a column the fields
//! are relabelled by age so that the state space repeats.
//!
//! The operator is never stored as a matrix. Once per width a symbolic pass finds the set
//! K of frontier states reachable from an open left end (closed under T) and compiles, for
//! every step of the column, the rows ([`rows`]): for each output state the indices of its
//! input states (found by merging sorted streams of transitions, never by sorting).
//! Applying T is then `m` gather passes over flat `f64` arrays (m = variables per column),
//! with no hash map or search in the hot loop.
//!
//! Two reductions shrink K (both on by default, [`Sectors::Full`] turns them off):
//!
//! * **Charge sectors** ([`sector`]): when the constraint tables imply an additive quantity
//!   that T conserves (the arrow flux of ice rules; the sublattice balance of dimers, which
//!   T negates), K keeps one sector, the one holding the most boundary assignments (zero
//!   flux for even square-ice widths: C(W, W/2) states instead of 2^W). Every image is
//!   checked to keep the charge.
//! * **Reversal pairs**: when every frontier variable is binary, every table is closed under
//!   complementing its scope and the sector maps to itself, a state and its complement are
//!   one state (the largest eigenvector is symmetric under the reversal); this halves K.
//!
//! The eigenvalue: a start vector from restarted Arnoldi (`krylov`: the Ritz value of
//! largest real part, so never −λ), then power iteration on the shifted operator T + σλ̃ (σ = 1/4, λ̃
//! the current estimate) with L1-normalised vectors, started on the recurrent states R (the
//! states with an arbitrarily long past; T maps R into itself, every other state is
//! transient; R empty means that no arrangement continues for ever, an error). The shift
//! removes periodic spectra (an eigenvalue −λ from a sublattice structure would otherwise
//! make the iteration oscillate for ever): T + σλ̃ has the same leading eigenvector and
//! every other eigenvalue strictly smaller in modulus. Iteration stops when the ratios
//! (Tx)_i/x_i over the states carrying at least 1e-8 of the largest component (the support
//! F; subdominant flux sectors decay below it) agree to the tolerance, and fails with
//! [`Error::NotConverged`] at the iteration cap ([`Error::Deadline`] at the deadline). The
//! reported Collatz–Wielandt bracket is min_F (T x_F)_i/x_i ≤ λ ≤ max_R (Tx)_i/x_i, with
//! x_F the iterate restricted to F: the lower bound always holds, the upper one whenever x
//! is positive on R (`certified`). λ is the midpoint of the converged ratios.
//!
//! # Arguments and returns
//!
//! [`Column::new`] takes the crystal, the width and a [`StripConfig`] (strip axis, transverse
//! boundary, state budget); [`Column::largest_eigenvalue`] returns a [`StripResult`] with
//! ln λ, the bracket, ln W per formula unit, the number of states and iterations.
//! [`strip`] does both.
//!
//! # Complexity
//!
//! Memory O(Σ_steps S_t · q_t) 4-byte indices plus about 14 f64 vectors of length max S_t
//! (the Arnoldi basis); time per application O(Σ_steps S_t · q_t), with S_t the number of
//! frontier states at step t. For a sweep across a column S_t ≤ q^(width · depth + 1), much
//! less under restrictive rules and sectors (C(W, W/2)/2 at a square-ice boundary for even
//! W and C(W+2, W/2+1)/2, about 3.8 times that, inside a column; about 1.618^W for hard
//! squares). Building is O(Σ_t S_t q_t · streams) plus one pass over the full boundary
//! space from the open end.
//!
//! # Reference
//!
//! The transfer-matrix method as used for the ice model by Lieb 1967 (Phys. Rev. 162, 162);
//! the Collatz–Wielandt bounds for nonnegative matrices (Collatz 1942; Wielandt 1950);
//! the frontier (one variable at a time) form as in the exact counter.

use std::collections::HashMap;
use std::time::Instant;

use num_bigint::BigUint;
use rayon::prelude::*;

use super::order::width as field_width;
use crate::cluster::{Cells, Cluster};
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::model::{Model, Table};
use rows::{CHUNK, Rows};

mod dominant;
mod krylov;
mod rows;
pub mod sector;
mod series;
pub mod torus;

pub(crate) use series::Runner;
pub use series::{Need, Stopped, StripRun, StripSeries, count, from_widths, run, strip};

/// Options of a strip computation.
#[derive(Clone, Debug)]
pub struct StripConfig {
    /// Cell axis along the strip (0 = a, 1 = b, 2 = c); the other axes are transverse.
    pub along: usize,
    /// Three-dimensional crystals: cells along the second transverse axis (the first has
    /// the width); `None` makes the section square, width × width.
    pub depth: Option<usize>,
    /// Periodic (a cylinder) or open transverse boundaries.
    pub periodic: bool,
    /// Largest number of frontier states at any step.
    pub max_states: usize,
    /// Relative width of the Collatz–Wielandt bracket at which iteration stops.
    pub tolerance: f64,
    /// Iteration cap.
    pub max_iterations: usize,
    /// Filled from the [`crate::context::Context`] by [`count`] and [`run`] (whatever is
    /// set here is replaced): stop with [`Error::Deadline`] after this instant.
    #[doc(hidden)]
    pub deadline: Option<Instant>,
    /// Which states the operator acts on: one charge sector or all.
    pub sectors: Sectors,
    /// Filled from the [`crate::context::Context`] by [`count`] and [`run`]: stop with
    /// [`Error::Interrupted`] once raised.
    #[doc(hidden)]
    pub interrupt: crate::context::Interrupt,
    /// The widths [`count`] and [`run`] compute, in this order.
    pub widths: Vec<usize>,
    /// The spacing of the widths used for the extrapolation (e.g. 3 for a three-sublattice
    /// structure, the families' period); `None` chooses it from the values.
    pub step: Option<usize>,
    /// How the values approach their limit ([`Scaling::Auto`] decides from the last
    /// differences).
    pub scaling: crate::counters::extrapolate::Scaling,
}

impl StripConfig {
    /// The same settings with the context's deadline and interrupt, which the operator
    /// watches.
    pub(crate) fn with_context(&self, context: &crate::context::Context) -> StripConfig {
        StripConfig {
            deadline: context.deadline,
            interrupt: context.interrupt.clone(),
            ..self.clone()
        }
    }
}

/// The state space of the operator when the rule conserves a charge across the column
/// (see [`sector`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Sectors {
    /// The sector that holds the most assignments of the boundary fields (the zero arrow
    /// flux of square ice on even widths); the full space when no charge is conserved.
    Largest,
    /// A given charge (states of other charges are dropped); the full space when no charge
    /// is conserved.
    Charge(i64),
    /// Every state (needed for torus traces, where all sectors count).
    Full,
}

impl Default for StripConfig {
    fn default() -> Self {
        StripConfig {
            along: 0,
            depth: None,
            periodic: true,
            max_states: 1 << 24,
            tolerance: 1e-12,
            max_iterations: 200_000,
            deadline: None,
            sectors: Sectors::Largest,
            interrupt: Default::default(),
            widths: (2..=12).collect(),
            step: None,
            scaling: crate::counters::extrapolate::Scaling::Auto,
        }
    }
}

/// The largest eigenvalue of one strip width.
#[derive(Clone, Debug)]
pub struct StripResult {
    /// Width in cells.
    pub width: usize,
    /// Frontier states at a column boundary (the dimension of T).
    pub states: usize,
    /// Of those, the states with an arbitrarily long past (the others are transient).
    pub recurrent_states: usize,
    /// Largest number of frontier states at any step of a column.
    pub peak_states: usize,
    /// Power iterations used.
    pub iterations: usize,
    /// ln λ (λ includes the factor of variables no rule reads).
    pub ln_lambda: f64,
    /// Collatz–Wielandt bracket of ln λ: (lower, upper). The lower bound is always
    /// rigorous; the upper bound is when `certified`.
    pub ln_bracket: (f64, f64),
    /// Whether the upper bound is certified (the iterate was positive on every recurrent
    /// state; components of fast-decaying sectors can underflow to zero).
    pub certified: bool,
    /// Formula units per column.
    pub units_per_column: f64,
    /// ln W per formula unit of the infinite strip.
    pub ln_w_per_unit: f64,
    /// Wall time in seconds (building the operator and iterating).
    pub seconds: f64,
    /// The charge of the sector the operator was restricted to, if any.
    pub sector: Option<i64>,
    /// Whether states were paired with their images under reversing every variable (the
    /// largest eigenvector is symmetric under it, so λ is that of the symmetric part).
    pub reversal: bool,
    /// Why the states kept hold the largest eigenvalue.
    pub basis: SectorBasis,
    /// Transitions (index-list entries) per application of T: with `peak_states`, what
    /// the memory grows with.
    pub transitions: usize,
    /// ln of the number of assignments of the boundary fields, an upper bound on the
    /// states of the full space (for bounds from torus counts).
    pub ln_boundary_space: f64,
    /// Columns the deepest constraint spans beyond its first: a periodic cell longer than
    /// this along the strip is counted exactly by the trace of Tᴸ.
    pub depth: usize,
}

/// Why the states a width kept carry its largest eigenvalue.
#[derive(Clone, Debug, PartialEq)]
pub enum SectorBasis {
    /// No charge sector was kept: the rule conserves none, or every state was asked for.
    Whole,
    /// The charge was given by the caller ([`Sectors::Charge`]); nothing was checked.
    Given,
    /// The full space was computed at this width: its largest eigenvector lies in this
    /// sector and the two eigenvalues agree (a [`crate::crosscheck::Route::FullSpace`]
    /// check).
    FullSpace,
    /// Computed at this width against the nearest charges on both sides, which gave
    /// smaller eigenvalues (a [`crate::crosscheck::Route::NeighbourSectors`] check).
    LocalMaximum,
    /// Not checked at this width (the full space and the neighbouring sectors are beyond
    /// the cost allowed for checks): the charge follows the rule found at the checked
    /// widths, the largest of which is given.
    Predicted {
        /// The largest width at which the sector was checked.
        checked_to: usize,
    },
}

/// A constraint of the template, compiled against the bit layout of its step.
#[derive(Clone, Debug)]
struct Check {
    /// (offset, mask, stride) per scope variable.
    fields: Vec<(u32, u64, u64)>,
    table: usize,
    /// Columns between the constraint's first column and the column it completes in.
    depth: usize,
}

/// One step of a column: add one variable (or a few, when the earlier ones complete no
/// constraint), check, forget.
#[derive(Clone, Debug)]
struct Step {
    /// Every assignment of the added variables, as bits at their fields.
    patterns: Vec<u64>,
    checks: Vec<Check>,
    keep: u64,
    /// The bits of every field on the frontier after the step (before relabelling).
    occupied: u64,
}

/// The compiled transfer operator of one column of a strip.
#[derive(Debug)]
pub struct Column {
    width: usize,
    steps: Vec<Step>,
    tables: Vec<Table>,
    /// (from offset, mask, to offset) of the fields that survive a column.
    relabel: Vec<(u32, u64, u32)>,
    /// Largest constraint depth: columns with an open left end before the steady state.
    depth: usize,
    /// ln of the product of the states of variables no constraint reads, per column.
    ln_free: f64,
    /// That product.
    free_states: u64,
    /// Formula units per column.
    units_per_column: f64,
    /// Frontier states at a column boundary, sorted.
    keys: Vec<u64>,
    /// Per step, the inputs of every output state (in increasing order, so sums do not
    /// depend on the number of threads).
    rows: Vec<Rows>,
    /// Per step: number of output states.
    sizes: Vec<usize>,
    /// Build time in seconds.
    build_seconds: f64,
    /// (offset, coefficient) of the boundary fields in the conserved charge (empty when the
    /// rule conserves none).
    charge: Vec<(u32, i64)>,
    /// The sector kept, if the state space is restricted to one.
    sector: Option<i64>,
    /// T maps charge q to `charge_sign`·q (−1 when the signs of the constraints alternate
    /// from column to column, as the checkerboard of dimers does).
    charge_sign: i64,
    /// The bits of the boundary fields.
    boundary_bits: u64,
    /// When every state is identified with its image under reversing every binary
    /// variable, the bits of the boundary fields (XOR with them is the reversal).
    flip: Option<u64>,
    /// Whether reversing every variable maps allowed columns to allowed columns (every
    /// frontier variable binary, every table closed under complements).
    reversible: bool,
    /// Necessary conditions on a boundary key: the constraints it has partly read.
    filters: Vec<Filter>,
    /// ln of the number of assignments of the boundary fields (an upper bound on the
    /// states of the full space).
    ln_boundary_space: f64,
}

/// Which boundary states a compiled column keeps.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Kept {
    /// Every state.
    Full,
    /// Every state, paired with its reversal when the rule allows (no charge conserved).
    Reduced,
    /// One charge sector (with −q when T maps q to −q), paired with reversals when the
    /// sector maps onto itself.
    Charge(i64),
}

/// A necessary condition on a boundary key: a constraint that has read some boundary
/// fields and still waits for variables of later columns must allow the values read.
#[derive(Clone, Debug)]
struct Filter {
    /// (offset, mask, stride) of each boundary field read, in a mixed radix.
    fields: Vec<(u32, u64, u64)>,
    /// Allowed patterns of those fields, as bits.
    allowed: Vec<u64>,
}

impl Filter {
    #[inline]
    fn allows(&self, key: u64) -> bool {
        let mut index = 0u64;
        for &(off, mask, stride) in &self.fields {
            index += ((key >> off) & mask) * stride;
        }
        (self.allowed[(index >> 6) as usize] >> (index & 63)) & 1 == 1
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
fn local_filters(
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
            out.push(Filter { fields, allowed });
        }
    }
    out
}

/// The cell axes across a strip along `along`, in increasing order.
fn transverse_axes(along: usize, dimensions: usize) -> Vec<usize> {
    (0..dimensions).filter(|&a| a != along).collect()
}

/// Cells along the second transverse axis (1 for a two-dimensional crystal; the width
/// unless [`StripConfig::depth`] says otherwise).
fn section_depth(dimensions: usize, width: usize, config: &StripConfig) -> usize {
    if dimensions == 3 {
        config.depth.unwrap_or(width)
    } else {
        1
    }
}

/// Where the model's variables sit in a strip.
struct Placement {
    /// Per variable, its column along the strip.
    columns: Vec<usize>,
    /// Per variable, its kind within a column.
    kinds: Vec<usize>,
    /// Per kind, its cell across the strip (second coordinate 0 in two dimensions).
    across: Vec<[usize; 2]>,
}

/// Where each model variable sits (see [`Placement`]).
fn variable_columns(
    cluster: &Cluster,
    model: &Model,
    along: usize,
    transverse: &[usize],
) -> Result<Placement> {
    let crystal = cluster.crystal;
    let across = |cell: [usize; 3]| -> [usize; 2] {
        [
            cell[transverse[0]],
            transverse.get(1).map_or(0, |&t| cell[t]),
        ]
    };
    // (is bond, crystal index, cell along, cell across, position), in the model's
    // numbering: the sites first when sites carry variables, then the bonds.
    type Id = (bool, usize, usize, [usize; 2], [f64; 3]);
    let mut ids: Vec<Id> = Vec::new();
    if crystal.site_variables.is_some() {
        for (i, s) in cluster.sites.iter().enumerate() {
            ids.push((
                false,
                s.site,
                s.cell[along],
                across(s.cell),
                cluster.site_position(i),
            ));
        }
    }
    if crystal.bond_variables.is_some() {
        for (i, b) in cluster.bonds.iter().enumerate() {
            ids.push((
                true,
                b.bond,
                b.cell[along],
                across(b.cell),
                cluster.bond_position(i),
            ));
        }
    }
    let consistent = ids.len() == model.variables.len()
        && ids
            .iter()
            .zip(&model.variables)
            .all(|(id, v)| id.4 == v.position);
    if !consistent {
        return Err(Error::Model(
            "internal: the model's variables do not follow the cluster's sites and bonds".into(),
        ));
    }
    let mut first: Vec<([usize; 2], bool, usize)> = ids
        .iter()
        .filter(|id| id.2 == 0)
        .map(|id| ([id.3[1], id.3[0]], id.0, id.1))
        .collect();
    first.sort_unstable();
    let kind: HashMap<([usize; 2], bool, usize), usize> =
        first.iter().enumerate().map(|(k, &id)| (id, k)).collect();
    let columns = ids.iter().map(|id| id.2).collect();
    let kinds = ids
        .iter()
        .map(|id| {
            kind.get(&([id.3[1], id.3[0]], id.0, id.1))
                .copied()
                .ok_or_else(|| {
                    Error::Model(
                        "internal: the strip's columns are not translates of each other".into(),
                    )
                })
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(Placement {
        columns,
        kinds,
        across: first.iter().map(|f| [f.0[1], f.0[0]]).collect(),
    })
}

/// A constraint of one column's template: the constraints whose first column is 0.
struct Template {
    /// (kind, column offset) per scope variable, in table order.
    entries: Vec<(usize, usize)>,
    table: usize,
    /// Columns between the first and the last column the constraint reads.
    depth: usize,
    /// The kind, read in the last column, after which the constraint is checked.
    last: usize,
    /// Its index in the model.
    constraint: usize,
    /// The model index of its translate one column on, if found.
    next: Option<usize>,
}

/// The template constraints of a periodic cluster `n` columns long.
fn templates(model: &Model, columns: &[usize], kinds: &[usize], n: usize) -> Result<Vec<Template>> {
    let mut out = Vec::new();
    // Constraints whose first column is 1, by (entries, table): the translates.
    let mut second: HashMap<(Vec<(usize, usize)>, usize), usize> = HashMap::new();
    for (index, con) in model.constraints.iter().enumerate() {
        let cols: Vec<usize> = con.scope.iter().map(|&v| columns[v]).collect();
        let (first, span) = cols
            .iter()
            .map(|&s| (s, cols.iter().map(|&c| (c + n - s) % n).max().unwrap_or(0)))
            .min_by_key(|&(_, span)| span)
            .expect("constraints have a scope");
        if 2 * span + 1 > n {
            return Err(Error::Model(format!(
                "internal: a constraint spans {span} columns of a {n}-column template"
            )));
        }
        if first > 1 {
            continue;
        }
        let entries: Vec<(usize, usize)> = con
            .scope
            .iter()
            .map(|&v| (kinds[v], (columns[v] + n - first) % n))
            .collect();
        if first == 1 {
            second.insert((entries, con.table), index);
            continue;
        }
        let last = entries
            .iter()
            .filter(|e| e.1 == span)
            .map(|e| e.0)
            .max()
            .expect("some entry is in the last column");
        out.push(Template {
            entries,
            table: con.table,
            depth: span,
            last,
            constraint: index,
            next: None,
        });
    }
    for t in &mut out {
        t.next = second.get(&(t.entries.clone(), t.table)).copied();
    }
    Ok(out)
}

/// The charge coefficient of the boundary field of kind `k` and age `a`: the signed
/// relation coefficients of the template constraints reading it that have completed
/// (depth − offset < a).
fn boundary_coefficient(
    templates: &[Template],
    relations: &[Option<sector::Relation>],
    eps: &[i64],
    k: usize,
    a: usize,
) -> i64 {
    templates
        .iter()
        .filter_map(|t| relations[t.table].as_ref().map(|r| (t, r)))
        .flat_map(|(t, r)| {
            t.entries
                .iter()
                .zip(&r.coefficients)
                .filter(move |(e, _)| e.0 == k && t.depth - e.1 < a)
                .map(move |(_, &c)| eps[t.constraint] * c)
        })
        .sum()
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
fn sweep_order(
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

impl Column {
    /// The layout of the column of a strip `width` cells wide — steps, fields, the
    /// conserved charge, the local filters — without any state compiled (see
    /// [`Column::compiled`]).
    pub(crate) fn layout(crystal: &Crystal, width: usize, config: &StripConfig) -> Result<Column> {
        let start = Instant::now();
        let dimensions = crystal.dimensions;
        if dimensions != 2 && dimensions != 3 {
            return Err(Error::Cells(format!(
                "a strip needs a two- or three-dimensional crystal; '{}' has {} dimension(s)",
                crystal.name, dimensions
            )));
        }
        if width == 0 || config.depth == Some(0) {
            return Err(Error::Cells("a strip must be at least 1 cell wide".into()));
        }
        let along = config.along;
        if along >= dimensions {
            return Err(Error::Cells(format!(
                "the strip axis must be {} for a {dimensions}-dimensional crystal",
                if dimensions == 2 {
                    "a or b"
                } else {
                    "a, b or c"
                }
            )));
        }
        let transverse = transverse_axes(along, dimensions);
        let depth = section_depth(dimensions, width, config);
        let reach = crystal.reach().max(1) as usize;
        // Even, so that signs alternating from column to column fit around the cluster.
        let n = 4 * reach + 4;
        let mut counts = [1usize; 3];
        counts[along] = n;
        counts[transverse[0]] = width;
        let mut periodic = [true; 3];
        periodic[transverse[0]] = config.periodic;
        if let Some(&t) = transverse.get(1) {
            counts[t] = depth;
            periodic[t] = config.periodic;
        }
        let cells = Cells {
            counts,
            periodic,
            dimensions,
        };
        let cluster = Cluster::new(crystal, cells)?;
        let model = Model::new(&cluster)?;
        if let Some(why) = &model.contradiction {
            return Err(Error::Model(format!(
                "the strip has no arrangement at all: {why}"
            )));
        }
        let Placement {
            columns,
            mut kinds,
            across,
        } = variable_columns(&cluster, &model, along, &transverse)?;
        let m = across.len();
        // Add the variables of a column in the order its constraints need them (see
        // `sweep_order`), so that each constraint is checked as soon as possible.
        let rank = sweep_order(
            &templates(&model, &columns, &kinds, n)?,
            &across,
            [width, depth],
            config.periodic,
        );
        for k in kinds.iter_mut() {
            *k = rank[*k];
        }
        let templates = templates(&model, &columns, &kinds, n)?;
        let mut states = vec![0u32; m];
        for (v, &k) in kinds.iter().enumerate() {
            states[k] = model.variables[v].states;
        }
        // Last use of each kind: (age in columns, step) of the latest completion reading it.
        let mut last_use: Vec<Option<(usize, usize)>> = vec![None; m];
        for t in &templates {
            for &(k, d) in &t.entries {
                let u = (t.depth - d, t.last);
                if last_use[k].is_none_or(|old| old < u) {
                    last_use[k] = Some(u);
                }
            }
        }
        let free_states = (0..m)
            .filter(|&k| last_use[k].is_none())
            .try_fold(1u64, |a, k| a.checked_mul(states[k] as u64))
            .ok_or_else(|| Error::Model("too many unconstrained variables per column".into()))?;
        let ln_free = (free_states as f64).ln();
        // Canonical fields of variables carried over a column boundary: (kind, age ≥ 1).
        let mut canonical: HashMap<(usize, usize), u32> = HashMap::new();
        let mut next_bit = 0u32;
        for k in 0..m {
            if let Some((age, _)) = last_use[k] {
                for a in 1..=age {
                    canonical.insert((k, a), next_bit);
                    next_bit += field_width(states[k]);
                }
            }
        }
        let too_wide = |bits: u32| Error::Budget {
            cells: format!("a strip {width} cells wide"),
            detail: format!("its column frontier needs {bits} bits, more than 63"),
        };
        if next_bit > 63 {
            return Err(too_wide(next_bit));
        }
        let mut used: u64 = (1u64 << next_bit) - 1;
        let mut fresh = vec![u32::MAX; m];
        let offset_of = |fresh: &[u32], k: usize, age: usize| -> u32 {
            if age == 0 {
                fresh[k]
            } else {
                canonical[&(k, age)]
            }
        };
        let mut steps: Vec<Step> = Vec::new();
        for k in 0..m {
            if last_use[k].is_none() {
                continue;
            }
            let w = field_width(states[k]);
            let field = (1u64 << w) - 1;
            let off = (0..=63 - w)
                .find(|&o| used & (field << o) == 0)
                .ok_or_else(|| too_wide(64))?;
            used |= field << off;
            fresh[k] = off;
            let checks = templates
                .iter()
                .filter(|t| t.last == k)
                .map(|t| {
                    let mut stride = 1u64;
                    let fields = t
                        .entries
                        .iter()
                        .map(|&(kk, d)| {
                            let f = (
                                offset_of(&fresh, kk, t.depth - d),
                                (1u64 << field_width(states[kk])) - 1,
                                stride,
                            );
                            stride *= states[kk] as u64;
                            f
                        })
                        .collect();
                    Check {
                        fields,
                        table: t.table,
                        depth: t.depth,
                    }
                })
                .collect();
            let mut forget = 0u64;
            for kk in 0..m {
                if let Some((age, step)) = last_use[kk]
                    && step == k
                {
                    let f = (1u64 << field_width(states[kk])) - 1;
                    forget |= f << offset_of(&fresh, kk, age);
                }
            }
            used &= !forget;
            let mut patterns: Vec<u64> = (0..states[k] as u64).map(|x| x << off).collect();
            // A variable that completes no constraint only multiplies the states: add it
            // together with the next one (it forgets nothing either).
            if let Some(prev) = steps.last()
                && prev.checks.is_empty()
                && prev.patterns.len() * patterns.len() <= MERGE_MAX
            {
                let prev: Step = steps.pop().expect("a previous step");
                patterns = prev
                    .patterns
                    .iter()
                    .flat_map(|&p| patterns.iter().map(move |&x| p | x))
                    .collect();
            }
            steps.push(Step {
                patterns,
                checks,
                keep: !forget,
                occupied: used,
            });
        }
        let mut relabel = Vec::new();
        for k in 0..m {
            if let Some((age, _)) = last_use[k] {
                for a in 0..age {
                    let mask = (1u64 << field_width(states[k])) - 1;
                    relabel.push((offset_of(&fresh, k, a), mask, canonical[&(k, a + 1)]));
                }
            }
        }
        // The conserved charge, if the rule has one (see `sector`): the coefficient of a
        // boundary field (k, a) adds the relations of the constraints reading it that have
        // completed, those with depth − offset < a. It is found whatever is kept, so that
        // the full space can say which sector its largest eigenvector lies in.
        let mut charge = Vec::new();
        let mut charge_sign = 1i64;
        let relations: Vec<Option<sector::Relation>> =
            model.tables.iter().map(sector::relation).collect();
        // Signs ε per constraint (all +1 for ice rules, a checkerboard for dimers) make
        // every variable's coefficients cancel; see `sector::signs`.
        if let Some(eps) = sector::signs(&model, &relations) {
            // One column adds Σ ε b of its constraints to the charge; unless that is 0
            // no arrangement continues for ever (and the recurrence test will say so).
            let added: i64 = templates
                .iter()
                .filter_map(|t| {
                    relations[t.table]
                        .as_ref()
                        .map(|r| eps[t.constraint] * r.constant)
                })
                .sum();
            // The charge of the next column's boundary is read with the next column's
            // signs: ε of every translate is ε times one common factor s = ±1, and T
            // maps charge q to s·q.
            let factors: Vec<Option<i64>> = templates
                .iter()
                .filter(|t| relations[t.table].is_some())
                .map(|t| t.next.map(|j| eps[j] * eps[t.constraint]))
                .collect();
            let common = factors
                .first()
                .copied()
                .flatten()
                .filter(|&f| factors.iter().all(|&g| g == Some(f)));
            if let (0, Some(f)) = (added, common) {
                charge_sign = f;
                for k in 0..m {
                    let Some((age, _)) = last_use[k] else {
                        continue;
                    };
                    for a in 1..=age {
                        let c = boundary_coefficient(&templates, &relations, &eps, k, a);
                        if c != 0 {
                            charge.push((canonical[&(k, a)], c));
                        }
                    }
                }
            }
        }
        // Reversing every variable (arrows, spins) maps allowed columns to allowed columns
        // when every variable is binary and every table is closed under complements.
        let boundary_bits = (1u64 << next_bit) - 1;
        let binary = (0..m).all(|k| last_use[k].is_none() || states[k] == 2);
        let closed = steps.iter().flat_map(|s| &s.checks).all(|c| {
            let t = &model.tables[c.table];
            (0..t.size).all(|i| t.allows(i) == t.allows(t.size - 1 - i))
        });
        let reversible = binary && closed && next_bit > 0;
        let ln_boundary_space: f64 = (0..m)
            .filter_map(|k| last_use[k].map(|(age, _)| age as f64 * (states[k] as f64).ln()))
            .sum();
        let filters = local_filters(&templates, &model.tables, &states, &canonical);
        let depth = templates.iter().map(|t| t.depth).max().unwrap_or(0);
        let mut column = Column {
            width,
            steps,
            tables: model.tables.clone(),
            relabel,
            depth,
            ln_free,
            free_states,
            units_per_column: model.formula_units / n as f64,
            keys: Vec::new(),
            rows: Vec::new(),
            sizes: Vec::new(),
            build_seconds: 0.0,
            charge,
            sector: None,
            charge_sign,
            flip: None,
            boundary_bits,
            reversible,
            filters,
            ln_boundary_space,
        };
        column.build_seconds = start.elapsed().as_secs_f64();
        Ok(column)
    }

    /// Build the transfer operator of a strip `width` cells wide, keeping the states that
    /// `config.sectors` asks for: every state ([`Sectors::Full`]), one charge
    /// ([`Sectors::Charge`]), or for [`Sectors::Largest`] the first guess of
    /// [`Column::guess`] — a guess only: [`strip`] and [`series`] find the sector that
    /// holds the largest eigenvalue and check it.
    pub fn new(crystal: &Crystal, width: usize, config: &StripConfig) -> Result<Column> {
        let layout = Column::layout(crystal, width, config)?;
        let kept = match config.sectors {
            Sectors::Full => Kept::Full,
            Sectors::Charge(q) => Kept::Charge(q),
            Sectors::Largest => layout.guess(),
        };
        layout.compiled(kept, config)
    }

    /// The first guess at the sector of the largest eigenvalue, with no history: the
    /// reversal-symmetric charge when reversing every variable maps the charge q to Σc − q
    /// (zero flux for square ice), else the charge held by the most assignments of the
    /// boundary fields; every state when no charge is conserved.
    pub(crate) fn guess(&self) -> Kept {
        if self.charge.is_empty() {
            return Kept::Reduced;
        }
        let coefficients: Vec<i64> = self.charge.iter().map(|c| c.1).collect();
        if self.charge_sign == -1 {
            return Kept::Charge(0);
        }
        if self.reversible {
            return Kept::Charge(self.total_charge().div_euclid(2));
        }
        Kept::Charge(sector::most_populous(&coefficients))
    }

    /// A copy of this layout (an uncompiled column) with the states `kept` compiled.
    pub(crate) fn compiled(&self, kept: Kept, config: &StripConfig) -> Result<Column> {
        let mut column = self.uncompiled(kept)?;
        column.compile(config)?;
        Ok(column)
    }

    /// The smallest and largest charge a boundary key can have (for an operator that maps
    /// q to −q, the range of |q|).
    fn charge_range(&self) -> (i64, i64) {
        let low: i64 = self.charge.iter().map(|c| c.1.min(0)).sum();
        let high: i64 = self.charge.iter().map(|c| c.1.max(0)).sum();
        if self.charge_sign == -1 {
            (0, high.max(-low))
        } else {
            (low, high)
        }
    }

    /// A copy of this layout set up to keep the states `kept`, not yet compiled.
    fn uncompiled(&self, kept: Kept) -> Result<Column> {
        let mut column = Column {
            width: self.width,
            steps: self.steps.clone(),
            tables: self.tables.clone(),
            relabel: self.relabel.clone(),
            depth: self.depth,
            ln_free: self.ln_free,
            free_states: self.free_states,
            units_per_column: self.units_per_column,
            keys: Vec::new(),
            rows: Vec::new(),
            sizes: Vec::new(),
            build_seconds: self.build_seconds,
            charge: self.charge.clone(),
            sector: None,
            charge_sign: self.charge_sign,
            flip: None,
            boundary_bits: self.boundary_bits,
            reversible: self.reversible,
            filters: self.filters.clone(),
            ln_boundary_space: self.ln_boundary_space,
        };
        let total = self.total_charge();
        match kept {
            Kept::Full => {}
            Kept::Reduced => {
                if column.charge.is_empty() && column.reversible {
                    column.flip = Some(column.boundary_bits);
                }
            }
            Kept::Charge(q) => {
                if column.charge.is_empty() {
                    return Err(Error::Model(
                        "the rule conserves no charge across the column, so there is no sector to keep".into(),
                    ));
                }
                let q = if column.charge_sign == -1 { q.abs() } else { q };
                column.sector = Some(q);
                // Reversal maps charge q to Σc − q: pairs need the kept charges to map
                // onto themselves.
                let kept = column.kept_charges();
                let symmetric = kept.iter().all(|&c| kept.contains(&(total - c)));
                if column.reversible && symmetric {
                    column.flip = Some(column.boundary_bits);
                }
            }
        }
        Ok(column)
    }

    /// Σ of the charge coefficients (the charge of the state with every field 1).
    fn total_charge(&self) -> i64 {
        self.charge.iter().map(|c| c.1).sum()
    }

    /// The charge values kept: q, and −q too when T maps q to −q.
    fn kept_charges(&self) -> Vec<i64> {
        match self.sector {
            None => Vec::new(),
            Some(q) if self.charge_sign == -1 && q != 0 => vec![q, -q],
            Some(q) => vec![q],
        }
    }

    /// Whether a boundary key may be kept: of a kept charge (when a sector is kept).
    fn in_sector(&self, key: u64) -> bool {
        match self.sector {
            None => true,
            Some(q) => {
                let c = self.charge_of(key);
                c == q || (self.charge_sign == -1 && c == -q)
            }
        }
    }

    /// Whether a boundary key can lie on a cycle: every constraint that has read some of its
    /// fields allows their values (see [`local_filters`]); a key that fails has no
    /// successor or no predecessor.
    #[inline]
    fn feasible(&self, key: u64) -> bool {
        self.filters.iter().all(|f| f.allows(key))
    }

    /// Whether a check passes on a key.
    #[inline]
    fn allows(&self, check: &Check, key: u64) -> bool {
        let mut index = 0u64;
        for &(off, mask, stride) in &check.fields {
            index += ((key >> off) & mask) * stride;
        }
        self.tables[check.table].allows(index)
    }

    /// Move the fields that survive a column to their places one column older.
    #[inline]
    fn relabelled(&self, key: u64) -> u64 {
        self.relabel.iter().fold(0, |acc, &(from, mask, to)| {
            acc | (((key >> from) & mask) << to)
        })
    }

    /// Apply one step to a sorted set of keys; `column` is the column number from an open
    /// left end (checks reaching before it are skipped), `None` in the steady state.
    fn step_keys(&self, step: &Step, keys: &[u64], column: Option<usize>) -> Vec<u64> {
        let mut out = Vec::with_capacity(keys.len() * step.patterns.len());
        for &key in keys {
            for &x in &step.patterns {
                let k = key | x;
                if step
                    .checks
                    .iter()
                    .all(|c| column.is_some_and(|t| c.depth > t) || self.allows(c, k))
                {
                    out.push(k & step.keep);
                }
            }
        }
        out.sort_unstable();
        out.dedup();
        out
    }

    /// Apply a whole column to a set of keys.
    fn column_keys(
        &self,
        keys: &[u64],
        column: Option<usize>,
        config: &StripConfig,
    ) -> Result<Vec<u64>> {
        let mut cur = keys.to_vec();
        for step in &self.steps {
            cur = self.step_keys(step, &cur, column);
            self.within_budget(cur.len(), config)?;
        }
        let mut out: Vec<u64> = cur.iter().map(|&k| self.relabelled(k)).collect();
        if column.is_none() {
            out.retain(|&k| self.feasible(k));
        }
        out.sort_unstable();
        out.dedup();
        Ok(out)
    }

    fn within_budget(&self, states: usize, config: &StripConfig) -> Result<()> {
        if states > config.max_states || states >= u32::MAX as usize {
            return Err(Error::Budget {
                cells: format!("a strip {} cells wide", self.width),
                detail: format!(
                    "a column step holds {states} states (budget {})",
                    config.max_states
                ),
            });
        }
        self.should_stop(config)
    }

    /// [`Error::Interrupted`] once the interrupt is raised, [`Error::Deadline`] after the
    /// deadline.
    fn should_stop(&self, config: &StripConfig) -> Result<()> {
        if config.interrupt.raised() {
            return Err(Error::Interrupted {
                what: format!("computing a strip {} cells wide", self.width),
            });
        }
        if config.deadline.is_some_and(|d| Instant::now() > d) {
            return Err(Error::Deadline {
                cells: format!("a strip {} cells wide", self.width),
            });
        }
        Ok(())
    }

    /// The charge of a boundary key.
    fn charge_of(&self, key: u64) -> i64 {
        self.charge
            .iter()
            .map(|&(off, c)| c * ((key >> off) & 1) as i64)
            .sum()
    }

    /// Every boundary key of charge q that the filters allow, sorted, when every boundary
    /// field is a charge field (the set is then closed under T because T keeps the charge,
    /// up to states that no completion allows).
    fn sector_keys(&self, q: i64, config: &StripConfig, max_boundary: usize) -> Result<Vec<u64>> {
        let fields = &self.charge;
        // Smallest and largest charge the fields from i on can still add.
        let mut low = vec![0i64; fields.len() + 1];
        let mut high = vec![0i64; fields.len() + 1];
        for i in (0..fields.len()).rev() {
            low[i] = low[i + 1] + fields[i].1.min(0);
            high[i] = high[i + 1] + fields[i].1.max(0);
        }
        // The filters checked once their last field (in this order) is set.
        let position: HashMap<u32, usize> =
            fields.iter().enumerate().map(|(i, f)| (f.0, i)).collect();
        let mut due: Vec<Vec<&Filter>> = vec![Vec::new(); fields.len()];
        for f in &self.filters {
            if let Some(last) = f.fields.iter().map(|x| position.get(&x.0)).max().flatten() {
                due[*last].push(f);
            }
        }
        let mut keys = Vec::new();
        let mut stack = vec![(0usize, 0u64, 0i64)];
        while let Some((i, key, charge)) = stack.pop() {
            if i == fields.len() {
                keys.push(key);
                if keys.len() % 4096 == 0 || keys.len() > max_boundary {
                    self.within_budget(keys.len(), config)?;
                    if keys.len() > max_boundary {
                        return Err(Error::Budget {
                            cells: format!("a strip {} cells wide", self.width),
                            detail: format!("more than {max_boundary} boundary states"),
                        });
                    }
                }
                continue;
            }
            let (off, c) = fields[i];
            for (k, ch) in [(key, charge), (key | (1 << off), charge + c)] {
                if (low[i + 1]..=high[i + 1]).contains(&(q - ch))
                    && due[i].iter().all(|f| f.allows(k))
                {
                    stack.push((i + 1, k, ch));
                }
            }
        }
        self.within_budget(keys.len(), config)?;
        keys.sort_unstable();
        Ok(keys)
    }

    /// Find the states reachable from an open left end (in the chosen sector), closed
    /// under the column, and compile the index lists of every step.
    fn compile(&mut self, config: &StripConfig) -> Result<()> {
        if !self.compile_states(config, usize::MAX)? {
            return Err(Error::Model(format!(
                "no state of a strip {} cells wide has charge {}",
                self.width,
                self.sector.unwrap_or(0)
            )));
        }
        Ok(())
    }

    /// [`Column::compile`]; `false` when the kept sector has no state that can be completed.
    /// More than `max_boundary` boundary states is [`Error::Budget`] too, and so is a step
    /// with more than [`PEAK_PER_BOUNDARY`] times that many states (the pass from the open
    /// end would otherwise build a large space before its size could be refused).
    fn compile_states(&mut self, config: &StripConfig, max_boundary: usize) -> Result<bool> {
        let start = Instant::now();
        let capped;
        let config = if max_boundary < usize::MAX {
            let mut c = config.clone();
            c.max_states = c
                .max_states
                .min(max_boundary.saturating_mul(PEAK_PER_BOUNDARY));
            capped = c;
            &capped
        } else {
            config
        };
        let done = self.compile_keys(config, max_boundary)?;
        self.build_seconds += start.elapsed().as_secs_f64();
        Ok(done)
    }

    /// The body of [`Column::compile_states`].
    fn compile_keys(&mut self, config: &StripConfig, max_boundary: usize) -> Result<bool> {
        let boundary = |n: usize| -> Result<()> {
            if n > max_boundary {
                return Err(Error::Budget {
                    cells: format!("a strip {} cells wide", self.width),
                    detail: format!("{n} boundary states (at most {max_boundary} here)"),
                });
            }
            Ok(())
        };
        let every_field_charged = self.charge.len() as u32 == self.boundary_bits.count_ones();
        let enumerated = self.sector.is_some() && every_field_charged;
        let mut keys = if enumerated {
            // No pass from the open end: the sector is every key of a kept charge that the
            // filters allow (states without a past among them are pruned as transient
            // before iterating).
            let mut keys = Vec::new();
            for q in self.kept_charges() {
                keys.extend(self.sector_keys(q, config, max_boundary)?);
                boundary(keys.len())?;
            }
            keys.sort_unstable();
            keys.dedup();
            keys
        } else {
            let mut keys = vec![0u64];
            for t in 0..self.depth {
                keys = self.column_keys(&keys, Some(t), config)?;
            }
            keys.retain(|&k| self.feasible(k) && self.in_sector(k));
            boundary(keys.len())?;
            keys
        };
        for _ in 0..1000 {
            if enumerated || keys.is_empty() {
                // Closed by construction; the last step's look-up checks every image.
                break;
            }
            let image = self.column_keys(&keys, None, config)?;
            if image.iter().any(|&k| !self.in_sector(k)) {
                return Err(Error::Model(
                    "internal: the charge found from the rule tables is not conserved".into(),
                ));
            }
            let mut union: Vec<u64> = keys.iter().chain(&image).copied().collect();
            union.sort_unstable();
            union.dedup();
            if union.len() == keys.len() {
                break;
            }
            boundary(union.len())?;
            keys = union;
        }
        if keys.is_empty() && self.sector.is_some() {
            return Ok(false);
        }
        if let Some(m) = self.flip {
            // One representative (the smaller key) of every pair {k, k XOR m}.
            keys.retain(|&k| k < k ^ m);
        }
        let mut all_rows = Vec::with_capacity(self.steps.len());
        let mut sizes = Vec::with_capacity(self.steps.len());
        let mut cur = keys.clone();
        let last = self.steps.len().saturating_sub(1);
        let too_many = |n: usize| Error::Budget {
            cells: format!("a strip {} cells wide", self.width),
            detail: format!("a column step has {n} transitions"),
        };
        for (s, step) in self.steps.iter().enumerate() {
            let (sources, starts, next) = if s == last {
                // Rows follow the boundary states K (a state nothing leads to has an empty
                // row): a counting sort by the index of the relabelled output in K, filled
                // in increasing input order.
                let mut targets: Vec<(u32, u32)> = Vec::new();
                for (i, &key) in cur.iter().enumerate() {
                    for &x in &step.patterns {
                        let k = key | x;
                        if step.checks.iter().all(|c| self.allows(c, k)) {
                            let out = self.relabelled(k & step.keep);
                            let out = self.flip.map_or(out, |m| out.min(out ^ m));
                            match keys.binary_search(&out) {
                                Ok(j) => targets.push((j as u32, i as u32)),
                                // A state no completion allows has no successor: dropped.
                                Err(_) if !self.feasible(out) => {}
                                Err(_) => {
                                    return Err(Error::Model(
                                        "internal: the strip's state set is not closed".into(),
                                    ));
                                }
                            }
                        }
                    }
                }
                if targets.len() >= u32::MAX as usize {
                    return Err(too_many(targets.len()));
                }
                let mut starts = vec![0u32; keys.len() + 1];
                for &(j, _) in &targets {
                    starts[j as usize + 1] += 1;
                }
                for j in 0..keys.len() {
                    starts[j + 1] += starts[j];
                }
                let mut fill = starts.clone();
                let mut sources = vec![0u32; targets.len()];
                for &(j, i) in &targets {
                    sources[fill[j as usize] as usize] = i;
                    fill[j as usize] += 1;
                }
                (sources, starts, keys.clone())
            } else {
                // Transitions with the same new value and the same forgotten fields keep
                // the order of their inputs (a stream); the streams are merged.
                let mut streams: Vec<(StreamId, Vec<(u64, u32)>)> = Vec::new();
                let mut total = 0usize;
                for (i, &key) in cur.iter().enumerate() {
                    for &x in &step.patterns {
                        let k = key | x;
                        if step.checks.iter().all(|c| self.allows(c, k)) {
                            let out = k & step.keep;
                            // A reversed key runs backwards within its stream.
                            let flipped = self.flip.is_some() && out ^ step.occupied < out;
                            let out = if flipped { out ^ step.occupied } else { out };
                            let id = (x, k & !step.keep, flipped);
                            let p = match streams.iter().position(|st| st.0 == id) {
                                Some(p) => p,
                                None => {
                                    streams.push((id, Vec::new()));
                                    streams.len() - 1
                                }
                            };
                            streams[p].1.push((out, i as u32));
                            total += 1;
                        }
                    }
                }
                if total >= u32::MAX as usize {
                    return Err(too_many(total));
                }
                for st in streams.iter_mut().filter(|st| st.0.2) {
                    st.1.reverse();
                }
                let mut heads = vec![0usize; streams.len()];
                let mut sources = Vec::with_capacity(total);
                let mut starts = Vec::new();
                let mut next: Vec<u64> = Vec::new();
                loop {
                    let mut best: Option<(usize, (u64, u32))> = None;
                    for (j, st) in streams.iter().enumerate() {
                        if let Some(&p) = st.1.get(heads[j])
                            && best.is_none_or(|b| p < b.1)
                        {
                            best = Some((j, p));
                        }
                    }
                    let Some((j, (out, input))) = best else {
                        break;
                    };
                    heads[j] += 1;
                    if next.last() != Some(&out) {
                        next.push(out);
                        starts.push(sources.len() as u32);
                    }
                    sources.push(input);
                }
                starts.push(sources.len() as u32);
                (sources, starts, next)
            };
            self.within_budget(next.len(), config)?;
            if cur.len() > rows::MAX_INPUT {
                return Err(too_many(cur.len()));
            }
            all_rows.push(Rows::from_compressed(&sources, &starts));
            drop((sources, starts));
            sizes.push(next.len());
            cur = next;
        }
        self.keys = keys;
        self.rows = all_rows;
        self.sizes = sizes;
        Ok(true)
    }

    /// Frontier states at a column boundary (the dimension of T).
    pub fn states(&self) -> usize {
        self.keys.len()
    }

    /// Largest number of states at any step of a column.
    pub fn peak_states(&self) -> usize {
        self.sizes
            .iter()
            .copied()
            .max()
            .unwrap_or(0)
            .max(self.keys.len())
    }

    /// Transitions (index-list entries) per application of T, summed over the steps.
    pub fn transitions(&self) -> usize {
        self.rows.iter().map(Rows::transitions).sum()
    }

    /// Formula units per column.
    pub fn units_per_column(&self) -> f64 {
        self.units_per_column
    }

    /// y = T x, without the factor of free variables; `scratch` is reused between calls.
    pub fn apply(&self, x: &[f64], y: &mut Vec<f64>, scratch: &mut Vec<f64>) {
        y.clear();
        y.extend_from_slice(x);
        for s in 0..self.steps.len() {
            // Every output is written below, so old contents need no clearing.
            scratch.resize(self.sizes[s], 0.0);
            let rows = &self.rows[s];
            debug_assert_eq!(rows.outputs(), self.sizes[s]);
            let input: &[f64] = y;
            if scratch.len() >= PARALLEL_MIN {
                scratch
                    .par_chunks_mut(CHUNK)
                    .enumerate()
                    .for_each(|(c, out)| rows.gather(c * CHUNK, out, input));
            } else {
                rows.gather(0, scratch, input);
            }
            std::mem::swap(y, scratch);
        }
    }

    /// The exact trace of T^L, L ≥ 1, including the free variables: the number of
    /// arrangements of the periodic `width × L` cell when L is larger than the deepest
    /// constraint (so that no constraint of the torus reads a variable twice along the
    /// strip).
    pub fn trace_power(&self, length: usize) -> Result<BigUint> {
        if self.flip.is_some() {
            return Err(Error::Cells(
                "a torus trace needs every state; this operator pairs each state with its reversal (build it with Sectors::Full)".into(),
            ));
        }
        if let Some(q) = self.sector {
            return Err(Error::Cells(format!(
                "a torus trace needs every charge sector; this operator keeps only charge {q} (build it with Sectors::Full)"
            )));
        }
        if length <= self.depth {
            return Err(Error::Cells(format!(
                "a torus trace needs more than {} columns along the strip",
                self.depth
            )));
        }
        let zero = BigUint::from(0u32);
        let mut total = zero.clone();
        for start in 0..self.keys.len() {
            let mut cur = vec![zero.clone(); self.keys.len()];
            cur[start] = BigUint::from(1u32);
            for _ in 0..length {
                for s in 0..self.steps.len() {
                    let mut next = vec![zero.clone(); self.sizes[s]];
                    self.rows[s].for_each_row(|j, inputs| {
                        for i in inputs {
                            next[j] += &cur[i];
                        }
                    });
                    cur = next;
                }
            }
            total += &cur[start];
        }
        // Free variables: states^length each, folded in through ln_free.
        Ok(total * BigUint::from(self.free_states).pow(length as u32))
    }

    /// Power iteration for the largest eigenvalue, certified by the Collatz–Wielandt bracket.
    pub fn largest_eigenvalue(&self, config: &StripConfig) -> Result<StripResult> {
        match self.iterate(config)? {
            Some((r, _)) => Ok(r),
            None => Err(Error::Model(format!(
                "a strip {} cells wide has no arrangement of unbounded length",
                self.width
            ))),
        }
    }

    /// [`Column::largest_eigenvalue`] with the last iterate (the eigenvector, L1-normalised,
    /// over the boundary states); `None` when no state has an arbitrarily long past.
    fn iterate(&self, config: &StripConfig) -> Result<Option<(StripResult, Vec<f64>)>> {
        let start = Instant::now();
        let n = self.keys.len();
        let (mut y, mut scratch) = (Vec::new(), Vec::new());
        let recurrent = self.recurrent(&mut y, &mut scratch, config)?;
        let size = recurrent.iter().filter(|&&r| r).count();
        if size == 0 {
            return Ok(None);
        }
        let mut x: Vec<f64> = recurrent
            .iter()
            .map(|&r| if r { 1.0 / size as f64 } else { 0.0 })
            .collect();
        // Arnoldi first (it never decides λ; the power iteration below certifies it).
        let restarts = (config.max_iterations / (2 * BASIS)).min(MAX_RESTARTS);
        let mut applied = 0;
        if size >= KRYLOV_MIN && restarts > 0 {
            let mut op = |a: &[f64], b: &mut Vec<f64>| self.apply(a, b, &mut scratch);
            let stop = || self.should_stop(config).is_err();
            let (v, used) = krylov::restarted(&mut op, &x, BASIS, restarts, 1e-13, &stop);
            self.should_stop(config)?;
            x = v;
            applied = used;
        }
        let mut lambda = 0.0;
        for iteration in applied + 1..=config.max_iterations {
            self.apply(&x, &mut y, &mut scratch);
            let sum_x: f64 = x.iter().sum();
            let sum_y: f64 = y.iter().sum();
            let estimate = sum_y / sum_x;
            let top = x.iter().copied().fold(0.0, f64::max);
            let (mut low, mut high) = (f64::INFINITY, 0.0f64);
            for (&a, &b) in x.iter().zip(&y) {
                if a > 0.0 && a >= SUPPORT * top {
                    let r = b / a;
                    low = low.min(r);
                    high = high.max(r);
                }
            }
            if iteration >= 3 && high - low <= config.tolerance * estimate {
                let (lower, upper, certified) = self.certify(&x, &y, &recurrent);
                // The midpoint of the converged bracket (the L1 ratio still carries the
                // decaying components of subdominant sectors), within the certified one.
                let mid = (0.5 * (low + high)).clamp(lower, upper);
                let ln_lambda = mid.ln() + self.ln_free;
                let result = StripResult {
                    width: self.width,
                    states: n,
                    recurrent_states: size,
                    peak_states: self.peak_states(),
                    transitions: self.transitions(),
                    iterations: iteration,
                    ln_lambda,
                    ln_bracket: (lower.ln() + self.ln_free, upper.ln() + self.ln_free),
                    certified,
                    units_per_column: self.units_per_column,
                    ln_w_per_unit: ln_lambda / self.units_per_column,
                    seconds: self.build_seconds + start.elapsed().as_secs_f64(),
                    sector: self.sector,
                    reversal: self.flip.is_some(),
                    basis: if self.sector.is_some() {
                        SectorBasis::Given
                    } else {
                        SectorBasis::Whole
                    },
                    ln_boundary_space: self.ln_boundary_space,
                    depth: self.depth,
                };
                return Ok(Some((result, x)));
            }
            if iteration % 16 == 0 {
                self.should_stop(config)?;
            }
            // x ← (T + σλ̃) x, normalised: removes eigenvalues of modulus λ other than λ.
            let shift = SHIFT * estimate;
            let norm = sum_y + shift * sum_x;
            for (a, &b) in x.iter_mut().zip(&y) {
                *a = (b + shift * *a) / norm;
            }
            lambda = estimate;
        }
        Err(Error::NotConverged {
            what: format!("the transfer matrix of a strip {} cells wide", self.width),
            iterations: config.max_iterations,
            detail: format!("last estimate of λ {lambda}"),
        })
    }

    /// The weight of an eigenvector (over the boundary states) per charge, largest first;
    /// for an operator that maps q to −q, per |q|.
    fn weight_by_charge(&self, x: &[f64]) -> Vec<(i64, f64)> {
        let mut by: HashMap<i64, f64> = HashMap::new();
        for (&k, &v) in self.keys.iter().zip(x) {
            let c = self.charge_of(k);
            let c = if self.charge_sign == -1 { c.abs() } else { c };
            *by.entry(c).or_default() += v;
        }
        let mut out: Vec<(i64, f64)> = by.into_iter().collect();
        out.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        out
    }

    /// The states with an arbitrarily long past (every one has a predecessor in the set):
    /// T maps this set into itself, and every other state is transient, so λ is the
    /// spectral radius of T on it. Empty when no arrangement continues for ever.
    fn recurrent(
        &self,
        y: &mut Vec<f64>,
        scratch: &mut Vec<f64>,
        config: &StripConfig,
    ) -> Result<Vec<bool>> {
        let mut alive = vec![true; self.keys.len()];
        loop {
            self.should_stop(config)?;
            let f: Vec<f64> = alive.iter().map(|&a| f64::from(u8::from(a))).collect();
            self.apply(&f, y, scratch);
            let mut changed = false;
            for (a, &g) in alive.iter_mut().zip(y.iter()) {
                if *a && g <= 0.0 {
                    *a = false;
                    changed = true;
                }
            }
            if !changed {
                return Ok(alive);
            }
        }
    }

    /// Collatz–Wielandt bounds from the last iterate x (and y = T x) on the recurrent set R:
    /// the lower bound min over the support F of (T x_F)_i / x_i for x restricted to F
    /// (T x_F ≥ a x_F implies λ ≥ a), the upper bound max over R of (T x)_i / x_i, certified
    /// when x is positive on all of R (otherwise the maximum over F, not certified).
    fn certify(&self, x: &[f64], y: &[f64], recurrent: &[bool]) -> (f64, f64, bool) {
        let top = x.iter().copied().fold(0.0, f64::max);
        let in_support = |a: f64| a > 0.0 && a >= SUPPORT * top;
        let masked: Vec<f64> = x
            .iter()
            .map(|&a| if in_support(a) { a } else { 0.0 })
            .collect();
        let (mut yf, mut scratch) = (Vec::new(), Vec::new());
        self.apply(&masked, &mut yf, &mut scratch);
        let lower = masked
            .iter()
            .zip(&yf)
            .filter(|p| *p.0 > 0.0)
            .map(|(&a, &b)| b / a)
            .fold(f64::INFINITY, f64::min);
        let certified = x.iter().zip(recurrent).all(|(&a, &r)| !r || a > 0.0);
        let upper = x
            .iter()
            .zip(y)
            .zip(recurrent)
            .filter(|((a, _), r)| **r && (certified || in_support(**a)))
            .map(|((&a, &b), _)| b / a)
            .fold(0.0, f64::max);
        (lower, upper, certified)
    }
}

/// Bytes a column of these dimensions holds while it is built and iterated: four per
/// index-list entry, and about BASIS + 6 vectors of f64 (Arnoldi basis, iterates,
/// scratch) plus the compile-time key buffers (16 bytes) per state at the largest step.
pub fn memory_estimate(peak_states: f64, transitions: f64) -> f64 {
    4.0 * transitions + (8.0 * (BASIS + 6) as f64 + 16.0) * peak_states
}

/// States at any step allowed per boundary state when the boundary states are capped (a
/// column step holds up to about four times the boundary states on the shipped lattices).
const PEAK_PER_BOUNDARY: usize = 16;

/// States holding less than this fraction of the largest component leave the convergence
/// test (subdominant sectors decay below it).
const SUPPORT: f64 = 1e-8;

/// Steps with fewer output states than this run on one thread.
const PARALLEL_MIN: usize = 1 << 15;

/// A stream of one step: (new value, forgotten fields, reversed).
type StreamId = (u64, u64, bool);

/// Arnoldi basis size (common practice: a few tens of vectors at most).
const BASIS: usize = 12;

/// Largest number of Arnoldi restarts before the power iteration.
const MAX_RESTARTS: usize = 8;

/// Operators with fewer recurrent states go straight to the power iteration.
const KRYLOV_MIN: usize = 64;

/// Largest number of value patterns of one step when variables that complete no
/// constraint are added together with the next one.
const MERGE_MAX: usize = 64;

/// Shift of the power iteration, relative to the current estimate of λ.
const SHIFT: f64 = 0.25;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;

    fn lattice(name: &str) -> Lattice {
        let path = format!("{}/lattices/{name}", env!("CARGO_MANIFEST_DIR"));
        Lattice::from_file(std::path::Path::new(&path)).unwrap()
    }

    fn torus(l: &Lattice, a: usize, b: usize) -> BigUint {
        let cells = Cells::parse(&format!("{a}x{b}"), None, 2).unwrap();
        l.count_exact(&cells, &Default::default())
            .unwrap()
            .count
            .unwrap()
    }

    /// The trace of T^L is the torus count of the frontier counter, exactly (two
    /// independent routes through the same model).
    #[test]
    fn trace_equals_torus_count() {
        for name in [
            "square-ice.yaml",
            "hard-squares.yaml",
            "square-dimers.yaml",
            "triangular-afm.yaml",
            "honeycomb-dimers.yaml",
            "kagome-ice.yaml",
            "triangular-4-colourings.yaml",
        ] {
            let l = lattice(name);
            for along in 0..2 {
                for width in 1..=4 {
                    let config = StripConfig {
                        along,
                        sectors: Sectors::Full,
                        ..Default::default()
                    };
                    let column = Column::new(&l.crystal, width, &config).unwrap();
                    for length in 2..=5 {
                        let (a, b) = if along == 0 {
                            (length, width)
                        } else {
                            (width, length)
                        };
                        assert_eq!(
                            column.trace_power(length).unwrap(),
                            torus(&l, a, b),
                            "{name} along {along}, {a}x{b}"
                        );
                    }
                }
            }
        }
    }

    /// OEIS A054759: square ice on the L×L torus, 148 (L = 3), 2970 (L = 4), 143224 (L = 5).
    #[test]
    fn square_ice_tori_by_trace() {
        let l = lattice("square-ice.yaml");
        for (n, expected) in [(3usize, 148u64), (4, 2970), (5, 143224)] {
            let config = StripConfig {
                sectors: Sectors::Full,
                ..Default::default()
            };
            let column = Column::new(&l.crystal, n, &config).unwrap();
            assert_eq!(column.trace_power(n).unwrap(), BigUint::from(expected));
        }
    }
}
