//! The counters. Each reads only a [`crate::model::Model`] (or, for Pauling, the crystal's
//! compiled model on a cell large enough to show every constraint whole) and returns an
//! [`crate::estimate::Estimate`].

pub mod bethe;
pub mod brute;
pub mod exact;
pub mod extrapolate;
pub(crate) mod frontier;
pub mod order;
pub mod pauling;
pub mod sampling;
pub mod transfer;
