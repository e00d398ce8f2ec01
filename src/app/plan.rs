//! `redoubt plan` (best re-route): one purchase for every scenario; `--apply` writes the
//! network with it. The steered plan is in `plan_routed`.

use std::io::Write;

use super::nearest_refused;
use super::options::PlanOptions;
use super::plan_routed::{self, Routed};
use super::scenarios::{run_options, scenario_list, solve_list};
use super::{Outcome, note, read_network, stdout_result};
use crate::error::Result;
use crate::expand;
use crate::model::{self, Network};
use crate::report;
use crate::report::export::{Exporter as _, PlanReport};
use crate::routing;
use crate::scenario::Scenario;
use crate::solve::Engine;

/// `plan`: output paths checked before the network is read, then the scenarios solved
/// with the walk engine (after the estimate), the purchase (`expand::plan`), `--json`,
/// `--apply`, and the plan's tables. The flags were checked when lowered.
pub(super) fn run(args: &PlanOptions, out: &mut dyn Write, err: &mut dyn Write) -> Result<Outcome> {
    let goal = args.goal;
    let input = args.scenarios.network.as_path();
    if let Some(json) = &args.json {
        report::file::check_output("--json", json, &[input])?;
    }
    let outputs = [("--json", &args.json), ("--apply", &args.apply)]
        .into_iter()
        .filter_map(|(flag, p)| Some((flag.to_string(), p.clone()?)))
        .collect::<Vec<_>>();
    report::file::check_distinct(&outputs)?;
    if let Some(apply) = &args.apply {
        report::file::check_output("--apply", apply, &[input])?;
    }
    let (net, text) = read_network(input)?;
    let list = scenario_list(&net, &args.scenarios, None)?;
    let opts = run_options(&args.scenarios, err);
    match args.scenarios.routing {
        Some(routing::Mode::Nearest) => return Err(nearest_refused("plan")),
        Some(mode) => {
            let scenarios: Vec<Scenario> = list.iter.collect();
            let routed = Routed {
                net: &net,
                text: &text,
                mode,
            };
            return plan_routed::run(args, routed, scenarios, opts, goal, out, err);
        }
        None => {}
    }
    let audit = solve_list(&net, list, Engine::Walks, &args.scenarios, opts, err)?;
    let plan = if net.chains.is_some() {
        expand::chain_buy::plan(&net, &audit, goal, opts)?
    } else {
        expand::plan_with(&net, &audit, goal, opts, args.master)?
    };
    if plan.master.interior_point_solves > 0 && !args.scenarios.quiet {
        note(report::notes::note_plan_interior_point(
            err,
            plan.master.interior_point_solves,
            plan.master.solves,
            crate::solve::gub::COUPLING_ROWS,
        ));
    }
    let doc = PlanReport {
        net: &net,
        audit: &audit,
        plan: &plan,
        default_costs: expand::Candidates::of(&net).default_costs,
        top: args.top,
        routing: None,
    };
    write_plan(args, &text, &doc, out, err)
}

/// The end of every `plan`: `--json`, `--apply`, then the text on `out`, each through its
/// exporter.
pub(super) fn write_plan(
    args: &PlanOptions,
    text: &str,
    doc: &PlanReport<'_>,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> Result<Outcome> {
    if let Some(path) = &args.json {
        report::file::write_atomic(path, |w| report::export::Json.write(doc, w))?;
    }
    match &doc.plan.functions {
        Some(bought) => write_applied_functions(args, text, doc.net, bought, err)?,
        None => write_applied(args, text, doc.net, &doc.plan.add, err)?,
    }
    stdout_result(report::export::Text.write(doc, out))?;
    Ok(Outcome::Ok)
}

/// `plan --apply OUT`: the input file with the purchase `add` (edited in place), written
/// atomically, and a note on stderr.
pub(super) fn write_applied(
    args: &PlanOptions,
    text: &str,
    net: &Network,
    add: &[f64],
    err: &mut dyn Write,
) -> Result<()> {
    if let Some(path) = &args.apply {
        let edited = model::apply::with_purchase(text, net, add)?;
        report::file::write_atomic(path, |w| w.write_all(edited.as_bytes()))?;
        if !args.scenarios.quiet {
            note(report::text::note_applied(err, path, add));
        }
    }
    Ok(())
}

/// `plan --apply OUT` for service chains: the input file with each bought function added
/// to `sites[].functions` (edited in place), written atomically, and a note on stderr.
fn write_applied_functions(
    args: &PlanOptions,
    text: &str,
    net: &Network,
    bought: &[expand::chain_buy::FunctionPurchase],
    err: &mut dyn Write,
) -> Result<()> {
    if let Some(path) = &args.apply {
        let nf = net.chains.as_ref().map_or(0, |c| c.functions.len());
        let mut add = vec![vec![0.0; nf]; net.sites.len()];
        for p in bought {
            add[p.site][p.function] += p.units;
        }
        let edited = model::apply::with_function_purchase(text, net, &add)?;
        report::file::write_atomic(path, |w| w.write_all(edited.as_bytes()))?;
        if !args.scenarios.quiet {
            note(report::text::note_applied_functions(
                err,
                path,
                bought.len(),
            ));
        }
    }
    Ok(())
}
