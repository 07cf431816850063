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

/// The concentration keys of a node or channel.
pub(crate) fn json<'a>(chip: &'a Chip, state: &SteadyState, at: At) -> JsonConc<'a> {
    let pick = |measure: Measure| {
        let entries: Vec<(&str, Option<f64>)> = chip
            .species
            .iter()
            .enumerate()
            .filter(|(_, s)| s.measure == measure)
            .map(|(k, s)| (s.name.as_str(), value(state, k, at)))
            .collect();
        (!entries.is_empty()).then_some(ConcMap(entries))
    };
    JsonConc {
        concentrations_mol_per_m3: pick(Measure::Molar),
        concentrations_kg_per_m3: pick(Measure::Mass),
        concentrations: pick(Measure::Fraction),
    }
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

/// CSV column names of the species, in file order.
pub(crate) fn csv_columns(chip: &Chip) -> Vec<String> {
    chip.species
        .iter()
        .map(|s| match s.measure {
            Measure::Molar => format!("concentration_{}_mol_per_m3", s.name),
            Measure::Mass => format!("concentration_{}_kg_per_m3", s.name),
            Measure::Fraction => format!("concentration_{}", s.name),
        })
        .collect()
}

/// CSV cells of a node or channel (empty where there is no well-mixed value).
pub(crate) fn csv_cells(chip: &Chip, state: &SteadyState, at: At) -> Vec<String> {
    (0..chip.species.len())
        .map(|k| super::csv::num(value(state, k, at)))
        .collect()
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
    let mut channels: Vec<Vec<String>> = Vec::new();
    for (k, c) in network.channels.iter().enumerate() {
        let mut row = vec![c.name.clone(), String::new()];
        row.extend(cells(At::Channel(k)));
        channels.push(row);
    }
    out.push_str(
        "\nSolutes, well mixed at every junction (— where no flow passes: no well-mixed value)\n",
    );
    let mut h = vec!["Node".to_string(), "Kind".to_string()];
    h.extend(header.iter().cloned());
    super::text::render_rows(&h, 2, &nodes, out);
    out.push('\n');
    let mut h = vec!["Channel".to_string(), String::new()];
    h.extend(header);
    super::text::render_rows(&h, 2, &channels, out);
}
