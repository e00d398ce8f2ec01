//! The walk engine: column generation over processing walks, with exact repair shortcuts
//! from a parent scenario's optimum. It computes the same LP optimum as the edge model
//! ([`super::flow`]) without its sources × arcs variables.
//!
//! **Path formulation.** A column is a *walk* of one demand `d`: a path from the origin to
//! a processing site `v` followed by a path from `v` to the destination, each on the
//! surviving arcs. The master LP maximises `Σ λ_w` subject to, per arc, `Σ mult(w, a)·λ_w
//! <= cap_a` (`mult` is 2 when the walk crosses the arc before and after processing, which
//! is how a revisiting walk consumes it), per site `Σ_{w at v} λ_w <= proc_v`, and per
//! demand `Σ_{w of d} λ_w <= b_d`. By flow decomposition (see [`super::flow`]) every edge
//! solution is a combination of such walks (a walk through a cycle is never needed: dropping
//! the cycle frees capacity), so the two formulations have the same optimum.
//!
//! **Pricing.** With arc duals `y`, site duals `z` and demand duals `u` of a restricted
//! master, the cheapest walk of `d` costs `c_d = min_v dist_y(s_d, v) + z_v + dist_y(v, t_d)`
//! (one Dijkstra from each origin, one to each destination); it prices out when
//! `1 − c_d − u_d > PRICE_TOL`. The same pass gives the dual bound
//! `Σ cap·y + Σ proc·z + Σ b·max(0, 1 − c_d)` (LP weak duality, valid for any `y, z >= 0`;
//! see [`super::certify`]). The loop stops when that bound meets the master's value within
//! [`GAP_TOL`]: the allocation is then optimal and the prices are optimal duals.
//!
//! **Shortcuts** (each decides a scenario only when a bound is met, so every result stays
//! exact). From the parent's optimal walks (the baseline's, for every scenario):
//! 1. *No flow lost*: when no walk carrying flow touches a failed element, the parent's
//!    allocation stays feasible and the child's optimum cannot exceed the parent's; the
//!    parent's prices, re-priced on the child's network, must meet it.
//! 2. *Repair*: the dropped flow is re-routed greedily through residual capacity of the
//!    two-layer graph (shortest-hop augmenting walks). When the result reaches
//!    `min(parent optimum, Σ b of servable demands)` it is optimal; zero prices (all served)
//!    or the parent's prices must certify it.
//!
//! What the shortcuts leave goes to column generation, started from the surviving and
//! repaired walks. If the loop stalls (no new column while the bound is still open, a
//! numerical corner) or exceeds [`MAX_ROUNDS`], the scenario is solved by the edge LP
//! instead and counted as a fallback.
//!
//! Master LPs are solved by the warm simplex of [`super::simplex`] (kept between rounds,
//! restricted to the demands a failure touches; see `WarmMaster`), or, above
//! [`WARM_ROWS`] rows, by [`super::lp::solve`] (the interior-point backend, cold).
//! Parallel links of one direction are one arc (a class) for pricing, repair and masters,
//! and the flow is split back per link before verification (`Graph::split`).
//!
//! Determinism: Dijkstra breaks ties by hop count and then node index, walks are added in
//! demand order, and a scenario's result depends only on the network, the outage and the
//! parent basis, never on thread count.

pub mod buy;
pub mod headroom;
pub mod plan;

use std::cmp::Ordering;
use std::collections::{BinaryHeap, HashMap, HashSet, VecDeque};

use super::edge::{at_stake, caps_of, meets, needs_volume_lp, solve_verified};
use super::finish::finish;
use super::flow::Cap;
use super::lp::{self, Lp, Sense};
use super::simplex::Simplex;
use super::surviving::Surviving;
use super::types::{Evaluation, Verification, Verified};
use super::{cancel, certify, verify};
use crate::error::Result;
use crate::model::Network;
use crate::scenario::Outage;

/// The walk engine's tolerances (defined and explained in [`crate::tol`]): `GAP_TOL` is the
/// column-generation stopping gap [`crate::tol::COLGEN_GAP_TOL`], tighter than the proof
/// gap `solve::GAP_TOL`.
pub use crate::tol::{
    COLGEN_GAP_TOL as GAP_TOL, WALK_FLOW_EPS as FLOW_EPS, WALK_PRICE_TOL as PRICE_TOL,
};
/// Pricing rounds before a scenario falls back to the edge LP.
pub const MAX_ROUNDS: usize = 200;
/// Largest master (rows: arcs, sites and demand caps in it) solved by the warm simplex
/// ([`super::simplex`], a dense basis inverse of 8·rows² bytes); larger masters go to
/// the interior-point backend.
pub const WARM_ROWS: usize = 2500;
/// Pivots allowed per warm master solve, per row of the master.
const PIVOTS_PER_ROW: usize = 50;

/// One processing walk of one demand: the arcs it crosses (sorted by arc index, each with
/// the number of crossings, 1 or 2) and the site where it is processed.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct Walk {
    pub demand: usize,
    pub site: usize,
    pub arcs: Vec<(usize, u8)>,
}

impl Walk {
    fn survives(&self, g: &Graph) -> bool {
        g.can_process[self.site] && self.arcs.iter().all(|&(a, _)| g.arc_usable[a])
    }

    /// Builds a walk from the arcs of its two legs, in any order.
    fn from_legs(demand: usize, site: usize, legs: impl IntoIterator<Item = usize>) -> Walk {
        let mut all: Vec<usize> = legs.into_iter().collect();
        all.sort_unstable();
        let mut arcs: Vec<(usize, u8)> = Vec::with_capacity(all.len());
        for a in all {
            match arcs.last_mut() {
                Some((b, m)) if *b == a => *m += 1,
                _ => arcs.push((a, 1)),
            }
        }
        Walk { demand, site, arcs }
    }
}

/// An optimal solution of the walk formulation for one set of demand caps: its walks with
/// their flows, its value and the optimal duals that certified it.
#[derive(Debug, Clone, Default)]
pub struct Solved {
    pub walks: Vec<Walk>,
    pub flow: Vec<f64>,
    pub value: f64,
    /// Per arc of `Network::arcs`.
    pub arc_price: Vec<f64>,
    /// Per site.
    pub site_price: Vec<f64>,
}

/// What a child scenario starts from: the parent's optimum with required caps and, when a
/// throughput LP was solved, with volume caps.
#[derive(Debug, Clone, Default)]
pub struct Basis {
    pub required: Option<Solved>,
    pub volume: Option<Solved>,
}

/// How much work the engine did (summed over the required and volume LPs of a scenario;
/// add them up over scenarios).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Stats {
    /// LPs decided by "no flow lost" (no LP solve).
    pub no_flow: usize,
    /// LPs decided by repair (no LP solve).
    pub repaired: usize,
    /// LPs decided by column generation.
    pub generated: usize,
    /// LPs handed to the edge model.
    pub fallback: usize,
    /// Master LP solves.
    pub lp_solves: usize,
    /// Pricing rounds (including the verifying pricing of the shortcuts).
    pub rounds: usize,
    /// Largest number of columns in a master.
    pub max_columns: usize,
}

impl Stats {
    /// Adds `other` into `self` (counts summed, `max_columns` maximised).
    pub fn add(&mut self, other: &Stats) {
        self.no_flow += other.no_flow;
        self.repaired += other.repaired;
        self.generated += other.generated;
        self.fallback += other.fallback;
        self.lp_solves += other.lp_solves;
        self.rounds += other.rounds;
        self.max_columns = self.max_columns.max(other.max_columns);
    }
}

/// The walk engine's answer for one outage.
#[derive(Debug, Clone)]
pub struct Walked {
    pub evaluation: Evaluation,
    /// Start for child scenarios.
    pub basis: Basis,
    pub stats: Stats,
}

/// The surviving network of one outage, as pricing and repair see it.
struct Graph<'a> {
    net: &'a Network,
    site_alive: Vec<bool>,
    /// Per arc: usable (link alive, capacity > 0).
    arc_usable: Vec<bool>,
    /// Per site: survives with processing > 0.
    can_process: Vec<bool>,
    /// Per site: usable class arcs leaving it / entering it (see `rep`).
    out: Vec<Vec<usize>>,
    inc: Vec<Vec<usize>>,
    /// The usable class arcs.
    usable: Vec<usize>,
    /// Surviving sites with processing > 0.
    procs: Vec<usize>,
    /// Per arc: the first usable arc with the same ends and direction (its *class*);
    /// itself for an unusable arc. Parallel arcs of one direction are interchangeable in
    /// the LP, so pricing, repair and masters see one arc per class whose capacity is
    /// the class's total ([`Graph::split`] spreads the flow back over the links).
    rep: Vec<usize>,
    /// Per class arc: its usable members, in arc order (the class arc first).
    members: Vec<Vec<usize>>,
    /// Per class arc: Σ capacity of its members (the arc's own capacity otherwise).
    class_cap: Vec<f64>,
    /// Some class has two members or more.
    merged: bool,
}

impl<'a> Graph<'a> {
    /// The pricing graph of the surviving network `view` (the same view the edge LP and
    /// the certificate use).
    fn new(net: &'a Network, view: &Surviving) -> Graph<'a> {
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
            match first.get(&(arc.from, arc.to)) {
                Some(&r) => {
                    rep[a] = r;
                    members[r].push(a);
                    class_cap[r] += arc.capacity;
                    merged = true;
                }
                None => {
                    first.insert((arc.from, arc.to), a);
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
    fn lift(&self, w: &Walk) -> Option<Walk> {
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
    fn split(&self, s: Solved) -> Solved {
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
    fn effective(&self, caps: &[f64]) -> (Vec<f64>, Vec<f64>) {
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
    fn effective_real(&self, caps: &[f64]) -> (Vec<f64>, Vec<f64>) {
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
    fn caps(&self, volume: bool) -> Vec<f64> {
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
struct Tree {
    dist: Vec<f64>,
    hops: Vec<u32>,
    pred: Vec<usize>,
}

#[derive(PartialEq)]
struct Item {
    dist: f64,
    hops: u32,
    node: usize,
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
fn dijkstra(g: &Graph, root: usize, y: &[f64], forward: bool) -> Tree {
    let n = g.net.sites.len();
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
        let arcs = if forward { &g.out[node] } else { &g.inc[node] };
        for &a in arcs {
            let arc = &g.net.arcs[a];
            let next = if forward { arc.to } else { arc.from };
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

/// The outcome of one pricing pass.
struct Priced {
    /// Per demand: cheapest walk price (infinite when none exists or the cap is 0).
    cost: Vec<f64>,
    /// Walks with positive reduced cost, in demand order (only when asked for).
    walks: Vec<Walk>,
    /// The dual bound for these prices.
    bound: f64,
    /// Per site: some active demand's origin reaches it and it reaches one of that
    /// origin's destinations (the edge model's "site has a processing row").
    site_reached: Vec<bool>,
}

/// Shortest walks' legs for one pricing pass, rooted where there are fewer trees: at the
/// origins and destinations (one Dijkstra from each origin, one to each destination) or at
/// the processing sites (one to and one from each). Either gives the same distances
/// (shortest-path lengths are unique; among equal paths, fewest hops, then a fixed order).
enum Legs {
    /// `from[o]`: tree from origin `o`; `to[t]`: tree to destination `t`.
    Ends {
        from: Vec<Option<Tree>>,
        to: Vec<Option<Tree>>,
    },
    /// `into[v]`: tree to processing site `v`; `out[v]`: tree from it.
    Sites {
        into: Vec<Option<Tree>>,
        out: Vec<Option<Tree>>,
    },
}

impl Legs {
    /// Builds the trees for the demands with `caps[d] > 0`: 2 · min(processing sites,
    /// (origins + destinations) / 2) Dijkstras, each O(arcs · log sites).
    fn new(g: &Graph, caps: &[f64], y: &[f64]) -> Legs {
        let net = g.net;
        let n = net.sites.len();
        let mut origin = vec![false; n];
        let mut dest = vec![false; n];
        for (d, dem) in net.demands.iter().enumerate() {
            if caps[d] > 0.0 {
                origin[dem.from] = true;
                dest[dem.to] = true;
            }
        }
        let ends = origin.iter().filter(|&&b| b).count() + dest.iter().filter(|&&b| b).count();
        if 2 * g.procs.len() < ends {
            let mut into: Vec<Option<Tree>> = (0..n).map(|_| None).collect();
            let mut out: Vec<Option<Tree>> = (0..n).map(|_| None).collect();
            for &v in &g.procs {
                into[v] = Some(dijkstra(g, v, y, false));
                out[v] = Some(dijkstra(g, v, y, true));
            }
            Legs::Sites { into, out }
        } else {
            let tree =
                |root: usize, on: bool, forward: bool| on.then(|| dijkstra(g, root, y, forward));
            Legs::Ends {
                from: (0..n).map(|o| tree(o, origin[o], true)).collect(),
                to: (0..n).map(|t| tree(t, dest[t], false)).collect(),
            }
        }
    }

    /// Length and hops of the shortest path `o → v`.
    fn first(&self, o: usize, v: usize) -> (f64, u32) {
        match self {
            Legs::Ends { from, .. } => {
                let t = from[o].as_ref().expect("origin tree");
                (t.dist[v], t.hops[v])
            }
            Legs::Sites { into, .. } => {
                let t = into[v].as_ref().expect("site tree");
                (t.dist[o], t.hops[o])
            }
        }
    }

    /// Length and hops of the shortest path `v → t`.
    fn second(&self, v: usize, t: usize) -> (f64, u32) {
        match self {
            Legs::Ends { to, .. } => {
                let tr = to[t].as_ref().expect("destination tree");
                (tr.dist[v], tr.hops[v])
            }
            Legs::Sites { out, .. } => {
                let tr = out[v].as_ref().expect("site tree");
                (tr.dist[t], tr.hops[t])
            }
        }
    }

    /// The arcs of the shortest paths `o → v` and `v → t` (in any order).
    fn arcs(&self, net: &Network, o: usize, v: usize, t: usize) -> Vec<usize> {
        let mut legs = Vec::new();
        match self {
            Legs::Ends { from, to } => {
                let (ds, dt) = (
                    from[o].as_ref().expect("tree"),
                    to[t].as_ref().expect("tree"),
                );
                let mut x = v;
                while x != o {
                    let a = ds.pred[x];
                    legs.push(a);
                    x = net.arcs[a].from;
                }
                let mut x = v;
                while x != t {
                    let a = dt.pred[x];
                    legs.push(a);
                    x = net.arcs[a].to;
                }
            }
            Legs::Sites { into, out } => {
                let (ri, fo) = (
                    into[v].as_ref().expect("tree"),
                    out[v].as_ref().expect("tree"),
                );
                let mut x = o;
                while x != v {
                    let a = ri.pred[x];
                    legs.push(a);
                    x = net.arcs[a].to;
                }
                let mut x = t;
                while x != v {
                    let a = fo.pred[x];
                    legs.push(a);
                    x = net.arcs[a].from;
                }
            }
        }
        legs
    }
}

/// Prices every active demand (`caps[d] > 0`) at arc prices `y` and site prices `z`; with
/// `u` (demand duals), also returns the walks whose reduced cost `1 − c_d − u_d` exceeds
/// [`PRICE_TOL`]. Cost: the Dijkstras of [`Legs::new`] (2 · min(processing sites,
/// distinct ends) trees, O(arcs · log sites) each), then O(demands · processing sites +
/// walk lengths).
fn price(g: &Graph, caps: &[f64], y: &[f64], z: &[f64], u: Option<&[f64]>) -> Priced {
    let net = g.net;
    let n = net.sites.len();
    let legs = Legs::new(g, caps, y);
    let (arc_cap, site_cap) = g.effective(caps);
    let mut bound: f64 = g.usable.iter().map(|&a| arc_cap[a] * y[a].max(0.0)).sum();
    bound += g
        .procs
        .iter()
        .map(|&v| site_cap[v] * z[v].max(0.0))
        .sum::<f64>();
    // Per origin: sites that reach at least one of its destinations.
    let mut reaches_dest: Vec<Vec<bool>> = vec![Vec::new(); n];
    let mut cost = vec![f64::INFINITY; net.demands.len()];
    let mut walks = Vec::new();
    for (d, dem) in net.demands.iter().enumerate() {
        if caps[d] <= 0.0 {
            continue;
        }
        if reaches_dest[dem.from].is_empty() {
            reaches_dest[dem.from] = vec![false; n];
        }
        let mut best: Option<(f64, u32, usize)> = None;
        for &v in &g.procs {
            let (d2, h2) = legs.second(v, dem.to);
            if d2.is_finite() {
                reaches_dest[dem.from][v] = true;
            }
            let (d1, h1) = legs.first(dem.from, v);
            let c = d1 + z[v].max(0.0) + d2;
            if !c.is_finite() {
                continue;
            }
            let h = h1 + h2;
            if best.is_none_or(|(bc, bh, _)| c.total_cmp(&bc).then(h.cmp(&bh)).is_lt()) {
                best = Some((c, h, v));
            }
        }
        let Some((c, _, v)) = best else { continue };
        cost[d] = c;
        bound += caps[d] * (1.0 - c).max(0.0);
        if let Some(u) = u
            && 1.0 - c - u[d] > PRICE_TOL
        {
            walks.push(Walk::from_legs(d, v, legs.arcs(net, dem.from, v, dem.to)));
        }
    }
    let mut site_reached = vec![false; n];
    for (s, reach) in reaches_dest.iter().enumerate() {
        if !reach.is_empty() {
            for &v in &g.procs {
                site_reached[v] |= legs.first(s, v).0.is_finite() && reach[v];
            }
        }
    }
    Priced {
        cost,
        walks,
        bound,
        site_reached,
    }
}

/// A solved restricted master.
struct Master {
    flow: Vec<f64>,
    value: f64,
    y: Vec<f64>,
    z: Vec<f64>,
    u: Vec<f64>,
}

/// Solves the restricted master over `walks` with the LP backend. O(one LP of
/// |walks| columns and at most arcs + sites + demands rows).
fn solve_master(g: &Graph, caps: &[f64], walks: &[Walk]) -> Result<Master> {
    let net = g.net;
    let (arc_cap, site_cap) = g.effective(caps);
    let mut model = Lp::new(true);
    let mut arc_cols: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.arcs.len()];
    let mut site_cols: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.sites.len()];
    let mut dem_cols: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.demands.len()];
    for w in walks {
        let j = model.add_var(0.0, f64::INFINITY, 1.0);
        model.magnitude[j] = caps[w.demand];
        for &(a, m) in &w.arcs {
            arc_cols[a].push((j, f64::from(m)));
        }
        site_cols[w.site].push((j, 1.0));
        dem_cols[w.demand].push((j, 1.0));
    }
    let mut rows = |cols: Vec<Vec<(usize, f64)>>, rhs: &dyn Fn(usize) -> f64| {
        cols.into_iter()
            .enumerate()
            .map(|(i, c)| (!c.is_empty()).then(|| model.add_row(c, Sense::Le, rhs(i))))
            .collect::<Vec<Option<usize>>>()
    };
    let arc_row = rows(arc_cols, &|a| arc_cap[a]);
    let site_row = rows(site_cols, &|v| site_cap[v]);
    let dem_row = rows(dem_cols, &|d| caps[d]);
    let sol = lp::solve(&model)?;
    let dual = |r: &Option<usize>| r.map_or(0.0, |r| sol.duals[r].max(0.0));
    Ok(Master {
        value: sol.x.iter().sum(),
        flow: sol.x.iter().map(|x| x.max(0.0)).collect(),
        y: arc_row.iter().map(dual).collect(),
        z: site_row.iter().map(dual).collect(),
        u: dem_row.iter().map(dual).collect(),
    })
}

/// Σ caps of the demands with a finite walk price: the most any allocation can serve, and
/// the scale of every tolerance.
fn servable_total(caps: &[f64], cost: &[f64]) -> f64 {
    caps.iter()
        .zip(cost)
        .filter(|(_, c)| c.is_finite())
        .map(|(b, _)| b)
        .sum()
}

/// Column generation: the warm simplex master ([`WarmMaster`]) when its rows fit
/// [`WARM_ROWS`], else (or when the simplex gives up) the interior-point master
/// ([`generate_cold`]) over the same walks. `start` walks carry the feasible flows `flow`
/// (a point the first master starts from; empty flows mean 0). `active`: the demands
/// whose walks are free from the start (`None`: all); the others keep their start flows
/// fixed until the pricing shows that freeing them may pay. `None` when column
/// generation does not converge.
fn generate(
    g: &Graph,
    caps: &[f64],
    start: Vec<Walk>,
    flow: Vec<f64>,
    active: Option<Vec<bool>>,
    stats: &mut Stats,
) -> Result<Option<Solved>> {
    let active = active.unwrap_or_else(|| caps.iter().map(|&b| b > 0.0).collect());
    // Start walks in class arcs (a parent's walks come in real arcs).
    let (start, flow): (Vec<Walk>, Vec<f64>) = start
        .iter()
        .enumerate()
        .filter_map(|(k, w)| g.lift(w).map(|w| (w, flow.get(k).copied().unwrap_or(0.0))))
        .unzip();
    let rows = g.usable.len() + g.procs.len() + active.iter().filter(|&&a| a).count();
    if rows > WARM_ROWS {
        return generate_cold(g, caps, start, stats);
    }
    let mut merged: HashMap<Walk, usize> = HashMap::new();
    let mut walks: Vec<Walk> = Vec::new();
    let mut values: Vec<f64> = Vec::new();
    for (k, w) in start.into_iter().enumerate() {
        let f = flow.get(k).copied().unwrap_or(0.0).max(0.0);
        if caps[w.demand] <= 0.0 {
            continue;
        }
        match merged.get(&w) {
            Some(&i) => values[i] += f,
            None => {
                merged.insert(w.clone(), walks.len());
                walks.push(w);
                values.push(f);
            }
        }
    }
    let mut m = WarmMaster::new(g, caps, active);
    // Fixed walks first, so that rows are created net of their loads.
    type Start = Vec<(Walk, f64)>;
    let (free, fixed): (Start, Start) = walks
        .into_iter()
        .zip(values)
        .partition(|(w, _)| m.active[w.demand]);
    for (w, f) in fixed.into_iter().chain(free) {
        m.add(w, f);
    }
    match m.run(stats)? {
        Warm::Done(s) => Ok(Some(s)),
        Warm::Stalled => Ok(None),
        Warm::Abandon(walks) => generate_cold(g, caps, walks, stats),
    }
}

/// How a warm column generation ended.
enum Warm {
    Done(Solved),
    Stalled,
    /// The simplex gave up or the master outgrew [`WARM_ROWS`]: its walks so far.
    Abandon(Vec<Walk>),
}

/// The restricted master kept by the warm simplex across rounds. Only *active* demands
/// have columns (and a cap row); the walks of an inactive demand stay at their start flow
/// outside the LP, and the arc and site rows (created as columns need them) hold what
/// those fixed walks leave: `cap − fixed load`. A demand is activated when its share of
/// the duality gap, `Σ_w f_w · price(w) + b_d·max(0, 1 − c_d) − Σ_w f_w`, is positive: its
/// walks become columns at their flow and the rows get their load back, which leaves the
/// basis and every basic value unchanged. The bound of [`price`] is the master's own dual
/// value plus these shares, so when no demand has a share and no column prices out, the
/// gap is closed.
struct WarmMaster<'a, 'g> {
    g: &'g Graph<'a>,
    caps: &'g [f64],
    arc_cap: Vec<f64>,
    site_cap: Vec<f64>,
    lp: Simplex,
    arc_row: Vec<usize>,
    site_row: Vec<usize>,
    dem_row: Vec<usize>,
    /// The LP's columns, in column order.
    walks: Vec<Walk>,
    /// Per inactive demand: its fixed walks and flows.
    fixed: Vec<Vec<(Walk, f64)>>,
    fixed_arc: Vec<f64>,
    fixed_site: Vec<f64>,
    active: Vec<bool>,
    seen: HashSet<Walk>,
}

const NO_ROW: usize = usize::MAX;

impl<'a, 'g> WarmMaster<'a, 'g> {
    fn new(g: &'g Graph<'a>, caps: &'g [f64], active: Vec<bool>) -> Self {
        let net = g.net;
        let (arc_cap, site_cap) = g.effective(caps);
        WarmMaster {
            g,
            caps,
            arc_cap,
            site_cap,
            lp: Simplex::new(),
            arc_row: vec![NO_ROW; net.arcs.len()],
            site_row: vec![NO_ROW; net.sites.len()],
            dem_row: vec![NO_ROW; net.demands.len()],
            walks: Vec::new(),
            fixed: vec![Vec::new(); net.demands.len()],
            fixed_arc: vec![0.0; net.arcs.len()],
            fixed_site: vec![0.0; net.sites.len()],
            active,
            seen: HashSet::new(),
        }
    }

    /// Adds walk `w` at flow `f`: a column when its demand is active, else a fixed walk.
    /// Walks already present are skipped.
    fn add(&mut self, w: Walk, f: f64) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        let d = w.demand;
        if !self.active[d] {
            for &(a, k) in &w.arcs {
                self.fixed_arc[a] += f64::from(k) * f;
            }
            self.fixed_site[w.site] += f;
            self.fixed[d].push((w, f));
            return;
        }
        self.column(w, f);
    }

    /// Adds the column of walk `w` (active demand) at flow `f`, creating the rows it
    /// needs (arc and site rows hold the capacity the fixed walks leave).
    fn column(&mut self, w: Walk, f: f64) {
        let d = w.demand;
        if self.dem_row[d] == NO_ROW {
            self.dem_row[d] = self.lp.add_row(self.caps[d], &[]);
        }
        let mut entries = Vec::with_capacity(w.arcs.len() + 2);
        for &(a, k) in &w.arcs {
            if self.arc_row[a] == NO_ROW {
                let rhs = (self.arc_cap[a] - self.fixed_arc[a]).max(0.0);
                self.arc_row[a] = self.lp.add_row(rhs, &[]);
            }
            entries.push((self.arc_row[a], f64::from(k)));
        }
        if self.site_row[w.site] == NO_ROW {
            let rhs = (self.site_cap[w.site] - self.fixed_site[w.site]).max(0.0);
            self.site_row[w.site] = self.lp.add_row(rhs, &[]);
        }
        entries.push((self.site_row[w.site], 1.0));
        entries.push((self.dem_row[d], 1.0));
        self.lp.add_col(1.0, 0.0, f64::INFINITY, f, entries);
        self.walks.push(w);
    }

    /// Makes demand `d` active: its cap row, and its fixed walks as columns at their flow
    /// (each existing row first gets the walk's load back, so no basic value moves).
    fn activate(&mut self, d: usize) {
        self.active[d] = true;
        self.dem_row[d] = self.lp.add_row(self.caps[d], &[]);
        for (w, f) in std::mem::take(&mut self.fixed[d]) {
            for &(a, k) in &w.arcs {
                let load = f64::from(k) * f;
                self.fixed_arc[a] -= load;
                if self.arc_row[a] != NO_ROW {
                    self.lp.shift_rhs(self.arc_row[a], load);
                }
            }
            self.fixed_site[w.site] -= f;
            if self.site_row[w.site] != NO_ROW {
                self.lp.shift_rhs(self.site_row[w.site], f);
            }
            self.column(w, f);
        }
    }

    fn dual(&self, row: usize) -> f64 {
        if row == NO_ROW {
            0.0
        } else {
            self.lp.dual(row).max(0.0)
        }
    }

    /// All walks (columns, then fixed walks) and their flows.
    fn into_solution(self) -> (Vec<Walk>, Vec<f64>) {
        let mut flow: Vec<f64> = (0..self.walks.len())
            .map(|j| self.lp.value(j).max(0.0))
            .collect();
        let mut walks = self.walks;
        for (w, f) in self.fixed.into_iter().flatten() {
            walks.push(w);
            flow.push(f);
        }
        (walks, flow)
    }

    /// Rounds of master solve, pricing and activation until the dual bound meets the
    /// master's value.
    fn run(mut self, stats: &mut Stats) -> Result<Warm> {
        let net = self.g.net;
        let mut scale: Option<f64> = None;
        loop {
            cancel::check()?;
            if self.lp.rows() > WARM_ROWS {
                return Ok(Warm::Abandon(self.into_solution().0));
            }
            if self.lp.cols() > 0 {
                stats.lp_solves += 1;
                stats.max_columns = stats.max_columns.max(self.walks.len());
                if self
                    .lp
                    .solve(PIVOTS_PER_ROW * self.lp.rows().max(100))
                    .is_err()
                {
                    // An interrupt ends the scenario; any other failure goes cold.
                    cancel::check()?;
                    return Ok(Warm::Abandon(self.into_solution().0));
                }
            }
            let y: Vec<f64> = self.arc_row.iter().map(|&r| self.dual(r)).collect();
            let z: Vec<f64> = self.site_row.iter().map(|&r| self.dual(r)).collect();
            let u: Vec<f64> = (0..net.demands.len())
                .map(|d| {
                    if self.active[d] {
                        self.dual(self.dem_row[d])
                    } else {
                        f64::INFINITY
                    }
                })
                .collect();
            let fixed_total: f64 = self.fixed.iter().flatten().map(|(_, f)| f).sum();
            let value = self.lp.objective() + fixed_total;
            stats.rounds += 1;
            let p = price(self.g, self.caps, &y, &z, Some(&u));
            let s = *scale.get_or_insert_with(|| servable_total(self.caps, &p.cost).max(1.0));
            if p.bound - value <= GAP_TOL * s {
                stats.generated += 1;
                let (walks, flow) = self.into_solution();
                let value = flow.iter().sum();
                return Ok(Warm::Done(Solved {
                    walks,
                    flow,
                    value,
                    arc_price: y,
                    site_price: z,
                }));
            }
            if stats.rounds >= MAX_ROUNDS {
                return Ok(Warm::Stalled);
            }
            // Inactive demands whose share of the gap is positive.
            let mut wake = Vec::new();
            for d in 0..net.demands.len() {
                if self.active[d] || self.caps[d] <= 0.0 {
                    continue;
                }
                let mut share = 0.0;
                let mut f_d = 0.0;
                for (w, f) in &self.fixed[d] {
                    let c: f64 = w
                        .arcs
                        .iter()
                        .map(|&(a, k)| f64::from(k) * y[a])
                        .sum::<f64>()
                        + z[w.site];
                    share += f * c;
                    f_d += f;
                }
                if p.cost[d].is_finite() {
                    share += self.caps[d] * (1.0 - p.cost[d]).max(0.0);
                }
                share -= f_d;
                if share > PRICE_TOL * self.caps[d].max(f_d) {
                    wake.push(d);
                }
            }
            let fresh: Vec<Walk> = p
                .walks
                .into_iter()
                .filter(|w| !self.seen.contains(w))
                .collect();
            if fresh.is_empty() && wake.is_empty() {
                // The rest of the gap is spread thinner than the tolerance: free everyone.
                wake = (0..net.demands.len())
                    .filter(|&d| !self.active[d] && self.caps[d] > 0.0)
                    .collect();
                if wake.is_empty() {
                    return Ok(Warm::Stalled);
                }
            }
            for d in wake {
                self.activate(d);
            }
            for w in fresh {
                self.add(w, 0.0);
            }
        }
    }
}

/// Column generation from the columns `start` with the interior-point master (solved
/// cold each round). `None` when it stalls or exceeds [`MAX_ROUNDS`]. Each round: one
/// master solve and one pricing pass.
fn generate_cold(
    g: &Graph,
    caps: &[f64],
    start: Vec<Walk>,
    stats: &mut Stats,
) -> Result<Option<Solved>> {
    let net = g.net;
    let mut seen: HashSet<Walk> = HashSet::new();
    let mut walks: Vec<Walk> = Vec::new();
    for w in start {
        if seen.insert(w.clone()) {
            walks.push(w);
        }
    }
    let mut scale: Option<f64> = None;
    loop {
        cancel::check()?;
        let m = if walks.is_empty() {
            Master {
                flow: Vec::new(),
                value: 0.0,
                y: vec![0.0; net.arcs.len()],
                z: vec![0.0; net.sites.len()],
                u: vec![0.0; net.demands.len()],
            }
        } else {
            stats.lp_solves += 1;
            stats.max_columns = stats.max_columns.max(walks.len());
            solve_master(g, caps, &walks)?
        };
        stats.rounds += 1;
        let p = price(g, caps, &m.y, &m.z, Some(&m.u));
        let s = *scale.get_or_insert_with(|| servable_total(caps, &p.cost).max(1.0));
        if p.bound - m.value <= GAP_TOL * s {
            stats.generated += 1;
            return Ok(Some(Solved {
                walks,
                flow: m.flow,
                value: m.value,
                arc_price: m.y,
                site_price: m.z,
            }));
        }
        let fresh: Vec<Walk> = p
            .walks
            .into_iter()
            .filter(|w| seen.insert(w.clone()))
            .collect();
        if fresh.is_empty() || stats.rounds >= MAX_ROUNDS {
            return Ok(None);
        }
        walks.extend(fresh);
    }
}

/// Greedy re-routing of `lost[d]` units per demand through the residual capacity left by
/// `walks` (with `flow`), by shortest-hop augmenting walks on the two-layer graph (BFS over
/// (site, processed?) states). Appends the walks it uses. O(augmentations · (sites + arcs)).
fn repair(g: &Graph, walks: &mut Vec<Walk>, flow: &mut Vec<f64>, lost: &[f64], eps: f64) {
    let net = g.net;
    let n = net.sites.len();
    let mut arc_res: Vec<f64> = g.class_cap.clone();
    let mut site_res: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    for (w, &f) in walks.iter().zip(flow.iter()) {
        for &(a, m) in &w.arcs {
            arc_res[a] -= f64::from(m) * f;
        }
        site_res[w.site] -= f;
    }
    let proc_ok: Vec<bool> = {
        let mut p = vec![false; n];
        for &v in &g.procs {
            p[v] = true;
        }
        p
    };
    for (d, &amount) in lost.iter().enumerate() {
        let dem = &net.demands[d];
        let mut remaining = amount;
        // Each augmentation saturates an arc or a site or finishes the demand.
        let mut budget = 2 * (net.arcs.len() + n) + 2;
        while remaining > eps && budget > 0 {
            budget -= 1;
            // BFS over states 2·site + layer; pred = (previous state, arc or usize::MAX for
            // the processing step).
            let mut pred: Vec<Option<(usize, usize)>> = vec![None; 2 * n];
            let mut seen = vec![false; 2 * n];
            let mut queue = VecDeque::new();
            seen[2 * dem.from] = true;
            queue.push_back(2 * dem.from);
            let target = 2 * dem.to + 1;
            while let Some(st) = queue.pop_front() {
                if st == target {
                    break;
                }
                let (u, layer) = (st / 2, st % 2);
                if layer == 0 && proc_ok[u] && site_res[u] > eps && !seen[st + 1] {
                    seen[st + 1] = true;
                    pred[st + 1] = Some((st, usize::MAX));
                    queue.push_back(st + 1);
                }
                for &a in &g.out[u] {
                    let next = 2 * net.arcs[a].to + layer;
                    if arc_res[a] > eps && !seen[next] {
                        seen[next] = true;
                        pred[next] = Some((st, a));
                        queue.push_back(next);
                    }
                }
            }
            if !seen[target] {
                break;
            }
            let mut legs = Vec::new();
            let mut site = usize::MAX;
            let mut st = target;
            while let Some((prev, a)) = pred[st] {
                if a == usize::MAX {
                    site = prev / 2;
                } else {
                    legs.push(a);
                }
                st = prev;
            }
            let w = Walk::from_legs(d, site, legs);
            let mut push = remaining.min(site_res[site]);
            for &(a, m) in &w.arcs {
                push = push.min(arc_res[a] / f64::from(m));
            }
            if push <= eps {
                break;
            }
            for &(a, m) in &w.arcs {
                arc_res[a] -= f64::from(m) * push;
            }
            site_res[site] -= push;
            remaining -= push;
            walks.push(w);
            flow.push(push);
        }
    }
}

/// Solves the walk formulation with demand caps `caps`, from the parent's optimum when
/// given (shortcuts, then column generation from the surviving and repaired walks).
/// `None` when column generation did not converge.
fn solve_caps(
    g: &Graph,
    caps: &[f64],
    parent: Option<&Solved>,
    stats: &mut Stats,
) -> Result<Option<Solved>> {
    let Some(p) = parent else {
        return generate(g, caps, Vec::new(), Vec::new(), None, stats);
    };
    let net = g.net;
    let zero_y = vec![0.0; net.arcs.len()];
    let zero_z = vec![0.0; net.sites.len()];
    // One pricing at zero prices: which demands are servable, and the scale.
    stats.rounds += 1;
    let reach = price(g, caps, &zero_y, &zero_z, None);
    let total = servable_total(caps, &reach.cost);
    let scale = total.max(1.0);
    let eps = FLOW_EPS * scale;

    let mut walks = Vec::new();
    let mut flow = Vec::new();
    let mut lost = vec![0.0; net.demands.len()];
    let mut dropped = false;
    for (w, &f) in p.walks.iter().zip(&p.flow) {
        if f <= eps {
            continue;
        }
        if let Some(w) = g.lift(w) {
            flow.push(f.min(caps[w.demand]));
            walks.push(w);
        } else {
            dropped = true;
            if caps[w.demand] > 0.0 {
                lost[w.demand] += f;
            }
        }
    }
    if dropped {
        repair(g, &mut walks, &mut flow, &lost, eps);
    }
    let value: f64 = flow.iter().sum();
    if value >= p.value.min(total) - GAP_TOL * scale {
        // Primal optimal; look for prices that prove it.
        let (y, z, bound) = if value >= total - GAP_TOL * scale {
            (zero_y, zero_z, reach.bound)
        } else {
            stats.rounds += 1;
            let b = price(g, caps, &p.arc_price, &p.site_price, None).bound;
            (p.arc_price.clone(), p.site_price.clone(), b)
        };
        if bound - value <= GAP_TOL * scale {
            if dropped {
                stats.repaired += 1;
            } else {
                stats.no_flow += 1;
            }
            return Ok(Some(Solved {
                walks,
                flow,
                value,
                arc_price: y,
                site_price: z,
            }));
        }
    }
    let active: Vec<bool> = lost.iter().map(|&l| l > 0.0).collect();
    generate(g, caps, walks, flow, Some(active), stats)
}

/// Verifies a walk-formulation answer like any other ([`super::solve_verified`]): the walks
/// scaled into a feasible allocation ([`verify::repair_walks`], the proven lower bound),
/// the certificate's dual bound of the prices on the same surviving network (upper bound),
/// the largest relative overload of the walks as they came (residual).
fn verified(g: &Graph, view: &Surviving, s: &Solved, caps: &[f64]) -> Verified {
    let net = g.net;
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|v| v.processing).collect();
    let walks: Vec<verify::Walk> = s
        .walks
        .iter()
        .zip(&s.flow)
        .map(|(w, &f)| verify::Walk {
            sink: verify::Sink::Demand(w.demand),
            arcs: w
                .arcs
                .iter()
                .flat_map(|&(a, m)| std::iter::repeat_n(a, usize::from(m)))
                .collect(),
            site: w.site,
            amount: f,
        })
        .collect();
    let allocation = verify::repair_walks(net, &walks, &arc_capacity, &site_capacity, caps);
    // The walks as they came: the largest overload relative to what each row could hold.
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut site_load = vec![0.0; net.sites.len()];
    let mut demand_flow = vec![0.0; net.demands.len()];
    let mut arc_has_row = vec![false; net.arcs.len()];
    for (w, &f) in s.walks.iter().zip(&s.flow) {
        demand_flow[w.demand] += f;
        site_load[w.site] += f;
        for &(a, m) in &w.arcs {
            arc_load[a] += f64::from(m) * f;
            arc_has_row[a] = true;
        }
    }
    let (arc_cap, site_cap) = g.effective_real(caps);
    let over = |load: f64, cap: f64| {
        if load > cap {
            (load - cap) / load.max(cap).max(f64::MIN_POSITIVE)
        } else {
            0.0
        }
    };
    let mut residual: f64 = 0.0;
    for a in 0..net.arcs.len() {
        residual = residual.max(over(arc_load[a], arc_capacity[a]));
    }
    for v in 0..net.sites.len() {
        residual = residual.max(over(site_load[v], site_capacity[v]));
    }
    for (d, &b) in caps.iter().enumerate() {
        residual = residual.max(over(demand_flow[d], b));
    }
    let at_stake = at_stake(net, view, caps);
    let upper = certify::dual_bound(
        net,
        view,
        caps,
        &arc_cap,
        &site_cap,
        &s.arc_price,
        &s.site_price,
    )
    .min(at_stake);
    let reach = price(g, caps, &s.arc_price, &s.site_price, None);
    let lowered = |cap: f64, real: f64| cap < real;
    Verified {
        lp_value: s.value,
        verification: Verification {
            proven: meets(residual, allocation.served, upper, at_stake),
            lower: allocation.served,
            upper,
            residual,
            attempts: 1,
            backend: "walks".into(),
        },
        allocation,
        arc_price: (0..net.arcs.len())
            .map(|a| {
                if lowered(arc_cap[a], arc_capacity[a]) {
                    0.0
                } else {
                    s.arc_price[a].max(0.0)
                }
            })
            .collect(),
        site_price: (0..net.sites.len())
            .map(|v| {
                if lowered(site_cap[v], site_capacity[v]) {
                    0.0
                } else {
                    s.site_price[v].max(0.0)
                }
            })
            .collect(),
        arc_has_row,
        site_has_row: reach.site_reached,
        bound_price: (s.arc_price.clone(), s.site_price.clone()),
    }
}

/// Evaluates one outage with the walk engine: the same [`Evaluation`] as
/// [`super::evaluate`] (same optimum; where the optimal allocation or shadow prices are
/// not unique, possibly another optimal one), plus the basis for child scenarios and the
/// work done. `parent` is the optimum of a scenario whose failed set is a subset of this
/// one's (normally the baseline). Each LP's answer is verified like the edge LP's; an
/// answer that is not proven, or a column generation that does not converge, is solved
/// again by the edge LP's backend ladder (counted in `stats.fallback`).
///
/// Cost: per LP (required, and volume when some demand offers more than it requires) one
/// or two pricing passes when a shortcut decides it, else a few rounds of one master solve
/// and one pricing pass each. Memory: O(columns · walk length + sites²), independent of
/// sources × arcs.
pub fn evaluate_walks(net: &Network, outage: &Outage, parent: Option<&Basis>) -> Result<Walked> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let g = Graph::new(net, &view);
    let mut stats = Stats::default();
    let caps = g.caps(false);
    let required = solve_caps(
        &g,
        &caps,
        parent.and_then(|b| b.required.as_ref()),
        &mut stats,
    )?;
    let (req_verified, required) =
        checked(net, &g, &view, required, &caps, Cap::Required, &mut stats)?;
    let (vol_verified, volume) = if needs_volume_lp(net, outage) {
        let vcaps = g.caps(true);
        // Start from the parent's volume optimum, else from this scenario's required walks.
        let solved = match (parent.and_then(|b| b.volume.as_ref()), &required) {
            (Some(pv), _) => solve_caps(&g, &vcaps, Some(pv), &mut stats)?,
            (None, Some(r)) => {
                let flow = r.flow.clone();
                generate(&g, &vcaps, r.walks.clone(), flow, None, &mut stats)?
            }
            (None, None) => generate(&g, &vcaps, Vec::new(), Vec::new(), None, &mut stats)?,
        };
        let (v, solved) = checked(net, &g, &view, solved, &vcaps, Cap::Volume, &mut stats)?;
        (Some(v), solved)
    } else {
        (None, None)
    };
    Ok(Walked {
        evaluation: finish(net, &view, req_verified, vol_verified),
        basis: Basis { required, volume },
        stats,
    })
}

/// The verified result of one LP of the walk engine, or the edge LP's when the engine's
/// answer is missing (no convergence) or not proven; the walks are kept as a basis only
/// when proven.
fn checked(
    net: &Network,
    g: &Graph,
    view: &Surviving,
    solved: Option<Solved>,
    caps: &[f64],
    cap: Cap,
    stats: &mut Stats,
) -> Result<(Verified, Option<Solved>)> {
    if let Some(s) = solved {
        let s = g.split(s);
        let v = verified(g, view, &s, caps);
        if v.verification.proven {
            return Ok((v, Some(s)));
        }
    }
    stats.fallback += 1;
    debug_assert_eq!(caps, caps_of_view(net, view, cap).as_slice());
    Ok((solve_verified(net, view, cap)?, None))
}

/// Per demand: its cap under `cap` when it survives `view`, else 0 (as [`Graph::caps`]).
fn caps_of_view(net: &Network, view: &Surviving, cap: Cap) -> Vec<f64> {
    caps_of(net, cap)
        .into_iter()
        .enumerate()
        .map(|(d, b)| if view.demand_alive(net, d) { b } else { 0.0 })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Processing-bound single demand (hand-computed, common practice, no source): site a
    /// processes 3 of the 8 required, so served = 3 and the unique optimal price of a's
    /// processing is 1 (one more unit serves one more unit); the link is slack (price 0).
    /// The same case as `shadow_price_of_binding_processing` for the edge LP.
    #[test]
    fn unique_processing_price() {
        let n = Network::from_json(
            r#"{"sites":[{"id":"a","processing":3},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":100}],
            "demands":[{"from":"a","to":"b","volume":10,"required":8}]}"#,
        )
        .unwrap();
        let w = evaluate_walks(&n, &Outage::default(), None).unwrap();
        let e = &w.evaluation;
        assert!(
            (e.served_required - 3.0).abs() < 1e-6,
            "{}",
            e.served_required
        );
        assert!((e.throughput - 3.0).abs() < 1e-6);
        assert!(
            (e.site_price[0].unwrap() - 1.0).abs() < 1e-6,
            "{:?}",
            e.site_price
        );
        assert!(
            e.arc_price.iter().all(|p| p.abs() < 1e-6),
            "{:?}",
            e.arc_price
        );
        assert_eq!(e.bottlenecks[0].resource, super::super::Resource::Site(0));
        // Edge LP (the product's other formulation) gives the same price.
        let edge = super::super::evaluate(&n, &Outage::default()).unwrap();
        assert!((edge.site_price[0].unwrap() - e.site_price[0].unwrap()).abs() < 1e-6);
    }

    /// Walk construction: arcs crossed twice (before and after processing) get
    /// multiplicity 2 (hand-checked).
    #[test]
    fn legs_merge_into_multiplicities() {
        let w = Walk::from_legs(0, 3, [4, 1, 4, 2]);
        assert_eq!(w.arcs, vec![(1, 1), (2, 1), (4, 2)]);
    }
}
