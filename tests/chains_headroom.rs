//! Growth headroom (`--headroom`, `--min-headroom`) on files with `functions` (service
//! chains, gains, plain traffic), through the binary.
//!
//! Outside references:
//! - the input contract (`shared/network-format.md`, "Growth headroom" and "Service chains
//!   and traffic that changes volume"): λ is the largest factor such that every surviving
//!   demand is served at λ · required at once; each link traversal and each function's
//!   capacity is used by the volume at that point of the chain (origin units scaled by the
//!   gains passed so far); plain traffic has the empty chain and shares the links;
//! - hand-worked cases, each with its calculation in a comment (common practice, no source:
//!   the arithmetic is the contract's definition applied by hand);
//! - a second formulation written from the contract (`tests/common/chain_reference.rs`,
//!   `reference_headroom`): one layered commodity *per demand* (the product aggregates per
//!   origin and chain) with every origin sending exactly λ · required, solved by microlp (a
//!   simplex method, through good_lp) rather than the product's backends, over random small
//!   networks with random chains and gains, every single-failure scenario;
//! - a chain of one gain-1 function against the same file without `functions` (the base
//!   model, checked against its own references in `tests/headroom_reference.rs`), on the
//!   shipped examples.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{
    assert_close, failed_element, random_net, reference_headroom, with_one_function,
};
use common::json::{audit_json, failed_of, num, scenario, scenarios};
use common::{TempDir, TempPath, redoubt, s, shard_parts};
use rand::prelude::*;
use serde_json::{Value, json};

/// The `headroom` of a scenario object: `Some(λ)`, or `None` for `null` (the key must be
/// there).
fn headroom_of(sc: &Value) -> Option<f64> {
    let h = sc.get("headroom").expect("scenario has a headroom key");
    h.as_f64().or_else(|| {
        assert!(h.is_null(), "headroom is a number or null: {h}");
        None
    })
}

/// `audit NET --quiet --json OUT --headroom ARGS` (it must exit 0): the run and document.
fn audit_headroom(net: &Value, args: &[&str]) -> (common::Run, Value) {
    let file = TempPath::with_text("chain-headroom", &net.to_string());
    let mut all = vec!["--headroom", "--threads", "1"];
    all.extend_from_slice(args);
    audit_json(file.path(), &all)
}

/// The baseline scenario's headroom of `net` (audited with `--kinds links`), required to
/// be proven.
fn baseline_headroom(net: &Value) -> f64 {
    let (_, doc) = audit_headroom(net, &["--kinds", "links"]);
    let base = scenario(&doc, &[]);
    assert_eq!(base["headroom_verification"]["status"], "proven", "{base}");
    headroom_of(base).expect("the baseline has surviving required demand")
}

/// Path a — b — c (duplex links of capacity 100); `fw` (gain 1, capacity 50) at a and
/// `dpi` (gain 1, capacity `dpi`) at b; one demand a→c of required 4 with chain fw > dpi.
/// Its only layered walk applies fw at a, crosses a→b, applies dpi at b, crosses b→c:
/// fw takes 4λ ≤ 50, a→b 4λ ≤ 100, dpi 4λ ≤ `dpi`, b→c 4λ ≤ 100.
fn two_functions(dpi: f64) -> Value {
    json!({
        "name": "two functions", "unit": "Gbit/s",
        "functions": [{"id": "fw", "gain": 1}, {"id": "dpi", "gain": 1}],
        "sites": [{"id": "a", "functions": {"fw": 50}}, {"id": "b", "functions": {"dpi": dpi}},
                  {"id": "c"}],
        "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 100},
                  {"id": "bc", "from": "b", "to": "c", "capacity": 100}],
        "demands": [{"from": "a", "to": "c", "volume": 4, "required": 4,
                     "chain": ["fw", "dpi"]}]
    })
}

/// By hand (see [`two_functions`]): dpi 12 binds, λ = 12 / 4 = 3 (fw allows 12.5, the
/// links 25). With `--kinds sites`: site a or c failed strands the demand (no value,
/// `null`); site b failed takes dpi, so the surviving demand has no layered walk: λ = 0,
/// which sets the audit's headroom. The text states it and shows the column.
#[test]
fn two_function_chain_on_a_path() {
    let (run, doc) = audit_headroom(&two_functions(12.0), &["--kinds", "sites"]);
    let base = scenario(&doc, &[]);
    assert_close(headroom_of(base).unwrap(), 3.0, "λ = 12 / 4");
    assert_eq!(base["headroom_verification"]["status"], "proven");
    assert_eq!(headroom_of(scenario(&doc, &["site:a"])), None);
    assert_eq!(headroom_of(scenario(&doc, &["site:c"])), None);
    assert_eq!(headroom_of(scenario(&doc, &["site:b"])), Some(0.0));
    let top = &doc["headroom"];
    assert_eq!(num(top, "value"), 0.0);
    assert_eq!(top["failed"], json!(["site:b"]));
    assert_eq!(top["matrix"], "base");
    assert_eq!(top["status"], "proven");
    assert_close(
        headroom_of(&doc["baseline"]).unwrap(),
        3.0,
        "baseline object",
    );
    // The text: the sentence after the verdict and the column (300% at the baseline).
    let file = TempPath::with_text("chain-text", &two_functions(12.0).to_string());
    let text = redoubt(&["audit", file.path(), "--kinds", "sites", "--headroom", "-q"]);
    assert_eq!(text.code, 0, "{}", text.stderr);
    assert!(text.stdout.contains("Headroom: none"), "{}", text.stdout);
    assert!(text.stdout.contains("site:b"), "{}", text.stdout);
    assert!(
        text.stdout.contains("With no further failure: 300%"),
        "{}",
        text.stdout
    );
    assert!(run.stderr.is_empty(), "{}", run.stderr);
    // dpi 6: 6 / 4 = 1.5; dpi 60: fw binds, 50 / 4 = 12.5.
    assert_close(baseline_headroom(&two_functions(6.0)), 1.5, "λ = 6 / 4");
    assert_close(baseline_headroom(&two_functions(60.0)), 12.5, "λ = 50 / 4");
}

/// Path a — b — c, a→b of capacity 100, b→c of capacity 6 (one way); `tx` (gain `g`,
/// capacity 1000) only at b; one demand a→c of required 4 with chain [tx]. a→b carries the
/// demand before tx (4λ), b→c after it (4·g·λ).
fn gain_path(g: f64) -> Value {
    json!({
        "functions": [{"id": "tx", "gain": g}],
        "sites": [{"id": "a"}, {"id": "b", "functions": {"tx": 1000}}, {"id": "c"}],
        "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 100, "one_way": true},
                  {"id": "bc", "from": "b", "to": "c", "capacity": 6, "one_way": true}],
        "demands": [{"from": "a", "to": "c", "volume": 4, "required": 4, "chain": ["tx"]}]
    })
}

/// By hand: gain 1: b→c takes 4λ ≤ 6, λ = 1.5 (a→b allows 25, tx 250). Gain 0.5: b→c
/// takes 4 · 0.5 · λ = 2λ ≤ 6, λ = 3: the link after the function binds at twice the λ.
/// Gain 0.02: b→c allows 6 / 0.08 = 75, so a→b (before the function, 4λ ≤ 100) binds:
/// λ = 25.
#[test]
fn a_gain_moves_the_binding_link() {
    let one = baseline_headroom(&gain_path(1.0));
    let half = baseline_headroom(&gain_path(0.5));
    assert_close(one, 1.5, "gain 1: 6 / 4");
    assert_close(half, 3.0, "gain 0.5: 6 / 2");
    assert_close(half / one, 2.0, "twice the λ");
    assert_close(
        baseline_headroom(&gain_path(0.02)),
        25.0,
        "a→b binds: 100 / 4",
    );
}

/// One one-way link a→b of capacity 10; `fw` (gain `g`, capacity `fw`) at a; demand 1 a→b
/// of required 2 with chain [fw], demand 2 a→b of required 3, plain traffic (no chain).
fn plain_beside_chain(g: f64, fw: f64) -> Value {
    json!({
        "functions": [{"id": "fw", "gain": g}],
        "sites": [{"id": "a", "functions": {"fw": fw}}, {"id": "b"}],
        "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 10, "one_way": true}],
        "demands": [{"from": "a", "to": "b", "volume": 2, "required": 2, "chain": ["fw"]},
                    {"from": "a", "to": "b", "volume": 3, "required": 3}]
    })
}

/// By hand: both demands cross the one link, the chain after fw (applied at a):
/// - gain 1, fw 100: 2λ + 3λ ≤ 10, λ = 2 (the chain alone would get 10 / 2 = 5, the plain
///   traffic alone 10 / 3: plain traffic competes for the link);
/// - gain 0.5, fw 100: 0.5 · 2λ + 3λ = 4λ ≤ 10, λ = 2.5;
/// - gain 1, fw 3: fw takes 2λ ≤ 3, λ = 1.5 (the link would allow 2).
#[test]
fn plain_traffic_competes_with_a_chain() {
    assert_close(
        baseline_headroom(&plain_beside_chain(1.0, 100.0)),
        2.0,
        "10 / 5",
    );
    assert_close(
        baseline_headroom(&plain_beside_chain(0.5, 100.0)),
        2.5,
        "10 / 4",
    );
    assert_close(
        baseline_headroom(&plain_beside_chain(1.0, 3.0)),
        1.5,
        "3 / 2",
    );
}

/// [`two_functions`] with parallel links (ab, ab2, bc, bc2, all 100): no single link
/// failure changes λ = dpi / 4. `compare --headroom` from dpi 12 (λ = 3) to dpi 8 (λ = 2)
/// reports 100 points lost in every scenario (a reported change, exit 0); `--min-headroom
/// 2.2` fails on AFTER's 2 (exit 1), `--min-headroom 2` passes.
#[test]
fn compare_and_gate_on_chains() {
    let with = |dpi: f64| {
        let mut v = two_functions(dpi);
        v["links"].as_array_mut().unwrap().extend([
            json!({"id": "ab2", "from": "a", "to": "b", "capacity": 100}),
            json!({"id": "bc2", "from": "b", "to": "c", "capacity": 100}),
        ]);
        TempPath::with_text("compare-chain", &v.to_string())
    };
    let (before, after) = (with(12.0), with(8.0));
    let json = TempPath::new("compare-chain", "json");
    let run = |extra: &[&str]| {
        let mut args = vec![
            "compare",
            before.path(),
            after.path(),
            "--kinds",
            "links",
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
    assert_close(num(&h["before"], "value"), 3.0, "before: 12 / 4");
    assert_close(num(&h["after"], "value"), 2.0, "after: 8 / 4");
    let lost = h["lost"].as_array().unwrap();
    assert_eq!(lost.len(), 5, "baseline and four link failures: {h}");
    for l in lost {
        assert_close(num(l, "change_points"), -100.0, "points lost");
    }
    assert!(r.stdout.contains("Headroom lost"), "{}", r.stdout);
    let r = run(&["--min-headroom", "2.2"]);
    assert_eq!(r.code, 1, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("FAIL --min-headroom 2.2"), "{}", r.stdout);
    assert_eq!(run(&["--min-headroom", "2"]).code, 0);
    // The audit's own gate on the same file.
    let file = common::fixture("demo-quillhaven-chains.json");
    let (_, doc) = audit_json(s(&file), &["--headroom", "--threads", "1"]);
    let least = num(&doc["headroom"], "value");
    let gated = |limit: f64| {
        let l = format!("{limit}");
        redoubt(&["audit", s(&file), "-q", "--min-headroom", &l]).code
    };
    assert_eq!(gated(least), 0, "the least itself passes");
    assert_eq!(gated(least + 0.01), 1, "above the least fails");
}

/// Random chain networks (seeded): every single-failure scenario's headroom equals the
/// per-demand layered concurrent-flow LP on microlp ([`reference_headroom`]) within
/// `chain_reference::REL`, each proven; null exactly where the reference has no surviving
/// demand; and λ ≥ 1 exactly when the scenario's shortfall is 0 (the contract: λ ≥ 1 means
/// the committed demand fits). The top-level value is the least of the scenarios'.
#[test]
fn random_chain_networks_match_the_reference() {
    let mut compared = 0;
    let mut below_one = 0;
    for seed in 0..14 {
        let mut rng = StdRng::seed_from_u64(7_000 + seed);
        let t = random_net(&mut rng);
        let (_, doc) = audit_headroom(&t.to_json(), &["--depth", "1"]);
        let mut least = f64::INFINITY;
        for sc in scenarios(&doc) {
            let (site, link) = failed_element(sc);
            let what = format!("seed {seed}, {:?}", failed_of(sc));
            let want = reference_headroom(&t, site, link);
            let got = headroom_of(sc);
            match (got, want) {
                (None, None) => continue,
                (Some(g), Some(w)) => assert_close(g, w, &what),
                _ => panic!("{what}: got {got:?}, reference {want:?}"),
            }
            let g = got.unwrap();
            assert_eq!(sc["headroom_verification"]["status"], "proven", "{what}");
            let short = num(sc, "shortfall") > 0.0;
            assert_eq!(
                g < 1.0,
                short,
                "{what}: λ {g}, shortfall {}",
                sc["shortfall"]
            );
            below_one += usize::from(short);
            least = least.min(g);
            compared += 1;
        }
        if least.is_finite() {
            assert_close(num(&doc["headroom"], "value"), least, "the least");
        }
    }
    assert!(compared > 100, "scenarios compared: {compared}");
    assert!(below_one > 5, "short scenarios among them: {below_one}");
}

/// A chain of one gain-1 function is the base model: on the shipped examples, every
/// single-failure scenario's headroom of the file rewritten with one function `proc` equals
/// the file's own (the base model's headroom, checked against its own references), and so
/// does the audit's headroom and the scenario that sets it.
#[test]
fn one_gain_one_function_equals_the_file_without_functions() {
    let mut compared = 0;
    for name in ["small-ring.json", "demo-harrowmere.json"] {
        let path = common::fixture(name);
        let base: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        let (_, plain) = audit_json(s(&path), &["--headroom", "--threads", "1"]);
        let (_, chained) = audit_headroom(&with_one_function(&base), &[]);
        for sc in scenarios(&plain) {
            let failed = failed_of(sc);
            let names: Vec<&str> = failed.iter().map(String::as_str).collect();
            let other = scenario(&chained, &names);
            let what = format!("{name} {failed:?}");
            match (headroom_of(sc), headroom_of(other)) {
                (Some(a), Some(b)) => assert_close(b, a, &what),
                (a, b) => assert_eq!(a, b, "{what}"),
            }
            compared += 1;
        }
        assert_close(
            num(&chained["headroom"], "value"),
            num(&plain["headroom"], "value"),
            name,
        );
        assert_eq!(chained["headroom"]["failed"], plain["headroom"]["failed"]);
    }
    assert!(compared > 10, "the examples' scenarios were compared");
}

/// `--down`, `--depth 2` and shards on the chain demo: with link `orrin-fennick` down, the
/// baseline's headroom is the plain run's scenario with that link failed, and each further
/// single failure's is the depth-2 run's pair; two shards merged give the unsharded
/// `--headroom` document byte for byte.
#[test]
fn down_depth_and_shards_on_the_chain_demo() {
    let demo = common::fixture("demo-quillhaven-chains.json");
    let (_, pairs) = audit_json(s(&demo), &["--headroom", "--depth", "2"]);
    let (_, down) = audit_json(
        s(&demo),
        &[
            "--headroom",
            "--down",
            "link:orrin-fennick",
            "--kinds",
            "links",
        ],
    );
    let cut = "link:orrin-fennick";
    assert_close(
        headroom_of(&down["baseline"]).unwrap(),
        headroom_of(scenario(&pairs, &[cut])).unwrap(),
        "baseline with the link down",
    );
    let mut checked = 0;
    for sc in scenarios(&down) {
        let failed = failed_of(sc);
        if failed.is_empty() {
            continue;
        }
        let mut both: Vec<String> = failed.iter().cloned().chain([cut.to_string()]).collect();
        both.sort();
        let other = scenarios(&pairs)
            .iter()
            .find(|p| {
                let mut f = failed_of(p);
                f.sort();
                f == both
            })
            .unwrap_or_else(|| panic!("no pair {both:?}"));
        assert_eq!(headroom_of(sc).is_some(), headroom_of(other).is_some());
        if let (Some(a), Some(b)) = (headroom_of(sc), headroom_of(other)) {
            assert_close(a, b, &format!("{both:?}"));
        }
        checked += 1;
    }
    assert!(checked >= 5, "{checked}");

    let dir = TempDir::new("chain-headroom-shards");
    let whole = dir.join("whole.json");
    let base = ["audit", s(&demo), "--headroom", "--quiet"];
    let full: Vec<&str> = base.iter().copied().chain(["--json", s(&whole)]).collect();
    let reference = redoubt(&full);
    assert_eq!(reference.code, 0, "{}", reference.stderr);
    let parts = shard_parts(&dir, &base, 2);
    let merged = dir.join("merged.json");
    let run = redoubt(&["merge", s(&parts[0]), s(&parts[1]), "--json", s(&merged)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        std::fs::read(&merged).unwrap() == std::fs::read(&whole).unwrap(),
        "merged JSON differs from the unsharded --headroom run's"
    );
    assert_eq!(run.stdout, reference.stdout, "merged text differs");
}

/// Traffic matrices: the chain demo with a second matrix `evening` whose demands are the
/// base ones with every volume times 1.2 (required = volume). By the definition, scaling
/// every required amount by 1.2 divides λ by 1.2 (λ · 1.2 · required fits exactly when
/// (1.2 λ) · required does), so each scenario under `evening` has the base value / 1.2; the
/// audit's headroom is the least pair and names its matrix.
#[test]
fn an_evening_matrix_divides_the_headroom() {
    let demo = common::fixture("demo-quillhaven-chains.json");
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&demo).unwrap()).unwrap();
    let mut evening = doc["demands"].clone();
    for d in evening.as_array_mut().unwrap() {
        d["volume"] = json!(num(d, "volume") * 1.2);
    }
    doc["matrices"] = json!([{"id": "evening", "demands": evening}]);
    let (_, out) = audit_headroom(&doc, &[]);
    let mut pairs = 0;
    for sc in scenarios(&out)
        .iter()
        .filter(|sc| sc["matrix"] == "evening")
    {
        let failed = failed_of(sc);
        let base = scenarios(&out)
            .iter()
            .find(|b| b["matrix"] == "base" && failed_of(b) == failed)
            .expect("the same scenario under base");
        match (headroom_of(base), headroom_of(sc)) {
            (Some(b), Some(e)) => assert_close(e, b / 1.2, &format!("{failed:?}")),
            (b, e) => assert_eq!(b, e, "{failed:?}"),
        }
        pairs += 1;
    }
    assert!(pairs >= 13, "{pairs}");
    let top = &out["headroom"];
    assert_eq!(top["matrix"], "evening");
    assert_eq!(top["failed"], json!(["site:quillhaven"]));
    // Under quillhaven's failure the base λ is 20 / 52 (README): evening 20 / 62.4.
    assert_close(num(top, "value"), 20.0 / 62.4, "20 / (1.2 · 52)");
}

/// The warm path of the chain headroom (each outage started from the baseline's proven
/// optimum: its surviving walks with the baseline's prices, the cut flow re-routed, or the
/// bundled λ master) against the per-demand layered concurrent-flow LP on microlp
/// ([`reference_headroom`], a second formulation and solver, on the network with the
/// failed elements removed by [`chain_reference::without`]): random chain networks, every
/// single site and link failure (depth 1) and every pair of a site and a link or of two
/// links (depth 2). Each answer must be proven and equal the reference within
/// `chain_reference::REL`; both the master-free decisions and masters started from the
/// baseline must occur, so the comparison is not vacuous.
#[test]
fn warm_chain_headroom_matches_the_reference_at_depth_one_and_two() {
    use redoubt::model::Network;
    use redoubt::scenario::{Element, Outage, Scenario};
    use redoubt::solve::Surviving;
    use redoubt::solve::chainwalk::headroom::headroom_walks;

    let (mut compared, mut without_master, mut from_master, mut bundled) = (0, 0, 0, 0);
    for seed in 0..24 {
        let mut rng = StdRng::seed_from_u64(9_100 + seed);
        let t = random_net(&mut rng);
        let net = Network::from_json(&t.to_json().to_string()).expect("a valid network");
        let base = Surviving::new(&net, &Outage::default(), None);
        let (_, columns, _) = headroom_walks(&net, &base, None).expect("baseline");
        let Some(columns) = columns else {
            continue;
        };
        let (n, m) = (t.capacity.len(), t.links.len());
        let mut cases: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
        cases.extend((0..n).map(|v| (vec![v], vec![])));
        cases.extend((0..m).map(|l| (vec![], vec![l])));
        for v in 0..n {
            cases.extend((0..m).map(|l| (vec![v], vec![l])));
        }
        for a in 0..m {
            cases.extend((a + 1..m).map(|b| (vec![], vec![a, b])));
        }
        for (sites, links) in cases {
            let mut elements: Vec<Element> =
                sites.iter().map(|&v| Element::Site(v.into())).collect();
            elements.extend(links.iter().map(|&l| Element::Link(l.into())));
            let o = Scenario::new(&net, &elements).outage(&net);
            let view = Surviving::new(&net, &o, None);
            let (got, _, work) = headroom_walks(&net, &view, Some(&columns)).expect("walks");
            let what = format!("seed {seed}, sites {sites:?}, links {links:?} ({work:?})");
            let want =
                reference_headroom(&chain_reference::without(&t, &sites, &links), None, None);
            match (got.value, want) {
                (None, None) => continue,
                (Some(g), Some(w)) => assert_close(g, w, &what),
                _ => panic!("{what}: got {got:?}, reference {want:?}"),
            }
            assert!(got.proven, "{what}: unproven {got:?}");
            if work.trivial || work.fallback {
                continue;
            }
            compared += 1;
            let w = work.walks;
            if w.inherited || w.repaired || w.lowered {
                without_master += 1;
            } else {
                from_master += 1;
                bundled += usize::from(w.bundled > 0);
            }
        }
    }
    assert!(
        compared > 300,
        "outages decided by the warm walks: {compared}"
    );
    assert!(without_master > 0, "no outage decided without a master");
    assert!(from_master > 0, "no outage needed a master");
    assert!(bundled > 0, "no master held a bundle");
}
