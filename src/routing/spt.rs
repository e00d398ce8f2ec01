//! Shortest paths of the interior routing protocol and the per-hop equal split.
//!
//! For one destination `t`, [`Tree::toward`] runs Dijkstra backwards from `t` over the
//! surviving arcs (link directions) with the links' metrics, giving `dist(v, t)` for every
//! node, and keeps, per node, every outgoing arc that lies on some shortest path to `t`
//! (its *next hops*; parallel links are separate arcs). These arcs form the shortest-path
//! DAG toward `t`. [`Tree::leg`] pushes one unit from an origin down that DAG, splitting
//! equally over the next hops at every node: the fraction of an `o → t` leg on each arc.
//!
//! **Capacity-0 links route.** The routing protocol does not know capacities, so a link
//! of capacity 0 is a link like any other here (it carries metric and next hops). Traffic
//! that the routes put on it cannot be served; the fixed-route LP sees a capacity of 0 and
//! the offered load an infinite utilisation.
//!
//! **Reuse under failures.** Removing an arc that is not on `t`'s DAG leaves `dist(·, t)`
//! unchanged (shortest paths did not use it, and removing arcs never shortens one) and the
//! DAG unchanged (the arc was not tight). [`Trees::for_outage`] therefore shares the
//! baseline tree of every destination whose DAG holds no failed arc and recomputes only
//! the others.

use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::sync::Arc as Shared;

use crate::model::{Network, SiteIdx};
use crate::scenario::Outage;

/// Distance of a node that cannot reach the destination.
pub const UNREACHABLE: u64 = u64::MAX;

/// One directed, weighted arc of the graph the trees are computed on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct WArc {
    pub from: usize,
    pub to: usize,
    pub weight: u64,
}

/// The arcs of `net` (indices as in `Network::arcs`) weighted with their link's metric.
pub fn weighted_arcs(net: &Network) -> Vec<WArc> {
    net.arcs
        .iter()
        .map(|a| WArc {
            from: a.from.0,
            to: a.to.0,
            weight: u64::from(net.links[a.link].metric),
        })
        .collect()
}

/// The shortest-path DAG toward one destination.
///
/// Invariant: `dist[t] == 0`; for every node `v` with finite distance other than `t`,
/// `next[v]` is the sorted, non-empty list of arcs `a = (v → w)` with
/// `weight(a) + dist[w] == dist[v]`; `order` lists the reachable nodes by decreasing
/// distance (ties by index), so with positive weights every next hop's head comes later.
#[derive(Debug, Clone, PartialEq)]
pub struct Tree {
    pub dest: usize,
    pub dist: Vec<u64>,
    pub next: Vec<Vec<usize>>,
    pub order: Vec<usize>,
    /// Per arc: whether it is some node's next hop (on the DAG).
    pub on_dag: Vec<bool>,
}

impl Tree {
    /// Dijkstra from `dest` over the reversed arcs that are `alive`, for `n` nodes.
    /// Weights must be non-negative (they are `u64`); sums saturate. O((n + m) log n).
    pub fn toward(n: usize, arcs: &[WArc], alive: &[bool], dest: usize) -> Tree {
        let mut incoming: Vec<Vec<usize>> = vec![Vec::new(); n];
        for (a, arc) in arcs.iter().enumerate() {
            if alive[a] {
                incoming[arc.to].push(a);
            }
        }
        let mut dist = vec![UNREACHABLE; n];
        let mut heap = BinaryHeap::new();
        dist[dest] = 0;
        heap.push(Reverse((0u64, dest)));
        while let Some(Reverse((d, w))) = heap.pop() {
            if d > dist[w] {
                continue;
            }
            for &a in &incoming[w] {
                let v = arcs[a].from;
                let nd = d.saturating_add(arcs[a].weight);
                if nd < dist[v] {
                    dist[v] = nd;
                    heap.push(Reverse((nd, v)));
                }
            }
        }
        let mut next: Vec<Vec<usize>> = vec![Vec::new(); n];
        let mut on_dag = vec![false; arcs.len()];
        for (a, arc) in arcs.iter().enumerate() {
            if alive[a]
                && arc.from != dest
                && dist[arc.to] != UNREACHABLE
                && dist[arc.from] != UNREACHABLE
                && dist[arc.to].saturating_add(arc.weight) == dist[arc.from]
            {
                next[arc.from].push(a);
                on_dag[a] = true;
            }
        }
        let mut order: Vec<usize> = (0..n).filter(|&v| dist[v] != UNREACHABLE).collect();
        order.sort_by(|&x, &y| dist[y].cmp(&dist[x]).then(x.cmp(&y)));
        Tree {
            dest,
            dist,
            next,
            order,
            on_dag,
        }
    }

    /// The fraction of one unit sent from `origin` to this tree's destination on each arc,
    /// split equally over the next hops at every node (per-hop ECMP). Sorted by arc, only
    /// positive fractions; empty when `origin` is the destination or cannot reach it.
    /// Requires positive weights on the DAG. O(n + m).
    pub fn leg(&self, origin: usize, arcs: &[WArc]) -> Vec<(usize, f64)> {
        let n = self.dist.len();
        if origin == self.dest || self.dist[origin] == UNREACHABLE {
            return Vec::new();
        }
        let mut at = vec![0.0f64; n];
        at[origin] = 1.0;
        let mut on_arc: Vec<(usize, f64)> = Vec::new();
        let start = self.dist[origin];
        for &v in &self.order {
            if self.dist[v] > start || at[v] == 0.0 || v == self.dest {
                continue;
            }
            let hops = &self.next[v];
            let share = at[v] / hops.len() as f64;
            for &a in hops {
                on_arc.push((a, share));
                at[arcs[a].to] += share;
            }
        }
        on_arc.sort_by_key(|p| p.0);
        on_arc
    }
}

/// The trees toward every destination of one outage; `None` for a failed site.
#[derive(Debug, Clone)]
pub struct Trees {
    pub arcs: Shared<Vec<WArc>>,
    pub trees: Vec<Option<Shared<Tree>>>,
    /// How many trees were recomputed for this outage (the rest are shared with the
    /// baseline).
    pub recomputed: usize,
}

impl Trees {
    /// The trees of the intact network: one Dijkstra per site. O(n (n + m) log n).
    pub fn baseline(net: &Network) -> Trees {
        let arcs = weighted_arcs(net);
        let alive = vec![true; arcs.len()];
        let trees = (0..net.sites.len())
            .map(|t| Some(Shared::new(Tree::toward(net.sites.len(), &arcs, &alive, t))))
            .collect();
        Trees {
            arcs: Shared::new(arcs),
            trees,
            recomputed: net.sites.len(),
        }
    }

    /// The trees under `outage`: a failed site has none; a destination whose baseline DAG
    /// holds no failed arc shares the baseline tree (see the module documentation); the
    /// rest are recomputed on the surviving arcs. O(k (n + m) log n) for k recomputed.
    pub fn for_outage(&self, net: &Network, outage: &Outage) -> Trees {
        let link_alive = outage.link_alive(net);
        let site_alive = outage.site_alive(net);
        let alive: Vec<bool> = net.arcs.iter().map(|a| link_alive[a.link]).collect();
        let failed: Vec<usize> = (0..alive.len()).filter(|&a| !alive[a]).collect();
        let mut recomputed = 0;
        let trees = self
            .trees
            .iter()
            .enumerate()
            .map(|(t, base)| {
                if !site_alive[t] {
                    return None;
                }
                let base = base.as_ref()?;
                if failed.iter().any(|&a| base.on_dag[a]) {
                    recomputed += 1;
                    Some(Shared::new(Tree::toward(
                        net.sites.len(),
                        &self.arcs,
                        &alive,
                        t,
                    )))
                } else {
                    Some(Shared::clone(base))
                }
            })
            .collect();
        Trees {
            arcs: Shared::clone(&self.arcs),
            trees,
            recomputed,
        }
    }

    /// `dist(v, t)`, [`UNREACHABLE`] when `t` failed or `v` cannot reach it.
    pub fn dist(&self, v: SiteIdx, t: SiteIdx) -> u64 {
        self.trees[t].as_ref().map_or(UNREACHABLE, |tr| tr.dist[v])
    }

    /// The per-hop split of an `o → t` leg (see [`Tree::leg`]).
    pub fn leg(&self, o: SiteIdx, t: SiteIdx) -> Vec<(usize, f64)> {
        self.trees[t]
            .as_ref()
            .map_or_else(Vec::new, |tr| tr.leg(o.0, &self.arcs))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn arcs(list: &[(usize, usize, u64)]) -> Vec<WArc> {
        list.iter()
            .map(|&(from, to, weight)| WArc { from, to, weight })
            .collect()
    }

    /// Diamond 0→{1,2}→3, all weights 1 (hand-worked: two equal paths of length 2, so
    /// node 0 splits 1/2 on each first hop and each middle node forwards its 1/2).
    #[test]
    fn diamond_splits_in_half() {
        let a = arcs(&[(0, 1, 1), (0, 2, 1), (1, 3, 1), (2, 3, 1)]);
        let t = Tree::toward(4, &a, &[true; 4], 3);
        assert_eq!(t.dist, vec![2, 1, 1, 0]);
        assert_eq!(t.leg(0, &a), vec![(0, 0.5), (1, 0.5), (2, 0.5), (3, 0.5)]);
    }

    /// Unequal metrics: 0→1→3 costs 1+1 = 2, 0→2→3 costs 1+5 = 6 (hand-worked), so the
    /// whole unit takes the first path.
    #[test]
    fn unequal_metrics_take_one_path() {
        let a = arcs(&[(0, 1, 1), (0, 2, 1), (1, 3, 1), (2, 3, 5)]);
        let t = Tree::toward(4, &a, &[true; 4], 3);
        assert_eq!(t.dist, vec![2, 1, 5, 0]);
        assert_eq!(t.leg(0, &a), vec![(0, 1.0), (2, 1.0)]);
        // 0→2 is not tight (1 + 5 ≠ 2); 2→3 is node 2's own next hop, so it is on the DAG.
        assert!(!t.on_dag[1] && t.on_dag[3]);
    }

    /// Unreachable destination and zero-length leg give no arcs.
    #[test]
    fn empty_legs() {
        let a = arcs(&[(0, 1, 1)]);
        let t = Tree::toward(3, &a, &[true], 1);
        assert_eq!(t.dist[2], UNREACHABLE);
        assert!(t.leg(2, &a).is_empty());
        assert!(t.leg(1, &a).is_empty());
    }
}
