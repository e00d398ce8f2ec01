//! After the LP: never buy what serves nothing, and name what each purchase is for.
//!
//! 1. **Trim.** Every re-solved outage's allocation stays feasible when each site's
//!    addition is cut to the most any of those allocations processes beyond the site's own
//!    capacity (rounded up to whole modules, the last one partial at `expand_max`), so the
//!    cut changes no served value of those allocations.
//! 2. **Snap.** Additions within 1e-6 (relative) below a grid of `SNAP_GRID` times the
//!    power of ten of the largest addition move up onto it (within `expand_max` and the
//!    budget; never down, so a purchase never ends below what its target needs): solver
//!    noise, not a purchase. The trimmed and snapped plan is re-solved; for close-all, when
//!    an outage that reached its best (by the proof standard of `generate::reaches`) no
//!    longer does, the untrimmed plan is kept.
//! 3. **Drop.** Cheapest addition first, each site's whole addition is removed and the
//!    outages whose allocation used it are re-solved; when none serves less (within
//!    [`TOL`] of its required demand) and, for close-all, none falls below its best by the
//!    proof standard, the removal stands. Crumbs left by the solver go here.
//! 4. **Drivers.** For each addition kept, the outages that serve less without it (the
//!    others kept), with the units they lose: they set the purchase.

use super::candidates::Candidates;
use super::generate::{Generation, reaches, verify};
use crate::audit::{Audit, RunOptions};
use crate::error::Result;
use crate::model::Network;
use crate::solve::{Evaluation, TOL};

/// The snapping grid of additions and how far below it an addition is snapped up
/// (defined in [`crate::tol`]).
use crate::tol::{SNAP_GRID, SNAP_UP_TOL};

/// A plan after trimming and dropping, with the drivers of each addition.
pub(super) struct Tidied {
    pub add: Vec<f64>,
    /// Per site: (outage, units it serves less without this addition), most first.
    pub drivers: Vec<Vec<(usize, f64)>>,
    /// Additions removed by the drop pass.
    pub dropped: usize,
}

/// Processing beyond the site's own capacity that outage `e` uses at `v`.
fn used_addition(net: &Network, e: &Evaluation, v: usize) -> f64 {
    (e.site_load.get(v).copied().unwrap_or(0.0) - net.sites[v].processing).max(0.0)
}

/// Trims, snaps, drops and names the drivers of `plan = (add, after)` (see the module
/// comment); `after` must be `add` evaluated with every outage of `data.gainable`
/// re-solved. Cost: one re-solve of the gainable outages when the trim or the snap changed
/// the plan, one re-solve of the outages using each bought site, twice for sites kept
/// before a later drop.
pub(super) fn tidy(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    data: &Generation<'_>,
    budget: Option<f64>,
    plan: (Vec<f64>, Vec<Evaluation>),
    opts: RunOptions,
) -> Result<Tidied> {
    let (gainable, bests) = (data.gainable, data.bests);
    let (mut add, mut after) = plan;
    let before = (add.clone(), after.clone());
    let n = net.sites.len();
    // 1. Trim to what the allocations use.
    for (v, a) in add.iter_mut().enumerate() {
        if *a <= 0.0 {
            continue;
        }
        let used = gainable
            .iter()
            .map(|&k| used_addition(net, &after[k], v))
            .fold(0.0, f64::max);
        let keep = cands.round_up(v, used);
        *a = a.min(keep);
    }
    // 2. Snap solver noise: an addition within SNAP_UP_TOL below a multiple of SNAP_GRID · the
    //    largest addition's power of ten moves up onto it (never down: a purchase never ends
    //    below what its verified target needs), within expand_max and the budget. Sites that
    //    buy by the module are whole modules already.
    add = snap_up(cands, add, budget);
    // The trimmed and snapped plan re-solved (the drop pass and the drivers read it); for
    // close-all, an outage that reached its best before and no longer does (the trim
    // follows the proven lower-bound allocation, which may serve a hair less than the
    // reported value) brings the untrimmed plan back.
    if add != before.0 {
        let trial_after = verify(&net.with_added_processing(&add), audit, gainable, opts)?;
        let lost = budget.is_none()
            && gainable
                .iter()
                .any(|&k| reaches(&before.1[k], bests[k]) && !reaches(&trial_after[k], bests[k]));
        if lost {
            add = before.0;
            after = before.1;
        } else {
            after = trial_after;
        }
    }
    // 3. Drop, cheapest addition first.
    let mut order: Vec<usize> = (0..n).filter(|&v| add[v] > 0.0).collect();
    let unit_cost = |v: usize| add[v] * cands.cost[v].unwrap_or(0.0);
    order.sort_by(|&a, &b| unit_cost(a).total_cmp(&unit_cost(b)).then(a.cmp(&b)));
    let mut drivers: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
    let mut dropped = 0;
    // Per kept site: the drop count when its drivers were found.
    let mut kept: Vec<(usize, usize)> = Vec::new();
    for &v in &order {
        let (losses, trial, trial_after) = without(net, audit, gainable, &add, &after, v, opts)?;
        // Close-all: no outage may fall below its best by the proof standard either.
        let keeps_targets = budget.is_some()
            || gainable
                .iter()
                .all(|&k| !reaches(&after[k], bests[k]) || reaches(&trial_after[k], bests[k]));
        if losses.is_empty() && keeps_targets {
            add = trial;
            after = trial_after;
            dropped += 1;
        } else {
            drivers[v] = losses;
            kept.push((v, dropped));
        }
    }
    // 4. Drivers found before a later drop may have grown: find them again.
    for &(v, at) in &kept {
        if at < dropped {
            let (losses, _, _) = without(net, audit, gainable, &add, &after, v, opts)?;
            if !losses.is_empty() {
                drivers[v] = losses;
            }
        }
    }
    Ok(Tidied {
        add,
        drivers,
        dropped,
    })
}

/// `add` with solver noise snapped up: each addition at a site bought by the unit that lies
/// within [`SNAP_UP_TOL`] (relative) below a multiple of `SNAP_GRID` times the power of ten
/// of the largest addition moves up onto it, when that stays within `expand_max` and
/// (when given) the budget. Never lowers an addition, so it never serves less. O(sites).
pub(crate) fn snap_up(cands: &Candidates, mut add: Vec<f64>, budget: Option<f64>) -> Vec<f64> {
    let largest = add.iter().copied().fold(0.0, f64::max);
    if largest <= 0.0 {
        return add;
    }
    let grid = SNAP_GRID * 10f64.powf(largest.log10().floor());
    for v in (0..add.len()).filter(|&v| cands.module(v).is_none()) {
        let snapped = (add[v] / grid).ceil() * grid;
        if add[v] > 0.0
            && snapped > add[v]
            && snapped - add[v] <= SNAP_UP_TOL * add[v]
            && snapped <= cands.max[v]
        {
            let was = add[v];
            add[v] = snapped;
            if budget.is_some_and(|b| cands.cost_of(&add) > b) {
                add[v] = was;
            }
        }
    }
    add
}

type Without = (Vec<(usize, f64)>, Vec<f64>, Vec<Evaluation>);

/// The plan `add` with site `v`'s addition removed: the outages that serve less (more
/// than [`TOL`] of their required demand), most first, the trial plan and its evaluations.
/// Only outages whose allocation in `after` uses the addition at `v` are re-solved.
fn without(
    net: &Network,
    audit: &Audit,
    gainable: &[usize],
    add: &[f64],
    after: &[Evaluation],
    v: usize,
    opts: RunOptions,
) -> Result<Without> {
    let mut trial = add.to_vec();
    trial[v] = 0.0;
    let users: Vec<usize> = gainable
        .iter()
        .copied()
        .filter(|&k| used_addition(net, &after[k], v) > 0.0)
        .collect();
    let solved = verify(&net.with_added_processing(&trial), audit, &users, opts)?;
    let mut trial_after = after.to_vec();
    let mut losses = Vec::new();
    // Losses on a grid of TOL · total required, so that solver noise does not order them.
    let grid = TOL * net.total_required().max(1.0);
    for &k in &users {
        let loss = after[k].served_required - solved[k].served_required;
        if loss > TOL * after[k].surviving_required.max(1.0) {
            losses.push((k, (loss / grid).round() * grid));
        }
        trial_after[k] = solved[k].clone();
    }
    losses.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    Ok((losses, trial, trial_after))
}
