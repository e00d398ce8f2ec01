//! The network file as written on disk: serde types that mirror the JSON contract
//! (`../shared/network-format.md`, described for users in `docs/network-format.md`) field
//! for field, before any validation.
//!
//! Nothing here is trusted: numbers may be negative, ids may repeat, sites may be unknown.
//! [`super::network::Network::from_file`] lowers these types into a validated network, and
//! [`super::network::Network::to_file`] writes a network back into them. Which fields each
//! object may hold (and the `notes` / `x-` annotations) is checked before serde sees the
//! document, in [`super::strict`]; serde ignores the `x-` fields.
//!
//! An optional field is either absent (its default applies) or holds a value of its type:
//! `null` is refused ([`present`]), never taken as absent, so `"required": null` cannot
//! quietly become the whole volume.

use serde::de::{self, Deserializer};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// What a field's type holds, in words, for the message that refuses `null` in it.
pub trait Described {
    /// `a number`, `a string`...
    const WHAT: &'static str;
}

impl Described for f64 {
    const WHAT: &'static str = "a number";
}

impl Described for String {
    const WHAT: &'static str = "a string";
}

impl Described for bool {
    const WHAT: &'static str = "true or false";
}

impl Described for Vec<String> {
    const WHAT: &'static str = "a list of names";
}

impl Described for Vec<FunctionFile> {
    const WHAT: &'static str = "a list of functions";
}

impl Described for BTreeMap<String, f64> {
    const WHAT: &'static str = "an object of function capacities";
}

impl Described for BTreeMap<String, ExpandFile> {
    const WHAT: &'static str = "an object of function purchases";
}

/// Reads an optional field that is present in the document: its value, or an error when
/// the value is `null` ("null is not a number; leave the field out for the default").
/// Used with `#[serde(default)]`, so an absent field still gives `None` without calling
/// this. Serde's own `Option<T>` would read `null` as absent.
pub fn present<'de, D, T>(deserializer: D) -> Result<Option<T>, D::Error>
where
    D: Deserializer<'de>,
    T: Deserialize<'de> + Described,
{
    match Option::<T>::deserialize(deserializer)? {
        Some(v) => Ok(Some(v)),
        None => Err(de::Error::custom(format!(
            "null is not {}; leave the field out for the default",
            T::WHAT
        ))),
    }
}

/// Declares a struct of the file whose `Option<…>` fields are the contract's optional
/// fields: each gets `#[serde(default, deserialize_with = "present", skip_serializing_if =
/// "Option::is_none")]`, so an absent field reads as `None`, `null` is refused
/// ([`present`]) and `None` is not written back. Every other field is declared as written
/// (with its own attributes). Fields are `pub`, each followed by a comma.
macro_rules! contract {
    (
        $(#[$sm:meta])*
        pub struct $name:ident { $($body:tt)* }
    ) => {
        contract!(@field [$(#[$sm])* pub struct $name] [] $($body)*);
    };
    // An optional field: absent is `None`, `null` refused, `None` not written.
    (@field $head:tt [$($done:tt)*]
        $(#[$fm:meta])* pub $f:ident : Option<$t:ty>, $($rest:tt)*
    ) => {
        contract!(@field $head [$($done)*
            $(#[$fm])*
            #[serde(
                default,
                deserialize_with = "present",
                skip_serializing_if = "Option::is_none"
            )]
            pub $f: Option<$t>,
        ] $($rest)*);
    };
    // Any other field, as written.
    (@field $head:tt [$($done:tt)*]
        $(#[$fm:meta])* pub $f:ident : $t:ty, $($rest:tt)*
    ) => {
        contract!(@field $head [$($done)* $(#[$fm])* pub $f: $t,] $($rest)*);
    };
    (@field [$($head:tt)*] [$($done:tt)*]) => {
        $($head)* { $($done)* }
    };
}

contract! {
    /// The whole file: one JSON object.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct NetworkFile {
        /// A label for reports.
        pub name: Option<String>,
        /// The traffic unit, a label for reports (e.g. `Gbit/s`).
        pub unit: Option<String>,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
        /// Processing sites and plain routers alike.
        #[serde(default)]
        pub sites: Vec<SiteFile>,
        /// Links between sites.
        #[serde(default)]
        pub links: Vec<LinkFile>,
        /// Traffic to route and process.
        #[serde(default)]
        pub demands: Vec<DemandFile>,
        /// Failure probabilities of shared-risk groups named by links.
        #[serde(default, skip_serializing_if = "Vec::is_empty")]
        pub risk_groups: Vec<RiskGroupFile>,
        /// Further traffic matrices over the same sites and links (the top-level `demands`
        /// are the matrix `base`).
        #[serde(default, skip_serializing_if = "Vec::is_empty")]
        pub matrices: Vec<MatrixFile>,
        /// Network functions with their gains; absent: the one function `processing`, gain 1.
        pub functions: Option<Vec<FunctionFile>>,
    }
}

contract! {
    /// One top-level `matrices[]` entry: a named demand list over the file's sites.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct MatrixFile {
        /// The matrix's name (unique, not `base`).
        pub id: String,
        /// Its demands, each shaped like a top-level `demands[]` entry.
        #[serde(default)]
        pub demands: Vec<DemandFile>,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
    }
}

contract! {
    /// One top-level `functions[]` entry.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct FunctionFile {
        pub id: String,
        /// Traffic that leaves the function per unit that enters it (> 0).
        pub gain: f64,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
    }
}

contract! {
    /// One `sites[].expand` value: buying more of one function at the site.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    #[serde(deny_unknown_fields)]
    pub struct ExpandFile {
        /// Cost per added unit.
        pub cost: f64,
        /// Most that may be added; absent: unlimited.
        pub max: Option<f64>,
    }
}

contract! {
    /// One `sites[]` entry.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct SiteFile {
        pub id: String,
        /// Processing capacity in traffic units; absent means 0.
        pub processing: Option<f64>,
        /// Cost of one added unit of processing; absent: the site cannot be expanded.
        pub expand_cost: Option<f64>,
        /// Most processing that may be added; absent: unlimited.
        pub expand_max: Option<f64>,
        /// Processing is bought in modules of this size (our own optional field).
        pub expand_step: Option<f64>,
        /// Probability that the site is down at a random moment (0 <= p < 1).
        pub failure_probability: Option<f64>,
        /// Capacity of each function at this site (with top-level `functions` only).
        pub functions: Option<BTreeMap<String, f64>>,
        /// Purchases of each function at this site (with top-level `functions` only).
        pub expand: Option<BTreeMap<String, ExpandFile>>,
        /// Drawing position (any finite number; no unit).
        pub x: Option<f64>,
        /// Drawing position (any finite number; no unit).
        pub y: Option<f64>,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
    }
}

contract! {
    /// One `links[]` entry.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct LinkFile {
        pub id: String,
        pub from: String,
        pub to: String,
        /// Capacity of each direction that exists.
        pub capacity: f64,
        /// `true`: only `from → to` exists.
        pub one_way: Option<bool>,
        /// Shared-risk link groups (SRLG, RFC 4202) the link belongs to.
        pub risk_groups: Option<Vec<String>>,
        /// Routing metric of the link (a positive integer up to 16777215), both directions.
        pub metric: Option<f64>,
        /// Probability that the link is down at a random moment (0 <= p < 1).
        pub failure_probability: Option<f64>,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
    }
}

contract! {
    /// One `demands[]` entry.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct DemandFile {
        /// Optional label of our own; reports fall back to `from→to #index`.
        pub id: Option<String>,
        pub from: String,
        pub to: String,
        /// Offered traffic.
        pub volume: f64,
        /// Committed part; absent means the whole volume.
        pub required: Option<f64>,
        /// Ordered function ids every unit must pass (with top-level `functions` only);
        /// absent there: plain traffic.
        pub chain: Option<Vec<String>>,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
    }
}

contract! {
    /// One top-level `risk_groups[]` entry: a probability for a group that links name.
    #[derive(Debug, Clone, Default, PartialEq, Deserialize, Serialize)]
    pub struct RiskGroupFile {
        /// The group's name, as written in `links[].risk_groups`.
        pub id: String,
        /// Probability that the group is down at a random moment (0 <= p < 1).
        pub failure_probability: f64,
        /// Free text for the user; read, never printed.
        pub notes: Option<String>,
    }
}
