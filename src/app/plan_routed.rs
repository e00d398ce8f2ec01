//! `redoubt plan --routing steered`: one purchase for the steered routing model.

use std::io::Write;

use super::options::PlanOptions;
use super::plan::write_applied;
use super::{Outcome, stdout_result};
use crate::audit;
use crate::error::Result;
use crate::expand;
use crate::model::Network;
use crate::report;
use crate::routing;
use crate::scenario::Scenario;

/// The network of a routed plan, its file's text (for `--apply`) and the routing model.
pub(super) struct Routed<'a> {
    pub(super) net: &'a Network,
    pub(super) text: &'a str,
    pub(super) mode: routing::Mode,
}

/// `plan --routing steered`: one purchase for the steered model.
pub(super) fn run(
    args: &PlanOptions,
    routed: Routed<'_>,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
    goal: expand::Goal,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> Result<Outcome> {
    let Routed { net, text, mode } = routed;
    let ra = routing::run(net, scenarios, mode, opts, false)?;
    let plan = routing::expand::plan(net, &ra, goal, opts)?;
    let default_costs = expand::Candidates::of(net).default_costs;
    if let Some(path) = &args.json {
        let mut doc = report::json::plan_json(net, &ra.audit, &plan, default_costs);
        doc.routing = mode.name();
        report::file::write_atomic(path, |w| report::json::write(w, &doc))?;
    }
    write_applied(args, text, net, &plan.add, err)?;
    stdout_result(out.write_all(report::routing::plan_header(mode).as_bytes()))?;
    stdout_result(report::text::write_plan(
        out,
        net,
        &ra.audit,
        &plan,
        default_costs,
        args.top,
    ))?;
    Ok(Outcome::Ok)
}
