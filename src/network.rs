//! The chip as a graph: nodes (junctions and ports) joined by channels.
//!
//! A [`Network`] is built only through [`NetworkBuilder`], which checks names and
//! connectivity, so a `Network` value is always solvable: every connected part has at least
//! one pressure port (otherwise its pressures are undetermined, a singular system).
//!
//! Invariants:
//! - node `i` of [`Network::nodes`] is `NodeIndex::new(i)` in [`Network::graph`], channel `k`
//!   is `EdgeIndex::new(k)`;
//! - a channel's flow is positive from `from` to `to`;
//! - every value is SI.

use crate::fluid::Fluid;
use crate::index_vec::IdVec;
use crate::level_table::LevelTable;
use crate::section::numeric::NumericOptions;
use crate::section::{GeometryKey, SectionFigures, Shape};
use crate::units::{Area, Compliance, Length, Pressure, Volume, VolumeFlow};
use petgraph::graph::UnGraph;
use petgraph::unionfind::UnionFind;
use rustc_hash::FxHashMap as HashMap;

/// Index of a node in [`Network::nodes`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct NodeId(pub usize);

/// Index of a section in [`Network::sections`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct SectionId(pub usize);

/// Index of a channel in [`Network::channels`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct ChannelId(pub usize);

crate::impl_id!(NodeId);
crate::impl_id!(SectionId);
crate::impl_id!(ChannelId);

/// What drives or constrains a node.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Port {
    /// An internal junction: flow in equals flow out.
    Junction,
    /// A pressure-controlled port (pressure controller, reservoir, open outlet); gauge.
    Pressure(Pressure),
    /// A flow-controlled port (syringe pump): this flow enters the chip here.
    /// Negative values withdraw fluid.
    Flow(VolumeFlow),
}

/// A node of the chip.
#[derive(Clone, Debug, PartialEq)]
pub struct Node {
    pub name: String,
    /// For a pressure port, the set static (gauge) pressure at the node's elevation; for an
    /// open well ([`Storage::Well`]) the gas pressure above its free surface.
    pub port: Port,
    /// Height z of the node above the chip's datum (z = 0, the chip plane) [m]; for a well,
    /// the height of its bottom. Positive up.
    pub elevation: Length,
    /// Volume this node can store as its pressure changes, if any (time evolution only: a
    /// steady state does not depend on it, except a well's level, which sets its pressure).
    pub storage: Option<Storage>,
}

/// Standard gravity g_n = 9.806 65 m/s² (3rd CGPM, 1901; NIST SP 811).
pub const STANDARD_GRAVITY: f64 = 9.806_65;

/// Standard atmosphere, 101 325 Pa (NIST SP 811): the ambient pressure gauge pressures are
/// measured from, used where an absolute pressure is needed (Boyle's law for trapped gas).
pub const STANDARD_ATMOSPHERE: f64 = 101_325.0;

/// An open well: a free liquid surface at `level` above the datum, in a well whose wetted
/// cross-section is constant ([`WellShape::Prism`]) or follows a level–volume table
/// ([`WellShape::Table`]), under gas at gauge pressure `port` of its node.
#[derive(Clone, Debug, PartialEq)]
pub struct Well {
    /// Height of the free surface above the datum (not above the well bottom) [m].
    pub level: Length,
    /// How the well's volume grows with its level.
    pub shape: WellShape,
}

/// A well's geometry: how much liquid it holds at a given level.
#[derive(Clone, Debug, PartialEq)]
pub enum WellShape {
    /// The same wetted cross-section [m²] at every height (a cylinder or prism).
    Prism { area: Area },
    /// Volume against height above the bottom, linear between rows (a cone, a pipette tip,
    /// a stepped or moulded well; [`LevelTable`]).
    Table(LevelTable),
}

impl Well {
    /// Wetted cross-section [m²] with the surface at `height` above the well's bottom.
    pub fn area_at(&self, height: f64) -> f64 {
        match &self.shape {
            WellShape::Prism { area } => area.si(),
            WellShape::Table(t) => t.area(height),
        }
    }
}

/// Storage (hydraulic compliance) at a node: dV/dp, the volume taken up per unit pressure.
#[derive(Clone, Debug, PartialEq)]
pub enum Storage {
    /// Open well: V = V(level − bottom), piezometric pressure P = p_gas + ρ·g·level, so
    /// C = dV/dP = A(level)/(ρ·g) with A the wetted cross-section at the surface (hydrostatics;
    /// Bruus, *Theoretical Microfluidics* 2008, ch. 4, hydraulic compliance). For a prismatic
    /// well C is constant; for a table it changes with the level, and `evolve` follows V(h)
    /// itself, not a linearisation. The node is a pressure port in a steady solve (its level
    /// as stated).
    Well(Well),
    /// Trapped gas of volume V at the node's initial pressure (a bubble in a syringe, an air
    /// damper), isothermal: p_abs·V = const (Boyle's law), so C = −dV/dp = V/p_abs with
    /// p_abs = 101 325 Pa + p. `evolve` follows the law itself (p_abs·V = p_abs,0·V₀, so
    /// C = p_abs,0·V₀/p_abs² at the current pressure), not a linearisation. Valid
    /// while the gas stays trapped and isothermal (changes slower than about a second for
    /// microlitre bubbles; common practice).
    Gas {
        /// Gas volume at the initial state [m³].
        volume: Volume,
    },
    /// A given compliance dV/dp (soft tubing, a PDMS chamber), constant: measured or from the
    /// supplier, e.g. 0.5 µL/bar, or computed from a tubing's wall ([`Tubing::compliance`]).
    Compliance(Compliance),
}

/// A length of elastic tubing (silicone, Tygon, PDMS), whose compliance follows from its
/// material and geometry.
///
/// Model: the thick-walled cylinder under internal pressure p (Lamé's solution; Timoshenko &
/// Goodier, *Theory of Elasticity*, 3rd ed. 1970, thick-walled cylinder), ends free (open
/// tube, axial stress 0: plane stress), linear elastic, small strain. With inner radius a and
/// outer radius b = a + wall, the hoop stress at the bore is p·(b² + a²)/(b² − a²) and the
/// radial stress −p, so the bore's hoop strain is (p/E)·((b² + a²)/(b² − a²) + ν) and
///   C = dV/dp = 2π·a²·L/E · ((b² + a²)/(b² − a²) + ν).
/// For a thin wall (t ≪ d) this tends to the thin-wall formula C = π·d³·L/(4·E·t), with a
/// relative difference of order t/d. Common tubing has t/d ≈ 0.5 or more, outside the
/// thin-wall range, hence Lamé. Valid while the strain p/E·(…) stays small (a few percent:
/// p well below E/10) and the wall is not prestressed by a fitting; the axial stretch of a
/// capped or bonded tube (plane strain) differs by a factor of order one in the ν term only.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tubing {
    /// Bore diameter d [m].
    pub inner_diameter: f64,
    /// Wall thickness t [m].
    pub wall: f64,
    /// Length L [m].
    pub length: f64,
    /// Young's modulus E of the wall material [Pa].
    pub modulus: f64,
    /// Poisson's ratio ν (0.5 for elastomers, nearly incompressible: common practice).
    pub poisson: f64,
}

impl Tubing {
    /// Lamé compliance dV/dp [m³/Pa] (see the type's doc).
    pub fn compliance(&self) -> f64 {
        let a = 0.5 * self.inner_diameter;
        let b = a + self.wall;
        let (a2, b2) = (a * a, b * b);
        2.0 * std::f64::consts::PI * a2 * self.length / self.modulus
            * ((b2 + a2) / (b2 - a2) + self.poisson)
    }

    /// The thin-wall limit π·d³·L/(4·E·t) [m³/Pa], the check of [`Tubing::compliance`].
    pub fn thin_wall_compliance(&self) -> f64 {
        std::f64::consts::PI * self.inner_diameter.powi(3) * self.length
            / (4.0 * self.modulus * self.wall)
    }
}

/// A cross-section with its precomputed laminar figures.
#[derive(Clone, Debug, PartialEq)]
pub struct Section {
    /// The name given in the file; for an inline section, `CHANNEL.section` of the first
    /// channel that uses it.
    pub name: String,
    /// Declared under `sections:` (true), or given inline on channels (false). Inline
    /// sections of identical geometry share one entry; named sections never merge.
    pub named: bool,
    pub shape: Shape,
    pub figures: SectionFigures,
}

/// A straight channel segment between two nodes.
#[derive(Clone, Debug, PartialEq)]
pub struct Channel {
    pub name: String,
    pub from: NodeId,
    pub to: NodeId,
    pub section: SectionId,
    pub length: Length,
    /// This channel's own wall-shear limit, overriding the fluid's cells' limit.
    pub shear_limit: Option<Pressure>,
}

/// A validated chip network.
#[derive(Clone, Debug)]
pub struct Network {
    pub fluid: Fluid,
    pub nodes: IdVec<NodeId, Node>,
    pub sections: IdVec<SectionId, Section>,
    pub channels: IdVec<ChannelId, Channel>,
    /// Highest gauge pressure the chip is rated for, if given.
    pub pressure_rating: Option<Pressure>,
    /// Relative error target the numerically solved sections were solved to.
    pub section_tolerance: f64,
    /// Gravitational acceleration g [m/s²] for hydrostatic heads.
    pub gravity: f64,
    graph: UnGraph<NodeId, ChannelId>,
}

/// What is wrong with the network as described. The `field` names a place the file layer
/// can locate (see [`NetworkError::place`]).
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum NetworkError {
    #[error("node '{name}' is defined twice; node names must be unique")]
    DuplicateNode { name: String },
    #[error("section '{name}' is defined twice; section names must be unique")]
    DuplicateSection { name: String },
    #[error("channel '{name}' is defined twice; channel names must be unique")]
    DuplicateChannel { name: String },
    #[error("channel '{channel}' {field}: unknown node '{node}'{hint}")]
    UnknownNode {
        channel: String,
        field: &'static str,
        node: String,
        hint: String,
    },
    #[error("channel '{channel}' section: unknown section '{section}'{hint}")]
    UnknownSection {
        channel: String,
        section: String,
        hint: String,
    },
    #[error("channel '{channel}' runs from node '{node}' to itself; a channel must join two different nodes")]
    SelfLoop { channel: String, node: String },
    #[error("channel '{channel}' length: must be a positive finite length, got {value} m")]
    BadLength { channel: String, value: f64 },
    #[error("section '{section}' {problem}")]
    BadSection { section: String, problem: String },
    #[error("node '{node}' {field}: must be finite, got {value}")]
    BadPortValue {
        node: String,
        field: &'static str,
        value: f64,
    },
    #[error(
        "the pressures of {count} node(s) are undetermined: {listed} {verb} not connected to any pressure port. \
         Connect them through channels to a node with a 'pressure:' (e.g. an outlet at 0 Pa), or remove them"
    )]
    Floating {
        count: usize,
        listed: String,
        verb: &'static str,
        nodes: Vec<String>,
    },
    #[error("the chip has no channels; add at least one channel between two nodes")]
    Empty,
    #[error(
        "the chip has {nodes} nodes and {channels} channels; rillnet solves at most {limit} \
         nodes and channels together. Split the network into parts joined at pressure ports"
    )]
    TooLarge {
        nodes: usize,
        channels: usize,
        limit: usize,
    },
    #[error(
        "{kind} name '{shown}' contains {what} (U+{code:04X}); names may not hide characters. \
         Use visible letters, digits, '_', '-' or '.'"
    )]
    BadName {
        kind: &'static str,
        name: String,
        shown: String,
        what: &'static str,
        code: u32,
    },
    #[error("{place}: must be a positive finite pressure, got {value} Pa")]
    BadLimit { place: String, value: f64 },
    #[error("gravity: must be an acceleration from 0 to 1000 m/s^2, got {value} m/s^2")]
    BadGravity { value: f64 },
    #[error("node '{node}' {field}: {problem}")]
    BadStorage {
        node: String,
        field: &'static str,
        problem: String,
    },
}

/// Where in the chip description an error belongs: a path of keys. For a duplicate name
/// the last key occurs twice; `repeated` asks for its second occurrence.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Place {
    pub keys: Vec<String>,
    pub repeated: bool,
}

impl NetworkError {
    /// The key path (e.g. `channels.c3.to`) the error refers to, for locating it in a file.
    pub fn place(&self) -> Place {
        let keys = |parts: &[&str]| parts.iter().map(|s| s.to_string()).collect();
        let p = |parts: &[&str]| Place {
            keys: keys(parts),
            repeated: false,
        };
        let twice = |parts: &[&str]| Place {
            keys: keys(parts),
            repeated: true,
        };
        match self {
            NetworkError::DuplicateNode { name } => twice(&["nodes", name]),
            NetworkError::DuplicateSection { name } => twice(&["sections", name]),
            NetworkError::DuplicateChannel { name } => twice(&["channels", name]),
            NetworkError::UnknownNode { channel, field, .. } => p(&["channels", channel, field]),
            NetworkError::UnknownSection { channel, .. } => p(&["channels", channel, "section"]),
            NetworkError::SelfLoop { channel, .. } => p(&["channels", channel, "to"]),
            NetworkError::BadLength { channel, .. } => p(&["channels", channel, "length"]),
            NetworkError::BadSection { section, .. } => p(&["sections", section]),
            NetworkError::BadPortValue { node, field, .. } => p(&["nodes", node, field]),
            NetworkError::Floating { nodes, .. } => match nodes.first() {
                Some(first) => p(&["nodes", first]),
                None => p(&["nodes"]),
            },
            NetworkError::Empty | NetworkError::TooLarge { .. } => p(&["channels"]),
            NetworkError::BadName { kind, name, .. } => match *kind {
                "node" => p(&["nodes", name]),
                "section" => p(&["sections", name]),
                _ => p(&["channels", name]),
            },
            NetworkError::BadGravity { .. } => p(&["gravity"]),
            NetworkError::BadStorage { node, field, .. } => {
                let mut keys = vec!["nodes".to_string(), node.clone()];
                keys.extend(field.split('.').map(str::to_string));
                Place {
                    keys,
                    repeated: false,
                }
            }
            NetworkError::BadLimit { place, .. } => Place {
                keys: place.split('.').map(str::to_string).collect(),
                repeated: false,
            },
        }
    }
}

/// What a character hides, if it is a control, invisible or direction-changing character that
/// would hide or reorder printed text; `None` for an ordinary character.
pub fn hidden_char(c: char) -> Option<&'static str> {
    match c {
        c if c.is_control() => Some("a control character"),
        '\u{200B}'..='\u{200F}' | '\u{2060}' | '\u{FEFF}' => Some("an invisible character"),
        '\u{202A}'..='\u{202E}' | '\u{2066}'..='\u{2069}' => {
            Some("a character that changes the text direction")
        }
        _ => None,
    }
}

/// Refuse names with control, zero-width or direction-changing characters: printed in a
/// table they would hide or reorder text.
fn check_name(kind: &'static str, name: &str) -> Result<(), NetworkError> {
    match name.chars().find_map(|c| hidden_char(c).map(|w| (c, w))) {
        None => Ok(()),
        Some((c, what)) => Err(NetworkError::BadName {
            kind,
            name: name.to_string(),
            shown: name.escape_default().to_string(),
            what,
            code: c as u32,
        }),
    }
}

/// Suggest a close name ("did you mean 'tee'?") when one differs by little.
fn suggestion<'a>(wanted: &str, names: impl Iterator<Item = &'a str>) -> String {
    let mut best: Option<(usize, &str)> = None;
    for name in names {
        let d = edit_distance(wanted, name);
        if d <= 2.max(wanted.len() / 4) && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, name));
        }
    }
    match best {
        Some((_, name)) => format!(" (did you mean '{name}'?)"),
        None => String::new(),
    }
}

fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, &cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

/// The rules of [`NetworkBuilder::node_storage`]: (field, problem) on failure.
fn check_storage(
    n: &Node,
    elevation: Length,
    storage: Option<&Storage>,
) -> Result<(), (&'static str, String)> {
    let pressure_port = matches!(n.port, Port::Pressure(_));
    match storage {
        None => Ok(()),
        Some(Storage::Well(w)) => {
            if !pressure_port {
                return Err((
                    "reservoir",
                    "a well is a pressure port (gas pressure above its surface); remove 'flow'"
                        .into(),
                ));
            }
            if let WellShape::Prism { area } = &w.shape {
                let a = area.si();
                if !(a.is_finite() && a > 0.0) {
                    return Err((
                        "reservoir.area",
                        format!("must be a positive area, got {a} m^2"),
                    ));
                }
            }
            let level = w.level.si();
            if !level.is_finite() || level < elevation.si() {
                return Err((
                    "reservoir.level",
                    format!(
                        "the free surface ({level} m above the datum) is below the well's bottom \
                         (its elevation, {} m); a level is measured from the datum, not from the \
                         well bottom",
                        elevation.si()
                    ),
                ));
            }
            if let WellShape::Table(t) = &w.shape {
                let height = level - elevation.si();
                if height > t.top() {
                    return Err((
                        "reservoir.level",
                        format!(
                            "the free surface stands {height} m above the well's bottom, over \
                             the table's last row ({} m): the well would overflow; extend the \
                             table to the well's brim or lower the level",
                            t.top()
                        ),
                    ));
                }
            }
            Ok(())
        }
        Some(Storage::Gas { volume }) => {
            let v = volume.si();
            if pressure_port {
                return Err((
                    "gas_volume",
                    "a pressure port holds its pressure, so trapped gas there stores nothing; \
                         put the gas on a flow port or a junction"
                        .into(),
                ));
            }
            if !(v.is_finite() && v > 0.0) {
                return Err((
                    "gas_volume",
                    format!("must be a positive volume, got {v} m^3"),
                ));
            }
            Ok(())
        }
        Some(Storage::Compliance(c)) => {
            let c = c.si();
            if pressure_port {
                return Err((
                    "compliance",
                    "a pressure port holds its pressure, so a compliance there stores nothing; \
                         put it on a flow port or a junction"
                        .into(),
                ));
            }
            if !(c.is_finite() && c > 0.0) {
                return Err(("compliance", format!("must be positive, got {c} m^3/Pa")));
            }
            Ok(())
        }
    }
}

/// Names → indices without a second copy of each name: an open-addressing table (linear
/// probing, at most half full) of indices into the builder's own nodes or channels, whose
/// names are the keys. About 8–16 bytes per name where a `HashMap<String, _>` took a copy of
/// the name and its own entry (≈ 70 bytes per name at 10⁶ channels).
#[derive(Debug, Default)]
struct NameIndex {
    /// `usize::MAX` marks an empty slot; the length is 0 or a power of two.
    slots: Vec<usize>,
    len: usize,
}

impl NameIndex {
    const EMPTY: usize = usize::MAX;

    fn hash(name: &str) -> usize {
        use std::hash::{Hash, Hasher};
        let mut h = rustc_hash::FxHasher::default();
        name.hash(&mut h);
        h.finish() as usize
    }

    /// Room for `n` names without growing (`key(i)`: the name of index `i`).
    fn reserve<'a>(&mut self, n: usize, key: impl Fn(usize) -> &'a str) {
        let want = n.saturating_mul(2).max(16).next_power_of_two();
        if want > self.slots.len() {
            let old = std::mem::replace(&mut self.slots, vec![Self::EMPTY; want]);
            for id in old.into_iter().filter(|&id| id != Self::EMPTY) {
                let at = self.free_slot(key(id));
                self.slots[at] = id;
            }
        }
    }

    /// The first empty slot on `name`'s probe path (the table is never full).
    fn free_slot(&self, name: &str) -> usize {
        let mask = self.slots.len() - 1;
        let mut at = Self::hash(name) & mask;
        while self.slots[at] != Self::EMPTY {
            at = (at + 1) & mask;
        }
        at
    }

    /// Add index `id` under `name`; false (and nothing added) when the name is taken.
    fn insert<'a>(&mut self, id: usize, name: &str, key: impl Fn(usize) -> &'a str) -> bool {
        if self.get(name, &key).is_some() {
            return false;
        }
        self.reserve(self.len + 1, &key);
        let at = self.free_slot(name);
        self.slots[at] = id;
        self.len += 1;
        true
    }

    /// The index named `name`; `key(i)` is the name of index `i`.
    fn get<'a>(&self, name: &str, key: &impl Fn(usize) -> &'a str) -> Option<usize> {
        if self.slots.is_empty() {
            return None;
        }
        let mask = self.slots.len() - 1;
        let mut at = Self::hash(name) & mask;
        loop {
            match self.slots[at] {
                Self::EMPTY => return None,
                id if key(id) == name => return Some(id),
                _ => at = (at + 1) & mask,
            }
        }
    }
}

/// Builds a [`Network`] by name, checking as it goes.
#[derive(Debug)]
pub struct NetworkBuilder {
    fluid: Fluid,
    nodes: Vec<Node>,
    node_index: NameIndex,
    sections: Vec<Section>,
    section_index: HashMap<String, SectionId>,
    /// Figures per geometry, so each geometry is solved once.
    figure_cache: HashMap<GeometryKey, SectionFigures>,
    /// Inline sections of identical geometry share one section.
    inline_cache: HashMap<GeometryKey, SectionId>,
    channels: Vec<Channel>,
    channel_names: NameIndex,
    pressure_rating: Option<Pressure>,
    numeric: NumericOptions,
    gravity: f64,
}

impl NetworkBuilder {
    pub fn new(fluid: Fluid) -> Self {
        NetworkBuilder {
            fluid,
            nodes: Vec::new(),
            node_index: NameIndex::default(),
            sections: Vec::new(),
            section_index: HashMap::default(),
            figure_cache: HashMap::default(),
            inline_cache: HashMap::default(),
            channels: Vec::new(),
            channel_names: NameIndex::default(),
            pressure_rating: None,
            numeric: NumericOptions::default(),
            gravity: STANDARD_GRAVITY,
        }
    }

    /// Gravitational acceleration for hydrostatic heads (default [`STANDARD_GRAVITY`]).
    pub fn gravity(&mut self, g: f64) -> Result<&mut Self, NetworkError> {
        if !(g.is_finite() && (0.0..=1e3).contains(&g)) {
            return Err(NetworkError::BadGravity { value: g });
        }
        self.gravity = g;
        Ok(self)
    }

    /// Give a node an elevation and storage (after [`NetworkBuilder::add_node`]). A well must
    /// sit on a pressure port (its gas pressure), with a positive area and its level at or
    /// above its bottom (the node's elevation); gas and compliance may not sit on a pressure
    /// port (a set pressure stores nothing that changes).
    pub fn node_storage(
        &mut self,
        node: NodeId,
        elevation: Length,
        storage: Option<Storage>,
    ) -> Result<&mut Self, NetworkError> {
        let n = &self.nodes[node.0];
        let bad = |field: &'static str, problem: String| NetworkError::BadStorage {
            node: n.name.clone(),
            field,
            problem,
        };
        if !elevation.si().is_finite() {
            return Err(bad("elevation", "must be a finite length".into()));
        }
        check_storage(n, elevation, storage.as_ref()).map_err(|(f, p)| bad(f, p))?;
        let n = &mut self.nodes[node.0];
        n.elevation = elevation;
        n.storage = storage;
        Ok(self)
    }

    /// Reserve room for a large network.
    pub fn with_capacity(mut self, nodes: usize, channels: usize) -> Self {
        self.nodes.reserve(nodes);
        let names = &self.nodes;
        self.node_index
            .reserve(nodes, |i| names.get(i).map_or("", |n| n.name.as_str()));
        self.channels.reserve(channels);
        let names = &self.channels;
        self.channel_names
            .reserve(channels, |i| names.get(i).map_or("", |c| c.name.as_str()));
        self
    }

    /// Accuracy of numerically solved sections added after this call.
    pub fn numeric_options(&mut self, opts: NumericOptions) -> &mut Self {
        self.numeric = opts;
        self
    }

    /// Set the chip's pressure rating.
    pub fn pressure_rating(&mut self, rating: Pressure) -> Result<&mut Self, NetworkError> {
        if !(rating.si().is_finite() && rating.si() > 0.0) {
            return Err(NetworkError::BadLimit {
                place: "pressure_rating".into(),
                value: rating.si(),
            });
        }
        self.pressure_rating = Some(rating);
        Ok(self)
    }

    /// Give a channel its own wall-shear limit.
    pub fn channel_shear_limit(
        &mut self,
        channel: ChannelId,
        limit: Pressure,
    ) -> Result<&mut Self, NetworkError> {
        if !(limit.si().is_finite() && limit.si() > 0.0) {
            return Err(NetworkError::BadLimit {
                place: format!("channels.{}.shear_limit", self.channels[channel.0].name),
                value: limit.si(),
            });
        }
        self.channels[channel.0].shear_limit = Some(limit);
        Ok(self)
    }

    pub fn add_node(&mut self, name: &str, port: Port) -> Result<NodeId, NetworkError> {
        check_name("node", name)?;
        let bad = |field, value: f64| NetworkError::BadPortValue {
            node: name.to_string(),
            field,
            value,
        };
        match port {
            Port::Pressure(p) if !p.si().is_finite() => return Err(bad("pressure", p.si())),
            Port::Flow(q) if !q.si().is_finite() => return Err(bad("flow", q.si())),
            _ => {}
        }
        let id = NodeId(self.nodes.len());
        let names = &self.nodes;
        let key = |i: usize| names.get(i).map_or("", |n: &Node| n.name.as_str());
        if !self.node_index.insert(id.0, name, key) {
            return Err(NetworkError::DuplicateNode {
                name: name.to_string(),
            });
        }
        self.nodes.push(Node {
            name: name.to_string(),
            port,
            elevation: Length::from_si(0.0),
            storage: None,
        });
        Ok(id)
    }

    /// Add a named section. Its shape is checked and its figures computed (once per
    /// geometry: a second section of the same shape reuses them but keeps its own name).
    pub fn add_section(&mut self, name: &str, shape: Shape) -> Result<SectionId, NetworkError> {
        check_name("section", name)?;
        if self.section_index.contains_key(name) {
            return Err(NetworkError::DuplicateSection {
                name: name.to_string(),
            });
        }
        let figures = self.figures(name, &shape)?;
        let id = self.push_section(name, shape, figures, true);
        self.section_index.insert(name.to_string(), id);
        Ok(id)
    }

    /// A section given inline on a channel: shared with any identical inline shape seen
    /// before.
    pub fn inline_section(
        &mut self,
        channel: &str,
        shape: Shape,
    ) -> Result<SectionId, NetworkError> {
        let name = format!("{channel}.section");
        let figures = self.figures(&name, &shape)?;
        let key = shape.geometry_key();
        if let Some(&id) = self.inline_cache.get(&key) {
            return Ok(id);
        }
        let id = self.push_section(&name, shape, figures, false);
        self.inline_cache.insert(key, id);
        Ok(id)
    }

    fn push_section(
        &mut self,
        name: &str,
        shape: Shape,
        figures: SectionFigures,
        named: bool,
    ) -> SectionId {
        let id = SectionId(self.sections.len());
        self.sections.push(Section {
            name: name.to_string(),
            named,
            shape,
            figures,
        });
        id
    }

    /// Check a shape and compute its figures, reusing those of an identical geometry.
    fn figures(&mut self, name: &str, shape: &Shape) -> Result<SectionFigures, NetworkError> {
        let bad = |problem: String| NetworkError::BadSection {
            section: name.to_string(),
            problem,
        };
        shape.check().map_err(|e| bad(e.to_string()))?;
        let key = shape.geometry_key();
        if let Some(f) = self.figure_cache.get(&key) {
            return Ok(*f);
        }
        let (figures, _) = shape
            .figures_with(&self.numeric)
            .map_err(|e| bad(e.to_string()))?;
        if !figures.relative_error_estimate.is_finite() {
            // One mesh only: nothing says how far its figures are off.
            return Err(bad(format!(
                "no error estimate could be made: the first mesh already used the node budget \
                 ({} nodes), so its figures are of unknown accuracy; simplify the outline, or use \
                 a closed-form shape (rectangle, plates) for a very thin slit",
                self.numeric.max_nodes
            )));
        }
        self.figure_cache.insert(key, figures);
        Ok(figures)
    }

    /// Look up a named section.
    pub fn section(&self, channel: &str, name: &str) -> Result<SectionId, NetworkError> {
        self.section_index
            .get(name)
            .copied()
            .ok_or_else(|| NetworkError::UnknownSection {
                channel: channel.to_string(),
                section: name.to_string(),
                hint: suggestion(name, self.section_index.keys().map(String::as_str)),
            })
    }

    fn node(&self, channel: &str, field: &'static str, name: &str) -> Result<NodeId, NetworkError> {
        let key = |i: usize| self.nodes.get(i).map_or("", |n: &Node| n.name.as_str());
        self.node_index
            .get(name, &key)
            .map(NodeId)
            .ok_or_else(|| NetworkError::UnknownNode {
                channel: channel.to_string(),
                field,
                node: name.to_string(),
                hint: suggestion(name, self.nodes.iter().map(|n| n.name.as_str())),
            })
    }

    pub fn add_channel(
        &mut self,
        name: &str,
        from: &str,
        to: &str,
        section: SectionId,
        length: Length,
    ) -> Result<ChannelId, NetworkError> {
        check_name("channel", name)?;
        let from_id = self.node(name, "from", from)?;
        let to_id = self.node(name, "to", to)?;
        if from_id == to_id {
            return Err(NetworkError::SelfLoop {
                channel: name.to_string(),
                node: from.to_string(),
            });
        }
        let l = length.si();
        if !(l.is_finite() && l > 0.0) {
            return Err(NetworkError::BadLength {
                channel: name.to_string(),
                value: l,
            });
        }
        let id = ChannelId(self.channels.len());
        let names = &self.channels;
        let key = |i: usize| names.get(i).map_or("", |c: &Channel| c.name.as_str());
        if !self.channel_names.insert(id.0, name, key) {
            return Err(NetworkError::DuplicateChannel {
                name: name.to_string(),
            });
        }
        self.channels.push(Channel {
            name: name.to_string(),
            from: from_id,
            to: to_id,
            section,
            length,
            shear_limit: None,
        });
        Ok(id)
    }

    /// Finish: build the graph and refuse any part whose pressures are undetermined.
    pub fn build(self) -> Result<Network, NetworkError> {
        if self.channels.is_empty() {
            return Err(NetworkError::Empty);
        }
        // Node and channel indices, matrix slots (one per unknown and one per channel at
        // most) and the elimination's edge numbers are held in 32 bits with the top bit free.
        let limit = i32::MAX as usize;
        if self.nodes.len() + self.channels.len() > limit {
            return Err(NetworkError::TooLarge {
                nodes: self.nodes.len(),
                channels: self.channels.len(),
                limit,
            });
        }
        let mut graph = UnGraph::with_capacity(self.nodes.len(), self.channels.len());
        for i in 0..self.nodes.len() {
            graph.add_node(NodeId(i));
        }
        let mut parts = UnionFind::<usize>::new(self.nodes.len());
        for (k, c) in self.channels.iter().enumerate() {
            graph.add_edge(
                petgraph::graph::NodeIndex::new(c.from.0),
                petgraph::graph::NodeIndex::new(c.to.0),
                ChannelId(k),
            );
            parts.union(c.from.0, c.to.0);
        }
        let labels = parts.into_labeling();
        let mut anchored = vec![false; self.nodes.len()];
        for (i, n) in self.nodes.iter().enumerate() {
            if matches!(n.port, Port::Pressure(_)) {
                anchored[labels[i]] = true;
            }
        }
        let floating: Vec<String> = self
            .nodes
            .iter()
            .enumerate()
            .filter(|(i, _)| !anchored[labels[*i]])
            .map(|(_, n)| n.name.clone())
            .collect();
        if !floating.is_empty() {
            const SHOWN: usize = 12;
            let mut listed = floating
                .iter()
                .take(SHOWN)
                .map(|n| format!("'{n}'"))
                .collect::<Vec<_>>()
                .join(", ");
            if floating.len() > SHOWN {
                listed.push_str(&format!(" and {} more", floating.len() - SHOWN));
            }
            return Err(NetworkError::Floating {
                count: floating.len(),
                verb: if floating.len() == 1 { "is" } else { "are" },
                listed,
                nodes: floating,
            });
        }
        Ok(Network {
            fluid: self.fluid,
            nodes: self.nodes.into(),
            sections: self.sections.into(),
            channels: self.channels.into(),
            pressure_rating: self.pressure_rating,
            section_tolerance: self.numeric.tolerance,
            gravity: self.gravity,
            graph,
        })
    }
}

impl Network {
    /// The chip as an undirected petgraph graph (node weights are [`NodeId`]s, edge weights
    /// [`ChannelId`]s; indices coincide).
    pub fn graph(&self) -> &UnGraph<NodeId, ChannelId> {
        &self.graph
    }

    /// The channels meeting at `node`, each with the node at its other end, in O(degree).
    pub fn incident(&self, node: NodeId) -> impl Iterator<Item = (ChannelId, NodeId)> + '_ {
        self.graph
            .edges(petgraph::graph::NodeIndex::new(node.0))
            .map(move |e| {
                let c = *e.weight();
                let ch = &self.channels[c];
                (c, if ch.from == node { ch.to } else { ch.from })
            })
    }

    /// Number of channels meeting at `node`.
    pub fn degree(&self, node: NodeId) -> usize {
        self.graph
            .edges(petgraph::graph::NodeIndex::new(node.0))
            .count()
    }

    /// Channels that can carry no flow in any steady state: those of dead-end branches,
    /// found by peeling junctions (no port) joined to the rest by a single channel, again
    /// and again, in O(nodes + channels). Their computed flows are rounding noise.
    ///
    /// Two sequential passes and no adjacency lists: each node keeps its count of live
    /// channels and the XOR of their indices, so a node with one live channel left names it
    /// exactly (the peeling of "invertible Bloom lookup tables", Goodrich & Mitzenmacher
    /// 2011). Channels never join a node to itself (the builder refuses it), so every
    /// channel counts once at each of its two ends. A peeled branch is followed to its end
    /// at once, so no work list is needed.
    pub fn dead_end_channels(&self) -> Vec<bool> {
        dead_end_mask(self.nodes.len(), &self.channel_ends(), |i| {
            self.nodes[NodeId(i)].port == Port::Junction
        })
    }

    /// Every channel's (from, to) node indices, 8 bytes a channel ([`NetworkBuilder::build`]
    /// keeps every index below `u32::MAX`).
    pub fn channel_ends(&self) -> Vec<[u32; 2]> {
        self.channels
            .iter()
            .map(|c| [c.from.0 as u32, c.to.0 as u32])
            .collect()
    }

    /// Hydraulic resistance of a channel, R = μ·L/K [Pa·s/m³].
    pub fn resistance(&self, channel: ChannelId) -> f64 {
        let c = &self.channels[channel];
        let s = &self.sections[c.section];
        s.figures.resistance_per_length(self.fluid.viscosity.si()) * c.length.si()
    }

    /// Look a node up by name.
    pub fn node_id(&self, name: &str) -> Option<NodeId> {
        self.nodes.iter().position(|n| n.name == name).map(NodeId)
    }

    /// Look a channel up by name.
    pub fn channel_id(&self, name: &str) -> Option<ChannelId> {
        self.channels
            .iter()
            .position(|c| c.name == name)
            .map(ChannelId)
    }

    /// ρ·g [Pa/m]: hydrostatic pressure per metre of height.
    pub fn specific_weight(&self) -> f64 {
        self.fluid.density.si() * self.gravity
    }

    /// The piezometric pressure P = p + ρ·g·z a pressure port imposes [Pa]: its set static
    /// pressure at its elevation, or for a well its gas pressure plus ρ·g·level. None for
    /// junctions and flow ports. This is what the Kirchhoff system solves for; the static
    /// pressure at a node is P − ρ·g·z ([`Network::static_pressure`]).
    pub fn imposed_head(&self, node: NodeId) -> Option<f64> {
        let n = &self.nodes[node];
        let Port::Pressure(p) = n.port else {
            return None;
        };
        let height = match &n.storage {
            Some(Storage::Well(w)) => w.level.si(),
            _ => n.elevation.si(),
        };
        Some(p.si() + self.specific_weight() * height)
    }

    /// Static (gauge) pressure at a node from its piezometric pressure: p = P − ρ·g·z. At a
    /// well this is the pressure at its bottom.
    pub fn static_pressure(&self, node: NodeId, piezometric: f64) -> f64 {
        piezometric - self.specific_weight() * self.nodes[node].elevation.si()
    }

    /// Whether any node stores volume or sits off the datum (the chip needs the hydrostatic
    /// and time-evolution vocabulary in its reports).
    pub fn has_storage_or_heads(&self) -> bool {
        self.nodes
            .iter()
            .any(|n| n.storage.is_some() || n.elevation.si() != 0.0)
    }

    /// The section of a channel.
    pub fn section_of(&self, channel: ChannelId) -> &Section {
        &self.sections[self.channels[channel].section]
    }
}

/// [`Network::dead_end_channels`] for `n` nodes and channels given by their (from, to) node
/// indices ([`Network::channel_ends`]), `junction(i)` telling whether node i is a junction.
/// The per-node count and XOR sit side by side (one cache line per visit: on a large random
/// tree the visits are random).
pub(crate) fn dead_end_mask(
    n: usize,
    ends: &[[u32; 2]],
    junction: impl Fn(usize) -> bool,
) -> Vec<bool> {
    let mut dead = vec![false; ends.len()];
    // Per node: live channels and the XOR of their indices.
    let mut live = vec![[0u32; 2]; n];
    for (k, &[a, b]) in ends.iter().enumerate() {
        for end in [a, b] {
            let x = &mut live[end as usize];
            x[0] += 1;
            x[1] ^= k as u32;
        }
    }
    for start in 0..n {
        let mut leaf = start;
        while live[leaf][0] == 1 && junction(leaf) {
            let k = live[leaf][1];
            dead[k as usize] = true;
            let [a, b] = ends[k as usize];
            let other = if a as usize == leaf { b } else { a } as usize;
            live[leaf] = [0, 0];
            live[other][0] -= 1;
            live[other][1] ^= k;
            leaf = other;
        }
    }
    dead
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tube() -> Shape {
        Shape::Circle {
            diameter: Length::from_si(1e-4),
        }
    }

    #[test]
    fn floating_part_is_named() {
        let mut b = NetworkBuilder::new(Fluid::WATER_20C);
        b.add_node("in", Port::Pressure(Pressure::from_si(100.0)))
            .unwrap();
        b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
            .unwrap();
        b.add_node("island_a", Port::Junction).unwrap();
        b.add_node("island_b", Port::Flow(VolumeFlow::from_si(1e-9)))
            .unwrap();
        let s = b.add_section("t", tube()).unwrap();
        let l = Length::from_si(1e-3);
        b.add_channel("c1", "in", "out", s, l).unwrap();
        b.add_channel("c2", "island_a", "island_b", s, l).unwrap();
        let err = b.build().unwrap_err();
        let text = err.to_string();
        assert!(
            text.contains("'island_a'") && text.contains("'island_b'"),
            "{text}"
        );
        assert!(!text.contains("'in'"), "{text}");
    }

    #[test]
    fn name_errors() {
        let mut b = NetworkBuilder::new(Fluid::WATER_20C);
        b.add_node("tee", Port::Junction).unwrap();
        assert!(matches!(
            b.add_node("tee", Port::Junction),
            Err(NetworkError::DuplicateNode { .. })
        ));
        let s = b.add_section("t", tube()).unwrap();
        let e = b
            .add_channel("c", "tea", "tee", s, Length::from_si(1e-3))
            .unwrap_err();
        assert!(e.to_string().contains("did you mean 'tee'"), "{e}");
        let e = b
            .add_channel("c", "tee", "tee", s, Length::from_si(1e-3))
            .unwrap_err();
        assert!(matches!(e, NetworkError::SelfLoop { .. }));
        assert_eq!(
            e.place().keys,
            vec!["channels".to_string(), "c".into(), "to".into()]
        );
    }

    #[test]
    fn identical_named_shapes_keep_their_names() {
        let mut b = NetworkBuilder::new(Fluid::WATER_20C);
        let a = b.add_section("a", tube()).unwrap();
        let twin = b.add_section("twin", tube()).unwrap();
        assert_ne!(a, twin);
        let c1 = b.inline_section("c1", tube()).unwrap();
        let c2 = b.inline_section("c2", tube()).unwrap();
        assert_eq!(c1, c2, "identical inline shapes share one section");
        assert_ne!(a, c1);
    }

    #[test]
    fn name_index_finds_every_name_through_growth_and_refuses_repeats() {
        // Started small so the table grows (and re-places its ids) many times.
        let mut b = NetworkBuilder::new(Fluid::WATER_20C);
        let s = b.add_section("t", tube()).unwrap();
        let n = 5_000;
        for i in 0..n {
            let port = if i == 0 {
                Port::Pressure(Pressure::from_si(0.0))
            } else {
                Port::Junction
            };
            assert_eq!(b.add_node(&format!("n{i}"), port).unwrap(), NodeId(i));
        }
        for i in 1..n {
            let id = b
                .add_channel(
                    &format!("c{i}"),
                    &format!("n{}", i - 1),
                    &format!("n{i}"),
                    s,
                    Length::from_si(1e-3),
                )
                .unwrap();
            assert_eq!(id, ChannelId(i - 1));
        }
        for i in (0..n).step_by(97) {
            assert!(matches!(
                b.add_node(&format!("n{i}"), Port::Junction),
                Err(NetworkError::DuplicateNode { .. })
            ));
        }
        assert!(matches!(
            b.add_channel("c7", "n1", "n2", s, Length::from_si(1e-3)),
            Err(NetworkError::DuplicateChannel { .. })
        ));
        let e = b
            .add_channel("x", "n12", "m4999", s, Length::from_si(1e-3))
            .unwrap_err();
        assert!(e.to_string().contains("did you mean 'n4999'"), "{e}");
        let net = b.build().unwrap();
        assert_eq!(net.nodes.len(), n);
        assert_eq!(net.channels.len(), n - 1);
        for i in (1..n).step_by(131) {
            let c = &net.channels[ChannelId(i - 1)];
            assert_eq!(c.name, format!("c{i}"));
            assert_eq!(net.nodes[c.from].name, format!("n{}", i - 1));
            assert_eq!(net.nodes[c.to].name, format!("n{i}"));
        }
    }
}
