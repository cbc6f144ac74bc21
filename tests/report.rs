//! The `report` command: golden files on a small 2D lattice with every limit fixed, and a
//! 3D report whose Monte Carlo value is checked against the exact count of the same cell.

use std::path::{Path, PathBuf};

use serde_json::Value;

use crate::util::lattice;

/// Where the golden files live.
fn golden(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join("golden")
        .join(name)
}

/// A fresh output directory under the target directory.
fn out_dir(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(name);
    let _ = std::fs::remove_dir_all(&d);
    d
}

/// Run `report` with a fixed date.
fn report(args: &[&str]) -> std::process::Output {
    let mut all = vec!["report"];
    all.extend_from_slice(args);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_groundcount"))
        .args(&all)
        .env("SOURCE_DATE_EPOCH", "1798761600") // 2027-01-01
        .output()
        .expect("the groundcount binary runs");
    assert!(
        out.status.success(),
        "report failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Wall times differ from run to run: zero every "seconds" field.
fn without_times(v: &mut Value) {
    match v {
        Value::Object(m) => {
            for (k, x) in m.iter_mut() {
                if k == "seconds" {
                    *x = Value::from(0.0);
                } else {
                    without_times(x);
                }
            }
        }
        Value::Array(a) => a.iter_mut().for_each(without_times),
        _ => {}
    }
}

/// The Markdown without its wall-time line.
fn markdown_without_times(text: &str) -> String {
    text.lines()
        .filter(|l| !l.starts_with("- wall time"))
        .map(|l| format!("{l}\n"))
        .collect()
}

/// Compare with a golden file, or rewrite it when GROUNDCOUNT_BLESS is set.
fn check_golden(name: &str, actual: &str) {
    let path = golden(name);
    if std::env::var_os("GROUNDCOUNT_BLESS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&path).unwrap_or_else(|_| {
        panic!(
            "{} is missing; run with GROUNDCOUNT_BLESS=1",
            path.display()
        )
    });
    if expected != actual {
        let diff: Vec<String> = expected
            .lines()
            .zip(actual.lines())
            .filter(|(a, b)| a != b)
            .take(5)
            .map(|(a, b)| format!("  golden: {a}\n  now:    {b}"))
            .collect();
        panic!(
            "{name} differs from {} (GROUNDCOUNT_BLESS=1 rewrites it after a deliberate change):\n{}",
            path.display(),
            diff.join("\n")
        );
    }
}

fn read_json(dir: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("report.json")).unwrap()).unwrap()
}

#[test]
fn square_ice_report_matches_golden_files() {
    let dir = out_dir("report-square-ice");
    let d = dir.to_str().unwrap();
    let file = lattice("square-ice.yaml");
    report(&[
        file.to_str().unwrap(),
        "-o",
        d,
        "--widths",
        "2..9",
        "--max-exact-units",
        "36",
        "--budget",
        "600",
        "--threads",
        "1",
        "--quiet",
    ]);
    let md = std::fs::read_to_string(dir.join("report.md")).unwrap();
    let mut json = read_json(&dir);
    // The file path depends on the checkout; the golden files hold a placeholder.
    let shown = file.display().to_string();
    let md = markdown_without_times(&md).replace(&shown, "LATTICE");
    without_times(&mut json);
    let json = serde_json::to_string_pretty(&json)
        .unwrap()
        .replace(&shown, "LATTICE");
    check_golden("square-ice-report.md", &md);
    check_golden("square-ice-report.json", &(json + "\n"));
    // Independent checks on the same run, so that blessing a wrong change cannot pass
    // unnoticed: the exact counts are OEIS A054759 (4, 18, 148, 2970, 143224, 16448400), and
    // the extrapolated W lies within its uncertainty of Lieb's (4/3)^(3/2) (Lieb 1967,
    // Phys. Rev. 162, 162).
    let v = read_json(&dir);
    let counts: Vec<&str> = v["exact"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| e["count"].as_str().unwrap())
        .collect();
    assert_eq!(counts, ["4", "18", "148", "2970", "143224", "16448400"]);
    let cited = &v["cited"]["estimate"];
    assert_eq!(cited["method"], "transfer-matrix");
    let w = cited["w_per_unit"].as_f64().unwrap();
    let sigma = cited["w_uncertainty"].as_f64().unwrap();
    let lieb = (4.0f64 / 3.0).powf(1.5);
    assert!((w - lieb).abs() <= 3.0 * sigma, "{w} ± {sigma} vs {lieb}");
    assert!(md.contains("2027-01-01"));
    // Every figure named in report.md exists and is an SVG document with labelled axes.
    for f in ["convergence.svg", "strips.svg"] {
        assert!(md.contains(&format!("]({f})")), "{f} not referred to");
        let svg = std::fs::read_to_string(dir.join(f)).unwrap();
        assert!(svg.starts_with("<svg"), "{f}");
        assert!(svg.contains("W per H2O"), "{f}: y axis unlabelled");
    }
    assert!(!dir.join("integrand.svg").exists());
}

#[test]
fn ice_report_samples_and_agrees_with_the_exact_count_of_the_same_cell() {
    let dir = out_dir("report-ice-ih");
    let d = dir.to_str().unwrap();
    let out = report(&[
        lattice("ice-ih.yaml").to_str().unwrap(),
        "-o",
        d,
        "--max-exact-units",
        "16",
        "--sample-cells",
        "2x1x1",
        "--sweeps",
        "100",
        "--budget",
        "600",
        "--quiet",
        "--format",
        "json",
    ]);
    let printed: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(printed["cited"]["method"], "monte-carlo");
    let v = read_json(&dir);
    let mc = &v["monte_carlo"]["estimate"];
    let exact = v["exact"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["cells"] == mc["cells"])
        .expect("the sampled cell was also counted exactly");
    // Monte Carlo against the exact count of the same cell, within 4σ; R = 8.31446261815324
    // J/(mol K), exact in the 2019 SI.
    let (m, s) = (
        mc["s_over_r"].as_f64().unwrap(),
        mc["s_uncertainty"].as_f64().unwrap() / 8.31446261815324,
    );
    let x = exact["s_over_r"].as_f64().unwrap();
    assert!((m - x).abs() <= 4.0 * s, "{m} ± {s} vs exact {x}");
    assert!(s > 0.0);
    assert!(dir.join("integrand.svg").exists());
    let md = std::fs::read_to_string(dir.join("report.md")).unwrap();
    assert!(md.contains("## Monte Carlo"));
    assert!(md.contains("seed"));
}

#[test]
fn inspect_prints_every_format() {
    // Pauling's W = 3/2 per H2O for square ice (Pauling 1935, J. Am. Chem. Soc. 57, 2680).
    let file = lattice("square-ice.yaml");
    let f = file.to_str().unwrap();
    let csv = crate::util::run(&["inspect", f, "--format", "csv"]);
    assert!(csv.status.success());
    let text = String::from_utf8(csv.stdout).unwrap();
    assert!(text.starts_with("quantity,value\n"), "{text}");
    let w: f64 = text
        .lines()
        .find_map(|l| l.strip_prefix("Pauling W per H2O,"))
        .unwrap()
        .parse()
        .unwrap();
    assert!((w - 1.5).abs() < 1e-10);
    let md = crate::util::run(&["inspect", f, "--format", "markdown"]);
    assert!(md.status.success());
    assert!(
        String::from_utf8(md.stdout)
            .unwrap()
            .contains("| site | species |")
    );
}

/// `--statistical S` without an uncertainty is accepted with σ = 0, and the output says so:
/// the residual's 1σ is then the calorimetric one alone (σ_res = √(σ_cal² + 0²)).
#[test]
fn issue11_statistical_entropy_without_an_uncertainty() {
    let data = lattice("quillonite-dihydrate-cp.csv");
    let v = crate::util::run_json(&[
        "calorimetry",
        data.to_str().unwrap(),
        "--statistical",
        "186.77",
        "--format",
        "json",
    ]);
    assert_eq!(v["s_stat_uncertainty"], 0.0);
    assert_eq!(v["s_stat_uncertainty_given"], false);
    assert_eq!(v["residual_uncertainty"], v["s_cal_uncertainty"]);
    let notes = v["notes"].to_string();
    assert!(notes.contains("without an uncertainty"), "{notes}");
    let given = crate::util::run_json(&[
        "calorimetry",
        data.to_str().unwrap(),
        "--statistical",
        "186.77±0.30",
        "--format",
        "json",
    ]);
    assert_eq!(given["s_stat_uncertainty_given"], true);
    assert!(
        !given["notes"]
            .to_string()
            .contains("without an uncertainty")
    );

    // The hydrate's lattice: its data are per Qn(H2O)2, and square ice's count per H2O
    // would be refused (issue 16).
    let dir = out_dir("report-statistical-without-sigma");
    report(&[
        lattice("demo-hydrate.yaml").to_str().unwrap(),
        "-o",
        dir.to_str().unwrap(),
        "--widths",
        "2..6",
        "--max-exact-units",
        "9",
        "--budget",
        "600",
        "--quiet",
        "--calorimetry",
        data.to_str().unwrap(),
        "--statistical",
        "186.77",
    ]);
    let md = std::fs::read_to_string(dir.join("report.md")).unwrap();
    assert!(md.contains("given without 1σ (0 used)"), "{md}");
    assert!(md.contains("given without an uncertainty"), "{md}");
    let j = read_json(&dir);
    assert_eq!(j["calorimetry"]["s_stat_uncertainty_given"], false);
}
