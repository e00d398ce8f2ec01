//! `audit --headroom` cost: the depth-1 audit alone beside the audit plus its headroom, on
//! generated networks (deterministic, `common::document`):
//! - `B`: 50 sites, 88 links, 662 demands, 4 shared-risk groups (the network `B` of
//!   `benches/peer.rs`); links, sites and groups fail.
//! - `G200`: 200 sites, 395 links, 3,903 demands, 20 processing sites (the network of
//!   `benches/scale.rs`); links fail.
//! - `C30` (service chains): 30 sites, 50 links, 60 demands; functions `fw` (gain 1) at
//!   sites 2, 11, 20, `scrub` (gain 0.5) at 7, 16, 25, `cache` (gain 1.25) at 4, 13, 27;
//!   demands take the chains `fw`, `fw > scrub`, `fw > scrub > cache`, `scrub > cache` and
//!   the empty chain (plain traffic) in turn; links and sites fail.
//! - `BC` (service chains): network `B` without groups and with the functions and chains of
//!   `benches/chains.rs` (`fw`, `scrub`, `cache` at three sites each; chains of 2 and 3
//!   functions); links and sites fail.
//!
//! Per network: the audit (`audit::run_with` on the walk engine, as `redoubt audit` runs it;
//! two threads), then `headroom::of_audit` on it
//! (walk engine from the baseline's columns, two threads), then one sequential pass over
//! the outages that counts how each headroom was found (inherited from the baseline's
//! columns, column generation, fallback to the edge λ-LP), and the edge λ-LP alone on the
//! first few outages for comparison. Wall times depend on the machine's load.
//!
//! On the chain networks the headroom is the layered walk engine's
//! (`chainwalk::headroom::headroom_walks`, every outage from the baseline's optimum) and
//! the counts come from it; the edge comparison is the layered λ-LP.
//!
//! Run: `cargo bench --bench headroom` (all), or name networks: `-- B G200 C30 BC grid-50`
//! (the fixture `fixtures/grid-50.json`, only when named); `-- quick`
//! keeps the first 24 scenarios of each network (baseline, then links in file order) and
//! skips the edge λ-LP comparison.

mod common;

use std::time::Instant;

use common::{Demands, document};
use redoubt::audit::{self, RunOptions};
use redoubt::headroom;
use redoubt::model::Network;
use redoubt::scenario::{self, Kinds};
use redoubt::solve::Engine;
use redoubt::solve::Surviving;
use redoubt::solve::chainwalk::headroom as chain_headroom;
use redoubt::solve::concurrent;
use serde_json::{Value, json};

const TWO: RunOptions = RunOptions {
    threads: Some(2),
    progress: false,
};

fn case(name: &str, net: &Network, kinds: Kinds, quick: bool) {
    let mut scenarios = scenario::enumerate(net, kinds, 1);
    if quick {
        scenarios.truncate(24);
    }
    let t = Instant::now();
    let a = audit::run_with(net, scenarios, TWO, Engine::Walks).expect("audit solves");
    let audit_s = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let h = headroom::of_audit(net, &a, None, TWO).expect("headroom solves");
    let head_s = t.elapsed().as_secs_f64();
    let unproven = h.per_outage.iter().filter(|x| !x.proven).count();
    println!(
        "{name}: {} scenarios, {} outages | audit {audit_s:.2} s | audit + headroom {:.2} s \
         (headroom {head_s:.2} s, ratio {:.2}) | least λ {:?} | unproven {unproven}",
        a.scenarios.len(),
        a.outages.len(),
        audit_s + head_s,
        (audit_s + head_s) / audit_s,
        h.least.value,
    );
    if net.chains.is_some() {
        chain_counts(net, &a, quick);
        return;
    }
    // How each was found (one thread, sequential).
    let base_view = Surviving::new(net, &redoubt::scenario::Outage::default(), None);
    let (_, cols, _) = concurrent::headroom_walks(net, &base_view, None).expect("baseline");
    let (mut inherited, mut repaired, mut generated, mut fallback, mut trivial, mut rounds) =
        (0, 0, 0, 0, 0, 0);
    let (mut solves, mut gen_s, mut bundled, mut freed, mut lowered) = (0, 0.0, 0, 0, 0);
    let t = Instant::now();
    for o in &a.outages {
        let view = Surviving::new(net, o, None);
        let t1 = Instant::now();
        let (_, _, w) = concurrent::headroom_walks(net, &view, cols.as_ref()).expect("solves");
        let s1 = t1.elapsed().as_secs_f64();
        rounds += w.walks.rounds;
        solves += w.walks.lp_solves;
        bundled += usize::from(w.walks.bundled > 0 && w.walks.lp_solves > 0);
        freed += w.walks.freed;
        if w.trivial {
            trivial += 1;
        } else if w.fallback {
            fallback += 1;
        } else if w.walks.inherited {
            inherited += 1;
        } else if w.walks.repaired {
            repaired += 1;
        } else if w.walks.lowered {
            lowered += 1;
        } else {
            generated += 1;
            gen_s += s1;
        }
    }
    println!(
        "  one thread: {:.2} s | inherited {inherited}, repaired {repaired}, \
         lowered {lowered}, column generation {generated} \
         ({gen_s:.2} s; {rounds} pricing rounds, {solves} master solves in all; {bundled} with a bundle, \
         {freed} rebuilds freeing bundled demands), edge λ-LP fallback {fallback}, \
         no LP {trivial}",
        t.elapsed().as_secs_f64()
    );
    if quick {
        return;
    }
    let k = a.outages.len().min(5);
    let t = Instant::now();
    for o in &a.outages[..k] {
        concurrent::headroom_lp(net, &Surviving::new(net, o, None)).expect("λ-LP solves");
    }
    println!(
        "  edge λ-LP alone: {:.3} s per outage (first {k}, one thread)",
        t.elapsed().as_secs_f64() / k as f64
    );
}

/// How each chain headroom was found (one thread, sequential), and the layered λ-LP alone
/// on the first few outages.
fn chain_counts(net: &Network, a: &audit::Audit, quick: bool) {
    let base_view = Surviving::new(net, &redoubt::scenario::Outage::default(), None);
    let t = Instant::now();
    let (_, cols, _) = chain_headroom::headroom_walks(net, &base_view, None).expect("baseline");
    let base_s = t.elapsed().as_secs_f64();
    let (mut inherited, mut repaired, mut lowered, mut generated) = (0, 0, 0, 0);
    let (mut gen_s, mut start_s) = (0.0, 0.0);
    let (mut fallback, mut trivial, mut rounds, mut solves, mut bundled, mut freed) =
        (0, 0, 0, 0, 0, 0);
    let t = Instant::now();
    for o in &a.outages {
        let view = Surviving::new(net, o, None);
        let t1 = Instant::now();
        let (_, _, w) = chain_headroom::headroom_walks(net, &view, cols.as_ref()).expect("solves");
        let s1 = t1.elapsed().as_secs_f64();
        rounds += w.walks.rounds;
        solves += w.walks.lp_solves;
        bundled += usize::from(w.walks.bundled > 0 && w.walks.lp_solves > 0);
        freed += w.walks.freed;
        if w.trivial {
            trivial += 1;
        } else if w.fallback {
            fallback += 1;
        } else if w.walks.inherited {
            inherited += 1;
            start_s += s1;
        } else if w.walks.repaired {
            repaired += 1;
            start_s += s1;
        } else if w.walks.lowered {
            lowered += 1;
            start_s += s1;
        } else {
            generated += 1;
            gen_s += s1;
        }
    }
    println!(
        "  one thread: {:.2} s (cold baseline {base_s:.3} s, decided without a master \
         {start_s:.3} s) | inherited {inherited}, repaired {repaired}, lowered {lowered}, \
         column generation {generated} ({gen_s:.3} s; {rounds} pricing rounds, \
         {solves} master solves in all; {bundled} with a bundle, {freed} rebuilds freeing \
         bundled demands), layered λ-LP fallback {fallback}, no LP {trivial}",
        t.elapsed().as_secs_f64()
    );
    if quick {
        return;
    }
    let k = a.outages.len().min(5);
    let t = Instant::now();
    for o in &a.outages[..k] {
        let view = Surviving::new(net, o, None);
        chain_headroom::headroom_with(net, &view, redoubt::solve::ladder()).expect("λ-LP");
    }
    println!(
        "  layered λ-LP alone: {:.3} s per outage (first {k}, one thread)",
        t.elapsed().as_secs_f64() / k as f64
    );
}

/// `doc` with its processing replaced by `functions` (`fw` gain 1, `scrub` gain 0.5,
/// `cache` gain 1.25) at the (site, function, capacity) triples `caps`, and demand `i`
/// taking `chains[i % chains.len()]`.
fn with_chains(mut doc: Value, caps: &[(usize, &str, f64)], chains: &[Value]) -> Network {
    doc["functions"] = json!([
        {"id": "fw", "gain": 1},
        {"id": "scrub", "gain": 0.5},
        {"id": "cache", "gain": 1.25}
    ]);
    for (i, s) in doc["sites"]
        .as_array_mut()
        .expect("sites")
        .iter_mut()
        .enumerate()
    {
        let obj = s.as_object_mut().expect("site");
        obj.remove("processing");
        let f: serde_json::Map<String, Value> = caps
            .iter()
            .filter(|c| c.0 == i)
            .map(|c| (c.1.to_string(), json!(c.2)))
            .collect();
        if !f.is_empty() {
            obj.insert("functions".into(), json!(f));
        }
    }
    for (i, d) in doc["demands"]
        .as_array_mut()
        .expect("demands")
        .iter_mut()
        .enumerate()
    {
        d["chain"] = chains[i % chains.len()].clone();
    }
    Network::from_json(&doc.to_string()).expect("valid")
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with('-'))
        .collect();
    let quick = args.iter().any(|a| a == "quick");
    let named = args.iter().any(|a| a != "quick");
    let want = |n: &str| !named || args.iter().any(|a| a == n);
    if want("B") {
        let doc = document(
            50,
            50,
            88,
            Demands::Random(662),
            &[
                (3, 160.0),
                (14, 120.0),
                (27, 150.0),
                (38, 110.0),
                (45, 90.0),
            ],
            4,
        );
        let net = Network::from_json(&doc.to_string()).expect("valid");
        let kinds = Kinds {
            links: true,
            sites: true,
            groups: true,
        };
        case("B", &net, kinds, quick);
    }
    // The fixture, only when named (`-- grid-50`): what `redoubt audit fixtures/grid-50.json
    // --depth 1 --headroom` solves.
    if args.iter().any(|a| a == "grid-50") {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures/grid-50.json");
        let text = std::fs::read_to_string(path).expect("fixture");
        let net = Network::from_json(&text).expect("valid");
        let kinds = Kinds {
            links: true,
            sites: true,
            groups: true,
        };
        case("grid-50", &net, kinds, quick);
    }
    let both = Kinds {
        links: true,
        sites: true,
        groups: false,
    };
    if want("C30") {
        let doc = document(30, 30, 50, Demands::Random(60), &[], 0);
        let caps = [
            (2, "fw", 25.0),
            (11, "fw", 20.0),
            (20, "fw", 22.0),
            (7, "scrub", 18.0),
            (16, "scrub", 15.0),
            (25, "scrub", 16.0),
            (4, "cache", 9.0),
            (13, "cache", 8.0),
            (27, "cache", 10.0),
        ];
        let chains = [
            json!(["fw"]),
            json!(["fw", "scrub"]),
            json!(["fw", "scrub", "cache"]),
            json!(["scrub", "cache"]),
            json!([]),
        ];
        case("C30", &with_chains(doc, &caps, &chains), both, quick);
    }
    if want("BC") {
        let procs = [
            (3, 160.0),
            (14, 120.0),
            (27, 150.0),
            (38, 110.0),
            (45, 90.0),
        ];
        let doc = document(50, 50, 88, Demands::Random(660), &procs, 0);
        let caps = [
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
        let chains = [
            json!(["fw", "scrub"]),
            json!(["fw", "scrub", "cache"]),
            json!(["scrub", "cache"]),
        ];
        case("BC", &with_chains(doc, &caps, &chains), both, quick);
    }
    if want("G200") {
        let procs: Vec<(usize, f64)> = (0..200).step_by(10).map(|i| (i, 200.0)).collect();
        let net = common::generate(200, 200, 395, Demands::Random(3903), &procs);
        let kinds = Kinds {
            links: true,
            sites: false,
            groups: false,
        };
        case("G200", &net, kinds, quick);
    }
}
