//! `nodes:` and `channels:` as read, kept compact: a chip of 10⁶ channels holds its entries
//! between parsing and building the network, and a `Vec` of full specs (each name, `from` and
//! `to` a `String` of its own, every optional key a field) took about 380 bytes per entry.
//!
//! A [`Table`] keeps every name (and the node names a channel refers to) in one text arena
//! and each entry as a [`Row`]: the common keys inline, the rare ones boxed. Entries are
//! read one at a time through the derived spec type, so serde's messages, line numbers and
//! the refusal of unknown keys are those of the spec; duplicates are kept, in file order, for
//! the builder to refuse (as with [`super::Named`]).

use serde::de::{self, Deserialize, DeserializeSeed, Deserializer, MapAccess, Visitor};
use std::fmt;
use std::marker::PhantomData;

/// A string in a [`Table`]'s text arena.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Span {
    start: u32,
    len: u32,
}

/// One text arena for the names of a table.
#[derive(Debug, Default)]
pub(crate) struct Arena(String);

impl Arena {
    /// Append `s`; `None` when the arena would pass 4 GiB (a chip file is at most 1 GiB,
    /// so only alias expansion could get there, and the YAML guard refuses that first).
    pub(crate) fn push(&mut self, s: &str) -> Option<Span> {
        let start = u32::try_from(self.0.len()).ok()?;
        let len = u32::try_from(s.len()).ok()?;
        start.checked_add(len)?;
        self.0.push_str(s);
        Some(Span { start, len })
    }

    pub(crate) fn get(&self, span: Span) -> &str {
        let start = span.start as usize;
        self.0.get(start..start + span.len as usize).unwrap_or("")
    }
}

/// How an entry of a table is kept: built from its spec, storing its strings in the arena.
pub(crate) trait Row: Sized {
    type Spec: for<'de> Deserialize<'de>;
    fn from_spec(spec: Self::Spec, arena: &mut Arena) -> Option<Self>;
}

/// Entries in file order, names in one arena.
#[derive(Debug)]
pub(crate) struct Table<T> {
    arena: Arena,
    names: Vec<Span>,
    rows: Vec<T>,
}

impl<T> Default for Table<T> {
    fn default() -> Self {
        Table {
            arena: Arena::default(),
            names: Vec::new(),
            rows: Vec::new(),
        }
    }
}

impl<T> Table<T> {
    pub(crate) fn len(&self) -> usize {
        self.rows.len()
    }

    /// (name, entry) in file order.
    pub(crate) fn iter(&self) -> impl Iterator<Item = (&str, &T)> + '_ {
        self.names
            .iter()
            .zip(&self.rows)
            .map(|(n, r)| (self.arena.get(*n), r))
    }

    /// A string the entries refer to (a channel's `from`, `to` or section name).
    pub(crate) fn text(&self, span: Span) -> &str {
        self.arena.get(span)
    }
}

const TOO_LARGE: &str = "the names in this table pass 4 GiB; split the chip";

impl<'de, T: Row> Deserialize<'de> for Table<T> {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V<T>(PhantomData<T>);
        impl<'de, T: Row> Visitor<'de> for V<T> {
            type Value = Table<T>;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a mapping of names to entries")
            }
            fn visit_unit<E: de::Error>(self) -> Result<Table<T>, E> {
                Ok(Table::default())
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Table<T>, A::Error> {
                let mut table = Table::<T>::default();
                let hint = map.size_hint().unwrap_or(0).min(1 << 20);
                table.names.reserve(hint);
                table.rows.reserve(hint);
                while let Some(name) = map.next_key_seed(NameSeed(&mut table.arena))? {
                    let name = name.ok_or_else(|| de::Error::custom(TOO_LARGE))?;
                    let spec = map.next_value::<T::Spec>()?;
                    let row = T::from_spec(spec, &mut table.arena)
                        .ok_or_else(|| de::Error::custom(TOO_LARGE))?;
                    table.names.push(name);
                    table.rows.push(row);
                }
                Ok(table)
            }
        }
        deserializer.deserialize_map(V(PhantomData))
    }
}

/// A name written into the arena. Names may be written as strings or as plain numbers
/// (`1: {...}`); both become text (as in [`super::Named`]).
struct NameSeed<'a>(&'a mut Arena);

impl<'de> DeserializeSeed<'de> for NameSeed<'_> {
    type Value = Option<Span>;
    fn deserialize<D: Deserializer<'de>>(self, deserializer: D) -> Result<Option<Span>, D::Error> {
        struct V<'a>(&'a mut Arena);
        impl Visitor<'_> for V<'_> {
            type Value = Option<Span>;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a name")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Option<Span>, E> {
                if v.trim().is_empty() {
                    return Err(E::custom("a name must not be empty"));
                }
                Ok(self.0.push(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Option<Span>, E> {
                Ok(self.0.push(&v.to_string()))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Option<Span>, E> {
                Ok(self.0.push(&v.to_string()))
            }
        }
        deserializer.deserialize_any(V(self.0))
    }
}

#[cfg(test)]
mod tests {
    use crate::format::{parse_chip, Syntax};

    #[test]
    fn plain_and_full_entries_and_numeric_names_read_back() {
        let text = "\
fluid: {viscosity: 1 mPa*s, density: 1000 kg/m^3}
sections:
  s: {shape: circle, diameter: 100 um}
nodes:
  1: {pressure: 100 mbar}
  j: {at: [1 mm, 2 mm]}
  out: {pressure: 0 Pa, elevation: 3 mm}
channels:
  a: {from: 1, to: j, section: s, length: 5 mm}
  b: {from: j, to: out, section: {shape: circle, diameter: 80 um}, length: 7 mm,
      path: [[2 mm, 2 mm], [2 mm, 4 mm]], shear_limit: 2 Pa}
";
        let chip = parse_chip(text, "t.yaml", Syntax::Yaml).unwrap();
        let net = &chip.network;
        let names: Vec<&str> = net.nodes.iter().map(|n| n.name.as_str()).collect();
        assert_eq!(names, ["1", "j", "out"]);
        assert_eq!(net.nodes[crate::network::NodeId(2)].elevation.si(), 3e-3);
        assert_eq!(chip.layout.node_at[1], Some([1e-3, 2e-3]));
        assert_eq!(chip.layout.node_at[0], None);
        let (a, b) = (
            &net.channels[crate::network::ChannelId(0)],
            &net.channels[crate::network::ChannelId(1)],
        );
        assert_eq!((a.from.0, a.to.0, b.from.0, b.to.0), (0, 1, 1, 2));
        assert_eq!(net.sections[a.section].name, "s");
        assert_eq!(net.sections[b.section].name, "b.section");
        assert_eq!(b.length.si(), 7e-3);
        assert_eq!(b.shear_limit.map(|p| p.si()), Some(2.0));
        assert!(chip.layout.channel_path[0].is_empty());
        assert_eq!(
            chip.layout.channel_path[1],
            vec![[2e-3, 2e-3], [2e-3, 4e-3]]
        );
    }
}
