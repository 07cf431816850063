//! Findings and model notes in words, and as JSON/CSV records.

use crate::analysis::limits::{ENTRANCE_LENGTHS, REYNOLDS_NOTE};
use crate::analysis::{Finding, FindingKind, Place, Severity};
use crate::chip::{Chip, ModelNote};
use crate::fluid::{FluidModelName, RangeParameter, RangeWarning};
use crate::section::{ProfileNote, MAX_MESH_POINTS, MIN_PROFILE_POINTS, UNEVEN_GAP_RATIO};
use crate::units::display;
use serde::Serialize;

/// The place of a finding by name: ("node" | "channel" | "section", name).
pub(crate) fn place_name(chip: &Chip, place: Place) -> (&'static str, &str) {
    match place {
        Place::Node(n) => ("node", chip.network.nodes[n].name.as_str()),
        Place::Channel(c) => ("channel", chip.network.channels[c].name.as_str()),
        Place::Section(s) => ("section", chip.network.sections[s].name.as_str()),
    }
}

fn mbar(p: f64) -> String {
    format!("{:.1} mbar", display::mbar(p))
}

/// One finding as a sentence.
pub fn finding_text(chip: &Chip, f: &Finding) -> String {
    let (kind, name) = place_name(chip, f.kind.place());
    let at = format!("{kind} '{name}'");
    match f.kind {
        FindingKind::ShearOverLimit { value, limit, .. } => format!(
            "{at}: maximum wall shear {value:.3} Pa exceeds the limit {limit:.3} Pa (margin {})",
            super::fmt_sig(limit / value, 3)
        ),
        FindingKind::PressureOverRating { value, limit, .. } => format!(
            "{at}: pressure {} exceeds the chip's rating {}",
            mbar(value),
            mbar(limit)
        ),
        FindingKind::PressureNearRating { value, limit, .. } => format!(
            "{at}: pressure {} is above {:.0} % of the chip's rating {}",
            mbar(value),
            crate::analysis::limits::RATING_NOTE_FRACTION * 100.0,
            mbar(limit)
        ),
        FindingKind::BelowVacuum { value, .. } => format!(
            "{at}: gauge pressure {} is below −1 atm, an absolute pressure below zero: the liquid \
             would cavitate or outgas long before; lower the suction or raise the outlet pressure",
            mbar(value)
        ),
        FindingKind::Inertia { value, .. } => format!(
            "{at}: Re = {value:.0} > {REYNOLDS_NOTE}; inertia at junctions and bends makes the \
             linear model optimistic"
        ),
        FindingKind::SectionNotConverged { value, limit, .. } => format!(
            "{at}: the numerical solution reached an error estimate of {value:.1e}, not the \
             requested {limit:.1e}, within the mesh budget; its resistance and shear are that \
             uncertain (a smoother outline or a looser section_tolerance converges)"
        ),
        FindingKind::SingularCorners {
            section,
            value,
            limit,
        } => {
            let sharpest = match chip.network.sections[section].figures.singular_corner {
                Some(p) => format!(
                    ", the sharpest at ({}, {}) um",
                    super::fmt_sig(p[0] * 1e6, 4),
                    super::fmt_sig(p[1] * 1e6, 4)
                ),
                None => String::new(),
            };
            let advice = if chip.network.sections[section].shape.kind() == "profile" {
                "On a measured wall these are kinks between samples: the robust maximum (the \
                 shear exceeded on 1 % of the wall, `rillnet section`) is the steadier figure"
                    .to_string()
            } else {
                format!(
                    "Real corners are rounded: to know the shear there, give the outline a \
                     fillet of the radius your process leaves (for a start, {} um)",
                    super::fmt_sig(limit * 1e6, 3)
                )
            };
            format!(
                "{at}: {value:.0} re-entrant corner(s){sharpest}: the wall shear at a sharp \
                 inside corner is unbounded, so the maximum given leaves out {} um around each. \
                 {advice}",
                super::fmt_sig(limit * 1e6, 3)
            )
        }
        FindingKind::ShortForEntrance { value, limit, .. } => format!(
            "{at}: length {:.0} um is under {ENTRANCE_LENGTHS} entrance lengths ({:.0} um each); \
             the flow there is not fully developed and its resistance and shear are underestimated",
            value * 1e6,
            limit / ENTRANCE_LENGTHS * 1e6
        ),
        FindingKind::NotMixed {
            junction,
            species,
            fourier: 0.0,
            ..
        } => format!(
            "{at}: the '{}' streams that meet at node '{}' split again there at once, before \
             they can mix: the well-mixed concentrations downstream are wrong — put a mixing \
             channel (a serpentine) between the junction and the split",
            chip.species.get(species).map_or("?", |s| s.name.as_str()),
            chip.network.nodes[junction].name,
        ),
        FindingKind::NotMixed {
            junction,
            species,
            fourier,
            value,
            limit,
            ..
        } => format!(
            "{at}: the '{}' streams that meet at node '{}' are only {:.0} % of the way to \
             uniform here (diffusion across the width, Fo = {}; mixed at {:.0} %), yet the flow \
             splits after it: the well-mixed concentrations downstream are wrong — lengthen the \
             channel (a serpentine) or narrow it before the split",
            chip.species.get(species).map_or("?", |s| s.name.as_str()),
            chip.network.nodes[junction].name,
            value * 100.0,
            super::fmt_sig(fourier, 3),
            limit * 100.0
        ),
    }
}

fn model_name(m: FluidModelName) -> &'static str {
    match m {
        FluidModelName::Water => "water (IAPWS R12-08)",
        FluidModelName::GlycerolWater => "glycerol–water (Cheng 2008)",
        FluidModelName::Einstein => "Einstein suspension",
        FluidModelName::KriegerDougherty => "Krieger–Dougherty suspension",
    }
}

/// A model-range note as a sentence.
pub fn note_text(w: &RangeWarning) -> String {
    match w.parameter {
        RangeParameter::Temperature => format!(
            "{} viscosity at {:.1} °C is outside the model's {:.0}–{:.0} °C range",
            model_name(w.model),
            w.value - 273.15,
            w.valid[0] - 273.15,
            w.valid[1] - 273.15
        ),
        RangeParameter::VolumeFraction if w.model == FluidModelName::Einstein => format!(
            "volume fraction {} is beyond the dilute range of Einstein's law (φ ≤ {}); \
             use model: krieger-dougherty",
            w.value, w.valid[1]
        ),
        RangeParameter::VolumeFraction => format!(
            "volume fraction {} is above {:.3}, within 10 % of maximum packing: the {} \
             viscosity diverges there and is unreliable",
            w.value,
            w.valid[1],
            model_name(w.model)
        ),
    }
}

/// A finding or note as a JSON record (SI values).
#[derive(Serialize)]
pub(crate) struct JsonFinding {
    /// "exceeded" (a limit is broken) or "note".
    pub severity: &'static str,
    /// Machine name of the kind, e.g. "shear_over_limit", "model_range".
    pub kind: &'static str,
    /// "node", "channel", "section" or "fluid".
    pub place: &'static str,
    /// Name of the node or channel (the model name for a fluid note).
    pub name: String,
    /// The value compared (SI: Pa, m, K, or a plain number).
    pub value: f64,
    /// The limit it was compared with (SI); for a model range, the bound crossed.
    pub limit: f64,
    pub message: String,
}

pub(crate) fn severity_code(s: Severity) -> &'static str {
    match s {
        Severity::Exceeded => "exceeded",
        Severity::Note => "note",
    }
}

/// Every finding and model note of a solved chip, most serious first.
pub(crate) fn records(chip: &Chip, found: &[Finding]) -> Vec<JsonFinding> {
    let mut out: Vec<JsonFinding> = found
        .iter()
        .filter(|f| f.severity == Severity::Exceeded)
        .map(|f| record(chip, f))
        .collect();
    out.extend(chip.notes.iter().map(note_record));
    out.extend(
        found
            .iter()
            .filter(|f| f.severity != Severity::Exceeded)
            .map(|f| record(chip, f)),
    );
    out
}

/// A model note as a record.
fn note_record(note: &ModelNote) -> JsonFinding {
    match note {
        ModelNote::Fluid(w) => JsonFinding {
            severity: "note",
            kind: "model_range",
            place: "fluid",
            name: model_name(w.model).to_string(),
            value: w.value,
            limit: if w.value < w.valid[0] {
                w.valid[0]
            } else {
                w.valid[1]
            },
            message: note_text(w),
        },
        ModelNote::Profile { section, note } => {
            let (value, limit) = profile_value_and_limit(note);
            JsonFinding {
                severity: "note",
                kind: "profile_sampling",
                place: "section",
                name: section.clone(),
                value,
                limit,
                message: profile_note_text(section, note),
            }
        }
    }
}

/// The value and limit of a profile note (points, or metres for a gap).
fn profile_value_and_limit(note: &ProfileNote) -> (f64, f64) {
    match *note {
        ProfileNote::Sparse { points } => (points as f64, MIN_PROFILE_POINTS as f64),
        ProfileNote::Uneven { gap, median, .. } => (gap, UNEVEN_GAP_RATIO * median),
        ProfileNote::Resampled { from, .. } => (from as f64, MAX_MESH_POINTS as f64),
        ProfileNote::Trimmed { left_out, .. } => (left_out as f64, 0.0),
    }
}

/// A profile note as a sentence.
pub fn profile_note_text(section: &str, note: &ProfileNote) -> String {
    let um = |m: f64| super::fmt_sig(m * 1e6, 4);
    let at = format!("section '{section}'");
    match *note {
        ProfileNote::Sparse { points } => format!(
            "{at}: the measured profile has {points} points across the channel (under \
             {MIN_PROFILE_POINTS}); its wall is taken as straight between them"
        ),
        ProfileNote::Uneven { gap, at: x, median } => format!(
            "{at}: the measured profile has a gap of {} um after x = {} um, {} times its median \
             spacing of {} um; the wall is taken as straight across it",
            um(gap),
            um(x),
            super::fmt_sig(gap / median, 3),
            um(median)
        ),
        ProfileNote::Resampled {
            from,
            to,
            area_change,
            perimeter_change,
        } => format!(
            "{at}: the measured profile's {from} points were simplified to {to} for the mesh \
             (Visvalingam–Whyatt); this changed the area by {:+.2e} and the wetted perimeter by \
             {:+.2e} (relative)",
            area_change, perimeter_change
        ),
        ProfileNote::Trimmed {
            left_out,
            from_x,
            to_x,
        } => format!(
            "{at}: {left_out} profile point(s) outside the channel (x from {} to {} um, where \
             the profile meets the lid) were left out",
            um(from_x),
            um(to_x)
        ),
    }
}

fn record(chip: &Chip, f: &Finding) -> JsonFinding {
    let (place, name) = place_name(chip, f.kind.place());
    let (value, limit) = f.kind.value_and_limit();
    JsonFinding {
        severity: severity_code(f.severity),
        kind: f.kind.code(),
        place,
        name: name.to_string(),
        value,
        limit,
        message: finding_text(chip, f),
    }
}
