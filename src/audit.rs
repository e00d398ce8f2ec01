//! Running the scenarios: deduplicate outages, solve each once (in parallel with rayon),
//! and keep every scenario listed under its own names. A run can journal each result as
//! it finishes ([`crate::journal`]) and be resumed from that journal, and it stops
//! cleanly on SIGINT, SIGTERM or SIGHUP ([`install_interrupt_handler`]).
//!
//! Invariant: the result depends only on the network and the scenario list. Outages are
//! solved by a pure function and collected in input order, so the thread count, an
//! interruption or a resume changes the wall time, never a number.

use std::collections::HashMap;
use std::io::IsTerminal;
use std::sync::{Mutex, Once};
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressState, ProgressStyle};
use rayon::prelude::*;

use crate::error::{EXIT_INTERRUPTED, Error, Result};
use crate::journal::{Journal, Resume};
use crate::model::Network;
use crate::scenario::{Element, Outage, Scenario};
pub use crate::scenario::{OutageId, ScenarioId};
use crate::solve::Engine;
use crate::solve::evaluator::{self, Evaluated, Evaluator, Warm};
use crate::solve::{self, Evaluation, colgen};

/// How to run a batch of scenarios.
#[derive(Debug, Clone, Copy, Default)]
pub struct RunOptions {
    /// Worker threads; `None` uses rayon's default (one per core).
    pub threads: Option<usize>,
    /// Show a progress bar on stderr (only drawn when stderr is a terminal).
    pub progress: bool,
}

/// Installs the handler of SIGINT, SIGTERM and SIGHUP (Ctrl-C, `kill`, a closed terminal)
/// once per process. The first signal ([`crate::solve::cancel::request`]) asks every running
/// batch to stop: solves in flight are abandoned within a pivot, an interior-point
/// iteration or a pricing round (their scenarios are not journaled), finished ones stay
/// journaled, and a final file not yet renamed into place
/// is dropped ([`crate::report::file::write_atomic`]); the run then ends with
/// [`Error::Interrupted`] and its resume hint. A second signal removes the temporary files
/// ([`crate::report::file::remove_temporaries`]) and exits at once with
/// [`EXIT_INTERRUPTED`]. A failure to install is ignored: the signals then keep their
/// default effect.
pub fn install_interrupt_handler() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        let _ = ctrlc::set_handler(|| {
            if crate::solve::cancel::request() {
                crate::report::file::remove_temporaries();
                std::process::exit(EXIT_INTERRUPTED);
            }
        });
    });
}

/// Whether an interrupt was asked for.
pub fn interrupted() -> bool {
    crate::solve::cancel::requested()
}

/// The evaluated scenarios.
#[derive(Debug, Clone)]
pub struct Audit {
    pub scenarios: Vec<Scenario>,
    /// Per scenario: its outage (index into `outages` / `evaluations`).
    pub outage_of: Vec<OutageId>,
    pub outages: Vec<Outage>,
    pub evaluations: Vec<Evaluation>,
    /// Work done by the walk engine (zero for the edge engine and restored outages).
    pub stats: colgen::Stats,
    /// The warm-starting evaluator's optimum of the baseline (base traffic matrix) when
    /// the batch solved one: the start a plan's re-solves of the same network with added
    /// processing use (that network only gains capacity, so the baseline's flows stay
    /// feasible and the re-solve stays exact: every answer is still certified).
    pub baseline: Option<std::sync::Arc<Warm>>,
}

impl Audit {
    /// The traffic matrix of the run's baseline: that of its first baseline scenario (the
    /// first matrix the run evaluates), 0 (`base`) when it holds none. O(scenarios).
    pub fn baseline_matrix(&self) -> usize {
        self.scenarios
            .iter()
            .find(|s| s.is_baseline())
            .map_or(0, |s| s.matrix)
    }

    /// The evaluation of scenario `i`: a [`ScenarioId`] (the report path's lists), or a
    /// plain index from a caller whose lists are not typed yet. O(1).
    pub fn eval(&self, i: impl Into<ScenarioId>) -> &Evaluation {
        &self.evaluations[self.outage_of[i.into()]]
    }

    /// The first scenario (in list order) whose outage is `k`; every outage has one.
    pub fn first_scenario(&self, k: OutageId) -> &Scenario {
        let i = self
            .outage_of
            .iter()
            .position(|&o| o == k)
            .expect("every outage comes from a scenario");
        &self.scenarios[i]
    }

    /// The baseline's evaluation under traffic matrix `m`, if that pair is among the
    /// scenarios. O(scenarios).
    pub fn baseline_under(&self, m: usize) -> Option<&Evaluation> {
        self.scenarios
            .iter()
            .position(|s| s.is_baseline() && s.matrix == m)
            .map(|i| self.eval(ScenarioId(i)))
    }

    /// The baseline's evaluation, if the baseline is among the scenarios.
    pub fn baseline(&self) -> Option<&Evaluation> {
        self.scenarios
            .iter()
            .position(Scenario::is_baseline)
            .map(|i| self.eval(ScenarioId(i)))
    }
}

/// A progress bar on stderr with items done, rate and ETA. It is drawn from the start
/// whenever `enabled` is true and stderr is a terminal, hidden otherwise, and cleared when
/// the batch ends (finished or interrupted), so the terminal is never left mid-line.
pub struct Progress {
    bar: ProgressBar,
}

impl Progress {
    pub fn new(len: usize, enabled: bool, what: &str) -> Progress {
        let live = enabled && std::io::stderr().is_terminal();
        let target = if live {
            ProgressDrawTarget::stderr()
        } else {
            ProgressDrawTarget::hidden()
        };
        let bar = ProgressBar::with_draw_target(Some(len as u64), target);
        bar.set_style(
            ProgressStyle::with_template(
                "{msg} [{bar:30}] {pos}/{len} done, {rate}, {elapsed} elapsed, ETA {eta}",
            )
            .expect("static template")
            .with_key("rate", |s: &ProgressState, w: &mut dyn std::fmt::Write| {
                let _ = w.write_str(&rate_text(s.per_sec()));
            })
            .progress_chars("=> "),
        );
        bar.set_message(what.to_string());
        if live {
            bar.enable_steady_tick(Duration::from_millis(500));
        }
        Progress { bar }
    }

    /// Counts one finished item.
    pub fn inc(&self) {
        self.bar.inc(1);
    }

    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

/// The rate the progress bar shows for `per_sec` items a second: rounded to a whole
/// number with `,` between thousands (`12,879/s`: the digits after the point are noise
/// at a glance, and change every redraw), `<1/s` for a positive rate that rounds to 0,
/// `0/s` before there is one (zero or not finite). O(digits).
fn rate_text(per_sec: f64) -> String {
    if !per_sec.is_finite() || per_sec <= 0.0 {
        return "0/s".into();
    }
    let whole = per_sec.round();
    if whole < 1.0 {
        return "<1/s".into();
    }
    let digits = format!("{whole:.0}");
    let mut out = String::with_capacity(digits.len() + digits.len() / 3 + 2);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    out + "/s"
}

/// Runs `work` on a rayon pool of `threads` threads (`None`: rayon's global pool, one
/// thread per core). Building a pool can fail only for a resource reason, reported as a
/// usage error naming `--threads`. O(1) beyond `work`.
pub(crate) fn in_pool<R: Send>(
    threads: Option<usize>,
    work: impl FnOnce() -> R + Send,
) -> Result<R> {
    match threads {
        Some(t) => Ok(rayon::ThreadPoolBuilder::new()
            .num_threads(t.max(1))
            .build()
            .map_err(|e| Error::Usage(format!("--threads {t}: {e}")))?
            .install(work)),
        None => Ok(work()),
    }
}

/// Runs `f` on `items` in parallel with the requested thread count, results in input
/// order. Each item first checks for an interrupt: once one is asked for, no new item
/// starts and the call returns [`Error::Interrupted`] after the items in flight.
pub fn par_map<T, R, F>(items: &[T], opts: RunOptions, what: &str, f: F) -> Result<Vec<R>>
where
    T: Sync,
    R: Send,
    F: Fn(&T) -> Result<R> + Sync + Send,
{
    let bar = Progress::new(items.len(), opts.progress, what);
    let work = || -> Result<Vec<R>> {
        items
            .par_iter()
            .map(|it| {
                if interrupted() {
                    return Err(Error::Interrupted(format!("{what} stopped")));
                }
                let r = f(it);
                bar.inc();
                r
            })
            .collect()
    };
    let out = in_pool(opts.threads, work)?;
    bar.finish();
    out
}

/// A first timed solve, made before the scenarios are enumerated, so a run can be
/// estimated (and refused) from the scenario count alone ([`probe`]).
pub struct Probe {
    /// The evaluator's name ([`Evaluator::name`]).
    engine: &'static str,
    /// With a warm-starting evaluator: the baseline's evaluation and optimum.
    base: Option<Evaluated>,
    /// The sample scenario's outage and evaluation.
    sample: Option<(Outage, Evaluation)>,
    /// How long the baseline took (zero for the edge engine, which needs no basis).
    pub baseline_took: Duration,
    /// How long the sample took: the estimate of one outage.
    pub sample_took: Duration,
}

/// Solves what a batch needs before anything else (the walk engine's baseline) and one
/// sample scenario, timed. The sample is solved exactly as [`Batch`] would solve it (a
/// single failure starts from the baseline), so its evaluation is reused.
pub fn probe(net: &Network, engine: Engine, sample: Option<&Scenario>) -> Result<Probe> {
    probe_with(net, &*evaluator_for(net, engine), sample)
}

/// The evaluator of `net` with `engine`. When the file lists `functions`: the layered
/// edge LP of service chains ([`crate::solve::chain::ChainEdge`]) with [`Engine::Edge`],
/// the (1−ε) engine on layered walks ([`crate::solve::chainwalk::approx::ChainApprox`])
/// with [`Engine::Approx`], else the layered walk engine
/// ([`crate::solve::chainwalk::ChainWalks`]); otherwise [`evaluator()`].
pub fn evaluator_for(net: &Network, engine: Engine) -> Box<dyn Evaluator> {
    if net.chains.is_some() {
        match engine {
            Engine::Edge => Box::new(crate::solve::chain::ChainEdge),
            Engine::Approx { epsilon } => {
                Box::new(crate::solve::chainwalk::approx::ChainApprox { epsilon })
            }
            Engine::Walks => Box::new(crate::solve::chainwalk::ChainWalks),
        }
    } else {
        evaluator(engine)
    }
}

/// The evaluator of `engine`: the seam ([`Evaluator`]) every batch drives.
pub fn evaluator(engine: Engine) -> Box<dyn Evaluator> {
    match engine {
        Engine::Walks => Box::new(evaluator::Walks),
        Engine::Edge => Box::new(evaluator::Edge),
        Engine::Approx { epsilon } => Box::new(evaluator::Approx { epsilon }),
    }
}

/// [`probe`] with any evaluator.
pub fn probe_with(
    net: &Network,
    engine: &dyn Evaluator,
    sample: Option<&Scenario>,
) -> Result<Probe> {
    let start = Instant::now();
    let base = if engine.warm_starts() {
        Some(engine.evaluate(net, &Outage::default(), None)?)
    } else {
        None
    };
    let baseline_took = start.elapsed();
    let start = Instant::now();
    let sample = match sample {
        Some(sc) if sc.elements.len() <= 1 => {
            let o = sc.outage(net);
            // The baseline's optimum is the base matrix's; another matrix starts cold.
            let on = net.view(o.matrix);
            let e = match &base {
                Some(b) if o.matrix == 0 && o.is_empty() => b.evaluation.clone(),
                Some(b) if o.matrix == 0 => engine.evaluate(on, &o, b.warm.as_ref())?.evaluation,
                _ => engine.evaluate(on, &o, None)?.evaluation,
            };
            Some((o, e))
        }
        _ => None,
    };
    Ok(Probe {
        engine: engine.name(),
        base,
        sample,
        baseline_took,
        sample_took: start.elapsed(),
    })
}

/// A family of outages solved together: the parent single failure (element and traffic
/// matrix; `None` for outages solved from the baseline or cold) and its members.
type Family = (Option<(Element, usize)>, Vec<usize>);

/// What a [`Batch`] keeps of each evaluation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Keep {
    /// Everything (plans and `--close` read the full vectors).
    Full,
    /// [`Evaluation::thin`] when the journal holds the full one (readable again with
    /// [`crate::journal::JournalReader::read`]), else full.
    ThinJournaled,
    /// Always thin: the reports need nothing more (an audit without `--json`).
    Thin,
}

/// Scenarios with their distinct outages, some of them already evaluated (by a first
/// timed solve or from a journal), the rest still to solve.
///
/// Outages are evaluated only through the batch's [`Evaluator`] (an engine or a routing
/// model). With a warm-starting one ([`Evaluator::warm_starts`], the walk engine) the
/// baseline is solved first (once). An outage whose first scenario fails two or more
/// elements starts from the optimum of the single failure of its first element (its
/// *parent*, solved from the baseline), every other outage from the baseline's; children are solved in families, one
/// parent basis per family in flight, so memory holds one basis per thread whatever the
/// number of scenarios. Each outage is a pure function of (network, outage, parent), so
/// results do not depend on the thread count, the shard or on what was restored.
pub struct Batch {
    scenarios: Vec<Scenario>,
    outage_of: Vec<OutageId>,
    outages: Vec<Outage>,
    done: Vec<Option<Evaluation>>,
    /// Per outage: the element whose single failure is its parent (walk engine).
    parent: Vec<Option<Element>>,
    /// Per (element, matrix) with a single-failure scenario: that scenario's outage.
    single: HashMap<(Element, usize), usize>,
    engine: Box<dyn Evaluator>,
    /// With a warm-starting evaluator: the baseline's optimum, the start of every other
    /// outage.
    basis: Option<Warm>,
    /// What is kept of each evaluation.
    keep: Keep,
    /// Only outages `k` with `k % n == i` are solved (`(i, n)`, `i` from 0).
    shard: Option<(usize, usize)>,
    stats: Mutex<colgen::Stats>,
}

impl Batch {
    /// Deduplicates the outages of `scenarios` as they come (the list is never held twice);
    /// nothing is solved yet. O(scenarios · elements per scenario + links).
    pub fn new(
        net: &Network,
        scenarios: impl IntoIterator<Item = Scenario>,
        engine: Engine,
    ) -> Batch {
        Batch::with_evaluator(net, scenarios, evaluator_for(net, engine))
    }

    /// [`Batch::new`] with any evaluator (a routing model, a future engine).
    pub fn with_evaluator(
        net: &Network,
        scenarios: impl IntoIterator<Item = Scenario>,
        engine: Box<dyn Evaluator>,
    ) -> Batch {
        use std::hash::{BuildHasher, BuildHasherDefault, DefaultHasher};
        // Outages are found by a 64-bit hash and compared in full, so each is stored once;
        // the rare outages whose hash another outage already has go to `collided`.
        let hasher = BuildHasherDefault::<DefaultHasher>::default();
        let mut index: HashMap<u64, usize> = HashMap::new();
        let mut collided: HashMap<Outage, usize> = HashMap::new();
        let mut outages: Vec<Outage> = Vec::new();
        let mut outage_of = Vec::new();
        let mut parent = Vec::new();
        let mut single = HashMap::new();
        let mut list = Vec::new();
        for s in scenarios {
            let o = s.outage(net);
            let next = outages.len();
            let h = hasher.hash_one(&o);
            let k = match index.get(&h) {
                Some(&k) if outages[k] == o => k,
                Some(_) => *collided.entry(o.clone()).or_insert(next),
                None => {
                    index.insert(h, next);
                    next
                }
            };
            if k == next {
                outages.push(o);
                parent.push((s.elements.len() >= 2).then(|| s.elements[0]));
            }
            if let [e] = s.elements[..] {
                single.entry((e, s.matrix)).or_insert(k);
            }
            outage_of.push(OutageId(k));
            list.push(s);
        }
        drop((index, collided));
        Batch {
            scenarios: list,
            outage_of,
            done: vec![None; outages.len()],
            outages,
            parent,
            single,
            engine,
            basis: None,
            keep: Keep::Full,
            shard: None,
            stats: Mutex::new(colgen::Stats::default()),
        }
    }

    /// Chooses what is kept of each evaluation (default [`Keep::Full`]).
    pub fn keeping(mut self, keep: Keep) -> Batch {
        self.keep = keep;
        self
    }

    /// Solves only shard `i` of `n` (from 1): the outages `k` with `k % n == i - 1`.
    pub fn shard(mut self, i: usize, n: usize) -> Batch {
        self.shard = Some((i - 1, n));
        self
    }

    /// Whether outage `k` is this batch's to solve.
    fn mine(&self, k: usize) -> bool {
        self.shard.is_none_or(|(i, n)| k % n == i)
    }

    /// The outages this batch solves (all, or its shard's), in order.
    pub fn own(&self) -> Vec<OutageId> {
        (0..self.outages.len())
            .filter(|&k| self.mine(k))
            .map(OutageId)
            .collect()
    }

    /// Takes the probe's solves: the baseline basis, and the baseline's and the sample's
    /// evaluations for the outages equal to them.
    pub fn seed(&mut self, probe: Probe, journal: Option<&Journal>) {
        if probe.engine != self.engine.name() {
            return;
        }
        let mut found: Vec<(Outage, Evaluation)> = probe.sample.into_iter().collect();
        if let Some(b) = probe.base {
            found.push((Outage::default(), b.evaluation));
            self.basis = b.warm;
        }
        for (o, e) in found {
            if let Some(k) = self.outages.iter().position(|x| *x == o)
                && self.done[k].is_none()
                && self.mine(k)
            {
                self.keep(k, e, journal);
            }
        }
    }

    /// Stores outage `k`'s evaluation (journaled first; thin when asked).
    fn keep(&mut self, k: usize, e: Evaluation, journal: Option<&Journal>) {
        let journaled = journal.is_some_and(|j| j.record(OutageId(k), &e));
        self.done[k] = Some(self.stored(k, e, journaled));
    }

    /// What the batch keeps of an evaluation: thin when asked and the journal holds the
    /// full one, else the full one (so every full evaluation stays reachable).
    /// The baseline is always kept full (every report shows it).
    fn stored(&self, k: usize, mut e: Evaluation, journaled: bool) -> Evaluation {
        // The proof is only ever read back from a journal line (part files), or from the
        // evaluation itself when a part line is made without the journal's.
        if journaled || self.keep != Keep::ThinJournaled {
            e.proof = None;
        }
        if self.outages[k].is_empty() {
            return e;
        }
        match self.keep {
            Keep::Thin => e.thin(),
            Keep::ThinJournaled if journaled => e.thin(),
            _ => e,
        }
    }

    /// Solves the baseline for the walk engine's basis, once; when the baseline is one of
    /// the outages still to solve, its evaluation is kept (and journaled).
    fn prepare(&mut self, net: &Network, journal: Option<&Journal>) -> Result<()> {
        if !self.engine.warm_starts() || self.basis.is_some() {
            return Ok(());
        }
        let p = probe_with(net, &*self.engine, None)?;
        self.seed(p, journal);
        Ok(())
    }

    /// Evaluates `outage` from `parent` (the baseline's optimum when `None`) with the
    /// batch's evaluator.
    fn solve_from(
        &self,
        net: &Network,
        outage: &Outage,
        parent: Option<&Warm>,
    ) -> Result<Evaluated> {
        // The baseline's optimum is the base matrix's: another matrix's outage without a
        // parent starts cold (its demands are other ones).
        let base = if outage.matrix == 0 {
            self.basis.as_ref()
        } else {
            None
        };
        let basis = parent.or(base);
        let w = self
            .engine
            .evaluate(net.view(outage.matrix), outage, basis)?;
        self.stats
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .add(&w.stats);
        Ok(w)
    }

    /// Solves one family: the parent single failure `p` (for its basis; its own outage
    /// is kept when it is in `members`), then its children from it. Returns the results
    /// in `members` order.
    fn solve_family(
        &self,
        net: &Network,
        p: Option<(Element, usize)>,
        members: &[usize],
        bar: &Progress,
        journal: Option<&Journal>,
    ) -> Result<Vec<(usize, Evaluation)>> {
        let mut out = Vec::with_capacity(members.len());
        let mut record = |k: usize, e: Evaluation| {
            let journaled = journal.is_some_and(|j| j.record(OutageId(k), &e));
            bar.inc();
            out.push((k, self.stored(k, e, journaled)));
        };
        if !self.engine.warm_starts() {
            for &k in members {
                if interrupted() {
                    return Err(Error::Interrupted("solving stopped".into()));
                }
                record(k, self.solve_from(net, &self.outages[k], None)?.evaluation);
            }
        } else {
            let parent = match p {
                None => None,
                Some((e, m)) => {
                    let po = Scenario::new(net, &[e]).under(m).outage(net);
                    let kp = self.single.get(&(e, m)).copied();
                    if interrupted() {
                        return Err(Error::Interrupted("solving stopped".into()));
                    }
                    let w = self.solve_from(net, &po, None)?;
                    if let Some(kp) = kp
                        && members.contains(&kp)
                    {
                        record(kp, w.evaluation);
                    }
                    w.warm
                }
            };
            for &k in members {
                if p.is_some() && self.single.get(&p.expect("some")) == Some(&k) {
                    continue;
                }
                if interrupted() {
                    return Err(Error::Interrupted("solving stopped".into()));
                }
                let from = if self.parent[k].is_some() {
                    parent.as_ref()
                } else {
                    None
                };
                record(k, self.solve_from(net, &self.outages[k], from)?.evaluation);
            }
        }
        Ok(out)
    }

    /// Number of distinct outages.
    pub fn outages(&self) -> usize {
        self.outages.len()
    }

    /// Number of outages of this batch (its shard) not evaluated yet.
    pub fn remaining(&self) -> usize {
        (0..self.done.len())
            .filter(|&k| self.done[k].is_none() && self.mine(k))
            .count()
    }

    /// Takes evaluations restored from a journal or part files (`restored[k]` for outage
    /// `k`, verified by the caller: see [`Self::restore_verified`]); entries already
    /// present are kept. Invariant: `restored.len() == self.outages()`. Restored
    /// evaluations are journaled by definition, so they are kept thin when asked, and
    /// without their proof.
    pub fn restore(&mut self, restored: Vec<Option<Evaluation>>) {
        let thin = self.keep != Keep::Full;
        for ((slot, r), o) in self.done.iter_mut().zip(restored).zip(&self.outages) {
            if slot.is_none() {
                *slot = if thin && !o.is_empty() {
                    r.map(Evaluation::thin)
                } else {
                    r.map(|mut e| {
                        e.proof = None;
                        e
                    })
                };
            }
        }
    }

    /// Outage `k` of the batch (`k < self.outages()`).
    pub fn outage(&self, k: OutageId) -> &Outage {
        &self.outages[k]
    }

    /// Takes what `--resume` found in `journal` after verifying each evaluation against
    /// its outage again ([`solve::recheck::recheck`], in parallel): an evaluation that
    /// does not verify is dropped from the journal ([`Journal::discard`]) and its outage
    /// is solved again, like the outages of damaged lines. Returns every ignored line
    /// (from 1) with the reason, in line order. Cost: one verification per restored
    /// outage, far cheaper than a solve.
    pub fn restore_verified(
        &mut self,
        net: &Network,
        found: Resume,
        journal: &Journal,
        opts: RunOptions,
    ) -> Result<Vec<(usize, String)>> {
        /// Per outage: the verified evaluation, or the line refused and why.
        type Checked = (Option<Evaluation>, Option<(usize, String)>);
        let outages = &self.outages;
        let work = || -> Vec<Checked> {
            found
                .restored
                .into_par_iter()
                .enumerate()
                .map(|(k, r)| match r {
                    None => (None, None),
                    Some(r) => match solve::recheck::recheck(net, &outages[k], &r.evaluation) {
                        Ok(()) => (Some(r.evaluation), None),
                        Err(why) => (
                            None,
                            Some((
                                r.line,
                                format!("outage {k} does not verify against the network: {why}"),
                            )),
                        ),
                    },
                })
                .collect()
        };
        let checked = in_pool(opts.threads, work)?;
        let mut ignored = found.damaged;
        let mut restored = Vec::with_capacity(checked.len());
        for (k, (e, refused)) in checked.into_iter().enumerate() {
            if let Some(r) = refused {
                journal.discard(OutageId(k));
                ignored.push(r);
            }
            restored.push(e);
        }
        ignored.sort_by_key(|(line, _)| *line);
        self.restore(restored);
        Ok(ignored)
    }

    /// The families of the outages still to solve, in a deterministic order: children
    /// grouped under their parent element (with the parent's own outage), the rest one
    /// by one.
    fn families(&self) -> Vec<Family> {
        let todo: Vec<usize> = (0..self.outages.len())
            .filter(|&k| self.done[k].is_none() && self.mine(k))
            .collect();
        if !self.engine.warm_starts() {
            return todo.into_iter().map(|k| (None, vec![k])).collect();
        }
        // Families are keyed by (matrix, element): a parent's optimum is its matrix's.
        let mut fam: std::collections::BTreeMap<(usize, Element), Vec<usize>> = Default::default();
        for &k in &todo {
            if let Some(e) = self.parent[k] {
                fam.entry((self.outages[k].matrix, e)).or_default().push(k);
            }
        }
        let in_family: std::collections::HashSet<usize> = fam
            .keys()
            .filter_map(|&(m, e)| self.single.get(&(e, m)).copied())
            .filter(|kp| !self.outages[*kp].is_empty())
            .collect();
        let mut out: Vec<Family> = Vec::new();
        for ((m, e), mut members) in fam {
            if let Some(&kp) = self.single.get(&(e, m))
                && todo.binary_search(&kp).is_ok()
                && !self.outages[kp].is_empty()
            {
                members.insert(0, kp);
            }
            out.push((Some((e, m)), members));
        }
        out.extend(
            todo.iter()
                .filter(|k| self.parent[**k].is_none() && !in_family.contains(k))
                .map(|&k| (None, vec![k])),
        );
        out
    }

    /// Solves every remaining outage of the batch (its shard) in parallel, recording each
    /// in `journal` as it finishes. On an interrupt the finished solves stay recorded and
    /// [`Error::Interrupted`] is returned.
    pub fn solve_rest(
        &mut self,
        net: &Network,
        opts: RunOptions,
        journal: Option<&Journal>,
    ) -> Result<()> {
        self.prepare(net, journal)?;
        let families = self.families();
        let bar = Progress::new(self.remaining(), opts.progress, "solving");
        let this = &*self;
        let work = || -> Result<Vec<Vec<(usize, Evaluation)>>> {
            families
                .par_iter()
                .map(|(p, members)| {
                    if interrupted() {
                        return Err(Error::Interrupted("solving stopped".into()));
                    }
                    this.solve_family(net, *p, members, &bar, journal)
                })
                .collect()
        };
        let solved = in_pool(opts.threads, work)?;
        bar.finish();
        for (k, e) in solved?.into_iter().flatten() {
            self.done[k] = Some(e);
        }
        Ok(())
    }

    /// Solves the first outage not evaluated yet, records it in `journal`, and returns how
    /// long the solve took (`None` when nothing remains). Used to estimate the run.
    pub fn solve_first(
        &mut self,
        net: &Network,
        journal: Option<&Journal>,
    ) -> Result<Option<Duration>> {
        let start = Instant::now();
        self.prepare(net, journal)?;
        let Some(k) = (0..self.done.len()).find(|&k| self.done[k].is_none() && self.mine(k)) else {
            return Ok(Some(start.elapsed()));
        };
        let start = Instant::now();
        let fam = self
            .families()
            .into_iter()
            .find(|(_, m)| m.contains(&k))
            .expect("k is to do");
        let bar = Progress::new(0, false, "");
        let solved = self.solve_family(net, fam.0, &[k], &bar, journal)?;
        let took = start.elapsed();
        for (k, e) in solved {
            self.done[k] = Some(e);
        }
        Ok(Some(took))
    }

    /// Outage `k`'s evaluation as kept, if evaluated.
    pub fn evaluation(&self, k: OutageId) -> Option<&Evaluation> {
        self.done[k].as_ref()
    }

    /// Work done by the walk engine so far (summed over the solves).
    pub fn stats(&self) -> colgen::Stats {
        *self.stats.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// Solves every remaining outage ([`Self::solve_rest`]) and returns the complete
    /// audit.
    pub fn finish(
        mut self,
        net: &Network,
        opts: RunOptions,
        journal: Option<&Journal>,
    ) -> Result<Audit> {
        self.shard = None;
        self.solve_rest(net, opts, journal)?;
        Ok(self.into_audit())
    }

    /// The audit of a batch whose outages are all evaluated.
    pub fn into_audit(self) -> Audit {
        let stats = self.stats();
        Audit {
            scenarios: self.scenarios,
            outage_of: self.outage_of,
            outages: self.outages,
            evaluations: self
                .done
                .into_iter()
                .map(|e| e.expect("every outage is solved or restored"))
                .collect(),
            stats,
            baseline: self.basis.map(std::sync::Arc::new),
        }
    }
}
/// Evaluates every scenario of `scenarios`, solving each distinct outage once.
pub fn run(net: &Network, scenarios: Vec<Scenario>, opts: RunOptions) -> Result<Audit> {
    Batch::new(net, scenarios, Engine::Edge).finish(net, opts, None)
}

/// [`run`] with a choice of engine ([`Batch::new`]).
pub fn run_with(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: RunOptions,
    engine: Engine,
) -> Result<Audit> {
    Batch::new(net, scenarios, engine).finish(net, opts, None)
}

#[cfg(test)]
mod tests {
    use super::rate_text;

    /// Hand-worked: indicatif's `{per_sec}` printed `12,879.2963/s`; rounded to the whole
    /// number and grouped by thousands it is `12,879/s`. 999.5 rounds half away from zero
    /// to 1,000 (Rust's `f64::round`); 0.4 rounds to 0 but is not nothing.
    #[test]
    fn the_rate_is_whole_and_grouped_by_thousands() {
        for (rate, shown) in [
            (12_879.296_3, "12,879/s"),
            (999.5, "1,000/s"),
            (1_234_567.0, "1,234,567/s"),
            (42.49, "42/s"),
            (1.0, "1/s"),
            (0.4, "<1/s"),
            (0.0, "0/s"),
            (f64::INFINITY, "0/s"),
        ] {
            assert_eq!(rate_text(rate), shown, "{rate}");
        }
    }
}
