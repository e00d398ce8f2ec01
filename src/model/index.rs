//! Typed indices: a site, a link, an arc (one direction of a link) and a demand of a
//! [`super::Network`] each have their own index type, so a site number cannot index the
//! links unnoticed where these lists meet (outages, bottlenecks, stranded demands, arcs).
//! Each is a plain `usize` in memory and in JSON (`#[repr(transparent)]`,
//! `#[serde(transparent)]`): journals, part files and reports are unchanged. The solvers'
//! inner loops may keep plain `usize` and convert at their boundary with `.0` or `From`.

/// `Vec` and slice indexing by a typed id, so a list per site (or per outage, …) is
/// indexed by its own kind of id and another kind cannot index it unnoticed (a plain
/// `usize` still indexes anything); `Display` is the number; `From` both ways with
/// `usize`. Every operation is O(1).
macro_rules! typed_index {
    ($id:ident) => {
        impl<T> std::ops::Index<$id> for [T] {
            type Output = T;
            fn index(&self, i: $id) -> &T {
                &self[i.0]
            }
        }
        impl<T> std::ops::IndexMut<$id> for [T] {
            fn index_mut(&mut self, i: $id) -> &mut T {
                &mut self[i.0]
            }
        }
        impl<T> std::ops::Index<$id> for Vec<T> {
            type Output = T;
            fn index(&self, i: $id) -> &T {
                &self[i.0]
            }
        }
        impl<T> std::ops::IndexMut<$id> for Vec<T> {
            fn index_mut(&mut self, i: $id) -> &mut T {
                &mut self[i.0]
            }
        }
        impl std::fmt::Display for $id {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                self.0.fmt(f)
            }
        }
        impl From<usize> for $id {
            fn from(i: usize) -> $id {
                $id(i)
            }
        }
        impl From<$id> for usize {
            fn from(i: $id) -> usize {
                i.0
            }
        }
    };
}
pub(crate) use typed_index;

/// Declares a typed index: a `#[repr(transparent)]`, `#[serde(transparent)]` newtype of
/// `usize` with the derives every index needs and [`typed_index!`]'s impls. The doc
/// comments given go on the type.
macro_rules! index_type {
    ($(#[$doc:meta])* $id:ident) => {
        $(#[$doc])*
        #[repr(transparent)]
        #[derive(
            Debug,
            Clone,
            Copy,
            Default,
            PartialEq,
            Eq,
            PartialOrd,
            Ord,
            Hash,
            serde::Serialize,
            serde::Deserialize,
        )]
        #[serde(transparent)]
        pub struct $id(pub usize);
        $crate::model::index::typed_index!($id);
    };
}
pub(crate) use index_type;

index_type!(
    /// Index of a site in [`super::Network::sites`].
    SiteIdx
);
index_type!(
    /// Index of a link in [`super::Network::links`].
    LinkIdx
);
index_type!(
    /// Index of an arc (one direction of a link) in [`super::Network::arcs`].
    ArcIdx
);
index_type!(
    /// Index of a demand in [`super::Network::demands`] (of the matrix's view it belongs to).
    DemandIdx
);
