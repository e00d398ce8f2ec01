//! The edge LP: the two-layer flow model of one outage ([`super::flow`]) solved by the
//! backends of [`super::ladder`] in turn and verified ([`solve_verified`]): the engine the
//! walk engine falls back to and the expansion models build on.

use super::flow::{self, Cap};
use super::lp::{self, Backend};
use super::surviving::{Surviving, Unservable};
use super::types::{FunctionUse, Verification, Verified};
use super::{RESIDUAL_TOL, certify, ladder, verify};
use crate::error::{Error, Result};
use crate::model::{DemandIdx, Network};
use crate::scenario::Outage;
use crate::tol::PROOF_GAP_TOL;

/// Solves the served_required LP of `net` under `outage` and returns it with its flow
/// index, with the default backend and no verification. The building block of the
/// expansion models; [`super::evaluate`] verifies.
pub fn solve_flow(
    net: &Network,
    outage: &Outage,
    cap: Cap,
) -> Result<(lp::Lp, flow::FlowIndex, lp::LpSolution)> {
    let mut model = lp::Lp::new(true);
    let index = flow::build(&mut model, net, outage, cap, 1.0, None);
    let sol = if model.num_vars() == 0 {
        empty_solution(&model)
    } else {
        lp::solve(&model)?
    };
    Ok((model, index, sol))
}

fn empty_solution(model: &lp::Lp) -> lp::LpSolution {
    lp::LpSolution {
        x: Vec::new(),
        duals: vec![0.0; model.rows.len()],
        upper_duals: Vec::new(),
        objective: 0.0,
    }
}

/// Whether `proven`: residual within [`RESIDUAL_TOL`] and the bounds within [`PROOF_GAP_TOL`]
/// of `at_stake` of each other (in either direction: crossing bounds are a defect).
pub fn meets(residual: f64, lower: f64, upper: f64, at_stake: f64) -> bool {
    let gap = upper - lower;
    let tol = PROOF_GAP_TOL * at_stake.max(f64::MIN_POSITIVE);
    residual <= RESIDUAL_TOL && gap <= tol && gap >= -tol
}

/// Σ of the demand caps of the demands that some walk through a processing site can
/// serve on `view`: what is at stake in the LP. O(demands + reachability).
pub fn at_stake(net: &Network, view: &Surviving, bound: &[f64]) -> f64 {
    view.unservable(net, bound)
        .iter()
        .enumerate()
        .filter(|(d, r)| r.is_none() && view.demand_alive(net, *d) && bound[*d] > 0.0)
        .map(|(d, _)| bound[d])
        .sum()
}

/// The demand caps of `cap`, per demand.
pub fn caps_of(net: &Network, cap: Cap) -> Vec<f64> {
    net.demands
        .iter()
        .map(|d| match cap {
            Cap::Required => d.required,
            Cap::Volume => d.volume,
        })
        .collect()
}

/// Builds the flow LP of `view` with demand caps `cap`, solves it with each backend of
/// [`ladder`] in turn until the result is proven, and keeps the best proven bounds of all
/// attempts. Fails only when every backend fails.
///
/// Cost: one LP solve when the first backend is proven (the common case), plus the
/// certificate (O(sites · arcs · log sites)) and the repair per attempt.
pub fn solve_verified(net: &Network, view: &Surviving, cap: Cap) -> Result<Verified> {
    solve_verified_with(net, view, cap, ladder())
}

/// [`solve_verified`] with another ladder of backends (tests use it to check that a
/// backend's wrong answer is caught).
pub fn solve_verified_with(
    net: &Network,
    view: &Surviving,
    cap: Cap,
    ladder: &[&dyn Backend],
) -> Result<Verified> {
    let mut model = lp::Lp::new(true);
    let index = flow::build_on(&mut model, net, view, cap, 1.0, None);
    let bound = caps_of(net, cap);
    let at_stake: f64 = index
        .demand_var
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_some())
        .map(|(d, _)| bound[d])
        .sum();
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    if model.num_vars() == 0 {
        let solution = empty_solution(&model);
        let allocation = verify::repair(
            net,
            &index,
            &solution.x,
            &arc_capacity,
            &site_capacity,
            &bound,
        );
        return Ok(Verified {
            allocation,
            lp_value: 0.0,
            verification: Verification::nothing_to_route(),
            arc_price: vec![0.0; net.arcs.len()],
            site_price: vec![0.0; net.sites.len()],
            arc_has_row: vec![false; net.arcs.len()],
            site_has_row: vec![false; net.sites.len()],
            bound_price: (Vec::new(), Vec::new()),
            functions: Vec::new(),
        });
    }
    let (row_floor, var_floor) = index.magnitudes(&model, f64::MIN_POSITIVE);
    let arc_has_row: Vec<bool> = index.arc_row.iter().map(Option::is_some).collect();
    let site_has_row: Vec<bool> = index.site_row.iter().map(Option::is_some).collect();
    let (mut out, best_prices) = climb(
        ladder,
        at_stake,
        (&arc_has_row, &site_has_row),
        (Vec::new(), Vec::new()),
        |backend, errors| {
            let floors = (row_floor.as_slice(), var_floor.as_slice());
            let Some(Attempt {
                solution,
                residual,
                allocation,
            }) = try_backend(backend, &model, floors, net, &index, &bound, errors)?
            else {
                return Ok(None);
            };
            let price = |row: &Option<usize>| row.map_or(0.0, |r| solution.duals[r].max(0.0));
            let arc_price: Vec<f64> = index.arc_row.iter().map(price).collect();
            let site_price: Vec<f64> = index.site_row.iter().map(price).collect();
            let upper = certify::dual_bound(
                net,
                view,
                &bound,
                &index.arc_cap,
                &index.site_cap,
                &arc_price,
                &site_price,
            )
            .min(at_stake);
            Ok(Some(Rung {
                lp_value: index.served(&solution.x),
                allocation,
                residual,
                upper,
                prices: (arc_price, site_price),
                functions: Vec::new,
            }))
        },
    )?;
    out.arc_price = real_prices(&best_prices.0, &index.arc_cap, |a| net.arcs[a].capacity);
    out.site_price = real_prices(&best_prices.1, &index.site_cap, |v| net.sites[v].processing);
    out.bound_price = best_prices;
    Ok(out)
}

/// Demands with required > 0 that no walk through a processing site can serve even with
/// nothing failed, with the reason (structural: reachability only, no LP).
/// O(sources · (sites + arcs)).
pub fn baseline_cut_off(net: &Network) -> Vec<(DemandIdx, Unservable)> {
    let view = Surviving::new(net, &Outage::default(), None);
    let cut = if net.chains.is_some() {
        let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
        super::chain::cut_off(net, &view, &required)
    } else {
        super::finish::cut_off_on(net, &view)
    };
    cut.into_iter().map(|(d, r)| (DemandIdx(d), r)).collect()
}

/// Whether some surviving demand offers more than its required part, so that throughput
/// needs its own LP (with volume caps). O(demands).
pub fn needs_volume_lp(net: &Network, outage: &Outage) -> bool {
    let site_alive = outage.site_alive(net);
    net.demands
        .iter()
        .any(|d| site_alive[d.from] && site_alive[d.to] && d.volume > d.required)
}

/// One backend's answer on a flow model, checked: the solution, its residual
/// ([`verify::residual`] with the floors `floors`), and the feasible allocation repaired from
/// it against the file's real capacities ([`verify::repair`], demand caps `bound`).
pub(crate) struct Attempt {
    pub solution: lp::LpSolution,
    pub residual: f64,
    pub allocation: verify::Repaired,
}

/// Solves `model` (built into `index`) with `backend` and checks the answer ([`Attempt`]);
/// a backend error is appended to `errors` as `name: error` and gives `Ok(None)`, so a
/// ladder goes on to its next backend. An interrupt (before the attempt, or reported by the
/// backend) is returned as the error: microlp cannot be stopped mid-solve, so no attempt
/// starts after one. Cost: one solve, O(nonzeros) for the residual, the repair.
pub(crate) fn try_backend(
    backend: &dyn Backend,
    model: &lp::Lp,
    floors: (&[f64], &[f64]),
    net: &Network,
    index: &flow::FlowIndex,
    bound: &[f64],
    errors: &mut Vec<String>,
) -> Result<Option<Attempt>> {
    super::cancel::check()?;
    let solution = match backend.solve(model) {
        Ok(s) => s,
        Err(e @ Error::Interrupted(_)) => return Err(e),
        Err(e) => {
            errors.push(format!("{}: {e}", backend.name()));
            return Ok(None);
        }
    };
    let residual = verify::residual(model, &solution.x, floors.0, floors.1);
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    let allocation = verify::repair(
        net,
        index,
        &solution.x,
        &arc_capacity,
        &site_capacity,
        bound,
    );
    Ok(Some(Attempt {
        solution,
        residual,
        allocation,
    }))
}

/// Whether a backend attempt whose allocation has `residual` and serves `served` (its
/// repaired lower bound) should replace `best`, the best attempt so far: one that passes
/// the residual check ([`RESIDUAL_TOL`]) beats one that does not, then the larger lower
/// bound wins. O(1).
pub(crate) fn better_attempt(best: Option<&Verified>, residual: f64, served: f64) -> bool {
    let feasible = residual <= RESIDUAL_TOL;
    best.is_none_or(|b| {
        let b_feasible = b.verification.residual <= RESIDUAL_TOL;
        (feasible && !b_feasible) || (feasible == b_feasible && served > b.allocation.served)
    })
}

/// One backend's checked answer in a [`climb`]: the LP's own value, the allocation
/// repaired from it (its `served` is the lower bound it proves), its residual, the upper
/// bound its prices prove (already capped at what is at stake), those prices, and
/// `functions`, which gives the allocation's per-function use once the climb keeps it.
pub(crate) struct Rung<P, K> {
    pub lp_value: f64,
    pub allocation: verify::Repaired,
    pub residual: f64,
    pub upper: f64,
    pub prices: P,
    pub functions: K,
}

/// The verified climb up a ladder of backends: `attempt` solves and checks the model with
/// each backend of `ladder` in turn (giving `Ok(None)` when the backend fails, after
/// noting why in the error list it is given), the best attempt is kept
/// ([`better_attempt`]) as a [`Verified`] with the model's rows `has_row` (arcs, sites)
/// and no prices yet, the lowest upper bound of all attempts and its prices (`initial`
/// until an attempt gives one) are kept beside it, and the climb stops at the first
/// result that [`meets`] its upper bound over `at_stake`. Fails with the noted errors only
/// when every backend fails. O(Σ attempts) beyond them.
///
/// Invariant: the kept result's `verification.upper` is the lowest upper bound seen and
/// `verification.attempts` the number of backends tried.
pub(crate) fn climb<P, K>(
    ladder: &[&dyn Backend],
    at_stake: f64,
    has_row: (&[bool], &[bool]),
    initial: P,
    mut attempt: impl FnMut(&dyn Backend, &mut Vec<String>) -> Result<Option<Rung<P, K>>>,
) -> Result<(Verified, P)>
where
    K: FnOnce() -> Vec<FunctionUse>,
{
    let mut best: Option<Verified> = None;
    let mut best_upper = f64::INFINITY;
    let mut best_prices = initial;
    let mut errors = Vec::new();
    for (tried, backend) in ladder.iter().enumerate() {
        let Some(rung) = attempt(*backend, &mut errors)? else {
            continue;
        };
        if rung.upper < best_upper {
            best_upper = rung.upper;
            best_prices = rung.prices;
        }
        let served = rung.allocation.served;
        if better_attempt(best.as_ref(), rung.residual, served) {
            best = Some(Verified {
                lp_value: rung.lp_value,
                verification: Verification::open(served, rung.residual, tried + 1, backend.name()),
                allocation: rung.allocation,
                arc_price: Vec::new(),
                site_price: Vec::new(),
                arc_has_row: has_row.0.to_vec(),
                site_has_row: has_row.1.to_vec(),
                bound_price: (Vec::new(), Vec::new()),
                functions: (rung.functions)(),
            });
        }
        let b = best.as_mut().expect("set above");
        b.verification.attempts = tried + 1;
        b.verification.upper = best_upper;
        b.verification.proven = meets(
            b.verification.residual,
            b.verification.lower,
            best_upper,
            at_stake,
        );
        if b.verification.proven {
            break;
        }
    }
    let best = best.ok_or_else(|| Error::Solver(errors.join("; ")))?;
    Ok((best, best_prices))
}

/// The prices of the real capacities from the prices `priced` of a model's rows whose
/// bounds `model_cap` the presolve may have lowered: 0 where it did (`model_cap[i] <
/// real(i)`: that row cannot bind, so its price is not one of the real capacity), else
/// the row's price. O(rows).
pub(crate) fn real_prices(
    priced: &[f64],
    model_cap: &[f64],
    real: impl Fn(usize) -> f64,
) -> Vec<f64> {
    (0..model_cap.len())
        .map(|i| {
            if model_cap[i] < real(i) {
                0.0
            } else {
                priced[i]
            }
        })
        .collect()
}
