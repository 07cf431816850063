//! The machine-output contract, as a script uses it: pipes that close early, full disks, JSON
//! and CSV that parse, exit codes, standard input, status lines on standard error.
//!
//! Interface contract: these tests assert the shape of the output and the process behaviour,
//! not the physics (the numbers are checked elsewhere).

mod common;

use common::{rillnet, run_json};
use serde_json::Value;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::process::Stdio;

/// The shipped example chips, sorted.
fn examples() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir("networks")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().and_then(|e| e.to_str()) == Some("yaml"))
        .collect();
    v.sort();
    assert!(v.len() >= 3, "networks/ holds {} examples", v.len());
    v
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// Run `rillnet` with `args`: (exit code, stdout, stderr).
fn run<I, S>(args: I) -> (i32, String, String)
where
    I: IntoIterator<Item = S>,
    S: AsRef<std::ffi::OsStr>,
{
    let out = rillnet().args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8(out.stdout).expect("stdout is UTF-8"),
        String::from_utf8(out.stderr).expect("stderr is UTF-8"),
    )
}

/// Run `rillnet` with `args`, which must succeed; its standard output.
fn stdout_of<I, S>(args: I) -> String
where
    I: IntoIterator<Item = S> + Clone + std::fmt::Debug,
    S: AsRef<std::ffi::OsStr>,
{
    let (code, out, err) = run(args.clone());
    assert_eq!(code, 0, "{args:?}: {err}");
    out
}

/// A ladder of `rungs` rungs between a feed rail and a drain rail: 3·rungs channels.
fn ladder(rungs: usize) -> String {
    let mut s = String::from(
        "name: generated ladder\n\
         fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}\n\
         sections:\n  rail: {shape: rectangle, width: 400 um, height: 60 um}\n  \
         rung: {shape: rectangle, width: 100 um, height: 60 um}\n\
         nodes:\n  feed: {pressure: 50 mbar}\n  drain: {pressure: 0 Pa}\n",
    );
    for i in 1..=rungs {
        s.push_str(&format!("  f{i}: {{}}\n  d{i}: {{}}\n"));
    }
    s.push_str("channels:\n");
    s.push_str("  in: {from: feed, to: f1, section: rail, length: 5 mm}\n");
    s.push_str(&format!(
        "  out: {{from: d{rungs}, to: drain, section: rail, length: 5 mm}}\n"
    ));
    for i in 1..=rungs {
        s.push_str(&format!(
            "  r{i}: {{from: f{i}, to: d{i}, section: rung, length: 6 mm}}\n"
        ));
        if i < rungs {
            let j = i + 1;
            s.push_str(&format!(
                "  fr{i}: {{from: f{i}, to: f{j}, section: rail, length: 1.5 mm}}\n  \
                 dr{i}: {{from: d{i}, to: d{j}, section: rail, length: 1.5 mm}}\n"
            ));
        }
    }
    s
}

// ---------------------------------------------------------------------------------------
// Pipes and full disks
// ---------------------------------------------------------------------------------------

/// `rillnet solve BIG --format FORMAT | head -1`: the reader goes away after one line;
/// rillnet must stop quietly with exit 0 (no panic, no error message).
fn assert_quiet_after_closed_pipe(format: &str) {
    let dir = tempfile::tempdir().unwrap();
    // 6 667 rungs: 20 001 channels, far more output than a pipe buffer holds.
    let chip = write(dir.path(), "big.yaml", &ladder(6_667));
    let mut child = std::process::Command::new(assert_cmd::cargo::cargo_bin("rillnet"))
        .args(["solve", "--format", format])
        .arg(&chip)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut reader = BufReader::new(child.stdout.take().unwrap());
    let mut first = String::new();
    reader.read_line(&mut first).unwrap();
    assert!(!first.is_empty(), "--format {format}: no first line");
    drop(reader);
    let mut err = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    let status = child.wait().unwrap();
    assert!(!err.contains("panicked"), "--format {format}: {err}");
    assert_eq!(status.code(), Some(0), "--format {format}: {err}");
    assert!(err.is_empty(), "--format {format}: stderr: {err}");
}

#[test]
fn closed_pipe_after_one_line_of_the_table_is_a_quiet_success() {
    assert_quiet_after_closed_pipe("table");
}

#[test]
fn closed_pipe_after_one_line_of_json_is_a_quiet_success() {
    assert_quiet_after_closed_pipe("json");
}

#[test]
fn closed_pipe_after_one_line_of_csv_is_a_quiet_success() {
    assert_quiet_after_closed_pipe("csv");
}

/// `rillnet ARGS > /dev/full`: the output cannot be written: exit 2 with a message, no panic.
#[cfg(target_os = "linux")]
fn assert_full_disk_exits_2(args: &[&str]) {
    let full = std::fs::OpenOptions::new()
        .write(true)
        .open("/dev/full")
        .unwrap();
    let out = std::process::Command::new(assert_cmd::cargo::cargo_bin("rillnet"))
        .args(args)
        .stdin(Stdio::null())
        .stdout(full)
        .stderr(Stdio::piped())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{args:?}: {err}");
    assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
    assert!(
        err.contains("error: cannot write to standard output"),
        "{args:?}: stderr: {err}"
    );
}

#[cfg(target_os = "linux")]
#[test]
fn full_disk_on_standard_output_exits_2() {
    let chip = "networks/chamber_ladder.yaml";
    for format in ["table", "json", "csv"] {
        assert_full_disk_exits_2(&["solve", chip, "--format", format]);
        assert_full_disk_exits_2(&["check", chip, "--format", format]);
    }
    assert_full_disk_exits_2(&["solve", chip, "--sensitivity", "--format", "csv"]);
    assert_full_disk_exits_2(&["tune", "networks/perfusion_tuning.yaml", "--format", "json"]);
    assert_full_disk_exits_2(&["manual"]);
}

#[cfg(target_os = "linux")]
#[test]
fn full_disk_on_completions_exits_2() {
    assert_full_disk_exits_2(&["completions", "bash"]);
}

// ---------------------------------------------------------------------------------------
// Names
// ---------------------------------------------------------------------------------------

const TWIN_SECTIONS: &str = "\
name: twin sections
fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}
sections:
  a: {shape: circle, diameter: 100 um}
  b: {shape: circle, diameter: 100 um}
nodes:
  in: {pressure: 100 mbar}
  mid: {}
  out: {pressure: 0 Pa}
channels:
  c1: {from: in, to: mid, section: {shape: circle, diameter: 80 um}, length: 5 mm}
  ca: {from: mid, to: out, section: a, length: 10 mm}
  cb: {from: mid, to: out, section: b, length: 12 mm}
";

#[test]
fn identical_named_sections_keep_both_names() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write(dir.path(), "twins.yaml", TWIN_SECTIONS);
    let v = run_json([
        "solve".as_ref(),
        chip.as_os_str(),
        "--format".as_ref(),
        "json".as_ref(),
    ]);
    let section_of = |name: &str| {
        v["channels"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == name)
            .unwrap_or_else(|| panic!("no channel {name}"))["section"]
            .clone()
    };
    assert_eq!(section_of("ca"), "a");
    assert_eq!(section_of("cb"), "b");
    assert_eq!(section_of("c1"), "c1.section");
    let listed: Vec<&str> = v["sections"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["name"].as_str().unwrap())
        .collect();
    assert!(
        listed.contains(&"a") && listed.contains(&"b"),
        "sections[]: {listed:?}"
    );
    for name in ["a", "b", "c1.section"] {
        let (code, out, err) = run([
            "section".as_ref(),
            "--file".as_ref(),
            chip.as_os_str(),
            "--name".as_ref(),
            name.as_ref(),
        ]);
        assert_eq!(code, 0, "--name {name}: {err}");
        assert!(out.contains("circle"), "--name {name}: {out}");
    }
    let (code, _, err) = run([
        "section".as_ref(),
        "--file".as_ref(),
        chip.as_os_str(),
        "--name".as_ref(),
        "c".as_ref(),
    ]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("no section named 'c'"), "{err}");
}

// ---------------------------------------------------------------------------------------
// CSV
// ---------------------------------------------------------------------------------------

/// Record types the CSV documents use (first column of every row).
const RECORD_TYPES: &[&str] = &[
    "node",
    "channel",
    "sensitivity",
    "setting",
    "target",
    "size",
    "section",
];

/// Check a CSV document against the layout contract: tables separated by one empty line,
/// each with a header whose first column is `record`, every row with the header's field count
/// and a known record type in its first field. Returns each table's record types, in the
/// order they first appear.
fn csv_record_types(doc: &str, what: &str) -> Vec<Vec<String>> {
    assert!(!doc.is_empty(), "{what}: empty CSV");
    assert!(doc.ends_with('\n'), "{what}: no final newline");
    assert!(
        !doc.ends_with("\n\n"),
        "{what}: the document ends with an empty line"
    );
    assert!(!doc.contains("\n\n\n"), "{what}: two empty lines in a row");
    let mut kinds = Vec::new();
    for (t, table) in doc.split("\n\n").enumerate() {
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(true)
            .flexible(false)
            .from_reader(table.as_bytes());
        let header = reader.headers().unwrap().clone();
        assert_eq!(
            header.get(0),
            Some("record"),
            "{what}: table {t} header {header:?}"
        );
        let mut seen: Vec<String> = Vec::new();
        for row in reader.records() {
            let row = row.unwrap_or_else(|e| panic!("{what}: table {t}: {e}"));
            assert_eq!(row.len(), header.len(), "{what}: table {t} row {row:?}");
            let first = row.get(0).unwrap();
            assert!(
                RECORD_TYPES.contains(&first),
                "{what}: table {t}: record type {first:?}"
            );
            if !seen.iter().any(|k| k == first) {
                seen.push(first.to_string());
            }
        }
        assert!(!seen.is_empty(), "{what}: table {t} has no rows");
        kinds.push(seen);
    }
    kinds
}

/// Each table of a CSV document as (header, rows).
fn csv_tables(doc: &str, what: &str) -> Vec<(Vec<String>, Vec<Vec<String>>)> {
    doc.split("\n\n")
        .map(|table| {
            let mut reader = csv::ReaderBuilder::new()
                .flexible(false)
                .from_reader(table.as_bytes());
            let header = reader.headers().unwrap().iter().map(String::from).collect();
            let rows = reader
                .records()
                .map(|r| {
                    r.unwrap_or_else(|e| panic!("{what}: {e}"))
                        .iter()
                        .map(String::from)
                        .collect()
                })
                .collect();
            (header, rows)
        })
        .collect()
}

/// Check the solve table, whose rows are `node` and `channel` records (nodes first).
fn check_solve_csv(doc: &str, what: &str) -> usize {
    let tables = csv_tables(doc, what);
    let (header, rows) = &tables[0];
    assert_eq!(header[0], "record", "{what}");
    assert!(!rows.is_empty(), "{what}: no rows");
    let kinds: Vec<&str> = rows.iter().map(|r| r[0].as_str()).collect();
    let first_channel = kinds.iter().position(|k| *k == "channel").unwrap();
    assert!(
        kinds[..first_channel].iter().all(|k| *k == "node")
            && kinds[first_channel..].iter().all(|k| *k == "channel"),
        "{what}: record types {kinds:?}"
    );
    for r in rows {
        assert_eq!(r.len(), header.len(), "{what}: {r:?}");
    }
    tables.len()
}

fn file_has(chip: &Path, key: &str) -> bool {
    std::fs::read_to_string(chip).unwrap().contains(key)
}

/// The names of the first two channels of a chip.
fn two_channels(chip: &Path) -> String {
    let v = common::json_of(chip);
    let names: Vec<&str> = v["channels"]
        .as_array()
        .unwrap()
        .iter()
        .take(2)
        .map(|c| c["name"].as_str().unwrap())
        .collect();
    names.join(",")
}

#[test]
fn csv_of_every_command_parses_as_record_tables() {
    let mut tuned = 0;
    let mut sized = 0;
    for chip in examples() {
        let c = chip.to_str().unwrap();
        let what = |cmd: &str| format!("{cmd} {c}");

        let solve_kinds = vec![vec!["node".to_string(), "channel".to_string()]];
        let doc = stdout_of(["solve", c, "--format", "csv"]);
        assert_eq!(csv_record_types(&doc, &what("solve")), solve_kinds);
        assert_eq!(check_solve_csv(&doc, &what("solve")), 1);

        let doc = stdout_of(["solve", c, "--sensitivity", "--format", "csv"]);
        let kinds = csv_record_types(&doc, &what("solve --sensitivity"));
        assert_eq!(
            kinds,
            [&solve_kinds[0][..], &["sensitivity".to_string()][..]],
            "{}",
            what("solve --sensitivity")
        );
        check_solve_csv(&doc, &what("solve --sensitivity"));

        let pair = two_channels(&chip);
        let doc = stdout_of([
            "solve",
            c,
            "--sensitivity",
            "--channels",
            &pair,
            "--format",
            "csv",
        ]);
        let w = what(&format!("solve --sensitivity --channels {pair}"));
        let kinds = csv_record_types(&doc, &w);
        assert_eq!(kinds.len(), 2, "{w}");
        assert_eq!(kinds[1], ["sensitivity"], "{w}");
        let tables = csv_tables(&doc, &w);
        let targets: std::collections::BTreeSet<&str> =
            tables[1].1.iter().map(|r| r[1].as_str()).collect();
        let wanted: std::collections::BTreeSet<&str> = pair.split(',').collect();
        assert_eq!(targets, wanted, "{w}");

        let (code, doc, err) = run(["check", c, "--format", "csv"]);
        assert!(code == 0 || code == 1, "{}: {err}", what("check"));
        assert_eq!(csv_record_types(&doc, &what("check")), solve_kinds);
        check_solve_csv(&doc, &what("check"));

        if file_has(&chip, "adjust:") {
            let doc = stdout_of(["tune", c, "--format", "csv"]);
            let kinds = csv_record_types(&doc, &what("tune"));
            // Settings, targets, then the operating point of the tuned copy (the solve table).
            assert_eq!(
                kinds,
                [vec!["setting"], vec!["target"], vec!["node", "channel"]],
                "{}",
                what("tune")
            );
            tuned += 1;
        }
        if file_has(&chip, "size:") {
            let doc = stdout_of(["size", c, "--format", "csv"]);
            let kinds = csv_record_types(&doc, &what("size"));
            assert_eq!(
                kinds,
                [vec!["size"], vec!["target"], vec!["node", "channel"]],
                "{}",
                what("size")
            );
            sized += 1;
        }

        // Every name `section --name` accepts: the named sections and `CHANNEL.section`.
        let v = common::json_of(&chip);
        let mut names: Vec<&str> = v["channels"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["section"].as_str().unwrap())
            .collect();
        names.sort_unstable();
        names.dedup();
        for name in names {
            let doc = stdout_of(["section", "--file", c, "--name", name, "--format", "csv"]);
            let kinds = csv_record_types(&doc, &what(&format!("section --name {name}")));
            assert_eq!(kinds, [["section"]]);
        }
    }
    assert!(tuned >= 1 && sized >= 1, "tuned {tuned}, sized {sized}");
    let doc = stdout_of([
        "section",
        "{shape: circle, diameter: 100 um}",
        "--format",
        "csv",
    ]);
    assert_eq!(csv_record_types(&doc, "section inline"), [["section"]]);
}

// ---------------------------------------------------------------------------------------
// JSON
// ---------------------------------------------------------------------------------------

#[test]
fn json_of_solve_and_check_has_the_documented_shape() {
    for chip in examples() {
        let c = chip.to_str().unwrap();
        for extra in [&[][..], &["--sensitivity"][..]] {
            let mut args = vec!["solve", c, "--format", "json"];
            args.extend_from_slice(extra);
            let v: Value = serde_json::from_str(&stdout_of(args.clone())).unwrap();
            assert!(v["schema_version"].is_u64(), "{args:?}");
            assert!(
                v["nodes"].as_array().is_some_and(|a| !a.is_empty()),
                "{args:?}"
            );
            assert!(
                v["channels"].as_array().is_some_and(|a| !a.is_empty()),
                "{args:?}"
            );
            if extra.is_empty() {
                assert!(v.get("sensitivities").is_none(), "{args:?}");
            } else {
                let rows = v["sensitivities"]["rows"].as_array().unwrap();
                assert!(!rows.is_empty(), "{args:?}");
                for row in rows {
                    for key in [
                        "target_channel",
                        "channel",
                        "d_flow_d_length_m3_per_s_per_m",
                        "relative_width",
                        "relative_height",
                        "relative_length",
                    ] {
                        assert!(row.get(key).is_some(), "{args:?}: {key} missing in {row}");
                    }
                }
            }
            assert!(v.get("verdict").is_none(), "{args:?}: solve has no verdict");
        }
        let (code, out, err) = run(["check", c, "--format", "json"]);
        let v: Value = serde_json::from_str(&out).unwrap_or_else(|e| panic!("{c}: {e}: {err}"));
        let wanted = match code {
            0 => "pass",
            1 => "fail",
            other => panic!("check {c}: exit {other}: {err}"),
        };
        assert_eq!(v["verdict"], wanted, "check {c}");
        assert!(v["nodes"].is_array() && v["channels"].is_array());
    }
    let (code, _, _) = run(["check", "networks/tcell_sorter.yaml"]);
    assert_eq!(code, 1, "the T-cell example is meant to fail its check");
}

#[test]
fn sensitivity_of_a_large_chip_without_targets_needs_channels() {
    let dir = tempfile::tempdir().unwrap();
    // 20 rungs: 60 channels, over the 50 differentiated without --channels.
    let chip = write(dir.path(), "ladder.yaml", &ladder(20));
    let c = chip.to_str().unwrap();
    let (code, out, err) = run(["solve", c, "--sensitivity"]);
    assert_eq!(code, 2, "{err}");
    assert!(out.is_empty(), "{out}");
    assert!(err.contains("--channels"), "{err}");
    assert!(!err.contains("panicked"), "{err}");

    let v: Value = serde_json::from_str(&stdout_of([
        "solve",
        c,
        "--sensitivity",
        "--channels",
        "r1,r20",
        "--format",
        "json",
    ]))
    .unwrap();
    let rows = v["sensitivities"]["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 2 * 60, "every channel per target");
    assert!(rows
        .iter()
        .all(|r| r["target_channel"] == "r1" || r["target_channel"] == "r20"));

    let (code, _, err) = run(["solve", c, "--sensitivity", "--channels", "r1,nope"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("nope"), "{err}");
}

// ---------------------------------------------------------------------------------------
// Standard input
// ---------------------------------------------------------------------------------------

const SMALL: &str = "\
name: stdin chip
fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}
sections:
  feed: {shape: rectangle, width: 200 um, height: 50 um}
nodes:
  supply: {pressure: 150 mbar}
  pump: {flow: 12 uL/min}
  tee: {}
  drain: {pressure: 0 Pa}
channels:
  c1: {from: supply, to: tee, section: feed, length: 12 mm}
  c2: {from: pump, to: tee, section: {shape: circle, diameter: 100 um}, length: 30 mm}
  c3: {from: tee, to: drain, section: feed, length: 8 mm}
";

/// The same chip as [`SMALL`], in JSON.
const SMALL_JSON: &str = r#"{
  "name": "stdin chip",
  "fluid": {"viscosity": "1.0 mPa*s", "density": "998 kg/m^3"},
  "sections": {"feed": {"shape": "rectangle", "width": "200 um", "height": "50 um"}},
  "nodes": {
    "supply": {"pressure": "150 mbar"},
    "pump": {"flow": "12 uL/min"},
    "tee": {},
    "drain": {"pressure": "0 Pa"}
  },
  "channels": {
    "c1": {"from": "supply", "to": "tee", "section": "feed", "length": "12 mm"},
    "c2": {"from": "pump", "to": "tee", "section": {"shape": "circle", "diameter": "100 um"}, "length": "30 mm"},
    "c3": {"from": "tee", "to": "drain", "section": "feed", "length": "8 mm"}
  }
}
"#;

/// The same chip as [`SMALL`], as a YAML flow mapping: its first character is `{`.
const SMALL_FLOW_YAML: &str = "{name: stdin chip, \
fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}, \
sections: {feed: {shape: rectangle, width: 200 um, height: 50 um}}, \
nodes: {supply: {pressure: 150 mbar}, pump: {flow: 12 uL/min}, tee: {}, drain: {pressure: 0 Pa}}, \
channels: {c1: {from: supply, to: tee, section: feed, length: 12 mm}, \
c2: {from: pump, to: tee, section: {shape: circle, diameter: 100 um}, length: 30 mm}, \
c3: {from: tee, to: drain, section: feed, length: 8 mm}}}
";

fn run_stdin(args: &[&str], input: &str) -> (i32, String, String) {
    let out = rillnet().args(args).write_stdin(input).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn a_chip_on_standard_input_gives_the_same_output_as_its_file() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(dir.path(), "small.yaml", SMALL);
    let f = file.to_str().unwrap();
    for format in ["table", "json", "csv"] {
        let from_file = stdout_of(["solve", f, "--format", format]);
        let (code, from_stdin, err) = run_stdin(&["solve", "-", "--format", format], SMALL);
        assert_eq!(code, 0, "{err}");
        assert_eq!(from_stdin, from_file, "--format {format}");

        // JSON is recognised by its first character.
        let (code, sniffed, err) = run_stdin(&["solve", "-", "--format", format], SMALL_JSON);
        assert_eq!(code, 0, "JSON on stdin, --format {format}: {err}");
        assert_eq!(sniffed, from_file, "JSON on stdin, --format {format}");
    }

    // A YAML flow mapping starts with '{' too: guessed as JSON it is refused, and
    // `--syntax yaml` reads it as YAML.
    let (code, _, err) = run_stdin(&["solve", "-", "--format", "json"], SMALL_FLOW_YAML);
    assert_eq!(
        code, 2,
        "sniffed as JSON, YAML flow text must not parse: {err}"
    );
    let (code, forced, err) = run_stdin(
        &["solve", "-", "--syntax", "yaml", "--format", "json"],
        SMALL_FLOW_YAML,
    );
    assert_eq!(code, 0, "{err}");
    assert_eq!(forced, stdout_of(["solve", f, "--format", "json"]));

    // And `--syntax json` refuses block YAML.
    let (code, _, err) = run_stdin(&["solve", "-", "--syntax", "json"], SMALL);
    assert_eq!(code, 2, "{err}");
    assert!(!err.contains("panicked"), "{err}");
}

// ---------------------------------------------------------------------------------------
// Generated text
// ---------------------------------------------------------------------------------------

#[test]
fn completions_and_manual_page() {
    let script = stdout_of(["completions", "bash"]);
    assert!(script.contains("rillnet"), "{script}");
    assert!(script.contains("complete"), "not a bash completion script");
    let page = stdout_of(["manual"]);
    assert!(
        page.starts_with(".TH") || page.contains("\n.TH"),
        "not roff: {}",
        &page[..page.len().min(200)]
    );
    assert!(page.contains("rillnet"));
}

// ---------------------------------------------------------------------------------------
// Findings, dead ends, signed zeros
// ---------------------------------------------------------------------------------------

#[test]
fn findings_are_data() {
    let (code, out, err) = run(["check", "networks/tcell_sorter.yaml", "--format", "json"]);
    assert_eq!(code, 1, "{err}");
    let v: Value = serde_json::from_str(&out).unwrap();
    let findings = v["findings"].as_array().unwrap();
    assert!(!findings.is_empty());
    let mut over = 0;
    for f in findings {
        for key in [
            "kind", "place", "name", "value", "limit", "severity", "message",
        ] {
            assert!(f.get(key).is_some(), "{key} missing in {f}");
        }
        assert!(f["kind"].is_string() && f["name"].is_string());
        assert!(
            matches!(f["place"].as_str(), Some("node" | "channel" | "fluid")),
            "{f}"
        );
        assert!(
            matches!(f["severity"].as_str(), Some("exceeded" | "note")),
            "{f}"
        );
        if f["kind"] == "shear_over_limit" {
            over += 1;
            let (value, limit) = (f["value"].as_f64().unwrap(), f["limit"].as_f64().unwrap());
            assert!(value > limit, "{f}");
            assert_eq!(f["severity"], "exceeded", "{f}");
            assert_eq!(f["place"], "channel", "{f}");
        }
    }
    assert!(
        over >= 1,
        "the pre-filter exceeds the cells' limit: {findings:?}"
    );
    assert!(
        findings
            .iter()
            .any(|f| f["kind"] == "shear_over_limit" && f["name"] == "pre_filter"),
        "{findings:?}"
    );
}

const DEAD_END: &str = "\
name: dead-end branch
fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}
sections:
  s: {shape: rectangle, width: 100 um, height: 50 um}
nodes:
  in: {pressure: 123.4 mbar}
  j: {}
  k: {}
  stub: {}
  out: {pressure: 7 mbar}
channels:
  c_in: {from: in, to: j, section: s, length: 7 mm}
  c_mid: {from: j, to: k, section: s, length: 3.3 mm}
  c_out: {from: k, to: out, section: s, length: 11 mm}
  c_dead: {from: k, to: stub, section: s, length: 2.7 mm}
";

/// Every number token of a JSON, CSV or table text that is a negative zero (`-0`, `-0.0`,
/// `-0e0`, `-0.000`, ...).
fn negative_zeros(text: &str) -> Vec<String> {
    text.split(|c: char| {
        c.is_whitespace() || matches!(c, ',' | ':' | '[' | ']' | '{' | '}' | '"' | '(' | ')')
    })
    .filter(|t| t.starts_with('-'))
    .filter(|t| {
        t.parse::<f64>()
            .is_ok_and(|x| x == 0.0 && x.is_sign_negative())
    })
    .map(String::from)
    .collect()
}

#[test]
fn dead_end_channels_carry_exactly_zero_flow() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write(dir.path(), "dead.yaml", DEAD_END);
    let c = chip.to_str().unwrap();
    let text = stdout_of(["solve", c, "--format", "json"]);
    let v: Value = serde_json::from_str(&text).unwrap();
    let dead = v["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|ch| ch["name"] == "c_dead")
        .unwrap();
    assert_eq!(dead["flow_m3_per_s"].as_f64(), Some(0.0), "{dead}");
    assert!(dead["residence_time_s"].is_null(), "{dead}");
    assert_eq!(dead["pressure_drop_pa"].as_f64(), Some(0.0), "{dead}");
    assert_eq!(dead["wall_shear_max_pa"].as_f64(), Some(0.0), "{dead}");
    assert!(
        negative_zeros(&text).is_empty(),
        "{:?}",
        negative_zeros(&text)
    );
    let csv = stdout_of(["solve", c, "--format", "csv"]);
    assert!(
        negative_zeros(&csv).is_empty(),
        "{:?}",
        negative_zeros(&csv)
    );
    let tables = csv_tables(&csv, "dead end");
    let (header, rows) = &tables[0];
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let row = rows.iter().find(|r| r[1] == "c_dead").unwrap();
    assert_eq!(row[col("flow_m3_per_s")].parse::<f64>().unwrap(), 0.0);
    assert_eq!(row[col("residence_time_s")], "", "{row:?}");
}

#[test]
fn no_negative_zero_in_the_machine_output_of_the_examples() {
    for chip in examples() {
        let c = chip.to_str().unwrap();
        let mut runs = vec![
            vec!["solve", c, "--format", "json"],
            vec!["solve", c, "--format", "csv", "--sensitivity"],
            vec!["check", c, "--format", "json"],
            vec!["check", c, "--format", "csv"],
        ];
        if file_has(&chip, "adjust:") {
            runs.push(vec!["tune", c, "--format", "json"]);
            runs.push(vec!["tune", c, "--format", "csv"]);
        }
        if file_has(&chip, "size:") {
            runs.push(vec!["size", c, "--format", "json"]);
            runs.push(vec!["size", c, "--format", "csv"]);
        }
        for args in runs {
            let (code, out, err) = run(&args);
            assert!(code == 0 || code == 1, "{args:?}: {err}");
            let zeros = negative_zeros(&out);
            assert!(zeros.is_empty(), "{args:?}: {zeros:?}");
        }
    }
}

#[test]
fn no_negative_zero_in_the_json_sensitivities_of_the_examples() {
    for chip in examples() {
        let c = chip.to_str().unwrap();
        let out = stdout_of(["solve", c, "--format", "json", "--sensitivity"]);
        let zeros = negative_zeros(&out);
        assert!(zeros.is_empty(), "{c}: {zeros:?}");
    }
}

#[test]
fn no_negative_zero_in_the_tables_of_the_examples() {
    for chip in examples() {
        let c = chip.to_str().unwrap();
        let (code, out, err) = run(["solve", c, "--sensitivity"]);
        assert_eq!(code, 0, "{c}: {err}");
        let zeros = negative_zeros(&out);
        assert!(zeros.is_empty(), "{c}: {zeros:?}");
    }
}

// ---------------------------------------------------------------------------------------
// Status lines
// ---------------------------------------------------------------------------------------

#[test]
fn status_lines_go_to_standard_error() {
    let dir = tempfile::tempdir().unwrap();
    let chip = std::fs::canonicalize("networks/reagent_mixer.yaml").unwrap();
    let out = rillnet()
        .current_dir(dir.path())
        .arg("plot")
        .arg(&chip)
        .args(["--output", "x.svg"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    assert!(out.stdout.is_empty(), "stdout: {:?}", out.stdout);
    assert_eq!(err, "wrote x.svg\n");
    assert!(dir.path().join("x.svg").is_file());

    let out = rillnet()
        .current_dir(dir.path())
        .arg("-q")
        .arg("plot")
        .arg(&chip)
        .args(["--output", "y.svg"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    assert!(out.stdout.is_empty());
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(dir.path().join("y.svg").is_file());

    // The same for a result written with --output.
    let out = rillnet()
        .current_dir(dir.path())
        .arg("solve")
        .arg(&chip)
        .args(["--format", "json", "--output", "r.json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    assert!(out.stdout.is_empty());
    assert_eq!(String::from_utf8_lossy(&out.stderr), "wrote r.json\n");
}

// ---------------------------------------------------------------------------------------
// Reproducibility
// ---------------------------------------------------------------------------------------

/// The same input gives the same bytes: scripts diff outputs between runs.
#[test]
fn the_same_input_gives_the_same_output() {
    let runs: [&[&str]; 2] = [
        &[
            "section",
            "{shape: trapezoid, top: 150 um, depth: 50 um, sidewall: 54.74 deg}",
            "--format",
            "json",
        ],
        &[
            "solve",
            "networks/koh_silicon_splitter.yaml",
            "--format",
            "json",
        ],
    ];
    for args in runs {
        let once = || {
            stdout_of(args)
                .lines()
                .filter(|l| !l.contains("\"seconds\""))
                .collect::<Vec<_>>()
                .join("\n")
        };
        let first = once();
        for _ in 0..5 {
            assert_eq!(once(), first, "{args:?}");
        }
    }
}
