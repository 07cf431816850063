//! Tuned and sized copies, end to end: write the copy, read it back with `solve`, and compare
//! what the copy delivers with what `tune`/`size` promised. Targets here are hand-derivable
//! flows and splits; the physics behind them is checked in `closed_forms.rs` and `design.rs`.

mod common;

use common::{channel_flow, json_of, rillnet, run_json, write_file};

const UL_MIN: f64 = 1e-9 / 60.0;

/// The perfusion chip with a description that mentions a setting in the chip's own syntax.
fn trap_chip() -> String {
    let chip = std::fs::read_to_string("networks/perfusion_tuning.yaml").unwrap();
    chip.replacen(
        "name: three-chamber",
        "description: |\n  Last week's run used\n  medium_a: {pressure: 80 mbar}\n  medium_b: pressure: 60 mbar\nname: three-chamber",
        1,
    )
}

#[test]
fn tuned_copy_changes_only_the_settings_and_delivers_the_targets() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", &trap_chip());
    let tuned = dir.path().join("tuned.yaml");
    let out = rillnet()
        .args(["tune", "--format", "json", "--output"])
        .arg(&tuned)
        .arg(&chip)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&tuned).unwrap();
    // The description is untouched; only the two pressure values differ from the original.
    assert!(text.contains("  medium_a: {pressure: 80 mbar}\n  medium_b: pressure: 60 mbar\n"));
    let original = trap_chip();
    let changed: Vec<(&str, &str)> = original
        .lines()
        .zip(text.lines())
        .filter(|(a, b)| a != b)
        .collect();
    assert_eq!(changed.len(), 2, "{changed:?}");
    assert!(changed
        .iter()
        .all(|(a, _)| a.trim_start().starts_with("medium_")));
    // Read back and solved, the copy meets the targets to the rounding of the written digits
    // (6, or more when 6 would lose a target within its 1e-6 tolerance).
    let solved = json_of(&tuned);
    let mid = channel_flow(&solved, "chamber_mid") / UL_MIN;
    assert!((mid - 20.0).abs() / 20.0 < 1e-5, "{mid}");
    let (l, r) = (
        channel_flow(&solved, "chamber_left"),
        channel_flow(&solved, "chamber_right"),
    );
    assert!((l / r - 1.0).abs() < 1e-5, "{l} {r}");
    // The operating point printed by tune is the copy's own solve.
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let printed = channel_flow(&report["operating_point"], "chamber_mid");
    assert_eq!(printed, channel_flow(&solved, "chamber_mid"));
}

#[test]
fn sized_copy_has_rounded_values_and_delivers_the_split() {
    let dir = tempfile::tempdir().unwrap();
    let sized = dir.path().join("sized.yaml");
    let report = run_json([
        "size",
        "--format",
        "json",
        "--output",
        sized.to_str().unwrap(),
        "networks/gradient_splitter_sizing.yaml",
    ]);
    let text = std::fs::read_to_string(&sized).unwrap();
    // The width sits on its 1 um mask grid; lengths carry at most 6 significant digits.
    let lane_1 = text
        .lines()
        .find(|l| l.contains("shape: rectangle, width:"))
        .unwrap();
    let width: f64 = lane_1
        .split("width: ")
        .nth(1)
        .unwrap()
        .split(" um")
        .next()
        .unwrap()
        .parse()
        .unwrap();
    assert_eq!(width, width.round(), "{lane_1}");
    for line in text
        .lines()
        .filter(|l| l.contains("length: ") && l.contains(" mm"))
    {
        let digits = line
            .split("length: ")
            .nth(1)
            .unwrap()
            .split(' ')
            .next()
            .unwrap()
            .chars()
            .filter(char::is_ascii_digit)
            .count();
        assert!(digits <= 7, "{line}");
    }
    // Read back: the split 1:2:2 holds to the rounding (6 digits of length, width on its grid
    // as sizing snapped it before the lengths were re-solved).
    let solved = json_of(&sized);
    let q: Vec<f64> = ["lane_1", "lane_2", "lane_3"]
        .iter()
        .map(|c| channel_flow(&solved, c))
        .collect();
    let total: f64 = q.iter().sum();
    for (qi, share) in q.iter().zip([0.2, 0.4, 0.4]) {
        assert!((qi / total - share).abs() < 1e-5, "{q:?}");
    }
    // The serpentine reported for a long lane folds exactly the sized length.
    for s in report["sizes"].as_array().unwrap() {
        if let Some(serp) = s.get("serpentine").filter(|v| !v.is_null()) {
            let l = serp["centreline_length_m"].as_f64().unwrap();
            let after = s["after_m"].as_f64().unwrap();
            assert!((l - after).abs() < 1e-9 * after, "{serp}");
        }
    }
}

#[test]
fn json_chip_copies_are_edited_in_json() {
    let dir = tempfile::tempdir().unwrap();
    let value = perfusion_json();
    let chip = write_file(
        dir.path(),
        "chip.json",
        &serde_json::to_string_pretty(&value).unwrap(),
    );
    let tuned = dir.path().join("tuned.json");
    let out = rillnet()
        .args(["tune", "-q", "--output"])
        .arg(&tuned)
        .arg(&chip)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let copy: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&tuned).unwrap()).unwrap();
    assert_ne!(
        copy["nodes"]["medium_a"]["pressure"],
        value["nodes"]["medium_a"]["pressure"]
    );
    assert_eq!(copy["channels"], value["channels"]);
    let mid = channel_flow(&json_of(&tuned), "chamber_mid") / UL_MIN;
    assert!((mid - 20.0).abs() / 20.0 < 1e-5, "{mid}");
}

/// `networks/perfusion_tuning.yaml` written as a JSON chip.
fn perfusion_json() -> serde_json::Value {
    serde_json::json!({
        "name": "three-chamber perfusion with targets",
        "fluid": {"model": "water", "temperature": "37 degC"},
        "sections": {
            "feed": {"shape": "rectangle", "width": "200 um", "height": "60 um"},
            "chamber": {"shape": "rectangle", "width": "800 um", "height": "60 um"},
            "restrictor": {"shape": "rectangle", "width": "50 um", "height": "60 um"}
        },
        "nodes": {
            "medium_a": {"pressure": "80 mbar", "adjust": {"min": "0 mbar", "max": "300 mbar"}},
            "medium_b": {"pressure": "60 mbar", "adjust": {"min": "0 mbar", "max": "300 mbar"}},
            "manifold_a": {},
            "manifold_b": {},
            "waste": {"pressure": "0 Pa"}
        },
        "channels": {
            "feed_a": {"from": "medium_a", "to": "manifold_a", "section": "feed", "length": "15 mm"},
            "feed_b": {"from": "medium_b", "to": "manifold_b", "section": "feed", "length": "15 mm"},
            "chamber_left": {"from": "manifold_a", "to": "waste", "section": "chamber", "length": "8 mm"},
            "chamber_mid": {"from": "manifold_b", "to": "waste", "section": "chamber", "length": "8 mm"},
            "chamber_right": {"from": "manifold_b", "to": "waste", "section": "restrictor", "length": "12 mm"}
        },
        "targets": [
            {"channel": "chamber_mid", "flow": "20 uL/min"},
            {"split": ["chamber_left", "chamber_right"], "ratio": [1, 1]}
        ]
    })
}
