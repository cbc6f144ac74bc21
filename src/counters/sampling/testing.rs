//! Test support shared by the samplers' unit tests: tiny models from lattice files and
//! their exact Boltzmann distributions by enumeration, computed from the model's tables
//! directly (independently of any sampler's bookkeeping).

use crate::Lattice;
use crate::cluster::{Cells, Cluster};
use crate::model::Model;

/// Square ice (`lattices/square-ice.yaml`).
pub const SQUARE_ICE: &str = include_str!("../../../lattices/square-ice.yaml");

/// The model of a lattice file's periodic cell, e.g. `"2x2"`.
pub fn model(yaml: &str, name: &str, cells: &str, dims: usize) -> Model {
    let l = Lattice::from_yaml(yaml, name).unwrap();
    let cluster = Cluster::new(&l.crystal, Cells::parse(cells, None, dims).unwrap()).unwrap();
    Model::new(&cluster).unwrap()
}

/// The values of assignment number `code` (mixed radix, variable 0 least significant).
pub fn values(m: &Model, code: u64) -> Vec<u64> {
    let mut rest = code;
    m.variables
        .iter()
        .map(|v| {
            let q = v.states as u64;
            let x = rest % q;
            rest /= q;
            x
        })
        .collect()
}

/// The number of constraints assignment `code` violates.
pub fn energy(m: &Model, code: u64) -> u64 {
    let vals = values(m, code);
    let mut e = 0;
    for c in &m.constraints {
        let t = &m.tables[c.table];
        let mut idx = 0u64;
        let mut stride = 1u64;
        for &v in &c.scope {
            idx += vals[v] * stride;
            stride *= m.variables[v].states as u64;
        }
        if !t.allows(idx) {
            e += 1;
        }
    }
    e
}

/// Exact Boltzmann probabilities e^{−βE}/Z of every assignment of a tiny unweighted model.
pub fn boltzmann(m: &Model, beta: f64) -> Vec<f64> {
    boltzmann_weighted(m, beta, &[])
}

/// Exact Boltzmann probabilities of every assignment of a tiny model, by enumeration,
/// with the weights w(σ) = ∏ weight(v, σ_v) · e^{Σ_j h_j n_j(σ)} taken from the model
/// directly (not from a kernel).
pub fn boltzmann_weighted(m: &Model, beta: f64, fields: &[f64]) -> Vec<f64> {
    let total: u64 = m.variables.iter().map(|v| v.states as u64).product();
    let mut w = Vec::with_capacity(total as usize);
    for code in 0..total {
        let vals = values(m, code);
        let e = energy(m, code);
        let mut lw: f64 = (0..vals.len())
            .map(|v| m.weight(v, vals[v] as u32).ln())
            .sum();
        for (mean, h) in m.means.iter().zip(fields) {
            lw += h * mean
                .variables
                .iter()
                .filter(|&&v| vals[v] == mean.state as u64)
                .count() as f64;
        }
        w.push((lw - beta * e as f64).exp());
    }
    let z: f64 = w.iter().sum();
    w.iter().map(|x| x / z).collect()
}

/// Asserts that sampled `counts` of every assignment fit the exact probabilities `exact`
/// over `samples` samples: a chi-square statistic over the assignments of non-zero
/// probability must stay within its number of degrees of freedom plus six standard
/// deviations (√(2·dof)) and some slack for the residual correlation of thinned samples.
pub fn assert_frequencies(counts: &[u64], exact: &[f64], samples: f64) {
    let live = exact.iter().filter(|&&p| p > 0.0).count();
    let chi2: f64 = counts
        .iter()
        .zip(exact)
        .filter(|&(_, &p)| p > 0.0)
        .map(|(&c, &p)| {
            let e = p * samples;
            (c as f64 - e).powi(2) / e
        })
        .sum();
    let dof = (live - 1) as f64;
    assert!(
        chi2 < dof + 6.0 * (2.0 * dof).sqrt() + 20.0,
        "chi-square {chi2} for {dof} degrees of freedom"
    );
}
