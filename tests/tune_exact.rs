//! Tuning solved exactly: compromises against an independent solve of the same weighted
//! problem, targets no port can move, free directions, limits as constraints, wall-shear
//! targets, verdicts and exit codes.
//!
//! Physics used by the hand derivations: Kirchhoff's laws with Hagen–Poiseuille-type linear
//! resistances (Bruus, *Theoretical Microfluidics* 2008, ch. 4): parallel branches of equal
//! resistance share a flow equally; resistances in series add, in parallel add as conductances.
//! Wall shear of a fully developed flow: τ_max = (τ_max/G)·|Δp|/L (force balance on the section;
//! Shah & London 1978 for the rectangle's shape factor).

mod common;

use common::{json_of, rillnet};
use rillnet::analysis::design::{
    self, Adjustable, Design, NotControllable, Target, TargetKind, Tolerance,
};
use rillnet::prelude::*;
use rillnet::units::Density;
use std::path::{Path, PathBuf};

const UL_MIN: f64 = 1e-9 / 60.0;

fn fluid() -> Fluid {
    Fluid::constant(Viscosity::from_si(1e-3), Density::from_si(1000.0))
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn target(kind: TargetKind, weight: f64) -> Target {
    Target {
        kind,
        weight,
        tolerance: Tolerance::default(),
    }
}

/// The pump-only splitter: a syringe pump into two equal chambers to one outlet.
const PUMP_SPLITTER: &str = "\
name: pump-only splitter
fluid: {model: water, temperature: 20 degC}
sections:
  chamber: {shape: rectangle, width: 500 um, height: 50 um}
nodes:
  pump: {flow: 3 uL/min, adjust: {min: 0 uL/min, max: 20 uL/min}}
  split: {}
  waste: {pressure: 0 Pa}
channels:
  feed: {from: pump, to: split, section: chamber, length: 5 mm}
  chamber_a: {from: split, to: waste, section: chamber, length: 10 mm}
  chamber_b: {from: split, to: waste, section: chamber, length: 10 mm}
targets:
  - {channel: chamber_a, flow: 2 uL/min}
  - {split: [chamber_a, chamber_b], ratio: [1, 3]}
";

#[test]
fn pump_only_splitter_meets_the_flow_exactly_and_the_split_is_not_controllable() {
    // Equal chambers split the pump's flow 1:1 whatever the pump does (Kirchhoff), so the
    // 1:3 split is out of reach of the only adjustable port, and 2 µL/min in chamber_a needs
    // exactly 4 µL/min from the pump.
    let dir = tempfile::tempdir().unwrap();
    let chip = write(dir.path(), "chip.yaml", PUMP_SPLITTER);
    let loaded = rillnet::load_chip(&chip).unwrap();
    let r = design::tune(&loaded.network, &loaded.design).unwrap();
    let pump = r.settings[0].after / UL_MIN;
    assert!((pump - 4.0).abs() <= 1e-12 * 4.0, "pump {pump} µL/min");
    assert!(r.targets[0].met && r.targets[0].controllable);
    assert!(!r.targets[1].controllable);
    assert_eq!(
        r.targets[1].not_controllable,
        Some(NotControllable::FixedShares)
    );
    assert!(!r.targets[1].met);
    assert!(!r.all_targets_met);

    // The command says so and exits 1 (a target is not met).
    let out = rillnet()
        .args(["tune", "--format", "json"])
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], false);
    assert_eq!(v["targets"][0]["met"], true);
    assert_eq!(v["targets"][1]["controllable"], false);
    assert_eq!(v["targets"][1]["met"], false);
    assert_eq!(v["targets"][1]["not_controllable_reason"], "fixed_shares");
    let after = v["settings"][0]["after_si"].as_f64().unwrap() / UL_MIN;
    assert!((after - 4.0).abs() <= 1e-12 * 4.0, "{after}");
    let table = rillnet().arg("tune").arg(&chip).output().unwrap();
    let text = String::from_utf8_lossy(&table.stdout);
    assert!(text.contains("NOT MET, NOT CONTROLLABLE"), "{text}");
}

#[test]
fn exit_codes_follow_the_verdict() {
    // Met: the perfusion example (two controllers, a flow and a 1:1 split, reachable).
    let out = rillnet()
        .args(["tune", "--format", "json", "networks/perfusion_tuning.yaml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], true);
    assert!(v["targets"]
        .as_array()
        .unwrap()
        .iter()
        .all(|t| t["met"] == true && t["controllable"] == true));
    assert_eq!(v["active_limits"], serde_json::json!([]));
    // Not met: a flow beyond the bounds of the controllers.
    let dir = tempfile::tempdir().unwrap();
    let base = std::fs::read_to_string("networks/perfusion_tuning.yaml").unwrap();
    let chip = write(
        dir.path(),
        "c.yaml",
        &base.replacen("flow: 20 uL/min", "flow: 20000 uL/min", 1),
    );
    let out = rillnet()
        .args(["tune", "--format", "json"])
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], false);
    // size: the gradient splitter is met (exit 0); asking for 1:2:9 with lane_3 fixed and the
    // bounds of lane_1/lane_2 is not (exit 1).
    let out = rillnet()
        .args([
            "size",
            "--format",
            "json",
            "networks/gradient_splitter_sizing.yaml",
        ])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], true);
    let base = std::fs::read_to_string("networks/gradient_splitter_sizing.yaml").unwrap();
    let chip = write(
        dir.path(),
        "s.yaml",
        &base.replacen("ratio: [1, 2, 2]", "ratio: [1, 2, 900]", 1),
    );
    let out = rillnet()
        .args(["size", "--format", "json"])
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], false);
}

/// Two pressure controllers into a Y that drains to an outlet (all channels equal).
fn y_network() -> Network {
    let mut b = NetworkBuilder::new(fluid());
    b.add_node("p1", Port::Pressure(Pressure::from_si(5000.0)))
        .unwrap();
    b.add_node("p2", Port::Pressure(Pressure::from_si(3000.0)))
        .unwrap();
    b.add_node("j", Port::Junction).unwrap();
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let s = b
        .add_section(
            "s",
            Shape::Rectangle {
                width: Length::from_si(100e-6),
                height: Length::from_si(50e-6),
            },
        )
        .unwrap();
    b.add_channel("c1", "p1", "j", s, Length::from_si(10e-3))
        .unwrap();
    b.add_channel("c2", "p2", "j", s, Length::from_si(14e-3))
        .unwrap();
    b.add_channel("c3", "j", "out", s, Length::from_si(10e-3))
        .unwrap();
    b.build().unwrap()
}

/// min ‖A·x − r‖² over lo ≤ x ≤ hi for two variables, exactly, by enumerating the faces of
/// the box: the interior, the four edges (one variable at a bound, the other minimised and
/// kept inside) and the four corners; the least objective among the feasible candidates is
/// the optimum of the convex problem (KKT case analysis; e.g. Nocedal & Wright, *Numerical
/// Optimization* 2006, §16.5 — the optimum is the minimiser over some face of the box).
fn box_lsq_2(a: &[[f64; 2]], r: &[f64], lo: [f64; 2], hi: [f64; 2]) -> [f64; 2] {
    let obj = |x: [f64; 2]| -> f64 {
        a.iter()
            .zip(r)
            .map(|(row, ri)| (row[0] * x[0] + row[1] * x[1] - ri).powi(2))
            .sum()
    };
    let (mut h00, mut h01, mut h11, mut g0, mut g1) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (row, ri) in a.iter().zip(r) {
        h00 += row[0] * row[0];
        h01 += row[0] * row[1];
        h11 += row[1] * row[1];
        g0 += row[0] * ri;
        g1 += row[1] * ri;
    }
    let mut cands: Vec<[f64; 2]> = Vec::new();
    let det = h00 * h11 - h01 * h01;
    cands.push([(g0 * h11 - g1 * h01) / det, (h00 * g1 - h01 * g0) / det]);
    for x0 in [lo[0], hi[0]] {
        cands.push([x0, ((g1 - h01 * x0) / h11).clamp(lo[1], hi[1])]);
    }
    for x1 in [lo[1], hi[1]] {
        cands.push([((g0 - h01 * x1) / h00).clamp(lo[0], hi[0]), x1]);
    }
    for x0 in [lo[0], hi[0]] {
        for x1 in [lo[1], hi[1]] {
            cands.push([x0, x1]);
        }
    }
    cands
        .into_iter()
        .filter(|x| (0..2).all(|i| x[i] >= lo[i] && x[i] <= hi[i]))
        .min_by(|x, y| obj(*x).total_cmp(&obj(*y)))
        .unwrap()
}

#[test]
fn compromises_equal_an_independent_bounded_least_squares_solve() {
    // Contradictory targets on the Y (c3 carries c1 + c2): flows 3, 1 and 10 µL/min, a split
    // of c1:c2 in 1:2, different weights, and bounds that may cut the optimum. The weighted
    // problem is built here from unit responses of full solves, with the documented scales:
    // flow rows (q − q*)/|q*|; split rows (q_i − ρ_i·Σq)/Q_ref with Q_ref = Σ_c (|q⁰_c| +
    // Σ_j s_j·|∂q_c/∂x_j|), s_j = max(|min|, |max|, |file setting|); weights √w.
    let net = y_network();
    let flow = |c: usize, ul: f64, w: f64| {
        target(
            TargetKind::ChannelFlow {
                channel: ChannelId(c),
                flow: ul * UL_MIN,
            },
            w,
        )
    };
    let mut bounded = 0;
    for (lo, hi) in [
        (0.0, 50_000.0),
        (0.0, 1_500.0),
        (1_500.0, 4_000.0),
        (1_000.0, 1_740.0),
    ] {
        let design = Design {
            targets: vec![
                flow(0, 3.0, 1.0),
                flow(1, 1.0, 2.0),
                flow(2, 10.0, 0.5),
                target(
                    TargetKind::Split {
                        channels: vec![ChannelId(0), ChannelId(1)],
                        ratio: vec![1.0, 2.0],
                    },
                    1.5,
                ),
            ],
            adjustable: vec![
                Adjustable {
                    node: NodeId(0),
                    min: lo,
                    max: hi,
                },
                Adjustable {
                    node: NodeId(1),
                    min: lo,
                    max: hi,
                },
            ],
            sizes: vec![],
        };
        let r = design::tune(&net, &design).unwrap();
        // Unit responses by full solves (outlet at 0 Pa, so no fixed-port part).
        let at = |p1: f64, p2: f64| {
            let mut n = net.clone();
            n.nodes[NodeId(0)].port = Port::Pressure(Pressure::from_si(p1));
            n.nodes[NodeId(1)].port = Port::Pressure(Pressure::from_si(p2));
            solve(&n).unwrap().flows
        };
        let (u1, u2) = (at(1.0, 0.0), at(0.0, 1.0));
        let s = [
            lo.abs().max(hi.abs()).max(5000.0),
            lo.abs().max(hi.abs()).max(3000.0),
        ];
        let mut a: Vec<[f64; 2]> = Vec::new();
        let mut rhs: Vec<f64> = Vec::new();
        for (c, q, w) in [(0, 3.0, 1.0), (1, 1.0, 2.0), (2, 10.0, 0.5)] {
            let k = f64::sqrt(w) / (q * UL_MIN);
            a.push([u1[c] * k, u2[c] * k]);
            rhs.push(q * UL_MIN * k);
        }
        let qref: f64 = [0, 1]
            .iter()
            .map(|&c| s[0] * u1[c].abs() + s[1] * u2[c].abs())
            .sum();
        for (i, share) in [(0usize, 1.0 / 3.0), (1, 2.0 / 3.0)] {
            let k = f64::sqrt(1.5) / qref;
            let row = |u: &[f64]| (u[i] - share * (u[0] + u[1])) * k;
            a.push([row(&u1), row(&u2)]);
            rhs.push(0.0);
        }
        let x = box_lsq_2(&a, &rhs, [lo, lo], [hi, hi]);
        for (j, (setting, xj)) in r.settings.iter().zip(x).enumerate() {
            assert!(
                (setting.after - xj).abs() <= 1e-9 * xj.abs().max(1.0),
                "bounds [{lo}, {hi}]: port {j}: tuned {} vs independent {xj}",
                setting.after,
            );
        }
        assert!(!r.all_targets_met);
        bounded += r.settings.iter().filter(|s| s.at_bound != 0).count();
        eprintln!(
            "bounds [{lo}, {hi}]: {:?}",
            r.settings
                .iter()
                .map(|s| (s.after, s.at_bound))
                .collect::<Vec<_>>()
        );
    }
    // At least one of the cases has its optimum on a bound (so the bounds are exercised).
    assert!(bounded > 0);
}

/// A mirror-symmetric tree fed by four pressure controllers: in_1, in_2 → left; in_3, in_4 →
/// right; left, right → root → outlet.
const SYMMETRIC_TREE: &str = "\
name: mirror-symmetric tree
fluid: {model: water, temperature: 20 degC}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  in_1: {pressure: 40 mbar, adjust: {min: 0 mbar, max: 500 mbar}}
  in_2: {pressure: 40 mbar, adjust: {min: 0 mbar, max: 500 mbar}}
  in_3: {pressure: 40 mbar, adjust: {min: 0 mbar, max: 500 mbar}}
  in_4: {pressure: 40 mbar, adjust: {min: 0 mbar, max: 500 mbar}}
  left: {}
  right: {}
  root: {}
  out: {pressure: 0 Pa}
channels:
  leaf_1: {from: in_1, to: left, section: s, length: 8 mm}
  leaf_2: {from: in_2, to: left, section: s, length: 8 mm}
  leaf_3: {from: in_3, to: right, section: s, length: 8 mm}
  leaf_4: {from: in_4, to: right, section: s, length: 8 mm}
  branch_l: {from: left, to: root, section: s, length: 6 mm}
  branch_r: {from: right, to: root, section: s, length: 6 mm}
  trunk: {from: root, to: out, section: s, length: 5 mm}
targets:
  - {channel: trunk, flow: 10 uL/min}
  - {split: [branch_l, branch_r], ratio: [1, 1]}
";

#[test]
fn symmetric_tree_gets_symmetric_settings() {
    // Two targets, four ports: the targets see only the total and the left/right balance, so
    // two directions are free and take the least change from the file's equal settings. By
    // symmetry every inlet then sits at the same pressure p, and with equal inlets the tree is
    // a series of parallel groups: p = Q·(R_leaf/4 + R_branch/2 + R_trunk), R ∝ length for one
    // section (Bruus 2008, ch. 4).
    let dir = tempfile::tempdir().unwrap();
    let chip = write(dir.path(), "tree.yaml", SYMMETRIC_TREE);
    let loaded = rillnet::load_chip(&chip).unwrap();
    let r = design::tune(&loaded.network, &loaded.design).unwrap();
    let p: Vec<f64> = r.settings.iter().map(|s| s.after).collect();
    for pi in &p[1..] {
        assert!((pi - p[0]).abs() <= 1e-9 * p[0], "{p:?}");
    }
    let net = &loaded.network;
    let res = |name: &str| net.resistance(net.channel_id(name).unwrap());
    let expected = 10.0 * UL_MIN * (res("leaf_1") / 4.0 + res("branch_l") / 2.0 + res("trunk"));
    assert!(
        (p[0] - expected).abs() <= 1e-9 * expected,
        "{} vs {expected}",
        p[0]
    );
    assert!(r.all_targets_met);
    // The free directions are named: all four ports, and both targets depend on them.
    assert_eq!(r.free_directions.len(), 1);
    assert_eq!(r.free_directions[0].ports.len(), 4);
    assert_eq!(r.free_directions[0].targets, vec![0, 1]);
    eprintln!("symmetric tree settings [Pa]: {p:?}, expected {expected}");
}

#[test]
fn free_direction_keeps_the_files_difference() {
    // One target on the Y's outlet flow, two ports: the direction p1 − p2 is free. The least
    // change from the file's (5000, 3000) Pa moves both ports by the same amount δ (the
    // change is along the target's gradient, which for c1 and c2 of lengths 10 and 14 mm is
    // (g1, g2)·g3/(g1 + g2 + g3) ∝ (1/10, 1/14)), so (p1 − 5000)/(p2 − 3000) = 14/10.
    let net = y_network();
    let design = Design {
        targets: vec![target(
            TargetKind::ChannelFlow {
                channel: ChannelId(2),
                flow: 5.0 * UL_MIN,
            },
            1.0,
        )],
        adjustable: vec![
            Adjustable {
                node: NodeId(0),
                min: 0.0,
                max: 50_000.0,
            },
            Adjustable {
                node: NodeId(1),
                min: 0.0,
                max: 50_000.0,
            },
        ],
        sizes: vec![],
    };
    let r = design::tune(&net, &design).unwrap();
    let d1 = r.settings[0].after - 5000.0;
    let d2 = r.settings[1].after - 3000.0;
    assert!((d1 / d2 - 14.0 / 10.0).abs() < 1e-9, "{d1} {d2}");
    assert!(r.all_targets_met);
}

/// A controller feeding a chamber with a wall-shear limit, and a flow target too high for it.
const SHEAR_LIMITED: &str = "\
name: shear-limited chamber
fluid: {model: water, temperature: 20 degC}
sections:
  feed: {shape: rectangle, width: 200 um, height: 60 um}
  chamber: {shape: rectangle, width: 400 um, height: 60 um}
nodes:
  source: {pressure: 20 mbar, adjust: {min: 0 mbar, max: 400 mbar}}
  inlet: {}
  waste: {pressure: 0 Pa}
channels:
  feed: {from: source, to: inlet, section: feed, length: 10 mm}
  chamber: {from: inlet, to: waste, section: chamber, length: 8 mm, shear_limit: 0.5 Pa}
targets:
  - {channel: chamber, flow: 50 uL/min}
";

#[test]
fn active_shear_limit_holds_in_the_written_copy() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write(dir.path(), "chip.yaml", SHEAR_LIMITED);
    let tuned = dir.path().join("tuned.yaml");
    let out = rillnet()
        .args(["tune", "--format", "json", "--output"])
        .arg(&tuned)
        .arg(&chip)
        .output()
        .unwrap();
    // The flow target is out of reach within the limit: exit 1, the limit active.
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], false);
    assert_eq!(v["active_limits"], serde_json::json!(["chamber"]));
    assert_eq!(v["limits_exceeded"], serde_json::json!([]));
    // The copy, read back by `solve`: the chamber's maximum wall shear is at the limit and
    // not above it (within 1e-9 relative), and `check` passes.
    let solved = json_of(&tuned);
    let chamber = solved["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "chamber")
        .unwrap()
        .clone();
    let tau = chamber["wall_shear_max_pa"].as_f64().unwrap();
    assert!(tau <= 0.5 * (1.0 + 1e-9), "{tau}");
    assert!(
        tau >= 0.5 * (1.0 - 1e-6),
        "the limit should be active: {tau}"
    );
    let check = rillnet().arg("check").arg(&tuned).output().unwrap();
    assert_eq!(check.status.code(), Some(0));

    // With --ignore-limits the target is met and the limit exceeded: still exit 1.
    let out = rillnet()
        .args(["tune", "--format", "json", "--ignore-limits"])
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["all_targets_met"], true);
    assert_eq!(v["limits"], "ignored");
    assert_eq!(v["limits_exceeded"], serde_json::json!(["chamber"]));
}

#[test]
fn wall_shear_targets_are_reached_to_tolerance() {
    // A wall-shear target instead of the flow: 0.4 Pa maximum (then 0.2 Pa mean) in the
    // chamber, under its 0.5 Pa limit. Read back by `solve`, the copy's shear is within the
    // default 1e-6 relative of the target.
    let dir = tempfile::tempdir().unwrap();
    for (line, key, wanted) in [
        (
            "{channel: chamber, wall_shear: 0.4 Pa}",
            "wall_shear_max_pa",
            0.4,
        ),
        (
            "{channel: chamber, wall_shear_mean: 0.2 Pa, tolerance: 1e-7}",
            "wall_shear_mean_pa",
            0.2,
        ),
    ] {
        let text = SHEAR_LIMITED.replacen("{channel: chamber, flow: 50 uL/min}", line, 1);
        let chip = write(dir.path(), &format!("{key}.yaml"), &text);
        let tuned = dir.path().join(format!("{key}.tuned.yaml"));
        let out = rillnet()
            .args(["tune", "--format", "json", "--output"])
            .arg(&tuned)
            .arg(&chip)
            .output()
            .unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stdout)
        );
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        assert_eq!(v["all_targets_met"], true);
        let solved = json_of(&tuned);
        let tau = solved["channels"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == "chamber")
            .unwrap()[key]
            .as_f64()
            .unwrap();
        let tol = v["targets"][0]["tolerance_relative"].as_f64().unwrap();
        assert!((tau - wanted).abs() <= tol * wanted, "{key}: {tau}");
    }
}

#[test]
fn tolerances_are_read_and_refused_where_they_do_not_fit() {
    let dir = tempfile::tempdir().unwrap();
    for (tol, ok) in [
        ("1 %", true),
        ("0.001", true),
        ("0.5 uL/min", true),
        ("5 mbar", false),
        ("-1 %", false),
    ] {
        let text = SHEAR_LIMITED.replacen(
            "{channel: chamber, flow: 50 uL/min}",
            &format!("{{channel: chamber, flow: 5 uL/min, tolerance: {tol}}}"),
            1,
        );
        let chip = write(dir.path(), "t.yaml", &text);
        let out = rillnet().arg("tune").arg(&chip).output().unwrap();
        assert_eq!(out.status.code() == Some(2), !ok, "{tol}: {:?}", out);
    }
}

#[test]
fn badly_conditioned_directions_are_named() {
    // Two targets on the Y: the outlet flow (weight 1) and c1's flow with weight 1e-14. The
    // second row is √1e-14 = 1e-7 the size of the first, so the response matrix has a
    // singular value ratio of order 1e-7 (< 1e-6): that direction is reported as weak (not
    // free: it is still solved exactly), with both ports and both targets.
    let net = y_network();
    let design = Design {
        targets: vec![
            target(
                TargetKind::ChannelFlow {
                    channel: ChannelId(2),
                    flow: 5.0 * UL_MIN,
                },
                1.0,
            ),
            target(
                TargetKind::ChannelFlow {
                    channel: ChannelId(0),
                    flow: 3.0 * UL_MIN,
                },
                1e-14,
            ),
        ],
        adjustable: vec![
            Adjustable {
                node: NodeId(0),
                min: 0.0,
                max: 50_000.0,
            },
            Adjustable {
                node: NodeId(1),
                min: 0.0,
                max: 50_000.0,
            },
        ],
        sizes: vec![],
    };
    let r = design::tune(&net, &design).unwrap();
    assert_eq!(r.free_directions.len(), 1, "{:?}", r.free_directions);
    let d = &r.free_directions[0];
    assert!(!d.free);
    assert!(
        d.singular_value_ratio < 1e-6 && d.singular_value_ratio > 1e-9,
        "{d:?}"
    );
    assert_eq!(d.ports, vec![NodeId(0), NodeId(1)]);
    assert_eq!(d.targets, vec![0, 1]);
    // Both targets are reachable, and are reached.
    assert!(r.all_targets_met, "{:?}", r.targets);
}
