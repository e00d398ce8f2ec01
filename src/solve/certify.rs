//! An optimality certificate that does not trust the LP: a dual (upper) bound on the served
//! demand, computed from arc and site prices with petgraph's Dijkstra.
//!
//! **Bound.** For any prices `y_a >= 0` on arcs and `z_v >= 0` on processing sites, let the
//! cost of a walk processed at `v` be the sum of `y` over its arcs plus `z_v`, and `c_d` the
//! cheapest such walk for demand `d` (= min over `v` of `dist(s_d, v) + z_v + dist(v, t_d)`).
//! Then every feasible allocation satisfies
//!
//! `Σ f_d <= Σ_a cap_a·y_a + Σ_v proc_v·z_v + Σ_d b_d·max(0, 1 - c_d)`
//!
//! because `f_d = f_d·c_d + f_d·(1 - c_d) <= f_d·c_d + b_d·max(0, 1 - c_d)` (as `f_d <= b_d`),
//! and `Σ f_d·c_d` is at most the priced resource use of the walks, which the capacities
//! bound. This is LP weak duality for the path formulation (the dual used by Garg–Könemann
//! style algorithms). With the LP's own shadow prices the bound meets the optimum; with any
//! other prices it is still a valid bound, so a backend error can only widen the gap.
//!
//! Complexity: one Dijkstra from each source and one to each destination,
//! O(sites · arcs · log sites), then O(demands · sites).

use petgraph::algo::dijkstra;
use petgraph::graph::{DiGraph, NodeIndex};

use super::surviving::Surviving;
use crate::model::Network;

/// Computes the dual bound above on the surviving network `view` (the same view the LP
/// was built on: only usable arcs, only sites that can process), for demand caps
/// `bound[d]`, arc capacities `arc_cap` and prices `arc_price` (indexed like
/// `Network::arcs`), and site capacities `site_cap` and prices `site_price`. Negative
/// prices are treated as 0. Any capacities at least as large as what an optimal
/// allocation uses give a valid bound (the presolved ones of [`super::flow::FlowIndex`]
/// qualify).
///
/// Cost: 2 · min(processing sites, distinct demand ends) Dijkstras, O(arcs · log sites)
/// each, plus O(demands · processing sites).
pub fn dual_bound(
    net: &Network,
    view: &Surviving,
    bound: &[f64],
    arc_cap: &[f64],
    site_cap: &[f64],
    arc_price: &[f64],
    site_price: &[f64],
) -> f64 {
    let inputs = DualInputs {
        bound,
        arc_cap,
        site_cap,
        arc_price,
        site_price,
    };
    dual_bound_rooted(net, view, &inputs, None)
}

/// The arguments of [`dual_bound`] after the network and its view: demand caps, arc and
/// site capacities and prices (indexed like `Network::demands`, `Network::arcs`,
/// `Network::sites`).
#[derive(Debug, Clone, Copy)]
pub struct DualInputs<'a> {
    pub bound: &'a [f64],
    pub arc_cap: &'a [f64],
    pub site_cap: &'a [f64],
    pub arc_price: &'a [f64],
    pub site_price: &'a [f64],
}

/// [`dual_bound`] with the shortest-path trees rooted at the processing sites
/// (`Some(true)`), at the demands' ends (`Some(false)`), or wherever fewer are needed
/// (`None`). Every choice gives the same bound up to rounding (tested).
pub fn dual_bound_rooted(
    net: &Network,
    view: &Surviving,
    inputs: &DualInputs,
    at_sites: Option<bool>,
) -> f64 {
    let x = inputs;
    let mut total = priced_capacity(view, x.arc_cap, x.site_cap, x.arc_price, x.site_price);
    let active: Vec<usize> = (0..net.demands.len())
        .filter(|&d| view.demand_alive(net, d) && x.bound[d] > 0.0)
        .collect();
    let costs = cheapest_walks(net, view, x.arc_price, x.site_price, &active, at_sites);
    for (&d, c) in active.iter().zip(costs) {
        total += x.bound[d] * (1.0 - c).max(0.0);
    }
    total
}

/// The certificate's prices `arc_price`, `site_price` as the shadow prices a report shows:
/// negative read as 0, and 0 on each row whose presolved capacity (`arc_cap`, `site_cap`)
/// is below its real one, since such a row does not bind. O(arcs + sites).
pub fn shadow_prices(
    net: &Network,
    (arc_cap, site_cap): (&[f64], &[f64]),
    arc_price: &[f64],
    site_price: &[f64],
) -> (Vec<f64>, Vec<f64>) {
    let shown = |cap: f64, real: f64, price: f64| if cap < real { 0.0 } else { price.max(0.0) };
    (
        (0..net.arcs.len())
            .map(|a| shown(arc_cap[a], net.arcs[a].capacity, arc_price[a]))
            .collect(),
        (0..net.sites.len())
            .map(|v| shown(site_cap[v], net.sites[v].processing, site_price[v]))
            .collect(),
    )
}

/// `Σ_a cap_a·y_a + Σ_v proc_v·z_v` over the usable arcs and the sites that can process
/// on `view`, with negative prices read as 0: what the resources are worth at these
/// prices. O(arcs + sites).
pub fn priced_capacity(
    view: &Surviving,
    arc_cap: &[f64],
    site_cap: &[f64],
    arc_price: &[f64],
    site_price: &[f64],
) -> f64 {
    // One running sum in arc order, then site order: the order the bound always used.
    let mut total = 0.0;
    for &a in &view.arcs {
        let y = arc_price[a].max(0.0);
        if y > 0.0 {
            total += arc_cap[a] * y;
        }
    }
    for v in (0..view.can_process.len()).filter(|&v| view.can_process[v]) {
        let z = site_price[v].max(0.0);
        if z > 0.0 {
            total += site_cap[v] * z;
        }
    }
    total
}

/// For each demand of `active` (in that order): the price of its cheapest processing walk
/// on `view`, `min_v dist(origin, v) + z_v + dist(v, destination)` with arc prices
/// `arc_price` and site prices `site_price` (negative read as 0), `+∞` when no walk through
/// a processing site exists. Trees are rooted at the processing sites (`Some(true)`), at
/// the demands' ends (`Some(false)`), or wherever fewer are needed (`None`); every choice
/// gives the same costs up to rounding.
///
/// Cost: 2 · min(processing sites, distinct ends) Dijkstras (petgraph), O(arcs · log
/// sites) each, plus O(|active| · processing sites).
pub fn cheapest_walks(
    net: &Network,
    view: &Surviving,
    arc_price: &[f64],
    site_price: &[f64],
    active: &[usize],
    at_sites: Option<bool>,
) -> Vec<f64> {
    let n = net.sites.len();
    let mut fwd: DiGraph<(), f64> = DiGraph::with_capacity(n, view.arcs.len());
    let mut rev: DiGraph<(), f64> = DiGraph::with_capacity(n, view.arcs.len());
    for _ in 0..n {
        fwd.add_node(());
        rev.add_node(());
    }
    for &a in &view.arcs {
        let arc = &net.arcs[a];
        let y = arc_price[a].max(0.0);
        fwd.add_edge(NodeIndex::new(arc.from.0), NodeIndex::new(arc.to.0), y);
        rev.add_edge(NodeIndex::new(arc.to.0), NodeIndex::new(arc.from.0), y);
    }
    let procs: Vec<usize> = (0..n).filter(|&v| view.can_process[v]).collect();
    let distances = |g: &DiGraph<(), f64>, s: usize| -> Vec<f64> {
        let map = dijkstra(g, NodeIndex::new(s), None, |e| *e.weight());
        let mut d = vec![f64::INFINITY; n];
        for (k, v) in map {
            d[k.index()] = v;
        }
        d
    };
    let mut ends = vec![(false, false); n];
    for &d in active {
        ends[net.demands[d].from].0 = true;
        ends[net.demands[d].to].1 = true;
    }
    let n_ends: usize = ends
        .iter()
        .map(|e| usize::from(e.0) + usize::from(e.1))
        .sum();
    if at_sites.unwrap_or(2 * procs.len() < n_ends) {
        // Fewer trees rooted at the processing sites: dist(o → v) on the reverse graph
        // from v, dist(v → t) on the forward graph from v.
        let into: Vec<Vec<f64>> = procs.iter().map(|&v| distances(&rev, v)).collect();
        let out: Vec<Vec<f64>> = procs.iter().map(|&v| distances(&fwd, v)).collect();
        return active
            .iter()
            .map(|&d| {
                let dem = &net.demands[d];
                procs
                    .iter()
                    .enumerate()
                    .map(|(i, &v)| into[i][dem.from] + site_price[v].max(0.0) + out[i][dem.to])
                    .fold(f64::INFINITY, f64::min)
            })
            .collect();
    }
    let mut from_cache: Vec<Option<Vec<f64>>> = vec![None; n];
    let mut to_cache: Vec<Option<Vec<f64>>> = vec![None; n];
    active
        .iter()
        .map(|&d| {
            let dem = &net.demands[d];
            if from_cache[dem.from].is_none() {
                from_cache[dem.from.0] = Some(distances(&fwd, dem.from.0));
            }
            if to_cache[dem.to].is_none() {
                to_cache[dem.to.0] = Some(distances(&rev, dem.to.0));
            }
            let ds = from_cache[dem.from].as_ref().expect("filled above");
            let dt = to_cache[dem.to].as_ref().expect("filled above");
            procs
                .iter()
                .map(|&v| ds[v] + site_price[v].max(0.0) + dt[v])
                .fold(f64::INFINITY, f64::min)
        })
        .collect()
}
