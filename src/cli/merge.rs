//! `groundcount merge PART.json...`: combine the shards of a split Monte Carlo run into one
//! estimate (see [`groundcount::counters::sampling::shard`]).

use std::path::PathBuf;

use groundcount::counters::sampling::shard::{self, Shard};

use super::sample::{Shown, render};
use super::{Common, with_threads};

/// Arguments of `merge`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Shard files written by `groundcount sample --shard K/N --out FILE`.
    #[arg(required = true, value_name = "PART.json")]
    parts: Vec<PathBuf>,
    #[command(flatten)]
    common: Common,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let mut parts = Vec::with_capacity(args.parts.len());
    for path in &args.parts {
        let text = std::fs::read_to_string(path)
            .map_err(|e| anyhow::anyhow!("{}: cannot read the shard file: {e}", path.display()))?;
        parts.push((path.clone(), Shard::from_json(&text, path)?));
    }
    let merged = with_threads(args.common.threads, || shard::merge(&parts))??;
    let shown = Shown {
        file: merged.lattice_file.clone(),
        nodes: merged.settings.nodes,
        target_error: None,
        max_replicas: merged.settings.replicas_per_shard * merged.shards,
    };
    render(
        args.common.format,
        &merged.lattice,
        &shown,
        &merged.model,
        &merged.sampled,
        Some((&merged.present, merged.shards)),
    )
}
