//! Human-readable tables for the terminal.

use super::{fmt_sig, tie_key, CAUTION};
use crate::analysis::SteadyState;
use crate::chip::Chip;
use crate::network::{ChannelId, Network, NodeId, Port};
use crate::units::display;

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

/// Most rows a terminal table lists. A longer table (junctions, channels, wall shear of a chip
/// of thousands of channels) lists its first rows (the worst, where there is an order) and says
/// how many it left out and where to find them all: read on a terminal, a million rows help no
/// one, and writing them takes seconds.
pub const TABLE_ROWS: usize = 5000;

/// The note under a table cut at [`TABLE_ROWS`] rows of `total` (nothing when not cut).
fn cut_note(total: usize, what: &str, out: &mut String) {
    if total > TABLE_ROWS {
        out.push_str(&format!(
            "  … {} more {what} not listed (a table lists at most {TABLE_ROWS} rows; \
             --format csv or --format json gives all {total})\n",
            total - TABLE_ROWS
        ));
    }
}

/// Render a table of text rows (columns from `first_numeric` on right-aligned) into `out`.
pub(crate) fn render_rows(
    header: &[String],
    first_numeric: usize,
    rows: &[Vec<String>],
    out: &mut String,
) {
    let h: Vec<&str> = header.iter().map(String::as_str).collect();
    let mut t = TextTable::new(&h, first_numeric);
    for r in rows {
        t.add_row(r.clone());
    }
    t.render(out);
}

/// Human-readable report: ports, nodes, channels, residual, caution.
pub fn to_table(chip: &Chip, state: &SteadyState) -> String {
    let network = &chip.network;
    let sol = &state.solution;
    let mut out = String::new();
    if let Some(name) = &chip.name {
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
        .filter(|&i| matches!(network.nodes[NodeId(i)].port, Port::Junction))
        .collect();
    if !junctions.is_empty() {
        let mut nodes = TextTable::new(&["Junction", "Pressure [mbar]"], 1);
        for &i in junctions.iter().take(TABLE_ROWS) {
            nodes.add_row(vec![
                network.nodes[NodeId(i)].name.clone(),
                fmt_sig(display::mbar(sol.pressures[i]), 4),
            ]);
        }
        out.push_str("\nJunctions\n");
        nodes.render(&mut out);
        cut_note(junctions.len(), "junctions", &mut out);
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
    for (c, s) in network
        .channels
        .iter()
        .zip(&state.channels)
        .take(TABLE_ROWS)
    {
        let (a, b) = (&network.nodes[c.from].name, &network.nodes[c.to].name);
        let direction = super::flow_direction(a, b, s.flow);
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
    cut_note(network.channels.len(), "channels", &mut out);
    out.push('\n');
    shear_section(network, state, &mut out);
    super::solutes::text_section(chip, state, &mut out);
    out.push_str(&format!(
        "\nFlow balance: worst relative residual {:.1e} (limit {:.0e}) over {} nodes and {} channels.\n",
        sol.max_relative_residual,
        crate::analysis::RESIDUAL_LIMIT,
        network.nodes.len(),
        network.channels.len()
    ));
    findings_section(chip, state, &mut out);
    out
}

/// Channels in the order a cell biologist wants them: smallest shear margin first, then
/// channels without a limit by decreasing maximum shear; ties (to 10 digits) in file order.
/// At most [`TABLE_ROWS`] of them: the worst are selected first (O(n)), then sorted.
pub(super) fn worst_first(state: &SteadyState) -> Vec<usize> {
    let mut order: Vec<usize> = (0..state.channels.len()).collect();
    // The keys are rounded once per channel, not once per comparison.
    let keys: Vec<(bool, f64)> = (state.channels.iter())
        .map(|s| match s.shear_margin {
            Some(m) => (true, tie_key(m)),
            None => (false, tie_key(s.wall_shear_max)),
        })
        .collect();
    let cmp = |&a: &usize, &b: &usize| {
        let ((ha, ka), (hb, kb)) = (keys[a], keys[b]);
        match (ha, hb) {
            (true, true) => ka.total_cmp(&kb),
            (true, false) => std::cmp::Ordering::Less,
            (false, true) => std::cmp::Ordering::Greater,
            (false, false) => kb.total_cmp(&ka),
        }
        .then(a.cmp(&b))
    };
    if order.len() > TABLE_ROWS {
        order.select_nth_unstable_by(TABLE_ROWS, cmp);
        order.truncate(TABLE_ROWS);
    }
    order.sort_by(cmp);
    order
}

/// Wall shear, margins and timing per channel, worst margin first.
pub fn shear_section(network: &Network, state: &SteadyState, out: &mut String) {
    let any_limit = state.channels.iter().any(|s| s.shear_limit.is_some());
    let mut t = TextTable::new(
        &[
            "Channel",
            "Status",
            "τ mean [Pa]",
            "τ max [Pa]",
            "Limit [Pa]",
            "Margin",
            "Residence [s]",
            "Entrance / length",
        ],
        2,
    );
    for k in worst_first(state) {
        let (c, s) = (&network.channels[ChannelId(k)], &state.channels[k]);
        let status = match s.shear_margin {
            Some(m) if m < 1.0 => "OVER LIMIT",
            Some(_) => "ok",
            None => "",
        };
        t.add_row(vec![
            c.name.clone(),
            status.to_string(),
            fmt_sig(s.wall_shear_mean, 3),
            fmt_sig(s.wall_shear_max, 3),
            s.shear_limit
                .map(|l| fmt_sig(l, 3))
                .unwrap_or_else(|| "—".into()),
            s.shear_margin
                .map(|m| {
                    if m.is_finite() {
                        fmt_sig(m, 3)
                    } else {
                        "no flow".into()
                    }
                })
                .unwrap_or_else(|| "—".into()),
            if s.residence_time.is_finite() {
                fmt_sig(s.residence_time, 3)
            } else {
                "no flow".into()
            },
            format!("{:.1} %", 100.0 * s.entrance_length / c.length.si()),
        ]);
    }
    out.push_str(if any_limit {
        "Wall shear stress (smallest margin first; margin = limit / maximum wall shear)\n"
    } else {
        "Wall shear stress (highest first; no shear limit set: add 'shear_limit' to fluid.cells or a channel)\n"
    });
    t.render(out);
    cut_note(state.channels.len(), "channels", out);
}

/// Limits exceeded, notes, and the cautions that apply.
pub fn findings_section(chip: &Chip, state: &SteadyState, out: &mut String) {
    let network = &chip.network;
    let found = super::findings::records(chip, &crate::analysis::findings(network, state));
    if !found.is_empty() {
        out.push_str("\nFindings\n");
        for f in &found {
            let tag = match f.severity {
                "exceeded" => "LIMIT EXCEEDED",
                _ => "note",
            };
            out.push_str(&format!("  [{tag}] {}\n", f.message));
        }
    }
    out.push('\n');
    out.push_str(CAUTION);
    out.push('\n');
    if state.channels.iter().any(|s| s.shear_limit.is_some()) {
        out.push('\n');
        out.push_str(SHEAR_CAUTION);
        out.push('\n');
    }
    if network.pressure_rating.is_some() {
        out.push('\n');
        out.push_str(PRESSURE_CAUTION);
        out.push('\n');
    }
}

/// Caution printed whenever shear limits are evaluated.
pub const SHEAR_CAUTION: &str =
    "Shear limits: the tolerance of cells to wall shear stress varies with cell type, \
exposure time, medium and attachment; a margin above 1 is not a guarantee of viability. Validate \
viability experimentally, and handle biological samples under your institution's biosafety rules.";

/// Caution printed whenever a pressure rating is checked.
pub const PRESSURE_CAUTION: &str = "Pressure rating: bonded chips, ports and fittings can fail below their nominal rating \
(defects, ageing, pressure spikes when valves close). Stay well inside it, shield pressurised setups, \
and follow your lab's rules for pressurised equipment.";

/// The `check` report: verdict, shear margins, pressures against the rating, findings.
pub fn check_text(chip: &Chip, state: &SteadyState, passed: bool) -> String {
    let network = &chip.network;
    let mut out = String::new();
    if let Some(name) = &chip.name {
        out.push_str(&format!("Chip: {name}\n"));
    }
    let limited = state
        .channels
        .iter()
        .filter(|s| s.shear_limit.is_some())
        .count();
    out.push_str(&format!(
        "Checked: wall shear of {limited} of {} channels against a limit; node pressures {}.\n",
        state.channels.len(),
        match network.pressure_rating {
            Some(r) => format!(
                "against the rating {} mbar",
                fmt_sig(display::mbar(r.si()), 4)
            ),
            None => "not checked (no pressure_rating in the chip file)".to_string(),
        }
    ));
    let nothing_checked = limited == 0 && network.pressure_rating.is_none();
    out.push_str(if passed && nothing_checked {
        "Verdict: PASS — but only against vacuum: no shear limit and no pressure rating is set, \
         so nothing else was checked.\n\n"
    } else if passed {
        "Verdict: PASS — no limit exceeded.\n\n"
    } else {
        "Verdict: FAIL — limits exceeded (see Findings).\n\n"
    });
    shear_section(network, state, &mut out);
    if let Some(i) = state
        .solution
        .pressures
        .iter()
        .enumerate()
        // The first node of the highest pressure (to 10 digits), in file order.
        .max_by(|a, b| (tie_key(a.1.abs()).total_cmp(&tie_key(b.1.abs()))).then(b.0.cmp(&a.0)))
        .map(|(i, _)| i)
    {
        out.push_str(&format!(
            "\nHighest pressure: {} mbar at node '{}'.\n",
            fmt_sig(display::mbar(state.solution.pressures[i]), 4),
            network.nodes[NodeId(i)].name
        ));
    }
    findings_section(chip, state, &mut out);
    out
}
