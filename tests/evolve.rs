//! Time evolution against closed forms of linear lumped models.
//!
//! Resistances: Hagen–Poiseuille R = 8μL/(πa⁴) (Bruus, *Theoretical Microfluidics* 2008,
//! ch. 4). Compliances: open well C = A/(ρg) (Bruus 2008, ch. 4, hydraulic compliance); trapped
//! gas follows Boyle's law and is checked in `tests/evolve_gas.rs`. Each closed form below is the solution of the linear first-order ODE
//! C·dP/dt = −P/R (+ a constant drive), derived by hand in the comment beside it.

use approx::assert_relative_eq;
use rillnet::analysis::transient::{evolve, Drives, Rocking, Run, SwitchOn};
use rillnet::format::{parse_chip, Syntax};
use rillnet::network::STANDARD_GRAVITY;
use std::f64::consts::PI;

const RHO: f64 = 1000.0;
const MU: f64 = 1e-3;

fn chip(text: &str) -> rillnet::Chip {
    match parse_chip(text, "test.yaml", Syntax::Yaml) {
        Ok(c) => c,
        Err(e) => panic!("{e}"),
    }
}

/// Hagen–Poiseuille resistance of a 100 µm tube of length `l` (Bruus 2008).
fn hp(l: f64) -> f64 {
    8.0 * MU * l / (PI * 5e-5_f64.powi(4))
}

fn header() -> String {
    "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\n".to_string()
}

fn tube(name: &str, from: &str, to: &str, mm: f64) -> String {
    format!(
        "  {name}: {{from: {from}, to: {to}, section: {{shape: circle, diameter: 100 um}}, \
         length: {mm} mm}}\n"
    )
}

#[test]
fn a_draining_well_decays_exponentially() {
    // A·dh/dt = −ρ·g·h/R ⇒ h(t) = h₀·exp(−t/τ), τ = R·A/(ρ·g).
    let text = format!(
        "{}nodes:\n  well: {{reservoir: {{level: 10 mm, area: 1 mm^2}}}}\n  \
         out: {{pressure: 0 Pa}}\nchannels:\n{}",
        header(),
        tube("c", "well", "out", 20.0)
    );
    let c = chip(&text);
    let tau = hp(0.020) * 1e-6 / (RHO * STANDARD_GRAVITY);
    // The tolerance is per step and mixed: rtol·|P| + rtol·(largest initial pressure), so
    // the error is measured against the initial level, the scale the tolerance uses. Measured
    // (this test, varying rtol): the global error falls as rtol^(2/3), as a second-order
    // method with per-step control should.
    let run = Run {
        duration: 5.0 * tau,
        every: tau / 20.0,
        rtol: rillnet::commands::EVOLVE_RTOL,
    };
    let ev = evolve(&c.network, &Drives::default(), run).unwrap();
    let (_, levels) = &ev.levels[0];
    assert_eq!(levels.len(), ev.times.len());
    for (t, h) in ev.times.iter().zip(levels) {
        let exact = 0.010 * (-t / tau).exp();
        assert!(
            (h - exact).abs() <= 1e-6 * 0.010,
            "t = {t}: {h} against {exact}"
        );
    }
    // The channel flow is ρ·g·h/R at every output.
    for (f, h) in ev.flows.iter().zip(levels) {
        assert_relative_eq!(
            f[0],
            RHO * STANDARD_GRAVITY * h / hp(0.020),
            max_relative = 1e-9
        );
    }
    // One symbolic analysis; refactorisations only when the step changes (far fewer than steps).
    assert!(
        2 * ev.factorizations < ev.steps,
        "{} factorisations for {} steps",
        ev.factorizations,
        ev.steps
    );
    eprintln!("{} steps, {} factorisations", ev.steps, ev.factorizations);
}

#[test]
fn two_wells_equalise_with_the_reduced_time_constant() {
    // Volume conserved: A₁h₁ + A₂h₂ = const; the difference Δ = h₁ − h₂ obeys
    // dΔ/dt = −(ρg/R)(1/A₁ + 1/A₂)·Δ ⇒ τ = R·A₁A₂/(ρ·g·(A₁ + A₂)).
    let text = format!(
        "{}nodes:\n  a: {{reservoir: {{level: 12 mm, area: 2 mm^2}}}}\n  \
         b: {{reservoir: {{level: 3 mm, diameter: 1.5 mm}}}}\nchannels:\n{}",
        header(),
        tube("c", "a", "b", 30.0)
    );
    let c = chip(&text);
    let (a1, a2) = (2e-6, PI / 4.0 * 1.5e-3 * 1.5e-3);
    let tau = hp(0.030) * a1 * a2 / (RHO * STANDARD_GRAVITY * (a1 + a2));
    let ev = evolve(
        &c.network,
        &Drives::default(),
        Run {
            duration: 6.0 * tau,
            every: tau / 10.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    let final_level = (a1 * 0.012 + a2 * 0.003) / (a1 + a2);
    for (k, t) in ev.times.iter().enumerate() {
        let d = 0.009 * (-t / tau).exp();
        let h1 = final_level + d * a2 / (a1 + a2);
        let h2 = final_level - d * a1 / (a1 + a2);
        assert!((ev.levels[0].1[k] - h1).abs() <= 1e-6 * 0.009, "t = {t}");
        assert!((ev.levels[1].1[k] - h2).abs() <= 1e-6 * 0.009, "t = {t}");
        // Stored volume is conserved to rounding.
        let v = a1 * ev.levels[0].1[k] + a2 * ev.levels[1].1[k];
        assert_relative_eq!(v, a1 * 0.012 + a2 * 0.003, max_relative = 1e-9);
    }
}

#[test]
fn stepping_to_rest_reaches_the_steady_solve() {
    // A pump with a bubble, a soft chamber and two outlets (one 10 cm below the datum): the
    // linear system's fixed point is the steady state, so stepping long enough must give what
    // `solve` gives (independent computation: the steady Kirchhoff solve).
    let text = format!(
        "{}nodes:\n  pump: {{flow: 8 uL/min, gas_volume: 5 uL}}\n  j: {{compliance: 2 uL/bar}}\n  \
         low: {{pressure: 0 Pa, elevation: -10 cm}}\n  high: {{pressure: 50 Pa}}\nchannels:\n{}{}{}",
        header(),
        tube("c1", "pump", "j", 10.0),
        tube("c2", "j", "low", 40.0),
        tube("c3", "j", "high", 25.0)
    );
    let c = chip(&text);
    let steady = rillnet::analysis::solve(&c.network).unwrap();
    let drives = Drives {
        switch_on: vec![SwitchOn {
            node: c.network.node_id("pump").unwrap(),
            at: 1.0,
        }],
        rocking: None,
        ..Drives::default()
    };
    let ev = evolve(
        &c.network,
        &drives,
        Run {
            duration: 2000.0,
            every: 100.0,
            rtol: 1e-10,
        },
    )
    .unwrap();
    let last = ev.flows.last().unwrap();
    for (k, f) in last.iter().enumerate() {
        assert_relative_eq!(*f, steady.flows[k], max_relative = 1e-9);
    }
    let p = ev.pressures.last().unwrap();
    for (pi, si) in p.iter().zip(&steady.pressures) {
        assert_relative_eq!(*pi, *si, max_relative = 1e-9, epsilon = 1e-9);
    }
}

#[test]
fn rocking_a_linear_network_averages_to_the_mean_head() {
    // Two open outlets on a rocking platform (arms ±15 mm, 7°, period 4 s) joined through a
    // soft chamber. The network is linear and the cycle mean of sin(θ₀·sin ωt) is 0, so once
    // the start-up has died away the cycle-mean flow equals the steady flow at rest
    // (linearity; independent computation: the steady solve).
    let text = format!(
        "{}nodes:\n  left: {{pressure: 100 Pa}}\n  mid: {{compliance: 20 uL/bar}}\n  \
         right: {{pressure: 0 Pa}}\nchannels:\n{}{}",
        header(),
        tube("c1", "left", "mid", 20.0),
        tube("c2", "mid", "right", 20.0)
    );
    let c = chip(&text);
    let steady = rillnet::analysis::solve(&c.network).unwrap();
    let period = 4.0;
    let n = c.network.node_id("left").unwrap();
    let m = c.network.node_id("right").unwrap();
    let drives = Drives {
        switch_on: vec![],
        rocking: Some(Rocking {
            amplitude: 7f64.to_radians(),
            period,
            arms: vec![(n, -0.015), (m, 0.015)],
        }),
        ..Drives::default()
    };
    let per_cycle = 400;
    let cycles = 30.0;
    let ev = evolve(
        &c.network,
        &drives,
        Run {
            duration: cycles * period,
            every: period / per_cycle as f64,
            rtol: 1e-10,
        },
    )
    .unwrap();
    // The head swings by ρ·g·0.03 m·sin 7° ≈ 36 Pa against 100 Pa: the flow leaves its steady
    // value by a good fraction within a cycle (the chamber damps part of it).
    let last: Vec<f64> = ev.flows[ev.flows.len() - per_cycle - 1..]
        .iter()
        .map(|f| f[0])
        .collect();
    let swing = last
        .iter()
        .fold(0.0f64, |s, f| s.max((f - steady.flows[0]).abs()));
    assert!(swing > 0.1 * steady.flows[0].abs(), "swing {swing}");
    // Trapezoid rule over one period of a periodic signal (spectrally accurate).
    let mean = last[..per_cycle].iter().sum::<f64>() / per_cycle as f64;
    assert_relative_eq!(mean, steady.flows[0], max_relative = 1e-6);
}

/// Run the binary on a chip given on standard input.
fn run_cli(text: &str, args: &[&str]) -> std::process::Output {
    use std::io::Write;
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("rillnet"))
        .args(args)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(text.as_bytes())
        .unwrap();
    child.wait_with_output().unwrap()
}

#[test]
fn evolve_json_has_the_promised_keys_at_every_instant() {
    let text = format!(
        "{}nodes:\n  a: {{reservoir: {{level: 12 mm, area: 2 mm^2}}}}\n  \
         b: {{reservoir: {{level: 3 mm, diameter: 1.5 mm}}}}\nchannels:\n{}",
        header(),
        tube("c", "a", "b", 30.0)
    );
    let out = run_cli(
        &text,
        &[
            "evolve", "-", "--for", "2h", "--every", "10min", "--format", "json",
        ],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let times = doc["times_s"].as_array().unwrap();
    assert_eq!(times.len(), 13);
    assert_eq!(times[1].as_f64(), Some(600.0));
    let flows = doc["channels"][0]["flow_m3_per_s"].as_array().unwrap();
    assert_eq!(doc["channels"][0]["name"], "c");
    assert_eq!(flows.len(), 13);
    let levels = doc["reservoirs"][1]["level_m"].as_array().unwrap();
    assert_eq!(doc["reservoirs"][1]["name"], "b");
    assert_eq!(levels.len(), 13);
    // The wells equalise (τ ≈ 260 s here): an event with its kind, subject and time.
    let events = doc["events"].as_array().unwrap();
    assert!(events.iter().any(|e| e["kind"] == "levels_equal"
        && e["subject"] == "a=b"
        && e["time_s"].as_f64().unwrap() > 0.0));
    // Bad durations are refused with the flag named, exit code 2.
    let out = run_cli(&text, &["evolve", "-", "--for", "2 furlongs"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--for"));
}

#[test]
fn a_draining_well_runs_dry_and_its_port_then_carries_no_flow() {
    // Outlet 5 cm below the well bottom: the well empties; its port then carries no flow and
    // the run goes on to its end.
    let text = format!(
        "{}nodes:\n  well: {{reservoir: {{level: 3 mm, area: 1 mm^2}}}}\n  \
         out: {{pressure: 0 Pa, elevation: -5 cm}}\nchannels:\n{}",
        header(),
        tube("c", "well", "out", 5.0)
    );
    let out = run_cli(
        &text,
        &[
            "evolve", "-", "--for", "1 h", "--every", "0.1 s", "--format", "json",
        ],
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["stopped_dry"], false);
    let times = doc["times_s"].as_array().unwrap();
    assert_eq!(times.len(), 36001);
    assert_eq!(times.last().unwrap().as_f64(), Some(3600.0));
    let dry = doc["events"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["kind"] == "dry")
        .unwrap();
    // Hand estimate: the head ρg(h + 0.05) hardly changes over 3 mm, so the well empties in
    // about V/Q = A·h·R/(ρg·0.0515) (within the ±3 % the changing head gives).
    let r = hp(0.005);
    let estimate = 1e-6 * 0.003 * r / (RHO * STANDARD_GRAVITY * 0.0515);
    let t = dry["time_s"].as_f64().unwrap();
    assert!(
        (t - estimate).abs() < 0.03 * estimate,
        "{t} against {estimate}"
    );
    // After it: no flow, the level held at the bottom (0 m).
    let flows = doc["channels"][0]["flow_m3_per_s"].as_array().unwrap();
    let levels = doc["reservoirs"][0]["level_m"].as_array().unwrap();
    let q0 = flows[0].as_f64().unwrap();
    for (k, time) in times.iter().enumerate() {
        if time.as_f64().unwrap() > t {
            assert!(
                flows[k].as_f64().unwrap().abs() <= 1e-9 * q0,
                "{}",
                flows[k]
            );
            assert_eq!(levels[k].as_f64(), Some(0.0));
        }
    }
}
