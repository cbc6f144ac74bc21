//! Cross-checks: a cited value compared with a second route that the same run computed.
//!
//! A number that goes into a paper is checked, where the run has the means, against
//! something computed another way: a transfer-matrix eigenvalue in one charge sector
//! against the full state space at the same width, the trace of Tᴸ against the frontier
//! count of the same torus, a Monte Carlo value against the exact count of the same cell.
//! Counters and the survey record each comparison as a [`CrossCheck`]; reports show them,
//! and a value whose check failed is not cited.

use serde::Serialize;

use crate::estimate::Method;

/// The second route a value was compared with.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
#[non_exhaustive]
pub enum Route {
    /// The largest eigenvalue of the transfer operator on every state (no sector kept) at
    /// this strip width.
    FullSpace {
        /// Strip width in cells.
        width: usize,
    },
    /// The exact trace of Tᴸ against the frontier count of the `width × length` torus.
    TorusTrace {
        /// Strip width in cells.
        width: usize,
        /// Columns along the strip.
        length: usize,
    },
    /// The exact count of the same finite cell.
    ExactCount {
        /// The cell, as written ("3x2x2 periodic").
        cells: String,
    },
    /// A Wang–Landau walk on the same finite cell.
    WangLandau {
        /// The cell, as written.
        cells: String,
    },
}

/// One comparison of a value with a second route, both as ln W per formula unit (ln λ per
/// formula unit for transfer matrices).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CrossCheck {
    /// The method whose value is checked.
    pub method: Method,
    /// What it was compared with.
    pub route: Route,
    /// The checked value, ln W per formula unit.
    pub value: f64,
    /// The second route's value, ln W per formula unit.
    pub reference: f64,
    /// Largest |value − reference| that counts as agreement (from both uncertainties).
    pub tolerance: f64,
}

impl CrossCheck {
    /// Whether the two routes agree within the tolerance.
    pub fn agrees(&self) -> bool {
        (self.value - self.reference).abs() <= self.tolerance
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn agreement_is_within_the_tolerance() {
        let mut c = CrossCheck {
            method: Method::TransferMatrix,
            route: Route::FullSpace { width: 6 },
            value: 0.16,
            reference: 0.17,
            tolerance: 0.02,
        };
        assert!(c.agrees());
        c.tolerance = 0.005;
        assert!(!c.agrees());
        // A NaN on either side never agrees.
        c.value = f64::NAN;
        c.tolerance = 1.0;
        assert!(!c.agrees());
    }
}
