//! Routing as deployed (`--routing nearest|steered`) on files with `functions` (service
//! chains and gains), through the binary:
//!
//! - hand-worked cases, each with its calculation in a comment (common practice, no
//!   source: the contract's "Routing as deployed" and "Service chains" rules applied by
//!   hand): a two-function chain whose nearest sequences tie and split, steered using a far
//!   sequence with spare capacity, a gain of 0.5 halving the load of the leg after it;
//! - an independent reference (`tests/common/chain_reference.rs`, `reference_routed`):
//!   leg distances from petgraph's `dijkstra`, the per-hop equal split computed in the test,
//!   every sequence of sites enumerated by brute force, and the fixed-route LP solved by
//!   microlp (a second solver), over random chain networks with random metrics, for every
//!   single-failure scenario (served_required and throughput, both routings); steered never
//!   above the per-demand layered best re-route on microlp (`reference_served`), nearest
//!   never above steered;
//! - a chain of one gain-1 function against the same file without `functions` under both
//!   routings, on the shipped examples.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{
    assert_close, failed_element, random_net, reference_routed, reference_served, with_metrics,
};
use common::json::{audit_json, num, scenario, scenarios};
use common::{TempPath, redoubt};
use rand::prelude::*;
use serde_json::{Value, json};

/// Audits `net` under `--routing MODE` (baseline and every single failure) and returns the
/// JSON document.
fn routed(net: &Value, mode: &str) -> Value {
    let file = TempPath::with_text("chains-routing", &net.to_string());
    let (_, doc) = audit_json(file.path(), &["--threads", "1", "--routing", mode]);
    doc
}

fn baseline(doc: &Value) -> &Value {
    scenario(doc, &[])
}

/// Sites o, a, b, c, t, e; functions f1, f2 (gain 1). f1 runs at a (4), b (4) and e (100);
/// f2 at c (100). Links of capacity 100 and metric 1: o-a, o-b, a-c, b-c, c-t; o-e and e-c
/// of metric 5. One demand o → t of 10 with chain [f1, f2].
fn diamond() -> Value {
    let link = |id: &str, a: &str, b: &str, metric: u32| json!({"id": id, "from": a, "to": b, "capacity": 100, "metric": metric});
    json!({
        "functions": [{"id": "f1", "gain": 1}, {"id": "f2", "gain": 1}],
        "sites": [
            {"id": "o"}, {"id": "a", "functions": {"f1": 4}}, {"id": "b", "functions": {"f1": 4}},
            {"id": "c", "functions": {"f2": 100}}, {"id": "t"},
            {"id": "e", "functions": {"f1": 100}}
        ],
        "links": [
            link("oa", "o", "a", 1), link("ob", "o", "b", 1), link("ac", "a", "c", 1),
            link("bc", "b", "c", 1), link("ct", "c", "t", 1), link("oe", "o", "e", 5),
            link("ec", "e", "c", 5)
        ],
        "demands": [{"from": "o", "to": "t", "volume": 10, "chain": ["f1", "f2"]}]
    })
}

/// Nearest, by hand: the sequences (f1 at v, f2 at c) have lengths d(o,v) + d(v,c) + d(c,t):
/// a: 1 + 1 + 1 = 3, b: 1 + 1 + 1 = 3, e: 5 + 5 + 1 = 11 (o-a-c-e is 1 + 1 + 5 = 7 > 5, and
/// e-o-a-c is 7 > 5). a and b tie: F/2 each, so f1 at a takes F/2 <= 4 and at b F/2 <= 4:
/// F = 8, shortfall 2. The offered load (F = 10) puts 5 on f1 at a and at b, 5/4 = 125 %.
/// Steered may send the remaining 2 through e (f1 there has 100, links o-e, e-c 100): 10.
#[test]
fn nearest_splits_tied_sequences_and_steered_uses_the_far_one() {
    let near = routed(&diamond(), "nearest");
    let b = baseline(&near);
    assert_close(num(b, "served_required"), 8.0, "nearest");
    assert_close(num(b, "shortfall"), 2.0, "nearest shortfall");
    assert_close(num(b, "max_site_utilisation"), 1.25, "offered 5 on f1 of 4");
    let fa = b["functions"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["site"] == "a" && f["function"] == "f1")
        .unwrap();
    assert_close(num(fa, "load"), 4.0, "f1 at a carries half of 8");
    let steer = routed(&diamond(), "steered");
    let b = baseline(&steer);
    assert_close(num(b, "served_required"), 10.0, "steered");
    let fe = b["functions"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["site"] == "e" && f["function"] == "f1")
        .unwrap();
    // a and b take at most 4 each: at least 2 goes through e.
    assert!(num(fe, "load") >= 2.0 - 1e-6, "{fe}");
    // Link failures, by hand. oa down: d(o,a) = o-b-c-a = 3, so a's sequence is 3 + 1 + 1 =
    // 5 > b's 3: nearest is b alone, F <= 4. Steered: a (4, via o-b-c-a and back a-c), b
    // (4) and e: 10 (o-b carries the a and b shares, 8 of 100).
    let failed = scenario(&near, &["link:oa"]);
    assert_close(num(failed, "served_required"), 4.0, "nearest without oa");
    let failed = scenario(&steer, &["link:oa"]);
    assert_close(num(failed, "served_required"), 10.0, "steered without oa");
}

/// A path o - v - t; function h of gain 0.5 at v (capacity 100); link o-v of capacity 100,
/// v-t of capacity 3; one demand o → t of 10 with chain [h]. By hand: the leg v → t carries
/// 0.5 per origin unit, so 0.5 F <= 3: F = 6 (without the gain it would be 3), delivering 3.
/// The offered load (F = 10) puts 5 on v → t: utilisation 5/3.
#[test]
fn a_gain_of_one_half_halves_the_load_after_the_function() {
    let net = json!({
        "functions": [{"id": "h", "gain": 0.5}],
        "sites": [{"id": "o"}, {"id": "v", "functions": {"h": 100}}, {"id": "t"}],
        "links": [
            {"id": "ov", "from": "o", "to": "v", "capacity": 100},
            {"id": "vt", "from": "v", "to": "t", "capacity": 3}
        ],
        "demands": [{"from": "o", "to": "t", "volume": 10, "chain": ["h"]}]
    });
    for mode in ["nearest", "steered"] {
        let doc = routed(&net, mode);
        let b = baseline(&doc);
        assert_close(num(b, "served_required"), 6.0, mode);
        assert_close(num(b, "delivered"), 3.0, mode);
        assert_close(num(b, "max_link_utilisation"), 5.0 / 3.0, mode);
    }
}

/// Random chain networks (`random_net`) with random metrics 1..3, every single failure,
/// against the brute-force reference on microlp.
#[test]
fn random_chains_match_a_brute_force_reference_under_every_single_failure() {
    let mut rng = StdRng::seed_from_u64(0x5EC7);
    for instance in 0..10 {
        let t = random_net(&mut rng);
        let metric: Vec<u64> = t.links.iter().map(|_| rng.random_range(1..=3)).collect();
        let net = with_metrics(&t, &metric);
        let near = routed(&net, "nearest");
        let steer = routed(&net, "steered");
        let mut checked = 0;
        for (sn, ss) in scenarios(&near).iter().zip(scenarios(&steer)) {
            assert_eq!(sn["failed"], ss["failed"]);
            let (site, link) = failed_element(sn);
            let what = format!("instance {instance}, failed {}", sn["failed"]);
            for (sc, steered) in [(sn, false), (ss, true)] {
                assert_eq!(sc["verification"]["status"], "proven", "{what}: {sc}");
                let want = reference_routed(&t, &metric, site, link, steered, false);
                assert_close(num(sc, "served_required"), want, &what);
                let want = reference_routed(&t, &metric, site, link, steered, true);
                assert_close(num(sc, "throughput"), want, &format!("throughput, {what}"));
            }
            let best = reference_served(&t, site, link, false);
            let (n, s) = (num(sn, "served_required"), num(ss, "served_required"));
            assert!(
                s <= best + 1e-6 * best.max(1.0),
                "{what}: steered {s} > best {best}"
            );
            assert!(
                n <= s + 1e-6 * s.max(1.0),
                "{what}: nearest {n} > steered {s}"
            );
            checked += 1;
        }
        assert_eq!(checked, 1 + t.capacity.len() + t.links.len(), "{instance}");
    }
}

/// `file` rewritten with one function `proc` of gain 1 (`processing` becomes
/// `functions.proc`, every demand gets the chain `["proc"]`).
fn as_one_function(file: &Value) -> Value {
    let mut out = file.clone();
    out["functions"] = json!([{"id": "proc", "gain": 1}]);
    for s in out["sites"].as_array_mut().unwrap() {
        let o = s.as_object_mut().unwrap();
        let p = o.remove("processing").unwrap_or(json!(0));
        for k in ["expand_cost", "expand_max", "expand_step"] {
            o.remove(k);
        }
        o.insert("functions".into(), json!({"proc": p}));
    }
    for d in out["demands"].as_array_mut().unwrap() {
        d["chain"] = json!(["proc"]);
    }
    out
}

/// One gain-1 function per demand is the plain model: the same routes (one step at a
/// processing site), so the same served amounts and offered utilisations.
#[test]
fn one_gain_one_function_equals_the_plain_routed_model() {
    let mut compared = 0;
    for name in ["small-ring.json", "demo-harrowmere.json"] {
        let path = common::fixture(name);
        let base: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        for mode in ["nearest", "steered"] {
            let (_, plain) = audit_json(common::s(&path), &["--threads", "1", "--routing", mode]);
            let chained = routed(&as_one_function(&base), mode);
            for sc in scenarios(&plain) {
                let failed = common::json::failed_of(sc);
                let names: Vec<&str> = failed.iter().map(String::as_str).collect();
                let other = scenario(&chained, &names);
                for field in [
                    "served_required",
                    "shortfall",
                    "stranded",
                    "throughput",
                    "max_link_utilisation",
                    "max_site_utilisation",
                    "best_served_required",
                ] {
                    assert_close(
                        num(other, field),
                        num(sc, field),
                        &format!("{name} {mode} {failed:?} {field}"),
                    );
                }
                assert_eq!(other["overloaded"], sc["overloaded"], "{name} {failed:?}");
                compared += 1;
            }
        }
    }
    assert!(compared > 20, "the examples' scenarios were compared");
}

/// Headroom by hand. `diamond`, nearest: the offered load (λ = 1) puts 5 on f1 at a and at
/// b (capacity 4): λ = 4/5 = 0.8; without link o-a only b is nearest, 10 λ <= 4: 0.4.
/// Steered: f1 has 4 + 4 + 100 = 108 in all, but every unit crosses c-t (100) and f2 at c
/// (100): 10 λ <= 100, λ = 10 (reached: 4 via a, 4 via b, 92 via e, links within 100).
/// The gain-0.5 path: v-t carries 0.5 · 10 λ <= 3, λ = 0.6 under both routings.
#[test]
fn headroom_under_the_deployed_routings_by_hand() {
    let with_headroom = |net: &Value, mode: &str| {
        let file = TempPath::with_text("chains-routing-headroom", &net.to_string());
        let (_, doc) = audit_json(
            file.path(),
            &["--threads", "1", "--routing", mode, "--headroom"],
        );
        doc
    };
    let near = with_headroom(&diamond(), "nearest");
    assert_close(num(baseline(&near), "headroom"), 0.8, "nearest");
    assert_close(
        num(scenario(&near, &["link:oa"]), "headroom"),
        0.4,
        "nearest, oa down",
    );
    let steer = with_headroom(&diamond(), "steered");
    assert_close(num(baseline(&steer), "headroom"), 10.0, "steered");
    let path = json!({
        "functions": [{"id": "h", "gain": 0.5}],
        "sites": [{"id": "o"}, {"id": "v", "functions": {"h": 100}}, {"id": "t"}],
        "links": [
            {"id": "ov", "from": "o", "to": "v", "capacity": 100},
            {"id": "vt", "from": "v", "to": "t", "capacity": 3}
        ],
        "demands": [{"from": "o", "to": "t", "volume": 10, "chain": ["h"]}]
    });
    for mode in ["nearest", "steered"] {
        let doc = with_headroom(&path, mode);
        assert_close(num(baseline(&doc), "headroom"), 0.6, mode);
    }
}

/// On random chain networks, headroom and shortfall agree under both routings: a scenario
/// with a surviving demand is short exactly when its headroom is below 1 (by the
/// definition of the headroom, common practice, no source), and the steered headroom is
/// never below the nearest one (nearest's split is one steered choice).
#[test]
fn random_chain_headroom_agrees_with_the_shortfall() {
    let mut rng = StdRng::seed_from_u64(0x4EAD);
    for instance in 0..4 {
        let t = random_net(&mut rng);
        let metric: Vec<u64> = t.links.iter().map(|_| rng.random_range(1..=3)).collect();
        let file = TempPath::with_text("chains-routing-hr", &with_metrics(&t, &metric).to_string());
        let run = |mode: &str| {
            audit_json(
                file.path(),
                &["--threads", "1", "--routing", mode, "--headroom"],
            )
            .1
        };
        let (near, steer) = (run("nearest"), run("steered"));
        for (sn, ss) in scenarios(&near).iter().zip(scenarios(&steer)) {
            let what = format!("instance {instance}, failed {}", sn["failed"]);
            for sc in [sn, ss] {
                let Some(h) = sc["headroom"].as_f64() else {
                    continue;
                };
                let short = num(sc, "shortfall") > 1e-6;
                assert_eq!(short, h < 1.0 - 1e-6, "{what}: headroom {h}, {sc}");
            }
            if let (Some(a), Some(b)) = (sn["headroom"].as_f64(), ss["headroom"].as_f64()) {
                assert!(
                    a <= b * (1.0 + 1e-6) + 1e-9,
                    "{what}: nearest {a} > steered {b}"
                );
            }
        }
    }
}

/// Sites o, a, c, t, e; f1 at a (4, more at 5 a unit), none at e (1 a unit), f2 at c
/// (100); links of capacity 100: o-a, a-c, c-t of metric 1, o-e, e-c of metric 5; one
/// demand o → t of 10 with chain [f1, f2].
fn far_buy() -> Value {
    let link = |id: &str, a: &str, b: &str, metric: u32| json!({"id": id, "from": a, "to": b, "capacity": 100, "metric": metric});
    json!({
        "functions": [{"id": "f1", "gain": 1}, {"id": "f2", "gain": 1}],
        "sites": [
            {"id": "o"},
            {"id": "a", "functions": {"f1": 4}, "expand": {"f1": {"cost": 5, "max": 10}}},
            {"id": "c", "functions": {"f2": 100}}, {"id": "t"},
            {"id": "e", "expand": {"f1": {"cost": 1, "max": 10}}}
        ],
        "links": [
            link("oa", "o", "a", 1), link("ac", "a", "c", 1), link("ct", "c", "t", 1),
            link("oe", "o", "e", 5), link("ec", "e", "c", 5)
        ],
        "demands": [{"from": "o", "to": "t", "volume": 10, "chain": ["f1", "f2"]}]
    })
}

/// By hand: e runs no f1, so the only sequence is (a, c) and steered serves 4 (short 6).
/// f1 bought at e makes (e, c) a sequence (legs o → e, e → c of metric 5 each, c → t; all
/// links 100), so the cheapest closing buys 6 at e for 6 × 1 = 6 (at a it would cost 30).
/// The plan covers every single failure too: with site a down only e can take f1 (10 at e,
/// its max), with site e down only a (10 − 4 = 6 at a, 30); every other failure needs at
/// most what the baseline needs or cuts the demand off (site o, c, t, link c-t). So the
/// plan buys 10 at e and 6 at a: 10 + 30 = 40; applied, the steered audit serves 10.
/// Nearest refuses to buy (a purchase changes which sequences are nearest).
#[test]
fn steered_buys_function_capacity_at_a_far_site() {
    let net = far_buy();
    let file = TempPath::with_text("chains-routing-buy", &net.to_string());
    let (_, doc) = audit_json(
        file.path(),
        &["--threads", "1", "--routing", "steered", "--close"],
    );
    let b = baseline(&doc);
    assert_close(num(b, "shortfall"), 6.0, "steered shortfall");
    let c = &b["closing"];
    assert_close(num(c, "cost"), 6.0, "closing cost");
    assert_close(num(&c["add_functions"]["e"], "f1"), 6.0, "6 of f1 at e");
    assert_eq!(c["verified"], true, "{c}");
    let out = TempPath::new("chains-routing-plan", "json");
    let applied = TempPath::new("chains-routing-applied", "json");
    let run = redoubt(&[
        "plan",
        file.path(),
        "--routing",
        "steered",
        "--quiet",
        "--json",
        out.path(),
        "--apply",
        applied.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let plan = out.read_json();
    assert_close(num(&plan["plan"], "cost"), 40.0, "plan cost");
    let bought = &plan["plan"]["add_functions"];
    assert_close(num(&bought["e"], "f1"), 10.0, "plan at e");
    assert_close(num(&bought["a"], "f1"), 6.0, "plan at a");
    let (_, after) = audit_json(applied.path(), &["--threads", "1", "--routing", "steered"]);
    assert_close(
        num(baseline(&after), "served_required"),
        10.0,
        "after --apply",
    );
    for args in [
        vec!["plan", file.path(), "--routing", "nearest"],
        vec!["audit", file.path(), "--routing", "nearest", "--close"],
    ] {
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
        assert!(run.stderr.contains("nearest"), "{}", run.stderr);
    }
}

/// With `matrices`, every (scenario, matrix) pair of a routed chain audit equals the audit
/// of a file whose only demands are that matrix (the contract's "Several traffic
/// matrices": each pair is the outage under that matrix alone). The quillhaven demo with a
/// second, invented matrix of every demand's volume and required times 1.3.
#[test]
fn every_matrix_equals_the_file_with_that_matrix_alone() {
    let path = common::fixture("demo-quillhaven-chains.json");
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    let mut evening = doc["demands"].clone();
    for d in evening.as_array_mut().unwrap() {
        for k in ["volume", "required"] {
            if let Some(x) = d[k].as_f64() {
                d[k] = json!(x * 1.3);
            }
        }
    }
    doc["matrices"] = json!([{"id": "evening", "demands": evening}]);
    for mode in ["nearest", "steered"] {
        let args = ["--threads", "1", "--routing", mode];
        let (all, own) =
            common::json::with_each_matrix_alone(&doc.to_string(), &["evening"], &args);
        let mut compared = 0;
        for sc in scenarios(&all).iter().filter(|s| s["matrix"] == "evening") {
            let failed = common::json::failed_of(sc);
            let names: Vec<&str> = failed.iter().map(String::as_str).collect();
            let alone = scenario(&own[0], &names);
            // Not `delivered`: optima with the same served_required may deliver different
            // amounts.
            for field in ["served_required", "throughput", "max_link_utilisation"] {
                assert_close(
                    num(sc, field),
                    num(alone, field),
                    &format!("{mode} {failed:?} {field}"),
                );
            }
            compared += 1;
        }
        assert_eq!(compared, scenarios(&own[0]).len(), "{mode}");
    }
}
