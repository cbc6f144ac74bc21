//! `groundcount calorimetry DATA.csv`: the third-law entropy from measured heat
//! capacities, and with `--statistical` the residual entropy it implies.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::calorimetry::{self, CalorimetryConfig, HeatCapacityData, ThirdLaw, Transition};
use groundcount::report::{Table, sig};
use serde_json::json;

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
    /// Statistical entropy at the target temperature, S±σ in J/(mol K) (or S+-σ).
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
            c.statistical = Some(parse_statistical(s)?);
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

/// `S±σ` or `S+-σ` in J/(mol K).
fn parse_statistical(s: &str) -> anyhow::Result<(f64, f64)> {
    let bad = || {
        anyhow::anyhow!(
            "--statistical expects S±σ in J/(mol K) (e.g. 44.81±0.05 or 44.81+-0.05), found `{s}`"
        )
    };
    let (v, e) = s
        .split_once('±')
        .or_else(|| s.split_once("+-"))
        .ok_or_else(bad)?;
    let v: f64 = v.trim().parse().map_err(|_| bad())?;
    let e: f64 = e.trim().parse().map_err(|_| bad())?;
    if !(v.is_finite() && e.is_finite() && e >= 0.0) {
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

/// The summary as rows: quantity, value, 1σ, unit.
fn rows(r: &ThirdLaw) -> Vec<[String; 4]> {
    let f = &r.low_t;
    let u = &r.uncertainty;
    let temps: Vec<String> = f.temperatures_k.iter().map(|t| sig(*t, 5)).collect();
    let mut out = vec![
        [
            format!(
                "T³ fit: Cp = a T³ on the lowest {} points ({} K), {}",
                f.points.len(),
                temps.join(", "),
                if f.weighted {
                    "weighted by 1/σ²"
                } else {
                    "unweighted"
                }
            ),
            sig(f.a, 6),
            sig(f.a_sigma, 2),
            "J/(mol K⁴)".into(),
        ],
        [
            "Debye temperature θ_D = (12π⁴R/(5a))^(1/3), one atom per formula unit".into(),
            sig(f.debye_temperature_k, 6),
            sig(f.debye_temperature_sigma, 2),
            "K".into(),
        ],
        [
            format!("extrapolated entropy 0..{} K, a T₀³/3", sig(f.lowest_k, 5)),
            sig(f.entropy, 6),
            sig(f.entropy_sigma, 2),
            "J/(mol K)".into(),
        ],
        [
            format!(
                "∫ Cp d(ln T) {}..{} K (monotone cubic)",
                sig(f.lowest_k, 5),
                sig(r.target_k, 5)
            ),
            sig(r.integral, 8),
            String::new(),
            "J/(mol K)".into(),
        ],
        [
            "the same by the trapezoid rule".into(),
            sig(r.integral_trapezoid, 8),
            String::new(),
            "J/(mol K)".into(),
        ],
    ];
    for x in &r.transitions {
        out.push([
            format!(
                "transition at {} K, ΔH = {} J/mol: ΔH/T",
                sig(x.transition.t_k, 6),
                sig(x.transition.dh_j_per_mol, 6)
            ),
            sig(x.entropy, 6),
            String::new(),
            "J/(mol K)".into(),
        ]);
    }
    out.push([
        format!("third-law entropy S_cal({} K)", sig(r.target_k, 5)),
        sig(r.s_cal, 6),
        sig(u.total, 2),
        "J/(mol K)".into(),
    ]);
    out.push([
        "  1σ from the Cp uncertainties".into(),
        u.data.map_or("not given".into(), |d| sig(d, 2)),
        String::new(),
        "J/(mol K)".into(),
    ]);
    out.push([
        "  1σ of the T³ extrapolation".into(),
        sig(u.extrapolation, 2),
        String::new(),
        "J/(mol K)".into(),
    ]);
    out.push([
        "  quadrature (cubic − trapezoid)".into(),
        sig(u.quadrature, 2),
        String::new(),
        "J/(mol K)".into(),
    ]);
    if let Some(s) = &r.residual {
        out.push([
            "statistical entropy S_stat (given)".into(),
            sig(s.s_stat, 6),
            sig(s.s_stat_sigma, 2),
            "J/(mol K)".into(),
        ]);
        out.push([
            "residual entropy S0 = S_stat − S_cal".into(),
            sig(s.residual, 6),
            sig(s.residual_sigma, 2),
            "J/(mol K)".into(),
        ]);
        out.push([
            "W = exp(S0/R) per formula unit".into(),
            sig(s.w_per_unit, 6),
            sig(s.w_sigma, 2),
            "arrangements per formula unit".into(),
        ]);
    }
    out
}

/// Notes under the table.
fn notes(r: &ThirdLaw) -> Vec<String> {
    let mut n = Vec::new();
    if let Some(t) = &r.target_note {
        n.push(t.clone());
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

/// The JSON document.
pub fn json(r: &ThirdLaw) -> serde_json::Value {
    let f = &r.low_t;
    let u = &r.uncertainty;
    let mut v = json!({
        "file": r.path.display().to_string(),
        "points": r.points.len(),
        "temperature_k": r.target_k,
        "target_note": r.target_note,
        "s_cal_j_per_mol_k": r.s_cal,
        "s_cal_uncertainty": u.total,
        "uncertainty_parts_j_per_mol_k": {
            "data": u.data,
            "extrapolation": u.extrapolation,
            "quadrature": u.quadrature,
        },
        "low_t_fit": {
            "points": f.points.len(),
            "temperatures_k": f.temperatures_k,
            "weighted": f.weighted,
            "a_j_per_mol_k4": f.a,
            "a_uncertainty": f.a_sigma,
        },
        "debye_temperature_k": f.debye_temperature_k,
        "debye_temperature_uncertainty": f.debye_temperature_sigma,
        "lowest_k": f.lowest_k,
        "extrapolated_j_per_mol_k": f.entropy,
        "extrapolated_uncertainty": f.entropy_sigma,
        "integral_j_per_mol_k": r.integral,
        "integral_trapezoid_j_per_mol_k": r.integral_trapezoid,
        "transitions": r.transitions.iter().map(|x| json!({
            "temperature_k": x.transition.t_k,
            "enthalpy_j_per_mol": x.transition.dh_j_per_mol,
            "entropy_j_per_mol_k": x.entropy,
        })).collect::<Vec<_>>(),
        "s_cal_at_points": r.points.iter().zip(&r.at_points).map(|(p, s)| json!({
            "temperature_k": p.t_k,
            "cp_j_per_mol_k": p.cp,
            "s_cal_j_per_mol_k": s,
        })).collect::<Vec<_>>(),
        "notes": notes(r),
    });
    if let Some(s) = &r.residual {
        v["s_stat_j_per_mol_k"] = s.s_stat.into();
        v["s_stat_uncertainty"] = s.s_stat_sigma.into();
        v["residual_j_per_mol_k"] = s.residual.into();
        v["residual_uncertainty"] = s.residual_sigma.into();
        v["w_per_unit"] = s.w_per_unit.into();
        v["w_uncertainty"] = s.w_sigma.into();
    }
    v
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let _ = args.quiet;
    let r = analyse(&args.data, &args.options)?;
    let mut t = Table::new(&["quantity", "value", "1σ", "unit"]);
    for row in rows(&r) {
        t.row(row.to_vec());
    }
    match args.format {
        Format::Json => Ok(serde_json::to_string_pretty(&json(&r))? + "\n"),
        Format::Csv => Ok(t.render_csv()),
        fmt => {
            let mut out = String::new();
            writeln!(
                out,
                "Third-law entropy from {} ({} points, {}..{} K)\n",
                r.path.display(),
                r.points.len(),
                sig(r.points[0].t_k, 5),
                sig(r.points[r.points.len() - 1].t_k, 5)
            )?;
            let mut p = Table::new(&["T (K)", "Cp (J/(mol K))", "S_cal (J/(mol K))"]);
            for (x, s) in r.points.iter().zip(&r.at_points) {
                p.row(vec![sig(x.t_k, 6), sig(x.cp, 6), sig(*s, 6)]);
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
            for n in notes(&r) {
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
        assert_eq!(parse_statistical("3.43±0.21").unwrap(), (3.43, 0.21));
        assert_eq!(parse_statistical("3.43+-0.21").unwrap(), (3.43, 0.21));
        assert!(parse_statistical("3.43").is_err());
        assert_eq!(parse_low_t("debye:5").unwrap(), 5);
        assert!(parse_low_t("einstein:5").is_err());
        let t = parse_transition("180.5:1200").unwrap();
        assert_eq!((t.t_k, t.dh_j_per_mol), (180.5, 1200.0));
        assert!(parse_transition("180.5").is_err());
    }
}
