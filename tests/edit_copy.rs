//! Edited copies of chip files: values change where the parser says they are, nothing else
//! changes, and every path that cannot be changed safely is refused with its name.

use proptest::prelude::*;
use rillnet::format::edit::{apply_edits, Edit, EditError, NewValue};
use rillnet::format::Syntax;
use serde_json::{json, Value};

fn yaml(text: &str) -> Value {
    serde_yaml::from_str(text).unwrap()
}

fn at<'a>(tree: &'a Value, path: &[&str]) -> &'a Value {
    path.iter().fold(tree, |v, k| &v[*k])
}

fn one(text: &str, path: &[&str], value: &str) -> Result<String, EditError> {
    apply_edits(text, Syntax::Yaml, &[Edit::scalar(path, value)])
}

const PRESSURE: [&str; 3] = ["nodes", "medium_a", "pressure"];

// --- the description trap ------------------------------------------------------------

#[test]
fn description_block_mentioning_the_key_is_left_alone() {
    let text = "\
name: trap
description: |
  Before tuning, medium_a: pressure: 20 mbar was too low.
  nodes: medium_a: pressure: 20 mbar
# medium_a: pressure: 20 mbar (old setting)
nodes:
  medium_a: {pressure: 20 mbar}
  waste: {pressure: 0 Pa}
";
    let out = one(text, &PRESSURE, "41.583 mbar").unwrap();
    assert_eq!(
        out,
        text.replace(
            "medium_a: {pressure: 20 mbar}",
            "medium_a: {pressure: 41.583 mbar}"
        )
    );
    let tree = yaml(&out);
    assert_eq!(at(&tree, &PRESSURE), "41.583 mbar");
    assert_eq!(
        tree["description"],
        yaml(text)["description"],
        "the description must not change"
    );
}

#[test]
fn description_string_mentioning_the_key_is_left_alone() {
    let text = "\
description: \"medium_a: pressure: 20 mbar\"
nodes:
  medium_a:
    pressure: 20 mbar
";
    let out = one(text, &PRESSURE, "5 mbar").unwrap();
    assert_eq!(
        out,
        text.replace("    pressure: 20 mbar", "    pressure: 5 mbar")
    );
}

#[test]
fn tuned_copy_of_a_shipped_chip_still_loads_with_the_new_setting() {
    let text = include_str!("../networks/perfusion_tuning.yaml");
    let with_trap = text.replacen(
        "name:",
        "description: \"medium_a: {pressure: 80 mbar}\"\nname:",
        1,
    );
    let out = apply_edits(
        &with_trap,
        Syntax::Yaml,
        &[
            Edit::scalar(&PRESSURE, "41.583 mbar"),
            Edit::scalar(&["nodes", "medium_b", "pressure"], "12 mbar"),
        ],
    )
    .unwrap();
    let net = rillnet::format::parse_chip(&out, "copy.yaml", Syntax::Yaml).unwrap();
    let pressure = |name: &str| match net
        .network
        .nodes
        .iter()
        .find(|n| n.name == name)
        .unwrap()
        .port
    {
        rillnet::network::Port::Pressure(p) => p.si(),
        ref other => panic!("{other:?}"),
    };
    assert!((pressure("medium_a") - 4158.3).abs() < 1e-9);
    assert!((pressure("medium_b") - 1200.0).abs() < 1e-9);
    assert!(out.contains("\ndescription: \"medium_a: {pressure: 80 mbar}\"\nname:"));
}

#[test]
fn sized_copy_of_a_shipped_chip_still_loads_with_the_new_section() {
    let text = include_str!("../networks/gradient_splitter_sizing.yaml");
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[
            Edit::scalar(&["channels", "lane_1", "length"], "42.5 mm"),
            Edit::mapping(
                &["channels", "lane_1", "section"],
                &[
                    ("shape", "rectangle"),
                    ("width", "87 um"),
                    ("height", "50 um"),
                ],
            ),
            Edit::scalar(&["channels", "lane_2", "length"], "61 mm"),
        ],
    )
    .unwrap();
    assert!(out.contains(
        "    section: {shape: rectangle, width: 87 um, height: 50 um}\n    length: 42.5 mm\n"
    ));
    assert!(out.contains("lane_2: {from: inlet, to: waste, section: lane, length: 61 mm, size:"));
    let net = rillnet::format::parse_chip(&out, "copy.yaml", Syntax::Yaml).unwrap();
    let lane_1 = net
        .network
        .channels
        .iter()
        .find(|c| c.name == "lane_1")
        .unwrap();
    assert!((lane_1.length.si() - 42.5e-3).abs() < 1e-12);
}

// --- styles ---------------------------------------------------------------------------

#[test]
fn block_and_flow_style_nodes() {
    let text = "\
nodes:
  medium_a:
    pressure: 20 mbar
    adjust: {min: 0 mbar, max: 300 mbar}
  pump: {flow: 10 uL/min, adjust: {min: 0 uL/min, max: 50 uL/min}}
";
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[
            Edit::scalar(&PRESSURE, "33 mbar"),
            Edit::scalar(&["nodes", "pump", "flow"], "12.5 uL/min"),
        ],
    )
    .unwrap();
    assert_eq!(
        out,
        text.replace("20 mbar", "33 mbar")
            .replace("flow: 10 uL/min", "flow: 12.5 uL/min")
    );
}

#[test]
fn flow_style_over_several_lines() {
    let text = "nodes: {\n  medium_a: {\n    pressure: 20 mbar,\n    at: [0 mm, 1 mm]\n  }\n}\n";
    let out = one(text, &PRESSURE, "21 mbar").unwrap();
    assert_eq!(out, text.replace("20 mbar", "21 mbar"));
}

#[test]
fn quoted_values_keep_their_quotes() {
    let text = "nodes:\n  medium_a: {pressure: \"20 mbar\"}\n  b:\n    flow: '3 uL/min'\n";
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[
            Edit::scalar(&PRESSURE, "25 mbar"),
            Edit::scalar(&["nodes", "b", "flow"], "4 uL/min"),
        ],
    )
    .unwrap();
    assert_eq!(
        out,
        "nodes:\n  medium_a: {pressure: \"25 mbar\"}\n  b:\n    flow: '4 uL/min'\n"
    );
}

#[test]
fn quoted_keys_are_keys_like_any_other() {
    let text = "\"nodes\":\n  'medium_a': {\"pressure\": 20 mbar}\n";
    let out = one(text, &PRESSURE, "1 bar").unwrap();
    assert_eq!(out, text.replace("20 mbar", "1 bar"));
}

#[test]
fn values_that_would_read_as_something_else_are_quoted() {
    let text = "nodes:\n  medium_a: {pressure: 20 mbar}\n";
    for (value, written) in [
        ("12", "\"12\""),
        ("true", "\"true\""),
        ("a, b", "\"a, b\""),
        ("x: y", "\"x: y\""),
        ("# no", "\"# no\""),
        (" padded ", "\" padded \""),
        ("", "\"\""),
    ] {
        let out = one(text, &PRESSURE, value).unwrap();
        assert_eq!(out, text.replace("20 mbar", written), "{value:?}");
        assert_eq!(at(&yaml(&out), &PRESSURE), value);
    }
}

#[test]
fn comment_after_the_value_is_kept() {
    let text = "nodes:\n  medium_a:\n    pressure: 20 mbar    # set on the controller\n    at: [0 mm, 0 mm]\n";
    let out = one(text, &PRESSURE, "20.5 mbar").unwrap();
    assert_eq!(
        out,
        "nodes:\n  medium_a:\n    pressure: 20.5 mbar    # set on the controller\n    at: [0 mm, 0 mm]\n"
    );
}

#[test]
fn section_block_mapping_becomes_a_flow_mapping() {
    let text = "\
channels:
  c1:
    from: a
    to: b
    section:
      shape: rectangle   # was 80 um
      width: 80 um
      height: 50 um
    length: 5 mm   # straight
";
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[Edit::mapping(
            &["channels", "c1", "section"],
            &[
                ("shape", "rectangle"),
                ("width", "100 um"),
                ("height", "50 um"),
            ],
        )],
    )
    .unwrap();
    assert_eq!(
        out,
        "\
channels:
  c1:
    from: a
    to: b
    section: {shape: rectangle, width: 100 um, height: 50 um}
    length: 5 mm   # straight
"
    );
}

#[test]
fn section_flow_mapping_and_named_section_are_replaced() {
    let text = "channels:\n  c1: {section: {shape: circle, diameter: 80 um}, length: 5 mm}\n  c2: {section: feed, length: 6 mm}  # named\n";
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[
            Edit::mapping(
                &["channels", "c1", "section"],
                &[("shape", "circle"), ("diameter", "90 um")],
            ),
            Edit::mapping(
                &["channels", "c2", "section"],
                &[("shape", "rectangle"), ("width", "100 um")],
            ),
        ],
    )
    .unwrap();
    assert_eq!(
        out,
        "channels:\n  c1: {section: {shape: circle, diameter: 90 um}, length: 5 mm}\n  c2: {section: {shape: rectangle, width: 100 um}, length: 6 mm}  # named\n"
    );
}

#[test]
fn json_chip_is_edited_in_json() {
    let text = r#"{
  "description": "medium_a: pressure: 20 mbar",
  "nodes": {
    "medium_a": {"pressure": "20 mbar"},
    "out": {"pressure": "0 Pa"}
  },
  "channels": {
    "c1": {"from": "medium_a", "to": "out", "section": "feed", "length": "12 mm"}
  }
}
"#;
    let out = apply_edits(
        text,
        Syntax::Json,
        &[
            Edit::scalar(&PRESSURE, "41.583 mbar"),
            Edit::mapping(
                &["channels", "c1", "section"],
                &[("shape", "rectangle"), ("width", "100 um")],
            ),
            Edit::scalar(&["channels", "c1", "length"], "say \"12\" mm"),
        ],
    )
    .unwrap();
    let expected = text
        .replace(
            r#"{"pressure": "20 mbar"}"#,
            r#"{"pressure": "41.583 mbar"}"#,
        )
        .replace(
            r#""section": "feed""#,
            r#""section": {"shape": "rectangle", "width": "100 um"}"#,
        )
        .replace(r#""length": "12 mm""#, r#""length": "say \"12\" mm""#);
    assert_eq!(out, expected);
    let tree: Value = serde_json::from_str(&out).unwrap();
    assert_eq!(at(&tree, &PRESSURE), "41.583 mbar");
}

#[test]
fn minified_json_with_tabs_and_escapes() {
    let text =
        "{\"nodes\":{\"medium_a\":{\"pressure\":\"20 \\u00b5bar\",\t\"x\":[1,2]}},\"n\":1e3}";
    let out = apply_edits(text, Syntax::Json, &[Edit::scalar(&PRESSURE, "2 µbar")]).unwrap();
    assert_eq!(
        out,
        "{\"nodes\":{\"medium_a\":{\"pressure\":\"2 µbar\",\t\"x\":[1,2]}},\"n\":1e3}"
    );
}

#[test]
fn crlf_line_endings_are_kept() {
    let text = "nodes:\r\n  medium_a:\r\n    pressure: 20 mbar   # c\r\n  b: {flow: 1 uL/min}\r\nchannels:\r\n  c:\r\n    section:\r\n      shape: circle\r\n      diameter: 1 mm\r\n    length: 2 mm\r\n";
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[
            Edit::scalar(&PRESSURE, "3 mbar"),
            Edit::scalar(&["nodes", "b", "flow"], "2 uL/min"),
            Edit::mapping(
                &["channels", "c", "section"],
                &[("shape", "circle"), ("diameter", "2 mm")],
            ),
        ],
    )
    .unwrap();
    assert_eq!(
        out,
        "nodes:\r\n  medium_a:\r\n    pressure: 3 mbar   # c\r\n  b: {flow: 2 uL/min}\r\nchannels:\r\n  c:\r\n    section: {shape: circle, diameter: 2 mm}\r\n    length: 2 mm\r\n"
    );
}

#[test]
fn non_ascii_before_the_value() {
    let text = "\
name: Zellkultur – 37 °C
description: >
  Kanäle von 100 µm Breite, Temperatur 37 °C, Glycerin-Anteil 20 %, Ströme in µL/min …
  medium_a: pressure: 20 mbar
nodes:
  # Zulauf (µ-Pumpe)
  medium_a: {at: [0 µm, 5 µm], pressure: 20 mbar}  # ändern
";
    let out = one(text, &PRESSURE, "22 mbar").unwrap();
    assert_eq!(
        out,
        text.replace("pressure: 20 mbar}", "pressure: 22 mbar}")
    );
}

#[test]
fn several_edits_in_one_file() {
    let text = "\
nodes:
  medium_a: {pressure: 20 mbar, adjust: {min: 0 mbar, max: 300 mbar}}
  medium_b:
    pressure: 10 mbar
channels:
  c1: {from: medium_a, to: t, section: feed, length: 12 mm}
  c2:
    from: medium_b
    to: t
    section: {shape: circle, diameter: 100 um}
    length: 30 mm
";
    let out = apply_edits(
        text,
        Syntax::Yaml,
        &[
            Edit::scalar(&["channels", "c2", "length"], "31 mm"),
            Edit::scalar(&PRESSURE, "21 mbar"),
            Edit::mapping(
                &["channels", "c2", "section"],
                &[("shape", "circle"), ("diameter", "110 um")],
            ),
            Edit::scalar(&["nodes", "medium_b", "pressure"], "11 mbar"),
            Edit::scalar(&["channels", "c1", "length"], "13 mm"),
        ],
    )
    .unwrap();
    assert_eq!(
        out,
        "\
nodes:
  medium_a: {pressure: 21 mbar, adjust: {min: 0 mbar, max: 300 mbar}}
  medium_b:
    pressure: 11 mbar
channels:
  c1: {from: medium_a, to: t, section: feed, length: 13 mm}
  c2:
    from: medium_b
    to: t
    section: {shape: circle, diameter: 110 um}
    length: 31 mm
"
    );
}

#[test]
fn no_edits_is_the_same_text() {
    let text = "a: 1  # one\n";
    assert_eq!(apply_edits(text, Syntax::Yaml, &[]).unwrap(), text);
}

/// Every key path through mappings in `tree`, with whether its value is a mapping.
fn paths(tree: &Value, prefix: &mut Vec<String>, out: &mut Vec<(Vec<String>, bool)>) {
    if let Value::Object(map) = tree {
        for (k, v) in map {
            prefix.push(k.clone());
            match v {
                Value::Object(_) => {
                    out.push((prefix.clone(), true));
                    paths(v, prefix, out);
                }
                Value::Array(_) => {}
                // Block scalars (`|`, `>`) are refused; see `block_scalars_are_refused`.
                Value::String(s) if s.contains('\n') => {}
                _ => out.push((prefix.clone(), false)),
            }
            prefix.pop();
        }
    }
}

#[test]
fn every_value_of_every_shipped_chip_can_be_changed() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("networks");
    let mut files = 0;
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().and_then(|e| e.to_str()) != Some("yaml") {
            continue;
        }
        files += 1;
        let text = std::fs::read_to_string(&path).unwrap();
        let mut all = Vec::new();
        paths(&yaml(&text), &mut Vec::new(), &mut all);
        for (keys, is_map) in all {
            let value = if is_map {
                NewValue::Mapping(vec![("shape".into(), "circle".into())])
            } else {
                NewValue::Scalar("7.25 µm".into())
            };
            let edit = Edit {
                path: keys.clone(),
                value,
            };
            let out = apply_edits(&text, Syntax::Yaml, &[edit]);
            assert!(out.is_ok(), "{}: {keys:?}: {out:?}", path.display());
        }
    }
    assert!(files > 0);
}

// --- refusals -----------------------------------------------------------------------------

fn refused(text: &str, path: &[&str], value: NewValue) -> String {
    let edit = Edit {
        path: path.iter().map(|s| s.to_string()).collect(),
        value,
    };
    let e = apply_edits(text, Syntax::Yaml, &[edit]).unwrap_err();
    e.to_string()
}

fn scalar(s: &str) -> NewValue {
    NewValue::Scalar(s.to_string())
}

#[test]
fn missing_path_is_refused_by_name() {
    let text =
        "description: 'nodes: medium_a: pressure: 1 mbar'\nnodes:\n  medium_a: {flow: 1 uL/min}\n";
    let m = refused(text, &PRESSURE, scalar("2 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: not found in the file (nodes.medium_a is there, at line 3, without 'pressure')"),
        "{m}"
    );
    assert!(m.contains("add the key"), "{m}");
    let m = refused(text, &["nodes", "medium_b", "pressure"], scalar("2 mbar"));
    assert!(
        m.contains("(nodes is there, at line 2, without 'medium_b')"),
        "{m}"
    );
}

#[test]
fn duplicate_keys_are_refused() {
    let text = "nodes:\n  medium_a: {pressure: 1 mbar}\n  medium_a: {pressure: 2 mbar}\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert_eq!(
        m,
        "nodes.medium_a: written more than once (lines 2, 3); keep one and run again"
    );
    let text = "nodes:\n  medium_a:\n    pressure: 1 mbar\n    pressure: 2 mbar\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: written more than once (lines 3, 4)"),
        "{m}"
    );
}

#[test]
fn alias_and_anchor_values_are_refused() {
    let text = "base: &p 20 mbar\nnodes:\n  medium_a: {pressure: *p}\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: the value at line 3 is an alias (*p)"),
        "{m}"
    );
    assert!(m.contains("write the value out"), "{m}");

    let text = "nodes:\n  medium_a: {pressure: &p 20 mbar}\n  b: {pressure: *p}\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: the value at line 2 carries an anchor (&)"),
        "{m}"
    );

    let text = "nodes:\n  medium_a: &m {pressure: 20 mbar}\n  b: *m\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: nodes.medium_a at line 2 carries an anchor"),
        "{m}"
    );

    let text = "common: &c {pressure: 20 mbar}\nnodes:\n  medium_a: *c\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: nodes.medium_a at line 3 is an alias (*c)"),
        "{m}"
    );
}

#[test]
fn values_from_a_merge_key_are_refused() {
    let text = "base: &b {pressure: 20 mbar}\nnodes:\n  medium_a:\n    <<: *b\n    adjust: {min: 0 mbar, max: 1 bar}\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert_eq!(
        m,
        "nodes.medium_a.pressure: not written out in nodes.medium_a, which takes entries from a \
         merge key (<<) at line 4; write 'pressure' out in nodes.medium_a and run again"
    );
    // Written out next to the merge key, the value is the file's own and may change.
    let text = "base: &b {pressure: 20 mbar}\nnodes:\n  medium_a: {<<: *b, pressure: 5 mbar}\n";
    let out = apply_edits(text, Syntax::Yaml, &[Edit::scalar(&PRESSURE, "6 mbar")]).unwrap();
    assert_eq!(out, text.replace("5 mbar", "6 mbar"));
}

#[test]
fn lists_and_mappings_where_a_single_value_goes_are_refused() {
    let text = "nodes:\n  medium_a:\n    pressure: [20 mbar, 30 mbar]\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert!(
        m.starts_with("nodes.medium_a.pressure: holds a list at line 3, where a single value was to be written"),
        "{m}"
    );
    let text = "nodes:\n  medium_a:\n    pressure:\n      - 20 mbar\n";
    let m = refused(text, &PRESSURE, NewValue::Mapping(vec![]));
    assert!(
        m.contains("holds a list at line 3, where a mapping was to be written"),
        "{m}"
    );
    let text = "nodes:\n  medium_a: {pressure: 20 mbar}\n";
    let m = refused(text, &["nodes", "medium_a"], scalar("3 mbar"));
    assert!(
        m.contains("holds a mapping at line 2, where a single value"),
        "{m}"
    );
}

#[test]
fn block_scalars_are_refused() {
    let text = "nodes:\n  medium_a:\n    pressure: >\n      20 mbar\n";
    let m = refused(text, &PRESSURE, scalar("3 mbar"));
    assert_eq!(
        m,
        "nodes.medium_a.pressure: the value is a block scalar (| or >) at line 3; write the \
         value on the line of its key and run again"
    );
}

#[test]
fn unreadable_text_is_refused_with_its_place() {
    let m = refused(
        "nodes:\n  medium_a: {pressure: 20 mbar\n",
        &PRESSURE,
        scalar("1 mbar"),
    );
    assert!(m.starts_with("the file cannot be read at line 3"), "{m}");
}

// --- property: what is written reads back --------------------------------------------------

fn chip(style: u8, value: &str) -> (String, Syntax) {
    match style {
        0 => (
            format!("description: 'pressure: {value}'\nnodes:\n  medium_a:\n    pressure: {value}  # set\n  out: {{pressure: 0 Pa}}\n"),
            Syntax::Yaml,
        ),
        1 => (
            format!("nodes:\n  medium_a: {{pressure: {value}, adjust: {{min: 0 mbar, max: 1 bar}}}}\n"),
            Syntax::Yaml,
        ),
        2 => (
            format!("nodes:\r\n  medium_a: {{pressure: '{value}'}}\r\n"),
            Syntax::Yaml,
        ),
        3 => (
            format!("nodes:\n  medium_a: {{\"pressure\": \"{value}\", \"x\": 1}}\n"),
            Syntax::Yaml,
        ),
        _ => (
            format!("{{\"nodes\": {{\"medium_a\": {{\"pressure\": \"{value}\"}}}}}}"),
            Syntax::Json,
        ),
    }
}

proptest! {
    #[test]
    fn written_values_read_back(
        style in 0u8..5,
        new in "[ -~µ°äÄ\t\n\u{85}\u{2028}\u{feff}]{0,24}",
        fields in proptest::collection::vec(("[a-z]{1,6}", "[ -~µ]{0,12}"), 0..4),
    ) {
        let (text, syntax) = chip(style, "20 mbar");
        let out = apply_edits(&text, syntax, &[Edit::scalar(&PRESSURE, new.clone())]).unwrap();
        let tree: Value = match syntax {
            Syntax::Json => serde_json::from_str(&out).unwrap(),
            Syntax::Yaml => yaml(&out),
        };
        prop_assert_eq!(at(&tree, &PRESSURE), &Value::String(new.clone()));
        let mut expected: Value = match syntax {
            Syntax::Json => serde_json::from_str(&text).unwrap(),
            Syntax::Yaml => yaml(&text),
        };
        expected["nodes"]["medium_a"]["pressure"] = json!(new);
        prop_assert_eq!(&tree, &expected);

        // A mapping in place of the value, keys unique.
        let mut seen = std::collections::HashSet::new();
        let fields: Vec<(String, String)> =
            fields.into_iter().filter(|(k, _)| seen.insert(k.clone())).collect();
        let edit = Edit { path: PRESSURE.iter().map(|s| s.to_string()).collect(), value: NewValue::Mapping(fields.clone()) };
        let out = apply_edits(&text, syntax, &[edit]).unwrap();
        let tree: Value = match syntax {
            Syntax::Json => serde_json::from_str(&out).unwrap(),
            Syntax::Yaml => yaml(&out),
        };
        let want: serde_json::Map<String, Value> =
            fields.into_iter().map(|(k, v)| (k, Value::String(v))).collect();
        prop_assert_eq!(at(&tree, &PRESSURE), &Value::Object(want));
    }
}

/// A case the property test above found: anchor and alias marks inside written values
/// ("a& -", "*") are quoted, so the copy reads back to the same strings.
#[test]
fn anchor_and_alias_marks_in_values_read_back() {
    let (text, syntax) = chip(0, "20 mbar");
    let fields = vec![
        ("a".to_string(), "a& -".to_string()),
        ("b".into(), "*".into()),
    ];
    let edit = Edit {
        path: PRESSURE.iter().map(|s| s.to_string()).collect(),
        value: NewValue::Mapping(fields),
    };
    let out = apply_edits(&text, syntax, &[edit]).unwrap();
    let tree = yaml(&out);
    assert_eq!(at(&tree, &PRESSURE), &json!({"a": "a& -", "b": "*"}));
}
