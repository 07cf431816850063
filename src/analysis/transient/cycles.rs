//! Answers per tilt cycle of a rocking platform: each channel's mean flow over every complete
//! cycle, and over the last complete cycle the time-averaged wall shear (signed and in
//! magnitude) and the largest wall shear met.
//!
//! The integrals are taken over the integrator's dense output, not the output instants:
//! 4-point Gauss–Legendre on every step (or part of a step within one cycle; exact for the
//! quadratic dense output of the unknowns, to the drives' smoothness for the imposed heads).
//! The largest flow is the largest at those points and at the ends of the pieces, so it can
//! miss a peak between them by the step's curvature (steps are short next to the period at
//! `evolve`'s tolerance).
//!
//! Wall shear of a Newtonian flow is linear in the flow: mean wall shear τ = (|ΔP|/L)·(A/P)
//! (force balance on the channel) with ΔP = R·Q, and the peak on the perimeter
//! τ_max = (|ΔP|/L)·(τ_max/G) of the section; both are a per-channel factor times |Q|.

use crate::network::{ChannelId, Network};

/// Gauss–Legendre nodes and weights on [0, 1] (4 points).
const GAUSS: [(f64, f64); 4] = [
    (0.069_431_844_202_973_71, 0.173_927_422_568_726_93),
    (0.330_009_478_207_571_87, 0.326_072_577_431_273_07),
    (0.669_990_521_792_428_1, 0.326_072_577_431_273_07),
    (0.930_568_155_797_026_3, 0.173_927_422_568_726_93),
];

/// Per-cycle answers of a run on a rocking platform.
#[derive(Clone, Debug, PartialEq)]
pub struct CycleStats {
    /// The platform's period [s].
    pub period: f64,
    /// Mean flow of every channel over each complete cycle [m³/s] (cycle-major).
    pub mean_flows: Vec<Vec<f64>>,
    /// The last complete cycle, if any.
    pub last: Option<LastCycle>,
}

/// The last complete cycle, per channel.
#[derive(Clone, Debug, PartialEq)]
pub struct LastCycle {
    /// Start of the cycle [s].
    pub start: f64,
    /// Time-averaged (signed) mean wall shear [Pa]; its sign is the mean flow's.
    pub mean_wall_shear: Vec<f64>,
    /// Time-averaged magnitude of the mean wall shear [Pa].
    pub mean_abs_wall_shear: Vec<f64>,
    /// Largest peak wall shear (on the perimeter) during the cycle [Pa].
    pub max_wall_shear: Vec<f64>,
}

/// Mean wall shear and peak wall shear per unit flow, per channel [Pa·s/m³].
pub fn shear_per_flow(network: &Network) -> Vec<(f64, f64)> {
    (0..network.channels.len())
        .map(|k| {
            let c = &network.channels[ChannelId(k)];
            let fig = &network.sections[c.section].figures;
            let g = network.resistance(ChannelId(k)) / c.length.si();
            (
                g * fig.mean_wall_shear_per_gradient(),
                g * fig.max_wall_shear_per_gradient,
            )
        })
        .collect()
}

/// Running sums over the current cycle.
pub(crate) struct Accumulator {
    period: f64,
    start: f64,
    sum: Vec<f64>,
    sum_abs: Vec<f64>,
    max_abs: Vec<f64>,
    shear: Vec<(f64, f64)>,
    out: CycleStats,
}

impl Accumulator {
    pub(crate) fn new(network: &Network, period: f64) -> Self {
        let m = network.channels.len();
        Accumulator {
            period,
            start: 0.0,
            sum: vec![0.0; m],
            sum_abs: vec![0.0; m],
            max_abs: vec![0.0; m],
            shear: shear_per_flow(network),
            out: CycleStats {
                period,
                mean_flows: Vec::new(),
                last: None,
            },
        }
    }

    /// Add the flows over [a, b] (within one accepted step); `flows(t)` gives every
    /// channel's flow at t.
    pub(crate) fn add(&mut self, a: f64, b: f64, flows: &dyn Fn(f64) -> Vec<f64>) {
        let mut lo = a;
        while lo < b {
            let end = self.start + self.period;
            let hi = b.min(end);
            let h = hi - lo;
            if h > 0.0 {
                for &(s, w) in &GAUSS {
                    for (k, q) in flows(lo + s * h).iter().enumerate() {
                        self.sum[k] += w * h * q;
                        self.sum_abs[k] += w * h * q.abs();
                        self.max_abs[k] = self.max_abs[k].max(q.abs());
                    }
                }
                for (k, q) in flows(hi).iter().enumerate() {
                    self.max_abs[k] = self.max_abs[k].max(q.abs());
                }
            }
            if hi >= end - 1e-12 * self.period {
                self.finish_cycle();
            }
            lo = hi;
        }
    }

    fn finish_cycle(&mut self) {
        let t = self.period;
        self.out
            .mean_flows
            .push(self.sum.iter().map(|s| s / t).collect());
        self.out.last = Some(LastCycle {
            start: self.start,
            mean_wall_shear: (self.sum.iter().zip(&self.shear))
                .map(|(s, f)| f.0 * s / t)
                .collect(),
            mean_abs_wall_shear: (self.sum_abs.iter().zip(&self.shear))
                .map(|(s, f)| f.0 * s / t)
                .collect(),
            max_wall_shear: (self.max_abs.iter().zip(&self.shear))
                .map(|(q, f)| f.1 * q)
                .collect(),
        });
        self.start += t;
        self.sum.iter_mut().for_each(|v| *v = 0.0);
        self.sum_abs.iter_mut().for_each(|v| *v = 0.0);
        self.max_abs.iter_mut().for_each(|v| *v = 0.0);
    }

    pub(crate) fn finish(self) -> CycleStats {
        self.out
    }
}
