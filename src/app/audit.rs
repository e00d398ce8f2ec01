//! `redoubt audit` (best re-route): output checks before solving, the estimate, the
//! journal and `--resume`, `--shard` part files, then closings, gates and every output
//! (`finish_audit`, which `merge` shares). A routed audit (`--routing nearest|steered`) runs through the same ending.

use std::io::{self, Write};
use std::path::{Path, PathBuf};

use super::nearest_refused;
use super::options::AuditOptions;
use super::scenarios::{estimate, risk_of, run_options, scenario_list};
use super::{Outcome, note, read_network, stdout_result};
use crate::audit;
use crate::baseline::with_full_baseline;
use crate::error::{Error, Result};
use crate::expand;
use crate::gate::{self, Gate};
use crate::journal::{self, Journal};
use crate::model::Network;
use crate::report;
use crate::risk;
use crate::routing;
use crate::solve;

/// The fingerprint of an audit's results: the program version, the network file's bytes
/// and the options that decide the scenario list.
fn audit_fingerprint(o: &AuditOptions, network_text: &str) -> String {
    run_fingerprint(
        network_text,
        o.fail.as_deref(),
        o.scenarios.depth,
        &o.scenarios.kinds,
        &o.engine.to_string(),
        o.scenarios.down.as_deref(),
        o.scenarios.matrix.as_deref(),
    )
}

/// [`audit_fingerprint`] from its parts (also what `merge` recomputes from a part header):
/// FNV-1a 64 over the command, the version, the network text and the options
/// (`fail=…` or `depth=…;kinds=…`, then `;engine=` and the engine as
/// [`crate::solve::Engine`]'s `Display` names it (its [`crate::solve::Engine::as_str`], or
/// `Approx:{ε}`), then `;down=…`, then `;matrix=…` with `--matrix`).
/// O(size of the network text).
pub(super) fn run_fingerprint(
    network_text: &str,
    fail: Option<&str>,
    depth: usize,
    kinds: &str,
    engine: &str,
    down: Option<&str>,
    matrix: Option<&str>,
) -> String {
    let options = match fail {
        Some(f) => format!("fail={f}"),
        None => format!("depth={depth};kinds={kinds}"),
    } + &format!(";engine={engine}")
        + &down.map(|d| format!(";down={d}")).unwrap_or_default()
        + &matrix.map(|m| format!(";matrix={m}")).unwrap_or_default();
    journal::fingerprint(&[
        b"redoubt audit",
        env!("CARGO_PKG_VERSION").as_bytes(),
        network_text.as_bytes(),
        options.as_bytes(),
    ])
}

/// `audit`: every output path checked (and the journal opened or refused) before the
/// network is read, the estimate before anything is enumerated, the batch solved (restored
/// from the journal with `--resume`, one shard's slice with `--shard`), then the part file
/// or [`finish_audit`]. The flags were checked when lowered ([`super::options`]).
pub(super) fn run(
    args: &AuditOptions,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> Result<Outcome> {
    let shard = args.shard;
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
    let opts = run_options(&args.scenarios, err);
    if net.chains.is_some() && !args.scenarios.quiet {
        let how = match (args.scenarios.routing, args.engine) {
            (Some(_), _) => "the fixed routes of each chain's legs (routing as deployed)",
            (None, crate::solve::Engine::Edge) => "the layered edge LP of service chains",
            (None, crate::solve::Engine::Approx { .. }) => {
                "the (1−ε) engine on the layered walks of service chains"
            }
            _ => {
                "the layered walk engine of service chains (`--engine edge`: the layered \
                 edge LP)"
            }
        };
        note(writeln!(
            err,
            "note: the file lists `functions`: every scenario is solved with {how}"
        ));
    }
    if let Some(mode) = args.scenarios.routing {
        if args.close && mode == routing::Mode::Nearest {
            return Err(nearest_refused("audit --close"));
        }
        if shard.is_some() {
            return Err(Error::Usage(
                "--shard is for --routing best (the routed models are fast)".into(),
            ));
        }
        if args.exact_top.is_some() {
            return Err(Error::Usage(
                "--exact-top is for --routing best (--engine approx)".into(),
            ));
        }
        let ra = routing::run(&net, list.iter.collect(), mode, opts, true)?;
        let risk = risk_of(&net, &args.scenarios, args.fail.is_some(), &ra.audit)?;
        let o = AuditOutput {
            why: false,
            routed: Some(&ra),
            ..AuditOutput::of_audit(args, risk.as_ref(), report_files.as_ref(), opts)
        };
        let thin = |_: audit::OutageId| Err(Error::Internal("thin routed evaluation".into()));
        return finish_audit(&net, &ra.audit, &thin, o, None, &|e| e, out);
    }
    let share = shard.map_or(1, |s| s.1);
    let probe = estimate(&net, &list, share, args.engine, &args.scenarios, opts, err)?;
    // --close, --why and --report read every evaluation in full; otherwise only the JSON
    // does, from the journal.
    let whole = args.close || args.why || args.fail.is_some() || args.report.is_some();
    let keep = match (whole, &journal_path, &args.json) {
        (true, _, _) | (false, None, Some(_)) => audit::Keep::Full,
        (false, Some(_), _) => audit::Keep::ThinJournaled,
        (false, None, None) => audit::Keep::Thin,
    };
    let mut batch = audit::Batch::new(&net, list.iter, args.engine).keeping(keep);
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
            engine: args.engine.as_str().to_string(),
            matrix: args.scenarios.matrix.clone(),
            headroom: args.headroom,
        };
        let own = batch.own();
        let lines = own.iter().map(|&k| match j.line(k)? {
            Some(line) => Ok(line),
            None => batch
                .evaluation(k)
                .and_then(|e| journal::to_line(k, e))
                .ok_or_else(|| {
                    Error::Internal(format!(
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
    let mut audit = batch.into_audit();
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
    // --exact-top: the outages that could reach the N worst or decide a gate, solved
    // exactly and kept in full (never journaled: a resume solves them again).
    let screen = args
        .exact_top
        .map(|n| {
            crate::screening::confirm(&net, &mut audit, n, &args.gates, args.gate_tolerance, opts)
        })
        .transpose()
        .map_err(&interrupted)?;
    let risk = risk_of(&net, &args.scenarios, args.fail.is_some(), &audit)?;
    let reader = journal.as_ref().map(Journal::reader).transpose()?;
    let full = |k: audit::OutageId| -> Result<solve::Evaluation> {
        match reader.as_ref().map(|j| j.read(k)).transpose()?.flatten() {
            Some(e) => Ok(e),
            None => Err(Error::Internal(format!("outage {k} is not journaled"))),
        }
    };
    finish_audit(
        &net,
        &audit,
        &full,
        AuditOutput {
            why: args.why || args.fail.is_some(),
            screen: screen.as_ref(),
            ..AuditOutput::of_audit(args, risk.as_ref(), report_files.as_ref(), opts)
        },
        journal,
        &interrupted,
        out,
    )
}

/// Every file an audit writes, with the flag that asks for it, for
/// [`report::file::check_distinct`]: `--json`, its journal, `--csv`, the two `--report` files.
fn audit_outputs(args: &AuditOptions, journal: Option<&Path>) -> Vec<(String, PathBuf)> {
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
pub(super) struct AuditOutput<'a> {
    pub(super) json: Option<&'a Path>,
    pub(super) csv: Option<&'a Path>,
    pub(super) risk: Option<&'a risk::Risk>,
    pub(super) gates: &'a [Gate],
    pub(super) gate_tolerance: Option<f64>,
    pub(super) close: bool,
    /// Explain the worst scenario (`--why`, or by default with `--fail`).
    pub(super) why: bool,
    /// `--report DIR`'s HTML and Markdown files.
    pub(super) report: Option<&'a (PathBuf, PathBuf)>,
    pub(super) top: usize,
    /// Which scenarios of the `--json` document carry the per-demand lists.
    pub(super) detail: report::json::Detail,
    pub(super) opts: audit::RunOptions,
    /// A routed audit (`--routing nearest|steered`): its model closes, its baseline and
    /// comparison are shown.
    pub(super) routed: Option<&'a routing::RoutedAudit>,
    /// `--headroom`: the growth headroom of every outage (under the routed model when
    /// `routed`), the baseline's and the least.
    pub(super) headroom: bool,
    /// `--exact-top`: which outages were solved exactly.
    pub(super) screen: Option<&'a crate::screening::Screen>,
}

impl<'a> AuditOutput<'a> {
    /// What the outputs and report flags of every audit-like run share: `--json`, `--csv`,
    /// the risk figures, `--report`, `--top`, `--detail` and the run options; no gates, no
    /// closings, no explanation, no routed model, no headroom, no screen.
    pub(super) fn plain(
        json: Option<&'a Path>,
        csv: Option<&'a Path>,
        risk: Option<&'a risk::Risk>,
        report: Option<&'a (PathBuf, PathBuf)>,
        (top, detail): (usize, report::json::Detail),
        opts: audit::RunOptions,
    ) -> AuditOutput<'a> {
        AuditOutput {
            json,
            csv,
            risk,
            gates: &[],
            gate_tolerance: None,
            close: false,
            why: false,
            report,
            top,
            detail,
            opts,
            routed: None,
            headroom: false,
            screen: None,
        }
    }

    /// [`Self::plain`] with what `audit`'s command line adds: its gates, `--close` and
    /// `--headroom` (the explanation, routed model and screen left to the caller).
    fn of_audit(
        args: &'a AuditOptions,
        risk: Option<&'a risk::Risk>,
        report: Option<&'a (PathBuf, PathBuf)>,
        opts: audit::RunOptions,
    ) -> AuditOutput<'a> {
        AuditOutput {
            gates: &args.gates,
            gate_tolerance: args.gate_tolerance,
            close: args.close,
            headroom: args.headroom,
            ..AuditOutput::plain(
                args.json.as_deref(),
                args.csv.as_deref(),
                risk,
                report,
                (args.top, args.detail),
                opts,
            )
        }
    }
}

/// Closings, gates, the `--json` file (streamed; thin evaluations read back with `full`),
/// the journal removed, then the report on `out`.
#[allow(clippy::too_many_arguments)]
pub(super) fn finish_audit(
    net: &Network,
    audit: &audit::Audit,
    full: report::json::Full<'_>,
    o: AuditOutput<'_>,
    journal: Option<Journal>,
    interrupted: &dyn Fn(Error) -> Error,
    out: &mut dyn Write,
) -> Result<Outcome> {
    let baseline = match o.routed {
        Some(ra) => ra.baseline().routed.eval.clone(),
        None => with_full_baseline(net, audit, full)?,
    };
    let cands = expand::Candidates::of(net);
    let closer: &dyn solve::evaluator::Evaluator = match o.routed {
        Some(ra) => &ra.model,
        None => &solve::evaluator::Walks,
    };
    // Service chains buy function capacity per site and function.
    let offer = net
        .chains
        .as_ref()
        .map(|_| expand::chain_buy::Offer::of(net));
    let steered = o.routed.map(|ra| routing::chain::Steered {
        trees: &ra.model.trees,
    });
    let buyer: &dyn expand::chain_buy::ChainModel = match &steered {
        Some(s) => s,
        None => &expand::chain_buy::BestReroute,
    };
    let closings = if o.close {
        Some(
            audit::par_map(
                &(0..audit.outages.len()).collect::<Vec<_>>(),
                o.opts,
                "closing",
                |&k| {
                    let (outage, e) = (&audit.outages[k], &audit.evaluations[k]);
                    match &offer {
                        Some(offer) => expand::chain_buy::close_for(buyer, net, outage, e, offer),
                        None => expand::close_with(closer, net, outage, e, &cands),
                    }
                },
            )
            .map_err(interrupted)?,
        )
    } else {
        None
    };
    let headroom = if o.headroom {
        let model = o.routed.map(|ra| &ra.model);
        Some(crate::headroom::of_audit(net, audit, model, o.opts).map_err(interrupted)?)
    } else {
        None
    };
    let mut verdicts = gate::check(audit, o.gates, o.gate_tolerance);
    if let (Some(g), Some(h)) = (
        o.gates
            .iter()
            .find(|g| g.kind == gate::GateKind::MinHeadroom),
        &headroom,
    ) {
        verdicts.push(gate::check_headroom(&h.least, g.limit, o.gate_tolerance));
    }
    // A routed audit holds every evaluation in full.
    let full: report::json::Full<'_> = match o.routed {
        Some(_) => &report::json::all_full,
        None => full,
    };
    let why_closing;
    let mut model = report::model::Model::build(report::model::Parts {
        net,
        audit,
        baseline: &baseline,
        full,
        closings: closings.as_deref(),
        risk: o.risk,
        gates: &verdicts,
        why: None,
        routed: o.routed,
        top: o.top,
        headroom: headroom.as_ref(),
        detail: o.detail,
        screen: o.screen,
    });
    if o.report.is_some() {
        model = model.drawn();
    }
    if o.why {
        why_closing = why_of(net, audit, &cands, closings.as_deref(), model.worst())?;
        model.why = why_closing.as_ref().map(|(i, c)| report::text::WhyPart {
            scenario: *i,
            closing: c.as_ref(),
        });
    }
    use report::export::Exporter as _;
    // Files first: a reader that closes stdout early never costs the --json file.
    if let Some(path) = o.json {
        report::file::write_atomic(path, |w| report::export::Json.write(&model, w))
            .map_err(interrupted)?;
    }
    if let Some(path) = o.csv {
        report::file::write_atomic(path, |w| report::export::Csv.write(&model, w))
            .map_err(interrupted)?;
    }
    if let Some((html, md)) = o.report {
        report::file::write_atomic(html, |w| report::export::Html.write(&model, w))
            .map_err(interrupted)?;
        report::file::write_atomic(md, |w| report::export::Markdown.write(&model, w))
            .map_err(interrupted)?;
    }
    if let Some(j) = journal {
        j.remove()?;
    }
    stdout_result(report::export::Text.write(&model, out))?;
    Ok(if verdicts.iter().all(|g| g.passed) {
        Outcome::Ok
    } else {
        Outcome::GateFailed
    })
}

/// `--report DIR`: the folder made when missing, and its two files checked before solving.
fn report_files(args: &AuditOptions, input: &Path) -> Result<Option<(PathBuf, PathBuf)>> {
    let mut others = vec![input];
    others.extend(args.json.as_deref());
    others.extend(args.csv.as_deref());
    report_dir(args.report.as_deref(), &others)
}

/// The `--report DIR` folder (made when missing) and its two files, checked as outputs
/// that are none of `others`.
pub(super) fn report_dir(
    dir: Option<&Path>,
    others: &[&Path],
) -> Result<Option<(PathBuf, PathBuf)>> {
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
    worst: Option<audit::ScenarioId>,
) -> Result<Option<(audit::ScenarioId, Option<expand::Closing>)>> {
    let Some(i) = worst else {
        return Ok(None);
    };
    let k = audit.outage_of[i];
    let closing = match closings {
        Some(c) => c[k].clone(),
        // Service chains buy function capacity.
        None if net.chains.is_some() => expand::chain_buy::close(
            net,
            &audit.outages[k],
            &audit.evaluations[k],
            &expand::chain_buy::Offer::of(net),
        )?,
        None => expand::close(net, &audit.outages[k], &audit.evaluations[k], cands)?,
    };
    Ok(Some((i, closing)))
}
