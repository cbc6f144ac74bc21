//! The JSON documents of every command: one versioned schema (docs/json.md).

use std::path::PathBuf;

use serde_json::Value;

use crate::util::{lattice, run, run_json};

/// Keys renamed in schema version 1 (docs/json.md, "Renamed keys"): none may appear in any
/// document at any depth.
const RETIRED: [&str; 5] = [
    "uncertainty",
    "sigma_statistical",
    "sigma_quadrature",
    "sigma_tail",
    "value",
];

/// Every key of a document, at any depth.
fn keys(v: &Value, out: &mut Vec<String>) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                out.push(k.clone());
                keys(x, out);
            }
        }
        Value::Array(a) => a.iter().for_each(|x| keys(x, out)),
        _ => {}
    }
}

/// The document starts with `"schema_version": 1`, and no retired key appears in it.
fn check(what: &str, raw: &[u8]) {
    let text = String::from_utf8_lossy(raw);
    assert!(
        text.starts_with("{\n  \"schema_version\": 1,"),
        "{what}: the document does not start with its schema_version:\n{}",
        &text[..text.len().min(200)]
    );
    let v: Value = serde_json::from_str(&text).unwrap();
    let mut all = Vec::new();
    keys(&v, &mut all);
    for k in RETIRED {
        assert!(!all.iter().any(|x| x == k), "{what}: retired key {k}");
    }
}

#[test]
fn issue12_every_command_writes_one_versioned_schema() {
    let ice = lattice("square-ice.yaml");
    let ice = ice.to_str().unwrap();
    let spin = lattice("spin-ice.yaml");
    let spin = spin.to_str().unwrap();
    let commands: Vec<(&str, Vec<&str>)> = vec![
        ("inspect", vec!["inspect", ice]),
        ("exact", vec!["exact", ice, "--cells", "3x3"]),
        ("strip", vec!["strip", ice, "--widths", "2..7"]),
        (
            "sample",
            vec![
                "sample",
                ice,
                "--cells",
                "3x3",
                "--replicas",
                "2",
                "--sweeps",
                "10",
            ],
        ),
        (
            "sample, several cells",
            vec![
                "sample",
                spin,
                "--cells",
                "1x1x1,2x1x1",
                "--replicas",
                "2",
                "--sweeps",
                "10",
            ],
        ),
        (
            "sample, Wang–Landau",
            vec![
                "sample",
                ice,
                "--cells",
                "2x2",
                "--method",
                "wang-landau",
                "--replicas",
                "2",
                "--sweeps",
                "2000",
                "--uniform",
                "200",
            ],
        ),
        (
            "estimate",
            vec!["estimate", ice, "--budget", "1", "--threads", "1"],
        ),
    ];
    for (what, mut args) in commands {
        args.extend(["--format", "json", "--threads", "1"]);
        if what == "inspect" {
            args.truncate(args.len() - 2);
        }
        if what == "estimate" {
            args.truncate(args.len() - 2);
        }
        let out = run(&args);
        assert!(
            out.status.success(),
            "{what}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        check(what, &out.stdout);
    }
    // The report: what it prints, and report.json.
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("issue12-json-report");
    let _ = std::fs::remove_dir_all(&dir);
    let out = run(&[
        "report",
        ice,
        "-o",
        dir.to_str().unwrap(),
        "--budget",
        "30",
        "--max-exact-units",
        "9",
        "--widths",
        "2..7",
        "--threads",
        "1",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    check("report", &out.stdout);
    check(
        "report.json",
        &std::fs::read(dir.join("report.json")).unwrap(),
    );
    // Calorimetry, on a Debye T³ solid: Cp = a T³ with a = 1e-4 J/(mol K⁴).
    let data = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("issue12-cp.csv");
    let mut csv = String::from("T,Cp\n");
    for t in [4.0, 6.0, 8.0, 10.0, 12.0, 14.0] {
        csv += &format!("{t},{}\n", 1e-4 * t * t * t);
    }
    std::fs::write(&data, csv).unwrap();
    let out = run(&[
        "calorimetry",
        data.to_str().unwrap(),
        "--statistical",
        "0.5±0.1",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    check("calorimetry", &out.stdout);
    // The same quantity under the same key: the 1σ of W in `exact` and `strip`.
    let exact = run_json(&["exact", ice, "--cells", "3x3", "--format", "json"]);
    let strip = run_json(&["strip", ice, "--widths", "2..7", "--format", "json"]);
    assert!(exact["w_uncertainty"].is_null());
    assert!(strip["w_uncertainty"].as_f64().is_some_and(|s| s > 0.0));
}
