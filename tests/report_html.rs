//! The report page (every table of `solve`, every picture, the input file, version and date),
//! readable PNG text with the decimal point on the baseline, and the pressure-along-path
//! picture (one curve per inlet–outlet path, the legend beside the plot, linear tracing).
//!
//! The page is written as well-formed XML, so it is checked with the XML parser the picture
//! tests already use (roxmltree) rather than a new HTML crate.

mod common;

use common::rillnet;
use rillnet::format::{parse_chip, Syntax};
use rillnet::plots::{self, Figure, PictureFormat, PressurePicture, DRAWN_PATHS, PNG_SCALE};
use std::path::Path;

const EPOCH: &str = "951868800";

fn report(chip: &Path, folder: &Path) {
    let out = rillnet()
        .env("SOURCE_DATE_EPOCH", EPOCH)
        .arg("report")
        .arg(chip)
        .arg("-o")
        .arg(folder)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn parse(html: &str) -> roxmltree::Document<'_> {
    let options = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    roxmltree::Document::parse_with_options(html, options).expect("the page is well-formed")
}

/// Data rows (header excluded) of the table with this id.
fn rows(doc: &roxmltree::Document<'_>, id: &str) -> Vec<Vec<String>> {
    let table = doc
        .descendants()
        .find(|n| n.has_tag_name("table") && n.attribute("id") == Some(id))
        .unwrap_or_else(|| panic!("table '{id}' missing"));
    table
        .children()
        .filter(|r| r.has_tag_name("tr"))
        .skip(1)
        .map(|r| {
            r.children()
                .filter(|c| c.has_tag_name("td"))
                .map(|c| c.text().unwrap_or("").to_string())
                .collect()
        })
        .collect()
}

#[test]
fn page_holds_every_table_picture_and_the_input() {
    let dir = tempfile::tempdir().unwrap();
    for example in [
        "networks/tcell_sorter.yaml",
        "networks/spheroid_perfusion.yaml",
        "networks/reagent_mixer.yaml",
    ] {
        let folder = dir.path().join(Path::new(example).file_stem().unwrap());
        report(Path::new(example), &folder);
        let html = std::fs::read_to_string(folder.join("index.html")).unwrap();
        let doc = parse(&html);
        let json: serde_json::Value =
            serde_json::from_slice(&std::fs::read(folder.join("results.json")).unwrap()).unwrap();
        let text = std::fs::read_to_string(example).unwrap();
        let chip = parse_chip(&text, example, Syntax::Yaml).unwrap();
        let net = &chip.network;
        let ports = net
            .nodes
            .iter()
            .filter(|n| !matches!(n.port, rillnet::network::Port::Junction))
            .count();
        let junctions = net.nodes.len() - ports;
        // One row per port, junction, channel (twice: flows, shear), section.
        assert_eq!(rows(&doc, "ports").len(), ports, "{example}");
        assert_eq!(rows(&doc, "junctions").len(), junctions, "{example}");
        assert_eq!(
            rows(&doc, "channels").len(),
            net.channels.len(),
            "{example}"
        );
        assert_eq!(rows(&doc, "shear").len(), net.channels.len(), "{example}");
        assert_eq!(
            rows(&doc, "channel-geometry").len(),
            net.channels.len(),
            "{example}"
        );
        assert_eq!(
            rows(&doc, "sections").len(),
            net.sections.len(),
            "{example}"
        );
        // Every channel and junction named in its table, with the numbers of results.json.
        let channel_rows = rows(&doc, "channels");
        for (c, row) in net.channels.iter().zip(&channel_rows) {
            assert_eq!(row[0], c.name);
        }
        for row in rows(&doc, "junctions") {
            let node = json["nodes"]
                .as_array()
                .unwrap()
                .iter()
                .find(|n| n["name"] == row[0].as_str())
                .unwrap_or_else(|| panic!("{}: junction {} not in results.json", example, row[0]));
            let p_mbar = node["pressure_pa"].as_f64().unwrap() / 100.0;
            let shown: f64 = row[1].parse().unwrap();
            // Four significant digits are printed.
            assert!(
                (shown - p_mbar).abs() <= 5e-4 * p_mbar.abs().max(1e-9),
                "{example} {}: {shown} vs {p_mbar}",
                row[0]
            );
        }
        // Velocity and residence time columns are filled.
        assert!(channel_rows
            .iter()
            .all(|r| r.len() == 7 && !r[5].is_empty()));
        assert!(rows(&doc, "shear")
            .iter()
            .all(|r| r.len() == 8 && !r[6].is_empty()));
        // Every picture file is in the page: inline SVG (one per .svg file) and linked.
        let pictures: Vec<String> = std::fs::read_dir(&folder)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.ends_with(".svg") || n.ends_with(".png"))
            .collect();
        let links: Vec<&str> = doc
            .descendants()
            .filter(|n| n.has_tag_name("a"))
            .filter_map(|n| n.attribute("href"))
            .collect();
        for p in &pictures {
            assert!(links.contains(&p.as_str()), "{example}: {p} not linked");
        }
        let svgs: Vec<_> = doc
            .descendants()
            .filter(|n| n.tag_name().name() == "svg")
            .collect();
        let svg_files = pictures.iter().filter(|p| p.ends_with(".svg")).count();
        assert_eq!(
            svgs.len(),
            svg_files,
            "{example}: one inline SVG per picture"
        );
        for svg in &svgs {
            // At natural size, inside a box that scrolls sideways, captioned.
            let width: f64 = svg.attribute("width").unwrap().parse().unwrap();
            assert!(width >= 500.0, "{example}: svg width {width}");
            let holder = svg.parent().unwrap();
            assert_eq!(holder.attribute("class"), Some("picture"));
            let figure = holder.parent().unwrap();
            let caption = figure
                .children()
                .find(|c| c.has_tag_name("figcaption"))
                .and_then(|c| c.text())
                .expect("a caption");
            assert!(
                caption.len() > 20 && !caption.contains("  "),
                "{example}: {caption:?}"
            );
        }
        assert!(html.contains(".picture{overflow-x:auto") && html.contains("max-width:none"));
        // The input file, collapsed, byte for byte.
        let details = doc
            .descendants()
            .find(|n| n.has_tag_name("details"))
            .expect("input collapsed");
        let pre = details
            .descendants()
            .find(|n| n.attribute("id") == Some("input-text"))
            .unwrap();
        assert_eq!(pre.text().unwrap_or(""), text, "{example}");
        // Program version and the date from SOURCE_DATE_EPOCH.
        let made = doc
            .descendants()
            .find(|n| n.attribute("class") == Some("made"))
            .unwrap()
            .text()
            .unwrap()
            .to_string();
        assert!(made.contains(env!("CARGO_PKG_VERSION")), "{made}");
        assert!(made.contains("2000-03-01 00:00 UTC"), "{made}");
        // The model caution always; the shear caution where limits are set.
        let cautions: Vec<String> = doc
            .descendants()
            .filter(|n| n.attribute("class") == Some("caution"))
            .map(|n| n.text().unwrap_or("").to_string())
            .collect();
        assert!(cautions.iter().any(|c| c.starts_with("Caution")));
        let limited = json["channels"]
            .as_array()
            .unwrap()
            .iter()
            .any(|c| !c["shear_limit_pa"].is_null());
        assert_eq!(
            cautions.iter().any(|c| c.starts_with("Shear limits")),
            limited,
            "{example}"
        );
    }
}

#[test]
fn findings_in_the_page_match_solve() {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("r");
    report(Path::new("networks/tcell_sorter.yaml"), &folder);
    let html = std::fs::read_to_string(folder.join("index.html")).unwrap();
    let doc = parse(&html);
    let solve = rillnet()
        .args(["solve", "networks/tcell_sorter.yaml"])
        .output()
        .unwrap();
    let solve = String::from_utf8_lossy(&solve.stdout);
    let exceeded_in_solve = solve.matches("[LIMIT EXCEEDED]").count();
    let items: Vec<_> = doc
        .descendants()
        .find(|n| n.attribute("id") == Some("findings-list"))
        .expect("findings")
        .children()
        .filter(|n| n.has_tag_name("li"))
        .collect();
    let exceeded = items
        .iter()
        .filter(|n| n.attribute("class") == Some("over"))
        .count();
    assert!(exceeded > 0);
    assert_eq!(exceeded, exceeded_in_solve);
    let over_rows = rows(&doc, "shear")
        .iter()
        .filter(|r| r[1] == "OVER LIMIT")
        .count();
    assert!(over_rows > 0 && solve.matches("OVER LIMIT").count() == over_rows);
}

#[test]
fn report_is_the_same_bytes_twice() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    report(Path::new("networks/spheroid_perfusion.yaml"), &a);
    report(Path::new("networks/spheroid_perfusion.yaml"), &b);
    let mut names: Vec<_> = std::fs::read_dir(&a)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    names.sort();
    assert!(names.len() >= 8);
    for n in names {
        assert_eq!(
            std::fs::read(a.join(&n)).unwrap(),
            std::fs::read(b.join(&n)).unwrap(),
            "{n:?}"
        );
    }
}

#[test]
fn utc_dates() {
    // 2000-03-01T00:00:00Z is 951 868 800 s (30 years + 7 leap days + 59 days of 2000 + 1);
    // closed form derived here.
    assert_eq!(rillnet::report::utc_date(0), "1970-01-01 00:00 UTC");
    assert_eq!(
        rillnet::report::utc_date(951_868_800),
        "2000-03-01 00:00 UTC"
    );
    assert_eq!(
        rillnet::report::utc_date(951_868_800 - 60),
        "2000-02-29 23:59 UTC"
    );
}

/// A figure with one label at a nominal size, for measuring rendered text.
struct Label(&'static str, u32);

impl Figure for Label {
    fn size(&self) -> (u32, u32) {
        (10 * self.1, 4 * self.1)
    }
    fn draw<DB: plotters::prelude::DrawingBackend>(
        &self,
        area: &plotters::prelude::DrawingArea<DB, plotters::coord::Shift>,
    ) -> Result<(), String> {
        use plotters::prelude::*;
        area.fill(&WHITE).map_err(|e| e.to_string())?;
        area.draw(&Text::new(
            self.0,
            (10, 10),
            (plots::FONT, self.1).into_font(),
        ))
        .map_err(|e| e.to_string())
    }
}

/// The ink of a rendered PNG: (width, height, dark[x][y]).
fn ink(bytes: &[u8]) -> (usize, usize, Vec<Vec<bool>>) {
    let decoder = png::Decoder::new(std::io::Cursor::new(bytes));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    let (w, h) = (info.width as usize, info.height as usize);
    let dark = (0..w)
        .map(|x| {
            (0..h)
                .map(|y| {
                    let i = (y * w + x) * 3;
                    (buf[i] as u32 + buf[i + 1] as u32 + buf[i + 2] as u32) < 3 * 200
                })
                .collect()
        })
        .collect();
    (w, h, dark)
}

/// Runs of inked columns: (first x, last x, top y, bottom y) per glyph.
fn glyphs(dark: &[Vec<bool>]) -> Vec<(usize, usize, usize, usize)> {
    let mut out: Vec<(usize, usize, usize, usize)> = Vec::new();
    let mut open: Option<(usize, usize, usize)> = None;
    for (x, col) in dark.iter().enumerate() {
        let ys: Vec<usize> = (0..col.len()).filter(|&y| col[y]).collect();
        match (ys.first(), &mut open) {
            (Some(&top), Some((_, t, b))) => {
                *t = (*t).min(top);
                *b = (*b).max(*ys.last().unwrap());
            }
            (Some(&top), None) => open = Some((x, top, *ys.last().unwrap())),
            (None, Some((x0, t, b))) => {
                out.push((*x0, x - 1, *t, *b));
                open = None;
            }
            (None, None) => {}
        }
    }
    out
}

#[test]
fn png_text_is_tall_enough_and_the_decimal_point_sits_on_the_baseline() {
    // 11 is the tick-label size, and odd: the size at which plotters' own glyph placement
    // (baseline at size/2, truncated toward zero) lifted the point by a pixel.
    for size in [11, 12] {
        let bytes = plots::render(&Label("8.5", size), PictureFormat::Png).unwrap();
        let (w, h, dark) = ink(&bytes);
        let scale = PNG_SCALE as usize;
        assert_eq!(
            (w, h),
            (10 * size as usize * scale, 4 * size as usize * scale)
        );
        let g = glyphs(&dark);
        assert_eq!(g.len(), 3, "three separate glyphs: {g:?}");
        let (eight, dot, five) = (g[0], g[1], g[2]);
        // Body text at least 12 device pixels tall (digit ink height).
        let digit = eight.3 - eight.2 + 1;
        assert!(digit >= 12, "size {size}: digit ink height {digit} px");
        // The decimal point on the baseline: its ink ends where the digits' ink ends (±1 px)
        // and lies in the bottom quarter of the digit box.
        assert!(
            dot.3.abs_diff(eight.3) <= 1,
            "dot bottom {} vs 8 {}",
            dot.3,
            eight.3
        );
        assert!(dot.3.abs_diff(five.3) <= 1);
        assert!(
            dot.2 >= eight.2 + 3 * digit / 4,
            "dot top {} in {eight:?}",
            dot.2
        );
    }
    // Not squeezed against the digit before it: at a large size, the gaps on both sides of
    // the point are alike, as the font's metrics make them (DejaVu Sans: right bearing of
    // '8' + left bearing of '.' = 359 units, right bearing of '.' + left bearing of '5' =
    // 379 units of 2048 — from memory of the font's tables; the glyph-at-pen-position
    // placement made them 279 and 440).
    let bytes = plots::render(&Label("8.5", 40), PictureFormat::Png).unwrap();
    let (_, _, dark) = ink(&bytes);
    let g = glyphs(&dark);
    assert_eq!(g.len(), 3, "{g:?}");
    let (left, right) = (g[1].0 - g[0].1 - 1, g[2].0 - g[1].1 - 1);
    assert!(
        left >= 6 && left.abs_diff(right) <= 2,
        "gaps {left} and {right} px"
    );
}

/// `k` inlets at 100 mbar (equal drops: drawn in file order), each through its own feed channel onto the first junction of a
/// chain of `l` junctions ending in one outlet; the first `round` feeds are round tubing.
fn fan_in(k: usize, l: usize) -> String {
    let mut s = String::from(
        "name: fan\nfluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nsections:\n  \
         flat: {shape: rectangle, width: 100 um, height: 50 um}\n  \
         tube: {shape: circle, diameter: 250 um}\nnodes:\n",
    );
    for i in 0..k {
        s.push_str(&format!("  in{i}: {{pressure: 100 mbar}}\n"));
        s.push_str(&format!("  port{i}: {{}}\n"));
    }
    for j in 0..l {
        s.push_str(&format!("  c{j}: {{}}\n"));
    }
    s.push_str("  out: {pressure: 0 Pa}\nchannels:\n");
    for i in 0..k {
        s.push_str(&format!(
            "  tube{i}: {{from: in{i}, to: port{i}, section: tube, length: 300 mm}}\n"
        ));
        s.push_str(&format!(
            "  feed{i}: {{from: port{i}, to: c0, section: flat, length: 2 mm}}\n"
        ));
    }
    for j in 0..l {
        let to = if j + 1 < l {
            format!("c{}", j + 1)
        } else {
            "out".into()
        };
        s.push_str(&format!(
            "  link{j}: {{from: c{j}, to: {to}, section: flat, length: 1 mm}}\n"
        ));
    }
    s
}

fn traced(k: usize, l: usize, on_chip: bool) -> (PressurePicture, usize) {
    let chip = parse_chip(&fan_in(k, l), "fan.yaml", Syntax::Yaml).unwrap();
    let state = rillnet::analysis::steady_state(&chip.network).unwrap();
    let size = chip.network.nodes.len() + chip.network.channels.len();
    (PressurePicture::traced(&chip, &state, on_chip), size)
}

#[test]
fn pressure_paths_are_traced_in_linear_work() {
    // Every inlet's path runs the whole chain: a walk per inlet would take k·l steps.
    let (small, n_small) = traced(40, 200, false);
    let (large, n_large) = traced(80, 400, false);
    assert!(
        small.steps <= 4 * n_small,
        "{} steps for {n_small}",
        small.steps
    );
    assert!(
        large.steps <= 4 * n_large,
        "{} steps for {n_large}",
        large.steps
    );
    // Doubling the chip doubles the work (not four times).
    let ratio = large.steps as f64 / small.steps as f64;
    assert!(ratio < 2.3, "work ratio {ratio}");
    // One curve per inlet–outlet path, the largest drops drawn, the rest counted.
    assert_eq!(large.paths.len(), DRAWN_PATHS);
    assert_eq!(large.more, 80 - DRAWN_PATHS);
    assert!(large.paths.windows(2).all(|w| w[0].drop >= w[1].drop));
    assert_eq!(large.paths[0].label, "in0 → out");
    // Each path from its inlet to the outlet, a name at every point.
    for p in &large.paths {
        assert_eq!(p.nodes.len(), p.points.len());
        assert!(p.nodes[0].starts_with("in"));
        assert_eq!(p.nodes.last().unwrap(), "out");
        // Distance: 300 mm of tubing, 2 mm feed, 400 × 1 mm of chain.
        let end = p.points.last().unwrap().0;
        assert!((end - 702.0).abs() < 1e-9, "{end}");
    }
}

#[test]
fn skip_tubing_starts_at_the_first_on_chip_node() {
    let (p, _) = traced(3, 5, true);
    assert!(p.on_chip);
    for path in &p.paths {
        assert!(path.nodes[0].starts_with("port"), "{:?}", path.nodes);
        assert_eq!(path.points[0].0, 0.0);
        // 2 mm feed + 5 × 1 mm: the 300 mm of tubing are left out.
        assert!((path.points.last().unwrap().0 - 7.0).abs() < 1e-9);
    }
}

fn svg_texts(svg: &str) -> Vec<(f64, f64, String)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            (
                n.attribute("x").unwrap_or("0").parse().unwrap_or(0.0),
                n.attribute("y").unwrap_or("0").parse().unwrap_or(0.0),
                n.text().unwrap_or("").trim().to_string(),
            )
        })
        .collect()
}

#[test]
fn pressure_picture_names_nodes_and_keeps_the_legend_beside_the_plot() {
    let chip = parse_chip(
        &std::fs::read_to_string("networks/spheroid_perfusion.yaml").unwrap(),
        "spheroid_perfusion.yaml",
        Syntax::Yaml,
    )
    .unwrap();
    let state = rillnet::analysis::steady_state(&chip.network).unwrap();
    let picture = PressurePicture::traced(&chip, &state, true);
    let svg = String::from_utf8(plots::render(&picture, PictureFormat::Svg).unwrap()).unwrap();
    let texts = svg_texts(&svg);
    let (w, _) = picture.size();
    let plot_right = (w - 280) as f64;
    // The legend (path labels) lies right of the plot area; data never extends there.
    for path in &picture.paths {
        let (x, _, _) = texts
            .iter()
            .find(|t| t.2 == path.label)
            .unwrap_or_else(|| panic!("legend entry {} missing", path.label));
        assert!(*x >= plot_right, "legend at x = {x}");
    }
    let doc = roxmltree::Document::parse(&svg).unwrap();
    for c in doc.descendants().filter(|n| n.has_tag_name("circle")) {
        let cx: f64 = c.attribute("cx").unwrap().parse().unwrap();
        assert!(cx < plot_right, "marker at {cx}");
    }
    // Node names at the markers: the on-chip start and the outlet.
    assert!(texts.iter().any(|t| t.2 == "inlet" && t.0 < plot_right));
    assert!(texts.iter().any(|t| t.2 == "waste" && t.0 < plot_right));
    assert!(!texts.iter().any(|t| t.2 == "pump" && t.0 < plot_right));
}
