//! The solve report as JSON (SI units in every key; names are a stable interface).

use super::findings::JsonFinding;
use super::role;
use crate::analysis::SteadyState;
use crate::chip::Chip;
use serde::{Serialize, Serializer};

/// A sequence serialised straight from an iterator, so a document with a million channels is
/// written record by record without a vector of records (or of text) built first.
pub(crate) struct Records<'a, T>(Box<dyn Fn() -> Box<dyn Iterator<Item = T> + 'a> + 'a>);

impl<'a, T> Records<'a, T> {
    fn new<I: Iterator<Item = T> + 'a>(make: impl Fn() -> I + 'a) -> Self {
        Records(Box::new(move || Box::new(make())))
    }
}

impl<T: Serialize> Serialize for Records<'_, T> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_seq((self.0)())
    }
}

/// Version of the JSON documents' layout; raised whenever a key changes meaning or moves.
pub const SCHEMA_VERSION: u32 = 3;

// ---------------------------------------------------------------------------------------
// JSON
// ---------------------------------------------------------------------------------------

#[derive(Serialize)]
pub(crate) struct JsonReport<'a> {
    schema_version: u32,
    chip: Option<&'a str>,
    units: &'static str,
    fluid: JsonFluid,
    /// The chip's species (absent when none are declared).
    #[serde(skip_serializing_if = "Option::is_none")]
    species: Option<Vec<super::solutes::JsonSpecies<'a>>>,
    /// The solute model that gave the concentrations, and its notes (only with species).
    #[serde(skip_serializing_if = "Option::is_none")]
    solute_model: Option<super::solutes::JsonSoluteModel>,
    max_relative_residual: f64,
    /// The chip's pressure rating, null when none is given.
    pressure_rating_pa: Option<f64>,
    /// Limits exceeded and model notes, most serious first.
    findings: Vec<JsonFinding>,
    nodes: Records<'a, JsonNode<'a>>,
    ports: Records<'a, JsonPort<'a>>,
    channels: Records<'a, JsonChannel<'a>>,
    sections: Records<'a, JsonSection<'a>>,
    /// `check` only: "pass" or "fail".
    #[serde(skip_serializing_if = "Option::is_none")]
    pub(crate) verdict: Option<&'static str>,
    /// `solve --sensitivity` only.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub(crate) sensitivities: Option<JsonSensitivities<'a>>,
}

#[derive(Serialize)]
struct JsonFluid {
    viscosity_pa_s: f64,
    density_kg_per_m3: f64,
    shear_limit_pa: Option<f64>,
}

#[derive(Serialize)]
struct JsonNode<'a> {
    name: &'a str,
    kind: &'static str,
    pressure_pa: f64,
    /// Relative flow-balance residual (null at pressure ports, whose flow is free).
    balance_residual: Option<f64>,
    /// Well-mixed concentrations (only with species).
    #[serde(flatten)]
    solutes: super::solutes::JsonConc<'a>,
}

#[derive(Serialize)]
struct JsonPort<'a> {
    name: &'a str,
    kind: &'static str,
    /// Set pressure (pressure port) or required pressure (flow port).
    pressure_pa: f64,
    /// Set flow (flow port) or delivered flow (pressure port), positive into the chip.
    flow_into_chip_m3_per_s: f64,
}

#[derive(Serialize)]
struct JsonChannel<'a> {
    name: &'a str,
    from: &'a str,
    to: &'a str,
    section: String,
    length_m: f64,
    flow_m3_per_s: f64,
    pressure_drop_pa: f64,
    resistance_pa_s_per_m3: f64,
    mean_velocity_m_per_s: f64,
    reynolds: f64,
    wall_shear_mean_pa: f64,
    wall_shear_max_pa: f64,
    /// The limit that applies (channel's own, else the cells'); null when none.
    shear_limit_pa: Option<f64>,
    /// limit / maximum wall shear; null when there is no limit or no flow.
    shear_margin: Option<f64>,
    entrance_length_m: f64,
    /// null when the channel carries no flow.
    residence_time_s: Option<f64>,
    power_w: f64,
    /// Well-mixed concentrations (only with species).
    #[serde(flatten)]
    solutes: super::solutes::JsonConc<'a>,
}

#[derive(Serialize)]
struct JsonSection<'a> {
    name: &'a str,
    shape: &'static str,
    area_m2: f64,
    perimeter_m: f64,
    hydraulic_diameter_m: f64,
    resistance_per_length_pa_s_per_m4: f64,
    fre_fanning: f64,
}

/// The solve report (SI), ready to serialise; `verdict` and `sensitivities` are added by
/// `check` and `solve --sensitivity`.
pub(crate) fn solve_report<'a>(chip: &'a Chip, state: &'a SteadyState) -> JsonReport<'a> {
    let network = &chip.network;
    let sol = &state.solution;
    JsonReport {
        schema_version: SCHEMA_VERSION,
        chip: chip.name.as_deref(),
        units: "SI",
        fluid: JsonFluid {
            viscosity_pa_s: network.fluid.viscosity.si(),
            density_kg_per_m3: network.fluid.density.si(),
            shear_limit_pa: network.fluid.shear_limit.map(|p| p.si()),
        },
        species: super::solutes::species_json(chip),
        solute_model: super::solutes::model_json(chip, state),
        max_relative_residual: sol.max_relative_residual,
        pressure_rating_pa: network.pressure_rating.map(|p| p.si()),
        findings: super::findings::records(chip, &crate::analysis::findings(network, state)),
        nodes: Records::new(move || {
            network
                .nodes
                .iter()
                .enumerate()
                .map(move |(i, n)| JsonNode {
                    name: &n.name,
                    kind: role(n.port),
                    pressure_pa: sol.pressures[i],
                    balance_residual: sol.node_residuals[i],
                    solutes: super::solutes::json(chip, state, super::solutes::At::Node(i)),
                })
        }),
        ports: Records::new(move || {
            network.nodes.iter().enumerate().filter_map(move |(i, n)| {
                state.port(network, i).map(|p| JsonPort {
                    name: &n.name,
                    kind: role(n.port),
                    pressure_pa: p.pressure,
                    flow_into_chip_m3_per_s: p.flow_into_chip,
                })
            })
        }),
        channels: Records::new(move || {
            network
                .channels
                .iter()
                .zip(&state.channels)
                .enumerate()
                .map(move |(k, (c, s))| JsonChannel {
                    name: &c.name,
                    from: &network.nodes[c.from].name,
                    to: &network.nodes[c.to].name,
                    section: chip.section_label(crate::network::ChannelId(k)),
                    length_m: c.length.si(),
                    flow_m3_per_s: s.flow,
                    pressure_drop_pa: s.pressure_drop,
                    resistance_pa_s_per_m3: s.resistance,
                    mean_velocity_m_per_s: s.mean_velocity,
                    reynolds: s.reynolds,
                    wall_shear_mean_pa: s.wall_shear_mean,
                    wall_shear_max_pa: s.wall_shear_max,
                    shear_limit_pa: s.shear_limit,
                    shear_margin: s.shear_margin.filter(|m| m.is_finite()),
                    entrance_length_m: s.entrance_length,
                    residence_time_s: Some(s.residence_time).filter(|t| t.is_finite()),
                    power_w: s.power,
                    solutes: super::solutes::json(chip, state, super::solutes::At::Channel(k)),
                })
        }),
        sections: Records::new(move || {
            network.sections.iter().map(move |s| JsonSection {
                name: &s.name,
                shape: s.shape.kind(),
                area_m2: s.figures.area,
                perimeter_m: s.figures.perimeter,
                hydraulic_diameter_m: s.figures.hydraulic_diameter(),
                resistance_per_length_pa_s_per_m4: s
                    .figures
                    .resistance_per_length(network.fluid.viscosity.si()),
                fre_fanning: s.figures.f_re(),
            })
        }),
        verdict: None,
        sensitivities: None,
    }
}

/// Write a serialisable document as pretty JSON and a final newline.
pub(crate) fn write_json<T: Serialize>(
    value: &T,
    w: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    let mut w = tokens(w);
    serde_json::to_writer_pretty(&mut w, value).map_err(std::io::Error::from)?;
    std::io::Write::write_all(&mut w, b"\n")?;
    std::io::Write::flush(&mut w)
}

/// The writer serde_json writes its tokens to: a buffer of a concrete type, so each of the
/// tens of millions of small writes of a large document is a copy into the buffer rather than
/// a call through `dyn Write` (the caller's writer gets 64 KiB at a time).
fn tokens(w: &mut dyn std::io::Write) -> std::io::BufWriter<&mut dyn std::io::Write> {
    std::io::BufWriter::with_capacity(1 << 16, w)
}

/// The solve report as pretty JSON (SI).
pub fn to_json(chip: &Chip, state: &SteadyState) -> String {
    let mut out = Vec::new();
    // Writing into memory cannot fail; non-finite floats become null.
    let _ = write_json(&solve_report(chip, state), &mut out);
    String::from_utf8_lossy(&out).into_owned()
}

#[derive(Serialize)]
struct JsonSens<'a> {
    target_channel: &'a str,
    channel: &'a str,
    d_flow_d_width_m3_per_s_per_m: Option<f64>,
    d_flow_d_height_m3_per_s_per_m: Option<f64>,
    d_flow_d_length_m3_per_s_per_m: f64,
    /// d ln Q / d ln x: % change of the target flow per % change of the dimension.
    relative_width: Option<f64>,
    relative_height: Option<f64>,
    relative_length: Option<f64>,
}

/// The `sensitivities` key of `solve --sensitivity --format json`.
#[derive(Serialize)]
pub(crate) struct JsonSensitivities<'a> {
    /// Rows kept per target channel when the full table was too large (largest relative
    /// length sensitivity first); null when every row is given.
    kept_per_target: Option<usize>,
    rows: Vec<JsonSens<'a>>,
}

pub(crate) fn sensitivity_json<'a>(
    network: &'a crate::network::Network,
    t: &'a crate::outcome::SensitivityTable,
) -> JsonSensitivities<'a> {
    JsonSensitivities {
        kept_per_target: t.kept_per_target,
        rows: t
            .rows
            .iter()
            .map(|x| JsonSens {
                target_channel: &network.channels[x.target_channel].name,
                channel: &network.channels[x.channel].name,
                d_flow_d_width_m3_per_s_per_m: x.d_width.map(z),
                d_flow_d_height_m3_per_s_per_m: x.d_height.map(z),
                d_flow_d_length_m3_per_s_per_m: z(x.d_length),
                relative_width: x.rel_width.map(z),
                relative_height: x.rel_height.map(z),
                relative_length: x.rel_length.map(z),
            })
            .collect(),
    }
}

/// `x` with a negative zero made positive (no output prints −0).
fn z(x: f64) -> f64 {
    x + 0.0
}

/// How a JSON document is laid out. The keys, values and order are the same either way;
/// only the whitespace between tokens differs.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum JsonLayout {
    /// Indented, one value per line: for people (the default on standard output).
    #[default]
    Pretty,
    /// No whitespace between tokens: for files and programs (the default with `-o`; about
    /// half the bytes of the indented layout for a solve document, and quicker to write).
    Compact,
}

/// Write a serialisable document in `layout` and a final newline.
pub(crate) fn write_json_as<T: Serialize>(
    value: &T,
    layout: JsonLayout,
    w: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    match layout {
        JsonLayout::Pretty => write_json(value, w),
        JsonLayout::Compact => {
            let mut w = tokens(w);
            serde_json::to_writer(&mut w, value).map_err(std::io::Error::from)?;
            std::io::Write::write_all(&mut w, b"\n")?;
            std::io::Write::flush(&mut w)
        }
    }
}

/// A writer that drops the whitespace between the tokens of the JSON written through it
/// (whitespace inside strings is kept): indented JSON in, compact JSON out, for the documents
/// that are only written indented.
pub(crate) struct Minify<'w> {
    inner: &'w mut dyn std::io::Write,
    in_string: bool,
    escaped: bool,
    buf: Vec<u8>,
}

impl<'w> Minify<'w> {
    pub(crate) fn new(inner: &'w mut dyn std::io::Write) -> Self {
        Minify {
            inner,
            in_string: false,
            escaped: false,
            buf: Vec::with_capacity(1 << 16),
        }
    }
}

impl std::io::Write for Minify<'_> {
    fn write(&mut self, bytes: &[u8]) -> std::io::Result<usize> {
        for &b in bytes {
            if self.in_string {
                if self.escaped {
                    self.escaped = false;
                } else if b == b'\\' {
                    self.escaped = true;
                } else if b == b'"' {
                    self.in_string = false;
                }
            } else if b == b'"' {
                self.in_string = true;
            } else if matches!(b, b' ' | b'\n' | b'\r' | b'\t') {
                continue;
            }
            self.buf.push(b);
        }
        if self.buf.len() >= 1 << 16 {
            self.inner.write_all(&self.buf)?;
            self.buf.clear();
        }
        Ok(bytes.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.write_all(&self.buf)?;
        self.buf.clear();
        self.inner.flush()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    #[test]
    fn minify_keeps_strings_and_drops_layout() {
        let mut out = Vec::new();
        {
            let mut m = Minify::new(&mut out);
            m.write_all(b"{\n  \"a b\": \"x \\\" y\",\n  \"c\": [\n    1,\n    2\n  ]\n}\n")
                .unwrap();
            m.flush().unwrap();
        }
        assert_eq!(out, b"{\"a b\":\"x \\\" y\",\"c\":[1,2]}".to_vec());
    }
}
