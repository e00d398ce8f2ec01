//! The joint route-and-process LP: the edge-based two-layer formulation, aggregated by
//! source.
//!
//! For every source `s` (origin of a surviving demand) and every usable arc `a`, the model
//! has an *unprocessed* flow `x0[s][a]` and a *processed* flow `x1[s][a]`; both share the
//! arc's capacity. At a processing site `v`, `p[s][v]` moves flow from layer 0 to layer 1,
//! and `Σ_s p[s][v]` is bounded by the site's processing capacity (plus any added units).
//! Flow enters layer 0 at `s` (Σ of the source's demand flows `f_d`) and leaves layer 1 at
//! each demand's destination (`f_d`). Processing at the origin or the destination is a
//! `p` at that site like any other.
//!
//! **Why aggregating by source is exact.** Fix a source `s`. Its layer-0 copy, conversion
//! arcs and layer-1 copy form one graph with one source and several sinks (the demands'
//! destinations in layer 1), each absorbing exactly `f_d`. A single-source flow decomposes
//! into source-to-sink paths plus cycles (flow decomposition theorem); dropping the cycles
//! only frees capacity, and each path is a walk in the network that crosses from layer 0
//! to layer 1 exactly once, i.e. is processed once at one site. Giving each demand the
//! paths ending at its destination (splitting among demands with the same destination in
//! any proportion) yields a per-demand solution with the same arc and site loads. The
//! converse is summation. So the per-demand and per-source models have the same optimum,
//! with far fewer variables (one commodity per source instead of per demand).
//!
//! **Walks.** A walk may cross an arc once in layer 0 and again in layer 1; both use the
//! arc's capacity, which is exactly how a revisiting walk consumes it.
//!
//! **Pruning.** For each source only nodes that can lie on a useful walk get variables:
//! layer-0 nodes reachable from `s` that reach a processing site, layer-1 nodes reachable
//! from such a site that reach one of `s`'s destinations. This leaves the optimum unchanged
//! (flow elsewhere could never reach a sink) and cuts the model size on sparse networks.
//! Cost: two breadth-first searches per source and layer, O(sources · (sites + arcs)).

use std::collections::VecDeque;

use super::lp::{Lp, Sense};
use crate::model::Network;
use crate::scenario::Outage;

/// Which per-demand cap the flow variables get.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cap {
    /// `f_d <= required_d`: the committed demand (served_required).
    Required,
    /// `f_d <= volume_d`: all offered traffic (throughput).
    Volume,
}

/// Where the flow model's pieces sit in the LP.
#[derive(Debug, Clone)]
pub struct FlowIndex {
    /// Per demand: its flow variable, `None` when it cannot be served at all (stranded,
    /// or no walk through a processing site reaches its destination).
    pub demand_var: Vec<Option<usize>>,
    /// Per arc (index into `Network::arcs`): its capacity row, when the arc carries any
    /// variable.
    pub arc_row: Vec<Option<usize>>,
    /// Per site: its processing row, when any flow may be processed there.
    pub site_row: Vec<Option<usize>>,
    /// Per arc: every variable (both layers, all sources) on it.
    pub arc_vars: Vec<Vec<usize>>,
    /// Per site: every processing variable at it.
    pub site_vars: Vec<Vec<usize>>,
}

impl FlowIndex {
    /// Σ f_d of a solution.
    pub fn served(&self, x: &[f64]) -> f64 {
        self.demand_var.iter().flatten().map(|&v| x[v]).sum()
    }

    /// Per-demand flow of a solution (0 for demands without a variable).
    pub fn demand_flows(&self, x: &[f64]) -> Vec<f64> {
        self.demand_var
            .iter()
            .map(|v| v.map_or(0.0, |v| x[v].max(0.0)))
            .collect()
    }

    /// Per-arc load of a solution.
    pub fn arc_loads(&self, x: &[f64]) -> Vec<f64> {
        self.arc_vars
            .iter()
            .map(|vs| vs.iter().map(|&v| x[v].max(0.0)).sum())
            .collect()
    }

    /// Per-site processing used by a solution.
    pub fn site_loads(&self, x: &[f64]) -> Vec<f64> {
        self.site_vars
            .iter()
            .map(|vs| vs.iter().map(|&v| x[v].max(0.0)).sum())
            .collect()
    }
}

/// Breadth-first reachability over `adj` from all `starts`. O(nodes + arcs).
fn reach(adj: &[Vec<usize>], starts: impl IntoIterator<Item = usize>) -> Vec<bool> {
    let mut seen = vec![false; adj.len()];
    let mut queue = VecDeque::new();
    for s in starts {
        if !seen[s] {
            seen[s] = true;
            queue.push_back(s);
        }
    }
    while let Some(u) = queue.pop_front() {
        for &v in &adj[u] {
            if !seen[v] {
                seen[v] = true;
                queue.push_back(v);
            }
        }
    }
    seen
}

/// Appends the two-layer flow model of `net` under `outage` to `lp`, with flow variables
/// capped per `cap` and objective coefficient `obj` on each flow variable.
///
/// `added[v]`, when given, is a variable (already in `lp`) of processing added at site `v`:
/// its processing row becomes `Σ p - add_v <= processing_v`, and the site may process even
/// when its own capacity is 0. Sites with no capacity and no added variable never process.
///
/// Size: per source, at most 2·arcs + sites variables and 2·sites conservation rows, plus
/// one row per arc and per processing site.
pub fn build(
    lp: &mut Lp,
    net: &Network,
    outage: &Outage,
    cap: Cap,
    obj: f64,
    added: Option<&[Option<usize>]>,
) -> FlowIndex {
    let n = net.sites.len();
    let site_alive = outage.site_alive(net);
    let link_alive = outage.link_alive(net);
    let can_process: Vec<bool> = (0..n)
        .map(|v| {
            site_alive[v]
                && (net.sites[v].processing > 0.0
                    || added.is_some_and(|a| a.get(v).copied().flatten().is_some()))
        })
        .collect();
    // Usable arcs: the link survives and has capacity.
    let usable: Vec<usize> = (0..net.arcs.len())
        .filter(|&a| link_alive[net.arcs[a].link] && net.arcs[a].capacity > 0.0)
        .collect();
    let mut fwd = vec![Vec::new(); n];
    let mut back = vec![Vec::new(); n];
    for &a in &usable {
        fwd[net.arcs[a].from].push(net.arcs[a].to);
        back[net.arcs[a].to].push(net.arcs[a].from);
    }

    let mut index = FlowIndex {
        demand_var: vec![None; net.demands.len()],
        arc_row: vec![None; net.arcs.len()],
        site_row: vec![None; n],
        arc_vars: vec![Vec::new(); net.arcs.len()],
        site_vars: vec![Vec::new(); n],
    };

    // Demands grouped by source, in site order (deterministic model layout).
    let mut by_source: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (d, dem) in net.demands.iter().enumerate() {
        let bound = match cap {
            Cap::Required => dem.required,
            Cap::Volume => dem.volume,
        };
        if site_alive[dem.from] && site_alive[dem.to] && bound > 0.0 {
            by_source[dem.from].push(d);
        }
    }

    for (s, demands) in by_source.iter().enumerate() {
        if demands.is_empty() {
            continue;
        }
        let from_s = reach(&fwd, [s]);
        let to_dest = reach(&back, demands.iter().map(|&d| net.demands[d].to));
        let procs: Vec<usize> = (0..n)
            .filter(|&v| can_process[v] && from_s[v] && to_dest[v])
            .collect();
        if procs.is_empty() {
            continue;
        }
        let from_proc = reach(&fwd, procs.iter().copied());
        let to_proc = reach(&back, procs.iter().copied());
        let in0: Vec<bool> = (0..n).map(|v| from_s[v] && to_proc[v]).collect();
        let in1: Vec<bool> = (0..n).map(|v| from_proc[v] && to_dest[v]).collect();

        // Conservation rows, collected per node and layer:
        // layer 0: out0 - in0 + p - [v = s]·Σf = 0; layer 1: in1 - out1 + p - Σ_{to v} f = 0.
        let mut row0: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
        let mut row1: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
        for &d in demands {
            let dem = &net.demands[d];
            if !in1[dem.to] {
                continue;
            }
            let bound = match cap {
                Cap::Required => dem.required,
                Cap::Volume => dem.volume,
            };
            let f = lp.add_var(0.0, bound, obj);
            index.demand_var[d] = Some(f);
            row0[s].push((f, -1.0));
            row1[dem.to].push((f, -1.0));
        }
        if row0[s].is_empty() {
            continue;
        }
        for &a in &usable {
            let arc = net.arcs[a];
            if in0[arc.from] && in0[arc.to] {
                let x = lp.add_var(0.0, f64::INFINITY, 0.0);
                row0[arc.from].push((x, 1.0));
                row0[arc.to].push((x, -1.0));
                index.arc_vars[a].push(x);
            }
            if in1[arc.from] && in1[arc.to] {
                let x = lp.add_var(0.0, f64::INFINITY, 0.0);
                row1[arc.to].push((x, 1.0));
                row1[arc.from].push((x, -1.0));
                index.arc_vars[a].push(x);
            }
        }
        for &v in &procs {
            let p = lp.add_var(0.0, f64::INFINITY, 0.0);
            row0[v].push((p, 1.0));
            row1[v].push((p, 1.0));
            index.site_vars[v].push(p);
        }
        for coeffs in row0.into_iter().chain(row1) {
            if !coeffs.is_empty() {
                lp.add_row(coeffs, Sense::Eq, 0.0);
            }
        }
    }

    for a in 0..net.arcs.len() {
        if !index.arc_vars[a].is_empty() {
            let coeffs = index.arc_vars[a].iter().map(|&x| (x, 1.0)).collect();
            index.arc_row[a] = Some(lp.add_row(coeffs, Sense::Le, net.arcs[a].capacity));
        }
    }
    for v in 0..n {
        if !index.site_vars[v].is_empty() {
            let mut coeffs: Vec<(usize, f64)> =
                index.site_vars[v].iter().map(|&p| (p, 1.0)).collect();
            if let Some(add) = added.and_then(|a| a[v]) {
                coeffs.push((add, -1.0));
            }
            index.site_row[v] = Some(lp.add_row(coeffs, Sense::Le, net.sites[v].processing));
        }
    }
    index
}
