//! Cross-sections: closed forms against their published values, the numerical Poisson solver
//! against the closed forms and handbook tables, its convergence, and wall shear.

use rillnet::section::numeric::NumericOptions;
use rillnet::section::Shape;
use rillnet::units::Length;
use std::f64::consts::PI;

fn l(x: f64) -> Length {
    Length::from_si(x)
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

#[test]
fn analytic_shapes_match_their_closed_forms() {
    // Ellipse: f·Re = 2π²(1 + α²)/E(√(1 − α²))² (Shah & London 1978): α = 0.5 → 16.823,
    // α = 0.25 → 18.240.
    for (alpha, fre) in [(0.5, 16.823), (0.25, 18.240)] {
        let f = Shape::Ellipse {
            width: l(200e-6),
            height: l(200e-6 * alpha),
        }
        .figures()
        .unwrap();
        assert!(
            (f.f_re() - fre).abs() < 1.5e-3,
            "ellipse {alpha}: {}",
            f.f_re()
        );
    }
    // Circle limit of the ellipse: 16 (Hagen–Poiseuille).
    let f = Shape::Ellipse {
        width: l(1e-4),
        height: l(1e-4),
    }
    .figures()
    .unwrap();
    assert!((f.f_re() - 16.0).abs() < 1e-12);
    // Ellipse resistance (Bruus 2008, ch. 4): R = (4μL/π)(a² + b²)/(a³b³).
    let (a, b) = (100e-6, 40e-6);
    let f = Shape::Ellipse {
        width: l(2.0 * a),
        height: l(2.0 * b),
    }
    .figures()
    .unwrap();
    assert!(
        rel(
            f.resistance_per_length(1e-3),
            4e-3 / PI * (a * a + b * b) / (a * b).powi(3)
        ) < 1e-13
    );
    // Annulus: f·Re = 16(1 − r*)²/[1 + r*² − (1 − r*²)/ln(1/r*)] (Shah & London 1978):
    // r* = 0.1 → 22.343, 0.5 → 23.813.
    for (rs, fre) in [(0.1, 22.343), (0.5, 23.813)] {
        let f = Shape::Annulus {
            outer_diameter: l(1e-3),
            inner_diameter: l(1e-3 * rs),
        }
        .figures()
        .unwrap();
        assert!(
            (f.f_re() - fre).abs() < 1.5e-3,
            "annulus {rs}: {}",
            f.f_re()
        );
    }
    // Equilateral triangle: f·Re = 40/3 (Shah & London 1978); R = 320μL/(√3 a⁴) (Bruus 2008).
    let f = Shape::Triangle { side: l(100e-6) }.figures().unwrap();
    assert!(rel(f.f_re(), 40.0 / 3.0) < 1e-13);
    assert!(
        rel(
            f.resistance_per_length(1e-3),
            320e-3 / (3f64.sqrt() * 1e-16)
        ) < 1e-13
    );
    // Parallel plates: f·Re = 24; R = 12μL/(wh³) (Bruus 2008).
    let f = Shape::Plates {
        gap: l(20e-6),
        width: l(5e-3),
    }
    .figures()
    .unwrap();
    assert!(rel(f.f_re(), 24.0) < 1e-13);
    assert!(rel(f.resistance_per_length(1e-3), 12e-3 / (5e-3 * 8e-15)) < 1e-13);
}

#[test]
fn elliptic_integral() {
    // E(0) = π/2, E(1) = 1; E(sin 30°) = 1.4674622093 (Abramowitz & Stegun table 17.6).
    assert!((rillnet::section::elliptic_e(0.0) - PI / 2.0).abs() < 1e-15);
    assert!((rillnet::section::elliptic_e(1.0) - 1.0).abs() < 1e-12);
    assert!((rillnet::section::elliptic_e(0.5) - 1.467_462_209_3).abs() < 1e-9);
}

/// Solve an analytic shape numerically and compare K and τ_max with its closed form.
fn numeric_vs_closed(shape: Shape, k_tol: f64, tau_tol: Option<f64>) {
    let exact = shape.analytic_figures().unwrap();
    let sol = shape.solve_numeric(&NumericOptions::default()).unwrap();
    let ek = rel(sol.conductance_factor, exact.conductance_factor);
    let et = rel(
        sol.max_wall_shear_per_gradient,
        exact.max_wall_shear_per_gradient,
    );
    assert!(ek < k_tol, "{}: K error {ek:e}", shape.kind());
    if let Some(tau_tol) = tau_tol {
        assert!(et < tau_tol, "{}: τ_max error {et:e}", shape.kind());
    }
    assert!(rel(sol.area, exact.area) < 1e-5, "{}: area", shape.kind());
    // The reported estimate does not understate the true error by much.
    assert!(
        sol.relative_error_estimate < 1e-4,
        "{}: estimate {:e}",
        shape.kind(),
        sol.relative_error_estimate
    );
    // Force balance: ∮τ ds = G·A, i.e. the mean wall shear from the flux equals A/P.
    assert!(
        rel(
            sol.mean_wall_shear_per_gradient_from_flux,
            sol.area / sol.perimeter
        ) < 1e-9
    );
}

#[test]
fn numerical_solver_reproduces_the_closed_forms() {
    // Rectangle series (Bruus 2008, eq. 3.56) and its wall-shear series (derived in section.rs).
    numeric_vs_closed(
        Shape::Rectangle {
            width: l(200e-6),
            height: l(50e-6),
        },
        1e-4,
        Some(1e-3),
    );
    numeric_vs_closed(
        Shape::Rectangle {
            width: l(100e-6),
            height: l(100e-6),
        },
        1e-4,
        Some(1e-3),
    );
    // Hagen–Poiseuille circle (curved wall).
    numeric_vs_closed(
        Shape::Circle {
            diameter: l(100e-6),
        },
        1e-4,
        Some(1e-3),
    );
    // Equilateral triangle, τ_max = G·a√3/8 at mid-side.
    numeric_vs_closed(Shape::Triangle { side: l(100e-6) }, 1e-4, Some(1e-3));
    // Ellipse (outline is a 1440-gon, a stand-in for a measured profile of a curved wall):
    // the maximum wall shear is the largest element mean, free of the vertex/edge-node
    // alternation that polygon vertices cause in the nodal flux (see numeric::max_wall_shear).
    numeric_vs_closed(
        Shape::Ellipse {
            width: l(200e-6),
            height: l(100e-6),
        },
        1e-4,
        Some(1e-3),
    );
    // Circle as a fine polygon (1440 sides: its own area deficit is (2π/1440)²/6 ≈ 3e-6).
    let r = 50e-6;
    let polygon = Shape::Polygon {
        points: (0..1440)
            .map(|k| {
                let t = 2.0 * PI * k as f64 / 1440.0;
                [l(r * t.cos()), l(r * t.sin())]
            })
            .collect(),
    };
    let sol = polygon.solve_numeric(&NumericOptions::default()).unwrap();
    let k = PI * r.powi(4) / 8.0; // Hagen–Poiseuille
    assert!(
        rel(sol.conductance_factor, k) < 1e-4,
        "{:e}",
        rel(sol.conductance_factor, k)
    );
    // Annulus (two curved walls, a hole).
    numeric_vs_closed(
        Shape::Annulus {
            outer_diameter: l(300e-6),
            inner_diameter: l(100e-6),
        },
        1e-4,
        Some(1e-3),
    );
}

#[test]
fn numerical_solver_converges_at_the_p2_rate() {
    // On the square, the K error of quadratic elements falls by about 2⁴ = 16 when h halves
    // (smooth solution up to its 90° corners). Checked over three fixed meshes.
    let shape = Shape::Rectangle {
        width: l(1.0),
        height: l(1.0),
    };
    let exact = shape.analytic_figures().unwrap().conductance_factor;
    // Direct rate check on successive refinements.
    let mut errs = Vec::new();
    for max_nodes in [200usize, 800, 3_200, 12_800] {
        let s = shape
            .solve_numeric(&NumericOptions {
                tolerance: 0.0,
                shear_tolerance: 0.0,
                max_nodes,
            })
            .unwrap();
        errs.push((s.field.nodes.len(), rel(s.conductance_factor, exact)));
    }
    for w in errs.windows(2) {
        let (n0, e0) = w[0];
        let (n1, e1) = w[1];
        if n1 <= n0 || e1 < 1e-12 {
            continue;
        }
        // h ∝ N^(-1/2): rate p = log(e0/e1) / log(√(n1/n0)).
        let p = (e0 / e1).ln() / ((n1 as f64 / n0 as f64).sqrt()).ln();
        assert!(
            p > 3.0,
            "observed order {p:.2} between {n0} and {n1} nodes ({errs:?})"
        );
    }
}

#[test]
fn semicircle_and_isosceles_triangle_match_shah_london() {
    // Shah & London (1978), ducts of semicircular cross-section: f·Re = 15.767.
    let f = Shape::Semicircle {
        diameter: l(200e-6),
    }
    .figures()
    .unwrap();
    assert!((f.f_re() - 15.767).abs() < 2e-3, "semicircle {}", f.f_re());
    // Shah & London (1978), isosceles triangular ducts: apex angle 2θ = 90° → f·Re = 13.153.
    let h = 50e-6;
    let f = Shape::Polygon {
        points: vec![[l(-h), l(0.0)], [l(0.0), l(-h)], [l(h), l(0.0)]],
    }
    .figures()
    .unwrap();
    assert!(
        (f.f_re() - 13.153).abs() < 2e-3,
        "right isosceles {}",
        f.f_re()
    );
    // A trapezoid with vertical sides is a rectangle: same K as the series.
    let t = Shape::Trapezoid {
        top: l(150e-6),
        bottom: l(150e-6),
        depth: l(50e-6),
    }
    .figures()
    .unwrap();
    let r = Shape::Rectangle {
        width: l(150e-6),
        height: l(50e-6),
    }
    .figures()
    .unwrap();
    assert!(rel(t.conductance_factor, r.conductance_factor) < 1e-4);
}

#[test]
fn rectangle_maximum_wall_shear_against_series() {
    // τ_max/τ_mean for the rectangle from the wall-derivative series (values computed from
    // τ_max = (4Gh/π²)Σ_{n odd}[1 − sech(nπw/2h)]/n²): α = 0.5 → 1.39509, α = 0.25 → 1.24621.
    for (alpha, ratio) in [(0.5, 1.39509), (0.25, 1.24621)] {
        let s = Shape::Polygon {
            points: vec![
                [l(0.0), l(0.0)],
                [l(1e-4), l(0.0)],
                [l(1e-4), l(1e-4 * alpha)],
                [l(0.0), l(1e-4 * alpha)],
            ],
        }
        .figures()
        .unwrap();
        let got = s.max_wall_shear_per_gradient / s.mean_wall_shear_per_gradient();
        assert!(rel(got, ratio) < 1e-3, "alpha {alpha}: {got}");
    }
}

#[test]
fn d_shape_and_rounded_rectangle_bracket_their_limits() {
    // A rounded rectangle with zero radius is the rectangle; with radius = half the height of
    // a w × h channel (h = 2r) it lies between the rectangle and the stadium's lower bound.
    let rect = Shape::Rectangle {
        width: l(200e-6),
        height: l(60e-6),
    }
    .figures()
    .unwrap();
    let r0 = Shape::RoundedRectangle {
        width: l(200e-6),
        height: l(60e-6),
        corner_radius: l(0.0),
    }
    .figures()
    .unwrap();
    assert!(rel(r0.conductance_factor, rect.conductance_factor) < 1e-4);
    let r30 = Shape::RoundedRectangle {
        width: l(200e-6),
        height: l(60e-6),
        corner_radius: l(30e-6),
    }
    .figures()
    .unwrap();
    assert!(r30.conductance_factor < rect.conductance_factor);
    // Geometry: the stadium w×h with r = h/2 has area w·h − (4 − π)r²; the quadratic wall
    // elements through three points of each arc reproduce it to about 2.5e-6 (measured).
    assert!(rel(r30.area, 200e-6 * 60e-6 - (4.0 - PI) * 30e-6f64.powi(2)) < 1e-5);
    // D-shape with zero mask width is the semicircle of radius = depth.
    let d0 = Shape::DShape {
        mask_width: l(0.0),
        depth: l(50e-6),
    }
    .figures()
    .unwrap();
    let semi = Shape::Semicircle {
        diameter: l(100e-6),
    }
    .figures()
    .unwrap();
    assert!(rel(d0.conductance_factor, semi.conductance_factor) < 2e-4);
    // Its area is exact: mask·depth + π·depth²/2.
    let d = Shape::DShape {
        mask_width: l(80e-6),
        depth: l(30e-6),
    }
    .figures()
    .unwrap();
    assert!(rel(d.area, 80e-6 * 30e-6 + PI * 30e-6f64.powi(2) / 2.0) < 1e-6);
}

#[test]
fn measured_profile_closes_with_the_lid() {
    // A profile sampling a 100 µm × 40 µm rectangle is that rectangle.
    let pts = vec![
        [l(0.0), l(40e-6)],
        [l(50e-6), l(40e-6)],
        [l(100e-6), l(40e-6)],
    ];
    let p = Shape::Profile { points: pts }.figures().unwrap();
    let r = Shape::Rectangle {
        width: l(100e-6),
        height: l(40e-6),
    }
    .figures()
    .unwrap();
    assert!(rel(p.conductance_factor, r.conductance_factor) < 1e-4);
    // CSV parsing: header, comments, each separator, unit scale (one separator per file, fixed
    // by the first data row).
    for sep in [",", ";", "\t", " "] {
        let csv =
            format!("# stylus export\nx_um{sep}depth_um\n0{sep}0\n10{sep}5\n20{sep}8\n30{sep}0\n");
        let pts = rillnet::format::parse_profile_csv(&csv, 1e-6).unwrap();
        assert_eq!(pts.len(), 4, "{sep:?}");
        assert_eq!(pts[2][1].si(), 8e-6);
    }
    // Strict: a cell that is not a plain number, a changed field count, a decimal comma.
    for bad in [
        "0,0\n1,x\n",
        "0,0\n1,2 um\n",
        "0,0\n1,\"2\"\n",
        "0,0\n1,2,3\n",
        "0;0\n0,5;1\n",
        "0,5;0\n1;1\n",
    ] {
        let e = rillnet::format::parse_profile_csv(bad, 1e-6).unwrap_err();
        assert!(e.contains("line 2") || e.contains("line 1"), "{bad:?}: {e}");
    }
}

#[test]
fn overall_width_is_the_horizontal_extent() {
    // Plain geometry: a circle spans its diameter, a rectangle its width, an etched trapezoid
    // (lid on top, walls narrowing downwards) its top width.
    let um = |v: f64| Length::from_si(v * 1e-6);
    let cases = [
        (
            Shape::Circle {
                diameter: um(100.0),
            },
            100e-6,
        ),
        (
            Shape::Rectangle {
                width: um(250.0),
                height: um(40.0),
            },
            250e-6,
        ),
        (
            Shape::Trapezoid {
                top: um(120.0),
                bottom: um(63.4),
                depth: um(40.0),
            },
            120e-6,
        ),
    ];
    for (shape, want) in cases {
        let got = shape.overall_width();
        assert!(
            ((got - want) / want).abs() < 1e-8,
            "{}: {got}",
            shape.kind()
        );
    }
}
