//! The closing's walk master on the warm GUB simplex ([`Gub`]): one copy kept across the
//! rounds of column generation, started from a feasible point (the walk engine's optimum
//! with every addition at its bound), re-optimised from its last vertex each round. The
//! demand rows are the simplex's set rows, outside its dense inverse, so a 200-site master
//! (about 800 arc and site rows, 4,000 demand rows) pivots on an 800-row basis where the
//! interior point refactorised the whole master every round.

use super::pivot_budget;
use crate::error::{Error, Result};
use crate::solve::gub::Gub;
use crate::solve::lp::{Lp, LpSolution, Sense};
use crate::tol::{AT_BOUND_TOL, WARM_START_TOL};

/// A copy of a minimisation `work` (`≤` and `≥` rows, bounded variables) on the GUB
/// simplex, which maximises over `≤` rows: a `≥` row enters negated and the objective
/// negated. Columns `work` gains later enter at 0 ([`WarmCost::solve`]).
pub(super) struct WarmCost {
    sx: Gub,
    /// Per variable of `work`: its simplex column.
    col: Vec<usize>,
    /// Per row of `work`: its simplex row and sign (+1 for `≤`, −1 for a negated `≥`).
    row: Vec<(usize, f64)>,
    /// Per row of `work`: how many of its coefficients the copy holds (later ones belong
    /// to columns added since).
    seen: Vec<usize>,
}

impl WarmCost {
    /// The copy of `work` at the point `start` (per variable), whose rows marked in
    /// `set_row` become set rows (`≤`, coefficient 1, each column in at most one of them).
    /// `None` when `work` is not of that form or `start` violates a row or bound by more
    /// than [`WARM_START_TOL`] (relative to `max(1, |rhs|)`): the primal simplex needs a
    /// feasible start. O(rows + nonzeros · m₁ / set-row share).
    pub(super) fn new(work: &Lp, set_row: &[bool], start: &[f64]) -> Option<WarmCost> {
        if work.maximise || work.max_violation(start) > WARM_START_TOL {
            return None;
        }
        let mut sx = Gub::new();
        let mut row = Vec::with_capacity(work.rows.len());
        for (r, w) in work.rows.iter().enumerate() {
            let sign = match w.sense {
                Sense::Le => 1.0,
                Sense::Ge => -1.0,
                Sense::Eq => return None,
            };
            let i = if set_row[r] {
                if sign < 0.0 || w.coeffs.iter().any(|&(_, a)| a != 1.0) {
                    return None;
                }
                sx.add_set_row(w.rhs)
            } else {
                sx.add_row(sign * w.rhs)
            };
            row.push((i, sign));
        }
        let mut copy = WarmCost {
            sx,
            col: Vec::new(),
            row,
            seen: vec![0; work.rows.len()],
        };
        copy.sync(work, start);
        Some(copy)
    }

    /// Adds the columns `work` gained since the last call, each at its value in `start`
    /// (0 when `start` is shorter) within its bounds. O(nonzeros of the new columns · m₁).
    fn sync(&mut self, work: &Lp, start: &[f64]) {
        let n0 = self.col.len();
        let mut entries: Vec<Vec<(usize, f64)>> = vec![Vec::new(); work.num_vars() - n0];
        for (r, w) in work.rows.iter().enumerate() {
            let (i, sign) = self.row[r];
            for &(j, a) in &w.coeffs[self.seen[r]..] {
                entries[j - n0].push((i, sign * a));
            }
            self.seen[r] = w.coeffs.len();
        }
        for (k, e) in entries.into_iter().enumerate() {
            let j = n0 + k;
            let (l, u) = (work.lower[j], work.upper[j]);
            let value = start.get(j).copied().unwrap_or(0.0).clamp(l, u);
            let c = self.sx.add_col(-work.objective[j], l, u, value, e);
            self.col.push(c);
        }
    }

    /// The optimum of `work` (its new columns added at 0) re-optimised from the last
    /// vertex: values per variable, row and bound duals in [`LpSolution`]'s convention (d
    /// cost / d rhs as `work` writes the row; [`with_bound_duals`]). An error
    /// when the simplex fails (pivot limit, singular basis, a column outside GUB form).
    /// O(pivots · (m₁² + priced entries)).
    pub(super) fn solve(&mut self, work: &Lp) -> Result<LpSolution> {
        self.sync(work, &[]);
        let limit = pivot_budget(self.sx.rows());
        self.sx.solve(limit)?;
        let x: Vec<f64> = self.col.iter().map(|&c| self.sx.value(c)).collect();
        let duals = self
            .row
            .iter()
            .map(|&(i, sign)| -sign * self.sx.dual(i))
            .collect();
        let objective: f64 = work.objective.iter().zip(&x).map(|(c, v)| c * v).sum();
        if !objective.is_finite() {
            return Err(Error::Solver("closing master: a non-finite cost".into()));
        }
        Ok(with_bound_duals(
            work,
            LpSolution {
                upper_duals: Vec::new(),
                x,
                duals,
                objective,
            },
        ))
    }
}

/// `sol` (an optimum of the minimisation `lp` with its row duals, every lower bound 0)
/// with the duals of the finite upper bounds: per variable at its upper bound, its
/// reduced cost `c_j − Σ_r a_rj·dual_r` when negative (raising the bound would lower the
/// cost at that rate), else 0; so [`Lp::dual_objective`] gives the cost again (strong
/// duality). O(nonzeros).
fn with_bound_duals(lp: &Lp, mut sol: LpSolution) -> LpSolution {
    let mut reduced = lp.objective.clone();
    for (r, row) in lp.rows.iter().enumerate() {
        for &(j, a) in &row.coeffs {
            if lp.upper[j].is_finite() {
                reduced[j] -= a * sol.duals[r];
            }
        }
    }
    sol.upper_duals = (0..lp.num_vars())
        .map(|j| {
            let u = lp.upper[j];
            let at_upper = u.is_finite() && sol.x[j] >= u - AT_BOUND_TOL * u.abs().max(1.0);
            if at_upper { reduced[j].min(0.0) } else { 0.0 }
        })
        .collect();
    sol
}
