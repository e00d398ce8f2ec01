//! The approximate engine (`--engine approx --epsilon E`) through the binary: on the demo
//! fixtures and on generated networks, every scenario's proven interval
//! `[served_required, upper_bound]` must contain the value the edge LP engine proves, and
//! be at most `E × required` wide. The edge LP (`--engine edge`: the two-layer edge
//! formulation aggregated by source, solved by clarabel with microlp as the last rung of
//! its ladder) is an independent formulation and solver of the same optimum: the approx
//! engine works on walks with Garg–Könemann lengths, shares no solver with it, and only
//! its verifier (repair and certificate) is common code.
mod common;

use common::{TempPath, fixture, random, redoubt, s};
use serde_json::Value;

/// Runs `audit FILE ARGS --json OUT --quiet` and returns the document.
fn audit_json(file: &str, args: &[&str]) -> Value {
    let out = TempPath::new("approx-out", "json");
    let mut all = vec!["audit", file];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--json", out.path(), "--quiet", "--yes"]);
    let run = redoubt(&all);
    assert_eq!(run.code, 0, "{}", run.stderr);
    out.read_json()
}

/// Every scenario of `approx` (same scenario list as `edge`, matched by failed names)
/// holds the edge LP's proven served_required (and throughput) within its interval, and
/// the interval is at most `eps × required` wide (plus rounding).
fn contains_edge(approx: &Value, edge: &Value, eps: f64) {
    let edge_by: std::collections::HashMap<String, &Value> = edge["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| (s["failed"].to_string(), s))
        .collect();
    let list = approx["scenarios"].as_array().unwrap();
    assert_eq!(list.len(), edge_by.len());
    for a in list {
        let name = a["failed"].to_string();
        let e = edge_by[&name];
        assert_eq!(e["verification"]["status"], "proven", "{name}");
        let exact = e["served_required"].as_f64().unwrap();
        let lo = a["served_required"].as_f64().unwrap();
        let hi = a["upper_bound"].as_f64().unwrap();
        let required = a["required"].as_f64().unwrap();
        let tol = 1e-6 * required.max(1.0);
        assert!(
            lo <= exact + tol && exact <= hi + tol,
            "{name}: edge {exact} outside [{lo}, {hi}]"
        );
        assert!(
            hi - lo <= eps * required + tol,
            "{name}: [{lo}, {hi}] wider than {eps} × {required}"
        );
        let v = &a["verification"];
        assert!(v["backend"].as_str().unwrap().starts_with("approx"), "{v}");
        if let Some(tv) = a["throughput_verification"].as_object() {
            let t_exact = e["throughput"].as_f64().unwrap();
            let (tlo, thi) = (
                tv["lower_bound"].as_f64().unwrap(),
                tv["upper_bound"].as_f64().unwrap(),
            );
            assert!(
                tlo <= t_exact + tol && t_exact <= thi + tol,
                "{name}: edge throughput {t_exact} outside [{tlo}, {thi}]"
            );
        }
    }
}

/// The audits of `file` at `--depth DEPTH` over links and sites with `--engine approx
/// --epsilon EPS` and with `--engine edge`, in that order.
fn approx_and_edge(file: &str, depth: &str, eps: &str) -> (Value, Value) {
    let args = ["--depth", depth, "--kinds", "links,sites", "--engine"];
    let with = |engine: &[&str]| {
        let mut all = args.to_vec();
        all.extend_from_slice(engine);
        audit_json(file, &all)
    };
    (with(&["approx", "--epsilon", eps]), with(&["edge"]))
}

#[test]
fn small_ring_depth_1_at_one_percent() {
    let f = fixture("small-ring.json");
    let approx = audit_json(s(&f), &["--depth", "1", "--engine", "approx"]);
    let edge = audit_json(s(&f), &["--depth", "1", "--engine", "edge"]);
    contains_edge(&approx, &edge, 0.01);
}

#[test]
fn demo_depth_1_at_ten_percent() {
    let f = fixture("demo-harrowmere.json");
    let approx = audit_json(
        s(&f),
        &["--depth", "1", "--engine", "approx", "--epsilon", "0.1"],
    );
    let edge = audit_json(s(&f), &["--depth", "1", "--engine", "edge"]);
    contains_edge(&approx, &edge, 0.1);
}

/// A ring plus random chords (capacities 4..20, tight enough that some failures short
/// demand), processing at two sites, random demands (the bench generator's shape;
/// [`random::random_network`]).
fn random_network(seed: u64, sites: usize, links: usize, demands: usize) -> String {
    random::random_network(seed, sites, links, demands, |i, _| {
        if i == 0 || i == sites / 2 { 25 } else { 0 }
    })
}

#[test]
fn random_networks_contain_the_edge_optimum() {
    for seed in 1..=4 {
        let file = TempPath::with_text("approx-random", &random_network(seed, 9, 14, 12));
        let approx = audit_json(
            file.path(),
            &[
                "--depth",
                "1",
                "--kinds",
                "links",
                "--engine",
                "approx",
                "--epsilon",
                "0.05",
            ],
        );
        let edge = audit_json(
            file.path(),
            &["--depth", "1", "--kinds", "links", "--engine", "edge"],
        );
        contains_edge(&approx, &edge, 0.05);
    }
}

/// Processing runs out (the random networks with 3 units at sites 0, 3 and 6, 9 in all,
/// below the demand): every interval holds the edge LP's proven optimum, and wherever
/// that optimum is the surviving processing itself (every walk needs a site, so no
/// allocation serves more), the interval is closed exactly at it: the cut of the full
/// sites proves it at once (the certificate with price 1 on each full site, 0 elsewhere).
#[test]
fn processing_bound_scenarios_close_exactly() {
    let mut closed = 0;
    for seed in 31..=33 {
        let text = random::random_network(seed, 9, 14, 12, |i, _| if i % 3 == 0 { 3 } else { 0 });
        let file = TempPath::with_text("approx-processing", &text);
        let (approx, edge) = approx_and_edge(file.path(), "1", "0.05");
        contains_edge(&approx, &edge, 0.05);
        for (a, e) in approx["scenarios"]
            .as_array()
            .unwrap()
            .iter()
            .zip(edge["scenarios"].as_array().unwrap())
        {
            assert_eq!(a["failed"], e["failed"]);
            let lost = a["failed"]
                .as_array()
                .unwrap()
                .iter()
                .filter(|f| ["site:s0", "site:s3", "site:s6"].contains(&f.as_str().unwrap()))
                .count();
            let processing = 9.0 - 3.0 * lost as f64;
            let exact = e["served_required"].as_f64().unwrap();
            if (exact - processing).abs() < 1e-9 {
                closed += 1;
                let (lo, hi) = (
                    a["served_required"].as_f64().unwrap(),
                    a["upper_bound"].as_f64().unwrap(),
                );
                assert!(
                    (lo - exact).abs() < 1e-6 && (hi - exact).abs() < 1e-6,
                    "{}: [{lo}, {hi}] is not closed at {exact}",
                    a["failed"]
                );
            }
        }
    }
    assert!(closed > 0, "no processing-bound scenario was generated");
}

/// Depth 2 over links and sites: every double failure starts from its single-failure
/// parent's walks and certificate prices (kept when that interval is within ε), so the
/// warm intervals, including those after a processing site fails, are checked against the
/// edge LP's proven optimum here.
#[test]
fn doubles_from_their_parents_contain_the_edge_optimum() {
    for seed in 11..=13 {
        let file = TempPath::with_text("approx-doubles", &random_network(seed, 8, 12, 10));
        let (approx, edge) = approx_and_edge(file.path(), "2", "0.02");
        contains_edge(&approx, &edge, 0.02);
    }
}

/// Output deterministic whatever the thread count (common practice, no source: a report
/// must not depend on scheduling): every outage starts from its parent's answer, and the
/// JSON of a depth-2 approximate audit on one thread equals the one on two threads byte
/// for byte.
#[test]
fn warm_starts_give_the_same_json_on_one_and_two_threads() {
    let file = TempPath::with_text("approx-threads", &random_network(21, 8, 12, 10));
    let mut docs = Vec::new();
    for threads in ["1", "2"] {
        let out = TempPath::new("approx-threads-out", "json");
        let run = redoubt(&[
            "audit",
            file.path(),
            "--depth",
            "2",
            "--kinds",
            "links,sites",
            "--engine",
            "approx",
            "--epsilon",
            "0.02",
            "--threads",
            threads,
            "--json",
            out.path(),
            "--quiet",
            "--yes",
        ]);
        assert_eq!(run.code, 0, "{}", run.stderr);
        docs.push(std::fs::read(out.path()).expect("json written"));
    }
    assert!(
        docs[0] == docs[1],
        "the JSON differs between 1 and 2 threads"
    );
}

/// Hand case (computed here): path s–v–t, links of capacity 10, processing 4 at v only,
/// one demand s→t requiring 6 (volume 6). Every walk is processed at v, so the optimum is
/// 4 (the walk s→v→t with 4 on each link, within their 10): shortfall 2.
#[test]
fn hand_path_serves_four() {
    let file = TempPath::with_text(
        "approx-hand",
        r#"{"sites":[{"id":"s"},{"id":"v","processing":4},{"id":"t"}],
            "links":[{"id":"sv","from":"s","to":"v","capacity":10},
                     {"id":"vt","from":"v","to":"t","capacity":10}],
            "demands":[{"from":"s","to":"t","volume":6}]}"#,
    );
    let doc = audit_json(
        file.path(),
        &["--depth", "0", "--engine", "approx", "--epsilon", "0.2"],
    );
    let base = &doc["baseline"];
    let lo = base["served_required"].as_f64().unwrap();
    let hi = base["upper_bound"].as_f64().unwrap();
    assert!(lo <= 4.0 + 1e-9 && hi >= 4.0 - 1e-9, "[{lo}, {hi}]");
    assert!(hi - lo <= 0.2 * 6.0, "[{lo}, {hi}]");
}

/// `--epsilon` needs `--engine approx` and a value in (0, 0.5]: usage errors (exit 2).
#[test]
fn epsilon_usage() {
    let f = fixture("small-ring.json");
    for args in [
        vec!["--epsilon", "0.1"],
        vec!["--engine", "approx", "--epsilon", "0"],
        vec!["--engine", "approx", "--epsilon", "0.6"],
        vec!["--engine", "approx", "--epsilon", "NaN"],
        vec!["--engine", "edge", "--epsilon", "0.01"],
    ] {
        let mut all = vec!["audit", s(&f), "--quiet"];
        all.extend_from_slice(&args);
        let run = redoubt(&all);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
        assert!(run.stderr.contains("--epsilon"), "{args:?}: {}", run.stderr);
    }
}

/// Purchases start from an exact served amount: `--close` and `--why` with the approximate
/// engine are usage errors (exit 2) that name the exact engines.
#[test]
fn purchases_need_an_exact_engine() {
    let f = fixture("small-ring.json");
    for flag in ["--close", "--why"] {
        let run = redoubt(&["audit", s(&f), "--quiet", "--engine", "approx", flag]);
        assert_eq!(run.code, 2, "{flag}: {}", run.stderr);
        assert!(
            run.stderr.contains("--engine walks"),
            "{flag}: {}",
            run.stderr
        );
    }
}

/// The text names the approximate results plainly.
#[test]
fn text_says_approximate_within_epsilon() {
    let f = fixture("demo-harrowmere.json");
    let run = redoubt(&[
        "audit",
        s(&f),
        "--depth",
        "1",
        "--engine",
        "approx",
        "--epsilon",
        "0.1",
        "--quiet",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("approximate within 0.1"),
        "{}",
        run.stdout
    );
    assert!(!run.stdout.contains("UNPROVEN"), "{}", run.stdout);
}
