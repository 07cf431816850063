//! Folding a long sized channel into a footprint.

/// A serpentine that packs `length` into straight runs of `run` joined by U-turns of
/// centre-line pitch `pitch`: n runs and n − 1 half-circle turns of length π·pitch/2.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Serpentine {
    pub runs: usize,
    pub turns: usize,
    /// Footprint: run length × (runs · pitch) [m].
    pub footprint: [f64; 2],
}

/// Serpentine needed for `length` with straight runs of `run` and centre-line `pitch`: the
/// fewest runs n with n·run + (n − 1)·π·pitch/2 ≥ `length` (at least one).
pub fn serpentine(length: f64, run: f64, pitch: f64) -> Serpentine {
    let turn = std::f64::consts::PI * pitch / 2.0;
    let runs = (((length + turn) / (run + turn)).ceil() as usize).max(1);
    Serpentine {
        runs,
        turns: runs - 1,
        footprint: [run, runs as f64 * pitch],
    }
}
