//! Design limits and model-validity notes: wall shear over the cells' limit, pressure over
//! the chip's rating or below vacuum, and places where the linear laminar model is stretched.
//!
//! Findings are data (kind, place, value and limit in SI); words and units are added by the
//! report layer only.

use super::SteadyState;
use crate::network::{ChannelId, Network, NodeId, SectionId};

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

/// Standard atmosphere [Pa] (ISO 2533 / CGPM 1954): a gauge pressure below −1 atm would be
/// an absolute pressure below zero, which a liquid cannot sustain (it cavitates or outgasses
/// first).
pub const STANDARD_ATMOSPHERE: f64 = 101_325.0;

/// How serious a finding is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Severity {
    /// Worth knowing: the model is stretched, or a limit is near.
    Note,
    /// A limit is exceeded: `rillnet check` fails.
    Exceeded,
}

/// What was found, where, with the value and the limit it was compared with (SI).
#[derive(Clone, Debug, PartialEq)]
pub enum FindingKind {
    /// Maximum wall shear [Pa] above the limit [Pa] that applies to the channel.
    ShearOverLimit {
        channel: ChannelId,
        value: f64,
        limit: f64,
    },
    /// |gauge pressure| [Pa] above the chip's rating [Pa].
    PressureOverRating {
        node: NodeId,
        value: f64,
        limit: f64,
    },
    /// |gauge pressure| [Pa] above [`RATING_NOTE_FRACTION`] of the rating `limit` [Pa].
    PressureNearRating {
        node: NodeId,
        value: f64,
        limit: f64,
    },
    /// Gauge pressure [Pa] below −1 standard atmosphere (`limit`, negative): an absolute
    /// pressure below zero, not physical for a liquid.
    BelowVacuum {
        node: NodeId,
        value: f64,
        limit: f64,
    },
    /// Reynolds number above [`REYNOLDS_NOTE`].
    Inertia {
        channel: ChannelId,
        value: f64,
        limit: f64,
    },
    /// Channel length [m] (`value`) under [`ENTRANCE_LENGTHS`] entrance lengths (`limit`, m).
    ShortForEntrance {
        channel: ChannelId,
        value: f64,
        limit: f64,
    },
    /// A numerically solved section whose error estimate (`value`) did not reach the
    /// requested tolerance (`limit`) within the mesh budget.
    SectionNotConverged {
        section: SectionId,
        value: f64,
        limit: f64,
    },
    /// A section with `value` re-entrant corners: the wall shear there is unbounded, and the
    /// maximum reported excludes a disc of `limit` [m] around each.
    SingularCorners {
        section: SectionId,
        value: f64,
        limit: f64,
    },
    /// Streams of different concentration that met at `junction` are only `value` of the way
    /// to uniform (mixed fraction, see `solutes::mixing`) where `channel` feeds a split, under
    /// `limit` ([`super::solutes::MIXED_ENOUGH`]): the well-mixed concentrations after the
    /// split are wrong. `species` indexes the chip's species; `fourier` is D·Σt/w².
    NotMixed {
        channel: ChannelId,
        junction: NodeId,
        species: usize,
        fourier: f64,
        value: f64,
        limit: f64,
    },
}

impl FindingKind {
    /// A stable machine name of the kind (used as the JSON/CSV `kind`).
    pub fn code(&self) -> &'static str {
        match self {
            FindingKind::ShearOverLimit { .. } => "shear_over_limit",
            FindingKind::PressureOverRating { .. } => "pressure_over_rating",
            FindingKind::PressureNearRating { .. } => "pressure_near_rating",
            FindingKind::BelowVacuum { .. } => "below_vacuum",
            FindingKind::Inertia { .. } => "inertia",
            FindingKind::ShortForEntrance { .. } => "short_for_entrance",
            FindingKind::SectionNotConverged { .. } => "section_not_converged",
            FindingKind::SingularCorners { .. } => "singular_corners",
            FindingKind::NotMixed { .. } => "not_mixed",
        }
    }

    /// (value, limit) in SI.
    pub fn value_and_limit(&self) -> (f64, f64) {
        match *self {
            FindingKind::ShearOverLimit { value, limit, .. }
            | FindingKind::PressureOverRating { value, limit, .. }
            | FindingKind::PressureNearRating { value, limit, .. }
            | FindingKind::BelowVacuum { value, limit, .. }
            | FindingKind::Inertia { value, limit, .. }
            | FindingKind::ShortForEntrance { value, limit, .. }
            | FindingKind::SectionNotConverged { value, limit, .. }
            | FindingKind::SingularCorners { value, limit, .. }
            | FindingKind::NotMixed { value, limit, .. } => (value, limit),
        }
    }

    /// The channel or node the finding is about.
    pub fn place(&self) -> Place {
        match *self {
            FindingKind::ShearOverLimit { channel, .. }
            | FindingKind::Inertia { channel, .. }
            | FindingKind::ShortForEntrance { channel, .. }
            | FindingKind::NotMixed { channel, .. } => Place::Channel(channel),
            FindingKind::PressureOverRating { node, .. }
            | FindingKind::PressureNearRating { node, .. }
            | FindingKind::BelowVacuum { node, .. } => Place::Node(node),
            FindingKind::SectionNotConverged { section, .. }
            | FindingKind::SingularCorners { section, .. } => Place::Section(section),
        }
    }
}

/// Where a finding belongs.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Place {
    Node(NodeId),
    Channel(ChannelId),
    Section(SectionId),
}

/// One finding about a solved chip.
#[derive(Clone, Debug, PartialEq)]
pub struct Finding {
    pub severity: Severity,
    pub kind: FindingKind,
}

fn note(kind: FindingKind) -> Finding {
    Finding {
        severity: Severity::Note,
        kind,
    }
}

fn exceeded(kind: FindingKind) -> Finding {
    Finding {
        severity: Severity::Exceeded,
        kind,
    }
}

/// Notes on numerically solved sections: a tolerance not reached, singular corners.
fn section_notes(network: &Network) -> Vec<Finding> {
    let mut out = Vec::new();
    for (section, s) in network.sections.iter_ids() {
        let f = &s.figures;
        if !f.converged {
            out.push(note(FindingKind::SectionNotConverged {
                section,
                value: f.relative_error_estimate,
                limit: network.section_tolerance,
            }));
        }
        if f.max_wall_shear_singular {
            out.push(note(FindingKind::SingularCorners {
                section,
                value: f.singular_corner_count as f64,
                limit: crate::section::numeric::CORNER_EXCLUSION * f.hydraulic_diameter(),
            }));
        }
    }
    out
}

/// Every limit exceeded and every model note of the solved state, most serious first (file
/// order within a severity).
pub fn findings(network: &Network, state: &SteadyState) -> Vec<Finding> {
    let mut out = Vec::new();
    for (k, (c, s)) in network.channels.iter().zip(&state.channels).enumerate() {
        let channel = ChannelId(k);
        if let (Some(limit), Some(margin)) = (s.shear_limit, s.shear_margin) {
            if margin < 1.0 {
                out.push(exceeded(FindingKind::ShearOverLimit {
                    channel,
                    value: s.wall_shear_max,
                    limit,
                }));
            }
        }
        if s.reynolds > REYNOLDS_NOTE {
            out.push(note(FindingKind::Inertia {
                channel,
                value: s.reynolds,
                limit: REYNOLDS_NOTE,
            }));
        }
        let needed = ENTRANCE_LENGTHS * s.entrance_length;
        if c.length.si() < needed {
            out.push(note(FindingKind::ShortForEntrance {
                channel,
                value: c.length.si(),
                limit: needed,
            }));
        }
    }
    out.extend(section_notes(network));
    if let Some(solutes) = &state.solutes {
        out.extend(solutes.unmixed.iter().map(|u| {
            note(FindingKind::NotMixed {
                channel: u.channel,
                junction: u.junction,
                species: u.species,
                fourier: u.fourier,
                value: u.mixed,
                limit: super::solutes::MIXED_ENOUGH,
            })
        }));
    }
    for (i, &piezometric) in state.solution.pressures.iter().enumerate() {
        let node = NodeId(i);
        // The rating and vacuum concern the static pressure p = P − ρ·g·z at the node's
        // elevation, not the piezometric pressure P the network is solved for (equal on the
        // datum, z = 0).
        let p = network.static_pressure(node, piezometric);
        if p < -STANDARD_ATMOSPHERE {
            out.push(exceeded(FindingKind::BelowVacuum {
                node,
                value: p,
                limit: -STANDARD_ATMOSPHERE,
            }));
        }
        if let Some(rating) = network.pressure_rating.map(|r| r.si()) {
            if p.abs() > rating {
                out.push(exceeded(FindingKind::PressureOverRating {
                    node,
                    value: p,
                    limit: rating,
                }));
            } else if p.abs() > RATING_NOTE_FRACTION * rating {
                out.push(note(FindingKind::PressureNearRating {
                    node,
                    value: p,
                    limit: rating,
                }));
            }
        }
    }
    out.sort_by_key(|f| std::cmp::Reverse(f.severity));
    out
}
