//! The chip as the user declared it: the solvable [`Network`] plus everything around it that
//! the solver must not see — the file it came from, the named sections as written, the design
//! problem, drawing positions and model notes.
//!
//! The split keeps the dependency arrows one way: `analysis` works on a [`Network`] (and, for
//! the design commands, on a [`design::Design`] passed beside it); `report` and `plots` read a
//! [`Chip`] together with analysis results. Nothing in `network` or `analysis` imports
//! [`Chip`]; `analysis::design` reads only the data types of [`design`].

pub mod design;
pub mod drives;
pub mod species;
pub mod tolerances;

use crate::fluid::RangeWarning;
use crate::network::{ChannelId, Network, SectionId};
use crate::section::ProfileNote;

/// A model note: something the results rest on that the user should know, but no limit
/// broken (data; `report::findings` writes the words).
#[derive(Clone, Debug, PartialEq)]
pub enum ModelNote {
    /// A fluid model used outside its published range.
    Fluid(RangeWarning),
    /// How a measured profile was read: sparse or uneven sampling, simplification for the
    /// mesh, surface left out (see `section::profile`).
    Profile {
        /// The section as the file names it (`CHANNEL.section` for an inline one).
        section: String,
        note: ProfileNote,
    },
}

/// Where a chip's text came from.
#[derive(Clone, Debug, PartialEq)]
pub struct Source {
    /// File path, or `-` for standard input, as shown in messages.
    pub origin: String,
    /// The text as read (kept so edited copies can be written from it).
    pub text: String,
    pub syntax: Syntax,
}

/// Which syntax a chip file is written in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Syntax {
    Yaml,
    Json,
}

impl Syntax {
    /// `.json` files are JSON; everything else is read as YAML (a superset of JSON).
    pub fn from_path(path: &std::path::Path) -> Syntax {
        match path.extension().and_then(|e| e.to_str()) {
            Some(e) if e.eq_ignore_ascii_case("json") => Syntax::Json,
            _ => Syntax::Yaml,
        }
    }

    /// Guess the syntax of text without a file name: JSON when the first non-blank
    /// character opens an object, else YAML (which also reads most JSON).
    pub fn sniff(text: &str) -> Syntax {
        match text
            .trim_start_matches('\u{feff}')
            .trim_start()
            .chars()
            .next()
        {
            Some('{') => Syntax::Json,
            _ => Syntax::Yaml,
        }
    }
}

/// Positions for drawing the chip [m]: per node an optional position, per channel the
/// intermediate points of its path (empty when straight). Empty vectors mean "not given".
#[derive(Clone, Debug, Default, PartialEq)]
pub struct DrawnLayout {
    pub node_at: Vec<Option<[f64; 2]>>,
    pub channel_path: Vec<Vec<[f64; 2]>>,
}

/// A declared chip.
#[derive(Clone, Debug)]
pub struct Chip {
    pub name: Option<String>,
    pub description: Option<String>,
    pub source: Source,
    /// What gets solved: topology and physics.
    pub network: Network,
    /// Targets, adjustable ports and free channel dimensions for the design commands.
    pub design: design::Design,
    /// Solutes carried by the flow, in file order (empty when none are declared).
    pub species: Vec<species::Species>,
    /// The solute model runs use unless told otherwise (`mixing:`).
    pub mixing: species::Mixing,
    /// Drawing positions given in the chip file (used by the pictures only).
    pub layout: DrawnLayout,
    /// Drives that change in time (`evolve` only; a steady solve uses the file's settings).
    pub drives: drives::Drives,
    /// Fabrication and operating tolerances (`rillnet spread`; empty when none are declared).
    pub tolerances: tolerances::Tolerances,
    /// Models used outside their published range (e.g. a fluid correlation), and how measured
    /// profiles were read.
    pub notes: Vec<ModelNote>,
}

impl Chip {
    /// A chip with no file behind it (a network built in code, e.g. by a benchmark): no
    /// design problem, drawing, drives, tolerances or notes.
    pub fn from_network(name: impl Into<String>, network: Network) -> Chip {
        Chip {
            name: Some(name.into()),
            description: None,
            source: Source {
                origin: "generated".into(),
                text: String::new(),
                syntax: Syntax::Yaml,
            },
            network,
            design: Default::default(),
            species: Vec::new(),
            mixing: Default::default(),
            layout: DrawnLayout::default(),
            drives: Default::default(),
            tolerances: Default::default(),
            notes: Vec::new(),
        }
    }

    /// The name to print in titles.
    pub fn title(&self) -> &str {
        self.name.as_deref().unwrap_or("chip")
    }

    /// The section a user means by `name`: a `sections:` entry, or `CHANNEL.section` for a
    /// channel's inline section.
    pub fn section_named(&self, name: &str) -> Option<SectionId> {
        if let Some(i) = self
            .network
            .sections
            .iter()
            .position(|s| s.named && s.name == name)
        {
            return Some(SectionId(i));
        }
        let channel = name.strip_suffix(".section")?;
        let id = self.network.channel_id(channel)?;
        Some(self.network.channels[id].section)
    }

    /// The name a channel's section is known by in the file.
    pub fn section_label(&self, channel: ChannelId) -> String {
        let c = &self.network.channels[channel];
        let s = &self.network.sections[c.section];
        if s.named {
            s.name.clone()
        } else {
            format!("{}.section", c.name)
        }
    }

    /// Every name `section --name` accepts, for error messages.
    pub fn section_names(&self) -> Vec<String> {
        let net = &self.network;
        let mut names: Vec<String> = net
            .sections
            .iter()
            .filter(|s| s.named)
            .map(|s| s.name.clone())
            .collect();
        names.extend(
            net.channels
                .iter()
                .filter(|c| !net.sections[c.section].named)
                .map(|c| format!("{}.section", c.name)),
        );
        names
    }
}
