//! `redoubt check`: validate a network file and print its summary.

use std::io::Write;
use std::path::Path;

use super::{Outcome, load, stdout_result};
use crate::error::Result;
use crate::report;
use crate::report::export::Exporter as _;
use crate::solve;

/// Reads and validates `network`, then prints its summary with the demands the intact
/// network cuts off. O(file + one reachability scan per source).
pub(super) fn run(network: &Path, out: &mut dyn Write) -> Result<Outcome> {
    let net = load(network)?;
    let cut_off = solve::baseline_cut_off(&net);
    let doc = report::export::CheckReport {
        net: &net,
        cut_off: &cut_off,
    };
    stdout_result(report::export::Text.write(&doc, out))?;
    Ok(Outcome::Ok)
}
