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
//! # With weights, occupancies and compositions
//!
//! Pauling's hypothesis, stated so that it carries weights: the variables are independent,
//! each with a single-variable distribution p_v, and the constraints are independent
//! events under that product measure. The entropy of the constrained ensemble is then
//! S_P(p) = Σ_v H(p_v) + Σ_c ln P_p(c), with P_p(c) = Σ_(allowed x) Π_i p_(v_i)(x_i) the
//! probability that constraint c holds under independent variables (H(p) = −Σ p ln p). With
//! every p_v uniform this is the count above.
//!
//! - **Imposed means** (`occupancy:`, `composition:`): p_v is the maximum-entropy
//!   single-variable distribution with the variable's weights that puts every variable
//!   independently at its target means: p_v(s) ∝ w_v(s) e^(Σ_j h_j [v ∈ j, s = s_j]), the
//!   fields h solved ([`super::fields::solve`]) on the independent variables alone, so the
//!   means reached are the targets. The constraint probabilities are thus evaluated at the
//!   target means: this is its own approximation, not a Legendre transform of the Pauling
//!   ln Z below (whose derivative in h would add the constraints' pull on the means). For
//!   partially ordered ice it is the form of MacDowell, Sanz, Vega & Abascal 2004 (J. Chem.
//!   Phys. 121, 10145): bond entropies plus, per oxygen, ln of the probability that
//!   independent occupancies put exactly two protons near it (their form written from
//!   memory — the abstract, read, says it is Pauling's at full disorder and 0 at full
//!   order; the tests evaluate that form in closed form against this code). Occupancy and
//!   composition are treated alike: in the infinite crystal a fixed fraction and a mean
//!   held by a field give the same entropy per formula unit.
//! - **Weights only** (`weights:`, activities): p_v ∝ w_v, and
//!   ln Z_P = Σ_v ln Σ_s w_v(s) + Σ_c ln P_w(c), Pauling's product of the unconstrained
//!   weighted sum and the constraints' independent probabilities (exact for a single
//!   constraint). The entropy reported is S = ln Z_P − ⟨ln w⟩_p with the mean under the
//!   same independent marginals p_v ∝ w_v: Σ_v [ln z_v − Σ_s p_v(s) ln w_v(s)] = Σ_v H(p_v),
//!   so S = S_P(p_w). This is the maximum-entropy argument: the weights act as fields whose
//!   independent marginals are p_w, and the same file written with occupancies at those
//!   marginals gives the same value (tested).
//!
//! The estimate's [`crate::estimate::Weighing`] carries ln Z_P per formula unit (weights
//! and fields included) and, per mean, the field and the mean reached (the target, up to
//! the solver's tolerance).
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

use super::fields::FieldsConfig;
use super::local::{
    independent, pauling_ln_w, pauling_weighted, tree_free_model, weighted_estimate,
};
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
    // A diluted crystal: the product averaged over the vacancies, per formula unit present
    // (vacancies are not combined with weights: the crystal refuses the pair).
    let ln_w = if crystal.is_diluted() {
        super::dilution::generalized_pauling_ln_w(crystal)
    } else {
        let model = tree_free_model(crystal)?;
        if model.is_weighted() {
            // The fields put every variable independently at its target means; Pauling's
            // form is then evaluated at those single-variable distributions.
            let (entropy, weighing) = weighted_estimate(
                &model,
                &FieldsConfig::default(),
                |lp| Ok(independent(lp)),
                |lp| Ok(pauling_weighted(&model, lp)),
            )?;
            return Ok(Counted::plain(
                Estimate::infinite(
                    Method::Pauling,
                    entropy,
                    None,
                    start.elapsed().as_secs_f64(),
                )
                .with_weighing(weighing),
            ));
        }
        pauling_ln_w(&model)
    };
    Ok(Counted::plain(Estimate::infinite(
        Method::Pauling,
        ln_w,
        None,
        start.elapsed().as_secs_f64(),
    )))
}

#[cfg(test)]
pub(crate) mod tests {
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

    /// Ideal mixing: a two-state variable under no rule with mean x has the entropy
    /// −x ln x − (1 − x) ln(1 − x) per variable (closed form), R ln 2 at x = 1/2.
    #[test]
    fn issue13_no_rule_gives_ideal_mixing() {
        for x in [0.5, 0.3, 0.05] {
            let yaml = format!(
                "name: free\ndimensions: 1\ncell: {{vectors: [[1.0]]}}\n\
                 sites: [{{id: A, at: [0.0]}}]\nvariables: [{{on: sites, kind: spin}}]\n\
                 formula_unit: {{name: site, per: sites}}\n\
                 occupancy:\n  - {{site: A, state: 1, mean: {x}}}\n"
            );
            let l = Lattice::from_yaml(&yaml, "free.yaml").unwrap();
            let p = estimate(&l.crystal).unwrap();
            let mix = -x * f64::ln(x) - (1.0 - x) * f64::ln(1.0 - x);
            assert!(
                (p.ln_w_per_unit - mix).abs() < 1e-9,
                "{x}: {}",
                p.ln_w_per_unit
            );
            let w = p.weighing.as_ref().unwrap();
            assert!((w.fields[0].field - (x / (1.0 - x)).ln()).abs() < 1e-7);
            assert!((w.fields[0].achieved - x).abs() < 1e-9);
            // ln Z = ln(1 + e^h) per site.
            assert!((w.ln_z_per_unit - (1.0 / (1.0 - x)).ln()).abs() < 1e-7);
        }
    }

    /// Every bond of ice Ih at mean 1/2: the fields vanish and the value is Pauling's 3/2
    /// per H2O (Pauling 1935, J. Am. Chem. Soc. 57, 2680).
    #[test]
    fn issue13_ice_at_one_half_is_paulings_value() {
        let yaml = format!(
            "{}occupancy:\n  - {{bond: hb, state: 1, mean: 0.5}}\n",
            crate::ICE_IH_YAML
        );
        let l = Lattice::from_yaml(&yaml, "ice.yaml").unwrap();
        let p = estimate(&l.crystal).unwrap();
        assert!((p.w_per_unit() - 1.5).abs() < 1e-9, "{}", p.w_per_unit());
        let w = p.weighing.unwrap();
        assert!(w.fields[0].field.abs() < 1e-9);
        // ln Z = S: the fields vanish and every weight is 1.
        assert!((w.ln_z_per_unit - 1.5f64.ln()).abs() < 1e-9);
    }

    /// The form of MacDowell, Sanz, Vega & Abascal 2004 (J. Chem. Phys. 121, 10145) for
    /// partially ordered ice, written here from its structure (from memory: bond entropies
    /// plus, for every oxygen, ln of the probability that independent occupancies put
    /// exactly two protons near it): S/R per molecule is (bonds per molecule) H(α) plus
    /// (1/N) Σ_O ln P_O. Square ice with P(proton near `to`) = a on h bonds and b on v
    /// bonds: every oxygen is the `to` end of one h and one v bond, so
    /// P_O = 2a(1−a)b(1−b) + (a² + (1−a)²)(b² + (1−b)²) (6/16 at a = b = 1/2); ice Ih with one
    /// α on every bond: an oxygen that is the `to` end of k bonds keeps the rule with
    /// P_O = Σ_j C(k, j) C(4−k, 2−j) α^j (1−α)^(k−j) (1−α)^(2−j) α^(2−k+j).
    #[test]
    fn issue13_partially_ordered_ice_follows_macdowell() {
        let h = |x: f64| -x * x.ln() - (1.0 - x) * (1.0 - x).ln();
        for (a, b) in [(0.6f64, 0.8f64), (0.8, 0.8), (0.55, 0.3)] {
            let yaml = format!(
                "{}occupancy:\n  - {{bond: h, state: 1, mean: {a}}}\n  - {{bond: v, state: 1, mean: {b}}}\n",
                include_str!("../../lattices/square-ice.yaml")
            );
            let l = Lattice::from_yaml(&yaml, "square.yaml").unwrap();
            let p = estimate(&l.crystal).unwrap();
            let po = 2.0 * a * (1.0 - a) * b * (1.0 - b)
                + (a * a + (1.0 - a).powi(2)) * (b * b + (1.0 - b).powi(2));
            let s = h(a) + h(b) + po.ln();
            assert!(
                (p.ln_w_per_unit - s).abs() < 1e-9,
                "{a} {b}: {} against {s}",
                p.ln_w_per_unit
            );
        }
        let choose = |n: i32, k: i32| -> f64 {
            if k < 0 || k > n {
                return 0.0;
            }
            (0..k).map(|i| (n - i) as f64 / (i + 1) as f64).product()
        };
        let ice = Lattice::from_yaml(crate::ICE_IH_YAML, "ice.yaml").unwrap();
        let c = &ice.crystal;
        let ks: Vec<i32> = (0..c.sites.len())
            .map(|o| c.bonds.iter().filter(|b| b.to == o).count() as i32)
            .collect();
        for alpha in [0.6f64, 0.8, 0.95] {
            let yaml = format!(
                "{}occupancy:\n  - {{bond: hb, state: 1, mean: {alpha}}}\n",
                crate::ICE_IH_YAML
            );
            let l = Lattice::from_yaml(&yaml, "ice.yaml").unwrap();
            let p = estimate(&l.crystal).unwrap();
            let ln_po: f64 = ks
                .iter()
                .map(|&k| {
                    (0..=2)
                        .map(|j| {
                            choose(k, j)
                                * choose(4 - k, 2 - j)
                                * alpha.powi(j)
                                * (1.0 - alpha).powi(k - j)
                                * (1.0 - alpha).powi(2 - j)
                                * alpha.powi(2 - k + j)
                        })
                        .sum::<f64>()
                        .ln()
                })
                .sum();
            let per_o = c.sites.len() as f64;
            let s = (c.bonds.len() as f64 * h(alpha) + ln_po) / per_o;
            assert!(
                (p.ln_w_per_unit - s).abs() < 1e-9,
                "{alpha}: {} against {s}",
                p.ln_w_per_unit
            );
        }
    }

    /// Full order: occupancies of square ice going to 1 on h and v (every oxygen keeps two
    /// protons) drive the entropy to 0 (the limit of the closed form above).
    #[test]
    fn issue13_full_order_gives_zero() {
        let mut last = f64::INFINITY;
        for eps in [1e-2, 1e-4, 1e-7] {
            let x = 1.0 - eps;
            let yaml = format!(
                "{}occupancy:\n  - {{bond: h, state: 1, mean: {x}}}\n  - {{bond: v, state: 1, mean: {x}}}\n",
                include_str!("../../lattices/square-ice.yaml")
            );
            let l = Lattice::from_yaml(&yaml, "square.yaml").unwrap();
            let s = estimate(&l.crystal).unwrap().ln_w_per_unit;
            assert!(s > 0.0 && s < last, "{eps}: {s}");
            last = s;
        }
        assert!(last < 1e-5, "{last}");
    }

    /// Weights only on one tetrahedron (four spins, two up; weights of the up state 2, 1/2,
    /// 3, 1): one constraint, so Pauling's ln Z = Σ_v ln z_v + ln P_w(rule) is exact:
    /// ln Z = ln Σ over the six allowed states of the product of weights (brute force
    /// here). Pauling's entropy ln Z − ⟨ln w⟩ uses the independent marginals.
    #[test]
    fn issue13_weighted_pauling_ln_z_is_exact_for_one_constraint() {
        let l = Lattice::from_yaml(TETRAHEDRON, "tet.yaml").unwrap();
        let p = estimate(&l.crystal).unwrap();
        let up = [2.0, 0.5, 3.0, 1.0];
        let mut z = 0.0;
        for s in 0..16u32 {
            if s.count_ones() == 2 {
                z += (0..4)
                    .filter(|&i| s >> i & 1 == 1)
                    .map(|i| up[i])
                    .product::<f64>();
            }
        }
        let w = p.weighing.as_ref().unwrap();
        assert!(
            (w.ln_z_per_unit - z.ln()).abs() < 1e-12,
            "{} {}",
            w.ln_z_per_unit,
            z.ln()
        );
        assert!(w.fields.is_empty());
        // The entropy under independent marginals p_i = w_i / (1 + w_i).
        let marg: Vec<f64> = up.iter().map(|w| w / (1.0 + w)).collect();
        let mean_ln_w: f64 = marg.iter().zip(up).map(|(p, w)| p * f64::ln(w)).sum();
        assert!((p.ln_w_per_unit - (z.ln() - mean_ln_w)).abs() < 1e-12);
        // Weights and the occupancies they imply give the same Pauling value.
        let occ = format!(
            "{}occupancy:\n{}",
            TETRAHEDRON.split("weights:").next().unwrap(),
            ["a", "b", "c", "d"]
                .iter()
                .zip(&marg)
                .map(|(id, m)| format!("  - {{site: {id}, state: 1, mean: {m}}}\n"))
                .collect::<String>()
        );
        let o = estimate(&Lattice::from_yaml(&occ, "tet.yaml").unwrap().crystal).unwrap();
        assert!((o.ln_w_per_unit - p.ln_w_per_unit).abs() < 1e-8);
    }

    /// A composition over both bond families of square ice at 0.7 and occupancies of 0.7 on
    /// each family are the same ensemble here (the two families are alike, so the
    /// maximum-entropy split of the fixed fraction is even): the same Pauling and Bethe
    /// values, and Pauling's is the closed form above with a = b = 0.7.
    #[test]
    fn issue13_composition_and_occupancy_agree_in_the_infinite_crystal() {
        let square = include_str!("../../lattices/square-ice.yaml");
        let comp =
            format!("{square}composition:\n  - {{bonds: [h, v], state: 1, fraction: 0.7}}\n");
        let occ = format!(
            "{square}occupancy:\n  - {{bond: h, state: 1, mean: 0.7}}\n  - {{bond: v, state: 1, mean: 0.7}}\n"
        );
        let (c, o) = (
            Lattice::from_yaml(&comp, "c.yaml").unwrap(),
            Lattice::from_yaml(&occ, "o.yaml").unwrap(),
        );
        let pc = estimate(&c.crystal).unwrap();
        let po = estimate(&o.crystal).unwrap();
        let a = 0.7f64;
        let h = -a * a.ln() - (1.0 - a) * (1.0 - a).ln();
        let p_o = 2.0 * (a * (1.0 - a)).powi(2) + (a * a + (1.0 - a).powi(2)).powi(2);
        assert!((pc.ln_w_per_unit - (2.0 * h + p_o.ln())).abs() < 1e-9);
        assert!((pc.ln_w_per_unit - po.ln_w_per_unit).abs() < 1e-9);
        let w = pc.weighing.unwrap();
        assert_eq!(w.fields[0].kind, crate::crystal::MeanKind::Composition);
        assert!((w.fields[0].achieved - 0.7).abs() < 1e-9);
        let bethe = |l: &Lattice| {
            crate::counters::bethe::count(&l.crystal, &Default::default(), &Context::new())
                .unwrap()
                .estimate
                .ln_w_per_unit
        };
        let (bc, bo) = (bethe(&c), bethe(&o));
        assert!((bc - bo).abs() < 1e-8, "{bc} {bo}");
        assert!(bc > 0.0 && bc < pc.ln_w_per_unit + 0.1);
    }

    /// One tetrahedron of four spins with the rule "two up" and weights of the up state;
    /// each cell holds its own tetrahedron, so the crystal is a row of independent ones.
    pub(crate) const TETRAHEDRON: &str = "name: one tetrahedron\ndimensions: 1\n\
        cell: {vectors: [[10.0]]}\n\
        sites: [{id: a, at: [0.0]}, {id: b, at: [0.1]}, {id: c, at: [0.2]}, {id: d, at: [0.3]}]\n\
        groups: [{id: t, members: [{site: a}, {site: b}, {site: c}, {site: d}]}]\n\
        variables: [{on: sites, kind: spin}]\n\
        rules:\n  - {kind: table, at: t, allowed: [[1, 1, 0, 0], [1, 0, 1, 0], [1, 0, 0, 1], \
        [0, 1, 1, 0], [0, 1, 0, 1], [0, 0, 1, 1]]}\n\
        formula_unit: {name: tetrahedron, per: cell, count: 1}\n\
        weights:\n  - {site: a, states: [1, 2]}\n  - {site: b, states: [1, 0.5]}\n  - {site: c, states: [1, 3]}\n";
}
