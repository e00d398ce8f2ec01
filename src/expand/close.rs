//! The cheapest expansion for one scenario ([`close`]) and the best served_required any
//! expansion can reach ([`best_reachable`]).

use super::candidates::{Candidates, add_vars, values};
use super::generate::{TOP_UP_ROUNDS, cheapest_raise, reaches};
use super::modules::cheapest_whole;
use super::tidy::snap_up;
use crate::error::{Error, Result};
use crate::model::{LinkIdx, Network};
use crate::scenario::Outage;
use crate::solve::evaluator::{Evaluator, Walks, Warm, served_at_least};
use crate::solve::flow::FlowIndex;
use crate::solve::lp::Lp;
use crate::solve::{Evaluation, TOL};

/// The cheapest expansion for one scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Closing {
    /// Σ cost · add.
    pub cost: f64,
    /// Units added per site (with service chains: every function bought there together).
    pub add: Vec<f64>,
    /// With service chains: each function bought, per site ([`super::chain_buy`]);
    /// `None` for processing purchases.
    pub functions: Option<Vec<super::chain_buy::FunctionPurchase>>,
    /// The best served_required any expansion reaches.
    pub best: f64,
    /// Surviving required − best: the part links or connectivity hold back.
    pub not_closable: f64,
    /// Links whose capacity limits `best` (positive shadow price with unlimited
    /// expansion), in link order.
    pub binding_links: Vec<LinkIdx>,
    /// The link directions behind `binding_links`: (arc, shadow price with every
    /// candidate expanded as far as allowed), largest price first, then by arc. One more
    /// unit of that arc's capacity serves up to the price more there.
    pub binding_arcs: Vec<(usize, f64)>,
    /// The dual objective of the continuous cost LP: equals `cost` by strong duality when
    /// no site buys by the module, else a lower bound on it.
    pub dual_bound: f64,
    /// The whole-module search (branch and bound, `modules::cheapest_whole`) ran to the end, so no
    /// cheaper whole-module closing exists; false when it stopped at its node limit (the
    /// closing is then the cheapest found). True without modules.
    pub modules_exhaustive: bool,
    /// served_required of the scenario re-solved (and verified) with `add` applied.
    pub served_after: f64,
    /// `served_after` reaches `best` within [`crate::solve::GAP_TOL`] of the required demand and that
    /// re-solve was proven optimal: the closing is checked, not just computed.
    pub verified: bool,
}

impl Closing {
    /// The closing of a scenario (evaluated as `eval`) that no added processing improves:
    /// nothing to buy, its whole shortfall not closable, limited by `binding_arcs` (as
    /// [`Closing::binding_arcs`]).
    pub fn nothing_to_buy(
        net: &Network,
        eval: &Evaluation,
        binding_arcs: Vec<(usize, f64)>,
    ) -> Closing {
        Closing {
            cost: 0.0,
            add: vec![0.0; net.sites.len()],
            functions: None,
            best: eval.served_required,
            not_closable: eval.shortfall,
            binding_links: links_of(net, &binding_arcs),
            binding_arcs,
            dual_bound: 0.0,
            served_after: eval.served_required,
            verified: eval.proven(),
            modules_exhaustive: true,
        }
    }
}

/// The links of `arcs` (link directions), sorted, each once. O(k log k).
pub fn links_of(net: &Network, arcs: &[(usize, f64)]) -> Vec<LinkIdx> {
    let mut links: Vec<LinkIdx> = arcs.iter().map(|&(a, _)| net.arcs[a].link).collect();
    links.sort_unstable();
    links.dedup();
    links
}

/// Link directions with a shadow price above `PRICE_BINDS` (1e-6), as `(arc, price)`, largest
/// price first, then by arc. O(m log m).
pub fn binding(prices: impl Iterator<Item = (usize, f64)>) -> Vec<(usize, f64)> {
    let mut v: Vec<(usize, f64)> = prices.filter(|&(_, p)| p > PRICE_BINDS).collect();
    v.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    v
}

/// Best served_required of `outage` (evaluated as `eval` by `ev`) with every candidate
/// expanded as far as allowed, and the link directions whose capacity limits it (with
/// their shadow prices, as [`Closing::binding_arcs`]). The value is snapped to the
/// whole required demand when within [`TOL`], and never below what `eval` already serves.
/// The one best-reachable of closings and plans, for every engine and routing model.
pub(crate) fn best_reachable(
    ev: &dyn Evaluator,
    net: &Network,
    outage: &Outage,
    cands: &Candidates,
    eval: &Evaluation,
) -> Result<(f64, Vec<(usize, f64)>)> {
    best_reachable_from(ev, net, outage, cands, eval, None)
}

/// [`best_reachable`] with `ev` started from `warm` (an optimum `ev` returned for the
/// baseline of `net`, base traffic matrix: the expanded network only gains processing, so
/// its flows stay feasible; `None`: cold). The value is the same verified optimum.
/// Cost: one evaluation.
pub(crate) fn best_reachable_from(
    ev: &dyn Evaluator,
    net: &Network,
    outage: &Outage,
    cands: &Candidates,
    eval: &Evaluation,
    warm: Option<&Warm>,
) -> Result<(f64, Vec<(usize, f64)>)> {
    let required = eval.surviving_required;
    let warm = warm.filter(|_| outage.matrix == 0);
    let (best, links) = best_reachable_raw(ev, net, outage, cands, required, warm)?;
    let best = if (required - best).abs() <= TOL * required.max(1.0) {
        required
    } else {
        best.max(eval.served_required)
    };
    Ok((best, links))
}

/// [`best_reachable`] before snapping: the verified evaluation by `ev` of `net` with every
/// candidate site that survives expanded to `min(expand_max, required)` (no site can use
/// more than the whole demand), and the link directions with a positive shadow price
/// there. Using the verified solve means the best reachable value is proven by the same
/// independent bounds as every scenario's. Cost: one evaluation.
fn best_reachable_raw(
    ev: &dyn Evaluator,
    net: &Network,
    outage: &Outage,
    cands: &Candidates,
    required: f64,
    warm: Option<&Warm>,
) -> Result<(f64, Vec<(usize, f64)>)> {
    let alive = outage.site_alive(net);
    let add: Vec<f64> = (0..net.sites.len())
        .map(|v| match cands.cost[v] {
            Some(_) if alive[v] => cands.max[v].min(required).max(0.0),
            _ => 0.0,
        })
        .collect();
    let e = ev
        .evaluate(&net.with_added_processing(&add), outage, warm)?
        .evaluation;
    let arcs = binding(e.arc_price.iter().copied().enumerate());
    Ok((e.served_required, arcs))
}

use crate::tol::{CLOSE_TARGET_TOL, PRICE_BINDS};

/// For one scenario with a shortfall, the cheapest expansion (Σ expand_cost · add, add ≤
/// expand_max, whole modules where a site has `expand_step`) with which served_required
/// reaches the best value any expansion reaches; `None` when the scenario has no shortfall.
///
/// The best value is one verified solve with every candidate at its maximum; the cost is
/// the LP minimising cost subject to served ≥ best (a hair below when best is not the whole
/// required demand, see `target`), searched for whole modules by branch and bound
/// (`modules::cheapest_whole`). The purchase is then re-solved; where solver inaccuracy leaves it
/// short of best by more than the audit's proof tolerance, it is raised where the shadow
/// price makes that cheapest (`top_up_one`) and re-solved again.
pub fn close(
    net: &Network,
    outage: &Outage,
    eval: &Evaluation,
    cands: &Candidates,
) -> Result<Option<Closing>> {
    close_with(&Walks, net, outage, eval, cands)
}

/// [`close`] for the model of `ev` (the best re-route by the walk engine, or a routing
/// model): best reachable and the re-solves by `ev`, the cost LP by
/// [`Evaluator::closing_model`] (the walk engine's walk master, else the model of
/// [`Evaluator::add_processing`]), its whole-module search re-solving through that model.
/// Fails with a usage error when `ev` defines no purchases.
pub fn close_with(
    ev: &dyn Evaluator,
    net: &Network,
    outage: &Outage,
    eval: &Evaluation,
    cands: &Candidates,
) -> Result<Option<Closing>> {
    if eval.shortfall <= 0.0 {
        return Ok(None);
    }
    let required = eval.surviving_required;
    let (best, binding_arcs) = best_reachable(ev, net, outage, cands, eval)?;
    let scale = required.max(1.0);
    if best <= eval.served_required + TOL * scale {
        return Ok(Some(Closing::nothing_to_buy(net, eval, binding_arcs)));
    }
    let mut model = Lp::new(false);
    let add = add_vars(&mut model, net, cands, Some(outage), required, 1.0);
    let Some(cm) = ev.closing_model(&mut model, net, outage, &add, target(best, required))? else {
        return Err(Error::Usage(format!(
            "purchases are not defined for --routing {}",
            ev.name()
        )));
    };
    let whole = cheapest_whole(&model, &add, cands, &|lp| cm.solve(lp))?;
    let add_units = snap_up(cands, values(&add, &whole.x, scale), None);
    let (add_units, after) = top_up_one(cands, best, add_units, |a| {
        Ok(ev
            .evaluate(&net.with_added_processing(a), outage, None)?
            .evaluation)
    })?;
    Ok(Some(Closing {
        cost: cands.cost_of(&add_units),
        verified: after.proven() && reaches(&after, best),
        served_after: after.served_required,
        add: add_units,
        functions: None,
        best,
        not_closable: (required - best).max(0.0),
        binding_links: links_of(net, &binding_arcs),
        binding_arcs,
        dual_bound: whole.dual_bound,
        modules_exhaustive: whole.exhaustive,
    }))
}

/// One closing's purchase `add` evaluated by `evaluate`, raised by [`cheapest_raise`]
/// while the evaluation misses `best` by [`reaches`] (solver inaccuracy in the cost LP;
/// at most [`TOP_UP_ROUNDS`] re-evaluations), with its last evaluation.
fn top_up_one(
    cands: &Candidates,
    best: f64,
    mut add: Vec<f64>,
    evaluate: impl Fn(&[f64]) -> Result<Evaluation>,
) -> Result<(Vec<f64>, Evaluation)> {
    let mut after = evaluate(&add)?;
    for _ in 0..TOP_UP_ROUNDS {
        if reaches(&after, best) {
            break;
        }
        let Some((v, to)) = cheapest_raise(cands, &add, &after, best - after.served_required)
        else {
            break;
        };
        add[v] = to;
        after = evaluate(&add)?;
    }
    Ok((add, after))
}

/// The served target of a cost-minimising model: the best reachable value itself when it
/// is the whole required demand (exactly feasible), otherwise a hair below it
/// ([`CLOSE_TARGET_TOL`] relative), since an interior-point `best` may overshoot the true optimum by its
/// tolerance.
pub(crate) fn target(best: f64, required: f64) -> f64 {
    if best >= required {
        required
    } else {
        best - CLOSE_TARGET_TOL * required.max(f64::MIN_POSITIVE)
    }
}

/// Adds `Σ f_d >= target` over the flow variables of `index`; returns the row.
pub(super) fn served_row(model: &mut Lp, index: &FlowIndex, target: f64) -> usize {
    let served: Vec<usize> = index.demand_var.iter().flatten().copied().collect();
    served_at_least(model, &served, target)
}
