//! The 50-site, 88-link, 660-demand fixture: each solved outage is checked against a
//! bound computed outside the LP solver.
//!
//! Source of the check: LP weak duality for the path formulation of multi-commodity flow
//! (any nonnegative arc and site prices bound the served demand by Σ cap·y + Σ proc·z +
//! Σ required·max(0, 1 − cheapest priced walk)); the walk costs come from petgraph's
//! Dijkstra. A primal allocation whose value meets that bound is optimal. The primal side
//! is checked for feasibility row by row (`max_violation`).

use redoubt::model::Network;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve;

#[test]
fn grid50_outages_meet_their_dual_bound() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/fixtures/grid-50.json"
    ))
    .unwrap();
    let net = Network::from_json(&text).unwrap();
    assert_eq!(
        (net.sites.len(), net.links.len(), net.demands.len()),
        (50, 88, 660)
    );
    let mut outages = vec![Outage::default()];
    for e in [Element::Link(3), Element::Site(27), Element::Group(0)] {
        outages.push(Scenario::new(&net, &[e]).outage(&net));
    }
    for (i, o) in outages.iter().enumerate() {
        let e = solve::evaluate(&net, o).unwrap();
        assert!(
            e.certified_gap() < 1e-6,
            "outage {i}: gap {}",
            e.certified_gap()
        );
        assert!(
            e.max_violation < 1e-6,
            "outage {i}: violation {}",
            e.max_violation
        );
        assert!(e.upper_bound >= e.served_required - 1e-6 * e.surviving_required);
    }
    // The site failure must actually cost something, or the check would be idle.
    let site = solve::evaluate(&net, &outages[2]).unwrap();
    assert!(site.shortfall > 1.0, "site s27 failure: {}", site.shortfall);
}

/// The walk engine on the same fixture. Sources: the product's edge LP (clarabel, an
/// independent formulation) for served_required, shortfall and throughput; LP weak duality
/// with petgraph's Dijkstra (`certify::dual_bound`) for the certified gap. Children start
/// from the baseline's walks, so the repair shortcuts are exercised too.
#[test]
fn grid50_walk_engine_equals_edge_lp() {
    use redoubt::solve::colgen::evaluate_walks;
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/fixtures/grid-50.json"
    ))
    .unwrap();
    let net = Network::from_json(&text).unwrap();
    let base = evaluate_walks(&net, &Outage::default(), None).unwrap();
    let mut outages = vec![Outage::default()];
    for e in [Element::Link(3), Element::Site(27), Element::Group(0)] {
        outages.push(Scenario::new(&net, &[e]).outage(&net));
    }
    let rel = |a: f64, b: f64| (a - b).abs() / b.abs().max(1.0);
    for (i, o) in outages.iter().enumerate() {
        let edge = solve::evaluate(&net, o).unwrap();
        let w = evaluate_walks(&net, o, Some(&base.basis)).unwrap();
        assert_eq!(w.stats.fallback, 0, "outage {i}: fell back");
        let e = &w.evaluation;
        assert!(
            rel(e.served_required, edge.served_required) < 1e-6,
            "outage {i}: served {} vs edge {}",
            e.served_required,
            edge.served_required
        );
        assert!(rel(e.throughput, edge.throughput) < 1e-6, "outage {i}");
        assert!(rel(e.shortfall, edge.shortfall) < 1e-6, "outage {i}");
        assert!(
            e.certified_gap() < 1e-6,
            "outage {i}: gap {}",
            e.certified_gap()
        );
        assert!(e.max_violation < 1e-6, "outage {i}: {}", e.max_violation);
    }
}
