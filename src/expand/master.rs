//! The master problem of constraint generation: one model per active outage (a block of
//! walk rows, [`Master::Walks`], the default; or an edge flow-model copy, [`Master::Edge`]),
//! all sharing the `add_v` variables, solved as a short sequence of LPs (lexicographic
//! phases). The walk master keeps one warm simplex across its phases: each phase adds its
//! held row (met at the last phase's vertex) and its objective, and re-optimises from that
//! vertex with column generation; only past the simplex's size limit does it solve each
//! round cold by the interior point (see [`Master::Walks`]).
//!
//! Phases, each holding the previous phase's optimum with a tolerance ([`HOLD_TOL`]):
//!
//! | goal | 1 | 2 | 3 | 4 |
//! |---|---|---|---|---|
//! | close-all | least cost with every active outage at its best | — | — | tie-break |
//! | worst within budget | largest worst fraction `t` | most served (Σ scenarios · served) | least cost | tie-break |
//! | total within budget | most served (Σ scenarios · served) | — | least cost | tie-break |
//!
//! The tie-break phase holds the cost and minimises `Σ (v + 1) · add_v` (sites earlier in the
//! file preferred): an interior-point solver returns the centre of an optimal face, which
//! spreads an addition over every site that could take it; with distinct weights the
//! optimum is (generically) a single vertex, so the addition is concentrated. Each phase is
//! one LP of the master's size; a later phase whose held row the backend cannot meet is
//! retried once with a looser hold and otherwise skipped (the earlier phase's plan stands).

use super::candidates::{Candidates, add_vars, values};
use super::close::{served_row, target};
use super::{Goal, Master};
use crate::audit::Audit;
use crate::error::{Error, Result};
use crate::model::Network;
use crate::solve::colgen::plan::{GoalRow, PlanMaster};
use crate::solve::flow::{self, Cap};
use crate::solve::lp::{self, Lp, LpSolution, Sense};

/// Largest master problem a plan builds (variables).
pub const TOTAL_MAX_VARS: usize = 1_500_000;

/// How a later phase holds an earlier phase's optimum, and the retry's loosening factor
/// (defined in [`crate::tol`]).
use crate::tol::HOLD_RETRY;
pub(super) use crate::tol::HOLD_TOL;

/// What the master sees of the outages.
pub(super) struct MasterInput<'a> {
    pub net: &'a Network,
    pub audit: &'a Audit,
    pub cands: &'a Candidates,
    pub bests: &'a [f64],
    pub active: &'a [usize],
    pub multiplicity: &'a [usize],
    /// Upper bound on the worst fraction from the outages processing cannot help.
    pub t_cap: f64,
    /// Which formulation the master uses.
    pub master: Master,
}

/// The master's plan and its primary objective (the cost for close-all, the worst
/// fraction `t`, or the total shortfall over the active outages' scenarios).
pub(super) struct MasterResult {
    pub add: Vec<f64>,
    pub objective: f64,
    /// The walk master's LP solves (zero for the edge master).
    pub stats: super::MasterStats,
}

/// Sets the objective of `model` to `terms` (duplicates add up) and its sense.
fn set_objective(model: &mut Lp, maximise: bool, terms: &[(usize, f64)]) {
    model.objective.iter_mut().for_each(|c| *c = 0.0);
    for &(j, c) in terms {
        model.objective[j] += c;
    }
    model.maximise = maximise;
}

fn dot(terms: &[(usize, f64)], x: &[f64]) -> f64 {
    terms.iter().map(|&(j, c)| c * x[j]).sum()
}

/// Adds `terms ≥ value − slack` (or `≤ value + slack`), solves, and on a backend failure
/// retries once with the slack ×[`HOLD_RETRY`]; `None` when both fail (the caller keeps
/// the previous phase's solution).
fn held_solve(
    model: &mut Lp,
    terms: &[(usize, f64)],
    sense: Sense,
    value: f64,
    slack: f64,
) -> Option<LpSolution> {
    let rhs = |s: f64| match sense {
        Sense::Ge => value - s,
        _ => value + s,
    };
    let row = model.add_row(terms.to_vec(), sense, rhs(slack));
    if let Ok(sol) = lp::solve(model) {
        return Some(sol);
    }
    model.rows[row].rhs = rhs(slack * HOLD_RETRY);
    lp::solve(model).ok()
}

/// Solves the master over `input.active` for `goal` (phases in the module comment).
///
/// Size: one flow model per active outage (see [`flow::build`]) plus one `add` variable
/// per candidate; refused past [`TOTAL_MAX_VARS`] variables. Cost: two to four LP solves.
pub(super) fn solve_master(input: &MasterInput<'_>, goal: Goal) -> Result<MasterResult> {
    match input.master {
        Master::Edge => solve_master_edge(input, goal),
        Master::Walks => solve_master_walks(input, goal),
    }
}

/// The variables every master starts with.
struct Frame {
    /// Per site: its `add` variable (candidate sites only).
    add: Vec<Option<usize>>,
    /// `Σ cost_v · add_v`.
    cost_terms: Vec<(usize, f64)>,
    /// Site position over the site count: a deterministic preference among equal plans.
    tie_terms: Vec<(usize, f64)>,
    /// The worst fraction `t` ([`Goal::WorstWithin`] only), at most `t_cap`.
    t: Option<usize>,
    /// Σ required over the network's demands (at least 1): the scale of the additions.
    total_required: f64,
}

/// Adds to `model` the variables every master starts with ([`Frame`]): one `add`
/// variable per candidate site ([`add_vars`]), with a budget goal the row
/// `Σ cost_v · add_v ≤ budget`, and for the worst goal the variable `t`. O(sites).
fn frame(model: &mut Lp, input: &MasterInput<'_>, goal: Goal) -> Frame {
    let (net, cands) = (input.net, input.cands);
    let total_required = net.total_required().max(1.0);
    let add = add_vars(model, net, cands, None, total_required, 0.0);
    let cost_terms: Vec<(usize, f64)> = add
        .iter()
        .enumerate()
        .filter_map(|(v, a)| a.map(|a| (a, cands.cost[v].unwrap_or(0.0))))
        .collect();
    let tie_terms: Vec<(usize, f64)> = add
        .iter()
        .enumerate()
        .filter_map(|(v, a)| a.map(|a| (a, (v + 1) as f64 / net.sites.len() as f64)))
        .collect();
    if let Goal::WorstWithin(budget) | Goal::TotalWithin(budget) = goal {
        model.add_row(cost_terms.clone(), Sense::Le, budget);
    }
    let t = match goal {
        Goal::WorstWithin(_) => {
            let t = model.add_var(0.0, input.t_cap.clamp(0.0, 1.0), 0.0);
            model.magnitude[t] = 1.0;
            Some(t)
        }
        _ => None,
    };
    Frame {
        add,
        cost_terms,
        tie_terms,
        t,
        total_required,
    }
}

/// [`solve_master`] on the edge model: one flow-model copy per active outage.
///
/// Size: one flow model per active outage (see [`flow::build`]) plus one `add` variable
/// per candidate; refused past [`TOTAL_MAX_VARS`] variables. Cost: two to four LP solves.
fn solve_master_edge(input: &MasterInput<'_>, goal: Goal) -> Result<MasterResult> {
    let MasterInput {
        net, audit, bests, ..
    } = *input;
    let (active, multiplicity, t_cap) = (input.active, input.multiplicity, input.t_cap);
    let mut model = Lp::new(false);
    let Frame {
        add,
        cost_terms,
        tie_terms,
        t,
        total_required,
    } = frame(&mut model, input, goal);
    // Σ over active outages of (scenarios · served), and its largest value.
    let mut served_terms: Vec<(usize, f64)> = Vec::new();
    let mut served_scale = 0.0;
    for &k in active {
        let index = flow::build(
            &mut model,
            net,
            &audit.outages[k],
            Cap::Required,
            0.0,
            Some(&add),
        );
        if model.num_vars() > TOTAL_MAX_VARS {
            return Err(Error::Usage(format!(
                "the plan's master problem passed {TOTAL_MAX_VARS} variables; lower --depth \
                 or narrow --kinds"
            )));
        }
        let req = audit.evaluations[k].surviving_required;
        let m = multiplicity[k] as f64;
        served_scale += m * req;
        served_terms.extend(index.demand_var.iter().flatten().map(|&f| (f, m)));
        match (goal, t) {
            (Goal::CloseAll, _) => {
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
            _ => {}
        }
    }
    let active_shortfall = |x: &[f64]| {
        let served = if x.is_empty() {
            0.0
        } else {
            dot(&served_terms, x)
        };
        (served_scale - served).max(0.0)
    };
    if model.num_vars() == 0 {
        return Ok(MasterResult {
            add: vec![0.0; net.sites.len()],
            objective: match goal {
                Goal::CloseAll => 0.0,
                Goal::WorstWithin(_) => t_cap.clamp(0.0, 1.0),
                Goal::TotalWithin(_) => active_shortfall(&[]),
            },
            stats: Default::default(),
        });
    }
    let solver_error = |e: Error| Error::Solver(format!("plan master problem: {e}"));
    let served_slack = HOLD_TOL * served_scale.max(1.0);
    // Phase 1 (and, for worst, phase 2), then the least cost.
    let (mut sol, objective) = match (goal, t) {
        (Goal::CloseAll, _) => {
            set_objective(&mut model, false, &cost_terms);
            let sol = lp::solve(&model).map_err(solver_error)?;
            let cost = dot(&cost_terms, &sol.x);
            (sol, cost)
        }
        (_, Some(t)) => {
            set_objective(&mut model, true, &[(t, 1.0)]);
            let sol = lp::solve(&model).map_err(solver_error)?;
            let t_best = sol.x[t].clamp(0.0, 1.0);
            set_objective(&mut model, true, &served_terms);
            let mut best = sol;
            if let Some(s2) = held_solve(&mut model, &[(t, 1.0)], Sense::Ge, t_best, HOLD_TOL) {
                let s_best = dot(&served_terms, &s2.x);
                best = s2;
                set_objective(&mut model, false, &cost_terms);
                if let Some(s3) =
                    held_solve(&mut model, &served_terms, Sense::Ge, s_best, served_slack)
                {
                    best = s3;
                }
            }
            (best, t_best)
        }
        _ => {
            set_objective(&mut model, true, &served_terms);
            let sol = lp::solve(&model).map_err(solver_error)?;
            let s_best = dot(&served_terms, &sol.x);
            let shortfall = active_shortfall(&sol.x);
            set_objective(&mut model, false, &cost_terms);
            let best = held_solve(&mut model, &served_terms, Sense::Ge, s_best, served_slack)
                .unwrap_or(sol);
            (best, shortfall)
        }
    };
    // Tie-break: the cost held, sites earlier in the file preferred.
    let cost = dot(&cost_terms, &sol.x);
    if cost > 0.0 && !tie_terms.is_empty() {
        set_objective(&mut model, false, &tie_terms);
        if let Some(s4) = held_solve(&mut model, &cost_terms, Sense::Le, cost, HOLD_TOL * cost) {
            sol = s4;
        }
    }
    Ok(MasterResult {
        add: values(&add, &sol.x, total_required),
        objective,
        stats: Default::default(),
    })
}

/// Solves `rows` + `held` (terms ≥ or ≤ value ∓ slack) on the walk master; on a failure
/// retries once with the slack ×[`HOLD_RETRY`]; `None` when both fail (the caller keeps
/// the previous phase's solution). The held row stays in `rows` when a solve succeeds.
fn held_walks(
    pm: &mut PlanMaster<'_>,
    rows: &mut Vec<GoalRow>,
    objective: (&[(usize, f64)], bool),
    held: (&[(usize, f64)], Sense, f64, f64),
) -> Result<Option<LpSolution>> {
    let (terms, sense, value, slack) = held;
    let rhs = |s: f64| match sense {
        Sense::Ge => value - s,
        _ => value + s,
    };
    for s in [slack, slack * HOLD_RETRY] {
        rows.push((terms.to_vec(), sense, rhs(s)));
        match pm.solve(rows, objective.0, objective.1) {
            Ok(sol) => return Ok(Some(sol)),
            Err(e @ Error::Interrupted(_)) => return Err(e),
            Err(_) => {
                rows.pop();
            }
        }
    }
    Ok(None)
}

/// [`solve_master`] on the walk engine ([`PlanMaster`]): one block of walk columns per
/// active outage sharing the `add` variables, each outage's served value a variable
/// `s_k`; the phases of the module comment, each solved by column generation.
///
/// Size: per active outage, rows for its usable arcs, processing sites and demands, and
/// the walk columns generation adds (no sources × arcs variables). Cost: two to four
/// column generations, each a few warm simplex re-optimisations (interior-point solves of
/// the whole master past [`crate::solve::gub::COUPLING_ROWS`] rows besides its demand
/// rows) plus one walk pricing
/// pass per outage per round.
fn solve_master_walks(input: &MasterInput<'_>, goal: Goal) -> Result<MasterResult> {
    let (net, audit, active) = (input.net, input.audit, input.active);
    let (multiplicity, bests) = (input.multiplicity, input.bests);
    let mut base = Lp::new(false);
    let frame = frame(&mut base, input, goal);
    let (add, cost_terms, tie_terms) = (frame.add, frame.cost_terms, frame.tie_terms);
    let (t, total_required, t_cap) = (frame.t, frame.total_required, input.t_cap);
    let served_scale: f64 = active
        .iter()
        .map(|&k| multiplicity[k] as f64 * audit.evaluations[k].surviving_required)
        .sum();
    if active.is_empty() || cost_terms.is_empty() {
        return Ok(MasterResult {
            add: vec![0.0; net.sites.len()],
            objective: match goal {
                Goal::CloseAll => 0.0,
                Goal::WorstWithin(_) => t_cap.clamp(0.0, 1.0),
                Goal::TotalWithin(_) => served_scale,
            },
            stats: Default::default(),
        });
    }
    let mut pm = PlanMaster::new(net, base, add.clone());
    pm.start_from(
        audit
            .baseline
            .as_deref()
            .and_then(|b| b.downcast_ref::<crate::solve::colgen::Basis>()),
    );
    let mut rows: Vec<GoalRow> = Vec::new();
    let mut served_terms: Vec<(usize, f64)> = Vec::new();
    for &k in active {
        let s = pm.add_outage(&audit.outages[k])?;
        let req = audit.evaluations[k].surviving_required;
        served_terms.push((s, multiplicity[k] as f64));
        match (goal, t) {
            (Goal::CloseAll, _) => rows.push((vec![(s, 1.0)], Sense::Ge, target(bests[k], req))),
            (_, Some(t)) => rows.push((vec![(s, 1.0), (t, -req)], Sense::Ge, 0.0)),
            _ => {}
        }
    }
    let solver_error = |e: Error| match e {
        e @ Error::Interrupted(_) => e,
        e => Error::Solver(format!("plan master problem (walks): {e}")),
    };
    let served_slack = HOLD_TOL * served_scale.max(1.0);
    let (mut sol, objective) = match (goal, t) {
        (Goal::CloseAll, _) => {
            let sol = pm.solve(&rows, &cost_terms, false).map_err(solver_error)?;
            let cost = dot(&cost_terms, &sol.x);
            (sol, cost)
        }
        (_, Some(t)) => {
            let sol = pm.solve(&rows, &[(t, 1.0)], true).map_err(solver_error)?;
            let t_best = sol.x[t].clamp(0.0, 1.0);
            let mut best = sol;
            let held = (&[(t, 1.0)][..], Sense::Ge, t_best, HOLD_TOL);
            if let Some(s2) = held_walks(&mut pm, &mut rows, (&served_terms, true), held)? {
                let s_best = dot(&served_terms, &s2.x);
                best = s2;
                let held = (&served_terms[..], Sense::Ge, s_best, served_slack);
                if let Some(s3) = held_walks(&mut pm, &mut rows, (&cost_terms, false), held)? {
                    best = s3;
                }
            }
            (best, t_best)
        }
        _ => {
            let sol = pm.solve(&rows, &served_terms, true).map_err(solver_error)?;
            let s_best = dot(&served_terms, &sol.x);
            let shortfall = (served_scale - s_best).max(0.0);
            let held = (&served_terms[..], Sense::Ge, s_best, served_slack);
            let best = held_walks(&mut pm, &mut rows, (&cost_terms, false), held)?.unwrap_or(sol);
            (best, shortfall)
        }
    };
    let cost = dot(&cost_terms, &sol.x);
    if cost > 0.0 && !tie_terms.is_empty() {
        let held = (&cost_terms[..], Sense::Le, cost, HOLD_TOL * cost);
        if let Some(s4) = held_walks(&mut pm, &mut rows, (&tie_terms, false), held)? {
            sol = s4;
        }
    }
    Ok(MasterResult {
        add: values(&add, &sol.x, total_required),
        objective,
        stats: super::MasterStats {
            solves: pm.lp_solves,
            interior_point_solves: pm.interior_point_solves,
        },
    })
}
