//! The 50-site, 88-link, 660-demand fixture: each solved outage is checked against a
//! bound computed here, outside the product.
//!
//! Source of the check: LP weak duality for the path formulation of multi-commodity flow
//! (any nonnegative arc and site prices bound the served demand by Σ cap·y + Σ proc·z +
//! Σ required·max(0, 1 − cheapest priced walk)); the walk costs come from petgraph's
//! Dijkstra, run in this file ([`weak_dual_bound`]) on the prices the evaluation reports,
//! with the file's own capacities. The primal side is checked here too: loads within the
//! file's capacities, nothing on a failed element, each demand within its required part.
//! A feasible allocation whose value meets a valid dual bound is optimal.

use petgraph::algo::dijkstra;
use petgraph::graph::{DiGraph, NodeIndex};
use petgraph::visit::{EdgeRef, Reversed};
use redoubt::model::{Network, SiteIdx};
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::{self, Evaluation};

/// The weak-duality bound of the prices `e.arc_price` / `e.site_price` on the network left
/// by `o`, computed here: Σ cap·y + Σ proc·z + Σ required·max(0, 1 − c_d) over surviving
/// arcs (capacity > 0), processing sites and demands, where c_d is the cheapest walk
/// origin → processing site → destination (arc lengths y, plus z at the site), by
/// petgraph's Dijkstra from each origin and, on the reversed graph, to each destination.
/// Valid for any nonnegative prices. O(sites · (arcs + sites) log sites + demands · sites).
fn weak_dual_bound(net: &Network, o: &Outage, e: &Evaluation) -> f64 {
    let site_up = |v: SiteIdx| !o.sites.contains(&v);
    let mut g: DiGraph<(), f64> = DiGraph::new();
    let nodes: Vec<NodeIndex> = (0..net.sites.len()).map(|_| g.add_node(())).collect();
    let mut bound = 0.0;
    for (a, arc) in net.arcs.iter().enumerate() {
        let up = !o.links.contains(&arc.link) && site_up(arc.from) && site_up(arc.to);
        if up && arc.capacity > 0.0 {
            let y = e.arc_price[a].max(0.0);
            g.add_edge(nodes[arc.from], nodes[arc.to], y);
            bound += arc.capacity * y;
        }
    }
    let z: Vec<Option<f64>> = (0..net.sites.len())
        .map(|v| {
            (site_up(SiteIdx(v)) && net.sites[v].processing > 0.0).then(|| {
                e.site_price
                    .get(v)
                    .copied()
                    .flatten()
                    .unwrap_or(0.0)
                    .max(0.0)
            })
        })
        .collect();
    for (v, zv) in z.iter().enumerate() {
        bound += zv.map_or(0.0, |zv| net.sites[v].processing * zv);
    }
    let mut from = std::collections::BTreeMap::new();
    let mut to = std::collections::BTreeMap::new();
    for d in &net.demands {
        if !site_up(d.from) || !site_up(d.to) {
            continue;
        }
        let f = from
            .entry(d.from)
            .or_insert_with(|| dijkstra(&g, nodes[d.from], None, |x| *x.weight()));
        let f = f.clone();
        let t = to
            .entry(d.to)
            .or_insert_with(|| dijkstra(Reversed(&g), nodes[d.to], None, |x| *x.weight()));
        let cheapest = z
            .iter()
            .enumerate()
            .filter_map(|(v, zv)| Some(f.get(&nodes[v])? + zv.as_ref()? + t.get(&nodes[v])?))
            .min_by(|a, b| a.total_cmp(b));
        if let Some(c) = cheapest {
            bound += d.required * (1.0 - c).max(0.0);
        } else {
            // Cut off: no walk, the demand adds nothing to the optimum; its bound term is
            // 0 (the cheapest walk is infinitely dear).
        }
    }
    bound
}

/// Checks `e` on `o` against [`weak_dual_bound`] and the file's capacities (see the
/// module comment).
fn check_outside(net: &Network, o: &Outage, e: &Evaluation, what: &str) {
    let tol = 1e-6 * e.surviving_required.max(1.0);
    let bound = weak_dual_bound(net, o, e);
    assert!(
        bound >= e.served_required - tol,
        "{what}: served {} above the weak-duality bound {bound}",
        e.served_required
    );
    assert!(
        bound <= e.served_required + tol,
        "{what}: bound {bound} does not meet served {}",
        e.served_required
    );
    for (a, arc) in net.arcs.iter().enumerate() {
        let down =
            o.links.contains(&arc.link) || o.sites.contains(&arc.from) || o.sites.contains(&arc.to);
        let cap = if down { 0.0 } else { arc.capacity };
        assert!(
            e.arc_load[a] <= cap + tol,
            "{what}: arc {a} load {} > {cap}",
            e.arc_load[a]
        );
    }
    for (v, site) in net.sites.iter().enumerate() {
        let cap = if o.sites.contains(&SiteIdx(v)) {
            0.0
        } else {
            site.processing
        };
        assert!(
            e.site_load[v] <= cap + tol,
            "{what}: site {v} load {} > {cap}",
            e.site_load[v]
        );
    }
    for (k, d) in net.demands.iter().enumerate() {
        assert!(e.demand_flow[k] <= d.required + tol, "{what}: demand {k}");
    }
}

#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
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
    for e in [
        Element::Link(3.into()),
        Element::Site(27.into()),
        Element::Group(0),
    ] {
        outages.push(Scenario::new(&net, &[e]).outage(&net));
    }
    for (i, o) in outages.iter().enumerate() {
        let e = solve::evaluate(&net, o).unwrap();
        check_outside(&net, o, &e, &format!("outage {i}"));
    }
    // The site failure must actually cost something, or the check would be idle.
    let site = solve::evaluate(&net, &outages[2]).unwrap();
    assert!(site.shortfall > 1.0, "site s27 failure: {}", site.shortfall);
}

/// The walk engine on the same fixture. Sources: the product's edge LP (clarabel, an
/// independent formulation) for served_required, shortfall and throughput; LP weak duality
/// with petgraph's Dijkstra, computed in this file ([`check_outside`]), for optimality. Children start
/// from the baseline's walks, so the repair shortcuts are exercised too.
#[test]
#[ignore = "slow tier: cargo test --release -- --ignored"]
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
    for e in [
        Element::Link(3.into()),
        Element::Site(27.into()),
        Element::Group(0),
    ] {
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
        check_outside(&net, o, e, &format!("walks, outage {i}"));
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
        .map(|l| vec![Element::Link(l.into())])
        .collect();
    sets.extend((0..net.sites.len()).map(|s| vec![Element::Site(s.into())]));
    sets.extend((0..10).map(|i| {
        vec![
            Element::Site((i * 5).into()),
            Element::Link((i * 7 + 1).into()),
        ]
    }));
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
        sets.push(others.map(|l| Element::Link(l.into())).collect());
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
            let inputs = certify::DualInputs {
                bound: &required,
                arc_cap: &arc_cap,
                site_cap: &site_cap,
                arc_price: &y,
                site_price: &z,
            };
            certify::dual_bound_rooted(&net, &view, &inputs, Some(sites))
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
