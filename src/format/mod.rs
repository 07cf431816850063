//! The chip file (YAML or JSON): serde types at the edge, converted into a [`Chip`].
//!
//! Parsing is split from I/O: [`parse_chip`] takes text and an origin name and never touches
//! the file system. Every error carries the file, the line and column where known, and the
//! key path of the field (`channels.c3.to`).
//!
//! ```yaml
//! name: demo
//! fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}
//! sections:
//!   feed: {shape: rectangle, width: 200 um, height: 50 um}
//! nodes:
//!   supply: {pressure: 150 mbar}
//!   pump:   {flow: 12 uL/min}
//!   tee: {}
//!   drain:  {pressure: 0 Pa}
//! channels:
//!   c1: {from: supply, to: tee, section: feed, length: 12 mm}
//!   c2: {from: pump, to: tee, section: {shape: circle, diameter: 100 um}, length: 30 mm}
//!   c3: {from: tee, to: drain, section: feed, length: 8 mm}
//! ```

mod design_spec;
mod drive_spec;
pub mod edit;
mod fluid_spec;
mod locate;
mod named;
mod quantity;
mod section_spec;
mod species_spec;
pub mod spread_state;
mod table;
mod tolerance_spec;
mod yaml_guard;

// The serde types of the file format stay inside the crate: the rest of the program sees
// only Chip and the domain types they convert into.
pub(crate) use design_spec::{AdjustSpec, SizeSpec, TargetSpec};
pub use drive_spec::parse_schedule;
pub(crate) use fluid_spec::FluidSpec;
pub use locate::locate;
pub(crate) use named::Named;
pub(crate) use quantity::Q;
pub(crate) use section_spec::SectionSpec;
pub use section_spec::{parse_profile_columns, parse_profile_csv, FileReader};

use crate::chip::drives::{Drives, Rocking, SwitchOn};
use crate::chip::{Chip, DrawnLayout, ModelNote, Source};
use crate::level_table::LevelTable;
use crate::network::{NetworkBuilder, NetworkError, Port, SectionId, Storage, Well, WellShape};
use crate::units::{
    Acceleration, Angle, Area, Compliance, Duration, Length, Pressure, Volume, VolumeFlow,
};
use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use std::fmt;
use table::{Arena, Row, Span, Table};

pub use crate::chip::Syntax;

/// Text with control, invisible and direction-changing characters written as `\u{…}`
/// escapes, so an error message shows what the file holds (a name cannot reorder or hide the
/// message around it).
pub fn visible(text: &str) -> String {
    text.chars()
        .map(|c| match c {
            '\n' | '\t' => c.to_string(),
            c if crate::network::hidden_char(c).is_some() => c.escape_unicode().to_string(),
            c => c.to_string(),
        })
        .collect()
}

/// A problem in a chip file, with its place.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{}", self.render())]
pub struct InputError {
    /// The file (or other origin) the text came from.
    pub origin: String,
    /// 1-based line and column, where known.
    pub line: Option<usize>,
    pub column: Option<usize>,
    /// Key path of the field, e.g. `channels.c3.to`.
    pub field: Option<String>,
    /// What is wrong and what was expected.
    pub message: String,
}

impl InputError {
    fn render(&self) -> String {
        let mut s = self.origin.clone();
        if let Some(l) = self.line {
            s.push_str(&format!(":{l}"));
            if let Some(c) = self.column {
                s.push_str(&format!(":{c}"));
            }
        }
        s.push_str(": ");
        if let Some(f) = &self.field {
            if !self.message.starts_with(f.as_str()) {
                s.push_str(f);
                s.push_str(": ");
            }
        }
        s.push_str(&self.message);
        visible(&s)
    }

    /// An error about the whole file (no line).
    pub fn whole_file(origin: &str, message: impl Into<String>) -> Self {
        InputError {
            origin: origin.to_string(),
            line: None,
            column: None,
            field: None,
            message: message.into(),
        }
    }
}

// ---------------------------------------------------------------------------------------
// The file format (serde types). Unknown keys are refused so typos do not pass silently.
// ---------------------------------------------------------------------------------------

/// A whole chip file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ChipFile {
    /// Chip name, used in report titles.
    #[serde(default)]
    pub name: Option<String>,
    /// Free text for the designer; ignored by the solver.
    #[serde(default)]
    pub description: Option<String>,
    pub fluid: FluidSpec,
    /// Solutes carried by the flow (`species.NAME: {diffusivity: …}`).
    #[serde(default)]
    pub species: Named<species_spec::SpeciesSpec>,
    /// Solute model: `well` (default) or `lateral` (laminar co-flow across the width).
    #[serde(default)]
    pub mixing: Option<species_spec::MixingSpec>,
    #[serde(default)]
    pub sections: Named<SectionSpec>,
    pub nodes: Table<NodeRow>,
    pub channels: Table<ChannelRow>,
    /// The chip's pressure rating (e.g. a bonded chip's burst limit, with a safety factor).
    #[serde(default)]
    pub pressure_rating: Option<Q<Pressure>>,
    /// Relative error target of numerically solved sections (default 1e-4).
    #[serde(default)]
    pub section_tolerance: Option<f64>,
    /// Design targets for `rillnet tune` and `rillnet size`.
    #[serde(default)]
    pub targets: Vec<TargetSpec>,
    /// Gravitational acceleration for hydrostatic heads (default: standard gravity).
    #[serde(default)]
    pub gravity: Option<Q<Acceleration>>,
    /// A rocking platform under the chip (`evolve`): nodes rise by `arm`·sin θ(t).
    #[serde(default)]
    pub rocking: Option<RockingSpec>,
}

/// `rocking:` — θ(t) = angle·sin(2πt/period).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RockingSpec {
    pub angle: Q<Angle>,
    pub period: Q<Duration>,
}

/// `nodes.NAME:` — a junction (`{}`), a pressure port or a flow port.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct NodeSpec {
    /// Concentrations of the fluid the port lets in, by species.
    #[serde(default)]
    pub concentrations: Option<Named<species_spec::ConcValue>>,
    #[serde(default)]
    pub pressure: Option<Q<Pressure>>,
    #[serde(default)]
    pub flow: Option<Q<VolumeFlow>>,
    /// The port's setting may be changed by `rillnet tune` within these bounds.
    #[serde(default)]
    pub adjust: Option<AdjustSpec>,
    /// Position on the chip drawing, `[x, y]` with units.
    #[serde(default)]
    pub at: Option<[Q<Length>; 2]>,
    /// Height of the node above the datum (a well's bottom; an outlet tube's end).
    #[serde(default)]
    pub elevation: Option<Q<Length>>,
    /// An open well at this node (then the node is a pressure port).
    #[serde(default)]
    pub reservoir: Option<ReservoirSpec>,
    /// Gas trapped at the node (a bubble in a syringe), at the initial pressure.
    #[serde(default)]
    pub gas_volume: Option<Q<Volume>>,
    /// A given compliance (soft tubing, a soft chamber).
    #[serde(default)]
    pub compliance: Option<Q<Compliance>>,
    /// Elastic tubing at the node: its compliance from wall material and geometry.
    #[serde(default)]
    pub tubing: Option<TubingSpec>,
    /// `evolve`: the port is off (flow 0, or only its head) until this time.
    #[serde(default)]
    pub on_at: Option<Q<Duration>>,
    /// `evolve`: the setting goes linearly to another value over an interval.
    #[serde(default)]
    pub ramp: Option<drive_spec::RampSpec>,
    /// `evolve`: the setting follows a CSV file of (time, value) rows beside the chip file.
    #[serde(default)]
    pub schedule: Option<String>,
    /// Horizontal distance from the rocking axis (signed), if the chip sits on a platform.
    #[serde(default)]
    pub arm: Option<Q<Length>>,
    /// Accuracy of the port's setting (`{pressure: 1 %}` or `{flow: 0.5 uL/min}`), for
    /// `rillnet spread`.
    #[serde(default)]
    pub tolerance: Option<tolerance_spec::ToleranceBlock>,
}

/// `nodes.NAME.reservoir:` — an open well: its level (free surface above the datum) and its
/// wetted cross-section, as an area or a cylinder diameter.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ReservoirSpec {
    pub level: Q<Length>,
    #[serde(default)]
    pub area: Option<Q<Area>>,
    #[serde(default)]
    pub diameter: Option<Q<Length>>,
    /// Level–volume rows `[height above the bottom, volume]`, bottom first.
    #[serde(default)]
    pub table: Option<Vec<(Q<Length>, Q<Volume>)>>,
    /// Gauge pressure of the gas above the surface (default 0: open to the room).
    #[serde(default)]
    pub gas_pressure: Option<Q<Pressure>>,
}

/// `nodes.NAME.tubing:` — elastic tubing whose compliance is computed from its wall
/// ([`crate::network::Tubing`]).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct TubingSpec {
    pub inner_diameter: Q<Length>,
    pub wall: Q<Length>,
    pub length: Q<Length>,
    /// Young's modulus of the wall material.
    pub modulus: Q<Pressure>,
    /// Poisson's ratio (default 0.5, elastomers).
    #[serde(default)]
    pub poisson: Option<f64>,
}

/// `channels.NAME:`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct ChannelSpec {
    pub from: String,
    pub to: String,
    pub section: SectionRef,
    pub length: Q<Length>,
    /// A stricter (or looser) wall-shear limit for this channel than the cells' own.
    #[serde(default)]
    pub shear_limit: Option<Q<Pressure>>,
    /// Dimensions `rillnet size` may change.
    #[serde(default)]
    pub size: Option<SizeSpec>,
    /// Intermediate points of the channel's drawn path (e.g. a serpentine), with units.
    #[serde(default)]
    pub path: Option<Vec<[Q<Length>; 2]>>,
    /// Fabrication tolerance of the length (`{length: 50 um}`), for `rillnet spread`.
    #[serde(default)]
    pub tolerance: Option<tolerance_spec::ToleranceBlock>,
}

/// A channel's section: the name of one in `sections:`, or a mapping given inline.
#[derive(Debug)]
pub(crate) enum SectionRef {
    Named(String),
    Inline(Box<SectionSpec>),
}

impl<'de> Deserialize<'de> for SectionRef {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = SectionRef;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("the name of a section, or a section mapping such as {shape: circle, diameter: 100 um}")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<SectionRef, E> {
                Ok(SectionRef::Named(v.to_string()))
            }
            fn visit_map<A: MapAccess<'de>>(self, map: A) -> Result<SectionRef, A::Error> {
                SectionSpec::deserialize(de::value::MapAccessDeserializer::new(map))
                    .map(|spec| SectionRef::Inline(Box::new(spec)))
            }
        }
        deserializer.deserialize_any(V)
    }
}

/// A node as kept between parsing and building: a junction or port with at most a drawing
/// position inline (most nodes of a large chip), anything else as its full spec.
#[derive(Debug)]
pub(crate) enum NodeRow {
    Plain {
        pressure: Option<Q<Pressure>>,
        flow: Option<Q<VolumeFlow>>,
        at: Option<[Q<Length>; 2]>,
    },
    Full(Box<NodeSpec>),
}

impl Row for NodeRow {
    type Spec = NodeSpec;
    fn from_spec(spec: NodeSpec, _: &mut Arena) -> Option<NodeRow> {
        Some(match spec {
            NodeSpec {
                concentrations: None,
                pressure,
                flow,
                adjust: None,
                at,
                elevation: None,
                reservoir: None,
                gas_volume: None,
                compliance: None,
                tubing: None,
                on_at: None,
                ramp: None,
                schedule: None,
                arm: None,
                tolerance: None,
            } => NodeRow::Plain { pressure, flow, at },
            spec => NodeRow::Full(Box::new(spec)),
        })
    }
}

/// A [`NodeSpec`] borrowed from a [`NodeRow::Full`] or rebuilt from a plain row.
// Lives on the stack for one node at a time; boxing the owned form would allocate per node.
#[allow(clippy::large_enum_variant)]
enum SpecRef<'a> {
    Borrowed(&'a NodeSpec),
    Owned(NodeSpec),
}

impl std::ops::Deref for SpecRef<'_> {
    type Target = NodeSpec;
    fn deref(&self) -> &NodeSpec {
        match self {
            SpecRef::Borrowed(s) => s,
            SpecRef::Owned(s) => s,
        }
    }
}

impl NodeRow {
    fn spec(&self) -> SpecRef<'_> {
        match self {
            NodeRow::Full(spec) => SpecRef::Borrowed(spec),
            NodeRow::Plain { pressure, flow, at } => SpecRef::Owned(NodeSpec {
                pressure: *pressure,
                flow: *flow,
                at: *at,
                ..NodeSpec::default()
            }),
        }
    }

    fn at(&self) -> Option<[Q<Length>; 2]> {
        match self {
            NodeRow::Full(spec) => spec.at,
            NodeRow::Plain { at, .. } => *at,
        }
    }

    /// The full spec, for the keys a plain row does not have.
    fn full(&self) -> Option<&NodeSpec> {
        match self {
            NodeRow::Full(spec) => Some(spec),
            NodeRow::Plain { .. } => None,
        }
    }
}

/// A channel as kept between parsing and building: its node and section names in the
/// table's arena, the rarely given keys boxed.
#[derive(Debug)]
pub(crate) struct ChannelRow {
    from: Span,
    to: Span,
    section: SectionRow,
    length: Q<Length>,
    rest: Option<Box<ChannelRest>>,
}

#[derive(Debug)]
enum SectionRow {
    Named(Span),
    Inline(Box<SectionSpec>),
}

/// The keys of a channel most channels do not have.
#[derive(Debug)]
struct ChannelRest {
    shear_limit: Option<Q<Pressure>>,
    size: Option<SizeSpec>,
    path: Option<Vec<[Q<Length>; 2]>>,
    tolerance: Option<tolerance_spec::ToleranceBlock>,
}

impl Row for ChannelRow {
    type Spec = ChannelSpec;
    fn from_spec(spec: ChannelSpec, arena: &mut Arena) -> Option<ChannelRow> {
        let ChannelSpec {
            from,
            to,
            section,
            length,
            shear_limit,
            size,
            path,
            tolerance,
        } = spec;
        let rest =
            (shear_limit.is_some() || size.is_some() || path.is_some() || tolerance.is_some())
                .then(|| {
                    Box::new(ChannelRest {
                        shear_limit,
                        size,
                        path,
                        tolerance,
                    })
                });
        Some(ChannelRow {
            from: arena.push(&from)?,
            to: arena.push(&to)?,
            section: match section {
                SectionRef::Named(name) => SectionRow::Named(arena.push(&name)?),
                SectionRef::Inline(spec) => SectionRow::Inline(spec),
            },
            length,
            rest,
        })
    }
}

impl ChannelRow {
    fn rest(&self) -> Option<&ChannelRest> {
        self.rest.as_deref()
    }
}

// ---------------------------------------------------------------------------------------
// Conversion into domain types.
// ---------------------------------------------------------------------------------------

/// A conversion problem at a key path, before it is located in the text.
pub(crate) struct Misplaced {
    path: Vec<String>,
    /// The last key occurs twice; point at the second.
    repeated: bool,
    message: String,
}

pub(crate) fn at(path: &[&str], message: impl Into<String>) -> Misplaced {
    Misplaced {
        path: path.iter().map(|s| s.to_string()).collect(),
        repeated: false,
        message: message.into(),
    }
}

impl From<NetworkError> for Misplaced {
    fn from(e: NetworkError) -> Self {
        let place = e.place();
        Misplaced {
            path: place.keys,
            repeated: place.repeated,
            message: e.to_string(),
        }
    }
}

impl ChipFile {
    /// Time-varying drives: ports switched on, the rocking platform and its arms.
    fn drives(
        &self,
        network: &crate::network::Network,
        read: FileReader<'_>,
    ) -> Result<Drives, Misplaced> {
        let mut drives = Drives::default();
        let mut arms = Vec::new();
        for (i, (name, row)) in self.nodes.iter().enumerate() {
            let node = crate::network::NodeId(i);
            let Some(spec) = row.full() else { continue };
            if let Some(t) = spec.on_at {
                if network.nodes[node].port == Port::Junction {
                    return Err(at(
                        &["nodes", name, "on_at"],
                        "only a port (pressure or flow) can be switched on",
                    ));
                }
                if !(t.0.si().is_finite() && t.0.si() >= 0.0) {
                    return Err(at(&["nodes", name, "on_at"], "must be a time from 0 on"));
                }
                drives.switch_on.push(SwitchOn { node, at: t.0.si() });
            }
            let timed = [
                spec.on_at.is_some(),
                spec.ramp.is_some(),
                spec.schedule.is_some(),
            ];
            if timed.iter().filter(|b| **b).count() > 1 {
                return Err(at(
                    &["nodes", name],
                    "give a port at most one of 'on_at', 'ramp' and 'schedule'",
                ));
            }
            if let Some(r) = &spec.ramp {
                drives
                    .profiles
                    .push(drive_spec::ramp(network, node, name, r)?);
            }
            if let Some(f) = &spec.schedule {
                drives
                    .profiles
                    .push(drive_spec::schedule(network, node, name, f, read)?);
            }
            if let Some(a) = spec.arm {
                if self.rocking.is_none() {
                    return Err(at(
                        &["nodes", name, "arm"],
                        "an arm needs a platform: add 'rocking: {angle: 7 deg, period: 1 min}'",
                    ));
                }
                arms.push((node, a.0.si()));
            }
        }
        if let Some(r) = &self.rocking {
            let (angle, period) = (r.angle.0.si(), r.period.0.si());
            if !(period > 0.0 && angle.abs() < std::f64::consts::FRAC_PI_2) {
                return Err(at(
                    &["rocking"],
                    "needs a positive period and an angle below 90 deg",
                ));
            }
            drives.rocking = Some(Rocking {
                amplitude: angle,
                period,
                arms,
            });
        }
        Ok(drives)
    }

    /// The chip, taking `source`'s text once nothing can fail any more (on an error the text
    /// stays with the caller, to locate the error in it).
    fn into_chip(self, read: FileReader<'_>, source: &mut Source) -> Result<Chip, Misplaced> {
        let (fluid, notes) = self.fluid.to_fluid()?;
        let mut b = NetworkBuilder::new(fluid).with_capacity(self.nodes.len(), self.channels.len());
        if let Some(rating) = self.pressure_rating {
            b.pressure_rating(rating.0)?;
        }
        if let Some(g) = self.gravity {
            b.gravity(g.0.si())?;
        }
        if let Some(tol) = self.section_tolerance {
            if !(tol.is_finite() && tol > 0.0 && tol < 0.1) {
                return Err(at(
                    &["section_tolerance"],
                    format!("must be a relative tolerance between 0 and 0.1, got {tol}"),
                ));
            }
            b.numeric_options(crate::section::numeric::NumericOptions {
                tolerance: tol,
                shear_tolerance: (10.0 * tol).min(0.05),
                ..Default::default()
            });
        }
        for (name, spec) in &self.sections.0 {
            let shape = spec.to_shape(&["sections", name], read)?;
            b.add_section(name, shape)?;
        }
        for (name, row) in self.nodes.iter() {
            let spec = row.spec();
            let port = node_port(name, &spec)?;
            let id = b.add_node(name, port)?;
            let storage = node_storage(name, &spec)?;
            if storage.is_some() || spec.elevation.is_some() {
                let z = spec.elevation.map_or(Length::from_si(0.0), |e| e.0);
                b.node_storage(id, z, storage)?;
            }
        }
        for (name, row) in self.channels.iter() {
            let section: SectionId = match &row.section {
                SectionRow::Named(s) => b.section(name, self.channels.text(*s))?,
                SectionRow::Inline(inline) => {
                    let shape = inline.to_shape(&["channels", name, "section"], read)?;
                    b.inline_section(name, shape)?
                }
            };
            let (from, to) = (self.channels.text(row.from), self.channels.text(row.to));
            let id = b.add_channel(name, from, to, section, row.length.0)?;
            if let Some(limit) = row.rest().and_then(|r| r.shear_limit) {
                b.channel_shear_limit(id, limit.0)?;
            }
        }
        let network = b.build()?;
        let drives = self.drives(&network, read)?;
        let tolerances = self.tolerances(&network)?;
        let node_at = self
            .nodes
            .iter()
            .map(|(_, n)| n.at().map(|p| [p[0].0.si(), p[1].0.si()]))
            .collect();
        let channel_path = self
            .channels
            .iter()
            .map(|(_, c)| {
                c.rest()
                    .and_then(|r| r.path.as_ref())
                    .map(|pts| pts.iter().map(|p| [p[0].0.si(), p[1].0.si()]).collect())
                    .unwrap_or_default()
            })
            .collect();
        let adjust: Vec<(String, &AdjustSpec)> = self
            .nodes
            .iter()
            .filter_map(|(n, r)| Some((n.to_string(), r.full()?.adjust.as_ref()?)))
            .collect();
        let sizes: Vec<(String, &SizeSpec)> = self
            .channels
            .iter()
            .filter_map(|(n, c)| Some((n.to_string(), c.rest()?.size.as_ref()?)))
            .collect();
        let given: Vec<_> = (self.nodes.iter())
            .map(|(n, r)| (n, r.full().and_then(|s| s.concentrations.as_ref())))
            .collect();
        let species = species_spec::to_species(&self.species, &given, &network)?;
        let design = design_spec::to_design(&network, &species, &self.targets, &adjust, &sizes)?;
        let mut notes: Vec<ModelNote> = notes.into_iter().map(ModelNote::Fluid).collect();
        notes.extend(profile_notes(&network));
        Ok(Chip {
            name: self.name,
            description: self.description,
            source: Source {
                origin: std::mem::take(&mut source.origin),
                text: std::mem::take(&mut source.text),
                syntax: source.syntax,
            },
            network,
            design,
            species,
            mixing: self
                .mixing
                .map_or(Default::default(), species_spec::MixingSpec::to_mixing),
            layout: DrawnLayout {
                node_at,
                channel_path,
            },
            drives,
            tolerances,
            notes,
        })
    }

    /// Every `tolerance:` block, converted and checked (see [`tolerance_spec`]).
    fn tolerances(
        &self,
        network: &crate::network::Network,
    ) -> Result<crate::chip::tolerances::Tolerances, Misplaced> {
        use tolerance_spec::Owner;
        let path = |keys: &[&str]| keys.iter().map(|k| k.to_string()).collect::<Vec<_>>();
        let mut blocks = Vec::new();
        if let Some(t) = &self.fluid.tolerance {
            blocks.push((path(&["fluid", "tolerance"]), t, Owner::Fluid));
        }
        for (name, spec) in &self.sections.0 {
            if let Some(t) = &spec.tolerance {
                let Some(i) = (network.sections.iter()).position(|s| s.named && &s.name == name)
                else {
                    continue;
                };
                let owner = Owner::Section(SectionId(i));
                blocks.push((path(&["sections", name, "tolerance"]), t, owner));
            }
        }
        for (i, (name, row)) in self.nodes.iter().enumerate() {
            if let Some(t) = row.full().and_then(|s| s.tolerance.as_ref()) {
                let owner = Owner::Node(crate::network::NodeId(i));
                blocks.push((path(&["nodes", name, "tolerance"]), t, owner));
            }
        }
        for (i, (name, row)) in self.channels.iter().enumerate() {
            let id = crate::network::ChannelId(i);
            if let SectionRow::Inline(inline) = &row.section {
                if let Some(t) = &inline.tolerance {
                    let owner = Owner::Section(network.channels[id].section);
                    blocks.push((path(&["channels", name, "section", "tolerance"]), t, owner));
                }
            }
            if let Some(t) = row.rest().and_then(|r| r.tolerance.as_ref()) {
                blocks.push((
                    path(&["channels", name, "tolerance"]),
                    t,
                    Owner::Channel(id),
                ));
            }
        }
        tolerance_spec::to_tolerances(network, &blocks)
    }
}

/// A node's port: pressure, flow, a well (a pressure port at its gas pressure) or a junction.
fn node_port(name: &str, spec: &NodeSpec) -> Result<Port, Misplaced> {
    if let Some(r) = &spec.reservoir {
        if spec.pressure.is_some() || spec.flow.is_some() {
            let key = if spec.pressure.is_some() {
                "pressure"
            } else {
                "flow"
            };
            return Err(at(
                &["nodes", name, key],
                format!(
                    "node '{name}' is a reservoir, which sets its own pressure from its level; \
                     remove '{key}' (a gas pressure above the surface goes in \
                     'reservoir: {{gas_pressure: ...}}')"
                ),
            ));
        }
        if spec.adjust.is_some() {
            return Err(at(
                &["nodes", name, "adjust"],
                format!("node '{name}': 'adjust' is not available on a reservoir"),
            ));
        }
        return Ok(Port::Pressure(
            r.gas_pressure.map_or(Pressure::from_si(0.0), |g| g.0),
        ));
    }
    if spec.adjust.is_some() && spec.elevation.is_some_and(|e| e.0.si() != 0.0) {
        return Err(at(
            &["nodes", name, "adjust"],
            format!(
                "node '{name}': 'adjust' is not available on a port with an elevation \
                 (tuned settings would mix the set pressure with the hydrostatic head)"
            ),
        ));
    }
    Ok(match (spec.pressure, spec.flow) {
        (Some(_), Some(_)) => {
            return Err(at(
                &["nodes", name, "flow"],
                format!(
                    "node '{name}' has both 'pressure' and 'flow'; a port is either \
                     pressure-controlled or flow-controlled. Keep one (a junction has neither)"
                ),
            ))
        }
        (Some(p), None) => Port::Pressure(p.0),
        (None, Some(q)) => Port::Flow(q.0),
        (None, None) => Port::Junction,
    })
}

/// A node's storage: a well, trapped gas or a given compliance (at most one).
fn node_storage(name: &str, spec: &NodeSpec) -> Result<Option<Storage>, Misplaced> {
    let given = [
        spec.reservoir.is_some(),
        spec.gas_volume.is_some(),
        spec.compliance.is_some(),
        spec.tubing.is_some(),
    ];
    if given.iter().filter(|g| **g).count() > 1 {
        return Err(at(
            &["nodes", name],
            format!(
                "node '{name}' has more than one of 'reservoir', 'gas_volume', 'compliance' and \
                 'tubing'; \
                 give one storage per node (split the node with a short channel if both exist)"
            ),
        ));
    }
    if let Some(v) = spec.gas_volume {
        return Ok(Some(Storage::Gas { volume: v.0 }));
    }
    if let Some(c) = spec.compliance {
        return Ok(Some(Storage::Compliance(c.0)));
    }
    if let Some(t) = &spec.tubing {
        if spec.pressure.is_some() {
            return Err(at(
                &["nodes", name, "tubing"],
                "a pressure port holds its pressure, so tubing there stores nothing; put the \
                 tubing on a flow port or a junction",
            ));
        }
        return tubing(name, t).map(|c| Some(Storage::Compliance(Compliance::from_si(c))));
    }
    match &spec.reservoir {
        None => Ok(None),
        Some(r) => well(name, r, spec.elevation.is_some()).map(|w| Some(Storage::Well(w))),
    }
}

/// A well from its spec: the area given or from the diameter; a level on or above the datum
/// unless the well's elevation is given (the builder then checks level ≥ bottom).
/// The compliance of `nodes.NAME.tubing` [m³/Pa], its fields checked.
fn tubing(name: &str, t: &TubingSpec) -> Result<f64, Misplaced> {
    let positive = |field: &str, v: f64, unit: &str| {
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(at(
                &["nodes", name, "tubing", field],
                format!("must be positive, got {v} {unit}"),
            ))
        }
    };
    let poisson = t.poisson.unwrap_or(0.5);
    if !(0.0..=0.5).contains(&poisson) {
        return Err(at(
            &["nodes", name, "tubing", "poisson"],
            format!("Poisson's ratio must lie in 0 to 0.5, got {poisson}"),
        ));
    }
    let tube = crate::network::Tubing {
        inner_diameter: positive("inner_diameter", t.inner_diameter.0.si(), "m")?,
        wall: positive("wall", t.wall.0.si(), "m")?,
        length: positive("length", t.length.0.si(), "m")?,
        modulus: positive("modulus", t.modulus.0.si(), "Pa")?,
        poisson,
    };
    Ok(tube.compliance())
}

fn well(name: &str, r: &ReservoirSpec, has_elevation: bool) -> Result<Well, Misplaced> {
    let shape = well_shape(name, r)?;
    if r.level.0.si() < 0.0 && !has_elevation {
        return Err(at(
            &["nodes", name, "reservoir", "level"],
            format!(
                "must not be negative ({} m) for a well whose bottom is on the datum; \
                 give the well's 'elevation' if it sits below the chip",
                r.level.0.si()
            ),
        ));
    }
    Ok(Well {
        level: r.level.0,
        shape,
    })
}

/// A well's geometry: exactly one of `area`, `diameter` and `table`.
fn well_shape(name: &str, r: &ReservoirSpec) -> Result<WellShape, Misplaced> {
    let given = [
        ("area", r.area.is_some()),
        ("diameter", r.diameter.is_some()),
        ("table", r.table.is_some()),
    ];
    // Point at the second geometry given.
    if let Some((second, _)) = given.iter().filter(|(_, g)| *g).nth(1) {
        return Err(at(
            &["nodes", name, "reservoir", second],
            "give one of the well's 'area', 'diameter' or level–volume 'table', not several",
        ));
    }
    if let Some(a) = r.area {
        return Ok(WellShape::Prism { area: a.0 });
    }
    if let Some(d) = r.diameter {
        let d = d.0.si();
        if !(d.is_finite() && d > 0.0) {
            return Err(at(
                &["nodes", name, "reservoir", "diameter"],
                format!("must be a positive length, got {d} m"),
            ));
        }
        let area = Area::from_si(std::f64::consts::PI / 4.0 * d * d);
        return Ok(WellShape::Prism { area });
    }
    let Some(rows) = &r.table else {
        return Err(at(
            &["nodes", name, "reservoir"],
            format!(
                "reservoir '{name}' needs its wetted cross-section: 'area' (e.g. 12 mm^2), a \
                 cylinder 'diameter' (e.g. 5 mm) or a level–volume 'table' (e.g. \
                 [[0 mm, 0 uL], [4 mm, 30 uL], [8 mm, 110 uL]])"
            ),
        ));
    };
    let rows = rows.iter().map(|(h, v)| (h.0.si(), v.0.si())).collect();
    LevelTable::new(rows).map(WellShape::Table).map_err(|e| {
        at(
            &["nodes", name, "reservoir", "table"],
            format!(
                "{e} (rows are [level above the well's bottom, volume], counted from 0, \
                 bottom first)"
            ),
        )
    })
}

/// The notes of every measured-profile section, in file order.
fn profile_notes(network: &crate::network::Network) -> Vec<ModelNote> {
    network
        .sections
        .iter()
        .flat_map(|s| {
            s.shape
                .profile_notes()
                .into_iter()
                .map(|note| ModelNote::Profile {
                    section: s.name.clone(),
                    note,
                })
        })
        .collect()
}

/// Parse one section mapping in the chip-file syntax (`{shape: trapezoid, top: 120 um, ...}`).
pub fn parse_section_spec(
    text: &str,
    origin: &str,
    read: FileReader<'_>,
) -> Result<crate::section::Shape, InputError> {
    let spec: SectionSpec = read_yaml(text, origin).map_err(|mut e| {
        e.message.push_str(
            " (expected a mapping such as '{shape: trapezoid, top: 120 um, depth: 40 um, sidewall: 54.74 deg}')",
        );
        e
    })?;
    spec.to_shape(&[], read).map_err(|m| InputError {
        origin: origin.to_string(),
        line: None,
        column: None,
        field: Some(m.path.join(".")).filter(|p| !p.is_empty()),
        message: m.message,
    })
}

/// Deserialize YAML after the alias-expansion guard, with located errors.
fn read_yaml<T: serde::de::DeserializeOwned>(text: &str, origin: &str) -> Result<T, InputError> {
    if let Err(refusal) = yaml_guard::check(text) {
        let (line, column, message) = match refusal {
            yaml_guard::Refusal::Explosion(x) => (
                x.line,
                x.column,
                format!(
                    "YAML aliases here would expand to {} values from {} written ones; \
                     refused to protect memory. Write the values out, or reference smaller anchors",
                    x.expanded_events, x.written_events
                ),
            ),
            yaml_guard::Refusal::Unchecked {
                line,
                column,
                reason,
            } => (
                line,
                column,
                format!(
                    "the file uses YAML anchors and aliases, but its text cannot be checked for \
                     alias expansion here ({reason}); replace tabs before values and unusual line \
                     breaks (U+0085, U+2028) with spaces and plain newlines, or write the values out"
                ),
            ),
            yaml_guard::Refusal::TooDeep { line, column } => (
                line,
                column,
                format!(
                    "the text nests deeper than {} levels or is indented more than {} columns; \
                     chip files need a few levels — check for unbalanced brackets",
                    yaml_guard::MAX_FLOW_DEPTH,
                    yaml_guard::MAX_INDENT
                ),
            ),
        };
        return Err(InputError {
            origin: origin.to_string(),
            line: Some(line),
            column: Some(column),
            field: None,
            message,
        });
    }
    serde_yaml::from_str(text).map_err(|e| {
        let loc = e.location();
        InputError {
            origin: origin.to_string(),
            line: loc.as_ref().map(|l| l.line()),
            column: loc.as_ref().map(|l| l.column()),
            field: None,
            message: strip_position(&e.to_string()),
        }
    })
}

/// Largest chip file accepted (bytes). A 10⁶-channel file is about 80 MB of YAML.
pub const MAX_FILE_BYTES: usize = 1 << 30;

/// Remove serde's trailing " at line L column C" (we print the place up front) and put
/// Rust type names into the file's words.
fn strip_position(message: &str) -> String {
    let message = match message.rfind(" at line ") {
        Some(i) if message[i..].contains(" column ") => &message[..i],
        _ => message,
    };
    plain_words(message)
}

/// serde's "expected struct FluidSpec", "expected f64", … in the words of the file format.
fn plain_words(message: &str) -> String {
    let mut out = message.to_string();
    for (from, to) in [
        ("expected f64", "expected a number"),
        ("expected u64", "expected a whole number"),
        ("expected usize", "expected a whole number"),
        ("expected i64", "expected a whole number"),
        ("expected a borrowed string", "expected text"),
        ("expected a string", "expected text"),
        ("invalid type: string", "found the text"),
        ("invalid type: integer", "found the number"),
        ("invalid type: floating point", "found the number"),
        ("invalid type: map", "found a mapping"),
        ("invalid type: sequence", "found a list"),
        ("invalid type: boolean", "found"),
    ] {
        out = out.replace(from, to);
    }
    // "expected struct FluidSpec" / "expected enum ShapeKind": name no Rust type.
    for kind in ["struct ", "enum "] {
        while let Some(i) = out.find(&format!("expected {kind}")) {
            let start = i + "expected ".len();
            let end = out[start + kind.len()..]
                .find(|c: char| !c.is_alphanumeric() && c != '_')
                .map_or(out.len(), |e| start + kind.len() + e);
            let what = if kind == "struct " {
                "a mapping of keys and values"
            } else {
                "one of the listed words"
            };
            out.replace_range(start..end, what);
        }
    }
    out
}

/// Refuse a chip whose run would need more memory than the budget ([`crate::memory`]),
/// before building anything of that size.
fn within_budget(origin: &str, estimate: u64, from: &str) -> Result<(), InputError> {
    let budget = crate::memory::budget();
    if estimate <= budget {
        return Ok(());
    }
    let mb = |b: u64| b as f64 / 1e6;
    Err(InputError::whole_file(
        origin,
        format!(
            "running this chip would need about {:.0} MB of memory (estimated from {from}), \
             more than the budget of {:.0} MB; raise it with --memory-budget or {} \
             (default: {:.0} % of the physical memory), or split the chip",
            mb(estimate),
            mb(budget),
            crate::memory::ENV,
            crate::memory::FRACTION_OF_MEMORY * 100.0
        ),
    ))
}

/// Parse chip-file text into a validated network. `origin` names the file in errors.
/// Files named inside the chip (measured profiles) are refused; see [`parse_chip_with`].
pub fn parse_chip(text: &str, origin: &str, syntax: Syntax) -> Result<Chip, InputError> {
    parse_chip_with(text, origin, syntax, &|name: &str| {
        Err(format!(
            "'{name}': this chip was not read from a file, so files it names cannot be found"
        ))
    })
}

/// Parse chip-file text; `read` returns the text of files the chip names (profiles).
pub fn parse_chip_with(
    text: &str,
    origin: &str,
    syntax: Syntax,
    read: FileReader<'_>,
) -> Result<Chip, InputError> {
    parse_chip_owned(text.to_string(), origin, syntax, read)
}

/// [`parse_chip_with`] taking the text by value: the chip keeps it as its source without a
/// second copy (a 10⁶-channel file is about 100 MB).
pub fn parse_chip_owned(
    mut text: String,
    origin: &str,
    syntax: Syntax,
    read: FileReader<'_>,
) -> Result<Chip, InputError> {
    if text.len() > MAX_FILE_BYTES {
        return Err(InputError::whole_file(
            origin,
            format!(
                "the file is {} bytes; chip files are limited to {MAX_FILE_BYTES} bytes",
                text.len()
            ),
        ));
    }
    within_budget(origin, crate::memory::for_text(text.len()), "its size")?;
    // A byte-order mark is not part of the text (editors on some systems write one).
    if text.starts_with('\u{feff}') {
        text.drain(..'\u{feff}'.len_utf8());
    }
    let file: ChipFile = match syntax {
        Syntax::Yaml => read_yaml(&text, origin)?,
        Syntax::Json => {
            // Fast path without path tracking; on error, parse again to learn the field path.
            serde_json::from_str::<ChipFile>(&text).map_err(|plain| {
                let mut de = serde_json::Deserializer::from_str(&text);
                let path = match serde_path_to_error::deserialize::<_, ChipFile>(&mut de) {
                    Err(e) => Some(e.path().to_string()).filter(|p| p != "."),
                    Ok(_) => None,
                };
                InputError {
                    origin: origin.to_string(),
                    line: Some(plain.line()),
                    column: Some(plain.column()),
                    field: path,
                    message: strip_position(&plain.to_string()),
                }
            })?
        }
    };
    within_budget(
        origin,
        crate::memory::for_network(file.nodes.len(), file.channels.len()),
        &format!(
            "its {} nodes and {} channels",
            file.nodes.len(),
            file.channels.len()
        ),
    )?;
    let mut source = Source {
        origin: origin.to_string(),
        text,
        syntax,
    };
    file.into_chip(read, &mut source).map_err(|m| {
        let mut parts: Vec<&str> = m.path.iter().map(String::as_str).collect();
        if m.repeated {
            if let Some(last) = parts.last().copied() {
                parts.push(last);
            }
        }
        let place = locate(&source.text, &parts);
        InputError {
            origin: origin.to_string(),
            line: place.map(|p| p.0),
            column: place.map(|p| p.1),
            field: Some(m.path.join(".")),
            message: m.message,
        }
    })
}
