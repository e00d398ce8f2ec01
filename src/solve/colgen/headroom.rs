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
//! with λ at what they serve (a feasible point, so the simplex starts from it). The
//! demands whose flow-carrying parent walks all survive are held in one bundle at a
//! common factor θ (one column and one row `λ − θ ≤ 0` for all of them, their walks scaled
//! to the parent's factor), so the master has a demand row only for the demands the
//! outage touched; bundled demands whose walks the prices show to be dearer than their
//! cheapest walk are freed and the master built again from its point (module `master`).
//! The bound is priced over every active demand, so the optimum is the full one.
//!
//! Before any master is solved, the surviving columns and the parent's prices are
//! verified on the outage as they are (one repair and one certificate): when no flow-carrying parent walk touches a
//! failed element and the surviving demands are the same, they prove the parent's λ
//! without an LP. Otherwise the flow the outage cuts is re-routed greedily (the walk
//! engine's repair: shortest-hop augmenting walks through what the surviving walks leave)
//! until every active demand is back at the parent's factor; when it all fits, the parent's
//! prices on the outage prove it, again without an LP (an outage can only lower λ when
//! the surviving demands are the same). When it does not fit, the parent's prices still
//! bound this outage's λ (the certificate's quotient on the outage); every demand is then
//! brought to that bound instead (its surviving walks scaled down to it first, the rest
//! re-routed the same way), and when that fits the same prices prove it, again without an
//! LP. What the repair found starts the master when they do not.
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

pub(crate) mod master;

use super::{Graph, Solved, Walk, price};
use crate::error::Result;
use crate::model::Network;
use crate::solve::concurrent::{Headroom, Setup, decide, upper_bound};
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
    /// Decided without a master by every demand brought to the bound of the parent's
    /// prices on this outage (below the parent's factor): surviving walks scaled down,
    /// the rest re-routed greedily; certified by those prices.
    pub lowered: bool,
    /// Master solves.
    pub lp_solves: usize,
    /// Pricing rounds.
    pub rounds: usize,
    /// Active demands the first master held in its bundle (walks the outage left whole,
    /// one common factor; see `master`).
    pub bundled: usize,
    /// Masters built again because bundled demands had to be freed.
    pub freed: usize,
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
        let upper = h.upper;
        if let Some((h, cols)) = repaired(&g, net, view, setup, &real_caps, p, &start, None) {
            if h.proven {
                work.repaired = true;
                return Ok(Some((h, cols)));
            }
            // The parent's prices bound this outage's λ by `upper`, below the parent's
            // factor: every demand brought to `upper` instead (surviving walks scaled down
            // first, which frees room); proven by the same prices when it all fits.
            let lowered = repaired(&g, net, view, setup, &real_caps, p, &start, Some(upper));
            match lowered {
                Some((h, cols)) if h.proven => {
                    work.lowered = true;
                    return Ok(Some((h, cols)));
                }
                _ => start = cols.walks.into_iter().zip(cols.flow).collect(),
            }
        }
    }

    // Class arcs carry their class's capacity.
    let arc_cap: Vec<f64> = g.class_cap.iter().map(|c| c.min(2.0 * limit)).collect();
    let site_cap: Vec<f64> = net.sites.iter().map(|s| s.processing.min(limit)).collect();
    // Start columns in class arcs; the demands the outage left whole go into the bundle.
    let lifted: Vec<(Walk, f64)> = start
        .iter()
        .filter_map(|(w, f)| g.lift(w).map(|w| (w, *f)))
        .collect();
    let pricing = TwoLayer {
        g: &g,
        caps: &caps,
        arc_cap,
        site_cap,
    };
    let (cols, bundle) = match parent {
        Some(p) => master::bundle_of(&pricing, setup, (&p.walks, &p.flow), lifted),
        None => (lifted, master::Bundle::empty(net.demands.len())),
    };
    work.bundled = bundle.members();
    // Every active demand outside the bundle gets its cheapest walk at the parent's prices
    // (zero prices without a parent) as a column at 0, so the first master serves them
    // all; without these, each round would price only the demands its degenerate duals
    // name.
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
    let mut seed_caps = caps.clone();
    for (d, c) in seed_caps.iter_mut().enumerate() {
        if bundle.member[d] {
            *c = 0.0;
        }
    }
    let every = vec![f64::NEG_INFINITY; net.demands.len()];
    work.rounds += 1;
    let mut cols = cols;
    cols.extend(
        price(&g, &seed_caps, &y0c, &z0, Some(&every))
            .walks
            .into_iter()
            .map(|w| (w, 0.0)),
    );
    let cg = master::Generation { p: &pricing, setup };
    let Some((walks, flow, prices)) = cg.run(cols, bundle, work)? else {
        return Ok(None);
    };
    let arcs = net.arcs.len();
    let (y, z) = (prices[..arcs].to_vec(), prices[arcs..].to_vec());
    let solved = g.split(Solved {
        walks,
        flow,
        value: 0.0,
        arc_price: y,
        site_price: z,
    });
    let cols = Columns {
        walks: solved.walks,
        flow: solved.flow,
        arc_price: solved.arc_price,
        site_price: solved.site_price,
    };
    let h = certified(net, view, setup, &real_caps, &cols);
    Ok(h.proven.then_some((h, cols)))
}

/// The parent's columns on the outage with the flow the outage cuts re-routed: a target
/// factor, the parent's `λp = min_d parent flow_d / required_d` over the outage's active
/// demands (`lower` = `None`), else `lower` when it is below `λp` (then each demand's
/// surviving walks `start` are first scaled down to at most `lower·required_d`); each
/// demand's shortfall `target·required_d − surviving flow_d` re-routed by the walk engine's
/// greedy repair (shortest-hop augmenting walks through the residual capacity of the
/// surviving walks), then [`certified`] with the parent's prices. `None` when no active
/// demand lost flow, or `lower` is not below `λp`. O(augmentations · (sites + arcs) + one
/// certificate).
#[allow(clippy::too_many_arguments)]
fn repaired(
    g: &Graph,
    net: &Network,
    view: &Surviving,
    setup: &Setup,
    real_caps: &(Vec<f64>, Vec<f64>),
    parent: &Columns,
    start: &[(Walk, f64)],
    lower: Option<f64>,
) -> Option<(Headroom, Columns)> {
    let mut had = vec![0.0; net.demands.len()];
    for (w, &f) in parent.walks.iter().zip(&parent.flow) {
        had[w.demand] += f.max(0.0);
    }
    let target = master::reroute_target(setup, &had, lower)?;
    let mut walks: Vec<Walk> = Vec::with_capacity(start.len());
    let mut flow: Vec<f64> = Vec::with_capacity(start.len());
    let mut kept = vec![0.0; net.demands.len()];
    for (w, f) in start {
        if g.lift(w).is_some() {
            kept[w.demand] += f;
        }
    }
    // With a lowered target, each demand's surviving walks carry at most its share.
    let mut shrink = vec![1.0; net.demands.len()];
    if lower.is_some() {
        for &d in &setup.active {
            let want = target * setup.required[d];
            if kept[d] > want {
                shrink[d] = want / kept[d];
                kept[d] = want;
            }
        }
    }
    for (w, f) in start {
        if let Some(c) = g.lift(w) {
            walks.push(c);
            flow.push(f * shrink[w.demand]);
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

/// The two-layer walks as the λ master sees them: slots `0 .. arcs` are the class arcs
/// (row capacity `arc_cap`), slots `arcs .. arcs + sites` the sites' processing
/// (`site_cap`); pricing is the walk engine's (`price`) with the demand caps `caps`.
struct TwoLayer<'a, 'g> {
    g: &'g Graph<'a>,
    caps: &'g [f64],
    arc_cap: Vec<f64>,
    site_cap: Vec<f64>,
}

impl master::Pricing for TwoLayer<'_, '_> {
    type Walk = Walk;

    fn demand(w: &Walk) -> usize {
        w.demand
    }

    fn survives(&self, w: &Walk) -> bool {
        w.survives(self.g)
    }

    fn slots(&self) -> usize {
        self.arc_cap.len() + self.site_cap.len()
    }

    fn usable_slots(&self) -> usize {
        self.g.usable.len() + self.g.procs.len()
    }

    fn cap(&self, s: usize) -> f64 {
        let arcs = self.arc_cap.len();
        if s < arcs {
            self.arc_cap[s]
        } else {
            self.site_cap[s - arcs]
        }
    }

    fn entries(&self, w: &Walk) -> Vec<(usize, f64)> {
        let mut e: Vec<(usize, f64)> = w.arcs.iter().map(|&(a, k)| (a, f64::from(k))).collect();
        e.push((self.arc_cap.len() + w.site, 1.0));
        e
    }

    fn price(&self, y: &[f64], u: &[f64]) -> (Vec<f64>, Vec<Walk>) {
        let arcs = self.arc_cap.len();
        let p = price(self.g, self.caps, &y[..arcs], &y[arcs..], Some(u));
        (p.cost, p.walks)
    }
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
