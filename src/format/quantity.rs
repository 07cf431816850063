//! Serde adapters for values with units: the only place where `"100 um"` meets serde.

use crate::units::{bare_number_si, parse_si, Quantity};
use serde::de::{self, Deserializer, Visitor};
use serde::Deserialize;
use std::fmt;
use std::marker::PhantomData;

/// A quantity read from a chip file: a string with a unit (a bare 0 is accepted where
/// unambiguous).
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Q<T>(pub T);

impl<'de, T: Quantity> Deserialize<'de> for Q<T> {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        struct V<T>(PhantomData<T>);
        impl<T: Quantity> Visitor<'_> for V<T> {
            type Value = Q<T>;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(
                    f,
                    "{} with a unit, e.g. '{}'",
                    T::DIMENSION.noun(),
                    T::DIMENSION.example()
                )
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Q<T>, E> {
                parse_si(v, T::DIMENSION)
                    .map(|x| Q(T::from_si(x)))
                    .map_err(E::custom)
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Q<T>, E> {
                bare_number_si(v, T::DIMENSION)
                    .map(|x| Q(T::from_si(x)))
                    .map_err(E::custom)
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Q<T>, E> {
                self.visit_f64(v as f64)
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Q<T>, E> {
                self.visit_f64(v as f64)
            }
        }
        deserializer.deserialize_any(V(PhantomData))
    }
}
