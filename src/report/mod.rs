//! Output formats. Only this module knows how results look on a terminal or in a file.
//! An audit run builds one [`model::Model`] and hands it to one [`export::Exporter`] per
//! format ([`text`], [`json`], [`csv`], [`html`], [`markdown`]); [`notes`] words the
//! stderr notes, [`mod@file`] writes output files safely.
//!
//! Every exporter writes to a `&mut dyn Write` it is given; nothing here prints.

pub mod chains;
pub mod compare_page;
pub mod csv;
pub mod export;
pub mod file;
pub mod headroom;
pub mod html;
pub mod json;
pub mod layout;
pub mod map;
pub mod markdown;
pub mod model;
pub mod notes;
pub mod routing;
pub mod screen;
pub mod table;
pub mod text;
pub mod worst;

pub use crate::numbers::*;

/// The caution every report carries.
pub const CAUTION: &str = "Caution: a planning aid under the model's assumptions (fluid, splittable \
traffic; the capacities in the file; one processing step per unit); it does not replace the \
operator's own engineering review, change procedures and local rules.";

/// The caution of a network whose file lists `functions` (service chains): the same
/// sentence with the chain model's assumption in place of "one processing step per unit".
pub const CHAIN_CAUTION: &str = "Caution: a planning aid under the model's assumptions (fluid, \
splittable traffic; the capacities in the file; each unit through its demand's chain of functions \
in order, its volume scaled by each function's constant gain); it does not replace the operator's \
own engineering review, change procedures and local rules.";

/// The caution a report on `net` carries: [`CHAIN_CAUTION`] when its file lists
/// `functions`, else [`CAUTION`]. O(1).
pub fn caution_for(net: &crate::model::Network) -> &'static str {
    caution_of(net.chains.is_some())
}

/// [`CHAIN_CAUTION`] when `chains` (a file of the run lists `functions`), else [`CAUTION`].
pub fn caution_of(chains: bool) -> &'static str {
    if chains { CHAIN_CAUTION } else { CAUTION }
}
