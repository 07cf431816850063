//! Wells that run dry: their port then carries no flow and the run goes on.
//!
//! Resistances: Hagen–Poiseuille R = 8μL/(πa⁴) (Bruus, *Theoretical Microfluidics* 2008,
//! ch. 4); an open well's compliance C = A/(ρ·g) (Bruus 2008, ch. 4, hydraulic compliance).

use rillnet::analysis::transient::{evolve, Drives, Run};
use rillnet::format::{parse_chip, Syntax};
use rillnet::network::STANDARD_GRAVITY;
use std::f64::consts::PI;

const RHO: f64 = 1000.0;
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

/// e^(M·t)·y for a 2×2 matrix with real distinct eigenvalues (Sylvester's formula:
/// e^(Mt) = (e^(λ₁t)(M − λ₂I) − e^(λ₂t)(M − λ₁I))/(λ₁ − λ₂)).
fn exp2(m: [[f64; 2]; 2], t: f64, y: [f64; 2]) -> [f64; 2] {
    let tr = m[0][0] + m[1][1];
    let det = m[0][0] * m[1][1] - m[0][1] * m[1][0];
    let disc = (tr * tr - 4.0 * det).sqrt();
    let (l1, l2) = (0.5 * (tr + disc), 0.5 * (tr - disc));
    let (e1, e2) = ((l1 * t).exp(), (l2 * t).exp());
    let apply = |l: f64| {
        [
            (m[0][0] - l) * y[0] + m[0][1] * y[1],
            m[1][0] * y[0] + (m[1][1] - l) * y[1],
        ]
    };
    let (a, b) = (apply(l2), apply(l1));
    [
        (e1 * a[0] - e2 * b[0]) / (l1 - l2),
        (e1 * a[1] - e2 * b[1]) / (l1 - l2),
    ]
}

#[test]
fn two_wells_into_one_outlet_one_dries_first_the_other_follows_its_own_decay() {
    // Wells a (3 mm, 1 mm²) and b (10 mm, 4 mm²) drain through a and b into a junction j and
    // on through o to an outlet 5 cm below the datum. Closed form derived here, with
    // y = ρg·h − P_out (head above the outlet's) and P_j from j's balance:
    //   phase 1: C·ẏ = −(y − P_j)/R per well, P_j = (y_a/R_a + y_b/R_b)/(1/R_a + 1/R_b + 1/R_o),
    //            a linear 2×2 system solved by its matrix exponential;
    //   phase 2 (a dry, its port closed): C_b·ẏ_b = −y_b/(R_b + R_o), a single exponential.
    let text = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         a: {{reservoir: {{level: 3 mm, area: 1 mm^2}}}}\n  \
         b: {{reservoir: {{level: 10 mm, area: 4 mm^2}}}}\n  j: {{}}\n  \
         out: {{pressure: 0 Pa, elevation: -5 cm}}\nchannels:\n{}{}{}",
        tube("ca", "a", "j", 10.0),
        tube("cb", "b", "j", 20.0),
        tube("co", "j", "out", 10.0)
    );
    let chip = parse_chip(&text, "test.yaml", Syntax::Yaml).unwrap();
    let rg = RHO * STANDARD_GRAVITY;
    let (ra, rb, ro) = (hp(0.010), hp(0.020), hp(0.010));
    let (ca, cb) = (1e-6 / rg, 4e-6 / rg);
    let s = 1.0 / ra + 1.0 / rb + 1.0 / ro;
    // ẏ = M·y with M = −C⁻¹·(G − g gᵀ/s), g = (1/R_a, 1/R_b).
    let m = [
        [
            -(1.0 / ra - 1.0 / (ra * ra * s)) / ca,
            1.0 / (ra * rb * s) / ca,
        ],
        [
            1.0 / (ra * rb * s) / cb,
            -(1.0 / rb - 1.0 / (rb * rb * s)) / cb,
        ],
    ];
    let empty = rg * 0.05; // y of an empty well (bottom at the datum)
    let y0 = [rg * 0.003 + empty, rg * 0.010 + empty];
    // a's dry time: y_a(t) = empty, by bisection on the closed form.
    let (mut lo, mut hi) = (0.0, 1e6);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if exp2(m, mid, y0)[0] > empty {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let t_a = 0.5 * (lo + hi);
    let yb_a = exp2(m, t_a, y0)[1];
    let tau_b = (rb + ro) * cb;
    let t_b = t_a + tau_b * (yb_a / empty).ln();
    let duration = 1.2 * t_b;
    let ev = evolve(
        &chip.network,
        &Drives::default(),
        Run {
            duration,
            every: duration / 400.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    assert!(ev.stopped_at.is_none());
    // Both wells run dry, a first; their times found on the dense output.
    assert_eq!(ev.switches.len(), 2, "{:?}", ev.switches);
    let a = chip.network.node_id("a").unwrap();
    let b = chip.network.node_id("b").unwrap();
    assert_eq!((ev.switches[0].node, ev.switches[0].dry), (a, true));
    assert_eq!((ev.switches[1].node, ev.switches[1].dry), (b, true));
    assert!(
        (ev.switches[0].time - t_a).abs() <= 1e-6 * t_a,
        "{} against {t_a}",
        ev.switches[0].time
    );
    assert!(
        (ev.switches[1].time - t_b).abs() <= 1e-6 * t_b,
        "{} against {t_b}",
        ev.switches[1].time
    );
    let scale = 0.010;
    let q_scale = y0[1] / rb;
    for (k, &t) in ev.times.iter().enumerate() {
        let (ha, hb) = (ev.levels[0].1[k], ev.levels[1].1[k]);
        let (ea, eb) = if t <= t_a {
            let y = exp2(m, t, y0);
            ((y[0] - empty) / rg, (y[1] - empty) / rg)
        } else if t <= t_b {
            (0.0, (yb_a * (-(t - t_a) / tau_b).exp() - empty) / rg)
        } else {
            (0.0, 0.0)
        };
        assert!(
            (ha - ea).abs() <= 1e-6 * scale,
            "t = {t}: a {ha} against {ea}"
        );
        assert!(
            (hb - eb).abs() <= 1e-6 * scale,
            "t = {t}: b {hb} against {eb}"
        );
        if t > t_a {
            // a's port carries nothing once it is dry.
            assert!(ev.flows[k][0].abs() <= 1e-9 * q_scale, "t = {t}");
        }
    }
    // b's level really falls after a is dry (the test could fail if nothing moved).
    let k = ev.times.iter().position(|&t| t > t_a).unwrap();
    assert!(ev.levels[1].1[k] > ev.levels[1].1[k + 40] + 1e-4);
}

#[test]
fn a_well_feeding_only_a_pump_stops_the_run_when_dry() {
    // A pump draws 1 uL/min from a well of 1 mm² holding 1 mm: dry after
    // V/q = 1e-9 m³ / (1e-9/60 m³/s) = 60 s (volume balance), and nothing is left to set the
    // pressures between the well and the pump: the run stops there.
    let text = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         w: {{reservoir: {{level: 1 mm, area: 1 mm^2}}}}\n  pump: {{flow: -1 uL/min}}\n\
         channels:\n{}",
        tube("c", "w", "pump", 10.0)
    );
    let chip = parse_chip(&text, "test.yaml", Syntax::Yaml).unwrap();
    let ev = evolve(
        &chip.network,
        &Drives::default(),
        Run {
            duration: 600.0,
            every: 1.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    let stop = ev.stopped_at.unwrap();
    assert!((stop - 60.0).abs() <= 1e-6 * 60.0, "{stop}");
    // The series ends at the stop, with the well empty.
    assert_eq!(*ev.times.last().unwrap(), stop);
    assert!(ev.levels[0].1.last().unwrap().abs() <= 1e-9 * 1e-3);
}

#[test]
fn a_dry_well_fills_again_when_a_pump_pushes_liquid_back() {
    // w (2 mm, 1 mm²) drains through cw and co to an outlet 2 cm below the datum and runs dry
    // (τ₁ = (R_w + R_o)·C, dry when ρg(h + 0.02) has fallen to ρg·0.02:
    // t_d = τ₁·ln(1.1)). At 200 s a pump (3.6 uL/min into j) switches on: j's pressure rises
    // above the empty well's head at once, w fills again from its bottom and its head
    // y = P_w − P_out settles as y∞ − y∞·e^(−(t − t₀)/τ₂) + ρg·0.02·e^(…) with
    // τ₂ = (R_w + R_o)·C, y∞ = q·R_o (closed form derived here: j is algebraic, w the only
    // storage).
    let text = format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         w: {{reservoir: {{level: 2 mm, area: 1 mm^2}}}}\n  j: {{}}\n  \
         pump: {{flow: 3.6 uL/min, on_at: 200 s}}\n  out: {{pressure: 0 Pa, elevation: -2 cm}}\n\
         channels:\n{}{}{}",
        tube("cw", "w", "j", 10.0),
        tube("cp", "pump", "j", 5.0),
        tube("co", "j", "out", 10.0)
    );
    let chip = parse_chip(&text, "test.yaml", Syntax::Yaml).unwrap();
    let rg = RHO * STANDARD_GRAVITY;
    let (rw, ro) = (hp(0.010), hp(0.010));
    let c = 1e-6 / rg;
    let tau = (rw + ro) * c;
    let t_d = tau * 1.1f64.ln();
    let t0 = 200.0;
    let q = 3.6e-9 / 60.0;
    let p_out = -rg * 0.02;
    let ev = evolve(
        &chip.network,
        &chip.drives,
        Run {
            duration: 5000.0,
            every: 10.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    assert_eq!(ev.switches.len(), 2, "{:?}", ev.switches);
    assert!(ev.switches[0].dry && !ev.switches[1].dry);
    assert!((ev.switches[0].time - t_d).abs() <= 1e-6 * t_d);
    assert_eq!(ev.switches[1].time, t0);
    let y_inf = q * ro;
    for (k, &t) in ev.times.iter().enumerate() {
        let exact = if t <= t_d {
            ((rg * 0.022) * (-t / tau).exp() + p_out) / rg
        } else if t <= t0 {
            0.0
        } else {
            let y = y_inf + (-p_out - y_inf) * (-(t - t0) / tau).exp();
            (y + p_out) / rg
        };
        assert!(
            (ev.levels[0].1[k] - exact).abs() <= 1e-6 * 0.002,
            "t = {t}: {} against {exact}",
            ev.levels[0].1[k]
        );
    }
    // It ends above its start (5 mm against 2 mm): the refill is real.
    assert!(*ev.levels[0].1.last().unwrap() > 0.004);
}
