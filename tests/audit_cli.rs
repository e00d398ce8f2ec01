//! `audit` through the binary: the JSON contract on the demo, hand-computed networks (stranded demands, risk groups, processing bounds, a baseline shortfall), maintenance windows and folding.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use std::collections::BTreeSet;

use common::json::*;
use common::*;
use serde_json::Value;

/// Source: the README's JSON contract ({"scenarios":[{"failed", "served_required",
/// "shortfall", "stranded", "throughput"}]}), the contract's definitions, and the fixture
/// file (elements and required amounts read here with serde_json).
#[test]
fn audit_json_contract_on_demo() {
    let fx = read_fixture(&demo());
    let ids = |list: &str| -> Vec<String> {
        fx[list]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x["id"].as_str().unwrap().to_string())
            .collect()
    };
    let links = ids("links");
    let sites = ids("sites");
    let groups: BTreeSet<String> = fx["links"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|l| l["risk_groups"].as_array().cloned().unwrap_or_default())
        .map(|g| g.as_str().unwrap().to_string())
        .collect();
    let demands: Vec<(String, String, f64)> = fx["demands"]
        .as_array()
        .unwrap()
        .iter()
        .map(|d| {
            let vol = d["volume"].as_f64().unwrap();
            (
                d["from"].as_str().unwrap().to_string(),
                d["to"].as_str().unwrap().to_string(),
                d.get("required").and_then(Value::as_f64).unwrap_or(vol),
            )
        })
        .collect();

    let doc: Value = serde_json::from_str(demo_depth1_single_thread()).expect("JSON");
    let list = scenarios(&doc);
    // Source: README — count = 1 + #links + #sites + #groups at depth 1 with default kinds.
    assert_eq!(list.len(), 1 + links.len() + sites.len() + groups.len());

    let mut expected_names: BTreeSet<Vec<String>> = BTreeSet::new();
    expected_names.insert(Vec::new());
    for l in &links {
        expected_names.insert(vec![format!("link:{l}")]);
    }
    for v in &sites {
        expected_names.insert(vec![format!("site:{v}")]);
    }
    for g in &groups {
        expected_names.insert(vec![format!("group:{g}")]);
    }
    let got_names: BTreeSet<Vec<String>> = list.iter().map(failed_of).collect();
    assert_eq!(got_names, expected_names, "scenario names");

    let baselines = list.iter().filter(|sc| failed_of(sc).is_empty()).count();
    assert_eq!(baselines, 1, "exactly one baseline with failed []");

    for sc in list {
        let failed = failed_of(sc);
        let served = num(sc, "served_required");
        let short = num(sc, "shortfall");
        let stranded = num(sc, "stranded");
        let thr = num(sc, "throughput");
        for (name, x) in [
            ("served_required", served),
            ("shortfall", short),
            ("stranded", stranded),
            ("throughput", thr),
        ] {
            assert!(x.is_finite() && x >= -TOL, "{failed:?}: {name} = {x}");
        }
        // served + shortfall + stranded = Σ required and throughput >= served hold by how the
        // product derives shortfall and throughput, so they are not asserted here; the four
        // values are checked one by one against the hand table in
        // `hand_computed_path_network_depth_1`.
        // Source: contract — stranded = Σ required of demands with a failed endpoint site,
        // computed here from the fixture.
        let want_stranded: f64 = match failed.first().and_then(|f| f.strip_prefix("site:")) {
            Some(site) => demands
                .iter()
                .filter(|d| d.0 == site || d.1 == site)
                .map(|d| d.2)
                .sum(),
            None => 0.0,
        };
        assert_near(stranded, want_stranded, &format!("{failed:?}: stranded"));
    }
}

/// Source: README ("`failed` sorted"; count 1 + Σ_{k<=2} C(elements, k) at depth 2). On the
/// small ring fixture: 4 links + 4 sites + 1 group = 9 elements, 1 + 9 + 36 = 46 scenarios.
#[test]
fn depth_2_failed_lists_are_sorted_and_complete() {
    let fx = read_fixture(&fixture("small-ring.json"));
    let n_links = fx["links"].as_array().unwrap().len();
    let n_sites = fx["sites"].as_array().unwrap().len();
    let groups: BTreeSet<&str> = fx["links"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|l| l["risk_groups"].as_array().into_iter().flatten())
        .map(|g| g.as_str().unwrap())
        .collect();
    let pool = n_links + n_sites + groups.len();
    let ring = fixture("small-ring.json");
    let (_, doc) = audit_json(s(&ring), &["--depth", "2"]);
    let list = scenarios(&doc);
    assert_eq!(list.len(), 1 + pool + pool * (pool - 1) / 2);
    let mut seen = BTreeSet::new();
    for sc in list {
        let failed = failed_of(sc);
        let mut sorted = failed.clone();
        sorted.sort();
        assert_eq!(failed, sorted, "`failed` not sorted");
        assert!(failed.len() <= 2);
        sorted.dedup();
        assert_eq!(sorted.len(), failed.len(), "repeated element in {failed:?}");
        assert!(
            seen.insert(failed.clone()),
            "scenario {failed:?} listed twice"
        );
    }
    assert_eq!(scenarios(&doc).len(), seen.len());
}

/// Source: hand computation (PATH_NET's table; common practice, no source) of every
/// depth-1 scenario, including stranded demands not counted in the shortfall.
#[test]
fn hand_computed_path_network_depth_1() {
    let f = TempPath::with_text("path", PATH_NET);
    let (_, doc) = audit_json(f.path(), &["--depth", "1"]);
    assert_eq!(scenarios(&doc).len(), PATH_EXPECTED.len());
    for row in PATH_EXPECTED {
        check_row(scenario(&doc, row.0), row);
    }
}

/// Source: contract ("Demands with a failed endpoint site are stranded: reported on their
/// own, not counted in the shortfall"); values by hand (PATH_NET's table). Failing site b
/// strands a→b (3) and b→c (5): stranded 8; a→d loses its only path: shortfall 1, not 9.
#[test]
fn site_failure_strands_its_demands() {
    let f = TempPath::with_text("strand", PATH_NET);
    let (_, doc) = audit_json(f.path(), &["--fail", "site:b"]);
    let sc = scenario(&doc, &["site:b"]);
    check_row(sc, &PATH_EXPECTED[5]);
    assert_near(num(sc, "stranded"), 3.0 + 5.0, "stranded = Σ required at b");
    assert_near(num(sc, "shortfall"), 1.0, "stranded not in shortfall");
}

/// Source: contract ("a risk group (every member link)"); the members are read from the
/// files here. Failing group G equals failing its member links together, on the
/// hand-computed network and on every group of the demo.
#[test]
fn risk_group_equals_its_member_links() {
    // Hand-computed network: group:spine = link:ab + link:cd (PATH_NET's table: 5, 6, 0, 5).
    let f = TempPath::with_text("group", PATH_NET);
    let (_, g) = audit_json(f.path(), &["--fail", "group:spine"]);
    let (_, l) = audit_json(f.path(), &["--fail", "link:ab,link:cd"]);
    let gs = scenario(&g, &["group:spine"]);
    check_row(gs, &PATH_EXPECTED[8]);
    let ls = scenario(&l, &["link:ab", "link:cd"]);
    check_row(ls, &PATH_EXPECTED[8]);

    // The demo: the group scenarios of the shared depth-1 run against `--fail` of the
    // member links.
    let fx = read_fixture(&demo());
    let doc: Value = serde_json::from_str(demo_depth1_single_thread()).expect("JSON");
    let demo_path = demo();
    let mut differs_from_baseline = 0;
    let baseline = contract_fields(scenario(&doc, &[]));
    for (group, members) in group_members(&fx) {
        let name = format!("group:{group}");
        let gv = contract_fields(scenario(&doc, &[name.as_str()]));
        let list: Vec<String> = members.iter().map(|m| format!("link:{m}")).collect();
        let (_, ld) = audit_json(s(&demo_path), &["--fail", &list.join(",")]);
        let refs: Vec<&str> = list.iter().map(String::as_str).collect();
        let lv = contract_fields(scenario(&ld, &refs));
        for k in 0..4 {
            assert_near(gv[k], lv[k], &format!("{name} vs {list:?}, field {k}"));
        }
        if (0..4).any(|k| (gv[k] - baseline[k]).abs() > TOL) {
            differs_from_baseline += 1;
        }
    }
    // At least one group must change something, or the comparison would be vacuous.
    assert!(
        differs_from_baseline >= 1,
        "no demo group changes any result"
    );
}

/// Source: hand computation (common practice, no source): with links far larger than any
/// demand, every unit needs one unit of processing and any site can process any demand, so
/// served_required = Σ processing = 3 + 4.5 + 0 + 2 = 9.5 (Σ required 30 is larger);
/// shortfall = 30 − 9.5 = 20.5; throughput = 9.5 too.
#[test]
fn processing_bound_serves_total_processing() {
    let net = r#"{
      "sites": [{"id": "x", "processing": 3}, {"id": "y", "processing": 4.5},
                {"id": "z", "processing": 0}, {"id": "w", "processing": 2}],
      "links": [{"id": "xy", "from": "x", "to": "y", "capacity": 1000},
                {"id": "yz", "from": "y", "to": "z", "capacity": 1000},
                {"id": "zw", "from": "z", "to": "w", "capacity": 1000},
                {"id": "wx", "from": "w", "to": "x", "capacity": 1000},
                {"id": "xz", "from": "x", "to": "z", "capacity": 1000, "one_way": true}],
      "demands": [{"from": "x", "to": "z", "volume": 10, "required": 8},
                  {"from": "y", "to": "w", "volume": 12, "required": 12},
                  {"from": "z", "to": "x", "volume": 9},
                  {"from": "w", "to": "y", "volume": 5, "required": 1}]
    }"#;
    let f = TempPath::with_text("proc-bound", net);
    let (_, doc) = audit_json(f.path(), &["--kinds", "links"]);
    let base = scenario(&doc, &[]);
    assert_near(num(base, "served_required"), 9.5, "served = Σ processing");
    assert_near(num(base, "shortfall"), 20.5, "shortfall = 30 − 9.5");
    assert_near(num(base, "throughput"), 9.5, "throughput = Σ processing");
    // Any single link failure leaves the ring connected: still 9.5 (hand-computed).
    for l in ["xy", "yz", "zw", "wx", "xz"] {
        let sc = scenario(&doc, &[format!("link:{l}").as_str()]);
        assert_near(num(sc, "served_required"), 9.5, &format!("link:{l} served"));
    }
}

/// Source: hand computation (common practice, no source): one link a→b and processing at a,
/// all of size 1e300 (finite, so valid per the contract), serve 1e300; the README's JSON
/// contract has `served_required` and `throughput` as numbers. Regression guard: a former
/// 9-decimal rounding multiplied by 1e9 and overflowed to infinity above ~1.8e299, which
/// serde_json writes as `null`.
#[test]
fn huge_finite_amounts_stay_numbers_in_json() {
    let net = r#"{"sites": [{"id": "a", "processing": 1e300}, {"id": "b"}],
      "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 1e300}],
      "demands": [{"from": "a", "to": "b", "volume": 1e300}]}"#;
    let f = TempPath::with_text("huge", net);
    let (_, doc) = audit_json(f.path(), &["--kinds", "links"]);
    let base = scenario(&doc, &[]);
    for field in ["served_required", "throughput"] {
        let x = base[field]
            .as_f64()
            .unwrap_or_else(|| panic!("{field} is {} in the JSON", base[field]));
        assert!((x - 1e300).abs() <= 1e-6 * 1e300, "{field} = {x}");
    }
}

/// Source: the contract (a unit must be processed once; with no processing anywhere
/// nothing can be served: hand computation). The cause is named as missing processing,
/// not as a missing path; `check` says what the baseline already misses.
#[test]
fn no_processing_anywhere_names_the_cause() {
    let net = r#"{"sites":[{"id":"a"},{"id":"b"},{"id":"c"}],
      "links":[{"id":"ab","from":"a","to":"b","capacity":4},
               {"id":"bc","from":"b","to":"c","capacity":4}],
      "demands":[{"from":"a","to":"c","volume":6},{"from":"a","to":"b","volume":1}]}"#;
    let f = TempPath::with_text("noproc", net);
    let check = redoubt(&["check", f.path()]);
    assert_eq!(check.code, 0, "{}", check.stderr);
    assert!(
        check
            .stdout
            .contains("already short with nothing failed: 2 demands (7 units")
            && check.stdout.contains("no processing site on any walk"),
        "{}",
        check.stdout
    );
    let run = redoubt(&["audit", f.path(), "--quiet"]);
    // The ranked table's baseline row names the cause (rows with a failed link may
    // rightly say "no path").
    assert!(
        run.stdout
            .lines()
            .any(|l| l.contains("baseline") && l.contains("no processing reachable")),
        "{}",
        run.stdout
    );
    let (_, doc) = audit_json(f.path(), &[]);
    assert_near(
        num(&doc["baseline"], "shortfall"),
        7.0,
        "baseline shortfall",
    );
    assert_eq!(
        doc["baseline"]["cut_off_reasons"]["a→c #1"], "no processing reachable",
        "{}",
        doc["baseline"]
    );
}

/// Source: hand computation. Site z is joined to nothing, so demand a→z (3) is short
/// with nothing failed; a→b (5, processing at a, link 10) is served. Failing ab adds
/// 5 to the shortfall: 8 in all, 5 beyond the baseline's 3.
#[test]
fn a_baseline_shortfall_is_stated_and_kept_apart() {
    let net = r#"{"sites":[{"id":"a","processing":20},{"id":"b"},{"id":"z"}],
      "links":[{"id":"ab","from":"a","to":"b","capacity":10}],
      "demands":[{"id":"lost","from":"a","to":"z","volume":3},{"from":"a","to":"b","volume":5}]}"#;
    let f = TempPath::with_text("baseline-short", net);
    let check = redoubt(&["check", f.path()]);
    assert!(
        check.stdout.contains("lost (no path)"),
        "check must name the demand the baseline misses:\n{}",
        check.stdout
    );
    let (run, doc) = audit_json(f.path(), &["--kinds", "links"]);
    assert!(
        run.stdout.contains("The baseline is already 3 units short")
            && run.stdout.contains("beyond baseline"),
        "{}",
        run.stdout
    );
    let ab = scenario(&doc, &["link:ab"]);
    assert_near(num(ab, "shortfall"), 8.0, "link:ab shortfall");
    assert_near(num(ab, "shortfall_beyond_baseline"), 5.0, "beyond baseline");
    assert_near(
        num(&doc["baseline"], "shortfall_beyond_baseline"),
        0.0,
        "baseline",
    );
}

/// Maintenance window on PATH_NET with link bc down. Hand computation (common practice,
/// no source): the down state is PATH_NET's `link:bc` row (served 5, shortfall 6); with ab
/// failing too, only c→d (2) is served: shortfall 9; with cd failing too, only a→b (3):
/// shortfall 8. Every scenario must equal `--fail` of the union.
#[test]
fn down_keeps_elements_down_in_every_scenario() {
    let f = TempPath::with_text("down", PATH_NET);
    let (run, doc) = audit_json(f.path(), &["--down", "link:bc"]);
    assert_eq!(doc["down"], serde_json::json!(["link:bc"]));
    assert!(
        run.stdout.contains("Maintenance window: link:bc"),
        "{}",
        run.stdout
    );
    assert_near(num(&doc["baseline"], "shortfall"), 6.0, "down state");
    assert_near(
        num(scenario(&doc, &["link:ab"]), "shortfall"),
        9.0,
        "ab during bc",
    );
    assert_near(
        num(scenario(&doc, &["link:cd"]), "shortfall"),
        8.0,
        "cd during bc",
    );
    for sc in scenarios(&doc) {
        let failed = failed_of(sc);
        assert!(
            !failed.contains(&"link:bc".to_string()),
            "down is not named: {failed:?}"
        );
        let mut union = failed.clone();
        union.push("link:bc".into());
        let (_, one) = audit_json(f.path(), &["--fail", &union.join(",")]);
        let want = &scenarios(&one)[0];
        assert_eq!(
            contract_fields(sc),
            contract_fields(want),
            "{failed:?} vs --fail {union:?}"
        );
    }
    let again = redoubt(&[
        "audit",
        f.path(),
        "--quiet",
        "--down",
        "link:bc",
        "--fail",
        "link:bc",
    ]);
    assert_eq!(again.code, 2, "a failure of a down element is refused");
    let bad = redoubt(&["audit", f.path(), "--quiet", "--down", "link:zz"]);
    assert_eq!(bad.code, 2);
    assert!(bad.stderr.contains("--down"), "{}", bad.stderr);
}

/// Folding at depth 2 (links and groups) on PATH_NET, recomputed here from the fixture:
/// each scenario's failed link set (groups expanded); a scenario is folded when a
/// scenario with fewer elements has the same set, `same_as` naming the first such with the
/// fewest elements. By hand: `group:spine` = {ab, cd} takes `group:spine + link:ab`,
/// `group:spine + link:cd` and `link:ab + link:cd`: "+3 equivalent".
#[test]
fn depth_2_folds_equivalent_scenarios() {
    let f = TempPath::with_text("fold", PATH_NET);
    let (run, doc) = audit_json(f.path(), &["--depth", "2", "--kinds", "links,groups"]);
    let links_of = |failed: &[String]| -> BTreeSet<String> {
        failed
            .iter()
            .flat_map(|n| match n.as_str() {
                "group:spine" => vec!["ab".to_string(), "cd".to_string()],
                other => vec![other.trim_start_matches("link:").to_string()],
            })
            .collect()
    };
    let all = scenarios(&doc);
    let mut folded = 0;
    for sc in all {
        let failed = failed_of(sc);
        let set = links_of(&failed);
        let smallest = all
            .iter()
            .map(failed_of)
            .filter(|g| links_of(g) == set)
            .min_by_key(|g| g.len())
            .unwrap();
        let want = (smallest.len() < failed.len()).then_some(smallest);
        let got = sc
            .get("same_as")
            .map(|v| failed_of(&serde_json::json!({"failed": v})));
        assert_eq!(got, want, "{failed:?}");
        folded += usize::from(got.is_some());
    }
    assert_eq!(folded, 3);
    assert!(
        run.stdout.contains("group:spine (+3 equivalent)"),
        "{}",
        run.stdout
    );
    assert!(
        !run.stdout.contains("link:ab + link:cd "),
        "folded rows are not listed:\n{}",
        run.stdout
    );
}
