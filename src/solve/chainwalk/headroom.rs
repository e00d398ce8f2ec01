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
//!   and `f_{j+1}` at `v` costing `G_j · z_vf` ([`Rows::price`], one layered Dijkstra per
//!   group). A layered walk of `w` origin units puts exactly its priced amount on the rows,
//!   so any allocation serving `λ · required_d` to each `d` has
//!   `λ · Σ_d required_d · π_d ≤ Σ cap_a · y_a + Σ cap_vf · z_vf`, hence
//!   `λ ≤ (Σ cap·y + Σ cap·z) / Σ_d required_d · π_d` (weak duality of maximum concurrent
//!   flow in its path form), with the lowered capacities of the LP's rows. With the LP's
//!   own shadow prices the quotient meets the optimum.
//! - *Proven* when the residual passes and the bounds meet within
//!   [`crate::tol::PROOF_GAP_TOL`] of the upper bound ([`Headroom::narrow`], as for files
//!   without `functions`): the value is then the plainest number in the interval, 1 when it
//!   holds 1. Otherwise the next backend of [`ladder`] runs, and a result still open is its
//!   proven lower bound, never more.
//!
//! Cost per outage: one LP of the size of the layered edge LP (plus one variable and one
//! row per surviving demand), solved cold by the backends of [`ladder`] in turn until
//! proven, one repair and one pricing pass per attempt.

use std::collections::BTreeMap;

use super::rows::Rows;
use crate::error::{Error, Result};
use crate::model::{FunctionIdx, Network};
use crate::scenario::Outage;
use crate::solve::concurrent::{Headroom, Setup, quotient};
use crate::solve::lp::{Backend, Sense};
use crate::solve::surviving::Surviving;
use crate::solve::{chain, ladder, verify};

/// The headroom of `net` (a network with `functions`) under `outage`, on the matrix the
/// outage names: [`headroom_with`] on [`ladder`]. Pure function of (network, outage).
pub fn headroom(net: &Network, outage: &Outage) -> Result<Headroom> {
    let net = net.view(outage.matrix);
    headroom_with(net, &Surviving::new(net, outage, None), ladder())
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
    let Setup {
        required,
        active,
        ceiling,
        total_required,
    } = match setup(net, view)? {
        Ok(s) => s,
        Err(decided) => return Ok(decided),
    };
    let bound: Vec<f64> = (0..net.demands.len())
        .map(|d| {
            if active.binary_search(&d).is_ok() {
                ceiling * required[d]
            } else {
                0.0
            }
        })
        .collect();
    let (mut model, layered, _) = chain::build(net, view, &bound);
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
    let var_floor = model.magnitude.clone();
    let mut row_floor: Vec<f64> = model
        .rows
        .iter()
        .map(|r| {
            r.coeffs
                .iter()
                .map(|&(j, a)| a.abs() * var_floor[j])
                .fold(0.0, f64::max)
        })
        .collect();
    // The tying rows hold Λ · required_d at most.
    for r in row_floor.iter_mut().skip(model.rows.len() - active.len()) {
        *r = r.max(ceiling * total_required);
    }
    let rows = Rows::new(net, view, &layered);
    let mut best = Headroom::open(ceiling);
    let mut errors = Vec::new();
    for backend in ladder {
        crate::solve::cancel::check()?;
        let solution = match backend.solve(&model) {
            Ok(s) => s,
            Err(Error::Solver(m)) => {
                errors.push(format!("{}: {m}", backend.name()));
                continue;
            }
            Err(e) => return Err(e),
        };
        let residual = verify::residual(&model, &solution.x, &row_floor, &var_floor);
        let (repaired, _) = chain::repair(net, &layered, &solution.x);
        let lower = active
            .iter()
            .map(|&d| repaired.demand_flow[d] / required[d])
            .fold(f64::INFINITY, f64::min)
            .max(0.0);
        let arc_price: Vec<f64> = layered
            .arc_row
            .iter()
            .map(|r| r.map_or(0.0, |r| solution.duals[r].max(0.0)))
            .collect();
        let fn_price: BTreeMap<(usize, FunctionIdx), f64> = layered
            .function_row
            .iter()
            .map(|(&k, &r)| (k, solution.duals[r].max(0.0)))
            .collect();
        let upper = upper_bound(&rows, &active, &arc_price, &fn_price).min(ceiling);
        if best.narrow(lower, upper, residual) {
            break;
        }
    }
    if best.lower == 0.0 && best.upper == ceiling && !errors.is_empty() {
        return Err(Error::Solver(errors.join("; ")));
    }
    if best.value.is_none() {
        best.value = Some(best.lower);
    }
    Ok(best)
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
    fn one_link(cap: f64) -> Headroom {
        let n = net(&format!(
            r#"{{"functions":[{{"id":"fw","gain":1}}],
            "sites":[{{"id":"a","functions":{{"fw":{cap}}}}},{{"id":"b"}}],
            "links":[{{"id":"ab","from":"a","to":"b","capacity":10,"one_way":true}}],
            "demands":[{{"from":"a","to":"b","volume":4,"required":4,"chain":["fw"]}}]}}"#
        ));
        headroom(&n, &Outage::default()).unwrap()
    }

    /// min(10, 100) / 4 = 2.5: the link binds.
    #[test]
    fn link_binds() {
        let h = one_link(100.0);
        assert!(h.proven, "{h:?}");
        assert_eq!(h.value, Some(2.5));
    }

    /// min(10, 6) / 4 = 1.5: the function binds.
    #[test]
    fn function_binds() {
        let h = one_link(6.0);
        assert!(h.proven, "{h:?}");
        assert_eq!(h.value, Some(1.5));
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
