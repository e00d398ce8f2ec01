//! Speed and memory at scale, on generated networks (deterministic; see `common`), through
//! the audit's own batch (`audit::Batch`: baseline first, doubles from their single-failure
//! parent, two threads) and beside the cold paths.
//!
//! - `B`: the 50-site, 88-link, 660-demand network of `benches/walks.rs`: all double failures
//!   of links and sites, run on every `k`-th double (`full` runs them all) and extrapolated;
//!   doubles from the baseline vs from their parent; the cold edge LP on a few.
//! - `G200`: 200 sites, 395 links, 3,903 demands (every site a source): baseline plus one
//!   failure, and a depth-1 audit (every 5th single, extrapolated).
//! - `G400`: 400 sites, 760 links, 400 demands from 400 sources: one scenario, then every
//!   depth-2 scenario of links and sites enumerated and deduplicated (peak memory), and a
//!   deterministic slice of them solved (shard 1 of N).
//!
//! - `CLOSE200`: the `G200` network written to a file and `redoubt audit FILE --fail
//!   X` (its explanation and closing included) run by the built binary, timed, for two
//!   links and two processing sites; then the same with processing 170 (expandable), where
//!   the site failures are short and the explanation runs the closing's cost master (the
//!   walk master of `solve::colgen::buy`).
//!
//! Prints scenarios, seconds per scenario (wall, 2 threads), LPs decided by each shortcut,
//! master LP solves, pricing rounds, fallbacks and peak memory (VmHWM, so each figure
//! includes everything before it). Run with `cargo bench --bench scale -- B G200 G400`
//! (about 10 minutes; default all).

mod common;

use std::time::Instant;

use common::{Demands, generate, network, peak_mb};
use redoubt::audit::{Batch, Keep, RunOptions};
use redoubt::model::Network;
use redoubt::scenario::{self, Element, Kinds, Outage, Scenario};
use redoubt::solve::Engine;
use redoubt::solve::{self, Evaluation, colgen};

const TWO: RunOptions = RunOptions {
    threads: Some(2),
    progress: false,
};

/// Bytes one kept evaluation takes: the struct plus its heap vectors (an estimate that
/// ignores allocator overhead).
fn bytes(e: &Evaluation) -> usize {
    std::mem::size_of::<Evaluation>()
        + e.stranded_demands.capacity() * 8
        + (e.demand_flow.capacity() + e.demand_shortfall.capacity()) * 8
        + (e.arc_load.capacity() + e.site_load.capacity() + e.arc_price.capacity()) * 8
        + e.site_price.capacity() * 16
        + e.bottlenecks.capacity() * std::mem::size_of::<solve::Bottleneck>()
        + e.cut_off.capacity() * 16
        + e.verification.backend.capacity()
}

/// Runs `scenarios` through a batch (two threads) and prints the figures.
fn run(
    label: &str,
    net: &Network,
    scenarios: impl IntoIterator<Item = Scenario>,
    shard: Option<(usize, usize)>,
    keep: Keep,
) -> f64 {
    let t = Instant::now();
    let mut batch = Batch::new(net, scenarios, Engine::Walks).keeping(keep);
    if let Some((i, n)) = shard {
        batch = batch.shard(i, n);
    }
    let enumerated = t.elapsed().as_secs_f64();
    let own = batch.own();
    let outages = batch.outages();
    let mem_enum = peak_mb();
    let tb = Instant::now();
    batch.seed(
        redoubt::audit::probe(net, Engine::Walks, None).expect("baseline"),
        None,
    );
    let baseline = tb.elapsed().as_secs_f64();
    let t = Instant::now();
    batch.solve_rest(net, TWO, None).expect("solves");
    let wall = t.elapsed().as_secs_f64();
    let st = batch.stats();
    let kept: usize = own
        .iter()
        .filter_map(|&k| batch.evaluation(k))
        .map(bytes)
        .sum();
    println!(
        "  {label}: {outages} outages, baseline {baseline:.2} s, then {} solved in {wall:.1} s = {:.4} s/outage (wall, 2 threads) \
         | LPs: no-flow {}, repair {}, colgen {}, fallback {} | master solves {}, pricing rounds {} \
         | dedup {enumerated:.1} s, peak MB after dedup {mem_enum:.0}, after solving {:.0} \
         | kept {:.0} bytes/outage",
        own.len(),
        wall / own.len().max(1) as f64,
        st.no_flow,
        st.repaired,
        st.generated,
        st.fallback,
        st.lp_solves,
        st.rounds,
        peak_mb(),
        kept as f64 / own.len().max(1) as f64,
    );
    wall / own.len().max(1) as f64
}

fn singles(net: &Network) -> Vec<Vec<Element>> {
    scenario::elements(
        net,
        Kinds {
            links: true,
            sites: true,
            groups: false,
        },
    )
    .into_iter()
    .map(|e| vec![e])
    .collect()
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let chosen: Vec<&str> = ["B", "G200", "G400", "CLOSE200"]
        .into_iter()
        .filter(|n| args.iter().any(|a| a == n))
        .collect();
    let profiling = args.iter().any(|a| a.starts_with("profile"));
    let want = |n: &str| (chosen.is_empty() && !profiling) || chosen.contains(&n);
    let full = args.iter().any(|a| a == "full");
    if want("B") {
        bench_b(full);
    }
    if want("G200") {
        bench_200();
    }
    if want("G400") {
        bench_400();
    }
    if chosen.contains(&"CLOSE200") {
        close_200();
    }
    if args.iter().any(|a| a == "profile400") {
        profile_400();
    }
    if args.iter().any(|a| a == "profile200") {
        let net = net_200();
        let base = colgen::evaluate_walks(&net, &Outage::default(), None).expect("baseline");
        for e in [
            Element::Site(3.into()),
            Element::Site(10.into()),
            Element::Link(50.into()),
            Element::Site(77.into()),
        ] {
            let o = Scenario::new(&net, &[e]).outage(&net);
            let t = Instant::now();
            let w = colgen::evaluate_walks(&net, &o, Some(&base.basis)).expect("single");
            println!(
                "profile200 {e:?}: {:.3} s {:?}",
                t.elapsed().as_secs_f64(),
                w.stats
            );
        }
    }
}

fn bench_b(full: bool) {
    let net = network(
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
    println!("network B: 50 sites, 88 links, 660 demands; all double failures of links and sites");
    let kinds = Kinds {
        links: true,
        sites: true,
        groups: false,
    };
    let all: Vec<Scenario> = scenario::lazy(&net, kinds, 2).collect();
    let total = all.len();
    let every = if full { 1 } else { 8 };
    let sample: Vec<Scenario> = all
        .into_iter()
        .enumerate()
        .filter(|(i, s)| s.elements.len() < 2 || i % every == 0)
        .map(|p| p.1)
        .collect();
    let n = sample.len();
    let per = run(
        &format!("B depth 2 (singles + every {every}th double)"),
        &net,
        sample,
        None,
        Keep::Thin,
    );
    println!(
        "  => all {total} scenarios of depth 2: about {:.1} min on 2 threads ({per:.4} s each)",
        per * total as f64 / 60.0
    );
    let _ = n;
    // Parent choice, one thread: the same doubles from the baseline and from their single.
    let base = colgen::evaluate_walks(&net, &Outage::default(), None).expect("baseline");
    let pool: Vec<Element> = singles(&net).into_iter().flatten().collect();
    let pairs: Vec<(Element, Element)> = (0..pool.len())
        .flat_map(|i| (i + 1..pool.len()).map(move |j| (i, j)))
        .step_by(97)
        .map(|(i, j)| (pool[i], pool[j]))
        .collect();
    let (mut from_base, mut from_parent, mut cold) = (0.0, 0.0, 0.0);
    let (mut sb, mut sp) = (colgen::Stats::default(), colgen::Stats::default());
    for &(a, b) in &pairs {
        let o = Scenario::new(&net, &[a, b]).outage(&net);
        let first = Scenario::new(&net, &[a, b]).elements[0];
        let po = Scenario::new(&net, &[first]).outage(&net);
        let parent = colgen::evaluate_walks(&net, &po, Some(&base.basis)).expect("parent");
        let t = Instant::now();
        let x = colgen::evaluate_walks(&net, &o, Some(&base.basis)).expect("from baseline");
        from_base += t.elapsed().as_secs_f64();
        let t = Instant::now();
        let y = colgen::evaluate_walks(&net, &o, Some(&parent.basis)).expect("from parent");
        from_parent += t.elapsed().as_secs_f64();
        let t = Instant::now();
        let _ = colgen::evaluate_walks(&net, &o, None).expect("cold walks");
        cold += t.elapsed().as_secs_f64();
        sb.add(&x.stats);
        sp.add(&y.stats);
        assert!((x.evaluation.served_required - y.evaluation.served_required).abs() < 1e-6);
    }
    let m = pairs.len() as f64;
    println!(
        "  {} doubles, one thread: from the baseline {:.4} s ({} master solves, {} rounds), from the \
         single parent {:.4} s ({} master solves, {} rounds), cold walks {:.4} s",
        pairs.len(),
        from_base / m,
        sb.lp_solves,
        sb.rounds,
        from_parent / m,
        sp.lp_solves,
        sp.rounds,
        cold / m
    );
    let t = Instant::now();
    let k = 4;
    for &(a, b) in pairs.iter().take(k) {
        let o = Scenario::new(&net, &[a, b]).outage(&net);
        solve::evaluate(&net, &o).expect("edge");
    }
    let edge = t.elapsed().as_secs_f64() / k as f64;
    println!(
        "  cold edge LP: {edge:.2} s per double (one thread, {k} run) => all {total}: about {:.0} min on 2 threads",
        edge * total as f64 / 2.0 / 60.0
    );
}

fn net_200() -> Network {
    let procs: Vec<(usize, f64)> = (0..200).step_by(10).map(|i| (i, 200.0)).collect();
    generate(200, 200, 395, Demands::Random(3903), &procs)
}

/// `CLOSE200`: `audit --fail X` (with its explanation and closing) on the G200 network
/// through the binary, wall time per element: as generated (processing 200 at every tenth
/// site: no element leaves a shortfall), then with processing 170 at those sites, each
/// expandable (cost 1 a unit, at most 400), where every processing-site failure is short
/// and its explanation includes the closing's cost master.
fn close_200() {
    for processing in [200.0, 170.0] {
        let procs: Vec<(usize, f64)> = (0..200).step_by(10).map(|i| (i, processing)).collect();
        let mut doc = common::document(200, 200, 395, Demands::Random(3903), &procs, 0);
        if processing < 200.0 {
            for s in doc["sites"].as_array_mut().expect("sites").iter_mut() {
                if s.get("processing").and_then(|p| p.as_f64()).unwrap_or(0.0) > 0.0 {
                    s["expand_cost"] = serde_json::json!(1);
                    s["expand_max"] = serde_json::json!(400);
                }
            }
        }
        let path = std::env::temp_dir().join(format!(
            "redoubt-close200-{processing}-{}.json",
            std::process::id()
        ));
        std::fs::write(&path, doc.to_string()).expect("write the network");
        println!(
            "network G200, processing {processing} (file {}): audit --fail X, explanation and closing",
            path.display()
        );
        for element in ["link:l07", "link:l150", "site:s00", "site:s10"] {
            let t = Instant::now();
            let out = std::process::Command::new(env!("CARGO_BIN_EXE_redoubt"))
                .args(["audit", path.to_str().expect("utf-8 path"), "--fail"])
                .arg(element)
                .output()
                .expect("redoubt runs");
            let took = t.elapsed().as_secs_f64();
            let text = String::from_utf8_lossy(&out.stdout);
            let short = text
                .lines()
                .find(|l| l.starts_with("Verdict:"))
                .unwrap_or("");
            let buys = text.lines().filter(|l| l.contains("add ")).count();
            println!(
                "  --fail {element}: {took:.1} s, exit {:?} | {short} | {buys} purchase lines",
                out.status.code()
            );
        }
        let _ = std::fs::remove_file(&path);
    }
}

fn bench_200() {
    let net = net_200();
    let sources = {
        let mut s: Vec<usize> = net.demands.iter().map(|d| d.from.0).collect();
        s.sort_unstable();
        s.dedup();
        s.len()
    };
    println!(
        "network G200: 200 sites, 395 links, {} demands from {sources} sources",
        net.demands.len()
    );
    let t = Instant::now();
    let base = colgen::evaluate_walks(&net, &Outage::default(), None).expect("baseline");
    let b = t.elapsed().as_secs_f64();
    let o = Scenario::new(&net, &[Element::Link(7.into())]).outage(&net);
    let t = Instant::now();
    let one = colgen::evaluate_walks(&net, &o, Some(&base.basis)).expect("one failure");
    let f = t.elapsed().as_secs_f64();
    println!(
        "  baseline {b:.2} s ({} rounds, {} columns, served {:.1} of {:.1}) + one failure {f:.3} s = {:.2} s | peak MB {:.0}",
        base.stats.rounds,
        base.stats.max_columns,
        base.evaluation.served_required,
        base.evaluation.surviving_required,
        b + f,
        peak_mb()
    );
    let _ = one;
    let kinds = Kinds {
        links: true,
        sites: true,
        groups: false,
    };
    let all: Vec<Scenario> = scenario::lazy(&net, kinds, 1).collect();
    let total = all.len();
    let sample: Vec<Scenario> = all.into_iter().step_by(5).collect();
    let per = run("G200 depth 1 (every 5th)", &net, sample, None, Keep::Thin);
    println!(
        "  => depth-1 audit, {total} scenarios: about {:.1} min on 2 threads (baseline included)",
        (b + per * total as f64) / 60.0
    );
    let t = Instant::now();
    let _ = colgen::evaluate_walks(&net, &o, None).expect("cold walks");
    println!(
        "  cold walk engine (no parent) for the same failure: {:.2} s; the cold edge LP's baseline \
         was not run here (issue 8: > 300 s, 580 MB)",
        t.elapsed().as_secs_f64()
    );
}

fn bench_400() {
    let procs: Vec<(usize, f64)> = (0..400).step_by(20).map(|i| (i, 60.0)).collect();
    let net = generate(400, 400, 760, Demands::OnePerSource, &procs);
    println!("network G400: 400 sites, 760 links, 400 demands from 400 sources");
    let t = Instant::now();
    let base = colgen::evaluate_walks(&net, &Outage::default(), None).expect("baseline");
    let b = t.elapsed().as_secs_f64();
    let o = Scenario::new(&net, &[Element::Site(3.into())]).outage(&net);
    let t = Instant::now();
    colgen::evaluate_walks(&net, &o, Some(&base.basis)).expect("one failure");
    println!(
        "  baseline {b:.2} s + one scenario {:.3} s | peak MB {:.0}",
        t.elapsed().as_secs_f64(),
        peak_mb()
    );
    let kinds = Kinds {
        links: true,
        sites: true,
        groups: false,
    };
    let count = scenario::count(scenario::elements(&net, kinds).len(), 2);
    let n = 2000;
    let per = run(
        &format!("G400 depth 2, {count} scenarios, shard 1/{n}"),
        &net,
        scenario::lazy(&net, kinds, 2),
        Some((1, n)),
        Keep::Thin,
    );
    println!(
        "  => all {count} scenarios: about {:.0} min on 2 threads",
        per * count as f64 / 60.0
    );
}

/// `profile400`: a few single failures of the 400-site network from the baseline, for perf.
fn profile_400() {
    let procs: Vec<(usize, f64)> = (0..400).step_by(20).map(|i| (i, 60.0)).collect();
    let net = generate(400, 400, 760, Demands::OnePerSource, &procs);
    let base = colgen::evaluate_walks(&net, &Outage::default(), None).expect("baseline");
    let t = Instant::now();
    for s in 0..20 {
        let o = Scenario::new(&net, &[Element::Link((s * 7).into())]).outage(&net);
        colgen::evaluate_walks(&net, &o, Some(&base.basis)).expect("single");
    }
    println!(
        "profile400: {:.3} s per single",
        t.elapsed().as_secs_f64() / 20.0
    );
}
