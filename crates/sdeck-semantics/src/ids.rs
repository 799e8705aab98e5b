//! Typed identities of a model's declarations: a [`ParamId`], [`FactorId`], [`ShockId`]
//! or [`LetId`] is the place of its declaration in the model's list of that kind, so a
//! factor cannot be looked up among the parameters by mistake. [`IdVec`] is a list read
//! by those identities; it dereferences to a plain slice and is indexed by position too,
//! so code that walks it in order or reads it by position (the simulator's blocks of
//! states, matrices in declaration order) keeps working.

use std::fmt;
use std::marker::PhantomData;
use std::ops::{Deref, DerefMut, Index, IndexMut};

/// What the identities of each kind have in common, so that [`IdVec`] serves them all.
pub trait Id: Copy + Eq + Ord + std::hash::Hash + fmt::Debug {
    /// The identity of the item at `index` of its list.
    fn from_index(index: usize) -> Self;
    /// Its place in its list.
    fn to_index(self) -> usize;
}

macro_rules! id_types {
    ($($(#[$doc:meta])* $name:ident;)*) => {$(
        $(#[$doc])*
        ///
        /// It holds a `usize`, the index of the model's vector: a `u32` would save
        /// nothing where ids are stored (beside boxes in [`crate::Expr`], or in vectors
        /// read by position).
        #[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
        pub struct $name(usize);

        impl $name {
            /// The identity of the item at `index` of the model's list.
            pub const fn new(index: usize) -> Self {
                $name(index)
            }

            /// Its place in the model's list (for vectors and matrices in declaration
            /// order).
            pub const fn index(self) -> usize {
                self.0
            }
        }

        impl Id for $name {
            fn from_index(index: usize) -> Self {
                $name(index)
            }
            fn to_index(self) -> usize {
                self.0
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                write!(f, "{}", self.0)
            }
        }
    )*};
}

id_types! {
    /// A `param` of the model: its place in [`crate::Model::params`].
    ParamId;
    /// A factor (`factor`/`state`) of the model: its place in [`crate::Model::factors`].
    FactorId;
    /// A `shock` (noise) of the model: its place in [`crate::Model::shocks`].
    ShockId;
    /// A `let` of the model: its place in [`crate::Model::lets`].
    LetId;
}

/// A list in declaration order, read by the typed identity `I` of its items.
pub struct IdVec<I, T> {
    items: Vec<T>,
    id: PhantomData<fn(I) -> I>,
}

impl<I: Id, T> IdVec<I, T> {
    pub const fn new() -> Self {
        IdVec {
            items: Vec::new(),
            id: PhantomData,
        }
    }

    /// Room for exactly `additional` more items (a list whose length is known ahead: a
    /// file can declare 200,000 parameters, and growth by doubling would hold twice that).
    pub fn reserve_exact(&mut self, additional: usize) {
        self.items.reserve_exact(additional);
    }

    /// Appends `item` and returns its identity.
    pub fn push(&mut self, item: T) -> I {
        self.items.push(item);
        I::from_index(self.items.len() - 1)
    }

    /// The item of `id`, if the list has it.
    pub fn by_id(&self, id: I) -> Option<&T> {
        self.items.get(id.to_index())
    }

    /// The item of `id`, mutable, if the list has it.
    pub fn by_id_mut(&mut self, id: I) -> Option<&mut T> {
        self.items.get_mut(id.to_index())
    }

    /// Every identity, in order.
    pub fn ids(&self) -> impl DoubleEndedIterator<Item = I> + ExactSizeIterator {
        (0..self.items.len()).map(I::from_index)
    }

    /// Every item with its identity, in order.
    pub fn iter_ids(&self) -> impl DoubleEndedIterator<Item = (I, &T)> + ExactSizeIterator {
        self.items
            .iter()
            .enumerate()
            .map(|(i, item)| (I::from_index(i), item))
    }

    /// The identity of the first item that satisfies `predicate`.
    pub fn find_id(&self, predicate: impl FnMut(&T) -> bool) -> Option<I> {
        self.items.iter().position(predicate).map(I::from_index)
    }

    /// The items as a plain vector, in order.
    pub fn into_vec(self) -> Vec<T> {
        self.items
    }
}

impl<I: Id, T> Default for IdVec<I, T> {
    fn default() -> Self {
        IdVec::new()
    }
}

impl<I, T: Clone> Clone for IdVec<I, T> {
    fn clone(&self) -> Self {
        IdVec {
            items: self.items.clone(),
            id: PhantomData,
        }
    }
}

impl<I, T: PartialEq> PartialEq for IdVec<I, T> {
    fn eq(&self, other: &Self) -> bool {
        self.items == other.items
    }
}

/// Shown as the plain list.
impl<I, T: fmt::Debug> fmt::Debug for IdVec<I, T> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.items.fmt(f)
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
        &self.items[id.to_index()]
    }
}

impl<I: Id, T> IndexMut<I> for IdVec<I, T> {
    fn index_mut(&mut self, id: I) -> &mut T {
        &mut self.items[id.to_index()]
    }
}

/// By position too, as a plain list (integer literals and loops over `0..len` keep their
/// meaning).
impl<I: Id, T> Index<usize> for IdVec<I, T> {
    type Output = T;
    fn index(&self, index: usize) -> &T {
        &self.items[index]
    }
}

impl<I: Id, T> IndexMut<usize> for IdVec<I, T> {
    fn index_mut(&mut self, index: usize) -> &mut T {
        &mut self.items[index]
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
        Vec::from_iter(iter).into()
    }
}

impl<I, T> IntoIterator for IdVec<I, T> {
    type Item = T;
    type IntoIter = std::vec::IntoIter<T>;
    fn into_iter(self) -> Self::IntoIter {
        self.items.into_iter()
    }
}

impl<'a, I, T> IntoIterator for &'a IdVec<I, T> {
    type Item = &'a T;
    type IntoIter = std::slice::Iter<'a, T>;
    fn into_iter(self) -> Self::IntoIter {
        self.items.iter()
    }
}

impl<'a, I, T> IntoIterator for &'a mut IdVec<I, T> {
    type Item = &'a mut T;
    type IntoIter = std::slice::IterMut<'a, T>;
    fn into_iter(self) -> Self::IntoIter {
        self.items.iter_mut()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_list_is_read_by_identity_and_by_position() {
        let mut list: IdVec<FactorId, &str> = IdVec::new();
        let r = list.push("r");
        let v = list.push("v");
        assert_eq!((r.index(), v.index()), (0, 1));
        assert_eq!(list[v], "v");
        assert_eq!(list[0], "r");
        assert_eq!(list.by_id(FactorId::new(2)), None);
        assert_eq!(list.find_id(|name| *name == "v"), Some(v));
        assert_eq!(list.ids().collect::<Vec<_>>(), vec![r, v]);
        assert_eq!(list.iter_ids().map(|(id, _)| id).next_back(), Some(v));
        assert_eq!(format!("{list:?} {v}"), r#"["r", "v"] 1"#);
    }
}
