//! `groundcount import FILE.cif [-o FILE] [--block NAME]`: write the lattice file of a
//! published structure, with comments that say where each part came from; and the loading
//! of a CIF given directly to any command that takes a lattice file.

use std::path::{Path, PathBuf};

use groundcount::{Lattice, cif, spec};

/// Arguments of `import`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Structure file (CIF 1.1 or 2.0).
    file: PathBuf,
    /// Write the lattice file here instead of to standard output.
    #[arg(short, long)]
    output: Option<PathBuf>,
    /// The data block to read, by name (needed when the file holds several structures).
    #[arg(long)]
    block: Option<String>,
    /// No summary on standard error.
    #[arg(long, short)]
    quiet: bool,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    if let Some(o) = &args.output {
        super::check_output_file(o, "-o")?;
    }
    let bytes = spec::read_file(&args.file)?;
    let options = cif::Options {
        block: args.block.clone(),
    };
    let imported =
        cif::import(&bytes, &args.file, &options).map_err(|e| with_hints(e, &args.file))?;
    if imported.pending.is_empty() {
        // The written file must load as a lattice file; if not, that is a defect here.
        imported.lattice(&args.file).map_err(|e| {
            anyhow::anyhow!(
                "the lattice file written from {} does not load ({e}); this is a defect of \
                 groundcount, please report it with the structure file",
                args.file.display()
            )
        })?;
    }
    let mut summary = format!(
        "read {}, data block '{}':\n",
        args.file.display(),
        imported.block
    );
    for line in &imported.summary {
        summary += &format!("  {line}\n");
    }
    for line in &imported.pending {
        summary += &format!("  not supported yet, written as comments only: {line}\n");
    }
    match &args.output {
        Some(out) => {
            let tmp = out.with_extension(format!("import-{}.tmp", std::process::id()));
            std::fs::write(&tmp, &imported.yaml)
                .map_err(|e| anyhow::anyhow!("-o {}: cannot write: {e}", out.display()))?;
            std::fs::rename(&tmp, out).map_err(|e| {
                let _ = std::fs::remove_file(&tmp);
                anyhow::anyhow!("-o {}: cannot write: {e}", out.display())
            })?;
            Ok(format!("{summary}wrote {}\n", out.display()))
        }
        None => {
            if !args.quiet {
                eprint!("{summary}");
            }
            Ok(imported.yaml)
        }
    }
}

/// Add the command-line way out to an error of a CIF.
fn with_hints(e: groundcount::Error, file: &Path) -> anyhow::Error {
    let text = e.to_string();
    let mut hint = String::new();
    if text.contains("choose one of them by name") {
        hint = format!(
            " (`--block NAME`; `groundcount import {} --block NAME`)",
            file.display()
        );
    }
    if text.contains("cannot be counted yet") {
        hint = format!(
            " (`groundcount import {}` writes the lattice file with these entries as comments)",
            file.display()
        );
    }
    if hint.is_empty() {
        e.into()
    } else {
        anyhow::anyhow!("{text}{hint}")
    }
}

/// Load a CIF given to a counting command: the block `block` names, or the only data
/// block with atom sites.
pub fn load(bytes: &[u8], file: &Path, block: Option<&str>) -> anyhow::Result<Lattice> {
    Lattice::from_cif(bytes, file, block).map_err(|e| {
        let text = e.to_string();
        if text.contains("choose one of them by name") {
            anyhow::anyhow!(
                "{text} (`--block NAME`; `groundcount import {} --block NAME -o FILE.yaml` \
                 writes the lattice file of one block)",
                file.display()
            )
        } else {
            with_hints(e, file)
        }
    })
}
