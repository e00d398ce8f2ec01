//! Several traffic matrices (`matrices` at the top level of the network file) through the
//! binary: each matrix alone against a file with that matrix as its demands, a hand case
//! whose worst matrix differs per scenario, `--matrix`, gates, plans covering every matrix
//! (re-audited after `--apply`), the CSV column, `worst`, and files without `matrices`.
//!
//! Outside references: the input contract `shared/network-format.md` (section "Several
//! traffic matrices": field names, `base`, the `matrix` field of results), small networks
//! whose results are computed by hand in the comments, and for "each matrix alone" the
//! same binary on a file that holds that matrix as its only `demands` (a second, separate
//! reading of the demands: no `matrices` code runs on that file).

mod common;

use common::json::*;
use common::*;
use serde_json::Value;

/// The hand star: hub `h` processes 100; leaves `x`, `y`; links h–x 10, h–y 10 and the
/// backup x–y 4. `base`: x→h 8. `evening`: y→h 6.
///
/// By hand (a demand ending at `h` is processed at `h`, which has room for all of it):
/// - baseline: base x→h direct (10) serves 8; evening y→h direct serves 6; no shortfall.
/// - link:hx fails: base x→h only via x→y→h, capped by x–y at 4 → served 4, shortfall 4;
///   evening y→h direct → served 6, shortfall 0. Worst matrix: base.
/// - link:hy fails: base x→h direct → 8, shortfall 0; evening y→h only via y→x→h, capped
///   by x–y at 4 → served 4, shortfall 2. Worst matrix: evening.
/// - link:xy fails: both direct, no shortfall.
const STAR: &str = r#"{"name": "star", "unit": "Gbit/s",
 "sites": [{"id": "h", "processing": 100}, {"id": "x"}, {"id": "y"}],
 "links": [{"id": "hx", "from": "h", "to": "x", "capacity": 10},
           {"id": "hy", "from": "h", "to": "y", "capacity": 10},
           {"id": "xy", "from": "x", "to": "y", "capacity": 4}],
 "demands": [{"from": "x", "to": "h", "volume": 8}],
 "matrices": [{"id": "evening", "demands": [{"from": "y", "to": "h", "volume": 6}]}]
}"#;

/// Two processing sites p1, p2 (5 each, expand_cost 1) between s and t, links of 100.
/// `base`: s→t 8; `evening`: s→t 12.
///
/// By hand, failing sites: with p1 down only p2 (5) processes, so base is 3 short and
/// evening 7 short; p2 down is the mirror; the evening baseline is 12 − 10 = 2 short.
/// Cheapest purchase (cost 1 per unit):
/// - base alone: p1 down needs p2 + 3, p2 down needs p1 + 3 → cost 6.
/// - evening alone: p1 down needs p2 + 7, p2 down needs p1 + 7 (then the baseline has 24
///   ≥ 12) → cost 14.
/// - both matrices: the evening's purchase covers the base's (7 ≥ 3) → cost 14.
const TWO_SITES: &str = r#"{"name": "two-sites", "unit": "Gbit/s",
 "sites": [{"id": "s"}, {"id": "t"},
           {"id": "p1", "processing": 5, "expand_cost": 1},
           {"id": "p2", "processing": 5, "expand_cost": 1}],
 "links": [{"id": "s-p1", "from": "s", "to": "p1", "capacity": 100},
           {"id": "p1-t", "from": "p1", "to": "t", "capacity": 100},
           {"id": "s-p2", "from": "s", "to": "p2", "capacity": 100},
           {"id": "p2-t", "from": "p2", "to": "t", "capacity": 100}],
 "demands": [{"from": "s", "to": "t", "volume": 8}],
 "matrices": [{"id": "evening", "demands": [{"from": "s", "to": "t", "volume": 12}]}]
}"#;

/// Each matrix of a file, audited with the others, gives every scenario the
/// served_required and shortfall of a file whose only `demands` are that matrix.
fn each_matrix_equals_its_own_file(text: &str, ids: &[&str], args: &[&str]) {
    let (doc, owns) = with_each_matrix_alone(text, ids, args);
    for (id, own) in ids.iter().zip(&owns) {
        assert!(
            !scenarios(own).iter().any(|sc| sc.get("matrix").is_some()),
            "a file without matrices names none"
        );
        let want = by_failed(own, None);
        let got = by_failed(&doc, Some(id));
        assert_eq!(got.len(), want.len(), "matrix {id}: scenario count");
        for (k, (served, short)) in &want {
            let (gs, gh) = got[k];
            assert_near(gs, *served, &format!("{id} {k} served_required"));
            assert_near(gh, *short, &format!("{id} {k} shortfall"));
        }
    }
}

#[test]
fn each_matrix_alone_equals_a_file_with_it_as_demands() {
    each_matrix_equals_its_own_file(STAR, &["base", "evening"], &["--kinds", "links"]);
    each_matrix_equals_its_own_file(TWO_SITES, &["base", "evening"], &[]);
    let demo = std::fs::read_to_string(fixture("demo-harrowmere-hours.json")).unwrap();
    each_matrix_equals_its_own_file(
        &demo,
        &["base", "evening-peak", "forecast-next-year"],
        &["--threads", "1"],
    );
}

/// A maintenance window (`--down`) holds under every matrix: each matrix of the hours demo,
/// audited with a link kept down, gives every scenario the values of a file whose only
/// demands are that matrix, audited with the same link down (the single-matrix audit is the
/// outside reference: it has no matrix machinery at all).
#[test]
fn a_maintenance_window_holds_under_every_matrix() {
    let demo = std::fs::read_to_string(fixture("demo-harrowmere-hours.json")).unwrap();
    each_matrix_equals_its_own_file(
        &demo,
        &["base", "evening-peak", "forecast-next-year"],
        &["--down", "link:harrow-millbrook", "--kinds", "links,sites"],
    );
}

#[test]
fn worst_matrix_differs_per_scenario_by_hand() {
    let f = TempPath::with_text("matrices-star", STAR);
    let (run, doc) = audit_json(f.path(), &["--kinds", "links"]);
    // The hand table in STAR's comment.
    let want = [
        (&[][..], "base", 8.0, 0.0),
        (&[][..], "evening", 6.0, 0.0),
        (&["link:hx"][..], "base", 4.0, 4.0),
        (&["link:hx"][..], "evening", 6.0, 0.0),
        (&["link:hy"][..], "base", 8.0, 0.0),
        (&["link:hy"][..], "evening", 4.0, 2.0),
        (&["link:xy"][..], "base", 8.0, 0.0),
        (&["link:xy"][..], "evening", 6.0, 0.0),
    ];
    assert_eq!(
        scenarios(&doc).len(),
        want.len(),
        "4 scenarios × 2 matrices"
    );
    for (names, m, served, short) in want {
        let sc = pair(&doc, names, m);
        assert_near(
            num(sc, "served_required"),
            served,
            &format!("{names:?} {m}"),
        );
        assert_near(num(sc, "shortfall"), short, &format!("{names:?} {m}"));
    }
    // The worst pair ranks first; the text names the worst matrix of each scenario.
    assert_eq!(num(pair(&doc, &["link:hx"], "base"), "rank"), 1.0);
    assert_eq!(num(pair(&doc, &["link:hy"], "evening"), "rank"), 2.0);
    let row = |name: &str| {
        run.stdout
            .lines()
            .find(|l| l.split_whitespace().nth(1) == Some(name))
            .unwrap_or_else(|| panic!("no row for {name} in\n{}", run.stdout))
            .to_string()
    };
    assert_eq!(row("link:hx").split_whitespace().nth(2), Some("base"));
    assert_eq!(row("link:hy").split_whitespace().nth(2), Some("evening"));
    assert!(
        run.stdout
            .contains("worst link:hx under matrix base (shortfall 4 Gbit/s"),
        "{}",
        run.stdout
    );
    // Each scenario is listed once in the table, under its worst matrix.
    assert_eq!(
        run.stdout
            .lines()
            .filter(|l| l.split_whitespace().nth(1) == Some("link:hx"))
            .count(),
        1
    );
}

#[test]
fn matrix_flag_selects_and_refuses_unknown_ids() {
    let f = TempPath::with_text("matrices-sel", STAR);
    let (_, doc) = audit_json(f.path(), &["--kinds", "links", "--matrix", "evening"]);
    assert_eq!(scenarios(&doc).len(), 4);
    assert!(scenarios(&doc).iter().all(|sc| sc["matrix"] == "evening"));
    // Under evening alone the worst is link:hy, 2 short (STAR's comment).
    assert_near(
        num(pair(&doc, &["link:hy"], "evening"), "shortfall"),
        2.0,
        "hy",
    );
    assert_eq!(num(pair(&doc, &["link:hy"], "evening"), "rank"), 1.0);

    let (_, both) = audit_json(f.path(), &["--kinds", "links", "--matrix", "evening,base"]);
    assert_eq!(scenarios(&both).len(), 8);

    let run = redoubt(&["audit", f.path(), "--matrix", "evning"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains("no traffic matrix \"evning\"")
            && run.stderr.contains("did you mean \"evening\"?"),
        "{}",
        run.stderr
    );
    let run = redoubt(&["audit", f.path(), "--matrix", "base,base"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
}

#[test]
fn refused_matrix_ids() {
    let with = |matrices: &str| {
        STAR.replace(
            r#""matrices": [{"id": "evening", "demands": [{"from": "y", "to": "h", "volume": 6}]}]"#,
            &format!(r#""matrices": {matrices}"#),
        )
    };
    let cases = [
        (
            with(r#"[{"id": "base", "demands": []}]"#),
            "may not be \"base\"",
        ),
        (
            with(r#"[{"id": "a", "demands": []}, {"id": "a", "demands": []}]"#),
            "already used by matrices[0]",
        ),
        (
            with(r#"[{"id": "a", "demands": [{"from": "x", "to": "q", "volume": 1}]}]"#),
            "matrices[0] (id \"a\")",
        ),
        (
            with(r#"[{"id": "a", "demands": [{"from": "x", "to": "h", "volme": 1}]}]"#),
            "did you mean `volume`",
        ),
    ];
    for (text, want) in cases {
        let f = TempPath::with_text("matrices-bad", &text);
        let run = redoubt(&["check", f.path()]);
        assert_eq!(run.code, 2, "{text}\n{}", run.stderr);
        assert!(run.stderr.contains(want), "want {want:?} in {}", run.stderr);
    }
}

#[test]
fn gates_cover_every_matrix() {
    let f = TempPath::with_text("matrices-gates", STAR);
    let out = TempPath::new("matrices-gates", "json");
    // Worst shortfall over every pair is 4 (link:hx under base), above 3.
    let run = redoubt(&[
        "audit",
        f.path(),
        "-q",
        "--kinds",
        "links",
        "--max-shortfall",
        "3",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 1, "{}", run.stderr);
    assert!(
        run.stdout
            .contains("(link:hx under matrix base) exceeds the limit 3"),
        "{}",
        run.stdout
    );
    let doc = out.read_json();
    let g = &doc["gates"][0];
    assert_eq!(g["worst"], 4.0);
    assert_eq!(g["matrix"], "base");
    assert_eq!(g["worst_scenario"], serde_json::json!(["link:hx"]));
    // Under evening alone the worst is 2 (link:hy), within 3.
    let run = redoubt(&[
        "audit",
        f.path(),
        "-q",
        "--kinds",
        "links",
        "--max-shortfall",
        "3",
        "--matrix",
        "evening",
    ]);
    assert_eq!(run.code, 0, "{}", run.stdout);
    // Headroom: least over the pairs is link:hx under base, 4 / 8 = 0.5 (x→h only via the
    // x–y link of 4).
    let (_, doc) = audit_json(f.path(), &["--kinds", "links", "--headroom"]);
    assert_near(num(&doc["headroom"], "value"), 0.5, "headroom");
    assert_eq!(doc["headroom"]["matrix"], "base");
    assert_eq!(doc["headroom"]["failed"], serde_json::json!(["link:hx"]));
}

/// `plan --json` total cost.
fn plan_cost(file: &str, extra: &[&str]) -> f64 {
    let mut args = vec!["--kinds", "sites"];
    args.extend_from_slice(extra);
    plan_json(file, &args).0
}

#[test]
fn plan_covers_every_matrix_and_closes_both() {
    let f = TempPath::with_text("matrices-two", TWO_SITES);
    // Costs by hand in TWO_SITES's comment.
    let base = plan_cost(f.path(), &["--matrix", "base"]);
    let evening = plan_cost(f.path(), &["--matrix", "evening"]);
    let both = plan_cost(f.path(), &[]);
    assert_near(base, 6.0, "base plan");
    assert_near(evening, 14.0, "evening plan");
    assert_near(both, 14.0, "plan over both");
    // The same plan from the edge master (one edge flow model per (scenario, matrix)).
    let both_edge = plan_cost(f.path(), &["--master", "edge"]);
    assert_near(both_edge, 14.0, "plan over both, edge master");
    assert!(both >= base && both >= evening);

    let bought = TempPath::new("matrices-bought", "json");
    let run = redoubt(&[
        "plan",
        f.path(),
        "-q",
        "--kinds",
        "sites",
        "--apply",
        bought.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let (_, after) = audit_json(bought.path(), &["--kinds", "sites"]);
    assert_eq!(scenarios(&after).len(), 10, "5 scenarios × 2 matrices");
    for sc in scenarios(&after) {
        assert_near(num(sc, "shortfall"), 0.0, &format!("{sc}"));
    }
    // Both matrices are there, each closed.
    for m in ["base", "evening"] {
        assert!(scenarios(&after).iter().any(|sc| sc["matrix"] == m));
    }
}

#[test]
fn csv_has_a_matrix_column() {
    let f = TempPath::with_text("matrices-csv", STAR);
    let csv = TempPath::new("matrices", "csv");
    let (_, doc) = audit_json(f.path(), &["--kinds", "links", "--csv", csv.path()]);
    let text = std::fs::read_to_string(&csv.0).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(&header[..2], &["failed", "matrix"]);
    let short = header.iter().position(|h| *h == "shortfall").unwrap();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), scenarios(&doc).len());
    for (row, sc) in rows.iter().zip(scenarios(&doc)) {
        assert_eq!(row[1], sc["matrix"].as_str().unwrap());
        assert_eq!(row[short].parse::<f64>().unwrap(), num(sc, "shortfall"));
    }
    // STAR's comment: link:hy under evening is 2 short.
    assert!(
        rows.iter()
            .any(|r| r[0] == "link:hy" && r[1] == "evening" && r[short] == "2")
    );
}

#[test]
fn worst_lists_pairs() {
    let f = TempPath::with_text("matrices-worst", STAR);
    let out = TempPath::new("matrices-worst", "json");
    let run = redoubt(&[
        "worst",
        f.path(),
        "--k",
        "1",
        "--kinds",
        "links",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc = out.read_json();
    let w = doc["worst"].as_array().unwrap();
    // STAR's comment: link:hx under base (4), then link:hy under evening (2).
    assert_eq!(w.len(), 2, "{doc}");
    assert_eq!(w[0]["failed"], serde_json::json!(["link:hx"]));
    assert_eq!(w[0]["matrix"], "base");
    assert_eq!(w[0]["shortfall"], 4.0);
    assert_eq!(w[1]["failed"], serde_json::json!(["link:hy"]));
    assert_eq!(w[1]["matrix"], "evening");
    assert_eq!(w[1]["shortfall"], 2.0);
}

#[test]
fn check_summarises_matrices() {
    let run = redoubt(&["check", s(&fixture("demo-harrowmere-hours.json"))]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    // Counted from the fixture: 18 demands in base and evening-peak, 19 in the forecast.
    assert!(run.stdout.contains("traffic matrices (3"), "{}", run.stdout);
    assert!(run.stdout.contains("evening-peak — 18 demands"));
    assert!(run.stdout.contains("forecast-next-year — 19 demands"));
}

#[test]
fn files_without_matrices_show_no_matrix() {
    let csv = TempPath::new("nomatrix", "csv");
    let (run, doc) = audit_json(
        s(&demo()),
        &["--csv", csv.path(), "--max-shortfall", "1000"],
    );
    assert!(scenarios(&doc).iter().all(|sc| sc.get("matrix").is_none()));
    assert!(doc["baseline"].get("matrix").is_none());
    assert!(doc["gates"][0].get("matrix").is_none());
    assert!(!run.stdout.contains("matri"), "{}", run.stdout);
    let text = std::fs::read_to_string(&csv.0).unwrap();
    assert!(!text.lines().next().unwrap().contains("matrix"));
}

#[test]
fn shards_merge_and_report_with_matrices() {
    let f = TempPath::with_text("matrices-shard", STAR);
    let dir = TempDir::new("matrices-shard");
    let parts = shard_parts(&dir, &["audit", f.path(), "-q", "--kinds", "links"], 2);
    let (p1, p2) = (&parts[0], &parts[1]);
    let merged = dir.join("merged.json");
    let run = redoubt(&["merge", s(p1), s(p2), "--json", s(&merged)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let (_, whole) = audit_json(f.path(), &["--kinds", "links"]);
    let got: Value = serde_json::from_str(&std::fs::read_to_string(&merged).unwrap()).unwrap();
    assert_eq!(got, whole, "merged parts equal the unsharded run");
    // The HTML report and --why of a matrix scenario (link:hy is worst under evening).
    let run = redoubt(&[
        "audit",
        f.path(),
        "-q",
        "--fail",
        "link:hy",
        "--matrix",
        "evening",
        "--report",
        s(&dir.join("rep")),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("link:hy under matrix evening"),
        "{}",
        run.stdout
    );
    assert!(dir.join("rep").join("report.html").exists());
}
