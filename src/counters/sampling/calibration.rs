//! The pull test of the Monte Carlo error bar: run the sampler over many seeds on a cell
//! whose ln W is known exactly and gather the pulls (estimate − exact)/σ. An honest σ
//! gives pulls of mean 0 and spread 1. The calibration tests and `examples/pulls.rs` read
//! the same [`Pulls`]; other tests borrow [`mean_and_spread`].

use super::{SampleConfig, count};
use crate::context::Context;
use crate::error::{Error, Result};
use crate::model::Model;

/// The bound on the mean pull over 100 seeds (issue 11): an honest σ gives 0 ± 0.1.
pub const MEAN_BOUND: f64 = 0.3;

/// The bounds on the spread of the pulls over 100 seeds (issue 11): an honest σ gives
/// 1 ± 0.07.
pub const SPREAD_BOUNDS: (f64, f64) = (0.8, 1.25);

/// Pulls of one cell over many seeds, and the equilibration check of every run.
#[derive(Debug, Clone, PartialEq)]
pub struct Pulls {
    /// (ln W per unit − exact)/σ of every run, in seed order.
    pub pulls: Vec<f64>,
    /// The equilibration check of every run: passes up − down over its σ.
    pub checks: Vec<f64>,
}

impl Pulls {
    /// The mean pull.
    pub fn mean(&self) -> f64 {
        mean_and_spread(&self.pulls).0
    }

    /// The spread (sample standard deviation, n − 1) of the pulls.
    pub fn spread(&self) -> f64 {
        mean_and_spread(&self.pulls).1
    }

    /// The standard error of the mean pull, spread/√n.
    pub fn standard_error(&self) -> f64 {
        self.spread() / (self.pulls.len() as f64).sqrt()
    }

    /// How many pulls lie beyond ±`k`.
    pub fn beyond(&self, k: f64) -> usize {
        self.pulls.iter().filter(|p| p.abs() > k).count()
    }

    /// The mean equilibration check, in its σ.
    pub fn mean_check(&self) -> f64 {
        mean_and_spread(&self.checks).0
    }

    /// Whether the mean and spread lie within [`MEAN_BOUND`] and [`SPREAD_BOUNDS`].
    pub fn calibrated(&self) -> bool {
        self.mean().abs() <= MEAN_BOUND
            && (SPREAD_BOUNDS.0..=SPREAD_BOUNDS.1).contains(&self.spread())
    }
}

/// The mean and the sample standard deviation (n − 1) of any pulls; the spread is NaN
/// for fewer than two.
pub fn mean_and_spread(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let spread = (x.iter().map(|p| (p - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (mean, spread)
}

/// Sample `model` once for every seed in `seeds` with `config` otherwise, and gather the
/// pulls against `exact`, the exact ln W per formula unit of the same cell. At least two
/// seeds; a run without an error bar is an error.
pub fn pulls(
    model: &Model,
    exact: f64,
    config: &SampleConfig,
    seeds: std::ops::Range<u64>,
    context: &Context,
) -> Result<Pulls> {
    if seeds.end < seeds.start.saturating_add(2) {
        return Err(Error::Setting(
            "a pull test needs at least two seeds".into(),
        ));
    }
    let mut out = Pulls {
        pulls: Vec::new(),
        checks: Vec::new(),
    };
    for seed in seeds {
        let s = count(
            model,
            &SampleConfig {
                seed,
                ..config.clone()
            },
            context,
        )?;
        let sigma = s
            .estimate
            .sigma_ln_w
            .ok_or_else(|| Error::Setting(format!("the run with seed {seed} has no error bar")))?;
        out.pulls.push((s.estimate.ln_w_per_unit - exact) / sigma);
        out.checks.push(s.hysteresis / s.sigma_hysteresis);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The statistics against values worked by hand.
    #[test]
    fn statistics_of_known_pulls() {
        let p = Pulls {
            pulls: vec![-1.0, 0.0, 1.0, 2.0],
            checks: vec![1.0, -1.0, 0.5, 0.5],
        };
        assert_eq!(p.mean(), 0.5);
        // Σ(x − 0.5)² = 2.25 + 0.25 + 0.25 + 2.25 = 5; 5/3.
        assert!((p.spread() - (5.0f64 / 3.0).sqrt()).abs() < 1e-15);
        assert!((p.standard_error() - (5.0f64 / 3.0).sqrt() / 2.0).abs() < 1e-15);
        assert_eq!(p.beyond(1.5), 1);
        assert_eq!(p.beyond(0.5), 3);
        assert_eq!(p.mean_check(), 0.25);
        assert!(!p.calibrated());
        let honest = Pulls {
            pulls: vec![-1.0, 1.0, -1.0, 1.0],
            checks: vec![0.0; 4],
        };
        // Mean 0, spread √(4/3) = 1.155: within the bounds.
        assert!(honest.calibrated());
    }
}
