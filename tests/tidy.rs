//! Architecture rules, checked on the source tree (see DEVELOPERS.md, Invariants):
//!
//! - `src/solver.rs` imports nothing of chips;
//! - `src/section/**` imports no network, chip, file format, report, plots or petgraph;
//! - `src/network.rs` and `src/analysis/**` import no `Chip` (the design data types of
//!   `chip::design` are fine), no format, report, plots or commands;
//! - serde appears only in `src/format/**` and `src/report/**`;
//! - `src/main.rs` stays thin: at most [`MAIN_MAX_LINES`] lines and no `std::fs`; its
//!   argument definitions (`src/cli.rs`, a module of the binary) use no `std::fs` either;
//! - no `.unwrap()` in `src/**` outside `#[cfg(test)]` items (comments, doc examples and
//!   string contents do not count).
//!
//! The files are read with `std::fs` and scanned with a small lexer: comments and the contents
//! of string and character literals are blanked (line structure kept), `use` declarations are
//! expanded (`use crate::{a, b::{c, d}}` → `crate::a`, `crate::b::c`, `crate::b::d`), and
//! `super::`/`self::` and imported names are resolved to full paths, so that both
//! `use crate::network::Network` and an inline `crate::network::ChannelId(k)` count as using
//! `crate::network`. Every failure names the file and line.

use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// The most lines `src/main.rs` may have.
const MAIN_MAX_LINES: usize = 450;

/// Known violations outside the scope of the change that introduced this test, each with a
/// one-line justification: (rule, file, the trimmed offending line or "" for a whole-file
/// rule). An entry that no longer matches anything fails the test, so the list only shrinks.
const ALLOWED: &[(&str, &str, &str)] = &[];

// ---------------------------------------------------------------------------------------
// Lexing
// ---------------------------------------------------------------------------------------

/// `text` with comments and the contents of string and character literals replaced by
/// spaces; newlines are kept, so line numbers stay valid.
fn code_view(text: &str) -> String {
    let c: Vec<char> = text.chars().collect();
    let mut out: Vec<char> = Vec::with_capacity(c.len());
    let blank = |ch: char| if ch == '\n' { '\n' } else { ' ' };
    let mut i = 0;
    while i < c.len() {
        let next = c.get(i + 1).copied();
        if c[i] == '/' && next == Some('/') {
            while i < c.len() && c[i] != '\n' {
                out.push(' ');
                i += 1;
            }
        } else if c[i] == '/' && next == Some('*') {
            let mut depth = 0;
            while i < c.len() {
                if c[i] == '/' && c.get(i + 1) == Some(&'*') {
                    depth += 1;
                    out.extend([' ', ' ']);
                    i += 2;
                } else if c[i] == '*' && c.get(i + 1) == Some(&'/') {
                    depth -= 1;
                    out.extend([' ', ' ']);
                    i += 2;
                    if depth == 0 {
                        break;
                    }
                } else {
                    out.push(blank(c[i]));
                    i += 1;
                }
            }
        } else if let Some(hashes) = raw_string_start(&c, i) {
            // r"..." / r#"..."# (and br...): keep the delimiters' place, blank everything.
            let close: Vec<char> = std::iter::once('"')
                .chain(std::iter::repeat_n('#', hashes))
                .collect();
            let start = i;
            i = c[i..]
                .iter()
                .position(|&ch| ch == '"')
                .map_or(c.len(), |p| i + p + 1);
            out.extend((start..i).map(|_| ' '));
            while i < c.len() && !c[i..].starts_with(&close) {
                out.push(blank(c[i]));
                i += 1;
            }
            let end = (i + close.len()).min(c.len());
            out.extend((i..end).map(|_| ' '));
            i = end;
        } else if c[i] == '"' {
            out.push('"');
            i += 1;
            while i < c.len() && c[i] != '"' {
                if c[i] == '\\' && i + 1 < c.len() {
                    out.push(' ');
                    i += 1;
                }
                out.push(blank(c[i]));
                i += 1;
            }
            if i < c.len() {
                out.push('"');
                i += 1;
            }
        } else if c[i] == '\'' && is_char_literal(&c, i) {
            out.push('\'');
            i += 1;
            while i < c.len() && c[i] != '\'' {
                if c[i] == '\\' {
                    out.push(' ');
                    i += 1;
                }
                out.push(' ');
                i += 1;
            }
            if i < c.len() {
                out.push('\'');
                i += 1;
            }
        } else {
            out.push(c[i]);
            i += 1;
        }
    }
    out.into_iter().collect()
}

/// If a raw (byte) string starts at `i` (`r"`, `r#"`, `br"`, ...), the number of hashes.
fn raw_string_start(c: &[char], i: usize) -> Option<usize> {
    let prev_ident = i > 0 && is_ident_char(c[i - 1]);
    if prev_ident {
        return None;
    }
    let mut j = i;
    if c.get(j) == Some(&'b') {
        j += 1;
    }
    if c.get(j) != Some(&'r') {
        return None;
    }
    j += 1;
    let mut hashes = 0;
    while c.get(j) == Some(&'#') {
        hashes += 1;
        j += 1;
    }
    (c.get(j) == Some(&'"')).then_some(hashes)
}

/// Whether the quote at `i` opens a character literal (`'a'`, `'\n'`, `'\u{1F600}'`) rather
/// than a lifetime or label (`'a`, `'static`).
fn is_char_literal(c: &[char], i: usize) -> bool {
    match c.get(i + 1) {
        Some('\\') => true,
        Some(_) => c.get(i + 2) == Some(&'\''),
        None => false,
    }
}

fn is_ident_char(ch: char) -> bool {
    ch.is_alphanumeric() || ch == '_'
}

/// `code` with every `#[cfg(test)]` item (the attribute and the item it guards, up to its
/// matching closing brace or its semicolon) blanked.
fn without_test_items(code: &str) -> String {
    let mut c: Vec<char> = code.chars().collect();
    let pattern: Vec<char> = "#[cfg(test)]".chars().collect();
    let mut i = 0;
    while i + pattern.len() <= c.len() {
        if c[i..].starts_with(&pattern) {
            let mut j = i + pattern.len();
            let mut depth = 0;
            while j < c.len() {
                match c[j] {
                    '{' => depth += 1,
                    '}' => {
                        depth -= 1;
                        if depth == 0 {
                            j += 1;
                            break;
                        }
                    }
                    ';' if depth == 0 => {
                        j += 1;
                        break;
                    }
                    _ => {}
                }
                j += 1;
            }
            let end = j.min(c.len());
            for ch in &mut c[i..end] {
                if *ch != '\n' {
                    *ch = ' ';
                }
            }
            i = j;
        } else {
            i += 1;
        }
    }
    c.into_iter().collect()
}

/// 1-based line of the character offset `at`.
fn line_of(code: &str, at: usize) -> usize {
    code[..at].matches('\n').count() + 1
}

/// Byte offsets of `word` in `code` as a whole identifier.
fn word_positions<'a>(code: &'a str, word: &'a str) -> impl Iterator<Item = usize> + 'a {
    code.match_indices(word).map(|(p, _)| p).filter(move |&p| {
        let before = code[..p].chars().next_back();
        let after = code[p + word.len()..].chars().next();
        !before.is_some_and(is_ident_char) && !after.is_some_and(is_ident_char)
    })
}

// ---------------------------------------------------------------------------------------
// Paths
// ---------------------------------------------------------------------------------------

/// A path the file refers to, resolved as far as the file itself says, and where.
#[derive(Clone, Debug, PartialEq)]
struct PathRef {
    path: String,
    line: usize,
}

/// The module path of a source file: `src/lib.rs` → `crate`, `src/a/mod.rs` → `crate::a`,
/// `src/a/b.rs` → `crate::a::b`.
fn module_path(rel: &str) -> Vec<String> {
    let mut parts: Vec<String> = vec!["crate".into()];
    let inner = rel.trim_start_matches("src/").trim_end_matches(".rs");
    for p in inner.split('/') {
        if !matches!(p, "mod" | "lib" | "main") {
            parts.push(p.to_string());
        }
    }
    parts
}

/// Expand one `use` tree (`a::{b, c::{d as e}, f::*}`) into (full path, imported name).
fn expand_use(tree: &str) -> Vec<(String, String)> {
    let tree: String = tree.split_whitespace().collect::<Vec<_>>().join(" ");
    let tree = tree
        .replace(" :: ", "::")
        .replace(":: ", "::")
        .replace(" ::", "::");
    let mut out = Vec::new();
    expand_into("", tree.trim(), &mut out);
    out
}

fn expand_into(prefix: &str, tree: &str, out: &mut Vec<(String, String)>) {
    if let Some(open) = tree.find('{') {
        let head = tree[..open].trim_end_matches("::").trim();
        let body = tree[open + 1..tree.rfind('}').unwrap_or(tree.len())].trim();
        let base = join(prefix, head);
        for part in split_top_level(body) {
            expand_into(&base, part.trim(), out);
        }
    } else if !tree.is_empty() {
        let (path, alias) = match tree.split_once(" as ") {
            Some((p, a)) => (p.trim(), a.trim().to_string()),
            None => (tree, tree.rsplit("::").next().unwrap_or(tree).to_string()),
        };
        let full = if path == "self" {
            prefix.to_string()
        } else {
            join(prefix, path)
        };
        let name = if alias == "self" {
            full.rsplit("::").next().unwrap_or("").to_string()
        } else {
            alias
        };
        out.push((full, name));
    }
}

fn join(prefix: &str, rest: &str) -> String {
    match (prefix.is_empty(), rest.is_empty()) {
        (true, _) => rest.to_string(),
        (_, true) => prefix.to_string(),
        _ => format!("{prefix}::{rest}"),
    }
}

/// Split at commas outside braces.
fn split_top_level(body: &str) -> Vec<&str> {
    let mut parts = Vec::new();
    let (mut depth, mut start) = (0, 0);
    for (i, ch) in body.char_indices() {
        match ch {
            '{' => depth += 1,
            '}' => depth -= 1,
            ',' if depth == 0 => {
                parts.push(&body[start..i]);
                start = i + 1;
            }
            _ => {}
        }
    }
    parts.push(&body[start..]);
    parts.into_iter().filter(|p| !p.trim().is_empty()).collect()
}

/// Resolve `crate`/`super`/`self`/imported first segments of `path` against `module`.
fn resolve(path: &str, module: &[String], imported: &HashMap<String, String>) -> String {
    let path = path.trim_start_matches("::");
    let mut segs: Vec<&str> = path.split("::").collect();
    let mut base: Vec<String> = Vec::new();
    if segs.first() == Some(&"self") {
        base = module.to_vec();
        segs.remove(0);
    } else if segs.first() == Some(&"super") {
        base = module.to_vec();
        while segs.first() == Some(&"super") {
            base.pop();
            segs.remove(0);
        }
    } else if let Some(full) = segs.first().and_then(|s| imported.get(*s)) {
        base = full.split("::").map(String::from).collect();
        segs.remove(0);
    }
    base.extend(segs.into_iter().map(String::from));
    base.join("::")
}

/// Inline modules (`mod name { ... }`) of `code`: their span and name, outermost first.
fn inline_modules(code: &str) -> Vec<(usize, usize, String)> {
    let mut out = Vec::new();
    for at in word_positions(code, "mod") {
        let rest = &code[at + 3..];
        let name_len = rest
            .trim_start()
            .find(|ch: char| !is_ident_char(ch))
            .unwrap_or(0);
        let name_start = at + 3 + (rest.len() - rest.trim_start().len());
        let name = &code[name_start..name_start + name_len];
        let after = code[name_start + name_len..].trim_start();
        if name.is_empty() || !after.starts_with('{') {
            continue;
        }
        let open = code.len() - after.len();
        let mut depth = 0;
        let mut end = code.len();
        for (i, ch) in code[open..].char_indices() {
            match ch {
                '{' => depth += 1,
                '}' => {
                    depth -= 1;
                    if depth == 0 {
                        end = open + i;
                        break;
                    }
                }
                _ => {}
            }
        }
        out.push((open, end, name.to_string()));
    }
    out
}

/// The module path at byte offset `at`: the file's module and the inline modules around it.
fn module_at(file: &[String], mods: &[(usize, usize, String)], at: usize) -> Vec<String> {
    let mut m = file.to_vec();
    m.extend(
        mods.iter()
            .filter(|(s, e, _)| *s < at && at < *e)
            .map(|(_, _, name)| name.clone()),
    );
    m
}

/// Every path `code` refers to: the expanded `use` declarations and the inline paths
/// (`a::b::c` not preceded by `::`), resolved.
fn paths(code: &str, file_module: &[String]) -> Vec<PathRef> {
    let mods = inline_modules(code);
    let mut uses: Vec<(String, String, usize)> = Vec::new();
    let mut use_spans: Vec<(usize, usize)> = Vec::new();
    for at in word_positions(code, "use") {
        let Some(end) = code[at..].find(';').map(|e| at + e) else {
            continue;
        };
        let tree = &code[at + 3..end];
        // `use` must start a declaration: the tree is a path, not an expression.
        if tree.trim().is_empty() || tree.contains('(') || tree.contains('=') {
            continue;
        }
        use_spans.push((at, end));
        let module = module_at(file_module, &mods, at);
        for (path, name) in expand_use(tree) {
            let full = resolve(&path, &module, &HashMap::new());
            uses.push((full, name, line_of(code, at)));
        }
    }
    // Imported names, for the whole file (scopes are not tracked: a name imported in a test
    // module resolves the same everywhere, which can only add findings).
    let imported: HashMap<String, String> = uses
        .iter()
        .filter(|(_, name, _)| name != "*" && name != "_")
        .map(|(path, name, _)| (name.clone(), path.clone()))
        .collect();
    let mut out: Vec<PathRef> = uses
        .iter()
        .map(|(path, _, line)| PathRef {
            path: path.clone(),
            line: *line,
        })
        .collect();
    let bytes = code.as_bytes();
    let mut i = 0;
    while let Some(p) = code[i..].find("::").map(|p| i + p) {
        i = p + 2;
        if use_spans.iter().any(|&(s, e)| p >= s && p <= e) {
            continue;
        }
        // The first segment: the identifier right before `::`, unless it is itself preceded
        // by `::` (then this is the middle of a path already seen).
        let start = code[..p]
            .char_indices()
            .rev()
            .take_while(|(_, ch)| is_ident_char(*ch))
            .last()
            .map_or(p, |(s, _)| s);
        if start == p || (start >= 2 && &bytes[start - 2..start] == b"::") {
            continue;
        }
        let mut end = p;
        loop {
            let rest = &code[end..];
            let Some(after) = rest.strip_prefix("::") else {
                break;
            };
            let len = after
                .find(|ch: char| !is_ident_char(ch))
                .unwrap_or(after.len());
            if len == 0 {
                break;
            }
            end += 2 + len;
        }
        let module = module_at(file_module, &mods, start);
        out.push(PathRef {
            path: resolve(&code[start..end], &module, &imported),
            line: line_of(code, start),
        });
    }
    out
}

/// Whether `path` is `prefix` or inside it (segment-wise).
fn under(path: &str, prefix: &str) -> bool {
    path == prefix || path.starts_with(&format!("{prefix}::"))
}

// ---------------------------------------------------------------------------------------
// Rules
// ---------------------------------------------------------------------------------------

/// One broken rule at one place.
#[derive(Clone, Debug, PartialEq)]
struct Violation {
    rule: &'static str,
    file: String,
    line: usize,
    text: String,
    why: String,
}

/// A source file: its path relative to the package, its text, and its code view.
struct Source {
    rel: String,
    text: String,
    code: String,
}

impl Source {
    fn new(rel: &str, text: &str) -> Source {
        Source {
            rel: rel.to_string(),
            text: text.to_string(),
            code: code_view(text),
        }
    }

    fn violation(&self, rule: &'static str, line: usize, why: String) -> Violation {
        Violation {
            rule,
            file: self.rel.clone(),
            line,
            text: self
                .text
                .lines()
                .nth(line.saturating_sub(1))
                .unwrap_or("")
                .trim()
                .to_string(),
            why,
        }
    }

    fn in_dir(&self, dir: &str) -> bool {
        self.rel.starts_with(dir)
    }
}

/// Module prefixes (or external crates) a file must not refer to, with the reason.
fn forbidden(rel: &str) -> Vec<(&'static str, &'static str, &'static str)> {
    let mut out = Vec::new();
    if rel == "src/solver.rs" {
        for m in [
            "crate::network",
            "crate::chip",
            "crate::format",
            "crate::analysis",
            "crate::report",
            "crate::plots",
            "crate::section",
        ] {
            out.push(("solver-pure", m, "the solver sees only an assembled system"));
        }
    }
    if rel.starts_with("src/section/") {
        for m in [
            "crate::network",
            "crate::chip",
            "crate::format",
            "crate::report",
            "crate::plots",
            "petgraph",
        ] {
            out.push((
                "section-pure",
                m,
                "sections know nothing of graphs or files",
            ));
        }
    }
    if rel == "src/network.rs" || rel.starts_with("src/analysis/") {
        for m in [
            "crate::chip::Chip",
            "crate::Chip",
            "crate::format",
            "crate::report",
            "crate::plots",
            "crate::commands",
        ] {
            out.push((
                "model-below-chip",
                m,
                "the network and its analyses see no declared chip, files or output",
            ));
        }
    }
    // The layers above the model import downwards only: the chip knows no file format,
    // pictures no report, reports no command, outcomes neither.
    let layer = |out: &mut Vec<_>, files: bool, mods: &[&'static str], why: &'static str| {
        if files {
            for m in mods {
                out.push(("layers-down", *m, why));
            }
        }
    };
    layer(
        &mut out,
        rel.starts_with("src/chip/"),
        &[
            "crate::format",
            "crate::report",
            "crate::plots",
            "crate::commands",
        ],
        "the declared chip is a model, read by the file format, not the reverse",
    );
    layer(
        &mut out,
        rel.starts_with("src/plots/"),
        &["crate::report", "crate::commands", "crate::format"],
        "pictures draw a chip and its results; the report embeds pictures, not the reverse",
    );
    layer(
        &mut out,
        rel.starts_with("src/report/") || rel == "src/outcome.rs",
        &["crate::commands"],
        "reports render outcomes; commands produce them",
    );
    out
}

fn import_rules(src: &Source) -> Vec<Violation> {
    let rules = forbidden(&src.rel);
    if rules.is_empty() {
        return vec![];
    }
    let module = module_path(&src.rel);
    let mut out: Vec<Violation> = Vec::new();
    for r in paths(&src.code, &module) {
        for &(rule, prefix, why) in &rules {
            // A glob import of the parent of a forbidden item brings the item in too.
            let glob_of_parent = r
                .path
                .strip_suffix("::*")
                .is_some_and(|parent| prefix.rsplit_once("::").is_some_and(|(p, _)| p == parent));
            if under(&r.path, prefix) || glob_of_parent {
                let v = src.violation(rule, r.line, format!("refers to `{}`: {why}", r.path));
                if !out.contains(&v) {
                    out.push(v);
                }
            }
        }
    }
    out
}

/// Identifiers that mean serde.
const SERDE_WORDS: &[&str] = &[
    "serde",
    "serde_json",
    "serde_yaml",
    "serde_path_to_error",
    "Serialize",
    "Deserialize",
];

fn serde_rule(src: &Source) -> Vec<Violation> {
    if src.in_dir("src/format/") || src.in_dir("src/report/") {
        return vec![];
    }
    let mut out = Vec::new();
    for word in SERDE_WORDS {
        for at in word_positions(&src.code, word) {
            let line = line_of(&src.code, at);
            out.push(src.violation(
                "serde-at-edge",
                line,
                format!("uses `{word}`: serde belongs to format/ (input) and report/ (output)"),
            ));
        }
    }
    out
}

fn main_rule(src: &Source) -> Vec<Violation> {
    if src.rel != "src/main.rs" && src.rel != "src/cli.rs" {
        return vec![];
    }
    let mut out = Vec::new();
    let lines = src.text.lines().count();
    if src.rel == "src/main.rs" && lines > MAIN_MAX_LINES {
        out.push(Violation {
            rule: "main-thin",
            file: src.rel.clone(),
            line: lines,
            text: String::new(),
            why: format!("has {lines} lines, more than {MAIN_MAX_LINES}: main.rs is the CLI only"),
        });
    }
    for r in paths(&src.code, &module_path(&src.rel)) {
        if under(&r.path, "std::fs") {
            out.push(src.violation(
                "main-no-fs",
                r.line,
                format!("refers to `{}`: file I/O belongs to the library", r.path),
            ));
        }
    }
    out
}

fn unwrap_rule(src: &Source) -> Vec<Violation> {
    let code = without_test_items(&src.code);
    let mut out = Vec::new();
    for at in word_positions(&code, "unwrap") {
        let before = code[..at].trim_end();
        let after = code[at + "unwrap".len()..].trim_start();
        let call = after
            .strip_prefix('(')
            .is_some_and(|a| a.trim_start().starts_with(')'));
        if before.ends_with('.') && call {
            out.push(src.violation(
                "no-unwrap",
                line_of(&code, at),
                "calls `.unwrap()`: return an error with a place instead".into(),
            ));
        }
    }
    out
}

fn check(src: &Source) -> Vec<Violation> {
    let mut out = import_rules(src);
    out.extend(serde_rule(src));
    out.extend(main_rule(src));
    out.extend(unwrap_rule(src));
    out
}

fn allowed(v: &Violation) -> bool {
    ALLOWED
        .iter()
        .any(|&(rule, file, text)| rule == v.rule && file == v.file && text == v.text)
}

// ---------------------------------------------------------------------------------------
// The tree
// ---------------------------------------------------------------------------------------

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap_or_else(|e| panic!("cannot read {}: {e}", dir.display()))
        .map(|e| e.expect("directory entry").path())
        .collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            rust_files(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

fn sources() -> Vec<Source> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut files = Vec::new();
    rust_files(&root.join("src"), &mut files);
    files
        .iter()
        .map(|p| {
            let rel = p
                .strip_prefix(root)
                .expect("inside the package")
                .to_string_lossy()
                .replace('\\', "/");
            let text = std::fs::read_to_string(p)
                .unwrap_or_else(|e| panic!("cannot read {}: {e}", p.display()));
            Source::new(&rel, &text)
        })
        .collect()
}

#[test]
fn the_source_tree_keeps_its_architecture() {
    let sources = sources();
    for must in [
        "src/solver.rs",
        "src/main.rs",
        "src/network.rs",
        "src/lib.rs",
    ] {
        assert!(
            sources.iter().any(|s| s.rel == must),
            "{must} not found: the tidy test reads the wrong tree"
        );
    }
    assert!(sources.iter().any(|s| s.in_dir("src/analysis/")));
    assert!(sources.iter().any(|s| s.in_dir("src/section/")));
    let all: Vec<Violation> = sources.iter().flat_map(check).collect();
    let broken: Vec<String> = all
        .iter()
        .filter(|v| !allowed(v))
        .map(|v| {
            format!(
                "{}:{}: [{}] {} — `{}`",
                v.file, v.line, v.rule, v.why, v.text
            )
        })
        .collect();
    let stale: Vec<String> = ALLOWED
        .iter()
        .filter(|&&(rule, file, text)| {
            !all.iter()
                .any(|v| v.rule == rule && v.file == file && v.text == text)
        })
        .map(|(rule, file, text)| {
            format!("{file}: [{rule}] `{text}` is allowed but no longer occurs")
        })
        .collect();
    assert!(
        broken.is_empty() && stale.is_empty(),
        "architecture rules broken:\n{}\n{}",
        broken.join("\n"),
        stale.join("\n")
    );
}

// ---------------------------------------------------------------------------------------
// The checker itself: each rule catches what it is meant to, and nothing in comments,
// strings or tests.
// ---------------------------------------------------------------------------------------

fn rules_hit(rel: &str, text: &str) -> Vec<(&'static str, usize)> {
    check(&Source::new(rel, text))
        .into_iter()
        .map(|v| (v.rule, v.line))
        .collect()
}

#[test]
fn the_lexer_blanks_comments_strings_and_chars_but_not_lifetimes() {
    let text = "let a = \"crate::network \\\" x\"; // crate::chip\n/* a /* nested */ b */ 'x' '\\'' \nfn f<'a>(x: &'a str) { r#\"serde \"# }";
    let code = code_view(text);
    assert_eq!(code.lines().count(), text.lines().count());
    assert!(!code.contains("network") && !code.contains("chip") && !code.contains("nested"));
    assert!(!code.contains("serde"));
    assert!(code.contains("fn f<'a>(x: &'a str)"));
}

#[test]
fn use_trees_expand_and_resolve() {
    let mut got: Vec<String> = expand_use("crate::{a, b::{c, d as e}, f::*, g::{self}}")
        .into_iter()
        .map(|(p, n)| format!("{p}={n}"))
        .collect();
    got.sort();
    assert_eq!(
        got,
        [
            "crate::a=a",
            "crate::b::c=c",
            "crate::b::d=e",
            "crate::f::*=*",
            "crate::g=g"
        ]
    );
    let module = module_path("src/section/numeric.rs");
    assert_eq!(module, ["crate", "section", "numeric"]);
    let none = HashMap::new();
    assert_eq!(
        resolve("super::super::network::X", &module, &none),
        "crate::network::X"
    );
}

#[test]
fn each_rule_catches_its_violation() {
    assert_eq!(
        rules_hit("src/solver.rs", "use crate::network::Network;\n"),
        [("solver-pure", 1)]
    );
    assert_eq!(
        rules_hit(
            "src/solver.rs",
            "use crate::{units, analysis::kirchhoff};\n"
        ),
        [("solver-pure", 1)]
    );
    assert_eq!(
        rules_hit(
            "src/solver.rs",
            "fn f() {\n  let x = crate::report::fmt();\n}\n"
        ),
        [("solver-pure", 2)]
    );
    assert_eq!(
        rules_hit(
            "src/section/numeric.rs",
            "use super::super::plots::Figure;\n"
        ),
        [("section-pure", 1)]
    );
    assert!(rules_hit("src/solver.rs", "mod tests {\n    use super::*;\n}\n").is_empty());
    assert_eq!(
        rules_hit(
            "src/solver.rs",
            "mod a {\n  mod b {\n    use super::super::super::plots;\n  }\n}\n"
        ),
        [("solver-pure", 3)]
    );
    assert_eq!(
        rules_hit("src/section/mod.rs", "fn g(x: petgraph::Graph) {}\n"),
        [("section-pure", 1)]
    );
    assert_eq!(
        rules_hit(
            "src/analysis/x.rs",
            "use crate::chip;\nfn f(c: &chip::Chip) {}\n"
        ),
        [("model-below-chip", 2)]
    );
    assert_eq!(
        rules_hit("src/analysis/x.rs", "fn f(c: &crate::Chip) {}\n"),
        [("model-below-chip", 1)]
    );
    assert_eq!(
        rules_hit("src/analysis/x.rs", "use crate::chip::*;\n"),
        [("model-below-chip", 1)]
    );
    assert!(rules_hit(
        "src/analysis/x.rs",
        "pub use crate::chip::design::{Design, Target};\n"
    )
    .is_empty());
    assert_eq!(
        rules_hit("src/network.rs", "\n\nuse crate::commands;\n"),
        [("model-below-chip", 3)]
    );
    assert_eq!(
        rules_hit(
            "src/commands.rs",
            "#[derive(serde::Serialize)]\nstruct A;\n"
        ),
        [("serde-at-edge", 1), ("serde-at-edge", 1)]
    );
    assert!(rules_hit(
        "src/report/json.rs",
        "#[derive(serde::Serialize)]\nstruct A;\n"
    )
    .is_empty());
    assert_eq!(
        rules_hit(
            "src/main.rs",
            "use std::fs;\nfn main() { fs::write(p, b); }\n"
        ),
        [("main-no-fs", 1), ("main-no-fs", 2)]
    );
    let long: String = "fn a() {}\n".repeat(MAIN_MAX_LINES + 1);
    assert_eq!(
        rules_hit("src/main.rs", &long),
        [("main-thin", MAIN_MAX_LINES + 1)]
    );
    assert_eq!(
        rules_hit("src/units.rs", "fn f() {\n  x.unwrap ( );\n}\n"),
        [("no-unwrap", 2)]
    );
}

#[test]
fn comments_strings_and_tests_are_not_violations() {
    let text = "//! uses serde and crate::network::Network\n\
                /// ```\n/// x.unwrap();\n/// ```\n\
                fn f() -> &'static str { \"crate::chip::Chip .unwrap()\" }\n\
                #[cfg(test)]\nmod tests {\n    fn t() { Some(1).unwrap(); }\n}\n\
                #[cfg(test)]\nuse crate::network::Network;\n\
                fn g() -> Option<u8> { x.unwrap_or(1) }\n";
    // Imports count in test modules too: a test of the solver must not need a chip either.
    assert_eq!(rules_hit("src/solver.rs", text), [("solver-pure", 11)]);
    assert!(rules_hit("src/units.rs", text).is_empty());
}
