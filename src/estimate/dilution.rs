//! The survey of a diluted crystal (`vacancies:`): the generalized Pauling estimate and
//! exact counts of growing cells, each averaged over random realisations of the vacancies
//! ([`crate::counters::dilution`]). The Bethe approximation, the transfer matrix and the
//! Monte Carlo do not take vacancies yet; the survey says so in its notes instead of
//! giving the undiluted crystal's values.

use std::time::{Duration, Instant};

use super::{ExactStop, Note, Stage, Survey, SurveyConfig};
use crate::cluster::Cluster;
use crate::context::{Context, Progress};
use crate::counters::dilution::{self, DilutionConfig, DilutionSampleConfig};
use crate::counters::{exact, pauling};
use crate::crosscheck::{CrossCheck, Route};
use crate::crystal::Crystal;
use crate::error::{Error, Result};
use crate::estimate::Method;

/// Seed of the realisations a survey counts (the Monte Carlo's seed, so that one seed
/// fixes the whole run).
fn seed(config: &SurveyConfig) -> u64 {
    config.sample.seed
}

/// The survey of a diluted crystal; see the module documentation.
pub(super) fn survey(c: &Crystal, config: &SurveyConfig, context: &Context) -> Result<Survey> {
    let pauling = pauling::count(c, &(), context)?.estimate;
    let mut notes = vec![
        Note::Diluted {
            realisations: dilution::DEFAULT_REALISATIONS,
        },
        Note::BetheLeftOut {
            error: "it does not take vacancies yet (it would give the undiluted crystal's value)"
                .into(),
        },
    ];
    let start = Instant::now();
    let deadline = start + Duration::from_secs_f64(0.4 * config.budget);
    let mut exact_counts = Vec::new();
    let mut largest_cell = None;
    let mut stopped = None;
    let mut interrupted = false;
    let largest = 1usize << 20;
    let per_cell = c.formula_unit.per_cell(c);
    for cells in super::cell_sequence(c.dimensions) {
        if context.interrupt.raised() {
            interrupted = true;
            stopped = Some(ExactStop::Interrupted);
            break;
        }
        if config
            .max_exact_units
            .is_some_and(|m| cells.total() as f64 * per_cell > m)
        {
            break;
        }
        if cells.total() * c.sites.len().max(c.bonds.len()) > largest {
            stopped = Some(ExactStop::CellSizeLimit);
            break;
        }
        let cluster = Cluster::new(c, cells.clone())?;
        context.tell(Progress::Counting {
            cells: cells.to_string(),
        });
        let dilution_config = DilutionConfig {
            realisations: dilution::DEFAULT_REALISATIONS,
            seed: seed(config),
            exact: exact::ExactConfig {
                max_states: config.max_states,
                ..Default::default()
            },
        };
        let outcome = dilution::count(&cluster, &dilution_config, &context.until(deadline));
        context.tell(Progress::Counted);
        match outcome {
            Ok(r) if r.interrupted => {
                interrupted = true;
                stopped = Some(ExactStop::InterruptedWhile {
                    cells: cells.to_string(),
                });
                exact_counts.push(r.estimate);
                break;
            }
            Ok(r) => {
                exact_counts.push(r.estimate.clone());
                largest_cell = Some((cells.clone(), r));
            }
            Err(Error::Deadline { cells }) => {
                stopped = Some(ExactStop::Deadline {
                    budget: config.budget,
                    cells,
                });
                break;
            }
            Err(Error::Budget { cells, .. }) => {
                stopped = Some(ExactStop::States {
                    cells,
                    max_states: config.max_states,
                });
                break;
            }
            Err(Error::Interrupted { .. }) => {
                interrupted = true;
                stopped = Some(ExactStop::InterruptedWhile {
                    cells: cells.to_string(),
                });
                break;
            }
            Err(e) => return Err(e),
        }
        if Instant::now() > deadline {
            stopped = Some(ExactStop::BudgetSpent {
                budget: config.budget,
            });
            break;
        }
    }
    // The second route: the Monte Carlo on the same realisations of the largest exact cell.
    let mut checks = Vec::new();
    if let Some((cells, exact)) = &largest_cell
        && !interrupted
        && !context.interrupt.raised()
    {
        let cluster = Cluster::new(c, cells.clone())?;
        let sample_config = DilutionSampleConfig {
            realisations: exact.realisations.len(),
            seed: seed(config),
            sample: config.sample.clone(),
        };
        context.tell(Progress::Sampling {
            cells: cells.to_string(),
            variables: cluster.sites.len() + cluster.bonds.len(),
        });
        match dilution::sample(&cluster, &sample_config, context) {
            Ok(s) if !s.interrupted => {
                let n = s.realisations.len() as f64;
                let variance: f64 = s
                    .realisations
                    .iter()
                    .map(|r| r.sigma_ln_w.unwrap_or(0.0).powi(2))
                    .sum();
                checks.push(CrossCheck {
                    method: Method::Exact,
                    route: Route::MonteCarloRealisations {
                        cells: cells.to_string(),
                        realisations: s.realisations.len(),
                    },
                    value: exact.mean,
                    reference: s.mean,
                    tolerance: 4.0 * variance.sqrt() / n,
                });
            }
            Ok(_) | Err(Error::Interrupted { .. }) => interrupted = true,
            Err(e) => notes.push(Note::NoCrossCheck {
                cells: Some(cells.to_string()),
                error: e.to_string(),
            }),
        }
    }
    match c.dimensions {
        2 => notes.push(Note::StripNoExtrapolation {
            why: "a crystal with vacancies is not the same from one column to the next, so it \
                  has no transfer matrix along a strip"
                .into(),
        }),
        3 => notes.push(Note::MonteCarloNotRun {
            error: "no extrapolation over cell sizes of realisation averages yet for a crystal \
                    with vacancies; the Monte Carlo ran only as the second route of the largest \
                    exact cell"
                .into(),
        }),
        _ => {}
    }
    if interrupted {
        if let Some(stage) = match c.dimensions {
            2 => Some(Stage::TransferMatrix),
            3 => Some(Stage::MonteCarlo),
            _ => None,
        } {
            notes.push(Note::StageNotRun { stage });
        }
        notes.push(Note::Interrupted);
    }
    Ok(Survey {
        pauling,
        bethe: None,
        exact: exact_counts,
        stopped,
        strips: None,
        sampled: None,
        sampled_sizes: Vec::new(),
        extrapolated: None,
        checks,
        notes,
        budget: config.budget,
        interrupted,
    })
}
