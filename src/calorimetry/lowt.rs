//! The low-temperature extrapolation: the entropy below the lowest measured point T₀.
//!
//! # What it computes
//!
//! One of four forms ([`LowTemperatureForm`]):
//!
//! * **Debye T³**: Cp = a T³ fitted to the lowest N points, S(T₀) = a T₀³/3. Least squares
//!   minimising Σ wᵢ (Cpᵢ − a Tᵢ³)², wᵢ = 1/σᵢ² when the data give σ and 1 otherwise:
//!   a = Σ wᵢ Cpᵢ Tᵢ³ / Σ wᵢ Tᵢ⁶. Needs N ≥ 2 (one degree of freedom at least).
//! * **γT + βT³** (metals: conduction electrons; glasses: two-level systems): Cp = γT + βT³
//!   fitted to the lowest N points by weighted linear least squares in the basis (T, T³),
//!   S(T₀) = γT₀ + βT₀³/3. Needs N ≥ 3.
//! * **none**: S(T₀) = 0, for data that start low enough (or a magnetic heat capacity that
//!   has frozen out below T₀).
//! * **a given entropy** S(T₀) ± σ, taken from elsewhere (a lower-temperature measurement).
//!
//! The 1σ of the fitted coefficients is the square root of the diagonal of the inverse
//! normal matrix, scaled by the Birge ratio √(χ²/(N − p)) when that exceeds 1 (with σ
//! given), or multiplied by the residual variance χ²/(N − p) without σ (p = 1 or 2
//! parameters; both common practice). The entropy's 1σ carries the γ–β covariance.
//!
//! The Debye temperature follows from the cubic coefficient β (a for the T³ form) as
//! θ_D = (12π⁴ n R/(5β))^(1/3) for n atoms per formula unit (n = 1 when not given: then θ_D
//! is that of one oscillator group per formula unit).
//!
//! The T³ law holds only well below θ_D (below about θ_D/20 to within a per cent; common
//! practice), so N should be small and the lowest point low; the default is
//! [`DEFAULT_POINTS`].
//!
//! # Complexity
//!
//! Linear in N.

use super::debye;

/// The default number of lowest points of the T³ fit (common practice: 3 to 5 points).
pub const DEFAULT_POINTS: usize = 4;

/// How the entropy below the lowest measured point is obtained.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LowTemperatureForm {
    /// Cp = a T³ fitted to the lowest N points.
    Debye(usize),
    /// Cp = γT + βT³ fitted to the lowest N points.
    LinearCubic(usize),
    /// No entropy below the lowest point.
    Zero,
    /// A given entropy at the lowest point, J/(mol K), and its 1σ.
    Given(f64, f64),
}

impl Default for LowTemperatureForm {
    fn default() -> Self {
        LowTemperatureForm::Debye(DEFAULT_POINTS)
    }
}

impl LowTemperatureForm {
    /// Number of lowest points fitted (0 for the forms without a fit).
    pub fn points(&self) -> usize {
        match *self {
            LowTemperatureForm::Debye(n) | LowTemperatureForm::LinearCubic(n) => n,
            _ => 0,
        }
    }

    /// Fewest points the fit needs for one degree of freedom (0 without a fit).
    pub fn min_points(&self) -> usize {
        match self {
            LowTemperatureForm::Debye(_) => 2,
            LowTemperatureForm::LinearCubic(_) => 3,
            _ => 0,
        }
    }
}

/// The extrapolation below the data and the entropy it adds.
#[derive(Clone, Debug)]
pub struct LowTemperatureFit {
    /// The form used.
    pub form: LowTemperatureForm,
    /// Indices (into the data) of the points fitted (empty without a fit).
    pub points: Vec<usize>,
    /// Their temperatures, K.
    pub temperatures_k: Vec<f64>,
    /// Whether the fit was weighted by the 1σ of Cp.
    pub weighted: bool,
    /// The cubic coefficient (a of a T³, or β of γT + βT³), J/(mol K⁴); 0 without a fit.
    pub a: f64,
    /// Its 1σ, J/(mol K⁴).
    pub a_sigma: f64,
    /// The linear coefficient γ, J/(mol K²), and its 1σ, for the γT + βT³ form.
    pub gamma: Option<(f64, f64)>,
    /// Atoms per formula unit used for θ_D (1 when not given).
    pub atoms: f64,
    /// Whether the atoms per formula unit were given.
    pub atoms_given: bool,
    /// θ_D = (12π⁴ n R/(5a))^(1/3), K, when a cubic term was fitted and is positive.
    pub debye_temperature_k: Option<f64>,
    /// The 1σ of θ_D, K (θ_D σ_a / (3a)).
    pub debye_temperature_sigma: Option<f64>,
    /// The lowest measured temperature T₀, K.
    pub lowest_k: f64,
    /// The entropy below T₀, J/(mol K).
    pub entropy: f64,
    /// Its 1σ, J/(mol K).
    pub entropy_sigma: f64,
}

impl LowTemperatureFit {
    /// The extrapolated Cp at temperature t (K), J/(mol K).
    pub fn cp(&self, t: f64) -> f64 {
        self.gamma.map_or(0.0, |g| g.0) * t + self.a * t.powi(3)
    }

    /// Whether the form has a curve to draw below the data.
    pub fn is_fitted(&self) -> bool {
        !self.points.is_empty()
    }
}

/// Weighted least squares of cp against the basis functions; returns the coefficients, their
/// covariance (scaled as described in the module) and whether weights were used.
fn least_squares(
    t_k: &[f64],
    cp: &[f64],
    sigma: Option<&[f64]>,
    basis: &[fn(f64) -> f64],
) -> (Vec<f64>, Vec<Vec<f64>>) {
    let n = t_k.len();
    let p = basis.len();
    let w: Vec<f64> = match sigma {
        Some(s) => s.iter().map(|s| 1.0 / (s * s)).collect(),
        None => vec![1.0; n],
    };
    let mut m = vec![vec![0.0; p]; p];
    let mut v = vec![0.0; p];
    for i in 0..n {
        let f: Vec<f64> = basis.iter().map(|b| b(t_k[i])).collect();
        for j in 0..p {
            v[j] += w[i] * f[j] * cp[i];
            for k in 0..p {
                m[j][k] += w[i] * f[j] * f[k];
            }
        }
    }
    // p is 1 or 2: invert directly.
    let inv: Vec<Vec<f64>> = if p == 1 {
        vec![vec![1.0 / m[0][0]]]
    } else {
        let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
        vec![
            vec![m[1][1] / det, -m[0][1] / det],
            vec![-m[1][0] / det, m[0][0] / det],
        ]
    };
    let coef: Vec<f64> = (0..p)
        .map(|j| (0..p).map(|k| inv[j][k] * v[k]).sum())
        .collect();
    let chi2: f64 = (0..n)
        .map(|i| {
            let model: f64 = (0..p).map(|j| coef[j] * basis[j](t_k[i])).sum();
            w[i] * (cp[i] - model).powi(2)
        })
        .sum();
    let dof = n.saturating_sub(p).max(1) as f64;
    let scale = if sigma.is_some() {
        (chi2 / dof).max(1.0)
    } else {
        chi2 / dof
    };
    let cov = inv
        .iter()
        .map(|row| row.iter().map(|x| x * scale).collect())
        .collect();
    (coef, cov)
}

/// The extrapolation of `form` from the lowest points (tᵢ, cpᵢ, σᵢ) of the data (the caller
/// passes exactly `form.points()` of them, or none for the forms without a fit, and checks
/// their number); `lowest_k` is T₀, `atoms` the atoms per formula unit for θ_D.
pub fn extrapolate(
    form: LowTemperatureForm,
    lowest_k: f64,
    t_k: &[f64],
    cp: &[f64],
    sigma: Option<&[f64]>,
    atoms: Option<f64>,
) -> LowTemperatureFit {
    let n_atoms = atoms.unwrap_or(1.0);
    let mut out = LowTemperatureFit {
        form,
        points: (0..t_k.len()).collect(),
        temperatures_k: t_k.to_vec(),
        weighted: sigma.is_some(),
        a: 0.0,
        a_sigma: 0.0,
        gamma: None,
        atoms: n_atoms,
        atoms_given: atoms.is_some(),
        debye_temperature_k: None,
        debye_temperature_sigma: None,
        lowest_k,
        entropy: 0.0,
        entropy_sigma: 0.0,
    };
    let t0 = lowest_k;
    match form {
        LowTemperatureForm::Debye(_) => {
            let (c, cov) = least_squares(t_k, cp, sigma, &[|t| t.powi(3)]);
            out.a = c[0];
            out.a_sigma = cov[0][0].sqrt();
            out.entropy = out.a * t0.powi(3) / 3.0;
            out.entropy_sigma = out.a_sigma * t0.powi(3) / 3.0;
        }
        LowTemperatureForm::LinearCubic(_) => {
            let (c, cov) = least_squares(t_k, cp, sigma, &[|t| t, |t| t.powi(3)]);
            out.gamma = Some((c[0], cov[0][0].sqrt()));
            out.a = c[1];
            out.a_sigma = cov[1][1].sqrt();
            // S(T₀) = γT₀ + βT₀³/3: gradient (T₀, T₀³/3) through the covariance.
            let g = [t0, t0.powi(3) / 3.0];
            out.entropy = g[0] * c[0] + g[1] * c[1];
            let var =
                g[0] * g[0] * cov[0][0] + 2.0 * g[0] * g[1] * cov[0][1] + g[1] * g[1] * cov[1][1];
            out.entropy_sigma = var.max(0.0).sqrt();
        }
        LowTemperatureForm::Zero => {
            out.points.clear();
            out.temperatures_k.clear();
        }
        LowTemperatureForm::Given(s, ds) => {
            out.points.clear();
            out.temperatures_k.clear();
            out.entropy = s;
            out.entropy_sigma = ds;
        }
    }
    if out.is_fitted() && out.a > 0.0 {
        let theta = debye::debye_temperature(out.a, n_atoms);
        out.debye_temperature_k = Some(theta);
        out.debye_temperature_sigma = Some(theta * out.a_sigma / (3.0 * out.a));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_t_cubed_data_give_back_a_and_theta() {
        // Cp = 12π⁴R/5 (T/θ)³ with θ = 150 K: the fit returns θ and a zero scatter.
        let theta: f64 = 150.0;
        let a = 12.0 * std::f64::consts::PI.powi(4) * crate::thermo::R / 5.0 / theta.powi(3);
        let t = [2.0, 3.0, 4.0, 5.0];
        let cp: Vec<f64> = t.iter().map(|t| a * t * t * t).collect();
        let f = extrapolate(LowTemperatureForm::Debye(4), 2.0, &t, &cp, None, None);
        assert!((f.debye_temperature_k.unwrap() - theta).abs() < 1e-9);
        assert!(f.a_sigma < 1e-12 * a);
        assert!((f.entropy - a * 8.0 / 3.0).abs() < 1e-15);
        // Per atom with 5 atoms per formula unit: θ·5^(1/3) (the same a holds 5 atoms).
        let f = extrapolate(LowTemperatureForm::Debye(4), 2.0, &t, &cp, None, Some(5.0));
        assert!((f.debye_temperature_k.unwrap() - theta * 5f64.cbrt()).abs() < 1e-9);
    }

    #[test]
    fn weighted_fit_matches_the_normal_equation_by_hand() {
        // Two points, weights 1/σ²: a = (4·1·1 + 1·16·8)/(4·1 + 1·64) = 132/68.
        let f = extrapolate(
            LowTemperatureForm::Debye(2),
            1.0,
            &[1.0, 2.0],
            &[1.0, 16.0],
            Some(&[0.5, 1.0]),
            None,
        );
        assert!((f.a - 132.0 / 68.0).abs() < 1e-14);
        assert!(f.weighted);
    }

    #[test]
    fn linear_cubic_fit_returns_gamma_and_beta() {
        // Exact γT + βT³ data: both coefficients back, entropy γT₀ + βT₀³/3 (closed form).
        let (g, b) = (2e-3, 5e-5);
        let t = [0.5, 0.8, 1.1, 1.5, 2.0];
        let cp: Vec<f64> = t.iter().map(|&t: &f64| g * t + b * t.powi(3)).collect();
        let f = extrapolate(LowTemperatureForm::LinearCubic(5), 0.5, &t, &cp, None, None);
        let (gf, gs) = f.gamma.unwrap();
        assert!((gf - g).abs() < 1e-14 && gs < 1e-12);
        assert!((f.a - b).abs() < 1e-14);
        assert!((f.entropy - (g * 0.5 + b * 0.125 / 3.0)).abs() < 1e-15);
    }
}
