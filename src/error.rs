//! Typed errors of the library core.
//!
//! Every error carries its culprit: the file and the line and column where the problem sits
//! (when it comes from a lattice file), or the cell, rule or budget that failed. The
//! messages here name no command-line flag and no command: the binary words each error
//! for its user (which flag to change, which command to run instead), prints one message
//! on standard error and exits with a non-zero code.

use std::fmt;
use std::path::PathBuf;

/// A position in a lattice file (1-based line and column).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Position {
    /// 1-based line; 0 when unknown.
    pub line: u64,
    /// 1-based column; 0 when unknown.
    pub column: u64,
}

impl Position {
    /// A position, or `None` when the parser did not know it.
    pub fn known(self) -> Option<Self> {
        (self.line > 0).then_some(self)
    }
}

/// What went wrong.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The lattice file could not be read at all.
    #[error("{path}: cannot read the lattice file: {reason}")]
    Read {
        /// The file.
        path: PathBuf,
        /// Why (the operating system's words, or "is a directory", "is empty").
        reason: String,
    },
    /// The file is not YAML of the expected shape (syntax, unknown key, wrong type).
    #[error("{}: {message}", located(path, *position))]
    Syntax {
        /// The file.
        path: PathBuf,
        /// Where the parser stopped.
        position: Position,
        /// The parser's explanation.
        message: String,
    },
    /// The file is well-formed YAML but describes an impossible or inconsistent crystal.
    #[error("{}: {message}", located(path, *position))]
    Invalid {
        /// The file.
        path: PathBuf,
        /// Where the offending value sits.
        position: Position,
        /// What is wrong and what was expected.
        message: String,
    },
    /// A heat-capacity data file that cannot be used (a bad cell, unsorted temperatures, too
    /// few points); `line` is 0 when the problem is the file as a whole.
    #[error("{}: {message}", data_located(path, *line))]
    Data {
        /// The file.
        path: PathBuf,
        /// 1-based line of the offending row; 0 for the whole file.
        line: u64,
        /// What is wrong and what was expected.
        message: String,
    },
    /// Heat capacities per mole of one formula unit compared with a value per mole of
    /// another, with no conversion factor given.
    #[error(
        "{}: the heat capacities are per mole of {data_unit} but the comparison is per mole of \
         {target_unit}; the two formula units differ and no conversion factor (how many \
         {target_unit} one {data_unit} holds) was given",
        data_located(path, *line)
    )]
    FormulaUnitMismatch {
        /// The data file.
        path: PathBuf,
        /// The line of its `formula-unit` header.
        line: u64,
        /// The data's formula unit.
        data_unit: String,
        /// The formula unit of the comparison (the lattice's).
        target_unit: String,
    },
    /// A finite cell that cannot be used: its notation, a size, an axis, its size against
    /// the limits.
    #[error("{0}")]
    CellSize(crate::cluster::CellsError),
    /// A strip, or an extrapolation over widths, that cannot be made (in words).
    #[error("{0}")]
    Cells(String),
    /// A count whose frontier would exceed the state budget (a smaller cell or width, a
    /// larger budget or a statistical method may do).
    #[error("the exact count on {cells} needs more than the state budget: {detail}")]
    Budget {
        /// The cell that was asked for.
        cells: String,
        /// How large the state space grew or would grow.
        detail: String,
    },
    /// A time budget ran out before the computation finished.
    #[error("the computation on {cells} did not finish within the time budget")]
    Deadline {
        /// The cell that was being counted.
        cells: String,
    },
    /// A setting (budget, limit) out of its range.
    #[error("{0}")]
    Setting(String),
    /// A rule whose local table is too large to compile, or a model a counter cannot take.
    #[error("{0}")]
    Model(String),
    /// The charge sector that holds the largest eigenvalue of a strip cannot be established
    /// within the checks' limits; the operator on every state
    /// ([`crate::counters::transfer::Sectors::Full`]) needs no sector.
    #[error("{why}; use every state (Sectors::Full)")]
    Sector {
        /// Strip width in cells.
        width: usize,
        /// What could not be established, in words.
        why: String,
    },
    /// A shard file of a split Monte Carlo run that cannot be used or merged.
    #[error("{}: {message}", path.display())]
    Shard {
        /// The shard file.
        path: PathBuf,
        /// What is wrong with it.
        message: String,
    },
    /// A counter that cannot yet take the weights, occupancies or compositions of the file
    /// (it would count every arrangement once, which is a different number).
    #[error(
        "{method} cannot yet take weights, occupancies or compositions; this file has some, and counting every arrangement once would give a different number"
    )]
    Unweighted {
        /// The method, in words ("the Bethe estimate").
        method: &'static str,
    },
    /// The user asked the computation to stop (Ctrl-C) before it finished.
    #[error("interrupted while {what}")]
    Interrupted {
        /// What was being computed.
        what: String,
    },
    /// An iterative method stopped at its iteration cap before converging.
    #[error("{what} did not converge in {iterations} iterations ({detail})")]
    NotConverged {
        /// What was being computed.
        what: String,
        /// Iterations done.
        iterations: usize,
        /// Where it stood.
        detail: String,
    },
}

fn located(path: &std::path::Path, position: Position) -> String {
    match position.known() {
        Some(p) => format!("{}:{}:{}", path.display(), p.line, p.column),
        None => path.display().to_string(),
    }
}

fn data_located(path: &std::path::Path, line: u64) -> String {
    if line > 0 {
        format!("{}:{line}", path.display())
    } else {
        path.display().to_string()
    }
}

impl fmt::Display for Position {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}:{}", self.line, self.column)
    }
}

/// Results of the library.
pub type Result<T> = std::result::Result<T, Error>;
