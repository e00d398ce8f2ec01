//! `redoubt`: audit a network's processed throughput under failures.
//!
//! Data flows through the modules in order: [`model`] (file → validated network) →
//! [`scenario`] (what fails) → [`solve`] (the exact route-and-process LP of one outage) →
//! [`audit`] (all scenarios, in parallel) → [`rank`] (worst first, criticality) →
//! [`report`] (tables and JSON). [`app`] is the command layer on top: it lowers the parsed
//! command line ([`cli`]) once into plain options and wires each command through the
//! library; [`run`] dispatches one command line to it.

pub mod app;
pub mod audit;
pub mod baseline;
pub mod cli;
pub mod compare;
pub mod error;
pub mod expand;
pub mod fold;
pub mod gate;
pub mod headroom;
pub mod journal;
pub mod model;
pub mod numbers;
pub mod rank;
pub mod report;
pub mod risk;
pub mod routing;
pub mod scenario;
pub mod screening;
pub mod solve;
pub mod tol;
pub mod worst;

pub use app::options::DEFAULT_MAX_MINUTES;
pub use app::{
    ESTIMATE_NOTE_FROM, MAX_SCENARIOS, Outcome, Scenarios, load, run, scenarios_for, stdout_result,
};
pub use baseline::{audit_network, audit_network_with};
