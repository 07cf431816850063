//! `evolve --plot`: flows and well levels against time, deterministic bytes, chosen channels.

mod common;

const CHIP: &str = "\
fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
nodes:
  a: {reservoir: {level: 12 mm, area: 2 mm^2}}
  b: {reservoir: {level: 3 mm, diameter: 1.5 mm}}
  j: {}
  pump: {flow: 2 uL/min, on_at: 5 min}
channels:
  ca: {from: a, to: j, section: {shape: circle, diameter: 100 um}, length: 30 mm}
  cb: {from: j, to: b, section: {shape: circle, diameter: 100 um}, length: 30 mm}
  cp: {from: pump, to: j, section: {shape: circle, diameter: 100 um}, length: 10 mm}
";

fn draw(dir: &std::path::Path, file: &str, extra: &[&str]) -> std::process::Output {
    let chip = dir.join("wells.yaml");
    if !chip.exists() {
        std::fs::write(&chip, CHIP).unwrap();
    }
    let out = dir.join(file);
    let mut args: Vec<std::ffi::OsString> = vec![
        "evolve".into(),
        chip.into(),
        "--for".into(),
        "20 min".into(),
        "--every".into(),
        "10 s".into(),
        "--plot".into(),
        out.into(),
    ];
    args.extend(extra.iter().map(|s| s.into()));
    common::rillnet().args(args).output().unwrap()
}

fn texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|s| s.trim().to_string()))
        .collect()
}

#[test]
fn the_time_picture_is_deterministic_and_names_its_curves() {
    let dir = tempfile::tempdir().unwrap();
    assert!(draw(dir.path(), "one.svg", &[]).status.success());
    assert!(draw(dir.path(), "two.svg", &[]).status.success());
    let one = std::fs::read_to_string(dir.path().join("one.svg")).unwrap();
    let two = std::fs::read_to_string(dir.path().join("two.svg")).unwrap();
    assert_eq!(one, two, "same chip, same bytes");
    let t = texts(&one);
    // Default: the channels at the ports (all three here), and both wells' levels.
    for name in ["ca", "cb", "cp", "a", "b"] {
        assert!(t.iter().any(|s| s == name), "{name} missing from {t:?}");
    }
    assert!(t.iter().any(|s| s == "time [min]"), "{t:?}");
    assert!(t.iter().any(|s| s == "level [mm]"), "{t:?}");
    let doc = roxmltree::Document::parse(&one).unwrap();
    // Each curve is a polyline with one point per output (121 outputs over 20 min).
    let long = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .filter(|n| {
            n.attribute("points")
                .is_some_and(|p| p.split_whitespace().count() >= 100)
        })
        .count();
    assert_eq!(long, 5);
}

#[test]
fn chosen_channels_only_and_png_decodes() {
    let dir = tempfile::tempdir().unwrap();
    let out = draw(dir.path(), "cp.svg", &["--channels", "cp"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let t = texts(&std::fs::read_to_string(dir.path().join("cp.svg")).unwrap());
    assert!(t.iter().any(|s| s == "cp"));
    assert!(!t.iter().any(|s| s == "ca"));
    assert!(draw(dir.path(), "p.png", &[]).status.success());
    let bytes = std::fs::read(dir.path().join("p.png")).unwrap();
    let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
    let reader = decoder.read_info().unwrap();
    let scale = rillnet::plots::PNG_SCALE as u32;
    assert_eq!(
        (reader.info().width, reader.info().height),
        (1000 * scale, 900 * scale)
    );
    // An unknown channel is refused with its name, exit code 2, and no file.
    let out = draw(dir.path(), "x.svg", &["--channels", "cq"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("no channel 'cq'"));
    assert!(!dir.path().join("x.svg").exists());
    // An existing file is never replaced.
    let out = draw(dir.path(), "cp.svg", &[]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn report_adds_the_evolution_when_the_chip_has_storage() {
    let dir = tempfile::tempdir().unwrap();
    let chip = dir.path().join("wells.yaml");
    std::fs::write(&chip, CHIP).unwrap();
    let folder = dir.path().join("rep");
    let out = common::rillnet()
        .args([
            "report".as_ref(),
            chip.as_os_str(),
            "-o".as_ref(),
            folder.as_os_str(),
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for f in [
        "evolve.txt",
        "evolve.json",
        "evolve.csv",
        "evolve.svg",
        "evolve.png",
    ] {
        assert!(folder.join(f).exists(), "{f}");
    }
    let page = std::fs::read_to_string(folder.join("index.html")).unwrap();
    assert!(page.contains("flows against time"));
    // The run went on until the flows settled: the wells equalise (levels_equal) and the
    // last outputs agree with the steady flows of the pump (2 uL/min into the wells).
    let doc: serde_json::Value =
        serde_json::from_slice(&std::fs::read(folder.join("evolve.json")).unwrap()).unwrap();
    let cp = doc["channels"][2]["flow_m3_per_s"].as_array().unwrap();
    let q = cp.last().unwrap().as_f64().unwrap();
    assert!((q - 2e-9 / 60.0).abs() <= 1e-9 * 2e-9 / 60.0, "{q}");
    // A chip without storage or timed drives gets no evolution.
    let plain = CHIP
        .replace(
            "{reservoir: {level: 12 mm, area: 2 mm^2}}",
            "{pressure: 100 Pa}",
        )
        .replace(
            "{reservoir: {level: 3 mm, diameter: 1.5 mm}}",
            "{pressure: 0 Pa}",
        )
        .replace(", on_at: 5 min", "");
    std::fs::write(dir.path().join("plain.yaml"), plain).unwrap();
    let folder = dir.path().join("rep2");
    let out = common::rillnet()
        .args([
            "report".as_ref(),
            dir.path().join("plain.yaml").as_os_str(),
            "-o".as_ref(),
            folder.as_os_str(),
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(!folder.join("evolve.txt").exists());
}
