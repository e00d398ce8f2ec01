//! The approximate engine at scale: a generated network of 1,000 sites, about 2,000 links
//! and 20,000 demands from 100 sources (so one shortest-path tree per source serves 200
//! demands), the depth-1 audit of every link at ε = 0.01.
//!
//! Prints the baseline's time, then for a deterministic sample of link failures (every
//! `k`-th link; `cargo bench --bench approx -- K`, default 100) the time of each (from the
//! baseline's answer, as the audit starts every single failure), whether the parent's
//! walks and prices decided it, the interval and its width relative to required, the mean,
//! the estimate of the whole depth-1 audit on two threads (mean × links / 2) and the peak
//! memory (VmHWM). `-- K congested` lowers the processing below the required total, so
//! every scenario is short (there the cut of the full sites proves the optimum at once);
//! `-- K tight` gives the links a tenth of their capacity, so links bind beside the
//! processing and the phases must do the work (the hard case). `-- full` then runs the whole depth-1 audit of
//! every link through the audit's own batch (baseline, then every link failure from it,
//! two threads, thin evaluations) and prints its wall time, the widest interval, how many
//! intervals are exact and how many are wider than ε (must be 0), and the peak memory.
//! `-- [congested|tight] write PATH` only writes the network file, for the binary.

mod common;

use std::time::Instant;

use common::{Rng, peak_mb};
use redoubt::model::Network;
use redoubt::scenario::{Element, Kinds, Scenario};
use redoubt::solve::{Engine, approx};
use serde_json::json;

/// A ring plus random chords up to `links`, capacities 400..1,500 times `link_scale`;
/// processing `proc` at
/// every 20th site; `sources` origins each with `per_source` random destinations, volume
/// 0.2..1.6 (a third requiring 80 %).
fn network(
    seed: u64,
    sites: usize,
    links: usize,
    sources: usize,
    per_source: usize,
    proc: f64,
    link_scale: f64,
) -> String {
    let mut rng = Rng(seed);
    let mut edges: Vec<(usize, usize)> = (0..sites).map(|i| (i, (i + 1) % sites)).collect();
    let mut seen: std::collections::HashSet<(usize, usize)> = edges.iter().copied().collect();
    while edges.len() < links {
        let (a, b) = (rng.below(sites), rng.below(sites));
        if a != b && !seen.contains(&(a, b)) && !seen.contains(&(b, a)) {
            seen.insert((a, b));
            edges.push((a, b));
        }
    }
    let caps = [400.0, 600.0, 1000.0, 1000.0, 1500.0];
    let site_docs: Vec<_> = (0..sites)
        .map(|i| json!({"id": format!("s{i}"), "processing": if i % 20 == 0 { proc } else { 0.0 }}))
        .collect();
    let link_docs: Vec<_> = edges
        .iter()
        .enumerate()
        .map(|(k, &(a, b))| {
            json!({"id": format!("l{k}"), "from": format!("s{a}"), "to": format!("s{b}"),
                   "capacity": caps[rng.below(caps.len())] * link_scale})
        })
        .collect();
    let mut demand_docs = Vec::new();
    for k in 0..sources {
        let a = (k * sites) / sources + 3;
        for _ in 0..per_source {
            let b = (a + 1 + rng.below(sites - 1)) % sites;
            let v = ((0.2 + 1.4 * rng.unit()) * 100.0).round() / 100.0;
            let r = if rng.below(3) == 0 {
                (v * 80.0).round() / 100.0
            } else {
                v
            };
            demand_docs.push(json!({"from": format!("s{a}"), "to": format!("s{b}"),
                                    "volume": v, "required": r}));
        }
    }
    let doc = json!({"name": "approx-bench", "unit": "Gbit/s", "sites": site_docs,
                     "links": link_docs, "demands": demand_docs});
    doc.to_string()
}

fn main() {
    let every: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(100);
    // `congested`: processing 300 per site (15,000 in all, below the 16,776 required), so
    // every scenario is short.
    let proc = if std::env::args().any(|a| a == "congested") {
        300.0
    } else {
        400.0
    };
    // `tight`: link capacities a tenth (40..150), so links bind beside the processing.
    let link_scale = if std::env::args().any(|a| a == "tight") {
        0.1
    } else {
        1.0
    };
    let eps = 0.01;
    let t = Instant::now();
    let text = network(7, 1000, 2000, 100, 200, proc, link_scale);
    // `write PATH`: the network file for the binary (e.g. `redoubt audit PATH --kinds links
    // --engine approx --exact-top 5`; REDOUBT_MAX_INPUT_MIB is not needed: about 1.3 MB).
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "write") {
        let path = args.get(i + 1).expect("write PATH");
        std::fs::write(path, &text).expect("network file written");
        println!("wrote {path}");
        return;
    }
    let net = Network::from_json(&text).expect("generated network is valid");
    println!(
        "network: {} sites, {} links, {} demands; built in {:.1} s; peak {:.0} MB",
        net.sites.len(),
        net.links.len(),
        net.demands.len(),
        t.elapsed().as_secs_f64(),
        peak_mb()
    );
    let t = Instant::now();
    let (base, start) = approx::evaluate_from(&net, &Scenario::baseline().outage(&net), eps, None)
        .expect("baseline");
    println!(
        "baseline: {:.2} s, served [{:.3}, {:.3}] of {:.3} (width {:.2e} of required), proven {}",
        t.elapsed().as_secs_f64(),
        base.served_required,
        base.upper_bound,
        base.surviving_required,
        (base.upper_bound - base.served_required) / base.surviving_required,
        base.verification.proven
    );
    let mut times = Vec::new();
    for l in (0..net.links.len()).step_by(every.max(1)) {
        let sc = Scenario::new(&net, &[Element::Link(l.into())]);
        let t = Instant::now();
        let (e, _) =
            approx::evaluate_from(&net, &sc.outage(&net), eps, Some(&start)).expect("scenario");
        let secs = t.elapsed().as_secs_f64();
        times.push(secs);
        println!(
            "link {l:>4}: {secs:.3} s, served [{:.3}, {:.3}] of {:.3} (width {:.2e}), proven {}",
            e.served_required,
            e.upper_bound,
            e.surviving_required,
            (e.upper_bound - e.served_required) / e.surviving_required.max(1e-300),
            e.verification.proven
        );
    }
    let mean = times.iter().sum::<f64>() / times.len().max(1) as f64;
    let worst = times.iter().copied().fold(0.0, f64::max);
    println!(
        "sample of {} links: mean {mean:.2} s, worst {worst:.2} s per scenario; depth-1 of all {} \
         links on 2 threads ≈ {:.1} min (extrapolated); peak {:.0} MB",
        times.len(),
        net.links.len(),
        mean * net.links.len() as f64 / 2.0 / 60.0,
        peak_mb()
    );
    if std::env::args().any(|a| a == "full") {
        full(&net, eps);
    }
}

/// The whole depth-1 audit of every link through the audit's batch, two threads.
fn full(net: &Network, eps: f64) {
    let links = Kinds {
        links: true,
        sites: false,
        groups: false,
    };
    let engine = Engine::Approx { epsilon: eps };
    let (audit, baseline, secs) = common::batch_audit(net, links, 1, engine);
    let widths: Vec<f64> = audit
        .evaluations
        .iter()
        .map(|e| (e.upper_bound - e.served_required) / e.surviving_required.max(1e-300))
        .collect();
    let widest = widths.iter().copied().fold(0.0, f64::max);
    let exact = widths.iter().filter(|&&w| w <= 1e-9).count();
    let too_wide = widths.iter().filter(|&&w| w > eps * (1.0 + 1e-9)).count();
    println!(
        "full depth-1 audit of {} links (ε = {eps}, 2 threads): {secs:.1} s wall ({baseline:.1} s \
         baseline); {} outages, {exact} intervals exact, widest {widest:.2e} of required, {too_wide} \
         wider than ε; peak {:.0} MB",
        net.links.len(),
        audit.evaluations.len(),
        peak_mb()
    );
}
