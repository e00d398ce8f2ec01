//! Numbers a planner can sign: results at wide magnitudes, the verifier, and the LP
//! backends on textbook problems, each checked against something outside the product:
//!
//! - petgraph's max-flow algorithm (`petgraph::algo::dinics`) where the served amount is a
//!   plain max flow (processing unlimited at the origin);
//! - a second formulation (per demand, not per source) written here from the input
//!   contract and solved by microlp, a simplex method, through good_lp directly — not
//!   through the product's LP layer;
//! - LP examples with optima worked by hand (shown in the comments) or known from a
//!   textbook (said where from memory), solved through the product's backend trait;
//! - a deliberately wrong backend, to show that the verifier catches what it returns.

use good_lp::{Expression, ProblemVariables, Solution, SolverModel, Variable, microlp, variable};
use petgraph::algo::dinics;
use petgraph::graph::{DiGraph, NodeIndex};
use rand::prelude::*;
use redoubt::model::Network;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::flow::Cap;
use redoubt::solve::lp::{self, Backend, Lp, LpSolution, Sense};
use redoubt::solve::{self, GAP_TOL, Surviving, evaluate};
use serde_json::json;

/// A small network in the contract's shape: processing per site `s0..`, links
/// `(from, to, capacity, one_way)`, demands `(from, to, volume, required)`.
struct T {
    processing: Vec<f64>,
    links: Vec<(usize, usize, f64, bool)>,
    demands: Vec<(usize, usize, f64, f64)>,
}

impl T {
    fn json(&self) -> String {
        let sites: Vec<_> = self
            .processing
            .iter()
            .enumerate()
            .map(|(v, p)| json!({"id": format!("s{v}"), "processing": p}))
            .collect();
        let links: Vec<_> = self
            .links
            .iter()
            .enumerate()
            .map(|(l, &(a, b, c, one))| {
                json!({"id": format!("l{l}"), "from": format!("s{a}"), "to": format!("s{b}"),
                       "capacity": c, "one_way": one})
            })
            .collect();
        let demands: Vec<_> = self
            .demands
            .iter()
            .map(|&(a, b, v, r)| {
                json!({"from": format!("s{a}"), "to": format!("s{b}"), "volume": v, "required": r})
            })
            .collect();
        json!({"sites": sites, "links": links, "demands": demands}).to_string()
    }

    fn network(&self) -> Network {
        Network::from_json(&self.json()).expect("valid test network")
    }

    /// The outage failing links `links` (by position), through the product's scenario path.
    fn outage(&self, net: &Network, links: &[usize]) -> Outage {
        if links.is_empty() {
            return Outage::default();
        }
        let el: Vec<Element> = links
            .iter()
            .map(|l| Element::Link(net.link(&format!("l{l}")).expect("link")))
            .collect();
        Scenario::new(net, &el).outage(net)
    }

    /// Reference served_required: the per-demand two-layer LP written from the contract
    /// (per demand d and arc a, unprocessed and processed flow; conversion at sites with
    /// processing), solved by microlp directly. Failed links carry nothing.
    fn reference(&self, failed: &[usize]) -> f64 {
        self.try_reference(failed).expect("reference LP solves")
    }

    /// [`T::reference`], `None` when microlp itself fails (it does on some files whose
    /// numbers span twenty orders of magnitude).
    fn try_reference(&self, failed: &[usize]) -> Option<f64> {
        let n = self.processing.len();
        let mut arcs = Vec::new();
        for (l, &(a, b, c, one)) in self.links.iter().enumerate() {
            if failed.contains(&l) || c <= 0.0 {
                continue;
            }
            arcs.push((a, b, c));
            if !one {
                arcs.push((b, a, c));
            }
        }
        let mut pv = ProblemVariables::new();
        let mut objective = Expression::default();
        let mut arc_use: Vec<Expression> = vec![Expression::default(); arcs.len()];
        let mut site_use: Vec<Expression> = vec![Expression::default(); n];
        let mut rows: Vec<(Expression, f64, bool)> = Vec::new();
        for &(o, t, _, r) in &self.demands {
            let f = pv.add(variable().min(0.0).max(r));
            objective += f;
            let x0: Vec<Variable> = arcs.iter().map(|_| pv.add(variable().min(0.0))).collect();
            let x1: Vec<Variable> = arcs.iter().map(|_| pv.add(variable().min(0.0))).collect();
            let p: Vec<Variable> = (0..n).map(|_| pv.add(variable().min(0.0))).collect();
            for v in 0..n {
                let mut c0 = Expression::default();
                let mut c1 = Expression::default();
                for (k, &(a, b, _)) in arcs.iter().enumerate() {
                    if a == v {
                        c0 += x0[k];
                        c1 -= x1[k];
                    }
                    if b == v {
                        c0 -= x0[k];
                        c1 += x1[k];
                    }
                }
                c0 += p[v];
                c1 += p[v];
                if v == o {
                    c0 -= f;
                }
                if v == t {
                    c1 -= f;
                }
                rows.push((c0, 0.0, true));
                rows.push((c1, 0.0, true));
                site_use[v] += p[v];
            }
            for k in 0..arcs.len() {
                arc_use[k] += x0[k];
                arc_use[k] += x1[k];
            }
        }
        let mut model = pv.maximise(objective.clone()).using(microlp);
        for (e, rhs, eq) in rows {
            model.add_constraint(if eq { e.eq(rhs) } else { e.leq(rhs) });
        }
        for (k, e) in arc_use.into_iter().enumerate() {
            model.add_constraint(e.leq(arcs[k].2));
        }
        for (v, e) in site_use.into_iter().enumerate() {
            model.add_constraint(e.leq(self.processing[v]));
        }
        let sol = model.solve().ok()?;
        Some(sol.eval(&objective))
    }
}

fn assert_rel(got: f64, want: f64, scale: f64, tol: f64, what: &str) {
    assert!(
        (got - want).abs() <= tol * scale.max(f64::MIN_POSITIVE),
        "{what}: got {got}, want {want} (tolerance {tol} of {scale})"
    );
}

/// A reproduced defect: sites a (processing 10), b, c, d; links ab 1e12, bc 1,
/// bd 1e12, dc 2 (full duplex); one demand a→c of 5. With processing at the origin the
/// served amount is min(5, max flow a→c), and the max flow is 1 + 2 = 3 (hand: the cut
/// {bc, dc}); petgraph's dinics must agree, for the baseline and every link failure.
#[test]
fn unlimited_links_written_as_1e12_do_not_hide_a_shortfall() {
    let t = T {
        processing: vec![10.0, 0.0, 0.0, 0.0],
        links: vec![
            (0, 1, 1e12, false),
            (1, 2, 1.0, false),
            (1, 3, 1e12, false),
            (3, 2, 2.0, false),
        ],
        demands: vec![(0, 2, 5.0, 5.0)],
    };
    let net = t.network();
    for failed in [vec![], vec![0], vec![1], vec![2], vec![3]] {
        let mut g: DiGraph<(), u64> = DiGraph::new();
        let nodes: Vec<NodeIndex> = (0..4).map(|_| g.add_node(())).collect();
        for (l, &(a, b, c, _)) in t.links.iter().enumerate() {
            if !failed.contains(&l) {
                g.add_edge(nodes[a], nodes[b], c as u64);
                g.add_edge(nodes[b], nodes[a], c as u64);
            }
        }
        let (flow, _) = dinics(&g, nodes[0], nodes[2]);
        let want = (flow as f64).min(5.0);
        let e = evaluate(&net, &t.outage(&net, &failed)).unwrap();
        assert_rel(e.served_required, want, 5.0, 1e-9, &format!("{failed:?}"));
        assert_rel(e.shortfall, 5.0 - want, 5.0, 1e-9, &format!("{failed:?}"));
        assert!(e.verification.proven, "{failed:?}: {:?}", e.verification);
        // The upper bound against petgraph's max flow (not against the product's own
        // served value): weak duality puts it at or above the optimum, and a met
        // certificate puts it on it.
        assert_rel(
            e.upper_bound,
            want,
            5.0,
            1e-7,
            &format!("{failed:?}: upper bound vs petgraph max flow"),
        );
    }
    let base = evaluate(&net, &Outage::default()).unwrap();
    assert_eq!(
        base.served_required, 3.0,
        "hand: the cut {{bc, dc}} carries 3"
    );
}

/// A capacity-0 link is allowed; the LP and the certificate read the same surviving
/// network, so the certificate does not price a free walk over it (the gap once reached
/// 1.0). Path s0→s1→s2 of capacity 4, a direct s0→s2 link of capacity 0, demand 6:
/// served 4 (hand), matching the microlp reference.
#[test]
fn zero_capacity_links_leave_no_certificate_gap() {
    let t = T {
        processing: vec![10.0, 0.0, 0.0],
        links: vec![(0, 1, 4.0, false), (1, 2, 4.0, false), (0, 2, 0.0, false)],
        demands: vec![(0, 2, 6.0, 6.0)],
    };
    let net = t.network();
    let e = evaluate(&net, &Outage::default()).unwrap();
    assert_rel(e.served_required, 4.0, 6.0, 1e-9, "served");
    assert_rel(e.served_required, t.reference(&[]), 6.0, 1e-9, "vs microlp");
    // The upper bound against the hand value 4 (the gap once reached 1.0 here).
    assert_rel(e.upper_bound, 4.0, 6.0, 1e-7, "upper bound vs hand");
    assert!(e.verification.proven);
}

/// log-uniform in [lo, hi].
fn log_uniform(rng: &mut StdRng, lo: f64, hi: f64) -> f64 {
    (lo.ln() + rng.random::<f64>() * (hi.ln() - lo.ln())).exp()
}

/// A random network with capacities, processing and volumes drawn log-uniformly from
/// `range`: 5–7 sites on a ring plus chords, 2–4 demands.
fn random_wide(rng: &mut StdRng, range: (f64, f64), vrange: (f64, f64)) -> T {
    let n = rng.random_range(5..=7);
    let mut links = Vec::new();
    for v in 0..n {
        links.push((v, (v + 1) % n, log_uniform(rng, range.0, range.1), false));
    }
    for _ in 0..rng.random_range(1..=3) {
        let a = rng.random_range(0..n);
        let b = (a + rng.random_range(2..n)) % n;
        if a != b {
            links.push((
                a,
                b,
                log_uniform(rng, range.0, range.1),
                rng.random_bool(0.3),
            ));
        }
    }
    let processing = (0..n)
        .map(|_| {
            if rng.random_bool(0.5) {
                log_uniform(rng, range.0, range.1)
            } else {
                0.0
            }
        })
        .collect();
    let demands = (0..rng.random_range(2..=4))
        .map(|_| {
            let a = rng.random_range(0..n);
            let b = (a + rng.random_range(1..n)) % n;
            let v = log_uniform(rng, vrange.0, vrange.1);
            (a, b, v, v * rng.random_range(0.5..=1.0))
        })
        .collect();
    T {
        processing,
        links,
        demands,
    }
}

/// Checks the product against the microlp reference on `t` with `failed` links: within
/// `tol` of the required total when proven; when unproven, the reference lies inside the
/// reported bounds and the reported value is the lower bound.
fn check_against_reference(t: &T, failed: &[usize], tol: f64, label: &str) -> bool {
    let want = t.reference(failed);
    check_against(t, failed, want, tol, label)
}

/// [`check_against_reference`] with the reference value `want` given.
fn check_against(t: &T, failed: &[usize], want: f64, tol: f64, label: &str) -> bool {
    let net = t.network();
    let e = evaluate(&net, &t.outage(&net, failed)).unwrap();
    let scale = e.surviving_required;
    let v = &e.verification;
    if v.proven {
        assert_rel(e.served_required, want, scale, tol, label);
    } else {
        assert!(
            v.lower <= want + tol * scale && want <= v.upper + tol * scale,
            "{label}: reference {want} outside the reported bounds {v:?}"
        );
        assert_eq!(e.served_required, v.lower.clamp(0.0, scale), "{label}");
    }
    v.proven
}

/// Source: the per-demand LP on microlp. Capacities and processing drawn across
/// 1e-3..1e12, volumes across 1e-3..1e6, with single link failures: the product agrees to
/// 1e-6 of the required demand on every case (or says "unproven" with bounds that
/// contain the reference).
#[test]
fn capacities_across_1e_minus3_to_1e12_agree_with_a_second_solver() {
    let mut rng = StdRng::seed_from_u64(20261202);
    let mut proven = 0;
    let mut cases = 0;
    for k in 0..40 {
        let t = random_wide(&mut rng, (1e-3, 1e12), (1e-3, 1e6));
        for failed in [vec![], vec![k % t.links.len()]] {
            cases += 1;
            if check_against_reference(&t, &failed, 1e-6, &format!("case {k} {failed:?}")) {
                proven += 1;
            }
        }
    }
    assert!(proven * 10 >= cases * 9, "only {proven} of {cases} proven");
}

/// Source: the per-demand LP on microlp. One file mixing capacities and volumes from 1e-6
/// to 1e15: a path with a bottleneck of 1e-6 for one demand and of 1e15 for another, and
/// a 1e15 demand next to a 1e-6 one, agree to 1e-6 relative.
#[test]
fn one_file_from_1e_minus6_to_1e15() {
    // s0 —1e15— s1 —3e14— s2 ; s0 —1e-6— s3 ; processing at s0 1e15, at s3 1e-6.
    let t = T {
        processing: vec![1e15, 0.0, 0.0, 1e-6],
        links: vec![
            (0, 1, 1e15, false),
            (1, 2, 3e14, false),
            (0, 3, 1e-6, false),
        ],
        demands: vec![(0, 2, 5e14, 5e14), (0, 3, 4e-6, 2e-6), (3, 0, 1e-6, 1e-6)],
    };
    let net = t.network();
    let e = evaluate(&net, &Outage::default()).unwrap();
    let want = t.reference(&[]);
    // Hand: 3e14 over s1–s2, plus s0→s3 limited by the 1e-6 link, plus s3→s0 (processed
    // at s0 or s3) over the reverse direction (1e-6) = 3e14 + 2e-6.
    assert_rel(want, 3e14 + 2e-6, 5e14, 1e-9, "reference vs hand");
    assert_rel(
        e.served_required,
        want,
        e.surviving_required,
        1e-6,
        "served",
    );
    assert!(e.verification.proven, "{:?}", e.verification);
    // Random files over the same range: compared wherever microlp itself solves them.
    let mut rng = StdRng::seed_from_u64(7);
    let mut compared = 0;
    for k in 0..30 {
        let t = random_wide(&mut rng, (1e-6, 1e15), (1e-6, 1e15));
        if let Some(want) = t.try_reference(&[]) {
            check_against(&t, &[], want, 1e-6, &format!("mixed {k}"));
            compared += 1;
        }
    }
    assert!(compared >= 15, "the reference solved only {compared} of 30");
}

/// Solves `lp` with every backend of the ladder and returns their solutions.
fn all_backends(lp: &Lp) -> Vec<(&'static str, LpSolution)> {
    solve::ladder()
        .iter()
        .map(|b| (b.name(), b.solve(lp).expect("textbook LP solves")))
        .collect()
}

/// The "Wyndor Glass" product-mix LP of Hillier and Lieberman's *Introduction to
/// Operations Research* (values from memory): max 3x₁ + 5x₂ s.t. x₁ ≤ 4, 2x₂ ≤ 12,
/// 3x₁ + 2x₂ ≤ 18. Optimum x = (2, 6), Z = 36, shadow prices (0, 1.5, 1) — also checked by
/// hand: the binding rows 2x₂ = 12 and 3x₁ + 2x₂ = 18 give x₂ = 6, x₁ = 2, and
/// y₂·2 + y₃·2 = 5, y₃·3 = 3 give y₃ = 1, y₂ = 1.5.
#[test]
fn textbook_product_mix_through_every_backend() {
    let mut lp = Lp::new(true);
    let x1 = lp.add_var(0.0, f64::INFINITY, 3.0);
    let x2 = lp.add_var(0.0, f64::INFINITY, 5.0);
    let r1 = lp.add_row(vec![(x1, 1.0)], Sense::Le, 4.0);
    let r2 = lp.add_row(vec![(x2, 2.0)], Sense::Le, 12.0);
    let r3 = lp.add_row(vec![(x1, 3.0), (x2, 2.0)], Sense::Le, 18.0);
    for (name, s) in all_backends(&lp) {
        assert_rel(s.objective, 36.0, 36.0, 1e-7, name);
        assert_rel(s.x[x1], 2.0, 2.0, 1e-7, name);
        assert_rel(s.x[x2], 6.0, 6.0, 1e-7, name);
        assert_rel(s.duals[r1], 0.0, 1.0, 1e-7, name);
        assert_rel(s.duals[r2], 1.5, 1.5, 1e-7, name);
        assert_rel(s.duals[r3], 1.0, 1.0, 1e-7, name);
        assert_rel(lp.dual_objective(&s), 36.0, 36.0, 1e-7, name);
    }
}

/// A balanced transportation problem worked by hand here (no published source): supplies
/// 20 and 30, demands 10, 25 and 15, unit costs [[8, 6, 10], [9, 12, 13]]. The
/// north-west-corner-free start S1→D2 20, S2→D1 10, S2→D2 5, S2→D3 15 costs
/// 120 + 90 + 60 + 195 = 465; MODI check with u₂ = 0: v = (9, 12, 13), u₁ = −6, reduced
/// costs of the empty cells (1,1) = 8 − 3 = 5 and (1,3) = 10 − 7 = 3 are ≥ 0, so 465 is
/// optimal. The same problem at 1e9 times the quantities (bit/s instead of Gbit/s) costs
/// 465e9.
#[test]
fn hand_worked_transportation_problem_through_every_backend() {
    for unit in [1.0, 1e9, 1e-6] {
        let supply = [20.0 * unit, 30.0 * unit];
        let demand = [10.0 * unit, 25.0 * unit, 15.0 * unit];
        let cost = [[8.0, 6.0, 10.0], [9.0, 12.0, 13.0]];
        let mut lp = Lp::new(false);
        let mut x = [[0usize; 3]; 2];
        for i in 0..2 {
            for j in 0..3 {
                x[i][j] = lp.add_var(0.0, f64::INFINITY, cost[i][j]);
            }
        }
        for i in 0..2 {
            lp.add_row(
                (0..3).map(|j| (x[i][j], 1.0)).collect(),
                Sense::Le,
                supply[i],
            );
        }
        for j in 0..3 {
            lp.add_row(
                (0..2).map(|i| (x[i][j], 1.0)).collect(),
                Sense::Ge,
                demand[j],
            );
        }
        for (name, s) in all_backends(&lp) {
            assert_rel(s.objective, 465.0 * unit, 465.0 * unit, 1e-7, name);
            assert_rel(
                lp.dual_objective(&s),
                465.0 * unit,
                465.0 * unit,
                1e-6,
                name,
            );
        }
    }
}

/// A backend that returns the default backend's answer with every flow doubled and the
/// prices halved: infeasible and not optimal, so nothing it says may be reported as
/// proven.
struct Lying;

impl Backend for Lying {
    fn name(&self) -> &'static str {
        "lying"
    }
    fn solve(&self, lp: &Lp) -> redoubt::error::Result<LpSolution> {
        let mut s = lp::CLARABEL.solve(lp)?;
        for x in &mut s.x {
            *x *= 2.0;
        }
        for y in &mut s.duals {
            *y *= 0.5;
        }
        s.objective *= 2.0;
        Ok(s)
    }
}

/// Source: the per-demand microlp reference. With only the lying backend the result is
/// reported unproven, with a lower bound (a repaired feasible allocation) at or below the
/// optimum and an upper bound (the dual bound of its prices) at or above it; with the
/// lying backend first and the real ones after it, the next backend proves the optimum.
#[test]
fn a_wrong_backend_answer_is_caught() {
    let t = T {
        processing: vec![3.0, 0.0, 2.0, 0.0],
        links: vec![
            (0, 1, 4.0, false),
            (1, 2, 3.0, false),
            (2, 3, 5.0, false),
            (0, 3, 1.0, false),
        ],
        demands: vec![(0, 3, 6.0, 6.0), (1, 3, 2.0, 2.0)],
    };
    let net = t.network();
    let want = t.reference(&[]);
    let view = Surviving::new(&net, &Outage::default(), None);
    let lying = solve::solve_verified_with(&net, &view, Cap::Required, &[&Lying]).unwrap();
    let v = &lying.verification;
    assert!(!v.proven, "{v:?}");
    assert!(
        v.lower <= want + 1e-9,
        "lower {} above optimum {want}",
        v.lower
    );
    assert!(
        v.upper >= want - 1e-9,
        "upper {} below optimum {want}",
        v.upper
    );
    let ladder: [&dyn Backend; 2] = [&Lying, &lp::CLARABEL];
    let fixed = solve::solve_verified_with(&net, &view, Cap::Required, &ladder).unwrap();
    assert!(fixed.verification.proven, "{:?}", fixed.verification);
    assert_eq!(fixed.verification.attempts, 2);
    assert_rel(fixed.verification.lower, want, 8.0, GAP_TOL, "proven value");
}
