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
pub(crate) fn position_of<T>(value: &Located<T>) -> Position {
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
    /// The local rules; none (the key left out or an empty list) leaves every variable free.
    #[serde(default)]
    pub rules: Vec<RuleSpec>,
    /// What one formula unit is.
    pub formula_unit: FormulaUnitSpec,
    /// Variables held at one state (a strong field, a known ordered sublattice).
    #[serde(default)]
    pub pinned: Vec<PinSpec>,
    /// Relative weights (activities) of the states of some variables.
    #[serde(default)]
    pub weights: Vec<WeightSpec>,
    /// Measured means of a state on some sites or bonds (partial order): the counters solve
    /// for the conjugate fields.
    #[serde(default)]
    pub occupancy: Vec<OccupancySpec>,
    /// Fixed global fractions of a state over sets of sites or bonds (canonical).
    #[serde(default)]
    pub composition: Vec<CompositionSpec>,
    /// Sites that may be vacant (a diluted crystal): each listed site independently empty
    /// with the given probability in every realisation.
    #[serde(default)]
    pub vacancies: Vec<VacancySpec>,
}

/// One entry of `weights:`: the relative weights of the states of every variable on a site
/// (by id or species) or a bond (by id or family).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct WeightSpec {
    /// Site id or species.
    #[serde(default)]
    pub site: Option<Located<String>>,
    /// Bond id, or the id of a `between`/`distance` family.
    #[serde(default)]
    pub bond: Option<Located<String>>,
    /// One non-negative weight per state, in the order the variable kind numbers them.
    pub states: Located<Vec<f64>>,
}

/// One entry of `occupancy:`: the measured mean of one state of the variables on a site
/// (by id or species) or a bond (by id or family), between 0 and 1 exclusive.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OccupancySpec {
    /// Site id or species.
    #[serde(default)]
    pub site: Option<Located<String>>,
    /// Bond id, or the id of a `between`/`distance` family.
    #[serde(default)]
    pub bond: Option<Located<String>>,
    /// The state whose mean is given.
    pub state: Located<u32>,
    /// Its mean (a refined occupancy).
    pub mean: Located<f64>,
}

/// One entry of `composition:`: the fraction of the variables on a set of sites (or bonds)
/// that are in one state, fixed exactly.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CompositionSpec {
    /// Site ids or species.
    #[serde(default)]
    pub sites: Option<Located<Vec<String>>>,
    /// Bond ids or families.
    #[serde(default)]
    pub bonds: Option<Located<Vec<String>>>,
    /// The state whose fraction is fixed.
    pub state: Located<u32>,
    /// The fraction, between 0 and 1 exclusive.
    pub fraction: Located<f64>,
}

/// One entry of `vacancies:`: every site of this id or species is vacant with probability
/// `fraction` (0 ≤ fraction < 1), independently of every other site.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct VacancySpec {
    /// Site id or species.
    pub site: Located<String>,
    /// Probability that such a site is vacant.
    pub fraction: Located<f64>,
}

/// One entry of `pinned:`: every variable on a site (by id or species) or on a bond (by id,
/// or every bond of a generated family) held at one state.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PinSpec {
    /// Site id or species.
    #[serde(default)]
    pub site: Option<Located<String>>,
    /// Bond id, or the id of a `between`/`distance` family.
    #[serde(default)]
    pub bond: Option<Located<String>>,
    /// The state held (0-based, as the variable kind numbers its states).
    pub state: Located<u32>,
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
    /// With `vacancies:`, the allowed counts for each number of members that remain when
    /// some are vacant (`{3: [1, 2], 2: [1], 1: [0, 1]}`); `allowed` holds the full scope's.
    #[serde(default)]
    pub remaining: Option<Located<std::collections::BTreeMap<u32, Vec<u32>>>>,
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
        let body = text.strip_prefix('\u{feff}').unwrap_or(text);
        if yaml_lines(body).all(|l| {
            let l = l.trim_matches(|c: char| c.is_whitespace() || c == '\u{feff}');
            l.is_empty() || l.starts_with('#')
        }) {
            let what = if body.trim().is_empty() {
                "is empty"
            } else {
                "holds only comments"
            };
            return Err(Error::Syntax {
                path: path.to_path_buf(),
                position: end_position(text),
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
                .filter(|p| p.line > 0)
                .unwrap_or_else(|| end_position(text));
            Error::Syntax {
                path: path.to_path_buf(),
                position,
                message: syntax_message(&e, text, position),
            }
        })
    }

    /// Read and parse a lattice file.
    pub fn from_file(path: &Path) -> Result<Self> {
        let bytes = read_file(path)?;
        Self::from_yaml(text_of(&bytes, path)?, path)
    }
}

/// The bytes of a lattice or structure file; a directory or an unreadable file is an
/// [`Error::Read`].
pub fn read_file(path: &Path) -> Result<Vec<u8>> {
    let read_error = |reason: String| Error::Read {
        path: path.to_path_buf(),
        reason,
    };
    if path.is_dir() {
        return Err(read_error(
            "is a directory; expected a lattice YAML file".into(),
        ));
    }
    std::fs::read(path).map_err(|e| read_error(io_words(&e)))
}

/// An operating-system error in words, without its error number.
pub(crate) fn io_words(e: &std::io::Error) -> String {
    use std::io::ErrorKind;
    match e.kind() {
        ErrorKind::NotFound => "no such file".into(),
        ErrorKind::PermissionDenied => "permission denied".into(),
        _ => {
            let text = e.to_string();
            match text.find(" (os error") {
                Some(i) => text[..i].to_string(),
                None => text,
            }
        }
    }
}

/// The bytes of a lattice file as text. Bytes that are not UTF-8 are an [`Error::Syntax`]
/// at the line and column of the first bad byte, with its byte offset.
pub(crate) fn text_of<'a>(bytes: &'a [u8], path: &Path) -> Result<&'a str> {
    std::str::from_utf8(bytes).map_err(|e| {
        let offset = e.valid_up_to();
        let before = std::str::from_utf8(&bytes[..offset]).unwrap_or("");
        Error::Syntax {
            path: path.to_path_buf(),
            position: end_position(before),
            message: format!(
                "the byte 0x{:02X} at byte offset {offset} is not UTF-8 text; expected a lattice \
                 description in UTF-8 (save the file as UTF-8)",
                bytes[offset]
            ),
        }
    })
}

/// The lines of a text, with any of the YAML line breaks (LF, CR LF, or CR alone).
fn yaml_lines(text: &str) -> impl Iterator<Item = &str> {
    text.split("\r\n").flat_map(|l| l.split(['\n', '\r']))
}

/// The line and column just after `text` (1-based), counting any YAML line break.
fn end_position(text: &str) -> Position {
    let lines: Vec<&str> = yaml_lines(text).collect();
    let last = lines.last().copied().unwrap_or("");
    Position {
        line: lines.len().max(1) as u64,
        column: last.chars().count() as u64 + 1,
    }
}

/// The parser's message on one line, without the source snippet it may render and without
/// its own copy of the position (the error already carries it), in the file's words: what
/// was expected and, where the position shows it, what was found.
fn syntax_message(e: &serde_saphyr::Error, text: &str, position: Position) -> String {
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
    // "… at line 19, column 42"
    if let Some(i) = first.find(" at line ") {
        first.truncate(i);
    }
    let found = found_at(text, position);
    let found_clause = match &found {
        Some(f) => format!(", found `{f}`"),
        None => ", found nothing".to_string(),
    };
    let message = plain_message(&first, &found_clause);
    let message = plain_words(&message);
    if message.trim().is_empty() {
        format!("not a valid lattice description{found_clause}")
    } else {
        message
    }
}

/// The known messages of the parser rewritten in the file's words.
fn plain_message(first: &str, found: &str) -> String {
    let first = first.trim();
    if let Some((head, _)) = first.split_once(", set DuplicateKeyPolicy") {
        let head = head.replace("duplicate mapping key", "duplicate key");
        return format!("{head}; each key may appear once");
    }
    for (word, what) in [
        ("invalid u64", "a whole number from 0"),
        ("invalid usize", "a whole number from 0"),
        ("invalid u32", "a whole number from 0"),
        ("invalid u8", "a whole number from 0"),
        ("invalid i64", "a whole number"),
        ("invalid f64", "a number"),
        ("invalid floating point", "a number"),
        ("invalid integer", "a whole number"),
        ("invalid unsigned integer", "a whole number from 0"),
    ] {
        if first.starts_with(word) {
            return format!("expected {what} here{found}");
        }
    }
    if first.contains("untagged enum AllowedSpec") {
        return format!(
            "expected `allowed` as a list of counts such as [2], or of tuples such as \
             [[0, 1], [1, 0]], of whole numbers from 0{found}"
        );
    }
    if let Some(rest) = first.strip_prefix("missing field ") {
        let key = rest.trim_matches('`');
        return format!("the required key `{key}:` is missing");
    }
    if let Some(rest) = first.strip_prefix("unknown field ") {
        // "unknown field `shfit`, expected one of `id`, `from`, …" or "…, expected `x`"
        let (key, expected) = rest.split_once(", expected ").unwrap_or((rest, ""));
        let expected = expected.trim_start_matches("one of ").replace('`', "");
        return if expected.is_empty() {
            format!("unknown key {key}; this mapping takes no such key")
        } else {
            format!("unknown key {key}; expected one of {expected}")
        };
    }
    // "invalid type: string \"x\", expected a sequence", and the same for a value.
    if let Some(rest) = first
        .strip_prefix("invalid type: ")
        .or_else(|| first.strip_prefix("invalid value: "))
    {
        let (got, expected) = rest
            .split_once(", expected ")
            .unwrap_or((rest, "another value"));
        return format!(
            "expected {}, found {}",
            expected_words(expected),
            found_words(got)
        );
    }
    if let Some(rest) = first.strip_prefix("invalid length ") {
        let (got, expected) = rest
            .split_once(", expected ")
            .unwrap_or((rest, "another length"));
        return format!(
            "expected {}, found a list of {got} entries",
            expected_words(expected)
        );
    }
    if first.starts_with("non-finite float") {
        return format!("expected a finite number here{found}");
    }
    if first.starts_with("cannot deserialize null") || first.contains("use Option<") {
        return "expected a value here, found nothing".to_string();
    }
    match first {
        "expected sequence start" => {
            format!("expected a list here (`[a, b]`, or lines that start with `- `){found}")
        }
        "expected mapping start" => format!(
            "expected a mapping of keys here (`{{key: value}}`, or `key: value` lines){found}"
        ),
        "expected string scalar" => format!("expected a word or text here{found}"),
        _ => {
            if first.starts_with("expected ") && !first.contains(" found") {
                format!("{first}{found}")
            } else if let Some(at) = found.strip_prefix(", found ").filter(|at| *at != "nothing") {
                format!("{first} (at {at})")
            } else {
                first.to_string()
            }
        }
    }
}

/// What serde says it expected, in the file's words.
fn expected_words(expected: &str) -> String {
    let e = expected.trim();
    let plain = match e {
        "a sequence" => "a list",
        "a map" | "a mapping" => "a mapping of keys",
        "a string" | "a borrowed string" => "a word or text",
        "u32" | "u64" | "usize" | "u8" | "u16" => "a whole number from 0",
        "i32" | "i64" | "isize" => "a whole number",
        "f64" | "f32" => "a number",
        "a boolean" => "true or false",
        _ => "",
    };
    if !plain.is_empty() {
        plain.to_string()
    } else if e.starts_with("struct ") {
        "a mapping of keys".to_string()
    } else {
        plain_words(e)
    }
}

/// What serde says it found, in the file's words.
fn found_words(got: &str) -> String {
    let g = got.trim();
    for (prefix, what) in [
        ("string ", "the text "),
        ("integer ", "the whole number "),
        ("floating point ", "the number "),
        ("boolean ", ""),
    ] {
        if let Some(rest) = g.strip_prefix(prefix) {
            return format!("{what}{}", rest.trim_matches('`'));
        }
    }
    match g {
        "sequence" => "a list".into(),
        "map" => "a mapping".into(),
        "unit value" | "null" => "nothing".into(),
        _ => plain_words(g),
    }
}

/// The parser's vocabulary replaced by the file's: YAML's "sequence" is a list, a
/// "scalar" is a value, Rust's type names are kinds of number or text.
fn plain_words(message: &str) -> String {
    let mut m = message.to_string();
    for (word, plain) in [
        ("block sequence entries", "list entries (`- `)"),
        ("block sequence", "list of `- ` lines"),
        ("flow sequence", "list in `[ ]`"),
        ("block mapping", "block of `key: value` lines"),
        ("flow mapping", "mapping in `{ }`"),
        ("block scalar", "block of text (`|` or `>`)"),
        ("double-quoted scalar", "quoted text"),
        ("single-quoted scalar", "quoted text"),
        ("plain scalar", "value"),
        ("scalar", "value"),
        ("sequence", "list"),
        ("unexpected EOF", "the file ends too early"),
        ("EOF", "the end of the file"),
        ("Option<String>", "a text"),
        ("String", "text"),
        ("deserialize", "read"),
        ("untagged enum", "value"),
        ("enum", "value"),
        ("struct", "mapping"),
        ("variant", "form"),
    ] {
        m = m.replace(word, plain);
    }
    for (word, plain) in [
        ("u8", "whole number"),
        ("u32", "whole number"),
        ("u64", "whole number"),
        ("usize", "whole number"),
        ("i64", "whole number"),
        ("f64", "number"),
    ] {
        m = replace_word(&m, word, plain);
    }
    m
}

/// Replace `word` where it stands as a whole word.
fn replace_word(text: &str, word: &str, with: &str) -> String {
    let mut out = String::new();
    let mut rest = text;
    while let Some(i) = rest.find(word) {
        let before = rest[..i].chars().next_back();
        let after = rest[i + word.len()..].chars().next();
        let boundary = |c: Option<char>| c.is_none_or(|c| !c.is_alphanumeric() && c != '_');
        out.push_str(&rest[..i]);
        out.push_str(if boundary(before) && boundary(after) {
            with
        } else {
            word
        });
        rest = &rest[i + word.len()..];
    }
    out.push_str(rest);
    out
}

/// The value written at a position (1-based line and column), up to the end of its token:
/// a closing bracket, a comma, a comment or the end of the line. `None` when nothing is
/// there.
fn found_at(text: &str, position: Position) -> Option<String> {
    let line = yaml_lines(text).nth(position.line.checked_sub(1)? as usize)?;
    let from: String = line
        .chars()
        .skip(position.column.saturating_sub(1) as usize)
        .collect();
    let mut depth = 0i32;
    let mut token = String::new();
    for c in from.chars() {
        match c {
            '[' | '{' => depth += 1,
            ']' | '}' if depth == 0 => break,
            ']' | '}' => depth -= 1,
            ',' if depth == 0 => break,
            '#' if token.ends_with(' ') || token.is_empty() => break,
            _ => {}
        }
        token.push(c);
        if token.chars().count() > 60 {
            token = token.chars().take(57).collect::<String>() + "…";
            break;
        }
    }
    let token = token.trim();
    (!token.is_empty()).then(|| token.to_string())
}

/// A path for embedded descriptions.
pub fn embedded_path(name: &str) -> PathBuf {
    PathBuf::from(format!("<built-in {name}>"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn message(text: &str) -> String {
        LatticeSpec::from_yaml(text, Path::new("f.yaml"))
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn positions_count_every_kind_of_line_break() {
        assert_eq!(end_position(""), Position { line: 1, column: 1 });
        assert_eq!(end_position("ab\ncd"), Position { line: 2, column: 3 });
        assert_eq!(
            end_position("a\r\nb\rcd\r"),
            Position { line: 4, column: 1 }
        );
        assert_eq!(end_position("é"), Position { line: 1, column: 2 });
    }

    #[test]
    fn the_value_at_a_position() {
        let text = "a: [1, {b: 2}, x]  # c\nname: [p, q]\n";
        assert_eq!(
            found_at(text, Position { line: 1, column: 5 }),
            Some("1".into())
        );
        assert_eq!(
            found_at(text, Position { line: 1, column: 8 }),
            Some("{b: 2}".into())
        );
        assert_eq!(
            found_at(text, Position { line: 2, column: 7 }),
            Some("[p, q]".into())
        );
        assert_eq!(found_at(text, Position { line: 9, column: 1 }), None);
    }

    #[test]
    fn whole_words_only() {
        assert_eq!(
            replace_word("u32 or u320 or (u32)", "u32", "N"),
            "N or u320 or (N)"
        );
    }

    #[test]
    fn issue11_empty_comment_only_and_cr_only_files() {
        assert_eq!(
            message(""),
            "f.yaml:1:1: the file is empty; expected a lattice description (see the lattice format in README.md)"
        );
        assert!(message("# a\n# b\n").starts_with("f.yaml:3:1: the file holds only comments"));
        // CR alone ends a line: a comment on the first line does not hide the rest.
        let m = message("# a comment\rname: x\rdimensions: two\r");
        assert!(m.starts_with("f.yaml:3:13: expected a whole number"), "{m}");
    }

    #[test]
    fn issue11_not_utf8_gives_the_byte_offset() {
        let e = text_of(b"name: x\n  ab\xffc", Path::new("f.yaml")).unwrap_err();
        assert_eq!(
            e.to_string(),
            "f.yaml:2:5: the byte 0xFF at byte offset 12 is not UTF-8 text; expected a lattice \
             description in UTF-8 (save the file as UTF-8)"
        );
    }
}
