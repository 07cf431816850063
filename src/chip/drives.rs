//! Drives that change in time (data): a port switched on at a time, a rocking platform.
//! Declared with the chip (`on_at:` on a port, `rocking:` and `arm:`), integrated by
//! `analysis::transient`.

use crate::network::NodeId;

/// A drive switched on at a time: before `at`, a flow port delivers 0 and a pressure port holds
/// only its hydrostatic head; from `at` on, its setting in the file.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SwitchOn {
    pub node: NodeId,
    pub at: f64,
}

/// A rocking platform: θ(t) = amplitude·sin(2πt/period); node i rises by arm_i·sin θ(t).
#[derive(Clone, Debug, PartialEq)]
pub struct Rocking {
    pub amplitude: f64,
    pub period: f64,
    /// (node, horizontal distance from the axis [m]); nodes not listed sit on the axis.
    pub arms: Vec<(NodeId, f64)>,
}

impl Rocking {
    /// Height change of a node with arm `arm` at time t [m].
    pub fn rise(&self, arm: f64, t: f64) -> f64 {
        let theta = self.amplitude * (std::f64::consts::TAU * t / self.period).sin();
        arm * theta.sin()
    }
}

/// What changes in time.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Drives {
    pub switch_on: Vec<SwitchOn>,
    pub rocking: Option<Rocking>,
}
