//! The design problem a chip file declares: targets, adjustable ports and free channel
//! dimensions. These are data only (SI, typed indices); `analysis::design` answers them.

use crate::network::{ChannelId, NodeId};

pub use crate::chip::species::Measure;

/// What a target asks for (SI).
#[derive(Clone, Debug, PartialEq)]
pub enum TargetKind {
    ChannelFlow {
        channel: ChannelId,
        flow: f64,
    },
    Split {
        channels: Vec<ChannelId>,
        ratio: Vec<f64>,
    },
    NodePressure {
        node: NodeId,
        pressure: f64,
    },
    /// Wall shear stress [Pa] in a channel: its maximum on the perimeter or its mean. For a
    /// fixed section it is linear in the channel's flow: τ = s·(μ/K)·|Q| with s = τ_max/G or
    /// A/P of the section (μ/K = R/L does not depend on the length).
    WallShear {
        channel: ChannelId,
        shear: f64,
        measure: ShearMeasure,
    },
    /// Well-mixed concentration of one species in a channel (SI of the species' measure).
    /// The target carries what it needs to be judged without the chip: the species' inlet
    /// concentration at every node (what a port lets in), its name and measure. A target
    /// gradient across several channels is one such target per channel.
    Concentration {
        channel: ChannelId,
        species: String,
        measure: Measure,
        concentration: f64,
        inlet: Vec<f64>,
    },
}

/// Which wall shear a [`TargetKind::WallShear`] target asks for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ShearMeasure {
    /// The largest wall shear on the perimeter (what a shear limit is compared with).
    Max,
    /// The perimeter mean, G·A/P.
    Mean,
}

/// Default tolerance of a target: 1e-6 relative.
pub const DEFAULT_TOLERANCE: f64 = 1e-6;

/// How close a target must come to count as met.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Tolerance {
    /// |reached − wanted| ≤ t·scale, with the target's scale (|wanted| for flows and wall
    /// shear, max(|wanted|, 100 Pa) for pressures, each wanted share for splits).
    Relative(f64),
    /// |reached − wanted| ≤ t in the target's own SI unit (not for splits).
    Absolute(f64),
}

impl Default for Tolerance {
    fn default() -> Self {
        Tolerance::Relative(DEFAULT_TOLERANCE)
    }
}

/// A design target with its weight and tolerance.
#[derive(Clone, Debug, PartialEq)]
pub struct Target {
    pub kind: TargetKind,
    pub weight: f64,
    pub tolerance: Tolerance,
}

/// A port whose setting tuning may change, within bounds (Pa or m³/s).
#[derive(Clone, Debug, PartialEq)]
pub struct Adjustable {
    pub node: NodeId,
    pub min: f64,
    pub max: f64,
}

/// Which dimension of a channel sizing may change.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SizeDim {
    Length,
    /// The section's width (a circle's diameter).
    Width,
}

/// A channel dimension sizing may change, within bounds, optionally in fabrication steps [m].
#[derive(Clone, Debug, PartialEq)]
pub struct SizeVar {
    pub channel: ChannelId,
    pub dim: SizeDim,
    pub min: f64,
    pub max: f64,
    pub step: Option<f64>,
}

/// The design problem carried by a chip file.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Design {
    pub targets: Vec<Target>,
    pub adjustable: Vec<Adjustable>,
    pub sizes: Vec<SizeVar>,
}

impl Design {
    /// The channels named by flow, split, wall-shear and concentration targets, in target order, each once.
    pub fn target_channels(&self) -> Vec<ChannelId> {
        let mut out: Vec<ChannelId> = Vec::new();
        for t in &self.targets {
            let channels: &[ChannelId] = match &t.kind {
                TargetKind::ChannelFlow { channel, .. }
                | TargetKind::WallShear { channel, .. }
                | TargetKind::Concentration { channel, .. } => std::slice::from_ref(channel),
                TargetKind::Split { channels, .. } => channels,
                TargetKind::NodePressure { .. } => &[],
            };
            for c in channels {
                if !out.contains(c) {
                    out.push(*c);
                }
            }
        }
        out
    }
}
