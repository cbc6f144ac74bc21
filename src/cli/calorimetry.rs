//! `groundcount calorimetry DATA.csv`: the third-law entropy from measured heat
//! capacities, and with `--statistical` the residual entropy it implies.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::calorimetry::{self, CalorimetryConfig, HeatCapacityData, ThirdLaw, Transition};
use groundcount::text::{self, Table, sig};

use super::Format;

/// Arguments of `calorimetry`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Heat-capacity data: CSV with a header row; columns T (K), Cp (J/(mol K)) and
    /// optionally the 1σ of Cp (J/(mol K)).
    data: PathBuf,
    #[command(flatten)]
    options: Options,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
    /// No messages on standard error (this command prints none but errors).
    #[arg(long, short)]
    quiet: bool,
}

/// The calorimetric options `calorimetry` and `report` share.
#[derive(clap::Args, Debug, Clone)]
pub struct Options {
    /// Temperature of the result in K (default: 298.15 K if inside the data, otherwise the
    /// highest measured temperature).
    #[arg(long = "to", value_name = "T")]
    to: Option<f64>,
    /// A first-order transition, T:ΔH with T in K and ΔH in J/mol (repeatable).
    #[arg(long = "transition", value_name = "T:ΔH")]
    transitions: Vec<String>,
    /// Low-temperature extrapolation: debye:N fits Cp = a T³ to the lowest N points
    /// (default debye:4).
    #[arg(long = "low-t", value_name = "debye:N")]
    low_t: Option<String>,
    /// Statistical entropy at the target temperature, S±σ in J/(mol K) (or S+-σ); S alone
    /// is taken with σ = 0, and the output says so.
    #[arg(long, value_name = "S±σ", allow_hyphen_values = true)]
    statistical: Option<String>,
}

impl Options {
    /// The library configuration the options ask for.
    pub fn config(&self) -> anyhow::Result<CalorimetryConfig> {
        let mut c = CalorimetryConfig {
            target_k: self.to,
            ..CalorimetryConfig::default()
        };
        for t in &self.transitions {
            c.transitions.push(parse_transition(t)?);
        }
        if let Some(l) = &self.low_t {
            c.low_t_points = parse_low_t(l)?;
        }
        if let Some(s) = &self.statistical {
            let (v, e) = parse_statistical(s)?;
            c.statistical = Some((v, e.unwrap_or(0.0)));
        }
        Ok(c)
    }

    /// Whether any calorimetric option was given.
    pub fn is_used(&self) -> bool {
        self.to.is_some()
            || !self.transitions.is_empty()
            || self.low_t.is_some()
            || self.statistical.is_some()
    }

    /// Whether a statistical entropy was given.
    pub fn has_statistical(&self) -> bool {
        self.statistical.is_some()
    }

    /// Whether the statistical entropy was given with its 1σ (false also when none was
    /// given, or it does not parse).
    pub fn statistical_sigma_given(&self) -> bool {
        self.statistical
            .as_deref()
            .and_then(|s| parse_statistical(s).ok())
            .is_some_and(|(_, e)| e.is_some())
    }
}

/// `T:ΔH` (K, J/mol).
fn parse_transition(s: &str) -> anyhow::Result<Transition> {
    let bad = || {
        anyhow::anyhow!(
            "--transition expects T:ΔH with T in K and ΔH in J/mol (e.g. 180.5:1200), found `{s}`"
        )
    };
    let (t, h) = s.split_once(':').ok_or_else(bad)?;
    let t_k: f64 = t.trim().parse().map_err(|_| bad())?;
    let dh_j_per_mol: f64 = h.trim().parse().map_err(|_| bad())?;
    Ok(Transition { t_k, dh_j_per_mol })
}

/// `debye:N`.
fn parse_low_t(s: &str) -> anyhow::Result<usize> {
    let bad = || {
        anyhow::anyhow!(
            "--low-t expects debye:N with N the number of lowest points of the T³ fit (e.g. \
             debye:4), found `{s}`"
        )
    };
    let (kind, n) = s.split_once(':').ok_or_else(bad)?;
    if kind.trim() != "debye" {
        return Err(bad());
    }
    n.trim().parse().map_err(|_| bad())
}

/// `S±σ` or `S+-σ` in J/(mol K), or `S` alone (no σ).
fn parse_statistical(s: &str) -> anyhow::Result<(f64, Option<f64>)> {
    let bad = || {
        anyhow::anyhow!(
            "--statistical expects S±σ or S in J/(mol K) (e.g. 44.81±0.05, 44.81+-0.05 or \
             44.81), found `{s}`"
        )
    };
    let (v, e) = match s.split_once('±').or_else(|| s.split_once("+-")) {
        Some((v, e)) => {
            let e: f64 = e.trim().parse().map_err(|_| bad())?;
            if !(e.is_finite() && e >= 0.0) {
                return Err(bad());
            }
            (v, Some(e))
        }
        None => (s, None),
    };
    let v: f64 = v.trim().parse().map_err(|_| bad())?;
    if !v.is_finite() {
        return Err(bad());
    }
    Ok((v, e))
}

/// Read a data file and analyse it.
pub fn analyse(data: &std::path::Path, options: &Options) -> anyhow::Result<ThirdLaw> {
    let config = options.config()?;
    let d = HeatCapacityData::from_file(data)?;
    Ok(calorimetry::analyse(&d, &config)?)
}

/// One quantity of the summary: a label, the value (`None`: not available, with the words
/// shown instead), its 1σ when there is one, the number of significant digits shown, and
/// the unit.
struct Quantity {
    label: String,
    value: Result<f64, &'static str>,
    sigma: Option<f64>,
    digits: usize,
    unit: &'static str,
}

impl Quantity {
    fn new(
        label: String,
        value: f64,
        sigma: Option<f64>,
        digits: usize,
        unit: &'static str,
    ) -> Self {
        Quantity {
            label,
            value: Ok(value),
            sigma,
            digits,
            unit,
        }
    }
}

/// The summary: quantity, value, 1σ, unit. Labels stay short so that the table fits in 100
/// columns; what the fit used is in the notes.
fn quantities(r: &ThirdLaw, sigma_given: bool) -> Vec<Quantity> {
    let f = &r.low_t;
    let u = &r.uncertainty;
    let t = |x: f64| text::trimmed(x, 6);
    let mut out = vec![
        Quantity::new(
            format!(
                "T³ coefficient a (Cp = a T³, lowest {} points)",
                f.points.len()
            ),
            f.a,
            Some(f.a_sigma),
            6,
            "J/(mol K⁴)",
        ),
        Quantity::new(
            "Debye temperature θ_D".into(),
            f.debye_temperature_k,
            Some(f.debye_temperature_sigma),
            6,
            "K",
        ),
        Quantity::new(
            format!("entropy below {} K, a T₀³/3", t(f.lowest_k)),
            f.entropy,
            Some(f.entropy_sigma),
            6,
            "J/(mol K)",
        ),
        Quantity::new(
            format!(
                "∫ Cp d(ln T), {}..{} K, monotone cubic",
                t(f.lowest_k),
                t(r.target_k)
            ),
            r.integral,
            None,
            8,
            "J/(mol K)",
        ),
        Quantity::new(
            "  the same by the trapezoid rule".into(),
            r.integral_trapezoid,
            None,
            8,
            "J/(mol K)",
        ),
    ];
    for x in &r.transitions {
        out.push(Quantity::new(
            format!(
                "transition at {} K: ΔH/T, ΔH = {} J/mol",
                t(x.transition.t_k),
                t(x.transition.dh_j_per_mol)
            ),
            x.entropy,
            None,
            6,
            "J/(mol K)",
        ));
    }
    out.push(Quantity::new(
        format!("third-law entropy S_cal({} K)", t(r.target_k)),
        r.s_cal,
        Some(u.total),
        6,
        "J/(mol K)",
    ));
    out.push(Quantity {
        label: "  1σ from the Cp uncertainties".into(),
        value: u.data.ok_or("not given"),
        sigma: None,
        digits: 2,
        unit: "J/(mol K)",
    });
    out.push(Quantity::new(
        "  1σ of the T³ extrapolation".into(),
        u.extrapolation,
        None,
        2,
        "J/(mol K)",
    ));
    out.push(Quantity::new(
        "  quadrature (cubic − trapezoid)".into(),
        u.quadrature,
        None,
        2,
        "J/(mol K)",
    ));
    if let Some(s) = &r.residual {
        out.push(Quantity::new(
            "statistical entropy S_stat (given)".into(),
            s.s_stat,
            sigma_given.then_some(s.s_stat_sigma),
            6,
            "J/(mol K)",
        ));
        out.push(Quantity::new(
            "residual entropy S0 = S_stat − S_cal".into(),
            s.residual,
            Some(s.residual_sigma),
            6,
            "J/(mol K)",
        ));
        out.push(Quantity::new(
            "W = exp(S0/R)".into(),
            s.w_per_unit,
            Some(s.w_sigma),
            6,
            "per formula unit",
        ));
    }
    out
}

/// The summary table: rounded values for reading, plain numbers in the CSV layout (an
/// empty cell where there is no value or no 1σ).
fn summary_table(r: &ThirdLaw, sigma_given: bool) -> Table {
    let mut t = Table::new(&["quantity", "value", "1σ", "unit"])
        .with_csv(&["quantity", "value", "1σ", "unit"]);
    for q in quantities(r, sigma_given) {
        t.row(vec![
            q.label.clone(),
            match q.value {
                Ok(v) => sig(v, q.digits),
                Err(words) => words.into(),
            },
            q.sigma.map_or_else(String::new, |s| sig(s, 2)),
            q.unit.into(),
        ]);
        t.csv_row(vec![
            q.label,
            q.value.map_or_else(|_| String::new(), text::number),
            text::optional(q.sigma),
            q.unit.into(),
        ]);
    }
    t
}

/// Notes under the table; `sigma_given` says whether the statistical entropy came with
/// its 1σ.
fn notes(r: &ThirdLaw, sigma_given: bool) -> Vec<String> {
    let mut n = Vec::new();
    if let Some(t) = &r.target_note {
        n.push(t.clone());
    }
    let f = &r.low_t;
    let temps: Vec<String> = f
        .temperatures_k
        .iter()
        .map(|t| text::trimmed(*t, 6))
        .collect();
    n.push(format!(
        "the T³ fit uses the lowest {} points ({} K), {}; θ_D = (12π⁴R/(5a))^(1/3) counts one \
         atom per formula unit",
        f.points.len(),
        temps.join(", "),
        if f.weighted {
            "weighted by 1/σ²"
        } else {
            "unweighted"
        }
    ));
    if r.residual.is_some() && !sigma_given {
        n.push(
            "the statistical entropy was given without an uncertainty: σ = 0 is used, so the \
             residual's 1σ holds only the calorimetric part"
                .into(),
        );
    }
    if r.uncertainty.data.is_none() {
        n.push(
            "the data give no 1σ of Cp: the uncertainty holds only the extrapolation and \
             quadrature parts"
                .into(),
        );
    }
    n.push(
        "a third-law entropy rests on the T³ extrapolation below the lowest point and on the \
         calorimeter's calibration, neither of which the uncertainty above covers fully"
            .into(),
    );
    n
}

/// The JSON document of `calorimetry` (docs/json.md).
#[derive(serde::Serialize)]
struct Document {
    file: String,
    points: usize,
    temperature_k: f64,
    target_note: Option<String>,
    s_cal_j_per_mol_k: f64,
    s_cal_uncertainty: f64,
    uncertainty_parts_j_per_mol_k: UncertaintyParts,
    low_t_fit: LowTFit,
    debye_temperature_k: f64,
    debye_temperature_uncertainty: f64,
    lowest_k: f64,
    extrapolated_j_per_mol_k: f64,
    extrapolated_uncertainty: f64,
    integral_j_per_mol_k: f64,
    integral_trapezoid_j_per_mol_k: f64,
    transitions: Vec<TransitionRecord>,
    s_cal_at_points: Vec<PointRecord>,
    notes: Vec<String>,
    /// With a statistical entropy: the residual entropy it implies.
    #[serde(flatten)]
    residual: Option<ResidualRecord>,
}

/// The three parts of the 1σ of S_cal, J/(mol K).
#[derive(serde::Serialize)]
struct UncertaintyParts {
    data: Option<f64>,
    extrapolation: f64,
    quadrature: f64,
}

/// The T³ fit to the lowest points.
#[derive(serde::Serialize)]
struct LowTFit {
    points: usize,
    temperatures_k: Vec<f64>,
    weighted: bool,
    a_j_per_mol_k4: f64,
    a_uncertainty: f64,
}

/// A first-order transition.
#[derive(serde::Serialize)]
struct TransitionRecord {
    temperature_k: f64,
    enthalpy_j_per_mol: f64,
    entropy_j_per_mol_k: f64,
}

/// A measured point and S_cal there.
#[derive(serde::Serialize)]
struct PointRecord {
    temperature_k: f64,
    cp_j_per_mol_k: f64,
    s_cal_j_per_mol_k: f64,
}

/// The residual entropy implied by a statistical entropy.
#[derive(serde::Serialize)]
struct ResidualRecord {
    s_stat_j_per_mol_k: f64,
    s_stat_uncertainty: f64,
    s_stat_uncertainty_given: bool,
    residual_j_per_mol_k: f64,
    residual_uncertainty: f64,
    w_per_unit: f64,
    w_uncertainty: f64,
}

/// The JSON document of an analysis.
fn document(r: &ThirdLaw, sigma_given: bool) -> Document {
    let f = &r.low_t;
    let u = &r.uncertainty;
    Document {
        file: r.path.display().to_string(),
        points: r.points.len(),
        temperature_k: r.target_k,
        target_note: r.target_note.clone(),
        s_cal_j_per_mol_k: r.s_cal,
        s_cal_uncertainty: u.total,
        uncertainty_parts_j_per_mol_k: UncertaintyParts {
            data: u.data,
            extrapolation: u.extrapolation,
            quadrature: u.quadrature,
        },
        low_t_fit: LowTFit {
            points: f.points.len(),
            temperatures_k: f.temperatures_k.clone(),
            weighted: f.weighted,
            a_j_per_mol_k4: f.a,
            a_uncertainty: f.a_sigma,
        },
        debye_temperature_k: f.debye_temperature_k,
        debye_temperature_uncertainty: f.debye_temperature_sigma,
        lowest_k: f.lowest_k,
        extrapolated_j_per_mol_k: f.entropy,
        extrapolated_uncertainty: f.entropy_sigma,
        integral_j_per_mol_k: r.integral,
        integral_trapezoid_j_per_mol_k: r.integral_trapezoid,
        transitions: r
            .transitions
            .iter()
            .map(|x| TransitionRecord {
                temperature_k: x.transition.t_k,
                enthalpy_j_per_mol: x.transition.dh_j_per_mol,
                entropy_j_per_mol_k: x.entropy,
            })
            .collect(),
        s_cal_at_points: r
            .points
            .iter()
            .zip(&r.at_points)
            .map(|(p, s)| PointRecord {
                temperature_k: p.t_k,
                cp_j_per_mol_k: p.cp,
                s_cal_j_per_mol_k: *s,
            })
            .collect(),
        notes: notes(r, sigma_given),
        residual: r.residual.as_ref().map(|s| ResidualRecord {
            s_stat_j_per_mol_k: s.s_stat,
            s_stat_uncertainty: s.s_stat_sigma,
            s_stat_uncertainty_given: sigma_given,
            residual_j_per_mol_k: s.residual,
            residual_uncertainty: s.residual_sigma,
            w_per_unit: s.w_per_unit,
            w_uncertainty: s.w_sigma,
        }),
    }
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let _ = args.quiet;
    let r = analyse(&args.data, &args.options)?;
    let sigma_given = args.options.statistical_sigma_given();
    let t = summary_table(&r, sigma_given);
    match args.format {
        Format::Json => Ok(groundcount::json::to_string(&document(&r, sigma_given))?),
        Format::Csv => Ok(t.render_csv()),
        fmt => {
            let mut out = String::new();
            writeln!(
                out,
                "Third-law entropy from {} ({} points, {}..{} K)\n",
                r.path.display(),
                r.points.len(),
                text::trimmed(r.points[0].t_k, 6),
                text::trimmed(r.points[r.points.len() - 1].t_k, 6)
            )?;
            let mut p = Table::new(&["T (K)", "Cp (J/(mol K))", "S_cal (J/(mol K))"]);
            for (x, s) in r.points.iter().zip(&r.at_points) {
                p.row(vec![text::trimmed(x.t_k, 6), sig(x.cp, 6), sig(*s, 6)]);
            }
            if fmt == Format::Markdown {
                out += &t.render_markdown();
                out += "\n";
                out += &p.render_markdown();
            } else {
                out += &t.render();
                out += "\n";
                out += &p.render();
            }
            writeln!(out)?;
            for n in notes(&r, sigma_given) {
                writeln!(out, "Note: {n}.")?;
            }
            Ok(out)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn option_values_parse() {
        assert_eq!(parse_statistical("3.43±0.21").unwrap(), (3.43, Some(0.21)));
        assert_eq!(parse_statistical("3.43+-0.21").unwrap(), (3.43, Some(0.21)));
        // issue 11: S alone is accepted, with no σ (0 is used and a note says so).
        assert_eq!(parse_statistical("3.43").unwrap(), (3.43, None));
        assert_eq!(parse_statistical(" 186.77 ").unwrap(), (186.77, None));
        for bad in ["", "±0.2", "3.43±", "3.43±-1", "inf", "3.43±x", "x"] {
            assert!(parse_statistical(bad).is_err(), "{bad}");
        }
        assert_eq!(parse_low_t("debye:5").unwrap(), 5);
        assert!(parse_low_t("einstein:5").is_err());
        let t = parse_transition("180.5:1200").unwrap();
        assert_eq!((t.t_k, t.dh_j_per_mol), (180.5, 1200.0));
        assert!(parse_transition("180.5").is_err());
    }
}
