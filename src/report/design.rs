//! Reports of the design commands: tuned settings, sized channels, sensitivities.

use super::csv::{n, num, Tables};
use super::fmt_sig;
use super::json::SCHEMA_VERSION;
use crate::analysis::design::{
    ActiveLimit, LimitHandling, LimitKind, Measure, NotControllable, ShearMeasure, SizeDim,
    SizeResult, TargetOutcome, TargetQuantity, Tolerance, TuneResult,
};
use crate::analysis::{Place, Severity};
use crate::chip::Chip;
use crate::network::{Network, NodeId, Port};
use crate::outcome::{Changed, SensitivityTable};
use crate::serpentine::{Serpentine, SerpentineError};
use crate::units::display;
use serde::Serialize;
use std::io;

fn value_text(network: &Network, node: usize, v: f64) -> String {
    match network.nodes[NodeId(node)].port {
        Port::Flow(_) => format!("{} µL/min", fmt_sig(display::ul_per_min(v), 6)),
        _ => format!("{} mbar", fmt_sig(display::mbar(v), 6)),
    }
}

fn outcome_value(o: &TargetOutcome, v: f64) -> String {
    match o.quantity {
        TargetQuantity::Flow => format!("{} µL/min", fmt_sig(display::ul_per_min(v), 6)),
        TargetQuantity::Pressure => format!("{} mbar", fmt_sig(display::mbar(v), 6)),
        TargetQuantity::WallShear(_) => format!("{} Pa", fmt_sig(v, 6)),
        TargetQuantity::Share => format!("{} share", fmt_sig(v, 6)),
        TargetQuantity::Concentration(m) => concentration_text(m, v, 6),
    }
}

/// A concentration in a unit fitting its size (SI mol/m³ = mM, kg/m³ = mg/mL, or a fraction).
fn concentration_text(m: Measure, v: f64, digits: usize) -> String {
    let ladder: &[(&str, f64)] = match m {
        Measure::Fraction => return format!("{} (fraction)", fmt_sig(v, digits)),
        Measure::Molar => &[
            ("M", 1e-3),
            ("mM", 1.0),
            ("µM", 1e3),
            ("nM", 1e6),
            ("pM", 1e9),
        ],
        Measure::Mass => &[("mg/mL", 1.0), ("µg/mL", 1e3), ("ng/mL", 1e6)],
    };
    let (unit, f) = ladder
        .iter()
        .copied()
        .find(|&(_, f)| v.abs() * f >= 1.0)
        .unwrap_or(ladder[ladder.len() - 1]);
    format!("{} {unit}", fmt_sig(v * f, digits))
}

fn tolerance_text(o: &TargetOutcome) -> String {
    match o.tolerance {
        Tolerance::Relative(t) => format!("{t:.0e} rel"),
        Tolerance::Absolute(a) => match o.quantity {
            TargetQuantity::Flow => format!("{} µL/min", fmt_sig(display::ul_per_min(a), 3)),
            TargetQuantity::Pressure => format!("{} mbar", fmt_sig(display::mbar(a), 3)),
            TargetQuantity::Concentration(m) => concentration_text(m, a, 3),
            _ => format!("{} Pa", fmt_sig(a, 3)),
        },
    }
}

/// Why a target is not controllable, in words.
fn control_text(reason: NotControllable) -> &'static str {
    match reason {
        NotControllable::NoResponse => "no adjustable port changes it",
        NotControllable::FixedShares => {
            "every adjustable port changes these flows in the same proportion, so the shares are fixed by the channels"
        }
    }
}

/// Machine name of a reason.
fn control_code(reason: NotControllable) -> &'static str {
    match reason {
        NotControllable::NoResponse => "no_response",
        NotControllable::FixedShares => "fixed_shares",
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
        let verdict = if !t.controllable && t.met {
            "  met (not controllable)"
        } else if !t.controllable {
            "  NOT MET, NOT CONTROLLABLE"
        } else if t.met {
            "  met"
        } else {
            "  NOT MET"
        };
        out.push_str(&format!(
            "  {:<w$}  wanted {:>22}  reached {:>22}  miss {:.1e} (tolerance {}){verdict}\n",
            t.what,
            outcome_value(t, t.wanted),
            outcome_value(t, t.reached),
            t.miss,
            tolerance_text(t),
        ));
        if let Some(reason) = t.not_controllable {
            out.push_str(&format!(
                "      not controllable: {}; left out of the problem (it does not move the settings)\n",
                control_text(reason)
            ));
        }
        if let (Some((lo, hi)), TargetQuantity::Concentration(m)) = (t.beyond_inlets, t.quantity) {
            out.push_str(&format!(
                "      unreachable: a well-mixed concentration is a flow-weighted mean of what the ports let in ({} to {}), whatever the drives\n",
                concentration_text(m, lo, 4),
                concentration_text(m, hi, 4)
            ));
        }
        if let Some(s) = t.snapping_miss {
            out.push_str(&format!(
                "      snapping to the fabrication steps alone causes a miss of {s:.1e}; judged against max(tolerance, that miss)\n"
            ));
        }
    }
}

fn quantity_code(q: TargetQuantity) -> &'static str {
    match q {
        TargetQuantity::Flow => "flow",
        TargetQuantity::Pressure => "pressure",
        TargetQuantity::Share => "split",
        TargetQuantity::WallShear(ShearMeasure::Max) => "wall_shear",
        TargetQuantity::WallShear(ShearMeasure::Mean) => "wall_shear_mean",
        TargetQuantity::Concentration(Measure::Molar) => "concentration_mol_per_m3",
        TargetQuantity::Concentration(Measure::Mass) => "concentration_kg_per_m3",
        TargetQuantity::Concentration(Measure::Fraction) => "concentration_fraction",
    }
}

#[derive(Serialize)]
struct JsonTarget<'a> {
    what: &'a str,
    kind: &'static str,
    wanted: f64,
    reached: f64,
    error: f64,
    relative_miss: f64,
    tolerance_relative: Option<f64>,
    tolerance_absolute: Option<f64>,
    met: bool,
    controllable: bool,
    not_controllable_reason: Option<&'static str>,
    snapping_miss: Option<f64>,
    /// A concentration target outside what the ports let in: [lowest, highest] (SI).
    #[serde(skip_serializing_if = "Option::is_none")]
    unreachable_beyond_inlet_range: Option<[f64; 2]>,
}

fn json_targets(t: &[TargetOutcome]) -> Vec<JsonTarget<'_>> {
    t.iter()
        .map(|t| JsonTarget {
            what: &t.what,
            kind: quantity_code(t.quantity),
            wanted: t.wanted,
            reached: t.reached,
            error: t.error,
            relative_miss: t.miss,
            tolerance_relative: match t.tolerance {
                Tolerance::Relative(v) => Some(v),
                Tolerance::Absolute(_) => None,
            },
            tolerance_absolute: match t.tolerance {
                Tolerance::Absolute(v) => Some(v),
                Tolerance::Relative(_) => None,
            },
            met: t.met,
            controllable: t.controllable,
            not_controllable_reason: t.not_controllable.map(control_code),
            snapping_miss: t.snapping_miss,
            unreachable_beyond_inlet_range: t.beyond_inlets.map(|(lo, hi)| [lo, hi]),
        })
        .collect()
}

/// Name of a channel, node or section.
fn place_name(network: &Network, place: Place) -> &str {
    match place {
        Place::Channel(c) => &network.channels[c].name,
        Place::Node(n) => &network.nodes[n].name,
        Place::Section(s) => &network.sections[s].name,
    }
}

/// Channels and nodes whose limits the changed chip exceeds.
fn exceeded(after: &Changed) -> Vec<&str> {
    let net = &after.chip.network;
    let mut out: Vec<&str> = Vec::new();
    for f in crate::analysis::findings(net, &after.state) {
        if f.severity == Severity::Exceeded {
            let name = place_name(net, f.kind.place());
            if !out.contains(&name) {
                out.push(name);
            }
        }
    }
    out
}

fn active_names(network: &Network, active: &[ActiveLimit]) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for a in active {
        let name = place_name(network, a.place).to_string();
        if !out.contains(&name) {
            out.push(name);
        }
    }
    out
}

fn limit_kind_code(k: LimitKind) -> &'static str {
    match k {
        LimitKind::WallShear => "wall_shear",
        LimitKind::PressureRating => "pressure_rating",
        LimitKind::Vacuum => "vacuum",
    }
}

#[derive(Serialize)]
struct JsonActiveLimit<'a> {
    place: &'a str,
    kind: &'static str,
    side: &'static str,
}

#[derive(Serialize)]
struct JsonFree<'a> {
    ports: Vec<&'a str>,
    targets: Vec<&'a str>,
    /// true: the targets cannot see the direction (least change from the file's settings);
    /// false: they barely see it (badly conditioned).
    free: bool,
    singular_value_ratio: f64,
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
    schema_version: u32,
    /// The tuned chip (the copy as written, read back) solved: the `solve` document.
    operating_point: super::json::JsonReport<'a>,
    /// Same as `all_targets_met` (kept for scripts written before it).
    feasible: bool,
    all_targets_met: bool,
    residual_norm: f64,
    settings: Vec<JsonSetting<'a>>,
    targets: Vec<JsonTarget<'a>>,
    /// "constrained", "ignored" (--ignore-limits) or "unattainable".
    limits: &'static str,
    /// Channel or node names whose limits the tuned settings sit on.
    active_limits: Vec<String>,
    active_limit_details: Vec<JsonActiveLimit<'a>>,
    /// Channel or node names whose limits the tuned chip exceeds.
    limits_exceeded: Vec<&'a str>,
    free_directions: Vec<JsonFree<'a>>,
    written_digits: Option<usize>,
}

fn bound_name(b: i8) -> Option<&'static str> {
    match b {
        -1 => Some("min"),
        1 => Some("max"),
        _ => None,
    }
}

fn handling_code(h: LimitHandling) -> &'static str {
    match h {
        LimitHandling::Constrained => "constrained",
        LimitHandling::Ignored => "ignored",
        LimitHandling::Unattainable => "unattainable",
    }
}

fn active_details<'a>(network: &'a Network, active: &[ActiveLimit]) -> Vec<JsonActiveLimit<'a>> {
    active
        .iter()
        .map(|a| JsonActiveLimit {
            place: place_name(network, a.place),
            kind: limit_kind_code(a.kind),
            side: if a.side < 0 { "lower" } else { "upper" },
        })
        .collect()
}

/// How limits entered a design answer, and the ones it sits on, in words (`what`: "settings"
/// or "sizes"; `free`: what to widen when they cannot hold).
fn limits_text(
    network: &Network,
    handling: LimitHandling,
    active: &[ActiveLimit],
    what: &str,
    free: &str,
    out: &mut String,
) {
    match handling {
        LimitHandling::Constrained if active.is_empty() => out.push_str(
            "Limits (wall shear, pressure rating, vacuum) were held as constraints; none is active.\n",
        ),
        LimitHandling::Constrained => {
            out.push_str(&format!("Limits held as constraints; the {what} sit on:\n"));
            const SHOWN: usize = 20;
            for a in active.iter().take(SHOWN) {
                out.push_str(&format!(
                    "  {} {}\n",
                    match a.kind {
                        LimitKind::WallShear => "wall-shear limit of channel",
                        LimitKind::PressureRating => "pressure rating at node",
                        LimitKind::Vacuum => "vacuum (−1 atm) at node",
                    },
                    place_name(network, a.place)
                ));
            }
            if active.len() > SHOWN {
                out.push_str(&format!(
                    "  … and {} more (all in the JSON output's active_limits)\n",
                    active.len() - SHOWN
                ));
            }
        }
        LimitHandling::Ignored => {
            out.push_str("Limits were left out of the problem (--ignore-limits).\n")
        }
        LimitHandling::Unattainable => out.push_str(&format!(
            "The limits cannot all hold within the bounds of the {free}: the {what} were \
             found without them (see the limits exceeded below).\n"
        )),
    }
}

/// Tuning report as JSON.
pub(crate) fn tune_json(
    chip: &Chip,
    r: &TuneResult,
    after: &Changed,
    w: &mut dyn io::Write,
) -> io::Result<()> {
    let network = &chip.network;
    let j = JsonTune {
        schema_version: SCHEMA_VERSION,
        operating_point: super::json::solve_report(&after.chip, &after.state),
        feasible: r.all_targets_met,
        all_targets_met: r.all_targets_met,
        residual_norm: r.residual_norm,
        settings: r
            .settings
            .iter()
            .map(|s| JsonSetting {
                node: &network.nodes[s.node].name,
                kind: if matches!(network.nodes[s.node].port, Port::Flow(_)) {
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
        limits: handling_code(r.limits),
        active_limits: active_names(network, &r.active_limits),
        active_limit_details: active_details(network, &r.active_limits),
        limits_exceeded: exceeded(after),
        free_directions: r
            .free_directions
            .iter()
            .map(|f| JsonFree {
                ports: f
                    .ports
                    .iter()
                    .map(|p| network.nodes[*p].name.as_str())
                    .collect(),
                targets: f
                    .targets
                    .iter()
                    .map(|t| r.targets[*t].what.as_str())
                    .collect(),
                free: f.free,
                singular_value_ratio: f.singular_value_ratio,
            })
            .collect(),
        written_digits: r.written_digits,
    };
    super::json::write_json(&j, w)
}

/// Tuning report as a table.
pub fn tune_report(chip: &Chip, r: &TuneResult) -> String {
    let network = &chip.network;
    let mut out = String::from("Drive settings (tuned within their bounds)\n");
    for s in &r.settings {
        out.push_str(&format!(
            "  {:<16} {:>22} → {:>22}   bounds [{}, {}]{}\n",
            network.nodes[s.node].name,
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
    limits_text(
        network,
        r.limits,
        &r.active_limits,
        "settings",
        "adjustable ports",
        &mut out,
    );
    for f in &r.free_directions {
        let ports: Vec<&str> = f
            .ports
            .iter()
            .map(|p| network.nodes[*p].name.as_str())
            .collect();
        let targets: Vec<&str> = f
            .targets
            .iter()
            .map(|t| r.targets[*t].what.as_str())
            .collect();
        let targets = if targets.is_empty() {
            "none".to_string()
        } else {
            targets.join(", ")
        };
        if f.free {
            out.push_str(&format!(
                "The targets ({targets}) cannot tell the ports {} apart in some direction: there the \
                 settings change least from the file's.\n",
                ports.join(", ")
            ));
        } else {
            out.push_str(&format!(
                "Badly conditioned: the targets ({targets}) barely tell the ports {} apart (singular \
                 value ratio {:.1e}); along that direction the settings follow small changes of the \
                 targets strongly.\n",
                ports.join(", "),
                f.singular_value_ratio
            ));
        }
    }
    if let Some(d) = r.written_digits {
        out.push_str(&format!(
            "Settings written with {d} significant digits; the targets above are those of the written copy.\n"
        ));
    }
    if r.all_targets_met {
        out.push_str("All targets are met within their tolerances.\n");
    } else {
        out.push_str(
            "NOT ALL TARGETS ARE MET: the settings above are the least-squares compromise (weighted) \
             within the bounds and limits; the misses show how close it gets. Widen a bound, change a \
             weight, or resize channels with 'rillnet size'.\n",
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
    /// The folded layout of a sized length longer than `--run` (null otherwise).
    serpentine: Option<JsonSerpentine>,
    /// Why a long sized length could not be folded with the requested run and pitch.
    serpentine_problem: Option<String>,
}

#[derive(Serialize)]
struct JsonSerpentine {
    runs: usize,
    run_length_m: f64,
    bends: usize,
    bend_radius_m: f64,
    centreline_length_m: f64,
    footprint_m: [f64; 2],
}

#[derive(Serialize)]
struct JsonSizing<'a> {
    schema_version: u32,
    /// The sized chip (the copy as written, read back) solved: the `solve` document.
    operating_point: super::json::JsonReport<'a>,
    /// Same as `all_targets_met` (kept for scripts written before it).
    feasible: bool,
    all_targets_met: bool,
    residual_norm: f64,
    iterations: usize,
    sizes: Vec<JsonSize<'a>>,
    targets: Vec<JsonTarget<'a>>,
    /// "constrained", "ignored" (--ignore-limits) or "unattainable".
    limits: &'static str,
    /// Channel or node names whose limits the sized chip sits on.
    active_limits: Vec<String>,
    active_limit_details: Vec<JsonActiveLimit<'a>>,
    /// Channel or node names whose limits the sized chip exceeds.
    limits_exceeded: Vec<&'a str>,
    written_digits: Option<usize>,
}

/// The serpentine of a sized length longer than `run` (folded at `pitch`, with the sized
/// chip's channel width); `None` when no folding is needed.
fn serp(
    r: &SizeResult,
    s: &crate::analysis::design::SizedDim,
    run: f64,
    pitch: f64,
) -> Option<Result<Serpentine, SerpentineError>> {
    if s.var.dim != SizeDim::Length || s.after <= run {
        return None;
    }
    let net = &r.network;
    let width = net.sections[net.channels[s.var.channel].section]
        .shape
        .overall_width();
    Some(crate::serpentine::layout(s.after, run, pitch, width))
}

/// Sizing report as JSON.
pub(crate) fn size_json(
    chip: &Chip,
    r: &SizeResult,
    run: f64,
    pitch: f64,
    after: &Changed,
    w: &mut dyn io::Write,
) -> io::Result<()> {
    let network = &chip.network;
    let j = JsonSizing {
        schema_version: SCHEMA_VERSION,
        operating_point: super::json::solve_report(&after.chip, &after.state),
        feasible: r.all_targets_met,
        all_targets_met: r.all_targets_met,
        residual_norm: r.residual_norm,
        iterations: r.iterations,
        limits: handling_code(r.limits),
        active_limits: active_names(network, &r.active_limits),
        active_limit_details: active_details(network, &r.active_limits),
        limits_exceeded: exceeded(after),
        written_digits: r.written_digits,
        sizes: r
            .sizes
            .iter()
            .map(|s| JsonSize {
                channel: &network.channels[s.var.channel].name,
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
                serpentine: serp(r, s, run, pitch)
                    .and_then(Result::ok)
                    .map(|x| JsonSerpentine {
                        runs: x.runs,
                        run_length_m: x.run_length,
                        bends: x.bends,
                        bend_radius_m: x.bend_radius,
                        centreline_length_m: x.centreline_length,
                        footprint_m: x.footprint,
                    }),
                serpentine_problem: serp(r, s, run, pitch)
                    .and_then(Result::err)
                    .map(|e| e.to_string()),
            })
            .collect(),
        targets: json_targets(&r.targets),
    };
    super::json::write_json(&j, w)
}

/// Sizing report as a table; lengths longer than `run` get a serpentine layout with
/// centre-line `pitch`.
pub fn size_report(chip: &Chip, r: &SizeResult, run: f64, pitch: f64) -> String {
    let network = &chip.network;
    let mut out = format!("Channel sizes ({} Gauss–Newton iterations)\n", r.iterations);
    for s in &r.sizes {
        let (dim, unit, k) = match s.var.dim {
            SizeDim::Length => ("length", "mm", 1e3),
            SizeDim::Width => ("width", "µm", 1e6),
        };
        out.push_str(&format!(
            "  {:<16} {:<6} {:>12} {unit} → {:>12} {unit}   bounds [{}, {}] {unit}{}\n",
            network.channels[s.var.channel].name,
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
        match serp(r, s, run, pitch) {
            Some(Ok(x)) => out.push_str(&format!(
                "      serpentine: {} runs of {} mm joined by {} U-turn{} of {} µm centreline radius \
                 (pitch {} µm); centreline {} mm; footprint {} × {} mm (walls included)\n",
                x.runs,
                fmt_sig(x.run_length * 1e3, 6),
                x.bends,
                if x.bends == 1 { "" } else { "s" },
                fmt_sig(x.bend_radius * 1e6, 4),
                fmt_sig(pitch * 1e6, 4),
                fmt_sig(x.centreline_length * 1e3, 6),
                fmt_sig(x.footprint[0] * 1e3, 4),
                fmt_sig(x.footprint[1] * 1e3, 4)
            )),
            Some(Err(e)) => out.push_str(&format!("      serpentine: {e}\n")),
            None => {}
        }
    }
    targets_text(&r.targets, &mut out);
    out.push_str(&format!(
        "\nWeighted residual norm: {:.3e}\n",
        r.residual_norm
    ));
    limits_text(
        network,
        r.limits,
        &r.active_limits,
        "sizes",
        "sized dimensions",
        &mut out,
    );
    if let Some(d) = r.written_digits {
        out.push_str(&format!(
            "Sizes without a fabrication step written with {d} significant digits; the targets above are \
             those of the written copy.\n"
        ));
    }
    out.push_str(if r.all_targets_met {
        "All targets are met within their tolerances.\n"
    } else {
        "NOT ALL TARGETS ARE MET within the bounds (and fabrication steps): the sizes above are the \
         least-squares compromise.\n"
    });
    out
}

/// Sensitivities as a CSV table.
pub(crate) fn sensitivity_csv(
    network: &Network,
    t: &SensitivityTable,
    tables: &mut Tables<'_>,
) -> io::Result<()> {
    tables.table(
        &[
            "record",
            "target_channel",
            "channel",
            "d_flow_d_width_m3_per_s_per_m",
            "d_flow_d_height_m3_per_s_per_m",
            "d_flow_d_length_m3_per_s_per_m",
            "relative_width",
            "relative_height",
            "relative_length",
        ],
        t.rows.iter().map(|x| {
            vec![
                "sensitivity".into(),
                network.channels[x.target_channel].name.clone(),
                network.channels[x.channel].name.clone(),
                num(x.d_width),
                num(x.d_height),
                n(x.d_length),
                num(x.rel_width),
                num(x.rel_height),
                num(x.rel_length),
            ]
        }),
    )
}

/// Sensitivity table: µL/min per µm or mm, and relative (%/%).
pub fn sensitivity_report(network: &Network, t: &SensitivityTable) -> String {
    let mut out = String::from(
        "\nSensitivities: change of each target channel's flow per change of a channel dimension\n\
           (µL/min per µm of width or height, per mm of length, and relative: % of the flow per % of the dimension;\n\
           — where the section has no such closed-form dimension)\n",
    );
    if let Some(k) = t.kept_per_target {
        out.push_str(&format!(
            "  (summary: the {k} largest per target channel by relative length sensitivity; \
             name fewer channels with --channels for the full table)\n"
        ));
    }
    let per_um = |v: Option<f64>| {
        v.map(|d| fmt_sig(display::ul_per_min(d) * 1e-6, 4))
            .unwrap_or_else(|| "—".into())
    };
    let rel = |v: Option<f64>| v.map(|d| fmt_sig(d, 3)).unwrap_or_else(|| "—".into());
    out.push_str(&format!(
        "  {:<14} {:<14} {:>12} {:>12} {:>12} {:>9} {:>9} {:>9}\n",
        "flow in",
        "dimension of",
        "d/d width",
        "d/d height",
        "d/d length",
        "rel w",
        "rel h",
        "rel L"
    ));
    for x in &t.rows {
        out.push_str(&format!(
            "  {:<14} {:<14} {:>12} {:>12} {:>12} {:>9} {:>9} {:>9}\n",
            network.channels[x.target_channel].name,
            network.channels[x.channel].name,
            per_um(x.d_width),
            per_um(x.d_height),
            fmt_sig(display::ul_per_min(x.d_length) * 1e-3, 4),
            rel(x.rel_width),
            rel(x.rel_height),
            rel(x.rel_length),
        ));
    }
    out
}

fn bound_text(b: i8) -> String {
    bound_name(b).unwrap_or("").to_string()
}

/// Tuning as CSV: a `setting` table and a `target` table.
pub(crate) fn tune_csv(chip: &Chip, r: &TuneResult, tables: &mut Tables<'_>) -> io::Result<()> {
    let network = &chip.network;
    tables.table(
        &[
            "record",
            "node",
            "kind",
            "before_si",
            "after_si",
            "min_si",
            "max_si",
            "at_bound",
        ],
        r.settings.iter().map(|s| {
            let node = &network.nodes[s.node];
            vec![
                "setting".into(),
                node.name.clone(),
                super::role(node.port).into(),
                n(s.before),
                n(s.after),
                n(s.min),
                n(s.max),
                bound_text(s.at_bound),
            ]
        }),
    )?;
    targets_csv(&r.targets, tables)
}

/// Sizing as CSV: a `size` table and a `target` table.
pub(crate) fn size_csv(
    chip: &Chip,
    r: &SizeResult,
    run: f64,
    pitch: f64,
    tables: &mut Tables<'_>,
) -> io::Result<()> {
    let network = &chip.network;
    tables.table(
        &[
            "record",
            "channel",
            "dimension",
            "before_m",
            "after_m",
            "min_m",
            "max_m",
            "step_m",
            "at_bound",
            "serpentine_runs",
            "serpentine_run_length_m",
            "serpentine_footprint_x_m",
            "serpentine_footprint_y_m",
        ],
        r.sizes.iter().map(|s| {
            let folded = serp(r, s, run, pitch).and_then(Result::ok);
            vec![
                "size".into(),
                network.channels[s.var.channel].name.clone(),
                match s.var.dim {
                    SizeDim::Length => "length".into(),
                    SizeDim::Width => "width".into(),
                },
                n(s.before),
                n(s.after),
                n(s.var.min),
                n(s.var.max),
                num(s.var.step),
                bound_text(s.at_bound),
                folded
                    .as_ref()
                    .map(|x| x.runs.to_string())
                    .unwrap_or_default(),
                num(folded.as_ref().map(|x| x.run_length)),
                num(folded.as_ref().map(|x| x.footprint[0])),
                num(folded.as_ref().map(|x| x.footprint[1])),
            ]
        }),
    )?;
    targets_csv(&r.targets, tables)
}

fn targets_csv(targets: &[TargetOutcome], tables: &mut Tables<'_>) -> io::Result<()> {
    tables.table(
        &[
            "record",
            "what",
            "wanted",
            "reached",
            "relative_miss",
            "met",
            "controllable",
        ],
        targets.iter().map(|t| {
            vec![
                "target".into(),
                t.what.clone(),
                n(t.wanted),
                n(t.reached),
                n(t.miss),
                t.met.to_string(),
                t.controllable.to_string(),
            ]
        }),
    )
}
