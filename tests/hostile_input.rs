//! Hostile and extreme input: clear errors with places, never a panic, a NaN or a runaway.
//! Interface contract tests (no physics asserted).

mod common;

use common::rillnet;

const GOOD: &str = "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\n\
sections:\n  tube: {shape: circle, diameter: 100 um}\n\
nodes:\n  inlet: {pressure: 100 mbar}\n  tee: {}\n  drain: {pressure: 0 Pa}\n\
channels:\n  c1: {from: inlet, to: tee, section: tube, length: 10 mm}\n  \
c2: {from: tee, to: drain, section: tube, length: 10 mm}\n";

fn run_on(name: &str, text: &[u8], args: &[&str]) -> (i32, String, String) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join(name);
    std::fs::write(&p, text).unwrap();
    let out = rillnet().args(args).arg(&p).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn extreme_values_are_refused_with_the_range() {
    for (from, to, field) in [
        ("100 mbar", "1e308 Pa", "nodes.inlet.pressure"),
        (
            "length: 10 mm}\n  c2",
            "length: 1e305 m}\n  c2",
            "channels.c1.length",
        ),
        ("diameter: 100 um", "diameter: 1e-300 um", "sections.tube"),
        (
            "viscosity: 1 mPa*s",
            "viscosity: 1e30 Pa*s",
            "fluid.viscosity",
        ),
    ] {
        let text = GOOD.replacen(from, to, 1);
        let (code, out, err) = run_on("chip.yaml", text.as_bytes(), &["solve"]);
        assert_eq!(code, 2, "{to}: {err}");
        assert!(out.is_empty());
        assert!(err.contains(field) && err.contains("range"), "{to}: {err}");
        assert!(!err.contains("NaN") && !err.contains("inf"), "{err}");
    }
    let text = GOOD.replacen(
        "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}",
        "fluid: {model: water, temperature: -300 degC}",
        1,
    );
    let (code, _, err) = run_on("chip.yaml", text.as_bytes(), &["solve"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("absolute zero"), "{err}");
}

#[test]
fn messages_name_no_rust_types() {
    for (from, to) in [
        (
            "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}",
            "fluid: 3",
        ),
        ("nodes:", "section_tolerance: \"1e-4\"\nnodes:"),
    ] {
        let (code, _, err) = run_on(
            "chip.yaml",
            GOOD.replacen(from, to, 1).as_bytes(),
            &["solve"],
        );
        assert_eq!(code, 2, "{err}");
        for rust in ["struct ", "f64", "FluidSpec", "ChipFile"] {
            assert!(!err.contains(rust), "'{rust}' in: {err}");
        }
        // One place, given once.
        assert!(!err.contains(" at line "), "{err}");
    }
}

#[test]
fn hidden_characters_in_names_are_refused_and_shown_escaped() {
    let text = GOOD.replace("tee", "t\u{202e}ee");
    let (code, _, err) = run_on("chip.yaml", text.as_bytes(), &["solve"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("U+202E") && !err.contains('\u{202e}'), "{err}");
}

#[test]
fn a_json_chip_with_a_byte_order_mark_reads() {
    let json = "\u{feff}{\"fluid\": {\"viscosity\": \"1 mPa*s\", \"density\": \"1000 kg/m^3\"},\
        \"sections\": {\"t\": {\"shape\": \"circle\", \"diameter\": \"100 um\"}},\
        \"nodes\": {\"a\": {\"pressure\": \"1 bar\"}, \"b\": {\"pressure\": \"0 Pa\"}},\
        \"channels\": {\"c\": {\"from\": \"a\", \"to\": \"b\", \"section\": \"t\", \"length\": \"1 mm\"}}}";
    let (code, out, err) = run_on("chip.json", json.as_bytes(), &["solve"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("Ports"));
}

#[test]
fn deep_nesting_is_refused_quickly() {
    let text = format!(
        "name: {}{}\n{GOOD}",
        "[".repeat(100_000),
        "]".repeat(100_000)
    );
    let started = std::time::Instant::now();
    let (code, _, err) = run_on("chip.yaml", text.as_bytes(), &["solve"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("nests deeper"), "{err}");
    // Generous bound: the refusal is a linear scan; the old path took tens of seconds.
    assert!(started.elapsed().as_secs() < 20);
}

#[cfg(unix)]
#[test]
fn a_device_file_is_read_only_up_to_the_limit() {
    let out = rillnet()
        .args(["solve", "/dev/zero"])
        .timeout(std::time::Duration::from_secs(60))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("larger than"));
}

#[test]
fn serpentine_arguments_must_be_positive() {
    for (flag, value) in [("--run", "0 mm"), ("--run", "-5 mm"), ("--pitch", "0 um")] {
        let out = rillnet()
            .args([
                "size",
                "networks/gradient_splitter_sizing.yaml",
                &format!("{flag}={value}"),
            ])
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(2), "{flag} {value}");
        assert!(String::from_utf8_lossy(&out.stderr).contains("positive length"));
    }
}

#[test]
fn a_report_into_a_folder_with_an_old_page_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("index.html"), "old").unwrap();
    let out = rillnet()
        .args([
            "report",
            "networks/reagent_mixer.yaml",
            "--into-existing",
            "--output",
        ])
        .arg(dir.path())
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("index.html"));
    let files: Vec<_> = std::fs::read_dir(dir.path()).unwrap().collect();
    assert_eq!(files.len(), 1, "only the old page is there");
    assert_eq!(
        std::fs::read_to_string(dir.path().join("index.html")).unwrap(),
        "old"
    );
}

#[test]
fn design_inputs_are_checked_and_weights_do_not_change_the_verdict() {
    let chip = std::fs::read_to_string("networks/perfusion_tuning.yaml").unwrap();
    for (to, needle) in [
        ("ratio: [1, 1], weight: 1e308}", "weight must be between"),
        ("ratio: [1, 1], weight: 0}", "weight must be between"),
    ] {
        let text = chip.replace("ratio: [1, 1]}", to);
        let (code, _, err) = run_on("chip.yaml", text.as_bytes(), &["tune"]);
        assert_eq!(code, 2, "{to}: {err}");
        assert!(
            err.contains(needle) && !err.contains("00000000000"),
            "{err}"
        );
    }
    let text = chip.replace(
        "split: [chamber_left, chamber_right]",
        "split: [chamber_left, chamber_left]",
    );
    let (code, _, err) = run_on("chip.yaml", text.as_bytes(), &["tune"]);
    assert_eq!(code, 2);
    assert!(err.contains("listed twice"), "{err}");
    // A feasible chip stays feasible whatever the weights' magnitude.
    for w in ["1e-5", "1e5"] {
        let text = chip.replace("ratio: [1, 1]}", &format!("ratio: [1, 1], weight: {w}}}"));
        let (code, out, err) = run_on("chip.yaml", text.as_bytes(), &["tune", "--format", "json"]);
        assert_eq!(code, 0, "weight {w}: {err}");
        let v: serde_json::Value = serde_json::from_str(&out).unwrap();
        assert_eq!(v["all_targets_met"], true, "weight {w}");
    }
}

/// A chain of `n` channels with short names (compact text, many channels).
fn chain(n: usize) -> String {
    let mut t = String::from(
        "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nsections:\n  s: {shape: circle, diameter: 100 um}\nnodes:\n  a0: {pressure: 1 kPa}\n",
    );
    for i in 1..n {
        t.push_str(&format!("  a{i}: {{}}\n"));
    }
    t.push_str(&format!("  a{n}: {{pressure: 0 Pa}}\nchannels:\n"));
    for i in 0..n {
        t.push_str(&format!(
            "  c{i}: {{from: a{i}, to: a{}, section: s, length: 1 mm}}\n",
            i + 1
        ));
    }
    t
}

#[test]
fn chips_beyond_the_memory_budget_are_refused_before_they_are_built() {
    // 20 000 channels: about 1.2 MB of text. The estimates (src/lib.rs, rillnet::memory):
    // 32 MB + 25 B per text byte ≈ 62 MB from the size, 32 MB + 1 800 B per channel + 500 B
    // per node ≈ 78 MB from the counts.
    let text = chain(20_000);
    let by_text = rillnet::memory::for_text(text.len());
    let by_counts = rillnet::memory::for_network(20_001, 20_000);
    assert!(by_text < by_counts);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("chain.yaml");
    std::fs::write(&path, &text).unwrap();
    let run = |budget: u64, by_env: bool| {
        let mut cmd = rillnet();
        if by_env {
            cmd.env(rillnet::memory::ENV, budget.to_string());
        } else {
            cmd.env_remove(rillnet::memory::ENV)
                .args(["--memory-budget", &format!("{budget} B")]);
        }
        let out = cmd.arg("solve").arg(&path).output().unwrap();
        (
            out.status.code().unwrap_or(-1),
            String::from_utf8_lossy(&out.stderr).into_owned(),
        )
    };
    // Under the size estimate: refused from the size, before parsing.
    for by_env in [true, false] {
        let (code, err) = run(by_text - 1, by_env);
        assert_eq!(code, 2, "{err}");
        assert!(
            err.contains("chain.yaml") && err.contains("estimated from its size"),
            "{err}"
        );
        assert!(
            err.contains(&format!("{:.0} MB", by_text as f64 / 1e6)),
            "{err}"
        );
        assert!(
            err.contains(&format!("budget of {:.0} MB", (by_text - 1) as f64 / 1e6)),
            "{err}"
        );
    }
    // Between the two: parsed, then refused from the counts, naming them.
    let (code, err) = run(by_counts - 1, false);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("20001 nodes and 20000 channels"), "{err}");
    // With room for both: solved.
    let (code, err) = run(by_counts, true);
    assert_eq!(code, 0, "{err}");
    // A size that is not one is a usage error.
    let out = rillnet()
        .args(["--memory-budget", "6 lbs", "solve"])
        .arg(&path)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
}
