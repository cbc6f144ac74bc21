//! Turning estimates into text: aligned tables and JSON values.
//!
//! Reports read only [`Estimate`]s (and the crystal's name and formula unit); they never
//! compute. Nothing here prints: the binary decides where the text goes.

use serde_json::{Value, json};

use crate::crystal::Crystal;
use crate::estimate::Estimate;

/// A plain-text table with a header row; columns are left-aligned and padded.
#[derive(Clone, Debug, Default)]
pub struct Table {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl Table {
    /// A table with these column headings.
    pub fn new(header: &[&str]) -> Table {
        Table {
            header: header.iter().map(|s| s.to_string()).collect(),
            rows: Vec::new(),
        }
    }
    /// Append a row.
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }
    /// Render with two spaces between columns.
    pub fn render(&self) -> String {
        let n = self.header.len();
        let mut width = vec![0; n];
        for r in std::iter::once(&self.header).chain(&self.rows) {
            for (w, c) in width.iter_mut().zip(r) {
                *w = (*w).max(c.chars().count());
            }
        }
        let line = |r: &Vec<String>| {
            let cells: Vec<String> = r
                .iter()
                .zip(&width)
                .map(|(c, w)| format!("{c:<w$}"))
                .collect();
            cells.join("  ").trim_end().to_string() + "\n"
        };
        let mut out = line(&self.header);
        out += &(width
            .iter()
            .map(|w| "-".repeat(*w))
            .collect::<Vec<_>>()
            .join("  ")
            + "\n");
        for r in &self.rows {
            out += &line(r);
        }
        out
    }
    /// Render as CSV (header first).
    pub fn render_csv(&self) -> String {
        let esc = |c: &String| {
            if c.contains([',', '"', '\n']) {
                format!("\"{}\"", c.replace('"', "\"\""))
            } else {
                c.clone()
            }
        };
        std::iter::once(&self.header)
            .chain(&self.rows)
            .map(|r| r.iter().map(esc).collect::<Vec<_>>().join(",") + "\n")
            .collect()
    }
    /// Render as a Markdown table.
    pub fn render_markdown(&self) -> String {
        let mut out = format!("| {} |\n", self.header.join(" | "));
        out += &format!("|{}\n", " --- |".repeat(self.header.len()));
        for r in &self.rows {
            out += &format!("| {} |\n", r.join(" | "));
        }
        out
    }
}

/// A number with `digits` significant digits, plain notation where it reads well.
pub fn sig(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return if x.is_nan() {
            "n/a".into()
        } else if x > 0.0 {
            "inf".into()
        } else {
            "-inf".into()
        };
    }
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-4..=9).contains(&mag) {
        return format!("{:.*e}", digits.saturating_sub(1), x);
    }
    let decimals = (digits as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

/// The method column of a table.
pub fn method_label(e: &Estimate) -> String {
    match e.method {
        crate::estimate::Method::Pauling => "Pauling".into(),
        crate::estimate::Method::Bethe => "Bethe".into(),
        crate::estimate::Method::Exact => "exact count".into(),
        crate::estimate::Method::MonteCarlo => "Monte Carlo".into(),
        crate::estimate::Method::TransferMatrix => "transfer matrix".into(),
    }
}

/// One row per estimate: method, cell, formula units, count, W, S0/R, S0 in J/(mol K), time.
pub fn comparison_table(estimates: &[Estimate], unit: &str) -> Table {
    let w_head = format!("W per {unit}");
    let mut t = Table::new(&[
        "method",
        "cell",
        "formula units",
        "count",
        &w_head,
        "S0/R",
        "S0 J/(mol K)",
        "time s",
    ]);
    for e in estimates {
        let count = match &e.count {
            Some(c) => {
                let s = c.to_string();
                if s.len() > 20 {
                    format!("{}…e{}", &s[..6], s.len() - 1)
                } else {
                    s
                }
            }
            None => "—".into(),
        };
        let pm = |v: String, s: Option<f64>| match s {
            Some(s) => format!("{v} ± {}", sig(s, 2)),
            None => v,
        };
        t.row(vec![
            method_label(e),
            e.cells.clone().unwrap_or_else(|| "infinite crystal".into()),
            if e.cells.is_some() {
                sig(e.formula_units, 6)
            } else {
                "—".into()
            },
            count,
            pm(sig(e.w_per_unit(), 10), e.sigma_w()),
            pm(sig(e.s_over_r(), 8), e.sigma_ln_w),
            pm(sig(e.s_j_per_mol_k(), 6), e.sigma_s_j_per_mol_k()),
            format!("{:.3}", e.seconds),
        ]);
    }
    t
}

/// The JSON object of one estimate, with the keys documented in README.
pub fn estimate_json(crystal: &Crystal, e: &Estimate, pauling: Option<&Estimate>) -> Value {
    let mut v = json!({
        "lattice": crystal.name,
        "file": crystal.path.display().to_string(),
        "formula_unit": crystal.formula_unit.name,
        "method": e.method.name(),
        "cells": e.cells,
        "count": e.count.as_ref().map(|c| c.to_string()),
        "ln_count": finite(e.ln_count),
        "formula_units": e.formula_units,
        "w_per_unit": finite(e.w_per_unit()),
        "s_over_r": finite(e.s_over_r()),
        "s_j_per_mol_k": finite(e.s_j_per_mol_k()),
        "uncertainty": e.sigma_w(),
        "s_uncertainty": e.sigma_s_j_per_mol_k(),
        "seconds": e.seconds,
        "peak_states": e.peak_states,
    });
    if let Some(p) = pauling {
        v["pauling"] = json!({
            "w_per_unit": finite(p.w_per_unit()),
            "s_over_r": finite(p.s_over_r()),
            "s_j_per_mol_k": finite(p.s_j_per_mol_k()),
        });
    }
    v
}

/// JSON has no infinities: a zero count has ln = −∞, reported as null.
fn finite(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(sig(1.5, 4), "1.500");
        assert_eq!(sig(3.371218, 6), "3.37122");
        assert_eq!(sig(123456.0, 3), "123456");
        assert_eq!(sig(1.0e-7, 3), "1.00e-7");
        assert_eq!(sig(0.0, 3), "0");
    }

    #[test]
    fn tables_align_and_escape() {
        let mut t = Table::new(&["a", "bb"]);
        t.row(vec!["xyz".into(), "1,2".into()]);
        assert_eq!(t.render(), "a    bb\n---  ---\nxyz  1,2\n");
        assert_eq!(t.render_csv(), "a,bb\nxyz,\"1,2\"\n");
    }
}
