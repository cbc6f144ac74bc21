//! What a survey is given ([`SurveyConfig`]) and what it holds ([`Survey`]).

use crate::cluster::Cells;
use crate::counters::sampling::size::SizeFit;
use crate::counters::sampling::{SampleConfig, Sampled};
use crate::counters::transfer::StripSeries;
use crate::counters::{Counted, exact};
use crate::crosscheck::CrossCheck;
use crate::estimate::{Estimate, ExactStop, Note};

/// Settings of a survey.
#[derive(Clone, Debug)]
pub struct SurveyConfig {
    /// Time budget in seconds for everything.
    pub budget: f64,
    /// Largest number of partial states an exact count may hold.
    pub max_states: usize,
    /// Count no exact cell with more formula units than this.
    pub max_exact_units: Option<f64>,
    /// Strip widths to compute (2D); `None` grows the width from 2 until the budget ends.
    pub widths: Option<Vec<usize>>,
    /// The Monte Carlo cell (3D); `None` samples up to five cells from about a hundred
    /// formula units to the largest the budget affords, at most
    /// 2500 (`SAMPLE_PRECISION_UNITS`) once four smaller ones are
    /// available (cubes of the cell when the rule has a conserved flux), and extrapolates
    /// them to the infinite crystal.
    pub sample_cells: Option<Cells>,
    /// Monte Carlo settings.
    pub sample: SampleConfig,
}

impl Default for SurveyConfig {
    fn default() -> Self {
        SurveyConfig {
            budget: 20.0,
            max_states: exact::DEFAULT_MAX_STATES,
            max_exact_units: None,
            widths: None,
            sample_cells: None,
            sample: SampleConfig::default(),
        }
    }
}

/// A Monte Carlo run with the cell it sampled.
#[derive(Clone, Debug)]
pub struct SampledCell {
    /// The cell, as written ("10x10x10 periodic").
    pub cells: String,
    /// Its repetitions along a, b, c.
    pub repeats: [usize; 3],
    /// The conserved fluxes of its model ([`crate::counters::sampling::size::flux_components`]).
    pub flux_components: usize,
    /// The run.
    pub sampled: Counted<Sampled>,
}

/// The sampled cells in words: "3x3x3, 4x4x4 and 5x5x5 periodic".
pub(crate) fn cell_list(cells: &[SampledCell]) -> String {
    let names: Vec<&str> = cells
        .iter()
        .map(|c| c.cells.strip_suffix(" periodic").unwrap_or(&c.cells))
        .collect();
    let joined = match names.split_last() {
        Some((last, rest)) if !rest.is_empty() => format!("{} and {last}", rest.join(", ")),
        _ => names.join(""),
    };
    let all_periodic = cells.iter().all(|c| c.cells.ends_with(" periodic"));
    if all_periodic {
        format!("{joined} periodic")
    } else {
        joined
    }
}

/// Monte Carlo values of several cells extrapolated to the infinite crystal: s∞ as an
/// estimate, with the fit s(N) = s∞ + a/N (+ b ln N/N) beside it.
pub type SizeExtrapolation = Counted<SizeFit>;

/// Every estimate a survey made, with its diagnostics.
#[derive(Clone, Debug)]
pub struct Survey {
    /// Pauling's independent-constraint estimate.
    pub pauling: Estimate,
    /// The Bethe approximation (belief propagation), when its messages settled.
    pub bethe: Option<Estimate>,
    /// Exact counts, smallest cell first.
    pub exact: Vec<Estimate>,
    /// Why the exact counts stopped (`None` when they ran to the requested limit).
    pub stopped: Option<ExactStop>,
    /// Transfer matrices on strips, when they ran and extrapolated.
    pub strips: Option<Counted<StripSeries>>,
    /// The Monte Carlo count of the largest cell sampled, when it ran.
    pub sampled: Option<SampledCell>,
    /// Every cell sampled, smallest first (the largest is also `sampled`).
    pub sampled_sizes: Vec<SampledCell>,
    /// The Monte Carlo values extrapolated to the infinite crystal (two or more cells).
    pub extrapolated: Option<SizeExtrapolation>,
    /// Cited values compared with a second route computed in the same run.
    pub checks: Vec<CrossCheck>,
    /// What ran, what stopped and why ([`crate::text::note_words`] words them).
    pub notes: Vec<Note>,
    /// The budget in seconds.
    pub budget: f64,
    /// Whether the interrupt stopped the survey before it ran everything: the estimates
    /// are what was finished.
    pub interrupted: bool,
}

impl Survey {
    /// Every estimate, Pauling and Bethe first, then exact counts, then the
    /// infinite-crystal methods.
    pub fn estimates(&self) -> Vec<Estimate> {
        let mut v = vec![self.pauling.clone()];
        v.extend(self.bethe.iter().cloned());
        v.extend(self.exact.iter().cloned());
        if let Some(s) = &self.strips {
            v.push(s.estimate.clone());
        }
        v.extend(
            self.sampled_sizes
                .iter()
                .map(|s| s.sampled.estimate.clone()),
        );
        if let Some(x) = &self.extrapolated {
            v.push(x.estimate.clone());
        }
        v
    }

    /// The cross-checks whose two routes disagree.
    pub fn failed_checks(&self) -> Vec<&CrossCheck> {
        self.checks.iter().filter(|c| !c.agrees()).collect()
    }

    /// The largest exact cell that has at least one arrangement (cells of the wrong parity,
    /// such as odd tori for dimers, have none and say nothing about W).
    pub fn largest_exact(&self) -> Option<&Estimate> {
        self.exact
            .iter()
            .rev()
            .find(|e| e.ln_w_per_unit.is_finite())
    }
}
