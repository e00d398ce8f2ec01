//! Failure probabilities and `compare` through the binary: risk numbers by hand and by brute force over every state, and a change that removes a needed link.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use common::json::*;
use common::*;
use serde_json::Value;

/// The probability that exactly `failed` of `pool` (id → p) fail, independently
/// (the contract's formula, recomputed here).
fn exact_probability(pool: &[(&str, f64)], failed: &[String]) -> f64 {
    pool.iter()
        .map(|(id, p)| {
            if failed.iter().any(|f| f == &format!("link:{id}")) {
                *p
            } else {
                1.0 - p
            }
        })
        .product()
}

const PATH_POOL: &[(&str, f64)] = &[("ab", 0.01), ("bc", 0.02), ("cd", 0.05)];

/// Hand computation (common practice, no source; shortfalls from PATH_NET's table):
/// P(none) = 0.99·0.98·0.95 = 0.92169; P(ab only) = 0.01·0.98·0.95 = 0.00931; P(bc only)
/// = 0.99·0.02·0.95 = 0.01881; P(cd only) = 0.99·0.98·0.05 = 0.04851. Expected shortfall
/// 4·0.00931 + 6·0.01881 + 3·0.04851 = 0.29563; P(any shortfall) = 0.07663; unexamined
/// 1 − 0.99832 = 0.00168.
#[test]
fn risk_numbers_by_hand_at_depth_1() {
    let f = TempPath::with_text("risk", &path_net_with_probabilities());
    let (run, doc) = audit_json(f.path(), &["--kinds", "links"]);
    let r = &doc["risk"];
    assert_near(num(r, "expected_shortfall"), 0.29563, "expected shortfall");
    assert_near(num(r, "p_any_shortfall"), 0.07663, "P(any shortfall)");
    assert_near(num(r, "uncovered_probability"), 0.00168, "unexamined");
    // Bound: expected + unexamined × Σ required (11).
    assert_near(
        num(r, "expected_shortfall_bound"),
        0.29563 + 0.00168 * 11.0,
        "bound",
    );
    assert_near(
        num(scenario(&doc, &["link:cd"]), "probability"),
        0.04851,
        "P(cd)",
    );
    // Most likely short first: cd (0.04851), bc, ab.
    let likely: Vec<Vec<String>> = r["most_likely_short"]
        .as_array()
        .unwrap()
        .iter()
        .map(failed_of)
        .collect();
    assert_eq!(
        likely,
        vec![vec!["link:cd"], vec!["link:bc"], vec!["link:ab"]]
    );
    assert!(
        run.stdout.contains("expected shortfall 0.296 Gbit/s"),
        "{}",
        run.stdout
    );
    assert!(
        run.stdout.contains("probability of any shortfall 0.0766"),
        "{}",
        run.stdout
    );
    assert!(
        run.stdout.contains("left unexamined 1.68e-3"),
        "{}",
        run.stdout
    );
}

/// Brute force: every one of the 2³ link states run on its own with `--fail`, weighted by
/// its probability computed in the test, must give the depth-3 audit's expected shortfall
/// and probability of any shortfall, with nothing left unexamined. Sites and the group
/// carry no probability: a depth-1 audit over all kinds must say they never fail and
/// give every scenario naming one probability 0.
#[test]
fn risk_agrees_with_brute_force_over_every_state() {
    let f = TempPath::with_text("risk-bf", &path_net_with_probabilities());
    let (_, doc) = audit_json(f.path(), &["--kinds", "links", "--depth", "3"]);
    let (mut expected, mut any) = (0.0, 0.0);
    for mask in 0..8u32 {
        let failed: Vec<String> = (0..3)
            .filter(|b| mask & (1 << b) != 0)
            .map(|b| format!("link:{}", PATH_POOL[b].0))
            .collect();
        let shortfall = if failed.is_empty() {
            num(
                &audit_json(f.path(), &["--kinds", "links", "--depth", "0"]).1["baseline"],
                "shortfall",
            )
        } else {
            let (_, one) = audit_json(f.path(), &["--fail", &failed.join(",")]);
            num(&scenarios(&one)[0], "shortfall")
        };
        let p = exact_probability(PATH_POOL, &failed);
        expected += p * shortfall;
        if shortfall > TOL {
            any += p;
        }
    }
    let r = &doc["risk"];
    assert_near(
        num(r, "expected_shortfall"),
        expected,
        "brute-force expectation",
    );
    assert_near(num(r, "p_any_shortfall"), any, "brute-force P(any)");
    assert_near(
        num(r, "uncovered_probability"),
        0.0,
        "full depth leaves nothing",
    );

    let (run, all) = audit_json(f.path(), &[]);
    let never: Vec<&str> = all["risk"]["never_failing"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert_eq!(
        never,
        ["site:a", "site:b", "site:c", "site:d", "group:spine"],
        "pool elements without a probability"
    );
    assert_near(
        num(scenario(&all, &["site:a"]), "probability"),
        0.0,
        "site:a",
    );
    assert!(
        run.stdout.contains("treated as never failing"),
        "{}",
        run.stdout
    );
}

/// Without any probability there is no `risk` object (nothing to weigh).
#[test]
fn no_probabilities_no_risk_section() {
    let f = TempPath::with_text("norisk", PATH_NET);
    let (run, doc) = audit_json(f.path(), &[]);
    assert!(doc.get("risk").is_none(), "{}", doc["risk"]);
    assert!(!run.stdout.contains("Risk ("), "{}", run.stdout);
}

/// `compare`: removing link bc, which PATH_NET needs (hand table: its failure costs 6),
/// fails the check (exit 1); the baseline got worse 0 → 6; scenarios naming link:bc are
/// removed risks; an identical copy passes (exit 0) with nothing worse or better. A
/// tolerance above the worst increase still fails, since the baseline is newly short
/// (short after, not before), unless `--allow-new-short`.
#[test]
fn compare_gates_a_change_that_removes_a_needed_link() {
    let before = TempPath::with_text("before", PATH_NET);
    let mut v: Value = serde_json::from_str(PATH_NET).unwrap();
    v["links"].as_array_mut().unwrap().remove(1);
    let after = TempPath::with_text("after", &v.to_string());
    let copy = TempPath::with_text("copy", PATH_NET);
    let out = TempPath::new("compare", "json");

    let run = redoubt(&[
        "compare",
        before.path(),
        after.path(),
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 1, "{}\n{}", run.stdout, run.stderr);
    assert!(run.stdout.starts_with("FAIL compare"), "{}", run.stdout);
    let doc = out.read_json();
    assert_eq!(doc["passed"], false);
    let base = doc["worse"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| failed_of(c).is_empty())
        .expect("the baseline got worse");
    assert_near(num(base, "delta_shortfall"), 6.0, "baseline 0 → 6");
    let removed: Vec<Vec<String>> = doc["removed_risks"]
        .as_array()
        .unwrap()
        .iter()
        .map(failed_of)
        .collect();
    assert_eq!(removed, vec![vec!["link:bc".to_string()]]);
    assert_eq!(doc["elements_removed"], serde_json::json!(["link:bc"]));

    let same = redoubt(&[
        "compare",
        before.path(),
        copy.path(),
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert_eq!(same.code, 0, "{}\n{}", same.stdout, same.stderr);
    let doc = out.read_json();
    assert_eq!(doc["worse"].as_array().unwrap().len(), 0);
    assert_eq!(doc["better"].as_array().unwrap().len(), 0);
    assert_eq!(
        doc["matched_scenarios"],
        1 + 3 + 4 + 1,
        "baseline, links, sites, group"
    );

    let mut loose = vec![
        "compare",
        before.path(),
        after.path(),
        "--quiet",
        "--tolerance",
        "100",
    ];
    let run = redoubt(&loose);
    assert_eq!(run.code, 1, "newly short: {}", run.stdout);
    loose.push("--allow-new-short");
    let run = redoubt(&loose);
    assert_eq!(run.code, 0, "{}", run.stdout);
    assert!(run.stdout.contains("Caution:"), "{}", run.stdout);
}

/// `compare` lists what the change does to the file: the edits below are made here to a
/// copy of the path network (link `ab` capacity halved, a link `ad` added, the demand's
/// required amount raised), so each expected row is known from the edit itself, not from
/// the program; the text shows `link:ab capacity 10 → 5` as a reviewer reads it.
#[test]
fn compare_lists_the_changed_fields_of_the_file() {
    let before = TempPath::with_text("before-edits", PATH_NET);
    let mut v: Value = serde_json::from_str(PATH_NET).unwrap();
    let ab = v["links"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|l| l["id"] == "ab")
        .expect("link ab");
    let old_cap = ab["capacity"].as_f64().unwrap();
    ab["capacity"] = serde_json::json!(old_cap / 2.0);
    v["links"].as_array_mut().unwrap().push(serde_json::json!(
        {"id": "ad", "from": "a", "to": "d", "capacity": 3}
    ));
    let demand = &mut v["demands"][0];
    let old_req = demand["required"]
        .as_f64()
        .or_else(|| demand["volume"].as_f64())
        .unwrap();
    demand["required"] = serde_json::json!(old_req + 1.0);
    let label = demand["id"].as_str().map(str::to_string);
    let after = TempPath::with_text("after-edits", &v.to_string());
    let out = TempPath::new("compare-edits", "json");
    let run = redoubt(&[
        "compare",
        before.path(),
        after.path(),
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert!(run.code == 0 || run.code == 1, "{}", run.stderr);
    let doc = out.read_json();
    let rows: Vec<(String, String)> = doc["file_changes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| {
            (
                e["element"].as_str().unwrap().to_string(),
                e["field"].as_str().unwrap().to_string(),
            )
        })
        .collect();
    let demand_element = format!("demand:{}", label.unwrap_or_else(|| "a→b #1".to_string()));
    assert_eq!(
        rows,
        vec![
            ("link:ab".to_string(), "capacity".to_string()),
            ("link:ad".to_string(), "added".to_string()),
            (demand_element, "required".to_string()),
        ],
        "{}",
        doc["file_changes"]
    );
    let cap = &doc["file_changes"][0];
    assert_near(num(cap, "before"), old_cap, "capacity before");
    assert_near(num(cap, "after"), old_cap / 2.0, "capacity after");
    assert!(cap["before"].is_number() && doc["file_changes"][1]["before"].is_null());
    assert_near(
        num(&doc["file_changes"][2], "after"),
        old_req + 1.0,
        "required after",
    );
    assert!(
        run.stdout.contains("What changed in the file (3 changes"),
        "{}",
        run.stdout
    );
    let line = run
        .stdout
        .lines()
        .find(|l| l.starts_with("link:ab "))
        .expect("a row for link:ab");
    let words: Vec<&str> = line.split_whitespace().collect();
    assert_eq!(words[1], "capacity", "{line}");
}

/// `compare --report DIR` writes the comparison as report.html and report.md. The rows
/// of every table are checked against the `--json` of the same run (a second output of
/// the binary, written by another exporter), the page against being self-contained (no
/// address it would fetch), and both against the caution.
#[test]
fn compare_report_lists_every_scenario_of_the_json() {
    let before = TempPath::with_text("before-report", PATH_NET);
    let mut v: Value = serde_json::from_str(PATH_NET).unwrap();
    v["links"].as_array_mut().unwrap().remove(1);
    let after = TempPath::with_text("after-report", &v.to_string());
    let out = TempPath::new("compare-report", "json");
    let dir = TempDir::new("compare-report-dir");
    let run = redoubt(&[
        "compare",
        before.path(),
        after.path(),
        "--quiet",
        "--top",
        "1",
        "--json",
        out.path(),
        "--report",
        dir.join("").to_str().unwrap(),
    ]);
    assert_eq!(run.code, 1, "{}\n{}", run.stdout, run.stderr);
    assert_eq!(
        dir.names(),
        ["report.html", "report.md"]
            .iter()
            .map(|s| s.to_string())
            .collect()
    );
    let doc = out.read_json();
    let md = std::fs::read_to_string(dir.join("report.md")).unwrap();
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    let words = |c: &Value| {
        let f = failed_of(c);
        if f.is_empty() {
            "baseline".to_string()
        } else {
            f.join(" + ")
        }
    };
    let worse = doc["worse"].as_array().unwrap();
    assert!(worse.len() > 1, "more rows than --top 1: {doc}");
    let section = md
        .split("## Got worse")
        .nth(1)
        .expect("a Got worse section")
        .split("\n## ")
        .next()
        .unwrap();
    let rows: Vec<&str> = section
        .lines()
        .filter(|l| l.starts_with("| ") && !l.starts_with("| failed"))
        .collect();
    assert_eq!(rows.len(), worse.len(), "{section}");
    for (row, c) in rows.iter().zip(worse) {
        let cells: Vec<&str> = row.trim_matches('|').split(" | ").map(str::trim).collect();
        assert_eq!(cells[0], words(c), "{row}");
        assert_near(
            cells[2].parse().unwrap(),
            num(&c["after"], "shortfall"),
            "shortfall after",
        );
        assert!(
            html.contains(&format!("<td class=\"k\">{}</td>", cells[0])),
            "{row}"
        );
    }
    assert!(md.contains("| link:bc | removed |"), "{md}");
    for page in [&md, &html] {
        assert!(page.contains("Caution:"));
    }
    assert!(
        !html.contains("src=") && !html.contains("href="),
        "self-contained"
    );
}

/// `compare` on a file with traffic matrices matches (scenario, matrix) pairs and names the
/// matrix of every changed pair: the demo's hours file with one link's capacity cut to a
/// tenth (an edit made here, so which pairs can change is known: only pairs whose routes
/// need that link). Each `worse` entry must carry a `matrix` that the file lists, the text
/// must show it, and the same comparison through a file without matrices must not.
#[test]
fn compare_names_the_matrix_of_each_changed_pair() {
    let hours = fixture("demo-harrowmere-hours.json");
    let mut v: Value = serde_json::from_str(&std::fs::read_to_string(&hours).unwrap()).unwrap();
    let ids: Vec<String> = std::iter::once("base".to_string())
        .chain(
            v["matrices"]
                .as_array()
                .unwrap()
                .iter()
                .map(|m| m["id"].as_str().unwrap().to_string()),
        )
        .collect();
    let cap = v["links"][0]["capacity"].as_f64().unwrap();
    v["links"][0]["capacity"] = serde_json::json!(cap / 10.0);
    let after = TempPath::with_text("hours-after", &v.to_string());
    let out = TempPath::new("compare-hours", "json");
    let run = redoubt(&[
        "compare",
        s(&hours),
        after.path(),
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 1, "{}\n{}", run.stdout, run.stderr);
    let doc = out.read_json();
    let worse = doc["worse"].as_array().unwrap();
    assert!(!worse.is_empty(), "{doc}");
    for c in worse {
        let m = c["matrix"].as_str().expect("a matrix on every pair");
        assert!(ids.iter().any(|i| i == m), "{m} not in {ids:?}");
    }
    let first = &worse[0];
    let words = format!(
        "{} under matrix {}",
        failed_of(first).join(" + "),
        first["matrix"].as_str().unwrap()
    );
    let shown = if failed_of(first).is_empty() {
        format!(
            "baseline under matrix {}",
            first["matrix"].as_str().unwrap()
        )
    } else {
        words
    };
    assert!(run.stdout.contains(&shown), "{shown}\n{}", run.stdout);

    let plain = TempPath::with_text("plain-before", PATH_NET);
    let mut p: Value = serde_json::from_str(PATH_NET).unwrap();
    p["links"][0]["capacity"] = serde_json::json!(1);
    let plain_after = TempPath::with_text("plain-after", &p.to_string());
    let run = redoubt(&[
        "compare",
        plain.path(),
        plain_after.path(),
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 1, "{}", run.stderr);
    let doc = out.read_json();
    assert!(doc["worse"][0].get("matrix").is_none(), "{doc}");
    assert!(!run.stdout.contains("under matrix"), "{}", run.stdout);
}

/// A change that adds traffic matrices (the plain demo before, its hours twin after: the
/// same network and base demands with two matrices more, as fixtures/make_fixtures.py
/// writes them) matches every base pair, so nothing got worse or better under `base`;
/// the new matrices' pairs are added risks, and the file changes list both matrices as
/// added.
#[test]
fn compare_matches_base_pairs_when_matrices_are_added() {
    let out = TempPath::new("compare-add-matrices", "json");
    let before = demo();
    let after = fixture("demo-harrowmere-hours.json");
    let run = redoubt(&[
        "compare",
        s(&before),
        s(&after),
        "--quiet",
        "--json",
        out.path(),
    ]);
    assert!(run.code == 0 || run.code == 1, "{}", run.stderr);
    let doc = out.read_json();
    let (_, plain) = audit_json(s(&before), &[]);
    let pairs = scenarios(&plain).len() as u64;
    assert_eq!(doc["matched_scenarios"].as_u64(), Some(pairs), "{doc}");
    let added = doc["added_risks"].as_array().unwrap();
    assert_eq!(added.len() as u64, 2 * pairs, "two new matrices");
    assert!(added.iter().all(|r| r["matrix"] != "base"), "{doc}");
    let matrices: Vec<&str> = doc["file_changes"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["element"].as_str().unwrap().starts_with("matrix:"))
        .map(|e| e["field"].as_str().unwrap())
        .collect();
    assert_eq!(matrices, vec!["added", "added"], "{}", doc["file_changes"]);
}
