//! Command-line error handling.
//!
//! Every bad input must end the same way: a non-zero exit code (1 for an input error, 2 for
//! an exceeded state budget), nothing on standard output, and exactly one line on standard
//! error that starts with `error:`, names the culprit (the file with `LINE:COL` where the
//! parser knows it, or the flag) and says what was expected. No panic text, no backtrace.
//!
//! The fixtures in `tests/data/` are named after their problem; each says in its first
//! comment what is wrong with it. What the library says about each kind of bad lattice
//! file — its kind, line, column and words — is tested on inline YAML in
//! src/validation_tests.rs; here each fixture checks the command line's share.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use crate::util::{fixture, lattice, run};

/// Exit code of a usage or input error.
const INPUT_ERROR: i32 = 1;
/// Exit code of an exceeded state (or time) budget.
const BUDGET_EXCEEDED: i32 = 2;

/// A path as a command-line argument.
fn arg(path: &Path) -> &str {
    path.to_str().expect("test paths are UTF-8")
}

/// Standard error of a run, for failure messages.
fn stderr_of(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Check a failed run: exit code `code`, empty standard output, and exactly one line on
/// standard error, starting with `error: `, free of panic text. Returns that line.
fn error_line(out: &Output, code: i32) -> String {
    let stderr = stderr_of(out);
    assert_eq!(
        out.status.code(),
        Some(code),
        "exit code; standard error:\n{stderr}"
    );
    assert!(
        out.stdout.is_empty(),
        "nothing on standard output after an error, got:\n{}",
        String::from_utf8_lossy(&out.stdout)
    );
    for panic_text in ["panicked", "backtrace", "RUST_BACKTRACE"] {
        assert!(
            !stderr.contains(panic_text),
            "panic text on standard error:\n{stderr}"
        );
    }
    let lines: Vec<&str> = stderr.lines().collect();
    assert_eq!(
        lines.len(),
        1,
        "exactly one line on standard error, got:\n{stderr}"
    );
    assert!(
        lines[0].starts_with("error: "),
        "the message starts with `error: `: {}",
        lines[0]
    );
    lines[0].to_string()
}

/// Whether `message` contains `phrase`, ignoring case.
fn mentions(message: &str, phrase: &str) -> bool {
    message.to_lowercase().contains(&phrase.to_lowercase())
}

/// Check an input error (exit 1) about a file: the message names `file`; with `line`, it
/// points at `file:LINE:COL:`; and it contains `phrase` (empty: whatever the words).
fn assert_input_error(out: &Output, file: &str, line: Option<u64>, phrase: &str) {
    let message = error_line(out, INPUT_ERROR);
    match line {
        Some(line) => {
            let at = format!("{file}:{line}:");
            let (_, rest) = message
                .split_once(&at)
                .unwrap_or_else(|| panic!("the message points at `{at}COL:`: {message}"));
            let column = rest.len() - rest.trim_start_matches(|c: char| c.is_ascii_digit()).len();
            assert!(
                column > 0 && rest[column..].starts_with(':'),
                "a column follows `{at}`: {message}"
            );
        }
        None => assert!(
            message.contains(file),
            "the message names {file}: {message}"
        ),
    }
    assert!(
        mentions(&message, phrase),
        "the message says `{phrase}`: {message}"
    );
}

/// Check an input error (exit 1) about a flag: the message quotes `flag` (e.g.
/// `--cells '4x'`) and contains `phrase`.
fn assert_flag_error(out: &Output, flag: &str, phrase: &str) {
    let message = error_line(out, INPUT_ERROR);
    assert!(
        message.contains(flag),
        "the message names {flag}: {message}"
    );
    assert!(
        mentions(&message, phrase),
        "the message says `{phrase}`: {message}"
    );
}

/// Check that every command that reads a lattice file rejects `file` with the same input
/// error.
fn assert_rejected(file: &Path, fragment: &str, line: Option<u64>, phrase: &str) {
    let f = arg(file);
    let runs = [
        run(&["inspect", f]),
        run(&["exact", f, "--cells", "2"]),
        run(&["estimate", f, "--budget", "1"]),
    ];
    for out in &runs {
        assert_input_error(out, fragment, line, phrase);
    }
    assert!(
        runs.iter().all(|o| o.stderr == runs[0].stderr),
        "inspect, exact and estimate report the same error:\n{}{}{}",
        stderr_of(&runs[0]),
        stderr_of(&runs[1]),
        stderr_of(&runs[2])
    );
}

/// `exact` on the shipped square-ice lattice with extra arguments.
fn exact_square_ice(extra: &[&str]) -> Output {
    let file = lattice("square-ice.yaml");
    let mut args = vec!["exact", arg(&file)];
    args.extend_from_slice(extra);
    run(&args)
}

/// Run the binary, killing it and failing the test if it has not finished within `limit`.
fn run_within(args: &[&str], limit: Duration) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_groundcount"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the groundcount binary starts");
    let start = Instant::now();
    while child.try_wait().expect("the child can be polled").is_none() {
        if start.elapsed() > limit {
            child.kill().expect("the child can be killed");
            let _ = child.wait();
            panic!("groundcount {args:?} did not finish within {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    child.wait_with_output().expect("the child's output")
}

/// A successful run: exit 0, nothing on standard error. Returns standard output.
fn success(out: &Output) -> String {
    assert_eq!(
        out.status.code(),
        Some(0),
        "exit code; standard error:\n{}",
        stderr_of(out)
    );
    assert!(
        out.stderr.is_empty(),
        "no message on standard error:\n{}",
        stderr_of(out)
    );
    String::from_utf8(out.stdout.clone()).expect("UTF-8 output")
}

// ---------------------------------------------------------------------------------------
// Positive controls: the same commands on good input succeed.

#[test]
fn inspect_accepts_a_shipped_lattice() {
    let out = success(&run(&["inspect", arg(&lattice("square-ice.yaml"))]));
    assert!(out.contains("Pauling estimate: W = 1.500000000"), "{out}");
}

#[test]
fn exact_accepts_a_shipped_lattice() {
    // 148 ice-rule arrangements on the 3x3 torus (OEIS A054759); 4x4 (2970) fits in the
    // same budget of 1000 states that the 12x12 case below exceeds.
    for (cells, count) in [("3x3", "148"), ("4x4", "2970")] {
        let out = success(&exact_square_ice(&[
            "--cells",
            cells,
            "--max-states",
            "1000",
        ]));
        let line = out
            .lines()
            .find(|l| l.starts_with("arrangements"))
            .unwrap_or_else(|| panic!("an arrangements line:\n{out}"));
        assert_eq!(line.split_whitespace().last(), Some(count), "{out}");
    }
}

#[test]
fn estimate_accepts_a_shipped_lattice() {
    let file = lattice("square-ice.yaml");
    let args = [
        "estimate",
        arg(&file),
        "--budget",
        "1",
        "--max-states",
        "1000",
    ];
    let out = success(&run(&args));
    assert!(out.contains("Pauling"), "{out}");
    assert!(out.contains("3x3 periodic"), "{out}");
    assert!(out.contains(" 148 "), "{out}"); // OEIS A054759, the 3x3 torus
    // The small state budget ends the sequence of cells cleanly, with exit code 0.
    assert!(out.contains("stopped:"), "{out}");
}

// ---------------------------------------------------------------------------------------
// Bad lattice files: one `error:` line at the file's position, from every command.

/// Every fixture that describes no usable lattice, with the line its error points at.
const BAD_FILES: &[(&str, u64)] = &[
    ("empty.yaml", 1),
    // The end of the file, after the last comment.
    ("only-comments.yaml", 5),
    ("not-yaml.yaml", 2),
    ("control-characters.yaml", 3),
    // The first byte that is not UTF-8.
    ("binary.yaml", 1),
    ("unknown-key.yaml", 7),
    ("dimensions-not-a-number.yaml", 3),
    ("duplicate-key.yaml", 11),
    ("allowed-not-a-list.yaml", 15),
    ("name-without-value.yaml", 2),
    ("unknown-bond-site.yaml", 8),
    ("unknown-rule-group.yaml", 12),
    ("unknown-group-member.yaml", 11),
    ("shift-wrong-dimension.yaml", 8),
    ("zero-cell-vector.yaml", 5),
    ("collinear-cell.yaml", 5),
    ("coplanar-cell.yaml", 6),
    ("inward-on-spins.yaml", 11),
    ("occupied-on-arrows.yaml", 11),
    ("allowed-impossible.yaml", 11),
    ("empty-bond-window.yaml", 8),
    ("color-without-states.yaml", 10),
    ("duplicate-site-id.yaml", 7),
    ("table-tuple-length.yaml", 13),
    ("nan-axis.yaml", 11),
    ("shift-minus-two-to-the-63.yaml", 11),
    ("nan-site-coordinate.yaml", 10),
    ("subnormal-unit-count.yaml", 18),
    ("wide-bond-window.yaml", 8),
    ("huge-bond-window.yaml", 8),
    ("window-with-countless-bonds.yaml", 16),
    ("rule-table-too-large.yaml", 22),
];

/// Fixtures that load: inputs of counting tests and files that must be accepted.
const GOOD_FILES: [&str; 4] = [
    "allow-everything.yaml",
    "cr-line-endings.yaml",
    "far-bond-shift.yaml",
    "free-orientations.yaml",
];

#[test]
fn every_fixture_is_tested() {
    for entry in std::fs::read_dir(fixture("")).expect("tests/data") {
        let name = entry.expect("an entry").file_name();
        let name = name.to_string_lossy();
        assert!(
            name.starts_with("counts-")
                || GOOD_FILES.contains(&name.as_ref())
                || BAD_FILES.iter().any(|(f, _)| *f == name),
            "tests/data/{name} is in no test"
        );
    }
}

/// Each bad file, through `inspect`: exit code 1, nothing on standard output, one line on
/// standard error that starts with `error: ` and points at `FILE:LINE:COL:`, in plain words,
/// within 30 s (distance windows wider than any crystal once ran for minutes).
#[test]
fn bad_lattice_files_end_in_one_error_line_at_their_position() {
    for &(name, line) in BAD_FILES {
        let out = run_within(&["inspect", arg(&fixture(name))], Duration::from_secs(30));
        assert_input_error(&out, name, Some(line), "");
        assert_plain_words(&out);
    }
}

/// `inspect`, `exact` and `estimate` report the same error for a file that cannot be read,
/// is not text, is not of the lattice file's shape, or describes no crystal.
#[test]
fn every_command_reports_the_same_error() {
    assert!(!fixture("does-not-exist.yaml").exists());
    assert_rejected(
        &fixture("does-not-exist.yaml"),
        "does-not-exist.yaml",
        None,
        "cannot read",
    );
    let dir = fixture("x");
    let dir = dir.parent().expect("tests/data");
    assert_rejected(dir, "tests/data", None, "is a directory");
    for name in ["binary.yaml", "unknown-key.yaml", "unknown-bond-site.yaml"] {
        let line = BAD_FILES.iter().find(|(f, _)| *f == name).unwrap().1;
        assert_rejected(&fixture(name), name, Some(line), "");
    }
}

// ---------------------------------------------------------------------------------------
// Flags.

#[test]
fn cells_with_a_zero_size() {
    let out = exact_square_ice(&["--cells", "0x4"]);
    assert_flag_error(&out, "--cells '0x4'", "at least 1");
}

#[test]
fn cells_not_a_size() {
    let out = exact_square_ice(&["--cells", "4by4"]);
    assert_flag_error(&out, "--cells '4by4'", "e.g. 4x4");
}

#[test]
fn cells_with_a_missing_size() {
    let out = exact_square_ice(&["--cells", "4x"]);
    assert_flag_error(&out, "--cells '4x'", "e.g. 4x4");
}

#[test]
fn cells_with_too_many_sizes() {
    let out = exact_square_ice(&["--cells", "4x4x4"]);
    assert_flag_error(&out, "--cells '4x4x4'", "expected 2");
}

#[test]
fn open_axis_the_crystal_lacks() {
    let out = exact_square_ice(&["--cells", "4x4", "--open", "z"]);
    assert_flag_error(&out, "--open 'z'", "among a, b");
}

#[test]
fn zero_threads() {
    let out = exact_square_ice(&["--cells", "3x3", "--threads", "0"]);
    assert_flag_error(&out, "--threads", "at least 1");
}

#[test]
fn time_budget_not_positive() {
    let file = lattice("square-ice.yaml");
    for budget in ["0", "nan"] {
        let out = run(&["estimate", arg(&file), "--budget", budget]);
        assert_flag_error(&out, "--budget", "positive");
    }
}

// ---------------------------------------------------------------------------------------
// Budgets.

#[test]
fn exact_count_beyond_the_state_budget() {
    let out = exact_square_ice(&["--cells", "12x12", "--max-states", "1000"]);
    let message = error_line(&out, BUDGET_EXCEEDED);
    assert!(message.contains("12x12"), "names the cell: {message}");
    assert!(
        mentions(&message, "smaller cell"),
        "suggests a smaller cell: {message}"
    );
    assert!(
        mentions(&message, "statistical method"),
        "suggests a statistical method: {message}"
    );
    // It says how large the state space got: some number beyond the budget of 1000.
    let largest = message
        .split(|c: char| !c.is_ascii_digit())
        .filter_map(|n| n.parse::<u64>().ok())
        .max();
    assert!(
        largest.is_some_and(|n| n > 1000),
        "says how large the frontier grew: {message}"
    );
}

// ---------------------------------------------------------------------------------------
// Regression tests for defects found while writing these tests.

#[test]
fn time_budget_too_large_for_a_duration() {
    let file = lattice("square-ice.yaml");
    for budget in ["inf", "1e300"] {
        let out = run(&[
            "estimate",
            arg(&file),
            "--budget",
            budget,
            "--max-states",
            "1000",
        ]);
        assert_flag_error(&out, "--budget", "seconds");
    }
}

#[test]
fn cells_whose_number_overflows() {
    let out = exact_square_ice(&["--cells", "4294967296x4294967296"]);
    assert_flag_error(&out, "--cells '4294967296x4294967296'", "too large");
}

#[test]
fn cells_too_large_to_build() {
    let out = exact_square_ice(&["--cells", "10000000x10000000"]);
    assert_flag_error(&out, "--cells '10000000x10000000'", "too large");
}

#[test]
fn bond_with_a_far_reaching_shift() {
    // Either outcome is clean: the file is accepted (the 3x3 torus wraps the shift like a
    // shift of 1: 148 arrangements), or it is refused at the shift on line 9.
    let file = fixture("far-bond-shift.yaml");
    for args in [
        vec!["inspect", arg(&file)],
        vec!["exact", arg(&file), "--cells", "3x3"],
    ] {
        let out = run_within(&args, Duration::from_secs(60));
        if out.status.code() == Some(0) {
            let stdout = success(&out);
            if args[0] == "exact" {
                assert!(stdout.contains(" 148\n"), "{stdout}");
            }
        } else {
            assert_input_error(&out, "far-bond-shift.yaml", Some(9), "shift");
        }
    }
}

/// Messages show the path as it was given on the command line.
#[test]
fn messages_show_the_path_as_given() {
    let relative = PathBuf::from("tests/data/unknown-key.yaml");
    let out = Command::new(env!("CARGO_BIN_EXE_groundcount"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["inspect", arg(&relative)])
        .output()
        .expect("the groundcount binary runs");
    let message = error_line(&out, INPUT_ERROR);
    assert!(
        message.starts_with("error: tests/data/unknown-key.yaml:7:"),
        "{message}"
    );
}

// ---------------------------------------------------------------------------------------
// Issue 11: bad input that still got through.

/// Words of the parser or of Rust that must not reach a user, nor the library's error
/// printed for debugging (the loader fuzz test in tests/fuzz.rs checks messages over
/// thousands of mutated files).
const FOREIGN_WORDS: [&str; 11] = [
    "untagged",
    "enum",
    "Option<",
    "invalid type",
    "sequence",
    "scalar",
    "u32",
    "18446744073709551615",
    "DuplicateKeyPolicy",
    "Invalid {",
    "Syntax {",
];

fn assert_plain_words(out: &Output) {
    let e = stderr_of(out);
    for w in FOREIGN_WORDS {
        assert!(!e.contains(w), "`{w}` in the message: {e}");
    }
}

#[test]
fn issue11_cr_only_line_endings_are_line_breaks() {
    // Called "only comments" before: the first comment line ran to the end of the file.
    let file = fixture("cr-line-endings.yaml");
    let out = run(&["exact", arg(&file), "--cells", "3x3"]);
    assert!(success(&out).contains("arrangements          148\n")); // OEIS A054759
}

#[test]
fn issue11_oversized_rule_table_names_the_file_and_says_beyond_2_64() {
    // The saturated product 18446744073709551615 was printed as a number of assignments,
    // and the message named no file.
    let name = "rule-table-too-large.yaml";
    let out = run(&["inspect", arg(&fixture(name))]);
    assert_input_error(&out, name, Some(22), "more than 2^64 local assignments");
    assert_plain_words(&out);
}

#[test]
fn issue11_too_many_threads_is_refused() {
    let out = exact_square_ice(&["--cells", "3x3", "--threads", "100000"]);
    assert_flag_error(&out, "--threads 100000", "at most 1024");
}

#[test]
fn issue11_huge_exact_cell_is_refused_before_it_is_built() {
    // Refused only after 110 s and 3 GB before.
    let file = lattice("square-ice.yaml");
    let out = run_within(
        &["exact", arg(&file), "--cells", "2000x2000"],
        Duration::from_secs(20),
    );
    let message = error_line(&out, BUDGET_EXCEEDED);
    assert!(
        message.contains("at least 2000 cells on the frontier") && message.contains("GB"),
        "says why and how much memory: {message}"
    );
}

/// A fresh directory for one test, under the target directory.
fn scratch(name: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("issue11-{name}"));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("a scratch directory");
    dir
}

#[test]
fn issue11_unwritable_output_is_found_before_the_run() {
    // A file stands where the directory should be: nothing can be written below it.
    let blocked = fixture("empty.yaml").join("shard.json");
    let ice = lattice("ice-ih.yaml");
    // 4x4x4 with 100000 replicas would take hours: the refusal must come first.
    let out = run_within(
        &[
            "sample",
            arg(&ice),
            "--cells",
            "4x4x4",
            "--replicas",
            "100000",
            "--shard",
            "1/2",
            "--out",
            arg(&blocked),
        ],
        Duration::from_secs(20),
    );
    assert_flag_error(&out, "--out", "does not exist");
    let report_dir = fixture("empty.yaml").join("report");
    let out = run_within(
        &[
            "report",
            arg(&ice),
            "-o",
            arg(&report_dir),
            "--budget",
            "1000",
        ],
        Duration::from_secs(20),
    );
    assert_flag_error(&out, "-o", "does not exist");
}

#[test]
fn issue11_report_replaces_an_earlier_report_whole() {
    let dir = scratch("report-replaced");
    let out_dir = dir.join("report");
    std::fs::create_dir_all(&out_dir).unwrap();
    std::fs::write(out_dir.join("report.md"), "old").unwrap();
    std::fs::write(out_dir.join("stale-figure.svg"), "<svg/>").unwrap();
    let file = lattice("square-ice.yaml");
    let out = run(&[
        "report",
        arg(&file),
        "-o",
        arg(&out_dir),
        "--widths",
        "2..6",
        "--max-exact-units",
        "9",
        "--budget",
        "20",
        "--threads",
        "1",
    ]);
    success(&out);
    assert!(
        !out_dir.join("stale-figure.svg").exists(),
        "no stale figure"
    );
    let md = std::fs::read_to_string(out_dir.join("report.md")).unwrap();
    assert!(md.len() > 100 && md != "old");
    let leftovers: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(leftovers, vec![std::ffi::OsString::from("report")]);
}

#[test]
fn issue11_report_refuses_a_directory_that_holds_other_files() {
    let dir = scratch("report-refused");
    std::fs::write(dir.join("notes.txt"), "mine").unwrap();
    let file = lattice("square-ice.yaml");
    let out = run_within(
        &["report", arg(&file), "-o", arg(&dir), "--budget", "1000"],
        Duration::from_secs(20),
    );
    assert_flag_error(&out, "-o", "not a report (notes.txt)");
    assert_eq!(
        std::fs::read_to_string(dir.join("notes.txt")).unwrap(),
        "mine"
    );
}

/// Start the binary, send it Ctrl-C (SIGINT) after `after`, and collect its output.
fn interrupted(args: &[&str], after: Duration) -> Output {
    let child = Command::new(env!("CARGO_BIN_EXE_groundcount"))
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the groundcount binary starts");
    std::thread::sleep(after);
    let status = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .expect("kill runs");
    assert!(status.success());
    let start = Instant::now();
    let out = child.wait_with_output().expect("the child's output");
    assert!(
        start.elapsed() < Duration::from_secs(30),
        "stopped within 30 s of Ctrl-C"
    );
    out
}

#[test]
fn issue11_interrupted_estimate_prints_what_it_finished() {
    // Ice Ih's exact count of 3x2x2 ends within 0.1 s; that of 3x3x2 takes seconds before
    // it outgrows the state budget: the interrupt lands inside it.
    let file = lattice("ice-ih.yaml");
    let out = interrupted(
        &["estimate", arg(&file), "--budget", "200", "--threads", "1"],
        Duration::from_millis(1500),
    );
    assert_eq!(out.status.code(), Some(130), "{}", stderr_of(&out));
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("Pauling"),
        "the table is printed:\n{stdout}"
    );
    assert!(
        stdout.contains("interrupted"),
        "the table says so:\n{stdout}"
    );
    assert!(
        stderr_of(&out).contains("interrupted: the table holds what was finished"),
        "{}",
        stderr_of(&out)
    );
}

#[test]
fn issue11_interrupted_report_writes_what_it_finished() {
    let dir = scratch("report-interrupted");
    let out_dir = dir.join("report");
    let file = lattice("ice-ih.yaml");
    let out = interrupted(
        &[
            "report",
            arg(&file),
            "-o",
            arg(&out_dir),
            "--budget",
            "200",
            "--threads",
            "1",
        ],
        Duration::from_millis(1500),
    );
    assert_eq!(out.status.code(), Some(130), "{}", stderr_of(&out));
    let md = std::fs::read_to_string(out_dir.join("report.md")).expect("report.md is written");
    assert!(md.contains("interrupted"), "the report says so");
    assert!(stderr_of(&out).contains("interrupted: the report in"));
}
