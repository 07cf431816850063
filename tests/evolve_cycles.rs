//! Answers per tilt cycle on a rocking platform, end to end through `rillnet evolve`.

mod common;

const CHIP: &str = "\
fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
rocking: {angle: 15 deg, period: 4 s}
nodes:
  left: {pressure: 100 Pa, arm: -50 mm}
  mid: {compliance: 20 uL/bar}
  right: {pressure: 0 Pa, arm: 50 mm}
channels:
  c1: {from: left, to: mid, section: {shape: circle, diameter: 100 um}, length: 20 mm}
  c2: {from: mid, to: right, section: {shape: rectangle, width: 200 um, height: 50 um}, length: 15 mm}
";

fn json(args: &[&str]) -> serde_json::Value {
    let out = common::rillnet()
        .args(args)
        .write_stdin(CHIP)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

fn f(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap()
}

#[test]
fn the_cycle_mean_flow_of_a_linear_network_is_the_steady_flow_under_the_mean_head() {
    // Linearity (superposition, derived here): the heads swing as ρg·arm·sin(θ₀ sin ωt),
    // whose cycle mean is 0, so once the start-up has died away (τ = R∥·C ≈ 0.7 s against 30
    // cycles of 4 s) each cycle's mean
    // flow is the flow of the platform at rest, and the time-averaged wall shear (linear in
    // the flow for a Newtonian fluid) is the steady one. Independent computation: `solve`.
    let steady = json(&["solve", "-", "--format", "json"]);
    let run = json(&[
        "evolve", "-", "--for", "120 s", "--every", "0.02 s", "--format", "json",
    ]);
    let cycles = &run["cycles"];
    assert_eq!(f(&cycles["period_s"]), 4.0);
    assert_eq!(cycles["complete_cycles"], 30);
    assert_eq!(f(&cycles["last_cycle_start_s"]), 116.0);
    let times: Vec<f64> = run["times_s"].as_array().unwrap().iter().map(f).collect();
    for (k, name) in ["c1", "c2"].iter().enumerate() {
        let s = &steady["channels"][k];
        let c = &cycles["channels"][k];
        assert_eq!(c["name"], *name);
        assert_eq!(s["name"], *name);
        let q = f(&s["flow_m3_per_s"]);
        let means = c["mean_flow_m3_per_s"].as_array().unwrap();
        assert_eq!(means.len(), 30);
        let last = f(&means[29]);
        assert!(
            (last - q).abs() <= 1e-6 * q.abs(),
            "{name}: {last} against {q}"
        );
        let tau = f(&s["wall_shear_mean_pa"]);
        let mean_tau = f(&c["mean_wall_shear_pa"]);
        assert!(
            (mean_tau - tau).abs() <= 1e-6 * tau,
            "{name}: {mean_tau} against {tau}"
        );
        // The flow reverses within a cycle here (the swing ρg·0.1 m·sin 15° ≈ 250 Pa beats the
        // 100 Pa across the chip), so the mean magnitude exceeds the magnitude of the mean,
        // and the peak exceeds the steady peak.
        let series: Vec<f64> = run["channels"][k]["flow_m3_per_s"]
            .as_array()
            .unwrap()
            .iter()
            .map(f)
            .collect();
        let cycle: Vec<f64> = (times.iter().zip(&series))
            .filter(|(t, _)| **t >= 116.0)
            .map(|(_, q)| *q)
            .collect();
        assert!(cycle.iter().any(|q| *q < 0.0), "{name}: no reversal");
        let mean_abs = f(&c["mean_abs_wall_shear_pa"]);
        assert!(
            mean_abs > 1.01 * mean_tau,
            "{name}: {mean_abs} against {mean_tau}"
        );
        // The mean magnitude from the outputs (trapezoid rule over 200 points per cycle, so
        // within about 1e-3 where |Q| has its kinks) agrees with the dense-output integral.
        let per_flow = tau / q;
        let trapezoid = cycle
            .windows(2)
            .map(|w| 0.5 * (w[0].abs() + w[1].abs()))
            .sum::<f64>()
            / (cycle.len() - 1) as f64;
        assert!(
            (trapezoid * per_flow - mean_abs).abs() <= 1e-3 * mean_abs,
            "{name}: {} against {mean_abs}",
            trapezoid * per_flow
        );
        // The peak: no output in the cycle exceeds it, and it is met within 1e-3.
        let peak_per_flow = f(&s["wall_shear_max_pa"]) / q;
        let out_max = cycle.iter().fold(0.0f64, |m, q| m.max(q.abs())) * peak_per_flow;
        let max = f(&c["max_wall_shear_pa"]);
        assert!(
            max >= out_max * (1.0 - 1e-9) && max <= out_max * (1.0 + 1e-3),
            "{name}: {max} against {out_max}"
        );
        assert!(max > f(&s["wall_shear_max_pa"]));
    }
    // The table and the CSV carry the same answers.
    let out = common::rillnet()
        .args(["evolve", "-", "--for", "120 s", "--every", "1 s"])
        .write_stdin(CHIP)
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("Per tilt cycle (30 complete cycles of 4.000 s"),
        "{text}"
    );
    let out = common::rillnet()
        .args([
            "evolve", "-", "--for", "120 s", "--every", "1 s", "--format", "csv",
        ])
        .write_stdin(CHIP)
        .output()
        .unwrap();
    let csv = String::from_utf8_lossy(&out.stdout);
    assert!(csv.contains("record,channel,last_cycle_mean_flow_m3_per_s,mean_wall_shear_pa"));
    assert_eq!(csv.lines().filter(|l| l.starts_with("cycle,")).count(), 2);
}

#[test]
fn without_a_platform_there_are_no_cycle_answers() {
    let chip = CHIP
        .replace("rocking: {angle: 15 deg, period: 4 s}\n", "")
        .replace(", arm: -50 mm", "")
        .replace(", arm: 50 mm", "");
    let out = common::rillnet()
        .args(["evolve", "-", "--for", "10 s", "--format", "json"])
        .write_stdin(chip)
        .output()
        .unwrap();
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert!(doc.get("cycles").is_none());
}
