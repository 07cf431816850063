//! Design answers: tuning drives, sizing channels, adjoint sensitivities.
//! Closed forms: parallel branches to a common outlet split inversely to their resistances
//! (Kirchhoff; e.g. Bruus, Theoretical Microfluidics 2008, ch. 4), and for equal sections the
//! resistance is proportional to length (Hagen–Poiseuille / rectangle series).

mod common;

use common::{channel_flow, json_of, rillnet, run_json};
use rillnet::analysis::design::{
    self, Adjustable, Design, SizeDim, SizeVar, Target, TargetKind, Tolerance,
};
use rillnet::analysis::kirchhoff::{balance_residuals, conductances, Solver, RESIDUAL_LIMIT};
use rillnet::prelude::*;
use rillnet::units::Density;

fn fluid() -> Fluid {
    Fluid::constant(Viscosity::from_si(1e-3), Density::from_si(1000.0))
}

fn rect(b: &mut NetworkBuilder, name: &str, w: f64) -> rillnet::network::SectionId {
    b.add_section(
        name,
        Shape::Rectangle {
            width: Length::from_si(w),
            height: Length::from_si(50e-6),
        },
    )
    .unwrap()
}

/// Pump → junction → two branches (lengths la, lb) → outlet.
fn two_branches(la: f64, lb: f64) -> Network {
    let mut b = NetworkBuilder::new(fluid());
    b.add_node("pump", Port::Flow(VolumeFlow::from_si(1e-10)))
        .unwrap();
    b.add_node("j", Port::Junction).unwrap();
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let s = rect(&mut b, "r", 100e-6);
    b.add_channel("feed", "pump", "j", s, Length::from_si(5e-3))
        .unwrap();
    b.add_channel("a", "j", "out", s, Length::from_si(la))
        .unwrap();
    b.add_channel("b", "j", "out", s, Length::from_si(lb))
        .unwrap();
    b.build().unwrap()
}

#[test]
fn two_branches_split_inversely_and_sizing_finds_the_closed_form_length() {
    let net = two_branches(10e-3, 10e-3);
    let sol = solve(&net).unwrap();
    // Equal branches: equal flows. Flows split inversely to resistance: qa/qb = Rb/Ra.
    assert!((sol.flows[1] / sol.flows[2] - 1.0).abs() < 1e-12);
    let net2 = two_branches(12e-3, 8e-3);
    let s2 = solve(&net2).unwrap();
    assert!((s2.flows[1] / s2.flows[2] - 8.0 / 12.0).abs() < 1e-12);

    // Size branch a for a 1:2 split (a:b) with b = 10 mm: closed form R_a = 2R_b ⇒ L_a = 20 mm.
    let net = two_branches(10e-3, 10e-3);
    let problem = Design {
        targets: vec![Target {
            kind: TargetKind::Split {
                channels: vec![ChannelId(1), ChannelId(2)],
                ratio: vec![1.0, 2.0],
            },
            weight: 1.0,
            tolerance: Tolerance::default(),
        }],
        adjustable: vec![],
        sizes: vec![SizeVar {
            channel: ChannelId(1),
            dim: SizeDim::Length,
            min: 1e-3,
            max: 100e-3,
            step: None,
        }],
    };
    let r = design::size(&net, &problem).unwrap();
    assert!(r.all_targets_met);
    assert!(
        (r.sizes[0].after - 20e-3).abs() < 1e-9 * 20e-3,
        "{}",
        r.sizes[0].after
    );
}

/// Symmetric binary tree: pump → root → two → four leaves → outlet.
fn tree(perturb: f64) -> Network {
    let mut b = NetworkBuilder::new(fluid());
    b.add_node("pump", Port::Flow(VolumeFlow::from_si(2e-10)))
        .unwrap();
    for n in ["root", "l", "r"] {
        b.add_node(n, Port::Junction).unwrap();
    }
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let s = rect(&mut b, "s", 100e-6);
    let l = |x: f64| Length::from_si(x);
    b.add_channel("trunk", "pump", "root", s, l(5e-3)).unwrap();
    b.add_channel("to_l", "root", "l", s, l(6e-3)).unwrap();
    b.add_channel("to_r", "root", "r", s, l(6e-3)).unwrap();
    b.add_channel("leaf_ll", "l", "out", s, l(8e-3 * (1.0 + perturb)))
        .unwrap();
    b.add_channel("leaf_lr", "l", "out", s, l(8e-3)).unwrap();
    b.add_channel("leaf_rl", "r", "out", s, l(8e-3)).unwrap();
    b.add_channel("leaf_rr", "r", "out", s, l(8e-3)).unwrap();
    b.build().unwrap()
}

#[test]
fn symmetric_tree_is_equal_and_sizing_restores_equality() {
    let sol = solve(&tree(0.0)).unwrap();
    for k in 4..7 {
        assert!((sol.flows[k] / sol.flows[3] - 1.0).abs() < 1e-12);
    }
    let net = tree(0.3);
    let before = solve(&net).unwrap();
    assert!((before.flows[3] / before.flows[4] - 1.0).abs() > 0.1);
    let problem = Design {
        targets: vec![Target {
            kind: TargetKind::Split {
                channels: vec![ChannelId(3), ChannelId(4), ChannelId(5), ChannelId(6)],
                ratio: vec![1.0; 4],
            },
            weight: 1.0,
            tolerance: Tolerance::default(),
        }],
        adjustable: vec![],
        sizes: vec![SizeVar {
            channel: ChannelId(3),
            dim: SizeDim::Length,
            min: 1e-3,
            max: 50e-3,
            step: None,
        }],
    };
    let r = design::size(&net, &problem).unwrap();
    assert!(r.all_targets_met, "{:?}", r.targets);
    // Equality is restored by returning the perturbed leaf to the others' 8 mm.
    assert!(
        (r.sizes[0].after - 8e-3).abs() < 1e-9 * 8e-3,
        "{}",
        r.sizes[0].after
    );
}

/// Two pressure controllers into a Y, with targets.
/// Two pressure ports p1, p2 into a Y that drains to an outlet.
fn y_network(p1: f64, p2: f64) -> Network {
    let mut b = NetworkBuilder::new(fluid());
    b.add_node("p1", Port::Pressure(Pressure::from_si(p1)))
        .unwrap();
    b.add_node("p2", Port::Pressure(Pressure::from_si(p2)))
        .unwrap();
    b.add_node("j", Port::Junction).unwrap();
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let s = rect(&mut b, "s", 100e-6);
    b.add_channel("c1", "p1", "j", s, Length::from_si(10e-3))
        .unwrap();
    b.add_channel("c2", "p2", "j", s, Length::from_si(10e-3))
        .unwrap();
    b.add_channel("c3", "j", "out", s, Length::from_si(10e-3))
        .unwrap();
    b.build().unwrap()
}

fn y_chip(targets: Vec<Target>, bounds: (f64, f64)) -> (Network, Design) {
    let net = y_network(5000.0, 3000.0);
    let problem = Design {
        targets,
        adjustable: vec![
            Adjustable {
                node: NodeId(0),
                min: bounds.0,
                max: bounds.1,
            },
            Adjustable {
                node: NodeId(1),
                min: bounds.0,
                max: bounds.1,
            },
        ],
        sizes: vec![],
    };
    (net, problem)
}

fn flow_target(channel: usize, ul_min: f64) -> Target {
    Target {
        kind: TargetKind::ChannelFlow {
            channel: ChannelId(channel),
            flow: ul_min * 1e-9 / 60.0,
        },
        weight: 1.0,
        tolerance: Tolerance::default(),
    }
}

#[test]
fn tuning_reaches_feasible_targets_to_1e9() {
    let (net, problem) = y_chip(
        vec![flow_target(0, 3.0), flow_target(1, 1.0)],
        (0.0, 50_000.0),
    );
    let r = design::tune(&net, &problem).unwrap();
    assert!(r.all_targets_met, "{:?}", r.targets);
    for t in &r.targets {
        assert!(((t.reached - t.wanted) / t.wanted).abs() < 1e-9, "{t:?}");
    }
    assert!(r.settings.iter().all(|s| s.at_bound == 0));
    // Independently: solving the chip at the tuned settings gives the wanted flows.
    let sol = solve(&y_network(r.settings[0].after, r.settings[1].after)).unwrap();
    assert!((sol.flows[0] / (3e-9 / 60.0) - 1.0).abs() < 1e-9);
    assert!((sol.flows[1] / (1e-9 / 60.0) - 1.0).abs() < 1e-9);
}

#[test]
fn contradictory_targets_give_the_compromise_and_say_so() {
    // The same channel wanted at 2 and at 4 µL/min, equal weights: the least-squares answer in
    // relative residuals minimises ((q−2)/2)² + ((q−4)/4)²; the derivative vanishes where
    // (q−2)/2 + (q−4)/8 = 0, i.e. q = 12/5 = 2.4 µL/min.
    let (net, problem) = y_chip(
        vec![flow_target(2, 2.0), flow_target(2, 4.0)],
        (0.0, 50_000.0),
    );
    let r = design::tune(&net, &problem).unwrap();
    assert!(!r.all_targets_met);
    let q = r.targets[0].reached / (1e-9 / 60.0);
    assert!((q - 2.4).abs() < 1e-6, "{q}");
}

#[test]
fn bounds_are_respected_and_reported() {
    // 10 µL/min in c1 needs more than the 2000 Pa allowed: p1 sits at its maximum.
    let (net, problem) = y_chip(vec![flow_target(0, 10.0)], (0.0, 2000.0));
    let r = design::tune(&net, &problem).unwrap();
    assert!(!r.all_targets_met);
    assert_eq!(r.settings[0].at_bound, 1);
    assert!((r.settings[0].after - 2000.0).abs() < 1e-9);
    assert!(r
        .settings
        .iter()
        .all(|s| s.after >= -1e-12 && s.after <= 2000.0 + 1e-9));
}

// The invariants "the matrix does not depend on the drives" and "sizing keeps the symbolic
// analysis", counted on the solver the design code is given: a design answer that analysed or
// factorised on its own (and so bypassed the checked, refined solves of `Factor`) leaves these
// counters short.

#[test]
fn tuning_solves_every_drive_set_on_one_checked_factorisation() {
    let (net, problem) = y_chip(
        vec![flow_target(0, 3.0), flow_target(1, 1.0)],
        (0.0, 50_000.0),
    );
    let solver = Solver::new(&net).unwrap();
    let r = design::tune_with(&solver, &problem).unwrap();
    // Fixed ports, two unit responses and the check at the tuned settings: one factorisation.
    assert_eq!((solver.analyses(), solver.factorizations()), (1, 1));
    assert_eq!(r, design::tune(&net, &problem).unwrap());
    // The state reported is the checked one: its residuals are the balance recomputed
    // independently on the chip at the tuned settings.
    let tuned = y_network(r.settings[0].after, r.settings[1].after);
    let again = balance_residuals(&tuned, &r.solution.pressures, &conductances(&tuned));
    assert_eq!(again, r.solution.node_residuals);
    assert!(r.solution.max_relative_residual <= RESIDUAL_LIMIT);
    assert!(r.solution.refinements <= 3);
}

#[test]
fn sizing_refactorises_once_per_evaluation_on_one_analysis() {
    // A length and a width free: the width gives its channel a section of its own, but the
    // nodes and channel ends stay, so one analysis serves every evaluation.
    let net = tree(0.3);
    let problem = Design {
        targets: vec![Target {
            kind: TargetKind::Split {
                channels: vec![ChannelId(3), ChannelId(4), ChannelId(5), ChannelId(6)],
                ratio: vec![1.0; 4],
            },
            weight: 1.0,
            tolerance: Tolerance::default(),
        }],
        adjustable: vec![],
        sizes: vec![
            SizeVar {
                channel: ChannelId(3),
                dim: SizeDim::Length,
                min: 1e-3,
                max: 50e-3,
                step: None,
            },
            SizeVar {
                channel: ChannelId(1),
                dim: SizeDim::Width,
                min: 50e-6,
                max: 200e-6,
                step: None,
            },
        ],
    };
    let solver = Solver::new(&net).unwrap();
    let r = design::size_with(&solver, &problem).unwrap();
    assert!(r.all_targets_met, "{:?}", r.targets);
    assert!(r.evaluations > 1 && r.iterations >= 1);
    assert_eq!(
        (solver.analyses(), solver.factorizations()),
        (1, r.evaluations)
    );
    assert!(r.network.sections.len() > net.sections.len());
    assert!(r.solution.max_relative_residual <= RESIDUAL_LIMIT);
    // Returning the perturbed leaf to 8 mm restores the split; the trunk width stays free.
    assert!(
        (r.sizes[0].after - 8e-3).abs() < 1e-9 * 8e-3,
        "{:?}",
        r.sizes
    );
    let again = design::size(&net, &problem).unwrap();
    assert_eq!(again.sizes, r.sizes);
    assert_eq!(again.evaluations, r.evaluations);
}

#[test]
fn sensitivities_take_one_factorisation_for_every_target() {
    let net = tree(0.3);
    let targets = [ChannelId(3), ChannelId(4), ChannelId(6)];
    let solver = Solver::new(&net).unwrap();
    let s = design::sensitivities_with(&solver, &targets).unwrap();
    assert_eq!((solver.analyses(), solver.factorizations()), (1, 1));
    assert_eq!(s.len(), targets.len() * net.channels.len());
    assert_eq!(s, design::sensitivities(&net, &targets).unwrap());
}

#[test]
fn adjoint_sensitivities_match_central_differences() {
    // Random connected networks (fixed seed): d q_k / d L_m by the adjoint against central
    // finite differences of full solves.
    let mut seed = 0x2545F4914F6CDD1Du64;
    let mut rnd = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    };
    for _ in 0..12 {
        let n = 4 + (rnd() * 8.0) as usize;
        let mut edges = Vec::new();
        for i in 1..n {
            edges.push(((rnd() * i as f64) as usize, i));
        }
        for _ in 0..n {
            let (a, c) = ((rnd() * n as f64) as usize, (rnd() * n as f64) as usize);
            if a != c {
                edges.push((a, c));
            }
        }
        let lengths: Vec<f64> = edges.iter().map(|_| 2e-3 + rnd() * 20e-3).collect();
        let widths: Vec<f64> = edges.iter().map(|_| 50e-6 + rnd() * 150e-6).collect();
        let build = |lengths: &[f64], widths: &[f64]| {
            let mut b = NetworkBuilder::new(fluid());
            for i in 0..n {
                let port = match i {
                    0 => Port::Pressure(Pressure::from_si(3000.0)),
                    1 => Port::Pressure(Pressure::from_si(0.0)),
                    2 => Port::Flow(VolumeFlow::from_si(5e-11)),
                    _ => Port::Junction,
                };
                b.add_node(&format!("n{i}"), port).unwrap();
            }
            for (k, &(a, c)) in edges.iter().enumerate() {
                let s = b
                    .inline_section(
                        &format!("c{k}"),
                        Shape::Rectangle {
                            width: Length::from_si(widths[k]),
                            height: Length::from_si(40e-6),
                        },
                    )
                    .unwrap();
                b.add_channel(
                    &format!("c{k}"),
                    &format!("n{a}"),
                    &format!("n{c}"),
                    s,
                    Length::from_si(lengths[k]),
                )
                .unwrap();
            }
            b.build().unwrap()
        };
        let net = build(&lengths, &widths);
        let targets: Vec<ChannelId> = (0..edges.len()).map(ChannelId).collect();
        let sens = design::sensitivities(&net, &targets).unwrap();
        for s in sens.iter().filter(|s| s.target_channel.0 % 2 == 0) {
            let (t, m) = (s.target_channel.0, s.channel.0);
            let fd = |vary: &dyn Fn(f64) -> (Vec<f64>, Vec<f64>), x: f64| {
                let h = 1e-5 * x;
                let (lp, wp) = vary(x + h);
                let (lm, wm) = vary(x - h);
                (solve(&build(&lp, &wp)).unwrap().flows[t]
                    - solve(&build(&lm, &wm)).unwrap().flows[t])
                    / (2.0 * h)
            };
            let by_length = fd(
                &|x| {
                    let mut l = lengths.clone();
                    l[m] = x;
                    (l, widths.clone())
                },
                lengths[m],
            );
            let by_width = fd(
                &|x| {
                    let mut w = widths.clone();
                    w[m] = x;
                    (lengths.clone(), w)
                },
                widths[m],
            );
            // Agreement to 1e-6 relative, above the finite differences' own rounding noise
            // (≈ 1e-14 of the largest flow divided by the step).
            let qmax = solve(&net)
                .unwrap()
                .flows
                .iter()
                .fold(0.0f64, |a, q| a.max(q.abs()));
            let noise_l = 1e-14 * qmax / (1e-5 * lengths[m]);
            let noise_w = 1e-14 * qmax / (1e-5 * widths[m]);
            assert!(
                (s.d_length - by_length).abs() <= 1e-6 * by_length.abs() + noise_l,
                "dL {t}/{m}: {} vs {by_length}",
                s.d_length
            );
            let dw = s.d_width.unwrap();
            assert!(
                (dw - by_width).abs() <= 1e-6 * by_width.abs() + noise_w,
                "dw {t}/{m}: {dw} vs {by_width}"
            );
        }
    }
}

/// The documented contract of a written copy: read back and solved, it meets every target
/// within that target's tolerance (default 1e-6 relative) — the values are written with 6
/// significant digits, or more when 6 would lose a target (see `commands::DIGITS_TRIED`).
#[test]
fn tuned_and_sized_files_solve_back_to_the_reported_flows() {
    let dir = tempfile::tempdir().unwrap();
    let tuned = dir.path().join("tuned.yaml");
    let report = run_json([
        std::ffi::OsStr::new("tune"),
        "networks/perfusion_tuning.yaml".as_ref(),
        "--format".as_ref(),
        "json".as_ref(),
        "--output".as_ref(),
        tuned.as_os_str(),
    ]);
    assert_eq!(report["all_targets_met"], true);
    let tol = design::DEFAULT_TOLERANCE;
    let v = json_of(&tuned);
    let flow = |name: &str| channel_flow(&v, name);
    assert!((flow("chamber_mid") / (20e-9 / 60.0) - 1.0).abs() <= tol);
    // Split 1:1: each share within 1e-6 of 0.5, relative to the share.
    let (l, r) = (flow("chamber_left"), flow("chamber_right"));
    assert!((l / (l + r) - 0.5).abs() <= tol * 0.5, "{l} {r}");
    // The targets judged in the report are the copy's own.
    for t in report["targets"].as_array().unwrap() {
        assert_eq!(t["met"], true, "{t}");
        assert!(t["relative_miss"].as_f64().unwrap() <= tol, "{t}");
    }

    let sized = dir.path().join("sized.yaml");
    let out = rillnet()
        .args(["size", "networks/gradient_splitter_sizing.yaml", "--output"])
        .arg(&sized)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v = json_of(&sized);
    let flow = |name: &str| channel_flow(&v, name);
    let total = flow("lane_1") + flow("lane_2") + flow("lane_3");
    for (lane, share) in [("lane_1", 0.2), ("lane_2", 0.4), ("lane_3", 0.4)] {
        assert!((flow(lane) / total - share).abs() <= tol * share, "{lane}");
    }
    // The original files are untouched, and a second run refuses to overwrite.
    let again = rillnet()
        .args(["size", "networks/gradient_splitter_sizing.yaml", "--output"])
        .arg(&sized)
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
}

#[test]
fn design_input_errors_are_placed() {
    let dir = tempfile::tempdir().unwrap();
    let base = std::fs::read_to_string("networks/perfusion_tuning.yaml").unwrap();
    for (from, to, needle) in [
        (
            "{channel: chamber_mid, flow: 20 uL/min}",
            "{channel: chamber_mdi, flow: 20 uL/min}",
            "unknown channel 'chamber_mdi'",
        ),
        ("ratio: [1, 1]", "ratio: [1]", "one ratio per channel"),
        (
            "adjust: {min: 0 mbar, max: 300 mbar}",
            "adjust: {min: 0 mbar, max: 3 uL/min}",
            "nodes.medium_a.adjust.max",
        ),
    ] {
        let p = dir.path().join("c.yaml");
        let _ = std::fs::remove_file(&p);
        std::fs::write(&p, base.replacen(from, to, 1)).unwrap();
        let out = rillnet().arg("tune").arg(&p).output().unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{err}");
        assert!(err.contains(needle), "'{needle}' missing: {err}");
    }
    // A chip without targets cannot be tuned.
    let out = rillnet()
        .args(["tune", "networks/reagent_mixer.yaml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no targets"));
}
