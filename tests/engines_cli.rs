//! The engines through the binary: the edge LP and the walk engine on hand-computed and demo networks, results independent of the thread count, "unlimited" capacities written as 1e12, the streamed JSON against the in-memory document.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use common::json::*;
use common::*;
use serde_json::Value;

/// Source: the README (results do not depend on the thread count). Byte-identical JSON with
/// --threads 1 and --threads 2: the demo at depth 2 (862 scenarios; measured about 30 s
/// single-threaded with the test profile's opt-level 1, about 5 minutes at opt-level 0)
/// and the small ring at depth 2.
#[test]
fn thread_count_does_not_change_the_json() {
    let mut demo_texts = Vec::new();
    for threads in ["1", "2"] {
        let out = TempPath::new("demo-d2", "json");
        let run = redoubt(&[
            "audit",
            s(&demo()),
            "--depth",
            "2",
            "--threads",
            threads,
            "--quiet",
            "--json",
            out.path(),
        ]);
        assert_eq!(run.code, 0, "{}", run.stderr);
        demo_texts.push(std::fs::read_to_string(&out.0).expect("--json file written"));
    }
    let fx = read_fixture(&demo());
    let pool = fx["links"].as_array().unwrap().len()
        + fx["sites"].as_array().unwrap().len()
        + group_members(&fx).len();
    let doc: Value = serde_json::from_str(&demo_texts[0]).expect("JSON");
    // 1 + n + C(n, 2) scenarios over the fixture's n elements, so the full run did happen.
    assert_eq!(scenarios(&doc).len(), 1 + pool + pool * (pool - 1) / 2);
    assert!(
        demo_texts[0] == demo_texts[1],
        "demo depth 2: --threads 1 and 2 differ"
    );

    let ring = fixture("small-ring.json");
    let mut texts = Vec::new();
    for threads in ["1", "2"] {
        let out = TempPath::new("ring-d2", "json");
        let run = redoubt(&[
            "audit",
            s(&ring),
            "--depth",
            "2",
            "--threads",
            threads,
            "--quiet",
            "--json",
            out.path(),
        ]);
        assert_eq!(run.code, 0, "{}", run.stderr);
        texts.push(std::fs::read_to_string(&out.0).expect("--json file written"));
    }
    assert!(
        texts[0] == texts[1],
        "small ring depth 2: --threads 1 and 2 differ"
    );
}

/// Source: hand computation in PATH_NET's table (common practice, no source), through the
/// edge engine (`hand_computed_path_network_depth_1` runs the default walk engine).
#[test]
fn edge_engine_hand_computed_path_network_depth_1() {
    let f = TempPath::with_text("path-edge", PATH_NET);
    let (_, doc) = audit_json(f.path(), &["--depth", "1", "--engine", "edge"]);
    assert_eq!(scenarios(&doc).len(), PATH_EXPECTED.len());
    for row in PATH_EXPECTED {
        check_row(scenario(&doc, row.0), row);
    }
}

/// Source: the product's edge LP (clarabel), an independent formulation of the same
/// optimum: on the demo at depth 2 every scenario's served_required, shortfall, stranded,
/// throughput and upper bound agree; and the walk engine's JSON is byte-identical with
/// --threads 1 and 2 (README: results do not depend on the thread count).
#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
fn walk_engine_agrees_with_edge_on_demo_depth_2() {
    let run = |engine: &str, threads: &str| {
        audit_json(
            s(&demo()),
            &["--depth", "2", "--engine", engine, "--threads", threads],
        )
        .1
    };
    let edge = run("edge", "2");
    let walks = run("walks", "1");
    let walks2 = run("walks", "2");
    assert_eq!(walks, walks2, "walk engine: --threads 1 and 2 differ");
    let (e, w) = (scenarios(&edge), scenarios(&walks));
    assert_eq!(e.len(), w.len());
    let mut short = 0;
    for a in e {
        let names = failed_of(a);
        let names: Vec<&str> = names.iter().map(String::as_str).collect();
        let b = scenario(&walks, &names);
        for field in [
            "served_required",
            "shortfall",
            "stranded",
            "throughput",
            "upper_bound",
        ] {
            assert_near(
                num(b, field),
                num(a, field),
                &format!("{:?} {field}", failed_of(a)),
            );
        }
        short += usize::from(num(a, "shortfall") > 1e-6);
    }
    // Some scenarios must fall short, or only "everything served" would be compared.
    assert!(short >= 10, "only {short} scenarios with a shortfall");
}

/// The demo with its first link (harrow-millbrook, capacity 100) written as `cap`.
fn demo_with_first_link(cap: f64) -> TempPath {
    let mut fx = read_fixture(&demo());
    fx["links"][0]["capacity"] = serde_json::json!(cap);
    TempPath::with_text("demo-wide", &fx.to_string())
}

/// Source: a reproduced defect (values from the plain demo: group:east-pole-route 20
/// short, site:fenwick 8, site:millbrook 14) and the LP itself: raising the capacity of a
/// link can only raise served_required, and the demo's own results never saturate
/// harrow-millbrook beyond what 100 carries, so writing 1e12 or 1e9 ("unlimited") changes
/// no scenario. Once, 8 of 42 scenarios lost their shortfall and fenwick was served above
/// its own upper bound with gap 0. Both engines, every scenario proven, bounds never
/// crossed, and a gate of 5 fails on the 20-unit shortfall.
#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
fn unlimited_capacity_written_as_1e12_changes_no_scenario() {
    let (_, plain) = audit_json(s(&demo()), &["--engine", "edge"]);
    for (name, want) in [
        (&["group:east-pole-route"][..], 20.0),
        (&["site:fenwick"][..], 8.0),
        (&["site:millbrook"][..], 14.0),
    ] {
        assert_near(num(scenario(&plain, name), "shortfall"), want, "plain demo");
    }
    for cap in [1e12, 1e9] {
        let f = demo_with_first_link(cap);
        for engine in ["edge", "walks"] {
            let (_, doc) = audit_json(f.path(), &["--engine", engine]);
            let what = format!("capacity {cap:e}, engine {engine}");
            assert_eq!(scenarios(&doc).len(), scenarios(&plain).len(), "{what}");
            for (a, b) in scenarios(&plain).iter().zip(scenarios(&doc)) {
                assert_eq!(failed_of(a), failed_of(b), "{what}");
                for field in ["served_required", "shortfall", "throughput"] {
                    assert_near(num(b, field), num(a, field), &format!("{what} {field}"));
                }
                // The product's own verdict; its bounds are not compared with served here
                // (a proven result lies within them by definition). The outside check is
                // the equality above with the plain demo's values, which the LP argument
                // in this test's comment implies.
                assert_eq!(b["verification"]["status"], "proven", "{what}: {b}");
            }
            let gate = redoubt(&[
                "audit",
                f.path(),
                "--quiet",
                "--engine",
                engine,
                "--max-shortfall",
                "5",
            ]);
            assert_eq!(
                gate.code, 1,
                "{what}: the 20-unit shortfall must fail the gate"
            );
        }
    }
}

/// Source: the library's in-memory path (`audit_network_with` keeps every evaluation in
/// full and `audit_json` builds the document from them), against the binary, which keeps
/// thin evaluations and streams the JSON from its journal: the bytes must be equal
/// (`--detail`: the in-memory document carries every scenario's per-demand lists).
#[test]
fn streamed_json_equals_the_in_memory_document() {
    let demo = demo();
    let out = TempPath::new("streamed", "json");
    let run = redoubt(&[
        "audit",
        s(&demo),
        "--depth",
        "2",
        "--quiet",
        "--detail",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let net = redoubt::load(&demo).unwrap();
    let scenarios = redoubt::scenario::enumerate(&net, redoubt::scenario::Kinds::ALL, 2);
    let (audit, baseline) = redoubt::audit_network_with(
        &net,
        scenarios,
        redoubt::audit::RunOptions::default(),
        redoubt::solve::Engine::Walks,
    )
    .unwrap();
    let doc = redoubt::report::json::audit_json(&net, &audit, &baseline, None);
    let mut want = Vec::new();
    redoubt::report::json::write(&mut want, &doc).unwrap();
    assert!(
        std::fs::read(&out.0).unwrap() == want,
        "streamed JSON differs from the in-memory document"
    );
}
