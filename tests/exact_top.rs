//! `--engine approx --exact-top N` through the binary, against plain exact audits of the
//! same files: the N worst scenarios (names, order and values) and every gate's verdict
//! must be what the exact walk engine gives on its own, and every scenario left as a
//! certified interval must contain the value the edge LP proves. References: the walk
//! engine's own audit (column generation, its own masters) for the ranking, and the edge
//! LP (`--engine edge`: the source-aggregated two-layer edge formulation, clarabel with
//! microlp as its last rung), an independent formulation and solver, for every value.
mod common;

use std::collections::HashMap;

use common::{TempPath, fixture, random, redoubt, s};
use serde_json::Value;

/// Runs `audit FILE ARGS --json OUT --quiet --yes`; returns the exit code and document.
fn audit(file: &str, args: &[&str]) -> (i32, Value) {
    let out = TempPath::new("exact-top", "json");
    let mut all = vec!["audit", file];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--json", out.path(), "--quiet", "--yes"]);
    let run = redoubt(&all);
    assert!(run.code == 0 || run.code == 1, "{}", run.stderr);
    (run.code, out.read_json())
}

/// The scenarios of `doc` worst first (by their `rank`).
fn ranked(doc: &Value) -> Vec<&Value> {
    let mut v: Vec<&Value> = doc["scenarios"].as_array().unwrap().iter().collect();
    v.sort_by_key(|x| x["rank"].as_u64().unwrap());
    v
}

fn f(v: &Value, k: &str) -> f64 {
    v[k].as_f64().unwrap_or_else(|| panic!("{k} in {v}"))
}

/// Checks the screened document against the exact walk audit and the edge LP audit of the
/// same file and scenarios: the `top` worst identical in names, order and values; the
/// exactly solved scenarios equal to the edge LP's value; every other interval containing
/// it; the `screen` object consistent with the per-scenario flags.
fn agrees(screened: &Value, walks: &Value, edge: &Value, top: usize) {
    let (a, w) = (ranked(screened), ranked(walks));
    assert_eq!(a.len(), w.len());
    for r in 0..top.min(w.len()) {
        assert_eq!(
            a[r]["failed"],
            w[r]["failed"],
            "rank {}: screened {} vs exact {}",
            r + 1,
            a[r]["failed"],
            w[r]["failed"]
        );
        assert_eq!(a[r]["exact"], true, "{}", a[r]["failed"]);
        for k in ["shortfall", "served_required", "throughput", "stranded"] {
            let (x, y) = (f(a[r], k), f(w[r], k));
            assert!(
                (x - y).abs() <= 1e-6 * f(w[r], "required").max(1.0),
                "{} {k}: {x} vs {y}",
                a[r]["failed"]
            );
        }
    }
    let by_edge: HashMap<String, &Value> = edge["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| (x["failed"].to_string(), x))
        .collect();
    let (mut exact, mut closed) = (0, 0);
    for x in &a {
        let e = by_edge[&x["failed"].to_string()];
        let opt = f(e, "served_required");
        let tol = 1e-6 * f(e, "required").max(1.0);
        let (lo, hi) = (f(x, "served_required"), f(x, "upper_bound"));
        assert!(
            lo <= opt + tol && opt <= hi + tol,
            "{}: edge optimum {opt} outside [{lo}, {hi}]",
            x["failed"]
        );
        if x["exact"] == true {
            exact += 1;
            assert!((lo - opt).abs() <= tol, "{}: {lo} vs {opt}", x["failed"]);
            assert_eq!(x["verification"]["status"], "proven");
            // Exact without a walk-engine solve: the approximate interval itself closed.
            if x["verification"]["backend"]
                .as_str()
                .unwrap()
                .starts_with("approx")
            {
                closed += 1;
                assert!((hi - lo).abs() <= tol, "{}: [{lo}, {hi}]", x["failed"]);
            }
        } else {
            assert_eq!(x["exact"], false);
        }
    }
    let sc = &screened["screen"];
    assert_eq!(sc["top"], top);
    // Scenarios and outages coincide at depth 1 with links only (no two links are the
    // same outage in these files: no parallel links).
    let count = |k: &str| sc[k].as_u64().unwrap() as usize;
    assert_eq!(count("closed"), closed);
    assert_eq!(count("solved_exactly") + closed, exact);
    assert_eq!(
        count("solved_exactly") + closed + count("certified"),
        a.len()
    );
}

/// A ring plus random chords (capacities 4..20, tight enough that many failures short
/// demand, with ties among the shortfalls), processing at three sites, random demands
/// ([`random::random_network`]).
fn random_network(seed: u64, sites: usize, links: usize, demands: usize) -> String {
    random::random_network(seed, sites, links, demands, |i, rng| {
        if i == 0 || i == sites / 2 || i == sites / 3 {
            15 + 5 * rng.below(3)
        } else {
            0
        }
    })
}

/// Random small and medium networks, depth-1 link failures, several N: the screened
/// audit's N worst are the exact audit's, and no interval misses the edge LP's optimum.
#[test]
fn top_n_is_the_exact_audits() {
    let base = ["--depth", "1", "--kinds", "links"];
    let (mut solved, mut closed) = (0, 0);
    for (seed, sites, links, demands) in [(11, 8, 12, 10), (12, 12, 20, 25), (13, 20, 32, 40)] {
        let file = TempPath::with_text(
            "exact-top-net",
            &random_network(seed, sites, links, demands),
        );
        let (_, walks) = audit(file.path(), &base);
        let (_, edge) = audit(file.path(), &[&base[..], &["--engine", "edge"]].concat());
        for top in [1, 3, 6] {
            let top_s = top.to_string();
            let (_, screened) = audit(
                file.path(),
                &[
                    &base[..],
                    &[
                        "--engine",
                        "approx",
                        "--epsilon",
                        "0.1",
                        "--exact-top",
                        &top_s,
                    ],
                ]
                .concat(),
            );
            agrees(&screened, &walks, &edge, top);
            for (k, seen) in [("solved_exactly", &mut solved), ("closed", &mut closed)] {
                *seen += screened["screen"][k].as_u64().unwrap();
            }
        }
    }
    // Both ways to an exact top N occur: walk-engine solves and intervals that closed.
    assert!(solved > 0 && closed > 0, "solved {solved}, closed {closed}");
}

/// Gates on a screened audit decide as on the exact audit: the exit status, the worst
/// value and the scenario named, for a limit at the exact worst (passes as printed) and
/// just below it (fails), and for the served fraction likewise.
#[test]
fn gates_decide_as_the_exact_audit() {
    let file = TempPath::with_text("exact-top-gate", &random_network(21, 12, 20, 25));
    let base = ["--depth", "1", "--kinds", "links"];
    let (_, walks) = audit(file.path(), &base);
    let worst = ranked(&walks)[0];
    let sf = f(worst, "shortfall");
    assert!(
        sf > 0.0,
        "the generated network should have a short scenario"
    );
    let frac = walks["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| f(x, "served_required") / f(x, "required"))
        .fold(1.0, f64::min);
    let limits = [
        ("--max-shortfall", format!("{sf}")),
        ("--max-shortfall", format!("{}", sf - 0.5)),
        (
            "--min-served-fraction",
            format!("{}", (frac * 1000.0).floor() / 1000.0),
        ),
        (
            "--min-served-fraction",
            format!("{}", (frac * 1000.0).ceil() / 1000.0 + 0.001),
        ),
    ];
    for (flag, limit) in &limits {
        let gate = [&base[..], &[*flag, limit.as_str()]].concat();
        let (code_w, w) = audit(file.path(), &gate);
        let screened_args = [
            &gate[..],
            &["--engine", "approx", "--epsilon", "0.2", "--exact-top", "1"],
        ]
        .concat();
        let (code_a, a) = audit(file.path(), &screened_args);
        assert_eq!(code_a, code_w, "{flag} {limit}");
        assert_eq!(a["gates"], w["gates"], "{flag} {limit}");
    }
}

/// Usage: `--exact-top` needs `--engine approx` and N ≥ 1; `--close` stays refused with
/// the approximate engine.
#[test]
fn exact_top_usage() {
    let f = fixture("small-ring.json");
    for args in [
        &["audit", s(&f), "--exact-top", "3"][..],
        &["audit", s(&f), "--engine", "edge", "--exact-top", "3"],
        &["audit", s(&f), "--engine", "approx", "--exact-top", "0"],
        &[
            "audit",
            s(&f),
            "--engine",
            "approx",
            "--exact-top",
            "3",
            "--close",
        ],
    ] {
        let run = redoubt(args);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
    }
}

/// The text says how many outages were solved exactly and that the rest are intervals.
#[test]
fn text_names_the_screen() {
    let f = fixture("demo-harrowmere.json");
    let run = redoubt(&[
        "audit",
        s(&f),
        "--engine",
        "approx",
        "--epsilon",
        "0.05",
        "--exact-top",
        "2",
        "--quiet",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("Screened (--exact-top 2):"),
        "{}",
        run.stdout
    );
    assert!(
        run.stdout.contains("solved exactly with the walk engine"),
        "{}",
        run.stdout
    );
}
