//! The shareable HTML page of `rillnet report`: one self-contained file with the pictures
//! (inline SVG) and the tables, for sending to a lab.

use super::fmt_sig;
use crate::analysis::{findings, SteadyState};
use crate::chip::Chip;
use crate::network::Port;
use crate::units::display;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn table(header: &[&str], rows: &[Vec<String>]) -> String {
    let mut t = String::from("<table>\n<tr>");
    for h in header {
        t.push_str(&format!("<th>{}</th>", esc(h)));
    }
    t.push_str("</tr>\n");
    for r in rows {
        t.push_str("<tr>");
        for c in r {
            t.push_str(&format!("<td>{}</td>", esc(c)));
        }
        t.push_str("</tr>\n");
    }
    t.push_str("</table>\n");
    t
}

/// Build the page. `pictures` are (caption, SVG text) pairs embedded inline.
pub fn html_page(chip: &Chip, state: &SteadyState, pictures: &[(String, String)]) -> String {
    let network = &chip.network;
    let name = chip.title();
    let mut h = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\n<title>{} — rillnet report</title>\n\
         <style>body{{font-family:sans-serif;max-width:1200px;margin:2em auto;color:#1e1e1e}}\
         table{{border-collapse:collapse;margin:1em 0}}td,th{{border:1px solid #ccc;padding:3px 8px;text-align:right}}\
         th{{background:#f2f2f2}}td:first-child{{text-align:left}}.over{{color:#d55e00;font-weight:bold}}\
         figure{{margin:1.5em 0}}svg{{max-width:100%;height:auto}}.caution{{background:#fff6e5;padding:0.8em;border-left:4px solid #e69f00}}</style>\n\
         </head><body>\n<h1>{}</h1>\n",
        esc(name),
        esc(name)
    );
    h.push_str(&format!(
        "<p>Fluid: viscosity {} mPa·s, density {} kg/m³. {} nodes, {} channels. Worst flow-balance residual {:.1e}.</p>\n",
        fmt_sig(network.fluid.viscosity.si() * 1e3, 4),
        fmt_sig(network.fluid.density.si(), 4),
        network.nodes.len(),
        network.channels.len(),
        state.solution.max_relative_residual
    ));
    let found = super::findings::records(chip, &findings(network, state));
    if !found.is_empty() {
        h.push_str("<h2>Findings</h2>\n<ul>\n");
        for f in &found {
            let class = if f.severity == "exceeded" {
                " class=\"over\""
            } else {
                ""
            };
            h.push_str(&format!("<li{class}>{}</li>\n", esc(&f.message)));
        }
        h.push_str("</ul>\n");
    }
    for (caption, svg) in pictures {
        h.push_str(&format!(
            "<figure>\n{svg}\n<figcaption>{}</figcaption>\n</figure>\n",
            esc(caption)
        ));
    }
    let ports: Vec<Vec<String>> = network
        .nodes
        .iter()
        .enumerate()
        .filter_map(|(i, n)| {
            state.port(network, i).map(|p| {
                vec![
                    n.name.clone(),
                    match n.port {
                        Port::Flow(_) => "flow (set)".into(),
                        _ => "pressure (set)".into(),
                    },
                    fmt_sig(display::mbar(p.pressure), 4),
                    fmt_sig(display::ul_per_min(p.flow_into_chip), 4),
                ]
            })
        })
        .collect();
    h.push_str("<h2>Ports</h2>\n");
    h.push_str(&table(
        &[
            "port",
            "controlled by",
            "pressure [mbar]",
            "flow into chip [µL/min]",
        ],
        &ports,
    ));
    let channels: Vec<Vec<String>> = network
        .channels
        .iter()
        .zip(&state.channels)
        .map(|(c, s)| {
            vec![
                c.name.clone(),
                network.nodes[c.from].name.clone(),
                network.nodes[c.to].name.clone(),
                fmt_sig(display::ul_per_min(s.flow), 4),
                fmt_sig(display::mbar(s.pressure_drop), 4),
                fmt_sig(s.wall_shear_max, 3),
                s.shear_limit
                    .map(|l| fmt_sig(l, 3))
                    .unwrap_or_else(|| "—".into()),
                match s.shear_margin {
                    Some(m) if m < 1.0 => format!("{} OVER", fmt_sig(m, 3)),
                    Some(m) if m.is_finite() => fmt_sig(m, 3),
                    Some(_) => "no flow".into(),
                    None => "—".into(),
                },
                fmt_sig(s.reynolds, 3),
            ]
        })
        .collect();
    h.push_str("<h2>Channels</h2>\n<p>Flow positive from 'from' to 'to'.</p>\n");
    h.push_str(&table(
        &[
            "channel",
            "from",
            "to",
            "flow [µL/min]",
            "ΔP [mbar]",
            "τ max [Pa]",
            "limit [Pa]",
            "margin",
            "Re",
        ],
        &channels,
    ));
    h.push_str(&format!(
        "<p class=\"caution\">{}</p>\n",
        esc(super::CAUTION)
    ));
    if state.channels.iter().any(|s| s.shear_limit.is_some()) {
        h.push_str(&format!(
            "<p class=\"caution\">{}</p>\n",
            esc(super::text::SHEAR_CAUTION)
        ));
    }
    h.push_str("<p>Made by rillnet. Tables in SI: results.json, results.csv beside this page.</p>\n</body></html>\n");
    h
}
