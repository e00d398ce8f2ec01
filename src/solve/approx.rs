//! The (1−ε) engine: Garg–Könemann's fractional packing scheme (1998/2007) for maximum
//! multicommodity flow, with Fleischer's (2000) round-robin phases, on the route-and-process
//! model. Its answer is an *interval* proven by the verifier, not a trusted value.
//!
//! **Packing LP.** Maximise `Σ λ_w` over processing walks `w` (origin → processing site →
//! destination) subject to one packing row per resource: each usable arc (`Σ mult(w,a)·λ_w
//! <= cap_a`, `mult` 2 when a walk crosses the arc before and after processing), each
//! processing site, and each demand (`Σ_{w of d} λ_w <= b_d`, the demand cap).
//!
//! **Method.** Every row `r` has a length `l_r`, initially `δ / cap_r`. The length of a
//! walk of demand `d` is `Σ mult·l(arc) + l(site) + l(d)`; the cheapest one is found on the
//! two-layer graph (layer 0 before processing, layer 1 after, a conversion edge of length
//! `l(v)` at each site that can process), so one Dijkstra from the origin's layer-0 copy
//! serves every demand of that origin. Phases keep a lower bound `α` on the shortest walk
//! length; within a phase each origin in turn routes every one of its demands whose cheapest
//! walk is shorter than `(1+ε)·α` (each along its walk, the bottleneck amount, all of one
//! origin's walks scaled together so no row receives more than its capacity at once) and
//! multiplies each row's length by `1 + ε·amount/cap`, re-running its Dijkstra until none
//! is short; then `α` rises to the least length seen (at least `(1+ε)·α`). The standard
//! run stops when `D(l) = Σ cap_r·l_r >= 1`, with `δ = (1+ε)·((1+ε)·L)^(−1/ε)` and `L` the
//! most rows a walk can cross (`2·sites + 2`); scaling the flow down by
//! `log_{1+ε}((1+ε)/δ)` makes it feasible and within `(1−ε)^−3` of the optimum.
//!
//! **What is reported.** Nothing from the analysis is trusted. The walks go to the
//! verifier's repair ([`verify::repair_walks`]: each walk scaled by the worst overload of
//! its rows, so feasible by construction; both the raw flow and the flow scaled by its
//! largest overload are repaired and the better kept), which is the proven lower bound.
//! The final lengths, scaled by the factor `θ` that minimises it, are one candidate for
//! the prices of the certificate ([`super::certify::dual_bound`], weak duality, valid for any
//! nonnegative prices); the allocation's pruned cut (price 1 on a set of saturated rows
//! that cuts the walks of the demands it does not count, `approx::cut`) is the other, and the
//! smaller bound is the proven upper bound. Where processing runs out the cut of the full
//! sites proves the optimum at the first check, long before the lengths price the sites
//! evenly. Every few phases the same bounds are estimated cheaply
//! (uniform scaling; the certificate with each demand's last computed walk length, a lower
//! bound on its current one, so the estimate is never below the true certificate); the
//! run ends as soon as the estimated interval is within `ε × required` (the caps of the
//! surviving demands), which in a network that serves everything is usually the first
//! phase. When `D(l) >= 1` and the interval is still wider, phases continue (lengths keep
//! growing, the repair keeps the flow feasible) up to [`MAX_PHASE_FACTOR`] times the
//! standard phase count. The result is `proven` only when the bounds meet within
//! [`super::GAP_TOL`]; otherwise it is an unproven interval whose width the caller reads.
//!
//! **Invariant.** Lengths only grow, so a walk length computed earlier in a phase is a lower
//! bound on its current length: `α` and the per-demand lengths kept for the estimate stay
//! valid lower bounds, and the estimated upper bound is never below the certificate's.
//! Lengths are kept as `stored · e^scale` and renormalised when they grow past `1e150`, so
//! `δ` (about `e^−760` for 1,000 sites at ε = 0.01) never underflows.
//!
//! **Complexity.** Each phase costs one Dijkstra per origin plus one per routing round,
//! each `O((arcs + sites)·log sites)` on the two-layer graph; the standard analysis bounds
//! the phases by `O(ε^−2·log L)` and the routing rounds by the same times the rows. The
//! estimate is `O(demands·log demands + Σ walk lengths)`; the final verification one repair
//! and one certificate. Memory: the distinct walks with flow and `O(sites + arcs + demands)`.
//!
//! Determinism: origins in site order, demands in file order, Dijkstra ties broken by node
//! index; the result depends only on the network, the outage and ε.

use std::cmp::Ordering;
use std::collections::{BinaryHeap, HashMap};

use super::flow::{self, Cap};
use super::surviving::Surviving;
use super::{Evaluation, Verified, caps_of, verify};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::scenario::Outage;

mod bounds;
mod cut;
mod warm;
use bounds::{estimate, top_up, verified, with_prices};
pub use warm::{Start, evaluate_from};

/// ε used by `--engine approx` when `--epsilon` is not given.
pub const DEFAULT_EPSILON: f64 = 0.01;
/// Largest ε accepted (the analysis needs ε < 1; beyond 0.5 the interval says little).
pub const MAX_EPSILON: f64 = 0.5;
/// Phases allowed, as a multiple of the standard analysis' count, before the run stops
/// with whatever interval it has.
pub const MAX_PHASE_FACTOR: f64 = 4.0;
/// Stored lengths are renormalised when one exceeds this.
const RENORM: f64 = 1e150;
/// Cheapest-walk rounds per origin when the lower bound of a run's own walks is topped up
/// with residual capacity.
const TOP_UP_WALKS: usize = 4;
/// The same when a parent's walks are topped up ([`warm`]): the flow a failure cut must
/// find new walks, often over several residual bottlenecks; rounds stop as soon as no
/// demand of the origin is short or none gained.
const WARM_TOP_UP_WALKS: usize = 32;

/// Whether `eps` is an ε this engine accepts: finite, in (0, [`MAX_EPSILON`]].
pub fn epsilon_ok(eps: f64) -> bool {
    eps.is_finite() && eps > 0.0 && eps <= MAX_EPSILON
}

/// Evaluates one outage with the approximate engine: [`solve_approx`] for served_required
/// (and for throughput when some surviving demand offers more than it requires), turned
/// into an [`Evaluation`] by [`finish()`](super::finish()) like every engine's results. `served_required` is
/// the proven lower bound unless the interval closes, `upper_bound` the certificate's.
///
/// Cost: one or two runs of [`solve_approx`].
pub fn evaluate_approx(net: &Network, outage: &Outage, eps: f64) -> Result<Evaluation> {
    warm::evaluate_from(net, outage, eps, None).map(|(e, _)| e)
}

/// One row of the packing LP: an arc, a processing site or a demand cap.
#[derive(Clone, Copy)]
enum Row {
    Arc(usize),
    Site(usize),
}

/// The two-layer graph of the surviving network: node `2v` is site `v` before processing,
/// `2v + 1` after. Edges in CSR form, each naming the row whose length it has.
struct Layers {
    start: Vec<usize>,
    to: Vec<usize>,
    row: Vec<Row>,
}

impl Layers {
    fn new(net: &Network, view: &Surviving) -> Layers {
        let n = net.sites.len();
        let mut edges: Vec<(usize, usize, Row)> = Vec::new();
        for &a in &view.arcs {
            let arc = &net.arcs[a];
            edges.push((2 * arc.from.0, 2 * arc.to.0, Row::Arc(a)));
            edges.push((2 * arc.from.0 + 1, 2 * arc.to.0 + 1, Row::Arc(a)));
        }
        for v in 0..n {
            if view.can_process[v] {
                edges.push((2 * v, 2 * v + 1, Row::Site(v)));
            }
        }
        edges.sort_by_key(|e| e.0);
        let mut start = vec![0; 2 * n + 1];
        for e in &edges {
            start[e.0 + 1] += 1;
        }
        for i in 0..2 * n {
            start[i + 1] += start[i];
        }
        Layers {
            start,
            to: edges.iter().map(|e| e.1).collect(),
            row: edges.iter().map(|e| e.2).collect(),
        }
    }
}

#[derive(PartialEq)]
struct Entry(f64, usize);
impl Eq for Entry {}
impl PartialOrd for Entry {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Entry {
    /// Smallest distance first, then the smallest node: a min-heap on a `BinaryHeap`.
    fn cmp(&self, other: &Self) -> Ordering {
        other.0.total_cmp(&self.0).then(other.1.cmp(&self.1))
    }
}

/// The run's state: stored lengths (`stored · e^scale` is the length) per arc, site and
/// demand, and the raw (unscaled) loads.
struct State<'a> {
    net: &'a Network,
    layers: Layers,
    arc_len: Vec<f64>,
    site_len: Vec<f64>,
    dem_len: Vec<f64>,
    arc_load: Vec<f64>,
    site_load: Vec<f64>,
    dem_load: Vec<f64>,
    bound: &'a [f64],
    eps: f64,
    /// Per distinct walk (demand, site, arcs in walk order): index into `flow`.
    walk_index: HashMap<(usize, usize, Vec<usize>), usize>,
    walks: Vec<(usize, usize, Vec<usize>)>,
    flow: Vec<f64>,
    dist: Vec<f64>,
    pred: Vec<usize>,
}

impl State<'_> {
    /// Dijkstra from `2s` (site `s`, unprocessed) with the stored lengths; fills `dist`
    /// and `pred` (the edge index reaching each node). O((arcs + sites)·log sites).
    fn dijkstra(&mut self, s: usize) {
        self.dijkstra_within(s, None);
    }

    /// [`Self::dijkstra`] over the edges whose row keeps some residual capacity
    /// (`residual`: per arc, per site), when given.
    fn dijkstra_within(&mut self, s: usize, residual: Option<(&[f64], &[f64])>) {
        let len = |r: Row| match r {
            Row::Arc(a) => self.arc_len[a],
            Row::Site(v) => self.site_len[v],
        };
        let open = |r: Row| match (r, residual) {
            (_, None) => true,
            (Row::Arc(a), Some((ra, _))) => ra[a] > 0.0,
            (Row::Site(v), Some((_, rs))) => rs[v] > 0.0,
        };
        self.dist.fill(f64::INFINITY);
        self.pred.fill(usize::MAX);
        let mut heap = BinaryHeap::new();
        self.dist[2 * s] = 0.0;
        heap.push(Entry(0.0, 2 * s));
        while let Some(Entry(d, u)) = heap.pop() {
            if d > self.dist[u] {
                continue;
            }
            for e in self.layers.start[u]..self.layers.start[u + 1] {
                let w = self.layers.to[e];
                if !open(self.layers.row[e]) {
                    continue;
                }
                let nd = d + len(self.layers.row[e]);
                if nd < self.dist[w] {
                    self.dist[w] = nd;
                    self.pred[w] = e;
                    heap.push(Entry(nd, w));
                }
            }
        }
    }

    /// The walk to site `t` (processed) in the last tree: its arcs in walk order and its
    /// processing site.
    fn walk_to(&self, t: usize) -> (Vec<usize>, usize) {
        let mut arcs = Vec::new();
        let mut site = usize::MAX;
        let mut node = 2 * t + 1;
        while self.pred[node] != usize::MAX {
            let e = self.pred[node];
            match self.layers.row[e] {
                Row::Arc(a) => {
                    arcs.push(a);
                    node = 2 * self.net.arcs[a].from.0 + (node & 1);
                }
                Row::Site(v) => {
                    site = v;
                    node = 2 * v;
                }
            }
        }
        arcs.reverse();
        (arcs, site)
    }

    /// Renormalises the stored lengths when one has grown past [`RENORM`]; returns the
    /// factor they were divided by (1 when nothing changed).
    fn renormalise(&mut self) -> f64 {
        let top = self
            .arc_len
            .iter()
            .chain(&self.site_len)
            .chain(&self.dem_len)
            .fold(0.0, |m: f64, &x| m.max(x));
        if top <= RENORM {
            return 1.0;
        }
        let k = RENORM;
        for x in self
            .arc_len
            .iter_mut()
            .chain(self.site_len.iter_mut())
            .chain(self.dem_len.iter_mut())
        {
            *x /= k;
        }
        k
    }

    /// Routes, for each `(demand, walk)` of one origin, its bottleneck amount, all scaled
    /// together so that no row receives more than its capacity, and grows the lengths.
    fn route(&mut self, picked: Vec<(usize, Vec<usize>, usize)>) {
        let net = self.net;
        let mut amounts = Vec::with_capacity(picked.len());
        let mut add_arc: HashMap<usize, f64> = HashMap::new();
        let mut add_site: HashMap<usize, f64> = HashMap::new();
        for (d, arcs, site) in &picked {
            let mut mult: HashMap<usize, f64> = HashMap::new();
            for &a in arcs {
                *mult.entry(a).or_insert(0.0) += 1.0;
            }
            let mut amount = self.bound[*d].min(net.sites[*site].processing);
            for (&a, &m) in &mult {
                amount = amount.min(net.arcs[a].capacity / m);
            }
            for (&a, &m) in &mult {
                *add_arc.entry(a).or_insert(0.0) += amount * m;
            }
            *add_site.entry(*site).or_insert(0.0) += amount;
            amounts.push(amount);
        }
        let mut sigma: f64 = 1.0;
        for (&a, &x) in &add_arc {
            sigma = sigma.max(x / net.arcs[a].capacity);
        }
        for (&v, &x) in &add_site {
            sigma = sigma.max(x / net.sites[v].processing);
        }
        let eps = self.eps;
        for (&a, &x) in &add_arc {
            let x = x / sigma;
            self.arc_load[a] += x;
            self.arc_len[a] *= 1.0 + eps * x / net.arcs[a].capacity;
        }
        for (&v, &x) in &add_site {
            let x = x / sigma;
            self.site_load[v] += x;
            self.site_len[v] *= 1.0 + eps * x / net.sites[v].processing;
        }
        for ((d, arcs, site), amount) in picked.into_iter().zip(amounts) {
            let x = amount / sigma;
            self.dem_load[d] += x;
            self.dem_len[d] *= 1.0 + eps * x / self.bound[d];
            let next = self.flow.len();
            let key = (d, site, arcs);
            let k = *self.walk_index.entry(key.clone()).or_insert(next);
            if k == next {
                self.walks.push(key);
                self.flow.push(0.0);
            }
            self.flow[k] += x;
        }
    }

    /// The largest raw overload `load / cap` of any row (at least 1).
    fn overload(&self) -> f64 {
        let mut u: f64 = 1.0;
        for (a, &x) in self.arc_load.iter().enumerate() {
            if x > 0.0 {
                u = u.max(x / self.net.arcs[a].capacity);
            }
        }
        for (v, &x) in self.site_load.iter().enumerate() {
            if x > 0.0 {
                u = u.max(x / self.net.sites[v].processing);
            }
        }
        for (d, &x) in self.dem_load.iter().enumerate() {
            if x > 0.0 {
                u = u.max(x / self.bound[d]);
            }
        }
        u
    }

    /// The walks with flow scaled by `factor`, as the verifier reads them.
    fn verify_walks(&self, factor: f64) -> Vec<verify::Walk> {
        self.walks
            .iter()
            .zip(&self.flow)
            .map(|((d, site, arcs), &f)| verify::Walk {
                sink: verify::Sink::Demand(*d),
                arcs: arcs.clone(),
                site: *site,
                amount: f * factor,
            })
            .collect()
    }
}

/// The smallest value over `θ >= 0` of `θ·a + Σ_d b_d·max(0, 1 − θ·c_d)` (`terms` holds
/// `(b_d, c_d)` with `c_d >= 0`), with its minimiser: the certificate's bound for prices
/// `θ·l` (a convex piecewise-linear function; its breakpoints are `1/c_d`).
/// O(terms·log terms).
pub fn best_scale(a: f64, terms: &[(f64, f64)]) -> (f64, f64) {
    let value = |th: f64| {
        th * a
            + terms
                .iter()
                .map(|&(b, c)| b * (1.0 - th * c).max(0.0))
                .sum::<f64>()
    };
    let mut cs: Vec<(f64, f64)> = terms.iter().copied().filter(|t| t.1 > 0.0).collect();
    // Breakpoints in increasing θ = 1/c, i.e. decreasing c.
    cs.sort_by(|x, y| y.1.total_cmp(&x.1));
    // Slope just after θ = 0: a − Σ b·c; each breakpoint passed adds b·c back.
    let mut slope = a - cs.iter().map(|&(b, c)| b * c).sum::<f64>();
    let mut theta = 0.0;
    for &(b, c) in &cs {
        if slope >= 0.0 {
            break;
        }
        theta = 1.0 / c;
        slope += b * c;
    }
    (value(theta), theta)
}

/// The starting length of a row of capacity `c`: `1/c`, or 0 for a row without capacity
/// (it bounds nothing, so no walk pays for it). O(1).
fn initial_len(c: f64) -> f64 {
    if c > 0.0 { 1.0 / c } else { 0.0 }
}

/// What every run on one outage and one quantity starts from: the demand caps, which
/// demands are active, the at-stake total, the aimed width and the presolved capacities.
pub(crate) struct Setup {
    /// Per demand: its cap for this quantity (required or volume), surviving or not.
    all: Vec<f64>,
    /// Per demand: its cap when it survives and can be served at all, else 0.
    bound: Vec<f64>,
    /// The demands with a positive `bound`, in file order.
    active: Vec<usize>,
    /// Σ caps of the surviving demands ([`super::at_stake`]).
    at_stake: f64,
    /// `ε × at_stake`: the widest interval the engine accepts as its answer.
    target: f64,
    /// Presolved arc and site capacities (valid for the certificate).
    arc_cap: Vec<f64>,
    site_cap: Vec<f64>,
    /// Per origin site: its active demands in file order.
    by_origin: Vec<Vec<usize>>,
}

impl Setup {
    /// The setup of `view` for demand caps `cap` and width `eps`. O(sites + arcs +
    /// demands) plus the reachability test of [`Surviving::unservable`].
    fn new(net: &Network, view: &Surviving, cap: Cap, eps: f64) -> Setup {
        let all = caps_of(net, cap);
        let unservable = view.unservable(net, &all);
        let bound: Vec<f64> = (0..net.demands.len())
            .map(|d| {
                if view.demand_alive(net, d) && unservable[d].is_none() {
                    all[d]
                } else {
                    0.0
                }
            })
            .collect();
        let active: Vec<usize> = (0..net.demands.len()).filter(|&d| bound[d] > 0.0).collect();
        let at_stake = super::at_stake(net, view, &all);
        let (arc_cap, site_cap) = flow::presolved_caps(net, view, cap);
        // Origins in site order, each with its demands in file order.
        let mut by_origin: Vec<Vec<usize>> = vec![Vec::new(); net.sites.len()];
        for &d in &active {
            by_origin[net.demands[d].from].push(d);
        }
        Setup {
            all,
            bound,
            active,
            at_stake,
            target: eps * at_stake,
            arc_cap,
            site_cap,
            by_origin,
        }
    }
}

impl<'a> State<'a> {
    /// A run's state before any flow: lengths `1/cap` ([`initial_len`]), no load, no walk.
    /// O(sites + arcs + demands).
    fn new(net: &'a Network, view: &Surviving, bound: &'a [f64], eps: f64) -> State<'a> {
        let n = net.sites.len();
        State {
            net,
            layers: Layers::new(net, view),
            arc_len: net.arcs.iter().map(|a| initial_len(a.capacity)).collect(),
            site_len: net
                .sites
                .iter()
                .map(|s| initial_len(s.processing))
                .collect(),
            dem_len: bound.iter().map(|&b| initial_len(b)).collect(),
            arc_load: vec![0.0; net.arcs.len()],
            site_load: vec![0.0; n],
            dem_load: vec![0.0; net.demands.len()],
            bound,
            eps,
            walk_index: HashMap::new(),
            walks: Vec::new(),
            flow: Vec::new(),
            dist: vec![0.0; 2 * n],
            pred: vec![0; 2 * n],
        }
    }
}

/// Solves the packing LP of `view` with demand caps `cap` by the scheme of the module
/// documentation and verifies the answer: the repaired walks are the lower bound, the
/// certificate with the final (scaled) lengths the upper bound. `proven` only when they
/// meet within [`super::GAP_TOL`]. `eps` must satisfy [`epsilon_ok`].
///
/// Cost: see the module documentation. The result is what [`finish()`](super::finish()) takes, as for the
/// other engines.
pub fn solve_approx(net: &Network, view: &Surviving, cap: Cap, eps: f64) -> Result<Verified> {
    if !epsilon_ok(eps) {
        return Err(Error::Usage(format!(
            "--epsilon must be > 0 and at most {MAX_EPSILON}, got {eps}"
        )));
    }
    let n = net.sites.len();
    let Setup {
        all,
        bound,
        active,
        at_stake,
        target,
        arc_cap,
        site_cap,
        by_origin,
    } = Setup::new(net, view, cap, eps);
    let origins: Vec<usize> = (0..n).filter(|&s| !by_origin[s].is_empty()).collect();
    let mut st = State::new(net, view, &bound, eps);

    // The standard analysis: δ, the scale of the lengths, and the phase count.
    let rows_on_walk = 2.0 * n as f64 + 2.0;
    let ln_delta = (1.0 + eps).ln() - ((1.0 + eps) * rows_on_walk).ln() / eps;
    let standard_phases = ((1.0 + eps).ln() - ln_delta) / (1.0 + eps).ln();
    let max_phases = (MAX_PHASE_FACTOR * standard_phases).ceil() as usize + 1;
    let mut scale = ln_delta; // length = stored · e^scale
    // Per demand: the (arc + site) length of its last cheapest walk, stored units.
    let mut walk_len = vec![0.0; net.demands.len()];

    // First pass: the shortest walk lengths, α's start.
    let mut alpha = f64::INFINITY;
    for &s in &origins {
        st.dijkstra(s);
        for &d in &by_origin[s] {
            let t = net.demands[d].to.0;
            walk_len[d] = st.dist[2 * t + 1];
            alpha = alpha.min(walk_len[d] + st.dem_len[d]);
        }
    }
    let mut phases = 0;
    let mut next_check = 1;
    // The best allocation and cut seen at the checks, and whether the walks moved since.
    let mut best = bounds::Best::default();
    let mut fresh = false;
    let mut standard_done = false;
    while !origins.is_empty() && alpha.is_finite() && phases < max_phases {
        // A phase on a large network takes well under a second: Ctrl-C is seen in time.
        super::cancel::check()?;
        phases += 1;
        let mut limit = (1.0 + eps) * alpha;
        let mut seen = f64::INFINITY;
        for &s in &origins {
            loop {
                st.dijkstra(s);
                let mut picked = Vec::new();
                let mut least = f64::INFINITY;
                for &d in &by_origin[s] {
                    let t = net.demands[d].to.0;
                    walk_len[d] = st.dist[2 * t + 1];
                    let len = walk_len[d] + st.dem_len[d];
                    if len < limit {
                        let (arcs, site) = st.walk_to(t);
                        picked.push((d, arcs, site));
                    } else {
                        least = least.min(len);
                    }
                }
                if picked.is_empty() {
                    seen = seen.min(least);
                    break;
                }
                st.route(picked);
                let k = st.renormalise();
                if k != 1.0 {
                    scale += k.ln();
                    limit /= k;
                    seen /= k;
                    for w in &mut walk_len {
                        *w /= k;
                    }
                }
            }
        }
        // Every walk is now at least `seen` long (lengths only grow), and `seen >= limit`.
        alpha = seen.max(limit);
        // D(l) >= 1: the standard stopping rule.
        let d_stored: f64 = st
            .arc_len
            .iter()
            .enumerate()
            .map(|(a, &l)| net.arcs[a].capacity * l)
            .chain(
                st.site_len
                    .iter()
                    .enumerate()
                    .map(|(v, &l)| net.sites[v].processing * l),
            )
            .chain(active.iter().map(|&d| bound[d] * st.dem_len[d]))
            .sum();
        if !standard_done && d_stored.ln() + scale >= 0.0 {
            standard_done = true;
        }
        fresh = false;
        if standard_done || phases >= next_check {
            next_check = phases + phases.div_ceil(4);
            let (lower, upper) = estimate(
                &mut st, &by_origin, &active, &walk_len, &arc_cap, &site_cap, &mut best,
            );
            fresh = true;
            if upper.min(at_stake) - lower <= target {
                break;
            }
        }
    }
    Ok(verified(
        net,
        view,
        &mut st,
        &by_origin,
        &all,
        &active,
        &walk_len,
        &arc_cap,
        &site_cap,
        at_stake,
        eps,
        (best, fresh),
    ))
}

#[cfg(test)]
mod tests;
