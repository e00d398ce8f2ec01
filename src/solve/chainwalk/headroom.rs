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
//! Cost per outage: one LP of the size of the layered edge LP (plus one variable and one
//! row per surviving demand), solved cold by the backends of [`ladder`] in turn until
//! proven, one repair and one pricing pass per attempt.

use std::collections::{BTreeMap, HashMap, HashSet};

use super::rows::{RowKey, Rows, layered_rows};
use super::verify::{verified, with_walks};
use super::{ChainWalk, GAP_TOL, MAX_ROUNDS, NONE, Solved, WARM_ROWS};
use crate::error::{Error, Result};
use crate::model::{FunctionIdx, Network};
use crate::scenario::Outage;
use crate::solve::colgen::round::solve_round;
use crate::solve::concurrent::{Headroom, Setup, decide, quotient};
use crate::solve::lp::{Backend, Sense};
use crate::solve::simplex::Simplex;
use crate::solve::surviving::Surviving;
use crate::solve::{chain, ladder, verify};

/// The headroom of `net` (a network with `functions`) under `outage`, on the matrix the
/// outage names: by column generation over layered walks (`by_walks`), and when that does
/// not prove its answer, the layered λ-LP ([`headroom_with`] on [`ladder`]). Pure function
/// of (network, outage).
pub fn headroom(net: &Network, outage: &Outage) -> Result<Headroom> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let setup = match setup(net, &view)? {
        Ok(s) => s,
        Err(decided) => return Ok(decided),
    };
    if let Some(h) = by_walks(net, &view, &setup)?
        && h.proven
    {
        return Ok(h);
    }
    headroom_with(net, &view, ladder())
}

/// The checks before any LP (see the module documentation): `Err(headroom)` when the
/// outage is decided without one (no surviving required demand: no value; a surviving
/// required demand with no layered walk: λ = 0), else the [`Setup`] with the ceiling Λ.
/// O(groups · (k + 1) · (sites + arcs)).
pub fn setup(net: &Network, view: &Surviving) -> Result<std::result::Result<Setup, Headroom>> {
    let ch = net.chains.as_ref().expect("a network with functions");
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let active: Vec<usize> = (0..net.demands.len())
        .filter(|&d| view.demand_alive(net, d) && required[d] > 0.0)
        .collect();
    if active.is_empty() {
        return Ok(Err(Headroom::absent()));
    }
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

/// The headroom of `view` by column generation over layered walks, cold: the master
/// (maximise λ; `λ · required_d − Σ_{w of d} f_w ≤ 0` per surviving demand, the layered
/// rows of [`layered_rows`] with demand caps `Λ · required`, `0 ≤ λ ≤ Λ`) on the warm
/// simplex, rows created as columns need them, started from every demand's cheapest walk
/// at zero prices and at prices 1 / capacity; pricing by [`Rows::price`] at the row duals
/// times `Σ required` (so the demand duals average about 1 and the absolute price
/// tolerance compares amounts of order one), a walk of `d` entering when
/// `u_d − π_d` exceeds it (passed as the demand duals `1 − u_d`); stopped when the priced
/// quotient bound meets the master's λ within [`GAP_TOL`]. The answer is verified like the
/// λ-LP's: its walks written as layered edge flows ([`with_walks`]), decomposed and scaled
/// into the real capacities ([`verified`], whose residual is the walks' largest relative
/// overload of a row), `min_d flow_d / required_d` the lower bound, the quotient at the
/// master's prices the upper. `None` when the master outgrows [`WARM_ROWS`], the simplex
/// fails, nothing new prices out while the gap is open, or after [`MAX_ROUNDS`] rounds.
///
/// Cost: per round one warm simplex re-optimisation (rows: used arcs, used (site,
/// function) pairs and surviving demands) and one pricing pass (one layered Dijkstra per
/// (origin, chain) group); then one verification.
fn by_walks(net: &Network, view: &Surviving, setup: &Setup) -> Result<Option<Headroom>> {
    let bound = caps(net, setup);
    let (mut layered, _) = layered_rows(net, view, &bound);
    let scale = setup.total_required;
    let (walks, flow, arc_price, fn_price) = {
        let rows = Rows::new(net, view, &layered);
        let mut lp = Simplex::new();
        let mut dem_row = vec![NONE; net.demands.len()];
        let mut entries = Vec::with_capacity(setup.active.len());
        for &d in &setup.active {
            dem_row[d] = lp.add_row(0.0, &[]);
            entries.push((dem_row[d], setup.required[d]));
        }
        lp.add_col(1.0, 0.0, setup.ceiling, 0.0, entries);
        let mut row: HashMap<RowKey, usize> = HashMap::new();
        let mut walks: Vec<ChainWalk> = Vec::new();
        let mut seen: HashSet<ChainWalk> = HashSet::new();
        // Every demand's cheapest walk at zero prices (fewest hops) starts the master.
        let every = vec![f64::NEG_INFINITY; net.demands.len()];
        let mut fresh = rows
            .price(&vec![0.0; net.arcs.len()], &BTreeMap::new(), Some(&every))
            .walks;
        // And at prices 1 / capacity (a walk through scarce rows costs more): a second,
        // often disjoint walk per demand.
        let inverse = |cap: f64| if cap > 0.0 { 1.0 / cap } else { 0.0 };
        let y0: Vec<f64> = layered.arc_cap.iter().map(|&c| inverse(c)).collect();
        let z0: BTreeMap<(usize, FunctionIdx), f64> = layered
            .function_cap
            .iter()
            .map(|(&k, &c)| (k, inverse(c)))
            .collect();
        fresh.extend(rows.price(&y0, &z0, Some(&every)).walks);
        let mut rounds = 0;
        loop {
            for w in fresh {
                if !seen.insert(w.clone()) {
                    continue;
                }
                let mut entries = Vec::new();
                for (key, c) in rows.coefficients(&w) {
                    match key {
                        RowKey::Demand(d) => entries.push((dem_row[d], -1.0)),
                        _ => {
                            let r = *row
                                .entry(key)
                                .or_insert_with(|| lp.add_row(rows.rhs(key), &[]));
                            entries.push((r, c));
                        }
                    }
                }
                lp.add_col(0.0, 0.0, f64::INFINITY, 0.0, entries);
                walks.push(w);
            }
            if !solve_round(lp.rows(), WARM_ROWS, true, |pivots| lp.solve(pivots))? {
                return Ok(None);
            }
            let dual = |key: RowKey| row.get(&key).map_or(0.0, |&r| scale * lp.dual(r).max(0.0));
            let y: Vec<f64> = (0..net.arcs.len()).map(|a| dual(RowKey::Arc(a))).collect();
            let z: BTreeMap<(usize, FunctionIdx), f64> = layered
                .function_cap
                .keys()
                .map(|&(v, f)| ((v, f), dual(RowKey::Function(v, f))))
                .collect();
            let u: Vec<f64> = dem_row
                .iter()
                .map(|&r| {
                    if r == NONE {
                        f64::INFINITY
                    } else {
                        1.0 - scale * lp.dual(r).max(0.0)
                    }
                })
                .collect();
            let lambda = lp.value(0);
            let upper = upper_bound(&rows, &setup.active, &y, &z).min(setup.ceiling);
            if upper - lambda <= GAP_TOL * upper.max(f64::MIN_POSITIVE) {
                let flow: Vec<f64> = (1..lp.cols()).map(|j| lp.value(j).max(0.0)).collect();
                break (walks, flow, y, z);
            }
            rounds += 1;
            fresh = rows.price(&y, &z, Some(&u)).walks;
            fresh.retain(|w| !seen.contains(w));
            if fresh.is_empty() || rounds >= MAX_ROUNDS {
                return Ok(None);
            }
        }
    };
    let solved = Solved {
        value: flow.iter().sum(),
        walks,
        flow,
        arc_price,
        fn_price,
    };
    let group_of = Rows::new(net, view, &layered).group_of;
    let x = with_walks(net, &mut layered, &group_of, &solved);
    let rows = Rows::new(net, view, &layered);
    let checked = verified(&rows, &layered, &x, &solved);
    let lower = factor(
        &setup.active,
        &setup.required,
        &checked.allocation.demand_flow,
    );
    let upper =
        upper_bound(&rows, &setup.active, &solved.arc_price, &solved.fn_price).min(setup.ceiling);
    Ok(Some(decide(lower, upper, checked.verification.residual)))
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
