//! Service chains and gains (`functions`, `sites[].functions`, `demands[].chain`), through
//! the binary:
//!
//! - hand-worked cases, each with its calculation in a comment (common practice, no
//!   source: the arithmetic is the contract's definition applied by hand);
//! - a second formulation written from the input contract (`tests/common/chain_reference.rs`):
//!   one layered LP *per demand* (not aggregated by origin and chain), solved by microlp (a
//!   simplex method, through good_lp) rather than the product's backends, over random small
//!   networks with random chains and gains, for every single-failure scenario;
//! - every audit here runs both engines (the default layered walk engine and `--engine
//!   edge`, the layered edge LP) and requires the same served_required and throughput
//!   from both;
//! - a chain of one gain-1 function against the same file written without `functions`
//!   (the base model the rest of the test suite checks), on the shipped examples;
//! - refusals with their messages.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{assert_close, failed_element, random_net, reference_served};
use common::json::{audit_json, num, scenario, scenarios};
use common::{TempPath, redoubt};
use rand::prelude::*;
use serde_json::{Value, json};

/// Audits `net` (baseline and every single link and site failure, `--detail` so that every
/// scenario lists its cut-off demands) with the default engine
/// (layered walks) and with `--engine edge` (layered edge LP), requires the same
/// served_required, throughput and cut-off list from both in every scenario (not
/// `delivered`: optima with the same served_required may deliver different amounts), and
/// returns the default engine's JSON.
fn audit(net: &Value) -> Value {
    let file = TempPath::with_text("chains", &net.to_string());
    let (run, doc) = audit_json(file.path(), &["--threads", "1", "--detail"]);
    assert!(
        run.stderr.is_empty(),
        "--quiet prints no note: {}",
        run.stderr
    );
    let (_, edge) = audit_json(
        file.path(),
        &["--threads", "1", "--detail", "--engine", "edge"],
    );
    let (walks, edges) = (scenarios(&doc), scenarios(&edge));
    assert_eq!(walks.len(), edges.len());
    for (w, e) in walks.iter().zip(edges) {
        let what = format!("{:?}", common::json::failed_of(w));
        assert_eq!(common::json::failed_of(w), common::json::failed_of(e));
        for field in ["served_required", "throughput"] {
            assert_close(num(w, field), num(e, field), &format!("{field}, {what}"));
        }
        assert_eq!(w["cut_off_demands"], e["cut_off_demands"], "{what}");
    }
    doc
}

fn baseline_served(net: &Value) -> (f64, f64) {
    let doc = audit(net);
    let sc = scenario(&doc, &[]);
    assert_eq!(sc["verification"]["status"], "proven", "{sc}");
    (num(sc, "served_required"), num(sc, "delivered"))
}

/// A path a — b — c — d with `fw` (gain 1) at b and `scrub` (gain `g`) at c; links ab and
/// bc of capacity 10, cd of capacity 3; one demand a→d of volume 10 with chain fw > scrub.
fn two_function_path(fw_capacity: f64, g: f64) -> Value {
    json!({
        "functions": [{"id": "fw", "gain": 1}, {"id": "scrub", "gain": g}],
        "sites": [
            {"id": "a"},
            {"id": "b", "functions": {"fw": fw_capacity}},
            {"id": "c", "functions": {"scrub": 100}},
            {"id": "d"}
        ],
        "links": [
            {"id": "ab", "from": "a", "to": "b", "capacity": 10},
            {"id": "bc", "from": "b", "to": "c", "capacity": 10},
            {"id": "cd", "from": "c", "to": "d", "capacity": 3}
        ],
        "demands": [{"from": "a", "to": "d", "volume": 10, "chain": ["fw", "scrub"]}]
    })
}

#[test]
fn two_function_chain_on_a_path() {
    // Served F (origin units) uses ab and bc at F (before scrub), fw at b at F, scrub at c
    // at F, and cd at g·F after scrub. With g = 1 and fw = 2: F <= min(10, 10, 2, 100, 3)
    // = 2, delivered 2.
    let (served, delivered) = baseline_served(&two_function_path(2.0, 1.0));
    assert_close(served, 2.0, "fw binds");
    assert_close(delivered, 2.0, "gain 1 delivers what is served");
    // With fw = 8 and g = 1: F <= min(10, 10, 8, 100, 3) = 3 (cd binds).
    let (served, _) = baseline_served(&two_function_path(8.0, 1.0));
    assert_close(served, 3.0, "cd binds");
}

#[test]
fn a_gain_of_one_half_halves_link_use_after_the_function() {
    // Same path, fw = 8, scrub gain 0.5: cd carries 0.5·F <= 3, so F <= 6; the others
    // allow 8 (fw). Served 6 origin units, delivered 0.5 · 6 = 3.
    let (served, delivered) = baseline_served(&two_function_path(8.0, 0.5));
    assert_close(served, 6.0, "served in origin units");
    assert_close(delivered, 3.0, "delivered at the destination");
    // Gain 2 doubles it instead: 2·F <= 3, F = 1.5, delivered 3.
    let (served, delivered) = baseline_served(&two_function_path(8.0, 2.0));
    assert_close(served, 1.5, "gain 2");
    assert_close(delivered, 3.0, "gain 2 delivered");
}

/// One-way links a→m (100), m→t (8), t→p (100), p→m (100); `f` (gain `g`) only at p;
/// demand a→t of volume 50 with chain [f].
fn revisit(g: f64) -> Value {
    json!({
        "functions": [{"id": "f", "gain": g}],
        "sites": [{"id": "a"}, {"id": "m"}, {"id": "t"}, {"id": "p", "functions": {"f": 100}}],
        "links": [
            {"id": "am", "from": "a", "to": "m", "capacity": 100, "one_way": true},
            {"id": "mt", "from": "m", "to": "t", "capacity": 8, "one_way": true},
            {"id": "tp", "from": "t", "to": "p", "capacity": 100, "one_way": true},
            {"id": "pm", "from": "p", "to": "m", "capacity": 100, "one_way": true}
        ],
        "demands": [{"from": "a", "to": "t", "volume": 50, "chain": ["f"]}]
    })
}

#[test]
fn the_only_walk_crosses_a_link_before_and_after_the_function() {
    // The only walk is a→m→t→p (f) →m→t: m→t carries F before f and g·F after it.
    // g = 1: 2F <= 8, F = 4.
    let (served, _) = baseline_served(&revisit(1.0));
    assert_close(served, 4.0, "link crossed twice, gain 1");
    // g = 0.5: F + 0.5F <= 8, F = 16/3, delivered 8/3.
    let (served, delivered) = baseline_served(&revisit(0.5));
    assert_close(served, 16.0 / 3.0, "link crossed twice, gain 0.5");
    assert_close(delivered, 8.0 / 3.0, "delivered, gain 0.5");
}

#[test]
fn plain_traffic_competes_with_a_chain() {
    // Path a — b — c (capacity 10 each way); f only at c. The chained demand a→b (required
    // 5) must go a→b→c (f) →b: a→b, b→c and c→b each carry F1. The plain demand a→b
    // (required 8, no chain) uses a→b only: F1 + F2 <= 10 on a→b, so served 10 of 13,
    // shortfall 3. Failing link bc cuts the chained demand off (no way to f): served 8.
    let net = json!({
        "functions": [{"id": "f", "gain": 1}],
        "sites": [{"id": "a"}, {"id": "b"}, {"id": "c", "functions": {"f": 100}}],
        "links": [
            {"id": "ab", "from": "a", "to": "b", "capacity": 10},
            {"id": "bc", "from": "b", "to": "c", "capacity": 10}
        ],
        "demands": [
            {"id": "chained", "from": "a", "to": "b", "volume": 5, "chain": ["f"]},
            {"id": "plain", "from": "a", "to": "b", "volume": 8}
        ]
    });
    let doc = audit(&net);
    let base = scenario(&doc, &[]);
    assert_close(num(base, "served_required"), 10.0, "baseline served");
    assert_close(num(base, "shortfall"), 3.0, "baseline shortfall");
    let cut = scenario(&doc, &["link:bc"]);
    assert_close(num(cut, "served_required"), 8.0, "bc failed");
    assert_eq!(cut["cut_off_demands"], json!(["chained"]), "{cut}");
    // One named scenario (`--fail`) solves its baseline on its own: the same 10.
    let file = TempPath::with_text("chains-fail", &net.to_string());
    let (_, doc) = audit_json(file.path(), &["--fail", "link:bc"]);
    assert_close(
        num(&doc["baseline"], "served_required"),
        10.0,
        "--fail baseline",
    );
    assert_close(
        num(&doc["baseline"], "delivered"),
        10.0,
        "--fail baseline delivered",
    );
    assert_close(
        num(scenario(&doc, &["link:bc"]), "served_required"),
        8.0,
        "--fail bc",
    );
}

#[test]
fn the_reversed_chain_gives_another_answer() {
    // Path a — b — c — d (ab 100, bc 6, cd 100); f1 (gain 0.5) only at b, f2 (gain 1)
    // only at c; one demand a→d of volume 20.
    // Chain f1 > f2: a→b (f1) →c (f2) →d; b→c carries 0.5F <= 6: F = 12.
    // Chain f2 > f1: a→b→c (f2) →b (f1) →c→d; b→c carries F (before f2) + 0.5F (after
    // f1) <= 6: F = 4 (c→b carries F <= 6, not binding).
    let net = |chain: [&str; 2]| {
        json!({
            "functions": [{"id": "f1", "gain": 0.5}, {"id": "f2", "gain": 1}],
            "sites": [
                {"id": "a"},
                {"id": "b", "functions": {"f1": 100}},
                {"id": "c", "functions": {"f2": 100}},
                {"id": "d"}
            ],
            "links": [
                {"id": "ab", "from": "a", "to": "b", "capacity": 100},
                {"id": "bc", "from": "b", "to": "c", "capacity": 6},
                {"id": "cd", "from": "c", "to": "d", "capacity": 100}
            ],
            "demands": [{"from": "a", "to": "d", "volume": 20, "chain": chain}]
        })
    };
    let (forward, _) = baseline_served(&net(["f1", "f2"]));
    let (reversed, _) = baseline_served(&net(["f2", "f1"]));
    assert_close(forward, 12.0, "f1 > f2");
    assert_close(reversed, 4.0, "f2 > f1");
}

// ---------------------------------------------------------------------------------------
// Reference: a per-demand layered LP on microlp.
// ---------------------------------------------------------------------------------------

#[test]
fn random_chains_match_a_per_demand_reference_under_every_single_failure() {
    let mut rng = StdRng::seed_from_u64(0xC4A1);
    for instance in 0..12 {
        let t = random_net(&mut rng);
        let doc = audit(&t.to_json());
        let mut checked = 0;
        for sc in scenarios(&doc) {
            let failed = common::json::failed_of(sc);
            let (site, link) = failed_element(sc);
            let want = reference_served(&t, site, link, false);
            assert_eq!(sc["verification"]["status"], "proven", "{sc}");
            assert_close(
                num(sc, "served_required"),
                want,
                &format!("instance {instance}, failed {failed:?}"),
            );
            let want = reference_served(&t, site, link, true);
            assert_close(
                num(sc, "throughput"),
                want,
                &format!("throughput, instance {instance}, failed {failed:?}"),
            );
            checked += 1;
        }
        assert_eq!(
            checked,
            1 + t.capacity.len() + t.links.len(),
            "baseline and every single link and site failure"
        );
    }
}

// ---------------------------------------------------------------------------------------
// One gain-1 function is the base model.
// ---------------------------------------------------------------------------------------

#[test]
fn one_gain_one_function_equals_the_base_model_on_the_examples() {
    let mut compared = 0;
    for name in ["small-ring.json", "demo-harrowmere.json"] {
        let path = common::fixture(name);
        let base: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        let (_, plain) = audit_json(common::s(&path), &["--threads", "1", "--engine", "edge"]);
        let chained = audit(&chain_reference::with_one_function(&base));
        for sc in scenarios(&plain) {
            let failed = common::json::failed_of(sc);
            let names: Vec<&str> = failed.iter().map(String::as_str).collect();
            let other = scenario(&chained, &names);
            for field in ["served_required", "shortfall", "stranded", "throughput"] {
                assert_close(
                    num(other, field),
                    num(sc, field),
                    &format!("{name} {failed:?} {field}"),
                );
            }
            assert_close(
                num(other, "delivered"),
                num(sc, "served_required"),
                "gain 1 delivers what it serves",
            );
            compared += 1;
        }
    }
    assert!(compared > 10, "the examples' scenarios were compared");
}

// ---------------------------------------------------------------------------------------
// Refusals.
// ---------------------------------------------------------------------------------------

fn refused(net: &Value, needles: &[&str]) {
    let file = TempPath::with_text("chains-bad", &net.to_string());
    let run = redoubt(&["check", file.path()]);
    assert_eq!(run.code, 2, "refused with status 2: {}", run.stderr);
    for n in needles {
        assert!(run.stderr.contains(n), "{n:?} in {}", run.stderr);
    }
}

#[test]
fn chain_fields_are_validated() {
    let base = two_function_path(8.0, 0.5);
    let mut bad = base.clone();
    bad["demands"][0]["chain"] = json!(["fw", "scrubb"]);
    refused(
        &bad,
        &["demands[0]", "chain", "scrubb", "did you mean \"scrub\""],
    );
    let mut bad = base.clone();
    bad["sites"][1]["functions"] = json!({"fx": 3});
    refused(&bad, &["sites[1]", "fx", "did you mean \"fw\""]);
    let mut bad = base.clone();
    bad["functions"][1]["gain"] = json!(0);
    refused(&bad, &["functions[1]", "gain", "> 0"]);
    let mut bad = base.clone();
    bad["sites"][2]["functions"] = json!({"scrub": -1});
    refused(&bad, &["sites[2]", "scrub", ">= 0", "-1"]);
    let mut bad = base.clone();
    bad["sites"][0]["processing"] = json!(5);
    refused(
        &bad,
        &[
            "sites[0]",
            "processing",
            "sites[].functions",
            "sites[].expand",
        ],
    );
    let mut bad = base.clone();
    bad["sites"][0]["expand_cost"] = json!(5);
    refused(&bad, &["expand_cost", "sites[].expand"]);
    let mut bad = base.clone();
    bad.as_object_mut().unwrap().remove("functions");
    bad["sites"][1].as_object_mut().unwrap().remove("functions");
    bad["sites"][2].as_object_mut().unwrap().remove("functions");
    refused(&bad, &["demands[0]", "chain", "functions"]);
}

#[test]
fn check_summarises_functions_and_chains() {
    let file = TempPath::with_text("chains-check", &two_function_path(8.0, 0.5).to_string());
    let run = redoubt(&["check", file.path()]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    for needle in [
        "functions (2)",
        "fw — gain 1; capacity 8: b 8",
        "scrub — gain 0.5",
        "fw > scrub — 1 demand, required 10, total gain 0.5",
    ] {
        assert!(run.stdout.contains(needle), "{needle:?} in {}", run.stdout);
    }
}

/// `audit --why` on a chain file explains the worst scenario. Hand calculation on the path
/// a — b — c — d: every single failure of a link or of b or c cuts the only walk through
/// fw (at b) and scrub (at c), so the worst scenarios serve 0 of the 10 required; ties go
/// by name, so `link:ab` is explained, with the demand a→d cut off and both functions
/// unused (no demand can reach them: price —).
#[test]
fn why_explains_the_worst_chain_scenario() {
    let file = TempPath::with_text("chains-why", &two_function_path(8.0, 0.5).to_string());
    let run = redoubt(&["audit", file.path(), "--why"]);
    assert_eq!(run.code, 0, "no gate given: {}", run.stderr);
    let flat = run.stdout.split_whitespace().collect::<Vec<_>>().join(" ");
    for needle in [
        "Why link:ab: serves 0 of 10 units surviving required (10 short",
        "a→d #1 a → d 10 0 10 cut off",
        "fw b 0 8 0.0% —",
        "scrub c 0 100 0.0% —",
    ] {
        assert!(flat.contains(needle), "{needle:?} in {}", run.stdout);
    }
}

/// `compare` names what changed in the functions, field by field, as it does for links
/// (the input contract: the list of file changes, "link:X capacity 100 → 10"): on the
/// chains demo with the DPI at quillhaven raised 60 → 70 and the scrub gain lowered
/// 0.9 → 0.8, exactly those two rows, in the text and in `file_changes`.
#[test]
fn compare_lists_function_changes() {
    let before = common::fixture("demo-quillhaven-chains.json");
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&before).unwrap()).unwrap();
    for site in doc["sites"].as_array_mut().unwrap() {
        if site["id"] == "quillhaven" {
            site["functions"]["dpi"] = json!(70);
        }
    }
    for f in doc["functions"].as_array_mut().unwrap() {
        if f["id"] == "scrub" {
            f["gain"] = json!(0.8);
        }
    }
    let after = TempPath::with_text("chains-compare-after", &doc.to_string());
    let (run, cmp) = common::json::compare_json(before.to_str().unwrap(), after.path());
    assert_eq!(run.code, 0, "{}", run.stderr);
    let flat = run.stdout.split_whitespace().collect::<Vec<_>>().join(" ");
    for needle in [
        "function:scrub gain 0.9 0.8",
        "site:quillhaven function:dpi capacity 60 70",
    ] {
        assert!(flat.contains(needle), "{needle:?} in {}", run.stdout);
    }
    let changes = cmp["file_changes"].clone();
    let rows: Vec<(String, String, f64, f64)> = changes
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            (
                c["element"].as_str().unwrap().to_string(),
                c["field"].as_str().unwrap().to_string(),
                c["before"].as_f64().unwrap(),
                c["after"].as_f64().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        rows,
        vec![
            ("function:scrub".into(), "gain".into(), 0.9, 0.8),
            (
                "site:quillhaven function:dpi".into(),
                "capacity".into(),
                60.0,
                70.0
            ),
        ]
    );
}
