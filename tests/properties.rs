//! Property tests on random connected networks: conservation, linearity, sign conventions.
//! These follow from Kirchhoff's laws and the linearity of Stokes flow, not from a table.

mod common;

use proptest::prelude::*;
use rillnet::analysis::kirchhoff::balance_residuals;
use rillnet::prelude::*;

#[derive(Clone, Debug)]
struct Spec {
    /// Per node: 0 junction, 1 pressure port, 2 flow port; value for ports.
    ports: Vec<(u8, f64)>,
    /// Channels (from, to, diameter µm, length mm).
    channels: Vec<(usize, usize, f64, f64)>,
}

fn spec() -> impl Strategy<Value = Spec> {
    (3usize..25).prop_flat_map(|n| {
        let tree = proptest::collection::vec(
            (any::<prop::sample::Index>(), 20.0..300.0f64, 0.5..50.0f64),
            n - 1,
        );
        let extra =
            proptest::collection::vec((0..n, 0..n, 20.0..300.0f64, 0.5..50.0f64), 0..(2 * n));
        let ports = proptest::collection::vec((0u8..3, -500.0..2000.0f64), n);
        (Just(n), tree, extra, ports).prop_map(|(n, tree, extra, mut ports)| {
            let mut channels = Vec::new();
            // Random spanning tree: node i+1 attaches to an earlier node.
            for (i, (idx, d, l)) in tree.into_iter().enumerate() {
                let parent = idx.index(i + 1);
                channels.push((parent, i + 1, d, l));
            }
            for (a, b, d, l) in extra {
                if a != b {
                    channels.push((a, b, d, l));
                }
            }
            // At least one pressure port.
            if !ports.iter().any(|p| p.0 == 1) {
                ports[n - 1].0 = 1;
            }
            Spec { ports, channels }
        })
    })
}

/// Build a network; `scale` multiplies every port value; `flip` reverses one channel.
fn build(spec: &Spec, scale: f64, flip: Option<usize>, uniform_pressure: Option<f64>) -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    for (i, &(kind, v)) in spec.ports.iter().enumerate() {
        let port = match (kind, uniform_pressure) {
            (1, Some(p)) => Port::Pressure(Pressure::from_si(p)),
            (1, None) => Port::Pressure(Pressure::from_si(v * scale)),
            (2, None) => Port::Flow(VolumeFlow::from_si(v * 1e-12 * scale)),
            _ => Port::Junction,
        };
        b.add_node(&format!("n{i}"), port).unwrap();
    }
    common::add_circle_channels(&mut b, &spec.channels, flip);
    b.build().unwrap()
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |m, x| m.max(x.abs()))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]

    #[test]
    fn every_node_balances(s in spec()) {
        let net = build(&s, 1.0, None, None);
        let sol = solve(&net).unwrap();
        let g = rillnet::analysis::kirchhoff::conductances(&net);
        // Recomputed here from the returned flows, independently of the solver's own check.
        for r in balance_residuals(&net, &sol.pressures, &g).into_iter().flatten() {
            prop_assert!(r < 1e-9, "residual {r}");
        }
        // And directly from the returned flows: at every junction and pump, inflow = outflow,
        // to 1e-9 of the node's throughput, with a floor at 1e-12 of the largest flow a single
        // channel's end pressure alone would drive (the rounding scale of g·(p_i − p_j)).
        let qmax = net.channels.iter().zip(&g)
            .map(|(c, gk)| gk * (sol.pressures[c.from.0].abs() + sol.pressures[c.to.0].abs()))
            .fold(max_abs(&sol.flows), f64::max);
        let mut net_out = vec![0.0; net.nodes.len()];
        let mut through = vec![0.0; net.nodes.len()];
        for (c, q) in net.channels.iter().zip(&sol.flows) {
            net_out[c.from.0] += q;
            net_out[c.to.0] -= q;
            through[c.from.0] += q.abs();
            through[c.to.0] += q.abs();
        }
        for (i, node) in net.nodes.iter().enumerate() {
            let inj = match node.port {
                Port::Pressure(_) => continue,
                Port::Junction => 0.0,
                Port::Flow(q) => q.si(),
            };
            let tol = 1e-9 * (through[i] + inj.abs()) + 1e-12 * qmax;
            prop_assert!((inj - net_out[i]).abs() <= tol, "node {i}: {inj} vs {}", net_out[i]);
        }
        // Mass conservation over the whole chip: port flows sum to zero.
        let total: f64 = sol.node_net_inflow.iter().enumerate()
            .filter(|(i, _)| !matches!(net.nodes[NodeId(*i)].port, Port::Junction))
            .map(|(_, q)| q).sum();
        let scale: f64 = sol.node_net_inflow.iter().map(|q| q.abs()).sum::<f64>().max(1e-30);
        prop_assert!(total.abs() <= 1e-9 * scale + 1e-12 * qmax, "net {total} of {scale}");
    }

    #[test]
    fn no_flow_when_all_ports_share_one_pressure(s in spec(), p in -1000.0..5000.0f64) {
        // Only pressure ports (flow ports become junctions) all at p: nothing moves.
        let net = build(&s, 1.0, None, Some(p));
        let sol = solve(&net).unwrap();
        let q_scale = (p.abs().max(1.0)) / 1e12; // flow a 1 Pa drop drives in a ~1e12 Pa·s/m³ channel
        prop_assert!(max_abs(&sol.flows) <= 1e-9 * q_scale, "flows {:?}", sol.flows);
        for pr in &sol.pressures {
            prop_assert!((pr - p).abs() <= 1e-9 * p.abs().max(1.0));
        }
    }

    #[test]
    fn doubling_every_drive_doubles_every_flow(s in spec()) {
        let one = solve(&build(&s, 1.0, None, None)).unwrap();
        let two = solve(&build(&s, 2.0, None, None)).unwrap();
        let scale = max_abs(&one.flows).max(1e-30);
        for (a, b) in one.flows.iter().zip(&two.flows) {
            prop_assert!((2.0 * a - b).abs() <= 1e-9 * scale, "{a} {b}");
        }
    }

    #[test]
    fn reversing_a_channel_flips_only_its_sign(s in spec(), pick in any::<prop::sample::Index>()) {
        let k = pick.index(s.channels.len());
        let base = solve(&build(&s, 1.0, None, None)).unwrap();
        let flipped = solve(&build(&s, 1.0, Some(k), None)).unwrap();
        let scale = max_abs(&base.flows).max(1e-30);
        for (i, (a, b)) in base.flows.iter().zip(&flipped.flows).enumerate() {
            let expected = if i == k { -a } else { *a };
            prop_assert!((expected - b).abs() <= 1e-9 * scale, "channel {i}: {a} vs {b}");
        }
        for (a, b) in base.pressures.iter().zip(&flipped.pressures) {
            prop_assert!((a - b).abs() <= 1e-9 * a.abs().max(1.0));
        }
    }
}
