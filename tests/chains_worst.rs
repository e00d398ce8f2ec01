//! `redoubt worst` on files with `functions` (service chains with gains, plain traffic)
//! against outside references:
//!
//! - brute force with a second solver on a second formulation: every set of at most K
//!   elements (links, sites, risk groups; K ≤ 3) of small random chain networks is valued
//!   by the per-demand layered LP of `tests/common/chain_reference.rs` (one LP per outage,
//!   microlp through good_lp, written from the input contract; not the product's
//!   aggregated layered edge LP nor its layered walks), with this file's own reading of
//!   which sites and links a set fails and which demands it strands. The binary's list
//!   must hold the best-ranked set of each listed outage, its values must be the
//!   reference's, and its i-th value the i-th largest of the reference's, by shortfall and
//!   by lost;
//! - the pruning bound on every solved pair (a set A and a superset C of at most K
//!   elements): the reference's value of C is at most A's lower-bound value (the product's
//!   proven allocation) plus the product's per-element flows of A through C \ A (minus the
//!   required demand C \ A newly strands, for the shortfall), through the library;
//! - a hand-worked network (below, `HAND`), where the per-element flow in origin units
//!   differs from the link load (a gain of 0.5 after the function).
//! - two traffic matrices on the chains demo: the same document whatever the thread
//!   count, and each listed (set, matrix) with the figures of a file holding that matrix
//!   as its demands (the contract's reading of a matrix).

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use std::collections::{BTreeSet, HashMap};

use chain_reference::{RNet, random_net, reference_served, without};
use common::{TempPath, redoubt};
use rand::prelude::*;
use serde_json::Value;

use redoubt::model::Network;
use redoubt::scenario::{self, Kinds, Outage, Scenario};
use redoubt::solve::Engine;
use redoubt::worst::{self, By};

/// A random chain network with risk groups (each a list of link indices; group `gN` is
/// the N-th).
struct Case {
    t: RNet,
    groups: Vec<Vec<usize>>,
}

impl Case {
    /// A random network of `chain_reference::random_net` plus two risk groups of two
    /// random links each.
    fn random(rng: &mut StdRng) -> Case {
        let t = random_net(rng);
        let nl = t.links.len();
        let groups = (0..2)
            .map(|_| {
                let a = rng.random_range(0..nl);
                let b = (a + 1 + rng.random_range(0..nl - 1)) % nl;
                let mut g = vec![a, b];
                g.sort_unstable();
                g
            })
            .collect();
        Case { t, groups }
    }

    /// The network file: `RNet::to_json` with `risk_groups` on the member links.
    fn text(&self) -> String {
        let mut doc = self.t.to_json();
        for (g, members) in self.groups.iter().enumerate() {
            for &l in members {
                let link = &mut doc["links"][l];
                if link.get("risk_groups").is_none() {
                    link["risk_groups"] = Value::Array(Vec::new());
                }
                link["risk_groups"]
                    .as_array_mut()
                    .unwrap()
                    .push(Value::String(format!("g{g}")));
            }
        }
        doc["name"] = Value::String("random-chains".into());
        doc.to_string()
    }

    /// Every element name of `kinds` (`links`, `sites`, `groups`, comma-separated).
    fn pool(&self, kinds: &str) -> Vec<String> {
        let mut out = Vec::new();
        for kind in kinds.split(',') {
            match kind {
                "links" => out.extend((0..self.t.links.len()).map(|l| format!("link:l{l}"))),
                "sites" => out.extend((0..self.t.capacity.len()).map(|v| format!("site:s{v}"))),
                "groups" => out.extend((0..self.groups.len()).map(|g| format!("group:g{g}"))),
                other => panic!("unknown kind {other}"),
            }
        }
        out
    }

    /// The outage of a set of element names by this file's own reading of the contract:
    /// the failed sites, and the failed links (named, members of a named group, incident to
    /// a failed site).
    fn outage(&self, failed: &[String]) -> (BTreeSet<usize>, BTreeSet<usize>) {
        let mut sites = BTreeSet::new();
        let mut links = BTreeSet::new();
        for f in failed {
            let (kind, id) = f.split_once(':').unwrap();
            let i: usize = id[1..].parse().unwrap();
            match kind {
                "site" => {
                    sites.insert(i);
                }
                "link" => {
                    links.insert(i);
                }
                "group" => links.extend(self.groups[i].iter().copied()),
                other => panic!("unknown kind {other}"),
            }
        }
        for (l, (a, b, _, _)) in self.t.links.iter().enumerate() {
            if sites.contains(a) || sites.contains(b) {
                links.insert(l);
            }
        }
        (sites, links)
    }

    /// Σ required of the demands with an end among `sites`.
    fn stranded(&self, sites: &BTreeSet<usize>) -> f64 {
        self.t
            .demands
            .iter()
            .filter(|d| sites.contains(&d.0) || sites.contains(&d.1))
            .map(|d| d.3)
            .sum()
    }

    fn required(&self) -> f64 {
        self.t.demands.iter().map(|d| d.3).sum()
    }
}

/// An outage's figures from the reference: (shortfall, stranded, served_required).
#[derive(Debug, Clone, Copy)]
struct Figures {
    shortfall: f64,
    stranded: f64,
    served: f64,
}

impl Figures {
    fn value(&self, lost: bool) -> f64 {
        if lost {
            self.shortfall + self.stranded
        } else {
            self.shortfall
        }
    }
}

type Key = (BTreeSet<usize>, BTreeSet<usize>);

/// The reference's figures of outages, each solved once.
struct Reference<'a> {
    case: &'a Case,
    solved: HashMap<Key, Figures>,
}

impl<'a> Reference<'a> {
    fn new(case: &'a Case) -> Reference<'a> {
        Reference {
            case,
            solved: HashMap::new(),
        }
    }

    fn figures(&mut self, key: &Key) -> Figures {
        if let Some(f) = self.solved.get(key) {
            return *f;
        }
        let (sites, links) = key;
        let t = &self.case.t;
        let sites_v: Vec<usize> = sites.iter().copied().collect();
        let links_v: Vec<usize> = links.iter().copied().collect();
        let left = without(t, &sites_v, &links_v);
        let served = reference_served(&left, None, None, false);
        let surviving: f64 = left.demands.iter().map(|d| d.3).sum();
        let f = Figures {
            shortfall: (surviving - served).max(0.0),
            stranded: self.case.stranded(sites),
            served,
        };
        self.solved.insert(key.clone(), f);
        f
    }
}

/// Every set of 1..=`k` indices of `0..n` outside `skip`, each ascending, by size.
fn index_sets(n: usize, k: usize, skip: &[usize]) -> Vec<Vec<usize>> {
    let mut out: Vec<Vec<usize>> = Vec::new();
    let mut frontier: Vec<Vec<usize>> = vec![Vec::new()];
    for _ in 0..k {
        let mut next = Vec::new();
        for s in &frontier {
            let from = s.last().map_or(0, |&l| l + 1);
            for e in (from..n).filter(|e| !skip.contains(e)) {
                let mut t = s.clone();
                t.push(e);
                next.push(t);
            }
        }
        out.extend(next.iter().cloned());
        frontier = next;
    }
    out
}

/// Every set of 1..=k names of `pool`, each sorted by name.
fn sets_upto(pool: &[String], k: usize) -> Vec<Vec<String>> {
    index_sets(pool.len(), k, &[])
        .into_iter()
        .map(|s| {
            let mut names: Vec<String> = s.iter().map(|&i| pool[i].clone()).collect();
            names.sort();
            names
        })
        .collect()
}

/// Rank order of two sets of the same value: fewer elements, then name order.
fn before(a: &[String], b: &[String]) -> bool {
    (a.len(), a) < (b.len(), b)
}

/// One listed set of the binary.
#[derive(Debug)]
struct Listed {
    failed: Vec<String>,
    shortfall: f64,
    stranded: f64,
    lost: f64,
    served: f64,
}

/// Runs `redoubt worst` on `path` and returns its list and its proof object.
fn worst_run(path: &str, k: usize, kinds: &str, lost: bool, top: usize) -> (Vec<Listed>, Value) {
    let (stdout, doc) = common::worst_json(path, k, kinds, lost, top);
    assert!(
        stdout.contains("chain of functions"),
        "the chain caution: {stdout}"
    );
    let num = |w: &Value, f: &str| w[f].as_f64().unwrap();
    let rows = doc["worst"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| Listed {
            failed: common::failed_names(w),
            shortfall: num(w, "shortfall"),
            stranded: num(w, "stranded"),
            lost: num(w, "lost"),
            served: num(w, "served_required"),
        })
        .collect();
    (rows, doc["proof"].clone())
}

/// The binary's list against the brute force over every set of at most `k` elements of
/// `kinds`, valued by the reference. Ties are compared through values only (the reference
/// and the product may differ in the last digits): the listed set is the best-ranked set of
/// its outage, its figures are the reference's, the i-th listed value is the i-th largest
/// reference value, and every outage clearly worse than the last listed one is listed.
/// Returns the number of sets the search did not solve (bounded or pruned).
fn check_case(
    case: &Case,
    reference: &mut Reference,
    k: usize,
    kinds: &str,
    lost: bool,
    top: usize,
) -> u64 {
    let file = TempPath::with_text("chains-worst", &case.text());
    let (listed, proof) = worst_run(file.path(), k, kinds, lost, top);
    let label = format!("k={k} kinds={kinds} lost={lost} top={top}");
    let tol = 1e-6 * case.required().max(1.0);
    let floor = proof["floor"].as_f64().unwrap();
    // The best-ranked set of every outage, with its reference value.
    let mut best: HashMap<Key, Vec<String>> = HashMap::new();
    for set in sets_upto(&case.pool(kinds), k) {
        let key = case.outage(&set);
        match best.get(&key) {
            Some(old) if before(old, &set) => {}
            _ => {
                best.insert(key, set);
            }
        }
    }
    let mut values: Vec<(f64, Key)> = best
        .keys()
        .map(|key| (reference.figures(key).value(lost), key.clone()))
        .collect();
    values.sort_by(|a, b| b.0.total_cmp(&a.0));
    let clearly = values.iter().filter(|v| v.0 > floor + tol).count();
    let maybe = values.iter().filter(|v| v.0 > floor - tol).count();
    assert!(
        listed.len() >= clearly.min(top) && listed.len() <= maybe.min(top),
        "{label}: {} listed, {clearly} to {maybe} reference outages above the floor {floor}",
        listed.len()
    );
    for (i, row) in listed.iter().enumerate() {
        let key = case.outage(&row.failed);
        assert_eq!(
            best.get(&key),
            Some(&row.failed),
            "{label}: {:?} is not its outage's best-ranked set",
            row.failed
        );
        let f = reference.figures(&key);
        let what = format!("{label}: {:?}", row.failed);
        for (got, want, name) in [
            (row.shortfall, f.shortfall, "shortfall"),
            (row.stranded, f.stranded, "stranded"),
            (row.lost, f.shortfall + f.stranded, "lost"),
            (row.served, f.served, "served_required"),
        ] {
            assert!(
                (got - want).abs() <= tol,
                "{what}: {name} {got}, reference {want}"
            );
        }
        let got = if lost { row.lost } else { row.shortfall };
        assert!(
            (got - values[i].0).abs() <= tol,
            "{what}: rank {} holds {got}, the reference's rank {} value is {}",
            i + 1,
            i + 1,
            values[i].0
        );
    }
    if let Some(last) = listed.last() {
        let v = if lost { last.lost } else { last.shortfall };
        for (value, key) in &values {
            if *value > v + tol {
                assert!(
                    listed.iter().any(|r| case.outage(&r.failed) == *key),
                    "{label}: {:?} ({value}) is worse than the last listed ({v}) and missing",
                    best[key]
                );
            }
        }
    }
    proof["sets_bounded"].as_u64().unwrap() + proof["sets_pruned"].as_u64().unwrap()
}

/// The pruning bound on every pair (A, C) with A ⊂ C, |C| ≤ k, over links, sites and
/// groups: A solved by the product's evaluator of the file (the layered walk engine,
/// warm from the baseline, as the search does), C valued by the reference. Returns the
/// number of pairs checked.
fn check_pairs(case: &Case, reference: &mut Reference, k: usize) -> usize {
    let net = Network::from_json(&case.text()).unwrap();
    let engine = redoubt::audit::evaluator_for(&net, Engine::Walks);
    let pool = scenario::elements(&net, Kinds::ALL);
    let names: Vec<String> = pool.iter().map(|e| e.name(&net)).collect();
    let tol = 1e-6 * case.required().max(1.0);
    let base = engine.evaluate(&net, &Outage::default(), None).unwrap();
    let mut subsets: Vec<Vec<usize>> = vec![Vec::new()];
    subsets.extend(index_sets(pool.len(), k - 1, &[]));
    let mut checked = 0;
    for a in &subsets {
        let els: Vec<_> = a.iter().map(|&i| pool[i]).collect();
        let o = Scenario::new(&net, &els).outage(&net);
        let ev = engine.evaluate(&net, &o, base.warm.as_ref()).unwrap();
        let flows = worst::element_flows(&net, &o, &ev, &pool);
        let lower_lost = worst::lower_value(&ev.evaluation, By::Lost);
        let lower_short = worst::lower_value(&ev.evaluation, By::Shortfall);
        let a_names: Vec<String> = a.iter().map(|&i| names[i].clone()).collect();
        let a_key = case.outage(&a_names);
        let a_stranded = case.stranded(&a_key.0);
        // Every superset: A plus 1..=k−|A| further elements.
        for t in index_sets(pool.len(), k - a.len(), a) {
            let mut c_names = a_names.clone();
            c_names.extend(t.iter().map(|&i| names[i].clone()));
            let c_key = case.outage(&c_names);
            let f = reference.figures(&c_key);
            let through: f64 = t.iter().map(|&i| flows[i]).sum();
            let bound = lower_lost + through;
            assert!(
                f.shortfall + f.stranded <= bound + tol,
                "{a_names:?} ⊂ {c_names:?}: reference lost {} above the bound {bound}",
                f.shortfall + f.stranded
            );
            let newly = f.stranded - a_stranded;
            let bound = lower_short + through - newly;
            assert!(
                f.shortfall <= bound + tol,
                "{a_names:?} ⊂ {c_names:?}: reference shortfall {} above the bound {bound}",
                f.shortfall
            );
            checked += 1;
        }
    }
    checked
}

/// [`check_case`] on `count` random networks drawn from `seed`, each by shortfall and by
/// lost for several (k, kinds, top); requires that the search left some set unsolved.
fn brute_force_on(seed: u64, count: usize) {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut unsolved = 0;
    for instance in 0..count {
        let case = Case::random(&mut rng);
        let mut reference = Reference::new(&case);
        for (k, kinds, top) in [
            (1, "links,sites,groups", 4),
            (2, "links", 5),
            (2, "sites,groups", 3),
            (3, "links,sites,groups", 6),
        ] {
            for lost in [false, true] {
                let ctx = format!("instance {instance}");
                eprintln!("{ctx}: k={k} {kinds} lost={lost}");
                unsolved += check_case(&case, &mut reference, k, kinds, lost, top);
            }
        }
    }
    assert!(unsolved > 0, "the search pruned some sets");
}

/// [`check_pairs`] with k = 3 on `count` random networks drawn from `seed`.
fn pairs_on(seed: u64, count: usize) {
    let mut rng = StdRng::seed_from_u64(seed);
    let mut checked = 0;
    for _ in 0..count {
        let case = Case::random(&mut rng);
        let mut reference = Reference::new(&case);
        checked += check_pairs(&case, &mut reference, 3);
    }
    assert!(checked > 150 * count, "{checked} pairs");
}

#[test]
fn random_chain_networks_match_the_reference_by_brute_force() {
    brute_force_on(0x3057, 6);
}

#[test]
fn the_pruning_bound_holds_on_every_solved_pair_against_the_reference() {
    pairs_on(0x7A1F, 6);
}

#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
fn many_more_random_chain_networks() {
    brute_force_on(0x5EED_0001, 40);
    pairs_on(0x5EED_0002, 40);
}

// Hand-worked (common practice, no source: the contract's arithmetic applied by hand).
// One-way links ab 10, bd 3, ac 10, cd 10; function fw (gain 0.5) at b (capacity 10) and
// at c (capacity 4). Demands: a→d 12 with chain [fw]; a→b 2, plain. In origin units F:
// through b, F on ab and fw@b, 0.5·F on bd ≤ 3, so F ≤ 6; through c, F ≤ fw@c = 4 (cd
// takes 0.5·F ≤ 10). Plain a→b only on ab (6 + 2 ≤ 10). Baseline: served 6 + 4 + 2 = 12
// of 14, shortfall 2.
// Link failures (shortfall = 14 − served):
//   ab: plain cut off, chain through c 4 → 10.     bd: chain through c 4, plain 2 → 8.
//   ac or cd: chain through b 6, plain 2 → 6.
//   ab+ac, ab+cd: nothing → 14.                    ac+bd, bd+cd: plain 2 → 12.
//   ab+bd: chain through c 4 → 10.                 ac+cd: 6 + 2 → 6.
// Worst five of at most two links: {ab,ac} 14, {ab,cd} 14, {ac,bd} 12, {bd,cd} 12, then
// {ab} 10 before {ab,bd} 10 (fewer elements).
// By lost, single links and sites: site a strands 14 → 14; site d strands 12, the plain
// demand is served → 12; link ab → 10; site b strands 2 and leaves the chain 4 → 8 + 2 =
// 10 (after link:ab in name order); link bd → 8.
// The baseline's walks: 6 through a-b-d, 4 through a-c-d, 2 on ab; per element in origin
// units: ab 8, bd 6, ac 4, cd 4; sites a 12, b 8, c 4, d 10. Link bd carries 0.5 · 6 = 3,
// and failing it loses 6: a bound from link loads (2 + 3) would be below the true 8.
const HAND: &str = r#"{"name":"hand-chain","unit":"units",
 "functions":[{"id":"fw","gain":0.5}],
 "sites":[{"id":"a"},{"id":"b","functions":{"fw":10}},{"id":"c","functions":{"fw":4}},
          {"id":"d"}],
 "links":[{"id":"ab","from":"a","to":"b","capacity":10,"one_way":true},
          {"id":"bd","from":"b","to":"d","capacity":3,"one_way":true},
          {"id":"ac","from":"a","to":"c","capacity":10,"one_way":true},
          {"id":"cd","from":"c","to":"d","capacity":10,"one_way":true}],
 "demands":[{"from":"a","to":"d","volume":12,"chain":["fw"]},
            {"from":"a","to":"b","volume":2}]}"#;

#[test]
fn hand_worked_chain_with_a_gain() {
    let file = TempPath::with_text("hand-chain", HAND);
    let pairs = |rows: &[Listed], lost: bool| -> Vec<(Vec<String>, f64)> {
        rows.iter()
            .map(|r| (r.failed.clone(), if lost { r.lost } else { r.shortfall }))
            .collect()
    };
    let owned = |v: Vec<(Vec<&str>, f64)>| -> Vec<(Vec<String>, f64)> {
        v.into_iter()
            .map(|(n, x)| (n.into_iter().map(String::from).collect(), x))
            .collect()
    };
    let (rows, _) = worst_run(file.path(), 2, "links", false, 5);
    assert_eq!(
        pairs(&rows, false),
        owned(vec![
            (vec!["link:ab", "link:ac"], 14.0),
            (vec!["link:ab", "link:cd"], 14.0),
            (vec!["link:ac", "link:bd"], 12.0),
            (vec!["link:bd", "link:cd"], 12.0),
            (vec!["link:ab"], 10.0),
        ])
    );
    let (rows, _) = worst_run(file.path(), 1, "links,sites", true, 5);
    assert_eq!(
        pairs(&rows, true),
        owned(vec![
            (vec!["site:a"], 14.0),
            (vec!["site:d"], 12.0),
            (vec!["link:ab"], 10.0),
            (vec!["site:b"], 10.0),
            (vec!["link:bd"], 8.0),
        ])
    );
    // The per-element flows of the baseline, in origin units.
    let net = Network::from_json(HAND).unwrap();
    let engine = redoubt::audit::evaluator_for(&net, Engine::Walks);
    let o = Outage::default();
    let base = engine.evaluate(&net, &o, None).unwrap();
    let pool = scenario::elements(&net, Kinds::ALL);
    let flows = worst::element_flows(&net, &o, &base, &pool);
    let got: Vec<(String, f64)> = pool
        .iter()
        .zip(&flows)
        .map(|(e, f)| (e.name(&net), (f * 1e9).round() / 1e9))
        .collect();
    let want: Vec<(String, f64)> = [
        ("link:ab", 8.0),
        ("link:bd", 6.0),
        ("link:ac", 4.0),
        ("link:cd", 4.0),
        ("site:a", 12.0),
        ("site:b", 8.0),
        ("site:c", 4.0),
        ("site:d", 10.0),
    ]
    .into_iter()
    .map(|(n, f)| (n.to_string(), f))
    .collect();
    assert_eq!(got, want);
}

/// The same document, proof counts included, whatever the thread count, on the chains demo
/// with a second traffic matrix (batches are formed in a fixed order; each matrix is
/// searched on its own and the lists merged).
#[test]
fn same_answer_whatever_the_threads_with_two_matrices() {
    let demo = common::fixture("demo-quillhaven-chains.json");
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&demo).unwrap()).unwrap();
    let mut evening = doc["demands"].clone();
    for d in evening.as_array_mut().unwrap() {
        let v = d["volume"].as_f64().unwrap();
        d["volume"] = Value::from(v * 1.25);
    }
    doc["matrices"] = serde_json::json!([{"id": "evening", "demands": evening}]);
    let file = TempPath::with_text("chains-worst-hours", &doc.to_string());
    let docs: Vec<String> = ["1", "2"]
        .iter()
        .map(|t| {
            let out = TempPath::new("threads", "json");
            let run = redoubt(&[
                "worst",
                file.path(),
                "--k",
                "2",
                "--threads",
                t,
                "--json",
                out.path(),
            ]);
            assert_eq!(run.code, 0, "{}", run.stderr);
            std::fs::read_to_string(&out.0).unwrap()
        })
        .collect();
    assert_eq!(docs[0], docs[1]);
    let parsed: Value = serde_json::from_str(&docs[0]).unwrap();
    let matrices: BTreeSet<&str> = parsed["worst"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w["matrix"].as_str().unwrap())
        .collect();
    assert!(matrices.contains("evening"), "{parsed}");
    // Each matrix alone is a file with that matrix as its demands (the contract): every
    // listed (set, matrix) is in that file's own list of ten with the same figures.
    let mut alone = doc.clone();
    alone.as_object_mut().unwrap().remove("matrices");
    let base = TempPath::with_text("chains-worst-base", &alone.to_string());
    alone["demands"] = evening;
    let eve = TempPath::with_text("chains-worst-evening", &alone.to_string());
    for (id, path) in [("base", base.path()), ("evening", eve.path())] {
        let (own, _) = worst_run(path, 2, "links,sites,groups", false, 10);
        for w in parsed["worst"].as_array().unwrap() {
            if w["matrix"] != id {
                continue;
            }
            let failed: Vec<String> = w["failed"]
                .as_array()
                .unwrap()
                .iter()
                .map(|f| f.as_str().unwrap().to_string())
                .collect();
            let row = own.iter().find(|r| r.failed == failed);
            let row = row.unwrap_or_else(|| panic!("{id}: {failed:?} not in {own:?}"));
            assert_eq!(
                w["shortfall"].as_f64(),
                Some(row.shortfall),
                "{id} {failed:?}"
            );
            assert_eq!(
                w["stranded"].as_f64(),
                Some(row.stranded),
                "{id} {failed:?}"
            );
            assert_eq!(
                w["served_required"].as_f64(),
                Some(row.served),
                "{id} {failed:?}"
            );
        }
    }
}
