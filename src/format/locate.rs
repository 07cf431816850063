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
            Some((start, end)) => {
                found = Some(start);
                pos = end;
            }
            None => break,
        }
    }
    found.map(|i| line_col(text, i))
}

/// Where `key` is written as a mapping key at or after `from`: the start of the key (its
/// opening quote, if quoted) and the end (past its closing quote).
fn find_key(text: &str, key: &str, from: usize) -> Option<(usize, usize)> {
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
            return Some((open, close));
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

    #[test]
    fn a_repeated_key_is_found_at_its_second_place() {
        // The duplicate-name errors look for the name twice; a quoted JSON key must not match
        // its own first place again.
        let json = "{\"nodes\": {\"a\": {\"pressure\": \"1 bar\"},\n  \"b\": {},\n  \"a\": {}}}";
        assert_eq!(locate(json, &["nodes", "a", "a"]), Some((3, 3)));
        let yaml = "nodes:\n  a: {pressure: 1 bar}\n  b: {}\n  a: {}\n";
        assert_eq!(locate(yaml, &["nodes", "a", "a"]), Some((4, 3)));
    }
}
