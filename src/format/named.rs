//! An ordered name → value mapping that keeps every entry, duplicates included.
//!
//! serde's map types keep the last of two equal keys silently; a chip file with two nodes
//! called `tee` is a mistake the designer must hear about. Keeping both lets the network
//! builder refuse the second one, and the error point at the second one's line.

use serde::de::{self, Deserialize, DeserializeSeed, Deserializer, MapAccess, Visitor};
use std::fmt;
use std::marker::PhantomData;

/// Entries in file order.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Named<T>(pub Vec<(String, T)>);

impl<T> Default for Named<T> {
    fn default() -> Self {
        Named(Vec::new())
    }
}

impl<'de, T: Deserialize<'de>> Deserialize<'de> for Named<T> {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V<T>(PhantomData<T>);
        impl<'de, T: Deserialize<'de>> Visitor<'de> for V<T> {
            type Value = Named<T>;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a mapping of names to entries")
            }
            fn visit_unit<E: de::Error>(self) -> Result<Named<T>, E> {
                Ok(Named(Vec::new()))
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Named<T>, A::Error> {
                let mut out = Vec::with_capacity(map.size_hint().unwrap_or(0).min(1 << 20));
                while let Some(key) = map.next_key_seed(NameSeed)? {
                    let value = map.next_value::<T>()?;
                    out.push((key, value));
                }
                Ok(Named(out))
            }
        }
        deserializer.deserialize_map(V(PhantomData))
    }
}

/// Names may be written as strings or as plain numbers (`1: {...}`); both become text.
struct NameSeed;

impl<'de> DeserializeSeed<'de> for NameSeed {
    type Value = String;
    fn deserialize<D: Deserializer<'de>>(self, deserializer: D) -> Result<String, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = String;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a name")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<String, E> {
                if v.trim().is_empty() {
                    return Err(E::custom("a name must not be empty"));
                }
                Ok(v.to_string())
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<String, E> {
                Ok(v.to_string())
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<String, E> {
                Ok(v.to_string())
            }
        }
        deserializer.deserialize_any(V)
    }
}
