//! The walk engine's view of one outage's surviving network (`Graph`: usable arcs, processing sites, demands) and the shortest-path trees pricing runs on it (`dijkstra`, O((V + A) log V) per root).

use super::*;
use std::cmp::Ordering;
use std::collections::BinaryHeap;

use crate::model::Network;
use crate::solve::surviving::Surviving;

/// The surviving network of one outage, as pricing and repair see it.
pub(super) struct Graph<'a> {
    pub(super) net: &'a Network,
    pub(super) site_alive: Vec<bool>,
    /// Per arc: usable (link alive, capacity > 0).
    pub(super) arc_usable: Vec<bool>,
    /// Per site: survives with processing > 0.
    pub(super) can_process: Vec<bool>,
    /// Per site: usable class arcs leaving it / entering it (see `rep`).
    pub(super) out: Vec<Vec<usize>>,
    pub(super) inc: Vec<Vec<usize>>,
    /// The usable class arcs.
    pub(super) usable: Vec<usize>,
    /// Surviving sites with processing > 0.
    pub(super) procs: Vec<usize>,
    /// Per arc: the first usable arc with the same ends and direction (its *class*);
    /// itself for an unusable arc. Parallel arcs of one direction are interchangeable in
    /// the LP, so pricing, repair and masters see one arc per class whose capacity is
    /// the class's total ([`Graph::split`] spreads the flow back over the links).
    pub(super) rep: Vec<usize>,
    /// Per class arc: its usable members, in arc order (the class arc first).
    pub(super) members: Vec<Vec<usize>>,
    /// Per class arc: Σ capacity of its members (the arc's own capacity otherwise).
    pub(super) class_cap: Vec<f64>,
    /// Some class has two members or more.
    pub(super) merged: bool,
}

impl<'a> Graph<'a> {
    /// The pricing graph of the surviving network `view` (the same view the edge LP and
    /// the certificate use).
    pub(super) fn new(net: &'a Network, view: &Surviving) -> Graph<'a> {
        let n = net.sites.len();
        let mut out = vec![Vec::new(); n];
        let mut inc = vec![Vec::new(); n];
        let mut rep: Vec<usize> = (0..net.arcs.len()).collect();
        let mut members: Vec<Vec<usize>> = vec![Vec::new(); net.arcs.len()];
        let mut class_cap: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
        let mut first: std::collections::HashMap<(usize, usize), usize> =
            std::collections::HashMap::new();
        let mut usable = Vec::new();
        let mut merged = false;
        for &a in &view.arcs {
            let arc = &net.arcs[a];
            match first.get(&(arc.from.0, arc.to.0)) {
                Some(&r) => {
                    rep[a] = r;
                    members[r].push(a);
                    class_cap[r] += arc.capacity;
                    merged = true;
                }
                None => {
                    first.insert((arc.from.0, arc.to.0), a);
                    members[a].push(a);
                    out[arc.from].push(a);
                    inc[arc.to].push(a);
                    usable.push(a);
                }
            }
        }
        let procs = (0..n).filter(|&v| view.can_process[v]).collect();
        Graph {
            net,
            site_alive: view.site_alive.clone(),
            arc_usable: view.arc_usable.clone(),
            can_process: view.can_process.clone(),
            out,
            inc,
            usable,
            procs,
            rep,
            members,
            class_cap,
            merged,
        }
    }

    /// Walk `w` (of any arcs) in class arcs, when it survives this outage.
    pub(super) fn lift(&self, w: &Walk) -> Option<Walk> {
        if !w.survives(self) {
            return None;
        }
        if !self.merged {
            return Some(w.clone());
        }
        Some(Walk::from_legs(
            w.demand,
            w.site,
            w.arcs
                .iter()
                .flat_map(|&(a, k)| std::iter::repeat_n(self.rep[a], usize::from(k))),
        ))
    }

    /// `s` (in class arcs) spread over the real links: each walk's flow on a class fills
    /// the members in arc order (a walk splits where a member fills up), so each member's
    /// load stays within its capacity when the class's load is within the class's (a last
    /// remainder of rounding goes to the class's last member). Prices: each member gets
    /// its class's. O(walks · class crossings · members).
    pub(super) fn split(&self, s: Solved) -> Solved {
        if !self.merged {
            return s;
        }
        let mut rem: Vec<f64> = self.net.arcs.iter().map(|a| a.capacity).collect();
        let mut walks = Vec::with_capacity(s.walks.len());
        let mut flow = Vec::with_capacity(s.flow.len());
        for (w, &f) in s.walks.iter().zip(&s.flow) {
            let arcs: Vec<usize> = w
                .arcs
                .iter()
                .flat_map(|&(a, k)| std::iter::repeat_n(a, usize::from(k)))
                .collect();
            let mut pieces: Vec<(f64, Vec<usize>)> = vec![(f, arcs.clone())];
            if f > 0.0 {
                for (i, &a) in arcs.iter().enumerate() {
                    let ms = &self.members[a];
                    if ms.len() < 2 {
                        continue;
                    }
                    let mut next = Vec::new();
                    for (amount, path) in pieces {
                        let mut left = amount;
                        for &m in ms {
                            if left <= 0.0 {
                                break;
                            }
                            let take = left.min(rem[m]);
                            if take <= 0.0 {
                                continue;
                            }
                            rem[m] -= take;
                            left -= take;
                            let mut p = path.clone();
                            p[i] = m;
                            next.push((take, p));
                        }
                        if left > 0.0 {
                            let m = *ms.last().expect("a class has a member");
                            rem[m] -= left;
                            let mut p = path.clone();
                            p[i] = m;
                            next.push((left, p));
                        }
                    }
                    pieces = next;
                }
            }
            for (amount, path) in pieces {
                walks.push(Walk::from_legs(w.demand, w.site, path));
                flow.push(amount);
            }
        }
        let mut arc_price = s.arc_price;
        for &r in &self.usable {
            for &m in &self.members[r][1..] {
                arc_price[m] = arc_price[r];
            }
        }
        Solved {
            walks,
            flow,
            value: s.value,
            arc_price,
            site_price: s.site_price,
        }
    }

    /// Capacities that can bind for demand caps `caps` (the presolve of
    /// [`super::flow::build`]): each arc at most `2·Σ caps` (a walk crosses an arc at most
    /// twice), each site at most `Σ caps`. Using them leaves the optimum unchanged and keeps
    /// a capacity written as 1e12 from setting the scale of the master. O(arcs + sites).
    /// Class arcs carry their class's capacity.
    pub(super) fn effective(&self, caps: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let total: f64 = caps.iter().sum();
        (
            self.class_cap.iter().map(|c| c.min(2.0 * total)).collect(),
            self.net
                .sites
                .iter()
                .map(|s| s.processing.min(total))
                .collect(),
        )
    }

    /// [`Graph::effective`] per real arc (no classes): what the certificate and the
    /// verifier use.
    pub(super) fn effective_real(&self, caps: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let total: f64 = caps.iter().sum();
        (
            self.net
                .arcs
                .iter()
                .map(|a| a.capacity.min(2.0 * total))
                .collect(),
            self.net
                .sites
                .iter()
                .map(|s| s.processing.min(total))
                .collect(),
        )
    }

    /// Per demand: its cap when it survives and the cap is positive, else 0.
    pub(super) fn caps(&self, volume: bool) -> Vec<f64> {
        self.net
            .demands
            .iter()
            .map(|d| {
                if self.site_alive[d.from] && self.site_alive[d.to] {
                    if volume { d.volume } else { d.required }
                } else {
                    0.0
                }
            })
            .collect()
    }
}

/// A shortest-path tree: distance, hop count and the tree arc at each node (`usize::MAX`
/// at the root and at unreached nodes).
pub(crate) struct Tree {
    pub(crate) dist: Vec<f64>,
    pub(crate) hops: Vec<u32>,
    pub(crate) pred: Vec<usize>,
}

impl Tree {
    /// Pushes onto `legs` this tree's arcs on the way from node `x` to the tree's root
    /// `root`, in that order: in a tree from the root (`forward`, as [`dijkstra`]) each
    /// step goes back along an arc to its `from` end, in a tree to the root along it to its
    /// `to` end. `x` must be reached (a finite `dist`). O(path length).
    pub(super) fn push_path(
        &self,
        net: &Network,
        mut x: usize,
        root: usize,
        forward: bool,
        legs: &mut Vec<usize>,
    ) {
        while x != root {
            let a = self.pred[x];
            legs.push(a);
            let arc = &net.arcs[a];
            x = if forward { arc.from.0 } else { arc.to.0 };
        }
    }
}

/// A heap entry of a Dijkstra that breaks ties by hop count, then node index (shared by
/// the base and the layered walk pricing).
#[derive(PartialEq)]
pub(crate) struct Item {
    pub(crate) dist: f64,
    pub(crate) hops: u32,
    pub(crate) node: usize,
}

impl Eq for Item {}

impl Ord for Item {
    /// Reversed (a max-heap pops the least distance, then fewest hops, then lowest node).
    fn cmp(&self, other: &Self) -> Ordering {
        other
            .dist
            .total_cmp(&self.dist)
            .then(other.hops.cmp(&self.hops))
            .then(other.node.cmp(&self.node))
    }
}

impl PartialOrd for Item {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

/// Dijkstra from `root` (`forward`) or to `root` (reverse) with arc lengths `max(y, 0)`,
/// ties broken by hop count. O(arcs · log sites).
pub(super) fn dijkstra(g: &Graph, root: usize, y: &[f64], forward: bool) -> Tree {
    let adj = |v: usize| -> &[usize] { if forward { &g.out[v] } else { &g.inc[v] } };
    shortest_tree(&g.net.arcs, g.net.sites.len(), adj, root, y, forward)
}

/// Dijkstra over `n` sites from `root` (`forward`: along the arcs `adj(v)` leaving each
/// site `v`) or to `root` (reverse: `adj(v)` are the arcs entering `v`, walked backwards),
/// arc `a` of length `max(y[a], 0)`; ties broken by hop count, then by site index (the
/// heap order of [`Item`]). Shared by the base walk engine's pricing and the chain
/// engine's pricing rooted at function sites. Invariant: every arc in `adj` indexes
/// `arcs` and `y`. O(arcs · log sites).
pub(crate) fn shortest_tree<'a>(
    arcs: &[crate::model::Arc],
    n: usize,
    adj: impl Fn(usize) -> &'a [usize],
    root: usize,
    y: &[f64],
    forward: bool,
) -> Tree {
    let mut t = Tree {
        dist: vec![f64::INFINITY; n],
        hops: vec![u32::MAX; n],
        pred: vec![usize::MAX; n],
    };
    let mut done = vec![false; n];
    let mut heap = BinaryHeap::new();
    t.dist[root] = 0.0;
    t.hops[root] = 0;
    heap.push(Item {
        dist: 0.0,
        hops: 0,
        node: root,
    });
    while let Some(Item { dist, hops, node }) = heap.pop() {
        if done[node] {
            continue;
        }
        done[node] = true;
        for &a in adj(node) {
            let arc = &arcs[a];
            let next = if forward { arc.to.0 } else { arc.from.0 };
            if done[next] {
                continue;
            }
            let nd = dist + y[a].max(0.0);
            let nh = hops + 1;
            if nd
                .total_cmp(&t.dist[next])
                .then(nh.cmp(&t.hops[next]))
                .is_lt()
            {
                t.dist[next] = nd;
                t.hops[next] = nh;
                t.pred[next] = a;
                heap.push(Item {
                    dist: nd,
                    hops: nh,
                    node: next,
                });
            }
        }
    }
    t
}
