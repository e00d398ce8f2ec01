//! `redoubt worst` at scale: the 10 worst sets, exact, on generated networks (the benches'
//! generator, `common::document`, with shared-risk groups of two links):
//!
//! - `k2`: 50 sites, 88 links, 660 demands, 4 groups, every kind, K = 2 (target < 1 min);
//! - `k3`: the same network, links only, K = 3 (target < 10 min on 2 cores);
//! - `k4`: 25 sites, 44 links, 150 demands, links only, K = 4 (target < 10 min).
//!
//! Prints per run: wall time, threads, sets in all, sets solved, distinct outages solved,
//! bounded and pruned sets, the bound beside the 10th worst's value, the walk engine's
//! shortcut counts, peak memory (VmHWM), and the worst set. Run with
//! `cargo bench --bench worst` (release); `-- k2`, `-- k3`, `-- k4` choose runs (default
//! all), `-- threads=N` sets the worker threads.

mod common;

use std::time::Instant;

use common::{Demands, document, peak_mb};

use redoubt::model::Network;
use redoubt::scenario::Kinds;
use redoubt::worst::{self, By, Options};

fn net(seed: u64, sites: usize, links: usize, demands: usize, procs: &[(usize, f64)]) -> Network {
    let doc = document(seed, sites, links, Demands::Random(demands), procs, 4);
    Network::from_json(&doc.to_string()).expect("generated network is valid")
}

fn run(label: &str, net: &Network, k: usize, kinds: Kinds, threads: Option<usize>) {
    let opts = Options {
        k,
        kinds,
        top: 10,
        by: By::Shortfall,
        threads,
    };
    let t = Instant::now();
    let w = worst::search(net, opts).expect("search");
    let secs = t.elapsed().as_secs_f64();
    let p = &w.proof;
    let s = p.stats;
    println!(
        "{label}: {secs:.1} s | sets {} (pool {}), solved {} ({} outages), bounded {}, pruned {} \
         | bound {:?} vs 10th worst {} | walk engine: no-flow {}, repair {}, colgen {}, fallback {} \
         | unproven {} | peak MB {:.0}",
        p.sets_total,
        p.pool,
        p.sets_solved,
        p.outages_solved,
        p.sets_bounded,
        p.sets_pruned,
        p.bound,
        p.threshold,
        s.no_flow,
        s.repaired,
        s.generated,
        s.fallback,
        p.unproven,
        peak_mb()
    );
    if let Some(first) = w.sets.first() {
        println!(
            "  worst: {} shortfall {} ({} listed)",
            first.failed.join(" + "),
            first.shortfall,
            w.sets.len()
        );
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let chosen: Vec<&str> = ["k2", "k3", "k4"]
        .into_iter()
        .filter(|n| args.iter().any(|a| a == n))
        .collect();
    let want = |n: &str| chosen.is_empty() || chosen.contains(&n);
    let threads = args
        .iter()
        .find_map(|a| a.strip_prefix("threads=").and_then(|t| t.parse().ok()));
    println!(
        "threads: {}",
        threads.map_or("rayon default (one per core)".to_string(), |t: usize| t
            .to_string())
    );
    let big = net(
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
    let links = Kinds {
        links: true,
        sites: false,
        groups: false,
    };
    if want("k2") {
        run(
            "50 sites, 88 links, 4 groups, every kind, k=2",
            &big,
            2,
            Kinds::ALL,
            threads,
        );
    }
    if want("k3") {
        run(
            "50 sites, 88 links, links only, k=3",
            &big,
            3,
            links,
            threads,
        );
    }
    if want("k4") {
        let small = net(25, 25, 44, 150, &[(2, 90.0), (11, 70.0), (19, 80.0)]);
        run(
            "25 sites, 44 links, links only, k=4",
            &small,
            4,
            links,
            threads,
        );
    }
}
