//! Growth headroom under a deployed routing (`network-format.md`, "Growth headroom": the
//! same definition with the routes fixed): the largest factor λ such that every surviving
//! demand with `required > 0` can send `λ · required` at once on its fixed routes.
//!
//! - [`Mode::Nearest`]: each demand's split over its nearest sites is fixed, so the load
//!   of every link direction and site is linear in λ: `λ · load_r` with `load_r` the load
//!   when every surviving demand sends its `required` ([`super::offered`]). Hence
//!   `λ = min_r capacity_r / load_r` over the loaded resources, i.e. 1 / the largest
//!   utilisation of required load; 0 when a surviving demand has no candidate site (its
//!   routes reach no processing). Computed directly, no LP: proven by construction.
//! - [`Mode::Steered`]: each demand may split among its candidate sites in any proportion.
//!   The fixed-route LP of [`super::fixed`] (one variable per demand and candidate) with
//!   each demand's variables tied to `λ · required_d`, maximise λ. Verified like every LP
//!   here: the lower bound scales the backend's allocation into the real capacities
//!   (`steered`), the upper bound is the weak-duality quotient of the row prices.

use super::{DemandRoutes, Mode, fixed};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::solve::concurrent::{self, Headroom};
use crate::solve::lp::{self, Sense};
use crate::solve::{ladder, verify};

/// The demands the headroom is taken over: surviving (routes known) with `required > 0`.
fn active(net: &Network, routes: &[Option<DemandRoutes>]) -> Vec<usize> {
    (0..net.demands.len())
        .filter(|&d| routes[d].is_some() && net.demands[d].required > 0.0)
        .collect()
}

/// An exact value (no LP): lower = upper = value, proven.
fn exact(value: Option<f64>) -> Headroom {
    let v = value.unwrap_or(0.0);
    Headroom {
        value,
        lower: v,
        upper: v,
        proven: true,
    }
}

/// Capacity over load, the factor one resource allows: 0 for a load on capacity 0,
/// `+∞` without load. O(1).
fn allows(cap: f64, load: f64) -> f64 {
    if load <= 0.0 {
        f64::INFINITY
    } else if cap <= 0.0 {
        0.0
    } else {
        cap / load
    }
}

/// The headroom of `outage` under the routing `model`, on its traffic matrix's view
/// ([`Network::view`]): the outage's trees (the baseline's
/// where the failure does not touch them), its routes, then [`headroom`].
pub fn of_outage(
    model: &super::Model,
    net: &Network,
    outage: &crate::scenario::Outage,
) -> Result<Headroom> {
    let net = net.view(outage.matrix);
    let trees = model.trees.for_outage(net, outage);
    if net.chains.is_some() {
        return super::chain::ChainRouting::new(net, &trees, outage).headroom(model.mode);
    }
    let routes = super::routes(net, &trees, &super::processing_sites(net, outage));
    headroom(net, &routes, model.mode)
}

/// The headroom of one outage under `mode`, from its `routes` ([`super::routes`]).
/// Nearest: O(Σ nearest routes' arcs + arcs + sites); steered: one LP of the size of the
/// steered fixed-route model plus one tying row per demand, by [`crate::solve::ladder`].
pub fn headroom(net: &Network, routes: &[Option<DemandRoutes>], mode: Mode) -> Result<Headroom> {
    let active = active(net, routes);
    if active.is_empty() {
        return Ok(exact(None));
    }
    let cut_off = active.iter().any(|&d| {
        routes[d]
            .as_ref()
            .is_none_or(|r| r.candidates.is_empty() || r.nearest.is_empty())
    });
    if cut_off {
        return Ok(exact(Some(0.0)));
    }
    match mode {
        Mode::Nearest => Ok(exact(Some(nearest(net, routes, &active)?))),
        Mode::Steered => steered(net, routes, &active),
    }
}

/// Nearest: `min_r capacity_r / load_r` over the loads of every active demand sending its
/// `required` on its nearest routes (the offered load of [`super::offered`], restricted
/// to the active demands, which is the same load: the others send 0).
fn nearest(net: &Network, routes: &[Option<DemandRoutes>], active: &[usize]) -> Result<f64> {
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut site_load = vec![0.0; net.sites.len()];
    for &d in active {
        let Some(r) = &routes[d] else { continue };
        let w = net.demands[d].required / r.nearest.len() as f64;
        for &c in &r.nearest {
            let ch = &r.candidates[c];
            site_load[ch.site] += w;
            for &(a, f) in &ch.arcs {
                arc_load[a] += w * f;
            }
        }
    }
    let arcs = net
        .arcs
        .iter()
        .zip(&arc_load)
        .map(|(a, &l)| allows(a.capacity, l));
    let sites = net
        .sites
        .iter()
        .zip(&site_load)
        .map(|(s, &l)| allows(s.processing, l));
    let lambda = arcs.chain(sites).fold(f64::INFINITY, f64::min);
    if lambda.is_finite() {
        Ok(lambda)
    } else {
        Err(Error::Internal(
            "nearest headroom: a surviving demand with a route loads no site".into(),
        ))
    }
}

/// Steered: the LP of the module documentation, verified.
///
/// - The a-priori bound `Λ = Σ processing of the candidate sites / Σ required` caps λ and
///   each demand's variables at `Λ · required_d` (every unit is processed once), which
///   lets [`fixed::build`] lower rows that cannot bind without changing the optimum.
/// - *Lower bound*: the backend's variables clamped at 0, then all scaled by
///   `s = min(1, min_r capacity_r / load_r)` over the real capacities; the scaled
///   allocation is feasible and serves each demand `d` at least
///   `s · Σ_v y_{d,v} / required_d` of its required, so `λ ≥ s · min_d` of that.
/// - *Upper bound*: for any prices `p_r ≥ 0` on the capacity rows, with `c_{d,v}` the
///   priced cost of one unit of `d` processed at `v` (its per-unit loads times prices),
///   `λ · Σ_d required_d · min_v c_{d,v} ≤ Σ_r p_r · rhs_r`, since every allocation at
///   factor `λ ≤ Λ` keeps each row within its (possibly lowered) right-hand side. With
///   the LP's shadow prices the quotient meets the optimum.
///
/// Proven when the residual is within [`crate::solve::RESIDUAL_TOL`] and the bounds meet within
/// [`crate::solve::GAP_TOL`] of the upper bound; the value is then the plainest number in the interval
/// (1 when it holds 1), else the lower bound.
fn steered(net: &Network, routes: &[Option<DemandRoutes>], active: &[usize]) -> Result<Headroom> {
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let total_required: f64 = active.iter().map(|&d| required[d]).sum();
    let mut candidate = vec![false; net.sites.len()];
    for r in routes.iter().flatten() {
        for ch in &r.candidates {
            candidate[ch.site] = true;
        }
    }
    let total_processing: f64 = (0..net.sites.len())
        .filter(|&v| candidate[v])
        .map(|v| net.sites[v].processing)
        .sum();
    let ceiling = total_processing / total_required;
    if !(ceiling.is_finite() && ceiling > 0.0) {
        return Err(Error::Solver(format!(
            "steered headroom: no finite a-priori bound (processing {total_processing}, \
             required {total_required})"
        )));
    }
    let caps = lambda_caps(net.demands.len(), active, &required, ceiling);
    let mut model = lp::Lp::new(true);
    let index = fixed::build(
        &mut model,
        net,
        routes,
        Mode::Steered,
        &caps,
        0.0,
        None,
        None,
    );
    let row_floor = tie_to_lambda(&mut model, &index, active, &required, &caps, ceiling);
    let real_arc: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let real_site: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    climb(&model, &row_floor, ceiling, &mut |sol, x| {
        let lower = scaled_factor(&index, x, active, &required, &real_arc, &real_site);
        let upper = quotient(&model, &index, &sol.duals, routes, active, &required);
        (lower, upper)
    })
}

/// A headroom certificate's bounds from one solution and its clamped variables.
pub(super) type Bounds<'a> = dyn FnMut(&lp::LpSolution, &[f64]) -> (f64, f64) + 'a;

/// The λ-LP `model` (rows' residual floors `row_floor`) solved by each backend of
/// [`ladder`] in turn until `bounds` (per solution and its clamped variables: a lower
/// bound, and an upper bound capped here at `ceiling`) meet ([`Headroom::narrow`]). Fails
/// only when every backend fails. Cost: one LP solve per attempt plus `bounds`.
pub(super) fn climb(
    model: &lp::Lp,
    row_floor: &[f64],
    ceiling: f64,
    bounds: &mut Bounds<'_>,
) -> Result<Headroom> {
    let var_floor = model.upper.clone();
    let mut best = Headroom::open(ceiling);
    let mut errors = Vec::new();
    let mut solved = false;
    for backend in ladder().iter() {
        let sol = match backend.solve(model) {
            Ok(s) => s,
            Err(e) => {
                errors.push(format!("{}: {e}", backend.name()));
                continue;
            }
        };
        solved = true;
        let residual = verify::residual(model, &sol.x, row_floor, &var_floor);
        let x: Vec<f64> = sol
            .x
            .iter()
            .map(|&v| if v.is_finite() { v.max(0.0) } else { 0.0 })
            .collect();
        let (lower, upper) = bounds(&sol, &x);
        if best.narrow(lower, upper.min(ceiling), residual) {
            break;
        }
    }
    if !solved {
        return Err(Error::Solver(errors.join("; ")));
    }
    Ok(best)
}

/// Per demand, the cap of its variables in the λ-LP: `ceiling · required` for the active
/// demands (ascending), 0 for the others. O(demands · log active).
pub(super) fn lambda_caps(n: usize, active: &[usize], required: &[f64], ceiling: f64) -> Vec<f64> {
    (0..n)
        .map(|d| {
            if active.binary_search(&d).is_ok() {
                ceiling * required[d]
            } else {
                0.0
            }
        })
        .collect()
}

/// Adds λ (in `[0, ceiling]`, objective 1) to the fixed-route model `index` in `model`
/// and ties each active demand's variables to `λ · required_d`; returns each row's floor
/// for the residual (0, and `caps[d]` on the tie rows). O(active demands' variables).
pub(super) fn tie_to_lambda(
    model: &mut lp::Lp,
    index: &fixed::FixedIndex,
    active: &[usize],
    required: &[f64],
    caps: &[f64],
    ceiling: f64,
) -> Vec<f64> {
    let lambda = model.add_var(0.0, ceiling, 1.0);
    model.magnitude[lambda] = ceiling;
    let mut row_floor = vec![0.0; model.rows.len()];
    for &d in active {
        let mut coeffs: Vec<(usize, f64)> =
            index.demand_vars[d].iter().map(|&v| (v, 1.0)).collect();
        coeffs.push((lambda, -required[d]));
        model.add_row(coeffs, Sense::Eq, 0.0);
        row_floor.push(caps[d]);
    }
    row_floor
}

/// The lower bound of [`steered`]: `s · min_d Σ_v x_{d,v} / required_d` with `s` the
/// worst overload of the allocation `x` (clamped at 0) against the real capacities,
/// shrunk by a few ulps so the scaled loads stay within them. O(nonzeros).
pub(super) fn scaled_factor(
    index: &fixed::FixedIndex,
    x: &[f64],
    active: &[usize],
    required: &[f64],
    arc_cap: &[f64],
    site_cap: &[f64],
) -> f64 {
    let (arc_load, site_load) = index.loads(x, arc_cap.len(), site_cap.len());
    let scale = arc_cap
        .iter()
        .zip(&arc_load)
        .chain(site_cap.iter().zip(&site_load))
        .map(|(&c, &l)| allows(c, l))
        .fold(1.0f64, f64::min)
        * (1.0 - 4.0 * f64::EPSILON);
    let flows = index.demand_flows(x);
    let least = active
        .iter()
        .map(|&d| flows[d] / required[d])
        .fold(f64::INFINITY, f64::min);
    (scale * least).max(0.0)
}

/// The upper bound of [`steered`] for the shadow prices `duals` (clipped at 0) of the
/// capacity rows: `Σ_r p_r · rhs_r / Σ_d required_d · min_v c_{d,v}`; `+∞` when no
/// demand's cheapest choice has a positive price. O(nonzeros).
fn quotient(
    model: &lp::Lp,
    index: &fixed::FixedIndex,
    duals: &[f64],
    routes: &[Option<DemandRoutes>],
    active: &[usize],
    required: &[f64],
) -> f64 {
    let price = |row: &Option<usize>| row.map_or(0.0, |r| duals[r].max(0.0));
    let arc_price: Vec<f64> = index.arc_row.iter().map(price).collect();
    let site_price: Vec<f64> = index.site_row.iter().map(price).collect();
    let worth: f64 = index
        .arc_row
        .iter()
        .chain(&index.site_row)
        .map(|row| row.map_or(0.0, |r| duals[r].max(0.0) * model.rows[r].rhs))
        .sum();
    let mut priced = 0.0;
    for &d in active {
        let Some(r) = &routes[d] else { continue };
        let cheapest = r
            .candidates
            .iter()
            .map(|ch| {
                site_price[ch.site] + ch.arcs.iter().map(|&(a, f)| f * arc_price[a]).sum::<f64>()
            })
            .fold(f64::INFINITY, f64::min);
        priced += required[d] * cheapest;
    }
    concurrent::quotient(worth, priced)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::routing::{processing_sites, routes, spt::Trees};
    use crate::scenario::Outage;

    fn routed(text: &str) -> (Network, Vec<Option<DemandRoutes>>) {
        let net = Network::from_json(text).expect("valid test network");
        let r = routes(
            &net,
            &Trees::baseline(&net),
            &processing_sites(&net, &Outage::default()),
        );
        (net, r)
    }

    /// Hand-worked: a–b–c in a line, processing 10 at b and 30 at c, link capacities 100,
    /// one demand a→c of required 10, every metric 1. Nearest: both candidates have length 2
    /// (b: a→b then b→c; c: a→b→c then nothing), so the demand splits 5/5; site b allows
    /// 10/5 = 2, site c 30/5 = 6, each link 100/10 = 10: λ = 2. Steered may send all
    /// it can to c: x_b + x_c = 10λ with x_b ≤ 10, x_c ≤ 30, so λ = 40/10 = 4.
    #[test]
    fn nearest_and_steered_by_hand() {
        let (net, r) = routed(
            r#"{"sites":[{"id":"a"},{"id":"b","processing":10},{"id":"c","processing":30}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":100},
                     {"id":"bc","from":"b","to":"c","capacity":100}],
            "demands":[{"from":"a","to":"c","volume":10,"required":10}]}"#,
        );
        let n = headroom(&net, &r, Mode::Nearest).unwrap();
        assert_eq!(n.value, Some(2.0), "{n:?}");
        let s = headroom(&net, &r, Mode::Steered).unwrap();
        assert!(s.proven, "{s:?}");
        assert_eq!(s.value, Some(4.0), "{s:?}");
    }

    /// Hand-worked: without any processing site on the surviving network the demand has
    /// no candidate, so λ = 0 under both modes; without demands there is no value.
    #[test]
    fn cut_off_and_absent() {
        let (net, r) = routed(
            r#"{"sites":[{"id":"a"},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":100}],
            "demands":[{"from":"a","to":"b","volume":10,"required":10}]}"#,
        );
        for mode in [Mode::Nearest, Mode::Steered] {
            assert_eq!(headroom(&net, &r, mode).unwrap().value, Some(0.0));
        }
        let (net, r) = routed(
            r#"{"sites":[{"id":"a","processing":5},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":100}],
            "demands":[{"from":"a","to":"b","volume":10,"required":0}]}"#,
        );
        assert_eq!(headroom(&net, &r, Mode::Steered).unwrap().value, None);
    }
}
