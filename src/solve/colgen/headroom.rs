//! Growth headroom on the walk engine: the maximum concurrent flow of the two-layer model
//! by column generation over processing walks, with one variable λ for every demand.
//!
//! **Master** (maximise λ): per usable class arc `Σ mult(w, a)·f_w ≤ cap_a`, per site
//! `Σ_{w at v} f_w ≤ proc_v`, per surviving demand with `required_d > 0`
//! `λ·required_d − Σ_{w of d} f_w ≤ 0`, and `0 ≤ λ ≤ Λ` (the a-priori ceiling of
//! [`crate::solve::concurrent`]). Capacities are the presolved ones (`cap ∧ 2Λ·Σ required`
//! per arc, `proc ∧ Λ·Σ required` per site), which no allocation at λ ≤ Λ exceeds. By the
//! flow decomposition of [`super`] it has the optimum of the edge λ-LP.
//!
//! **Pricing.** With arc duals `y`, site duals `z` and demand duals `u` (all `≥ 0`), the
//! column of a walk `w` of `d` has reduced cost `u_d − price(w)`, so the walk engine's
//! pricing pass (`price` of the walk engine) at `y`, `z` with demand duals `1 − u_d` finds the
//! improving walks (`u_d − c_d > PRICE_TOL`). The duals are multiplied by `Σ required`
//! first (so that `Σ_d required_d·u_d/Σ required = 1` at an optimum and the absolute
//! [`super::PRICE_TOL`] compares amounts of order one). The same pass gives every demand's
//! cheapest walk `c_d`, hence the concurrent-flow dual bound
//! `λ ≤ (Σ cap·y + Σ proc·z) / Σ_d required_d·c_d` of [`crate::solve::concurrent`]; the loop
//! stops when it meets the master's λ within [`super::GAP_TOL`].
//!
//! **Start.** The columns of a parent (the baseline's optimum) that survive the outage, at
//! their flows (scaled down uniformly if the outage's presolved capacities are smaller),
//! with λ at 0; a first simplex pivot raises λ to what they serve. Before any master is
//! solved, the surviving columns and the parent's prices are verified on the outage as
//! they are (one repair and one certificate): when no flow-carrying parent walk touches a
//! failed element and the surviving demands are the same, they prove the parent's λ
//! without an LP. Otherwise the flow the outage cuts is re-routed greedily (the walk
//! engine's repair: shortest-hop augmenting walks through what the surviving walks leave)
//! until every active demand is back at the parent's factor; when it all fits, the parent's
//! prices on the outage prove it, again without an LP (an outage can only lower λ when
//! the surviving demands are the same). What the repair found starts the master when they
//! do not.
//!
//! **Verification** (independent of the master): the walks, split back onto the real links,
//! are scaled into the real capacities ([`crate::solve::verify::repair_walks`]); the least
//! `flow_d / required_d` is the lower bound. The prices give the upper bound through
//! [`crate::solve::concurrent::upper_bound`] (petgraph's Dijkstra). An interval that does
//! not close within [`crate::tol::PROOF_GAP_TOL`], a stalled generation, or a master beyond
//! [`super::WARM_ROWS`] rows (unless the `highs` feature's warm HiGHS master takes it) or
//! [`super::MAX_ROUNDS`] rounds returns `None`; the caller then solves the edge λ-LP.
//!
//! Determinism: walks are added in demand order and the simplex is deterministic, so the
//! answer depends only on the network, the outage and the parent.

use std::collections::HashSet;

use super::warm::{MasterLp, large_master_lp};
use super::{GAP_TOL, Graph, MAX_ROUNDS, Solved, WARM_ROWS, Walk, price};
use crate::error::Result;
use crate::model::Network;
use crate::solve::concurrent::{Headroom, Setup, decide, upper_bound};
use crate::solve::simplex::Column;
use crate::solve::simplex::Simplex;
use crate::solve::surviving::Surviving;

/// A verified headroom optimum in real arcs: its walks with flows and the prices that
/// certified it (the start of child outages).
#[derive(Debug, Clone, Default)]
pub struct Columns {
    pub walks: Vec<Walk>,
    pub flow: Vec<f64>,
    /// Per arc of `Network::arcs`.
    pub arc_price: Vec<f64>,
    /// Per site.
    pub site_price: Vec<f64>,
}

/// How much work one headroom solve did.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Work {
    /// Decided by the parent's columns and prices without a master.
    pub inherited: bool,
    /// Decided without a master by the parent's surviving columns with the cut flow
    /// re-routed greedily, certified by the parent's prices.
    pub repaired: bool,
    /// Master solves.
    pub lp_solves: usize,
    /// Pricing rounds.
    pub rounds: usize,
}

/// The headroom of the outage `view` by column generation (module documentation), from
/// `parent` when given. `Ok(None)` when it does not prove its answer (the caller falls
/// back to the edge λ-LP); `setup` must be the outage's [`crate::solve::concurrent::setup`].
///
/// Cost: one repair and one certificate for the start, then per round one warm simplex
/// re-optimisation of a master of at most arcs + sites + demands rows and one pricing
/// pass (2 · min(processing sites, distinct ends) Dijkstras).
pub fn solve(
    net: &Network,
    view: &Surviving,
    setup: &Setup,
    parent: Option<&Columns>,
    work: &mut Work,
) -> Result<Option<(Headroom, Columns)>> {
    let g = Graph::new(net, view);
    let caps = setup_caps(net, setup);
    let limit = setup.ceiling * setup.total_required;
    let real_caps = presolved_real(net, limit);

    // The parent's columns and prices, as they are, on this outage.
    let mut start: Vec<(Walk, f64)> = Vec::new();
    if let Some(p) = parent {
        for (w, &f) in p.walks.iter().zip(&p.flow) {
            if f > 0.0 && caps[w.demand] > 0.0 && w.survives(&g) {
                start.push((w.clone(), f));
            }
        }
        let cols = Columns {
            walks: start.iter().map(|(w, _)| w.clone()).collect(),
            flow: start.iter().map(|(_, f)| *f).collect(),
            arc_price: p.arc_price.clone(),
            site_price: p.site_price.clone(),
        };
        let h = certified(net, view, setup, &real_caps, &cols);
        if h.proven {
            work.inherited = true;
            return Ok(Some((h, cols)));
        }
        // The parent's walks the outage cut, re-routed greedily through what the surviving
        // walks leave (each demand back to the parent's factor); proven by the parent's
        // prices when nothing was lost for good.
        if let Some((h, cols)) = repaired(&g, net, view, setup, &real_caps, p, &start) {
            if h.proven {
                work.repaired = true;
                return Ok(Some((h, cols)));
            }
            start = cols.walks.into_iter().zip(cols.flow).collect();
        }
    }

    let rows = g.usable.len() + g.procs.len() + setup.active.len();
    let lp: Box<dyn MasterLp> = if rows <= WARM_ROWS {
        Box::new(Simplex::new())
    } else {
        match large_master_lp() {
            Some(lp) => lp,
            None => return Ok(None),
        }
    };
    // Class arcs carry their class's capacity.
    let arc_cap: Vec<f64> = g.class_cap.iter().map(|c| c.min(2.0 * limit)).collect();
    let site_cap: Vec<f64> = net.sites.iter().map(|s| s.processing.min(limit)).collect();
    let mut m = Master::new(&g, setup, arc_cap, site_cap, lp);
    // Start columns in class arcs, scaled into the presolved capacities if need be.
    let lifted: Vec<(Walk, f64)> = start
        .iter()
        .filter_map(|(w, f)| g.lift(w).map(|w| (w, *f)))
        .collect();
    let factor = m.fit(&lifted);
    for (w, f) in lifted {
        m.column(w, f * factor);
    }
    // Every active demand gets its cheapest walk at the parent's prices (zero prices
    // without a parent) as a column at 0, so the first master serves them all; without
    // these, each round would price only the demands its degenerate duals name.
    let zero = (vec![0.0; net.arcs.len()], vec![0.0; net.sites.len()]);
    let (y0, z0) = match parent {
        Some(p) => (
            p.arc_price
                .iter()
                .map(|&y| y.max(0.0))
                .collect::<Vec<f64>>(),
            p.site_price
                .iter()
                .map(|&z| z.max(0.0))
                .collect::<Vec<f64>>(),
        ),
        None => zero,
    };
    // Class prices: a class arc takes its cheapest member's price.
    let mut y0c = y0.clone();
    for &r in &g.usable {
        for &a in &g.members[r] {
            y0c[r] = y0c[r].min(y0[a]);
        }
    }
    let every = vec![f64::NEG_INFINITY; net.demands.len()];
    work.rounds += 1;
    for w in price(&g, &caps, &y0c, &z0, Some(&every)).walks {
        m.column(w, 0.0);
    }
    m.run(net, view, setup, &real_caps, &caps, work)
}

/// The parent's columns on the outage with the flow the outage cuts re-routed: the parent's
/// factor `λp = min_d parent flow_d / required_d` over the outage's active demands, each
/// demand's shortfall `λp·required_d − surviving flow_d` re-routed by the walk engine's
/// greedy repair (shortest-hop augmenting walks through the residual capacity of the
/// surviving walks `start`), then [`certified`] with the parent's prices. `None` when no
/// active demand lost flow. O(augmentations · (sites + arcs) + one certificate).
fn repaired(
    g: &Graph,
    net: &Network,
    view: &Surviving,
    setup: &Setup,
    real_caps: &(Vec<f64>, Vec<f64>),
    parent: &Columns,
    start: &[(Walk, f64)],
) -> Option<(Headroom, Columns)> {
    let mut had = vec![0.0; net.demands.len()];
    for (w, &f) in parent.walks.iter().zip(&parent.flow) {
        had[w.demand] += f.max(0.0);
    }
    let target = setup
        .active
        .iter()
        .map(|&d| had[d] / setup.required[d])
        .fold(f64::INFINITY, f64::min);
    if !(target.is_finite() && target > 0.0) {
        return None;
    }
    let mut walks: Vec<Walk> = Vec::with_capacity(start.len());
    let mut flow: Vec<f64> = Vec::with_capacity(start.len());
    let mut kept = vec![0.0; net.demands.len()];
    for (w, f) in start {
        if let Some(c) = g.lift(w) {
            kept[w.demand] += f;
            walks.push(c);
            flow.push(*f);
        }
    }
    let mut lost = vec![0.0; net.demands.len()];
    for &d in &setup.active {
        lost[d] = (target * setup.required[d] - kept[d]).max(0.0);
    }
    if lost.iter().all(|&l| l <= 0.0) {
        return None;
    }
    let eps = super::FLOW_EPS * setup.total_required.max(1.0);
    super::repair(g, &mut walks, &mut flow, &lost, eps);
    let solved = g.split(Solved {
        walks,
        flow,
        value: 0.0,
        arc_price: parent.arc_price.clone(),
        site_price: parent.site_price.clone(),
    });
    // The parent's prices are per real arc already.
    let cols = Columns {
        walks: solved.walks,
        flow: solved.flow,
        arc_price: parent.arc_price.clone(),
        site_price: parent.site_price.clone(),
    };
    Some((certified(net, view, setup, real_caps, &cols), cols))
}

/// Per demand: `required_d` when it is active in `setup`, else 0 (the pricing's caps).
fn setup_caps(net: &Network, setup: &Setup) -> Vec<f64> {
    let mut caps = vec![0.0; net.demands.len()];
    for &d in &setup.active {
        caps[d] = setup.required[d];
    }
    caps
}

/// Real-arc and site capacities no allocation serving at most `limit` in all exceeds:
/// `cap ∧ 2·limit` per arc (a walk crosses an arc at most twice), `proc ∧ limit` per site.
fn presolved_real(net: &Network, limit: f64) -> (Vec<f64>, Vec<f64>) {
    (
        net.arcs
            .iter()
            .map(|a| a.capacity.min(2.0 * limit))
            .collect(),
        net.sites.iter().map(|s| s.processing.min(limit)).collect(),
    )
}

/// The verified interval of `cols` (real arcs) on `view`: lower bound from the walks scaled
/// into the real capacities, upper bound from the prices (module documentation), residual
/// the walks' largest relative overload as they came. O(Σ walk lengths + one certificate).
fn certified(
    net: &Network,
    view: &Surviving,
    setup: &Setup,
    real_caps: &(Vec<f64>, Vec<f64>),
    cols: &Columns,
) -> Headroom {
    let unbounded = vec![f64::INFINITY; net.demands.len()];
    let repaired = super::repair_columns(net, &cols.walks, &cols.flow, &unbounded);
    let lower = setup
        .active
        .iter()
        .map(|&d| repaired.demand_flow[d] / setup.required[d])
        .fold(f64::INFINITY, f64::min)
        .max(0.0);
    let l = super::loads(net, &cols.walks, &cols.flow);
    let residual = super::capacity_residual(net, &l.arc, &l.site);
    let caps = (real_caps.0.as_slice(), real_caps.1.as_slice());
    let upper = upper_bound(
        net,
        view,
        caps,
        &setup.active,
        &cols.arc_price,
        &cols.site_price,
    )
    .min(setup.ceiling);
    decide(lower, upper, residual)
}

const NO_ROW: usize = usize::MAX;

/// The restricted master kept by a warm LP (the bounded simplex, or HiGHS above
/// [`WARM_ROWS`] rows with the `highs` feature): demand rows for every active demand,
/// arc and site rows created when a column first needs them, λ as column 0.
struct Master<'a, 'g> {
    g: &'g Graph<'a>,
    arc_cap: Vec<f64>,
    site_cap: Vec<f64>,
    lp: Box<dyn MasterLp>,
    arc_row: Vec<usize>,
    site_row: Vec<usize>,
    dem_row: Vec<usize>,
    /// Column `j + 1` is `walks[j]`.
    walks: Vec<Walk>,
    seen: HashSet<Walk>,
}

impl<'a, 'g> Master<'a, 'g> {
    fn new(
        g: &'g Graph<'a>,
        setup: &Setup,
        arc_cap: Vec<f64>,
        site_cap: Vec<f64>,
        mut lp: Box<dyn MasterLp>,
    ) -> Self {
        let net = g.net;
        let mut dem_row = vec![NO_ROW; net.demands.len()];
        let mut entries = Vec::with_capacity(setup.active.len());
        for &d in &setup.active {
            dem_row[d] = lp.add_row(0.0);
            entries.push((dem_row[d], setup.required[d]));
        }
        lp.add_col(Column::new(1.0, 0.0, setup.ceiling, 0.0), entries);
        Master {
            g,
            arc_cap,
            site_cap,
            lp,
            arc_row: vec![NO_ROW; net.arcs.len()],
            site_row: vec![NO_ROW; net.sites.len()],
            dem_row,
            walks: Vec::new(),
            seen: HashSet::new(),
        }
    }

    /// The largest factor ≤ 1 by which `start` (class arcs) fits the master's capacities.
    /// O(Σ walk lengths).
    fn fit(&self, start: &[(Walk, f64)]) -> f64 {
        let net = self.g.net;
        let mut arc_load = vec![0.0; net.arcs.len()];
        let mut site_load = vec![0.0; net.sites.len()];
        for (w, f) in start {
            site_load[w.site] += f;
            for &(a, k) in &w.arcs {
                arc_load[a] += f64::from(k) * f;
            }
        }
        let mut factor: f64 = 1.0;
        for (load, cap) in arc_load
            .iter()
            .zip(&self.arc_cap)
            .chain(site_load.iter().zip(&self.site_cap))
        {
            if *load > *cap {
                factor = factor.min(cap / load);
            }
        }
        // Rounding of the sums above: stay a few ulps inside.
        factor * (1.0 - 8.0 * f64::EPSILON)
    }

    /// Adds walk `w` as a column at flow `f` (rows created as needed); a walk already
    /// present is skipped.
    fn column(&mut self, w: Walk, f: f64) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        let mut entries = Vec::with_capacity(w.arcs.len() + 2);
        for &(a, k) in &w.arcs {
            if self.arc_row[a] == NO_ROW {
                self.arc_row[a] = self.lp.add_row(self.arc_cap[a]);
            }
            entries.push((self.arc_row[a], f64::from(k)));
        }
        if self.site_row[w.site] == NO_ROW {
            self.site_row[w.site] = self.lp.add_row(self.site_cap[w.site]);
        }
        entries.push((self.site_row[w.site], 1.0));
        entries.push((self.dem_row[w.demand], -1.0));
        let c = Column::new(0.0, 0.0, f64::INFINITY, f.max(0.0));
        self.lp.add_col(c, entries);
        self.walks.push(w);
    }

    fn dual(&self, row: usize) -> f64 {
        if row == NO_ROW {
            0.0
        } else {
            self.lp.dual(row).max(0.0)
        }
    }

    /// Rounds of master solve and pricing until the dual bound meets λ; then the answer
    /// verified on the real links.
    fn run(
        mut self,
        net: &Network,
        view: &Surviving,
        setup: &Setup,
        real_caps: &(Vec<f64>, Vec<f64>),
        caps: &[f64],
        work: &mut Work,
    ) -> Result<Option<(Headroom, Columns)>> {
        let scale = setup.total_required;
        loop {
            let (rows, limit) = (self.lp.rows(), self.lp.row_limit());
            let solved = super::round::solve_round(rows, limit, true, |pivots| {
                work.lp_solves += 1;
                self.lp.solve(pivots)
            })?;
            if !solved {
                return Ok(None);
            }
            let lambda = self.lp.value(0);
            let y: Vec<f64> = self.arc_row.iter().map(|&r| scale * self.dual(r)).collect();
            let z: Vec<f64> = self
                .site_row
                .iter()
                .map(|&r| scale * self.dual(r))
                .collect();
            // Pricing's demand duals: a walk of d improves when u_d − c_d > PRICE_TOL,
            // i.e. 1 − c_d − (1 − u_d) > PRICE_TOL.
            let u: Vec<f64> = self
                .dem_row
                .iter()
                .map(|&r| {
                    if r == NO_ROW {
                        f64::INFINITY
                    } else {
                        1.0 - scale * self.dual(r)
                    }
                })
                .collect();
            work.rounds += 1;
            let p = price(self.g, caps, &y, &z, Some(&u));
            let worth: f64 = self
                .g
                .usable
                .iter()
                .map(|&a| self.arc_cap[a] * y[a])
                .sum::<f64>()
                + self
                    .g
                    .procs
                    .iter()
                    .map(|&v| self.site_cap[v] * z[v])
                    .sum::<f64>();
            let priced: f64 = setup
                .active
                .iter()
                .map(|&d| setup.required[d] * p.cost[d])
                .sum();
            let bound = if priced > 0.0 && priced.is_finite() {
                (worth / priced).min(setup.ceiling)
            } else {
                setup.ceiling
            };
            if bound - lambda <= GAP_TOL * bound.max(f64::MIN_POSITIVE) {
                let flow: Vec<f64> = (0..self.walks.len())
                    .map(|j| self.lp.value(j + 1).max(0.0))
                    .collect();
                let solved = self.g.split(Solved {
                    walks: self.walks,
                    flow,
                    value: lambda,
                    arc_price: y,
                    site_price: z,
                });
                let cols = Columns {
                    walks: solved.walks,
                    flow: solved.flow,
                    arc_price: solved.arc_price,
                    site_price: solved.site_price,
                };
                let h = certified(net, view, setup, real_caps, &cols);
                return Ok(h.proven.then_some((h, cols)));
            }
            if work.rounds >= MAX_ROUNDS {
                return Ok(None);
            }
            let fresh: Vec<Walk> = p
                .walks
                .into_iter()
                .filter(|w| !self.seen.contains(w))
                .collect();
            if fresh.is_empty() {
                return Ok(None);
            }
            for w in fresh {
                self.column(w, 0.0);
            }
        }
    }
}
