//! The shareable HTML page of `rillnet report`: one self-contained file with the pictures
//! (inline SVG, shown at their natural size and scrolled sideways when the window is narrow,
//! so their text stays legible), every table of `solve` (ports, junctions, channels, wall
//! shear and residence time, solutes, findings), the chip's geometry, the cautions, the input
//! file (collapsed) and which program made the page when.
//!
//! The page is also well-formed XML (void elements closed, only the five XML entities), so it
//! can be checked by an XML parser.

use super::fmt_sig;
use crate::analysis::{findings, SteadyState};
use crate::chip::Chip;
use crate::network::{ChannelId, Port};
use crate::units::display;

/// Who made the page, when, and what else is in its folder.
#[derive(Clone, Debug, Default)]
pub struct Made {
    /// Program version.
    pub version: String,
    /// Seconds since 1970-01-01 UTC (from `SOURCE_DATE_EPOCH` when set, for reproducible
    /// pages).
    pub epoch_seconds: u64,
    /// The other files of the report, by name, linked from the page.
    pub files: Vec<String>,
}

/// A UTC date and time, "YYYY-MM-DD HH:MM UTC" (proleptic Gregorian calendar; the days to
/// civil date conversion of H. Hinnant, "chrono-Compatible Low-Level Date Algorithms").
pub fn utc_date(epoch_seconds: u64) -> String {
    let days = (epoch_seconds / 86_400) as i64;
    let secs = epoch_seconds % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1_460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}-{m:02}-{d:02} {:02}:{:02} UTC",
        secs / 3600,
        (secs % 3600) / 60
    )
}

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A table with an id; columns from `first_numeric` on are right-aligned numbers.
fn table(id: &str, header: &[&str], rows: &[Vec<String>], out: &mut String) {
    out.push_str(&format!("<div class=\"wide\"><table id=\"{id}\">\n<tr>"));
    for h in header {
        out.push_str(&format!("<th>{}</th>", esc(h)));
    }
    out.push_str("</tr>\n");
    for r in rows {
        out.push_str("<tr>");
        for c in r {
            if c.ends_with("OVER") || c == "OVER LIMIT" {
                out.push_str(&format!("<td class=\"over\">{}</td>", esc(c)));
            } else {
                out.push_str(&format!("<td>{}</td>", esc(c)));
            }
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</table></div>\n");
}

/// An SVG document as an element to embed: the XML declaration and anything before `<svg`
/// dropped.
fn inline_svg(svg: &str) -> &str {
    svg.find("<svg").map_or("", |i| &svg[i..]).trim_end()
}

const STYLE: &str = "body{font-family:sans-serif;max-width:1200px;margin:2em auto;padding:0 1em;\
color:#1e1e1e}\
table{border-collapse:collapse;margin:0.5em 0 1.5em}\
td,th{border:1px solid #ccc;padding:3px 8px;text-align:right;white-space:nowrap}\
th{background:#f2f2f2}td:first-child,th:first-child{text-align:left}\
.over{color:#b34a00;font-weight:bold}.wide{overflow-x:auto}\
figure{margin:1.5em 0}.picture{overflow-x:auto;border:1px solid #eee}\
.picture svg{max-width:none;height:auto;display:block}\
figcaption{margin-top:0.4em;font-style:italic}\
.caution{background:#fff6e5;padding:0.8em;border-left:4px solid #e69f00}\
pre{background:#f7f7f7;padding:0.8em;overflow-x:auto}";

/// Build the page. `pictures` are (caption, SVG text) pairs embedded inline.
pub fn html_page(
    chip: &Chip,
    state: &SteadyState,
    pictures: &[(String, String)],
    made: &Made,
) -> String {
    let network = &chip.network;
    let name = chip.title();
    let mut h = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"/>\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n\
         <title>{} — rillnet report</title>\n<style>{STYLE}</style>\n</head><body>\n<h1>{}</h1>\n",
        esc(name),
        esc(name)
    );
    h.push_str(&format!(
        "<p class=\"made\">Made by rillnet {} on {} from {}.</p>\n",
        esc(&made.version),
        utc_date(made.epoch_seconds),
        esc(&chip.source.origin)
    ));
    if let Some(d) = &chip.description {
        h.push_str(&format!("<p>{}</p>\n", esc(d)));
    }
    h.push_str(&format!(
        "<p>Fluid: viscosity {} mPa·s, density {} kg/m³. {} nodes, {} channels.</p>\n",
        fmt_sig(network.fluid.viscosity.si() * 1e3, 4),
        fmt_sig(network.fluid.density.si(), 4),
        network.nodes.len(),
        network.channels.len(),
    ));
    findings_part(chip, state, &mut h);
    cautions(chip, state, &mut h);
    if !pictures.is_empty() {
        h.push_str("<h2 id=\"pictures\">Pictures</h2>\n");
    }
    for (caption, svg) in pictures {
        h.push_str(&format!(
            "<figure>\n<div class=\"picture\">\n{}\n</div>\n<figcaption>{}</figcaption>\n</figure>\n",
            inline_svg(svg),
            esc(caption)
        ));
    }
    tables(chip, state, &mut h);
    geometry(chip, &mut h);
    h.push_str(&format!(
        "<p>Flow balance: worst relative residual {:.1e} (limit {:.0e}) over {} nodes and {} \
         channels.</p>\n",
        state.solution.max_relative_residual,
        crate::analysis::RESIDUAL_LIMIT,
        network.nodes.len(),
        network.channels.len()
    ));
    if !made.files.is_empty() {
        h.push_str("<h2 id=\"files\">Files beside this page</h2>\n<ul>\n");
        for f in &made.files {
            h.push_str(&format!("<li><a href=\"{0}\">{0}</a></li>\n", esc(f)));
        }
        h.push_str("</ul>\n<p>Tables in SI units: results.json, results.csv.</p>\n");
    }
    let lines = chip.source.text.lines().count();
    h.push_str(&format!(
        "<h2 id=\"input\">Input file</h2>\n<details><summary>{} ({lines} lines)</summary>\n\
         <pre id=\"input-text\">{}</pre>\n</details>\n",
        esc(&chip.source.origin),
        esc(&chip.source.text)
    ));
    h.push_str("</body></html>\n");
    h
}

/// Findings: limits exceeded (marked) and notes.
fn findings_part(chip: &Chip, state: &SteadyState, h: &mut String) {
    let found = super::findings::records(chip, &findings(&chip.network, state));
    if found.is_empty() {
        return;
    }
    h.push_str("<h2 id=\"findings\">Findings</h2>\n<ul id=\"findings-list\">\n");
    for f in &found {
        if f.severity == "exceeded" {
            h.push_str(&format!(
                "<li class=\"over\">LIMIT EXCEEDED: {}</li>\n",
                esc(&f.message)
            ));
        } else {
            h.push_str(&format!("<li>note: {}</li>\n", esc(&f.message)));
        }
    }
    h.push_str("</ul>\n");
}

/// The cautions `solve` prints: always the model caution; the shear caution when limits are
/// evaluated; the pressure caution when a rating is checked.
fn cautions(chip: &Chip, state: &SteadyState, h: &mut String) {
    let mut one = |text: &str| h.push_str(&format!("<p class=\"caution\">{}</p>\n", esc(text)));
    one(super::CAUTION);
    if state.channels.iter().any(|s| s.shear_limit.is_some()) {
        one(super::text::SHEAR_CAUTION);
    }
    if chip.network.pressure_rating.is_some() {
        one(super::text::PRESSURE_CAUTION);
    }
}

/// The tables of `solve`: ports, junctions, channels, wall shear, solutes.
fn tables(chip: &Chip, state: &SteadyState, h: &mut String) {
    let network = &chip.network;
    let ports: Vec<Vec<String>> = network
        .nodes
        .iter()
        .enumerate()
        .filter_map(|(i, n)| {
            state.port(network, i).map(|p| {
                let (kind, pressure) = match n.port {
                    Port::Flow(_) => (
                        "flow (set)",
                        format!("{} needed", fmt_sig(display::mbar(p.pressure), 4)),
                    ),
                    _ => ("pressure (set)", fmt_sig(display::mbar(p.pressure), 4)),
                };
                vec![
                    n.name.clone(),
                    kind.into(),
                    pressure,
                    fmt_sig(display::ul_per_min(p.flow_into_chip), 4),
                ]
            })
        })
        .collect();
    h.push_str("<h2>Ports</h2>\n");
    table(
        "ports",
        &[
            "port",
            "controlled by",
            "pressure [mbar]",
            "flow into chip [µL/min]",
        ],
        &ports,
        h,
    );
    let junctions: Vec<Vec<String>> = network
        .nodes
        .iter()
        .enumerate()
        .filter(|(_, n)| matches!(n.port, Port::Junction))
        .map(|(i, n)| {
            vec![
                n.name.clone(),
                fmt_sig(display::mbar(state.solution.pressures[i]), 4),
            ]
        })
        .collect();
    if !junctions.is_empty() {
        h.push_str("<h2>Junctions</h2>\n");
        table("junctions", &["junction", "pressure [mbar]"], &junctions, h);
    }
    let channels: Vec<Vec<String>> = network
        .channels
        .iter()
        .zip(&state.channels)
        .map(|(c, s)| {
            let (a, b) = (&network.nodes[c.from].name, &network.nodes[c.to].name);
            let direction = super::flow_direction(a, b, s.flow);
            vec![
                c.name.clone(),
                direction,
                fmt_sig(display::ul_per_min(s.flow.abs()), 4),
                fmt_sig(display::mbar(s.pressure_drop.abs()), 4),
                // R in mbar per µL/min: Pa·s/m³ × (1 mbar/100 Pa) × (1 m³/s per 6e10 µL/min).
                fmt_sig(s.resistance / 100.0 / 6.0e10, 4),
                fmt_sig(display::mm_per_s(s.mean_velocity.abs()), 4),
                fmt_sig(s.reynolds, 3),
            ]
        })
        .collect();
    h.push_str("<h2>Channels</h2>\n");
    table(
        "channels",
        &[
            "channel",
            "flow direction",
            "flow [µL/min]",
            "ΔP [mbar]",
            "R [mbar/(µL/min)]",
            "mean velocity [mm/s]",
            "Re",
        ],
        &channels,
        h,
    );
    let any_limit = state.channels.iter().any(|s| s.shear_limit.is_some());
    let shear: Vec<Vec<String>> = super::text::worst_first(state)
        .into_iter()
        .map(|k| {
            let (c, s) = (&network.channels[ChannelId(k)], &state.channels[k]);
            vec![
                c.name.clone(),
                match s.shear_margin {
                    Some(m) if m < 1.0 => "OVER LIMIT".into(),
                    Some(_) => "ok".into(),
                    None => String::new(),
                },
                fmt_sig(s.wall_shear_mean, 3),
                fmt_sig(s.wall_shear_max, 3),
                s.shear_limit.map_or_else(|| "—".into(), |l| fmt_sig(l, 3)),
                s.shear_margin.map_or_else(
                    || "—".into(),
                    |m| {
                        if m.is_finite() {
                            fmt_sig(m, 3)
                        } else {
                            "no flow".into()
                        }
                    },
                ),
                if s.residence_time.is_finite() {
                    fmt_sig(s.residence_time, 3)
                } else {
                    "no flow".into()
                },
                format!("{:.1} %", 100.0 * s.entrance_length / c.length.si()),
            ]
        })
        .collect();
    h.push_str(if any_limit {
        "<h2>Wall shear and residence time</h2>\n<p>Smallest margin first; margin = limit / \
         maximum wall shear.</p>\n"
    } else {
        "<h2>Wall shear and residence time</h2>\n<p>Highest wall shear first; no shear limit \
         is set.</p>\n"
    });
    table(
        "shear",
        &[
            "channel",
            "status",
            "τ mean [Pa]",
            "τ max [Pa]",
            "limit [Pa]",
            "margin",
            "residence [s]",
            "entrance / length",
        ],
        &shear,
        h,
    );
    let mut solutes = String::new();
    super::solutes::text_section(chip, state, &mut solutes);
    if !solutes.trim().is_empty() {
        h.push_str(&format!(
            "<h2>Solutes</h2>\n<pre id=\"solutes\">{}</pre>\n",
            esc(solutes.trim_matches('\n'))
        ));
    }
}

/// The chip as declared: sections and channel lengths.
fn geometry(chip: &Chip, h: &mut String) {
    let network = &chip.network;
    let mut used = vec![0usize; network.sections.len()];
    for c in network.channels.iter() {
        used[c.section.0] += 1;
    }
    let sections: Vec<Vec<String>> = network
        .sections
        .iter()
        .zip(&used)
        .map(|(s, n)| {
            let f = &s.figures;
            let dh = if f.perimeter > 0.0 {
                4.0 * f.area / f.perimeter
            } else {
                0.0
            };
            vec![
                s.name.clone(),
                s.shape.kind().into(),
                fmt_sig(f.area * 1e12, 4),
                fmt_sig(display::um(f.perimeter), 4),
                fmt_sig(display::um(dh), 4),
                fmt_sig(f.conductance_factor * 1e24, 4),
                n.to_string(),
            ]
        })
        .collect();
    h.push_str("<h2 id=\"geometry\">Chip geometry</h2>\n");
    table(
        "sections",
        &[
            "section",
            "shape",
            "area [µm²]",
            "wetted perimeter [µm]",
            "hydraulic diameter [µm]",
            "K [µm⁴]",
            "channels",
        ],
        &sections,
        h,
    );
    let channels: Vec<Vec<String>> = network
        .channels
        .iter()
        .enumerate()
        .map(|(k, c)| {
            vec![
                c.name.clone(),
                network.nodes[c.from].name.clone(),
                network.nodes[c.to].name.clone(),
                chip.section_label(ChannelId(k)),
                fmt_sig(display::mm(c.length.si()), 4),
            ]
        })
        .collect();
    table(
        "channel-geometry",
        &["channel", "from", "to", "section", "length [mm]"],
        &channels,
        h,
    );
}
