//! Conserved additive charges of a column transfer operator, found from the constraint
//! tables, and the choice of the sector that carries the largest eigenvalue.
//!
//! # What it computes
//!
//! A *charge* is an integer Q(s) = Σ_f c_f · s_f over the binary fields f of a frontier
//! state s at a column boundary with Q(T s) = Q(s) for every allowed column: T is block
//! diagonal in Q, and λ is the largest eigenvalue of one block. For the ice rule the charge
//! is the arrow flux through the cut.
//!
//! # Method
//!
//! 1. [`relation`]: the affine hull of the allowed assignments of every table over binary
//!    variables, by Gaussian elimination on the rows (x₁, …, x_n, 1). A table whose allowed
//!    set lies in exactly one hyperplane Σ aᵢ xᵢ = b gives the *relation* (a, b), scaled to
//!    the smallest integers with the first nonzero aᵢ positive (two in, two out at a site:
//!    x_in₁ + x_in₂ − x_out₁ − x_out₂ = 0 in the orientation of the file).
//! 2. [`signs`]: the relations of all constraints of the periodic strip model are added
//!    with signs ε_c = ±1 chosen so that every variable's coefficients add up to zero: all
//!    +1 when they already cancel ([`cancels`]: each arrow counts +1 at one end and −1 at
//!    the other), else a two-colouring of the constraints (one dimer per site: +1 on one
//!    sublattice, −1 on the other; an odd cylinder has none). Then the partial sums over
//!    the constraints completed so far, restricted to the frontier, form the charge: the
//!    signed sum over all completed constraints equals Σ ε b (each relation holds), every
//!    variable that has left the frontier contributes its full signed coefficient sum 0,
//!    and one column adds Σ ε b over one column's constraints, a constant; a finite state
//!    space with an infinite past forces it to 0. The coefficient of a boundary field is
//!    the signed sum of the relation coefficients of the constraints reading it that have
//!    completed (`Column::new` computes it from the template). When the signs alternate
//!    from column to column (the dimer checkerboard) the next boundary's charge is read
//!    with the opposite signs, so T maps charge q to −q and only q = 0 is a sector of its
//!    own. Rules without relations (hard-core exclusion, not-all-equal) give no charge, and
//!    the full space is used.
//! 3. [`most_populous`]: the sector chosen is the charge value that holds the most
//!    assignments of the boundary fields (a generating-function product over the fields);
//!    ties go to the smaller charge. For square ice this is zero flux for even widths and
//!    one of the two fluxes ±1 (equal by reversing every arrow) for odd widths. This is a
//!    choice, not a theorem for every rule: the tests compare the chosen sector with the
//!    full space and with every other sector on small widths of the shipped lattices, and
//!    [`super::Sectors::Full`] keeps the whole space.
//!
//! # Complexity
//!
//! [`relation`]: O(allowed · n²) per table with n ≤ 20 scope variables; the rest is linear
//! in the model size and the number of boundary fields times the charge range.
//!
//! # Reference
//!
//! Conservation of the arrow flux by the ice-model transfer matrix: Lieb 1967 (Phys. Rev.
//! 162, 162), who diagonalises each flux sector separately.

use std::collections::BTreeMap;

use crate::model::{Model, Table};

/// One affine relation Σ aᵢ xᵢ = b satisfied by every allowed assignment of a table.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Relation {
    /// aᵢ per scope variable, in table order.
    pub coefficients: Vec<i64>,
    /// b.
    pub constant: i64,
}

/// Largest scope a relation is looked for in.
const MAX_SCOPE: usize = 20;

/// The relation of a table over binary variables whose allowed assignments span a
/// hyperplane, if there is exactly one.
pub fn relation(table: &Table) -> Option<Relation> {
    let n = table.radices.len();
    if n == 0 || n > MAX_SCOPE || table.radices.iter().any(|&q| q != 2) || table.allowed == 0 {
        return None;
    }
    // Row-reduced basis of the span of the rows (x, 1), kept with pivots.
    let mut basis: Vec<(usize, Vec<f64>)> = Vec::new();
    for index in 0..table.size {
        if !table.allows(index) {
            continue;
        }
        let mut row: Vec<f64> = (0..n).map(|i| ((index >> i) & 1) as f64).collect();
        row.push(1.0);
        for (p, b) in &basis {
            let f = row[*p];
            if f != 0.0 {
                for (r, &v) in row.iter_mut().zip(b) {
                    *r -= f * v;
                }
            }
        }
        if let Some(p) = (0..=n).find(|&j| row[j].abs() > 1e-9) {
            let f = row[p];
            for r in row.iter_mut() {
                *r /= f;
            }
            for (_, b) in basis.iter_mut() {
                let g = b[p];
                if g != 0.0 {
                    for (x, &v) in b.iter_mut().zip(&row) {
                        *x -= g * v;
                    }
                }
            }
            basis.push((p, row));
            if basis.len() > n {
                return None;
            }
        }
    }
    if basis.len() != n {
        return None;
    }
    // The one free column z_f = 1; pivot columns z_p = −R[p][f].
    let pivots: Vec<usize> = basis.iter().map(|b| b.0).collect();
    let free = (0..=n).find(|j| !pivots.contains(j))?;
    let mut z = vec![0.0; n + 1];
    z[free] = 1.0;
    for (p, b) in &basis {
        z[*p] = -b[free];
    }
    // z · (x, 1) = 0, i.e. Σ zᵢ xᵢ = −z_n.
    let smallest = z[..n]
        .iter()
        .map(|v| v.abs())
        .filter(|&v| v > 1e-9)
        .fold(f64::INFINITY, f64::min);
    if !smallest.is_finite() {
        return None;
    }
    let first = z[..n].iter().copied().find(|v| v.abs() > 1e-9)?;
    let scale = first.signum() / smallest;
    let rounded: Vec<i64> = z.iter().map(|v| (v * scale).round() as i64).collect();
    if z.iter()
        .zip(&rounded)
        .any(|(&v, &r)| (v * scale - r as f64).abs() > 1e-6)
    {
        return None;
    }
    Some(Relation {
        coefficients: rounded[..n].to_vec(),
        constant: -rounded[n],
    })
}

/// Whether the relations, summed over every constraint of the model that has one, give
/// every variable a zero total coefficient (and some variable a nonzero one).
pub fn cancels(model: &Model, relations: &[Option<Relation>]) -> bool {
    let mut total = vec![0i64; model.variables.len()];
    let mut any = false;
    for con in &model.constraints {
        if let Some(r) = &relations[con.table] {
            for (&v, &a) in con.scope.iter().zip(&r.coefficients) {
                total[v] += a;
                any |= a != 0;
            }
        }
    }
    any && total.iter().all(|&t| t == 0)
}

/// Signs ε_c = ±1 for the constraints with a relation (0 for the others) such that
/// Σ_c ε_c a_{c,v} = 0 for every variable v: all +1 when the relations already cancel (ice
/// rules: an arrow counts +1 at one end and −1 at the other), a two-colouring of the
/// constraints otherwise (one dimer per site on a bipartite lattice: +1 on one sublattice,
/// −1 on the other). `None` when no such signs exist (a non-bipartite cylinder) or no
/// variable has a nonzero coefficient.
pub fn signs(model: &Model, relations: &[Option<Relation>]) -> Option<Vec<i64>> {
    if cancels(model, relations) {
        return Some(
            model
                .constraints
                .iter()
                .map(|c| i64::from(relations[c.table].is_some()))
                .collect(),
        );
    }
    // Per variable, the (constraint, coefficient) pairs with a nonzero coefficient; a
    // colouring needs exactly two of equal size.
    let mut reads: Vec<Vec<(usize, i64)>> = vec![Vec::new(); model.variables.len()];
    for (c, con) in model.constraints.iter().enumerate() {
        if let Some(r) = &relations[con.table] {
            for (&v, &a) in con.scope.iter().zip(&r.coefficients) {
                if a != 0 {
                    reads[v].push((c, a));
                }
            }
        }
    }
    // Edges: ε_j = f · ε_i with f = −a_i / a_j.
    let mut edges: Vec<Vec<(usize, i64)>> = vec![Vec::new(); model.constraints.len()];
    for r in &reads {
        match r.as_slice() {
            [] => {}
            [(i, a), (j, b)] if a.abs() == b.abs() && i != j => {
                let f = -a.signum() * b.signum();
                edges[*i].push((*j, f));
                edges[*j].push((*i, f));
            }
            _ => return None,
        }
    }
    let mut eps = vec![0i64; model.constraints.len()];
    for start in 0..eps.len() {
        if eps[start] != 0 || relations[model.constraints[start].table].is_none() {
            continue;
        }
        eps[start] = 1;
        let mut stack = vec![start];
        while let Some(i) = stack.pop() {
            for &(j, f) in &edges[i] {
                let want = f * eps[i];
                if eps[j] == 0 {
                    eps[j] = want;
                    stack.push(j);
                } else if eps[j] != want {
                    return None;
                }
            }
        }
    }
    reads.iter().any(|r| !r.is_empty()).then_some(eps)
}

/// The charge value held by the most assignments of binary fields with these
/// coefficients (ties: the smallest charge).
pub fn most_populous(coefficients: &[i64]) -> i64 {
    let mut counts: BTreeMap<i64, f64> = BTreeMap::new();
    counts.insert(0, 1.0);
    for &c in coefficients {
        let mut next: BTreeMap<i64, f64> = BTreeMap::new();
        for (&q, &n) in &counts {
            *next.entry(q).or_default() += n;
            *next.entry(q + c).or_default() += n;
        }
        counts = next;
    }
    let mut best = (0, f64::NEG_INFINITY);
    for (&q, &n) in &counts {
        if n > best.1 {
            best = (q, n);
        }
    }
    best.0
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A table over binary variables from a predicate on the assignment bits.
    fn table(n: usize, allowed: impl Fn(u64) -> bool) -> Table {
        let size = 1u64 << n;
        let mut bits = vec![0u64; size.div_ceil(64) as usize];
        let mut count = 0;
        for i in 0..size {
            if allowed(i) {
                bits[(i >> 6) as usize] |= 1 << (i & 63);
                count += 1;
            }
        }
        Table {
            radices: vec![2; n],
            bits,
            allowed: count,
            size,
        }
    }

    #[test]
    fn two_in_two_out_is_one_hyperplane() {
        // Variables 0 and 1 point in with value 1, 2 and 3 with value 0: exactly two in.
        let t = table(4, |i| {
            let inward = (i & 1) + ((i >> 1) & 1) + (1 - ((i >> 2) & 1)) + (1 - ((i >> 3) & 1));
            inward == 2
        });
        let r = relation(&t).unwrap();
        assert_eq!(r.coefficients, vec![1, 1, -1, -1]);
        assert_eq!(r.constant, 0);
    }

    #[test]
    fn one_dimer_per_site_is_a_sum_and_exclusion_has_none() {
        let dimer = relation(&table(4, |i| i.count_ones() == 1)).unwrap();
        assert_eq!(dimer.coefficients, vec![1, 1, 1, 1]);
        assert_eq!(dimer.constant, 1);
        // At most one of two (hard core) and not all equal of three span the whole space.
        assert!(relation(&table(2, |i| i != 3)).is_none());
        assert!(relation(&table(3, |i| i != 0 && i != 7)).is_none());
    }

    #[test]
    fn the_middle_charge_holds_the_most_assignments() {
        // Binomial counts: C(4, q) is largest at q = 2; C(3, q) ties at 1 and 2.
        assert_eq!(most_populous(&[1, 1, 1, 1]), 2);
        assert_eq!(most_populous(&[-1, -1, -1, -1]), -2);
        assert_eq!(most_populous(&[1, 1, 1]), 1);
    }
}
