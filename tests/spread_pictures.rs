//! `spread --plot/--tornado` and the spread pictures of `report`: deterministic bytes, the
//! same picture from merged shards as from one run, marks and labels where they belong, and
//! pictures in a report only when the chip has tolerances.
//!
//! Sources: Kirchhoff's current law for the shares of parallel channels (g_i/Σg; a common
//! height factor cancels) and the first-order variance of one variable, σ_J = |dJ/dz|·sd z
//! (closed form derived here: with one variable its share is 1 and its effect is σ_J).

mod common;

use common::{rillnet, write_file};
use proptest::prelude::*;
use rillnet::analysis::spread::stats::{Accumulator, Binning, RELATIVE_ACCURACY};
use rillnet::analysis::spread::{Prepared, Shard};
use rillnet::format::{parse_chip, Syntax};
use std::path::{Path, PathBuf};

/// Two parallel channels, a 2:1 split target of ±1 %, a pump with its accuracy and a shear
/// limit, heights independent or in one group.
fn split_chip(grouped: bool) -> String {
    let group = if grouped { ", group: layer_1" } else { "" };
    format!(
        "fluid: {{viscosity: 1 mPa*s, density: 1000 kg/m^3, cells: {{volume_fraction: 0.01, shear_limit: 2 Pa}}}}
sections:
  lane: {{shape: rectangle, width: 100 um, height: 50 um, tolerance: {{width: 2 um, height: {{value: 5 %{group}}}}}}}
nodes:
  a: {{flow: 10 uL/min, tolerance: {{flow: 1 %}}}}
  b: {{pressure: 0 Pa}}
channels:
  c1: {{from: a, to: b, section: lane, length: 10 mm}}
  c2: {{from: a, to: b, section: lane, length: 20 mm}}
targets:
  - {{split: [c1, c2], ratio: [2, 1], tolerance: 1 %}}
"
    )
}

fn spread(dir: &Path, chip: &Path, extra: &[&str]) {
    rillnet()
        .current_dir(dir)
        .args([
            "spread",
            chip.to_str().unwrap(),
            "--samples",
            "600",
            "--seed",
            "3",
        ])
        .args(extra)
        .args(["--format", "json", "-o"])
        .arg(dir.join(format!(
            "out-{}.json",
            extra.join("_").replace(['/', '.'], "-")
        )))
        .assert()
        .success();
}

fn svg_texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text().map(|t| t.trim().to_string()))
        .collect()
}

fn count_tag(svg: &str, tag: &str) -> usize {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants().filter(|n| n.has_tag_name(tag)).count()
}

/// Same run twice → the same bytes (SVG and PNG); the distributions carry the target, its
/// band, the percentiles and the shear limit; the tornado names the drawn variables.
#[test]
fn pictures_are_deterministic_and_labelled() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", &split_chip(false));
    for round in ["a", "b"] {
        let p = format!("{round}.svg");
        let q = format!("{round}.png");
        let t = format!("{round}-t.svg");
        spread(dir.path(), &chip, &["--plot", &p, "--tornado", &t]);
        spread(dir.path(), &chip, &["--plot", &q]);
    }
    let read = |n: &str| std::fs::read(dir.path().join(n)).unwrap();
    assert_eq!(read("a.svg"), read("b.svg"));
    assert_eq!(read("a.png"), read("b.png"));
    assert_eq!(read("a-t.svg"), read("b-t.svg"));
    let png = png::Decoder::new(std::io::Cursor::new(read("a.png")));
    let info = png.read_info().unwrap().info().clone();
    // Drawn at PNG_SCALE device pixels per figure pixel.
    let scale = rillnet::plots::PNG_SCALE as u32;
    assert_eq!(info.width, 960 * scale);
    assert!(info.height > 300 * scale);

    let svg = String::from_utf8(read("a.svg")).unwrap();
    let texts = svg_texts(&svg);
    let has = |s: &str| texts.iter().any(|t| t.contains(s));
    // Panels: both shares of the split target, then the wall shear of both channels (every
    // channel is under the cells' limit); flows without a target are not key quantities.
    for title in [
        "share of c1 in split target 1",
        "share of c2 in split target 1",
        "max wall shear in c1",
        "max wall shear in c2",
    ] {
        assert!(has(title), "{title} in {texts:?}");
    }
    assert!(!has("flow in c1"));
    // Shares: the target 2/3 = 66.67 % with a band of ±1 % of it.
    assert!(has("target 66.67 (band 66.00 to 67.33)"), "{texts:?}");
    // c1 carries twice c2's flow over the same section: its nominal shear is over the limit
    // in every chip, c2's only in some.
    assert!(has("P(over) 100 %  OVER LIMIT IN EVERY CHIP"), "{texts:?}");
    assert!(has("OVER LIMIT IN SOME CHIPS"), "{texts:?}");
    assert!(has("5–95 %"));
    // 40 bars per panel, plus the band rectangles of the two shares.
    assert!(count_tag(&svg, "rect") >= 4 * 40 + 2);

    let tornado = String::from_utf8(read("a-t.svg")).unwrap();
    let texts = svg_texts(&tornado);
    let has = |s: &str| texts.iter().any(|t| t.contains(s));
    assert!(has("What drives the spread"));
    // Independent widths and heights per channel: both channels' draws appear.
    assert!(has("@ c1") && has("@ c2"), "{texts:?}");
    assert!(texts.iter().any(|t| t.ends_with(" %")));
}

/// The pictures come from the exactly merged state: shards merged draw the same bytes as
/// the run in one go.
#[test]
fn merged_shards_draw_the_same_picture() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", &split_chip(false));
    spread(
        dir.path(),
        &chip,
        &["--plot", "whole.svg", "--tornado", "whole-t.svg"],
    );
    let shards: Vec<PathBuf> = (1..=3)
        .map(|i| {
            let s = format!("{i}/3");
            spread(dir.path(), &chip, &["--shard", &s]);
            dir.path().join(format!(
                "out-{}.json",
                format!("--shard_{s}").replace(['/', '.'], "-")
            ))
        })
        .collect();
    rillnet()
        .current_dir(dir.path())
        .args(["spread", chip.to_str().unwrap(), "--merge"])
        .args(&shards)
        .args(["--plot", "merged.svg", "--tornado", "merged-t.svg"])
        .assert()
        .success();
    let read = |n: &str| std::fs::read(dir.path().join(n)).unwrap();
    assert_eq!(read("whole.svg"), read("merged.svg"));
    assert_eq!(read("whole-t.svg"), read("merged-t.svg"));
}

/// A picture file that exists is never overwritten, and a bad extension is refused before
/// any sampling.
#[test]
fn picture_files_are_new_and_named() {
    let dir = tempfile::tempdir().unwrap();
    let chip = write_file(dir.path(), "chip.yaml", &split_chip(false));
    write_file(dir.path(), "taken.svg", "mine");
    rillnet()
        .current_dir(dir.path())
        .args([
            "spread",
            chip.to_str().unwrap(),
            "--samples",
            "50",
            "--plot",
            "taken.svg",
        ])
        .assert()
        .code(2);
    assert_eq!(
        std::fs::read_to_string(dir.path().join("taken.svg")).unwrap(),
        "mine"
    );
    let out = rillnet()
        .current_dir(dir.path())
        .args(["spread", chip.to_str().unwrap(), "--tornado", "t.pdf"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains(".svg or .png"));
}

/// Heights in one group: the shares cannot move (Kirchhoff, a common factor cancels), so
/// their histogram is one bucket at the nominal share; the picture is still drawn.
#[test]
fn a_share_that_cannot_move_is_one_bar() {
    let c = parse_chip(
        &split_chip(true).replace("width: 2 um, ", ""),
        "t.yaml",
        Syntax::Yaml,
    )
    .unwrap();
    let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
    let r = p.finish(p.monte_carlo(400, 1, Shard::WHOLE), 1, Shard::WHOLE, 400);
    let picture = rillnet::plots::SpreadPicture::new(&c, &r).unwrap();
    let share = &picture.panels[0];
    assert!(share.title.starts_with("share of c1"));
    // Every sample sits in the one bucket of 2/3 (relative width 2α about it), spread over
    // the bars it overlaps.
    let (v, tol) = (200.0 / 3.0, 2.0 * RELATIVE_ACCURACY * 200.0 / 3.0);
    let filled: Vec<_> = share.bins.iter().filter(|b| b.2 > 0.0).collect();
    let total: f64 = filled.iter().map(|b| b.2).sum();
    assert!((total - 400.0).abs() < 1e-9, "{total}");
    assert!(
        filled.iter().all(|b| b.1 >= v - tol && b.0 <= v + tol),
        "{filled:?}"
    );
    let svg = rillnet::plots::render(&picture, rillnet::plots::PictureFormat::Svg).unwrap();
    assert!(!svg.is_empty());
}

/// One toleranced variable: its share of the variance is 1 and its effect is the first-order
/// standard deviation (closed form derived here), signed as the flow moves: a higher channel
/// carries more flow.
#[test]
fn one_variable_tornado_is_the_whole_std() {
    let text = "fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
sections:
  lane: {shape: rectangle, width: 100 um, height: 50 um, tolerance: {height: 2 um}}
nodes:
  a: {pressure: 100 mbar}
  b: {pressure: 0 Pa}
channels:
  c1: {from: a, to: b, section: lane, length: 12 mm}
";
    let c = parse_chip(text, "t.yaml", Syntax::Yaml).unwrap();
    let p = Prepared::new(&c.network, &c.design, &c.tolerances).unwrap();
    let r = p.finish(p.monte_carlo(200, 1, Shard::WHOLE), 1, Shard::WHOLE, 200);
    let s = &r.stats[0];
    assert_eq!(s.contributions.len(), 1);
    assert!((s.contributions[0].1 - 1.0).abs() < 1e-12);
    assert!(s.effects[0] > 0.0);
    assert!((s.effects[0] - s.std_linear).abs() <= 1e-12 * s.std_linear);
    let chart = rillnet::plots::TornadoChart::new(&c, &r).unwrap();
    assert_eq!(chart.blocks.len(), 1);
    assert_eq!(chart.blocks[0].rows.len(), 1);
    assert!((chart.blocks[0].rows[0].1 - s.std_linear * 6e10).abs() <= 1e-9 * s.std_linear * 6e10);
}

/// `report` adds the spread pictures (SVG, PNG, on the page) when the chip has tolerances,
/// and not otherwise.
#[test]
fn report_has_spread_pictures_only_with_tolerances() {
    let dir = tempfile::tempdir().unwrap();
    let with = write_file(dir.path(), "with.yaml", &split_chip(false));
    let without_text = split_chip(false)
        .replace(", tolerance: {width: 2 um, height: {value: 5 %}}", "")
        .replace(", tolerance: {flow: 1 %}", "");
    assert!(!without_text.contains("tolerance: {"));
    let without = write_file(dir.path(), "without.yaml", &without_text);
    for (chip, folder) in [(&with, "r-with"), (&without, "r-without")] {
        rillnet()
            .args(["report", chip.to_str().unwrap(), "-o"])
            .arg(dir.path().join(folder))
            .assert()
            .success();
    }
    let names = |folder: &str| -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir.path().join(folder))
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    };
    let with_names = names("r-with");
    for f in ["spread.svg", "spread.png", "tornado.svg", "tornado.png"] {
        assert!(with_names.iter().any(|n| n == f), "{f} in {with_names:?}");
    }
    let page = std::fs::read_to_string(dir.path().join("r-with/index.html")).unwrap();
    assert!(page.contains("Spread under the chip's tolerances"));
    assert!(page.contains("What drives the spread"));
    let without_names = names("r-without");
    assert!(
        !without_names
            .iter()
            .any(|n| n.starts_with("spread") || n.starts_with("tornado")),
        "{without_names:?}"
    );
    let page = std::fs::read_to_string(dir.path().join("r-without/index.html")).unwrap();
    assert!(!page.contains("What drives the spread"));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// Accumulators filled in any split, with any dense windows, merged in any order, equal
    /// the one filled with every value (exact integer counts and sums).
    #[test]
    fn accumulators_merge_exactly(
        xs in prop::collection::vec(-3.0f64..3.0, 1..400),
        cut in 0usize..400,
        sigmas in (1e-4f64..0.5, 1e-4f64..0.5),
        nominal in 0.5f64..2.0,
        negative in any::<bool>(),
    ) {
        let nominal = if negative { -nominal } else { nominal };
        let cut = cut.min(xs.len());
        let mut one = Accumulator::default();
        let whole = Binning::new(nominal, 0.5);
        xs.iter().for_each(|&x| one.add(x, &whole));
        // Other first-order deviations (σ ≤ |nominal|): the same fixed-point unit and zero
        // floor, other dense windows.
        let (ba, bb) = (Binning::new(nominal, sigmas.0), Binning::new(nominal, sigmas.1));
        prop_assert_eq!((ba.scale, ba.floor), (whole.scale, whole.floor));
        let (mut a, mut b) = (Accumulator::default(), Accumulator::default());
        xs[..cut].iter().rev().for_each(|&x| a.add(x, &ba));
        xs[cut..].iter().for_each(|&x| b.add(x, &bb));
        let mut ab = a.clone();
        ab.merge(&b);
        let mut ba_ = b.clone();
        ba_.merge(&a);
        prop_assert_eq!(&ab, &one);
        prop_assert_eq!(&ba_, &one);
        prop_assert_eq!(ab.quantile(0.05).to_bits(), one.quantile(0.05).to_bits());
        prop_assert_eq!(ab.histogram(), one.histogram());
    }
}
