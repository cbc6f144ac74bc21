//! A citable report of one survey: Markdown, JSON and SVG figures.
//!
//! # What it is for
//!
//! A user who must state a residual entropy in a paper needs every method's number side by
//! side, the diagnostics behind each, the calorimetric comparison when there is one, and a
//! sentence saying how the number was made. [`Report::new`] gathers these from a
//! [`Survey`] (and optionally a calorimetric result); [`Report::json`],
//! [`Report::markdown`] and [`Report::figures`] render them. Nothing here computes a
//! count: it only reads estimates.
//!
//! # Arguments and returns
//!
//! The lattice, the survey, [`Meta`] (version, date, how the run was asked for) and an
//! optional [`Comparison`] of a statistical value with a calorimetric one. The renderers
//! return strings; the caller writes the files.

mod json;
mod markdown;
mod plots;

use crate::Lattice;
use crate::calorimetry::ThirdLaw;
use crate::counters::local;
use crate::estimate::Method;
use crate::estimate::{Cited, CitedReason, CitedValue, Hint, Survey};
use crate::text::{amount, plus_minus, sig};
use crate::thermo;

pub use json::ReportDocument;
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
    /// The comparison of a third-law analysis ([`ThirdLaw`]) with a statistical entropy
    /// ([`ThirdLaw::residual`]; without one, S_stat = 0 ± 0), or of the magnetic route: the
    /// data file `file` as the user named it, whether the statistical entropy came with its
    /// 1σ, how the data's formula unit matches the lattice's (`matched`: every molar value
    /// is divided by its factor), and the notes to show (worded by the caller; one that
    /// begins `WARNING: ` is shown as a warning).
    pub fn new(
        r: &ThirdLaw,
        file: &str,
        s_stat_sigma_given: bool,
        matched: &crate::calorimetry::UnitMatch,
        notes: Vec<String>,
    ) -> Comparison {
        use crate::calorimetry::LowTemperatureForm;
        let k = matched.factor;
        let s_stat = r
            .residual
            .as_ref()
            .map_or((0.0, 0.0), |x| (x.s_stat / k, x.s_stat_sigma / k));
        Comparison {
            file: file.to_string(),
            temperature_k: r.target_k,
            s_cal: (r.s_cal / k, r.uncertainty.total / k),
            s_stat,
            s_stat_sigma_given: s_stat_sigma_given || r.magnetic.is_some(),
            extrapolated: r.low_t.entropy / k,
            low_t_words: match r.low_t.form {
                LowTemperatureForm::Debye(_) => "Debye T³".into(),
                LowTemperatureForm::LinearCubic(_) => "γT + βT³".into(),
                LowTemperatureForm::Zero => "nothing (taken as 0)".into(),
                LowTemperatureForm::Given(..) => "the entropy given".into(),
            },
            debye_temperature_k: r.low_t.debye_temperature_k,
            points: r.points.iter().map(|p| (p.t_k, p.cp)).collect(),
            lowest_k: r.low_t.lowest_k,
            curve: r.curve(200),
            debye_curve: r.debye_curve(50),
            magnetic: r.magnetic.as_ref().map(|m| MagneticComparison {
                q: m.q,
                ions_per_unit: m.ions / k,
                lattice_term: m.phonons.as_ref().map(|p| {
                    format!(
                        "{} × {} C(T; θ = {} K){}",
                        crate::text::trimmed(p.atoms, 6),
                        p.model.name(),
                        sig(p.theta_k, 5),
                        p.fit.map_or(" (given)".into(), |f| format!(
                            " fitted above {} K",
                            crate::text::trimmed(f.above_k, 6)
                        ))
                    )
                }),
            }),
            notes,
            unchecked_unit: matched.unchecked,
        }
    }

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
pub struct Report<'a> {
    lattice: &'a Lattice,
    survey: &'a Survey,
    meta: Meta,
    comparison: Option<Comparison>,
    hints: fn(Hint) -> String,
}

impl<'a> Report<'a> {
    /// Gather a report.
    pub fn new(
        lattice: &'a Lattice,
        survey: &'a Survey,
        meta: Meta,
        comparison: Option<Comparison>,
    ) -> Report<'a> {
        Report {
            lattice,
            survey,
            meta,
            comparison,
            hints: crate::text::hint_words,
        }
    }

    /// The same report, with the advice on what to run next worded by `hints` (the
    /// binary's words name its commands; by default [`crate::text::hint_words`]).
    pub fn with_hints(mut self, hints: fn(Hint) -> String) -> Self {
        self.hints = hints;
        self
    }

    /// The survey's notes in words.
    pub fn notes(&self) -> Vec<String> {
        self.survey
            .notes
            .iter()
            .map(|n| crate::text::note_words(n, &self.hints))
            .collect()
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
                    (Some(m), Some(x)) => (m, x.details.form()),
                    _ => return "Monte Carlo thermodynamic integration".into(),
                };
                format!(
                    "Monte Carlo thermodynamic integration on the cells {} (up to {} {unit}; {} replicas per cell, seed {}), extrapolated to the infinite crystal by the weighted fit {}",
                    crate::estimate::cell_list(&s.sampled_sizes),
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
                        crate::text::route_words(&k.route),
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
                .map(|p| crate::text::refusal_words(p, unit))
                .collect();
            return Sentence::Refused(format!(
                "no sentence to paste: no value of this run can be cited ({})",
                why.join("; ")
            ));
        };
        let b = v.estimate;
        let p = &self.survey.pauling;
        let local = match (local::caveat(p), &self.survey.bethe) {
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

    /// The report as one JSON document (report.json; docs/json.md). Serialise it with
    /// [`crate::json::to_string`], which adds the `schema_version`.
    pub fn json(&self) -> json::ReportDocument {
        json::document(self)
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
