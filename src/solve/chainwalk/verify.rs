//! Verification of a layered walk answer by the layered edge LP's checks: the walks
//! written as edge and demand variables of the layered graph ([`with_walks`]), then the
//! row residual, [`chain::repair`] (lower bound) and [`chain::dual_bound`] (upper bound)
//! ([`verified`]).

use std::collections::BTreeMap;

use super::Solved;
use super::rows::{RowKey, Rows};
use crate::model::{FunctionIdx, Network};
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;

use crate::solve::RESIDUAL_TOL;
use crate::solve::chain::{self, EdgeKind, Layered};
use crate::solve::surviving::Surviving;
use crate::solve::types::{Verification, Verified};
use crate::tol::PROOF_GAP_TOL;

/// `layered` with the edges and demand variables the walks of `s` use (variable ids into
/// the returned flow vector: each edge's flow is the sum of the flows of the walks through
/// it, each demand's the sum of its walks'), the flow written as [`chain::repair`] reads
/// an LP answer. Edges the walks do not use carry 0 and are left out, which leaves the
/// repair's decomposition unchanged. Group by group (each group's edges in the order its
/// walks first use them, flows summed in walk order; the variable ids are only read
/// through `layered`), a group's layered edges looked up in one dense table (arc `a` in
/// layer `j` at `j · arcs + a`, the function at site `v` between layers `j` and `j + 1`
/// at `(k + 1) · arcs + j · sites + v`), reset after each group. O(Σ walk lengths +
/// groups + (k + 1) · (arcs + sites)).
pub(super) fn with_walks(
    net: &Network,
    layered: &mut Layered,
    group_of: &[usize],
    s: &Solved,
) -> Vec<f64> {
    const UNSET: usize = usize::MAX;
    let (n, arcs) = (net.sites.len(), net.arcs.len());
    let groups = layered.groups.len();
    layered.edges.iter_mut().for_each(Vec::clear);
    layered.demand_var.iter_mut().for_each(|v| *v = None);
    // The walks of each group, in walk order (a counting sort by group).
    let mut first = vec![0usize; groups + 1];
    for w in &s.walks {
        first[group_of[w.demand] + 1] += 1;
    }
    for g in 0..groups {
        first[g + 1] += first[g];
    }
    let mut next = first.clone();
    let mut order = vec![0usize; s.walks.len()];
    for (i, w) in s.walks.iter().enumerate() {
        let g = group_of[w.demand];
        order[next[g]] = i;
        next[g] += 1;
    }
    let most_k = layered
        .groups
        .iter()
        .map(|g| g.chain.len())
        .max()
        .unwrap_or(0);
    let mut var = vec![UNSET; (most_k + 1) * arcs + most_k * n];
    let mut touched: Vec<usize> = Vec::new();
    // At most one variable per edge of a walk and one per walk's demand.
    let mut x: Vec<f64> = Vec::with_capacity(s.walks.iter().map(|w| w.edges.len() + 1).sum());
    for g in 0..groups {
        let k = layered.groups[g].chain.len();
        for &i in &order[first[g]..first[g + 1]] {
            let (w, f) = (&s.walks[i], s.flow[i]);
            for e in &w.edges {
                let (slot, from, to) = match *e {
                    EdgeKind::Arc { arc, layer } => (
                        layer * arcs + arc,
                        layer * n + net.arcs[arc].from.0,
                        layer * n + net.arcs[arc].to.0,
                    ),
                    EdgeKind::Function { site, layer } => (
                        (k + 1) * arcs + layer * n + site,
                        layer * n + site,
                        (layer + 1) * n + site,
                    ),
                };
                if var[slot] == UNSET {
                    var[slot] = x.len();
                    touched.push(slot);
                    x.push(0.0);
                    layered.edges[g].push(chain::Edge {
                        from,
                        to,
                        var: x.len() - 1,
                        kind: *e,
                    });
                }
                x[var[slot]] += f;
            }
            let dv = *layered.demand_var[w.demand].get_or_insert_with(|| {
                x.push(0.0);
                x.len() - 1
            });
            x[dv] += f;
        }
        for t in touched.drain(..) {
            var[t] = UNSET;
        }
    }
    x
}

/// The largest relative overload of a row (arc, (site, function) or demand cap) by the
/// walks of `s` as they came, 0 when every row holds its load. O(rows + Σ walk lengths).
pub(super) fn residual(rows: &Rows, s: &Solved) -> f64 {
    let over = |load: f64, cap: f64| {
        if load > cap {
            (load - cap) / load.max(cap.abs()).max(f64::MIN_POSITIVE)
        } else {
            0.0
        }
    };
    let mut load: Vec<Option<(RowKey, f64)>> = vec![None; rows.len()];
    for (&f, cs) in s.flow.iter().zip(s.coefs(rows.net)) {
        for &(key, c) in cs.iter() {
            load[rows.index(key)].get_or_insert((key, 0.0)).1 += c * f;
        }
    }
    load.iter()
        .flatten()
        .map(|&(key, l)| over(l, rows.rhs(key)))
        .fold(0.0, f64::max)
}

/// A shortcut's answer `s` (walks decided without a master) written onto the layered
/// model's variables ([`with_walks`]) and verified ([`verified`]) on the outage's rows:
/// `Some` only when proven. Cost: one verification.
pub(super) fn proven_shortcut(
    net: &Network,
    view: &Surviving,
    layered: &mut Layered,
    group_of: &[usize],
    s: &Solved,
) -> Option<Verified> {
    let x = with_walks(net, layered, group_of, s);
    let rows = Rows::new(net, view, layered);
    let v = verified(&rows, layered, &x, s);
    v.verification.proven.then_some(v)
}

/// The verified result of walk answer `s` on the rows `layered` of `view`, as
/// [`chain::solve_verified_with`] verifies a backend's answer: the residual (largest
/// relative overload of a row by the walks as they came; conservation holds by
/// construction), [`chain::repair`] of the walks' flow (the proven lower bound),
/// [`chain::dual_bound`] of the master's prices (the proven upper bound, capped by the
/// demand at stake), proven when they meet within [`crate::tol::PROOF_GAP_TOL`] of it.
/// O(Σ walk lengths + groups · Dijkstra).
pub(super) fn verified(rows: &Rows, layered: &Layered, x: &[f64], s: &Solved) -> Verified {
    let (net, view) = (rows.net, rows.view);
    let residual = residual(rows, s);
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
        functions: super::super::chain_use::function_use(net, view, layered, &walks, &fn_price),
    }
}
