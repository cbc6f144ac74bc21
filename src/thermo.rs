//! Thermodynamic constants and the step from a count to a molar entropy.
//!
//! S0 = R ln W per mole of formula units, with W the number of arrangements per formula
//! unit. The molar gas constant is exact in the 2019 SI: R = N_A k_B with
//! N_A = 6.02214076e23 mol⁻¹ and k_B = 1.380649e-23 J/K (CODATA 2018).

/// Molar gas constant in J/(mol K), exact in the 2019 SI (CODATA 2018).
pub const R: f64 = 8.314_462_618_153_24;

/// The thermochemical calorie in joules (common practice in older calorimetry).
pub const CALORIE: f64 = 4.184;

/// Molar entropy S0 = R ln W in J/(mol K), for `ln_w` per formula unit.
pub fn molar_entropy(ln_w: f64) -> f64 {
    R * ln_w
}
