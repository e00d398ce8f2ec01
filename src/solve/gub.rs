//! A bounded primal simplex with generalised upper bounds (GUB, Dantzig and Van Slyke,
//! "Generalized upper bounding techniques", J. Comput. Syst. Sci. 1, 1967), for masters
//! whose rows are mostly *set rows*: the walk engine's demand rows `Σ_{w of d} λ_w ≤ b_d`,
//! where every column has coefficient 1 in at most one set row.
//!
//! The model is `max c·x` subject to coupling rows `A x + s = b` (arcs, sites; slack
//! `s ≥ 0`) and set rows `Σ_{j ∈ S_d} x_j + t_d = b_d` (slack `t_d ≥ 0`, a member of its
//! own set with no coupling entries), and `l_j ≤ x_j ≤ u_j` per column. A basis holds one
//! variable per row. Each set keeps one basic member as its *key* (its slack when no
//! column of the set is basic); the other basic variables, one per coupling row, form the
//! *working basis* `W`, whose column for a variable `v` of set `d` is `a_v − a_key(d)`
//! (a coupling slack's is its unit vector). `W` is square in the coupling rows and
//! nonsingular whenever the full basis is, so the full basis is never formed: only the
//! dense `W⁻¹` is kept (8·m₁² bytes for m₁ coupling rows, whatever the number of sets).
//!
//! With it, `B⁻¹ (r₁; r₂)` is `x_W = W⁻¹ (r₁ − Σ_d a_key(d) r₂_d)` for the working
//! variables and `x_key(d) = r₂_d − Σ_{working v of d} x_v` for the keys; the duals are
//! `y = W⁻ᵀ (c_W − c_key)` on the coupling rows and `u_d = c_key(d) − a_key(d)·y` on the
//! set rows. A pivot whose leaving variable is a key first makes another working member of
//! its set the key (a row operation on `W⁻¹`, O(m₁ · set members)); a key that is the only
//! basic member of its set is replaced by the entering column directly, which then must
//! belong to the same set.
//!
//! Same conventions as [`super::simplex`], and the same solve loop (shared with it):
//! nonbasic columns may rest strictly between their bounds, partial Dantzig pricing with
//! Bland's rule after [`super::simplex::DEGENERATE`] degenerate pivots, values and duals
//! recomputed from `W⁻¹` every [`super::simplex::REFRESH`] pivots and at the end,
//! re-inversion when the primal residual drifts past [`crate::tol::SIMPLEX_DRIFT_TOL`].

use super::pivoting::{self, Primal};
use super::simplex::{DUAL_TOL, PIVOT_TOL};
use crate::error::{Error, Result};

/// Most coupling rows this simplex takes (its dense `W⁻¹` holds 8·rows² bytes: 200 MB at
/// the limit); past it a solve errors and the caller uses another backend.
pub const COUPLING_ROWS: usize = 5000;

/// A coupling vector longer than this is summed per row before `W⁻¹` is applied to it
/// (one dense pass per distinct row instead of one per entry).
const MERGE_ENTRIES: usize = 64;

/// Variables scanned per segment of partial pricing (at least).
const SEGMENT: usize = 256;

const NONE: usize = usize::MAX;

/// A variable: a column, the slack of a coupling row, or the slack of a set row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum Var {
    Col(usize),
    Slack(usize),
    SetSlack(usize),
}

/// Where a variable stands in the basis.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Pos {
    Nonbasic,
    Key,
    Work(usize),
}

/// A row of the model by its creation index: a coupling row or a set row.
#[derive(Debug, Clone, Copy)]
enum Row {
    Coupling(usize),
    Set(usize),
}

/// The leaving variable of a ratio test.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Leave {
    Flip,
    Work(usize),
    Key(usize),
}

/// The model, its basis (keys and working basis) and point (see the module comment).
#[derive(Debug, Clone, Default)]
pub struct Gub {
    rows: Vec<Row>,
    /// Coupling rows: right-hand sides, slack values and positions, duals.
    rhs: Vec<f64>,
    slack: Vec<f64>,
    slack_pos: Vec<Pos>,
    y: Vec<f64>,
    /// Set rows: right-hand sides, slack values and positions, keys, duals.
    set_rhs: Vec<f64>,
    set_slack: Vec<f64>,
    set_slack_pos: Vec<Pos>,
    key: Vec<Var>,
    u: Vec<f64>,
    /// `u[d]` is current when `u_stamp[d] == stamp`; `stamp` moves with every change of
    /// `y` or of a key, so a pivot costs nothing for the sets pricing does not reach.
    u_stamp: Vec<u64>,
    stamp: u64,
    /// Where partial pricing resumes (an index into columns, coupling slacks, set slacks).
    cursor: usize,
    /// Columns: coupling entries (coupling index, coefficient), set (or `NONE`).
    cols: Vec<Vec<(usize, f64)>>,
    set: Vec<usize>,
    obj: Vec<f64>,
    lower: Vec<f64>,
    upper: Vec<f64>,
    x: Vec<f64>,
    col_pos: Vec<Pos>,
    /// The working basis: the variable at each position, and `W⁻¹` column-major
    /// (`winv[r][p]` is row `p`, column `r`).
    work: Vec<Var>,
    winv: Vec<Vec<f64>>,
    /// A column was given entries this simplex cannot hold (a set coefficient other than
    /// 1, or two set rows): every solve errors.
    invalid: bool,
    /// Pivots (basis changes) and bound flips done so far.
    pub pivots: usize,
}

impl Gub {
    /// An empty model.
    pub fn new() -> Gub {
        Gub::default()
    }

    pub fn rows(&self) -> usize {
        self.rows.len()
    }

    pub fn cols(&self) -> usize {
        self.cols.len()
    }

    /// Rows other than set rows (the size of the working basis).
    pub fn coupling_rows(&self) -> usize {
        self.rhs.len()
    }

    /// Adds the empty coupling row `0 ≤ rhs` (no existing column has an entry in it); its
    /// slack joins the working basis at `rhs`. O(m₁). Returns the row's index.
    pub fn add_row(&mut self, rhs: f64) -> usize {
        self.add_row_with(rhs, &[])
    }

    /// Adds the coupling row `Σ a·x ≤ rhs` whose coefficients on existing columns are
    /// `entries` (column, coefficient); its slack
    /// joins the working basis at `rhs − Σ a·x`. `W` gains a row `r` (each working
    /// column's `a_v[i] − a_key[i]`): `W'⁻¹ = [W⁻¹ 0; −r W⁻¹ 1]`, and the duals are
    /// unchanged (the new slack costs 0). O(m₁ · (m₁ + entries)). Returns the row's index.
    pub fn add_row_with(&mut self, rhs: f64, entries: &[(usize, f64)]) -> usize {
        let i = self.rhs.len();
        let mut lhs = 0.0;
        let mut coef = vec![0.0; self.cols.len()];
        for &(j, a) in entries {
            self.cols[j].push((i, a));
            coef[j] += a;
            lhs += a * self.x[j];
        }
        let row_of = |v: Var| match v {
            Var::Col(j) => coef[j],
            _ => 0.0,
        };
        // r_p = a_v[i] − a_key(set v)[i] for the working variable v at position p.
        let r: Vec<(usize, f64)> = self
            .work
            .iter()
            .enumerate()
            .filter_map(|(p, &v)| {
                let d = self.set_of(v);
                let key = if d == NONE { 0.0 } else { row_of(self.key[d]) };
                let e = row_of(v) - key;
                (e != 0.0).then_some((p, e))
            })
            .collect();
        for col in &mut self.winv {
            let v: f64 = r.iter().map(|&(p, e)| e * col[p]).sum();
            col.push(-v);
        }
        let mut unit = vec![0.0; i + 1];
        unit[i] = 1.0;
        self.winv.push(unit);
        self.rhs.push(rhs);
        self.slack.push(rhs - lhs);
        self.slack_pos.push(Pos::Work(i));
        self.work.push(Var::Slack(i));
        self.y.push(0.0);
        self.rows.push(Row::Coupling(i));
        self.rows.len() - 1
    }

    /// Replaces the objective (one coefficient per column, in column order; columns past
    /// `obj` get 0) and recomputes the duals and basic values from `W⁻¹`; the basis and
    /// point are kept, so the next [`Gub::solve`] starts from the last vertex. O(m₁² +
    /// nonzeros).
    pub fn set_objective(&mut self, obj: &[f64]) {
        for (j, c) in self.obj.iter_mut().enumerate() {
            *c = obj.get(j).copied().unwrap_or(0.0);
        }
        self.refresh();
    }

    /// Adds the empty set row `0 ≤ rhs`; its slack is the set's key at `rhs`. O(1).
    /// Returns the row's index.
    pub fn add_set_row(&mut self, rhs: f64) -> usize {
        let d = self.set_rhs.len();
        self.set_rhs.push(rhs);
        self.set_slack.push(rhs);
        self.set_slack_pos.push(Pos::Key);
        self.key.push(Var::SetSlack(d));
        // Its key is its slack (cost 0, no coupling entry): u = 0 is current.
        self.u.push(0.0);
        self.u_stamp.push(self.stamp);
        self.rows.push(Row::Set(d));
        self.rows.len() - 1
    }

    /// Adds a column with objective `obj`, bounds `lower..=upper` and entries (row,
    /// coefficient; at most one set row, with coefficient 1), nonbasic at `value`; the
    /// basic variables move to keep every row's equation (they stay feasible when the
    /// caller's point is). O(m₁ · entries). Returns its index.
    pub fn add_col(
        &mut self,
        obj: f64,
        lower: f64,
        upper: f64,
        value: f64,
        entries: Vec<(usize, f64)>,
    ) -> usize {
        let j = self.cols.len();
        let mut coupling = Vec::with_capacity(entries.len());
        let mut set = NONE;
        for (r, a) in entries {
            match self.rows[r] {
                Row::Coupling(i) => coupling.push((i, a)),
                Row::Set(d) => {
                    if set != NONE || a != 1.0 {
                        self.invalid = true;
                    }
                    set = d;
                }
            }
        }
        if value != 0.0 {
            let set_part: Vec<(usize, f64)> = if set == NONE {
                Vec::new()
            } else {
                vec![(set, 1.0)]
            };
            let (alpha, keys) = self.ftran(&coupling, &set_part);
            self.move_basics(&alpha, &keys, -value);
        }
        self.cols.push(coupling);
        self.set.push(set);
        self.obj.push(obj);
        self.lower.push(lower);
        self.upper.push(upper);
        self.x.push(value);
        self.col_pos.push(Pos::Nonbasic);
        j
    }

    /// Raises (or lowers) the right-hand side of row `i` by `delta`; the basic variables
    /// absorb it (`x_B += delta · B⁻¹ e_i`). O(m₁ · key entries).
    pub fn shift_rhs(&mut self, i: usize, delta: f64) {
        let (alpha, keys) = match self.rows[i] {
            Row::Coupling(k) => {
                self.rhs[k] += delta;
                self.ftran(&[(k, 1.0)], &[])
            }
            Row::Set(d) => {
                self.set_rhs[d] += delta;
                self.ftran(&[], &[(d, 1.0)])
            }
        };
        self.move_basics(&alpha, &keys, delta);
    }

    /// The value of column `j` at the last point. O(1).
    pub fn value(&self, j: usize) -> f64 {
        self.x[j]
    }

    /// The dual (shadow price) of row `i` at the last point, `≥ 0` at an optimum. O(1).
    pub fn dual(&self, i: usize) -> f64 {
        match self.rows[i] {
            Row::Coupling(k) => self.y[k],
            Row::Set(d) => self.u[d],
        }
    }

    /// `c·x` at the last point. O(columns).
    pub fn objective(&self) -> f64 {
        self.obj.iter().zip(&self.x).map(|(c, x)| c * x).sum()
    }

    fn get(&self, v: Var) -> f64 {
        match v {
            Var::Col(j) => self.x[j],
            Var::Slack(i) => self.slack[i],
            Var::SetSlack(d) => self.set_slack[d],
        }
    }

    fn set_value(&mut self, v: Var, value: f64) {
        match v {
            Var::Col(j) => self.x[j] = value,
            Var::Slack(i) => self.slack[i] = value,
            Var::SetSlack(d) => self.set_slack[d] = value,
        }
    }

    fn set_pos(&mut self, v: Var, p: Pos) {
        match v {
            Var::Col(j) => self.col_pos[j] = p,
            Var::Slack(i) => self.slack_pos[i] = p,
            Var::SetSlack(d) => self.set_slack_pos[d] = p,
        }
    }

    fn bounds(&self, v: Var) -> (f64, f64) {
        match v {
            Var::Col(j) => (self.lower[j], self.upper[j]),
            _ => (0.0, f64::INFINITY),
        }
    }

    fn cost(&self, v: Var) -> f64 {
        match v {
            Var::Col(j) => self.obj[j],
            _ => 0.0,
        }
    }

    /// The set of `v`, or `NONE`.
    fn set_of(&self, v: Var) -> usize {
        match v {
            Var::Col(j) => self.set[j],
            Var::Slack(_) => NONE,
            Var::SetSlack(d) => d,
        }
    }

    /// Calls `f(coupling row, coefficient)` for the coupling entries of `v`.
    fn for_coupling(&self, v: Var, mut f: impl FnMut(usize, f64)) {
        match v {
            Var::Col(j) => self.cols[j].iter().for_each(|&(i, a)| f(i, a)),
            Var::Slack(i) => f(i, 1.0),
            Var::SetSlack(_) => {}
        }
    }

    /// `W⁻¹ v` for the coupling vector `v` (repeated indices add). O(m₁ · distinct
    /// indices + entries): repeated indices are summed first when `v` is long (a refresh
    /// passes every key's entries, many on the same rows), so each column of `W⁻¹` is
    /// read once.
    fn solve_w(&self, v: &[(usize, f64)]) -> Vec<f64> {
        let m = self.rhs.len();
        let mut out = vec![0.0; m];
        let mut axpy = |r: usize, a: f64| {
            if a != 0.0 {
                for (o, b) in out.iter_mut().zip(&self.winv[r]) {
                    *o += a * b;
                }
            }
        };
        if v.len() > MERGE_ENTRIES {
            let mut acc = vec![0.0; m];
            for &(r, a) in v {
                acc[r] += a;
            }
            for (r, &a) in acc.iter().enumerate() {
                axpy(r, a);
            }
        } else {
            for &(r, a) in v {
                axpy(r, a);
            }
        }
        out
    }

    /// `B⁻¹ (r₁; r₂)` for a sparse coupling part `r₁` and set part `r₂`: the working
    /// variables' entries (by position) and the keys' (set, entry), sorted by set.
    /// O(m₁ · (entries + key entries) + m₁ log m₁).
    fn ftran(&self, r1: &[(usize, f64)], r2: &[(usize, f64)]) -> (Vec<f64>, Vec<(usize, f64)>) {
        let mut v: Vec<(usize, f64)> = r1.to_vec();
        for &(d, b) in r2 {
            self.for_coupling(self.key[d], |i, a| v.push((i, -a * b)));
        }
        let alpha = self.solve_w(&v);
        let keys = self.key_entries(&alpha, r2.to_vec());
        (alpha, keys)
    }

    /// The keys' entries of a direction whose working part is `alpha`: `r₂_d − Σ_{working
    /// v of d} alpha_v` per set, from the set part `r2`, sorted by set. O(m₁ + sets
    /// touched · log).
    fn key_entries(&self, alpha: &[f64], mut keys: Vec<(usize, f64)>) -> Vec<(usize, f64)> {
        for (p, &a) in alpha.iter().enumerate() {
            if a != 0.0 {
                let d = self.set_of(self.work[p]);
                if d != NONE {
                    keys.push((d, -a));
                }
            }
        }
        merge_sorted(keys)
    }

    /// The direction of the basic variables for entering variable `q`: `B⁻¹ a_q`, its
    /// working part `W⁻¹ (a_q − a_key)` from the cancelled column of [`Gub::w_column`].
    /// O(m₁ · entries).
    fn ftran_var(&self, q: Var) -> (Vec<f64>, Vec<(usize, f64)>) {
        let alpha = self.solve_w(&self.w_column(q));
        let d = self.set_of(q);
        let own = if d == NONE {
            Vec::new()
        } else {
            vec![(d, 1.0)]
        };
        let keys = self.key_entries(&alpha, own);
        (alpha, keys)
    }

    /// Adds `t` times the direction (`alpha`, `keys`) to the basic variables.
    fn move_basics(&mut self, alpha: &[f64], keys: &[(usize, f64)], t: f64) {
        for (p, &a) in alpha.iter().enumerate() {
            if a != 0.0 {
                let v = self.work[p];
                self.set_value(v, self.get(v) + t * a);
            }
        }
        for &(d, a) in keys {
            if a != 0.0 {
                let v = self.key[d];
                self.set_value(v, self.get(v) + t * a);
            }
        }
    }

    /// The working basis column of `v`, `a_v − a_key(set)`, sorted by row with the rows
    /// the two share cancelled (walks of one demand share most of their arcs, so this
    /// is often far shorter than the two together). O(entries · log entries).
    fn w_column(&self, v: Var) -> Vec<(usize, f64)> {
        let mut c: Vec<(usize, f64)> = Vec::new();
        self.for_coupling(v, |i, a| c.push((i, a)));
        let d = self.set_of(v);
        if d != NONE {
            self.for_coupling(self.key[d], |i, a| c.push((i, -a)));
        }
        let mut merged = merge_sorted(c);
        merged.retain(|&(_, a)| a != 0.0);
        merged
    }

    /// Recomputes the duals `y = W⁻ᵀ (c_W − c_key)` and `u_d = c_key(d) − a_key(d)·y`.
    /// O(m₁² + key entries).
    fn duals(&mut self) {
        let cw: Vec<f64> = self
            .work
            .iter()
            .map(|&v| {
                let d = self.set_of(v);
                self.cost(v)
                    - if d == NONE {
                        0.0
                    } else {
                        self.cost(self.key[d])
                    }
            })
            .collect();
        for r in 0..self.rhs.len() {
            self.y[r] = cw.iter().zip(&self.winv[r]).map(|(c, b)| c * b).sum();
        }
        self.set_duals();
    }

    /// `u_d = c_key(d) − a_key(d)·y` for every set, all current. O(key entries).
    fn set_duals(&mut self) {
        self.stamp += 1;
        for d in 0..self.u.len() {
            self.set_dual(d);
        }
    }

    /// `u_d = c_key(d) − a_key(d)·y` (any basic member of the set gives the same value),
    /// computed when stale. O(key entries).
    fn set_dual(&mut self, d: usize) -> f64 {
        if self.u_stamp[d] != self.stamp {
            let k = self.key[d];
            let mut v = self.cost(k);
            self.for_coupling(k, |i, a| v -= a * self.y[i]);
            self.u[d] = v;
            self.u_stamp[d] = self.stamp;
        }
        self.u[d]
    }

    /// The reduced cost of a nonbasic variable: `c_v − y·a_v − u_set(v)`. O(entries).
    fn reduced(&mut self, v: Var) -> f64 {
        let mut r = self.cost(v);
        self.for_coupling(v, |i, a| r -= a * self.y[i]);
        let d = self.set_of(v);
        if d != NONE {
            r -= self.set_dual(d);
        }
        r
    }

    /// Makes the working variable at position `p` (a member of set `d`) the key of `d`;
    /// the old key takes position `p`. Row `p` of `W⁻¹` becomes `−row p − Σ rows of the
    /// set's other working members` (the column operation `a_i − a_new = (a_i − a_old) −
    /// (a_new − a_old)` inverted). O(m₁ · working members of `d`).
    fn swap_key(&mut self, d: usize, p: usize) {
        let others: Vec<usize> = (0..self.work.len())
            .filter(|&i| i != p && self.set_of(self.work[i]) == d)
            .collect();
        for col in &mut self.winv {
            let mut v = -col[p];
            for &i in &others {
                v -= col[i];
            }
            col[p] = v;
        }
        let old = self.key[d];
        let new = self.work[p];
        self.key[d] = new;
        self.set_pos(new, Pos::Key);
        self.work[p] = old;
        self.set_pos(old, Pos::Work(p));
    }

    /// Re-optimises from the current basis and point. Errors when the model is
    /// unbounded or past [`COUPLING_ROWS`], the basis becomes singular, or `max_pivots`
    /// is exceeded (the caller then uses another backend), and with
    /// [`Error::Interrupted`] when an interrupt is asked for (polled before every pivot).
    pub fn solve(&mut self, max_pivots: usize) -> Result<()> {
        if self.invalid {
            return Err(Error::Solver(
                "gub simplex: a column outside GUB form".into(),
            ));
        }
        if self.rhs.len() > COUPLING_ROWS {
            return Err(Error::Solver("gub simplex: too many coupling rows".into()));
        }
        // The duals are current: rows and columns added since the last solve leave them
        // as they were (a new row's dual is 0), and `set_objective` recomputes them.
        pivoting::run(self, max_pivots, "gub simplex")
    }

    fn leaving_var(&self, leave: Leave) -> Var {
        match leave {
            Leave::Work(p) => self.work[p],
            Leave::Key(d) => self.key[d],
            Leave::Flip => unreachable!("a flip has no leaving variable"),
        }
    }
}

impl pivoting::Product for Gub {
    type Var = Var;
    fn slack_row(v: Var) -> Option<usize> {
        match v {
            Var::Slack(i) => Some(i),
            Var::Col(_) | Var::SetSlack(_) => None,
        }
    }
    fn slack(i: usize) -> Var {
        Var::Slack(i)
    }
    fn inverse(&mut self) -> &mut Vec<Vec<f64>> {
        &mut self.winv
    }
    /// The working basis column of `v` ([`Gub::w_column`]) through `W⁻¹`.
    fn alpha(&self, v: Var) -> Vec<f64> {
        self.solve_w(&self.w_column(v))
    }
}

impl Primal for Gub {
    type Var = Var;

    /// Recomputes the duals and the basic values from `W⁻¹`: O(m₁² + nonzeros). Returns
    /// the largest row residual relative to `max(1, |b|)`, with the recomputed values.
    fn refresh(&mut self) -> f64 {
        self.duals();
        // Right-hand sides net of nonbasic variables.
        let mut net = self.rhs.clone();
        let mut set_net = self.set_rhs.clone();
        for j in 0..self.cols.len() {
            if self.col_pos[j] == Pos::Nonbasic && self.x[j] != 0.0 {
                for &(i, a) in &self.cols[j] {
                    net[i] -= a * self.x[j];
                }
                if self.set[j] != NONE {
                    set_net[self.set[j]] -= self.x[j];
                }
            }
        }
        for ((n, &pos), &v) in net.iter_mut().zip(&self.slack_pos).zip(&self.slack) {
            if pos == Pos::Nonbasic {
                *n -= v;
            }
        }
        for ((n, &pos), &v) in set_net
            .iter_mut()
            .zip(&self.set_slack_pos)
            .zip(&self.set_slack)
        {
            if pos == Pos::Nonbasic {
                *n -= v;
            }
        }
        let r1: Vec<(usize, f64)> = net.iter().copied().enumerate().collect();
        let r2: Vec<(usize, f64)> = set_net.iter().copied().enumerate().collect();
        let (alpha, keys) = self.ftran(&r1, &r2);
        for (p, &a) in alpha.iter().enumerate() {
            self.set_value(self.work[p], a);
        }
        for (d, a) in keys {
            self.set_value(self.key[d], a);
        }
        // Residuals of every row with the recomputed values.
        let mut lhs = self.slack.clone();
        let mut set_lhs = self.set_slack.clone();
        for j in 0..self.cols.len() {
            for &(i, a) in &self.cols[j] {
                lhs[i] += a * self.x[j];
            }
            if self.set[j] != NONE {
                set_lhs[self.set[j]] += self.x[j];
            }
        }
        let rel = |(l, b): (&f64, &f64)| (l - b).abs() / b.abs().max(1.0);
        let a = lhs.iter().zip(&self.rhs).map(rel).fold(0.0, f64::max);
        let b = set_lhs
            .iter()
            .zip(&self.set_rhs)
            .map(rel)
            .fold(0.0, f64::max);
        a.max(b)
    }

    /// Rebuilds `W⁻¹` for the current working variables: product form from the identity,
    /// each non-slack working column pivoted at its largest entry among the positions still
    /// free. O(m₁² · non-slack working columns). A numerically singular `W` is an error.
    fn reinvert(&mut self) -> Result<()> {
        let m = self.rhs.len();
        let vars: Vec<Var> = self.work.clone();
        let work = pivoting::reinvert(self, m, &vars, "gub simplex")?;
        for i in 0..m {
            if self.slack_pos[i] != Pos::Nonbasic {
                self.slack_pos[i] = Pos::Nonbasic;
            }
        }
        for (p, &v) in work.iter().enumerate() {
            self.set_pos(v, Pos::Work(p));
        }
        self.work = work;
        Ok(())
    }

    fn entering(&mut self, bland: bool) -> Option<(Var, f64)> {
        Gub::entering(self, bland)
    }

    /// Ratio test over the entering variable's own range, the working variables and the
    /// keys; then the move, and the basis change: one eta step of `W⁻¹` when a working
    /// variable leaves (duals moved by `dq` times its new row), a key swap first when a
    /// key leaves (duals moved by `dq / key entry` times the old key's row of `B⁻¹`).
    /// O(m₁ · nonzeros of the pivot) plus the swap's O(m₁ · set members).
    fn pivot(&mut self, q: Var, dq: f64, bland: bool) -> Result<bool> {
        let dir = if dq > 0.0 { 1.0 } else { -1.0 };
        let (mut alpha, keys) = self.ftran_var(q);
        let (ql, qu) = self.bounds(q);
        let xq = self.get(q);
        let mut step = if dir > 0.0 { qu - xq } else { xq - ql };
        let mut leave = Leave::Flip;
        let mut leave_alpha = 0.0;
        let mut leave_at_upper = false;
        let candidates = alpha
            .iter()
            .enumerate()
            .map(|(p, &a)| (Leave::Work(p), self.work[p], a))
            .chain(keys.iter().map(|&(d, a)| (Leave::Key(d), self.key[d], a)));
        for (at, v, a) in candidates {
            if a.abs() < PIVOT_TOL {
                continue;
            }
            let Some((t, upper)) = pivoting::step_to_bound(self.get(v), self.bounds(v), a, dir)
            else {
                continue;
            };
            let tie = || {
                if bland {
                    index(v) < index(self.leaving_var(leave))
                } else {
                    a.abs() > leave_alpha
                }
            };
            if pivoting::replaces(t, step, leave == Leave::Flip, tie) {
                step = t;
                leave = at;
                leave_alpha = a.abs();
                leave_at_upper = upper;
            }
        }
        if !step.is_finite() {
            return Err(Error::Solver("gub simplex: unbounded master".into()));
        }
        let moved = step > 0.0;
        if moved {
            self.move_basics(&alpha, &keys, -dir * step);
            self.set_value(q, xq + dir * step);
        }
        if leave == Leave::Flip {
            self.set_value(q, if dir > 0.0 { qu } else { ql });
            return Ok(moved);
        }
        let out = self.leaving_var(leave);
        let (l, u) = self.bounds(out);
        self.set_value(out, if leave_at_upper { u } else { l });
        match leave {
            Leave::Work(p) => {
                pivoting::eta(&mut self.winv, p, &alpha);
                self.work[p] = q;
                self.set_pos(q, Pos::Work(p));
                self.set_pos(out, Pos::Nonbasic);
                // Keys unchanged: y moves by dq · row p of the new W⁻¹.
                for r in 0..self.y.len() {
                    let b = self.winv[r][p];
                    if b != 0.0 {
                        self.y[r] += dq * b;
                    }
                }
                self.stamp += 1;
            }
            Leave::Key(d) => {
                // Another working member of d becomes the key; the old key takes
                // its position, where the entering variable's direction is the old
                // key's entry (the direction of each variable does not depend on
                // which member is the key).
                let key_entry = keys.iter().find(|&&(e, _)| e == d).map_or(0.0, |&(_, a)| a);
                // The duals move by dq / key_entry times the old key's row of B⁻¹,
                // whose coupling part is −Σ rows of W⁻¹ at the set's working members
                // (zero when the key is alone in its set).
                let members: Vec<usize> = (0..self.work.len())
                    .filter(|&i| self.set_of(self.work[i]) == d)
                    .collect();
                let member = members
                    .iter()
                    .copied()
                    .max_by(|&a, &b| alpha[a].abs().total_cmp(&alpha[b].abs()));
                if !members.is_empty() {
                    let t = dq / key_entry;
                    for (y, col) in self.y.iter_mut().zip(&self.winv) {
                        let rho: f64 = members.iter().map(|&i| col[i]).sum();
                        *y -= t * rho;
                    }
                }
                if let Some(p) = member {
                    self.swap_key(d, p);
                    alpha[p] = key_entry;
                    pivoting::eta(&mut self.winv, p, &alpha);
                    self.work[p] = q;
                    self.set_pos(q, Pos::Work(p));
                } else {
                    if self.set_of(q) != d {
                        return Err(Error::Solver("gub simplex: singular basis".into()));
                    }
                    self.key[d] = q;
                    self.set_pos(q, Pos::Key);
                }
                self.set_pos(out, Pos::Nonbasic);
                // Any basic member v of a set gives u_d = c_v − a_v·y (`set_dual`).
                self.stamp += 1;
            }
            Leave::Flip => unreachable!("handled above"),
        }
        Ok(moved)
    }

    fn pivots(&mut self) -> &mut usize {
        &mut self.pivots
    }
}

/// `(index, entry)` pairs sorted by index, entries of one index summed. O(n log n).
fn merge_sorted(mut keys: Vec<(usize, f64)>) -> Vec<(usize, f64)> {
    keys.sort_by_key(|&(d, _)| d);
    let mut merged: Vec<(usize, f64)> = Vec::with_capacity(keys.len());
    for (d, a) in keys {
        match merged.last_mut() {
            Some((e, b)) if *e == d => *b += a,
            _ => merged.push((d, a)),
        }
    }
    merged
}

mod pricing;
use pricing::index;

#[cfg(test)]
mod tests;
