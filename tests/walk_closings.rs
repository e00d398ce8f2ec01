//! Closings on the walk engine (column generation over processing walks with purchase
//! variables, `solve::colgen::buy`) against the edge LP's closings (the sources × arcs
//! two-layer LP with added-processing variables, `solve::flow`): a second formulation of
//! the same LP solved by a different model, on the fixtures and on random networks, plus
//! one closing computed by hand.
//!
//! `Walks` (the audit's default engine) builds its closing master from walk columns;
//! `Edge` builds the edge model. Both end in the same whole-module search and the same
//! verified re-solve, so their cost, best reachable value and closability must agree.

mod common;

#[path = "../benches/common/mod.rs"]
mod generator;

use redoubt::expand::{Candidates, Closing, close_with};
use redoubt::model::Network;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::evaluate;
use redoubt::solve::evaluator::{Edge, Walks};
use serde_json::{Value, json};

/// Both closings of `outage`, `(walks, edge)`; `None` when it has no shortfall.
fn both(net: &Network, outage: &Outage) -> Option<(Closing, Closing)> {
    let eval = evaluate(net, outage).expect("evaluates");
    let cands = Candidates::of(net);
    let w = close_with(&Walks, net, outage, &eval, &cands).expect("walk closing");
    let e = close_with(&Edge, net, outage, &eval, &cands).expect("edge closing");
    match (w, e) {
        (Some(w), Some(e)) => Some((w, e)),
        (None, None) => None,
        (w, e) => panic!("one closing only: walks {w:?}, edge {e:?}"),
    }
}

/// The two closings agree: cost and best reachable value within 1e-6 relative (both LPs
/// are solved to 1e-9 by the interior point; the purchases are re-solved and verified),
/// the same verdict on closability, and both verified.
fn assert_same(what: &str, w: &Closing, e: &Closing) {
    let close = |a: f64, b: f64| (a - b).abs() <= 1e-6 * a.abs().max(b.abs()).max(1.0);
    assert!(
        close(w.cost, e.cost),
        "{what}: cost walks {} vs edge {} (continuous {} vs {}; adds {:?} vs {:?})",
        w.cost,
        e.cost,
        w.dual_bound,
        e.dual_bound,
        w.add,
        e.add
    );
    assert!(
        close(w.best, e.best),
        "{what}: best walks {} vs edge {}",
        w.best,
        e.best
    );
    assert!(
        close(w.not_closable, e.not_closable),
        "{what}: not closable walks {} vs edge {}",
        w.not_closable,
        e.not_closable
    );
    assert!(w.verified && e.verified, "{what}: both closings verified");
}

/// Every single failure (links and sites) of `net` with a shortfall, plus the baseline:
/// the two closings agree. Returns how many closings were compared.
fn compare_all(name: &str, net: &Network) -> usize {
    let mut outages = vec![(String::from("baseline"), Outage::default())];
    for l in 0..net.links.len() {
        let o = Scenario::new(net, &[Element::Link(l.into())]).outage(net);
        outages.push((format!("link {}", net.links[l].id), o));
    }
    for v in 0..net.sites.len() {
        let o = Scenario::new(net, &[Element::Site(v.into())]).outage(net);
        outages.push((format!("site {}", net.sites[v].id), o));
    }
    let mut compared = 0;
    for (what, o) in &outages {
        if let Some((w, e)) = both(net, o) {
            assert_same(&format!("{name}, {what}"), &w, &e);
            compared += 1;
        }
    }
    compared
}

/// Hand case: a line s0 – s1 – s2, one demand s0 → s2 requiring 10 (links of 100 each
/// way, so links never bind). s1 processes 4 and sells more at 3 per unit (up to 10); s2
/// processes nothing and sells at 1 per unit up to 3. The shortfall is 10 − 4 = 6: the
/// cheapest purchase takes s2's 3 units at 1 (cost 3), then 3 at s1 at 3 (cost 9), 12 in
/// all, and closes the whole gap. Worked out by hand: units at s2 are cheaper, so they
/// are used up first.
#[test]
fn hand_closing_buys_the_cheap_site_first() {
    let doc = json!({
        "name": "line", "unit": "Gbit/s",
        "sites": [
            {"id": "s0", "processing": 0},
            {"id": "s1", "processing": 4, "expand_cost": 3, "expand_max": 10},
            {"id": "s2", "processing": 0, "expand_cost": 1, "expand_max": 3}
        ],
        "links": [
            {"id": "a", "from": "s0", "to": "s1", "capacity": 100},
            {"id": "b", "from": "s1", "to": "s2", "capacity": 100}
        ],
        "demands": [{"from": "s0", "to": "s2", "volume": 10, "required": 10}]
    });
    let net = Network::from_json(&doc.to_string()).expect("valid");
    let (w, e) = both(&net, &Outage::default()).expect("the baseline is short");
    for c in [&w, &e] {
        assert!((c.cost - 12.0).abs() < 1e-6, "cost {}", c.cost);
        assert!((c.add[1] - 3.0).abs() < 1e-6, "s1 adds {:?}", c.add);
        assert!((c.add[2] - 3.0).abs() < 1e-6, "s2 adds {:?}", c.add);
        assert!(c.not_closable.abs() < 1e-9);
        assert!(c.verified);
    }
}

#[test]
fn fixtures_close_alike_on_walks_and_edges() {
    let mut compared = 0;
    for name in ["small-ring.json", "demo-harrowmere.json"] {
        let net = redoubt::load(&common::fixture(name)).expect("fixture loads");
        compared += compare_all(name, &net);
    }
    assert!(compared > 0, "some fixture scenario is short");
}

/// Random networks (the benches' deterministic generator: ring plus chords, random
/// demands) with tight processing, some sites sold by the unit and some by the module:
/// every short single failure closes alike.
#[test]
fn random_networks_close_alike_on_walks_and_edges() {
    let mut compared = 0;
    for seed in 1..=6u64 {
        let sites = 8 + (seed as usize % 4);
        let procs: Vec<(usize, f64)> = (0..sites).step_by(3).map(|i| (i, 2.0)).collect();
        let mut doc: Value = generator::document(
            seed,
            sites,
            sites + 4,
            generator::Demands::Random(3 * sites),
            &procs,
            0,
        );
        let mut rng = generator::Rng(seed * 7919);
        for site in doc["sites"].as_array_mut().expect("sites") {
            if rng.below(3) != 0 {
                site["expand_cost"] = json!(1 + rng.below(5));
                site["expand_max"] = json!(2 + rng.below(6));
                if rng.below(3) == 0 {
                    site["expand_step"] = json!(2);
                }
            }
        }
        let net = Network::from_json(&doc.to_string()).expect("generated network is valid");
        compared += compare_all(&format!("seed {seed}"), &net);
    }
    assert!(compared >= 6, "enough short scenarios compared: {compared}");
}
