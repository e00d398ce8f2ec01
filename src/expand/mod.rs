//! Closing the gaps: the cheapest added processing that lets a scenario reach the best
//! served_required any expansion can reach ([`close`]), and one expansion for a whole set
//! of scenarios ([`plan`]): least cost closing every closable gap, or the best use of a
//! budget, found by constraint generation.
//!
//! Both use the two-layer flow model of [`crate::solve::flow`] with one extra variable
//! `add_v >= 0` per candidate site in that site's processing row.
//!
//! | file | what |
//! |---|---|
//! | `candidates.rs` | where processing may be added, the `add_v` variables |
//! | `close.rs` | per-scenario closing, best reachable served |
//! | `master.rs` | the master problem and its lexicographic phases |
//! | `generate.rs` | the constraint-generation loop, re-verification, comparing plans |
//! | `modules.rs` | whole modules: rounding neighbourhood and local search |
//! | `tidy.rs` | trim and drop additions that serve nothing, the drivers of each purchase |
//!
//! Invariant: adding processing never lowers served_required (the LP only gains columns
//! of capacity), so a scenario without shortfall needs nothing, an outage whose best
//! reachable value equals its served value is unchanged by any plan, and a plan is
//! verified for a scenario by solving that scenario with the plan applied.

mod candidates;
mod close;
mod generate;
mod master;
mod modules;
mod tidy;

pub use candidates::Candidates;
pub use close::{Closing, close};
pub use master::TOTAL_MAX_VARS;

use crate::audit::{self, Audit, RunOptions};
use crate::error::Result;
use crate::model::{Network, SiteIdx};
use crate::solve::{Evaluation, TOL};
use generate::{Generation, generate, verify};

/// What a plan optimises. Every goal ends with the least cost that keeps its optimum,
/// then a tie-break toward sites earlier in the file (see `master.rs`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Goal {
    /// Least cost such that every scenario reaches its best reachable served_required.
    CloseAll,
    /// Within budget, maximise the worst scenario's served fraction of required; with it
    /// held, minimise the total shortfall over the scenarios; with both held, the cost.
    WorstWithin(f64),
    /// Within budget, minimise the total shortfall over the scenarios (an outage shared by
    /// several scenarios counts once per scenario); with it held, the cost.
    TotalWithin(f64),
}

/// One round of constraint generation.
#[derive(Debug, Clone, PartialEq)]
pub struct Round {
    /// Scenarios (distinct outages) in the master problem this round.
    pub active: usize,
    /// Master's primary objective: the plan's cost ([`Goal::CloseAll`]), the worst served
    /// fraction ([`Goal::WorstWithin`]), or the total shortfall over the scenarios of the
    /// outages in the master ([`Goal::TotalWithin`]).
    pub objective: f64,
    /// Outages found violated by the master's plan (and added for the next round).
    pub violated: usize,
}

/// A plan and how it does in every scenario.
#[derive(Debug, Clone)]
pub struct Plan {
    pub goal: Goal,
    /// Units added per site.
    pub add: Vec<f64>,
    pub cost: f64,
    pub rounds: Vec<Round>,
    /// Per outage of the audit: the best reachable served_required.
    pub best: Vec<f64>,
    /// Per outage: the evaluation with the plan applied (every outage with a shortfall
    /// re-solved).
    pub after: Vec<Evaluation>,
    /// Per site: the outages that serve less when that site's addition is removed (the
    /// other additions kept), with the units they lose, most first. Non-empty for every
    /// site the plan buys at.
    pub drivers: Vec<Vec<(usize, f64)>>,
    /// The worst served fraction of required after the plan.
    pub worst_fraction: f64,
    /// Additions the LP proposed that the drop pass removed (they served nothing).
    pub dropped: usize,
    /// When some site buys in modules (`expand_step`): the LP plan before rounding, its
    /// cost, and the gap of the module plan to it.
    pub modules: Option<ModuleRounding>,
}

/// How a continuous plan became a plan in whole modules.
#[derive(Debug, Clone, PartialEq)]
pub struct ModuleRounding {
    pub lp_add: Vec<f64>,
    /// The continuous plan's cost (for close-all, a lower bound on any module plan).
    pub lp_cost: f64,
    /// Module plan cost − LP cost (≥ 0).
    pub gap: f64,
    /// Modules the local search removed from the best rounding.
    pub repaired: usize,
    /// Whole-module plans checked (each verified by re-solving the outages).
    pub checked: usize,
}

/// One plan for all outages of `audit`:
///
/// 1. best reachable served_required per outage (one LP each, in parallel); outages where
///    it is above the served value are *gainable*, the rest are fixed by any plan;
/// 2. constraint generation over the gainable outages (`generate.rs`), whose master is
///    solved in lexicographic phases ending with the least cost (`master.rs`);
/// 3. whole modules where sites buy by `expand_step` (`modules.rs`);
/// 4. trim and drop additions that serve nothing, and find what drives each (`tidy.rs`);
/// 5. every outage with a shortfall re-solved with the final plan.
///
/// Cost: dominated by the master solves (a few LPs the size of the active outages' flow
/// models per round, at most |gainable| rounds) and by one [`crate::solve::evaluate`] per
/// gainable outage per verification.
pub fn plan(net: &Network, audit: &Audit, goal: Goal, opts: RunOptions) -> Result<Plan> {
    let cands = Candidates::of(net);
    let n_out = audit.outages.len();
    let bests: Vec<f64> = audit::par_map(
        &(0..n_out).collect::<Vec<_>>(),
        opts,
        "best reachable",
        |&k| {
            let e = &audit.evaluations[k];
            if e.shortfall <= 0.0 {
                return Ok(e.served_required);
            }
            Ok(close::best_reachable(net, &audit.outages[k], &cands, e)?.0)
        },
    )?;
    let eval = |k: usize| &audit.evaluations[k];
    let gain = |k: usize| bests[k] - eval(k).served_required;
    let mut gainable: Vec<usize> = (0..n_out)
        .filter(|&k| gain(k) > TOL * eval(k).surviving_required.max(1.0))
        .collect();
    // Start from the outages that gain most (close-all) or are worst (budgets).
    gainable.sort_by(|&a, &b| {
        match goal {
            Goal::CloseAll => gain(b).total_cmp(&gain(a)),
            _ => eval(a)
                .served_fraction()
                .total_cmp(&eval(b).served_fraction()),
        }
        .then(a.cmp(&b))
    });
    let t_cap = (0..n_out)
        .filter(|k| !gainable.contains(k))
        .map(|k| eval(k).served_fraction())
        .fold(1.0, f64::min);
    let mut multiplicity = vec![0usize; n_out];
    for &k in &audit.outage_of {
        multiplicity[k] += 1;
    }
    let data = Generation {
        bests: &bests,
        gainable: &gainable,
        multiplicity: &multiplicity,
        t_cap,
    };
    let g = generate(net, audit, &cands, &data, goal, opts)?;
    let (add, after, mut modules) = if cands.any_modular() {
        let (add, after, m) = modules::round_to_modules(net, audit, &cands, &data, goal, &g, opts)?;
        (add, after, Some(m))
    } else {
        (g.add.clone(), g.after.clone(), None)
    };
    let tidied = tidy::tidy(net, audit, &cands, &gainable, add, after, opts)?;
    let short: Vec<usize> = (0..n_out).filter(|&k| eval(k).shortfall > 0.0).collect();
    let after = verify(&net.with_added_processing(&tidied.add), audit, &short, opts)?;
    let cost = cands.cost_of(&tidied.add);
    if let Some(m) = &mut modules {
        m.gap = (cost - m.lp_cost).max(0.0);
    }
    Ok(Plan {
        goal,
        cost,
        add: tidied.add,
        rounds: g.rounds,
        best: bests,
        worst_fraction: after
            .iter()
            .map(Evaluation::served_fraction)
            .fold(1.0, f64::min),
        after,
        drivers: tidied.drivers,
        dropped: tidied.dropped,
        modules,
    })
}

/// Per site: how many outages (with a shortfall) would serve more with one more unit
/// there, and the largest such gain; from each outage's shadow prices. Sites without a
/// processing row in an outage (no capacity) are not priced there.
pub fn relief(audit: &Audit, n_sites: usize) -> Vec<(SiteIdx, usize, f64)> {
    let mut out: Vec<(SiteIdx, usize, f64)> = (0..n_sites).map(|v| (v, 0, 0.0)).collect();
    for e in &audit.evaluations {
        if e.shortfall <= 0.0 {
            continue;
        }
        for (v, p) in e.site_price.iter().enumerate() {
            if let Some(p) = p
                && *p > 1e-6
            {
                out[v].1 += 1;
                out[v].2 = f64::max(out[v].2, *p);
            }
        }
    }
    out.retain(|r| r.1 > 0);
    out.sort_by(|a, b| b.1.cmp(&a.1).then(b.2.total_cmp(&a.2)).then(a.0.cmp(&b.0)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{self, Kinds};

    /// Path a–b–c, 10 per direction; processing 2 at a; candidates a (cost 3, ≤ 10),
    /// b (cost 2, ≤ 10), c (cost 1, ≤ 3); one demand a→c of `volume`.
    fn path(volume: f64) -> Network {
        Network::from_json(&format!(
            r#"{{"sites":[{{"id":"a","processing":2,"expand_cost":3,"expand_max":10}},
                {{"id":"b","expand_cost":2,"expand_max":10}},
                {{"id":"c","expand_cost":1,"expand_max":3}}],
              "links":[{{"id":"ab","from":"a","to":"b","capacity":10}},
                       {{"id":"bc","from":"b","to":"c","capacity":10}}],
              "demands":[{{"from":"a","to":"c","volume":{volume}}}]}}"#
        ))
        .unwrap()
    }

    fn closing_of(net: &Network) -> Closing {
        let o = Outage::default();
        let e = solve::evaluate(net, &o).unwrap();
        close(net, &o, &e, &Candidates::of(net)).unwrap().unwrap()
    }

    /// Closing cost equals a brute-force search over a grid of whole-unit additions (the
    /// optimum is integral here: integral data, and the cheapest sites fill in cost order;
    /// the grid itself is the outside check).
    #[test]
    fn closing_matches_brute_force_grid() {
        let net = path(8.0);
        let c = closing_of(&net);
        let cands = Candidates::of(&net);
        let mut best_cost = f64::INFINITY;
        for a in 0..=6 {
            for b in 0..=6 {
                for cc in 0..=3 {
                    let add = [a as f64, b as f64, cc as f64];
                    let e = solve::evaluate(&net.with_added_processing(&add), &Outage::default())
                        .unwrap();
                    if e.served_required >= c.best - 1e-6 {
                        best_cost = best_cost.min(cands.cost_of(&add));
                    }
                }
            }
        }
        assert!(
            (c.cost - best_cost).abs() < 1e-5,
            "{} vs {}",
            c.cost,
            best_cost
        );
        assert!(
            (c.cost - 9.0).abs() < 1e-5,
            "c +3 (3) then b +3 (6): {}",
            c.cost
        );
        assert!(c.not_closable.abs() < 1e-9);
        // LP duality: the cost LP's dual objective equals its cost.
        assert!(
            (c.dual_bound - c.cost).abs() < 1e-5 * c.cost.max(1.0),
            "{c:?}"
        );
    }

    /// Links cap what processing can recover: 15 offered over a 10-unit path.
    #[test]
    fn link_limited_gap_is_not_closable() {
        let net = path(15.0);
        let c = closing_of(&net);
        assert!((c.best - 10.0).abs() < 1e-6, "{c:?}");
        assert!((c.not_closable - 5.0).abs() < 1e-6);
        assert!(!c.binding_links.is_empty());
    }

    fn ring_audit() -> (Network, Audit) {
        let net = Network::from_json(include_str!("../fixtures/small-ring.json")).unwrap();
        let scenarios = scenario::enumerate(&net, Kinds::ALL, 1);
        let audit = audit::run(&net, scenarios, RunOptions::default()).unwrap();
        (net, audit)
    }

    /// The plan re-verified on every scenario leaves only not-closable shortfall, and costs
    /// between the costliest single closing and the sum of all closings.
    #[test]
    fn plan_covers_every_scenario_within_closing_bounds() {
        let (net, audit) = ring_audit();
        let cands = Candidates::of(&net);
        let plan = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
        let mut max_single: f64 = 0.0;
        let mut sum = 0.0;
        for (k, o) in audit.outages.iter().enumerate() {
            let after = &plan.after[k];
            let not_closable = audit.evaluations[k].surviving_required - plan.best[k];
            assert!(
                (after.shortfall - not_closable).abs() < 1e-5,
                "outage {k}: after {} vs not closable {not_closable}",
                after.shortfall
            );
            if let Some(c) = close(&net, o, &audit.evaluations[k], &cands).unwrap() {
                assert!((c.best - plan.best[k]).abs() < 1e-6);
                max_single = max_single.max(c.cost);
                sum += c.cost;
            }
        }
        assert!(max_single > 0.0, "the fixture must need some expansion");
        assert!(
            plan.cost >= max_single - 1e-5,
            "{} < {max_single}",
            plan.cost
        );
        assert!(plan.cost <= sum + 1e-5, "{} > {sum}", plan.cost);
    }

    /// More budget never gives a worse objective (worst fraction up, total shortfall down).
    #[test]
    fn more_budget_never_worse() {
        let (net, audit) = ring_audit();
        let mut last_worst = -1.0;
        let mut last_total = f64::INFINITY;
        for b in [0.0, 2.0, 5.0, 12.0, 40.0] {
            let w = plan(&net, &audit, Goal::WorstWithin(b), RunOptions::default()).unwrap();
            assert!(w.cost <= b + 1e-6);
            assert!(w.worst_fraction >= last_worst - 1e-6, "budget {b}");
            last_worst = w.worst_fraction;
            let t = plan(&net, &audit, Goal::TotalWithin(b), RunOptions::default()).unwrap();
            let total: f64 = audit.outage_of.iter().map(|&k| t.after[k].shortfall).sum();
            assert!(total <= last_total + 1e-6, "budget {b}");
            last_total = total;
        }
    }

    /// A plan in whole modules never costs less than the continuous plan, and is whole.
    #[test]
    fn module_plan_not_cheaper_than_lp() {
        let text = include_str!("../fixtures/small-ring.json").replace(
            "\"expand_max\": 20",
            "\"expand_max\": 20, \"expand_step\": 4",
        );
        let net = Network::from_json(&text).unwrap();
        assert!(net.sites[0].expansion.as_ref().unwrap().step.is_some());
        let scenarios = scenario::enumerate(&net, Kinds::ALL, 1);
        let audit = audit::run(&net, scenarios, RunOptions::default()).unwrap();
        let p = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
        let m = p.modules.as_ref().expect("module rounding ran");
        assert!(p.cost >= m.lp_cost - 1e-6);
        let modules = p.add[0] / 4.0;
        assert!((modules - modules.round()).abs() < 1e-9, "{}", p.add[0]);
    }
}
