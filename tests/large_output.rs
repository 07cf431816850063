//! Output of large chips: compact or indented JSON (the same document either way), the terminal
//! table cut at its row limit with a note, and no progress line where a script reads.
//!
//! Interface contract: these tests assert the shape of the output and the process behaviour,
//! not the physics (the numbers are checked elsewhere).

mod common;

use common::{rillnet, write_file};
use serde_json::Value;
use std::path::PathBuf;

/// Run `rillnet` with `args`, which must succeed (exit 0, or 1 for a check that found a limit
/// exceeded): (stdout, stderr).
fn ok(args: &[&str]) -> (String, String) {
    let out = rillnet().args(args).output().unwrap();
    let (o, e) = (
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    );
    assert!(
        matches!(out.status.code(), Some(0) | Some(1)),
        "{args:?}: {e}"
    );
    (o, e)
}

/// A chain of `count` channels between a pressure inlet and an outlet, with a side branch per
/// joint (a dead end), so that there are more junctions and channels than a table lists.
fn chain(count: usize) -> String {
    let mut s = String::from(
        "name: long chain\nfluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}\n\
         sections:\n  c: {shape: rectangle, width: 100 um, height: 50 um}\n\
         nodes:\n  n0: {pressure: 20 mbar}\n",
    );
    for i in 1..count {
        s.push_str(&format!("  n{i}: {{}}\n"));
    }
    s.push_str(&format!("  n{count}: {{pressure: 0 Pa}}\nchannels:\n"));
    for i in 0..count {
        s.push_str(&format!(
            "  c{i}: {{from: n{i}, to: n{}, section: c, length: 1 mm}}\n",
            i + 1
        ));
    }
    s
}

fn examples() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir("networks")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().and_then(|e| e.to_str()) == Some("yaml"))
        .collect();
    v.sort();
    assert!(v.len() >= 3);
    v
}

#[test]
fn compact_and_indented_json_carry_the_same_document() {
    let dir = tempfile::tempdir().unwrap();
    for (n, chip) in examples().iter().enumerate() {
        let chip = chip.to_str().unwrap();
        for command in ["solve", "check"] {
            // Standard output: indented by default, compact with --compact.
            let (pretty, _) = ok(&[command, chip, "--format", "json"]);
            let (compact, _) = ok(&[command, chip, "--format", "json", "--compact"]);
            assert!(pretty.lines().count() > 10, "{chip}: indented on stdout");
            assert_eq!(
                compact.lines().count(),
                1,
                "{chip}: one line with --compact"
            );
            assert!(compact.ends_with("}\n"));
            let a: Value = serde_json::from_str(&pretty).unwrap();
            let b: Value = serde_json::from_str(&compact).unwrap();
            assert_eq!(a, b, "{chip} {command}: the layouts differ in content");
            if command == "solve" {
                // A file: compact by default, indented with --pretty.
                let file = dir.path().join(format!("{n}.json"));
                let file = file.to_str().unwrap();
                ok(&[command, chip, "--format", "json", "-o", file]);
                let written = std::fs::read_to_string(file).unwrap();
                assert_eq!(
                    written, compact,
                    "{chip}: the file holds the compact document"
                );
                let indented = dir.path().join(format!("{n}p.json"));
                let indented = indented.to_str().unwrap();
                ok(&[
                    command, chip, "--format", "json", "--pretty", "-o", indented,
                ]);
                assert_eq!(std::fs::read_to_string(indented).unwrap(), pretty);
            }
        }
    }
}

#[test]
fn compact_json_of_other_documents_is_minified_text_of_the_same_document() {
    // A document that is only written indented (a section's figures) goes through the
    // minifier: same content, one line, strings untouched.
    let spec = "{shape: rectangle, width: 100 um, height: 50 um}";
    let (pretty, _) = ok(&["section", spec, "--format", "json"]);
    let (compact, _) = ok(&["section", spec, "--format", "json", "--compact"]);
    assert_eq!(compact.lines().count(), 1);
    let a: Value = serde_json::from_str(&pretty).unwrap();
    let b: Value = serde_json::from_str(&compact).unwrap();
    assert_eq!(a, b);
}

#[test]
fn a_table_longer_than_the_row_limit_is_cut_with_a_note() {
    let limit = rillnet::report::text::TABLE_ROWS;
    let count = limit + 123;
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chain.yaml", &chain(count));
    let chip = chip.to_str().unwrap();
    let (table, err) = ok(&["solve", chip]);
    assert!(
        err.is_empty(),
        "no progress line or status when stderr is not a terminal"
    );
    // Channels c0.. are listed in file order up to the limit, then the note.
    let listed = |prefix: &str| {
        table
            .lines()
            .filter(|l| {
                l.trim_start()
                    .strip_prefix(prefix)
                    .and_then(|r| r.split_whitespace().next())
                    .is_some_and(|d| d.parse::<usize>().is_ok())
            })
            .count()
    };
    // Each channel appears in the channel table and the wall-shear table, each cut at the limit.
    assert_eq!(listed("c"), 2 * limit, "channel rows");
    // n1.. are junctions (cut at the limit); n0 and the last node are the two ports.
    assert_eq!(listed("n"), limit + 2, "junction and port rows");
    let note = "… 123 more channels not listed";
    assert_eq!(table.matches(note).count(), 2, "{note}");
    let junction_note = format!("… {} more junctions not listed", count - 1 - limit);
    assert!(table.contains(&junction_note), "{junction_note}");
    assert!(table.contains(&format!("gives all {count}")));
    // The machine formats keep every channel.
    let (json, _) = ok(&["solve", chip, "--format", "json", "--compact"]);
    let doc: Value = serde_json::from_str(&json).unwrap();
    assert_eq!(doc["channels"].as_array().unwrap().len(), count);
    assert_eq!(doc["schema_version"], 3);
}

#[test]
fn a_table_within_the_limit_is_not_cut() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chain.yaml", &chain(40));
    let (table, _) = ok(&["solve", chip.to_str().unwrap()]);
    assert!(!table.contains("not listed"));
}
