//! The constraint-generation loop of [`super::plan`], the re-verification of a plan on
//! every outage, and how two plans compare ([`Score`]).

use std::cmp::Ordering;

use super::candidates::Candidates;
use super::master::{MasterInput, solve_master};
use super::{Goal, Round};
use crate::audit::{self, Audit, RunOptions};
use crate::error::Result;
use crate::model::Network;
use crate::solve::{self, Evaluation};

/// Outages added to the master at most per round (the most violated first).
const ADD_PER_ROUND: usize = 4;

/// Relative tolerance (of an outage's required demand) below which an outage counts as at
/// its best reachable value, and (absolute, on fractions) at the master's worst fraction.
pub(super) const MEET_TOL: f64 = 1e-6;

/// Relative tolerance under which two costs count as equal when plans are compared.
const COST_TOL: f64 = 1e-9;

/// The outage data constraint generation works on.
pub(super) struct Generation<'a> {
    /// Per outage: the best reachable served_required.
    pub bests: &'a [f64],
    /// Outages processing can help (best reachable above served), worst first: the
    /// master starts from the head. Only these are ever put in the master or re-solved.
    pub gainable: &'a [usize],
    /// Scenarios per outage.
    pub multiplicity: &'a [usize],
    /// The worst served fraction among the outages processing cannot help (1 when none):
    /// no plan does better than this, so it bounds `t` without a flow model.
    pub t_cap: f64,
}

/// What constraint generation returns.
pub(super) struct Generated {
    pub add: Vec<f64>,
    pub rounds: Vec<Round>,
    /// Per outage: the evaluation with the plan applied (only `gainable` re-solved).
    pub after: Vec<Evaluation>,
}

/// The constraint-generation loop over `net` (which may already carry fixed additions)
/// with candidates `cands`. The master starts with the head of `gainable` (all of it for
/// [`Goal::TotalWithin`]); after each master solve every gainable outage is re-solved with
/// the plan applied, and an outage outside the master is violated when it is below its
/// best reachable value or (worst) below the master's worst fraction. A plan that leaves
/// every outage outside the master at its best and above `t` is optimal for all outages
/// (served never exceeds best, so adding those outages could not change any phase), so
/// the loop is exact; each round adds at least one outage or stops, so it ends after at
/// most |gainable| rounds.
pub(super) fn generate(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    data: &Generation<'_>,
    goal: Goal,
    opts: RunOptions,
) -> Result<Generated> {
    let fraction = Evaluation::served_fraction;
    let mut active: Vec<usize> = match goal {
        Goal::TotalWithin(_) => data.gainable.to_vec(),
        _ => data.gainable.iter().copied().take(ADD_PER_ROUND).collect(),
    };
    let mut rounds = Vec::new();
    loop {
        let master = solve_master(
            &MasterInput {
                net,
                audit,
                cands,
                bests: data.bests,
                active: &active,
                multiplicity: data.multiplicity,
                t_cap: data.t_cap,
            },
            goal,
        )?;
        let after = verify(
            &net.with_added_processing(&master.add),
            audit,
            data.gainable,
            opts,
        )?;
        // Violations, most violated first: below the worst fraction, then below best.
        let mut violated: Vec<(f64, f64, usize)> = Vec::new();
        for &k in data.gainable {
            if active.contains(&k) {
                continue;
            }
            let e = &after[k];
            let scale = e.surviving_required.max(1.0);
            let below_t = match goal {
                Goal::WorstWithin(_) => (master.objective - fraction(e)).max(0.0),
                _ => 0.0,
            };
            let below_best = ((data.bests[k] - e.served_required) / scale).max(0.0);
            if below_t > MEET_TOL || below_best > MEET_TOL {
                violated.push((below_t, below_best, k));
            }
        }
        violated.sort_by(|a, b| {
            b.0.total_cmp(&a.0)
                .then(b.1.total_cmp(&a.1))
                .then(a.2.cmp(&b.2))
        });
        rounds.push(Round {
            active: active.len(),
            objective: master.objective,
            violated: violated.len(),
        });
        if violated.is_empty() {
            return Ok(Generated {
                add: master.add,
                rounds,
                after,
            });
        }
        active.extend(violated.iter().take(ADD_PER_ROUND).map(|v| v.2));
    }
}

/// Every outage with `planned` (the network with a plan applied): the outages in `which`
/// are re-solved (in parallel, results in input order), the others keep their audit
/// evaluation. Cost: |which| calls of [`solve::evaluate`].
pub(super) fn verify(
    planned: &Network,
    audit: &Audit,
    which: &[usize],
    opts: RunOptions,
) -> Result<Vec<Evaluation>> {
    let solved = audit::par_map(which, opts, "verifying plan", |&k| {
        solve::evaluate_cold_walks(planned, &audit.outages[k])
    })?;
    let mut after = audit.evaluations.clone();
    for (&k, e) in which.iter().zip(solved) {
        after[k] = e;
    }
    Ok(after)
}

/// How a plan does, from every outage solved with it applied.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Score {
    /// The worst served fraction of required.
    pub worst: f64,
    /// Σ over scenarios of the shortfall (an outage counts once per scenario).
    pub total_shortfall: f64,
    /// Whether every outage reaches its best reachable value.
    pub at_best: bool,
    pub cost: f64,
}

impl Score {
    /// The score of `after` for a plan costing `cost`. O(outages + scenarios).
    pub fn of(audit: &Audit, bests: &[f64], after: &[Evaluation], cost: f64) -> Score {
        Score {
            worst: after
                .iter()
                .map(Evaluation::served_fraction)
                .fold(1.0, f64::min),
            total_shortfall: audit.outage_of.iter().map(|&k| after[k].shortfall).sum(),
            at_best: after
                .iter()
                .zip(bests)
                .all(|(e, b)| e.served_required >= b - MEET_TOL * e.surviving_required.max(1.0)),
            cost,
        }
    }

    /// `self` against `other` for `goal`, `Greater` when `self` is the better plan:
    /// close-all: at best first, then the lower cost; worst: the higher worst fraction,
    /// then the lower total shortfall, then the lower cost; total: the lower total
    /// shortfall, then the lower cost. Objectives within [`MEET_TOL`] (relative to
    /// `scale`, Σ scenarios · required, for the total) and costs within `COST_TOL`
    /// relative count as equal.
    pub fn compare(&self, other: &Score, goal: Goal, scale: f64) -> Ordering {
        let near = |a: f64, b: f64, tol: f64| {
            if (a - b).abs() <= tol {
                Ordering::Equal
            } else {
                a.total_cmp(&b)
            }
        };
        let worst = near(self.worst, other.worst, MEET_TOL);
        let total = near(
            other.total_shortfall,
            self.total_shortfall,
            MEET_TOL * scale.max(1.0),
        );
        let cost = near(
            other.cost,
            self.cost,
            COST_TOL * self.cost.abs().max(other.cost.abs()).max(1.0),
        );
        match goal {
            Goal::CloseAll => self.at_best.cmp(&other.at_best).then(cost),
            Goal::WorstWithin(_) => worst.then(total).then(cost),
            Goal::TotalWithin(_) => total.then(cost),
        }
    }
}
