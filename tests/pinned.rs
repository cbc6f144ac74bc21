//! Issue 13, held states: variables pinned at one state (`pinned:` in the lattice file).
//! Counts against brute force on the unpinned model, closed forms, and the decoupling of
//! kagome layers in spin ice under a [111] field.

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::context::Context;
use groundcount::counters::exact;
use groundcount::counters::transfer::torus;
use groundcount::model::{Model, Origin};
use num_bigint::BigUint;

use crate::util::lattice;

fn load(name: &str) -> Lattice {
    Lattice::from_file(&lattice(name)).unwrap()
}

fn model(l: &Lattice, cells: &str) -> Model {
    let cells = Cells::parse(cells, None, l.crystal.dimensions).unwrap();
    Model::new(&Cluster::new(&l.crystal, cells).unwrap()).unwrap()
}

/// The number of assignments of `m` that satisfy every constraint with every variable for
/// which `held` gives a state held there, by enumerating the others (brute force, no
/// frontier, no conditioning of tables).
fn brute_force_held(m: &Model, held: impl Fn(usize) -> Option<u32>) -> u64 {
    let free: Vec<usize> = (0..m.variables.len())
        .filter(|&v| held(v).is_none())
        .collect();
    assert!(free.iter().all(|&v| m.variables[v].states == 2));
    assert!(free.len() <= 26, "{} free variables", free.len());
    let mut values: Vec<u32> = (0..m.variables.len())
        .map(|v| held(v).unwrap_or(0))
        .collect();
    let mut total = 0;
    for a in 0u64..1 << free.len() {
        for (k, &v) in free.iter().enumerate() {
            values[v] = ((a >> k) & 1) as u32;
        }
        let ok = m.constraints.iter().all(|c| {
            let t = &m.tables[c.table];
            let (mut index, mut stride) = (0u64, 1u64);
            for &v in &c.scope {
                index += values[v] as u64 * stride;
                stride *= m.variables[v].states as u64;
            }
            t.allows(index)
        });
        total += u64::from(ok);
    }
    total
}

fn count(m: &Model) -> BigUint {
    exact::count(m, &Default::default(), &Context::new())
        .unwrap()
        .estimate
        .count
        .unwrap()
}

/// Spin ice with the apical spin M0 held at state 1 (lattices/spin-ice-111.yaml) counts as
/// the plain spin-ice model (lattices/spin-ice.yaml) with every M0 variable forced to 1 and
/// the rest enumerated: the held variable is read as a constant, not guessed.
#[test]
fn issue13_pinned_counts_equal_brute_force_on_the_unpinned_model() {
    let pinned = load("spin-ice-111.yaml");
    let plain = load("spin-ice.yaml");
    for cells in ["1x1x1", "2x1x1", "2x2x1", "2x2x2"] {
        let p = model(&pinned, cells);
        let m = model(&plain, cells);
        let expected = brute_force_held(&m, |v| match m.variables[v].origin {
            Origin::Site { site: 0, .. } => Some(1),
            _ => None,
        });
        assert_eq!(count(&p), BigUint::from(expected), "{cells}");
        // Held variables have one state and sit in no constraint.
        for (v, var) in p.variables.iter().enumerate() {
            assert_eq!(var.held.is_some(), var.states == 1);
            if var.held.is_some() {
                assert!(p.constraints.iter().all(|c| !c.scope.contains(&v)));
            }
        }
    }
}

/// Pauling's estimate with held spins: per cell, three free spins (ln 8) and two
/// tetrahedra, each allowing 3 of the 8 states of its free spins (up: one more in beside
/// the held one pointing in; down: two in, the held one pointing out), so W_P = (9/8)^(1/4)
/// per Dy of the crystal (closed form derived here). Without the pin, Pauling's 3/2 per
/// two spins would give the wrong (3/2)^(1/2) · …: a held spin counts one state.
#[test]
fn issue13_pauling_counts_a_held_spin_as_one_state() {
    let l = load("spin-ice-111.yaml");
    let p = l.pauling().unwrap();
    let closed = (9.0f64 / 8.0).powf(0.25);
    assert!(
        (p.w_per_unit() - closed).abs() < 1e-12,
        "{}",
        p.w_per_unit()
    );
}

/// The kagome layers decouple: a periodic L×L×L cell of the FCC primitive vectors holds L
/// layers perpendicular to [111], mapped onto each other by a cell translation, so the
/// count is an L-th power (81 = 9², 74088 = 42³, 30237384321 = 417⁴), and the count per
/// kagome spin falls towards the kagome-ice value 1.1137009 (lattices/kagome-ice.yaml)
/// from above.
#[test]
fn issue13_kagome_layers_decouple_under_a_111_field() {
    let l = load("spin-ice-111.yaml");
    let mut last = f64::INFINITY;
    for n in 2u32..=4 {
        let c = count(&model(&l, &format!("{n}x{n}x{n}")));
        let root = c.nth_root(n);
        assert_eq!(root.pow(n), c, "{n}x{n}x{n}: {c} is not an {n}-th power");
        // Three kagome spins per cell: ln W per kagome spin.
        let per_spin = (c.to_string().parse::<f64>().unwrap().ln() / (3 * n.pow(3)) as f64).exp();
        assert!(per_spin > 1.1137009 && per_spin < last, "{n}: {per_spin}");
        last = per_spin;
    }
}

/// Square ice with every vertical arrow held pointing up: at each vertex one vertical
/// arrow points in and one out, so the two horizontal arrows also point one in, one out,
/// and every row of horizontal arrows points one way: 2^rows on every torus (closed form).
/// Both exact routes agree with it: the frontier counter, and the trace of Tᴸ of the
/// transfer matrix (whose column then holds the pinned arrows).
#[test]
fn issue13_square_ice_with_held_vertical_arrows_counts_two_per_row() {
    let text = std::fs::read_to_string(lattice("square-ice.yaml")).unwrap()
        + "pinned:\n  - {bond: v, state: 1}\n";
    let l = Lattice::from_yaml(&text, "square-ice-held.yaml").unwrap();
    let mut traced = 0;
    for (a, b) in [(3, 3), (4, 5), (2, 40), (40, 2), (6, 6)] {
        let cells = Cells::parse(&format!("{a}x{b}"), None, 2).unwrap();
        let e = l.count_exact(&cells, &Default::default()).unwrap();
        let rows = BigUint::from(2u32).pow(b as u32);
        assert_eq!(e.count.unwrap(), rows, "{a}x{b}");
        if let Some(route) = torus::route(&l.crystal, &cells, 1 << 12) {
            let trace = route.count(e.formula_units, "trace").unwrap();
            assert_eq!(trace.count.unwrap(), rows, "{a}x{b} by the trace");
            traced += 1;
        }
    }
    assert!(traced >= 3, "the trace ran on {traced} tori");
}

/// The Monte Carlo reads the same held spins: thermodynamic integration on the 3x3x3 cell
/// agrees within 4σ with the exact count 74088 = 42³ (loop moves still apply: the held
/// spins lie in no constraint).
#[test]
fn issue13_sampling_with_held_spins_agrees_with_the_exact_count() {
    use groundcount::counters::sampling::SampleConfig;
    let l = load("spin-ice-111.yaml");
    let cells = Cells::parse("3x3x3", None, 3).unwrap();
    let config = SampleConfig {
        seed: 3,
        ..Default::default()
    };
    let s = l.sample(&cells, &config).unwrap().estimate;
    let exact = 74088f64.ln() / 108.0;
    let sigma = s.sigma_ln_w.unwrap();
    assert!(
        (s.ln_w_per_unit - exact).abs() < 4.0 * sigma && sigma < 0.005,
        "{} ± {sigma} against {exact}",
        s.ln_w_per_unit
    );
}
