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
    /// The largest eigenvalue of the nearest charge sectors on both sides of the kept one
    /// at this strip width; a bound: the kept value must not lie below it.
    NeighbourSectors {
        /// Strip width in cells.
        width: usize,
    },
    /// A lower bound on the largest eigenvalue at this width from the exact count Z of
    /// the periodic `width × length` cell: Z = Tr Tᴸ ≤ N λᴸ with N the assignments of the
    /// boundary fields, so ln λ ≥ (ln Z − ln N)/L; the kept value must not lie below it.
    TorusBound {
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
    /// The Monte Carlo of the same realisations of the vacancies of a diluted cell (the
    /// tolerance from the realisations' Monte Carlo errors alone, since both routes count
    /// the same realisations).
    MonteCarloRealisations {
        /// The cell, as written.
        cells: String,
        /// Realisations compared.
        realisations: usize,
    },
}

/// One comparison of a value with a second route, both as ln W per formula unit (ln λ per
/// formula unit for transfer matrices). For the bound routes the reference is a rigorous
/// lower bound of the value, not a second estimate of it.
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
    /// Whether the two routes agree within the tolerance; for the bound routes
    /// ([`Route::NeighbourSectors`], [`Route::TorusBound`]) whether the value is not below
    /// the reference by more than the tolerance.
    pub fn agrees(&self) -> bool {
        match self.route {
            Route::NeighbourSectors { .. } | Route::TorusBound { .. } => {
                self.value >= self.reference - self.tolerance
            }
            _ => (self.value - self.reference).abs() <= self.tolerance,
        }
    }

    /// Whether the reference is a lower bound rather than a second value.
    pub fn is_bound(&self) -> bool {
        matches!(
            self.route,
            Route::NeighbourSectors { .. } | Route::TorusBound { .. }
        )
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
        // A bound holds above the reference, however far, and fails below it.
        let mut b = CrossCheck {
            method: Method::TransferMatrix,
            route: Route::TorusBound {
                width: 4,
                length: 4,
            },
            value: 0.9,
            reference: 0.1,
            tolerance: 1e-12,
        };
        assert!(b.agrees() && b.is_bound());
        b.value = 0.05;
        assert!(!b.agrees());
        b.value = f64::NAN;
        assert!(!b.agrees());
    }
}
