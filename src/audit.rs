//! Running the scenarios: deduplicate outages, solve each once (in parallel with rayon),
//! and keep every scenario listed under its own names. A run can journal each result as
//! it finishes ([`crate::report::journal`]) and be resumed from that journal, and it stops
//! cleanly on SIGINT ([`install_interrupt_handler`]).
//!
//! Invariant: the result depends only on the network and the scenario list. Outages are
//! solved by a pure function and collected in input order, so the thread count, an
//! interruption or a resume changes the wall time, never a number.

use std::io::IsTerminal;
use std::sync::Once;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;

use crate::cli::Engine;
use crate::error::{EXIT_INTERRUPTED, Error, Result};
use crate::model::Network;
use crate::report::journal::Journal;
use crate::scenario::{self, Outage, Scenario};
use crate::solve::{self, Evaluation, colgen};

/// How to run a batch of scenarios.
#[derive(Debug, Clone, Copy, Default)]
pub struct RunOptions {
    /// Worker threads; `None` uses rayon's default (one per core).
    pub threads: Option<usize>,
    /// Show a progress bar on stderr (only drawn when stderr is a terminal).
    pub progress: bool,
}

/// Set by the SIGINT handler; every batch checks it before starting an item.
static INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// Installs the SIGINT handler once per process. The first Ctrl-C asks every running batch
/// to stop once the solves in flight have finished (and been journaled); a second one
/// exits at once with [`EXIT_INTERRUPTED`]. A failure to install is ignored: Ctrl-C then
/// keeps its default effect.
pub fn install_interrupt_handler() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        let _ = ctrlc::set_handler(|| {
            if INTERRUPTED.swap(true, Ordering::SeqCst) {
                std::process::exit(EXIT_INTERRUPTED);
            }
        });
    });
}

/// Whether an interrupt was asked for.
pub fn interrupted() -> bool {
    INTERRUPTED.load(Ordering::SeqCst)
}

/// The evaluated scenarios.
#[derive(Debug, Clone)]
pub struct Audit {
    pub scenarios: Vec<Scenario>,
    /// Per scenario: index into `outages` / `evaluations`.
    pub outage_of: Vec<usize>,
    pub outages: Vec<Outage>,
    pub evaluations: Vec<Evaluation>,
}

impl Audit {
    /// The evaluation of scenario `i`.
    pub fn eval(&self, i: usize) -> &Evaluation {
        &self.evaluations[self.outage_of[i]]
    }

    /// The first scenario (in list order) whose outage is `k`; every outage has one.
    pub fn first_scenario(&self, k: usize) -> &Scenario {
        let i = self
            .outage_of
            .iter()
            .position(|&o| o == k)
            .expect("every outage comes from a scenario");
        &self.scenarios[i]
    }

    /// The baseline's evaluation, if the baseline is among the scenarios.
    pub fn baseline(&self) -> Option<&Evaluation> {
        self.scenarios
            .iter()
            .position(Scenario::is_baseline)
            .map(|i| self.eval(i))
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
                "{msg} [{bar:30}] {pos}/{len} done, {per_sec}, {elapsed} elapsed, ETA {eta}",
            )
            .expect("static template")
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
    let out = match opts.threads {
        Some(t) => rayon::ThreadPoolBuilder::new()
            .num_threads(t.max(1))
            .build()
            .map_err(|e| Error::Usage(format!("--threads {t}: {e}")))?
            .install(work),
        None => work(),
    };
    bar.finish();
    out
}

/// Scenarios with their distinct outages, some of them already evaluated (by a first
/// timed solve or from a journal), the rest still to solve.
pub struct Batch {
    scenarios: Vec<Scenario>,
    outage_of: Vec<usize>,
    outages: Vec<Outage>,
    done: Vec<Option<Evaluation>>,
    engine: Engine,
    /// With [`Engine::Walks`]: the baseline's optimum, the start of every other outage.
    basis: Option<colgen::Basis>,
}

impl Batch {
    /// Deduplicates the outages of `scenarios`; nothing is solved yet. O(scenarios ·
    /// elements per scenario).
    ///
    /// With [`Engine::Walks`] the baseline is solved first (once) and every other outage
    /// starts from its optimal walks ([`colgen::evaluate_walks`]); each outage is still a
    /// pure function of (network, outage, baseline), so results do not depend on the thread
    /// count, and memory holds one basis whatever the number of scenarios.
    pub fn new(net: &Network, scenarios: Vec<Scenario>, engine: Engine) -> Batch {
        let (outages, outage_of) = scenario::dedup(net, &scenarios);
        let done = vec![None; outages.len()];
        Batch {
            scenarios,
            outage_of,
            outages,
            done,
            engine,
            basis: None,
        }
    }

    /// Solves the baseline for the walk engine's basis, once; when the baseline is one of
    /// the outages still to solve, its evaluation is kept (and journaled).
    fn prepare(&mut self, net: &Network, journal: Option<&Journal>) -> Result<()> {
        if self.engine != Engine::Walks || self.basis.is_some() {
            return Ok(());
        }
        let base = colgen::evaluate_walks(net, &Outage::default(), None)?;
        if let Some(k) = self.outages.iter().position(Outage::is_empty)
            && self.done[k].is_none()
        {
            if let Some(j) = journal {
                j.record(k, &base.evaluation);
            }
            self.done[k] = Some(base.evaluation);
        }
        self.basis = Some(base.basis);
        Ok(())
    }

    /// Evaluates outage `k` with the batch's engine.
    fn solve_one(&self, net: &Network, k: usize) -> Result<Evaluation> {
        match (self.engine, &self.basis) {
            (Engine::Walks, Some(basis)) => {
                Ok(colgen::evaluate_walks(net, &self.outages[k], Some(basis))?.evaluation)
            }
            _ => solve::evaluate(net, &self.outages[k]),
        }
    }

    /// Number of distinct outages.
    pub fn outages(&self) -> usize {
        self.outages.len()
    }

    /// Number of outages not evaluated yet.
    pub fn remaining(&self) -> usize {
        self.done.iter().filter(|d| d.is_none()).count()
    }

    /// Takes evaluations restored from a journal (`restored[k]` for outage `k`); entries
    /// already present are kept. Invariant: `restored.len() == self.outages()`.
    pub fn restore(&mut self, restored: Vec<Option<Evaluation>>) {
        for (slot, r) in self.done.iter_mut().zip(restored) {
            if slot.is_none() {
                *slot = r;
            }
        }
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
        let Some(k) = self.done.iter().position(Option::is_none) else {
            return Ok(Some(start.elapsed()));
        };
        let e = self.solve_one(net, k)?;
        let took = start.elapsed();
        if let Some(j) = journal {
            j.record(k, &e);
        }
        self.done[k] = Some(e);
        Ok(Some(took))
    }

    /// Solves every remaining outage in parallel, recording each in `journal` as it
    /// finishes, and returns the complete audit. On an interrupt the finished solves stay
    /// recorded and [`Error::Interrupted`] is returned.
    pub fn finish(
        mut self,
        net: &Network,
        opts: RunOptions,
        journal: Option<&Journal>,
    ) -> Result<Audit> {
        self.prepare(net, journal)?;
        let todo: Vec<usize> = (0..self.outages.len())
            .filter(|&k| self.done[k].is_none())
            .collect();
        let solved = par_map(&todo, opts, "solving", |&k| {
            let e = self.solve_one(net, k)?;
            if let Some(j) = journal {
                j.record(k, &e);
            }
            Ok(e)
        })?;
        let mut done = self.done;
        for (k, e) in todo.into_iter().zip(solved) {
            done[k] = Some(e);
        }
        Ok(Audit {
            scenarios: self.scenarios,
            outage_of: self.outage_of,
            outages: self.outages,
            evaluations: done
                .into_iter()
                .map(|e| e.expect("every outage is solved or restored"))
                .collect(),
        })
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
