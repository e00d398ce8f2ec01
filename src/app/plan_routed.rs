//! `redoubt plan --routing steered`: one purchase for the steered routing model.

use std::io::Write;

use super::Outcome;
use super::options::PlanOptions;
use super::plan::write_plan;
use crate::audit;
use crate::error::Result;
use crate::expand;
use crate::model::Network;
use crate::report::export::PlanReport;
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
    // Service chains buy function capacity per site for the steered model.
    let plan = match net.chains {
        Some(_) => {
            let model = routing::chain::Steered {
                trees: &ra.model.trees,
            };
            expand::chain_buy::plan_for(&model, net, &ra.audit, goal, opts)?
        }
        None => routing::expand::plan(net, &ra, goal, opts)?,
    };
    let doc = PlanReport {
        net,
        audit: &ra.audit,
        plan: &plan,
        default_costs: expand::Candidates::of(net).default_costs,
        top: args.top,
        routing: Some(mode),
    };
    write_plan(args, text, &doc, out, err)
}
