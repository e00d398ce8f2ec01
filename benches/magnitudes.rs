//! Wide magnitudes: the same audit on one network at ordinary magnitudes and with its
//! capacities and volumes spread over twelve orders of magnitude, timed side by side.
//!
//! Network (deterministic, `common::document`): 11 sites, 18 links, 40 random demands,
//! processing 12 at sites 0, 4 and 8. The wide copy multiplies link `k`'s capacity by
//! `10^e` with `e` cycling through −3, 0, 3, 6, 9 (so capacities run from 0.04 to 1.5e11),
//! demand `k`'s volume and required by `10^e` with `e` cycling through −3, 0, 3, 6, and
//! the processing by 1e6: the same topology, with answers of very different sizes in one
//! file. Audit: every single and double failure of links and sites, the walk engine,
//! through the audit's own batch (baseline, then every outage from its parent, two
//! threads). `cargo bench --bench magnitudes [-- REPEATS]` (default 3; the least time of
//! the repeats is printed for each copy, to damp the load of a shared machine).
//!
//! Prints per copy: outages, seconds, outages not proven (must be 0), LPs decided by
//! repair / column generation / fallback, and the ratio wide / ordinary.

mod common;

use common::{Demands, document};
use redoubt::model::Network;
use redoubt::scenario::Kinds;
use redoubt::solve::Engine;
use serde_json::Value;

const LINKS_AND_SITES: Kinds = Kinds {
    links: true,
    sites: true,
    groups: false,
};

/// The wide copy of `doc` (see the module documentation).
fn widen(mut doc: Value) -> Value {
    let link_exp = [-3, 0, 3, 6, 9];
    for (k, l) in doc["links"].as_array_mut().unwrap().iter_mut().enumerate() {
        let c = l["capacity"].as_f64().unwrap();
        l["capacity"] = (c * 10f64.powi(link_exp[k % link_exp.len()])).into();
    }
    let demand_exp = [-3, 0, 3, 6];
    for (k, d) in doc["demands"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .enumerate()
    {
        let f = 10f64.powi(demand_exp[k % demand_exp.len()]);
        for key in ["volume", "required"] {
            let v = d[key].as_f64().unwrap();
            d[key] = (v * f).into();
        }
    }
    for s in doc["sites"].as_array_mut().unwrap() {
        let p = s["processing"].as_f64().unwrap();
        s["processing"] = (p * 1e6).into();
    }
    doc
}

/// One depth-2 audit through the batch: (seconds, outages, unproven, repair, colgen,
/// fallback).
fn audit(net: &Network) -> (f64, usize, usize, usize, usize, usize) {
    let (audit, _, secs) = common::batch_audit(net, LINKS_AND_SITES, 2, Engine::Walks);
    let unproven = audit
        .evaluations
        .iter()
        .filter(|e| !e.verification.proven)
        .count();
    let st = audit.stats;
    (
        secs,
        audit.evaluations.len(),
        unproven,
        st.repaired,
        st.generated,
        st.fallback,
    )
}

fn main() {
    let repeats: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(3)
        .max(1);
    let base = document(
        5,
        11,
        18,
        Demands::Random(40),
        &[(0, 12.0), (4, 12.0), (8, 12.0)],
        0,
    );
    let copies = [("ordinary", base.clone()), ("wide", widen(base))];
    let mut best = Vec::new();
    for (name, doc) in copies {
        let net = Network::from_json(&doc.to_string()).expect("generated network is valid");
        let runs: Vec<_> = (0..repeats).map(|_| audit(&net)).collect();
        let r = runs
            .iter()
            .copied()
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .expect("one run");
        println!(
            "{name:>8}: {} outages, {:.2} s (least of {repeats}), unproven {}, LPs by repair {} \
             / column generation {} / fallback {}",
            r.1, r.0, r.2, r.3, r.4, r.5
        );
        best.push(r.0);
    }
    println!("wide / ordinary = {:.2} (target <= 2)", best[1] / best[0]);
}
