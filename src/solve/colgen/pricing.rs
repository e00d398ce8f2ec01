//! Pricing: the cheapest processing walk of every demand under the master's arc, site and demand prices (`price`: two shortest-path trees per processing site root, then the site's length; `Legs` the walk's two legs).

use super::*;

use crate::model::Network;

/// The outcome of one pricing pass.
pub(super) struct Priced {
    /// Per demand: cheapest walk price (infinite when none exists or the cap is 0).
    pub(super) cost: Vec<f64>,
    /// Walks with positive reduced cost, in demand order (only when asked for).
    pub(super) walks: Vec<Walk>,
    /// The dual bound for these prices.
    pub(super) bound: f64,
    /// Per site: some active demand's origin reaches it and it reaches one of that
    /// origin's destinations (the edge model's "site has a processing row").
    pub(super) site_reached: Vec<bool>,
}

/// Shortest walks' legs for one pricing pass, rooted where there are fewer trees: at the
/// origins and destinations (one Dijkstra from each origin, one to each destination) or at
/// the processing sites (one to and one from each). Either gives the same distances
/// (shortest-path lengths are unique; among equal paths, fewest hops, then a fixed order).
pub(super) enum Legs {
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
    pub(super) fn new(g: &Graph, caps: &[f64], y: &[f64]) -> Legs {
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
    pub(super) fn first(&self, o: usize, v: usize) -> (f64, u32) {
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
    pub(super) fn second(&self, v: usize, t: usize) -> (f64, u32) {
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
    pub(super) fn arcs(&self, net: &Network, o: usize, v: usize, t: usize) -> Vec<usize> {
        let mut legs = Vec::new();
        match self {
            Legs::Ends { from, to } => {
                let (ds, dt) = (
                    from[o].as_ref().expect("tree"),
                    to[t].as_ref().expect("tree"),
                );
                ds.push_path(net, v, o, true, &mut legs);
                dt.push_path(net, v, t, false, &mut legs);
            }
            Legs::Sites { into, out } => {
                let (ri, fo) = (
                    into[v].as_ref().expect("tree"),
                    out[v].as_ref().expect("tree"),
                );
                ri.push_path(net, o, v, false, &mut legs);
                fo.push_path(net, t, v, true, &mut legs);
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
pub(super) fn price(g: &Graph, caps: &[f64], y: &[f64], z: &[f64], u: Option<&[f64]>) -> Priced {
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
            let (d2, h2) = legs.second(v, dem.to.0);
            if d2.is_finite() {
                reaches_dest[dem.from][v] = true;
            }
            let (d1, h1) = legs.first(dem.from.0, v);
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
            walks.push(Walk::from_legs(
                d,
                v,
                legs.arcs(net, dem.from.0, v, dem.to.0),
            ));
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
