//! Growth headroom: the maximum concurrent flow of the two-layer model.
//!
//! The **headroom** λ of an outage is the largest factor such that every surviving demand
//! with `required > 0` can be served at `λ · required` *at the same time*, routed and
//! processed once within every capacity (demands with a failed endpoint are left out).
//! λ ≥ 1: the committed demand fits and may grow by λ − 1; λ < 1: the outage is short.
//! No surviving required demand: no value (never ∞).
//!
//! **Model.** The edge model of [`super::flow`] aggregated by source (exact for the same
//! reason as there: per source, a single-source flow with fixed sink amounts decomposes
//! into walks), with each demand's flow tied to one variable: `f_d = λ · required_d`,
//! maximise λ. The flow variables are capped at `Λ · required_d`, where
//! `Λ = Σ processing of the sites that can process / Σ required` is an a-priori bound
//! (every unit is processed once, so `λ · Σ required ≤ Σ processing`); with those caps the
//! presolve of [`super::flow::build_on`] (rows no larger than the block totals) keeps the
//! optimum.
//!
//! **Verification** (nothing from the backend is trusted):
//! - *Lower bound.* The solution is decomposed and scaled into a feasible allocation by
//!   [`super::verify::repair`] against the real capacities; `min_d flow_d / required_d` of
//!   that allocation is a concurrent factor it achieves.
//! - *Upper bound.* For any prices `y_a, z_v ≥ 0`, let `c_d` be demand `d`'s cheapest
//!   priced processing walk ([`super::certify::cheapest_walks`]). Any allocation serving
//!   `λ · required_d` to each `d` has `λ · Σ_d required_d · c_d ≤ Σ_walks flow · price ≤
//!   Σ_a cap_a·y_a + Σ_v proc_v·z_v`, so `λ ≤ (Σ cap·y + Σ proc·z) / Σ_d required_d·c_d`
//!   (LP weak duality for the path formulation of maximum concurrent flow). With the LP's
//!   own shadow prices the quotient meets the optimum.
//! - *Proven* when the residual passes and the bounds meet within [`crate::tol::PROOF_GAP_TOL`]
//!   relative to the bound. The reported value is the plainest number in the interval,
//!   1 when the interval holds 1 (so λ ≥ 1 exactly when nothing is short).
//!
//! **Engines.** [`headroom_walks`] solves the same model on the walk engine
//! ([`super::colgen::headroom`], column generation with one λ, started from a parent's
//! columns) and verifies it the same way; only when that answer is not proven is the edge
//! λ-LP above ([`headroom_lp`]) solved.
//!
//! A surviving demand that no walk through a processing site can serve at all gives λ = 0,
//! proven by that demand alone (its cheapest walk costs nothing it could use).

use super::colgen::headroom::{Columns, Work};
use super::edge::{Attempt, try_backend};
use super::flow::{self, Cap};
use super::lp::{self, Sense};
use super::surviving::Surviving;
use super::{Backend, RESIDUAL_TOL, certify, ladder, simplest_in};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::scenario::Outage;
use crate::tol::PROOF_GAP_TOL;

/// The headroom of one outage, with how it was proven.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Headroom {
    /// The reported factor: the plainest number in `[lower, upper]` when proven, else
    /// `lower`; `None` when no surviving demand has `required > 0`.
    pub value: Option<f64>,
    /// A concurrent factor a verified feasible allocation achieves.
    pub lower: f64,
    /// A certified upper bound on the factor.
    pub upper: f64,
    /// `lower` and `upper` meet within [`PROOF_GAP_TOL`] and the LP residual passed.
    pub proven: bool,
}

impl Headroom {
    /// The headroom of an outage with no surviving required demand.
    pub(crate) fn absent() -> Headroom {
        Headroom {
            value: None,
            lower: 0.0,
            upper: 0.0,
            proven: true,
        }
    }

    /// Nothing known yet but the a-priori ceiling: `[0, ceiling]`, no value, unproven.
    pub(crate) fn open(ceiling: f64) -> Headroom {
        Headroom {
            value: None,
            lower: 0.0,
            upper: ceiling,
            proven: false,
        }
    }

    /// λ = 0, proven: some surviving required demand has no walk through a processing site.
    pub(crate) fn zero() -> Headroom {
        Headroom {
            value: Some(0.0),
            lower: 0.0,
            upper: 0.0,
            proven: true,
        }
    }
}

/// What every headroom solve starts from: the required amounts, the surviving demands with
/// `required > 0` (ascending), the a-priori ceiling `Λ` and `Σ required` over them.
#[derive(Debug, Clone)]
pub struct Setup {
    pub required: Vec<f64>,
    pub active: Vec<usize>,
    pub ceiling: f64,
    pub total_required: f64,
}

/// The checks before any LP: `Err(headroom)` when the outage is decided without one (no
/// surviving required demand: no value; a surviving demand with no processing walk:
/// λ = 0), else the [`Setup`]. O(sites + arcs + demands) (one reachability scan).
pub fn setup(net: &Network, view: &Surviving) -> Result<std::result::Result<Setup, Headroom>> {
    let Some((required, active)) = active_demands(net, view) else {
        return Ok(Err(Headroom::absent()));
    };
    let unservable = view.unservable(net, &required);
    if active.iter().any(|&d| unservable[d].is_some()) {
        return Ok(Err(Headroom::zero()));
    }
    let total_required: f64 = active.iter().map(|&d| required[d]).sum();
    let total_processing: f64 = (0..net.sites.len())
        .filter(|&v| view.can_process[v])
        .map(|v| net.sites[v].processing)
        .sum();
    // Λ: no allocation serves more than every site's processing in all.
    let ceiling = total_processing / total_required;
    if !(ceiling.is_finite() && ceiling > 0.0) {
        return Err(Error::Solver(format!(
            "headroom: no finite a-priori bound (processing {total_processing}, required {total_required})"
        )));
    }
    Ok(Ok(Setup {
        required,
        active,
        ceiling,
        total_required,
    }))
}

/// Every demand's `required`, and the surviving demands with `required > 0` (ascending);
/// `None` when there is none (the outage's headroom has no value). O(demands).
pub(crate) fn active_demands(net: &Network, view: &Surviving) -> Option<(Vec<f64>, Vec<usize>)> {
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let active: Vec<usize> = (0..net.demands.len())
        .filter(|&d| view.demand_alive(net, d) && required[d] > 0.0)
        .collect();
    (!active.is_empty()).then_some((required, active))
}

/// The interval `[lower, upper]` with its verdict as a [`Headroom`]: proven when the
/// residual passes and the bounds meet within [`PROOF_GAP_TOL`] of `upper`; the value is
/// then the plainest number in the interval (1 when it holds 1), else `lower`. O(1).
pub fn decide(lower: f64, upper: f64, residual: f64) -> Headroom {
    let mut h = Headroom {
        value: None,
        lower,
        upper,
        proven: false,
    };
    h.narrow(lower, upper, residual);
    h
}

impl Headroom {
    /// Narrows the interval by one more verified attempt (`lower` achieved by a feasible
    /// allocation, `upper` certified, `residual` of the attempt's solution): keeps the
    /// best of both bounds, proven when the residual passes and they meet within
    /// [`PROOF_GAP_TOL`] of the upper bound; the value is then the plainest number in the
    /// interval (1 when it holds 1), else the lower bound. Returns whether it is proven.
    /// O(1).
    pub(crate) fn narrow(&mut self, lower: f64, upper: f64, residual: f64) -> bool {
        self.lower = self.lower.max(lower);
        self.upper = self.upper.min(upper);
        let gap = self.upper - self.lower;
        let tol = PROOF_GAP_TOL * self.upper.max(f64::MIN_POSITIVE);
        self.proven = residual <= RESIDUAL_TOL && gap <= tol && gap >= -tol;
        self.value = Some(if self.proven {
            simplest_in(self.lower.min(self.upper), self.upper, 1.0)
        } else {
            self.lower
        });
        self.proven
    }
}

/// The weak-duality quotient `worth / priced` of a headroom certificate: the priced
/// capacity over `Σ required_d · (cheapest priced unit of d)`; `+∞` when `priced` is not
/// positive and finite (the prices prove nothing). O(1).
pub(crate) fn quotient(worth: f64, priced: f64) -> f64 {
    if priced > 0.0 && priced.is_finite() {
        worth / priced
    } else {
        f64::INFINITY
    }
}

/// The headroom of `net` under `outage` (see the module documentation): on the walk
/// engine ([`headroom_walks`], cold), else the edge λ-LP.
///
/// Cost: a column generation of the walk engine; when it does not prove its answer, one
/// LP of the size of the served-demand model (plus one variable and one row per demand),
/// solved by the backends of [`ladder`] in turn until proven.
pub fn headroom(net: &Network, outage: &Outage) -> Result<Headroom> {
    let net = net.view(outage.matrix);
    headroom_on(net, &Surviving::new(net, outage, None))
}

/// [`headroom`] on an already computed view of the surviving network.
pub fn headroom_on(net: &Network, view: &Surviving) -> Result<Headroom> {
    Ok(headroom_walks(net, view, None)?.0)
}

/// How one headroom was found.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct HeadroomWork {
    /// The walk engine's work (see [`Work`]).
    pub walks: Work,
    /// Decided without any LP (no surviving demand, or one with no processing walk).
    pub trivial: bool,
    /// The walk engine did not prove it: the edge λ-LP ([`headroom_lp`]) was solved.
    pub fallback: bool,
}

/// The headroom of the outage `view` on the walk engine ([`super::colgen::headroom`]),
/// started from `parent` (the baseline's columns, normally), with the edge λ-LP
/// ([`headroom_lp`]) when the walk engine does not prove its answer. Returns the columns
/// of a proven walk-engine answer (a start for child outages) and the work done.
///
/// Cost: see [`super::colgen::headroom::solve`]; plus [`headroom_lp`] on a fallback.
pub fn headroom_walks(
    net: &Network,
    view: &Surviving,
    parent: Option<&Columns>,
) -> Result<(Headroom, Option<Columns>, HeadroomWork)> {
    walks_then_lp(
        setup(net, view)?,
        |setup, work| super::colgen::headroom::solve(net, view, setup, parent, work),
        || headroom_lp(net, view),
    )
}

/// What both walk engines' headroom does with an outage's setup: decided without an LP
/// when `setup` is (counted `trivial`), else the walk answer `walks(setup, work)` when it
/// is proven (with its columns), else `lp()` (counted `fallback`). Cost: one `walks` and at
/// most one `lp`.
pub(crate) fn walks_then_lp<C>(
    setup: std::result::Result<Setup, Headroom>,
    walks: impl FnOnce(&Setup, &mut Work) -> Result<Option<(Headroom, C)>>,
    lp: impl FnOnce() -> Result<Headroom>,
) -> Result<(Headroom, Option<C>, HeadroomWork)> {
    let mut work = HeadroomWork::default();
    let setup = match setup {
        Ok(s) => s,
        Err(decided) => {
            work.trivial = true;
            return Ok((decided, None, work));
        }
    };
    if let Some((h, cols)) = walks(&setup, &mut work.walks)? {
        return Ok((h, Some(cols), work));
    }
    work.fallback = true;
    Ok((lp()?, None, work))
}

/// The edge λ-LP of the module documentation on `view`, solved by the backends of
/// [`ladder`] in turn until proven (the walk engine's fallback and reference).
pub fn headroom_lp(net: &Network, view: &Surviving) -> Result<Headroom> {
    headroom_with(net, view, ladder())
}

/// [`headroom_on`] with another ladder of backends (tests check with it that a wrong
/// answer is caught).
pub fn headroom_with(net: &Network, view: &Surviving, ladder: &[&dyn Backend]) -> Result<Headroom> {
    let setup = match setup(net, view)? {
        Ok(s) => s,
        Err(decided) => return Ok(decided),
    };
    let Setup {
        required,
        active,
        ceiling,
        total_required,
    } = setup;

    // The flow model with every demand capped at Λ·required_d.
    let mut capped = net.clone();
    for (d, dem) in capped.demands.iter_mut().enumerate() {
        dem.required = if active.binary_search(&d).is_ok() {
            ceiling * required[d]
        } else {
            0.0
        };
    }
    let mut model = lp::Lp::new(true);
    let index = flow::build_on(&mut model, &capped, view, Cap::Required, 0.0, None);
    let lambda = model.add_var(0.0, ceiling, 1.0);
    model.magnitude[lambda] = 1.0;
    for &d in &active {
        let f = index.demand_var[d].ok_or_else(|| {
            Error::Solver(format!(
                "headroom: servable demand {d} has no flow variable"
            ))
        })?;
        model.add_row(vec![(f, 1.0), (lambda, -required[d])], Sense::Eq, 0.0);
    }

    let bound: Vec<f64> = capped.demands.iter().map(|d| d.required).collect();
    let (mut row_floor, mut var_floor) = index.magnitudes(&model, f64::MIN_POSITIVE);
    // The tying rows hold Λ·required_d at most; λ itself is at most Λ.
    for r in row_floor.iter_mut().skip(model.rows.len() - active.len()) {
        *r = r.max(ceiling * total_required);
    }
    var_floor[lambda] = ceiling;

    let mut best = Headroom::open(ceiling);
    let mut errors = Vec::new();
    for backend in ladder {
        let floors = (row_floor.as_slice(), var_floor.as_slice());
        let Some(Attempt {
            solution,
            residual,
            allocation: repaired,
        }) = try_backend(*backend, &model, floors, net, &index, &bound, &mut errors)?
        else {
            continue;
        };
        let lower = active
            .iter()
            .map(|&d| repaired.demand_flow[d] / required[d])
            .fold(f64::INFINITY, f64::min)
            .max(0.0);
        let price = |row: &Option<usize>| row.map_or(0.0, |r| solution.duals[r].max(0.0));
        let arc_price: Vec<f64> = index.arc_row.iter().map(price).collect();
        let site_price: Vec<f64> = index.site_row.iter().map(price).collect();
        let caps = (index.arc_cap.as_slice(), index.site_cap.as_slice());
        let upper = upper_bound(net, view, caps, &active, &arc_price, &site_price).min(ceiling);
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

/// The certified bound of the module documentation for prices `arc_price`, `site_price`
/// over the demands `active`: `(Σ cap·y + Σ proc·z) / Σ_d required_d · c_d`, with the
/// capacities `caps` (arcs, sites; any at least what an allocation at λ ≤ Λ uses, such as
/// the presolved ones of a flow index). `+∞` when no
/// demand's cheapest walk has a positive price (the prices prove nothing).
/// O(certificate): see [`certify::cheapest_walks`].
pub fn upper_bound(
    net: &Network,
    view: &Surviving,
    caps: (&[f64], &[f64]),
    active: &[usize],
    arc_price: &[f64],
    site_price: &[f64],
) -> f64 {
    let worth = certify::priced_capacity(view, caps.0, caps.1, arc_price, site_price);
    let costs = certify::cheapest_walks(net, view, arc_price, site_price, active, None);
    let priced: f64 = active
        .iter()
        .zip(&costs)
        .map(|(&d, &c)| net.demands[d].required * c)
        .sum();
    quotient(worth, priced)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Network;

    fn net(text: &str) -> Network {
        Network::from_json(text).expect("valid test network")
    }

    /// One link a→b of capacity 10, processing `processing` at a, required 4 from a to b:
    /// the headroom of the intact network.
    fn one_link(processing: f64) -> Headroom {
        let n = net(&format!(
            r#"{{"sites":[{{"id":"a","processing":{processing}}},{{"id":"b"}}],
            "links":[{{"id":"ab","from":"a","to":"b","capacity":10,"one_way":true}}],
            "demands":[{{"from":"a","to":"b","volume":4,"required":4}}]}}"#
        ));
        headroom(&n, &Outage::default()).unwrap()
    }

    /// Hand case: processing ample (100) at a: the link carries 10, so λ = 10 / 4 = 2.5.
    #[test]
    fn one_link_sets_the_factor() {
        let h = one_link(100.0);
        assert!(h.proven, "{h:?}");
        assert_eq!(h.value, Some(2.5));
    }

    /// Hand case: processing 6 at a: 6 / 4 = 1.5 (processing binds before the link).
    #[test]
    fn processing_sets_the_factor() {
        let h = one_link(6.0);
        assert!(h.proven, "{h:?}");
        assert_eq!(h.value, Some(1.5));
    }
}
