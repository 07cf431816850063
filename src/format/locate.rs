//! Find where a key path sits in chip-file text, for errors found after parsing
//! (unknown node, floating part, ...).
//!
//! serde does not keep positions once a value is built, so this searches the text: each key
//! of the path is looked for, in order, after the previous one, as a mapping key (`key:` in
//! YAML block or flow style, `"key":` in JSON). Chip files list names once as keys, so the
//! first match after the parent is the right one in practice; when a key is not found the
//! deepest found parent is reported.

/// 1-based (line, column) of the deepest key of `path` found in `text`.
///
/// ```
/// use rillnet::format::locate;
/// let text = "nodes:\n  a: {}\nchannels:\n  c1: {from: a, to: b}\n";
/// assert_eq!(locate(text, &["channels", "c1", "to"]), Some((4, 17)));
/// ```
pub fn locate(text: &str, path: &[&str]) -> Option<(usize, usize)> {
    let mut pos = 0;
    let mut found = None;
    for key in path {
        match find_key(text, key, pos) {
            Some(i) => {
                found = Some(i);
                pos = i + key.len();
            }
            None => break,
        }
    }
    found.map(|i| line_col(text, i))
}

/// Byte offset of the key `path` ends with, only if every key of the path is found.
pub fn locate_offset(text: &str, path: &[&str]) -> Option<usize> {
    let mut pos = 0;
    let mut found = None;
    for key in path {
        let i = find_key(text, key, pos)?;
        found = Some(i);
        pos = i + key.len();
    }
    found
}

/// Replace the value of the key at `path` (flow-style YAML or JSON) with `new_value`, keeping
/// everything else — comments, order, layout — as it was. `None` when the key is missing or
/// its value is a block (multi-line) mapping.
pub fn replace_value(text: &str, path: &[&str], new_value: &str) -> Option<String> {
    let key_at = locate_offset(text, path)?;
    let bytes = text.as_bytes();
    let mut i = key_at + text[key_at..].find(':')? + 1;
    while i < bytes.len() && (bytes[i] == b' ' || bytes[i] == b'\t') {
        i += 1;
    }
    let start = i;
    let end = match bytes.get(i)? {
        b'"' => i + 1 + text[i + 1..].find('"')? + 1,
        b'{' | b'[' => {
            let (open, close) = if bytes[i] == b'{' {
                (b'{', b'}')
            } else {
                (b'[', b']')
            };
            let mut depth = 0;
            let mut j = i;
            loop {
                match bytes.get(j)? {
                    c if *c == open => depth += 1,
                    c if *c == close => {
                        depth -= 1;
                        if depth == 0 {
                            break j + 1;
                        }
                    }
                    _ => {}
                }
                j += 1;
            }
        }
        b'\n' | b'\r' | b'#' => return None,
        _ => {
            let mut j = i;
            while j < bytes.len() && !matches!(bytes[j], b',' | b'}' | b']' | b'\n' | b'\r') {
                if bytes[j] == b'#' && j > 0 && bytes[j - 1] == b' ' {
                    break;
                }
                j += 1;
            }
            while j > start && bytes[j - 1] == b' ' {
                j -= 1;
            }
            j
        }
    };
    Some(format!("{}{}{}", &text[..start], new_value, &text[end..]))
}

fn find_key(text: &str, key: &str, from: usize) -> Option<usize> {
    if key.is_empty() {
        return None;
    }
    let bytes = text.as_bytes();
    let mut start = from;
    while let Some(rel) = text.get(start..)?.find(key) {
        let i = start + rel;
        let end = i + key.len();
        // Optional closing quote, matching an opening one.
        let (open, close) = match (i.checked_sub(1).map(|j| bytes[j]), bytes.get(end)) {
            (Some(q @ (b'"' | b'\'')), Some(&c)) if c == q => (i - 1, end + 1),
            _ => (i, end),
        };
        let before_ok = open == 0
            || matches!(
                bytes[open - 1],
                b' ' | b'\t' | b'\n' | b'\r' | b'{' | b',' | b'-'
            );
        let mut k = close;
        while k < bytes.len() && (bytes[k] == b' ' || bytes[k] == b'\t') {
            k += 1;
        }
        let after_ok = k < bytes.len() && bytes[k] == b':';
        if before_ok && after_ok && !in_comment(text, i) {
            return Some(open);
        }
        start = i + 1;
        while !text.is_char_boundary(start) {
            start += 1;
        }
    }
    None
}

fn in_comment(text: &str, i: usize) -> bool {
    let line_start = text[..i].rfind('\n').map_or(0, |p| p + 1);
    text[line_start..i].contains('#')
}

fn line_col(text: &str, i: usize) -> (usize, usize) {
    let before = &text[..i];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |p| p + 1);
    (line, before[line_start..].chars().count() + 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replaces_flow_and_json_values() {
        let yaml = "nodes:\n  a: {pressure: 100 mbar, adjust: {min: 0 Pa, max: 1 bar}}  # inlet\n";
        let out = replace_value(yaml, &["nodes", "a", "pressure"], "123.5 mbar").unwrap();
        assert_eq!(
            out,
            "nodes:\n  a: {pressure: 123.5 mbar, adjust: {min: 0 Pa, max: 1 bar}}  # inlet\n"
        );
        let json = r#"{"channels": {"c": {"length": "1 mm", "section": {"shape": "circle"}}}}"#;
        let out = replace_value(
            json,
            &["channels", "c", "section"],
            r#"{"shape": "rectangle"}"#,
        )
        .unwrap();
        assert!(out.contains(r#""section": {"shape": "rectangle"}"#));
        let out = replace_value(json, &["channels", "c", "length"], "\"2 mm\"").unwrap();
        assert!(out.contains(r#""length": "2 mm""#));
        assert!(replace_value("a:\n  b: 1\n", &["a"], "x").is_none());
    }

    #[test]
    fn finds_block_flow_and_json_keys() {
        let yaml = "# nodes: in a comment\nnodes:\n  tee: {}\n  to: {}\nchannels:\n  c3:\n    from: tee\n    to: drain\n";
        assert_eq!(locate(yaml, &["nodes", "tee"]), Some((3, 3)));
        assert_eq!(locate(yaml, &["channels", "c3", "to"]), Some((8, 5)));
        let json = r#"{"channels": {"c3": {"from": "a", "to": "b"}}}"#;
        assert_eq!(locate(json, &["channels", "c3", "to"]), Some((1, 35)));
        // Missing leaf: the deepest parent found.
        assert_eq!(locate(yaml, &["channels", "c3", "length"]), Some((6, 3)));
        assert_eq!(locate(yaml, &["absent"]), None);
    }
}
