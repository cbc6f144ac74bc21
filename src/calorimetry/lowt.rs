//! The low-temperature extrapolation: Cp = a T³ fitted to the lowest measured points.
//!
//! # What it computes
//!
//! Below the lowest measured temperature T₀ the entropy is taken from Debye's T³ law,
//! S(T₀) = ∫₀^T₀ a T² dT = a T₀³/3, with a fitted to the lowest N points by least squares,
//! minimising Σ wᵢ (Cpᵢ − a Tᵢ³)² with wᵢ = 1/σᵢ² when the data give σ and wᵢ = 1
//! otherwise: a = Σ wᵢ Cpᵢ Tᵢ³ / Σ wᵢ Tᵢ⁶.
//!
//! The 1σ of a is 1/√(Σ wᵢ Tᵢ⁶) scaled by the Birge ratio √(χ²/(N − 1)) when that exceeds
//! 1 (with σ given), or the residual scatter √(Σ rᵢ²/(N − 1) / Σ Tᵢ⁶) without σ (both
//! common practice). The Debye temperature follows as θ_D = (12π⁴R/(5a))^(1/3), for one
//! oscillator group ("atom") per formula unit: for a formula unit of n atoms the Debye
//! temperature of the solid is θ_D · n^(1/3), which this module does not attempt.
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

/// The T³ fit and the entropy it adds below the data.
#[derive(Clone, Debug)]
pub struct LowTemperatureFit {
    /// Indices (into the data) of the points fitted.
    pub points: Vec<usize>,
    /// Their temperatures, K.
    pub temperatures_k: Vec<f64>,
    /// Whether the fit was weighted by the 1σ of Cp.
    pub weighted: bool,
    /// The coefficient a of Cp = a T³, J/(mol K⁴).
    pub a: f64,
    /// The 1σ of a, J/(mol K⁴).
    pub a_sigma: f64,
    /// θ_D = (12π⁴R/(5a))^(1/3), K.
    pub debye_temperature_k: f64,
    /// The 1σ of θ_D, K (θ_D σ_a / (3a)).
    pub debye_temperature_sigma: f64,
    /// The lowest measured temperature T₀, K.
    pub lowest_k: f64,
    /// a T₀³/3, J/(mol K).
    pub entropy: f64,
    /// Its 1σ, σ_a T₀³/3, J/(mol K).
    pub entropy_sigma: f64,
}

/// Fit Cp = a T³ to the points (tᵢ, cpᵢ, σᵢ); the caller passes the lowest N points and
/// the index of the first. Needs at least one point with positive temperature.
pub fn fit(first: usize, t_k: &[f64], cp: &[f64], sigma: Option<&[f64]>) -> LowTemperatureFit {
    let n = t_k.len();
    let w: Vec<f64> = match sigma {
        Some(s) => s.iter().map(|s| 1.0 / (s * s)).collect(),
        None => vec![1.0; n],
    };
    let t6: Vec<f64> = t_k.iter().map(|t| t.powi(6)).collect();
    let stt: f64 = (0..n).map(|i| w[i] * t6[i]).sum();
    let sty: f64 = (0..n).map(|i| w[i] * cp[i] * t_k[i].powi(3)).sum();
    let a = sty / stt;
    let chi2: f64 = (0..n)
        .map(|i| w[i] * (cp[i] - a * t_k[i].powi(3)).powi(2))
        .sum();
    let dof = (n.max(2) - 1) as f64;
    let a_sigma = if sigma.is_some() {
        (1.0 / stt).sqrt() * (chi2 / dof).sqrt().max(1.0)
    } else {
        (chi2 / dof / stt).sqrt()
    };
    let lowest_k = t_k[0];
    let theta = debye::debye_temperature(a);
    LowTemperatureFit {
        points: (first..first + n).collect(),
        temperatures_k: t_k.to_vec(),
        weighted: sigma.is_some(),
        a,
        a_sigma,
        debye_temperature_k: theta,
        debye_temperature_sigma: theta * a_sigma / (3.0 * a),
        lowest_k,
        entropy: a * lowest_k.powi(3) / 3.0,
        entropy_sigma: a_sigma * lowest_k.powi(3) / 3.0,
    }
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
        let f = fit(0, &t, &cp, None);
        assert!((f.debye_temperature_k - theta).abs() < 1e-9);
        assert!(f.a_sigma < 1e-12 * a);
        assert!((f.entropy - a * 8.0 / 3.0).abs() < 1e-15);
    }

    #[test]
    fn weighted_fit_matches_the_normal_equation_by_hand() {
        // Two points, weights 1/σ²: a = (4·1·1 + 1·16·8)/(4·1 + 1·64) = 132/68.
        let f = fit(0, &[1.0, 2.0], &[1.0, 16.0], Some(&[0.5, 1.0]));
        assert!((f.a - 132.0 / 68.0).abs() < 1e-14);
        assert!(f.weighted);
    }
}
