//! Ramps and schedules end to end: a chip and its schedule file written to a folder, run
//! through `rillnet evolve --format json`, and the flows compared with the closed-form
//! response of the first-order circuit.
//!
//! Resistances: Hagen–Poiseuille R = 8μL/(πa⁴) (Bruus, *Theoretical Microfluidics* 2008,
//! ch. 4); a compliance C at a junction (Bruus 2008, ch. 4, hydraulic compliance).

mod common;

use std::f64::consts::PI;
use std::path::Path;

const MU: f64 = 1e-3;

/// Hagen–Poiseuille resistance of a 100 µm tube of length `l` [m] (Bruus 2008).
fn hp(l: f64) -> f64 {
    8.0 * MU * l / (PI * 5e-5_f64.powi(4))
}

fn tube(name: &str, from: &str, to: &str, mm: f64) -> String {
    format!(
        "  {name}: {{from: {from}, to: {to}, section: {{shape: circle, diameter: 100 um}}, \
         length: {mm} mm}}\n"
    )
}

/// Closed form derived here: a first-order system τ·ẏ = k·u(t) − y, at rest under u = u₀
/// before the first corner, driven by the piecewise-linear u through `points` (held after
/// the last). Superposition of ramps: a slope change Δs at tᵢ adds k·Δs·r(t − tᵢ) with
/// r(s) = s − τ(1 − e^(−s/τ)) for s > 0 (the ramp response of the first-order lag).
fn response(points: &[(f64, f64)], tau: f64, k: f64, t: f64) -> f64 {
    let r = |s: f64| {
        if s <= 0.0 {
            0.0
        } else {
            s - tau * (-(s / tau)).exp_m1().abs()
        }
    };
    let mut y = k * points[0].1;
    let mut slope = 0.0;
    for (i, &(ti, _)) in points.iter().enumerate() {
        let next = points
            .get(i + 1)
            .map_or(0.0, |&(tn, vn)| (vn - points[i].1) / (tn - ti));
        y += k * (next - slope) * r(t - ti);
        slope = next;
    }
    y
}

fn evolve_json(dir: &Path, chip: &str, span: &str, every: &str) -> serde_json::Value {
    let path = dir.join("chip.yaml");
    std::fs::write(&path, chip).unwrap();
    common::run_json([
        "evolve".as_ref(),
        path.as_os_str(),
        "--for".as_ref(),
        span.as_ref(),
        "--every".as_ref(),
        every.as_ref(),
        "--format".as_ref(),
        "json".as_ref(),
    ])
}

fn series(doc: &serde_json::Value, channel: &str) -> Vec<f64> {
    let ch = doc["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == channel)
        .unwrap();
    ch["flow_m3_per_s"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect()
}

fn times(doc: &serde_json::Value) -> Vec<f64> {
    doc["times_s"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect()
}

#[test]
fn a_ramped_pressure_charges_a_soft_chamber_like_a_first_order_lag() {
    // feed (ramped 20 → 220 Pa from 2 s over 10 s) —R₁— j (C) —R₂— out (0 Pa):
    // C·dP/dt = (u − P)/R₁ − P/R₂ ⇒ τ = C·R₁R₂/(R₁ + R₂), k = R₂/(R₁ + R₂).
    let dir = tempfile::tempdir().unwrap();
    let chip = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         feed: {{pressure: 20 Pa, ramp: {{to: 220 Pa, start: 2 s, over: 10 s}}}}\n  \
         j: {{compliance: 100 uL/bar}}\n  out: {{pressure: 0 Pa}}\nchannels:\n{}{}",
        tube("c1", "feed", "j", 20.0),
        tube("c2", "j", "out", 30.0)
    );
    let doc = evolve_json(dir.path(), &chip, "40 s", "0.25 s");
    let (r1, r2) = (hp(0.020), hp(0.030));
    let c = 100e-9 / 1e5;
    let tau = c * r1 * r2 / (r1 + r2);
    let k = r2 / (r1 + r2);
    let ramp = [(2.0, 20.0), (12.0, 220.0)];
    let q2 = series(&doc, "c2");
    let q1 = series(&doc, "c1");
    let scale = 220.0 / (r1 + r2);
    let ts = times(&doc);
    assert_eq!(ts.len(), 161);
    for (i, t) in ts.iter().enumerate() {
        let p = response(&ramp, tau, k, *t);
        let u = ramp[0].1 + (ramp[1].1 - ramp[0].1) * ((t - 2.0) / 10.0).clamp(0.0, 1.0);
        assert!(
            (q2[i] - p / r2).abs() <= 1e-6 * scale,
            "t = {t}: {} against {}",
            q2[i],
            p / r2
        );
        assert!((q1[i] - (u - p) / r1).abs() <= 1e-6 * scale, "t = {t}");
    }
    // The lag behind the ramp is visible (τ ≈ 5 s against a 10 s ramp), so the test could fail.
    let mid = ts.iter().position(|&t| t == 7.0).unwrap();
    assert!((q2[mid] - k * 120.0 / r2).abs() > 0.1 * k * 120.0 / r2);
}

#[test]
fn a_scheduled_pressure_with_units_in_the_header() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("program.csv"),
        "# a pressure program\ntime [s], pressure [mbar]\n0, 0\n3, 1.5\n8, 1.5\n12, 0.5\n",
    )
    .unwrap();
    let chip = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         feed: {{pressure: 0 Pa, schedule: program.csv}}\n  j: {{compliance: 50 uL/bar}}\n  \
         out: {{pressure: 0 Pa}}\nchannels:\n{}{}",
        tube("c1", "feed", "j", 20.0),
        tube("c2", "j", "out", 20.0)
    );
    let doc = evolve_json(dir.path(), &chip, "30 s", "0.5 s");
    let r = hp(0.020);
    let tau = 50e-9 / 1e5 * r / 2.0;
    let program = [(0.0, 0.0), (3.0, 150.0), (8.0, 150.0), (12.0, 50.0)];
    let q = series(&doc, "c2");
    let scale = 150.0 / (2.0 * r);
    for (i, t) in times(&doc).iter().enumerate() {
        let exact = response(&program, tau, 0.5, *t) / r;
        assert!(
            (q[i] - exact).abs() <= 1e-6 * scale,
            "t = {t}: {} against {exact}",
            q[i]
        );
    }
    // Settling is measured from the schedule's last corner (12 s).
    let settled: Vec<f64> = doc["events"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["kind"] == "settled_90" && e["subject"] == "c2")
        .map(|e| e["time_s"].as_f64().unwrap())
        .collect();
    assert_eq!(settled.len(), 1);
    assert!(settled[0] > 12.0, "{settled:?}");
}

#[test]
fn a_scheduled_pump_with_units_on_each_value() {
    // pump (flow q(t)) → j (C) —R— out: the pump node carries no storage, so C·dP/dt = q − P/R
    // ⇒ the outlet flow is q filtered with τ = R·C, k = 1 (closed form derived here).
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("pump.csv"),
        "time; flow\n0 s; 0 uL/min\n0.1 min; 6 uL/min\n20 s; 6 uL/min\n25 s; 0 ul/min\n",
    )
    .unwrap();
    let chip = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         pump: {{flow: 0 uL/min, schedule: pump.csv}}\n  j: {{compliance: 200 uL/bar}}\n  \
         out: {{pressure: 0 Pa}}\nchannels:\n{}{}",
        tube("c1", "pump", "j", 5.0),
        tube("c2", "j", "out", 20.0)
    );
    let doc = evolve_json(dir.path(), &chip, "40 s", "0.5 s");
    let r = hp(0.020);
    let tau = 200e-9 / 1e5 * r;
    let q6 = 6e-9 / 60.0;
    let program = [(0.0, 0.0), (6.0, q6), (20.0, q6), (25.0, 0.0)];
    let q = series(&doc, "c2");
    let fed = series(&doc, "c1");
    for (i, t) in times(&doc).iter().enumerate() {
        let exact = response(&program, tau, 1.0, *t);
        assert!((q[i] - exact).abs() <= 1e-6 * q6, "t = {t}");
        // The pump delivers its program exactly.
        assert!((fed[i] - response(&program, 0.0, 1.0, *t)).abs() <= 1e-9 * q6);
    }
    // Volume delivered by the pump: the area under the program, 6 uL/min over
    // (6/2 + 14 + 5/2) s = 19.5 s → 1.95 uL (trapezoid rule exact on the corners, which are
    // output instants).
    let pump = doc["delivered"]
        .as_array()
        .unwrap()
        .iter()
        .find(|d| d["name"] == "pump")
        .unwrap();
    let v = pump["volume_m3"].as_f64().unwrap();
    assert!((v - q6 * 19.5).abs() <= 1e-9 * q6 * 19.5, "{v}");
}

/// Run evolve on a chip naming `schedule.csv` with `csv` as its text; the error output.
fn refused(csv: Option<&str>) -> String {
    let dir = tempfile::tempdir().unwrap();
    if let Some(text) = csv {
        std::fs::write(dir.path().join("schedule.csv"), text).unwrap();
    }
    let chip = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         feed: {{pressure: 0 Pa, schedule: schedule.csv}}\n  out: {{pressure: 0 Pa}}\n\
         channels:\n{}",
        tube("c1", "feed", "out", 20.0)
    );
    let path = dir.path().join("chip.yaml");
    std::fs::write(&path, chip).unwrap();
    let out = common::rillnet()
        .args([
            "evolve".as_ref(),
            path.as_os_str(),
            "--for".as_ref(),
            "1 min".as_ref(),
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr).to_string();
    // The chip file's place of the key, then the schedule file and its line.
    assert!(err.contains("chip.yaml:3:"), "{err}");
    assert!(err.contains("nodes.feed.schedule"), "{err}");
    assert!(err.contains("schedule.csv"), "{err}");
    err
}

#[test]
fn bad_schedules_are_refused_with_file_and_line() {
    let e = refused(Some(
        "time [s], pressure [Pa]\n0, 0\n10, 5\n# pause\n5, 3\n",
    ));
    assert!(e.contains("line 5") && e.contains("increase"), "{e}");
    let e = refused(Some("time [s], pressure [Pa]\n0, 0\n10, five\n"));
    assert!(e.contains("line 3") && e.contains("five"), "{e}");
    let e = refused(Some("time, pressure\n0, 0\n10, 5\n"));
    assert!(e.contains("line 3") && e.contains("no unit"), "{e}");
    let e = refused(Some("time [s], pressure [um]\n0, 0\n"));
    assert!(e.contains("line 1") && e.contains("header"), "{e}");
    let e = refused(Some("time [s], pressure [Pa]\n0, 0, 1\n"));
    assert!(e.contains("line 2") && e.contains("two values"), "{e}");
    let e = refused(None);
    assert!(e.contains("cannot read schedule"), "{e}");
}

#[test]
fn bad_ramps_are_refused_with_their_place() {
    let cases = [
        (
            "{pressure: 0 Pa, ramp: {to: 5 uL/min, over: 1 s}}",
            "ramp.to",
        ),
        ("{pressure: 0 Pa, ramp: {to: 5 Pa, over: 0 s}}", "over"),
        (
            "{pressure: 0 Pa, on_at: 1 s, ramp: {to: 5 Pa, over: 1 s}}",
            "at most one",
        ),
        ("{ramp: {to: 5 Pa, over: 1 s}}", "only a port"),
        (
            "{reservoir: {level: 1 mm, area: 1 mm^2}, ramp: {to: 5 Pa, over: 1 s}}",
            "well's level",
        ),
    ];
    for (node, expect) in cases {
        let chip = format!(
            "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  feed: {node}\n  \
             out: {{pressure: 0 Pa}}\nchannels:\n{}",
            tube("c1", "feed", "out", 20.0)
        );
        let out = common::rillnet()
            .args(["evolve", "-", "--for", "1 min"])
            .write_stdin(chip)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{node}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(expect) && err.contains(":3:"), "{node}: {err}");
    }
}
