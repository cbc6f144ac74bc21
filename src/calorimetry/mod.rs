//! The calorimetric side: the third-law entropy from measured heat capacities, and the
//! residual entropy it implies against a statistical (spectroscopic) entropy.
//!
//! # What it computes
//!
//! S_cal(T) = S(T₀) + ∫_T₀^T Cp d(ln T) + Σ ΔH_tr/T_tr, the third-law entropy at T from
//! heat capacities measured between T₀ and T_max ([`analyse`]):
//!
//! * below the lowest point T₀, S(T₀) from Debye's T³ law or γT + βT³ fitted to the lowest
//!   N points, zero, or a given value ([`lowt`]);
//! * from T₀ on, the exact integral of a monotone cubic (Fritsch–Carlson) interpolant of Cp
//!   against ln T (`integrate.rs`);
//! * ΔH/T at each first-order transition; the interpolant is not continued across a
//!   transition: each side is interpolated from its own points and continued to T_tr as
//!   the straight line in ln T with its end slope.
//!
//! Given a statistical entropy S_stat ± σ at the same temperature, the measured residual
//! entropy is S0 = S_stat − S_cal and W = exp(S0/R) per formula unit ([`Residual`]).
//!
//! The magnetic route ([`magnetic`]) integrates Cp − C_lat instead of Cp, up to the top of
//! the magnetic range, and takes m R ln q (m magnetic ions of q states per formula unit) in
//! the place of S_stat. [`units`] matches the data's formula unit against the comparison's.
//!
//! # Uncertainty
//!
//! Reported in three parts ([`Uncertainty`]), added in quadrature for the total:
//!
//! * data: the 1σ of Cp propagated linearly through the integral, Σᵢ (∂S/∂Cpᵢ σᵢ)², with
//!   the sensitivities ∂S/∂Cpᵢ taken by central finite differences of the whole
//!   interpolation (the monotone interpolant is not linear in the Cp values); absent when
//!   the file has no σ column;
//! * extrapolation: the 1σ of the entropy below T₀ (from the fit, or as given);
//! * quadrature: the difference between the monotone cubic and the trapezoid rule on the
//!   same points (an estimate of the interpolation error, not a standard error).
//!
//! The data and extrapolation parts share the lowest N points and are treated as
//! independent; the quadrature part is a systematic estimate added like a 1σ (both common
//! practice). None of this covers the calibration of the calorimeter.
//!
//! # Arguments and returns
//!
//! A checked [`HeatCapacityData`] and a [`CalorimetryConfig`] (target temperature,
//! transitions, number of points of the T³ fit, statistical entropy); [`analyse`] returns a
//! [`ThirdLaw`] with every contribution. Temperatures in K, entropies in J/(mol K) per mole
//! of formula units (the data's unit).
//!
//! # Complexity
//!
//! O(n log n) for the entropy at every point and O(n) for the finite-difference
//! sensitivities, n the number of points (a point moves the monotone interpolant only on
//! the few intervals around it, so each sensitivity is recomputed there alone).
//!
//! # Reference
//!
//! The method is the classical one of Giauque & Stout 1936 (J. Am. Chem. Soc. 58, 1144) for
//! ice; the interpolant is Fritsch & Carlson 1980 (SIAM J. Numer. Anal. 17, 238).

mod data;
pub mod debye;
pub mod integrate;
pub mod lowt;
pub mod magnetic;
pub mod units;

use crate::error::{Error, Result};
use crate::thermo::R;

pub use data::{CpUnit, DataHeader, HeatCapacityData, Point, TemperatureUnit};
pub use lowt::{DEFAULT_POINTS, LowTemperatureFit, LowTemperatureForm};
pub use magnetic::{MagneticConfig, MagneticResult, PhononModel, Phonons};
pub use units::{UnitMatch, reconcile};

use integrate::Interpolant;

/// The temperature of standard tables, K (common practice).
pub const STANDARD_TEMPERATURE_K: f64 = 298.15;

/// A first-order transition: a temperature and its enthalpy.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Transition {
    /// Transition temperature, K.
    pub t_k: f64,
    /// Enthalpy of transition, J/mol.
    pub dh_j_per_mol: f64,
}

/// What to compute.
#[derive(Clone, Debug, Default)]
pub struct CalorimetryConfig {
    /// Temperature of the result, K; `None`: 298.15 K if inside the data, otherwise the
    /// highest measured temperature.
    pub target_k: Option<f64>,
    /// First-order transitions inside the data range.
    pub transitions: Vec<Transition>,
    /// The entropy below the lowest point.
    pub low_t: LowTemperatureForm,
    /// Atoms per formula unit, for θ_D and a lattice term (1 when not given).
    pub atoms: Option<f64>,
    /// A statistical entropy at the target temperature, J/(mol K), and its 1σ.
    pub statistical: Option<(f64, f64)>,
    /// The magnetic route instead of a statistical entropy.
    pub magnetic: Option<MagneticConfig>,
}

/// The parts of the uncertainty of S_cal at the target, J/(mol K).
#[derive(Clone, Copy, Debug)]
pub struct Uncertainty {
    /// The Cp 1σ propagated through the integral; `None` without a σ column.
    pub data: Option<f64>,
    /// The 1σ of the entropy below the lowest point.
    pub extrapolation: f64,
    /// |monotone cubic − trapezoid| of the integral.
    pub quadrature: f64,
    /// The magnetic route's lattice term: the 1σ of its θ carried into the entropy
    /// (`None` without a lattice term with a 1σ).
    pub lattice: Option<f64>,
    /// All parts in quadrature.
    pub total: f64,
}

/// The entropy a transition adds.
#[derive(Clone, Copy, Debug)]
pub struct TransitionEntropy {
    /// The transition.
    pub transition: Transition,
    /// ΔH/T, J/(mol K).
    pub entropy: f64,
}

/// The measured residual entropy against a statistical value.
#[derive(Clone, Copy, Debug)]
pub struct Residual {
    /// S_stat, J/(mol K).
    pub s_stat: f64,
    /// Its 1σ.
    pub s_stat_sigma: f64,
    /// S0 = S_stat − S_cal, J/(mol K).
    pub residual: f64,
    /// Its 1σ (independent errors in quadrature).
    pub residual_sigma: f64,
    /// W = exp(S0/R) per formula unit.
    pub w_per_unit: f64,
    /// Its 1σ, W σ_S0 / R.
    pub w_sigma: f64,
}

impl Residual {
    /// The residual of S_stat ± σ_stat against S_cal ± σ_cal.
    pub fn new(s_stat: (f64, f64), s_cal: (f64, f64)) -> Residual {
        let residual = s_stat.0 - s_cal.0;
        let residual_sigma = s_stat.1.hypot(s_cal.1);
        let w = (residual / R).exp();
        Residual {
            s_stat: s_stat.0,
            s_stat_sigma: s_stat.1,
            residual,
            residual_sigma,
            w_per_unit: w,
            w_sigma: w * residual_sigma / R,
        }
    }
}

/// The third-law entropy from one data file.
#[derive(Clone, Debug)]
pub struct ThirdLaw {
    /// The data file.
    pub path: std::path::PathBuf,
    /// What its `#@` lines state (units, formula unit).
    pub header: DataHeader,
    /// The measured points (for the magnetic route: Cp − C_lat, the magnetic part).
    pub points: Vec<Point>,
    /// The extrapolation below the data.
    pub low_t: LowTemperatureFit,
    /// The transitions, in order of temperature.
    pub transitions: Vec<TransitionEntropy>,
    /// S_cal at each measured temperature, J/(mol K) (above a transition it includes ΔH/T).
    pub at_points: Vec<f64>,
    /// The temperature of the result, K.
    pub target_k: f64,
    /// Why the target is not the one asked for or 298.15 K, when it is not.
    pub target_note: Option<String>,
    /// ∫ Cp d(ln T) from T₀ to the target (monotone cubic), J/(mol K).
    pub integral: f64,
    /// The same by the trapezoid rule, J/(mol K).
    pub integral_trapezoid: f64,
    /// Σ ΔH/T over transitions below the target, J/(mol K).
    pub transition_entropy: f64,
    /// S_cal at the target, J/(mol K).
    pub s_cal: f64,
    /// Its uncertainty.
    pub uncertainty: Uncertainty,
    /// Against a statistical entropy, when one was given, or against m R ln q for the
    /// magnetic route.
    pub residual: Option<Residual>,
    /// ∂S_cal/∂Cpᵢ at the target for every point (dimensionless), as used for the data part.
    pub sensitivities: Vec<f64>,
    /// The magnetic route, when asked for.
    pub magnetic: Option<MagneticResult>,
}

impl ThirdLaw {
    /// Cp/T of the integrated interpolant, sampled for a figure: (T in K, Cp/T in
    /// J/(mol K²)), `per_stretch` points between each stretch's bounds.
    pub fn curve(&self, per_stretch: usize) -> Vec<(f64, f64)> {
        let cp: Vec<f64> = self.points.iter().map(|p| p.cp).collect();
        let t: Vec<f64> = self.points.iter().map(|p| p.t_k).collect();
        let pieces = Pieces::new(&t, &cp, &self.transitions_only(), false);
        let mut out = Vec::new();
        for p in &pieces.stretches {
            let (lo, hi) = (p.lower.ln(), p.upper.ln());
            let n = per_stretch.max(2);
            for i in 0..n {
                let tt = (lo + (hi - lo) * i as f64 / (n - 1) as f64).exp();
                out.push((tt, p.interpolant.value(tt) / tt));
            }
        }
        out
    }

    /// The fitted law below the data for a figure: (T in K, Cp/T = γ + a T² in
    /// J/(mol K²)), n points; empty for the forms without a fit.
    pub fn debye_curve(&self, n: usize) -> Vec<(f64, f64)> {
        if !self.low_t.is_fitted() {
            return Vec::new();
        }
        let n = n.max(2);
        let gamma = self.low_t.gamma.map_or(0.0, |g| g.0);
        (0..n)
            .map(|i| {
                let t = self.low_t.lowest_k * i as f64 / (n - 1) as f64;
                (t, gamma + self.low_t.a * t * t)
            })
            .collect()
    }

    fn transitions_only(&self) -> Vec<Transition> {
        self.transitions.iter().map(|x| x.transition).collect()
    }
}

/// One stretch of data between transitions and its bounds of integration.
struct Stretch {
    interpolant: Interpolant,
    lower: f64,
    upper: f64,
    /// Number of measured points in the stretch (stretches follow each other in order).
    points: usize,
}

/// The stretches of one Cp vector.
struct Pieces {
    stretches: Vec<Stretch>,
    transitions: Vec<Transition>,
}

impl Pieces {
    /// Split at the transitions (already checked: each between two points, at least two
    /// points per stretch) and interpolate each stretch.
    fn new(t: &[f64], cp: &[f64], transitions: &[Transition], linear: bool) -> Pieces {
        let mut stretches = Vec::new();
        let mut start = 0;
        let mut lower = t[0];
        let bounds: Vec<f64> = transitions.iter().map(|x| x.t_k).collect();
        for (j, &upper_bound) in bounds
            .iter()
            .chain(std::iter::once(&f64::INFINITY))
            .enumerate()
        {
            let end = if j < bounds.len() {
                t.partition_point(|&x| x < upper_bound)
            } else {
                t.len()
            };
            let (ts, cs) = (&t[start..end], &cp[start..end]);
            let interpolant = if linear {
                Interpolant::linear(ts, cs)
            } else {
                Interpolant::monotone(ts, cs)
            };
            let upper = if j < bounds.len() {
                upper_bound
            } else {
                t[t.len() - 1]
            };
            stretches.push(Stretch {
                interpolant,
                lower,
                upper,
                points: end - start,
            });
            start = end;
            lower = upper;
        }
        Pieces {
            stretches,
            transitions: transitions.to_vec(),
        }
    }

    /// ∫ Cp d(ln T) from T₀ to t, and Σ ΔH/T over transitions at or below t.
    fn entropy_to(&self, t: f64) -> (f64, f64) {
        let mut integral = 0.0;
        for s in &self.stretches {
            if t <= s.lower {
                break;
            }
            let top = t.min(s.upper);
            integral += s.interpolant.integral_to(top) - s.interpolant.integral_to(s.lower);
        }
        let jumps = self
            .transitions
            .iter()
            .filter(|x| x.t_k <= t)
            .map(|x| x.dh_j_per_mol / x.t_k)
            .sum();
        (integral, jumps)
    }
}

/// The third-law entropy of a data file, or with `config.magnetic` the magnetic entropy
/// released and the residual it leaves.
pub fn analyse(data: &HeatCapacityData, config: &CalorimetryConfig) -> Result<ThirdLaw> {
    if let Some(atoms) = config.atoms
        && !(atoms.is_finite() && atoms > 0.0)
    {
        return Err(Error::Setting(format!(
            "the number of atoms per formula unit must be a positive number, found {atoms}"
        )));
    }
    match config.magnetic {
        Some(m) => magnetic_route(data, config, m),
        None => third_law(data, config, false),
    }
}

/// The magnetic route (see [`magnetic`]).
fn magnetic_route(
    data: &HeatCapacityData,
    config: &CalorimetryConfig,
    m: MagneticConfig,
) -> Result<ThirdLaw> {
    if config.statistical.is_some() {
        return Err(Error::Setting(
            "a statistical entropy and the magnetic route both set the entropy the residual is \
             taken from; give one of them"
                .into(),
        ));
    }
    if m.q < 2 {
        return Err(Error::Setting(format!(
            "a magnetic ion needs at least 2 states, found q = {}",
            m.q
        )));
    }
    if !(m.ions.is_finite() && m.ions > 0.0) {
        return Err(Error::Setting(format!(
            "the number of magnetic ions per formula unit must be a positive number, found {}",
            m.ions
        )));
    }
    let atoms = config.atoms.unwrap_or(1.0);
    let (lo, hi) = data.range();
    let measured_cp: Vec<f64> = data.points.iter().map(|p| p.cp).collect();
    let term = match m.phonons {
        None => None,
        Some(Phonons::Given(model, theta, sigma)) => {
            if !(theta.is_finite() && theta > 0.0 && sigma.is_finite() && sigma >= 0.0) {
                return Err(Error::Setting(format!(
                    "the lattice term's {} temperature must be a positive number of K with a 1σ \
                     of at least 0, found {theta} ± {sigma}",
                    model.name()
                )));
            }
            Some(magnetic::PhononTerm {
                model,
                atoms,
                theta_k: theta,
                theta_sigma: sigma,
                fit: None,
            })
        }
        Some(Phonons::FittedAbove(model, above)) => {
            let first = data.points.partition_point(|p| p.t_k <= above);
            let n = data.points.len() - first;
            if !(above.is_finite() && above >= lo) || n < 2 {
                return Err(Error::Setting(format!(
                    "the lattice term is fitted to the points above {above} K, which leaves {n} of \
                     the data of {} ({lo}..{hi} K); the fit needs at least 2 (one degree of freedom)",
                    data.path.display()
                )));
            }
            let t: Vec<f64> = data.points[first..].iter().map(|p| p.t_k).collect();
            let sigma: Option<Vec<f64>> = data.has_sigma().then(|| {
                data.points[first..]
                    .iter()
                    .map(|p| p.sigma.unwrap_or(1.0))
                    .collect()
            });
            let (theta, theta_sigma, chi2) =
                magnetic::fit_theta(model, atoms, &t, &measured_cp[first..], sigma.as_deref());
            if !theta_sigma.is_finite() || theta <= 0.11 || theta >= 0.99e5 {
                return Err(Error::Setting(format!(
                    "the {} temperature of the lattice term cannot be fitted to the {n} points \
                     above {above} K (best θ = {theta} K, at the end of the range searched or with \
                     a flat χ²); give θ instead",
                    model.name()
                )));
            }
            Some(magnetic::PhononTerm {
                model,
                atoms,
                theta_k: theta,
                theta_sigma,
                fit: Some(magnetic::PhononFit {
                    above_k: above,
                    points: n,
                    chi2,
                    dof: n - 1,
                    check: None,
                }),
            })
        }
    };
    let with_theta = |theta: Option<f64>| -> Result<(ThirdLaw, usize)> {
        let mut d = data.clone();
        let mut negative = 0;
        if let (Some(x), Some(th)) = (&term, theta) {
            for p in &mut d.points {
                p.cp -= x.atoms * x.model.heat_capacity(p.t_k, th);
                if p.cp < 0.0 {
                    negative += 1;
                }
            }
        }
        Ok((third_law(&d, config, true)?, negative))
    };
    let (mut main, negative_points) = with_theta(term.as_ref().map(|x| x.theta_k))?;
    // The lattice term's θ in the uncertainty. Given θ ± σ: |∂ΔS/∂θ| σ, independent of the
    // data. Fitted θ: the same Cp noise moves θ and the integral, in opposite directions (a
    // point that raises the lattice term lowers C_mag), so the data part is propagated
    // through both at once, √Σᵢ ((∂ΔS/∂Cpᵢ + ∂ΔS/∂θ ∂θ/∂Cpᵢ) σᵢ)², with ∂θ/∂Cpᵢ =
    // wᵢJᵢ/Σ wⱼJⱼ² (J = ∂C_lat/∂θ, the linearised least squares), and the lattice part holds
    // only the misfit beyond the σ (the Birge ratio's excess), or all of σ_θ without σ.
    let mut lattice = None;
    if let Some(x) = &term
        && x.theta_sigma > 0.0
    {
        let h = 1e-4 * x.theta_k;
        let up = with_theta(Some(x.theta_k + h))?.0.s_cal;
        let down = with_theta(Some(x.theta_k - h))?.0.s_cal;
        let slope = (up - down) / (2.0 * h);
        match (&x.fit, data.has_sigma()) {
            (Some(fit), true) => {
                let first = data.points.len() - fit.points;
                let jac: Vec<f64> = data.points[first..]
                    .iter()
                    .map(|p| {
                        x.atoms
                            * (x.model.heat_capacity(p.t_k, x.theta_k + h)
                                - x.model.heat_capacity(p.t_k, x.theta_k - h))
                            / (2.0 * h)
                    })
                    .collect();
                let w: Vec<f64> = data.points[first..]
                    .iter()
                    .map(|p| p.sigma.map_or(1.0, |s| 1.0 / (s * s)))
                    .collect();
                let norm: f64 = jac.iter().zip(&w).map(|(j, w)| w * j * j).sum();
                let mut joint = 0.0;
                for (i, p) in data.points.iter().enumerate() {
                    let dtheta = if i >= first {
                        w[i - first] * jac[i - first] / norm
                    } else {
                        0.0
                    };
                    let g = main.sensitivities[i] + slope * dtheta;
                    joint += (g * p.sigma.unwrap_or(0.0)).powi(2);
                }
                main.uncertainty.data = Some(joint.sqrt());
                let birge = fit.chi2 / fit.dof.max(1) as f64;
                lattice = Some((slope / norm.sqrt() * (birge - 1.0).max(0.0).sqrt()).abs());
            }
            _ => lattice = Some((slope * x.theta_sigma).abs()),
        }
    }
    let u = &mut main.uncertainty;
    u.lattice = lattice;
    u.total = (u.data.unwrap_or(0.0).powi(2)
        + u.extrapolation.powi(2)
        + u.quadrature.powi(2)
        + lattice.unwrap_or(0.0).powi(2))
    .sqrt();
    // The second threshold: the upper half of the fitted points.
    let mut check = None;
    if let Some(x) = &term
        && let Some(fit) = &x.fit
        && fit.points >= 4
    {
        let k = fit.points / 2;
        let first = data.points.len() - k;
        let t: Vec<f64> = data.points[first..].iter().map(|p| p.t_k).collect();
        let sigma: Option<Vec<f64>> = data.has_sigma().then(|| {
            data.points[first..]
                .iter()
                .map(|p| p.sigma.unwrap_or(1.0))
                .collect()
        });
        let (theta2, _, _) = magnetic::fit_theta(
            x.model,
            x.atoms,
            &t,
            &measured_cp[first..],
            sigma.as_deref(),
        );
        let released2 = with_theta(Some(theta2))?.0.s_cal;
        check = Some(magnetic::ThresholdCheck {
            // Halfway between the last point left out and the first kept.
            above_k: 0.5 * (data.points[first - 1].t_k + data.points[first].t_k),
            points: k,
            theta_k: theta2,
            released: released2,
            disagrees: (released2 - main.s_cal).abs() > 2.0 * main.uncertainty.total,
        });
    }
    let mut term = term;
    if let Some(fit) = term.as_mut().and_then(|x| x.fit.as_mut()) {
        fit.check = check;
    }
    let released = main.s_cal;
    let released_sigma = main.uncertainty.total;
    let full = m.ions * R * f64::from(m.q).ln();
    let per_unit = (full - released, released_sigma);
    main.residual = Some(Residual::new((full, 0.0), (released, released_sigma)));
    main.magnetic = Some(MagneticResult {
        q: m.q,
        ions: m.ions,
        phonons: term,
        measured_cp,
        full,
        released,
        released_sigma,
        phonon_sigma: lattice.unwrap_or(0.0),
        residual_per_unit: per_unit,
        residual_per_ion: (per_unit.0 / m.ions, per_unit.1 / m.ions),
        negative_points,
    });
    Ok(main)
}

/// The third-law analysis of the points of `data` as they stand; `default_top`: without a
/// target, integrate to the highest point (the magnetic route) rather than 298.15 K.
fn third_law(
    data: &HeatCapacityData,
    config: &CalorimetryConfig,
    default_top: bool,
) -> Result<ThirdLaw> {
    let path = &data.path;
    let whole = |message: String| Error::Data {
        path: path.clone(),
        line: 0,
        message,
    };
    let t: Vec<f64> = data.points.iter().map(|p| p.t_k).collect();
    let cp: Vec<f64> = data.points.iter().map(|p| p.cp).collect();
    let (lo, hi) = data.range();
    let mut transitions = config.transitions.clone();
    transitions.sort_by(|a, b| a.t_k.total_cmp(&b.t_k));
    for (j, x) in transitions.iter().enumerate() {
        if !(x.t_k.is_finite() && x.t_k > lo && x.t_k < hi) {
            return Err(Error::Setting(format!(
                "the transition at {} K lies outside the data of {} ({lo}..{hi} K); a transition \
                 must lie between two measured temperatures",
                x.t_k,
                path.display()
            )));
        }
        if !(x.dh_j_per_mol.is_finite() && x.dh_j_per_mol > 0.0) {
            return Err(Error::Setting(format!(
                "the enthalpy of the transition at {} K must be a positive number of J/mol, found {}",
                x.t_k, x.dh_j_per_mol
            )));
        }
        if let Some(p) = data.points.iter().find(|p| p.t_k == x.t_k) {
            return Err(whole(format!(
                "the transition at {} K coincides with the point of line {}; a transition must lie \
                 between two measured temperatures",
                x.t_k, p.line
            )));
        }
        if j > 0 && transitions[j - 1].t_k == x.t_k {
            return Err(Error::Setting(format!(
                "the transition at {} K is given twice",
                x.t_k
            )));
        }
    }
    // Each stretch between transitions needs two points of its own.
    let mut edges: Vec<f64> = vec![f64::NEG_INFINITY];
    edges.extend(transitions.iter().map(|x| x.t_k));
    edges.push(f64::INFINITY);
    for w in edges.windows(2) {
        let n = t.iter().filter(|&&x| x > w[0] && x < w[1]).count();
        if n < 2 {
            return Err(whole(format!(
                "the stretch of data between {} and {} holds {n} point(s); each side of a transition \
                 needs at least 2 measured points",
                describe_edge(w[0], lo),
                describe_edge(w[1], hi)
            )));
        }
    }
    let form = config.low_t;
    let n_fit = form.points();
    let below_first = transitions
        .first()
        .map_or(t.len(), |x| t.partition_point(|&v| v < x.t_k));
    let least = form.min_points();
    if least > 0 && (n_fit < least || n_fit > below_first) {
        let what = match form {
            LowTemperatureForm::LinearCubic(_) => "the γT + βT³ fit (two coefficients)",
            _ => "the T³ fit",
        };
        return Err(Error::Setting(format!(
            "{what} needs between {least} and {below_first} of the lowest points (those below the \
             first transition), asked for {n_fit}"
        )));
    }
    if let LowTemperatureForm::Given(s, ds) = form
        && !(s.is_finite() && s >= 0.0 && ds.is_finite() && ds >= 0.0)
    {
        return Err(Error::Setting(format!(
            "the entropy at the lowest point must be a number of at least 0 J/(mol K) with a 1σ \
             of at least 0, found {s} ± {ds}"
        )));
    }
    let sigma: Option<Vec<f64>> = data
        .has_sigma()
        .then(|| data.points.iter().map(|p| p.sigma.unwrap_or(0.0)).collect());
    let low_t = lowt::extrapolate(
        form,
        lo,
        &t[..n_fit],
        &cp[..n_fit],
        sigma.as_ref().map(|s| &s[..n_fit]),
        config.atoms,
    );

    let (target_k, target_note) = match config.target_k {
        Some(x) => {
            if !(x.is_finite() && x >= lo && x <= hi) {
                return Err(Error::Setting(format!(
                    "the target temperature {x} K lies outside the data of {} ({lo}..{hi} K)",
                    path.display()
                )));
            }
            (x, None)
        }
        None if default_top => (hi, None),
        None if (lo..=hi).contains(&STANDARD_TEMPERATURE_K) => (STANDARD_TEMPERATURE_K, None),
        None => (
            hi,
            Some(format!(
                "298.15 K lies outside the data ({lo}..{hi} K): the entropy is given at the highest \
                 measured temperature, {hi} K"
            )),
        ),
    };

    let pieces = Pieces::new(&t, &cp, &transitions, false);
    let at_points: Vec<f64> = t
        .iter()
        .map(|&x| {
            let (i, j) = pieces.entropy_to(x);
            low_t.entropy + i + j
        })
        .collect();
    let (integral, transition_entropy) = pieces.entropy_to(target_k);
    let (integral_trapezoid, _) = Pieces::new(&t, &cp, &transitions, true).entropy_to(target_k);
    let s_cal = low_t.entropy + integral + transition_entropy;

    let sensitivities = data_sensitivities(&t, &cp, &pieces, target_k);
    let data_part = sigma.as_ref().map(|s| {
        sensitivities
            .iter()
            .zip(s)
            .map(|(g, s)| (g * s).powi(2))
            .sum::<f64>()
            .sqrt()
    });
    let quadrature = (integral - integral_trapezoid).abs();
    let extrapolation = low_t.entropy_sigma;
    let total =
        (data_part.unwrap_or(0.0).powi(2) + extrapolation.powi(2) + quadrature.powi(2)).sqrt();
    let uncertainty = Uncertainty {
        data: data_part,
        extrapolation,
        quadrature,
        lattice: None,
        total,
    };
    let residual = config
        .statistical
        .map(|s| Residual::new(s, (s_cal, uncertainty.total)));
    Ok(ThirdLaw {
        path: path.clone(),
        header: data.header.clone(),
        points: data.points.clone(),
        low_t,
        transitions: transitions
            .iter()
            .map(|&x| TransitionEntropy {
                transition: x,
                entropy: x.dh_j_per_mol / x.t_k,
            })
            .collect(),
        at_points,
        target_k,
        target_note,
        integral,
        integral_trapezoid,
        transition_entropy,
        s_cal,
        uncertainty,
        residual,
        sensitivities,
        magnetic: None,
    })
}

/// The sensitivities ∂S/∂Cpᵢ of ∫ Cp d(ln T) up to the target (the data part of the
/// uncertainty is √Σᵢ (∂S/∂Cpᵢ σᵢ)²), by central finite differences of the monotone
/// interpolant of each point's stretch. A point moves the interpolant only near itself, so
/// each sensitivity is computed on a few intervals ([`integrate::monotone_sensitivity`]):
/// O(n) in all.
fn data_sensitivities(t: &[f64], cp: &[f64], pieces: &Pieces, target_k: f64) -> Vec<f64> {
    let scale = cp.iter().fold(0.0f64, |m, &c| m.max(c.abs())).max(1e-300);
    let mut out = vec![0.0; t.len()];
    let mut start = 0;
    for stretch in &pieces.stretches {
        let end = start + stretch.points;
        let top = target_k.min(stretch.upper);
        if top > stretch.lower {
            let u: Vec<f64> = t[start..end].iter().map(|x| x.ln()).collect();
            let mut work = cp[start..end].to_vec();
            for i in start..end {
                let step = 1e-6 * cp[i].abs().max(1e-3 * scale);
                let g = integrate::monotone_sensitivity(
                    &u,
                    &mut work,
                    i - start,
                    step,
                    stretch.lower,
                    top,
                );
                out[i] = g;
            }
        }
        start = end;
    }
    out
}

/// A stretch bound in words.
fn describe_edge(x: f64, end: f64) -> String {
    if x.is_infinite() {
        format!("the end of the data ({end} K)")
    } else {
        format!("the transition at {x} K")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table(points: &[(f64, f64)]) -> HeatCapacityData {
        let mut text = String::from("T,Cp\n");
        for (t, c) in points {
            text += &format!("{t},{c}\n");
        }
        HeatCapacityData::parse(&text, "cp.csv").unwrap()
    }

    #[test]
    fn t_cubed_data_integrate_to_a_t_cubed_over_three() {
        // Cp = a T³ everywhere: S(T) = a T³/3 exactly (closed form); the extrapolation gives
        // a T₀³/3 and the integral the rest, within the cubic's interpolation error.
        let a = 1e-4;
        let pts: Vec<(f64, f64)> = (1..=40)
            .map(|i| (i as f64, a * (i as f64).powi(3)))
            .collect();
        let r = analyse(&table(&pts), &CalorimetryConfig::default()).unwrap();
        assert_eq!(r.target_k, 40.0);
        assert!(r.target_note.is_some());
        let exact = a * 40f64.powi(3) / 3.0;
        assert!(
            ((r.s_cal - exact) / exact).abs() < 1e-3,
            "{} vs {exact}",
            r.s_cal
        );
        assert!((r.low_t.entropy - a / 3.0).abs() < 1e-15);
        assert!(r.uncertainty.data.is_none());
    }

    #[test]
    fn bad_settings_are_refused() {
        let pts: Vec<(f64, f64)> = (1..=8).map(|i| (i as f64, i as f64)).collect();
        let d = table(&pts);
        let with = |c: CalorimetryConfig| analyse(&d, &c).unwrap_err().to_string();
        let tr = |t_k| CalorimetryConfig {
            transitions: vec![Transition {
                t_k,
                dh_j_per_mol: 10.0,
            }],
            low_t: LowTemperatureForm::Debye(2),
            ..Default::default()
        };
        assert!(with(tr(9.0)).contains("outside the data"));
        assert!(with(tr(3.0)).contains("coincides with the point of line 4"));
        assert!(with(tr(1.5)).contains("holds 1 point"));
        assert!(
            with(CalorimetryConfig {
                low_t: LowTemperatureForm::Debye(9),
                ..Default::default()
            })
            .contains("between 2 and 8")
        );
        assert!(
            with(CalorimetryConfig {
                low_t: LowTemperatureForm::LinearCubic(2),
                ..Default::default()
            })
            .contains("between 3 and 8")
        );
        assert!(
            with(CalorimetryConfig {
                target_k: Some(0.5),
                ..Default::default()
            })
            .contains("outside the data")
        );
    }

    /// The sensitivities computed on a few intervals around each point equal those of the
    /// whole interpolation recomputed for every perturbed point (the former O(n²) route,
    /// written out here), with transitions, a target inside a stretch and ends on both
    /// sides.
    #[test]
    fn issue11_local_sensitivities_equal_the_whole_recomputation() {
        let mut text = String::from("T,Cp,s\n");
        let mut t = 2.0f64;
        let mut k = 0;
        while t < 300.0 {
            // Wiggly, rising Cp with uneven spacing: local extrema exercise the zero slopes.
            let cp =
                1e-3 * t.powi(2) / (1.0 + 1e-4 * t.powi(2)) + 0.05 * (k as f64 * 1.3).sin().abs();
            text += &format!("{t},{cp},{}\n", 0.01 + 1e-3 * cp);
            t *= 1.03 + 0.02 * ((k % 5) as f64);
            k += 1;
        }
        let data = HeatCapacityData::parse(&text, "cp.csv").unwrap();
        let transitions = vec![
            Transition {
                t_k: 71.3,
                dh_j_per_mol: 40.0,
            },
            Transition {
                t_k: 150.7,
                dh_j_per_mol: 300.0,
            },
        ];
        let t: Vec<f64> = data.points.iter().map(|p| p.t_k).collect();
        let cp: Vec<f64> = data.points.iter().map(|p| p.cp).collect();
        let sigma: Vec<f64> = data.points.iter().map(|p| p.sigma.unwrap()).collect();
        for target_k in [60.0, 71.3, 120.0, 280.0] {
            let config = CalorimetryConfig {
                target_k: Some(target_k),
                transitions: transitions.clone(),
                ..Default::default()
            };
            let fast = analyse(&data, &config).unwrap().uncertainty.data.unwrap();
            let scale = cp.iter().fold(0.0f64, |m, &c| m.max(c.abs()));
            let mut sum = 0.0;
            let mut work = cp.clone();
            for i in 0..cp.len() {
                let step = 1e-6 * cp[i].abs().max(1e-3 * scale);
                work[i] = cp[i] + step;
                let up = Pieces::new(&t, &work, &transitions, false)
                    .entropy_to(target_k)
                    .0;
                work[i] = cp[i] - step;
                let down = Pieces::new(&t, &work, &transitions, false)
                    .entropy_to(target_k)
                    .0;
                work[i] = cp[i];
                sum += ((up - down) / (2.0 * step) * sigma[i]).powi(2);
            }
            let whole = sum.sqrt();
            assert!(
                ((fast - whole) / whole).abs() < 1e-6,
                "target {target_k} K: {fast} against {whole}"
            );
        }
    }
}
