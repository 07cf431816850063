//! Change a few values in a copy of a chip file's text, keeping everything else as written.
//!
//! `tune` and `size` hand back a copy of the user's chip with new port settings or channel
//! dimensions. [`apply_edits`] makes that copy: each [`Edit`] names a key path through the
//! document's mappings (`nodes.medium_a.pressure`) and the value to put there; the text
//! outside the replaced values — comments, key order, quoting of other values, blank lines,
//! line endings — stays byte for byte as it was.
//!
//! **Why positions come from the parser.** A text search for `pressure:` finds the words
//! wherever they are: in a `description:`, in a comment, under another node. Here the text is
//! read by the YAML event parser (JSON is read the same way: it is valid YAML), the current
//! key path is kept while walking the events, and a value is replaced only where the parser
//! says the value of that exact key path sits. Block and flow style, quoted and plain values,
//! comments after values, CRLF line endings and non-ASCII text all take the same path.
//!
//! Some paths are refused with an error that names the path and says what to do: a path that
//! is not written in the file; a path written twice (duplicate keys); a value that is an alias
//! (`*x`) or carries an anchor (`&x`), or a path that goes through an alias, a shared anchor or
//! a merge key (`<<`), since a change there would reach other entries too; a value that is a
//! list or a mapping where a single value is to be written; a block scalar (`|`, `>`), a tagged
//! value or an empty one.
//!
//! **Verification.** Before the edited text is returned, the original and the edited text
//! are both read into generic data trees (with the same readers as chip files) and compared:
//! the trees must be equal except at the edited paths, and each edited path must hold exactly
//! the new value. Any other difference, or an edited text that does not read, is an error —
//! text that would change anything else is never returned.
//!
//! New single values are strings in the data (`41.583 mbar`): in YAML they are written plain
//! when that reads back as the same string (and in the quoting style of the value they
//! replace otherwise), quoted when plain text would read as a number, a boolean, null or
//! something else; in JSON they are always JSON strings. New mappings are written in flow
//! style (`{shape: rectangle, width: 100 um}`, or `{"shape": "rectangle", ...}` in JSON).
//!
//! ```
//! use rillnet::format::edit::{apply_edits, Edit, NewValue};
//! use rillnet::format::Syntax;
//!
//! let chip = "\
//! description: |
//!   medium_a: pressure: 20 mbar   (notes, not data)
//! nodes:
//!   medium_a:
//!     pressure: 20 mbar   # set by hand
//! channels:
//!   c1: {from: medium_a, to: out, section: feed, length: 12 mm}
//! ";
//! let edits = [
//!     Edit::scalar(&["nodes", "medium_a", "pressure"], "41.583 mbar"),
//!     Edit {
//!         path: vec!["channels".into(), "c1".into(), "section".into()],
//!         value: NewValue::Mapping(vec![
//!             ("shape".into(), "rectangle".into()),
//!             ("width".into(), "100 um".into()),
//!         ]),
//!     },
//! ];
//! let copy = apply_edits(chip, Syntax::Yaml, &edits).unwrap();
//! assert_eq!(copy, "\
//! description: |
//!   medium_a: pressure: 20 mbar   (notes, not data)
//! nodes:
//!   medium_a:
//!     pressure: 41.583 mbar   # set by hand
//! channels:
//!   c1: {from: medium_a, to: out, section: {shape: rectangle, width: 100 um}, length: 12 mm}
//! ");
//!
//! // A path that is not in the file is refused, never guessed.
//! let err = apply_edits(chip, Syntax::Yaml, &[Edit::scalar(&["nodes", "medium_b", "flow"], "1 uL/min")])
//!     .unwrap_err();
//! assert!(err.to_string().starts_with("nodes.medium_b.flow: not found"));
//! ```

use super::Syntax;
use serde_json::Value;
use std::collections::{HashMap, HashSet};
use std::fmt::Write as _;
use yaml_rust2::parser::{Event, MarkedEventReceiver, Parser, Tag};
use yaml_rust2::scanner::{Marker, TScalarStyle};

/// One value to change: a key path into the document's mappings, e.g.
/// `["nodes", "medium_a", "pressure"]`, and the new value.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Edit {
    pub path: Vec<String>,
    pub value: NewValue,
}

/// The value written at an edited path.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum NewValue {
    /// A single value, a string in the data: `41.583 mbar`.
    Scalar(String),
    /// A mapping of single values, in this order: `{shape: rectangle, width: 100 um}`.
    Mapping(Vec<(String, String)>),
}

impl Edit {
    /// Put the single value `value` at `path`.
    pub fn scalar(path: &[&str], value: impl Into<String>) -> Edit {
        Edit {
            path: path.iter().map(|k| k.to_string()).collect(),
            value: NewValue::Scalar(value.into()),
        }
    }

    /// Put a mapping of single values at `path`.
    pub fn mapping(path: &[&str], fields: &[(&str, &str)]) -> Edit {
        Edit {
            path: path.iter().map(|k| k.to_string()).collect(),
            value: NewValue::Mapping(
                fields
                    .iter()
                    .map(|(k, v)| (k.to_string(), v.to_string()))
                    .collect(),
            ),
        }
    }

    fn dotted(&self) -> String {
        dotted(&self.path)
    }
}

/// Why a copy could not be made. Nothing is returned in these cases.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum EditError {
    /// An edit with an empty key path.
    #[error("an edit needs a key path: an empty one would replace the whole file")]
    EmptyPath,
    /// Two edits of the same value, or one inside the other.
    #[error("{path}: asked to change twice, or inside another changed value ({other}); give each value once")]
    Overlap { path: String, other: String },
    /// A new mapping with a repeated key.
    #[error("{path}: the new mapping names '{key}' twice; give each key once")]
    RepeatedKey { path: String, key: String },
    /// The event parser cannot read the text (line and column 1-based).
    #[error("the file cannot be read at line {line}, column {column}: {message}; fix the syntax there and run again")]
    Unreadable {
        line: usize,
        column: usize,
        message: String,
    },
    /// More than one YAML document in the text.
    #[error("the file holds a second YAML document (from line {line}); a chip file is one document: split it into two files")]
    SeveralDocuments { line: usize },
    /// The path is not written in the file; `nearest` says how far it was found.
    #[error("{path}: not found in the file{nearest}; only values written in the file can be changed in a copy: add the key and run again")]
    NotFound { path: String, nearest: String },
    /// The path is missing where a merge key (`<<`) might supply it.
    #[error("{path}: not written out in {mapping}, which takes entries from a merge key (<<) at line {line}; write '{key}' out in {mapping} and run again")]
    FromMerge {
        path: String,
        mapping: String,
        key: String,
        line: usize,
    },
    /// The path (or a prefix of it) is written more than once: duplicate keys.
    #[error("{path}: written more than once ({lines}); keep one and run again")]
    Duplicate { path: String, lines: String },
    /// The value, or a mapping on the path (`via`), is an alias.
    #[error("{path}: {via} at line {line} is an alias (*{name}) of a value written elsewhere, and changing it would change every use; write the value out in place of the alias and run again")]
    Alias {
        path: String,
        via: String,
        name: String,
        line: usize,
    },
    /// The value carries an anchor, or a mapping on the path carries one that is aliased.
    #[error("{path}: {via} at line {line} carries an anchor (&) that aliases elsewhere share, so a change here would change them too; write the value out where it is aliased, drop the anchor, and run again")]
    Anchor {
        path: String,
        via: String,
        line: usize,
    },
    /// A list (or a mapping) where a single value (or a mapping) is to be written.
    #[error("{path}: holds {found} at line {line}, where {expected} was to be written; check the key path (or rewrite that entry) and run again")]
    WrongKind {
        path: String,
        found: &'static str,
        expected: &'static str,
        line: usize,
    },
    /// A block scalar, a tagged value or an empty value.
    #[error("{path}: {what} at line {line}; {fix} and run again")]
    Unsupported {
        path: String,
        what: &'static str,
        fix: &'static str,
        line: usize,
    },
    /// The parser's position of the value does not match the text there.
    #[error("{path}: the value at line {line} could not be placed in the text; write it on one line in the form 'key: value' and run again")]
    Unplaced { path: String, line: usize },
    /// The edited text does not read back as the original with only the intended changes.
    #[error("no edited copy was made: {message}")]
    Verification { message: String },
}

/// Replace the value at each edit's key path in `text` (a chip file in `syntax`) and return the
/// new text, verified by reading both texts back (see the [module docs](self)).
pub fn apply_edits(text: &str, syntax: Syntax, edits: &[Edit]) -> Result<String, EditError> {
    check_edits(edits)?;
    if edits.is_empty() {
        return Ok(text.to_string());
    }
    // A byte-order mark is not part of the first key; the readers of chip files skip it too.
    let bom = if text.starts_with('\u{feff}') { 3 } else { 0 };
    let body = &text[bom..];
    let places = locate_all(body, edits)?;

    let mut replacements: Vec<(usize, usize, String, usize)> = Vec::with_capacity(edits.len());
    for (i, (edit, place)) in edits.iter().zip(&places).enumerate() {
        let (start, end, new) = render(body, edit, place, syntax);
        replacements.push((bom + start, bom + end, new, i));
    }
    replacements.sort_by_key(|r| r.0);
    for pair in replacements.windows(2) {
        if pair[0].1 > pair[1].0 {
            return Err(EditError::Overlap {
                path: edits[pair[1].3].dotted(),
                other: edits[pair[0].3].dotted(),
            });
        }
    }
    let mut out = text.to_string();
    // From the end backwards, so earlier offsets stay valid.
    for (start, end, new, _) in replacements.iter().rev() {
        out.replace_range(*start..*end, new);
    }
    verify(text, &out, syntax, edits)?;
    Ok(out)
}

fn dotted(path: &[String]) -> String {
    path.join(".")
}

/// Refuse edits that cannot be applied whatever the file says.
fn check_edits(edits: &[Edit]) -> Result<(), EditError> {
    for (i, e) in edits.iter().enumerate() {
        if e.path.is_empty() {
            return Err(EditError::EmptyPath);
        }
        if let NewValue::Mapping(fields) = &e.value {
            for (j, (k, _)) in fields.iter().enumerate() {
                if fields[..j].iter().any(|(other, _)| other == k) {
                    return Err(EditError::RepeatedKey {
                        path: e.dotted(),
                        key: k.clone(),
                    });
                }
            }
        }
        for other in &edits[..i] {
            let n = e.path.len().min(other.path.len());
            if e.path[..n] == other.path[..n] {
                return Err(EditError::Overlap {
                    path: e.dotted(),
                    other: other.dotted(),
                });
            }
        }
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------
// Finding values: a walk over the parser's events.
// ---------------------------------------------------------------------------------------

/// What the replaced value was.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Old {
    Scalar { style: TScalarStyle, flow: bool },
    FlowMapping,
    BlockMapping,
}

/// Where an edit's value sits in the text (byte offsets into the walked text).
#[derive(Clone, Copy, Debug)]
struct Place {
    start: usize,
    end: usize,
    old: Old,
}

/// What a value on an edit's path is.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
enum Kind {
    #[default]
    Mapping,
    List,
    Single,
    Alias,
}

/// Per edit: what the walk saw of its path.
#[derive(Default)]
struct Track {
    /// For each prefix length k (1..=path length): lines where a value at `path[..k]` starts.
    prefix_lines: Vec<Vec<usize>>,
    place: Option<Place>,
    problem: Option<EditError>,
    /// Deepest prefix length reached, the line and the kind of that value.
    deepest: (usize, usize, Kind),
    /// A merge key in the mapping at `path[..depth]`: (depth, line).
    merges: Vec<(usize, usize)>,
    /// Anchored mappings on the path: (anchor id, depth, line).
    anchors: Vec<(usize, usize, usize)>,
}

struct Frame {
    map: bool,
    flow: bool,
    /// A mapping waits for a key (else for the value of `key`).
    expect_key: bool,
    /// The current key, when it is a single value.
    key: Option<String>,
    key_line: usize,
    /// Byte offset where the content starts: the `{`/`[` of a flow collection, the first
    /// key of a block mapping.
    start: Option<usize>,
    /// The edit whose value this mapping is.
    target: Option<usize>,
    /// Edits whose path goes on through this mapping, by their next key (so that a large
    /// file with many edits is walked in linear time).
    routes: HashMap<String, Vec<usize>>,
}

struct Walker<'a> {
    text: &'a str,
    edits: &'a [Edit],
    /// Byte offset of each line's start. Line breaks are `\n`, `\r\n` and a lone `\r`, as
    /// the parser counts them.
    line_starts: Vec<usize>,
    /// Last converted position: (line, column, byte offset), to walk long lines once.
    cursor: (usize, usize, usize),
    stack: Vec<Frame>,
    /// Byte offset just past the last value seen, when known.
    last_end: Option<usize>,
    tracks: Vec<Track>,
    /// Anchor ids some alias refers to.
    aliased: HashSet<usize>,
    documents: usize,
    fault: Option<EditError>,
}

/// Find every edit's value in `text`, or say why one cannot be changed.
fn locate_all(text: &str, edits: &[Edit]) -> Result<Vec<Place>, EditError> {
    let mut w = Walker {
        text,
        edits,
        line_starts: line_starts(text),
        cursor: (0, 0, 0),
        stack: Vec::new(),
        last_end: None,
        tracks: edits
            .iter()
            .map(|e| Track {
                prefix_lines: vec![Vec::new(); e.path.len() + 1],
                ..Track::default()
            })
            .collect(),
        aliased: HashSet::new(),
        documents: 0,
        fault: None,
    };
    let mut parser = Parser::new_from_str(text);
    if let Err(e) = parser.load(&mut w, true) {
        return Err(EditError::Unreadable {
            line: e.marker().line(),
            column: e.marker().col() + 1,
            message: e.info().to_string(),
        });
    }
    if let Some(fault) = w.fault {
        return Err(fault);
    }
    let Walker {
        tracks, aliased, ..
    } = w;
    edits
        .iter()
        .zip(tracks)
        .map(|(edit, t)| conclude(edit, t, &aliased))
        .collect()
}

/// The outcome for one edit once the whole file was walked.
fn conclude(edit: &Edit, t: Track, aliased: &HashSet<usize>) -> Result<Place, EditError> {
    let path = &edit.path;
    for k in 1..=path.len() {
        let lines = &t.prefix_lines[k];
        if lines.len() > 1 {
            let mut distinct = lines.clone();
            distinct.dedup();
            let lines = match distinct.as_slice() {
                [one] => format!("on line {one}"),
                many => format!(
                    "lines {}",
                    many.iter()
                        .map(|l| l.to_string())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            };
            return Err(EditError::Duplicate {
                path: dotted(&path[..k]),
                lines,
            });
        }
    }
    if let Some(p) = t.problem {
        return Err(p);
    }
    if let Some(&(_, depth, line)) = t.anchors.iter().find(|a| aliased.contains(&a.0)) {
        return Err(EditError::Anchor {
            path: edit.dotted(),
            via: describe(&path[..depth]),
            line,
        });
    }
    if let Some(place) = t.place {
        return Ok(place);
    }
    let (depth, line, kind) = t.deepest;
    if let Some(&(_, mline)) = t.merges.iter().find(|m| m.0 == depth) {
        return Err(EditError::FromMerge {
            path: edit.dotted(),
            mapping: describe(&path[..depth]),
            key: path[depth].clone(),
            line: mline,
        });
    }
    let holds = match kind {
        Kind::Mapping | Kind::Alias => format!("without '{}'", path[depth]),
        Kind::List => "but holds a list".to_string(),
        Kind::Single => "but holds a single value".to_string(),
    };
    let nearest = if depth == 0 {
        String::new()
    } else {
        format!(
            " ({} is there, at line {line}, {holds})",
            dotted(&path[..depth])
        )
    };
    Err(EditError::NotFound {
        path: edit.dotted(),
        nearest,
    })
}

/// Name a prefix of a key path in a message.
fn describe(prefix: &[String]) -> String {
    if prefix.is_empty() {
        "the document".to_string()
    } else {
        dotted(prefix)
    }
}

fn line_starts(text: &str) -> Vec<usize> {
    let bytes = text.as_bytes();
    let mut starts = vec![0];
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b'\n' => starts.push(i + 1),
            b'\r' if bytes.get(i + 1) == Some(&b'\n') => {
                starts.push(i + 2);
                i += 1;
            }
            b'\r' => starts.push(i + 1),
            _ => {}
        }
        i += 1;
    }
    starts
}

/// The node an event starts, seen from its parent.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Role {
    Key,
    Value,
    Item,
}

impl Walker<'_> {
    /// Byte offset of a marker. The marker's line and column are used, not its index: the
    /// index counts characters, except inside long block-scalar lines, where it counts bytes.
    fn offset(&mut self, m: Marker) -> Option<usize> {
        let line = m.line();
        let col = m.col();
        if line == self.line_starts.len() + 1 && col == 0 {
            // The end of a text without a final line break is marked on the line after.
            return Some(self.text.len());
        }
        let line_start = *self.line_starts.get(line.checked_sub(1)?)?;
        let (mut at, mut c) = (line_start, 0);
        if self.cursor.0 == line && self.cursor.1 <= col {
            at = self.cursor.2;
            c = self.cursor.1;
        }
        let rest = self.text.get(at..)?;
        let mut chars = rest.char_indices();
        while c < col {
            let (_, ch) = chars.next()?;
            if ch == '\n' || ch == '\r' {
                return None;
            }
            c += 1;
        }
        let off = at + chars.next().map_or(rest.len(), |(i, _)| i);
        self.cursor = (line, col, off);
        Some(off)
    }

    fn role(&self) -> Option<Role> {
        self.stack.last().map(|f| match (f.map, f.expect_key) {
            (true, true) => Role::Key,
            (true, false) => Role::Value,
            (false, _) => Role::Item,
        })
    }

    fn in_flow(&self) -> bool {
        self.stack.last().is_some_and(|f| f.flow)
    }

    /// The line to report for the value about to start: its key's line.
    fn value_line(&self, m: Marker) -> usize {
        match self.stack.last() {
            Some(f) if f.map && !f.expect_key => f.key_line,
            _ => m.line(),
        }
    }

    /// Edits whose path the value about to start lies on, with the prefix length.
    fn on_path(&self) -> Vec<(usize, usize)> {
        let depth = self.stack.len();
        match self.stack.last() {
            None => (0..self.edits.len()).map(|i| (i, 0)).collect(),
            Some(f) if f.map && !f.expect_key => f
                .key
                .as_ref()
                .and_then(|k| f.routes.get(k))
                .map_or_else(Vec::new, |v| v.iter().map(|&i| (i, depth)).collect()),
            Some(_) => Vec::new(),
        }
    }

    /// Bookkeeping shared by every node start; returns the edits it lies on. `off` is where
    /// the node starts, when its marker says so (not for block collections).
    fn start_node(&mut self, off: Option<usize>, line: usize, kind: Kind) -> Vec<(usize, usize)> {
        if let (Some(f), Some(off)) = (self.stack.last_mut(), off) {
            if f.start.is_none() {
                f.start = Some(off);
            }
        }
        let hits = self.on_path();
        for &(i, d) in &hits {
            let t = &mut self.tracks[i];
            t.prefix_lines[d].push(line);
            if d >= t.deepest.0 {
                t.deepest = (d, line, kind);
            }
        }
        hits
    }

    /// A node ended: a mapping's key becomes its current key, a value makes it wait for the
    /// next key.
    fn end_node(&mut self, key: Option<String>, line: usize) {
        if let Some(f) = self.stack.last_mut() {
            if f.map {
                if f.expect_key {
                    f.key = key;
                    f.key_line = line;
                }
                f.expect_key = !f.expect_key;
            }
        }
    }

    fn problem(&mut self, i: usize, p: EditError) {
        let t = &mut self.tracks[i];
        if t.problem.is_none() {
            t.problem = Some(p);
        }
    }

    fn scalar(
        &mut self,
        value: String,
        style: TScalarStyle,
        anchor: usize,
        tag: Option<Tag>,
        m: Marker,
    ) {
        let Some(off) = self.offset(m) else {
            self.lost(m);
            return;
        };
        let role = self.role();
        let line = self.value_line(m);
        let hits = self.start_node(Some(off), line, Kind::Single);
        let end = match style {
            TScalarStyle::Literal | TScalarStyle::Folded => None,
            _ if value.is_empty() && style == TScalarStyle::Plain => None,
            _ => scalar_end(self.text, off, &value, style),
        };
        self.last_end = end;
        let flow = self.in_flow();
        for (i, d) in hits {
            let path = self.edits[i].dotted();
            if d < self.edits[i].path.len() {
                continue;
            }
            let unsupported = |what, fix| EditError::Unsupported {
                path: path.clone(),
                what,
                fix,
                line,
            };
            let p = if anchor != 0 {
                Some(EditError::Anchor {
                    path: path.clone(),
                    via: "the value".to_string(),
                    line,
                })
            } else if tag.is_some() {
                Some(unsupported(
                    "the value carries a tag (!...)",
                    "remove the tag",
                ))
            } else if matches!(style, TScalarStyle::Literal | TScalarStyle::Folded) {
                Some(unsupported(
                    "the value is a block scalar (| or >)",
                    "write the value on the line of its key",
                ))
            } else if value.is_empty() && style == TScalarStyle::Plain {
                Some(unsupported(
                    "no value is written",
                    "write a value after the key",
                ))
            } else {
                None
            };
            match (p, end) {
                (Some(p), _) => self.problem(i, p),
                (None, None) => self.problem(i, EditError::Unplaced { path, line }),
                (None, Some(end)) => {
                    self.tracks[i].place = Some(Place {
                        start: off,
                        end,
                        old: Old::Scalar { style, flow },
                    });
                }
            }
        }
        if role == Some(Role::Key) && value == "<<" && style == TScalarStyle::Plain {
            let depth = self.stack.len() - 1;
            if let Some(f) = self.stack.last() {
                for &i in f.routes.values().flatten() {
                    self.tracks[i].merges.push((depth, m.line()));
                }
            }
        }
        let key = (role == Some(Role::Key)).then_some(value);
        self.end_node(key, m.line());
    }

    fn alias(&mut self, id: usize, m: Marker) {
        let Some(off) = self.offset(m) else {
            self.lost(m);
            return;
        };
        self.aliased.insert(id);
        let line = self.value_line(m);
        let hits = self.start_node(Some(off), line, Kind::Alias);
        let name: String = self.text[off..]
            .chars()
            .skip(1)
            .take_while(|c| !c.is_whitespace() && !matches!(c, ',' | '[' | ']' | '{' | '}'))
            .collect();
        self.last_end = Some(off + 1 + name.len());
        for (i, d) in hits {
            let e = &self.edits[i];
            let p = EditError::Alias {
                path: e.dotted(),
                via: if d == e.path.len() {
                    "the value".to_string()
                } else {
                    describe(&e.path[..d])
                },
                name: name.clone(),
                line,
            };
            self.problem(i, p);
        }
        self.end_node(None, m.line());
    }

    fn collection_start(&mut self, map: bool, anchor: usize, tag: Option<Tag>, m: Marker) {
        let Some(off) = self.offset(m) else {
            self.lost(m);
            return;
        };
        let open = if map { b'{' } else { b'[' };
        let flow = self.in_flow() || self.text.as_bytes().get(off) == Some(&open);
        let line = self.value_line(m);
        // A block collection's marker is not where it starts: its first entry says.
        let kind = if map { Kind::Mapping } else { Kind::List };
        let hits = self.start_node(flow.then_some(off), line, kind);
        let mut target = None;
        let mut routes: HashMap<String, Vec<usize>> = HashMap::new();
        for (i, d) in hits {
            let e = &self.edits[i];
            let path = e.dotted();
            if d < e.path.len() {
                if map {
                    routes.entry(e.path[d].clone()).or_default().push(i);
                    if anchor != 0 {
                        self.tracks[i].anchors.push((anchor, d, line));
                    }
                }
                continue;
            }
            let kind_problem = |found| EditError::WrongKind {
                path: path.clone(),
                found,
                expected: match e.value {
                    NewValue::Scalar(_) => "a single value",
                    NewValue::Mapping(_) => "a mapping",
                },
                line,
            };
            let p = if !map {
                Some(kind_problem("a list"))
            } else if matches!(e.value, NewValue::Scalar(_)) {
                Some(kind_problem("a mapping"))
            } else if anchor != 0 {
                Some(EditError::Anchor {
                    path: path.clone(),
                    via: "the value".to_string(),
                    line,
                })
            } else if tag.is_some() {
                Some(EditError::Unsupported {
                    path: path.clone(),
                    what: "the value carries a tag (!...)",
                    fix: "remove the tag",
                    line,
                })
            } else {
                None
            };
            match p {
                Some(p) => self.problem(i, p),
                None => target = Some(i),
            }
        }
        self.stack.push(Frame {
            map,
            flow,
            expect_key: true,
            key: None,
            key_line: m.line(),
            start: flow.then_some(off),
            target,
            routes,
        });
    }

    fn collection_end(&mut self, m: Marker) {
        let Some(frame) = self.stack.pop() else {
            return;
        };
        // A block collection ends where its last value does (its end event is marked at the
        // next token, after any comments); a flow collection at its closing bracket.
        if frame.flow {
            let Some(off) = self.offset(m) else {
                self.lost(m);
                return;
            };
            let close = if frame.map { b'}' } else { b']' };
            self.last_end = closing(self.text, off, close).map(|p| p + 1);
        }
        if let Some(i) = frame.target {
            let line = self.value_line(m);
            let path = self.edits[i].dotted();
            match (frame.start, self.last_end) {
                (Some(start), Some(end)) if start <= end => {
                    self.tracks[i].place = Some(Place {
                        start,
                        end,
                        old: if frame.flow {
                            Old::FlowMapping
                        } else {
                            Old::BlockMapping
                        },
                    });
                }
                _ => self.problem(i, EditError::Unplaced { path, line }),
            }
        }
        self.end_node(None, m.line());
    }

    /// A marker that does not fall in the text: stop trusting the walk.
    fn lost(&mut self, m: Marker) {
        if self.fault.is_none() {
            self.fault = Some(EditError::Unreadable {
                line: m.line(),
                column: m.col() + 1,
                message: "the parser reported a position outside the text".to_string(),
            });
        }
    }
}

impl MarkedEventReceiver for Walker<'_> {
    fn on_event(&mut self, ev: Event, m: Marker) {
        if self.fault.is_some() {
            return;
        }
        match ev {
            Event::DocumentStart => {
                self.documents += 1;
                if self.documents > 1 {
                    self.fault = Some(EditError::SeveralDocuments { line: m.line() });
                }
            }
            Event::Scalar(value, style, anchor, tag) => self.scalar(value, style, anchor, tag, m),
            Event::Alias(id) => self.alias(id, m),
            Event::SequenceStart(anchor, tag) => self.collection_start(false, anchor, tag, m),
            Event::MappingStart(anchor, tag) => self.collection_start(true, anchor, tag, m),
            Event::SequenceEnd | Event::MappingEnd => self.collection_end(m),
            Event::Nothing | Event::StreamStart | Event::StreamEnd | Event::DocumentEnd => {}
        }
    }
}

/// Byte offset just past a scalar starting at `start`, checked against its parsed `value`.
fn scalar_end(text: &str, start: usize, value: &str, style: TScalarStyle) -> Option<usize> {
    let bytes = text.as_bytes();
    match style {
        TScalarStyle::SingleQuoted => {
            if bytes.get(start) != Some(&b'\'') {
                return None;
            }
            let mut i = start + 1;
            while i < bytes.len() {
                if bytes[i] == b'\'' {
                    if bytes.get(i + 1) == Some(&b'\'') {
                        i += 2;
                        continue;
                    }
                    return Some(i + 1);
                }
                i += 1;
            }
            None
        }
        TScalarStyle::DoubleQuoted => {
            if bytes.get(start) != Some(&b'"') {
                return None;
            }
            let mut i = start + 1;
            while i < bytes.len() {
                match bytes[i] {
                    b'\\' => i += 2,
                    b'"' => return Some(i + 1),
                    _ => i += 1,
                }
            }
            None
        }
        TScalarStyle::Plain => plain_end(text, start, value),
        _ => None,
    }
}

/// Match a plain scalar's value against the text, following YAML line folding: a line
/// break (with the blanks around it) reads as one space, n + 1 breaks as n newlines.
fn plain_end(text: &str, start: usize, value: &str) -> Option<usize> {
    let bytes = text.as_bytes();
    let mut t = start;
    let mut v = value.chars().peekable();
    while let Some(&want) = v.peek() {
        // A fold: blanks up to a line break.
        let mut j = t;
        while j < bytes.len() && (bytes[j] == b' ' || bytes[j] == b'\t') {
            j += 1;
        }
        if j < bytes.len() && (bytes[j] == b'\n' || bytes[j] == b'\r') {
            let mut breaks = 0;
            while j < bytes.len() && matches!(bytes[j], b' ' | b'\t' | b'\n' | b'\r') {
                if bytes[j] == b'\n' || (bytes[j] == b'\r' && bytes.get(j + 1) != Some(&b'\n')) {
                    breaks += 1;
                }
                j += 1;
            }
            if breaks == 1 {
                if v.next() != Some(' ') {
                    return None;
                }
            } else {
                for _ in 1..breaks {
                    if v.next() != Some('\n') {
                        return None;
                    }
                }
            }
            t = j;
            continue;
        }
        let got = text.get(t..)?.chars().next()?;
        if got != want {
            return None;
        }
        v.next();
        t += got.len_utf8();
    }
    Some(t)
}

/// The closing bracket of a flow collection whose end event is marked at `from` (the bracket
/// itself, or a trailing comma before it).
fn closing(text: &str, from: usize, close: u8) -> Option<usize> {
    let bytes = text.as_bytes();
    let mut i = from;
    while i < bytes.len() {
        match bytes[i] {
            c if c == close => return Some(i),
            b',' | b' ' | b'\t' | b'\n' | b'\r' => i += 1,
            b'#' => {
                while i < bytes.len() && bytes[i] != b'\n' && bytes[i] != b'\r' {
                    i += 1;
                }
            }
            _ => return None,
        }
    }
    None
}

// ---------------------------------------------------------------------------------------
// Writing new values.
// ---------------------------------------------------------------------------------------

/// The byte range to replace and its new text.
fn render(text: &str, edit: &Edit, place: &Place, syntax: Syntax) -> (usize, usize, String) {
    let (mut start, end) = (place.start, place.end);
    let new = match (&edit.value, syntax) {
        (NewValue::Scalar(s), Syntax::Json) => double_quoted(s),
        (NewValue::Scalar(s), Syntax::Yaml) => match place.old {
            Old::Scalar {
                style: TScalarStyle::DoubleQuoted,
                ..
            } => double_quoted(s),
            Old::Scalar {
                style: TScalarStyle::SingleQuoted,
                ..
            } if !s.chars().any(needs_escape) => {
                format!("'{}'", s.replace('\'', "''"))
            }
            Old::Scalar { flow, .. } => yaml_scalar(s, flow),
            _ => yaml_scalar(s, true),
        },
        (NewValue::Mapping(fields), syntax) => {
            let pairs: Vec<String> = fields
                .iter()
                .map(|(k, v)| match syntax {
                    Syntax::Json => format!("{}: {}", double_quoted(k), double_quoted(v)),
                    Syntax::Yaml => format!("{}: {}", yaml_scalar(k, true), yaml_scalar(v, true)),
                })
                .collect();
            let mut m = format!("{{{}}}", pairs.join(", "));
            if place.old == Old::BlockMapping {
                // `key:` + line break + indent before the block: put the flow mapping on the
                // key's line.
                if let Some(colon) = colon_before_block(text, start) {
                    start = colon + 1;
                    m.insert(0, ' ');
                }
            }
            m
        }
    };
    (start, end, new)
}

/// The `:` of the key of a block mapping starting at `start`, if only blanks and one line
/// break lie between (no comment).
fn colon_before_block(text: &str, start: usize) -> Option<usize> {
    let bytes = text.as_bytes();
    let mut i = start;
    while i > 0 && matches!(bytes[i - 1], b' ' | b'\t') {
        i -= 1;
    }
    if i > 0 && bytes[i - 1] == b'\n' {
        i -= 1;
    } else {
        return None;
    }
    if i > 0 && bytes[i - 1] == b'\r' {
        i -= 1;
    }
    while i > 0 && matches!(bytes[i - 1], b' ' | b'\t') {
        i -= 1;
    }
    (i > 0 && bytes[i - 1] == b':').then(|| i - 1)
}

/// A string as a YAML scalar: plain when that reads back as the same string, else quoted.
fn yaml_scalar(s: &str, flow: bool) -> String {
    if plain_ok(s, flow) {
        s.to_string()
    } else {
        double_quoted(s)
    }
}

fn plain_ok(s: &str, flow: bool) -> bool {
    let mut chars = s.chars();
    let Some(first) = chars.next() else {
        return false;
    };
    let second = chars.next();
    if s.starts_with([' ', '\t']) || s.ends_with([' ', '\t']) {
        return false;
    }
    if s.chars().any(|c| {
        needs_escape(c)
            || matches!(c, '#' | ':')
            // An anchor mark is text inside a plain scalar, but quoting it keeps the copy
            // clear of the alias guard that checks every written copy ('*' and '!' stay
            // plain inside a value: units such as `mPa*s` use them).
            || c == '&'
            || (flow && matches!(c, ',' | '[' | ']' | '{' | '}'))
    }) {
        return false;
    }
    let start_ok = match first {
        // `-5 mbar` is plain text; other indicator starts are quoted, as readers differ.
        '-' => second.is_some_and(|c| c.is_ascii_digit() || c == '.'),
        '?' => false,
        ',' | '[' | ']' | '{' | '}' | '&' | '*' | '!' | '|' | '>' | '\'' | '"' | '%' | '@'
        | '`' => false,
        _ => true,
    };
    // Plain text that reads as a number, a boolean or null must be quoted to stay a string.
    start_ok && matches!(serde_yaml::from_str::<Value>(s), Ok(Value::String(ref back)) if back == s)
}

/// Characters written as escapes: controls (which include line breaks), the YAML 1.1 line
/// separators some readers fold, and the byte-order mark.
fn needs_escape(c: char) -> bool {
    c.is_control() || matches!(c, '\u{2028}' | '\u{2029}' | '\u{feff}')
}

/// A double-quoted string, valid in both YAML and JSON.
fn double_quoted(s: &str) -> String {
    let mut out = String::with_capacity(s.len() + 2);
    out.push('"');
    for c in s.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            c if needs_escape(c) => {
                let _ = write!(out, "\\u{:04x}", c as u32);
            }
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

// ---------------------------------------------------------------------------------------
// Verification: read both texts back and compare.
// ---------------------------------------------------------------------------------------

fn read_tree(text: &str, syntax: Syntax) -> Result<Value, String> {
    match syntax {
        Syntax::Json => serde_json::from_str(text).map_err(|e| e.to_string()),
        Syntax::Yaml => {
            if super::yaml_guard::check(text).is_err() {
                return Err("its aliases expand to too many values to read safely".to_string());
            }
            serde_yaml::from_str(text).map_err(|e| e.to_string())
        }
    }
}

fn intended(value: &NewValue) -> Value {
    match value {
        NewValue::Scalar(s) => Value::String(s.clone()),
        NewValue::Mapping(fields) => Value::Object(
            fields
                .iter()
                .map(|(k, v)| (k.clone(), Value::String(v.clone())))
                .collect(),
        ),
    }
}

fn verify(original: &str, edited: &str, syntax: Syntax, edits: &[Edit]) -> Result<(), EditError> {
    let fail = |message: String| EditError::Verification { message };
    let mut expected = read_tree(original, syntax)
        .map_err(|e| fail(format!("the file does not read as data ({e})")))?;
    for e in edits {
        let mut node = &mut expected;
        for key in &e.path {
            node = node.get_mut(key.as_str()).ok_or_else(|| {
                fail(format!(
                    "{} is not where the file reader finds it; write it out plainly (no duplicate or merged keys) and run again",
                    e.dotted()
                ))
            })?;
        }
        *node = intended(&e.value);
    }
    let got = read_tree(edited, syntax).map_err(|e| {
        fail(format!(
            "the edited text would not read ({e}); this is a fault in the copy editor, please report it with the chip file"
        ))
    })?;
    if got != expected {
        let mut at = Vec::new();
        first_difference(&expected, &got, &mut at);
        let place = if at.is_empty() {
            "the document".to_string()
        } else {
            at.join(".")
        };
        return Err(fail(format!(
            "reading it back, {place} differs from what was intended; this is a fault in the copy editor, please report it with the chip file"
        )));
    }
    Ok(())
}

/// The key path of the first place where `a` and `b` differ.
fn first_difference(a: &Value, b: &Value, at: &mut Vec<String>) {
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            for (k, va) in x {
                match y.get(k) {
                    Some(vb) if va == vb => {}
                    Some(vb) => {
                        at.push(k.clone());
                        first_difference(va, vb, at);
                        return;
                    }
                    None => {
                        at.push(k.clone());
                        return;
                    }
                }
            }
            if let Some(k) = y.keys().find(|k| !x.contains_key(*k)) {
                at.push(k.clone());
            }
        }
        (Value::Array(x), Value::Array(y)) if x.len() == y.len() => {
            if let Some((i, (va, vb))) = x.iter().zip(y).enumerate().find(|(_, (p, q))| p != q) {
                at.push(i.to_string());
                first_difference(va, vb, at);
            }
        }
        _ => {}
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn edit(text: &str, path: &[&str], value: &str) -> Result<String, EditError> {
        apply_edits(text, Syntax::Yaml, &[Edit::scalar(path, value)])
    }

    #[test]
    fn plain_value_in_block_style() {
        let text = "nodes:\n  a:\n    pressure: 20 mbar\n  b: {}\n";
        let out = edit(text, &["nodes", "a", "pressure"], "41.583 mbar").unwrap();
        assert_eq!(out, "nodes:\n  a:\n    pressure: 41.583 mbar\n  b: {}\n");
    }

    #[test]
    fn marker_index_is_not_used_after_a_long_non_ascii_block_scalar() {
        // The parser's index counts bytes on long block-scalar lines; lines and columns hold.
        let text = "description: |\n  Heated to 37 °C in µm channels, ÄÖÜ ääää ööö üüü ßßß µµµµ °°°° more\nnodes:\n  a: {pressure: 20 mbar}\n";
        let out = edit(text, &["nodes", "a", "pressure"], "5 mbar").unwrap();
        assert_eq!(out, text.replace("20 mbar", "5 mbar"));
    }

    #[test]
    fn plain_scalars_over_several_lines_are_replaced_whole() {
        let text = "a:\n  b: one\n    two\n\n    three   # note\n  c: x\n";
        let out = edit(text, &["a", "b"], "new").unwrap();
        assert_eq!(out, "a:\n  b: new   # note\n  c: x\n");
    }

    #[test]
    fn quoting_follows_the_old_value_and_the_new_text() {
        let text = "a: {p: \"1 mbar\", q: '2 mbar', r: 3 mbar, s: x}\n";
        let out = apply_edits(
            text,
            Syntax::Yaml,
            &[
                Edit::scalar(&["a", "p"], "it's \"9\""),
                Edit::scalar(&["a", "q"], "it's"),
                Edit::scalar(&["a", "r"], "7"),
                Edit::scalar(&["a", "s"], "x, y"),
            ],
        )
        .unwrap();
        assert_eq!(
            out,
            "a: {p: \"it's \\\"9\\\"\", q: 'it''s', r: \"7\", s: \"x, y\"}\n"
        );
    }

    #[test]
    fn plain_is_used_only_when_it_reads_back_as_the_same_string() {
        for s in ["20 mbar", "-3.5 mbar", "37 °C", "1.0 mPa*s", "kg/m^3"] {
            assert!(plain_ok(s, true), "{s}");
        }
        for s in [
            "", " x", "x ", "true", "null", "~", "12", "1e3", "a: b", "#x", "*x", "- x", "a,b",
            "[x]", "0x1f", "a\nb",
        ] {
            assert!(!plain_ok(s, true), "{s:?}");
        }
        assert!(plain_ok("a,b", false));
    }

    #[test]
    fn empty_and_block_scalar_values_are_refused() {
        let e = edit("a:\n  b:\n  c: 1\n", &["a", "b"], "x").unwrap_err();
        assert!(matches!(e, EditError::Unsupported { line: 2, .. }), "{e}");
        let e = edit("a:\n  b: |\n    text\n", &["a", "b"], "x").unwrap_err();
        assert!(e.to_string().contains("block scalar"), "{e}");
        let e = edit("a:\n  b: !!str 5\n", &["a", "b"], "x").unwrap_err();
        assert!(e.to_string().contains("tag"), "{e}");
    }

    #[test]
    fn nested_or_repeated_edits_are_refused() {
        let text = "a: {b: {c: 1}}\n";
        let e = apply_edits(
            text,
            Syntax::Yaml,
            &[
                Edit::mapping(&["a", "b"], &[("c", "2")]),
                Edit::scalar(&["a", "b", "c"], "3"),
            ],
        )
        .unwrap_err();
        assert!(matches!(e, EditError::Overlap { .. }), "{e}");
        let e = apply_edits(
            text,
            Syntax::Yaml,
            &[Edit::mapping(&["a", "b"], &[("c", "2"), ("c", "3")])],
        )
        .unwrap_err();
        assert!(matches!(e, EditError::RepeatedKey { .. }), "{e}");
        assert_eq!(
            apply_edits(text, Syntax::Yaml, &[Edit::scalar(&[], "x")]).unwrap_err(),
            EditError::EmptyPath
        );
    }

    #[test]
    fn byte_order_mark_is_kept_and_skipped() {
        let text = "\u{feff}nodes:\r\n  a: {pressure: 1 mbar}\r\n";
        let out = edit(text, &["nodes", "a", "pressure"], "2 mbar").unwrap();
        assert_eq!(out, "\u{feff}nodes:\r\n  a: {pressure: 2 mbar}\r\n");
    }

    #[test]
    fn second_document_is_refused() {
        let e = edit("a: 1\n---\na: 2\n", &["a"], "3").unwrap_err();
        assert_eq!(e, EditError::SeveralDocuments { line: 2 });
    }

    #[test]
    fn flow_mapping_with_trailing_comma_and_comments() {
        let text = "c:\n  s: {shape: circle,  # round\n      diameter: 1 mm,}  # end\n  l: 2 mm\n";
        let out = apply_edits(
            text,
            Syntax::Yaml,
            &[Edit::mapping(&["c", "s"], &[("shape", "rectangle")])],
        )
        .unwrap();
        assert_eq!(out, "c:\n  s: {shape: rectangle}  # end\n  l: 2 mm\n");
    }

    #[test]
    fn block_mapping_after_a_comment_stays_on_its_line() {
        let text = "c:\n  s:   # inline\n    shape: circle\n    diameter: 1 mm\n  l: 2 mm\n";
        let out = apply_edits(
            text,
            Syntax::Yaml,
            &[Edit::mapping(&["c", "s"], &[("shape", "plates")])],
        )
        .unwrap();
        assert_eq!(out, "c:\n  s:   # inline\n    {shape: plates}\n  l: 2 mm\n");
    }

    #[test]
    fn alias_elsewhere_of_an_anchored_parent_is_refused() {
        let text = "nodes:\n  a: &base {pressure: 1 mbar}\n  b: *base\n";
        let e = edit(text, &["nodes", "a", "pressure"], "2 mbar").unwrap_err();
        assert!(matches!(e, EditError::Anchor { line: 2, .. }), "{e}");
        // An anchor nobody aliases shares nothing.
        let text = "nodes:\n  a: &base {pressure: 1 mbar}\n";
        assert!(edit(text, &["nodes", "a", "pressure"], "2 mbar").is_ok());
        let text = "nodes:\n  a: *base\n";
        assert!(matches!(
            edit(text, &["nodes", "a", "pressure"], "2 mbar"),
            Err(EditError::Unreadable { .. })
        ));
    }

    #[test]
    fn path_through_an_alias_is_refused() {
        let text = "base: &b {pressure: 1 mbar}\nnodes:\n  a: *b\n";
        let e = edit(text, &["nodes", "a", "pressure"], "2 mbar").unwrap_err();
        assert!(
            matches!(&e, EditError::Alias { via, name, line: 3, .. } if via == "nodes.a" && name == "b"),
            "{e}"
        );
    }

    #[test]
    fn many_edits_in_a_large_file() {
        let mut text = String::from("channels:\n");
        for i in 0..5000 {
            let _ = writeln!(
                text,
                "  c{i}: {{from: a, to: b, section: feed, length: {i} mm}}"
            );
        }
        let edits: Vec<Edit> = (0..5000)
            .step_by(7)
            .map(|i| {
                Edit::scalar(
                    &["channels", &format!("c{i}"), "length"],
                    format!("{i}.5 mm"),
                )
            })
            .collect();
        let out = apply_edits(&text, Syntax::Yaml, &edits).unwrap();
        let tree: Value = serde_yaml::from_str(&out).unwrap();
        for i in 0..5000 {
            let want = if i % 7 == 0 {
                format!("{i}.5 mm")
            } else {
                format!("{i} mm")
            };
            assert_eq!(tree["channels"][format!("c{i}")]["length"], want.as_str());
        }
    }

    #[test]
    fn difference_is_located() {
        let a: Value = serde_json::json!({"x": {"y": [1, {"z": 2}]}});
        let b: Value = serde_json::json!({"x": {"y": [1, {"z": 3}]}});
        let mut at = Vec::new();
        first_difference(&a, &b, &mut at);
        assert_eq!(at, ["x", "y", "1", "z"]);
    }
}
