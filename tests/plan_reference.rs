//! `redoubt plan` (walk master, `--master walks`) against a reference of the plan LP
//! written in this file from the input contract and solved by microlp (a general-purpose
//! simplex, through good_lp), on seeded random networks with every single link failure.
//!
//! The reference is one route-and-process model per scenario, one commodity per demand
//! (not per source, and not walks): per demand `d` a served flow `f_d ∈ [0, required_d]`,
//! per arc of a surviving link an unprocessed flow `x0` and a processed flow `x1`, per
//! site that processes or may buy processing a processing flow `p`; conservation per site
//! and layer (layer 0: out − in + p = f_d at the source; layer 1: out − in − p = −f_d at
//! the destination); per arc Σ (x0 + x1) ≤ capacity (each direction of a duplex link has
//! the full capacity); per site Σ p ≤ processing + add_v, where the purchase `add_v ∈ [0,
//! expand_max]` is one variable shared by every scenario. Checked:
//!
//! - close-all: the least Σ cost·add with every scenario at its best reachable served
//!   value (that scenario's model with every purchase at its maximum);
//! - `--budget B --objective total`: the least total shortfall Σ (required − served) over
//!   the scenarios with Σ cost·add ≤ B;
//! - `--budget B --objective worst`: the largest worst served fraction of required.
//!
//! Tolerances: 1e-6 relative (the product aims 1e-8 of required below a best short of
//! required, and its proof tolerance is 1e-7).

mod common;

use common::{TempPath, redoubt};
use good_lp::{Expression, ProblemVariables, Solution, SolverModel, Variable, microlp, variable};
use rand::prelude::*;
use serde_json::{Value, json};

/// A test-side network: sites (processing, purchase cost and maximum), links, demands.
struct Net {
    processing: Vec<f64>,
    /// Per site: `(expand_cost, expand_max)` when it may buy processing.
    buy: Vec<Option<(f64, f64)>>,
    /// `(from, to, capacity)`, duplex.
    links: Vec<(usize, usize, f64)>,
    /// `(from, to, volume)`; required is the volume.
    demands: Vec<(usize, usize, f64)>,
}

impl Net {
    fn to_json(&self) -> String {
        let sites: Vec<Value> = (0..self.processing.len())
            .map(|v| {
                let mut s = json!({"id": format!("s{v}"), "processing": self.processing[v]});
                if let Some((c, m)) = self.buy[v] {
                    s["expand_cost"] = json!(c);
                    s["expand_max"] = json!(m);
                }
                s
            })
            .collect();
        let links: Vec<Value> = self
            .links
            .iter()
            .enumerate()
            .map(|(l, &(a, b, c))| {
                json!({"id": format!("l{l}"), "from": format!("s{a}"), "to": format!("s{b}"),
                       "capacity": c})
            })
            .collect();
        let demands: Vec<Value> = self
            .demands
            .iter()
            .map(|&(a, b, v)| json!({"from": format!("s{a}"), "to": format!("s{b}"), "volume": v}))
            .collect();
        json!({"name": "plan-reference", "sites": sites, "links": links, "demands": demands})
            .to_string()
    }

    fn required(&self) -> f64 {
        self.demands.iter().map(|d| d.2).sum()
    }
}

/// A random instance: 5 or 6 sites on a ring plus chords (7–9 links), processing at some
/// sites, purchases at others (costs 1–3, maxima 2–8), 3 or 4 demands; one decimal.
fn random_net(rng: &mut StdRng) -> Net {
    random_net_of(rng, 5..=6, 7..=9, 3..=4)
}

/// A seeded random network with `sites` sites, `links` duplex links (a ring, then random
/// chords) and `demands` demands; processing at even sites, purchases at about half.
fn random_net_of(
    rng: &mut StdRng,
    sites: std::ops::RangeInclusive<usize>,
    links: std::ops::RangeInclusive<usize>,
    demands: std::ops::RangeInclusive<usize>,
) -> Net {
    let n = rng.random_range(sites);
    let processing: Vec<f64> = (0..n)
        .map(|v| {
            if v % 2 == 0 {
                rng.random_range(10..=60) as f64 / 10.0
            } else {
                0.0
            }
        })
        .collect();
    let buy: Vec<Option<(f64, f64)>> = (0..n)
        .map(|_| {
            rng.random_bool(0.5).then(|| {
                (
                    rng.random_range(1..=3) as f64,
                    rng.random_range(20..=80) as f64 / 10.0,
                )
            })
        })
        .collect();
    let m = rng.random_range(links);
    let links = (0..m)
        .map(|l| {
            let (a, b) = if l < n {
                (l, (l + 1) % n)
            } else {
                let a = rng.random_range(0..n);
                (a, (a + 1 + rng.random_range(0..n - 1)) % n)
            };
            (a, b, rng.random_range(30..=120) as f64 / 10.0)
        })
        .collect();
    let k = rng.random_range(demands);
    let demands = (0..k)
        .map(|_| {
            let a = rng.random_range(0..n);
            let b = (a + 1 + rng.random_range(0..n - 1)) % n;
            (a, b, rng.random_range(20..=90) as f64 / 10.0)
        })
        .collect();
    Net {
        processing,
        buy,
        links,
        demands,
    }
}

/// One scenario's model added to `pv` (module comment), with the purchases `add` (a
/// variable or a fixed amount per site): its served total and its rows (each `(expr,
/// ≤ or = rhs)`, `true` for equality).
fn scenario_model(
    net: &Net,
    failed_link: Option<usize>,
    add: &[Option<Expression>],
    pv: &mut ProblemVariables,
    rows: &mut Vec<(Expression, bool, f64)>,
) -> Expression {
    let n = net.processing.len();
    let mut arcs: Vec<(usize, usize, f64)> = Vec::new();
    for (l, &(a, b, c)) in net.links.iter().enumerate() {
        if Some(l) != failed_link {
            arcs.push((a, b, c));
            arcs.push((b, a, c));
        }
    }
    let procs: Vec<usize> = (0..n)
        .filter(|&v| net.processing[v] > 0.0 || add[v].is_some())
        .collect();
    let mut arc_use: Vec<Expression> = vec![Expression::from(0.0); arcs.len()];
    let mut site_use: Vec<Expression> = vec![Expression::from(0.0); n];
    let mut served = Expression::from(0.0);
    for &(from, to, volume) in &net.demands {
        let f: Variable = pv.add(variable().min(0.0).max(volume));
        served += f;
        let mut layer0: Vec<Expression> = vec![Expression::from(0.0); n];
        let mut layer1: Vec<Expression> = vec![Expression::from(0.0); n];
        for (a, &(u, w, _)) in arcs.iter().enumerate() {
            let x0 = pv.add(variable().min(0.0));
            let x1 = pv.add(variable().min(0.0));
            layer0[u] += x0;
            layer0[w] -= x0;
            layer1[u] += x1;
            layer1[w] -= x1;
            arc_use[a] += x0;
            arc_use[a] += x1;
        }
        for &v in &procs {
            let p = pv.add(variable().min(0.0));
            layer0[v] += p;
            layer1[v] -= p;
            site_use[v] += p;
        }
        layer0[from] -= f;
        layer1[to] += f;
        for e in layer0.into_iter().chain(layer1) {
            rows.push((e, true, 0.0));
        }
    }
    for (a, e) in arc_use.into_iter().enumerate() {
        rows.push((e, false, arcs[a].2));
    }
    for &v in &procs {
        let mut e = site_use[v].clone();
        if let Some(x) = &add[v] {
            e -= x.clone();
        }
        rows.push((e, false, net.processing[v]));
    }
    served
}

/// Solves `max objective` (or min) over `pv` with `rows` by microlp; the objective value.
fn solve(
    pv: ProblemVariables,
    objective: Expression,
    maximise: bool,
    rows: Vec<(Expression, bool, f64)>,
) -> f64 {
    let mut model = if maximise {
        pv.maximise(objective.clone()).using(microlp)
    } else {
        pv.minimise(objective.clone()).using(microlp)
    };
    for (e, eq, rhs) in rows {
        model.add_constraint(if eq { e.eq(rhs) } else { e.leq(rhs) });
    }
    let sol = model.solve().expect("microlp solves the reference plan LP");
    sol.eval(&objective)
}

/// The best reachable served total of one scenario: every purchase at its maximum.
fn best(net: &Net, failed_link: Option<usize>) -> f64 {
    let mut pv = ProblemVariables::new();
    let mut rows = Vec::new();
    let add: Vec<Option<Expression>> = net
        .buy
        .iter()
        .map(|b| b.map(|(_, m)| Expression::from(m)))
        .collect();
    let served = scenario_model(net, failed_link, &add, &mut pv, &mut rows);
    solve(pv, served, true, rows)
}

/// What the reference plan LP optimises.
enum Goal {
    CloseAll,
    Total(f64),
    Worst(f64),
}

/// The reference plan LP's optimum over the scenarios `failed` (None: no failure): the
/// least cost (close-all), the least total shortfall, or the largest worst fraction.
fn reference(net: &Net, failed: &[Option<usize>], goal: &Goal) -> f64 {
    let mut pv = ProblemVariables::new();
    let add_vars: Vec<Option<Variable>> = net
        .buy
        .iter()
        .map(|b| b.map(|(_, m)| pv.add(variable().min(0.0).max(m))))
        .collect();
    let add: Vec<Option<Expression>> = add_vars.iter().map(|a| a.map(Expression::from)).collect();
    let mut cost = Expression::from(0.0);
    for (v, a) in add_vars.iter().enumerate() {
        if let (Some(a), Some((c, _))) = (a, net.buy[v]) {
            cost += c * *a;
        }
    }
    let required = net.required();
    let t = pv.add(variable().min(0.0).max(1.0));
    let mut rows = Vec::new();
    let mut total_served = Expression::from(0.0);
    for &f in failed {
        let served = scenario_model(net, f, &add, &mut pv, &mut rows);
        match goal {
            Goal::CloseAll => {
                // The product's aim: its best less 1e-8 of required when short of required.
                let b = best(net, f);
                let target = if b >= required {
                    required
                } else {
                    b - 1e-8 * required
                };
                rows.push((-served, false, -target));
            }
            Goal::Worst(_) => rows.push((required * t - served.clone(), false, 0.0)),
            Goal::Total(_) => total_served += served,
        }
    }
    match *goal {
        Goal::CloseAll => solve(pv, cost, false, rows),
        Goal::Total(b) => {
            rows.push((cost, false, b));
            required * failed.len() as f64 - solve(pv, total_served, true, rows)
        }
        Goal::Worst(b) => {
            rows.push((cost, false, b));
            solve(pv, Expression::from(t), true, rows)
        }
    }
}

/// `redoubt plan` on `net` with `--kinds links` and `extra` flags: its JSON report.
fn product(net: &Net, extra: &[&str]) -> Value {
    let file = TempPath::with_text("plan-reference", &net.to_json());
    let out = TempPath::new("plan-reference-out", "json");
    let mut args = vec![
        "plan",
        file.path(),
        "-q",
        "--kinds",
        "links",
        "--master",
        "walks",
        "--json",
        out.path(),
    ];
    args.extend_from_slice(extra);
    let run = redoubt(&args);
    assert!(run.code == 0 || run.code == 1, "{}", run.stderr);
    out.read_json()
}

fn near(got: f64, want: f64, scale: f64) -> bool {
    (got - want).abs() <= 1e-6 * scale.max(1.0)
}

/// The close-all plan of `net` over no failure and every single link failure (the
/// scenarios, returned), its JSON report and cost, checked against the reference's least
/// cost (returned too).
fn close_all_checked(case: usize, net: &Net) -> (Vec<Option<usize>>, Value, f64, f64) {
    let failed: Vec<Option<usize>> = std::iter::once(None)
        .chain((0..net.links.len()).map(Some))
        .collect();
    let doc = product(net, &[]);
    assert_eq!(doc["scenarios"].as_array().unwrap().len(), failed.len());
    let cost = doc["plan"]["cost"].as_f64().unwrap();
    let want = reference(net, &failed, &Goal::CloseAll);
    assert!(
        near(cost, want, want),
        "case {case}: close-all cost {cost} vs reference {want}\n{}",
        net.to_json()
    );
    (failed, doc, cost, want)
}

/// Source: the reference plan LP above, solved by microlp (a second formulation and a
/// second solver), on 8 seeded random networks.
#[test]
fn walk_plans_match_microlp_reference_plan_lp() {
    let mut rng = StdRng::seed_from_u64(0x91a7);
    let mut bought = 0;
    for case in 0..8 {
        let net = random_net(&mut rng);
        let (failed, _, cost, want) = close_all_checked(case, &net);
        let required = net.required();
        if cost > 0.0 {
            bought += 1;
        }

        let budget = (want / 2.0).max(1.0);
        let b = format!("{budget}");
        let doc = product(&net, &["--budget", &b, "--objective", "total"]);
        let total: f64 = doc["scenarios"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["shortfall_after"].as_f64().unwrap())
            .sum();
        let want_total = reference(&net, &failed, &Goal::Total(budget));
        assert!(
            near(total, want_total, required * failed.len() as f64),
            "case {case}: total shortfall {total} vs reference {want_total}\n{}",
            net.to_json()
        );

        let doc = product(&net, &["--budget", &b, "--objective", "worst"]);
        let worst = doc["worst_fraction_after"].as_f64().unwrap();
        let want_worst = reference(&net, &failed, &Goal::Worst(budget));
        assert!(
            near(worst, want_worst, 1.0),
            "case {case}: worst fraction {worst} vs reference {want_worst}\n{}",
            net.to_json()
        );
    }
    assert!(bought >= 4, "only {bought} of 8 plans bought anything");
}

/// Source: the reference plan LP above (microlp), on networks with more demands than
/// links fail under: 6 sites, 8 links, 7 or 8 demands, every single link failure, so
/// most demands of a scenario are untouched by its failure and a cheaper plan may need
/// them rerouted; the least cost and the least total shortfall must be the reference's,
/// which keeps every demand free in every scenario.
#[test]
fn plans_with_many_demands_match_microlp_reference_plan_lp() {
    let mut rng = StdRng::seed_from_u64(0x4e1d);
    let mut bought = 0;
    for case in 0..4 {
        let net = random_net_of(&mut rng, 6..=6, 8..=8, 7..=8);
        let (failed, _, cost, want) = close_all_checked(case, &net);
        if cost > 0.0 {
            bought += 1;
        }
        let budget = (want / 2.0).max(1.0);
        let b = format!("{budget}");
        let doc = product(&net, &["--budget", &b, "--objective", "total"]);
        let total: f64 = doc["scenarios"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["shortfall_after"].as_f64().unwrap())
            .sum();
        let want_total = reference(&net, &failed, &Goal::Total(budget));
        assert!(
            near(total, want_total, net.required() * failed.len() as f64),
            "case {case}: total shortfall {total} vs reference {want_total}\n{}",
            net.to_json()
        );
    }
    assert!(bought >= 2, "only {bought} of 4 plans bought anything");
}

/// Source: the reference plan LP above (microlp), on networks with many scenarios of
/// which few bind a plan: 8 to 9 sites, 14 to 16 links, 8 to 10 demands, every single
/// link failure. The product's master starts from a few scenarios and pulls in the ones
/// its plan leaves short (constraint generation); its cost must still be the reference's
/// optimum over every scenario, and in at least half of the cases the plan must help
/// scenarios its master never held (decided by the check of the purchase against every
/// scenario), so the generation path is what was compared.
#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
fn generated_scenarios_match_microlp_reference_plan_lp() {
    let mut rng = StdRng::seed_from_u64(0x5ce7);
    let (mut generated, mut bought) = (0, 0);
    for case in 0..6 {
        let net = random_net_of(&mut rng, 8..=9, 14..=16, 8..=10);
        let (_, doc, cost, _) = close_all_checked(case, &net);
        // Scenarios the plan helps; fewer in the master's last round means the others
        // were decided by the check of the purchase, outside the master.
        let helped = doc["scenarios"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|s| {
                let before = s["shortfall_before"].as_f64().unwrap();
                s["shortfall_after"].as_f64().unwrap() < before - 1e-6 * before.max(1.0)
            })
            .count();
        let rounds = doc["rounds"].as_array().unwrap();
        let in_master = rounds.last().unwrap()["active"].as_u64().unwrap() as usize;
        if in_master < helped {
            generated += 1;
        }
        if cost > 0.0 {
            bought += 1;
        }
    }
    assert!(bought >= 3, "only {bought} of 6 plans bought anything");
    assert!(
        generated >= 3,
        "only {generated} of 6 plans helped scenarios outside their master"
    );
}
