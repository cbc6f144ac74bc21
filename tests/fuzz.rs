//! A property test of the loader: mutated copies of the shipped lattice files go through
//! loading and the processing `inspect` does (Pauling's estimate, the coordination cluster),
//! each with a time limit.
//!
//! Every case must end in a value or in an error that names the file, points at a line and
//! column (or, for bytes that are not UTF-8, a byte offset) and speaks the file's words (no
//! parser or Rust type names). No panic, no hang.
//!
//! CI runs a small seeded sample (`issue11_fuzz_the_loader`, 2000 cases, about a second).
//! The long run is
//!
//! ```text
//! GROUNDCOUNT_FUZZ_CASES=30000 GROUNDCOUNT_FUZZ_SEED=7 \
//!     cargo test --release issue11_fuzz_the_loader -- --nocapture
//! ```
//!
//! which prints its figures (cases, accepted, refused, panics, hangs, cases slower than
//! 20 s, errors without a position, errors without the file name, errors with parser
//! words) and fails on any defect, listing the first few with the mutated text. A case is
//! hung when it has not finished after 120 s.

use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::Duration;

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::pauling;

/// Time after which a case counts as slow (loading and `inspect`'s processing take well
/// under a second on an idle machine; the machine may be shared).
const LIMIT: Duration = Duration::from_secs(20);

/// Time after which a slow case counts as hung.
const HANG: Duration = Duration::from_secs(120);

/// Words of the parser or of Rust that must not reach a user.
const FOREIGN_WORDS: [&str; 24] = [
    "untagged",
    "enum ",
    "struct ",
    "Option<",
    "Vec<",
    "String",
    "invalid type",
    "invalid value",
    "invalid length",
    " u8",
    " u32",
    " u64",
    " usize",
    " i64",
    " f64",
    "serde",
    "Spanned",
    "variant",
    "sequence",
    "scalar",
    "deserializ",
    "unit value",
    "panicked",
    "Error(",
];

/// A small deterministic generator (SplitMix64), so that the test needs no crate of its own.
struct Mix(u64);

impl Mix {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// Values that stress a number's parsing and range checks.
const NUMBERS: [&str; 22] = [
    ".nan",
    ".inf",
    "-.inf",
    "1e308",
    "-1e308",
    "5e-324",
    "1e-320",
    "-1",
    "0",
    "-0.0",
    "64",
    "-64",
    "65",
    "4294967296",
    "-9223372036854775808",
    "9223372036854775807",
    "18446744073709551615",
    "99999999999999999999999",
    "1e30",
    "1e-30",
    "0.5",
    "3",
];

/// Keys of the lattice format, for swaps.
const KEYS: [&str; 22] = [
    "name",
    "about",
    "dimensions",
    "cell",
    "vectors",
    "sites",
    "id",
    "at",
    "species",
    "axis",
    "bonds",
    "from",
    "to",
    "shift",
    "between",
    "distance",
    "groups",
    "members",
    "site",
    "variables",
    "rules",
    "kind",
];

/// Positions (start, end) of the numbers in a text.
fn numbers(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        let starts =
            b[i].is_ascii_digit() || (b[i] == b'-' && b.get(i + 1).is_some_and(u8::is_ascii_digit));
        let after_word = i > 0 && (b[i - 1].is_ascii_alphanumeric() || b[i - 1] == b'_');
        if starts && !after_word {
            let mut j = i + 1;
            while j < b.len() && (b[j].is_ascii_digit() || b".eE+-".contains(&b[j])) {
                j += 1;
            }
            out.push((i, j));
            i = j;
        } else {
            i += 1;
        }
    }
    out
}

/// One random change of the bytes of a file.
fn mutate(bytes: &mut Vec<u8>, rng: &mut Mix) {
    let text = String::from_utf8_lossy(bytes).into_owned();
    let lines: Vec<&str> = text.split_inclusive('\n').collect();
    match rng.below(10) {
        // A byte replaced by any byte.
        0 if !bytes.is_empty() => {
            let i = rng.below(bytes.len());
            bytes[i] = rng.next() as u8;
        }
        // A byte replaced by a YAML-significant character.
        1 if !bytes.is_empty() => {
            let i = rng.below(bytes.len());
            let marks = b":-[]{},#&*!|>'\"%@` \t\r\n0";
            let c = marks[rng.below(marks.len())];
            bytes[i] = c;
        }
        // A line deleted.
        2 if !lines.is_empty() => {
            let k = rng.below(lines.len());
            *bytes = lines
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != k)
                .map(|(_, l)| *l)
                .collect::<String>()
                .into_bytes();
        }
        // A line duplicated.
        3 if !lines.is_empty() => {
            let k = rng.below(lines.len());
            let mut out = String::new();
            for (i, l) in lines.iter().enumerate() {
                out.push_str(l);
                if i == k {
                    out.push_str(l);
                }
            }
            *bytes = out.into_bytes();
        }
        // A number replaced by an extreme one.
        4..=6 => {
            let spots = numbers(&text);
            if !spots.is_empty() {
                let (a, b) = spots[rng.below(spots.len())];
                let with = NUMBERS[rng.below(NUMBERS.len())];
                *bytes = format!("{}{with}{}", &text[..a], &text[b..]).into_bytes();
            }
        }
        // Two keys swapped at one place each.
        7 => {
            let (k1, k2) = (KEYS[rng.below(KEYS.len())], KEYS[rng.below(KEYS.len())]);
            let p1 = format!("{k1}:");
            let p2 = format!("{k2}:");
            let at1: Vec<usize> = text.match_indices(&p1).map(|(i, _)| i).collect();
            let at2: Vec<usize> = text.match_indices(&p2).map(|(i, _)| i).collect();
            if !at1.is_empty() && !at2.is_empty() {
                let (i, j) = (at1[rng.below(at1.len())], at2[rng.below(at2.len())]);
                let (lo, lo_key, hi, hi_key) = if i < j {
                    (i, &p1, j, &p2)
                } else {
                    (j, &p2, i, &p1)
                };
                if lo + lo_key.len() <= hi {
                    *bytes = format!(
                        "{}{hi_key}{}{lo_key}{}",
                        &text[..lo],
                        &text[lo + lo_key.len()..hi],
                        &text[hi + hi_key.len()..]
                    )
                    .into_bytes();
                }
            }
        }
        // Line endings changed to CR only, or CR LF; a byte-order mark in front.
        8 => match rng.below(3) {
            0 => *bytes = text.replace('\n', "\r").into_bytes(),
            1 => *bytes = text.replace('\n', "\r\n").into_bytes(),
            _ => {
                let mut b = "\u{feff}".as_bytes().to_vec();
                b.extend_from_slice(bytes);
                *bytes = b;
            }
        },
        // Cut short.
        _ => {
            let n = rng.below(bytes.len() + 1);
            bytes.truncate(n);
        }
    }
}

/// What became of one case.
enum Outcome {
    Accepted,
    Refused(String),
    Panicked(String),
    /// Finished, but only after [`LIMIT`]: the outcome and the time it took.
    Slow(Box<Outcome>, Duration),
    Hung,
}

/// Load the bytes as the file `name` would be loaded, then do what `inspect` does.
fn load_and_inspect(bytes: Vec<u8>, name: PathBuf) -> Result<(), String> {
    let lattice = Lattice::from_bytes(&bytes, &name).map_err(|e| e.to_string())?;
    let c = &lattice.crystal;
    // A counter that cannot yet weigh refuses a weighted file without a position: fine.
    match pauling::count(c, &(), &Default::default()) {
        Ok(_) | Err(groundcount::Error::Unweighted { .. }) => {}
        Err(e) => return Err(e.to_string()),
    }
    let n = (2 * c.reach() + 1).max(3) as usize;
    let cluster = Cluster::new(c, Cells::cube(n, c.dimensions)).map_err(|e| e.to_string())?;
    let _ = cluster.connected_components();
    Ok(())
}

/// Run one case on a thread of its own, within [`LIMIT`].
fn run_case(bytes: Vec<u8>, name: &Path) -> Outcome {
    let (tx, rx) = mpsc::channel();
    let name = name.to_path_buf();
    std::thread::spawn(move || {
        let r = std::panic::catch_unwind(move || load_and_inspect(bytes, name));
        let _ = tx.send(r);
    });
    let start = std::time::Instant::now();
    let outcome = |r: std::thread::Result<Result<(), String>>| match r {
        Ok(Ok(())) => Outcome::Accepted,
        Ok(Err(m)) => Outcome::Refused(m),
        Err(p) => Outcome::Panicked(
            p.downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default(),
        ),
    };
    match rx.recv_timeout(LIMIT) {
        Ok(r) => outcome(r),
        Err(_) => match rx.recv_timeout(HANG - LIMIT) {
            Ok(r) => Outcome::Slow(Box::new(outcome(r)), start.elapsed()),
            Err(_) => Outcome::Hung,
        },
    }
}

/// What is wrong with an error message, if anything.
fn message_defect(message: &str, name: &str) -> Option<&'static str> {
    let Some(rest) = message.strip_prefix(name) else {
        return Some("does not start with the file name");
    };
    let positioned = rest.strip_prefix(':').is_some_and(|r| {
        let mut parts = r.splitn(3, ':');
        let line = parts.next().unwrap_or("");
        let column = parts.next().unwrap_or("");
        !line.is_empty()
            && line.bytes().all(|b| b.is_ascii_digit())
            && !column.is_empty()
            && column.bytes().all(|b| b.is_ascii_digit())
            && line != "0"
            && column != "0"
    });
    if !positioned && !message.contains("byte offset") {
        return Some("has no line:column and no byte offset");
    }
    if FOREIGN_WORDS.iter().any(|w| message.contains(w)) {
        return Some("speaks the parser's or Rust's words");
    }
    None
}

/// Figures of a run.
#[derive(Default, Debug)]
struct Figures {
    cases: usize,
    accepted: usize,
    refused: usize,
    panics: usize,
    hangs: usize,
    slow: usize,
    slowest: Duration,
    without_position: usize,
    without_file: usize,
    foreign_words: usize,
}

fn env_number(name: &str, default: u64) -> u64 {
    std::env::var(name)
        .ok()
        .and_then(|v| v.trim().parse().ok())
        .unwrap_or(default)
}

#[test]
fn issue11_fuzz_the_loader() {
    let cases = env_number("GROUNDCOUNT_FUZZ_CASES", 2000) as usize;
    let mut rng = Mix(env_number("GROUNDCOUNT_FUZZ_SEED", 11));
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("lattices");
    let mut originals: Vec<(String, Vec<u8>)> = std::fs::read_dir(&dir)
        .expect("the lattice library")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .map(|p| {
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            (name, std::fs::read(&p).expect("a shipped file"))
        })
        .collect();
    originals.sort();
    assert!(originals.len() >= 5, "the shipped lattices are found");
    // GROUNDCOUNT_FUZZ_SHOW=1 prints every refusal, to read the messages.
    let show = std::env::var_os("GROUNDCOUNT_FUZZ_SHOW").is_some();
    let mut figures = Figures::default();
    let mut defects: Vec<String> = Vec::new();
    for case in 0..cases {
        let (name, original) = &originals[rng.below(originals.len())];
        let mut bytes = original.clone();
        for _ in 0..1 + rng.below(3) {
            mutate(&mut bytes, &mut rng);
        }
        let shown = format!("mutant-{case}-{name}");
        figures.cases += 1;
        let report = |what: &str, detail: &str, bytes: &[u8]| {
            format!(
                "case {case} ({shown}): {what}: {detail}\n--- text ---\n{}\n---",
                String::from_utf8_lossy(bytes)
            )
        };
        let started = std::time::Instant::now();
        let mut outcome = run_case(bytes.clone(), Path::new(&shown));
        figures.slowest = figures.slowest.max(started.elapsed());
        if let Outcome::Slow(inner, took) = outcome {
            // Not a defect by itself (the machine may be busy), but counted and shown.
            figures.slow += 1;
            println!("SLOW case {case} ({shown}): {took:?}");
            outcome = *inner;
        }
        match outcome {
            Outcome::Accepted => figures.accepted += 1,
            Outcome::Refused(m) => {
                figures.refused += 1;
                if show {
                    println!("REFUSED {m}");
                }
                if let Some(why) = message_defect(&m, &shown) {
                    match why {
                        "does not start with the file name" => figures.without_file += 1,
                        "has no line:column and no byte offset" => figures.without_position += 1,
                        _ => figures.foreign_words += 1,
                    }
                    defects.push(report(why, &m, &bytes));
                }
            }
            Outcome::Panicked(m) => {
                figures.panics += 1;
                defects.push(report("panicked", &m, &bytes));
            }
            Outcome::Hung => {
                figures.hangs += 1;
                defects.push(report(
                    "did not finish in time",
                    &format!("{HANG:?}"),
                    &bytes,
                ));
            }
            Outcome::Slow(..) => unreachable!("unwrapped above"),
        }
    }
    println!("loader fuzz: {figures:?}");
    for d in &defects {
        println!("DEFECT {}", d.lines().next().unwrap_or(""));
    }
    let shown: Vec<&String> = defects.iter().take(3).collect();
    assert!(
        defects.is_empty(),
        "{} defects in {} cases ({figures:?}); the first:\n{}",
        defects.len(),
        figures.cases,
        shown
            .iter()
            .map(|s| s.as_str())
            .collect::<Vec<_>>()
            .join("\n")
    );
}
