//! Sizing a measured profile's width by a lateral scale factor (`width_scale`: positions
//! multiplied, depths kept).
//!
//! Reference values: a central difference of two converged solves computed here at a step
//! other than the one the library chooses, and the split read back from the sized copy by
//! `rillnet solve` (flows of parallel channels between the same two nodes; Bruus,
//! *Theoretical Microfluidics*, 2008, ch. 4).

mod common;

use common::{channel_flow, converged_ln_k as ln_k, json_of, rillnet, write_file};
use rillnet::analysis::design::{dimension, dlog_resistance_numeric, with_dimension};
use rillnet::section::Shape;
use rillnet::units::Length;

/// A profilometer scan (µm): 100 µm across, 40 µm deep, rounded floor.
const SCAN: &str = "position,depth\n0,0\n10,20\n30,35\n50,40\n70,35\n90,20\n100,0\n";

fn scan_shape() -> Shape {
    let pts = [
        (0.0, 0.0),
        (10.0, 20.0),
        (30.0, 35.0),
        (50.0, 40.0),
        (70.0, 35.0),
        (90.0, 20.0),
        (100.0, 0.0),
    ];
    Shape::Profile {
        points: pts
            .iter()
            .map(|(x, d)| [Length::from_si(x * 1e-6), Length::from_si(d * 1e-6)])
            .collect(),
    }
}

#[test]
fn the_span_of_a_profile_scales_its_positions_and_keeps_its_depths() {
    let s = scan_shape();
    assert!((dimension(&s, "width").unwrap() - 100e-6).abs() < 1e-18);
    let Some(Shape::Profile { points }) = with_dimension(&s, "width", 150e-6) else {
        panic!("a profile has a width to size");
    };
    let Shape::Profile { points: orig } = &s else {
        unreachable!()
    };
    for (p, o) in points.iter().zip(orig) {
        assert!((p[0].si() - 1.5 * o[0].si()).abs() <= 1e-18, "{p:?} {o:?}");
        assert_eq!(p[1], o[1]);
    }
}

/// The library's d ln R'/dw of the profile against a central difference of converged solves
/// at 1.5 times its step, within what the estimates predict (the library's bound, the noise
/// of the solves here, and the truncation of a plain difference at 1.5h: 2.25 times the one
/// measured at h, with 20 % for higher-order terms).
#[test]
fn the_width_derivative_of_a_profile_matches_converged_solves() {
    let shape = scan_shape();
    let d = dlog_resistance_numeric(&shape, "width", 1e-4)
        .expect("solvable")
        .expect("a numerical section with a width");
    assert!(d.value.is_finite() && d.value < 0.0, "{d:?}");
    let w = dimension(&shape, "width").unwrap();
    let ht = 1.5 * d.step;
    let at = |x: f64| with_dimension(&shape, "width", x).unwrap();
    let (kp, ep) = ln_k(&at(w + ht), d.tolerance);
    let (km, em) = ln_k(&at(w - ht), d.tolerance);
    let reference = -(kp - km) / (2.0 * ht);
    let allowance = d.error_estimate + (ep + em) / (2.0 * ht) + 1.2 * 2.25 * d.truncation;
    let miss = (d.value - reference).abs();
    eprintln!(
        "profile: d ln R'/dw = {:.6e} /m, plain difference here {:.6e} /m, relative difference \
         {:.2e}, allowance {:.2e}",
        d.value,
        reference,
        miss / reference.abs(),
        allowance / reference.abs()
    );
    assert!(miss <= allowance, "{miss} > {allowance}: {d:?}");
    // And the estimate is a useful one (well under 1 %).
    assert!(
        allowance <= 1e-2 * reference.abs(),
        "{allowance} {reference}"
    );
}

const CHIP: &str = "\
name: profile split
fluid: {model: water, temperature: 20 degC}
sections:
  lane: {shape: rectangle, width: 100 um, height: 40 um}
nodes:
  source: {pressure: 50 mbar}
  inlet: {}
  waste: {pressure: 0 Pa}
channels:
  feed: {from: source, to: inlet, section: lane, length: 5 mm}
  a:
    from: inlet
    to: waste
    length: 10 mm
    section: {shape: profile, file: scan.csv, unit: um, width_scale: 1}
    size: {width: {min: 60 um, max: 200 um}}
  b: {from: inlet, to: waste, section: lane, length: 10 mm}
targets:
  - {split: [a, b], ratio: [1, 1]}
";

#[test]
fn a_sized_profile_is_written_as_its_scale_factor_and_meets_the_split_when_read_back() {
    let dir = tempfile::tempdir().unwrap();
    write_file(dir.path(), "scan.csv", SCAN);
    let chip = write_file(dir.path(), "chip.yaml", CHIP);
    let out = dir.path().join("sized.yaml");
    let o = rillnet()
        .args(["size", "--format", "json", "--output"])
        .arg(&out)
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let after = v["sizes"][0]["after_m"].as_f64().unwrap();
    assert!(after > 100e-6 && after < 200e-6, "{after}");
    // The copy carries the new factor (the scan is 100 um across), to the written digits.
    let text = std::fs::read_to_string(&out).unwrap();
    let line = text.lines().find(|l| l.contains("width_scale")).unwrap();
    let written: f64 = line
        .split("width_scale:")
        .nth(1)
        .unwrap()
        .trim()
        .trim_end_matches('}')
        .trim()
        .trim_matches('"')
        .parse()
        .unwrap();
    let digits = v["written_digits"].as_i64().unwrap() as i32;
    let rounding = 0.5 * 10f64.powi(1 - digits);
    assert!(
        (written - after / 100e-6).abs() <= rounding * written,
        "{written} vs {}",
        after / 100e-6
    );
    // Read back and solved: the lanes share the flow 1:1 within the default 1e-6.
    let solved = json_of(&out);
    let (qa, qb) = (channel_flow(&solved, "a"), channel_flow(&solved, "b"));
    assert!((qa / (qa + qb) - 0.5).abs() <= 1e-6 * 0.5, "{qa} {qb}");
}

#[test]
fn width_scale_must_be_positive_and_only_on_profiles() {
    let dir = tempfile::tempdir().unwrap();
    write_file(dir.path(), "scan.csv", SCAN);
    let bad = CHIP.replace("width_scale: 1", "width_scale: -2");
    let chip = write_file(dir.path(), "neg.yaml", &bad);
    let o = rillnet().arg("check").arg(&chip).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("width_scale"), "{err}");
    assert!(err.contains("positive"), "{err}");
    let bad = CHIP.replace(
        "lane: {shape: rectangle, width: 100 um, height: 40 um}",
        "lane: {shape: rectangle, width: 100 um, height: 40 um, width_scale: 2}",
    );
    let chip = write_file(dir.path(), "rect.yaml", &bad);
    let o = rillnet().arg("check").arg(&chip).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("does not take 'width_scale'"), "{err}");
}

#[test]
fn a_sized_profile_without_a_width_scale_key_is_refused_before_sizing() {
    // The copy changes the `width_scale:` key; without one there is nothing to rewrite, and
    // that is said at once (exit 2), not after the sizing has run.
    let dir = tempfile::tempdir().unwrap();
    write_file(dir.path(), "scan.csv", SCAN);
    let chip = write_file(
        dir.path(),
        "chip.yaml",
        &CHIP.replace(", width_scale: 1}", "}"),
    );
    let o = rillnet().arg("size").arg(&chip).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("width_scale"), "{err}");
    assert!(o.stdout.is_empty());
}
