//! What a survey says about its run, as data: [`Note`] (what ran, what stopped and why) and
//! [`ExactStop`] (why the exact counts stopped). The words are the reader's business:
//! [`crate::text::note_words`] and [`crate::text::stop_words`] give them, with the advice on
//! what to run next ([`Hint`]) worded by the caller (the binary names its commands).

use crate::counters::extrapolate::Scaling;
use crate::crosscheck::CrossCheck;

/// The stage of a survey after the exact counts.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Stage {
    /// Transfer matrices on strips (2D).
    TransferMatrix,
    /// Monte Carlo cells (3D).
    MonteCarlo,
}

/// Advice on what to run next, which a note carries and the caller words.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum Hint {
    /// A run of strips alone shows every width.
    StripShowsEveryWidth,
    /// Too few widths: a larger budget, or a run of strips alone.
    RaiseBudgetOrStrip,
    /// A Monte Carlo run alone can sample larger cells and longer.
    SampleRunsLonger,
}

/// The widths whose charge sector was established each way.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct SectorWidths {
    /// Checked against the full state space.
    pub full_space: Vec<usize>,
    /// Checked against the neighbouring charges.
    pub neighbours: Vec<usize>,
    /// Predicted from the checked widths.
    pub predicted: Vec<usize>,
}

/// One thing a survey says about its run.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Note {
    /// A diluted crystal: every exact row is a mean over random realisations of the
    /// vacancies, per formula unit present; Pauling's row is the generalized estimate.
    Diluted {
        /// Realisations per cell.
        realisations: usize,
    },
    /// The Bethe approximation did not settle (the error in words).
    BetheLeftOut {
        /// Why.
        error: String,
    },
    /// A method that cannot yet take the file's weights, occupancies or compositions was
    /// left out (its row is missing; the other rows stand).
    Unweighted {
        /// The method, in words ("the exact count").
        method: &'static str,
    },
    /// An interrupt came before the stage began.
    StageNotRun {
        /// The stage.
        stage: Stage,
    },
    /// An interrupt stopped the stage.
    StageInterrupted {
        /// The stage.
        stage: Stage,
    },
    /// The survey was interrupted: the values are those finished before.
    Interrupted,
    /// Given widths: the budget ran out at this width.
    StripBudgetRanOut {
        /// The budget in seconds.
        budget: f64,
        /// The width being computed.
        width: usize,
    },
    /// An interrupt stopped the strips at this width; the widths before it are kept.
    StripInterrupted {
        /// The width being computed.
        width: usize,
    },
    /// A width failed.
    StripStopped {
        /// The width.
        width: usize,
        /// Why, in words.
        error: String,
    },
    /// A cross-check of the strips failed.
    StripCheckFailed {
        /// The check.
        check: CrossCheck,
    },
    /// Too few widths for an extrapolation.
    StripTooFewWidths {
        /// Widths finished.
        done: usize,
        /// What to run next.
        hint: Hint,
    },
    /// The strips and their extrapolation.
    StripSeries {
        /// The first width used.
        first: usize,
        /// The largest width used.
        largest: usize,
        /// The spacing of the widths used.
        step: usize,
        /// How the values approach the limit.
        scaling: Scaling,
        /// Fits made.
        fits: usize,
        /// How each width's charge sector was established.
        sectors: SectorWidths,
        /// What to run next.
        hint: Hint,
    },
    /// The strips could not be extrapolated.
    StripNoExtrapolation {
        /// Why, in words.
        why: String,
    },
    /// The Monte Carlo was interrupted after this many cells.
    MonteCarloInterrupted {
        /// Cells finished.
        done: usize,
    },
    /// No periodic cell of a sensible size.
    MonteCarloNoCell,
    /// The first Monte Carlo cell failed.
    MonteCarloNotRun {
        /// Why, in words.
        error: String,
    },
    /// What the Monte Carlo ran.
    MonteCarloRan {
        /// The cells, in words ("3x3x3 and 4x4x4 periodic").
        cells: String,
        /// Formula units of each cell.
        formula_units: Vec<f64>,
        /// The seed.
        seed: u64,
        /// Replicas and sweeps per node of each cell.
        settings: Vec<(usize, usize)>,
        /// The configured replicas and sweeps, when some cell was given more.
        raised_from: Option<(usize, usize)>,
        /// Cells whose equilibration check failed.
        failed: Vec<String>,
        /// Cells repeated with more sweeps.
        extended: Vec<String>,
        /// What to run next.
        hint: Hint,
    },
    /// Cells left out because the budget ran out.
    MonteCarloLeftOut {
        /// The cells.
        cells: Vec<String>,
    },
    /// Too few cells for an extrapolation.
    MonteCarloTooFewCells {
        /// Cells sampled.
        cells: usize,
        /// Cells a fit needs.
        needed: usize,
    },
    /// The cells extrapolated to the infinite crystal.
    MonteCarloExtrapolated {
        /// Cells fitted.
        cells: usize,
        /// The form fitted.
        form: &'static str,
        /// χ² of the fit.
        chi2: f64,
        /// Its degrees of freedom.
        dof: usize,
        /// The systematic allowance in ln W (0 when none).
        systematic: f64,
        /// The other form.
        alternative_form: &'static str,
        /// ln W per formula unit and its 1σ from the other form.
        alternative: Option<(f64, f64)>,
        /// b fixed by a conserved flux and its test on the data, if it was fixed.
        law: Option<crate::counters::sampling::size::FluxLaw>,
        /// The rule has a conserved flux but the cells are not of one shape (b was fitted).
        not_one_shape: bool,
        /// The fit with c/N² added and its test, where the cells allowed it.
        next_term: Option<crate::counters::sampling::size::NextTerm>,
    },
    /// The fit failed.
    MonteCarloNoExtrapolation {
        /// Why, in words.
        error: String,
    },
    /// No cross-check of the sampler: the cell for the Wang–Landau check is too large.
    NoCrossCheckTooLarge {
        /// The cell.
        cells: String,
        /// Its variables.
        variables: usize,
    },
    /// No cross-check of the sampler.
    NoCrossCheck {
        /// The cell, when one was chosen.
        cells: Option<String>,
        /// Why, in words.
        error: String,
    },
    /// The Wang–Landau walk of the cross-check failed.
    WangLandauFailed {
        /// The cell.
        cells: String,
        /// Why, in words.
        error: String,
    },
    /// The sampler against a Wang–Landau walk on a small cell.
    WangLandauCheck {
        /// The cell.
        cells: String,
        /// Thermodynamic integration: ln W per formula unit and its 1σ.
        integrated: (f64, f64),
        /// The walk: ln W per formula unit and its 1σ.
        walk: (f64, f64),
        /// Whether they agree within `sigmas` combined σ.
        agrees: bool,
        /// The tolerance in combined σ.
        sigmas: f64,
    },
    /// The sampler against the exact count of the same cell.
    ExactCheck {
        /// The cell.
        cells: String,
        /// Wall time of the sampled run, seconds.
        seconds: f64,
        /// The sampled ln W per formula unit and its 1σ.
        sampled: (f64, f64),
        /// The exact ln W per formula unit.
        exact: f64,
        /// Whether they agree within `sigmas` σ.
        agrees: bool,
        /// The tolerance in σ.
        sigmas: f64,
    },
}

/// Why the exact counts of a survey stopped.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum ExactStop {
    /// An interrupt before a cell began.
    Interrupted,
    /// The next cell is too large to build.
    CellSizeLimit,
    /// No rule restricts any variable: larger cells give the same W.
    NothingRestricted,
    /// The exact counts' share of the budget ran out while counting a cell.
    Deadline {
        /// The budget in seconds.
        budget: f64,
        /// The cell.
        cells: String,
    },
    /// A cell needs more frontier states than allowed.
    States {
        /// The cell.
        cells: String,
        /// The limit.
        max_states: usize,
    },
    /// An interrupt while counting a cell.
    InterruptedWhile {
        /// The cell.
        cells: String,
    },
    /// The exact counts' share of the budget is spent.
    BudgetSpent {
        /// The budget in seconds.
        budget: f64,
    },
}
