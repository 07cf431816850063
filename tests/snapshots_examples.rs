//! Snapshots of what rillnet prints for every shipped example: `solve` as a table, JSON and
//! CSV; `check` for every chip; `tune` for the chips with `adjust:`; `size` for the chips with
//! `size:`; `section` for the numerical cross-sections of the KOH example.
//!
//! Interface contract: a change to any of these outputs shows up as a reviewed snapshot diff.
//! Numbers are kept exactly as printed, with two exceptions: the wall-clock time of the
//! `section` command is redacted, and the JSON and CSV of chips with numerically solved
//! cross-sections are rounded to 10 significant digits (see [`round_numbers`]).

mod common;

use common::rillnet;
use std::path::{Path, PathBuf};

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

fn stem(chip: &Path) -> String {
    chip.file_stem().unwrap().to_str().unwrap().to_string()
}

/// Shape kinds whose figures come from the finite-element solve, not a closed form.
const NUMERICAL_SHAPES: &[&str] = &[
    "trapezoid",
    "d-shape",
    "semicircle",
    "rounded-rectangle",
    "polygon",
    "profile",
];

/// Whether any cross-section of the chip is solved numerically.
fn has_numerical_sections(chip: &Path) -> bool {
    common::json_of(chip)["sections"]
        .as_array()
        .unwrap()
        .iter()
        .any(|s| NUMERICAL_SHAPES.contains(&s["shape"].as_str().unwrap()))
}

/// Round every decimal number of `text` with more than 10 significant digits (one with a
/// `.` or an exponent, not part of a name) to 10 significant digits, keeping its notation.
///
/// Why: the figures of numerically solved sections differ between two runs of the same
/// binary in the last one to four digits (about 1e-16 to 1e-13 relative: the summation order
/// of the finite-element solve changes from run to run), and that reaches every flow,
/// shear and sensitivity of a chip that uses them. Ten digits are far beyond what a design
/// decision reads and well above that noise.
fn round_numbers(text: &str) -> String {
    let bytes = text.as_bytes();
    let mut out = String::with_capacity(text.len());
    let mut i = 0;
    while i < bytes.len() {
        let starts_number = bytes[i].is_ascii_digit()
            || (bytes[i] == b'-' && bytes.get(i + 1).is_some_and(u8::is_ascii_digit));
        let after_name = i > 0 && (bytes[i - 1].is_ascii_alphanumeric() || bytes[i - 1] == b'_');
        if !starts_number || after_name {
            let c = text[i..].chars().next().unwrap();
            out.push(c);
            i += c.len_utf8();
            continue;
        }
        let mut j = i + 1;
        while j < bytes.len()
            && (bytes[j].is_ascii_digit()
                || matches!(bytes[j], b'.' | b'e' | b'E')
                || (matches!(bytes[j], b'-' | b'+') && matches!(bytes[j - 1], b'e' | b'E')))
        {
            j += 1;
        }
        let token = &text[i..j];
        let exponent = token.contains(['e', 'E']);
        let digits = token
            .split(['e', 'E'])
            .next()
            .unwrap()
            .trim_start_matches(['-', '0', '.'])
            .chars()
            .filter(char::is_ascii_digit)
            .count();
        match token.parse::<f64>() {
            Ok(x) if digits > 10 && (exponent || token.contains('.')) => {
                let r: f64 = format!("{x:.9e}").parse().unwrap();
                out.push_str(&if exponent {
                    format!("{r:e}")
                } else {
                    format!("{r}")
                });
            }
            _ => out.push_str(token),
        }
        i = j;
    }
    out
}

fn file_has(chip: &Path, key: &str) -> bool {
    std::fs::read_to_string(chip).unwrap().contains(key)
}

/// Run `rillnet args`, which must exit with one of `codes`; (exit code, stdout).
fn run(args: &[&str], codes: &[i32]) -> (i32, String) {
    let out = rillnet().args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    let code = out.status.code().unwrap_or(-1);
    assert!(
        codes.contains(&code),
        "rillnet {args:?}: exit {code}: {err}"
    );
    assert!(!err.contains("panicked"), "rillnet {args:?}: {err}");
    (code, String::from_utf8(out.stdout).unwrap())
}

/// Compare `text` with the stored snapshot `name`, kept in `snapshots/examples/`.
fn snapshot(name: &str, args: &[&str], text: &str) {
    let mut settings = insta::Settings::clone_current();
    settings.set_snapshot_path("snapshots/examples");
    settings.set_prepend_module_to_snapshot(false);
    settings.set_omit_expression(true);
    settings.set_description(format!("rillnet {}", args.join(" ")));
    settings.bind(|| insta::assert_snapshot!(name, text));
}

/// Snapshot `rillnet CMD CHIP [--format F]` of every chip for which `applies` holds.
fn snapshot_each(cmd: &str, format: &str, codes: &[i32], applies: impl Fn(&Path) -> bool) -> usize {
    let mut done = 0;
    for chip in examples().iter().filter(|c| applies(c)) {
        let c = chip.to_str().unwrap();
        let args = [cmd, c, "--format", format];
        let (code, mut out) = run(&args, codes);
        if format != "table" && has_numerical_sections(chip) {
            out = round_numbers(&out);
        }
        let text = if codes.len() > 1 {
            // `check`: the exit code is part of the contract.
            format!("exit code {code}\n\n{out}")
        } else {
            out
        };
        snapshot(&format!("{}__{cmd}_{format}", stem(chip)), &args, &text);
        done += 1;
    }
    done
}

#[test]
fn solve_table_of_every_example() {
    snapshot_each("solve", "table", &[0], |_| true);
}

#[test]
fn solve_json_of_every_example() {
    snapshot_each("solve", "json", &[0], |_| true);
}

#[test]
fn solve_csv_of_every_example() {
    snapshot_each("solve", "csv", &[0], |_| true);
}

#[test]
fn check_of_every_example() {
    snapshot_each("check", "table", &[0, 1], |_| true);
    snapshot_each("check", "json", &[0, 1], |_| true);
}

#[test]
fn tune_of_the_examples_with_adjustable_ports() {
    let adjustable = |c: &Path| file_has(c, "adjust:");
    assert!(snapshot_each("tune", "table", &[0], adjustable) >= 1);
    assert!(snapshot_each("tune", "json", &[0], adjustable) >= 1);
}

#[test]
fn size_of_the_examples_with_free_dimensions() {
    let sizable = |c: &Path| file_has(c, "size:");
    assert!(snapshot_each("size", "table", &[0], sizable) >= 1);
    assert!(snapshot_each("size", "json", &[0], sizable) >= 1);
}

/// The `section` command on the numerical shapes of the KOH example (trapezoid, D-shape,
/// measured profile), with the wall-clock time redacted.
#[test]
fn section_of_the_numerical_shapes() {
    let chip = "networks/koh_silicon_splitter.yaml";
    for name in ["koh_feed", "glass_mixer", "outlet_measured"] {
        let args = ["section", "--file", chip, "--name", name];
        let (_, table) = run(&args, &[0]);
        // The stable output carries no wall time (reproducible runs).
        assert!(!table.contains(" ms\n"), "a timing in the table: {table}");
        snapshot(
            &format!("koh_silicon_splitter__section_{name}_table"),
            &args,
            &table,
        );

        let args = [
            "section", "--file", chip, "--name", name, "--format", "json",
        ];
        let (_, json) = run(&args, &[0]);
        let value: serde_json::Value = serde_json::from_str(&json).unwrap();
        assert!(value.get("seconds").is_none(), "a timing in the JSON");
        snapshot(
            &format!("koh_silicon_splitter__section_{name}_json"),
            &args,
            &round_numbers(&json),
        );
    }
}
