//! `tolerance:` blocks of the chip file → [`chip::tolerances::Tolerances`].
//!
//! ```yaml
//! fluid: {viscosity: 1 mPa*s, density: 998 kg/m^3, tolerance: {viscosity: 3 %}}
//! sections:
//!   lane: {shape: rectangle, width: 100 um, height: 50 um,
//!          tolerance: {width: 2 um, height: {value: 5 %, group: layer_1}}}
//! nodes:
//!   pump: {flow: 10 uL/min, tolerance: {flow: {value: 1 %, distribution: uniform}}}
//!   feed: {pressure: 200 mbar, tolerance: {pressure: {value: 2 mbar, sigmas: 3}}}
//! channels:
//!   c1: {from: a, to: b, section: lane, length: 12 mm, tolerance: {length: 50 um}}
//! ```
//!
//! Every block maps the toleranced quantity's key (as the containing entry names it) to a
//! tolerance: `2 um` or `5 %`, or `{value: …, group: …, sigmas: …, distribution: …}`.

use super::{at, Misplaced, Named};
use crate::chip::tolerances::{
    Amount, Dim, Distribution, Tolerance, Toleranced, Tolerances, DEFAULT_SIGMAS,
};
use crate::network::{ChannelId, Network, NodeId, Port, SectionId};
use crate::section::Shape;
use crate::units::{parse_si, Dimension};
use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use std::fmt;

/// A `tolerance:` block: quantity key → tolerance, in file order.
pub(crate) type ToleranceBlock = Named<Written>;

/// How the values of a toleranced quantity are distributed.
#[derive(Debug, Clone, Copy, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub(crate) enum DistributionKind {
    Normal,
    Uniform,
}

/// One tolerance as written.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ToleranceValue {
    /// `2 um` (absolute, in the quantity's unit) or `5 %` (of the nominal value).
    pub value: super::design_spec::RawQuantity,
    /// Correlation group: every item of a group shares one draw.
    #[serde(default)]
    pub group: Option<String>,
    /// k in "value = ± k·σ" (normal only; default 2).
    #[serde(default)]
    pub sigmas: Option<f64>,
    #[serde(default)]
    pub distribution: Option<DistributionKind>,
}

/// A bare value or the full mapping.
pub(crate) struct Written(pub ToleranceValue);

impl<'de> Deserialize<'de> for Written {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Written;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(
                    "a tolerance such as '2 um' or '5 %', or {value: 5 %, group: layer_1, \
                     sigmas: 3, distribution: uniform}",
                )
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Written, E> {
                Ok(Written(ToleranceValue {
                    value: super::design_spec::RawQuantity(v.to_string()),
                    group: None,
                    sigmas: None,
                    distribution: None,
                }))
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Written, E> {
                self.visit_str(&format!("{v}"))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Written, E> {
                self.visit_str(&format!("{v}"))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Written, E> {
                self.visit_str(&format!("{v}"))
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<Written, A::Error> {
                ToleranceValue::deserialize(de::value::MapAccessDeserializer::new(map)).map(Written)
            }
        }
        deserializer.deserialize_any(V)
    }
}

impl fmt::Debug for Written {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.0.fmt(f)
    }
}

/// The tolerance keys a shape takes, with the dimension each moves.
pub(crate) fn shape_keys(shape: &Shape) -> &'static [(&'static str, Dim)] {
    match shape {
        Shape::Rectangle { .. } | Shape::Ellipse { .. } => {
            &[("width", Dim::Width), ("height", Dim::Height)]
        }
        Shape::Circle { .. } => &[("diameter", Dim::Width)],
        Shape::Plates { .. } => &[("gap", Dim::Height), ("width", Dim::Width)],
        Shape::Trapezoid { .. } => &[("top", Dim::Width)],
        Shape::DShape { .. } => &[("mask_width", Dim::Width)],
        Shape::RoundedRectangle { .. } | Shape::Profile { .. } => &[("width", Dim::Width)],
        _ => &[],
    }
}

/// One block to convert: where it sits, what each key means.
struct Block<'a> {
    path: Vec<String>,
    block: &'a ToleranceBlock,
}

impl Block<'_> {
    fn place(&self, key: &str) -> Vec<String> {
        let mut p = self.path.clone();
        p.push(key.to_string());
        p
    }
}

fn misplaced(path: Vec<String>, message: String) -> Misplaced {
    let refs: Vec<&str> = path.iter().map(String::as_str).collect();
    at(&refs, message)
}

/// Parse one tolerance of a quantity of `dimension` whose nominal value is `nominal`;
/// `positive` quantities (dimensions, lengths, viscosity) must keep the band above zero.
fn one(
    place: Vec<String>,
    value: &ToleranceValue,
    what: Toleranced,
    dimension: Dimension,
    nominal: f64,
    positive: bool,
) -> Result<Tolerance, Misplaced> {
    let label = place.join(".");
    let text = value.value.0.trim();
    let err = |m: String| misplaced(place.clone(), m);
    let amount = if let Some(percent) = text.strip_suffix('%') {
        let v: f64 = percent
            .trim()
            .parse()
            .map_err(|_| err(format!("'{text}' is not a percentage such as '5 %'")))?;
        if !(v.is_finite() && v >= 0.0) {
            return Err(err(format!(
                "a tolerance is a size (± around the nominal value) and cannot be negative, \
                 got '{text}'"
            )));
        }
        if v >= 100.0 {
            return Err(err(format!(
                "a tolerance of {v} % is not below 100 % of the nominal value; give a \
                 percentage below 100 (e.g. '5 %')"
            )));
        }
        Amount::Relative(v / 100.0)
    } else {
        if text.parse::<f64>().is_ok() {
            return Err(err(format!(
                "'{text}' has no unit: write a {} with its unit (e.g. '{}') or a percentage \
                 (e.g. '5 %')",
                dimension.noun(),
                dimension.example()
            )));
        }
        let negative = text.starts_with('-');
        let v =
            parse_si(text.trim_start_matches('-'), dimension).map_err(|e| err(e.to_string()))?;
        if negative {
            return Err(err(format!(
                "a tolerance is a size (± around the nominal value) and cannot be negative, \
                 got '{text}'"
            )));
        }
        if positive && v >= nominal.abs() {
            return Err(err(format!(
                "a tolerance of '{text}' reaches zero from the nominal value; it must be \
                 smaller than the value itself"
            )));
        }
        Amount::Absolute(v)
    };
    let distribution = match (value.distribution, value.sigmas) {
        (Some(DistributionKind::Uniform), Some(_)) => {
            return Err(err(
                "'sigmas' belongs to a normal distribution; a uniform one is bounded by the \
                 value itself"
                    .to_string(),
            ))
        }
        (Some(DistributionKind::Uniform), None) => Distribution::Uniform,
        (_, sigmas) => {
            let k = sigmas.unwrap_or(DEFAULT_SIGMAS);
            if !(k.is_finite() && (0.5..=10.0).contains(&k)) {
                return Err(err(format!(
                    "'sigmas' is the number of standard deviations the value stands for, \
                     between 0.5 and 10 (usually 2 or 3), got {k}"
                )));
            }
            Distribution::Normal { sigmas: k }
        }
    };
    if let Some(g) = &value.group {
        if g.trim().is_empty() {
            return Err(err("a group needs a name, e.g. 'layer_1'".to_string()));
        }
    }
    Ok(Tolerance {
        what,
        amount,
        distribution,
        group: value.group.clone(),
        label,
    })
}

/// Refuse a key the block's owner does not have, naming those it does.
fn unknown(block: &Block<'_>, key: &str, owner: &str, takes: &[&str]) -> Misplaced {
    let message = if takes.is_empty() {
        format!("{owner} has no quantity a tolerance can be given for")
    } else {
        format!(
            "{owner} has no '{key}' to tolerance; its tolerance takes: {}",
            takes.join(", ")
        )
    };
    misplaced(block.place(key), message)
}

/// Where the tolerance blocks of a chip file are: (path, block, owner).
pub(crate) enum Owner {
    /// `sections.NAME.tolerance` or `channels.NAME.section.tolerance`.
    Section(SectionId),
    Channel(ChannelId),
    Node(NodeId),
    Fluid,
}

/// Convert every block, then check the correlation groups.
pub(crate) fn to_tolerances(
    network: &Network,
    blocks: &[(Vec<String>, &ToleranceBlock, Owner)],
) -> Result<Tolerances, Misplaced> {
    let mut items = Vec::new();
    for (path, block, owner) in blocks {
        let b = Block {
            path: path.clone(),
            block,
        };
        for (key, Written(value)) in &b.block.0 {
            let place = b.place(key);
            let item = match owner {
                Owner::Section(s) => {
                    let shape = &network.sections[*s].shape;
                    let keys = shape_keys(shape);
                    let Some((_, dim)) = keys.iter().find(|(k, _)| k == key) else {
                        let names: Vec<&str> = keys.iter().map(|(k, _)| *k).collect();
                        return Err(unknown(&b, key, &format!("a {}", shape.kind()), &names));
                    };
                    let nominal =
                        crate::analysis::design::dimension(shape, dim.name()).unwrap_or(0.0);
                    one(
                        place,
                        value,
                        Toleranced::SectionDim {
                            section: *s,
                            dim: *dim,
                        },
                        Dimension::Length,
                        nominal,
                        true,
                    )?
                }
                Owner::Channel(c) => {
                    if key != "length" {
                        return Err(unknown(&b, key, "a channel", &["length"]));
                    }
                    one(
                        place,
                        value,
                        Toleranced::Length { channel: *c },
                        Dimension::Length,
                        network.channels[*c].length.si(),
                        true,
                    )?
                }
                Owner::Node(n) => {
                    let node = &network.nodes[*n];
                    let (name, dim, nominal) = match node.port {
                        Port::Pressure(p) if node.storage.is_none() => {
                            ("pressure", Dimension::Pressure, p.si())
                        }
                        Port::Flow(q) => ("flow", Dimension::VolumeFlow, q.si()),
                        _ => {
                            return Err(unknown(&b, key, "a junction or a port with storage", &[]))
                        }
                    };
                    if key != name {
                        return Err(unknown(&b, key, &format!("a {name} port"), &[name]));
                    }
                    one(
                        place,
                        value,
                        Toleranced::Drive { node: *n },
                        dim,
                        nominal,
                        false,
                    )?
                }
                Owner::Fluid => {
                    if key != "viscosity" {
                        return Err(unknown(&b, key, "the fluid", &["viscosity"]));
                    }
                    one(
                        place,
                        value,
                        Toleranced::Viscosity,
                        Dimension::Viscosity,
                        network.fluid.viscosity.si(),
                        true,
                    )?
                }
            };
            if items
                .iter()
                .any(|(_, t): &(Vec<String>, Tolerance)| t.what == item.what)
            {
                return Err(misplaced(
                    b.place(key),
                    "this quantity already has a tolerance".to_string(),
                ));
            }
            items.push((b.place(key), item));
        }
    }
    check_groups(&items)?;
    Ok(Tolerances {
        items: items.into_iter().map(|(_, t)| t).collect(),
    })
}

/// What kind of amount an item has, for the group check: relative, or absolute in one unit.
fn unit_class(t: &Tolerance) -> &'static str {
    match (t.amount, t.what) {
        (Amount::Relative(_), _) => "a percentage",
        (Amount::Absolute(_), Toleranced::SectionDim { .. } | Toleranced::Length { .. }) => {
            "a length"
        }
        (Amount::Absolute(_), Toleranced::Drive { .. }) => "a port setting",
        (Amount::Absolute(_), Toleranced::Viscosity) => "a viscosity",
    }
}

/// Items of one group share one draw: they must be of one kind of amount (all percentages,
/// or all in one unit) and one distribution.
fn check_groups(items: &[(Vec<String>, Tolerance)]) -> Result<(), Misplaced> {
    for (i, (place, t)) in items.iter().enumerate() {
        let Some(g) = &t.group else { continue };
        let Some((_, first)) = items[..i].iter().find(|(_, u)| u.group.as_ref() == Some(g)) else {
            continue;
        };
        let place = place.clone();
        if unit_class(first) != unit_class(t) {
            return Err(misplaced(
                place,
                format!(
                    "group '{g}' mixes units: {} is given as {}, this one as {}; members of a \
                     group share one draw, so give them all as percentages or all in one unit",
                    first.label,
                    unit_class(first),
                    unit_class(t)
                ),
            ));
        }
        if first.distribution != t.distribution {
            return Err(misplaced(
                place,
                format!(
                    "group '{g}' mixes distributions: {} and this one differ in \
                     'distribution' or 'sigmas'; members of a group share one draw",
                    first.label
                ),
            ));
        }
    }
    Ok(())
}
