//! `redoubt audit --routing nearest|steered`: the audit on the deployed routes beside the
//! best re-route.

use std::io::Write;

use super::Outcome;
use super::options::AuditOptions;
use super::scenarios::risk_of;
use super::stdout_result;
use crate::audit;
use crate::error::{Error, Result};
use crate::expand;
use crate::gate::{self, Gate};
use crate::model::Network;
use crate::report;
use crate::routing;
use crate::scenario::Scenario;

/// The refusal of a purchase (`plan`, `audit --close`) on the nearest-site model.
pub(super) fn nearest_refused(what: &str) -> Error {
    Error::Usage(format!(
        "{what} --routing nearest: buying processing changes which sites are nearest, so \
         purchases are defined for --routing steered (or best) only"
    ))
}

/// `audit --routing nearest|steered`: the routed audit beside the best re-route (no
/// journal: the routed models are fast).
pub(super) fn run(
    args: &AuditOptions,
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
    mode: routing::Mode,
    gates: &[Gate],
    out: &mut dyn Write,
) -> Result<Outcome> {
    let ra = routing::run(net, scenarios, mode, opts, true)?;
    let audit = &ra.audit;
    let cands = expand::Candidates::of(net);
    let closings = if args.close {
        Some(audit::par_map(
            &(0..audit.outages.len()).collect::<Vec<_>>(),
            opts,
            "closing",
            |&k| {
                routing::expand::close(
                    net,
                    &ra.trees,
                    &audit.outages[k],
                    &audit.evaluations[k],
                    &cands,
                )
            },
        )?)
    } else {
        None
    };
    let verdicts = gate::check(audit, gates, args.gate_tolerance);
    let risk = risk_of(net, &args.scenarios, args.fail.is_some(), audit)?;
    if let Some(path) = &args.json {
        let closing_json = closings.as_ref().map(|c| {
            audit
                .outage_of
                .iter()
                .map(|&k| report::json::closing_json(net, c[k].as_ref(), cands.default_costs))
                .collect::<Vec<_>>()
        });
        let mut doc = report::routing::audit_json(net, &ra, closing_json.as_deref());
        doc.gates = report::json::gates_json(audit, &verdicts);
        if let Some(r) = &risk {
            report::json::attach_risk(&mut doc, net, audit, r);
        }
        report::file::write_atomic(path, |w| report::json::write(w, &doc))?;
    }
    if let Some(path) = &args.csv {
        report::file::write_atomic(path, |w| {
            report::csv::write_audit(w, audit, closings.as_deref(), risk.as_ref())
        })?;
    }
    stdout_result(report::routing::write_audit(
        out,
        net,
        &ra,
        closings.as_deref().map(|c| report::text::ClosingPart {
            closings: c,
            default_costs: cands.default_costs,
        }),
        risk.as_ref(),
        &verdicts,
        args.top,
    ))?;
    Ok(if verdicts.iter().all(|g| g.passed) {
        Outcome::Ok
    } else {
        Outcome::GateFailed
    })
}
