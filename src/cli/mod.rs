//! Command-line layer: flag definitions, output format, exit codes. One file per command.
//!
//! Exit codes: 0 success; 1 usage or input error; 2 a budget (states or time) was exceeded
//! or an iteration did not converge; 3 a cross-check failed (the results disagree with a
//! second route of the same run); 130 interrupted (Ctrl-C). A command that finished part
//! of its work before one of these (`strip`) prints that part on standard output
//! ([`Partial`]); so do `estimate` and `report` when interrupted.

mod calorimetry;
mod dilution;
mod estimate;
mod exact;
mod import;
mod inspect;
mod merge;
mod report;
mod sample;
mod strip;
mod words;

use std::io::IsTerminal;
use std::path::{Path, PathBuf};

use clap::{Parser, Subcommand, ValueEnum};
use groundcount::context::{Context, Progress};
use groundcount::{Error, Lattice};

/// Count the arrangements a crystal's local rules allow and report the residual entropy.
#[derive(Parser, Debug)]
#[command(name = "groundcount", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Describe a lattice file: cell, sites, bonds, variables, rules, and the Pauling estimate.
    Inspect(inspect::Args),
    /// Count one finite cell exactly.
    Exact(exact::Args),
    /// The main job: Pauling estimate and exact counts on growing cells, side by side.
    Estimate(estimate::Args),
    /// Monte Carlo count of a large cell (thermodynamic integration), with error bars.
    Sample(sample::Args),
    /// Combine the shard files of a split Monte Carlo run into one estimate.
    Merge(merge::Args),
    /// Transfer matrices on strips of growing width, extrapolated to the infinite crystal.
    Strip(strip::Args),
    /// Run the counters that suit the lattice and write a citable report to a directory.
    Report(report::Args),
    /// Third-law entropy from measured heat capacities, and the residual entropy it implies.
    Calorimetry(calorimetry::Args),
    /// Write the lattice file of a published structure (CIF), with where each part came from.
    Import(import::Args),
}

/// Output format shared by every command.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Aligned text for reading.
    #[default]
    Table,
    /// One JSON document.
    Json,
    /// Comma-separated values.
    Csv,
    /// A Markdown table.
    Markdown,
}

/// Options every counting command shares.
#[derive(clap::Args, Debug, Clone)]
pub struct Common {
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
    /// Worker threads (default: all cores).
    #[arg(long)]
    threads: Option<usize>,
    /// No progress messages on standard error.
    #[arg(long, short)]
    quiet: bool,
}

impl Common {
    fn progress(&self) -> bool {
        !self.quiet && std::io::stderr().is_terminal()
    }

    /// The context of one exact count: Ctrl-C raises its interrupt; when progress is wanted,
    /// a bar on standard error follows the steps.
    fn exact_progress(&self, label: &str) -> (Context, Option<indicatif::ProgressBar>) {
        let context = Context::new().with_interrupt(interrupt());
        if !self.progress() {
            return (context, None);
        }
        let bar = indicatif::ProgressBar::new(1);
        bar.set_style(
            indicatif::ProgressStyle::with_template(
                "{prefix} [{bar:30}] step {pos}/{len}, {msg}, ETA {eta}",
            )
            .expect("valid template")
            .progress_chars("=> "),
        );
        bar.set_prefix(label.to_string());
        let b = bar.clone();
        let context = context.with_observer(move |p| {
            if let Progress::Step { done, all, states } = p {
                b.set_length(*all as u64);
                b.set_position(*done as u64);
                b.set_message(format!("{states} states"));
            }
        });
        (context, Some(bar))
    }

    /// The context of a Monte Carlo run: Ctrl-C raises its interrupt; when progress is
    /// wanted, a bar on standard error counts the finished replicas.
    fn replica_progress(
        &self,
        model: &groundcount::model::Model,
        replicas: usize,
    ) -> (Context, Option<indicatif::ProgressBar>) {
        let context = Context::new().with_interrupt(interrupt());
        if !self.progress() {
            return (context, None);
        }
        let bar = indicatif::ProgressBar::new(replicas as u64);
        bar.set_style(
            indicatif::ProgressStyle::with_template(
                "{prefix} [{bar:30}] {pos}/{len} replicas, ETA {eta}",
            )
            .expect("valid template")
            .progress_chars("=> "),
        );
        bar.set_prefix(format!(
            "sampling {} ({} variables)",
            model.cells,
            model.variables.len()
        ));
        let b = bar.clone();
        let context = context.with_observer(move |p| {
            if *p == Progress::Replica {
                b.inc(1);
            }
        });
        (context, Some(bar))
    }
}

/// A progress display for a survey: one line on standard error that follows its stages.
pub struct SurveyBars(Option<indicatif::ProgressBar>);

impl SurveyBars {
    /// Clear the line.
    pub fn finish(&self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}

impl Common {
    /// The context of a survey ([`groundcount::estimate::survey`]): Ctrl-C raises its
    /// interrupt; when progress is wanted, a line on standard error shows its stages.
    fn survey_progress(&self) -> (Context, SurveyBars) {
        let context = Context::new().with_interrupt(interrupt());
        if !self.progress() {
            return (context, SurveyBars(None));
        }
        let bar = indicatif::ProgressBar::new_spinner();
        let counting = indicatif::ProgressStyle::with_template(
            "{prefix} [{bar:30}] step {pos}/{len}, {msg}, ETA {eta}",
        )
        .expect("valid template")
        .progress_chars("=> ");
        let waiting =
            indicatif::ProgressStyle::with_template("{spinner} {prefix} {msg} ({elapsed})")
                .expect("valid template");
        bar.enable_steady_tick(std::time::Duration::from_millis(200));
        let b = bar.clone();
        let context = context.with_observer(move |p| match p {
            Progress::Counting { cells } => {
                b.set_style(counting.clone());
                b.set_prefix(format!("counting {cells}"));
                b.set_position(0);
            }
            Progress::Step { done, all, states } => {
                b.set_length(*all as u64);
                b.set_position(*done as u64);
                b.set_message(format!("{states} states"));
            }
            Progress::Counted => b.set_message(""),
            Progress::Width { width } => {
                b.set_style(waiting.clone());
                b.set_prefix("transfer matrix");
                b.set_message(format!("cylinder of width {width}"));
            }
            Progress::Sampling { cells, variables } => {
                b.set_style(waiting.clone());
                b.set_prefix("Monte Carlo");
                b.set_message(format!("sampling {cells} ({variables} variables)"));
            }
            _ => {}
        });
        (context, SurveyBars(Some(bar)))
    }
}

/// Refuse a budget that is not a positive finite number of seconds.
fn check_budget(budget: f64) -> anyhow::Result<()> {
    if !(budget.is_finite() && budget > 0.0 && budget <= 1e7) {
        anyhow::bail!(
            "--budget must be a positive number of seconds (at most 1e7), found {budget}"
        );
    }
    Ok(())
}

/// Run the command line; returns the exit code.
pub fn run() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            use clap::error::ErrorKind;
            let code = match e.kind() {
                ErrorKind::DisplayHelp | ErrorKind::DisplayVersion => 0,
                _ => 1,
            };
            let _ = e.print();
            return code;
        }
    };
    let result = match cli.command {
        Command::Inspect(a) => inspect::run(a),
        Command::Exact(a) => exact::run(a),
        Command::Estimate(a) => estimate::run(a),
        Command::Sample(a) => sample::run(a),
        Command::Merge(a) => merge::run(a),
        Command::Strip(a) => strip::run(a),
        Command::Report(a) => report::run(a),
        Command::Calorimetry(a) => calorimetry::run(a),
        Command::Import(a) => import::run(a),
    };
    match result {
        Ok(text) => {
            print!("{text}");
            0
        }
        Err(e) => {
            if let Some(p) = e.downcast_ref::<Partial>() {
                print!("{}", p.output);
                eprintln!("error: {}", p.message);
                return p.code;
            }
            match e.downcast_ref::<Error>() {
                Some(error) => eprintln!("error: {}", words::error(error)),
                None => eprintln!("error: {e:#}"),
            }
            match e.downcast_ref::<Error>() {
                Some(
                    Error::Budget { .. } | Error::Deadline { .. } | Error::NotConverged { .. },
                ) => 2,
                Some(Error::Interrupted { .. }) => 130,
                _ => 1,
            }
        }
    }
}

/// What a command finished before something cut it short: `output` goes to standard
/// output, `message` to standard error, and the process exits with `code` (see the exit
/// codes in the module documentation).
#[derive(Debug)]
pub struct Partial {
    /// The results finished, rendered.
    pub output: String,
    /// What stopped the command, in words.
    pub message: String,
    /// The exit code.
    pub code: i32,
}

impl std::fmt::Display for Partial {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Partial {}

/// The interrupt raised by Ctrl-C: the first call installs the handler; every call
/// returns the same flag. A second Ctrl-C ends the process at once.
fn interrupt() -> groundcount::context::Interrupt {
    use std::sync::OnceLock;
    static FLAG: OnceLock<groundcount::context::Interrupt> = OnceLock::new();
    FLAG.get_or_init(|| {
        let flag = groundcount::context::Interrupt::new();
        let raised = flag.clone();
        // If no handler can be installed, Ctrl-C keeps its default meaning.
        let _ = ctrlc::set_handler(move || {
            if raised.raised() {
                std::process::exit(130);
            }
            raised.raise();
            eprintln!("\ninterrupted: finishing what is under way (Ctrl-C again to quit at once)");
        });
        flag
    })
    .clone()
}

/// Load a lattice file or a structure file (CIF, told by its extension or content), or
/// the built-in ice Ih description when none is given; `block` (`--block`) chooses a data
/// block of a structure file.
fn load(file: Option<&Path>, block: Option<&str>) -> anyhow::Result<Lattice> {
    Ok(match file {
        Some(p) => {
            let bytes = groundcount::spec::read_file(p)?;
            if groundcount::cif::is_cif(p, &bytes) {
                import::load(&bytes, p, block)?
            } else {
                if let Some(b) = block {
                    anyhow::bail!(
                        "--block {b}: {} is a lattice file, not a structure file (CIF); \
                         --block chooses a data block of a CIF",
                        p.display()
                    );
                }
                Lattice::from_bytes(&bytes, p)?
            }
        }
        None => {
            if let Some(b) = block {
                anyhow::bail!(
                    "--block {b}: no structure file was given (the built-in ice Ih \
                     description is a lattice file); --block chooses a data block of a CIF"
                );
            }
            Lattice::from_yaml(
                groundcount::ICE_IH_YAML,
                groundcount::spec::embedded_path("ice-ih.yaml"),
            )?
        }
    })
}

/// Check, before any computing, that a file can be written at `path` (the flag's value):
/// its directory exists and takes a new file, and the path is not a directory. Leaves
/// nothing behind.
fn check_output_file(path: &Path, flag: &str) -> anyhow::Result<()> {
    let shown = path.display();
    if path.is_dir() {
        anyhow::bail!("{flag} {shown}: is a directory; expected a file name");
    }
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    if !dir.is_dir() {
        anyhow::bail!(
            "{flag} {shown}: the directory {} does not exist; create it first",
            dir.display()
        );
    }
    let probe = dir.join(format!(".groundcount-write-check-{}", std::process::id()));
    std::fs::write(&probe, b"").map_err(|e| {
        anyhow::anyhow!(
            "{flag} {shown}: cannot write in {}: {e}; choose a writable place",
            dir.display()
        )
    })?;
    let _ = std::fs::remove_file(&probe);
    if path.exists() && std::fs::OpenOptions::new().append(true).open(path).is_err() {
        anyhow::bail!("{flag} {shown}: the file exists and cannot be written");
    }
    Ok(())
}

/// Most worker threads `--threads` accepts (each costs a stack; 100 000 exhausted the
/// machine before any work began).
const MAX_THREADS: usize = 1024;

/// Run `f` in a rayon pool of the requested size.
fn with_threads<T: Send>(
    threads: Option<usize>,
    f: impl FnOnce() -> T + Send,
) -> anyhow::Result<T> {
    let mut b = rayon::ThreadPoolBuilder::new();
    if let Some(n) = threads {
        if n == 0 {
            anyhow::bail!("--threads must be at least 1");
        }
        if n > MAX_THREADS {
            let cores = std::thread::available_parallelism().map_or(1, |c| c.get());
            anyhow::bail!(
                "--threads {n}: at most {MAX_THREADS} worker threads (this machine has {cores} cores; \
                 more threads than cores only adds overhead)"
            );
        }
        b = b.num_threads(n);
    }
    Ok(b.build()?.install(f))
}

/// The file path as typed, for messages.
fn shown(p: &Option<PathBuf>) -> String {
    p.as_ref().map_or_else(
        || "built-in ice Ih".to_string(),
        |p| p.display().to_string(),
    )
}

/// The first lines of a one-cell result: lattice, file and cell; the size of the model.
fn cell_header(
    c: &groundcount::crystal::Crystal,
    file: &Path,
    e: &groundcount::Estimate,
    model: &groundcount::model::Model,
) -> String {
    format!(
        "{} ({}), cell {}\n{} variables, {} constraints, {} formula units of {}\n",
        c.name,
        file.display(),
        e.cells.as_deref().unwrap_or(""),
        model.variables.len(),
        model.constraints.len(),
        groundcount::text::amount(e.formula_units),
        c.formula_unit.name
    )
}

/// Pauling's estimate of a crystal (milliseconds; nothing to observe or stop).
fn pauling(c: &groundcount::crystal::Crystal) -> groundcount::Result<groundcount::Estimate> {
    groundcount::counters::pauling::count(c, &(), &Context::new()).map(|p| p.estimate)
}

/// The Pauling comparison line under a one-cell result.
fn pauling_line(p: &groundcount::Estimate, unit: &str) -> String {
    use groundcount::text::sig;
    let mut line = format!(
        "Pauling (infinite)    W = {} per {unit}, S0 = {} J/(mol K)\n",
        sig(p.w_per_unit(), 10),
        sig(p.s_j_per_mol_k(), 6)
    );
    if let Some(c) = groundcount::counters::local::caveat(p) {
        line += &format!(
            "                      not meaningful: {}\n",
            c.explain(unit)
        );
    }
    line
}
