//! Closing the gaps: the cheapest added processing that lets a scenario reach the best
//! served_required any expansion can reach ([`close`]), and one expansion of least cost
//! for a whole set of scenarios ([`plan`]), found by constraint generation.
//!
//! Both use the two-layer flow model of [`crate::solve::flow`] with one extra variable
//! `add_v >= 0` per candidate site in that site's processing row.
//!
//! Invariant: adding processing never lowers served_required (the LP only gains columns
//! of capacity), so a scenario without shortfall needs nothing, and a plan is feasible for
//! a scenario exactly when that scenario, solved with the plan applied, reaches its best.

use crate::audit::{self, Audit, RunOptions};
use crate::error::{Error, Result};
use crate::model::{LinkIdx, Network, SiteIdx};
use crate::scenario::Outage;
use crate::solve::flow::{self, Cap, FlowIndex};
use crate::solve::lp::{self, Lp, Sense};
use crate::solve::{self, Evaluation, TOL};

/// Where processing may be added, at what unit cost and up to how much.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidates {
    /// Per site: unit cost, `None` when the site cannot be expanded.
    pub cost: Vec<Option<f64>>,
    /// Per site: most units that may be added (`INFINITY` when unlimited).
    pub max: Vec<f64>,
    /// True when the file gives no `expand_cost` anywhere and every site is a candidate
    /// at cost 1 per unit.
    pub default_costs: bool,
}

impl Candidates {
    /// The file's candidates, or every site at cost 1 when no site has `expand_cost`.
    pub fn of(net: &Network) -> Candidates {
        if net.sites.iter().all(|s| s.expansion.is_none()) {
            return Candidates {
                cost: vec![Some(1.0); net.sites.len()],
                max: vec![f64::INFINITY; net.sites.len()],
                default_costs: true,
            };
        }
        Candidates {
            cost: net
                .sites
                .iter()
                .map(|s| s.expansion.as_ref().map(|e| e.cost))
                .collect(),
            max: net
                .sites
                .iter()
                .map(|s| s.expansion.as_ref().map_or(0.0, |e| e.max))
                .collect(),
            default_costs: false,
        }
    }

    /// Cost of an addition vector.
    pub fn cost_of(&self, add: &[f64]) -> f64 {
        add.iter()
            .zip(&self.cost)
            .map(|(a, c)| a * c.unwrap_or(0.0))
            .sum()
    }
}

/// Adds one `add_v` variable per candidate site that survives `outage` (all candidates
/// when `outage` is `None`), bounded by `min(expand_max, cap)` and with objective
/// coefficient `cost_v * cost_weight`.
fn add_vars(
    lp: &mut Lp,
    net: &Network,
    cands: &Candidates,
    outage: Option<&Outage>,
    cap: f64,
    cost_weight: f64,
) -> Vec<Option<usize>> {
    let alive = outage.map(|o| o.site_alive(net));
    (0..net.sites.len())
        .map(|v| {
            let c = cands.cost[v]?;
            if alive.as_ref().is_some_and(|a| !a[v]) || cands.max[v] <= 0.0 {
                return None;
            }
            Some(lp.add_var(0.0, cands.max[v].min(cap), c * cost_weight))
        })
        .collect()
}

fn values(add: &[Option<usize>], x: &[f64], scale: f64) -> Vec<f64> {
    add.iter()
        .map(|v| {
            v.map_or(0.0, |v| {
                let a = x[v].max(0.0);
                if a <= TOL * scale { 0.0 } else { a }
            })
        })
        .collect()
}

/// The cheapest expansion for one scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Closing {
    /// Σ cost · add.
    pub cost: f64,
    /// Units added per site.
    pub add: Vec<f64>,
    /// The best served_required any expansion reaches.
    pub best: f64,
    /// Surviving required − best: the part links or connectivity hold back.
    pub not_closable: f64,
    /// Links whose capacity limits `best` (positive shadow price with unlimited
    /// expansion), in link order.
    pub binding_links: Vec<LinkIdx>,
    /// The dual objective of the cost LP (equals `cost` by strong duality).
    pub dual_bound: f64,
}

/// Best served_required of `outage` (evaluated as `eval`) with every candidate expanded as
/// far as allowed, and the links whose capacity limits it. The value is snapped to the
/// whole required demand when within [`TOL`], and never below what `eval` already serves.
fn best_reachable(
    net: &Network,
    outage: &Outage,
    cands: &Candidates,
    eval: &Evaluation,
) -> Result<(f64, Vec<LinkIdx>)> {
    let required = eval.surviving_required;
    let (best, links) = best_reachable_raw(net, outage, cands, required)?;
    let best = if (required - best).abs() <= TOL * required.max(1.0) {
        required
    } else {
        best.max(eval.served_required)
    };
    Ok((best, links))
}

fn best_reachable_raw(
    net: &Network,
    outage: &Outage,
    cands: &Candidates,
    required: f64,
) -> Result<(f64, Vec<LinkIdx>)> {
    let mut model = Lp::new(true);
    let add = add_vars(&mut model, net, cands, Some(outage), required, 0.0);
    let index = flow::build(&mut model, net, outage, Cap::Required, 1.0, Some(&add));
    if model.num_vars() == 0 {
        return Ok((0.0, Vec::new()));
    }
    let sol = lp::solve(&model)?;
    let best = index.served(&sol.x).clamp(0.0, required);
    let mut links: Vec<LinkIdx> = index
        .arc_row
        .iter()
        .enumerate()
        .filter_map(|(a, r)| r.filter(|&r| sol.duals[r] > 1e-6).map(|_| net.arcs[a].link))
        .collect();
    links.sort_unstable();
    links.dedup();
    Ok((best, links))
}

/// For one scenario with a shortfall, the cheapest expansion (Σ expand_cost · add, add ≤
/// expand_max) with which served_required reaches the best value any expansion reaches;
/// `None` when the scenario has no shortfall.
///
/// Two LPs: maximise served with unlimited (bounded by expand_max) additions, then
/// minimise cost subject to served ≥ best − 1e-7·best.
pub fn close(
    net: &Network,
    outage: &Outage,
    eval: &Evaluation,
    cands: &Candidates,
) -> Result<Option<Closing>> {
    if eval.shortfall <= 0.0 {
        return Ok(None);
    }
    let required = eval.surviving_required;
    let (best, binding_links) = best_reachable(net, outage, cands, eval)?;
    let scale = required.max(1.0);
    if best <= eval.served_required + TOL * scale {
        return Ok(Some(Closing {
            cost: 0.0,
            add: vec![0.0; net.sites.len()],
            best: eval.served_required,
            not_closable: eval.shortfall,
            binding_links,
            dual_bound: 0.0,
        }));
    }
    let mut model = Lp::new(false);
    let add = add_vars(&mut model, net, cands, Some(outage), required, 1.0);
    let index = flow::build(&mut model, net, outage, Cap::Required, 0.0, Some(&add));
    served_row(&mut model, &index, target(best, required));
    let sol = lp::solve(&model)?;
    let add_units = values(&add, &sol.x, scale);
    Ok(Some(Closing {
        cost: cands.cost_of(&add_units),
        add: add_units,
        best,
        not_closable: (required - best).max(0.0),
        binding_links,
        dual_bound: model.dual_objective(&sol),
    }))
}

/// The served target of a cost-minimising model: the best reachable value itself when it
/// is the whole required demand (exactly feasible), otherwise a hair below it (1e-8
/// relative), since an interior-point `best` may overshoot the true optimum by its
/// tolerance.
fn target(best: f64, required: f64) -> f64 {
    if best >= required {
        required
    } else {
        best - 1e-8 * required.max(f64::MIN_POSITIVE)
    }
}

/// Adds `Σ f_d >= target` over the flow variables of `index`; returns the row.
fn served_row(model: &mut Lp, index: &FlowIndex, target: f64) -> usize {
    let coeffs = index
        .demand_var
        .iter()
        .flatten()
        .map(|&f| (f, 1.0))
        .collect();
    model.add_row(coeffs, Sense::Ge, target)
}

/// What a plan optimises.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Goal {
    /// Least cost such that every scenario reaches its best reachable served_required.
    CloseAll,
    /// Within budget, maximise the worst scenario's served fraction of required.
    WorstWithin(f64),
    /// Within budget, minimise the total shortfall over the scenarios (an outage shared by
    /// several scenarios counts once per scenario). Exact: the master holds every outage
    /// with a shortfall at once, so it is limited to [`TOTAL_MAX_VARS`] variables.
    TotalWithin(f64),
}

/// Largest master problem [`Goal::TotalWithin`] builds.
pub const TOTAL_MAX_VARS: usize = 1_500_000;

/// One round of constraint generation.
#[derive(Debug, Clone, PartialEq)]
pub struct Round {
    /// Scenarios (distinct outages) in the master problem this round.
    pub active: usize,
    /// Master objective: the plan's cost ([`Goal::CloseAll`]) or the worst served
    /// fraction ([`Goal::WorstWithin`]).
    pub objective: f64,
    /// Outages found violated by the master's plan (and added for the next round).
    pub violated: usize,
}

/// A plan and how it does in every scenario.
#[derive(Debug, Clone)]
pub struct Plan {
    pub goal: Goal,
    /// Units added per site.
    pub add: Vec<f64>,
    pub cost: f64,
    pub rounds: Vec<Round>,
    /// Per outage of the audit: the best reachable served_required.
    pub best: Vec<f64>,
    /// Per outage: the evaluation with the plan applied (the re-verification).
    pub after: Vec<Evaluation>,
    /// Per site: the outages whose processing row at that site binds in the final
    /// master, with the shadow price there, highest first.
    pub drivers: Vec<Vec<(usize, f64)>>,
    /// The worst served fraction of required after the plan.
    pub worst_fraction: f64,
    /// When some site buys in modules (`expand_step`): the LP plan before rounding, its
    /// cost (a lower bound on any module plan), and the gap of the module plan to it.
    pub modules: Option<ModuleRounding>,
}

/// How a continuous plan became a plan in whole modules.
#[derive(Debug, Clone, PartialEq)]
pub struct ModuleRounding {
    pub lp_add: Vec<f64>,
    pub lp_cost: f64,
    /// Module plan cost − LP cost (≥ 0).
    pub gap: f64,
    /// Modules removed by the repair pass after rounding up.
    pub repaired: usize,
}

/// Outages added to the master at most per round (the most violated first).
const ADD_PER_ROUND: usize = 4;

/// One least-cost (or best-within-budget) expansion for all outages of `audit`, by
/// constraint generation: the master holds a full flow-model copy of each active outage
/// sharing the `add` variables; after each solve every outage is re-solved with the plan
/// applied (in parallel) and the most violated ones join the master. Each round adds at
/// least one outage or stops, so it ends after at most (outages) rounds; the final plan
/// is verified on every outage.
pub fn plan(net: &Network, audit: &Audit, goal: Goal, opts: RunOptions) -> Result<Plan> {
    let cands = Candidates::of(net);
    let n_out = audit.outages.len();
    // Best reachable per outage (only outages with a shortfall can gain).
    let bests: Vec<f64> = audit::par_map(
        &(0..n_out).collect::<Vec<_>>(),
        opts,
        "best reachable",
        |&k| {
            let e = &audit.evaluations[k];
            if e.shortfall <= 0.0 {
                return Ok(e.served_required);
            }
            Ok(best_reachable(net, &audit.outages[k], &cands, e)?.0)
        },
    )?;
    let gains = |k: usize| bests[k] - audit.evaluations[k].served_required;
    let short: Vec<usize> = (0..n_out)
        .filter(|&k| match goal {
            Goal::CloseAll => gains(k) > TOL * audit.evaluations[k].surviving_required.max(1.0),
            Goal::WorstWithin(_) | Goal::TotalWithin(_) => audit.evaluations[k].shortfall > 0.0,
        })
        .collect();
    let fraction = Evaluation::served_fraction;
    // Start from the worst outages.
    let mut order = short.clone();
    order.sort_by(|&a, &b| {
        let (ea, eb) = (&audit.evaluations[a], &audit.evaluations[b]);
        match goal {
            Goal::CloseAll => gains(b).total_cmp(&gains(a)),
            Goal::WorstWithin(_) | Goal::TotalWithin(_) => fraction(ea).total_cmp(&fraction(eb)),
        }
        .then(a.cmp(&b))
    });
    let mut multiplicity = vec![0usize; n_out];
    for &k in &audit.outage_of {
        multiplicity[k] += 1;
    }
    let g = generate(
        net,
        audit,
        &cands,
        &Generation {
            bests: &bests,
            short: &short,
            order: &order,
            multiplicity: &multiplicity,
        },
        goal,
        opts,
    )?;
    let (add_units, rounds, after, drivers, worst_fraction) =
        (g.add, g.rounds, g.after, g.drivers, g.worst_fraction);
    let mut plan = Plan {
        goal,
        cost: cands.cost_of(&add_units),
        add: add_units,
        rounds,
        best: bests,
        after,
        drivers,
        worst_fraction,
        modules: None,
    };
    if net
        .sites
        .iter()
        .any(|s| s.expansion.as_ref().is_some_and(|e| e.step.is_some()))
    {
        let data = Generation {
            bests: &plan.best.clone(),
            short: &short,
            order: &order,
            multiplicity: &multiplicity,
        };
        round_to_modules(net, audit, &cands, &data, &mut plan, opts)?;
    }
    Ok(plan)
}

/// The outage data constraint generation works on.
struct Generation<'a> {
    bests: &'a [f64],
    /// Outages that can gain (checked each round).
    short: &'a [usize],
    /// `short`, worst first: the master starts from its head.
    order: &'a [usize],
    /// Scenarios per outage.
    multiplicity: &'a [usize],
}

/// What constraint generation returns.
struct Generated {
    add: Vec<f64>,
    rounds: Vec<Round>,
    after: Vec<Evaluation>,
    drivers: Vec<Vec<(usize, f64)>>,
    worst_fraction: f64,
}

/// The constraint-generation loop of [`plan`] over `net` (which may already carry fixed
/// additions) with candidates `cands`.
fn generate(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    data: &Generation<'_>,
    goal: Goal,
    opts: RunOptions,
) -> Result<Generated> {
    let Generation {
        bests,
        short,
        order,
        multiplicity,
    } = *data;
    let fraction = Evaluation::served_fraction;
    let mut active: Vec<usize> = match goal {
        Goal::TotalWithin(_) => order.to_vec(),
        _ => order.iter().copied().take(ADD_PER_ROUND).collect(),
    };
    let mut rounds = Vec::new();
    let mut add_units = vec![0.0; net.sites.len()];
    let mut drivers = vec![Vec::new(); net.sites.len()];
    let worst_fraction;
    let mut after: Vec<Evaluation>;
    loop {
        // Master problem over the active outages.
        let (units, objective, site_duals) =
            solve_master(net, audit, cands, bests, &active, multiplicity, goal)?;
        add_units = units;
        let planned = net.with_added_processing(&add_units);
        after = verify(&planned, audit, short, opts)?;
        let mut violated: Vec<(f64, usize)> = Vec::new();
        for &k in short {
            if active.contains(&k) {
                continue;
            }
            let e = &after[k];
            let scale = e.surviving_required.max(1.0);
            match goal {
                Goal::CloseAll => {
                    let miss = bests[k] - e.served_required;
                    if miss > 1e-6 * scale {
                        violated.push((miss, k));
                    }
                }
                Goal::WorstWithin(_) => {
                    let miss = objective - fraction(e);
                    if miss > 1e-6 {
                        violated.push((miss, k));
                    }
                }
                Goal::TotalWithin(_) => unreachable!("every short outage is active"),
            }
        }
        violated.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        rounds.push(Round {
            active: active.len(),
            objective,
            violated: violated.len(),
        });
        drivers = site_duals;
        if violated.is_empty() {
            worst_fraction = after.iter().map(fraction).fold(1.0, f64::min);
            break;
        }
        active.extend(violated.iter().take(ADD_PER_ROUND).map(|v| v.1));
    }
    Ok(Generated {
        add: add_units,
        rounds,
        after,
        drivers,
        worst_fraction,
    })
}

/// Whether `after` (the outages solved with a plan) meets the plan's goal as well as the
/// continuous plan did: every outage at its best (close-all), or the worst fraction /
/// total shortfall no worse than `target`.
fn meets(goal: Goal, audit: &Audit, best: &[f64], after: &[Evaluation], target: f64) -> bool {
    match goal {
        Goal::CloseAll => after
            .iter()
            .zip(best)
            .zip(&audit.evaluations)
            .all(|((e, b), e0)| e.served_required >= b - 1e-6 * e0.surviving_required.max(1.0)),
        Goal::WorstWithin(_) => after_worst(after) >= target - 1e-6,
        Goal::TotalWithin(_) => after_total(audit, after) <= target + 1e-6,
    }
}

fn after_worst(after: &[Evaluation]) -> f64 {
    after
        .iter()
        .map(Evaluation::served_fraction)
        .fold(1.0, f64::min)
}

fn after_total(audit: &Audit, after: &[Evaluation]) -> f64 {
    audit.outage_of.iter().map(|&k| after[k].shortfall).sum()
}

/// Turns the continuous plan into whole modules at sites with `expand_step`: round each
/// such addition up to a whole number of modules (never above `expand_max`; with a budget,
/// round down instead so the budget holds), then a repair pass that drops one module at a
/// time, costliest site first, while the goal is still met. Every candidate is verified by
/// re-solving all outages. The LP plan's cost is a lower bound, so `gap` bounds how far the
/// module plan can be from the best module plan.
fn round_to_modules(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    data: &Generation<'_>,
    plan: &mut Plan,
    opts: RunOptions,
) -> Result<()> {
    let budgeted = !matches!(plan.goal, Goal::CloseAll);
    let target = match plan.goal {
        Goal::CloseAll => 0.0,
        Goal::WorstWithin(_) => after_worst(&plan.after),
        Goal::TotalWithin(_) => after_total(audit, &plan.after),
    };
    let lp_add = plan.add.clone();
    let lp_cost = plan.cost;
    let mut add = lp_add.clone();
    let mut stepped: Vec<(usize, f64)> = Vec::new();
    for (v, site) in net.sites.iter().enumerate() {
        let Some(step) = site.expansion.as_ref().and_then(|e| e.step) else {
            continue;
        };
        let max_modules = (cands.max[v] / step + 1e-9).floor();
        let modules = if budgeted {
            (add[v] / step + 1e-9).floor()
        } else {
            (add[v] / step - 1e-9).ceil()
        };
        add[v] = modules.min(max_modules).max(0.0) * step;
        if add[v] > 0.0 {
            stepped.push((v, step));
        }
    }
    let short: Vec<usize> = (0..audit.outages.len())
        .filter(|&k| audit.evaluations[k].shortfall > 0.0)
        .collect();
    let check = |add: &[f64]| verify(&net.with_added_processing(add), audit, &short, opts);
    let mut after = check(&add)?;
    let mut repaired = 0;
    if !budgeted && meets(plan.goal, audit, &plan.best, &after, target) {
        stepped.sort_by(|a, b| {
            let ca = cands.cost[a.0].unwrap_or(0.0) * a.1;
            let cb = cands.cost[b.0].unwrap_or(0.0) * b.1;
            cb.total_cmp(&ca).then(a.0.cmp(&b.0))
        });
        for &(v, step) in &stepped {
            while add[v] >= step - 1e-9 {
                let mut trial = add.clone();
                trial[v] = (trial[v] - step).max(0.0);
                let trial_after = check(&trial)?;
                if meets(plan.goal, audit, &plan.best, &trial_after, target) {
                    add = trial;
                    after = trial_after;
                    repaired += 1;
                } else {
                    break;
                }
            }
        }
    }
    // Re-optimise the sites bought by the unit with the modules fixed: the continuous part
    // of the LP plan stays feasible, so this never does worse, and it spends what rounding
    // freed (or, with a budget, what is left after rounding down).
    let modular: Vec<bool> = net
        .sites
        .iter()
        .map(|s| s.expansion.as_ref().is_some_and(|e| e.step.is_some()))
        .collect();
    let fixed: Vec<f64> = add
        .iter()
        .zip(&modular)
        .map(|(a, m)| if *m { *a } else { 0.0 })
        .collect();
    let mut rest = cands.clone();
    for (v, m) in modular.iter().enumerate() {
        if *m {
            rest.cost[v] = None;
        }
    }
    if rest.cost.iter().any(Option::is_some) {
        let fixed_cost = cands.cost_of(&fixed);
        let goal = match plan.goal {
            Goal::CloseAll => Goal::CloseAll,
            Goal::WorstWithin(b) => Goal::WorstWithin((b - fixed_cost).max(0.0)),
            Goal::TotalWithin(b) => Goal::TotalWithin((b - fixed_cost).max(0.0)),
        };
        let g = generate(
            &net.with_added_processing(&fixed),
            audit,
            &rest,
            data,
            goal,
            opts,
        )?;
        let combined: Vec<f64> = fixed.iter().zip(&g.add).map(|(f, a)| f + a).collect();
        let better = match plan.goal {
            Goal::CloseAll => {
                meets(plan.goal, audit, &plan.best, &g.after, target)
                    && (cands.cost_of(&combined) < cands.cost_of(&add) - 1e-9
                        || !meets(plan.goal, audit, &plan.best, &after, target))
            }
            Goal::WorstWithin(_) => after_worst(&g.after) > after_worst(&after) + 1e-9,
            Goal::TotalWithin(_) => {
                after_total(audit, &g.after) < after_total(audit, &after) - 1e-9
            }
        };
        if better {
            add = combined;
            after = g.after;
        }
    }
    plan.cost = cands.cost_of(&add);
    plan.add = add;
    plan.worst_fraction = after_worst(&after);
    plan.after = after;
    plan.modules = Some(ModuleRounding {
        gap: (plan.cost - lp_cost).max(0.0),
        lp_add,
        lp_cost,
        repaired,
    });
    Ok(())
}

/// Every outage solved with the plan applied. Outages without a shortfall are already at
/// their required demand and adding processing never lowers served_required, so they keep
/// their evaluation; only `short` outages are re-solved (in parallel).
fn verify(
    planned: &Network,
    audit: &Audit,
    short: &[usize],
    opts: RunOptions,
) -> Result<Vec<Evaluation>> {
    let solved = audit::par_map(short, opts, "verifying plan", |&k| {
        solve::evaluate(planned, &audit.outages[k])
    })?;
    let mut after = audit.evaluations.clone();
    for (&k, e) in short.iter().zip(solved) {
        after[k] = e;
    }
    Ok(after)
}

type MasterResult = (Vec<f64>, f64, Vec<Vec<(usize, f64)>>);

/// Solves the master over `active` outages; returns the additions, the objective and the
/// per-site drivers (outage, shadow price of its processing row there).
fn solve_master(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    bests: &[f64],
    active: &[usize],
    multiplicity: &[usize],
    goal: Goal,
) -> Result<MasterResult> {
    let total_required = net.total_required().max(1.0);
    let maximise = !matches!(goal, Goal::CloseAll);
    let mut model = Lp::new(maximise);
    let cost_weight = if maximise { 0.0 } else { 1.0 };
    let add = add_vars(&mut model, net, cands, None, total_required, cost_weight);
    if let Goal::WorstWithin(budget) | Goal::TotalWithin(budget) = goal {
        let coeffs: Vec<(usize, f64)> = add
            .iter()
            .enumerate()
            .filter_map(|(v, a)| a.map(|a| (a, cands.cost[v].unwrap_or(0.0))))
            .collect();
        model.add_row(coeffs, Sense::Le, budget);
    }
    let t = match goal {
        Goal::WorstWithin(_) => Some(model.add_var(0.0, 1.0, 1.0)),
        _ => None,
    };
    let mut indices = Vec::with_capacity(active.len());
    for &k in active {
        let weight = match goal {
            Goal::TotalWithin(_) => multiplicity[k] as f64,
            _ => 0.0,
        };
        let index = flow::build(
            &mut model,
            net,
            &audit.outages[k],
            Cap::Required,
            weight,
            Some(&add),
        );
        if model.num_vars() > TOTAL_MAX_VARS {
            return Err(Error::Usage(format!(
                "the plan's master problem passed {TOTAL_MAX_VARS} variables; lower --depth, \
                 narrow --kinds, or use --objective worst"
            )));
        }
        let req = audit.evaluations[k].surviving_required;
        match (goal, t) {
            (Goal::TotalWithin(_), _) => {}
            (_, None) => {
                served_row(&mut model, &index, target(bests[k], req));
            }
            (_, Some(t)) => {
                let mut coeffs: Vec<(usize, f64)> = index
                    .demand_var
                    .iter()
                    .flatten()
                    .map(|&f| (f, 1.0))
                    .collect();
                coeffs.push((t, -req));
                model.add_row(coeffs, Sense::Ge, 0.0);
            }
        }
        indices.push(index);
    }
    if model.num_vars() == 0 {
        return Ok((
            vec![0.0; net.sites.len()],
            0.0,
            vec![Vec::new(); net.sites.len()],
        ));
    }
    let mut sol =
        lp::solve(&model).map_err(|e| Error::Solver(format!("plan master problem: {e}")))?;
    if let Some(t) = t {
        // Lexicographic second phase: keep the best worst-case fraction, then serve as much
        // as possible in the other active outages (each weighted by 1/required), so money
        // is not spread arbitrarily when the worst case cannot improve.
        let t_best = sol.x[t].clamp(0.0, 1.0);
        model.objective[t] = 0.0;
        model.lower[t] = (t_best - 1e-7).max(0.0);
        for (index, &k) in indices.iter().zip(active) {
            let req = audit.evaluations[k].surviving_required;
            if req > 0.0 {
                for &f in index.demand_var.iter().flatten() {
                    model.objective[f] = 1.0 / (req * active.len() as f64);
                }
            }
        }
        sol = lp::solve(&model)
            .map_err(|e| Error::Solver(format!("plan master problem, second phase: {e}")))?;
        sol.x[t] = sol.x[t].max(t_best.min(model.upper[t]));
    }
    let units = values(&add, &sol.x, total_required);
    let objective = match (goal, t) {
        (Goal::WorstWithin(_), Some(t)) => sol.x[t].clamp(0.0, 1.0),
        (Goal::TotalWithin(_), _) => active
            .iter()
            .zip(&indices)
            .map(|(&k, index)| {
                multiplicity[k] as f64
                    * (audit.evaluations[k].surviving_required - index.served(&sol.x)).max(0.0)
            })
            .sum(),
        _ => cands.cost_of(&units),
    };
    let mut drivers: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.sites.len()];
    for (index, &k) in indices.iter().zip(active) {
        for (v, r) in index.site_row.iter().enumerate() {
            if let Some(r) = r {
                // Rows are `Σp - add <= processing`: a binding row has a nonzero price
                // (negative for a minimisation, positive for a maximisation).
                let price = sol.duals[*r].abs();
                if price > 1e-6 && units[v] > 0.0 {
                    drivers[v].push((k, price));
                }
            }
        }
    }
    for d in &mut drivers {
        d.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    }
    Ok((units, objective, drivers))
}

/// Per site: how many outages (with a shortfall) would serve more with one more unit
/// there, and the largest such gain; from each outage's shadow prices. Sites without a
/// processing row in an outage (no capacity) are not priced there.
pub fn relief(audit: &Audit, n_sites: usize) -> Vec<(SiteIdx, usize, f64)> {
    let mut out: Vec<(SiteIdx, usize, f64)> = (0..n_sites).map(|v| (v, 0, 0.0)).collect();
    for e in &audit.evaluations {
        if e.shortfall <= 0.0 {
            continue;
        }
        for (v, p) in e.site_price.iter().enumerate() {
            if let Some(p) = p
                && *p > 1e-6
            {
                out[v].1 += 1;
                out[v].2 = f64::max(out[v].2, *p);
            }
        }
    }
    out.retain(|r| r.1 > 0);
    out.sort_by(|a, b| b.1.cmp(&a.1).then(b.2.total_cmp(&a.2)).then(a.0.cmp(&b.0)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{self, Kinds};

    /// Path a–b–c, 10 per direction; processing 2 at a; candidates a (cost 3, ≤ 10),
    /// b (cost 2, ≤ 10), c (cost 1, ≤ 3); one demand a→c of `volume`.
    fn path(volume: f64) -> Network {
        Network::from_json(&format!(
            r#"{{"sites":[{{"id":"a","processing":2,"expand_cost":3,"expand_max":10}},
                {{"id":"b","expand_cost":2,"expand_max":10}},
                {{"id":"c","expand_cost":1,"expand_max":3}}],
              "links":[{{"id":"ab","from":"a","to":"b","capacity":10}},
                       {{"id":"bc","from":"b","to":"c","capacity":10}}],
              "demands":[{{"from":"a","to":"c","volume":{volume}}}]}}"#
        ))
        .unwrap()
    }

    fn closing_of(net: &Network) -> Closing {
        let o = Outage::default();
        let e = solve::evaluate(net, &o).unwrap();
        close(net, &o, &e, &Candidates::of(net)).unwrap().unwrap()
    }

    /// Closing cost equals a brute-force search over a grid of whole-unit additions (the
    /// optimum is integral here: integral data, and the cheapest sites fill in cost order;
    /// the grid itself is the outside check).
    #[test]
    fn closing_matches_brute_force_grid() {
        let net = path(8.0);
        let c = closing_of(&net);
        let cands = Candidates::of(&net);
        let mut best_cost = f64::INFINITY;
        for a in 0..=6 {
            for b in 0..=6 {
                for cc in 0..=3 {
                    let add = [a as f64, b as f64, cc as f64];
                    let e = solve::evaluate(&net.with_added_processing(&add), &Outage::default())
                        .unwrap();
                    if e.served_required >= c.best - 1e-6 {
                        best_cost = best_cost.min(cands.cost_of(&add));
                    }
                }
            }
        }
        assert!(
            (c.cost - best_cost).abs() < 1e-5,
            "{} vs {}",
            c.cost,
            best_cost
        );
        assert!(
            (c.cost - 9.0).abs() < 1e-5,
            "c +3 (3) then b +3 (6): {}",
            c.cost
        );
        assert!(c.not_closable.abs() < 1e-9);
        // LP duality: the cost LP's dual objective equals its cost.
        assert!(
            (c.dual_bound - c.cost).abs() < 1e-5 * c.cost.max(1.0),
            "{c:?}"
        );
    }

    /// Links cap what processing can recover: 15 offered over a 10-unit path.
    #[test]
    fn link_limited_gap_is_not_closable() {
        let net = path(15.0);
        let c = closing_of(&net);
        assert!((c.best - 10.0).abs() < 1e-6, "{c:?}");
        assert!((c.not_closable - 5.0).abs() < 1e-6);
        assert!(!c.binding_links.is_empty());
    }

    fn ring_audit() -> (Network, Audit) {
        let net = Network::from_json(include_str!("../fixtures/small-ring.json")).unwrap();
        let scenarios = scenario::enumerate(&net, Kinds::ALL, 1);
        let audit = audit::run(&net, scenarios, RunOptions::default()).unwrap();
        (net, audit)
    }

    /// The plan re-verified on every scenario leaves only not-closable shortfall, and costs
    /// between the costliest single closing and the sum of all closings.
    #[test]
    fn plan_covers_every_scenario_within_closing_bounds() {
        let (net, audit) = ring_audit();
        let cands = Candidates::of(&net);
        let plan = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
        let mut max_single: f64 = 0.0;
        let mut sum = 0.0;
        for (k, o) in audit.outages.iter().enumerate() {
            let after = &plan.after[k];
            let not_closable = audit.evaluations[k].surviving_required - plan.best[k];
            assert!(
                (after.shortfall - not_closable).abs() < 1e-5,
                "outage {k}: after {} vs not closable {not_closable}",
                after.shortfall
            );
            if let Some(c) = close(&net, o, &audit.evaluations[k], &cands).unwrap() {
                assert!((c.best - plan.best[k]).abs() < 1e-6);
                max_single = max_single.max(c.cost);
                sum += c.cost;
            }
        }
        assert!(max_single > 0.0, "the fixture must need some expansion");
        assert!(
            plan.cost >= max_single - 1e-5,
            "{} < {max_single}",
            plan.cost
        );
        assert!(plan.cost <= sum + 1e-5, "{} > {sum}", plan.cost);
    }

    /// More budget never gives a worse objective (worst fraction up, total shortfall down).
    #[test]
    fn more_budget_never_worse() {
        let (net, audit) = ring_audit();
        let mut last_worst = -1.0;
        let mut last_total = f64::INFINITY;
        for b in [0.0, 2.0, 5.0, 12.0, 40.0] {
            let w = plan(&net, &audit, Goal::WorstWithin(b), RunOptions::default()).unwrap();
            assert!(w.cost <= b + 1e-6);
            assert!(w.worst_fraction >= last_worst - 1e-6, "budget {b}");
            last_worst = w.worst_fraction;
            let t = plan(&net, &audit, Goal::TotalWithin(b), RunOptions::default()).unwrap();
            let total: f64 = audit.outage_of.iter().map(|&k| t.after[k].shortfall).sum();
            assert!(total <= last_total + 1e-6, "budget {b}");
            last_total = total;
        }
    }

    /// A plan in whole modules never costs less than the continuous plan, and is whole.
    #[test]
    fn module_plan_not_cheaper_than_lp() {
        let text = include_str!("../fixtures/small-ring.json").replace(
            "\"expand_max\": 20",
            "\"expand_max\": 20, \"expand_step\": 4",
        );
        let net = Network::from_json(&text).unwrap();
        assert!(net.sites[0].expansion.as_ref().unwrap().step.is_some());
        let scenarios = scenario::enumerate(&net, Kinds::ALL, 1);
        let audit = audit::run(&net, scenarios, RunOptions::default()).unwrap();
        let p = plan(&net, &audit, Goal::CloseAll, RunOptions::default()).unwrap();
        let m = p.modules.as_ref().expect("module rounding ran");
        assert!(p.cost >= m.lp_cost - 1e-6);
        let modules = p.add[0] / 4.0;
        assert!((modules - modules.round()).abs() < 1e-9, "{}", p.add[0]);
    }
}
