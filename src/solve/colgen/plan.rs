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
//! **Held demands.** A demand of block `k` whose baseline walks (the walk engine's
//! optimum of the network with nothing failed and nothing added) all survive the failure
//! is *held*: its walks stay at their baseline flows outside the LP, their load comes off
//! the block's arc and site right-hand sides and their flow is in the served row's (see
//! `hold`). Only the demands the failure touches are columns at first, so a block holds
//! far fewer walks and rows than the whole demand set. A held demand `d` comes back (its
//! walks become columns at their flows, the right-hand sides take their load back, so
//! the point does not move) when its share of the duality gap is positive: at the prices
//! divided by `σ_k`, `Σ_w f_w·price(w) + b_d·max(0, 1 − c_d) − Σ_w f_w` with `c_d` its
//! cheapest walk (the dual of the full block with `u_d = σ_k·max(0, 1 − c_d)` exceeds
//! the restricted master's value by `σ_k` times the sum of these shares); with `σ_k = 0`,
//! when one of its walks has a positive price. So when no walk is new and no demand comes
//! back, the duals of the restricted master with those `u_d` are feasible for the full
//! master with the same value: its optimum is the full master's, whatever the purchase.
//!
//! **Pricing.** With `d(r)` the shadow price of row `r` (d objective / d rhs) and
//! `sg = +1` for a maximisation, `−1` for a minimisation, a walk of block `k` improves
//! the master when its price `Σ mult·y_a + z_v + u_d` is below `σ_k`, where
//! `y = sg·d(arc row)`, `z = sg·d(site row)`, `u = sg·d(demand row)` (all ≥ 0) and
//! `σ_k = −sg·d(served row of k)`. Dividing by `σ_k` gives the walk engine's own pricing
//! (the shortest processing walk through the site's price, purchase option included:
//! expandable sites are processing sites of the pricing graph).
//!
//! **Solver.** The master is solved by the warm GUB simplex of [`crate::solve::gub`]
//! (exact up to rounding: a vertex; the demand rows are its set rows, outside its dense
//! inverse), kept across rounds and across the caller's lexicographic phases; past
//! [`COUPLING_ROWS`] other rows, or when the simplex fails, by the interior-point backend (note: its rows hold only to about 1e-7 of
//! the master's magnitude). See [`PlanMaster::solve`].
//!
//! **Stopping.** A round adds every improving walk not yet in its block; the loop stops
//! when none is new (the restricted master is then optimal up to the solver's duals) or
//! after [`MAX_ROUNDS`] rounds. A restricted master is a restriction of the full one, so
//! its plan is always feasible for every block; the caller re-verifies the plan on every
//! outage anyway.

use std::collections::{HashMap, HashSet};

use rayon::prelude::*;

use super::round::gap_shares;
use super::{
    Basis, Graph, MAX_ROUNDS, PRICE_TOL, Solved, Walk, evaluate_walks, pivot_budget, price,
};
use crate::error::{Error, Result};
use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::cancel;
use crate::solve::gub::{COUPLING_ROWS, Gub};
use crate::solve::lp::{self, Lp, LpSolution, Sense};
use crate::solve::surviving::Surviving;
use crate::tol::{LAZY_ROW_TOL, PLAN_FEASIBLE_TOL};

mod held;
use held::hold;

/// No row (an arc or demand without one); no simplex row or column yet.
const NO_ROW: usize = usize::MAX;

/// One row a caller adds for one solve: terms, sense, right-hand side.
pub type GoalRow = (Vec<(usize, f64)>, Sense, f64);

/// The walk master of a plan: the caller's variables and rows, one block per outage, the
/// walk columns found so far (kept across solves), and the warm simplex that solves it.
pub struct PlanMaster<'a> {
    net: &'a Network,
    base: Lp,
    add: Vec<Option<usize>>,
    blocks: Vec<Block<'a>>,
    /// Per row of `base`: whether it is *lazy*, a block's arc, site or demand row the
    /// simplex does not carry from the start (a demand row enters with its first walk
    /// column, an arc or site row only once the point violates it, and then stays).
    lazy: Vec<bool>,
    /// Per row of `base`: whether it is a block's demand row (a GUB set row of the
    /// simplex: every walk has coefficient 1 in its own demand's row and in no other).
    set_row: Vec<bool>,
    /// Per variable of `base`: its entries (row of `base`, coefficient) when it is a walk.
    walk_entries: Vec<Option<Vec<(usize, f64)>>>,
    /// The simplex's copy of the master, kept warm across rounds and phases; `None`
    /// before the first solve and after the simplex was given up.
    exact: Option<Exact>,
    /// Whether the simplex was given up (the master outgrew [`COUPLING_ROWS`] rows besides
    /// its demand rows, or the
    /// simplex failed): later solves go to the interior-point backend.
    exact_off: bool,
    /// The interior-point round's copy of `base` with the goal rows and objective, while
    /// such a round runs (walk columns enter it as they enter `base`).
    cold: Option<Lp>,
    /// Master LP solves so far.
    pub lp_solves: usize,
    /// Of them, solves by the interior-point backend (the fallback).
    pub interior_point_solves: usize,
    /// The optimum of the network's baseline (base traffic matrix) the start solves of
    /// [`PlanMaster::add_outage`] begin from; `None`: cold.
    parent: Option<&'a Basis>,
    /// Per traffic matrix: the walk engine's optimum of the baseline (nothing failed, no
    /// addition), whose walks the blocks hold for the demands a failure does not touch.
    baselines: HashMap<usize, Option<Solved>>,
    /// Held demands brought back into their blocks so far (module comment, **Held
    /// demands**).
    pub activated: usize,
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
    /// Per demand: whether its walks are columns of the block (*active*) or *held*.
    active: Vec<bool>,
    /// Per held demand: its baseline walks (class arcs) and flows, fixed outside the LP;
    /// the block's arc, site and served rows carry their load in the right-hand side.
    held: Vec<Vec<(Walk, f64)>>,
}

/// The master on the warm GUB simplex ([`Gub`]: `max c·x`, `≤` rows, the blocks' demand
/// rows as its set rows, kept out of its inverse): a `≥` row of `base` enters negated, a
/// minimisation with its objective negated. The caller's
/// variables, the served variables and their rows (budget, served rows, goal rows) are
/// created at once; a block's demand row when its first walk column enters it; a block's
/// arc or site row only when an optimum of the rows carried so far violates it (row
/// generation, `PlanMaster::add_violated_rows`): most arc rows never bind, and carrying
/// them all would put about 800 rows per outage into the dense inverse at 200 sites. A
/// row left out has dual 0, which prices walks as the full model would when the row does
/// not bind; once no carried optimum violates a left-out row, the point is feasible for
/// the full master and the duals are feasible and complementary for it, so it is optimal.
///
/// A row violated at the current point when it is added (a goal row; an arc or site row
/// found violated) gets an *artificial* column
/// (coefficient −1 in the negated row, started at the violation and bounded by it, so the
/// basis stays primal feasible and the row is never relaxed further);
/// before the next objective a first phase maximises `−Σ artificial` (with column
/// generation) and then holds the artificials with the row `Σ artificial ≤` its optimum,
/// which is 0 up to [`PLAN_FEASIBLE_TOL`] when the goal rows can be met.
struct Exact {
    sx: Gub,
    /// Per row of `base`: whether it is a demand row (a set row of `sx`).
    set_row: Vec<bool>,
    /// Per variable of `base`: its simplex column (`NO_ROW` for none yet).
    col: Vec<usize>,
    /// Per row of `base`, then per goal row: its simplex row (`NO_ROW` for none yet) and
    /// sign (+1 for `≤`, −1 for a negated `≥`).
    row: Vec<(usize, f64)>,
    /// The goal rows mirrored so far (in the order of the caller's `rows`).
    goals: Vec<GoalRow>,
    /// Artificial columns not yet held.
    artificial: Vec<usize>,
}

/// Why the simplex was given up on a master.
fn too_big() -> Error {
    Error::Solver(format!(
        "plan master past {COUPLING_ROWS} simplex rows besides its demand rows (the \
         interior-point backend takes it)"
    ))
}

impl Exact {
    /// Adds row `r` of `base` (entries on the columns that exist), an artificial column
    /// when the current point violates it. O(m · entries).
    fn add_base_row(&mut self, base: &Lp, r: usize) -> Result<()> {
        let row = &base.rows[r];
        let entries: Vec<(usize, f64)> = row
            .coeffs
            .iter()
            .filter(|&&(j, _)| self.col[j] != NO_ROW)
            .map(|&(j, a)| (self.col[j], a))
            .collect();
        self.row[r] = if self.set_row[r] && entries.is_empty() && row.sense == Sense::Le {
            // A demand row, created before any walk enters it.
            (self.sx.add_set_row(row.rhs), 1.0)
        } else {
            self.add_row(&entries, row.sense, row.rhs)?
        };
        Ok(())
    }

    /// Adds `entries sense rhs` (simplex columns); returns its simplex row and sign.
    fn add_row(
        &mut self,
        entries: &[(usize, f64)],
        sense: Sense,
        rhs: f64,
    ) -> Result<(usize, f64)> {
        if self.sx.coupling_rows() >= COUPLING_ROWS {
            return Err(too_big());
        }
        let sign = match sense {
            Sense::Le => 1.0,
            Sense::Ge => -1.0,
            Sense::Eq => {
                return Err(Error::Solver("plan master: an equality row".into()));
            }
        };
        let signed: Vec<(usize, f64)> = entries.iter().map(|&(c, a)| (c, sign * a)).collect();
        let i = self.sx.add_row_with(sign * rhs, &signed);
        let lhs: f64 = signed.iter().map(|&(c, a)| a * self.sx.value(c)).sum();
        let violation = lhs - sign * rhs;
        if violation > 0.0 {
            // Bounded by its start: it can only shrink, never relax the row further.
            let c = self
                .sx
                .add_col(0.0, 0.0, violation, violation, vec![(i, -1.0)]);
            self.artificial.push(c);
        }
        Ok((i, sign))
    }

    /// Adds the walk column `j` of `base` with `entries` (rows of `base`) at `value`,
    /// creating the demand row it enters; its entries in lazy rows the simplex does not
    /// carry yet are left out (they enter with the row). O(m · entries).
    fn add_walk(
        &mut self,
        base: &Lp,
        j: usize,
        entries: &[(usize, f64)],
        value: f64,
    ) -> Result<()> {
        let mut sx_entries = Vec::with_capacity(entries.len());
        for &(r, a) in entries {
            if self.row[r].0 == NO_ROW {
                if !self.set_row[r] {
                    // A lazy row not yet violated: it enters the simplex with this
                    // column's entry when it is (`PlanMaster::add_violated_rows`).
                    continue;
                }
                self.add_base_row(base, r)?;
            }
            let (i, sign) = self.row[r];
            sx_entries.push((i, sign * a));
        }
        self.col[j] = self.sx.add_col(0.0, 0.0, f64::INFINITY, value, sx_entries);
        Ok(())
    }

    /// The current point as a solution of `base` with `goals` rows: primal values per
    /// variable, duals in [`LpSolution`]'s convention (d objective / d rhs of the row as
    /// the caller wrote it; 0 for a row the simplex has not created), the objective.
    fn solution(&self, base: &Lp, objective: &[(usize, f64)], maximise: bool) -> LpSolution {
        let x: Vec<f64> = self
            .col
            .iter()
            .map(|&c| if c == NO_ROW { 0.0 } else { self.sx.value(c) })
            .collect();
        let sg = if maximise { 1.0 } else { -1.0 };
        let duals = self
            .row
            .iter()
            .map(|&(i, sign)| {
                if i == NO_ROW {
                    0.0
                } else {
                    sg * sign * self.sx.dual(i)
                }
            })
            .collect();
        let value = objective.iter().map(|&(j, c)| c * x[j]).sum();
        LpSolution {
            upper_duals: vec![0.0; base.num_vars()],
            x,
            duals,
            objective: value,
        }
    }
}

impl<'a> PlanMaster<'a> {
    /// A master over `base` (the caller's LP: the addition variables `add`, per site, with
    /// their bounds, and the caller's variables and fixed rows) with no outage yet. O(1).
    pub fn new(net: &'a Network, base: Lp, add: Vec<Option<usize>>) -> PlanMaster<'a> {
        let lazy = vec![false; base.rows.len()];
        let set_row = vec![false; base.rows.len()];
        let walk_entries = vec![None; base.num_vars()];
        PlanMaster {
            net,
            base,
            add,
            blocks: Vec::new(),
            lazy,
            set_row,
            walk_entries,
            exact: None,
            exact_off: false,
            cold: None,
            lp_solves: 0,
            interior_point_solves: 0,
            parent: None,
            baselines: HashMap::new(),
            activated: 0,
        }
    }

    /// Starts every later [`PlanMaster::add_outage`]'s solve from `parent`, the walk
    /// engine's optimum of the network's baseline (base traffic matrix): with additions
    /// the network only gains processing, so its flows stay feasible, and the start is
    /// the same certified optimum, found warm. O(1).
    pub fn start_from(&mut self, parent: Option<&'a Basis>) {
        self.parent = parent;
    }

    /// Variables of the master so far (the caller's, the served variables, the walks).
    pub fn num_vars(&self) -> usize {
        self.base.num_vars()
    }

    /// Adds `outage`'s block (module comment) and returns its served variable `s_k`.
    /// Demands the failure does not touch are *held* at their baseline walks
    /// (`hold`); the others are active. Start columns: the walks of active
    /// demands in the walk engine's verified optimum of the outage with every addition at
    /// its upper bound (so a target at most the best reachable value is feasible from the
    /// first solve once the demands it needs are active). The outage's traffic matrix
    /// decides its demands. Cost: one walk-engine evaluation (two for the first outage of
    /// a matrix), O(arcs + sites + demands + baseline and start walks' lengths) to build.
    pub fn add_outage(&mut self, outage: &Outage) -> Result<usize> {
        let net = self.net.view(outage.matrix);
        let expandable: Vec<bool> = self.add.iter().map(Option::is_some).collect();
        let view = Surviving::new(net, outage, Some(&expandable));
        let g = Graph::new(net, &view);
        let caps = g.caps(false);
        let full: Vec<f64> = self
            .add
            .iter()
            .map(|a| a.map_or(0.0, |j| self.base.upper[j].max(0.0)))
            .collect();
        let parent = self.parent.filter(|_| outage.matrix == 0);
        let start = evaluate_walks(&self.net.with_added_processing(&full), outage, parent)?;
        if !self.baselines.contains_key(&outage.matrix) {
            let solved = match parent {
                Some(p) => p.required.clone(),
                None => {
                    let baseline = Outage {
                        sites: Vec::new(),
                        links: Vec::new(),
                        matrix: outage.matrix,
                    };
                    evaluate_walks(self.net, &baseline, None)?.basis.required
                }
            };
            self.baselines.insert(outage.matrix, solved);
        }
        let (arc_cap, site_cap) = g.effective(&caps);
        let (active, held, arc_load, site_load) = hold(
            &g,
            &caps,
            (&arc_cap, &site_cap),
            self.baselines[&outage.matrix].as_ref(),
        );
        // The simplex copy is rebuilt with the new block at the next solve.
        self.exact = None;
        let base = &mut self.base;
        let mut arc_row = vec![NO_ROW; net.arcs.len()];
        for &a in &g.usable {
            arc_row[a] = base.add_row(Vec::new(), Sense::Le, (arc_cap[a] - arc_load[a]).max(0.0));
        }
        let mut site_row: Vec<Option<usize>> = vec![None; net.sites.len()];
        for &v in &g.procs {
            let coeffs = self.add[v].map(|j| vec![(j, -1.0)]).unwrap_or_default();
            let rhs = (site_cap[v] - site_load[v]).max(0.0);
            site_row[v] = Some(base.add_row(coeffs, Sense::Le, rhs));
        }
        let mut dem_row = vec![NO_ROW; net.demands.len()];
        for (d, &b) in caps.iter().enumerate() {
            if b > 0.0 {
                dem_row[d] = base.add_row(Vec::new(), Sense::Le, b);
            }
        }
        self.lazy.resize(base.rows.len(), true);
        self.set_row.resize(base.rows.len(), false);
        for &r in dem_row.iter().filter(|&&r| r != NO_ROW) {
            self.set_row[r] = true;
        }
        let total: f64 = caps.iter().sum();
        let held_total: f64 = held.iter().flatten().map(|(_, f)| f).sum();
        let served = base.add_var(0.0, total, 0.0);
        base.magnitude[served] = total;
        // Σ active walks + held flow − s_k ≥ 0.
        let served_row = base.add_row(vec![(served, -1.0)], Sense::Ge, -held_total);
        self.lazy.push(false);
        self.set_row.push(false);
        self.walk_entries.push(None);
        let mut block = Block {
            g,
            caps,
            arc_row,
            site_row,
            dem_row,
            served_row,
            seen: HashSet::new(),
            active,
            held,
        };
        if let Some(s) = start.basis.required {
            for w in s.walks.iter().filter_map(|w| block.g.lift(w)) {
                if block.active[w.demand] && block.admits(&w) && block.seen.insert(w.clone()) {
                    let (j, entries) = block.column(base, &w);
                    debug_assert_eq!(j, self.walk_entries.len());
                    self.walk_entries.push(Some(entries));
                }
            }
        }
        self.blocks.push(block);
        Ok(served)
    }

    /// The optimum over every walk of the master with `rows` added and the objective
    /// `objective` (duplicates add up; maximised when `maximise`): column generation
    /// (module comment); the columns found are kept for later solves. Its solution's `x`
    /// covers the caller's and served variables (and the walks). An error when a master
    /// solve fails (infeasible rows, a backend failure).
    ///
    /// The rounds are solved by the warm bounded simplex (`Exact`), which returns a
    /// vertex meeting every row to rounding, and is kept across rounds and across calls
    /// whose `rows` extend the previous call's (the lexicographic phases: each re-optimises
    /// from the last phase's vertex). Above [`COUPLING_ROWS`] rows besides the demand rows
    /// (its dense inverse would not fit), or when the simplex fails (pivot limit, singular basis), the master
    /// goes to the interior-point backend for this and every later call: a cold solve of
    /// the whole master per round, whose rows hold only to about 1e-7 of its magnitude.
    /// Cost per round: one warm re-optimisation (or one interior-point solve) and one
    /// pricing pass per block (in parallel); at most [`MAX_ROUNDS`] rounds.
    pub fn solve(
        &mut self,
        rows: &[GoalRow],
        objective: &[(usize, f64)],
        maximise: bool,
    ) -> Result<LpSolution> {
        if !self.exact_off && self.exact.is_none() && self.exact_rows() + rows.len() > COUPLING_ROWS
        {
            // The simplex copy could not hold the master: skip building it.
            self.exact_off = true;
        }
        if !self.exact_off {
            match self.solve_exact(rows, objective, maximise) {
                Ok(sol) => return Ok(sol),
                Err(e @ Error::Interrupted(_)) => return Err(e),
                Err(_) => {
                    self.exact = None;
                    self.exact_off = true;
                }
            }
        }
        self.solve_interior(rows, objective, maximise)
    }

    /// Rows besides demand rows the simplex copy of `base` would start with: the eager
    /// rows and the lazy rows found violated before. O(rows).
    fn exact_rows(&self) -> usize {
        self.lazy
            .iter()
            .zip(&self.set_row)
            .filter(|&(&lazy, &set)| !lazy && !set)
            .count()
    }

    /// Adds to the simplex every lazy row (a block's arc or site row) it does not carry
    /// and the current point violates by more than [`LAZY_ROW_TOL`] (relative to
    /// `max(1, rhs)`), each with its artificial column, and makes the row eager for later
    /// rebuilds. Returns how many rows were added. O(nonzeros of the absent rows).
    fn add_violated_rows(&mut self) -> Result<usize> {
        let ex = self.exact.as_mut().expect("built by the caller");
        let mut added = 0;
        for r in 0..self.base.rows.len() {
            if !self.lazy[r] || self.set_row[r] || ex.row[r].0 != NO_ROW {
                continue;
            }
            let row = &self.base.rows[r];
            let lhs: f64 = row
                .coeffs
                .iter()
                .filter(|&&(j, _)| ex.col[j] != NO_ROW)
                .map(|&(j, a)| a * ex.sx.value(ex.col[j]))
                .sum();
            if lhs > row.rhs + LAZY_ROW_TOL * row.rhs.abs().max(1.0) {
                ex.add_base_row(&self.base, r)?;
                self.lazy[r] = false;
                added += 1;
            }
        }
        Ok(added)
    }

    /// Builds the simplex copy of `base` (module comment of [`Exact`]): the caller's and
    /// served variables and the eager rows, then every walk column found so far.
    fn build_exact(&self) -> Result<Exact> {
        let base = &self.base;
        let mut ex = Exact {
            sx: Gub::new(),
            set_row: self.set_row.clone(),
            col: vec![NO_ROW; base.num_vars()],
            row: vec![(NO_ROW, 1.0); base.rows.len()],
            goals: Vec::new(),
            artificial: Vec::new(),
        };
        for j in 0..base.num_vars() {
            if self.walk_entries[j].is_none() {
                let (l, u) = (base.lower[j], base.upper[j]);
                let start = 0.0f64.clamp(l, u);
                ex.col[j] = ex.sx.add_col(0.0, l, u, start, Vec::new());
            }
        }
        for r in 0..base.rows.len() {
            if !self.lazy[r] {
                ex.add_base_row(base, r)?;
            }
        }
        for (j, e) in self.walk_entries.iter().enumerate() {
            if let Some(entries) = e {
                ex.add_walk(base, j, entries, 0.0)?;
            }
        }
        Ok(ex)
    }

    /// [`PlanMaster::solve`] on the warm simplex; an error (other than an interrupt)
    /// sends the caller to the interior-point backend.
    fn solve_exact(
        &mut self,
        rows: &[GoalRow],
        objective: &[(usize, f64)],
        maximise: bool,
    ) -> Result<LpSolution> {
        let reuse = self.exact.as_ref().is_some_and(|ex| {
            ex.goals.len() <= rows.len() && ex.goals[..] == rows[..ex.goals.len()]
        });
        if !reuse {
            self.exact = Some(self.build_exact()?);
        }
        let ex = self.exact.as_mut().expect("built above");
        for g in rows[ex.goals.len()..].iter() {
            let entries: Vec<(usize, f64)> = g.0.iter().map(|&(j, a)| (ex.col[j], a)).collect();
            let r = ex.add_row(&entries, g.1, g.2)?;
            ex.row.push(r);
            ex.goals.push(g.clone());
        }
        loop {
            self.first_phase()?;
            let ex = self.exact.as_mut().expect("built above");
            let sg = if maximise { 1.0 } else { -1.0 };
            let mut obj = vec![0.0; ex.sx.cols()];
            for &(j, c) in objective {
                obj[ex.col[j]] += sg * c;
            }
            let sol = self.exact_rounds(&obj, objective, maximise)?;
            // Optimal over every walk with the rows it carries; when the point also meets
            // every lazy row it is optimal for the whole master (those rows' duals are 0).
            if self.add_violated_rows()? == 0 {
                return Ok(sol);
            }
        }
    }

    /// The first phase: when rows violated at the point they were added hold artificial
    /// columns, drives their sum to zero by column generation (objective `−Σ artificial`)
    /// and then holds them with the row `Σ artificial ≤` the sum left; an error when more
    /// than [`PLAN_FEASIBLE_TOL`] of the starting violation is left (the rows cannot be
    /// met on the walk columns). O(rounds · (re-optimisation + pricing)).
    fn first_phase(&mut self) -> Result<()> {
        let ex = self.exact.as_mut().expect("built by the caller");
        if ex.artificial.is_empty() {
            return Ok(());
        }
        let scale: f64 = ex
            .artificial
            .iter()
            .map(|&c| ex.sx.value(c))
            .sum::<f64>()
            .max(1.0);
        let mut obj = vec![0.0; ex.sx.cols()];
        for &c in &ex.artificial {
            obj[c] = -1.0;
        }
        self.exact_rounds(&obj, &[], true)?;
        let ex = self.exact.as_mut().expect("built by the caller");
        let left: f64 = ex.artificial.iter().map(|&c| ex.sx.value(c).max(0.0)).sum();
        if left > PLAN_FEASIBLE_TOL * scale {
            return Err(Error::Solver(format!(
                "plan master: rows violated when added (goal or generated) still short by \
                 {left} on the walk columns"
            )));
        }
        let entries: Vec<(usize, f64)> = ex.artificial.iter().map(|&c| (c, 1.0)).collect();
        ex.artificial.clear();
        ex.add_row(&entries, Sense::Le, left)?;
        Ok(())
    }

    /// Column generation on the simplex with the simplex objective `obj` (per simplex
    /// column, maximised; new walks cost 0); the solution is reported for the caller's
    /// `objective` and sense. O(rounds · (re-optimisation + pricing)).
    fn exact_rounds(
        &mut self,
        obj: &[f64],
        objective: &[(usize, f64)],
        maximise: bool,
    ) -> Result<LpSolution> {
        let sg = if maximise { 1.0 } else { -1.0 };
        self.exact
            .as_mut()
            .expect("built by the caller")
            .sx
            .set_objective(obj);
        self.rounds(sg, |pm| {
            let ex = pm.exact.as_mut().expect("built by the caller");
            if ex.sx.coupling_rows() > COUPLING_ROWS {
                return Err(too_big());
            }
            let limit = pivot_budget(ex.sx.rows());
            ex.sx.solve(limit)?;
            Ok(ex.solution(&pm.base, objective, maximise))
        })
    }

    /// Rounds of column generation: `solve_once` solves the current restricted master
    /// (warm simplex or cold interior point), then every block is priced and its improving
    /// walks added ([`PlanMaster::add_improving`]); ends when no walk is new or after
    /// [`MAX_ROUNDS`] priced rounds, with the last solution.
    fn rounds(
        &mut self,
        sg: f64,
        mut solve_once: impl FnMut(&mut Self) -> Result<LpSolution>,
    ) -> Result<LpSolution> {
        let mut round = 0;
        loop {
            cancel::check()?;
            let sol = solve_once(self)?;
            self.lp_solves += 1;
            round += 1;
            if round > MAX_ROUNDS || self.add_improving(&sol, sg)? == 0 {
                return Ok(sol);
            }
        }
    }

    /// Prices every block at `sol`'s shadow prices (in parallel), brings back the held
    /// demands whose share of the gap is positive ([`PlanMaster::activate`]) and adds each
    /// improving walk not yet in its block: to `base`, to the simplex copy when there is
    /// one, and to the interior-point copy when there is one. Returns how many walks and
    /// demands were added. O(blocks · pricing + added · (m · entries)).
    fn add_improving(&mut self, sol: &LpSolution, sg: f64) -> Result<usize> {
        let fresh: Vec<(Vec<Walk>, Vec<usize>)> = self
            .blocks
            .par_iter()
            .map(|b| b.improving(sol, sg))
            .collect();
        let mut added = 0;
        for (k, (walks, wake)) in fresh.into_iter().enumerate() {
            for d in wake {
                self.activate(k, d)?;
                added += 1;
            }
            for w in walks {
                if !self.blocks[k].seen.insert(w.clone()) {
                    continue;
                }
                self.add_column(k, &w, 0.0)?;
                added += 1;
            }
        }
        Ok(added)
    }

    /// Adds walk `w`'s column to block `k` at `value` (in `base`, the simplex copy and the
    /// interior-point copy, whichever exist). O(m · walk length).
    fn add_column(&mut self, k: usize, w: &Walk, value: f64) -> Result<()> {
        let b = &self.blocks[k];
        if let Some(cold) = self.cold.as_mut() {
            b.column(cold, w);
        }
        let (j, entries) = b.column(&mut self.base, w);
        if let Some(ex) = self.exact.as_mut() {
            ex.col.push(NO_ROW);
            ex.add_walk(&self.base, j, &entries, value)?;
        }
        self.walk_entries.push(Some(entries));
        Ok(())
    }

    /// Makes the held demand `d` of block `k` active: each of its held walks gives its
    /// load back to the rows it crosses (their right-hand sides rise by it) and enters as
    /// a column at its held flow, so the current point, its basis and every basic value
    /// stay as they were (the simplex's `shift_rhs` then `add_col` at that value).
    /// O(held walks · m · walk length).
    fn activate(&mut self, k: usize, d: usize) -> Result<()> {
        let b = &mut self.blocks[k];
        b.active[d] = true;
        let held = std::mem::take(&mut b.held[d]);
        self.activated += 1;
        for (w, f) in held {
            let b = &mut self.blocks[k];
            b.seen.insert(w.clone());
            let site = b.site_row[w.site].expect("a held walk's site has a row");
            let mut loads: Vec<(usize, f64)> = w
                .arcs
                .iter()
                .map(|&(a, m)| (b.arc_row[a], f64::from(m) * f))
                .collect();
            loads.push((site, f));
            loads.push((b.served_row, f));
            // A lazy row the simplex does not carry takes the shift in `base` only: the
            // column at `f` takes the load back, so the row is not violated when it is
            // created later. The demand row exists before any basic value moves.
            if let Some(ex) = self.exact.as_mut()
                && ex.row[b.dem_row[d]].0 == NO_ROW
            {
                ex.add_base_row(&self.base, b.dem_row[d])?;
            }
            for (r, delta) in loads {
                self.base.rows[r].rhs += delta;
                if let Some(cold) = self.cold.as_mut() {
                    cold.rows[r].rhs += delta;
                }
                if let Some(ex) = self.exact.as_mut()
                    && ex.row[r].0 != NO_ROW
                {
                    ex.sx.shift_rhs(ex.row[r].0, ex.row[r].1 * delta);
                }
            }
            self.add_column(k, &w, f)?;
        }
        Ok(())
    }

    /// [`PlanMaster::solve`] on the interior-point backend: column generation on a copy
    /// of `base` with `rows`, one cold solve of the whole master per round.
    fn solve_interior(
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
        self.cold = Some(work);
        let sol = self.rounds(sg, |pm| {
            pm.interior_point_solves += 1;
            lp::solve(pm.cold.as_ref().expect("set above"))
        });
        self.cold = None;
        sol
    }
}

impl Block<'_> {
    /// Whether walk `w` (class arcs) has rows in this block.
    fn admits(&self, w: &Walk) -> bool {
        self.site_row[w.site].is_some() && self.dem_row[w.demand] != NO_ROW
    }

    /// Adds walk `w`'s column to `lp` (this block's rows); returns its variable and its
    /// entries (row, coefficient). O(walk length).
    fn column(&self, lp: &mut Lp, w: &Walk) -> (usize, Vec<(usize, f64)>) {
        let site = self.site_row[w.site].expect("a column's site has a row");
        let j = lp.add_var(0.0, f64::INFINITY, 0.0);
        lp.magnitude[j] = self.caps[w.demand];
        let mut entries: Vec<(usize, f64)> = w
            .arcs
            .iter()
            .map(|&(a, m)| (self.arc_row[a], f64::from(m)))
            .collect();
        entries.push((site, 1.0));
        entries.push((self.dem_row[w.demand], 1.0));
        entries.push((self.served_row, 1.0));
        for &(r, a) in &entries {
            lp.rows[r].coeffs.push((j, a));
        }
        (j, entries)
    }

    /// The walks of this block that improve the master at `sol`'s shadow prices (module
    /// comment; `sg` the objective's sign), one per active demand at most, and the held
    /// demands to bring back: those whose share of the gap ([`gap_shares`]) is positive at
    /// the prices divided by `σ_k`, or, when `σ_k = 0`, whose held walks cross a row with
    /// a positive price (freeing their load would gain). One pricing pass.
    fn improving(&self, sol: &LpSolution, sg: f64) -> (Vec<Walk>, Vec<usize>) {
        let raw = |r: usize| {
            if r == NO_ROW {
                0.0
            } else {
                (sg * sol.duals[r]).max(0.0)
            }
        };
        let y: Vec<f64> = self.arc_row.iter().map(|&r| raw(r)).collect();
        let z: Vec<f64> = self.site_row.iter().map(|r| r.map_or(0.0, raw)).collect();
        let walk_price = |w: &Walk, y: &[f64], z: &[f64]| {
            w.arcs
                .iter()
                .map(|&(a, m)| f64::from(m) * y[a])
                .sum::<f64>()
                + z[w.site]
        };
        let sigma = (-sg * sol.duals[self.served_row]).max(0.0);
        if sigma <= 0.0 {
            let wake = (0..self.held.len())
                .filter(|&d| {
                    self.held[d]
                        .iter()
                        .any(|(w, _)| walk_price(w, &y, &z) > PRICE_TOL)
                })
                .collect();
            return (Vec::new(), wake);
        }
        let y: Vec<f64> = y.iter().map(|p| p / sigma).collect();
        let z: Vec<f64> = z.iter().map(|p| p / sigma).collect();
        let u: Vec<f64> = self
            .dem_row
            .iter()
            .enumerate()
            .map(|(d, &r)| {
                if self.active[d] {
                    raw(r) / sigma
                } else {
                    f64::INFINITY
                }
            })
            .collect();
        let p = price(&self.g, &self.caps, &y, &z, Some(&u));
        let wake = gap_shares(
            |d| (!self.active[d] && self.caps[d] > 0.0).then(|| self.caps[d]),
            &self.held,
            |w| walk_price(w, &y, &z),
            &p.cost,
        );
        let walks = p.walks.into_iter().filter(|w| self.admits(w)).collect();
        (walks, wake.into_iter().map(|(_, d)| d).collect())
    }
}
