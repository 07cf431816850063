//! Design limits and model-validity notes: wall shear over the cells' limit, pressure over
//! the chip's rating, and places where the linear laminar model is stretched.

use super::SteadyState;
use crate::network::Network;

/// Reynolds number above which inertia (separation at junctions, Dean vortices in bends)
/// makes the linear resistance model noticeably optimistic (common practice: microfluidic
/// network models are usually trusted to Re of order 10–100).
pub const REYNOLDS_NOTE: f64 = 100.0;

/// A channel shorter than this many entrance lengths is not mostly fully developed
/// (common practice).
pub const ENTRANCE_LENGTHS: f64 = 5.0;

/// Fraction of the pressure rating above which a node is reported as close to it (common
/// practice: keep a margin of at least 20 % to a bonded chip's tested burst pressure).
pub const RATING_NOTE_FRACTION: f64 = 0.8;

/// How serious a finding is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Severity {
    /// Worth knowing: the model is stretched, or a limit is near.
    Note,
    /// A limit is exceeded: `rillnet check` fails.
    Exceeded,
}

/// One finding about a solved chip.
#[derive(Clone, Debug, PartialEq)]
pub struct Finding {
    pub severity: Severity,
    pub message: String,
}

fn note(message: String) -> Finding {
    Finding {
        severity: Severity::Note,
        message,
    }
}

/// Every limit exceeded and every model note, most serious first.
pub fn findings(network: &Network, state: &SteadyState) -> Vec<Finding> {
    let mut out: Vec<Finding> = network.warnings.iter().cloned().map(note).collect();
    for (c, s) in network.channels.iter().zip(&state.channels) {
        if let (Some(limit), Some(margin)) = (s.shear_limit, s.shear_margin) {
            if margin < 1.0 {
                out.push(Finding {
                    severity: Severity::Exceeded,
                    message: format!(
                        "channel '{}': maximum wall shear {:.3} Pa exceeds the limit {:.3} Pa (margin {:.2})",
                        c.name, s.wall_shear_max, limit, margin
                    ),
                });
            }
        }
        if s.reynolds > REYNOLDS_NOTE {
            out.push(note(format!(
                "channel '{}': Re = {:.0} > {REYNOLDS_NOTE}; inertia at junctions and bends makes the linear model optimistic",
                c.name, s.reynolds
            )));
        }
        if c.length.si() < ENTRANCE_LENGTHS * s.entrance_length {
            out.push(note(format!(
                "channel '{}': length {:.0} um is under {ENTRANCE_LENGTHS} entrance lengths ({:.0} um each); \
                 the flow there is not fully developed and its resistance and shear are underestimated",
                c.name,
                c.length.si() * 1e6,
                s.entrance_length * 1e6
            )));
        }
    }
    if let Some(rating) = network.pressure_rating {
        let rating = rating.si();
        for (n, p) in network.nodes.iter().zip(&state.solution.pressures) {
            if p.abs() > rating {
                out.push(Finding {
                    severity: Severity::Exceeded,
                    message: format!(
                        "node '{}': pressure {:.1} mbar exceeds the chip's rating {:.1} mbar",
                        n.name,
                        p / 100.0,
                        rating / 100.0
                    ),
                });
            } else if p.abs() > RATING_NOTE_FRACTION * rating {
                out.push(note(format!(
                    "node '{}': pressure {:.1} mbar is above {:.0} % of the chip's rating {:.1} mbar",
                    n.name,
                    p / 100.0,
                    RATING_NOTE_FRACTION * 100.0,
                    rating / 100.0
                )));
            }
        }
    }
    out.sort_by_key(|f| std::cmp::Reverse(f.severity));
    out
}
