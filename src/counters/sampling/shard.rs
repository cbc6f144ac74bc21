//! Shards: one Monte Carlo run split into independent parts, run anywhere and merged.
//!
//! # What it is for
//!
//! A run of R replicas per shard split into N shards is the run of N·R replicas: shard K
//! (1-based) runs the replicas (K−1)·R … K·R − 1, whose random streams depend only on the
//! seed and the replica index ([`super::stream`]). Each shard writes a JSON file with the
//! raw per-replica integrands; [`merge`] checks the parts against each other and combines
//! them in replica order, so that merging all N shards gives bitwise the numbers of one
//! run of N·R replicas on one machine.
//!
//! # The file
//!
//! A [`Shard`] carries everything a merge needs and nothing it must trust: the lattice
//! file's text (the merge rebuilds the model from it and checks its content hash), the cell,
//! the settings, the groundcount version, the shard index, the runs, and a checksum
//! (FNV-1a of the file with the checksum field empty) that detects damaged files.
//!
//! # Arguments and returns
//!
//! [`run_shard`] runs one shard of a model; [`Shard::to_json`] and [`Shard::from_json`]
//! write and read it; [`merge`] takes the parts with their file names and returns the
//! rebuilt lattice, model and the merged [`Sampled`], or an [`Error::Shard`] that names the
//! file and what is wrong (another lattice, cell, method, setting or version; a shard given
//! twice; a damaged or truncated file).
//!
//! # Complexity
//!
//! A shard costs 1/N of the whole run; a merge costs one model build and O(N·R·nodes).

use std::path::{Path, PathBuf};
use std::time::Instant;

use serde::{Deserialize, Serialize};

use super::{Plan, Run, SampleConfig, Sampled};
use crate::Lattice;
use crate::cluster::{Cells, Cluster};
use crate::counters::{Context, Counted};
use crate::error::{Error, Result};
use crate::model::Model;

/// The `format` field of every shard file. Version 3 added the conjugate fields to the
/// settings and, for a weighted lattice, each replica's defect-free sums (`ground`);
/// version 2 files (unweighted lattices only) hold the same numbers and still merge.
pub const FORMAT: &str = "groundcount Monte Carlo shard, version 3";

/// The format before the weighted sums: read as before (unweighted runs are sampled
/// exactly as in version 3).
const COMPATIBLE_FORMAT: &str = "groundcount Monte Carlo shard, version 2";

/// The `format` of the files earlier versions wrote (one pass per replica instead of two).
const OLDER_FORMATS: [&str; 1] = ["groundcount Monte Carlo shard, version 1"];

/// The one method shards exist for.
pub const METHOD: &str = "thermodynamic-integration";

/// The settings that must agree between the shards of one run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Settings {
    /// Seed of every random stream.
    pub seed: u64,
    /// Replicas in every shard.
    pub replicas_per_shard: usize,
    /// Measured sweeps per node and replica.
    pub sweeps: usize,
    /// Sweeps before measuring at each node.
    pub equilibration: usize,
    /// Quadrature nodes.
    pub nodes: usize,
    /// Largest β sampled (resolved, never the default marker).
    pub beta_max: f64,
    /// Loop moves on.
    pub loops: bool,
    /// Defect-focused moves on (absent, and off, in files written before them).
    #[serde(default)]
    pub defect_moves: bool,
    /// The conditional estimate of E at small β (absent, and off, in files written
    /// before it).
    #[serde(default)]
    pub conditional: bool,
    /// Replicas as 64 chains in the bits of machine words (absent, and off, in files
    /// written before them).
    #[serde(default)]
    pub lanes: bool,
    /// Measured sweeps at every node (index 0 unused), as the pilot allocated them (absent
    /// in files written before the allocation: equal sweeps).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub node_sweeps: Vec<usize>,
    /// The conjugate field of every imposed mean (empty without imposed means; absent in
    /// version 2 files).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub fields: Vec<f64>,
}

/// One shard of a split run, as written to its file.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct Shard {
    /// The JSON schema version ([`crate::json::SCHEMA_VERSION`]), the first key as in every
    /// document groundcount writes; absent in files written before it (their checksum does
    /// not cover it), which are read as before.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub schema_version: Option<u32>,
    /// [`FORMAT`].
    pub format: String,
    /// groundcount version that ran the shard.
    pub version: String,
    /// [`METHOD`].
    pub method: String,
    /// The lattice file as the user named it.
    pub lattice_file: String,
    /// FNV-1a hash of the lattice file's text.
    pub content_hash: String,
    /// The lattice file's text.
    pub lattice_text: String,
    /// The periodic cell, e.g. `8x8x8` (the cell notation of [`crate::cluster::Cells::parse`]).
    pub cells: String,
    /// Settings shared by every shard.
    pub settings: Settings,
    /// This shard's index, 1-based.
    pub shard: usize,
    /// Shards in the whole run.
    pub shards: usize,
    /// Wall time of this shard, s.
    pub seconds: f64,
    /// The replicas this shard ran, in index order.
    pub runs: Vec<Run>,
    /// FNV-1a of this file's JSON with this field empty.
    pub checksum: String,
}

impl Shard {
    /// The file's text, with its checksum.
    pub fn to_json(&self) -> String {
        let mut s = self.clone();
        s.checksum = String::new();
        s.checksum = crate::content_hash(&canonical(&s));
        serde_json::to_string_pretty(&s).expect("a shard serialises") + "\n"
    }

    /// Read a shard file's text; `path` names it in messages. Checks the format and the
    /// checksum only; [`merge`] checks the rest.
    pub fn from_json(text: &str, path: &Path) -> Result<Shard> {
        let bad = |message: String| Error::Shard {
            path: path.to_path_buf(),
            message,
        };
        let value: serde_json::Value = serde_json::from_str(text).map_err(|e| {
            bad(format!(
                "not a readable shard file (damaged or truncated JSON: {e})"
            ))
        })?;
        match value.get("format").and_then(|f| f.as_str()) {
            Some(FORMAT | COMPATIBLE_FORMAT) => {}
            Some(old) if OLDER_FORMATS.contains(&old) => {
                return Err(bad(format!(
                    "a shard file of an earlier groundcount (\"{old}\"), whose replicas were sampled differently: run its shards again with this version"
                )));
            }
            _ => {
                return Err(bad(format!(
                    "not a groundcount shard file: expected \"format\": \"{FORMAT}\""
                )));
            }
        }
        let shard: Shard =
            serde_json::from_value(value).map_err(|e| bad(format!("damaged shard file: {e}")))?;
        let mut blank = shard.clone();
        blank.checksum = String::new();
        if crate::content_hash(&canonical(&blank)) != shard.checksum {
            return Err(bad(
                "damaged shard file: its checksum does not match its content (edited or corrupted after it was written)".into(),
            ));
        }
        Ok(shard)
    }
}

/// The first setting in which two shards differ: (name, this value, that value).
fn first_difference(a: &Settings, b: &Settings) -> Option<(&'static str, String, String)> {
    let pairs: [(&'static str, String, String); 12] = [
        ("the seed", a.seed.to_string(), b.seed.to_string()),
        (
            "the number of replicas per shard",
            a.replicas_per_shard.to_string(),
            b.replicas_per_shard.to_string(),
        ),
        (
            "the number of sweeps",
            a.sweeps.to_string(),
            b.sweeps.to_string(),
        ),
        (
            "the number of equilibration sweeps",
            a.equilibration.to_string(),
            b.equilibration.to_string(),
        ),
        (
            "the number of quadrature nodes",
            a.nodes.to_string(),
            b.nodes.to_string(),
        ),
        ("β_max", a.beta_max.to_string(), b.beta_max.to_string()),
        ("loop moves", a.loops.to_string(), b.loops.to_string()),
        (
            "defect-focused moves",
            a.defect_moves.to_string(),
            b.defect_moves.to_string(),
        ),
        (
            "conditional estimate",
            a.conditional.to_string(),
            b.conditional.to_string(),
        ),
        (
            "chains per replica",
            a.lanes.to_string(),
            b.lanes.to_string(),
        ),
        (
            "the measured sweeps per node",
            format!("{:?}", a.node_sweeps),
            format!("{:?}", b.node_sweeps),
        ),
        (
            "the conjugate fields",
            format!("{:?}", a.fields),
            format!("{:?}", b.fields),
        ),
    ];
    pairs.into_iter().find(|(_, x, y)| x != y)
}

/// The replica indices of shard `shard` (1-based) of `r` replicas each, or `None` when they
/// would not fit in a `usize`.
fn replica_range(shard: usize, r: usize) -> Option<std::ops::Range<usize>> {
    let from = shard.checked_sub(1)?.checked_mul(r)?;
    Some(from..from.checked_add(r)?)
}

/// The text the checksum is taken of.
fn canonical(s: &Shard) -> String {
    serde_json::to_string(s).expect("a shard serialises")
}

/// The sampling configuration a shard's settings stand for.
fn config_of(settings: &Settings) -> SampleConfig {
    SampleConfig {
        seed: settings.seed,
        replicas: settings.replicas_per_shard,
        sweeps: settings.sweeps,
        equilibration: settings.equilibration,
        nodes: settings.nodes,
        beta_max: Some(settings.beta_max),
        loops: settings.loops,
        defect_moves: settings.defect_moves,
        conditional: settings.conditional,
        lanes: settings.lanes,
        allocate: false,
        node_sweeps: settings.node_sweeps.clone(),
        target_error: None,
        max_replicas: settings.replicas_per_shard,
        max_extensions: 0,
        fields: settings.fields.clone(),
    }
}

/// Run shard `shard` (1-based) of `shards` (the pair `(shard, shards)`) of a model built from `lattice`; `config.replicas`
/// replicas per shard (`target_error` is not allowed: every shard runs a fixed number).
pub fn run_shard(
    lattice: &Lattice,
    lattice_file: &str,
    cells: &Cells,
    model: &Model,
    config: &SampleConfig,
    (shard, shards): (usize, usize),
    context: &Context,
) -> Result<(Shard, Counted<Sampled>)> {
    if shards == 0 || shard == 0 || shard > shards {
        return Err(Error::Setting(format!(
            "a shard is K/N with 1 ≤ K ≤ N, not {shard}/{shards}"
        )));
    }
    if config.target_error.is_some() {
        return Err(Error::Setting(
            "a shard runs a fixed number of replicas: set `replicas`, not `target_error`".into(),
        ));
    }
    if cells.periodic[..cells.dimensions].iter().any(|p| !p) {
        return Err(Error::Setting("shards are for periodic cells only".into()));
    }
    let r = config.replicas;
    let Some(range) = replica_range(shard, r) else {
        return Err(Error::Setting(format!(
            "shard {shard}/{shards} of {r} replicas each would run replicas beyond {}: use fewer shards or fewer replicas per shard",
            usize::MAX
        )));
    };
    let start = Instant::now();
    // A shard never extends itself: every shard of a run must hold the same settings.
    let config = SampleConfig {
        max_extensions: 0,
        ..config.clone()
    };
    let plan = Plan::new(model, &config)?;
    let runs = plan.run(range.clone(), context);
    if runs.len() < range.len() {
        return Err(Error::Interrupted {
            what: format!(
                "running shard {shard}/{shards} ({} of its {r} replicas finished; a shard is written only when complete)",
                runs.len()
            ),
        });
    }
    let seconds = start.elapsed().as_secs_f64();
    let sampled = plan.finish(&runs, seconds)?;
    let settings = Settings {
        seed: config.seed,
        replicas_per_shard: r,
        sweeps: config.sweeps,
        equilibration: config.equilibration,
        nodes: config.nodes,
        beta_max: plan.beta_max(),
        loops: config.loops,
        defect_moves: config.defect_moves,
        conditional: config.conditional,
        lanes: plan.chains_per_replica() > 1,
        node_sweeps: plan.node_sweeps().to_vec(),
        fields: config.fields.clone(),
    };
    let out = Shard {
        schema_version: Some(crate::json::SCHEMA_VERSION),
        format: FORMAT.into(),
        version: env!("CARGO_PKG_VERSION").into(),
        method: METHOD.into(),
        lattice_file: lattice_file.into(),
        content_hash: lattice.content_hash.clone(),
        lattice_text: lattice.text.clone(),
        cells: cells.counts[..cells.dimensions]
            .iter()
            .map(|n| n.to_string())
            .collect::<Vec<_>>()
            .join("x"),
        settings,
        shard,
        shards,
        seconds,
        runs,
        checksum: String::new(),
    };
    Ok((out, sampled))
}

/// Merged shards: the rebuilt lattice and model, and the combined estimate.
pub struct Merged {
    /// The lattice, rebuilt from the text the shards carry.
    pub lattice: Lattice,
    /// The lattice file as named when the shards ran.
    pub lattice_file: String,
    /// The model of the cell.
    pub model: Model,
    /// The combined estimate (replicas of every shard, in replica order).
    pub sampled: Counted<Sampled>,
    /// The settings of the run.
    pub settings: Settings,
    /// The shard indices merged, sorted.
    pub present: Vec<usize>,
    /// Shards in the whole run.
    pub shards: usize,
}

/// Check shards against each other and combine them. `parts` pairs every shard with its
/// file (for messages). Shards of the run that are missing are allowed (the estimate uses
/// the replicas present; [`Merged::present`] says which); anything inconsistent is refused.
pub fn merge(parts: &[(PathBuf, Shard)]) -> Result<Merged> {
    let Some((first_path, first)) = parts.first() else {
        return Err(Error::Setting("merge needs at least one shard file".into()));
    };
    let bad = |path: &Path, message: String| Error::Shard {
        path: path.to_path_buf(),
        message,
    };
    let mut seen: Vec<(usize, &PathBuf)> = Vec::new();
    for (path, s) in parts {
        if s.method != METHOD {
            return Err(bad(
                path,
                format!("method \"{}\", expected \"{METHOD}\"", s.method),
            ));
        }
        let differs = |what: &str, this: String, that: String| {
            bad(
                path,
                format!(
                    "{what} is {this} but {} has {that}: shards of different runs cannot be merged",
                    first_path.display()
                ),
            )
        };
        if s.content_hash != first.content_hash {
            return Err(differs(
                "the lattice (content hash)",
                s.content_hash.clone(),
                first.content_hash.clone(),
            ));
        }
        if s.cells != first.cells {
            return Err(differs("the cell", s.cells.clone(), first.cells.clone()));
        }
        if s.version != first.version {
            return Err(differs(
                "the groundcount version",
                s.version.clone(),
                first.version.clone(),
            ));
        }
        if let Some((what, this, that)) = first_difference(&s.settings, &first.settings) {
            return Err(differs(what, this, that));
        }
        if s.shards != first.shards {
            return Err(differs(
                "the number of shards",
                s.shards.to_string(),
                first.shards.to_string(),
            ));
        }
        if s.shard == 0 || s.shard > s.shards {
            return Err(bad(
                path,
                format!("shard index {} outside 1..{}", s.shard, s.shards),
            ));
        }
        if let Some((_, other)) = seen.iter().find(|(k, _)| *k == s.shard) {
            return Err(bad(
                path,
                format!(
                    "shard {}/{} is given twice (also {}): merging it twice would count its replicas twice",
                    s.shard,
                    s.shards,
                    other.display()
                ),
            ));
        }
        seen.push((s.shard, path));
        let r = s.settings.replicas_per_shard;
        let Some(range) = replica_range(s.shard, r) else {
            return Err(bad(
                path,
                format!(
                    "damaged shard file: shard {} of {r} replicas each names replicas beyond {}",
                    s.shard,
                    usize::MAX
                ),
            ));
        };
        let expected: Vec<usize> = range.collect();
        let got: Vec<usize> = s.runs.iter().map(|run| run.replica).collect();
        if got != expected {
            return Err(bad(
                path,
                format!(
                    "damaged shard file: shard {} should hold replicas {}..{}",
                    s.shard,
                    expected.first().copied().unwrap_or(0),
                    expected.last().copied().unwrap_or(0)
                ),
            ));
        }
        for run in &s.runs {
            let fine = |e: &[f64]| e.len() == s.settings.nodes && e.iter().all(|x| x.is_finite());
            if !fine(&run.up) || !fine(&run.down) {
                return Err(bad(
                    path,
                    format!(
                        "damaged shard file: replica {} needs {} finite energies",
                        run.replica, s.settings.nodes
                    ),
                ));
            }
        }
    }
    if crate::content_hash(&first.lattice_text) != first.content_hash {
        return Err(bad(
            first_path,
            "damaged shard file: the lattice text does not match its content hash".into(),
        ));
    }
    let lattice = Lattice::from_yaml(&first.lattice_text, &first.lattice_file)?;
    let cells = Cells::parse(&first.cells, None, lattice.crystal.dimensions)?;
    let cluster = Cluster::new(&lattice.crystal, cells)?;
    let model = Model::new(&cluster)?;
    let config = config_of(&first.settings);
    let plan = Plan::new(&model, &config)?;
    let mut runs: Vec<Run> = parts
        .iter()
        .flat_map(|(_, s)| s.runs.iter().cloned())
        .collect();
    runs.sort_by_key(|r| r.replica);
    if runs.len() < 2 {
        return Err(bad(
            first_path,
            "an error bar needs at least 2 replicas in all".into(),
        ));
    }
    // The defect-free sums must fit the model: present exactly for a weighted lattice,
    // one count per imposed mean.
    let k = model.means.len();
    for (path, s) in parts {
        for run in &s.runs {
            let fits = match &run.ground {
                None => !model.is_weighted(),
                Some(g) => {
                    model.is_weighted()
                        && g.counts.len() == k
                        && g.products.len() == k * (k + 1) / 2
                        && g.ln_w.is_finite()
                        && g.counts.iter().chain(&g.products).all(|x| x.is_finite())
                }
            };
            if !fits && s.format == COMPATIBLE_FORMAT {
                return Err(bad(
                    path,
                    format!(
                        "a shard file of an earlier groundcount (\"{COMPATIBLE_FORMAT}\"), which sampled this weighted lattice as if every state weighed 1: run its shards again with this version"
                    ),
                ));
            }
            if !fits {
                return Err(bad(
                    path,
                    format!(
                        "damaged shard file: replica {} {}",
                        run.replica,
                        if model.is_weighted() {
                            format!(
                                "needs the defect-free sums of a weighted lattice with {k} imposed means"
                            )
                        } else {
                            "carries defect-free sums, but the lattice is not weighted".to_string()
                        }
                    ),
                ));
            }
        }
    }
    let seconds = parts.iter().map(|(_, s)| s.seconds).sum();
    let sampled = plan.finish(&runs, seconds)?;
    let mut present: Vec<usize> = seen.iter().map(|(k, _)| *k).collect();
    present.sort_unstable();
    drop(plan);
    Ok(Merged {
        lattice_file: first.lattice_file.clone(),
        settings: first.settings.clone(),
        shards: first.shards,
        lattice,
        model,
        sampled,
        present,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A shard whose runs hold the given energies, every other field filled in.
    fn shard_with(energies: Vec<Vec<f64>>, seconds: f64, beta_max: f64) -> Shard {
        let nodes = energies.first().map_or(0, Vec::len);
        Shard {
            schema_version: Some(crate::json::SCHEMA_VERSION),
            format: FORMAT.into(),
            version: "test".into(),
            method: METHOD.into(),
            lattice_file: "x.yaml".into(),
            content_hash: "0".into(),
            lattice_text: "name: x\n".into(),
            cells: "2x2x2".into(),
            settings: Settings {
                seed: 1,
                replicas_per_shard: energies.len(),
                sweeps: 41,
                equilibration: 10,
                nodes,
                beta_max,
                loops: true,
                defect_moves: true,
                conditional: true,
                lanes: false,
                node_sweeps: Vec::new(),
                fields: Vec::new(),
            },
            shard: 1,
            shards: 1,
            seconds,
            runs: energies
                .into_iter()
                .enumerate()
                .map(|(replica, energy)| Run {
                    replica,
                    up: energy.iter().map(|e| e * 1.5).collect(),
                    down: energy,
                    flipped: 3,
                    attempted: 7,
                    ground: None,
                })
                .collect(),
            checksum: String::new(),
        }
    }

    /// Issue 12: a shard file starts with `schema_version` like every document; a file
    /// written before it had none, and still reads (its checksum never covered the key).
    #[test]
    fn issue12_shard_files_carry_the_schema_version_and_old_ones_still_read() {
        let s = shard_with(vec![vec![1.0, 0.5, 0.25]], 1.0, 2.0);
        let text = s.to_json();
        assert!(text.starts_with("{\n  \"schema_version\": 1,"), "{text}");
        let back = Shard::from_json(&text, Path::new("new.json")).unwrap();
        assert_eq!(back.schema_version, Some(1));
        let mut old = s.clone();
        old.schema_version = None;
        let text = old.to_json();
        assert!(!text.contains("schema_version"));
        let back = Shard::from_json(&text, Path::new("old.json")).unwrap();
        assert_eq!(back.schema_version, None);
    }

    /// Issue 11, item 9: untouched shard files were refused as damaged for most sweep
    /// values, because a mean energy such as 123/41 did not read back bit for bit and the
    /// checksum failed. Every ratio k/s for s up to 2000 and a spread of k, and floats of
    /// every magnitude, must read back exactly and pass the checksum.
    #[test]
    fn issue11_shard_floats_read_back_bit_for_bit() {
        let mut energies = Vec::new();
        for sweeps in 1..=2000u64 {
            let run: Vec<f64> = [1u64, 7, 41, 123, 999, 4097, 65_537, 1_234_567]
                .iter()
                .map(|&k| (k * 37 + sweeps) as f64 / sweeps as f64)
                .collect();
            energies.push(run);
        }
        // Floats from a simple generator over many magnitudes, and awkward values.
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        let mut odd = Vec::new();
        for _ in 0..4000 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let mantissa = (x >> 11) as f64 / (1u64 << 53) as f64;
            let exponent = ((x & 0xff) as i32) - 128;
            odd.push(mantissa * 2f64.powi(exponent));
        }
        odd.extend([
            0.0,
            5e-324,
            f64::MIN_POSITIVE,
            f64::MAX,
            0.1 + 0.2,
            1.0 / 3.0,
            2f64.sqrt(),
        ]);
        for chunk in odd.chunks(8) {
            if chunk.len() == 8 {
                energies.push(chunk.to_vec());
            }
        }
        let shard = shard_with(energies, 12.345678901234567, 9.926_022_153_419_93);
        let text = shard.to_json();
        let back = Shard::from_json(&text, Path::new("part.json")).expect("reads back");
        for (a, b) in shard.runs.iter().zip(&back.runs) {
            let bits = |r: &Run| {
                r.up.iter()
                    .chain(&r.down)
                    .map(|e| e.to_bits())
                    .collect::<Vec<_>>()
            };
            assert_eq!(bits(a), bits(b), "replica {}", a.replica);
        }
        assert_eq!(shard.seconds.to_bits(), back.seconds.to_bits());
        assert_eq!(
            shard.settings.beta_max.to_bits(),
            back.settings.beta_max.to_bits()
        );
        // The file written again from what was read is the same text.
        assert_eq!(back.to_json(), text);
    }
}
