//! `species:` (diffusion coefficients) and `nodes.NAME.concentrations:` → [`Species`].
//!
//! ```yaml
//! species:
//!   drug: {diffusivity: 5e-10 m^2/s}
//!   dye:  {diffusivity: 400 um^2/s}
//! nodes:
//!   inlet_a: {pressure: 100 mbar, concentrations: {drug: 10 uM, dye: 1}}
//! ```
//!
//! A species' concentrations are molar (M, mM, uM, nM, pM, mol/m^3), by mass (mg/mL, ug/mL,
//! ng/mL, g/L, mg/L) or plain fractions 0..1 — one measure per species. Ports without a value
//! let in fluid without the species.

use super::{at, Misplaced, Named, Q};
use crate::chip::species::{Measure, Species};
use crate::network::{Network, Port};
use crate::units::{parse_si, Diffusivity, Dimension, UnitError};
use serde::de::{self, Deserializer, Visitor};
use serde::Deserialize;
use std::fmt;

/// `mixing:` — the solute model a run uses unless `solve --mixing` says otherwise.
#[derive(Debug, Clone, Copy, Deserialize)]
#[serde(rename_all = "lowercase")]
pub(crate) enum MixingSpec {
    Well,
    Lateral,
}

impl MixingSpec {
    pub(crate) fn to_mixing(self) -> crate::chip::species::Mixing {
        match self {
            MixingSpec::Well => crate::chip::species::Mixing::Well,
            MixingSpec::Lateral => crate::chip::species::Mixing::Lateral,
        }
    }
}

/// `species.NAME:`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct SpeciesSpec {
    /// Optional here so that a missing value gets a message with its place and an example.
    #[serde(default)]
    pub diffusivity: Option<Q<Diffusivity>>,
}

/// A concentration as written: text with a unit (`10 uM`) or a plain number (a fraction).
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum ConcValue {
    Text(String),
    Number(f64),
}

impl<'de> Deserialize<'de> for ConcValue {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = ConcValue;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a concentration such as '10 uM' or '2 mg/mL', or a fraction 0..1")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<ConcValue, E> {
                Ok(ConcValue::Text(v.to_string()))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<ConcValue, E> {
                Ok(ConcValue::Number(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<ConcValue, E> {
                Ok(ConcValue::Number(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<ConcValue, E> {
                Ok(ConcValue::Number(v as f64))
            }
        }
        deserializer.deserialize_any(V)
    }
}

const EXPECTED: &str = "expected a concentration with a unit (M, mM, uM, nM, pM, mol/m^3; \
                        mg/mL, ug/mL, ng/mL, g/L, mg/L) or a plain fraction from 0 to 1";

/// Read one written concentration: (SI value, measure), or what is wrong with it. A plain 0
/// fits every measure (`None`).
pub(super) fn read(value: &ConcValue) -> Result<(f64, Option<Measure>), String> {
    let text = match value {
        ConcValue::Number(x) => return fraction(*x).map(|x| (x, Some(Measure::Fraction))),
        ConcValue::Text(t) => t.trim(),
    };
    if text.starts_with('-') {
        return Err(format!(
            "'{text}' is negative; a concentration is 0 or more"
        ));
    }
    match parse_si(text, Dimension::Concentration) {
        Ok(0.0) => Ok((0.0, None)),
        Ok(x) => Ok((x, Some(Measure::Molar))),
        Err(UnitError::WrongDimension {
            found: Dimension::MassConcentration,
            ..
        }) => parse_si(text, Dimension::MassConcentration)
            .map(|x| (x, Some(Measure::Mass)))
            .map_err(|e| e.to_string()),
        Err(UnitError::BareNumber { .. }) => match text.parse::<f64>() {
            Ok(x) => fraction(x).map(|x| (x, Some(Measure::Fraction))),
            Err(_) => Err(format!("'{text}': {EXPECTED}")),
        },
        Err(UnitError::OutOfRange { .. }) | Err(UnitError::NotFinite { .. }) => Err(format!(
            "'{text}' is outside the range rillnet accepts ({})",
            Dimension::Concentration.accepted_range()
        )),
        Err(_) => Err(format!("'{text}': {EXPECTED}")),
    }
}

/// A plain number as a fraction 0..1.
fn fraction(x: f64) -> Result<f64, String> {
    if !x.is_finite() {
        return Err(format!("{x} is not a number; {EXPECTED}"));
    }
    if x < 0.0 {
        return Err(format!("{x} is negative; a concentration is 0 or more"));
    }
    if x > 1.0 {
        return Err(format!(
            "a plain number is a fraction of the inlet stream and must lie between 0 and 1, \
             got {x}; give a unit for a concentration (e.g. '{x} uM')"
        ));
    }
    Ok(x)
}

pub(super) fn measure_words(m: Measure) -> &'static str {
    match m {
        Measure::Molar => "a molar concentration",
        Measure::Mass => "a mass concentration",
        Measure::Fraction => "a plain fraction",
    }
}

/// The declared species with their port concentrations. `nodes` are the node entries in file
/// order with their `concentrations:` (file order = `network.nodes` order).
pub(crate) fn to_species(
    species: &Named<SpeciesSpec>,
    nodes: &[(&str, Option<&Named<ConcValue>>)],
    network: &Network,
) -> Result<Vec<Species>, Misplaced> {
    let mut out: Vec<(Species, bool)> = Vec::with_capacity(species.0.len());
    for (name, spec) in &species.0 {
        if out.iter().any(|(s, _)| &s.name == name) {
            let mut m = at(
                &["species", name.as_str()],
                format!("species '{name}' is declared twice"),
            );
            m.repeated = true;
            return Err(m);
        }
        let Some(d) = spec.diffusivity else {
            return Err(at(
                &["species", name.as_str()],
                format!(
                    "species '{name}' needs a diffusion coefficient, e.g. \
                     '{name}: {{diffusivity: 5e-10 m^2/s}}'"
                ),
            ));
        };
        out.push((
            Species {
                name: name.clone(),
                diffusivity: d.0,
                measure: Measure::Fraction,
                inlet: vec![0.0; network.nodes.len()],
            },
            false,
        ));
    }
    for (i, (node, given)) in nodes.iter().enumerate() {
        let Some(given) = given else { continue };
        for (name, value) in &given.0 {
            let place = ["nodes", *node, "concentrations", name.as_str()];
            let Some((s, measured)) = out.iter_mut().find(|(s, _)| &s.name == name) else {
                return Err(at(&place, unknown(name, species)));
            };
            if matches!(
                network.nodes[crate::network::NodeId(i)].port,
                Port::Junction
            ) {
                return Err(at(
                    &place,
                    format!(
                        "node '{node}' is a junction, where no fluid enters the chip; give \
                         concentrations at the ports that let fluid in (nodes with 'pressure' \
                         or 'flow')"
                    ),
                ));
            }
            let (x, measure) = read(value).map_err(|m| at(&place, m))?;
            if let Some(measure) = measure {
                if *measured && measure != s.measure {
                    return Err(at(
                        &place,
                        format!(
                            "species '{name}' is given as {} elsewhere and as {} here; use one \
                             measure for a species",
                            measure_words(s.measure),
                            measure_words(measure)
                        ),
                    ));
                }
                s.measure = measure;
                *measured = true;
            }
            s.inlet[i] = x;
        }
    }
    if let Some((s, _)) = out.iter().find(|(s, _)| !s.inlet.iter().any(|&c| c > 0.0)) {
        return Err(at(
            &["species", s.name.as_str()],
            format!(
                "species '{}' enters at no port; give it at an inlet, e.g. \
                 'concentrations: {{{}: 10 uM}}' on a node with 'pressure' or 'flow'",
                s.name, s.name
            ),
        ));
    }
    Ok(out.into_iter().map(|(s, _)| s).collect())
}

fn unknown(name: &str, species: &Named<SpeciesSpec>) -> String {
    if species.0.is_empty() {
        return format!(
            "unknown species '{name}': the chip declares none; add it under 'species:', e.g. \
             'species: {{{name}: {{diffusivity: 5e-10 m^2/s}}}}'"
        );
    }
    let names: Vec<&str> = species.0.iter().map(|(n, _)| n.as_str()).collect();
    format!(
        "unknown species '{name}'; the chip declares: {}",
        names.join(", ")
    )
}
