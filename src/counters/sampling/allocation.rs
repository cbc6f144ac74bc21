//! How the measured sweeps of a Monte Carlo run are shared among its quadrature nodes.
//!
//! # What it computes
//!
//! Measured sweeps per node n_k for the thermodynamic integration of [`super`], from a
//! short pilot run: the Neyman allocation n_k ∝ w_k σ_k, where w_k is the node's Simpson
//! weight and σ_k the spread over the pilot's replicas of the node's ⟨E⟩ (Neyman 1934,
//! J. R. Stat. Soc. 97, 558 — from memory). It minimises the variance of a weighted sum of
//! independent means, Σ w_k² σ_k²/n_k, at a fixed Σ n_k: the variance falls by
//! (Σ w_k² σ_k²)(K)/(Σ w_k σ_k)² against equal sweeps. On ice Ih the spread is largest
//! between β = 1.5 and 5 and near zero at the top nodes, where a defect-free cell has
//! nothing left to measure; measured on 8×8×4 (32 replicas, the spreads of their nodes)
//! the factor is 1.9.
//!
//! # Method
//!
//! The pilot runs [`PILOT_REPLICAS`] replicas of a quarter of the sweeps on random streams
//! of their own (seed ⊕ [`PILOT_SALT`]), so its replicas are not among those of the run and
//! the run's replicas stay independent and alike: the error bar is the spread of the
//! run's replicas as before. The squared spreads are averaged over each node and its two
//! neighbours (four replicas give a spread to about 35 %), and every node keeps at least
//! an eighth of the equal share (at least 2 sweeps), so that no node goes unmeasured where
//! the pilot happened to see little. Counts are even, so that the passes up and down
//! measure alike. The total stays the run's total (up to rounding). The last node keeps
//! at least the equal share ([`super::Plan::new`]): with weights it also samples the
//! defect-free ensemble, which the pilot does not see. The allocation depends
//! only on the model and the settings, so it is the same on any thread count, and shards
//! record it in their settings.
//!
//! # Complexity
//!
//! The pilot measures a quarter of the sweeps on PILOT_REPLICAS replicas but equilibrates
//! each node as fully as the run: on ice Ih 8×8×4 with 8 replicas × 400 sweeps it took
//! 2.2–2.7 of the run's 25–28 CPU s (about 9 %; 2026-12-04), less at more replicas. The
//! allocation is O(nodes · PILOT_REPLICAS). What it buys, measured the same day in pairs
//! on the four ice Ih cells 4x4x2 … 10x10x5 with 8 replicas × 400 sweeps (seeds 5–16,
//! pilot included): σ(W∞)·√(CPU s) 1.43 times smaller than with equal sweeps (68 % range
//! over seeds 1.36–1.51; docs/performance.md).

use super::SampleConfig;

/// Replicas of the pilot run.
pub const PILOT_REPLICAS: usize = 4;

/// Mixed into the seed of the pilot's streams.
pub const PILOT_SALT: u64 = 0x05EE_D0FA_110C;

/// The settings of the pilot of a run with `config`.
pub fn pilot_config(config: &SampleConfig) -> SampleConfig {
    SampleConfig {
        seed: config.seed ^ PILOT_SALT,
        replicas: PILOT_REPLICAS,
        sweeps: even((config.sweeps / 4).max(8)),
        equilibration: config.equilibration,
        target_error: None,
        max_extensions: 0,
        allocate: false,
        node_sweeps: Vec::new(),
        ..config.clone()
    }
}

/// The nearest even number of at least 2.
fn even(x: usize) -> usize {
    (x.div_ceil(2) * 2).max(2)
}

/// Simpson's weight of node k of n (1, 4, 2, 4, …, 4, 1).
fn simpson_weight(k: usize, n: usize) -> f64 {
    if k == 0 || k == n - 1 {
        1.0
    } else if k % 2 == 1 {
        4.0
    } else {
        2.0
    }
}

/// The measured sweeps at every node (index 0 unused, set to the run's sweeps) from the
/// pilot's ⟨E⟩ per replica and node and the relative cost of a sweep at every node
/// (`cost[k]`; all 1 when every sweep costs alike); equal sweeps when the pilot saw no
/// spread anywhere. With costs c_k the allocation is n_k ∝ w_k σ_k / √c_k, at the cost of
/// equal sweeps, Σ c_k n_k = Σ c_k · sweeps; the spreads are smoothed only over
/// neighbours of the same cost (a replica's nodes of different cost are run by different
/// numbers of chains, whose spreads differ many times over).
pub fn allocate(pilot: &[Vec<f64>], config: &SampleConfig, cost: &[f64]) -> Vec<usize> {
    let n = config.nodes;
    let equal = vec![config.sweeps; n];
    let r = pilot.len();
    if r < 2 || pilot.iter().any(|e| e.len() != n) || cost.len() != n {
        return equal;
    }
    let variance: Vec<f64> = (0..n)
        .map(|k| {
            let mean = pilot.iter().map(|e| e[k]).sum::<f64>() / r as f64;
            pilot.iter().map(|e| (e[k] - mean).powi(2)).sum::<f64>() / (r - 1) as f64
        })
        .collect();
    let share: Vec<f64> = (0..n)
        .map(|k| {
            if k == 0 {
                return 0.0;
            }
            let near: Vec<f64> = (k.saturating_sub(1).max(1)..=(k + 1).min(n - 1))
                .filter(|&j| cost[j] == cost[k])
                .map(|j| variance[j])
                .collect();
            simpson_weight(k, n) * (near.iter().sum::<f64>() / near.len() as f64).sqrt()
                / cost[k].sqrt()
        })
        .collect();
    let sum: f64 = share.iter().sum();
    if !(sum > 0.0 && sum.is_finite() && cost.iter().all(|&c| c > 0.0 && c.is_finite())) {
        return equal;
    }
    // n_k = λ a_k with Σ c_k n_k = Σ c_k · sweeps.
    let budget: f64 = cost[1..].iter().sum::<f64>() * config.sweeps as f64;
    let spent: f64 = share.iter().zip(cost).map(|(a, c)| a * c).sum();
    let floor = even(config.sweeps / 8);
    let mut out: Vec<usize> = share
        .iter()
        .map(|&a| even((budget * a / spent).round() as usize).max(floor))
        .collect();
    out[0] = config.sweeps;
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn config(nodes: usize, sweeps: usize) -> SampleConfig {
        SampleConfig {
            nodes,
            sweeps,
            ..SampleConfig::default()
        }
    }

    /// Nodes whose ⟨E⟩ spreads twice as much get twice the sweeps (at equal Simpson
    /// weight), nodes with no spread keep the floor, and the total is kept.
    #[test]
    fn sweeps_follow_weight_times_spread() {
        let c = config(9, 200);
        // Four pilot replicas; node k's values spread by s_k (k = 1..8).
        let s = [0.0, 1.0, 1.0, 1.0, 2.0, 2.0, 2.0, 0.0, 0.0];
        let pilot: Vec<Vec<f64>> = [-1.5, -0.5, 0.5, 1.5]
            .iter()
            .map(|&z| s.iter().map(|&sk| 10.0 + z * sk).collect())
            .collect();
        let n = allocate(&pilot, &c, &[1.0; 9]);
        assert_eq!(n.len(), 9);
        assert!(n[1..].iter().all(|&x| x % 2 == 0 && x >= 2), "{n:?}");
        // Node 2 (weight 2, neighbours 1, 1, 1) against node 5 (weight 4, 2, 2, 2).
        let ratio = n[5] as f64 / n[2] as f64;
        assert!((ratio - 4.0).abs() < 0.1, "{n:?}");
        // The last node: no spread on itself or its neighbour 7 → the floor.
        assert_eq!(n[8], 26);
        let total: usize = n[1..].iter().sum();
        assert!((total as f64 - 1600.0).abs() < 0.05 * 1600.0, "{total}");
    }

    /// Nodes whose sweeps cost four times as much get half the sweeps at equal spread
    /// (n ∝ 1/√c), and the cost of the whole run is that of equal sweeps.
    #[test]
    fn dearer_sweeps_get_fewer() {
        let c = config(9, 200);
        let pilot: Vec<Vec<f64>> = [-1.5, -0.5, 0.5, 1.5]
            .iter()
            .map(|&z| vec![10.0 + z; 9])
            .collect();
        let cost = [1.0, 4.0, 4.0, 4.0, 4.0, 1.0, 1.0, 1.0, 1.0];
        let n = allocate(&pilot, &c, &cost);
        // Nodes 2 and 6 both have Simpson weight 2.
        let ratio = n[6] as f64 / n[2] as f64;
        assert!((ratio - 2.0).abs() < 0.05, "{n:?}");
        let spent: f64 = n[1..]
            .iter()
            .zip(&cost[1..])
            .map(|(&x, c)| x as f64 * c)
            .sum();
        let budget = 200.0 * cost[1..].iter().sum::<f64>();
        assert!(
            (spent - budget).abs() < 0.03 * budget,
            "{spent} against {budget}"
        );
    }

    /// A pilot with no spread at all leaves the sweeps equal.
    #[test]
    fn no_spread_leaves_the_sweeps_equal() {
        let c = config(5, 100);
        let pilot = vec![vec![1.0; 5]; 4];
        assert_eq!(allocate(&pilot, &c, &[1.0; 5]), vec![100; 5]);
    }
}
