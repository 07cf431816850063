//! Dead ends and series chains eliminated before the factorisation give the same flows as the
//! factorisation of the whole matrix, and the closed forms of long chains and large stars.

mod common;

use proptest::prelude::*;
use rillnet::analysis::kirchhoff::{
    conductances, drive_values, solve_with, FlowSolution, KirchhoffSystem, Solver,
};
use rillnet::prelude::*;
use rillnet::solver::{Parallelism, SymbolicCholesky};

/// The checked solve through [`Solver`] (elimination) and through [`solve_with`] on a symbolic
/// analysis of the whole matrix (no elimination).
fn both(net: &Network) -> (FlowSolution, FlowSolution) {
    let solver = Solver::new(net).unwrap();
    let eliminated = solver.solve().unwrap();
    let system = KirchhoffSystem::new(net);
    let symbolic = SymbolicCholesky::analyse(system.pattern(), Parallelism::Sequential).unwrap();
    let whole = solve_with(net, &system, &symbolic, &conductances(net)).unwrap();
    (eliminated, whole)
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0, |m, x| m.max(x.abs()))
}

/// Largest difference relative to the largest value (normwise relative difference).
fn rel_diff(a: &[f64], b: &[f64]) -> f64 {
    let scale = max_abs(b);
    let d = a
        .iter()
        .zip(b)
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    if scale == 0.0 {
        d
    } else {
        d / scale
    }
}

#[derive(Clone, Debug)]
struct Spec {
    ports: Vec<(u8, f64)>,
    /// (from, to, diameter µm, length mm) of the core network (spanning tree + loops).
    core: Vec<(usize, usize, f64, f64)>,
    /// Per core channel: how many extra joints split it into a series chain.
    splits: Vec<usize>,
    /// Dead-end branches: (attach to core node, depth).
    branches: Vec<(usize, usize)>,
    /// Diameters (µm) and lengths (mm) drawn for chain segments and branches, cycled.
    segment: Vec<(f64, f64)>,
}

fn spec() -> impl Strategy<Value = Spec> {
    (3usize..16).prop_flat_map(|n| {
        let tree = proptest::collection::vec(
            (any::<prop::sample::Index>(), 20.0..300.0f64, 0.5..50.0f64),
            n - 1,
        );
        let extra = proptest::collection::vec((0..n, 0..n, 20.0..300.0f64, 0.5..50.0f64), 0..n);
        let ports = proptest::collection::vec((0u8..3, -500.0..2000.0f64), n);
        let splits = proptest::collection::vec(0usize..6, 2 * n);
        let branches = proptest::collection::vec((0..n, 1usize..5), 0..n);
        let segment = proptest::collection::vec((20.0..300.0f64, 0.5..50.0f64), 1..12);
        (Just(n), tree, extra, ports, splits, branches, segment).prop_map(
            |(n, tree, extra, mut ports, splits, branches, segment)| {
                let mut core = Vec::new();
                for (i, (idx, d, l)) in tree.into_iter().enumerate() {
                    core.push((idx.index(i + 1), i + 1, d, l));
                }
                core.extend(extra.into_iter().filter(|&(a, b, _, _)| a != b));
                if !ports.iter().any(|p| p.0 == 1) {
                    ports[n - 1].0 = 1;
                }
                Spec {
                    ports,
                    core,
                    splits,
                    branches,
                    segment,
                }
            },
        )
    })
}

/// The core network with its channels split into chains and dead-end branches attached.
fn build(spec: &Spec) -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    for (i, &(kind, v)) in spec.ports.iter().enumerate() {
        let port = match kind {
            1 => Port::Pressure(Pressure::from_si(v)),
            2 => Port::Flow(VolumeFlow::from_si(v * 1e-12)),
            _ => Port::Junction,
        };
        b.add_node(&format!("n{i}"), port).unwrap();
    }
    let mut next = spec.ports.len();
    let mut seg = spec.segment.iter().cycle();
    let mut channels = Vec::new();
    for (k, &(a, c, d, l)) in spec.core.iter().enumerate() {
        let mut from = a;
        for _ in 0..spec.splits[k % spec.splits.len()] {
            b.add_node(&format!("n{next}"), Port::Junction).unwrap();
            let &(d, l) = seg.next().unwrap();
            channels.push((from, next, d, l));
            from = next;
            next += 1;
        }
        channels.push((from, c, d, l));
    }
    for &(at, depth) in &spec.branches {
        let mut from = at;
        for _ in 0..depth {
            b.add_node(&format!("n{next}"), Port::Junction).unwrap();
            let &(d, l) = seg.next().unwrap();
            channels.push((from, next, d, l));
            from = next;
            next += 1;
        }
    }
    common::add_circle_channels(&mut b, &channels, None);
    b.build().unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(128))]

    #[test]
    fn eliminated_and_whole_solves_agree(s in spec()) {
        let net = build(&s);
        let (e, w) = both(&net);
        // Both are checked solves of the same system; what separates them is rounding only.
        // Reference: the eliminated solution plus one step of refinement whose residual is
        // summed channel by channel with compensation (mixed-precision refinement, Higham,
        // Accuracy and Stability of Numerical Algorithms, 2002, ch. 12).
        let g = conductances(&net);
        let reference = refined(&net, &g, &e.pressures);
        let flow_of = |p: &[f64]| -> Vec<f64> {
            net.channels.iter().zip(&g).map(|(c, gk)| gk * (p[c.from.0] - p[c.to.0])).collect()
        };
        let q_ref = flow_of(&reference);
        let qmax = max_abs(&q_ref);
        // Flows agree to 1e-12 of the largest flow, plus the rounding of a flow computed from
        // its end pressures, 8ε·g·(|p_i| + |p_j|) (a chip whose ports drive nothing carries
        // 1e-25-sized noise in one solve and exact zeros in the other).
        let mut worst = (0.0f64, 0.0f64);
        for (k, (c, gk)) in net.channels.iter().zip(&g).enumerate() {
            let round = 8.0 * f64::EPSILON * gk
                * (reference[c.from.0].abs() + reference[c.to.0].abs());
            let de = ((e.flows[k] - q_ref[k]).abs() - round).max(0.0) / qmax;
            let dw = ((w.flows[k] - q_ref[k]).abs() - round).max(0.0) / qmax;
            worst = (worst.0.max(de), worst.1.max(dw));
        }
        prop_assert!(worst.0 <= 1e-12, "eliminated flows off by {:e} (whole {:e})", worst.0, worst.1);
        // The whole-matrix factor is compared too, against the same reference: measured up to
        // 1.1e-10 off in pressures over 500 cases, where the elimination stays within 1.1e-13.
        let (dpe, dpw) = (rel_diff(&e.pressures, &reference), rel_diff(&w.pressures, &reference));
        prop_assert!(dpe <= 1e-12, "eliminated pressures off by {dpe:e} (whole {dpw:e})");
        prop_assert!(dpw <= 1e-8, "whole-matrix pressures off by {dpw:e}");
        prop_assert!(e.max_relative_residual <= 1e-9);
    }
}

/// `p` plus one refinement step: the node balance residual summed with compensation, and the
/// correction solved through the adjoint entry (A is symmetric; λ = 0 at pressure ports).
fn refined(net: &Network, g: &[f64], p: &[f64]) -> Vec<f64> {
    let d = drive_values(net);
    let n = net.nodes.len();
    let mut terms: Vec<Vec<f64>> = vec![Vec::new(); n];
    for (i, node) in net.nodes.iter().enumerate() {
        if matches!(node.port, Port::Flow(_)) {
            terms[i].push(d[i]);
        }
    }
    for (c, gk) in net.channels.iter().zip(g) {
        let q = gk * (p[c.from.0] - p[c.to.0]);
        terms[c.from.0].push(-q);
        terms[c.to.0].push(q);
    }
    let r: Vec<f64> = terms.into_iter().map(|t| sum(t.into_iter())).collect();
    let solver = Solver::new(net).unwrap();
    let f = solver.factorize(g.to_vec()).unwrap();
    let lambda = &f.solve_adjoint(&[r]).unwrap()[0].lambda;
    p.iter().zip(lambda).map(|(a, b)| a + b).collect()
}

/// A chain of `conductance_ratio`-alternating channels between two pressure ports.
fn chain(lengths_m: &[f64], diameters_m: &[f64], p_in: f64) -> Network {
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    let n = lengths_m.len();
    b.add_node("in", Port::Pressure(Pressure::from_si(p_in)))
        .unwrap();
    for i in 1..n {
        b.add_node(&format!("j{i}"), Port::Junction).unwrap();
    }
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let name = |i: usize| match i {
        0 => "in".to_string(),
        i if i == n => "out".to_string(),
        i => format!("j{i}"),
    };
    for (i, (&l, &d)) in lengths_m.iter().zip(diameters_m).enumerate() {
        let s = b
            .inline_section(
                &format!("c{i}"),
                Shape::Circle {
                    diameter: Length::from_si(d),
                },
            )
            .unwrap();
        b.add_channel(
            &format!("c{i}"),
            &name(i),
            &name(i + 1),
            s,
            Length::from_si(l),
        )
        .unwrap();
    }
    b.build().unwrap()
}

#[test]
fn a_chain_of_wildly_different_conductances_meets_the_series_law() {
    // Resistances alternating over ten orders of magnitude (1 µm-long wide tubes between 50 mm
    // narrow ones). Series law Q = Δp/ΣR and p_i = p_in − Q·Σ_{k<i} R_k (Bruus, Theoretical
    // Microfluidics, 2008, ch. 4: resistances in series add).
    let n = 200;
    let lengths: Vec<f64> = (0..n)
        .map(|i| if i % 2 == 0 { 1e-6 } else { 50e-3 })
        .collect();
    let diameters: Vec<f64> = (0..n)
        .map(|i| {
            if i % 2 == 0 {
                1e-3
            } else {
                20e-6 + 1e-7 * i as f64
            }
        })
        .collect();
    let net = chain(&lengths, &diameters, 20_000.0);
    let r: Vec<f64> = (0..n).map(|k| net.resistance(ChannelId(k))).collect();
    let ratio = r.iter().fold(0.0f64, |m, &x| m.max(x)) / r.iter().fold(f64::MAX, |m, &x| m.min(x));
    assert!(ratio > 1e10, "{ratio:e}");
    let total: f64 = r.iter().sum();
    let q = 20_000.0 / total;
    let solver = Solver::new(&net).unwrap();
    assert_eq!(
        solver.eliminated(),
        n - 1,
        "every joint of a chain is eliminated"
    );
    let e = solver.solve().unwrap();
    let mut p = 20_000.0;
    for (k, rk) in r.iter().enumerate() {
        let node = k;
        assert!(
            (e.pressures[node] - p).abs() <= 1e-12 * 20_000.0,
            "p at {k}"
        );
        assert!(
            (e.flows[k] - q).abs() <= 1e-12 * q,
            "flow {k}: {:e} vs {q:e}",
            e.flows[k]
        );
        p -= q * rk;
    }
    // The whole-matrix factorisation loses the narrow channels' conductance in the assembled
    // diagonal: it either refuses, naming a negligible channel, or agrees.
    let system = KirchhoffSystem::new(&net);
    let symbolic = SymbolicCholesky::analyse(system.pattern(), Parallelism::Sequential).unwrap();
    match solve_with(&net, &system, &symbolic, &conductances(&net)) {
        Ok(w) => assert!(rel_diff(&e.flows, &w.flows) <= 1e-12),
        Err(err) => assert!(err.to_string().contains("times smaller"), "{err}"),
    }
}

#[test]
fn a_loop_hanging_off_one_node_carries_exactly_nothing() {
    // in → a → out, with a loop a → l1 → l2 → l3 → a and no port inside it: no flow can enter
    // the loop (closed form: every loop node sits at p_a).
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    b.add_node("in", Port::Flow(VolumeFlow::from_si(1e-10)))
        .unwrap();
    for j in ["a", "l1", "l2", "l3"] {
        b.add_node(j, Port::Junction).unwrap();
    }
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    let mut k = 0;
    let mut add = |b: &mut NetworkBuilder, x: &str, y: &str, d: f64| {
        let s = b
            .inline_section(
                &format!("c{k}"),
                Shape::Circle {
                    diameter: Length::from_si(d),
                },
            )
            .unwrap();
        b.add_channel(&format!("c{k}"), x, y, s, Length::from_si(3e-3))
            .unwrap();
        k += 1;
    };
    add(&mut b, "in", "a", 100e-6);
    add(&mut b, "a", "out", 80e-6);
    add(&mut b, "a", "l1", 37e-6);
    add(&mut b, "l1", "l2", 91e-6);
    add(&mut b, "l2", "l3", 53e-6);
    add(&mut b, "l3", "a", 77e-6);
    let net = b.build().unwrap();
    let sol = solve(&net).unwrap();
    for c in 2..6 {
        assert_eq!(sol.flows[c], 0.0, "loop channel c{c}");
    }
    assert!((sol.flows[1] - 1e-10).abs() <= 1e-12 * 1e-10);
}

/// Neumaier's compensated sum (so the closed forms below are exact to rounding).
fn sum(values: impl Iterator<Item = f64>) -> f64 {
    let (mut s, mut c) = (0.0f64, 0.0f64);
    for v in values {
        let t = s + v;
        c += if s.abs() >= v.abs() {
            (s - t) + v
        } else {
            (v - t) + s
        };
        s = t;
    }
    s + c
}

/// Size of the large path and star: 10⁶ in release builds, 10⁵ in the (debug) CI run.
/// `cargo test --release --test elimination` runs them at 10⁶.
const LARGE: usize = if cfg!(debug_assertions) {
    100_000
} else {
    1_000_000
};

fn section(b: &mut NetworkBuilder) -> rillnet::network::SectionId {
    b.add_section(
        "s",
        Shape::Rectangle {
            width: Length::from_si(100e-6),
            height: Length::from_si(50e-6),
        },
    )
    .unwrap()
}

#[test]
fn a_long_path_gives_the_series_flow() {
    // LARGE nodes in a line, 100 mbar → 0 Pa, lengths cycling 1..7 mm: one flow Q = Δp/ΣR
    // through every channel, pressures falling by Q·R_k (series law, Bruus 2008, ch. 4).
    let n = LARGE;
    let mut b = NetworkBuilder::new(Fluid::WATER_20C).with_capacity(n, n);
    for i in 0..n {
        let port = match i {
            0 => Port::Pressure(Pressure::from_si(10_000.0)),
            i if i == n - 1 => Port::Pressure(Pressure::from_si(0.0)),
            _ => Port::Junction,
        };
        b.add_node(&format!("n{i}"), port).unwrap();
    }
    let s = section(&mut b);
    for i in 0..n - 1 {
        let l = Length::from_si(1e-3 * (1 + i % 7) as f64);
        b.add_channel(
            &format!("c{i}"),
            &format!("n{i}"),
            &format!("n{}", i + 1),
            s,
            l,
        )
        .unwrap();
    }
    let net = b.build().unwrap();
    let solver = Solver::new(&net).unwrap();
    assert_eq!(solver.eliminated(), n - 2);
    let sol = solver.solve().unwrap();
    let r: Vec<f64> = (0..n - 1).map(|k| net.resistance(ChannelId(k))).collect();
    let q = 10_000.0 / sum(r.iter().copied());
    // Any floating-point sum of n resistances carries up to (n − 1)·ε relative error
    // (Higham, Accuracy and Stability of Numerical Algorithms, 2002, §4.2); each series step
    // of the elimination rounds a few times.
    let tol = 4.0 * n as f64 * f64::EPSILON;
    let mut drop = 0.0;
    for (k, rk) in r.iter().enumerate() {
        assert!(
            (sol.flows[k] - q).abs() <= tol * q,
            "flow {k}: {:e} vs {q:e}",
            sol.flows[k]
        );
        // p_k = 10 kPa − Q·Σ_{i<k} R_i: the running sum carries k roundings, so compare
        // against the inlet pressure scale.
        assert!((sol.pressures[k] - (10_000.0 - q * drop)).abs() <= 1e-9 * 10_000.0);
        drop += rk;
    }
}

#[test]
fn two_hubs_joined_by_many_chains_meet_the_parallel_law() {
    // An inlet → hub A, 150 chains of three equal channels A–x–y–B, hub B → outlet. Every
    // chain is 3r, the bundle 3r/150, so Q = Δp/(r_in + 3r/150 + r_out) and each chain
    // carries Q/150 (series and parallel laws, Bruus 2008, ch. 4). The joints next to B sit
    // between two hubs whose neighbour lists are too long to search, so they stay in the
    // reduced system: the test holds that path to the same law.
    let chains = 150;
    let mut b = NetworkBuilder::new(Fluid::WATER_20C);
    b.add_node("in", Port::Pressure(Pressure::from_si(5_000.0)))
        .unwrap();
    b.add_node("out", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    b.add_node("A", Port::Junction).unwrap();
    b.add_node("B", Port::Junction).unwrap();
    let s = section(&mut b);
    let l = Length::from_si(2e-3);
    let channel = |b: &mut NetworkBuilder, name: String, from: &str, to: &str| {
        b.add_channel(&name, from, to, s, l).unwrap();
    };
    channel(&mut b, "feed".into(), "in", "A");
    channel(&mut b, "drain".into(), "B", "out");
    for i in 0..chains {
        let (x, y) = (format!("x{i}"), format!("y{i}"));
        b.add_node(&x, Port::Junction).unwrap();
        b.add_node(&y, Port::Junction).unwrap();
        channel(&mut b, format!("a{i}"), "A", &x);
        channel(&mut b, format!("m{i}"), &x, &y);
        channel(&mut b, format!("b{i}"), &y, "B");
    }
    let net = b.build().unwrap();
    let solver = Solver::new(&net).unwrap();
    assert!(solver.eliminated() < solver.system().dim(), "nothing kept");
    let sol = solver.solve().unwrap();
    let r = net.resistance(ChannelId(0));
    let q = 5_000.0 / (2.0 * r + 3.0 * r / chains as f64);
    let tol = 1e-12 * q;
    assert!(
        (sol.flows[0] - q).abs() <= tol,
        "{:e} vs {q:e}",
        sol.flows[0]
    );
    assert!((sol.flows[1] - q).abs() <= tol);
    for k in 2..net.channels.len() {
        let qc = q / chains as f64;
        assert!(
            (sol.flows[k] - qc).abs() <= tol / chains as f64,
            "channel {k}"
        );
    }
    let (e, w) = both(&net);
    assert!(rel_diff(&e.flows, &w.flows) <= 1e-12);
}

#[test]
fn a_large_star_meets_the_balance_at_its_centre() {
    // A centre joined to LARGE leaves: even leaves are pressure ports at p_i, odd leaves pumps
    // injecting q_i, and the centre drains to 0 Pa through one channel g₀. Closed form derived
    // here from the balance at the centre:
    //   p_c = (Σ_even g_i·p_i + Σ_odd q_i) / (g₀ + Σ_even g_i),
    // a pressure leaf carries g_i·(p_i − p_c) into the centre, a pump leaf sits at
    // p_c + q_i/g_i and its channel carries q_i.
    let n = LARGE;
    let mut b = NetworkBuilder::new(Fluid::WATER_20C).with_capacity(n + 2, n + 1);
    b.add_node("centre", Port::Junction).unwrap();
    b.add_node("drain", Port::Pressure(Pressure::from_si(0.0)))
        .unwrap();
    for i in 0..n {
        let port = if i % 2 == 0 {
            Port::Pressure(Pressure::from_si(1000.0 + (i % 13) as f64 * 10.0))
        } else {
            Port::Flow(VolumeFlow::from_si(1e-13 * (1 + i % 5) as f64))
        };
        b.add_node(&format!("leaf{i}"), port).unwrap();
    }
    let s = section(&mut b);
    // The drain is short enough to carry more than all leaves together, so every leaf flows
    // into the centre and the drain's flow is the largest there.
    b.add_channel(
        "out",
        "centre",
        "drain",
        s,
        Length::from_si(1e-3 / n as f64),
    )
    .unwrap();
    for i in 0..n {
        let l = Length::from_si(1e-3 * (1 + i % 11) as f64);
        b.add_channel(&format!("c{i}"), &format!("leaf{i}"), "centre", s, l)
            .unwrap();
    }
    let net = b.build().unwrap();
    let g = conductances(&net);
    let d = drive_values(&net);
    let leaf = |i: usize| i + 2;
    let num = sum((0..n).map(|i| {
        if i % 2 == 0 {
            g[i + 1] * d[leaf(i)]
        } else {
            d[leaf(i)]
        }
    }));
    let den = sum(std::iter::once(g[0]).chain((0..n).step_by(2).map(|i| g[i + 1])));
    let pc = num / den;
    let solver = Solver::new(&net).unwrap();
    assert_eq!(solver.eliminated(), solver.system().dim());
    let sol = solver.solve().unwrap();
    // Sums of n terms: (n − 1)·ε relative (Higham 2002, §4.2), as for the path.
    let tol = 4.0 * n as f64 * f64::EPSILON;
    assert!(
        (sol.pressures[0] - pc).abs() <= tol * pc,
        "{} vs {pc}",
        sol.pressures[0]
    );
    for i in 0..n {
        let (q, want) = if i % 2 == 0 {
            (sol.flows[i + 1], g[i + 1] * (d[leaf(i)] - pc))
        } else {
            let p = pc + d[leaf(i)] / g[i + 1];
            assert!(
                (sol.pressures[leaf(i)] - p).abs() <= tol * p,
                "pump leaf {i}"
            );
            (sol.flows[i + 1], d[leaf(i)])
        };
        // A flow computed from end pressures ≈ 10³ Pa carries their rounding, g_i·ε·p: the
        // comparison is against that scale.
        let scale = g[i + 1] * d[leaf(i)].abs().max(pc);
        assert!(
            (q - want).abs() <= tol * scale,
            "leaf {i}: {q:e} vs {want:e}"
        );
    }
}

/// Dead-end channels by their definition, checked channel by channel in O(channels²): a
/// channel is dead when removing it cuts off a side that holds only junctions and no loop
/// (a tree of junctions, which can carry no steady flow). Derived here from the definition
/// of [`Network::dead_end_channels`], independently of its peeling.
fn dead_by_definition(net: &Network) -> Vec<bool> {
    let n = net.nodes.len();
    (0..net.channels.len())
        .map(|k| {
            let side = |start: usize| -> (Vec<bool>, usize) {
                let mut seen = vec![false; n];
                seen[start] = true;
                let mut stack = vec![start];
                while let Some(v) = stack.pop() {
                    for (o, c) in net.channels.iter().enumerate() {
                        if o == k || (c.from.0 != v && c.to.0 != v) {
                            continue;
                        }
                        let u = if c.from.0 == v { c.to.0 } else { c.from.0 };
                        if !seen[u] {
                            seen[u] = true;
                            stack.push(u);
                        }
                    }
                }
                let nodes = seen.iter().filter(|&&s| s).count();
                let edges = net
                    .channels
                    .iter()
                    .enumerate()
                    .filter(|&(o, c)| o != k && seen[c.from.0])
                    .count();
                (seen, edges + 1 - nodes)
            };
            let c = &net.channels[rillnet::network::ChannelId(k)];
            let (seen_from, loops_from) = side(c.from.0);
            if seen_from[c.to.0] {
                return false;
            }
            let (seen_to, loops_to) = side(c.to.0);
            let junctions_only = |seen: &[bool]| {
                net.nodes
                    .iter()
                    .zip(seen)
                    .all(|(node, &s)| !s || node.port == Port::Junction)
            };
            (junctions_only(&seen_from) && loops_from == 0)
                || (junctions_only(&seen_to) && loops_to == 0)
        })
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn dead_end_marking_meets_its_definition(s in spec()) {
        let net = build(&s);
        prop_assert_eq!(net.dead_end_channels(), dead_by_definition(&net));
    }
}
