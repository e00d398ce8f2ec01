//! An audit's baseline: the evaluation every scenario is compared with, and the in-memory
//! audit of a scenario list with its baseline (the library's entry point for callers that
//! hold the scenarios themselves).

use crate::audit::{self, Audit, RunOptions};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::report;
use crate::scenario::Scenario;
use crate::solve::{self, Engine, Evaluation};

/// Runs the audit with the edge engine and returns it with the baseline's evaluation
/// (solved separately when the scenario list does not hold the baseline).
pub fn audit_network(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: RunOptions,
) -> Result<(Audit, Evaluation)> {
    audit_network_with(net, scenarios, opts, Engine::Edge)
}

/// [`audit_network`] with a choice of engine; every evaluation is kept in full.
pub fn audit_network_with(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: RunOptions,
    engine: Engine,
) -> Result<(Audit, Evaluation)> {
    let audit = audit::run_with(net, scenarios, opts, engine)?;
    let baseline = with_baseline(net, &audit)?;
    Ok((audit, baseline))
}

/// The baseline's evaluation of an audit that keeps it in full: with `--down`, the down
/// state (what every scenario keeps down), else the intact network. A thin baseline is a
/// defect ([`Error::Internal`]): every batch keeps the baseline full.
pub fn with_baseline(net: &Network, audit: &Audit) -> Result<Evaluation> {
    with_full_baseline(net, audit, &|_| {
        Err(Error::Internal("thin baseline".into()))
    })
}

/// The baseline's full evaluation: the audit's (read back with `full` when thin), else
/// solved by the walk engine, the audit's default (the layered one for a file with
/// `functions`; one outage: the `--down` state of the
/// first scenario, or the intact network; an unproven walk answer falls back to the edge
/// LP's ladder, so the result is verified like every scenario's).
pub fn with_full_baseline(
    net: &Network,
    audit: &Audit,
    full: report::json::Full<'_>,
) -> Result<Evaluation> {
    match audit.scenarios.iter().position(Scenario::is_baseline) {
        Some(i) if audit.eval(i).is_thin(net.view(audit.scenarios[i].matrix)) => {
            full(audit.outage_of[i])
        }
        Some(i) => Ok(audit.eval(i).clone()),
        None => {
            let down = audit.scenarios.first().map_or(&[][..], |s| &s.down[..]);
            let outage = Scenario::baseline().with_down(down).outage(net);
            match net.chains {
                // A file with `functions`: the layered walk engine, cold.
                Some(_) => Ok(solve::chainwalk::evaluate_walks(net, &outage, None)?.evaluation),
                None => solve::evaluate_cold_walks(net, &outage),
            }
        }
    }
}
