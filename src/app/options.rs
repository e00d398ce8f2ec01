//! The parsed command line ([`crate::cli`], clap's types) validated and lowered once into
//! plain values the commands and the library take. Nothing outside `app/` and `cli.rs`
//! sees a clap type: the library gets an [`Engine`], a [`routing::Mode`], [`Gate`]s, an
//! [`expand::Goal`], [`RunOptions`] and paths.
//!
//! Every check here is pure (no file is read or written, nothing is printed), so a command
//! line that [`lower`] accepts only fails later on its files, its network or its run. A
//! note the lowering decides on (`--threads` capped at the core count) is kept in the
//! options and printed by the command where a run starts.

use std::path::PathBuf;

use crate::audit::RunOptions;
use crate::cli::{self, AuditArgs, Cli, CompareArgs, MergeArgs, Objective, PlanArgs, Routing};
use crate::error::{Error, Result};
use crate::expand;
use crate::gate::{self, Gate, GateKind};
use crate::model::import::Rules;
use crate::report::json::Detail;
use crate::routing;
use crate::solve::{Engine, approx};

/// Without `--max-minutes`, a run estimated longer than this many minutes needs `--yes`.
pub const DEFAULT_MAX_MINUTES: f64 = 60.0;

/// One command line, lowered.
#[derive(Debug)]
pub enum Command {
    /// `check NETWORK`.
    Check(PathBuf),
    Audit(AuditOptions),
    Merge(MergeOptions),
    Import(ImportOptions),
    Compare(CompareOptions),
    Plan(PlanOptions),
    Worst(WorstOptions),
}

/// `worst`, validated: the network, the search's options, the `--json` file.
#[derive(Debug, Clone)]
pub struct WorstOptions {
    pub network: PathBuf,
    pub json: Option<PathBuf>,
    /// `--matrix` as given (parsed against the network).
    pub matrix: Option<String>,
    pub search: crate::worst::Options,
}

/// Which scenarios a run evaluates and how (the scenario flags shared by `audit`, `plan`
/// and each side of `compare`), validated.
#[derive(Debug, Clone)]
pub struct ScenarioOptions {
    /// The network file.
    pub network: PathBuf,
    /// `--depth`.
    pub depth: usize,
    /// `--kinds` as given (parsed against the network; the fingerprint holds this text).
    pub kinds: String,
    /// `--down` as given (parsed against the network; the fingerprint holds this text).
    pub down: Option<String>,
    /// `--matrix` as given (parsed against the network; the fingerprint holds this text).
    pub matrix: Option<String>,
    /// `None` for `--routing best` (any walk), else the deployed-routes model.
    pub routing: Option<routing::Mode>,
    /// `--quiet`: no progress bar, no notes.
    pub quiet: bool,
    /// The estimated time a run may take, in minutes (`None` with `--yes`).
    pub time_limit: Option<f64>,
    /// Threads (capped at the core count) and the progress bar.
    pub run: RunOptions,
    /// `(asked, cores)` when `--threads` asked for more threads than cores (the note).
    pub threads_capped: Option<(usize, usize)>,
}

/// `audit`, validated.
#[derive(Debug)]
pub struct AuditOptions {
    pub scenarios: ScenarioOptions,
    /// `--fail`: one named scenario instead of the enumeration.
    pub fail: Option<String>,
    pub top: usize,
    /// `--detail` / `--detail-top N`: which scenarios of `--json` carry per-demand lists.
    pub detail: Detail,
    pub json: Option<PathBuf>,
    pub csv: Option<PathBuf>,
    pub report: Option<PathBuf>,
    pub resume: bool,
    /// The gates, in the order `--max-shortfall`, `--max-stranded`, `--min-served-fraction`,
    /// `--min-headroom`.
    pub gates: Vec<Gate>,
    /// `--gate-tolerance` (only with a gate).
    pub gate_tolerance: Option<f64>,
    pub close: bool,
    /// `--shard I/N` as `(I, N)`, 1 ≤ I ≤ N.
    pub shard: Option<(usize, usize)>,
    pub why: bool,
    pub engine: Engine,
    /// `--headroom` (also set by `--min-headroom`).
    pub headroom: bool,
    /// `--exact-top N` (only with `--engine approx`, N ≥ 1): the N worst scenarios and the
    /// gates solved exactly ([`crate::screening`]).
    pub exact_top: Option<usize>,
}

/// `plan`, validated.
#[derive(Debug)]
pub struct PlanOptions {
    pub scenarios: ScenarioOptions,
    pub json: Option<PathBuf>,
    /// Close every gap, or spend at most `--budget` for `--objective`.
    pub goal: expand::Goal,
    pub top: usize,
    pub apply: Option<PathBuf>,
    /// The master problem's formulation (hidden `--master`).
    pub master: expand::Master,
}

/// `compare`, validated.
#[derive(Debug)]
pub struct CompareOptions {
    pub before: PathBuf,
    pub after: PathBuf,
    /// The scenario options of both sides ([`CompareOptions::side`] sets the file).
    pub sides: ScenarioOptions,
    pub fail: Option<String>,
    /// `--tolerance`, finite and ≥ 0.
    pub tolerance: f64,
    pub allow_new_short: bool,
    pub json: Option<PathBuf>,
    /// `--report DIR`: the comparison's HTML page and Markdown twin.
    pub report: Option<PathBuf>,
    pub top: usize,
    /// `--headroom` (also set by `--min-headroom`).
    pub headroom: bool,
    /// `--min-headroom`: the least headroom AFTER must keep (a factor, finite, ≥ 0).
    pub min_headroom: Option<f64>,
}

impl CompareOptions {
    /// The scenario options of one side (`network` is that side's file).
    pub fn side(&self, network: PathBuf) -> ScenarioOptions {
        ScenarioOptions {
            network,
            ..self.sides.clone()
        }
    }
}

/// `merge` (nothing to validate before the part files are read).
#[derive(Debug)]
pub struct MergeOptions {
    pub parts: Vec<PathBuf>,
    pub json: Option<PathBuf>,
    pub csv: Option<PathBuf>,
    pub report: Option<PathBuf>,
    pub why: bool,
    pub top: usize,
    /// `--detail` / `--detail-top N`: which scenarios of `--json` carry per-demand lists.
    pub detail: Detail,
}

/// `import`: where the topology comes from and where the network goes.
#[derive(Debug)]
pub enum ImportOptions {
    /// networkx node-link JSON with the rules that add processing and demands.
    Networkx {
        file: PathBuf,
        json: PathBuf,
        /// `--name`, else the graph's `name`, else the file name (decided on reading).
        name: Option<String>,
        rules: Rules,
    },
    /// Three CSV files.
    Csv {
        sites: PathBuf,
        links: PathBuf,
        demands: PathBuf,
        /// The functions CSV of a network with service chains.
        functions: Option<PathBuf>,
        json: PathBuf,
        name: String,
    },
}

/// The cores this process may use (1 when unknown).
pub fn cores() -> usize {
    std::thread::available_parallelism().map_or(1, usize::from)
}

/// Lowers a parsed command line: every flag checked (in the order the commands have always
/// checked them, so the first error named is the same), clap's enums mapped to the
/// library's. O(size of the command line).
pub fn lower(cli: Cli) -> Result<Command> {
    Ok(match cli.command {
        cli::Command::Check { network } => Command::Check(network),
        cli::Command::Audit(a) => Command::Audit(audit(a)?),
        cli::Command::Merge(a) => Command::Merge(merge(a)),
        cli::Command::Import(from) => Command::Import(import(from)),
        cli::Command::Compare(a) => Command::Compare(compare(a)?),
        cli::Command::Plan(a) => Command::Plan(plan(a)?),
        cli::Command::Worst(a) => Command::Worst(worst(a)?),
    })
}

/// The library's engine for `--engine` and `--epsilon` (ε defaults to
/// [`approx::DEFAULT_EPSILON`]). Usage errors: `--epsilon` without `--engine approx`, ε
/// outside (0, [`approx::MAX_EPSILON`]] or NaN ([`approx::epsilon_ok`]), and `--engine
/// approx` with `--shard` (a part file names its engine without ε). O(1).
pub fn engine(e: cli::Engine, epsilon: Option<f64>, sharded: bool) -> Result<Engine> {
    match (e, epsilon) {
        (cli::Engine::Approx, _) if sharded => Err(Error::Usage(
            "--engine approx with --shard is not supported: a part file does not carry ε".into(),
        )),
        (cli::Engine::Approx, None) => Ok(Engine::Approx {
            epsilon: approx::DEFAULT_EPSILON,
        }),
        (cli::Engine::Approx, Some(epsilon)) if approx::epsilon_ok(epsilon) => {
            Ok(Engine::Approx { epsilon })
        }
        (cli::Engine::Approx, Some(x)) => Err(Error::Usage(format!(
            "--epsilon must be > 0 and at most {}, got {x}",
            approx::MAX_EPSILON
        ))),
        (_, Some(_)) => Err(Error::Usage("--epsilon is only for --engine approx".into())),
        (cli::Engine::Edge, None) => Ok(Engine::Edge),
        (cli::Engine::Walks, None) => Ok(Engine::Walks),
    }
}

/// The deployed-routes model of `--routing` (`None` for `best`: any walk).
pub fn routing_mode(r: Routing) -> Option<routing::Mode> {
    match r {
        Routing::Best => None,
        Routing::Nearest => Some(routing::Mode::Nearest),
        Routing::Steered => Some(routing::Mode::Steered),
    }
}

/// The scenario flags, validated: `--max-minutes` (finite, > 0) and `--threads` (≥ 1,
/// capped at the core count).
fn scenarios(args: cli::ScenarioArgs) -> Result<ScenarioOptions> {
    let time_limit = time_limit(args.max_minutes, args.run.yes)?;
    let Threads { threads, capped } = threads(args.run.threads)?;
    Ok(ScenarioOptions {
        network: args.network,
        depth: args.depth,
        kinds: args.kinds,
        down: args.down,
        matrix: args.matrix,
        routing: routing_mode(args.routing),
        quiet: args.run.quiet,
        time_limit,
        run: RunOptions {
            threads,
            progress: !args.run.quiet,
        },
        threads_capped: capped,
    })
}

/// The time limit of a run in minutes (`None` with `--yes`).
fn time_limit(max_minutes: Option<f64>, yes: bool) -> Result<Option<f64>> {
    if let Some(m) = max_minutes
        && !(m.is_finite() && m > 0.0)
    {
        return Err(Error::Usage(format!(
            "--max-minutes must be a finite number > 0, got {m}"
        )));
    }
    Ok(if yes {
        None
    } else {
        Some(max_minutes.unwrap_or(DEFAULT_MAX_MINUTES))
    })
}

/// `--threads` lowered: the count to run with and, when capped, what was asked.
struct Threads {
    threads: Option<usize>,
    /// `(asked, cores)` when `--threads` was above the core count.
    capped: Option<(usize, usize)>,
}

/// `--threads`: at least 1; above the core count it is capped at it (more threads than
/// cores only add contention), and what was asked is kept for the note.
fn threads(asked: Option<usize>) -> Result<Threads> {
    match asked {
        Some(0) => Err(Error::Usage("--threads must be at least 1".into())),
        Some(t) if t > cores() => Ok(Threads {
            threads: Some(cores()),
            capped: Some((t, cores())),
        }),
        other => Ok(Threads {
            threads: other,
            capped: None,
        }),
    }
}

/// Parses `--shard I/N` (1 ≤ I ≤ N).
fn parse_shard(text: &str) -> Result<(usize, usize)> {
    let bad = || {
        Error::Usage(format!(
            "--shard must be I/N with 1 <= I <= N (e.g. 3/8), got {:?}",
            crate::model::strict::printable(text)
        ))
    };
    let (i, n) = text.split_once('/').ok_or_else(bad)?;
    let (i, n): (usize, usize) = (i.parse().map_err(|_| bad())?, n.parse().map_err(|_| bad())?);
    if i == 0 || i > n {
        return Err(bad());
    }
    Ok((i, n))
}

/// The gates of an audit command line, validated.
fn gates_of(args: &AuditArgs) -> Result<Vec<Gate>> {
    let mut gates = Vec::new();
    if let Some(x) = args.max_shortfall {
        gates.push(Gate {
            kind: GateKind::MaxShortfall,
            limit: gate::max_limit("--max-shortfall", x)?,
        });
    }
    if let Some(x) = args.max_stranded {
        gates.push(Gate {
            kind: GateKind::MaxStranded,
            limit: gate::max_limit("--max-stranded", x)?,
        });
    }
    if let Some(f) = &args.min_served_fraction {
        gates.push(Gate {
            kind: GateKind::MinServedFraction,
            limit: gate::parse_fraction(f)?,
        });
    }
    if let Some(x) = args.min_headroom {
        gates.push(Gate {
            kind: GateKind::MinHeadroom,
            limit: gate::max_limit("--min-headroom", x)?,
        });
    }
    if let Some(t) = args.gate_tolerance {
        gate::max_limit("--gate-tolerance", t)?;
        if gates.is_empty() {
            return Err(Error::Usage(
                "--gate-tolerance needs a gate (--max-shortfall, --max-stranded, \
                 --min-served-fraction or --min-headroom)"
                    .into(),
            ));
        }
    }
    Ok(gates)
}

/// `audit`: gates, `--max-minutes`, `--shard`, `--engine` with `--epsilon` (and what a
/// shard refuses), `--threads`.
fn audit(args: AuditArgs) -> Result<AuditOptions> {
    let gates = gates_of(&args)?;
    time_limit(args.scenarios.max_minutes, args.scenarios.run.yes)?;
    let shard = args.shard.as_deref().map(parse_shard).transpose()?;
    let engine = engine(args.engine, args.epsilon, shard.is_some())?;
    if matches!(engine, Engine::Approx { .. }) && (args.close || args.why) {
        // A closing starts from the scenario's served amount; an approximate one is only a
        // lower bound, and closings built on it did not always verify.
        return Err(Error::Usage(
            "--close and --why need exact results: use them with --engine walks or edge, \
             not --engine approx"
                .into(),
        ));
    }
    match (args.exact_top, engine) {
        (None, _) => {}
        (Some(0), _) => {
            return Err(Error::Usage(
                "--exact-top must be at least 1 (the number of worst scenarios to solve \
                 exactly)"
                    .into(),
            ));
        }
        (Some(_), Engine::Approx { .. }) => {}
        (Some(_), _) => {
            return Err(Error::Usage(
                "--exact-top is only for --engine approx (the exact engines solve every \
                 scenario exactly)"
                    .into(),
            ));
        }
    }
    let headroom = args.headroom || args.min_headroom.is_some();
    if shard.is_some() && args.min_headroom.is_some() {
        return Err(Error::Usage(
            "--min-headroom with --shard is not supported: a part file is not gated (merge \
             applies no gate); give the shards --headroom and merge reports the headroom, or \
             run the audit unsharded"
                .into(),
        ));
    }
    if shard.is_some() {
        crate::report::text::refuse_with_shard(
            args.csv.is_some(),
            args.report.is_some(),
            args.why,
        )?;
    }
    Ok(AuditOptions {
        scenarios: scenarios(args.scenarios)?,
        fail: args.fail,
        top: args.shown.top,
        detail: detail(&args.shown),
        json: args.json,
        csv: args.csv,
        report: args.report,
        resume: args.resume,
        gates,
        gate_tolerance: args.gate_tolerance,
        close: args.close,
        shard,
        why: args.why,
        engine,
        headroom,
        exact_top: args.exact_top,
    })
}

/// `plan`: `--budget` (finite, ≥ 0) with `--objective` as the goal, then the scenario flags.
fn plan(args: PlanArgs) -> Result<PlanOptions> {
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
    Ok(PlanOptions {
        scenarios: scenarios(args.scenarios)?,
        json: args.json,
        goal,
        top: args.top,
        apply: args.apply,
        master: match args.master {
            cli::PlanMaster::Edge => expand::Master::Edge,
            cli::PlanMaster::Walks => expand::Master::Walks,
        },
    })
}

/// `compare`: `--tolerance` (finite, ≥ 0), then the scenario flags both sides share.
fn compare(args: CompareArgs) -> Result<CompareOptions> {
    if !(args.tolerance.is_finite() && args.tolerance >= 0.0) {
        return Err(Error::Usage(format!(
            "--tolerance must be a finite number >= 0, got {}",
            args.tolerance
        )));
    }
    let min_headroom = args
        .min_headroom
        .map(|x| gate::max_limit("--min-headroom", x))
        .transpose()?;
    let sides = scenarios(args.side(args.before.clone()))?;
    Ok(CompareOptions {
        sides,
        before: args.before,
        after: args.after,
        fail: args.fail,
        tolerance: args.tolerance,
        allow_new_short: args.allow_new_short,
        json: args.json,
        report: args.report,
        top: args.top,
        headroom: args.headroom || min_headroom.is_some(),
        min_headroom,
    })
}

fn merge(args: MergeArgs) -> MergeOptions {
    MergeOptions {
        parts: args.parts,
        json: args.json,
        csv: args.csv,
        report: args.report,
        why: args.why,
        top: args.shown.top,
        detail: detail(&args.shown),
    }
}

/// `--detail` (every scenario) or `--detail-top N` (default: `--top`'s N) as a [`Detail`].
fn detail(shown: &cli::ShownArgs) -> Detail {
    if shown.detail {
        Detail::All
    } else {
        Detail::Worst(shown.detail_top.unwrap_or(shown.top))
    }
}

fn import(from: cli::ImportFrom) -> ImportOptions {
    match from {
        cli::ImportFrom::Networkx(a) => ImportOptions::Networkx {
            rules: Rules {
                capacity: a.capacity,
                capacity_attr: a.capacity_attr,
                processing_sites: a.processing_sites,
                processing: a.processing,
                demand: a.demand,
                required_fraction: a.required_fraction,
            },
            file: a.file,
            json: a.json,
            name: a.name,
        },
        cli::ImportFrom::Csv(a) => ImportOptions::Csv {
            sites: a.sites,
            links: a.links,
            demands: a.demands,
            functions: a.functions,
            json: a.json,
            name: a.name,
        },
    }
}

/// `worst`'s flags: `--threads 0` refused, the kinds parsed, `--by` mapped to the library's.
pub fn worst(a: cli::WorstArgs) -> Result<WorstOptions> {
    if a.threads == Some(0) {
        return Err(Error::Usage("--threads must be at least 1".into()));
    }
    Ok(WorstOptions {
        search: crate::worst::Options {
            k: a.k,
            kinds: crate::scenario::Kinds::parse(&a.kinds)?,
            top: a.top,
            by: match a.by {
                cli::WorstBy::Shortfall => crate::worst::By::Shortfall,
                cli::WorstBy::Lost => crate::worst::By::Lost,
            },
            threads: a.threads,
        },
        network: a.network,
        json: a.json,
        matrix: a.matrix,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    fn lowered(args: &[&str]) -> Result<Command> {
        let cli = Cli::try_parse_from(std::iter::once("redoubt").chain(args.iter().copied()))
            .expect("clap accepts the line");
        lower(cli)
    }

    /// `--engine` maps each clap value to the library engine of the same name, whose file
    /// name is what `format!("{:?}")` of the clap value gave before (part files carry it).
    #[test]
    fn engines_map_by_name() {
        for e in [cli::Engine::Edge, cli::Engine::Walks, cli::Engine::Approx] {
            assert_eq!(engine(e, None, false).unwrap().as_str(), format!("{e:?}"));
        }
        let Command::Audit(a) = lowered(&["audit", "n.json", "--engine", "edge"]).unwrap() else {
            panic!("an audit")
        };
        assert_eq!(a.engine, Engine::Edge);
    }

    /// `--epsilon` is checked once, here: the default ε without it, the value given when
    /// inside (0, 0.5] (0.5 itself is inside), and a usage error for 0, a negative ε,
    /// 0.6, NaN, `--epsilon` with an exact engine and `--engine approx` with `--shard`.
    #[test]
    fn epsilon_is_checked_once() {
        let eps = |line: &[&str]| match lowered(line) {
            Ok(Command::Audit(a)) => Ok(a.engine),
            Ok(_) => panic!("an audit"),
            Err(e) => Err(e),
        };
        assert_eq!(
            eps(&["audit", "n.json", "--engine", "approx"]).unwrap(),
            Engine::Approx { epsilon: 0.01 }
        );
        assert_eq!(
            eps(&["audit", "n.json", "--engine", "approx", "--epsilon", "0.5"]).unwrap(),
            Engine::Approx { epsilon: 0.5 }
        );
        for line in [
            &["audit", "n.json", "--engine", "approx", "--epsilon", "0"][..],
            &["audit", "n.json", "--engine", "approx", "--epsilon=-0.1"],
            &["audit", "n.json", "--engine", "approx", "--epsilon", "0.6"],
            &["audit", "n.json", "--engine", "approx", "--epsilon", "NaN"],
            &["audit", "n.json", "--engine", "edge", "--epsilon", "0.1"],
            &["audit", "n.json", "--epsilon", "0.1"],
            &[
                "audit", "n.json", "--engine", "approx", "--shard", "1/2", "--json", "p.json",
            ],
        ] {
            assert!(matches!(eps(line), Err(Error::Usage(_))), "{line:?}");
        }
    }

    /// Hand-written cases: `--shard 0/3` and `4/3` are outside 1 ≤ I ≤ N, `3/3` is inside;
    /// `--threads 0` and `--max-minutes 0` are refused as usage.
    #[test]
    fn flags_are_checked_once() {
        assert_eq!(parse_shard("3/3").unwrap(), (3, 3));
        for bad in ["0/3", "4/3", "3", "a/b", "1/0"] {
            assert!(matches!(parse_shard(bad), Err(Error::Usage(_))), "{bad}");
        }
        for line in [
            &["audit", "n.json", "--threads", "0"][..],
            &["audit", "n.json", "--max-minutes", "0"],
            &["plan", "n.json", "--budget", "-1"],
            &["compare", "a.json", "b.json", "--tolerance", "-1"],
            &["audit", "n.json", "--gate-tolerance", "1"],
        ] {
            assert!(matches!(lowered(line), Err(Error::Usage(_))), "{line:?}");
        }
        let Command::Plan(p) = lowered(&["plan", "n.json", "--budget", "4"]).unwrap() else {
            panic!("a plan")
        };
        assert_eq!(p.goal, expand::Goal::WorstWithin(4.0));
        assert_eq!(p.scenarios.time_limit, Some(DEFAULT_MAX_MINUTES));
    }
}
