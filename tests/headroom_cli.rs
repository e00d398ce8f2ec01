//! `--headroom` and `--min-headroom` through the binary: the JSON fields, the top-level
//! value, the text sentence (piped and on a terminal), the CSV column, the gate, `compare`,
//! the routed models and the refusals.
//!
//! Outside references: the input contract (`shared/network-format.md`, section "Growth
//! headroom": λ is the largest factor such that every surviving demand can be served at
//! λ · required at the same time; no value without surviving required demand; the audit's
//! headroom is the least over its scenarios) and small networks whose λ is computed by
//! hand in the comments (common practice, no source). Python's csv module reads the CSV.

mod common;

use std::process::Command;
use std::time::Duration;

use common::json::{TOL, assert_near, failed_of, num, scenarios};
use common::*;
use serde_json::Value;

/// One one-way link a→b of capacity 10, processing 100 at a, one demand a→b of required 4.
/// By hand: the demand's only walk is a→b processed at a; the link carries at most 10, so
/// every λ with 4λ ≤ 10 fits and λ = 10 / 4 = 2.5 (processing allows 100 / 4 = 25).
const ONE_LINK: &str = r#"{"name": "one link", "unit": "Gbit/s",
  "sites": [{"id": "a", "processing": 100}, {"id": "b"}],
  "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 10, "one_way": true}],
  "demands": [{"from": "a", "to": "b", "volume": 4, "required": 4}]}"#;

/// The same link with processing 6 at a. By hand: the link allows 10 / 4 = 2.5, the only
/// processing site 6 / 4 = 1.5, so λ = 1.5 (processing binds).
const PROCESSING_BINDS: &str = r#"{"name": "processing binds",
  "sites": [{"id": "a", "processing": 6}, {"id": "b"}],
  "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 10, "one_way": true}],
  "demands": [{"from": "a", "to": "b", "volume": 4, "required": 4}]}"#;

/// a→b (capacity 10) then b→c (capacity 3), both one way, processing 100 at a; demands
/// a→b and a→c of required 6 each. By hand:
/// - served_required: a→c can get at most 3 (link bc), a→b at most 6, together at most 10
///   on link ab: served = 6 + 3 = 9 of 12, shortfall 3, served/required = 0.75;
/// - headroom: both at λ·6 at once: a→c needs 6λ ≤ 3 (λ ≤ 0.5), link ab 12λ ≤ 10
///   (λ ≤ 0.833): λ = 0.5, not 0.75: the concurrent factor is set by the worst-off
///   demand, not by the total served.
const TWO_DEMANDS: &str = r#"{"name": "two demands",
  "sites": [{"id": "a", "processing": 100}, {"id": "b"}, {"id": "c"}],
  "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 10, "one_way": true},
            {"id": "bc", "from": "b", "to": "c", "capacity": 3, "one_way": true}],
  "demands": [{"from": "a", "to": "b", "volume": 6, "required": 6},
              {"from": "a", "to": "c", "volume": 6, "required": 6}]}"#;

/// a – b – c (duplex links of capacity 100, metric 1), processing 10 at b and 30 at c, one
/// demand a→c of required 10. By hand:
/// - best re-route and steered: 10λ units processed at b or c, at most 10 + 30 = 40, and
///   link a→b carries 10λ ≤ 100: λ = 4;
/// - nearest: both candidates have length 2 (b: a→b, b→c; c: a→b→c), split 5 / 5: site b
///   allows 10 / 5 = 2, site c 30 / 5 = 6, the links 100 / 10 = 10: λ = 2.
const ROUTED: &str = r#"{"name": "routed",
  "sites": [{"id": "a"}, {"id": "b", "processing": 10}, {"id": "c", "processing": 30}],
  "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 100},
            {"id": "bc", "from": "b", "to": "c", "capacity": 100}],
  "demands": [{"from": "a", "to": "c", "volume": 10, "required": 10}]}"#;

/// `audit NET ARGS --quiet --json OUT` (expected to exit `code`): the run and the document.
fn audit(net: &str, args: &[&str], code: i32) -> (Run, Value) {
    let out = TempPath::new("headroom", "json");
    let mut all = vec!["audit", net, "--quiet", "--json", out.path()];
    all.extend_from_slice(args);
    let run = redoubt(&all);
    assert_eq!(
        run.code, code,
        "audit {all:?}:\n{}{}",
        run.stdout, run.stderr
    );
    (run, out.read_json())
}

/// The scenario object whose `failed` list is `names`.
fn by_failed<'a>(doc: &'a Value, names: &[&str]) -> &'a Value {
    scenarios(doc)
        .iter()
        .find(|sc| failed_of(sc) == names)
        .unwrap_or_else(|| panic!("no scenario {names:?}"))
}

/// The `headroom` of a scenario object: `Some(λ)`, or `None` for `null` (the key must be
/// there).
fn headroom_of(sc: &Value) -> Option<f64> {
    let h = sc.get("headroom").expect("scenario has a headroom key");
    if h.is_null() {
        None
    } else {
        Some(h.as_f64().expect("headroom is a number or null"))
    }
}

/// The hand cases of the module constants through the binary. With `--kinds sites` the
/// scenarios are the intact network and each site failed; a failed end site strands the
/// demand, so those scenarios have no surviving required demand: `null`, never 0 or ∞.
#[test]
fn hand_cases() {
    for (text, want) in [(ONE_LINK, 2.5), (PROCESSING_BINDS, 1.5)] {
        let net = TempPath::with_text("hand", text);
        let (_, doc) = audit(net.path(), &["--kinds", "sites", "--headroom"], 0);
        assert_near(
            headroom_of(by_failed(&doc, &[])).unwrap(),
            want,
            "baseline λ",
        );
        assert_eq!(headroom_of(by_failed(&doc, &["site:a"])), None);
        assert_eq!(headroom_of(by_failed(&doc, &["site:b"])), None);
        let top = &doc["headroom"];
        assert_near(num(top, "value"), want, "top-level λ");
        assert_eq!(top["failed"], serde_json::json!([]));
        assert_eq!(top["matrix"], "base");
        assert_eq!(top["status"], "proven");
        assert_eq!(
            by_failed(&doc, &[])["headroom_verification"]["status"],
            "proven"
        );
        assert_near(
            headroom_of(&doc["baseline"]).unwrap(),
            want,
            "baseline object",
        );
    }
    let net = TempPath::with_text("two", TWO_DEMANDS);
    let (_, doc) = audit(net.path(), &["--kinds", "sites", "--headroom"], 0);
    let base = by_failed(&doc, &[]);
    assert_near(num(base, "served_required"), 9.0, "served by hand");
    assert_near(num(base, "shortfall"), 3.0, "shortfall by hand");
    assert_near(headroom_of(base).unwrap(), 0.5, "λ by hand");
}

/// A failed link cuts the only walk: the surviving demand cannot be served at all, so
/// λ = 0 (not null: the demand survives), and it sets the audit's headroom. The sentence
/// says so in words.
#[test]
fn cut_off_demand_gives_zero() {
    let net = TempPath::with_text("cut", ONE_LINK);
    let (run, doc) = audit(net.path(), &["--kinds", "links", "--headroom"], 0);
    assert_eq!(headroom_of(by_failed(&doc, &["link:ab"])), Some(0.0));
    assert_eq!(doc["headroom"]["value"].as_f64(), Some(0.0));
    assert_eq!(doc["headroom"]["failed"], serde_json::json!(["link:ab"]));
    assert!(
        run.stdout
            .contains("under link:ab some surviving required demand cannot be served"),
        "{}",
        run.stdout
    );
}

/// The demo at depth 1: a scenario has λ ≥ 1 exactly when its shortfall is 0 (the
/// contract: λ ≥ 1 means the committed demand fits), under the best re-route and under
/// both routed models; the top-level value is the least scenario value and names a
/// scenario that has it (the first in rank order among equal values).
#[test]
fn demo_headroom_agrees_with_shortfall_and_least() {
    for routing in ["best", "nearest", "steered"] {
        let (_, doc) = audit(s(&demo()), &["--headroom", "--routing", routing], 0);
        let mut least: Option<(f64, usize, Vec<String>)> = None;
        for sc in scenarios(&doc) {
            let Some(h) = headroom_of(sc) else { continue };
            // Routed shortfalls are LP values proven to the solver's gap tolerance
            // (1e-7 of the surviving required demand): below it, nothing is short.
            let slack = if routing == "best" {
                0.0
            } else {
                1e-7 * num(sc, "required")
            };
            let short = num(sc, "shortfall") > slack;
            assert_eq!(
                h >= 1.0,
                !short,
                "{routing} {:?}: headroom {h}, shortfall {}",
                failed_of(sc),
                num(sc, "shortfall")
            );
            let rank = sc["rank"].as_u64().unwrap() as usize;
            if least
                .as_ref()
                .is_none_or(|(v, r, _)| h < *v || (h == *v && rank < *r))
            {
                least = Some((h, rank, failed_of(sc)));
            }
        }
        let (value, _, failed) = least.expect("some scenario has a value");
        let top = &doc["headroom"];
        assert_eq!(top["value"].as_f64(), Some(value), "{routing}");
        assert_eq!(failed_of(top), failed, "{routing}");
    }
}

/// Under fixed routes the hand values of [`ROUTED`]: nearest 2, steered 4, best re-route 4
/// (the intact network). Failing b cuts a from c (λ = 0); failing a or c strands the
/// demand (null).
#[test]
fn routed_models_by_hand() {
    let net = TempPath::with_text("routed", ROUTED);
    for (routing, want) in [("best", 4.0), ("nearest", 2.0), ("steered", 4.0)] {
        let (_, doc) = audit(
            net.path(),
            &["--kinds", "sites", "--headroom", "--routing", routing],
            0,
        );
        assert_near(
            headroom_of(by_failed(&doc, &[])).unwrap(),
            want,
            &format!("{routing} λ"),
        );
        assert_eq!(headroom_of(by_failed(&doc, &["site:b"])), Some(0.0));
        assert_eq!(headroom_of(by_failed(&doc, &["site:a"])), None);
        assert_eq!(doc["headroom"]["failed"], serde_json::json!(["site:b"]));
    }
}

/// The sentence beside the verdict, piped and on a pseudo-terminal, for [`ONE_LINK`]
/// (λ = 2.5: growth 150%, every demand to 250%) and a short case (λ = 0.75: short now,
/// 75% fits); the table's headroom column shows the percentage.
#[test]
fn text_states_headroom_in_words() {
    let grow = TempPath::with_text("grow", ONE_LINK);
    let args = ["audit", grow.path(), "--kinds", "sites", "--headroom"];
    let want = "Headroom: required demand can grow by 150% (every demand to 250% of its \
                required) before any examined scenario is short; baseline sets the limit.";
    let piped = redoubt(&args);
    assert_eq!(piped.code, 0, "{}", piped.stderr);
    let lines: Vec<&str> = piped.stdout.lines().collect();
    assert!(lines[0].starts_with("Verdict:"), "{}", piped.stdout);
    assert!(lines[1].starts_with("Headroom:"), "{}", piped.stdout);
    let flat = piped.stdout.replace('\n', " ");
    assert!(flat.contains(want), "{}", piped.stdout);
    assert!(lines.iter().any(|l| l.contains("headroom")));
    assert!(piped.stdout.contains("250%"), "{}", piped.stdout);
    let term = in_terminal(&args, Duration::from_secs(60), None);
    assert_eq!(term.code, 0, "{}", term.screen);
    let flat = term.screen.replace("\r\n", " ");
    assert!(
        flat.contains("Headroom: required demand can grow by 150%"),
        "{flat}"
    );
    assert!(flat.contains("baseline sets the limit."), "{flat}");

    // PROCESSING_BINDS with required 8: processing allows 6 / 8 = 0.75 (by hand).
    let short = TempPath::with_text(
        "short",
        &PROCESSING_BINDS.replace(
            "\"volume\": 4, \"required\": 4",
            "\"volume\": 8, \"required\": 8",
        ),
    );
    let run = redoubt(&["audit", short.path(), "--kinds", "sites", "--headroom"]);
    let flat = run.stdout.replace('\n', " ");
    assert!(
        flat.contains("Headroom: required demand is short now: only 75% of it fits"),
        "{}",
        run.stdout
    );
}

/// `--min-headroom X` (a factor) on [`ONE_LINK`] (λ = 2.5, printed 250%): 2.5 passes
/// (exit 0), 2.6 fails (exit 1, like every gate), a negative limit is a usage error
/// (exit 2); the gate implies `--headroom` and is in the JSON `gates`.
#[test]
fn min_headroom_gate() {
    let net = TempPath::with_text("gate", ONE_LINK);
    let (run, doc) = audit(
        net.path(),
        &["--kinds", "sites", "--min-headroom", "2.5"],
        0,
    );
    assert!(
        doc.get("headroom").is_some(),
        "--min-headroom implies --headroom"
    );
    assert!(
        run.stdout.contains(
            "PASS --min-headroom 2.5: least headroom 250% of required (baseline) meets the \
             limit 2.5 (250%)"
        ),
        "{}",
        run.stdout
    );
    let (run, doc) = audit(
        net.path(),
        &["--kinds", "sites", "--min-headroom", "2.6"],
        1,
    );
    assert!(
        run.stdout.starts_with("Verdict: FAIL (1 of 1 gate failed)"),
        "{}",
        run.stdout
    );
    let gate = &doc["gates"][0];
    assert_eq!(gate["gate"], "min_headroom");
    assert_eq!(gate["passed"], false);
    assert_near(num(gate, "worst"), 2.5, "gate value");
    let bad = redoubt(&["audit", net.path(), "--min-headroom", "-1"]);
    assert_eq!(bad.code, 2, "{}", bad.stderr);
    assert!(bad.stderr.contains("--min-headroom"), "{}", bad.stderr);
}

/// `compare --headroom`: [`ONE_LINK`] before, the link cut to 8 after (by hand
/// λ = 8 / 4 = 2): the intact scenario lost 50 points of headroom, a reported change that
/// does not fail the compare by itself (no shortfall changed: exit 0); `--min-headroom
/// 2.2` fails on AFTER's 2 (exit 1), `--min-headroom 2` passes.
#[test]
fn compare_reports_headroom_lost() {
    let before = TempPath::with_text("before", ONE_LINK);
    let after = TempPath::with_text(
        "after",
        &ONE_LINK.replace("\"capacity\": 10", "\"capacity\": 8"),
    );
    let json = TempPath::new("compare", "json");
    let run = |extra: &[&str]| {
        let mut args = vec![
            "compare",
            before.path(),
            after.path(),
            "--kinds",
            "sites",
            "--quiet",
            "--json",
            json.path(),
        ];
        args.extend_from_slice(extra);
        redoubt(&args)
    };
    let r = run(&["--headroom"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    let doc = json.read_json();
    let h = &doc["headroom"];
    assert_near(num(&h["before"], "value"), 2.5, "before");
    assert_near(num(&h["after"], "value"), 2.0, "after");
    let lost = h["lost"].as_array().unwrap();
    assert_eq!(lost.len(), 1, "{h}");
    assert_eq!(lost[0]["failed"], serde_json::json!([]));
    assert_near(num(&lost[0], "change_points"), -50.0, "points lost");
    assert!(h["gained"].as_array().unwrap().is_empty());
    assert!(r.stdout.contains("Headroom lost"), "{}", r.stdout);
    let r = run(&["--min-headroom", "2.2"]);
    assert_eq!(r.code, 1, "{}{}", r.stdout, r.stderr);
    assert_eq!(json.read_json()["passed"], false);
    assert!(r.stdout.contains("FAIL --min-headroom 2.2"), "{}", r.stdout);
    let r = run(&["--min-headroom", "2"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    // Without the flag the compare document has no headroom.
    let r = run(&[]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(json.read_json().get("headroom").is_none());
    assert!(!r.stdout.contains("eadroom"), "{}", r.stdout);
}

/// The CSV's `headroom` column (before `caution`), read by Python's csv module: each row's
/// value is the JSON scenario's (empty for `null`).
#[test]
fn csv_headroom_column() {
    let net = TempPath::with_text("csv", ONE_LINK);
    let csv = TempPath::new("headroom", "csv");
    let (_, doc) = audit(
        net.path(),
        &["--kinds", "sites", "--headroom", "--csv", csv.path()],
        0,
    );
    let script = r#"
import csv, json, sys
with open(sys.argv[1], newline="") as f:
    reader = csv.DictReader(f)
    rows = list(reader)
print(json.dumps({"fields": reader.fieldnames,
                  "rows": [[r["failed"], r["headroom"]] for r in rows]}))
"#;
    let out = Command::new("python3")
        .args(["-c", script, csv.path()])
        .output()
        .expect("python3 runs (its csv module is the outside reader)");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let py: Value = serde_json::from_slice(&out.stdout).unwrap();
    let fields: Vec<&str> = py["fields"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f.as_str().unwrap())
        .collect();
    assert_eq!(
        &fields[fields.len() - 3..],
        ["same_as", "headroom", "caution"]
    );
    let rows = py["rows"].as_array().unwrap();
    assert_eq!(rows.len(), scenarios(&doc).len());
    for (row, sc) in rows.iter().zip(scenarios(&doc)) {
        let cell = row[1].as_str().unwrap();
        match headroom_of(sc) {
            None => assert_eq!(cell, "", "{row}"),
            Some(h) => assert!((cell.parse::<f64>().unwrap() - h).abs() <= TOL, "{row}"),
        }
    }
}

/// Without `--headroom` nothing changes: no `headroom` key in the JSON (top level, the
/// baseline, any scenario), no CSV column, no word of it in the text.
#[test]
fn nothing_without_the_flag() {
    let net = TempPath::with_text("plain", TWO_DEMANDS);
    let csv = TempPath::new("plain", "csv");
    let (run, doc) = audit(net.path(), &["--csv", csv.path()], 0);
    assert!(doc.get("headroom").is_none());
    assert!(doc["baseline"].get("headroom").is_none());
    for sc in scenarios(&doc) {
        assert!(sc.get("headroom").is_none() && sc.get("headroom_verification").is_none());
    }
    let header = std::fs::read_to_string(&csv.0).unwrap();
    assert!(!header.lines().next().unwrap().contains("headroom"));
    assert!(!run.stdout.contains("eadroom"), "{}", run.stdout);
}

/// `--headroom` with `--shard`: the parts record that the run asked for headroom and
/// `merge` computes it over every outage, so the merged JSON and text equal the unsharded
/// `--headroom` run's byte for byte (the unsharded run is the reference: it never sees a
/// part file). `--min-headroom` with `--shard` stays a usage error (parts are not gated).
#[test]
fn sharded_headroom_merges_to_the_unsharded_run() {
    let demo = demo();
    let dir = TempDir::new("headroom-shards");
    let whole = dir.join("whole.json");
    let base = ["audit", s(&demo), "--headroom", "--quiet"];
    let full: Vec<&str> = base.iter().copied().chain(["--json", s(&whole)]).collect();
    let reference = redoubt(&full);
    assert_eq!(reference.code, 0, "{}", reference.stderr);
    let parts = shard_parts(&dir, &base, 2);
    let merged = dir.join("merged.json");
    let run = redoubt(&["merge", s(&parts[1]), s(&parts[0]), "--json", s(&merged)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: Value = serde_json::from_slice(&std::fs::read(&merged).unwrap()).unwrap();
    assert!(doc["headroom"]["value"].is_number(), "{}", doc["headroom"]);
    assert!(
        std::fs::read(&merged).unwrap() == std::fs::read(&whole).unwrap(),
        "merged JSON differs from the unsharded --headroom run's"
    );
    assert_eq!(run.stdout, reference.stdout, "merged text differs");

    let net = TempPath::with_text("shard", ONE_LINK);
    let part = TempPath::new("part", "json");
    let refused = redoubt(&[
        "audit",
        net.path(),
        "--min-headroom",
        "1.5",
        "--shard",
        "1/2",
        "--json",
        part.path(),
    ]);
    assert_eq!(refused.code, 2, "{}", refused.stderr);
    assert!(refused.stderr.contains("--shard"), "{}", refused.stderr);
}
