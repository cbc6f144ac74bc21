//! The report as Markdown: lattice summary, every method side by side, diagnostics, the
//! calorimetric comparison, what the numbers rest on, and a sentence to cite.

use std::fmt::Write;

use super::{Report, Sentence};
use crate::counters::local;
use crate::text::{self, Columns, Table, amount, method_label, plus_minus as pm, sig};

/// Render the report.
pub fn render(w: &Report<'_>) -> String {
    let mut o = String::new();
    // Writing to a String cannot fail.
    let _ = body(w, &mut o);
    o
}

fn body(w: &Report<'_>, o: &mut String) -> std::fmt::Result {
    let c = &w.lattice.crystal;
    let s = w.survey;
    let unit = &c.formula_unit.name;
    let p = &s.pauling;
    let cited = w.cited();
    writeln!(o, "# Residual entropy of {}\n", c.name)?;
    if let Some(a) = &c.about {
        writeln!(o, "{}\n", a.trim())?;
    }
    writeln!(o, "## Lattice\n")?;
    let mut t = Table::new(&["", ""]);
    t.row(vec!["file".into(), format!("`{}`", w.meta.file)]);
    t.row(vec![
        "content hash (FNV-1a)".into(),
        format!("`{}`", w.lattice.content_hash),
    ]);
    t.row(vec!["dimensions".into(), c.dimensions.to_string()]);
    let names = ["a", "b", "c"];
    let vectors: Vec<String> = names
        .iter()
        .zip(&c.vectors)
        .take(c.dimensions)
        .map(|(n, v)| {
            let x: Vec<String> = v[..c.dimensions].iter().map(|x| sig(*x, 6)).collect();
            format!("{n} = [{}]", x.join(", "))
        })
        .collect();
    t.row(vec!["cell vectors".into(), vectors.join("; ")]);
    t.row(vec!["sites per cell".into(), c.sites.len().to_string()]);
    t.row(vec!["bonds per cell".into(), c.bonds.len().to_string()]);
    let rules: Vec<String> = c
        .rules
        .iter()
        .map(|r| format!("{} ({} per cell)", r.label, r.instances.len()))
        .collect();
    t.row(vec!["rules".into(), rules.join("; ")]);
    t.row(vec![
        "formula unit".into(),
        format!(
            "{unit}: {}, {} per cell",
            c.formula_unit.describe(),
            amount(c.formula_unit.per_cell(c))
        ),
    ]);
    writeln!(o, "{}", t.render_markdown())?;

    writeln!(o, "## Results\n")?;
    writeln!(
        o,
        "W is the number of allowed arrangements per {unit}; S0 = R ln W per mole of {unit}, \
         R = {} J/(mol K). Monte Carlo uncertainties are one standard error; transfer-matrix \
         uncertainties are the spread of the extrapolations to infinite width (a systematic \
         estimate); exact counts have none.\n",
        crate::thermo::R
    )?;
    let columns = Columns {
        count: false,
        time: false,
    };
    writeln!(
        o,
        "{}",
        text::survey_table(s, unit, columns).render_markdown()
    )?;
    writeln!(
        o,
        "`units` is the number of formula units ({unit}) in the cell.\n"
    )?;
    for e in [Some(p), s.bethe.as_ref()].into_iter().flatten() {
        if let Some(caveat) = local::caveat(e) {
            writeln!(
                o,
                "\\* {}: {}{}.\n",
                method_label(e),
                caveat.explain(unit),
                if e.method == crate::estimate::Method::Pauling && s.bethe.is_some() {
                    "; the Bethe row carries the mean-field estimate"
                } else {
                    ""
                }
            )?;
        }
    }
    writeln!(o, "### Cross-checks\n")?;
    if s.checks.is_empty() {
        writeln!(
            o,
            "None computed in this run: the cited value is not compared with a second route.\n"
        )?;
    } else {
        writeln!(
            o,
            "Each value compared with a second route computed in the same run (ln W per {unit}).\n"
        )?;
        writeln!(
            o,
            "{}",
            text::checks_table(&s.checks, unit).render_markdown()
        )?;
        for f in s.failed_checks() {
            writeln!(o, "**{}.**\n", text::check_failure(f, unit))?;
        }
    }
    match &cited.value {
        Some(v) => {
            let b = v.estimate;
            // Compared with the local estimate that means something: Pauling's, else Bethe's.
            let local = [Some(p), s.bethe.as_ref()]
                .into_iter()
                .flatten()
                .find(|e| local::caveat(e).is_none());
            writeln!(
                o,
                "**Cited value** ({}, {}): W = {} per {unit}, S0 = {} J/(mol K) = {} R{}. \
                 Why this one: {}.\n",
                method_label(b),
                text::cell_label(b),
                pm(b.w_per_unit(), b.sigma_w(), 12),
                pm(b.s_j_per_mol_k(), b.sigma_s_j_per_mol_k(), 12),
                pm(b.s_over_r(), b.sigma_ln_w, 12),
                local
                    .filter(|l| !std::ptr::eq(*l, b))
                    .map(|l| format!(
                        "; {:+.3} % in W from {}",
                        100.0 * (b.w_per_unit() / l.w_per_unit() - 1.0),
                        if l.method == crate::estimate::Method::Pauling {
                            "Pauling's estimate"
                        } else {
                            "the Bethe approximation"
                        }
                    ))
                    .unwrap_or_default(),
                text::reason_words(s, v)
            )?;
        }
        None => writeln!(o, "**No value can be cited** from this run.\n")?,
    }
    for passed in &cited.passed_over {
        writeln!(o, "**Warning:** {}.\n", text::refusal_words(passed, unit))?;
    }
    if let Some(stop) = &s.stopped {
        writeln!(o, "Exact counts stopped: {}.\n", text::stop_words(stop))?;
    }
    for n in w.notes() {
        writeln!(o, "- {n}")?;
    }
    if !s.notes.is_empty() {
        writeln!(o)?;
    }

    if !s.exact.is_empty() {
        writeln!(o, "## Exact counts\n")?;
        let mut t = Table::new(&[
            "cell",
            "formula units",
            "arrangements",
            &format!("W per {unit}"),
        ]);
        for e in &s.exact {
            t.row(vec![
                e.cells.clone().unwrap_or_default(),
                amount(e.formula_units),
                e.count.as_ref().map(|c| c.to_string()).unwrap_or_default(),
                sig(e.w_per_unit(), 10),
            ]);
        }
        writeln!(o, "{}", t.render_markdown())?;
        writeln!(
            o,
            "Counts of finite periodic cells are exact for that torus; W per {unit} approaches the \
             infinite crystal's value as the cell grows (the smallest cells wrap bonds onto themselves).\n"
        )?;
    }
    if let Some(tm) = &s.strips {
        writeln!(o, "## Transfer matrix\n")?;
        let mut t = Table::new(&[
            "width L",
            "states",
            "iterations",
            "ln λ",
            &format!("W per {unit}"),
        ]);
        for r in &tm.widths {
            t.row(vec![
                r.width.to_string(),
                r.states.to_string(),
                r.iterations.to_string(),
                sig(r.ln_lambda, 12),
                sig(r.ln_w_per_unit.exp(), 12),
            ]);
        }
        writeln!(o, "{}", t.render_markdown())?;
        let e = &tm.estimate;
        writeln!(
            o,
            "Extrapolated to infinite width: W = {} per {unit} ({}, {} fits{}).\n",
            pm(e.w_per_unit(), e.sigma_w(), 12),
            crate::json::scaling_word(tm.extrapolation.scaling),
            tm.extrapolation.fits.len(),
            tm.central_charge
                .map(|c| format!("; fitted central charge {}", sig(c, 4)))
                .unwrap_or_default()
        )?;
    }
    if let Some(m) = &s.sampled {
        let x = &m.sampled;
        writeln!(o, "## Monte Carlo\n")?;
        let mut t = Table::new(&["", ""]);
        t.row(vec!["cell (the largest sampled)".into(), m.cells.clone()]);
        t.row(vec![
            "formula units".into(),
            amount(x.estimate.formula_units),
        ]);
        t.row(vec!["seed".into(), x.seed.to_string()]);
        t.row(vec!["replicas".into(), x.replicas.to_string()]);
        t.row(vec!["measured sweeps".into(), x.samples.to_string()]);
        t.row(vec!["largest β".into(), sig(x.beta_max, 4)]);
        t.row(vec![
            format!("σ of ln W per {unit}: statistical, quadrature, tail"),
            format!(
                "{}, {}, {}",
                sig(x.sigma_statistical, 2),
                sig(x.sigma_quadrature, 2),
                sig(x.sigma_tail, 2)
            ),
        ]);
        writeln!(o, "{}", t.render_markdown())?;
        writeln!(
            o,
            "Thermodynamic integration of the mean number of violated constraints over inverse \
             temperature, relative to the Pauling reference; the error bar is the sum of the three \
             parts above (for the largest cell). A finite torus gives a larger W than the infinite crystal.\n"
        )?;
        if let Some(x) = &s.extrapolated {
            writeln!(
                o,
                "The cells {} were sampled with the same settings and extrapolated to the infinite \
                 crystal by the weighted fit {} in the number N of formula units (χ² = {} for {} degrees \
                 of freedom; σ scaled by √(χ²/dof) when above 1): W = {} per {unit}.\n",
                crate::estimate::cell_list(&s.sampled_sizes),
                x.details.form(),
                sig(x.details.chi2, 3),
                x.details.dof,
                pm(x.estimate.w_per_unit(), x.estimate.sigma_w(), 8)
            )?;
        }
    }
    if let Some(k) = &w.comparison {
        writeln!(o, "## Calorimetric comparison\n")?;
        let (r, dr) = k.residual();
        let (wk, dwk) = k.w_per_unit();
        let mut t = Table::new(&["quantity", "value"]);
        t.row(vec!["heat-capacity data".into(), format!("`{}`", k.file)]);
        t.row(vec![
            if k.magnetic.is_some() {
                format!(
                    "magnetic entropy released ΔS_mag(0..{} K) per {unit}",
                    sig(k.temperature_k, 5)
                )
            } else {
                format!("third-law entropy S_cal({} K)", sig(k.temperature_k, 5))
            },
            format!("{} J/(mol K)", pm(k.s_cal.0, Some(k.s_cal.1), 6)),
        ]);
        t.row(vec![
            format!(
                "of which {} below {} K{}",
                k.low_t_words,
                sig(k.lowest_k, 4),
                k.debye_temperature_k
                    .map_or(String::new(), |d| format!(" (θ_D = {} K)", sig(d, 4)))
            ),
            format!("{} J/(mol K)", sig(k.extrapolated, 4)),
        ]);
        if let Some(m) = &k.magnetic
            && let Some(l) = &m.lattice_term
        {
            t.row(vec!["lattice term subtracted".into(), l.clone()]);
        }
        t.row(vec![
            match &k.magnetic {
                Some(m) => format!(
                    "free-ion entropy m R ln {} (m = {} magnetic ions per {unit})",
                    m.q,
                    crate::text::trimmed(m.ions_per_unit, 6)
                ),
                None => "statistical entropy S_stat (given)".into(),
            },
            if k.magnetic.is_some() {
                format!("{} J/(mol K)", sig(k.s_stat.0, 6))
            } else if k.s_stat_sigma_given {
                format!("{} J/(mol K)", pm(k.s_stat.0, Some(k.s_stat.1), 6))
            } else {
                format!(
                    "{} J/(mol K), given without 1σ (0 used)",
                    sig(k.s_stat.0, 6)
                )
            },
        ]);
        t.row(vec![
            if k.magnetic.is_some() {
                "residual m R ln q − ΔS_mag".into()
            } else {
                "residual S_stat − S_cal".into()
            },
            format!("{} J/(mol K)", pm(r, Some(dr), 4)),
        ]);
        t.row(vec![
            format!("W per {unit} = exp(residual/R)"),
            pm(wk, Some(dwk), 4),
        ]);
        if let Some(v) = &cited.value {
            let b = v.estimate;
            t.row(vec![
                format!("computed ({}, cited)", method_label(b)),
                format!(
                    "{} J/(mol K)",
                    pm(b.s_j_per_mol_k(), b.sigma_s_j_per_mol_k(), 6)
                ),
            ]);
        }
        t.row(vec![
            if local::caveat(p).is_some() {
                "Pauling (not meaningful: W below 1)".into()
            } else {
                "Pauling".into()
            },
            format!("{} J/(mol K)", sig(p.s_j_per_mol_k(), 6)),
        ]);
        writeln!(o, "{}", t.render_markdown())?;
        for n in &k.notes {
            if let Some(rest) = n.strip_prefix("WARNING: ") {
                writeln!(o, "**Warning:** {rest}.\n")?;
            } else {
                let mut c = n.chars();
                let first: String = c.next().into_iter().flat_map(char::to_uppercase).collect();
                writeln!(o, "{first}{}.\n", c.as_str())?;
            }
        }
        if !k.s_stat_sigma_given {
            writeln!(
                o,
                "The statistical entropy was given without an uncertainty: σ = 0 is used, so the \
                 residual's 1σ holds only the calorimetric part.\n"
            )?;
        }
        match &cited.value {
            Some(v) => {
                let b = v.estimate;
                let z = (b.s_j_per_mol_k() - r) / b.sigma_s_j_per_mol_k().unwrap_or(0.0).hypot(dr);
                writeln!(
                    o,
                    "The computed value differs from the calorimetric residual by {} combined standard errors \
                     ({}).\n",
                    sig(z.abs(), 2),
                    if z.abs() <= 2.0 {
                        "consistent"
                    } else {
                        "not consistent at 2σ"
                    }
                )?;
            }
            None => writeln!(
                o,
                "No computed value can be cited from this run, so none is compared.\n"
            )?,
        }
    }
    let figures = w.figures();
    if !figures.is_empty() {
        writeln!(o, "## Figures\n")?;
        for f in &figures {
            writeln!(o, "![{}]({})\n\n{}\n", f.file, f.file, f.caption)?;
        }
    }
    writeln!(o, "## What the numbers rest on\n")?;
    writeln!(
        o,
        "- The count is of the arrangements the lattice file's rules allow, nothing else: a \
         rule missing from the file (or a real crystal's defects, partial order or strain) changes \
         the physical answer but not this number."
    )?;
    writeln!(
        o,
        "- Pauling's estimate treats constraints as independent; it is not a bound in general. \
         For the ice rule on a four-coordinated network (two arrows in, two out at every site) \
         it is a rigorous lower bound (Schrijver 1983, Combinatorica 3, 375; from memory)."
    )?;
    writeln!(
        o,
        "- Exact counts are exact for the periodic cell named; transfer-matrix and Monte Carlo \
         values are estimates for the infinite crystal whose uncertainties are stated above."
    )?;
    if w.comparison.is_some() {
        writeln!(
            o,
            "- The calorimetric residual depends on the heat-capacity data, the Debye extrapolation \
             below the lowest temperature and the statistical entropy given; a number for a \
             thermodynamic database should cite those sources too."
        )?;
    }
    writeln!(o)?;
    writeln!(o, "## To cite\n")?;
    match w.sentence() {
        Sentence::Cite(t) => writeln!(o, "> {t}\n")?,
        Sentence::Refused(why) => writeln!(o, "**Not for citing:** {why}.\n")?,
    }
    writeln!(o, "## Run\n")?;
    writeln!(o, "- groundcount {}, {}", w.meta.version, w.meta.date)?;
    writeln!(o, "- budget: {} s", sig(s.budget, 4))?;
    // The Monte Carlo extrapolation's time is that of its cells, already counted.
    let total: f64 = s.estimates().iter().map(|e| e.seconds).sum::<f64>()
        - s.extrapolated.as_ref().map_or(0.0, |x| x.estimate.seconds);
    writeln!(o, "- wall time of the counts: {:.1} s", total)?;
    Ok(())
}
