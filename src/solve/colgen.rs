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
//! [`WARM_ROWS`] rows, by the warm GUB simplex of [`super::gub`] (demand rows kept out of
//! its inverse), or with the `highs` feature by one HiGHS instance kept between rounds
//! (`generate_large`); [`super::lp::solve`] (the interior-point backend, cold) takes what
//! those give up.
//! Parallel links of one direction are one arc (a class) for pricing, repair and masters,
//! and the flow is split back per link before verification (`Graph::split`).
//!
//! Determinism: Dijkstra breaks ties by hop count and then node index, walks are added in
//! demand order, and a scenario's result depends only on the network, the outage and the
//! parent basis, never on thread count.

pub mod buy;
mod graph;
pub mod headroom;
pub mod plan;
mod pricing;
pub(crate) mod round;
mod warm;

use graph::*;
pub(crate) use graph::{Tree, shortest_tree};
use pricing::*;
use warm::*;

use std::collections::{HashMap, HashSet, VecDeque};

use super::edge::{at_stake, caps_of, needs_volume_lp, solve_verified};
use super::finish::finish;
use super::flow::Cap;
use super::lp::{self, Lp, Sense};
use super::surviving::Surviving;
use super::types::{Evaluation, Verified};
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

/// Pivots allowed to one warm master solve of `rows` rows: [`PIVOTS_PER_ROW`] per row,
/// counting at least 100 rows. O(1).
fn pivot_budget(rows: usize) -> usize {
    PIVOTS_PER_ROW * rows.max(100)
}

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
        super::add_counts([
            (&mut self.no_flow, other.no_flow),
            (&mut self.repaired, other.repaired),
            (&mut self.generated, other.generated),
            (&mut self.fallback, other.fallback),
            (&mut self.lp_solves, other.lp_solves),
            (&mut self.rounds, other.rounds),
        ]);
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
/// [`WARM_ROWS`], else (or when the simplex gives up) [`generate_large`] over the same
/// walks. `start` walks carry the feasible flows `flow`
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
        return generate_large(g, caps, start, flow, active, stats);
    }
    let m = warm_master(
        g,
        caps,
        start,
        flow,
        active,
        crate::solve::simplex::Simplex::new(),
    );
    match m.run(stats)? {
        Warm::Done(s) => Ok(Some(s)),
        Warm::Stalled => Ok(None),
        Warm::Abandon(walks) => {
            let active = caps.iter().map(|&b| b > 0.0).collect();
            generate_large(g, caps, walks, Vec::new(), active, stats)
        }
    }
}

/// A [`WarmMaster`] on the empty LP `lp` holding the walks `start` (class arcs) at their
/// flows `flow` (duplicates merged, demands without a cap dropped): inactive demands' walks
/// fixed first, so that rows are created net of their loads. O(walks · walk length).
fn warm_master<'a, 'g, L: MasterLp>(
    g: &'g Graph<'a>,
    caps: &'g [f64],
    start: Vec<Walk>,
    flow: Vec<f64>,
    active: Vec<bool>,
    lp: L,
) -> WarmMaster<'a, 'g, L> {
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
    let mut m = WarmMaster::new(g, caps, active, lp);
    type Start = Vec<(Walk, f64)>;
    let (free, fixed): (Start, Start) = walks
        .into_iter()
        .zip(values)
        .partition(|(w, _)| m.active[w.demand]);
    for (w, f) in fixed.into_iter().chain(free) {
        m.add(w, f);
    }
    m
}

/// Column generation for a master above [`WARM_ROWS`] rows (the warm simplex's dense
/// inverse would not fit): with the `highs` feature a [`WarmMaster`] on one HiGHS instance
/// re-solved from its basis each round (unless `highs::set_enabled` turned it off), else
/// a [`WarmMaster`] on the GUB simplex ([`crate::solve::gub::Gub`]: its inverse spans the
/// arc and site rows only, whatever the number of demands); the cold interior-point
/// master ([`generate_cold`]) when either gives up. Same arguments and result as
/// [`generate`].
fn generate_large(
    g: &Graph,
    caps: &[f64],
    start: Vec<Walk>,
    flow: Vec<f64>,
    active: Vec<bool>,
    stats: &mut Stats,
) -> Result<Option<Solved>> {
    #[cfg(feature = "highs")]
    if super::highs::enabled() {
        let m = warm_master(g, caps, start, flow, active, super::highs::WarmLp::new());
        return match m.run(stats)? {
            Warm::Done(s) => Ok(Some(s)),
            Warm::Stalled => Ok(None),
            Warm::Abandon(walks) => generate_cold(g, caps, walks, stats),
        };
    }
    let m = warm_master(g, caps, start, flow, active, crate::solve::gub::Gub::new());
    match m.run(stats)? {
        Warm::Done(s) => Ok(Some(s)),
        Warm::Stalled => Ok(None),
        Warm::Abandon(walks) => generate_cold(g, caps, walks, stats),
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
            seen[2 * dem.from.0] = true;
            queue.push_back(2 * dem.from.0);
            let target = 2 * dem.to.0 + 1;
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
                    let next = 2 * net.arcs[a].to.0 + layer;
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

/// The walks with their flows, each split back onto its real links, scaled into the
/// file's real arc and site capacities by [`verify::repair_walks`] (demand `d` capped at
/// `caps[d]`): a feasible allocation, the proven lower bound of any walk answer.
/// O(total walk length + arcs + sites + demands).
fn repair_columns(net: &Network, walks: &[Walk], flow: &[f64], caps: &[f64]) -> verify::Repaired {
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|v| v.processing).collect();
    let walks: Vec<verify::Walk> = walks
        .iter()
        .zip(flow)
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
    verify::repair_walks(net, &walks, &arc_capacity, &site_capacity, caps)
}

/// What walks with flows put on each arc (a walk crossing an arc `m` times counts `m`
/// times), each site (where it processes) and each demand, and which arcs some walk uses.
pub(super) struct Loads {
    pub(super) arc: Vec<f64>,
    pub(super) site: Vec<f64>,
    pub(super) demand: Vec<f64>,
    pub(super) arc_used: Vec<bool>,
}

/// The [`Loads`] of `walks` with flows `flow`. O(total walk length + arcs + sites +
/// demands).
pub(super) fn loads(net: &Network, walks: &[Walk], flow: &[f64]) -> Loads {
    let mut l = Loads {
        arc: vec![0.0; net.arcs.len()],
        site: vec![0.0; net.sites.len()],
        demand: vec![0.0; net.demands.len()],
        arc_used: vec![false; net.arcs.len()],
    };
    for (w, &f) in walks.iter().zip(flow) {
        l.demand[w.demand] += f;
        l.site[w.site] += f;
        for &(a, m) in &w.arcs {
            l.arc[a] += f64::from(m) * f;
            l.arc_used[a] = true;
        }
    }
    l
}

/// How far `load` exceeds `cap`, relative to the larger of the two (0 when it fits).
pub(super) fn overload(load: f64, cap: f64) -> f64 {
    if load > cap {
        (load - cap) / load.max(cap).max(f64::MIN_POSITIVE)
    } else {
        0.0
    }
}

/// The largest [`overload`] of `arc_load` and `site_load` against the file's arc and site
/// capacities (the residual of walks as they came). O(arcs + sites).
pub(super) fn capacity_residual(net: &Network, arc_load: &[f64], site_load: &[f64]) -> f64 {
    let arcs = net
        .arcs
        .iter()
        .zip(arc_load)
        .map(|(a, &l)| overload(l, a.capacity));
    let sites = net
        .sites
        .iter()
        .zip(site_load)
        .map(|(v, &l)| overload(l, v.processing));
    arcs.chain(sites).fold(0.0, f64::max)
}

/// Verifies a walk-formulation answer like any other ([`super::solve_verified`]): the walks
/// scaled into a feasible allocation ([`verify::repair_walks`], the proven lower bound),
/// the certificate's dual bound of the prices on the same surviving network (upper bound),
/// the largest relative overload of the walks as they came (residual).
fn verified(g: &Graph, view: &Surviving, s: &Solved, caps: &[f64]) -> Verified {
    let net = g.net;
    let allocation = repair_columns(net, &s.walks, &s.flow, caps);
    // The walks as they came: the largest overload relative to what each row could hold.
    let Loads {
        arc: arc_load,
        site: site_load,
        demand: demand_flow,
        arc_used: arc_has_row,
    } = loads(net, &s.walks, &s.flow);
    let (arc_cap, site_cap) = g.effective_real(caps);
    let over = overload;
    let mut residual = capacity_residual(net, &arc_load, &site_load);
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
    let (arc_price, site_price) =
        certify::shadow_prices(net, (&arc_cap, &site_cap), &s.arc_price, &s.site_price);
    Verified {
        lp_value: s.value,
        verification: super::one_attempt(
            residual,
            allocation.served,
            upper,
            at_stake,
            "walks".into(),
        ),
        allocation,
        arc_price,
        site_price,
        arc_has_row,
        site_has_row: reach.site_reached,
        bound_price: (s.arc_price.clone(), s.site_price.clone()),
        functions: Vec::new(),
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
        assert_eq!(
            e.bottlenecks[0].resource,
            super::super::Resource::Site(0.into())
        );
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
