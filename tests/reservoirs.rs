//! Open wells, elevations and storage in the chip file, and the steady state they give.
//!
//! Hydrostatic pressure of a liquid column, p = ρ·g·h (Bruus, *Theoretical Microfluidics* 2008,
//! ch. 2); Hagen–Poiseuille resistance of a tube, R = 8μL/(πa⁴) (Bruus 2008, ch. 4); water
//! density from Kell (1975) through the fluid model, checked against IAPWS-95 at 20 °C
//! (998.207 kg/m³, IAPWS R6-95 tables).

use approx::assert_relative_eq;
use rillnet::format::{parse_chip, Syntax};
use rillnet::network::{NodeId, Storage, STANDARD_GRAVITY};
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

const WATER: &str = "fluid: {model: water, temperature: 20 degC}\n";

#[test]
fn a_column_in_a_dead_end_gives_rho_g_h() {
    // A well 5 cm deep above a closed junction: no flow, so the junction sees the column's
    // pressure ρ·g·h, with ρ of water at 20 °C (IAPWS-95: 998.207 kg/m³) and standard gravity.
    let text = format!(
        "{WATER}nodes:\n  well: {{reservoir: {{level: 50 mm, diameter: 5 mm}}}}\n  \
         end: {{}}\nchannels:\n  c: {{from: well, to: end, section: {{shape: circle, \
         diameter: 100 um}}, length: 10 mm}}\n"
    );
    let c = chip(&text);
    let s = rillnet::analysis::solve(&c.network).unwrap();
    let end = c.network.node_id("end").unwrap();
    let expected = 998.207 * 9.80665 * 0.050; // ρ·g·h, hand value
    assert_relative_eq!(s.pressures[end.0], expected, max_relative = 2e-5);
    assert_eq!(s.flows[0], 0.0);
    // The well is an open cylinder: area πd²/4.
    let well = c.network.node_id("well").unwrap();
    match &c.network.nodes[well].storage {
        Some(Storage::Well(w)) => {
            assert_relative_eq!(w.area_at(0.0), PI / 4.0 * 25e-6, max_relative = 1e-15)
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn an_outlet_below_the_datum_adds_its_drop() {
    // Well level 8 mm above the chip, tube end 30 cm below it at 0 Pa: the driving head is
    // ρ·g·(0.008 + 0.30), and Q = head / R with R = 8μL/(πa⁴) (Hagen–Poiseuille).
    let text = "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nnodes:\n  \
        well: {reservoir: {level: 8 mm, area: 12 mm^2}}\n  \
        tap: {pressure: 0 Pa, elevation: -30 cm}\nchannels:\n  \
        c: {from: well, to: tap, section: {shape: circle, diameter: 200 um}, length: 40 mm}\n";
    let c = chip(text);
    let s = rillnet::analysis::solve(&c.network).unwrap();
    let r = 8.0 * 1e-3 * 0.040 / (PI * 1e-4_f64.powi(4));
    let head = 1000.0 * STANDARD_GRAVITY * (0.008 + 0.30);
    assert_relative_eq!(s.flows[0], head / r, max_relative = 1e-9);
    // The static pressure at the tap is its set 0 Pa; the piezometric one is ρ·g·z.
    let tap = c.network.node_id("tap").unwrap();
    assert_relative_eq!(
        c.network.static_pressure(tap, s.pressures[tap.0]),
        0.0,
        epsilon = 1e-9
    );
    assert_relative_eq!(
        s.pressures[tap.0],
        -1000.0 * 9.80665 * 0.30,
        max_relative = 1e-12
    );
}

#[test]
fn steady_state_equals_the_closed_form_of_two_wells_and_a_pump() {
    // Two wells (levels h₁, h₂) and a pump q into a junction j; channels R₁ (well_a–j),
    // R₂ (j–well_b). Nodal balance at j (hand derivation):
    // P_j = (P₁/R₁ + P₂/R₂ + q)/(1/R₁ + 1/R₂), P_i = ρ·g·h_i (+ gas pressure).
    let text = "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\ngravity: 9.81 m/s^2\n\
        nodes:\n  a: {reservoir: {level: 20 mm, diameter: 4 mm, gas_pressure: 100 Pa}}\n  \
        b: {reservoir: {level: 5 mm, area: 12 mm^2}}\n  \
        j: {flow: 2 ul/min, gas_volume: 20 uL}\n  \
        k: {compliance: 0.5 uL/bar}\nchannels:\n  \
        c1: {from: a, to: j, section: {shape: circle, diameter: 100 um}, length: 20 mm}\n  \
        c2: {from: j, to: k, section: {shape: circle, diameter: 100 um}, length: 10 mm}\n  \
        c3: {from: k, to: b, section: {shape: circle, diameter: 100 um}, length: 10 mm}\n";
    let c = chip(text);
    let s = rillnet::analysis::solve(&c.network).unwrap();
    let hp = |l: f64| 8.0 * 1e-3 * l / (PI * 5e-5_f64.powi(4));
    let (r1, r2) = (hp(0.020), hp(0.020));
    let p1 = 100.0 + 1000.0 * 9.81 * 0.020;
    let p2 = 1000.0 * 9.81 * 0.005;
    let q = 2e-9 / 60.0;
    let pj = (p1 / r1 + p2 / r2 + q) / (1.0 / r1 + 1.0 / r2);
    let j = c.network.node_id("j").unwrap();
    assert_relative_eq!(s.pressures[j.0], pj, max_relative = 1e-9);
    assert_relative_eq!(s.flows[0], (p1 - pj) / r1, max_relative = 1e-9);
    // Gas and compliance do not change a steady state, only how it is reached.
    assert!(matches!(
        &c.network.nodes[NodeId(j.0)].storage,
        Some(Storage::Gas { .. })
    ));
}

fn two_node(node: &str) -> String {
    format!(
        "{WATER}nodes:\n  w: {node}\n  out: {{pressure: 0 Pa}}\nchannels:\n  \
         c: {{from: w, to: out, section: {{shape: circle, diameter: 100 um}}, length: 1 mm}}\n"
    )
}

#[test]
fn bad_wells_are_refused_with_their_place() {
    let e = refused(&two_node("{reservoir: {level: -2 mm, area: 12 mm^2}}"));
    assert!(
        e.contains("test.yaml:3:") && e.contains("nodes.w.reservoir.level"),
        "{e}"
    );
    let e = refused(&two_node("{reservoir: {level: 2 mm, area: -12 mm^2}}"));
    assert!(
        e.contains("test.yaml:3:") && e.contains("positive area"),
        "{e}"
    );
    let e = refused(&two_node("{reservoir: {level: 2 mm}}"));
    assert!(
        e.contains("test.yaml:3:") && e.contains("needs its wetted cross-section"),
        "{e}"
    );
    let e = refused(&two_node(
        "{reservoir: {level: 2 mm, area: 1 mm^2}, elevation: 5 mm}",
    ));
    assert!(e.contains("below the well's bottom"), "{e}");
    let e = refused(&two_node(
        "{reservoir: {level: 2 mm, area: 1 mm^2, depth: 3 mm}}",
    ));
    assert!(e.contains("test.yaml:3:") && e.contains("depth"), "{e}");
    let e = refused(&two_node(
        "{reservoir: {level: 2 mm, area: 1 mm^2}, pressure: 5 Pa}",
    ));
    assert!(e.contains("nodes.w.pressure"), "{e}");
    let e = refused(&two_node("{pressure: 5 Pa, gas_volume: 2 uL}"));
    assert!(
        e.contains("nodes.w.gas_volume") && e.contains("stores nothing"),
        "{e}"
    );
    let e = refused(&two_node("{flow: 1 uL/min, gas_volume: 2 uL/min}"));
    assert!(
        e.contains("a volume flow rate") && e.contains("a volume"),
        "{e}"
    );
    let e = refused(&two_node("{compliance: 0 uL/bar}"));
    assert!(e.contains("nodes.w.compliance"), "{e}");
    let e = refused(&two_node(
        "{flow: 1 uL/min, gas_volume: 2 uL, compliance: 1 uL/bar}",
    ));
    assert!(e.contains("more than one"), "{e}");
}
