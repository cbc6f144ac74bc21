//! The counters, under one contract.
//!
//! # The contract
//!
//! Every counter is a function `count(input, &config, &context) -> Result<Counted<D>>`:
//!
//! - the **input** is what it counts: a [`crate::crystal::Crystal`] for the estimates of the
//!   infinite crystal (Pauling, Bethe, strips), the [`crate::model::Model`] of a finite cell
//!   for the exact count and the samplers, the sampled cells' estimates for the size
//!   extrapolation;
//! - the **config** is its own settings (a state budget, replicas and sweeps, widths), with
//!   a `Default`;
//! - the **context** ([`Context`]) is what every counter shares: a progress observer, a
//!   deadline and an interrupt. Threads are the caller's: counters run in whatever rayon
//!   pool they are called in, and a seed gives the same numbers on any thread count;
//! - the **result** is [`Counted`]: the one [`Estimate`] (ln W per formula unit, its σ, the
//!   method, the cell or the infinite crystal) and beside it what only this method has
//!   (`D`: the Monte Carlo error budget, the strip widths, the fit).
//!
//! | counter | function | input | config | details `D` |
//! | --- | --- | --- | --- | --- |
//! | Pauling | [`pauling::count`] | crystal | `()` | `()` |
//! | Bethe | [`bethe::count`] | crystal | [`bethe::BetheConfig`] | `()` |
//! | exact | [`exact::count`] | model | [`exact::ExactConfig`] | `()` |
//! | strips | [`transfer::count`] | crystal | [`transfer::StripConfig`] | [`transfer::StripSeries`] |
//! | Monte Carlo | [`sampling::count`] | model | [`sampling::SampleConfig`] | [`sampling::Sampled`] |
//! | Wang–Landau | [`sampling::wang_landau::count`] | model | [`sampling::wang_landau::WangLandauConfig`] | [`sampling::wang_landau::WangLandau`] |
//! | realisation average (diluted) | [`dilution::count`] | cluster | [`dilution::DilutionConfig`] | [`dilution::Realisations`] |
//! | size extrapolation | [`sampling::size::count`] | sampled estimates | [`sampling::size::SizeConfig`] | [`sampling::size::SizeFit`] |
//!
//! The conjugate fields of imposed means (`occupancy:`, `composition:`) are solved by
//! [`fields::solve`] around whichever counter evaluates ln Z(h) deterministically.
//!
//! Helpers that several counters use live in [`local`] (the independent-constraint sum and
//! the cluster on which local estimates are evaluated), not in a sibling counter.

pub mod bethe;
pub mod brute;
pub mod dilution;
pub mod exact;
pub(crate) mod exact_weighted;
pub mod extrapolate;
pub mod fields;
pub(crate) mod frontier;
pub mod local;
pub mod order;
pub mod pauling;
pub mod sampling;
pub mod transfer;

pub use crate::context::Context;
use crate::estimate::Estimate;

/// Refuse a weighted input (weights, imposed means) in a counter that counts every
/// arrangement once: its number would be confidently wrong.
pub(crate) fn refuse_weighted(weighted: bool, method: &'static str) -> crate::error::Result<()> {
    if weighted {
        return Err(crate::error::Error::Unweighted { method });
    }
    Ok(())
}

/// What every counter returns: the [`Estimate`], and beside it what only this method has.
///
/// `Counted<D>` dereferences to its details, so that `sampled.seed` reads
/// `sampled.details.seed`.
#[derive(Clone, Debug)]
pub struct Counted<D> {
    /// The value, comparable with every other method's.
    pub estimate: Estimate,
    /// What only this method has.
    pub details: D,
}

impl<D> Counted<D> {
    /// An estimate with its details.
    pub fn new(estimate: Estimate, details: D) -> Self {
        Counted { estimate, details }
    }
}

impl Counted<()> {
    /// An estimate with no details.
    pub fn plain(estimate: Estimate) -> Self {
        Counted {
            estimate,
            details: (),
        }
    }
}

impl<D> std::ops::Deref for Counted<D> {
    type Target = D;
    fn deref(&self) -> &D {
        &self.details
    }
}

impl<D> std::ops::DerefMut for Counted<D> {
    fn deref_mut(&mut self) -> &mut D {
        &mut self.details
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::crystal::Crystal;
    use crate::error::Result;
    use crate::model::Model;

    /// The contract, checked by the compiler: every counter has the same shape.
    #[test]
    fn every_counter_keeps_the_contract() {
        let _: fn(&Crystal, &(), &Context) -> Result<Counted<()>> = pauling::count;
        let _: fn(&Crystal, &bethe::BetheConfig, &Context) -> Result<Counted<()>> = bethe::count;
        let _: fn(&Model, &exact::ExactConfig, &Context) -> Result<Counted<()>> = exact::count;
        let _: fn(
            &Crystal,
            &transfer::StripConfig,
            &Context,
        ) -> Result<Counted<transfer::StripSeries>> = transfer::count;
        let _: fn(&Model, &sampling::SampleConfig, &Context) -> Result<Counted<sampling::Sampled>> =
            sampling::count;
        let _: fn(
            &Model,
            &sampling::wang_landau::WangLandauConfig,
            &Context,
        ) -> Result<Counted<sampling::wang_landau::WangLandau>> = sampling::wang_landau::count;
        let _: fn(
            &[Estimate],
            &sampling::size::SizeConfig,
            &Context,
        ) -> Result<Counted<sampling::size::SizeFit>> = sampling::size::count;
        let _: fn(
            &crate::cluster::Cluster,
            &dilution::DilutionConfig,
            &Context,
        ) -> Result<Counted<dilution::Realisations>> = dilution::count;
    }
}
