//! Plans on the walk engine: one purchase shared by several outages, as a master over
//! processing walks instead of one edge-model copy (sources × arcs variables) per outage.
//!
//! **Master.** The caller's LP holds the addition variables `add_v` (shared by every
//! outage), its own variables (a worst fraction `t`) and rows on them (a budget). Each
//! outage `k` added by [`PlanMaster::add_outage`] gets a *block*: per usable class arc
//! `Σ mult(w, a)·λ_w ≤ cap_a`, per processing or expandable site `Σ_{w at v} λ_w − add_v ≤
//! proc_v` (the purchase is in the site's row, so a walk through an expandable site is
//! paid for by the addition), per demand `Σ_{w of d} λ_w ≤ b_d` (its required part), and a
//! served variable `s_k` with `Σ_w λ_w − s_k ≥ 0`. Goal rows and objectives name only
//! `add`, `s_k` and the caller's variables, so new walk columns enter only their block's
//! rows. By the flow decomposition of [`super`] each block has the optimum of the edge
//! model with additions ([`crate::solve::flow::build`] with added-processing variables).
//!
//! **Pricing.** With `d(r)` the shadow price of row `r` (d objective / d rhs) and
//! `sg = +1` for a maximisation, `−1` for a minimisation, a walk of block `k` improves
//! the master when its price `Σ mult·y_a + z_v + u_d` is below `σ_k`, where
//! `y = sg·d(arc row)`, `z = sg·d(site row)`, `u = sg·d(demand row)` (all ≥ 0) and
//! `σ_k = −sg·d(served row of k)`. Dividing by `σ_k` gives the walk engine's own pricing
//! (the shortest processing walk through the site's price, purchase option included:
//! expandable sites are processing sites of the pricing graph).
//!
//! **Stopping.** A round adds every improving walk not yet in its block; the loop stops
//! when none is new (the restricted master is then optimal up to the backend's duals) or
//! after [`MAX_ROUNDS`] rounds. A restricted master is a restriction of the full one, so
//! its plan is always feasible for every block; the caller re-verifies the plan on every
//! outage anyway.

use std::collections::HashSet;

use rayon::prelude::*;

use super::{Graph, MAX_ROUNDS, Walk, evaluate_walks, price};
use crate::error::Result;
use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::cancel;
use crate::solve::lp::{self, Lp, LpSolution, Sense};
use crate::solve::surviving::Surviving;

/// No row (an arc or demand without one).
const NO_ROW: usize = usize::MAX;

/// One row a caller adds for one solve: terms, sense, right-hand side.
pub type GoalRow = (Vec<(usize, f64)>, Sense, f64);

/// The walk master of a plan: the caller's variables and rows, one block per outage, the
/// walk columns found so far (kept across solves).
pub struct PlanMaster<'a> {
    net: &'a Network,
    base: Lp,
    add: Vec<Option<usize>>,
    blocks: Vec<Block<'a>>,
    /// Master LP solves so far.
    pub lp_solves: usize,
}

/// One outage's rows in the master.
struct Block<'a> {
    g: Graph<'a>,
    caps: Vec<f64>,
    arc_row: Vec<usize>,
    site_row: Vec<Option<usize>>,
    dem_row: Vec<usize>,
    served_row: usize,
    seen: HashSet<Walk>,
}

impl<'a> PlanMaster<'a> {
    /// A master over `base` (the caller's LP: the addition variables `add`, per site, with
    /// their bounds, and the caller's variables and fixed rows) with no outage yet. O(1).
    pub fn new(net: &'a Network, base: Lp, add: Vec<Option<usize>>) -> PlanMaster<'a> {
        PlanMaster {
            net,
            base,
            add,
            blocks: Vec::new(),
            lp_solves: 0,
        }
    }

    /// Variables of the master so far (the caller's, the served variables, the walks).
    pub fn num_vars(&self) -> usize {
        self.base.num_vars()
    }

    /// Adds `outage`'s block (module comment) and returns its served variable `s_k`.
    /// Start columns: the walks of the walk engine's verified optimum of the outage with
    /// every addition at its upper bound (so a target at most the best reachable value is
    /// feasible from the first solve). Cost: one walk-engine evaluation, O(arcs + sites +
    /// demands + start walks' lengths) to build.
    pub fn add_outage(&mut self, outage: &Outage) -> Result<usize> {
        let net = self.net;
        let expandable: Vec<bool> = self.add.iter().map(Option::is_some).collect();
        let view = Surviving::new(net, outage, Some(&expandable));
        let g = Graph::new(net, &view);
        let caps = g.caps(false);
        let full: Vec<f64> = self
            .add
            .iter()
            .map(|a| a.map_or(0.0, |j| self.base.upper[j].max(0.0)))
            .collect();
        let start = evaluate_walks(&net.with_added_processing(&full), outage, None)?;
        let base = &mut self.base;
        let (arc_cap, site_cap) = g.effective(&caps);
        let mut arc_row = vec![NO_ROW; net.arcs.len()];
        for &a in &g.usable {
            arc_row[a] = base.add_row(Vec::new(), Sense::Le, arc_cap[a]);
        }
        let mut site_row: Vec<Option<usize>> = vec![None; net.sites.len()];
        for &v in &g.procs {
            let coeffs = self.add[v].map(|j| vec![(j, -1.0)]).unwrap_or_default();
            site_row[v] = Some(base.add_row(coeffs, Sense::Le, site_cap[v]));
        }
        let mut dem_row = vec![NO_ROW; net.demands.len()];
        for (d, &b) in caps.iter().enumerate() {
            if b > 0.0 {
                dem_row[d] = base.add_row(Vec::new(), Sense::Le, b);
            }
        }
        let total: f64 = caps.iter().sum();
        let served = base.add_var(0.0, total, 0.0);
        base.magnitude[served] = total;
        let served_row = base.add_row(vec![(served, -1.0)], Sense::Ge, 0.0);
        let mut block = Block {
            g,
            caps,
            arc_row,
            site_row,
            dem_row,
            served_row,
            seen: HashSet::new(),
        };
        if let Some(s) = start.basis.required {
            for w in s.walks.iter().filter_map(|w| block.g.lift(w)) {
                if block.admits(&w) && block.seen.insert(w.clone()) {
                    block.column(base, &w);
                }
            }
        }
        self.blocks.push(block);
        Ok(served)
    }

    /// The optimum over every walk of the master with `rows` added and the objective
    /// `objective` (duplicates add up; maximised when `maximise`): column generation on a
    /// copy (module comment); the columns found are kept for later solves. Its solution's
    /// `x` covers the caller's and served variables (and the walks). An error when a
    /// master solve fails (infeasible rows, a backend failure). Cost per round: one
    /// interior-point solve of the whole master and one pricing pass per block (in
    /// parallel); at most [`MAX_ROUNDS`] rounds.
    pub fn solve(
        &mut self,
        rows: &[GoalRow],
        objective: &[(usize, f64)],
        maximise: bool,
    ) -> Result<LpSolution> {
        let mut work = self.base.clone();
        for (c, s, r) in rows {
            work.add_row(c.clone(), *s, *r);
        }
        work.objective.iter_mut().for_each(|c| *c = 0.0);
        for &(j, c) in objective {
            work.objective[j] += c;
        }
        work.maximise = maximise;
        let sg = if maximise { 1.0 } else { -1.0 };
        for _ in 0..MAX_ROUNDS {
            cancel::check()?;
            self.lp_solves += 1;
            let sol = lp::solve(&work)?;
            let fresh: Vec<Vec<Walk>> = self
                .blocks
                .par_iter()
                .map(|b| b.improving(&sol, sg))
                .collect();
            let mut added = 0;
            for (b, walks) in self.blocks.iter_mut().zip(fresh) {
                for w in walks {
                    if b.seen.insert(w.clone()) {
                        b.column(&mut work, &w);
                        b.column(&mut self.base, &w);
                        added += 1;
                    }
                }
            }
            if added == 0 {
                return Ok(sol);
            }
        }
        self.lp_solves += 1;
        lp::solve(&work)
    }
}

impl Block<'_> {
    /// Whether walk `w` (class arcs) has rows in this block.
    fn admits(&self, w: &Walk) -> bool {
        self.site_row[w.site].is_some() && self.dem_row[w.demand] != NO_ROW
    }

    /// Adds walk `w`'s column to `lp` (this block's rows); returns its variable.
    /// O(walk length).
    fn column(&self, lp: &mut Lp, w: &Walk) -> usize {
        let site = self.site_row[w.site].expect("a column's site has a row");
        let j = lp.add_var(0.0, f64::INFINITY, 0.0);
        lp.magnitude[j] = self.caps[w.demand];
        for &(a, m) in &w.arcs {
            lp.rows[self.arc_row[a]].coeffs.push((j, f64::from(m)));
        }
        lp.rows[site].coeffs.push((j, 1.0));
        lp.rows[self.dem_row[w.demand]].coeffs.push((j, 1.0));
        lp.rows[self.served_row].coeffs.push((j, 1.0));
        j
    }

    /// The walks of this block that improve the master at `sol`'s shadow prices (module
    /// comment; `sg` the objective's sign), one per demand at most. One pricing pass.
    fn improving(&self, sol: &LpSolution, sg: f64) -> Vec<Walk> {
        let sigma = (-sg * sol.duals[self.served_row]).max(0.0);
        if sigma <= 0.0 {
            return Vec::new();
        }
        let d = |r: usize| {
            if r == NO_ROW {
                0.0
            } else {
                (sg * sol.duals[r]).max(0.0) / sigma
            }
        };
        let y: Vec<f64> = self.arc_row.iter().map(|&r| d(r)).collect();
        let z: Vec<f64> = self.site_row.iter().map(|r| r.map_or(0.0, d)).collect();
        let u: Vec<f64> = self.dem_row.iter().map(|&r| d(r)).collect();
        price(&self.g, &self.caps, &y, &z, Some(&u))
            .walks
            .into_iter()
            .filter(|w| self.admits(w))
            .collect()
    }
}
