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

/// Best served_required of `outage` with every candidate expanded as far as allowed, with
/// the flow index and solution of that LP.
fn best_reachable(
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
    let (best, binding_links) = best_reachable(net, outage, cands, required)?;
    let scale = required.max(1.0);
    let best = if (required - best).abs() <= TOL * scale {
        required
    } else {
        best.max(eval.served_required)
    };
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
    served_row(&mut model, &index, best - TOL * scale);
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
            let (b, _) = best_reachable(net, &audit.outages[k], &cands, e.surviving_required)?;
            let scale = e.surviving_required.max(1.0);
            Ok(if (e.surviving_required - b).abs() <= TOL * scale {
                e.surviving_required
            } else {
                b.max(e.served_required)
            })
        },
    )?;
    let gains = |k: usize| bests[k] - audit.evaluations[k].served_required;
    let short: Vec<usize> = (0..n_out)
        .filter(|&k| match goal {
            Goal::CloseAll => gains(k) > TOL * audit.evaluations[k].surviving_required.max(1.0),
            Goal::WorstWithin(_) | Goal::TotalWithin(_) => audit.evaluations[k].shortfall > 0.0,
        })
        .collect();
    let fraction = |e: &Evaluation| {
        if e.surviving_required > 0.0 {
            e.served_required / e.surviving_required
        } else {
            1.0
        }
    };
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
    let mut active: Vec<usize> = match goal {
        Goal::TotalWithin(_) => order.clone(),
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
            solve_master(net, audit, &cands, &bests, &active, &multiplicity, goal)?;
        add_units = units;
        let planned = net.with_added_processing(&add_units);
        after = audit::par_map(&audit.outages, opts, "verifying plan", |o| {
            solve::evaluate(&planned, o)
        })?;
        let mut violated: Vec<(f64, usize)> = Vec::new();
        for &k in &short {
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
    Ok(Plan {
        goal,
        cost: cands.cost_of(&add_units),
        add: add_units,
        rounds,
        best: bests,
        after,
        drivers,
        worst_fraction,
    })
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
                served_row(&mut model, &index, bests[k] - TOL * req.max(1.0));
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
    let sol = lp::solve(&model).map_err(|e| Error::Solver(format!("plan master problem: {e}")))?;
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
