//! Published structures in: reading a CIF (the IUCr's Crystallographic Information File)
//! into a lattice file.
//!
//! The door most users come in by. A CIF gives the cell, the space group or its
//! operators, and the asymmetric unit with occupancies; [`import`] turns one data block
//! into the text of a lattice file (YAML, the format of README "The lattice file"), with
//! comments that say where every part came from, and [`Imported::lattice`] validates that
//! text into a [`Lattice`](crate::Lattice) as if it had been written by hand. Nothing
//! downstream knows that the structure came from a CIF.
//!
//! One file per job, in the order of the data flow:
//!
//! - [`syntax`]: the text of a CIF → [`data::Document`] (blocks, tags, loops, values with
//!   their positions);
//! - [`data`]: the data model, tag look-up across CIF versions, numbers with standard
//!   uncertainties;
//! - [`symmetry`]: the cell from lengths and angles (the Cartesian convention is stated
//!   there), the operators from the file or from the space-group tables;
//! - [`expand`]: the asymmetric unit expanded into the cell, special positions merged;
//! - [`disorder`]: the hydrogen-bond network, target occupancies, shared positions;
//! - [`write`]: the lattice file.
//!
//! ```
//! use groundcount::cif;
//! let text = "data_ice
//! _cell_length_a 3.35 _cell_length_b 3.35 _cell_length_c 3.35
//! _space_group_name_H-M_alt 'P n -3 m :2'
//! loop_ _atom_site_label _atom_site_type_symbol _atom_site_fract_x _atom_site_fract_y
//! _atom_site_fract_z _atom_site_occupancy
//! O1 O 0.25 0.25 0.25 1
//! D1 D 0.4115 0.4115 0.4115 0.5
//! ";
//! let imported = cif::import(text.as_bytes(), "ice-vii.cif".as_ref(), &Default::default()).unwrap();
//! let lattice = imported.lattice("ice-vii.cif").unwrap();
//! assert_eq!(lattice.crystal.sites.len(), 2); // O on 2a of Pn-3m
//! assert_eq!(lattice.crystal.bonds.len(), 4); // two hydrogen bonds per water
//! ```

pub mod data;
pub mod disorder;
pub mod expand;
pub mod symmetry;
pub mod syntax;
pub mod write;

use std::path::Path;

use crate::error::{Error, Position, Result};
use data::{Block, Document, Value};

/// How to read a CIF.
#[derive(Clone, Debug, Default)]
pub struct Options {
    /// The data block to read (by name, case-insensitive); `None`: the only block with
    /// atom sites.
    pub block: Option<String>,
}

/// Where the symmetry operators came from.
#[derive(Clone, Debug)]
pub enum SymmetrySource {
    /// Listed in the file under this tag.
    Listed {
        /// The tag as written.
        tag: String,
    },
    /// From the space-group tables, found by this item of the file.
    Tables {
        /// What the file gave (`Hall symbol '-P 6c 2c'`, `Hermann–Mauguin symbol …`,
        /// `International Tables number 194`).
        from: String,
        /// How a setting was chosen, when the tables held several.
        note: Option<String>,
    },
}

/// A CIF block turned into a lattice file.
#[derive(Clone, Debug)]
pub struct Imported {
    /// The lattice file (YAML with comments).
    pub yaml: String,
    /// The data block read.
    pub block: String,
    /// What was recognised, one line each (for the command line to show).
    pub summary: Vec<String>,
    /// Disorder that would need weighted counting (not supported yet), one line each;
    /// written as comments in `yaml`. A non-empty list makes [`Imported::lattice`] refuse.
    pub pending: Vec<String>,
    /// Where in the file the first site named by `pending` stands.
    pub pending_position: Option<Position>,
}

impl Imported {
    /// The lattice, validated as a lattice file would be; `path` stands for the structure
    /// file in messages. Refused when the structure needs weighted counting (target
    /// occupancies, a fixed composition), which is not supported yet.
    pub fn lattice(&self, path: impl AsRef<Path>) -> Result<crate::Lattice> {
        if !self.pending.is_empty() {
            return Err(Error::Invalid {
                path: path.as_ref().to_path_buf(),
                position: self.pending_position.unwrap_or_default(),
                message: format!(
                    "block '{}' refines disorder that cannot be counted yet: {}; counting it \
                     as if every arrangement were equally likely would give a wrong number, \
                     so nothing was counted",
                    self.block,
                    self.pending.join("; ")
                ),
            });
        }
        crate::Lattice::from_yaml(&self.yaml, path)
    }
}

/// Whether a file is a CIF rather than a lattice file: by its extension (`.cif`,
/// `.mcif`), or by its content (the `#\#CIF` first line, or a first word that begins a
/// data block).
pub fn is_cif(path: &Path, bytes: &[u8]) -> bool {
    let ext = path
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    if matches!(ext.as_deref(), Some("cif" | "mcif")) {
        return true;
    }
    if matches!(ext.as_deref(), Some("yaml" | "yml")) {
        return false;
    }
    let text = String::from_utf8_lossy(&bytes[..bytes.len().min(4096)]);
    let text = text.trim_start_matches('\u{feff}');
    if text.starts_with("#\\#CIF") {
        return true;
    }
    text.lines()
        .map(str::trim)
        .find(|l| !l.is_empty() && !l.starts_with('#'))
        .and_then(|l| l.split_whitespace().next())
        .is_some_and(|w| w.to_ascii_lowercase().starts_with("data_") && !w.contains(':'))
}

/// Read the bytes of a CIF (UTF-8; other bytes, which old files hold in text fields, are
/// read as replacement characters).
pub fn parse(bytes: &[u8], path: &Path) -> Result<Document> {
    syntax::parse(&String::from_utf8_lossy(bytes), path)
}

/// The data blocks of a document that hold atom sites, by name.
pub fn structure_blocks(doc: &Document) -> Vec<&Block> {
    doc.blocks.iter().filter(|b| b.has_atoms()).collect()
}

fn invalid(path: &Path, position: Position, message: String) -> Error {
    Error::Invalid {
        path: path.to_path_buf(),
        position,
        message,
    }
}

fn at(block: &Block, value: Option<&Value>) -> Position {
    value.map_or(block.position, |v| v.position)
}

/// Choose the block to read.
pub fn choose<'d>(doc: &'d Document, options: &Options, path: &Path) -> Result<&'d Block> {
    let names = |bs: &[&Block]| {
        bs.iter()
            .map(|b| format!("'{}' (line {})", b.name, b.position.line))
            .collect::<Vec<_>>()
            .join(", ")
    };
    if let Some(want) = &options.block {
        let want = want.strip_prefix("data_").unwrap_or(want);
        return doc
            .blocks
            .iter()
            .find(|b| b.name.eq_ignore_ascii_case(want))
            .ok_or_else(|| {
                let all: Vec<&Block> = doc.blocks.iter().collect();
                invalid(
                    path,
                    Position::default(),
                    format!(
                        "no data block named '{want}'; the file holds {}",
                        names(&all)
                    ),
                )
            });
    }
    let with_atoms = structure_blocks(doc);
    match with_atoms.as_slice() {
        [one] => Ok(one),
        [] => Err(invalid(
            path,
            doc.blocks[0].position,
            format!(
                "no data block has atom sites (_atom_site_fract_x); the file holds {}",
                names(&doc.blocks.iter().collect::<Vec<_>>())
            ),
        )),
        many => Err(invalid(
            path,
            Position::default(),
            format!(
                "the file holds {} data blocks with atom sites: {}; choose one of them by name",
                many.len(),
                names(many)
            ),
        )),
    }
}

/// One data block read and interpreted: the cell, the operators, the expanded cell and
/// what its disorder was recognised as.
#[derive(Clone, Debug)]
pub struct Structure {
    /// The cell.
    pub cell: symmetry::Cell,
    /// The symmetry operators used.
    pub operators: Vec<symmetry::Operator>,
    /// The asymmetric unit and the atoms of the cell.
    pub expansion: expand::Expansion,
    /// The hydrogen-bond network and what needs weighted counting.
    pub network: disorder::Network,
    /// Where everything came from, for the lattice file's comments.
    pub source: write::Source,
}

/// Read a CIF and turn one data block into a lattice file.
pub fn import(bytes: &[u8], path: &Path, options: &Options) -> Result<Imported> {
    let s = read(bytes, path, options)?;
    Ok(write::lattice_file(
        &s.source,
        &s.cell,
        &s.expansion,
        &s.network,
    ))
}

/// Read a CIF and interpret one data block.
pub fn read(bytes: &[u8], path: &Path, options: &Options) -> Result<Structure> {
    let doc = parse(bytes, path)?;
    let block = choose(&doc, options, path)?;
    let fail = |value: Option<&Value>, message: String| invalid(path, at(block, value), message);

    // The cell.
    let mut lengths = [0.0; 3];
    let mut length_text = Vec::new();
    for (k, n) in ["a", "b", "c"].iter().enumerate() {
        let tag = format!("_cell_length_{n}");
        let v = block.single(&[&tag]).ok_or_else(|| {
            fail(
                None,
                format!(
                    "block '{}' gives no {tag}; the cell needs a, b and c in Å",
                    block.name
                ),
            )
        })?;
        lengths[k] = number(v, &tag).map_err(|m| fail(Some(v), m))?;
        length_text.push(format!("{n} = {} Å", v.text.trim()));
    }
    let mut angles = [90.0; 3];
    let mut angle_text = Vec::new();
    let mut defaulted = Vec::new();
    for (k, n) in ["alpha", "beta", "gamma"].iter().enumerate() {
        let tag = format!("_cell_angle_{n}");
        match block.single(&[&tag]) {
            Some(v) if !v.is_missing() => {
                angles[k] = number(v, &tag).map_err(|m| fail(Some(v), m))?;
                angle_text.push(format!("{n} = {}°", v.text.trim()));
            }
            _ => {
                defaulted.push(*n);
                angle_text.push(format!("{n} = 90°"));
            }
        }
    }
    let cell = symmetry::Cell::new(lengths, angles)
        .map_err(|m| fail(block.single(&["_cell_length_a"]), m))?;
    let hexagonal_cell = (angles[2] - 120.0).abs() < 1e-3
        && (angles[0] - 90.0).abs() < 1e-3
        && (angles[1] - 90.0).abs() < 1e-3;

    // The operators.
    let (ops, source, group_name) = operators(block, path, hexagonal_cell)?;

    // The atoms.
    let sites = expand::read_sites(block).map_err(|(m, v)| fail(v.as_ref(), m))?;
    let expansion = expand::expand(&cell, &ops, sites).map_err(|(m, v)| fail(v.as_ref(), m))?;
    let network = disorder::recognise(&cell, &expansion).map_err(|m| {
        // Point at the site the message names first.
        let first = expansion
            .sites
            .iter()
            .filter_map(|s| first_word(&m, &s.label).map(|i| (i, s)))
            .min_by_key(|(i, _)| *i)
            .map(|(_, s)| &s.label_value);
        fail(first, m)
    })?;

    let name = block
        .single(&[
            "_chemical_name_common",
            "_chemical_name_mineral",
            "_chemical_name_systematic",
        ])
        .filter(|v| !v.is_missing() && !v.text.trim().is_empty())
        .map(|v| v.text.trim().replace(['\n', '\r'], " "));
    let source_text = write::Source {
        file: path.display().to_string(),
        block: block.name.clone(),
        block_line: block.position.line,
        content_hash: crate::content_hash(&String::from_utf8_lossy(bytes)),
        lengths: length_text.join(", "),
        angles: angle_text.join(", "),
        defaulted_angles: defaulted.iter().map(|s| s.to_string()).collect(),
        symmetry: source,
        group_name,
        operators: ops.len(),
        chemical_name: name,
        formula: block
            .single(&["_chemical_formula_sum"])
            .filter(|v| !v.is_missing())
            .map(|v| v.text.trim().to_string()),
    };
    Ok(Structure {
        cell,
        operators: ops,
        expansion,
        network,
        source: source_text,
    })
}

/// Where `label` first stands in `text` as a whole word (or as `label_N`).
fn first_word(text: &str, label: &str) -> Option<usize> {
    let mut from = 0;
    while let Some(i) = text[from..].find(label) {
        let start = from + i;
        let end = start + label.len();
        let before = text[..start].chars().next_back();
        let after = text[end..].chars().next();
        let boundary = |c: Option<char>| c.is_none_or(|c| !c.is_alphanumeric());
        if boundary(before) && (boundary(after) || after == Some('_')) {
            return Some(start);
        }
        from = end;
    }
    None
}

fn number(v: &Value, tag: &str) -> std::result::Result<f64, String> {
    match v.number() {
        Some(Ok(m)) => Ok(m.value),
        Some(Err(e)) => Err(format!("{tag}: {e}")),
        None => Err(format!(
            "{tag} has no value ('{}'); a number is needed",
            v.text
        )),
    }
}

type Operators = (Vec<symmetry::Operator>, SymmetrySource, Option<String>);

/// The operators of a block, and where they came from.
fn operators(block: &Block, path: &Path, hexagonal_cell: bool) -> Result<Operators> {
    let fail = |value: Option<&Value>, message: String| invalid(path, at(block, value), message);
    let listed_tags = [
        "_space_group_symop_operation_xyz",
        "_symmetry_equiv_pos_as_xyz",
    ];
    let hall = block
        .single(&["_space_group_name_hall", "_symmetry_space_group_name_hall"])
        .filter(|v| !v.is_missing());
    let hm = block
        .single(&[
            "_space_group_name_h-m_alt",
            "_symmetry_space_group_name_h-m",
            "_space_group_name_h-m",
        ])
        .filter(|v| !v.is_missing());
    let number_value = block
        .single(&["_space_group_it_number", "_symmetry_int_tables_number"])
        .filter(|v| !v.is_missing());
    let number = match number_value {
        Some(v) => match v.number() {
            Some(Ok(m)) if m.value.fract() == 0.0 && (1.0..=230.0).contains(&m.value) => {
                Some(m.value as i32)
            }
            _ => {
                return Err(fail(
                    Some(v),
                    format!(
                        "the space-group number '{}' is not a whole number from 1 to 230",
                        v.text
                    ),
                ));
            }
        },
        None => None,
    };
    let hints = symmetry::SettingHints {
        code: block
            .single(&["_space_group_it_coordinate_system_code"])
            .filter(|v| !v.is_missing())
            .map(|v| v.text.trim().to_string()),
        hexagonal_cell,
    };
    if let Some(found) = block.find(&listed_tags) {
        let (tag, values) = match found {
            data::Found::Single(i) => (i.tag.clone(), vec![&i.value]),
            data::Found::Column(l, c) => {
                (l.tags[c].0.clone(), l.rows.iter().map(|r| &r[c]).collect())
            }
        };
        let mut ops = Vec::with_capacity(values.len());
        for v in &values {
            ops.push(symmetry::parse_operator(&v.text).map_err(|m| fail(Some(v), m))?);
        }
        symmetry::check_group(&ops).map_err(|m| fail(values.first().copied(), m))?;
        // A symbol beside the operators must name a group of the same order.
        let mut name = hm.map(|v| v.text.trim().to_string());
        if let Some(v) = hm
            && let Ok(Some((g, _))) = symmetry::from_hm(Some(&v.text), number, &hints)
        {
            if g.operators.len() != ops.len() {
                return Err(fail(
                    Some(v),
                    format!(
                        "the file lists {} symmetry operators, but its space group {} (No. {}) \
                         has {} in this cell; the list or the symbol is wrong",
                        ops.len(),
                        v.text.trim(),
                        g.number,
                        g.operators.len()
                    ),
                ));
            }
            name = Some(format!("{} (No. {})", g.hm, g.number));
        }
        return Ok((ops, SymmetrySource::Listed { tag }, name));
    }
    if let Some(v) = hall {
        let g = symmetry::from_hall(&v.text).ok_or_else(|| {
            fail(
                Some(v),
                format!(
                    "'{}' is not a Hall symbol the space-group tables know; list the \
                     operators in _space_group_symop_operation_xyz instead",
                    v.text.trim()
                ),
            )
        })?;
        let name = (g.number > 0).then(|| format!("{} (No. {})", g.hm, g.number));
        return Ok((
            g.operators,
            SymmetrySource::Tables {
                from: format!("the Hall symbol '{}'", v.text.trim()),
                note: None,
            },
            name,
        ));
    }
    if hm.is_some() || number.is_some() {
        let what = match hm {
            Some(v) => format!("the Hermann–Mauguin symbol '{}'", v.text.trim()),
            None => format!("the International Tables number {}", number.unwrap_or(0)),
        };
        let found = symmetry::from_hm(hm.map(|v| v.text.as_str()), number, &hints)
            .map_err(|m| fail(hm.or(number_value), m))?;
        let Some((g, note)) = found else {
            return Err(fail(
                hm.or(number_value),
                format!(
                    "{what} is not in the space-group tables; write it as International \
                     Tables does (such as 'P 63/m m c') or list the operators in \
                     _space_group_symop_operation_xyz"
                ),
            ));
        };
        let name = format!("{} (No. {})", g.hm, g.number);
        return Ok((
            g.operators,
            SymmetrySource::Tables { from: what, note },
            Some(name),
        ));
    }
    Err(fail(
        None,
        format!(
            "block '{}' gives no symmetry: expected the operators \
             (_space_group_symop_operation_xyz or _symmetry_equiv_pos_as_xyz), a Hall or \
             Hermann–Mauguin symbol, or the International Tables number (write 'P 1' for a \
             cell without symmetry)",
            block.name
        ),
    ))
}
