//! The choice of the value to cite: one priority order that the table, the JSON and the
//! report all use ([`Survey::cited`]).

use super::Survey;
use crate::counters::local;
use crate::crosscheck::CrossCheck;
use crate::estimate::Estimate;

/// Why a value is the one to cite: its rank in [`Survey::cited`]'s order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum CitedReason {
    /// Strips extrapolated to infinite width: the infinite crystal.
    TransferMatrix,
    /// Monte Carlo cells extrapolated to the infinite crystal.
    MonteCarloExtrapolated,
    /// The largest Monte Carlo cell: a finite cell, not the infinite crystal.
    MonteCarloCell,
    /// The largest exact cell with an arrangement: exact for that finite cell only.
    ExactCell,
    /// No count ran: the Bethe approximation.
    Bethe,
    /// No count ran: Pauling's estimate.
    Pauling,
}

impl CitedReason {
    /// Whether the value is for the infinite crystal (not a finite cell).
    pub fn is_infinite_crystal(self) -> bool {
        !matches!(self, CitedReason::MonteCarloCell | CitedReason::ExactCell)
    }

    /// Whether the value is an approximation with no count behind it.
    pub fn is_local_estimate(self) -> bool {
        matches!(self, CitedReason::Bethe | CitedReason::Pauling)
    }
}

/// Why a candidate for citing was passed over.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum Refusal<'a> {
    /// Its method disagreed with a second route computed in the same run.
    CheckFailed(Vec<&'a CrossCheck>),
    /// A Monte Carlo extrapolation with as many fit parameters as cells: χ² = 0 for zero
    /// degrees of freedom says nothing about the fit, so the value is not presented.
    NoDegreesOfFreedom,
    /// A local estimate that cannot be a value of W for this rule.
    NotMeaningful(local::Caveat),
}

/// A candidate for citing that was passed over, and why.
#[derive(Clone, Debug)]
pub struct PassedOver<'a> {
    /// The estimate not cited.
    pub estimate: &'a Estimate,
    /// Why.
    pub why: Refusal<'a>,
}

/// The value to cite.
#[derive(Clone, Debug)]
pub struct CitedValue<'a> {
    /// The estimate.
    pub estimate: &'a Estimate,
    /// Why it is the one.
    pub reason: CitedReason,
    /// The cross-checks of its method (all agree; none when the run had no second route).
    pub checks: Vec<&'a CrossCheck>,
}

/// The choice of [`Survey::cited`]: the value (none when every candidate was refused) and
/// the better-ranked candidates passed over.
#[derive(Clone, Debug)]
pub struct Cited<'a> {
    /// The value to cite, if any.
    pub value: Option<CitedValue<'a>>,
    /// Better-ranked candidates that were not cited, and why, in rank order.
    pub passed_over: Vec<PassedOver<'a>>,
}

impl Cited<'_> {
    /// Whether a candidate was passed over because a cross-check failed.
    pub fn check_failed(&self) -> bool {
        self.passed_over
            .iter()
            .any(|p| matches!(p.why, Refusal::CheckFailed(_)))
    }
}

impl Survey {
    /// The value a user should cite, why, and what was passed over on the way; see
    /// [`Cited`]. Every report (table, JSON, Markdown, the sentence to paste) takes its cited
    /// value from here, so that there is one priority order:
    ///
    /// 1. the transfer-matrix extrapolation to infinite width (2D): the infinite crystal;
    /// 2. the Monte Carlo extrapolation to the infinite crystal (3D), if its fit has at least
    ///    one degree of freedom left;
    /// 3. the Monte Carlo count of the largest cell sampled: a finite cell;
    /// 4. the largest exact cell with an arrangement: exact for that finite cell only;
    /// 5. the Bethe approximation, then Pauling's estimate, when no count ran, unless the
    ///    value is not meaningful ([`pauling::caveat`]: W below 1).
    ///
    /// A candidate whose method failed a cross-check of this run ([`Survey::checks`]) is
    /// passed over, whatever its rank.
    pub fn cited(&self) -> Cited<'_> {
        let mut candidates: Vec<(&Estimate, CitedReason)> = Vec::new();
        if let Some(t) = &self.strips {
            candidates.push((&t.estimate, CitedReason::TransferMatrix));
        }
        if let Some(x) = &self.extrapolated {
            candidates.push((&x.estimate, CitedReason::MonteCarloExtrapolated));
        }
        if let Some(m) = &self.sampled {
            candidates.push((&m.sampled.estimate, CitedReason::MonteCarloCell));
        }
        if let Some(e) = self.largest_exact() {
            candidates.push((e, CitedReason::ExactCell));
        }
        if let Some(b) = &self.bethe {
            candidates.push((b, CitedReason::Bethe));
        }
        candidates.push((&self.pauling, CitedReason::Pauling));
        let mut passed_over = Vec::new();
        for (estimate, reason) in candidates {
            let failed: Vec<&CrossCheck> = self
                .checks
                .iter()
                .filter(|c| c.method == estimate.method && !c.agrees())
                .collect();
            let refusal = if !failed.is_empty() {
                Some(Refusal::CheckFailed(failed))
            } else if reason == CitedReason::MonteCarloExtrapolated
                && self
                    .extrapolated
                    .as_ref()
                    .is_some_and(|x| x.details.dof == 0)
            {
                Some(Refusal::NoDegreesOfFreedom)
            } else if matches!(reason, CitedReason::Bethe | CitedReason::Pauling) {
                local::caveat(estimate).map(Refusal::NotMeaningful)
            } else {
                None
            };
            match refusal {
                Some(why) => passed_over.push(PassedOver { estimate, why }),
                None => {
                    let checks = self
                        .checks
                        .iter()
                        .filter(|c| c.method == estimate.method)
                        .collect();
                    return Cited {
                        value: Some(CitedValue {
                            estimate,
                            reason,
                            checks,
                        }),
                        passed_over,
                    };
                }
            }
        }
        Cited {
            value: None,
            passed_over,
        }
    }
}
