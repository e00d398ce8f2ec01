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

use super::lp::{Lp, Sense};
use super::surviving::Surviving;
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

/// One source's block of the model: which variable carries what.
#[derive(Debug, Clone)]
pub struct SourceBlock {
    /// The origin site of the block's demands.
    pub source: usize,
    /// `(demand, flow variable)` for each demand of this source with a variable.
    pub demands: Vec<(usize, usize)>,
    /// `(arc, variable)` of the unprocessed layer.
    pub arc0: Vec<(usize, usize)>,
    /// `(arc, variable)` of the processed layer.
    pub arc1: Vec<(usize, usize)>,
    /// `(site, variable)` of the conversions (processing) from layer 0 to layer 1.
    pub procs: Vec<(usize, usize)>,
    /// Σ of the block's demand bounds: no arc of one layer needs to carry more than this.
    pub bound: f64,
    /// The block's conservation rows.
    pub rows: Vec<usize>,
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
    /// Per arc: the right-hand side of its capacity row after presolve,
    /// `min(capacity, 2 · Σ bounds of the sources using it)` (0 when it has no row).
    pub arc_cap: Vec<f64>,
    /// Per site: the right-hand side of its processing row after presolve,
    /// `min(processing, Σ bounds of the sources that may process there)`.
    pub site_cap: Vec<f64>,
    /// Per source with variables: its block.
    pub blocks: Vec<SourceBlock>,
}

impl FlowIndex {
    /// The natural magnitude of each row and variable of `lp` for [`super::verify::residual`]:
    /// a block's demand bound for its conservation rows and its variables (what they can
    /// carry), `default` elsewhere (capacity rows are judged by their own right-hand side).
    pub fn magnitudes(&self, lp: &Lp, default: f64) -> (Vec<f64>, Vec<f64>) {
        let mut rows = vec![default; lp.rows.len()];
        let mut vars = vec![default; lp.num_vars()];
        for b in &self.blocks {
            for &r in &b.rows {
                rows[r] = rows[r].max(b.bound);
            }
            let all = b
                .demands
                .iter()
                .chain(&b.arc0)
                .chain(&b.arc1)
                .chain(&b.procs);
            for &(_, v) in all {
                vars[v] = vars[v].max(b.bound);
            }
        }
        (rows, vars)
    }

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

/// Appends the two-layer flow model of `net` under `outage` to `lp`, with flow variables
/// capped per `cap` and objective coefficient `obj` on each flow variable.
///
/// `added[v]`, when given, is a variable (already in `lp`) of processing added at site `v`:
/// its processing row becomes `Σ p - add_v <= processing_v`, and the site may process even
/// when its own capacity is 0. Sites with no capacity and no added variable never process.
///
/// **Presolve.** Capacities that cannot bind are lowered before they reach the solver, so
/// a link written as `1e12` ("unlimited") does not set the model's scale. Some optimal
/// allocation has no cycle within a layer of a source's block (dropping a cycle frees
/// capacity and changes no demand flow), so each layer of block `s` carries at most
/// `B_s = Σ bounds of s's demands` on any arc, and its conversions total at most `B_s`.
/// Hence the capacity row of an arc may use `min(capacity, Σ_s (B_s per layer it appears
/// in))` and a processing row `min(processing, Σ_s B_s)` without changing the optimum.
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
    let net = net.view(outage.matrix);
    let n = net.sites.len();
    let expandable: Option<Vec<bool>> = added.map(|a| {
        (0..n)
            .map(|v| a.get(v).copied().flatten().is_some())
            .collect()
    });
    let view = Surviving::new(net, outage, expandable.as_deref());
    build_on(lp, net, &view, cap, obj, added)
}

/// [`build`] on an already computed view of the surviving network.
pub fn build_on(
    lp: &mut Lp,
    net: &Network,
    view: &Surviving,
    cap: Cap,
    obj: f64,
    added: Option<&[Option<usize>]>,
) -> FlowIndex {
    let n = net.sites.len();
    let mut index = FlowIndex {
        demand_var: vec![None; net.demands.len()],
        arc_row: vec![None; net.arcs.len()],
        site_row: vec![None; n],
        arc_vars: vec![Vec::new(); net.arcs.len()],
        site_vars: vec![Vec::new(); n],
        arc_cap: vec![0.0; net.arcs.len()],
        site_cap: vec![0.0; n],
        blocks: Vec::new(),
    };
    let bound_of = |d: usize| cap.bound(net, d);
    // Presolve sums: per arc and per site, Σ B_s over the blocks that use it.
    let mut arc_reach = vec![0.0; net.arcs.len()];
    let mut site_reach = vec![0.0; n];

    for_each_block(net, view, cap, |shape| {
        let BlockShape {
            source: s,
            served,
            procs,
            in0,
            in1,
        } = shape;
        // Conservation rows, collected per node and layer:
        // layer 0: out0 - in0 + p - [v = s]·Σf = 0; layer 1: in1 - out1 + p - Σ_{to v} f = 0.
        let mut row0: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
        let mut row1: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
        let mut block = SourceBlock {
            source: s,
            demands: Vec::new(),
            arc0: Vec::new(),
            arc1: Vec::new(),
            procs: Vec::new(),
            bound: 0.0,
            rows: Vec::new(),
        };
        for d in served {
            let dem = &net.demands[d];
            let f = lp.add_var(0.0, bound_of(d), obj);
            index.demand_var[d] = Some(f);
            block.demands.push((d, f));
            block.bound += bound_of(d);
            row0[s].push((f, -1.0));
            row1[dem.to].push((f, -1.0));
        }
        for &a in &view.arcs {
            let arc = net.arcs[a];
            if in0[arc.from] && in0[arc.to] {
                let x = lp.add_var(0.0, f64::INFINITY, 0.0);
                row0[arc.from].push((x, 1.0));
                row0[arc.to].push((x, -1.0));
                index.arc_vars[a].push(x);
                block.arc0.push((a, x));
                arc_reach[a] += block.bound;
            }
            if in1[arc.from] && in1[arc.to] {
                let x = lp.add_var(0.0, f64::INFINITY, 0.0);
                row1[arc.to].push((x, 1.0));
                row1[arc.from].push((x, -1.0));
                index.arc_vars[a].push(x);
                block.arc1.push((a, x));
                arc_reach[a] += block.bound;
            }
        }
        for &v in &procs {
            let p = lp.add_var(0.0, f64::INFINITY, 0.0);
            row0[v].push((p, 1.0));
            row1[v].push((p, 1.0));
            index.site_vars[v].push(p);
            block.procs.push((v, p));
            site_reach[v] += block.bound;
        }
        for coeffs in row0.into_iter().chain(row1) {
            if !coeffs.is_empty() {
                block.rows.push(lp.add_row(coeffs, Sense::Eq, 0.0));
            }
        }
        let all = block.demands.iter().chain(&block.arc0).chain(&block.arc1);
        for &(_, v) in all.chain(&block.procs) {
            lp.magnitude[v] = block.bound;
        }
        index.blocks.push(block);
    });

    for (a, &reach) in arc_reach.iter().enumerate() {
        if !index.arc_vars[a].is_empty() {
            let coeffs = index.arc_vars[a].iter().map(|&x| (x, 1.0)).collect();
            let rhs = net.arcs[a].capacity.min(reach);
            index.arc_cap[a] = rhs;
            index.arc_row[a] = Some(lp.add_row(coeffs, Sense::Le, rhs));
        }
    }
    for v in 0..n {
        if !index.site_vars[v].is_empty() {
            let mut coeffs: Vec<(usize, f64)> =
                index.site_vars[v].iter().map(|&p| (p, 1.0)).collect();
            if let Some(add) = added.and_then(|a| a[v]) {
                coeffs.push((add, -1.0));
            }
            let rhs = net.sites[v].processing.min(site_reach[v]);
            index.site_cap[v] = rhs;
            index.site_row[v] = Some(lp.add_row(coeffs, Sense::Le, rhs));
        }
    }
    index
}

impl Cap {
    /// The cap of demand `d`'s flow: its required part or its volume. O(1).
    pub fn bound(self, net: &Network, d: usize) -> f64 {
        match self {
            Cap::Required => net.demands[d].required,
            Cap::Volume => net.demands[d].volume,
        }
    }
}

/// What one source block may use on a surviving view: its demands that can be served
/// (`served`, in demand order: the destination is reachable from a processing site the
/// source reaches), the processing sites on some source → site → destination walk
/// (`procs`), and the nodes of each layer (`in0`: reached from the source and reaching a
/// processing site; `in1`: reached from a processing site and reaching a destination).
struct BlockShape {
    source: usize,
    served: Vec<usize>,
    procs: Vec<usize>,
    in0: Vec<bool>,
    in1: Vec<bool>,
}

/// Calls `f` with the [`BlockShape`] of every source (in site order) whose surviving
/// demands with a positive cap under `cap` include one that can be served; the one scan
/// that [`build_on`] and [`presolved_caps`] share, so the model and the certificate's
/// capacities cannot disagree. O(sources · (sites + arcs)): four reachability passes per
/// source.
fn for_each_block(net: &Network, view: &Surviving, cap: Cap, mut f: impl FnMut(BlockShape)) {
    let n = net.sites.len();
    // Demands grouped by source, in site order (deterministic model layout).
    let mut by_source: Vec<Vec<usize>> = vec![Vec::new(); n];
    for d in 0..net.demands.len() {
        if view.demand_alive(net, d) && cap.bound(net, d) > 0.0 {
            by_source[net.demands[d].from].push(d);
        }
    }
    for (s, demands) in by_source.iter().enumerate() {
        if demands.is_empty() {
            continue;
        }
        let from_s = view.reach_from([s]);
        let to_dest = view.reach_to(demands.iter().map(|&d| net.demands[d].to.0));
        let procs: Vec<usize> = (0..n)
            .filter(|&v| view.can_process[v] && from_s[v] && to_dest[v])
            .collect();
        if procs.is_empty() {
            continue;
        }
        let from_proc = view.reach_from(procs.iter().copied());
        let to_proc = view.reach_to(procs.iter().copied());
        let in0: Vec<bool> = (0..n).map(|v| from_s[v] && to_proc[v]).collect();
        let in1: Vec<bool> = (0..n).map(|v| from_proc[v] && to_dest[v]).collect();
        let served: Vec<usize> = demands
            .iter()
            .copied()
            .filter(|&d| in1[net.demands[d].to])
            .collect();
        if served.is_empty() {
            continue;
        }
        f(BlockShape {
            source: s,
            served,
            procs,
            in0,
            in1,
        });
    }
}

/// The capacities [`build_on`] gives the capacity and processing rows of `view` under
/// demand caps `cap`, without building the model: per arc `min(capacity, Σ_s B_s per
/// layer of block s that may use it)` (0 when no block may), per site `min(processing,
/// Σ_s B_s over the blocks that may process there)`. By the presolve argument of
/// [`build`] some optimal allocation fits within them, so the certificate's dual bound
/// ([`super::certify::dual_bound`]) computed with them is a valid upper bound. Equal to
/// `FlowIndex::arc_cap` and `site_cap` (tested). O(sources · (sites + arcs)).
pub fn presolved_caps(net: &Network, view: &Surviving, cap: Cap) -> (Vec<f64>, Vec<f64>) {
    let n = net.sites.len();
    let mut arc_reach = vec![0.0; net.arcs.len()];
    let mut arc_used = vec![false; net.arcs.len()];
    let mut site_reach = vec![0.0; n];
    let mut site_used = vec![false; n];
    for_each_block(net, view, cap, |shape| {
        let bound: f64 = shape.served.iter().fold(0.0, |b, &d| b + cap.bound(net, d));
        for &a in &view.arcs {
            let arc = net.arcs[a];
            if shape.in0[arc.from] && shape.in0[arc.to] {
                arc_reach[a] += bound;
                arc_used[a] = true;
            }
            if shape.in1[arc.from] && shape.in1[arc.to] {
                arc_reach[a] += bound;
                arc_used[a] = true;
            }
        }
        for &v in &shape.procs {
            site_reach[v] += bound;
            site_used[v] = true;
        }
    });
    let arc_cap = (0..net.arcs.len())
        .map(|a| {
            if arc_used[a] {
                net.arcs[a].capacity.min(arc_reach[a])
            } else {
                0.0
            }
        })
        .collect();
    let site_cap = (0..n)
        .map(|v| {
            if site_used[v] {
                net.sites[v].processing.min(site_reach[v])
            } else {
                0.0
            }
        })
        .collect();
    (arc_cap, site_cap)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{Element, Scenario};

    /// Source: [`build_on`] itself — [`presolved_caps`] must give exactly the right-hand
    /// sides the model's capacity and processing rows get, under both demand caps, on the
    /// demo network's baseline and every single link or site failure.
    #[test]
    fn presolved_caps_equal_the_models_rows() {
        let text = std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/demo-harrowmere.json"),
        )
        .unwrap();
        let net = Network::from_json(&text).unwrap();
        let mut outages = vec![Outage::default()];
        outages.extend(
            (0..net.links.len())
                .map(|l| Scenario::new(&net, &[Element::Link(l.into())]).outage(&net)),
        );
        outages.extend(
            (0..net.sites.len())
                .map(|s| Scenario::new(&net, &[Element::Site(s.into())]).outage(&net)),
        );
        for o in &outages {
            let view = Surviving::new(&net, o, None);
            for cap in [Cap::Required, Cap::Volume] {
                let mut lp = Lp::new(true);
                let index = build_on(&mut lp, &net, &view, cap, 1.0, None);
                let (arc_cap, site_cap) = presolved_caps(&net, &view, cap);
                assert_eq!(arc_cap, index.arc_cap, "{o:?} {cap:?}");
                assert_eq!(site_cap, index.site_cap, "{o:?} {cap:?}");
            }
        }
    }
}
