//! Lattice-file validation on inline YAML, through the public entry point
//! [`Lattice::from_yaml`]: every refusal of the two parsing stages (the file's shape in
//! `spec`, its meaning in `crystal`), each checked for its kind ([`Error::Syntax`] or
//! [`Error::Invalid`]), the line and column it points at, and its words — what was found
//! and what was expected. The limits are the crate's own (the range checks of issue 11);
//! tests at both sides of a limit show where it lies. The command line's share (exit code,
//! one `error:` line, the same error from every command) is tested in tests/cli_errors.rs.

use crate::Lattice;
use crate::error::{Error, Position};

/// The name the files go by in messages.
const FILE: &str = "test.yaml";

/// Square ice (Lieb 1967): arrows on the bonds of the square lattice, two in at each site.
const SQUARE_ICE: &str = "\
name: square ice
dimensions: 2
cell: {vectors: [[1.0, 0.0], [0.0, 1.0]]}
sites: [{id: O, at: [0.0, 0.0]}]
bonds:
  - {id: h, from: O, to: O, shift: [1, 0]}
  - {id: v, from: O, to: O, shift: [0, 1]}
variables: [{on: bonds, kind: arrow}]
rules: [{kind: inward, at: sites, allowed: [2]}]
formula_unit: {name: H2O, per: sites}
";

/// Ising spins on the triangular lattice, not all equal on the up triangles.
const TRIANGLES: &str = "\
name: triangular antiferromagnet
dimensions: 2
cell: {vectors: [[1.0, 0.0], [0.5, 0.8660254037844386]]}
sites: [{id: S, at: [0.0, 0.0]}]
bonds:
  - {id: a, from: S, to: S, shift: [1, 0]}
  - {id: b, from: S, to: S, shift: [0, 1]}
groups:
  - id: up
    members: [{site: S}, {site: S, shift: [1, 0]}, {site: S, shift: [0, 1]}]
variables: [{on: sites, kind: spin}]
rules: [{kind: not-all-equal, at: up}]
formula_unit: {name: spin, per: sites}
";

/// Pyrochlore spin ice: arrows on sites along local axes, bonds from a distance window,
/// two in and two out on each up tetrahedron.
const SPIN_ICE: &str = "\
name: spin ice
dimensions: 3
cell: {vectors: [[0.0, 5.05, 5.05], [5.05, 0.0, 5.05], [5.05, 5.05, 0.0]]}
sites:
  - {id: M0, species: Dy, at: [0.0, 0.0, 0.0], axis: [-1, -1, -1]}
  - {id: M1, species: Dy, at: [0.5, 0.0, 0.0], axis: [-1, 1, 1]}
  - {id: M2, species: Dy, at: [0.0, 0.5, 0.0], axis: [1, -1, 1]}
  - {id: M3, species: Dy, at: [0.0, 0.0, 0.5], axis: [1, 1, -1]}
bonds:
  - {id: nn, between: [Dy, Dy], distance: [3.0, 4.0]}
groups:
  - id: up
    members: [{site: M0}, {site: M1}, {site: M2}, {site: M3}]
variables: [{on: sites, kind: arrow}]
rules: [{kind: inward, at: up, allowed: [2]}]
formula_unit: {name: Dy, per: sites}
";

/// Marks, in the text given to [`Refusal::at`], the character the error must point at.
const MARK: char = '»';

/// Words of the parser or of Rust that must never reach a user.
const FOREIGN_WORDS: [&str; 9] = [
    "untagged",
    "enum",
    "Option<",
    "invalid type",
    "sequence",
    "scalar",
    "u32",
    "u64",
    "DuplicateKeyPolicy",
];

/// `base` with each `(from, to)` replaced; every `from` must occur exactly once.
#[track_caller]
fn with(base: &str, edits: &[(&str, &str)]) -> String {
    let mut text = base.to_string();
    for (from, to) in edits {
        assert_eq!(text.matches(from).count(), 1, "`{from}` once in\n{text}");
        text = text.replacen(from, to, 1);
    }
    text
}

/// The lines of a text, with any of the YAML line breaks (LF, CR LF, CR).
fn lines(text: &str) -> Vec<&str> {
    text.split("\r\n")
        .flat_map(|l| l.split(['\n', '\r']))
        .collect()
}

/// The kind of a refusal: the file's shape (stage one) or its meaning (stage two).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Stage {
    Syntax,
    Invalid,
}

/// A file that [`Lattice::from_yaml`] refused, and what it said.
struct Refusal {
    yaml: String,
    position: Position,
    message: String,
}

/// Load `yaml`, which must be refused at `stage`, naming the file and its position first
/// and saying the rest on one line, in the file's words.
#[track_caller]
fn refused(stage: Stage, yaml: &str) -> Refusal {
    let e = match Lattice::from_yaml(yaml, FILE) {
        Ok(_) => panic!("accepted, expected a refusal:\n{yaml}"),
        Err(e) => e,
    };
    let text = e.to_string();
    let (found, path, position) = match &e {
        Error::Syntax { path, position, .. } => (Stage::Syntax, path, *position),
        Error::Invalid { path, position, .. } => (Stage::Invalid, path, *position),
        other => panic!("neither a syntax nor a validation error: {other:?}"),
    };
    assert_eq!(found, stage, "{text}");
    assert_eq!(path.to_str(), Some(FILE), "{text}");
    assert!(position.known().is_some(), "no position: {text}");
    let prefix = format!("{FILE}:{}:{}: ", position.line, position.column);
    let message = text
        .strip_prefix(&prefix)
        .unwrap_or_else(|| panic!("the message starts with `{prefix}`: {text}"))
        .to_string();
    assert!(!message.contains(['\n', '\r']), "one line: {text}");
    for w in FOREIGN_WORDS {
        assert!(!message.contains(w), "`{w}` in the message: {text}");
    }
    // The parser's own copy of the position is dropped: the position is stated once.
    let again = format!("line {}", position.line);
    assert!(!message.contains(&again), "the position twice: {text}");
    Refusal {
        yaml: yaml.to_string(),
        position,
        message,
    }
}

/// A stage-two refusal: well-formed YAML that describes an impossible crystal.
#[track_caller]
fn invalid(yaml: &str) -> Refusal {
    refused(Stage::Invalid, yaml)
}

/// A stage-one refusal: the file is not YAML of the lattice file's shape.
#[track_caller]
fn syntax(yaml: &str) -> Refusal {
    refused(Stage::Syntax, yaml)
}

impl Refusal {
    /// The error points at the character after [`MARK`] in `marked` (or at its first
    /// character when unmarked); `marked` without the mark occurs once in the file.
    #[track_caller]
    fn at(self, marked: &str) -> Self {
        let (before, after) = marked.split_once(MARK).unwrap_or(("", marked));
        let needle = format!("{before}{after}");
        assert_eq!(
            self.yaml.matches(&needle).count(),
            1,
            "`{needle}` once in\n{}",
            self.yaml
        );
        let offset = self.yaml.find(&needle).unwrap() + before.len();
        let head = lines(&self.yaml[..offset]);
        let expected = Position {
            line: head.len() as u64,
            column: head.last().map_or(0, |l| l.chars().count()) as u64 + 1,
        };
        let shown = |p: Position| {
            let line = lines(&self.yaml)
                .get(p.line as usize - 1)
                .copied()
                .unwrap_or("");
            let caret = " ".repeat(p.column.saturating_sub(1) as usize);
            format!("{}:{}\n  {line}\n  {caret}^", p.line, p.column)
        };
        assert_eq!(
            self.position,
            expected,
            "\npoints at {}\nexpected   {}\n{}",
            shown(self.position),
            shown(expected),
            self.message
        );
        self
    }

    /// The message says what was found.
    #[track_caller]
    fn found(self, words: &str) -> Self {
        assert!(
            self.message.contains(words),
            "says what was found, `{words}`: {}",
            self.message
        );
        self
    }

    /// The message says what was expected.
    #[track_caller]
    fn expected(self, words: &str) -> Self {
        assert!(
            self.message.contains(words),
            "says what was expected, `{words}`: {}",
            self.message
        );
        self
    }
}

/// Load `yaml`, which must be accepted.
#[track_caller]
fn accepted(yaml: &str) -> Lattice {
    Lattice::from_yaml(yaml, FILE).unwrap_or_else(|e| panic!("refused: {e}\n{yaml}"))
}

/// The checks above can fail: a wrong position, wrong words or the wrong stage.
#[test]
#[should_panic(expected = "points at 2:13")]
fn a_wrong_position_fails() {
    invalid(&with(SQUARE_ICE, &[("dimensions: 2", "dimensions: 4")])).at("»dimensions: 4");
}

#[test]
#[should_panic(expected = "says what was found")]
fn wrong_words_fail() {
    invalid(&with(SQUARE_ICE, &[("dimensions: 2", "dimensions: 4")])).found("found 5");
}

#[test]
#[should_panic(expected = "Syntax")]
fn the_wrong_stage_fails() {
    invalid(&with(SQUARE_ICE, &[("dimensions: 2", "dimensions: four")]));
}

#[test]
fn the_base_files_are_accepted() {
    for base in [SQUARE_ICE, TRIANGLES, SPIN_ICE] {
        accepted(base);
    }
    // Spin ice: 4 sites, 12 bonds from the window (6 pairs in 2 orientations each).
    assert_eq!(accepted(SPIN_ICE).crystal.bonds.len(), 12);
}

// ---------------------------------------------------------------------------------------
// Reading the file

#[test]
fn files_that_cannot_be_read() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("lattices");
    for (path, reason) in [
        (
            dir.join("no-such-lattice.yaml"),
            "cannot read the lattice file: no such file",
        ),
        (dir.clone(), "is a directory; expected a lattice YAML file"),
    ] {
        match Lattice::from_file(&path) {
            Err(e @ Error::Read { .. }) => {
                let text = e.to_string();
                assert!(text.starts_with(&format!("{}: ", path.display())), "{text}");
                assert!(text.contains(reason), "{text}");
            }
            other => panic!("{}: {other:?}", path.display()),
        }
    }
}

#[test]
fn issue11_bytes_that_are_not_utf8_are_refused_at_their_offset() {
    let e = Lattice::from_bytes(b"name: x\ndimensions: \xff2\n", FILE).unwrap_err();
    assert!(matches!(e, Error::Syntax { .. }), "{e:?}");
    assert_eq!(
        e.to_string(),
        "test.yaml:2:13: the byte 0xFF at byte offset 20 is not UTF-8 text; expected a lattice \
         description in UTF-8 (save the file as UTF-8)"
    );
}

// ---------------------------------------------------------------------------------------
// Stage one: the file's shape (src/spec.rs)

#[test]
fn unknown_keys_list_the_keys_the_mapping_takes() {
    syntax(&with(SQUARE_ICE, &[("shift: [1, 0]}", "shfit: [1, 0]}")]))
        .at("»shfit")
        .found("unknown key `shfit`")
        .expected("expected one of id, from, to, shift, between, distance");
    syntax(&with(
        SQUARE_ICE,
        &[("dimensions", "colour: blue\ndimensions")],
    ))
    .at("»colour")
    .found("unknown key `colour`")
    .expected(
        "name, about, dimensions, cell, sites, bonds, groups, variables, rules, formula_unit",
    );
}

#[test]
fn a_missing_required_key_is_named() {
    syntax(&with(
        SQUARE_ICE,
        &[("{name: H2O, per: sites}", "{name: H2O}")],
    ))
    .at("{»name: H2O}")
    .expected("the required key `per:` is missing");
}

#[test]
fn whole_numbers_where_words_or_fractions_are_written() {
    for (from, to, value) in [
        ("dimensions: 2", "dimensions: two", "two"),
        ("dimensions: 2", "dimensions: -2", "-2"),
        ("dimensions: 2", "dimensions: 2.5", "2.5"),
    ] {
        syntax(&with(SQUARE_ICE, &[(from, to)]))
            .at(&format!("dimensions: »{value}"))
            .found(&format!("found `{value}`"))
            .expected("expected a whole number from 0");
    }
    syntax(&with(SQUARE_ICE, &[("shift: [1, 0]", "shift: [1.5, 0]")]))
        .at("[»1.5")
        .found("found `1.5`")
        .expected("expected a whole number");
    // Beyond the 64-bit integers.
    syntax(&with(
        SQUARE_ICE,
        &[("shift: [1, 0]", "shift: [99999999999999999999, 0]")],
    ))
    .at("[»99999999999999999999")
    .found("found `99999999999999999999`")
    .expected("expected a whole number");
    syntax(&with(
        TRIANGLES,
        &[("kind: spin}", "kind: color, states: many}")],
    ))
    .at("states: »many")
    .found("found `many`")
    .expected("expected a whole number from 0");
}

#[test]
fn a_number_written_as_a_word() {
    syntax(&with(
        SQUARE_ICE,
        &[("[[1.0, 0.0], [0.0", "[[1.0, zero], [0.0")],
    ))
    .at("»zero")
    .found("found `zero`")
    .expected("expected a number");
}

#[test]
fn a_list_or_a_word_where_the_other_is_written() {
    syntax(&with(
        SQUARE_ICE,
        &[(
            "sites: [{id: O, at: [0.0, 0.0]}]",
            "sites: {id: O, at: [0.0, 0.0]}",
        )],
    ))
    .at("sites: »{id")
    .found("found `{id: O, at: [0.0, 0.0]}`")
    .expected("expected a list here");
    syntax(&with(SQUARE_ICE, &[("{id: O, at", "{id: [O], at")]))
        .at("id: »[O]")
        .found("found `[O]`")
        .expected("expected a word or text");
}

#[test]
fn allowed_lists_of_anything_but_whole_numbers() {
    for value in ["[two]", "[-1]", "[[0, x]]"] {
        syntax(&with(
            SQUARE_ICE,
            &[("allowed: [2]", &format!("allowed: {value}"))],
        ))
        .at(&format!("allowed: »{value}"))
        .found(&format!("found `{value}`"))
        .expected("expected `allowed` as a list of counts such as [2], or of tuples");
    }
}

#[test]
fn a_key_given_twice() {
    syntax(&with(
        SQUARE_ICE,
        &[("dimensions", "name: other\ndimensions")],
    ))
    .at("»name: other")
    .found("duplicate key: name")
    .expected("each key may appear once");
}

#[test]
fn a_key_without_its_value() {
    syntax(&with(SQUARE_ICE, &[("name: square ice", "name:")]))
        .at("name»:\n")
        .expected("expected a value here, found nothing");
}

#[test]
fn text_that_is_not_yaml() {
    syntax("name: x\n  dimensions: [2\n")
        .at("dimensions»: [2")
        .found("(at `: [2`)")
        .expected("mapping values are not allowed in this context");
    syntax("name: x\u{7}y\ndimensions: 2\n")
        .at("name: »x")
        .found("unexpected character");
}

#[test]
fn positions_count_every_line_break_and_skip_a_byte_order_mark() {
    // A comment ended by CR alone ends its line (issue 11).
    syntax("# a comment\rname: x\rdimensions: two\r")
        .at("dimensions: »two")
        .found("found `two`");
    syntax("name: x\r\ndimensions: two\r\n")
        .at("dimensions: »two")
        .found("found `two`");
    syntax("\u{feff}name: x\ndimensions: two\n")
        .at("dimensions: »two")
        .found("found `two`");
}

// ---------------------------------------------------------------------------------------
// Stage two: dimensions and the cell (src/crystal.rs)

#[test]
fn dimensions_other_than_1_2_or_3() {
    for d in [0, 4] {
        invalid(&with(
            SQUARE_ICE,
            &[("dimensions: 2", &format!("dimensions: {d}"))],
        ))
        .at(&format!("dimensions: »{d}"))
        .found(&format!("found {d}"))
        .expected("dimensions must be 1, 2 or 3");
    }
}

/// The cell vectors of square ice replaced by `vectors`; every refusal points at the list.
fn cell(vectors: &str) -> String {
    with(
        SQUARE_ICE,
        &[(
            "vectors: [[1.0, 0.0], [0.0, 1.0]]",
            &format!("vectors: {vectors}"),
        )],
    )
}

#[test]
fn cell_vectors_of_the_wrong_number_or_length() {
    invalid(&cell("[[1.0, 0.0], [0.0, 1.0], [0.0, 0.0]]"))
        .at("vectors: »[[")
        .found("found 3")
        .expected("cell.vectors must list 2 vectors for a 2-dimensional crystal");
    invalid(&cell("[[1.0, 0.0], [0.0, 1.0, 0.0]]"))
        .at("vectors: »[[")
        .found("cell vector 2 has 3 components")
        .expected("expected 2");
}

#[test]
fn cell_vectors_that_are_not_finite() {
    for (vectors, found) in [
        (
            "[[1.0, 0.0], [.nan, 1.0]]",
            "cell vector 2 has the component NaN",
        ),
        (
            "[[1.0, -.inf], [0.0, 1.0]]",
            "cell vector 1 has the component -infinity",
        ),
        (
            "[[.inf, 0.0], [0.0, 1.0]]",
            "cell vector 1 has the component infinity",
        ),
    ] {
        invalid(&cell(vectors))
            .at("vectors: »[[")
            .found(found)
            .expected("expected finite numbers");
    }
}

#[test]
fn issue11_cell_vector_lengths_between_1e_minus_30_and_1e30() {
    for (vectors, found) in [
        (
            "[[1.0, 0.0], [0.0, 1e31]]",
            "cell vector 2 is 1e31 length units long",
        ),
        (
            "[[1e-31, 0.0], [0.0, 1.0]]",
            "cell vector 1 is 1e-31 length units long",
        ),
    ] {
        invalid(&cell(vectors))
            .at("vectors: »[[")
            .found(found)
            .expected("expected a length between 1e-30 and 1e30");
    }
    accepted(&cell("[[1e30, 0.0], [0.0, 1e-30]]"));
}

#[test]
fn cell_vectors_that_do_not_span_space() {
    let expected = "expected vectors spanning the space";
    for vectors in [
        "[[1.0, 0.0], [0.0, 0.0]]",
        "[[1.0, 1.0], [2.0, 2.0]]",
        // Dependence is judged on vectors scaled to unit length, whatever their size.
        "[[1e-20, 0.0], [1e-20, 1e-30]]",
    ] {
        invalid(&cell(vectors))
            .at("vectors: »[[")
            .found("the cell vectors are zero or linearly dependent")
            .expected(expected);
    }
    accepted(&cell("[[1e-20, 0.0], [1e-20, 1e-21]]"));
    // Coplanar in three dimensions; a list written as lines points at its first entry.
    invalid(&with(
        SPIN_ICE,
        &[(
            "cell: {vectors: [[0.0, 5.05, 5.05], [5.05, 0.0, 5.05], [5.05, 5.05, 0.0]]}",
            "cell:\n  vectors:\n    - [1.0, 0.0, 0.0]\n    - [0.0, 1.0, 0.0]\n    - [1.0, 1.0, 0.0]",
        )],
    ))
    .at("»- [1.0, 0.0, 0.0]")
    .found("linearly dependent (collinear or coplanar)")
    .expected(expected);
}

// ---------------------------------------------------------------------------------------
// Sites and their axes

#[test]
fn sites_missing_or_repeated() {
    invalid(&with(
        SQUARE_ICE,
        &[("sites: [{id: O, at: [0.0, 0.0]}]", "sites: []")],
    ))
    .at("sites: »[]")
    .found("`sites` is an empty list")
    .expected("expected at least one site");
    invalid(&with(
        SQUARE_ICE,
        &[(
            "{id: O, at: [0.0, 0.0]}",
            "{id: O, at: [0.0, 0.0]}, {id: O, at: [0.5, 0.5]}",
        )],
    ))
    .at("{id: »O, at: [0.5")
    .found("site id 'O' is used twice");
}

#[test]
fn issue11_at_most_10000_sites_per_cell() {
    let sites = |n: usize| -> String {
        let list: Vec<String> = (0..n)
            .map(|i| format!("  - {{id: s{i}, at: [{}, 0.0]}}", i as f64 / n as f64))
            .collect();
        with(
            SQUARE_ICE,
            &[
                (
                    "sites: [{id: O, at: [0.0, 0.0]}]",
                    &format!("sites:\n{}", list.join("\n")),
                ),
                (
                    "from: O, to: O, shift: [1, 0]",
                    "from: s0, to: s0, shift: [1, 0]",
                ),
                (
                    "from: O, to: O, shift: [0, 1]",
                    "from: s0, to: s0, shift: [0, 1]",
                ),
                (
                    "rules: [{kind: inward, at: sites, allowed: [2]}]",
                    "rules: []",
                ),
            ],
        )
    };
    assert_eq!(accepted(&sites(10_000)).crystal.sites.len(), 10_000);
    invalid(&sites(10_001))
        .at("{id: »s10000,")
        .found("the file lists 10001 sites")
        .expected("at most 10000 sites per unit cell");
}

#[test]
fn site_coordinates_of_the_wrong_number() {
    invalid(&with(
        SQUARE_ICE,
        &[("at: [0.0, 0.0]}", "at: [0.0, 0.0, 0.0]}")],
    ))
    .at("at: »[0.0, 0.0, 0.0]")
    .found("site 'O' has 3 fractional coordinates")
    .expected("expected 2");
}

#[test]
fn issue11_fractional_coordinates_finite_and_within_1000() {
    for (at, found) in [
        ("[0.0, .nan]", "the fractional coordinate NaN"),
        ("[1001.0, 0.0]", "the fractional coordinate 1001"),
        ("[0.0, -1e300]", "the fractional coordinate -1e300"),
        ("[.inf, 0.0]", "the fractional coordinate infinity"),
    ] {
        invalid(&with(
            SQUARE_ICE,
            &[("at: [0.0, 0.0]}", &format!("at: {at}}}"))],
        ))
        .at(&format!("at: »{at}"))
        .found(found)
        .expected("expected a finite number between -1000 and 1000");
    }
    accepted(&with(
        SQUARE_ICE,
        &[("at: [0.0, 0.0]}", "at: [1000.0, -1000.0]}")],
    ));
}

/// Spin ice with the axis of site M1 replaced by `axis`.
fn axis(axis: &str) -> String {
    with(SPIN_ICE, &[("axis: [-1, 1, 1]", &format!("axis: {axis}"))])
}

#[test]
fn issue11_arrow_axes_are_finite() {
    // A NaN axis was accepted and made every arrangement of spin ice forbidden.
    for (value, found) in [
        (
            "[-1, .nan, 1]",
            "the axis of site 'M1' has the component NaN",
        ),
        (
            "[-1, 1, -.inf]",
            "the axis of site 'M1' has the component -infinity",
        ),
    ] {
        invalid(&axis(value))
            .at(&format!("axis: »{value}"))
            .found(found)
            .expected("expected finite numbers");
    }
}

#[test]
fn arrow_axes_of_the_wrong_length_zero_or_missing() {
    invalid(&axis("[-1, 1]"))
        .at("axis: »[-1, 1]")
        .found("axis of site 'M1' has 2 components")
        .expected("expected 3");
    invalid(&axis("[0, 0, 0]"))
        .at("axis: »[0, 0, 0]")
        .found("the zero vector")
        .expected("an arrow axis must not be the zero vector");
    // Only the direction counts: tiny and huge axes are the same axis.
    accepted(&axis("[-1e-300, 1e-300, 1e-300]"));
    accepted(&axis("[-1e300, 1e300, 1e300]"));
    invalid(&with(SPIN_ICE, &[(", axis: [1, -1, 1]", "")]))
        .at("{id: »M2")
        .found("site 'M2' carries an arrow variable")
        .expected("needs an `axis`");
    // An axis at right angles to the way to the group's centre is neither in nor out.
    invalid(&axis("[0, 1, -1]"))
        .at("at: »up, allowed")
        .found(
            "the axis of site 'M1' is perpendicular to the direction of the centre of group 'up'",
        )
        .expected("whether its arrow points in or out is undefined");
}

// ---------------------------------------------------------------------------------------
// Listed bonds and shifts

#[test]
fn bonds_between_unknown_sites() {
    invalid(&with(
        SQUARE_ICE,
        &[(
            "from: O, to: O, shift: [1, 0]",
            "from: X, to: O, shift: [1, 0]",
        )],
    ))
    .at("from: »X")
    .found("unknown site id 'X'")
    .expected("the sites are: O");
    invalid(&with(
        SQUARE_ICE,
        &[(
            "from: O, to: O, shift: [0, 1]",
            "from: O, to: Q, shift: [0, 1]",
        )],
    ))
    .at("to: »Q")
    .found("unknown site id 'Q'")
    .expected("the sites are: O");
}

#[test]
fn bonds_incomplete_or_mixed() {
    invalid(&with(
        SQUARE_ICE,
        &[("{id: h, from: O, to: O, shift: [1, 0]}", "{id: h, from: O}")],
    ))
    .at("{id: »h")
    .found("bond 'h'")
    .expected("needs `from` and `to` (and `shift`), or `between` and `distance`");
    invalid(&with(
        SQUARE_ICE,
        &[("shift: [1, 0]}", "shift: [1, 0], distance: [0.5, 1.5]}")],
    ))
    .at("{id: »h")
    .found("bond 'h' mixes `from`/`to`/`shift` with `between`/`distance`")
    .expected("expected either a listed bond or a distance window");
}

#[test]
fn a_bond_from_a_site_to_itself_in_the_same_cell() {
    for edit in [
        (
            "from: O, to: O, shift: [1, 0]",
            "from: O, to: O, shift: [0, 0]",
        ),
        ("from: O, to: O, shift: [1, 0]", "from: O, to: O"),
    ] {
        invalid(&with(SQUARE_ICE, &[edit]))
            .at("{id: »h")
            .found("bond 'h' joins site 'O' to itself in the same cell")
            .expected("give a non-zero shift");
    }
}

#[test]
fn bonds_repeated() {
    // Position not checked: the error points at the first bond 'h', where the second one,
    // the repeat, would be more useful (reported with issue 12).
    invalid(&with(SQUARE_ICE, &[("{id: v, from", "{id: h, from")]))
        .found("bond id 'h' is used twice");
    // The same sites and shift, written forwards or backwards.
    for shift in ["[1, 0]", "[-1, 0]"] {
        invalid(&with(
            SQUARE_ICE,
            &[("shift: [0, 1]", &format!("shift: {shift}"))],
        ))
        .at("{id: »v")
        .found("bond 'v' repeats bond 'h'")
        .expected("(same sites and shift)");
    }
    // A window that finds a listed bond again: [0.9, 1.1] gives h1 along b and h2 along a.
    invalid(&window("[O, O]", "[0.9, 1.1]"))
        .at("{id: »v")
        .found("bond 'v' repeats bond 'h1'");
}

#[test]
fn shifts_with_one_component_per_dimension() {
    invalid(&with(SQUARE_ICE, &[("shift: [1, 0]", "shift: [1, 0, 0]")]))
        .at("shift: »[1, 0, 0]")
        .found("the shift of bond 'h' has 3 components")
        .expected("expected 2 (one per dimension)");
    invalid(&with(
        TRIANGLES,
        &[("{site: S, shift: [0, 1]}]", "{site: S, shift: [0]}]")],
    ))
    .at("shift: »[0]")
    .found("the shift of a member of group 'up' has 1 components")
    .expected("expected 2 (one per dimension)");
}

#[test]
fn issue11_shifts_within_64_cells() {
    for value in ["65", "-65", "-9223372036854775808"] {
        invalid(&with(
            SQUARE_ICE,
            &[("shift: [1, 0]", &format!("shift: [{value}, 0]"))],
        ))
        .at(&format!("shift: »[{value}, 0]"))
        .found(&format!(
            "the shift of bond 'h' has the component {value}, beyond ±64 cells"
        ))
        .expected("expected a shift to a nearby cell");
    }
    invalid(&with(
        TRIANGLES,
        &[("{site: S, shift: [0, 1]}]", "{site: S, shift: [0, 99]}]")],
    ))
    .at("shift: »[0, 99]")
    .found("the shift of a member of group 'up' has the component 99, beyond ±64 cells");
    accepted(&with(SQUARE_ICE, &[("shift: [1, 0]", "shift: [64, 0]")]));
    accepted(&with(SQUARE_ICE, &[("shift: [1, 0]", "shift: [-64, 0]")]));
}

#[test]
fn issue11_shifts_that_make_the_smallest_cluster_too_large() {
    // Spin ice has 4 sites and 12 bonds per cell; a shift of r cells makes the smallest
    // periodic cluster (2r + 1)³ cells: r = 31 gives 63³ · 16 = 4000752 sites and bonds,
    // within the 2^22 = 4194304 allowed, r = 32 gives 65³ · 16 = 4394000.
    let reaching = |r: i64| {
        with(
            SPIN_ICE,
            &[("{site: M3}]", &format!("{{site: M3, shift: [0, 0, {r}]}}]"))],
        )
    };
    accepted(&reaching(31));
    invalid(&reaching(32))
        .at("shift: »[0, 0, 32]")
        .found("shifts reaching 32 cells make the smallest periodic cluster 65x65x65 cells of 16 sites and bonds each (4394000 in all")
        .expected("at most 4194304); expected shifts to nearby cells");
}

// ---------------------------------------------------------------------------------------
// Bonds from a distance window

/// Square ice with bond `h` generated from `between` and `distance` instead (bond `v`
/// stays).
fn window(between: &str, distance: &str) -> String {
    with(
        SQUARE_ICE,
        &[(
            "{id: h, from: O, to: O, shift: [1, 0]}",
            &format!("{{id: h, between: {between}, distance: {distance}}}"),
        )],
    )
}

#[test]
fn windows_incomplete_or_naming_unknown_species() {
    invalid(&with(
        SQUARE_ICE,
        &[(
            "{id: h, from: O, to: O, shift: [1, 0]}",
            "{id: h, between: [O, O]}",
        )],
    ))
    .at("{id: »h")
    .found("generated bond 'h'")
    .expected("needs both `between: [A, B]` and `distance: [min, max]`");
    invalid(&window("[O, O, O]", "[0.5, 1.5]"))
        .at("between: »[O, O, O]")
        .expected("`between` must name exactly two species or site ids");
    invalid(&window("[O, H]", "[0.5, 1.5]"))
        .at("between: »[O, H]")
        .found("`between` names 'H'")
        .expected("which is no site id or species");
}

#[test]
fn windows_that_are_not_an_interval() {
    for (distance, shown) in [
        ("[1.5, 0.5]", "[1.5, 0.5]"),
        ("[-1.0, 0.5]", "[-1, 0.5]"),
        ("[0.5, .inf]", "[0.5, infinity]"),
        ("[.nan, 1.0]", "[NaN (not a number), 1]"),
        ("[0.5, 1.0, 1.5]", "[0.5, 1, 1.5]"),
        ("[0.5, 0.5]", "[0.5, 0.5]"),
    ] {
        invalid(&window("[O, O]", distance))
            .at(&format!("distance: »{distance}"))
            .found(&format!("`distance` is {shown}"))
            .expected("expected [min, max] with finite numbers, 0 <= min < max");
    }
}

#[test]
fn a_window_that_finds_no_pair() {
    // Square ice's nearest images are 1 apart, the next √2.
    invalid(&window("[O, O]", "[1.1, 1.3]"))
        .at("distance: »[1.1, 1.3]")
        .found("no O–O pair lies between 1.1 and 1.3 length units")
        .expected("check the window, the cell vectors and the coordinates");
}

#[test]
fn issue11_windows_reaching_beyond_64_cells() {
    // The unit square: a window up to 100 length units needs shifts of 101 cells.
    invalid(&window("[O, O]", "[0.5, 100.0]"))
        .at("distance: »[0.5, 100.0]")
        .found("the distance window reaches 100 length units, more than 64 cells along some axis")
        .expected("expected a window around the bond length");
    // So far that the number of cells to search does not fit in an integer.
    invalid(&window("[O, O]", "[0.5, 1e300]"))
        .at("distance: »[0.5, 1e300]")
        .found("the distance window reaches 1e300 length units");
}

#[test]
fn issue11_windows_giving_a_site_more_than_16_bonds() {
    // Around the one site of the unit square, 0.5 ≤ d ≤ 2.3 holds 20 periodic images
    // (4 at 1, 4 at √2, 4 at 2, 8 at √5): 10 bonds from the site to itself, 20 bond ends.
    invalid(&window("[O, O]", "[0.5, 2.3]"))
        .at("distance: »[0.5, 2.3]")
        .found("the distance window [0.5, 2.3] gives site 'O' more than 16 bonds")
        .expected("expected a window around the bond length");
}

#[test]
fn issue11_windows_testing_more_than_50_million_pairs() {
    // Five sites of one species in the unit cube, a window up to 63: shifts of 64 cells
    // each way, 129³ = 2146689 cells, 25 site pairs in each, 53667225 candidates.
    let sites: Vec<String> = (0..5)
        .map(|i| {
            format!(
                "  - {{id: A{i}, species: X, at: [{}, 0.0, 0.0]}}",
                i as f64 / 5.0
            )
        })
        .collect();
    let yaml = format!(
        "name: wide window
dimensions: 3
cell: {{vectors: [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]]}}
sites:
{}
bonds:
  - {{id: w, between: [X, X], distance: [0.1, 63.0]}}
variables: [{{on: bonds, kind: arrow}}]
formula_unit: {{name: X, per: sites}}
",
        sites.join("\n")
    );
    invalid(&yaml)
        .at("distance: »[0.1, 63.0]")
        .found("would test about 53667225 site pairs across 2146689 neighbouring cells")
        .expected("(at most 50000000); expected a window around the bond length");
}

// ---------------------------------------------------------------------------------------
// Groups

#[test]
fn group_ids_repeated_or_reserved() {
    invalid(&with(
        TRIANGLES,
        &[(
            "variables:",
            "  - id: up\n    members: [{site: S}, {site: S, shift: [1, 1]}]\nvariables:",
        )],
    ))
    .at("- id: »up\n    members: [{site: S}, {site: S, shift: [1, 1]}]")
    .found("group id 'up'")
    .expected("is used twice or is a reserved word");
    for word in ["sites", "bonds"] {
        invalid(&with(
            TRIANGLES,
            &[
                ("- id: up", &format!("- id: {word}")),
                ("at: up", &format!("at: {word}")),
            ],
        ))
        .at(&format!("id: »{word}"))
        .found(&format!("group id '{word}'"))
        .expected("is used twice or is a reserved word");
    }
}

/// The triangles with the members of group `up` replaced by `members`.
fn members(members: &str) -> String {
    with(
        TRIANGLES,
        &[(
            "[{site: S}, {site: S, shift: [1, 0]}, {site: S, shift: [0, 1]}]",
            members,
        )],
    )
}

#[test]
fn group_members_unknown_repeated_or_too_few() {
    invalid(&members("[{site: S}, {site: T, shift: [1, 0]}]"))
        .at("site: »T")
        .found("unknown site id 'T'")
        .expected("the sites are: S");
    invalid(&members(
        "[{site: S}, {site: S, shift: [1, 0]}, {site: S, shift: [1, 0]}]",
    ))
    .at("{site: S, shift: [1, 0]}, {site: »S")
    .found("group 'up' lists site 'S' with the same shift twice");
    // A missing shift is the zero shift.
    invalid(&members("[{site: S}, {site: S, shift: [0, 0]}]"))
        .at("{site: »S, shift: [0, 0]}")
        .found("group 'up' lists site 'S' with the same shift twice");
    for list in ["[{site: S}]", "[]"] {
        invalid(&members(list))
            .at(&format!("members: »{list}"))
            .expected("group 'up' needs at least two members");
    }
}

// ---------------------------------------------------------------------------------------
// Variables

#[test]
fn variables_missing_unknown_or_declared_twice() {
    invalid(&with(
        SQUARE_ICE,
        &[("variables: [{on: bonds, kind: arrow}]", "variables: []")],
    ))
    .at("variables: »[]")
    .found("`variables` is an empty list")
    .expected("expected e.g. `- {on: bonds, kind: arrow}`");
    invalid(&with(TRIANGLES, &[("kind: spin}", "kind: spinor}")]))
        .at("kind: »spinor")
        .found("unknown variable kind 'spinor'")
        .expected("expected arrow, spin, occupancy or color");
    invalid(&with(TRIANGLES, &[("on: sites", "on: groups")]))
        .at("on: »groups")
        .found("found 'groups'")
        .expected("variables live `on: sites` or `on: bonds`");
    invalid(&with(
        TRIANGLES,
        &[(
            "[{on: sites, kind: spin}]",
            "[{on: sites, kind: spin}, {on: sites, kind: color, states: 3}]",
        )],
    ))
    .at("{on: »sites, kind: color")
    .found("variables on sites are declared twice");
}

#[test]
fn colour_states_from_2_to_64() {
    let colours = |states: &str| {
        with(
            TRIANGLES,
            &[("kind: spin}", &format!("kind: color{states}}}"))],
        )
    };
    invalid(&colours(""))
        .at("kind: »color")
        .expected("a color variable needs `states: q` (q >= 2)");
    for q in ["0", "1"] {
        invalid(&colours(&format!(", states: {q}")))
            .at(&format!("states: »{q}"))
            .expected("a color variable needs `states` of at least 2");
    }
    invalid(&colours(", states: 65"))
        .at("states: »65")
        .expected("a color variable may have at most 64 states");
    accepted(&colours(", states: 2"));
    accepted(&colours(", states: 64"));
}

#[test]
fn states_on_two_state_variables() {
    invalid(&with(
        TRIANGLES,
        &[("kind: spin}", "kind: spin, states: 3}")],
    ))
    .at("states: »3")
    .found("a spin variable has 2 states")
    .expected("`states` applies to color variables");
    // Saying 2 is harmless.
    accepted(&with(
        TRIANGLES,
        &[("kind: spin}", "kind: spin, states: 2}")],
    ));
}

#[test]
fn variables_on_bonds_without_bonds() {
    let no_bonds = (
        "bonds:\n  - {id: a, from: S, to: S, shift: [1, 0]}\n  - {id: b, from: S, to: S, shift: [0, 1]}\n",
        "",
    );
    invalid(&with(
        TRIANGLES,
        &[
            no_bonds,
            ("[{on: sites, kind: spin}]", "[{on: bonds, kind: arrow}]"),
        ],
    ))
    .at("{on: »bonds")
    .found("variables are declared on bonds but the file has no bonds");
    // Position not checked when the bond variables come second: the error points at the
    // first entry of `variables` (reported with issue 12).
    invalid(&with(
        TRIANGLES,
        &[
            no_bonds,
            (
                "[{on: sites, kind: spin}]",
                "[{on: sites, kind: spin}, {on: bonds, kind: arrow}]",
            ),
        ],
    ))
    .found("variables are declared on bonds but the file has no bonds");
}

// ---------------------------------------------------------------------------------------
// Rules: kind, scope, the variables they read

#[test]
fn rule_kinds_and_scopes_unknown() {
    invalid(&with(
        TRIANGLES,
        &[("kind: not-all-equal", "kind: not-equal")],
    ))
    .at("kind: »not-equal")
    .found("unknown rule kind 'not-equal'")
    .expected("expected inward, occupied, not-all-equal, distinct or table");
    invalid(&with(TRIANGLES, &[("at: up}", "at: down}")]))
        .at("at: »down")
        .found("unknown scope 'down'")
        .expected("expected sites, bonds or a group id (up)");
    invalid(&with(SQUARE_ICE, &[("at: sites,", "at: up,")]))
        .at("at: »up")
        .found("unknown scope 'up'")
        .expected("(the file defines no groups)");
}

#[test]
fn which_variables_a_rule_reads() {
    invalid(&with(
        SQUARE_ICE,
        &[("at: sites, allowed", "at: sites, of: cells, allowed")],
    ))
    .at("of: »cells")
    .found("found 'cells'")
    .expected("`of` must be sites or bonds");
    invalid(&with(
        SQUARE_ICE,
        &[("at: sites, allowed", "at: sites, of: sites, allowed")],
    ))
    .at("of: »sites")
    .found("the rule reads variables on sites but none are declared there");
    let both = (
        "variables: [{on: bonds, kind: arrow}]",
        "variables: [{on: bonds, kind: arrow}, {on: sites, kind: spin}]",
    );
    invalid(&with(SQUARE_ICE, &[both]))
        .at("at: »sites, allowed")
        .found("both sites and bonds carry variables")
        .expected("say which this rule reads with `of: sites` or `of: bonds`");
    accepted(&with(
        SQUARE_ICE,
        &[
            both,
            ("at: sites, allowed", "at: sites, of: bonds, allowed"),
        ],
    ));
    invalid(&with(
        SQUARE_ICE,
        &[("at: sites, allowed", "at: bonds, allowed")],
    ))
    .at("at: »bonds")
    .found("a rule `at: bonds` reads the variables on the bond's two end sites")
    .expected("declare variables on sites");
}

#[test]
fn rule_kinds_need_their_kind_of_variable() {
    invalid(&with(
        TRIANGLES,
        &[(
            "{kind: not-all-equal, at: up}",
            "{kind: inward, at: up, allowed: [1]}",
        )],
    ))
    .at("kind: »inward")
    .found("the variables on sites are of kind spin")
    .expected("rule 'inward' needs arrow variables");
    invalid(&with(SQUARE_ICE, &[("kind: inward", "kind: occupied")]))
        .at("kind: »occupied")
        .found("the variables on bonds are of kind arrow")
        .expected("rule 'occupied' needs occupancy variables");
    invalid(&with(
        SQUARE_ICE,
        &[(
            "{kind: inward, at: sites, allowed: [2]}",
            "{kind: not-all-equal, at: sites}",
        )],
    ))
    .at("kind: »not-all-equal")
    .found("the variables on bonds are of kind arrow")
    .expected("rule 'not-all-equal' needs spin or color variables");
    invalid(&with(
        SQUARE_ICE,
        &[
            ("kind: arrow", "kind: occupancy"),
            (
                "{kind: inward, at: sites, allowed: [2]}",
                "{kind: distinct, at: sites}",
            ),
        ],
    ))
    .at("kind: »distinct")
    .found("the variables on bonds are of kind occupancy")
    .expected("rule 'distinct' needs spin or color variables");
}

#[test]
fn rule_kinds_need_their_kind_of_scope() {
    invalid(&with(
        SPIN_ICE,
        &[("at: up, allowed", "at: sites, allowed")],
    ))
    .at("at: »sites")
    .expected("an inward rule on arrows that sit on sites needs a group scope");
    for base in [SQUARE_ICE, TRIANGLES] {
        let rule = if base == SQUARE_ICE {
            (
                "{kind: inward, at: sites, allowed: [2]}",
                "{kind: table, at: sites, allowed: [[0, 1]]}",
            )
        } else {
            (
                "{kind: not-all-equal, at: up}",
                "{kind: table, at: sites, allowed: [[0, 1]]}",
            )
        };
        invalid(&with(base, &[rule]))
            .at("at: »sites")
            .expected("a table rule applies to site variables `at: bonds` (from, to) or at a group (member order)");
    }
    let no_bonds = (
        "bonds:\n  - {id: a, from: S, to: S, shift: [1, 0]}\n  - {id: b, from: S, to: S, shift: [0, 1]}\n",
        "",
    );
    invalid(&with(TRIANGLES, &[no_bonds, ("at: up}", "at: bonds}")]))
        .at("at: »bonds")
        .found("a rule `at: bonds` but the file has no bonds");
}

#[test]
fn only_restricts_rules_at_sites_to_known_sites() {
    invalid(&with(TRIANGLES, &[("at: up}", "at: up, only: [S]}")]))
        .at("only: »[S]")
        .expected("`only` restricts rules `at: sites`");
    invalid(&with(
        SQUARE_ICE,
        &[("at: sites, allowed", "at: sites, only: [O, H], allowed")],
    ))
    .at("only: »[O, H]")
    .found("`only` names 'H'")
    .expected("which is no site id or species");
}

// ---------------------------------------------------------------------------------------
// Rules: allowed values

/// Square ice with `allowed: [2]` replaced by `allowed` (empty: the key left out).
fn counts(allowed: &str) -> String {
    let to = if allowed.is_empty() {
        String::new()
    } else {
        format!(", allowed: {allowed}")
    };
    with(SQUARE_ICE, &[(", allowed: [2]", &to)])
}

#[test]
fn allowed_counts_missing_empty_or_impossible() {
    invalid(&counts(""))
        .at("kind: »inward")
        .expected("rule 'inward' needs `allowed: [counts]`");
    invalid(&counts("[[2]]"))
        .at("allowed: »[[2]]")
        .expected("`allowed` must be a list of counts, e.g. [2]");
    invalid(&counts("[]"))
        .at("allowed: »[]")
        .found("`allowed` is empty")
        .expected("no arrangement would be allowed");
    // Each site of square ice has 4 bonds in scope.
    invalid(&counts("[5, 6]"))
        .at("allowed: »[5, 6]")
        .found("no allowed count [5, 6] is possible at site O, which has 4 variables in scope");
    invalid(&counts("[2, 5]"))
        .at("allowed: »[2, 5]")
        .found("allowed count 5 exceeds the 4 variables of the largest scope")
        .expected("it can never occur");
    accepted(&counts("[0, 4]"));
}

/// The triangles with a table rule on the up triangles, `allowed` as given (empty: the key
/// left out).
fn table(allowed: &str) -> String {
    let rule = if allowed.is_empty() {
        "{kind: table, at: up}".to_string()
    } else {
        format!("{{kind: table, at: up, allowed: {allowed}}}")
    };
    with(TRIANGLES, &[("{kind: not-all-equal, at: up}", &rule)])
}

#[test]
fn table_rules_with_tuples_that_fit_the_scope() {
    invalid(&table(""))
        .at("kind: »table")
        .expected("a table rule needs `allowed: [[tuple], ...]`");
    invalid(&table("[0, 1]"))
        .at("allowed: »[0, 1]")
        .expected("a table rule's `allowed` is a list of tuples, e.g. [[0, 1], [1, 0]]");
    invalid(&table("[]"))
        .at("allowed: »[]")
        .found("`allowed` is empty")
        .expected("no arrangement would be allowed");
    invalid(&table("[[0, 1, 0], [0, 1]]"))
        .at("allowed: »[[0, 1, 0], [0, 1]]")
        .found("tuple [0, 1] has 2 values")
        .expected("the scope has 3");
    invalid(&table("[[0, 1, 2]]"))
        .at("allowed: »[[0, 1, 2]]")
        .found("value 2 in tuple [0, 1, 2]")
        .expected("is not a state (0..1)");
    accepted(&table("[[0, 1, 1], [1, 0, 0]]"));
}

#[test]
fn rules_that_take_no_allowed_list_or_cannot_hold() {
    invalid(&with(
        TRIANGLES,
        &[(
            "{kind: not-all-equal, at: up}",
            "{kind: not-all-equal, at: up, allowed: [1, 2]}",
        )],
    ))
    .at("allowed: »[1, 2]")
    .expected("rule 'not-all-equal' takes no `allowed` list");
    // Three members cannot carry three different values of two colours.
    let distinct = |q: u32| {
        with(
            TRIANGLES,
            &[
                ("kind: spin}", &format!("kind: color, states: {q}}}")),
                ("{kind: not-all-equal, at: up}", "{kind: distinct, at: up}"),
            ],
        )
    };
    invalid(&distinct(2))
        .at("kind: »distinct")
        .found("3 values at group up")
        .expected("cannot be pairwise distinct with only 2 states");
    accepted(&distinct(3));
}

// ---------------------------------------------------------------------------------------
// The formula unit

/// Square ice with the formula unit's `per: sites}` replaced by `per`.
fn per(per: &str) -> String {
    with(SQUARE_ICE, &[("per: sites}", &format!("per: {per}}}"))])
}

#[test]
fn formula_units_per_sites_bonds_or_cell() {
    invalid(&per("molecules"))
        .at("per: »molecules")
        .found("found 'molecules'")
        .expected("formula_unit.per must be sites, bonds or cell");
    invalid(&per("sites, species: H"))
        .at("species: »H")
        .expected("no site has species or id 'H'");
    invalid(&per("bonds, species: O"))
        .at("per: »bonds")
        .expected("`species` applies only with `per: sites`");
    invalid(&per("sites, count: 2"))
        .at("per: »sites")
        .expected("`count` applies only with `per: cell`");
    invalid(&per("cell"))
        .at("per: »cell")
        .expected("`per: cell` needs `count: N` (formula units per cell)");
    let no_bonds = (
        "bonds:\n  - {id: a, from: S, to: S, shift: [1, 0]}\n  - {id: b, from: S, to: S, shift: [0, 1]}\n",
        "",
    );
    invalid(&with(
        TRIANGLES,
        &[no_bonds, ("per: sites}", "per: bonds}")],
    ))
    .at("per: »bonds")
    .expected("formula unit per bond, but the file has no bonds");
    // The singular words are accepted too.
    accepted(&per("site"));
    accepted(&per("bond"));
}

#[test]
fn issue11_formula_units_per_cell_between_0_01_and_1e6() {
    for (count, shown) in [
        ("0.001", "0.001"),
        ("2e6", "2000000"),
        (".nan", "NaN (not a number)"),
        ("5e-324", "5e-324"),
        ("-2", "-2"),
        ("0", "0"),
        (".inf", "infinity"),
    ] {
        invalid(&per(&format!("cell, count: {count}")))
            .at(&format!("count: »{count}"))
            .found(&format!("`count` is {shown}"))
            .expected("expected the number of formula units in one cell, between 0.01 and 1e6");
    }
    accepted(&per("cell, count: 0.01"));
    accepted(&per("cell, count: 1e6"));
}

/// [`SPIN_ICE`] with `remaining:` on its rule and the `vacancies:` entries given.
fn diluted(remaining: &str, vacancies: &str) -> String {
    with(
        SPIN_ICE,
        &[
            ("allowed: [2]}", &format!("allowed: [2]{remaining}}}")),
            (
                "formula_unit: {name: Dy, per: sites}\n",
                &format!("formula_unit: {{name: Dy, per: sites}}\nvacancies:\n{vacancies}"),
            ),
        ],
    )
}

const REMAINING: &str = ", remaining: {3: [1, 2], 2: [1], 1: [0, 1]}";

#[test]
fn issue13_vacancy_fraction_from_0_up_to_but_not_including_1() {
    for (x, shown) in [
        ("-0.001", "-0.001"),
        ("1", "1"),
        ("1.5", "1.5"),
        (".nan", "NaN (not a number)"),
        (".inf", "infinity"),
        ("-.inf", "-infinity"),
    ] {
        invalid(&diluted(
            REMAINING,
            &format!("  - {{site: Dy, fraction: {x}}}\n"),
        ))
        .at(&format!("fraction: »{x}"))
        .found(&format!("vacancy fraction {shown} is out of range"))
        .expected("expected a probability from 0 up to (not including) 1");
    }
    accepted(&diluted(REMAINING, "  - {site: Dy, fraction: 0}\n"));
    accepted(&diluted(REMAINING, "  - {site: Dy, fraction: 0.999}\n"));
    // Not a number at all: the parser's stage, in the file's words.
    syntax(&diluted(REMAINING, "  - {site: Dy, fraction: many}\n"))
        .at("fraction: »many")
        .expected("expected a number");
    syntax(&diluted(REMAINING, "  - {site: Dy, share: 0.1}\n"))
        .expected("expected one of site, fraction");
}

#[test]
fn issue13_vacancies_name_sites_that_carry_variables_once() {
    invalid(&diluted(REMAINING, "  - {site: Ti, fraction: 0.1}\n"))
        .at("site: »Ti")
        .found("'Ti', which is no site id or species");
    invalid(&diluted(
        REMAINING,
        "  - {site: Dy, fraction: 0.1}\n  - {site: M2, fraction: 0.2}\n",
    ))
    .at("{site: »M2, fraction: 0.2}")
    .found("site 'M2' is listed in `vacancies` by an earlier entry")
    .expected("expected one entry per site");
    invalid(&with(
        SQUARE_ICE,
        &[(
            "formula_unit: {name: H2O, per: sites}\n",
            "formula_unit: {name: H2O, per: sites}\nvacancies: [{site: O, fraction: 0.1}]\n",
        )],
    ))
    .at("site: »O, fraction")
    .found("declares no variables on sites");
}

#[test]
fn issue13_remaining_counts_for_every_number_of_members_that_can_remain() {
    let v = "  - {site: Dy, fraction: 0.1}\n";
    // None at all: pointed at the rule, with what is expected.
    invalid(&diluted("", v))
        .at("{kind: »inward, at: up")
        .expected("expected `remaining:` with the allowed counts for 1, 2, 3 remaining members");
    // One number missing, on both sides: 1 member and 3 members.
    invalid(&diluted(", remaining: {3: [1, 2], 2: [1]}", v))
        .at("remaining: »{3: [1, 2], 2: [1]}")
        .found("no entry for 1 members")
        .expected("expected entries for 1, 2, 3 members");
    invalid(&diluted(", remaining: {2: [1], 1: [0, 1]}", v)).found("no entry for 3 members");
    // Numbers that cannot be a remainder: 0 (imposes nothing) and the full scope (4).
    invalid(&diluted(
        ", remaining: {3: [1, 2], 2: [1], 1: [0, 1], 0: [0]}",
        v,
    ))
    .found("an entry for 0 members");
    invalid(&diluted(
        ", remaining: {4: [2], 3: [1, 2], 2: [1], 1: [0, 1]}",
        v,
    ))
    .found("an entry for 4 members, but the rule's scope has 4")
    .expected("the full scope's counts are `allowed`");
    // Counts from 0 to n: n is accepted, n + 1 refused; an empty list is refused.
    accepted(&diluted(", remaining: {3: [3], 2: [2], 1: [1]}", v));
    invalid(&diluted(", remaining: {3: [4], 2: [1], 1: [0, 1]}", v))
        .found("allows the count 4 with 3 members")
        .expected("expected counts from 0 to 3");
    invalid(&diluted(", remaining: {3: [], 2: [1], 1: [0, 1]}", v)).found("is empty");
    // Only one member of each tetrahedron may be vacant: only 3 members can remain.
    accepted(&diluted(
        ", remaining: {3: [1, 2]}",
        "  - {site: M0, fraction: 0.1}\n",
    ));
    invalid(&diluted(REMAINING, "  - {site: M0, fraction: 0.1}\n"))
        .found("an entry for 1 members, which cannot occur")
        .expected("expected entries for 3 members");
    // `remaining` on a rule whose members are never vacant.
    invalid(&with(
        SQUARE_ICE,
        &[("allowed: [2]}", "allowed: [2], remaining: {1: [0, 1]}}")],
    ))
    .at("remaining: »{1: [0, 1]}")
    .found("reads no site listed in `vacancies`");
    // A rule kind with no counts to give for fewer members.
    invalid(&with(
        TRIANGLES,
        &[(
            "formula_unit: {name: spin, per: sites}\n",
            "formula_unit: {name: spin, per: sites}\nvacancies: [{site: S, fraction: 0.1}]\n",
        )],
    ))
    .at("{kind: »not-all-equal")
    .found("reads sites that may be vacant")
    .expected("counting rules (inward, occupied)");
}
