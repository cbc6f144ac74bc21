//! The main job, `estimate`: every method side by side, checked against published values.

use crate::util::{lattice, run};

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
    let v = estimate_json("square-ice.yaml", "4");
    let tm = &v["transfer_matrix"];
    assert_eq!(tm["method"], "transfer-matrix");
    let w = tm["w_per_unit"].as_f64().unwrap();
    let sigma = tm["uncertainty"].as_f64().unwrap();
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
    let sigma = mc["uncertainty"].as_f64().unwrap();
    assert!(w - 4.0 * sigma > 1.5, "W = {w} ± {sigma}");
    let exact_2x2x2 = v["exact"][3]["w_per_unit"].as_f64().unwrap(); // 2756394^(1/32)
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

/// On a 3D lattice the survey samples several cubes and cites their extrapolation to the
/// infinite crystal. Spin ice has, per spin, the square root of ice's W per molecule (each
/// spin is one bond of the diamond net of tetrahedra centres), so it must agree within 4σ
/// with √1.50685 = 1.227538 from Nagle's series for ice (Nagle 1966, J. Math. Phys. 7, 1484;
/// value from memory, its own ±0.00015 on W is negligible here).
#[test]
fn spin_ice_estimate_extrapolates_to_the_infinite_crystal() {
    let v = estimate_json("spin-ice.yaml", "10");
    let cells = v["monte_carlo_cells"].as_array().unwrap();
    assert!(cells.len() >= 2, "several cubes sampled: {}", cells.len());
    let inf = &v["monte_carlo_infinite"];
    assert_eq!(v["cited"], *inf, "the extrapolation is the cited value");
    let w = inf["w_per_unit"].as_f64().unwrap();
    let sigma = inf["uncertainty"].as_f64().unwrap();
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

/// Odd tori carry no dimer covering: the summary line must name the largest cell that has
/// one (an even torus), never a W of zero.
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
    // "largest cell counted: …", or "… with an arrangement: …" when a larger (odd) torus
    // was counted too; which one depends on how far the budget reached.
    let line = text
        .lines()
        .find(|l| l.starts_with("largest cell counted"))
        .expect("summary line");
    let cell = line
        .split_once(": ")
        .unwrap()
        .1
        .split_whitespace()
        .next()
        .unwrap()
        .trim_end_matches(',');
    let side: usize = cell.split('x').next().unwrap().parse().unwrap();
    assert_eq!(side % 2, 0, "{line}");
    assert!(!line.contains("W = 0 "), "{line}");
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
