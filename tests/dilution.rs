//! Diluted crystals (issue 13) through the command line: the realisation average of
//! `exact`, its JSON keys, its independence of the thread count, the generalized Pauling
//! row of `estimate`, and the commands that refuse a diluted lattice rather than give the
//! undiluted crystal's numbers.

use crate::util::{lattice, run, run_json};

fn diluted() -> String {
    lattice("diluted-spin-ice.yaml").display().to_string()
}

/// The generalized Pauling value of lattices/diluted-spin-ice.yaml (vacancy fraction 0.1),
/// from the closed form of Ke et al. 2007 (Phys. Rev. Lett. 99, 137203; form reconstructed)
/// computed here: ln 2 + (1/(2p)) Σ_n C(4, n) pⁿ x⁴⁻ⁿ ln f_n per Dy present.
fn generalized_pauling() -> f64 {
    let (x, p) = (0.1f64, 0.9f64);
    let f: [f64; 5] = [1.0, 1.0, 0.5, 0.75, 0.375];
    let c = [1.0, 4.0, 6.0, 4.0, 1.0];
    let sum: f64 = (0..5)
        .map(|n| c[n] * p.powi(n as i32) * x.powi(4 - n as i32) * f[n].ln())
        .sum();
    2f64.ln() + sum / (2.0 * p)
}

#[test]
fn issue13_exact_averages_realisations_the_same_on_one_and_two_threads() {
    let file = diluted();
    let json = |threads: &str| {
        run_json(&[
            "exact",
            &file,
            "--cells",
            "2x2x2",
            "--realisations",
            "6",
            "--seed",
            "9",
            "--threads",
            threads,
            "--format",
            "json",
            "-q",
        ])
    };
    let one = json("1");
    let two = json("2");
    assert_eq!(one["realisations"], two["realisations"]);
    assert_eq!(one["mean"], two["mean"]);
    let r = one["realisations"].as_array().unwrap();
    assert_eq!(r.len(), 6);
    assert_eq!(one["requested"], 6);
    assert_eq!(one["seed"], 9);
    assert_eq!(one["per"], "ln W per Dy present");
    // The mean, spread and standard error are those of the listed realisations.
    let values: Vec<f64> = r
        .iter()
        .map(|x| x["ln_w_per_unit"].as_f64().unwrap())
        .collect();
    let mean = values.iter().sum::<f64>() / 6.0;
    let spread = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / 5.0).sqrt();
    assert!((one["mean"].as_f64().unwrap() - mean).abs() < 1e-12);
    assert!((one["spread"].as_f64().unwrap() - spread).abs() < 1e-12);
    assert!((one["standard_error"].as_f64().unwrap() - spread / 6f64.sqrt()).abs() < 1e-12);
    // Each realisation: its count's logarithm over the Dy present.
    for x in r {
        let count: f64 = x["count"].as_str().unwrap().parse().unwrap();
        let units = x["formula_units"].as_f64().unwrap();
        assert_eq!(units, 32.0 - x["vacant"].as_f64().unwrap());
        assert!((count.ln() / units - x["ln_w_per_unit"].as_f64().unwrap()).abs() < 1e-9);
    }
    // Beside it, the generalized Pauling estimate.
    let p = one["pauling"]["s_over_r"].as_f64().unwrap();
    assert!((p - generalized_pauling()).abs() < 1e-12, "{p}");
}

/// `sample` averages the same realisations as `exact` (same seed): the mean agrees with
/// the exact mean within 4 standard errors, and every realisation's vacancies match.
#[test]
fn issue13_sample_averages_the_same_realisations_as_exact() {
    let file = diluted();
    let common = ["--cells", "2x2x2", "--realisations", "5", "--seed", "4"];
    let mut args = vec!["sample", file.as_str()];
    args.extend(common);
    args.extend(["--sweeps", "100", "--format", "json", "-q"]);
    let sampled = run_json(&args);
    let mut args = vec!["exact", file.as_str()];
    args.extend(common);
    args.extend(["--format", "json", "-q"]);
    let exact = run_json(&args);
    assert_eq!(sampled["route"], "monte-carlo");
    let (s, e) = (
        sampled["realisations"].as_array().unwrap(),
        exact["realisations"].as_array().unwrap(),
    );
    for (a, b) in s.iter().zip(e) {
        assert_eq!(a["vacant"], b["vacant"]);
        assert!(a["count"].is_null() && a["sigma_ln_w"].as_f64().is_some());
    }
    let diff = sampled["mean"].as_f64().unwrap() - exact["mean"].as_f64().unwrap();
    assert!(diff.abs() < 4.0 * sampled["standard_error"].as_f64().unwrap());
}

#[test]
fn issue13_the_pauling_row_of_a_diluted_crystal_is_the_generalized_one() {
    let file = diluted();
    let inspect = run_json(&["inspect", &file, "--format", "json"]);
    let p = inspect["pauling"]["s_over_r"].as_f64().unwrap();
    assert!((p - generalized_pauling()).abs() < 1e-12, "{p}");
    let estimate = run_json(&[
        "estimate",
        &file,
        "--max-exact-units",
        "40",
        "--format",
        "json",
        "-q",
    ]);
    let p = estimate["pauling"]["s_over_r"].as_f64().unwrap();
    assert!((p - generalized_pauling()).abs() < 1e-12, "{p}");
    // Exact rows are realisation averages with a standard error; no Bethe row.
    let exact = estimate["exact"].as_array().unwrap();
    assert!(!exact.is_empty());
    assert!(exact.iter().all(|e| e["w_uncertainty"].as_f64().is_some()));
    assert!(estimate["bethe"].is_null());
    let notes = estimate["notes"].to_string();
    assert!(notes.contains("does not take vacancies"), "{notes}");
    assert!(notes.contains("per formula unit present"), "{notes}");
    // The cited value, the largest exact cell's average, is checked against the Monte
    // Carlo of the same realisations.
    let checks = estimate["checks"].as_array().unwrap();
    assert_eq!(checks.len(), 1, "{checks:?}");
    assert_eq!(checks[0]["route"]["kind"], "monte-carlo-realisations");
    assert_eq!(checks[0]["agrees"], true, "{checks:?}");
}

#[test]
fn issue13_commands_without_vacancies_refuse_a_diluted_lattice() {
    let file = diluted();
    for args in [
        vec!["strip", file.as_str(), "-q"],
        vec!["report", file.as_str(), "--out", "/nonexistent-dir/r", "-q"],
    ] {
        let o = run(&args);
        assert_eq!(o.status.code(), Some(1), "{args:?}");
        assert!(o.stdout.is_empty(), "{args:?}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains("vacan"), "{args:?}: {err}");
    }
    // What `sample` cannot do with vacancies yet is refused by its flag.
    for (args, flag) in [
        (vec!["--cells", "2x2x2,3x3x3"], "--cells"),
        (
            vec!["--cells", "2x2x2", "--method", "wang-landau"],
            "--method",
        ),
        (
            vec![
                "--cells",
                "2x2x2",
                "--shard",
                "1/2",
                "--out",
                "/tmp/gc-issue13.json",
            ],
            "--shard",
        ),
    ] {
        let mut all = vec!["sample", file.as_str()];
        all.extend(args);
        let o = run(&all);
        assert_eq!(o.status.code(), Some(1), "{all:?}");
        assert!(String::from_utf8_lossy(&o.stderr).contains(flag), "{all:?}");
    }
    // --realisations on a lattice without vacancies is refused by name.
    let o = run(&[
        "exact",
        &lattice("spin-ice.yaml").display().to_string(),
        "--cells",
        "2x2x2",
        "--realisations",
        "4",
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--realisations applies"));
}
