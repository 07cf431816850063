//! The `rillnet` command as a user meets it: shipped examples, output formats, output files,
//! and every kind of bad input (exit code 2, a message naming the problem and its place).

mod common;

use common::{json_of, rillnet, run_json};
use std::path::{Path, PathBuf};

fn examples() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir("networks")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| {
            matches!(
                p.extension().and_then(|e| e.to_str()),
                Some("yaml" | "json")
            )
        })
        .collect();
    v.sort();
    v
}

const GOOD: &str = "\
name: test chip
fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}
sections:
  feed: {shape: rectangle, width: 200 um, height: 50 um}
  tube: {shape: circle, diameter: 0.5 mm}
nodes:
  supply: {pressure: 150 mbar}
  pump:   {flow: 12 uL/min}
  tee: {}
  drain:  {pressure: 0 Pa}
channels:
  c1: {from: supply, to: tee, section: feed, length: 12 mm}
  c2: {from: pump, to: tee, section: {shape: circle, diameter: 100 um}, length: 30 mm}
  c3: {from: tee, to: drain, section: feed, length: 8 mm}
";

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// Run `solve` on `text` and return (exit code, stderr).
fn solve_text(name: &str, text: &str) -> (i32, String) {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), name, text);
    let out = rillnet().arg("solve").arg(&p).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn every_shipped_example_solves() {
    let all = examples();
    assert!(all.len() >= 3, "networks/ holds {} examples", all.len());
    for p in all {
        let out = rillnet().arg("solve").arg(&p).output().unwrap();
        assert!(
            out.status.success(),
            "{}: {}",
            p.display(),
            String::from_utf8_lossy(&out.stderr)
        );
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(
            text.contains("Channels") && text.contains("Caution"),
            "{text}"
        );
        let v = json_of(&p);
        assert!(v["max_relative_residual"].as_f64().unwrap() < 1e-9);
    }
}

#[test]
fn json_has_the_stable_keys_and_balances() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "chip.yaml", GOOD);
    let v = json_of(&p);
    for n in v["nodes"].as_array().unwrap() {
        assert!(n["name"].is_string() && n["pressure_pa"].is_number());
    }
    let channels = v["channels"].as_array().unwrap();
    assert_eq!(channels.len(), 3);
    for c in channels {
        for key in ["name", "from", "to"] {
            assert!(c[key].is_string(), "{key}");
        }
        for key in [
            "flow_m3_per_s",
            "pressure_drop_pa",
            "resistance_pa_s_per_m3",
        ] {
            assert!(c[key].is_number(), "{key}");
        }
        // Q = ΔP / R for every channel.
        let q = c["flow_m3_per_s"].as_f64().unwrap();
        let dp = c["pressure_drop_pa"].as_f64().unwrap();
        let r = c["resistance_pa_s_per_m3"].as_f64().unwrap();
        assert!((q - dp / r).abs() <= 1e-12 * q.abs());
    }
    // The pump port reports the pressure it needs, and delivers its set 12 µL/min.
    let pump = v["ports"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["name"] == "pump")
        .unwrap();
    assert!(pump["pressure_pa"].as_f64().unwrap() > 0.0);
    let q = pump["flow_into_chip_m3_per_s"].as_f64().unwrap();
    assert!((q - 12e-9 / 60.0).abs() < 1e-12 * q);
    // Junction balance: c1 + c2 = c3.
    let f = |i: usize| channels[i]["flow_m3_per_s"].as_f64().unwrap();
    assert!((f(0) + f(1) - f(2)).abs() < 1e-12 * f(2));
}

#[test]
fn json_chip_file_gives_the_same_answer_as_yaml() {
    let dir = tempfile::tempdir().unwrap();
    let y = write(dir.path(), "chip.yaml", GOOD);
    let json_text = r#"{
  "name": "test chip",
  "fluid": {"viscosity": "1.0 mPa*s", "density": "998 kg/m^3"},
  "sections": {"feed": {"shape": "rectangle", "width": "200 um", "height": "50 um"}},
  "nodes": {"supply": {"pressure": "150 mbar"}, "pump": {"flow": "12 uL/min"}, "tee": {}, "drain": {"pressure": "0 Pa"}},
  "channels": {
    "c1": {"from": "supply", "to": "tee", "section": "feed", "length": "12 mm"},
    "c2": {"from": "pump", "to": "tee", "section": {"shape": "circle", "diameter": "100 um"}, "length": "30 mm"},
    "c3": {"from": "tee", "to": "drain", "section": "feed", "length": "8 mm"}
  }
}"#;
    let j = write(dir.path(), "chip.json", json_text);
    let (a, b) = (json_of(&y), json_of(&j));
    assert_eq!(a["channels"], b["channels"]);
    assert_eq!(a["nodes"], b["nodes"]);
}

#[test]
fn csv_is_one_tidy_table() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "chip.yaml", GOOD);
    let out = rillnet()
        .args(["solve", "--format", "csv"])
        .arg(&p)
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert!(header.contains(&"flow_m3_per_s") && header.contains(&"pressure_pa"));
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 4 + 3);
    assert!(rows.iter().all(|r| r.len() == header.len()));
    let flow_col = header.iter().position(|h| *h == "flow_m3_per_s").unwrap();
    let c3 = rows.iter().find(|r| r[1] == "c3").unwrap();
    assert!(c3[flow_col].parse::<f64>().unwrap() > 0.0);
}

#[test]
fn output_goes_to_a_new_file_and_never_overwrites() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(dir.path(), "chip.yaml", GOOD);
    let out_path = dir.path().join("result.json");
    rillnet()
        .args(["solve", "--format", "json", "--output"])
        .arg(&out_path)
        .arg(&p)
        .assert()
        .success();
    let first = std::fs::read(&out_path).unwrap();
    assert!(serde_json::from_slice::<serde_json::Value>(&first).is_ok());
    // Second run: the file exists, so it is refused and left as it was.
    let out = rillnet()
        .args(["solve", "--output"])
        .arg(&out_path)
        .arg(&p)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("exists"));
    assert_eq!(std::fs::read(&out_path).unwrap(), first);
    // The input itself is never a valid output.
    let out = rillnet()
        .args(["solve", "--output"])
        .arg(&p)
        .arg(&p)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&p).unwrap(), GOOD);
    // No temporary files are left behind.
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .contains(".part")
        })
        .collect();
    assert!(leftovers.is_empty());
}

/// Each bad input: the text change, and what the error must mention (place and problem).
#[test]
fn bad_input_is_explained_with_its_place() {
    let cases: &[(&str, &str, &str, &[&str])] = &[
        (
            "unknown node",
            "to: drain, section: feed, length: 8 mm}",
            "to: drian, section: feed, length: 8 mm}",
            &[
                "chip.yaml:14:",
                "channels.c3.to",
                "unknown node 'drian'",
                "did you mean 'drain'",
            ],
        ),
        (
            "unknown section",
            "c1: {from: supply, to: tee, section: feed,",
            "c1: {from: supply, to: tee, section: fed,",
            &[
                "chip.yaml:12:",
                "channels.c1.section",
                "unknown section 'fed'",
            ],
        ),
        (
            "duplicate node",
            "  tee: {}\n",
            "  tee: {}\n  tee: {}\n",
            &["chip.yaml:10:", "'tee' is defined twice"],
        ),
        (
            "duplicate channel",
            "  c3: {from: tee",
            "  c1: {from: tee",
            &["chip.yaml:14:", "'c1' is defined twice"],
        ),
        (
            "self loop",
            "c3: {from: tee, to: drain",
            "c3: {from: tee, to: tee",
            &["chip.yaml:14:", "channels.c3", "to itself"],
        ),
        (
            "zero width",
            "width: 200 um",
            "width: 0 um",
            &["chip.yaml:4:", "sections.feed.width", "positive"],
        ),
        (
            "negative length",
            "length: 8 mm",
            "length: -8 mm",
            &["chip.yaml:14:", "channels.c3.length", "positive"],
        ),
        (
            "non-finite",
            "diameter: 0.5 mm",
            "diameter: 1e999 mm",
            &["chip.yaml:5:", "not finite"],
        ),
        (
            "NaN",
            "diameter: 0.5 mm",
            "diameter: .nan",
            &["chip.yaml:5:", "sections.tube.diameter"],
        ),
        (
            "wrong unit kind",
            "width: 200 um",
            "width: 3 mbar",
            &[
                "chip.yaml:4:",
                "sections.feed.width",
                "a pressure",
                "a length",
            ],
        ),
        (
            "bare number",
            "length: 12 mm",
            "length: 12",
            &[
                "chip.yaml:12:",
                "channels.c1.length",
                "bare number",
                "needs a unit",
            ],
        ),
        (
            "unknown unit",
            "length: 12 mm",
            "length: 12 inches",
            &["chip.yaml:12:", "unknown unit 'inches'"],
        ),
        (
            "both pressure and flow",
            "pump:   {flow: 12 uL/min}",
            "pump:   {flow: 12 uL/min, pressure: 1 bar}",
            &["chip.yaml:8:", "nodes.pump", "both 'pressure' and 'flow'"],
        ),
        (
            "floating part",
            "  drain:  {pressure: 0 Pa}\n",
            "  drain:  {pressure: 0 Pa}\n  lost_a: {}\n  lost_b: {flow: 1 uL/min}\n",
            &["chip.yaml:", "undetermined", "'lost_a'", "'lost_b'"],
        ),
        (
            "unknown key",
            "tee: {}",
            "tee: {presure: 1 bar}",
            &["chip.yaml:9:", "unknown field `presure`"],
        ),
        (
            "missing key",
            "c1: {from: supply, to: tee, section: feed, length: 12 mm}",
            "c1: {from: supply, to: tee, section: feed}",
            &["chip.yaml:12:", "missing field `length`"],
        ),
        (
            "wrong dimension for shape",
            "tube: {shape: circle, diameter: 0.5 mm}",
            "tube: {shape: circle, width: 0.5 mm}",
            &["chip.yaml:", "sections.tube", "circle"],
        ),
        (
            "unknown shape",
            "shape: circle, diameter: 0.5 mm",
            "shape: hexagon, diameter: 0.5 mm",
            &["chip.yaml:5:", "hexagon"],
        ),
        ("yaml syntax", "  tee: {}\n", "  tee: {\n", &["chip.yaml:"]),
        (
            "zero viscosity",
            "viscosity: 1.0 mPa*s",
            "viscosity: 0 mPa*s",
            &["chip.yaml:2:", "fluid.viscosity", "positive"],
        ),
    ];
    for (what, from, to, needles) in cases {
        assert!(GOOD.contains(from), "{what}: test text not found");
        let text = GOOD.replacen(from, to, 1);
        let (code, err) = solve_text("chip.yaml", &text);
        assert_eq!(code, 2, "{what}: exit code {code}, stderr: {err}");
        assert!(!err.contains("panicked"), "{what}: {err}");
        for n in *needles {
            assert!(err.contains(n), "{what}: '{n}' missing from: {err}");
        }
    }
}

#[test]
fn chip_without_any_pressure_port_is_refused() {
    let text = GOOD
        .replace("supply: {pressure: 150 mbar}", "supply: {}")
        .replace("drain:  {pressure: 0 Pa}", "drain:  {}");
    let (code, err) = solve_text("chip.yaml", &text);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("undetermined") && err.contains("4 node(s)") && err.contains("'supply'"),
        "{err}"
    );
}

#[test]
fn bad_json_is_explained_with_its_place() {
    let text = r#"{
  "fluid": {"viscosity": "1 mPa*s", "density": "1000 kg/m^3"},
  "nodes": {"a": {"pressure": "1 kPa"}, "b": {"pressure": "0 Pa"}},
  "channels": {"c": {"from": "a", "to": "b", "section": {"shape": "circle", "diameter": "3 mbar"}, "length": "1 mm"}}
}"#;
    let (code, err) = solve_text("chip.json", text);
    assert_eq!(code, 2);
    assert!(
        err.contains("chip.json:4:") && err.contains("channels.c.section.diameter"),
        "{err}"
    );
    assert!(err.contains("a pressure"), "{err}");
    let (code, err) = solve_text("chip.json", "{\"fluid\": ");
    assert_eq!(code, 2);
    assert!(err.contains("chip.json:1:"), "{err}");
}

#[test]
fn a_repeated_name_in_json_is_placed_at_its_second_definition() {
    let text = r#"{
  "fluid": {"viscosity": "1 mPa*s", "density": "1000 kg/m^3"},
  "sections": {"s": {"shape": "circle", "diameter": "100 um"}},
  "nodes": {"a": {"pressure": "1 bar"},
    "b": {"pressure": "0 Pa"},
    "a": {}},
  "channels": {"c1": {"from": "a", "to": "b", "section": "s", "length": "1 mm"}}
}"#;
    let (code, err) = solve_text("chip.json", text);
    assert_eq!(code, 2);
    assert!(
        err.contains("chip.json:6:5") && err.contains("'a' is defined twice"),
        "{err}"
    );
}

#[test]
fn alias_bomb_is_refused_quickly() {
    // One large anchor referenced thousands of times: small file, enormous expansion.
    let mut text = String::from("fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nbig: &big [");
    text.push_str(&vec!["x"; 50_000].join(", "));
    text.push_str("]\nnodes:\n");
    for i in 0..5_000 {
        text.push_str(&format!("  n{i}: *big\n"));
    }
    let t = std::time::Instant::now();
    let (code, err) = solve_text("bomb.yaml", &text);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("bomb.yaml:4:") && err.contains("aliases"),
        "{err}"
    );
    // Generous bound: refusing must not mean expanding (expansion would take minutes and GBs).
    assert!(t.elapsed().as_secs() < 30);
}

#[test]
fn missing_and_non_utf8_files() {
    let out = rillnet()
        .args(["solve", "no/such/chip.yaml"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no/such/chip.yaml"));
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("bin.yaml");
    std::fs::write(&p, [0xff, 0xfe, 0x00, 0x41]).unwrap();
    let out = rillnet().arg("solve").arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("UTF-8"));
}

#[test]
fn usage_errors_exit_2() {
    rillnet().assert().code(2);
    rillnet().args(["solve"]).assert().code(2);
    rillnet()
        .args(["solve", "x.yaml", "--format", "xml"])
        .assert()
        .code(2);
}

#[test]
fn arbitrary_bytes_never_panic() {
    // A crude fuzz: mutate the good file byte by byte; every outcome is 0 or 2, never a panic.
    let base = GOOD.as_bytes();
    let dir = tempfile::tempdir().unwrap();
    let mut state = 0x9e3779b97f4a7c15u64;
    for i in 0..40 {
        let mut bytes = base.to_vec();
        for _ in 0..3 {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let pos = (state % bytes.len() as u64) as usize;
            const ALPHABET: &[u8] = b"{}[]:,-&*0 \n\"'x9e.";
            bytes[pos] = ALPHABET[(state >> 32) as usize % ALPHABET.len()];
        }
        let p = dir.path().join(format!("m{i}.yaml"));
        std::fs::write(&p, &bytes).unwrap();
        let out = rillnet().arg("solve").arg(&p).output().unwrap();
        let code = out.status.code();
        assert!(
            matches!(code, Some(0) | Some(2)),
            "case {i}: {:?} {}",
            code,
            String::from_utf8_lossy(&out.stderr)
        );
    }
}

#[test]
fn check_exit_codes_on_passing_and_failing_chips() {
    // The shipped T-cell chip is designed with one channel over its cells' limit.
    let out = rillnet()
        .args(["check", "networks/tcell_sorter.yaml"])
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("FAIL") && text.contains("pre_filter") && text.contains("OVER LIMIT"),
        "{text}"
    );
    assert!(
        text.contains("Shear limits:"),
        "the shear caution is printed: {text}"
    );
    // Worst margin first: the failing channel is the first row of the table.
    let first_row = text
        .lines()
        .skip_while(|l| !l.contains("──"))
        .nth(1)
        .unwrap();
    assert!(first_row.contains("pre_filter"), "{first_row}");

    // A gentle chip with a generous limit passes.
    let dir = tempfile::tempdir().unwrap();
    let passing = GOOD.replace(
        "fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}",
        "fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3, cells: {volume_fraction: 0.01, shear_limit: 100 Pa}}\npressure_rating: 2 bar",
    );
    let p = write(dir.path(), "ok.yaml", &passing);
    let out = rillnet().arg("check").arg(&p).output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stdout)
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("PASS"));

    // The same chip with a rating below its supply pressure fails on pressure.
    let over = passing.replace("pressure_rating: 2 bar", "pressure_rating: 100 mbar");
    let p = write(dir.path(), "over.yaml", &over);
    let out = rillnet().arg("check").arg(&p).output().unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stdout).contains("exceeds the chip's rating"));

    // Bad input to check is still exit 2, not 1.
    let out = rillnet().args(["check", "no/such.yaml"]).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn json_carries_shear_figures_and_limits() {
    let v = json_of(Path::new("networks/tcell_sorter.yaml"));
    let channels = v["channels"].as_array().unwrap();
    for c in channels {
        for key in [
            "mean_velocity_m_per_s",
            "reynolds",
            "wall_shear_mean_pa",
            "wall_shear_max_pa",
            "shear_limit_pa",
            "shear_margin",
        ] {
            assert!(c[key].is_number(), "{key} in {c}");
        }
        let margin = c["shear_margin"].as_f64().unwrap();
        let limit = c["shear_limit_pa"].as_f64().unwrap();
        let tmax = c["wall_shear_max_pa"].as_f64().unwrap();
        assert!((margin - limit / tmax).abs() < 1e-12 * margin);
        assert!(tmax >= c["wall_shear_mean_pa"].as_f64().unwrap());
    }
    let chamber = channels.iter().find(|c| c["name"] == "chamber_a").unwrap();
    assert_eq!(chamber["shear_limit_pa"].as_f64(), Some(0.05));
    assert!(v["findings"]
        .as_array()
        .unwrap()
        .iter()
        .any(|f| f["severity"] == "exceeded"));
    // Without any limit, the limit and margin are null.
    let dir = tempfile::tempdir().unwrap();
    let v = json_of(&write(dir.path(), "c.yaml", GOOD));
    assert!(v["channels"][0]["shear_limit_pa"].is_null());
    assert!(v["channels"][0]["shear_margin"].is_null());
}

#[test]
fn fluid_models_in_the_chip_file() {
    let dir = tempfile::tempdir().unwrap();
    let viscosity = |fluid: &str| -> f64 {
        let text = GOOD.replace("fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}", fluid);
        let v = json_of(&write(dir.path(), &format!("f{}.yaml", fluid.len()), &text));
        v["fluid"]["viscosity_pa_s"].as_f64().unwrap()
    };
    // IAPWS R12-08: water at 20 °C is 1.00160 mPa·s.
    let w = viscosity("fluid: {model: water, temperature: 20 degC}");
    assert!((w - 1.0016e-3).abs() < 1e-4 * 1.0016e-3, "{w}");
    // Einstein (1906) on water at 20 °C: φ = 0.02 → ×1.05.
    let s = viscosity("fluid: {model: water, temperature: 20 degC, cells: {volume_fraction: 0.02, viscosity_model: einstein}}");
    assert!((s / w - 1.05).abs() < 1e-12, "{}", s / w);
    // Cheng (2008) / classic table: 50 % glycerol at 20 °C ≈ 6.00 mPa·s (±3 %).
    let g = viscosity(
        "fluid: {model: glycerol-water, glycerol_mass_fraction: 0.5, temperature: 20 degC}",
    );
    assert!((g - 6.0e-3).abs() < 0.03 * 6.0e-3, "{g}");

    // Model errors are placed and explained.
    for (fluid, needles) in [
        ("fluid: {model: water}", &["fluid.model", "temperature"][..]),
        ("fluid: {model: water, temperature: 20 degC, viscosity: 1 cP}", &["fluid.viscosity", "computes the viscosity"][..]),
        ("fluid: {model: glycerol-water, temperature: 20 degC, glycerol_mass_fraction: 1.5}", &["glycerol_mass_fraction", "between 0 and 1"][..]),
        ("fluid: {model: water, temperature: 20 degC, cells: {volume_fraction: 0.7}}", &["fluid.cells.volume_fraction", "max_packing"][..]),
        ("fluid: {viscosity: 1 cP, density: 1 g/cm^3, cells: {volume_fraction: 0.1, shear_limit: -1 Pa}}", &["shear_limit", "positive"][..]),
        ("fluid: {model: soup, temperature: 20 degC}", &["fluid.model", "soup"][..]),
    ] {
        let text = GOOD.replace("fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}", fluid);
        let (code, err) = solve_text("chip.yaml", &text);
        assert_eq!(code, 2, "{fluid}: {err}");
        for n in needles {
            assert!(err.contains(n), "{fluid}: '{n}' missing in {err}");
        }
    }
    // A model used outside its range still solves, with a note.
    let text = GOOD.replace(
        "fluid: {viscosity: 1.0 mPa*s, density: 998 kg/m^3}",
        "fluid: {model: water, temperature: 20 degC, cells: {volume_fraction: 0.2, viscosity_model: einstein}}",
    );
    let p = write(dir.path(), "dilute.yaml", &text);
    let out = rillnet().arg("solve").arg(&p).output().unwrap();
    assert!(out.status.success());
    assert!(String::from_utf8_lossy(&out.stdout).contains("dilute range"));
}

#[test]
fn section_command_reports_figures_in_json() {
    // Equilateral triangle: f·Re = 40/3 and τ_max/G = a√3/8 (closed forms, Shah & London 1978).
    let v = run_json([
        "section",
        "{shape: triangle, side: 100 um}",
        "--format",
        "json",
    ]);
    for key in [
        "area_m2",
        "perimeter_m",
        "hydraulic_diameter_m",
        "resistance_per_length_pa_s_per_m4",
        "fre_fanning",
        "max_wall_shear_per_gradient_m",
        "mean_wall_shear_per_gradient_m",
        "relative_error_estimate",
    ] {
        assert!(v[key].is_number(), "{key}");
    }
    assert!((v["fre_fanning"].as_f64().unwrap() - 40.0 / 3.0).abs() < 1e-12);
    assert!(
        (v["max_wall_shear_per_gradient_m"].as_f64().unwrap() - 100e-6 * 3f64.sqrt() / 8.0).abs()
            < 1e-15
    );

    // The KOH trapezoid of the issue: numerical, with an error estimate below 1e-4.
    let v = run_json([
        "section",
        "{shape: trapezoid, top: 120 um, depth: 40 um, sidewall: 54.74 deg}",
        "--format",
        "json",
    ]);
    assert!(v["relative_error_estimate"].as_f64().unwrap() < 1e-4);
    // Bottom width 120 − 2·40/tan(54.74°) = 63.43 µm; area = (120 + 63.43)/2·40 µm².
    let bottom = 120.0 - 80.0 / 54.74f64.to_radians().tan();
    let area = (120.0 + bottom) / 2.0 * 40.0 * 1e-12;
    assert!((v["area_m2"].as_f64().unwrap() - area).abs() < 1e-6 * area);
    // Force balance check reported: mean wall shear per gradient = A/P.
    let ap = v["area_m2"].as_f64().unwrap() / v["perimeter_m"].as_f64().unwrap();
    assert!((v["mean_wall_shear_per_gradient_m"].as_f64().unwrap() - ap).abs() < 1e-12 * ap);
}

#[test]
fn section_command_from_a_chip_and_its_errors() {
    let out = rillnet()
        .args([
            "section",
            "--file",
            "networks/koh_silicon_splitter.yaml",
            "--name",
            "outlet_measured",
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("profile"));
    for (args, needle) in [
        (vec!["section", "{shape: trapezoid, top: 120 um, depth: 100 um, sidewall: 54.74 deg}"], "walls meet"),
        (vec!["section", "{shape: circle, width: 1 mm}"], "does not take 'width'"),
        (vec!["section", "{shape: hexagon}"], "hexagon"),
        (vec!["section", "{shape: polygon, points: [[0 um, 0 um], [1 um, 1 um]]}"], "at least 3 points"),
        (vec!["section", "{shape: polygon, points: [[0 um, 0 um], [10 um, 10 um], [10 um, 0 um], [0 um, 10 um]]}"], "crosses itself"),
        (vec!["section", "{shape: profile, points: [[0 um, 5 um], [0 um, 6 um]]}"], "increase"),
        (vec!["section", "{shape: circle, diameter: 3 mbar}"], "a pressure"),
        (vec!["section", "--file", "networks/koh_silicon_splitter.yaml", "--name", "nope"], "no section named 'nope'"),
        (vec!["section"], "give either"),
    ] {
        let out = rillnet().args(&args).output().unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {err}");
        assert!(err.contains(needle), "{args:?}: '{needle}' missing from {err}");
    }
}

#[test]
fn trapezoid_chip_solves_end_to_end() {
    let v = json_of(Path::new("networks/koh_silicon_splitter.yaml"));
    let sections = v["sections"].as_array().unwrap();
    let koh = sections.iter().find(|s| s["name"] == "koh_feed").unwrap();
    assert_eq!(koh["shape"], "trapezoid");
    // Shah & London (1978) trapezoidal ducts: f·Re lies between the triangle's 13.3 and the
    // parallel plates' 24 for these aspect ratios; this one is wide and shallow-sided.
    let fre = koh["fre_fanning"].as_f64().unwrap();
    assert!(fre > 13.0 && fre < 24.0, "{fre}");
    // Flow splits inversely to the branch resistances, and the junctions balance.
    let ch = v["channels"].as_array().unwrap();
    let q = |n: &str| {
        ch.iter().find(|c| c["name"] == n).unwrap()["flow_m3_per_s"]
            .as_f64()
            .unwrap()
    };
    assert!((q("feed") - q("branch_left") - q("branch_right")).abs() < 1e-12 * q("feed"));
    assert!(q("branch_right") > q("branch_left")); // the shorter branch takes more
}
