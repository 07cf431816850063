//! Measured profiles as instruments export them: heights or depths, a zero line away from the
//! surface, surface scanned beyond the channel, separate units per column, located CSV
//! errors, sampling notes and dense profiles. End to end through the CLI.
//!
//! The rules are geometric (how the numbers are read); the figures compared here are the
//! program's own on two spellings of one geometry, so no physics source is needed.

mod common;

use common::rillnet;
use serde_json::Value;
use std::path::Path;

/// `section --format json` of an inline spec; panics on failure.
fn section_json(spec: &str) -> Value {
    common::run_json(["section", "--format", "json", spec])
}

/// The numbers of a `section` document that describe the geometry and the flow.
const FIGURES: [&str; 8] = [
    "area_m2",
    "perimeter_m",
    "hydraulic_diameter_m",
    "conductance_factor_m4",
    "fre_fanning",
    "max_wall_shear_per_gradient_m",
    "mean_wall_shear_per_gradient_m",
    "mesh_nodes",
];

fn figure(doc: &Value, key: &str) -> f64 {
    doc[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} in {doc}"))
}

fn points(pairs: &[(f64, f64)]) -> String {
    let p: Vec<String> = pairs
        .iter()
        .map(|(x, d)| format!("[{x} um, {d} um]"))
        .collect();
    format!("{{shape: profile, points: [{}]}}", p.join(", "))
}

/// A 30-point trench, 120 µm wide and up to 40 µm deep, depths positive.
fn trench() -> Vec<(f64, f64)> {
    (0..30)
        .map(|k| {
            let x = 120.0 * k as f64 / 29.0;
            let d = if k == 0 || k == 29 {
                0.0
            } else {
                (40.0 * (x / 15.0).min((120.0 - x) / 15.0).min(1.0) + 0.3 * (k % 3) as f64).max(1.0)
            };
            (x, d)
        })
        .collect()
}

#[test]
fn heights_give_exactly_the_figures_of_depths() {
    let depths = trench();
    let heights: Vec<(f64, f64)> = depths.iter().map(|&(x, d)| (x, -d)).collect();
    let a = section_json(&points(&depths));
    let b = section_json(&points(&heights));
    for key in FIGURES {
        assert_eq!(figure(&a, key), figure(&b, key), "{key}");
    }
}

#[test]
fn a_zero_line_below_the_surface_puts_the_lid_on_the_highest_point() {
    // The same trench given by an instrument whose zero lies 2 µm below the surface (the
    // surface reads −2 µm as a depth): the lid goes on the highest point.
    let depths = trench();
    let shifted: Vec<(f64, f64)> = depths.iter().map(|&(x, d)| (x, d - 2.0)).collect();
    let a = section_json(&points(&depths));
    let b = section_json(&points(&shifted));
    // The shift is undone in SI arithmetic, so coordinates may differ in the last bit.
    for key in ["area_m2", "perimeter_m", "conductance_factor_m4"] {
        let (x, y) = (figure(&a, key), figure(&b, key));
        assert!((x - y).abs() <= 1e-9 * x.abs(), "{key}: {x} vs {y}");
    }
}

/// Write `chip` and, beside it, `files` (name, text); run `args` then the chip path.
fn run_chip(chip: &str, files: &[(&str, &str)], args: &[&str]) -> (i32, String, String) {
    let dir = tempfile::tempdir().unwrap();
    for (name, text) in files {
        std::fs::write(dir.path().join(name), text).unwrap();
    }
    let path = dir.path().join("chip.yaml");
    std::fs::write(&path, chip).unwrap();
    run(&path, args)
}

fn run(path: &Path, args: &[&str]) -> (i32, String, String) {
    let out = rillnet().args(args).arg(path).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// A chip with one profile section `s` given by `section` (a flow mapping).
fn chip_with(section: &str) -> String {
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3}}\n\
         sections:\n  s: {section}\n\
         nodes:\n  inlet: {{pressure: 10 mbar}}\n  drain: {{pressure: 0 Pa}}\n\
         channels:\n  c1: {{from: inlet, to: drain, section: s, length: 10 mm}}\n"
    )
}

/// `section --file CHIP --name s --format json` for a chip with profile files beside it.
fn named_section(section: &str, files: &[(&str, &str)]) -> Value {
    let (code, out, err) = run_chip(
        &chip_with(section),
        files,
        &["section", "--format", "json", "--name", "s", "--file"],
    );
    assert_eq!(code, 0, "{err}");
    serde_json::from_str(&out).unwrap()
}

#[test]
fn unit_x_and_unit_depth_read_each_column() {
    let depths = trench();
    let um: String = depths.iter().map(|(x, d)| format!("{x},{d}\n")).collect();
    // Positions in µm, depths in nm: the numbers of the depth column are 1000× larger.
    let mixed: String = depths
        .iter()
        .map(|(x, d)| format!("{x},{}\n", d * 1000.0))
        .collect();
    let a = named_section("{shape: profile, file: a.csv, unit: um}", &[("a.csv", &um)]);
    let b = named_section(
        "{shape: profile, file: b.csv, unit_x: um, unit_depth: nm}",
        &[("b.csv", &mixed)],
    );
    for key in ["area_m2", "perimeter_m", "conductance_factor_m4"] {
        let (x, y) = (figure(&a, key), figure(&b, key));
        // d·1000 nm and d µm differ in SI only by rounding.
        assert!((x - y).abs() <= 1e-9 * x.abs(), "{key}: {x} vs {y}");
    }
    // `unit` sets both columns; it cannot be combined with the per-column keys.
    let (code, _, err) = run_chip(
        &chip_with("{shape: profile, file: b.csv, unit: um, unit_depth: nm}"),
        &[("b.csv", &mixed)],
        &["solve"],
    );
    assert_eq!(code, 2);
    assert!(
        err.contains("chip.yaml:") && err.contains("unit_depth"),
        "{err}"
    );
    // The unit keys belong to a profile file, not to inline points.
    let (code, _, err) = run_chip(
        &chip_with(
            "{shape: profile, points: [[0 um, 0 um], [5 um, 5 um], [9 um, 0 um]], unit_x: um}",
        ),
        &[],
        &["solve"],
    );
    assert_eq!(code, 2);
    assert!(err.contains("unit_x"), "{err}");
}

#[test]
fn csv_errors_name_the_line() {
    for (csv, line, words) in [
        ("x,d\n0,0\n10,5\n10,6\n20,0\n", "line 4", "increase"),
        ("0,0\n10,5\n15,NaN\n20,0\n", "line 3", "finite"),
        ("0,0\n10,5\n15,inf\n20,0\n", "line 3", "finite"),
        ("0;0\n10;5\n15;2,5\n", "line 3", "decimal comma"),
    ] {
        let (code, out, err) = run_chip(
            &chip_with("{shape: profile, file: p.csv}"),
            &[("p.csv", csv)],
            &["solve"],
        );
        assert_eq!(code, 2, "{csv:?}: {err}");
        assert!(out.is_empty());
        assert!(
            err.contains("chip.yaml:") && err.contains(line) && err.contains(words),
            "{csv:?}: {err}"
        );
    }
}

#[test]
fn a_profile_of_zeros_is_refused() {
    let (code, _, err) = run_chip(
        &chip_with("{shape: profile, points: [[0 um, 0 um], [5 um, 0 um], [9 um, 0 um]]}"),
        &[],
        &["solve"],
    );
    assert_eq!(code, 2);
    assert!(
        err.contains("sections.s") && err.contains("no channel"),
        "{err}"
    );
}

/// The profile notes of `solve --format json` on a chip whose section is `section`.
fn notes(section: &str, files: &[(&str, &str)]) -> Vec<Value> {
    let (code, out, err) = run_chip(&chip_with(section), files, &["solve", "--format", "json"]);
    assert_eq!(code, 0, "{err}");
    let doc: Value = serde_json::from_str(&out).unwrap();
    doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["kind"] == "profile_sampling")
        .cloned()
        .collect()
}

#[test]
fn sparse_and_uneven_profiles_are_noted() {
    // Five points: sparse (under 20).
    let sparse = notes(
        "{shape: profile, points: [[0 um, 0 um], [10 um, 20 um], [20 um, 30 um], [30 um, 20 um], [40 um, 0 um]]}",
        &[],
    );
    assert_eq!(sparse.len(), 1, "{sparse:?}");
    assert_eq!(sparse[0]["value"], 5.0);
    assert_eq!(sparse[0]["name"], "s");
    // 30 points 1 µm apart but one gap of 20 µm: uneven (20 > 5 × the 1 µm median).
    let mut pairs: Vec<(f64, f64)> = (0..30).map(|k| (k as f64, 10.0)).collect();
    pairs[0].1 = 0.0;
    for p in pairs.iter_mut().skip(15) {
        p.0 += 19.0;
    }
    let uneven = notes(&points(&pairs), &[]);
    assert_eq!(uneven.len(), 1, "{uneven:?}");
    assert!((uneven[0]["value"].as_f64().unwrap() - 20e-6).abs() < 1e-15);
    assert!(uneven[0]["message"].as_str().unwrap().contains("gap"));
    // The same points evenly spaced: no note.
    let even: Vec<(f64, f64)> = (0..30).map(|k| (k as f64, 10.0)).collect();
    assert!(notes(&points(&even), &[]).is_empty());
}

#[test]
fn surface_beyond_the_channel_is_left_out_with_a_note() {
    // Surface scanned on both sides at the lid, with a 1 µm roughness pit left of the trench
    // (which would otherwise touch the lid inside the outline).
    let mut pairs = vec![(0.0, 0.0), (2.0, 1.0), (4.0, 0.0), (6.0, 0.0)];
    let trench: Vec<(f64, f64)> = trench().iter().map(|&(x, d)| (x + 6.0, d)).collect();
    pairs.extend(trench[1..].iter().copied());
    pairs.push((130.0, 0.0));
    let found = notes(&points(&pairs), &[]);
    let trimmed: Vec<&Value> = found
        .iter()
        .filter(|n| n["message"].as_str().unwrap().contains("left out"))
        .collect();
    assert_eq!(trimmed.len(), 1, "{found:?}");
    // Points at x = 0, 2, 4 (before the last lid contact at x = 6) and x = 130 (after the
    // contact at x = 126).
    assert_eq!(trimmed[0]["value"], 4.0);
    // The figures are those of the trench alone.
    let a = section_json(&points(&pairs));
    let b = section_json(&points(&trench));
    for key in FIGURES {
        assert_eq!(figure(&a, key), figure(&b, key), "{key}");
    }
}

#[test]
fn a_dense_profile_is_simplified_with_its_change_stated() {
    // 100 000 points across 100 µm with ±0.5 µm deterministic roughness.
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut csv = String::from("position_um,depth_um\n");
    let n = 100_000;
    for k in 0..n {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        let noise = (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
        let x = 100.0 * k as f64 / (n - 1) as f64;
        let d = if k == 0 || k == n - 1 {
            0.0
        } else {
            (40.0 * (x / 10.0).min((100.0 - x) / 10.0).min(1.0) + noise).max(0.1)
        };
        csv.push_str(&format!("{x:.6},{d:.6}\n"));
    }
    let found = notes(
        "{shape: profile, file: dense.csv}",
        &[("dense.csv", csv.as_str())],
    );
    let resampled: Vec<&Value> = found
        .iter()
        .filter(|n| n["message"].as_str().unwrap().contains("simplified"))
        .collect();
    assert_eq!(resampled.len(), 1, "{found:?}");
    assert_eq!(resampled[0]["value"], 100_000.0);
    assert_eq!(
        resampled[0]["limit"],
        rillnet::section::MAX_MESH_POINTS as f64
    );
    let message = resampled[0]["message"].as_str().unwrap();
    assert!(message.contains("to 1000"), "{message}");
    // The area barely changes (the roughness averages out); the wetted perimeter of a rough
    // wall shrinks: both are stated, with their signs.
    assert!(
        message.contains("area by") && message.contains("perimeter by"),
        "{message}"
    );
}
