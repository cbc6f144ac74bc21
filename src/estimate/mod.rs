//! Estimates: the one value type every counter returns, and the `estimate` command's
//! survey that runs every counter suiting a lattice and chooses the value to cite.
//!
//! - `value.rs`: [`Estimate`] and [`Method`], what every counter returns.
//! - `survey.rs`: [`Survey`] and [`SurveyConfig`], what a survey is given and what it holds.
//! - `schedule.rs`: [`survey`], every counter that suits a lattice, run within one time
//!   budget.
//! - `note.rs`: [`Note`] and [`ExactStop`], what a survey says about its run, as data.
//! - `cite.rs`: [`Survey::cited`], the one priority order of the value to cite.
//! - `weighing.rs`: [`Weighing`], ln Z and the fields of a weighted estimate.

mod cite;
mod dilution;
mod note;
mod schedule;
mod survey;
mod value;
mod weighing;

pub use cite::*;
pub use note::*;
pub use schedule::*;
pub use survey::*;
pub use value::*;
pub use weighing::*;
