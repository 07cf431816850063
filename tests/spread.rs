//! `spread`: tolerances propagated to flows and splits, first order beside Monte Carlo.
//!
//! Sources: the rectangle's conductance series (Shah & London 1978, eq. for fully developed
//! flow in rectangular ducts; also Bruus, Theoretical Microfluidics 2008, §4.4), implemented
//! here independently of the library; Poiseuille's law Q = K·Δp/(μL) for the closed-form
//! dependence on length and viscosity; the standard error of a sample standard deviation,
//! σ/√(2(n − 1)) for normal data (common practice).

mod common;

use common::{rillnet, write_file};
use proptest::prelude::*;
use rillnet::analysis::spread::{Prepared, Quantity, Shard};
use rillnet::format::{parse_chip, Syntax};
use std::f64::consts::PI;

fn chip(text: &str) -> rillnet::chip::Chip {
    parse_chip(text, "test.yaml", Syntax::Yaml).unwrap()
}

/// K of a w × h rectangle from the series (Shah & London 1978), summed here to 1e-16.
fn k_series(w: f64, h: f64) -> f64 {
    let (w, h) = if w >= h { (w, h) } else { (h, w) };
    let mut sum = 0.0;
    let mut n = 1.0_f64;
    while n < 2001.0 {
        sum += (n * PI * w / (2.0 * h)).tanh() / n.powi(5);
        n += 2.0;
    }
    w * h.powi(3) / 12.0 * (1.0 - 192.0 * h / (PI.powi(5) * w) * sum)
}

fn one_channel(tolerance: &str) -> String {
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}
sections:
  lane: {{shape: rectangle, width: 100 um, height: 50 um, tolerance: {tolerance}}}
nodes:
  a: {{pressure: 100 mbar}}
  b: {{pressure: 0 Pa}}
channels:
  c1: {{from: a, to: b, section: lane, length: 12 mm}}
"
    )
}

/// Only the height toleranced (normal, σ_h/h = 1 %): the Monte Carlo relative standard
/// deviation of the flow matches (d ln K/d ln h)·σ_h/h from the series within its sampling
/// error, and the first-order value matches it to the accuracy of the derivative.
#[test]
fn height_only_matches_the_series_derivative() {
    let c = chip(&one_channel("{height: {value: 2 %, sigmas: 2}}"));
    let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
    let (w, h) = (100e-6, 50e-6);
    let e = 1e-5;
    let dlnk_dlnh = (k_series(w, h * (1.0 + e)).ln() - k_series(w, h * (1.0 - e)).ln()) / (2.0 * e);
    let expected = dlnk_dlnh * 0.01;
    let q0 = p.nominal[0];
    assert!(matches!(p.quantities[0], Quantity::Flow(_)));
    // First order: the library's adjoint and closed form against the series here.
    let lin = p.std_linear(0) / q0;
    assert!(
        (lin - expected).abs() < 1e-6 * expected,
        "{lin} vs {expected}"
    );
    let n = 20_000;
    let r = p.finish(p.monte_carlo(n, 11, Shard::WHOLE), 11, Shard::WHOLE, n);
    let s = &r.stats[0];
    let mc = s.std / q0;
    let se = expected / (2.0 * (n as f64 - 1.0)).sqrt();
    assert!(
        (mc - expected).abs() < 4.0 * se,
        "MC {mc} vs {expected} ± {se}"
    );
    assert!(s.agree);
    assert_eq!(r.withheld, 0);
    // Percentiles of a nearly normal flow: about ∓1.645 σ around the mean.
    assert!((s.p95 - s.p05) / (2.0 * 1.645 * s.std) > 0.9);
    assert!((s.p95 - s.p05) / (2.0 * 1.645 * s.std) < 1.1);
    // The variance is all the height's.
    assert_eq!(s.contributions.len(), 1);
    assert!((s.contributions[0].1 - 1.0).abs() < 1e-12);
}

/// Q = K·Δp/(μL) (Poiseuille): d ln Q/d ln L = −1 and d ln Q/d ln μ = −1, so the first-order
/// relative standard deviations equal those of the length and of the viscosity.
#[test]
fn length_and_viscosity_first_order() {
    let text = one_channel("{width: 1 um}")
        .replace(
            "length: 12 mm}",
            "length: 12 mm, tolerance: {length: {value: 120 um, sigmas: 3}}}",
        )
        .replace(
            "density: 1000 kg/m^3}",
            "density: 1000 kg/m^3, tolerance: {viscosity: {value: 3 %, distribution: uniform}}}",
        );
    let c = chip(&text);
    let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
    let labels: Vec<&str> = p.variables.iter().map(|v| v.label.as_str()).collect();
    assert_eq!(
        labels,
        [
            "fluid.tolerance.viscosity",
            "sections.lane.tolerance.width",
            "channels.c1.tolerance.length"
        ]
    );
    let q0 = p.nominal[0];
    let g = &p.gradient[0];
    // Length: σ_L = 40 um, dQ/dz = −Q·σ_L/L.
    assert!((g[2] / q0 + 40e-6 / 12e-3).abs() < 1e-9);
    // Viscosity, uniform ±3 %: dQ/dz = −Q·0.03 per unit z on [−1, 1].
    assert!((g[0] / q0 + 0.03).abs() < 1e-9);
}

/// A flow port's accuracy: the channel carries exactly the pump's flow (the only path), so
/// σ_Q = σ_pump (closed form derived here), in both methods.
#[test]
fn pump_accuracy_passes_through() {
    let text = "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
sections:
  lane: {shape: circle, diameter: 100 um, tolerance: {diameter: 1 um}}
nodes:
  pump: {flow: 10 uL/min, tolerance: {flow: 2 %}}
  out: {pressure: 0 Pa}
channels:
  c1: {from: pump, to: out, section: lane, length: 10 mm}
";
    let c = chip(text);
    let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
    let q0 = p.nominal[0];
    assert!((p.std_linear(0) / q0 - 0.01).abs() < 1e-9);
    let n = 4000;
    let r = p.finish(p.monte_carlo(n, 3, Shard::WHOLE), 3, Shard::WHOLE, n);
    let se = 0.01 / (2.0 * (n as f64 - 1.0)).sqrt();
    assert!((r.stats[0].std / q0 - 0.01).abs() < 4.0 * se);
}

fn two_parallel(grouped: bool) -> String {
    let group = if grouped { ", group: layer_1" } else { "" };
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}
sections:
  lane: {{shape: rectangle, width: 100 um, height: 50 um, tolerance: {{height: {{value: 5 %{group}}}}}}}
nodes:
  a: {{pressure: 100 mbar}}
  b: {{pressure: 0 Pa}}
channels:
  c1: {{from: a, to: b, section: lane, length: 10 mm}}
  c2: {{from: a, to: b, section: lane, length: 20 mm}}
targets:
  - {{split: [c1, c2], ratio: [2, 1], tolerance: 1 %}}
"
    )
}

/// Two parallel channels of one section: heights in one group scale both conductances by
/// one factor, so the split cannot move (Kirchhoff: shares are g_i/Σg); independent heights
/// move it.
#[test]
fn split_std_zero_when_heights_correlate() {
    let share_std = |grouped: bool| {
        let c = chip(&two_parallel(grouped));
        let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
        let r = p.finish(p.monte_carlo(2000, 9, Shard::WHOLE), 9, Shard::WHOLE, 2000);
        let s = r
            .stats
            .iter()
            .find(|s| matches!(s.quantity, Quantity::Share { .. }))
            .unwrap()
            .clone();
        (s, r.target_miss[0], r.yield_fraction)
    };
    let (s, miss, yield_fraction) = share_std(true);
    assert!((s.nominal - 2.0 / 3.0).abs() < 1e-12);
    assert!(s.std <= 1e-12 * s.nominal, "{}", s.std);
    assert!(s.std_linear <= 1e-12 * s.nominal, "{}", s.std_linear);
    assert_eq!(miss, 0.0);
    assert_eq!(yield_fraction, 1.0);
    let (s, miss, yield_fraction) = share_std(false);
    // σ_h/h = 2.5 % per channel, d ln g/d ln h ≈ 2.5: shares move by about 2 %.
    assert!(s.std > 1e-3 * s.nominal, "{}", s.std);
    assert!(s.agree);
    assert!(miss > 0.5 && yield_fraction < 0.5);
}

/// Same seed → the same state bit for bit, whatever the thread count; another seed → not.
#[test]
fn seeded_runs_repeat_on_any_thread_count() {
    let c = chip(&two_parallel(false));
    let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
    let a = p.monte_carlo(500, 42, Shard::WHOLE);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let b = pool.install(|| p.monte_carlo(500, 42, Shard::WHOLE));
    assert_eq!(a, b);
    assert_ne!(a, p.monte_carlo(500, 43, Shard::WHOLE));
    // Shards of the samples merge into the whole run's state exactly.
    let merged = (1..=3)
        .map(|i| p.monte_carlo(500, 42, Shard { index: i, count: 3 }))
        .reduce(|x, y| x.merge(y))
        .unwrap();
    assert_eq!(a, merged);
}

/// The command line: shard outputs merged give the same bytes as the run in one go.
#[test]
fn cli_shards_merge_to_the_one_run() {
    let dir = tempfile::tempdir().unwrap();
    let f = write_file(dir.path(), "chip.yaml", &two_parallel(false));
    let run = |extra: &[&str], out: &str| {
        let path = dir.path().join(out);
        let mut args = vec![
            "spread",
            f.to_str().unwrap(),
            "--samples",
            "300",
            "--seed",
            "5",
        ];
        args.extend_from_slice(extra);
        args.extend_from_slice(&["--format", "json", "-o", path.to_str().unwrap()]);
        rillnet().args(&args).assert().success();
        path
    };
    let whole = run(&[], "whole.json");
    let again = run(&[], "again.json");
    let shards: Vec<_> = (1..=3)
        .map(|i| run(&["--shard", &format!("{i}/3")], &format!("s{i}.json")))
        .collect();
    let merged = dir.path().join("merged.json");
    rillnet()
        .args(["spread", f.to_str().unwrap(), "--merge"])
        .args(&shards)
        .args(["--format", "json", "-o", merged.to_str().unwrap()])
        .assert()
        .success();
    let read = |p: &std::path::Path| std::fs::read_to_string(p).unwrap();
    assert_eq!(read(&whole), read(&again));
    assert_eq!(read(&whole), read(&merged));
    let doc: serde_json::Value = serde_json::from_str(&read(&whole)).unwrap();
    for key in [
        "name",
        "flow_mean_m3_per_s",
        "flow_std_m3_per_s",
        "flow_std_linear_m3_per_s",
        "flow_p05_m3_per_s",
        "flow_p95_m3_per_s",
    ] {
        assert!(doc["channels"][0].get(key).is_some(), "{key}");
    }
    assert!(doc["splits"][0]["share_std"].as_f64().unwrap() > 0.0);
    assert!(doc["yield"].as_f64().is_some());
    // A missing shard is refused.
    rillnet()
        .args(["spread", f.to_str().unwrap(), "--merge"])
        .args(&shards[..2])
        .assert()
        .code(2);
    let out = rillnet()
        .args(["spread", f.to_str().unwrap(), "--merge"])
        .args(&shards[..2])
        .output()
        .unwrap();
    assert!(String::from_utf8_lossy(&out.stderr).contains("shard 3/3 is missing"));
}

/// Bad tolerances are refused with the place and what was expected.
#[test]
fn bad_tolerances_are_located() {
    let cases = [
        ("{height: -2 um}", "cannot be negative"),
        ("{depth: 2 um}", "takes: width, height"),
        ("{width: 120 %}", "below 100 %"),
        ("{width: 2}", "has no unit"),
        (
            "{width: {value: 2 um, distribution: uniform, sigmas: 3}}",
            "'sigmas' belongs",
        ),
        ("{width: 100 um}", "reaches zero"),
    ];
    for (tol, expect) in cases {
        let e = parse_chip(&one_channel(tol), "t.yaml", Syntax::Yaml).unwrap_err();
        assert!(e.to_string().contains(expect), "{tol}: {e}");
        assert_eq!(e.line, Some(3), "{tol}: {e}");
        assert!(e.to_string().starts_with("t.yaml:3:"), "{e}");
    }
    let mixed = two_parallel(true).replace(
        "length: 20 mm}",
        "length: 20 mm, tolerance: {length: {value: 50 um, group: layer_1}}}",
    );
    let e = parse_chip(&mixed, "t.yaml", Syntax::Yaml).unwrap_err();
    assert!(e.to_string().contains("mixes units"), "{e}");
    assert_eq!(e.line, Some(9), "{e}");
    let e = parse_chip(
        &one_channel("{width: 1 um}").replace(
            "b: {pressure: 0 Pa}",
            "b: {pressure: 0 Pa, tolerance: {flow: 1 %}}",
        ),
        "t.yaml",
        Syntax::Yaml,
    )
    .unwrap_err();
    assert!(e.to_string().contains("takes: pressure"), "{e}");
    // Without tolerances the command says what to add (exit code 2).
    let dir = tempfile::tempdir().unwrap();
    let f = write_file(
        dir.path(),
        "plain.yaml",
        &one_channel("{width: 1 um}").replace(", tolerance: {width: 1 um}", ""),
    );
    let out = rillnet()
        .args(["spread", f.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("declares no tolerance"));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    /// The first-order standard deviation is linear in the tolerance (a law of first-order
    /// propagation: σ_J = |dJ/dx|·σ_x).
    #[test]
    fn linear_std_scales_with_the_tolerance(pct in 0.1f64..20.0, um in 0.1f64..10.0) {
        let std = |pct: f64, um: f64| {
            let c = chip(&two_parallel(false).replace(
                "tolerance: {height: {value: 5 %}}",
                &format!("tolerance: {{height: {{value: {pct} %}}, width: {um} um}}"),
            ));
            let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
            (0..p.quantities.len()).map(|q| p.std_linear(q)).collect::<Vec<_>>()
        };
        let a = std(pct, um);
        let b = std(2.0 * pct, 2.0 * um);
        for (x, y) in a.iter().zip(&b) {
            prop_assert!((y - 2.0 * x).abs() <= 1e-9 * y.abs());
        }
    }
}

/// A concentration target is not judged by `spread` yet: the command says so and exits 2
/// rather than reporting a yield that ignores it.
#[test]
fn concentration_targets_are_refused_with_a_reason() {
    let text = "\
fluid: {model: water, temperature: 20 degC}
species:
  drug: {diffusivity: 5e-10 m^2/s}
sections:
  feed: {shape: rectangle, width: 100 um, height: 50 um, tolerance: {width: 2 um}}
nodes:
  drug_in: {pressure: 50 mbar, concentrations: {drug: 10 uM}}
  buffer_in: {pressure: 50 mbar}
  y: {}
  outlet: {pressure: 0 Pa}
channels:
  from_drug: {from: drug_in, to: y, section: feed, length: 10 mm}
  from_buffer: {from: buffer_in, to: y, section: feed, length: 14 mm}
  mixed: {from: y, to: outlet, section: feed, length: 20 mm}
targets:
  - {channel: mixed, concentration: {species: drug, value: 4 uM}}
";
    let dir = tempfile::tempdir().unwrap();
    let f = write_file(dir.path(), "dilution.yaml", text);
    let out = rillnet()
        .args(["spread", f.to_str().unwrap(), "--samples", "10"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("concentration targets") && err.contains("'mixed'"),
        "{err}"
    );
}
