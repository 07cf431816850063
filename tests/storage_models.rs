//! Storage computed from material and geometry: elastic tubing (`nodes.NAME.tubing`).
//!
//! Model: Lamé's thick-walled cylinder under internal pressure, free ends (Timoshenko &
//! Goodier, *Theory of Elasticity*, 3rd ed. 1970, thick-walled cylinder):
//! C = 2π·a²·L/E·((b² + a²)/(b² − a²) + ν), a = d/2, b = a + t; thin-wall limit
//! C = π·d³·L/(4·E·t).

use rillnet::analysis::transient::{evolve, Drives, Run, SwitchOn};
use rillnet::format::{parse_chip, Syntax};
use rillnet::network::{Storage, Tubing};
use std::f64::consts::PI;

fn chip(text: &str) -> rillnet::Chip {
    match parse_chip(text, "test.yaml", Syntax::Yaml) {
        Ok(c) => c,
        Err(e) => panic!("{e}"),
    }
}

fn refused(text: &str) -> String {
    match parse_chip(text, "test.yaml", Syntax::Yaml) {
        Ok(_) => panic!("accepted:\n{text}"),
        Err(e) => e.to_string(),
    }
}

fn pump_into_tubing(tubing: &str) -> String {
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\nnodes:\n  \
         pump: {{flow: 20 uL/min}}\n  line: {{tubing: {tubing}}}\n  out: {{pressure: 0 Pa}}\n\
         channels:\n  \
         feed: {{from: pump, to: line, section: {{shape: circle, diameter: 100 um}}, length: 1 mm}}\n  \
         c: {{from: line, to: out, section: {{shape: circle, diameter: 100 um}}, length: 50 mm}}\n"
    )
}

const SILICONE: &str = "{inner_diameter: 0.5 mm, wall: 0.8 mm, length: 30 cm, modulus: 1.5 MPa}";

fn compliance_of(c: &rillnet::Chip, node: &str) -> f64 {
    let n = c.network.node_id(node).unwrap();
    match &c.network.nodes[n].storage {
        Some(Storage::Compliance(x)) => x.si(),
        other => panic!("{other:?}"),
    }
}

#[test]
fn silicone_tubing_has_the_hand_computed_compliance() {
    // Computed by hand (closed form derived here from Lamé, above): d = 0.5 mm, t = 0.8 mm,
    // L = 30 cm, E = 1.5 MPa, ν = 0.5 (default). a² = 0.0625 mm², b = 1.05 mm, b² = 1.1025 mm²,
    // (b² + a²)/(b² − a²) = 1.165/1.04 = 1.120192; + ν = 1.620192.
    // 2π·a²·L/E = 2π·6.25e-8·0.3/1.5e6 = 7.853982e-14 m³/Pa; C = 1.272496e-13 m³/Pa,
    // i.e. 12.72 µL/bar. The thin-wall formula would give π·(0.5e-3)³·0.3/(4·1.5e6·0.8e-3)
    // = 2.454e-14 m³/Pa, five times less: at t/d = 1.6 it does not apply.
    let c = chip(&pump_into_tubing(SILICONE));
    let got = compliance_of(&c, "line");
    assert!((got / 1.272496e-13 - 1.0).abs() < 1e-6, "{got:e}");
    let tube = Tubing {
        inner_diameter: 0.5e-3,
        wall: 0.8e-3,
        length: 0.3,
        modulus: 1.5e6,
        poisson: 0.5,
    };
    assert!((tube.thin_wall_compliance() / 2.454369e-14 - 1.0).abs() < 1e-6);
}

#[test]
fn thin_walls_recover_the_thin_wall_formula() {
    // Closed form derived here: with b = a + t, (b² + a²)/(b² − a²) = (a/t)(1 + t/(2a) + O(t²/a²)),
    // so C/C_thin = (t/a)·((b² + a²)/(b² − a²) + ν) = 1 + (1 + 2ν)·t/d + O((t/d)²).
    for nu in [0.0, 0.3, 0.5] {
        for ratio in [1e-2, 1e-3, 1e-4] {
            let d = 1e-3;
            let tube = Tubing {
                inner_diameter: d,
                wall: ratio * d,
                length: 0.1,
                modulus: 2e9,
                poisson: nu,
            };
            let excess = tube.compliance() / tube.thin_wall_compliance() - 1.0;
            let first_order = (1.0 + 2.0 * nu) * ratio;
            assert!(
                (excess - first_order).abs() <= 2.0 * ratio * ratio,
                "ν = {nu}, t/d = {ratio}: excess {excess:e}, first order {first_order:e}"
            );
        }
    }
}

#[test]
fn a_pump_charges_the_tubing_with_time_constant_rc() {
    // End to end: the file's tubing → its compliance C → `evolve`. Pump q switched on at t₀
    // into the tubing node, which drains through R (Hagen–Poiseuille 8μL/(πa⁴), Bruus,
    // *Theoretical Microfluidics* 2008, ch. 4) to an open outlet: C·dP/dt = q − P/R ⇒
    // Q(t) = q·(1 − exp(−(t − t₀)/(R·C))) (closed form derived here).
    let c = chip(&pump_into_tubing(SILICONE));
    let cap = 1.272496e-13;
    let r = 8.0 * 1e-3 * 0.050 / (PI * 5e-5_f64.powi(4));
    let tau = r * cap;
    let t0 = 0.2 * tau;
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
            duration: 5.0 * tau,
            every: tau / 5.0,
            rtol: rillnet::commands::EVOLVE_RTOL,
        },
    )
    .unwrap();
    let q = 20e-9 / 60.0;
    let k = c.network.channel_id("c").unwrap();
    for (t, f) in ev.times.iter().zip(&ev.flows) {
        let exact = if *t <= t0 {
            0.0
        } else {
            q * (1.0 - (-(t - t0) / tau).exp())
        };
        assert!(
            (f[k.0] - exact).abs() <= 1e-6 * q,
            "t = {t}: {} against {exact}",
            f[k.0]
        );
    }
}

#[test]
fn bad_tubing_is_refused_with_its_place() {
    let e = refused(&pump_into_tubing(
        "{inner_diameter: 0.5 mm, wall: -1 mm, length: 30 cm, modulus: 1.5 MPa}",
    ));
    assert!(e.contains("nodes.line.tubing.wall"), "{e}");
    let e = refused(&pump_into_tubing(
        "{inner_diameter: 0.5 mm, wall: 1 mm, length: 30 cm, modulus: 1.5 MPa, poisson: 0.7}",
    ));
    assert!(e.contains("nodes.line.tubing.poisson"), "{e}");
    let e = refused(&pump_into_tubing(
        "{inner_diameter: 0.5 mm, wall: 1 mm, length: 30 cm, modulus: 1.5 uL}",
    ));
    assert!(e.contains("modulus"), "{e}");
    let e = refused(&pump_into_tubing(
        "{inner_diameter: 0.5 mm, wall: 1 mm, length: 30 cm}",
    ));
    assert!(e.contains("modulus"), "{e}");
    // Tubing on a pressure port stores nothing: refused at the tubing key.
    let e = refused(
        &pump_into_tubing(SILICONE).replace("line: {tubing:", "line: {pressure: 1 kPa, tubing:"),
    );
    assert!(
        e.contains("nodes.line.tubing") && e.contains("stores nothing"),
        "{e}"
    );
}
