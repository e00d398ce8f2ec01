//! Growth headroom of a network with `functions` (service chains, gains, plain traffic):
//! the maximum concurrent flow of the layered model.
//!
//! The **headroom** λ of an outage is the largest factor such that every surviving demand
//! with `required > 0` is served at `λ · required` (origin units) at the same time on the
//! layered model of [`crate::solve::chain`]: a demand with chain `f1 … fk` travels through
//! `k + 1` layers, a link crossed in layer `j` and the function `f_{j+1}` applied at the
//! end of layer `j` take `G_j = g1 · … · gj` units per origin unit; plain traffic (the
//! empty chain) is one layer and competes for the same links. No surviving required
//! demand: no value; a surviving demand with no layered walk: λ = 0 (proven by that
//! demand alone).
//!
//! **Model.** The layered edge LP of [`chain::build`] (demands aggregated per (origin,
//! chain), exact by the decomposition argument there), each demand variable `F_d` capped
//! at `Λ · required_d` and tied to one variable, `F_d = λ · required_d`; maximise λ. The
//! a-priori ceiling `Λ = min_d (Σ capacity of the usable arcs leaving d's origin + the
//! capacity of d's first function at its origin) / required_d` holds for every demand: the
//! first step of every layered walk of `d` is one of those arcs (layer 0, one unit per
//! origin unit) or `f1` applied at the origin (one unit per origin unit). With the caps at
//! `Λ · required`, [`chain::build`]'s lowered row capacities keep the optimum (a
//! cycle-free optimal allocation crosses each arc at most once per layer).
//!
//! **Verification** (nothing from the backend is trusted):
//! - *Lower bound.* The solution is decomposed into layered walks and scaled into the real
//!   capacities by [`chain::repair`]; `min_d flow_d / required_d` of that feasible
//!   allocation is a concurrent factor it achieves.
//! - *Upper bound.* For any prices `y_a ≥ 0` (arcs) and `z_vf ≥ 0` (function `f` at `v`),
//!   let `π_d` be `d`'s cheapest layered walk, arc `a` in layer `j` costing `G_j · y_a`
//!   and `f_{j+1}` at `v` costing `G_j · z_vf` (the layered walk engine's pricing, one layered Dijkstra per
//!   group). A layered walk of `w` origin units puts exactly its priced amount on the rows,
//!   so any allocation serving `λ · required_d` to each `d` has
//!   `λ · Σ_d required_d · π_d ≤ Σ cap_a · y_a + Σ cap_vf · z_vf`, hence
//!   `λ ≤ (Σ cap·y + Σ cap·z) / Σ_d required_d · π_d` (weak duality of maximum concurrent
//!   flow in its path form), with the lowered capacities of the LP's rows. With the LP's
//!   own shadow prices the quotient meets the optimum.
//! - *Proven* when the residual passes and the bounds meet within
//!   [`crate::tol::PROOF_GAP_TOL`] of the upper bound (`Headroom::narrow`, as for files
//!   without `functions`): the value is then the plainest number in the interval, 1 when it
//!   holds 1. Otherwise the next backend of [`ladder`] runs, and a result still open is its
//!   proven lower bound, never more.
//!
//! **Engines.** [`headroom_walks`] solves the same model by column generation over
//! layered walks, each outage of an audit started from the baseline's proven optimum as
//! the walk engine of files without `functions` does it: the surviving walks with the
//! baseline's prices, then the cut flow re-routed, then the bundled λ master shared with
//! that engine (`solve::colgen::headroom::master`, through its `Pricing` trait); every
//! answer verified as above. Only when it is not proven is the layered λ-LP
//! ([`headroom_with`]) solved.
//!
//! Cost per outage on the fallback: one LP of the size of the layered edge LP (plus one
//! variable and one row per surviving demand), solved by the backends of [`ladder`] in
//! turn until proven, one repair and one pricing pass per attempt.

use std::collections::BTreeMap;

use super::rows::{RowKey, Rows};
use super::skeleton::layered_rows;
use super::start::reroute;
use super::verify::{residual, with_walks};
use super::{ChainWalk, Solved};
use crate::error::{Error, Result};
use crate::model::{FunctionIdx, Network};
use crate::scenario::Outage;
use crate::solve::chain::Layered;
use crate::solve::colgen::headroom::Work;
use crate::solve::colgen::headroom::master::{self, Pricing};
use crate::solve::concurrent::{
    Headroom, HeadroomWork, Setup, active_demands, decide, quotient, walks_then_lp,
};
use crate::solve::lp::{Backend, Sense};
use crate::solve::surviving::Surviving;
use crate::solve::{chain, ladder, verify};

/// The headroom of `net` (a network with `functions`) under `outage`, on the matrix the
/// outage names, cold: [`headroom_walks`] without a parent. Pure function of (network,
/// outage).
pub fn headroom(net: &Network, outage: &Outage) -> Result<Headroom> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    Ok(headroom_walks(net, &view, None)?.0)
}

/// The headroom of the outage `view` by column generation over layered walks (`by_walks`),
/// started from `parent` (the baseline's proven optimum, normally), and when that does not
/// prove its answer, the layered λ-LP ([`headroom_with`] on [`ladder`]). Returns the
/// optimum of a proven walk answer (a start for child outages) and the work done. Pure
/// function of (network, outage, parent).
///
/// Cost: see `by_walks`; plus [`headroom_with`] on a fallback.
pub fn headroom_walks(
    net: &Network,
    view: &Surviving,
    parent: Option<&Solved>,
) -> Result<(Headroom, Option<Solved>, HeadroomWork)> {
    walks_then_lp(
        setup(net, view)?,
        |setup, work| by_walks(net, view, setup, parent, work),
        || headroom_with(net, view, ladder()),
    )
}

/// The checks before any LP (see the module documentation): `Err(headroom)` when the
/// outage is decided without one (no surviving required demand: no value; a surviving
/// required demand with no layered walk: λ = 0), else the [`Setup`] with the ceiling Λ.
/// O(groups · (k + 1) · (sites + arcs)).
pub fn setup(net: &Network, view: &Surviving) -> Result<std::result::Result<Setup, Headroom>> {
    let ch = net.chains.as_ref().expect("a network with functions");
    let Some((required, active)) = active_demands(net, view) else {
        return Ok(Err(Headroom::absent()));
    };
    if !chain::cut_off(net, view, &required).is_empty() {
        return Ok(Err(Headroom::zero()));
    }
    // What may leave each site in layer 0: its usable outgoing arcs.
    let mut leaving = vec![0.0; net.sites.len()];
    for &a in &view.arcs {
        leaving[net.arcs[a].from.0] += net.arcs[a].capacity;
    }
    let ceiling = active
        .iter()
        .map(|&d| {
            let o = net.demands[d].from.0;
            let first = ch.chain[d]
                .first()
                .filter(|&&f| chain::runs(ch, view, o, f))
                .map_or(0.0, |&f| ch.capacity[o][f]);
            (leaving[o] + first) / required[d]
        })
        .fold(f64::INFINITY, f64::min);
    if !(ceiling.is_finite() && ceiling > 0.0) {
        return Err(Error::Solver(format!(
            "chain headroom: no finite positive a-priori bound ({ceiling})"
        )));
    }
    let total_required = active.iter().map(|&d| required[d]).sum();
    Ok(Ok(Setup {
        required,
        active,
        ceiling,
        total_required,
    }))
}

/// The layered λ-LP of the module documentation on `view`, solved by each backend of
/// `ladder` in turn until proven; every attempt verified (residual, repaired lower bound,
/// priced quotient upper bound) and the best bounds of all attempts kept. Fails only when
/// every backend fails before any bound is known. Tests pass a ladder of one backend to
/// see that an answer is checked, not trusted.
pub fn headroom_with(net: &Network, view: &Surviving, ladder: &[&dyn Backend]) -> Result<Headroom> {
    let setup = match setup(net, view)? {
        Ok(s) => s,
        Err(decided) => return Ok(decided),
    };
    let (mut model, layered, _) = chain::build(net, view, &caps(net, &setup));
    let Setup {
        required,
        active,
        ceiling,
        total_required,
    } = setup;
    let lambda = model.add_var(0.0, ceiling, 1.0);
    model.magnitude[lambda] = ceiling;
    for &d in &active {
        let f = layered.demand_var[d].ok_or_else(|| {
            Error::Solver(format!(
                "chain headroom: servable demand {d} has no flow variable"
            ))
        })?;
        // Served only through λ: the demand variables leave the objective.
        model.objective[f] = 0.0;
        model.add_row(vec![(f, 1.0), (lambda, -required[d])], Sense::Eq, 0.0);
    }
    let (mut row_floor, var_floor) = chain::floors(&model);
    // The tying rows hold Λ · required_d at most.
    for r in row_floor.iter_mut().skip(model.rows.len() - active.len()) {
        *r = r.max(ceiling * total_required);
    }
    let rows = Rows::new(net, view, &layered);
    let mut best = Headroom::open(ceiling);
    let mut errors = Vec::new();
    for backend in ladder {
        let Some(solution) = chain::attempt(*backend, &model, &mut errors)? else {
            continue;
        };
        let residual = verify::residual(&model, &solution.x, &row_floor, &var_floor);
        let (repaired, _) = chain::repair(net, &layered, &solution.x);
        let (arc_price, fn_price) = layered.row_prices(&solution.duals);
        let upper = upper_bound(&rows, &active, &arc_price, &fn_price).min(ceiling);
        if best.narrow(
            factor(&active, &required, &repaired.demand_flow),
            upper,
            residual,
        ) {
            break;
        }
    }
    // `narrow` gives a value to every attempt that solved: none means every backend failed.
    match best.value {
        Some(_) => Ok(best),
        None => Err(Error::Solver(errors.join("; "))),
    }
}

/// The headroom of `view` by column generation over layered walks, from `parent` (a
/// proven optimum of the baseline, normally) when given, as the walk engine of files
/// without `functions` does it ([`crate::solve::colgen::headroom`]), on the same λ master
/// ([`crate::solve::colgen::headroom::master`], one [`Pricing`] of layered walks):
///
/// - *Inherited.* The parent's walks that survive, at their flows, with the parent's
///   prices, verified as they are: proven when the outage took nothing they used.
/// - *Re-routed.* Each active demand's shortfall below the parent's factor re-routed
///   greedily ([`reroute`]: shortest-hop layered walks through what the surviving walks
///   leave), verified with the parent's prices; when that does not prove it, every demand
///   brought instead to the bound the parent's prices give on this outage (its surviving
///   walks scaled down to it first), verified with the same prices. No master when either
///   is proven.
/// - *Master.* Maximise λ with `λ · required_d − Σ_{w of d} f_w ≤ 0` per free demand, the
///   layered rows of [`layered_rows`] (demand caps `Λ · required`), `0 ≤ λ ≤ Λ`, and the
///   demands whose flow-carrying parent walks all survive held in one bundle θ (one row
///   `λ − θ ≤ 0`), freed when their walks cost more than their cheapest; λ starts at what
///   the start serves. Without a parent the start is every demand's cheapest walk at zero
///   prices and at prices 1 / capacity. Pricing by [`Rows::price`] at the row duals times
///   `Σ required`; stopped when the priced quotient bound meets the master's λ within
///   [`crate::tol::COLGEN_GAP_TOL`].
///
/// Every answer is verified like the λ-LP's: its walks written as layered edge flows
/// ([`with_walks`]), decomposed and scaled into the real capacities ([`chain::repair`];
/// residual: the walks' largest relative overload of a row, [`residual`]), `min_d flow_d / required_d`
/// the lower bound, the quotient at its prices the upper. `None` when the master stalls,
/// outgrows the warm LPs or [`crate::solve::colgen::MAX_ROUNDS`] rounds, or its answer is
/// not proven.
///
/// Cost: the start's repair and two verifications at most (each one pass over the walks,
/// one [`chain::repair`] and one pricing pass); then per round one warm simplex
/// re-optimisation (rows: used arcs, used (site, function) pairs, free demands and the
/// bundle) and one pricing pass (one layered Dijkstra per (origin, chain) group); then one
/// verification.
fn by_walks(
    net: &Network,
    view: &Surviving,
    setup: &Setup,
    parent: Option<&Solved>,
    work: &mut Work,
) -> Result<Option<(Headroom, Solved)>> {
    let ch = net.chains.as_ref().expect("a network with functions");
    let bound = caps(net, setup);
    let (mut layered, _) = layered_rows(net, view, &bound);
    let group_of = Rows::new(net, view, &layered).group_of;
    let check = |layered: &mut Layered, s: &Solved, upper: f64| {
        checked(net, view, setup, layered, &group_of, (s, upper))
    };
    let with_prices = |walks: Vec<(ChainWalk, f64)>, p: &Solved| {
        let (walks, flow): (Vec<ChainWalk>, Vec<f64>) = walks.into_iter().unzip();
        Solved {
            value: flow.iter().sum(),
            walks,
            flow,
            arc_price: p.arc_price.clone(),
            fn_price: p.fn_price.clone(),
            ..Default::default()
        }
    };
    // The parent's walks that carried flow and survive, at their flows.
    let mut start: Vec<(ChainWalk, f64)> = Vec::new();
    if let Some(p) = parent {
        for (w, &f) in p.walks.iter().zip(&p.flow) {
            if f > 0.0 && bound[w.demand] > 0.0 && w.survives(ch, view) {
                start.push((w.clone(), f));
            }
        }
        let inherited = with_prices(start.clone(), p);
        // The parent's prices bound this outage's λ by `upper` (one pricing pass); every
        // start below is certified by the same prices.
        let upper = bound_of(net, view, setup, &layered, &inherited);
        let h = check(&mut layered, &inherited, upper);
        if h.proven {
            work.inherited = true;
            return Ok(Some((h, inherited)));
        }
        let again = {
            let rows = Rows::new(net, view, &layered);
            rerouted(&rows, setup, p, &start, None)
        };
        if let Some(walks) = again {
            let s = with_prices(walks, p);
            let h = check(&mut layered, &s, upper);
            if h.proven {
                work.repaired = true;
                return Ok(Some((h, s)));
            }
            let lowered = {
                let rows = Rows::new(net, view, &layered);
                rerouted(&rows, setup, p, &start, Some(upper))
            };
            if let Some(walks) = lowered {
                let s = with_prices(walks, p);
                let h = check(&mut layered, &s, upper);
                if h.proven {
                    work.lowered = true;
                    return Ok(Some((h, s)));
                }
                start = s.walks.into_iter().zip(s.flow).collect();
            }
        }
    }
    let optimum = {
        let rows = Rows::new(net, view, &layered);
        let pricing = Layers::new(&rows);
        let (mut cols, bundle) = match parent {
            Some(p) => master::bundle_of(&pricing, setup, (&p.walks, &p.flow), start),
            None => (start, master::Bundle::empty(net.demands.len())),
        };
        work.bundled = bundle.members();
        // Every active demand outside the bundle gets its cheapest walk at the parent's
        // prices as a column at 0 (without a parent: at zero prices, fewest hops, and at
        // prices 1 / capacity, often a disjoint second walk), so the first master serves
        // them all.
        let seed: Vec<f64> = (0..net.demands.len())
            .map(|d| {
                if bundle.member[d] {
                    f64::INFINITY
                } else {
                    f64::NEG_INFINITY
                }
            })
            .collect();
        let mut fresh = Vec::new();
        match parent {
            Some(p) => fresh.extend(rows.price(&p.arc_price, &p.fn_price, Some(&seed)).walks),
            None => {
                fresh.extend(
                    rows.price(&vec![0.0; net.arcs.len()], &BTreeMap::new(), Some(&seed))
                        .walks,
                );
                let inverse = |cap: f64| if cap > 0.0 { 1.0 / cap } else { 0.0 };
                let y0: Vec<f64> = layered.arc_cap.iter().map(|&c| inverse(c)).collect();
                let z0: BTreeMap<(usize, FunctionIdx), f64> = layered
                    .function_cap
                    .iter()
                    .map(|(&k, &c)| (k, inverse(c)))
                    .collect();
                fresh.extend(rows.price(&y0, &z0, Some(&seed)).walks);
            }
        }
        work.rounds += 1;
        cols.extend(fresh.into_iter().map(|w| (w, 0.0)));
        let cg = master::Generation { p: &pricing, setup };
        cg.run(cols, bundle, work)?.map(|(walks, flow, y)| {
            let (arc_price, fn_price) = pricing.prices(&y);
            Solved::with((walks, flow), arc_price, fn_price, None)
        })
    };
    let Some(solved) = optimum else {
        return Ok(None);
    };
    let upper = bound_of(net, view, setup, &layered, &solved);
    let h = check(&mut layered, &solved, upper);
    Ok(h.proven.then_some((h, solved)))
}

/// The verified interval of the walk answer `s` on the rows `layered` of `view`, with the
/// upper bound `upper` already certified for `s`'s prices (the quotient of
/// [`upper_bound`], at most Λ): its walks written as layered edge flows ([`with_walks`],
/// which resets `layered`'s edges), decomposed and scaled into the real capacities
/// ([`chain::repair`]), `min_d flow_d / required_d` the lower bound; residual: the walks'
/// largest relative overload of a row ([`residual`]). Skips the repair (lower bound 0, not
/// proven) when the walks' own factor, which the repair can only lower, cannot meet
/// `upper`. O(Σ walk lengths + one repair).
fn checked(
    net: &Network,
    view: &Surviving,
    setup: &Setup,
    layered: &mut Layered,
    group_of: &[usize],
    (s, upper): (&Solved, f64),
) -> Headroom {
    let mut flow = vec![0.0; net.demands.len()];
    for (w, &f) in s.walks.iter().zip(&s.flow) {
        flow[w.demand] += f;
    }
    if !decide(factor(&setup.active, &setup.required, &flow), upper, 0.0).proven {
        return decide(0.0, upper, 0.0);
    }
    let x = with_walks(net, layered, group_of, s);
    let rows = Rows::new(net, view, layered);
    let residual = residual(&rows, s);
    let (allocation, _) = chain::repair(net, layered, &x);
    let lower = factor(&setup.active, &setup.required, &allocation.demand_flow);
    decide(lower, upper, residual)
}

/// The quotient bound of [`upper_bound`] at the prices of `s` over the rows `layered` of
/// `view`, at most Λ. One pricing pass.
fn bound_of(net: &Network, view: &Surviving, setup: &Setup, layered: &Layered, s: &Solved) -> f64 {
    let rows = Rows::new(net, view, layered);
    upper_bound(&rows, &setup.active, &s.arc_price, &s.fn_price).min(setup.ceiling)
}

/// The parent's surviving walks `start` with the flow the outage cut re-routed: a target
/// factor, the parent's ([`master::parent_factor`] over the outage's active demands) when
/// `lower` is `None`, else `lower` when it is below that (each demand's surviving walks
/// first scaled down to at most `lower · required_d`); each demand's shortfall
/// `target · required_d − surviving flow_d` re-routed by [`reroute`] through what the
/// surviving walks leave in the rows. `None` when no active demand falls short or `lower`
/// is not below the parent's factor. O(Σ walk lengths + augmentations · (k + 1) · (sites +
/// arcs)).
fn rerouted(
    rows: &Rows,
    setup: &Setup,
    parent: &Solved,
    start: &[(ChainWalk, f64)],
    lower: Option<f64>,
) -> Option<Vec<(ChainWalk, f64)>> {
    let n = rows.net.demands.len();
    let mut had = vec![0.0; n];
    for (w, &f) in parent.walks.iter().zip(&parent.flow) {
        had[w.demand] += f.max(0.0);
    }
    let target = master::reroute_target(setup, &had, lower)?;
    let mut kept = vec![0.0; n];
    for (w, f) in start {
        kept[w.demand] += f;
    }
    let mut shrink = vec![1.0; n];
    if lower.is_some() {
        for &d in &setup.active {
            let want = target * setup.required[d];
            if kept[d] > want {
                shrink[d] = want / kept[d];
                kept[d] = want;
            }
        }
    }
    let mut walks: Vec<(ChainWalk, f64)> = start
        .iter()
        .map(|(w, f)| (w.clone(), f * shrink[w.demand]))
        .collect();
    // What `reroute` re-routes: per demand short of the target, its first lost parent
    // walk carrying the shortfall (reroute reads only the amounts of lost walks).
    let eps = crate::tol::WALK_FLOW_EPS * rows.scale;
    let mut short = Solved::default();
    let mut named = vec![false; n];
    for (w, &f) in parent.walks.iter().zip(&parent.flow) {
        let d = w.demand;
        let gap = target * setup.required[d] - kept[d];
        if f > 0.0 && !named[d] && gap > eps && !w.survives(rows.ch, rows.view) {
            named[d] = true;
            short.walks.push(w.clone());
            short.flow.push(gap);
        }
    }
    if short.walks.is_empty() {
        return None;
    }
    reroute(rows, &short, &mut walks, None, false);
    Some(walks)
}

/// The layered walks as the λ master sees them: slots `0 .. arcs` are the arcs (the
/// layered rows' lowered capacities), slots `arcs ..` the (site, function) rows in key
/// order; pricing is [`Rows::price`].
struct Layers<'r, 'a> {
    rows: &'r Rows<'a>,
    keys: Vec<(usize, FunctionIdx)>,
    slot: BTreeMap<(usize, FunctionIdx), usize>,
    usable: usize,
}

impl<'r, 'a> Layers<'r, 'a> {
    fn new(rows: &'r Rows<'a>) -> Self {
        let arcs = rows.net.arcs.len();
        let keys: Vec<(usize, FunctionIdx)> = rows.layered.function_cap.keys().copied().collect();
        let slot = keys
            .iter()
            .enumerate()
            .map(|(i, &k)| (k, arcs + i))
            .collect();
        let usable = rows.layered.arc_row.iter().filter(|r| r.is_some()).count() + keys.len();
        Layers {
            rows,
            keys,
            slot,
            usable,
        }
    }

    /// Slot prices `y` as arc prices and (site, function) prices.
    fn prices(&self, y: &[f64]) -> (Vec<f64>, BTreeMap<(usize, FunctionIdx), f64>) {
        let arcs = self.rows.net.arcs.len();
        let z = self
            .keys
            .iter()
            .enumerate()
            .map(|(i, &k)| (k, y[arcs + i]))
            .collect();
        (y[..arcs].to_vec(), z)
    }
}

impl Pricing for Layers<'_, '_> {
    type Walk = ChainWalk;

    fn demand(w: &ChainWalk) -> usize {
        w.demand
    }

    fn survives(&self, w: &ChainWalk) -> bool {
        w.survives(self.rows.ch, self.rows.view)
    }

    fn slots(&self) -> usize {
        self.rows.net.arcs.len() + self.keys.len()
    }

    fn usable_slots(&self) -> usize {
        self.usable
    }

    fn cap(&self, s: usize) -> f64 {
        let arcs = self.rows.net.arcs.len();
        if s < arcs {
            self.rows.layered.arc_cap[s]
        } else {
            self.rows.layered.function_cap[&self.keys[s - arcs]]
        }
    }

    fn entries(&self, w: &ChainWalk) -> Vec<(usize, f64)> {
        self.rows
            .coefficients(w)
            .into_iter()
            .filter_map(|(key, c)| match key {
                RowKey::Arc(a) => Some((a, c)),
                RowKey::Function(v, f) => Some((self.slot[&(v, f)], c)),
                RowKey::Demand(_) => None,
            })
            .collect()
    }

    fn price(&self, y: &[f64], u: &[f64]) -> (Vec<f64>, Vec<ChainWalk>) {
        let (arc, z) = self.prices(y);
        let p = self.rows.price(&arc, &z, Some(u));
        (p.cost, p.walks)
    }
}

/// The concurrent factor an allocation with per-demand flows `flow` achieves over the
/// demands `active`: `min_d flow_d / required_d`, at least 0. O(active).
fn factor(active: &[usize], required: &[f64], flow: &[f64]) -> f64 {
    active
        .iter()
        .map(|&d| flow[d] / required[d])
        .fold(f64::INFINITY, f64::min)
        .max(0.0)
}

/// Per demand: `Λ · required_d` when it is active in `setup`, else 0 (the λ-model's caps).
/// O(demands).
fn caps(net: &Network, setup: &Setup) -> Vec<f64> {
    (0..net.demands.len())
        .map(|d| {
            if setup.active.binary_search(&d).is_ok() {
                setup.ceiling * setup.required[d]
            } else {
                0.0
            }
        })
        .collect()
}

/// The certified bound of the module documentation at prices `arc_price` (per arc) and
/// `fn_price` (per (site, function) row; missing: 0) over the demands `active`:
/// `(Σ cap_a·y_a + Σ cap_vf·z_vf) / Σ_d required_d · π_d` with the rows' lowered
/// capacities; `+∞` when no demand's cheapest layered walk has a positive price. Valid
/// for any nonnegative prices. O(groups · (k + 1) · (arcs + sites) · log).
fn upper_bound(
    rows: &Rows,
    active: &[usize],
    arc_price: &[f64],
    fn_price: &BTreeMap<(usize, FunctionIdx), f64>,
) -> f64 {
    let layered = rows.layered;
    let arcs: f64 = (0..layered.arc_cap.len())
        .filter(|&a| layered.arc_row[a].is_some())
        .map(|a| layered.arc_cap[a] * arc_price[a].max(0.0))
        .sum();
    let functions: f64 = layered
        .function_cap
        .iter()
        .map(|(key, &cap)| cap * fn_price.get(key).copied().unwrap_or(0.0).max(0.0))
        .sum();
    let cost = rows.price(arc_price, fn_price, None).cost;
    let priced: f64 = active
        .iter()
        .map(|&d| rows.net.demands[d].required * cost[d])
        .sum();
    quotient(arcs + functions, priced)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn net(text: &str) -> Network {
        Network::from_json(text).expect("valid test network")
    }

    /// Hand case: a → b, one link of capacity 10, function `fw` (gain 1) of capacity
    /// `cap` at a, one demand a → b of required 4 through `fw`. The link carries at most
    /// 10 and the function at most `cap`, so λ = min(10, cap) / 4.
    fn one_link_net(cap: f64) -> Network {
        net(&format!(
            r#"{{"functions":[{{"id":"fw","gain":1}}],
            "sites":[{{"id":"a","functions":{{"fw":{cap}}}}},{{"id":"b"}}],
            "links":[{{"id":"ab","from":"a","to":"b","capacity":10,"one_way":true}}],
            "demands":[{{"from":"a","to":"b","volume":4,"required":4,"chain":["fw"]}}]}}"#
        ))
    }

    /// min(10, 100) / 4 = 2.5 (the link binds) and min(10, 6) / 4 = 1.5 (the function
    /// binds), by the walks ([`headroom`]) and by the layered λ-LP alone (their fallback).
    #[test]
    fn link_or_function_binds() {
        for (cap, want) in [(100.0, 2.5), (6.0, 1.5)] {
            let n = one_link_net(cap);
            let view = Surviving::new(&n, &Outage::default(), None);
            for h in [
                headroom(&n, &Outage::default()).unwrap(),
                headroom_with(&n, &view, ladder()).unwrap(),
            ] {
                assert!(h.proven, "{h:?}");
                assert_eq!(h.value, Some(want), "{h:?}");
            }
        }
    }

    /// A backend whose answer comes with zero prices: the repaired allocation still gives
    /// its lower bound, but the quotient proves nothing (no walk has a positive price), so
    /// the interval stays open at the ceiling (10 + 100) / 4 = 27.5 and the result is
    /// unproven at its lower bound, never above the true 2.5.
    #[test]
    fn prices_are_checked_not_trusted() {
        struct NoPrices;
        impl Backend for NoPrices {
            fn name(&self) -> &'static str {
                "no prices"
            }
            fn solve(&self, lp: &crate::solve::lp::Lp) -> Result<crate::solve::lp::LpSolution> {
                let mut s = crate::solve::lp::CLARABEL.solve(lp)?;
                s.duals.iter_mut().for_each(|y| *y = 0.0);
                Ok(s)
            }
        }
        let n = one_link_net(100.0);
        let view = Surviving::new(&n, &Outage::default(), None);
        let h = headroom_with(&n, &view, &[&NoPrices]).unwrap();
        assert!(!h.proven, "{h:?}");
        assert_eq!(h.upper, 27.5);
        assert!(h.value.unwrap() <= 2.5 && h.value == Some(h.lower), "{h:?}");
    }

    /// Site a failed: the demand's origin is gone, so it is left out and no surviving
    /// demand remains: no value (never a made-up number).
    #[test]
    fn failed_origin_has_no_value() {
        let n = net(r#"{"functions":[{"id":"fw","gain":1}],
            "sites":[{"id":"a","functions":{"fw":5}},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":10}],
            "demands":[{"from":"a","to":"b","volume":4,"required":4,"chain":["fw"]}]}"#);
        let outage = Outage {
            sites: vec![crate::model::SiteIdx(0)],
            ..Outage::default()
        };
        let h = headroom(&n, &outage).unwrap();
        assert_eq!(h.value, None);
    }
}
