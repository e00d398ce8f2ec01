//! The scenario list of a command, its estimate before anything is enumerated, and the
//! plain solve of a list (what `plan` and `compare` run).

use std::io::Write;
use std::time::Duration;

use super::note;
use super::options::{ScenarioOptions, cores};
use crate::audit::{self, RunOptions};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::report;
use crate::risk;
use crate::scenario::{self, Element, Kinds, Scenario};
use crate::solve::Engine;

/// Largest scenario count a run accepts; beyond it the user is asked to narrow the run.
pub const MAX_SCENARIOS: u128 = 2_000_000;

/// Runs estimated to take at least this long say so on stderr before they start.
pub const ESTIMATE_NOTE_FROM: Duration = Duration::from_secs(10);

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

/// [`scenarios_for`] of a run's scenario options (with its `--down`).
pub(super) fn scenario_list<'a>(
    net: &'a Network,
    o: &ScenarioOptions,
    fail: Option<&str>,
) -> Result<Scenarios<'a>> {
    let down = down_for(net, o)?;
    let list = scenarios_for(net, o.depth, &o.kinds, fail, &down)?;
    Ok(under_matrices(
        net,
        list,
        matrices_for(net, o.matrix.as_deref())?,
    ))
}

/// The matrices a run evaluates: those `--matrix` names (in the order written, each
/// once), else every matrix of the file in file order (`[0]` without `matrices`). An
/// unknown id is refused with the ids the file has and the nearest one. O(ids · matrices).
pub fn matrices_for(net: &Network, list: Option<&str>) -> Result<Vec<usize>> {
    let Some(list) = list else {
        return Ok((0..net.matrix_count()).collect());
    };
    let known: Vec<&str> = (0..net.matrix_count()).map(|m| net.matrix_id(m)).collect();
    let mut out: Vec<usize> = Vec::new();
    for (i, id) in list.split(',').enumerate() {
        let Some(m) = net.matrix_index(id) else {
            let shown = crate::model::strict::printable(id);
            let hint = match crate::model::strict::near_miss(id, &known) {
                Some(k) => format!("; did you mean \"{k}\"?"),
                None => String::new(),
            };
            let what = if id.is_empty() {
                format!(
                    "--matrix: entry {} of \"{}\" is empty",
                    i + 1,
                    printable_list(list)
                )
            } else {
                format!("--matrix: no traffic matrix \"{shown}\"{hint}")
            };
            return Err(Error::Usage(format!(
                "{what} (the file's matrices: {})",
                known.join(", ")
            )));
        };
        if out.contains(&m) {
            return Err(Error::Usage(format!(
                "--matrix: \"{}\" is named twice; name each matrix once",
                net.matrix_id(m)
            )));
        }
        out.push(m);
    }
    Ok(out)
}

/// `list` made printable for a message.
fn printable_list(list: &str) -> String {
    crate::model::strict::printable(list)
}

/// Every scenario of `list` under each matrix of `matrices` in turn (grouped by scenario:
/// scenario 1 under each matrix, then scenario 2, …); `list` itself when that is `[0]`.
/// The count is multiplied; still lazy. O(1) until iterated.
pub fn under_matrices<'a>(
    net: &'a Network,
    list: Scenarios<'a>,
    matrices: Vec<usize>,
) -> Scenarios<'a> {
    if net.matrix_count() == 1 {
        return list;
    }
    let first = matrices[0];
    Scenarios {
        count: list.count * matrices.len() as u128,
        sample: list.sample.under_named(net, first),
        iter: Box::new(list.iter.flat_map(move |s| {
            matrices
                .clone()
                .into_iter()
                .map(move |m| s.clone().under_named(net, m))
        })),
    }
}

/// The elements `--down` keeps down in every scenario (empty without it).
pub(super) fn down_for(net: &Network, o: &ScenarioOptions) -> Result<Vec<Element>> {
    match &o.down {
        Some(list) => Element::parse_list_for("--down", list, net),
        None => Ok(Vec::new()),
    }
}

/// The run options of a run, with the note that `--threads` was capped at the core count
/// (unless `--quiet`), written where the run starts.
pub(super) fn run_options(o: &ScenarioOptions, err: &mut dyn Write) -> RunOptions {
    if let Some((asked, cores)) = o.threads_capped
        && !o.quiet
    {
        note(report::text::note_threads_capped(err, asked, cores));
    }
    o.run
}

/// The risk figures of an enumerated run (none for one named scenario, `--fail`, or when
/// no element of the pool has a failure probability).
pub(super) fn risk_of(
    net: &Network,
    o: &ScenarioOptions,
    named: bool,
    audit: &audit::Audit,
) -> Result<Option<risk::Risk>> {
    if named {
        return Ok(None);
    }
    let kinds = Kinds::parse(&o.kinds)?;
    let pool = scenario::pool_without(net, kinds, &down_for(net, o)?);
    Ok(risk::assess(net, &pool, audit))
}

/// Estimates, then solves every scenario of `list` with `engine` (no journal), keeping
/// every evaluation in full.
pub(super) fn solve_list(
    net: &Network,
    list: Scenarios<'_>,
    engine: Engine,
    o: &ScenarioOptions,
    opts: RunOptions,
    err: &mut dyn Write,
) -> Result<audit::Audit> {
    let probe = estimate(net, &list, 1, engine, o, opts, err)?;
    let mut batch = audit::Batch::new(net, list.iter, engine);
    batch.seed(probe, None);
    batch.finish(net, opts, None)
}

/// Estimates a run before its scenarios are enumerated: solves what the engine needs
/// first (the baseline) and one sample scenario, timed, then `baseline + sample ×
/// (count − 1) / threads` for the `count / share` scenarios of this run. Shows the
/// estimate when long; refuses beyond the time limit (none with `--yes`). Returns the
/// probe, whose solves the batch reuses.
pub(super) fn estimate(
    net: &Network,
    list: &Scenarios<'_>,
    share: usize,
    engine: Engine,
    o: &ScenarioOptions,
    opts: RunOptions,
    err: &mut dyn Write,
) -> Result<audit::Probe> {
    let count = (list.count as usize).div_ceil(share.max(1));
    let probe = audit::probe(net, engine, Some(&list.sample))?;
    let threads = opts.threads.unwrap_or_else(cores).clamp(1, count.max(1));
    let first = probe.baseline_took + probe.sample_took;
    let rest = probe
        .sample_took
        .mul_f64(count.saturating_sub(1) as f64 / threads as f64);
    let minutes = (probe.baseline_took + probe.sample_took + rest).as_secs_f64() / 60.0;
    if !o.quiet && first + rest >= ESTIMATE_NOTE_FROM {
        note(report::text::note_estimate(
            err,
            count,
            probe.sample_took,
            threads,
            minutes,
        ));
    }
    if let Some(max) = o.time_limit
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
