//! A small sparse LP representation and the one place that talks to the LP backend.
//!
//! Models are written against [`Lp`] (variables with bounds, rows with a sense); [`solve`]
//! hands them to good_lp's pure-Rust `clarabel` interior-point backend and returns primal
//! values, the shadow price of every row and the objective. Nothing outside this file
//! names good_lp.

use good_lp::{
    Expression, ProblemVariables, Solution, SolutionWithDual, SolverModel, Variable, clarabel,
    constraint::ConstraintReference, variable,
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

/// Solves `lp` to optimality with the clarabel interior-point method (primal and dual
/// feasibility and gap tolerances 1e-9 / 1e-9 / 1e-9 relative).
///
/// Every model built by this crate is feasible and bounded; any other status is returned
/// as [`Error::Solver`].
pub fn solve(lp: &Lp) -> Result<LpSolution> {
    // Uniform scaling: with x = S·x', the model min c·x, A·x ≤ b, l ≤ x ≤ u becomes
    // A·x' ≤ b/S, l/S ≤ x' ≤ u/S with the same shadow prices and objective c·x' = c·x / S.
    // Solving with S = the largest right-hand side or bound keeps the interior-point
    // method's absolute tolerances meaningful whatever the traffic unit (bit/s or Tbit/s).
    let scale = lp
        .rows
        .iter()
        .map(|r| r.rhs.abs())
        .chain(lp.upper.iter().filter(|u| u.is_finite()).map(|u| u.abs()))
        .chain(lp.lower.iter().filter(|l| l.is_finite()).map(|l| l.abs()))
        .fold(0.0, f64::max);
    if scale > 0.0 && scale.is_finite() && (scale - 1.0).abs() > f64::EPSILON {
        let mut scaled = lp.clone();
        for r in &mut scaled.rows {
            r.rhs /= scale;
        }
        for b in scaled.upper.iter_mut().chain(scaled.lower.iter_mut()) {
            if b.is_finite() {
                *b /= scale;
            }
        }
        let mut sol = solve_unscaled(&scaled)?;
        for x in &mut sol.x {
            *x *= scale;
        }
        sol.objective *= scale;
        return Ok(sol);
    }
    solve_unscaled(lp)
}

fn solve_unscaled(lp: &Lp) -> Result<LpSolution> {
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
    let objective: Vec<(usize, f64)> = lp
        .objective
        .iter()
        .enumerate()
        .filter(|(_, c)| **c != 0.0)
        .map(|(i, c)| (i, *c))
        .collect();
    let obj = expression(&objective, &vars);
    let unsolved = if lp.maximise {
        pv.maximise(obj)
    } else {
        pv.minimise(obj)
    };
    let mut model = unsolved.using(clarabel);
    model
        .settings()
        .tol_feas(1e-9)
        .tol_gap_abs(1e-9)
        .tol_gap_rel(1e-9)
        .max_iter(400);
    let refs: Vec<ConstraintReference> = lp
        .rows
        .iter()
        .map(|r| {
            let e = expression(&r.coeffs, &vars);
            let c = match r.sense {
                Sense::Le => e.leq(r.rhs),
                Sense::Eq => e.eq(r.rhs),
                Sense::Ge => e.geq(r.rhs),
            };
            model.add_constraint(c)
        })
        .collect();
    // Finite upper bounds as explicit rows, so that their shadow prices are known.
    let bound_refs: Vec<Option<ConstraintReference>> = (0..lp.num_vars())
        .map(|i| {
            lp.upper[i]
                .is_finite()
                .then(|| model.add_constraint(Expression::from(vars[i]).leq(lp.upper[i])))
        })
        .collect();
    let mut sol = model
        .solve()
        .map_err(|e| Error::Solver(format!("clarabel: {e}")))?;
    let x: Vec<f64> = vars.iter().map(|v| sol.value(*v)).collect();
    let (duals, upper_duals) = {
        let d = sol.compute_dual();
        let rows = refs
            .iter()
            .map(|r| good_lp::DualValues::dual(&d, r.clone()))
            .collect();
        let bounds = bound_refs
            .iter()
            .map(|r| {
                r.as_ref()
                    .map_or(0.0, |r| good_lp::DualValues::dual(&d, r.clone()))
            })
            .collect();
        (rows, bounds)
    };
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
}
