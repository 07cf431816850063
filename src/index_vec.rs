//! Vectors indexed by typed ids: `network.nodes[node_id]`, never `network.nodes[]`.
//!
//! [`IdVec<I, T>`] dereferences to a slice, so iteration and slice methods work as on a
//! `Vec`; indexing takes the id type `I`, which keeps a channel id from indexing the nodes.

use std::marker::PhantomData;
use std::ops::{Deref, DerefMut, Index, IndexMut};

/// An id that is a position in an [`IdVec`].
pub trait Id: Copy {
    fn index(self) -> usize;
    fn from_index(i: usize) -> Self;
}

/// A `Vec<T>` indexed by `I`.
#[derive(Clone, PartialEq)]
pub struct IdVec<I, T> {
    items: Vec<T>,
    id: PhantomData<fn(I)>,
}

impl<I: Id, T> IdVec<I, T> {
    pub fn new() -> Self {
        Self::from(Vec::new())
    }

    /// Append an item; its id.
    pub fn push(&mut self, item: T) -> I {
        self.items.push(item);
        I::from_index(self.items.len() - 1)
    }

    /// (id, item) pairs in order.
    pub fn iter_ids(&self) -> impl Iterator<Item = (I, &T)> + '_ {
        self.items
            .iter()
            .enumerate()
            .map(|(i, t)| (I::from_index(i), t))
    }

    /// Every id in order.
    pub fn ids(&self) -> impl Iterator<Item = I> + use<I, T> {
        (0..self.items.len()).map(I::from_index)
    }

    pub fn reserve(&mut self, n: usize) {
        self.items.reserve(n);
    }

    pub fn into_vec(self) -> Vec<T> {
        self.items
    }
}

impl<I: Id, T> Default for IdVec<I, T> {
    fn default() -> Self {
        Self::new()
    }
}

impl<I, T> From<Vec<T>> for IdVec<I, T> {
    fn from(items: Vec<T>) -> Self {
        IdVec {
            items,
            id: PhantomData,
        }
    }
}

impl<I, T> FromIterator<T> for IdVec<I, T> {
    fn from_iter<It: IntoIterator<Item = T>>(iter: It) -> Self {
        Self::from(iter.into_iter().collect::<Vec<T>>())
    }
}

impl<I, T> Deref for IdVec<I, T> {
    type Target = [T];
    fn deref(&self) -> &[T] {
        &self.items
    }
}

impl<I, T> DerefMut for IdVec<I, T> {
    fn deref_mut(&mut self) -> &mut [T] {
        &mut self.items
    }
}

impl<I: Id, T> Index<I> for IdVec<I, T> {
    type Output = T;
    fn index(&self, id: I) -> &T {
        &self.items[id.index()]
    }
}

impl<I: Id, T> IndexMut<I> for IdVec<I, T> {
    fn index_mut(&mut self, id: I) -> &mut T {
        &mut self.items[id.index()]
    }
}

impl<'a, I, T> IntoIterator for &'a IdVec<I, T> {
    type Item = &'a T;
    type IntoIter = std::slice::Iter<'a, T>;
    fn into_iter(self) -> Self::IntoIter {
        self.items.iter()
    }
}

impl<I, T: std::fmt::Debug> std::fmt::Debug for IdVec<I, T> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        self.items.fmt(f)
    }
}

/// Implement [`Id`] for a `struct X(pub usize)` id.
#[macro_export]
macro_rules! impl_id {
    ($t:ty) => {
        impl $crate::index_vec::Id for $t {
            fn index(self) -> usize {
                self.0
            }
            fn from_index(i: usize) -> Self {
                Self(i)
            }
        }
    };
}
