//! Running the scenarios: deduplicate outages, solve each once (in parallel with rayon),
//! and keep every scenario listed under its own names.
//!
//! Invariant: the result depends only on the network and the scenario list. Outages are
//! solved by a pure function and collected in input order, so the thread count changes the
//! wall time, never a number.

use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;

use crate::cli::Engine;
use crate::error::{Error, Result};
use crate::model::Network;
use crate::scenario::{self, Outage, Scenario};
use crate::solve::{self, Evaluation};

/// How to run a batch of scenarios.
#[derive(Debug, Clone, Copy, Default)]
pub struct RunOptions {
    /// Worker threads; `None` uses rayon's default (one per core).
    pub threads: Option<usize>,
    /// Show a progress bar on stderr (only drawn when stderr is a terminal).
    pub progress: bool,
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

/// A progress bar on stderr with an ETA. It stays hidden for the first second (short runs
/// never show it) and whenever `enabled` is false or stderr is not a terminal.
pub struct Progress {
    bar: ProgressBar,
    start: Instant,
    live: bool,
    shown: AtomicBool,
}

impl Progress {
    pub fn new(len: usize, enabled: bool, what: &str) -> Progress {
        let bar = ProgressBar::with_draw_target(Some(len as u64), ProgressDrawTarget::hidden());
        bar.set_style(
            ProgressStyle::with_template(
                "{msg} [{bar:30}] {pos}/{len}, {elapsed} elapsed, ETA {eta}",
            )
            .expect("static template")
            .progress_chars("=> "),
        );
        bar.set_message(what.to_string());
        Progress {
            bar,
            start: Instant::now(),
            live: enabled && std::io::stderr().is_terminal(),
            shown: AtomicBool::new(false),
        }
    }

    /// Counts one finished item; shows the bar once a second has passed.
    pub fn inc(&self) {
        if self.live
            && self.start.elapsed() > Duration::from_secs(1)
            && !self.shown.swap(true, Ordering::Relaxed)
        {
            self.bar.set_draw_target(ProgressDrawTarget::stderr());
            self.bar.enable_steady_tick(Duration::from_millis(500));
        }
        self.bar.inc(1);
    }

    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}

/// Runs `f` on `items` in parallel with the requested thread count, results in input
/// order.
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

/// Evaluates every scenario of `scenarios`, solving each distinct outage once.
pub fn run(net: &Network, scenarios: Vec<Scenario>, opts: RunOptions) -> Result<Audit> {
    run_with(net, scenarios, opts, Engine::Edge)
}

/// [`run`] with a choice of engine. With [`Engine::Walks`] the baseline is solved first and
/// every other outage starts from its optimal walks ([`solve::colgen::evaluate_walks`]);
/// each outage is still a pure function of (network, outage, baseline), so the result does
/// not depend on the thread count. Memory holds one basis (the baseline's) whatever the
/// number of scenarios.
pub fn run_with(
    net: &Network,
    scenarios: Vec<Scenario>,
    opts: RunOptions,
    engine: Engine,
) -> Result<Audit> {
    let (outages, outage_of) = scenario::dedup(net, &scenarios);
    let evaluations = match engine {
        Engine::Edge => par_map(&outages, opts, "solving", |o| solve::evaluate(net, o))?,
        Engine::Walks => {
            let base = solve::colgen::evaluate_walks(net, &Outage::default(), None)?;
            par_map(&outages, opts, "solving", |o| {
                if o.sites.is_empty() && o.links.is_empty() {
                    Ok(base.evaluation.clone())
                } else {
                    Ok(solve::colgen::evaluate_walks(net, o, Some(&base.basis))?.evaluation)
                }
            })?
        }
    };
    Ok(Audit {
        scenarios,
        outage_of,
        outages,
        evaluations,
    })
}
