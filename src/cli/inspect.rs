//! `groundcount inspect FILE`: what the file describes, and the Pauling estimate.

use std::fmt::Write;
use std::path::PathBuf;

use groundcount::cluster::{Cells, Cluster};
use groundcount::counters::pauling;
use groundcount::crystal::Target;
use groundcount::report::{self, sig};
use serde_json::json;

use super::{Format, load, shown};

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
    let p = pauling::estimate(c)?;
    // Coordination from a cluster large enough to show every bond whole.
    let n = (2 * c.reach() + 1).max(3) as usize;
    let cluster = Cluster::new(c, Cells::cube(n, c.dimensions))?;
    let centre = {
        let mut cell = [0usize; 3];
        cell[..c.dimensions].fill(n / 2);
        cell
    };
    let coordination: Vec<usize> = (0..c.sites.len())
        .map(|s| {
            let i = cluster
                .sites
                .iter()
                .position(|x| x.site == s && x.cell == centre)
                .expect("every site exists in every cell");
            cluster
                .graph
                .edges(petgraph::graph::NodeIndex::new(i))
                .count()
        })
        .collect();
    let unit = &c.formula_unit.name;
    let units_per_cell = c.formula_unit.per_cell(c);
    if args.format == Format::Json {
        let v = json!({
            "lattice": c.name,
            "file": shown(&args.file),
            "content_hash": lattice.content_hash,
            "dimensions": c.dimensions,
            "cell_measure": c.cell_measure(),
            "sites": c.sites.iter().zip(&coordination).map(|(s, k)| json!({"id": s.id, "species": s.species, "at": &s.frac[..c.dimensions], "coordination": k})).collect::<Vec<_>>(),
            "bonds": c.bonds.iter().map(|b| json!({"id": b.id, "from": c.sites[b.from].id, "to": c.sites[b.to].id, "shift": &b.shift[..c.dimensions], "length": b.length})).collect::<Vec<_>>(),
            "groups": c.groups.iter().map(|g| json!({"id": g.id, "members": g.members.len()})).collect::<Vec<_>>(),
            "rules": c.rules.iter().map(|r| json!({"rule": r.label, "instances_per_cell": r.instances.len()})).collect::<Vec<_>>(),
            "formula_unit": {"name": unit, "per_cell": units_per_cell},
            "pauling": {"w_per_unit": p.w_per_unit(), "s_over_r": p.s_over_r(), "s_j_per_mol_k": p.s_j_per_mol_k(), "not_meaningful": pauling::caveat(&p).map(|k| k.explain(unit))},
        });
        return Ok(serde_json::to_string_pretty(&v)? + "\n");
    }
    if args.format == Format::Csv {
        // One quantity per row: the facts a spreadsheet wants, each with its unit.
        let mut t = report::Table::new(&["quantity", "value"]);
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
            (format!("{unit} per cell"), report::number(units_per_cell)),
            (
                format!("Pauling W per {unit}"),
                report::number(p.w_per_unit()),
            ),
            (
                format!("Pauling S0/R per {unit}"),
                report::number(p.s_over_r()),
            ),
            (
                format!("Pauling S0 J/(mol K) per mole of {unit}"),
                report::number(p.s_j_per_mol_k()),
            ),
            (
                "Pauling meaningful".into(),
                if pauling::caveat(&p).is_some() {
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
    let render = |t: &report::Table| {
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
    let mut t = report::Table::new(&["site", "species", "fractional position", "coordination"]);
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
        let mut t = report::Table::new(&["bond", "from", "to", "shift", "length"]);
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
        writeln!(
            out,
            "rule: {}{allowed} ({} per cell)",
            r.label,
            r.instances.len()
        )?;
    }
    writeln!(
        out,
        "formula unit: {unit}, {} ({} per cell)",
        c.formula_unit.describe(),
        report::amount(units_per_cell)
    )?;
    writeln!(out)?;
    writeln!(
        out,
        "Pauling estimate: W = {} per {unit}, S0 = {} R = {} J/(mol K) per mole of {unit}",
        sig(p.w_per_unit(), 10),
        sig(p.s_over_r(), 8),
        sig(p.s_j_per_mol_k(), 6)
    )?;
    if let Some(caveat) = pauling::caveat(&p) {
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
