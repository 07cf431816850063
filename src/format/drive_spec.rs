//! Port settings that follow time: `ramp:` (from the port's setting to another value over an
//! interval) and `schedule:` (a CSV file of time, value rows), both read into
//! [`crate::chip::drives::Profile`].
//!
//! ```yaml
//! nodes:
//!   feed: {pressure: 0 mbar, ramp: {to: 80 mbar, start: 30 s, over: 2 min}}
//!   pump: {flow: 0 uL/min, schedule: pump_program.csv}
//! ```
//!
//! A schedule file has a header naming its two columns, with units in brackets, and one row
//! per corner of the program (the setting is linear between rows, held before the first and
//! after the last):
//!
//! ```text
//! time [min], flow [uL/min]
//! 0, 0
//! 1, 5
//! 10, 5
//! ```
//!
//! A value may carry its own unit (`90 s`, `2.5 uL/min`) instead; `#` starts a comment line.

use super::{at, FileReader, Misplaced};
use crate::chip::drives::Profile;
use crate::network::{Network, NodeId, Port};
use crate::units::{parse_si, Dimension, Duration};
use serde::Deserialize;

/// `nodes.NAME.ramp:` — the setting goes linearly from the file's value to `to`, from `start`
/// (default 0) over `over`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RampSpec {
    /// The value reached at the end (a pressure for a pressure port, a flow for a flow port).
    pub to: String,
    #[serde(default)]
    pub start: Option<super::Q<Duration>>,
    pub over: super::Q<Duration>,
}

/// The dimension and setting of the port at `node`, or why it cannot follow a profile.
fn port_setting(
    network: &Network,
    node: NodeId,
    path: &[&str],
) -> Result<(Dimension, f64), Misplaced> {
    let n = &network.nodes[node];
    if let Some(crate::network::Storage::Well(_)) = n.storage {
        return Err(at(
            path,
            "a well's level follows from its flows; give the ramp or schedule to a pressure \
             or flow port",
        ));
    }
    match n.port {
        Port::Pressure(p) => Ok((Dimension::Pressure, p.si())),
        Port::Flow(q) => Ok((Dimension::VolumeFlow, q.si())),
        Port::Junction => Err(at(
            path,
            "only a port (pressure or flow) can follow a ramp or a schedule",
        )),
    }
}

/// A ramp as a two-point profile.
pub(crate) fn ramp(
    network: &Network,
    node: NodeId,
    name: &str,
    spec: &RampSpec,
) -> Result<Profile, Misplaced> {
    let path = ["nodes", name, "ramp"];
    let (dim, from) = port_setting(network, node, &path)?;
    let to =
        parse_si(&spec.to, dim).map_err(|e| at(&["nodes", name, "ramp", "to"], e.to_string()))?;
    let start = spec.start.map_or(0.0, |s| s.0.si());
    let over = spec.over.0.si();
    if !(start.is_finite() && start >= 0.0) {
        return Err(at(
            &["nodes", name, "ramp", "start"],
            "must be a time from 0 on",
        ));
    }
    if !(over.is_finite() && over > 0.0) {
        return Err(at(
            &["nodes", name, "ramp", "over"],
            "must be a positive duration, e.g. '30 s'",
        ));
    }
    Ok(Profile {
        node,
        points: vec![(start, from), (start + over, to)],
    })
}

/// A schedule read from the CSV file `file` (found beside the chip file).
pub(crate) fn schedule(
    network: &Network,
    node: NodeId,
    name: &str,
    file: &str,
    read: FileReader<'_>,
) -> Result<Profile, Misplaced> {
    let path = ["nodes", name, "schedule"];
    let (dim, _) = port_setting(network, node, &path)?;
    let text = read(file).map_err(|e| at(&path, format!("cannot read schedule '{file}': {e}")))?;
    let points = parse_schedule(&text, dim).map_err(|e| at(&path, format!("'{file}' {e}")))?;
    Ok(Profile { node, points })
}

/// The unit written in a header cell: `time [min]`, `flow (uL/min)`, or none.
fn header_unit(cell: &str) -> Option<&str> {
    let open = cell.find(['[', '('])?;
    let close = cell.rfind([']', ')'])?;
    (close > open + 1).then(|| cell[open + 1..close].trim())
}

/// Rows of a schedule: (time [s], value [SI]); times strictly increasing, at least one row.
/// Errors start with "line N:" (1-based, in the file).
pub fn parse_schedule(text: &str, dim: Dimension) -> Result<Vec<(f64, f64)>, String> {
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let split = |l: &str| -> Vec<String> {
        let sep = if l.contains(';') {
            ';'
        } else if l.contains('\t') {
            '\t'
        } else {
            ','
        };
        l.split(sep).map(|c| c.trim().to_string()).collect()
    };
    let Some((hl, header)) = lines.next() else {
        return Err(
            "is empty: expected a header such as 'time [s], pressure [mbar]' and rows".into(),
        );
    };
    let head = split(header);
    if head.len() != 2 {
        return Err(format!(
            "line {hl}: expected a header of two columns such as 'time [s], pressure [mbar]', got '{header}'"
        ));
    }
    let units = [header_unit(&head[0]), header_unit(&head[1])];
    for (u, d) in units.iter().zip([Dimension::Duration, dim]) {
        if let Some(u) = u {
            parse_si(&format!("1 {u}"), d).map_err(|e| format!("line {hl}: header: {e}"))?;
        }
    }
    let cell = |text: &str, unit: Option<&str>, d: Dimension, line: usize| -> Result<f64, String> {
        let plain = text.parse::<f64>().is_ok();
        let written = match unit {
            Some(u) if plain => format!("{text} {u}"),
            _ => text.to_string(),
        };
        if plain && unit.is_none() && text.parse::<f64>() != Ok(0.0) {
            return Err(format!(
                "line {line}: '{text}' has no unit; put one in the header (e.g. 'time [s]') or after the value"
            ));
        }
        let v = parse_si(&written, d).map_err(|e| format!("line {line}: '{text}': {e}"))?;
        if !v.is_finite() {
            return Err(format!("line {line}: '{text}' is not a finite number"));
        }
        Ok(v)
    };
    let mut points: Vec<(f64, f64)> = Vec::new();
    for (line, row) in lines {
        let cols = split(row);
        if cols.len() != 2 {
            return Err(format!(
                "line {line}: expected two values (time, setting), got {} in '{row}'",
                cols.len()
            ));
        }
        let t = cell(&cols[0], units[0], Dimension::Duration, line)?;
        let v = cell(&cols[1], units[1], dim, line)?;
        if t < 0.0 {
            return Err(format!("line {line}: the time {} is before 0", cols[0]));
        }
        if let Some(&(last, _)) = points.last() {
            if t <= last {
                return Err(format!(
                    "line {line}: times must increase from row to row; {t} s follows {last} s"
                ));
            }
        }
        points.push((t, v));
        if points.len() > 1_000_000 {
            return Err(format!("line {line}: more than 10^6 rows"));
        }
    }
    if points.is_empty() {
        return Err(format!("line {hl}: a header but no rows"));
    }
    Ok(points)
}
