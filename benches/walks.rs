//! The walk engine against the cold edge LP on generated networks: a 12-site, 18-link,
//! 66-demand network (every single and double failure of links and sites) and a 50-site,
//! 88-link, 660-demand network shaped like `fixtures/grid-50.json` (every single failure, a
//! sampled subset of doubles). Prints per network and scenario set: scenarios, seconds per
//! scenario of each engine (one thread, so the figures are per core), LPs decided by each
//! shortcut, master LP solves, pricing rounds, fallbacks, peak memory (VmHWM), and the
//! number of scenarios where the two engines disagree (compared on every scenario the
//! edge LP was run on). Run with `cargo bench --bench walks` (a few minutes).
//!
//! Two more sets: C = `fixtures/grid-50.json` (every single failure) and D = network B with
//! its processing halved, so every scenario is processing-bound and goes to column
//! generation.
//!
//! Options (after `--`): `quick` runs smaller samples; `A`, `B`, `C`, `D` select networks
//! (default all).

mod common;

use std::time::Instant;

use common::{network, peak_mb};

use redoubt::model::Network;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::colgen::{self, Basis, Stats};
use redoubt::solve::{self, Evaluation};

/// Whether two evaluations agree on the optimum's values (relative 1e-6).
fn same(a: &Evaluation, b: &Evaluation) -> bool {
    let close = |x: f64, y: f64| (x - y).abs() <= 1e-6 * x.abs().max(y.abs()).max(1.0);
    close(a.served_required, b.served_required)
        && close(a.throughput, b.throughput)
        && close(a.shortfall, b.shortfall)
        && a.cut_off == b.cut_off
        && a.certified_gap() < 1e-6
}

struct Run {
    label: String,
    scenarios: Vec<Vec<Element>>,
    /// Run the edge LP on every `edge_every`-th scenario.
    edge_every: usize,
}

fn bench(net: &Network, runs: &[Run]) {
    let base_t = Instant::now();
    let base = colgen::evaluate_walks(net, &Outage::default(), None).expect("baseline");
    let base_s = base_t.elapsed().as_secs_f64();
    let t = Instant::now();
    let base_edge = solve::evaluate(net, &Outage::default()).expect("baseline");
    println!(
        "  baseline: walks {:.3} s ({} rounds, {} columns), edge {:.3} s, served {:.3} of {:.3}, agree {}",
        base_s,
        base.stats.rounds,
        base.stats.max_columns,
        t.elapsed().as_secs_f64(),
        base.evaluation.served_required,
        base.evaluation.surviving_required,
        same(&base.evaluation, &base_edge)
    );
    // Singles keep their basis, so doubles start from the single of their first element.
    let mut single_basis: Vec<(Element, Basis)> = Vec::new();
    for run in runs {
        let mut stats = Stats::default();
        let mut evals = Vec::with_capacity(run.scenarios.len());
        let t = Instant::now();
        for els in &run.scenarios {
            let o = Scenario::new(net, els).outage(net);
            let parent = if els.len() == 1 {
                &base.basis
            } else {
                single_basis
                    .iter()
                    .find(|(e, _)| *e == els[0])
                    .map_or(&base.basis, |(_, b)| b)
            };
            let w = colgen::evaluate_walks(net, &o, Some(parent)).expect("walks");
            stats.add(&w.stats);
            evals.push(w.evaluation);
            if els.len() == 1 {
                single_basis.push((els[0], w.basis));
            }
        }
        let walk_s = t.elapsed().as_secs_f64() / run.scenarios.len() as f64;
        let walk_mem = peak_mb();
        let (mut edge_n, mut differ) = (0usize, 0usize);
        let t = Instant::now();
        for (i, els) in run.scenarios.iter().enumerate().step_by(run.edge_every) {
            let o = Scenario::new(net, els).outage(net);
            let e = solve::evaluate(net, &o).expect("edge");
            edge_n += 1;
            differ += usize::from(!same(&evals[i], &e));
        }
        let edge_s = t.elapsed().as_secs_f64() / edge_n as f64;
        let lps = stats.no_flow + stats.repaired + stats.generated + stats.fallback;
        println!(
            "  {}: {} scenarios | s/scenario walks {:.4}, edge {:.4} ({} run), {:.1}x | LPs {}: \
             no-flow {}, repair {}, colgen {}, fallback {} | master solves {}, pricing rounds {} \
             | peak MB after walks {:.0}, after edge {:.0} | disagree {}",
            run.label,
            run.scenarios.len(),
            walk_s,
            edge_s,
            edge_n,
            edge_s / walk_s,
            lps,
            stats.no_flow,
            stats.repaired,
            stats.generated,
            stats.fallback,
            stats.lp_solves,
            stats.rounds,
            walk_mem,
            peak_mb(),
            differ
        );
    }
}

fn singles(net: &Network) -> Vec<Vec<Element>> {
    let mut v: Vec<Vec<Element>> = (0..net.links.len())
        .map(|l| vec![Element::Link(l.into())])
        .collect();
    v.extend((0..net.sites.len()).map(|s| vec![Element::Site(s.into())]));
    v
}

fn doubles(net: &Network, every: usize) -> Vec<Vec<Element>> {
    let pool: Vec<Element> = singles(net).into_iter().flatten().collect();
    let mut out = Vec::new();
    let mut k = 0usize;
    for i in 0..pool.len() {
        for j in i + 1..pool.len() {
            if k.is_multiple_of(every) {
                out.push(vec![pool[i], pool[j]]);
            }
            k += 1;
        }
    }
    out
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let quick = args.iter().any(|a| a == "quick");
    let chosen: Vec<&str> = ["A", "B", "C", "D"]
        .into_iter()
        .filter(|n| args.iter().any(|a| a == n))
        .collect();
    let want = |n: &str| chosen.is_empty() || chosen.contains(&n);
    if want("A") {
        network_a();
    }
    if want("B") {
        network_b(quick);
    }
    if want("C") {
        let text =
            std::fs::read_to_string("fixtures/grid-50.json").expect("run from the project root");
        let grid = Network::from_json(&text).expect("valid fixture");
        println!("network C: fixtures/grid-50.json, 50 sites, 88 links, 660 demands");
        let every = if quick { 20 } else { 6 };
        bench(
            &grid,
            &[Run {
                label: "C singles".into(),
                scenarios: singles(&grid),
                edge_every: every,
            }],
        );
    }
    if want("D") {
        let tight = network(
            50,
            50,
            88,
            660,
            &[(3, 80.0), (14, 60.0), (27, 75.0), (38, 55.0), (45, 45.0)],
        );
        println!("network D: network B with processing halved (processing-bound)");
        let every = if quick { 20 } else { 6 };
        bench(
            &tight,
            &[Run {
                label: "D singles".into(),
                scenarios: singles(&tight),
                edge_every: every,
            }],
        );
    }
}

fn network_a() {
    let small = network(12, 12, 18, 66, &[(2, 30.0), (6, 25.0), (9, 20.0)]);
    println!("network A: 12 sites, 18 links, 66 demands, 3 processing sites");
    bench(
        &small,
        &[
            Run {
                label: "A singles".into(),
                scenarios: singles(&small),
                edge_every: 1,
            },
            Run {
                label: "A doubles (all)".into(),
                scenarios: doubles(&small, 1),
                edge_every: 1,
            },
        ],
    );
}

fn network_b(quick: bool) {
    let big = network(
        50,
        50,
        88,
        660,
        &[
            (3, 160.0),
            (14, 120.0),
            (27, 150.0),
            (38, 110.0),
            (45, 90.0),
        ],
    );
    println!("network B: 50 sites, 88 links, 660 demands, 5 processing sites");
    let (single_edge, double_every, double_edge) = if quick { (10, 400, 4) } else { (3, 50, 4) };
    bench(
        &big,
        &[
            Run {
                label: "B singles".into(),
                scenarios: singles(&big),
                edge_every: single_edge,
            },
            Run {
                label: format!("B doubles (every {double_every}th)"),
                scenarios: doubles(&big, double_every),
                edge_every: double_edge,
            },
        ],
    );
}
