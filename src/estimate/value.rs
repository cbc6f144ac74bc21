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
///
/// Built by its constructors only: [`Estimate::exact`] for an exact count of a finite cell,
/// [`Estimate::finite`] for a statistical estimate of a finite cell, [`Estimate::infinite`]
/// for a value of the infinite crystal.
///
/// # `formula_units` and `ln_count`
///
/// `ln_count` is ln W × `formula_units`: the logarithm of the number of arrangements of
/// what the estimate refers to. For a finite cell that is the cell, and `formula_units` is
/// the number of formula units in it. For the infinite crystal (`cells` is `None`) the value
/// refers to one formula unit: `formula_units` is 1 and `ln_count` equals `ln_w_per_unit`,
/// whichever method made it.
#[derive(Clone, Debug, serde::Serialize)]
#[serde(into = "EstimateRecord")]
#[non_exhaustive]
pub struct Estimate {
    /// How it was made.
    pub method: Method,
    /// The finite cell it comes from ("4x4 periodic"); `None` for the infinite crystal.
    pub cells: Option<String>,
    /// The exact number of arrangements, when counted exactly.
    pub count: Option<BigUint>,
    /// ln of the number of arrangements of the whole cell (or of the estimate for it); for
    /// the infinite crystal, of one formula unit.
    pub ln_count: f64,
    /// Formula units the count refers to: those of the cell, or 1 for the infinite crystal.
    pub formula_units: f64,
    /// ln W per formula unit.
    pub ln_w_per_unit: f64,
    /// One standard error of `ln_w_per_unit`; `None` when exact.
    pub sigma_ln_w: Option<f64>,
    /// Wall time in seconds.
    pub seconds: f64,
    /// Largest number of partial states held at once (exact counts and transfer matrices).
    pub peak_states: Option<usize>,
    /// For a weighted count (weights, imposed means): ln Z and the fields. `ln_w_per_unit`
    /// is then the entropy of the weighted ensemble ([`super::Weighing`]).
    pub weighing: Option<super::Weighing>,
}

impl Estimate {
    /// The exact count `count` of the finite cell `cells` holding `formula_units` formula
    /// units, in `seconds`.
    ///
    /// ```
    /// use groundcount::estimate::{Estimate, Method};
    /// let e = Estimate::exact("3x3 periodic", 148u32.into(), 9.0, 0.001);
    /// assert_eq!(e.method, Method::Exact);
    /// assert!((e.w_per_unit() - 148f64.powf(1.0 / 9.0)).abs() < 1e-12);
    /// ```
    pub fn exact(
        cells: impl Into<String>,
        count: BigUint,
        formula_units: f64,
        seconds: f64,
    ) -> Self {
        let ln_count = ln_big(&count);
        Estimate {
            method: Method::Exact,
            cells: Some(cells.into()),
            ln_w_per_unit: ln_count / formula_units,
            ln_count,
            count: Some(count),
            formula_units,
            sigma_ln_w: None,
            seconds,
            peak_states: None,
            weighing: None,
        }
    }

    /// An estimate of ln W per formula unit (with its 1σ, if any) of the finite cell `cells`
    /// holding `formula_units` formula units, made by `method` in `seconds`.
    pub fn finite(
        method: Method,
        cells: impl Into<String>,
        formula_units: f64,
        ln_w_per_unit: f64,
        sigma_ln_w: Option<f64>,
        seconds: f64,
    ) -> Self {
        Estimate {
            method,
            cells: Some(cells.into()),
            count: None,
            ln_count: ln_w_per_unit * formula_units,
            formula_units,
            ln_w_per_unit,
            sigma_ln_w,
            seconds,
            peak_states: None,
            weighing: None,
        }
    }

    /// A value of ln W per formula unit (with its 1σ, if any) for the infinite crystal, made
    /// by `method` in `seconds`; it refers to one formula unit (`formula_units` = 1).
    pub fn infinite(
        method: Method,
        ln_w_per_unit: f64,
        sigma_ln_w: Option<f64>,
        seconds: f64,
    ) -> Self {
        Estimate {
            method,
            cells: None,
            count: None,
            ln_count: ln_w_per_unit,
            formula_units: 1.0,
            ln_w_per_unit,
            sigma_ln_w,
            seconds,
            peak_states: None,
            weighing: None,
        }
    }

    /// The same estimate, recording the largest number of partial states held at once.
    pub fn with_peak_states(mut self, peak_states: Option<usize>) -> Self {
        self.peak_states = peak_states;
        self
    }

    /// The same estimate of a weighted count, with its ln Z and fields.
    pub fn with_weighing(mut self, weighing: super::Weighing) -> Self {
        self.weighing = Some(weighing);
        self
    }

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
    /// Whether this is a value for the infinite crystal (no finite cell).
    pub fn is_infinite_crystal(&self) -> bool {
        self.cells.is_none()
    }
    /// Whether this is a local estimate (Pauling's or Bethe's), with no count behind it.
    pub fn is_local(&self) -> bool {
        matches!(self.method, Method::Pauling | Method::Bethe)
    }
}

/// The JSON form of an [`Estimate`] (see docs/json.md): the quantities a reader wants, W
/// and S0 with their uncertainties, rather than the fields it is computed from. JSON has
/// no infinities: a zero count has ln = −∞, written as null (serde_json writes every
/// non-finite number as null).
#[derive(Clone, Debug, serde::Serialize)]
pub struct EstimateRecord {
    /// The method's name ([`Method::name`]).
    pub method: &'static str,
    /// The finite cell; `None` for the infinite crystal.
    pub cells: Option<String>,
    /// The exact count in decimal digits, when counted exactly.
    pub count: Option<String>,
    /// ln of the number of arrangements the estimate refers to.
    pub ln_count: f64,
    /// Formula units the count refers to (1 for the infinite crystal).
    pub formula_units: f64,
    /// W per formula unit.
    pub w_per_unit: f64,
    /// 1σ of W per formula unit.
    pub w_uncertainty: Option<f64>,
    /// S0/R per formula unit (= ln W).
    pub s_over_r: f64,
    /// S0 in J/(mol K) per mole of formula units.
    pub s_j_per_mol_k: f64,
    /// 1σ of S0 in J/(mol K).
    pub s_uncertainty: Option<f64>,
    /// Wall time in seconds.
    pub seconds: f64,
    /// Largest number of partial states held at once.
    pub peak_states: Option<usize>,
    /// A weighted count: ln Z per formula unit (absent for an ordinary count).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ln_z_per_unit: Option<f64>,
    /// A weighted count: the imposed means, fields and means reached (absent when none).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub fields: Vec<super::FieldValue>,
}

impl From<&Estimate> for EstimateRecord {
    fn from(e: &Estimate) -> Self {
        EstimateRecord {
            method: e.method.name(),
            cells: e.cells.clone(),
            count: e.count.as_ref().map(|c| c.to_string()),
            ln_count: e.ln_count,
            formula_units: e.formula_units,
            w_per_unit: e.w_per_unit(),
            w_uncertainty: e.sigma_w(),
            s_over_r: e.s_over_r(),
            s_j_per_mol_k: e.s_j_per_mol_k(),
            s_uncertainty: e.sigma_s_j_per_mol_k(),
            seconds: e.seconds,
            peak_states: e.peak_states,
            ln_z_per_unit: e.weighing.as_ref().map(|w| w.ln_z_per_unit),
            fields: e
                .weighing
                .as_ref()
                .map(|w| w.fields.clone())
                .unwrap_or_default(),
        }
    }
}

impl From<Estimate> for EstimateRecord {
    fn from(e: Estimate) -> Self {
        EstimateRecord::from(&e)
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
        let e = Estimate::infinite(Method::Pauling, 1.5f64.ln(), Some(0.01), 0.0);
        assert_eq!((e.formula_units, e.ln_count), (1.0, e.ln_w_per_unit));
        // R ln(3/2) = 3.3712 J/(mol K) (Pauling 1935, with R exact in the 2019 SI).
        assert!((e.s_j_per_mol_k() - 3.371_224_484).abs() < 1e-8);
        assert!((e.sigma_w().unwrap() - 0.015).abs() < 1e-12);
    }
}
