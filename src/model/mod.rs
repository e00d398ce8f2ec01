//! The network: the file types ([`file`](mod@file)), strict reading ([`strict`]) and the validated
//! model ([`network`]).

pub mod apply;
pub mod file;
pub mod import;
pub mod network;
pub mod strict;

pub use network::{
    Arc, Demand, Expansion, Link, LinkIdx, MAX_AMOUNT, MAX_METRIC, MAX_TOTAL, Network, RiskGroup,
    Site, SiteIdx,
};
