//! Tuned and sized copies of a chip file: the user's text with only the changed values
//! rewritten, checked to load before it is written.

use crate::analysis::design::{SizeDim, SizeResult, TuneResult};
use crate::chip::Chip;
use crate::error::Error;
use crate::format::{self, Syntax};
use crate::network::Port;
use crate::{output, section, units};
use std::path::Path;

/// One value to change in the chip text: a key path and its new value.
#[derive(Clone, Debug, PartialEq)]
pub struct ValueEdit {
    pub path: [String; 3],
    pub value: NewValue,
}

/// The new value of an edit.
#[derive(Clone, Debug, PartialEq)]
pub enum NewValue {
    /// A quantity such as `41.583 mbar`.
    Scalar(String),
    /// A mapping such as a section `{shape: rectangle, width: 100 um, height: 50 um}`.
    Mapping(Vec<(String, String)>),
}

fn edit(parts: [&str; 3], value: NewValue) -> ValueEdit {
    ValueEdit {
        path: parts.map(str::to_string),
        value,
    }
}

/// The edits that write tuned drive settings.
pub fn tuned_edits(chip: &Chip, r: &TuneResult) -> Vec<ValueEdit> {
    r.settings
        .iter()
        .map(|s| {
            let node = &chip.network.nodes[s.node.0];
            let (key, value) = match node.port {
                Port::Flow(_) => (
                    "flow",
                    format!("{} uL/min", units::display::ul_per_min(s.after)),
                ),
                _ => (
                    "pressure",
                    format!("{} mbar", units::display::mbar(s.after)),
                ),
            };
            edit(["nodes", &node.name, key], NewValue::Scalar(value))
        })
        .collect()
}

/// Fields of a closed-form section in the chip-file syntax, in µm.
fn section_fields(shape: &section::Shape) -> Option<Vec<(String, String)>> {
    let um = |l: &units::Length| format!("{} um", l.si() * 1e6);
    let mut fields = vec![("shape".to_string(), shape.kind().to_string())];
    let dims: Vec<(&str, String)> = match shape {
        section::Shape::Circle { diameter } => vec![("diameter", um(diameter))],
        section::Shape::Rectangle { width, height } | section::Shape::Ellipse { width, height } => {
            vec![("width", um(width)), ("height", um(height))]
        }
        section::Shape::Plates { gap, width } => vec![("gap", um(gap)), ("width", um(width))],
        _ => return None,
    };
    fields.extend(dims.into_iter().map(|(k, v)| (k.to_string(), v)));
    Some(fields)
}

/// The edits that write sized lengths and sections.
pub fn sized_edits(chip: &Chip, r: &SizeResult) -> Result<Vec<ValueEdit>, Error> {
    r.sizes
        .iter()
        .map(|s| {
            let ch = &r.network.channels[s.var.channel.0];
            let value = match s.var.dim {
                SizeDim::Length => NewValue::Scalar(format!("{} mm", s.after * 1e3)),
                SizeDim::Width => NewValue::Mapping(
                    section_fields(&r.network.sections[ch.section.0].shape)
                        .ok_or_else(|| rewrite_failed(chip, "a section"))?,
                ),
            };
            let key = match s.var.dim {
                SizeDim::Length => "length",
                SizeDim::Width => "section",
            };
            Ok(edit(["channels", &ch.name, key], value))
        })
        .collect()
}

fn rewrite_failed(chip: &Chip, what: &str) -> Error {
    Error::Write {
        path: chip.source.origin.clone().into(),
        reason: format!(
            "cannot rewrite {what} in a copy of the chip: write that entry in flow style \
             ({{key: value, ...}} on one line) so rillnet can change its value in place"
        ),
    }
}

/// The value as text in the file's syntax.
fn literal(syntax: Syntax, value: &NewValue) -> String {
    match (syntax, value) {
        (Syntax::Yaml, NewValue::Scalar(s)) => s.clone(),
        (Syntax::Json, NewValue::Scalar(s)) => format!("\"{s}\""),
        (Syntax::Yaml, NewValue::Mapping(m)) => format!(
            "{{{}}}",
            m.iter()
                .map(|(k, v)| format!("{k}: {v}"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        (Syntax::Json, NewValue::Mapping(m)) => format!(
            "{{{}}}",
            m.iter()
                .map(|(k, v)| format!("\"{k}\": \"{v}\""))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// The chip text with the edits applied.
fn edited_text(chip: &Chip, edits: &[ValueEdit]) -> Result<String, Error> {
    let mut text = chip.source.text.clone();
    for e in edits {
        let path: Vec<&str> = e.path.iter().map(String::as_str).collect();
        text = format::replace_value(&text, &path, &literal(chip.source.syntax, &e.value))
            .ok_or_else(|| rewrite_failed(chip, &e.path.join(".")))?;
    }
    Ok(text)
}

/// Write a copy of the chip to the new file `out` with the edits applied, keeping comments
/// and layout. The copy is parsed and validated first; a copy that would not load is never
/// written.
pub fn write_edited_copy(
    chip: &Chip,
    out: &Path,
    edits: &[ValueEdit],
    protected: &[&Path],
) -> Result<(), Error> {
    let text = edited_text(chip, edits)?;
    let origin = out.display().to_string();
    let base = Path::new(&chip.source.origin)
        .parent()
        .unwrap_or(Path::new("."))
        .to_path_buf();
    let read = move |name: &str| -> Result<String, String> {
        std::fs::read_to_string(base.join(name)).map_err(|e| e.to_string())
    };
    format::parse_chip_with(&text, &origin, chip.source.syntax, &read).map_err(|e| {
        Error::Write {
            path: out.to_path_buf(),
            reason: format!("the edited copy would not load ({e}); nothing was written"),
        }
    })?;
    output::write_new_file(out, text.as_bytes(), protected)
}
