//! The layered edge LP of service chains and gains (a network whose file lists
//! `functions`, [`crate::model::Chains`]), its verification, and its evaluator.
//!
//! **Model.** Demands are grouped by (origin, chain); a group whose chain has `k` functions
//! gets `k + 1` layers of the surviving network. A unit in layer `j` has passed the first
//! `j` functions; every flow variable is measured in *origin units*, so an arc variable in
//! layer `j` puts `G_j = g1 · … · gj` units on the arc's capacity row, and the conversion
//! variable of function `f_{j+1}` at site `v` (layer `j` → `j + 1` at `v`) puts `G_j` units
//! (the volume entering it) on the row of `f_{j+1}` at `v`. Flow is conserved per group
//! and layer node; the origin's layer 0 supplies `Σ F_d`, each destination's layer `k`
//! absorbs its demands' `F_d ≤ cap_d`; the objective is `Σ F_d` (origin units). Arc rows
//! are shared by every layer of every group, function rows by every group and position
//! that uses the function. Plain traffic (empty chain) is one layer.
//!
//! Aggregating the demands of one (origin, chain) is exact for the same reason source
//! aggregation is in [`super::flow`]: the group's layered flow is a single-source flow
//! (source: the origin in layer 0) to several sinks (destinations in layer `k`), which
//! decomposes into source–sink paths in the layered graph, each a walk of one demand of
//! the group; the coefficients depend only on the layer, which the group fixes.
//!
//! **Verification**, generalising [`super::verify`] and [`super::certify`]:
//! the residual of every row ([`super::verify::residual`]); a lower bound from a
//! decomposition of each group's flow into layered walks (cycles cancelled, dead ends
//! dropped), each walk scaled by the worst overload of the arcs and functions it uses
//! against the real capacities ([`repair`]); an upper bound from the LP's prices
//! ([`dual_bound`]): `Σ cap_a·y_a + Σ cap_vf·z_vf + Σ_d cap_d·max(0, 1 − π_d)`, where
//! `π_d` is the cheapest layered walk of `d` with arc `a` in layer `j` costing `G_j·y_a`
//! and function `f_{j+1}` at `v` costing `G_j·z_vf`. Valid for any nonnegative prices
//! (weak duality: a walk of `w` origin units uses exactly those amounts of each row).

use std::cmp::Reverse;
use std::collections::{BTreeMap, BinaryHeap};

use super::edge::{Rung, climb, real_prices};
use super::evaluator::{Evaluated, Evaluator, Warm};
use super::lp::{Backend, Lp, Sense};
use super::surviving::{Surviving, Unservable};
use super::types::{Evaluation, Verification, Verified};
use super::{finish_with, ladder, needs_volume_lp, verify};
use crate::error::{Error, Result};
use crate::model::{Chains, FunctionIdx, Network};
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;
use crate::scenario::Outage;

mod reach;
mod repair;
pub(crate) use reach::{ReachMemo, backward_with, forward_with};
pub use repair::{LayeredWalk, repair};

/// One (origin, chain) group of demands.
#[derive(Debug, Clone)]
pub struct Group {
    pub origin: SiteIdx,
    pub chain: Vec<FunctionIdx>,
    /// `cumulative[j]`: origin units → layer-`j` units.
    pub cumulative: Vec<f64>,
    /// The group's demands (servable ones only).
    pub demands: Vec<usize>,
}

/// An edge of a group's layered graph with its LP variable.
#[derive(Debug, Clone, Copy)]
pub struct Edge {
    /// Layered node ids `layer · sites + site`.
    pub from: usize,
    pub to: usize,
    pub var: usize,
    pub kind: EdgeKind,
}

/// What an edge of the layered graph uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum EdgeKind {
    /// Arc `a` (index into `Network::arcs`) in layer `j`.
    Arc { arc: usize, layer: usize },
    /// Function at position `j` of the chain (layer `j` → `j + 1`) at site `v`.
    Function { site: SiteIdx, layer: usize },
}

/// The built LP with what the verifier needs.
pub struct Layered {
    pub groups: Vec<Group>,
    /// Per group: its edges.
    pub edges: Vec<Vec<Edge>>,
    /// Per demand: its variable `F_d` (`None`: stranded, cut off, or nothing to serve).
    pub demand_var: Vec<Option<usize>>,
    /// Per arc: its capacity row.
    pub arc_row: Vec<Option<usize>>,
    /// Per (site, function): its capacity row.
    pub function_row: BTreeMap<(SiteIdx, FunctionIdx), usize>,
    /// Per arc: the right-hand side of its row (capacity lowered to what can use it).
    pub arc_cap: Vec<f64>,
    /// Per (site, function) row: its right-hand side.
    pub function_cap: BTreeMap<(SiteIdx, FunctionIdx), f64>,
    /// Per demand: its cap (required or volume).
    pub bound: Vec<f64>,
}

/// Per demand: reachable through its whole chain on `view` (`Ok`), else why not. A
/// stranded demand or one with cap 0 gives `Ok(false)` (not in the LP, not cut off).
/// O(groups · (chain + 1) · (sites + arcs)).
pub(crate) fn servable(
    net: &Network,
    ch: &Chains,
    view: &Surviving,
    bound: &[f64],
) -> Vec<std::result::Result<bool, Unservable>> {
    servable_with(net, ch, &mut ReachMemo::new(view), bound)
}

/// [`servable`] with the single-site reach sets of `memo` (its view).
fn servable_with(
    net: &Network,
    ch: &Chains,
    memo: &mut ReachMemo,
    bound: &[f64],
) -> Vec<std::result::Result<bool, Unservable>> {
    let view = memo.view;
    let n = net.sites.len();
    let mut cache: BTreeMap<(SiteIdx, &[FunctionIdx]), Vec<bool>> = BTreeMap::new();
    net.demands
        .iter()
        .enumerate()
        .map(|(d, dem)| {
            if !view.demand_alive(net, d) || bound[d] <= 0.0 {
                return Ok(false);
            }
            let key = (dem.from.0, &ch.chain[d][..]);
            let reach = cache
                .entry(key)
                .or_insert_with(|| forward_with(net, ch, memo, dem.from.0, &ch.chain[d]));
            let k = ch.chain[d].len();
            if reach[k * n + dem.to.0] {
                Ok(true)
            } else if memo.from(dem.from.0)[dem.to.0] {
                Err(Unservable::NoProcessing)
            } else {
                Err(Unservable::NoPath)
            }
        })
        .collect()
}

/// The surviving demands with required > 0 whose whole chain no layered walk on `view`
/// can pass (caps `bound`), with the reason, in demand order. The chain model's cut-off
/// list. O(groups · (chain + 1) · (sites + arcs)).
pub fn cut_off(net: &Network, view: &Surviving, bound: &[f64]) -> Vec<(usize, Unservable)> {
    let ch = net.chains.as_ref().expect("a network with functions");
    servable(net, ch, view, bound)
        .into_iter()
        .enumerate()
        .filter_map(|(d, s)| match s {
            Err(r) if net.demands[d].required > 0.0 => Some((d, r)),
            _ => None,
        })
        .collect()
}

/// Whether site `v` can run function `f` on `view`: alive with capacity > 0.
pub(crate) fn runs(ch: &Chains, view: &Surviving, v: SiteIdx, f: FunctionIdx) -> bool {
    view.site_alive[v] && ch.capacity[v][f] > 0.0
}

/// Adds one edge of a demand group's layered graph to `model`: a flow variable (at least
/// 0, magnitude hint `total`, the group's demand) with its terms in the conservation rows
/// of `from` (−1) and `to` (+1), recorded in `edges` with `kind`. Returns the variable.
/// O(log nodes).
fn layer_edge(
    model: &mut Lp,
    node_terms: &mut BTreeMap<usize, Vec<(usize, f64)>>,
    edges: &mut Vec<Edge>,
    (from, to, total): (usize, usize, f64),
    kind: EdgeKind,
) -> usize {
    let var = model.add_var(0.0, f64::INFINITY, 0.0);
    model.magnitude[var] = total;
    node_terms.entry(from).or_default().push((var, -1.0));
    node_terms.entry(to).or_default().push((var, 1.0));
    edges.push(Edge {
        from,
        to,
        var,
        kind,
    });
    var
}

/// Demands with a layered walk, grouped by (origin, chain) in key order: the groups of
/// [`build`] and of the layered walk engine.
pub(crate) type DemandGroups = BTreeMap<(SiteIdx, Vec<FunctionIdx>), Vec<usize>>;

/// [`DemandGroups`] of `view` with caps `bound`, and the cut-off demands (required above
/// zero) with their reason; one [`servable`] pass. O(demands · (k + 1) · (sites + arcs)).
pub(crate) fn demand_groups(
    net: &Network,
    ch: &Chains,
    memo: &mut ReachMemo,
    bound: &[f64],
) -> (DemandGroups, Vec<(usize, Unservable)>) {
    let mut cut_off = Vec::new();
    let mut by_key = DemandGroups::new();
    for (d, s) in servable_with(net, ch, memo, bound).iter().enumerate() {
        match s {
            Ok(true) => by_key
                .entry((net.demands[d].from.0, ch.chain[d].clone()))
                .or_default()
                .push(d),
            Ok(false) => {}
            Err(r) => {
                if net.demands[d].required > 0.0 {
                    cut_off.push((d, *r));
                }
            }
        }
    }
    (by_key, cut_off)
}

/// Builds the layered LP of `view` with demand caps `bound` into a new maximising [`Lp`].
/// Cut-off demands (no layered walk) get no variable and are returned with their reason.
/// Size: per group, `(k + 1) · usable arcs + k · sites` variables at most (pruned to nodes
/// reachable from the origin and reaching a destination), the same number of
/// conservation rows per group, one row per arc and per (site, function).
pub fn build(
    net: &Network,
    view: &Surviving,
    bound: &[f64],
) -> (Lp, Layered, Vec<(usize, Unservable)>) {
    let ch = net.chains.as_ref().expect("a network with functions");
    let n = net.sites.len();
    let mut memo = ReachMemo::new(view);
    let (by_key, cut_off) = demand_groups(net, ch, &mut memo, bound);
    let mut model = Lp::new(true);
    let mut demand_var = vec![None; net.demands.len()];
    let mut arc_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.arcs.len()];
    let mut arc_need = vec![0.0; net.arcs.len()];
    let mut fn_terms: BTreeMap<(SiteIdx, FunctionIdx), Vec<(usize, f64)>> = BTreeMap::new();
    let mut fn_need: BTreeMap<(SiteIdx, FunctionIdx), f64> = BTreeMap::new();
    let mut groups = Vec::new();
    let mut all_edges = Vec::new();
    for ((origin, chain), demands) in by_key {
        let k = chain.len();
        let cumulative = ch.cumulative(&chain);
        let total: f64 = demands.iter().map(|&d| bound[d]).sum();
        let dests: Vec<SiteIdx> = demands.iter().map(|&d| net.demands[d].to.0).collect();
        let fwd = forward_with(net, ch, &mut memo, origin, &chain);
        let back = backward_with(net, ch, &mut memo, &dests, &chain);
        let live = |node: usize| fwd[node] && back[node];
        // Conservation terms per layered node: + in, − out.
        let mut node_terms: BTreeMap<usize, Vec<(usize, f64)>> = BTreeMap::new();
        let mut edges = Vec::new();
        // The variable of a layered edge between live nodes; `None` for a dead one.
        let mut edge = |from: usize, to: usize, kind: EdgeKind| {
            (live(from) && live(to)).then(|| {
                let ends = (from, to, total);
                layer_edge(&mut model, &mut node_terms, &mut edges, ends, kind)
            })
        };
        for j in 0..=k {
            for &a in &view.arcs {
                let arc = &net.arcs[a];
                let kind = EdgeKind::Arc { arc: a, layer: j };
                let Some(var) = edge(j * n + arc.from.0, j * n + arc.to.0, kind) else {
                    continue;
                };
                arc_terms[a].push((var, cumulative[j]));
                arc_need[a] += cumulative[j] * total;
            }
            if j < k {
                let f = chain[j];
                for v in (0..n).filter(|&v| runs(ch, view, v, f)) {
                    let kind = EdgeKind::Function { site: v, layer: j };
                    let Some(var) = edge(j * n + v, (j + 1) * n + v, kind) else {
                        continue;
                    };
                    fn_terms
                        .entry((v, f))
                        .or_default()
                        .push((var, cumulative[j]));
                    *fn_need.entry((v, f)).or_default() += cumulative[j] * total;
                }
            }
        }
        for &d in &demands {
            let var = model.add_var(0.0, bound[d], 1.0);
            model.magnitude[var] = total;
            demand_var[d] = Some(var);
            node_terms.entry(origin).or_default().push((var, 1.0));
            node_terms
                .entry(k * n + net.demands[d].to.0)
                .or_default()
                .push((var, -1.0));
        }
        for (_, terms) in node_terms {
            model.add_row(terms, Sense::Eq, 0.0);
        }
        groups.push(Group {
            origin,
            chain,
            cumulative,
            demands,
        });
        all_edges.push(edges);
    }
    let mut arc_row = vec![None; net.arcs.len()];
    let mut arc_cap = vec![0.0; net.arcs.len()];
    for (a, terms) in arc_terms.into_iter().enumerate() {
        if !terms.is_empty() {
            // An optimum never needs more on an arc than every group crossing it once per
            // layer with its whole demand (cycles within a layer cancel).
            arc_cap[a] = net.arcs[a].capacity.min(arc_need[a]);
            arc_row[a] = Some(model.add_row(terms, Sense::Le, arc_cap[a]));
        }
    }
    let mut function_row = BTreeMap::new();
    let mut function_cap = BTreeMap::new();
    for (key, terms) in fn_terms {
        let cap = ch.capacity[key.0][key.1].min(fn_need[&key]);
        function_cap.insert(key, cap);
        function_row.insert(key, model.add_row(terms, Sense::Le, cap));
    }
    (
        model,
        Layered {
            groups,
            edges: all_edges,
            demand_var,
            arc_row,
            function_row,
            arc_cap,
            function_cap,
            bound: bound.to_vec(),
        },
        cut_off,
    )
}

/// The dual bound of the layered model for nonnegative prices `arc_price` (per arc) and
/// `fn_price` (per (site, function) row), over `layered`'s demands: `Σ arc_cap·y +
/// Σ function_cap·z + Σ_d cap_d · max(0, 1 − π_d)`, `π_d` the cheapest layered walk of
/// `d` (layered Dijkstra per group, over each site's outgoing arcs). Valid for any
/// nonnegative prices. O(groups · (k + 1) · (arcs + sites) · log).
pub fn dual_bound(
    net: &Network,
    view: &Surviving,
    layered: &Layered,
    arc_price: &[f64],
    fn_price: &BTreeMap<(SiteIdx, FunctionIdx), f64>,
) -> f64 {
    let ch = net.chains.as_ref().expect("a network with functions");
    let n = net.sites.len();
    let mut bound = 0.0;
    for (a, &cap) in layered.arc_cap.iter().enumerate() {
        if layered.arc_row[a].is_some() {
            bound += cap * arc_price[a];
        }
    }
    for (key, &cap) in &layered.function_cap {
        bound += cap * fn_price.get(key).copied().unwrap_or(0.0);
    }
    // The usable arcs leaving each site, in `view.arcs` order.
    let mut out: Vec<Vec<usize>> = vec![Vec::new(); n];
    for &a in &view.arcs {
        out[net.arcs[a].from].push(a);
    }
    // Per `site · functions + function`: the price of applying it there, NaN where the
    // function does not run (a dense copy of `fn_price` and [`runs`]).
    let nf = ch.functions.len();
    let mut fn_at = vec![f64::NAN; n * nf];
    for v in 0..n {
        for f in 0..nf {
            if runs(ch, view, v, f) {
                fn_at[v * nf + f] = fn_price.get(&(v, f)).copied().unwrap_or(0.0);
            }
        }
    }
    let mut dist: Vec<f64> = Vec::new();
    let mut wanted: Vec<bool> = Vec::new();
    let (mut settled, mut same): (Vec<bool>, Vec<usize>) = (Vec::new(), Vec::new());
    let mut heap = BinaryHeap::new();
    for group in &layered.groups {
        let k = group.chain.len();
        let cum = &group.cumulative;
        dist.clear();
        dist.resize((k + 1) * n, f64::INFINITY);
        heap.clear();
        // The group's destinations in layer k not settled yet: once all are, or once the
        // nearest open node costs 1 or more (a walk of price >= 1 adds nothing to the
        // bound), no later pop changes a term of the bound.
        wanted.clear();
        wanted.resize((k + 1) * n, false);
        let mut open = 0usize;
        for &d in &group.demands {
            let t = k * n + net.demands[d].to.0;
            if !wanted[t] {
                wanted[t] = true;
                open += 1;
            }
        }
        dist[group.origin] = 0.0;
        heap.push(Reverse((Ordered(0.0), group.origin)));
        settled.clear();
        settled.resize((k + 1) * n, false);
        // Nodes reached at the distance being settled through edges of cost exactly 0:
        // settled next without the heap (their distance `dv + 0` is final already).
        'search: while let Some(Reverse((Ordered(dv), first))) = heap.pop() {
            if dv > dist[first] || settled[first] {
                continue;
            }
            if dv >= 1.0 {
                break;
            }
            same.clear();
            same.push(first);
            while let Some(node) = same.pop() {
                if settled[node] {
                    continue;
                }
                settled[node] = true;
                if wanted[node] {
                    wanted[node] = false;
                    open -= 1;
                    if open == 0 {
                        break 'search;
                    }
                }
                let (j, v) = (node / n, node % n);
                let mut relax = |to: usize, cost: f64| {
                    let nd = dv + cost;
                    if nd < dist[to] {
                        dist[to] = nd;
                        if cost == 0.0 {
                            same.push(to);
                        } else {
                            heap.push(Reverse((Ordered(nd), to)));
                        }
                    }
                };
                for &a in &out[v] {
                    relax(j * n + net.arcs[a].to.0, cum[j] * arc_price[a]);
                }
                if j < k {
                    let z = fn_at[v * nf + group.chain[j]];
                    if !z.is_nan() {
                        relax((j + 1) * n + v, cum[j] * z);
                    }
                }
            }
        }
        for &d in &group.demands {
            let pi = dist[k * n + net.demands[d].to.0];
            bound += layered.bound[d] * (1.0 - pi).max(0.0);
        }
    }
    bound
}

/// A float ordered by `total_cmp`, for the heap.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Ordered(f64);
impl Eq for Ordered {}
impl PartialOrd for Ordered {
    fn partial_cmp(&self, o: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(o))
    }
}
impl Ord for Ordered {
    fn cmp(&self, o: &Self) -> std::cmp::Ordering {
        self.0.total_cmp(&o.0)
    }
}

/// The magnitude floors [`verify::residual`] measures a layered model's rows and variables
/// against: per variable its magnitude hint, per row the largest `|a| · hint` of its terms.
/// O(nonzeros).
pub(crate) fn floors(model: &Lp) -> (Vec<f64>, Vec<f64>) {
    let var_floor = model.magnitude.clone();
    let row_floor = model
        .rows
        .iter()
        .map(|r| {
            r.coeffs
                .iter()
                .map(|&(j, a)| a.abs() * var_floor[j])
                .fold(0.0, f64::max)
        })
        .collect();
    (row_floor, var_floor)
}

/// One rung of a ladder: `backend`'s answer for `model` after an interrupt check; a
/// solver failure is noted in `errors` (named by the backend) and gives `None`, any other
/// error (an interrupt) is returned. Cost: one cold solve.
pub(crate) fn attempt(
    backend: &dyn Backend,
    model: &Lp,
    errors: &mut Vec<String>,
) -> Result<Option<super::lp::LpSolution>> {
    super::cancel::check()?;
    match backend.solve(model) {
        Ok(s) => Ok(Some(s)),
        Err(Error::Solver(m)) => {
            errors.push(format!("{}: {m}", backend.name()));
            Ok(None)
        }
        Err(e) => Err(e),
    }
}

impl Layered {
    /// The nonnegative parts of an LP answer's row duals as prices: per arc (0 without a
    /// row) and per (site, function) row. O(arcs + function rows).
    pub(crate) fn row_prices(
        &self,
        duals: &[f64],
    ) -> (Vec<f64>, BTreeMap<(SiteIdx, FunctionIdx), f64>) {
        let arc_price = self
            .arc_row
            .iter()
            .map(|r| r.map_or(0.0, |r| duals[r].max(0.0)))
            .collect();
        let fn_price = self
            .function_row
            .iter()
            .map(|(&k, &r)| (k, duals[r].max(0.0)))
            .collect();
        (arc_price, fn_price)
    }
}

/// The layered LP of `view` with caps `bound`, solved by each backend of `ladder` in turn
/// until proven, verified (residual, repaired lower bound, dual upper bound), the best
/// bounds of all attempts kept. Also returns the cut-off demands. Fails only when every
/// backend fails.
pub fn solve_verified_with(
    net: &Network,
    view: &Surviving,
    bound: &[f64],
    ladder: &[&dyn Backend],
) -> Result<(Verified, Vec<(usize, Unservable)>)> {
    let (model, layered, cut_off) = build(net, view, bound);
    let at_stake: f64 = (0..net.demands.len())
        .filter(|&d| layered.demand_var[d].is_some())
        .map(|d| bound[d])
        .sum();
    let arc_has_row: Vec<bool> = layered.arc_row.iter().map(Option::is_some).collect();
    let site_has_row = vec![false; net.sites.len()];
    if model.num_vars() == 0 {
        let (allocation, walks) = repair(net, &layered, &[]);
        let functions =
            super::chain_use::function_use(net, view, &layered, &walks, &BTreeMap::new());
        return Ok((
            Verified {
                allocation,
                lp_value: 0.0,
                verification: Verification::nothing_to_route(),
                arc_price: vec![0.0; net.arcs.len()],
                site_price: vec![0.0; net.sites.len()],
                arc_has_row,
                site_has_row,
                bound_price: (Vec::new(), Vec::new()),
                functions,
            },
            cut_off,
        ));
    }
    let (row_floor, var_floor) = floors(&model);
    let (mut out, (best_arc_price, best_fn_price)) = climb(
        ladder,
        at_stake,
        (&arc_has_row, &site_has_row),
        (vec![0.0; net.arcs.len()], BTreeMap::new()),
        |backend, errors| {
            let Some(solution) = self::attempt(backend, &model, errors)? else {
                return Ok(None);
            };
            let residual = verify::residual(&model, &solution.x, &row_floor, &var_floor);
            let (allocation, walks) = repair(net, &layered, &solution.x);
            let (arc_price, fn_price) = layered.row_prices(&solution.duals);
            let upper = dual_bound(net, view, &layered, &arc_price, &fn_price).min(at_stake);
            let lp_value: f64 = layered
                .demand_var
                .iter()
                .flatten()
                .map(|&v| solution.x[v])
                .sum();
            let layered = &layered;
            Ok(Some(Rung {
                lp_value,
                allocation,
                residual,
                upper,
                prices: (arc_price, fn_price),
                functions: move || {
                    super::chain_use::function_use(net, view, layered, &walks, &BTreeMap::new())
                },
            }))
        },
    )?;
    out.site_price = vec![0.0; net.sites.len()];
    out.arc_price = real_prices(&best_arc_price, &layered.arc_cap, |a| net.arcs[a].capacity);
    out.bound_price = (best_arc_price, Vec::new());
    // The loads of the kept allocation, the prices that gave the kept upper bound (as
    // `arc_price` above).
    let priced = super::chain_use::function_use(net, view, &layered, &[], &best_fn_price);
    for (u, p) in out.functions.iter_mut().zip(priced) {
        u.price = p.price;
    }
    Ok((out, cut_off))
}

/// [`solve_verified_with`] on [`ladder`].
pub fn solve_verified(
    net: &Network,
    view: &Surviving,
    bound: &[f64],
) -> Result<(Verified, Vec<(usize, Unservable)>)> {
    solve_verified_with(net, view, bound, ladder())
}

/// Σ over demands of the reported flow times its chain's gain: the volume reaching the
/// destinations at the reported served_required allocation. O(demands · chain).
pub fn delivered(net: &Network, flows: &[f64]) -> f64 {
    match &net.chains {
        Some(ch) => flows
            .iter()
            .enumerate()
            .map(|(d, &f)| f * ch.total_gain(d))
            .sum(),
        None => flows.iter().sum(),
    }
}

/// The evaluator of a network with `functions`: the layered edge LP per quantity, cold.
/// Purchases of function capacity are built by [`crate::expand::chain_buy`] on
/// [`build`], not through this trait (`add_processing` gives `None`).
pub struct ChainEdge;

impl Evaluator for ChainEdge {
    fn name(&self) -> &'static str {
        "chains"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, _: Option<&Warm>) -> Result<Evaluated> {
        Ok(Evaluated::cold(evaluate(net, outage)?))
    }

    fn buys_processing(&self) -> bool {
        false
    }
}

/// One outage of a network with `functions`, verified and reported: the layered LP with
/// caps `required`, and with caps `volume` when some surviving demand offers more, ended
/// in [`finish_with`] with the layered cut-off list; `delivered` set from the reported
/// flows.
pub fn evaluate(net: &Network, outage: &Outage) -> Result<Evaluation> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let (solved, cut_off) = solve_verified(net, &view, &required)?;
    let volume = if needs_volume_lp(net, outage) {
        let caps: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
        Some(solve_verified(net, &view, &caps)?.0)
    } else {
        None
    };
    Ok(finish_with(net, &view, cut_off, solved, volume))
}
