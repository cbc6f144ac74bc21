//! The magnetic route: the entropy a magnet releases on warming, and the residual entropy
//! left at the lowest temperature.
//!
//! # What it computes
//!
//! With q states per magnetic ion (q = 2 for Ising spins) and m magnetic ions per formula
//! unit, the spins hold m R ln q per mole of formula units when free. The magnetic heat
//! capacity C_mag = Cp − C_lat releases
//!
//! ΔS_mag = S(T₀) + ∫_T₀^T_top C_mag/T dT
//!
//! between the lowest temperature and the top of the magnetic range (S(T₀) from the chosen
//! low-temperature form, usually none: the spins are frozen below T₀), and the residual
//! entropy is S0 = m R ln q − ΔS_mag per formula unit, (R ln q − ΔS_mag/m) per magnetic
//! ion (Ramirez et al. 1999, Nature 399, 333, for spin ice). The integral is the same
//! monotone-cubic integral as the third-law route (see [`super`]).
//!
//! # The lattice (phonon) term
//!
//! Optional ([`Phonons`]): n atoms per formula unit, each a Debye (C = n C_D(T; θ_D)) or an
//! Einstein (C = n C_E(T; θ_E)) oscillator group; θ given (with its 1σ) or fitted by
//! weighted least squares to the points above a temperature where the spins are taken to be
//! free, C_mag ≈ 0. The fit minimises χ²(θ) over ln θ by a scan of 400 values from 0.1 K
//! to 10⁵ K and golden-section refinement; the 1σ of θ is √(2/χ²''(θ)) (scaled by the Birge
//! ratio above 1 with σ, or by the residual variance without σ; common practice). The 1σ of
//! θ is carried into ΔS_mag by central differences of the whole analysis in θ; with a fitted
//! θ and σ in the data, the Cp noise is carried through the fit and the integral together.
//!
//! A fitted θ absorbs whatever the spins still add above the threshold. As a second route,
//! θ is refitted to the upper half of those points ([`ThresholdCheck`], 4 points or more);
//! a ΔS_mag that moves by more than twice its 1σ is flagged.
//!
//! # Complexity
//!
//! The fit: O(k) model evaluations per χ², k points above the threshold, about 500 χ²
//! evaluations. The analysis: three third-law analyses (θ and θ ± δ) when θ has a 1σ.

use super::debye;

/// The model of the lattice heat capacity.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PhononModel {
    /// Debye's continuum model.
    Debye,
    /// Einstein's single frequency.
    Einstein,
}

impl PhononModel {
    /// C per mole of oscillator groups at T for θ, J/(mol K).
    pub fn heat_capacity(self, t_k: f64, theta_k: f64) -> f64 {
        match self {
            PhononModel::Debye => debye::heat_capacity(t_k, theta_k),
            PhononModel::Einstein => debye::einstein_heat_capacity(t_k, theta_k),
        }
    }

    /// The model's name in words.
    pub fn name(self) -> &'static str {
        match self {
            PhononModel::Debye => "Debye",
            PhononModel::Einstein => "Einstein",
        }
    }
}

/// The lattice term to subtract.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Phonons {
    /// θ given in K, with its 1σ (0 when not known).
    Given(PhononModel, f64, f64),
    /// θ fitted to the points above this temperature, K.
    FittedAbove(PhononModel, f64),
}

/// What the magnetic route is asked for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MagneticConfig {
    /// States per magnetic ion (2 for Ising spins).
    pub q: u32,
    /// Magnetic ions per formula unit of the data.
    pub ions: f64,
    /// The lattice term to subtract, if any.
    pub phonons: Option<Phonons>,
}

/// The lattice term as used.
#[derive(Clone, Debug)]
pub struct PhononTerm {
    /// The model.
    pub model: PhononModel,
    /// Atoms (oscillator groups) per formula unit.
    pub atoms: f64,
    /// θ in K.
    pub theta_k: f64,
    /// Its 1σ in K.
    pub theta_sigma: f64,
    /// For a fitted θ: the threshold temperature, the number of points fitted, χ² and the
    /// degrees of freedom.
    pub fit: Option<PhononFit>,
}

/// The fit of a lattice term.
#[derive(Clone, Copy, Debug)]
pub struct PhononFit {
    /// Points above this temperature (K) were fitted.
    pub above_k: f64,
    /// Number of points fitted.
    pub points: usize,
    /// χ² at the minimum (weighted with σ; the sum of squares in (J/(mol K))² without).
    pub chi2: f64,
    /// Degrees of freedom, points − 1.
    pub dof: usize,
    /// The second threshold: θ refitted to the upper half of the points, when there are 4
    /// or more.
    pub check: Option<ThresholdCheck>,
}

/// The lattice term refitted to the upper half of the points above the threshold: the
/// spins still adding heat capacity above the threshold show as a shift of ΔS_mag.
#[derive(Clone, Copy, Debug)]
pub struct ThresholdCheck {
    /// The points above this temperature (K) were refitted.
    pub above_k: f64,
    /// Number of points refitted.
    pub points: usize,
    /// θ of the refit, K.
    pub theta_k: f64,
    /// ΔS_mag with that θ, J/(mol K).
    pub released: f64,
    /// Whether |ΔS_mag − this| exceeds twice the 1σ of ΔS_mag.
    pub disagrees: bool,
}

/// The result of the magnetic route.
#[derive(Clone, Debug)]
pub struct MagneticResult {
    /// States per magnetic ion.
    pub q: u32,
    /// Magnetic ions per formula unit.
    pub ions: f64,
    /// The lattice term subtracted, if any.
    pub phonons: Option<PhononTerm>,
    /// The measured (total) Cp at each point, J/(mol K); the analysed points hold C_mag.
    pub measured_cp: Vec<f64>,
    /// m R ln q, the entropy of free spins per formula unit, J/(mol K).
    pub full: f64,
    /// ΔS_mag released between 0 and the top of the range, per formula unit, J/(mol K).
    pub released: f64,
    /// Its 1σ, all parts (the third-law parts and the lattice term's θ).
    pub released_sigma: f64,
    /// The part of that 1σ from the lattice term's θ.
    pub phonon_sigma: f64,
    /// The residual m R ln q − ΔS_mag per formula unit, J/(mol K), and its 1σ.
    pub residual_per_unit: (f64, f64),
    /// The residual per magnetic ion, R ln q − ΔS_mag/m, J/(mol K), and its 1σ.
    pub residual_per_ion: (f64, f64),
    /// Points where the lattice term exceeds the measured Cp (C_mag below 0).
    pub negative_points: usize,
}

/// χ²(θ) of n·C(T; θ) against the points.
fn chi2(model: PhononModel, atoms: f64, t: &[f64], cp: &[f64], w: &[f64], theta: f64) -> f64 {
    t.iter()
        .zip(cp)
        .zip(w)
        .map(|((&t, &c), &w)| w * (c - atoms * model.heat_capacity(t, theta)).powi(2))
        .sum()
}

/// Fit θ of n·C(T; θ) to the points (weights 1/σ² or 1); returns θ, its 1σ and χ².
/// Needs two points at least (the caller checks).
pub fn fit_theta(
    model: PhononModel,
    atoms: f64,
    t: &[f64],
    cp: &[f64],
    sigma: Option<&[f64]>,
) -> (f64, f64, f64) {
    let w: Vec<f64> = match sigma {
        Some(s) => s.iter().map(|s| 1.0 / (s * s)).collect(),
        None => vec![1.0; t.len()],
    };
    let f = |u: f64| chi2(model, atoms, t, cp, &w, u.exp());
    let (lo, hi) = (0.1f64.ln(), 1e5f64.ln());
    let steps = 400;
    let at = |i: usize| lo + (hi - lo) * i as f64 / steps as f64;
    let best = (0..=steps)
        .min_by(|&a, &b| f(at(a)).total_cmp(&f(at(b))))
        .unwrap_or(0);
    let (mut a, mut b) = (at(best.saturating_sub(1)), at((best + 1).min(steps)));
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut c, mut d) = (b - g * (b - a), a + g * (b - a));
    let (mut fc, mut fd) = (f(c), f(d));
    for _ in 0..100 {
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = f(d);
        }
        if (b - a).abs() < 1e-12 {
            break;
        }
    }
    let theta = ((a + b) / 2.0).exp();
    let x2 = chi2(model, atoms, t, cp, &w, theta);
    // Curvature in θ by central differences.
    let h = 1e-4 * theta;
    let fth = |th: f64| chi2(model, atoms, t, cp, &w, th);
    let curv = (fth(theta + h) - 2.0 * x2 + fth(theta - h)) / (h * h);
    let dof = (t.len().max(2) - 1) as f64;
    let scale = if sigma.is_some() {
        (x2 / dof).max(1.0)
    } else {
        x2 / dof
    };
    let sigma_theta = if curv > 0.0 {
        (2.0 / curv * scale).sqrt()
    } else {
        f64::INFINITY
    };
    (theta, sigma_theta, x2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fit_returns_theta_of_exact_model_data() {
        for model in [PhononModel::Debye, PhononModel::Einstein] {
            let theta = 230.0;
            let t: Vec<f64> = (0..12).map(|i| 20.0 + 8.0 * i as f64).collect();
            let cp: Vec<f64> = t
                .iter()
                .map(|&x| 3.0 * model.heat_capacity(x, theta))
                .collect();
            let s: Vec<f64> = cp.iter().map(|c| 1e-3 * c + 1e-4).collect();
            let (th, sth, x2) = fit_theta(model, 3.0, &t, &cp, Some(&s));
            assert!((th - theta).abs() < 1e-6 * theta, "{model:?}: {th}");
            assert!(x2 < 1e-12 && sth > 0.0 && sth < 1.0, "{sth}");
        }
    }

    #[test]
    fn einstein_entropy_is_the_integral_of_c_over_t() {
        // Independent route: Simpson's rule on C_E/T from 0 to T (C_E/T → 0 at T → 0).
        let (theta, top) = (300.0, 250.0);
        let n = 20_000;
        let h = top / n as f64;
        let g = |t: f64| {
            if t == 0.0 {
                0.0
            } else {
                debye::einstein_heat_capacity(t, theta) / t
            }
        };
        let mut s = g(0.0) + g(top);
        for i in 1..n {
            s += if i % 2 == 1 { 4.0 } else { 2.0 } * g(i as f64 * h);
        }
        s *= h / 3.0;
        let e = debye::einstein_entropy(top, theta);
        assert!(((e - s) / s).abs() < 1e-9, "{e} vs {s}");
    }
}
