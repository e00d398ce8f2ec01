//! A small sparse LP representation and the one place that talks to the LP backends.
//!
//! Models are written against [`Lp`] (variables with bounds, rows with a sense). A
//! [`Backend`] solves one and returns primal values, the shadow price of every row and of
//! every finite upper bound, and the objective. Two backends exist, both pure Rust through
//! good_lp: [`Clarabel`] (interior point; the default, at two tolerance levels) and
//! [`Simplex`] (microlp, a simplex method returning a vertex; its shadow prices come from
//! solving the explicit dual LP, a second formulation). Nothing outside this file names
//! good_lp.
//!
//! Every model is scaled before it reaches a backend ([`Scaling`]): rows and columns by
//! powers of two (exact in floating point), so that coefficients, right-hand sides and
//! bounds sit near 1 whatever the traffic unit. Results are mapped back to the model's own
//! units; shadow prices are unchanged by the scaling.

use good_lp::{
    Expression, ProblemVariables, Solution, SolverModel, Variable, clarabel, microlp, variable,
};

use crate::error::{Error, Result};

/// The sense of a row: `Σ a·x (sense) rhs`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sense {
    Le,
    Eq,
    Ge,
}

#[derive(Debug, Clone)]
pub struct Row {
    pub coeffs: Vec<(usize, f64)>,
    pub sense: Sense,
    pub rhs: f64,
}

/// A linear program `max or min c·x` over rows and variable bounds.
#[derive(Debug, Clone, Default)]
pub struct Lp {
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    pub objective: Vec<f64>,
    pub maximise: bool,
    pub rows: Vec<Row>,
    /// Per variable: the magnitude of the values it may take in an optimum (0 when
    /// unknown), a hint for [`Scaling::of`]. The flow model sets each variable's to the
    /// demand of its source's block.
    pub magnitude: Vec<f64>,
}

/// An optimal solution: primal values, one shadow price per row (d objective / d rhs,
/// so `>= 0` for a binding `<=` row of a maximisation), and the objective value.
#[derive(Debug, Clone)]
pub struct LpSolution {
    pub x: Vec<f64>,
    pub duals: Vec<f64>,
    /// Per variable: shadow price of its finite upper bound (0 when unbounded).
    pub upper_duals: Vec<f64>,
    pub objective: f64,
}

impl Lp {
    pub fn new(maximise: bool) -> Lp {
        Lp {
            maximise,
            ..Lp::default()
        }
    }

    /// Adds a variable with bounds `lower..=upper` (either may be infinite) and objective
    /// coefficient `obj`; returns its index.
    pub fn add_var(&mut self, lower: f64, upper: f64, obj: f64) -> usize {
        self.lower.push(lower);
        self.upper.push(upper);
        self.objective.push(obj);
        self.magnitude.push(0.0);
        self.lower.len() - 1
    }

    /// Adds a row; returns its index (the index of its dual in [`LpSolution::duals`]).
    pub fn add_row(&mut self, coeffs: Vec<(usize, f64)>, sense: Sense, rhs: f64) -> usize {
        self.rows.push(Row { coeffs, sense, rhs });
        self.rows.len() - 1
    }

    pub fn num_vars(&self) -> usize {
        self.lower.len()
    }

    /// The dual objective of a solution: Σ rhs · shadow price over rows and finite upper
    /// bounds. For an optimal primal–dual pair it equals the primal objective (strong
    /// duality); all lower bounds are assumed 0, as in every model of this crate.
    pub fn dual_objective(&self, sol: &LpSolution) -> f64 {
        let rows: f64 = self
            .rows
            .iter()
            .zip(&sol.duals)
            .map(|(r, y)| r.rhs * y)
            .sum();
        let bounds: f64 = self
            .upper
            .iter()
            .zip(&sol.upper_duals)
            .filter(|(u, _)| u.is_finite())
            .map(|(u, y)| u * y)
            .sum();
        rows + bounds
    }

    /// The largest violation of any row or bound by `x`, each scaled by `max(1, |rhs|)`.
    /// An independent feasibility check of a backend's answer; O(nonzeros).
    pub fn max_violation(&self, x: &[f64]) -> f64 {
        let mut worst: f64 = 0.0;
        for (i, &v) in x.iter().enumerate() {
            worst = worst.max((self.lower[i] - v) / self.lower[i].abs().max(1.0));
            if self.upper[i].is_finite() {
                worst = worst.max((v - self.upper[i]) / self.upper[i].abs().max(1.0));
            }
        }
        for r in &self.rows {
            let lhs: f64 = r.coeffs.iter().map(|&(j, a)| a * x[j]).sum();
            let scale = r.rhs.abs().max(1.0);
            let v = match r.sense {
                Sense::Le => lhs - r.rhs,
                Sense::Ge => r.rhs - lhs,
                Sense::Eq => (lhs - r.rhs).abs(),
            };
            worst = worst.max(v / scale);
        }
        worst
    }
}

fn expression(coeffs: &[(usize, f64)], vars: &[Variable]) -> Expression {
    let mut e = Expression::with_capacity(coeffs.len());
    for &(j, a) in coeffs {
        e.add_mul(a, vars[j]);
    }
    e
}

/// A solver for [`Lp`] models. Implementations must return, for an optimal solution, the
/// primal values, one shadow price per row and per variable upper bound (the derivative of
/// the optimum with respect to that right-hand side), and the objective.
pub trait Backend: Sync {
    /// A short name for reports (`interior-point`, `simplex`).
    fn name(&self) -> &'static str;
    /// Solves `lp` cold. (Warm starts live a level up: the walk engine's masters keep
    /// their simplex basis, and an [`crate::solve::evaluator::Evaluator`] takes a parent's
    /// optimum.)
    fn solve(&self, lp: &Lp) -> Result<LpSolution>;
}

/// clarabel's interior-point method with feasibility and gap tolerances `tol` (relative).
#[derive(Debug, Clone, Copy)]
pub struct Clarabel {
    pub tol: f64,
    pub max_iter: u32,
}

/// The default interior-point settings.
pub const CLARABEL: Clarabel = Clarabel {
    tol: crate::tol::CLARABEL_TOL,
    max_iter: 400,
};

/// Tighter interior-point settings, tried when a default solve fails verification.
pub const CLARABEL_TIGHT: Clarabel = Clarabel {
    tol: crate::tol::CLARABEL_TIGHT_TOL,
    max_iter: 1000,
};

/// microlp's simplex method (a vertex solution); shadow prices from the explicit dual LP.
#[derive(Debug, Clone, Copy)]
pub struct Simplex;

/// Solves `lp` with the default backend ([`CLARABEL`]).
///
/// Every model built by this crate is feasible and bounded; any other status is returned
/// as [`Error::Solver`].
pub fn solve(lp: &Lp) -> Result<LpSolution> {
    CLARABEL.solve(lp)
}

impl Backend for Clarabel {
    fn name(&self) -> &'static str {
        "interior-point"
    }

    fn solve(&self, lp: &Lp) -> Result<LpSolution> {
        scaled(lp, |s| solve_clarabel(s, *self))
    }
}

impl Backend for Simplex {
    fn name(&self) -> &'static str {
        "simplex"
    }

    fn solve(&self, lp: &Lp) -> Result<LpSolution> {
        scaled(lp, solve_simplex_scaled)
    }
}

/// Solves `lp` with `solve` on its [`Scaling`] and maps the answer back to `lp`'s units
/// (what every backend does around its own solve). O(nonzeros) besides the solve.
pub fn scaled(lp: &Lp, solve: impl FnOnce(&Lp) -> Result<LpSolution>) -> Result<LpSolution> {
    let scaling = Scaling::of(lp);
    let sol = solve(&scaling.apply(lp))?;
    Ok(scaling.unscale(lp, sol))
}

/// microlp's simplex on an already scaled `scaled`: the primal, then the explicit dual LP
/// for the row and bound prices. O(two simplex solves).
fn solve_simplex_scaled(scaled: &Lp) -> Result<LpSolution> {
    let primal = solve_microlp(scaled)?;
    let (dual, map) = dual_of(scaled)?;
    let dsol = solve_microlp(&dual)?;
    let mut duals = vec![0.0; scaled.rows.len()];
    let mut upper_duals = vec![0.0; scaled.num_vars()];
    let sign = if scaled.maximise { 1.0 } else { -1.0 };
    for (i, v) in map.rows.iter().enumerate() {
        duals[i] = sign * dsol.x[*v];
    }
    for (j, v) in map.uppers.iter().enumerate() {
        if let Some(v) = v {
            upper_duals[j] = sign * dsol.x[*v];
        }
    }
    Ok(LpSolution {
        objective: primal.objective,
        x: primal.x,
        duals,
        upper_duals,
    })
}

/// Row and column scale factors (powers of two): the backend sees `x = S·x'`, rows
/// multiplied by `R`, and the objective by `σ`. Then coefficients become `r_i·a_ij·s_j`,
/// right-hand sides `r_i·b_i`, bounds `u_j / s_j`, objective coefficients `σ·c_j·s_j`;
/// a solution maps back by `x = S·x'`, row prices `y = R·y' / σ`, bound prices
/// `w = w' / (s_j·σ)`. Exact: powers of two change no mantissa.
#[derive(Debug, Clone)]
pub struct Scaling {
    pub row: Vec<f64>,
    pub col: Vec<f64>,
    pub objective: f64,
}

/// The nearest power of two to a positive finite `x` (1 otherwise).
fn pow2(x: f64) -> f64 {
    if x.is_finite() && x > 0.0 {
        2f64.powi(x.log2().round().clamp(-1000.0, 1000.0) as i32)
    } else {
        1.0
    }
}

impl Scaling {
    /// Column factors from the variables' magnitude hints ([`Lp::magnitude`]; 1 without
    /// one), then each row scaled so that its largest coefficient is about 1, then one
    /// common factor so that the largest right-hand side or bound is about 1 (columns
    /// multiplied and rows divided by it). In the flow model this expresses each source's
    /// flows in units of its own demand, so a source of 1e-6 units and one of 1e15 units
    /// are each solved to the backend's relative accuracy within their own rows.
    /// O(nonzeros).
    pub fn of(lp: &Lp) -> Scaling {
        let nv = lp.num_vars();
        let mut col: Vec<f64> = (0..nv)
            .map(|j| {
                let m = lp.magnitude.get(j).copied().unwrap_or(0.0);
                if m > 0.0 { pow2(m) } else { 1.0 }
            })
            .collect();
        let mut row: Vec<f64> = lp
            .rows
            .iter()
            .map(|r| {
                let m = r
                    .coeffs
                    .iter()
                    .map(|&(j, a)| (a * col[j]).abs())
                    .fold(0.0, f64::max);
                if m > 0.0 { pow2(1.0 / m) } else { 1.0 }
            })
            .collect();
        let size = lp
            .rows
            .iter()
            .zip(&row)
            .map(|(r, f)| (r.rhs * f).abs())
            .chain(
                lp.upper
                    .iter()
                    .chain(&lp.lower)
                    .enumerate()
                    .map(|(k, b)| (b / col[k % nv.max(1)]).abs()),
            )
            .filter(|b| b.is_finite())
            .fold(0.0, f64::max);
        let common = if size > 0.0 { pow2(size) } else { 1.0 };
        for c in &mut col {
            *c *= common;
        }
        for r in &mut row {
            *r /= common;
        }
        let cmax = lp
            .objective
            .iter()
            .zip(&col)
            .map(|(c, s)| (c * s).abs())
            .fold(0.0, f64::max);
        Scaling {
            row,
            col,
            objective: if cmax > 0.0 { pow2(1.0 / cmax) } else { 1.0 },
        }
    }

    /// The scaled model the backend sees.
    pub fn apply(&self, lp: &Lp) -> Lp {
        let mut out = lp.clone();
        for (i, r) in out.rows.iter_mut().enumerate() {
            for (j, a) in r.coeffs.iter_mut() {
                *a *= self.row[i] * self.col[*j];
            }
            r.rhs *= self.row[i];
        }
        for j in 0..out.num_vars() {
            out.upper[j] /= self.col[j];
            out.lower[j] /= self.col[j];
            out.objective[j] *= self.col[j] * self.objective;
        }
        out
    }

    /// A solution of the scaled model, in the units of `lp`; the objective is recomputed
    /// from `lp`'s own coefficients.
    pub fn unscale(&self, lp: &Lp, mut sol: LpSolution) -> LpSolution {
        for (x, s) in sol.x.iter_mut().zip(&self.col) {
            *x *= s;
        }
        for (y, r) in sol.duals.iter_mut().zip(&self.row) {
            *y *= r / self.objective;
        }
        for (w, s) in sol.upper_duals.iter_mut().zip(&self.col) {
            *w /= s * self.objective;
        }
        sol.objective = lp.objective.iter().zip(&sol.x).map(|(c, v)| c * v).sum();
        sol
    }
}

/// Where the dual LP keeps the price of each primal row and upper bound.
struct DualMap {
    rows: Vec<usize>,
    uppers: Vec<Option<usize>>,
}

/// The explicit dual of `lp`, as a minimisation whose variables are the shadow prices of
/// a maximisation: for `max c·x, A x (≤,=,≥) b, l ≤ x ≤ u` (l finite) it is
/// `min Σ (b_i − A_i l)·y_i + Σ (u_j − l_j)·w_j + c·l` over `A^T y + w ≥ c`, with `y_i ≥ 0`
/// for `≤` rows, free for `=` rows, `≤ 0` for `≥` rows, `w ≥ 0`. A minimisation is dualised
/// as `max −c·x`. Free variables (infinite lower bound) are not supported.
fn dual_of(lp: &Lp) -> Result<(Lp, DualMap)> {
    let sign = if lp.maximise { 1.0 } else { -1.0 };
    let nv = lp.num_vars();
    if lp.lower.iter().any(|l| !l.is_finite()) {
        return Err(Error::Solver(
            "simplex dual: free variables are not supported".into(),
        ));
    }
    let mut d = Lp::new(false);
    let mut cols: Vec<Vec<(usize, f64)>> = vec![Vec::new(); nv];
    let mut rows = Vec::with_capacity(lp.rows.len());
    for r in &lp.rows {
        let shift: f64 = r.coeffs.iter().map(|&(j, a)| a * lp.lower[j]).sum();
        let (lo, hi) = match r.sense {
            Sense::Le => (0.0, f64::INFINITY),
            Sense::Eq => (f64::NEG_INFINITY, f64::INFINITY),
            Sense::Ge => (f64::NEG_INFINITY, 0.0),
        };
        let y = d.add_var(lo, hi, r.rhs - shift);
        for &(j, a) in &r.coeffs {
            cols[j].push((y, a));
        }
        rows.push(y);
    }
    let mut uppers = vec![None; nv];
    for j in 0..nv {
        if lp.upper[j].is_finite() {
            let w = d.add_var(0.0, f64::INFINITY, lp.upper[j] - lp.lower[j]);
            cols[j].push((w, 1.0));
            uppers[j] = Some(w);
        }
    }
    for (j, coeffs) in cols.into_iter().enumerate() {
        d.add_row(coeffs, Sense::Ge, sign * lp.objective[j]);
    }
    Ok((d, DualMap { rows, uppers }))
}

/// Builds the good_lp variables and objective of `lp`.
fn variables(lp: &Lp) -> (ProblemVariables, Vec<Variable>) {
    let mut pv = ProblemVariables::new();
    let vars: Vec<Variable> = (0..lp.num_vars())
        .map(|i| {
            let mut def = variable();
            if lp.lower[i].is_finite() {
                def = def.min(lp.lower[i]);
            }
            pv.add(def)
        })
        .collect();
    (pv, vars)
}

fn objective_of(lp: &Lp, vars: &[Variable]) -> Expression {
    let objective: Vec<(usize, f64)> = lp
        .objective
        .iter()
        .enumerate()
        .filter(|(_, c)| **c != 0.0)
        .map(|(i, c)| (i, *c))
        .collect();
    expression(&objective, vars)
}

fn constraint_of(r: &Row, vars: &[Variable]) -> good_lp::Constraint {
    let e = expression(&r.coeffs, vars);
    match r.sense {
        Sense::Le => e.leq(r.rhs),
        Sense::Eq => e.eq(r.rhs),
        Sense::Ge => e.geq(r.rhs),
    }
}

/// The good_lp model of `lp` for `solver`: the variables with their finite lower bounds
/// ([`variables`]), the objective in `lp`'s sense, the rows of `lp` in order, then one row
/// `x_i ≤ u_i` per finite upper bound, in variable order (so that their shadow prices are
/// known). Returns the model, the variables, and the variables with such a row, in the
/// order of those rows. O(nonzeros).
fn model_of<S: good_lp::Solver>(lp: &Lp, solver: S) -> (S::Model, Vec<Variable>, Vec<usize>) {
    let (pv, vars) = variables(lp);
    let obj = objective_of(lp, &vars);
    let unsolved = if lp.maximise {
        pv.maximise(obj)
    } else {
        pv.minimise(obj)
    };
    let mut model = unsolved.using(solver);
    for r in &lp.rows {
        model.add_constraint(constraint_of(r, &vars));
    }
    let uppers: Vec<usize> = (0..lp.num_vars())
        .filter(|&i| lp.upper[i].is_finite())
        .collect();
    for &i in &uppers {
        model.add_constraint(Expression::from(vars[i]).leq(lp.upper[i]));
    }
    (model, vars, uppers)
}

fn solve_microlp(lp: &Lp) -> Result<LpSolution> {
    let (model, vars, _) = model_of(lp, microlp);
    let sol = model
        .solve()
        .map_err(|e| Error::Solver(format!("microlp: {e}")))?;
    let x: Vec<f64> = vars.iter().map(|v| sol.value(*v)).collect();
    let objective = lp.objective.iter().zip(&x).map(|(c, v)| c * v).sum();
    Ok(LpSolution {
        x,
        duals: Vec::new(),
        upper_duals: Vec::new(),
        objective,
    })
}

/// Solves `lp` with clarabel through good_lp's model builder, driving the solver itself
/// so that its termination callback polls [`super::cancel`] at every interior-point
/// iteration (an interrupt abandons the solve within one iteration with
/// [`Error::Interrupted`]).
///
/// Shadow prices follow good_lp's conversion (its `clarabel` module): clarabel solves
/// `min g(x)` s.t. `A·x + s = b`, `s` in the cones, with `g = ±f` (minus when
/// maximising); the price of a row is `z_i · (−objective_factor) · rhs_scale`, where
/// `rhs_scale` is −1 for a `≥` row (stored as `rhs − lhs ≤ 0`) and 1 otherwise. good_lp
/// adds one row per finite variable lower bound before ours, in variable order, so row
/// `i` of `lp` is clarabel row `lower_rows + i` and the explicit upper-bound rows follow.
/// Accepted statuses are good_lp's own (solved, almost solved, dual infeasible).
fn solve_clarabel(lp: &Lp, settings: Clarabel) -> Result<LpSolution> {
    use clarabel::solver::{IPSolver, SolverStatus};
    let (mut model, vars, uppers) = model_of(lp, clarabel);
    model
        .settings()
        .tol_feas(settings.tol)
        .tol_gap_abs(settings.tol)
        .tol_gap_rel(settings.tol)
        .max_iter(settings.max_iter);
    let mut solver = model
        .try_into_solver()
        .map_err(|e| Error::Solver(format!("clarabel: {e}")))?;
    solver.set_termination_callback(|_| super::cancel::requested());
    solver.solve();
    match solver.solution.status {
        SolverStatus::Solved
        | SolverStatus::AlmostSolved
        | SolverStatus::AlmostDualInfeasible
        | SolverStatus::DualInfeasible => {}
        SolverStatus::CallbackTerminated => {
            return Err(Error::Interrupted("interior-point solve abandoned".into()));
        }
        other => return Err(Error::Solver(format!("clarabel: {other:?}"))),
    }
    let sol = &solver.solution;
    // good_lp numbers the variables in the order `variables` adds them: 0, 1, ….
    let x: Vec<f64> = sol.x[..vars.len()].to_vec();
    // −objective_factor: objective_factor is −1 when maximising, 1 when minimising.
    let objective_scale = if lp.maximise { 1.0 } else { -1.0 };
    let lower_rows = lp.lower.iter().filter(|l| l.is_finite()).count();
    let duals: Vec<f64> = lp
        .rows
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let rhs_scale = if r.sense == Sense::Ge { -1.0 } else { 1.0 };
            sol.z[lower_rows + i] * objective_scale * rhs_scale
        })
        .collect();
    let mut upper_duals = vec![0.0; lp.num_vars()];
    for (k, &i) in uppers.iter().enumerate() {
        upper_duals[i] = sol.z[lower_rows + lp.rows.len() + k] * objective_scale;
    }
    let objective = lp.objective.iter().zip(&x).map(|(c, v)| c * v).sum();
    Ok(LpSolution {
        x,
        duals,
        upper_duals,
        objective,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// max 3x + 2y, x + y <= 4, x + 3y <= 9, x <= 3: optimum x = 3, y = 1, value 11 (a
    /// two-variable LP solved by hand: the vertices are (0,0), (3,0), (3,1), (1.5,2.5), (0,3)).
    #[test]
    fn small_lp_and_duals() {
        let mut lp = Lp::new(true);
        let x = lp.add_var(0.0, 3.0, 3.0);
        let y = lp.add_var(0.0, f64::INFINITY, 2.0);
        let r1 = lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Le, 4.0);
        let r2 = lp.add_row(vec![(x, 1.0), (y, 3.0)], Sense::Le, 9.0);
        let s = solve(&lp).unwrap();
        assert!((s.objective - 11.0).abs() < 1e-6, "{}", s.objective);
        assert!((s.x[x] - 3.0).abs() < 1e-6 && (s.x[y] - 1.0).abs() < 1e-6);
        // Row 1 binds with price 2 (one more unit of y); row 2 is slack.
        assert!((s.duals[r1] - 2.0).abs() < 1e-6, "{:?}", s.duals);
        assert!(s.duals[r2].abs() < 1e-6, "{:?}", s.duals);
        assert!(lp.max_violation(&s.x) < 1e-7);
        // Strong duality: 4·2 + 9·0 + 3·1 (the bound x <= 3) = 11.
        assert!((lp.dual_objective(&s) - 11.0).abs() < 1e-6);
    }

    #[test]
    fn minimise_with_ge_row() {
        let mut lp = Lp::new(false);
        let x = lp.add_var(0.0, f64::INFINITY, 2.0);
        let y = lp.add_var(0.0, f64::INFINITY, 5.0);
        let r = lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Ge, 7.0);
        let s = solve(&lp).unwrap();
        assert!((s.objective - 14.0).abs() < 1e-6);
        // Raising the rhs by one costs 2 more.
        assert!((s.duals[r] - 2.0).abs() < 1e-6, "{:?}", s.duals);
    }

    /// min x + 4y, x + y = 5, x <= 3 (hand calculation): x takes the cheaper units up to its
    /// bound, so x = 3, y = 2, value 11; one more unit of the equality costs 4 (a unit of y),
    /// one more unit of x's bound saves 4 − 1 = 3. Covers the equality row and the upper
    /// bound row of a minimisation, the two price conversions not met above.
    #[test]
    fn minimise_with_equality_and_bound() {
        let mut lp = Lp::new(false);
        let x = lp.add_var(0.0, 3.0, 1.0);
        let y = lp.add_var(0.0, f64::INFINITY, 4.0);
        let r = lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Eq, 5.0);
        let s = solve(&lp).unwrap();
        assert!((s.objective - 11.0).abs() < 1e-6, "{}", s.objective);
        assert!((s.duals[r] - 4.0).abs() < 1e-6, "{:?}", s.duals);
        assert!((s.upper_duals[x] + 3.0).abs() < 1e-6, "{:?}", s.upper_duals);
    }
}
