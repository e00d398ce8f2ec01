//! Closings on the walk engine: the cheapest purchase of processing that serves a target,
//! by column generation over processing walks instead of the edge LP's sources × arcs
//! variables.
//!
//! **Master** (minimise): `Σ_v cost_v·add_v` subject to, per usable class arc,
//! `Σ mult(w, a)·λ_w ≤ cap_a`; per processing or expandable site, `Σ_{w at v} λ_w − add_v
//! ≤ proc_v`; per demand, `Σ_{w of d} λ_w ≤ b_d` (its required part); and `Σ λ_w ≥ target`;
//! `0 ≤ add_v ≤` the bound the caller gave the variable. By the flow decomposition of
//! [`super`] it has the optimum of the edge model with additions
//! ([`crate::solve::flow::build`] with added-processing variables).
//!
//! **Pricing.** With arc duals `y ≥ 0`, site duals `z ≥ 0`, demand duals `u ≥ 0` and the
//! served row's dual `σ ≥ 0`, a walk of `d` through `v` has reduced cost
//! `Σ mult·y + z_v + u_d − σ`; dividing by `σ` gives the walk engine's own pricing
//! (the pricing pass of [`super`] at `y/σ`, `z/σ`, `u/σ`): the same shortest processing walk.
//!
//! **Stopping.** Lagrangian relaxation of the arc, site and served rows (demand rows and
//! variable bounds kept) gives, for any `y, z, σ ≥ 0`, the lower bound
//! `σ·target − Σ y·cap − Σ z·proc + Σ_v max_v·min(0, cost_v − z_v) − σ·Σ_d b_d·max(0, 1 − c_d/σ)`
//! (`c_d` the cheapest walk price at `y, z`). The loop stops when it meets the master's
//! optimum within [`CLOSE_GAP`]: the restricted master is then optimal for the full model.

use super::{Graph, MAX_ROUNDS, Walk, evaluate_walks, pivot_budget, price};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::cancel;
use crate::solve::evaluator::AddModel;
use crate::solve::lp::{self, Lp, LpSolution, Sense};
use crate::solve::surviving::Surviving;
use std::collections::{HashMap, HashSet};

mod warm;
use warm::WarmCost;

/// The column generation stops when the Lagrangian bound is within this of the master's
/// cost, relative to `max(1, cost)`.
pub const CLOSE_GAP: f64 = 1e-7;

/// A closing's walk master ready to be re-solved with other addition bounds (the nodes of
/// the whole-module search): the pricing graph and the rows and columns built so far.
pub struct WalkCloser<'a> {
    g: Graph<'a>,
    caps: Vec<f64>,
    arc_cap: Vec<f64>,
    site_cap: Vec<f64>,
    add: Vec<Option<usize>>,
    target: f64,
    cols: std::sync::Mutex<Columns>,
    /// Columns in the master [`cost_master`] returned; later ones were found at nodes.
    root_cols: usize,
    outage: Outage,
    /// The root master's optimum as [`cost_master`] found it (with its bound duals), and
    /// the variable bounds it was found at: a [`WalkCloser::solve`] of the same master
    /// returns it instead of solving again.
    root: Option<(Vec<f64>, Vec<f64>, LpSolution)>,
}

/// Builds into `model` (which already holds the addition variables `add`, per site, with
/// their costs as objective and their bounds) the walk master of the cheapest purchase
/// serving `target` of `outage`'s required demand, with the columns that make it optimal
/// (module comment). Returns its served variables and site rows, and the master for
/// re-solves ([`WalkCloser::solve`]); `None` when the walk engine cannot give a feasible
/// start or the generation stalls (the caller then uses the edge model; `model` is then
/// left unchanged).
///
/// Start: the walks of the walk engine's verified optimum with every addition at its
/// bound (feasible when `target` is at most the best reachable value), at their flows
/// with every addition at its bound: a feasible point, from which the rounds run on one
/// warm GUB simplex copy of the master (`warm.rs`; the interior point when that point is
/// not feasible to [`crate::tol::WARM_START_TOL`] or the simplex fails). The optimum found
/// is kept (with its bound duals) for the first [`WalkCloser::solve`] of the same master.
/// Cost per round: one warm re-optimisation over a basis of the arc and site rows (the
/// demand rows are set rows), and one pricing pass of [`super`]; at most [`MAX_ROUNDS`]
/// rounds.
pub fn cost_master<'a>(
    net: &'a Network,
    outage: &Outage,
    model: &mut Lp,
    add: &[Option<usize>],
    target: f64,
) -> Result<Option<(AddModel, WalkCloser<'a>)>> {
    let net = net.view(outage.matrix);
    let expandable: Vec<bool> = add.iter().map(Option::is_some).collect();
    let view = Surviving::new(net, outage, Some(&expandable));
    let g = Graph::new(net, &view);
    let caps = g.caps(false);
    let full: Vec<f64> = add
        .iter()
        .map(|a| a.map_or(0.0, |j| model.upper[j].max(0.0)))
        .collect();
    let start = evaluate_walks(&net.with_added_processing(&full), outage, None)?;
    let Some(start) = start.basis.required else {
        return Ok(None);
    };
    let mut work = model.clone();
    let (arc_cap, site_cap) = g.effective(&caps);
    let mut arc_row = vec![NO_ROW; net.arcs.len()];
    for &a in &g.usable {
        arc_row[a] = work.add_row(Vec::new(), Sense::Le, arc_cap[a]);
    }
    let mut site_row: Vec<Option<usize>> = vec![None; net.sites.len()];
    for &v in &g.procs {
        let coeffs = add[v].map(|j| vec![(j, -1.0)]).unwrap_or_default();
        site_row[v] = Some(work.add_row(coeffs, Sense::Le, site_cap[v]));
    }
    let mut dem_row = vec![NO_ROW; net.demands.len()];
    for (d, &b) in caps.iter().enumerate() {
        if b > 0.0 {
            dem_row[d] = work.add_row(Vec::new(), Sense::Le, b);
        }
    }
    let served_row = work.add_row(Vec::new(), Sense::Ge, target);
    let mut cols = Columns {
        seen: HashSet::new(),
        order: Vec::new(),
        served: Vec::new(),
        arc_row,
        site_row,
        dem_row,
        served_row,
    };
    // The start point: every addition at its bound, each start walk's column at its
    // flow (walks equal on class arcs merged).
    let mut flow_of: HashMap<Walk, f64> = HashMap::new();
    for (w, &f) in start.walks.iter().zip(&start.flow) {
        if let Some(l) = g.lift(w) {
            *flow_of.entry(l.clone()).or_insert(0.0) += f;
            cols.add(&mut work, l, &caps);
        }
    }
    let mut point: Vec<f64> = (0..work.num_vars())
        .map(|j| 0.0f64.clamp(work.lower[j], work.upper[j]))
        .collect();
    for (a, &units) in add.iter().zip(&full) {
        if let Some(j) = *a {
            point[j] = units;
        }
    }
    for (w, &j) in cols.order.iter().zip(&cols.served) {
        point[j] = flow_of.get(w).copied().unwrap_or(0.0);
    }
    let mut set_row = vec![false; work.rows.len()];
    for &r in cols.dem_row.iter().filter(|&&r| r != NO_ROW) {
        set_row[r] = true;
    }
    let mut warm = WarmCost::new(&work, &set_row, &point);
    let closer = WalkCloser {
        g,
        caps,
        arc_cap,
        site_cap,
        add: add.to_vec(),
        target,
        cols: std::sync::Mutex::new(cols),
        root_cols: 0,
        outage: outage.clone(),
        root: None,
    };
    let Some(sol) = closer.generate(&mut work, warm.as_mut())? else {
        return Ok(None);
    };
    let mut closer = closer;
    closer.root_cols = closer.cols.lock().expect("not poisoned").order.len();
    closer.root = Some((work.lower.clone(), work.upper.clone(), sol));
    *model = work;
    let cols = closer.cols.lock().expect("not poisoned");
    let m = AddModel {
        served: cols.served.clone(),
        site_rows: cols.site_row.clone(),
    };
    drop(cols);
    Ok(Some((m, closer)))
}

impl WalkCloser<'_> {
    /// The optimum of `lp` (the master as built by [`cost_master`], its addition bounds
    /// possibly changed) over every walk, not only the columns in it: column generation on
    /// a copy, the solution cut back to `lp`'s variables (the walks added carry no cost,
    /// so the objective is unchanged). Columns found are kept for later solves. When the
    /// generation stalls, the copy's restricted optimum (a cost no lower than the true
    /// one). An error when no purchase within the bounds serves the target (a node to
    /// prune).
    ///
    /// New bounds can leave the columns so far unable to serve the target while other
    /// walks could: the walk engine's verified optimum with every addition at its new
    /// upper bound either serves less than the target (the node is infeasible: an error)
    /// or gives walks that make the restricted master feasible. O(one walk evaluation +
    /// rounds · (one interior-point solve + one pricing pass)).
    pub fn solve(&self, lp: &Lp) -> Result<LpSolution> {
        if let Some((lower, upper, sol)) = &self.root
            && lp.lower == *lower
            && lp.upper == *upper
            && lp.rows.len() == sol.duals.len()
        {
            return Ok(sol.clone());
        }
        let mut work = lp.clone();
        // Columns found at other nodes, missing from `lp`.
        {
            let cols = self.cols.lock().expect("not poisoned");
            for w in &cols.order[self.root_cols..] {
                cols.column(&mut work, w, &self.caps);
            }
        }
        // The walk engine's optimum with every addition at its upper bound here: proves
        // the node infeasible when it serves less than the target, else its walks make
        // the restricted master feasible.
        let ub: Vec<f64> = self
            .add
            .iter()
            .map(|a| a.map_or(0.0, |j| lp.upper[j].max(0.0)))
            .collect();
        let reach = evaluate_walks(&self.g.net.with_added_processing(&ub), &self.outage, None)?;
        if reach.evaluation.served_required + 1e-9 * self.target.max(1.0) < self.target {
            return Err(Error::Solver(
                "no purchase within these bounds serves the target".into(),
            ));
        }
        if let Some(start) = reach.basis.required {
            let mut cols = self.cols.lock().expect("not poisoned");
            for w in start.walks.iter().filter_map(|w| self.g.lift(w)) {
                cols.add(&mut work, w, &self.caps);
            }
        }
        let sol = self.generate(&mut work, None)?;
        let mut sol = match sol {
            Some(s) => s,
            None => lp::solve(&work)?,
        };
        sol.x.truncate(lp.num_vars());
        sol.upper_duals.truncate(lp.num_vars());
        Ok(sol)
    }

    /// Column generation on `work` until the Lagrangian bound meets the master's cost
    /// within [`CLOSE_GAP`] (module comment); its optimum, or `None` when a solve fails or
    /// no new column prices out first. Each round is solved on `warm` (the warm GUB copy
    /// of `work`) when given, by the interior point otherwise or once the copy fails.
    fn generate(
        &self,
        work: &mut Lp,
        mut warm: Option<&mut WarmCost>,
    ) -> Result<Option<LpSolution>> {
        let g = &self.g;
        for _ in 0..MAX_ROUNDS {
            cancel::check()?;
            let solved = match warm.as_mut().map(|w| w.solve(work)) {
                Some(Ok(sol)) => Ok(sol),
                Some(Err(e @ Error::Interrupted(_))) => return Err(e),
                Some(Err(_)) => {
                    warm = None;
                    lp::solve(work)
                }
                None => lp::solve(work),
            };
            let Ok(sol) = solved else {
                cancel::check()?;
                return Ok(None);
            };
            let neg = |r: usize| {
                if r == NO_ROW || r >= sol.duals.len() {
                    0.0
                } else {
                    (-sol.duals[r]).max(0.0)
                }
            };
            let (y, z, u, sigma) = {
                let cols = self.cols.lock().expect("not poisoned");
                (
                    cols.arc_row.iter().map(|&r| neg(r)).collect::<Vec<f64>>(),
                    cols.site_row
                        .iter()
                        .map(|r| r.map_or(0.0, neg))
                        .collect::<Vec<f64>>(),
                    cols.dem_row.iter().map(|&r| neg(r)).collect::<Vec<f64>>(),
                    sol.duals[cols.served_row].max(0.0),
                )
            };
            let cost = sol.objective;
            let mut bound = sigma * self.target
                - g.usable
                    .iter()
                    .map(|&a| y[a] * self.arc_cap[a])
                    .sum::<f64>()
                - g.procs
                    .iter()
                    .map(|&v| z[v] * self.site_cap[v])
                    .sum::<f64>();
            for (v, a) in self.add.iter().enumerate() {
                if let Some(j) = *a {
                    // Σ (cost − z)·add over lower ≤ add ≤ upper, at its minimum.
                    let c = work.objective[j] - z[v];
                    bound += if c < 0.0 {
                        c * work.upper[j]
                    } else {
                        c * work.lower[j]
                    };
                }
            }
            let fresh: Vec<Walk> = if sigma > 0.0 {
                let scaled = |x: &[f64]| x.iter().map(|v| v / sigma).collect::<Vec<f64>>();
                let p = price(g, &self.caps, &scaled(&y), &scaled(&z), Some(&scaled(&u)));
                bound -= sigma
                    * self
                        .caps
                        .iter()
                        .zip(&p.cost)
                        .filter(|(_, c)| c.is_finite())
                        .map(|(b, c)| b * (1.0 - c).max(0.0))
                        .sum::<f64>();
                p.walks
            } else {
                Vec::new()
            };
            if cost - bound <= CLOSE_GAP * cost.abs().max(1.0) {
                return Ok(Some(sol));
            }
            let mut cols = self.cols.lock().expect("not poisoned");
            let before = cols.served.len();
            for w in fresh {
                cols.add(work, w, &self.caps);
            }
            if cols.served.len() == before {
                return Ok(None);
            }
        }
        Ok(None)
    }
}

/// No row (an arc or demand without one).
const NO_ROW: usize = usize::MAX;

/// The rows of the walk master and the walk columns added so far.
struct Columns {
    seen: HashSet<Walk>,
    /// The walks, in column order (`served[k]` is the variable of `order[k]`).
    order: Vec<Walk>,
    /// The walk variables, in column order (the served terms).
    served: Vec<usize>,
    arc_row: Vec<usize>,
    site_row: Vec<Option<usize>>,
    dem_row: Vec<usize>,
    served_row: usize,
}

impl Columns {
    /// Adds walk `w` (class arcs, processed at a site of the view) as a column of `work`
    /// unless it is already there or its demand has no row. O(walk length).
    fn add(&mut self, work: &mut Lp, w: Walk, caps: &[f64]) {
        if self.site_row[w.site].is_none() || self.dem_row[w.demand] == NO_ROW {
            return;
        }
        if !self.seen.insert(w.clone()) {
            return;
        }
        let j = self.column(work, &w, caps);
        self.served.push(j);
        self.order.push(w);
    }

    /// Adds walk `w`'s column to `work` (rows as in the master); returns its variable.
    /// O(walk length).
    fn column(&self, work: &mut Lp, w: &Walk, caps: &[f64]) -> usize {
        let site = self.site_row[w.site].expect("a column's site has a row");
        let j = work.add_var(0.0, f64::INFINITY, 0.0);
        work.magnitude[j] = caps[w.demand];
        for &(a, m) in &w.arcs {
            work.rows[self.arc_row[a]].coeffs.push((j, f64::from(m)));
        }
        work.rows[site].coeffs.push((j, 1.0));
        work.rows[self.dem_row[w.demand]].coeffs.push((j, 1.0));
        work.rows[self.served_row].coeffs.push((j, 1.0));
        j
    }
}
