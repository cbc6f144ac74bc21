//! The library's typed errors in the command line's words: which flag to change, which
//! command to run instead.

use groundcount::Error;
use groundcount::cluster::{Cells, CellsError};
use groundcount::estimate::{Hint, Survey};

/// An error of the library as the command line says it.
pub fn error(e: &Error) -> String {
    match e {
        Error::CellSize(c) => cells_error("--cells", c),
        Error::Budget { .. } => format!(
            "{e}; try a smaller cell or width, a larger --max-states if memory allows, or a \
             statistical method (`groundcount sample` for Monte Carlo; `groundcount strip` \
             for the infinite crystal of a 2D lattice)"
        ),
        Error::Sector { why, .. } => format!("{why}; use every state (--sectors full)"),
        other => other.to_string(),
    }
}

/// A cell that cannot be used, naming `flag` (e.g. `--cells`) when the problem is in the
/// notation given to it, and `--open` for an axis.
pub fn cells_error(flag: &str, c: &CellsError) -> String {
    match (c, c.text()) {
        (CellsError::NoSuchAxis { axis, .. }, _) => format!("--open '{axis}': {}", c.problem()),
        (_, Some(text)) => format!("{flag} '{text}': {}", c.problem()),
        (_, None) => c.problem(),
    }
}

/// The cell notation given to `flag` (and the open axes of `--open`), read for a crystal of
/// `dimensions` dimensions; an error names the flag.
pub fn cells(
    flag: &str,
    text: &str,
    open: Option<&str>,
    dimensions: usize,
) -> anyhow::Result<Cells> {
    Cells::parse(text, open, dimensions).map_err(|e| match e {
        Error::CellSize(c) => anyhow::anyhow!(cells_error(flag, &c)),
        other => anyhow::Error::from(other),
    })
}

/// Advice on what to run next, naming the command that does it.
pub fn hint(h: Hint) -> String {
    match h {
        Hint::StripShowsEveryWidth => "`groundcount strip` shows every width".into(),
        Hint::RaiseBudgetOrStrip => "raise the budget or run `groundcount strip`".into(),
        Hint::SampleRunsLonger => "`groundcount sample` runs larger cells and longer".into(),
        other => groundcount::text::hint_words(other),
    }
}

/// A survey's notes in the command line's words.
pub fn notes(s: &Survey) -> Vec<String> {
    s.notes
        .iter()
        .map(|n| groundcount::text::note_words(n, &hint))
        .collect()
}

/// Why a survey's exact counts stopped, in words; empty when they ran to the limit.
pub fn stopped(s: &Survey) -> String {
    s.stopped
        .as_ref()
        .map_or(String::new(), groundcount::text::stop_words)
}
