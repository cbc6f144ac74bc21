//! Heat-capacity data files: parse and check a table of T, Cp and the 1σ of Cp.
//!
//! # Format
//!
//! Comma-separated text. Everything after `#` on a line is a comment; blank lines are
//! skipped. The first remaining line is a header naming the columns (its words are free,
//! its number of cells is not): two cells for temperature in K and heat capacity Cp in
//! J/(mol K), or three when a 1σ uncertainty of Cp (J/(mol K)) follows. Every later line
//! is one measured point with exactly as many cells as the header.
//!
//! ```text
//! # invented numbers
//! temperature_k, cp_j_per_mol_k, cp_sigma_j_per_mol_k
//! 10.0, 0.094, 0.002
//! 12.5, 0.183, 0.003
//! ```
//!
//! # Header lines
//!
//! Before the row of column names, lines that begin with `#@` state what the numbers are
//! ([`DataHeader`]); each holds one `key: value`, each key at most once:
//!
//! | key | values | default |
//! | --- | --- | --- |
//! | `formula-unit` | the formula unit the molar quantities are per, e.g. `Dy2Ti2O7` | not stated |
//! | `cp-unit` | `J/(mol K)`, `mJ/(mol K)` or `cal/(mol K)` (the thermochemical calorie, 4.184 J exactly) | `J/(mol K)` |
//! | `temperature-unit` | `K` or `mK` | `K` |
//!
//! ```text
//! #@ formula-unit: Dy2Ti2O7
//! #@ cp-unit: cal/(mol K)
//! #@ temperature-unit: K
//! T, Cp, sigma
//! ```
//!
//! The σ column has the unit of Cp. Values are converted on reading (Cp to J/(mol K),
//! temperatures to K; [`Point`] holds the converted values). Spaces, `·` and `*` inside a
//! unit are ignored, and `J/mol/K` is read as `J/(mol K)`. An unknown key, a repeated key, an
//! unknown unit or a `#@` line after the column names is refused with its line. An ordinary
//! comment that reads like a header line (`# formula-unit: …`) is refused too, since the user
//! meant a header line and would otherwise be silently ignored.
//!
//! # Checks
//!
//! Every value must be a finite number; temperatures positive and strictly increasing; Cp
//! not negative; σ positive; at least [`MIN_POINTS`] points. Errors name the file, the line
//! and what was expected ([`Error::Data`]); nothing panics.
//!
//! # Complexity
//!
//! Linear in the file's length.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::thermo::CALORIE;

/// The fewest points a data file may hold (a T³ fit and a cubic interpolant need them).
pub const MIN_POINTS: usize = 4;

/// One measured point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Point {
    /// Temperature, K.
    pub t_k: f64,
    /// Heat capacity at constant pressure, J/(mol K).
    pub cp: f64,
    /// 1σ of Cp in J/(mol K), when the file gives it.
    pub sigma: Option<f64>,
    /// 1-based line of the file the point comes from.
    pub line: u64,
}

/// The unit of Cp (and of its σ) in a data file.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum CpUnit {
    /// J/(mol K).
    #[default]
    Joule,
    /// mJ/(mol K).
    Millijoule,
    /// cal/(mol K), the thermochemical calorie (4.184 J exactly).
    Calorie,
}

impl CpUnit {
    /// J/(mol K) per unit.
    pub fn to_joule(self) -> f64 {
        match self {
            CpUnit::Joule => 1.0,
            CpUnit::Millijoule => 1e-3,
            CpUnit::Calorie => CALORIE,
        }
    }

    /// The unit as written in messages.
    pub fn name(self) -> &'static str {
        match self {
            CpUnit::Joule => "J/(mol K)",
            CpUnit::Millijoule => "mJ/(mol K)",
            CpUnit::Calorie => "cal/(mol K)",
        }
    }
}

/// The unit of temperature in a data file.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum TemperatureUnit {
    /// Kelvin.
    #[default]
    Kelvin,
    /// Millikelvin.
    Millikelvin,
}

impl TemperatureUnit {
    /// K per unit.
    pub fn to_kelvin(self) -> f64 {
        match self {
            TemperatureUnit::Kelvin => 1.0,
            TemperatureUnit::Millikelvin => 1e-3,
        }
    }

    /// The unit as written in messages.
    pub fn name(self) -> &'static str {
        match self {
            TemperatureUnit::Kelvin => "K",
            TemperatureUnit::Millikelvin => "mK",
        }
    }
}

/// What the `#@` header lines of a data file state.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct DataHeader {
    /// The formula unit the molar quantities are per, when stated, and its line.
    pub formula_unit: Option<(String, u64)>,
    /// The unit of Cp and σ in the file (values are converted to J/(mol K) on reading).
    pub cp_unit: CpUnit,
    /// The unit of temperature in the file (converted to K on reading).
    pub temperature_unit: TemperatureUnit,
}

/// The header keys, in the order of the documentation.
pub const HEADER_KEYS: [&str; 3] = ["formula-unit", "cp-unit", "temperature-unit"];

/// A unit written by a user, without spaces, `·` or `*`, in lower case.
fn unit_key(s: &str) -> String {
    s.chars()
        .filter(|c| !c.is_whitespace() && *c != '·' && *c != '*')
        .collect::<String>()
        .to_lowercase()
}

fn parse_cp_unit(s: &str) -> Option<CpUnit> {
    match unit_key(s).as_str() {
        "j/(molk)" | "j/mol/k" | "jmol-1k-1" | "jmol⁻¹k⁻¹" => Some(CpUnit::Joule),
        "mj/(molk)" | "mj/mol/k" | "mjmol-1k-1" | "mjmol⁻¹k⁻¹" => Some(CpUnit::Millijoule),
        "cal/(molk)" | "cal/mol/k" | "calmol-1k-1" | "calmol⁻¹k⁻¹" => Some(CpUnit::Calorie),
        _ => None,
    }
}

fn parse_temperature_unit(s: &str) -> Option<TemperatureUnit> {
    // Case matters here: mK is not MK.
    match s.trim() {
        "K" => Some(TemperatureUnit::Kelvin),
        "mK" => Some(TemperatureUnit::Millikelvin),
        _ => None,
    }
}

/// A checked heat-capacity table, sorted by temperature.
#[derive(Clone, Debug)]
pub struct HeatCapacityData {
    /// The file, for messages.
    pub path: PathBuf,
    /// The header's column names.
    pub columns: Vec<String>,
    /// What the `#@` lines state (units, formula unit).
    pub header: DataHeader,
    /// The points, temperatures strictly increasing, in K and J/(mol K).
    pub points: Vec<Point>,
}

impl HeatCapacityData {
    /// Read and check a data file.
    pub fn from_file(path: &Path) -> Result<HeatCapacityData> {
        let bytes = std::fs::read(path).map_err(|e| Error::Data {
            path: path.to_path_buf(),
            line: 0,
            message: format!(
                "cannot read the heat-capacity file: {}",
                crate::spec::io_words(&e)
            ),
        })?;
        let text = std::str::from_utf8(&bytes).map_err(|e| {
            let offset = e.valid_up_to();
            let line = bytes[..offset].iter().filter(|&&b| b == b'\n').count() as u64 + 1;
            Error::Data {
                path: path.to_path_buf(),
                line,
                message: format!(
                    "the byte 0x{:02X} at byte offset {offset} is not UTF-8 text; expected \
                     comma-separated text in UTF-8",
                    bytes[offset]
                ),
            }
        })?;
        Self::parse(text, path)
    }

    /// Parse and check the text of a data file; `path` stands for the file in messages.
    pub fn parse(text: &str, path: impl AsRef<Path>) -> Result<HeatCapacityData> {
        let path = path.as_ref().to_path_buf();
        let fail = |line: u64, message: String| Error::Data {
            path: path.clone(),
            line,
            message,
        };
        // A byte-order mark (spreadsheets write one) is not part of the first cell.
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut columns: Option<Vec<String>> = None;
        let mut points: Vec<Point> = Vec::new();
        let mut head = DataHeader::default();
        let mut seen: Vec<(&str, u64)> = Vec::new();
        // Lines end in LF, CR LF or (old spreadsheets) CR alone.
        let lines = text.split("\r\n").flat_map(|l| l.split(['\n', '\r']));
        for (i, raw) in lines.enumerate() {
            let line = i as u64 + 1;
            let trimmed = raw.trim_start();
            if let Some(rest) = trimmed.strip_prefix("#@") {
                if columns.is_some() {
                    return Err(fail(
                        line,
                        "a `#@` header line after the column names; header lines belong above \
                         the row of column names"
                            .into(),
                    ));
                }
                let (key, value) = rest.split_once(':').ok_or_else(|| {
                    fail(
                        line,
                        format!(
                            "expected `#@ key: value` with a key among {}, found `{}`",
                            HEADER_KEYS.join(", "),
                            trimmed
                        ),
                    )
                })?;
                let (key, value) = (key.trim(), value.trim());
                let Some(&known) = HEADER_KEYS.iter().find(|k| **k == key) else {
                    return Err(fail(
                        line,
                        format!(
                            "unknown header key `{key}`; expected one of {}",
                            HEADER_KEYS.join(", ")
                        ),
                    ));
                };
                if let Some((_, first)) = seen.iter().find(|(k, _)| *k == known) {
                    return Err(fail(
                        line,
                        format!("the header key `{known}` is given twice (first on line {first})"),
                    ));
                }
                seen.push((known, line));
                match known {
                    "formula-unit" => {
                        if value.is_empty() {
                            return Err(fail(
                                line,
                                "expected a formula unit after `formula-unit:`, e.g. Dy2Ti2O7"
                                    .into(),
                            ));
                        }
                        head.formula_unit = Some((value.to_string(), line));
                    }
                    "cp-unit" => {
                        head.cp_unit = parse_cp_unit(value).ok_or_else(|| {
                            fail(
                                line,
                                format!(
                                    "unknown unit of Cp `{value}`; expected J/(mol K), mJ/(mol K) \
                                     or cal/(mol K)"
                                ),
                            )
                        })?;
                    }
                    _ => {
                        head.temperature_unit = parse_temperature_unit(value).ok_or_else(|| {
                            fail(
                                line,
                                format!("unknown unit of temperature `{value}`; expected K or mK"),
                            )
                        })?;
                    }
                }
                continue;
            }
            if let Some(rest) = trimmed.strip_prefix('#')
                && let Some((key, _)) = rest.split_once(':')
                && HEADER_KEYS.contains(&key.trim())
            {
                return Err(fail(
                    line,
                    format!(
                        "a comment that reads like a header line; write `#@ {}` to state it, \
                         or reword the comment",
                        rest.trim()
                    ),
                ));
            }
            let content = raw.split('#').next().unwrap_or("").trim();
            if content.is_empty() {
                continue;
            }
            let cells: Vec<&str> = content.split(',').map(str::trim).collect();
            let Some(header) = &columns else {
                if cells.iter().all(|c| c.parse::<f64>().is_ok()) {
                    return Err(fail(
                        line,
                        "expected a header row naming the columns (temperature in K, Cp in \
                         J/(mol K), optionally the 1σ of Cp) before the numbers"
                            .into(),
                    ));
                }
                if !(2..=3).contains(&cells.len()) || cells.iter().any(|c| c.is_empty()) {
                    return Err(fail(
                        line,
                        format!(
                            "expected a header of 2 or 3 named columns (temperature in K, Cp in \
                             J/(mol K), optionally the 1σ of Cp), found {} cell(s)",
                            cells.len()
                        ),
                    ));
                }
                columns = Some(cells.iter().map(|c| c.to_string()).collect());
                continue;
            };
            let want = header.len();
            if cells.len() != want {
                let names = if want == 3 {
                    "temperature, Cp and the 1σ of Cp"
                } else {
                    "temperature and Cp"
                };
                return Err(fail(
                    line,
                    format!(
                        "expected {want} cells ({names}, as in the header), found {}",
                        cells.len()
                    ),
                ));
            }
            let number = |k: usize, what: &str| -> Result<f64> {
                let c = cells[k];
                match c.parse::<f64>() {
                    Ok(x) if x.is_finite() => Ok(x),
                    _ => Err(fail(
                        line,
                        format!("column {}: expected {what} as a number, found `{c}`", k + 1),
                    )),
                }
            };
            let (tu, cu) = (head.temperature_unit.name(), head.cp_unit.name());
            let t_file = number(0, &format!("a temperature in {tu}"))?;
            let cp_file = number(1, &format!("a heat capacity in {cu}"))?;
            let sigma_file = if want == 3 {
                Some(number(2, &format!("the 1σ of Cp in {cu}"))?)
            } else {
                None
            };
            if t_file <= 0.0 {
                return Err(fail(
                    line,
                    format!("expected a positive temperature in {tu}, found {t_file}"),
                ));
            }
            if cp_file < 0.0 {
                return Err(fail(
                    line,
                    format!("expected a heat capacity of at least 0 {cu}, found {cp_file}"),
                ));
            }
            if let Some(s) = sigma_file
                && s <= 0.0
            {
                return Err(fail(
                    line,
                    format!("expected a positive 1σ of Cp in {cu}, found {s}"),
                ));
            }
            let t_k = t_file * head.temperature_unit.to_kelvin();
            let cp = cp_file * head.cp_unit.to_joule();
            let sigma = sigma_file.map(|s| s * head.cp_unit.to_joule());
            if let Some(prev) = points.last()
                && t_k <= prev.t_k
            {
                let how = if t_k == prev.t_k {
                    "repeats"
                } else {
                    "is below"
                };
                let back = head.temperature_unit.to_kelvin();
                return Err(fail(
                    line,
                    format!(
                        "temperatures must increase strictly: {t_file} {tu} {how} {} {tu} of line {}",
                        prev.t_k / back,
                        prev.line
                    ),
                ));
            }
            points.push(Point {
                t_k,
                cp,
                sigma,
                line,
            });
        }
        let Some(columns) = columns else {
            return Err(fail(
                0,
                "no header and no data: expected a header row and at least 4 points".into(),
            ));
        };
        if points.len() < MIN_POINTS {
            return Err(fail(
                0,
                format!(
                    "expected at least {MIN_POINTS} measured points, found {}",
                    points.len()
                ),
            ));
        }
        Ok(HeatCapacityData {
            path,
            columns,
            header: head,
            points,
        })
    }

    /// Whether every point carries a 1σ of Cp.
    pub fn has_sigma(&self) -> bool {
        self.points.iter().all(|p| p.sigma.is_some())
    }

    /// The formula unit the file states, if any.
    pub fn formula_unit(&self) -> Option<&str> {
        self.header.formula_unit.as_ref().map(|(n, _)| n.as_str())
    }

    /// The lowest and highest temperatures, K.
    pub fn range(&self) -> (f64, f64) {
        (self.points[0].t_k, self.points[self.points.len() - 1].t_k)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn message(text: &str) -> String {
        HeatCapacityData::parse(text, "cp.csv")
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn parses_comments_blank_lines_and_sigma() {
        let d = HeatCapacityData::parse(
            "# a comment\n\nT,Cp,s\n1,0.1,0.01 # inline\n2,0.8,0.02\n\n3,2.7,0.03\n4,6.4,0.04\n",
            "cp.csv",
        )
        .unwrap();
        assert_eq!(d.points.len(), 4);
        assert!(d.has_sigma());
        assert_eq!(d.points[0].line, 4);
        assert_eq!(d.points[2].line, 7);
        assert_eq!(d.points[3].cp, 6.4);
        assert_eq!(d.range(), (1.0, 4.0));
    }

    #[test]
    fn errors_name_the_line() {
        assert!(message("T,Cp\n1,0.1\n2,x\n3,1\n4,2\n").starts_with("cp.csv:3: column 2"));
        assert!(message("T,Cp\n1,0.1\n2,0.2\n2,1\n4,2\n").contains("cp.csv:4: temperatures"));
        assert!(message("T,Cp\n1,0.1\n3,0.2\n2,1\n4,2\n").contains("is below"));
        assert!(
            message("T,Cp\n1,-0.1\n2,0.2\n3,1\n4,2\n").starts_with("cp.csv:2: expected a heat")
        );
        assert!(
            message("T,Cp\n0,0.1\n2,0.2\n3,1\n4,2\n").starts_with("cp.csv:2: expected a positive")
        );
        assert!(message("T,Cp,s\n1,0.1\n").starts_with("cp.csv:2: expected 3 cells"));
        assert!(message("1,0.1\n2,0.2\n").starts_with("cp.csv:1: expected a header"));
        assert!(message("T,Cp\n1,0.1\n2,0.2\n3,1\n").contains("at least 4"));
        assert!(message("T,Cp\n1,NaN\n2,0.2\n3,1\n4,2\n").contains("found `NaN`"));
        assert!(message("# nothing\n").contains("no header"));
    }

    #[test]
    fn issue11_byte_order_mark_and_cr_line_endings() {
        // A headerless file behind a byte-order mark was read with its first point as the
        // header, silently one point short; it is refused at line 1 like any headerless file.
        let m = message("\u{feff}1,0.1\n2,0.8\n3,2.7\n4,6.4\n5,12\n");
        assert!(m.starts_with("cp.csv:1: expected a header"), "{m}");
        // With a header, the mark is ignored and every point is kept.
        let d = HeatCapacityData::parse("\u{feff}T,Cp\n1,0.1\n2,0.8\n3,2.7\n4,6.4\n", "cp.csv")
            .unwrap();
        assert_eq!(d.columns[0], "T");
        assert_eq!(d.points.len(), 4);
        // CR-only line endings are line breaks, and lines are counted.
        let d = HeatCapacityData::parse("T,Cp\r1,0.1\r2,0.8\r3,2.7\r4,6.4\r", "cp.csv").unwrap();
        assert_eq!(d.points.len(), 4);
        assert_eq!(d.points[3].line, 5);
    }
}
