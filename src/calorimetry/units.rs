//! Formula units: whether a data file's molar quantities are per the same formula unit as
//! the value they are compared with, and the factor that converts them.
//!
//! # What it decides
//!
//! The data file may state its formula unit (`#@ formula-unit:`, see [`super::data`]); the
//! comparison has its own (the lattice file's). With `ratio` the number of comparison units
//! one data unit holds (e.g. 2 Dy per Dy2Ti2O7), given by the user:
//!
//! | data states | ratio | result |
//! | --- | --- | --- |
//! | the same unit | none or 1 | factor 1 |
//! | the same unit | another number | refused: the factor would rescale identical units |
//! | another unit | none | refused ([`Error::FormulaUnitMismatch`], naming both) |
//! | another unit | r | factor r, with a note |
//! | nothing | none | factor 1, with a warning that the unit was not checked |
//! | nothing | r | factor r, with a note |
//!
//! Molar quantities of the data (entropies, residuals) are divided by the factor to be per
//! mole of the comparison's unit. Names are compared exactly after trimming (chemical
//! formulas are case-sensitive: Co is not CO).

use crate::error::{Error, Result};

use super::HeatCapacityData;

/// How the data's molar quantities relate to the comparison's formula unit.
#[derive(Clone, Debug, PartialEq)]
pub struct UnitMatch {
    /// Divide the data's molar quantities by this to get them per comparison unit.
    pub factor: f64,
    /// The data's formula unit, when the file states it.
    pub data_unit: Option<String>,
    /// The comparison's formula unit.
    pub target_unit: String,
    /// What was assumed or converted, in words (`None` when the units are the same).
    pub note: Option<String>,
    /// Whether the note is a warning (the unit could not be checked).
    pub unchecked: bool,
}

/// Match the data's formula unit against `target`, with an optional user-given ratio.
pub fn reconcile(data: &HeatCapacityData, target: &str, ratio: Option<f64>) -> Result<UnitMatch> {
    let target = target.trim().to_string();
    if let Some(r) = ratio
        && !(r.is_finite() && r > 0.0)
    {
        return Err(Error::Setting(format!(
            "the conversion factor between formula units must be a positive number, found {r}"
        )));
    }
    let line = data.header.formula_unit.as_ref().map_or(0, |x| x.1);
    let data_unit = data.formula_unit().map(|s| s.trim().to_string());
    let (factor, note, unchecked) = match (&data_unit, ratio) {
        (Some(d), r) if *d == target => {
            if let Some(r) = r
                && r != 1.0
            {
                return Err(Error::Data {
                    path: data.path.clone(),
                    line,
                    message: format!(
                        "the data and the comparison are both per mole of {target}, yet a \
                         conversion factor of {r} was given; the factor is for two different \
                         formula units"
                    ),
                });
            }
            (1.0, None, false)
        }
        (Some(d), None) => {
            return Err(Error::FormulaUnitMismatch {
                path: data.path.clone(),
                line,
                data_unit: d.clone(),
                target_unit: target,
            });
        }
        (Some(d), Some(r)) => (
            r,
            Some(format!(
                "the heat capacities are per mole of {d}; with {r} {target} per {d} (as given) \
                 their molar entropies are divided by {r} to be per mole of {target}"
            )),
            false,
        ),
        (None, None) => (
            1.0,
            Some(format!(
                "the data file does not state its formula unit (no `#@ formula-unit:` line), \
                 so its values are taken per mole of {target} unchecked"
            )),
            true,
        ),
        (None, Some(r)) => (
            r,
            Some(format!(
                "the data file does not state its formula unit; with {r} {target} per data \
                 formula unit (as given) its molar entropies are divided by {r}"
            )),
            false,
        ),
    };
    Ok(UnitMatch {
        factor,
        data_unit,
        target_unit: target,
        note,
        unchecked,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn data(header: &str) -> HeatCapacityData {
        HeatCapacityData::parse(&format!("{header}T,Cp\n1,1\n2,2\n3,3\n4,4\n"), "cp.csv").unwrap()
    }

    #[test]
    fn every_row_of_the_table() {
        let named = data("#@ formula-unit: Dy2Ti2O7\n");
        let bare = data("");
        assert_eq!(reconcile(&named, "Dy2Ti2O7", None).unwrap().factor, 1.0);
        assert_eq!(
            reconcile(&named, " Dy2Ti2O7 ", Some(1.0)).unwrap().factor,
            1.0
        );
        assert!(reconcile(&named, "Dy2Ti2O7", Some(2.0)).is_err());
        let e = reconcile(&named, "Dy", None).unwrap_err().to_string();
        assert!(e.starts_with("cp.csv:1: ") && e.contains("Dy2Ti2O7") && e.contains("of Dy;"));
        let m = reconcile(&named, "Dy", Some(2.0)).unwrap();
        assert_eq!(m.factor, 2.0);
        assert!(!m.unchecked && m.note.is_some());
        let m = reconcile(&bare, "Dy", None).unwrap();
        assert!(m.unchecked && m.factor == 1.0);
        assert_eq!(reconcile(&bare, "Dy", Some(0.5)).unwrap().factor, 0.5);
        assert!(reconcile(&bare, "Dy", Some(0.0)).is_err());
        // Case matters in formulas.
        assert!(reconcile(&data("#@ formula-unit: CO\n"), "Co", None).is_err());
    }
}
