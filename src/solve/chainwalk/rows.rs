//! The rows of the layered walk master in one outage and the pricing of layered walks:
//! [`layered_rows`] computes the layered edge LP's rows (groups, lowered capacities)
//! without building it, [`Rows::coefficients`] a walk's column, and [`Rows::price`] the
//! cheapest layered walk of every demand (one layered Dijkstra per (origin, chain) group)
//! with the dual bound at the given prices.

use std::collections::{BTreeMap, BinaryHeap};

use super::{ChainWalk, NONE, PRICE_TOL};
use crate::model::{Chains, FunctionIdx, Network};
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;

use crate::solve::chain::{self, EdgeKind, Layered};
use crate::solve::colgen::Item;
use crate::solve::surviving::{Surviving, Unservable};

/// The rows of the layered model in one outage, and the pricing graph.
pub(super) struct Rows<'a> {
    pub(super) net: &'a Network,
    pub(super) ch: &'a Chains,
    pub(super) view: &'a Surviving,
    pub(super) layered: &'a Layered,
    /// Per site: the usable arcs leaving it.
    pub(super) out: Vec<Vec<usize>>,
    /// Per demand: its group in `layered` (`NONE`: not in the LP).
    pub(super) group_of: Vec<usize>,
    /// Σ caps of the demands in the LP (at least 1): the scale of the tolerances.
    pub(super) scale: f64,
    /// Per `site · functions + function`: the rank of its row among the (site, function)
    /// rows (`NONE`: no row), for [`Rows::index`].
    fn_slot: Vec<usize>,
    /// Number of (site, function) rows.
    n_fn: usize,
}

/// A row of the master.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub(super) enum RowKey {
    Arc(usize),
    Function(SiteIdx, FunctionIdx),
    Demand(usize),
}

impl<'a> Rows<'a> {
    pub(super) fn new(net: &'a Network, view: &'a Surviving, layered: &'a Layered) -> Rows<'a> {
        let ch = net.chains.as_ref().expect("a network with functions");
        let mut out = vec![Vec::new(); net.sites.len()];
        for &a in &view.arcs {
            out[net.arcs[a].from].push(a);
        }
        let mut group_of = vec![NONE; net.demands.len()];
        let mut total = 0.0;
        for (g, group) in layered.groups.iter().enumerate() {
            for &d in &group.demands {
                group_of[d] = g;
                total += layered.bound[d];
            }
        }
        let nf = ch.functions.len();
        let mut fn_slot = vec![NONE; net.sites.len() * nf];
        for (i, &(v, f)) in layered.function_cap.keys().enumerate() {
            fn_slot[v * nf + f] = i;
        }
        Rows {
            net,
            ch,
            view,
            layered,
            out,
            group_of,
            scale: f64::max(total, 1.0),
            fn_slot,
            n_fn: layered.function_cap.len(),
        }
    }

    /// A dense index of row `key` in `0..self.len()`: arcs first, then (site, function)
    /// rows in key order, then demand caps. `key` must be a row of the model (a function
    /// row without a capacity entry panics). O(1).
    pub(super) fn index(&self, key: RowKey) -> usize {
        let arcs = self.net.arcs.len();
        match key {
            RowKey::Arc(a) => a,
            RowKey::Function(v, f) => {
                let i = self.fn_slot[v * self.ch.functions.len() + f];
                assert!(i != NONE, "a (site, function) pair without a row");
                arcs + i
            }
            RowKey::Demand(d) => arcs + self.n_fn + d,
        }
    }

    /// The number of dense row indices ([`Rows::index`]). O(1).
    pub(super) fn len(&self) -> usize {
        self.net.arcs.len() + self.n_fn + self.net.demands.len()
    }

    /// The coefficients of walk `w` in the master's rows (arcs and functions weighted by
    /// the cumulative gain of their layer, summed when a row is used twice; 1 on the
    /// demand's cap row), in row-key order. O(walk length · log).
    pub(super) fn coefficients(&self, w: &ChainWalk) -> Vec<(RowKey, f64)> {
        let group = &self.layered.groups[self.group_of[w.demand]];
        let mut terms: Vec<(RowKey, f64)> = w
            .edges
            .iter()
            .map(|e| match *e {
                EdgeKind::Arc { arc, layer } => (RowKey::Arc(arc), group.cumulative[layer]),
                EdgeKind::Function { site, layer } => (
                    RowKey::Function(site, group.chain[layer]),
                    group.cumulative[layer],
                ),
            })
            .collect();
        // Stable: a row used twice sums its terms in walk order.
        terms.sort_by_key(|&(key, _)| key);
        let mut rows: Vec<(RowKey, f64)> = Vec::with_capacity(terms.len() + 1);
        for (key, c) in terms {
            match rows.last_mut() {
                Some((k, sum)) if *k == key => *sum += c,
                _ => rows.push((key, c)),
            }
        }
        rows.push((RowKey::Demand(w.demand), 1.0));
        rows
    }

    /// The right-hand side of a row: the edge LP's (lowered) capacity, or the cap.
    pub(super) fn rhs(&self, key: RowKey) -> f64 {
        match key {
            RowKey::Arc(a) => self.layered.arc_cap[a],
            RowKey::Function(v, f) => self.layered.function_cap[&(v, f)],
            RowKey::Demand(d) => self.layered.bound[d],
        }
    }

    /// Prices every demand of the LP at arc prices `y` and function prices `z` (missing:
    /// 0); with demand duals `u`, also returns the walks whose reduced cost
    /// `1 − π_d − u_d` exceeds [`PRICE_TOL`], in group and demand order. One Dijkstra per
    /// group on its layered graph: O(groups · (k + 1) · (arcs + sites) · log).
    pub(super) fn price(
        &self,
        y: &[f64],
        z: &BTreeMap<(SiteIdx, FunctionIdx), f64>,
        u: Option<&[f64]>,
    ) -> Priced {
        let n = self.net.sites.len();
        let layered = self.layered;
        let mut bound = 0.0;
        for (a, &cap) in layered.arc_cap.iter().enumerate() {
            if layered.arc_row[a].is_some() {
                bound += cap * y[a].max(0.0);
            }
        }
        for (key, &cap) in &layered.function_cap {
            bound += cap * z.get(key).copied().unwrap_or(0.0).max(0.0);
        }
        let mut cost = vec![f64::INFINITY; self.net.demands.len()];
        let mut walks = Vec::new();
        for group in &layered.groups {
            let k = group.chain.len();
            let cum = &group.cumulative;
            let nodes = (k + 1) * n;
            let mut dist = vec![f64::INFINITY; nodes];
            let mut hops = vec![u32::MAX; nodes];
            let mut pred: Vec<Option<(usize, EdgeKind)>> = vec![None; nodes];
            let mut done = vec![false; nodes];
            let mut heap = BinaryHeap::new();
            dist[group.origin] = 0.0;
            hops[group.origin] = 0;
            heap.push(Item {
                dist: 0.0,
                hops: 0,
                node: group.origin,
            });
            while let Some(Item {
                dist: dv,
                hops: hv,
                node,
            }) = heap.pop()
            {
                if done[node] {
                    continue;
                }
                done[node] = true;
                let (j, v) = (node / n, node % n);
                let mut relax = |to: usize, cost: f64, kind: EdgeKind| {
                    if done[to] {
                        return;
                    }
                    let (nd, nh) = (dv + cost, hv + 1);
                    if nd.total_cmp(&dist[to]).then(nh.cmp(&hops[to])).is_lt() {
                        dist[to] = nd;
                        hops[to] = nh;
                        pred[to] = Some((node, kind));
                        heap.push(Item {
                            dist: nd,
                            hops: nh,
                            node: to,
                        });
                    }
                };
                for &a in &self.out[v] {
                    let to = j * n + self.net.arcs[a].to.0;
                    relax(
                        to,
                        cum[j] * y[a].max(0.0),
                        EdgeKind::Arc { arc: a, layer: j },
                    );
                }
                if j < k && chain::runs(self.ch, self.view, v, group.chain[j]) {
                    let price = z.get(&(v, group.chain[j])).copied().unwrap_or(0.0);
                    relax(
                        (j + 1) * n + v,
                        cum[j] * price.max(0.0),
                        EdgeKind::Function { site: v, layer: j },
                    );
                }
            }
            for &d in &group.demands {
                let end = k * n + self.net.demands[d].to.0;
                let pi = dist[end];
                if !pi.is_finite() {
                    continue;
                }
                cost[d] = pi;
                bound += layered.bound[d] * (1.0 - pi).max(0.0);
                if let Some(u) = u
                    && 1.0 - pi - u[d] > PRICE_TOL
                {
                    let mut edges = Vec::new();
                    let mut at = end;
                    while let Some((prev, kind)) = pred[at] {
                        edges.push(kind);
                        at = prev;
                    }
                    edges.reverse();
                    walks.push(ChainWalk { demand: d, edges });
                }
            }
        }
        Priced { cost, walks, bound }
    }
}

/// The outcome of one pricing pass.
pub(super) struct Priced {
    /// Per demand: its cheapest layered walk (infinite when not in the LP or unreachable).
    pub(super) cost: Vec<f64>,
    /// Walks that price out (only when demand duals were given).
    pub(super) walks: Vec<ChainWalk>,
    /// The dual bound at these prices.
    pub(super) bound: f64,
}

/// The rows of the layered model of `view` with demand caps `bound`, exactly as
/// [`chain::build`] makes them (same (origin, chain) groups in the same order, same arcs and
/// (site, function) pairs with a row, same right-hand sides: capacities lowered to what the
/// groups that can use them could put there), without building the LP: no edges and no
/// demand variables yet ([`with_walks`] adds those of an answer). Also returns the cut-off
/// demands with their reason. O(groups · (k + 1) · (sites + arcs)).
pub(super) fn layered_rows(
    net: &Network,
    view: &Surviving,
    bound: &[f64],
) -> (Layered, Vec<(usize, Unservable)>) {
    let ch = net.chains.as_ref().expect("a network with functions");
    let n = net.sites.len();
    let (by_key, cut_off) = chain::demand_groups(net, ch, view, bound);
    let mut arc_need: Vec<Option<f64>> = vec![None; net.arcs.len()];
    let mut fn_need: BTreeMap<(SiteIdx, FunctionIdx), f64> = BTreeMap::new();
    let mut groups = Vec::new();
    for ((origin, chain_fns), demands) in by_key {
        let k = chain_fns.len();
        let cumulative = ch.cumulative(&chain_fns);
        let total: f64 = demands.iter().map(|&d| bound[d]).sum();
        let dests: Vec<SiteIdx> = demands.iter().map(|&d| net.demands[d].to.0).collect();
        let fwd = chain::forward(net, ch, view, origin, &chain_fns);
        let back = chain::backward(net, ch, view, &dests, &chain_fns);
        let live = |node: usize| fwd[node] && back[node];
        for j in 0..=k {
            for &a in &view.arcs {
                let arc = &net.arcs[a];
                if live(j * n + arc.from.0) && live(j * n + arc.to.0) {
                    *arc_need[a].get_or_insert(0.0) += cumulative[j] * total;
                }
            }
            if j < k {
                let f = chain_fns[j];
                for v in 0..n {
                    if chain::runs(ch, view, v, f) && live(j * n + v) && live((j + 1) * n + v) {
                        *fn_need.entry((v, f)).or_default() += cumulative[j] * total;
                    }
                }
            }
        }
        groups.push(chain::Group {
            origin,
            chain: chain_fns,
            cumulative,
            demands,
        });
    }
    let arc_row: Vec<Option<usize>> = arc_need
        .iter()
        .enumerate()
        .map(|(a, need)| need.map(|_| a))
        .collect();
    let arc_cap: Vec<f64> = arc_need
        .iter()
        .enumerate()
        .map(|(a, need)| need.map_or(0.0, |need| net.arcs[a].capacity.min(need)))
        .collect();
    let function_cap: BTreeMap<(SiteIdx, FunctionIdx), f64> = fn_need
        .iter()
        .map(|(&(v, f), &need)| ((v, f), ch.capacity[v][f].min(need)))
        .collect();
    let function_row = function_cap
        .keys()
        .enumerate()
        .map(|(i, &k)| (k, i))
        .collect();
    let layered = Layered {
        edges: vec![Vec::new(); groups.len()],
        groups,
        demand_var: vec![None; net.demands.len()],
        arc_row,
        function_row,
        arc_cap,
        function_cap,
        bound: bound.to_vec(),
    };
    (layered, cut_off)
}
