//! Networks with hand-derivable answers, checked against their closed forms.
//!
//! Channel resistances are computed here independently from Hagen–Poiseuille,
//! R = 8μL/(πa⁴) (Bruus, Theoretical Microfluidics, 2008, ch. 4), and the network answers
//! from circuit laws (series/parallel combination, nodal analysis by Cramer's rule, the
//! hyperbolic solution of a uniform ladder).

use approx::assert_relative_eq;
use rillnet::prelude::*;
use std::f64::consts::PI;

const MU: f64 = 1.0e-3;

fn fluid() -> Fluid {
    Fluid::constant(
        Viscosity::from_si(MU),
        rillnet::units::Density::from_si(1000.0),
    )
}

/// Hagen–Poiseuille resistance of a tube (Bruus 2008): R = 8μL/(πa⁴).
fn hp(diameter: f64, length: f64) -> f64 {
    let a = diameter / 2.0;
    8.0 * MU * length / (PI * a.powi(4))
}

struct Chip {
    b: NetworkBuilder,
}

impl Chip {
    fn new() -> Self {
        Chip {
            b: NetworkBuilder::new(fluid()),
        }
    }
    fn pressure(mut self, name: &str, pa: f64) -> Self {
        self.b
            .add_node(name, Port::Pressure(Pressure::from_si(pa)))
            .unwrap();
        self
    }
    fn flow(mut self, name: &str, q: f64) -> Self {
        self.b
            .add_node(name, Port::Flow(VolumeFlow::from_si(q)))
            .unwrap();
        self
    }
    fn junction(mut self, name: &str) -> Self {
        self.b.add_node(name, Port::Junction).unwrap();
        self
    }
    fn tube(mut self, name: &str, from: &str, to: &str, d: f64, l: f64) -> Self {
        let s = self
            .b
            .inline_section(
                name,
                Shape::Circle {
                    diameter: Length::from_si(d),
                },
            )
            .unwrap();
        self.b
            .add_channel(name, from, to, s, Length::from_si(l))
            .unwrap();
        self
    }
    fn solve(self) -> (Network, Vec<f64>, Vec<f64>) {
        let net = self.b.build().unwrap();
        let sol = solve(&net).unwrap();
        (net, sol.pressures, sol.flows)
    }
}

#[test]
fn series_pair() {
    // Series resistances add; the junction divides the pressure in proportion.
    let (d1, l1, d2, l2) = (100e-6, 0.01, 60e-6, 0.004);
    let p = 20_000.0;
    let (net, pr, q) = Chip::new()
        .pressure("in", p)
        .junction("mid")
        .pressure("out", 0.0)
        .tube("a", "in", "mid", d1, l1)
        .tube("b", "mid", "out", d2, l2)
        .solve();
    let (r1, r2) = (hp(d1, l1), hp(d2, l2));
    assert_relative_eq!(q[0], p / (r1 + r2), max_relative = 1e-12);
    assert_relative_eq!(q[1], p / (r1 + r2), max_relative = 1e-12);
    let mid = net.node_id("mid").unwrap().0;
    assert_relative_eq!(pr[mid], p * r2 / (r1 + r2), max_relative = 1e-12);
}

#[test]
fn parallel_branches_split_inversely_to_resistance() {
    let p = 5_000.0;
    let (_, _, q) = Chip::new()
        .pressure("in", p)
        .pressure("out", 0.0)
        .tube("a", "in", "out", 100e-6, 0.01)
        .tube("b", "in", "out", 80e-6, 0.02)
        .tube("c", "in", "out", 120e-6, 0.005)
        .solve();
    for (k, (d, l)) in [(100e-6, 0.01), (80e-6, 0.02), (120e-6, 0.005)]
        .into_iter()
        .enumerate()
    {
        assert_relative_eq!(q[k], p / hp(d, l), max_relative = 1e-12);
    }
}

#[test]
fn balanced_wheatstone_bridge_carries_no_bridge_flow() {
    // R1/R2 = R3/R4 ⇒ the bridge channel sees no pressure difference.
    let (_, _, q) = Chip::new()
        .pressure("in", 10_000.0)
        .pressure("out", 0.0)
        .junction("left")
        .junction("right")
        .tube("r1", "in", "left", 100e-6, 0.01)
        .tube("r2", "left", "out", 100e-6, 0.02)
        .tube("r3", "in", "right", 80e-6, 0.01)
        .tube("r4", "right", "out", 80e-6, 0.02)
        .tube("bridge", "left", "right", 50e-6, 0.003)
        .solve();
    assert!(q[4].abs() < 1e-12 * q[0].abs(), "bridge flow {}", q[4]);
}

#[test]
fn unbalanced_wheatstone_bridge_matches_nodal_analysis() {
    // Nodal analysis of the bridge by hand: two unknowns (left L, right Rt),
    //   (g1+g2+g5) L − g5 Rt = g1 P
    //   −g5 L + (g3+g4+g5) Rt = g3 P
    // solved by Cramer's rule.
    let p = 10_000.0;
    let dims = [
        (100e-6, 0.01),
        (90e-6, 0.015),
        (80e-6, 0.012),
        (110e-6, 0.02),
        (50e-6, 0.003),
    ];
    let g: Vec<f64> = dims.iter().map(|&(d, l)| 1.0 / hp(d, l)).collect();
    let (a11, a12, a22) = (g[0] + g[1] + g[4], -g[4], g[2] + g[3] + g[4]);
    let (b1, b2) = (g[0] * p, g[2] * p);
    let det = a11 * a22 - a12 * a12;
    let left = (b1 * a22 - a12 * b2) / det;
    let right = (a11 * b2 - a12 * b1) / det;
    let (net, pr, q) = Chip::new()
        .pressure("in", p)
        .pressure("out", 0.0)
        .junction("left")
        .junction("right")
        .tube("r1", "in", "left", dims[0].0, dims[0].1)
        .tube("r2", "left", "out", dims[1].0, dims[1].1)
        .tube("r3", "in", "right", dims[2].0, dims[2].1)
        .tube("r4", "right", "out", dims[3].0, dims[3].1)
        .tube("bridge", "left", "right", dims[4].0, dims[4].1)
        .solve();
    assert_relative_eq!(
        pr[net.node_id("left").unwrap().0],
        left,
        max_relative = 1e-12
    );
    assert_relative_eq!(
        pr[net.node_id("right").unwrap().0],
        right,
        max_relative = 1e-12
    );
    assert_relative_eq!(q[4], g[4] * (left - right), max_relative = 1e-10);
}

#[test]
fn uniform_ladder_matches_hyperbolic_solution() {
    // Rail segments R between t(k−1) and t(k), rungs Rs from t(k) to the outlet, k = 1..N.
    // Interior balance p(k−1) − 2p(k) + p(k+1) = (R/Rs) p(k) and the end condition give
    // p(k) = P·cosh((N − k + ½)γ)/cosh((N + ½)γ), cosh γ = 1 + R/(2Rs)
    // (the classic solution of a uniform resistive ladder, derived in this test's docs).
    let n = 12;
    let p = 8_000.0;
    let (rail_d, rail_l, rung_d, rung_l) = (150e-6, 0.002, 60e-6, 0.01);
    let r = hp(rail_d, rail_l);
    let rs = hp(rung_d, rung_l);
    let gamma = (1.0 + r / (2.0 * rs)).acosh();
    let mut chip = Chip::new().pressure("t0", p).pressure("ground", 0.0);
    for k in 1..=n {
        chip = chip.junction(&format!("t{k}"));
    }
    for k in 1..=n {
        chip = chip
            .tube(
                &format!("rail{k}"),
                &format!("t{}", k - 1),
                &format!("t{k}"),
                rail_d,
                rail_l,
            )
            .tube(
                &format!("rung{k}"),
                &format!("t{k}"),
                "ground",
                rung_d,
                rung_l,
            );
    }
    let (net, pr, q) = chip.solve();
    for k in 1..=n {
        let expected =
            p * ((n as f64 - k as f64 + 0.5) * gamma).cosh() / ((n as f64 + 0.5) * gamma).cosh();
        let node = net.node_id(&format!("t{k}")).unwrap().0;
        assert_relative_eq!(pr[node], expected, max_relative = 1e-10);
        let rung = net.channel_id(&format!("rung{k}")).unwrap().0;
        assert_relative_eq!(q[rung], expected / rs, max_relative = 1e-10);
    }
}

#[test]
fn flow_driven_port_needs_the_closed_form_pressure() {
    // A pump pushes Q through a tube into two parallel tubes to the outlet:
    // p_pump = Q·(R0 + R1·R2/(R1 + R2)).
    let qin = 5e-9 / 60.0; // 5 µL/min in m³/s
    let (net, pr, q) = Chip::new()
        .flow("pump", qin)
        .junction("tee")
        .pressure("out", 0.0)
        .tube("feed", "pump", "tee", 100e-6, 0.02)
        .tube("a", "tee", "out", 80e-6, 0.01)
        .tube("b", "tee", "out", 60e-6, 0.01)
        .solve();
    let (r0, r1, r2) = (hp(100e-6, 0.02), hp(80e-6, 0.01), hp(60e-6, 0.01));
    let expected = qin * (r0 + r1 * r2 / (r1 + r2));
    assert_relative_eq!(
        pr[net.node_id("pump").unwrap().0],
        expected,
        max_relative = 1e-12
    );
    assert_relative_eq!(q[0], qin, max_relative = 1e-12);
    assert_relative_eq!(q[1] / q[2], r2 / r1, max_relative = 1e-12);
}

/// The worked example of both rectangle checks: water at 20 °C (μ = 1.0016 mPa·s, IAPWS
/// R12-08) pumped at 1 µL/min through one 100 µm × 50 µm channel of 1 cm to an outlet.
fn worked_example() -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    b.add_node("pump", Port::Flow(VolumeFlow::from_si(1e-9 / 60.0)))
        .unwrap();
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let s = b
        .add_section(
            "r",
            Shape::Rectangle {
                width: Length::from_si(100e-6),
                height: Length::from_si(50e-6),
            },
        )
        .unwrap();
    b.add_channel("c", "pump", "out", s, Length::from_si(0.01))
        .unwrap();
    b.build().unwrap()
}

#[test]
fn rectangle_network_uses_the_series_resistance() {
    // One rectangular channel: R = μL/K with K from the exact series; checked against the
    // worked value R = 1.40156e13 Pa·s/m³ for water (μ = 1.0016 mPa·s, IAPWS R12-08) in a
    // 100 µm × 50 µm channel of 1 cm (computed from Bruus 2008, eq. 3.56).
    let net = worked_example();
    let sol = solve(&net).unwrap();
    // At 1 µL/min the drop is 233.59 Pa (same worked example).
    assert_relative_eq!(sol.pressures[0], 233.59, max_relative = 2e-5);
}

#[test]
fn circular_wall_shear_is_hagen_poiseuille() {
    // Hagen–Poiseuille wall shear in a tube of radius r: τ = 4μQ/(πr³) (Bruus 2008, ch. 4),
    // uniform around the wall, so mean = max.
    let (d, l, qin) = (80e-6, 0.01, 2e-9 / 60.0);
    let mut b = NetworkBuilder::new(fluid());
    b.add_node("pump", Port::Flow(VolumeFlow::from_si(qin)))
        .unwrap();
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let s = b
        .add_section(
            "t",
            Shape::Circle {
                diameter: Length::from_si(d),
            },
        )
        .unwrap();
    b.add_channel("c", "pump", "out", s, Length::from_si(l))
        .unwrap();
    let net = b.build().unwrap();
    let st = rillnet::analysis::steady_state(&net).unwrap();
    let r = d / 2.0;
    let tau = 4.0 * MU * qin / (PI * r.powi(3));
    assert_relative_eq!(st.channels[0].wall_shear_max, tau, max_relative = 1e-12);
    assert_relative_eq!(st.channels[0].wall_shear_mean, tau, max_relative = 1e-12);
}

#[test]
fn rectangle_wall_shear_mean_is_force_balance_and_max_is_series() {
    // Worked example (computed from the rectangle series, Bruus 2008 eq. 3.56, and its wall
    // derivative): water μ = 1.0016 mPa·s, 100 µm × 50 µm, L = 1 cm, Q = 1 µL/min:
    // ΔP = 233.59 Pa, mean wall shear 0.38932 Pa, maximum 0.54314 Pa.
    let net = worked_example();
    let st = rillnet::analysis::steady_state(&net).unwrap();
    let c = &st.channels[0];
    // Force balance, exact for any shape: τ_mean = G·A/P.
    let g = c.pressure_drop / 0.01;
    assert_relative_eq!(
        c.wall_shear_mean,
        g * (100e-6 * 50e-6) / (2.0 * 150e-6),
        max_relative = 1e-14
    );
    assert_relative_eq!(c.wall_shear_mean, 0.38932, max_relative = 2e-5);
    assert_relative_eq!(c.wall_shear_max, 0.54314, max_relative = 2e-5);
}

#[test]
fn entrance_length_correlations() {
    // Durst et al. (2005), J. Fluids Eng. 127, 1154: L/D = [0.619^1.6 + (0.0567 Re)^1.6]^(1/1.6);
    // at Re = 1 it gives 0.627; its creeping-flow limit is 0.619 and its high-Re slope 0.0567.
    let durst = rillnet::analysis::entrance_length_ratio(1.0);
    assert!((durst - 0.627).abs() < 5e-4, "{durst}");
    assert!((rillnet::analysis::entrance_length_ratio(0.0) - 0.619).abs() < 1e-12);
    let high = rillnet::analysis::entrance_length_ratio(2000.0);
    assert!((high / 2000.0 - 0.0567).abs() < 1e-4, "{high}");
    // The older correlation of Chen (1973), L/D = 0.60/(1 + 0.035 Re) + 0.056 Re (0.636 at
    // Re = 1), differs from Durst by at most about 9 % (worst near Re ≈ 8, computed): the
    // two published fits bracket the uncertainty of the entrance length itself.
    for re in [0.0, 1.0, 8.0, 10.0, 100.0, 1000.0, 2000.0] {
        let chen = 0.60 / (1.0 + 0.035 * re) + 0.056 * re;
        let d = rillnet::analysis::entrance_length_ratio(re);
        assert!((d - chen).abs() / chen < 0.095, "Re {re}: {d} vs {chen}");
    }
}
