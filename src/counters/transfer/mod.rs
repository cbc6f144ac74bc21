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
//! The operator is built from the [`Model`](crate::model::Model) of a periodic `width × n`
//! cluster (n = 4·reach + 4 columns, so that no constraint wraps onto itself along the
//! strip): every variable belongs to the column of its cell and every constraint is
//! assigned to the first column it reads, both read from the model's provenance
//! ([`geometry`]); the constraints assigned to column 0 — with their compiled tables — are
//! the template of one column. One column is then applied as a sequence of steps of the
//! frontier engine ([`super::frontier`]) that the exact counter runs too: add one variable
//! of the new column, check the constraints whose last variable it is, forget the variables
//! that no unfinished constraint reads ([`column`]). The variables are added in the order
//! the constraints across the strip need them (`sweep_order`), and a variable that
//! completes no constraint is added in one step with the next one, so that no step holds
//! states that the next check would discard. States are frontier assignments packed into
//! `u64` bit fields in fixed slots; at the end of a column the fields are relabelled by age
//! so that the state space repeats.
//!
//! The operator is never stored as a matrix. Once per width a symbolic pass ([`compile`])
//! finds the set K of frontier states reachable from an open left end (closed under T) and
//! compiles, for every step of the column, the rows ([`rows`]): for each output state the
//! indices of its input states (the engine carrying input indices: a merge of sorted
//! streams, never a sort). Applying T is then `m` gather passes over flat `f64` arrays
//! (m = variables per column), with no hash map or search in the hot loop ([`eigen`]).
//!
//! Two reductions shrink K (both on by default, [`Sectors::Full`] turns them off):
//!
//! * **Charge sectors** ([`sector`], [`symmetry`]): when the constraint tables imply an additive quantity
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
//! The exact trace of Tᴸ, the count of a torus, is in [`torus`]; widths in series and their
//! extrapolation in [`series`]; the choice of the sector in [`dominant`].
//!
//! # Files
//!
//! | file | job |
//! | --- | --- |
//! | `geometry.rs` | columns and kinds of the variables, the template constraints, the order across a column |
//! | `column.rs` | the column as frontier steps (fixed slots, relabelling), the compiled operator |
//! | `filters.rs` | necessary conditions on boundary keys from partly read constraints |
//! | `symmetry.rs` | the conserved charge, the kept sector and reversal pairs |
//! | `sector.rs` | conserved additive charges from the constraint tables |
//! | `compile.rs` | the symbolic pass: the closed state set and the rows of every step |
//! | `rows.rs` | the compiled rows of one step |
//! | `eigen.rs` | applying T, the power iteration and its Collatz–Wielandt bracket |
//! | `krylov.rs` | restarted Arnoldi for the start vector |
//! | `dominant.rs` | which sector holds the largest eigenvalue, and its checks |
//! | `torus.rs` | the exact trace of Tᴸ and the trace route for torus counts |
//! | `series.rs` | widths in order, their checks and the extrapolation |
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

mod column;
mod compile;
mod dominant;
mod eigen;
mod filters;
mod geometry;
mod krylov;
mod rows;
pub(crate) mod sector;
mod series;
mod symmetry;
pub mod torus;
mod weighted;

use std::time::Instant;

pub use column::Column;
pub(crate) use eigen::memory_estimate;
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
    /// A weighted crystal: ln Z, ⟨ln w⟩, the fields and the means reached at this width
    /// (`ln_w_per_unit` is then the entropy of the weighted ensemble, ln Z − ⟨ln w⟩).
    pub weighing: Option<WidthWeighing>,
}

pub use weighted::WidthWeighing;

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
