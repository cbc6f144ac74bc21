//! `groundcount inspect FILE`: what the file describes, and the Pauling estimate.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::counters::local;
use groundcount::crystal::Target;
use groundcount::json::PaulingSummary;
use groundcount::text::{self, sig};

use super::{Format, load, shown};

/// The JSON document of `inspect` (docs/json.md).
#[derive(serde::Serialize)]
struct Document {
    lattice: String,
    file: String,
    content_hash: String,
    dimensions: usize,
    /// Length, area or volume of the cell, in the units of the cell vectors.
    cell_measure: f64,
    sites: Vec<SiteRecord>,
    bonds: Vec<BondRecord>,
    groups: Vec<GroupRecord>,
    rules: Vec<RuleRecord>,
    /// Variables held at one state (`pinned:`); empty when none.
    held: Vec<HeldRecord>,
    /// Relative weights of states (`weights:`); empty when none.
    weights: Vec<WeightRecord>,
    /// Imposed means (`occupancy:`, `composition:`); empty when none.
    means: Vec<MeanRecord>,
    formula_unit: FormulaUnitRecord,
    pauling: PaulingSummary,
}

/// A site or bond of the cell whose variable is held at one state.
#[derive(serde::Serialize)]
struct HeldRecord {
    /// `site` or `bond`.
    on: &'static str,
    id: String,
    state: u32,
}

/// A site or bond of the cell whose states carry relative weights.
#[derive(serde::Serialize)]
struct WeightRecord {
    /// `site` or `bond`.
    on: &'static str,
    id: String,
    /// One weight per state.
    states: Vec<f64>,
}

/// A mean imposed on one state over sites or bonds of the cell.
#[derive(serde::Serialize)]
struct MeanRecord {
    /// `occupancy` or `composition`.
    kind: &'static str,
    label: String,
    /// `site` or `bond`.
    on: &'static str,
    /// The sites or bonds of the cell it averages over.
    members: Vec<String>,
    state: u32,
    /// The mean (fraction of the members in `state`).
    mean: f64,
}

/// A site of the cell.
#[derive(serde::Serialize)]
struct SiteRecord {
    id: String,
    species: String,
    /// Fractional coordinates.
    at: Vec<f64>,
    /// Bonds at the site in the infinite crystal.
    coordination: usize,
}

/// A bond of the cell.
#[derive(serde::Serialize)]
struct BondRecord {
    id: String,
    from: String,
    to: String,
    /// Cell shift of `to`.
    shift: Vec<i64>,
    /// Length in the units of the cell vectors.
    length: f64,
}

/// A group of sites.
#[derive(serde::Serialize)]
struct GroupRecord {
    id: String,
    members: usize,
}

/// A rule.
#[derive(serde::Serialize)]
struct RuleRecord {
    rule: String,
    instances_per_cell: usize,
}

/// The formula unit.
#[derive(serde::Serialize)]
struct FormulaUnitRecord {
    name: String,
    per_cell: f64,
}

/// Arguments of `inspect`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Lattice file (YAML) or structure file (CIF); the built-in ice Ih description when omitted.
    file: Option<PathBuf>,
    /// The data block to read when FILE is a structure file (CIF) with several structures.
    #[arg(long, value_name = "NAME")]
    block: Option<String>,
    /// Output format: table, json, csv (one quantity per row) or markdown.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
}

pub fn run(args: Args) -> anyhow::Result<String> {
    let lattice = load(args.file.as_deref(), args.block.as_deref())?;
    let c = &lattice.crystal;
    let p = super::pauling(c)?;
    let coordination = c.coordination();
    let unit = &c.formula_unit.name;
    let units_per_cell = c.formula_unit.per_cell(c);
    if args.format == Format::Json {
        let d = c.dimensions;
        let document = Document {
            lattice: c.name.clone(),
            file: shown(&args.file),
            content_hash: lattice.content_hash.clone(),
            dimensions: d,
            cell_measure: c.cell_measure(),
            sites: c
                .sites
                .iter()
                .zip(&coordination)
                .map(|(s, &k)| SiteRecord {
                    id: s.id.clone(),
                    species: s.species.clone(),
                    at: s.frac[..d].to_vec(),
                    coordination: k,
                })
                .collect(),
            bonds: c
                .bonds
                .iter()
                .map(|b| BondRecord {
                    id: b.id.clone(),
                    from: c.sites[b.from].id.clone(),
                    to: c.sites[b.to].id.clone(),
                    shift: b.shift[..d].to_vec(),
                    length: b.length,
                })
                .collect(),
            groups: c
                .groups
                .iter()
                .map(|g| GroupRecord {
                    id: g.id.clone(),
                    members: g.members.len(),
                })
                .collect(),
            rules: c
                .rules
                .iter()
                .map(|r| RuleRecord {
                    rule: r.label.clone(),
                    instances_per_cell: r.instances.len(),
                })
                .collect(),
            held: c.pinned.iter().map(|p| held_record(c, p)).collect(),
            weights: c
                .weights
                .iter()
                .map(|w| {
                    let (on, id) = entity(c, w.target, w.index);
                    WeightRecord {
                        on,
                        id,
                        states: w.states.clone(),
                    }
                })
                .collect(),
            means: c.means.iter().map(|m| mean_record(c, m)).collect(),
            formula_unit: FormulaUnitRecord {
                name: unit.clone(),
                per_cell: units_per_cell,
            },
            pauling: PaulingSummary::new(&p, unit),
        };
        return Ok(groundcount::json::to_string(&document)?);
    }
    if args.format == Format::Csv {
        // One quantity per row: the facts a spreadsheet wants, each with its unit.
        let mut t = text::Table::new(&["quantity", "value"]);
        let rows: Vec<(String, String)> = vec![
            ("lattice".into(), c.name.clone()),
            ("file".into(), shown(&args.file)),
            ("content hash".into(), lattice.content_hash.clone()),
            ("dimensions".into(), c.dimensions.to_string()),
            ("sites per cell".into(), c.sites.len().to_string()),
            ("bonds per cell".into(), c.bonds.len().to_string()),
            (
                "rules".into(),
                c.rules
                    .iter()
                    .map(|r| r.label.clone())
                    .collect::<Vec<_>>()
                    .join("; "),
            ),
            ("formula unit".into(), unit.clone()),
            (format!("{unit} per cell"), text::number(units_per_cell)),
            (
                format!("Pauling W per {unit}"),
                text::number(p.w_per_unit()),
            ),
            (
                format!("Pauling S0/R per {unit}"),
                text::number(p.s_over_r()),
            ),
            (
                format!("Pauling S0 J/(mol K) per mole of {unit}"),
                text::number(p.s_j_per_mol_k()),
            ),
            (
                "Pauling meaningful".into(),
                if local::caveat(&p).is_some() {
                    "no"
                } else {
                    "yes"
                }
                .into(),
            ),
        ];
        for (k, v) in rows {
            t.row(vec![k, v]);
        }
        return Ok(t.render_csv());
    }
    let markdown = args.format == Format::Markdown;
    let render = |t: &text::Table| {
        if markdown {
            t.render_markdown()
        } else {
            t.render()
        }
    };
    let gap = if markdown { "\n" } else { "" };
    let mut out = String::new();
    if markdown {
        out.push_str("# ");
    }
    writeln!(out, "{} ({})", c.name, shown(&args.file))?;
    if let Some(a) = &c.about {
        writeln!(out, "{a}")?;
    }
    writeln!(out)?;
    let names = ["a", "b", "c"];
    writeln!(
        out,
        "cell ({}D, {} {:.4}):",
        c.dimensions,
        ["length", "area", "volume"][c.dimensions - 1],
        c.cell_measure()
    )?;
    for (name, vector) in names.iter().zip(&c.vectors).take(c.dimensions) {
        let v: Vec<String> = vector[..c.dimensions].iter().map(|x| sig(*x, 6)).collect();
        writeln!(out, "  {name} = [{}]", v.join(", "))?;
    }
    let mut t = text::Table::new(&["site", "species", "fractional position", "coordination"]);
    for (s, k) in c.sites.iter().zip(&coordination) {
        let f: Vec<String> = s.frac[..c.dimensions].iter().map(|x| sig(*x, 6)).collect();
        t.row(vec![
            s.id.clone(),
            s.species.clone(),
            format!("[{}]", f.join(", ")),
            k.to_string(),
        ]);
    }
    writeln!(
        out,
        "\n{} per cell:\n{gap}{}",
        plural(c.sites.len(), "site"),
        render(&t)
    )?;
    if !c.bonds.is_empty() {
        let mut t = text::Table::new(&["bond", "from", "to", "shift", "length"]);
        for b in &c.bonds {
            let sh: Vec<String> = b.shift[..c.dimensions]
                .iter()
                .map(|x| x.to_string())
                .collect();
            t.row(vec![
                b.id.clone(),
                c.sites[b.from].id.clone(),
                c.sites[b.to].id.clone(),
                format!("[{}]", sh.join(", ")),
                sig(b.length, 6),
            ]);
        }
        writeln!(
            out,
            "{} per cell:\n{gap}{}",
            plural(c.bonds.len(), "bond"),
            render(&t)
        )?;
    }
    for g in &c.groups {
        writeln!(out, "group {}: {} sites", g.id, g.members.len())?;
    }
    if !c.groups.is_empty() {
        writeln!(out)?;
    }
    for (target, kind) in [
        (Target::Sites, c.site_variables),
        (Target::Bonds, c.bond_variables),
    ] {
        if let Some(k) = kind {
            writeln!(
                out,
                "variables: {} on {} ({} states)",
                k.word(),
                target.word(),
                k.states()
            )?;
        }
    }
    for r in &c.rules {
        let allowed = if r.counts.is_empty() {
            String::new()
        } else {
            format!(", allowed {:?}", r.counts)
        };
        let remaining: Vec<String> = r
            .remaining
            .iter()
            .rev()
            .map(|(n, c)| format!("{} {c:?}", plural(*n as usize, "member")))
            .collect();
        let remaining = if remaining.is_empty() {
            String::new()
        } else {
            format!("; with vacancies {}", remaining.join(", "))
        };
        writeln!(
            out,
            "rule: {}{allowed}{remaining} ({} per cell)",
            r.label,
            r.instances.len()
        )?;
    }
    for v in &c.vacancies {
        writeln!(
            out,
            "vacancies: site {} vacant with probability {}",
            c.sites[v.site].id,
            sig(v.fraction, 6)
        )?;
    }
    for p in &c.pinned {
        let h = held_record(c, p);
        writeln!(
            out,
            "held: {} {} at state {} (one state)",
            h.on, h.id, h.state
        )?;
    }
    for w in &c.weights {
        let (on, id) = entity(c, w.target, w.index);
        let states: Vec<String> = w.states.iter().map(|x| sig(*x, 6)).collect();
        writeln!(
            out,
            "weights: {on} {id}, states {} (relative)",
            states.join(", ")
        )?;
    }
    for m in &c.means {
        let r = mean_record(c, m);
        let what = match m.kind {
            groundcount::crystal::MeanKind::Occupancy => "mean",
            groundcount::crystal::MeanKind::Composition => "fraction fixed at",
        };
        writeln!(
            out,
            "{}: state {} of {} ({} per cell), {what} {}",
            r.kind,
            r.state,
            r.label.rsplit_once(" state ").map_or(&*r.label, |(l, _)| l),
            plural(r.members.len(), r.on),
            sig(r.mean, 6)
        )?;
    }
    writeln!(
        out,
        "formula unit: {unit}, {} ({} per cell)",
        c.formula_unit.describe(),
        text::amount(units_per_cell)
    )?;
    writeln!(out)?;
    let (which, present) = if c.is_diluted() {
        (
            "Generalized Pauling estimate (averaged over the vacancies; Ke et al. 2007)",
            " present",
        )
    } else {
        ("Pauling estimate", "")
    };
    writeln!(
        out,
        "{which}: W = {} per {unit}{present}, S0 = {} R = {} J/(mol K) per mole of {unit}{present}",
        sig(p.w_per_unit(), 10),
        sig(p.s_over_r(), 8),
        sig(p.s_j_per_mol_k(), 6)
    )?;
    for line in text::weighing_lines(&p, unit) {
        writeln!(out, "{line}")?;
    }
    if let Some(caveat) = local::caveat(&p) {
        writeln!(
            out,
            "Not meaningful for this rule: {}. `groundcount estimate` shows the Bethe \
             approximation beside it.",
            caveat.explain(unit)
        )?;
    }
    Ok(out)
}

fn plural(n: usize, word: &str) -> String {
    if n == 1 {
        format!("1 {word}")
    } else {
        format!("{n} {word}s")
    }
}

/// `site` or `bond`, and the id the file gives, of an entity of the cell.
fn entity(
    c: &groundcount::crystal::Crystal,
    target: Target,
    index: usize,
) -> (&'static str, String) {
    match target {
        Target::Sites => ("site", c.sites[index].id.clone()),
        Target::Bonds => ("bond", c.bonds[index].id.clone()),
    }
}

/// An `occupancy:` or `composition:` entry, by the ids the file gives.
fn mean_record(
    c: &groundcount::crystal::Crystal,
    m: &groundcount::crystal::MeanTarget,
) -> MeanRecord {
    MeanRecord {
        kind: m.kind.word(),
        label: m.label.clone(),
        on: entity(c, m.target, 0).0,
        members: m
            .members
            .iter()
            .map(|&i| entity(c, m.target, i).1)
            .collect(),
        state: m.state,
        mean: m.mean,
    }
}

/// What a `pinned:` entry holds, by the id the file gives.
fn held_record(c: &groundcount::crystal::Crystal, p: &groundcount::crystal::Pin) -> HeldRecord {
    let (on, id) = entity(c, p.target, p.index);
    HeldRecord {
        on,
        id,
        state: p.state,
    }
}
