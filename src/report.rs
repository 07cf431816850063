//! Rendering results for people (terminal tables) and for programs (JSON, CSV).
//!
//! JSON and CSV are SI with the unit in every key (`flow_m3_per_s`); these names are a
//! stable interface for scripts. Tables use the units designers read: mbar, µL/min, mm/s.

use crate::analysis::SteadyState;
use crate::network::{Network, Port};
use crate::units::display;
use serde::Serialize;

/// Output formats of the solve report.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    Table,
    Json,
    Csv,
}

/// The caution printed with every human-readable result.
pub const CAUTION: &str =
    "Caution: these are model predictions (rigid channels, fully developed laminar \
flow, Newtonian fluid). Real chips deform, delaminate or leak, and tubing and fittings fail under \
pressure. Validate with your own device, and follow your lab's safety rules.";

/// Format a number with about `sig` significant digits, switching to exponent form for very
/// large or small magnitudes.
pub fn fmt_sig(x: f64, sig: usize) -> String {
    if x == 0.0 {
        return "0".to_string();
    }
    if !x.is_finite() {
        return format!("{x}");
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-3..6).contains(&mag) {
        return format!("{:.*e}", sig.saturating_sub(1), x);
    }
    let decimals = (sig as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

fn role(port: Port) -> &'static str {
    match port {
        Port::Junction => "junction",
        Port::Pressure(_) => "pressure",
        Port::Flow(_) => "flow",
    }
}

// ---------------------------------------------------------------------------------------
// JSON
// ---------------------------------------------------------------------------------------

#[derive(Serialize)]
struct JsonReport<'a> {
    chip: Option<&'a str>,
    units: &'static str,
    fluid: JsonFluid,
    max_relative_residual: f64,
    nodes: Vec<JsonNode<'a>>,
    ports: Vec<JsonPort<'a>>,
    channels: Vec<JsonChannel<'a>>,
    sections: Vec<JsonSection<'a>>,
}

#[derive(Serialize)]
struct JsonFluid {
    viscosity_pa_s: f64,
    density_kg_per_m3: f64,
}

#[derive(Serialize)]
struct JsonNode<'a> {
    name: &'a str,
    kind: &'static str,
    pressure_pa: f64,
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
    section: &'a str,
    length_m: f64,
    flow_m3_per_s: f64,
    pressure_drop_pa: f64,
    resistance_pa_s_per_m3: f64,
    mean_velocity_m_per_s: f64,
    reynolds: f64,
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

/// The solve report as pretty JSON (SI).
pub fn to_json(network: &Network, state: &SteadyState) -> String {
    let sol = &state.solution;
    let report = JsonReport {
        chip: network.name.as_deref(),
        units: "SI",
        fluid: JsonFluid {
            viscosity_pa_s: network.fluid.viscosity.si(),
            density_kg_per_m3: network.fluid.density.si(),
        },
        max_relative_residual: sol.max_relative_residual,
        nodes: network
            .nodes
            .iter()
            .enumerate()
            .map(|(i, n)| JsonNode {
                name: &n.name,
                kind: role(n.port),
                pressure_pa: sol.pressures[i],
            })
            .collect(),
        ports: network
            .nodes
            .iter()
            .enumerate()
            .filter_map(|(i, n)| {
                state.port(network, i).map(|p| JsonPort {
                    name: &n.name,
                    kind: role(n.port),
                    pressure_pa: p.pressure,
                    flow_into_chip_m3_per_s: p.flow_into_chip,
                })
            })
            .collect(),
        channels: network
            .channels
            .iter()
            .zip(&state.channels)
            .map(|(c, s)| JsonChannel {
                name: &c.name,
                from: &network.nodes[c.from.0].name,
                to: &network.nodes[c.to.0].name,
                section: &network.sections[c.section.0].name,
                length_m: c.length.si(),
                flow_m3_per_s: s.flow,
                pressure_drop_pa: s.pressure_drop,
                resistance_pa_s_per_m3: s.resistance,
                mean_velocity_m_per_s: s.mean_velocity,
                reynolds: s.reynolds,
            })
            .collect(),
        sections: network
            .sections
            .iter()
            .map(|s| JsonSection {
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
            .collect(),
    };
    // Serialising plain structs of strings and finite floats cannot fail; non-finite floats
    // become null.
    let mut out =
        serde_json::to_string_pretty(&report).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"));
    out.push('\n');
    out
}

// ---------------------------------------------------------------------------------------
// CSV: one tidy table, a row per node and per channel, told apart by `record`.
// ---------------------------------------------------------------------------------------

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// The solve report as CSV (SI). Columns that do not apply to a row are empty.
pub fn to_csv(network: &Network, state: &SteadyState) -> String {
    let mut out = String::from(
        "record,name,kind,from,to,pressure_pa,flow_into_chip_m3_per_s,flow_m3_per_s,\
         pressure_drop_pa,resistance_pa_s_per_m3,mean_velocity_m_per_s,reynolds\n",
    );
    for (i, n) in network.nodes.iter().enumerate() {
        let inflow = state
            .port(network, i)
            .map(|p| format!("{:e}", p.flow_into_chip))
            .unwrap_or_default();
        out.push_str(&format!(
            "node,{},{},,,{:e},{inflow},,,,,\n",
            csv_field(&n.name),
            role(n.port),
            state.solution.pressures[i]
        ));
    }
    for (c, s) in network.channels.iter().zip(&state.channels) {
        out.push_str(&format!(
            "channel,{},{},{},{},,,{:e},{:e},{:e},{:e},{:e}\n",
            csv_field(&c.name),
            network.sections[c.section.0].shape.kind(),
            csv_field(&network.nodes[c.from.0].name),
            csv_field(&network.nodes[c.to.0].name),
            s.flow,
            s.pressure_drop,
            s.resistance,
            s.mean_velocity,
            s.reynolds
        ));
    }
    out
}

// ---------------------------------------------------------------------------------------
// Terminal tables
// ---------------------------------------------------------------------------------------

/// A plain-text table: a header, a rule, and rows; text columns left-aligned, number
/// columns right-aligned. Written by hand (not a table crate) because it must stay linear in
/// size for chips with a million channels.
struct TextTable {
    header: Vec<String>,
    first_numeric: usize,
    rows: Vec<Vec<String>>,
}

impl TextTable {
    /// A table whose columns from `first_numeric` on are right-aligned numbers.
    fn new(header: &[&str], first_numeric: usize) -> Self {
        TextTable {
            header: header.iter().map(|h| h.to_string()).collect(),
            first_numeric,
            rows: Vec::new(),
        }
    }

    fn add_row(&mut self, row: Vec<String>) {
        self.rows.push(row);
    }

    fn render(&self, out: &mut String) {
        let width = |s: &str| s.chars().count();
        let mut widths: Vec<usize> = self.header.iter().map(|h| width(h)).collect();
        for row in &self.rows {
            for (w, cell) in widths.iter_mut().zip(row) {
                *w = (*w).max(width(cell));
            }
        }
        let line = |out: &mut String, cells: &[String]| {
            for (i, (cell, w)) in cells.iter().zip(&widths).enumerate() {
                let pad = w - width(cell);
                if i > 0 {
                    out.push_str("  ");
                }
                if i >= self.first_numeric {
                    out.extend(std::iter::repeat_n(' ', pad));
                    out.push_str(cell);
                } else {
                    out.push_str(cell);
                    if i + 1 < cells.len() {
                        out.extend(std::iter::repeat_n(' ', pad));
                    }
                }
            }
            out.push('\n');
        };
        out.push_str("  ");
        line(out, &self.header);
        let rule: Vec<String> = widths.iter().map(|w| "─".repeat(*w)).collect();
        out.push_str("  ");
        line(out, &rule);
        for row in &self.rows {
            out.push_str("  ");
            line(out, row);
        }
    }
}

/// Human-readable report: ports, nodes, channels, residual, caution.
pub fn to_table(network: &Network, state: &SteadyState) -> String {
    let sol = &state.solution;
    let mut out = String::new();
    if let Some(name) = &network.name {
        out.push_str(&format!("Chip: {name}\n"));
    }
    out.push_str(&format!(
        "Fluid: viscosity {} mPa·s, density {} kg/m³\n\n",
        fmt_sig(network.fluid.viscosity.si() * 1e3, 4),
        fmt_sig(network.fluid.density.si(), 4)
    ));

    let mut ports = TextTable::new(
        &[
            "Port",
            "Controlled by",
            "Pressure [mbar]",
            "Flow into chip [µL/min]",
        ],
        2,
    );
    for (i, n) in network.nodes.iter().enumerate() {
        if let Some(p) = state.port(network, i) {
            let (kind, p_txt, q_txt) = match n.port {
                Port::Pressure(_) => (
                    "pressure (set)",
                    fmt_sig(display::mbar(p.pressure), 4),
                    fmt_sig(display::ul_per_min(p.flow_into_chip), 4),
                ),
                _ => (
                    "flow (set)",
                    format!("{} needed", fmt_sig(display::mbar(p.pressure), 4)),
                    fmt_sig(display::ul_per_min(p.flow_into_chip), 4),
                ),
            };
            ports.add_row(vec![n.name.clone(), kind.to_string(), p_txt, q_txt]);
        }
    }
    out.push_str("Ports\n");
    ports.render(&mut out);

    let junctions: Vec<usize> = (0..network.nodes.len())
        .filter(|&i| matches!(network.nodes[i].port, Port::Junction))
        .collect();
    if !junctions.is_empty() {
        let mut nodes = TextTable::new(&["Junction", "Pressure [mbar]"], 1);
        for i in junctions {
            nodes.add_row(vec![
                network.nodes[i].name.clone(),
                fmt_sig(display::mbar(sol.pressures[i]), 4),
            ]);
        }
        out.push_str("\nJunctions\n");
        nodes.render(&mut out);
    }

    let mut ch = TextTable::new(
        &[
            "Channel",
            "Flow direction",
            "Flow [µL/min]",
            "ΔP [mbar]",
            "R [mbar/(µL/min)]",
            "Mean velocity [mm/s]",
            "Re",
        ],
        2,
    );
    for (c, s) in network.channels.iter().zip(&state.channels) {
        let (a, b) = (&network.nodes[c.from.0].name, &network.nodes[c.to.0].name);
        let direction = if s.flow == 0.0 {
            format!("{a} ─ {b} (no flow)")
        } else if s.flow > 0.0 {
            format!("{a} → {b}")
        } else {
            format!("{b} → {a}")
        };
        ch.add_row(vec![
            c.name.clone(),
            direction,
            fmt_sig(display::ul_per_min(s.flow.abs()), 4),
            fmt_sig(display::mbar(s.pressure_drop.abs()), 4),
            // R in mbar per µL/min: Pa·s/m³ × (1 mbar/100 Pa) × (1 m³/s per 6e10 µL/min).
            fmt_sig(s.resistance / 100.0 / 6.0e10, 4),
            fmt_sig(display::mm_per_s(s.mean_velocity.abs()), 4),
            fmt_sig(s.reynolds, 3),
        ]);
    }
    out.push_str("\nChannels\n");
    ch.render(&mut out);
    out.push_str(&format!(
        "\nFlow balance: worst relative residual {:.1e} (limit {:.0e}) over {} nodes and {} channels.\n",
        sol.max_relative_residual,
        crate::analysis::RESIDUAL_LIMIT,
        network.nodes.len(),
        network.channels.len()
    ));
    out.push('\n');
    out.push_str(CAUTION);
    out.push('\n');
    out
}

/// Render in the chosen format.
pub fn render(network: &Network, state: &SteadyState, format: Format) -> String {
    match format {
        Format::Table => to_table(network, state),
        Format::Json => to_json(network, state),
        Format::Csv => to_csv(network, state),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(fmt_sig(123.456, 4), "123.5");
        assert_eq!(fmt_sig(0.012345, 3), "0.0123");
        assert_eq!(fmt_sig(1.5e13, 3), "1.50e13");
        assert_eq!(fmt_sig(0.0, 3), "0");
        assert_eq!(fmt_sig(-2.0, 3), "-2.00");
    }

    #[test]
    fn csv_quotes_when_needed() {
        assert_eq!(csv_field("a,b"), "\"a,b\"");
        assert_eq!(csv_field("plain"), "plain");
    }
}
