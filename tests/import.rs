//! `redoubt import` through the real binary: an open topology dataset in networkx
//! node-link JSON, and three CSV files, each imported and audited end to end.
//!
//! Dataset: the Internet Topology Zoo's "Abilene" network as packaged by `topohub` 1.5.1
//! (MIT licence; see fixtures/open/README.md). Its own `graph.stats` block (11 nodes,
//! 14 links, 110 demands) is the outside reference for the counts.

mod common;

use std::path::PathBuf;

use serde_json::Value;

/// `redoubt ARGS` through the shared harness: (exit status, stdout, stderr).
fn redoubt(args: &[&str]) -> (i32, String, String) {
    let run = common::redoubt(args);
    (run.code, run.stdout, run.stderr)
}

/// `NAME` in this test process's own temporary folder.
fn temp(name: &str) -> PathBuf {
    common::temp_root().join(name)
}

fn fixture() -> String {
    common::s(&common::fixture("open/abilene-topozoo.json")).to_string()
}

fn read(p: &PathBuf) -> Value {
    serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
}

/// Source: the dataset's own `graph.stats` (nodes, links, demands = 11·10 ordered pairs),
/// and degrees recomputed here from its edge list for the processing placement.
#[test]
fn open_topology_imports_and_audits() {
    let data: Value = serde_json::from_str(&std::fs::read_to_string(fixture()).unwrap()).unwrap();
    let stats = &data["graph"]["stats"];
    let out = temp("abilene.json");
    let (code, stdout, stderr) = redoubt(&[
        "import",
        "networkx",
        &fixture(),
        "--json",
        out.to_str().unwrap(),
        "--capacity",
        "40",
        "--processing-sites",
        "3",
        "--processing",
        "40",
        "--demand",
        "1",
        "--required-fraction",
        "0.8",
    ]);
    assert_eq!(code, 0, "{stderr}");
    assert!(stdout.contains("valid"), "{stdout}");
    let net = read(&out);
    assert_eq!(
        net["sites"].as_array().unwrap().len() as u64,
        stats["nodes"].as_u64().unwrap()
    );
    assert_eq!(
        net["links"].as_array().unwrap().len() as u64,
        stats["links"].as_u64().unwrap()
    );
    assert_eq!(
        net["demands"].as_array().unwrap().len() as u64,
        stats["demands"].as_u64().unwrap()
    );
    // The three sites of highest degree (ties in file order) process.
    let nodes = data["nodes"].as_array().unwrap();
    let mut degree = vec![0usize; nodes.len()];
    let idx = |id: &Value| nodes.iter().position(|n| &n["id"] == id).unwrap();
    for e in data["edges"].as_array().unwrap() {
        degree[idx(&e["source"])] += 1;
        degree[idx(&e["target"])] += 1;
    }
    let mut order: Vec<usize> = (0..nodes.len()).collect();
    order.sort_by(|&a, &b| degree[b].cmp(&degree[a]).then(a.cmp(&b)));
    for (v, s) in net["sites"].as_array().unwrap().iter().enumerate() {
        assert_eq!(s["id"], nodes[v]["name"], "names become ids");
        let want = if order[..3].contains(&v) { 40.0 } else { 0.0 };
        assert_eq!(s["processing"].as_f64().unwrap(), want, "{s}");
    }
    // End to end: 1 baseline + 14 links + 11 sites (no risk groups), every one proven.
    let report = temp("abilene-audit.json");
    let (code, _, stderr) = redoubt(&[
        "audit",
        out.to_str().unwrap(),
        "--quiet",
        "--json",
        report.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{stderr}");
    let doc = read(&report);
    let scenarios = doc["scenarios"].as_array().unwrap();
    assert_eq!(scenarios.len(), 26);
    assert!(
        scenarios
            .iter()
            .all(|s| s["verification"]["status"] == "proven")
    );
    // Baseline: 40 per link direction and 120 processing carry the 88 required (hand: the
    // required total is 110 · 0.8).
    assert_eq!(doc["baseline"]["required"].as_f64().unwrap(), 88.0);
}

/// Source: hand-written equivalent JSON of the same three CSV files; both audits must give
/// the same served, shortfall and stranded values in every scenario.
#[test]
fn three_csv_files_import_like_the_json_they_describe() {
    let sites = temp("sites.csv");
    let links = temp("links.csv");
    let demands = temp("demands.csv");
    std::fs::write(&sites, "id,processing,expand_cost\na,10,1\nb,,\nc,5,2\n").unwrap();
    std::fs::write(
        &links,
        "id,from,to,capacity,one_way,risk_groups\nab,a,b,8,false,duct\nbc,b,c,6,,duct;river\nca,c,a,3,true,\n",
    )
    .unwrap();
    std::fs::write(&demands, "from,to,volume,required\na,c,9,7\nb,a,4,\n").unwrap();
    let out = temp("csv-net.json");
    let (code, _, stderr) = redoubt(&[
        "import",
        "csv",
        "--sites",
        sites.to_str().unwrap(),
        "--links",
        links.to_str().unwrap(),
        "--demands",
        demands.to_str().unwrap(),
        "--json",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{stderr}");
    let by_hand = temp("by-hand.json");
    std::fs::write(
        &by_hand,
        r#"{"name":"imported network",
        "sites":[{"id":"a","processing":10,"expand_cost":1},{"id":"b"},{"id":"c","processing":5,"expand_cost":2}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":8,"one_way":false,"risk_groups":["duct"]},
                 {"id":"bc","from":"b","to":"c","capacity":6,"risk_groups":["duct","river"]},
                 {"id":"ca","from":"c","to":"a","capacity":3,"one_way":true}],
        "demands":[{"from":"a","to":"c","volume":9,"required":7},{"from":"b","to":"a","volume":4}]}"#,
    )
    .unwrap();
    let audit = |net: &PathBuf, name: &str| -> Value {
        let j = temp(name);
        let (code, _, stderr) = redoubt(&[
            "audit",
            net.to_str().unwrap(),
            "--quiet",
            "--json",
            j.to_str().unwrap(),
        ]);
        assert_eq!(code, 0, "{stderr}");
        read(&j)
    };
    let (a, b) = (audit(&out, "a1.json"), audit(&by_hand, "a2.json"));
    let (sa, sb) = (
        a["scenarios"].as_array().unwrap(),
        b["scenarios"].as_array().unwrap(),
    );
    assert_eq!(sa.len(), sb.len());
    assert!(sa.len() > 5, "links, sites and two risk groups fail");
    for (x, y) in sa.iter().zip(sb) {
        assert_eq!(x["failed"], y["failed"]);
        for f in ["served_required", "shortfall", "stranded", "throughput"] {
            assert_eq!(x[f], y[f], "{f} of {}", x["failed"]);
        }
    }
}

/// Source: the contract (bad input exits 2 and names what is wrong).
#[test]
fn bad_import_input_exits_2_with_the_reason() {
    let sites = temp("bad-sites.csv");
    std::fs::write(&sites, "id,procesing\na,1\n").unwrap();
    let empty = temp("empty.csv");
    std::fs::write(&empty, "").unwrap();
    let out = temp("never.json");
    let (code, _, stderr) = redoubt(&[
        "import",
        "csv",
        "--sites",
        sites.to_str().unwrap(),
        "--links",
        empty.to_str().unwrap(),
        "--demands",
        empty.to_str().unwrap(),
        "--json",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("procesing"), "{stderr}");
    assert!(!out.exists(), "nothing written on bad input");
    let graph = temp("bad-graph.json");
    std::fs::write(
        &graph,
        r#"{"nodes":[{"id":1},{"id":2}],"links":[{"source":1,"target":3}]}"#,
    )
    .unwrap();
    let (code, _, stderr) = redoubt(&[
        "import",
        "networkx",
        graph.to_str().unwrap(),
        "--json",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("unknown node") && stderr.contains('3'),
        "{stderr}"
    );
}
