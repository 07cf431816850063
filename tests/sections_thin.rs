//! The thin-film (lubrication) limit for outlines too thin to mesh: its figures and its
//! error estimate against the rectangle's exact series (Shah & London 1978), against
//! converged finite-element solves of the same outlines where both exist, and end to end.

mod common;

use common::rillnet;
use rillnet::section::numeric::NumericOptions;
use rillnet::section::thin::{thin_figures, THIN_ASPECT};
use rillnet::section::{SectionModel, Shape};
use rillnet::units::Length;

fn l(x: f64) -> Length {
    Length::from_si(x)
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn polygon(points: &[[f64; 2]]) -> Shape {
    Shape::Polygon {
        points: points.iter().map(|p| [l(p[0]), l(p[1])]).collect(),
    }
}

fn slit(w: f64, t: f64) -> Shape {
    polygon(&[[0.0, 0.0], [w, 0.0], [w, t], [0.0, t]])
}

#[test]
fn thin_rectangles_match_the_exact_series_within_their_estimate() {
    // Exact: the rectangle series (Shah & London 1978), whose leading end correction is
    // −0.630·t/w; the thin-film limit leaves it out and states t/w.
    let w = 1e-3;
    for ratio in [1e-3, 1e-4, 1e-5, 1e-6, 1e-8] {
        let t = ratio * w;
        let exact = Shape::Rectangle {
            width: l(w),
            height: l(t),
        }
        .figures()
        .unwrap();
        let thin = thin_figures(&slit(w, t).outline()).expect("thin");
        let err = rel(thin.conductance_factor, exact.conductance_factor);
        assert!(err <= thin.relative_error_estimate, "{ratio}: {err:e}");
        assert!(
            err > 0.5 * ratio,
            "{ratio}: {err:e} (the end correction is 0.63·t/w)"
        );
        // Plane Poiseuille flow between the plates: τ/G = t/2 (Bruus 2008, ch. 3).
        let shear = rel(
            thin.max_wall_shear_per_gradient,
            exact.max_wall_shear_per_gradient,
        );
        assert!(shear <= thin.shear_error_estimate, "{ratio}: {shear:e}");
        assert!(rel(thin.area, w * t) < 1e-12 && rel(thin.perimeter, 2.0 * (w + t)) < 1e-12);
        assert_eq!(thin.model, SectionModel::ThinFilm);
    }
}

#[test]
fn thin_film_agrees_with_converged_finite_elements_where_both_exist() {
    // At t/w = 1e-3 both methods run: the finite-element solution (its own estimate) and
    // the thin-film limit (t/w) must agree within the sum of their estimates.
    let (w, t) = (1e-3, 1e-6);
    let shapes = [
        slit(w, t),
        Shape::Trapezoid {
            top: l(w),
            bottom: l(w - 2.0 * t / 54.74f64.to_radians().tan()),
            depth: l(t),
        },
        Shape::DShape {
            mask_width: l(w - 2.0 * t),
            depth: l(t),
        },
    ];
    for shape in shapes {
        let thin = thin_figures(&shape.outline()).expect("thin");
        let fem = shape.solve_numeric(&NumericOptions::default()).unwrap();
        let diff = rel(thin.conductance_factor, fem.conductance_factor);
        assert!(
            diff <= thin.relative_error_estimate + fem.relative_error_estimate,
            "{}: {diff:e} vs {:e} + {:e}",
            shape.kind(),
            thin.relative_error_estimate,
            fem.relative_error_estimate
        );
    }
}

#[test]
fn only_thin_outlines_without_overhangs_are_taken() {
    // Not thin enough.
    assert!(thin_figures(&slit(1e-3, 2.0 * THIN_ASPECT * 1e-3).outline()).is_none());
    // A C-shape (a slot cut in from the right): a vertical line through the slot crosses the
    // outline four times.
    let (w, t) = (1e-3, 1e-8);
    let comb = polygon(&[
        [0.0, 0.0],
        [w, 0.0],
        [w, t],
        [0.5 * w, t],
        [0.5 * w, 2.0 * t],
        [w, 2.0 * t],
        [w, 3.0 * t],
        [0.0, 3.0 * t],
    ]);
    assert!(thin_figures(&comb.outline()).is_none());
}

#[test]
fn a_step_in_depth_is_two_slits_side_by_side() {
    // Two depths, t and 2t, each over half the width: K = (w/2)(t³ + 8t³)/12 (plane
    // Poiseuille per slice), the jump at the step kept.
    let (w, t) = (1e-3, 1e-9);
    let step = polygon(&[
        [0.0, 0.0],
        [w, 0.0],
        [w, t],
        [0.5 * w, t],
        [0.5 * w, 2.0 * t],
        [0.0, 2.0 * t],
    ]);
    let thin = thin_figures(&step.outline()).expect("thin");
    let want = 0.5 * w * 9.0 * t.powi(3) / 12.0;
    assert!(rel(thin.conductance_factor, want) < 1e-12);
}

#[test]
fn the_section_command_solves_a_nanometre_slit_by_the_thin_film_limit() {
    // 1 mm × 1 nm: far too thin to mesh; answered at once with its estimate, exit 0.
    let out = rillnet()
        .args([
            "section",
            "--format",
            "json",
            "{shape: d-shape, mask_width: 1 mm, depth: 1 nm}",
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["method"], "thin-film limit (lubrication)");
    let est = v["relative_error_estimate"].as_f64().unwrap();
    assert!(est > 0.0 && est <= 1.1e-6, "{est}");
    // f·Re → 24, the parallel-plates value (Bruus 2008, ch. 3).
    assert!((v["fre_fanning"].as_f64().unwrap() - 24.0).abs() < 1e-4);
}
