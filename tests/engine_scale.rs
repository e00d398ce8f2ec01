//! The walk engine at scale, through the binary: many parallel links between two sites
//! (each direction's parallel links are one class in pricing and masters, split back per
//! link), and the restricted warm masters against the edge LP on a small mesh.
mod common;

use common::{TempPath, redoubt};
use serde_json::{Value, json};

/// Capacity of parallel link `k`: 1, 2, 3, 1, 2, 3, ...
fn cap(k: usize) -> f64 {
    (1 + k % 3) as f64
}

/// Two sites joined by `n` parallel links; site a processes 10,000; one demand a → b
/// requiring 1,000.
fn parallel(n: usize) -> String {
    let links: Vec<Value> = (0..n)
        .map(|k| json!({"id": format!("p{k:03}"), "from": "a", "to": "b", "capacity": cap(k)}))
        .collect();
    json!({"sites": [{"id": "a", "processing": 10000}, {"id": "b"}],
           "links": links,
           "demands": [{"from": "a", "to": "b", "volume": 1000, "required": 1000}]})
    .to_string()
}

/// 280 parallel links (the size where column generation used to need a round per link).
/// Hand computation (max flow over parallel edges, common practice, no source): the
/// demand is served up to the links' total, Σ cap = 94·1 + 93·2 + 93·3 = 559 (k = 0..279,
/// k mod 3 = 0 for 94 of them), so the baseline serves 559 with every link saturated;
/// failing link k serves 559 − cap(k). Every scenario must be proven (the verifier checks
/// each link's own load against its own capacity), and every surviving link saturated.
#[test]
fn many_parallel_links_are_one_class_and_split_back() {
    let n = 280;
    let total: f64 = (0..n).map(cap).sum();
    assert_eq!(total, 559.0);
    let file = TempPath::with_text("parallel", &parallel(n));
    let out = TempPath::new("parallel-out", "json");
    let t = std::time::Instant::now();
    let run = redoubt(&[
        "audit",
        file.path(),
        "--kinds",
        "links",
        "--engine",
        "walks",
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let secs = t.elapsed().as_secs_f64();
    let doc = out.read_json();
    let base = &doc["baseline"];
    assert!((base["served_required"].as_f64().unwrap() - total).abs() < 1e-6);
    assert_eq!(base["saturated_links"].as_array().unwrap().len(), n);
    let scenarios: Vec<&Value> = doc["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| !s["failed"].as_array().unwrap().is_empty())
        .collect();
    assert_eq!(scenarios.len(), n);
    for s in scenarios {
        let name = s["failed"][0].as_str().unwrap();
        let k: usize = name.trim_start_matches("link:p").parse().unwrap();
        let served = s["served_required"].as_f64().unwrap();
        assert!(
            (served - (total - cap(k))).abs() < 1e-6,
            "{name}: served {served}, hand {}",
            total - cap(k)
        );
        assert_eq!(s["verification"]["status"], "proven", "{name}");
        assert_eq!(
            s["saturated_links"].as_array().unwrap().len(),
            n - 1,
            "{name}"
        );
    }
    eprintln!("280 parallel links, 281 scenarios: {secs:.1} s");
}

/// A 6-site mesh with parallel and one-way links and three processing sites: every double
/// failure of links and sites through `--engine walks` (restricted masters on the warm
/// simplex) against `--engine edge` (the edge LP on clarabel, an independent formulation
/// and solver): the same served and throughput per scenario, each proven.
#[test]
fn walks_match_the_edge_lp_on_every_double() {
    let doc = json!({
        "sites": [{"id": "a", "processing": 9}, {"id": "b"}, {"id": "c", "processing": 6},
                  {"id": "d"}, {"id": "e", "processing": 4}, {"id": "f"}],
        "links": [
            {"id": "ab1", "from": "a", "to": "b", "capacity": 5},
            {"id": "ab2", "from": "a", "to": "b", "capacity": 3},
            {"id": "bc", "from": "b", "to": "c", "capacity": 6},
            {"id": "cd", "from": "c", "to": "d", "capacity": 4},
            {"id": "de1", "from": "d", "to": "e", "capacity": 2},
            {"id": "de2", "from": "d", "to": "e", "capacity": 2},
            {"id": "ef", "from": "e", "to": "f", "capacity": 7},
            {"id": "fa", "from": "f", "to": "a", "capacity": 5, "one_way": true},
            {"id": "be", "from": "b", "to": "e", "capacity": 3},
            {"id": "cf", "from": "c", "to": "f", "capacity": 4, "risk_groups": ["duct"]},
            {"id": "ad", "from": "a", "to": "d", "capacity": 3, "risk_groups": ["duct"]}
        ],
        "demands": [
            {"from": "a", "to": "d", "volume": 5, "required": 4},
            {"from": "b", "to": "f", "volume": 4},
            {"from": "f", "to": "c", "volume": 3, "required": 2},
            {"from": "d", "to": "a", "volume": 6},
            {"from": "e", "to": "b", "volume": 2},
            {"from": "c", "to": "e", "volume": 5, "required": 3}
        ]
    });
    let file = TempPath::with_text("mesh", &doc.to_string());
    let mut results = Vec::new();
    for engine in ["walks", "edge"] {
        let out = TempPath::new("mesh-out", "json");
        let run = redoubt(&[
            "audit",
            file.path(),
            "--depth",
            "2",
            "--engine",
            engine,
            "--quiet",
            "--json",
            out.path(),
        ]);
        assert_eq!(run.code, 0, "{engine}: {}", run.stderr);
        results.push(out.read_json());
    }
    let key = |s: &Value| s["failed"].to_string();
    let edge: std::collections::HashMap<String, &Value> = results[1]["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| (key(s), s))
        .collect();
    let walks = results[0]["scenarios"].as_array().unwrap();
    assert!(walks.len() > 100, "{}", walks.len());
    for s in walks {
        let e = edge[&key(s)];
        for field in ["served_required", "throughput"] {
            let (a, b) = (s[field].as_f64().unwrap(), e[field].as_f64().unwrap());
            assert!(
                (a - b).abs() < 1e-6,
                "{} {field}: walks {a}, edge {b}",
                key(s)
            );
        }
        assert_eq!(s["verification"]["status"], "proven", "{}", key(s));
    }
}

/// A processing-bound network whose walk masters are past the dense simplex's rows
/// (`colgen::WARM_ROWS`), so the walk engine solves them on the GUB simplex (demand rows
/// kept out of its inverse): 40 sites, 70 links, 3,000 demands, processing 150 at every
/// fourth site (1,500 in all against about 13,500 required), so every demand stays in
/// the masters (140 arcs + 10 sites + 3,000 demand rows). Every single failure of a link
/// or site through `--engine walks` against `--engine edge` (the edge LP on clarabel, an
/// independent formulation and solver): the same served and throughput per scenario,
/// each proven.
#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
fn large_masters_match_the_edge_lp() {
    let text =
        common::random::random_network(77, 40, 70, 3000, |i, _| if i % 4 == 0 { 150 } else { 0 });
    let doc: Value = serde_json::from_str(&text).unwrap();
    let rows = 2 * doc["links"].as_array().unwrap().len() + 10 + 3000;
    assert!(
        rows > redoubt::solve::colgen::WARM_ROWS,
        "{rows} rows: the dense simplex would take it"
    );
    let file = TempPath::with_text("large-masters", &text);
    let mut results = Vec::new();
    for engine in ["walks", "edge"] {
        let out = TempPath::new("large-masters-out", "json");
        let run = redoubt(&[
            "audit",
            file.path(),
            "--depth",
            "1",
            "--kinds",
            "links,sites",
            "--engine",
            engine,
            "--quiet",
            "--json",
            out.path(),
        ]);
        assert!(run.code <= 1, "{engine}: {}", run.stderr);
        results.push(out.read_json());
    }
    let key = |s: &Value| s["failed"].to_string();
    let edge: std::collections::HashMap<String, &Value> = results[1]["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| (key(s), s))
        .collect();
    let walks = results[0]["scenarios"].as_array().unwrap();
    assert_eq!(walks.len(), 1 + 70 + 40, "baseline, every link and site");
    let total: f64 = results[0]["scenarios"][0]["required"]
        .as_f64()
        .unwrap_or(1.0);
    let mut short = 0;
    for s in walks {
        let e = edge[&key(s)];
        for field in ["served_required", "throughput"] {
            let (a, b) = (s[field].as_f64().unwrap(), e[field].as_f64().unwrap());
            assert!(
                (a - b).abs() <= 1e-7 * total.max(1.0),
                "{} {field}: walks {a}, edge {b}",
                key(s)
            );
        }
        assert_eq!(s["verification"]["status"], "proven", "{}", key(s));
        short += usize::from(s["shortfall"].as_f64().unwrap_or(0.0) > 0.0);
    }
    // Processing-bound: the masters hold every demand because every scenario is short.
    assert_eq!(short, walks.len(), "every scenario short");
}
