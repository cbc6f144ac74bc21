//! The JSON documents: typed records serialised by serde, under one versioned schema.
//!
//! Every JSON document groundcount writes is a record of this module (or of the command
//! that writes it, built from these records) wrapped in [`Versioned`], which puts the
//! top-level key `schema_version` ([`SCHEMA_VERSION`]) first. One quantity has one key in
//! every document: `w_per_unit` and its 1σ `w_uncertainty`, `s_j_per_mol_k` and its 1σ
//! `s_uncertainty`, `sigma_ln_w_statistical` and its siblings for the parts of the 1σ of
//! ln W. docs/json.md lists every key with its unit and meaning.
//!
//! JSON has no infinities: a value that is not finite (ln W = −∞ for a count of zero) is
//! written as `null` (serde_json writes every non-finite number as `null`).

use serde::Serialize;

use crate::counters::local;
use crate::counters::sampling::Sampled;
use crate::counters::sampling::size::SizeFit;
use crate::counters::transfer::{SectorBasis, StripResult};
use crate::crosscheck::CrossCheck;
use crate::crystal::Crystal;
use crate::estimate::{Cited, CitedValue, Estimate, EstimateRecord, Refusal, Survey};
use crate::text;

/// The version of the JSON schema documented in docs/json.md. It changes when a key is
/// renamed, removed or changes its meaning; added keys keep it.
pub const SCHEMA_VERSION: u32 = 1;

/// A document with its `schema_version` key first.
#[derive(Serialize)]
pub struct Versioned<'a, T: Serialize> {
    /// Always [`SCHEMA_VERSION`].
    schema_version: u32,
    /// The document's own keys.
    #[serde(flatten)]
    document: &'a T,
}

impl<'a, T: Serialize> Versioned<'a, T> {
    /// Wrap a document.
    pub fn new(document: &'a T) -> Self {
        Versioned {
            schema_version: SCHEMA_VERSION,
            document,
        }
    }
}

/// A document as pretty-printed JSON with its `schema_version`, ending in a newline.
pub fn to_string<T: Serialize>(document: &T) -> serde_json::Result<String> {
    Ok(serde_json::to_string_pretty(&Versioned::new(document))? + "\n")
}

/// Pauling's estimate beside another value: W, S0/R, S0, and why it is not meaningful.
#[derive(Clone, Debug, Serialize)]
pub struct PaulingSummary {
    /// W per formula unit.
    pub w_per_unit: f64,
    /// S0/R per formula unit (= ln W).
    pub s_over_r: f64,
    /// S0 in J/(mol K) per mole of formula units.
    pub s_j_per_mol_k: f64,
    /// Why it is not a meaningful value of W for this rule, in words; `null` when it is.
    pub not_meaningful: Option<String>,
    /// A weighted file: ln Z per formula unit (absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ln_z_per_unit: Option<f64>,
    /// A weighted file: the imposed means, fields and means reached (absent when none).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub fields: Vec<crate::estimate::FieldValue>,
}

impl PaulingSummary {
    /// The summary of Pauling's estimate `p` of a crystal whose formula unit is `unit`.
    pub fn new(p: &Estimate, unit: &str) -> Self {
        PaulingSummary {
            w_per_unit: p.w_per_unit(),
            s_over_r: p.s_over_r(),
            s_j_per_mol_k: p.s_j_per_mol_k(),
            not_meaningful: local::caveat(p).map(|c| c.explain(unit)),
            ln_z_per_unit: p.weighing.as_ref().map(|w| w.ln_z_per_unit),
            fields: p
                .weighing
                .as_ref()
                .map(|w| w.fields.clone())
                .unwrap_or_default(),
        }
    }
}

/// One estimate of a lattice: the lattice's name, file and formula unit, the estimate's
/// keys ([`Estimate`]'s record), for a local estimate why it is not meaningful, and
/// Pauling's estimate beside it.
#[derive(Clone, Debug, Serialize)]
pub struct EstimateOf {
    /// The lattice's name.
    pub lattice: String,
    /// The lattice file.
    pub file: String,
    /// The formula unit's name.
    pub formula_unit: String,
    /// The estimate.
    #[serde(flatten)]
    pub estimate: EstimateRecord,
    /// Local estimates (Pauling, Bethe) only: why the value is not meaningful, or `null`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub not_meaningful: Option<Option<String>>,
    /// Pauling's estimate beside it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pauling: Option<PaulingSummary>,
}

impl EstimateOf {
    /// The estimate `e` of `crystal`, with Pauling's estimate `pauling` beside it.
    pub fn new(crystal: &Crystal, e: &Estimate, pauling: Option<&Estimate>) -> Self {
        let unit = &crystal.formula_unit.name;
        EstimateOf {
            lattice: crystal.name.clone(),
            file: crystal.path.display().to_string(),
            formula_unit: unit.clone(),
            estimate: EstimateRecord::from(e),
            not_meaningful: e
                .is_local()
                .then(|| local::caveat(e).map(|c| c.explain(unit))),
            pauling: pauling.map(|p| PaulingSummary::new(p, unit)),
        }
    }
}

/// One cross-check: the method checked, the second route (as data and in words), both
/// values as ln W per formula unit, their difference, the tolerance, whether the second
/// route is a bound, and the verdict.
#[derive(Clone, Debug, Serialize)]
pub struct CheckRecord {
    /// The method whose value is checked.
    pub method: crate::estimate::Method,
    /// The second route.
    pub route: crate::crosscheck::Route,
    /// The second route in words.
    pub route_words: String,
    /// The checked value, ln W per formula unit.
    pub ln_w_per_unit: f64,
    /// The second route's value (a lower bound when `bound`), ln W per formula unit.
    pub reference_ln_w_per_unit: f64,
    /// `ln_w_per_unit − reference_ln_w_per_unit`.
    pub difference: f64,
    /// Largest difference that counts as agreement.
    pub tolerance: f64,
    /// Whether the second route is a lower bound rather than a second estimate.
    pub bound: bool,
    /// Whether the two agree (for a bound: the value is not below it).
    pub agrees: bool,
}

impl From<&CrossCheck> for CheckRecord {
    fn from(c: &CrossCheck) -> Self {
        CheckRecord {
            method: c.method,
            route: c.route.clone(),
            route_words: text::route_words(&c.route),
            ln_w_per_unit: c.value,
            reference_ln_w_per_unit: c.reference,
            difference: c.value - c.reference,
            tolerance: c.tolerance,
            bound: c.is_bound(),
            agrees: c.agrees(),
        }
    }
}

/// The records of a list of cross-checks.
pub fn checks(checks: &[CrossCheck]) -> Vec<CheckRecord> {
    checks.iter().map(CheckRecord::from).collect()
}

/// A candidate for citing that [`Survey::cited`] passed over.
#[derive(Clone, Debug, Serialize)]
pub struct PassedOverRecord {
    /// Its method.
    pub method: crate::estimate::Method,
    /// Its cell; `null` for the infinite crystal.
    pub cells: Option<String>,
    /// Its W per formula unit.
    pub w_per_unit: f64,
    /// Why it was passed over, in words.
    pub why: String,
    /// Why, as a word: `check-failed`, `no-degrees-of-freedom` or `not-meaningful`.
    pub refusal: &'static str,
}

/// The candidates [`Survey::cited`] passed over.
pub fn passed_over(c: &Cited<'_>, unit: &str) -> Vec<PassedOverRecord> {
    c.passed_over
        .iter()
        .map(|p| PassedOverRecord {
            method: p.estimate.method,
            cells: p.estimate.cells.clone(),
            w_per_unit: p.estimate.w_per_unit(),
            why: text::refusal_words(p, unit),
            refusal: match &p.why {
                Refusal::CheckFailed(_) => "check-failed",
                Refusal::NoDegreesOfFreedom => "no-degrees-of-freedom",
                Refusal::NotMeaningful(_) => "not-meaningful",
            },
        })
        .collect()
}

/// The value to cite: its method, why it is the one (its rank as a word, and in words),
/// whether it is a value of the infinite crystal, and the estimate itself.
#[derive(Clone, Debug, Serialize)]
pub struct CitedRecord {
    /// Its method.
    pub method: crate::estimate::Method,
    /// Its method as in tables.
    pub label: String,
    /// Its rank in the order of [`Survey::cited`], as a word.
    pub reason: crate::estimate::CitedReason,
    /// Why it is the one, in words.
    pub why: String,
    /// Whether it is a value of the infinite crystal (not a finite cell).
    pub infinite_crystal: bool,
    /// The estimate.
    pub estimate: EstimateOf,
}

impl CitedRecord {
    /// The record of the value `v` that `s` cites.
    pub fn new(crystal: &Crystal, s: &Survey, v: &CitedValue<'_>) -> Self {
        CitedRecord {
            method: v.estimate.method,
            label: text::method_label(v.estimate),
            reason: v.reason,
            why: text::reason_words(s, v),
            infinite_crystal: v.reason.is_infinite_crystal(),
            estimate: EstimateOf::new(crystal, v.estimate, Some(&s.pauling)),
        }
    }

    /// The value a survey cites, or `None` when nothing can be cited.
    pub fn of(crystal: &Crystal, s: &Survey) -> Option<Self> {
        s.cited()
            .value
            .as_ref()
            .map(|v| CitedRecord::new(crystal, s, v))
    }
}

/// One strip width of the transfer matrix.
#[derive(Clone, Debug, Serialize)]
pub struct WidthRecord {
    /// Width in cells across the strip.
    pub width: usize,
    /// ln of the largest eigenvalue of the column transfer matrix.
    pub ln_lambda: f64,
    /// The Collatz–Wielandt bracket of `ln_lambda`, lower and upper.
    pub ln_lambda_bracket: [f64; 2],
    /// W per formula unit of the strip, λ^(1 / formula units per column).
    pub w_per_unit: f64,
    /// States of the operator kept.
    pub states: usize,
    /// States on which the eigenvector lives.
    pub recurrent_states: usize,
    /// Whether the bracket is certified.
    pub bracket_certified: bool,
    /// Largest number of frontier states at any step of a column.
    pub peak_states: usize,
    /// Nonzero entries of the operator.
    pub transitions: usize,
    /// Power iterations.
    pub iterations: usize,
    /// The conserved charge kept; `null` when every state is.
    pub sector: Option<i64>,
    /// How the sector was established.
    pub sector_basis: &'static str,
    /// Whether states are paired with their reversals.
    pub reversal_pairs: bool,
    /// Wall time in seconds.
    pub seconds: f64,
    /// A weighted crystal: ln Z and ⟨ln w⟩ per formula unit, the fields and the means
    /// reached at this width, and the error bound of the derivatives (absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weighing: Option<crate::counters::transfer::WidthWeighing>,
}

impl From<&StripResult> for WidthRecord {
    fn from(r: &StripResult) -> Self {
        WidthRecord {
            width: r.width,
            ln_lambda: r.ln_lambda,
            ln_lambda_bracket: [r.ln_bracket.0, r.ln_bracket.1],
            w_per_unit: r.ln_w_per_unit.exp(),
            states: r.states,
            recurrent_states: r.recurrent_states,
            bracket_certified: r.certified,
            peak_states: r.peak_states,
            transitions: r.transitions,
            iterations: r.iterations,
            sector: r.sector,
            sector_basis: basis_word(&r.basis),
            reversal_pairs: r.reversal,
            seconds: r.seconds,
            weighing: r.weighing.clone(),
        }
    }
}

/// How a width's sector was established, as one word.
fn basis_word(b: &SectorBasis) -> &'static str {
    match b {
        SectorBasis::Whole => "all-states",
        SectorBasis::Given => "given",
        SectorBasis::FullSpace => "full-space",
        SectorBasis::LocalMaximum => "neighbours",
        SectorBasis::Predicted { .. } => "predicted",
    }
}

/// How strip values approach the limit, as a word: `critical` or `gapped`.
pub fn scaling_word(s: crate::counters::extrapolate::Scaling) -> &'static str {
    use crate::counters::extrapolate::Scaling;
    match s {
        Scaling::Gapped => "gapped",
        Scaling::Critical => "critical",
        Scaling::Auto => "auto",
    }
}

/// A Monte Carlo run by thermodynamic integration: how it ran and the parts of its 1σ.
#[derive(Clone, Debug, Serialize)]
pub struct SampledRecord {
    /// The seed of the random streams.
    pub seed: u64,
    /// Measured sweeps in all.
    pub samples: u64,
    /// Replicas run.
    pub replicas: usize,
    /// Single-variable updates in all.
    pub updates: u64,
    /// Statistical part of the 1σ of ln W per formula unit.
    pub sigma_ln_w_statistical: f64,
    /// Quadrature part of the 1σ of ln W per formula unit.
    pub sigma_ln_w_quadrature: f64,
    /// Part of the 1σ of ln W per formula unit from the tail beyond β_max.
    pub sigma_ln_w_tail: f64,
    /// Allowance for a failed equilibration check, in ln W per formula unit.
    pub sigma_ln_w_equilibration: f64,
    /// ln W per formula unit from the pass up minus that from the pass down.
    pub hysteresis_ln_w_per_unit: f64,
    /// 1σ of `hysteresis_ln_w_per_unit`.
    pub sigma_hysteresis: f64,
    /// Whether the equilibration check passed.
    pub equilibrated: bool,
    /// Times the run was repeated with twice the sweeps.
    pub extensions: usize,
    /// Measured sweeps per node and replica.
    pub sweeps: usize,
    /// Equilibration sweeps per node and pass.
    pub equilibration: usize,
    /// Whether an interrupt stopped the run early.
    pub interrupted: bool,
    /// Largest inverse temperature sampled (in units of one violated constraint).
    pub beta_max: f64,
    /// The largest β at which every replica ran 64 chains in machine words (absent when
    /// each replica was one chain throughout).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub lanes_up_to_beta: Option<f64>,
    /// Loop moves attempted per sweep.
    pub loop_attempts_per_sweep: usize,
    /// Fraction of loop attempts that flipped a loop.
    pub loop_acceptance: f64,
    /// With a target error: whether the σ reached it.
    pub target_reached: Option<bool>,
    /// Mean number of violated constraints left at β_max.
    pub violations_at_beta_max: f64,
    /// A weighted lattice only (absent otherwise): what the run measured beside the
    /// entropy.
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub weighted: Option<SampledWeighingRecord>,
}

/// The measurements of a weighted Monte Carlo run beside its entropy (docs/json.md).
#[derive(Clone, Debug, Serialize)]
pub struct SampledWeighingRecord {
    /// 1σ of `ln_z_per_unit` (statistical, quadrature, tail, equilibration).
    pub sigma_ln_z: f64,
    /// ⟨ln w⟩ per formula unit in the defect-free ensemble.
    pub mean_ln_weight_per_unit: f64,
    /// Its 1σ.
    pub sigma_mean_ln_weight: f64,
    /// Measured sweeps at β_max with no violated constraint (the defect-free samples).
    pub defect_free_samples: u64,
    /// Their fraction of the measured sweeps at β_max.
    pub defect_free_fraction: f64,
    /// Cov(n_j, n_k) of the imposed means' counts in the defect-free ensemble, row-major.
    pub count_covariance: Vec<f64>,
}

impl From<&Sampled> for SampledRecord {
    fn from(s: &Sampled) -> Self {
        SampledRecord {
            seed: s.seed,
            samples: s.samples,
            replicas: s.replicas,
            updates: s.updates,
            sigma_ln_w_statistical: s.sigma_statistical,
            sigma_ln_w_quadrature: s.sigma_quadrature,
            sigma_ln_w_tail: s.sigma_tail,
            sigma_ln_w_equilibration: s.sigma_equilibration,
            hysteresis_ln_w_per_unit: s.hysteresis,
            sigma_hysteresis: s.sigma_hysteresis,
            equilibrated: s.equilibrated,
            extensions: s.extensions,
            sweeps: s.sweeps,
            equilibration: s.equilibration,
            interrupted: s.interrupted,
            beta_max: s.beta_max,
            lanes_up_to_beta: s.lanes_up_to_beta,
            loop_attempts_per_sweep: s.loop_attempts_per_sweep,
            loop_acceptance: s.loop_acceptance,
            target_reached: s.target_reached,
            violations_at_beta_max: s.mean_energy.last().copied().unwrap_or(f64::NAN),
            weighted: s.weighing.as_ref().map(|w| SampledWeighingRecord {
                sigma_ln_z: w.sigma_ln_z,
                mean_ln_weight_per_unit: w.mean_ln_w_per_unit,
                sigma_mean_ln_weight: w.sigma_mean_ln_w,
                defect_free_samples: w.ground_samples,
                defect_free_fraction: w.ground_fraction,
                count_covariance: w.covariance.clone(),
            }),
        }
    }
}

/// The fit of Monte Carlo cells to the infinite crystal, s(N) = s∞ + a/N (+ b ln N/N).
#[derive(Clone, Debug, Serialize)]
pub struct SizeFitRecord {
    /// The form fitted, in symbols.
    pub form: &'static str,
    /// s∞: ln W per formula unit of the infinite crystal.
    pub ln_w_per_unit_infinite: f64,
    /// 1σ of `ln_w_per_unit_infinite`.
    pub sigma_ln_w: f64,
    /// The part of `sigma_ln_w` from the fit alone.
    pub sigma_fit: f64,
    /// The systematic allowance added to `sigma_ln_w`, in ln W per formula unit.
    pub systematic: f64,
    /// The fitted coefficients after s∞: a, then b in the free three-term form (a only with
    /// the flux law).
    pub coefficients: Vec<f64>,
    /// χ² of the fit.
    pub chi2: f64,
    /// Degrees of freedom of the fit.
    pub dof: usize,
    /// The other form, in symbols.
    pub alternative_form: &'static str,
    /// s∞ from the other form, if it could be fitted.
    pub alternative_ln_w_per_unit: Option<f64>,
    /// 1σ of `alternative_ln_w_per_unit`.
    pub alternative_sigma_ln_w: Option<f64>,
    /// With a conserved flux on cells of one shape: b fixed at 1/6 and its test on the
    /// data (absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub flux_law: Option<crate::counters::sampling::size::FluxLaw>,
    /// `true` when the rule has a conserved flux but the cells are not of one shape, so b
    /// was fitted (absent otherwise).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub not_one_shape: bool,
    /// The cited form refitted with c/N² added and c tested, where the cells leave that a
    /// degree of freedom (absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub next_term: Option<crate::counters::sampling::size::NextTerm>,
}

impl From<&SizeFit> for SizeFitRecord {
    fn from(f: &SizeFit) -> Self {
        SizeFitRecord {
            form: f.form(),
            ln_w_per_unit_infinite: f.value,
            sigma_ln_w: f.sigma,
            sigma_fit: f.sigma_fit,
            systematic: f.systematic,
            coefficients: f.coefficients.clone(),
            chi2: f.chi2,
            dof: f.dof,
            alternative_form: f.alternative_form(),
            alternative_ln_w_per_unit: f.alternative.map(|t| t.0),
            alternative_sigma_ln_w: f.alternative.map(|t| t.1),
            flux_law: f.law.clone(),
            not_one_shape: f.not_one_shape,
            next_term: f.next_term.clone(),
        }
    }
}

/// An estimate of the infinite crystal from Monte Carlo cells, with its fit.
#[derive(Clone, Debug, Serialize)]
pub struct ExtrapolatedRecord {
    /// The estimate.
    #[serde(flatten)]
    pub estimate: EstimateOf,
    /// The fit.
    pub fit: SizeFitRecord,
}
