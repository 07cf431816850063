//! Deterministic mutation fuzz over the shipped chips (`networks/*.yaml` and a JSON rendering
//! of each), run in-process through the same command functions the CLI calls.
//!
//! Each case takes a seed chip, applies one to three mutations — byte-level (flip, delete,
//! duplicate, insert syntax characters) or structure-aware (a number replaced by a huge, tiny,
//! negative, zero or non-finite one; two values swapped; a line deleted, duplicated or
//! moved; a unit replaced; a name given unicode, control or direction characters) — and runs
//! `solve`, and on some cases `check`, `tune` and `size`. It asserts:
//!
//! - no panic (caught with `catch_unwind`);
//! - every refusal is located: a line, a field path, a byte offset, or a named node, channel
//!   or target;
//! - every accepted chip's JSON output holds no `null` outside the keys the report declares
//!   optional (serde_json writes NaN and ±inf as `null`), and its table no `NaN`/`inf`;
//! - every accepted chip's flows balance, checked independently from the JSON: at each
//!   junction the net channel flow against the largest flow through it, at each port the
//!   reported flow against the net flow of its channels (and a pump's set flow), and the port
//!   flows of each chip against each other, all to 1e-9 relative.
//!
//! `examples/fuzz_long.rs` runs the same driver for longer, from a given seed.

use rillnet::commands::{self, ChipInput, DesignRequest, SensitivityChoice, SolveRequest};
use rillnet::format::Syntax;
use rillnet::network::{Network, Port};
use rillnet::report::Format;
use rillnet::{Error, Outcome};
use serde_json::Value;
use std::collections::HashMap;
use std::panic::{catch_unwind, AssertUnwindSafe};

/// Relative tolerance of the independent balance check.
pub const BALANCE: f64 = 1e-9;

/// Keys the report declares optional (`Option<…>` fields in `src/report`): only these may be
/// `null` in a JSON document.
const NULLABLE: &[&str] = &[
    "chip",
    "pressure_rating_pa",
    "verdict",
    "sensitivities",
    "shear_limit_pa",
    "balance_residual",
    "shear_margin",
    "residence_time_s",
    "d_flow_d_width_m3_per_s_per_m",
    "d_flow_d_height_m3_per_s_per_m",
    "relative_width",
    "relative_height",
    "relative_length",
    "kept_per_target",
    "tolerance_relative",
    "tolerance_absolute",
    "not_controllable_reason",
    "snapping_miss",
    "at_bound",
    "written_digits",
    "step_m",
    "serpentine",
    "serpentine_problem",
    "max_wall_shear_at_m",
    "shear_error_estimate",
    "mesh_nodes",
    "requested_tolerance",
    "requested_shear_tolerance",
    "corner_exclusion_radius_m",
];

/// A seed chip: its name, text and syntax.
#[derive(Clone, Debug)]
pub struct Seed {
    pub name: String,
    pub text: String,
    pub syntax: Syntax,
    /// Has design targets (worth running `tune` and `size` on).
    pub design: bool,
    /// Has numerically solved sections (each parse costs a mesh solve).
    pub numeric: bool,
}

/// The shipped chips, in YAML and rendered as JSON; profile files named by absolute path so
/// the text can be read from anywhere.
pub fn seeds() -> Vec<Seed> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("networks");
    let mut names: Vec<_> = std::fs::read_dir(&dir)
        .expect("networks/ exists")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|e| e == "yaml"))
        .collect();
    names.sort();
    let mut out = Vec::new();
    for path in names {
        let text = std::fs::read_to_string(&path).expect("readable seed");
        let text = text.replace(
            "file: profiles/",
            &format!("file: {}/profiles/", dir.display()),
        );
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        let design = text.contains("\ntargets:");
        let numeric = ["trapezoid", "d-shape", "profile", "polygon", "semicircle"]
            .iter()
            .any(|k| text.contains(&format!("shape: {k}")));
        let value: serde_json::Value = serde_yaml::from_str(&text).expect("seed is YAML");
        let json = serde_json::to_string_pretty(&value).expect("renders");
        out.push(Seed {
            name: name.clone(),
            text,
            syntax: Syntax::Yaml,
            design,
            numeric,
        });
        out.push(Seed {
            name: name.replace(".yaml", ".json"),
            text: json,
            syntax: Syntax::Json,
            design,
            numeric,
        });
    }
    out
}

/// xorshift64*: small, deterministic, good enough to choose mutations.
#[derive(Clone, Debug)]
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(seed.max(1))
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }
    pub fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n.max(1) as u64) as usize
    }
    fn pick<'a, T>(&mut self, items: &'a [T]) -> &'a T {
        &items[self.below(items.len())]
    }
}

const NUMBERS: &[&str] = &[
    "0",
    "-0",
    "-1",
    "1e308",
    "-1e308",
    "1e-308",
    "5e-324",
    "1e-320",
    "NaN",
    ".nan",
    ".inf",
    "-.inf",
    "inf",
    "1e30",
    "1e-30",
    "123456789012345678901234567890",
    "-1e-9",
    "0.0000001",
    "99999",
    "1e3",
    "0x10",
    "1_000",
];
const UNITS: &[&str] = &[
    "um", "mm", "m", "nm", "mbar", "Pa", "kPa", "uL/min", "nL/s", "mPa*s", "kg/m^3", "deg", "degC",
    "K", "s", "furlong", "",
];
const SYNTAX: &[&str] = &[
    ":", "{", "}", "[", "]", ",", "\n", "\t", "#", "&a", "*a", "\"", "'", "- ", "? ", "!!", "|",
    ">", "%",
];
const UNICODE: &[&str] = &[
    "é", "\u{202e}", "\u{200b}", "\u{85}", "\u{2028}", "\u{feff}", "🧫", "\u{0}", "\u{7f}", "Ω",
];

/// One mutation of `text`, byte-level or structure-aware.
pub fn mutate(text: &str, rng: &mut Rng) -> Vec<u8> {
    let bytes = text.as_bytes();
    let lines: Vec<&str> = text.split_inclusive('\n').collect();
    let join = |v: Vec<String>| v.concat().into_bytes();
    if lines.is_empty() {
        return bytes.to_vec();
    }
    match rng.below(13) {
        0 => {
            let mut b = bytes.to_vec();
            if !b.is_empty() {
                let i = rng.below(b.len());
                b[i] = (rng.next_u64() & 0xff) as u8;
            }
            b
        }
        1 => {
            let mut b = bytes.to_vec();
            let i = rng.below(b.len());
            let n = (1 + rng.below(8)).min(b.len() - i);
            b.drain(i..i + n);
            b
        }
        2 => {
            let mut b = bytes.to_vec();
            let i = rng.below(b.len());
            let n = (1 + rng.below(16)).min(b.len() - i);
            let piece = b[i..i + n].to_vec();
            b.splice(i..i, piece);
            b
        }
        3 => {
            let mut b = bytes.to_vec();
            let i = rng.below(b.len() + 1);
            b.splice(i..i, rng.pick::<&str>(SYNTAX).bytes());
            b
        }
        4 => replace_token(text, rng, is_number, NUMBERS),
        5 => replace_token(text, rng, |t| UNITS.contains(&t) && !t.is_empty(), UNITS),
        11 | 12 => {
            // A plausible change: a number scaled by a factor between 1/1000 and 1000, so
            // that many mutated chips stay valid and their answers get checked.
            let factor = 10f64.powf(6.0 * (rng.below(1001) as f64 / 1000.0) - 3.0);
            let scaled = |t: &str| format!("{}", t.parse::<f64>().unwrap_or(1.0) * factor);
            scale_token(text, rng, scaled)
        }
        6 => {
            // Swap the values of two `key: value` lines.
            let idx: Vec<usize> = (0..lines.len())
                .filter(|&i| lines[i].contains(": "))
                .collect();
            if idx.len() < 2 {
                return bytes.to_vec();
            }
            let (a, b) = (*rng.pick(&idx), *rng.pick(&idx));
            let mut v: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
            let split = |s: &str| {
                let k = s.find(": ").unwrap_or(0) + 2;
                (
                    s[..k].to_string(),
                    s[k..].trim_end_matches('\n').to_string(),
                )
            };
            let ((ka, va), (kb, vb)) = (split(lines[a]), split(lines[b]));
            v[a] = format!("{ka}{vb}\n");
            v[b] = format!("{kb}{va}\n");
            join(v)
        }
        7 => {
            let mut v: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
            v.remove(rng.below(v.len()));
            join(v)
        }
        8 => {
            // A duplicated line: duplicate keys, repeated list items.
            let mut v: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
            let i = rng.below(v.len());
            v.insert(i, v[i].clone());
            join(v)
        }
        9 => {
            let mut v: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
            let (a, b) = (rng.below(v.len()), rng.below(v.len()));
            v.swap(a, b);
            join(v)
        }
        _ => {
            // Unicode, control or direction characters in a word (often a name).
            let words: Vec<usize> = text
                .char_indices()
                .filter(|(_, c)| c.is_ascii_alphabetic())
                .map(|(i, _)| i)
                .collect();
            if words.is_empty() {
                return bytes.to_vec();
            }
            let i = *rng.pick(&words);
            let mut s = text.to_string();
            s.insert_str(i, rng.pick::<&str>(UNICODE));
            s.into_bytes()
        }
    }
}

fn is_number(t: &str) -> bool {
    !t.is_empty() && t.parse::<f64>().is_ok()
}

/// Replace one token (split at whitespace and YAML/JSON punctuation) that passes `want` by a
/// pick from `by`.
fn replace_token(text: &str, rng: &mut Rng, want: impl Fn(&str) -> bool, by: &[&str]) -> Vec<u8> {
    let spans = token_spans(text, want);
    if spans.is_empty() {
        return text.as_bytes().to_vec();
    }
    let (s, e) = *rng.pick(&spans);
    let mut out = text[..s].to_string();
    out.push_str(rng.pick::<&str>(by));
    out.push_str(&text[e..]);
    out.into_bytes()
}

/// Replace one number by `by(number)`.
fn scale_token(text: &str, rng: &mut Rng, by: impl Fn(&str) -> String) -> Vec<u8> {
    let spans = token_spans(text, is_number);
    if spans.is_empty() {
        return text.as_bytes().to_vec();
    }
    let (s, e) = *rng.pick(&spans);
    format!("{}{}{}", &text[..s], by(&text[s..e]), &text[e..]).into_bytes()
}

/// Byte spans of the tokens of `text` that pass `want`.
fn token_spans(text: &str, want: impl Fn(&str) -> bool) -> Vec<(usize, usize)> {
    let mut spans = Vec::new();
    let mut start = None;
    for (i, c) in text
        .char_indices()
        .chain(std::iter::once((text.len(), ' ')))
    {
        let sep = c.is_whitespace() || "{}[],:\"'".contains(c);
        match (sep, start) {
            (true, Some(s)) => {
                if want(&text[s..i]) {
                    spans.push((s, i));
                }
                start = None;
            }
            (false, None) => start = Some(i),
            _ => {}
        }
    }
    spans
}

/// What one case found wrong.
#[derive(Clone, Debug)]
pub struct Failure {
    pub seed: String,
    pub case: usize,
    pub command: &'static str,
    pub problem: String,
    pub text: String,
}

/// Counts of a run.
#[derive(Clone, Debug, Default)]
pub struct Summary {
    pub cases: usize,
    pub accepted: usize,
    pub refused: usize,
    pub commands: usize,
    pub failures: Vec<Failure>,
}

/// Whether a refusal says where: a line, a field path, a byte offset, or a named item.
fn located(e: &Error) -> bool {
    match e {
        Error::Input(i) => i.line.is_some() || i.field.is_some() || i.message.contains("offset"),
        // Numerical and design refusals name the nodes, channels or targets involved.
        Error::Solve { .. }
        | Error::Design { .. }
        | Error::Solutes { .. }
        | Error::Evolve { .. } => e.to_string().contains('\''),
        Error::Read { .. } | Error::Write { .. } => true,
    }
}

/// Paths of `null` values outside the optional keys.
fn unexpected_nulls(v: &Value, path: &str, key: &str, out: &mut Vec<String>) {
    match v {
        Value::Null if !NULLABLE.contains(&key) => out.push(path.to_string()),
        Value::Array(items) => {
            for (i, x) in items.iter().enumerate() {
                unexpected_nulls(x, &format!("{path}[{i}]"), key, out);
            }
        }
        Value::Object(map) => {
            for (k, x) in map {
                unexpected_nulls(x, &format!("{path}.{k}"), k, out);
            }
        }
        _ => {}
    }
}

/// The independent balance check of a solve document against the chip's ports.
pub fn balance_problems(doc: &Value, network: &Network) -> Vec<String> {
    let mut problems = Vec::new();
    let channels = doc["channels"].as_array().cloned().unwrap_or_default();
    // Per node: net flow out through channels, and the largest channel flow touching it.
    let mut net: HashMap<String, f64> = HashMap::new();
    let mut largest: HashMap<String, f64> = HashMap::new();
    for c in &channels {
        let (Some(from), Some(to), Some(q)) = (
            c["from"].as_str(),
            c["to"].as_str(),
            c["flow_m3_per_s"].as_f64(),
        ) else {
            problems.push(format!("channel without from/to/flow: {c}"));
            continue;
        };
        *net.entry(from.into()).or_default() += q;
        *net.entry(to.into()).or_default() -= q;
        for n in [from, to] {
            let l = largest.entry(n.into()).or_default();
            *l = l.max(q.abs());
        }
    }
    let port_flow: HashMap<String, f64> = doc["ports"]
        .as_array()
        .cloned()
        .unwrap_or_default()
        .iter()
        .filter_map(|p| {
            Some((
                p["name"].as_str()?.to_string(),
                p["flow_into_chip_m3_per_s"].as_f64()?,
            ))
        })
        .collect();
    // The rounding a backward-stable solve leaves in a node's balance: a few units of
    // rounding of every incident channel's g·(|p_i| + |p_j|) (componentwise backward error,
    // Oettli & Prager 1964); 64 ε as the program's own check uses for its global floor.
    let pressure: HashMap<&str, f64> = doc["nodes"]
        .as_array()
        .map(|a| {
            a.iter()
                .filter_map(|n| Some((n["name"].as_str()?, n["pressure_pa"].as_f64()?)))
                .collect()
        })
        .unwrap_or_default();
    let mut rounding: HashMap<String, f64> = HashMap::new();
    for c in &channels {
        let (Some(from), Some(to), Some(r)) = (
            c["from"].as_str(),
            c["to"].as_str(),
            c["resistance_pa_s_per_m3"].as_f64(),
        ) else {
            continue;
        };
        let size = pressure.get(from).copied().unwrap_or(0.0).abs()
            + pressure.get(to).copied().unwrap_or(0.0).abs();
        for n in [from, to] {
            *rounding.entry(n.into()).or_default() += 64.0 * f64::EPSILON * size / r;
        }
    }
    let scale_of = |n: &str| largest.get(n).copied().unwrap_or(0.0);
    for node in network.nodes.iter() {
        let out = net.get(&node.name).copied().unwrap_or(0.0);
        let scale = scale_of(&node.name);
        let floor = rounding.get(&node.name).copied().unwrap_or(0.0);
        let mut expect = |what: &str, want: f64, scale: f64| {
            if (out - want).abs() > (BALANCE * scale.max(want.abs())).max(floor) {
                problems.push(format!(
                    "node '{}' ({what}): net flow out {out:e}, expected {want:e} (scale {scale:e})",
                    node.name
                ));
            }
        };
        match node.port {
            Port::Junction => expect("junction", 0.0, scale),
            Port::Flow(q) => {
                expect("pump set flow", q.si(), scale);
                if let Some(&reported) = port_flow.get(&node.name) {
                    expect("pump reported flow", reported, scale);
                }
            }
            Port::Pressure(_) => {
                if let Some(&reported) = port_flow.get(&node.name) {
                    expect("port reported flow", reported, scale);
                }
            }
        }
    }
    // Global: what enters leaves (each connected part does; so does the whole), to the
    // rounding the nodes' balances may leave between them.
    let total: f64 = port_flow.values().sum();
    let biggest = port_flow.values().fold(0.0f64, |m, q| m.max(q.abs()));
    let floor: f64 = rounding.values().sum();
    if total.abs() > (BALANCE * biggest).max(floor) {
        problems.push(format!("port flows sum to {total:e} (largest {biggest:e})"));
    }
    problems
}

/// Render `outcome` as JSON and as a table; problems with either.
fn output_problems(outcome: &Outcome) -> (Option<Value>, Vec<String>) {
    let mut problems = Vec::new();
    let mut json = Vec::new();
    if let Err(e) = rillnet::emit(outcome, Format::Json, &mut json) {
        problems.push(format!("JSON not rendered: {e}"));
        return (None, problems);
    }
    let doc: Value = match serde_json::from_slice(&json) {
        Ok(v) => v,
        Err(e) => {
            problems.push(format!("JSON output does not parse: {e}"));
            return (None, problems);
        }
    };
    let mut nulls = Vec::new();
    unexpected_nulls(&doc, "", "", &mut nulls);
    if !nulls.is_empty() {
        problems.push(format!("null (NaN or inf) at {}", nulls.join(", ")));
    }
    let mut table = Vec::new();
    if rillnet::emit(outcome, Format::Table, &mut table).is_ok() {
        let table = String::from_utf8_lossy(&table);
        // The header echoes the chip's name as written (a mutation may put "NaN" in it).
        let figures: String = (table.lines())
            .filter(|l| !l.starts_with("Chip: "))
            .collect::<Vec<_>>()
            .join("\n");
        for bad in ["NaN", " inf", "-inf"] {
            if figures.contains(bad) {
                problems.push(format!("'{bad}' in the table output"));
            }
        }
    }
    (Some(doc), problems)
}

/// Run one command on `text`; a failure for a panic, an unlocated refusal or a bad output.
fn run_command(
    command: &'static str,
    text: &str,
    syntax: Syntax,
) -> Result<bool, (&'static str, String)> {
    let input = ChipInput::Text { text, syntax };
    let design = DesignRequest {
        chip: input,
        output: None,
        run: 10e-3,
        pitch: 400e-6,
        ignore_limits: false,
    };
    let result = catch_unwind(AssertUnwindSafe(|| match command {
        "solve" => commands::solve(&SolveRequest {
            chip: input,
            plot: None,
            sensitivity: SensitivityChoice::None,
        }),
        "check" => commands::check(&commands::CheckRequest {
            chip: input,
            plot: None,
        }),
        "tune" => commands::tune(&design),
        _ => commands::size(&design),
    }));
    let outcome = match result {
        Err(payload) => {
            let what = payload
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| payload.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default();
            return Err((command, format!("panic: {what}")));
        }
        Ok(Err(e)) if !located(&e) => {
            return Err((command, format!("refusal without a place: {e}")))
        }
        Ok(Err(_)) => return Ok(false),
        Ok(Ok(o)) => o,
    };
    let (doc, mut problems) = output_problems(&outcome);
    if let (Some(doc), Outcome::Solved { chip, .. }) = (&doc, &outcome) {
        problems.extend(balance_problems(doc, &chip.network));
    }
    if problems.is_empty() {
        Ok(true)
    } else {
        Err((command, problems.join("; ")))
    }
}

/// Run `count` cases from `seed`. Chips with numerically solved sections cost a mesh solve per
/// parse, so they get one case in `numeric_share` (the others share the rest evenly).
pub fn run(seed: u64, count: usize, numeric_share: usize) -> Summary {
    let seeds = seeds();
    let cheap: Vec<&Seed> = seeds.iter().filter(|s| !s.numeric).collect();
    let dear: Vec<&Seed> = seeds.iter().filter(|s| s.numeric).collect();
    let mut rng = Rng::new(seed);
    let mut summary = Summary::default();
    // Panics are caught and reported as failures; keep the default hook from printing each.
    let hook = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    for case in 0..count {
        let s = if !dear.is_empty() && case % numeric_share.max(1) == 0 {
            dear[rng.below(dear.len())]
        } else {
            cheap[rng.below(cheap.len())]
        };
        let mut text = s.text.clone().into_bytes();
        for _ in 0..1 + rng.below(3) {
            let current = String::from_utf8_lossy(&text).into_owned();
            text = mutate(&current, &mut rng);
        }
        summary.cases += 1;
        // Bytes that are not UTF-8 are refused where the program reads them.
        let text = match rillnet::read_limited(text.as_slice(), "<stdin>") {
            Ok(t) => t,
            Err(e) => {
                summary.refused += 1;
                if !located(&e) {
                    summary
                        .failures
                        .push(failure(s, case, "read", format!("{e}"), &text));
                }
                continue;
            }
        };
        let mut commands = vec!["solve"];
        if case % 4 == 1 {
            commands.push("check");
        }
        if s.design && case % 3 == 0 {
            commands.push(if case % 2 == 0 { "tune" } else { "size" });
        }
        for command in commands {
            summary.commands += 1;
            match run_command(command, &text, s.syntax) {
                Ok(true) => summary.accepted += 1,
                Ok(false) => summary.refused += 1,
                Err((command, problem)) => {
                    summary
                        .failures
                        .push(failure(s, case, command, problem, text.as_bytes()));
                }
            }
        }
    }
    std::panic::set_hook(hook);
    summary
}

fn failure(s: &Seed, case: usize, command: &'static str, problem: String, text: &[u8]) -> Failure {
    Failure {
        seed: s.name.clone(),
        case,
        command,
        problem,
        text: String::from_utf8_lossy(text).into_owned(),
    }
}

#[test]
fn mutated_chips_never_panic_and_every_answer_balances() {
    let summary = run(0x5eed_2026, 5_000, 25);
    eprintln!(
        "{} cases, {} commands: {} accepted, {} refused, {} failures",
        summary.cases,
        summary.commands,
        summary.accepted,
        summary.refused,
        summary.failures.len()
    );
    // The mutations must leave some chips valid, or the output checks test nothing.
    assert!(summary.accepted > summary.cases / 10, "{summary:?}");
    assert!(summary.refused > summary.cases / 10, "{summary:?}");
    if let Some(f) = summary.failures.first() {
        let report: String = summary
            .failures
            .iter()
            .map(|f| {
                format!(
                    "=== {} case {} ({}): {}\n{}\n",
                    f.seed, f.case, f.command, f.problem, f.text
                )
            })
            .collect();
        let path = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("fuzz-failures.txt");
        let _ = std::fs::write(&path, report);
        eprintln!("every failure with its chip: {}", path.display());
        panic!(
            "{} failures; first: {} case {} ({}): {}\n--- chip ---\n{}",
            summary.failures.len(),
            f.seed,
            f.case,
            f.command,
            f.problem,
            f.text
        );
    }
}

#[test]
fn the_balance_check_catches_an_unbalanced_junction() {
    // The checker itself must be able to fail: a solve document with one flow altered.
    let seeds = seeds();
    let seed = seeds.iter().find(|s| !s.numeric).expect("a cheap seed");
    let input = ChipInput::Text {
        text: &seed.text,
        syntax: seed.syntax,
    };
    let outcome = commands::solve(&SolveRequest {
        chip: input,
        plot: None,
        sensitivity: SensitivityChoice::None,
    })
    .expect("the shipped chip solves");
    let Outcome::Solved { chip, .. } = &outcome else {
        panic!("a solve outcome");
    };
    let mut json = Vec::new();
    rillnet::emit(&outcome, Format::Json, &mut json).unwrap();
    let mut doc: Value = serde_json::from_slice(&json).unwrap();
    assert!(balance_problems(&doc, &chip.network).is_empty());
    let q = doc["channels"][0]["flow_m3_per_s"].as_f64().unwrap();
    doc["channels"][0]["flow_m3_per_s"] = Value::from(q * (1.0 + 1e-7));
    assert!(!balance_problems(&doc, &chip.network).is_empty());
}
