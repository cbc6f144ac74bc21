//! The cell and the symmetry operators of a CIF block.
//!
//! **Cell.** From `_cell_length_a/b/c` (Å) and `_cell_angle_alpha/beta/gamma` (degrees;
//! a missing angle is 90°, the CIF dictionary's default), in the usual Cartesian
//! convention of crystallography: **a** along x, **b** in the xy plane, **c** completing a
//! right-handed set:
//!
//! ```text
//! a = (a, 0, 0)
//! b = (b cos γ, b sin γ, 0)
//! c = (c cos β, c (cos α − cos β cos γ) / sin γ, V / (a b sin γ))
//! ```
//!
//! with V = abc √(1 − cos²α − cos²β − cos²γ + 2 cos α cos β cos γ).
//!
//! **Operators.** Read from `_space_group_symop_operation_xyz` (or its older name
//! `_symmetry_equiv_pos_as_xyz`) in the form `-x+1/2, y, z`, checked to be a group (the
//! product of any two is in the list, up to a lattice translation). When the block lists
//! none, they come from the space-group tables of the `moyo` crate, found by the Hall
//! symbol, the Hermann–Mauguin symbol or the International Tables number, in that order
//! of preference. A symbol with more than one setting in the tables is resolved by what
//! the file says (`:1`, `:2`, `:H`, `:R` after the symbol, or
//! `_space_group_IT_coordinate_system_code`); rhombohedral groups by the cell (γ = 120°
//! means hexagonal axes); two origin choices that the file does not tell apart are refused.

use moyo::data::{HallSymbol, HallSymbolEntry, hall_symbol_entry};

/// The cell: lengths (Å), angles (degrees) and Cartesian vectors (rows a, b, c).
#[derive(Clone, Debug)]
pub struct Cell {
    /// a, b, c in Å.
    pub lengths: [f64; 3],
    /// α, β, γ in degrees.
    pub angles: [f64; 3],
    /// Cartesian vectors a, b, c (rows), in Å.
    pub vectors: [[f64; 3]; 3],
}

impl Cell {
    /// The cell from its lengths and angles; `Err` says what is impossible.
    pub fn new(lengths: [f64; 3], angles: [f64; 3]) -> Result<Cell, String> {
        for (l, n) in lengths.iter().zip(["a", "b", "c"]) {
            if !(l.is_finite() && *l > 1e-3 && *l < 1e6) {
                return Err(format!(
                    "the cell length {n} = {l} Å is not a length between 0.001 and 1e6 Å"
                ));
            }
        }
        for (x, n) in angles.iter().zip(["alpha", "beta", "gamma"]) {
            if !(x.is_finite() && *x > 0.0 && *x < 180.0) {
                return Err(format!(
                    "the cell angle {n} = {x}° is not an angle between 0 and 180°"
                ));
            }
        }
        let [a, b, c] = lengths;
        let [ca, cb, cg] = angles.map(cos_deg);
        let sg = sin_deg(angles[2]);
        let root = 1.0 - ca * ca - cb * cb - cg * cg + 2.0 * ca * cb * cg;
        if root <= 1e-9 {
            return Err(format!(
                "the cell angles α = {}°, β = {}°, γ = {}° do not form a cell (no volume)",
                angles[0], angles[1], angles[2]
            ));
        }
        let v = a * b * c * root.sqrt();
        let cy = c * (ca - cb * cg) / sg;
        let vectors = [
            [a, 0.0, 0.0],
            [b * cg, b * sg, 0.0],
            [c * cb, cy, v / (a * b * sg)],
        ];
        Ok(Cell {
            lengths,
            angles,
            vectors,
        })
    }

    /// Cartesian position of fractional coordinates.
    pub fn cartesian(&self, f: [f64; 3]) -> [f64; 3] {
        let m = &self.vectors;
        [0, 1, 2].map(|k| f[0] * m[0][k] + f[1] * m[1][k] + f[2] * m[2][k])
    }

    /// The volume in Å³.
    pub fn volume(&self) -> f64 {
        let [a, b, c] = self.vectors;
        dot(a, cross(b, c)).abs()
    }

    /// The distance between the planes of the cell across each axis (Å): a sphere of
    /// radius r reaches ⌈r / width⌉ cells along that axis.
    pub fn widths(&self) -> [f64; 3] {
        let [a, b, c] = self.vectors;
        let v = self.volume();
        [
            v / norm(cross(b, c)),
            v / norm(cross(c, a)),
            v / norm(cross(a, b)),
        ]
    }
}

fn cos_deg(x: f64) -> f64 {
    // Exact zeros and halves for the usual angles, so that right angles give exact zeros.
    match x {
        90.0 => 0.0,
        60.0 => 0.5,
        120.0 => -0.5,
        _ => x.to_radians().cos(),
    }
}

fn sin_deg(x: f64) -> f64 {
    if x == 90.0 { 1.0 } else { x.to_radians().sin() }
}

pub(crate) fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

pub(crate) fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

pub(crate) fn norm(a: [f64; 3]) -> f64 {
    dot(a, a).sqrt()
}

/// One symmetry operator x' = R x + t on fractional coordinates, t reduced to [0, 1).
#[derive(Clone, Debug)]
pub struct Operator {
    /// The rotation part, rows acting on (x, y, z).
    pub rotation: [[i32; 3]; 3],
    /// The translation part, in [0, 1).
    pub translation: [f64; 3],
}

impl Operator {
    /// The image of fractional coordinates.
    pub fn apply(&self, p: [f64; 3]) -> [f64; 3] {
        let r = &self.rotation;
        [0, 1, 2].map(|i| {
            r[i][0] as f64 * p[0]
                + r[i][1] as f64 * p[1]
                + r[i][2] as f64 * p[2]
                + self.translation[i]
        })
    }

    /// The operator written as `x, y, z` triplets (`-x+1/2, y, z`).
    pub fn xyz(&self) -> String {
        let mut parts = Vec::new();
        for i in 0..3 {
            let mut s = String::new();
            for (j, v) in ["x", "y", "z"].iter().enumerate() {
                match self.rotation[i][j] {
                    0 => {}
                    1 if s.is_empty() => s.push_str(v),
                    1 => {
                        s.push('+');
                        s.push_str(v);
                    }
                    -1 => {
                        s.push('-');
                        s.push_str(v);
                    }
                    k => s.push_str(&format!("{k:+}{v}")),
                }
            }
            let t = self.translation[i];
            if t.abs() > 1e-9 {
                s.push('+');
                s.push_str(&fraction(t));
            }
            if s.is_empty() {
                s.push('0');
            }
            parts.push(s);
        }
        parts.join(",")
    }

    fn product(&self, other: &Operator) -> Operator {
        let mut rotation = [[0; 3]; 3];
        for (i, row) in rotation.iter_mut().enumerate() {
            for (j, x) in row.iter_mut().enumerate() {
                *x = (0..3)
                    .map(|k| self.rotation[i][k] * other.rotation[k][j])
                    .sum();
            }
        }
        let t = self.apply(other.translation);
        Operator {
            rotation,
            translation: t.map(reduce),
        }
    }

    fn same(&self, other: &Operator) -> bool {
        self.rotation == other.rotation
            && (0..3).all(|i| {
                let d = self.translation[i] - other.translation[i];
                (d - d.round()).abs() < 2e-3
            })
    }
}

/// A translation written as a fraction with a denominator up to 12 where it is one.
fn fraction(t: f64) -> String {
    for d in [2, 3, 4, 6, 8, 12] {
        let n = t * d as f64;
        if (n - n.round()).abs() < 1e-6 {
            return format!("{}/{d}", n.round() as i64);
        }
    }
    format!("{t}")
}

/// A coordinate reduced to [0, 1), with values a hair below 1 taken as 0.
pub fn reduce(x: f64) -> f64 {
    let r = x - x.floor();
    if r > 1.0 - 1e-9 { 0.0 } else { r }
}

/// Read one operator in the `x, y, z` form: each of the three parts a sum of terms
/// `±x`, `±y`, `±z` and a constant (`1/2`, `0.25`, `+1/3`). `Err` says what is wrong.
pub fn parse_operator(text: &str) -> Result<Operator, String> {
    let parts: Vec<&str> = text.split(',').collect();
    if parts.len() != 3 {
        return Err(format!(
            "'{text}' is not a symmetry operator: expected three parts separated by commas, \
             such as -x+1/2, y, z"
        ));
    }
    let mut rotation = [[0; 3]; 3];
    let mut translation = [0.0; 3];
    for (i, part) in parts.iter().enumerate() {
        let s: String = part
            .chars()
            .filter(|c| !c.is_whitespace())
            .collect::<String>()
            .to_ascii_lowercase();
        if s.is_empty() {
            return Err(format!("'{text}': part {} is empty", i + 1));
        }
        let bad = || {
            format!(
                "'{text}': cannot read part {} ('{}'); expected terms such as x, -y, +z and a \
                 constant such as 1/2",
                i + 1,
                part.trim()
            )
        };
        let chars: Vec<char> = s.chars().collect();
        let mut k = 0;
        while k < chars.len() {
            let mut sign = 1.0;
            if chars[k] == '+' || chars[k] == '-' {
                if chars[k] == '-' {
                    sign = -1.0;
                }
                k += 1;
            }
            let start = k;
            while k < chars.len()
                && (chars[k].is_ascii_digit() || chars[k] == '.' || chars[k] == '/')
            {
                k += 1;
            }
            let number: String = chars[start..k].iter().collect();
            let coefficient = if number.is_empty() {
                1.0
            } else if let Some((n, d)) = number.split_once('/') {
                let n: f64 = n.parse().map_err(|_| bad())?;
                let d: f64 = d.parse().map_err(|_| bad())?;
                if d == 0.0 {
                    return Err(bad());
                }
                n / d
            } else {
                number.parse::<f64>().map_err(|_| bad())?
            };
            if k < chars.len() && chars[k] == '*' {
                k += 1;
            }
            match chars.get(k) {
                Some(c @ ('x' | 'y' | 'z')) => {
                    let j = (*c as u8 - b'x') as usize;
                    if coefficient != 1.0 {
                        return Err(format!(
                            "'{text}': the coefficient of {c} in part {} is not ±1 (not a \
                             crystallographic operator)",
                            i + 1
                        ));
                    }
                    rotation[i][j] += sign as i32;
                    k += 1;
                }
                None | Some('+' | '-') => {
                    if number.is_empty() {
                        return Err(bad());
                    }
                    translation[i] += sign * coefficient;
                }
                _ => return Err(bad()),
            }
        }
    }
    if rotation.iter().flatten().any(|x| x.abs() > 1) {
        return Err(format!("'{text}': a coordinate appears twice in one part"));
    }
    let det = determinant(&rotation);
    if det.abs() != 1 {
        return Err(format!(
            "'{text}' does not map the cell onto itself (its matrix has determinant {det})"
        ));
    }
    Ok(Operator {
        rotation,
        translation: translation.map(reduce),
    })
}

fn determinant(r: &[[i32; 3]; 3]) -> i32 {
    r[0][0] * (r[1][1] * r[2][2] - r[1][2] * r[2][1])
        - r[0][1] * (r[1][0] * r[2][2] - r[1][2] * r[2][0])
        + r[0][2] * (r[1][0] * r[2][1] - r[1][1] * r[2][0])
}

/// Check that the operators form a group up to lattice translations: the identity is
/// there, no operator is listed twice, and every product is in the list. `Err` names
/// the operators (1-based) whose product is missing.
pub fn check_group(ops: &[Operator]) -> Result<(), String> {
    let identity = Operator {
        rotation: [[1, 0, 0], [0, 1, 0], [0, 0, 1]],
        translation: [0.0; 3],
    };
    if !ops.iter().any(|o| o.same(&identity)) {
        return Err("the operators do not include the identity x, y, z".into());
    }
    for (i, a) in ops.iter().enumerate() {
        if let Some(j) = ops[..i].iter().position(|b| b.same(a)) {
            return Err(format!(
                "operators {} and {} are the same ({})",
                j + 1,
                i + 1,
                a.xyz()
            ));
        }
    }
    for (i, a) in ops.iter().enumerate() {
        for (j, b) in ops.iter().enumerate() {
            let p = a.product(b);
            if !ops.iter().any(|o| o.same(&p)) {
                return Err(format!(
                    "the operators do not form a group: the product of operator {} ({}) and \
                     operator {} ({}) is {}, which is not in the list",
                    i + 1,
                    a.xyz(),
                    j + 1,
                    b.xyz(),
                    p.xyz()
                ));
            }
        }
    }
    Ok(())
}

/// A space group found in the tables.
#[derive(Clone, Debug)]
pub struct TableGroup {
    /// International Tables number (1–230).
    pub number: i32,
    /// Hermann–Mauguin symbol (full form, as the tables write it).
    pub hm: String,
    /// Hall symbol.
    pub hall: String,
    /// The setting code of the tables ("" when the group has one; "1"/"2" origin choice,
    /// "H"/"R" axes, monoclinic axis and cell choice codes).
    pub setting: String,
    /// Every operator of the conventional cell (centring translations included).
    pub operators: Vec<Operator>,
}

fn entries() -> impl Iterator<Item = HallSymbolEntry> {
    (1..=530).filter_map(hall_symbol_entry)
}

fn from_entry(e: &HallSymbolEntry) -> Option<TableGroup> {
    let symbol = HallSymbol::new(e.hall_symbol)?;
    Some(TableGroup {
        number: e.number,
        hm: e.hm_short.replace('_', ""),
        hall: e.hall_symbol.to_string(),
        setting: e.setting.to_string(),
        operators: operators_of(&symbol),
    })
}

fn operators_of(symbol: &HallSymbol) -> Vec<Operator> {
    let mut out = Vec::new();
    // The tables list the centring translations other than zero.
    let zero = [0.0; 3];
    let mut centring = vec![zero];
    centring.extend(
        symbol
            .centering_translations
            .iter()
            .map(|c| [c[0], c[1], c[2]]),
    );
    for c in &centring {
        for op in symbol.traverse() {
            let r = op.rotation_as_array();
            let t = op.translation_as_array();
            out.push(Operator {
                rotation: r,
                translation: [0, 1, 2].map(|i| reduce(t[i] + c[i])),
            });
        }
    }
    out
}

/// The operators of a Hall symbol (`-P 6c 2c`); `None` when the symbol is not one.
pub fn from_hall(symbol: &str) -> Option<TableGroup> {
    let cleaned = symbol.trim().replace('\'', "^").replace('"', "=");
    let key = squeeze(&cleaned);
    // Prefer the tables' entry (for its number and name); any valid Hall symbol is
    // accepted.
    if let Some(e) = entries().find(|e| squeeze(e.hall_symbol) == key) {
        return from_entry(&e);
    }
    let parsed = HallSymbol::new(&cleaned)?;
    Some(TableGroup {
        number: 0,
        hm: String::new(),
        hall: cleaned.clone(),
        setting: String::new(),
        operators: operators_of(&parsed),
    })
}

fn squeeze(s: &str) -> String {
    s.chars()
        .filter(|c| !c.is_whitespace() && *c != '_')
        .collect::<String>()
        .to_ascii_lowercase()
}

/// What the file says about the setting of a symbol.
#[derive(Clone, Debug, Default)]
pub struct SettingHints {
    /// `_space_group_IT_coordinate_system_code` or a `:code` after the symbol.
    pub code: Option<String>,
    /// Whether the cell has hexagonal axes (γ = 120°, α = β = 90°).
    pub hexagonal_cell: bool,
}

/// The group of a Hermann–Mauguin symbol (`P 63/m m c`, `Fd-3m:2`, `Fd3m`), or of an
/// International Tables number when `symbol` is `None`. `Ok(None)` when the symbol is not
/// in the tables; `Err` when the file does not say which of several settings it means.
pub fn from_hm(
    symbol: Option<&str>,
    number: Option<i32>,
    hints: &SettingHints,
) -> Result<Option<(TableGroup, Option<String>)>, String> {
    let mut code = hints.code.clone();
    let candidates: Vec<HallSymbolEntry> = match symbol {
        Some(s) => {
            let (body, suffix) = split_setting(s);
            if suffix.is_some() {
                code = suffix;
            }
            let key = squeeze(&body);
            let mut found: Vec<HallSymbolEntry> = entries()
                .filter(|e| squeeze(e.hm_full) == key || squeeze(e.hm_short) == key)
                .collect();
            if found.is_empty() {
                // The older cubic symbols leave out the bar: Fd3m for Fd-3m.
                let barred = add_cubic_bar(&key);
                found = entries()
                    .filter(|e| squeeze(e.hm_full) == barred || squeeze(e.hm_short) == barred)
                    .collect();
            }
            if found.is_empty() {
                return Ok(None);
            }
            // Prefer an exact match of the full symbol (monoclinic settings differ there).
            let full: Vec<HallSymbolEntry> = found
                .iter()
                .filter(|e| squeeze(e.hm_full) == key)
                .cloned()
                .collect();
            if !full.is_empty() {
                found = full;
            }
            if let Some(n) = number
                && found.iter().all(|e| e.number != n)
            {
                return Err(format!(
                    "the symbol '{s}' is space group No. {} but the file gives the number {n}",
                    found[0].number
                ));
            }
            found
        }
        None => {
            let Some(n) = number else { return Ok(None) };
            if !(1..=230).contains(&n) {
                return Ok(None);
            }
            entries().filter(|e| e.number == n).collect()
        }
    };
    let mut note = None;
    let mut pick = candidates.clone();
    if pick.len() > 1
        && let Some(c) = &code
    {
        let c = match c.trim().to_ascii_uppercase().as_str() {
            "S" => "1".to_string(),
            "Z" => "2".to_string(),
            other => other.to_string(),
        };
        let narrowed: Vec<HallSymbolEntry> = pick
            .iter()
            .filter(|e| e.setting.eq_ignore_ascii_case(&c) || e.setting.ends_with(c.as_str()))
            .cloned()
            .collect();
        if narrowed.is_empty() {
            let known: Vec<&str> = pick.iter().map(|e| e.setting).collect();
            return Err(format!(
                "the setting code '{c}' is not one of this group's settings ({})",
                known.join(", ")
            ));
        }
        pick = narrowed;
    }
    if pick.len() > 1 && pick.iter().all(|e| matches!(e.setting, "H" | "R")) {
        let want = if hints.hexagonal_cell { "H" } else { "R" };
        pick.retain(|e| e.setting == want);
        note = Some(format!(
            "{} axes, from the cell",
            if want == "H" {
                "hexagonal"
            } else {
                "rhombohedral"
            }
        ));
    }
    if pick.len() > 1 && pick.iter().all(|e| matches!(e.setting, "1" | "2")) {
        return Err(format!(
            "space group {} (No. {}) has two origin choices in International Tables and the \
             file does not say which one its coordinates use; write ':1' or ':2' after the \
             symbol (or set _space_group_IT_coordinate_system_code), or list the operators \
             in _space_group_symop_operation_xyz",
            pick[0].hm_short.replace('_', ""),
            pick[0].number
        ));
    }
    if pick.len() > 1 {
        // Settings that differ in axes (monoclinic, orthorhombic): the symbol or number
        // alone names the standard setting.
        let standard = moyo::data::Setting::Standard
            .hall_number(pick[0].number)
            .unwrap_or(pick[0].hall_number);
        let chosen = pick
            .iter()
            .find(|e| e.hall_number == standard)
            .cloned()
            .unwrap_or_else(|| pick[0].clone());
        note = Some(format!(
            "the standard setting '{}' of International Tables, since the file names no other",
            chosen.hm_full.replace('_', "")
        ));
        pick = vec![chosen];
    }
    let e = &pick[0];
    Ok(from_entry(e).map(|g| (g, note)))
}

/// Split `Fd-3m:2`, `F d -3 m :2`, `R -3 H`, `Fd-3mZ`-style setting codes from a symbol.
fn split_setting(s: &str) -> (String, Option<String>) {
    let t = s.trim();
    if let Some((body, code)) = t.rsplit_once(':') {
        return (body.trim().to_string(), Some(code.trim().to_string()));
    }
    // ICSD writes 'F d -3 m Z' / 'F d -3 m S' and 'R -3 H'.
    let words: Vec<&str> = t.split_whitespace().collect();
    if words.len() > 1
        && let Some(last) = words.last()
        && matches!(*last, "S" | "Z" | "H" | "R")
    {
        return (words[..words.len() - 1].join(" "), Some(last.to_string()));
    }
    (t.to_string(), None)
}

/// `fd3m` → `fd-3m`: a bar before a 3 that follows a glide or mirror letter.
fn add_cubic_bar(key: &str) -> String {
    let c: Vec<char> = key.chars().collect();
    let mut out = String::new();
    for (i, ch) in c.iter().enumerate() {
        if *ch == '3' && i >= 2 && matches!(c[i - 1], 'm' | 'n' | 'a' | 'd') {
            out.push('-');
        }
        out.push(*ch);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cartesian_convention() {
        let c = Cell::new([4.0, 4.0, 7.0], [90.0, 90.0, 120.0]).unwrap();
        assert_eq!(c.vectors[0], [4.0, 0.0, 0.0]);
        assert!((c.vectors[1][0] + 2.0).abs() < 1e-12);
        assert!((c.vectors[1][1] - 2.0 * 3f64.sqrt()).abs() < 1e-12);
        assert!((c.vectors[2][2] - 7.0).abs() < 1e-12);
        assert!((c.volume() - 16.0 * 3f64.sqrt() / 2.0 * 7.0).abs() < 1e-9);
        // A triclinic cell keeps its lengths and angles.
        let t = Cell::new([5.0, 6.0, 7.0], [80.0, 95.0, 110.0]).unwrap();
        let [a, b, cc] = t.vectors;
        let ang = |u: [f64; 3], v: [f64; 3]| (dot(u, v) / norm(u) / norm(v)).acos().to_degrees();
        assert!((norm(cc) - 7.0).abs() < 1e-12 && (norm(b) - 6.0).abs() < 1e-12);
        assert!((ang(b, cc) - 80.0).abs() < 1e-9);
        assert!((ang(a, cc) - 95.0).abs() < 1e-9);
        assert!((ang(a, b) - 110.0).abs() < 1e-9);
        assert!(Cell::new([1.0, 1.0, 1.0], [120.0, 120.0, 120.0]).is_err());
    }

    #[test]
    fn operators_in_every_common_spelling() {
        for (text, r, t) in [
            ("x,y,z", [[1, 0, 0], [0, 1, 0], [0, 0, 1]], [0.0, 0.0, 0.0]),
            (
                "-x+1/2, Y, 1/2-z",
                [[-1, 0, 0], [0, 1, 0], [0, 0, -1]],
                [0.5, 0.0, 0.5],
            ),
            (
                "x-y, +x, z+0.25",
                [[1, -1, 0], [1, 0, 0], [0, 0, 1]],
                [0.0, 0.0, 0.25],
            ),
            (
                "-y,-x,-z-1/3",
                [[0, -1, 0], [-1, 0, 0], [0, 0, -1]],
                [0.0, 0.0, 2.0 / 3.0],
            ),
        ] {
            let op = parse_operator(text).unwrap();
            assert_eq!(op.rotation, r, "{text}");
            for (got, want) in op.translation.iter().zip(t) {
                assert!((got - want).abs() < 1e-12, "{text}");
            }
        }
        for bad in [
            "x,y", "x,y,q", "2x,y,z", "x,x,z", "x,y,z+z", "x,,z", "x,y,1/0",
        ] {
            assert!(parse_operator(bad).is_err(), "{bad}");
        }
        assert_eq!(parse_operator("-x+1/2,y,-z").unwrap().xyz(), "-x+1/2,y,-z");
    }

    #[test]
    fn groups_are_checked() {
        let ops: Vec<Operator> = ["x,y,z", "-x,-y,z", "-x,y,-z", "x,-y,-z"]
            .iter()
            .map(|s| parse_operator(s).unwrap())
            .collect();
        assert!(check_group(&ops).is_ok());
        let m = check_group(&ops[..3]).unwrap_err();
        assert!(m.contains("not in the list"), "{m}");
        let m = check_group(&ops[1..]).unwrap_err();
        assert!(m.contains("identity"), "{m}");
    }

    /// Orders of the groups (general-position multiplicities in the conventional cell,
    /// International Tables Vol. A).
    #[test]
    fn symbols_and_numbers_from_the_tables() {
        let hints = SettingHints::default();
        let order = |s: &str| {
            from_hm(Some(s), None, &hints)
                .unwrap()
                .unwrap_or_else(|| panic!("{s}"))
                .0
        };
        let g = order("P 63/m m c");
        assert_eq!((g.number, g.operators.len()), (194, 24));
        assert_eq!(order("P6_3/mmc").number, 194);
        assert_eq!(order("Pm-3n").operators.len(), 48);
        assert_eq!(order("Pm3n").number, 223);
        assert_eq!(order("F d -3 m :2").operators.len(), 192);
        assert_eq!(order("F d -3 m Z").number, 227);
        assert_eq!(order("Pn-3m:2").operators.len(), 48);
        let m = from_hm(Some("Fd-3m"), None, &hints).unwrap_err();
        assert!(m.contains("two origin choices"), "{m}");
        let m = from_hm(None, Some(224), &hints).unwrap_err();
        assert!(m.contains("two origin choices"), "{m}");
        assert!(from_hm(Some("P 7"), None, &hints).unwrap().is_none());
        let m = from_hm(Some("P 63/m m c"), Some(62), &hints).unwrap_err();
        assert!(m.contains("No. 194"), "{m}");
        let hex = SettingHints {
            code: None,
            hexagonal_cell: true,
        };
        let r = from_hm(Some("R -3 m"), None, &hex).unwrap().unwrap().0;
        assert_eq!(r.operators.len(), 36);
        let r = from_hm(Some("R -3 m"), None, &hints).unwrap().unwrap().0;
        assert_eq!(r.operators.len(), 12);
        let p21c = from_hm(Some("P 21/c"), None, &hints).unwrap().unwrap().0;
        assert_eq!((p21c.number, p21c.operators.len()), (14, 4));
        for g in [
            order("P 63/m m c"),
            order("F d -3 m :2"),
            from_hall("-P 6c 2c").unwrap(),
        ] {
            check_group(&g.operators).unwrap();
        }
        assert_eq!(from_hall("-P 6c 2c").unwrap().number, 194);
        assert!(from_hall("Q 9").is_none());
    }
}
