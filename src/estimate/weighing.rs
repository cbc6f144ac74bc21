//! What a weighted count reports beside its entropy: ln Z, and for every imposed mean
//! (`occupancy:`, `composition:`) the conjugate field found and the mean it reaches.
//!
//! With weights w(σ) on the arrangements σ, a counter reports as "ln W" the entropy of the
//! weighted ensemble, S/R = ln Z − ⟨ln w⟩ per formula unit (ln W of an ordinary count when
//! every weight is 1), so that S0 = R ln W keeps its meaning; ln Z itself is kept here. With
//! imposed means the weights include the fields h: w(σ) = w₀(σ) · exp(Σ_j h_j n_j(σ)), and
//! the entropy is that of the maximum-entropy ensemble with those means.

use crate::crystal::MeanKind;

/// ln Z and the fields of a weighted estimate.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Weighing {
    /// ln Z per formula unit: the weighted sum over arrangements, fields included.
    pub ln_z_per_unit: f64,
    /// One entry per imposed mean, in the file's order (occupancies, then compositions).
    pub fields: Vec<FieldValue>,
}

/// One imposed mean: what was asked, the conjugate field, what was reached.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct FieldValue {
    /// The entry as the file names it ("O-H1 state 1").
    pub label: String,
    /// `occupancy` or `composition`.
    #[serde(serialize_with = "kind_word")]
    pub kind: MeanKind,
    /// The mean asked for (fraction of the entry's variables in its state).
    pub target: f64,
    /// The conjugate field h (the natural log of the activity of the state), dimensionless.
    pub field: f64,
    /// The mean the ensemble reaches with that field.
    pub achieved: f64,
    /// One standard error of `achieved`, when it is sampled.
    pub achieved_sigma: Option<f64>,
}

impl MeanKind {
    /// The word used in the lattice file and in JSON.
    pub fn word(self) -> &'static str {
        match self {
            MeanKind::Occupancy => "occupancy",
            MeanKind::Composition => "composition",
        }
    }
}

fn kind_word<S: serde::Serializer>(k: &MeanKind, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(k.word())
}
