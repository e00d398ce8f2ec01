//! The layered walk engine of service chains against the layered edge LP, and against the
//! base walk engine on the same network with one processing step. `cargo bench --bench
//! chains [-- quick] [no-edge]` (`no-edge`: (b) left out).
//!
//! Network (deterministic, `benches/common`): network B of `benches/walks.rs` (50 sites, 88
//! links, 660 random demands) with three functions instead of processing: `fw` (gain 1) at
//! sites 3, 14, 27; `scrub` (gain 0.5) at 14, 38, 45; `cache` (gain 1.25) at 3, 27, 45.
//! Demands take the chains `fw > scrub`, `fw > scrub > cache` and `scrub > cache` in turn
//! (chains of 2 and 3 functions, 150 (origin, chain) groups). The single-function network
//! is network B itself (processing at sites 3, 14, 27, 38, 45).
//!
//! A second variant multiplies every function capacity by 3 (provisioned: the functions
//! rarely bind, as processing rarely does in network B); (b) is run on the first only.
//!
//! Scenario set: depth 1 (the baseline, every single link and every single site failure).
//! Prints seconds (wall, one thread, so per core) for
//! (a) the layered walk engine, every scenario started from the baseline's optimum as the
//!     audit does;
//! (b) the layered edge LP, on every `k`-th scenario (it is slow), with its seconds per
//!     scenario and the depth-1 total extrapolated from them;
//! (c) the base walk engine on the single-function network, every scenario;
//! the work counts of (a), and how many scenarios (a) and (b) disagree on (served_required,
//! throughput, cut-off list, relative 1e-6).

mod common;

use std::time::Instant;

use common::{Demands, document};
use redoubt::model::Network;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::colgen::{self, Stats};
use redoubt::solve::{Evaluation, chain, chainwalk};
use serde_json::json;

const PROCS: [(usize, f64); 5] = [
    (3, 160.0),
    (14, 120.0),
    (27, 150.0),
    (38, 110.0),
    (45, 90.0),
];

/// Network B as a document (single processing step).
fn base_doc() -> serde_json::Value {
    document(50, 50, 88, Demands::Random(660), &PROCS, 0)
}

/// Network B with the three functions and chains of the module comment; `scale`
/// multiplies every function capacity.
fn chain_doc(scale: f64) -> serde_json::Value {
    let mut doc = base_doc();
    doc["functions"] = json!([
        {"id": "fw", "gain": 1},
        {"id": "scrub", "gain": 0.5},
        {"id": "cache", "gain": 1.25}
    ]);
    let caps: [(usize, &str, f64); 9] = [
        (3, "fw", 220.0),
        (14, "fw", 180.0),
        (27, "fw", 200.0),
        (14, "scrub", 150.0),
        (38, "scrub", 140.0),
        (45, "scrub", 120.0),
        (3, "cache", 90.0),
        (27, "cache", 80.0),
        (45, "cache", 70.0),
    ];
    for (i, s) in doc["sites"]
        .as_array_mut()
        .expect("sites")
        .iter_mut()
        .enumerate()
    {
        let obj = s.as_object_mut().expect("site");
        obj.remove("processing");
        let f: serde_json::Map<String, serde_json::Value> = caps
            .iter()
            .filter(|c| c.0 == i)
            .map(|c| (c.1.to_string(), json!(c.2 * scale)))
            .collect();
        if !f.is_empty() {
            obj.insert("functions".into(), json!(f));
        }
    }
    let chains = [
        json!(["fw", "scrub"]),
        json!(["fw", "scrub", "cache"]),
        json!(["scrub", "cache"]),
    ];
    for (i, d) in doc["demands"]
        .as_array_mut()
        .expect("demands")
        .iter_mut()
        .enumerate()
    {
        d["chain"] = chains[i % 3].clone();
    }
    doc
}

fn singles(net: &Network) -> Vec<Vec<Element>> {
    let mut v: Vec<Vec<Element>> = (0..net.links.len())
        .map(|l| vec![Element::Link(l.into())])
        .collect();
    v.extend((0..net.sites.len()).map(|s| vec![Element::Site(s.into())]));
    v
}

fn same(a: &Evaluation, b: &Evaluation) -> bool {
    let close = |x: f64, y: f64| (x - y).abs() <= 1e-6 * x.abs().max(y.abs()).max(1.0);
    close(a.served_required, b.served_required)
        && close(a.throughput, b.throughput)
        && a.cut_off == b.cut_off
}

fn main() {
    let quick = std::env::args().any(|a| a == "quick");
    let skip_edge = std::env::args().any(|a| a == "no-edge");
    let every = if quick { 35 } else { 12 };
    let bnet = Network::from_json(&base_doc().to_string()).expect("valid base network");
    // (c) base walk engine, single function.
    let t = Instant::now();
    let bbase = colgen::evaluate_walks(&bnet, &Outage::default(), None).expect("baseline");
    let mut bstats = Stats::default();
    bstats.add(&bbase.stats);
    let scen = singles(&bnet);
    for els in &scen {
        let o = Scenario::new(&bnet, els).outage(&bnet);
        let w = colgen::evaluate_walks(&bnet, &o, Some(&bbase.basis)).expect("walks");
        bstats.add(&w.stats);
    }
    let c = t.elapsed().as_secs_f64();
    let total = scen.len() + 1;
    println!(
        "depth 1 = {total} scenarios (baseline + {} singles), one thread",
        scen.len()
    );
    println!(
        "(c) base walks, one processing step: {c:.2} s total, {:.4} s/scenario | baseline served \
         {:.3} of {:.3} | no-flow {}, repair {}, colgen {}, fallback {}",
        c / total as f64,
        bbase.evaluation.served_required,
        bbase.evaluation.surviving_required,
        bstats.no_flow,
        bstats.repaired,
        bstats.generated,
        bstats.fallback
    );
    for (label, scale, edge) in [
        ("congested", 1.0, true),
        ("provisioned (function capacities x3)", 3.0, false),
    ] {
        let cnet = Network::from_json(&chain_doc(scale).to_string()).expect("valid chain network");
        println!(
            "chains, {label}: 50 sites, 88 links, 660 demands, 3 functions, chains of 2-3 functions"
        );
        // (a) layered walk engine.
        let t = Instant::now();
        let base = chainwalk::evaluate_walks(&cnet, &Outage::default(), None).expect("baseline");
        let base_s = t.elapsed().as_secs_f64();
        let mut stats = base.stats;
        let mut walk_evals = vec![base.evaluation.clone()];
        for els in &scen {
            let o = Scenario::new(&cnet, els).outage(&cnet);
            let w = chainwalk::evaluate_walks(&cnet, &o, Some(&base.basis)).expect("walks");
            stats.add(&w.stats);
            walk_evals.push(w.evaluation);
        }
        let a = t.elapsed().as_secs_f64();
        let unproven = walk_evals
            .iter()
            .filter(|e| e.certified_gap() > 1e-6)
            .count();
        println!(
            "(a) layered walks: {a:.2} s total (baseline {base_s:.2} s), {:.4} s/scenario | LPs \
             no-flow {}, repair {}, colgen {}, fallback {} | master solves {}, pricing rounds {}, \
             max columns {} | unproven {unproven} | baseline served {:.3} of {:.3}",
            a / total as f64,
            stats.no_flow,
            stats.repaired,
            stats.generated,
            stats.fallback,
            stats.lp_solves,
            stats.rounds,
            stats.max_columns,
            base.evaluation.served_required,
            base.evaluation.surviving_required
        );
        println!("    (a)/(c) = {:.2} (target <= 3)", a / c);
        if !edge || skip_edge {
            continue;
        }
        // (b) layered edge LP on a sample.
        let t = Instant::now();
        let (mut n, mut differ) = (0usize, 0usize);
        let all: Vec<Vec<Element>> = std::iter::once(Vec::new()).chain(scen.clone()).collect();
        for (i, els) in all.iter().enumerate().step_by(every) {
            let o = if els.is_empty() {
                Outage::default()
            } else {
                Scenario::new(&cnet, els).outage(&cnet)
            };
            let e = chain::evaluate(&cnet, &o).expect("edge");
            n += 1;
            if !same(&walk_evals[i], &e) {
                differ += 1;
                println!(
                    "  disagree on {els:?}: walks {} / {}, edge {} / {}",
                    walk_evals[i].served_required,
                    walk_evals[i].throughput,
                    e.served_required,
                    e.throughput
                );
            }
        }
        let b_per = t.elapsed().as_secs_f64() / n as f64;
        let b = b_per * total as f64;
        println!(
            "(b) layered edge LP: {b_per:.3} s/scenario on {n} scenarios (every {every}th), depth \
             1 extrapolated {b:.1} s | disagree with (a): {differ}"
        );
        println!("    (b)/(a) = {:.1} (target >= 10)", b / a);
    }
}
