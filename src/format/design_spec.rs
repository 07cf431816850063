//! `targets:`, `adjust:` on ports and `size:` on channels — the design problem in the chip
//! file, converted into [`crate::analysis::design::Design`].

use super::species_spec::{measure_words, read as read_concentration, ConcValue};
use super::{at, Misplaced, Q};
use crate::analysis::design::{
    with_dimension, Adjustable, Design, Measure, ShearMeasure, SizeDim, SizeVar, Target,
    TargetKind, Tolerance,
};
use crate::chip::species::Species;
use crate::network::{ChannelId, Network, NodeId, Port};
use crate::section::Shape;
use crate::units::display::fmt_sig;
use crate::units::{parse_si, Dimension, Length, Pressure, VolumeFlow};
use serde::de::{self, Deserializer, Visitor};
use serde::Deserialize;
use std::fmt;

/// A quantity whose dimension is known only after conversion (a port's bound is a pressure
/// or a flow depending on the port).
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct RawQuantity(pub String);

impl<'de> Deserialize<'de> for RawQuantity {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = RawQuantity;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a value with a unit, e.g. '200 mbar' or '5 uL/min'")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<RawQuantity, E> {
                Ok(RawQuantity(v.to_string()))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<RawQuantity, E> {
                Ok(RawQuantity(format!("{v}")))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<RawQuantity, E> {
                Ok(RawQuantity(format!("{v}")))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<RawQuantity, E> {
                Ok(RawQuantity(format!("{v}")))
            }
        }
        deserializer.deserialize_any(V)
    }
}

/// `adjust: {min: ..., max: ...}` on a port.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct AdjustSpec {
    pub min: RawQuantity,
    pub max: RawQuantity,
}

/// One entry of `targets:`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct TargetSpec {
    #[serde(default)]
    pub channel: Option<String>,
    #[serde(default)]
    pub flow: Option<Q<VolumeFlow>>,
    #[serde(default)]
    pub split: Option<Vec<String>>,
    #[serde(default)]
    pub ratio: Option<Vec<f64>>,
    #[serde(default)]
    pub node: Option<String>,
    #[serde(default)]
    pub pressure: Option<Q<Pressure>>,
    #[serde(default)]
    pub wall_shear: Option<Q<Pressure>>,
    #[serde(default)]
    pub wall_shear_mean: Option<Q<Pressure>>,
    /// `concentration: {species: drug, value: 10 uM}` with `channel:`.
    #[serde(default)]
    pub concentration: Option<ConcentrationSpec>,
    /// `gradient: [out_1, out_2]` with `species:` and one of `values:` per channel.
    #[serde(default)]
    pub gradient: Option<Vec<String>>,
    #[serde(default)]
    pub species: Option<String>,
    #[serde(default)]
    pub values: Option<Vec<ConcValue>>,
    #[serde(default)]
    pub weight: Option<f64>,
    /// `1 %`, a plain number (relative), or a quantity in the target's unit (absolute).
    #[serde(default)]
    pub tolerance: Option<RawQuantity>,
}

/// `concentration: {species: drug, value: 10 uM}` of a target.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ConcentrationSpec {
    pub species: String,
    pub value: ConcValue,
}

/// Bounds of a sized dimension.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct BoundSpec {
    pub min: Q<Length>,
    pub max: Q<Length>,
    #[serde(default)]
    pub step: Option<Q<Length>>,
}

/// `size:` on a channel.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct SizeSpec {
    #[serde(default)]
    pub length: Option<BoundSpec>,
    #[serde(default)]
    pub width: Option<BoundSpec>,
}

fn channel_id(net: &Network, name: &str, place: &[&str]) -> Result<ChannelId, Misplaced> {
    net.channel_id(name)
        .ok_or_else(|| at(place, format!("unknown channel '{name}'")))
}

/// A target's tolerance: `1 %` or a plain number is relative, a quantity in the target's own
/// unit is absolute (splits take relative tolerances only).
fn tolerance(raw: &str, kind: &TargetKind) -> Result<Tolerance, String> {
    let text = raw.trim();
    let relative = |v: f64| {
        if v.is_finite() && v > 0.0 && v < 1.0 {
            Ok(Tolerance::Relative(v))
        } else {
            Err(format!(
                "a relative tolerance lies between 0 and 1 (e.g. '1 %' or 1e-4), got '{text}'"
            ))
        }
    };
    if let Some(percent) = text.strip_suffix('%') {
        return match percent.trim().parse::<f64>() {
            Ok(v) => relative(v / 100.0),
            Err(_) => Err(format!(
                "tolerance '{text}' is not a percentage such as '1 %'"
            )),
        };
    }
    if let Ok(v) = text.parse::<f64>() {
        return relative(v);
    }
    let dim = match kind {
        TargetKind::ChannelFlow { .. } => Dimension::VolumeFlow,
        TargetKind::NodePressure { .. } | TargetKind::WallShear { .. } => Dimension::Pressure,
        TargetKind::Split { .. } => {
            return Err(format!(
                "a split's tolerance is relative (a plain number or a percentage), got '{text}'"
            ))
        }
        TargetKind::Concentration { measure, .. } => match measure {
            Measure::Molar => Dimension::Concentration,
            Measure::Mass => Dimension::MassConcentration,
            Measure::Fraction => {
                return Err(format!(
                "a fraction's tolerance is relative (a plain number or a percentage), got '{text}'"
            ))
            }
        },
    };
    let v = parse_si(text, dim).map_err(|e| format!("tolerance: {e}"))?;
    if v.is_finite() && v > 0.0 {
        Ok(Tolerance::Absolute(v))
    } else {
        Err(format!("tolerance must be positive, got '{text}'"))
    }
}

/// Smallest and largest target weight accepted: weights compare targets with each other, and a
/// ratio beyond 1e12 between them would leave the lighter target below rounding.
const MIN_WEIGHT: f64 = 1e-6;
const MAX_WEIGHT: f64 = 1e6;

/// Build the design problem once the network exists.
pub(super) fn to_design(
    net: &Network,
    species: &[Species],
    targets: &[TargetSpec],
    adjust: &[(String, &AdjustSpec)],
    sizes: &[(String, &SizeSpec)],
) -> Result<Design, Misplaced> {
    let mut design = Design::default();
    for (i, t) in targets.iter().enumerate() {
        let place = ["targets"];
        let label = format!("targets[{i}]");
        let weight = t.weight.unwrap_or(1.0);
        if !(weight.is_finite() && (MIN_WEIGHT..=MAX_WEIGHT).contains(&weight)) {
            return Err(at(
                &place,
                format!(
                    "{label}: weight must be between {MIN_WEIGHT:e} and {MAX_WEIGHT:e} (weights \
                     only compare targets with each other), got {weight:e}"
                ),
            ));
        }
        let shear = match (t.wall_shear, t.wall_shear_mean) {
            (Some(v), None) => Some((v.0.si(), ShearMeasure::Max)),
            (None, Some(v)) => Some((v.0.si(), ShearMeasure::Mean)),
            (None, None) => None,
            (Some(_), Some(_)) => {
                return Err(at(
                    &place,
                    format!(
                        "{label}: give either wall_shear (maximum) or wall_shear_mean, not both"
                    ),
                ))
            }
        };
        let named = |c: &str| {
            channel_id(net, c, &place).map_err(|m| at(&place, format!("{label}: {}", m.message)))
        };
        if t.concentration.is_some() || t.gradient.is_some() {
            for kind in concentration_targets(species, t, &label, &named)? {
                let tolerance = match &t.tolerance {
                    None => Tolerance::default(),
                    Some(raw) => {
                        tolerance(&raw.0, &kind).map_err(|m| at(&place, format!("{label}: {m}")))?
                    }
                };
                design.targets.push(Target {
                    kind,
                    weight,
                    tolerance,
                });
            }
            continue;
        }
        if t.species.is_some() || t.values.is_some() {
            return Err(at(
                &place,
                format!(
                    "{label}: 'species' and 'values' belong to a gradient, e.g. \
                     {{gradient: [out_1, out_2], species: drug, values: [0, 10 uM]}}"
                ),
            ));
        }
        let kind = match (&t.channel, t.flow, shear, &t.split, &t.ratio, &t.node, t.pressure) {
            (Some(c), Some(q), None, None, None, None, None) => TargetKind::ChannelFlow {
                channel: named(c)?,
                flow: q.0.si(),
            },
            (Some(c), None, Some((v, measure)), None, None, None, None) => {
                if !(v.is_finite() && v > 0.0) {
                    return Err(at(&place, format!("{label}: a wall-shear target must be positive")));
                }
                TargetKind::WallShear { channel: named(c)?, shear: v, measure }
            }
            (None, None, None, Some(split), Some(ratio), None, None) => {
                if split.len() < 2 || split.len() != ratio.len() {
                    return Err(at(&place, format!(
                        "{label}: a split names two or more channels and one ratio per channel, e.g. {{split: [c3, c4], ratio: [1, 2]}}"
                    )));
                }
                if let Some(r) = ratio.iter().find(|r| !(r.is_finite() && **r > 0.0)) {
                    return Err(at(&place, format!("{label}: ratios must be positive, got {r}")));
                }
                let channels: Vec<ChannelId> =
                    split.iter().map(|c| named(c)).collect::<Result<_, _>>()?;
                if let Some(k) = (1..channels.len()).find(|&k| channels[..k].contains(&channels[k])) {
                    return Err(at(&place, format!(
                        "{label}: channel '{}' is listed twice in the split; list each channel once",
                        split[k]
                    )));
                }
                TargetKind::Split { channels, ratio: ratio.clone() }
            }
            (None, None, None, None, None, Some(n), Some(p)) => TargetKind::NodePressure {
                node: net
                    .node_id(n)
                    .ok_or_else(|| at(&place, format!("{label}: unknown node '{n}'")))?,
                pressure: p.0.si(),
            },
            _ => {
                return Err(at(&place, format!(
                    "{label}: a target is one of {{channel: c3, flow: 2 uL/min}}, {{channel: c3, wall_shear: 0.4 Pa}} \
                     (or wall_shear_mean), {{split: [c3, c4], ratio: [1, 2]}}, {{node: n2, pressure: 40 mbar}}, \
                     {{channel: c3, concentration: {{species: drug, value: 10 uM}}}} or \
                     {{gradient: [o1, o2], species: drug, values: [0, 10 uM]}} \
                     (each with an optional weight and tolerance)"
                )))
            }
        };
        let tolerance = match &t.tolerance {
            None => Tolerance::default(),
            Some(raw) => {
                tolerance(&raw.0, &kind).map_err(|m| at(&place, format!("{label}: {m}")))?
            }
        };
        design.targets.push(Target {
            kind,
            weight,
            tolerance,
        });
    }
    // Only the weights' proportions matter: scale the largest to 1, so the verdict cannot
    // depend on their magnitude.
    let largest = design.targets.iter().map(|t| t.weight).fold(0.0, f64::max);
    for t in &mut design.targets {
        t.weight /= largest;
    }
    for (name, a) in adjust {
        let id: NodeId = net
            .node_id(name)
            .ok_or_else(|| at(&["nodes", name], "unknown node"))?;
        let (dim, value) = match net.nodes[id].port {
            Port::Pressure(p) => (Dimension::Pressure, p.si()),
            Port::Flow(q) => (Dimension::VolumeFlow, q.si()),
            Port::Junction => {
                return Err(at(
                    &["nodes", name, "adjust"],
                    "only a port (with 'pressure' or 'flow') can be adjusted",
                ))
            }
        };
        let parse = |field: &str, raw: &RawQuantity| {
            parse_si(&raw.0, dim).map_err(|e| at(&["nodes", name, "adjust", field], e.to_string()))
        };
        let (min, max) = (parse("min", &a.min)?, parse("max", &a.max)?);
        if min > max {
            return Err(at(
                &["nodes", name, "adjust", "max"],
                "max must not be below min",
            ));
        }
        let _ = value;
        design.adjustable.push(Adjustable { node: id, min, max });
    }
    for (name, s) in sizes {
        let id = channel_id(net, name, &["channels", name])?;
        for (dim, field, b) in [
            (SizeDim::Length, "length", &s.length),
            (SizeDim::Width, "width", &s.width),
        ] {
            let Some(b) = b else { continue };
            let (min, max) = (b.min.0.si(), b.max.0.si());
            if !(min > 0.0 && max >= min && max.is_finite()) {
                return Err(at(
                    &["channels", name, "size", field],
                    "bounds must satisfy 0 < min ≤ max",
                ));
            }
            if dim == SizeDim::Width {
                let shape = &net.section_of(id).shape;
                for (key, v) in [("min", min), ("max", max)] {
                    if let Some(problem) = width_bound_problem(shape, v) {
                        return Err(at(&["channels", name, "size", field, key], problem));
                    }
                }
            }
            let step = b.step.map(|s| s.0.si());
            if let Some(st) = step {
                if !(st > 0.0 && st.is_finite()) {
                    return Err(at(
                        &["channels", name, "size", field, "step"],
                        "step must be positive",
                    ));
                }
            }
            design.sizes.push(SizeVar {
                channel: id,
                dim,
                min,
                max,
                step,
            });
        }
    }
    Ok(design)
}

/// The concentration targets of one `targets:` entry: `{channel, concentration: {species,
/// value}}` gives one, `{gradient: [..], species, values: [..]}` one per listed channel.
fn concentration_targets(
    species: &[Species],
    t: &TargetSpec,
    label: &str,
    named: &dyn Fn(&str) -> Result<ChannelId, Misplaced>,
) -> Result<Vec<TargetKind>, Misplaced> {
    let place = ["targets"];
    let fail = |m: String| at(&place, format!("{label}: {m}"));
    let others = t.flow.is_some()
        || t.wall_shear.is_some()
        || t.wall_shear_mean.is_some()
        || t.split.is_some()
        || t.ratio.is_some()
        || t.node.is_some()
        || t.pressure.is_some();
    let pairs: Vec<(String, &ConcValue, &str)> =
        match (&t.concentration, &t.gradient) {
            (Some(c), None) if !others && t.species.is_none() && t.values.is_none() => {
                let Some(ch) = &t.channel else {
                    return Err(fail(
                        "a concentration target names its channel, e.g. {channel: c3, \
                     concentration: {species: drug, value: 10 uM}}"
                            .into(),
                    ));
                };
                vec![(ch.clone(), &c.value, c.species.as_str())]
            }
            (None, Some(list)) if !others && t.channel.is_none() => {
                let (Some(name), Some(values)) = (&t.species, &t.values) else {
                    return Err(fail(
                        "a gradient gives its species and one value per channel, e.g. \
                     {gradient: [o1, o2, o3], species: drug, values: [0, 5 uM, 10 uM]}"
                            .into(),
                    ));
                };
                if list.is_empty() || list.len() != values.len() {
                    return Err(fail(format!(
                        "a gradient lists one value per channel; {} channel(s) but {} value(s)",
                        list.len(),
                        values.len()
                    )));
                }
                list.iter()
                    .zip(values)
                    .map(|(c, v)| (c.clone(), v, name.as_str()))
                    .collect()
            }
            _ => return Err(fail(
                "a concentration target is {channel: c3, concentration: {species: drug, value: \
                 10 uM}} or {gradient: [o1, o2], species: drug, values: [0, 10 uM]}, without \
                 other target keys"
                    .into(),
            )),
        };
    let mut out: Vec<TargetKind> = Vec::with_capacity(pairs.len());
    for (channel, value, name) in pairs {
        let Some(s) = species.iter().find(|s| s.name == name) else {
            let names: Vec<&str> = species.iter().map(|s| s.name.as_str()).collect();
            return Err(fail(if names.is_empty() {
                format!("unknown species '{name}': the chip declares none under 'species:'")
            } else {
                format!(
                    "unknown species '{name}'; the chip declares: {}",
                    names.join(", ")
                )
            }));
        };
        let (x, measure) = read_concentration(value).map_err(&fail)?;
        if let Some(m) = measure {
            if m != s.measure {
                return Err(fail(format!(
                    "species '{name}' enters the chip as {} and the target gives {}; use the \
                     same measure",
                    measure_words(s.measure),
                    measure_words(m)
                )));
            }
        }
        let id = named(&channel)?;
        if let Some(TargetKind::Concentration { .. }) = out
            .iter()
            .find(|k| matches!(k, TargetKind::Concentration { channel: c, .. } if *c == id))
        {
            return Err(fail(format!(
                "channel '{channel}' is listed twice in the gradient; list each channel once"
            )));
        }
        out.push(TargetKind::Concentration {
            channel: id,
            species: s.name.clone(),
            measure: s.measure,
            concentration: x,
            inlet: s.inlet.clone(),
        });
    }
    Ok(out)
}

/// Why a width bound `v` [m] would give an invalid section (`None`: it gives a valid one, or
/// the shape has no width to size, which sizing reports itself). The section is checked as
/// sizing would build it ([`with_dimension`]: a trapezoid keeps its sidewall angle, so its
/// top must exceed the sidewall offset; a rounded rectangle keeps its corner radius).
fn width_bound_problem(shape: &Shape, v: f64) -> Option<String> {
    let sized = with_dimension(shape, "width", v)?;
    let e = sized.check().err()?;
    let um = |x: f64| format!("{} um", fmt_sig(x * 1e6, 4));
    let expected = match shape {
        Shape::Trapezoid { top, bottom, .. } => format!(
            "a top width above the sidewall offset top − bottom = {} (the sidewall angle is kept)",
            um(top.si() - bottom.si())
        ),
        Shape::RoundedRectangle { corner_radius, .. } => format!(
            "a width of at least twice the corner radius, {}",
            um(2.0 * corner_radius.si())
        ),
        _ => "a width that gives a valid section".to_string(),
    };
    Some(format!(
        "a {} section {} wide is not valid ({}: {}); expected {expected}",
        shape.kind(),
        um(v),
        e.field,
        e.problem
    ))
}
