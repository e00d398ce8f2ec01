//! The lower bound of the layered model's verification: an allocation (a backend's answer
//! or a walk answer written onto the layered edges) decomposed into layered walks and
//! scaled into the real capacities ([`repair`]).

use std::collections::BTreeMap;

use super::{EdgeKind, Layered, SiteIdx};
use crate::model::{Chains, Network};
use crate::solve::verify;
use crate::tol::ZERO_FLOW;

/// One layered walk of a repaired allocation: its group, its edges, its destination and
/// the origin units it carries.
#[derive(Debug, Clone)]
pub struct LayeredWalk {
    pub group: usize,
    pub edges: Vec<EdgeKind>,
    pub dest: SiteIdx,
    pub flow: f64,
}

/// The allocation of `x` made feasible: each group's flow decomposed into layered walks
/// (cycles cancelled, flow stuck at a dead end dropped), each walk scaled by the worst
/// overload of the arcs and functions it uses, measured against the real capacities, and
/// each destination's delivered flow shared among the group's demands to it in proportion
/// to their LP flows (never above a cap). Returns the allocation (loads in the units each
/// resource counts) and the walks. Feasible by construction, so its served total is a
/// proven lower bound. O(groups · edges · walks), each group's setup O(its edges and
/// demands) (its layered nodes numbered as met, not all `(k + 1) · sites` of them).
pub fn repair(net: &Network, layered: &Layered, x: &[f64]) -> (verify::Repaired, Vec<LayeredWalk>) {
    let ch = net.chains.as_ref().expect("a network with functions");
    let n = net.sites.len();
    let mut walks: Vec<LayeredWalk> = Vec::new();
    let mut lp_flow = vec![0.0; net.demands.len()];
    // A group's nodes are numbered in the order met (its origin, its edges' ends in edge
    // order, its destinations): `id` per layered node (`usize::MAX`: not met, reset after
    // each group), `orig` back. Per numbered node (buffers shared by the groups): its edges
    // in edge order (`first`, `order`: compressed rows), the first of them that may still
    // carry flow (`next`: `rest` only decreases, so an edge at or below `eps` stays there),
    // what its sink still absorbs, and its position on the current path (`usize::MAX`: not
    // on it). Per edge: its ends' numbers (`from`, `to`).
    let (mut first, mut order, mut next) = (Vec::new(), Vec::new(), Vec::new());
    let (mut sink, mut rest, mut pos, mut path) = (vec![], vec![], vec![], Vec::<usize>::new());
    let (mut id, mut orig, mut from, mut to) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for (g, group) in layered.groups.iter().enumerate() {
        let k = group.chain.len();
        let total: f64 = group.demands.iter().map(|&d| layered.bound[d]).sum();
        let eps = ZERO_FLOW * total.max(f64::MIN_POSITIVE);
        let edges = &layered.edges[g];
        rest.clear();
        rest.extend(edges.iter().map(|e| x[e.var].max(0.0)));
        if id.len() < (k + 1) * n {
            id.resize((k + 1) * n, usize::MAX);
        }
        orig.clear();
        let source = number(&mut id, &mut orig, group.origin);
        from.clear();
        to.clear();
        for e in edges {
            from.push(number(&mut id, &mut orig, e.from));
            to.push(number(&mut id, &mut orig, e.to));
        }
        let ends: Vec<usize> = (group.demands.iter())
            .map(|&d| number(&mut id, &mut orig, k * n + net.demands[d].to.0))
            .collect();
        let nodes = orig.len();
        first.clear();
        first.resize(nodes + 1, 0usize);
        for &v in &from {
            first[v + 1] += 1;
        }
        for v in 0..nodes {
            first[v + 1] += first[v];
        }
        next.clear();
        next.extend_from_slice(&first[..nodes]);
        order.clear();
        order.resize(edges.len(), 0usize);
        for (i, &v) in from.iter().enumerate() {
            order[next[v]] = i;
            next[v] += 1;
        }
        next.clear();
        next.extend_from_slice(&first[..nodes]);
        sink.clear();
        sink.resize(nodes, 0.0);
        let mut supply = 0.0;
        for (&d, &end) in group.demands.iter().zip(&ends) {
            let f = layered.demand_var[d].map_or(0.0, |v| x[v].clamp(0.0, layered.bound[d]));
            lp_flow[d] = f;
            supply += f;
            sink[end] += f;
        }
        // The first edge of `node` still above `eps`, in edge order.
        let step = |node: usize, rest: &[f64], next: &mut [usize]| -> Option<usize> {
            while next[node] < first[node + 1] {
                let i = order[next[node]];
                if rest[i] > eps {
                    return Some(i);
                }
                next[node] += 1;
            }
            None
        };
        pos.clear();
        pos.resize(nodes, usize::MAX);
        // Each pass ends a walk, cancels a cycle or drops a dead end: each zeroes at least
        // one edge, the supply or a sink.
        while supply > eps {
            path.clear();
            let mut node = source;
            pos[node] = 0;
            let done = loop {
                if sink[node] > eps {
                    break true;
                }
                let Some(i) = step(node, &rest, &mut next) else {
                    break false;
                };
                path.push(i);
                node = to[i];
                if pos[node] != usize::MAX {
                    // A cycle: cancel it and go on from where it closed.
                    let at = pos[node];
                    let m = path[at..]
                        .iter()
                        .map(|&c| rest[c])
                        .fold(f64::INFINITY, f64::min);
                    for &c in &path[at..] {
                        rest[c] -= m;
                        // The nodes after the cycle's start leave the path.
                        let t = to[c];
                        if pos[t] > at {
                            pos[t] = usize::MAX;
                        }
                    }
                    path.truncate(at);
                } else {
                    pos[node] = path.len();
                }
            };
            // Every node on the path leaves it before the next pass.
            pos[source] = usize::MAX;
            for &i in &path {
                pos[to[i]] = usize::MAX;
            }
            if !done {
                match path.last() {
                    // Flow stuck at a dead end: drop what enters it.
                    Some(&i) => rest[i] = 0.0,
                    None => break,
                }
                continue;
            }
            let s = &mut sink[node];
            let m = path.iter().map(|&i| rest[i]).fold(supply.min(*s), f64::min);
            for &i in &path {
                rest[i] -= m;
            }
            *s -= m;
            supply -= m;
            walks.push(LayeredWalk {
                group: g,
                edges: path.iter().map(|&i| edges[i].kind).collect(),
                dest: orig[node] % n,
                flow: m,
            });
        }
        for &v in &orig {
            id[v] = usize::MAX;
        }
    }
    scale_walks(net, ch, layered, &mut walks);
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut site_load = vec![0.0; net.sites.len()];
    let mut delivered = vec![0.0; layered.groups.len() * n];
    for w in &walks {
        let cum = &layered.groups[w.group].cumulative;
        for e in &w.edges {
            match *e {
                EdgeKind::Arc { arc, layer } => arc_load[arc] += w.flow * cum[layer],
                EdgeKind::Function { site, layer } => site_load[site] += w.flow * cum[layer],
            }
        }
        delivered[w.group * n + w.dest] += w.flow;
    }
    let mut demand_flow = vec![0.0; net.demands.len()];
    for (g, group) in layered.groups.iter().enumerate() {
        let mut by_dest: BTreeMap<SiteIdx, Vec<usize>> = BTreeMap::new();
        for &d in &group.demands {
            by_dest.entry(net.demands[d].to.0).or_default().push(d);
        }
        for (t, ds) in by_dest {
            let got = delivered[g * n + t];
            let lp: f64 = ds.iter().map(|&d| lp_flow[d]).sum();
            if lp <= 0.0 {
                continue;
            }
            for &d in &ds {
                demand_flow[d] = (got * (lp_flow[d] / lp)).min(layered.bound[d]);
            }
        }
    }
    let served = demand_flow.iter().sum();
    (
        verify::Repaired {
            served,
            demand_flow,
            arc_load,
            site_load,
            walks: walks.len(),
            paths: Vec::new(),
        },
        walks,
    )
}

/// The number of layered node `v` in its group (`id`), given the next one (`orig`'s
/// length) when `v` has none yet. O(1).
fn number(id: &mut [usize], orig: &mut Vec<usize>, v: usize) -> usize {
    if id[v] == usize::MAX {
        id[v] = orig.len();
        orig.push(v);
    }
    id[v]
}

/// Scales each walk by the worst overload (load / real capacity, when above 1) of the arcs
/// and functions it uses. O(Σ walk lengths).
fn scale_walks(net: &Network, ch: &Chains, layered: &Layered, walks: &mut [LayeredWalk]) {
    let mut arc_load = vec![0.0; net.arcs.len()];
    // Per `site · functions + function`: its load (a dense table, same sums in walk order).
    let nf = ch.functions.len();
    let mut fn_load = vec![0.0; net.sites.len() * nf];
    let function_at = |g: usize, layer: usize| layered.groups[g].chain[layer];
    for w in walks.iter() {
        let cum = &layered.groups[w.group].cumulative;
        for e in &w.edges {
            match *e {
                EdgeKind::Arc { arc, layer } => arc_load[arc] += w.flow * cum[layer],
                EdgeKind::Function { site, layer } => {
                    fn_load[site * nf + function_at(w.group, layer)] += w.flow * cum[layer]
                }
            }
        }
    }
    let over = |load: f64, cap: f64| {
        if load > cap {
            if cap > 0.0 { load / cap } else { f64::INFINITY }
        } else {
            1.0
        }
    };
    for w in walks.iter_mut() {
        let mut worst: f64 = 1.0;
        for e in &w.edges {
            let o = match *e {
                EdgeKind::Arc { arc, .. } => over(arc_load[arc], net.arcs[arc].capacity),
                EdgeKind::Function { site, layer } => {
                    let f = function_at(w.group, layer);
                    over(fn_load[site * nf + f], ch.capacity[site][f])
                }
            };
            worst = worst.max(o);
        }
        w.flow = if worst.is_finite() {
            w.flow / worst
        } else {
            0.0
        };
    }
}
