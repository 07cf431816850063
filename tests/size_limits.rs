//! Sizing within limits: wall-shear limits and the pressure rating held as constraints in the
//! sizing steps (copies written, read back and solved), `--ignore-limits` for the old
//! answer, and size bounds refused at read time when they would give an invalid shape.
//!
//! Physics of the hand derivations: resistances in series and in parallel combine like
//! electrical ones, R = R'·L for one section, and a channel's flow is its pressure drop over
//! its resistance (Bruus, *Theoretical Microfluidics*, 2008, ch. 4); the maximum wall shear of
//! fully developed flow is τ_max = s·Δp/L with s = τ_max/G of the section (force balance on
//! the fluid; Shah & London 1978 for the rectangle). The section figures R' and s are taken
//! from the library (the rectangle series is checked in `closed_forms.rs`).

mod common;

use common::{json_of, rillnet, write_file};
use serde_json::Value;
use std::path::Path;

/// A split 3:1 between two sized lanes behind a feed: sizing shortens lane a (and lengthens
/// b) unless lane a's shear limit (6.5 Pa; 5.81 Pa at the file's lengths) holds.
const SPLIT: &str = "\
name: split with a shear limit
fluid: {model: water, temperature: 20 degC}
sections:
  lane: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  source: {pressure: 50 mbar}
  inlet: {}
  waste: {pressure: 0 Pa}
channels:
  feed: {from: source, to: inlet, section: lane, length: 5 mm}
  a: {from: inlet, to: waste, section: lane, length: 10 mm, shear_limit: 6.5 Pa, size: {length: {min: 1 mm, max: 100 mm}}}
  b: {from: inlet, to: waste, section: lane, length: 10 mm, size: {length: {min: 1 mm, max: 100 mm}}}
targets:
  - {split: [a, b], ratio: [3, 1]}
";

/// A syringe pump through one sized channel, asked for 500 mbar at the pump against a
/// 300 mbar pressure rating.
const RATING: &str = "\
name: pump against a pressure rating
fluid: {model: water, temperature: 20 degC}
pressure_rating: 300 mbar
sections:
  lane: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  pump: {flow: 5 uL/min}
  waste: {pressure: 0 Pa}
channels:
  a: {from: pump, to: waste, section: lane, length: 10 mm, size: {length: {min: 1 mm, max: 500 mm}}}
targets:
  - {node: pump, pressure: 500 mbar}
";

/// `rillnet size --format json [extra] --output OUT CHIP`: (exit code, JSON).
fn size(chip: &Path, out: &Path, extra: &[&str]) -> (Option<i32>, Value) {
    let o = rillnet()
        .args(["size", "--format", "json"])
        .args(extra)
        .arg("--output")
        .arg(out)
        .arg(chip)
        .output()
        .unwrap();
    let v = serde_json::from_slice(&o.stdout).unwrap_or_else(|e| {
        panic!("{e}: {}", String::from_utf8_lossy(&o.stderr));
    });
    (o.status.code(), v)
}

fn check_code(chip: &Path) -> Option<i32> {
    rillnet()
        .arg("check")
        .arg(chip)
        .output()
        .unwrap()
        .status
        .code()
}

fn row<'a>(report: &'a Value, list: &str, name: &str) -> &'a Value {
    report[list]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap()
}

fn sized(v: &Value, channel: &str) -> f64 {
    v["sizes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["channel"] == channel)
        .unwrap()["after_m"]
        .as_f64()
        .unwrap()
}

fn names(v: &Value, key: &str) -> Vec<String> {
    v[key]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_shear_limit_holds_and_the_split_is_still_met() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", SPLIT);
    let net = rillnet::load_chip(&chip).unwrap().network;
    let a = net.channel_id("a").unwrap();
    let s = net.section_of(a).figures.max_wall_shear_per_gradient;
    // On the limit τ̄ = s·p_in/L_a, lane a carries q_a = p_in/(R'·L_a) = τ̄/(s·R'), lane b a
    // third of it, so the feed drops R'·L_f·(4/3)·q_a = (4/3)·L_f·τ̄/s and
    // L_a = s·(P − (4/3)·L_f·τ̄/s)/τ̄ = s·P/τ̄ − (4/3)·L_f; L_b = 3·L_a (equal sections).
    let (tau, p, lf) = (6.5, 5000.0, 5e-3);
    let la = s * p / tau - 4.0 / 3.0 * lf;
    assert!(la > 10e-3 && la < 100e-3, "{la}");
    let out = dir.path().join("sized.yaml");
    let (code, v) = size(&chip, &out, &[]);
    assert_eq!(code, Some(0), "{v}");
    assert_eq!(v["limits"], "constrained");
    assert_eq!(names(&v, "active_limits"), ["a"]);
    assert_eq!(v["active_limit_details"][0]["kind"], "wall_shear");
    assert!(names(&v, "limits_exceeded").is_empty());
    assert!((sized(&v, "a") - la).abs() <= 1e-6 * la, "{v}");
    assert!((sized(&v, "b") - 3.0 * la).abs() <= 1e-6 * la, "{v}");
    // The copy, read back and solved: on the limit, not over it; the split met.
    let solved = json_of(&out);
    let tau_a = row(&solved, "channels", "a")["wall_shear_max_pa"]
        .as_f64()
        .unwrap();
    assert!(tau_a <= tau * (1.0 + 1e-9), "{tau_a}");
    // The copy carries the lengths to `written_digits` significant digits.
    let digits = v["written_digits"].as_i64().unwrap() as i32;
    let rounding = 0.5 * 10f64.powi(1 - digits);
    assert!(tau_a >= tau * (1.0 - 1e-6 - 2.0 * rounding), "{tau_a}");
    let qa = common::channel_flow(&solved, "a");
    let qb = common::channel_flow(&solved, "b");
    assert!((qa / (qa + qb) - 0.75).abs() <= 1e-6 * 0.75, "{qa} {qb}");
    assert_eq!(check_code(&out), Some(0));
}

#[test]
fn ignoring_limits_gives_the_unconstrained_answer_and_fails() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", SPLIT);
    let out = dir.path().join("sized.yaml");
    let (code, v) = size(&chip, &out, &["--ignore-limits"]);
    assert_eq!(code, Some(1), "{v}");
    assert_eq!(v["limits"], "ignored");
    assert!(names(&v, "active_limits").is_empty());
    assert_eq!(names(&v, "limits_exceeded"), ["a"]);
    assert_eq!(v["all_targets_met"], true);
    // The split alone fixes L_b/L_a = 3; sizing then shortens lane a, past its limit.
    let (la, lb) = (sized(&v, "a"), sized(&v, "b"));
    assert!((lb / la - 3.0).abs() <= 1e-5, "{la} {lb}");
    assert!(la < 10e-3, "{la}");
    let solved = json_of(&out);
    let tau_a = row(&solved, "channels", "a")["wall_shear_max_pa"]
        .as_f64()
        .unwrap();
    assert!(tau_a > 6.5, "{tau_a}");
    assert_eq!(check_code(&out), Some(1));
}

#[test]
fn a_pressure_rating_holds_and_the_target_is_reported_missed() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", RATING);
    let net = rillnet::load_chip(&chip).unwrap().network;
    let a = net.channel_id("a").unwrap();
    let r_per_length = net.resistance(a) / 10e-3;
    let q = 5e-9 / 60.0;
    // p_pump = Q·R'·L: the rating allows at most L = rating/(Q·R').
    let l_max = 300e2 / (q * r_per_length);
    let out = dir.path().join("sized.yaml");
    let (code, v) = size(&chip, &out, &[]);
    // The wanted 500 mbar is beyond the rating: not met, exit 1, the rating active.
    assert_eq!(code, Some(1), "{v}");
    assert_eq!(v["all_targets_met"], false);
    assert_eq!(names(&v, "active_limits"), ["pump"]);
    assert_eq!(v["active_limit_details"][0]["kind"], "pressure_rating");
    assert!((sized(&v, "a") - l_max).abs() <= 1e-6 * l_max, "{v}");
    let solved = json_of(&out);
    let p = row(&solved, "ports", "pump")["pressure_pa"]
        .as_f64()
        .unwrap();
    assert!(p <= 300e2 * (1.0 + 1e-9), "{p}");
    // The copy carries the length to `written_digits` significant digits (p ∝ L).
    let digits = v["written_digits"].as_i64().unwrap() as i32;
    let rounding = 0.5 * 10f64.powi(1 - digits);
    assert!(p >= 300e2 * (1.0 - 1e-6 - rounding), "{p}");
    assert_eq!(check_code(&out), Some(0));
    // Without limits the target is met and the copy is over its rating.
    let out2 = dir.path().join("ignored.yaml");
    let (code, v) = size(&chip, &out2, &["--ignore-limits"]);
    assert_eq!(code, Some(1), "{v}");
    assert_eq!(v["all_targets_met"], true);
    assert_eq!(names(&v, "limits_exceeded"), ["pump"]);
    assert_eq!(check_code(&out2), Some(1));
}

/// A chip with one channel of `section` whose width is sized within `min`..`max`; the
/// `min` key is on line 13, `max` on line 14.
fn width_chip(section: &str, min: &str, max: &str) -> String {
    format!(
        "name: width bounds
fluid: {{model: water, temperature: 20 degC}}
nodes:
  source: {{pressure: 50 mbar}}
  waste: {{pressure: 0 Pa}}
channels:
  a:
    from: source
    to: waste
    length: 10 mm
    section: {section}
    size:
      width: {{min: {min},
               max: {max}}}
targets:
  - {{channel: a, flow: 5 uL/min}}
"
    )
}

/// `rillnet check CHIP`: (exit code, standard error).
fn refused(text: &str) -> (Option<i32>, String) {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", text);
    let o = rillnet().arg("check").arg(&chip).output().unwrap();
    (
        o.status.code(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn a_trapezoid_width_bound_below_its_sidewall_offset_is_refused_at_read_time() {
    // top 200 um, bottom 130 um: the sidewall offset is 70 um, so a 60 um top would leave a
    // negative bottom (sizing keeps the sidewall angle).
    let trap = "{shape: trapezoid, top: 200 um, bottom: 130 um, depth: 50 um}";
    let (code, err) = refused(&width_chip(trap, "60 um", "300 um"));
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("chip.yaml:13:"), "{err}");
    assert!(err.contains("channels.a.size.width.min"), "{err}");
    assert!(err.contains("bottom"), "{err}");
    assert!(err.contains("70.00 um"), "{err}");
    // A valid bound is accepted.
    let (code, err) = refused(&width_chip(trap, "150 um", "300 um"));
    assert_ne!(code, Some(2), "{err}");
}

#[test]
fn a_rounded_rectangle_width_bound_below_twice_its_corner_radius_is_refused() {
    let rr = "{shape: rounded-rectangle, width: 100 um, height: 50 um, corner_radius: 20 um}";
    let (code, err) = refused(&width_chip(rr, "30 um", "200 um"));
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("chip.yaml:13:"), "{err}");
    assert!(err.contains("channels.a.size.width.min"), "{err}");
    assert!(err.contains("corner_radius"), "{err}");
    assert!(err.contains("40.00 um"), "{err}");
    let (code, err) = refused(&width_chip(rr, "40 um", "200 um"));
    assert_ne!(code, Some(2), "{err}");
}

#[test]
fn a_d_shape_mask_width_bound_of_zero_is_refused() {
    let d = "{shape: d-shape, mask_width: 50 um, depth: 30 um}";
    let (code, err) = refused(&width_chip(d, "0 um", "200 um"));
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("channels.a.size.width"), "{err}");
    assert!(err.contains("0 < min"), "{err}");
}
