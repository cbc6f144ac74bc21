//! report.json: the report as one typed document (keys in docs/json.md).

use serde::Serialize;

use super::{Report, Sentence};
use crate::json::{
    CheckRecord, CitedRecord, EstimateOf, PassedOverRecord, SampledRecord, SizeFitRecord,
    WidthRecord,
};

/// The report as one JSON document.
#[derive(Clone, Debug, Serialize)]
pub struct ReportDocument {
    /// groundcount's version.
    groundcount_version: String,
    /// The date of the run, `YYYY-MM-DD` (UTC).
    date: String,
    lattice: String,
    /// The lattice file as the user named it.
    file: String,
    content_hash: String,
    dimensions: usize,
    formula_unit: FormulaUnitRecord,
    /// The time budget of the survey, seconds.
    budget_seconds: f64,
    cited: Option<CitedRecord>,
    passed_over: Vec<PassedOverRecord>,
    checks: Vec<CheckRecord>,
    pauling: EstimateOf,
    bethe: Option<EstimateOf>,
    exact: Vec<EstimateOf>,
    /// Why the exact counts stopped (empty when they ran to the limit).
    exact_stopped: String,
    transfer_matrix: Option<StripsRecord>,
    monte_carlo: Option<MonteCarloRecord>,
    monte_carlo_infinite: Option<SizesRecord>,
    calorimetry: Option<ComparisonRecord>,
    notes: Vec<String>,
    /// The sentence to paste into a paper; `null` when refused.
    sentence: Option<String>,
    /// Why no sentence is offered; `null` when one is.
    sentence_refused: Option<String>,
}

/// The formula unit: its name, what one of it is, and how many a cell holds.
#[derive(Clone, Debug, Serialize)]
struct FormulaUnitRecord {
    name: String,
    basis: String,
    per_cell: f64,
}

/// The strips and their extrapolation to infinite width.
#[derive(Clone, Debug, Serialize)]
struct StripsRecord {
    estimate: EstimateOf,
    widths: Vec<WidthRecord>,
    /// `critical` or `gapped`.
    scaling: &'static str,
    /// Number of fits made.
    fits: usize,
    central_charge: Option<f64>,
}

/// The largest Monte Carlo cell: its estimate, how it ran, and the integrand.
#[derive(Clone, Debug, Serialize)]
struct MonteCarloRecord {
    estimate: EstimateOf,
    cells: String,
    #[serde(flatten)]
    run: SampledRecord,
    /// β of every quadrature node.
    beta: Vec<f64>,
    /// Replica mean of the number of violated constraints at every node.
    mean_energy: Vec<f64>,
    /// The Pauling reference energy at every node.
    reference_energy: Vec<f64>,
}

/// One Monte Carlo cell of an extrapolation.
#[derive(Clone, Debug, Serialize)]
struct CellRecord {
    cells: String,
    estimate: EstimateOf,
}

/// The Monte Carlo cells extrapolated to the infinite crystal.
#[derive(Clone, Debug, Serialize)]
struct SizesRecord {
    estimate: EstimateOf,
    cells: Vec<CellRecord>,
    #[serde(flatten)]
    fit: SizeFitRecord,
}

/// The calorimetric comparison.
#[derive(Clone, Debug, Serialize)]
struct ComparisonRecord {
    file: String,
    temperature_k: f64,
    s_cal_j_per_mol_k: f64,
    s_cal_uncertainty: f64,
    s_stat_j_per_mol_k: f64,
    s_stat_uncertainty: f64,
    extrapolated_j_per_mol_k: f64,
    /// `null` when no cubic term was fitted below the data.
    debye_temperature_k: Option<f64>,
    residual_j_per_mol_k: f64,
    residual_uncertainty: f64,
    w_per_unit: f64,
    w_uncertainty: f64,
    s_stat_uncertainty_given: bool,
    /// How the entropy below the lowest point was found, in words.
    low_t_form: String,
    notes: Vec<String>,
    formula_unit_unchecked: bool,
    /// The magnetic route, or `null`.
    magnetic: Option<MagneticComparisonRecord>,
    /// (computed − measured residual entropy) / their combined 1σ.
    computed_minus_measured_sigmas: Option<f64>,
}

/// The magnetic route of a report's comparison.
#[derive(Clone, Debug, Serialize)]
struct MagneticComparisonRecord {
    states_per_ion: u32,
    ions_per_formula_unit: f64,
    free_ion_entropy_j_per_mol_k: f64,
    lattice_term: Option<String>,
}

/// The document of a report.
pub(super) fn document(r: &Report<'_>) -> ReportDocument {
    let c = &r.lattice.crystal;
    let s = r.survey;
    let p = &s.pauling;
    let cited = r.cited();
    let unit = &c.formula_unit.name;
    let of = |e: &crate::Estimate| EstimateOf::new(c, e, Some(p));
    let transfer_matrix = s.strips.as_ref().map(|t| StripsRecord {
        estimate: of(&t.estimate),
        widths: t.widths.iter().map(WidthRecord::from).collect(),
        scaling: crate::json::scaling_word(t.extrapolation.scaling),
        fits: t.extrapolation.fits.len(),
        central_charge: t.central_charge,
    });
    let monte_carlo = s.sampled.as_ref().map(|m| {
        let x = &m.sampled;
        MonteCarloRecord {
            estimate: of(&x.estimate),
            cells: m.cells.clone(),
            run: SampledRecord::from(&x.details),
            beta: x.betas.clone(),
            mean_energy: x.mean_energy.clone(),
            reference_energy: x.reference_energy.clone(),
        }
    });
    let monte_carlo_infinite = s.extrapolated.as_ref().map(|x| SizesRecord {
        estimate: of(&x.estimate),
        cells: s
            .sampled_sizes
            .iter()
            .map(|m| CellRecord {
                cells: m.cells.clone(),
                estimate: of(&m.sampled.estimate),
            })
            .collect(),
        fit: SizeFitRecord::from(&x.details),
    });
    let calorimetry = r.comparison.as_ref().map(|k| {
        let (res, dres) = k.residual();
        let (w, dw) = k.w_per_unit();
        ComparisonRecord {
            file: k.file.clone(),
            temperature_k: k.temperature_k,
            s_cal_j_per_mol_k: k.s_cal.0,
            s_cal_uncertainty: k.s_cal.1,
            s_stat_j_per_mol_k: k.s_stat.0,
            s_stat_uncertainty: k.s_stat.1,
            extrapolated_j_per_mol_k: k.extrapolated,
            debye_temperature_k: k.debye_temperature_k,
            residual_j_per_mol_k: res,
            residual_uncertainty: dres,
            w_per_unit: w,
            w_uncertainty: dw,
            s_stat_uncertainty_given: k.s_stat_sigma_given,
            low_t_form: k.low_t_words.clone(),
            notes: k.notes.clone(),
            formula_unit_unchecked: k.unchecked_unit,
            magnetic: k.magnetic.as_ref().map(|m| MagneticComparisonRecord {
                states_per_ion: m.q,
                ions_per_formula_unit: m.ions_per_unit,
                free_ion_entropy_j_per_mol_k: k.s_stat.0,
                lattice_term: m.lattice_term.clone(),
            }),
            computed_minus_measured_sigmas: cited.value.as_ref().map(|v| {
                let b = v.estimate;
                (b.s_j_per_mol_k() - res) / b.sigma_s_j_per_mol_k().unwrap_or(0.0).hypot(dres)
            }),
        }
    });
    let (sentence, sentence_refused) = match r.sentence() {
        Sentence::Cite(t) => (Some(t), None),
        Sentence::Refused(why) => (None, Some(why)),
    };
    ReportDocument {
        groundcount_version: r.meta.version.clone(),
        date: r.meta.date.clone(),
        lattice: c.name.clone(),
        file: r.meta.file.clone(),
        content_hash: r.lattice.content_hash.clone(),
        dimensions: c.dimensions,
        formula_unit: FormulaUnitRecord {
            name: unit.clone(),
            basis: c.formula_unit.describe(),
            per_cell: c.formula_unit.per_cell(c),
        },
        budget_seconds: s.budget,
        cited: cited.value.as_ref().map(|v| CitedRecord::new(c, s, v)),
        passed_over: crate::json::passed_over(&cited, unit),
        checks: crate::json::checks(&s.checks),
        pauling: EstimateOf::new(c, p, None),
        bethe: s.bethe.as_ref().map(of),
        exact: s.exact.iter().map(of).collect(),
        exact_stopped: s
            .stopped
            .as_ref()
            .map_or(String::new(), crate::text::stop_words),
        transfer_matrix,
        monte_carlo,
        monte_carlo_infinite,
        calorimetry,
        notes: r.notes(),
        sentence,
        sentence_refused,
    }
}
