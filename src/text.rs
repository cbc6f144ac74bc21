//! Turning estimates into text: aligned tables, CSV and Markdown (the JSON documents are
//! in [`crate::json`]).
//!
//! Reports read only [`Estimate`]s, a [`Survey`]'s choices and cross-checks (and the
//! crystal's name and formula unit); they never compute. Nothing here prints: the binary
//! decides where the text goes.
//!
//! Conventions shared by every command: text tables fit in 100 columns; every number says
//! per what and in what unit (in its column heading or beside it); whole numbers print
//! without decimals ([`amount`]); CSV cells hold plain numbers ([`number`]: a value and its
//! uncertainty in separate columns, empty where there is none).

use crate::counters::extrapolate::Scaling;
use crate::counters::local;
use crate::crosscheck::{CrossCheck, Route};
use crate::estimate::Estimate;
use crate::estimate::{
    CitedReason, CitedValue, ExactStop, Hint, Note, PassedOver, Refusal, SectorWidths, Stage,
    Survey,
};

/// A plain-text table with a header row; columns are left-aligned and padded.
///
/// A table may carry a second layout for CSV ([`Table::with_csv`], [`Table::csv_row`]):
/// there every number is a plain number in its own cell (a value and its uncertainty in
/// separate columns, empty where there is none), while the text and Markdown layouts may
/// round, join and abbreviate for reading.
#[derive(Clone, Debug, Default)]
pub struct Table {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
    csv_header: Vec<String>,
    csv_rows: Vec<Vec<String>>,
}

impl Table {
    /// A table with these column headings.
    pub fn new(header: &[&str]) -> Table {
        Table {
            header: header.iter().map(|s| s.to_string()).collect(),
            ..Table::default()
        }
    }
    /// Give the table a CSV layout with these column headings (rows through
    /// [`Table::csv_row`]); without one, CSV repeats the text layout.
    pub fn with_csv(mut self, header: &[&str]) -> Table {
        self.csv_header = header.iter().map(|s| s.to_string()).collect();
        self
    }
    /// Append a row.
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }
    /// Append a row of the CSV layout.
    pub fn csv_row(&mut self, cells: Vec<String>) {
        self.csv_rows.push(cells);
    }
    /// Width in characters of the text layout's widest line.
    pub fn width(&self) -> usize {
        self.render()
            .lines()
            .map(|l| l.chars().count())
            .max()
            .unwrap_or(0)
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
        let (header, rows) = if self.csv_header.is_empty() {
            (&self.header, &self.rows)
        } else {
            (&self.csv_header, &self.csv_rows)
        };
        std::iter::once(header)
            .chain(rows)
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

/// A number of formula units, sites or the like: a whole number without decimals
/// ("4", not "4.00000"), otherwise six significant digits.
pub fn amount(x: f64) -> String {
    if x.is_finite() && x.abs() < 1e15 && (x - x.round()).abs() < 1e-9 * x.abs().max(1.0) {
        format!("{}", x.round() as i64)
    } else {
        sig(x, 6)
    }
}

/// A measured or given quantity such as a temperature, to at most `digits` significant
/// digits without trailing zeros ("4", "12.5", "298.15").
pub fn trimmed(x: f64, digits: usize) -> String {
    let s = sig(x, digits);
    if s.contains('.') && !s.contains('e') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A wall time in seconds in at most six characters: milliseconds below 10 s, fewer
/// decimals above.
pub fn seconds(x: f64) -> String {
    let decimals = match x {
        x if x < 10.0 => 3,
        x if x < 100.0 => 2,
        x if x < 1000.0 => 1,
        _ => 0,
    };
    format!("{x:.decimals$}")
}

/// A plain number for a CSV cell: every digit that survives a round trip, in exponent
/// notation only where plain notation would be long; empty when not finite (a CSV cell
/// holds a number or nothing, never `inf`, `NaN`, `±` or a dash).
pub fn number(x: f64) -> String {
    if !x.is_finite() {
        return String::new();
    }
    if x == 0.0 || (1e-4..1e15).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// [`number`] of an optional value: empty when there is none.
pub fn optional(x: Option<f64>) -> String {
    x.map(number).unwrap_or_default()
}

/// A value shown to the precision its 1σ supports: to one digit beyond the second
/// significant digit of σ (at most `digits` significant digits; `digits` when there is no
/// σ or it is zero).
pub fn to_sigma(x: f64, sigma: Option<f64>, digits: usize) -> String {
    let Some(s) = sigma.filter(|s| s.is_finite() && *s > 0.0) else {
        return sig(x, digits);
    };
    if !x.is_finite() || x == 0.0 {
        return sig(x, digits);
    }
    // Significant digits of x down to the decimal one below σ's second digit.
    let lowest = s.log10().floor() as i32 - 2;
    let top = x.abs().log10().floor() as i32;
    let wanted = (top - lowest + 1).clamp(2, digits as i32) as usize;
    sig(x, wanted)
}

/// `x ± σ` with σ to two significant digits and x to match ([`to_sigma`]); x alone when
/// there is no σ.
pub fn plus_minus(x: f64, sigma: Option<f64>, digits: usize) -> String {
    match sigma {
        Some(s) => format!("{} ± {}", to_sigma(x, Some(s), digits), sig(s, 2)),
        None => sig(x, digits),
    }
}

/// The lines that say what a weighted estimate rests on: ln Z per formula unit, and for
/// every imposed mean the target, the conjugate field and the mean reached (empty for an
/// unweighted estimate).
pub fn weighing_lines(e: &Estimate, unit: &str) -> Vec<String> {
    let Some(w) = &e.weighing else {
        return Vec::new();
    };
    let mut lines = vec![format!(
        "{}: ln Z = {} per {unit} (weights and fields included); its S0/R = ln Z − ⟨ln weight⟩ per {unit}",
        method_label(e),
        sig(w.ln_z_per_unit, 10)
    )];
    for f in &w.fields {
        lines.push(format!(
            "  {} ({}): target mean {}, conjugate field h = {} (dimensionless, ln of the state's activity), mean reached {}",
            f.label,
            f.kind.word(),
            sig(f.target, 10),
            sig(f.field, 8),
            sig(f.achieved, 10)
        ));
    }
    lines
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

/// The cell of an estimate, or "infinite crystal".
pub fn cell_label(e: &Estimate) -> String {
    e.cells.clone().unwrap_or_else(|| "infinite crystal".into())
}

/// An exact count shortened for a table column of at most 12 characters
/// ("344199…e24"); the JSON and CSV carry every digit.
fn short_count(c: &num_bigint::BigUint) -> String {
    let s = c.to_string();
    if s.len() > 12 {
        format!("{}…e{}", &s[..6], s.len() - 1)
    } else {
        s
    }
}

/// What a comparison table shows besides the values.
#[derive(Clone, Copy, Debug)]
pub struct Columns {
    /// The exact count column.
    pub count: bool,
    /// The wall-time column.
    pub time: bool,
}

impl Default for Columns {
    fn default() -> Self {
        Columns {
            count: true,
            time: true,
        }
    }
}

/// How a row of a survey's table stands: cited, passed over, flagged.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Standing {
    /// The value to cite.
    pub cited: bool,
    /// Its method's cross-checks: `Some(true)` all agree, `Some(false)` one failed.
    pub checked: Option<bool>,
    /// A local estimate that is not meaningful (W below 1).
    pub not_meaningful: bool,
}

/// One row per estimate, in at most 100 columns of text: method, cell, formula units in
/// the cell, exact count, W per formula unit and its 1σ, S0 in J/(mol K) per mole of
/// formula units, wall time. S0/R (= ln W) and the 1σ of S0 are in the CSV layout, which
/// holds plain numbers: W, S0/R and S0 each with its 1σ in the next column.
pub fn comparison_table(estimates: &[Estimate], unit: &str) -> Table {
    comparison_table_with(estimates, unit, Columns::default(), &[])
}

/// [`comparison_table`] with a choice of columns, and a [`Standing`] per row (rows without
/// one stand plain). A local estimate that is not meaningful is marked `*` after its
/// method; the caller explains the mark.
pub fn comparison_table_with(
    estimates: &[Estimate],
    unit: &str,
    columns: Columns,
    standing: &[Standing],
) -> Table {
    let w_head = format!("W per {unit}");
    let mut head = vec!["method", "cell", "units"];
    if columns.count {
        head.push("count");
    }
    head.extend([w_head.as_str(), "1σ of W", "S0 J/(mol K)"]);
    if columns.time {
        head.push("time s");
    }
    let w_csv = format!("W per {unit}");
    let units_csv = format!("{unit} in cell");
    let mut csv_head = vec!["method", "cell", units_csv.as_str()];
    if columns.count {
        csv_head.push("count");
    }
    csv_head.extend([
        w_csv.as_str(),
        "1σ of W",
        "S0/R",
        "1σ of S0/R",
        "S0 J/(mol K)",
        "1σ of S0 J/(mol K)",
    ]);
    if columns.time {
        csv_head.push("time s");
    }
    if !standing.is_empty() {
        csv_head.extend(["cited", "cross-check", "meaningful"]);
    }
    let mut t = Table::new(&head).with_csv(&csv_head);
    for (i, e) in estimates.iter().enumerate() {
        let st = standing.get(i).copied().unwrap_or_default();
        let mut label = method_label(e);
        if st.not_meaningful {
            label.push_str(" *");
        }
        let units = if e.cells.is_some() {
            amount(e.formula_units)
        } else {
            String::new()
        };
        let sigma_w = e.sigma_w();
        let w = if e.ln_w_per_unit == f64::NEG_INFINITY {
            "0".to_string()
        } else {
            to_sigma(e.w_per_unit(), sigma_w, 10)
        };
        let s0 = if e.ln_w_per_unit == f64::NEG_INFINITY {
            "−∞ (none)".to_string()
        } else {
            to_sigma(e.s_j_per_mol_k(), e.sigma_s_j_per_mol_k(), 6)
        };
        let mut row = vec![label, cell_label(e), units.clone()];
        if columns.count {
            row.push(e.count.as_ref().map(short_count).unwrap_or_default());
        }
        row.extend([w, sigma_w.map(|s| sig(s, 2)).unwrap_or_default(), s0]);
        if columns.time {
            row.push(seconds(e.seconds));
        }
        t.row(row);
        let mut csv = vec![
            method_label(e),
            cell_label(e),
            if e.cells.is_some() {
                number(e.formula_units)
            } else {
                String::new()
            },
        ];
        if columns.count {
            csv.push(e.count.as_ref().map(|c| c.to_string()).unwrap_or_default());
        }
        csv.extend([
            number(e.w_per_unit()),
            optional(sigma_w),
            number(e.s_over_r()),
            optional(e.sigma_ln_w),
            number(e.s_j_per_mol_k()),
            optional(e.sigma_s_j_per_mol_k()),
        ]);
        if columns.time {
            csv.push(number(e.seconds));
        }
        if !standing.is_empty() {
            csv.push(if st.cited { "yes" } else { "no" }.into());
            csv.push(match st.checked {
                Some(true) => "agrees".into(),
                Some(false) => "disagrees".into(),
                None => String::new(),
            });
            csv.push(if st.not_meaningful { "no" } else { "yes" }.into());
        }
        t.csv_row(csv);
    }
    t
}

/// The survey's estimates in a comparison table, each row with its [`Standing`].
pub fn survey_table(s: &Survey, unit: &str, columns: Columns) -> Table {
    let rows = s.estimates();
    let cited = s.cited();
    let standing: Vec<Standing> = rows
        .iter()
        .map(|e| {
            let checks: Vec<&CrossCheck> =
                s.checks.iter().filter(|c| c.method == e.method).collect();
            let local = matches!(
                e.method,
                crate::estimate::Method::Pauling | crate::estimate::Method::Bethe
            );
            Standing {
                cited: cited
                    .value
                    .as_ref()
                    .is_some_and(|v| same_estimate(v.estimate, e)),
                checked: (!checks.is_empty()).then(|| checks.iter().all(|c| c.agrees())),
                not_meaningful: local && local::caveat(e).is_some(),
            }
        })
        .collect();
    comparison_table_with(&rows, unit, columns, &standing)
}

/// Whether two estimates are the same row (method, cell and value).
fn same_estimate(a: &Estimate, b: &Estimate) -> bool {
    a.method == b.method
        && a.cells == b.cells
        && a.ln_w_per_unit.to_bits() == b.ln_w_per_unit.to_bits()
}

/// The second route of a cross-check, in words.
pub fn route_words(route: &Route) -> String {
    match route {
        Route::FullSpace { width } => format!("full state space, width {width}"),
        Route::TorusTrace { width, length } => {
            format!("frontier count of the {width}x{length} torus")
        }
        Route::ExactCount { cells } => format!("exact count, {cells}"),
        Route::WangLandau { cells } => format!("Wang–Landau, {cells}"),
        Route::MonteCarloRealisations {
            cells,
            realisations,
        } => format!("Monte Carlo of the same {realisations} realisations, {cells}"),
        Route::NeighbourSectors { width } => {
            format!("≥ neighbouring sectors, width {width}")
        }
        Route::TorusBound { width, length } => {
            format!("≥ bound from the {width}x{length} torus count")
        }
    }
}

/// The method of a cross-check, as in tables.
fn check_method(c: &CrossCheck) -> String {
    match c.method {
        crate::estimate::Method::Pauling => "Pauling".into(),
        crate::estimate::Method::Bethe => "Bethe".into(),
        crate::estimate::Method::Exact => "exact count".into(),
        crate::estimate::Method::MonteCarlo => "Monte Carlo".into(),
        crate::estimate::Method::TransferMatrix => "transfer matrix".into(),
    }
}

/// The cross-checks of a run, one row each: the method checked, the second route, the
/// checked value (ln W per formula unit), the difference from the second route, the
/// tolerance and the verdict. The CSV layout adds the second route's value.
pub fn checks_table(checks: &[CrossCheck], unit: &str) -> Table {
    let value_head = format!("ln W per {unit}");
    let mut t = Table::new(&[
        "method",
        "compared with",
        &value_head,
        "difference",
        "tolerance",
        "result",
    ])
    .with_csv(&[
        "method",
        "compared with",
        &value_head,
        "second route",
        "difference",
        "tolerance",
        "agrees",
    ]);
    for c in checks {
        let diff = c.value - c.reference;
        t.row(vec![
            check_method(c),
            route_words(&c.route),
            sig(c.value, 10),
            format!("{:+.1e}", diff),
            format!("{:.1e}", c.tolerance),
            if c.agrees() { "agrees" } else { "DISAGREES" }.into(),
        ]);
        t.csv_row(vec![
            check_method(c),
            route_words(&c.route),
            number(c.value),
            number(c.reference),
            number(diff),
            number(c.tolerance),
            if c.agrees() { "yes" } else { "no" }.into(),
        ]);
    }
    t
}

/// A failed cross-check in one loud sentence, with both values as W per formula unit.
pub fn check_failure(c: &CrossCheck, unit: &str) -> String {
    format!(
        "CROSS-CHECK FAILED: {} gives W = {} per {unit} (ln W = {}) but the {} gives W = {} \
         (ln W = {}): they differ by {} in ln W, beyond the tolerance {}; the {} value is not \
         cited",
        check_method(c),
        sig(c.value.exp(), 10),
        sig(c.value, 10),
        route_words(&c.route),
        sig(c.reference.exp(), 10),
        sig(c.reference, 10),
        sig((c.value - c.reference).abs(), 2),
        sig(c.tolerance, 2),
        check_method(c),
    )
}

/// Why a cited value is the one, in words.
pub fn reason_words(s: &Survey, v: &CitedValue<'_>) -> String {
    let base = match v.reason {
        CitedReason::TransferMatrix => {
            let w: Vec<usize> = s
                .strips
                .as_ref()
                .map(|t| t.widths.iter().map(|r| r.width).collect())
                .unwrap_or_default();
            format!(
                "strips of width {}..{} extrapolated to infinite width, the first choice",
                w.first().copied().unwrap_or(0),
                w.last().copied().unwrap_or(0)
            )
        }
        CitedReason::MonteCarloExtrapolated => {
            let x = s.extrapolated.as_ref();
            format!(
                "{} Monte Carlo cells extrapolated to the infinite crystal ({}, χ² = {} for {} degrees of freedom)",
                s.sampled_sizes.len(),
                x.map_or("", |x| x.details.form()),
                x.map_or("".into(), |x| sig(x.details.chi2, 3)),
                x.map_or(0, |x| x.details.dof)
            )
        }
        CitedReason::MonteCarloCell => "the largest Monte Carlo cell, not extrapolated: a finite \
             cell, not the infinite crystal"
            .into(),
        CitedReason::ExactCell => "the largest exact cell with an arrangement: exact for this \
             finite cell only, not the infinite crystal"
            .into(),
        CitedReason::Bethe => "no count ran: the Bethe approximation, not a count".into(),
        CitedReason::Pauling => "no count ran: Pauling's estimate, not a count".into(),
    };
    let checks = match v.checks.len() {
        0 if v.reason.is_local_estimate() => String::new(),
        0 => "; no cross-check in this run".into(),
        1 => "; its cross-check agrees".into(),
        n => format!("; its {n} cross-checks agree"),
    };
    format!("{base}{checks}")
}

/// Why a candidate was passed over, in words.
pub fn refusal_words(p: &PassedOver<'_>, unit: &str) -> String {
    let what = format!("{} ({})", method_label(p.estimate), cell_label(p.estimate));
    match &p.why {
        Refusal::CheckFailed(checks) => format!(
            "{what} not cited: it disagrees with {}",
            checks
                .iter()
                .map(|c| format!("the {}", route_words(&c.route)))
                .collect::<Vec<_>>()
                .join(" and ")
        ),
        Refusal::NoDegreesOfFreedom => format!(
            "{what} not cited: its fit has as many parameters as cells (zero degrees of freedom), \
             so nothing tests it"
        ),
        Refusal::NotMeaningful(c) => format!("{what} not cited: {}", c.explain(unit)),
    }
}

/// The last line of a survey's table: the value to cite, its method and why; or that
/// nothing can be cited, and why.
pub fn cited_line(s: &Survey, unit: &str) -> String {
    let c = s.cited();
    let passed: Vec<String> = c
        .passed_over
        .iter()
        .map(|p| refusal_words(p, unit))
        .collect();
    match &c.value {
        Some(v) => {
            let e = v.estimate;
            let mut line = format!(
                "cite: W = {} per {unit}, S0 = {} J/(mol K) per mole of {unit} (S0/R = {}) — {}, {}: {}",
                plus_minus(e.w_per_unit(), e.sigma_w(), 12),
                plus_minus(e.s_j_per_mol_k(), e.sigma_s_j_per_mol_k(), 12),
                plus_minus(e.s_over_r(), e.sigma_ln_w, 12),
                method_label(e),
                cell_label(e),
                reason_words(s, v)
            );
            if !passed.is_empty() {
                line += &format!(" (WARNING: {})", passed.join("; "));
            }
            line
        }
        None => format!(
            "cite: NOTHING — no value of this run can be cited: {}",
            passed.join("; ")
        ),
    }
}

/// Advice on what to run next, in words that name no command (a library user's reading);
/// the binary words it with its commands.
pub fn hint_words(h: Hint) -> String {
    match h {
        Hint::StripShowsEveryWidth => "a run of strips alone shows every width".into(),
        Hint::RaiseBudgetOrStrip => "raise the budget or run the strips alone".into(),
        Hint::SampleRunsLonger => "a Monte Carlo run alone samples larger cells and longer".into(),
    }
}

/// Why the exact counts of a survey stopped, in words.
pub fn stop_words(stop: &ExactStop) -> String {
    match stop {
        ExactStop::Interrupted => "interrupted".into(),
        ExactStop::CellSizeLimit => "cell size limit reached".into(),
        ExactStop::NothingRestricted => {
            "no rule restricts any variable (every variable is free), so \
                                         larger cells give the same W per formula unit"
                .into()
        }
        ExactStop::Deadline { budget, cells } => format!(
            "the exact counts' share (40 %) of the {budget} s budget ran out while counting {cells}"
        ),
        ExactStop::States { cells, max_states } => {
            format!("{cells} needs more than {max_states} frontier states")
        }
        ExactStop::InterruptedWhile { cells } => format!("interrupted while counting {cells}"),
        ExactStop::BudgetSpent { budget } => {
            format!("the exact counts' share of the {budget} s budget is spent")
        }
    }
}

/// A stage of a survey in words.
fn stage_words(stage: Stage) -> &'static str {
    match stage {
        Stage::TransferMatrix => "transfer matrix",
        Stage::MonteCarlo => "Monte Carlo",
    }
}

/// How the kept charge sectors were established, in words ("" when no sector was kept).
fn sector_words(s: &SectorWidths) -> String {
    if s.full_space.is_empty() && s.neighbours.is_empty() && s.predicted.is_empty() {
        return String::new();
    }
    let list = |v: &[usize]| match v {
        [] => String::new(),
        [a] => a.to_string(),
        [a, .., b] => format!("{a}..{b}"),
    };
    let mut parts = Vec::new();
    if !s.full_space.is_empty() {
        parts.push(format!(
            "checked against the full space at widths {}",
            list(&s.full_space)
        ));
    }
    if !s.neighbours.is_empty() {
        parts.push(format!(
            "against the neighbouring charges at {}",
            list(&s.neighbours)
        ));
    }
    if !s.predicted.is_empty() {
        parts.push(format!("predicted from those at {}", list(&s.predicted)));
    }
    format!("; the charge sector of each width {}", parts.join(", "))
}

/// A survey's note in words, with the advice on what to run next worded by `hint`
/// ([`hint_words`], or the binary's words that name its commands).
pub fn note_words(note: &Note, hint: &dyn Fn(Hint) -> String) -> String {
    match note {
        Note::Diluted { realisations } => format!(
            "with vacancies: values are per formula unit present (a vacant site is no formula \
             unit, as in Ke et al. 2007); Pauling's row is the generalized Pauling estimate \
             averaged over the vacancies; each exact row is the mean of ln W over \
             {realisations} random realisations of the vacancies of that cell, its 1σ the \
             standard error of that mean, its units the mean number of formula units present"
        ),
        Note::BetheLeftOut { error } => format!("Bethe approximation left out: {error}"),
        Note::Unweighted { method } => format!(
            "{method} left out: it cannot yet take the weights, occupancies or compositions of this file"
        ),
        Note::StageNotRun { stage } => format!("{}: not run (interrupted)", stage_words(*stage)),
        Note::StageInterrupted { stage } => {
            format!("{}: stopped (interrupted)", stage_words(*stage))
        }
        Note::Interrupted => {
            "interrupted (Ctrl-C): the values given are those finished before the interrupt".into()
        }
        Note::StripBudgetRanOut { budget, width } => {
            format!("transfer matrix: the {budget} s budget ran out at width {width}")
        }
        Note::StripInterrupted { width } => format!(
            "transfer matrix: interrupted at width {width}; the widths before it are kept"
        ),
        Note::StripStopped { width, error } => {
            format!("transfer matrix: stopped at width {width}: {error}")
        }
        Note::StripCheckFailed { check } => format!(
            "transfer matrix: a cross-check FAILED ({}: ln W per unit {} against {}); its value must not be cited",
            route_words(&check.route),
            check.value,
            check.reference
        ),
        Note::StripTooFewWidths { done, hint: h } => format!(
            "transfer matrix: only {done} widths within the budget; {}",
            hint(*h)
        ),
        Note::StripSeries {
            first,
            largest,
            step,
            scaling,
            fits,
            sectors,
            hint: h,
        } => format!(
            "transfer matrix: cylinders of width {first}..{largest}{} along a, extrapolated to infinite width \
             ({}){}; {}",
            if *step > 1 {
                format!(" in steps of {step} (the period with the smallest spread)")
            } else {
                String::new()
            },
            match scaling {
                Scaling::Gapped => "gapped: Aitken's Δ² on the last widths of each family, error from the window before".to_string(),
                _ => format!("critical: fits in 1/W², error from their spread over {fits} fits"),
            },
            sector_words(sectors),
            hint(*h)
        ),
        Note::StripNoExtrapolation { why } => {
            format!("transfer matrix: no extrapolation ({why})")
        }
        Note::MonteCarloInterrupted { done } => format!(
            "Monte Carlo: INTERRUPTED; {done} cell{} finished",
            if *done == 1 { "" } else { "s" }
        ),
        Note::MonteCarloNoCell => {
            "Monte Carlo: not run (no periodic cell of a sensible size)".into()
        }
        Note::MonteCarloNotRun { error } => format!("Monte Carlo: not run ({error})"),
        Note::MonteCarloRan {
            cells,
            formula_units,
            seed,
            settings,
            raised_from,
            failed,
            extended,
            hint: h,
        } => format!(
            "Monte Carlo: thermodynamic integration on {cells} ({} formula units), seed {seed}, replicas × sweeps per node {}{}; equilibration check (passes up and down) {}{}; {}",
            formula_units
                .iter()
                .map(|u| format!("{u}"))
                .collect::<Vec<_>>()
                .join(", "),
            settings
                .iter()
                .map(|(r, s)| format!("{r} × {s}"))
                .collect::<Vec<_>>()
                .join(", "),
            match raised_from {
                Some((r, s)) => format!(" (raised from the default {r} × {s} to fill the budget)"),
                None => String::new(),
            },
            if failed.is_empty() {
                "passed".to_string()
            } else {
                format!(
                    "FAILED on {} (an allowance for the lag is in their σ)",
                    failed.join(", ")
                )
            },
            if extended.is_empty() {
                String::new()
            } else {
                format!(
                    "; {} repeated with more sweeps after a first failed check",
                    extended.join(", ")
                )
            },
            hint(*h)
        ),
        Note::MonteCarloLeftOut { cells } => format!(
            "Monte Carlo: {} left out: the budget ran out",
            cells.join(", ")
        ),
        Note::MonteCarloTooFewCells { cells, needed } => format!(
            "Monte Carlo: {cells} cell{} only, not extrapolated (a fit needs {needed} so that one degree of freedom tests its form); every Monte Carlo row is a finite torus, whose W is larger than the infinite crystal's; raise the budget",
            if *cells == 1 { "" } else { "s" },
        ),
        Note::MonteCarloExtrapolated {
            cells,
            form,
            chi2,
            dof,
            systematic,
            alternative_form,
            alternative,
            law,
            not_one_shape,
            next_term,
        } => format!(
            "Monte Carlo: {cells} cells extrapolated to the infinite crystal by the weighted fit {form} (χ² = {chi2:.3} for {dof} degrees of freedom{}); the other form {alternative_form} gives ln W = {} per formula unit{}{}",
            if *systematic > 0.0 && law.is_none() {
                format!(
                    "; the ln N/N term left out, its effect {} in ln W added to σ",
                    sig(*systematic, 2)
                )
            } else {
                String::new()
            },
            alternative.map_or("—".to_string(), |(v, s)| format!(
                "{} ± {}",
                sig(v, 6),
                sig(s, 2)
            )),
            size_law_words(law.as_ref(), *not_one_shape, *systematic)
                .map_or(String::new(), |w| format!("; {w}")),
            next_term_words(next_term.as_ref()).map_or(String::new(), |w| format!("; {w}"))
        ),
        Note::MonteCarloNoExtrapolation { error } => {
            format!("Monte Carlo: no extrapolation ({error})")
        }
        Note::NoCrossCheckTooLarge { cells, variables } => format!(
            "Monte Carlo: no cross-check (no exact count in this run, and {cells} has {variables} variables, too many for the Wang–Landau check)"
        ),
        Note::NoCrossCheck { cells: None, error } => {
            format!("Monte Carlo: no cross-check ({error})")
        }
        Note::NoCrossCheck {
            cells: Some(cells),
            error,
        } => format!("Monte Carlo: no cross-check on {cells} ({error})"),
        Note::WangLandauFailed { cells, error } => format!(
            "Monte Carlo: no cross-check (no exact count in this run, and the Wang–Landau walk on {cells} failed: {error})"
        ),
        Note::WangLandauCheck {
            cells,
            integrated: (a, sa),
            walk: (b, sb),
            agrees,
            sigmas,
        } => format!(
            "Monte Carlo cross-check on {cells} (no exact count in this run): thermodynamic integration ln W = {} ± {} per formula unit against a Wang–Landau walk {} ± {}; {}. It tests the sampler on a small cell, not the extrapolation to larger cells",
            sig(*a, 6),
            sig(*sa, 2),
            sig(*b, 6),
            sig(*sb, 2),
            if *agrees {
                format!("agreement within {sigmas} combined σ")
            } else {
                format!(
                    "DISAGREEMENT beyond {sigmas} combined σ: the Monte Carlo values of this run are not to be trusted"
                )
            }
        ),
        Note::ExactCheck {
            cells,
            seconds,
            sampled: (v, sigma),
            exact,
            agrees,
            sigmas,
        } => format!(
            "Monte Carlo cross-check on {cells} (sampled with the default settings, {} s): ln W = {} ± {} per formula unit against the exact {}; {}. It tests the sampler (integration, tail, equilibration) on a cell the exact counter reaches, not the extrapolation to larger cells",
            sig(*seconds, 2),
            sig(*v, 6),
            sig(*sigma, 2),
            sig(*exact, 6),
            if *agrees {
                format!("agreement within {sigmas}σ")
            } else {
                format!(
                    "DISAGREEMENT beyond {sigmas}σ ({:.1}σ): the Monte Carlo values of this run are not to be trusted",
                    (v - exact) / sigma.max(f64::MIN_POSITIVE)
                )
            }
        ),
    }
}

/// What a size fit says about the ln N/N term of a conserved flux, in words: b fixed at 1/6
/// and how the free fit bears it out (loudly when the data reject it), or that the cells are
/// not one shape so b was fitted; `None` when the rule has no such flux.
pub fn size_law_words(
    law: Option<&crate::counters::sampling::size::FluxLaw>,
    not_one_shape: bool,
    systematic: f64,
) -> Option<String> {
    if let Some(l) = law {
        let test = format!(
            "the free fit gives b = {} ± {} {}",
            sig(l.b_free, 3),
            sig(l.sigma_b_free, 2),
            one_term_test(l.delta_chi2, l.probability)
        );
        Some(if l.rejected {
            format!(
                "b = 1/6 of the conserved flux was imposed, but THE DATA REJECT IT: {test}; the distance between the two fits' s∞, {} in ln W, is added to σ",
                sig(systematic, 2)
            )
        } else {
            format!(
                "b = 1/6 is fixed by the conserved flux on cells of one shape; {test}, consistent with 1/6"
            )
        })
    } else if not_one_shape {
        Some("the rule has a conserved flux (b = 1/6 of ln N/N), but the cells are not one shape (their repetitions along a, b, c are not proportional) and the constant term depends on the shape, so b was fitted, not fixed; cells of one shape (2x2x2, 3x3x3, 4x4x4, …) allow the law".to_string())
    } else {
        None
    }
}

/// The test of one added term of a fit, in words: its Δχ² and the probability of one as
/// large without it.
fn one_term_test(delta_chi2: f64, probability: f64) -> String {
    format!(
        "(Δχ² = {} for one degree of freedom, probability {})",
        sig(delta_chi2, 3),
        sig(probability, 2)
    )
}

/// The check of the next finite-size term, c/N², in words (ln W per formula unit), when
/// the cells allowed it.
pub fn next_term_words(next: Option<&crate::counters::sampling::size::NextTerm>) -> Option<String> {
    let t = next?;
    let test = format!(
        "with a c/N² term added s∞ = {} ± {} in ln W per formula unit, c = {} ± {} {}",
        sig(t.ln_w_per_unit, 7),
        sig(t.sigma_ln_w, 2),
        sig(t.c, 3),
        sig(t.sigma_c, 2),
        one_term_test(t.delta_chi2, t.probability)
    );
    Some(if t.needed {
        format!(
            "THE DATA CALL FOR A 1/N² TERM the cited form leaves out: {test}; the distance between the two fits' s∞, {} in ln W, is added to σ",
            sig(t.allowance, 2)
        )
    } else {
        format!("{test}: the data do not call for it")
    })
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

    /// Whole numbers print without decimals; CSV numbers are plain, and empty when there is
    /// none (never `inf`, `NaN`, `±` or a dash).
    #[test]
    fn issue11_numbers_for_tables_and_csv() {
        assert_eq!(amount(4.0), "4");
        assert_eq!(amount(1024.0), "1024");
        assert_eq!(amount(2.5), "2.50000");
        assert_eq!(trimmed(4.0, 6), "4");
        assert_eq!(trimmed(298.15, 6), "298.15");
        assert_eq!(trimmed(0.0001234, 6), "0.0001234");
        assert_eq!(number(4.0), "4");
        assert_eq!(number(1.5), "1.5");
        assert_eq!(number(-0.25), "-0.25");
        assert_eq!(number(9.7e-9), "9.7e-9");
        assert_eq!(number(f64::NEG_INFINITY), "");
        assert_eq!(number(f64::NAN), "");
        assert_eq!(optional(None), "");
        for x in [
            1.539_600_717_839_002_f64,
            3.371224484330793,
            1e-12,
            6.02214076e23,
        ] {
            assert_eq!(number(x).parse::<f64>().unwrap(), x, "round trip of {x}");
        }
        // Shown to one digit beyond σ's second significant digit.
        assert_eq!(to_sigma(1.505994550, Some(0.0029), 10), "1.50599");
        assert_eq!(to_sigma(1.5396007178, Some(9.7e-9), 10), "1.539600718");
        assert_eq!(to_sigma(1.5, None, 10), "1.500000000");
        assert_eq!(plus_minus(3.40439, Some(0.016), 6), "3.4044 ± 0.016");
    }

    /// A comparison table fits in 100 columns with the longest labels, and its CSV layout
    /// holds each value and uncertainty in its own cell.
    #[test]
    fn issue11_comparison_tables_fit_and_split_uncertainties() {
        use crate::estimate::Method;
        let e = |method: Method, cells: Option<&str>, units: f64, sigma: Option<f64>| match cells {
            Some(c) if method == Method::Exact => {
                Estimate::exact(c, num_bigint::BigUint::from(10u32).pow(40), units, 123.456)
            }
            Some(c) => Estimate::finite(method, c, units, 0.41, sigma, 123.456),
            None => Estimate::infinite(method, 0.41, sigma, 123.456),
        };
        let rows = vec![
            e(Method::Pauling, None, 4.0, None),
            e(Method::Exact, Some("10x10x10 periodic"), 4000.0, None),
            e(
                Method::MonteCarlo,
                Some("12x12x12 periodic"),
                6912.0,
                Some(1.2345e-4),
            ),
            e(Method::TransferMatrix, None, 1.0, Some(9.7e-9)),
        ];
        let t = comparison_table(&rows, "Qn(H2O)2");
        assert!(t.width() <= 100, "{} columns:\n{}", t.width(), t.render());
        let csv = t.render_csv();
        assert!(!csv.contains('±') && !csv.contains('—'), "{csv}");
        for cell in csv.lines().flat_map(|l| l.split(',')) {
            assert!(!["inf", "-inf", "NaN", "n/a"].contains(&cell), "{csv}");
        }
        let mc: Vec<&str> = csv.lines().nth(3).unwrap().split(',').collect();
        assert_eq!(mc[2], "6912");
        assert_eq!(mc[3], "", "no count for Monte Carlo");
        let w: f64 = mc[4].parse().unwrap();
        let sw: f64 = mc[5].parse().unwrap();
        assert!((w - 0.41f64.exp()).abs() < 1e-15 && (sw - 1.2345e-4 * w).abs() < 1e-15);
        let pauling: Vec<&str> = csv.lines().nth(1).unwrap().split(',').collect();
        assert_eq!((pauling[2], pauling[5]), ("", ""));
    }

    #[test]
    fn tables_align_and_escape() {
        let mut t = Table::new(&["a", "bb"]);
        t.row(vec!["xyz".into(), "1,2".into()]);
        assert_eq!(t.render(), "a    bb\n---  ---\nxyz  1,2\n");
        assert_eq!(t.render_csv(), "a,bb\nxyz,\"1,2\"\n");
    }
}
