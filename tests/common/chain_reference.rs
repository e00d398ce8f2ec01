//! A second formulation of the service-chain model written from the input contract
//! (/work/shared/network-format.md, "Service chains and traffic that changes volume"): one
//! layered LP *per demand* (not aggregated by origin and chain as the product's edge LP is,
//! and with no walks as the product's walk engine has), solved by microlp (a simplex method,
//! through good_lp) rather than the product's backends; and the random small networks with
//! random chains and gains it is checked on. Shared by `tests/chains.rs` and
//! `tests/chain_walks.rs` through `#[path]`.
#![allow(dead_code)] // each test crate uses part of it

use good_lp::{Expression, ProblemVariables, Solution, SolverModel, Variable, microlp, variable};
use rand::prelude::*;
use serde_json::{Value, json};

/// Relative tolerance of the comparisons with the reference: |got − want| <= REL · max(1, |want|).
pub const REL: f64 = 1e-6;

/// Panics unless `got` is within [`REL`] of `want` (relative to max(1, |want|)).
pub fn assert_close(got: f64, want: f64, what: &str) {
    assert!(
        (got - want).abs() <= REL * want.abs().max(1.0),
        "{what}: got {got}, want {want} (relative tolerance {REL})"
    );
}

/// The (site, link) a depth-1 scenario of a random chain network fails, from its JSON
/// object's `failed` list (`site:sN` / `link:lN`, the ids `RNet::to_json` writes). Every crate that includes this file also declares `mod common`.
pub fn failed_element(sc: &Value) -> (Option<usize>, Option<usize>) {
    let failed = crate::common::json::failed_of(sc);
    match failed.as_slice() {
        [] => (None, None),
        [one] => match one.split_once(':') {
            Some(("site", id)) => (Some(id[1..].parse().unwrap()), None),
            Some(("link", id)) => (None, Some(id[1..].parse().unwrap())),
            _ => panic!("unexpected element {one}"),
        },
        _ => panic!("depth 1 only: {failed:?}"),
    }
}

pub struct RNet {
    pub gains: Vec<f64>,
    /// Per site, per function.
    pub capacity: Vec<Vec<f64>>,
    /// (from, to, capacity, one_way).
    pub links: Vec<(usize, usize, f64, bool)>,
    /// (from, to, volume, required, chain).
    pub demands: Vec<(usize, usize, f64, f64, Vec<usize>)>,
}

impl RNet {
    pub fn to_json(&self) -> Value {
        let fid = |f: usize| format!("f{f}");
        json!({
            "functions": self.gains.iter().enumerate()
                .map(|(f, g)| json!({"id": fid(f), "gain": g})).collect::<Vec<_>>(),
            "sites": self.capacity.iter().enumerate().map(|(v, caps)| {
                let m: serde_json::Map<String, Value> = caps.iter().enumerate()
                    .filter(|(_, c)| **c > 0.0)
                    .map(|(f, c)| (fid(f), json!(c))).collect();
                json!({"id": format!("s{v}"), "functions": m})
            }).collect::<Vec<_>>(),
            "links": self.links.iter().enumerate().map(|(l, &(a, b, c, one))| json!({
                "id": format!("l{l}"), "from": format!("s{a}"), "to": format!("s{b}"),
                "capacity": c, "one_way": one})).collect::<Vec<_>>(),
            "demands": self.demands.iter().map(|(a, b, vol, req, chain)| json!({
                "from": format!("s{a}"), "to": format!("s{b}"), "volume": vol,
                "required": req,
                "chain": chain.iter().map(|&f| fid(f)).collect::<Vec<_>>()
            })).collect::<Vec<_>>(),
        })
    }
}

/// served_required from the contract: per demand `d` with chain f1…fk, layers 0..=k of
/// the surviving arcs; `x[d][j][a]` in origin units, the arc row takes `G_j · x`
/// (`G_j` = g1·…·gj); `p[d][j][v]` moves layer j to j+1 at a surviving site with
/// capacity of f_{j+1}, its function row takes `G_j · p`; conservation per demand, layer
/// and site with `F_d` leaving the origin in layer 0 and reaching the destination in
/// layer k; `0 <= F_d <= required` (`<= volume` with `by_volume`: the throughput). A
/// failed site loses its functions and links; a demand with a failed end is left out.
pub fn reference_served(
    t: &RNet,
    failed_site: Option<usize>,
    failed_link: Option<usize>,
    by_volume: bool,
) -> f64 {
    let mut m = Layered::new(t, failed_site, failed_link);
    let mut objective = Expression::from(0.0);
    for (from, to, volume, required, chain) in &t.demands {
        if !m.up(*from) || !m.up(*to) {
            continue;
        }
        let cap = if by_volume { *volume } else { *required };
        let f: Variable = m.pv.add(variable().min(0.0).max(cap));
        objective += f;
        m.add_demand(*from, *to, chain, f.into());
    }
    let (pv, rows) = m.rows();
    let mut model = pv.maximise(objective.clone()).using(microlp);
    for r in rows {
        model.add_constraint(r);
    }
    model
        .solve()
        .expect("microlp solves the reference")
        .eval(&objective)
}

/// A site of `0..n` other than `a`, uniform (n ≥ 2).
pub fn other_site(rng: &mut StdRng, n: usize, a: usize) -> usize {
    let b = rng.random_range(0..n - 1);
    if b >= a { b + 1 } else { b }
}

/// `nf` gains drawn uniformly from `from`.
pub fn random_gains(rng: &mut StdRng, nf: usize, from: &[f64]) -> Vec<f64> {
    (0..nf)
        .map(|_| from[rng.random_range(0..from.len())])
        .collect()
}

/// The links `(from, to, capacity, one_way)` of a ring of `n` sites plus up to `chords`
/// random chords (their number drawn first): capacities in tenths drawn from `tenths`,
/// one-way at probability `one_way`.
pub fn ring_links(
    rng: &mut StdRng,
    n: usize,
    chords: usize,
    tenths: std::ops::RangeInclusive<i32>,
    one_way: f64,
) -> Vec<(usize, usize, f64, bool)> {
    let mut links = Vec::new();
    for l in 0..rng.random_range(n..=n + chords) {
        let (a, b) = if l < n {
            (l, (l + 1) % n)
        } else {
            let a = rng.random_range(0..n);
            (a, other_site(rng, n, a))
        };
        links.push((
            a,
            b,
            rng.random_range(tenths.clone()) as f64 / 10.0,
            rng.random_bool(one_way),
        ));
    }
    links
}

#[allow(clippy::needless_range_loop)] // each function's capacity goes to a random site
pub fn random_net(rng: &mut StdRng) -> RNet {
    let n = rng.random_range(4..=6);
    let nf = rng.random_range(1..=3);
    let gains = random_gains(rng, nf, &[0.5, 0.8, 1.0, 1.25, 2.0]);
    let mut capacity = vec![vec![0.0; nf]; n];
    for f in 0..nf {
        // At least one site per function, a second one often.
        for _ in 0..rng.random_range(1..=2) {
            capacity[rng.random_range(0..n)][f] = rng.random_range(5..=300) as f64 / 10.0;
        }
    }
    let links = ring_links(rng, n, 4, 10..=300, 0.25);
    let mut demands = Vec::new();
    for i in 0..rng.random_range(2..=5) {
        let a = if i % 3 == 2 {
            demands
                .last()
                .map(|d: &(usize, usize, f64, f64, Vec<usize>)| d.0)
                .unwrap()
        } else {
            rng.random_range(0..n)
        };
        let b = other_site(rng, n, a);
        let chain: Vec<usize> = (0..rng.random_range(0..=3))
            .map(|_| rng.random_range(0..nf))
            .collect();
        let volume = rng.random_range(10..=250) as f64 / 10.0;
        let required = (volume * rng.random_range(3..=10) as f64).round() / 10.0;
        demands.push((a, b, volume, required.min(volume), chain));
    }
    RNet {
        gains,
        capacity,
        links,
        demands,
    }
}

/// Growth headroom from the contract ("Growth headroom" with "Service chains and traffic
/// that changes volume"): the largest λ such that every surviving demand with
/// `required > 0` is served at `λ · required` (origin units) at the same time. One layered
/// commodity *per demand* (layers 0..=k of the surviving arcs; arc use `G_j · x`, function
/// use `G_j · p`, as in [`reference_served`]) whose origin sends exactly `λ · required`;
/// shared arc and function rows; maximise λ, on microlp. `None` when no demand with
/// `required > 0` has both ends alive. A demand with no layered walk forces λ = 0 through
/// its own conservation rows.
pub fn reference_headroom(
    t: &RNet,
    failed_site: Option<usize>,
    failed_link: Option<usize>,
) -> Option<f64> {
    let mut m = Layered::new(t, failed_site, failed_link);
    let live: Vec<&(usize, usize, f64, f64, Vec<usize>)> = t
        .demands
        .iter()
        .filter(|d| m.up(d.0) && m.up(d.1) && d.3 > 0.0)
        .collect();
    if live.is_empty() {
        return None;
    }
    let lambda: Variable = m.pv.add(variable().min(0.0));
    for &&(from, to, _, required, ref chain) in &live {
        m.add_demand(from, to, chain, required * lambda);
    }
    let (pv, rows) = m.rows();
    let mut model = pv.maximise(lambda).using(microlp);
    for r in rows {
        model.add_constraint(r);
    }
    let sol = model
        .solve()
        .expect("microlp solves the headroom reference");
    Some(sol.value(lambda))
}

/// The layered per-demand flow model both references above build: the surviving arcs
/// (a failed site loses its links and functions), and per demand with chain f1…fk layers
/// 0..=k of them, `x[j][a]` in origin units taking `G_j · x` of arc `a`'s row (`G_j` =
/// g1·…·gj), `p[j][v]` moving layer j to j+1 at a surviving site with capacity of
/// f_{j+1} and taking `G_j · p` of that function's row; conservation per layer and site.
struct Layered<'a> {
    t: &'a RNet,
    failed_site: Option<usize>,
    /// Surviving arcs `(from, to, capacity)`.
    arcs: Vec<(usize, usize, f64)>,
    pv: ProblemVariables,
    arc_use: Vec<Expression>,
    /// Per site and function: its use.
    fn_use: Vec<Vec<Expression>>,
    /// Conservation expressions (each `= 0`).
    balance: Vec<Expression>,
}

impl<'a> Layered<'a> {
    fn new(t: &'a RNet, failed_site: Option<usize>, failed_link: Option<usize>) -> Self {
        let n = t.capacity.len();
        let up = |v: usize| failed_site != Some(v);
        let mut arcs = Vec::new();
        for (l, &(a, b, c, one)) in t.links.iter().enumerate() {
            if failed_link == Some(l) || !up(a) || !up(b) {
                continue;
            }
            arcs.push((a, b, c));
            if !one {
                arcs.push((b, a, c));
            }
        }
        let nf = t.gains.len();
        Layered {
            t,
            failed_site,
            arc_use: vec![Expression::from(0.0); arcs.len()],
            arcs,
            pv: ProblemVariables::new(),
            fn_use: vec![vec![Expression::from(0.0); nf]; n],
            balance: Vec::new(),
        }
    }

    fn up(&self, v: usize) -> bool {
        self.failed_site != Some(v)
    }

    /// One demand's layers, `flow` (origin units) leaving `from` in layer 0 and reaching
    /// `to` in the last layer.
    fn add_demand(&mut self, from: usize, to: usize, chain: &[usize], flow: Expression) {
        let (t, n, k) = (self.t, self.t.capacity.len(), chain.len());
        let mut g = 1.0;
        let mut node = vec![vec![Expression::from(0.0); n]; k + 1];
        for j in 0..=k {
            for (a, &(u, w, _)) in self.arcs.iter().enumerate() {
                let x = self.pv.add(variable().min(0.0));
                node[j][u] -= x;
                node[j][w] += x;
                self.arc_use[a] += g * x;
            }
            if j < k {
                for (v, caps) in t.capacity.iter().enumerate() {
                    if self.up(v) && caps[chain[j]] > 0.0 {
                        let p = self.pv.add(variable().min(0.0));
                        node[j][v] -= p;
                        node[j + 1][v] += p;
                        self.fn_use[v][chain[j]] += g * p;
                    }
                }
                g *= t.gains[chain[j]];
            }
        }
        node[0][from] += flow.clone();
        node[k][to] -= flow;
        for layer in node {
            self.balance.extend(layer);
        }
    }

    /// The variables and every row: conservation, arc capacities, function capacities.
    fn rows(self) -> (ProblemVariables, Vec<good_lp::Constraint>) {
        let mut rows: Vec<good_lp::Constraint> =
            self.balance.into_iter().map(|e| e.eq(0.0)).collect();
        for (a, e) in self.arc_use.into_iter().enumerate() {
            rows.push(e.leq(self.arcs[a].2));
        }
        for (v, row) in self.fn_use.into_iter().enumerate() {
            for (f, e) in row.into_iter().enumerate() {
                if self.failed_site != Some(v) && self.t.capacity[v][f] > 0.0 {
                    rows.push(e.leq(self.t.capacity[v][f]));
                }
            }
        }
        (self.pv, rows)
    }
}

/// `file` (a network without `functions`) rewritten with one function `proc` of gain 1:
/// each site's `processing` becomes its `functions.proc`, `expand_cost`/`expand_max`
/// become `expand.proc`, and every demand gets the chain `["proc"]` (the contract's
/// reading of a file without `functions`).
pub fn with_one_function(file: &Value) -> Value {
    let mut out = file.clone();
    out["functions"] = json!([{"id": "proc", "gain": 1}]);
    for s in out["sites"].as_array_mut().unwrap() {
        let o = s.as_object_mut().unwrap();
        let p = o.remove("processing").unwrap_or(json!(0));
        o.insert("functions".into(), json!({"proc": p}));
        let cost = o.remove("expand_cost");
        let max = o.remove("expand_max");
        o.remove("expand_step");
        if let Some(c) = cost {
            let mut e = json!({"cost": c});
            if let Some(m) = max {
                e["max"] = m;
            }
            o.insert("expand".into(), json!({"proc": e}));
        }
    }
    for d in out["demands"].as_array_mut().unwrap() {
        d["chain"] = json!(["proc"]);
    }
    out
}

/// `t` after the failure of the sites `sites` and the links `links` (indices into
/// `t.links`), as the contract reads a failure: a failed site loses its functions and its
/// links, a demand with a failed end leaves the network (it is stranded), every other
/// demand keeps its volume, required amount and chain. [`reference_served`] of the result
/// (with no further failure) is the served amount of that outage.
pub fn without(t: &RNet, sites: &[usize], links: &[usize]) -> RNet {
    let up = |v: &usize| !sites.contains(v);
    RNet {
        gains: t.gains.clone(),
        capacity: t
            .capacity
            .iter()
            .enumerate()
            .map(|(v, caps)| {
                if up(&v) {
                    caps.clone()
                } else {
                    vec![0.0; caps.len()]
                }
            })
            .collect(),
        links: t
            .links
            .iter()
            .enumerate()
            .filter(|(l, (a, b, _, _))| !links.contains(l) && up(a) && up(b))
            .map(|(_, &link)| link)
            .collect(),
        demands: t
            .demands
            .iter()
            .filter(|(a, b, ..)| up(a) && up(b))
            .cloned()
            .collect(),
    }
}

// ---------------------------------------------------------------------------------------
// Routing as deployed on chain networks: a brute-force reference.
// ---------------------------------------------------------------------------------------

/// One sequence of the routed reference: its length, per-unit arc loads and steps (site,
/// function, volume entering per origin unit).
type RefRoute = (u64, Vec<f64>, Vec<(usize, usize, f64)>);

/// Routing as deployed on `t` with link metrics `metric` (per link), from the contract's
/// "Routing as deployed" and "Service chains" sections, written independently of the
/// product: leg distances from petgraph's `dijkstra` (one run per source over the surviving
/// arcs), the per-hop equal split computed here, *every* sequence of sites `v1 … vk`
/// enumerated (no layered shortest path), and the fixed-route LP on microlp (nearest: one
/// variable per demand spread equally over its least-length sequences; steered: one
/// variable per demand and sequence). Returns served_required (throughput with
/// `by_volume`).
pub fn reference_routed(
    t: &RNet,
    metric: &[u64],
    failed_site: Option<usize>,
    failed_link: Option<usize>,
    steered: bool,
    by_volume: bool,
) -> f64 {
    use petgraph::algo::dijkstra;
    use petgraph::graph::{DiGraph, NodeIndex};
    let n = t.capacity.len();
    let up = |v: usize| failed_site != Some(v);
    // Surviving arcs: (from, to, capacity, metric).
    let mut arcs: Vec<(usize, usize, f64, u64)> = Vec::new();
    for (l, &(a, b, c, one)) in t.links.iter().enumerate() {
        if failed_link == Some(l) || !up(a) || !up(b) {
            continue;
        }
        arcs.push((a, b, c, metric[l]));
        if !one {
            arcs.push((b, a, c, metric[l]));
        }
    }
    let mut g: DiGraph<(), u64> = DiGraph::new();
    let nodes: Vec<NodeIndex> = (0..n).map(|_| g.add_node(())).collect();
    for &(a, b, _, m) in &arcs {
        g.add_edge(nodes[a], nodes[b], m);
    }
    // dist[u][v]: least metric u → v (None: unreachable).
    let dist: Vec<Vec<Option<u64>>> = (0..n)
        .map(|u| {
            let d = dijkstra(&g, nodes[u], None, |e| *e.weight());
            (0..n).map(|v| d.get(&nodes[v]).copied()).collect()
        })
        .collect();
    // One unit u → v split equally over the next hops at every node, per arc.
    let leg = |u: usize, v: usize| -> Vec<f64> {
        let mut load = vec![0.0; arcs.len()];
        let mut at = vec![0.0; n];
        at[u] = 1.0;
        let mut order: Vec<usize> = (0..n).filter(|&w| dist[w][v].is_some()).collect();
        order.sort_by_key(|&w| std::cmp::Reverse(dist[w][v]));
        for w in order {
            if w == v || at[w] == 0.0 {
                continue;
            }
            let next: Vec<usize> = (0..arcs.len())
                .filter(|&k| {
                    arcs[k].0 == w
                        && dist[arcs[k].1][v].is_some_and(|dn| Some(dn + arcs[k].3) == dist[w][v])
                })
                .collect();
            let share = at[w] / next.len() as f64;
            for k in next {
                load[k] += share;
                at[arcs[k].1] += share;
            }
        }
        load
    };
    let nf = t.gains.len();
    let runs = |f: usize| -> Vec<usize> {
        (0..n)
            .filter(|&v| up(v) && t.capacity[v][f] > 0.0)
            .collect()
    };
    let mut pv = ProblemVariables::new();
    let mut arc_use = vec![Expression::from(0.0); arcs.len()];
    let mut fn_use = vec![vec![Expression::from(0.0); nf]; n];
    let mut objective = Expression::from(0.0);
    let mut demand_rows = Vec::new();
    for (from, to, volume, required, chain) in &t.demands {
        if !up(*from) || !up(*to) {
            continue;
        }
        let cap = if by_volume { *volume } else { *required };
        // Every sequence: the cartesian product of the sites running each step.
        let mut seqs: Vec<Vec<usize>> = vec![vec![*from]];
        for &f in chain {
            seqs = seqs
                .into_iter()
                .flat_map(|s| {
                    runs(f).into_iter().map(move |v| {
                        let mut s = s.clone();
                        s.push(v);
                        s
                    })
                })
                .collect();
        }
        for s in &mut seqs {
            s.push(*to);
        }
        // Length (None when a leg is unreachable), per-unit arc and function loads.
        let mut routes: Vec<RefRoute> = Vec::new();
        for s in &seqs {
            let mut len = 0;
            let mut ok = true;
            let mut load = vec![0.0; arcs.len()];
            let mut steps = Vec::new();
            let mut g_now = 1.0;
            for j in 0..s.len() - 1 {
                match dist[s[j]][s[j + 1]] {
                    Some(d) => len += d,
                    None => ok = false,
                }
                if !ok {
                    break;
                }
                for (k, x) in leg(s[j], s[j + 1]).into_iter().enumerate() {
                    load[k] += g_now * x;
                }
                if j < chain.len() {
                    steps.push((s[j + 1], chain[j], g_now));
                    g_now *= t.gains[chain[j]];
                }
            }
            if ok {
                routes.push((len, load, steps));
            }
        }
        if routes.is_empty() {
            continue;
        }
        let mut add = |weight: f64, vars: &[(Variable, &RefRoute)]| {
            for &(x, (_, load, steps)) in vars {
                for (k, &c) in load.iter().enumerate() {
                    if c != 0.0 {
                        arc_use[k] += weight * c * x;
                    }
                }
                for &(v, f, gw) in steps {
                    fn_use[v][f] += weight * gw * x;
                }
            }
        };
        if steered {
            let vars: Vec<Variable> = routes
                .iter()
                .map(|_| pv.add(variable().min(0.0).max(cap)))
                .collect();
            let pairs: Vec<_> = vars.iter().copied().zip(routes.iter()).collect();
            add(1.0, &pairs);
            let mut sum = Expression::from(0.0);
            for &x in &vars {
                sum += x;
                objective += x;
            }
            demand_rows.push((sum, cap));
        } else {
            let least = routes.iter().map(|r| r.0).min().unwrap();
            let tied: Vec<_> = routes.iter().filter(|r| r.0 == least).collect();
            let x = pv.add(variable().min(0.0).max(cap));
            objective += x;
            let pairs: Vec<_> = tied.iter().map(|r| (x, *r)).collect();
            add(1.0 / tied.len() as f64, &pairs);
        }
    }
    let mut model = pv.maximise(objective.clone()).using(microlp);
    for (e, cap) in demand_rows {
        model.add_constraint(e.leq(cap));
    }
    for (k, e) in arc_use.into_iter().enumerate() {
        model.add_constraint(e.leq(arcs[k].2));
    }
    for (v, row) in fn_use.into_iter().enumerate() {
        for (f, e) in row.into_iter().enumerate() {
            if up(v) && t.capacity[v][f] > 0.0 {
                model.add_constraint(e.leq(t.capacity[v][f]));
            }
        }
    }
    model
        .solve()
        .expect("microlp solves the routed reference")
        .eval(&objective)
}

/// `t`'s file with link `l` given metric `metric[l]`.
pub fn with_metrics(t: &RNet, metric: &[u64]) -> Value {
    let mut doc = t.to_json();
    for (l, link) in doc["links"].as_array_mut().unwrap().iter_mut().enumerate() {
        link["metric"] = json!(metric[l]);
    }
    doc
}
