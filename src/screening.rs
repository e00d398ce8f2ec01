//! `--exact-top N`: an approximate audit ([`crate::solve::Engine::Approx`]) screened so
//! that its N worst scenarios, and every gate's verdict, are exactly what an exact audit
//! gives.
//!
//! Each approximate result is a certified interval: served_required lies in
//! `[served, upper]`, so the shortfall lies in `[shortfall − (upper − served), shortfall]`,
//! and throughput likewise in `[throughput, its upper bound]`; stranded demand, the
//! element count and the names are exact. The worst-first order ([`crate::rank`]) compares
//! (shortfall ↓, stranded ↓, throughput ↑, elements ↑, names ↑). For each scenario two keys
//! bracket its exact position: the *earliest* (largest shortfall, smallest throughput of
//! its interval) and the *latest* (the other ends). Let `T` be the N-th smallest latest key:
//! N scenarios are at or before `T` whatever their exact values. A scenario whose earliest
//! key is after `T` is preceded by those N, so it is not among the N worst; every other
//! scenario is solved exactly, unless its interval already closed (then its values are
//! exact as they stand: the same verifier proved both ends equal). The N worst of the exact values are then the N worst of
//! the whole audit, in the exact order (every scenario left out comes after all N).
//!
//! Gates (`--max-shortfall`, `--min-served-fraction`) compare the worst value as printed
//! ([`crate::gate::check`]); a scenario is solved exactly when its printed interval could
//! reach the worst one (so the gate's worst value and scenario are exact) or when the gate
//! would decide differently at the two ends of its interval (it straddles the limit).
//! Stranded demand is exact in every engine, so `--max-stranded` needs nothing.
//!
//! Each end is widened by [`SCREEN_TOL`] of the scenario's scale, so an exact value
//! within the exact engine's proof tolerance outside the interval is still covered.

use std::cmp::Ordering;

use crate::audit::{self, Audit, OutageId, RunOptions};
use crate::error::Result;
use crate::gate::{Gate, GateKind};
use crate::model::Network;
use crate::numbers::displayed;
use crate::solve::{Engine, Evaluation};
use crate::tol::SCREEN_TOL;

/// What the screen did: the N asked for and, per outage, whether its values are exact
/// and whether the walk engine solved it.
#[derive(Debug, Clone, PartialEq)]
pub struct Screen {
    /// `--exact-top N`.
    pub top: usize,
    /// Per outage of the audit: exact, either solved by the walk engine or closed by the
    /// approximate engine itself (both quantities proven, [`Evaluation::proven`]: the
    /// verified bounds met, the same verifier and standard as the exact engines' answers).
    pub exact: Vec<bool>,
    /// Per outage: solved exactly by the walk engine (a subset of `exact`).
    pub solved: Vec<bool>,
}

impl Screen {
    /// Outages the walk engine solved exactly. O(outages).
    pub fn solved_exactly(&self) -> usize {
        self.solved.iter().filter(|&&x| x).count()
    }

    /// Outages exact without a walk-engine solve: the approximate interval closed. O(outages).
    pub fn closed(&self) -> usize {
        self.exact.iter().filter(|&&x| x).count() - self.solved_exactly()
    }

    /// Outages left as open certified intervals. O(outages).
    pub fn certified(&self) -> usize {
        self.exact.iter().filter(|&&x| !x).count()
    }
}

/// The certified interval of an evaluation's quantities, widened by [`SCREEN_TOL`].
#[derive(Debug, Clone, Copy)]
struct Bounds {
    shortfall: (f64, f64),
    throughput: (f64, f64),
    /// served_required / surviving required (1 without surviving required demand).
    fraction: (f64, f64),
}

/// The bounds of `e`: exact for a result of an exact engine up to the slack. O(1).
fn bounds(e: &Evaluation) -> Bounds {
    let served_up = e.upper_bound.max(e.served_required);
    let width = served_up - e.served_required;
    let thr_up = e
        .throughput_verification
        .as_ref()
        .map_or(e.throughput + width, |t| t.upper.max(e.throughput));
    let slack = SCREEN_TOL * (e.surviving_required + thr_up.max(0.0));
    let req = e.surviving_required;
    let fraction = if req > 0.0 {
        (
            (e.served_required - slack) / req,
            ((served_up + slack).min(req + slack)) / req,
        )
    } else {
        (1.0, 1.0)
    };
    Bounds {
        shortfall: ((e.shortfall - width - slack).max(0.0), e.shortfall + slack),
        throughput: (e.throughput - slack, thr_up + slack),
        fraction,
    }
}

/// One end of a scenario's position in the worst-first order: compared as
/// [`crate::rank`] compares scenarios.
struct Key<'a> {
    shortfall: f64,
    stranded: f64,
    throughput: f64,
    elements: usize,
    names: &'a [String],
}

/// The worst-first order on keys (the earlier key first), as [`crate::rank::worst_first`].
fn order(a: &Key<'_>, b: &Key<'_>) -> Ordering {
    b.shortfall
        .total_cmp(&a.shortfall)
        .then(b.stranded.total_cmp(&a.stranded))
        .then(a.throughput.total_cmp(&b.throughput))
        .then(a.elements.cmp(&b.elements))
        .then_with(|| a.names.cmp(b.names))
}

/// The outages (ascending) to solve exactly so that the `top` worst scenarios of `audit`
/// and the verdict and worst scenario of each gate are exact (see the module comment).
/// `audit` holds approximate results (any evaluation: an exact one has a zero-width
/// interval). O(S log S) for S scenarios.
pub fn to_solve(audit: &Audit, top: usize, gates: &[Gate], tolerance: Option<f64>) -> Vec<usize> {
    let n = audit.scenarios.len();
    let b: Vec<Bounds> = audit.evaluations.iter().map(bounds).collect();
    let key = |i: usize, earliest: bool| {
        let x = &b[audit.outage_of[i]];
        let s = &audit.scenarios[i];
        Key {
            shortfall: if earliest {
                x.shortfall.1
            } else {
                x.shortfall.0
            },
            stranded: audit.eval(i).stranded,
            throughput: if earliest {
                x.throughput.0
            } else {
                x.throughput.1
            },
            elements: s.elements.len(),
            names: &s.failed,
        }
    };
    let mut solve = vec![false; audit.outages.len()];
    if top > 0 {
        let mut latest: Vec<usize> = (0..n).collect();
        latest.sort_by(|&x, &y| order(&key(x, false), &key(y, false)));
        let threshold = latest.get(top - 1).map(|&t| key(t, false));
        for i in 0..n {
            let beyond = threshold
                .as_ref()
                .is_some_and(|t| order(&key(i, true), t) == Ordering::Greater);
            if !beyond {
                solve[audit.outage_of[i]] = true;
            }
        }
    }
    for g in gates {
        let fraction = match g.kind {
            GateKind::MaxShortfall => false,
            GateKind::MinServedFraction => true,
            GateKind::MaxStranded | GateKind::MinHeadroom => continue,
        };
        // Per scenario: the interval of the gate's value, as printed.
        let printed = |v: f64| {
            if fraction {
                displayed(100.0 * v)
            } else {
                displayed(v)
            }
        };
        let interval = |k: usize| {
            if fraction {
                b[k].fraction
            } else {
                b[k].shortfall
            }
        };
        // The worst value as printed is at least this (a maximum) or at most (a minimum).
        let sure = (0..audit.outages.len())
            .map(|k| {
                let (lo, hi) = interval(k);
                printed(if fraction { hi } else { lo })
            })
            .reduce(|a, c| if fraction { a.min(c) } else { a.max(c) });
        let Some(sure) = sure else { continue };
        let passes = |v: f64| match (tolerance, fraction) {
            (Some(t), false) => v <= g.limit + t,
            (Some(t), true) => v >= g.limit - t,
            (None, false) => displayed(v) <= g.limit,
            (None, true) => crate::gate::displayed_fraction(v) >= g.limit,
        };
        for (k, s) in solve.iter_mut().enumerate() {
            let (lo, hi) = interval(k);
            let may_be_worst = if fraction {
                printed(lo) <= sure
            } else {
                printed(hi) >= sure
            };
            if may_be_worst || passes(lo) != passes(hi) {
                *s = true;
            }
        }
    }
    (0..solve.len()).filter(|&k| solve[k]).collect()
}

/// Solves the outages [`to_solve`] names with the walk engine (an audit batch of their
/// first scenarios: the baseline's optimum, then families from their single-failure
/// parents, in parallel) and puts the exact evaluations, full, in place of the approximate
/// ones; an outage whose approximate interval already closed ([`Evaluation::proven`]) is exact as it
/// is and not solved again. Deterministic for any thread count. Cost: the exact audit of
/// the outages solved.
pub fn confirm(
    net: &Network,
    audit: &mut Audit,
    top: usize,
    gates: &[Gate],
    tolerance: Option<f64>,
    opts: RunOptions,
) -> Result<Screen> {
    // An outage whose approximate interval already closed is exact as it stands: the
    // screen needs no second solve of it.
    let mut exact: Vec<bool> = audit.evaluations.iter().map(Evaluation::proven).collect();
    let chosen: Vec<usize> = to_solve(audit, top, gates, tolerance)
        .into_iter()
        .filter(|&k| !exact[k])
        .collect();
    let mut solved = vec![false; audit.outages.len()];
    if !chosen.is_empty() {
        let scenarios = chosen
            .iter()
            .map(|&k| audit.first_scenario(OutageId(k)).clone())
            .collect();
        let walked = audit::run_with(net, scenarios, opts, Engine::Walks)?;
        for (j, &k) in chosen.iter().enumerate() {
            audit.evaluations[k] = walked.evaluations[walked.outage_of[j]].clone();
            exact[k] = true;
            solved[k] = true;
        }
        audit.stats.add(&walked.stats);
    }
    Ok(Screen { top, exact, solved })
}
