//! Serpentine layout: a long channel folded into straight runs joined by semicircular
//! U-turns, laid out so that its centreline is exactly the channel's length.
//!
//! Geometry (all lengths of the centreline, SI):
//!
//! ```text
//!   y = 0        ●━━━━━━━━━━━━━━━━━━━━━━━━╮      run 1 (inlet at x = 0), then a bend of
//!                                          │ r    centreline radius r = pitch/2
//!   y = pitch    ╭━━━━━━━━━━━━━━━━━━━━━━━━╯      run 2
//!              r │
//!   y = 2 pitch  ╰━━━━━━━━━━━━━━━━━━━━━━━━━●    run 3 (outlet)
//!                x = 0                   x = a
//! ```
//!
//! With n runs of length a and n − 1 bends of length π·r, the centreline is
//! L = n·a + (n − 1)·π·r. For a requested longest run R, n is the fewest runs with a ≤ R:
//! n = ⌈(L + π·r)/(R + π·r)⌉, and then a = (L − (n − 1)·π·r)/n, so the laid-out centreline
//! equals L to rounding. Adjacent runs are `pitch` apart centre to centre; the walls of
//! neighbouring runs are pitch − w apart, so the pitch must exceed the channel width w.
//!
//! The footprint is the bounding box of the channel walls (centreline ± w/2): the bends stick
//! out r + w/2 beyond the runs on the sides where they turn (right for n ≥ 2, left for
//! n ≥ 3); the inlet and outlet ends are cut square at x = 0 or x = a.
//!
//! Racetrack bends of a centreline radius of half the pitch are common practice in
//! soft-lithography serpentines; the formula above is plain geometry.

use std::f64::consts::PI;

/// One piece of a centreline.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Piece {
    /// A straight run from `from` to `to` [m].
    Line { from: [f64; 2], to: [f64; 2] },
    /// A circular arc about `centre` of `radius`, from angle `start` sweeping `sweep`
    /// (radians, counter-clockwise positive).
    Arc {
        centre: [f64; 2],
        radius: f64,
        start: f64,
        sweep: f64,
    },
}

impl Piece {
    /// Length of the piece [m].
    pub fn length(&self) -> f64 {
        match *self {
            Piece::Line { from, to } => (to[0] - from[0]).hypot(to[1] - from[1]),
            Piece::Arc { radius, sweep, .. } => radius * sweep.abs(),
        }
    }

    /// Point at the start and at the end of the piece.
    pub fn ends(&self) -> ([f64; 2], [f64; 2]) {
        match *self {
            Piece::Line { from, to } => (from, to),
            Piece::Arc {
                centre,
                radius,
                start,
                sweep,
            } => {
                let at = |t: f64| [centre[0] + radius * t.cos(), centre[1] + radius * t.sin()];
                (at(start), at(start + sweep))
            }
        }
    }
}

/// A laid-out serpentine.
#[derive(Clone, Debug, PartialEq)]
pub struct Serpentine {
    /// Number of straight runs.
    pub runs: usize,
    /// Length of each straight run [m] (all equal).
    pub run_length: f64,
    /// Number of U-turns (runs − 1).
    pub bends: usize,
    /// Centreline radius of each U-turn [m] (pitch/2).
    pub bend_radius: f64,
    /// Centreline length: runs·run_length + bends·π·bend_radius [m].
    pub centreline_length: f64,
    /// Bounding box of the channel walls, [x, y] [m].
    pub footprint: [f64; 2],
    /// The centreline, inlet first.
    pub pieces: Vec<Piece>,
}

/// Why a serpentine cannot be laid out, with what would work.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum SerpentineError {
    #[error("the serpentine's {what} must be a positive length, got {value} m")]
    NotPositive { what: &'static str, value: f64 },
    #[error(
        "the pitch {pitch_um:.1} um does not exceed the channel width {width_um:.1} um: neighbouring runs \
         would merge. Use a pitch above the width plus the wall you need between runs"
    )]
    PitchTooSmall { pitch_um: f64, width_um: f64 },
    #[error(
        "runs of {run_mm:.3} mm cannot fold {length_mm:.3} mm with bends of {bend_mm:.3} mm each; \
         use runs of at least {min_run_mm:.3} mm, or a smaller pitch"
    )]
    RunTooShort {
        run_mm: f64,
        length_mm: f64,
        bend_mm: f64,
        min_run_mm: f64,
    },
}

/// Fold a channel of centreline `length` and `width` into runs no longer than `max_run`,
/// `pitch` apart (centre to centre).
///
/// ```
/// use rillnet::serpentine::layout;
/// let s = layout(60e-3, 10e-3, 400e-6, 100e-6).unwrap();
/// assert_eq!(s.runs, 6);
/// assert!((s.centreline_length - 60e-3).abs() < 1e-15);
/// assert!(s.run_length < 10e-3); // the runs are shortened to make room for the bends
/// ```
pub fn layout(
    length: f64,
    max_run: f64,
    pitch: f64,
    width: f64,
) -> Result<Serpentine, SerpentineError> {
    for (what, value) in [
        ("length", length),
        ("run", max_run),
        ("pitch", pitch),
        ("channel width", width),
    ] {
        if !(value.is_finite() && value > 0.0) {
            return Err(SerpentineError::NotPositive { what, value });
        }
    }
    if pitch <= width {
        return Err(SerpentineError::PitchTooSmall {
            pitch_um: pitch * 1e6,
            width_um: width * 1e6,
        });
    }
    let r = pitch / 2.0;
    let bend = PI * r;
    let runs = (((length + bend) / (max_run + bend)).ceil() as usize).max(1);
    let run_length = (length - (runs - 1) as f64 * bend) / runs as f64;
    if run_length < 0.0 {
        return Err(SerpentineError::RunTooShort {
            run_mm: max_run * 1e3,
            length_mm: length * 1e3,
            bend_mm: bend * 1e3,
            min_run_mm: bend * bend / length * 1e3,
        });
    }
    let pieces = centreline(runs, run_length, pitch);
    let right = if runs >= 2 { r + width / 2.0 } else { 0.0 };
    let left = if runs >= 3 { r + width / 2.0 } else { 0.0 };
    Ok(Serpentine {
        runs,
        run_length,
        bends: runs - 1,
        bend_radius: r,
        centreline_length: runs as f64 * run_length + (runs - 1) as f64 * bend,
        footprint: [left + run_length + right, (runs - 1) as f64 * pitch + width],
        pieces,
    })
}

/// The centreline pieces: run i along y = i·pitch, alternately rightward and leftward,
/// joined by half circles.
fn centreline(runs: usize, a: f64, pitch: f64) -> Vec<Piece> {
    let r = pitch / 2.0;
    let mut pieces = Vec::with_capacity(2 * runs);
    for i in 0..runs {
        let y = i as f64 * pitch;
        let rightward = i % 2 == 0;
        let (x0, x1) = if rightward { (0.0, a) } else { (a, 0.0) };
        pieces.push(Piece::Line {
            from: [x0, y],
            to: [x1, y],
        });
        if i + 1 < runs {
            // A half circle from (x1, y) to (x1, y + pitch), bulging away from the runs.
            let (start, sweep) = if rightward {
                (-PI / 2.0, PI)
            } else {
                (-PI / 2.0, -PI)
            };
            pieces.push(Piece::Arc {
                centre: [x1, y + r],
                radius: r,
                start,
                sweep,
            });
        }
    }
    pieces
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn straight_when_it_fits() {
        let s = layout(5e-3, 10e-3, 400e-6, 100e-6).unwrap();
        assert_eq!((s.runs, s.bends), (1, 0));
        assert_eq!(s.run_length, 5e-3);
        assert_eq!(s.footprint, [5e-3, 100e-6]);
    }

    #[test]
    fn refusals_say_what_works() {
        let e = layout(10e-3, 1e-3, 100e-6, 100e-6).unwrap_err();
        assert!(matches!(e, SerpentineError::PitchTooSmall { .. }));
        // Runs much shorter than a bend cannot fold the length.
        let e = layout(2e-3, 1e-6, 2e-3, 100e-6).unwrap_err();
        let SerpentineError::RunTooShort { min_run_mm, .. } = e else {
            panic!("{e:?}")
        };
        let ok = layout(2e-3, min_run_mm * 1e-3 * 1.01, 2e-3, 100e-6).unwrap();
        assert!((ok.centreline_length - 2e-3).abs() < 1e-15);
    }
}
