//! The routings as deployed (`--routing nearest|steered`) over several traffic matrices,
//! through the binary: each matrix alone against a file holding it as its demands, a ring
//! worked by hand under nearest routing (the evening is short, the working day is not),
//! `--matrix`, headroom per matrix, gates, and a steered plan and closings covering two
//! matrices (hand costs, re-audited after `--apply`).
//!
//! Outside references: the input contract `shared/network-format.md` (sections "Several
//! traffic matrices" and "Routing as deployed"), small networks whose results are computed
//! by hand in the comments, and for "each matrix alone" the same binary on a file whose only
//! `demands` are that matrix (the single-matrix routed path, which no `matrices` code
//! touches, is the reference).

mod common;

use common::json::*;
use common::*;
use serde_json::Value;

/// The hand ring: sites a, b, c, d in a ring (links ab, bc, cd, da; every metric 1), only
/// `a` processes (100). Capacities: ab 20, the others 100. `base`: c→b 12; `evening`:
/// c→b 30.
///
/// Nearest routing by hand (the only candidate site is `a`; dist(c, a) = 2 on two equal
/// paths c-b-a and c-d-a, split half and half at c; a→b is the direct link, dist 1):
/// - baseline: per unit, c→b ½, b→a ½, c→d ½, d→a ½, a→b 1. The direction a→b (20) binds:
///   base serves 12 (12 ≤ 20), evening serves 20 of 30, **10 short**. The best re-route
///   serves all 30 in the evening (c→d→a, processed, a→d→c→b: every arc of 100).
/// - link:ab fails: c→a only by c-d-a, a→b by a-d-c-b (dist 3); every arc of 100: base 12,
///   evening 30, nothing short.
/// - link:bc fails: c→a by c-d-a, a→b direct (20): base 12, evening 20 (10 short); the best
///   re-route cannot do better (b is reached only over ab).
/// - link:cd or link:da fails: c→a by c-b-a, then a→b: b→a and a→b carry the whole demand
///   (20 each): base 12, evening 20 (10 short); the best re-route also 20 (c reaches a only
///   over b→a, or b only over a→b).
///
/// Headroom under nearest, λ = min over loaded resources of capacity / load at required:
/// - baseline: base min(20/12 on a→b, 20/6 on b→a, 100/6, site a 100/12) = 5/3; evening
///   20/30 = 2/3.
/// - link:ab: every load 12 (resp. 30) on arcs of 100 and site a of 100: base 100/12 = 25/3,
///   evening 100/30 = 10/3.
/// - link:bc, link:cd, link:da: a→b (and b→a) carry the whole demand on 20: base 5/3,
///   evening 2/3.
///
/// Steered routing has the same values: `a` is the only processing site.
const RING: &str = r#"{"name": "hand-ring", "unit": "Gbit/s",
 "sites": [{"id": "a", "processing": 100}, {"id": "b"}, {"id": "c"}, {"id": "d"}],
 "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 20},
           {"id": "bc", "from": "b", "to": "c", "capacity": 100},
           {"id": "cd", "from": "c", "to": "d", "capacity": 100},
           {"id": "da", "from": "d", "to": "a", "capacity": 100}],
 "demands": [{"from": "c", "to": "b", "volume": 12}],
 "matrices": [{"id": "evening", "demands": [{"from": "c", "to": "b", "volume": 30}]}]
}"#;

/// One row of RING's hand table: (failed, matrix, served_required, shortfall, best re-route
/// served, headroom).
type RingRow = (&'static [&'static str], &'static str, f64, f64, f64, f64);

/// RING's hand table.
const RING_TABLE: &[RingRow] = &[
    (&[], "base", 12.0, 0.0, 12.0, 5.0 / 3.0),
    (&[], "evening", 20.0, 10.0, 30.0, 2.0 / 3.0),
    (&["link:ab"], "base", 12.0, 0.0, 12.0, 25.0 / 3.0),
    (&["link:ab"], "evening", 30.0, 0.0, 30.0, 10.0 / 3.0),
    (&["link:bc"], "base", 12.0, 0.0, 12.0, 5.0 / 3.0),
    (&["link:bc"], "evening", 20.0, 10.0, 20.0, 2.0 / 3.0),
    (&["link:cd"], "base", 12.0, 0.0, 12.0, 5.0 / 3.0),
    (&["link:cd"], "evening", 20.0, 10.0, 20.0, 2.0 / 3.0),
    (&["link:da"], "base", 12.0, 0.0, 12.0, 5.0 / 3.0),
    (&["link:da"], "evening", 20.0, 10.0, 20.0, 2.0 / 3.0),
];

/// Two regions joined by a bridge of capacity 0 (it routes, the protocol does not know
/// capacities, but carries nothing): a–p1–t1 and b–p2–t2, links of 100. p1 and p2 process
/// 5 each; p1 costs 1 per added unit, p2 costs 3. `base`: a→t1 8; `evening`: b→t2 9.
///
/// By hand (steered): a demand's route through the other region's site crosses the bridge
/// (0), so a→t1 is processed at p1 only and b→t2 at p2 only.
/// - baseline: base serves 5 (3 short), evening 5 (4 short). Headroom (steered): base
///   5/8 = 0.625, evening 5/9.
/// - a link of a region fails (a-p1, p1-t1 for a→t1; b-p2, p2-t2 for b→t2): that region's
///   demand is cut off (not closable by processing); the other region is as in the
///   baseline. The bridge failing changes nothing.
/// - Cheapest purchase reaching every best: base alone p1 + 3 → cost 3; evening alone
///   p2 + 4 → cost 12; both matrices need both → cost 15 (more than either alone: the
///   matrices stress different sites).
const REGIONS: &str = r#"{"name": "two-regions", "unit": "Gbit/s",
 "sites": [{"id": "a"}, {"id": "t1"}, {"id": "b"}, {"id": "t2"},
           {"id": "p1", "processing": 5, "expand_cost": 1},
           {"id": "p2", "processing": 5, "expand_cost": 3}],
 "links": [{"id": "a-p1", "from": "a", "to": "p1", "capacity": 100},
           {"id": "p1-t1", "from": "p1", "to": "t1", "capacity": 100},
           {"id": "b-p2", "from": "b", "to": "p2", "capacity": 100},
           {"id": "p2-t2", "from": "p2", "to": "t2", "capacity": 100},
           {"id": "bridge", "from": "t1", "to": "t2", "capacity": 0}],
 "demands": [{"from": "a", "to": "t1", "volume": 8}],
 "matrices": [{"id": "evening", "demands": [{"from": "b", "to": "t2", "volume": 9}]}]
}"#;

/// The hand star of tests/matrices.rs: hub h processes 100, leaves x and y, links h–x 10,
/// h–y 10, x–y 4 (metrics 1). `base`: x→h 8; `evening`: y→h 6. Nearest by hand: with hx
/// down x→h goes x→y→h, capped by x–y at 4 (base 4 short); with hy down the evening's y→h
/// goes y→x→h (2 short).
const STAR: &str = r#"{"name": "star", "unit": "Gbit/s",
 "sites": [{"id": "h", "processing": 100}, {"id": "x"}, {"id": "y"}],
 "links": [{"id": "hx", "from": "h", "to": "x", "capacity": 10},
           {"id": "hy", "from": "h", "to": "y", "capacity": 10},
           {"id": "xy", "from": "x", "to": "y", "capacity": 4}],
 "demands": [{"from": "x", "to": "h", "volume": 8}],
 "matrices": [{"id": "evening", "demands": [{"from": "y", "to": "h", "volume": 6}]}]
}"#;

/// The fields of a routed scenario object that do not depend on the other matrices:
/// everything but `matrix`, `rank`, `detail` (ranks and details are chosen over the whole
/// run). Compared as JSON values, so numbers must agree as written.
fn own_fields(sc: &Value) -> serde_json::Map<String, Value> {
    let mut m = sc.as_object().unwrap().clone();
    for k in ["matrix", "rank", "detail"] {
        m.remove(k);
    }
    m
}

/// Scenario objects of `doc` under `matrix` (all when `None`), keyed by sorted failed names.
fn keyed(doc: &Value, matrix: Option<&str>) -> std::collections::BTreeMap<String, Value> {
    scenarios(doc)
        .iter()
        .filter(|sc| matrix.is_none_or(|m| sc["matrix"] == m))
        .map(|sc| {
            let mut f = failed_of(sc);
            f.sort();
            (f.join(","), sc.clone())
        })
        .collect()
}

/// Under `routing`, each matrix of `text` audited with the others gives every scenario the
/// same routed object (served, shortfall, throughput, utilisations, overloads, best
/// re-route, win-back, traffic moved against its own matrix's baseline, headroom) as the
/// file whose only demands are that matrix.
fn each_matrix_equals_its_own_file(text: &str, ids: &[&str], routing: &str, args: &[&str]) {
    // `--detail`: every scenario carries its per-demand lists (otherwise chosen over the run).
    let mut full = vec!["--routing", routing, "--headroom", "--detail"];
    full.extend_from_slice(args);
    let (doc, owns) = with_each_matrix_alone(text, ids, &full);
    assert_eq!(doc["routing"], routing);
    for (id, own) in ids.iter().zip(&owns) {
        let want = keyed(own, None);
        let got = keyed(&doc, Some(id));
        assert_eq!(got.len(), want.len(), "{routing} {id}: scenario count");
        for (k, w) in &want {
            assert!(
                w.get("matrix").is_none(),
                "a file without matrices names none"
            );
            let g = &got[k];
            assert_eq!(g["matrix"], *id);
            assert_eq!(
                own_fields(g),
                own_fields(w),
                "{routing}, matrix {id}, scenario [{k}]"
            );
        }
    }
}

#[test]
fn each_matrix_alone_equals_a_file_with_it_as_demands() {
    for routing in ["nearest", "steered"] {
        each_matrix_equals_its_own_file(RING, &["base", "evening"], routing, &["--kinds", "links"]);
        each_matrix_equals_its_own_file(
            REGIONS,
            &["base", "evening"],
            routing,
            &["--kinds", "links"],
        );
        each_matrix_equals_its_own_file(STAR, &["base", "evening"], routing, &["--kinds", "links"]);
    }
}

/// A maintenance window under each matrix: the routed baseline of every matrix is the
/// `--down` state (its routes and its offered load), as in a file holding that matrix alone.
#[test]
fn a_maintenance_window_holds_under_every_matrix() {
    for routing in ["nearest", "steered"] {
        each_matrix_equals_its_own_file(
            RING,
            &["base", "evening"],
            routing,
            &["--kinds", "links", "--down", "link:cd"],
        );
    }
}

/// The hours demo under both routings, failing groups: each of its three matrices alone
/// (the forecast holds one demand more than `base`). About 6 s in a debug build.
#[test]
fn each_matrix_of_the_hours_demo_equals_its_own_file() {
    let demo = std::fs::read_to_string(fixture("demo-harrowmere-hours.json")).unwrap();
    for routing in ["nearest", "steered"] {
        each_matrix_equals_its_own_file(
            &demo,
            &["base", "evening-peak", "forecast-next-year"],
            routing,
            &["--kinds", "groups", "--threads", "1"],
        );
    }
}

#[test]
fn nearest_ring_is_short_in_the_evening_by_hand() {
    let f = TempPath::with_text("routing-matrices-ring", RING);
    for routing in ["nearest", "steered"] {
        let (run, doc) = audit_json(
            f.path(),
            &["--routing", routing, "--kinds", "links", "--headroom"],
        );
        // The text wraps at 100 columns: read its sentences with single spaces.
        let flat = run.stdout.split_whitespace().collect::<Vec<_>>().join(" ");
        assert_eq!(
            scenarios(&doc).len(),
            RING_TABLE.len(),
            "5 scenarios × 2 matrices"
        );
        // RING's hand table.
        for &(names, m, served, short, best, lambda) in RING_TABLE {
            let sc = pair(&doc, names, m);
            let what = format!("{routing} {names:?} under {m}");
            assert_near(
                num(sc, "served_required"),
                served,
                &format!("{what} served"),
            );
            assert_near(num(sc, "shortfall"), short, &format!("{what} shortfall"));
            assert_near(
                num(sc, "best_served_required"),
                best,
                &format!("{what} best"),
            );
            assert_near(
                num(sc, "recoverable"),
                best - served,
                &format!("{what} win-back"),
            );
            assert_near(num(sc, "headroom"), lambda, &format!("{what} headroom"));
        }
        // The least headroom is 2/3, shared by four evening pairs each 10 short; the
        // baseline ranks first among them (fewer elements), so it names the baseline and
        // the evening.
        assert_near(num(&doc["headroom"], "value"), 2.0 / 3.0, "least headroom");
        assert_eq!(doc["headroom"]["matrix"], "evening");
        assert_eq!(doc["headroom"]["failed"], serde_json::json!([]));
        // Traffic moved is measured against the scenario's own matrix's baseline: with cd
        // down in the evening the half (15) that went c→d→a now goes c→b→a, so c→b and b→a
        // carry 15 more each (of the 30 offered), and nothing else rises.
        let moved = pair(&doc, &["link:cd"], "evening")["traffic_moved_onto"]
            .as_array()
            .unwrap()
            .clone();
        let mut got: Vec<(String, String, f64)> = moved
            .iter()
            .map(|m| {
                (
                    m["from"].as_str().unwrap().to_string(),
                    m["to"].as_str().unwrap().to_string(),
                    num(m, "increase"),
                )
            })
            .collect();
        got.sort_by(|x, y| x.0.cmp(&y.0));
        assert_eq!(got.len(), 2, "{moved:?}");
        assert_eq!((got[0].0.as_str(), got[0].1.as_str()), ("b", "a"));
        assert_eq!((got[1].0.as_str(), got[1].1.as_str()), ("c", "b"));
        assert_near(got[0].2, 15.0, "b→a increase");
        assert_near(got[1].2, 15.0, "c→b increase");
        // The text: one baseline line per matrix, and the routed table lists each scenario
        // once, under its worst matrix.
        assert!(
            flat.contains(&format!(
                "Baseline under matrix evening: {routing} serves 20 of 30 Gbit/s required"
            )),
            "{}",
            run.stdout
        );
        assert!(flat.contains(&format!(
            "Baseline under matrix base: {routing} serves 12 of 12 Gbit/s required"
        )));
        // On a wide screen every name stays on one line: the routed table lists each
        // scenario once, under its worst matrix.
        let wide = redoubt_env(
            &[
                "audit",
                f.path(),
                "-q",
                "--routing",
                routing,
                "--kinds",
                "links",
            ],
            &[("COLUMNS", "200")],
        );
        assert_eq!(wide.code, 0, "{}", wide.stderr);
        let section = wide
            .stdout
            .split(&format!(
                "under {routing} routing, beside the best re-route"
            ))
            .nth(1)
            .unwrap()
            .split("Short under")
            .next()
            .unwrap();
        assert!(section.contains("each scenario once, under its worst matrix"));
        let rows: Vec<&str> = section
            .lines()
            .filter(|l| l.starts_with("link:") || l.starts_with("baseline"))
            .collect();
        assert_eq!(rows.len(), 5, "one row per scenario:\n{section}");
        for name in ["baseline", "link:bc", "link:cd", "link:da"] {
            assert!(
                rows.iter()
                    .any(|r| r.starts_with(&format!("{name} under matrix evening "))),
                "{name} under its worst matrix:\n{section}"
            );
        }
        assert!(
            flat.contains(&format!(
                "Short under {routing} routing but fully served by a re-route (1): baseline \
                 under matrix evening"
            )),
            "{}",
            run.stdout
        );
    }
}

#[test]
fn matrix_flag_selects_under_routing() {
    let f = TempPath::with_text("routing-matrices-sel", RING);
    let (_, doc) = audit_json(
        f.path(),
        &[
            "--routing",
            "nearest",
            "--kinds",
            "links",
            "--matrix",
            "evening",
            "--headroom",
        ],
    );
    assert_eq!(scenarios(&doc).len(), 5);
    assert!(scenarios(&doc).iter().all(|sc| sc["matrix"] == "evening"));
    for &(names, m, served, short, _, _) in RING_TABLE.iter().filter(|r| r.1 == "evening") {
        let sc = pair(&doc, names, m);
        assert_near(num(sc, "served_required"), served, &format!("{names:?}"));
        assert_near(num(sc, "shortfall"), short, &format!("{names:?}"));
    }
    // The JSON baseline is that of the first matrix the run evaluates.
    assert_eq!(doc["baseline"]["matrix"], "evening");
    assert_near(num(&doc["baseline"], "served_required"), 20.0, "baseline");
    assert_near(
        num(&doc["baseline"], "max_link_utilisation"),
        1.5,
        "30 on a→b of 20",
    );

    // Base alone: nothing short; the least headroom is 5/3 (RING's comment), at the
    // baseline (first in worst-first order among the ties), under base.
    let (_, doc) = audit_json(
        f.path(),
        &[
            "--routing",
            "nearest",
            "--kinds",
            "links",
            "--matrix",
            "base",
            "--headroom",
        ],
    );
    assert_eq!(scenarios(&doc).len(), 5);
    assert!(scenarios(&doc).iter().all(|sc| num(sc, "shortfall") == 0.0));
    assert_near(num(&doc["headroom"], "value"), 5.0 / 3.0, "base headroom");
    assert_eq!(doc["headroom"]["matrix"], "base");

    let run = redoubt(&[
        "audit",
        f.path(),
        "--routing",
        "steered",
        "--matrix",
        "evning",
    ]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains("did you mean \"evening\"?"),
        "{}",
        run.stderr
    );
}

#[test]
fn gates_and_csv_name_the_matrix_under_routing() {
    let f = TempPath::with_text("routing-matrices-gates", RING);
    let out = TempPath::new("routing-matrices-gates", "json");
    let csv = TempPath::new("routing-matrices", "csv");
    // The evening pairs are 10 short under nearest (RING's comment), above 5; the base is
    // never short.
    let run = redoubt(&[
        "audit",
        f.path(),
        "-q",
        "--routing",
        "nearest",
        "--kinds",
        "links",
        "--max-shortfall",
        "5",
        "--json",
        out.path(),
        "--csv",
        csv.path(),
    ]);
    assert_eq!(run.code, 1, "{}", run.stderr);
    assert!(
        run.stdout
            .contains("(baseline under matrix evening) exceeds the limit 5"),
        "{}",
        run.stdout
    );
    let doc = out.read_json();
    assert_eq!(doc["gates"][0]["matrix"], "evening");
    assert_eq!(doc["gates"][0]["worst"], 10.0);
    let run = redoubt(&[
        "audit",
        f.path(),
        "-q",
        "--routing",
        "nearest",
        "--kinds",
        "links",
        "--max-shortfall",
        "5",
        "--matrix",
        "base",
    ]);
    assert_eq!(run.code, 0, "{}", run.stdout);

    let text = std::fs::read_to_string(&csv.0).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(&header[..2], &["failed", "matrix"]);
    let short = header.iter().position(|h| *h == "shortfall").unwrap();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), RING_TABLE.len());
    for &(names, m, _, want, _, _) in RING_TABLE {
        let row = rows
            .iter()
            .find(|r| r[0] == names.join(";") && r[1] == m)
            .unwrap_or_else(|| panic!("no row {names:?} {m} in\n{text}"));
        assert_eq!(row[short].parse::<f64>().unwrap(), want, "{names:?} {m}");
    }
}

#[test]
fn steered_headroom_per_matrix_by_hand() {
    let f = TempPath::with_text("routing-matrices-regions", REGIONS);
    let (run, doc) = audit_json(
        f.path(),
        &["--routing", "steered", "--depth", "0", "--headroom"],
    );
    // REGIONS's comment: 5/8 under base, 5/9 under evening; the least is the evening's.
    assert_near(num(pair(&doc, &[], "base"), "headroom"), 0.625, "base");
    assert_near(
        num(pair(&doc, &[], "evening"), "headroom"),
        5.0 / 9.0,
        "evening",
    );
    assert_near(num(&doc["headroom"], "value"), 5.0 / 9.0, "least");
    assert_eq!(doc["headroom"]["matrix"], "evening");
    assert!(run.stdout.contains("55.556%"), "{}", run.stdout);
    // Nearest: each demand has one candidate (the other crosses the bridge of capacity 0,
    // which is farther), so the same values.
    let (_, doc) = audit_json(
        f.path(),
        &["--routing", "nearest", "--depth", "0", "--headroom"],
    );
    assert_near(
        num(pair(&doc, &[], "base"), "headroom"),
        0.625,
        "nearest base",
    );
    assert_near(
        num(pair(&doc, &[], "evening"), "headroom"),
        5.0 / 9.0,
        "nearest evening",
    );
}

/// `plan --routing steered --json` total cost.
fn steered_plan_cost(file: &str, extra: &[&str]) -> f64 {
    let mut args = vec!["--routing", "steered", "--kinds", "links"];
    args.extend_from_slice(extra);
    let (cost, doc) = plan_json(file, &args);
    assert_eq!(doc["routing"], "steered");
    cost
}

#[test]
fn steered_plan_covers_both_matrices_by_hand() {
    let f = TempPath::with_text("routing-matrices-regions", REGIONS);
    // Costs by hand in REGIONS's comment.
    let base = steered_plan_cost(f.path(), &["--matrix", "base"]);
    let evening = steered_plan_cost(f.path(), &["--matrix", "evening"]);
    let both = steered_plan_cost(f.path(), &[]);
    assert_near(base, 3.0, "base plan");
    assert_near(evening, 12.0, "evening plan");
    assert_near(both, 15.0, "plan over both");
    // The single-matrix files agree (the already-referenced single-matrix plan).
    for (id, want) in [("base", 3.0), ("evening", 12.0)] {
        let one = TempPath::with_text("routing-matrices-one", &alone(REGIONS, id));
        assert_near(steered_plan_cost(one.path(), &[]), want, id);
    }

    let bought = TempPath::new("routing-matrices-bought", "json");
    let run = redoubt(&[
        "plan",
        f.path(),
        "-q",
        "--routing",
        "steered",
        "--kinds",
        "links",
        "--apply",
        bought.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let (_, after) = audit_json(bought.path(), &["--routing", "steered", "--kinds", "links"]);
    assert_eq!(scenarios(&after).len(), 12, "6 scenarios × 2 matrices");
    // What remains is the demand cut off by its region's link (REGIONS's comment): a→t1
    // (8) with a-p1 or p1-t1 down under base, b→t2 (9) with b-p2 or p2-t2 down under
    // the evening.
    for sc in scenarios(&after) {
        let f = failed_of(sc);
        let cut = match (f.first().map(String::as_str), sc["matrix"].as_str()) {
            (Some("link:a-p1" | "link:p1-t1"), Some("base")) => 8.0,
            (Some("link:b-p2" | "link:p2-t2"), Some("evening")) => 9.0,
            _ => 0.0,
        };
        assert_near(num(sc, "shortfall"), cut, &format!("{sc}"));
    }
}

#[test]
fn steered_closings_per_matrix_and_nearest_purchases_refused() {
    let f = TempPath::with_text("routing-matrices-regions", REGIONS);
    let (_, doc) = audit_json(
        f.path(),
        &["--routing", "steered", "--depth", "0", "--close"],
    );
    // REGIONS's comment: the base baseline closes with p1 + 3 (cost 3), the evening's with
    // p2 + 4 (cost 12).
    let base = &pair(&doc, &[], "base")["closing"];
    assert_near(num(base, "cost"), 3.0, "base closing");
    assert_near(num(&base["add"], "p1"), 3.0, "base closing p1");
    let evening = &pair(&doc, &[], "evening")["closing"];
    assert_near(num(evening, "cost"), 12.0, "evening closing");
    assert_near(num(&evening["add"], "p2"), 4.0, "evening closing p2");

    for args in [
        &["plan", f.path(), "--routing", "nearest"][..],
        &["audit", f.path(), "--routing", "nearest", "--close"][..],
    ] {
        let run = redoubt(args);
        assert_eq!(run.code, 2, "{args:?}: {}", run.stderr);
    }
}

// ---------------------------------------------------------------------------------------
// A second formulation of the steered plan over two matrices, on microlp
// ---------------------------------------------------------------------------------------

/// Five sites with unequal metrics: `e` (4, cost 1), `w` (3, cost 2) process; `c`
/// processes nothing but may buy (cost 1.5), so it becomes a candidate once bought.
/// Every site may add at most 30. `base` sends towards `w`, `evening` between `w` and `c`;
/// no matrix's cheapest purchase covers the other's (measured: base alone 7, evening alone
/// 7.5, both 8).
const PENTAGON: &str = r#"{"name": "pentagon", "unit": "Gbit/s",
 "sites": [{"id": "n"},
           {"id": "e", "processing": 4, "expand_cost": 1, "expand_max": 30},
           {"id": "s"},
           {"id": "w", "processing": 3, "expand_cost": 2, "expand_max": 30},
           {"id": "c", "processing": 0, "expand_cost": 1.5, "expand_max": 30}],
 "links": [{"id": "n-e", "from": "n", "to": "e", "capacity": 12, "metric": 1},
           {"id": "e-s", "from": "e", "to": "s", "capacity": 10, "metric": 2},
           {"id": "s-w", "from": "s", "to": "w", "capacity": 12, "metric": 1},
           {"id": "w-n", "from": "w", "to": "n", "capacity": 10, "metric": 1},
           {"id": "n-c", "from": "n", "to": "c", "capacity": 8, "metric": 2},
           {"id": "c-s", "from": "c", "to": "s", "capacity": 8, "metric": 2}],
 "demands": [{"from": "e", "to": "w", "volume": 6}, {"from": "s", "to": "w", "volume": 7}],
 "matrices": [{"id": "evening", "demands": [{"from": "w", "to": "c", "volume": 8},
                                            {"from": "c", "to": "w", "volume": 6}]}]
}"#;

/// One pair's steered model, written here from the contract ("Routing as deployed"):
/// Dijkstra on the metrics of the surviving links, one unit of a leg split equally per hop
/// over the equal-cost next hops, candidates the surviving sites that process or may buy,
/// one variable per demand and candidate over both legs.
struct PairModel {
    /// Per demand: its candidates and its cap.
    demands: Vec<(Vec<Candidate>, f64)>,
    /// Capacity of each surviving arc.
    arc_capacity: Vec<f64>,
}

/// A candidate processing site of a demand and the per-arc load of one unit routed via it.
type Candidate = (usize, Vec<f64>);

fn pair_model(doc: &Value, matrix: &str, failed: &[String]) -> PairModel {
    let sites: Vec<&str> = doc["sites"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| s["id"].as_str().unwrap())
        .collect();
    let idx = |v: &Value| sites.iter().position(|s| v.as_str() == Some(s)).unwrap();
    let n = sites.len();
    let down_site: Vec<bool> = sites
        .iter()
        .map(|s| failed.contains(&format!("site:{s}")))
        .collect();
    // Arcs (from, to, capacity, metric) of the surviving links, both directions.
    let mut arcs: Vec<(usize, usize, f64, u64)> = Vec::new();
    for l in doc["links"].as_array().unwrap() {
        let (a, b) = (idx(&l["from"]), idx(&l["to"]));
        let id = l["id"].as_str().unwrap();
        if failed.contains(&format!("link:{id}")) || down_site[a] || down_site[b] {
            continue;
        }
        let (cap, metric) = (
            l["capacity"].as_f64().unwrap(),
            l["metric"].as_u64().unwrap(),
        );
        arcs.push((a, b, cap, metric));
        arcs.push((b, a, cap, metric));
    }
    const FAR: u64 = u64::MAX;
    // dist[t][u]: u → t, by Dijkstra from t over reversed arcs (a plain O(n²) scan).
    let dist: Vec<Vec<u64>> = (0..n)
        .map(|t| {
            let mut d = vec![FAR; n];
            if down_site[t] {
                return d;
            }
            d[t] = 0;
            let mut done = vec![false; n];
            while let Some(u) = (0..n)
                .filter(|&u| !done[u] && d[u] != FAR)
                .min_by_key(|&u| d[u])
            {
                done[u] = true;
                for &(from, to, _, m) in &arcs {
                    if to == u && d[u] + m < d[from] {
                        d[from] = d[u] + m;
                    }
                }
            }
            d
        })
        .collect();
    let leg = |o: usize, t: usize| -> Vec<f64> {
        let mut load = vec![0.0; arcs.len()];
        let mut at = vec![0.0; n];
        at[o] = 1.0;
        let mut order: Vec<usize> = (0..n).filter(|&u| dist[t][u] != FAR).collect();
        order.sort_by_key(|&u| std::cmp::Reverse(dist[t][u]));
        for u in order {
            if u == t || at[u] == 0.0 {
                continue;
            }
            let next: Vec<usize> = (0..arcs.len())
                .filter(|&k| {
                    let (from, to, _, m) = arcs[k];
                    from == u && dist[t][to] != FAR && m + dist[t][to] == dist[t][u]
                })
                .collect();
            let share = at[u] / next.len() as f64;
            for k in next {
                load[k] += share;
                at[arcs[k].1] += share;
            }
        }
        load
    };
    let site_docs = doc["sites"].as_array().unwrap();
    let candidate = |v: usize| {
        !down_site[v]
            && (site_docs[v]["processing"].as_f64().unwrap_or(0.0) > 0.0
                || site_docs[v].get("expand_cost").is_some())
    };
    let list = if matrix == "base" {
        &doc["demands"]
    } else {
        &doc["matrices"]
            .as_array()
            .unwrap()
            .iter()
            .find(|m| m["id"] == matrix)
            .unwrap()["demands"]
    };
    let demands = list
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|d| {
            let (o, t) = (idx(&d["from"]), idx(&d["to"]));
            if down_site[o] || down_site[t] {
                return None; // stranded
            }
            let cands = (0..n)
                .filter(|&v| candidate(v) && dist[v][o] != FAR && dist[t][v] != FAR)
                .map(|v| {
                    let (a, b) = (leg(o, v), leg(v, t));
                    (v, a.iter().zip(&b).map(|(x, y)| x + y).collect())
                })
                .collect();
            Some((cands, d["volume"].as_f64().unwrap()))
        })
        .collect();
    PairModel {
        demands,
        arc_capacity: arcs.iter().map(|a| a.2).collect(),
    }
}

/// Adds one pair's steered rows to an LP under construction: arc rows, demand rows and
/// site rows `Σ y ≤ processing + add_v`; returns Σ y (the pair's served amount).
fn add_pair(
    pv: &mut good_lp::ProblemVariables,
    rows: &mut Vec<good_lp::Constraint>,
    m: &PairModel,
    processing: &[f64],
    add: &[good_lp::Expression],
) -> good_lp::Expression {
    use good_lp::{Expression, variable};
    let n = processing.len();
    let mut served = Expression::from(0.0);
    let mut arc_rows: Vec<Expression> = vec![Expression::from(0.0); m.arc_capacity.len()];
    let mut site_rows: Vec<Expression> = vec![Expression::from(0.0); n];
    for (cands, cap) in &m.demands {
        let mut sum = Expression::from(0.0);
        for (v, unit) in cands {
            let y = pv.add(variable().min(0.0).max(*cap));
            sum += y;
            site_rows[*v] += y;
            for (k, &c) in unit.iter().enumerate() {
                if c > 0.0 {
                    arc_rows[k] += c * y;
                }
            }
        }
        served += sum.clone();
        rows.push(sum.leq(*cap));
    }
    for (k, row) in arc_rows.into_iter().enumerate() {
        rows.push(row.leq(m.arc_capacity[k]));
    }
    for (v, row) in site_rows.into_iter().enumerate() {
        rows.push(row.leq(processing[v] + add[v].clone()));
    }
    served
}

/// The least cost with which every (scenario, matrix) pair of `pairs` reaches the most it
/// can serve with every site bought out (two LPs per pair for the best, then one LP over
/// all pairs sharing the purchases), all on microlp.
fn reference_plan_cost(doc: &Value, pairs: &[(String, Vec<String>)]) -> f64 {
    use good_lp::{Expression, ProblemVariables, Solution, SolverModel, microlp, variable};
    let site_docs = doc["sites"].as_array().unwrap();
    let processing: Vec<f64> = site_docs
        .iter()
        .map(|s| s["processing"].as_f64().unwrap_or(0.0))
        .collect();
    let cost: Vec<Option<f64>> = site_docs
        .iter()
        .map(|s| s["expand_cost"].as_f64())
        .collect();
    let max: Vec<f64> = site_docs
        .iter()
        .map(|s| s["expand_max"].as_f64().unwrap_or(0.0))
        .collect();
    let models: Vec<PairModel> = pairs
        .iter()
        .map(|(m, failed)| pair_model(doc, m, failed))
        .collect();
    // Best reachable per pair: every expandable site at its maximum.
    let bought_out: Vec<Expression> = (0..processing.len())
        .map(|v| Expression::from(if cost[v].is_some() { max[v] } else { 0.0 }))
        .collect();
    let best: Vec<f64> = models
        .iter()
        .map(|m| {
            let mut pv = ProblemVariables::new();
            let mut rows = Vec::new();
            let served = add_pair(&mut pv, &mut rows, m, &processing, &bought_out);
            let mut lp = pv.maximise(served.clone()).using(microlp);
            for r in rows {
                lp.add_constraint(r);
            }
            lp.solve().expect("best reachable solves").eval(&served)
        })
        .collect();
    let mut pv = ProblemVariables::new();
    let add: Vec<Expression> = (0..processing.len())
        .map(|v| match cost[v] {
            Some(_) => Expression::from(pv.add(variable().min(0.0).max(max[v]))),
            None => Expression::from(0.0),
        })
        .collect();
    let total: Expression = (0..processing.len())
        .filter_map(|v| cost[v].map(|c| c * add[v].clone()))
        .sum();
    let mut rows = Vec::new();
    for (m, b) in models.iter().zip(&best) {
        let served = add_pair(&mut pv, &mut rows, m, &processing, &add);
        // Within 1e-9 of the best: what the simplex's own rounding needs.
        rows.push(served.geq(b - 1e-9 * b.max(1.0)));
    }
    let mut lp = pv.minimise(total.clone()).using(microlp);
    for r in rows {
        lp.add_constraint(r);
    }
    lp.solve().expect("the plan LP solves").eval(&total)
}

/// The steered plan over both matrices of PENTAGON (every single link failure and the
/// baseline) costs what the reference formulation above finds on microlp, and so does each
/// matrix alone; over both it costs at least what each alone does.
#[test]
fn steered_plan_over_two_matrices_matches_a_reference_lp() {
    let f = TempPath::with_text("routing-matrices-pentagon", PENTAGON);
    let (_, audit) = audit_json(f.path(), &["--routing", "steered", "--kinds", "links"]);
    let doc: Value = serde_json::from_str(PENTAGON).unwrap();
    let pairs_of = |matrix: Option<&str>| -> Vec<(String, Vec<String>)> {
        scenarios(&audit)
            .iter()
            .filter(|sc| matrix.is_none_or(|m| sc["matrix"] == m))
            .map(|sc| (sc["matrix"].as_str().unwrap().to_string(), failed_of(sc)))
            .collect()
    };
    let mut costs = Vec::new();
    for (flag, matrix) in [
        (&["--matrix", "base"][..], Some("base")),
        (&["--matrix", "evening"][..], Some("evening")),
        (&[][..], None),
    ] {
        let pairs = pairs_of(matrix);
        assert_eq!(pairs.len(), if matrix.is_some() { 7 } else { 14 });
        let want = reference_plan_cost(&doc, &pairs);
        let got = steered_plan_cost(f.path(), flag);
        assert!(
            (got - want).abs() <= 1e-6 * want.max(1.0),
            "{matrix:?}: plan {got}, reference {want}"
        );
        costs.push(got);
    }
    assert!(costs[2] >= costs[0].max(costs[1]) - 1e-9, "{costs:?}");
    // Not a formality here: both matrices together need more than either alone.
    assert!(costs[2] > costs[0].max(costs[1]) + 0.1, "{costs:?}");
    eprintln!("pentagon steered plans (base, evening, both): {costs:?}");
}
