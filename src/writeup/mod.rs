//! A citable report of one survey: Markdown, JSON and SVG figures.
//!
//! # What it is for
//!
//! A user who must state a residual entropy in a paper needs every method's number side by
//! side, the diagnostics behind each, the calorimetric comparison when there is one, and a
//! sentence saying how the number was made. [`Writeup::new`] gathers these from a
//! [`Survey`] (and optionally a calorimetric result); [`Writeup::json`],
//! [`Writeup::markdown`] and [`Writeup::figures`] render them. Nothing here computes a
//! count: it only reads estimates.
//!
//! # Arguments and returns
//!
//! The lattice, the survey, [`Meta`] (version, date, how the run was asked for) and an
//! optional [`Comparison`] of a statistical value with a calorimetric one. The renderers
//! return strings; the caller writes the files.

mod markdown;
mod plots;

use serde_json::{Value, json};

use crate::Lattice;
use crate::counters::pauling;
use crate::estimate::Method;
use crate::report::{amount, estimate_json, method_label, plus_minus, sig};
use crate::survey::{Cited, CitedReason, CitedValue, Survey};
use crate::thermo;

pub use plots::Figure;

/// Facts about the run that are not results.
#[derive(Clone, Debug)]
pub struct Meta {
    /// groundcount's version.
    pub version: String,
    /// The date of the run, `YYYY-MM-DD` (UTC).
    pub date: String,
    /// The lattice file as the user named it.
    pub file: String,
}

/// The calorimetric side of the comparison: a third-law entropy and a statistical
/// (spectroscopic) entropy, whose difference is the measured residual entropy.
#[derive(Clone, Debug)]
pub struct Comparison {
    /// The data file.
    pub file: String,
    /// Temperature of the comparison in K.
    pub temperature_k: f64,
    /// Third-law (calorimetric) entropy at that temperature, J/(mol K), and its 1σ.
    pub s_cal: (f64, f64),
    /// Statistical entropy at that temperature, J/(mol K), and its 1σ.
    pub s_stat: (f64, f64),
    /// Whether the statistical entropy came with a 1σ (without one, σ = 0 is used).
    pub s_stat_sigma_given: bool,
    /// Entropy added below the lowest measured temperature, J/(mol K).
    pub extrapolated: f64,
    /// How it was obtained, in words ("Debye T³", "γT + βT³", …).
    pub low_t_words: String,
    /// Debye temperature of the low-temperature fit, K, when a cubic term was fitted.
    pub debye_temperature_k: Option<f64>,
    /// Measured points: (T in K, Cp in J/(mol K)).
    pub points: Vec<(f64, f64)>,
    /// Lowest temperature of the data, K (the Debye extrapolation covers 0..this).
    pub lowest_k: f64,
    /// The interpolant of Cp/T used for the integral: (T in K, Cp/T in J/(mol K²)).
    pub curve: Vec<(f64, f64)>,
    /// The fitted law below the data: (T in K, Cp/T in J/(mol K²)); empty without a fit.
    pub debye_curve: Vec<(f64, f64)>,
    /// The magnetic route: `s_cal` is then the magnetic entropy released and `s_stat` the
    /// free-ion entropy m R ln q (σ 0).
    pub magnetic: Option<MagneticComparison>,
    /// Notes on formula units and units of the data (conversions, assumptions) and the
    /// magnetic route's threshold check; a note that begins `WARNING: ` is shown as one.
    pub notes: Vec<String>,
    /// Whether the data's formula unit could not be checked (the file states none).
    pub unchecked_unit: bool,
}

/// The magnetic route of a calorimetric comparison.
#[derive(Clone, Debug)]
pub struct MagneticComparison {
    /// States per magnetic ion.
    pub q: u32,
    /// Magnetic ions per formula unit of the lattice.
    pub ions_per_unit: f64,
    /// The lattice term subtracted, in words, if any.
    pub lattice_term: Option<String>,
}

impl Comparison {
    /// The measured residual entropy S_stat − S_cal in J/(mol K) and its 1σ (independent
    /// errors added in quadrature).
    pub fn residual(&self) -> (f64, f64) {
        (
            self.s_stat.0 - self.s_cal.0,
            self.s_stat.1.hypot(self.s_cal.1),
        )
    }

    /// W per formula unit implied by the residual, exp(S0/R), and its 1σ.
    pub fn w_per_unit(&self) -> (f64, f64) {
        let (s, ds) = self.residual();
        let w = (s / thermo::R).exp();
        (w, w * ds / thermo::R)
    }
}

/// Everything a report shows.
#[derive(Clone, Debug)]
pub struct Writeup<'a> {
    lattice: &'a Lattice,
    survey: &'a Survey,
    meta: Meta,
    comparison: Option<Comparison>,
}

impl<'a> Writeup<'a> {
    /// Gather a report.
    pub fn new(
        lattice: &'a Lattice,
        survey: &'a Survey,
        meta: Meta,
        comparison: Option<Comparison>,
    ) -> Writeup<'a> {
        Writeup {
            lattice,
            survey,
            meta,
            comparison,
        }
    }

    /// The value to cite and why (see [`Survey::cited`]).
    pub fn cited(&self) -> Cited<'a> {
        self.survey.cited()
    }

    /// How the cited number was made, in words, for the paste-able sentence.
    fn provenance(&self, v: &CitedValue<'_>) -> String {
        let s = self.survey;
        let unit = &self.lattice.crystal.formula_unit.name;
        let e = v.estimate;
        match v.reason {
            CitedReason::TransferMatrix => {
                let w: Vec<usize> = s
                    .strips
                    .as_ref()
                    .map(|t| t.widths.iter().map(|r| r.width).collect())
                    .unwrap_or_default();
                format!(
                    "the largest eigenvalue of the column transfer matrix on periodic strips of width {}..{} cells, extrapolated to infinite width",
                    w.first().copied().unwrap_or(0),
                    w.last().copied().unwrap_or(0)
                )
            }
            CitedReason::MonteCarloExtrapolated => {
                let (m, form) = match (&s.sampled, &s.extrapolated) {
                    (Some(m), Some(x)) => (m, x.fit.form()),
                    _ => return "Monte Carlo thermodynamic integration".into(),
                };
                format!(
                    "Monte Carlo thermodynamic integration on the cells {} (up to {} {unit}; {} replicas per cell, seed {}), extrapolated to the infinite crystal by the weighted fit {}",
                    crate::survey::cell_list(&s.sampled_sizes),
                    amount(m.sampled.estimate.formula_units),
                    m.sampled.replicas,
                    m.sampled.seed,
                    form
                )
            }
            CitedReason::MonteCarloCell => match &s.sampled {
                Some(m) => format!(
                    "Monte Carlo thermodynamic integration on a {} cell ({} {unit}; {} replicas, {} measured sweeps, seed {}; a finite cell, not the infinite crystal)",
                    m.cells,
                    amount(m.sampled.estimate.formula_units),
                    m.sampled.replicas,
                    m.sampled.samples,
                    m.sampled.seed
                ),
                None => "Monte Carlo thermodynamic integration on a finite cell".into(),
            },
            CitedReason::ExactCell => format!(
                "an exact count of the arrangements of a {} cell ({} {unit}; a finite cell, not the infinite crystal)",
                e.cells.as_deref().unwrap_or(""),
                amount(e.formula_units)
            ),
            CitedReason::Bethe => {
                "the Bethe approximation (belief propagation; an approximation, no count ran)"
                    .into()
            }
            CitedReason::Pauling => {
                "Pauling's independent-constraint estimate (an approximation; no count ran)".into()
            }
        }
    }

    /// The sentence a user can paste into a paper (see [`uncertainty_meaning`]), or the
    /// reason there is none: nothing can be cited, or a cross-check of the run failed (a
    /// disagreement means some number of the run is wrong, so none is offered for pasting).
    pub fn sentence(&self) -> Sentence {
        let c = &self.lattice.crystal;
        let unit = &c.formula_unit.name;
        let cited = self.cited();
        let failed = self.survey.failed_checks();
        if !failed.is_empty() {
            let what: Vec<String> = failed
                .iter()
                .map(|k| {
                    format!(
                        "{} against the {} (W = {} against {} per {unit})",
                        method_label_of(k.method),
                        crate::report::route_words(&k.route),
                        sig(k.value.exp(), 8),
                        sig(k.reference.exp(), 8)
                    )
                })
                .collect();
            return Sentence::Refused(format!(
                "no sentence to paste: a cross-check of this run failed ({}); a disagreement \
                 means a number of this run is wrong, so none is offered for citing until it \
                 is understood",
                what.join("; ")
            ));
        }
        let Some(v) = &cited.value else {
            let why: Vec<String> = cited
                .passed_over
                .iter()
                .map(|p| crate::report::refusal_words(p, unit))
                .collect();
            return Sentence::Refused(format!(
                "no sentence to paste: no value of this run can be cited ({})",
                why.join("; ")
            ));
        };
        let b = v.estimate;
        let p = &self.survey.pauling;
        let local = match (pauling::caveat(p), &self.survey.bethe) {
            (None, _) => format!(
                "Pauling's estimate: W = {}, S0 = {} J/(mol K)",
                sig(p.w_per_unit(), 8),
                sig(p.s_j_per_mol_k(), 6)
            ),
            (Some(_), Some(bethe)) => format!(
                "Pauling's independent-constraint estimate, W = {}, is below 1 and not \
                 meaningful for this rule; the Bethe approximation gives W = {}, S0 = {} J/(mol K)",
                sig(p.w_per_unit(), 6),
                sig(bethe.w_per_unit(), 8),
                sig(bethe.s_j_per_mol_k(), 6)
            ),
            (Some(_), None) => format!(
                "Pauling's independent-constraint estimate, W = {}, is below 1 and not \
                 meaningful for this rule",
                sig(p.w_per_unit(), 6)
            ),
        };
        Sentence::Cite(format!(
            "The configurational (residual) entropy of {} was computed with groundcount {} on {} from {}: \
             W = {} arrangements per {unit}, i.e. S0 = R ln W = {} J/(mol K) per mole of {unit} \
             ({local}); {}.",
            c.name,
            self.meta.version,
            self.meta.date,
            self.provenance(v),
            plus_minus(b.w_per_unit(), b.sigma_w(), 12),
            plus_minus(b.s_j_per_mol_k(), b.sigma_s_j_per_mol_k(), 12),
            uncertainty_meaning(b.method),
        ))
    }

    /// The report as one JSON document.
    pub fn json(&self) -> Value {
        let c = &self.lattice.crystal;
        let s = self.survey;
        let p = &s.pauling;
        let cited = self.cited();
        let unit = &c.formula_unit.name;
        let strips = s.strips.as_ref().map(|t| {
            json!({
                "estimate": estimate_json(c, &t.estimate, Some(p)),
                "widths": t.widths.iter().map(|r| json!({
                    "width": r.width,
                    "ln_lambda": r.ln_lambda,
                    "ln_lambda_bracket": [r.ln_bracket.0, r.ln_bracket.1],
                    "w_per_unit": r.ln_w_per_unit.exp(),
                    "states": r.states,
                    "iterations": r.iterations,
                })).collect::<Vec<_>>(),
                "scaling": format!("{:?}", t.extrapolation.scaling).to_lowercase(),
                "fits": t.extrapolation.fits.len(),
                "central_charge": t.central_charge,
            })
        });
        let sampled = s.sampled.as_ref().map(|m| {
            let x = &m.sampled;
            json!({
                "estimate": estimate_json(c, &x.estimate, Some(p)),
                "cells": m.cells,
                "seed": x.seed,
                "replicas": x.replicas,
                "samples": x.samples,
                "updates": x.updates,
                "sigma_statistical": x.sigma_statistical,
                "sigma_quadrature": x.sigma_quadrature,
                "sigma_tail": x.sigma_tail,
                "beta": x.betas,
                "mean_energy": x.mean_energy,
                "reference_energy": x.reference_energy,
            })
        });
        let sizes = s.extrapolated.as_ref().map(|x| {
            json!({
                "estimate": estimate_json(c, &x.estimate, Some(p)),
                "cells": s.sampled_sizes.iter().map(|m| json!({
                    "cells": m.cells,
                    "estimate": estimate_json(c, &m.sampled.estimate, Some(p)),
                })).collect::<Vec<_>>(),
                "form": x.fit.form(),
                "coefficients": x.fit.coefficients,
                "chi2": x.fit.chi2,
                "dof": x.fit.dof,
            })
        });
        let comparison = self.comparison.as_ref().map(|k| {
            let (r, dr) = k.residual();
            let (w, dw) = k.w_per_unit();
            json!({
                "file": k.file,
                "temperature_k": k.temperature_k,
                "s_cal_j_per_mol_k": k.s_cal.0,
                "s_cal_uncertainty": k.s_cal.1,
                "s_stat_j_per_mol_k": k.s_stat.0,
                "s_stat_uncertainty": k.s_stat.1,
                "extrapolated_j_per_mol_k": k.extrapolated,
                "debye_temperature_k": k.debye_temperature_k,
                "residual_j_per_mol_k": r,
                "residual_uncertainty": dr,
                "w_per_unit": w,
                "w_uncertainty": dw,
                "s_stat_uncertainty_given": k.s_stat_sigma_given,
                "low_t_form": k.low_t_words,
                "notes": k.notes,
                "formula_unit_unchecked": k.unchecked_unit,
                "magnetic": k.magnetic.as_ref().map(|m| json!({
                    "states_per_ion": m.q,
                    "ions_per_formula_unit": m.ions_per_unit,
                    "free_ion_entropy_j_per_mol_k": k.s_stat.0,
                    "lattice_term": m.lattice_term,
                })),
                "computed_minus_measured_sigmas": cited.value.as_ref().map(|v| {
                    let b = v.estimate;
                    (b.s_j_per_mol_k() - r) / b.sigma_s_j_per_mol_k().unwrap_or(0.0).hypot(dr)
                }),
            })
        });
        json!({
            "groundcount_version": self.meta.version,
            "date": self.meta.date,
            "lattice": c.name,
            "file": self.meta.file,
            "content_hash": self.lattice.content_hash,
            "dimensions": c.dimensions,
            "formula_unit": {
                "name": c.formula_unit.name,
                "basis": c.formula_unit.describe(),
                "per_cell": c.formula_unit.per_cell(c),
            },
            "budget_seconds": s.budget,
            "cited": cited.value.as_ref().map(|v| json!({
                "method": v.estimate.method.name(),
                "label": method_label(v.estimate),
                "reason": v.reason,
                "why": crate::report::reason_words(s, v),
                "infinite_crystal": v.reason.is_infinite_crystal(),
                "estimate": estimate_json(c, v.estimate, Some(p)),
            })),
            "passed_over": crate::report::passed_over_json(&cited, unit),
            "checks": crate::report::checks_json(&s.checks),
            "pauling": estimate_json(c, p, None),
            "bethe": s.bethe.as_ref().map(|e| estimate_json(c, e, Some(p))),
            "exact": s.exact.iter().map(|e| estimate_json(c, e, Some(p))).collect::<Vec<_>>(),
            "exact_stopped": s.stopped,
            "transfer_matrix": strips,
            "monte_carlo": sampled,
            "monte_carlo_infinite": sizes,
            "calorimetry": comparison,
            "notes": s.notes,
            "sentence": match self.sentence() {
                Sentence::Cite(t) => Value::from(t),
                Sentence::Refused(_) => Value::Null,
            },
            "sentence_refused": match self.sentence() {
                Sentence::Cite(_) => Value::Null,
                Sentence::Refused(why) => Value::from(why),
            },
        })
    }

    /// The report as Markdown; figures are referred to by file name.
    pub fn markdown(&self) -> String {
        markdown::render(self)
    }

    /// The SVG figures that apply to this survey.
    pub fn figures(&self) -> Vec<Figure> {
        plots::figures(self)
    }
}

/// The sentence to paste into a paper, or why there is none.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Sentence {
    /// The sentence.
    Cite(String),
    /// Why no sentence is offered (a failed cross-check, or nothing citable).
    Refused(String),
}

impl Sentence {
    /// The sentence, or the refusal in words.
    pub fn text(&self) -> &str {
        match self {
            Sentence::Cite(t) | Sentence::Refused(t) => t,
        }
    }
}

/// A method's name as in tables.
fn method_label_of(m: Method) -> &'static str {
    match m {
        Method::Pauling => "Pauling",
        Method::Bethe => "Bethe",
        Method::Exact => "exact count",
        Method::MonteCarlo => "Monte Carlo",
        Method::TransferMatrix => "transfer matrix",
    }
}

/// What the ± of a cited value means, by the method behind it.
pub fn uncertainty_meaning(method: Method) -> &'static str {
    match method {
        Method::TransferMatrix => {
            "the uncertainty is the spread of the extrapolations to infinite width over fit \
             orders, windows and width families (a systematic estimate, not a standard error)"
        }
        Method::MonteCarlo => "the uncertainty is one standard error",
        Method::Exact | Method::Pauling | Method::Bethe => {
            "the value has no statistical uncertainty"
        }
    }
}
