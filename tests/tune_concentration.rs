//! Concentration targets in `tune`: the well-mixed concentrations are flow-weighted means of
//! what the inlets let in (mass balance at every junction; Bruus, *Theoretical Microfluidics*
//! 2008, ch. 4 for the flows), so a target concentration is a target flow ratio. Every answer
//! is checked end to end: the tuned copy is written, read back and solved.

mod common;

use common::{channel_flow, json_of, rillnet, write_file};

/// Two pressure inlets into a Y, one outlet: the drug stream (10 µM) and the buffer (0).
const DILUTION: &str = "\
name: two-inlet dilution
fluid: {model: water, temperature: 20 degC}
species:
  drug: {diffusivity: 5e-10 m^2/s}
sections:
  feed: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  drug_in: {pressure: 50 mbar, concentrations: {drug: 10 uM}, adjust: {min: 0 mbar, max: 200 mbar}}
  buffer_in: {pressure: 50 mbar, adjust: {min: 0 mbar, max: 200 mbar}}
  y: {}
  outlet: {pressure: 0 Pa}
channels:
  from_drug: {from: drug_in, to: y, section: feed, length: 10 mm}
  from_buffer: {from: buffer_in, to: y, section: feed, length: 14 mm}
  mixed: {from: y, to: outlet, section: feed, length: 20 mm}
targets:
  - {channel: mixed, concentration: {species: drug, value: 4 uM}, tolerance: 1e-12}
";

fn conc(report: &serde_json::Value, channel: &str) -> f64 {
    report["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == channel)
        .unwrap()["concentrations_mol_per_m3"]["drug"]
        .as_f64()
        .unwrap()
}

#[test]
fn dilution_pressures_give_the_hand_solved_flow_ratio_end_to_end() {
    // Closed form derived here (mass balance at the Y): c_out = c_a·q_a/(q_a + q_b), so
    // c_out = 4 µM from c_a = 10 µM needs q_a/(q_a + q_b) = 0.4.
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "dilution.yaml", DILUTION);
    let tuned = dir.path().join("tuned.yaml");
    let out = rillnet()
        .args(["tune", "--format", "json", "-o"])
        .arg(&tuned)
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let t = &doc["targets"][0];
    assert_eq!(t["met"], true, "{t}");
    assert_eq!(t["kind"], "concentration_mol_per_m3");
    let solved = json_of(&tuned);
    let (qa, qb) = (
        channel_flow(&solved, "from_drug"),
        channel_flow(&solved, "from_buffer"),
    );
    let share = qa / (qa + qb);
    assert!((share - 0.4).abs() <= 1e-9 * 0.4, "share {share}");
    let c = conc(&solved, "mixed");
    let wanted = 4e-3; // 4 µM in mol/m³
    assert!((c - wanted).abs() <= 1e-9 * wanted, "c {c}");
}

/// Three outlets, each fed from both inlet manifolds through its own pair of channels; the
/// outlet pressures (and the inlets) are adjustable. Closed form derived here: with p_a > p_b
/// the drug share at mixing node k, g_a(p_a − p_k)/(g_a(p_a − p_k) + g_b(p_b − p_k)), runs
/// from g_a/(g_a + g_b) (p_k far below) to 1 (p_k = p_b): 0.75, 0.5 and 0.25 upwards for
/// the three pairs, so 9, 7 and 4 µM (shares 0.9, 0.7, 0.4) are reachable.
const GRADIENT: &str = "\
name: three-step gradient
fluid: {model: water, temperature: 20 degC}
species:
  drug: {diffusivity: 5e-10 m^2/s}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  drug_in: {pressure: 100 mbar, concentrations: {drug: 10 uM}, adjust: {min: 0 mbar, max: 200 mbar}}
  buffer_in: {pressure: 100 mbar, adjust: {min: 0 mbar, max: 200 mbar}}
  a: {}
  b: {}
  m1: {}
  m2: {}
  m3: {}
  out_1: {pressure: 0 Pa, adjust: {min: 0 mbar, max: 50 mbar}}
  out_2: {pressure: 0 Pa, adjust: {min: 0 mbar, max: 50 mbar}}
  out_3: {pressure: 0 Pa, adjust: {min: 0 mbar, max: 50 mbar}}
channels:
  feed_a: {from: drug_in, to: a, section: s, length: 5 mm}
  feed_b: {from: buffer_in, to: b, section: s, length: 5 mm}
  a1: {from: a, to: m1, section: s, length: 10 mm}
  b1: {from: b, to: m1, section: s, length: 30 mm}
  a2: {from: a, to: m2, section: s, length: 20 mm}
  b2: {from: b, to: m2, section: s, length: 20 mm}
  a3: {from: a, to: m3, section: s, length: 30 mm}
  b3: {from: b, to: m3, section: s, length: 10 mm}
  o1: {from: m1, to: out_1, section: s, length: 15 mm}
  o2: {from: m2, to: out_2, section: s, length: 15 mm}
  o3: {from: m3, to: out_3, section: s, length: 15 mm}
targets:
  - {gradient: [o1, o2, o3], species: drug, values: [9 uM, 7 uM, 4 uM], tolerance: 1e-10}
";

#[test]
fn gradient_across_three_outlets_is_met_end_to_end() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "gradient.yaml", GRADIENT);
    let tuned = dir.path().join("tuned.yaml");
    let out = rillnet()
        .args(["tune", "--format", "json", "-o"])
        .arg(&tuned)
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    let doc: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["targets"].as_array().unwrap().len(), 3);
    let solved = json_of(&tuned);
    for (k, wanted_um) in [(1, 9.0), (2, 7.0), (3, 4.0)] {
        let wanted = wanted_um * 1e-3;
        // Closed form derived here: each mixing node sees q_a·10 µM/(q_a + q_b).
        let qa = channel_flow(&solved, &format!("a{k}"));
        let qb = channel_flow(&solved, &format!("b{k}"));
        let mean = 10e-3 * qa / (qa + qb);
        assert!((mean - wanted).abs() <= 1e-9 * wanted, "o{k}: {mean}");
        let c = conc(&solved, &format!("o{k}"));
        assert!((c - wanted).abs() <= 1e-9 * wanted, "o{k}: {c}");
    }
}

#[test]
fn a_target_above_the_strongest_inlet_is_unmet_and_says_why() {
    let dir = tempfile::tempdir().unwrap();
    let text = DILUTION.replace("value: 4 uM}, tolerance: 1e-12", "value: 15 uM}");
    let chip = write_file(dir.path(), "high.yaml", &text);
    let out = rillnet().arg("tune").arg(&chip).output().unwrap();
    assert_eq!(out.status.code(), Some(1), "{out:?}");
    let text_out = String::from_utf8_lossy(&out.stdout);
    assert!(text_out.contains("NOT MET"), "{text_out}");
    assert!(
        text_out.contains("unreachable") && text_out.contains("flow-weighted mean"),
        "{text_out}"
    );
    let json = rillnet()
        .args(["tune", "--format", "json"])
        .arg(&chip)
        .output()
        .unwrap();
    assert_eq!(json.status.code(), Some(1));
    let doc: serde_json::Value = serde_json::from_slice(&json.stdout).unwrap();
    let t = &doc["targets"][0];
    assert_eq!(t["met"], false);
    let range = t["unreachable_beyond_inlet_range"].as_array().unwrap();
    assert_eq!(range[0].as_f64(), Some(0.0));
    assert!((range[1].as_f64().unwrap() - 10e-3).abs() <= 1e-15);
    // The closest the drives get is the drug stream alone: 10 µM.
    assert!(
        (t["reached"].as_f64().unwrap() - 10e-3).abs() <= 1e-6 * 10e-3,
        "{t}"
    );
}

#[test]
fn bad_concentration_targets_are_refused_with_their_place() {
    let dir = tempfile::tempdir().unwrap();
    for (from, to, says) in [
        (
            "species: drug, value: 4 uM}",
            "species: dye, value: 4 uM}",
            "unknown species 'dye'",
        ),
        (
            "species: drug, value: 4 uM}",
            "species: drug, value: 2 mg/mL}",
            "same measure",
        ),
        (
            "{channel: mixed, concentration: {species: drug, value: 4 uM}, tolerance: 1e-12}",
            "{gradient: [mixed, from_drug], species: drug, values: [4 uM]}",
            "one value per channel",
        ),
        (
            "species: drug, value: 4 uM}",
            "species: drug, value: -4 uM}",
            "negative",
        ),
    ] {
        let text = DILUTION.replacen(from, to, 1);
        assert_ne!(text, DILUTION);
        let chip = write_file(dir.path(), "bad.yaml", &text);
        let out = rillnet().arg("tune").arg(&chip).output().unwrap();
        assert_eq!(out.status.code(), Some(2), "{to}: {out:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(says), "{to}: {err}");
        // The place: the 'targets:' key's line (1-based).
        let line = text
            .lines()
            .position(|l| l.starts_with("targets:"))
            .unwrap()
            + 1;
        assert!(
            err.contains(&format!("bad.yaml:{line}:")),
            "{to}: place missing: {err}"
        );
    }
}

#[test]
fn analytic_concentration_derivative_matches_the_closed_form() {
    // Closed form derived here: c = c_a·q_a/(q_a + q_b) at the Y, so along a change of the
    // drug inlet's pressure dc/dp = c_a·(q_b·dq_a − q_a·dq_b)/(q_a + q_b)², with the flows'
    // derivatives exact (they are linear in the drives: the unit response).
    use rillnet::analysis::kirchhoff::{conductances, drive_values};
    use rillnet::analysis::solutes::{well_mixed, well_mixed_tangent, FlowGraph};
    use rillnet::analysis::Solver;
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "dilution.yaml", DILUTION);
    let chip = rillnet::load_chip(&chip).unwrap();
    let net = &chip.network;
    let solver = Solver::new(net).unwrap();
    let factor = solver.factorize(conductances(net)).unwrap();
    let base = drive_values(net);
    let a = net.node_id("drug_in").unwrap();
    let mut unit = vec![0.0; base.len()];
    unit[a.0] = 1.0;
    let st = factor.solve(&base).unwrap();
    let du = factor.solve(&unit).unwrap();
    let g = FlowGraph::of_network(net, &st.flows, &st.node_net_inflow);
    let source = &chip.species[0].inlet;
    let (c, _) = well_mixed(&g, source).unwrap();
    let dc = well_mixed_tangent(
        net,
        &st.flows,
        &st.node_net_inflow,
        &g,
        &c,
        source,
        &du.flows,
        &du.node_net_inflow,
    )
    .unwrap();
    let k = |n: &str| net.channel_id(n).unwrap().0;
    let (qa, qb) = (st.flows[k("from_drug")], st.flows[k("from_buffer")]);
    let (dqa, dqb) = (du.flows[k("from_drug")], du.flows[k("from_buffer")]);
    let expected = 10e-3 * (qb * dqa - qa * dqb) / (qa + qb).powi(2);
    let y = net.node_id("y").unwrap();
    let got = dc[y.0].unwrap();
    let rel = (got - expected).abs() / expected.abs();
    println!("analytic dc/dp relative error {rel:.1e}");
    assert!(rel <= 1e-12, "{got} vs {expected}: {rel:e}");
}
