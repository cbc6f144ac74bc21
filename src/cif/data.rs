//! The data model of a CIF: data blocks, each a set of tagged values and loops, every value
//! with the line and column where it was written.
//!
//! Tag names are compared without regard to case and with `.` read as `_`, so that the
//! CIF 1.1 name `_atom_site_fract_x` and the CIF 2.0 (DDLm) name `_atom_site.fract_x` are
//! the same tag. Numbers are read on demand ([`Value::number`]) with their standard
//! uncertainty: `4.497(2)` is 4.497 ± 0.002.

use crate::error::Position;

/// A parsed CIF: its data blocks in file order.
#[derive(Clone, Debug, Default)]
pub struct Document {
    /// The data blocks (`data_NAME`), in the order written.
    pub blocks: Vec<Block>,
    /// Whether the file declared itself CIF 2.0 (`#\#CIF_2.0` on its first line).
    pub cif2: bool,
}

/// One data block.
#[derive(Clone, Debug)]
pub struct Block {
    /// The name after `data_`, as written.
    pub name: String,
    /// Where `data_NAME` stands.
    pub position: Position,
    /// Tags with one value.
    pub items: Vec<Item>,
    /// Loops (tables of values).
    pub loops: Vec<Loop>,
}

/// A tag with one value.
#[derive(Clone, Debug)]
pub struct Item {
    /// The tag as written.
    pub tag: String,
    /// Where the tag stands.
    pub position: Position,
    /// Its value.
    pub value: Value,
}

/// A loop: a table whose columns are tags.
#[derive(Clone, Debug)]
pub struct Loop {
    /// Where `loop_` stands.
    pub position: Position,
    /// The column tags as written, with their positions.
    pub tags: Vec<(String, Position)>,
    /// The rows, each with one value per tag.
    pub rows: Vec<Vec<Value>>,
}

/// What kind of value was written.
#[derive(Clone, Debug, PartialEq)]
pub enum Kind {
    /// A word without quotes (a number, a symbol, a label).
    Plain,
    /// A quoted string (`'…'`, `"…"`, or CIF 2.0 triple quotes).
    Quoted,
    /// A text field between lines that begin with `;`.
    Text,
    /// `.`: the item does not apply.
    Inapplicable,
    /// `?`: the value is unknown.
    Unknown,
    /// A CIF 2.0 list `[ … ]` (read and kept, not interpreted).
    List(Vec<Value>),
    /// A CIF 2.0 table `{ … }` (read and kept, not interpreted).
    Table,
}

/// One value with its position.
#[derive(Clone, Debug, PartialEq)]
pub struct Value {
    /// The text (without quotes or the `;` delimiters).
    pub text: String,
    /// How it was written.
    pub kind: Kind,
    /// Where it starts.
    pub position: Position,
}

/// A number with its standard uncertainty, if the file gave one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Measured {
    /// The value.
    pub value: f64,
    /// The standard uncertainty (`4.497(2)`: 0.002), if written.
    pub su: Option<f64>,
}

impl Value {
    /// Whether the value is `.` or `?` (no value).
    pub fn is_missing(&self) -> bool {
        matches!(self.kind, Kind::Inapplicable | Kind::Unknown)
    }

    /// The value as a number with its standard uncertainty: `None` for `.` and `?`,
    /// `Some(Err(..))` with a description when the text is not a number.
    pub fn number(&self) -> Option<std::result::Result<Measured, String>> {
        if self.is_missing() {
            return None;
        }
        Some(parse_number(self.text.trim()).ok_or_else(|| {
            format!(
                "expected a number (such as 4.497 or 4.497(2)), found '{}'",
                self.text.trim()
            )
        }))
    }
}

/// A CIF number: `[+-]? (digits | digits? . digits | digits .) ([eE] [+-]? digits)?
/// ( '(' digits ')' )?`. The uncertainty in parentheses counts in units of the last digit
/// of the mantissa.
pub fn parse_number(text: &str) -> Option<Measured> {
    let (body, su_digits) = match text.find('(') {
        Some(i) => {
            let rest = text[i + 1..].strip_suffix(')')?;
            if rest.is_empty() || !rest.bytes().all(|b| b.is_ascii_digit()) {
                return None;
            }
            (&text[..i], Some(rest))
        }
        None => (text, None),
    };
    let (mantissa, exponent) = match body.find(['e', 'E']) {
        Some(i) => (&body[..i], Some(&body[i + 1..])),
        None => (body, None),
    };
    let unsigned = mantissa.strip_prefix(['+', '-']).unwrap_or(mantissa);
    let (int, frac) = match unsigned.find('.') {
        Some(i) => (&unsigned[..i], Some(&unsigned[i + 1..])),
        None => (unsigned, None),
    };
    let digits = |s: &str| s.bytes().all(|b| b.is_ascii_digit());
    if !digits(int) || !frac.is_none_or(digits) {
        return None;
    }
    if int.is_empty() && frac.is_none_or(str::is_empty) {
        return None;
    }
    let exp: i32 = match exponent {
        Some(e) => {
            let u = e.strip_prefix(['+', '-']).unwrap_or(e);
            if u.is_empty() || !digits(u) || u.len() > 4 {
                return None;
            }
            e.parse().ok()?
        }
        None => 0,
    };
    let value: f64 = body.parse().ok()?;
    if !value.is_finite() {
        return None;
    }
    let su = match su_digits {
        Some(d) => {
            let places = frac.map_or(0, str::len) as i32;
            let units: f64 = d.parse().ok()?;
            Some(units * 10f64.powi(exp - places))
        }
        None => None,
    };
    Some(Measured { value, su })
}

/// The comparison form of a tag: lower case, `.` read as `_`.
pub fn normalise(tag: &str) -> String {
    tag.to_ascii_lowercase().replace('.', "_")
}

/// Where a tag's values sit in a block.
#[derive(Clone, Copy, Debug)]
pub enum Found<'a> {
    /// A tag with one value.
    Single(&'a Item),
    /// A column of a loop.
    Column(&'a Loop, usize),
}

impl Block {
    /// The first of `tags` (in the order given) that the block holds.
    pub fn find(&self, tags: &[&str]) -> Option<Found<'_>> {
        for t in tags {
            let key = normalise(t);
            if let Some(item) = self.items.iter().find(|i| normalise(&i.tag) == key) {
                return Some(Found::Single(item));
            }
            for l in &self.loops {
                if let Some(c) = l.tags.iter().position(|(t, _)| normalise(t) == key) {
                    return Some(Found::Column(l, c));
                }
            }
        }
        None
    }

    /// The single value of the first of `tags` present (a loop of one row counts too).
    pub fn single(&self, tags: &[&str]) -> Option<&Value> {
        match self.find(tags)? {
            Found::Single(i) => Some(&i.value),
            Found::Column(l, c) if l.rows.len() == 1 => Some(&l.rows[0][c]),
            Found::Column(..) => None,
        }
    }

    /// Every value of the first of `tags` present, as a column (a single value is a
    /// column of one).
    pub fn column(&self, tags: &[&str]) -> Option<Vec<&Value>> {
        Some(match self.find(tags)? {
            Found::Single(i) => vec![&i.value],
            Found::Column(l, c) => l.rows.iter().map(|r| &r[c]).collect(),
        })
    }

    /// Whether the block describes atoms (has fractional coordinates).
    pub fn has_atoms(&self) -> bool {
        self.find(&["_atom_site_fract_x"]).is_some()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_with_standard_uncertainties() {
        let m = parse_number("4.497(2)").unwrap();
        assert_eq!(m.value, 4.497);
        assert!((m.su.unwrap() - 0.002).abs() < 1e-15);
        let m = parse_number("-0.0621(12)").unwrap();
        assert!((m.su.unwrap() - 0.0012).abs() < 1e-15);
        let m = parse_number("120(3)").unwrap();
        assert_eq!((m.value, m.su), (120.0, Some(3.0)));
        let m = parse_number("1.25e-3(4)").unwrap();
        assert!((m.value - 1.25e-3).abs() < 1e-18);
        assert!((m.su.unwrap() - 4e-5).abs() < 1e-18);
        assert_eq!(parse_number(".5").unwrap().value, 0.5);
        assert_eq!(parse_number("5.").unwrap().value, 5.0);
        assert_eq!(parse_number("+2").unwrap().su, None);
        for bad in [
            "", ".", "1.2.3", "abc", "1(2", "1()", "1(a)", "1e", "e5", "--1", "nan",
        ] {
            assert!(parse_number(bad).is_none(), "{bad}");
        }
    }

    #[test]
    fn tags_compare_across_cif_versions() {
        assert_eq!(normalise("_atom_site.Fract_X"), "_atom_site_fract_x");
    }
}
