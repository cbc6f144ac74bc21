//! `groundcount calorimetry DATA.csv`: the third-law entropy from measured heat
//! capacities, and with `--statistical` the residual entropy it implies; with `--magnetic Q`
//! the magnetic entropy released and the residual against R ln Q per magnetic ion.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::calorimetry::{
    self, CalorimetryConfig, CpUnit, HeatCapacityData, LowTemperatureForm, MagneticConfig,
    PhononModel, Phonons, TemperatureUnit, ThirdLaw, Transition, UnitMatch,
};
use groundcount::text::{self, Table, sig};

use super::Format;

/// Arguments of `calorimetry`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Heat-capacity data: CSV with a header row; columns T (K), Cp (J/(mol K)) and
    /// optionally the 1σ of Cp (J/(mol K)); `#@` lines may state other units and the formula
    /// unit.
    data: PathBuf,
    #[command(flatten)]
    options: Options,
    /// The formula unit the results are wanted per: the data file's `#@ formula-unit` must
    /// name the same, or --unit-ratio convert between them.
    #[arg(long, value_name = "NAME")]
    formula_unit: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
    /// No messages on standard error (this command prints none but errors and the warning
    /// that a formula unit could not be checked).
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
    /// Entropy below the lowest point: debye:N (Cp = a T³ fitted to the lowest N points;
    /// the default, debye:4), gamma-beta:N (Cp = γT + βT³, N ≥ 3), none (zero), or
    /// entropy:S±σ (given, J/(mol K)).
    #[arg(long = "low-t", value_name = "FORM")]
    low_t: Option<String>,
    /// Atoms per formula unit, for the Debye temperature per atom and a lattice term
    /// (default 1: θ_D then counts one oscillator group per formula unit).
    #[arg(long, value_name = "N")]
    atoms: Option<f64>,
    /// Statistical entropy at the target temperature, S±σ in J/(mol K) (or S+-σ); S alone
    /// is taken with σ = 0, and the output says so.
    #[arg(long, value_name = "S±σ", allow_hyphen_values = true)]
    statistical: Option<String>,
    /// The magnetic route: the entropy released by magnetic ions of Q states each (2 for
    /// Ising spins), ∫ C_mag/T dT up to --to (default: the highest point), and the residual
    /// R ln Q − ΔS per magnetic ion.
    #[arg(long, value_name = "Q")]
    magnetic: Option<u32>,
    /// Magnetic ions per formula unit of the data (default 1; e.g. 2 for Dy2Ti2O7).
    #[arg(long, value_name = "M", requires = "magnetic")]
    ions: Option<f64>,
    /// Lattice heat capacity subtracted in the magnetic route: debye:θ[±σ] or
    /// einstein:θ[±σ] (θ in K, per atom, times --atoms), or debye:above:T / einstein:above:T
    /// (θ fitted to the points above T K).
    #[arg(long, value_name = "MODEL", requires = "magnetic")]
    phonons: Option<String>,
    /// Formula units of the comparison (the lattice's, or --formula-unit) in one formula
    /// unit of the data, when the two differ (e.g. 2 for Dy per Dy2Ti2O7).
    #[arg(long, value_name = "N")]
    unit_ratio: Option<f64>,
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
            c.low_t = parse_low_t(l)?;
        }
        c.atoms = self.atoms;
        if let Some(s) = &self.statistical {
            let (v, e) = parse_statistical(s)?;
            c.statistical = Some((v, e.unwrap_or(0.0)));
        }
        if let Some(q) = self.magnetic {
            if self.statistical.is_some() {
                anyhow::bail!(
                    "--magnetic and --statistical both set the entropy the residual is taken \
                     from; give one of them"
                );
            }
            c.magnetic = Some(MagneticConfig {
                q,
                ions: self.ions.unwrap_or(1.0),
                phonons: self.phonons.as_deref().map(parse_phonons).transpose()?,
            });
        }
        Ok(c)
    }

    /// Whether the magnetic route was asked for.
    pub fn is_magnetic(&self) -> bool {
        self.magnetic.is_some()
    }

    /// Whether any calorimetric option was given.
    pub fn is_used(&self) -> bool {
        self.to.is_some()
            || !self.transitions.is_empty()
            || self.low_t.is_some()
            || self.statistical.is_some()
            || self.atoms.is_some()
            || self.magnetic.is_some()
            || self.unit_ratio.is_some()
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

/// `debye:N`, `gamma-beta:N`, `none` or `entropy:S±σ`.
fn parse_low_t(s: &str) -> anyhow::Result<LowTemperatureForm> {
    let bad = || {
        anyhow::anyhow!(
            "--low-t expects debye:N (Cp = a T³ fitted to the lowest N points), gamma-beta:N \
             (Cp = γT + βT³), none, or entropy:S±σ (J/(mol K) at the lowest point), found `{s}`"
        )
    };
    if s.trim() == "none" {
        return Ok(LowTemperatureForm::Zero);
    }
    let (kind, rest) = s.split_once(':').ok_or_else(bad)?;
    match kind.trim() {
        "debye" => Ok(LowTemperatureForm::Debye(
            rest.trim().parse().map_err(|_| bad())?,
        )),
        "gamma-beta" => Ok(LowTemperatureForm::LinearCubic(
            rest.trim().parse().map_err(|_| bad())?,
        )),
        "entropy" => {
            let (v, e) = value_and_sigma(rest).ok_or_else(bad)?;
            Ok(LowTemperatureForm::Given(v, e.unwrap_or(0.0)))
        }
        _ => Err(bad()),
    }
}

/// `debye:θ[±σ]`, `einstein:θ[±σ]`, `debye:above:T` or `einstein:above:T`.
fn parse_phonons(s: &str) -> anyhow::Result<Phonons> {
    let bad = || {
        anyhow::anyhow!(
            "--phonons expects debye:θ or einstein:θ (θ in K, optionally θ±σ), or debye:above:T \
             or einstein:above:T (θ fitted to the points above T K), found `{s}`"
        )
    };
    let (kind, rest) = s.split_once(':').ok_or_else(bad)?;
    let model = match kind.trim() {
        "debye" => PhononModel::Debye,
        "einstein" => PhononModel::Einstein,
        _ => return Err(bad()),
    };
    if let Some(t) = rest.trim().strip_prefix("above:") {
        let t: f64 = t.trim().parse().map_err(|_| bad())?;
        return Ok(Phonons::FittedAbove(model, t));
    }
    let (v, e) = value_and_sigma(rest).ok_or_else(bad)?;
    Ok(Phonons::Given(model, v, e.unwrap_or(0.0)))
}

/// `v±σ`, `v+-σ` or `v`: finite numbers, σ not negative.
fn value_and_sigma(s: &str) -> Option<(f64, Option<f64>)> {
    let (v, e) = match s.split_once('±').or_else(|| s.split_once("+-")) {
        Some((v, e)) => {
            let e: f64 = e.trim().parse().ok()?;
            if !(e.is_finite() && e >= 0.0) {
                return None;
            }
            (v, Some(e))
        }
        None => (s, None),
    };
    let v: f64 = v.trim().parse().ok()?;
    v.is_finite().then_some((v, e))
}

/// `S±σ` or `S+-σ` in J/(mol K), or `S` alone (no σ).
fn parse_statistical(s: &str) -> anyhow::Result<(f64, Option<f64>)> {
    let bad = || {
        anyhow::anyhow!(
            "--statistical expects S±σ or S in J/(mol K) (e.g. 44.81±0.05, 44.81+-0.05 or \
             44.81), found `{s}`"
        )
    };
    value_and_sigma(s).ok_or_else(bad)
}

/// Read a data file and analyse it; with `target` (the formula unit of the comparison),
/// match the data's formula unit against it first.
pub fn analyse(
    data: &std::path::Path,
    options: &Options,
    target: Option<&str>,
) -> anyhow::Result<(ThirdLaw, Option<UnitMatch>)> {
    let config = options.config()?;
    let d = HeatCapacityData::from_file(data)?;
    let matched = match target {
        Some(t) => Some(calorimetry::reconcile(&d, t, options.unit_ratio).map_err(
            |e| match e {
                groundcount::error::Error::FormulaUnitMismatch {
                    ref data_unit,
                    ref target_unit,
                    ..
                } => anyhow::anyhow!(
                    "{e}; pass --unit-ratio N, N the number of {target_unit} in one {data_unit}, \
                     to convert"
                ),
                e => e.into(),
            },
        )?),
        None => {
            if options.unit_ratio.is_some() {
                anyhow::bail!(
                    "--unit-ratio converts to the formula unit of a comparison; give \
                     --formula-unit NAME with it"
                );
            }
            None
        }
    };
    Ok((calorimetry::analyse(&d, &config)?, matched))
}

/// One quantity of the summary: a label, the value (`None`: not available, with the words
/// shown instead), its 1σ when there is one, the number of significant digits shown, and
/// the unit.
struct Quantity {
    label: String,
    value: Result<f64, &'static str>,
    sigma: Option<f64>,
    digits: usize,
    unit: String,
}

impl Quantity {
    fn new(label: String, value: f64, sigma: Option<f64>, digits: usize, unit: &str) -> Self {
        Quantity {
            label,
            value: Ok(value),
            sigma,
            digits,
            unit: unit.into(),
        }
    }
}

const J: &str = "J/(mol K)";

/// The rows of the extrapolation below the lowest point.
fn low_t_rows(r: &ThirdLaw, out: &mut Vec<Quantity>) {
    let f = &r.low_t;
    let t = |x: f64| text::trimmed(x, 6);
    let n = f.points.len();
    match f.form {
        LowTemperatureForm::Debye(_) => {
            out.push(Quantity::new(
                format!("T³ coefficient a (Cp = a T³, lowest {n} points)"),
                f.a,
                Some(f.a_sigma),
                6,
                "J/(mol K⁴)",
            ));
        }
        LowTemperatureForm::LinearCubic(_) => {
            let (g, gs) = f.gamma.unwrap_or((0.0, 0.0));
            out.push(Quantity::new(
                format!("γ (Cp = γT + βT³, lowest {n} points)"),
                g,
                Some(gs),
                6,
                "J/(mol K²)",
            ));
            out.push(Quantity::new(
                "β".into(),
                f.a,
                Some(f.a_sigma),
                6,
                "J/(mol K⁴)",
            ));
        }
        _ => {}
    }
    if f.is_fitted() {
        out.push(Quantity {
            label: if f.atoms_given {
                format!("Debye temperature θ_D per atom ({} atoms)", t(f.atoms))
            } else {
                "Debye temperature θ_D".into()
            },
            value: f.debye_temperature_k.ok_or("none: β ≤ 0"),
            sigma: f.debye_temperature_sigma,
            digits: 6,
            unit: "K".into(),
        });
    }
    let label = match f.form {
        LowTemperatureForm::Debye(_) => format!("entropy below {} K, a T₀³/3", t(f.lowest_k)),
        LowTemperatureForm::LinearCubic(_) => {
            format!("entropy below {} K, γT₀ + βT₀³/3", t(f.lowest_k))
        }
        LowTemperatureForm::Zero => format!("entropy below {} K (none: taken as 0)", t(f.lowest_k)),
        LowTemperatureForm::Given(..) => format!("entropy below {} K (given)", t(f.lowest_k)),
    };
    let sigma = match f.form {
        LowTemperatureForm::Zero => None,
        _ => Some(f.entropy_sigma),
    };
    out.push(Quantity::new(label, f.entropy, sigma, 6, J));
}

/// The summary: quantity, value, 1σ, unit. Labels stay short so that the table fits in 100
/// columns; what the fit used is in the notes.
fn quantities(r: &ThirdLaw, sigma_given: bool, matched: Option<&UnitMatch>) -> Vec<Quantity> {
    let u = &r.uncertainty;
    let t = |x: f64| text::trimmed(x, 6);
    let mut out = Vec::new();
    if let Some(p) = r.magnetic.as_ref().and_then(|m| m.phonons.as_ref()) {
        out.push(Quantity::new(
            match &p.fit {
                Some(fit) => format!(
                    "lattice term: {} θ, fitted above {} K ({} points)",
                    p.model.name(),
                    t(fit.above_k),
                    fit.points
                ),
                None => format!("lattice term: {} θ (given)", p.model.name()),
            },
            p.theta_k,
            (p.theta_sigma > 0.0).then_some(p.theta_sigma),
            6,
            "K",
        ));
    }
    low_t_rows(r, &mut out);
    let c = if r.magnetic.is_some() { "C_mag" } else { "Cp" };
    out.push(Quantity::new(
        format!(
            "∫ {c} d(ln T), {}..{} K, monotone cubic",
            t(r.low_t.lowest_k),
            t(r.target_k)
        ),
        r.integral,
        None,
        8,
        J,
    ));
    out.push(Quantity::new(
        "  the same by the trapezoid rule".into(),
        r.integral_trapezoid,
        None,
        8,
        J,
    ));
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
            J,
        ));
    }
    out.push(Quantity::new(
        if r.magnetic.is_some() {
            format!("magnetic entropy released ΔS_mag(0..{} K)", t(r.target_k))
        } else {
            format!("third-law entropy S_cal({} K)", t(r.target_k))
        },
        r.s_cal,
        Some(u.total),
        6,
        J,
    ));
    out.push(Quantity {
        label: "  1σ from the Cp uncertainties".into(),
        value: u.data.ok_or("not given"),
        sigma: None,
        digits: 2,
        unit: J.into(),
    });
    out.push(Quantity::new(
        "  1σ below the lowest point".into(),
        u.extrapolation,
        None,
        2,
        J,
    ));
    out.push(Quantity::new(
        "  quadrature (cubic − trapezoid)".into(),
        u.quadrature,
        None,
        2,
        J,
    ));
    if let Some(l) = u.lattice {
        out.push(Quantity::new(
            "  1σ from the lattice term's θ".into(),
            l,
            None,
            2,
            J,
        ));
    }
    if let Some(c) = threshold_check(r) {
        out.push(Quantity::new(
            format!(
                "  check: θ = {} K fitted above {} K instead",
                sig(c.theta_k, 5),
                t(c.above_k)
            ),
            c.released,
            None,
            6,
            J,
        ));
    }
    match (&r.magnetic, &r.residual) {
        (Some(m), Some(s)) => {
            out.push(Quantity::new(
                format!("free-ion entropy {} R ln {}", t(m.ions), m.q),
                m.full,
                None,
                6,
                J,
            ));
            out.push(Quantity::new(
                format!("released fraction ΔS_mag / ({} R ln {})", t(m.ions), m.q),
                m.released / m.full,
                Some(m.released_sigma / m.full),
                6,
                "",
            ));
            out.push(Quantity::new(
                "residual entropy S0 = m R ln q − ΔS_mag".into(),
                m.residual_per_unit.0,
                Some(m.residual_per_unit.1),
                6,
                J,
            ));
            out.push(Quantity::new(
                "W = exp(S0/R)".into(),
                s.w_per_unit,
                Some(s.w_sigma),
                6,
                "per formula unit",
            ));
            if m.ions != 1.0 {
                let (x, dx) = m.residual_per_ion;
                let w = (x / groundcount::thermo::R).exp();
                out.push(Quantity::new(
                    "residual per magnetic ion, R ln q − ΔS_mag/m".into(),
                    x,
                    Some(dx),
                    6,
                    "J/(mol K) per mole of ions",
                ));
                out.push(Quantity::new(
                    "W per magnetic ion".into(),
                    w,
                    Some(w * dx / groundcount::thermo::R),
                    6,
                    "per ion",
                ));
            }
        }
        (None, Some(s)) => {
            out.push(Quantity::new(
                "statistical entropy S_stat (given)".into(),
                s.s_stat,
                sigma_given.then_some(s.s_stat_sigma),
                6,
                J,
            ));
            out.push(Quantity::new(
                "residual entropy S0 = S_stat − S_cal".into(),
                s.residual,
                Some(s.residual_sigma),
                6,
                J,
            ));
            out.push(Quantity::new(
                "W = exp(S0/R)".into(),
                s.w_per_unit,
                Some(s.w_sigma),
                6,
                "per formula unit",
            ));
        }
        _ => {}
    }
    if let (Some(m), Some(s)) = (matched, &r.residual)
        && m.factor != 1.0
    {
        let (x, dx) = (s.residual / m.factor, s.residual_sigma / m.factor);
        let w = (x / groundcount::thermo::R).exp();
        out.push(Quantity::new(
            format!("residual per {} (÷ {})", m.target_unit, t(m.factor)),
            x,
            Some(dx),
            6,
            &format!("J/(mol K) per mole of {}", m.target_unit),
        ));
        out.push(Quantity::new(
            format!("W per {}", m.target_unit),
            w,
            Some(w * dx / groundcount::thermo::R),
            6,
            &format!("per {}", m.target_unit),
        ));
    }
    out
}

/// The summary table: rounded values for reading, plain numbers in the CSV layout (an
/// empty cell where there is no value or no 1σ).
fn summary_table(r: &ThirdLaw, sigma_given: bool, matched: Option<&UnitMatch>) -> Table {
    let mut t = Table::new(&["quantity", "value", "1σ", "unit"])
        .with_csv(&["quantity", "value", "1σ", "unit"]);
    for q in quantities(r, sigma_given, matched) {
        t.row(vec![
            q.label.clone(),
            match q.value {
                Ok(v) => sig(v, q.digits),
                Err(words) => words.into(),
            },
            q.sigma.map_or_else(String::new, |s| sig(s, 2)),
            q.unit.clone(),
        ]);
        t.csv_row(vec![
            q.label,
            q.value.map_or_else(|_| String::new(), text::number),
            text::optional(q.sigma),
            q.unit,
        ]);
    }
    t
}

/// The magnetic route's second threshold, when there is one.
fn threshold_check(r: &ThirdLaw) -> Option<calorimetry::magnetic::ThresholdCheck> {
    r.magnetic
        .as_ref()
        .and_then(|m| m.phonons.as_ref())
        .and_then(|p| p.fit.as_ref())
        .and_then(|f| f.check)
}

/// The note on the second threshold: loud when ΔS_mag moves by more than 2σ.
pub fn threshold_note(r: &ThirdLaw) -> Option<String> {
    let c = threshold_check(r)?;
    let shift = c.released - r.s_cal;
    Some(if c.disagrees {
        format!(
            "WARNING: with θ refitted to the {} points above {} K, ΔS_mag moves by {} J/(mol K), \
             more than twice its 1σ: the spins still add heat capacity above the threshold, \
             so the lattice term absorbs part of the magnetic entropy; raise the threshold, \
             or give θ, before citing the residual",
            c.points,
            text::trimmed(c.above_k, 6),
            sig(shift, 2)
        )
    } else {
        format!(
            "with θ refitted to the {} points above {} K, ΔS_mag moves by {} J/(mol K), within \
             twice its 1σ",
            c.points,
            text::trimmed(c.above_k, 6),
            sig(shift, 2)
        )
    })
}

/// What the data file's `#@` lines said about units, in words, when not the defaults.
pub fn unit_notes(r: &ThirdLaw) -> Vec<String> {
    let mut n = Vec::new();
    let h = &r.header;
    match h.cp_unit {
        CpUnit::Joule => {}
        CpUnit::Calorie => n.push(
            "Cp and its 1σ were read in cal/(mol K) and converted to J/(mol K) with the \
             thermochemical calorie, 4.184 J exactly"
                .into(),
        ),
        CpUnit::Millijoule => {
            n.push("Cp and its 1σ were read in mJ/(mol K) and converted to J/(mol K)".into())
        }
    }
    if h.temperature_unit == TemperatureUnit::Millikelvin {
        n.push("temperatures were read in mK and converted to K".into());
    }
    n
}

/// Notes under the table; `sigma_given` says whether the statistical entropy came with
/// its 1σ.
fn notes(r: &ThirdLaw, sigma_given: bool, matched: Option<&UnitMatch>) -> Vec<String> {
    let mut n = Vec::new();
    if let Some(t) = &r.target_note {
        n.push(t.clone());
    }
    match r.header.formula_unit.as_ref() {
        Some((u, _)) => n.push(format!(
            "the data are per mole of {u} (the file's formula unit); entropies above are per \
             mole of {u} unless stated"
        )),
        None if matched.is_none() => n.push(
            "the data file does not state its formula unit (a `#@ formula-unit:` line); the \
             values are per mole of whatever unit the data are per"
                .into(),
        ),
        None => {}
    }
    if let Some(note) = matched.and_then(|m| m.note.clone()) {
        n.push(if matched.is_some_and(|m| m.unchecked) {
            format!("WARNING: {note}")
        } else {
            note
        });
    }
    n.extend(unit_notes(r));
    let f = &r.low_t;
    let temps: Vec<String> = f
        .temperatures_k
        .iter()
        .map(|t| text::trimmed(*t, 6))
        .collect();
    let weighting = if f.weighted {
        "weighted by 1/σ²"
    } else {
        "unweighted"
    };
    let atoms = if f.atoms_given {
        format!(
            "θ_D = (12π⁴ n R/(5β))^(1/3) is per atom with n = {} atoms per formula unit",
            text::trimmed(f.atoms, 6)
        )
    } else {
        "θ_D = (12π⁴R/(5β))^(1/3) counts one atom per formula unit (--atoms N gives it per atom)"
            .into()
    };
    match f.form {
        LowTemperatureForm::Debye(_) => n.push(format!(
            "the T³ fit uses the lowest {} points ({} K), {weighting}; {}",
            f.points.len(),
            temps.join(", "),
            atoms.replace('β', "a")
        )),
        LowTemperatureForm::LinearCubic(_) => n.push(format!(
            "the γT + βT³ fit uses the lowest {} points ({} K), {weighting}; {atoms}",
            f.points.len(),
            temps.join(", "),
        )),
        LowTemperatureForm::Zero => n.push(format!(
            "no entropy is counted below the lowest point, {} K (--low-t none): right only if \
             the heat capacity there is negligible",
            text::trimmed(f.lowest_k, 6)
        )),
        LowTemperatureForm::Given(..) => n.push(format!(
            "the entropy below the lowest point, {} K, is the value given (--low-t entropy:)",
            text::trimmed(f.lowest_k, 6)
        )),
    }
    if let Some(m) = &r.magnetic {
        n.push(format!(
            "magnetic route: ΔS_mag = ∫ C_mag/T dT from 0 to {} K with {} magnetic ion(s) of {} \
             states per formula unit; the residual is {} R ln {} − ΔS_mag, the entropy the spins \
             keep below the lowest point",
            text::trimmed(r.target_k, 6),
            text::trimmed(m.ions, 6),
            m.q,
            text::trimmed(m.ions, 6),
            m.q
        ));
        match &m.phonons {
            Some(p) => {
                n.push(format!(
                    "C_mag = Cp − {} × {} C(T; θ = {} K); {}",
                    text::trimmed(p.atoms, 6),
                    p.model.name(),
                    sig(p.theta_k, 6),
                    match &p.fit {
                        Some(fit) => format!(
                            "θ fitted to the {} points above {} K (χ² = {} for {} degrees of \
                             freedom), where the spins are taken to add nothing",
                            fit.points,
                            text::trimmed(fit.above_k, 6),
                            sig(fit.chi2, 3),
                            fit.dof
                        ),
                        None => "θ as given".into(),
                    }
                ));
                if let Some(note) = threshold_note(r) {
                    n.push(note);
                }
                if m.negative_points > 0 {
                    n.push(format!(
                        "the lattice term exceeds the measured Cp at {} point(s): C_mag is \
                         negative there and integrated as it stands",
                        m.negative_points
                    ));
                }
            }
            None => n.push(
                "no lattice term is subtracted (--phonons): C_mag is the measured Cp, right \
                 only where the lattice heat capacity is negligible"
                    .into(),
            ),
        }
    }
    if r.residual.is_some() && r.magnetic.is_none() && !sigma_given {
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
    n.push(if r.magnetic.is_some() {
        "the released entropy rests on the form below the lowest point, on the lattice term \
         subtracted and on the calorimeter's calibration, none of which the uncertainty above \
         covers fully"
            .into()
    } else {
        "a third-law entropy rests on the extrapolation below the lowest point and on the \
         calorimeter's calibration, neither of which the uncertainty above covers fully"
            .into()
    });
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
    /// `null` for the `none` and `given` low-temperature forms.
    debye_temperature_k: Option<f64>,
    debye_temperature_uncertainty: Option<f64>,
    lowest_k: f64,
    extrapolated_j_per_mol_k: f64,
    extrapolated_uncertainty: f64,
    integral_j_per_mol_k: f64,
    integral_trapezoid_j_per_mol_k: f64,
    transitions: Vec<TransitionRecord>,
    s_cal_at_points: Vec<PointRecord>,
    /// `debye`, `gamma-beta`, `none` or `given`: how the entropy below the lowest point
    /// was found.
    low_t_form: &'static str,
    gamma_j_per_mol_k2: Option<f64>,
    gamma_uncertainty: Option<f64>,
    atoms_per_formula_unit: Option<f64>,
    data_formula_unit: Option<String>,
    data_cp_unit: &'static str,
    data_temperature_unit: &'static str,
    notes: Vec<String>,
    /// With a statistical entropy: the residual entropy it implies.
    #[serde(flatten)]
    residual: Option<ResidualRecord>,
    /// The magnetic route, when asked for.
    #[serde(skip_serializing_if = "Option::is_none")]
    magnetic: Option<MagneticRecord>,
    /// How the data's formula unit matches the lattice's, when a lattice was given.
    #[serde(skip_serializing_if = "Option::is_none")]
    unit_match: Option<UnitMatchRecord>,
}

/// The magnetic route: entropy released per formula unit and the residual per ion.
#[derive(serde::Serialize)]
struct MagneticRecord {
    states_per_ion: u32,
    ions_per_formula_unit: f64,
    free_ion_entropy_j_per_mol_k: f64,
    released_j_per_mol_k: f64,
    released_uncertainty: f64,
    residual_per_ion_j_per_mol_k: f64,
    residual_per_ion_uncertainty: f64,
    lattice_term: Option<LatticeTermRecord>,
    negative_points: usize,
    measured_cp_j_per_mol_k: Vec<f64>,
}

/// The lattice heat capacity subtracted on the magnetic route.
#[derive(serde::Serialize)]
struct LatticeTermRecord {
    model: &'static str,
    atoms_per_formula_unit: f64,
    theta_k: f64,
    theta_uncertainty: f64,
    fitted_above_k: Option<f64>,
    fitted_points: Option<usize>,
    chi2: Option<f64>,
    dof: Option<usize>,
    check: Option<ThresholdCheckRecord>,
}

/// θ refitted to the upper half of the fitted points, as a second route.
#[derive(serde::Serialize)]
struct ThresholdCheckRecord {
    fitted_above_k: f64,
    fitted_points: usize,
    theta_k: f64,
    released_j_per_mol_k: f64,
    disagrees: bool,
}

/// The data's formula unit against the lattice's.
#[derive(serde::Serialize)]
struct UnitMatchRecord {
    target_formula_unit: String,
    data_formula_unit: Option<String>,
    factor: f64,
    unchecked: bool,
    residual_per_target_unit_j_per_mol_k: Option<f64>,
    residual_per_target_unit_uncertainty: Option<f64>,
}

/// The three parts of the 1σ of S_cal, J/(mol K).
#[derive(serde::Serialize)]
struct UncertaintyParts {
    data: Option<f64>,
    extrapolation: f64,
    quadrature: f64,
    /// The lattice term of the magnetic route.
    lattice_term: Option<f64>,
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
    /// Not written on the magnetic route (the free-ion entropy is in `magnetic`).
    #[serde(skip_serializing_if = "Option::is_none")]
    s_stat_j_per_mol_k: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    s_stat_uncertainty: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    s_stat_uncertainty_given: Option<bool>,
    residual_j_per_mol_k: f64,
    residual_uncertainty: f64,
    w_per_unit: f64,
    w_uncertainty: f64,
}

/// The JSON document of an analysis.
fn document(r: &ThirdLaw, sigma_given: bool, matched: Option<&UnitMatch>) -> Document {
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
            lattice_term: u.lattice,
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
        low_t_form: match f.form {
            LowTemperatureForm::Debye(_) => "debye",
            LowTemperatureForm::LinearCubic(_) => "gamma-beta",
            LowTemperatureForm::Zero => "none",
            LowTemperatureForm::Given(..) => "given",
        },
        gamma_j_per_mol_k2: f.gamma.map(|g| g.0),
        gamma_uncertainty: f.gamma.map(|g| g.1),
        atoms_per_formula_unit: f.atoms_given.then_some(f.atoms),
        data_formula_unit: r.header.formula_unit.as_ref().map(|x| x.0.clone()),
        data_cp_unit: r.header.cp_unit.name(),
        data_temperature_unit: r.header.temperature_unit.name(),
        notes: notes(r, sigma_given, matched),
        residual: r.residual.as_ref().map(|s| ResidualRecord {
            s_stat_j_per_mol_k: (r.magnetic.is_none()).then_some(s.s_stat),
            s_stat_uncertainty: (r.magnetic.is_none()).then_some(s.s_stat_sigma),
            s_stat_uncertainty_given: (r.magnetic.is_none()).then_some(sigma_given),
            residual_j_per_mol_k: s.residual,
            residual_uncertainty: s.residual_sigma,
            w_per_unit: s.w_per_unit,
            w_uncertainty: s.w_sigma,
        }),
        magnetic: r.magnetic.as_ref().map(|m| MagneticRecord {
            states_per_ion: m.q,
            ions_per_formula_unit: m.ions,
            free_ion_entropy_j_per_mol_k: m.full,
            released_j_per_mol_k: m.released,
            released_uncertainty: m.released_sigma,
            residual_per_ion_j_per_mol_k: m.residual_per_ion.0,
            residual_per_ion_uncertainty: m.residual_per_ion.1,
            lattice_term: m.phonons.as_ref().map(|p| LatticeTermRecord {
                model: p.model.name(),
                atoms_per_formula_unit: p.atoms,
                theta_k: p.theta_k,
                theta_uncertainty: p.theta_sigma,
                fitted_above_k: p.fit.map(|x| x.above_k),
                fitted_points: p.fit.map(|x| x.points),
                chi2: p.fit.map(|x| x.chi2),
                dof: p.fit.map(|x| x.dof),
                check: p.fit.and_then(|x| x.check).map(|c| ThresholdCheckRecord {
                    fitted_above_k: c.above_k,
                    fitted_points: c.points,
                    theta_k: c.theta_k,
                    released_j_per_mol_k: c.released,
                    disagrees: c.disagrees,
                }),
            }),
            negative_points: m.negative_points,
            measured_cp_j_per_mol_k: m.measured_cp.clone(),
        }),
        unit_match: matched.map(|m| UnitMatchRecord {
            target_formula_unit: m.target_unit.clone(),
            data_formula_unit: m.data_unit.clone(),
            factor: m.factor,
            unchecked: m.unchecked,
            residual_per_target_unit_j_per_mol_k: r
                .residual
                .as_ref()
                .map(|s| s.residual / m.factor),
            residual_per_target_unit_uncertainty: r
                .residual
                .as_ref()
                .map(|s| s.residual_sigma / m.factor),
        }),
    }
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let (r, matched) = analyse(&args.data, &args.options, args.formula_unit.as_deref())?;
    let matched = matched.as_ref();
    if let Some(m) = matched
        && m.unchecked
        && !args.quiet
    {
        eprintln!("warning: {}", m.note.clone().unwrap_or_default());
    }
    let sigma_given = args.options.statistical_sigma_given();
    let t = summary_table(&r, sigma_given, matched);
    match args.format {
        Format::Json => Ok(groundcount::json::to_string(&document(
            &r,
            sigma_given,
            matched,
        ))?),
        Format::Csv => Ok(t.render_csv()),
        fmt => {
            let mut out = String::new();
            writeln!(
                out,
                "{} from {} ({} points, {}..{} K)\n",
                if r.magnetic.is_some() {
                    "Magnetic entropy"
                } else {
                    "Third-law entropy"
                },
                r.path.display(),
                r.points.len(),
                text::trimmed(r.points[0].t_k, 6),
                text::trimmed(r.points[r.points.len() - 1].t_k, 6)
            )?;
            let mut p = if r.magnetic.is_some() {
                Table::new(&[
                    "T (K)",
                    "Cp (J/(mol K))",
                    "C_mag (J/(mol K))",
                    "ΔS_mag (J/(mol K))",
                ])
            } else {
                Table::new(&["T (K)", "Cp (J/(mol K))", "S_cal (J/(mol K))"])
            };
            for (i, (x, s)) in r.points.iter().zip(&r.at_points).enumerate() {
                let mut row = vec![text::trimmed(x.t_k, 6)];
                if let Some(m) = &r.magnetic {
                    row.push(sig(m.measured_cp[i], 6));
                }
                row.push(sig(x.cp, 6));
                row.push(sig(*s, 6));
                p.row(row);
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
            for n in notes(&r, sigma_given, matched) {
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
        assert_eq!(
            parse_low_t("debye:5").unwrap(),
            LowTemperatureForm::Debye(5)
        );
        assert_eq!(
            parse_low_t("gamma-beta:6").unwrap(),
            LowTemperatureForm::LinearCubic(6)
        );
        assert_eq!(parse_low_t("none").unwrap(), LowTemperatureForm::Zero);
        assert_eq!(
            parse_low_t("entropy:0.12±0.01").unwrap(),
            LowTemperatureForm::Given(0.12, 0.01)
        );
        assert!(parse_low_t("einstein:5").is_err());
        assert!(parse_low_t("entropy:x").is_err());
        assert_eq!(
            parse_phonons("debye:280±5").unwrap(),
            Phonons::Given(PhononModel::Debye, 280.0, 5.0)
        );
        assert_eq!(
            parse_phonons("einstein:above:15").unwrap(),
            Phonons::FittedAbove(PhononModel::Einstein, 15.0)
        );
        assert!(parse_phonons("debye").is_err());
        assert!(parse_phonons("born:200").is_err());
        let t = parse_transition("180.5:1200").unwrap();
        assert_eq!((t.t_k, t.dh_j_per_mol), (180.5, 1200.0));
        assert!(parse_transition("180.5").is_err());
    }
}
