//! Reading the text of a CIF into its [`Document`]: data blocks, tags, loops, quoted
//! strings, text fields between lines that begin with `;`, `.` and `?`, comments, and the
//! CIF 2.0 additions in common use (the `#\#CIF_2.0` first line, triple-quoted strings,
//! lists and tables, which are read but not interpreted). Save frames (used in
//! dictionaries) are read and skipped.
//!
//! Every problem is an [`Error::Syntax`] at the file, line and column where it sits, in
//! plain words: what was found and what was expected there.

use std::path::Path;

use super::data::{Block, Document, Item, Kind, Loop, Value, normalise};
use crate::error::{Error, Position, Result};

/// Read CIF text. `path` stands for the file in messages.
pub fn parse(text: &str, path: &Path) -> Result<Document> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let cif2 = text.starts_with("#\\#CIF_2.0");
    let mut s = Scanner {
        chars: text.chars().collect(),
        i: 0,
        line: 1,
        column: 1,
        cif2,
        path,
    };
    let mut doc = Document {
        blocks: Vec::new(),
        cif2,
    };
    let mut pending: Option<Token> = None;
    let mut block: Option<Block> = None;
    let mut in_save: Option<Position> = None;
    // Items of a save frame go to a block that is dropped.
    let mut frame = Block {
        name: String::new(),
        position: Position::default(),
        items: Vec::new(),
        loops: Vec::new(),
    };
    loop {
        let token = match pending.take() {
            Some(t) => t,
            None => match s.next()? {
                Some(t) => t,
                None => break,
            },
        };
        match token {
            Token::Data(name, at) => {
                if let Some(p) = in_save {
                    return Err(s.error(
                        at,
                        format!(
                            "a data block begins inside the save frame opened at line {}; \
                             expected `save_` to close the frame first",
                            p.line
                        ),
                    ));
                }
                if name.is_empty() {
                    return Err(s.error(
                        at,
                        "`data_` needs a block name right after it (such as data_ice_Ih)".into(),
                    ));
                }
                if let Some(b) = block.take() {
                    doc.blocks.push(b);
                }
                if let Some(b) = doc
                    .blocks
                    .iter()
                    .find(|b| b.name.eq_ignore_ascii_case(&name))
                {
                    return Err(s.error(
                        at,
                        format!(
                            "a second data block named '{name}' (the first is at line {}); \
                             block names must differ",
                            b.position.line
                        ),
                    ));
                }
                block = Some(Block {
                    name,
                    position: at,
                    items: Vec::new(),
                    loops: Vec::new(),
                });
            }
            Token::SaveStart(at) => {
                if in_save.is_some() {
                    return Err(s.error(
                        at,
                        "a save frame inside a save frame; expected `save_` to close the first"
                            .into(),
                    ));
                }
                if block.is_none() {
                    return Err(s.error(at, "a save frame before any data block".into()));
                }
                in_save = Some(at);
                frame.items.clear();
                frame.loops.clear();
            }
            Token::SaveEnd(at) => {
                if in_save.take().is_none() {
                    return Err(s.error(at, "`save_` closes no open save frame".into()));
                }
            }
            Token::Global(at) => {
                return Err(s.error(
                    at,
                    "`global_` blocks are not part of CIF; expected `data_NAME`".into(),
                ));
            }
            Token::Stop(at) => {
                return Err(s.error(
                    at,
                    "`stop_` is not part of CIF (nested loops are not allowed); expected a \
                     tag, a value or `loop_`"
                        .into(),
                ));
            }
            Token::Value(v) => {
                let message = if block.is_none() {
                    format!(
                        "found '{}' before any data block; expected `data_NAME` first",
                        short(&v.text)
                    )
                } else {
                    format!(
                        "found the value '{}' without a tag; expected a tag (a name that \
                         begins with _) or `loop_` before it",
                        short(&v.text)
                    )
                };
                return Err(s.error(v.position, message));
            }
            Token::Tag(tag, at) => {
                let Some(b) = block.as_mut() else {
                    return Err(s.error(
                        at,
                        format!(
                            "the tag {tag} comes before any data block; expected `data_NAME` first"
                        ),
                    ));
                };
                let value = match s.next()? {
                    Some(Token::Value(v)) => v,
                    other => {
                        return Err(s.error(
                            at,
                            format!(
                                "the tag {tag} has no value; expected a value after it{}",
                                found_instead(&other)
                            ),
                        ));
                    }
                };
                let target = if in_save.is_some() { &mut frame } else { b };
                check_new_tag(&s, target, &tag, at)?;
                target.items.push(Item {
                    tag,
                    position: at,
                    value,
                });
            }
            Token::Loop(at) => {
                let Some(b) = block.as_mut() else {
                    return Err(s.error(at, "`loop_` before any data block".into()));
                };
                let mut tags: Vec<(String, Position)> = Vec::new();
                let mut values: Vec<Value> = Vec::new();
                loop {
                    match s.next()? {
                        Some(Token::Tag(t, p)) if values.is_empty() => {
                            if let Some((_, q)) =
                                tags.iter().find(|(u, _)| normalise(u) == normalise(&t))
                            {
                                return Err(s.error(
                                    p,
                                    format!(
                                        "the tag {t} appears twice in this loop (first at line {})",
                                        q.line
                                    ),
                                ));
                            }
                            tags.push((t, p));
                        }
                        Some(Token::Value(v)) if !tags.is_empty() => values.push(v),
                        other => {
                            pending = other;
                            break;
                        }
                    }
                }
                if tags.is_empty() {
                    return Err(s.error(
                        at,
                        format!(
                            "`loop_` must be followed by the tags of its columns{}",
                            found_instead(&pending)
                        ),
                    ));
                }
                if values.is_empty() {
                    return Err(s.error(
                        at,
                        format!(
                            "the loop that begins here has {} tag(s) and no values; expected \
                             its rows of values after the tags",
                            tags.len()
                        ),
                    ));
                }
                if !values.len().is_multiple_of(tags.len()) {
                    let rows = values.len() / tags.len();
                    let first_partial = &values[rows * tags.len()];
                    return Err(s.error(
                        first_partial.position,
                        format!(
                            "the loop that begins at line {} has {} columns but {} values, so \
                             its last row (starting here) is incomplete; every row needs one \
                             value per column (write `?` for an unknown value, `.` for one \
                             that does not apply)",
                            at.line,
                            tags.len(),
                            values.len()
                        ),
                    ));
                }
                let target = if in_save.is_some() { &mut frame } else { b };
                for (t, p) in &tags {
                    check_new_tag(&s, target, t, *p)?;
                }
                let width = tags.len();
                let mut rows = Vec::with_capacity(values.len() / width);
                let mut it = values.into_iter();
                loop {
                    let row: Vec<Value> = it.by_ref().take(width).collect();
                    if row.is_empty() {
                        break;
                    }
                    rows.push(row);
                }
                target.loops.push(Loop {
                    position: at,
                    tags,
                    rows,
                });
            }
        }
    }
    if let Some(p) = in_save {
        return Err(s.error(
            p,
            "the save frame opened here is never closed; expected `save_` at its end".into(),
        ));
    }
    if let Some(b) = block.take() {
        doc.blocks.push(b);
    }
    if doc.blocks.is_empty() {
        return Err(Error::Syntax {
            path: path.to_path_buf(),
            position: Position { line: 1, column: 1 },
            message: "no data block found; a CIF holds one or more blocks that begin with \
                      `data_NAME`"
                .into(),
        });
    }
    Ok(doc)
}

fn check_new_tag(s: &Scanner, b: &Block, tag: &str, at: Position) -> Result<()> {
    let key = normalise(tag);
    let earlier = b
        .items
        .iter()
        .find(|i| normalise(&i.tag) == key)
        .map(|i| i.position)
        .or_else(|| {
            b.loops.iter().find_map(|l| {
                l.tags
                    .iter()
                    .find(|(t, _)| normalise(t) == key)
                    .map(|(_, p)| *p)
            })
        });
    match earlier {
        Some(p) => Err(s.error(
            at,
            format!(
                "the tag {tag} is given twice in block '{}' (first at line {}); a tag may \
                 appear once per block",
                b.name, p.line
            ),
        )),
        None => Ok(()),
    }
}

fn short(text: &str) -> String {
    let t: String = text.chars().take(40).collect();
    if t.len() < text.len() {
        format!("{t}…")
    } else {
        t
    }
}

fn found_instead(t: &Option<Token>) -> String {
    match t {
        None => ", found the end of the file".into(),
        Some(Token::Tag(u, p)) => format!(", found the tag {u} at line {}", p.line),
        Some(Token::Loop(p)) => format!(", found `loop_` at line {}", p.line),
        Some(Token::Data(n, p)) => format!(", found the block data_{n} at line {}", p.line),
        Some(_) => String::new(),
    }
}

#[derive(Debug)]
enum Token {
    Data(String, Position),
    Loop(Position),
    SaveStart(Position),
    SaveEnd(Position),
    Global(Position),
    Stop(Position),
    Tag(String, Position),
    Value(Value),
}

struct Scanner<'p> {
    chars: Vec<char>,
    i: usize,
    line: u64,
    column: u64,
    cif2: bool,
    path: &'p Path,
}

fn is_break(c: char) -> bool {
    c == '\n' || c == '\r'
}

impl Scanner<'_> {
    fn error(&self, at: Position, message: String) -> Error {
        Error::Syntax {
            path: self.path.to_path_buf(),
            position: at,
            message,
        }
    }

    fn here(&self) -> Position {
        Position {
            line: self.line,
            column: self.column,
        }
    }

    fn peek(&self, k: usize) -> Option<char> {
        self.chars.get(self.i + k).copied()
    }

    /// Move past one character (a CR LF pair counts as one line break).
    fn bump(&mut self) -> Option<char> {
        let c = self.peek(0)?;
        self.i += 1;
        if c == '\r' && self.peek(0) == Some('\n') {
            self.i += 1;
        }
        if is_break(c) {
            self.line += 1;
            self.column = 1;
        } else {
            self.column += 1;
        }
        Some(if c == '\r' { '\n' } else { c })
    }

    fn skip_blank(&mut self) {
        while let Some(c) = self.peek(0) {
            if c.is_whitespace() {
                self.bump();
            } else if c == '#' {
                while let Some(c) = self.peek(0) {
                    if is_break(c) {
                        break;
                    }
                    self.bump();
                }
            } else {
                break;
            }
        }
    }

    fn next(&mut self) -> Result<Option<Token>> {
        self.skip_blank();
        let Some(c) = self.peek(0) else {
            return Ok(None);
        };
        let at = self.here();
        if c == ';' && self.column == 1 {
            return self.text_field(at).map(Some);
        }
        if c == '\'' || c == '"' {
            let text = self.quoted(at, c)?;
            return Ok(Some(Token::Value(Value {
                text,
                kind: Kind::Quoted,
                position: at,
            })));
        }
        if c == '[' || c == '{' {
            return self.compound(at).map(|v| Some(Token::Value(v)));
        }
        let word = self.word(false);
        let lower = word.to_ascii_lowercase();
        Ok(Some(if lower.starts_with("data_") {
            Token::Data(word[5..].to_string(), at)
        } else if lower == "loop_" {
            Token::Loop(at)
        } else if lower == "save_" {
            Token::SaveEnd(at)
        } else if lower.starts_with("save_") {
            Token::SaveStart(at)
        } else if lower == "global_" {
            Token::Global(at)
        } else if lower == "stop_" {
            Token::Stop(at)
        } else if word.starts_with('_') {
            Token::Tag(word, at)
        } else {
            let kind = match word.as_str() {
                "." => Kind::Inapplicable,
                "?" => Kind::Unknown,
                _ => Kind::Plain,
            };
            if word.starts_with('$') {
                return Err(self.error(
                    at,
                    format!(
                        "'{}' begins with $, which CIF keeps for frame references; put the \
                         value in quotes if it is text",
                        short(&word)
                    ),
                ));
            }
            Token::Value(Value {
                text: word,
                kind,
                position: at,
            })
        }))
    }

    /// A run of non-blank characters; inside a CIF 2.0 list or table it also stops at
    /// brackets and braces.
    fn word(&mut self, nested: bool) -> String {
        let mut w = String::new();
        while let Some(c) = self.peek(0) {
            if c.is_whitespace() || (nested && matches!(c, ']' | '}' | '[' | '{')) {
                break;
            }
            w.push(c);
            self.bump();
        }
        w
    }

    fn text_field(&mut self, at: Position) -> Result<Token> {
        self.bump(); // the opening ';'
        let mut text = String::new();
        loop {
            match self.peek(0) {
                None => {
                    return Err(self.error(
                        at,
                        "the text field opened by ';' at the start of this line is never \
                         closed; expected a line that begins with ';' after it"
                            .into(),
                    ));
                }
                Some(c) if is_break(c) => {
                    self.bump();
                    if self.peek(0) == Some(';') {
                        self.bump();
                        break;
                    }
                    text.push('\n');
                }
                Some(c) => {
                    text.push(c);
                    self.bump();
                }
            }
        }
        Ok(Token::Value(Value {
            text,
            kind: Kind::Text,
            position: at,
        }))
    }

    fn quoted(&mut self, at: Position, q: char) -> Result<String> {
        if self.cif2 && self.peek(1) == Some(q) && self.peek(2) == Some(q) {
            for _ in 0..3 {
                self.bump();
            }
            let mut text = String::new();
            loop {
                match self.peek(0) {
                    None => {
                        return Err(self.error(
                            at,
                            format!(
                                "the string opened by {q}{q}{q} here is never closed; expected \
                                 {q}{q}{q} at its end"
                            ),
                        ));
                    }
                    Some(c) if c == q && self.peek(1) == Some(q) && self.peek(2) == Some(q) => {
                        for _ in 0..3 {
                            self.bump();
                        }
                        return Ok(text);
                    }
                    Some(c) => {
                        text.push(if c == '\r' { '\n' } else { c });
                        self.bump();
                    }
                }
            }
        }
        self.bump();
        let mut text = String::new();
        loop {
            match self.peek(0) {
                None => {
                    return Err(self.error(
                        at,
                        format!(
                            "the string opened by {q} here is not closed before the end of the \
                             file; expected a closing {q}"
                        ),
                    ));
                }
                Some(c) if is_break(c) => {
                    return Err(self.error(
                        at,
                        format!(
                            "the string opened by {q} here is not closed on its line; expected \
                             a closing {q} before the line ends (use a text field between \
                             lines that begin with ';' for text over several lines)"
                        ),
                    ));
                }
                Some(c) if c == q => {
                    // CIF 1.1: a quote ends the string only when a blank or the end
                    // follows; CIF 2.0: always.
                    let next = self.peek(1);
                    if self.cif2 || next.is_none_or(char::is_whitespace) {
                        self.bump();
                        return Ok(text);
                    }
                    text.push(c);
                    self.bump();
                }
                Some(c) => {
                    text.push(c);
                    self.bump();
                }
            }
        }
    }

    /// A CIF 2.0 list `[…]` or table `{…}`, read to its closing bracket.
    fn compound(&mut self, at: Position) -> Result<Value> {
        let open = self.bump().unwrap_or('[');
        let close = if open == '[' { ']' } else { '}' };
        let mut items = Vec::new();
        loop {
            self.skip_blank();
            let here = self.here();
            match self.peek(0) {
                None => {
                    return Err(self.error(
                        at,
                        format!("the {open} opened here is never closed; expected {close}"),
                    ));
                }
                Some(c) if c == close => {
                    self.bump();
                    break;
                }
                Some(c) if c == ']' || c == '}' => {
                    return Err(self.error(
                        here,
                        format!(
                            "found {c} where {close} was expected to close the {open} at line {}",
                            at.line
                        ),
                    ));
                }
                Some(c) if c == '\'' || c == '"' => {
                    let text = self.quoted(here, c)?;
                    items.push(Value {
                        text,
                        kind: Kind::Quoted,
                        position: here,
                    });
                    if close == '}' && self.peek(0) == Some(':') {
                        self.bump();
                    }
                }
                Some('[' | '{') => items.push(self.compound(here)?),
                Some(_) => {
                    let w = self.word(true);
                    items.push(Value {
                        text: w,
                        kind: Kind::Plain,
                        position: here,
                    });
                }
            }
        }
        Ok(Value {
            text: String::new(),
            kind: if open == '[' {
                Kind::List(items)
            } else {
                Kind::Table
            },
            position: at,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Document> {
        parse(text, Path::new("t.cif"))
    }

    fn message(text: &str) -> String {
        read(text).unwrap_err().to_string()
    }

    #[test]
    fn blocks_tags_loops_and_every_kind_of_value() {
        let text = "# a comment\ndata_one\n_cell_length_a 4.497(2)\n_name 'it''s here'\n\
                    _other \"x y\"\n_text\n;line one\nline two\n;\n_unknown ?\n_na .\n\
                    loop_\n_atom_site_label\n_atom_site_fract_x\nO1 0.1\nH1 0.2 # end\n\
                    data_two\n_x 1\n";
        let d = read(text).unwrap();
        assert_eq!(d.blocks.len(), 2);
        let b = &d.blocks[0];
        assert_eq!(b.name, "one");
        assert_eq!(b.single(&["_cell_length_a"]).unwrap().text, "4.497(2)");
        // CIF 1.1: a quote followed by a letter does not close the string.
        assert_eq!(b.single(&["_name"]).unwrap().text, "it''s here");
        assert_eq!(b.single(&["_other"]).unwrap().text, "x y");
        let t = b.single(&["_text"]).unwrap();
        assert_eq!(
            (t.text.as_str(), &t.kind),
            ("line one\nline two", &Kind::Text)
        );
        assert_eq!(b.single(&["_unknown"]).unwrap().kind, Kind::Unknown);
        assert_eq!(b.single(&["_na"]).unwrap().kind, Kind::Inapplicable);
        let labels: Vec<_> = b
            .column(&["_atom_site.label"])
            .unwrap()
            .iter()
            .map(|v| v.text.clone())
            .collect();
        assert_eq!(labels, ["O1", "H1"]);
        let h1 = b.column(&["_atom_site_fract_x"]).unwrap()[1];
        assert_eq!((h1.position.line, h1.position.column), (16, 4));
        assert!(b.has_atoms() && !d.blocks[1].has_atoms());
    }

    #[test]
    fn cif2_strings_lists_and_line_endings() {
        let text = "#\\#CIF_2.0\r\ndata_a\r\n_t '''one\r\ntwo'''\r\n_l [1 [2 3] 'x']\r\n\
                    _m {'k':1 'j':[2]}\r\n_q 'it'\r\n_after 5\r\n";
        let d = read(text).unwrap();
        assert!(d.cif2);
        let b = &d.blocks[0];
        assert_eq!(b.single(&["_t"]).unwrap().text, "one\ntwo");
        match &b.single(&["_l"]).unwrap().kind {
            Kind::List(v) => assert_eq!(v.len(), 3),
            k => panic!("{k:?}"),
        }
        assert_eq!(b.single(&["_q"]).unwrap().text, "it");
        // CIF 2.0: the first matching quote closes the string, so 's' is left over.
        assert!(read("#\\#CIF_2.0\ndata_a\n_q 'it's'\n").is_err());
        let after = b.single(&["_after"]).unwrap();
        assert_eq!(after.position.line, 8);
    }

    #[test]
    fn save_frames_are_skipped() {
        let d = read("data_d\nsave_frame\n_x 1\nsave_\n_y 2\n").unwrap();
        assert!(d.blocks[0].single(&["_x"]).is_none());
        assert_eq!(d.blocks[0].single(&["_y"]).unwrap().text, "2");
    }

    #[test]
    fn errors_name_the_place_and_what_was_expected() {
        let m = message("data_a\n_x 1\n_y\n_z 2\n");
        assert!(m.starts_with("t.cif:3:1: the tag _y has no value"), "{m}");
        let m = message("data_a\nloop_\n_a\n_b\n1 2\n3\n");
        assert!(m.starts_with("t.cif:6:1: "), "{m}");
        assert!(m.contains("2 columns but 3 values"), "{m}");
        let m = message("data_a\n_x 'open\n");
        assert!(
            m.starts_with("t.cif:2:4: the string opened by ' here is not closed"),
            "{m}"
        );
        let m = message("data_a\n_t\n;never closed\n");
        assert!(m.starts_with("t.cif:3:1: the text field"), "{m}");
        let m = message("_x 1\n");
        assert!(m.contains("before any data block"), "{m}");
        let m = message("data_a\n_x 1\n_X 2\n");
        assert!(m.starts_with("t.cif:3:1: the tag _X is given twice"), "{m}");
        let m = message("data_a\n_x 1\ndata_A\n");
        assert!(m.contains("second data block named 'A'"), "{m}");
        let m = message("data_a\n_x 1 2\n");
        assert!(
            m.starts_with("t.cif:2:6: found the value '2' without a tag"),
            "{m}"
        );
        let m = message("# nothing\n");
        assert!(m.contains("no data block"), "{m}");
        let m = message("data_a\nloop_\n_a\n");
        assert!(m.contains("no values"), "{m}");
        let m = message("data_a\n_l [1 2\n");
        assert!(m.contains("never closed"), "{m}");
    }
}
