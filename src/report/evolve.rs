//! `evolve` results: events and delivered volumes as a table; the series as JSON and CSV
//! (SI, unit in every key: `times_s`, `flow_m3_per_s`, `level_m`).

use super::csv::Tables;
use super::fmt_sig;
use super::json::write_json;
use crate::analysis::transient::cycles::CycleStats;
use crate::analysis::transient::events::{Event, EventKind};
use crate::outcome::EvolveOutcome;
use serde::Serialize;
use std::io::{self, Write};

fn kind(k: EventKind) -> String {
    match k {
        EventKind::Settled(p) => format!("settled_{p}"),
        EventKind::Dry => "dry".into(),
        EventKind::Refilled => "refilled".into(),
        EventKind::DryStop => "dry_stop".into(),
        EventKind::LevelsEqual => "levels_equal".into(),
    }
}

fn words(e: &Event) -> String {
    match e.kind {
        EventKind::Settled(p) => format!("flow in '{}' covers {p} % of its change", e.subject),
        EventKind::Dry => format!(
            "well '{}' runs dry: its port carries no more flow (its node joins its channels \
             as a plain junction); the run goes on",
            e.subject
        ),
        EventKind::Refilled => format!(
            "well '{}' takes liquid in again (pushed back from its channels)",
            e.subject
        ),
        EventKind::DryStop => format!(
            "well '{}' runs dry and leaves part of the chip with nothing to set its pressures \
             (no pressure port, no storage): the run stops here",
            e.subject
        ),
        EventKind::LevelsEqual => format!(
            "levels of {} within 1 % of their initial difference",
            e.subject.replace('=', " and ")
        ),
    }
}

/// The terminal report: the run, events in time order, volumes delivered, final levels.
pub fn evolve_table(o: &EvolveOutcome, w: &mut dyn Write) -> io::Result<()> {
    let ev = &o.evolution;
    let end = ev.times.last().copied().unwrap_or(0.0);
    writeln!(
        w,
        "Evolution over {} s: {} outputs, {} steps ({} rejected), {} factorisations",
        fmt_sig(end, 4),
        ev.times.len(),
        ev.steps,
        ev.rejected,
        ev.factorizations
    )?;
    writeln!(
        w,
        "(pressures are piezometric, P = p + rho*g*z from the datum; levels above the datum)\n"
    )?;
    writeln!(w, "{:>12}  event", "time [s]")?;
    for e in &o.events {
        writeln!(w, "{:>12}  {}", fmt_sig(e.time, 5), words(e))?;
    }
    if o.events.is_empty() {
        writeln!(w, "{:>12}  (no events)", "")?;
    }
    writeln!(w, "\n{:<20} {:>18}", "port", "delivered [uL]")?;
    for (node, v) in &o.delivered {
        let name = &o.chip.network.nodes[*node].name;
        writeln!(w, "{:<20} {:>18}", name, fmt_sig(v * 1e9, 5))?;
    }
    if !ev.levels.is_empty() {
        writeln!(
            w,
            "\n{:<20} {:>14} {:>14}",
            "well", "start [mm]", "end [mm]"
        )?;
        for (node, l) in &ev.levels {
            let name = &o.chip.network.nodes[*node].name;
            let first = l.first().copied().unwrap_or(0.0) * 1e3;
            let last = l.last().copied().unwrap_or(0.0) * 1e3;
            writeln!(
                w,
                "{:<20} {:>14} {:>14}",
                name,
                fmt_sig(first, 5),
                fmt_sig(last, 5)
            )?;
        }
    }
    if let Some(c) = &ev.cycles {
        cycle_table(o, c, w)?;
    }
    writeln!(w, "\n{}", super::CAUTION)
}

/// Per tilt cycle: the last complete cycle's mean flow and wall shear per channel.
fn cycle_table(o: &EvolveOutcome, c: &CycleStats, w: &mut dyn Write) -> io::Result<()> {
    let Some(last) = &c.last else {
        return writeln!(
            w,
            "\n(no complete tilt cycle of {} s in the run)",
            fmt_sig(c.period, 4)
        );
    };
    writeln!(
        w,
        "\nPer tilt cycle ({} complete cycles of {} s; the last, from {} s):",
        c.mean_flows.len(),
        fmt_sig(c.period, 4),
        fmt_sig(last.start, 5)
    )?;
    writeln!(
        w,
        "{:<20} {:>18} {:>13} {:>15} {:>14}",
        "channel", "mean flow [uL/min]", "mean tau [Pa]", "mean |tau| [Pa]", "max tau [Pa]"
    )?;
    let means = c.mean_flows.last().map(Vec::as_slice).unwrap_or(&[]);
    for (k, ch) in o.chip.network.channels.iter().enumerate() {
        writeln!(
            w,
            "{:<20} {:>18} {:>13} {:>15} {:>14}",
            ch.name,
            fmt_sig(means.get(k).copied().unwrap_or(0.0) * 6e10 + 0.0, 5),
            fmt_sig(last.mean_wall_shear[k] + 0.0, 4),
            fmt_sig(last.mean_abs_wall_shear[k], 4),
            fmt_sig(last.max_wall_shear[k], 4)
        )?;
    }
    writeln!(
        w,
        "(tau: wall shear averaged over the perimeter, time-averaged over the cycle; max tau: \
         the largest on the perimeter during the cycle)"
    )
}

#[derive(Serialize)]
struct JsonChannel<'a> {
    name: &'a str,
    flow_m3_per_s: Vec<f64>,
}

#[derive(Serialize)]
struct JsonWell<'a> {
    name: &'a str,
    level_m: &'a [f64],
}

#[derive(Serialize)]
struct JsonEvent<'a> {
    kind: String,
    subject: &'a str,
    time_s: f64,
}

#[derive(Serialize)]
struct JsonDelivered<'a> {
    name: &'a str,
    volume_m3: f64,
}

#[derive(Serialize)]
struct JsonCycleChannel<'a> {
    name: &'a str,
    /// Mean flow over each complete cycle.
    mean_flow_m3_per_s: Vec<f64>,
    mean_wall_shear_pa: f64,
    mean_abs_wall_shear_pa: f64,
    max_wall_shear_pa: f64,
}

#[derive(Serialize)]
struct JsonCycles<'a> {
    period_s: f64,
    complete_cycles: usize,
    /// Start of the last complete cycle (the wall-shear figures are over it).
    last_cycle_start_s: Option<f64>,
    channels: Vec<JsonCycleChannel<'a>>,
}

fn json_cycles<'a>(o: &'a EvolveOutcome, c: &CycleStats) -> JsonCycles<'a> {
    let pick = |v: Option<&Vec<f64>>, k: usize| v.and_then(|v| v.get(k)).map_or(0.0, |x| x + 0.0);
    let last = c.last.as_ref();
    JsonCycles {
        period_s: c.period,
        complete_cycles: c.mean_flows.len(),
        last_cycle_start_s: last.map(|l| l.start),
        channels: (o.chip.network.channels.iter().enumerate())
            .map(|(k, ch)| JsonCycleChannel {
                name: &ch.name,
                mean_flow_m3_per_s: c.mean_flows.iter().map(|m| m[k] + 0.0).collect(),
                mean_wall_shear_pa: pick(last.map(|l| &l.mean_wall_shear), k),
                mean_abs_wall_shear_pa: pick(last.map(|l| &l.mean_abs_wall_shear), k),
                max_wall_shear_pa: pick(last.map(|l| &l.max_wall_shear), k),
            })
            .collect(),
    }
}

#[derive(Serialize)]
struct JsonEvolution<'a> {
    schema_version: u32,
    command: &'static str,
    stopped_dry: bool,
    times_s: &'a [f64],
    channels: Vec<JsonChannel<'a>>,
    reservoirs: Vec<JsonWell<'a>>,
    events: Vec<JsonEvent<'a>>,
    delivered: Vec<JsonDelivered<'a>>,
    /// With a rocking platform only.
    #[serde(skip_serializing_if = "Option::is_none")]
    cycles: Option<JsonCycles<'a>>,
}

/// The JSON document: series at every output instant, events, delivered volumes.
pub fn evolve_json(o: &EvolveOutcome, w: &mut dyn Write) -> io::Result<()> {
    let net = &o.chip.network;
    let ev = &o.evolution;
    let doc = JsonEvolution {
        schema_version: super::SCHEMA_VERSION,
        command: "evolve",
        stopped_dry: o.stopped_dry,
        times_s: &ev.times,
        channels: net
            .channels
            .iter()
            .enumerate()
            .map(|(c, ch)| JsonChannel {
                name: &ch.name,
                flow_m3_per_s: ev.flows.iter().map(|f| f[c] + 0.0).collect(),
            })
            .collect(),
        reservoirs: ev
            .levels
            .iter()
            .map(|(n, l)| JsonWell {
                name: &net.nodes[*n].name,
                level_m: l,
            })
            .collect(),
        events: o
            .events
            .iter()
            .map(|e| JsonEvent {
                kind: kind(e.kind),
                subject: &e.subject,
                time_s: e.time,
            })
            .collect(),
        delivered: o
            .delivered
            .iter()
            .map(|(n, v)| JsonDelivered {
                name: &net.nodes[*n].name,
                volume_m3: *v,
            })
            .collect(),
        cycles: ev.cycles.as_ref().map(|c| json_cycles(o, c)),
    };
    write_json(&doc, w)
}

/// CSV: one series table (time, every channel's flow, every well's level), then events.
pub fn evolve_csv(o: &EvolveOutcome, t: &mut Tables<'_>) -> io::Result<()> {
    let net = &o.chip.network;
    let ev = &o.evolution;
    let mut header: Vec<String> = vec!["record".into(), "time_s".into()];
    header.extend(
        net.channels
            .iter()
            .map(|c| format!("{}_flow_m3_per_s", c.name)),
    );
    header.extend(
        ev.levels
            .iter()
            .map(|(n, _)| format!("{}_level_m", net.nodes[*n].name)),
    );
    let header_refs: Vec<&str> = header.iter().map(String::as_str).collect();
    let rows = ev.times.iter().enumerate().map(|(k, time)| {
        let mut row = vec!["sample".to_string(), format!("{time:e}")];
        row.extend(ev.flows[k].iter().map(|q| format!("{:e}", q + 0.0)));
        row.extend(ev.levels.iter().map(|(_, l)| format!("{:e}", l[k])));
        row
    });
    t.table(&header_refs, rows)?;
    let events = o.events.iter().map(|e| {
        vec![
            "event".to_string(),
            kind(e.kind),
            e.subject.clone(),
            format!("{:e}", e.time),
        ]
    });
    t.table(&["record", "kind", "subject", "time_s"], events)?;
    if let Some(c) = &ev.cycles {
        let doc = json_cycles(o, c);
        let rows = doc.channels.iter().map(|ch| {
            vec![
                "cycle".to_string(),
                ch.name.to_string(),
                format!("{:e}", ch.mean_flow_m3_per_s.last().copied().unwrap_or(0.0)),
                format!("{:e}", ch.mean_wall_shear_pa),
                format!("{:e}", ch.mean_abs_wall_shear_pa),
                format!("{:e}", ch.max_wall_shear_pa),
            ]
        });
        t.table(
            &[
                "record",
                "channel",
                "last_cycle_mean_flow_m3_per_s",
                "mean_wall_shear_pa",
                "mean_abs_wall_shear_pa",
                "max_wall_shear_pa",
            ],
            rows,
        )?;
    }
    Ok(())
}
