//! `redoubt merge`: the part files of `audit --shard I/N` combined into the audit an
//! unsharded run gives.

use std::io::Write;
use std::path::{Path, PathBuf};

use super::Outcome;
use super::audit::{AuditOutput, finish_audit, report_dir, run_fingerprint};
use super::options::MergeOptions;
use super::scenarios::scenarios_for;
use crate::audit;
use crate::error::{Error, Result};
use crate::journal;
use crate::model::Network;
use crate::report;
use crate::risk;
use crate::scenario::{self, Kinds};
use crate::solve::{self, Engine};

/// `merge`: reads the part files, rebuilds the run's scenario list from the network and
/// options they carry, and writes what the unsharded audit writes.
pub(super) fn run(args: &MergeOptions, out: &mut dyn Write) -> Result<Outcome> {
    let inputs: Vec<&Path> = args.parts.iter().map(PathBuf::as_path).collect();
    if let Some(json) = &args.json {
        report::file::check_output("--json", json, &inputs)?;
    }
    if let Some(csv) = &args.csv {
        let mut others = inputs.clone();
        others.extend(args.json.as_deref());
        report::file::check_output("--csv", csv, &others)?;
    }
    let mut others = inputs.clone();
    others.extend(args.json.as_deref());
    others.extend(args.csv.as_deref());
    let report_files = report_dir(args.report.as_deref(), &others)?;
    // --report and --why read evaluations in full, as an unsharded audit keeps them.
    let whole = args.report.is_some() || args.why;
    let h = &journal::Parts::headers(&args.parts, &|h| {
        run_fingerprint(
            &h.network,
            h.fail.as_deref(),
            h.depth,
            &h.kinds,
            &h.engine,
            None,
            h.matrix.as_deref(),
        )
    })?;
    let net = Network::from_bytes(h.network.as_bytes())
        .map_err(|e| Error::Input(format!("merge: the network in the parts: {e}")))?;
    let engine: Engine = h.engine.parse().map_err(|e| match e {
        Error::Input(m) => Error::Input(format!("merge: the parts: {m}")),
        other => other,
    })?;
    let list = scenarios_for(&net, h.depth, &h.kinds, h.fail.as_deref(), &[])?;
    let list = super::scenarios::under_matrices(
        &net,
        list,
        super::scenarios::matrices_for(&net, h.matrix.as_deref())?,
    );
    let keep = if whole {
        audit::Keep::Full
    } else {
        audit::Keep::Thin
    };
    let mut batch = audit::Batch::new(&net, list.iter, engine).keeping(keep);
    if batch.outages() != h.outages {
        return Err(Error::Usage(format!(
            "merge: the parts name {} outages, their network and options give {}",
            h.outages,
            batch.outages()
        )));
    }
    // Every line is verified against the parts' network before it is used.
    let mut held: Vec<Option<solve::Evaluation>> = vec![None; h.outages];
    let parts = journal::Parts::open(&args.parts, h, |k, e| {
        solve::recheck::recheck(&net, batch.outage(k), &e)?;
        held[k] = Some(if k.0 == 0 || whole { e } else { e.thin() });
        Ok(())
    })?;
    batch.restore(held);
    let audit = batch.into_audit();
    let full = |k: audit::OutageId| parts.read(k);
    let opts = audit::RunOptions {
        threads: None,
        progress: false,
    };
    let risk = match h.fail {
        Some(_) => None,
        None => risk::assess(
            &net,
            &scenario::pool_without(&net, Kinds::parse(&h.kinds)?, &[]),
            &audit,
        ),
    };
    finish_audit(
        &net,
        &audit,
        &full,
        AuditOutput {
            why: args.why,
            headroom: h.headroom,
            ..AuditOutput::plain(
                args.json.as_deref(),
                args.csv.as_deref(),
                risk.as_ref(),
                report_files.as_ref(),
                (args.top, args.detail),
                opts,
            )
        },
        None,
        &|e| e,
        out,
    )
}
