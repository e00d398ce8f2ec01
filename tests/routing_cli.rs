//! `--routing` through the real binary. Outside references: the input contract
//! `shared/network-format.md` ("Routing as deployed": metric range, exit status 2, the
//! routed JSON fields), and small networks whose values are worked by hand in the
//! comments.

mod common;

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};

use common::{demo, redoubt, s};
use serde_json::{Value, json};

/// Absolute tolerance on reported amounts (the product writes JSON numbers with 12
/// significant digits).
const TOL: f64 = 1e-6;

/// A unique `N-NAME` path in this test process's own temporary folder.
fn temp(name: &str) -> PathBuf {
    static N: AtomicUsize = AtomicUsize::new(0);
    common::temp_root().join(format!("{}-{name}", N.fetch_add(1, Ordering::Relaxed)))
}

fn write_net(v: &Value) -> PathBuf {
    let p = temp("net.json");
    std::fs::write(&p, v.to_string()).unwrap();
    p
}

fn read_json(p: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn assert_close(got: f64, want: f64, what: &str) {
    assert!((got - want).abs() <= TOL, "{what}: got {got}, want {want}");
}

/// The off-path network (hand-worked in tests/routing.rs): demand o→t of 10, p hangs off
/// m behind link m–p of capacity 4, q off t at metric 5. Nearest serves 4 (everything via
/// p, m–p limits), steered and the best re-route 10. Offered load: 10 on each direction of
/// m–p: utilisation 10 / 4 = 2.5.
fn off_path() -> Value {
    json!({"name":"off-path","unit":"Gbit/s",
        "sites":[{"id":"o"},{"id":"m"},{"id":"t"},
                 {"id":"p","processing":100},{"id":"q","processing":100}],
        "links":[{"id":"om","from":"o","to":"m","capacity":100},
                 {"id":"mt","from":"m","to":"t","capacity":100},
                 {"id":"mp","from":"m","to":"p","capacity":4},
                 {"id":"tq","from":"t","to":"q","capacity":100,"metric":5}],
        "demands":[{"from":"o","to":"t","volume":10}]})
}

#[test]
fn invalid_metrics_are_refused_naming_the_link() {
    // Contract: metric is a whole number from 1 to 16777215; anything else exit 2.
    for bad in [
        json!(0),
        json!(-3),
        json!(1.5),
        json!(16_777_216),
        json!("7"),
    ] {
        let mut v = off_path();
        v["links"][2]["metric"] = bad.clone();
        let p = write_net(&v);
        for cmd in [
            vec!["check", s(&p)],
            vec!["audit", s(&p), "--routing", "nearest", "-q"],
        ] {
            let r = redoubt(&cmd);
            assert_eq!(r.code, 2, "metric {bad}: {cmd:?}: {}", r.stderr);
            assert!(r.stderr.contains("\"mp\""), "names the link: {}", r.stderr);
            assert!(r.stderr.contains("metric"), "names the field: {}", r.stderr);
        }
    }
    // The largest allowed metric is accepted.
    let mut v = off_path();
    v["links"][2]["metric"] = json!(16_777_215);
    assert_eq!(redoubt(&["check", s(&write_net(&v))]).code, 0);
}

#[test]
fn nearest_and_steered_json_contract() {
    let p = write_net(&off_path());
    for (mode, served) in [("nearest", 4.0), ("steered", 10.0)] {
        let out = temp("audit.json");
        let r = redoubt(&["audit", s(&p), "--routing", mode, "-q", "--json", s(&out)]);
        assert_eq!(r.code, 0, "{}", r.stderr);
        assert!(
            r.stdout.contains("Caution: a planning aid"),
            "keeps the caution"
        );
        let j = read_json(&out);
        assert_eq!(j["routing"], mode);
        let b = &j["scenarios"][0];
        assert_eq!(b["failed"], json!([]));
        assert_close(num(&b["served_required"]), served, mode);
        assert_close(num(&b["shortfall"]), 10.0 - served, mode);
        assert_close(num(&b["stranded"]), 0.0, mode);
        assert_close(num(&b["throughput"]), served, mode);
        assert_close(num(&b["best_served_required"]), 10.0, mode);
        assert_close(num(&b["recoverable"]), 10.0 - served, mode);
        // The offered load is on the nearest routes in both modes.
        assert_close(num(&b["max_link_utilisation"]), 2.5, mode);
        // Site p processes all 10 of its 100: 0.1.
        assert_close(num(&b["max_site_utilisation"]), 0.1, mode);
        assert_eq!(b["overloaded"], json!(["link:mp"]));
    }
    // Default routing is the best re-route, stated in the JSON.
    let out = temp("best.json");
    assert_eq!(redoubt(&["audit", s(&p), "-q", "--json", s(&out)]).code, 0);
    let j = read_json(&out);
    assert_eq!(j["routing"], "best");
    assert!(j["scenarios"][0].get("max_link_utilisation").is_none());
}

/// A positive load on capacity 0 is the string "inf" (contract). Hand-worked: a–b has
/// capacity 0 but metric 1, so a→b traffic is routed on it; the detour a–c–b is longer.
#[test]
fn load_on_capacity_zero_is_inf() {
    let p = write_net(
        &json!({"sites":[{"id":"a","processing":10},{"id":"b"},{"id":"c"}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":0},
                 {"id":"ac","from":"a","to":"c","capacity":10},
                 {"id":"cb","from":"c","to":"b","capacity":10}],
        "demands":[{"from":"a","to":"b","volume":4}]}),
    );
    let out = temp("inf.json");
    let r = redoubt(&[
        "audit",
        s(&p),
        "--routing",
        "nearest",
        "-q",
        "--json",
        s(&out),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let j = read_json(&out);
    let b = &j["scenarios"][0];
    assert_eq!(b["max_link_utilisation"], "inf");
    assert_eq!(b["overloaded"], json!(["link:ab"]));
    assert_close(num(&b["served_required"]), 0.0, "nothing passes capacity 0");
    // With a–b failed, shortest paths move to a–c–b and everything is served.
    let by_name = |f: &str| {
        j["scenarios"]
            .as_array()
            .unwrap()
            .iter()
            .find(|x| x["failed"] == json!([f]))
            .cloned()
            .unwrap()
    };
    let f = by_name("link:ab");
    assert_close(num(&f["served_required"]), 4.0, "after a–b fails");
    let moved: Vec<&str> = f["traffic_moved_onto"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m["link"].as_str().unwrap())
        .collect();
    assert_eq!(moved.len(), 2);
    assert!(moved.contains(&"ac") && moved.contains(&"cb"), "{moved:?}");
}

/// Purchases under steered (hand-worked): o (processing 4, expand_cost 2) – t
/// (processing 0, expand_cost 1), link 100, demand o→t of 10. Steered serves 4 at o; the
/// cheapest closing buys 6 at t (cost 6 < 12 at o), after which t is a candidate too.
#[test]
fn steered_purchases_and_nearest_refusal() {
    let p = write_net(&json!({"sites":[{"id":"o","processing":4,"expand_cost":2},
                                     {"id":"t","processing":0,"expand_cost":1}],
        "links":[{"id":"ot","from":"o","to":"t","capacity":100}],
        "demands":[{"from":"o","to":"t","volume":10}]}));
    let out = temp("plan.json");
    let r = redoubt(&[
        "plan",
        s(&p),
        "--routing",
        "steered",
        "-q",
        "--json",
        s(&out),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let j = read_json(&out);
    assert_eq!(j["routing"], "steered");
    assert_close(num(&j["plan"]["cost"]), 6.0, "plan cost");
    assert_close(num(&j["plan"]["add"]["t"]), 6.0, "buy at t");
    for sc in j["scenarios"].as_array().unwrap() {
        if sc["failed"] == json!([]) {
            assert_close(num(&sc["shortfall_before"]), 6.0, "before");
            assert_close(num(&sc["shortfall_after"]), 0.0, "after");
        }
    }
    let out = temp("close.json");
    let r = redoubt(&[
        "audit",
        s(&p),
        "--routing",
        "steered",
        "--close",
        "-q",
        "--json",
        s(&out),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let c = &read_json(&out)["scenarios"][0]["closing"];
    assert_close(num(&c["cost"]), 6.0, "closing cost");
    assert_close(num(&c["add"]["t"]), 6.0, "closing at t");
    // Under nearest, purchases are refused with exit 2 and a reason.
    for cmd in [
        vec!["plan", s(&p), "--routing", "nearest", "-q"],
        vec!["audit", s(&p), "--routing", "nearest", "--close", "-q"],
    ] {
        let r = redoubt(&cmd);
        assert_eq!(r.code, 2, "{cmd:?}");
        assert!(r.stderr.contains("nearest"), "{}", r.stderr);
    }
}

/// The demo shows failures that hurt under the deployed routing while a re-route serves
/// everything; output does not depend on the thread count.
#[test]
fn demo_routing_as_deployed() {
    let a = temp("a.json");
    let b = temp("b.json");
    let r1 = redoubt(&[
        "audit",
        s(&demo()),
        "--routing",
        "nearest",
        "-q",
        "--threads",
        "1",
        "--json",
        s(&a),
    ]);
    let r2 = redoubt(&[
        "audit",
        s(&demo()),
        "--routing",
        "nearest",
        "-q",
        "--threads",
        "2",
        "--json",
        s(&b),
    ]);
    assert_eq!(r1.code, 0, "{}", r1.stderr);
    assert_eq!(r1.stdout, r2.stdout);
    assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap());
    assert!(r1.stdout.contains("but fully served by a re-route"));
    let j = read_json(&a);
    let hurt: Vec<&Value> = j["scenarios"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|x| {
            num(&x["shortfall"]) > TOL
                && (num(&x["best_served_required"]) - num(&x["required"])).abs() <= TOL
        })
        .collect();
    assert!(
        !hurt.is_empty(),
        "some failure hurts only under nearest routing"
    );
    for x in &hurt {
        // served + recoverable = the best re-route's served (here the whole requirement).
        assert_close(
            num(&x["served_required"]) + num(&x["recoverable"]),
            num(&x["required"]),
            "recoverable",
        );
    }
    // --fail under a routing lists just that scenario.
    let f = temp("f.json");
    let r = redoubt(&[
        "audit",
        s(&demo()),
        "--routing",
        "steered",
        "--fail",
        "link:dunmere-harrow",
        "-q",
        "--json",
        s(&f),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let j = read_json(&f);
    assert_eq!(j["scenarios"].as_array().unwrap().len(), 1);
    assert_eq!(j["routing"], "steered");
}
