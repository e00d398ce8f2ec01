//! Reading `--json` audit documents, and the small networks computed by hand that several
//! test files share (the path network `PATH_NET` and its table).

use std::path::Path;
use std::sync::OnceLock;

use serde_json::Value;

use super::{Run, TempPath, demo, redoubt, s};

/// Absolute tolerance on reported amounts (the values checked here are all below 1000, and
/// the product writes JSON numbers with 12 significant digits).
pub const TOL: f64 = 1e-6;

pub fn read_fixture(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).expect("fixture readable"))
        .expect("fixture is JSON")
}

pub fn num(v: &Value, field: &str) -> f64 {
    v[field]
        .as_f64()
        .unwrap_or_else(|| panic!("field {field:?} is not a number in {v}"))
}

pub fn failed_of(v: &Value) -> Vec<String> {
    v["failed"]
        .as_array()
        .unwrap_or_else(|| panic!("`failed` is not an array in {v}"))
        .iter()
        .map(|x| x.as_str().expect("`failed` holds strings").to_string())
        .collect()
}

pub fn scenarios(doc: &Value) -> &Vec<Value> {
    doc["scenarios"]
        .as_array()
        .expect("top-level `scenarios` array")
}

/// The scenario whose `failed` list is exactly `names` (in any order).
pub fn scenario<'a>(doc: &'a Value, names: &[&str]) -> &'a Value {
    let mut want: Vec<String> = names.iter().map(|n| n.to_string()).collect();
    want.sort();
    scenarios(doc)
        .iter()
        .find(|sc| {
            let mut f = failed_of(sc);
            f.sort();
            f == want
        })
        .unwrap_or_else(|| panic!("no scenario with failed {names:?}"))
}

pub fn assert_near(got: f64, want: f64, what: &str) {
    assert!(
        (got - want).abs() <= TOL,
        "{what}: got {got}, want {want} (tolerance {TOL})"
    );
}

/// Runs `audit FILE ARGS --quiet --json OUT` and returns the exit code and the document.
pub fn audit_json(network: &str, args: &[&str]) -> (Run, Value) {
    let out = TempPath::new("audit", "json");
    let mut all = vec!["audit", network, "--quiet", "--json", out.path()];
    all.extend_from_slice(args);
    let run = redoubt(&all);
    assert_eq!(run.code, 0, "audit {args:?} failed:\n{}", run.stderr);
    let doc = out.read_json();
    (run, doc)
}

/// Runs `audit FILE ARGS --quiet --json OUT` (it must exit 0) and returns the bytes of
/// the JSON file it wrote, for byte-for-byte comparisons with a sharded, merged or
/// resumed run.
pub fn audit_bytes(network: &str, args: &[&str]) -> Vec<u8> {
    let out = TempPath::new("audit-bytes", "json");
    let mut all = vec!["audit", network];
    all.extend_from_slice(args);
    all.extend(["--quiet", "--json", out.path()]);
    let run = redoubt(&all);
    assert_eq!(run.code, 0, "audit {args:?} failed:\n{}", run.stderr);
    std::fs::read(&out.0).unwrap()
}

/// Runs `compare BEFORE AFTER --quiet --json OUT` and returns the run (its exit code is
/// the caller's to check: 1 means something got worse) and the comparison document.
pub fn compare_json(before: &str, after: &str) -> (Run, Value) {
    let out = TempPath::new("compare", "json");
    let run = redoubt(&["compare", before, after, "--quiet", "--json", out.path()]);
    assert!(run.code <= 1, "compare failed:\n{}", run.stderr);
    let doc = out.read_json();
    (run, doc)
}

/// Runs `plan FILE -q ARGS --json OUT` (it must exit 0) and returns the plan's total cost:
/// the document's `cost`, or `plan.cost`, and the document.
pub fn plan_json(network: &str, args: &[&str]) -> (f64, Value) {
    let out = TempPath::new("plan", "json");
    let mut all = vec!["plan", network, "-q"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--json", out.path()]);
    let run = redoubt(&all);
    assert_eq!(run.code, 0, "plan {args:?} failed:\n{}", run.stderr);
    let doc = out.read_json();
    let cost = doc["cost"]
        .as_f64()
        .or_else(|| doc["plan"]["cost"].as_f64())
        .unwrap_or_else(|| panic!("no cost in {doc}"));
    (cost, doc)
}

/// The audit documents (`audit_json` with `args`) of the file `text` and, per matrix id of
/// `ids`, of the file whose only `demands` are that matrix ([`alone`]).
pub fn with_each_matrix_alone(text: &str, ids: &[&str], args: &[&str]) -> (Value, Vec<Value>) {
    let all = TempPath::with_text("matrices-all", text);
    let (_, doc) = audit_json(all.path(), args);
    let own = ids
        .iter()
        .map(|id| {
            let one = TempPath::with_text("matrices-one", &alone(text, id));
            audit_json(one.path(), args).1
        })
        .collect();
    (doc, own)
}

/// The demo's depth-1 audit with default kinds and one thread, written once per test
/// process and shared by the tests that need it.
pub fn demo_depth1_single_thread() -> &'static str {
    static TEXT: OnceLock<String> = OnceLock::new();
    TEXT.get_or_init(|| {
        let out = TempPath::new("demo-d1-t1", "json");
        let run = redoubt(&[
            "audit",
            s(&demo()),
            "--depth",
            "1",
            "--threads",
            "1",
            "--quiet",
            "--json",
            out.path(),
        ]);
        assert_eq!(run.code, 0, "demo audit failed:\n{}", run.stderr);
        std::fs::read_to_string(&out.0).expect("--json file written")
    })
}

/// A path a – b – c – d of duplex links (capacity 10 each), processing 10 at a and at c,
/// risk group "spine" = {ab, cd}. Demands (required/volume): a→b 3/4, b→c 5/5, c→d 2/2,
/// a→d 1/6; Σ required = 11.
///
/// Hand-computed (common practice, no source, from the contract's definitions):
///
/// | scenario    | served_required | shortfall | stranded | throughput |
/// |-------------|-----------------|-----------|----------|------------|
/// | baseline    | 11              | 0         | 0        | 16 (b→c arc carries b→c 5 + a→d 6 > 10: one unit lost) |
/// | link:ab     | 7 (b→c, c→d)    | 4         | 0        | 7          |
/// | link:bc     | 5 (a→b, c→d)    | 6         | 0        | 6          |
/// | link:cd     | 8 (a→b, b→c)    | 3         | 0        | 9          |
/// | site:a      | 7               | 0         | 4        | 7          |
/// | site:b      | 2 (c→d)         | 1 (a→d)   | 8        | 2          |
/// | site:c      | 3 (a→b)         | 1 (a→d)   | 7        | 4          |
/// | site:d      | 8               | 0         | 3        | 9          |
/// | group:spine | 5 (b→c)         | 6         | 0        | 5          |
pub const PATH_NET: &str = r#"{
  "name": "hand-path", "unit": "Gbit/s",
  "sites": [{"id": "a", "processing": 10}, {"id": "b"},
            {"id": "c", "processing": 10}, {"id": "d", "processing": 0}],
  "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 10, "risk_groups": ["spine"]},
            {"id": "bc", "from": "b", "to": "c", "capacity": 10},
            {"id": "cd", "from": "c", "to": "d", "capacity": 10, "one_way": false,
             "risk_groups": ["spine"]}],
  "demands": [{"from": "a", "to": "b", "volume": 4, "required": 3},
              {"from": "b", "to": "c", "volume": 5},
              {"from": "c", "to": "d", "volume": 2, "required": 2},
              {"from": "a", "to": "d", "volume": 6, "required": 1}]
}"#;

/// (failed, served_required, shortfall, stranded, throughput), from the table above.
pub const PATH_EXPECTED: &[(&[&str], f64, f64, f64, f64)] = &[
    (&[], 11.0, 0.0, 0.0, 16.0),
    (&["link:ab"], 7.0, 4.0, 0.0, 7.0),
    (&["link:bc"], 5.0, 6.0, 0.0, 6.0),
    (&["link:cd"], 8.0, 3.0, 0.0, 9.0),
    (&["site:a"], 7.0, 0.0, 4.0, 7.0),
    (&["site:b"], 2.0, 1.0, 8.0, 2.0),
    (&["site:c"], 3.0, 1.0, 7.0, 4.0),
    (&["site:d"], 8.0, 0.0, 3.0, 9.0),
    (&["group:spine"], 5.0, 6.0, 0.0, 5.0),
];

pub fn check_row(sc: &Value, row: &(&[&str], f64, f64, f64, f64)) {
    let (names, served, short, stranded, thr) = *row;
    let what = format!("{names:?}");
    // Source: hand computation in PATH_NET's table (common practice, no source).
    assert_near(
        num(sc, "served_required"),
        served,
        &format!("{what} served"),
    );
    assert_near(num(sc, "shortfall"), short, &format!("{what} shortfall"));
    assert_near(num(sc, "stranded"), stranded, &format!("{what} stranded"));
    assert_near(num(sc, "throughput"), thr, &format!("{what} throughput"));
}

pub fn group_members(fx: &Value) -> Vec<(String, Vec<String>)> {
    let mut groups: std::collections::BTreeMap<String, Vec<String>> = Default::default();
    for l in fx["links"].as_array().unwrap() {
        for g in l["risk_groups"].as_array().into_iter().flatten() {
            groups
                .entry(g.as_str().unwrap().to_string())
                .or_default()
                .push(l["id"].as_str().unwrap().to_string());
        }
    }
    groups.into_iter().collect()
}

pub fn contract_fields(sc: &Value) -> [f64; 4] {
    [
        num(sc, "served_required"),
        num(sc, "shortfall"),
        num(sc, "stranded"),
        num(sc, "throughput"),
    ]
}

/// PATH_NET with failure probabilities on its three links (ab 0.01, bc 0.02, cd 0.05),
/// none on sites or the group, and user fields (`notes`, `x-owner`) that must survive.
pub fn path_net_with_probabilities() -> String {
    let mut v: Value = serde_json::from_str(PATH_NET).unwrap();
    for (i, p) in [0.01, 0.02, 0.05].into_iter().enumerate() {
        v["links"][i]["failure_probability"] = Value::from(p);
    }
    v["notes"] = Value::from("invented test network");
    v["sites"][0]["x-owner"] = Value::from("ops team");
    v.to_string()
}

/// A ring of `n` sites and `n` links (capacity 10, processing 5 at every site) with one
/// demand between opposite sites: many cheap scenarios, for outputs larger than a pipe.
pub fn ring_net(n: usize) -> String {
    let sites: Vec<String> = (0..n)
        .map(|i| format!(r#"{{"id": "s{i}", "processing": 5}}"#))
        .collect();
    let links: Vec<String> = (0..n)
        .map(|i| {
            format!(
                r#"{{"id": "l{i}", "from": "s{i}", "to": "s{}", "capacity": 10}}"#,
                (i + 1) % n
            )
        })
        .collect();
    format!(
        r#"{{"name": "ring", "unit": "Gbit/s", "sites": [{}], "links": [{}],
          "demands": [{{"from": "s0", "to": "s{}", "volume": 8}}]}}"#,
        sites.join(","),
        links.join(","),
        n / 2
    )
}

// Files with several traffic matrices (`matrices`), shared by tests/matrices.rs and
// tests/routing_matrices.rs.

/// The scenario object with `failed` (any order) under `matrix`.
pub fn pair<'a>(doc: &'a Value, names: &[&str], matrix: &str) -> &'a Value {
    let mut want: Vec<String> = names.iter().map(|n| n.to_string()).collect();
    want.sort();
    scenarios(doc)
        .iter()
        .find(|sc| {
            let mut f = failed_of(sc);
            f.sort();
            f == want && sc["matrix"] == matrix
        })
        .unwrap_or_else(|| panic!("no scenario {names:?} under {matrix}"))
}

/// The file `text` with `matrices` removed and `demands` replaced by the demands of matrix
/// `id` (`base`: the file's own).
pub fn alone(text: &str, id: &str) -> String {
    let mut v: Value = serde_json::from_str(text).unwrap();
    let obj = v.as_object_mut().unwrap();
    let ms = obj.remove("matrices").unwrap_or(Value::Array(vec![]));
    if id != "base" {
        let m = ms
            .as_array()
            .unwrap()
            .iter()
            .find(|m| m["id"] == id)
            .unwrap()
            .clone();
        obj.insert("demands".into(), m["demands"].clone());
    }
    serde_json::to_string(&v).unwrap()
}

/// Per scenario key (sorted failed names joined): (served_required, shortfall).
pub fn by_failed(
    doc: &Value,
    matrix: Option<&str>,
) -> std::collections::BTreeMap<String, (f64, f64)> {
    scenarios(doc)
        .iter()
        .filter(|sc| matrix.is_none_or(|m| sc["matrix"] == m))
        .map(|sc| {
            let mut f = failed_of(sc);
            f.sort();
            (
                f.join(","),
                (num(sc, "served_required"), num(sc, "shortfall")),
            )
        })
        .collect()
}
