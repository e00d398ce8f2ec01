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

/// The faster searches against their definitions, on the fixture under every single failure
/// and a few doubles: the cut-off demands by one search from each origin and to each
/// destination (`Surviving::unservable_by_ends`), and the dual bound with Dijkstra trees
/// rooted at the demands' ends (the textbook per-commodity shortest paths) against trees
/// rooted at the processing sites, at arbitrary deterministic prices.
#[test]
fn site_rooted_searches_equal_the_per_demand_ones() {
    use redoubt::solve::{Surviving, Unservable, certify};
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/fixtures/grid-50.json"
    ))
    .unwrap();
    let net = Network::from_json(&text).unwrap();
    let mut sets: Vec<Vec<Element>> = (0..net.links.len())
        .map(|l| vec![Element::Link(l)])
        .collect();
    sets.extend((0..net.sites.len()).map(|s| vec![Element::Site(s)]));
    sets.extend((0..10).map(|i| vec![Element::Site(i * 5), Element::Link(i * 7 + 1)]));
    // Islands: each link alone with its two ends (every other link of theirs failed), so
    // demands leave the island (no path) or stay on it without processing.
    for l in 0..12 {
        let (a, b) = (net.links[l].from, net.links[l].to);
        let others = (0..net.links.len()).filter(|&m| {
            m != l
                && [a, b]
                    .iter()
                    .any(|&x| net.links[m].from == x || net.links[m].to == x)
        });
        sets.push(others.map(Element::Link).collect());
    }
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let arc_cap: Vec<f64> = net
        .arcs
        .iter()
        .map(|a| net.links[a.link].capacity)
        .collect();
    let site_cap: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    let (mut no_path, mut no_proc, mut compared) = (0usize, 0usize, 0usize);
    for (i, els) in sets.iter().enumerate() {
        let o = Scenario::new(&net, els).outage(&net);
        let view = Surviving::new(&net, &o, None);
        let fast = view.unservable(&net, &required);
        assert_eq!(fast, view.unservable_by_ends(&net, &required), "{els:?}");
        no_path += fast
            .iter()
            .filter(|r| **r == Some(Unservable::NoPath))
            .count();
        no_proc += fast
            .iter()
            .filter(|r| **r == Some(Unservable::NoProcessing))
            .count();
        let y: Vec<f64> = (0..net.arcs.len())
            .map(|a| ((a * 37 + i * 11) % 17) as f64 / 400.0)
            .collect();
        let z: Vec<f64> = (0..net.sites.len())
            .map(|v| ((v * 13 + i) % 7) as f64 / 50.0)
            .collect();
        let by = |sites| {
            certify::dual_bound_rooted(
                &net,
                &view,
                &required,
                &arc_cap,
                &site_cap,
                &y,
                &z,
                Some(sites),
            )
        };
        let (a, b) = (by(true), by(false));
        assert!(
            (a - b).abs() <= 1e-9 * a.abs().max(1.0),
            "{els:?}: {a} vs {b}"
        );
        compared += 1;
    }
    // Islands cut demands off for both reasons, so every outcome is exercised.
    assert!(
        no_path > 0 && no_proc > 0 && compared == sets.len(),
        "{no_path} {no_proc}"
    );
}
