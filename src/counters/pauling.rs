//! Pauling's estimate: every local constraint treated as independent.
//!
//! # What it computes
//!
//! W_P per formula unit, from
//! ln W_P = (Σ_v ln q_v + Σ_c ln(allowed_c / total_c)) / (formula units),
//! where q_v is the number of states of variable v and allowed_c / total_c is the fraction
//! of local assignments that constraint c allows. For ice this gives 2² · (6/16) = 3/2 per
//! H2O (Pauling 1935, J. Am. Chem. Soc. 57, 2680).
//!
//! For a diluted crystal (`vacancies:`) the product is averaged over the vacancies: the
//! generalized Pauling estimate of Ke et al. 2007 (Phys. Rev. Lett. 99, 137203), per
//! formula unit present ([`super::dilution::generalized_pauling_ln_w`]).
//!
//! # Arguments and returns
//!
//! [`count`] takes a crystal (no settings) and returns an [`Estimate`] for the infinite
//! crystal (`cells: None`); [`super::local::pauling_ln_w`] evaluates the same sum on a given
//! finite model.
//!
//! # When it means nothing
//!
//! The formula multiplies fractions of allowed local assignments as if the constraints were
//! independent. For some rules it falls below 1 per formula unit (hard hexagons:
//! 2 · (3/4)³ = 0.844 per site), a negative entropy. No count can give that: the number of
//! arrangements of a cell is 0 or at least 1, so W per formula unit is 0 or at least 1, in
//! every cell and in the limit. [`super::local::caveat`] finds such values from the numbers, for any
//! rule, and says why they are not meaningful; the Bethe approximation, which accounts
//! for how constraints that share a variable bias each other, then carries the local
//! estimate.
//!
//! # Complexity
//!
//! The crystal is compiled on a periodic cell just large enough that no constraint sees a
//! variable twice (3 cells per axis, more for long shifts); time and memory are linear in
//! that cell's size.

use std::time::Instant;

use super::local::{pauling_ln_w, tree_free_model};
use super::{Context, Counted};
use crate::crystal::Crystal;
use crate::error::Result;
use crate::estimate::{Estimate, Method};

/// Pauling's estimate for the infinite crystal. Takes no settings; the context is not
/// watched (the sum takes milliseconds).
///
/// ```
/// use groundcount::{Lattice, counters::{pauling, Context}};
/// let ice = Lattice::from_yaml(groundcount::ICE_IH_YAML, "ice-ih.yaml").unwrap();
/// let p = pauling::count(&ice.crystal, &(), &Context::new()).unwrap();
/// assert!((p.estimate.w_per_unit() - 1.5).abs() < 1e-12); // Pauling 1935
/// ```
pub fn count(crystal: &Crystal, _config: &(), _context: &Context) -> Result<Counted<()>> {
    let start = Instant::now();
    // A diluted crystal: the product averaged over the vacancies, per formula unit present.
    let ln_w = if crystal.is_diluted() {
        super::dilution::generalized_pauling_ln_w(crystal)
    } else {
        pauling_ln_w(&tree_free_model(crystal)?)
    };
    Ok(Counted::plain(Estimate::infinite(
        Method::Pauling,
        ln_w,
        None,
        start.elapsed().as_secs_f64(),
    )))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Lattice;
    use crate::counters::local::{Caveat, caveat};

    fn estimate(c: &Crystal) -> Result<Estimate> {
        count(c, &(), &Context::new()).map(|c| c.estimate)
    }

    fn lattice(name: &str) -> Lattice {
        let path = format!("{}/lattices/{name}", env!("CARGO_MANIFEST_DIR"));
        Lattice::from_file(std::path::Path::new(&path)).unwrap()
    }

    /// Hard hexagons: three bonds per site, each allowing 3 of its 4 occupancies, so
    /// W_P = 2 · (3/4)³ = 27/32 per site, below 1 and flagged; Pauling's 3/2 for ice
    /// (Pauling 1935, J. Am. Chem. Soc. 57, 2680) and 1 for dimers are not.
    #[test]
    fn issue11_pauling_below_one_is_flagged_from_the_number() {
        let p = estimate(&lattice("hard-hexagons.yaml").crystal).unwrap();
        assert!(
            (p.w_per_unit() - 27.0 / 32.0).abs() < 1e-12,
            "{}",
            p.w_per_unit()
        );
        match caveat(&p) {
            Some(Caveat::BelowOne { w_per_unit }) => {
                assert!((w_per_unit - 27.0 / 32.0).abs() < 1e-12)
            }
            other => panic!("{other:?}"),
        }
        for name in ["ice-ih.yaml", "square-dimers.yaml", "hard-squares.yaml"] {
            let p = estimate(&lattice(name).crystal).unwrap();
            assert_eq!(caveat(&p), None, "{name}: W = {}", p.w_per_unit());
        }
    }

    /// Spins held fixed by a table rule: a chain … B A B A … with every A fixed to 0 by a
    /// table on the pairs of neighbouring A's (only (0, 0) allowed), and both of A's bonds
    /// (to the B on either side) allowing A = 0 with either B. B is free, so the count of
    /// L cells is 2^L (W = 2 per cell, checked by the exact counter on 4 cells), but the
    /// product treats the A's as free in every rule: W_P = 2² · (1/4) · (1/2) · (1/2) = 1/4
    /// per cell, below 1 and flagged.
    #[test]
    fn issue11_fixed_spins_give_a_flagged_product() {
        let yaml = "name: fixed\ndimensions: 1\ncell: {vectors: [[1.0]]}\n\
                    sites: [{id: A, at: [0.0]}, {id: B, at: [0.5]}]\n\
                    bonds:\n\
                    - {id: ab, from: A, to: B, shift: [0]}\n\
                    - {id: ab2, from: A, to: B, shift: [-1]}\n\
                    groups: [{id: pin, members: [{site: A}, {site: A, shift: [1]}]}]\n\
                    variables: [{on: sites, kind: spin}]\n\
                    rules:\n\
                    - {kind: table, at: pin, allowed: [[0, 0]]}\n\
                    - {kind: table, at: bonds, allowed: [[0, 0], [0, 1]]}\n\
                    formula_unit: {name: cell, per: cell, count: 1}\n";
        let l = Lattice::from_yaml(yaml, "fixed.yaml").unwrap();
        let p = estimate(&l.crystal).unwrap();
        assert!((p.w_per_unit() - 0.25).abs() < 1e-12, "{}", p.w_per_unit());
        assert!(matches!(caveat(&p), Some(Caveat::BelowOne { .. })));
        let cells = crate::cluster::Cells::parse("4", None, 1).unwrap();
        let e = l.count_exact(&cells, &Default::default()).unwrap();
        assert_eq!(e.count.unwrap(), num_bigint::BigUint::from(16u32));
    }
}
