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

/// A checked heat-capacity table, sorted by temperature.
#[derive(Clone, Debug)]
pub struct HeatCapacityData {
    /// The file, for messages.
    pub path: PathBuf,
    /// The header's column names.
    pub columns: Vec<String>,
    /// The points, temperatures strictly increasing.
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
        // Lines end in LF, CR LF or (old spreadsheets) CR alone.
        let lines = text.split("\r\n").flat_map(|l| l.split(['\n', '\r']));
        for (i, raw) in lines.enumerate() {
            let line = i as u64 + 1;
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
            let t_k = number(0, "a temperature in K")?;
            let cp = number(1, "a heat capacity in J/(mol K)")?;
            let sigma = if want == 3 {
                Some(number(2, "the 1σ of Cp in J/(mol K)")?)
            } else {
                None
            };
            if t_k <= 0.0 {
                return Err(fail(
                    line,
                    format!("expected a positive temperature in K, found {t_k}"),
                ));
            }
            if cp < 0.0 {
                return Err(fail(
                    line,
                    format!("expected a heat capacity of at least 0 J/(mol K), found {cp}"),
                ));
            }
            if let Some(s) = sigma
                && s <= 0.0
            {
                return Err(fail(
                    line,
                    format!("expected a positive 1σ of Cp in J/(mol K), found {s}"),
                ));
            }
            if let Some(prev) = points.last()
                && t_k <= prev.t_k
            {
                let how = if t_k == prev.t_k {
                    "repeats"
                } else {
                    "is below"
                };
                return Err(fail(
                    line,
                    format!(
                        "temperatures must increase strictly: {t_k} K {how} {} K of line {}",
                        prev.t_k, prev.line
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
            points,
        })
    }

    /// Whether every point carries a 1σ of Cp.
    pub fn has_sigma(&self) -> bool {
        self.points.iter().all(|p| p.sigma.is_some())
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
