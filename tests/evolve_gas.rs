//! Trapped gas follows Boyle's law in `evolve`, not its linearisation.
//!
//! Model: a bubble of V₀ at absolute pressure u₀ (isothermal: u·V = K = u₀·V₀, Boyle's law;
//! Bruus, *Theoretical Microfluidics* 2008, ch. 4, hydraulic compliance) filled through a
//! Hagen–Poiseuille resistance R = 8μL/(πa⁴) (Bruus 2008, ch. 4) from a source held at the
//! absolute pressure s. Closed form derived here:
//!
//!   liquid in = −dV/dt = (s − u)/R,  V = K/u  ⇒  (K/u²)·du/dt = (s − u)/R
//!   ⇒ dt = R·K·du/(u²·(s − u)),  and  1/(u²(s − u)) = 1/(s·u²) + 1/(s²·u) + 1/(s²·(s − u))
//!   ⇒ t − t₀ = R·K·[(1/s)·(1/u₀ − 1/u) + (1/s²)·ln(u·(s − u₀)/(u₀·(s − u)))].
//!
//! t(u) rises monotonically from t₀ at u₀ towards ∞ as u → s, so u(t) is found by bisection.
//! The same ODE holds for a pump of flow q into the bubble with the outlet at u_out through R:
//! s = u_out + q·R.

use rillnet::analysis::transient::{evolve, Drives, Run, SwitchOn};
use rillnet::format::{parse_chip, Syntax};
use rillnet::network::STANDARD_ATMOSPHERE;
use std::f64::consts::PI;

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

/// The closed form above: time after the step at which the gas reaches u.
fn boyle_time(r: f64, k: f64, s: f64, u0: f64, u: f64) -> f64 {
    r * k * ((1.0 / u0 - 1.0 / u) / s + ((u * (s - u0)) / (u0 * (s - u))).ln() / (s * s))
}

/// u(t) from the closed form, by bisection on (u₀, s) to rounding.
fn boyle_pressure(r: f64, k: f64, s: f64, u0: f64, t: f64) -> f64 {
    let (mut lo, mut hi) = (u0.min(s), u0.max(s));
    for _ in 0..300 {
        let m = 0.5 * (lo + hi);
        if m <= lo || m >= hi {
            break;
        }
        // t(u) grows as u moves from u₀ towards s.
        let past = boyle_time(r, k, s, u0, m) > t;
        if past == (s > u0) {
            hi = m;
        } else {
            lo = m;
        }
    }
    0.5 * (lo + hi)
}

fn step_chip(step: &str) -> rillnet::Chip {
    chip(&format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         src: {{pressure: {step}}}\n  bubble: {{gas_volume: 20 uL}}\nchannels:\n  \
         c: {{from: src, to: bubble, section: {{shape: circle, diameter: 100 um}}, \
         length: 50 mm}}\n"
    ))
}

#[test]
fn a_bubble_behind_a_resistance_follows_boyle_after_a_large_step() {
    // A source switched from 0 to 1 bar gauge at t₀: the bubble is compressed to about half
    // its volume, far outside the linearisation's range.
    let c = step_chip("1 bar");
    let r = hp(0.050);
    let v0 = 20e-9;
    let u0 = STANDARD_ATMOSPHERE;
    let s = STANDARD_ATMOSPHERE + 1e5;
    let k = u0 * v0;
    let tau_lin = r * v0 / u0;
    let t0 = 0.1 * tau_lin;
    let drives = Drives {
        switch_on: vec![SwitchOn {
            node: c.network.node_id("src").unwrap(),
            at: t0,
        }],
        ..Drives::default()
    };
    let ev = evolve(
        &c.network,
        &drives,
        Run {
            duration: 8.0 * tau_lin,
            every: tau_lin / 10.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    let b = c.network.node_id("bubble").unwrap();
    let mut worst = 0.0f64;
    let mut linear_gap = 0.0f64;
    for (t, p) in ev.times.iter().zip(&ev.pressures) {
        let exact = if *t <= t0 {
            u0
        } else {
            boyle_pressure(r, k, s, u0, t - t0)
        };
        let got = STANDARD_ATMOSPHERE + p[b.0];
        worst = worst.max((got - exact).abs() / (s - u0));
        // The linearised model (C = V₀/u₀ held fixed): u = s − (s − u₀)·exp(−(t − t₀)/τ).
        let linear = if *t <= t0 {
            u0
        } else {
            s - (s - u0) * (-(t - t0) / tau_lin).exp()
        };
        linear_gap = linear_gap.max((linear - exact).abs() / (s - u0));
    }
    eprintln!(
        "Boyle step: worst error {worst:.3e} of the step, linearised model off by \
         {linear_gap:.3e}; {} steps, {} rejected, {} factorisations",
        ev.steps, ev.rejected, ev.factorizations
    );
    assert!(worst <= 1e-6, "worst error {worst:e} of the step");
    // The linearised answer is far off for this step, so the check above could fail.
    assert!(
        linear_gap > 0.05,
        "linearised model only {linear_gap:e} off"
    );
    // The channel carries (s − u)/R at every output after the step.
    for (t, (f, p)) in ev.times.iter().zip(ev.flows.iter().zip(&ev.pressures)) {
        if *t > t0 {
            let q = (s - STANDARD_ATMOSPHERE - p[b.0]) / r;
            assert!((f[0] - q).abs() <= 1e-9 * (s - u0) / r, "t = {t}");
        }
    }
}

#[test]
fn a_bubble_expands_after_a_suction_step() {
    // The same bubble behind a source dropped to −0.5 bar gauge: the gas expands to about
    // twice its volume; the closed form holds for s < u₀ as well (t(u) still increasing).
    let c = step_chip("-0.5 bar");
    let r = hp(0.050);
    let v0 = 20e-9;
    let u0 = STANDARD_ATMOSPHERE;
    let s = STANDARD_ATMOSPHERE - 0.5e5;
    let k = u0 * v0;
    let tau_lin = r * v0 / u0;
    let t0 = 0.1 * tau_lin;
    let drives = Drives {
        switch_on: vec![SwitchOn {
            node: c.network.node_id("src").unwrap(),
            at: t0,
        }],
        ..Drives::default()
    };
    let ev = evolve(
        &c.network,
        &drives,
        Run {
            duration: 10.0 * tau_lin,
            every: tau_lin / 4.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    let b = c.network.node_id("bubble").unwrap();
    let mut worst = 0.0f64;
    for (t, p) in ev.times.iter().zip(&ev.pressures) {
        let exact = if *t <= t0 {
            u0
        } else {
            boyle_pressure(r, k, s, u0, t - t0)
        };
        let got = STANDARD_ATMOSPHERE + p[b.0];
        worst = worst.max((got - exact).abs() / (u0 - s));
        assert!(
            (got - exact).abs() <= 1e-6 * (u0 - s),
            "t = {t}: {got} against {exact}"
        );
    }
    eprintln!("Suction step: worst error {worst:.3e} of the step");
}

#[test]
fn a_syringe_bubble_delays_the_flow() {
    // Pump q switched on at t₀ into a bubble of 20 µL at 1 atm feeding R to an open outlet:
    // the closed form above with s = u_atm + q·R; the channel carries (u − u_atm)/R. For this
    // small rise (q·R ≈ 1.7 kPa) it is close to the linearised 1 − exp(−(t − t₀)/τ),
    // τ = R·V/p_abs, but not within the tolerance.
    let c = chip(
        "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nnodes:\n  \
         pump: {flow: 5 uL/min, gas_volume: 20 uL}\n  out: {pressure: 0 Pa}\nchannels:\n  \
         c: {from: pump, to: out, section: {shape: circle, diameter: 100 um}, length: 50 mm}\n",
    );
    let r = hp(0.050);
    let u0 = STANDARD_ATMOSPHERE;
    let q = 5e-9 / 60.0;
    let s = u0 + q * r;
    let k = u0 * 2e-8;
    let tau = r * 2e-8 / u0;
    let t0 = 0.5 * tau;
    let drives = Drives {
        switch_on: vec![SwitchOn {
            node: c.network.node_id("pump").unwrap(),
            at: t0,
        }],
        ..Drives::default()
    };
    let ev = evolve(
        &c.network,
        &drives,
        Run {
            duration: 6.0 * tau,
            every: tau / 8.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    let mut linear_gap = 0.0f64;
    let mut worst = 0.0f64;
    for (t, f) in ev.times.iter().zip(&ev.flows) {
        let (exact, linear) = if *t <= t0 {
            (0.0, 0.0)
        } else {
            (
                (boyle_pressure(r, k, s, u0, t - t0) - u0) / r,
                q * (1.0 - (-(t - t0) / tau).exp()),
            )
        };
        linear_gap = linear_gap.max((linear - exact).abs() / q);
        worst = worst.max((f[0] - exact).abs() / q);
        assert!(
            (f[0] - exact).abs() <= 1e-6 * q,
            "t = {t}: {} against {exact}",
            f[0]
        );
    }
    eprintln!("Syringe: worst error {worst:.3e} of q, linearised model off by {linear_gap:.3e}");
    assert!(
        linear_gap > 1e-4,
        "linearised model only {linear_gap:e} off"
    );
}
