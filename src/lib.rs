//! `redoubt`: audit a network's processed throughput under failures.
//!
//! Data flows through the modules in order: [`model`] (file → validated network) →
//! [`scenario`] (what fails) → [`solve`] (the exact route-and-process LP of one outage) →
//! [`audit`] (all scenarios, in parallel) → [`rank`] (worst first, criticality) →
//! [`report`] (tables and JSON). [`run`] wires one command line through them.

pub mod audit;
pub mod cli;
pub mod error;
pub mod expand;
pub mod model;
pub mod rank;
pub mod report;
pub mod routing;
pub mod scenario;
pub mod solve;

use std::path::Path;

use cli::{AuditArgs, Cli, Command, Objective, PlanArgs, Routing, ScenarioArgs};
use error::{Error, Result};
use model::Network;
use scenario::{Element, Kinds, Scenario};

/// What a successful command ends with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything asked for was done and no gate failed.
    Ok,
    /// A gate (`--max-shortfall`) failed.
    GateFailed,
}

impl Outcome {
    pub fn exit_code(self) -> u8 {
        match self {
            Outcome::Ok => 0,
            Outcome::GateFailed => 1,
        }
    }
}

/// Reads and validates a network file.
pub fn load(path: &Path) -> Result<Network> {
    let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    Network::from_json(&text).map_err(|e| match e {
        Error::Input(m) => Error::Input(format!("{}: {m}", path.display())),
        other => other,
    })
}

fn write_file(path: &Path, text: &str) -> Result<()> {
    std::fs::write(path, text).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Largest scenario count a run accepts; beyond it the user is asked to narrow the run.
pub const MAX_SCENARIOS: u128 = 2_000_000;

/// The scenarios a command line asks for: one named scenario (`--fail`) or the baseline
/// plus every set of 1..=depth elements of the chosen kinds.
pub fn scenarios_for(
    net: &Network,
    args: &ScenarioArgs,
    fail: Option<&str>,
) -> Result<Vec<Scenario>> {
    if let Some(list) = fail {
        let mut elements = Vec::new();
        for part in list.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            elements.push(Element::parse(part, net)?);
        }
        if elements.is_empty() {
            return Err(Error::Usage("--fail: name at least one element".into()));
        }
        return Ok(vec![Scenario::new(net, &elements)]);
    }
    let kinds = Kinds::parse(&args.kinds)?;
    let pool = scenario::elements(net, kinds).len();
    let count = scenario::count(pool, args.depth);
    if count > MAX_SCENARIOS {
        return Err(Error::Usage(format!(
            "--depth {} over {pool} elements gives {count} scenarios (limit {MAX_SCENARIOS}); \
             lower --depth or narrow --kinds",
            args.depth
        )));
    }
    Ok(scenario::enumerate(net, kinds, args.depth))
}

fn run_options(args: &ScenarioArgs) -> Result<audit::RunOptions> {
    if args.threads == Some(0) {
        return Err(Error::Usage("--threads must be at least 1".into()));
    }
    Ok(audit::RunOptions {
        threads: args.threads,
        progress: !args.quiet,
    })
}

/// Runs the audit and returns it with the baseline's evaluation (solved separately when
/// the scenario list does not hold the baseline).
pub fn audit_network(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
) -> Result<(audit::Audit, solve::Evaluation)> {
    let audit = audit::run(net, scenarios, opts)?;
    let baseline = match audit.baseline() {
        Some(b) => b.clone(),
        None => solve::evaluate(net, &scenario::Outage::default())?,
    };
    Ok((audit, baseline))
}

fn run_audit(args: &AuditArgs) -> Result<Outcome> {
    if let Some(x) = args.max_shortfall
        && !(x.is_finite() && x >= 0.0)
    {
        return Err(Error::Usage(format!(
            "--max-shortfall must be a finite number >= 0, got {x}"
        )));
    }
    let net = load(&args.scenarios.network)?;
    let scenarios = scenarios_for(&net, &args.scenarios, args.fail.as_deref())?;
    let opts = run_options(&args.scenarios)?;
    if let Some(mode) = routing_mode(args.scenarios.routing) {
        if args.close && mode == routing::Mode::Nearest {
            return Err(nearest_refused("audit --close"));
        }
        return run_routed_audit(args, &net, scenarios, opts, mode);
    }
    let (audit, baseline) = audit_network(&net, scenarios, opts)?;
    print!(
        "{}",
        report::text::audit_report(&net, &audit, &baseline, args.top)
    );
    print!("{}", report::text::relief_report(&net, &audit, args.top));
    let closing_json = if args.close {
        let cands = expand::Candidates::of(&net);
        let closings = audit::par_map(
            &(0..audit.outages.len()).collect::<Vec<_>>(),
            opts,
            "closing",
            |&k| expand::close(&net, &audit.outages[k], &audit.evaluations[k], &cands),
        )?;
        print!(
            "{}",
            report::text::closing_report(&net, &audit, &closings, cands.default_costs, args.top)
        );
        Some(
            audit
                .outage_of
                .iter()
                .map(|&k| {
                    report::json::closing_json(&net, closings[k].as_ref(), cands.default_costs)
                })
                .collect::<Vec<_>>(),
        )
    } else {
        None
    };
    print!("{}", report::text::caution());
    if let Some(path) = &args.json {
        let doc = report::json::audit_json(&net, &audit, &baseline, closing_json.as_deref());
        write_file(path, &report::json::to_string(&doc))?;
    }
    gate(&net, &audit, args.max_shortfall)
}

/// The `--max-shortfall` gate over the audit's (routed or best) shortfalls.
fn gate(net: &Network, audit: &audit::Audit, limit: Option<f64>) -> Result<Outcome> {
    if let Some(limit) = limit {
        let worst = audit
            .evaluations
            .iter()
            .map(|e| e.shortfall)
            .fold(0.0, f64::max);
        if worst > limit {
            eprintln!(
                "redoubt: gate failed: worst shortfall {} {} exceeds --max-shortfall {}",
                report::num(worst),
                net.unit,
                report::num(limit)
            );
            return Ok(Outcome::GateFailed);
        }
    }
    Ok(Outcome::Ok)
}

fn run_plan(args: &PlanArgs) -> Result<Outcome> {
    let goal = match args.budget {
        None => expand::Goal::CloseAll,
        Some(b) if !(b.is_finite() && b >= 0.0) => {
            return Err(Error::Usage(format!(
                "--budget must be a finite number >= 0, got {b}"
            )));
        }
        Some(b) => match args.objective {
            Objective::Worst => expand::Goal::WorstWithin(b),
            Objective::Total => expand::Goal::TotalWithin(b),
        },
    };
    let net = load(&args.scenarios.network)?;
    let scenarios = scenarios_for(&net, &args.scenarios, None)?;
    let opts = run_options(&args.scenarios)?;
    match routing_mode(args.scenarios.routing) {
        Some(routing::Mode::Nearest) => return Err(nearest_refused("plan")),
        Some(mode) => return run_routed_plan(args, &net, scenarios, opts, goal, mode),
        None => {}
    }
    let audit = audit::run(&net, scenarios, opts)?;
    let plan = expand::plan(&net, &audit, goal, opts)?;
    let default_costs = expand::Candidates::of(&net).default_costs;
    print!(
        "{}",
        report::text::plan_report(&net, &audit, &plan, default_costs, args.top)
    );
    if let Some(path) = &args.json {
        let doc = report::json::plan_json(&net, &audit, &plan, default_costs);
        write_file(path, &report::json::to_string(&doc))?;
    }
    Ok(Outcome::Ok)
}

fn routing_mode(r: Routing) -> Option<routing::Mode> {
    match r {
        Routing::Best => None,
        Routing::Nearest => Some(routing::Mode::Nearest),
        Routing::Steered => Some(routing::Mode::Steered),
    }
}

fn nearest_refused(what: &str) -> Error {
    Error::Usage(format!(
        "{what} --routing nearest: buying processing changes which sites are nearest, so \
         purchases are defined for --routing steered (or best) only"
    ))
}

/// `audit --routing nearest|steered`: the routed audit beside the best re-route.
fn run_routed_audit(
    args: &AuditArgs,
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
    mode: routing::Mode,
) -> Result<Outcome> {
    let ra = routing::run(net, scenarios, mode, opts, true)?;
    let audit = &ra.audit;
    print!("{}", report::routing::routing_report(net, &ra, args.top));
    print!(
        "\n{}",
        report::text::audit_report(net, audit, &ra.baseline.eval, args.top)
    );
    print!("{}", report::text::relief_report(net, audit, args.top));
    let closing_json = if args.close {
        let cands = expand::Candidates::of(net);
        let closings = audit::par_map(
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
        )?;
        print!(
            "{}",
            report::text::closing_report(net, audit, &closings, cands.default_costs, args.top)
        );
        Some(
            audit
                .outage_of
                .iter()
                .map(|&k| {
                    report::json::closing_json(net, closings[k].as_ref(), cands.default_costs)
                })
                .collect::<Vec<_>>(),
        )
    } else {
        None
    };
    print!("{}", report::text::caution());
    if let Some(path) = &args.json {
        let doc = report::routing::audit_json(net, &ra, closing_json.as_deref());
        write_file(path, &report::json::to_string(&doc))?;
    }
    gate(net, audit, args.max_shortfall)
}

/// `plan --routing steered`: one purchase for the steered model.
fn run_routed_plan(
    args: &PlanArgs,
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
    goal: expand::Goal,
    mode: routing::Mode,
) -> Result<Outcome> {
    let ra = routing::run(net, scenarios, mode, opts, false)?;
    let plan = routing::expand::plan(net, &ra, goal, opts)?;
    let default_costs = expand::Candidates::of(net).default_costs;
    print!("{}", report::routing::plan_header(mode));
    print!(
        "{}",
        report::text::plan_report(net, &ra.audit, &plan, default_costs, args.top)
    );
    if let Some(path) = &args.json {
        let mut doc = report::json::plan_json(net, &ra.audit, &plan, default_costs);
        doc.routing = mode.name();
        write_file(path, &report::json::to_string(&doc))?;
    }
    Ok(Outcome::Ok)
}

/// Runs one command line.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Check { network } => {
            let net = load(&network)?;
            print!("{}", report::text::check_summary(&net));
            Ok(Outcome::Ok)
        }
        Command::Audit(args) => run_audit(&args),
        Command::Plan(args) => run_plan(&args),
    }
}
