//! The chip split picture read back from its SVG: for every shipped example no two texts
//! overlap, no text is crossed by a channel line, an arrowhead or a node mark; parallel
//! channels are distinct paths; ladders come out with straight rungs; each channel line
//! carries a tooltip; the colour scale is round and says what it shows; output is
//! deterministic; large chips are drawn as thin lines.
//!
//! Text boxes are estimated here from the SVG's own font size and the string: advance widths
//! per character class of DejaVu Sans (digits and most capitals ≈ 0.64–0.7 em, lower case
//! ≈ 0.6 em, space and punctuation ≈ 0.32 em, i/l/j ≈ 0.28 em; from memory of the font's
//! metrics), and from the top of the em box to its bottom (plotters writes `dy="0.76em"` so
//! the given y is the top of the line).

mod common;

use common::rillnet;
use std::path::{Path, PathBuf};

#[derive(Clone, Copy, Debug, PartialEq)]
struct Box2 {
    x0: f64,
    y0: f64,
    x1: f64,
    y1: f64,
}

impl Box2 {
    fn intersects(&self, o: &Box2) -> bool {
        self.x0 < o.x1 && o.x0 < self.x1 && self.y0 < o.y1 && o.y0 < self.y1
    }
}

fn advance(c: char) -> f64 {
    match c {
        '0'..='9' | 'µ' | '%' | '_' => 0.64,
        ' ' | '.' | ',' | ':' | ';' | '\'' | '!' | '|' => 0.32,
        'i' | 'l' | 'j' => 0.28,
        'A'..='Z' | 'm' | 'w' | '—' => 0.72,
        _ => 0.6,
    }
}

#[derive(Debug)]
struct TextBox {
    text: String,
    b: Box2,
}

fn text_boxes(doc: &roxmltree::Document) -> Vec<TextBox> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            let text = n.text().unwrap_or("").trim().to_string();
            let f = |a: &str| n.attribute(a).and_then(|v| v.parse::<f64>().ok());
            let (x, y, size) = (f("x").unwrap(), f("y").unwrap(), f("font-size").unwrap());
            assert_eq!(
                n.attribute("dy"),
                Some("0.76em"),
                "text anchored at its top"
            );
            let w: f64 = text.chars().map(advance).sum::<f64>() * size;
            let x0 = match n.attribute("text-anchor") {
                Some("middle") => x - w / 2.0,
                Some("end") => x - w,
                _ => x,
            };
            TextBox {
                text,
                b: Box2 {
                    x0,
                    y0: y,
                    x1: x0 + w,
                    y1: y + size,
                },
            }
        })
        .collect()
}

/// A drawn polyline: its points, stroke width, colour and tooltip.
#[derive(Debug)]
struct Line {
    pts: Vec<[f64; 2]>,
    width: f64,
    stroke: String,
    title: Option<String>,
}

fn lines(doc: &roxmltree::Document) -> Vec<Line> {
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline"))
        .map(|n| {
            let pts = n
                .attribute("points")
                .unwrap()
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    [x.parse().unwrap(), y.parse().unwrap()]
                })
                .collect();
            Line {
                pts,
                width: n.attribute("stroke-width").unwrap().parse().unwrap(),
                stroke: n.attribute("stroke").unwrap().to_string(),
                title: n
                    .children()
                    .find(|c| c.has_tag_name("title"))
                    .and_then(|t| t.text())
                    .map(str::to_string),
            }
        })
        .collect()
}

/// Boxes of the other marks: arrowheads (polygons), junction dots (circles), port squares
/// and colour-bar pieces (rectangles, except the white background).
fn mark_boxes(doc: &roxmltree::Document) -> Vec<Box2> {
    let f = |n: &roxmltree::Node, a: &str| n.attribute(a).and_then(|v| v.parse::<f64>().ok());
    let mut out = Vec::new();
    for n in doc.descendants() {
        if n.has_tag_name("polygon") {
            let pts: Vec<[f64; 2]> = n
                .attribute("points")
                .unwrap()
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    [x.parse().unwrap(), y.parse().unwrap()]
                })
                .collect();
            out.push(Box2 {
                x0: pts.iter().map(|p| p[0]).fold(f64::INFINITY, f64::min),
                y0: pts.iter().map(|p| p[1]).fold(f64::INFINITY, f64::min),
                x1: pts.iter().map(|p| p[0]).fold(f64::NEG_INFINITY, f64::max),
                y1: pts.iter().map(|p| p[1]).fold(f64::NEG_INFINITY, f64::max),
            });
        } else if n.has_tag_name("circle") {
            let (x, y, r) = (
                f(&n, "cx").unwrap(),
                f(&n, "cy").unwrap(),
                f(&n, "r").unwrap(),
            );
            out.push(Box2 {
                x0: x - r,
                y0: y - r,
                x1: x + r,
                y1: y + r,
            });
        } else if n.has_tag_name("rect") && n.attribute("fill") != Some("#FFFFFF") {
            let (x, y) = (f(&n, "x").unwrap(), f(&n, "y").unwrap());
            let (w, h) = (f(&n, "width").unwrap(), f(&n, "height").unwrap());
            out.push(Box2 {
                x0: x,
                y0: y,
                x1: x + w,
                y1: y + h,
            });
        }
    }
    out
}

/// Does the segment a–b pass through the interior of the box? (Liang–Barsky, written
/// again here so the test does not trust the placer's own geometry.)
fn crosses(a: [f64; 2], b: [f64; 2], r: &Box2) -> bool {
    let d = [b[0] - a[0], b[1] - a[1]];
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-d[0], a[0] - r.x0),
        (d[0], r.x1 - a[0]),
        (-d[1], a[1] - r.y0),
        (d[1], r.y1 - a[1]),
    ] {
        if p == 0.0 {
            if q <= 0.0 {
                return false;
            }
        } else if p < 0.0 {
            t0 = t0.max(q / p);
        } else {
            t1 = t1.min(q / p);
        }
    }
    t0 < t1
}

fn examples() -> Vec<PathBuf> {
    let mut v: Vec<_> = std::fs::read_dir("networks")
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "yaml"))
        .collect();
    v.sort();
    assert!(v.len() >= 5);
    v
}

fn plot_svg(chip: &Path, extra: &[&str], out: &Path) -> String {
    let res = rillnet()
        .arg("plot")
        .args(extra)
        .arg(chip)
        .arg("-o")
        .arg(out)
        .output()
        .unwrap();
    assert!(
        res.status.success(),
        "{}: {}",
        chip.display(),
        String::from_utf8_lossy(&res.stderr)
    );
    std::fs::read_to_string(out).unwrap()
}

/// Every overlap in a picture, in words (empty when there is none).
fn overlaps(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).expect("well-formed SVG");
    let texts = text_boxes(&doc);
    let mut bad = Vec::new();
    for (i, a) in texts.iter().enumerate() {
        for b in &texts[i + 1..] {
            if a.b.intersects(&b.b) {
                bad.push(format!("texts '{}' and '{}' overlap", a.text, b.text));
            }
        }
    }
    // Channel lines and halos (stroke ≥ 2 px; leader lines are 1 px and end at their label).
    for l in lines(&doc).iter().filter(|l| l.width >= 2.0) {
        let h = l.width / 2.0;
        for t in &texts {
            let grown = Box2 {
                x0: t.b.x0 - h,
                y0: t.b.y0 - h,
                x1: t.b.x1 + h,
                y1: t.b.y1 + h,
            };
            if l.pts.windows(2).any(|s| crosses(s[0], s[1], &grown)) {
                bad.push(format!(
                    "text '{}' crossed by the line of {:?}",
                    t.text,
                    l.title.as_deref().unwrap_or("?")
                ));
            }
        }
    }
    for m in mark_boxes(&doc) {
        for t in &texts {
            if m.intersects(&t.b) {
                bad.push(format!("text '{}' covered by a mark at {m:?}", t.text));
            }
        }
    }
    bad
}

#[test]
fn no_overlaps_in_any_shipped_example() {
    let dir = tempfile::tempdir().unwrap();
    let mut report = Vec::new();
    for chip in examples() {
        let stem = chip.file_stem().unwrap().to_string_lossy().into_owned();
        for colour in ["pressure", "flow", "margin"] {
            let out = dir.path().join(format!("{stem}-{colour}.svg"));
            let svg = plot_svg(&chip, &["--colour", colour], &out);
            for o in overlaps(&svg) {
                report.push(format!("{stem} ({colour}): {o}"));
            }
            // Same input, same bytes.
            let again = dir.path().join(format!("{stem}-{colour}-2.svg"));
            assert_eq!(plot_svg(&chip, &["--colour", colour], &again), svg);
        }
    }
    assert!(report.is_empty(), "{}", report.join("\n"));
}

/// The channel lines (not halos, not leaders) by the channel name in their tooltip.
fn channel_lines(svg: &str) -> Vec<(String, Line)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    lines(&doc)
        .into_iter()
        .filter(|l| l.width >= 2.0 && !l.stroke.eq_ignore_ascii_case("#D55E00"))
        .map(|l| {
            let name = l
                .title
                .as_deref()
                .and_then(|t| t.split_once(':'))
                .map(|(n, _)| n.to_string())
                .expect("every channel line has a tooltip");
            (name, l)
        })
        .collect()
}

#[test]
fn parallel_channels_are_distinct_paths_with_their_own_labels() {
    let dir = tempfile::tempdir().unwrap();
    for chip in examples() {
        let stem = chip.file_stem().unwrap().to_string_lossy().into_owned();
        let svg = plot_svg(&chip, &[], &dir.path().join(format!("{stem}.svg")));
        let lines = channel_lines(&svg);
        let mut paths: Vec<String> = lines.iter().map(|(_, l)| format!("{:?}", l.pts)).collect();
        let n = paths.len();
        paths.sort();
        paths.dedup();
        assert_eq!(
            paths.len(),
            n,
            "{}: two channels on one path",
            chip.display()
        );
    }
    // The three lanes of the gradient splitter share both end nodes: three paths, three
    // labels at three places.
    let svg = plot_svg(
        Path::new("networks/gradient_splitter_sizing.yaml"),
        &[],
        &dir.path().join("g.svg"),
    );
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let texts = text_boxes(&doc);
    let mut at = Vec::new();
    for lane in ["lane_1:", "lane_2:", "lane_3:"] {
        let t = texts
            .iter()
            .find(|t| t.text.starts_with(lane))
            .unwrap_or_else(|| panic!("{lane} labelled"));
        at.push((t.b.x0 as i64, t.b.y0 as i64));
    }
    at.sort();
    at.dedup();
    assert_eq!(at.len(), 3, "three labels at three positions");
    let lanes: Vec<Line> = channel_lines(&svg)
        .into_iter()
        .filter(|(n, _)| n.starts_with("lane_"))
        .map(|(_, l)| l)
        .collect();
    assert_eq!(lanes.len(), 3);
    // Same end points (the two nodes), different middles.
    assert!(lanes
        .windows(2)
        .all(|w| w[0].pts.first() == w[1].pts.first() && w[0].pts.last() == w[1].pts.last()));
    let mids: Vec<f64> = lanes.iter().map(|l| l.pts[l.pts.len() / 2][1]).collect();
    assert!(
        mids[0] != mids[1] && mids[1] != mids[2] && mids[0] != mids[2],
        "{mids:?}"
    );
}

#[test]
fn names_match_the_tables_and_tooltips_carry_the_figures() {
    let dir = tempfile::tempdir().unwrap();
    let chip = Path::new("networks/tcell_sorter.yaml");
    let svg = plot_svg(chip, &[], &dir.path().join("t.svg"));
    let v = common::json_of(chip);
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let texts: Vec<String> = text_boxes(&doc).into_iter().map(|t| t.text).collect();
    // Every channel and every junction of this small chip is named as in the tables.
    for c in v["channels"].as_array().unwrap() {
        let name = c["name"].as_str().unwrap();
        assert!(
            texts.iter().any(|t| t.starts_with(&format!("{name}:"))),
            "channel {name} not named"
        );
        let line = channel_lines(&svg)
            .into_iter()
            .find(|(n, _)| n == name)
            .unwrap_or_else(|| panic!("no line for {name}"))
            .1;
        let title = line.title.unwrap();
        for part in ["flow", "µL/min", "ΔP", "mbar", "wall shear", "Pa"] {
            assert!(title.contains(part), "{name}: tooltip {title}");
        }
    }
    for node in v["nodes"].as_array().unwrap() {
        let name = node["name"].as_str().unwrap();
        assert!(texts.iter().any(|t| t == name), "node {name} not named");
    }
    // The finding's channel is marked in words, not colour alone.
    assert!(texts
        .iter()
        .any(|t| t.starts_with("pre_filter") && t.contains("over shear limit")));
}

#[test]
fn ladders_get_straight_rungs_and_level_rails() {
    let dir = tempfile::tempdir().unwrap();
    let svg = plot_svg(
        Path::new("networks/chamber_ladder.yaml"),
        &[],
        &dir.path().join("l.svg"),
    );
    let lines = channel_lines(&svg);
    let get = |name: &str| &lines.iter().find(|(n, _)| n == name).unwrap().1;
    for i in 1..=8 {
        let rung = get(&format!("chamber_{i}"));
        let xs: Vec<f64> = rung.pts.iter().map(|p| p[0]).collect();
        let ys: Vec<f64> = rung.pts.iter().map(|p| p[1]).collect();
        // Orthogonal: every segment horizontal or vertical.
        assert!(rung
            .pts
            .windows(2)
            .all(|s| s[0][0] == s[1][0] || s[0][1] == s[1][1]));
        if i < 8 {
            assert!(
                xs.iter().all(|&x| x == xs[0]),
                "chamber_{i} straight: {:?}",
                rung.pts
            );
            assert!(ys.first() != ys.last());
        }
    }
    // Each rail level: all feed_* on one height, all drain_* on another.
    let level = |prefix: &str| {
        let ys: Vec<f64> = lines
            .iter()
            .filter(|(n, _)| n.starts_with(prefix))
            .flat_map(|(_, l)| l.pts.iter().map(|p| p[1]))
            .collect();
        assert!(ys.len() >= 12, "{prefix}");
        assert!(ys.iter().all(|&y| y == ys[0]), "{prefix} level: {ys:?}");
        ys[0]
    };
    let top = level("feed_");
    let bottom = level("drain_");
    assert!(bottom > top);
    // Every channel of every automatic layout is orthogonal.
    for chip in examples() {
        let text = std::fs::read_to_string(&chip).unwrap();
        if text.contains("at:") {
            continue;
        }
        let stem = chip.file_stem().unwrap().to_string_lossy().into_owned();
        let svg = plot_svg(&chip, &[], &dir.path().join(format!("{stem}-o.svg")));
        for (name, l) in channel_lines(&svg) {
            // Fanned-out parallel lanes leave their nodes at 45°: only their middle runs.
            let pts = if l.pts.len() >= 4 {
                &l.pts[1..l.pts.len() - 1]
            } else {
                &l.pts[..]
            };
            assert!(
                pts.windows(2)
                    .all(|s| s[0][0] == s[1][0] || s[0][1] == s[1][1]),
                "{}: {name} not orthogonal: {:?}",
                chip.display(),
                l.pts
            );
        }
    }
}

#[test]
fn chambers_are_drawn_wider_than_their_feeds() {
    let dir = tempfile::tempdir().unwrap();
    let svg = plot_svg(
        Path::new("networks/perfusion_tuning.yaml"),
        &[],
        &dir.path().join("w.svg"),
    );
    let lines = channel_lines(&svg);
    let width = |name: &str| lines.iter().find(|(n, _)| n == name).unwrap().1.width;
    // chamber 800 µm, feed 200 µm, restrictor 50 µm wide: stroke in proportion, clamped at 2.
    assert_eq!(width("chamber_mid"), 14.0);
    assert!((width("feed_a") - 14.0 * 200.0 / 800.0).abs() <= 0.5);
    assert_eq!(width("chamber_right"), 2.0);
}

#[test]
fn colour_scales_are_round_and_say_what_they_show() {
    let dir = tempfile::tempdir().unwrap();
    let texts_of = |svg: &str| -> Vec<String> {
        let doc = roxmltree::Document::parse(svg).unwrap();
        text_boxes(&doc).into_iter().map(|t| t.text).collect()
    };
    // Pressure: ticks are multiples of one 1-2-5 step.
    let svg = plot_svg(
        Path::new("networks/reagent_mixer.yaml"),
        &[],
        &dir.path().join("p.svg"),
    );
    let t = texts_of(&svg);
    assert!(t.iter().any(|x| x == "pressure [mbar]"), "bar label");
    let ticks: Vec<f64> = t.iter().filter_map(|x| x.parse::<f64>().ok()).collect();
    assert!(ticks.len() >= 3, "{t:?}");
    let step = ticks[0] - ticks[1];
    let mantissa = step.abs() / 10f64.powf(step.abs().log10().floor());
    assert!(
        [1.0, 2.0, 5.0].iter().any(|m| (mantissa - m).abs() < 1e-9),
        "{ticks:?}"
    );
    assert!(ticks
        .iter()
        .all(|v| ((v / step).round() - v / step).abs() < 1e-9));
    assert!(t
        .iter()
        .any(|x| x.starts_with("colour: mean of each channel's end pressures")));
    // Margin with limits: centred on 1, the limit marked and named.
    let svg = plot_svg(
        Path::new("networks/tcell_sorter.yaml"),
        &["--colour", "margin"],
        &dir.path().join("m.svg"),
    );
    let t = texts_of(&svg);
    assert!(t.iter().any(|x| x == "1 = limit"), "{t:?}");
    assert!(t.iter().any(|x| x == "shear margin"));
    assert!(t.iter().any(|x| x.starts_with("colour: wall-shear margin")));
    assert!(
        !t.iter().any(|x| x.parse::<f64>().is_ok_and(|v| v < 0.0)),
        "no log10 values"
    );
    // Margin without any limit: nothing to encode, no bar.
    let svg = plot_svg(
        Path::new("networks/reagent_mixer.yaml"),
        &["--colour", "margin"],
        &dir.path().join("n.svg"),
    );
    let t = texts_of(&svg);
    assert!(
        !t.iter().any(|x| x == "shear margin" || x == "1 = limit"),
        "{t:?}"
    );
    assert!(t
        .iter()
        .any(|x| x.contains("no channel has a wall-shear limit")));
}

#[test]
fn large_chips_are_thin_lines_with_only_ports_named() {
    // A chain of 2100 channels between two ports: above the large-chip limit (2000).
    let n = 2100;
    let mut chip = String::from(
        "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}\nnodes:\n  in: {pressure: 10 mbar}\n  out: {pressure: 0 Pa}\n",
    );
    for i in 1..n {
        chip.push_str(&format!("  j{i}: {{}}\n"));
    }
    chip.push_str("channels:\n");
    for i in 0..n {
        let a = if i == 0 {
            "in".to_string()
        } else {
            format!("j{i}")
        };
        let b = if i + 1 == n {
            "out".to_string()
        } else {
            format!("j{}", i + 1)
        };
        chip.push_str(&format!(
            "  c{i}: {{from: {a}, to: {b}, section: {{shape: circle, diameter: 100 um}}, length: 1 mm}}\n"
        ));
    }
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("chain.yaml");
    std::fs::write(&p, chip).unwrap();
    let svg = plot_svg(&p, &[], &dir.path().join("chain.svg"));
    let doc = roxmltree::Document::parse(&svg).unwrap();
    assert_eq!(
        doc.descendants()
            .filter(|n| n.has_tag_name("polygon"))
            .count(),
        0,
        "no arrows"
    );
    // Leader lines (grey #787878, to the port names) aside, one line per channel.
    let ls: Vec<Line> = lines(&doc)
        .into_iter()
        .filter(|l| !l.stroke.eq_ignore_ascii_case("#787878"))
        .collect();
    assert_eq!(ls.len(), n);
    assert!(ls.iter().all(|l| l.width == 1.0));
    let t: Vec<String> = text_boxes(&doc).into_iter().map(|t| t.text).collect();
    assert!(t.iter().any(|x| x == "in") && t.iter().any(|x| x == "out"));
    let numbered =
        |x: &str, p: char| x.starts_with(p) && x[1..].starts_with(|c: char| c.is_ascii_digit());
    assert!(!t.iter().any(|x| numbered(x, 'c')), "no channel labels");
    assert!(!t.iter().any(|x| numbered(x, 'j')), "no junction labels");
    assert!(overlaps(&svg).is_empty(), "{:?}", overlaps(&svg));
}

#[test]
fn the_overlap_check_sees_overlaps() {
    // Two texts on one spot, and a channel line through a third: all three reported.
    let svg = r##"<svg width="400" height="200" xmlns="http://www.w3.org/2000/svg">
<text x="10" y="10" dy="0.76em" text-anchor="start" font-size="10" fill="#000">lane_1: 3.33</text>
<text x="30" y="14" dy="0.76em" text-anchor="start" font-size="10" fill="#000">lane_2: 3.33</text>
<text x="100" y="100" dy="0.76em" text-anchor="start" font-size="10" fill="#000">crossed</text>
<polyline fill="none" stroke="#000" stroke-width="4" points="90,105 200,105 "/>
</svg>"##;
    let found = overlaps(svg);
    assert_eq!(found.len(), 2, "{found:?}");
    assert!(found[0].contains("lane_1") && found[0].contains("lane_2"));
    assert!(found[1].contains("crossed"));
    // Moved apart and off the line: clean.
    let clean = svg
        .replace("x=\"30\" y=\"14\"", "x=\"30\" y=\"40\"")
        .replace("90,105 200,105", "90,130 200,130");
    assert!(overlaps(&clean).is_empty(), "{:?}", overlaps(&clean));
}
