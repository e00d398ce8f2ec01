//! The constraint-generation loop of [`super::plan`], the re-verification of a plan on
//! every outage, and how two plans compare ([`Score`]).

use std::cmp::Ordering;

use super::candidates::Candidates;
use super::master::{MasterInput, solve_master};
use super::{Goal, MasterStats, Round};
use crate::audit::{self, Audit, RunOptions};
use crate::error::Result;
use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::evaluator::{Evaluator, Walks};
use crate::solve::{self, Evaluation, GAP_TOL};

/// Outages added to the master at most per round (the most violated first).
const ADD_PER_ROUND: usize = 4;

/// `MEET_TOL`: at the master's worst fraction; `COST_TOL`: equal costs (see [`crate::tol`]).
pub(super) use crate::tol::{COST_TOL, MEET_TOL};

/// Most rounds of [`top_up`].
pub(crate) const TOP_UP_ROUNDS: usize = 4;

/// A shadow price of processing below this does not count as relief (see
/// [`cheapest_raise`]); defined in [`crate::tol`].
use crate::tol::PRICE_MIN;

/// The proof standard of a purchase: the evaluation `e` of an outage with the purchase
/// applied (served_required is proven achievable: inside the proven interval, or the proven
/// lower bound when unproven) reaches `best` within [`GAP_TOL`] of the outage's surviving
/// required demand, the tolerance every audit result is proven to. O(1).
pub(crate) fn reaches(e: &Evaluation, best: f64) -> bool {
    e.served_required >= best - GAP_TOL * e.surviving_required
}

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
    /// The master's formulation.
    pub master: super::Master,
}

/// What constraint generation returns.
pub(super) struct Generated {
    pub add: Vec<f64>,
    pub rounds: Vec<Round>,
    /// The master's LP solves over every round.
    pub stats: MasterStats,
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
/// most |gainable| rounds. "Below best" is judged by the proof standard [`reaches`], so an
/// outage outside the master is never left further below its best than the audit's proven
/// tolerance; for close-all the final plan is then topped up ([`top_up`]) where the
/// master's own outages miss that standard (the interior-point master may return a plan
/// that meets its rows only to about 1e-8 of the whole model's magnitude).
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
    let mut stats = MasterStats::default();
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
                master: data.master,
            },
            goal,
        )?;
        stats.solves += master.stats.solves;
        stats.interior_point_solves += master.stats.interior_point_solves;
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
            if below_t > MEET_TOL || !reaches(e, data.bests[k]) {
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
            let (add, after) = if goal == Goal::CloseAll {
                top_up(
                    net,
                    audit,
                    cands,
                    data.bests,
                    data.gainable,
                    (master.add, after),
                    opts,
                )?
            } else {
                (master.add, after)
            };
            return Ok(Generated {
                add,
                rounds,
                stats,
                after,
            });
        }
        active.extend(violated.iter().take(ADD_PER_ROUND).map(|v| v.2));
    }
}

/// Raises the plan `(add, after)` (`after`: `add` evaluated with every outage of `which`
/// re-solved) until every outage of `which` reaches its best by [`reaches`]: each short
/// outage asks for [`cheapest_raise`], each site takes the largest level asked of it, and
/// the outages are re-solved; at most [`TOP_UP_ROUNDS`] rounds, and it stops early when
/// no short outage has a priced candidate. The deficits it closes are solver inaccuracy
/// (far below a unit), so the plan's cost barely moves. Cost: one [`verify`] per round.
pub(super) fn top_up(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    bests: &[f64],
    which: &[usize],
    plan: (Vec<f64>, Vec<Evaluation>),
    opts: RunOptions,
) -> Result<(Vec<f64>, Vec<Evaluation>)> {
    let (mut add, mut after) = plan;
    for _ in 0..TOP_UP_ROUNDS {
        let mut level = add.clone();
        for &k in which {
            let e = &after[k];
            if reaches(e, bests[k]) {
                continue;
            }
            if let Some((v, to)) = cheapest_raise(cands, &add, e, bests[k] - e.served_required) {
                level[v] = level[v].max(to);
            }
        }
        if level == add {
            break;
        }
        add = level;
        after = verify(&net.with_added_processing(&add), audit, which, opts)?;
    }
    Ok((add, after))
}

/// For an outage evaluated as `e` with `add` applied that serves `deficit` less than it
/// must: the candidate site where serving it by the site's shadow price of processing
/// costs least, and the addition there that does (`add_v + deficit / price`, rounded up to
/// whole modules where the site buys by the module, at most `expand_max`); `None` when no
/// candidate has a price above [`PRICE_MIN`] and room left. Ties go to the site earlier in
/// the file. O(sites).
pub(crate) fn cheapest_raise(
    cands: &Candidates,
    add: &[f64],
    e: &Evaluation,
    deficit: f64,
) -> Option<(usize, f64)> {
    (0..add.len())
        .filter_map(|v| {
            let cost = cands.cost[v]?;
            let price = e.site_price.get(v).copied().flatten()?;
            if price <= PRICE_MIN {
                return None;
            }
            let to = cands
                .round_up(v, add[v] + deficit / price.min(1.0))
                .min(cands.max[v]);
            (to > add[v]).then_some((v, to, cost * (to - add[v])))
        })
        .min_by(|a, b| a.2.total_cmp(&b.2).then(a.0.cmp(&b.0)))
        .map(|(v, to, _)| (v, to))
}

/// Every outage with `planned` (the network with a plan applied: the audit's network with
/// processing added, never less): the outages in `which` are re-solved (in parallel,
/// results in input order), the others keep their audit evaluation. Each re-solve is the
/// walk engine's from the audit's baseline optimum ([`Audit::baseline`], base traffic
/// matrix; its flows stay feasible with more processing, and the answer is certified as
/// every walk answer is), else cold. Cost: |which| walk-engine evaluations, each warm
/// from the baseline when there is one.
pub(super) fn verify(
    planned: &Network,
    audit: &Audit,
    which: &[usize],
    opts: RunOptions,
) -> Result<Vec<Evaluation>> {
    let solved = audit::par_map(which, opts, "verifying plan", |&k| {
        evaluate_from_baseline(planned, audit, &audit.outages[k])
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
    /// Whether every outage reaches its best reachable value ([`reaches`]).
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
            at_best: after.iter().zip(bests).all(|(e, b)| reaches(e, *b)),
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

/// `outage` on `planned` (the audit's network with processing added) by the walk engine,
/// started from the audit's baseline optimum when it has one and the outage is on the
/// base traffic matrix (another matrix's demands are other ones), else cold
/// ([`solve::evaluate_cold_walks`], which also takes files with service chains).
/// Cost: one walk-engine evaluation.
pub(crate) fn evaluate_from_baseline(
    planned: &Network,
    audit: &Audit,
    outage: &Outage,
) -> Result<Evaluation> {
    match &audit.baseline {
        Some(b) if outage.matrix == 0 && planned.chains.is_none() => {
            Ok(Walks.evaluate(planned, outage, Some(&**b))?.evaluation)
        }
        _ => solve::evaluate_cold_walks(planned, outage),
    }
}
