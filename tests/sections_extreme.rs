//! Closed-form sections at extreme proportions: thin-gap annuli against the slot limit,
//! very flat rectangles and ellipses against the parallel-plates limit, and f·Re against the
//! published values.

use rillnet::section::{SectionFigures, Shape};
use rillnet::units::Length;
use std::f64::consts::PI;

fn l(x: f64) -> Length {
    Length::from_si(x)
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn annulus(ro: f64, ri: f64) -> SectionFigures {
    Shape::Annulus {
        outer_diameter: l(2.0 * ro),
        inner_diameter: l(2.0 * ri),
    }
    .figures()
    .unwrap()
}

/// Thin gaps, ε = (r_o − r_i)/r_o from 1e-3 to 1e-12 (r_o = 100 µm).
const THIN: [f64; 7] = [1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-9, 1e-12];

#[test]
fn thin_annulus_tends_to_the_slot() {
    // A thin annular gap δ is a slot of width 2π·r and gap δ: K = (2πr)·δ³/12 (parallel
    // plates, Bruus 2008, ch. 3). Expanding the annulus closed form (Shah & London 1978;
    // White, Viscous Fluid Flow) in ε gives, on the outer radius,
    //   K = (π r_o δ³/6)·(1 − ε/2 + ε²/60 + ε³/120 + …),
    // and on the mean radius r_m = (r_o + r_i)/2, K = (π r_m δ³/6)·(1 + ε²/60 + ε³/60 + …).
    let ro = 100e-6;
    for eps in THIN {
        let ri = ro * (1.0 - eps);
        let gap = ro - ri; // exact (Sterbenz); ε below is the gap actually represented
        let e = gap / ro;
        let f = annulus(ro, ri);
        let k = f.conductance_factor;
        // Outer-radius slot with its O(ε) correction: what is left is O(ε²).
        let slot_o = PI * ro * gap.powi(3) / 6.0;
        assert!(
            rel(k, slot_o * (1.0 - e / 2.0)) < e * e / 50.0 + 1e-14,
            "ε {eps}: {} vs {}",
            k,
            slot_o * (1.0 - e / 2.0)
        );
        // Mean-radius slot with the ε² term: what is left is O(ε³).
        let slot_m = PI * (ro + ri) / 2.0 * gap.powi(3) / 6.0;
        let want = slot_m * (1.0 + e * e / 60.0);
        assert!(
            rel(k, want) < e.powi(3) / 50.0 + 1e-14,
            "ε {eps}: {k} vs {want}"
        );
        // Both walls see about the slot's shear G·δ/2; the inner, larger one is
        // τ_i/G = (δ/2)(1 + ε/6 + ε²/6 + …) (same expansion of B/r_i − r_i/2).
        let tau = gap / 2.0 * (1.0 + e / 6.0 + e * e / 6.0);
        assert!(
            rel(f.max_wall_shear_per_gradient, tau) < e.powi(3) / 5.0 + 1e-14,
            "ε {eps}: τ/G {}",
            f.max_wall_shear_per_gradient
        );
        // Area 2π r_m δ, Dh = 2δ, so f·Re → 24 (Shah & London 1978, annulus r* → 1).
        assert!(rel(f.area, 2.0 * PI * (ro + ri) / 2.0 * gap) < 1e-15);
        assert!(rel(f.hydraulic_diameter(), 2.0 * gap) < 1e-15);
        assert!(
            (f.f_re() - 24.0).abs() < 24.0 * (e * e / 50.0 + 1e-14),
            "ε {eps}: f·Re {}",
            f.f_re()
        );
    }
}

#[test]
fn thin_annulus_campaign_cases() {
    // The cases that exposed the cancellation: outer diameter 200 µm, inner 199.99 µm,
    // 199.999 µm and thinner; the slot limit (Bruus 2008; Shah & London 1978) to O(ε³).
    for di in [199.99e-6, 199.999e-6, 199.9999e-6, 199.99999e-6] {
        let (ro, ri) = (100e-6, di / 2.0);
        let gap = ro - ri;
        let e = gap / ro;
        let k = annulus(ro, ri).conductance_factor;
        let want = PI * (ro + ri) / 2.0 * gap.powi(3) / 6.0 * (1.0 + e * e / 60.0);
        assert!(rel(k, want) < 1e-14, "inner {di}: {k} vs {want}");
    }
}

#[test]
fn stable_annulus_agrees_with_the_direct_form_where_that_is_accurate() {
    // K = (π/8)[r_o⁴ − r_i⁴ − (r_o² − r_i²)²/ln(r_o/r_i)] (Shah & London 1978; White),
    // evaluated as written. Its terms cancel by ~3/ε², so it is accurate for ε ≥ 0.1 when the
    // radii and their powers are exact: r_o = 2⁻¹³ m (122 µm), r_i = r_o·(1 − ε) with ε a
    // short binary fraction. (With general radii the direct form is itself ~4e-13 off at
    // ε = 0.1.) The wall shears τ_o = r_o/2 − B/r_o, τ_i = B/r_i − r_i/2 likewise.
    let ro = 2f64.powi(-13);
    for eps in [
        0.09375, 0.125, 0.25, 0.375, 0.5, 0.625, 0.75, 0.875, 0.96875,
    ] {
        let ri = ro * (1.0 - eps);
        let ln = (ro / ri).ln();
        let d2 = ro * ro - ri * ri;
        let direct = PI / 8.0 * (ro.powi(4) - ri.powi(4) - d2 * d2 / ln);
        let b = d2 / (4.0 * ln);
        let tau = (ro / 2.0 - b / ro).max(b / ri - ri / 2.0);
        let f = annulus(ro, ri);
        assert!(
            rel(f.conductance_factor, direct) < 1e-13,
            "ε {eps}: {:e}",
            rel(f.conductance_factor, direct)
        );
        assert!(
            rel(f.max_wall_shear_per_gradient, tau) < 1e-13,
            "ε {eps}: τ {:e}",
            rel(f.max_wall_shear_per_gradient, tau)
        );
        assert!(rel(f.area, PI * d2) < 1e-15);
    }
}

#[test]
fn annulus_f_re_is_unchanged() {
    // Shah & London (1978): f·Re = 16(1 − r*)²/[1 + r*² − (1 − r*²)/ln(1/r*)];
    // r* = 0.1 → 22.343, 0.5 → 23.813.
    for (rs, fre) in [(0.1, 22.343), (0.5, 23.813)] {
        let f = annulus(500e-6, 500e-6 * rs);
        assert!((f.f_re() - fre).abs() < 1.5e-3, "r* {rs}: {}", f.f_re());
        let formula =
            16.0 * (1.0 - rs).powi(2) / (1.0 + rs * rs - (1.0 - rs * rs) / (1.0 / rs).ln());
        assert!(rel(f.f_re(), formula) < 1e-13, "r* {rs}: {}", f.f_re());
    }
    // Either side of the switch between the series and the direct form (ε = 1/2), the
    // figures join smoothly.
    let below = annulus(1.0, 0.5 + 1e-12).f_re();
    let above = annulus(1.0, 0.5 - 1e-12).f_re();
    assert!(rel(below, above) < 1e-13, "{below} vs {above}");
}

/// Σ_{n odd} 1/n⁵ = (31/32)ζ(5), ζ(5) = 1.0369277551433699263 (Abramowitz & Stegun 23.2).
const ODD_INV_FIFTH: f64 = 31.0 / 32.0 * 1.036_927_755_143_37;

#[test]
fn flat_rectangles_tend_to_parallel_plates() {
    // Rectangle series (Bruus 2008, eq. 3.56): for h/w = α ≪ 1 the tanh terms are 1 to within
    // e^{−π/α}, so K = (w h³/12)(1 − (192/π⁵)(31/32)ζ(5)·α) exactly in double precision:
    // the plates limit K → w h³/12 with its first-order side-wall correction.
    let c = 192.0 / PI.powi(5) * ODD_INV_FIFTH; // 0.6302…
    for alpha in [1e-3, 1e-6, 1e-9] {
        let (w, h) = (1e-3, 1e-3 * alpha);
        for (width, height) in [(w, h), (h, w)] {
            let f = Shape::Rectangle {
                width: l(width),
                height: l(height),
            }
            .figures()
            .unwrap();
            let a = h / w;
            let plates = w * h.powi(3) / 12.0;
            assert!(
                rel(f.conductance_factor, plates * (1.0 - c * a)) < 1e-15,
                "α {alpha}: {:e}",
                rel(f.conductance_factor, plates * (1.0 - c * a))
            );
            // Wall shear at mid long wall → G·h/2 (plates); f·Re → 24 (Shah & London 1978):
            // with Dh = 2wh/(w + h), f·Re = 24/((1 + α)²(1 − cα)).
            assert!(rel(f.max_wall_shear_per_gradient, h / 2.0) < 1e-15);
            let fre = 24.0 / ((1.0 + a).powi(2) * (1.0 - c * a));
            assert!(rel(f.f_re(), fre) < 1e-14, "α {alpha}: f·Re {}", f.f_re());
        }
    }
}

#[test]
fn flat_ellipses_tend_to_local_parallel_plates() {
    // Ellipse K = πa³b³/(4(a² + b²)) (Bruus 2008, ch. 4). For b ≪ a, summing plates of the
    // local gap h(x) = 2b√(1 − x²/a²) across, ∫ h³/12 dx = πab³/4 (Bruus 2008, ch. 3), and
    // K = (πab³/4)/(1 + α²). The flat limit of f·Re is 2π², not 24, since the perimeter tends
    // to 4a (Shah & London 1978, elliptical ducts).
    for alpha in [1e-3, 1e-6, 1e-9] {
        let (a, b) = (500e-6, 500e-6 * alpha);
        let f = Shape::Ellipse {
            width: l(2.0 * a),
            height: l(2.0 * b),
        }
        .figures()
        .unwrap();
        let lub = PI * a * b.powi(3) / 4.0;
        assert!(
            rel(f.conductance_factor, lub / (1.0 + alpha * alpha)) < 1e-15,
            "α {alpha}"
        );
        // Perimeter 4aE(k): E = 1 + (α²/2)(ln(4/α) − 1/2) + O(α⁴ ln α) (Abramowitz & Stegun
        // 17.3.36); f·Re = 2π²(1 + α²)/E² (Shah & London 1978).
        let e = 1.0 + alpha * alpha / 2.0 * ((4.0 / alpha).ln() - 0.5);
        let tol = 1e-13 + 10.0 * alpha.powi(4);
        assert!(rel(f.perimeter, 4.0 * a * e) < tol, "α {alpha}: P");
        let fre = 2.0 * PI * PI * (1.0 + alpha * alpha) / (e * e);
        assert!(
            rel(f.f_re(), fre) < 3.0 * tol,
            "α {alpha}: f·Re {}",
            f.f_re()
        );
    }
}

#[test]
fn plates_are_exact_at_any_proportion() {
    // Parallel plates (Bruus 2008): K = wh³/12, τ/G = h/2, f·Re = 24 (Shah & London 1978).
    for alpha in [1e-3, 1e-6, 1e-9] {
        let (w, h) = (1e-3, 1e-3 * alpha);
        let f = Shape::Plates {
            gap: l(h),
            width: l(w),
        }
        .figures()
        .unwrap();
        assert!(rel(f.conductance_factor, w * h.powi(3) / 12.0) < 1e-15);
        assert!(rel(f.f_re(), 24.0) < 1e-15);
    }
}
