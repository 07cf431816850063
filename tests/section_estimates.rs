//! The numerical section solver's error estimates against true errors: closed forms (exact),
//! published tables, independent finite-element references, and finer solves of our own. An
//! estimate is only useful if it bounds the error; these tests check that it does, shape by
//! shape, at the default tolerance.

use rillnet::section::numeric::{NumericOptions, NumericSection};
use rillnet::section::Shape;
use rillnet::units::Length;
use std::f64::consts::PI;

fn l(x: f64) -> Length {
    Length::from_si(x)
}

fn pts(p: &[[f64; 2]]) -> Vec<[Length; 2]> {
    p.iter().map(|q| [l(q[0]), l(q[1])]).collect()
}

/// K from f·Re on the outline's exact area and perimeter: K = A·Dh²/(2 f·Re).
fn k_from_fre(area: f64, perimeter: f64, fre: f64) -> f64 {
    let dh = 4.0 * area / perimeter;
    area * dh * dh / (2.0 * fre)
}

/// Area and perimeter of a polygon.
fn polygon_area_perimeter(p: &[[f64; 2]]) -> (f64, f64) {
    let n = p.len();
    let (mut a, mut per) = (0.0, 0.0);
    for k in 0..n {
        let (u, v) = (p[k], p[(k + 1) % n]);
        a += u[0] * v[1] - u[1] * v[0];
        per += (v[0] - u[0]).hypot(v[1] - u[1]);
    }
    (a.abs() / 2.0, per)
}

/// A KOH trapezoid, `top` and `depth` in µm, sidewalls at 54.74° to the lid. The independent
/// reference's trapezoid values are those of a 54.74° sidewall: solved at 200 000 nodes we
/// reproduce them within 6e-7 at 54.74°, while atan √2 = 54.7356° gives K larger by 1.1e-5 to
/// 2.8e-5 (more than any error of a conforming solution, which lies below the true K).
fn koh(top: f64, depth: f64) -> (Shape, f64, f64) {
    let bottom = top - 2.0 * depth / 54.74f64.to_radians().tan();
    let (t, b, d) = (top * 1e-6, bottom * 1e-6, depth * 1e-6);
    let side = ((t - b) / 2.0).hypot(d);
    (
        Shape::Trapezoid {
            top: l(t),
            bottom: l(b),
            depth: l(d),
        },
        (t + b) / 2.0 * d,
        t + b + 2.0 * side,
    )
}

/// A profilometer-like trench: 200 points over 120 µm, 40 µm deep with 10 µm sloped sides,
/// and uniform roughness of ±`rough` µm from a fixed-seed generator.
fn rough_profile(rough: f64) -> Shape {
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let n = 200;
    let points = (0..n)
        .map(|k| {
            let x = 120.0 * k as f64 / (n - 1) as f64;
            let base = 40.0 * (x / 10.0).min((120.0 - x) / 10.0).min(1.0);
            let noise = rough * (2.0 * uniform() - 1.0);
            let depth = if k == 0 || k == n - 1 {
                0.0
            } else {
                (base + noise).max(0.5 * base)
            };
            [l(x * 1e-6), l(depth * 1e-6)]
        })
        .collect();
    Shape::Profile { points }
}

struct Case {
    name: String,
    estimate: f64,
    true_error: f64,
    nodes: usize,
    converged: bool,
}

fn solve(shape: &Shape, opts: &NumericOptions) -> NumericSection {
    shape.solve_numeric(opts).expect("solves")
}

fn case(name: &str, shape: &Shape, k_true: f64) -> Case {
    let s = solve(shape, &NumericOptions::default());
    eprintln!(
        "  {name}: converged {} K est {:.2e} shear est {:.2e} nodes {} refinements {}",
        s.converged,
        s.relative_error_estimate,
        s.shear_error_estimate,
        s.field.nodes.len(),
        s.refinements
    );
    Case {
        converged: s.converged,
        name: name.into(),
        estimate: s.relative_error_estimate,
        true_error: ((s.conductance_factor - k_true) / k_true).abs(),
        nodes: s.field.nodes.len(),
    }
}

/// Every estimate at least the true error; converged ones within the default tolerance, and
/// all of them converged when `all_converge`.
fn check(cases: &[Case], all_converge: bool) {
    for c in cases {
        eprintln!(
            "{:<44} estimate {:>9.2e}  true {:>9.2e}  ratio {:>7.2}  nodes {} converged {}",
            c.name,
            c.estimate,
            c.true_error,
            c.estimate / c.true_error,
            c.nodes,
            c.converged
        );
    }
    for c in cases {
        assert!(
            c.estimate >= c.true_error,
            "{}: estimate {:e} below the true error {:e}",
            c.name,
            c.estimate,
            c.true_error
        );
        assert!(c.converged || !all_converge, "{}: not converged", c.name);
        if c.converged {
            assert!(c.estimate <= 1e-4, "{}: estimate {:e}", c.name, c.estimate);
        }
    }
}

#[test]
fn estimate_bounds_the_error_of_closed_forms() {
    let mut cases = Vec::new();
    let exact = |s: &Shape| s.analytic_figures().unwrap().conductance_factor;
    // Hagen–Poiseuille circle (arcs, exact wall) and the equilateral triangle closed form.
    for (name, shape) in [
        (
            "circle (Hagen–Poiseuille)",
            Shape::Circle {
                diameter: l(100e-6),
            },
        ),
        (
            "equilateral triangle (Shah & London 1978)",
            Shape::Triangle { side: l(100e-6) },
        ),
    ] {
        cases.push(case(name, &shape, exact(&shape)));
    }
    // Rectangles against the exact series (Shah & London 1978), as Rectangle outlines and the
    // 1:20 one also as a polygon.
    for alpha in [1.0, 0.5, 0.25, 0.1] {
        let shape = Shape::Rectangle {
            width: l(100e-6),
            height: l(100e-6 * alpha),
        };
        cases.push(case(
            &format!("rectangle 1:{} (Shah & London 1978)", 1.0 / alpha),
            &shape,
            exact(&shape),
        ));
    }
    let (w, h) = (200e-6, 10e-6);
    let series = Shape::Rectangle {
        width: l(w),
        height: l(h),
    };
    let polygon = Shape::Polygon {
        points: pts(&[[0.0, 0.0], [w, 0.0], [w, h], [0.0, h]]),
    };
    cases.push(case(
        "rectangle 1:20 as polygon (Shah & London 1978)",
        &polygon,
        exact(&series),
    ));
    // Semicircle: K/r⁴ = 0.07438919551493348 (exact series, computed; Shah & London 1978
    // f·Re = 15.767).
    let r = 50e-6;
    cases.push(case(
        "semicircle (exact series)",
        &Shape::Semicircle {
            diameter: l(2.0 * r),
        },
        0.074_389_195_514_933_48 * r.powi(4),
    ));
    check(&cases, true);
}

#[test]
fn estimate_bounds_the_error_against_independent_references() {
    let mut cases = Vec::new();
    // Independent P2 FEM reference (scikit-fem), computed: isosceles right triangle f·Re =
    // 13.1525616 (Shah & London 1978: 13.153), regular hexagon 15.0546357 (Shah & London
    // 1978: 15.054).
    let h = 50e-6;
    let tri = [[-h, 0.0], [0.0, -h], [h, 0.0]];
    let (a, p) = polygon_area_perimeter(&tri);
    cases.push(case(
        "isosceles right triangle (independent FEM)",
        &Shape::Polygon { points: pts(&tri) },
        k_from_fre(a, p, 13.152_561_6),
    ));
    let hex: Vec<[f64; 2]> = (0..6)
        .map(|k| {
            let t = PI / 3.0 * k as f64;
            [h * t.cos(), h * t.sin()]
        })
        .collect();
    let (a, p) = polygon_area_perimeter(&hex);
    cases.push(case(
        "regular hexagon (independent FEM)",
        &Shape::Polygon { points: pts(&hex) },
        k_from_fre(a, p, 15.054_635_7),
    ));
    // KOH trapezoids, independent P2 FEM reference (scikit-fem), computed; 1000 × 20 µm is a
    // 1:50 sliver.
    for (top, depth, fre) in [
        (100.0, 10.0, 20.330_862_8),
        (100.0, 25.0, 16.375_859_5),
        (100.0, 40.0, 14.179_806_6),
        (100.0, 50.0, 13.678_800_2),
        (120.0, 40.0, 14.935_470_4),
        (1000.0, 20.0, 23.193_407_9),
    ] {
        let (shape, a, p) = koh(top, depth);
        cases.push(case(
            &format!("KOH trapezoid {top} top, {depth} deep (indep. FEM)"),
            &shape,
            k_from_fre(a, p, fre),
        ));
    }
    // Same reference: trapezoid 100 top, 50 bottom, 50 deep f·Re 14.1930456.
    let tz = [
        [-25e-6, -50e-6],
        [25e-6, -50e-6],
        [50e-6, 0.0],
        [-50e-6, 0.0],
    ];
    let (a, p) = polygon_area_perimeter(&tz);
    cases.push(case(
        "trapezoid 100/50/50 (indep. FEM)",
        &Shape::Trapezoid {
            top: l(100e-6),
            bottom: l(50e-6),
            depth: l(50e-6),
        },
        k_from_fre(a, p, 14.193_045_6),
    ));
    // Same reference: D-shape (mask 50 µm, depth 30 µm) f·Re 17.8300823; rounded rectangle
    // 200 × 50 µm, corner radius 10 µm, f·Re 19.1082144.
    let (w, d) = (50e-6, 30e-6);
    cases.push(case(
        "D-shape 50/30 (indep. FEM)",
        &Shape::DShape {
            mask_width: l(w),
            depth: l(d),
        },
        k_from_fre(
            w * d + PI * d * d / 2.0,
            2.0 * w + 2.0 * d + PI * d,
            17.830_082_3,
        ),
    ));
    let (w, h, r) = (200e-6, 50e-6, 10e-6);
    cases.push(case(
        "rounded rectangle 200x50 r10 (indep. FEM)",
        &Shape::RoundedRectangle {
            width: l(w),
            height: l(h),
            corner_radius: l(r),
        },
        k_from_fre(
            w * h - (4.0 - PI) * r * r,
            2.0 * (w + h) - (8.0 - 2.0 * PI) * r,
            19.108_214_4,
        ),
    ));
    check(&cases, true);
}

#[test]
fn estimate_bounds_the_error_on_rough_and_re_entrant_outlines() {
    // No published value exists for these: the reference is a solve of our own that carries
    // the same refinement sequence further (up to 8× the nodes, at least one more level). The
    // levels are nested conforming spaces, so K grows with every level and stays below the
    // true K: the finer K less the default one is a lower bound on the default solve's true
    // error, and the estimate must lie above it.
    let mut cases = Vec::new();
    let l_shape = Shape::Polygon {
        points: pts(&[
            [0.0, 0.0],
            [100e-6, 0.0],
            [100e-6, 50e-6],
            [50e-6, 50e-6],
            [50e-6, 100e-6],
            [0.0, 100e-6],
        ]),
    };
    let undercut = Shape::Trapezoid {
        top: l(60e-6),
        bottom: l(100e-6),
        depth: l(30e-6),
    };
    let n = 64;
    let many: Vec<[f64; 2]> = (0..n)
        .map(|k| {
            let t = 2.0 * PI * k as f64 / n as f64;
            let rho = 50e-6 * (1.0 + 0.1 * (5.0 * t).cos());
            [rho * t.cos(), rho * t.sin()]
        })
        .collect();
    for (name, shape) in [
        ("rough profile ±1 µm (finer own solve)", rough_profile(1.0)),
        (
            "rough profile ±0.3 µm (finer own solve)",
            rough_profile(0.3),
        ),
        ("L-shape (finer own solve)", l_shape),
        ("undercut trapezoid (finer own solve)", undercut),
        (
            "64-gon star (finer own solve)",
            Shape::Polygon { points: pts(&many) },
        ),
    ] {
        let default = solve(&shape, &NumericOptions::default());
        let fine = solve(
            &shape,
            &NumericOptions {
                tolerance: 0.0,
                shear_tolerance: 0.0,
                max_nodes: 8 * default.field.nodes.len(),
            },
        );
        assert!(fine.refinements > default.refinements, "{name}");
        assert!(
            fine.conductance_factor >= default.conductance_factor,
            "{name}"
        );
        cases.push(case(name, &shape, fine.conductance_factor));
    }
    // Every one of them, the ±1 µm profile included (its bumps are re-entrant corners, which
    // the adaptive refinement resolves), converges within the default node budget.
    check(&cases, true);
}

#[test]
fn tolerance_not_reached_is_stated() {
    // A node budget too small for the request: the solution says it did not converge and
    // carries the estimate it reached (above the request), on the solution and the figures.
    let (shape, _, _) = koh(120.0, 40.0);
    let opts = NumericOptions {
        tolerance: 1e-9,
        shear_tolerance: 1e-3,
        max_nodes: 5_000,
    };
    let s = shape.solve_numeric(&opts).unwrap();
    assert!(!s.converged);
    assert!(s.field.nodes.len() <= 5_000);
    assert!(s.relative_error_estimate.is_finite() && s.relative_error_estimate > 1e-9);
    assert_eq!(s.requested_tolerance, 1e-9);
    let (f, _) = shape.figures_with(&opts).unwrap();
    assert!(!f.converged);
    assert_eq!(f.relative_error_estimate, s.relative_error_estimate);
    // With the default budget the default request is met.
    assert!(shape.figures().unwrap().converged);
    // One mesh only: no estimate at all, and so no convergence.
    let s = shape
        .solve_numeric(&NumericOptions {
            max_nodes: 100,
            ..NumericOptions::default()
        })
        .unwrap();
    assert!(!s.converged && s.relative_error_estimate.is_infinite());
}

#[test]
fn section_json_states_convergence_and_no_wall_time() {
    let run = |args: &[&str]| -> serde_json::Value {
        let out = assert_cmd::Command::cargo_bin("rillnet")
            .unwrap()
            .args(args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let trapezoid = "{shape: trapezoid, top: 120 um, depth: 40 um, sidewall: 54.74 deg}";
    let v = run(&["section", trapezoid, "--format", "json"]);
    assert_eq!(v["converged"], true);
    assert!(v.get("seconds").is_none());
    assert_eq!(v["max_wall_shear_singular"], false);
    // A request beyond the node budget: converged false with the estimate reached.
    let v = run(&[
        "section",
        trapezoid,
        "--tolerance",
        "1e-13",
        "--format",
        "json",
    ]);
    assert_eq!(v["converged"], false);
    assert!(v["relative_error_estimate"].as_f64().unwrap() > 1e-13);
    assert_eq!(v["requested_tolerance"].as_f64().unwrap(), 1e-13);
    let out = assert_cmd::Command::cargo_bin("rillnet")
        .unwrap()
        .args(["section", trapezoid, "--tolerance", "1e-13"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("NOT converged to the requested tolerance"),
        "{text}"
    );
    assert!(!text.contains(" ms"), "{text}");
}

#[test]
fn re_entrant_corner_is_flagged_and_left_out_of_the_maximum() {
    // L-shape, 100 µm arms 50 µm wide: one 270° corner at (50, 50) µm. The wall shear grows
    // as r^(−1/3) towards it (Strang & Fix 1973, ch. 8: λ = π/α = 2/3), so the pointwise
    // maximum is unbounded; the reported one lies on the edge of the excluded disc.
    let shape = Shape::Polygon {
        points: pts(&[
            [0.0, 0.0],
            [100e-6, 0.0],
            [100e-6, 50e-6],
            [50e-6, 50e-6],
            [50e-6, 100e-6],
            [0.0, 100e-6],
        ]),
    };
    let mut taus = Vec::new();
    for max_nodes in [30_000, 120_000] {
        let s = shape
            .solve_numeric(&NumericOptions {
                max_nodes,
                ..NumericOptions::default()
            })
            .unwrap();
        assert!(s.max_wall_shear_singular);
        assert_eq!(s.singular_corners.len(), 1);
        let c = s.singular_corners[0];
        assert!((c.at[0] - 50e-6).abs() < 1e-15 && (c.at[1] - 50e-6).abs() < 1e-15);
        assert!((c.interior_angle.to_degrees() - 270.0).abs() < 1e-9);
        // Excluded radius: 2 % of Dh = 4A/P = 75 µm.
        assert!((s.corner_exclusion_radius - 1.5e-6).abs() < 1e-9);
        let d = (s.max_shear_at[0] - 50e-6).hypot(s.max_shear_at[1] - 50e-6);
        assert!(d >= s.corner_exclusion_radius * (1.0 - 1e-9), "{d}");
        taus.push((s.max_wall_shear_per_gradient, s.shear_error_estimate));
        let f = shape
            .figures_with(&NumericOptions {
                max_nodes,
                ..NumericOptions::default()
            })
            .unwrap()
            .0;
        assert!(f.max_wall_shear_singular && f.singular_corner_count == 1);
        assert_eq!(f.singular_corner, Some(c.at));
    }
    // The off-corner maximum converges: it changes by less than 1e-3 between the two
    // solves (node budgets 30 000 and 120 000), within the estimate the finer one reports.
    let (t0, _) = taus[0];
    let (t1, e1) = taus[1];
    assert!(((t1 - t0) / t1).abs() < 1e-3, "{taus:?}");
    assert!(((t1 - t0) / t1).abs() <= e1, "{taus:?}");
    // A convex outline has no singular corner.
    let (koh, _, _) = koh(120.0, 40.0);
    assert!(
        !koh.solve_numeric(&NumericOptions::default())
            .unwrap()
            .max_wall_shear_singular
    );
}

#[test]
fn shear_estimate_bounds_the_maximum_wall_shear_error() {
    // (name, shape, true τ_max/G [m])
    let mut cases: Vec<(String, Shape, f64)> = Vec::new();
    // Rectangles, τ_max/(G·h) from the exact series (Shah & London 1978 series, computed).
    for (alpha, t) in [
        (1.0, 0.337_657_241_7),
        (0.5, 0.465_030_134_9),
        (0.25, 0.498_486_312_6),
    ] {
        let h = 50e-6;
        cases.push((
            format!("rectangle 1:{}", 1.0 / alpha),
            Shape::Rectangle {
                width: l(h / alpha),
                height: l(h),
            },
            t * h,
        ));
    }
    // Semicircle: τ_max/(G·r) = 4/(3π) at the middle of the flat wall (exact series, computed).
    let r = 50e-6;
    cases.push((
        "semicircle".into(),
        Shape::Semicircle {
            diameter: l(2.0 * r),
        },
        4.0 / (3.0 * PI) * r,
    ));
    // KOH trapezoids (54.74°), independent P2 FEM reference (scikit-fem), computed.
    for (top, depth, t) in [
        (100.0, 25.0, 12.354_891_6),
        (100.0, 40.0, 17.701_997_5),
        (120.0, 40.0, 18.910_817_8),
    ] {
        let (shape, _, _) = koh(top, depth);
        cases.push((format!("KOH {top}/{depth}"), shape, t * 1e-6));
    }
    let mut failures = Vec::new();
    for (name, shape, t) in &cases {
        let s = shape.solve_numeric(&NumericOptions::default()).unwrap();
        let err = ((s.max_wall_shear_per_gradient - t) / t).abs();
        eprintln!(
            "{name:<24} shear estimate {:>9.2e}  true {:>9.2e}  ratio {:>7.2}",
            s.shear_error_estimate,
            err,
            s.shear_error_estimate / err
        );
        if s.shear_error_estimate < err {
            failures.push(name.clone());
        }
    }
    assert!(failures.is_empty(), "{failures:?}");
}
