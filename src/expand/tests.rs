//! Expansion checks against outside references: brute-force enumeration of whole-unit and
//! whole-module additions, each candidate evaluated by [`solve::evaluate`] on
//! `net.with_added_processing(add)` (the enumeration is the outside reference), and hand
//! computations stated beside each check.

use super::*;
use crate::audit;
use crate::scenario::{self, Kinds, Outage, Scenario};
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
                let e =
                    solve::evaluate(&net.with_added_processing(&add), &Outage::default()).unwrap();
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

// ---------------------------------------------------------------------------------------
// Brute force over whole units and whole modules (the outside reference: every candidate
// addition evaluated by `solve::evaluate` on `net.with_added_processing(add)`).
// ---------------------------------------------------------------------------------------

/// Absolute tolerance on amounts and fractions in these checks (all values below 100).
const EPS: f64 = 1e-5;

/// A square a–b–c–d with a diagonal a–c; candidates a (cost 2, ≤ 12), b (cost 3, ≤ 12),
/// c (cost 1, ≤ 6), in modules of `steps` when given; three demands.
fn square(steps: Option<[f64; 3]>) -> Network {
    let st = |i: usize| steps.map_or(String::new(), |s| format!(r#", "expand_step": {}"#, s[i]));
    Network::from_json(&format!(
        r#"{{"sites":[{{"id":"a","processing":2,"expand_cost":2,"expand_max":12{}}},
            {{"id":"b","expand_cost":3,"expand_max":12{}}},
            {{"id":"c","processing":1,"expand_cost":1,"expand_max":6{}}},
            {{"id":"d"}}],
          "links":[{{"id":"ab","from":"a","to":"b","capacity":10}},
                   {{"id":"bc","from":"b","to":"c","capacity":10}},
                   {{"id":"cd","from":"c","to":"d","capacity":10}},
                   {{"id":"da","from":"d","to":"a","capacity":10}},
                   {{"id":"ac","from":"a","to":"c","capacity":6}}],
          "demands":[{{"from":"a","to":"c","volume":8}},
                     {{"from":"b","to":"d","volume":6,"required":5}},
                     {{"from":"d","to":"b","volume":4}}]}}"#,
        st(0),
        st(1),
        st(2)
    ))
    .unwrap()
}

fn links_audit(net: &Network) -> Audit {
    let scenarios = scenario::enumerate(net, Kinds::parse("links").unwrap(), 1);
    audit::run(net, scenarios, RunOptions::default()).unwrap()
}

/// One brute-force point: the addition, its cost, worst fraction, total shortfall over
/// scenarios and per-outage shortfall.
struct Point {
    add: Vec<f64>,
    cost: f64,
    worst: f64,
    total: f64,
    shortfall: Vec<f64>,
}

/// The [`square`] with module sizes `steps`, its single-link audit and the
/// [`brute_force`] points over `options`.
fn module_square(steps: [f64; 3], options: &[Vec<f64>]) -> (Network, Audit, Vec<Point>) {
    let net = square(Some(steps));
    let audit = links_audit(&net);
    let points = brute_force(&net, &audit, options);
    (net, audit, points)
}

/// Every addition of the grid `options[v]` (values per site), evaluated on every outage.
fn brute_force(net: &Network, audit: &Audit, options: &[Vec<f64>]) -> Vec<Point> {
    let cands = Candidates::of(net);
    let mut points = Vec::new();
    let mut digits = vec![0usize; options.len()];
    loop {
        let add: Vec<f64> = digits.iter().zip(options).map(|(&d, o)| o[d]).collect();
        let planned = net.with_added_processing(&add);
        let evals: Vec<Evaluation> = audit
            .outages
            .iter()
            .map(|o| solve::evaluate(&planned, o).unwrap())
            .collect();
        points.push(Point {
            cost: cands.cost_of(&add),
            worst: evals
                .iter()
                .map(Evaluation::served_fraction)
                .fold(1.0, f64::min),
            total: audit.outage_of.iter().map(|&k| evals[k].shortfall).sum(),
            shortfall: evals.iter().map(|e| e.shortfall).collect(),
            add,
        });
        let Some(i) = (0..digits.len()).find(|&i| digits[i] + 1 < options[i].len()) else {
            return points;
        };
        digits[i] += 1;
        for d in &mut digits[..i] {
            *d = 0;
        }
    }
}

/// The grid's best point for `goal` within its budget: lexicographic (worst, total, cost)
/// or (total, cost), or the cheapest point with every outage at `best` for close-all.
fn best_point<'a>(points: &'a [Point], goal: Goal, best: &[f64], audit: &Audit) -> &'a Point {
    let within = |p: &Point| match goal {
        Goal::CloseAll => p
            .shortfall
            .iter()
            .zip(best)
            .zip(&audit.evaluations)
            .all(|((s, b), e)| e.surviving_required - s >= b - EPS),
        Goal::WorstWithin(b) | Goal::TotalWithin(b) => p.cost <= b + EPS,
    };
    let near = |a: f64, b: f64| {
        if (a - b).abs() <= EPS {
            std::cmp::Ordering::Equal
        } else {
            a.total_cmp(&b)
        }
    };
    points
        .iter()
        .filter(|p| within(p))
        .min_by(|p, q| match goal {
            Goal::CloseAll => near(p.cost, q.cost),
            Goal::WorstWithin(_) => near(q.worst, p.worst)
                .then(near(p.total, q.total))
                .then(near(p.cost, q.cost)),
            Goal::TotalWithin(_) => near(p.total, q.total).then(near(p.cost, q.cost)),
        })
        .expect("the empty addition is always on the grid")
}

/// Asserts that plan `p` costs no more than the brute-force point `bf` (within `EPS`);
/// `case` names the goal in the failure message.
fn not_dearer(p: &Plan, bf: &Point, case: &str) {
    assert!(
        p.cost <= bf.cost + EPS,
        "{case}: plan {:?} costs {} > brute force {} at {:?}",
        p.add,
        p.cost,
        bf.cost,
        bf.add
    );
}

fn plan_total(audit: &Audit, p: &Plan) -> f64 {
    audit.outage_of.iter().map(|&k| p.after[k].shortfall).sum()
}

/// Module plans against brute force over every module count (steps 2, 3, 2 at a, b, c:
/// 7 · 5 · 4 = 140 plans, each evaluated on the 6 outages): for close-all and for budgets
/// with both objectives, the plan's objective equals the brute-force optimum and it costs
/// no more than the cheapest module plan reaching it; every addition is whole modules.
#[test]
fn module_plans_match_brute_force_over_module_counts() {
    let steps = [2.0, 3.0, 2.0];
    let counts = [6, 4, 3];
    let options: Vec<Vec<f64>> = (0..3)
        .map(|v| (0..=counts[v]).map(|m| m as f64 * steps[v]).collect())
        .chain([vec![0.0]])
        .collect();
    let (net, audit, points) = module_square(steps, &options);
    let mut goals = vec![Goal::CloseAll];
    for b in [0.0, 3.0, 4.0, 7.0, 10.0, 15.0, 40.0] {
        goals.push(Goal::WorstWithin(b));
        goals.push(Goal::TotalWithin(b));
    }
    for goal in goals {
        let p = plan(&net, &audit, goal, RunOptions::default()).unwrap();
        for (v, s) in steps.iter().enumerate() {
            let m = p.add[v] / s;
            assert!((m - m.round()).abs() < 1e-9, "{goal:?}: {:?}", p.add);
        }
        let bf = best_point(&points, goal, &p.best, &audit);
        let total = plan_total(&audit, &p);
        match goal {
            // The case needs modules at all: the baseline itself is short.
            Goal::CloseAll => assert!(p.cost > 1.0, "{:?}", p.add),
            Goal::WorstWithin(b) | Goal::TotalWithin(b) => {
                assert!(p.cost <= b + EPS, "{goal:?}: cost {}", p.cost);
                assert!(
                    (p.worst_fraction - bf.worst).abs() <= EPS
                        || matches!(goal, Goal::TotalWithin(_)),
                    "{goal:?}: worst {} vs brute force {} at {:?}",
                    p.worst_fraction,
                    bf.worst,
                    bf.add
                );
                assert!(
                    (total - bf.total).abs() <= EPS,
                    "{goal:?}: total {total} vs brute force {} at {:?} (plan {:?})",
                    bf.total,
                    bf.add,
                    p.add
                );
            }
        }
        not_dearer(&p, bf, &format!("{goal:?}"));
    }
}

/// Whole-unit plans against brute force over a whole-unit grid (a 0..=12, b 0..=12 step 2,
/// c 0..=6): the LP plan is a relaxation, so its objective is at least the grid's best;
/// and it never costs more than the cheapest grid plan reaching its values.
#[test]
fn unit_plans_against_brute_force_grid() {
    let net = square(None);
    let audit = links_audit(&net);
    let options: Vec<Vec<f64>> = vec![
        (0..=12).map(f64::from).collect(),
        (0..=6).map(|u| f64::from(u) * 2.0).collect(),
        (0..=6).map(f64::from).collect(),
        vec![0.0],
    ];
    let points = brute_force(&net, &audit, &options);
    for goal in [
        Goal::CloseAll,
        Goal::WorstWithin(4.0),
        Goal::WorstWithin(9.0),
        Goal::WorstWithin(100.0),
        Goal::TotalWithin(4.0),
        Goal::TotalWithin(9.0),
        Goal::TotalWithin(100.0),
    ] {
        let p = plan(&net, &audit, goal, RunOptions::default()).unwrap();
        let total = plan_total(&audit, &p);
        let bf = best_point(&points, goal, &p.best, &audit);
        if let Goal::WorstWithin(_) = goal {
            assert!(p.worst_fraction >= bf.worst - EPS, "{goal:?}");
        }
        if let Goal::TotalWithin(_) = goal {
            assert!(total <= bf.total + EPS, "{goal:?}");
        }
        // Cheapest grid plan that reaches the plan's values (same worst and total).
        let reaching = points
            .iter()
            .filter(|q| q.worst >= p.worst_fraction - EPS && q.total <= total + EPS)
            .map(|q| q.cost)
            .fold(f64::INFINITY, f64::min);
        assert!(
            p.cost <= reaching + EPS,
            "{goal:?}: plan {:?} costs {} > {reaching}",
            p.add,
            p.cost
        );
    }
}

/// A budget never spends more than the least-cost close-all plan when it reaches the same
/// values (reference: the close-all plan itself, and the brute-force cost of the square in
/// the test above); on the hand-computed path network (close-all 9: c +3, b +3) a budget
/// of 31 buys exactly that.
#[test]
fn budgets_never_spend_more_than_close_all() {
    for net in [square(None), path(8.0)] {
        let audit = ring_audit_of(&net);
        let close_all = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
        for b in [close_all.cost, close_all.cost + 1.0, 31.0, 1000.0] {
            for goal in [Goal::WorstWithin(b), Goal::TotalWithin(b)] {
                let p = plan(&net, &audit, goal, RunOptions::default()).unwrap();
                for (k, e) in p.after.iter().enumerate() {
                    assert!(
                        (e.shortfall - close_all.after[k].shortfall).abs() <= EPS,
                        "{goal:?} outage {k}: {} vs close-all {}",
                        e.shortfall,
                        close_all.after[k].shortfall
                    );
                }
                assert!(
                    p.cost <= close_all.cost + EPS,
                    "{goal:?}: {} > close-all {}",
                    p.cost,
                    close_all.cost
                );
            }
        }
    }
    let net = path(8.0);
    let audit = ring_audit_of(&net);
    let p = plan(&net, &audit, Goal::WorstWithin(31.0), RunOptions::default()).unwrap();
    assert!((p.cost - 9.0).abs() < EPS, "{:?}", p.add);
    assert!(p.add[0].abs() < EPS && (p.add[1] - 3.0).abs() < EPS && (p.add[2] - 3.0).abs() < EPS);
}

fn ring_audit_of(net: &Network) -> Audit {
    let scenarios = scenario::enumerate(net, Kinds::ALL, 1);
    audit::run(net, scenarios, RunOptions::default()).unwrap()
}

/// Every bought site has drivers, and taking its addition away (the others kept) lowers
/// some scenario's served demand: checked by `solve::evaluate` directly.
#[test]
fn every_purchase_serves_something() {
    let net = square(None);
    let audit = links_audit(&net);
    for goal in [
        Goal::CloseAll,
        Goal::WorstWithin(7.0),
        Goal::TotalWithin(20.0),
    ] {
        let p = plan(&net, &audit, goal, RunOptions::default()).unwrap();
        for v in (0..net.sites.len()).filter(|&v| p.add[v] > 0.0) {
            assert!(!p.drivers[v].is_empty(), "{goal:?}: site {v} has no driver");
            let mut trial = p.add.clone();
            trial[v] = 0.0;
            let planned = net.with_added_processing(&trial);
            let lost = audit
                .outages
                .iter()
                .enumerate()
                .map(|(k, o)| {
                    p.after[k].served_required
                        - solve::evaluate(&planned, o).unwrap().served_required
                })
                .fold(0.0, f64::max);
            assert!(lost > 1e-6, "{goal:?}: site {v}'s addition serves nothing");
        }
    }
}

/// More budget never gives a worse plan, lexicographically: the worst fraction never falls,
/// and where it stays the same the total shortfall never rises (common practice, no
/// source: a larger budget only relaxes the budget row).
#[test]
fn budget_monotone_lexicographically() {
    let net = square(None);
    let audit = links_audit(&net);
    let mut last: Option<(f64, f64)> = None;
    for b in [0.0, 1.0, 2.5, 4.0, 6.0, 9.0, 14.0, 25.0, 60.0] {
        let p = plan(&net, &audit, Goal::WorstWithin(b), RunOptions::default()).unwrap();
        let now = (p.worst_fraction, plan_total(&audit, &p));
        if let Some((w, t)) = last {
            assert!(now.0 >= w - EPS, "budget {b}: worst {} < {w}", now.0);
            if (now.0 - w).abs() <= EPS {
                assert!(now.1 <= t + EPS, "budget {b}: total {} > {t}", now.1);
            }
        }
        last = Some(now);
    }
}

/// With no expand_cost anywhere (every site at cost 1) the plan minimises the total added
/// and concentrates it. Five-site ring, processing 1 at a, demands a→c 3 and b→d 2: 4 more
/// units are needed (hand computation); brute force over 0..=4 units at each site gives
/// the least total (4) and the fewest sites that reach it (1).
#[test]
fn default_costs_concentrate_the_addition() {
    let net = Network::from_json(
        r#"{"sites":[{"id":"a","processing":1},{"id":"b"},{"id":"c"},{"id":"d"},{"id":"e"}],
         "links":[{"id":"ab","from":"a","to":"b","capacity":10},
                  {"id":"bc","from":"b","to":"c","capacity":10},
                  {"id":"cd","from":"c","to":"d","capacity":10},
                  {"id":"de","from":"d","to":"e","capacity":10},
                  {"id":"ea","from":"e","to":"a","capacity":10}],
         "demands":[{"from":"a","to":"c","volume":3},{"from":"b","to":"d","volume":2}]}"#,
    )
    .unwrap();
    assert!(Candidates::of(&net).default_costs);
    let scenarios = scenario::enumerate(&net, Kinds::ALL, 0);
    let audit = audit::run(&net, scenarios, RunOptions::default()).unwrap();
    let p = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
    let options = vec![(0..=4).map(f64::from).collect::<Vec<_>>(); 5];
    let points = brute_force(&net, &audit, &options);
    let full: Vec<&Point> = points.iter().filter(|q| q.total <= EPS).collect();
    let least = full.iter().map(|q| q.cost).fold(f64::INFINITY, f64::min);
    let fewest = full
        .iter()
        .filter(|q| q.cost <= least + EPS)
        .map(|q| q.add.iter().filter(|a| **a > 0.0).count())
        .min()
        .unwrap();
    assert!((least - 4.0).abs() < EPS && fewest == 1);
    assert!((p.cost - least).abs() < EPS, "{:?}", p.add);
    let sites = p.add.iter().filter(|a| **a > 0.0).count();
    assert_eq!(sites, fewest, "{:?}", p.add);
    assert!(plan_total(&audit, &p) <= EPS);
}

/// A whole-module plan that the LP puts a hair below a whole count (29.999999 in modules
/// of 10, budget 30) is 3 modules, not 2 (hand computation: 3 modules cost 30 and serve
/// the whole demand of 29.999999).
#[test]
fn module_rounding_uses_a_relative_tolerance() {
    let net = Network::from_json(
        r#"{"sites":[{"id":"a","expand_cost":1,"expand_max":100,"expand_step":10},{"id":"b"}],
         "links":[{"id":"ab","from":"a","to":"b","capacity":100}],
         "demands":[{"from":"a","to":"b","volume":29.999999}]}"#,
    )
    .unwrap();
    let audit = audit::run(
        &net,
        scenario::enumerate(&net, Kinds::ALL, 0),
        RunOptions::default(),
    )
    .unwrap();
    for goal in [
        Goal::WorstWithin(30.0),
        Goal::TotalWithin(30.0),
        Goal::CloseAll,
    ] {
        let p = plan(&net, &audit, goal, RunOptions::default()).unwrap();
        assert!((p.add[0] - 30.0).abs() < 1e-9, "{goal:?}: {:?}", p.add);
        assert!(p.after[0].shortfall <= EPS, "{goal:?}");
    }
}

/// Closings in whole modules against brute force over every module count: on the square
/// with steps (2, 3, 2) and with steps (5, 3, 4), whose `expand_max` (12, 12, 6) is not a
/// multiple of 5 or 4, so the last module at a and c is partial (a: 0, 5, 10, 12; c: 0, 4,
/// 6). For every outage with a shortfall, the closing reaches its best and costs what the
/// cheapest grid point reaching that best costs; the search ran to the end.
#[test]
fn closings_in_modules_match_brute_force_over_module_counts() {
    let grid = |step: f64, max: f64| -> Vec<f64> {
        let mut v: Vec<f64> = (0..)
            .map(|m| f64::from(m) * step)
            .take_while(|a| *a < max)
            .collect();
        v.push(max);
        v
    };
    for steps in [[2.0, 3.0, 2.0], [5.0, 3.0, 4.0]] {
        let net = square(Some(steps));
        let audit = links_audit(&net);
        let cands = Candidates::of(&net);
        let options = vec![
            grid(steps[0], 12.0),
            grid(steps[1], 12.0),
            grid(steps[2], 6.0),
            vec![0.0],
        ];
        let points = brute_force(&net, &audit, &options);
        let mut closed = 0;
        for (k, o) in audit.outages.iter().enumerate() {
            let e = &audit.evaluations[k];
            let Some(c) = close(&net, o, e, &cands).unwrap() else {
                continue;
            };
            let cheapest = points
                .iter()
                .filter(|p| e.surviving_required - p.shortfall[k] >= c.best - EPS)
                .map(|p| p.cost)
                .fold(f64::INFINITY, f64::min);
            assert!(
                (c.cost - cheapest).abs() <= EPS,
                "steps {steps:?} outage {k}: closing {:?} costs {} vs brute force {cheapest}",
                c.add,
                c.cost
            );
            for (v, s) in steps.iter().enumerate() {
                let max = [12.0, 12.0, 6.0][v];
                let m = c.add[v] / s;
                assert!(
                    (m - m.round()).abs() < 1e-9 || (c.add[v] - max).abs() < 1e-9,
                    "steps {steps:?} outage {k}: {:?}",
                    c.add
                );
            }
            assert!(c.verified && c.modules_exhaustive, "{c:?}");
            closed += usize::from(c.cost > 0.0);
        }
        assert!(closed > 0, "some closing must buy");
    }
}

/// A close-all plan with partial last modules (steps 5, 3, 4 under `expand_max` 12, 12, 6)
/// reaches every outage's best and costs no more than the cheapest grid point that does
/// (brute force over every allowed amount: a 0, 5, 10, 12; b 0, 3, …, 12; c 0, 4, 6).
#[test]
fn close_all_plan_with_partial_modules_matches_brute_force() {
    let options = [
        vec![0.0, 5.0, 10.0, 12.0],
        (0..=4).map(|m| f64::from(m) * 3.0).collect(),
        vec![0.0, 4.0, 6.0],
        vec![0.0],
    ];
    let (net, audit, points) = module_square([5.0, 3.0, 4.0], &options);
    let p = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
    let bf = best_point(&points, Goal::CloseAll, &p.best, &audit);
    for (k, e) in p.after.iter().enumerate() {
        assert!(
            e.served_required >= p.best[k] - EPS,
            "outage {k}: {} < best {}",
            e.served_required,
            p.best[k]
        );
    }
    not_dearer(&p, bf, "close-all");
    for (v, a) in p.add.iter().take(3).enumerate() {
        assert!(
            options[v].iter().any(|o| (o - a).abs() < 1e-9),
            "{:?}",
            p.add
        );
    }
}

/// A small random network: a ring of `n` sites plus chords, processing at a few sites
/// (some expandable, at different costs), `demands` random pairs; seeded splitmix64, so
/// every run builds the same networks.
fn random_net(seed: u64, n: usize, demands: usize) -> Network {
    random_net_with_matrices(seed, n, demands, 0)
}

/// [`random_net`] with `matrices` further traffic matrices (`m1`, `m2`, …), each its own
/// `demands` random pairs drawn after the base demands (so the base network is
/// [`random_net`]'s).
fn random_net_with_matrices(seed: u64, n: usize, demands: usize, matrices: usize) -> Network {
    let mut state = seed;
    let mut next = move || {
        state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    };
    let sites: Vec<String> = (0..n)
        .map(|i| {
            let p = if i % 3 == 0 { 2 + next() % 4 } else { 0 };
            let buy = if i % 2 == 0 {
                format!(
                    r#","expand_cost":{},"expand_max":{}"#,
                    1 + next() % 3,
                    3 + next() % 6
                )
            } else {
                String::new()
            };
            format!(r#"{{"id":"s{i}","processing":{p}{buy}}}"#)
        })
        .collect();
    let mut pairs: Vec<(usize, usize)> = (0..n).map(|i| (i, (i + 1) % n)).collect();
    while pairs.len() < n + n / 2 {
        let (a, b) = ((next() % n as u64) as usize, (next() % n as u64) as usize);
        if a != b && !pairs.contains(&(a, b)) && !pairs.contains(&(b, a)) {
            pairs.push((a, b));
        }
    }
    let links: Vec<String> = pairs
        .iter()
        .enumerate()
        .map(|(k, (a, b))| {
            format!(
                r#"{{"id":"l{k}","from":"s{a}","to":"s{b}","capacity":{}}}"#,
                4 + next() % 7
            )
        })
        .collect();
    let mut demand_list = || -> String {
        (0..demands)
            .map(|_| {
                let a = (next() % n as u64) as usize;
                let b = (a + 1 + (next() % (n as u64 - 1)) as usize) % n;
                format!(
                    r#"{{"from":"s{a}","to":"s{b}","volume":{}}}"#,
                    1 + next() % 4
                )
            })
            .collect::<Vec<_>>()
            .join(",")
    };
    let dems = demand_list();
    let further: Vec<String> = (1..=matrices)
        .map(|m| format!(r#"{{"id":"m{m}","demands":[{}]}}"#, demand_list()))
        .collect();
    Network::from_json(&format!(
        r#"{{"sites":[{}],"links":[{}],"demands":[{}],"matrices":[{}]}}"#,
        sites.join(","),
        links.join(","),
        dems,
        further.join(",")
    ))
    .unwrap()
}

/// The walk master's plan against the edge master's (`Master::Edge`: one copy of the
/// edge flow model of `solve::flow` per outage, a second formulation of the same master
/// LP, by flow decomposition) on seeded random networks with every single link and site
/// failure: both plans are re-verified by re-solving every outage (each outage at its
/// best reachable value by the proof standard `reaches`, or, for budgets, the budget
/// kept), and they cost the same (close-all) or reach the same goal value (budgets) to
/// 1e-6 relative (below the reports' printed digits): the walk master's rounds are solved
/// by the warm simplex (a vertex, rows met to rounding), the edge master's by the interior
/// point, whose rows hold to about 1e-8 of the model's magnitude.
#[test]
fn walk_master_plans_match_edge_master_plans() {
    let mut checked = 0;
    for seed in 1..=6u64 {
        let net = random_net(seed, 7, 9);
        checked += walk_and_edge_plans_agree(&net, &ring_audit_of(&net), seed);
    }
    assert!(checked >= 6, "only {checked} plans bought anything");
}

/// [`walk_master_plans_match_edge_master_plans`] on files with two further traffic
/// matrices: every single failure under each of the three matrices, one purchase for all
/// the (scenario, matrix) pairs, the walk master's against the edge master's.
#[test]
fn walk_master_plans_match_edge_master_plans_under_matrices() {
    let mut checked = 0;
    for seed in 11..=14u64 {
        let net = random_net_with_matrices(seed, 6, 5, 2);
        assert_eq!(net.matrix_count(), 3);
        let scenarios: Vec<Scenario> = scenario::enumerate(&net, Kinds::ALL, 1)
            .into_iter()
            .flat_map(|s| (0..3).map(move |m| s.clone().under(m)))
            .collect();
        let audit = audit::run(&net, scenarios, RunOptions::default()).unwrap();
        assert!(audit.outages.iter().any(|o| o.matrix == 2));
        checked += walk_and_edge_plans_agree(&net, &audit, seed);
    }
    assert!(checked >= 4, "only {checked} plans bought anything");
}

/// Both masters' plans of `net` for close-all and both budgets, re-verified and compared
/// (see [`walk_master_plans_match_edge_master_plans`]); returns how many walk plans
/// bought something.
fn walk_and_edge_plans_agree(net: &Network, audit: &Audit, seed: u64) -> usize {
    let mut checked = 0;
    for goal in [
        Goal::CloseAll,
        Goal::WorstWithin(4.0),
        Goal::TotalWithin(4.0),
    ] {
        let w = plan_with(net, audit, goal, RunOptions::default(), Master::Walks).unwrap();
        let e = plan_with(net, audit, goal, RunOptions::default(), Master::Edge).unwrap();
        for p in [&w, &e] {
            // Re-verified here, independently of the plan's own `after`.
            let planned = net.with_added_processing(&p.add);
            for (k, o) in audit.outages.iter().enumerate() {
                let after = solve::evaluate(planned.view(o.matrix), o).unwrap();
                assert!(
                    (after.served_required - p.after[k].served_required).abs()
                        <= 1e-6 * after.surviving_required.max(1.0),
                    "seed {seed} {goal:?} outage {k}"
                );
                if goal == Goal::CloseAll {
                    assert!(
                        reaches(&after, p.best[k]),
                        "seed {seed}: outage {k} short of its best"
                    );
                }
            }
            if let Goal::WorstWithin(b) | Goal::TotalWithin(b) = goal {
                assert!(p.cost <= b + 1e-6, "seed {seed} {goal:?}: over budget");
            }
        }
        let tol = 1e-6 * w.cost.abs().max(e.cost.abs()).max(1.0);
        match goal {
            Goal::CloseAll => {
                assert!(
                    (w.cost - e.cost).abs() <= tol,
                    "seed {seed}: {} vs {}",
                    w.cost,
                    e.cost
                )
            }
            Goal::WorstWithin(_) => assert!(
                (w.worst_fraction - e.worst_fraction).abs() <= 1e-7,
                "seed {seed}: worst {} vs {}",
                w.worst_fraction,
                e.worst_fraction
            ),
            Goal::TotalWithin(_) => {
                // Relative to the required demand summed over the scenarios (the
                // scale the masters hold the total to).
                let (tw, te) = (plan_total(audit, &w), plan_total(audit, &e));
                let scale: f64 = audit
                    .outage_of
                    .iter()
                    .map(|&k| audit.evaluations[k].surviving_required)
                    .sum();
                assert!(
                    (tw - te).abs() <= 1e-7 * scale.max(1.0),
                    "seed {seed}: {tw} vs {te}"
                );
            }
        }
        if w.cost > 0.0 {
            checked += 1;
        }
    }
    checked
}
