//! Monte Carlo (thermodynamic integration) against the exact frontier counter, error-bar
//! scaling, and reproducibility across thread counts.

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::context::Context;
use groundcount::counters::exact::{self, ExactConfig};
use groundcount::counters::sampling::{self, SampleConfig, Sampled, calibration};
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
fn agrees_with_exact(
    file: &str,
    cells: &str,
    sweeps: usize,
    max_sigma: f64,
) -> groundcount::counters::Counted<Sampled> {
    let m = model(file, cells);
    let exact = exact::count(&m, &ExactConfig::default(), &Context::new())
        .unwrap()
        .estimate;
    let s = in_pool(2, || {
        sampling::count(&m, &config(7, 8, sweeps), &Context::new())
    })
    .unwrap();
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
    let exact = exact::count(&m, &ExactConfig::default(), &Context::new())
        .unwrap()
        .estimate;
    let s = in_pool(2, || {
        sampling::count(&m, &config(3, 8, 600), &Context::new())
    })
    .unwrap();
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
    let few = in_pool(2, || {
        sampling::count(&m, &config(11, 32, 50), &Context::new())
    })
    .unwrap();
    let many = in_pool(2, || {
        sampling::count(&m, &config(12, 32, 200), &Context::new())
    })
    .unwrap();
    let ratio = few.sigma_statistical / many.sigma_statistical;
    assert!((1.4..3.2).contains(&ratio), "σ ratio {ratio}");
}

#[test]
fn same_seed_same_numbers_on_any_thread_count() {
    let m = model("ice-ih.yaml", "2x2x2");
    let one = in_pool(1, || {
        sampling::count(&m, &config(42, 4, 50), &Context::new())
    })
    .unwrap();
    let two = in_pool(2, || {
        sampling::count(&m, &config(42, 4, 50), &Context::new())
    })
    .unwrap();
    let bits = |s: &Sampled| -> Vec<u64> { s.per_replica.iter().map(|x| x.to_bits()).collect() };
    assert_eq!(bits(&one), bits(&two));
    assert_eq!(
        one.estimate.ln_w_per_unit.to_bits(),
        two.estimate.ln_w_per_unit.to_bits()
    );
    let other = in_pool(2, || {
        sampling::count(&m, &config(43, 4, 50), &Context::new())
    })
    .unwrap();
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
    // 4 replicas × 40 sampled nodes × 100 sweeps, shared among the nodes by the pilot's
    // variance and each node's cost (issue 15: a sweep of 64 chains costs 3, one chain's
    // 1): the cost is kept, so the count of sweeps moves with the share of the cheaper
    // nodes, here within a quarter; doubled by each extension of the run (with 4 replicas
    // the equilibration check, a t statistic of 3 degrees of freedom, fails now and then:
    // at this seed it read 5.4σ and the run was repeated once).
    let samples = one["samples"].as_f64().unwrap();
    let planned = 16000.0 * 2f64.powi(one["extensions"].as_i64().unwrap() as i32);
    assert!((samples - planned).abs() <= 0.25 * planned, "{samples}");
    // β_max is 5.77 on 16 vertices, below the hand-off at β = 6: 64 chains at every node.
    assert_eq!(
        one["lanes_up_to_beta"].as_f64(),
        one["beta_max"].as_f64(),
        "{one}"
    );
    for key in [
        "w_per_unit",
        "w_uncertainty",
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
    // 4 replicas of 64 chains give σ ≈ 0.0005 here: the target needs more batches.
    let target = SampleConfig {
        target_error: Some(0.0003),
        ..config(5, 4, 100)
    };
    let s = in_pool(2, || sampling::count(&m, &target, &Context::new())).unwrap();
    assert_eq!(s.target_reached, Some(true));
    assert!(s.estimate.sigma_ln_w.unwrap() <= 0.0003);
    assert!(
        s.replicas > 4 && s.replicas % 4 == 0,
        "{} replicas",
        s.replicas
    );
    // The same numbers as a plain run of that many replicas: batches continue the
    // replica numbering, so their streams are the same.
    let plain = in_pool(1, || {
        sampling::count(&m, &config(5, s.replicas, 100), &Context::new())
    })
    .unwrap();
    assert_eq!(
        s.estimate.ln_w_per_unit.to_bits(),
        plain.estimate.ln_w_per_unit.to_bits()
    );
    // The 4×4 torus count 2970 (OEIS A054759).
    let exact = 2970f64.ln() / 16.0;
    assert!((s.estimate.ln_w_per_unit - exact).abs() < 4.0 * 0.0003);
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
) -> groundcount::counters::Counted<sampling::wang_landau::WangLandau> {
    wl_with(file, cells, seed, replicas, sweeps, 20_000)
}

fn wl_with(
    file: &str,
    cells: &str,
    seed: u64,
    replicas: usize,
    sweeps: u64,
    uniform: usize,
) -> groundcount::counters::Counted<sampling::wang_landau::WangLandau> {
    let m = model(file, cells);
    let config = sampling::wang_landau::WangLandauConfig {
        seed,
        replicas,
        sweeps,
        uniform,
    };
    sampling::wang_landau::count(&m, &config, &Context::new()).unwrap()
}

fn exact_ln_w(file: &str, cells: &str) -> f64 {
    let m = model(file, cells);
    exact::count(&m, &ExactConfig::default(), &Context::new())
        .unwrap()
        .estimate
        .ln_w_per_unit
}

/// The second Monte Carlo method (Wang–Landau 1/t, then multicanonical production) against the exact frontier counter on
/// cells it can do, within 4σ, with σ small enough to mean something (20000 sweeps give
/// σ at most 0.0018, under half of every bound).
#[test]
fn wang_landau_agrees_with_the_exact_count() {
    for (file, cells, max_sigma) in [
        ("ice-ih.yaml", "2x2x2", 0.004),
        ("ice-ih.yaml", "3x2x2", 0.004),
        ("square-ice.yaml", "4x4", 0.004),
        ("triangular-afm.yaml", "6x6", 0.003),
        ("spin-ice.yaml", "1x1x1", 0.01),
    ] {
        let w = wl(file, cells, 3, 8, 20_000);
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
    let ti = sampling::count(&m, &config(4, 16, 400), &Context::new()).unwrap();
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
/// itself uncertain by ~20 %). With 5000 against 80000 the ratio was 3.2–4.5 over seeds
/// 5–9 (4.3 for seed 5; 3.0–4.1 with 20000 against 320000).
#[test]
fn wang_landau_error_falls_as_one_over_root_time() {
    let short = wl_with("ice-ih.yaml", "2x1x1", 5, 16, 5_000, 5_000);
    let long = wl_with("ice-ih.yaml", "2x1x1", 5, 16, 80_000, 80_000);
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
/// Slow tier: smaller cells or fewer sweeps gave bars up to 0.0059 against the 0.006
/// required, so the run keeps its size.
#[test]
#[ignore = "slow tier: `cargo test --release -- --ignored`, run by .ci/run"]
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
    let sigma = v["w_uncertainty"].as_f64().unwrap();
    assert!(sigma < 0.006, "σ = {sigma}");
    let nagle = 1.50685;
    assert!(
        (w - nagle).abs() < 4.0 * sigma.hypot(0.00015),
        "W = {w} ± {sigma} against {nagle}"
    );
}

/// Pulls (sampled − exact)/σ of ln W per formula unit over seeds 1..=`seeds` at the
/// default settings of `sample` (8 replicas × 200 sweeps per node), against the exact
/// frontier count of the same cell (an independent method). Returns the pulls.
fn pulls(path: &std::path::Path, cells: &str, seeds: u64) -> calibration::Pulls {
    let l = Lattice::from_file(path).unwrap();
    let cells = Cells::parse(cells, None, l.crystal.dimensions).unwrap();
    let m = Model::new(&Cluster::new(&l.crystal, cells).unwrap()).unwrap();
    let exact = exact::count(&m, &ExactConfig::default(), &Context::new())
        .unwrap()
        .estimate
        .ln_w_per_unit;
    calibration::pulls(
        &m,
        exact,
        &SampleConfig::default(),
        1..seeds + 1,
        &Context::new(),
    )
    .unwrap()
}

/// The calibration bounds of issue 11: an honest 1σ gives pulls of mean 0 and spread 1;
/// over 50 seeds or more the mean must lie within ±0.3 and the spread within 0.8–1.25.
fn assert_calibrated(what: &str, p: &calibration::Pulls) {
    assert!(
        p.calibrated(),
        "{what}: mean pull {:+.3}, spread {:.3} over {} seeds",
        p.mean(),
        p.spread(),
        p.pulls.len()
    );
}

/// Issue 11, item 4: over 10 seeds the pulls had a spread of 1.3–1.4. Over 100 seeds (50
/// until issue 15) the error bars must now be calibrated, on two cheap cells with exact
/// counts: spin ice 2x2x2 (loop moves) and the triangular antiferromagnet 6x6 (single
/// flips only): 200 runs, in the slow tier. The heavier run over more cells, ice Ih among them, is
/// `issue11_calibration_over_many_cells`.
#[test]
#[ignore = "slow tier: `cargo test --release -- --ignored`, run by .ci/run"]
fn issue11_error_bars_are_calibrated() {
    // 100 seeds: with 50 the spread's own standard error (0.10) put the bounds two of
    // them from 1. With 64-chain replicas, spin ice 2x2x2 over seeds 1..=50 gave a spread
    // of 0.74, over 1..=100 0.85 and over 101..=300 0.97 (0.94 with equal sweeps).
    for (file, cells) in [("spin-ice.yaml", "2x2x2"), ("triangular-afm.yaml", "6x6")] {
        let p = in_pool(2, || pulls(&lattice(file), cells, 100));
        assert_calibrated(&format!("{file} {cells}"), &p);
    }
}

/// The calibration of the error bars on every kind of cell with an exact count: ice
/// rules with loop moves (ice Ih, a long ice Ih tube, the clathrate framework), the
/// triangular antiferromagnet (single flips only), spin ice, and square ice in 2D; 100 seeds
/// each at the default settings. Run it with
/// `cargo test --release -- --ignored issue11_calibration_over_many_cells --nocapture`;
/// DEVELOPERS.md records its last output.
#[test]
#[ignore]
fn issue11_calibration_over_many_cells() {
    let cases = [
        (lattice("ice-ih.yaml"), "3x2x2"),
        (lattice("ice-ih.yaml"), "2x2x24"),
        (crate::util::fixture("counts-clathrate-si.yaml"), "2x1x1"),
        (lattice("spin-ice.yaml"), "2x2x2"),
        (lattice("triangular-afm.yaml"), "6x6"),
        (lattice("square-ice.yaml"), "8x8"),
    ];
    let mut failures = Vec::new();
    for (path, cells) in &cases {
        let start = std::time::Instant::now();
        let p = pulls(path, cells, 100);
        let name = format!("{} {cells}", path.file_name().unwrap().to_string_lossy());
        println!(
            "{name:<32} 100 seeds: mean pull {:+.3}, spread {:.3}, |pull| > 2: {}, > 3: {} ({:.0} s)",
            p.mean(),
            p.spread(),
            p.beyond(2.0),
            p.beyond(3.0),
            start.elapsed().as_secs_f64()
        );
        if !p.calibrated() {
            failures.push(name);
        }
    }
    assert!(failures.is_empty(), "not calibrated: {failures:?}");
}

/// Run `sample` with arguments; return (exit code, standard output, standard error).
fn sample_cli(args: &[&str]) -> (Option<i32>, String, String) {
    let mut all = vec!["sample"];
    all.extend_from_slice(args);
    let o = crate::util::run(&all);
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// Issue 11, item 10: `sample --beta-max 1e10` returned Pauling's value with a zero error
/// bar (the first node beyond β = 0 lay at 2.5e8, past every violation). Nodes so far apart
/// are refused, with the largest β the nodes can resolve.
#[test]
fn issue11_beta_max_beyond_the_nodes_is_refused() {
    let file = lattice("ice-ih.yaml");
    let (code, out, err) = sample_cli(&[
        file.to_str().unwrap(),
        "--cells",
        "2x2x2",
        "--beta-max",
        "1e10",
    ]);
    assert_eq!(code, Some(1), "{out}{err}");
    assert!(out.is_empty());
    assert!(
        err.starts_with("error:") && err.contains("at most 40"),
        "{err}"
    );
    // within the limit it runs (41 nodes up to β = 40, 1 apart)
    let (code, _, err) = sample_cli(&[
        file.to_str().unwrap(),
        "--cells",
        "2x1x1",
        "--beta-max",
        "40",
        "--sweeps",
        "20",
        "-q",
    ]);
    assert_eq!(code, Some(0), "{err}");
}

/// Issue 11, item 10: `--shard K/N` with numbers whose replica indices overflow ran no
/// replica and exited 0. It is refused, and no file is written.
#[test]
fn issue11_shard_indices_that_overflow_are_refused() {
    let file = lattice("ice-ih.yaml");
    let out =
        std::env::temp_dir().join(format!("groundcount-overflow-{}.json", std::process::id()));
    for spec in [
        "18446744073709551615/18446744073709551615",
        "9223372036854775807/9223372036854775808",
    ] {
        let (code, stdout, err) = sample_cli(&[
            file.to_str().unwrap(),
            "--cells",
            "2x1x1",
            "--replicas",
            "4",
            "--shard",
            spec,
            "--out",
            out.to_str().unwrap(),
        ]);
        assert_eq!(code, Some(1), "{spec}: {stdout}{err}");
        assert!(err.contains("beyond"), "{err}");
        assert!(!out.exists(), "no shard file for {spec}");
    }
}

/// Issue 11, item 12: `--replicas 1000000000` aborted while allocating 48 GB. It is refused
/// up front, with the memory it would need.
#[test]
fn issue11_replicas_beyond_memory_are_refused_up_front() {
    let file = lattice("ice-ih.yaml");
    for extra in [
        &["--replicas", "1000000000"][..],
        &["--target-error", "1e-9", "--max-replicas", "4000000000"][..],
    ] {
        let mut args = vec![file.to_str().unwrap(), "--cells", "2x2x2"];
        args.extend_from_slice(extra);
        let (code, out, err) = sample_cli(&args);
        assert_eq!(code, Some(1), "{extra:?}: {out}{err}");
        assert!(err.contains("GB") && err.contains("memory"), "{err}");
    }
    let (code, _, err) = sample_cli(&[
        file.to_str().unwrap(),
        "--cells",
        "2x2x2",
        "--method",
        "wang-landau",
        "--replicas",
        "1000000000000",
    ]);
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("GB"), "{err}");
}

/// Issue 11, item 8: a Wang–Landau walk that does not converge exits 2, like every other
/// non-convergence (ice Ic 3x3x3 does not find an arrangement without violations in 100
/// sweeps).
#[test]
fn issue11_wang_landau_that_does_not_converge_exits_2() {
    let file = lattice("ice-ic.yaml");
    let (code, out, err) = sample_cli(&[
        file.to_str().unwrap(),
        "--cells",
        "3x3x3",
        "--method",
        "wang-landau",
        "--sweeps",
        "100",
        "--replicas",
        "2",
    ]);
    assert_eq!(code, Some(2), "{out}{err}");
    assert!(out.is_empty());
    assert!(err.contains("did not converge"), "{err}");
}

/// Issue 11, item 4: the equilibration check. Far too few sweeps on the long ice Ih tube
/// 2x2x24 (whose defect pairs need hundreds of sweeps to meet): the passes up and down
/// disagree, the check fails, and the allowance keeps the value within its error bar of the
/// exact count; allowed to extend, the run doubles its sweeps until the check passes.
#[test]
fn issue11_equilibration_check_fails_and_extends() {
    let m = model("ice-ih.yaml", "2x2x24");
    let exact = exact::count(&m, &ExactConfig::default(), &Context::new())
        .unwrap()
        .estimate
        .ln_w_per_unit;
    let short = SampleConfig {
        seed: 3,
        replicas: 16,
        sweeps: 6,
        equilibration: 1,
        max_extensions: 0,
        ..SampleConfig::default()
    };
    let s = in_pool(2, || sampling::count(&m, &short, &Context::new())).unwrap();
    assert!(
        !s.equilibrated,
        "hysteresis {} ± {}",
        s.hysteresis, s.sigma_hysteresis
    );
    assert!(
        s.hysteresis < 0.0,
        "the pass up lags with too many violations"
    );
    assert!(s.sigma_equilibration > 0.0);
    let sigma = s.estimate.sigma_ln_w.unwrap();
    assert!(
        (s.estimate.ln_w_per_unit - exact).abs() < 3.0 * sigma,
        "{} ± {sigma} against exact {exact}",
        s.estimate.ln_w_per_unit
    );
    let extended = in_pool(2, || {
        sampling::count(
            &m,
            &SampleConfig {
                max_extensions: 4,
                ..short.clone()
            },
            &Context::new(),
        )
    })
    .unwrap();
    assert!(extended.extensions >= 1);
    assert_eq!(extended.sweeps, 6 << extended.extensions);
    assert!(extended.equilibrated || extended.extensions == 4);
}

/// Ctrl-C during `sample`: no replica starts once the interrupt is raised; the replicas
/// that finished make the estimate, which says it was interrupted. Raised before anything
/// finished (fewer than two replicas), the run stops with `Error::Interrupted`.
#[test]
fn interrupt_stops_starting_replicas_and_keeps_the_finished_ones() {
    use groundcount::context::Interrupt;
    use std::sync::atomic::{AtomicUsize, Ordering};
    let m = model("ice-ih.yaml", "2x1x1");
    let interrupt = Interrupt::new();
    let config = SampleConfig {
        replicas: 40,
        sweeps: 20,
        equilibration: 5,
        ..SampleConfig::default()
    };
    let done = std::sync::Arc::new(AtomicUsize::new(0));
    let raised = interrupt.clone();
    let context = Context::new()
        .with_interrupt(interrupt.clone())
        .with_observer(move |p| {
            if *p == groundcount::context::Progress::Replica
                && done.fetch_add(1, Ordering::SeqCst) + 1 == 3
            {
                raised.raise();
            }
        });
    let s = in_pool(1, || sampling::count(&m, &config, &context)).unwrap();
    assert!(s.interrupted);
    assert_eq!(s.replicas, 3, "one thread: the fourth replica never starts");
    assert!(s.estimate.sigma_ln_w.unwrap() > 0.0);
    let e = sampling::count(&m, &config, &context).unwrap_err();
    assert!(matches!(e, groundcount::Error::Interrupted { .. }), "{e}");
}

/// Issue 11, items 2 and 3, through the survey that `estimate` and `report` run: ice VII
/// as two ice-Ic nets (tests/data/counts-ice-vii.yaml). Every sampled cell holds about a
/// hundred formula units or more; the largest exact cell (1x1x1, 8100 = 90² arrangements,
/// the square of the ice Ic count in REFERENCES.md) is sampled too and agrees with its
/// count (a `CrossCheck`); an extrapolation, when the budget allowed three cells, keeps a
/// degree of freedom and agrees within 4σ with the value ice VII must share with ice Ic and
/// ice Ih, W = 1.50742 per H2O: Nagle's series value (Nagle 1966, J. Math. Phys. 7, 1484,
/// 1.50685 ± 0.00015, from memory) raised by the 0.038 % that Hayashi, Muguruma & Okamoto
/// (arXiv:2009.11591, 2020) state their estimate lies from it (docs/validation.md, "The
/// reference value of ice Ih"); Ih = Ic within 1e-5: Xu, Lin & Zhang, arXiv:2511.22477.
#[test]
fn issue11_survey_samples_by_formula_units_and_cross_checks() {
    use groundcount::crosscheck::Route;
    use groundcount::estimate::{SurveyConfig, survey};
    let l = Lattice::from_file(&crate::util::fixture("counts-ice-vii.yaml")).unwrap();
    let config = SurveyConfig {
        budget: 8.0,
        max_exact_units: Some(16.0),
        ..SurveyConfig::default()
    };
    let s = in_pool(2, || survey(&l.crystal, &config, &Context::new())).unwrap();
    assert_eq!(
        s.exact.last().unwrap().count.as_ref().unwrap().to_string(),
        "8100"
    );
    let check = s
        .checks
        .iter()
        .find(|c| matches!(&c.route, Route::ExactCount { cells } if cells == "1x1x1 periodic"))
        .expect("the exact cell is sampled and checked");
    assert!(check.agrees(), "{check:?}");
    assert!(!s.sampled_sizes.is_empty(), "{:?}", s.notes);
    for cell in &s.sampled_sizes {
        assert!(
            cell.sampled.estimate.formula_units >= 96.0,
            "{}: {} formula units",
            cell.cells,
            cell.sampled.estimate.formula_units
        );
    }
    match &s.extrapolated {
        Some(x) => {
            assert!(x.details.dof >= 1);
            let (w, sigma) = (x.estimate.ln_w_per_unit, x.estimate.sigma_ln_w.unwrap());
            let published = 1.50742f64.ln();
            assert!(
                (w - published).abs() < 4.0 * sigma.hypot(1e-5 / 1.50742),
                "ln W = {w} ± {sigma} against ln 1.50742 = {published}"
            );
        }
        None => assert!(
            s.sampled_sizes.len() < 3
                && s.notes.iter().any(|n| matches!(
                    n,
                    groundcount::estimate::Note::MonteCarloTooFewCells { .. }
                )),
            "{:?}",
            s.notes
        ),
    }
}

/// Issue 13: `sample` on a weighted lattice file prints the entropy of the weighted
/// ensemble with its label, ln Z, ⟨ln w⟩ and every field with the mean it reached; JSON
/// carries them; an occupancy without --fields, a composition and several cells are
/// refused with words; shards of a weighted run merge.
#[test]
fn issue13_sample_takes_a_weighted_lattice_file() {
    let dir = std::env::temp_dir().join(format!("groundcount-weighted-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let ice = std::fs::read_to_string(lattice("square-ice.yaml")).unwrap();
    let file = dir.join("weighted.yaml");
    std::fs::write(
        &file,
        format!(
            "{ice}weights: [{{bond: h, states: [1.0, 2.5]}}]\noccupancy: [{{bond: v, state: 1, mean: 0.6}}]\n"
        ),
    )
    .unwrap();
    let f = file.to_str().unwrap();
    let base = [
        "sample",
        f,
        "--cells",
        "4x4",
        "--replicas",
        "4",
        "--sweeps",
        "40",
    ];
    // No fields: refused, naming the entry and the option.
    let o = crate::util::run(&base);
    assert_eq!(o.status.code(), Some(1));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("v state 1") && e.contains("--fields"), "{e}");
    let o = crate::util::run(&[&base[..], &["--fields", "0.4,0.1"]].concat());
    assert_eq!(o.status.code(), Some(1));
    // The table.
    let o = crate::util::run(&[&base[..], &["--fields", "0.4"]].concat());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let t = String::from_utf8_lossy(&o.stdout);
    for words in [
        "S/R per H2O",
        "entropy of the weighted ensemble",
        "ln Z per H2O",
        "⟨ln w⟩ per H2O",
        "occupancy 'v state 1': field h = 0.4",
        "mean reached",
        "(target 0.6)",
    ] {
        assert!(t.contains(words), "{words}: {t}");
    }
    // JSON: the entropy, ln Z and ⟨ln w⟩ fit together; the field and its mean.
    let j = crate::util::run_json(&[&base[..], &["--fields", "-0.2", "--format", "json"]].concat());
    let num = |k: &str| j[k].as_f64().unwrap_or_else(|| panic!("{k}: {j}"));
    let s = num("s_over_r");
    assert!((s + num("mean_ln_weight_per_unit") - num("ln_z_per_unit")).abs() < 1e-12);
    assert!(num("sigma_ln_z") > 0.0 && num("defect_free_samples") > 0.0);
    assert_eq!(j["fields"][0]["field"].as_f64(), Some(-0.2));
    assert_eq!(j["fields"][0]["kind"].as_str(), Some("occupancy"));
    assert!(j["fields"][0]["achieved_sigma"].as_f64().unwrap() > 0.0);
    // The stochastic solver of the fields: its path and verdict are printed.
    let o = crate::util::run(&[&base[..], &["--solve-fields", "6"]].concat());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let t = String::from_utf8_lossy(&o.stdout);
    assert!(
        t.contains("fields solved by Newton steps") && t.contains("fields [0] →"),
        "{t}"
    );
    let o = crate::util::run(
        &[
            &base[..],
            &["--solve-fields", "6", "--shard", "1/2", "--out", "x.json"],
        ]
        .concat(),
    );
    assert_eq!(o.status.code(), Some(1));
    // Two shards merge into the run of their replicas together.
    let mut parts = Vec::new();
    for k in 1..=2 {
        let out = dir.join(format!("part{k}.json"));
        let spec = format!("{k}/2");
        let o = crate::util::run(
            &[
                &base[..4],
                &["--replicas", "2", "--sweeps", "40", "--fields", "-0.2"],
                &["--shard", &spec, "--out", out.to_str().unwrap()],
            ]
            .concat(),
        );
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        parts.push(out);
    }
    let m = crate::util::run_json(&[
        "merge",
        parts[0].to_str().unwrap(),
        parts[1].to_str().unwrap(),
        "--format",
        "json",
    ]);
    assert_eq!(m["s_over_r"].as_f64(), Some(s));
    assert_eq!(m["fields"], j["fields"]);
    // A composition (canonical) and several cells are refused.
    std::fs::write(
        &file,
        format!("{ice}composition: [{{bonds: [h], state: 1, fraction: 0.5}}]\n"),
    )
    .unwrap();
    let o = crate::util::run(&[&base[..], &["--fields", "0"]].concat());
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("canonical"));
    std::fs::write(
        &file,
        format!("{ice}weights: [{{bond: h, states: [1.0, 2.5]}}]\n"),
    )
    .unwrap();
    let o = crate::util::run(&["sample", f, "--cells", "4x4,6x6"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("one --cells size"));
    std::fs::remove_dir_all(&dir).ok();
}
