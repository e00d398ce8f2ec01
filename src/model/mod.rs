//! The network: the file types ([`file`]) and the validated model ([`network`]).

pub mod file;
pub mod network;

pub use network::{
    Arc, Demand, Expansion, Link, LinkIdx, MAX_METRIC, Network, RiskGroup, Site, SiteIdx,
};
