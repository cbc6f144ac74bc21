//! Monte Carlo (thermodynamic integration) against the exact frontier counter, error-bar
//! scaling, and reproducibility across thread counts.

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::exact::{self, ExactConfig};
use groundcount::counters::sampling::{self, SampleConfig, Sampled};
use groundcount::model::Model;

use crate::util::lattice;

fn model(file: &str, cells: &str) -> Model {
    let l = Lattice::from_file(&lattice(file)).unwrap();
    let cells = Cells::parse(cells, None, l.crystal.dimensions).unwrap();
    Model::new(&Cluster::new(&l.crystal, cells).unwrap()).unwrap()
}

fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(f)
}

fn config(seed: u64, replicas: usize, sweeps: usize) -> SampleConfig {
    SampleConfig {
        seed,
        replicas,
        sweeps,
        equilibration: sweeps / 4,
        ..SampleConfig::default()
    }
}

/// The sampled ln W per formula unit must lie within 4σ of the exact count of the same
/// cell (an independent method: frontier dynamic programming), and σ must be small enough
/// for the check to mean something.
fn agrees_with_exact(file: &str, cells: &str, sweeps: usize, max_sigma: f64) -> Sampled {
    let m = model(file, cells);
    let exact = exact::count(&m, &ExactConfig::default()).unwrap();
    let s = in_pool(2, || sampling::sample(&m, &config(7, 8, sweeps))).unwrap();
    let sigma = s.estimate.sigma_ln_w.unwrap();
    let diff = s.estimate.ln_w_per_unit - exact.ln_w_per_unit;
    assert!(
        sigma > 0.0 && sigma < max_sigma,
        "{file} {cells}: σ = {sigma}"
    );
    assert!(
        diff.abs() < 4.0 * sigma,
        "{file} {cells}: sampled {} ± {sigma}, exact {}",
        s.estimate.ln_w_per_unit,
        exact.ln_w_per_unit
    );
    s
}

#[test]
fn square_ice_6x6_torus_agrees_with_the_exact_count() {
    agrees_with_exact("square-ice.yaml", "6x6", 1000, 0.005);
}

#[test]
fn square_ice_8x8_torus_agrees_with_the_exact_count() {
    // Exact count 2901094068042 (OEIS A054759, reproduced by `exact`).
    agrees_with_exact("square-ice.yaml", "8x8", 600, 0.004);
}

#[test]
fn ice_ic_2x1x1_agrees_with_the_exact_count() {
    agrees_with_exact("ice-ic.yaml", "2x1x1", 1000, 0.006);
}

#[test]
fn triangular_antiferromagnet_6x6_agrees_with_the_exact_count() {
    // Exact count 263640 (REFERENCES.md, independent computation; reproduced by `exact`).
    agrees_with_exact("triangular-afm.yaml", "6x6", 1000, 0.003);
}

#[test]
fn ice_ih_2x2x2_agrees_with_the_exact_count() {
    agrees_with_exact("ice-ih.yaml", "2x2x2", 1000, 0.006);
}

#[test]
fn spin_ice_2x2x2_agrees_with_the_exact_count() {
    agrees_with_exact("spin-ice.yaml", "2x2x2", 1000, 0.004);
}

#[test]
fn many_state_variables_agree_with_the_exact_count() {
    // The general (q > 2) heat-bath path: proper 3-colourings of the 6×6 square torus,
    // against the exact frontier count of the same cell.
    let l = Lattice::from_yaml(
        r#"
name: square 3-colourings
dimensions: 2
cell: {vectors: [[1.0, 0.0], [0.0, 1.0]]}
sites: [{id: A, at: [0.0, 0.0]}]
bonds:
  - {id: h, from: A, to: A, shift: [1, 0]}
  - {id: v, from: A, to: A, shift: [0, 1]}
variables: [{on: sites, kind: color, states: 3}]
rules: [{kind: distinct, at: bonds}]
formula_unit: {name: site, per: sites}
"#,
        "colourings.yaml",
    )
    .unwrap();
    let m = Model::new(&Cluster::new(&l.crystal, Cells::parse("6x6", None, 2).unwrap()).unwrap())
        .unwrap();
    let exact = exact::count(&m, &ExactConfig::default()).unwrap();
    let s = in_pool(2, || sampling::sample(&m, &config(3, 8, 600))).unwrap();
    let sigma = s.estimate.sigma_ln_w.unwrap();
    assert!(sigma < 0.01, "σ = {sigma}");
    let diff = s.estimate.ln_w_per_unit - exact.ln_w_per_unit;
    assert!(
        diff.abs() < 4.0 * sigma,
        "{} ± {sigma} vs {}",
        s.estimate.ln_w_per_unit,
        exact.ln_w_per_unit
    );
}

#[test]
fn statistical_error_falls_as_one_over_root_samples() {
    // Four times the measured sweeps should halve the standard error when the sweeps are
    // much longer than the correlation time (common practice: σ ∝ 1/√n). The standard
    // error from 32 replicas scatters by about 13 %, and the per-replica estimates are
    // skewed (defect pairs live long at large β), so the ratio may lie between 1.4 and 3.2.
    let m = model("square-ice.yaml", "6x6");
    let few = in_pool(2, || sampling::sample(&m, &config(11, 32, 50))).unwrap();
    let many = in_pool(2, || sampling::sample(&m, &config(12, 32, 200))).unwrap();
    let ratio = few.sigma_statistical / many.sigma_statistical;
    assert!((1.4..3.2).contains(&ratio), "σ ratio {ratio}");
}

#[test]
fn same_seed_same_numbers_on_any_thread_count() {
    let m = model("ice-ih.yaml", "2x2x2");
    let one = in_pool(1, || sampling::sample(&m, &config(42, 4, 50))).unwrap();
    let two = in_pool(2, || sampling::sample(&m, &config(42, 4, 50))).unwrap();
    let bits = |s: &Sampled| -> Vec<u64> { s.per_replica.iter().map(|x| x.to_bits()).collect() };
    assert_eq!(bits(&one), bits(&two));
    assert_eq!(
        one.estimate.ln_w_per_unit.to_bits(),
        two.estimate.ln_w_per_unit.to_bits()
    );
    let other = in_pool(2, || sampling::sample(&m, &config(43, 4, 50))).unwrap();
    assert_ne!(
        bits(&one),
        bits(&other),
        "a different seed gives different numbers"
    );
}

/// `groundcount sample … --format json` with the keys README documents.
fn sample_json(threads: &str) -> serde_json::Value {
    let file = lattice("square-ice.yaml");
    let out = crate::util::run(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "4x4",
        "--seed",
        "9",
        "--sweeps",
        "100",
        "--replicas",
        "4",
        "--threads",
        threads,
        "--format",
        "json",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        out.stderr.is_empty(),
        "no progress when standard error is not a terminal"
    );
    serde_json::from_slice(&out.stdout).expect("JSON")
}

#[test]
fn sample_command_writes_the_documented_json() {
    let one = sample_json("1");
    assert_eq!(one["method"], "monte-carlo");
    assert_eq!(one["seed"], 9);
    assert_eq!(one["cells"], "4x4 periodic");
    // 4 replicas × 40 sampled nodes × 100 sweeps.
    assert_eq!(one["samples"], 16000);
    for key in [
        "w_per_unit",
        "uncertainty",
        "s_over_r",
        "s_j_per_mol_k",
        "s_uncertainty",
    ] {
        assert!(
            one[key].as_f64().is_some_and(f64::is_finite),
            "{key}: {}",
            one[key]
        );
    }
    // W = e^{s}, σ_W = W σ_s; S0 = R s with R = 8.31446261815324 J/(mol K) (2019 SI).
    let (w, s) = (
        one["w_per_unit"].as_f64().unwrap(),
        one["s_over_r"].as_f64().unwrap(),
    );
    assert!((w - s.exp()).abs() < 1e-12);
    let s_j = one["s_j_per_mol_k"].as_f64().unwrap();
    assert!((s_j - 8.31446261815324 * s).abs() < 1e-9);
    // The 4×4 torus has 2970 arrangements (OEIS A054759): ln 2970 / 16 = 0.49977.
    let sigma = one["s_uncertainty"].as_f64().unwrap() / 8.31446261815324;
    assert!(
        (s - 2970f64.ln() / 16.0).abs() < 4.0 * sigma,
        "{s} ± {sigma}"
    );
    let two = sample_json("2");
    assert_eq!(
        one["w_per_unit"], two["w_per_unit"],
        "same seed, other thread count"
    );
}

#[test]
fn sample_command_refuses_a_single_replica() {
    let file = lattice("square-ice.yaml");
    let out = crate::util::run(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "4x4",
        "--replicas",
        "1",
    ]);
    assert_eq!(out.status.code(), Some(1));
    assert!(out.stdout.is_empty());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.starts_with("error:") && err.contains("replicas"),
        "{err}"
    );
}

#[test]
fn target_error_adds_replicas_until_reached() {
    let m = model("square-ice.yaml", "4x4");
    let target = SampleConfig {
        target_error: Some(0.002),
        ..config(5, 4, 100)
    };
    let s = in_pool(2, || sampling::sample(&m, &target)).unwrap();
    assert_eq!(s.target_reached, Some(true));
    assert!(s.estimate.sigma_ln_w.unwrap() <= 0.002);
    assert!(
        s.replicas > 4 && s.replicas % 4 == 0,
        "{} replicas",
        s.replicas
    );
    // The same numbers as a plain run of that many replicas: batches continue the
    // replica numbering, so their streams are the same.
    let plain = in_pool(1, || sampling::sample(&m, &config(5, s.replicas, 100))).unwrap();
    assert_eq!(
        s.estimate.ln_w_per_unit.to_bits(),
        plain.estimate.ln_w_per_unit.to_bits()
    );
    // The 4×4 torus count 2970 (OEIS A054759).
    let exact = 2970f64.ln() / 16.0;
    assert!((s.estimate.ln_w_per_unit - exact).abs() < 4.0 * 0.002);
}

/// `sample --cells` with several sizes extrapolates to the infinite crystal: square ice on
/// 8×8 … 24×24 tori must give Lieb's (4/3)^(3/2) (Lieb 1967, Phys. Rev. 162, 162) within
/// 4σ, with a σ small enough for the check to mean something.
#[test]
fn finite_size_extrapolation_reaches_the_infinite_square_ice() {
    let file = lattice("square-ice.yaml");
    let v = crate::util::run_json(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "8x8,12x12,16x16,24x24",
        "--replicas",
        "8",
        "--sweeps",
        "200",
        "--format",
        "json",
    ]);
    assert_eq!(v["method"], "monte-carlo-extrapolated");
    assert_eq!(v["cells_sampled"].as_array().unwrap().len(), 4);
    let s = v["fit"]["ln_w_per_unit_infinite"].as_f64().unwrap();
    let sigma = v["fit"]["sigma_ln_w"].as_f64().unwrap();
    let exact = 1.5 * (4.0f64 / 3.0).ln();
    assert!(sigma < 0.01, "σ = {sigma}");
    assert!(
        (s - exact).abs() < 4.0 * sigma,
        "{s} ± {sigma} against {exact}"
    );
    // the extrapolation moves the largest cell's value towards the limit
    let largest = v["cells_sampled"][3]["s_over_r"].as_f64().unwrap();
    assert!(largest > exact);
}

fn wl(
    file: &str,
    cells: &str,
    seed: u64,
    replicas: usize,
    sweeps: u64,
) -> sampling::wang_landau::WangLandau {
    wl_with(file, cells, seed, replicas, sweeps, 20_000)
}

fn wl_with(
    file: &str,
    cells: &str,
    seed: u64,
    replicas: usize,
    sweeps: u64,
    uniform: usize,
) -> sampling::wang_landau::WangLandau {
    let m = model(file, cells);
    let config = sampling::wang_landau::WangLandauConfig {
        seed,
        replicas,
        sweeps,
        uniform,
    };
    sampling::wang_landau::wang_landau(&m, &config).unwrap()
}

fn exact_ln_w(file: &str, cells: &str) -> f64 {
    let m = model(file, cells);
    exact::count(&m, &ExactConfig::default())
        .unwrap()
        .ln_w_per_unit
}

/// The second Monte Carlo method (Wang–Landau 1/t, then multicanonical production) against the exact frontier counter on
/// cells it can do, within 4σ, with σ small enough to mean something.
#[test]
fn wang_landau_agrees_with_the_exact_count() {
    for (file, cells, max_sigma) in [
        ("ice-ih.yaml", "2x2x2", 0.004),
        ("ice-ih.yaml", "3x2x2", 0.004),
        ("square-ice.yaml", "4x4", 0.004),
        ("triangular-afm.yaml", "6x6", 0.003),
        ("spin-ice.yaml", "1x1x1", 0.01),
    ] {
        let w = wl(file, cells, 3, 8, 40_000);
        let exact = exact_ln_w(file, cells);
        let (s, sigma) = (w.estimate.ln_w_per_unit, w.estimate.sigma_ln_w.unwrap());
        assert!(
            sigma > 0.0 && sigma < max_sigma,
            "{file} {cells}: σ = {sigma}"
        );
        assert!(
            (s - exact).abs() < 4.0 * sigma,
            "{file} {cells}: Wang–Landau {s} ± {sigma} against exact {exact}"
        );
    }
}

/// The two Monte Carlo methods agree with each other on a cell beyond the exact counter's
/// default state budget (ice Ic 2x2x2, 64 molecules) within 4 combined σ.
#[test]
fn wang_landau_and_thermodynamic_integration_agree() {
    let m = model("ice-ic.yaml", "2x2x2");
    let ti = sampling::sample(&m, &config(4, 16, 400)).unwrap();
    let w = wl("ice-ic.yaml", "2x2x2", 4, 8, 40_000);
    let (a, sa) = (ti.estimate.ln_w_per_unit, ti.estimate.sigma_ln_w.unwrap());
    let (b, sb) = (w.estimate.ln_w_per_unit, w.estimate.sigma_ln_w.unwrap());
    assert!(
        (a - b).abs() < 4.0 * sa.hypot(sb),
        "integration {a} ± {sa}, Wang–Landau {b} ± {sb}"
    );
}

/// The multicanonical production's error falls as 1/√t, and the binomial error of the
/// window fraction as 1/√(uniform samples): 16 times more of both give a spread of the
/// replicas about 4 times smaller (accepted between 2 and 8: the spread of 16 walks is
/// itself uncertain by ~20 %).
#[test]
fn wang_landau_error_falls_as_one_over_root_time() {
    let short = wl_with("ice-ih.yaml", "2x1x1", 5, 16, 20_000, 20_000);
    let long = wl_with("ice-ih.yaml", "2x1x1", 5, 16, 320_000, 320_000);
    let ratio = short.estimate.sigma_ln_w.unwrap() / long.estimate.sigma_ln_w.unwrap();
    assert!((2.0..8.0).contains(&ratio), "σ ratio {ratio}");
}

/// The same seed gives bitwise the same Wang–Landau numbers on 1 and 2 threads.
#[test]
fn wang_landau_reproduces_on_any_thread_count() {
    let one = in_pool(1, || wl("square-ice.yaml", "4x4", 8, 4, 2_000));
    let two = in_pool(2, || wl("square-ice.yaml", "4x4", 8, 4, 2_000));
    assert_eq!(one.per_replica, two.per_replica);
}

/// Ice Ih extrapolated from three periodic cells agrees within 4σ with Nagle's series
/// value W = 1.50685 ± 0.00015 per H2O (Nagle 1966, J. Math. Phys. 7, 1484; from memory).
#[test]
fn ice_ih_extrapolation_agrees_with_nagle() {
    let file = lattice("ice-ih.yaml");
    let v = crate::util::run_json(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "4x4x2,6x6x3,8x8x4",
        "--replicas",
        "16",
        "--sweeps",
        "300",
        "--seed",
        "3",
        "--format",
        "json",
    ]);
    let w = v["w_per_unit"].as_f64().unwrap();
    let sigma = v["uncertainty"].as_f64().unwrap();
    assert!(sigma < 0.006, "σ = {sigma}");
    let nagle = 1.50685;
    assert!(
        (w - nagle).abs() < 4.0 * sigma.hypot(0.00015),
        "W = {w} ± {sigma} against {nagle}"
    );
}
