//! `redoubt`: audit a network's processed throughput under failures.
//!
//! Data flows through the modules in order: [`model`] (file → validated network) →
//! [`scenario`] (what fails) → [`solve`] (the exact route-and-process LP of one outage) →
//! [`audit`] (all scenarios, in parallel) → [`rank`] (worst first, criticality) →
//! [`report`] (tables and JSON). [`run`] wires one command line through them.

pub mod audit;
pub mod cli;
pub mod compare;
pub mod error;
pub mod expand;
pub mod fold;
pub mod gate;
pub mod model;
pub mod rank;
pub mod report;
pub mod risk;
pub mod routing;
pub mod scenario;
pub mod solve;

use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::time::Duration;

use cli::{AuditArgs, Cli, Command, MergeArgs, Objective, PlanArgs, Routing, ScenarioArgs};
use error::{Error, Result};
use gate::{Gate, GateKind};
use model::Network;
use report::journal::{self, Journal};
use scenario::{Element, Kinds, Scenario};

/// What a successful command ends with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything asked for was done and no gate failed.
    Ok,
    /// A gate (`--max-shortfall`, `--max-stranded`, `--min-served-fraction`) failed.
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
    read_network(path).map(|(net, _)| net)
}

/// Reads and validates a network file; also returns its text (for the fingerprint).
fn read_network(path: &Path) -> Result<(Network, String)> {
    let bytes = model::read_input(path)?;
    let net = Network::from_bytes(&bytes).map_err(|e| match e {
        Error::Input(m) => Error::Input(format!("{}: {m}", path.display())),
        other => other,
    })?;
    Ok((net, String::from_utf8_lossy(&bytes).into_owned()))
}

/// Maps a failed write to standard output: a closed pipe ends the run quietly
/// ([`Error::BrokenPipe`]), anything else is an I/O error on `<stdout>`.
pub fn stdout_result(r: io::Result<()>) -> Result<()> {
    r.map_err(|source| {
        if source.kind() == io::ErrorKind::BrokenPipe {
            Error::BrokenPipe
        } else {
            Error::Io {
                path: PathBuf::from("<stdout>"),
                source,
            }
        }
    })
}

/// Notes on stderr are best effort: a closed stderr never stops a run.
fn note(r: io::Result<()>) {
    let _ = r;
}

/// Largest scenario count a run accepts; beyond it the user is asked to narrow the run.
pub const MAX_SCENARIOS: u128 = 2_000_000;

/// A lazily enumerated scenario list with its length.
pub struct Scenarios<'a> {
    /// Number of scenarios the iterator yields.
    pub count: u128,
    /// The first failure scenario (the baseline when there is none): the timed sample.
    pub sample: Scenario,
    pub iter: Box<dyn Iterator<Item = Scenario> + 'a>,
}

/// The scenarios a command line asks for: one named scenario (`--fail`) or the baseline
/// plus every set of 1..=depth elements of the chosen kinds, counted first (refused above
/// [`MAX_SCENARIOS`]) and enumerated lazily ([`scenario::lazy`]). O(pool) until iterated.
pub fn scenarios_for<'a>(
    net: &'a Network,
    depth: usize,
    kinds: &str,
    fail: Option<&str>,
    down: &[Element],
) -> Result<Scenarios<'a>> {
    if let Some(list) = fail {
        let elements = Element::parse_list(list, net)?;
        if let Some(e) = elements.iter().find(|e| down.contains(e)) {
            return Err(Error::Usage(format!(
                "--fail: {} is already down (--down); name only further failures",
                e.name(net)
            )));
        }
        let sc = Scenario::new(net, &elements).with_down(down);
        return Ok(Scenarios {
            count: 1,
            sample: sc.clone(),
            iter: Box::new(std::iter::once(sc)),
        });
    }
    let kinds = Kinds::parse(kinds)?;
    let pool = scenario::pool_without(net, kinds, down);
    let count = scenario::count(pool.len(), depth);
    if count > MAX_SCENARIOS {
        return Err(Error::Usage(format!(
            "--depth {depth} over {} elements gives {count} scenarios (limit {MAX_SCENARIOS}); \
             lower --depth or narrow --kinds",
            pool.len()
        )));
    }
    let sample = match pool.first() {
        Some(e) if depth > 0 => Scenario::new(net, &[*e]).with_down(down),
        _ => Scenario::baseline().with_down(down),
    };
    Ok(Scenarios {
        count,
        sample,
        iter: Box::new(scenario::lazy_pool(net, pool, depth, down.to_vec())),
    })
}

/// [`scenarios_for`] of a command line's scenario options (with its `--down`).
pub(crate) fn scenario_list<'a>(
    net: &'a Network,
    args: &ScenarioArgs,
    fail: Option<&str>,
) -> Result<Scenarios<'a>> {
    let down = down_for(net, args)?;
    scenarios_for(net, args.depth, &args.kinds, fail, &down)
}

/// The elements `--down` keeps down in every scenario (empty without it).
pub fn down_for(net: &Network, args: &ScenarioArgs) -> Result<Vec<Element>> {
    match &args.down {
        Some(list) => Element::parse_list_for("--down", list, net),
        None => Ok(Vec::new()),
    }
}

/// Estimates, then solves every scenario of `list` with `engine` (no journal), keeping
/// every evaluation in full.
pub(crate) fn solve_list(
    net: &Network,
    list: Scenarios<'_>,
    engine: cli::Engine,
    args: &ScenarioArgs,
    opts: audit::RunOptions,
    err: &mut dyn Write,
) -> Result<audit::Audit> {
    let eps = solve::approx::DEFAULT_EPSILON;
    let probe = estimate(net, &list, 1, engine, eps, args, opts, err)?;
    let mut batch = audit::Batch::new(net, list.iter, engine);
    batch.seed(probe, None);
    batch.finish(net, opts, None)
}

/// Without `--max-minutes`, a run estimated longer than this many minutes needs `--yes`.
pub const DEFAULT_MAX_MINUTES: f64 = 60.0;

/// Runs estimated to take at least this long say so on stderr before they start.
pub const ESTIMATE_NOTE_FROM: Duration = Duration::from_secs(10);

/// The cores this process may use (1 when unknown).
fn cores() -> usize {
    std::thread::available_parallelism().map_or(1, usize::from)
}

/// Run options from the command line; `--threads` above the core count is capped at it
/// (with a note), since more threads than cores only add contention.
pub(crate) fn run_options(args: &ScenarioArgs, err: &mut dyn Write) -> Result<audit::RunOptions> {
    let threads = match args.threads {
        Some(0) => return Err(Error::Usage("--threads must be at least 1".into())),
        Some(t) if t > cores() => {
            if !args.quiet {
                note(report::text::note_threads_capped(err, t, cores()));
            }
            Some(cores())
        }
        other => other,
    };
    Ok(audit::RunOptions {
        threads,
        progress: !args.quiet,
    })
}

/// The time limit of a run in minutes (`None` with `--yes`), checked before any work.
fn time_limit(args: &ScenarioArgs) -> Result<Option<f64>> {
    if let Some(m) = args.max_minutes
        && !(m.is_finite() && m > 0.0)
    {
        return Err(Error::Usage(format!(
            "--max-minutes must be a finite number > 0, got {m}"
        )));
    }
    Ok(if args.yes {
        None
    } else {
        Some(args.max_minutes.unwrap_or(DEFAULT_MAX_MINUTES))
    })
}

/// Estimates a run before its scenarios are enumerated: solves what the engine needs
/// first (the baseline) and one sample scenario, timed, then `baseline + sample ×
/// (count − 1) / threads`. Shows the estimate when long; refuses beyond the limit unless
/// `--yes`. Returns the probe, whose solves the batch reuses. `eps`: the ε of
/// `--engine approx`.
#[allow(clippy::too_many_arguments)]
fn estimate(
    net: &Network,
    list: &Scenarios<'_>,
    share: usize,
    engine: cli::Engine,
    eps: f64,
    args: &ScenarioArgs,
    opts: audit::RunOptions,
    err: &mut dyn Write,
) -> Result<audit::Probe> {
    let limit = time_limit(args)?;
    let count = (list.count as usize).div_ceil(share.max(1));
    let probe = audit::probe(net, engine, eps, Some(&list.sample))?;
    let threads = opts.threads.unwrap_or_else(cores).clamp(1, count.max(1));
    let first = probe.baseline_took + probe.sample_took;
    let rest = probe
        .sample_took
        .mul_f64(count.saturating_sub(1) as f64 / threads as f64);
    let minutes = (probe.baseline_took + probe.sample_took + rest).as_secs_f64() / 60.0;
    if !args.quiet && first + rest >= ESTIMATE_NOTE_FROM {
        note(report::text::note_estimate(
            err,
            count,
            probe.sample_took,
            threads,
            minutes,
        ));
    }
    if let Some(max) = limit
        && minutes > max
    {
        return Err(Error::Usage(report::text::estimate_refused(
            minutes,
            count,
            probe.sample_took.as_secs_f64(),
            max,
        )));
    }
    Ok(probe)
}

/// Runs the audit and returns it with the baseline's evaluation (solved separately when
/// the scenario list does not hold the baseline).
pub fn audit_network(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
) -> Result<(audit::Audit, solve::Evaluation)> {
    audit_network_with(net, scenarios, opts, cli::Engine::Edge)
}

/// [`audit_network`] with a choice of engine.
pub fn audit_network_with(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: audit::RunOptions,
    engine: cli::Engine,
) -> Result<(audit::Audit, solve::Evaluation)> {
    let audit = audit::run_with(net, scenarios, opts, engine)?;
    let baseline = with_baseline(net, &audit)?;
    Ok((audit, baseline))
}

/// The baseline's evaluation: with `--down`, the down state (what every scenario keeps
/// down), else the intact network.
pub(crate) fn with_baseline(net: &Network, audit: &audit::Audit) -> Result<solve::Evaluation> {
    with_full_baseline(net, audit, &|_| {
        Err(Error::Usage("internal: thin baseline".into()))
    })
}

/// The baseline's full evaluation: the audit's (read back with `full` when thin), else
/// solved.
fn with_full_baseline(
    net: &Network,
    audit: &audit::Audit,
    full: report::json::Full<'_>,
) -> Result<solve::Evaluation> {
    match audit.scenarios.iter().position(Scenario::is_baseline) {
        Some(i) if audit.eval(i).is_thin(net) => full(audit.outage_of[i]),
        Some(i) => Ok(audit.eval(i).clone()),
        None => {
            let down = audit.scenarios.first().map_or(&[][..], |s| &s.down[..]);
            solve::evaluate(net, &Scenario::baseline().with_down(down).outage(net))
        }
    }
}

/// Parses `--shard I/N` (1 ≤ I ≤ N).
fn parse_shard(text: &str) -> Result<(usize, usize)> {
    let bad = || {
        Error::Usage(format!(
            "--shard must be I/N with 1 <= I <= N (e.g. 3/8), got {:?}",
            model::strict::printable(text)
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
    if let Some(t) = args.gate_tolerance {
        gate::max_limit("--gate-tolerance", t)?;
        if gates.is_empty() {
            return Err(Error::Usage(
                "--gate-tolerance needs a gate (--max-shortfall, --max-stranded or \
                 --min-served-fraction)"
                    .into(),
            ));
        }
    }
    Ok(gates)
}

/// The fingerprint of an audit's results: the program version, the network file's bytes
/// and the options that decide the scenario list.
fn audit_fingerprint(args: &AuditArgs, network_text: &str) -> String {
    run_fingerprint(
        network_text,
        args.fail.as_deref(),
        args.scenarios.depth,
        &args.scenarios.kinds,
        &match args.engine {
            // ε decides the results: a journal of another ε is not resumed.
            cli::Engine::Approx => format!("Approx:{}", args.epsilon.unwrap_or_default()),
            other => format!("{other:?}"),
        },
        args.scenarios.down.as_deref(),
    )
}

/// The ε of `--engine approx` (default [`solve::approx::DEFAULT_EPSILON`]); `--epsilon`
/// outside (0, 0.5] or without `--engine approx`, or `--engine approx` with `--shard`
/// (a part file does not carry ε), is a usage error.
fn approx_epsilon(args: &AuditArgs) -> Result<f64> {
    use solve::approx::{DEFAULT_EPSILON, MAX_EPSILON, epsilon_ok};
    match (args.engine, args.epsilon) {
        (cli::Engine::Approx, _) if args.shard.is_some() => Err(Error::Usage(
            "--engine approx with --shard is not supported: a part file does not carry ε".into(),
        )),
        (cli::Engine::Approx, None) => Ok(DEFAULT_EPSILON),
        (cli::Engine::Approx, Some(e)) if epsilon_ok(e) => Ok(e),
        (cli::Engine::Approx, Some(e)) => Err(Error::Usage(format!(
            "--epsilon must be > 0 and at most {MAX_EPSILON}, got {e}"
        ))),
        (_, Some(_)) => Err(Error::Usage("--epsilon is only for --engine approx".into())),
        (_, None) => Ok(DEFAULT_EPSILON),
    }
}

/// [`audit_fingerprint`] from its parts (also what `merge` recomputes from a part header).
fn run_fingerprint(
    network_text: &str,
    fail: Option<&str>,
    depth: usize,
    kinds: &str,
    engine: &str,
    down: Option<&str>,
) -> String {
    let options = match fail {
        Some(f) => format!("fail={f}"),
        None => format!("depth={depth};kinds={kinds}"),
    } + &format!(";engine={engine}")
        + &down.map(|d| format!(";down={d}")).unwrap_or_default();
    journal::fingerprint(&[
        b"redoubt audit",
        env!("CARGO_PKG_VERSION").as_bytes(),
        network_text.as_bytes(),
        options.as_bytes(),
    ])
}

/// The risk figures of an enumerated run (none for one named scenario, `--fail`, or when
/// no element of the pool has a failure probability).
fn risk_of(
    net: &Network,
    args: &ScenarioArgs,
    named: bool,
    audit: &audit::Audit,
) -> Result<Option<risk::Risk>> {
    if named {
        return Ok(None);
    }
    let kinds = Kinds::parse(&args.kinds)?;
    let pool = scenario::pool_without(net, kinds, &down_for(net, args)?);
    Ok(risk::assess(net, &pool, audit))
}

fn run_audit(args: &AuditArgs, out: &mut dyn Write, err: &mut dyn Write) -> Result<Outcome> {
    let gates = gates_of(args)?;
    time_limit(&args.scenarios)?;
    let shard = args.shard.as_deref().map(parse_shard).transpose()?;
    let eps = approx_epsilon(args)?;
    if shard.is_some() {
        report::text::refuse_with_shard(args.csv.is_some(), args.report.is_some(), args.why)?;
    }
    let input = args.scenarios.network.as_path();
    // A device or a FIFO (--json /dev/null) is written through and keeps no journal.
    let journal_path = args
        .json
        .as_deref()
        .filter(|j| !report::file::is_written_through(j))
        .map(journal::path_for);
    report::file::check_distinct(&audit_outputs(args, journal_path.as_deref()))?;
    if let Some(json) = &args.json {
        report::file::check_output("--json", json, &[input])?;
    }
    match &journal_path {
        Some(jp) => journal::check_path(jp, args.resume)?,
        None if args.resume && args.json.is_some() => {
            return Err(Error::Usage(
                "--resume: the --json output is a device or a FIFO, which keeps no journal".into(),
            ));
        }
        None => {}
    }
    if let Some(csv) = &args.csv {
        report::file::check_output("--csv", csv, &[input])?;
    }
    if shard.is_some() && args.scenarios.down.is_some() {
        return Err(Error::Usage(
            "--shard with --down is not supported: a part file does not carry the \
             maintenance state"
                .into(),
        ));
    }
    let report_files = report_files(args, input)?;
    let (net, text) = read_network(input)?;
    let list = scenario_list(&net, &args.scenarios, args.fail.as_deref())?;
    let opts = run_options(&args.scenarios, err)?;
    if let Some(mode) = routing_mode(args.scenarios.routing) {
        if args.report.is_some() {
            return Err(Error::Usage(
                "--report is not available with --routing nearest|steered yet".into(),
            ));
        }
        if args.close && mode == routing::Mode::Nearest {
            return Err(nearest_refused("audit --close"));
        }
        if shard.is_some() {
            return Err(Error::Usage(
                "--shard is for --routing best (the routed models are fast)".into(),
            ));
        }
        let scenarios: Vec<Scenario> = list.iter.collect();
        return run_routed_audit(args, &net, scenarios, opts, mode, &gates, out);
    }
    let share = shard.map_or(1, |s| s.1);
    let probe = estimate(
        &net,
        &list,
        share,
        args.engine,
        eps,
        &args.scenarios,
        opts,
        err,
    )?;
    // --close reads every evaluation in full; otherwise only the JSON does, from the journal.
    // --close, --why and --report read every evaluation in full; otherwise only the JSON
    // does, from the journal.
    let whole = args.close || args.why || args.fail.is_some() || args.report.is_some();
    let keep = match (whole, &journal_path, &args.json) {
        (true, _, _) | (false, None, Some(_)) => audit::Keep::Full,
        (false, Some(_), _) => audit::Keep::ThinJournaled,
        (false, None, None) => audit::Keep::Thin,
    };
    let mut batch = audit::Batch::new(&net, list.iter, args.engine)
        .keeping(keep)
        .with_epsilon(eps);
    if let Some((i, n)) = shard {
        batch = batch.shard(i, n);
    }
    let fingerprint = audit_fingerprint(args, &text);
    let journal = match &journal_path {
        Some(jp) => {
            let fp = match shard {
                Some((i, n)) => journal::fingerprint(&[
                    fingerprint.as_bytes(),
                    format!("shard={i}/{n}").as_bytes(),
                ]),
                None => fingerprint.clone(),
            };
            let (j, found, opened) = Journal::open(jp, &fp, batch.outages(), args.resume)?;
            for (line, why) in batch.restore_verified(&net, found, &j, opts)? {
                note(report::text::note_journal_line(err, jp, line, &why));
            }
            if !args.scenarios.quiet {
                let opened = match opened {
                    journal::Opened::Resumed(_) => journal::Opened::Resumed(j.saved()),
                    other => other,
                };
                note(report::text::note_resume(err, jp, opened, batch.outages()));
            }
            Some(j)
        }
        None => None,
    };
    batch.seed(probe, journal.as_ref());
    let interrupted = |e: Error| match (&e, &journal) {
        (Error::Interrupted(_), Some(j)) => Error::Interrupted(format!(
            "{} of {} saved in {}; run the same command with --resume to continue",
            j.saved(),
            report::count(j.outages(), "outage"),
            j.path().display()
        )),
        (Error::Interrupted(_), None) => {
            Error::Interrupted("nothing kept (results are journaled only with --json FILE)".into())
        }
        _ => e,
    };
    batch
        .solve_rest(&net, opts, journal.as_ref())
        .map_err(interrupted)?;
    if let Some(why) = journal.as_ref().and_then(Journal::failure) {
        note(report::text::note_journal_failed(err, &why));
    }
    if let (Some((i, n)), Some(path), Some(j)) = (shard, &args.json, &journal) {
        let header = journal::PartHeader {
            redoubt_part: journal::PART_VERSION,
            fingerprint,
            shard: i,
            shards: n,
            outages: batch.outages(),
            network: text.clone(),
            depth: args.scenarios.depth,
            kinds: args.scenarios.kinds.clone(),
            fail: args.fail.clone(),
            engine: format!("{:?}", args.engine),
        };
        let own = batch.own();
        let lines = own.iter().map(|&k| match j.line(k)? {
            Some(line) => Ok(line),
            None => batch
                .evaluation(k)
                .and_then(|e| journal::to_line(k, e))
                .ok_or_else(|| {
                    Error::Solver(format!(
                        "outage {k} has a value a part file cannot carry exactly"
                    ))
                }),
        });
        let mut failed = None;
        report::file::write_atomic(path, |w| {
            journal::write_part(w, &header, lines).map_err(|e| {
                let m = e.to_string();
                failed = Some(e);
                io::Error::other(m)
            })
        })
        .map_err(|e| interrupted(failed.take().unwrap_or(e)))?;
        journal.map(Journal::remove).transpose()?;
        stdout_result(report::text::write_shard(out, i, n, own.len(), path))?;
        return Ok(Outcome::Ok);
    }
    let audit = batch.into_audit();
    let saved = journal
        .as_ref()
        .map(|j| (j.saved(), j.outages(), j.path().to_path_buf()));
    let interrupted = move |e: Error| match (&e, &saved) {
        (Error::Interrupted(_), Some((n, of, path))) => Error::Interrupted(format!(
            "{n} of {} saved in {}; run the same command with --resume to continue",
            report::count(*of, "outage"),
            path.display()
        )),
        _ => e,
    };
    let risk = risk_of(&net, &args.scenarios, args.fail.is_some(), &audit)?;
    let reader = journal.as_ref().map(Journal::reader).transpose()?;
    let full = |k: usize| -> Result<solve::Evaluation> {
        match reader.as_ref().map(|j| j.read(k)).transpose()?.flatten() {
            Some(e) => Ok(e),
            None => Err(Error::Usage(format!(
                "internal: outage {k} is not journaled"
            ))),
        }
    };
    finish_audit(
        &net,
        &audit,
        &full,
        AuditOutput {
            json: args.json.as_deref(),
            csv: args.csv.as_deref(),
            risk: risk.as_ref(),
            gates: &gates,
            gate_tolerance: args.gate_tolerance,
            close: args.close,
            why: args.why || args.fail.is_some(),
            report: report_files.as_ref(),
            top: args.top,
            opts,
        },
        journal,
        &interrupted,
        out,
    )
}

/// Every file an audit writes, with the flag that asks for it, for
/// [`report::file::check_distinct`]: `--json`, its journal, `--csv`, the two `--report` files.
fn audit_outputs(args: &AuditArgs, journal: Option<&Path>) -> Vec<(String, PathBuf)> {
    let mut outputs = Vec::new();
    if let Some(json) = &args.json {
        outputs.push(("--json".to_string(), json.clone()));
    }
    if let Some(jp) = journal {
        outputs.push(("the journal of --json".to_string(), jp.to_path_buf()));
    }
    if let Some(csv) = &args.csv {
        outputs.push(("--csv".to_string(), csv.clone()));
    }
    if let Some(dir) = &args.report {
        for name in [report::html::HTML_FILE, report::html::MARKDOWN_FILE] {
            outputs.push((format!("--report ({name})"), dir.join(name)));
        }
    }
    outputs
}

/// What an audit (or a merge) writes.
struct AuditOutput<'a> {
    json: Option<&'a Path>,
    csv: Option<&'a Path>,
    risk: Option<&'a risk::Risk>,
    gates: &'a [Gate],
    gate_tolerance: Option<f64>,
    close: bool,
    /// Explain the worst scenario (`--why`, or by default with `--fail`).
    why: bool,
    /// `--report DIR`'s HTML and Markdown files.
    report: Option<&'a (PathBuf, PathBuf)>,
    top: usize,
    opts: audit::RunOptions,
}

/// Closings, gates, the `--json` file (streamed; thin evaluations read back with `full`),
/// the journal removed, then the report on `out`.
#[allow(clippy::too_many_arguments)]
fn finish_audit(
    net: &Network,
    audit: &audit::Audit,
    full: report::json::Full<'_>,
    o: AuditOutput<'_>,
    journal: Option<Journal>,
    interrupted: &dyn Fn(Error) -> Error,
    out: &mut dyn Write,
) -> Result<Outcome> {
    let baseline = with_full_baseline(net, audit, full)?;
    let cands = expand::Candidates::of(net);
    let closings = if o.close {
        Some(
            audit::par_map(
                &(0..audit.outages.len()).collect::<Vec<_>>(),
                o.opts,
                "closing",
                |&k| expand::close(net, &audit.outages[k], &audit.evaluations[k], &cands),
            )
            .map_err(interrupted)?,
        )
    } else {
        None
    };
    let verdicts = gate::check(audit, o.gates, o.gate_tolerance);
    let why = if o.why {
        why_of(net, audit, &cands, closings.as_deref())?
    } else {
        None
    };
    // Files first: a reader that closes stdout early never costs the --json file.
    if let Some(path) = o.json {
        let closing_json = closings.as_ref().map(|c| {
            audit
                .outage_of
                .iter()
                .map(|&k| report::json::closing_json(net, c[k].as_ref(), cands.default_costs))
                .collect::<Vec<_>>()
        });
        let mut doc =
            report::json::audit_json_with(net, audit, &baseline, closing_json.as_deref(), full);
        doc.gates = report::json::gates_json(audit, &verdicts);
        if let Some(r) = o.risk {
            report::json::attach_risk(&mut doc, net, audit, r);
        }
        report::file::write_atomic(path, |w| report::json::write(w, &doc)).map_err(interrupted)?;
    }
    if let Some(path) = o.csv {
        report::file::write_atomic(path, |w| {
            report::csv::write_audit(w, audit, closings.as_deref(), o.risk)
        })
        .map_err(interrupted)?;
    }
    if let Some((html, md)) = o.report {
        let r = report::html::Report {
            net,
            audit,
            baseline: &baseline,
            closings: closings.as_deref(),
            risk: o.risk,
            gates: &verdicts,
            top: o.top,
        };
        report::file::write_atomic(html, |w| report::html::write(w, &r)).map_err(interrupted)?;
        report::file::write_atomic(md, |w| report::markdown::write(w, &r)).map_err(interrupted)?;
    }
    if let Some(j) = journal {
        j.remove()?;
    }
    stdout_result(report::text::write_audit(
        out,
        net,
        audit,
        &baseline,
        closings.as_deref().map(|c| report::text::ClosingPart {
            closings: c,
            default_costs: cands.default_costs,
        }),
        o.risk,
        &verdicts,
        o.top,
        why.as_ref().map(|(i, c)| report::text::WhyPart {
            scenario: *i,
            closing: c.as_ref(),
        }),
    ))?;
    Ok(if verdicts.iter().all(|g| g.passed) {
        Outcome::Ok
    } else {
        Outcome::GateFailed
    })
}

/// `merge`: reads the part files, rebuilds the run's scenario list from the network and
/// options they carry, and writes what the unsharded audit writes.
fn run_merge(args: &MergeArgs, out: &mut dyn Write) -> Result<Outcome> {
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
        )
    })?;
    let net = Network::from_bytes(h.network.as_bytes())
        .map_err(|e| Error::Input(format!("merge: the network in the parts: {e}")))?;
    let engine = match h.engine.as_str() {
        "Edge" => cli::Engine::Edge,
        _ => cli::Engine::Walks,
    };
    let list = scenarios_for(&net, h.depth, &h.kinds, h.fail.as_deref(), &[])?;
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
        held[k] = Some(if k == 0 || whole { e } else { e.thin() });
        Ok(())
    })?;
    batch.restore(held);
    let audit = batch.into_audit();
    let full = |k: usize| parts.read(k);
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
            json: args.json.as_deref(),
            csv: args.csv.as_deref(),
            risk: risk.as_ref(),
            gates: &[],
            gate_tolerance: None,
            close: false,
            why: args.why,
            report: report_files.as_ref(),
            top: args.top,
            opts,
        },
        None,
        &|e| e,
        out,
    )
}

/// `--report DIR`: the folder made when missing, and its two files checked before solving.
fn report_files(args: &AuditArgs, input: &Path) -> Result<Option<(PathBuf, PathBuf)>> {
    let mut others = vec![input];
    others.extend(args.json.as_deref());
    others.extend(args.csv.as_deref());
    report_dir(args.report.as_deref(), &others)
}

/// The `--report DIR` folder (made when missing) and its two files, checked as outputs
/// that are none of `others`.
fn report_dir(dir: Option<&Path>, others: &[&Path]) -> Result<Option<(PathBuf, PathBuf)>> {
    let Some(dir) = dir else {
        return Ok(None);
    };
    std::fs::create_dir_all(dir).map_err(|source| Error::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let html = dir.join(report::html::HTML_FILE);
    let md = dir.join(report::html::MARKDOWN_FILE);
    report::file::check_output("--report", &html, others)?;
    report::file::check_output("--report", &md, others)?;
    Ok(Some((html, md)))
}

/// The scenario `--why` explains (by default with `--fail`): the worst one, with its
/// closing (taken from `--close`, else computed for it alone).
fn why_of(
    net: &Network,
    audit: &audit::Audit,
    cands: &expand::Candidates,
    closings: Option<&[Option<expand::Closing>]>,
) -> Result<Option<(usize, Option<expand::Closing>)>> {
    let Some(&i) = rank::worst_first(audit).first() else {
        return Ok(None);
    };
    let k = audit.outage_of[i];
    let closing = match closings {
        Some(c) => c[k].clone(),
        None => expand::close(net, &audit.outages[k], &audit.evaluations[k], cands)?,
    };
    Ok(Some((i, closing)))
}

fn run_plan(args: &PlanArgs, out: &mut dyn Write, err: &mut dyn Write) -> Result<Outcome> {
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
    time_limit(&args.scenarios)?;
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
    let opts = run_options(&args.scenarios, err)?;
    match routing_mode(args.scenarios.routing) {
        Some(routing::Mode::Nearest) => return Err(nearest_refused("plan")),
        Some(mode) => {
            let scenarios: Vec<Scenario> = list.iter.collect();
            let routed = Routed {
                net: &net,
                text: &text,
                mode,
            };
            return run_routed_plan(args, routed, scenarios, opts, goal, out, err);
        }
        None => {}
    }
    let audit = solve_list(&net, list, cli::Engine::Walks, &args.scenarios, opts, err)?;
    let plan = expand::plan(&net, &audit, goal, opts)?;
    let default_costs = expand::Candidates::of(&net).default_costs;
    if let Some(path) = &args.json {
        let doc = report::json::plan_json(&net, &audit, &plan, default_costs);
        report::file::write_atomic(path, |w| report::json::write(w, &doc))?;
    }
    write_applied(args, &text, &net, &plan.add, err)?;
    stdout_result(report::text::write_plan(
        out,
        &net,
        &audit,
        &plan,
        default_costs,
        args.top,
    ))?;
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

/// `audit --routing nearest|steered`: the routed audit beside the best re-route (no
/// journal: the routed models are fast).
fn run_routed_audit(
    args: &AuditArgs,
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

/// `plan --apply OUT`: the input file with the purchase `add` (edited in place), written
/// atomically, and a note on stderr.
fn write_applied(
    args: &PlanArgs,
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

/// The network of a routed plan, its file's text (for `--apply`) and the routing model.
struct Routed<'a> {
    net: &'a Network,
    text: &'a str,
    mode: routing::Mode,
}

/// `plan --routing steered`: one purchase for the steered model.
fn run_routed_plan(
    args: &PlanArgs,
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

fn read_text(path: &Path) -> Result<String> {
    model::read_input_text(path)
}

/// `import`: converts, validates the result as any network file is validated, writes it
/// atomically, and prints its `check` summary. A node-link import is written as it is
/// generated (its all-pairs demands never exist as a list), so its memory is the network's.
fn run_import(from: &cli::ImportFrom, out: &mut dyn Write, err: &mut dyn Write) -> Result<Outcome> {
    let mut fallback = None;
    let not_valid = |inputs: &[&Path]| {
        let names = inputs
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(", ");
        move |e: Error| match e {
            Error::Input(m) => Error::Input(format!(
                "the imported network from {names} is not valid: {m}"
            )),
            other => other,
        }
    };
    let net = match from {
        cli::ImportFrom::Networkx(a) => {
            report::file::check_output("--json", &a.json, &[a.file.as_path()])?;
            let text = read_text(&a.file)?;
            let graph_name = serde_json::from_str::<serde_json::Value>(&text)
                .ok()
                .and_then(|v| v["graph"]["name"].as_str().map(str::to_string));
            let name = a.name.clone().or(graph_name).unwrap_or_else(|| {
                a.file
                    .file_stem()
                    .map_or("imported network".into(), |s| s.to_string_lossy().into())
            });
            let rules = model::import::Rules {
                capacity: a.capacity,
                capacity_attr: a.capacity_attr.clone(),
                processing_sites: a.processing_sites,
                processing: a.processing,
                demand: a.demand,
                required_fraction: a.required_fraction,
            };
            let imported = model::import::from_node_link(&text, &name, &rules)
                .map_err(|e| prefix(e, &a.file))?;
            if let (Some((n, of)), Some(attr), Some(c)) =
                (imported.fallback, &a.capacity_attr, a.capacity)
            {
                fallback = Some((n, of, attr.clone(), c));
            }
            drop(text);
            let net = imported.doc.network().map_err(not_valid(&[&a.file]))?;
            report::file::write_atomic(&a.json, |w| report::json::write(w, &imported.doc))?;
            net
        }
        cli::ImportFrom::Csv(a) => {
            let ins = [a.sites.as_path(), a.links.as_path(), a.demands.as_path()];
            report::file::check_output("--json", &a.json, &ins)?;
            let texts = [
                read_text(&a.sites)?,
                read_text(&a.links)?,
                read_text(&a.demands)?,
            ];
            let shown = ins.map(|p| p.display().to_string());
            let file = |i: usize| model::import::CsvFile {
                path: &shown[i],
                text: &texts[i],
            };
            let doc = model::import::from_csv(&a.name, file(0), file(1), file(2))?;
            let text = report::json::to_string(&doc);
            let net = Network::from_json(&text).map_err(not_valid(&ins))?;
            report::file::write_atomic(&a.json, |w| report::json::write(w, &doc))?;
            net
        }
    };
    if let Some((n, of, attr, capacity)) = fallback {
        note(report::text::note_capacity_fallback(
            err, n, of, &attr, capacity,
        ));
    }
    let cut_off = solve::baseline_cut_off(&net);
    stdout_result(report::text::write_check(out, &net, &cut_off))?;
    Ok(Outcome::Ok)
}

fn prefix(e: Error, path: &Path) -> Error {
    match e {
        Error::Input(m) => Error::Input(format!("{}: {m}", path.display())),
        other => other,
    }
}

/// Runs one command line: reports go to `out` (standard output), notes to `err`.
pub fn run(cli: Cli, out: &mut dyn Write, err: &mut dyn Write) -> Result<Outcome> {
    match cli.command {
        Command::Check { network } => {
            let net = load(&network)?;
            let cut_off = solve::baseline_cut_off(&net);
            stdout_result(report::text::write_check(out, &net, &cut_off))?;
            Ok(Outcome::Ok)
        }
        Command::Audit(args) => {
            audit::install_interrupt_handler();
            run_audit(&args, out, err)
        }
        Command::Merge(args) => {
            audit::install_interrupt_handler();
            run_merge(&args, out)
        }
        Command::Import(from) => {
            audit::install_interrupt_handler();
            run_import(&from, out, err)
        }
        Command::Compare(args) => {
            audit::install_interrupt_handler();
            compare::run(&args, out, err)
        }
        Command::Plan(args) => {
            audit::install_interrupt_handler();
            run_plan(&args, out, err)
        }
    }
}
