//! The laminar co-flow (lateral) solute model: one channel against the analytic series,
//! mixing index, conservation on random networks with a drawing, agreement with the
//! well-mixed model where the streams have mixed, and the order of the streams from the
//! drawing.

mod common;

use proptest::prelude::*;
use rillnet::analysis::solutes::{self, lateral::BINS, Layout, Model};
use rillnet::analysis::SteadyState;
use rillnet::chip::species::Mixing;
use rillnet::chip::Chip;
use rillnet::format::{parse_chip, Syntax};
use rillnet::prelude::*;
use std::f64::consts::PI;

fn load_with(text: &str, mixing: Mixing) -> (Chip, SteadyState) {
    let chip = parse_chip(text, "test.yaml", Syntax::Yaml).unwrap();
    let mut state = steady_state(&chip.network).unwrap();
    state.solutes = rillnet::commands::solve_solutes_with(&chip, &state, mixing).unwrap();
    (chip, state)
}

fn ch(chip: &Chip, name: &str) -> usize {
    chip.network.channel_id(name).unwrap().0
}

fn nd(chip: &Chip, name: &str) -> usize {
    chip.network.node_id(name).unwrap().0
}

/// Two inlets meeting at `j` from the upper left (`a`, dye 1) and lower left (`b`, no dye),
/// one channel `mix` of `length` to the right, then the outlet. The inlet channels are long
/// enough that both inlets feed the junction.
fn y_chip(length: &str, pa: &str, pb: &str) -> String {
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}
species:
  dye: {{diffusivity: 4e-10 m^2/s}}
sections:
  s: {{shape: rectangle, width: 100 um, height: 50 um}}
nodes:
  a: {{pressure: {pa}, concentrations: {{dye: 1}}, at: [0 mm, 1 mm]}}
  b: {{pressure: {pb}, at: [0 mm, -1 mm]}}
  j: {{at: [1 mm, 0 mm]}}
  o: {{pressure: 0 Pa, at: [11 mm, 0 mm]}}
channels:
  ca: {{from: a, to: j, section: s, length: 100 mm}}
  cb: {{from: b, to: j, section: s, length: 100 mm}}
  mix: {{from: j, to: o, section: s, length: {length}}}
"
    )
}

/// Bin averages over `n` equal bins of a step c = 1 on [0, a), 0 on (a, 1] after Fourier
/// number `fo` with no-flux walls, from the cosine series of the step
/// (Crank 1975, *The Mathematics of Diffusion*, §4.3: A_n = 2 sin(nπa)/(nπ)), integrated over
/// each bin in closed form and summed to 40 000 terms (the model sums only until its terms
/// fall below 1e-17, or uses images for small Fo).
fn series_bins(a: f64, fo: f64, n: usize) -> Vec<f64> {
    let dx = 1.0 / n as f64;
    let mut bins = vec![a; n];
    for m in 1..=40_000 {
        let k = m as f64 * PI;
        let coef = 2.0 * (k * a).sin() / k * (-k * k * fo).exp();
        if coef == 0.0 {
            continue;
        }
        for (j, b) in bins.iter_mut().enumerate() {
            let (p, q) = (j as f64 * dx, (j + 1) as f64 * dx);
            *b += coef * ((k * q).sin() - (k * p).sin()) / (k * dx);
        }
    }
    bins
}

#[test]
fn two_streams_in_one_channel_match_the_series() {
    // Two lengths: the model evaluates short times by images and long ones by the series.
    for (length, expect_small) in [("0.3 mm", true), ("40 mm", false)] {
        let (chip, state) = load_with(&y_chip(length, "100 mbar", "90 mbar"), Mixing::Lateral);
        let solutes = state.solutes.as_ref().unwrap();
        assert!(solutes.lateral);
        let (qa, qb) = (
            state.channels[ch(&chip, "ca")].flow,
            state.channels[ch(&chip, "cb")].flow,
        );
        let k = ch(&chip, "mix");
        let w = 100e-6;
        let fo = 4e-10 * state.channels[k].residence_time / (w * w);
        assert_eq!(
            fo < solutes::lateral::IMAGES_BELOW,
            expect_small,
            "Fo = {fo}"
        );
        // Stream a comes from the upper left: looking downstream (to the right) it is on the
        // left wall, ξ from 0 to its share of the flow.
        assert!(qa > 0.0 && qb > 0.0);
        let share = qa / (qa + qb);
        let expected = series_bins(share, fo, BINS);
        let spread = solutes.fields[0].lateral.as_ref().unwrap().channels[k]
            .clone()
            .unwrap();
        for (got, want) in spread.profile.iter().zip(&expected) {
            assert!((got - want).abs() < 1e-10, "Fo {fo}: {got} vs {want}");
        }
        let (lo, hi) = expected
            .iter()
            .fold((f64::MAX, f64::MIN), |m, &x| (m.0.min(x), m.1.max(x)));
        assert!((spread.min - lo).abs() < 1e-10 && (spread.max - hi).abs() < 1e-10);
        // Mixing index 1 − σ/σ₀ on the bins, σ₀ = √(a(1 − a)) for streams of 1 and 0.
        let var = expected.iter().map(|x| (x - share).powi(2)).sum::<f64>() / BINS as f64;
        let index = 1.0 - (var / (share * (1.0 - share))).sqrt();
        assert!((spread.mixing_index - index).abs() < 1e-9, "{index}");
        // The mean is the flow-weighted one (mass balance, closed form).
        let mean = solutes.fields[0].channels[k].unwrap();
        approx::assert_relative_eq!(mean, share, max_relative = 1e-12);
    }
}

#[test]
fn mixing_index_tends_to_one_along_the_channel() {
    // exp(−π²Fo) decay of the slowest mode (Crank 1975, §4.3): longer channels mix more,
    // and at Fo ≥ 2 the profile is uniform to 1e-8.
    let mut last = -1.0;
    for length in ["2 mm", "20 mm", "200 mm", "2000 mm"] {
        let (chip, state) = load_with(&y_chip(length, "100 mbar", "100 mbar"), Mixing::Lateral);
        let k = ch(&chip, "mix");
        let fo = 4e-10 * state.channels[k].residence_time / 1e-8;
        let field = &state.solutes.as_ref().unwrap().fields[0];
        let index = field.lateral.as_ref().unwrap().channels[k]
            .as_ref()
            .unwrap()
            .mixing_index;
        assert!(
            index > last || (last > 1.0 - 1e-12 && index >= last),
            "{length}: {index} after {last}"
        );
        if fo >= 2.0 {
            assert!(index > 1.0 - 1e-8, "Fo {fo}: {index}");
        }
        last = index;
    }
    assert!(last > 1.0 - 1e-8);
}

/// An X junction: inlets a (drug) and b at the upper and lower left, outlets at the upper
/// and lower right, drawn with o1 up or down.
fn x_chip(o1_up: bool) -> String {
    let (y1, y2) = if o1_up { (1, -1) } else { (-1, 1) };
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}
species:
  drug: {{diffusivity: 5e-10 m^2/s}}
sections:
  s: {{shape: rectangle, width: 100 um, height: 50 um}}
nodes:
  a: {{pressure: 100 mbar, concentrations: {{drug: 10 uM}}, at: [0 mm, 1 mm]}}
  b: {{pressure: 100 mbar, at: [0 mm, -1 mm]}}
  x: {{at: [1 mm, 0 mm]}}
  o1: {{pressure: 0 Pa, at: [2 mm, {y1} mm]}}
  o2: {{pressure: 0 Pa, at: [2 mm, {y2} mm]}}
channels:
  ca: {{from: a, to: x, section: s, length: 5 mm}}
  cb: {{from: b, to: x, section: s, length: 5 mm}}
  c1: {{from: x, to: o1, section: s, length: 2 mm}}
  c2: {{from: x, to: o2, section: s, length: 2 mm}}
"
    )
}

#[test]
fn the_drawing_decides_which_outlet_gets_the_drug() {
    for o1_up in [true, false] {
        let (chip, state) = load_with(&x_chip(o1_up), Mixing::Lateral);
        let field = &state.solutes.as_ref().unwrap().fields[0];
        let (c1, c2) = (
            field.nodes[nd(&chip, "o1")].unwrap(),
            field.nodes[nd(&chip, "o2")].unwrap(),
        );
        // Symmetric X, equal flows: the upper inlet's stream leaves by the upper outlet
        // (streams do not cross), little mixed after 2 mm (Fo ≈ 0.01).
        let (upper, lower) = if o1_up { (c1, c2) } else { (c2, c1) };
        assert!(
            upper > 0.8 * 10e-3 && lower < 0.2 * 10e-3,
            "{upper} {lower}"
        );
        // What leaves equals what came in (mass balance): equal flows, mean 5 uM.
        approx::assert_relative_eq!(upper + lower, 10e-3, max_relative = 1e-9);
        assert!(state.solutes.as_ref().unwrap().notes.is_empty());
    }
    // The well-mixed model splits the mixture evenly.
    let (chip, state) = load_with(&x_chip(true), Mixing::Well);
    let field = &state.solutes.as_ref().unwrap().fields[0];
    approx::assert_relative_eq!(
        field.nodes[nd(&chip, "o1")].unwrap(),
        5e-3,
        max_relative = 1e-12
    );
}

#[test]
fn without_a_drawing_the_file_order_is_used_and_said() {
    let text = x_chip(true).replace("x: {at: [1 mm, 0 mm]}", "x: {}");
    let (chip, state) = load_with(&text, Mixing::Lateral);
    let solutes = state.solutes.as_ref().unwrap();
    assert!(solutes.lateral);
    assert_eq!(
        solutes.notes,
        vec![solutes::SoluteNote::FileOrder(vec![chip
            .network
            .node_id("x")
            .unwrap()])]
    );
}

/// Split after a mixing channel long enough that the streams are uniform (Fo > 4).
const MIX_THEN_SPLIT: &str = "
fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
species:
  drug: {diffusivity: 1e-9 m^2/s}
  dye: {diffusivity: 5e-9 m^2/s}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  a: {pressure: 30 mbar, concentrations: {drug: 10 uM, dye: 0.2}, at: [0 mm, 1 mm]}
  b: {pressure: 28 mbar, concentrations: {drug: 1 uM, dye: 1}, at: [0 mm, -1 mm]}
  j: {at: [1 mm, 0 mm]}
  s: {at: [6 mm, 0 mm]}
  o1: {pressure: 0 Pa, at: [7 mm, 1 mm]}
  o2: {pressure: 0 Pa, at: [7 mm, -1 mm]}
channels:
  ca: {from: a, to: j, section: s, length: 100 mm}
  cb: {from: b, to: j, section: s, length: 100 mm}
  mix: {from: j, to: s, section: s, length: 200 mm, path: [[3 mm, 0 mm]]}
  c1: {from: s, to: o1, section: s, length: 5 mm}
  c2: {from: s, to: o2, section: s, length: 8 mm}
";

#[test]
fn lateral_means_equal_well_mixed_ones_where_the_streams_have_mixed() {
    let (chip, lat) = load_with(MIX_THEN_SPLIT, Mixing::Lateral);
    let (_, well) = load_with(MIX_THEN_SPLIT, Mixing::Well);
    let k = ch(&chip, "mix");
    for inlet in ["ca", "cb"] {
        assert!(lat.channels[ch(&chip, inlet)].flow > 0.0);
    }
    // Both species past Fo = 4 in the mixing channel: exp(−π²·4) ≈ 7e-18 of the step left
    // (Crank 1975, §4.3, first mode).
    assert!(1e-9 * lat.channels[k].residence_time / 1e-8 > 4.0);
    for species in 0..2 {
        let (l, w) = (
            &lat.solutes.as_ref().unwrap().fields[species],
            &well.solutes.as_ref().unwrap().fields[species],
        );
        for (a, b) in l.nodes.iter().zip(&w.nodes) {
            approx::assert_relative_eq!(a.unwrap(), b.unwrap(), max_relative = 1e-9);
        }
        for (a, b) in l.channels.iter().zip(&w.channels) {
            approx::assert_relative_eq!(a.unwrap(), b.unwrap(), max_relative = 1e-9);
        }
        let spread = l.lateral.as_ref().unwrap().channels[ch(&chip, "c1")]
            .as_ref()
            .unwrap();
        assert!(spread.mixing_index > 1.0 - 1e-8, "{spread:?}");
    }
}

#[test]
fn a_recirculating_flow_falls_back_to_well_mixed_with_a_note() {
    // Flows given directly: a ring j → k → j carrying more than passes through (a pump in the
    // loop), fed at a and drained at o.
    let chip = parse_chip(
        "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
species:
  dye: {diffusivity: 4e-10 m^2/s}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  a: {pressure: 10 mbar, concentrations: {dye: 1}}
  j: {}
  k: {}
  o: {pressure: 0 Pa}
channels:
  in: {from: a, to: j, section: s, length: 5 mm}
  jk: {from: j, to: k, section: s, length: 5 mm}
  kj: {from: k, to: j, section: s, length: 5 mm}
  out: {from: k, to: o, section: s, length: 5 mm}
",
        "t.yaml",
        Syntax::Yaml,
    )
    .unwrap();
    let flows = [1.0, 3.0, 2.0, 1.0];
    let into = [1.0, 0.0, 0.0, -1.0];
    let source = &chip.species[0].inlet;
    let loads = [solutes::Load {
        diffusivity: 4e-10,
        source,
    }];
    let layout = Layout::default();
    let got =
        solutes::solve_with(&chip.network, &flows, &into, &loads, Model::Lateral(layout)).unwrap();
    assert!(!got.lateral);
    assert_eq!(got.notes, vec![solutes::SoluteNote::LateralRecirculates]);
    // Mass balance: all the dye that enters leaves at o (well mixed, closed form c = 1).
    approx::assert_relative_eq!(got.fields[0].nodes[3].unwrap(), 1.0, max_relative = 1e-12);
}

// ---------------------------------------------------------------------------------------
// Conservation on random networks with a drawing
// ---------------------------------------------------------------------------------------

#[derive(Clone, Debug)]
struct Spec {
    ports: Vec<(u8, f64, f64)>,
    at: Vec<(f64, f64)>,
    channels: Vec<(usize, usize, f64, f64)>,
}

fn spec() -> impl Strategy<Value = Spec> {
    (3usize..20).prop_flat_map(|n| {
        let tree = proptest::collection::vec(
            (any::<prop::sample::Index>(), 20.0..300.0f64, 0.5..50.0f64),
            n - 1,
        );
        let extra =
            proptest::collection::vec((0..n, 0..n, 20.0..300.0f64, 0.5..50.0f64), 0..(2 * n));
        let ports = proptest::collection::vec((0u8..3, -500.0..2000.0f64, 0.0..1.0f64), n);
        let at = proptest::collection::vec((-0.01..0.01f64, -0.01..0.01f64), n);
        (Just(n), tree, extra, ports, at).prop_map(|(n, tree, extra, mut ports, at)| {
            let mut channels = Vec::new();
            for (i, (idx, d, l)) in tree.into_iter().enumerate() {
                channels.push((idx.index(i + 1), i + 1, d, l));
            }
            channels.extend(extra.into_iter().filter(|c| c.0 != c.1));
            if !ports.iter().any(|p| p.0 == 1) {
                ports[n - 1].0 = 1;
            }
            Spec {
                ports,
                at,
                channels,
            }
        })
    })
}

fn build(spec: &Spec) -> Network {
    common::ported_network(&spec.ports, &spec.channels)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    /// Conservation law: Σ over the flows leaving the chip of Q·c equals Σ over the inlets of
    /// Q·c (a steady state stores nothing), with the streams placed by a random drawing.
    #[test]
    fn lateral_solute_in_equals_solute_out(s in spec()) {
        let network = build(&s);
        let Ok(state) = steady_state(&network) else {
            return Ok(());
        };
        let flows: Vec<f64> = state.channels.iter().map(|c| c.flow).collect();
        let into = &state.solution.node_net_inflow;
        let source: Vec<f64> = s.ports.iter().map(|p| p.2).collect();
        let node_at: Vec<Option<[f64; 2]>> = s.at.iter().map(|p| Some([p.0, p.1])).collect();
        let paths = vec![Vec::new(); network.channels.len()];
        let layout = Layout { node_at: &node_at, channel_path: &paths };
        let result = solutes::solve_with(&network, &flows, into, &[solutes::Load {
            diffusivity: 1e-9,
            source: &source,
        }], Model::Lateral(layout)).unwrap();
        // A network of resistances does not recirculate, except at rounding level (flows of
        // 1e-16 of the rest around a loop of dead-end channels); such flow fields fall back to
        // the well-mixed model (tested above) and are not this test's subject.
        prop_assume!(result.lateral);
        let leaving = &result.fields[0].lateral.as_ref().unwrap().leaving;
        // As for the well-mixed model (tests/solutes.rs): skip flow fields that are rounding
        // noise.
        let through: f64 = into.iter().enumerate()
            .filter(|(i, _)| !matches!(network.nodes[NodeId(*i)].port, Port::Junction))
            .map(|(_, &q)| q.max(0.0)).sum();
        let p = &state.solution.pressures;
        let rounding = network.channels.iter().zip(&state.channels)
            .map(|(c, st)| (p[c.from.0].abs() + p[c.to.0].abs()) / st.resistance)
            .fold(0.0f64, f64::max);
        let largest = flows.iter().fold(0.0f64, |m, q| m.max(q.abs()));
        prop_assume!(through > 1e-6 * largest && through > 1e-9 * rounding);
        let (mut inflow, mut outflow) = (0.0, 0.0);
        for (i, &q) in into.iter().enumerate() {
            if matches!(network.nodes[NodeId(i)].port, Port::Junction) {
                continue;
            }
            if q > 0.0 {
                inflow += q * source[i];
            } else if q < 0.0 {
                outflow += -q * leaving[i].expect("an outlet with flow has a concentration");
            }
        }
        // Nodes that flow reaches but nothing leaves (dead ends fed by rounding-level flows
        // of the flow solve, which balances to 1e-9) keep what reaches them: count it, and
        // check that those flows are at rounding level.
        let means = &result.fields[0].channels;
        let (sunk, sunk_flow) = common::sunk_into_dead_ends(&network, into, &flows, means);
        prop_assert!(sunk_flow <= 1e-9 * through, "{sunk_flow:e} of {through:e} into dead ends");
        let scale = through * source.iter().fold(0.0f64, |m, &x| m.max(x));
        prop_assert!((inflow - outflow - sunk).abs() <= 1e-12 * scale,
            "in {inflow:e}, out {outflow:e}, into dead ends {sunk:e}");
        // Every profile stays within the inlet concentrations (diffusion makes no new
        // extremes: maximum principle), up to the flows' own balance: a node's profile is
        // what arrives scaled by (flow in)/(flow out), which the flow solve balances to 1e-9 of
        // the throughflow; for a channel carrying at least 1e-3 of the throughflow that is
        // 1e-6 at most. (Channels at rounding-level flow are not held to it.)
        let hi = source.iter().fold(0.0f64, |m, &x| m.max(x));
        let spreads = &result.fields[0].lateral.as_ref().unwrap().channels;
        for (sp, q) in spreads.iter().zip(&flows) {
            let Some(sp) = sp else { continue };
            prop_assert!((0.0..=1.0).contains(&sp.mixing_index));
            if q.abs() >= 1e-3 * through {
                prop_assert!(sp.min >= -1e-6 * hi && sp.max <= hi * (1.0 + 1e-6),
                    "{} {} {hi}", sp.min, sp.max);
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// Command line and documents
// ---------------------------------------------------------------------------------------

#[test]
fn solve_mixing_lateral_writes_min_max_and_index() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("y.yaml");
    let text = y_chip("20 mm", "100 mbar", "90 mbar");
    std::fs::write(&path, &text).unwrap();
    let doc = common::run_json([
        "solve".as_ref(),
        "--mixing".as_ref(),
        "lateral".as_ref(),
        "--format".as_ref(),
        "json".as_ref(),
        path.as_os_str(),
    ]);
    assert_eq!(doc["solute_model"]["model"], "lateral");
    let mix = doc["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "mix")
        .unwrap();
    // A plain-fraction species: keys without a unit.
    let min = mix["concentrations_min"]["dye"].as_f64().unwrap();
    let max = mix["concentrations_max"]["dye"].as_f64().unwrap();
    let mean = mix["concentrations"]["dye"].as_f64().unwrap();
    assert!(
        0.0 <= min && min < mean && mean < max && max <= 1.0,
        "{min} {mean} {max}"
    );
    let index = mix["mixing_index"]["dye"].as_f64().unwrap();
    assert!(index > 0.0 && index < 1.0, "{index}");
    // The chip-file key gives the same document; CSV carries the columns.
    let keyed = dir.path().join("k.yaml");
    std::fs::write(&keyed, format!("mixing: lateral\n{text}")).unwrap();
    assert_eq!(common::json_of(&keyed)["channels"], doc["channels"]);
    let out = common::rillnet()
        .args(["solve", "--format", "csv"])
        .arg(&keyed)
        .output()
        .unwrap();
    let csv = String::from_utf8(out.stdout).unwrap();
    let header = csv.lines().next().unwrap();
    assert!(header.contains("concentration_dye_min,concentration_dye_max,mixing_index_dye"));
    // Without the option nothing changes: no lateral keys.
    let well = common::json_of(&path);
    assert!(well.get("solute_model").is_none());
    assert!(well["channels"][0].get("mixing_index").is_none());
}

// ---------------------------------------------------------------------------------------
// Pictures
// ---------------------------------------------------------------------------------------

/// A split after a short mixing channel, drawn, lateral by the chip-file key.
const SPLIT: &str = "mixing: lateral
fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
species:
  drug: {diffusivity: 5e-10 m^2/s}
  dye: {diffusivity: 4e-10 m^2/s}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  a: {pressure: 100 mbar, concentrations: {drug: 10 uM}, at: [0 mm, 1 mm]}
  b: {pressure: 90 mbar, concentrations: {dye: 1}, at: [0 mm, -1 mm]}
  j: {at: [1 mm, 0 mm]}
  s: {at: [11 mm, 0 mm]}
  o1: {pressure: 0 Pa, at: [12 mm, 1 mm]}
  o2: {pressure: 0 Pa, at: [12 mm, -1 mm]}
  o3: {pressure: 0 Pa, at: [12 mm, -2 mm]}
channels:
  ca: {from: a, to: j, section: s, length: 100 mm}
  cb: {from: b, to: j, section: s, length: 100 mm}
  mix: {from: j, to: s, section: s, length: 20 mm}
  c1: {from: s, to: o1, section: s, length: 5 mm}
  c2: {from: s, to: o2, section: s, length: 5 mm}
  c3: {from: s, to: o3, section: s, length: 5 mm}
";

fn svg_texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| {
            n.descendants()
                .filter_map(|t| t.text())
                .map(str::trim)
                .find(|t| !t.is_empty())
                .map(String::from)
        })
        .collect()
}

#[test]
fn species_pictures_are_drawn_and_deterministic() {
    let dir = tempfile::tempdir().unwrap();
    let chip = dir.path().join("split.yaml");
    std::fs::write(&chip, SPLIT).unwrap();
    let run = |args: &[&str], out: &str| {
        let path = dir.path().join(out);
        common::rillnet()
            .arg("plot")
            .arg(&chip)
            .args(args)
            .arg("-o")
            .arg(&path)
            .assert()
            .success();
        std::fs::read_to_string(path).unwrap()
    };
    let coloured = run(&["--colour", "species", "--species", "dye"], "dye.svg");
    let texts = svg_texts(&coloured);
    assert!(texts.iter().any(|t| t.contains("colour: dye")), "{texts:?}");
    assert!(texts.iter().any(|t| t == "dye [fraction]"), "{texts:?}");
    let outlets = run(&["--show", "outlets"], "outlets.svg");
    let texts = svg_texts(&outlets);
    for name in ["o1", "o2", "o3", "drug (1 = 10.0 µM)", "dye (1 = 1.00)"] {
        assert!(texts.iter().any(|t| t == name), "{name}: {texts:?}");
    }
    // Three outlets per species: circles for the first, triangles (paths/polygons) for the
    // second; at least the three circles are there.
    let doc = roxmltree::Document::parse(&outlets).unwrap();
    assert!(
        doc.descendants()
            .filter(|n| n.has_tag_name("circle"))
            .count()
            >= 3
    );
    // Same input, same bytes.
    assert_eq!(run(&["--show", "outlets"], "again.svg"), outlets);
    assert_eq!(
        run(&["--colour", "species", "--species", "dye"], "dye2.svg"),
        coloured
    );
    // An unknown species is refused with the names the chip declares (exit 2).
    let refused = common::rillnet()
        .arg("plot")
        .arg(&chip)
        .args(["--colour", "species", "--species", "dgu", "-o"])
        .arg(dir.path().join("x.svg"))
        .output()
        .unwrap();
    assert_eq!(refused.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&refused.stderr).contains("declares: drug, dye"));
    // The report folder has both pictures.
    let folder = dir.path().join("report");
    common::rillnet()
        .arg("report")
        .arg(&chip)
        .arg("-o")
        .arg(&folder)
        .assert()
        .success();
    for f in ["species.svg", "species.png", "outlets.svg", "outlets.png"] {
        assert!(folder.join(f).exists(), "{f}");
    }
}

#[test]
fn a_wrong_mixing_key_is_located() {
    let text = format!("mixing: lateal\n{}", x_chip(true));
    let err = parse_chip(&text, "chip.yaml", Syntax::Yaml)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("chip.yaml:1:9") && err.contains("expected `well` or `lateral`"),
        "{err}"
    );
}
