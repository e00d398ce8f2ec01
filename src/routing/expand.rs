//! One plan of processing purchases for the steered routing (all short outages in one
//! master). Closings of one scenario are [`crate::expand::close_with`] with the routing
//! [`super::Model`]; both read the model through the evaluator seam: best reachable is
//! `crate::expand::best_reachable`, the model with `add_v` variables in its processing
//! rows is [`Evaluator::add_processing`], re-solves are [`Evaluator::evaluate`] of
//! [`Network::with_added_processing`].
//!
//! Added processing can make a site a candidate: a surviving expandable site with
//! processing 0 gets steered variables too (its row `Σ y − add_v <= 0` keeps them at 0
//! unless processing is bought). Routes do not depend on processing, so the paths stay
//! the shortest paths. Under [`Mode::Nearest`] a purchase would change which sites are
//! nearest (a site with processing 0 is no candidate), so purchases are only defined for
//! the steered routing; the command line refuses the nearest one.
//!
//! Invariant: adding processing never lowers the steered served_required (the LP only
//! gains room in site rows), so scenarios without shortfall need nothing.

use super::{Mode, RoutedAudit};
use crate::audit::{self, RunOptions};
use crate::error::{Error, Result};
use crate::expand::{
    Candidates, Goal, ModuleRounding, Plan, Round, TOP_UP_ROUNDS, TOTAL_MAX_VARS, add_vars,
    best_reachable, cheapest_raise, reaches, snap_up, target, values,
};
use crate::model::Network;
use crate::solve::evaluator::{AddModel, Evaluator};
use crate::solve::lp::{self, Lp, Sense};
use crate::solve::{Evaluation, TOL};
use crate::tol::{BUDGET_TOL, DRIVER_PRICE_TOL};

/// Adds `coeff · Σ served + extra ≥ rhs` over the served variables of `m`. O(|served|).
fn served_row(model: &mut Lp, m: &AddModel, coeff: f64, extra: Option<(usize, f64)>, rhs: f64) {
    let mut coeffs: Vec<(usize, f64)> = m.served.iter().map(|&v| (v, coeff)).collect();
    coeffs.extend(extra);
    model.add_row(coeffs, Sense::Ge, rhs);
}

/// One plan of processing purchases for every scenario of a steered audit. Every outage
/// with a shortfall is held in one master LP at once (the steered models are small), all
/// sharing the `add` variables, so the plan is exact for the continuous problem:
/// close-all (least cost with every outage at its best reachable), worst within budget
/// (largest t with served_k ≥ t·required_k), or total within budget (most Σ served over
/// the scenarios). Sites with `expand_step` are then rounded to whole modules (up for
/// close-all, the last module partial at expand_max; down within a budget, then back up
/// where the budget still allows, cheapest raise first) without a repair pass. The plan is verified by re-solving every short
/// outage with it applied; for close-all, an outage left short of its best by more than
/// the audit's proof tolerance (LP inaccuracy) is topped up by shadow price and re-solved.
pub fn plan(net: &Network, ra: &RoutedAudit, goal: Goal, opts: RunOptions) -> Result<Plan> {
    let audit = &ra.audit;
    let cands = Candidates::of(net);
    let short: Vec<usize> = (0..audit.outages.len())
        .filter(|&k| audit.evaluations[k].shortfall > 0.0)
        .collect();
    let model_of = &ra.model;
    if model_of.mode != Mode::Steered {
        return Err(Error::Usage(format!(
            "purchases are not defined for --routing {}",
            model_of.name()
        )));
    }
    let prepared = audit::par_map(&short, opts, "best reachable", |&k| {
        let e = &audit.evaluations[k];
        Ok(best_reachable(model_of, net, &audit.outages[k], &cands, e)?.0)
    })?;
    let mut best: Vec<f64> = audit
        .evaluations
        .iter()
        .map(|e| e.served_required)
        .collect();
    for (&k, b) in short.iter().zip(&prepared) {
        best[k] = *b;
    }
    let cap = audit
        .evaluations
        .iter()
        .map(|e| e.surviving_required)
        .fold(0.0, f64::max);
    let minimise = goal == Goal::CloseAll;
    let mut model = Lp::new(!minimise);
    let add = add_vars(
        &mut model,
        net,
        &cands,
        None,
        cap,
        if minimise { 1.0 } else { 0.0 },
    );
    let t = match goal {
        Goal::WorstWithin(_) => Some(model.add_var(0.0, 1.0, 1.0)),
        _ => None,
    };
    if let Goal::WorstWithin(b) | Goal::TotalWithin(b) = goal {
        let coeffs = add
            .iter()
            .enumerate()
            .filter_map(|(v, a)| a.map(|a| (a, cands.cost[v].unwrap_or(0.0))))
            .collect();
        model.add_row(coeffs, Sense::Le, b);
    }
    let mut indices = Vec::with_capacity(short.len());
    for &k in &short {
        let mult = audit.outage_of.iter().filter(|&&o| o.0 == k).count() as f64;
        let obj = if matches!(goal, Goal::TotalWithin(_)) {
            mult
        } else {
            0.0
        };
        let index = model_of
            .add_processing(&mut model, net, &audit.outages[k], &add, obj)
            .expect("the steered model defines purchases");
        let required = audit.evaluations[k].surviving_required;
        match goal {
            Goal::CloseAll => served_row(&mut model, &index, 1.0, None, target(best[k], required)),
            Goal::WorstWithin(_) => {
                served_row(&mut model, &index, 1.0, t.map(|t| (t, -required)), 0.0)
            }
            Goal::TotalWithin(_) => {}
        }
        indices.push(index);
        if model.num_vars() > TOTAL_MAX_VARS {
            return Err(Error::Usage(format!(
                "the steered plan would hold more than {TOTAL_MAX_VARS} variables; \
                 lower --depth or narrow --kinds"
            )));
        }
    }
    let (lp_add, objective, duals) = if short.is_empty() || model.num_vars() == 0 {
        (vec![0.0; net.sites.len()], 0.0, Vec::new())
    } else {
        let sol = lp::solve(&model)?;
        (values(&add, &sol.x, cap.max(1.0)), sol.objective, sol.duals)
    };
    let lp_cost = cands.cost_of(&lp_add);
    let stepped = net
        .sites
        .iter()
        .zip(&lp_add)
        .any(|(s, &a)| a > 0.0 && s.expansion.as_ref().is_some_and(|e| e.step.is_some()));
    let (plan_add, modules) = if stepped {
        let rounded: Vec<f64> = net
            .sites
            .iter()
            .zip(&lp_add)
            .enumerate()
            .map(
                |(v, (s, &a))| match s.expansion.as_ref().and_then(|e| e.step) {
                    Some(step) if a > 0.0 => {
                        let units = a / step;
                        if minimise {
                            cands.round_up(v, a)
                        } else if a >= cands.max[v] * (1.0 - TOL) {
                            // The LP bought the site out: the partial last module fits.
                            cands.max[v]
                        } else {
                            ((units + TOL).floor() * step).min(cands.max[v].max(0.0))
                        }
                    }
                    _ => a,
                },
            )
            .collect();
        // Within a budget, a site rounded down goes back up to the LP's amount in whole
        // modules when the budget still allows it, cheapest raise first (more processing
        // never serves less, so this is never worse than rounding down).
        let mut rounded = rounded;
        if let Goal::WorstWithin(b) | Goal::TotalWithin(b) = goal {
            let mut raises: Vec<(f64, usize)> = (0..rounded.len())
                .filter(|&v| cands.module(v).is_some())
                .map(|v| (cands.round_up(v, lp_add[v]), v))
                .filter(|&(to, v)| to > rounded[v])
                .map(|(to, v)| (cands.cost[v].unwrap_or(0.0) * (to - rounded[v]), v))
                .collect();
            raises.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            for (_, v) in raises {
                let mut trial = rounded.clone();
                trial[v] = cands.round_up(v, lp_add[v]);
                if cands.cost_of(&trial) <= b * (1.0 + BUDGET_TOL) {
                    rounded = trial;
                }
            }
        }
        let cost = cands.cost_of(&rounded);
        (
            rounded,
            Some(ModuleRounding {
                lp_add: lp_add.clone(),
                lp_cost,
                gap: (cost - lp_cost).max(0.0),
                repaired: 0,
                checked: 1,
            }),
        )
    } else {
        // Interior-point noise (2.9999999995) snapped up onto a round value.
        let budget = match goal {
            Goal::CloseAll => None,
            Goal::WorstWithin(b) | Goal::TotalWithin(b) => Some(b),
        };
        (snap_up(&cands, lp_add, budget), None)
    };
    let mut drivers: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.sites.len()];
    for (&k, index) in short.iter().zip(&indices) {
        for (v, r) in index.site_rows.iter().enumerate() {
            if let Some(r) = r
                && let Some(&y) = duals.get(*r)
                && y.abs() > DRIVER_PRICE_TOL
            {
                drivers[v].push((k, y.abs()));
            }
        }
    }
    for d in &mut drivers {
        d.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    }
    let solve_all = |add: &[f64]| -> Result<Vec<Evaluation>> {
        let applied = net.with_added_processing(add);
        let resolved = audit::par_map(&short, opts, "verifying", |&k| {
            model_of.evaluate(&applied, &audit.outages[k], None)
        })?;
        let mut after: Vec<Evaluation> = audit.evaluations.clone();
        for (&k, r) in short.iter().zip(resolved) {
            after[k] = r.evaluation;
        }
        Ok(after)
    };
    let mut plan_add = plan_add;
    let mut after = solve_all(&plan_add)?;
    // Close-all: an outage the LP's inaccuracy leaves short of its best (by the audit's
    // proof tolerance) gets its cheapest raise by shadow price, and all are re-solved.
    if minimise {
        for _ in 0..TOP_UP_ROUNDS {
            let mut level = plan_add.clone();
            for &k in &short {
                let e = &after[k];
                if !reaches(e, best[k])
                    && let Some((v, to)) =
                        cheapest_raise(&cands, &plan_add, e, best[k] - e.served_required)
                {
                    level[v] = level[v].max(to);
                }
            }
            if level == plan_add {
                break;
            }
            plan_add = level;
            after = solve_all(&plan_add)?;
        }
    }
    let worst_fraction = after
        .iter()
        .map(Evaluation::served_fraction)
        .fold(1.0, f64::min);
    Ok(Plan {
        goal,
        cost: cands.cost_of(&plan_add),
        add: plan_add,
        rounds: vec![Round {
            active: short.len(),
            objective,
            violated: 0,
        }],
        best,
        after,
        drivers,
        worst_fraction,
        modules,
        dropped: 0,
        master: Default::default(),
        functions: None,
    })
}
