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
//! **Verification** is the layered edge LP's, unchanged: the walks' flows are written on
//! the variables of [`chain::build`]'s LP, whose row residual is measured
//! ([`verify::residual`]), whose flow is decomposed and scaled into the real capacities by
//! [`chain::repair`] (the proven lower bound), and the master's prices go through
//! [`chain::dual_bound`] (the proven upper bound); proven when they meet within
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
use super::{RESIDUAL_TOL, cancel, needs_volume_lp, verify};
use crate::error::Result;
use crate::model::{Chains, FunctionIdx, Network, SiteIdx};
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
                    let to = j * n + self.net.arcs[a].to;
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
                let end = k * n + self.net.demands[d].to;
                let pi = dist[end];
                if !pi.is_finite() {
                    continue;
                }
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
        Priced { walks, bound }
    }
}

/// The outcome of one pricing pass.
struct Priced {
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

/// The restricted master on the warm simplex: rows created as columns need them.
struct Master<'r, 'a> {
    rows: &'r Rows<'a>,
    lp: Simplex,
    row: HashMap<RowKey, usize>,
    walks: Vec<ChainWalk>,
    seen: HashSet<ChainWalk>,
}

impl<'r, 'a> Master<'r, 'a> {
    fn new(rows: &'r Rows<'a>) -> Self {
        Master {
            rows,
            lp: Simplex::new(),
            row: HashMap::new(),
            walks: Vec::new(),
            seen: HashSet::new(),
        }
    }

    /// Adds walk `w` as a column at value `f` (skipped when already present); the caller
    /// keeps the point feasible. O(rows · walk length) for the basis update.
    fn add(&mut self, w: ChainWalk, f: f64) {
        if self.seen.contains(&w) {
            return;
        }
        let mut entries = Vec::new();
        for (key, c) in self.rows.coefficients(&w) {
            let r = match self.row.get(&key) {
                Some(&r) => r,
                None => {
                    let r = self.lp.add_row(self.rows.rhs(key), &[]);
                    self.row.insert(key, r);
                    r
                }
            };
            entries.push((r, c));
        }
        self.lp.add_col(1.0, 0.0, f64::INFINITY, f, entries);
        self.seen.insert(w.clone());
        self.walks.push(w);
    }

    fn dual(&self, key: RowKey) -> f64 {
        self.row
            .get(&key)
            .map_or(0.0, |&r| self.lp.dual(r).max(0.0))
    }

    /// Rounds of master solve and pricing until the dual bound meets the master's value
    /// within [`GAP_TOL`]; `None` when the simplex fails, the master outgrows
    /// [`WARM_ROWS`], no new walk enters while the gap is open, or after [`MAX_ROUNDS`].
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
                .map(|d| self.dual(RowKey::Demand(d)))
                .collect();
            let value = self.lp.objective();
            stats.rounds += 1;
            let p = self.rows.price(&y, &z, Some(&u));
            if p.bound - value <= GAP_TOL * self.rows.scale {
                stats.generated += 1;
                let flow: Vec<f64> = (0..self.walks.len())
                    .map(|j| self.lp.value(j).max(0.0))
                    .collect();
                return Ok(Some(Solved {
                    value: flow.iter().sum(),
                    walks: self.walks,
                    flow,
                    arc_price: y,
                    fn_price: z,
                }));
            }
            let fresh: Vec<ChainWalk> = p
                .walks
                .into_iter()
                .filter(|w| !self.seen.contains(w))
                .collect();
            if fresh.is_empty() {
                return Ok(None);
            }
            for w in fresh {
                self.add(w, 0.0);
            }
        }
        Ok(None)
    }
}

/// The walks of `start` (a parent's optimum) that survive this outage and belong to a
/// demand of the LP, merged when equal, with their flows scaled by one factor so that
/// every row of the new master holds them (empty when nothing survives). O(Σ walk
/// lengths · log).
fn surviving_start(rows: &Rows, start: &Solved) -> Vec<(ChainWalk, f64)> {
    let mut index: HashMap<&ChainWalk, usize> = HashMap::new();
    let mut kept: Vec<(ChainWalk, f64)> = Vec::new();
    for (w, &f) in start.walks.iter().zip(&start.flow) {
        if rows.group_of[w.demand] == NONE || !w.survives(rows.ch, rows.view) {
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
    let mut factor: f64 = 1.0;
    for (key, l) in load {
        if l > 0.0 {
            factor = factor.min(rows.rhs(key) * (1.0 - START_MARGIN) / l);
        }
    }
    let factor = factor.max(0.0);
    kept.into_iter().map(|(w, f)| (w, f * factor)).collect()
}

/// The verified result of walk answer `s` on the layered LP `model`/`layered` of `view`
/// with caps `caps`, exactly as [`chain::solve_verified_with`] verifies a backend's
/// answer: residual, [`chain::repair`], [`chain::dual_bound`]. `None` when a walk uses an
/// edge the layered LP does not have (never for walks priced on this view).
/// O(layered LP size + groups · Dijkstra).
fn verified(rows: &Rows, model: &Lp, s: &Solved, backend: &str) -> Option<Verified> {
    let (net, view, layered) = (rows.net, rows.view, rows.layered);
    let index: Vec<HashMap<EdgeKind, usize>> = layered
        .edges
        .iter()
        .map(|es| es.iter().map(|e| (e.kind, e.var)).collect())
        .collect();
    let mut x = vec![0.0; model.num_vars()];
    for (w, &f) in s.walks.iter().zip(&s.flow) {
        let g = rows.group_of[w.demand];
        if g == NONE {
            return None;
        }
        for e in &w.edges {
            x[*index[g].get(e)?] += f;
        }
        x[layered.demand_var[w.demand]?] += f;
    }
    let var_floor = model.magnitude.clone();
    let row_floor: Vec<f64> = model
        .rows
        .iter()
        .map(|r| {
            r.coeffs
                .iter()
                .map(|&(j, a)| a.abs() * var_floor[j])
                .fold(0.0, f64::max)
        })
        .collect();
    let residual = verify::residual(model, &x, &row_floor, &var_floor);
    let at_stake: f64 = (0..net.demands.len())
        .filter(|&d| layered.demand_var[d].is_some())
        .map(|d| layered.bound[d])
        .sum();
    let (allocation, _) = chain::repair(net, layered, &x);
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
    Some(Verified {
        lp_value: s.value,
        verification: Verification {
            proven: residual <= RESIDUAL_TOL && gap <= tol && gap >= -tol,
            lower,
            upper,
            residual,
            attempts: 1,
            backend: backend.into(),
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
    })
}

/// One LP of an outage (caps `caps`) by the walk engine: column generation from the
/// surviving walks of `start`, verified; the layered edge LP's ladder when the walk answer
/// is missing or not proven (counted in `stats.fallback`). Returns the verified result,
/// the cut-off demands and, when proven by the walks, the optimum (a child's start).
fn solve_caps(
    net: &Network,
    view: &Surviving,
    caps: &[f64],
    start: Option<&Solved>,
    stats: &mut Stats,
) -> Result<(Verified, Vec<(usize, Unservable)>, Option<Solved>)> {
    let (model, layered, cut_off) = chain::build(net, view, caps);
    if model.num_vars() > 0 {
        let rows = Rows::new(net, view, &layered);
        let mut master = Master::new(&rows);
        if let Some(s) = start {
            for (w, f) in surviving_start(&rows, s) {
                master.add(w, f);
            }
        }
        if let Some(s) = master.run(stats)?
            && let Some(v) = verified(&rows, &model, &s, "walks")
            && v.verification.proven
        {
            return Ok((v, cut_off, Some(s)));
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
