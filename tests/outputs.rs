//! Output that tools and people read, through the real binary: the CSV as a plain CSV
//! reader takes it, `compare` on files it must not compare or with a new point of
//! failure, `plan --apply` as a `diff` shows it, one consistent `--why`, `--shard` with
//! the report flags, and the wording of counts, amounts and durations.
//!
//! Outside references: Python's `csv` module (its default dialect reads RFC 4180 quoting)
//! for the CSV; GNU `diff` for the applied file; hand computations written out beside each
//! check; the unsharded audit of the same binary for `merge`.

mod common;

use std::collections::BTreeSet;
use std::process::Command;

use common::{TempDir, TempPath, demo, redoubt, redoubt_env, s};
use serde_json::Value;

/// A path ring a–b–c–a with processing at a, failure probabilities on every element, and
/// two demands. Invented for these tests.
const RING: &str = r#"{
  "name": "ring-with-risk",
  "unit": "Gbit/s",
  "sites": [
    {"id": "a", "processing": 6, "expand_cost": 1, "expand_max": 20, "failure_probability": 0.001},
    {"id": "b", "processing": 0, "failure_probability": 0.002},
    {"id": "c", "processing": 2, "failure_probability": 0.001}
  ],
  "links": [
    {"id": "ab", "from": "a", "to": "b", "capacity": 5, "failure_probability": 0.01},
    {"id": "bc", "from": "b", "to": "c", "capacity": 4, "failure_probability": 0.01},
    {"id": "ca", "from": "c", "to": "a", "capacity": 3, "failure_probability": 0.02, "risk_groups": ["duct \"east\""]}
  ],
  "demands": [
    {"id": "video, east", "from": "b", "to": "c", "volume": 4, "required": 3},
    {"id": "voice", "from": "a", "to": "b", "volume": 2}
  ]
}"#;

/// Runs `python3 -c SCRIPT ARGS` and returns its standard output parsed as JSON. The CSV
/// tests need Python's csv module (the machine and CI have CPython 3.11).
fn python_json(script: &str, args: &[&str]) -> Value {
    let out = Command::new("python3")
        .arg("-c")
        .arg(script)
        .args(args)
        .output()
        .expect("python3 runs (the machine's CPython; its csv module is the outside reader)");
    assert!(
        out.status.success(),
        "python3 failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("python printed JSON")
}

/// Reads a CSV file as Python's csv module does with default options: `rows` from
/// `csv.reader`, and from `csv.DictReader` (which takes the first row as the header) the
/// `failed` and `caution` cells of every row.
const READ_CSV: &str = r#"
import csv, json, sys
with open(sys.argv[1], newline="") as f:
    rows = list(csv.reader(f))
with open(sys.argv[1], newline="") as f:
    reader = csv.DictReader(f)
    dicts = list(reader)
    names = reader.fieldnames
print(json.dumps({"rows": rows, "fieldnames": names,
                  "failed": [d["failed"] for d in dicts],
                  "caution": [d["caution"] for d in dicts]}))
"#;

fn scenarios(doc: &Value) -> &Vec<Value> {
    doc["scenarios"].as_array().expect("scenarios array")
}

fn failed_of(sc: &Value) -> String {
    sc["failed"]
        .as_array()
        .expect("failed list")
        .iter()
        .map(|v| v.as_str().expect("name").to_string())
        .collect::<Vec<_>>()
        .join(",")
}

/// A CSV reader with default options (Python's csv module) takes the first row as the
/// header: it must be the column names, in the documented order (README "Files"), with
/// one row per scenario of the JSON written by the same run, in the same order, and the
/// caution in the first row's last cell.
#[test]
fn csv_header_is_the_first_row_for_a_plain_csv_reader() {
    let net = TempPath::with_text("ring", RING);
    let dir = TempDir::new("csv");
    let (csv, json) = (dir.join("a.csv"), dir.join("a.json"));
    let run = redoubt(&[
        "audit",
        net.path(),
        "--quiet",
        "--depth",
        "2",
        "--close",
        "--csv",
        s(&csv),
        "--json",
        s(&json),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let py = python_json(READ_CSV, &[s(&csv)]);
    let expected = [
        "failed",
        "rank",
        "required",
        "served_required",
        "shortfall",
        "stranded",
        "throughput",
        "closing_cost",
        "not_closable",
        "probability",
        "same_as",
        "caution",
    ];
    assert_eq!(py["fieldnames"], serde_json::json!(expected), "header");
    let rows = py["rows"].as_array().unwrap();
    assert!(
        rows.iter()
            .all(|r| r.as_array().unwrap().len() == expected.len()),
        "every row has the header's width: {rows:?}"
    );
    let want: Vec<String> = scenarios(&doc).iter().map(failed_of).collect();
    assert_eq!(
        py["failed"],
        serde_json::json!(want),
        "one row per scenario"
    );
    let caution = py["caution"].as_array().unwrap();
    assert!(
        caution[0]
            .as_str()
            .unwrap()
            .starts_with("Caution: a planning aid"),
        "{caution:?}"
    );
    assert!(caution[1..].iter().all(|c| c == ""), "{caution:?}");
    // Depth 2 names hold commas, the group's name holds quotes: RFC 4180 quoting, which
    // the reader must undo to give the names back whole (compared above).
    assert!(
        want.iter().any(|n| n.contains(',') && n.contains('"')),
        "a name with a comma and quotes is among the rows: {want:?}"
    );
}

/// Two sides in different units: the amounts are not comparable, so the pair is refused
/// before any solving (exit 2), naming both units. Same files, same unit: compared.
#[test]
fn compare_refuses_files_in_different_units() {
    let before = TempPath::with_text("gbit", RING);
    let after = TempPath::with_text("mbit", &RING.replace("Gbit/s", "Mbit/s"));
    let run = redoubt(&["compare", before.path(), after.path(), "--quiet"]);
    assert_eq!(run.code, 2, "{}\n{}", run.stdout, run.stderr);
    assert!(
        run.stderr.contains("Gbit/s") && run.stderr.contains("Mbit/s"),
        "{}",
        run.stderr
    );
    assert!(run.stdout.is_empty(), "{}", run.stdout);
    let same = redoubt(&["compare", before.path(), before.path(), "--quiet"]);
    assert_eq!(same.code, 0, "{}", same.stderr);
}

/// Before: sites a (processing 10) and b, two parallel links l1 and l2 of capacity 10,
/// demand a→b of 5. After: l2 shrinks to capacity 1. Hand computation: with l1 failed,
/// before serves 5 over l2 (short 0), after serves 1 (short 4): `link:l1` is newly short,
/// a new single point of failure, though a tolerance of 10 hides the rise from the
/// "worse" list. It fails the compare (exit 1) unless `--allow-new-short`; listed both
/// ways. Every other scenario: the baseline serves 5 on both sides; `link:l2` before
/// serves 5 over l1, after too; `site:a` / `site:b` strand the demand on both sides.
#[test]
fn compare_fails_on_a_newly_short_scenario() {
    let net = |l2: f64| {
        format!(
            r#"{{"name":"pair","unit":"Gbit/s",
            "sites":[{{"id":"a","processing":10}},{{"id":"b"}}],
            "links":[{{"id":"l1","from":"a","to":"b","capacity":10}},
                     {{"id":"l2","from":"a","to":"b","capacity":{l2}}}],
            "demands":[{{"from":"a","to":"b","volume":5}}]}}"#
        )
    };
    let (before, after) = (
        TempPath::with_text("before", &net(10.0)),
        TempPath::with_text("after", &net(1.0)),
    );
    let json = TempPath::new("compare", "json");
    let args = [
        "compare",
        before.path(),
        after.path(),
        "--quiet",
        "--tolerance",
        "10",
        "--json",
        json.path(),
    ];
    let run = redoubt(&args);
    assert_eq!(run.code, 1, "{}\n{}", run.stdout, run.stderr);
    assert!(run.stdout.starts_with("FAIL compare"), "{}", run.stdout);
    assert!(run.stdout.contains("Newly short"), "{}", run.stdout);
    let doc = json.read_json();
    assert_eq!(doc["passed"], false);
    assert_eq!(doc["worse"], serde_json::json!([]), "within the tolerance");
    let new_short = doc["new_short"].as_array().expect("new_short list");
    assert_eq!(new_short.len(), 1, "{new_short:?}");
    assert_eq!(new_short[0]["failed"], serde_json::json!(["link:l1"]));
    assert_eq!(new_short[0]["before"]["shortfall"], 0.0);
    assert_eq!(new_short[0]["after"]["shortfall"], 4.0);

    let mut allowed = args.to_vec();
    allowed.push("--allow-new-short");
    let run = redoubt(&allowed);
    assert_eq!(run.code, 0, "{}\n{}", run.stdout, run.stderr);
    assert!(run.stdout.contains("Newly short"), "still listed");
    let doc = json.read_json();
    assert_eq!(doc["passed"], true);
    assert_eq!(doc["new_short"].as_array().map(Vec::len), Some(1));
}

/// The lines `diff` (GNU diffutils) reports as removed (`<`) and added (`>`).
fn diff_lines(old: &str, new: &str) -> (Vec<String>, Vec<String>) {
    let out = Command::new("diff")
        .args([old, new])
        .output()
        .expect("diff runs");
    let text = String::from_utf8_lossy(&out.stdout);
    let pick = |mark: &str| {
        text.lines()
            .filter_map(|l| l.strip_prefix(mark))
            .map(str::to_string)
            .collect::<Vec<_>>()
    };
    (pick("< "), pick("> "))
}

/// `plan --apply` on the demo, with an `x-` integer too big for a double and integer
/// amounts written as `43`: `diff` shows only the bought sites' `processing` and
/// `expand_max` lines, each `processing` grows by the plan's addition (from the plan's
/// own JSON), each finite `expand_max` shrinks by it, and every other byte stays.
#[test]
fn plan_apply_changes_only_the_bought_lines() {
    let text = std::fs::read_to_string(demo()).unwrap();
    // Indented like the demo (one space per level); a site field and a document field.
    let text = text
        .replacen(
            "\"id\": \"harrow\",",
            "\"id\": \"harrow\",\n   \"x-asset\": 12345678901234567890,",
            1,
        )
        .replacen(
            "\"unit\": \"Gbit/s\",",
            "\"unit\": \"Gbit/s\",\n \"x-budget\": {\"year\": 2027, \"limit\": 43},",
            1,
        );
    let input = TempPath::with_text("apply-in", &text);
    let (applied, plan) = (
        TempPath::new("apply-out", "json"),
        TempPath::new("apply-plan", "json"),
    );
    let run = redoubt(&[
        "plan",
        input.path(),
        "--quiet",
        "--json",
        plan.path(),
        "--apply",
        applied.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let add = plan.read_json()["plan"]["add"]
        .as_object()
        .expect("plan.add")
        .clone();
    assert!(!add.is_empty(), "the demo buys something");
    let out = std::fs::read_to_string(&applied.0).unwrap();
    assert!(
        out.contains("\"x-asset\": 12345678901234567890,"),
        "x- integer kept"
    );
    assert!(
        out.contains("{\"year\": 2027, \"limit\": 43}"),
        "integers stay integers"
    );

    only_bought_lines_changed(&input, &applied, &add);
}

/// `plan --routing steered --apply` writes the file too (it was silently skipped), with
/// the same in-place edit: on the small ring the steered plan buys at c.
#[test]
fn plan_apply_works_with_steered_routing() {
    let text = std::fs::read_to_string(common::fixture("small-ring.json")).unwrap();
    let input = TempPath::with_text("ring-in", &text);
    let (applied, plan) = (
        TempPath::new("ring-out", "json"),
        TempPath::new("ring-plan", "json"),
    );
    let run = redoubt(&[
        "plan",
        input.path(),
        "--quiet",
        "--routing",
        "steered",
        "--json",
        plan.path(),
        "--apply",
        applied.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let add = plan.read_json()["plan"]["add"]
        .as_object()
        .expect("plan.add")
        .clone();
    assert!(!add.is_empty(), "the steered plan buys something");
    assert!(applied.0.exists(), "--apply wrote its file");
    only_bought_lines_changed(&input, &applied, &add);
}

/// `applied` is `input` with each site of `add` (site id → units, from the plan's JSON)
/// bought: `diff` shows only `processing` / `expand_max` lines, at most two per bought
/// site; each `processing` grew by the addition and each finite `expand_max` shrank by
/// it; every other line is byte-identical, in order.
fn only_bought_lines_changed(
    input: &TempPath,
    applied: &TempPath,
    add: &serde_json::Map<String, Value>,
) {
    let text = std::fs::read_to_string(&input.0).unwrap();
    let out = std::fs::read_to_string(&applied.0).unwrap();
    let (removed, added) = diff_lines(input.path(), applied.path());
    let changed = |lines: &[String]| {
        lines
            .iter()
            .map(|l| l.trim().split(':').next().unwrap_or("").to_string())
            .collect::<BTreeSet<_>>()
    };
    for side in [&removed, &added] {
        assert!(
            changed(side)
                .iter()
                .all(|k| k == "\"processing\"" || k == "\"expand_max\""),
            "diff touches only processing / expand_max lines:\n{removed:?}\n{added:?}"
        );
    }
    assert!(
        removed.len() <= 2 * add.len() && added.len() == removed.len(),
        "at most two lines per bought site: {removed:?} / {added:?}"
    );
    let (before, after): (Value, Value) = (
        serde_json::from_str(&text).unwrap(),
        serde_json::from_str(&out).unwrap(),
    );
    for (i, site) in before["sites"].as_array().unwrap().iter().enumerate() {
        let id = site["id"].as_str().unwrap();
        let bought = add.get(id).and_then(Value::as_f64).unwrap_or(0.0);
        let now = &after["sites"][i];
        let p0 = site["processing"].as_f64().unwrap_or(0.0);
        assert_eq!(
            now["processing"].as_f64().unwrap_or(0.0),
            p0 + bought,
            "{id}"
        );
        if let Some(m) = site["expand_max"].as_f64() {
            assert_eq!(now["expand_max"].as_f64(), Some(m - bought), "{id}");
        }
    }
    // Every line that is not a bought amount is byte-identical, in order.
    let keep = |t: &str| {
        t.lines()
            .filter(|l| !(l.contains("\"processing\"") || l.contains("\"expand_max\"")))
            .map(str::to_string)
            .collect::<Vec<_>>()
    };
    assert_eq!(keep(&text), keep(&out));
}

/// The `--why` case: sites s (processing 3, cannot be expanded), x (processing 5,
/// expandable by up to 100 at cost 1) and t; links sx (capacity 10) and xt (100); demand
/// s→t of 20. Hand computation: flow reaches t only through sx, so at most 10 arrives;
/// processing at s and x gives 3 + 5 = 8: served 8, short 12. With x expanded, sx binds:
/// served 10, so processing fixes 2 (x +2, cost 2) and 10 is held back by sx, whose
/// capacity serves one more unit per unit (shadow price 1). So the explanation names sx
/// once, as the link that must grow, never says no link must grow, and suggests buying
/// only at x (s cannot be expanded), in the "why" lines and in "one more unit helps at".
const WHY: &str = r#"{"name":"why-case","unit":"Gbit/s",
 "sites":[{"id":"s","processing":3},{"id":"x","processing":5,"expand_cost":1,"expand_max":100},
          {"id":"t"}],
 "links":[{"id":"sx","from":"s","to":"x","capacity":10},{"id":"xt","from":"x","to":"t","capacity":100}],
 "demands":[{"id":"d","from":"s","to":"t","volume":20}]}"#;

/// Runs the binary with a screen so wide that no table cell wraps (`COLUMNS`).
fn wide(args: &[&str]) -> common::Run {
    redoubt_env(args, &[("COLUMNS", "1000")])
}

/// The sites named in "one more unit helps at A (+p), B (+q)" cells of the worst-scenarios
/// table (the legend's placeholder `X` left out), in order of appearance.
fn helped_sites(stdout: &str) -> Vec<String> {
    let mut sites = Vec::new();
    for cell in stdout.split("helps at ").skip(1) {
        let mut rest = cell;
        while let Some((site, after)) = rest.split_once(" (+") {
            if site.contains(' ') || site.contains(')') || site == "X" {
                break;
            }
            sites.push(site.to_string());
            match after.split_once("), ") {
                Some((_, next)) if !next.starts_with(|c: char| c.is_whitespace()) => rest = next,
                _ => break,
            }
        }
    }
    sites
}

/// The `Why …` section of an audit's standard output, up to the next blank line.
fn why_section(stdout: &str) -> String {
    let from = stdout.find("\nWhy ").expect("a Why section");
    let rest = &stdout[from + 1..];
    let end = rest.find("\n\n").unwrap_or(rest.len());
    // Lines wrap at 100 columns: fold them so sentences can be searched whole.
    rest[..end].replace('\n', " ")
}

#[test]
fn why_names_what_binds_once_and_buys_only_where_expandable() {
    let net = TempPath::with_text("why", WHY);
    let run = wide(&["audit", net.path(), "--depth", "0", "--why", "--quiet"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let why = why_section(&run.stdout);
    assert!(
        why.contains("Processing can fix 2 Gbit/s of the 12 Gbit/s short: add x +2 (cost 2)"),
        "{why}"
    );
    assert!(why.contains("cannot fix the other 10 Gbit/s"), "{why}");
    assert!(why.contains("link sx (s→x) +1"), "{why}");
    assert!(
        !why.contains("Links that would have to grow: none"),
        "{why}"
    );
    assert_eq!(why.matches("sx").count(), 1, "sx named once: {why}");
    // Purchases only at expandable sites, everywhere the report suggests one.
    assert_eq!(
        helped_sites(&run.stdout),
        vec!["x".to_string()],
        "{}",
        run.stdout
    );
    let relief = run
        .stdout
        .split("Where one more unit of processing helps")
        .nth(1)
        .expect("relief table");
    assert!(
        !relief.lines().any(|l| l.starts_with("s ")),
        "s cannot be expanded: {relief}"
    );
}

/// The rule behind one explanation, on every short scenario of the demo explained with
/// `--fail`: when the "links that would have to grow" sentence says none, the sentence
/// on what processing cannot fix does not blame link capacity, and when it names links,
/// the sentence points to them; every site a purchase names can be expanded in the file
/// (it has `expand_cost`, read here with serde_json).
#[test]
fn why_is_consistent_on_every_short_demo_scenario() {
    let json = TempPath::new("demo", "json");
    let run = redoubt(&["audit", s(&demo()), "--quiet", "--json", json.path()]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc = json.read_json();
    let file: Value = serde_json::from_str(&std::fs::read_to_string(demo()).unwrap()).unwrap();
    let expandable: BTreeSet<String> = file["sites"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| s.get("expand_cost").is_some())
        .map(|s| s["id"].as_str().unwrap().to_string())
        .collect();
    let short: Vec<String> = scenarios(&doc)
        .iter()
        .filter(|sc| sc["shortfall"].as_f64().unwrap() > 0.0 && !failed_of(sc).is_empty())
        .map(failed_of)
        .collect();
    assert!(short.len() >= 3, "the demo has short scenarios: {short:?}");
    for name in &short {
        let run = wide(&["audit", s(&demo()), "--quiet", "--fail", name]);
        assert_eq!(run.code, 0, "{name}: {}", run.stderr);
        let why = why_section(&run.stdout);
        let no_link = why.contains("Links that would have to grow: none");
        // The sentence on what processing cannot fix, up to its full stop: does it put
        // the blame on a link or on capacity?
        let blames_links = why.split("cannot fix").nth(1).is_some_and(|rest| {
            let sentence = rest.split(". ").next().unwrap_or(rest);
            sentence.contains("link") || sentence.contains("capacity")
        });
        assert!(
            no_link != blames_links || !why.contains("cannot fix"),
            "{name}: {why}"
        );
        if let Some(buy) = why.split(": add ").nth(1) {
            let list = buy.split(" (cost").next().unwrap();
            for part in list.split(", ") {
                let site = part.split(" +").next().unwrap();
                assert!(expandable.contains(site), "{name}: buys at {site}: {why}");
            }
        }
        for site in helped_sites(&run.stdout) {
            assert!(expandable.contains(&site), "{name}: helps at {site}");
        }
    }
}

/// `--shard` with `--csv`, `--report` or `--why` is refused (exit 2, naming `merge`),
/// before anything is written; `merge --csv --report --why` writes what the unsharded
/// audit writes with the same flags, byte for byte (the reference is that run).
#[test]
fn shard_refuses_report_flags_and_merge_writes_them() {
    let net = TempPath::with_text("ring", RING);
    let dir = TempDir::new("shard");
    for flags in [
        vec!["--csv", "x.csv"],
        vec!["--report", "rep"],
        vec!["--why"],
    ] {
        let flags: Vec<String> = flags
            .iter()
            .map(|f| {
                if f.starts_with("--") {
                    f.to_string()
                } else {
                    s(&dir.join(f)).to_string()
                }
            })
            .collect();
        let part = dir.join("refused.jsonl");
        let mut args = vec!["audit", net.path(), "--shard", "1/2", "--json", s(&part)];
        args.extend(flags.iter().map(String::as_str));
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{flags:?}: {}", run.stderr);
        assert!(run.stderr.contains("merge"), "{}", run.stderr);
        assert!(!part.exists() && !dir.join("x.csv").exists() && !dir.join("rep").exists());
    }
    let (whole_csv, whole_json, whole_rep) =
        (dir.join("w.csv"), dir.join("w.json"), dir.join("wrep"));
    let reference = redoubt(&[
        "audit",
        net.path(),
        "--quiet",
        "--why",
        "--csv",
        s(&whole_csv),
        "--json",
        s(&whole_json),
        "--report",
        s(&whole_rep),
    ]);
    assert_eq!(reference.code, 0, "{}", reference.stderr);
    let parts: Vec<_> = (1..=2).map(|i| dir.join(&format!("p{i}.jsonl"))).collect();
    for (i, p) in parts.iter().enumerate() {
        let shard = format!("{}/2", i + 1);
        let run = redoubt(&[
            "audit",
            net.path(),
            "--quiet",
            "--shard",
            &shard,
            "--json",
            s(p),
        ]);
        assert_eq!(run.code, 0, "{}", run.stderr);
    }
    let (csv, json, rep) = (dir.join("m.csv"), dir.join("m.json"), dir.join("mrep"));
    let merged = redoubt(&[
        "merge",
        s(&parts[1]),
        s(&parts[0]),
        "--why",
        "--csv",
        s(&csv),
        "--json",
        s(&json),
        "--report",
        s(&rep),
    ]);
    assert_eq!(merged.code, 0, "{}", merged.stderr);
    let same = |a: &std::path::Path, b: &std::path::Path| {
        assert!(
            std::fs::read(a).unwrap() == std::fs::read(b).unwrap(),
            "{} differs from {}",
            a.display(),
            b.display()
        );
    };
    same(&csv, &whole_csv);
    same(&json, &whole_json);
    same(&rep.join("report.html"), &whole_rep.join("report.html"));
    same(&rep.join("report.md"), &whole_rep.join("report.md"));
    assert_eq!(
        merged.stdout, reference.stdout,
        "the same text, --why included"
    );
    assert!(merged.stdout.contains("\nWhy "), "{}", merged.stdout);
}

/// Wording that reads right: on a file without `unit` (amounts in `units`) whose
/// baseline is 1 short (hand: demand a→b of 2 over link ab of capacity 1), the text says
/// "1 unit", never "1 units"; no count of 1 takes a plural ("1 outages", "1 scenarios");
/// a shard of one outage says "1 outage".
#[test]
fn counts_and_amounts_read_right() {
    let net = TempPath::with_text(
        "nounit",
        r#"{"sites":[{"id":"a","processing":1},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1}],
            "demands":[{"from":"a","to":"b","volume":2}]}"#,
    );
    let dir = TempDir::new("words");
    let mut texts = Vec::new();
    for args in [
        vec!["check", net.path()],
        vec![
            "audit",
            net.path(),
            "--quiet",
            "--why",
            "--close",
            "--max-shortfall",
            "1",
        ],
        vec!["audit", net.path(), "--quiet", "--fail", "link:ab"],
        vec!["plan", net.path(), "--quiet", "--depth", "0"],
    ] {
        let run = redoubt(&args);
        assert!(run.code <= 1, "{args:?}: {}", run.stderr);
        texts.push(run.stdout.replace('\n', " "));
    }
    let part = dir.join("p.jsonl");
    let run = redoubt(&[
        "audit",
        net.path(),
        "--quiet",
        "--shard",
        "1/4",
        "--json",
        s(&part),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(run.stdout.contains("1 outage solved"), "{}", run.stdout);
    texts.push(run.stdout);
    let all = texts.join("\n");
    assert!(all.contains("already 1 unit short"), "{all}");
    for noun in [
        "units",
        "outages",
        "scenarios",
        "demands",
        "sites",
        "links",
        "gates",
    ] {
        for bad in [
            format!(" 1 {noun} "),
            format!(" 1 {noun},"),
            format!(" 1 {noun})"),
        ] {
            assert!(!all.contains(&bad), "{bad:?} in:\n{all}");
        }
    }
}

/// Durations: a limit of 0.00001 minutes is 0.6 ms (hand: 0.00001 × 60 s = 0.0006 s), so
/// the refusal says milliseconds, never "0 minutes", and never a fraction of a minute.
#[test]
fn durations_are_in_seconds_under_two_minutes() {
    let run = redoubt(&["audit", s(&demo()), "--quiet", "--max-minutes", "0.00001"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains("above the limit of 0.6 ms"),
        "{}",
        run.stderr
    );
    assert!(!run.stderr.contains("0 minutes"), "{}", run.stderr);
    let words: Vec<&str> = run.stderr.split_whitespace().collect();
    for pair in words.windows(2) {
        if pair[1].starts_with("minute") {
            let x: f64 = pair[0].parse().unwrap_or(f64::INFINITY);
            assert!(x >= 2.0, "{} {}: {}", pair[0], pair[1], run.stderr);
        }
    }
}
