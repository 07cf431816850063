//! Wells whose volume follows a level–volume table (`reservoir: {level, table: [...]}`).
//!
//! Resistance: Hagen–Poiseuille R = 8μL/(πa⁴) (Bruus, *Theoretical Microfluidics* 2008,
//! ch. 4). A well of cross-section A(h) draining through R to an outlet at the level of its
//! bottom obeys A(h)·dh/dt = −ρ·g·h/R (hydrostatics and the resistance; closed forms below
//! derived here).

mod common;

use common::{rillnet, write_file};
use rillnet::analysis::transient::{evolve, Drives, Run};
use rillnet::format::{parse_chip, Syntax};
use rillnet::network::STANDARD_GRAVITY;
use std::f64::consts::PI;

const RHO: f64 = 1000.0;
const MU: f64 = 1e-3;
/// 10 mm of 100 µm tube.
const LENGTH: f64 = 0.010;

/// Hagen–Poiseuille resistance of the 100 µm tube (Bruus 2008).
fn resistance() -> f64 {
    8.0 * MU * LENGTH / (PI * 5e-5_f64.powi(4))
}

/// A well at the datum draining through the tube to an outlet at 0 Pa on the datum.
fn chip_text(reservoir: &str) -> String {
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         well: {{reservoir: {reservoir}}}\n  out: {{pressure: 0 Pa}}\nchannels:\n  \
         drain: {{from: well, to: out, section: {{shape: circle, diameter: 100 um}}, \
         length: 10 mm}}\n"
    )
}

fn levels(text: &str, duration: f64, outputs: usize) -> (Vec<f64>, Vec<f64>) {
    let chip = parse_chip(text, "test.yaml", Syntax::Yaml).unwrap();
    let ev = evolve(
        &chip.network,
        &Drives::default(),
        Run {
            duration,
            every: duration / outputs as f64,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    assert!(ev.switches.is_empty(), "{:?}", ev.switches);
    (ev.times, ev.levels[0].1.clone())
}

#[test]
fn a_stepped_well_drains_as_two_exponentials() {
    // 2 mm² up to 1 mm, then 6 mm² up to 4 mm; level 3 mm. The table is exact for this well
    // (linear between rows), so the closed form holds to the time stepping's tolerance:
    //   h = h0·exp(−t/τ₂) with τ₂ = R·A₂/(ρg) until h = h1 at t₁ = τ₂·ln(h0/h1),
    //   then h = h1·exp(−(t − t₁)/τ₁) with τ₁ = R·A₁/(ρg).
    let text = chip_text("{level: 3 mm, table: [[0 mm, 0 uL], [1 mm, 2 uL], [4 mm, 20 uL]]}");
    let rg = RHO * STANDARD_GRAVITY;
    let (tau1, tau2) = (resistance() * 2e-6 / rg, resistance() * 6e-6 / rg);
    let (h0, h1): (f64, f64) = (3e-3, 1e-3);
    let t1 = tau2 * (h0 / h1).ln();
    let duration = t1 + 2.0 * tau1;
    let (times, levels) = levels(&text, duration, 300);
    let mut worst = 0.0f64;
    for (&t, &h) in times.iter().zip(&levels) {
        let exact = if t <= t1 {
            h0 * (-t / tau2).exp()
        } else {
            h1 * (-(t - t1) / tau1).exp()
        };
        worst = worst.max((h - exact).abs() / h0);
    }
    assert!(
        worst <= 1e-6,
        "largest level error {worst:e} of the initial level"
    );
    // Both pieces were crossed.
    assert!(levels.last().is_some_and(|&h| h < 0.5 * h1));
}

/// The frustum r(h) = r0 + k·h: V(h) = π(r0²h + r0·k·h² + k²h³/3), and from
/// A(h)·dh/dt = −ρgh/R the time to fall from h0 to h:
///   t(h) = (πR/ρg)·(r0²·ln(h0/h) + 2·r0·k·(h0 − h) + k²·(h0² − h²)/2).
struct Frustum {
    r0: f64,
    k: f64,
}

impl Frustum {
    fn volume(&self, h: f64) -> f64 {
        PI * (self.r0 * self.r0 * h + self.r0 * self.k * h * h + self.k * self.k * h.powi(3) / 3.0)
    }

    fn time_to(&self, h0: f64, h: f64) -> f64 {
        let c = PI * resistance() / (RHO * STANDARD_GRAVITY);
        c * (self.r0 * self.r0 * (h0 / h).ln()
            + 2.0 * self.r0 * self.k * (h0 - h)
            + 0.5 * self.k * self.k * (h0 * h0 - h * h))
    }

    /// The level at time t, by bisection on t(h) (monotone).
    fn level_at(&self, h0: f64, t: f64) -> f64 {
        let (mut lo, mut hi) = (1e-12, h0);
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if self.time_to(h0, mid) > t {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    /// A table of `rows` + 1 exact volumes, evenly spaced up to `top`.
    fn table(&self, top: f64, rows: usize) -> String {
        let cells: Vec<String> = (0..=rows)
            .map(|i| {
                let h = top * i as f64 / rows as f64;
                format!("[{h:e} m, {:e} m^3]", self.volume(h))
            })
            .collect();
        format!("[{}]", cells.join(", "))
    }
}

/// Largest level error over a run of the conical well with a table of `rows` rows.
fn cone_error(cone: &Frustum, rows: usize) -> f64 {
    let (h0, top) = (6e-3, 8e-3);
    let text = chip_text(&format!(
        "{{level: 6 mm, table: {}}}",
        cone.table(top, rows)
    ));
    let duration = cone.time_to(h0, 1e-3);
    let (times, levels) = levels(&text, duration, 60);
    times
        .iter()
        .zip(&levels)
        .map(|(&t, &h)| (h - cone.level_at(h0, t)).abs() / h0)
        .fold(0.0, f64::max)
}

#[test]
fn a_conical_well_matches_its_closed_form_to_second_order_in_the_row_spacing() {
    // A pipette-tip-like well widening upwards: radius 0.5 mm at the bottom, 2.1 mm at 8 mm.
    let cone = Frustum { r0: 0.5e-3, k: 0.2 };
    let coarse = cone_error(&cone, 16);
    let fine = cone_error(&cone, 64);
    println!("cone, largest level error / h0: 16 rows {coarse:.3e}, 64 rows {fine:.3e}");
    // Linear interpolation of V between exact rows errs by O(Δh²): four times finer rows,
    // about sixteen times smaller error (the time stepping adds ~1e-7).
    assert!(coarse < 2e-2, "{coarse:e}");
    assert!(fine < coarse / 8.0, "16 rows {coarse:e}, 64 rows {fine:e}");
}

#[test]
fn rows_out_of_order_are_refused_with_the_place() {
    let dir = tempfile::tempdir().unwrap();
    let path = write_file(
        dir.path(),
        "chip.yaml",
        &chip_text("{level: 2 mm, table: [[0 mm, 0 uL], [3 mm, 9 uL], [2 mm, 12 uL]]}"),
    );
    let out = rillnet().arg("solve").arg(&path).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("chip.yaml:3:"), "{err}");
    assert!(err.contains("table"), "{err}");
    assert!(
        err.contains("row 2") && err.contains("levels must increase"),
        "{err}"
    );

    let path = write_file(
        dir.path(),
        "vol.yaml",
        &chip_text("{level: 2 mm, table: [[0 mm, 0 uL], [3 mm, 9 uL], [4 mm, 8 uL]]}"),
    );
    let out = rillnet().arg("solve").arg(&path).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("row 2") && err.contains("volumes must increase"),
        "{err}"
    );

    let path = write_file(
        dir.path(),
        "both.yaml",
        &chip_text("{level: 2 mm, area: 3 mm^2, table: [[0 mm, 0 uL], [3 mm, 9 uL]]}"),
    );
    let out = rillnet().arg("solve").arg(&path).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not several"));

    let path = write_file(
        dir.path(),
        "high.yaml",
        &chip_text("{level: 5 mm, table: [[0 mm, 0 uL], [3 mm, 9 uL]]}"),
    );
    let out = rillnet().arg("solve").arg(&path).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("overflow"));
}

#[test]
fn a_well_filled_past_its_table_stops_the_run_and_says_so() {
    // A pump fills the well at 10 µL/min; 9 µL of room above 1 mm → full after ~50 s.
    let dir = tempfile::tempdir().unwrap();
    let text = "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nnodes:\n  \
                pump: {flow: 10 uL/min}\n  \
                well: {reservoir: {level: 1 mm, table: [[0 mm, 0 uL], [1 mm, 3 uL], [4 mm, 12 uL]]}}\n\
                channels:\n  \
                feed: {from: pump, to: well, section: {shape: circle, diameter: 100 um}, \
                length: 10 mm}\n";
    let path = write_file(dir.path(), "fill.yaml", text);
    let out = rillnet()
        .args(["evolve"])
        .arg(&path)
        .args(["--for", "120 s"])
        .output()
        .unwrap();
    assert_ne!(out.status.code(), Some(0));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("'well'") && err.contains("overflow"), "{err}");
    // The time it names is the fill time 9 µL / (10 µL/min) = 54 s, to the printed digits.
    let at = err
        .split("t = ")
        .nth(1)
        .and_then(|s| s.split_whitespace().next())
        .and_then(|s| s.parse::<f64>().ok())
        .unwrap_or(f64::NAN);
    assert!((at - 54.0).abs() < 1e-3, "{err}");
}

#[test]
fn the_report_of_a_slow_drain_runs_until_the_flow_has_gone() {
    // The demo tip drains over hours with a nearly constant early flow: the report's run must
    // not stop at its first minute (where the flow has changed by only 0.5 %).
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("report");
    let out = rillnet()
        .args(["report", "networks/tip_fed_spheroid_wells.yaml", "-o"])
        .arg(&folder)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(folder.join("evolve.json")).unwrap();
    let doc: serde_json::Value = serde_json::from_str(&text).unwrap();
    let feed = doc["channels"]
        .as_array()
        .and_then(|c| c.iter().find(|c| c["name"] == "feed"))
        .map(|c| c["flow_m3_per_s"].clone())
        .unwrap();
    let q: Vec<f64> = feed
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    let (first, last) = (q[0], q[q.len() - 1]);
    assert!(last.abs() < 0.01 * first, "first {first:e}, last {last:e}");
}
