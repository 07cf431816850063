//! The design problem a chip file declares: targets, adjustable ports and free channel
//! dimensions. These are data only (SI, typed indices); `analysis::design` answers them.

use crate::network::{ChannelId, NodeId};

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
}

/// A design target with its weight.
#[derive(Clone, Debug, PartialEq)]
pub struct Target {
    pub kind: TargetKind,
    pub weight: f64,
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
    /// The channels named by flow, split and wall-shear targets, in target order, each once.
    pub fn target_channels(&self) -> Vec<ChannelId> {
        let mut out: Vec<ChannelId> = Vec::new();
        for t in &self.targets {
            let channels: &[ChannelId] = match &t.kind {
                TargetKind::ChannelFlow { channel, .. } => std::slice::from_ref(channel),
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
