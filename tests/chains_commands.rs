//! Files with service chains (`functions`) through the commands beyond a plain audit:
//! several traffic matrices, shards and `merge`, `--resume`, `compare`. Outside references:
//! the per-demand layered LP on microlp of `tests/common/chain_reference.rs` (a second
//! formulation on a second solver, written from the input contract), the contract's own
//! statements ("every scenario is evaluated under every matrix"; a file holding one matrix
//! as its `demands` is that matrix), and hand calculations written out beside each check.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{RNet, random_net, reference_served};
use common::json::{alone, audit_json, failed_of, num, pair, scenarios};
use common::{TempPath, redoubt};
use rand::prelude::*;
use serde_json::{Value, json};

/// Relative tolerance of the comparisons with the reference: |got − want| <= REL · max(1, |want|).
const REL: f64 = 1e-6;

fn assert_close(got: f64, want: f64, what: &str) {
    assert!(
        (got - want).abs() <= REL * want.abs().max(1.0),
        "{what}: got {got}, want {want} (relative tolerance {REL})"
    );
}

/// The (site, link) a depth-1 scenario of a random chain network fails.
fn failed_element(sc: &Value) -> (Option<usize>, Option<usize>) {
    let failed = failed_of(sc);
    match failed.as_slice() {
        [] => (None, None),
        [one] => match one.split_once(':') {
            Some(("site", id)) => (Some(id[1..].parse().unwrap()), None),
            Some(("link", id)) => (None, Some(id[1..].parse().unwrap())),
            _ => panic!("unexpected element {one}"),
        },
        _ => panic!("depth 1 only: {failed:?}"),
    }
}

/// A second traffic matrix for `t`: every demand at 1.6 times its volume and required
/// (a busy hour), the last one dropped and a new plain demand between the first two sites.
fn busy_hour(t: &RNet) -> RNet {
    let mut demands: Vec<_> = t
        .demands
        .iter()
        .map(|(a, b, v, r, c)| (*a, *b, v * 1.6, r * 1.6, c.clone()))
        .collect();
    demands.pop();
    demands.push((0, 1, 7.5, 5.0, Vec::new()));
    RNet {
        gains: t.gains.clone(),
        capacity: t.capacity.clone(),
        links: t.links.clone(),
        demands,
    }
}

/// `t`'s file with `peak` as a second matrix named `busy`.
fn with_matrix(t: &RNet, peak: &RNet) -> String {
    let mut v = t.to_json();
    let busy = peak.to_json()["demands"].clone();
    v["matrices"] = json!([{"id": "busy", "demands": busy}]);
    v.to_string()
}

/// Every scenario at depth 1 under every matrix of a chain file with `matrices`: the
/// per-demand microlp reference on that matrix's demands gives its served_required and
/// throughput, and the audit of a file holding that matrix alone as its `demands` gives the
/// same scenario objects' values; `--matrix busy` lists exactly the busy pairs. Both chain
/// engines.
#[test]
fn every_scenario_under_every_matrix_equals_the_matrix_alone() {
    let mut rng = StdRng::seed_from_u64(0xC4A1_3A7);
    for instance in 0..6 {
        let t = random_net(&mut rng);
        let peak = busy_hour(&t);
        let text = with_matrix(&t, &peak);
        let file = TempPath::with_text("chain-mx", &text);
        for engine in ["walks", "edge"] {
            let args = ["--threads", "1", "--depth", "1", "--engine", engine];
            let (_, doc) = audit_json(file.path(), &args);
            let per = 1 + t.capacity.len() + t.links.len();
            assert_eq!(
                scenarios(&doc).len(),
                2 * per,
                "each scenario under each matrix"
            );
            for (m, net) in [("base", &t), ("busy", &peak)] {
                let one = TempPath::with_text("chain-mx-alone", &alone(&text, m));
                let (_, lone) = audit_json(one.path(), &args);
                for sc in scenarios(&lone) {
                    let names = failed_of(sc);
                    let names: Vec<&str> = names.iter().map(String::as_str).collect();
                    let got = pair(&doc, &names, m);
                    let what = format!("instance {instance}, {engine}, {names:?} under {m}");
                    assert_eq!(got["verification"]["status"], "proven", "{what}");
                    let (site, link) = failed_element(sc);
                    for (field, by_volume) in [("served_required", false), ("throughput", true)] {
                        let want = reference_served(net, site, link, by_volume);
                        assert_close(num(got, field), want, &format!("{what}: {field}"));
                        assert_close(num(sc, field), want, &format!("{what}: {field} alone"));
                    }
                    // The engines may stop at another point of the proven interval (a
                    // matrix other than `base` starts cold in the file with matrices).
                    assert_close(num(got, "shortfall"), num(sc, "shortfall"), &what);
                }
            }
            let mut sel = args.to_vec();
            sel.extend(["--matrix", "busy"]);
            let (_, busy) = audit_json(file.path(), &sel);
            assert_eq!(scenarios(&busy).len(), per);
            assert!(scenarios(&busy).iter().all(|sc| sc["matrix"] == "busy"));
        }
    }
}

/// Hand-worked file with two matrices: a path a → b → c (links 20 each), firewall `fw`
/// (gain 1) only at b with capacity 10. Base: a→c 8 through fw (fits). Evening: a→c 14
/// through fw, so 4 short at b's firewall whatever else fails; the closing buys 4 of fw at b
/// (the only slot, cost 2 per unit: 8). A plan over both matrices covers the evening
/// baseline (every failure of a, b, ab or bc cuts a→c off, which no purchase mends): the
/// same 4 units, cost 8; with the plan applied, both baselines serve all.
#[test]
fn closings_and_plans_cover_every_matrix() {
    let text = json!({
        "functions": [{"id": "fw", "gain": 1}],
        "sites": [{"id": "a"}, {"id": "b", "functions": {"fw": 10},
                   "expand": {"fw": {"cost": 2, "max": 50}}}, {"id": "c"}],
        "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 20},
                  {"id": "bc", "from": "b", "to": "c", "capacity": 20}],
        "demands": [{"from": "a", "to": "c", "volume": 8, "chain": ["fw"]}],
        "matrices": [{"id": "evening", "demands": [
            {"from": "a", "to": "c", "volume": 14, "chain": ["fw"]}]}]
    })
    .to_string();
    let file = TempPath::with_text("chain-mx-hand", &text);
    let (_, doc) = audit_json(file.path(), &["--depth", "1", "--close"]);
    let evening = pair(&doc, &[], "evening");
    assert_eq!(
        num(evening, "shortfall"),
        4.0,
        "14 through a firewall of 10"
    );
    assert_eq!(num(&evening["closing"], "cost"), 8.0, "4 units at 2 each");
    assert_eq!(evening["closing"]["add_functions"]["b"]["fw"], 4.0);
    assert_eq!(
        num(pair(&doc, &[], "base"), "shortfall"),
        0.0,
        "8 fits in 10"
    );
    let bought = TempPath::new("chain-mx-plan", "json");
    let out = TempPath::new("chain-mx-plan-doc", "json");
    let run = redoubt(&[
        "plan",
        file.path(),
        "--depth",
        "1",
        "--json",
        out.path(),
        "--apply",
        bought.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let plan = out.read_json();
    assert_eq!(num(&plan["plan"], "cost"), 8.0, "{plan}");
    let (_, after) = audit_json(bought.path(), &["--depth", "1"]);
    for m in ["base", "evening"] {
        assert_eq!(num(pair(&after, &[], m), "shortfall"), 0.0, "{after}");
        // Failing site c (the destination) leaves no demand; nothing else changes that.
        assert_eq!(num(pair(&after, &["site:c"], m), "shortfall"), 0.0);
    }
}
