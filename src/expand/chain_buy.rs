//! Buying function capacity for service chains (a network whose file lists `functions`):
//! per-scenario closings ([`close`]) and one plan for every scenario ([`plan`]), with the
//! same goals as the processing purchases of [`super::close_with`] and [`super::plan`].
//!
//! **Model.** A purchase is a *slot* `(site, function)` offered by `sites[].expand`
//! (cost per unit, most units); a file whose sites offer nothing makes every (site,
//! function) a slot at cost 1 without limit, as a file without `expand_cost` does for
//! processing. Units are measured where traffic enters the function, like the capacity
//! they add to. The served model of one outage is the layered edge LP of
//! [`crate::solve::chain::build`] built on the network with every offered slot made able
//! to run (so layers through a site that has none of the function yet exist), whose
//! function rows then get their real capacity back and a purchase variable `b_s`:
//! `Σ G_j · x ≤ capacity + b_s`. The purchase variables are shared by every outage of a
//! plan's master.
//!
//! **Goals** ([`Goal`]): close-all minimises `Σ cost · b` with every gainable outage at its
//! best reachable served_required (one verified solve with every slot at its most); the
//! budget goals maximise the worst served fraction (then the total shortfall) or the
//! total, within `Σ cost · b ≤ budget`, each optimum held by the next phase, ending with
//! the least cost and a tie-break toward slots earlier in the file (site order, then the
//! order of `functions`). Every gainable outage is in the one master (no constraint
//! generation; refused past [`super::TOTAL_MAX_VARS`] variables).
//!
//! **Verification** as for processing: a closing is re-solved with its purchase applied
//! ([`Closing::verified`]); a plan re-solves every outage with a shortfall; a purchase the
//! interior point left a hair short is raised by [`CHAIN_RAISE`] per round. A bought slot
//! whose removal serves nothing less in any outage is dropped; the others list the
//! outages that lose most without them (drivers).

use std::collections::BTreeMap;

use super::candidates::Candidates;
use super::close::{Closing, binding, links_of, target};
use super::generate::{TOP_UP_ROUNDS, reaches};
use super::tidy::snap_up;
use super::{Goal, Plan, Round, TOTAL_MAX_VARS};
use crate::audit::{self, Audit, RunOptions};
use crate::error::{Error, Result};
use crate::model::{FunctionIdx, Network, SiteIdx};
use crate::scenario::Outage;
use crate::solve::chain;
use crate::solve::evaluator::served_at_least;
use crate::solve::lp::{self, Lp, Sense};
use crate::solve::{Evaluation, Surviving, TOL};
use crate::tol::{CHAIN_PLAIN_TOL, CHAIN_RAISE, COST_TOL, HOLD_RETRY, HOLD_TOL};

/// Where function capacity may be bought: the slots and their costs and limits.
#[derive(Debug, Clone, PartialEq)]
pub struct Offer {
    /// Purchase slots `(site, function)`, by site then function.
    pub slots: Vec<(SiteIdx, FunctionIdx)>,
    /// Cost, most units and (never) module per slot: a [`Candidates`] indexed by slot.
    pub cands: Candidates,
    /// Per function: an upper bound on what any outage can put through it (Σ over demands
    /// of required · the cumulative gain at each position of the function in the chain);
    /// no purchase above it can serve more.
    pub need: Vec<f64>,
}

/// One bought amount of a function at a site.
#[derive(Debug, Clone, PartialEq)]
pub struct FunctionPurchase {
    pub site: SiteIdx,
    pub function: FunctionIdx,
    /// Units of the function's capacity (measured where traffic enters it).
    pub units: f64,
    /// `units` × the slot's cost per unit.
    pub cost: f64,
    /// The outages that serve less without this purchase (the others kept), with the units
    /// they lose, most first (plans only; empty in a closing).
    pub drivers: Vec<(usize, f64)>,
}

impl Offer {
    /// The offer of a network with chains. O(sites · functions + Σ chain lengths).
    pub fn of(net: &Network) -> Offer {
        let ch = net.chains.as_ref().expect("a network with functions");
        let nf = ch.functions.len();
        let any = ch.expand.iter().flatten().any(Option::is_some);
        let (mut slots, mut cost, mut max) = (Vec::new(), Vec::new(), Vec::new());
        for v in 0..net.sites.len() {
            for f in 0..nf {
                match &ch.expand[v][f] {
                    _ if !any => {
                        slots.push((SiteIdx(v), f));
                        cost.push(Some(1.0));
                        max.push(f64::INFINITY);
                    }
                    Some(e) => {
                        slots.push((SiteIdx(v), f));
                        cost.push(Some(e.cost));
                        max.push(e.max);
                    }
                    None => {}
                }
            }
        }
        let mut need = vec![0.0; nf];
        for (d, dem) in net.demands.iter().enumerate() {
            let cum = ch.cumulative(&ch.chain[d]);
            for (j, &f) in ch.chain[d].iter().enumerate() {
                need[f] += dem.required * cum[j];
            }
        }
        let k = slots.len();
        Offer {
            slots,
            cands: Candidates {
                cost,
                max,
                step: vec![None; k],
                default_costs: !any,
            },
            need,
        }
    }

    /// Per site, per function: the units of `units` (per slot). O(slots + sites · functions).
    pub fn per_site(&self, net: &Network, units: &[f64]) -> Vec<Vec<f64>> {
        let nf = net.chains.as_ref().map_or(0, |c| c.functions.len());
        let mut out = vec![vec![0.0; nf]; net.sites.len()];
        for (s, &(v, f)) in self.slots.iter().enumerate() {
            out[v][f] += units[s];
        }
        out
    }

    /// Per site: the units bought there, all functions together. O(slots).
    pub fn site_totals(&self, net: &Network, units: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; net.sites.len()];
        for (s, &(v, _)) in self.slots.iter().enumerate() {
            out[v] += units[s];
        }
        out
    }

    /// The most of slot `s` worth buying in `outage` (0 at a failed site): its limit, at
    /// most the function's [`Offer::need`]. O(1).
    fn room(&self, s: usize, alive: &[bool]) -> f64 {
        let (v, f) = self.slots[s];
        if alive[v] {
            self.cands.max[s].min(self.need[f]).max(0.0)
        } else {
            0.0
        }
    }

    /// The purchases of `units` (per slot) that are positive, in slot order, without
    /// drivers. O(slots).
    pub fn purchases(&self, units: &[f64]) -> Vec<FunctionPurchase> {
        self.slots
            .iter()
            .enumerate()
            .filter(|&(s, _)| units[s] > 0.0)
            .map(|(s, &(site, function))| FunctionPurchase {
                site,
                function,
                units: units[s],
                cost: units[s] * self.cands.cost[s].unwrap_or(0.0),
                drivers: Vec::new(),
            })
            .collect()
    }
}

/// `net` with the purchase `units` (per slot of `offer`) applied. O(size of the network).
pub fn with_units(net: &Network, offer: &Offer, units: &[f64]) -> Network {
    net.with_added_functions(&offer.per_site(net, units))
}

/// The model purchases of function capacity are made for: the best re-route's layered LP
/// ([`BestReroute`]) or a routing as deployed (`crate::routing::chain`). Closings and
/// plans read it only through these two methods.
pub trait ChainModel: Sync {
    /// The verified evaluation of `outage` on `net` (the purchase already applied).
    fn evaluate(&self, net: &Network, outage: &Outage) -> Result<Evaluation>;

    /// Builds the served_required model of `at.outage` into `model` with the purchase
    /// variables `at.buy` (per slot of `at.offer`, already in `model`) adding to their
    /// function rows, the objective of its own variables 0; returns the variables whose
    /// sum is served_required.
    fn served_model(&self, model: &mut Lp, at: &BuyAt<'_>) -> Vec<usize>;
}

/// One outage of `net` a served model with purchases is built for: the offer and its
/// purchase variables (per slot, already in the model).
pub struct BuyAt<'a> {
    pub net: &'a Network,
    pub outage: &'a Outage,
    pub offer: &'a Offer,
    pub buy: &'a [usize],
}

/// The best re-route of service chains: [`chain::evaluate`] and the layered LP.
pub struct BestReroute;

impl ChainModel for BestReroute {
    fn evaluate(&self, net: &Network, outage: &Outage) -> Result<Evaluation> {
        chain::evaluate(net, outage)
    }

    fn served_model(&self, model: &mut Lp, at: &BuyAt<'_>) -> Vec<usize> {
        served_model(model, at.net, at.outage, at.offer, at.buy)
    }
}

/// The verified evaluation of `outage` on `net` with the purchase `units` under `m`.
fn evaluate_with(
    m: &dyn ChainModel,
    net: &Network,
    offer: &Offer,
    outage: &Outage,
    units: &[f64],
) -> Result<Evaluation> {
    m.evaluate(&with_units(net, offer, units), outage)
}

/// Adds one purchase variable per slot of `offer` to `model` (bounds `[0, room]` in
/// `outage`, objective `cost · weight`, magnitude hint the function's need). O(slots).
fn buy_vars(model: &mut Lp, offer: &Offer, alive: &[bool], weight: f64) -> Vec<usize> {
    (0..offer.slots.len())
        .map(|s| {
            let cost = offer.cands.cost[s].unwrap_or(0.0);
            let var = model.add_var(0.0, offer.room(s, alive), cost * weight);
            model.magnitude[var] = offer.need[offer.slots[s].1].max(1.0);
            var
        })
        .collect()
}

/// Builds the served_required model of `outage` (the layered LP of
/// [`chain::build`]) into `model`, with the purchase variables `buy` (per slot of
/// `offer`, already in `model`) adding to their function rows; the objective of its
/// variables is 0. Returns the demand variables whose sum is served_required.
/// Size: that of [`chain::build`] on the network with every offered slot able to run.
fn served_model(
    model: &mut Lp,
    net: &Network,
    outage: &Outage,
    offer: &Offer,
    buy: &[usize],
) -> Vec<usize> {
    // The outage's traffic matrix: its demands, the same sites and functions.
    let net = net.view(outage.matrix);
    let ch = net.chains.as_ref().expect("a network with functions");
    let alive = outage.site_alive(net);
    // Layers through every slot that may be bought: a positive capacity makes it run.
    let mut shaped = net.clone();
    let slot_of: BTreeMap<(SiteIdx, FunctionIdx), usize> = offer
        .slots
        .iter()
        .enumerate()
        .filter(|&(s, _)| offer.room(s, &alive) > 0.0)
        .map(|(s, &k)| (k, s))
        .collect();
    if let Some(sc) = shaped.chains.as_mut() {
        for &(v, f) in slot_of.keys() {
            sc.capacity[v][f] += 1.0;
        }
    }
    let view = Surviving::new(&shaped, outage, None);
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let (sub, layered, _) = chain::build(&shaped, &view, &required);
    let off = model.num_vars();
    for j in 0..sub.num_vars() {
        let var = model.add_var(sub.lower[j], sub.upper[j], 0.0);
        model.magnitude[var] = sub.magnitude[j];
    }
    let row_of: BTreeMap<usize, (SiteIdx, FunctionIdx)> = layered
        .function_row
        .iter()
        .map(|(&(v, f), &r)| (r, (SiteIdx(v), f)))
        .collect();
    for (r, row) in sub.rows.iter().enumerate() {
        let mut coeffs: Vec<(usize, f64)> = row.coeffs.iter().map(|&(j, a)| (j + off, a)).collect();
        let mut rhs = row.rhs;
        if let Some(&(v, f)) = row_of.get(&r) {
            // The row's right-hand side is min(shaped capacity, need): the real capacity
            // capped the same way.
            rhs = rhs.min(ch.capacity[v][f]);
            if let Some(&s) = slot_of.get(&(v, f)) {
                coeffs.push((buy[s], -1.0));
            }
        }
        model.add_row(coeffs, row.sense, rhs);
    }
    layered
        .demand_var
        .iter()
        .flatten()
        .map(|&j| j + off)
        .collect()
}

/// `x`'s purchase per slot: clamped into `[0, max]`, noise below [`TOL`] of `scale`
/// dropped. O(slots).
fn units_of(offer: &Offer, buy: &[usize], x: &[f64], scale: f64) -> Vec<f64> {
    buy.iter()
        .enumerate()
        .map(|(s, &var)| {
            let u = x[var].clamp(0.0, offer.cands.max[s]);
            if u <= TOL * scale { 0.0 } else { u }
        })
        .collect()
}

/// `units` with each amount at the nearest decimal with five digits below the largest
/// amount's leading digit, when that is within [`CHAIN_PLAIN_TOL`] (relative) and within
/// the slot's limit; else unchanged. The caller keeps the result only when its re-solve
/// serves what was asked. O(slots).
fn plain(offer: &Offer, units: &[f64]) -> Vec<f64> {
    let largest = units.iter().copied().fold(0.0, f64::max);
    if largest <= 0.0 {
        return units.to_vec();
    }
    let decimals = (5 - largest.log10().floor() as i64).clamp(0, 17) as usize;
    units
        .iter()
        .enumerate()
        .map(|(s, &u)| {
            // Decimal rounding through text: `3.00000` reads back as exactly 3.
            let r: f64 = format!("{u:.decimals$}").parse().unwrap_or(u);
            if u > 0.0
                && (r - u).abs() <= CHAIN_PLAIN_TOL * u
                && r <= offer.cands.max[s]
                && r >= 0.0
            {
                r
            } else {
                u
            }
        })
        .collect()
}

/// Holds an earlier phase's optimum in `model`: `Σ coeffs ≥ value − slack` (maximised
/// quantities) or `≤ value + slack` (minimised ones), with `slack` = [`HOLD_TOL`] relative;
/// solves with `objective`; retries once with the hold [`HOLD_RETRY`] times looser when
/// the backend fails. Returns the solution and the row.
fn hold_and_solve(
    model: &mut Lp,
    coeffs: Vec<(usize, f64)>,
    sense: Sense,
    value: f64,
    objective: Vec<f64>,
    maximise: bool,
) -> Result<lp::LpSolution> {
    let slack = HOLD_TOL * value.abs().max(1.0);
    let rhs = |s: f64| {
        if sense == Sense::Ge {
            value - s
        } else {
            value + s
        }
    };
    let row = model.add_row(coeffs, sense, rhs(slack));
    model.objective = objective;
    model.maximise = maximise;
    match lp::solve(model) {
        Ok(s) => Ok(s),
        Err(Error::Solver(_)) => {
            model.rows[row].rhs = rhs(slack * HOLD_RETRY);
            lp::solve(model)
        }
        Err(e) => Err(e),
    }
}

/// The last two phases of every purchase LP: with the current objective's optimum held,
/// the least cost, then the tie-break toward earlier slots (weight `1 + s / slots` per
/// unit), with the cost held. `model`'s objective must be what was just optimised
/// (`first`, maximised when `maximise`); when `first_is_cost`, the cost phase is skipped.
/// Returns the final solution and the least cost's LP value.
fn finish_phases(
    model: &mut Lp,
    buy: &[usize],
    offer: &Offer,
    first: lp::LpSolution,
    first_is_cost: bool,
) -> Result<(lp::LpSolution, f64)> {
    let n = model.num_vars();
    let cost_terms: Vec<(usize, f64)> = buy
        .iter()
        .enumerate()
        .map(|(s, &var)| (var, offer.cands.cost[s].unwrap_or(0.0)))
        .collect();
    let value_of =
        |x: &[f64], terms: &[(usize, f64)]| terms.iter().map(|&(j, a)| a * x[j]).sum::<f64>();
    let sol = if first_is_cost {
        first
    } else {
        let terms: Vec<(usize, f64)> = model
            .objective
            .iter()
            .enumerate()
            .filter(|(_, a)| **a != 0.0)
            .map(|(j, &a)| (j, a))
            .collect();
        let value = value_of(&first.x, &terms);
        let sense = if model.maximise { Sense::Ge } else { Sense::Le };
        let mut obj = vec![0.0; n];
        for &(j, a) in &cost_terms {
            obj[j] = a;
        }
        hold_and_solve(model, terms, sense, value, obj, false)?
    };
    let cost = value_of(&sol.x, &cost_terms);
    let k = buy.len().max(1) as f64;
    let mut obj = vec![0.0; n];
    for (s, &var) in buy.iter().enumerate() {
        obj[var] = 1.0 + s as f64 / k;
    }
    let held = cost * (1.0 + COST_TOL) + COST_TOL;
    match hold_and_solve(model, cost_terms, Sense::Le, held, obj, false) {
        Ok(tie) => Ok((tie, cost)),
        // The tie-break is a preference only: without it the least-cost answer stands.
        Err(Error::Solver(_)) => Ok((sol, cost)),
        Err(e) => Err(e),
    }
}

/// `units` evaluated on `outage` and raised by [`CHAIN_RAISE`] (relative, within each
/// slot's limit) while the evaluation misses `best` by [`reaches`], at most
/// [`TOP_UP_ROUNDS`] times; with the last evaluation.
fn top_up(
    m: &dyn ChainModel,
    net: &Network,
    offer: &Offer,
    outage: &Outage,
    best: f64,
    mut units: Vec<f64>,
) -> Result<(Vec<f64>, Evaluation)> {
    let mut after = evaluate_with(m, net, offer, outage, &units)?;
    for _ in 0..TOP_UP_ROUNDS {
        if reaches(&after, best) || !raise(offer, &mut units) {
            break;
        }
        after = evaluate_with(m, net, offer, outage, &units)?;
    }
    Ok((units, after))
}

/// Raises every positive purchase by [`CHAIN_RAISE`] within its limit; false when none
/// could rise. O(slots).
fn raise(offer: &Offer, units: &mut [f64]) -> bool {
    let mut moved = false;
    for (s, u) in units.iter_mut().enumerate() {
        let to = (*u * (1.0 + CHAIN_RAISE)).min(offer.cands.max[s]);
        if *u > 0.0 && to > *u {
            *u = to;
            moved = true;
        }
    }
    moved
}

/// Best served_required of `outage` (evaluated as `eval`) with every offered slot that
/// survives bought as far as it can help (its limit, at most [`Offer::need`]), verified, and the link
/// directions whose capacity limits it. Snapped to the whole required demand within
/// [`TOL`], never below `eval`'s served value. One [`chain::evaluate`].
pub fn best_reachable(
    m: &dyn ChainModel,
    net: &Network,
    outage: &Outage,
    offer: &Offer,
    eval: &Evaluation,
) -> Result<(f64, Vec<(usize, f64)>)> {
    let alive = outage.site_alive(net);
    let most: Vec<f64> = (0..offer.slots.len())
        .map(|s| offer.room(s, &alive))
        .collect();
    let e = evaluate_with(m, net, offer, outage, &most)?;
    let arcs = binding(e.arc_price.iter().copied().enumerate());
    let required = eval.surviving_required;
    let best = if (required - e.served_required).abs() <= TOL * required.max(1.0) {
        required
    } else {
        e.served_required.max(eval.served_required)
    };
    Ok((best, arcs))
}

/// For one scenario with a shortfall (evaluated as `eval`), the cheapest function
/// capacity (per site and function, within `offer`) with which served_required reaches
/// the best value any purchase reaches; `None` without a shortfall. The cost LP (cost
/// minimised subject to served ≥ best, then the tie-break toward earlier slots) is one
/// layered model with purchase variables; its purchase is re-solved and raised while
/// solver noise leaves it short. `Closing::add` holds the units per site (all functions
/// together), `Closing::functions` each (site, function).
pub fn close(
    net: &Network,
    outage: &Outage,
    eval: &Evaluation,
    offer: &Offer,
) -> Result<Option<Closing>> {
    close_for(&BestReroute, net, outage, eval, offer)
}

/// [`close`] for the model `m`.
pub fn close_for(
    m: &dyn ChainModel,
    net: &Network,
    outage: &Outage,
    eval: &Evaluation,
    offer: &Offer,
) -> Result<Option<Closing>> {
    if eval.shortfall <= 0.0 {
        return Ok(None);
    }
    let required = eval.surviving_required;
    let (best, binding_arcs) = best_reachable(m, net, outage, offer, eval)?;
    let scale = required.max(1.0);
    if best <= eval.served_required + TOL * scale {
        let mut c = Closing::nothing_to_buy(net, eval, binding_arcs);
        c.functions = Some(Vec::new());
        return Ok(Some(c));
    }
    let alive = outage.site_alive(net);
    let mut model = Lp::new(false);
    let buy = buy_vars(&mut model, offer, &alive, 1.0);
    let at = BuyAt {
        net,
        outage,
        offer,
        buy: &buy,
    };
    let served = m.served_model(&mut model, &at);
    served_at_least(&mut model, &served, target(best, required));
    let first = lp::solve(&model)?;
    let dual_bound = model.dual_objective(&first);
    let (sol, _) = finish_phases(&mut model, &buy, offer, first, true)?;
    let raw = units_of(offer, &buy, &sol.x, scale);
    let tidy = plain(offer, &raw);
    let after = evaluate_with(m, net, offer, outage, &tidy)?;
    let (units, after) = if reaches(&after, best) {
        (tidy, after)
    } else {
        top_up(
            m,
            net,
            offer,
            outage,
            best,
            snap_up(&offer.cands, raw, None),
        )?
    };
    Ok(Some(Closing {
        cost: offer.cands.cost_of(&units),
        add: offer.site_totals(net, &units),
        functions: Some(offer.purchases(&units)),
        best,
        not_closable: (required - best).max(0.0),
        binding_links: links_of(net, &binding_arcs),
        binding_arcs,
        dual_bound,
        modules_exhaustive: true,
        served_after: after.served_required,
        verified: after.proven() && reaches(&after, best),
    }))
}

/// One purchase of function capacity for every outage of `audit` (a network with
/// chains), for `goal`:
///
/// 1. best reachable served_required per outage with a shortfall ([`best_reachable`]),
///    in parallel; outages where it is above the served value are *gainable*;
/// 2. one master LP: the purchase variables shared by one layered model per gainable
///    outage, solved in lexicographic phases (the goal's objective, then the least cost,
///    then the tie-break toward earlier slots);
/// 3. every outage with a shortfall re-solved with the purchase; a close-all purchase
///    left short by solver noise raised by [`CHAIN_RAISE`] per round;
/// 4. each bought slot removed in turn: dropped when no gainable outage serves less
///    without it, else its drivers recorded.
///
/// Cost: the master (variables ≈ Σ over gainable outages of the layered LP's size),
/// plus one [`chain::evaluate`] per gainable outage per re-solve (rounds of step 3 and
/// one per bought slot in step 4).
pub fn plan(net: &Network, audit: &Audit, goal: Goal, opts: RunOptions) -> Result<Plan> {
    plan_for(&BestReroute, net, audit, goal, opts)
}

/// [`plan`] for the model `m` (`audit` evaluated by it).
pub fn plan_for(
    m: &dyn ChainModel,
    net: &Network,
    audit: &Audit,
    goal: Goal,
    opts: RunOptions,
) -> Result<Plan> {
    let offer = Offer::of(net);
    let n_out = audit.outages.len();
    let eval = |k: usize| &audit.evaluations[k];
    let bests: Vec<f64> = audit::par_map(
        &(0..n_out).collect::<Vec<_>>(),
        opts,
        "best reachable",
        |&k| {
            if eval(k).shortfall <= 0.0 {
                return Ok(eval(k).served_required);
            }
            Ok(best_reachable(m, net, &audit.outages[k], &offer, eval(k))?.0)
        },
    )?;
    let gainable: Vec<usize> = (0..n_out)
        .filter(|&k| bests[k] - eval(k).served_required > TOL * eval(k).surviving_required.max(1.0))
        .collect();
    let mut multiplicity = vec![0usize; n_out];
    for &k in &audit.outage_of {
        multiplicity[k] += 1;
    }
    let budget = match goal {
        Goal::CloseAll => None,
        Goal::WorstWithin(b) | Goal::TotalWithin(b) => Some(b),
    };
    let (mut units, rounds) = if gainable.is_empty() {
        (vec![0.0; offer.slots.len()], Vec::new())
    } else {
        master(
            m,
            net,
            audit,
            &offer,
            &gainable,
            &bests,
            &multiplicity,
            goal,
        )?
    };
    let verify = |units: &[f64], which: &[usize]| -> Result<Vec<Evaluation>> {
        let planned = with_units(net, &offer, units);
        audit::par_map(which, opts, "verifying plan", |&k| {
            m.evaluate(&planned, &audit.outages[k])
        })
    };
    // The plainer purchase when it serves as much: every gainable outage at its best
    // (close-all), or within the budget (budget goals; it moves each amount by at most
    // CHAIN_PLAIN_TOL).
    let tidy = plain(&offer, &units);
    let mut gained = verify(&tidy, &gainable)?;
    let kept = match budget {
        None => gainable
            .iter()
            .zip(&gained)
            .all(|(&k, e)| reaches(e, bests[k])),
        Some(b) => offer.cands.cost_of(&tidy) <= b * (1.0 + COST_TOL) + COST_TOL,
    };
    if kept {
        units = tidy;
    } else {
        units = snap_up(&offer.cands, units, budget);
        gained = verify(&units, &gainable)?;
    }
    if goal == Goal::CloseAll {
        for _ in 0..TOP_UP_ROUNDS {
            let short = gainable
                .iter()
                .zip(&gained)
                .any(|(&k, e)| !reaches(e, bests[k]));
            if !short || !raise(&offer, &mut units) {
                break;
            }
            gained = verify(&units, &gainable)?;
        }
    }
    // Drop what serves nothing; record what drives the rest.
    let mut drivers: Vec<Vec<(usize, f64)>> = vec![Vec::new(); offer.slots.len()];
    let mut dropped = 0;
    for s in 0..offer.slots.len() {
        if units[s] <= 0.0 {
            continue;
        }
        let mut trial = units.clone();
        trial[s] = 0.0;
        let without = verify(&trial, &gainable)?;
        let mut losses: Vec<(usize, f64)> = gainable
            .iter()
            .zip(gained.iter().zip(&without))
            .filter_map(|(&k, (with, wo))| {
                let lost = with.served_required - wo.served_required;
                (lost > TOL * eval(k).surviving_required.max(1.0)).then_some((k, lost))
            })
            .collect();
        if losses.is_empty() {
            units = trial;
            gained = without;
            dropped += 1;
        } else {
            losses.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
            drivers[s] = losses;
        }
    }
    let short: Vec<usize> = (0..n_out).filter(|&k| eval(k).shortfall > 0.0).collect();
    let mut after = audit.evaluations.clone();
    for (&k, e) in short.iter().zip(verify(&units, &short)?) {
        after[k] = e;
    }
    let mut purchases = offer.purchases(&units);
    for p in &mut purchases {
        let s = offer
            .slots
            .iter()
            .position(|&k| k == (p.site, p.function))
            .expect("a slot");
        p.drivers = drivers[s].clone();
    }
    // Per site: the outages that lose without some purchase there, each with its most.
    let mut site_drivers: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.sites.len()];
    for p in &purchases {
        let list = &mut site_drivers[p.site];
        for &(k, lost) in &p.drivers {
            match list.iter_mut().find(|(j, _)| *j == k) {
                Some(e) => e.1 = e.1.max(lost),
                None => list.push((k, lost)),
            }
        }
    }
    for list in &mut site_drivers {
        list.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    }
    let cost = offer.cands.cost_of(&units);
    if let Some(b) = budget {
        debug_assert!(cost <= b * (1.0 + COST_TOL) + COST_TOL, "{cost} within {b}");
    }
    Ok(Plan {
        goal,
        add: offer.site_totals(net, &units),
        cost,
        rounds,
        best: bests,
        worst_fraction: super::worst_fraction(&after),
        after,
        drivers: site_drivers,
        dropped,
        modules: None,
        master: Default::default(),
        functions: Some(purchases),
    })
}

/// The plan's master over the `gainable` outages: purchase variables shared by one
/// layered model per outage, solved for `goal` in lexicographic phases. Returns the
/// purchase per slot (as the LP left it, noise dropped) and the one round. Refused with a usage error past
/// [`TOTAL_MAX_VARS`] variables.
#[allow(clippy::too_many_arguments)]
fn master(
    m: &dyn ChainModel,
    net: &Network,
    audit: &Audit,
    offer: &Offer,
    gainable: &[usize],
    bests: &[f64],
    multiplicity: &[usize],
    goal: Goal,
) -> Result<(Vec<f64>, Vec<Round>)> {
    let mut model = Lp::new(false);
    // A slot is worth buying when its site survives some gainable outage.
    let alive_any: Vec<bool> = (0..net.sites.len())
        .map(|v| {
            gainable
                .iter()
                .any(|&k| !audit.outages[k].sites.contains(&SiteIdx(v)))
        })
        .collect();
    let cost_weight = if goal == Goal::CloseAll { 1.0 } else { 0.0 };
    let buy = buy_vars(&mut model, offer, &alive_any, cost_weight);
    let mut served = Vec::with_capacity(gainable.len());
    for &k in gainable {
        let at = BuyAt {
            net,
            outage: &audit.outages[k],
            offer,
            buy: &buy,
        };
        served.push(m.served_model(&mut model, &at));
        if model.num_vars() > TOTAL_MAX_VARS {
            return Err(Error::Usage(format!(
                "plan: the purchase model over {} outages needs more than {TOTAL_MAX_VARS} \
                 variables; plan on fewer scenarios (a smaller --depth or --fail list)",
                gainable.len()
            )));
        }
    }
    let required = |k: usize| audit.evaluations[k].surviving_required;
    let scale = gainable.iter().map(|&k| required(k)).fold(1.0, f64::max);
    let cost_row = |model: &mut Lp, b: f64| {
        let terms = buy
            .iter()
            .enumerate()
            .map(|(s, &v)| (v, offer.cands.cost[s].unwrap_or(0.0)))
            .collect();
        model.add_row(terms, Sense::Le, b);
    };
    // Σ over scenarios of served: each outage weighted by its scenarios.
    let total_terms: Vec<(usize, f64)> = gainable
        .iter()
        .zip(&served)
        .flat_map(|(&k, vars)| vars.iter().map(move |&v| (v, multiplicity[k] as f64)))
        .collect();
    let (sol, objective) = match goal {
        Goal::CloseAll => {
            for (&k, vars) in gainable.iter().zip(&served) {
                served_at_least(&mut model, vars, target(bests[k], required(k)));
            }
            let first = lp::solve(&model)?;
            let (sol, cost) = finish_phases(&mut model, &buy, offer, first, true)?;
            (sol, cost)
        }
        Goal::WorstWithin(b) => {
            cost_row(&mut model, b);
            let t_cap = (0..audit.outages.len())
                .filter(|k| !gainable.contains(k))
                .map(|k| audit.evaluations[k].served_fraction())
                .fold(1.0, f64::min);
            let t = model.add_var(0.0, t_cap, 1.0);
            model.maximise = true;
            for (&k, vars) in gainable.iter().zip(&served) {
                let mut terms: Vec<(usize, f64)> = vars.iter().map(|&v| (v, 1.0)).collect();
                terms.push((t, -required(k)));
                model.add_row(terms, Sense::Ge, 0.0);
            }
            let first = lp::solve(&model)?;
            let t_star = first.x[t];
            let mut obj = vec![0.0; model.num_vars()];
            for &(v, a) in &total_terms {
                obj[v] = a;
            }
            let second = hold_and_solve(&mut model, vec![(t, 1.0)], Sense::Ge, t_star, obj, true)?;
            let (sol, _) = finish_phases(&mut model, &buy, offer, second, false)?;
            (sol, t_star)
        }
        Goal::TotalWithin(b) => {
            cost_row(&mut model, b);
            model.maximise = true;
            model.objective = vec![0.0; model.num_vars()];
            for &(v, a) in &total_terms {
                model.objective[v] = a;
            }
            let first = lp::solve(&model)?;
            let total: f64 = total_terms.iter().map(|&(v, a)| a * first.x[v]).sum();
            let all: f64 = gainable
                .iter()
                .map(|&k| multiplicity[k] as f64 * required(k))
                .sum();
            let (sol, _) = finish_phases(&mut model, &buy, offer, first, false)?;
            (sol, (all - total).max(0.0))
        }
    };
    let units = units_of(offer, &buy, &sol.x, scale);
    Ok((
        units,
        vec![Round {
            active: gainable.len(),
            objective,
            violated: 0,
        }],
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The plainer amounts by hand: with 20 the largest, amounts round to 4 decimals
    /// (five digits below the leading digit of 20), kept when within 1e-5 relative and
    /// within the limit.
    #[test]
    fn plain_amounts() {
        let net = crate::model::test_net(
            r#"{"functions":[{"id":"f","gain":1}],
                "sites":[{"id":"a","expand":{"f":{"cost":1,"max":3}}},
                         {"id":"b","expand":{"f":{"cost":1}}},
                         {"id":"c","expand":{"f":{"cost":1}}},
                         {"id":"d","expand":{"f":{"cost":1}}}],
                "links":[{"id":"ab","from":"a","to":"b","capacity":1}],"demands":[]}"#,
        );
        let offer = Offer::of(&net);
        let at = |v: usize| (SiteIdx(v), 0);
        assert_eq!(offer.slots, vec![at(0), at(1), at(2), at(3)]);
        let got = plain(
            &offer,
            &[3.0000000000000004, 19.99999981, 2.99999, 0.123456],
        );
        // a: 3.0000000000000004 → 3 (within its max 3); b: 19.99999981 → 20 (1e-8 away);
        // c: 2.99999 is 1e-5 from 3 relative 3.3e-6 → 3; d: 0.123456 → 0.1235 is 3.5e-4
        // relative away: unchanged.
        assert_eq!(got, vec![3.0, 20.0, 3.0, 0.123456]);
        // Up to the limit: 2.9999999 at a (max 3; largest 2.9999999, so 5 decimals) rounds
        // to 3, which the limit allows.
        let got = plain(&offer, &[2.9999999, 0.0, 0.0, 0.0]);
        assert_eq!(got[0], 3.0);
    }
}
