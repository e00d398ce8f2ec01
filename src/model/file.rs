//! The network file as written on disk: serde types that mirror the JSON contract
//! (`../shared/network-format.md`) field for field, before any validation.
//!
//! Nothing here is trusted: numbers may be negative, ids may repeat, sites may be unknown.
//! [`super::network::Network::from_file`] lowers these types into a validated network.

use serde::Deserialize;

/// The whole file: one JSON object.
#[derive(Debug, Clone, Deserialize)]
pub struct NetworkFile {
    /// A label for reports.
    #[serde(default)]
    pub name: Option<String>,
    /// The traffic unit, a label for reports (e.g. `Gbit/s`).
    #[serde(default)]
    pub unit: Option<String>,
    /// Processing sites and plain routers alike.
    #[serde(default)]
    pub sites: Vec<SiteFile>,
    /// Links between sites.
    #[serde(default)]
    pub links: Vec<LinkFile>,
    /// Traffic to route and process.
    #[serde(default)]
    pub demands: Vec<DemandFile>,
}

/// One `sites[]` entry.
#[derive(Debug, Clone, Deserialize)]
pub struct SiteFile {
    pub id: String,
    /// Processing capacity in traffic units; absent means 0.
    #[serde(default)]
    pub processing: Option<f64>,
    /// Cost of one added unit of processing; absent: the site cannot be expanded.
    #[serde(default)]
    pub expand_cost: Option<f64>,
    /// Most processing that may be added; absent: unlimited.
    #[serde(default)]
    pub expand_max: Option<f64>,
    /// Processing is bought in modules of this size (our own optional field).
    #[serde(default)]
    pub expand_step: Option<f64>,
    /// Probability that the site is down at a random moment (0 <= p < 1).
    #[serde(default)]
    pub failure_probability: Option<f64>,
}

/// One `links[]` entry.
#[derive(Debug, Clone, Deserialize)]
pub struct LinkFile {
    pub id: String,
    pub from: String,
    pub to: String,
    /// Capacity of each direction that exists.
    pub capacity: f64,
    /// `true`: only `from → to` exists.
    #[serde(default)]
    pub one_way: Option<bool>,
    /// Shared-risk link groups (SRLG, RFC 4202) the link belongs to.
    #[serde(default)]
    pub risk_groups: Option<Vec<String>>,
    /// Routing metric of the link (a positive integer up to 16777215), both directions.
    #[serde(default)]
    pub metric: Option<f64>,
    /// Probability that the link is down at a random moment (0 <= p < 1).
    #[serde(default)]
    pub failure_probability: Option<f64>,
}

/// One `demands[]` entry.
#[derive(Debug, Clone, Deserialize)]
pub struct DemandFile {
    /// Optional label of our own; reports fall back to `from→to #index`.
    #[serde(default)]
    pub id: Option<String>,
    pub from: String,
    pub to: String,
    /// Offered traffic.
    pub volume: f64,
    /// Committed part; absent means the whole volume.
    #[serde(default)]
    pub required: Option<f64>,
}
