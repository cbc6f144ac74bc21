//! The main job, `estimate`: every method side by side, checked against published values.

use groundcount::Lattice;
use groundcount::context::Context;
use groundcount::counters::sampling::size;
use groundcount::crosscheck::{CrossCheck, Route};
use groundcount::estimate::Estimate;
use groundcount::estimate::Method;
use groundcount::estimate::{
    CitedReason, Refusal, SizeExtrapolation, Survey, SurveyConfig, survey,
};
use groundcount::report::{Meta, Report, Sentence};
use groundcount::text;

use crate::util::{fixture, lattice, run};

fn estimate_json(file: &str, budget: &str) -> serde_json::Value {
    let out = run(&[
        "estimate",
        lattice(file).to_str().unwrap(),
        "--budget",
        budget,
        "--format",
        "json",
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("estimate prints JSON")
}

/// On a 2D lattice the transfer-matrix row carries an error bar that covers Lieb's exact
/// W = (4/3)^(3/2) per vertex (Lieb 1967, Phys. Rev. 162, 162).
#[test]
fn square_ice_estimate_reaches_lieb() {
    let v = estimate_json("square-ice.yaml", "2");
    let tm = &v["transfer_matrix"];
    assert_eq!(tm["method"], "transfer-matrix");
    let w = tm["w_per_unit"].as_f64().unwrap();
    let sigma = tm["w_uncertainty"].as_f64().unwrap();
    let lieb = (4.0f64 / 3.0).powf(1.5);
    assert!(
        (w - lieb).abs() <= 4.0 * sigma,
        "W = {w} ± {sigma}, Lieb {lieb}"
    );
    assert!(sigma < 1e-3, "a few widths already pin W: σ = {sigma}");
    // The exact rows are the OEIS A054759 torus counts.
    assert_eq!(v["exact"][2]["count"], "148");
}

/// On a 3D lattice the Monte Carlo row is a finite-cell value above Pauling's 3/2, which is
/// a rigorous lower bound for ice (Onsager & Dupuis 1960, as cited by Hayashi, Muguruma &
/// Okamoto, arXiv:2009.11591), and below the smallest exact cells' values.
#[test]
fn ice_ih_estimate_samples_above_pauling() {
    let v = estimate_json("ice-ih.yaml", "4");
    let mc = &v["monte_carlo"];
    assert_eq!(mc["method"], "monte-carlo");
    let w = mc["w_per_unit"].as_f64().unwrap();
    let sigma = mc["w_uncertainty"].as_f64().unwrap();
    assert!(w - 4.0 * sigma > 1.5, "W = {w} ± {sigma}");
    // The run's own exact count of the 2x2x2 cell: 2756394^(1/32) (reproduced by `exact`).
    let exact_2x2x2 = v["exact"][3]["w_per_unit"].as_f64().unwrap();
    assert!(
        w < exact_2x2x2,
        "a larger cell has a smaller W: {w} vs {exact_2x2x2}"
    );
    let pauling = v["pauling"]["w_per_unit"].as_f64().unwrap();
    assert!(
        (pauling - 1.5).abs() < 1e-12,
        "Pauling 1935: 3/2 per H2O, got {pauling}"
    );
}

/// Spin ice, sampled on five cubes with fixed settings (so that the run does not depend on
/// the machine), extrapolates to the infinite crystal. Spin ice has, per spin, the square
/// root of ice's W per molecule (each spin is one bond of the diamond net of tetrahedra
/// centres), so it must agree within 4σ with √1.50685 = 1.227538 from Nagle's series for ice
/// (Nagle 1966, J. Math. Phys. 7, 1484; value from memory, its own ±0.00015 on W is
/// negligible here). Last run: 1.23195 ± 0.0024 (1.8σ), in about 8 CPU seconds.
#[test]
fn spin_ice_samples_extrapolate_to_the_infinite_crystal() {
    let file = lattice("spin-ice.yaml");
    let v = crate::util::run_json(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "3x3x3,4x3x3,4x4x4,5x4x4,5x5x5",
        "--replicas",
        "16",
        "--sweeps",
        "300",
        "--seed",
        "1",
        "--format",
        "json",
    ]);
    let cells = v["cells_sampled"].as_array().unwrap();
    assert_eq!(cells.len(), 5);
    assert_eq!(v["fit"]["dof"], 2, "three terms fitted to five cells");
    let w = v["w_per_unit"].as_f64().unwrap();
    let sigma = v["w_uncertainty"].as_f64().unwrap();
    let nagle = 1.50685f64.sqrt();
    assert!(sigma < 0.005, "σ = {sigma}");
    assert!(
        (w - nagle).abs() < 4.0 * sigma,
        "W = {w} ± {sigma} per spin against {nagle}"
    );
    // and the extrapolation lies below every finite cube's value
    for c in cells {
        assert!(w < c["w_per_unit"].as_f64().unwrap());
    }
}

/// Odd tori carry no dimer covering: the cited line never names a cell without one (an odd
/// torus) nor a W of zero.
#[test]
fn dimer_summary_names_a_cell_with_an_arrangement() {
    let out = run(&[
        "estimate",
        lattice("square-dimers.yaml").to_str().unwrap(),
        "--budget",
        "2",
    ]);
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8_lossy(&out.stdout);
    let line = text.lines().last().expect("a cited line");
    assert!(line.starts_with("cite: W = "), "{line}");
    assert!(!line.starts_with("cite: W = 0 "), "{line}");
    if let Some((_, cell)) = line.split_once("exact count, ") {
        let side: usize = cell.split('x').next().unwrap().parse().unwrap();
        assert_eq!(side % 2, 0, "{line}");
    }
}

/// The Bethe row sits beside Pauling's: for dimers on the square lattice it is 3^(3/2)/4
/// per site (derived in `counters::bethe`), where Pauling's estimate is 1.
#[test]
fn estimate_reports_the_bethe_approximation() {
    let v = estimate_json("square-dimers.yaml", "1");
    assert_eq!(v["bethe"]["method"], "bethe");
    let w = v["bethe"]["w_per_unit"].as_f64().unwrap();
    assert!((w - 27f64.sqrt() / 4.0).abs() < 1e-9, "{w}");
    assert!((v["pauling"]["w_per_unit"].as_f64().unwrap() - 1.0).abs() < 1e-12);
}

/// Every table in a command's text output fits in 100 columns: the header above each
/// dashed rule and every row below it until the next blank line.
pub fn assert_tables_fit(text: &str) {
    let lines: Vec<&str> = text.lines().collect();
    for (i, l) in lines.iter().enumerate() {
        if !(l.starts_with("---") && l.chars().all(|c| c == '-' || c == ' ')) || i == 0 {
            continue;
        }
        for row in std::iter::once(lines[i - 1])
            .chain(lines[i..].iter().copied().take_while(|r| !r.is_empty()))
        {
            assert!(
                row.chars().count() <= 100,
                "{} columns: {row}\n{text}",
                row.chars().count()
            );
        }
    }
}

/// CSV cells hold plain numbers: no `±`, dash, infinity or NaN in any cell, and every cell
/// of a column whose heading names a number parses as one or is empty.
pub fn assert_plain_csv(text: &str) {
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().expect("a header").split(',').collect();
    let numeric = |h: &str| {
        [
            "W per", "1σ", "S0", "time s", "in cell", "ln λ", "width", "states",
        ]
        .iter()
        .any(|k| h.starts_with(k) || h.ends_with(k))
    };
    for l in lines {
        // Quoted cells hold commas only in text columns, which come first.
        let cells: Vec<&str> = l
            .rsplitn(header.len(), ',')
            .collect::<Vec<_>>()
            .into_iter()
            .rev()
            .collect();
        assert_eq!(cells.len(), header.len(), "{l}");
        for (h, c) in header.iter().zip(&cells) {
            assert!(!c.contains('±') && !c.contains('—'), "{h}: {c}");
            assert!(!["inf", "-inf", "NaN", "n/a"].contains(c), "{h}: {c}");
            if numeric(h) && !c.is_empty() {
                assert!(c.parse::<f64>().is_ok(), "{h}: '{c}' in\n{text}");
            }
        }
    }
}

fn text(args: &[&str]) -> String {
    let out = run(args);
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// The `estimate` table fits in 100 columns and ends with one line naming the value to
/// cite: here the transfer-matrix extrapolation, within its error bar of Lieb's
/// (4/3)^(3/2) (Lieb 1967, Phys. Rev. 162, 162), and not the largest exact cell. Its CSV
/// holds plain numbers, formula units as integers.
#[test]
fn issue11_estimate_table_fits_and_ends_with_the_cited_value() {
    let f = lattice("square-ice.yaml");
    let out = text(&["estimate", f.to_str().unwrap(), "--budget", "2"]);
    assert_tables_fit(&out);
    let last = out.lines().last().unwrap();
    // The cited W covers Lieb's (4/3)^(3/2) = 1.5396007178… (Lieb 1967, Phys. Rev. 162,
    // 162) within its bar, which is small; the digits printed depend on the widths the
    // budget reached, so the line is read rather than matched.
    let words: Vec<&str> = last.split_whitespace().collect();
    assert!(last.starts_with("cite: W = "), "{last}");
    let (w, bar): (f64, f64) = (words[3].parse().unwrap(), words[5].parse().unwrap());
    let lieb = (4.0f64 / 3.0).powf(1.5);
    assert!((w - lieb).abs() <= bar.max(1e-10) && bar < 1e-5, "{last}");
    assert!(last.contains("transfer matrix, infinite crystal"), "{last}");
    assert!(!out.contains("largest cell counted"), "{out}");
    let csv = text(&[
        "estimate",
        f.to_str().unwrap(),
        "--budget",
        "1",
        "--format",
        "csv",
    ]);
    assert_plain_csv(&csv);
    let exact_4x4 = csv
        .lines()
        .find(|l| l.starts_with("exact count,4x4 periodic,"))
        .unwrap();
    // 2970 arrangements of the 4x4 torus (OEIS A054759).
    assert!(
        exact_4x4.starts_with("exact count,4x4 periodic,16,2970,"),
        "{exact_4x4}"
    );
    // One row is the cited one (the "cited" column, third from the end).
    let cited: Vec<&str> = csv
        .lines()
        .filter(|l| l.rsplit(',').nth(2) == Some("yes"))
        .collect();
    assert_eq!(cited.len(), 1, "{csv}");
    assert!(
        cited[0].starts_with("transfer matrix,infinite crystal,"),
        "{csv}"
    );
}

/// Tables and CSV of the other commands: 100 columns, plain numbers, whole numbers without
/// decimals.
#[test]
fn issue11_every_command_fits_in_100_columns_with_plain_csv() {
    let ice = lattice("square-ice.yaml");
    let ice = ice.to_str().unwrap();
    let ih = lattice("ice-ih.yaml");
    let ih = ih.to_str().unwrap();
    let cp = lattice("quillonite-dihydrate-cp.csv");
    let cp = cp.to_str().unwrap();
    let runs: Vec<Vec<&str>> = vec![
        vec!["inspect", ih],
        vec!["exact", ice, "--cells", "4x4"],
        vec!["strip", ice, "--widths", "2..8"],
        vec![
            "sample",
            ice,
            "--cells",
            "4x4,6x6,8x8",
            "--replicas",
            "4",
            "--sweeps",
            "20",
        ],
        vec![
            "sample",
            ice,
            "--cells",
            "4x4",
            "--replicas",
            "4",
            "--sweeps",
            "20",
        ],
        vec![
            "calorimetry",
            cp,
            "--statistical",
            "186.77±0.30",
            "--transition",
            "180.5:1200",
        ],
    ];
    for args in &runs {
        let out = text(args);
        assert_tables_fit(&out);
        assert!(
            !out.contains("16.0000") && !out.contains("4.00000 per cell"),
            "{out}"
        );
        if args[0] == "inspect" {
            continue;
        }
        let mut csv_args = args.clone();
        csv_args.extend(["--format", "csv"]);
        assert_plain_csv(&text(&csv_args));
    }
    let exact = text(&["exact", ice, "--cells", "4x4"]);
    assert!(exact.contains("16 formula units of H2O"), "{exact}");
}

/// The survey of a small square-ice run, with every limit fixed so that it is the same on
/// any machine: exact cells up to 4×4, strips of width 2..8.
fn square_ice_survey() -> (Lattice, Survey) {
    let l = Lattice::from_file(&lattice("square-ice.yaml")).unwrap();
    let config = SurveyConfig {
        budget: 600.0,
        max_exact_units: Some(16.0),
        widths: Some((2..=8).collect()),
        ..SurveyConfig::default()
    };
    let s = survey(&l.crystal, &config, &Context::new()).unwrap();
    (l, s)
}

fn check(method: Method, route: Route, value: f64, reference: f64) -> CrossCheck {
    CrossCheck {
        method,
        route,
        value,
        reference,
        tolerance: 1e-9,
    }
}

fn meta() -> Meta {
    Meta {
        version: "test".into(),
        date: "2027-01-01".into(),
        file: "square-ice.yaml".into(),
    }
}

/// With hand-made cross-checks: an agreeing check keeps the transfer matrix cited; a
/// failing one passes it over for the next in the order (the largest exact cell), says
/// loudly what disagreed in the table, the JSON and the report, and the sentence to paste
/// refuses.
#[test]
fn issue11_a_failed_cross_check_is_never_cited() {
    let (l, mut s) = square_ice_survey();
    // The run's own checks agree (the strips are checked against the full space); this
    // test puts in its own.
    assert!(!s.checks.is_empty() && s.checks.iter().all(|c| c.agrees()));
    s.checks.clear();
    let unit = "H2O";
    let tm = s
        .strips
        .as_ref()
        .expect("strips ran")
        .estimate
        .ln_w_per_unit;
    assert_eq!(s.cited().value.unwrap().reason, CitedReason::TransferMatrix);

    s.checks.push(check(
        Method::TransferMatrix,
        Route::FullSpace { width: 6 },
        0.46,
        0.46 + 1e-12,
    ));
    let c = s.cited();
    let v = c.value.as_ref().unwrap();
    assert_eq!(v.reason, CitedReason::TransferMatrix);
    assert_eq!(v.checks.len(), 1);
    assert!(text::cited_line(&s, unit).contains("its cross-check agrees"));
    let w = Report::new(&l, &s, meta(), None);
    assert!(matches!(w.sentence(), Sentence::Cite(_)));

    // A failing check: the sector's value against a full space that holds a larger λ.
    s.checks.push(check(
        Method::TransferMatrix,
        Route::FullSpace { width: 8 },
        0.0081,
        0.1615,
    ));
    let c = s.cited();
    let v = c.value.as_ref().unwrap();
    assert_eq!(v.reason, CitedReason::ExactCell);
    assert_eq!(v.estimate.cells.as_deref(), Some("4x4 periodic"));
    assert_ne!(v.estimate.ln_w_per_unit, tm);
    assert!(matches!(&c.passed_over[0].why, Refusal::CheckFailed(k) if k.len() == 1));
    let line = text::cited_line(&s, unit);
    assert!(
        line.contains("exact count, 4x4 periodic") && line.contains("WARNING"),
        "{line}"
    );
    assert!(
        line.contains("transfer matrix (infinite crystal) not cited"),
        "{line}"
    );
    let table = text::checks_table(&s.checks, unit).render();
    assert!(
        table.contains("DISAGREES") && table.contains("agrees"),
        "{table}"
    );
    let loud = text::check_failure(s.failed_checks()[0], unit);
    assert!(loud.starts_with("CROSS-CHECK FAILED") && loud.contains("full state space, width 8"));
    let rows = text::survey_table(&s, unit, text::Columns::default()).render_csv();
    assert!(
        rows.lines()
            .any(|r| r.starts_with("transfer matrix,") && r.ends_with(",no,disagrees,yes")),
        "{rows}"
    );
    assert!(
        rows.lines()
            .any(|r| r.starts_with("exact count,4x4") && r.ends_with(",yes,,yes")),
        "{rows}"
    );

    let w = Report::new(&l, &s, meta(), None);
    match w.sentence() {
        Sentence::Refused(why) => assert!(why.contains("cross-check"), "{why}"),
        Sentence::Cite(t) => panic!("a failed check must not be pasted: {t}"),
    }
    let md = w.markdown();
    assert!(
        md.contains("CROSS-CHECK FAILED") && md.contains("**Not for citing:**"),
        "{md}"
    );
    let j = serde_json::to_value(w.json()).unwrap();
    assert!(j["sentence"].is_null());
    assert_eq!(j["checks"][1]["agrees"], false);
    assert_eq!(j["cited"]["method"], "exact");
    assert_eq!(j["passed_over"][0]["refusal"], "check-failed");

    // The exact counts failing too: the Bethe approximation, an approximation with no count.
    s.checks.push(check(
        Method::Exact,
        Route::ExactCount {
            cells: "4x4 periodic".into(),
        },
        0.5,
        0.4,
    ));
    let c = s.cited();
    assert_eq!(c.value.unwrap().reason, CitedReason::Bethe);
    assert_eq!(c.passed_over.len(), 2);
}

/// A Monte Carlo extrapolation with zero degrees of freedom (two cells, two parameters) is
/// never the cited value: the largest sampled cell is, and the line says why.
#[test]
fn issue11_a_zero_degree_of_freedom_fit_is_not_cited() {
    let (_, mut s) = square_ice_survey();
    s.strips = None;
    // Two cells through s∞ + a/N: an exact fit, χ² = 0 for zero degrees of freedom.
    let fit = size::SizeFit {
        value: 0.4333,
        sigma: 0.01,
        sigma_fit: 0.01,
        systematic: 0.0,
        coefficients: vec![1.07],
        chi2: 0.0,
        dof: 0,
        alternative: None,
        law: None,
        not_one_shape: false,
        next_term: None,
    };
    let estimate = Estimate::infinite(Method::MonteCarlo, fit.value, Some(fit.sigma), 1.0);
    s.extrapolated = Some(SizeExtrapolation::new(estimate, fit));
    let c = s.cited();
    assert!(matches!(c.passed_over[0].why, Refusal::NoDegreesOfFreedom));
    assert_eq!(c.value.unwrap().reason, CitedReason::ExactCell);
    assert!(text::cited_line(&s, "H2O").contains("zero degrees of freedom"));
}

/// Hard hexagons: Pauling's product 2 · (3/4)³ = 27/32 per site is below 1 and flagged as
/// not meaningful in the table and the JSON; the Bethe row carries the local estimate, and
/// the cited transfer-matrix value agrees with Baxter's κ = 1.395485972479302… (Baxter 1980,
/// J. Phys. A 13, L61: the closed form in radicals at activity 1, as given by Joyce 1988 —
/// reference from memory; evaluated here).
#[test]
fn issue11_hard_hexagons_flag_pauling_and_cite_the_strips() {
    let kappa = hard_hexagon_kappa();
    assert!(
        (kappa.ln() - 0.333_242_721_976_181_9).abs() < 1e-12,
        "{kappa}"
    );
    let f = lattice("hard-hexagons.yaml");
    let v = estimate_json("hard-hexagons.yaml", "3");
    assert!((v["pauling"]["w_per_unit"].as_f64().unwrap() - 27.0 / 32.0).abs() < 1e-12);
    assert!(
        v["pauling"]["not_meaningful"]
            .as_str()
            .unwrap()
            .contains("below 1")
    );
    assert!(v["bethe"]["not_meaningful"].is_null());
    let cited = &v["cited"]["estimate"];
    assert_eq!(cited["method"], "transfer-matrix");
    let (w, sigma) = (
        cited["w_per_unit"].as_f64().unwrap(),
        cited["w_uncertainty"].as_f64().unwrap(),
    );
    assert!(
        (w - kappa).abs() <= 4.0 * sigma + 1e-9,
        "{w} ± {sigma} against {kappa}"
    );
    let out = text(&["estimate", f.to_str().unwrap(), "--budget", "1"]);
    assert!(out.contains("Pauling *"), "{out}");
    assert!(
        out.contains("* Pauling: W = 0.843750 per site is below 1"),
        "{out}"
    );
    assert!(
        out.contains("the Bethe row carries the mean-field estimate"),
        "{out}"
    );
    let inspect = text(&["inspect", f.to_str().unwrap()]);
    assert!(
        inspect.contains("Not meaningful for this rule"),
        "{inspect}"
    );
}

/// With no count at all, a Pauling value below 1 is not cited: Bethe is; without Bethe
/// nothing is, and the sentence to paste refuses.
#[test]
fn issue11_nothing_meaningful_is_nothing_cited() {
    let l = Lattice::from_file(&lattice("hard-hexagons.yaml")).unwrap();
    let config = SurveyConfig {
        budget: 600.0,
        max_exact_units: Some(0.5),
        widths: Some(vec![2, 3]),
        ..SurveyConfig::default()
    };
    let mut s = survey(&l.crystal, &config, &Context::new()).unwrap();
    assert!(s.exact.is_empty() && s.strips.is_none());
    assert_eq!(s.cited().value.unwrap().reason, CitedReason::Bethe);
    s.bethe = None;
    let c = s.cited();
    assert!(c.value.is_none());
    assert!(matches!(c.passed_over[0].why, Refusal::NotMeaningful(_)));
    assert!(text::cited_line(&s, "site").starts_with("cite: NOTHING"));
    assert!(groundcount::json::CitedRecord::of(&l.crystal, &s).is_none());
    let w = Report::new(&l, &s, meta(), None);
    assert!(matches!(w.sentence(), Sentence::Refused(_)));
}

/// Baxter's κ for hard hexagons at activity 1 in radicals (Baxter 1980, J. Phys. A 13, L61;
/// as written by Joyce 1988, from memory).
fn hard_hexagon_kappa() -> f64 {
    let a = -(124.0 / 363.0) * 11f64.cbrt();
    let b = (2501.0 / 11979.0) * 33f64.sqrt();
    let c = (0.25 + 0.375 * a * ((b + 1.0).cbrt() - (b - 1.0).cbrt())).cbrt();
    let k1 = 0.25 * 3f64.powf(1.25) * 11f64.powf(-5.0 / 12.0) / (c * c);
    let s = (2.0 + c + 2.0 * (1.0 + c + c * c).sqrt()).sqrt();
    let k2 = (1.0 - (1.0 - c).sqrt() + s).powi(2);
    let k3 = (-1.0 - (1.0 - c).sqrt() + s).powi(2);
    let k4 = ((1.0 - a).sqrt() + (2.0 + a + 2.0 * (1.0 + a + a * a).sqrt()).sqrt()).powf(-0.5);
    k1 * k2 * k3 * k4
}

/// A molecule with two orientations and no rule: R ln 2 per molecule (the count is 2^N, a
/// closed form) through every counter the survey runs — Pauling, Bethe, every exact cell,
/// every Monte Carlo cell — and the cited value; the file needs no `rules:` at all.
#[test]
fn issue11_free_orientations_give_r_ln_2_everywhere() {
    let ln2 = std::f64::consts::LN_2;
    let out = run(&[
        "estimate",
        fixture("free-orientations.yaml").to_str().unwrap(),
        "--budget",
        "3",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let mut all = vec![&v["pauling"], &v["bethe"], &v["cited"]["estimate"]];
    all.extend(v["exact"].as_array().unwrap());
    all.extend(v["monte_carlo_cells"].as_array().unwrap());
    assert!(!v["exact"].as_array().unwrap().is_empty());
    assert!(!v["monte_carlo_cells"].as_array().unwrap().is_empty());
    for e in all {
        let s = e["s_over_r"].as_f64().unwrap();
        assert!((s - ln2).abs() < 1e-12, "{}: {s}", e["method"]);
        let j = e["s_j_per_mol_k"].as_f64().unwrap();
        assert!((j - 8.31446261815324 * ln2).abs() < 1e-10);
    }
    for e in v["exact"].as_array().unwrap() {
        let n = e["formula_units"].as_f64().unwrap() as u32;
        let count: num_bigint::BigUint = e["count"].as_str().unwrap().parse().unwrap();
        assert_eq!(count, num_bigint::BigUint::from(2u32).pow(n));
    }
    assert!(
        v["stopped"]
            .as_str()
            .unwrap()
            .contains("every variable is free")
    );
}

/// The same in two dimensions, through the transfer matrix: strips of molecules with two
/// orientations and no rule give ln λ = W ln 2 at every width, W = 2 per molecule.
#[test]
fn issue11_free_orientations_through_the_transfer_matrix() {
    let yaml = std::fs::read_to_string(fixture("free-orientations.yaml"))
        .unwrap()
        .replace("dimensions: 3", "dimensions: 2")
        .replace(
            "[[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]]",
            "[[1.0, 0.0], [0.0, 1.0]]",
        )
        .replace("at: [0.0, 0.0, 0.0]", "at: [0.0, 0.0]");
    let dir = std::path::PathBuf::from(env!("CARGO_TARGET_TMPDIR"));
    let file = dir.join("free-orientations-2d.yaml");
    std::fs::write(&file, yaml).unwrap();
    let out = run(&[
        "strip",
        file.to_str().unwrap(),
        "--widths",
        "2..6",
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    for w in v["widths"].as_array().unwrap() {
        let (width, ln) = (
            w["width"].as_f64().unwrap(),
            w["ln_lambda"].as_f64().unwrap(),
        );
        assert!(
            (ln - width * std::f64::consts::LN_2).abs() < 1e-9,
            "width {width}: {ln}"
        );
    }
    assert!((v["w_per_unit"].as_f64().unwrap() - 2.0).abs() < 1e-9);
}

/// A rule that allows every assignment is factored out: the exact count of the 3×3×2 cell
/// is 2^18 at once (it used to run out of frontier states), with no constraint left.
#[test]
fn issue11_a_rule_that_allows_everything_on_3x3x2() {
    let f = fixture("allow-everything.yaml");
    let v = crate::util::run_json(&[
        "exact",
        f.to_str().unwrap(),
        "--cells",
        "3x3x2",
        "--format",
        "json",
    ]);
    assert_eq!(v["count"], "262144"); // 2^18, 18 free sites (closed form)
    assert_eq!(v["constraints"], 0);
    assert!((v["s_over_r"].as_f64().unwrap() - std::f64::consts::LN_2).abs() < 1e-12);
    let v = crate::util::run_json(&[
        "sample",
        f.to_str().unwrap(),
        "--cells",
        "3x3x2",
        "--replicas",
        "2",
        "--sweeps",
        "10",
        "--format",
        "json",
    ]);
    assert!(
        (v["s_over_r"].as_f64().unwrap() - std::f64::consts::LN_2).abs() < 1e-9,
        "{v}"
    );
}
