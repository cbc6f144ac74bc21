//! Estimates: the one value type every counter returns, and the `estimate` command's
//! survey that runs every counter suiting a lattice and chooses the value to cite.
//!
//! - `value.rs`: [`Estimate`] and [`Method`], what every counter returns.
//! - `survey.rs`: [`survey`], every counter that suits a lattice within one time budget, and
//!   [`Survey::cited`], the value to cite.

mod survey;
mod value;

pub use survey::*;
pub use value::*;
