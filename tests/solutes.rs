//! Solutes: the well-mixed model against mass balances in closed form, the mixing check
//! against an independent evaluation of diffusion across the width, and the chip-file keys.

mod common;

use proptest::prelude::*;
use rillnet::analysis::solutes::{self, mixed_fraction, well_mixed, FlowGraph, Method};
use rillnet::analysis::SteadyState;
use rillnet::chip::Chip;
use rillnet::format::{parse_chip, Syntax};
use rillnet::prelude::*;

fn load(text: &str) -> (Chip, SteadyState) {
    let chip = parse_chip(text, "test.yaml", Syntax::Yaml).unwrap();
    let mut state = steady_state(&chip.network).unwrap();
    state.solutes = rillnet::commands::solve_solutes(&chip, &state).unwrap();
    (chip, state)
}

fn flow(chip: &Chip, state: &SteadyState, channel: &str) -> f64 {
    state.channels[chip.network.channel_id(channel).unwrap().0].flow
}

fn node_c(chip: &Chip, state: &SteadyState, species: usize, node: &str) -> Option<f64> {
    state.solutes.as_ref().unwrap().fields[species].nodes[chip.network.node_id(node).unwrap().0]
}

fn channel_c(chip: &Chip, state: &SteadyState, species: usize, channel: &str) -> Option<f64> {
    state.solutes.as_ref().unwrap().fields[species].channels
        [chip.network.channel_id(channel).unwrap().0]
}

const Y: &str = "
fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
species:
  drug: {diffusivity: 5e-10 m^2/s}
  dye: {diffusivity: 40 um^2/s}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  a: {pressure: 120 mbar, concentrations: {drug: 10 uM, dye: 1}}
  b: {pressure: 70 mbar, concentrations: {drug: 2 uM}}
  t: {}
  dead: {}
  o: {pressure: 0 Pa}
channels:
  c1: {from: a, to: t, section: s, length: 10 mm}
  c2: {from: b, to: t, section: s, length: 14 mm}
  c3: {from: t, to: o, section: s, length: 10 mm}
  stub: {from: t, to: dead, section: s, length: 3 mm}
";

#[test]
fn y_junction_mass_balance_closed_form() {
    let (chip, state) = load(Y);
    let (q1, q2) = (flow(&chip, &state, "c1"), flow(&chip, &state, "c2"));
    assert!(q1 > 0.0 && q2 > 0.0);
    // Mass balance, closed form: c = (Q1 c1 + Q2 c2)/(Q1 + Q2); 1 uM = 1e-3 mol/m^3.
    let expected = (q1 * 10e-3 + q2 * 2e-3) / (q1 + q2);
    for got in [
        node_c(&chip, &state, 0, "t").unwrap(),
        node_c(&chip, &state, 0, "o").unwrap(),
        channel_c(&chip, &state, 0, "c3").unwrap(),
    ] {
        approx::assert_relative_eq!(got, expected, max_relative = 1e-12);
    }
    // The dye enters at a only (fraction 1): c = Q1/(Q1 + Q2).
    approx::assert_relative_eq!(
        node_c(&chip, &state, 1, "o").unwrap(),
        q1 / (q1 + q2),
        max_relative = 1e-12
    );
    // Inlet channels carry their port's concentration.
    assert_eq!(channel_c(&chip, &state, 0, "c2"), Some(2e-3));
    // The dead end carries no flow and has no well-mixed concentration.
    assert_eq!(flow(&chip, &state, "stub"), 0.0);
    assert_eq!(channel_c(&chip, &state, 0, "stub"), None);
    assert_eq!(node_c(&chip, &state, 0, "dead"), None);
    assert_eq!(state.solutes.as_ref().unwrap().method, Method::Sweep);
}

/// A two-inlet gradient tree: stage n has n + 2 nodes, node j of a stage feeds nodes j and
/// j + 1 of the next; the last stage drains through one outlet each.
fn gradient_tree(stages: usize) -> String {
    let mut s = String::from(
        "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nspecies:\n  drug: {diffusivity: 5e-10 m^2/s}\n\
         sections:\n  s: {shape: rectangle, width: 100 um, height: 50 um}\nnodes:\n  \
         n0_0: {pressure: 200 mbar, concentrations: {drug: 1 mM}}\n  n0_1: {pressure: 200 mbar}\n",
    );
    let mut channels = String::from("channels:\n");
    for n in 1..=stages {
        for j in 0..n + 2 {
            s.push_str(&format!("  n{n}_{j}: {{}}\n"));
        }
        for j in 0..n + 1 {
            for k in [j, j + 1] {
                channels.push_str(&format!(
                    "  e{n}_{j}_{k}: {{from: n{}_{j}, to: n{n}_{k}, section: s, length: 20 mm}}\n",
                    n - 1
                ));
            }
        }
    }
    for j in 0..stages + 2 {
        s.push_str(&format!("  out{j}: {{pressure: 0 Pa}}\n"));
        channels.push_str(&format!(
            "  x{j}: {{from: n{stages}_{j}, to: out{j}, section: s, length: 20 mm}}\n"
        ));
    }
    s + &channels
}

#[test]
#[allow(clippy::needless_range_loop)] // stage indices name the channels
fn gradient_tree_mass_balance_closed_form() {
    let stages = 4;
    let (chip, state) = load(&gradient_tree(stages));
    // Independent walk stage by stage: flow-weighted averages of the solved flows
    // (mass balance, closed form at each node).
    let mut above = vec![1.0, 0.0]; // mol/m^3 (1 mM and none)
    for n in 1..=stages {
        let mut c = vec![0.0; n + 2];
        let mut q_in = vec![0.0; n + 2];
        for j in 0..n + 1 {
            for k in [j, j + 1] {
                let q = flow(&chip, &state, &format!("e{n}_{j}_{k}"));
                assert!(q > 0.0, "flow runs down the tree");
                c[k] += q * above[j];
                q_in[k] += q;
            }
        }
        for k in 0..n + 2 {
            c[k] /= q_in[k];
            let got = node_c(&chip, &state, 0, &format!("n{n}_{k}")).unwrap();
            approx::assert_relative_eq!(got, c[k], max_relative = 1e-12, epsilon = 1e-15);
        }
        above = c;
    }
    // The outlets make a monotone gradient from one inlet's concentration to the other's.
    let outlets: Vec<f64> = (0..stages + 2)
        .map(|j| node_c(&chip, &state, 0, &format!("out{j}")).unwrap())
        .collect();
    assert!(outlets.windows(2).all(|w| w[0] > w[1]), "{outlets:?}");
    // Mirror symmetry of the tree (equal inlet pressures, equal channels) maps c to 1 mM − c:
    // c_j + c_(N−j) = 1 mM exactly (closed form from the symmetry).
    for j in 0..outlets.len() {
        approx::assert_relative_eq!(
            outlets[j] + outlets[outlets.len() - 1 - j],
            1.0,
            max_relative = 1e-12
        );
    }
    // Edge outlets get only their own inlet's stream (to the rounding of the flow balance).
    approx::assert_relative_eq!(outlets[0], 1.0, max_relative = 1e-12);
    assert_eq!(outlets[outlets.len() - 1], 0.0);
}

#[test]
fn recirculating_loop_mass_balance_closed_form() {
    // Inlet A (node 0, 1 unit of flow, c = 1) feeds ring node 1; inlet B (node 3, 2 units,
    // c = 0) feeds ring node 2; the ring carries 1 + r from 1 to 2 and r back from 2 to 1
    // (a pump in the loop); 3 units leave at node 2 through node 4, where inlet C (node 5,
    // 1 unit, c = 0.5) joins; 4 units leave at node 6.
    let r = 5.0;
    let edges = [
        (0, 1, 1.0),
        (3, 2, 2.0),
        (1, 2, 1.0 + r),
        (1, 2, -r), // written against the flow: r runs from 2 to 1
        (2, 4, 3.0),
        (5, 4, 1.0),
        (4, 6, 4.0),
    ];
    let into = [1.0, 0.0, 0.0, 2.0, 0.0, 1.0, -4.0];
    let g = FlowGraph::new(7, &edges, &into);
    assert!(g.has_cycles());
    let source = [1.0, 0.0, 0.0, 0.0, 0.0, 0.5, 0.0];
    let (c, method) = well_mixed(&g, &source).unwrap();
    assert_eq!(method, Method::SparseLu);
    // Mass balance, closed form: node 2 (3 + r) c2 = (1 + r) c1 and node 1 (1 + r) c1 =
    // 1 + r c2 give c2 = 1/3 and c1 = (3 + r)/(3(1 + r)).
    approx::assert_relative_eq!(c[2].unwrap(), 1.0 / 3.0, max_relative = 1e-12);
    approx::assert_relative_eq!(
        c[1].unwrap(),
        (3.0 + r) / (3.0 * (1.0 + r)),
        max_relative = 1e-12
    );
    // Downstream of the loop: (3 · 1/3 + 1 · 0.5)/4.
    approx::assert_relative_eq!(c[6].unwrap(), 1.5 / 4.0, max_relative = 1e-12);
}

#[test]
fn closed_circulation_without_feed_has_no_concentration() {
    // A ring 0 → 1 → 0 with no inflow from outside next to a fed chain 2 → 3.
    let g = FlowGraph::new(
        4,
        &[(0, 1, 1.0), (1, 0, 1.0), (2, 3, 1.0)],
        &[0.0, 0.0, 1.0, -1.0],
    );
    let (c, _) = well_mixed(&g, &[0.0, 0.0, 2.0, 0.0]).unwrap();
    assert_eq!((c[0], c[1]), (None, None));
    assert_eq!(c[3], Some(2.0));
}

// ---------------------------------------------------------------------------------------
// Conservation on random networks
// ---------------------------------------------------------------------------------------

#[derive(Clone, Debug)]
struct Spec {
    ports: Vec<(u8, f64, f64)>,
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
        let ports = proptest::collection::vec((0u8..3, -500.0..2000.0f64, 0.0..1.0f64), n);
        (Just(n), tree, extra, ports).prop_map(|(n, tree, extra, mut ports)| {
            let mut channels = Vec::new();
            for (i, (idx, d, l)) in tree.into_iter().enumerate() {
                channels.push((idx.index(i + 1), i + 1, d, l));
            }
            channels.extend(extra.into_iter().filter(|c| c.0 != c.1));
            if !ports.iter().any(|p| p.0 == 1) {
                ports[n - 1].0 = 1;
            }
            Spec { ports, channels }
        })
    })
}

fn build(spec: &Spec) -> Network {
    common::ported_network(&spec.ports, &spec.channels)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    /// Conservation law: Σ over outlets of Q·c equals Σ over inlets of Q·c (what flows in
    /// leaves; a steady state stores nothing), counting what rounding-level flows carry into
    /// dead ends.
    #[test]
    fn solute_in_equals_solute_out(s in spec()) {
        let network = build(&s);
        // Random networks the flow solver refuses (balance not met) have no results to test.
        let Ok(state) = steady_state(&network) else {
            return Ok(());
        };
        let flows: Vec<f64> = state.channels.iter().map(|c| c.flow).collect();
        let into = &state.solution.node_net_inflow;
        let source: Vec<f64> = s.ports.iter().map(|p| p.2).collect();
        let result = solutes::solve(&network, &flows, into, &[solutes::Load {
            diffusivity: 1e-9,
            source: &source,
        }]).unwrap();
        let c = &result.fields[0].nodes;
        let (mut inflow, mut outflow, mut through) = (0.0, 0.0, 0.0);
        for (i, &q) in into.iter().enumerate() {
            if matches!(network.nodes[NodeId(i)].port, Port::Junction) {
                continue; // only ports let fluid in or out
            }
            if q > 0.0 {
                inflow += q * source[i];
                through += q;
            } else if q < 0.0 {
                outflow += -q * c[i].expect("an outlet with flow has a concentration");
            }
        }
        // In a network of resistances no channel carries more than the throughflow; where the
        // throughflow is far below the channel flows, every flow is rounding noise (ports at
        // one pressure) and there is nothing to conserve.
        // Rounding scale of the flows: what a channel's end pressures alone would drive.
        let p = &state.solution.pressures;
        let rounding = network.channels.iter().zip(&state.channels)
            .map(|(c, st)| (p[c.from.0].abs() + p[c.to.0].abs()) / st.resistance)
            .fold(0.0f64, f64::max);
        let largest = flows.iter().fold(0.0f64, |m, q| m.max(q.abs()));
        prop_assume!(through > 1e-6 * largest && through > 1e-9 * rounding);
        // Nodes that flow reaches but nothing leaves (dead ends fed by rounding-level flows
        // of the flow solve, which balances to 1e-9) keep what reaches them: count it, and
        // check that those flows are at rounding level.
        let means = &result.fields[0].channels;
        let (sunk, sunk_flow) = common::sunk_into_dead_ends(&network, into, &flows, means);
        prop_assert!(sunk_flow <= 1e-9 * through, "{sunk_flow:e} of {through:e} into dead ends");
        let scale = through * source.iter().fold(0.0f64, |m, &x| m.max(x));
        prop_assert!((inflow - outflow - sunk).abs() <= 1e-12 * scale,
            "in {inflow:e}, out {outflow:e}, into dead ends {sunk:e}");
    }
}

// ---------------------------------------------------------------------------------------
// Diffusion across the width
// ---------------------------------------------------------------------------------------

/// erf by Abramowitz & Stegun (1964) 7.1.26, |error| ≤ 1.5e-7.
fn erf(x: f64) -> f64 {
    let t = 1.0 / (1.0 + 0.3275911 * x.abs());
    let y = 1.0
        - t * (0.254829592
            + t * (-0.284496736 + t * (1.421413741 + t * (-1.453152027 + t * 1.061405429))))
            * (-x * x).exp();
    y.copysign(x)
}

/// Profile across the width ξ ∈ [0, 1] of a stream c = 1 on [0, a) beside c = 0, after
/// Fourier number fo, by the method of images: the infinite-medium solution for a slab
/// (Crank 1975, eq. 2.15) reflected at both no-flux walls (period 2).
fn image_profile(a: f64, fo: f64, xi: f64) -> f64 {
    let s = 2.0 * fo.sqrt();
    // Images up to about 8 diffusion lengths away each side.
    let m = 8 + (4.0 * fo.sqrt()).ceil() as i32;
    (-m..=m)
        .map(|m| {
            let x = xi - 2.0 * m as f64;
            0.5 * (erf((a - x) / s) + erf((a + x) / s))
        })
        .sum()
}

/// 1 − σ/σ₀ from the image profile by the midpoint rule on 20 000 strips.
fn image_mixed(a: f64, fo: f64) -> f64 {
    let n = 20_000;
    let values: Vec<f64> = (0..n)
        .map(|i| image_profile(a, fo, (i as f64 + 0.5) / n as f64))
        .collect();
    let mean = values.iter().sum::<f64>() / n as f64;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n as f64;
    let var0 = a * (1.0 - a);
    1.0 - (var / var0).sqrt()
}

#[test]
fn mixed_fraction_matches_an_independent_solution() {
    // Cosine series (Crank 1975, §4.3) against the method of images (Crank 1975, eq. 2.15
    // reflected), both for no-flux walls.
    for &a in &[0.5, 0.3, 0.1] {
        for &fo in &[0.002, 0.02, 0.1, 0.25, 0.5] {
            let series = mixed_fraction(&[(a, 1.0), (1.0 - a, 0.0)], fo);
            let images = image_mixed(a, fo);
            assert!(
                (series - images).abs() < 2e-5,
                "a = {a}, Fo = {fo}: series {series}, images {images}"
            );
        }
    }
    // Limits: nothing mixed at Fo = 0, uniform for large Fo; only differences matter.
    assert_eq!(mixed_fraction(&[(0.5, 1.0), (0.5, 0.0)], 0.0), 0.0);
    assert!(mixed_fraction(&[(0.5, 1.0), (0.5, 0.0)], 3.0) > 1.0 - 1e-12);
    assert_eq!(mixed_fraction(&[(0.4, 2.0), (0.6, 2.0)], 0.01), 1.0);
    // Two equal streams: the first cosine mode carries (2/π)/(1/√2) ≈ 0.9003 of σ₀, so 90 %
    // mixed falls at exp(−π²Fo) = 0.1/0.9003, Fo = ln(9.003)/π² ≈ 0.2227 (computed).
    let fo90 = (0.1f64 / (2.0f64.sqrt() * 2.0 / std::f64::consts::PI))
        .ln()
        .abs()
        / std::f64::consts::PI.powi(2);
    let at = |fo: f64| mixed_fraction(&[(0.5, 1.0), (0.5, 0.0)], fo);
    assert!((at(fo90) - 0.9).abs() < 1e-6, "{}", at(fo90));
}

// ---------------------------------------------------------------------------------------
// The not_mixed finding
// ---------------------------------------------------------------------------------------

/// Two inlets meet at `y`, run through `mix_a` and `mix_b` (in series, `mid` between) and
/// split at `split` into two outlets; `run` is the length of each mixing channel.
fn mixer(run: &str) -> String {
    format!(
        "
fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}
species:
  drug: {{diffusivity: 5e-10 m^2/s}}
  dye: {{diffusivity: 2e-9 m^2/s}}
sections:
  arm: {{shape: rectangle, width: 100 um, height: 40 um}}
  mix: {{shape: rectangle, width: 200 um, height: 40 um}}
nodes:
  a: {{flow: 2 uL/min, concentrations: {{drug: 10 uM, dye: 1}}}}
  b: {{flow: 1 uL/min, concentrations: {{dye: 0.2}}}}
  y: {{}}
  mid: {{}}
  split: {{}}
  o1: {{pressure: 0 Pa}}
  o2: {{pressure: 0 Pa}}
channels:
  arm_a: {{from: a, to: y, section: arm, length: 5 mm}}
  arm_b: {{from: b, to: y, section: arm, length: 5 mm}}
  mix_a: {{from: y, to: mid, section: mix, length: {run}}}
  mix_b: {{from: mid, to: split, section: mix, length: {run}}}
  out1: {{from: split, to: o1, section: arm, length: 5 mm}}
  out2: {{from: split, to: o2, section: arm, length: 8 mm}}
"
    )
}

fn not_mixed(chip: &Chip, state: &SteadyState) -> Vec<rillnet::analysis::FindingKind> {
    rillnet::analysis::findings(&chip.network, state)
        .into_iter()
        .map(|f| f.kind)
        .filter(|k| k.code() == "not_mixed")
        .collect()
}

#[test]
fn short_mixer_before_a_split_gets_the_finding() {
    let (chip, state) = load(&mixer("2 mm"));
    let found = not_mixed(&chip, &state);
    assert_eq!(found.len(), 1, "{found:?}");
    let rillnet::analysis::FindingKind::NotMixed {
        channel,
        junction,
        species,
        fourier,
        value,
        limit,
    } = found[0]
    else {
        unreachable!()
    };
    // Named: the channel feeding the split, the junction where the streams met.
    assert_eq!(chip.network.channels[channel].name, "mix_b");
    assert_eq!(chip.network.nodes[junction].name, "y");
    assert_eq!(limit, 0.9);
    // The least mixed species is the slower one (drug, D = 5e-10 m^2/s).
    assert_eq!(chip.species[species].name, "drug");
    // Fo = D·Σ t/w² over mix_a and mix_b, from the solved residence times (Crank 1975, §4.3).
    let t: f64 = ["mix_a", "mix_b"]
        .iter()
        .map(|c| state.channels[chip.network.channel_id(c).unwrap().0].residence_time)
        .sum();
    let w = 200e-6;
    approx::assert_relative_eq!(fourier, 5e-10 * t / (w * w), max_relative = 1e-12);
    // The mixed fraction against the independent image solution, streams in proportion to
    // their flows.
    let (qa, qb) = (flow(&chip, &state, "arm_a"), flow(&chip, &state, "arm_b"));
    assert!(qa > 0.0 && qb > 0.0, "both inlets feed the junction");
    let images = image_mixed(qa / (qa + qb), fourier);
    assert!((value - images).abs() < 2e-5, "{value} vs {images}");
    assert!(value < 0.9);
}

#[test]
fn long_serpentine_before_the_split_mixes() {
    let (chip, state) = load(&mixer("300 mm"));
    let found = not_mixed(&chip, &state);
    assert!(found.is_empty(), "{found:?}");
    // And it is long enough by the criterion: Fo of the slow species over both channels.
    let t: f64 = ["mix_a", "mix_b"]
        .iter()
        .map(|c| state.channels[chip.network.channel_id(c).unwrap().0].residence_time)
        .sum();
    let fo = 5e-10 * t / (200e-6f64).powi(2);
    let (qa, qb) = (flow(&chip, &state, "arm_a"), flow(&chip, &state, "arm_b"));
    assert!(qa > 0.0 && qb > 0.0, "both inlets feed the junction");
    assert!(image_mixed(qa / (qa + qb), fo) >= 0.9, "Fo = {fo}");
}

#[test]
fn streams_of_equal_concentration_need_no_mixing() {
    // Both inlets carry 10 uM: nothing to mix, however short the channel.
    let text = mixer("2 mm").replace("dye: 1}", "dye: 0.2}").replace(
        "concentrations: {dye: 0.2}}",
        "concentrations: {dye: 0.2, drug: 10 uM}}",
    );
    let (chip, state) = load(&text);
    assert!(not_mixed(&chip, &state).is_empty());
}

// ---------------------------------------------------------------------------------------
// The chip file and the outputs
// ---------------------------------------------------------------------------------------

/// The error of a chip text (it must be refused).
fn refusal(text: &str) -> String {
    parse_chip(text, "chip.yaml", Syntax::Yaml)
        .map(|_| ())
        .unwrap_err()
        .to_string()
}

#[test]
fn bad_species_input_is_located() {
    let cases: [(&str, &str, &str); 7] = [
        (
            "drug: 10 uM, dye: 1}",
            "dreg: 10 uM, dye: 1}",
            "chip.yaml:9:44:",
        ),
        ("drug: 10 uM, dye: 1}", "drug: -3 uM, dye: 1}", "negative"),
        (
            "drug: {diffusivity: 5e-10 m^2/s}",
            "drug: {}",
            "needs a diffusion coefficient",
        ),
        ("dye: 1}", "dye: 1.5}", "between 0 and 1"),
        (
            "b: {pressure: 70 mbar, concentrations: {drug: 2 uM}}",
            "b: {pressure: 70 mbar, concentrations: {drug: 2 ug/mL}}",
            "one measure",
        ),
        ("t: {}", "t: {concentrations: {drug: 1 uM}}", "junction"),
        (
            "drug: {diffusivity: 5e-10 m^2/s}",
            "drug: {diffusivity: -5e-10 m^2/s}",
            "diffusion coefficient",
        ),
    ];
    for (from, to, expected) in cases {
        assert!(Y.contains(from), "{from}");
        let e = refusal(&Y.replacen(from, to, 1));
        assert!(e.contains(expected), "{to}: {e}");
        // Every refusal names the file and a line.
        assert!(e.starts_with("chip.yaml:"), "{e}");
    }
    let e = refusal(&Y.replacen("drug: 10 uM, dye: 1}", "dreg: 10 uM, dye: 1}", 1));
    assert!(
        e.contains("nodes.a.concentrations.dreg") && e.contains("unknown species 'dreg'"),
        "{e}"
    );
}

#[test]
fn json_and_csv_carry_concentrations_only_with_species() {
    let dir = tempfile::tempdir().unwrap();
    let with = common::write_file(dir.path(), "y.yaml", Y);
    let doc = common::json_of(&with);
    let t = doc["nodes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|n| n["name"] == "t")
        .unwrap();
    let q1 = common::channel_flow(&doc, "c1");
    let q2 = common::channel_flow(&doc, "c2");
    // Mass balance, closed form, through the command line.
    let drug = t["concentrations_mol_per_m3"]["drug"].as_f64().unwrap();
    approx::assert_relative_eq!(
        drug,
        (q1 * 10e-3 + q2 * 2e-3) / (q1 + q2),
        max_relative = 1e-12
    );
    assert!(t["concentrations"]["dye"].as_f64().is_some());
    // The stagnant stub has no well-mixed value: the species is left out of its map.
    let stub = doc["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "stub")
        .unwrap();
    assert!(stub["concentrations_mol_per_m3"]
        .as_object()
        .unwrap()
        .is_empty());
    assert_eq!(doc["species"][1]["measure"], "fraction");
    // Without species none of the keys appear.
    let plain = Y
        .replace(
            "species:\n  drug: {diffusivity: 5e-10 m^2/s}\n  dye: {diffusivity: 40 um^2/s}\n",
            "",
        )
        .replace(", concentrations: {drug: 10 uM, dye: 1}", "")
        .replace(", concentrations: {drug: 2 uM}", "");
    let without = common::write_file(dir.path(), "plain.yaml", &plain);
    let doc = common::json_of(&without);
    assert!(doc.get("species").is_none());
    assert!(doc["nodes"][0].get("concentrations_mol_per_m3").is_none());
    let out = common::rillnet()
        .args(["solve", "--format", "csv"])
        .arg(&with)
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    let header = text.lines().next().unwrap();
    assert!(
        header.ends_with("concentration_drug_mol_per_m3,concentration_dye"),
        "{header}"
    );
}
