//! Pictures: well-formed SVG (parsed) and PNG (decoded), the expected marks and labels,
//! byte-identical output for the same input, and text drawn without system fonts.

mod common;

use common::{json_of, rillnet};
use std::path::Path;

fn plot(args: &[&str], chip: &Path, out: &Path) -> std::process::Output {
    rillnet()
        .args(args)
        .arg(chip)
        .arg("--plot")
        .arg(out)
        .output()
        .unwrap()
}

/// Colours of the filled rectangles in an SVG, by fill.
fn rect_fills(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).expect("well-formed SVG");
    doc.descendants()
        .filter(|n| n.has_tag_name("rect"))
        .filter_map(|n| n.attribute("fill").map(str::to_string))
        .collect()
}

fn texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).expect("well-formed SVG");
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect()
}

#[test]
fn margin_chart_svg_has_one_bar_per_limited_channel() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("m.svg");
    let res = plot(&["check"], Path::new("networks/tcell_sorter.yaml"), &out);
    assert_eq!(res.status.code(), Some(1)); // the chip fails its check, the plot is still drawn
    let svg = std::fs::read_to_string(&out).unwrap();
    let fills = rect_fills(&svg);
    // Okabe–Ito vermillion (#D55E00) for the one channel over its limit, blue for the 7 others.
    assert_eq!(
        fills
            .iter()
            .filter(|f| f.eq_ignore_ascii_case("#D55E00"))
            .count(),
        1
    );
    assert_eq!(
        fills
            .iter()
            .filter(|f| f.eq_ignore_ascii_case("#0072B2"))
            .count(),
        7
    );
    let t = texts(&svg);
    for name in ["pre_filter", "chamber_a", "collect", "limit (margin = 1)"] {
        assert!(t.iter().any(|x| x == name), "{name} missing from {t:?}");
    }
    assert!(t.iter().any(|x| x.contains("OVER LIMIT")));
    assert!(t.iter().any(|x| x.contains("T-cell capture chip")));
    // Same input, same bytes.
    let again = dir.path().join("m2.svg");
    plot(&["check"], Path::new("networks/tcell_sorter.yaml"), &again);
    assert_eq!(std::fs::read(&again).unwrap(), svg.as_bytes());
}

#[test]
fn margin_chart_png_decodes_and_has_text() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("m.png");
    plot(&["solve"], Path::new("networks/tcell_sorter.yaml"), &out);
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(&out).unwrap()));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    // Drawn at PNG_SCALE device pixels per figure pixel.
    let scale = rillnet::plots::PNG_SCALE as u32;
    assert_eq!(info.width, 960 * scale);
    assert_eq!(info.height, (70 + 64 + 22 * 8) * scale);
    let px = |x: u32, y: u32| {
        let i = ((y * info.width + x) * 3) as usize;
        (buf[i], buf[i + 1], buf[i + 2])
    };
    // The title band (top 35 px, left half) holds dark text pixels: the embedded font rendered.
    let dark = (0..35 * scale)
        .flat_map(|y| (0..480 * scale).map(move |x| (x, y)))
        .filter(|&(x, y)| {
            let (r, g, b) = px(x, y);
            (r as u32 + g as u32 + b as u32) < 200
        })
        .count();
    assert!(dark > 200, "only {dark} dark pixels in the title band");
    // And the over-limit bar's vermillion is present.
    let vermillion = (0..info.height)
        .flat_map(|y| (0..info.width).map(move |x| (x, y)))
        .filter(|&(x, y)| px(x, y) == (213, 94, 0))
        .count();
    assert!(vermillion > 100);
}

#[test]
fn margin_chart_stays_readable_with_many_channels() {
    // 60 parallel channels with a limit: one row each, every name present.
    let mut chip = String::from(
        "name: wide manifold\nfluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3, cells: {volume_fraction: 0.01, shear_limit: 0.5 Pa}}\n\
         nodes:\n  in: {pressure: 20 mbar}\n  out: {pressure: 0 Pa}\nchannels:\n",
    );
    for i in 0..60 {
        chip.push_str(&format!(
            "  lane_{i:02}: {{from: in, to: out, section: {{shape: rectangle, width: {} um, height: 40 um}}, length: 10 mm}}\n",
            40 + 5 * i
        ));
    }
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("wide.yaml");
    std::fs::write(&p, chip).unwrap();
    let out = dir.path().join("wide.svg");
    plot(&["check"], &p, &out);
    let svg = std::fs::read_to_string(&out).unwrap();
    let t = texts(&svg);
    for i in 0..60 {
        let name = format!("lane_{i:02}");
        assert!(t.contains(&name), "{name}");
    }
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let height: u32 = doc
        .root_element()
        .attribute("height")
        .unwrap()
        .parse()
        .unwrap();
    assert_eq!(height, 70 + 64 + 22 * 60);
}

#[test]
fn margin_chart_needs_a_limit_and_a_picture_extension() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("m.svg");
    let res = plot(&["solve"], Path::new("networks/reagent_mixer.yaml"), &out);
    assert_eq!(res.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&res.stderr).contains("shear_limit"));
    assert!(!out.exists());
    let res = plot(
        &["solve"],
        Path::new("networks/tcell_sorter.yaml"),
        &dir.path().join("m.jpg"),
    );
    assert_eq!(res.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&res.stderr).contains(".svg or .png"));
}

#[test]
fn section_picture_svg_and_png() {
    let dir = tempfile::tempdir().unwrap();
    let svg_path = dir.path().join("d.svg");
    let out = rillnet()
        .args([
            "section",
            "{shape: d-shape, mask_width: 50 um, depth: 30 um}",
            "--plot",
        ])
        .arg(&svg_path)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let svg = std::fs::read_to_string(&svg_path).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("well-formed SVG");
    // The field is drawn as filled sub-triangles (four per quadratic element).
    let polygons = doc
        .descendants()
        .filter(|n| n.has_tag_name("polygon"))
        .count();
    assert!(polygons > 400 && polygons % 4 == 0, "{polygons} polygons");
    let t = texts(&svg);
    for label in [
        "u / U_mean",
        "d-shape — inline section",
        "distance along the wall [µm]",
        "τ / G [µm]",
    ] {
        assert!(t.iter().any(|x| x == label), "{label} missing");
    }
    let png_path = dir.path().join("d.png");
    let out = rillnet()
        .args(["section", "{shape: semicircle, diameter: 100 um}", "--plot"])
        .arg(&png_path)
        .output()
        .unwrap();
    assert!(out.status.success());
    let decoder = png::Decoder::new(std::io::BufReader::new(
        std::fs::File::open(&png_path).unwrap(),
    ));
    let reader = decoder.read_info().unwrap();
    let scale = rillnet::plots::PNG_SCALE as u32;
    assert_eq!(
        (reader.info().width, reader.info().height),
        (900 * scale, 720 * scale)
    );
    // An analytic shape is solved numerically for its picture as well.
    let out = rillnet()
        .args(["section", "{shape: circle, diameter: 100 um}", "--plot"])
        .arg(dir.path().join("c.svg"))
        .output()
        .unwrap();
    assert!(out.status.success());
}

fn examples() -> Vec<std::path::PathBuf> {
    let mut v: Vec<_> = std::fs::read_dir("networks")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "yaml"))
        .collect();
    v.sort();
    v
}

/// Polylines drawn as channels: stroke width ≥ 2 and not the vermillion halo colour.
fn channel_lines(svg: &str) -> usize {
    let doc = roxmltree::Document::parse(svg).expect("well-formed SVG");
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .filter(|n| {
            let w: f64 = n
                .attribute("stroke-width")
                .and_then(|w| w.parse().ok())
                .unwrap_or(0.0);
            let halo = n
                .attribute("stroke")
                .is_some_and(|s| s.eq_ignore_ascii_case("#D55E00"));
            w >= 2.0 && !halo
        })
        .count()
}

#[test]
fn chip_pictures_for_every_shipped_example() {
    let dir = tempfile::tempdir().unwrap();
    for chip in examples() {
        let stem = chip.file_stem().unwrap().to_string_lossy().into_owned();
        let svg_path = dir.path().join(format!("{stem}.svg"));
        let out = rillnet()
            .args(["plot"])
            .arg(&chip)
            .arg("--output")
            .arg(&svg_path)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{stem}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let svg = std::fs::read_to_string(&svg_path).unwrap();
        let v = json_of(&chip);
        let n_channels = v["channels"].as_array().unwrap().len();
        assert_eq!(
            channel_lines(&svg),
            n_channels,
            "{stem}: one drawn path per channel"
        );
        let t = texts(&svg);
        // One flow label per channel carrying flow, and every port named.
        let flow_labels = t
            .iter()
            .filter(|x| x.contains("µL/min") && !x.contains("set"))
            .count();
        let flowing = v["channels"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|c| c["flow_m3_per_s"].as_f64().unwrap() != 0.0)
            .count();
        assert!(
            flow_labels <= flowing && flow_labels * 10 >= flowing * 8,
            "{stem}: {flow_labels} of {flowing} flow labels placed"
        );
        for port in v["ports"].as_array().unwrap() {
            assert!(
                t.iter().any(|x| x == port["name"].as_str().unwrap()),
                "{stem}: port label"
            );
        }
        assert!(t.iter().any(|x| x.contains("flow split")), "{stem}: title");
        // Same file, same bytes (deterministic layout).
        let again = dir.path().join(format!("{stem}-2.svg"));
        rillnet()
            .args(["plot"])
            .arg(&chip)
            .arg("--output")
            .arg(&again)
            .output()
            .unwrap();
        assert_eq!(
            std::fs::read(&again).unwrap(),
            svg.as_bytes(),
            "{stem}: deterministic"
        );
        // PNG decodes; pressure picture parses.
        let png_path = dir.path().join(format!("{stem}.png"));
        assert!(rillnet()
            .args(["plot", "--colour", "flow"])
            .arg(&chip)
            .arg("-o")
            .arg(&png_path)
            .output()
            .unwrap()
            .status
            .success());
        let decoder = png::Decoder::new(std::io::BufReader::new(
            std::fs::File::open(&png_path).unwrap(),
        ));
        assert!(decoder.read_info().is_ok());
        let p_path = dir.path().join(format!("{stem}-p.svg"));
        assert!(rillnet()
            .args(["plot", "--show", "pressure"])
            .arg(&chip)
            .arg("-o")
            .arg(&p_path)
            .output()
            .unwrap()
            .status
            .success());
        let p_svg = std::fs::read_to_string(&p_path).unwrap();
        assert!(texts(&p_svg).iter().any(|x| x == "pressure [mbar]"));
    }
}

#[test]
fn large_chip_drops_channel_labels_gracefully() {
    // A 600-channel ladder: pictures still render, without per-channel labels.
    let mut chip = String::from("fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nnodes:\n  in: {pressure: 10 mbar}\n  out: {pressure: 0 Pa}\n");
    for i in 0..300 {
        chip.push_str(&format!("  a{i}: {{}}\n  b{i}: {{}}\n"));
    }
    chip.push_str("channels:\n");
    let mut k = 0;
    let mut ch = |a: &str, b: &str, out: &mut String| {
        out.push_str(&format!("  c{k}: {{from: {a}, to: {b}, section: {{shape: circle, diameter: 100 um}}, length: 1 mm}}\n"));
        k += 1;
    };
    let mut body = String::new();
    ch("in", "a0", &mut body);
    for i in 0..299 {
        ch(&format!("a{i}"), &format!("a{}", i + 1), &mut body);
        ch(&format!("b{i}"), &format!("b{}", i + 1), &mut body);
    }
    ch("a299", "b0", &mut body);
    ch("b299", "out", &mut body);
    chip.push_str(&body);
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("big.yaml");
    std::fs::write(&p, chip).unwrap();
    let out_path = dir.path().join("big.svg");
    let out = rillnet()
        .arg("plot")
        .arg(&p)
        .arg("-o")
        .arg(&out_path)
        .output()
        .unwrap();
    // One long chain in → a0 … a299 → b0 … b299 → out: every channel carries the flow.
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let svg = std::fs::read_to_string(&out_path).unwrap();
    let t = texts(&svg);
    assert!(t
        .iter()
        .any(|x| x.contains("only channels and junctions with findings or targets are named")));
    assert!(!t
        .iter()
        .any(|x| x.ends_with("µL/min") && !x.contains("set") && !x.contains("in")));
}

#[test]
fn report_folder_holds_tables_pictures_and_one_html_page() {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("rep");
    let out = rillnet()
        .args(["report", "networks/tcell_sorter.yaml", "-o"])
        .arg(&folder)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for f in [
        "summary.txt",
        "results.json",
        "results.csv",
        "splits.svg",
        "splits.png",
        "pressure.svg",
        "margins.svg",
        "index.html",
    ] {
        assert!(folder.join(f).exists(), "{f}");
    }
    let html = std::fs::read_to_string(folder.join("index.html")).unwrap();
    assert_eq!(html.matches("<svg").count(), 3, "three inline pictures");
    assert!(html.contains("pre_filter") && html.contains("OVER") && html.contains("Caution"));
    assert!(!html.contains("src=\"http"), "self-contained");
    // A non-empty folder is refused unless asked, and nothing is replaced even then.
    let again = rillnet()
        .args(["report", "networks/tcell_sorter.yaml", "-o"])
        .arg(&folder)
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("not empty"));
    let forced = rillnet()
        .args([
            "report",
            "networks/tcell_sorter.yaml",
            "--into-existing",
            "-o",
        ])
        .arg(&folder)
        .output()
        .unwrap();
    assert_eq!(forced.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&forced.stderr).contains("exists"));
}

/// The textual parts of a picture (titles, labels, ticks), one per line, compared with a
/// committed snapshot. Set RILLNET_UPDATE_SNAPSHOTS=1 to rewrite the snapshot after an
/// intended change, and review the diff.
fn check_text_snapshot(svg: &str, name: &str) {
    let got = texts(svg).join("\n") + "\n";
    let path = std::path::Path::new("tests/snapshots").join(name);
    if std::env::var_os("RILLNET_UPDATE_SNAPSHOTS").is_some() {
        std::fs::write(&path, &got).unwrap();
    }
    let want = std::fs::read_to_string(&path).unwrap_or_default();
    assert_eq!(
        got, want,
        "text of {name} changed; review and update the snapshot"
    );
}

#[test]
fn picture_texts_match_their_snapshots() {
    let dir = tempfile::tempdir().unwrap();
    for (chip, args, snap) in [
        (
            "networks/reagent_mixer.yaml",
            vec!["plot"],
            "reagent_mixer_splits.txt",
        ),
        (
            "networks/chamber_ladder.yaml",
            vec!["plot", "--show", "pressure"],
            "chamber_ladder_pressure.txt",
        ),
    ] {
        let out = dir.path().join(format!("{snap}.svg"));
        let res = rillnet()
            .args(&args)
            .arg(chip)
            .arg("-o")
            .arg(&out)
            .output()
            .unwrap();
        assert!(res.status.success());
        check_text_snapshot(&std::fs::read_to_string(&out).unwrap(), snap);
    }
    let out = dir.path().join("margins.svg");
    rillnet()
        .args(["check", "networks/tcell_sorter.yaml", "--plot"])
        .arg(&out)
        .output()
        .unwrap();
    check_text_snapshot(&std::fs::read_to_string(&out).unwrap(), "tcell_margins.txt");
}
