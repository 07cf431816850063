//! Serpentine layouts: the laid-out centreline equals the channel length, the pieces join
//! without gaps or kinks, the runs respect the requested maximum with the fewest runs, and the
//! footprint is the bounding box of the walls. Checks are plain geometry (arc length r·θ,
//! wall offsets along the normal), computed here independently of the layout's own sums.

use rillnet::serpentine::{layout, Piece};

/// (length, max run, pitch, width) [m]
const CASES: &[(f64, f64, f64, f64)] = &[
    (23.999e-3, 10e-3, 400e-6, 100e-6),
    (60e-3, 10e-3, 400e-6, 100e-6),
    (31.4e-3, 5e-3, 1e-3, 300e-6),
    (100e-3, 7.5e-3, 250e-6, 50e-6),
    (10.0001e-3, 10e-3, 400e-6, 200e-6),
    (3e-3, 0.2e-3, 600e-6, 100e-6),
    (0.5, 20e-3, 2e-3, 1e-3),
];

/// Point and unit tangent along a piece at parameter t in [0, 1].
fn at(p: &Piece, t: f64) -> ([f64; 2], [f64; 2]) {
    match *p {
        Piece::Line { from, to } => {
            let d = [to[0] - from[0], to[1] - from[1]];
            let l = d[0].hypot(d[1]);
            (
                [from[0] + t * d[0], from[1] + t * d[1]],
                [d[0] / l, d[1] / l],
            )
        }
        Piece::Arc {
            centre,
            radius,
            start,
            sweep,
        } => {
            let a = start + t * sweep;
            let s = sweep.signum();
            (
                [centre[0] + radius * a.cos(), centre[1] + radius * a.sin()],
                [-s * a.sin(), s * a.cos()],
            )
        }
    }
}

fn independent_length(p: &Piece) -> f64 {
    match *p {
        Piece::Line { from, to } => ((to[0] - from[0]).powi(2) + (to[1] - from[1]).powi(2)).sqrt(),
        Piece::Arc { radius, sweep, .. } => radius * sweep.abs(),
    }
}

#[test]
fn laid_out_centreline_equals_the_length() {
    for &(length, run, pitch, width) in CASES {
        let s = layout(length, run, pitch, width).unwrap();
        let total: f64 = s.pieces.iter().map(independent_length).sum();
        assert!(
            ((total - length) / length).abs() < 1e-9,
            "{length} {run} {pitch}: laid out {total}"
        );
        assert!((s.centreline_length - total).abs() <= 1e-12 * length);
        let lines = s
            .pieces
            .iter()
            .filter(|p| matches!(p, Piece::Line { .. }))
            .count();
        assert_eq!(lines, s.runs);
        assert_eq!(s.pieces.len() - lines, s.bends);
        assert_eq!(s.bends, s.runs - 1);
        assert!((s.bend_radius - pitch / 2.0).abs() < 1e-18);
    }
}

#[test]
fn pieces_join_without_gaps_or_kinks() {
    for &(length, run, pitch, width) in CASES {
        let s = layout(length, run, pitch, width).unwrap();
        for w in s.pieces.windows(2) {
            let (end, t_end) = at(&w[0], 1.0);
            let (start, t_start) = at(&w[1], 0.0);
            let gap = (end[0] - start[0]).hypot(end[1] - start[1]);
            assert!(gap < 1e-12 * length.max(1e-3), "gap {gap}");
            let kink = (t_end[0] - t_start[0]).hypot(t_end[1] - t_start[1]);
            assert!(kink < 1e-9, "tangent jump {kink}");
        }
    }
}

#[test]
fn runs_are_within_the_maximum_and_fewest() {
    for &(length, run, pitch, width) in CASES {
        let s = layout(length, run, pitch, width).unwrap();
        assert!(
            s.run_length <= run * (1.0 + 1e-12),
            "{} > {run}",
            s.run_length
        );
        if s.runs > 1 {
            // One run fewer would need runs longer than the maximum.
            let n = (s.runs - 1) as f64;
            let longer = (length - (n - 1.0) * std::f64::consts::PI * pitch / 2.0) / n;
            assert!(
                longer > run,
                "{} runs would do: {longer} <= {run}",
                s.runs - 1
            );
        }
    }
}

#[test]
fn footprint_is_the_bounding_box_of_the_walls() {
    for &(length, run, pitch, width) in CASES {
        let s = layout(length, run, pitch, width).unwrap();
        let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
        for p in &s.pieces {
            for i in 0..=2000 {
                let t = i as f64 / 2000.0;
                let (c, tan) = at(p, t);
                let normal = [-tan[1], tan[0]];
                // Square-cut ends: the walls stop at the run ends (no half-width past them).
                for side in [-1.0, 1.0] {
                    let q = [
                        c[0] + side * width / 2.0 * normal[0],
                        c[1] + side * width / 2.0 * normal[1],
                    ];
                    for d in 0..2 {
                        lo[d] = lo[d].min(q[d]);
                        hi[d] = hi[d].max(q[d]);
                    }
                }
            }
        }
        for d in 0..2 {
            let measured = hi[d] - lo[d];
            // Sampling the arcs at 2000 points resolves their extreme to (π/2000)²/8 · r.
            assert!(
                (measured - s.footprint[d]).abs() < 1e-6 * s.footprint[d] + 1e-9,
                "axis {d}: walls span {measured}, footprint says {}",
                s.footprint[d]
            );
        }
    }
}
