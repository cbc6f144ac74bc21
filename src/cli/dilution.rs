//! `groundcount exact` and `groundcount sample` on a diluted lattice (`vacancies:`): exact
//! counts or Monte Carlo estimates of random realisations of the vacancies, their mean,
//! spread and standard error.

use std::fmt::Write;
use std::path::Path;

use groundcount::Lattice;
use groundcount::cluster::{Cells, Cluster};
use groundcount::context::{Context, Progress};
use groundcount::counters::dilution::{self, DilutionConfig, DilutionSampleConfig, Realisations};
use groundcount::counters::exact::ExactConfig;
use groundcount::counters::sampling::SampleConfig;
use groundcount::json::EstimateOf;
use groundcount::text::{self, sig};
use groundcount::thermo;

use super::{Common, Format, with_threads};

/// The JSON document of `exact` on a diluted lattice (docs/json.md).
#[derive(serde::Serialize)]
struct Document<'a> {
    /// The mean, as an estimate (its 1σ is the standard error of the mean), with the
    /// lattice and the generalized Pauling estimate beside it.
    #[serde(flatten)]
    estimate: EstimateOf,
    /// FNV-1a hash of the lattice file's text.
    content_hash: String,
    /// `frontier` (every realisation counted exactly by the frontier counter) or
    /// `monte-carlo` (thermodynamic integration).
    route: &'static str,
    /// What `mean`, `spread` and `standard_error` are per.
    per: String,
    /// Realisations, mean, spread, standard error, seed.
    #[serde(flatten)]
    realisations: &'a Realisations,
}

/// How every realisation is counted.
pub enum Counter {
    /// Exactly, with this state budget.
    Exact {
        /// The state budget.
        max_states: usize,
    },
    /// By thermodynamic integration with these settings.
    Sample(SampleConfig),
}

/// Count the realisations of a diluted lattice's cell and word the result.
pub fn run(
    lattice: &Lattice,
    file: &Path,
    cells: &Cells,
    realisations: usize,
    seed: u64,
    counter: Counter,
    common: &Common,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let p = super::pauling(c)?;
    let cluster = Cluster::new(c, cells.clone())?;
    let context = Context::new().with_interrupt(super::interrupt());
    let (context, bar) = if common.progress() {
        let bar = indicatif::ProgressBar::new(realisations as u64);
        bar.set_style(
            indicatif::ProgressStyle::with_template(
                "{prefix} [{bar:30}] {pos}/{len} realisations, ETA {eta}",
            )
            .expect("valid template")
            .progress_chars("=> "),
        );
        bar.set_prefix(format!("counting {}", cluster.cells));
        let b = bar.clone();
        let context = context.with_observer(move |p| {
            if let Progress::Realisation { done, .. } = p {
                b.set_position(*done as u64);
            }
        });
        (context, Some(bar))
    } else {
        (context, None)
    };
    let how = match &counter {
        Counter::Exact { .. } => "each counted exactly".to_string(),
        Counter::Sample(s) => format!(
            "each sampled by thermodynamic integration ({} replicas, {} sweeps per node, its own seed from seed and realisation)",
            s.replicas, s.sweeps
        ),
    };
    let exact = matches!(counter, Counter::Exact { .. });
    let counted = with_threads(common.threads, || match counter {
        Counter::Exact { max_states } => dilution::count(
            &cluster,
            &DilutionConfig {
                realisations,
                seed,
                exact: ExactConfig {
                    max_states,
                    ..Default::default()
                },
            },
            &context,
        ),
        Counter::Sample(sample) => dilution::sample(
            &cluster,
            &DilutionSampleConfig {
                realisations,
                seed,
                sample,
            },
            &context,
        ),
    });
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let counted = counted??;
    let (e, r) = (&counted.estimate, &counted.details);
    let unit = &c.formula_unit.name;
    let present = present_words(lattice);
    let output = match common.format {
        Format::Json => groundcount::json::to_string(&Document {
            estimate: EstimateOf::new(c, e, Some(&p)),
            content_hash: lattice.content_hash.clone(),
            route: if exact { "frontier" } else { "monte-carlo" },
            per: format!("ln W per {unit} {present}"),
            realisations: r,
        })?,
        Format::Csv | Format::Markdown => {
            let mut t = text::Table::new(&[
                "realisation",
                "vacant sites",
                &format!("{unit} {present}"),
                "arrangements",
                &format!("ln W per {unit} {present}"),
                "1σ of ln W (Monte Carlo)",
            ]);
            for x in &r.realisations {
                t.row(vec![
                    x.index.to_string(),
                    x.vacant.to_string(),
                    text::amount(x.formula_units),
                    x.count.as_ref().map(|c| c.to_string()).unwrap_or_default(),
                    sig(x.ln_w_per_unit, 10),
                    x.sigma_ln_w.map(|s| sig(s, 3)).unwrap_or_default(),
                ]);
            }
            if common.format == Format::Csv {
                t.render_csv()
            } else {
                t.render_markdown()
            }
        }
        Format::Table => table(lattice, file, &cluster, e, r, &p, &present, &how)?,
    };
    if r.interrupted {
        return Err(super::Partial {
            output,
            message: format!(
                "interrupted: {} of {} realisations were counted; the mean and its error rest on those",
                r.realisations.len(),
                r.requested
            ),
            code: 130,
        }
        .into());
    }
    Ok(output)
}

/// "present" when formula units are sites that may be vacant, "of the cell" otherwise.
fn present_words(lattice: &Lattice) -> String {
    match lattice.crystal.formula_unit.basis {
        groundcount::crystal::UnitBasis::Sites(_) => "present".into(),
        _ => "of the cell".into(),
    }
}

#[allow(clippy::too_many_arguments)]
fn table(
    lattice: &Lattice,
    file: &Path,
    cluster: &Cluster,
    e: &groundcount::Estimate,
    r: &Realisations,
    p: &groundcount::Estimate,
    present: &str,
    how: &str,
) -> anyhow::Result<String> {
    let c = &lattice.crystal;
    let unit = &c.formula_unit.name;
    let mut out = String::new();
    writeln!(
        out,
        "{} ({}), cell {}",
        c.name,
        file.display(),
        cluster.cells
    )?;
    let vacancies: Vec<String> = c
        .vacancies
        .iter()
        .map(|v| format!("{} {}", c.sites[v.site].id, sig(v.fraction, 6)))
        .collect();
    writeln!(
        out,
        "vacancy fraction by site: {}; {} sites and {} formula units of {unit} in the undiluted cell",
        vacancies.join(", "),
        cluster.sites.len(),
        text::amount(r.undiluted_formula_units)
    )?;
    writeln!(
        out,
        "{} realisations of the vacancies from seed {}, {how}",
        r.realisations.len(),
        r.seed
    )?;
    writeln!(
        out,
        "W = arrangements per {unit} {present}; S0 = R ln W per mole of {unit} {present}"
    )?;
    writeln!(out)?;
    let exact = r.realisations.iter().all(|x| x.count.is_some());
    let fourth = if exact {
        "arrangements".to_string()
    } else {
        format!("1σ of ln W per {unit}")
    };
    let mut t = text::Table::new(&[
        "realisation",
        "vacant",
        &format!("{unit} {present}"),
        &fourth,
        &format!("ln W per {unit}"),
    ]);
    for x in &r.realisations {
        t.row(vec![
            x.index.to_string(),
            x.vacant.to_string(),
            text::amount(x.formula_units),
            match (&x.count, x.sigma_ln_w) {
                (Some(c), _) => c.to_string(),
                (None, Some(s)) => sig(s, 3),
                (None, None) => String::new(),
            },
            sig(x.ln_w_per_unit, 8),
        ]);
    }
    out += &t.render();
    writeln!(out)?;
    let failed: Vec<String> = r
        .realisations
        .iter()
        .filter(|x| x.equilibrated == Some(false))
        .map(|x| x.index.to_string())
        .collect();
    if !failed.is_empty() {
        writeln!(
            out,
            "equilibration check FAILED for realisation {}: their 1σ carries the allowance; more --sweeps would help",
            failed.join(", ")
        )?;
    }
    let n = r.realisations.len();
    writeln!(
        out,
        "mean ln W per {unit} {present}      {} ± {} (standard error of the mean of {n} realisations)",
        sig(r.mean, 8),
        sig(r.standard_error, 3)
    )?;
    writeln!(
        out,
        "spread between realisations  {} (standard deviation of ln W per {unit} {present})",
        sig(r.spread, 3)
    )?;
    writeln!(
        out,
        "W per {unit} {present} = exp(mean)  {} ± {}",
        sig(e.w_per_unit(), 8),
        sig(e.sigma_w().unwrap_or(0.0), 3)
    )?;
    writeln!(
        out,
        "S0                           {} ± {} J/(mol K) per mole of {unit} {present}",
        sig(e.s_j_per_mol_k(), 6),
        sig(e.sigma_s_j_per_mol_k().unwrap_or(0.0), 3)
    )?;
    writeln!(
        out,
        "mean ln Ω per {unit} of the undiluted cell  {} (S0 = {} J/(mol K) per mole of {unit} sites, vacant or not)",
        sig(r.mean_per_undiluted_unit, 8),
        sig(thermo::molar_entropy(r.mean_per_undiluted_unit), 6)
    )?;
    writeln!(
        out,
        "generalized Pauling (infinite crystal; Ke et al. 2007)  W = {} per {unit} {present}, S0 = {} J/(mol K) per mole of {unit} {present}",
        sig(p.w_per_unit(), 10),
        sig(p.s_j_per_mol_k(), 6)
    )?;
    writeln!(
        out,
        "the mean is over realisations of one finite cell; the spread is the cell's sample-to-sample variation{}, the ± the error of the mean",
        if exact {
            ""
        } else {
            " and the Monte Carlo noise"
        }
    )?;
    Ok(out)
}
