//! The one result type every counter returns.
//!
//! An [`Estimate`] states ln W per formula unit, its uncertainty (none when exact), the
//! method and the cell it comes from, so that reports can put methods side by side without
//! knowing how each number was made.

use num_bigint::BigUint;
use num_traits::ToPrimitive;

use crate::thermo;

/// How a number was obtained.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Method {
    /// Pauling's estimate: independent local constraints.
    Pauling,
    /// The Bethe approximation: belief propagation on the factor graph.
    Bethe,
    /// Exact count on a finite cell (frontier dynamic programming).
    Exact,
    /// Monte Carlo thermodynamic integration on a finite cell.
    MonteCarlo,
    /// Transfer matrices on strips of growing width, extrapolated to infinite width.
    TransferMatrix,
}

impl Method {
    /// Name used in tables and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Method::Pauling => "pauling",
            Method::Bethe => "bethe",
            Method::Exact => "exact",
            Method::MonteCarlo => "monte-carlo",
            Method::TransferMatrix => "transfer-matrix",
        }
    }
}

/// A count or estimate of the ground-state degeneracy.
#[derive(Clone, Debug)]
pub struct Estimate {
    /// How it was made.
    pub method: Method,
    /// The finite cell it comes from ("4x4 periodic"); `None` for the infinite crystal.
    pub cells: Option<String>,
    /// The exact number of arrangements, when counted exactly.
    pub count: Option<BigUint>,
    /// ln of the number of arrangements of the whole cell (or of the estimate for it).
    pub ln_count: f64,
    /// Formula units the count refers to.
    pub formula_units: f64,
    /// ln W per formula unit.
    pub ln_w_per_unit: f64,
    /// One standard error of `ln_w_per_unit`; `None` when exact.
    pub sigma_ln_w: Option<f64>,
    /// Wall time in seconds.
    pub seconds: f64,
    /// Largest number of partial states held at once (exact counts).
    pub peak_states: Option<usize>,
}

impl Estimate {
    /// W per formula unit.
    pub fn w_per_unit(&self) -> f64 {
        self.ln_w_per_unit.exp()
    }
    /// S0/R per formula unit (= ln W).
    pub fn s_over_r(&self) -> f64 {
        self.ln_w_per_unit
    }
    /// S0 in J/(mol K) per mole of formula units.
    pub fn s_j_per_mol_k(&self) -> f64 {
        thermo::molar_entropy(self.ln_w_per_unit)
    }
    /// One standard error of W per formula unit, when there is one.
    pub fn sigma_w(&self) -> Option<f64> {
        self.sigma_ln_w.map(|s| s * self.w_per_unit())
    }
    /// One standard error of S0 in J/(mol K), when there is one.
    pub fn sigma_s_j_per_mol_k(&self) -> Option<f64> {
        self.sigma_ln_w.map(thermo::molar_entropy)
    }
}

/// Natural logarithm of a big integer (−∞ for zero).
pub fn ln_big(n: &BigUint) -> f64 {
    let bits = n.bits();
    if bits == 0 {
        return f64::NEG_INFINITY;
    }
    if bits <= 1000 {
        return n.to_f64().unwrap_or(f64::INFINITY).ln();
    }
    let shift = bits - 64;
    let top = (n >> shift).to_f64().unwrap_or(f64::INFINITY);
    top.ln() + shift as f64 * std::f64::consts::LN_2
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn logarithm_of_big_integers() {
        assert_eq!(ln_big(&BigUint::from(0u32)), f64::NEG_INFINITY);
        assert!((ln_big(&BigUint::from(148u32)) - 148f64.ln()).abs() < 1e-14);
        // 3^2000 has 3170 bits: beyond f64, through the shifted path.
        let big = BigUint::from(3u32).pow(2000);
        let expected = 2000.0 * 3f64.ln();
        assert!((ln_big(&big) - expected).abs() < 1e-9 * expected);
    }

    #[test]
    fn entropy_follows_from_ln_w() {
        let e = Estimate {
            method: Method::Pauling,
            cells: None,
            count: None,
            ln_count: 1.5f64.ln(),
            formula_units: 1.0,
            ln_w_per_unit: 1.5f64.ln(),
            sigma_ln_w: Some(0.01),
            seconds: 0.0,
            peak_states: None,
        };
        // R ln(3/2) = 3.3712 J/(mol K) (Pauling 1935, with R exact in the 2019 SI).
        assert!((e.s_j_per_mol_k() - 3.371_224_484).abs() < 1e-8);
        assert!((e.sigma_w().unwrap() - 0.015).abs() < 1e-12);
    }
}
