//! Rectangular sections: the rectangle (exact series), parallel plates (closed form) and the
//! rounded rectangle (outline only; it is solved numerically).

use super::outline::{Loop, Outline, Piece, Point};
use super::SectionFigures;
use std::f64::consts::PI;

/// Σ_{n odd} 1/n⁵ = (1 − 2⁻⁵)·ζ(5), ζ(5) = 1.0369277551433699263 (Abramowitz & Stegun 23.2).
const ODD_INV_FIFTH_POWERS: f64 = 31.0 / 32.0 * 1.036_927_755_143_37;

/// Rectangle w × h with h ≤ w (the function sorts them). The exact series
/// (Bruus, Theoretical Microfluidics 2008, eq. 3.56; Shah & London 1978):
///
///   K = (w h³/12)·[1 − (192 h/(π⁵ w))·Σ_{n odd} tanh(nπw/2h)/n⁵].
///
/// Written as tanh = 1 − (1 − tanh), the sum becomes the closed value
/// Σ 1/n⁵ = (31/32)ζ(5) minus terms that fall like e^{−nπw/h}/n⁵, so it reaches machine
/// precision after a handful of terms for every aspect ratio (the plain series needs
/// thousands of terms for 1e-12).
///
/// The largest wall shear sits at the middle of the long walls. Differentiating the same
/// series at the wall gives τ_max = (4Gh/π²)·Σ_{n odd} [1 − sech(nπw/2h)]/n²; with
/// Σ_{n odd} 1/n² = π²/8 it becomes τ_max/G = h/2 − (4h/π²)·Σ_{n odd} sech(nπw/2h)/n²,
/// again exponentially convergent.
pub(super) fn rectangle(width: f64, height: f64) -> SectionFigures {
    let (w, h) = if width >= height {
        (width, height)
    } else {
        (height, width)
    };
    let (tail5, sech2) = rectangle_tails(w / h);
    let series = ODD_INV_FIFTH_POWERS - tail5;
    let k = w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * series);
    SectionFigures {
        area: w * h,
        perimeter: 2.0 * (w + h),
        conductance_factor: k,
        max_wall_shear_per_gradient: h / 2.0 - 4.0 * h / (PI * PI) * sech2,
        ..SectionFigures::CLOSED_FORM
    }
}

/// The two exponentially convergent sums of [`rectangle`] for the aspect ratio w/h ≥ 1, with
/// x_n = nπw/(2h) over odd n: (Σ (1 − tanh x_n)/n⁵, Σ sech(x_n)/n²). Terms are added until
/// both fall below 1e-18 of their scale (or n passes 10⁴).
///
/// One exponential per call: with q = e^{−x₁}, e^{−x_n} = qⁿ, so 1 − tanh x_n =
/// 2q²ⁿ/(1 + q²ⁿ) and sech x_n = 2qⁿ/(1 + q²ⁿ), and qⁿ advances by q² from term to term
/// (a relative rounding of n ulp on terms that are themselves corrections; the series test
/// below holds it to 1e-12 against the plain sum).
fn rectangle_tails(ratio: f64) -> (f64, f64) {
    let q = (-PI * ratio / 2.0).exp();
    let q2 = q * q;
    let mut qn = q; // qⁿ, underflowing to 0 safely
    let mut tail5 = 0.0; // Σ (1 − tanh x_n)/n⁵
    let mut sech2 = 0.0; // Σ sech(x_n)/n²
    let mut n = 1.0_f64;
    loop {
        let q2n = qn * qn;
        let r = 2.0 / (1.0 + q2n);
        let n2 = n * n;
        let t2 = qn * r / n2;
        let t5 = q2n * r / (n2 * n2 * n);
        tail5 += t5;
        sech2 += t2;
        if (t5 <= 1e-18 * ODD_INV_FIFTH_POWERS && t2 <= 1e-18) || n > 1.0e4 {
            break;
        }
        n += 2.0;
        qn *= q2;
    }
    (tail5, sech2)
}

/// K and τ_max/G of the rectangle `width` × `height` (SI), as [`rectangle`] gives them,
/// without building the other figures: for callers that evaluate many rectangles.
pub fn rectangle_k_and_shear(width: f64, height: f64) -> (f64, f64) {
    let f = rectangle(width, height);
    (f.conductance_factor, f.max_wall_shear_per_gradient)
}

/// Parallel plates a gap h apart over width w, side walls ignored (Bruus 2008): K = wh³/12,
/// τ/G = h/2 on both plates; the wetted perimeter counts the plates only (2w), so Dh = 2h and
/// f·Re = 24.
pub(super) fn plates(h: f64, w: f64) -> SectionFigures {
    SectionFigures {
        area: w * h,
        perimeter: 2.0 * w,
        conductance_factor: w * h.powi(3) / 12.0,
        max_wall_shear_per_gradient: h / 2.0,
        ..SectionFigures::CLOSED_FORM
    }
}

/// Rectangle `w` wide and `h` deep below the lid, centred across.
pub(super) fn rectangle_outline(w: f64, h: f64) -> Outline {
    Outline::polygon(&[
        [-w / 2.0, -h],
        [w / 2.0, -h],
        [w / 2.0, 0.0],
        [-w / 2.0, 0.0],
    ])
}

/// Parallel plates `h` apart over `w`, solved with their side walls: the `w` × `h` rectangle.
pub(super) fn plates_outline(h: f64, w: f64) -> Outline {
    rectangle_outline(w, h)
}

/// Rectangle `w` × `h` below the lid with all four corners rounded to radius `r`
/// (0 ≤ r ≤ half the smaller side); the plain rectangle for r = 0.
pub(super) fn rounded_rectangle_outline(w: f64, h: f64, r: f64) -> Outline {
    let (x0, x1, y0, y1) = (-w / 2.0, w / 2.0, -h, 0.0);
    if r <= 0.0 {
        return Outline::polygon(&[[x0, y0], [x1, y0], [x1, y1], [x0, y1]]);
    }
    let mut pieces = Vec::new();
    let line = |to: Point, pieces: &mut Vec<Piece>| pieces.push(Piece::Line { to });
    line([x1 - r, y0], &mut pieces);
    pieces.push(Piece::Arc {
        to: [x1, y0 + r],
        center: [x1 - r, y0 + r],
        ccw: true,
    });
    line([x1, y1 - r], &mut pieces);
    pieces.push(Piece::Arc {
        to: [x1 - r, y1],
        center: [x1 - r, y1 - r],
        ccw: true,
    });
    line([x0 + r, y1], &mut pieces);
    pieces.push(Piece::Arc {
        to: [x0, y1 - r],
        center: [x0 + r, y1 - r],
        ccw: true,
    });
    line([x0, y0 + r], &mut pieces);
    pieces.push(Piece::Arc {
        to: [x0 + r, y0],
        center: [x0 + r, y0 + r],
        ccw: true,
    });
    let start = [x0 + r, y0];
    Outline {
        loops: vec![Loop {
            start,
            pieces: without_zero_lines(pieces, start, 1e-12 * w.max(h)),
        }],
    }
}

/// The pieces without the straight ones shorter than `tol` (where the corner radius is half a
/// side), following the loop from `start`.
fn without_zero_lines(pieces: Vec<Piece>, start: Point, tol: f64) -> Vec<Piece> {
    let mut clean: Vec<Piece> = Vec::new();
    let mut from = start;
    for p in pieces {
        let to = p.end();
        if matches!(p, Piece::Line { .. }) && (to[0] - from[0]).hypot(to[1] - from[1]) < tol {
            continue;
        }
        clean.push(p);
        from = to;
    }
    clean
}

#[cfg(test)]
mod tests {
    use crate::section::{SectionFigures, Shape};
    use crate::units::Length;
    use approx::assert_relative_eq;
    use std::f64::consts::PI;

    fn rect(w: f64, h: f64) -> SectionFigures {
        Shape::Rectangle {
            width: Length::from_si(w),
            height: Length::from_si(h),
        }
        .figures()
        .unwrap()
    }

    /// Plain summation of the series, many terms plus the integral tail estimate; an
    /// independent evaluation of the same closed form to check the rearranged one.
    fn brute_force_k(w: f64, h: f64) -> f64 {
        let mut s = 0.0;
        let mut n = 1.0_f64;
        let n_max = 400_001.0;
        while n <= n_max {
            s += (n * PI * w / (2.0 * h)).tanh() / n.powi(5);
            n += 2.0;
        }
        // Tail Σ_{n odd > N} 1/n⁵ ≈ ∫ dn/(2n⁵) from N+1 = 1/(8 (N+1)⁴).
        s += 1.0 / (8.0 * (n_max + 1.0).powi(4));
        w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * s)
    }

    #[test]
    fn rectangle_series_reaches_1e12() {
        for &(w, h) in &[
            (1.0, 1.0),
            (2.0, 1.0),
            (10.0, 1.0),
            (1.0, 0.3),
            (100.0, 1.0),
        ] {
            let f = rect(w, h);
            assert_relative_eq!(
                f.conductance_factor,
                brute_force_k(w.max(h), w.min(h)),
                max_relative = 1e-12
            );
        }
    }

    #[test]
    fn rectangle_f_re_matches_shah_london() {
        // Shah & London (1978), Laminar Flow Forced Convection in Ducts, rectangular ducts
        // table: f·Re for aspect ratios α = h/w, to the five decimals of the exact series.
        let table = [
            (1.0, 14.22708),
            (0.5, 15.54806),
            (1.0 / 3.0, 17.08967),
            (0.25, 18.23278),
            (0.2, 19.07050),
            (0.125, 20.58464),
            (0.1, 21.16888),
            (0.05, 22.47701),
        ];
        for (alpha, fre) in table {
            let f = rect(1.0, alpha);
            assert!(
                (f.f_re() - fre).abs() < 6e-6,
                "alpha {alpha}: {} vs {fre}",
                f.f_re()
            );
            // Orientation does not matter.
            assert_relative_eq!(rect(alpha, 1.0).f_re(), f.f_re(), max_relative = 1e-14);
        }
        // Parallel-plate limit α → 0: f·Re → 24 (Shah & London 1978).
        assert_relative_eq!(rect(1.0, 1e-5).f_re(), 24.0, max_relative = 1e-4);
    }

    #[test]
    fn rectangle_one_term_approximation_is_a_sanity_bound() {
        // Bruus (2008) one-term approximation R ≈ 12μL/[wh³(1 − 0.630 h/w)]: about 14% high at
        // h = w, about 0.2% at h = w/2, below 0.01% for h ≤ w/3 (compared against the series).
        for &(alpha, tol) in &[(1.0, 0.15), (0.5, 2.5e-3), (1.0 / 3.0, 1e-4), (0.1, 1e-4)] {
            let (w, h) = (1.0, alpha);
            let exact = rect(w, h).resistance_per_length(1.0);
            let approx = 12.0 / (w * h.powi(3) * (1.0 - 0.630 * h / w));
            assert!(
                ((approx - exact) / exact).abs() < tol,
                "alpha {alpha}: approx {approx} exact {exact}"
            );
        }
    }

    #[test]
    fn rectangle_worked_resistance() {
        // Water μ = 1.0016 mPa·s (IAPWS R12-08, 20 °C) in a 100 µm × 50 µm rectangle, L = 1 cm:
        // R = 1.40156e13 Pa·s/m³ computed from the series (Bruus 2008, eq. 3.56).
        let r = rect(100e-6, 50e-6).resistance_per_length(1.0016e-3) * 0.01;
        assert_relative_eq!(r, 1.40156e13, max_relative = 1e-5);
    }

    #[test]
    fn rectangle_max_wall_shear_ratio() {
        // τ_max/τ_mean at the middle of the long wall, from the series for the wall gradient
        // (derived in `rectangle`; values computed from that series).
        for (alpha, ratio) in [
            (1.0, 1.35062),
            (0.5, 1.39509),
            (0.25, 1.24621),
            (0.1, 1.10000),
        ] {
            let f = rect(1.0, alpha);
            let got = f.max_wall_shear_per_gradient / f.mean_wall_shear_per_gradient();
            assert!(
                (got - ratio).abs() < 1e-5,
                "alpha {alpha}: {got} vs {ratio}"
            );
        }
    }
}
