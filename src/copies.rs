//! Tuned and sized copies of a chip file: the user's text with only the changed values
//! rewritten at the places the parser found them ([`crate::format::edit`], which also checks
//! that nothing else changed), then read back as a chip before anything is written.

use crate::analysis::design::{SizeDim, SizeResult, TuneResult};
use crate::chip::Chip;
use crate::error::Error;
use crate::format;
use crate::format::edit::{self, Edit, NewValue};
use crate::network::Port;
use crate::{output, section, units};
use std::path::Path;

fn edit(parts: [&str; 3], value: NewValue) -> Edit {
    Edit {
        path: parts.iter().map(|p| p.to_string()).collect(),
        value,
    }
}

/// `x` with `digits` significant digits, without exponent for the magnitudes a chip uses
/// (plain decimal text, trailing zeros removed).
pub fn sig(x: f64, digits: usize) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{}", x + 0.0);
    }
    let mag = x.abs().log10().floor() as i32;
    let decimals = (digits as i32 - 1 - mag).max(0) as usize;
    let text = format!("{x:.decimals$}");
    let text = if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    };
    if text == "-0" {
        "0".into()
    } else {
        text
    }
}

/// `x` [m] rounded to the fabrication `step` [m] when one is given, else to `digits`
/// significant digits, in the unit `unit` (`scale` = unit per metre).
fn length_text(x: f64, step: Option<f64>, digits: usize, scale: f64, unit: &str) -> String {
    match step {
        Some(step) if step > 0.0 => {
            // Decimals enough to show the step itself exactly in this unit.
            let s = step * scale;
            let decimals = (0..=9)
                .find(|&d| ((s * 10f64.powi(d)).round() - s * 10f64.powi(d)).abs() < 1e-9)
                .unwrap_or(9) as usize;
            let v = (x / step).round() * step * scale;
            format!("{v:.decimals$} {unit}")
        }
        _ => format!("{} {unit}", sig(x * scale, digits)),
    }
}

/// Settings smaller than this fraction of the largest setting of their kind (pressure or
/// flow) are rounding residue of the solve and are written as 0.
const RESIDUE: f64 = 1e-12;

/// `x`, or 0 when it is below [`RESIDUE`] of `largest`.
fn without_residue(x: f64, largest: f64) -> f64 {
    if x.abs() < RESIDUE * largest {
        0.0
    } else {
        x
    }
}

/// The edits that write tuned drive settings with `digits` significant digits.
pub fn tuned_edits(chip: &Chip, r: &TuneResult, digits: usize) -> Vec<Edit> {
    let is_flow = |s: &crate::analysis::design::Setting| {
        matches!(chip.network.nodes[s.node].port, Port::Flow(_))
    };
    let largest = |flow: bool| {
        (r.settings.iter())
            .filter(|s| is_flow(s) == flow)
            .fold(0.0f64, |m, s| m.max(s.after.abs()))
    };
    let (largest_flow, largest_pressure) = (largest(true), largest(false));
    r.settings
        .iter()
        .map(|s| {
            let node = &chip.network.nodes[s.node];
            let (key, value) = match node.port {
                Port::Flow(_) => (
                    "flow",
                    format!(
                        "{} uL/min",
                        sig(
                            units::display::ul_per_min(without_residue(s.after, largest_flow)),
                            digits
                        )
                    ),
                ),
                _ => (
                    "pressure",
                    format!(
                        "{} mbar",
                        sig(
                            units::display::mbar(without_residue(s.after, largest_pressure)),
                            digits
                        )
                    ),
                ),
            };
            edit(["nodes", &node.name, key], NewValue::Scalar(value))
        })
        .collect()
}

/// Fields of a sizable section in the chip-file syntax, in µm; the sized width (diameter,
/// trapezoid top, d-shape mask width) is rounded to `step` when one is given. A trapezoid's
/// bottom is written as top minus the sidewall offset sizing kept, so the rounded top keeps
/// the sidewall angle.
fn section_fields(
    shape: &section::Shape,
    step: Option<f64>,
    digits: usize,
) -> Option<Vec<(String, String)>> {
    let um = |l: &units::Length| length_text(l.si(), None, digits, 1e6, "um");
    let width = |l: &units::Length| length_text(l.si(), step, digits, 1e6, "um");
    let mut fields = vec![("shape".to_string(), shape.kind().to_string())];
    let dims: Vec<(&str, String)> = match shape {
        section::Shape::Circle { diameter } => vec![("diameter", width(diameter))],
        section::Shape::Rectangle {
            width: w,
            height: h,
        }
        | section::Shape::Ellipse {
            width: w,
            height: h,
        } => {
            vec![("width", width(w)), ("height", um(h))]
        }
        section::Shape::Plates { gap, width: w } => {
            vec![("gap", um(gap)), ("width", width(w))]
        }
        section::Shape::Trapezoid { top, bottom, depth } => {
            let offset = top.si() - bottom.si();
            let top_text = width(top);
            let top_written = match step {
                Some(s) if s > 0.0 => (top.si() / s).round() * s,
                _ => top.si(),
            };
            let bottom_len = units::Length::from_si(top_written - offset);
            vec![
                ("top", top_text),
                ("bottom", um(&bottom_len)),
                ("depth", um(depth)),
            ]
        }
        section::Shape::DShape { mask_width, depth } => {
            vec![("mask_width", width(mask_width)), ("depth", um(depth))]
        }
        section::Shape::RoundedRectangle {
            width: w,
            height: h,
            corner_radius,
        } => vec![
            ("width", width(w)),
            ("height", um(h)),
            ("corner_radius", um(corner_radius)),
        ],
        _ => return None,
    };
    fields.extend(dims.into_iter().map(|(k, v)| (k.to_string(), v)));
    Some(fields)
}

/// The edits that write sized lengths and sections (to their fabrication steps, else with
/// `digits` significant digits).
pub fn sized_edits(chip: &Chip, r: &SizeResult, digits: usize) -> Result<Vec<Edit>, Error> {
    r.sizes
        .iter()
        .map(|s| {
            let ch = &r.network.channels[s.var.channel];
            if s.var.dim == SizeDim::Width && is_profile(&r.network, ch) {
                return profile_edit(chip, &ch.name, s.after, s.var.step, digits);
            }
            let value = match s.var.dim {
                SizeDim::Length => {
                    NewValue::Scalar(length_text(s.after, s.var.step, digits, 1e3, "mm"))
                }
                SizeDim::Width => NewValue::Mapping(
                    section_fields(&r.network.sections[ch.section].shape, s.var.step, digits)
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

fn is_profile(net: &crate::network::Network, ch: &crate::network::Channel) -> bool {
    matches!(
        net.sections[ch.section].shape,
        section::Shape::Profile { .. }
    )
}

/// Refuse, before any sizing work, a sized profile width whose copy could not be written (a
/// profile section not inline in its channel with a `width_scale:` key): the same edit
/// `sized_edits` will make, tried on the chip as read.
pub fn check_profile_edits(chip: &Chip) -> Result<(), Error> {
    for v in &chip.design.sizes {
        let ch = &chip.network.channels[v.channel];
        if v.dim == SizeDim::Width && is_profile(&chip.network, ch) {
            profile_edit(chip, &ch.name, 1.0, None, 6)?;
        }
    }
    Ok(())
}

/// The edit that sizes a measured profile's span to `width` [m] (rounded to `step`, else
/// written to `digits` significant digits): its inline section's `width_scale`, set to
/// width / raw span. The raw span (the positions as the file or points give them) is read
/// from the chip with `width_scale: 1`.
fn profile_edit(
    chip: &Chip,
    channel: &str,
    width: f64,
    step: Option<f64>,
    digits: usize,
) -> Result<Edit, Error> {
    let path = ["channels", channel, "section", "width_scale"];
    let (_, unit) = edited_chip(chip, &[Edit::scalar(&path, "1")]).map_err(|_| Error::Write {
        path: chip.source.origin.clone().into(),
        reason: format!(
            "cannot rewrite the profile of channel '{channel}' in a copy: write its section \
                 inline in the channel with a 'width_scale:' key (e.g. width_scale: 1); the sized \
                 copy changes that key"
        ),
    })?;
    let raw = unit
        .network
        .channel_id(channel)
        .and_then(|c| unit.network.section_of(c).shape.profile_span())
        .filter(|s| *s > 0.0)
        .ok_or_else(|| rewrite_failed(chip, "a profile"))?;
    let (width, digits) = match step {
        Some(st) if st > 0.0 => ((width / st).round() * st, 15),
        _ => (width, digits),
    };
    Ok(Edit::scalar(&path, sig(width / raw, digits)))
}

fn rewrite_failed(chip: &Chip, what: &str) -> Error {
    Error::Write {
        path: chip.source.origin.clone().into(),
        reason: format!(
            "cannot rewrite {what} in a copy of the chip: only sections with a sizable width \
             (circle, rectangle, ellipse, plates, trapezoid, d-shape, rounded-rectangle, profile) \
             can be written back"
        ),
    }
}

/// The chip text with the edits applied, parsed back into a chip (profiles named by the chip
/// are read beside the original file). Fails, with nothing written, when the copy would not
/// load.
pub fn edited_chip(chip: &Chip, edits: &[Edit]) -> Result<(String, Chip), Error> {
    let text = edit::apply_edits(&chip.source.text, chip.source.syntax, edits).map_err(|e| {
        Error::Write {
            path: chip.source.origin.clone().into(),
            reason: format!("cannot write the changed values into a copy: {e}"),
        }
    })?;
    let base = Path::new(&chip.source.origin)
        .parent()
        .unwrap_or(Path::new("."))
        .to_path_buf();
    let read = move |name: &str| crate::read_named_file(&base.join(name));
    let origin = format!("edited copy of {}", chip.source.origin);
    let copy = format::parse_chip_with(&text, &origin, chip.source.syntax, &read).map_err(|e| {
        Error::Write {
            path: chip.source.origin.clone().into(),
            reason: format!("the edited copy would not load ({e}); nothing was written"),
        }
    })?;
    Ok((text, copy))
}

/// Write an edited chip text (from [`edited_chip`]) to the new file `out`.
pub fn write_copy(text: &str, out: &Path, protected: &[&Path]) -> Result<(), Error> {
    output::write_new_file(out, text.as_bytes(), protected)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rounding_residue_is_written_as_zero() {
        // A solve leaves ~1e-16 of the largest setting where the exact answer is 0; written
        // as is it would read "0.0000000000000001 mbar".
        assert_eq!(without_residue(1e-16, 5_000.0), 0.0);
        assert_eq!(without_residue(-3e-13, 1.0), 0.0);
        assert_eq!(without_residue(2e-6, 5_000.0), 2e-6);
        assert_eq!(
            sig(units::display::mbar(without_residue(1e-16, 500.0)), 6),
            "0"
        );
    }
}
