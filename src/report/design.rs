//! Reports of the design commands: tuned settings, sized channels, sensitivities.

use super::fmt_sig;
use crate::analysis::design::{Sensitivity, SizeDim, SizeResult, TargetOutcome, TuneResult};
use crate::network::{Network, Port};
use crate::units::display;
use serde::Serialize;

fn value_text(network: &Network, node: usize, v: f64) -> String {
    match network.nodes[node].port {
        Port::Flow(_) => format!("{} µL/min", fmt_sig(display::ul_per_min(v), 6)),
        _ => format!("{} mbar", fmt_sig(display::mbar(v), 6)),
    }
}

fn outcome_value(o: &TargetOutcome, v: f64) -> String {
    if o.what.starts_with("flow") {
        format!("{} µL/min", fmt_sig(display::ul_per_min(v), 6))
    } else if o.what.starts_with("pressure") {
        format!("{} mbar", fmt_sig(display::mbar(v), 6))
    } else {
        format!("{} share", fmt_sig(v, 6))
    }
}

fn targets_text(targets: &[TargetOutcome], out: &mut String) {
    out.push_str("\nTargets\n");
    let w = targets
        .iter()
        .map(|t| t.what.chars().count())
        .max()
        .unwrap_or(6);
    for t in targets {
        out.push_str(&format!(
            "  {:<w$}  wanted {:>22}  reached {:>22}  miss {:.1e}{}\n",
            t.what,
            outcome_value(t, t.wanted),
            outcome_value(t, t.reached),
            t.miss,
            if t.miss <= crate::analysis::design::MET {
                ""
            } else {
                "  NOT MET"
            }
        ));
    }
}

#[derive(Serialize)]
struct JsonTarget<'a> {
    what: &'a str,
    wanted: f64,
    reached: f64,
    relative_miss: f64,
    met: bool,
}

fn json_targets(t: &[TargetOutcome]) -> Vec<JsonTarget<'_>> {
    t.iter()
        .map(|t| JsonTarget {
            what: &t.what,
            wanted: t.wanted,
            reached: t.reached,
            relative_miss: t.miss,
            met: t.miss <= crate::analysis::design::MET,
        })
        .collect()
}

#[derive(Serialize)]
struct JsonSetting<'a> {
    node: &'a str,
    kind: &'static str,
    before_si: f64,
    after_si: f64,
    min_si: f64,
    max_si: f64,
    at_bound: Option<&'static str>,
}

#[derive(Serialize)]
struct JsonTune<'a> {
    feasible: bool,
    residual_norm: f64,
    settings: Vec<JsonSetting<'a>>,
    targets: Vec<JsonTarget<'a>>,
}

fn bound_name(b: i8) -> Option<&'static str> {
    match b {
        -1 => Some("min"),
        1 => Some("max"),
        _ => None,
    }
}

/// Tuning report.
pub fn tune_report(network: &Network, r: &TuneResult, json: bool) -> String {
    if json {
        let j = JsonTune {
            feasible: r.feasible,
            residual_norm: r.residual_norm,
            settings: r
                .settings
                .iter()
                .map(|s| JsonSetting {
                    node: &network.nodes[s.node.0].name,
                    kind: if matches!(network.nodes[s.node.0].port, Port::Flow(_)) {
                        "flow"
                    } else {
                        "pressure"
                    },
                    before_si: s.before,
                    after_si: s.after,
                    min_si: s.min,
                    max_si: s.max,
                    at_bound: bound_name(s.at_bound),
                })
                .collect(),
            targets: json_targets(&r.targets),
        };
        return serde_json::to_string_pretty(&j).unwrap_or_default() + "\n";
    }
    let mut out = String::from("Drive settings (tuned within their bounds)\n");
    for s in &r.settings {
        out.push_str(&format!(
            "  {:<16} {:>22} → {:>22}   bounds [{}, {}]{}\n",
            network.nodes[s.node.0].name,
            value_text(network, s.node.0, s.before),
            value_text(network, s.node.0, s.after),
            value_text(network, s.node.0, s.min),
            value_text(network, s.node.0, s.max),
            match s.at_bound {
                -1 => "  AT MIN",
                1 => "  AT MAX",
                _ => "",
            }
        ));
    }
    targets_text(&r.targets, &mut out);
    out.push_str(&format!(
        "\nWeighted residual norm: {:.3e}\n",
        r.residual_norm
    ));
    if r.feasible {
        out.push_str("All targets are met (to 1e-9 relative).\n");
    } else {
        out.push_str(
            "The targets cannot all be met within the bounds: the settings above are the least-squares \
             compromise (weighted); the misses show how close it gets. Widen a bound, change a weight, \
             or resize channels with 'rillnet size'.\n",
        );
    }
    out
}

#[derive(Serialize)]
struct JsonSize<'a> {
    channel: &'a str,
    dimension: &'static str,
    before_m: f64,
    after_m: f64,
    min_m: f64,
    max_m: f64,
    step_m: Option<f64>,
    at_bound: Option<&'static str>,
    serpentine_runs: Option<usize>,
}

#[derive(Serialize)]
struct JsonSizing<'a> {
    feasible: bool,
    residual_norm: f64,
    iterations: usize,
    sizes: Vec<JsonSize<'a>>,
    targets: Vec<JsonTarget<'a>>,
}

/// Sizing report; lengths longer than `run` get a serpentine layout with centre-line `pitch`.
pub fn size_report(network: &Network, r: &SizeResult, run: f64, pitch: f64, json: bool) -> String {
    let serp = |s: &crate::analysis::design::SizedDim| {
        (s.var.dim == SizeDim::Length && s.after > run)
            .then(|| crate::analysis::design::serpentine(s.after, run, pitch))
    };
    if json {
        let j = JsonSizing {
            feasible: r.feasible,
            residual_norm: r.residual_norm,
            iterations: r.iterations,
            sizes: r
                .sizes
                .iter()
                .map(|s| JsonSize {
                    channel: &network.channels[s.var.channel.0].name,
                    dimension: if s.var.dim == SizeDim::Length {
                        "length"
                    } else {
                        "width"
                    },
                    before_m: s.before,
                    after_m: s.after,
                    min_m: s.var.min,
                    max_m: s.var.max,
                    step_m: s.var.step,
                    at_bound: bound_name(s.at_bound),
                    serpentine_runs: serp(s).map(|x| x.runs),
                })
                .collect(),
            targets: json_targets(&r.targets),
        };
        return serde_json::to_string_pretty(&j).unwrap_or_default() + "\n";
    }
    let mut out = format!("Channel sizes ({} Gauss–Newton iterations)\n", r.iterations);
    for s in &r.sizes {
        let (dim, unit, k) = match s.var.dim {
            SizeDim::Length => ("length", "mm", 1e3),
            SizeDim::Width => ("width", "µm", 1e6),
        };
        out.push_str(&format!(
            "  {:<16} {:<6} {:>12} {unit} → {:>12} {unit}   bounds [{}, {}] {unit}{}\n",
            network.channels[s.var.channel.0].name,
            dim,
            fmt_sig(s.before * k, 6),
            fmt_sig(s.after * k, 6),
            fmt_sig(s.var.min * k, 4),
            fmt_sig(s.var.max * k, 4),
            match s.at_bound {
                -1 => "  AT MIN",
                1 => "  AT MAX",
                _ => "",
            }
        ));
        if let Some(x) = serp(s) {
            out.push_str(&format!(
                "      serpentine: {} straight runs of {} mm with {} U-turns at {} µm pitch, footprint {} × {} mm\n",
                x.runs,
                fmt_sig(run * 1e3, 3),
                x.turns,
                fmt_sig(pitch * 1e6, 3),
                fmt_sig(x.footprint[0] * 1e3, 3),
                fmt_sig(x.footprint[1] * 1e3, 3)
            ));
        }
    }
    targets_text(&r.targets, &mut out);
    out.push_str(&format!(
        "\nWeighted residual norm: {:.3e}\n",
        r.residual_norm
    ));
    out.push_str(if r.feasible {
        "All targets are met (to 1e-9 relative).\n"
    } else {
        "The targets cannot all be met within the bounds (and fabrication steps): the sizes above are the \
         least-squares compromise.\n"
    });
    out
}

#[derive(Serialize)]
struct JsonSens<'a> {
    target_channel: &'a str,
    channel: &'a str,
    d_flow_d_width_m3_per_s_per_m: Option<f64>,
    d_flow_d_height_m3_per_s_per_m: Option<f64>,
    d_flow_d_length_m3_per_s_per_m: f64,
}

/// Sensitivity table (µL/min per µm, per mm) or JSON (SI).
pub fn sensitivity_report(network: &Network, s: &[Sensitivity], json: bool) -> String {
    if json {
        let j: Vec<JsonSens> = s
            .iter()
            .map(|x| JsonSens {
                target_channel: &network.channels[x.target_channel.0].name,
                channel: &network.channels[x.channel.0].name,
                d_flow_d_width_m3_per_s_per_m: x.d_width,
                d_flow_d_height_m3_per_s_per_m: x.d_height,
                d_flow_d_length_m3_per_s_per_m: x.d_length,
            })
            .collect();
        return serde_json::to_string_pretty(&j).unwrap_or_default() + "\n";
    }
    let mut out = String::from(
        "\nSensitivities: change of each target channel's flow per change of a channel dimension\n\
           (µL/min per µm of width or height, per mm of length; — where the section has no such closed-form dimension)\n",
    );
    let per_um = |v: Option<f64>| {
        v.map(|d| fmt_sig(d * 6.0e10 * 1e-6, 4))
            .unwrap_or_else(|| "—".into())
    };
    out.push_str(&format!(
        "  {:<14} {:<14} {:>14} {:>14} {:>14}\n",
        "flow in", "dimension of", "d/d width", "d/d height", "d/d length"
    ));
    for x in s {
        out.push_str(&format!(
            "  {:<14} {:<14} {:>14} {:>14} {:>14}\n",
            network.channels[x.target_channel.0].name,
            network.channels[x.channel.0].name,
            per_um(x.d_width),
            per_um(x.d_height),
            fmt_sig(x.d_length * 6.0e10 * 1e-3, 4)
        ));
    }
    out
}
