//! Refuse YAML whose aliases would expand enormously ("billion laughs").
//!
//! The YAML deserializer replays an anchored node once per alias. Its own guard counts
//! replays, not their size, so one large anchor referenced a few thousand times still
//! expands to gigabytes. Before deserializing, this pass walks the event stream (without
//! expanding anything), computes the expanded size of every anchored node, and refuses the
//! file when the aliases would add more than [`EXPANSION_BUDGET`] events beyond
//! [`EXPANSION_FACTOR`] times the file's own size.

use yaml_rust2::parser::{Event, MarkedEventReceiver, Parser};
use yaml_rust2::scanner::Marker;

/// Expanded events the aliases may add regardless of file size.
pub const EXPANSION_BUDGET: u64 = 1_000_000;
/// Expanded events the aliases may add per event written in the file.
pub const EXPANSION_FACTOR: u64 = 10;

/// An alias expansion that would exceed the budget.
#[derive(Debug, Clone, PartialEq)]
pub struct Explosion {
    pub line: usize,
    pub column: usize,
    pub expanded_events: u64,
    pub written_events: u64,
}

#[derive(Default)]
struct Counter {
    /// Expanded size (in events) of each anchor id.
    anchor_size: Vec<u64>,
    /// Open containers: (anchor id, expanded size so far).
    open: Vec<(usize, u64)>,
    written: u64,
    expanded: u64,
    first_alias: Option<Marker>,
}

impl Counter {
    fn add(&mut self, size: u64) {
        if let Some(top) = self.open.last_mut() {
            top.1 = top.1.saturating_add(size);
        }
    }
    fn set_anchor(&mut self, id: usize, size: u64) {
        if id == 0 {
            return;
        }
        if self.anchor_size.len() <= id {
            self.anchor_size.resize(id + 1, 0);
        }
        self.anchor_size[id] = size;
    }
}

impl MarkedEventReceiver for Counter {
    fn on_event(&mut self, ev: Event, mark: Marker) {
        match ev {
            Event::Scalar(_, _, anchor, _) => {
                self.written += 1;
                self.add(1);
                self.set_anchor(anchor, 1);
            }
            Event::SequenceStart(anchor, _) | Event::MappingStart(anchor, _) => {
                self.written += 1;
                self.open.push((anchor, 1));
            }
            Event::SequenceEnd | Event::MappingEnd => {
                self.written += 1;
                if let Some((anchor, size)) = self.open.pop() {
                    let size = size.saturating_add(1);
                    self.add(size);
                    self.set_anchor(anchor, size);
                }
            }
            Event::Alias(id) => {
                let size = self.anchor_size.get(id).copied().unwrap_or(1);
                self.expanded = self.expanded.saturating_add(size);
                self.add(size);
                if self.first_alias.is_none() {
                    self.first_alias = Some(mark);
                }
            }
            _ => {}
        }
    }
}

/// Deepest flow nesting (`[`, `{`) accepted; chip files nest a handful of levels. Deeper
/// documents make the deserializer slow (time grows with the square of the depth).
pub const MAX_FLOW_DEPTH: usize = 64;
/// Widest block indentation accepted, in columns (block nesting costs at least one column a
/// level).
pub const MAX_INDENT: usize = 512;

/// Why a text is refused before deserializing.
#[derive(Debug, Clone, PartialEq)]
pub enum Refusal {
    /// Aliases would expand too much.
    Explosion(Explosion),
    /// The text has anchors and aliases, but the event reader cannot read it, so its
    /// expansion cannot be bounded.
    Unchecked {
        line: usize,
        column: usize,
        reason: String,
    },
    /// Nesting deeper than [`MAX_FLOW_DEPTH`] or indentation wider than [`MAX_INDENT`].
    TooDeep { line: usize, column: usize },
}

/// Linear scan for flow nesting depth and block indentation (quotes and comments skipped).
fn check_depth(text: &str) -> Result<(), Refusal> {
    let mut depth = 0usize;
    for (l, line) in text.lines().enumerate() {
        let indent = line.len() - line.trim_start_matches([' ', '\t']).len();
        if indent > MAX_INDENT {
            return Err(Refusal::TooDeep {
                line: l + 1,
                column: MAX_INDENT + 1,
            });
        }
        let mut quote: Option<char> = None;
        for (c, ch) in line.chars().enumerate() {
            match (quote, ch) {
                (Some(q), ch) if ch == q => quote = None,
                (Some(_), _) => {}
                (None, '"' | '\'') => quote = Some(ch),
                (None, '#') => break,
                (None, '[' | '{') => {
                    depth += 1;
                    if depth > MAX_FLOW_DEPTH {
                        return Err(Refusal::TooDeep {
                            line: l + 1,
                            column: c + 1,
                        });
                    }
                }
                (None, ']' | '}') => depth = depth.saturating_sub(1),
                _ => {}
            }
        }
    }
    Ok(())
}

/// Check nesting depth and the alias expansion of `text` before it is deserialized.
pub fn check(text: &str) -> Result<(), Refusal> {
    check_depth(text)?;
    // Without an anchor there is nothing to expand: skip the extra pass.
    if !text.contains('&') {
        return Ok(());
    }
    let mut counter = Counter::default();
    let mut parser = Parser::new_from_str(text);
    if let Err(e) = parser.load(&mut counter, false) {
        // The deserializer reads some texts this reader does not (a tab before a value,
        // U+0085 or U+2028 line breaks): with aliases present, refuse rather than expand
        // blindly.
        if text.contains('*') {
            let m = e.marker();
            return Err(Refusal::Unchecked {
                line: m.line(),
                column: m.col() + 1,
                reason: e.info().to_string(),
            });
        }
        return Ok(());
    }
    let allowed = EXPANSION_BUDGET.saturating_add(counter.written.saturating_mul(EXPANSION_FACTOR));
    if counter.expanded > allowed {
        let (line, column) = counter
            .first_alias
            .map_or((1, 1), |m| (m.line(), m.col() + 1));
        return Err(Refusal::Explosion(Explosion {
            line,
            column,
            expanded_events: counter.expanded,
            written_events: counter.written,
        }));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_anchors_pass() {
        let text = "a: &x {shape: circle, diameter: 1 mm}\nb: *x\nc: *x\n";
        assert!(check(text).is_ok());
    }

    #[test]
    fn nested_laughs_are_refused() {
        let mut text = String::from("l0: &l0 [a, a, a, a, a, a, a, a, a, a]\n");
        for i in 1..9 {
            let prev = format!("*l{}", i - 1);
            let items = [prev.as_str(); 10].join(", ");
            text.push_str(&format!("l{i}: &l{i} [{items}]\n"));
        }
        let Refusal::Explosion(e) = check(&text).unwrap_err() else {
            panic!("not an explosion")
        };
        assert!(e.expanded_events > 100_000_000);
        assert_eq!(e.line, 2);
    }

    #[test]
    fn one_big_anchor_many_references_is_refused() {
        let mut text = String::from("big: &big [");
        text.push_str(&vec!["1"; 20_000].join(", "));
        text.push_str("]\nrefs:\n");
        for _ in 0..5_000 {
            text.push_str("  - *big\n");
        }
        assert!(check(&text).is_err());
    }

    #[test]
    fn deep_nesting_is_refused_in_linear_time() {
        let deep = format!("a: {}{}\n", "[".repeat(100_000), "]".repeat(100_000));
        assert!(matches!(
            check(&deep),
            Err(Refusal::TooDeep { line: 1, .. })
        ));
        let quoted = format!("a: \"{}\"\n", "[".repeat(1000));
        assert!(check(&quoted).is_ok());
        let wide = format!("a:\n{}b: 1\n", " ".repeat(MAX_INDENT + 1));
        assert!(matches!(
            check(&wide),
            Err(Refusal::TooDeep { line: 2, .. })
        ));
    }

    #[test]
    fn unreadable_text_with_aliases_is_refused() {
        // A tab before the value, or a U+2028 line break, stops this reader but not the
        // deserializer: with anchors and aliases the expansion could not be bounded.
        for sep in ["\t", "\u{2028}"] {
            let text = format!("big: &b [1, 2]\nname:{sep}*b\n");
            if let Err(e) = check(&text) {
                assert!(matches!(e, Refusal::Unchecked { .. }), "{e:?}");
            }
        }
    }
}
