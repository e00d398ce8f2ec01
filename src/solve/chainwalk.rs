//! The layered walk engine of service chains: column generation over layered walks, with
//! the same optimum as the layered edge LP of [`super::chain`] and the same verification.
//!
//! **Columns.** A column is a *layered walk* of one demand `d` with chain `f1 … fk`: a path
//! from the origin to a site running `f1`, then a path to a site running `f2`, …, then a
//! path from the site of `fk` to the destination, on the surviving arcs (plain traffic,
//! `k = 0`, is one path). Measured in origin units like every variable of the layered
//! model, one unit of the walk puts `G_j = g1 · … · gj` units on each arc crossed in leg `j`
//! (after `j` functions) and `G_j` units on the row of `f_{j+1}` at the site where it is
//! applied (the volume entering it), and 1 on the cap row of `d`. The master maximises
//! `Σ λ_w` under the arc rows, the (site, function) rows and the demand caps. By the
//! decomposition argument of [`super::chain`] (each group's layered flow is a sum of
//! source–sink paths of the layered graph), every edge solution is a combination of such
//! walks, so the two formulations have the same optimum; the row right-hand sides are the
//! edge LP's own (capacities lowered to what can use them, [`chain::Layered`]).
//!
//! **Pricing.** With arc duals `y`, function duals `z` and demand duals `u`, the cheapest
//! layered walk of every demand of one (origin, chain) group is one Dijkstra on the group's
//! layered graph (`k + 1` copies of the surviving network; arc `a` in layer `j` costs
//! `G_j · y_a`, function `f_{j+1}` at `v` between layers `j` and `j + 1` costs
//! `G_j · z_{v,f}`). A walk enters when `1 − π_d − u_d` exceeds [`PRICE_TOL`]. The same pass
//! gives the dual bound `Σ cap·y + Σ cap·z + Σ_d b_d · max(0, 1 − π_d)` (weak duality, valid
//! for any nonnegative prices), and column generation stops when it meets the master's
//! value within [`GAP_TOL`].
//!
//! **Master.** The project's warm bounded simplex ([`super::simplex`]), kept between rounds:
//! new walks enter at zero against the current basis, rows are created as columns need
//! them. A scenario starts from the walks of its parent's optimum (the baseline's) that
//! survive it, at their flows scaled into the new rows (a feasible start).
//!
//! **Shortcut.** When no walk of the parent's optimum that carried flow is lost and the
//! parent's allocation fits the new rows, that allocation with the parent's prices is
//! verified first, with no master solve: a failure that takes nothing the optimum used
//! cannot raise the optimum, and the parent's prices priced on the smaller network give a
//! bound no larger than before.
//!
//! **Verification** is the layered edge LP's, unchanged: the rows are [`chain::build`]'s
//! (same groups, same lowered capacities, computed without building the LP), the walks'
//! flows are written as edge and demand variables of the layered graph, decomposed and
//! scaled into the real capacities by [`chain::repair`] (the proven lower bound), and the
//! master's prices go through [`chain::dual_bound`] (the proven upper bound); proven when
//! the row residual is within tolerance and the bounds meet within
//! [`crate::tol::PROOF_GAP_TOL`] of the demand at stake, as in
//! [`chain::solve_verified_with`]. An answer that is not proven, a master above
//! [`WARM_ROWS`] rows, a simplex failure or a column generation that does not converge
//! within [`MAX_ROUNDS`] is solved again by the layered edge LP (counted as a fallback).
//!
//! Determinism: Dijkstra breaks ties by hop count and then layered node index, walks enter
//! in group and demand order, and a scenario depends only on the network, the outage and
//! the parent's optimum, never on thread count.

use std::cmp::Ordering;
use std::collections::{BTreeMap, BinaryHeap, HashMap, HashSet};

use super::chain::{self, EdgeKind, Layered};
use super::colgen::Stats;
use super::evaluator::{AddModel, Evaluated, Evaluator, Warm};
use super::lp::Lp;
use super::simplex::Simplex;
use super::surviving::{Surviving, Unservable};
use super::types::{Evaluation, Verification, Verified};
use super::{RESIDUAL_TOL, cancel, needs_volume_lp};
use crate::error::Result;
use crate::model::{Chains, FunctionIdx, Network};
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;
use crate::scenario::Outage;
use crate::tol::PROOF_GAP_TOL;

/// The engine's tolerances (defined and explained in [`crate::tol`]): the stopping gap of
/// column generation and the reduced cost a walk needs to enter, the walk engine's own.
pub use crate::tol::{COLGEN_GAP_TOL as GAP_TOL, WALK_PRICE_TOL as PRICE_TOL};
/// Pricing rounds before an LP falls back to the layered edge LP.
pub const MAX_ROUNDS: usize = 200;
/// Largest master (rows) solved by the warm simplex (dense inverse of 8·rows² bytes);
/// larger ones go to the layered edge LP.
pub const WARM_ROWS: usize = super::colgen::WARM_ROWS;
/// Pivots allowed per master solve, per row of the master.
const PIVOTS_PER_ROW: usize = 50;
/// Share of a row a warm start leaves free when it scales a parent's flows into the rows
/// (keeps the start strictly inside them against rounding of the ratio).
const START_MARGIN: f64 = 1e-9;
const NONE: usize = usize::MAX;

/// One layered walk of one demand: its edges in walk order (arcs with the layer they are
/// crossed in, functions with the site and chain position where they are applied).
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct ChainWalk {
    pub demand: usize,
    pub edges: Vec<EdgeKind>,
}

impl ChainWalk {
    /// Every arc usable and every function site able to run its function on `view`.
    /// O(walk length).
    fn survives(&self, ch: &Chains, view: &Surviving) -> bool {
        let chain = &ch.chain[self.demand];
        self.edges.iter().all(|e| match *e {
            EdgeKind::Arc { arc, .. } => view.arc_usable[arc],
            EdgeKind::Function { site, layer } => chain
                .get(layer)
                .is_some_and(|&f| chain::runs(ch, view, site, f)),
        })
    }
}

/// An optimum of the walk formulation for one set of demand caps: its walks and flows,
/// its value and the prices that certified it.
#[derive(Debug, Clone, Default)]
pub struct Solved {
    pub walks: Vec<ChainWalk>,
    pub flow: Vec<f64>,
    pub value: f64,
    /// Per arc of `Network::arcs` (0 without a master row).
    pub arc_price: Vec<f64>,
    /// Per (site, function) row of the master.
    pub fn_price: BTreeMap<(SiteIdx, FunctionIdx), f64>,
}

/// What a child scenario starts from: the parent's proven optima (required caps, and
/// volume caps when a throughput LP was solved).
#[derive(Debug, Clone, Default)]
pub struct Basis {
    pub required: Option<Solved>,
    pub volume: Option<Solved>,
}

/// The rows of the layered model in one outage, and the pricing graph.
struct Rows<'a> {
    net: &'a Network,
    ch: &'a Chains,
    view: &'a Surviving,
    layered: &'a Layered,
    /// Per site: the usable arcs leaving it.
    out: Vec<Vec<usize>>,
    /// Per demand: its group in `layered` (`NONE`: not in the LP).
    group_of: Vec<usize>,
    /// Σ caps of the demands in the LP (at least 1): the scale of the tolerances.
    scale: f64,
}

/// A row of the master.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
enum RowKey {
    Arc(usize),
    Function(SiteIdx, FunctionIdx),
    Demand(usize),
}

impl<'a> Rows<'a> {
    fn new(net: &'a Network, view: &'a Surviving, layered: &'a Layered) -> Rows<'a> {
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
        Rows {
            net,
            ch,
            view,
            layered,
            out,
            group_of,
            scale: f64::max(total, 1.0),
        }
    }

    /// The coefficients of walk `w` in the master's rows (arcs and functions weighted by
    /// the cumulative gain of their layer, summed when a row is used twice; 1 on the
    /// demand's cap row), in row-key order. O(walk length · log).
    fn coefficients(&self, w: &ChainWalk) -> Vec<(RowKey, f64)> {
        let group = &self.layered.groups[self.group_of[w.demand]];
        let mut rows: BTreeMap<RowKey, f64> = BTreeMap::new();
        for e in &w.edges {
            let (key, layer) = match *e {
                EdgeKind::Arc { arc, layer } => (RowKey::Arc(arc), layer),
                EdgeKind::Function { site, layer } => {
                    (RowKey::Function(site, group.chain[layer]), layer)
                }
            };
            *rows.entry(key).or_default() += group.cumulative[layer];
        }
        rows.insert(RowKey::Demand(w.demand), 1.0);
        rows.into_iter().collect()
    }

    /// The right-hand side of a row: the edge LP's (lowered) capacity, or the cap.
    fn rhs(&self, key: RowKey) -> f64 {
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
    fn price(
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
struct Priced {
    /// Per demand: its cheapest layered walk (infinite when not in the LP or unreachable).
    cost: Vec<f64>,
    /// Walks that price out (only when demand duals were given).
    walks: Vec<ChainWalk>,
    /// The dual bound at these prices.
    bound: f64,
}

/// A heap entry of the layered Dijkstra, reversed so that the max-heap pops the least
/// distance, then fewest hops, then lowest node.
#[derive(PartialEq)]
struct Item {
    dist: f64,
    hops: u32,
    node: usize,
}

impl Eq for Item {}

impl Ord for Item {
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

/// The restricted master on the warm simplex: rows created as columns need them. Only
/// *active* demands have columns; the walks of an inactive demand stay at their start flow
/// outside the LP, and each row holds what those fixed walks leave (`rhs − fixed load`). A
/// demand is activated when its share of the duality gap, `Σ_w f_w · price(w) +
/// b_d · max(0, 1 − π_d) − Σ_w f_w`, is positive: its walks become columns at their flows
/// and the rows get their load back, which leaves every basic value unchanged (the scheme
/// of the base engine's warm master). The bound of [`Rows::price`] is valid for any
/// prices, so when it meets the master's value plus the fixed flow, the whole allocation
/// is optimal.
struct Master<'r, 'a> {
    rows: &'r Rows<'a>,
    lp: Simplex,
    row: HashMap<RowKey, usize>,
    /// The LP's columns, in column order.
    walks: Vec<ChainWalk>,
    seen: HashSet<ChainWalk>,
    active: Vec<bool>,
    /// Per inactive demand: its fixed walks and flows.
    fixed: Vec<Vec<(ChainWalk, f64)>>,
    fixed_load: HashMap<RowKey, f64>,
}

impl<'r, 'a> Master<'r, 'a> {
    /// An empty master whose active demands are `active`.
    fn new(rows: &'r Rows<'a>, active: Vec<bool>) -> Self {
        Master {
            rows,
            lp: Simplex::new(),
            row: HashMap::new(),
            walks: Vec::new(),
            seen: HashSet::new(),
            fixed: vec![Vec::new(); active.len()],
            active,
            fixed_load: HashMap::new(),
        }
    }

    /// Adds walk `w` at flow `f` (skipped when already present): a column when its demand
    /// is active, else a fixed walk. The caller keeps the point feasible and adds fixed
    /// walks before columns. O(rows · walk length) for the basis update.
    fn add(&mut self, w: ChainWalk, f: f64) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        if !self.active[w.demand] {
            for (key, c) in self.rows.coefficients(&w) {
                *self.fixed_load.entry(key).or_default() += c * f;
            }
            self.fixed[w.demand].push((w, f));
            return;
        }
        self.column(w, f);
    }

    /// The column of walk `w` (active demand) at flow `f`, with the rows it needs (each
    /// created holding what the fixed walks leave).
    fn column(&mut self, w: ChainWalk, f: f64) {
        let mut entries = Vec::new();
        for (key, c) in self.rows.coefficients(&w) {
            let r = match self.row.get(&key) {
                Some(&r) => r,
                None => {
                    let fixed = self.fixed_load.get(&key).copied().unwrap_or(0.0);
                    let r = self.lp.add_row((self.rows.rhs(key) - fixed).max(0.0), &[]);
                    self.row.insert(key, r);
                    r
                }
            };
            entries.push((r, c));
        }
        self.lp.add_col(1.0, 0.0, f64::INFINITY, f, entries);
        self.walks.push(w);
    }

    /// Makes demand `d` active: its fixed walks become columns at their flows, each
    /// existing row first getting the walk's load back (no basic value moves).
    fn activate(&mut self, d: usize) {
        self.active[d] = true;
        for (w, f) in std::mem::take(&mut self.fixed[d]) {
            for (key, c) in self.rows.coefficients(&w) {
                *self.fixed_load.entry(key).or_default() -= c * f;
                if let Some(&r) = self.row.get(&key) {
                    self.lp.shift_rhs(r, c * f);
                }
            }
            self.column(w, f);
        }
    }

    fn dual(&self, key: RowKey) -> f64 {
        self.row
            .get(&key)
            .map_or(0.0, |&r| self.lp.dual(r).max(0.0))
    }

    /// Rounds of master solve, pricing and activation until the dual bound meets the
    /// master's value plus the fixed flow within [`GAP_TOL`]; `None` when the simplex
    /// fails, the master outgrows [`WARM_ROWS`], nothing enters while the gap is open, or
    /// after [`MAX_ROUNDS`].
    fn run(mut self, stats: &mut Stats) -> Result<Option<Solved>> {
        let net = self.rows.net;
        let layered = self.rows.layered;
        for _ in 0..MAX_ROUNDS {
            cancel::check()?;
            if self.lp.rows() > WARM_ROWS {
                return Ok(None);
            }
            if self.lp.cols() > 0 {
                stats.lp_solves += 1;
                stats.max_columns = stats.max_columns.max(self.walks.len());
                if self
                    .lp
                    .solve(PIVOTS_PER_ROW * self.lp.rows().max(100))
                    .is_err()
                {
                    cancel::check()?;
                    return Ok(None);
                }
            }
            let y: Vec<f64> = (0..net.arcs.len())
                .map(|a| self.dual(RowKey::Arc(a)))
                .collect();
            let z: BTreeMap<(SiteIdx, FunctionIdx), f64> = layered
                .function_cap
                .keys()
                .map(|&(v, f)| ((v, f), self.dual(RowKey::Function(v, f))))
                .collect();
            let u: Vec<f64> = (0..net.demands.len())
                .map(|d| {
                    if self.active[d] {
                        self.dual(RowKey::Demand(d))
                    } else {
                        f64::INFINITY
                    }
                })
                .collect();
            let fixed_total: f64 = self.fixed.iter().flatten().map(|(_, f)| f).sum();
            let value = self.lp.objective() + fixed_total;
            stats.rounds += 1;
            let p = self.rows.price(&y, &z, Some(&u));
            if p.bound - value <= GAP_TOL * self.rows.scale {
                stats.generated += 1;
                let mut flow: Vec<f64> = (0..self.walks.len())
                    .map(|j| self.lp.value(j).max(0.0))
                    .collect();
                let mut walks = self.walks;
                for (w, f) in self.fixed.into_iter().flatten() {
                    walks.push(w);
                    flow.push(f);
                }
                return Ok(Some(Solved {
                    value: flow.iter().sum(),
                    walks,
                    flow,
                    arc_price: y,
                    fn_price: z,
                }));
            }
            // Inactive demands whose share of the gap is positive.
            let price_of = |w: &ChainWalk| -> f64 {
                self.rows
                    .coefficients(w)
                    .into_iter()
                    .map(|(key, c)| {
                        c * match key {
                            RowKey::Arc(a) => y[a],
                            RowKey::Function(v, f) => z.get(&(v, f)).copied().unwrap_or(0.0),
                            RowKey::Demand(_) => 0.0,
                        }
                    })
                    .sum()
            };
            let mut wake = Vec::new();
            for d in 0..net.demands.len() {
                if self.active[d] || self.rows.group_of[d] == NONE {
                    continue;
                }
                let (mut share, mut f_d) = (0.0, 0.0);
                for (w, f) in &self.fixed[d] {
                    share += f * price_of(w);
                    f_d += f;
                }
                if p.cost[d].is_finite() {
                    share += layered.bound[d] * (1.0 - p.cost[d]).max(0.0);
                }
                share -= f_d;
                if share > PRICE_TOL * layered.bound[d].max(f_d) {
                    wake.push(d);
                }
            }
            let fresh: Vec<ChainWalk> = p
                .walks
                .into_iter()
                .filter(|w| !self.seen.contains(w))
                .collect();
            if fresh.is_empty() && wake.is_empty() {
                // The rest of the gap is spread thinner than the tolerance: free everyone.
                wake = (0..net.demands.len())
                    .filter(|&d| !self.active[d] && self.rows.group_of[d] != NONE)
                    .collect();
                if wake.is_empty() {
                    return Ok(None);
                }
            }
            for d in wake {
                self.activate(d);
            }
            for w in fresh {
                self.add(w, 0.0);
            }
        }
        Ok(None)
    }
}

/// Where a master starts from a parent's optimum.
struct Start {
    /// The parent's walks that survive this outage and belong to a demand of the LP,
    /// merged when equal, at their flows (scaled by one factor when the new rows could not
    /// hold them all).
    walks: Vec<(ChainWalk, f64)>,
    /// Per demand: some walk of it that carried flow was lost.
    lost: Vec<bool>,
    /// The rows could not hold the surviving flows: they were scaled down by more than
    /// rounding.
    scaled: bool,
}

impl Start {
    /// The parent's whole allocation survives as it was (no flow lost, no scaling).
    fn intact(&self) -> bool {
        !self.scaled && !self.lost.iter().any(|&l| l)
    }
}

/// The [`Start`] of this outage's master from the parent's optimum `start`.
/// O(Σ walk lengths · log).
fn surviving_start(rows: &Rows, start: &Solved) -> Start {
    let mut index: HashMap<&ChainWalk, usize> = HashMap::new();
    let mut kept: Vec<(ChainWalk, f64)> = Vec::new();
    let mut lost = vec![false; rows.net.demands.len()];
    for (w, &f) in start.walks.iter().zip(&start.flow) {
        if rows.group_of[w.demand] == NONE || !w.survives(rows.ch, rows.view) {
            lost[w.demand] |= f > 0.0;
            continue;
        }
        match index.get(w) {
            Some(&i) => kept[i].1 += f.max(0.0),
            None => {
                index.insert(w, kept.len());
                kept.push((w.clone(), f.max(0.0)));
            }
        }
    }
    let mut load: BTreeMap<RowKey, f64> = BTreeMap::new();
    for (w, f) in &kept {
        for (key, c) in rows.coefficients(w) {
            *load.entry(key).or_default() += c * f;
        }
    }
    // Rows the parent filled exactly may be over by rounding: those scale the start by
    // about START_MARGIN, which is not a change of the allocation (`scaled` stays false).
    let mut factor: f64 = 1.0;
    for (key, l) in load {
        let rhs = rows.rhs(key);
        if l > rhs * (1.0 - START_MARGIN) {
            factor = factor.min(rhs * (1.0 - START_MARGIN) / l);
        }
    }
    let factor = factor.max(0.0);
    let scaled = factor < 1.0 - 2.0 * START_MARGIN;
    Start {
        walks: kept.into_iter().map(|(w, f)| (w, f * factor)).collect(),
        lost,
        scaled,
    }
}

/// Greedy re-routing of the flow `start` lost, per demand, through the residual capacity
/// its surviving walks leave in the rows: shortest-hop layered walks (BFS over the layered
/// graph of the demand's group, using only edges whose row has room), each pushed as far as
/// its tightest row allows (a row used twice by one walk counts twice). Appends the walks
/// it uses to `walks`. O(augmentations · (k + 1) · (sites + arcs)).
fn reroute(rows: &Rows, start: &Solved, walks: &mut Vec<(ChainWalk, f64)>) {
    let (net, layered) = (rows.net, rows.layered);
    let n = net.sites.len();
    let eps = crate::tol::WALK_FLOW_EPS * rows.scale;
    let mut lost = vec![0.0; net.demands.len()];
    for (w, &f) in start.walks.iter().zip(&start.flow) {
        if rows.group_of[w.demand] != NONE && f > 0.0 && !w.survives(rows.ch, rows.view) {
            lost[w.demand] += f;
        }
    }
    let mut res: HashMap<RowKey, f64> = HashMap::new();
    let room = |res: &HashMap<RowKey, f64>, key: RowKey| {
        res.get(&key).copied().unwrap_or_else(|| rows.rhs(key))
    };
    for (w, f) in walks.iter() {
        for (key, c) in rows.coefficients(w) {
            let r = room(&res, key);
            res.insert(key, r - c * f);
        }
    }
    for (d, &amount) in lost.iter().enumerate() {
        if amount <= eps {
            continue;
        }
        let group = &layered.groups[rows.group_of[d]];
        let k = group.chain.len();
        let target = k * n + net.demands[d].to.0;
        let mut remaining = amount.min(room(&res, RowKey::Demand(d)));
        let mut budget = 2 * (net.arcs.len() + n) + 2;
        while remaining > eps && budget > 0 {
            budget -= 1;
            let mut pred: Vec<Option<(usize, EdgeKind)>> = vec![None; (k + 1) * n];
            let mut seen = vec![false; (k + 1) * n];
            let mut queue = std::collections::VecDeque::new();
            seen[group.origin] = true;
            queue.push_back(group.origin);
            while let Some(node) = queue.pop_front() {
                if node == target {
                    break;
                }
                let (j, v) = (node / n, node % n);
                if j < k {
                    let f = group.chain[j];
                    let next = (j + 1) * n + v;
                    if !seen[next]
                        && chain::runs(rows.ch, rows.view, v, f)
                        && layered.function_cap.contains_key(&(v, f))
                        && room(&res, RowKey::Function(v, f)) > eps
                    {
                        seen[next] = true;
                        pred[next] = Some((node, EdgeKind::Function { site: v, layer: j }));
                        queue.push_back(next);
                    }
                }
                for &a in &rows.out[v] {
                    let next = j * n + net.arcs[a].to.0;
                    if !seen[next]
                        && layered.arc_row[a].is_some()
                        && room(&res, RowKey::Arc(a)) > eps
                    {
                        seen[next] = true;
                        pred[next] = Some((node, EdgeKind::Arc { arc: a, layer: j }));
                        queue.push_back(next);
                    }
                }
            }
            if !seen[target] {
                break;
            }
            let mut edges = Vec::new();
            let mut at = target;
            while let Some((prev, kind)) = pred[at] {
                edges.push(kind);
                at = prev;
            }
            edges.reverse();
            let w = ChainWalk { demand: d, edges };
            let coefficients = rows.coefficients(&w);
            let push = coefficients
                .iter()
                .map(|&(key, c)| room(&res, key) / c)
                .fold(remaining, f64::min);
            if push <= eps {
                break;
            }
            for &(key, c) in &coefficients {
                let r = room(&res, key);
                res.insert(key, r - c * push);
            }
            remaining -= push;
            walks.push((w, push));
        }
    }
}

/// The rows of the layered model of `view` with demand caps `bound`, exactly as
/// [`chain::build`] makes them (same (origin, chain) groups in the same order, same arcs and
/// (site, function) pairs with a row, same right-hand sides: capacities lowered to what the
/// groups that can use them could put there), without building the LP: no edges and no
/// demand variables yet ([`with_walks`] adds those of an answer). Also returns the cut-off
/// demands with their reason. O(groups · (k + 1) · (sites + arcs)).
fn layered_rows(
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

/// `layered` with the edges and demand variables the walks of `s` use (variable ids into
/// the returned flow vector: each edge's flow is the sum of the flows of the walks through
/// it, each demand's the sum of its walks'), the flow written as [`chain::repair`] reads
/// an LP answer. Edges the walks do not use carry 0 and are left out, which leaves the
/// repair's decomposition unchanged. O(Σ walk lengths).
fn with_walks(net: &Network, layered: &mut Layered, group_of: &[usize], s: &Solved) -> Vec<f64> {
    let n = net.sites.len();
    let mut x: Vec<f64> = Vec::new();
    let mut var: Vec<HashMap<EdgeKind, usize>> = vec![HashMap::new(); layered.groups.len()];
    layered.edges.iter_mut().for_each(Vec::clear);
    layered.demand_var.iter_mut().for_each(|v| *v = None);
    for (w, &f) in s.walks.iter().zip(&s.flow) {
        let g = group_of[w.demand];
        for e in &w.edges {
            let i = *var[g].entry(*e).or_insert_with(|| {
                let (from, to) = match *e {
                    EdgeKind::Arc { arc, layer } => (
                        layer * n + net.arcs[arc].from.0,
                        layer * n + net.arcs[arc].to.0,
                    ),
                    EdgeKind::Function { site, layer } => {
                        (layer * n + site, (layer + 1) * n + site)
                    }
                };
                x.push(0.0);
                layered.edges[g].push(chain::Edge {
                    from,
                    to,
                    var: x.len() - 1,
                    kind: *e,
                });
                x.len() - 1
            });
            x[i] += f;
        }
        let dv = *layered.demand_var[w.demand].get_or_insert_with(|| {
            x.push(0.0);
            x.len() - 1
        });
        x[dv] += f;
    }
    x
}

/// The verified result of walk answer `s` on the rows `layered` of `view`, as
/// [`chain::solve_verified_with`] verifies a backend's answer: the residual (largest
/// relative overload of a row by the walks as they came; conservation holds by
/// construction), [`chain::repair`] of the walks' flow (the proven lower bound),
/// [`chain::dual_bound`] of the master's prices (the proven upper bound, capped by the
/// demand at stake), proven when they meet within [`crate::tol::PROOF_GAP_TOL`] of it.
/// O(Σ walk lengths + groups · Dijkstra).
fn verified(rows: &Rows, layered: &Layered, x: &[f64], s: &Solved) -> Verified {
    let (net, view) = (rows.net, rows.view);
    let over = |load: f64, cap: f64| {
        if load > cap {
            (load - cap) / load.max(cap.abs()).max(f64::MIN_POSITIVE)
        } else {
            0.0
        }
    };
    let mut load: BTreeMap<RowKey, f64> = BTreeMap::new();
    for (w, &f) in s.walks.iter().zip(&s.flow) {
        for (key, c) in rows.coefficients(w) {
            *load.entry(key).or_default() += c * f;
        }
    }
    let residual = load
        .iter()
        .map(|(&key, &l)| over(l, rows.rhs(key)))
        .fold(0.0, f64::max);
    let at_stake: f64 = layered
        .groups
        .iter()
        .flat_map(|g| &g.demands)
        .map(|&d| layered.bound[d])
        .sum();
    let (allocation, walks) = chain::repair(net, layered, x);
    let arc_price: Vec<f64> = (0..net.arcs.len())
        .map(|a| {
            if layered.arc_row[a].is_some() {
                s.arc_price[a].max(0.0)
            } else {
                0.0
            }
        })
        .collect();
    let fn_price: BTreeMap<(SiteIdx, FunctionIdx), f64> = layered
        .function_row
        .keys()
        .map(|k| (*k, s.fn_price.get(k).copied().unwrap_or(0.0).max(0.0)))
        .collect();
    let upper = chain::dual_bound(net, view, layered, &arc_price, &fn_price).min(at_stake);
    let lower = allocation.served;
    let tol = PROOF_GAP_TOL * at_stake.max(f64::MIN_POSITIVE);
    let gap = upper - lower;
    Verified {
        lp_value: s.value,
        verification: Verification {
            proven: residual <= RESIDUAL_TOL && gap <= tol && gap >= -tol,
            lower,
            upper,
            residual,
            attempts: 1,
            backend: "walks".into(),
        },
        allocation,
        arc_price: (0..net.arcs.len())
            .map(|a| {
                if layered.arc_cap[a] < net.arcs[a].capacity {
                    0.0
                } else {
                    arc_price[a]
                }
            })
            .collect(),
        site_price: vec![0.0; net.sites.len()],
        arc_has_row: layered.arc_row.iter().map(Option::is_some).collect(),
        site_has_row: vec![false; net.sites.len()],
        bound_price: (arc_price, Vec::new()),
        functions: super::chain_use::function_use(net, view, layered, &walks, &fn_price),
    }
}

/// One LP decided: its verified result, the cut-off demands and, when the walks proved
/// it, the optimum (a child's start).
type Decided = (Verified, Vec<(usize, Unservable)>, Option<Solved>);

/// One LP of an outage (caps `caps`) by the walk engine, verified: when every walk of the
/// parent's optimum `start` that carried flow survives (no flow lost), that allocation
/// with the parent's prices first (no master solve: proven when the bounds meet, as they
/// do when the failure takes nothing the optimum used); otherwise, or when that is not
/// proven, column generation from the surviving walks. The layered edge LP's ladder when
/// the walk answer is missing or not proven (counted in `stats.fallback`). Returns the
/// verified result, the cut-off demands and, when proven by the walks, the optimum (a
/// child's start).
fn solve_caps(
    net: &Network,
    view: &Surviving,
    caps: &[f64],
    start: Option<&Solved>,
    stats: &mut Stats,
) -> Result<Decided> {
    let (mut layered, cut_off) = layered_rows(net, view, caps);
    if !layered.groups.is_empty() {
        let answer = {
            let rows = Rows::new(net, view, &layered);
            let kept = start.map(|s| surviving_start(&rows, s));
            let mut answer = None;
            if let (Some(s), Some(k)) = (start, &kept)
                && k.intact()
            {
                stats.rounds += 1;
                let (walks, flow): (Vec<ChainWalk>, Vec<f64>) = k.walks.iter().cloned().unzip();
                answer = Some(Solved {
                    value: flow.iter().sum(),
                    walks,
                    flow,
                    arc_price: s.arc_price.clone(),
                    fn_price: s.fn_price.clone(),
                });
            }
            (answer, kept, rows.group_of.clone())
        };
        let (shortcut, kept, group_of) = answer;
        if let Some(s) = shortcut {
            let x = with_walks(net, &mut layered, &group_of, &s);
            let rows = Rows::new(net, view, &layered);
            let v = verified(&rows, &layered, &x, &s);
            if v.verification.proven {
                stats.no_flow += 1;
                return Ok((v, cut_off, Some(s)));
            }
        }
        // Repair: the lost flow re-routed greedily. When that reaches what the parent
        // served (a child never serves more) or everything at stake, the parent's prices
        // (or zero prices when everything is served) may prove it without a master.
        if let (Some(p), Some(k)) = (start, &kept)
            && !k.scaled
            && !k.intact()
        {
            let repaired = {
                let rows = Rows::new(net, view, &layered);
                let mut walks = k.walks.clone();
                reroute(&rows, p, &mut walks);
                let value: f64 = walks.iter().map(|(_, f)| f).sum();
                let all = rows.scale;
                let tol = GAP_TOL * rows.scale;
                (value >= p.value.min(all) - tol).then(|| {
                    let (walks, flow): (Vec<ChainWalk>, Vec<f64>) = walks.into_iter().unzip();
                    let zero = value >= all - tol;
                    Solved {
                        value,
                        walks,
                        flow,
                        arc_price: if zero {
                            vec![0.0; net.arcs.len()]
                        } else {
                            p.arc_price.clone()
                        },
                        fn_price: if zero {
                            BTreeMap::new()
                        } else {
                            p.fn_price.clone()
                        },
                    }
                })
            };
            if let Some(s) = repaired {
                stats.rounds += 1;
                let x = with_walks(net, &mut layered, &group_of, &s);
                let rows = Rows::new(net, view, &layered);
                let v = verified(&rows, &layered, &x, &s);
                if v.verification.proven {
                    stats.repaired += 1;
                    return Ok((v, cut_off, Some(s)));
                }
            }
        }
        let solved = {
            let rows = Rows::new(net, view, &layered);
            // Only the demands that lost flow are free at first (all of them without a
            // parent, or when the start had to be scaled); the others keep their walks.
            let active: Vec<bool> = match &kept {
                Some(k) if !k.scaled => k.lost.clone(),
                _ => vec![true; net.demands.len()],
            };
            let mut master = Master::new(&rows, active);
            let walks = kept.map(|k| k.walks).unwrap_or_default();
            let (free, fixed): (Vec<_>, Vec<_>) = walks
                .into_iter()
                .partition(|(w, _)| master.active[w.demand]);
            for (w, f) in fixed.into_iter().chain(free) {
                master.add(w, f);
            }
            master.run(stats)?
        };
        if let Some(s) = solved {
            let x = with_walks(net, &mut layered, &group_of, &s);
            let rows = Rows::new(net, view, &layered);
            let v = verified(&rows, &layered, &x, &s);
            if v.verification.proven {
                return Ok((v, cut_off, Some(s)));
            }
        }
        stats.fallback += 1;
    }
    let (v, cut_off) = chain::solve_verified(net, view, caps)?;
    Ok((v, cut_off, None))
}

/// The walk engine's answer for one outage of a network with `functions`.
pub struct Walked {
    pub evaluation: Evaluation,
    /// Start for child scenarios.
    pub basis: Basis,
    pub stats: Stats,
}

/// Evaluates one outage of a network with `functions` with the layered walk engine: the
/// same [`Evaluation`] as [`chain::evaluate`] (same optimum, verified by the same checks;
/// where the optimal allocation or prices are not unique, possibly another optimal one),
/// plus the basis for child scenarios and the work done. `parent`: the optimum of a
/// scenario whose failed set is a subset of this one's (normally the baseline).
///
/// Cost: per LP (required, and volume when some surviving demand offers more) a few
/// rounds of one warm simplex solve and one pricing pass (one layered Dijkstra per
/// (origin, chain) group), then one verification (the layered LP built, not solved).
pub fn evaluate_walks(net: &Network, outage: &Outage, parent: Option<&Basis>) -> Result<Walked> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let mut stats = Stats::default();
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let (req_v, cut_off, req_s) = solve_caps(
        net,
        &view,
        &required,
        parent.and_then(|b| b.required.as_ref()),
        &mut stats,
    )?;
    let (vol_v, vol_s) = if needs_volume_lp(net, outage) {
        let caps: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
        // From the parent's volume optimum, else from this outage's required one (feasible
        // for volume caps, which are never smaller).
        let start = parent.and_then(|b| b.volume.as_ref()).or(req_s.as_ref());
        let (v, _, s) = solve_caps(net, &view, &caps, start, &mut stats)?;
        (Some(v), s)
    } else {
        (None, None)
    };
    Ok(Walked {
        evaluation: chain::finish_chain(net, &view, cut_off, req_v, vol_v),
        basis: Basis {
            required: req_s,
            volume: vol_s,
        },
        stats,
    })
}

/// The evaluator of a network with `functions` by the layered walk engine, warm-started
/// from the parent's optimum. Purchases are not defined yet (`add_processing` gives
/// `None`), as for [`chain::ChainEdge`].
pub struct ChainWalks;

impl Evaluator for ChainWalks {
    fn name(&self) -> &'static str {
        "chain walks"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, warm: Option<&Warm>) -> Result<Evaluated> {
        let parent = warm.and_then(|w| w.downcast_ref::<Basis>());
        let w = evaluate_walks(net, outage, parent)?;
        Ok(Evaluated {
            evaluation: w.evaluation,
            warm: Some(Box::new(w.basis)),
            stats: w.stats,
        })
    }

    fn warm_starts(&self) -> bool {
        true
    }

    fn add_processing(
        &self,
        _: &mut Lp,
        _: &Network,
        _: &Outage,
        _: &[Option<usize>],
        _: f64,
    ) -> Option<AddModel> {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{Element, Scenario};

    /// Path a — b — c — d, `fw` (gain 1) at b (capacity 8), `scrub` (gain 0.5) at c; ab and
    /// bc 10, cd 3; a spare link d — e off the path; one demand a→d, volume 10, chain
    /// fw > scrub. Hand-worked (common practice, no source: the contract's arithmetic):
    /// F origin units put F on ab, bc, fw and scrub and 0.5·F on cd, so F <= min(10, 10,
    /// 8, 100, 3/0.5) = 6, delivered 0.5 · 6 = 3.
    fn path() -> Network {
        Network::from_json(
            r#"{"functions":[{"id":"fw","gain":1},{"id":"scrub","gain":0.5}],
            "sites":[{"id":"a"},{"id":"b","functions":{"fw":8}},
                     {"id":"c","functions":{"scrub":100}},{"id":"d"},{"id":"e"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":10},
                     {"id":"bc","from":"b","to":"c","capacity":10},
                     {"id":"cd","from":"c","to":"d","capacity":3},
                     {"id":"de","from":"d","to":"e","capacity":5}],
            "demands":[{"from":"a","to":"d","volume":10,"chain":["fw","scrub"]}]}"#,
        )
        .unwrap()
    }

    #[test]
    fn gain_halves_what_later_legs_use() {
        let net = path();
        let w = evaluate_walks(&net, &Outage::default(), None).unwrap();
        let e = &w.evaluation;
        assert!((e.served_required - 6.0).abs() < 1e-6, "{e:?}");
        assert!((e.delivered.unwrap() - 3.0).abs() < 1e-6, "{e:?}");
        assert!(e.certified_gap() < 1e-6, "{e:?}");
        assert_eq!(w.stats.fallback, 0, "{:?}", w.stats);
        assert!(w.stats.generated >= 1, "{:?}", w.stats);
        // The layered edge LP (the product's other formulation) agrees.
        let edge = chain::evaluate(&net, &Outage::default()).unwrap();
        assert!((edge.served_required - e.served_required).abs() < 1e-6);
    }

    /// Failing the spare link d — e takes nothing the optimum uses: the baseline's walks
    /// and prices are proven again without a master solve (same 6). Failing cd cuts the
    /// demand off (served 0).
    #[test]
    fn a_failure_off_the_optimum_needs_no_master() {
        let net = path();
        let base = evaluate_walks(&net, &Outage::default(), None).unwrap();
        let spare = Scenario::new(&net, &[Element::Link(3.into())]).outage(&net);
        let w = evaluate_walks(&net, &spare, Some(&base.basis)).unwrap();
        assert!((w.evaluation.served_required - 6.0).abs() < 1e-6);
        assert_eq!(
            (w.stats.no_flow, w.stats.lp_solves, w.stats.fallback),
            (1, 0, 0)
        );
        let cd = Scenario::new(&net, &[Element::Link(2.into())]).outage(&net);
        let w = evaluate_walks(&net, &cd, Some(&base.basis)).unwrap();
        assert!(
            w.evaluation.served_required.abs() < 1e-9,
            "{:?}",
            w.evaluation
        );
        assert_eq!(w.evaluation.cut_off.len(), 1);
    }

    /// One-way a→m (100), m→t (8), t→p (100), p→m (100), `f` (gain 0.5) only at p, demand
    /// a→t of 50 with chain [f]. Hand-worked: the only walk a→m→t→p (f) →m→t crosses m→t
    /// before f (F) and after it (0.5·F): 1.5·F <= 8, F = 16/3. The walk's column carries
    /// the summed coefficient 1.5 on m→t.
    #[test]
    fn a_link_crossed_before_and_after_a_function() {
        let net = Network::from_json(
            r#"{"functions":[{"id":"f","gain":0.5}],
            "sites":[{"id":"a"},{"id":"m"},{"id":"t"},{"id":"p","functions":{"f":100}}],
            "links":[{"id":"am","from":"a","to":"m","capacity":100,"one_way":true},
                     {"id":"mt","from":"m","to":"t","capacity":8,"one_way":true},
                     {"id":"tp","from":"t","to":"p","capacity":100,"one_way":true},
                     {"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}],
            "demands":[{"from":"a","to":"t","volume":50,"chain":["f"]}]}"#,
        )
        .unwrap();
        let w = evaluate_walks(&net, &Outage::default(), None).unwrap();
        let e = &w.evaluation;
        assert!((e.served_required - 16.0 / 3.0).abs() < 1e-6, "{e:?}");
        assert!(e.certified_gap() < 1e-6);
        assert_eq!(w.stats.fallback, 0);
        let walk = &w.basis.required.as_ref().unwrap().walks[0];
        let view = Surviving::new(&net, &Outage::default(), None);
        let (layered, _) = layered_rows(&net, &view, &[50.0]);
        let rows = Rows::new(&net, &view, &layered);
        let mt = rows
            .coefficients(walk)
            .into_iter()
            .find(|(k, _)| *k == RowKey::Arc(1))
            .map(|(_, c)| c);
        assert_eq!(mt, Some(1.5), "{walk:?}");
    }
}
