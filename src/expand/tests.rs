//! Expansion checks against outside references: brute-force enumeration of whole-unit and
//! whole-module additions, each candidate evaluated by [`solve::evaluate`] on
//! `net.with_added_processing(add)` (the enumeration is the outside reference), and hand
//! computations stated beside each check.

use super::*;
use crate::audit;
use crate::scenario::{self, Kinds, Outage};
use crate::solve;


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
    let net = Network::from_json(include_str!("../../fixtures/small-ring.json")).unwrap();
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
    let text = include_str!("../../fixtures/small-ring.json").replace(
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
