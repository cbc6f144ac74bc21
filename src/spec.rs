//! The lattice file as typed Rust values: the first of two parsing stages.
//!
//! These structs mirror the YAML one to one (`deny_unknown_fields`) and keep the source
//! position of every value a later check may need to point at. Nothing here is checked for
//! meaning; [`crate::crystal`] does that once the whole file is known.

use std::path::{Path, PathBuf};

use serde::Deserialize;
use serde_saphyr::Spanned;

use crate::error::{Error, Position, Result};

/// A value with the place in the file it came from.
pub type Located<T> = Spanned<T>;

/// Position of a located value.
pub fn position_of<T>(value: &Located<T>) -> Position {
    Position {
        line: value.referenced.line(),
        column: value.referenced.column(),
    }
}

/// The whole lattice file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LatticeSpec {
    /// Short name of the crystal or model.
    pub name: String,
    /// One or two sentences on what the file models.
    #[serde(default)]
    pub about: Option<String>,
    /// 1, 2 or 3.
    pub dimensions: Located<usize>,
    /// The unit cell.
    pub cell: CellSpec,
    /// Sites in fractional coordinates.
    pub sites: Located<Vec<SiteSpec>>,
    /// Bonds, listed or generated from a distance window.
    #[serde(default)]
    pub bonds: Vec<BondSpec>,
    /// Groups of sites (triangles, tetrahedra, plaquettes).
    #[serde(default)]
    pub groups: Vec<GroupSpec>,
    /// Which degrees of freedom live where.
    pub variables: Located<Vec<VariableSpec>>,
    /// The local rules.
    pub rules: Vec<RuleSpec>,
    /// What one formula unit is.
    pub formula_unit: FormulaUnitSpec,
}

/// The unit cell.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CellSpec {
    /// Lattice vectors, one row per vector, in length units of your choice.
    pub vectors: Located<Vec<Vec<f64>>>,
}

/// One site of the cell.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SiteSpec {
    /// Unique id.
    pub id: Located<String>,
    /// Fractional coordinates.
    pub at: Located<Vec<f64>>,
    /// Chemical species or sublattice label; defaults to the id.
    #[serde(default)]
    pub species: Option<String>,
    /// Local axis of an arrow variable on this site (Cartesian components).
    #[serde(default)]
    pub axis: Option<Located<Vec<f64>>>,
}

/// A bond listed explicitly (`from`, `to`, `shift`) or a rule that generates bonds
/// (`between` two species within a `distance` window).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BondSpec {
    /// Unique id (a prefix for generated bonds).
    pub id: Located<String>,
    /// Site id at the tail.
    #[serde(default)]
    pub from: Option<Located<String>>,
    /// Site id at the head, in the cell displaced by `shift`.
    #[serde(default)]
    pub to: Option<Located<String>>,
    /// Cell displacement of the head (integers, one per dimension).
    #[serde(default)]
    pub shift: Option<Located<Vec<i64>>>,
    /// Two species (or site ids) to join.
    #[serde(default)]
    pub between: Option<Located<Vec<String>>>,
    /// `[min, max]` distance, in the units of the cell vectors.
    #[serde(default)]
    pub distance: Option<Located<Vec<f64>>>,
}

/// A group of sites, each in a given cell.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GroupSpec {
    /// Unique id, used as a rule scope.
    pub id: Located<String>,
    /// The member sites.
    pub members: Located<Vec<MemberSpec>>,
}

/// One member of a group.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MemberSpec {
    /// Site id.
    pub site: Located<String>,
    /// Cell displacement (defaults to zero).
    #[serde(default)]
    pub shift: Option<Located<Vec<i64>>>,
}

/// A family of variables.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct VariableSpec {
    /// `sites` or `bonds`.
    pub on: Located<String>,
    /// `arrow`, `spin`, `occupancy` or `color`.
    pub kind: Located<String>,
    /// Number of states, for `color`.
    #[serde(default)]
    pub states: Option<Located<u32>>,
}

/// The allowed values of a rule: counts for `inward` and `occupied`, tuples for `table`.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum AllowedSpec {
    /// Allowed counts.
    Counts(Vec<u32>),
    /// Allowed local tuples.
    Tuples(Vec<Vec<u32>>),
}

/// One local rule.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RuleSpec {
    /// `inward`, `occupied`, `not-all-equal`, `distinct` or `table`.
    pub kind: Located<String>,
    /// `sites`, `bonds` or a group id.
    pub at: Located<String>,
    /// Which variables the rule reads when both sites and bonds carry some.
    #[serde(default)]
    pub of: Option<Located<String>>,
    /// Allowed counts or tuples.
    #[serde(default)]
    pub allowed: Option<Located<AllowedSpec>>,
    /// Restrict an `at: sites` rule to these site ids or species.
    #[serde(default)]
    pub only: Option<Located<Vec<String>>>,
}

/// What one formula unit is.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FormulaUnitSpec {
    /// Chemical formula or label, e.g. `H2O`.
    pub name: String,
    /// `sites`, `bonds` or `cell`.
    pub per: Located<String>,
    /// With `per: sites`: count only sites of this species (or id).
    #[serde(default)]
    pub species: Option<Located<String>>,
    /// With `per: cell`: formula units in one cell.
    #[serde(default)]
    pub count: Option<Located<f64>>,
}

impl LatticeSpec {
    /// Parse YAML text; `path` is used in error messages only.
    pub fn from_yaml(text: &str, path: &Path) -> Result<Self> {
        if text
            .lines()
            .all(|l| l.trim().is_empty() || l.trim_start().starts_with('#'))
        {
            let what = if text.trim().is_empty() {
                "is empty"
            } else {
                "holds only comments"
            };
            return Err(Error::Syntax {
                path: path.to_path_buf(),
                position: Position::default(),
                message: format!(
                    "the file {what}; expected a lattice description (see the lattice format in README.md)"
                ),
            });
        }
        serde_saphyr::from_str::<LatticeSpec>(text).map_err(|e| {
            let position = e
                .location()
                .map(|l| Position {
                    line: l.line(),
                    column: l.column(),
                })
                .unwrap_or_default();
            Error::Syntax {
                path: path.to_path_buf(),
                position,
                message: syntax_message(&e),
            }
        })
    }

    /// Read and parse a lattice file.
    pub fn from_file(path: &Path) -> Result<Self> {
        let read_error = |reason: String| Error::Read {
            path: path.to_path_buf(),
            reason,
        };
        if path.is_dir() {
            return Err(read_error(
                "is a directory; expected a lattice YAML file".into(),
            ));
        }
        let bytes = std::fs::read(path).map_err(|e| read_error(e.to_string()))?;
        let text = String::from_utf8(bytes)
            .map_err(|_| read_error("is not UTF-8 text; expected a lattice YAML file".into()))?;
        Self::from_yaml(&text, path)
    }
}

/// The parser's message on one line, without the source snippet it may render and without
/// its own copy of the position (the error already carries it), in the file's words.
fn syntax_message(e: &serde_saphyr::Error) -> String {
    let full = e.to_string();
    let mut first = full.lines().next().unwrap_or("").trim().to_string();
    for prefix in ["error: ", "Error: "] {
        if let Some(rest) = first.strip_prefix(prefix) {
            first = rest.to_string();
        }
    }
    // "line 7 column 29: …"
    if let Some(rest) = first.strip_prefix("line ")
        && let Some((_, after)) = rest.split_once(": ")
    {
        first = after.to_string();
    }
    if let Some((head, _)) = first.split_once(", set DuplicateKeyPolicy") {
        first = format!("{head}; each key may appear once");
    }
    for (word, what) in [
        ("invalid u64", "a whole number"),
        ("invalid usize", "a whole number"),
        ("invalid u32", "a whole number"),
        ("invalid i64", "a whole number"),
        ("invalid f64", "a number"),
    ] {
        if first.starts_with(word) {
            first = format!("expected {what} here");
        }
    }
    if first == "expected mapping start" {
        first = "expected a lattice description: a YAML mapping of keys such as `name:`, `dimensions:`, `cell:`".into();
    }
    if first.is_empty() {
        "not a valid lattice description".to_string()
    } else {
        first
    }
}

/// A path for embedded descriptions.
pub fn embedded_path(name: &str) -> PathBuf {
    PathBuf::from(format!("<built-in {name}>"))
}
