//! A bounded primal simplex for the walk engine's restricted masters, kept warm between
//! column-generation rounds (pure Rust, no backend).
//!
//! The model is `max c·x` subject to `A x + s = b` (one slack `s_i ∈ [0, ∞)` per `≤` row)
//! and `l_j ≤ x_j ≤ u_j` per column. It grows while it is solved: [`Simplex::add_row`] and
//! [`Simplex::add_col`] extend the current basis (a new row's slack is basic, a new column
//! is nonbasic at the value it is given), and [`Simplex::set_bounds`] relaxes a nonbasic
//! column's bounds. Each change keeps the basis primal feasible when the new point is, so
//! [`Simplex::solve`] re-optimises from where the last solve stopped instead of starting
//! over. Nonbasic columns may sit strictly between their bounds (a start point given
//! by the caller); they enter in whichever direction improves the objective.
//!
//! The basis inverse is kept explicitly (dense, column-major: `binv[r]` is column `r` of
//! `B⁻¹`) and updated by one eta step per pivot, O(m · nonzero columns of the pivot row).
//! Exact duals come out of the basis, `y = c_B B⁻¹`, updated with each pivot and
//! recomputed from scratch every [`REFRESH`] pivots and at the end, when the primal
//! residual `A x + s − b` is also checked; a residual above tolerance re-inverts the basis
//! (product form from the slack basis, largest pivot first).
//!
//! Pricing is Dantzig's (largest reduced cost, lowest index on ties); after [`DEGENERATE`]
//! degenerate pivots in a row it switches to Bland's rule (lowest eligible index, lowest
//! leaving index), which cannot cycle, until a pivot makes progress.
//!
//! Intended for masters of up to a few thousand rows (the dense inverse takes 8·m² bytes);
//! the caller picks the interior-point backend above that.

use super::pivoting::{self, Primal};
use crate::error::{Error, Result};

/// The refresh cadence and the anti-cycling switch, shared with the GUB simplex.
pub use super::pivoting::{DEGENERATE, REFRESH};
/// The simplex's tolerances (defined and explained in [`crate::tol`]).
pub use crate::tol::{SIMPLEX_DUAL_TOL as DUAL_TOL, SIMPLEX_PIVOT_TOL as PIVOT_TOL};

const NONE: usize = usize::MAX;

/// A variable of the model: a column or the slack of a row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Var {
    Col(usize),
    Slack(usize),
}

/// A column to add to a warm master LP: objective, bounds, and the value it starts from
/// (nonbasic).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Column {
    pub obj: f64,
    pub lower: f64,
    pub upper: f64,
    pub value: f64,
}

impl Column {
    /// The column with objective `obj`, bounds `lower..=upper`, starting at `value`.
    pub const fn new(obj: f64, lower: f64, upper: f64, value: f64) -> Column {
        Column {
            obj,
            lower,
            upper,
            value,
        }
    }
}

/// The read side of a warm LP's last point, written once for the two warm LPs (this
/// simplex and HiGHS's `WarmLp`), which both keep the objective in `obj`, the column
/// values in `x` and the row duals (`c_B B⁻¹`) in `y`: `value(j)`, `dual(i)` (`≥ 0` at an
/// optimum of a maximisation over `≤` rows) and `objective()` (`c·x`, O(columns)).
macro_rules! point_accessors {
    () => {
        /// The value of column `j` at the last point. O(1).
        pub fn value(&self, j: usize) -> f64 {
            self.x[j]
        }

        /// The dual (shadow price) of row `i` at the last point, `≥ 0` at an optimum. O(1).
        pub fn dual(&self, i: usize) -> f64 {
            self.y[i]
        }

        /// `c·x` at the last point. O(columns).
        pub fn objective(&self) -> f64 {
            self.obj.iter().zip(&self.x).map(|(c, x)| c * x).sum()
        }
    };
}
#[cfg(feature = "highs")]
pub(super) use point_accessors;

/// The model, its current basis and point (see the module comment).
#[derive(Debug, Clone, Default)]
pub struct Simplex {
    rhs: Vec<f64>,
    cols: Vec<Vec<(usize, f64)>>,
    obj: Vec<f64>,
    lower: Vec<f64>,
    upper: Vec<f64>,
    x: Vec<f64>,
    slack: Vec<f64>,
    /// Basis position of each column / slack (`NONE` when nonbasic).
    col_pos: Vec<usize>,
    slack_pos: Vec<usize>,
    /// The basic variable at each position.
    basis: Vec<Var>,
    /// Column-major `B⁻¹`: `binv[r][p]`.
    binv: Vec<Vec<f64>>,
    /// Row duals `c_B B⁻¹`.
    y: Vec<f64>,
    /// Pivots (basis changes) and bound flips done so far.
    pub pivots: usize,
}

impl Simplex {
    /// An empty model.
    pub fn new() -> Simplex {
        Simplex::default()
    }

    pub fn rows(&self) -> usize {
        self.rhs.len()
    }

    pub fn cols(&self) -> usize {
        self.cols.len()
    }

    /// Adds the row `Σ a·x ≤ rhs` whose coefficients on existing columns are `entries`
    /// (column, coefficient); its slack becomes basic at `rhs − Σ a·x`. The inverse grows
    /// by one row and column: O(m · basic entries). Returns the row's index.
    pub fn add_row(&mut self, rhs: f64, entries: &[(usize, f64)]) -> usize {
        let m = self.rhs.len();
        let mut lhs = 0.0;
        let mut basic: Vec<(usize, f64)> = Vec::new();
        for &(j, a) in entries {
            self.cols[j].push((m, a));
            lhs += a * self.x[j];
            if self.col_pos[j] != NONE {
                basic.push((self.col_pos[j], a));
            }
        }
        // B' = [B 0; r 1] ⇒ B'⁻¹ = [B⁻¹ 0; −r B⁻¹ 1].
        for col in &mut self.binv {
            let v: f64 = basic.iter().map(|&(p, a)| a * col[p]).sum();
            col.push(-v);
        }
        let mut unit = vec![0.0; m + 1];
        unit[m] = 1.0;
        self.binv.push(unit);
        self.rhs.push(rhs);
        self.slack.push(rhs - lhs);
        self.slack_pos.push(m);
        self.basis.push(Var::Slack(m));
        // The new slack costs 0, so y extends by 0 and its old entries are unchanged.
        self.y.push(0.0);
        m
    }

    /// Adds a column with objective `obj`, bounds `lower..=upper` and entries (row,
    /// coefficient), nonbasic at `value`; the basic variables move to keep `A x + s = b`
    /// (they stay feasible when the caller's point is). O(m · entries). Returns its index.
    pub fn add_col(
        &mut self,
        obj: f64,
        lower: f64,
        upper: f64,
        value: f64,
        entries: Vec<(usize, f64)>,
    ) -> usize {
        let j = self.cols.len();
        if value != 0.0 {
            let alpha = self.ftran(&entries);
            for (p, a) in alpha.iter().enumerate() {
                if *a != 0.0 {
                    let v = self.basis[p];
                    self.set(v, self.get(v) - value * a);
                }
            }
        }
        self.cols.push(entries);
        self.obj.push(obj);
        self.lower.push(lower);
        self.upper.push(upper);
        self.x.push(value);
        self.col_pos.push(NONE);
        j
    }

    /// Raises (or lowers) the right-hand side of row `i` by `delta`; the basic variables
    /// absorb it (`x_B += delta · B⁻¹ e_i`). O(m). Used together with a column added at a
    /// value that takes exactly `delta` of the row, which leaves every basic value as it was.
    pub fn shift_rhs(&mut self, i: usize, delta: f64) {
        self.rhs[i] += delta;
        for p in 0..self.basis.len() {
            let a = self.binv[i][p];
            if a != 0.0 {
                let v = self.basis[p];
                self.set(v, self.get(v) + delta * a);
            }
        }
    }

    /// Sets the bounds of a nonbasic column whose value lies within them (used to free a
    /// column that was fixed). Returns an error otherwise.
    pub fn set_bounds(&mut self, j: usize, lower: f64, upper: f64) -> Result<()> {
        if self.col_pos[j] != NONE || self.x[j] < lower || self.x[j] > upper {
            return Err(Error::Solver(
                "simplex: bounds of a basic column or outside its value".into(),
            ));
        }
        self.lower[j] = lower;
        self.upper[j] = upper;
        Ok(())
    }

    point_accessors!();

    fn get(&self, v: Var) -> f64 {
        match v {
            Var::Col(j) => self.x[j],
            Var::Slack(i) => self.slack[i],
        }
    }

    fn set(&mut self, v: Var, value: f64) {
        match v {
            Var::Col(j) => self.x[j] = value,
            Var::Slack(i) => self.slack[i] = value,
        }
    }

    fn bounds(&self, v: Var) -> (f64, f64) {
        match v {
            Var::Col(j) => (self.lower[j], self.upper[j]),
            Var::Slack(_) => (0.0, f64::INFINITY),
        }
    }

    fn cost(&self, v: Var) -> f64 {
        match v {
            Var::Col(j) => self.obj[j],
            Var::Slack(_) => 0.0,
        }
    }

    /// `B⁻¹ a` for a sparse column `a`. O(m · entries).
    fn ftran(&self, entries: &[(usize, f64)]) -> Vec<f64> {
        let mut alpha = vec![0.0; self.rhs.len()];
        for &(r, a) in entries {
            for (x, b) in alpha.iter_mut().zip(&self.binv[r]) {
                *x += a * b;
            }
        }
        alpha
    }

    fn column_of(&self, v: Var) -> Vec<(usize, f64)> {
        match v {
            Var::Col(j) => self.cols[j].clone(),
            Var::Slack(i) => vec![(i, 1.0)],
        }
    }

    /// The reduced cost of a nonbasic variable: `c_j − y·a_j`.
    fn reduced(&self, v: Var) -> f64 {
        match v {
            Var::Col(j) => {
                self.obj[j]
                    - self.cols[j]
                        .iter()
                        .map(|&(r, a)| self.y[r] * a)
                        .sum::<f64>()
            }
            Var::Slack(i) => -self.y[i],
        }
    }

    /// Re-optimises from the current basis and point. Errors when the model is
    /// unbounded, the basis becomes singular, or `max_pivots` is exceeded (the caller
    /// then uses another backend), and with [`Error::Interrupted`] when an interrupt is
    /// asked for ([`super::cancel`], polled before every pivot and every column of a
    /// re-inversion).
    pub fn solve(&mut self, max_pivots: usize) -> Result<()> {
        pivoting::run(self, max_pivots, "simplex")
    }
}

impl pivoting::Product for Simplex {
    type Var = Var;
    fn slack_row(v: Var) -> Option<usize> {
        match v {
            Var::Slack(i) => Some(i),
            Var::Col(_) => None,
        }
    }
    fn slack(i: usize) -> Var {
        Var::Slack(i)
    }
    fn inverse(&mut self) -> &mut Vec<Vec<f64>> {
        &mut self.binv
    }
    /// The column of `v` through `B⁻¹`.
    fn alpha(&self, v: Var) -> Vec<f64> {
        self.ftran(&self.column_of(v))
    }
}

impl Primal for Simplex {
    type Var = Var;

    /// Recomputes the duals and the basic values from the inverse: O(m² + nonzeros).
    /// Returns the largest primal residual `|A x + s − b|` relative to `max(1, |b|)`,
    /// computed with the recomputed values.
    fn refresh(&mut self) -> f64 {
        let m = self.rhs.len();
        let cb: Vec<f64> = self.basis.iter().map(|&v| self.cost(v)).collect();
        for r in 0..m {
            self.y[r] = cb.iter().zip(&self.binv[r]).map(|(c, b)| c * b).sum();
        }
        // Right-hand side net of nonbasic variables.
        let mut net = self.rhs.clone();
        for (j, col) in self.cols.iter().enumerate() {
            if self.col_pos[j] == NONE && self.x[j] != 0.0 {
                for &(r, a) in col {
                    net[r] -= a * self.x[j];
                }
            }
        }
        for ((n, &pos), &s) in net.iter_mut().zip(&self.slack_pos).zip(&self.slack) {
            if pos == NONE {
                *n -= s;
            }
        }
        let mut xb = vec![0.0; m];
        for (r, &b) in net.iter().enumerate() {
            if b != 0.0 {
                for (x, v) in xb.iter_mut().zip(&self.binv[r]) {
                    *x += b * v;
                }
            }
        }
        for (p, &v) in xb.iter().enumerate() {
            self.set(self.basis[p], v);
        }
        let mut lhs = self.slack.clone();
        for (j, col) in self.cols.iter().enumerate() {
            for &(r, a) in col {
                lhs[r] += a * self.x[j];
            }
        }
        lhs.iter()
            .zip(&self.rhs)
            .map(|(l, b)| (l - b).abs() / b.abs().max(1.0))
            .fold(0.0, f64::max)
    }

    /// Rebuilds `B⁻¹` for the current basic variables: product form from the slack basis,
    /// each structural basic column pivoted at its largest entry among the positions still
    /// free. O(m · basic columns · m). A numerically singular basis is an error.
    fn reinvert(&mut self) -> Result<()> {
        let m = self.rhs.len();
        let basics: Vec<Var> = self.basis.clone();
        let basis = pivoting::reinvert(self, m, &basics, "simplex")?;
        self.slack_pos = vec![NONE; m];
        for c in &mut self.col_pos {
            *c = NONE;
        }
        for (p, v) in basis.iter().enumerate() {
            match *v {
                Var::Col(j) => self.col_pos[j] = p,
                Var::Slack(i) => self.slack_pos[i] = p,
            }
        }
        self.basis = basis;
        Ok(())
    }

    /// The entering variable and its reduced cost: Dantzig's choice (largest |d|, lowest
    /// index on ties) or, with `bland`, the lowest eligible index. A variable is eligible
    /// when its reduced cost exceeds [`DUAL_TOL`] and it can move that way.
    fn entering(&mut self, bland: bool) -> Option<(Var, f64)> {
        let mut best: Option<(Var, f64)> = None;
        let cols = (0..self.cols.len())
            .filter(|&j| self.col_pos[j] == NONE)
            .map(Var::Col);
        let slacks = (0..self.rhs.len())
            .filter(|&i| self.slack_pos[i] == NONE)
            .map(Var::Slack);
        for v in cols.chain(slacks) {
            let (l, u) = self.bounds(v);
            let x = self.get(v);
            if x >= u && x <= l {
                continue;
            }
            let d = self.reduced(v);
            let ok = (d > DUAL_TOL && x < u) || (d < -DUAL_TOL && x > l);
            if !ok {
                continue;
            }
            if bland {
                return Some((v, d));
            }
            if best.is_none_or(|(_, bd)| d.abs() > bd.abs()) {
                best = Some((v, d));
            }
        }
        best
    }

    /// Ratio test over the entering variable's own range and every basic variable,
    /// then the move, and one eta step of `B⁻¹` with the duals moved by `d` times the
    /// leaving position's new row. O(m · nonzeros of the pivot).
    fn pivot(&mut self, q: Var, d: f64, bland: bool) -> Result<bool> {
        let dir = if d > 0.0 { 1.0 } else { -1.0 };
        let alpha = self.ftran(&self.column_of(q));
        let (ql, qu) = self.bounds(q);
        let xq = self.get(q);
        let mut step = if dir > 0.0 { qu - xq } else { xq - ql };
        let mut leave = NONE;
        let mut leave_at_upper = false;
        for (p, &a) in alpha.iter().enumerate() {
            if a.abs() < PIVOT_TOL {
                continue;
            }
            let v = self.basis[p];
            let Some((t, upper)) = pivoting::step_to_bound(self.get(v), self.bounds(v), a, dir)
            else {
                continue;
            };
            let tie = || {
                if bland {
                    index(v) < index(self.basis[leave])
                } else {
                    a.abs() > alpha[leave].abs()
                }
            };
            if pivoting::replaces(t, step, leave == NONE, tie) {
                step = t;
                leave = p;
                leave_at_upper = upper;
            }
        }
        if !step.is_finite() {
            return Err(Error::Solver("simplex: unbounded master".into()));
        }
        let moved = step > 0.0;
        if moved {
            for (p, &a) in alpha.iter().enumerate() {
                if a != 0.0 {
                    let v = self.basis[p];
                    self.set(v, self.get(v) - dir * step * a);
                }
            }
            self.set(q, xq + dir * step);
        }
        if leave == NONE {
            // Bound flip: the entering variable reaches its other bound.
            self.set(q, if dir > 0.0 { qu } else { ql });
            return Ok(moved);
        }
        let out = self.basis[leave];
        let (l, u) = self.bounds(out);
        self.set(out, if leave_at_upper { u } else { l });
        pivoting::eta(&mut self.binv, leave, &alpha);
        for r in 0..self.y.len() {
            let b = self.binv[r][leave];
            if b != 0.0 {
                self.y[r] += d * b;
            }
        }
        self.basis[leave] = q;
        match out {
            Var::Col(j) => self.col_pos[j] = NONE,
            Var::Slack(i) => self.slack_pos[i] = NONE,
        }
        match q {
            Var::Col(j) => self.col_pos[j] = leave,
            Var::Slack(i) => self.slack_pos[i] = leave,
        }
        Ok(moved)
    }

    fn pivots(&mut self) -> &mut usize {
        &mut self.pivots
    }
}

/// A fixed order of variables for Bland's rule: columns first, then slacks.
fn index(v: Var) -> (u8, usize) {
    match v {
        Var::Col(j) => (0, j),
        Var::Slack(i) => (1, i),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// max 3x + 2y, x + y ≤ 4, x + 3y ≤ 9, x ≤ 3: optimum x = 3, y = 1, value 11, row
    /// duals 2 and 0 (the hand-solved LP of `lp::tests::small_lp_and_duals`: the vertices
    /// are (0,0), (3,0), (3,1), (1.5,2.5), (0,3)).
    #[test]
    fn hand_lp_with_bound() {
        let mut s = Simplex::new();
        let r1 = s.add_row(4.0, &[]);
        let r2 = s.add_row(9.0, &[]);
        let x = s.add_col(3.0, 0.0, 3.0, 0.0, vec![(r1, 1.0), (r2, 1.0)]);
        let y = s.add_col(2.0, 0.0, f64::INFINITY, 0.0, vec![(r1, 1.0), (r2, 3.0)]);
        s.solve(100).unwrap();
        assert!((s.objective() - 11.0).abs() < 1e-12, "{}", s.objective());
        assert!((s.value(x) - 3.0).abs() < 1e-12 && (s.value(y) - 1.0).abs() < 1e-12);
        assert!((s.dual(r1) - 2.0).abs() < 1e-12 && s.dual(r2).abs() < 1e-12);
    }

    /// Warm growth (hand-computed): max x1 with x1 ≤ 5 (row a) is 5; adding x2 on a
    /// second row b ≤ 3 gives 8; a third column x3 crossing both rows (cost 1) cannot
    /// improve it (its reduced cost is 1 − 1 − 1 = −1 at duals (1, 1)). Freeing a column
    /// that was fixed at 2 (x4 on row b, cost 1) leaves 8: the row is full either way.
    #[test]
    fn grows_warm() {
        let mut s = Simplex::new();
        let a = s.add_row(5.0, &[]);
        s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(a, 1.0)]);
        s.solve(100).unwrap();
        assert_eq!(s.objective(), 5.0);
        let b = s.add_row(3.0, &[]);
        let x4 = s.add_col(1.0, 2.0, 2.0, 2.0, vec![(b, 1.0)]);
        s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(b, 1.0)]);
        s.solve(100).unwrap();
        assert_eq!(s.objective(), 8.0);
        s.add_col(1.0, 0.0, f64::INFINITY, 0.0, vec![(a, 1.0), (b, 1.0)]);
        s.solve(100).unwrap();
        assert_eq!(s.objective(), 8.0);
        s.set_bounds(x4, 0.0, f64::INFINITY).unwrap();
        s.solve(100).unwrap();
        assert_eq!(s.objective(), 8.0);
        assert!((s.dual(a) - 1.0).abs() < 1e-12 && (s.dual(b) - 1.0).abs() < 1e-12);
    }

    /// Seeded random packing LPs (max Σ c·x, A x ≤ b with 0/1/2 entries, like the walk
    /// masters) against microlp's simplex through [`crate::solve::lp::Simplex`] (an
    /// independent general-purpose solver): same optimum; our duals are feasible
    /// (`Aᵀy ≥ c`, `y ≥ 0`) and meet the primal value (strong duality). Half of the
    /// columns are added after a first solve, to exercise the warm path.
    #[test]
    fn random_packing_lps_match_microlp() {
        use crate::solve::lp::{Backend, Lp, Sense};
        let mut seed: u64 = 0x5eed;
        let mut next = move |n: u64| {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (seed >> 33) % n
        };
        for case in 0..60 {
            let m = 3 + next(12) as usize;
            let n = 2 + next(25) as usize;
            let rhs: Vec<f64> = (0..m).map(|_| (1 + next(20)) as f64 / 2.0).collect();
            let cols: Vec<Vec<(usize, f64)>> = (0..n)
                .map(|_| {
                    let mut c: Vec<(usize, f64)> = Vec::new();
                    for i in 0..m {
                        if next(3) == 0 {
                            c.push((i, (1 + next(2)) as f64));
                        }
                    }
                    if c.is_empty() {
                        c.push((next(m as u64) as usize, 1.0));
                    }
                    c
                })
                .collect();
            let obj: Vec<f64> = (0..n).map(|_| (1 + next(4)) as f64).collect();
            let mut lp = Lp::new(true);
            for &c in &obj {
                lp.add_var(0.0, f64::INFINITY, c);
            }
            for (i, &b) in rhs.iter().enumerate() {
                let coeffs = cols
                    .iter()
                    .enumerate()
                    .filter_map(|(j, c)| c.iter().find(|e| e.0 == i).map(|e| (j, e.1)))
                    .collect();
                lp.add_row(coeffs, Sense::Le, b);
            }
            let reference = crate::solve::lp::Simplex.solve(&lp).unwrap();
            let mut s = Simplex::new();
            for &b in &rhs {
                s.add_row(b, &[]);
            }
            let half = n / 2;
            for j in 0..half {
                s.add_col(obj[j], 0.0, f64::INFINITY, 0.0, cols[j].clone());
            }
            s.solve(10_000).unwrap();
            for j in half..n {
                s.add_col(obj[j], 0.0, f64::INFINITY, 0.0, cols[j].clone());
            }
            s.solve(10_000).unwrap();
            let v = s.objective();
            assert!(
                (v - reference.objective).abs() <= 1e-9 * v.abs().max(1.0),
                "case {case}: {v} vs microlp {}",
                reference.objective
            );
            let dual: f64 = (0..m).map(|i| rhs[i] * s.dual(i)).sum();
            assert!((dual - v).abs() <= 1e-9 * v.abs().max(1.0), "case {case}");
            for (j, c) in cols.iter().enumerate() {
                let priced: f64 = c.iter().map(|&(i, a)| a * s.dual(i)).sum();
                assert!(priced >= obj[j] - 1e-9, "case {case}: column {j}");
            }
            assert!((0..m).all(|i| s.dual(i) >= -1e-9));
            let x: Vec<f64> = (0..n).map(|j| s.value(j)).collect();
            assert!(lp.max_violation(&x) < 1e-9, "case {case}");
        }
    }
}
