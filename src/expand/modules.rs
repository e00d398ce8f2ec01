//! Plans and closings in whole modules (`expand_step`).
//!
//! A site with `expand_step` s and `expand_max` m buys one of 0, s, 2s, …, and m itself
//! when m is not a multiple of s (the last module is partial: the file's `expand_max` is a
//! hard limit, and the continuous best reachable value, computed with every site at m,
//! stays reachable in whole modules). So rounding a continuous purchase up to the next
//! allowed amount is always possible and never serves less: a plan or closing in whole
//! modules exists whenever the continuous one does.
//!
//! Closings ([`cheapest_whole`]) are one LP each: branch and bound on it finds the cheapest
//! whole-module closing. Plans hold many outages; for them:
//!
//! The LP backend (clarabel, interior point) has no integer variables, so there is no exact
//! integer (MILP) search here. Instead the continuous plan is turned into whole modules by
//! a search over module counts near it, every candidate verified by re-solving every
//! outage processing can help:
//!
//! 1. **Rounding neighbourhood.** At each modular site the LP count `q` is snapped to the
//!    nearest whole count when within [`ROUND_TOL`] (relative), else both `⌊q⌋` and `⌈q⌉`
//!    are tried; all combinations are checked (at most [`MAX_COMBOS`]; past that, the
//!    sites whose fraction is nearest ½ branch and the others round down within a budget,
//!    up for close-all). The plain rounding (down within a budget, up for close-all) is
//!    always one of them.
//! 2. **Local search.** From the best combination, one module more or less at each modular
//!    site, kept when the plan gets better ([`Score::compare`]: the goal first, then the
//!    cost), until no move helps (at most [`LOCAL_PASSES`] passes).
//!
//! Sites bought by the unit are re-optimised for each candidate by the same
//! constraint-generation loop with the modules fixed (and the budget left); for close-all
//! each outage's target is then its best capped by what it reaches with those modules and
//! every unit-bought site at its maximum (one re-solve per gainable outage), so a rounding
//! too low to close everything is scored as falling short instead of making the master
//! infeasible. The chosen plan is never worse than any candidate checked, in particular
//! than plain rounding (up for close-all, which reaches every best).

use std::collections::BTreeMap;

use super::candidates::Candidates;
use super::generate::{Generated, Generation, Score, generate, verify};
use super::{Goal, ModuleRounding};
use crate::audit::{Audit, RunOptions};
use crate::error::Result;
use crate::model::Network;
use crate::solve::Evaluation;
use crate::solve::lp::{Lp, LpSolution};

/// Relative tolerance within which an LP module count is taken as whole (defined in
/// [`crate::tol`]): an LP plan of 29.999999 in modules of 10 is 3 modules.
pub(super) use crate::tol::ROUND_TOL;

/// Most rounding combinations checked.
const MAX_COMBOS: usize = 32;

/// Most local-search passes over the modular sites.
const LOCAL_PASSES: usize = 4;

/// Relative slack on the budget for a module plan; and equal costs (see [`crate::tol`]).
use crate::tol::{BUDGET_TOL, COST_TOL};

/// Per outage: the best reachable served_required `data.bests` capped by what the outage
/// reaches with the additions `fixed` and every site of `rest` at its maximum (at most the
/// total required demand; one verified re-solve per gainable outage).
fn reachable_with(
    net: &Network,
    audit: &Audit,
    rest: &Candidates,
    fixed: &[f64],
    data: &Generation<'_>,
    opts: RunOptions,
) -> Result<Vec<f64>> {
    let cap = net.total_required();
    let full: Vec<f64> = fixed
        .iter()
        .enumerate()
        .map(|(v, f)| match rest.cost[v] {
            Some(_) => f + rest.max[v].min(cap).max(0.0),
            None => *f,
        })
        .collect();
    let after = verify(
        &net.with_added_processing(&full),
        audit,
        data.gainable,
        opts,
    )?;
    Ok(data
        .bests
        .iter()
        .zip(&after)
        .map(|(b, e)| b.min(e.served_required))
        .collect())
}

/// One checked module plan.
struct Candidate {
    add: Vec<f64>,
    after: Vec<Evaluation>,
    score: Score,
}

/// The best whole-module plan found near the LP plan `lp` (see the module comment), with
/// how it was found. Cost: one verification per candidate (one constraint-generation run
/// when some site buys by the unit); at most [`MAX_COMBOS`] + 2 · modular sites ·
/// [`LOCAL_PASSES`] candidates.
pub(super) fn round_to_modules(
    net: &Network,
    audit: &Audit,
    cands: &Candidates,
    data: &Generation<'_>,
    goal: Goal,
    lp: &Generated,
    opts: RunOptions,
) -> Result<(Vec<f64>, Vec<Evaluation>, ModuleRounding)> {
    let n = net.sites.len();
    let budget = match goal {
        Goal::CloseAll => None,
        Goal::WorstWithin(b) | Goal::TotalWithin(b) => Some(b),
    };
    let scale: f64 = audit
        .outage_of
        .iter()
        .map(|&k| audit.evaluations[k].surviving_required)
        .sum();
    let modular: Vec<usize> = (0..n)
        .filter(|&v| cands.cost[v].is_some() && cands.step[v].is_some() && cands.max[v] > 0.0)
        .collect();
    let step = |v: usize| cands.step[v].unwrap_or(1.0);
    let max_modules = |v: usize| cands.max_modules(v);
    // 1. Rounding options per modular site.
    let mut options: Vec<Vec<f64>> = modular
        .iter()
        .map(|&v| {
            let q = lp.add[v] / step(v);
            let near = q.round();
            let mut o = if (q - near).abs() <= ROUND_TOL * q.max(1.0) {
                // Within a budget a count snapped up may not fit: one fewer is the fallback.
                if budget.is_some() && near > q {
                    vec![near, near - 1.0]
                } else {
                    vec![near]
                }
            } else {
                vec![q.floor(), q.ceil()]
            };
            for c in &mut o {
                *c = c.clamp(0.0, max_modules(v));
            }
            o.dedup_by(|a, b| a == b);
            o
        })
        .collect();
    let mut branching: Vec<usize> = (0..modular.len())
        .filter(|&i| options[i].len() > 1)
        .collect();
    let max_branch = MAX_COMBOS.ilog2() as usize;
    if branching.len() > max_branch {
        let frac = |i: usize| {
            let q = lp.add[modular[i]] / step(modular[i]);
            ((q - q.floor()) - 0.5).abs()
        };
        branching.sort_by(|&a, &b| frac(a).total_cmp(&frac(b)).then(a.cmp(&b)));
        for &i in &branching[max_branch..] {
            let keep = if budget.is_some() { 0 } else { 1 };
            options[i] = vec![options[i][keep]];
        }
    }
    // The unit-bought sites, re-optimised with the modules fixed.
    let mut rest = cands.clone();
    for &v in &modular {
        rest.cost[v] = None;
    }
    let units_left = (0..n).any(|v| rest.cost[v].is_some() && rest.max[v] > 0.0);
    let mut memo: BTreeMap<Vec<u64>, Option<Candidate>> = BTreeMap::new();
    let mut evaluate = |counts: &[f64]| -> Result<Option<Score>> {
        let key: Vec<u64> = counts.iter().map(|&c| c as u64).collect();
        if let Some(c) = memo.get(&key) {
            return Ok(c.as_ref().map(|c| c.score));
        }
        let mut fixed = vec![0.0; n];
        for (&v, &c) in modular.iter().zip(counts) {
            fixed[v] = cands.modules_to_units(v, c);
        }
        let fixed_cost = cands.cost_of(&fixed);
        let candidate = match budget {
            Some(b) if fixed_cost > b + BUDGET_TOL * b.max(1.0) => None,
            _ => {
                let planned = net.with_added_processing(&fixed);
                let (add, after) = if units_left {
                    let left = budget.map(|b| (b - fixed_cost).max(0.0));
                    let sub_goal = match goal {
                        Goal::CloseAll => Goal::CloseAll,
                        Goal::WorstWithin(_) => Goal::WorstWithin(left.unwrap_or(0.0)),
                        Goal::TotalWithin(_) => Goal::TotalWithin(left.unwrap_or(0.0)),
                    };
                    // Close-all with these modules fixed: the unit-bought sites can only
                    // lift each outage to what they reach at their own maximum, so that is
                    // the target (a module plan short of the true best is then scored as
                    // such, instead of making the master infeasible).
                    let reach: Vec<f64>;
                    let capped = if goal == Goal::CloseAll {
                        reach = reachable_with(net, audit, &rest, &fixed, data, opts)?;
                        Generation {
                            bests: &reach,
                            ..*data
                        }
                    } else {
                        Generation { ..*data }
                    };
                    let g = generate(&planned, audit, &rest, &capped, sub_goal, opts)?;
                    let add: Vec<f64> = fixed.iter().zip(&g.add).map(|(f, a)| f + a).collect();
                    (add, g.after)
                } else {
                    (fixed, verify(&planned, audit, data.gainable, opts)?)
                };
                let score = Score::of(audit, data.bests, &after, cands.cost_of(&add));
                Some(Candidate { add, after, score })
            }
        };
        let score = candidate.as_ref().map(|c| c.score);
        memo.insert(key, candidate);
        Ok(score)
    };
    let better = |a: &Option<Score>, b: &Option<Score>| match (a, b) {
        (Some(a), Some(b)) => a.compare(b, goal, scale).is_gt(),
        (Some(_), None) => true,
        _ => false,
    };
    // Every combination of the options, first option first (odometer order).
    let mut best_counts: Vec<f64> = options.iter().map(|o| o[0]).collect();
    let mut best = evaluate(&best_counts)?;
    let mut digits = vec![0usize; options.len()];
    while let Some(i) = (0..digits.len()).find(|&i| digits[i] + 1 < options[i].len()) {
        digits[i] += 1;
        for d in &mut digits[..i] {
            *d = 0;
        }
        let counts: Vec<f64> = digits.iter().zip(&options).map(|(&d, o)| o[d]).collect();
        let score = evaluate(&counts)?;
        if better(&score, &best) {
            best = score;
            best_counts = counts;
        }
    }
    let rounded = best_counts.clone();
    // 2. Local search: one module more or less at a site.
    for _ in 0..LOCAL_PASSES {
        let mut improved = false;
        for i in 0..modular.len() {
            for delta in [-1.0, 1.0] {
                let c = best_counts[i] + delta;
                if c < 0.0 || c > max_modules(modular[i]) {
                    continue;
                }
                let mut counts = best_counts.clone();
                counts[i] = c;
                let score = evaluate(&counts)?;
                if better(&score, &best) {
                    best = score;
                    best_counts = counts;
                    improved = true;
                }
            }
        }
        if !improved {
            break;
        }
    }
    let repaired: usize = rounded
        .iter()
        .zip(&best_counts)
        .map(|(r, b)| (r - b).max(0.0) as usize)
        .sum();
    let checked = memo.values().filter(|c| c.is_some()).count();
    let key: Vec<u64> = best_counts.iter().map(|&c| c as u64).collect();
    let lp_cost = cands.cost_of(&lp.add);
    let chosen = memo.remove(&key).flatten();
    let (add, after) = match chosen {
        Some(c) => (c.add, c.after),
        // Nothing fits (a budget below one module everywhere): buy no modules.
        None => {
            let fixed = vec![0.0; n];
            let after = verify(net, audit, data.gainable, opts)?;
            (fixed, after)
        }
    };
    let cost = cands.cost_of(&add);
    Ok((
        add,
        after,
        ModuleRounding {
            lp_add: lp.add.clone(),
            lp_cost,
            gap: (cost - lp_cost).max(0.0),
            repaired,
            checked,
        },
    ))
}

/// Most LP solves of one [`cheapest_whole`] search.
pub(crate) const MAX_NODES: usize = 200;

/// What [`cheapest_whole`] found.
pub(crate) struct WholeModules {
    /// The chosen solution's variable values: every modular addition whole modules (the
    /// last one partial at `expand_max`), the other variables as the LP left them.
    pub x: Vec<f64>,
    /// The continuous optimum's dual objective: a lower bound on the cost of any purchase
    /// (equal to the cost when no site buys by the module).
    pub dual_bound: f64,
    /// The search ran to the end: no cheaper whole-module solution exists (up to the LP
    /// tolerances); false when it stopped at [`MAX_NODES`] solves with the best found.
    pub exhaustive: bool,
}

/// The cheapest solution of `model` (minimising the purchase cost; `add[v]` its addition
/// variables) with every addition at a site that buys by the module (`expand_step`) a whole
/// number of modules, at most `expand_max`: branch and bound on the LP relaxation. At a
/// node whose LP optimum has a modular addition `x` strictly between two allowed amounts
/// `lo < x < hi` (consecutive multiples of the step, or the last multiple and
/// `expand_max`), two children bound it by `≤ lo` and `≥ hi`; a node is pruned when its
/// LP cost is not below the best whole-module solution found (or its LP fails: an
/// infeasible branch). Every node's LP solution rounded up to allowed amounts is itself a
/// whole-module solution (more processing never serves less), so the root already gives
/// one. Amounts within [`ROUND_TOL`] of a module below an allowed amount count as that
/// amount (rounded up, never down). Nodes are taken cheapest bound first. Cost: at most
/// [`MAX_NODES`] LP solves of the model's size. Every LP (root and nodes) is solved by
/// `solve`, which returns the optimum of the whole model at those bounds: one
/// interior-point solve for a complete model, column generation for the walk master of
/// a closing ([`crate::solve::evaluator::ClosingModel::solve`]).
pub(crate) fn cheapest_whole(
    model: &Lp,
    add: &[Option<usize>],
    cands: &Candidates,
    solve: &dyn Fn(&Lp) -> Result<LpSolution>,
) -> Result<WholeModules> {
    let mut model = model.clone();
    let modular: Vec<(usize, usize)> = add
        .iter()
        .enumerate()
        .filter_map(|(v, a)| a.filter(|_| cands.module(v).is_some()).map(|j| (v, j)))
        .collect();
    // A whole module may pass the variable's bound (the demand at stake): allow it.
    for &(v, j) in &modular {
        model.upper[j] = model.upper[j].max(cands.round_up(v, model.upper[j]));
    }
    let root = solve(&model)?;
    let dual_bound = model.dual_objective(&root);
    if modular.is_empty() {
        return Ok(WholeModules {
            x: root.x,
            dual_bound,
            exhaustive: true,
        });
    }
    let cost = |x: &[f64]| -> f64 { model.objective.iter().zip(x).map(|(c, v)| c * v).sum() };
    let rounded = |x: &[f64]| -> Vec<f64> {
        let mut y = x.to_vec();
        for &(v, j) in &modular {
            y[j] = cands.round_up(v, x[j].max(0.0));
        }
        y
    };
    let mut best_x = rounded(&root.x);
    let mut best_cost = cost(&best_x);
    let prune = |c: f64, best: f64| c >= best - COST_TOL * best.abs().max(1.0);
    // Open nodes: (LP bound of the parent, bounds of the modular variables).
    let mut open: Vec<(f64, Vec<(f64, f64)>)> = Vec::new();
    let mut node = Some((
        root,
        modular
            .iter()
            .map(|&(_, j)| (model.lower[j], model.upper[j]))
            .collect::<Vec<_>>(),
    ));
    let mut solves = 1;
    loop {
        if let Some((sol, bounds)) = node.take() {
            let c = cost(&sol.x);
            if !prune(c, best_cost) {
                let y = rounded(&sol.x);
                let cy = cost(&y);
                if cy < best_cost {
                    best_cost = cy;
                    best_x = y;
                }
                // The modular addition farthest (in modules) from an allowed amount above.
                let branch = modular
                    .iter()
                    .enumerate()
                    .map(|(i, &(v, j))| {
                        let step = cands.module(v).unwrap_or(1.0);
                        (i, (cands.round_up(v, sol.x[j].max(0.0)) - sol.x[j]) / step)
                    })
                    .filter(|&(_, gap)| gap > ROUND_TOL)
                    .max_by(|a, b| a.1.total_cmp(&b.1).then(b.0.cmp(&a.0)));
                if let Some((i, _)) = branch {
                    let (v, j) = modular[i];
                    let x = sol.x[j].max(0.0);
                    let hi = cands.round_up(v, x);
                    let step = cands.module(v).unwrap_or(1.0);
                    let lo = ((x / step).floor() * step).min(x);
                    let mut down = bounds.clone();
                    down[i].1 = lo.min(down[i].1);
                    let mut up = bounds;
                    up[i].0 = hi.max(up[i].0);
                    open.push((c, down));
                    open.push((c, up));
                }
            }
        }
        open.retain(|(b, _)| !prune(*b, best_cost));
        if open.is_empty() || solves >= MAX_NODES {
            break;
        }
        // Cheapest bound first (the last pushed among equals: depth first on ties).
        let i = (0..open.len())
            .min_by(|&a, &b| open[a].0.total_cmp(&open[b].0).then(b.cmp(&a)))
            .expect("not empty");
        let (_, bounds) = open.swap_remove(i);
        for (&(_, j), &(lo, hi)) in modular.iter().zip(&bounds) {
            model.lower[j] = lo;
            model.upper[j] = hi;
        }
        solves += 1;
        if bounds.iter().all(|(lo, hi)| lo <= hi)
            && let Ok(sol) = solve(&model)
        {
            node = Some((sol, bounds));
        }
    }
    Ok(WholeModules {
        x: best_x,
        dual_bound,
        exhaustive: open.is_empty(),
    })
}
