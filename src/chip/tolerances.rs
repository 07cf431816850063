//! Fabrication and operating tolerances declared in the chip file: how far a section
//! dimension, a channel length, a drive setting or the fluid's viscosity may land from its
//! nominal value. Data only (SI, typed indices); `analysis::spread` propagates them.
//!
//! A tolerance `t` is read as ± k·σ of a normal distribution (k = [`DEFAULT_SIGMAS`] unless
//! the file says `sigmas:`), or as the ± bounds of a uniform distribution. Items in the same
//! correlation group share one random draw (e.g. every height of one moulded layer, set by one
//! resist thickness); an item without a group draws on its own — for a section shared by
//! several channels, once per channel (mask and development vary from channel to channel).

use crate::network::{ChannelId, NodeId, SectionId};

/// k in "tolerance = ± k·σ" when the file does not say.
pub const DEFAULT_SIGMAS: f64 = 2.0;

/// How a toleranced value is distributed around its nominal value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Distribution {
    /// Normal, with the tolerance equal to `sigmas` standard deviations.
    Normal { sigmas: f64 },
    /// Uniform between nominal ± tolerance.
    Uniform,
}

impl Distribution {
    /// The standard deviation of the deviation, per unit of tolerance: 1/k (normal) or 1/√3
    /// (uniform on ±1).
    pub fn std_per_tolerance(self) -> f64 {
        match self {
            Distribution::Normal { sigmas } => 1.0 / sigmas,
            Distribution::Uniform => 1.0 / 3f64.sqrt(),
        }
    }
}

/// The size of a tolerance: ± an absolute amount (SI of the toleranced quantity) or ± a
/// fraction of the nominal value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Amount {
    Absolute(f64),
    Relative(f64),
}

/// A section dimension that can be toleranced: the names of
/// `analysis::design::dimensions` (a circle's diameter is its width, the gap of plates their
/// height, a trapezoid's top and a d-shape's mask width their width).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Dim {
    Width,
    Height,
}

impl Dim {
    /// The name `analysis::design::dimensions` knows it by.
    pub fn name(self) -> &'static str {
        match self {
            Dim::Width => "width",
            Dim::Height => "height",
        }
    }
}

/// What a tolerance applies to.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Toleranced {
    /// A dimension of a section, for every channel that uses it.
    SectionDim { section: SectionId, dim: Dim },
    /// A channel's length.
    Length { channel: ChannelId },
    /// A port's setting: the pressure of a pressure port, the flow of a flow port (pump or
    /// controller accuracy).
    Drive { node: NodeId },
    /// The fluid's viscosity (e.g. the room temperature).
    Viscosity,
}

/// One declared tolerance.
#[derive(Clone, Debug, PartialEq)]
pub struct Tolerance {
    pub what: Toleranced,
    pub amount: Amount,
    pub distribution: Distribution,
    /// Correlation group: items of one group share one draw.
    pub group: Option<String>,
    /// Where the file declares it, as a key path (`sections.lane.height`), for reports.
    pub label: String,
}

/// Every tolerance of a chip, in file order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Tolerances {
    pub items: Vec<Tolerance>,
}

impl Tolerances {
    /// Whether the chip declares no tolerance at all.
    pub fn is_empty(&self) -> bool {
        self.items.is_empty()
    }
}
