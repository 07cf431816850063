//! Drives that change in time (data): a port switched on at a time, a port's setting following
//! a ramp or a schedule, a rocking platform. Declared with the chip (`on_at:`, `ramp:`,
//! `schedule:` on a port, `rocking:` and `arm:`), integrated by `analysis::transient`.

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

/// A port's setting (gauge pressure [Pa] or flow into the chip [m³/s]) as a function of time:
/// linear between the points (time [s], value), held at the first value before the first
/// time and at the last value after the last time. A ramp is two points; a schedule from a
/// CSV file is one point per row. Times strictly increase (checked where it is read).
#[derive(Clone, Debug, PartialEq)]
pub struct Profile {
    pub node: NodeId,
    pub points: Vec<(f64, f64)>,
}

impl Profile {
    /// The setting at time t.
    pub fn at(&self, t: f64) -> f64 {
        let p = &self.points;
        let Some(&(t_first, v_first)) = p.first() else {
            return 0.0;
        };
        if t <= t_first {
            return v_first;
        }
        let k = p.partition_point(|&(ti, _)| ti <= t);
        if k >= p.len() {
            return p[p.len() - 1].1;
        }
        let ((t0, v0), (t1, v1)) = (p[k - 1], p[k]);
        v0 + (v1 - v0) * (t - t0) / (t1 - t0)
    }
}

/// What changes in time.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Drives {
    pub switch_on: Vec<SwitchOn>,
    /// Ports whose setting follows a ramp or a schedule (one per port).
    pub profiles: Vec<Profile>,
    pub rocking: Option<Rocking>,
}
