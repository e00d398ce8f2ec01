//! The verifier: checks a backend's allocation in the units of the file, without trusting
//! the backend, and turns it into an allocation that is feasible by construction.
//!
//! Two checks run on every solve:
//! - [`residual`]: the largest violation of any row or bound by the returned values, each
//!   relative to the magnitude of its own row (the larger of its right-hand side and the
//!   sum of the absolute values of its terms), so a row of 1e-6 units and a row of 1e15
//!   units are judged alike;
//! - [`repair`]: a flow decomposition of each source's block into walks (origin, layer 0,
//!   one conversion at a processing site, layer 1, destination), cycles cancelled, flow
//!   that reaches a dead end (a conservation violation) dropped; then every walk is scaled
//!   down by the worst overload among the resources it uses, measured against the
//!   network's real capacities. The result satisfies conservation, link, processing and
//!   demand caps exactly (up to one rounding per sum), so its delivered flow is a proven
//!   *lower* bound on served demand, whatever the backend returned. With the certificate's
//!   dual bound ([`super::certify`]) it brackets the optimum.

use super::flow::FlowIndex;
use super::lp::{Lp, Sense};
use crate::model::Network;

use crate::tol::ZERO_FLOW;

/// The largest violation of any row or variable bound by `x`, each relative to its own
/// magnitude: for row `i`, `max(|rhs|, Σ|a_ij·x_j|, row_floor[i], max_j |a_ij|·var_floor[j])`;
/// for a bound of variable `j`, `max(|bound|, |x_j|, var_floor[j])`. The floors carry what
/// a row or variable can hold (for the flow model, the demand of its source's block: see
/// [`super::flow::FlowIndex::magnitudes`]), so an error of 1e-15 on a row whose terms
/// happen to be near 0, or of 1e-9 units on a link of 1e-6 units crossed by a source of
/// 1e15 units, is judged against the flow that row could carry. O(nonzeros).
pub fn residual(lp: &Lp, x: &[f64], row_floor: &[f64], var_floor: &[f64]) -> f64 {
    let mut worst: f64 = 0.0;
    for (j, &v) in x.iter().enumerate() {
        if !v.is_finite() {
            return f64::INFINITY;
        }
        let (lo, hi) = (lp.lower[j], lp.upper[j]);
        let floor = var_floor[j].max(f64::MIN_POSITIVE);
        if lo.is_finite() && v < lo {
            worst = worst.max((lo - v) / lo.abs().max(v.abs()).max(floor));
        }
        if hi.is_finite() && v > hi {
            worst = worst.max((v - hi) / hi.abs().max(v.abs()).max(floor));
        }
    }
    for (i, r) in lp.rows.iter().enumerate() {
        let mut lhs = 0.0;
        let mut terms = 0.0;
        let mut carried: f64 = 0.0;
        for &(j, a) in &r.coeffs {
            lhs += a * x[j];
            terms += (a * x[j]).abs();
            carried = carried.max(a.abs() * var_floor[j]);
        }
        let mag = r
            .rhs
            .abs()
            .max(terms)
            .max(row_floor[i])
            .max(carried)
            .max(f64::MIN_POSITIVE);
        let v = match r.sense {
            Sense::Le => lhs - r.rhs,
            Sense::Ge => r.rhs - lhs,
            Sense::Eq => (lhs - r.rhs).abs(),
        };
        if v > 0.0 {
            worst = worst.max(v / mag);
        }
    }
    worst
}

/// A proven lower bound for a *packing* LP — `max c·x` over `A x ≤ b`, `0 ≤ x ≤ u`, with
/// `A ≥ 0`, `b ≥ 0`, `c ≥ 0` (the fixed-route models are of this form): `x` clamped into
/// its bounds, then each variable scaled by the worst overload `min(1, b_i / (A_i x))`
/// among the rows it appears in. Every row then holds (its load can only fall), so
/// `c·x'` is achievable whatever the backend returned. Returns `(c·x', x')`; `None` when
/// `lp` is not a packing LP. O(nonzeros).
pub fn packing_lower(lp: &Lp, x: &[f64]) -> Option<(f64, Vec<f64>)> {
    let packing =
        lp.rows.iter().all(|r| {
            r.sense == Sense::Le && r.rhs >= 0.0 && r.coeffs.iter().all(|&(_, a)| a >= 0.0)
        }) && lp.lower.iter().all(|&l| l == 0.0)
            && lp.objective.iter().all(|&c| c >= 0.0);
    if !packing {
        return None;
    }
    let clamped: Vec<f64> = x
        .iter()
        .zip(&lp.upper)
        .map(|(&v, &u)| if v.is_finite() { v.clamp(0.0, u) } else { 0.0 })
        .collect();
    let mut factor = vec![1.0f64; clamped.len()];
    for r in &lp.rows {
        let load: f64 = r.coeffs.iter().map(|&(j, a)| a * clamped[j]).sum();
        if load > r.rhs {
            let f = if load > 0.0 {
                (r.rhs / load) * (1.0 - 4.0 * f64::EPSILON)
            } else {
                0.0
            };
            for &(j, _) in &r.coeffs {
                factor[j] = factor[j].min(f);
            }
        }
    }
    let scaled: Vec<f64> = clamped.iter().zip(&factor).map(|(v, f)| v * f).collect();
    let value = scaled.iter().zip(&lp.objective).map(|(v, c)| v * c).sum();
    Some((value, scaled))
}

/// A feasible allocation derived from a backend's answer.
#[derive(Debug, Clone, PartialEq)]
pub struct Repaired {
    /// Σ delivered flow: a proven lower bound on the optimum.
    pub served: f64,
    /// Per demand: delivered flow (0 without a variable).
    pub demand_flow: Vec<f64>,
    /// Per arc: load.
    pub arc_load: Vec<f64>,
    /// Per site: processing used.
    pub site_load: Vec<f64>,
    /// Walks found by the decomposition.
    pub walks: usize,
    /// The allocation as walks, each delivering to one demand, with its flow after
    /// scaling (walks that carry nothing left out): the loads and per-demand flows above
    /// are their sums, up to rounding. What a journal keeps to verify the result again
    /// ([`super::recheck`]).
    pub paths: Vec<Walk>,
}

/// Where a walk delivers its flow.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sink {
    /// One demand (walk formulation).
    Demand(usize),
    /// The demands of one block (source) with one destination, shared in proportion to
    /// the LP's flows (edge formulation, aggregated by source).
    Group { block: usize, dest: usize },
}

/// One walk of an allocation: the arcs it crosses (an arc crossed twice is listed twice),
/// the site where it is processed, where it delivers, and how much it carries.
#[derive(Debug, Clone, PartialEq)]
pub struct Walk {
    pub sink: Sink,
    pub arcs: Vec<usize>,
    pub site: usize,
    pub amount: f64,
}

#[derive(Clone, Copy)]
enum EdgeKind {
    Arc(usize),
    Convert(usize),
}

struct Edge {
    to: usize,
    kind: EdgeKind,
    left: f64,
}

/// Decomposes, cancels, trims and scales the allocation `x` of the model indexed by
/// `index` (see the module documentation) against the real capacities `arc_capacity`
/// (per arc) and `site_capacity` (per site) and the demand caps `bound`.
///
/// Complexity: per block, O((arcs + destinations) · sites) for the decomposition (every
/// walk or cancelled cycle exhausts an edge or a destination, and a walk is at most
/// 2·sites long), then O(Σ walk lengths) for the scaling.
pub fn repair(
    net: &Network,
    index: &FlowIndex,
    x: &[f64],
    arc_capacity: &[f64],
    site_capacity: &[f64],
    bound: &[f64],
) -> Repaired {
    let n = net.sites.len();
    let mut walks: Vec<Walk> = Vec::new();
    for (b, block) in index.blocks.iter().enumerate() {
        let eps = ZERO_FLOW * block.bound.max(f64::MIN_POSITIVE);
        let clean = |v: f64| if v.is_finite() && v > eps { v } else { 0.0 };
        // Nodes: site v in layer 0 is v, in layer 1 is n + v.
        let mut edges: Vec<Edge> = Vec::new();
        let mut out: Vec<Vec<usize>> = vec![Vec::new(); 2 * n];
        let mut push = |from: usize, to: usize, kind: EdgeKind, left: f64| {
            if left > 0.0 {
                out[from].push(edges.len());
                edges.push(Edge { to, kind, left });
            }
        };
        for &(a, var) in &block.arc0 {
            let arc = &net.arcs[a];
            push(arc.from.0, arc.to.0, EdgeKind::Arc(a), clean(x[var]));
        }
        for &(a, var) in &block.arc1 {
            let arc = &net.arcs[a];
            push(
                n + arc.from.0,
                n + arc.to.0,
                EdgeKind::Arc(a),
                clean(x[var]),
            );
        }
        for &(v, var) in &block.procs {
            push(v, n + v, EdgeKind::Convert(v), clean(x[var]));
        }
        let mut need = vec![0.0; n];
        for &(d, var) in &block.demands {
            need[net.demands[d].to] += clean(x[var].min(bound[d]));
        }
        let mut supply: f64 = need.iter().sum();
        let src = block.source;
        let mut next = vec![0usize; 2 * n];
        let mut on_path = vec![false; 2 * n];
        let mut path_nodes: Vec<usize> = vec![src];
        let mut path_edges: Vec<usize> = Vec::new();
        on_path[src] = true;
        while supply > eps {
            let u = *path_nodes.last().expect("the path starts at the source");
            if u >= n && need[u - n] > eps {
                let t = u - n;
                let amount = path_edges
                    .iter()
                    .map(|&e| edges[e].left)
                    .fold(need[t].min(supply), f64::min);
                let mut arcs = Vec::with_capacity(path_edges.len());
                let mut site = usize::MAX;
                for &e in &path_edges {
                    edges[e].left -= amount;
                    match edges[e].kind {
                        EdgeKind::Arc(a) => arcs.push(a),
                        EdgeKind::Convert(v) => site = v,
                    }
                }
                need[t] -= amount;
                supply -= amount;
                walks.push(Walk {
                    sink: Sink::Group { block: b, dest: t },
                    arcs,
                    site,
                    amount,
                });
                for &v in &path_nodes[1..] {
                    on_path[v] = false;
                }
                path_nodes.truncate(1);
                path_edges.clear();
                continue;
            }
            while next[u] < out[u].len() && edges[out[u][next[u]]].left <= eps {
                next[u] += 1;
            }
            if next[u] == out[u].len() {
                // Dead end: flow into u goes nowhere useful; drop it.
                match path_edges.pop() {
                    None => break,
                    Some(e) => {
                        edges[e].left = 0.0;
                        on_path[u] = false;
                        path_nodes.pop();
                    }
                }
                continue;
            }
            let e = out[u][next[u]];
            let v = edges[e].to;
            if on_path[v] {
                // A cycle within one layer: cancel it.
                let pos = path_nodes
                    .iter()
                    .position(|&w| w == v)
                    .expect("on_path nodes are on the path");
                let cycle: Vec<usize> = path_edges[pos..].iter().copied().chain([e]).collect();
                let m = cycle
                    .iter()
                    .map(|&c| edges[c].left)
                    .fold(f64::INFINITY, f64::min);
                for &c in &cycle {
                    edges[c].left -= m;
                }
                for &w in &path_nodes[pos + 1..] {
                    on_path[w] = false;
                }
                path_nodes.truncate(pos + 1);
                path_edges.truncate(pos);
                continue;
            }
            on_path[v] = true;
            path_nodes.push(v);
            path_edges.push(e);
        }
    }

    let scaled = scale_walks(net, &walks, arc_capacity, site_capacity);
    let mut delivered: Vec<Vec<f64>> = vec![vec![0.0; n]; index.blocks.len()];
    for (w, &amount) in walks.iter().zip(&scaled.amounts) {
        if let Sink::Group { block, dest } = w.sink {
            delivered[block][dest] += amount;
        }
    }
    // Per block: each demand's share of what its destination receives, in proportion
    // to the LP's (capped) flows.
    let shares: Vec<Vec<(usize, f64)>> = index
        .blocks
        .iter()
        .map(|block| {
            let mut asked = vec![0.0; n];
            for &(d, var) in &block.demands {
                asked[net.demands[d].to] += x[var].clamp(0.0, bound[d]);
            }
            block
                .demands
                .iter()
                .filter_map(|&(d, var)| {
                    let t = net.demands[d].to;
                    (asked[t] > 0.0).then(|| (d, x[var].clamp(0.0, bound[d]) / asked[t]))
                })
                .collect()
        })
        .collect();
    let mut demand_flow = vec![0.0; net.demands.len()];
    for (b, block) in shares.iter().enumerate() {
        for &(d, share) in block {
            let t = net.demands[d].to;
            demand_flow[d] = (delivered[b][t] * share).min(bound[d]);
        }
    }
    let mut paths = Vec::new();
    for (w, &amount) in walks.iter().zip(&scaled.amounts) {
        let Sink::Group { block, dest } = w.sink else {
            continue;
        };
        for &(d, share) in &shares[block] {
            let flow = amount * share;
            if net.demands[d].to.0 == dest && flow > 0.0 {
                paths.push(Walk {
                    sink: Sink::Demand(d),
                    arcs: w.arcs.clone(),
                    site: w.site,
                    amount: flow,
                });
            }
        }
    }
    Repaired {
        served: scaled.served,
        demand_flow,
        arc_load: scaled.arc_load,
        site_load: scaled.site_load,
        walks: walks.len(),
        paths,
    }
}

/// A walk allocation scaled to fit: per walk its amount after scaling, the loads and the
/// total delivered.
struct Scaled {
    amounts: Vec<f64>,
    arc_load: Vec<f64>,
    site_load: Vec<f64>,
    served: f64,
}

/// Scales every walk by the worst overload (load / capacity, measured against the real
/// `arc_capacity` and `site_capacity`) among the resources it uses, so that every link
/// direction and site is within its capacity. O(Σ walk lengths).
fn scale_walks(
    net: &Network,
    walks: &[Walk],
    arc_capacity: &[f64],
    site_capacity: &[f64],
) -> Scaled {
    let n = net.sites.len();
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut site_load = vec![0.0; n];
    for w in walks {
        for &a in &w.arcs {
            arc_load[a] += w.amount;
        }
        site_load[w.site] += w.amount;
    }
    let factor = |load: f64, cap: f64| {
        if load <= cap {
            1.0
        } else if cap > 0.0 {
            // A few ulps below the ratio, so that the scaled sum cannot round above cap.
            (cap / load) * (1.0 - 4.0 * f64::EPSILON)
        } else {
            0.0
        }
    };
    let arc_factor: Vec<f64> = (0..net.arcs.len())
        .map(|a| factor(arc_load[a], arc_capacity[a]))
        .collect();
    let site_factor: Vec<f64> = (0..n)
        .map(|v| factor(site_load[v], site_capacity[v]))
        .collect();
    let mut out = Scaled {
        amounts: Vec::with_capacity(walks.len()),
        arc_load: vec![0.0; net.arcs.len()],
        site_load: vec![0.0; n],
        served: 0.0,
    };
    for w in walks {
        let f = w
            .arcs
            .iter()
            .map(|&a| arc_factor[a])
            .fold(site_factor[w.site], f64::min);
        let amount = (w.amount * f).max(0.0);
        for &a in &w.arcs {
            out.arc_load[a] += amount;
        }
        out.site_load[w.site] += amount;
        out.served += amount;
        out.amounts.push(amount);
    }
    out
}

/// The feasible allocation of a walk formulation's answer: each walk delivers to one
/// demand; walk amounts are first capped so no demand receives more than `bound[d]`
/// (scaled in proportion), then scaled to fit the capacities. The delivered total is a
/// proven lower bound on the optimum. O(Σ walk lengths).
pub fn repair_walks(
    net: &Network,
    walks: &[Walk],
    arc_capacity: &[f64],
    site_capacity: &[f64],
    bound: &[f64],
) -> Repaired {
    let mut asked = vec![0.0; net.demands.len()];
    for w in walks {
        if let Sink::Demand(d) = w.sink {
            asked[d] += w.amount.max(0.0);
        }
    }
    let capped: Vec<Walk> = walks
        .iter()
        .filter_map(|w| {
            let Sink::Demand(d) = w.sink else { return None };
            let amount = w.amount.max(0.0);
            let amount = if asked[d] > bound[d] && asked[d] > 0.0 {
                amount * (bound[d] / asked[d]) * (1.0 - 4.0 * f64::EPSILON)
            } else {
                amount
            };
            Some(Walk {
                amount,
                ..w.clone()
            })
        })
        .collect();
    let scaled = scale_walks(net, &capped, arc_capacity, site_capacity);
    let mut demand_flow = vec![0.0; net.demands.len()];
    for (w, &a) in capped.iter().zip(&scaled.amounts) {
        if let Sink::Demand(d) = w.sink {
            demand_flow[d] += a;
        }
    }
    let walks = capped.len();
    let paths = capped
        .into_iter()
        .zip(&scaled.amounts)
        .filter(|(_, a)| **a > 0.0)
        .map(|(w, &amount)| Walk { amount, ..w })
        .collect();
    Repaired {
        served: scaled.served,
        demand_flow,
        arc_load: scaled.arc_load,
        site_load: scaled.site_load,
        walks,
        paths,
    }
}
