//! Solute concentrations in the solve report: JSON keys, CSV columns and terminal tables.
//! Present only when the chip declares species, so reports of other chips do not change.
//!
//! JSON (per node and per channel): `concentrations_mol_per_m3` (molar species),
//! `concentrations_kg_per_m3` (mass concentrations) and `concentrations` (plain fractions),
//! each a map species → value. Where no flow passes (stagnant) there is no well-mixed value and
//! the species is left out of the map (an empty cell in CSV, `—` in tables).

use super::fmt_sig;
use crate::analysis::SteadyState;
use crate::chip::species::{Measure, Species};
use crate::chip::Chip;
use serde::ser::{Serialize, SerializeMap, Serializer};

/// Species → concentration, in file order.
pub(crate) struct ConcMap<'a>(Vec<(&'a str, Option<f64>)>);

impl Serialize for ConcMap<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut m = s.serialize_map(None)?;
        for (k, v) in &self.0 {
            if let Some(v) = v {
                m.serialize_entry(k, &(v + 0.0))?;
            }
        }
        m.end()
    }
}

/// The concentration keys of one node or channel (absent without species).
#[derive(serde::Serialize, Default)]
pub(crate) struct JsonConc<'a> {
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_mol_per_m3: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_kg_per_m3: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations: Option<ConcMap<'a>>,
    /// Lateral model, per channel at its end: smallest and largest bin across the width.
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_min_mol_per_m3: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_max_mol_per_m3: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_min_kg_per_m3: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_max_kg_per_m3: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_min: Option<ConcMap<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    concentrations_max: Option<ConcMap<'a>>,
    /// Lateral model: 1 − σ/σ₀ across the width at the channel's end, per species.
    #[serde(skip_serializing_if = "Option::is_none")]
    mixing_index: Option<ConcMap<'a>>,
}

/// Where a value is read: a node or a channel index.
#[derive(Clone, Copy)]
pub(crate) enum At {
    Node(usize),
    Channel(usize),
}

fn value(state: &SteadyState, species: usize, at: At) -> Option<f64> {
    let field = &state.solutes.as_ref()?.fields.get(species)?;
    match at {
        At::Node(i) => field.nodes.get(i).copied().flatten(),
        At::Channel(k) => field.channels.get(k).copied().flatten(),
    }
}

/// What the lateral model says of a channel across its width.
#[derive(Clone, Copy)]
enum Across {
    Min,
    Max,
    Index,
}

fn across(state: &SteadyState, species: usize, channel: usize, what: Across) -> Option<f64> {
    let field = state.solutes.as_ref()?.fields.get(species)?;
    let spread = field.lateral.as_ref()?.channels.get(channel)?.as_ref()?;
    Some(match what {
        Across::Min => spread.min,
        Across::Max => spread.max,
        Across::Index => spread.mixing_index,
    })
}

/// Whether the lateral model gave the results.
fn lateral(state: &SteadyState) -> bool {
    state.solutes.as_ref().is_some_and(|s| s.lateral)
}

/// The concentration keys of a node or channel.
pub(crate) fn json<'a>(chip: &'a Chip, state: &SteadyState, at: At) -> JsonConc<'a> {
    let pick_with = |measure: Option<Measure>, get: &dyn Fn(usize) -> Option<f64>| {
        let entries: Vec<(&str, Option<f64>)> = chip
            .species
            .iter()
            .enumerate()
            .filter(|(_, s)| measure.is_none_or(|m| s.measure == m))
            .map(|(k, s)| (s.name.as_str(), get(k)))
            .collect();
        (!entries.is_empty()).then_some(ConcMap(entries))
    };
    let pick = |measure: Measure| pick_with(Some(measure), &|k| value(state, k, at));
    let mut out = JsonConc {
        concentrations_mol_per_m3: pick(Measure::Molar),
        concentrations_kg_per_m3: pick(Measure::Mass),
        concentrations: pick(Measure::Fraction),
        ..Default::default()
    };
    if let (At::Channel(c), true) = (at, lateral(state)) {
        let side = |m: Measure, what: Across| pick_with(Some(m), &|k| across(state, k, c, what));
        out.concentrations_min_mol_per_m3 = side(Measure::Molar, Across::Min);
        out.concentrations_max_mol_per_m3 = side(Measure::Molar, Across::Max);
        out.concentrations_min_kg_per_m3 = side(Measure::Mass, Across::Min);
        out.concentrations_max_kg_per_m3 = side(Measure::Mass, Across::Max);
        out.concentrations_min = side(Measure::Fraction, Across::Min);
        out.concentrations_max = side(Measure::Fraction, Across::Max);
        out.mixing_index = pick_with(None, &|k| across(state, k, c, Across::Index));
    }
    out
}

/// The solute model and what it rests on, for the top of the JSON document.
#[derive(serde::Serialize)]
pub(crate) struct JsonSoluteModel {
    /// "well" or "lateral" (the model that gave the results).
    model: &'static str,
    notes: Vec<String>,
}

/// Present when the lateral model was asked for (so documents of well-mixed runs keep their
/// keys).
pub(crate) fn model_json(chip: &Chip, state: &SteadyState) -> Option<JsonSoluteModel> {
    let solutes = state.solutes.as_ref()?;
    if chip.mixing != crate::chip::species::Mixing::Lateral {
        return None;
    }
    Some(JsonSoluteModel {
        model: if solutes.lateral { "lateral" } else { "well" },
        notes: note_lines(chip, state),
    })
}

/// The solute notes in words.
fn note_lines(chip: &Chip, state: &SteadyState) -> Vec<String> {
    use crate::analysis::solutes::SoluteNote;
    let Some(solutes) = state.solutes.as_ref() else {
        return Vec::new();
    };
    solutes
        .notes
        .iter()
        .map(|n| match n {
            SoluteNote::LateralRecirculates => "the flow recirculates (a loop in the flow \
                 directions), so the lateral model has no channel to start from: the \
                 concentrations are those of the well-mixed model"
                .to_string(),
            SoluteNote::FileOrder(nodes) => {
                let names: Vec<&str> = nodes
                    .iter()
                    .take(8)
                    .map(|&i| chip.network.nodes[i].name.as_str())
                    .collect();
                format!(
                    "lateral model: the drawing does not give the direction of every channel at \
                     {} node(s) ({}{}), so the streams there are placed side by side in the \
                     order of the file; give 'at:' positions (and 'path:' points) for the order \
                     on the chip",
                    nodes.len(),
                    names.join(", "),
                    if nodes.len() > 8 { ", …" } else { "" }
                )
            }
        })
        .collect()
}

/// The species as declared, for the top of the JSON document.
#[derive(serde::Serialize)]
pub(crate) struct JsonSpecies<'a> {
    name: &'a str,
    diffusivity_m2_per_s: f64,
    /// "molar" (mol/m³), "mass" (kg/m³) or "fraction".
    measure: &'static str,
}

pub(crate) fn species_json(chip: &Chip) -> Option<Vec<JsonSpecies<'_>>> {
    (!chip.species.is_empty()).then(|| {
        chip.species
            .iter()
            .map(|s| JsonSpecies {
                name: &s.name,
                diffusivity_m2_per_s: s.diffusivity.si(),
                measure: measure_code(s.measure),
            })
            .collect()
    })
}

fn measure_code(m: Measure) -> &'static str {
    match m {
        Measure::Molar => "molar",
        Measure::Mass => "mass",
        Measure::Fraction => "fraction",
    }
}

fn unit_suffix(m: Measure) -> &'static str {
    match m {
        Measure::Molar => "_mol_per_m3",
        Measure::Mass => "_kg_per_m3",
        Measure::Fraction => "",
    }
}

/// CSV column names of the species, in file order; in the lateral model (`mixing: lateral`
/// or `solve --mixing lateral`) also min, max and mixing index per species.
pub(crate) fn csv_columns(chip: &Chip) -> Vec<String> {
    let mut out: Vec<String> = chip
        .species
        .iter()
        .map(|s| format!("concentration_{}{}", s.name, unit_suffix(s.measure)))
        .collect();
    if chip.mixing == crate::chip::species::Mixing::Lateral {
        for s in &chip.species {
            let u = unit_suffix(s.measure);
            out.push(format!("concentration_{}_min{u}", s.name));
            out.push(format!("concentration_{}_max{u}", s.name));
            out.push(format!("mixing_index_{}", s.name));
        }
    }
    out
}

/// CSV cells of a node or channel (empty where there is no value).
#[cfg(test)]
pub(crate) fn csv_cells(chip: &Chip, state: &SteadyState, at: At) -> Vec<String> {
    csv_values(chip, state, at).map(super::csv::num).collect()
}

/// The values of a node's or channel's concentration columns, in [`csv_columns`] order.
pub(crate) fn csv_values<'a>(
    chip: &'a Chip,
    state: &'a SteadyState,
    at: At,
) -> impl Iterator<Item = Option<f64>> + 'a {
    let species = 0..chip.species.len();
    let lateral = chip.mixing == crate::chip::species::Mixing::Lateral;
    let means = species.clone().map(move |k| value(state, k, at));
    let sides = species
        .filter(move |_| lateral)
        .flat_map(|k| [(k, Across::Min), (k, Across::Max), (k, Across::Index)])
        .map(move |(k, what)| match at {
            At::Channel(c) => across(state, k, c, what),
            At::Node(_) => None,
        });
    means.chain(sides)
}

/// A display unit for a species: (label, SI → display factor), chosen from the largest inlet
/// concentration.
fn display_unit(s: &Species) -> (&'static str, f64) {
    let top = s.inlet.iter().fold(0.0f64, |m, &x| m.max(x));
    match s.measure {
        Measure::Fraction => ("fraction", 1.0),
        Measure::Molar => [
            ("M", 1e-3),
            ("mM", 1.0),
            ("µM", 1e3),
            ("nM", 1e6),
            ("pM", 1e9),
        ]
        .into_iter()
        .find(|&(_, f)| top * f >= 1.0)
        .unwrap_or(("pM", 1e9)),
        Measure::Mass => [("mg/mL", 1.0), ("µg/mL", 1e3), ("ng/mL", 1e6)]
            .into_iter()
            .find(|&(_, f)| top * f >= 1.0)
            .unwrap_or(("ng/mL", 1e6)),
    }
}

/// The well-mixed concentrations at the ports and in every channel, as terminal tables.
pub(crate) fn text_section(chip: &Chip, state: &SteadyState, out: &mut String) {
    if chip.species.is_empty() || state.solutes.is_none() {
        return;
    }
    let units: Vec<(&str, f64)> = chip.species.iter().map(display_unit).collect();
    let header: Vec<String> = chip
        .species
        .iter()
        .zip(&units)
        .map(|(s, (u, _))| format!("{} [{u}]", s.name))
        .collect();
    let cells = |at: At| -> Vec<String> {
        units
            .iter()
            .enumerate()
            .map(|(k, (_, f))| value(state, k, at).map_or("—".into(), |c| fmt_sig(c * f, 4)))
            .collect()
    };
    let network = &chip.network;
    let mut nodes: Vec<Vec<String>> = Vec::new();
    for (i, n) in network.nodes.iter().enumerate() {
        let mut row = vec![n.name.clone(), super::role(n.port).to_string()];
        row.extend(cells(At::Node(i)));
        nodes.push(row);
    }
    let lateral = lateral(state);
    let mut channels: Vec<Vec<String>> = Vec::new();
    for (k, c) in network.channels.iter().enumerate() {
        let mut row = vec![c.name.clone(), String::new()];
        row.extend(cells(At::Channel(k)));
        if lateral {
            for (j, (_, f)) in units.iter().enumerate() {
                let get = |what| across(state, j, k, what);
                row.push(get(Across::Min).map_or("—".into(), |c| fmt_sig(c * f, 4)));
                row.push(get(Across::Max).map_or("—".into(), |c| fmt_sig(c * f, 4)));
                row.push(get(Across::Index).map_or("—".into(), |c| format!("{c:.3}")));
            }
        }
        channels.push(row);
    }
    if lateral {
        out.push_str(
            "\nSolutes, streams side by side (lateral model: mean, and at each channel's end \
             min/max across the width and mixing index 1 − σ/σ₀; — where no flow passes)\n",
        );
    } else {
        out.push_str(
            "\nSolutes, well mixed at every junction (— where no flow passes: no well-mixed value)\n",
        );
    }
    for line in note_lines(chip, state) {
        out.push_str(&format!("Note: {line}\n"));
    }
    let mut h = vec!["Node".to_string(), "Kind".to_string()];
    h.extend(header.iter().cloned());
    super::text::render_rows(&h, 2, &nodes, out);
    out.push('\n');
    let mut h = vec!["Channel".to_string(), String::new()];
    h.extend(header);
    if lateral {
        for (s, (u, _)) in chip.species.iter().zip(&units) {
            h.push(format!("{} min [{u}]", s.name));
            h.push(format!("{} max [{u}]", s.name));
            h.push(format!("{} mixing", s.name));
        }
    }
    super::text::render_rows(&h, 2, &channels, out);
}
