//! Split Monte Carlo runs: shards merged give bitwise the numbers of one run, and `merge`
//! refuses parts that do not belong together.

use std::path::{Path, PathBuf};

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::context::Context;
use groundcount::counters::sampling::shard::{self, Shard};
use groundcount::counters::sampling::{self, SampleConfig};
use groundcount::model::Model;

use crate::util::{lattice, run, run_json};

fn config(replicas: usize) -> SampleConfig {
    SampleConfig {
        seed: 7,
        replicas,
        sweeps: 40,
        equilibration: 10,
        nodes: 21,
        max_extensions: 0,
        ..SampleConfig::default()
    }
}

fn ice_ih() -> (Lattice, Cells, Model) {
    let l = Lattice::from_file(&lattice("ice-ih.yaml")).unwrap();
    let cells = Cells::parse("2x1x1", None, 3).unwrap();
    let model = Model::new(&Cluster::new(&l.crystal, cells.clone()).unwrap()).unwrap();
    (l, cells, model)
}

/// Three shards of 3 replicas, written to JSON and read back, merge to exactly the estimate
/// of one run of 9 replicas (the same replica streams, combined in the same order).
#[test]
fn merged_shards_equal_one_run() {
    let (l, cells, model) = ice_ih();
    let whole = sampling::count(&model, &config(9), &Context::new()).unwrap();
    let parts: Vec<(PathBuf, Shard)> = [2, 3, 1]
        .iter()
        .map(|&k| {
            let (s, _) = shard::run_shard(
                &l,
                "ice-ih.yaml",
                &cells,
                &model,
                &config(3),
                (k, 3),
                &Context::new(),
            )
            .unwrap();
            let path = PathBuf::from(format!("part{k}.json"));
            let back = Shard::from_json(&s.to_json(), &path).unwrap();
            (path, back)
        })
        .collect();
    let merged = shard::merge(&parts).unwrap();
    assert_eq!(merged.present, vec![1, 2, 3]);
    let (a, b) = (&whole.estimate, &merged.sampled.estimate);
    assert_eq!(a.ln_w_per_unit.to_bits(), b.ln_w_per_unit.to_bits());
    assert_eq!(
        a.sigma_ln_w.unwrap().to_bits(),
        b.sigma_ln_w.unwrap().to_bits()
    );
    assert_eq!(whole.per_replica, merged.sampled.per_replica);
    assert_eq!(whole.replicas, 9);
    assert_eq!(merged.sampled.replicas, 9);
}

fn write_shard(dir: &Path, name: &str, extra: &[&str]) -> PathBuf {
    write_shard_of(dir, name, "ice-ih.yaml", "2x1x1", extra)
}

fn write_shard_of(dir: &Path, name: &str, file: &str, cells: &str, extra: &[&str]) -> PathBuf {
    let out = dir.join(name);
    let file = lattice(file);
    let mut args = vec![
        "sample",
        file.to_str().unwrap(),
        "--cells",
        cells,
        "--replicas",
        "2",
        "--nodes",
        "9",
        "-q",
        "--out",
        out.to_str().unwrap(),
    ];
    if !extra.contains(&"--sweeps") {
        args.extend(["--sweeps", "20"]);
    }
    args.extend_from_slice(extra);
    let o = run(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    out
}

fn merge_err(parts: &[&Path]) -> String {
    let mut args = vec!["merge"];
    args.extend(parts.iter().map(|p| p.to_str().unwrap()));
    let o = run(&args);
    assert_eq!(o.status.code(), Some(1), "merge should refuse {parts:?}");
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// The command line: shards merge into the JSON of one run (shards never repeat themselves
/// after a failed equilibration check, so the run compared has `--max-extensions 0`), and
/// every kind of mismatch,
/// duplicate or damage is refused with the file named and the reason given.
#[test]
fn merge_command_combines_and_refuses() {
    let dir = std::env::temp_dir().join(format!("groundcount-shards-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let p1 = write_shard(&dir, "p1.json", &["--shard", "1/2"]);
    let p2 = write_shard(&dir, "p2.json", &["--shard", "2/2"]);

    // merged = one run of 4 replicas
    let merged = run_json(&[
        "merge",
        p1.to_str().unwrap(),
        p2.to_str().unwrap(),
        "--format",
        "json",
    ]);
    let file = lattice("ice-ih.yaml");
    let whole = run_json(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "2x1x1",
        "--replicas",
        "4",
        "--sweeps",
        "20",
        "--nodes",
        "9",
        "--max-extensions",
        "0",
        "--format",
        "json",
    ]);
    assert_eq!(merged["w_per_unit"], whole["w_per_unit"]);
    assert_eq!(merged["w_uncertainty"], whole["w_uncertainty"]);
    assert_eq!(merged["replicas"], 4);
    assert_eq!(merged["shards_merged"], serde_json::json!([1, 2]));

    // the same shard twice
    let e = merge_err(&[&p1, &p1]);
    assert!(e.contains("given twice"), "{e}");
    // another seed
    let q2 = write_shard(&dir, "q2.json", &["--shard", "2/2", "--seed", "9"]);
    let e = merge_err(&[&p1, &q2]);
    assert!(e.contains("q2.json") && e.contains("seed is 9"), "{e}");
    // another lattice
    let ic = write_shard_of(&dir, "ic.json", "ice-ic.yaml", "1x1x1", &["--shard", "2/2"]);
    let e = merge_err(&[&p1, &ic]);
    assert!(e.contains("content hash"), "{e}");
    // an edited number
    let text = std::fs::read_to_string(&p2).unwrap();
    let edited = dir.join("edited.json");
    let from = text.find("\"up\": [").unwrap() + 40;
    let at = from + text[from..].find(|c: char| c.is_ascii_digit()).unwrap();
    let mut bytes = text.into_bytes();
    bytes[at] = if bytes[at] == b'1' { b'2' } else { b'1' };
    std::fs::write(&edited, &bytes).unwrap();
    let e = merge_err(&[&p1, &edited]);
    assert!(e.contains("edited.json") && e.contains("checksum"), "{e}");
    // a truncated file
    let cut = dir.join("cut.json");
    std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
    let e = merge_err(&[&p1, &cut]);
    assert!(e.contains("cut.json") && e.contains("truncated"), "{e}");
    // not a shard at all
    let e = merge_err(&[&file]);
    assert!(e.contains("not a readable shard file"), "{e}");
    // a shard of the earlier format (one pass per replica)
    let old = dir.join("old.json");
    let text = std::fs::read_to_string(&p2).unwrap().replace(
        "Monte Carlo shard, version 3",
        "Monte Carlo shard, version 1",
    );
    std::fs::write(&old, text).unwrap();
    let e = merge_err(&[&p1, &old]);
    assert!(
        e.contains("old.json") && e.contains("earlier groundcount"),
        "{e}"
    );
    // --shard without --out, and a bad K/N
    let o = run(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "2x1x1",
        "--shard",
        "1/2",
    ]);
    assert_eq!(o.status.code(), Some(1));
    let o = run(&[
        "sample",
        file.to_str().unwrap(),
        "--cells",
        "2x1x1",
        "--shard",
        "3/2",
        "--out",
        dir.join("x.json").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("K/N"));
    std::fs::remove_dir_all(&dir).ok();
}

/// Issue 11, item 9: shard files written with `--sweeps` 41, 300 or 1200 were refused by
/// `merge` as damaged (their mean energies did not read back bit for bit, so the checksum
/// failed). Untouched shards of many settings must merge, to the numbers of one run.
#[test]
fn issue11_untouched_shards_merge_for_any_sweeps() {
    let dir = std::env::temp_dir().join(format!("groundcount-sweeps-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = lattice("ice-ih.yaml");
    for (sweeps, seed) in [
        ("41", "1"),
        ("300", "2"),
        ("1200", "3"),
        ("77", "4"),
        ("13", "5"),
    ] {
        let with = |shard: &'static str| ["--sweeps", sweeps, "--seed", seed, "--shard", shard];
        let p1 = write_shard(&dir, &format!("s{sweeps}-1.json"), &with("1/2"));
        let p2 = write_shard(&dir, &format!("s{sweeps}-2.json"), &with("2/2"));
        let merged = run_json(&[
            "merge",
            p1.to_str().unwrap(),
            p2.to_str().unwrap(),
            "--format",
            "json",
        ]);
        let whole = run_json(&[
            "sample",
            file.to_str().unwrap(),
            "--cells",
            "2x1x1",
            "--replicas",
            "4",
            "--nodes",
            "9",
            "--sweeps",
            sweeps,
            "--seed",
            seed,
            "--max-extensions",
            "0",
            "--format",
            "json",
        ]);
        assert_eq!(
            merged["w_per_unit"], whole["w_per_unit"],
            "--sweeps {sweeps}"
        );
        assert_eq!(
            merged["w_uncertainty"], whole["w_uncertainty"],
            "--sweeps {sweeps}"
        );
    }
    std::fs::remove_dir_all(&dir).ok();
}
