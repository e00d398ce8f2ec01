//! Shared by the benches: a deterministic network generator and the peak-memory probe.
#![allow(dead_code)]

use redoubt::model::Network;
use serde_json::json;

/// splitmix64: a deterministic generator, so every run builds the same networks.
pub struct Rng(pub u64);

impl Rng {
    pub fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }
    pub fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    pub fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// A ring plus random chords up to `links`, processing at `procs`, `demands` random
/// distinct pairs with volume 0.2..1.6 and a third of them requiring 80 %.
pub fn network(
    seed: u64,
    sites: usize,
    links: usize,
    demands: usize,
    procs: &[(usize, f64)],
) -> Network {
    generate(seed, sites, links, Demands::Random(demands), procs)
}

/// Which demands a generated network carries.
#[derive(Debug, Clone, Copy)]
pub enum Demands {
    /// This many distinct random (origin, destination) pairs.
    Random(usize),
    /// One demand from every site to a random other site.
    OnePerSource,
}

/// [`network`] with a choice of demands; `Demands::Random` gives exactly [`network`]'s.
pub fn generate(
    seed: u64,
    sites: usize,
    links: usize,
    demands: Demands,
    procs: &[(usize, f64)],
) -> Network {
    let doc = document(seed, sites, links, demands, procs, 0);
    Network::from_json(&doc.to_string()).expect("generated network is valid")
}

/// The JSON document of [`generate`], with `groups` shared-risk groups of two links each
/// (distinct links, drawn after everything else, so `groups = 0` gives [`generate`]'s
/// network exactly).
pub fn document(
    seed: u64,
    sites: usize,
    links: usize,
    demands: Demands,
    procs: &[(usize, f64)],
    groups: usize,
) -> serde_json::Value {
    let mut rng = Rng(seed);
    let mut edges: Vec<(usize, usize)> = (0..sites).map(|i| (i, (i + 1) % sites)).collect();
    while edges.len() < links {
        let (a, b) = (rng.below(sites), rng.below(sites));
        if a != b && !edges.contains(&(a, b)) && !edges.contains(&(b, a)) {
            edges.push((a, b));
        }
    }
    let caps = [40.0, 60.0, 100.0, 100.0, 150.0];
    let site_docs: Vec<_> = (0..sites)
        .map(|i| {
            let p = procs.iter().find(|p| p.0 == i).map_or(0.0, |p| p.1);
            json!({"id": format!("s{i:02}"), "processing": p})
        })
        .collect();
    let link_docs: Vec<_> = edges
        .iter()
        .enumerate()
        .map(|(k, &(a, b))| {
            json!({"id": format!("l{k:02}"), "from": format!("s{a:02}"), "to": format!("s{b:02}"),
                   "capacity": caps[rng.below(caps.len())]})
        })
        .collect();
    let pairs: Vec<(usize, usize)> = match demands {
        Demands::Random(n) => {
            let mut pairs: Vec<(usize, usize)> = (0..sites)
                .flat_map(|a| (0..sites).filter(move |&b| b != a).map(move |b| (a, b)))
                .collect();
            for i in (1..pairs.len()).rev() {
                pairs.swap(i, rng.below(i + 1));
            }
            pairs.truncate(n);
            pairs
        }
        Demands::OnePerSource => (0..sites)
            .map(|a| (a, (a + 1 + rng.below(sites - 1)) % sites))
            .collect(),
    };
    let demand_docs: Vec<_> = pairs
        .iter()
        .map(|&(a, b)| {
            let v = ((0.2 + 1.4 * rng.unit()) * 100.0).round() / 100.0;
            let r = if rng.below(3) == 0 { (v * 80.0).round() / 100.0 } else { v };
            json!({"from": format!("s{a:02}"), "to": format!("s{b:02}"), "volume": v, "required": r})
        })
        .collect();
    let mut link_docs = link_docs;
    let mut grouped = vec![false; link_docs.len()];
    for g in 0..groups {
        let mut members = 0;
        while members < 2 && grouped.iter().any(|&b| !b) {
            let k = rng.below(link_docs.len());
            if !grouped[k] {
                grouped[k] = true;
                link_docs[k]["risk_groups"] = json!([format!("g{g:02}")]);
                members += 1;
            }
        }
    }
    json!({"name": "bench", "unit": "Gbit/s", "sites": site_docs, "links": link_docs,
           "demands": demand_docs})
}

/// Peak resident memory of this process so far, in MB (Linux `VmHWM`).
pub fn peak_mb() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// Audits `net` through the audit's own batch, as `redoubt audit` does: the baseline
/// probed first, then every scenario of `kinds` up to `depth` from its parent, on two
/// threads, thin evaluations. Returns the audit, the seconds to the baseline and the
/// seconds in all (wall, from the batch's creation).
pub fn batch_audit(
    net: &Network,
    kinds: redoubt::scenario::Kinds,
    depth: usize,
    engine: redoubt::solve::Engine,
) -> (redoubt::audit::Audit, f64, f64) {
    use redoubt::audit::{Batch, Keep, RunOptions};
    let t = std::time::Instant::now();
    let mut batch =
        Batch::new(net, redoubt::scenario::lazy(net, kinds, depth), engine).keeping(Keep::Thin);
    batch.seed(
        redoubt::audit::probe(net, engine, None).expect("baseline"),
        None,
    );
    let baseline = t.elapsed().as_secs_f64();
    let options = RunOptions {
        threads: Some(2),
        progress: false,
    };
    batch.solve_rest(net, options, None).expect("solves");
    let audit = batch.into_audit();
    (audit, baseline, t.elapsed().as_secs_f64())
}
