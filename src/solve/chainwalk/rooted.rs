//! Layered pricing rooted at the function sites: the cheapest layered walk of a group is
//! a choice of one site per function of its chain joined by shortest paths, each leg `j`
//! costing `G_j` times its length at the arc prices (every layer is a copy of the same
//! network with lengths scaled by `G_j`). So one shortest-path tree from and one to each
//! site running a function of some chain (and one from each origin of plain traffic)
//! replace the Dijkstra over `(k + 1)` copies of the network per (origin, chain) group;
//! a small dynamic programme over the chain's sites then gives each demand its walk.
//! The idea is the base walk engine's, whose pricing is rooted at the processing sites.

use super::{ChainWalk, NONE};
use crate::solve::chain::{EdgeKind, Group};
use crate::solve::colgen::shortest_tree;

/// A shortest-path tree over the sites at arc lengths `max(y, 0)`
/// ([`crate::solve::colgen::Tree`]): distance, hop count and the tree arc at each site
/// (`NONE` at the root and at unreached sites). A forward tree's arc enters its site; a
/// reverse tree's leaves it towards the root.
pub(super) use crate::solve::colgen::Tree;

/// Dijkstra from `root` over the arcs `adj` (per site: the usable arcs leaving it when
/// `forward`, entering it otherwise), ties broken by hop count then site index
/// ([`crate::solve::colgen::shortest_tree`]). O(arcs · log sites).
pub(super) fn tree(
    arcs: &[crate::model::Arc],
    adj: &[Vec<usize>],
    root: usize,
    y: &[f64],
    forward: bool,
) -> Tree {
    shortest_tree(arcs, adj.len(), |v| adj[v].as_slice(), root, y, forward)
}

/// The arcs of the forward tree `t` from its root to `to`, in walk order, as edges of
/// layer `layer`. O(path length).
pub(super) fn path_from(
    arcs: &[crate::model::Arc],
    t: &Tree,
    to: usize,
    layer: usize,
    out: &mut Vec<EdgeKind>,
) {
    let start = out.len();
    let mut at = to;
    while t.pred[at] != NONE {
        let a = t.pred[at];
        out.push(EdgeKind::Arc { arc: a, layer });
        at = arcs[a].from.0;
    }
    out[start..].reverse();
}

/// The arcs of the reverse tree `t` from `from` to its root, in walk order, as edges of
/// layer `layer`. O(path length).
pub(super) fn path_to(
    arcs: &[crate::model::Arc],
    t: &Tree,
    from: usize,
    layer: usize,
    out: &mut Vec<EdgeKind>,
) {
    let mut at = from;
    while t.pred[at] != NONE {
        let a = t.pred[at];
        out.push(EdgeKind::Arc { arc: a, layer });
        at = arcs[a].to.0;
    }
}

/// One state of the chain programme: the walk has applied the first `j + 1` functions,
/// the last at `site`, at cost `cost` and `hops` arcs; `prev` is the state of layer `j − 1`
/// it came from (`NONE` in the first layer).
#[derive(Clone, Copy)]
pub(super) struct State {
    pub(super) site: usize,
    pub(super) cost: f64,
    pub(super) hops: u32,
    pub(super) prev: usize,
}

/// The chain programme of `group` (k ≥ 1 functions): per layer `j < k`, one state per
/// site running `f_{j+1}` reachable from the origin through sites of the earlier
/// functions, at its least cost (ties: fewer hops, then the first state of the layer
/// before). `sites[f]`: the sites running `f`; `to_site[v]`/`from_site[v]`: the reverse
/// and forward trees of site `v`; `zp(v, f)`: the price of `f` at `v` (≥ 0).
/// O(Σ_j |sites of f_j| · |sites of f_{j+1}|).
pub(super) fn programme(
    group: &Group,
    sites: &[Vec<usize>],
    to_site: &[Option<Tree>],
    from_site: &[Option<Tree>],
    zp: impl Fn(usize, usize) -> f64,
) -> Vec<Vec<State>> {
    let cum = &group.cumulative;
    let k = group.chain.len();
    let mut layers: Vec<Vec<State>> = Vec::with_capacity(k);
    let f0 = group.chain[0];
    layers.push(
        sites[f0]
            .iter()
            .filter_map(|&v| {
                let t = to_site[v].as_ref()?;
                let d = t.dist[group.origin];
                d.is_finite().then(|| State {
                    site: v,
                    cost: cum[0] * d + cum[0] * zp(v, f0),
                    hops: t.hops[group.origin],
                    prev: NONE,
                })
            })
            .collect(),
    );
    for j in 1..k {
        let f = group.chain[j];
        let mut next = Vec::new();
        for &w in &sites[f] {
            let mut best: Option<State> = None;
            for (i, s) in layers[j - 1].iter().enumerate() {
                let Some(t) = from_site[s.site].as_ref() else {
                    continue;
                };
                if !t.dist[w].is_finite() {
                    continue;
                }
                let c = s.cost + cum[j] * t.dist[w] + cum[j] * zp(w, f);
                let h = s.hops + t.hops[w];
                if best.is_none_or(|b| c.total_cmp(&b.cost).then(h.cmp(&b.hops)).is_lt()) {
                    best = Some(State {
                        site: w,
                        cost: c,
                        hops: h,
                        prev: i,
                    });
                }
            }
            next.extend(best);
        }
        layers.push(next);
    }
    layers
}

/// The cheapest end of the programme `layers` at destination `t`: the last layer's state
/// and the cost and hops of the whole walk, `None` when unreachable. O(last layer).
pub(super) fn finish(
    group: &Group,
    layers: &[Vec<State>],
    from_site: &[Option<Tree>],
    t: usize,
) -> Option<(usize, f64)> {
    let k = group.chain.len();
    let mut best: Option<(usize, f64, u32)> = None;
    for (i, s) in layers[k - 1].iter().enumerate() {
        let Some(tr) = from_site[s.site].as_ref() else {
            continue;
        };
        if !tr.dist[t].is_finite() {
            continue;
        }
        let c = s.cost + group.cumulative[k] * tr.dist[t];
        let h = s.hops + tr.hops[t];
        if best.is_none_or(|b| c.total_cmp(&b.1).then(h.cmp(&b.2)).is_lt()) {
            best = Some((i, c, h));
        }
    }
    best.map(|(i, c, _)| (i, c))
}

/// The walk of demand `d` (destination `t`) ending in state `end` of the last layer of
/// `layers`; `trees`: the reverse and the forward trees of the sites. O(walk length).
pub(super) fn walk(
    arcs: &[crate::model::Arc],
    group: &Group,
    layers: &[Vec<State>],
    trees: (&[Option<Tree>], &[Option<Tree>]),
    (d, t): (usize, usize),
    end: usize,
) -> ChainWalk {
    let (to_site, from_site) = trees;
    let k = group.chain.len();
    // The states of the chosen sequence, first layer first.
    let mut seq = vec![end; k];
    for j in (1..k).rev() {
        seq[j - 1] = layers[j][seq[j]].prev;
    }
    let mut edges = Vec::new();
    let first = layers[0][seq[0]].site;
    path_to(
        arcs,
        to_site[first].as_ref().expect("a tree"),
        group.origin,
        0,
        &mut edges,
    );
    edges.push(EdgeKind::Function {
        site: first,
        layer: 0,
    });
    for j in 1..k {
        let (v, w) = (layers[j - 1][seq[j - 1]].site, layers[j][seq[j]].site);
        path_from(
            arcs,
            from_site[v].as_ref().expect("a tree"),
            w,
            j,
            &mut edges,
        );
        edges.push(EdgeKind::Function { site: w, layer: j });
    }
    let last = layers[k - 1][seq[k - 1]].site;
    path_from(
        arcs,
        from_site[last].as_ref().expect("a tree"),
        t,
        k,
        &mut edges,
    );
    ChainWalk { demand: d, edges }
}
