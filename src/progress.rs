//! Progress of long work, reported to whoever asked for it.
//!
//! The library never prints: a command that may run for seconds (loading and solving a chip of
//! a million channels) tells a [`Progress`] which phase it has reached, and the caller decides
//! what to show. The binary draws a progress line on standard error (and only on a terminal,
//! and only once the work has taken about a second); tests and scripts pass [`Silent`].

/// A phase of a command's work.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Phase {
    /// Reading, parsing and checking the chip file, building the network.
    Loading,
    /// Assembling, factorising and solving the flow balance, and the figures derived from it.
    Solving,
    /// Rendering and writing the results.
    Writing,
}

impl Phase {
    /// Every phase, in order.
    pub const ALL: [Phase; 3] = [Phase::Loading, Phase::Solving, Phase::Writing];

    /// Words for the phase.
    pub fn label(self) -> &'static str {
        match self {
            Phase::Loading => "reading the chip",
            Phase::Solving => "solving the flows",
            Phase::Writing => "writing the results",
        }
    }

    /// Position of the phase in [`Phase::ALL`].
    pub fn index(self) -> usize {
        match self {
            Phase::Loading => 0,
            Phase::Solving => 1,
            Phase::Writing => 2,
        }
    }
}

/// Receives the phases of a command's work as they begin.
pub trait Progress: Sync {
    /// `phase` begins (the one before it is done).
    fn begin(&self, phase: Phase);
}

/// Progress that nobody watches.
#[derive(Clone, Copy, Debug, Default)]
pub struct Silent;

impl Progress for Silent {
    fn begin(&self, _phase: Phase) {}
}
