//! HiGHS (the open-source C++ LP solver, through the `highs` crate) as an LP backend, built
//! only with the cargo feature `highs`.
//!
//! Two uses, both inside `solve/` (nothing else names HiGHS):
//! - [`Highs`]: a cold [`Backend`] (dual simplex on the [`Scaling`]-scaled model, like the
//!   other backends), the first rung of [`super::HIGHS_LADDER`], the ladder every verified solve
//!   climbs when the feature is on (unless [`set_enabled`] turned it off).
//! - [`WarmLp`]: an LP kept inside one HiGHS instance between solves, for the walk
//!   engine's restricted masters of any size: rows and columns are added to the solved
//!   model and it is re-solved from its last basis (a new column enters nonbasic at 0, a
//!   new row with its slack basic), so a round of column generation costs a few pivots.
//!
//! Both stop within one simplex iteration of Ctrl-C: every HiGHS instance carries the
//! user interrupt callback [`stop_when_asked`], which reads [`cancel::requested`]; the
//! abandoned solve returns [`Error::Interrupted`], so nothing half-solved is journaled.
//!
//! Neither is trusted: every answer goes through the same residual, repair and dual-bound
//! checks as any backend's ([`super::verify`], [`super::certify`]).
//!
//! Sign convention (the project's, see [`LpSolution`]): a row price is d objective / d rhs
//! in the model's own sense. HiGHS reports row and column duals as the gradient of the
//! objective it optimises, so the same convention holds for a maximisation and a
//! minimisation; the unit tests check it on hand-solved LPs of each sense and row kind.

use std::ffi::{c_char, c_int, c_void};
use std::sync::atomic::{AtomicBool, Ordering};

use highs::{ColProblem, HighsModelStatus, Model, SolvedModel};

use super::cancel;
use super::lp::{Backend, Lp, LpSolution, Sense, scaled};
use super::simplex::Column;
use crate::error::{Error, Result};

/// Whether HiGHS is used (on unless [`set_enabled`] turned it off).
static ENABLED: AtomicBool = AtomicBool::new(true);

/// Turns HiGHS on or off for the whole process: off, every solve takes the pure-Rust path
/// of the default build ([`super::LADDER`], the warm simplex and the cold interior-point
/// masters), so a bench or a test can put both builds' answers side by side in one run.
pub fn set_enabled(on: bool) {
    ENABLED.store(on, Ordering::Relaxed);
}

/// Whether HiGHS is used ([`set_enabled`]). O(1).
pub fn enabled() -> bool {
    ENABLED.load(Ordering::Relaxed)
}

/// HiGHS's dual simplex, solved cold on the scaled model.
#[derive(Debug, Clone, Copy)]
pub struct Highs;

/// The HiGHS backend.
pub const HIGHS: Highs = Highs;

/// Options every HiGHS instance of this crate runs with: quiet, simplex (strategy 1: dual),
/// one thread (the audit already runs one outage per core), and feasibility tolerances
/// tighter than HiGHS's default 1e-7, so that the answers usually pass the residual check
/// ([`crate::tol::RESIDUAL_TOL`]) on the first rung.
fn configure(model: &mut Model) {
    watch_interrupts(model);
    model.make_quiet();
    model.set_option("solver", "simplex");
    model.set_option("simplex_strategy", 1);
    model.set_option("threads", 1);
    model.set_option("primal_feasibility_tolerance", 1e-9);
    model.set_option("dual_feasibility_tolerance", 1e-9);
}

/// HiGHS's user callback: called by the simplex once per iteration (and by the interior
/// point once per iteration), it asks HiGHS to stop when [`cancel::requested`]; HiGHS then
/// returns with model status `Interrupt`, which [`interrupted_or`] turns into
/// [`Error::Interrupted`]. O(1): one atomic load. Reads nothing behind its pointers but
/// `data_in`, which HiGHS passes valid for the call.
unsafe extern "C" fn stop_when_asked(
    kind: c_int,
    _message: *const c_char,
    _data_out: *const highs_sys::HighsCallbackDataOut,
    data_in: *mut highs_sys::HighsCallbackDataIn,
    _user: *mut c_void,
) {
    let interrupt_kind = kind == highs_sys::kHighsCallbackSimplexInterrupt
        || kind == highs_sys::kHighsCallbackIpmInterrupt;
    if interrupt_kind && !data_in.is_null() && cancel::requested() {
        // SAFETY: HiGHS passes a live `HighsCallbackDataIn` for the duration of the call.
        unsafe { (*data_in).user_interrupt = 1 };
    }
}

/// Installs [`stop_when_asked`] on `model`'s HiGHS instance for the simplex and interior
/// point iterations, so that Ctrl-C stops a long solve within one iteration instead of at
/// its end. The callback holds no state (its user pointer is null), and it stays with the
/// instance through every solve and edit of a [`WarmLp`]. O(1).
fn watch_interrupts(model: &mut Model) {
    let highs = model.as_mut_ptr();
    // SAFETY: `highs` is the live HiGHS instance owned by `model`; the callback is a plain
    // function with no captured state, and its user data pointer is null.
    let ok = unsafe {
        highs_sys::Highs_setCallback(highs, Some(stop_when_asked), std::ptr::null_mut()) == 0
            && highs_sys::Highs_startCallback(highs, highs_sys::kHighsCallbackSimplexInterrupt) == 0
            && highs_sys::Highs_startCallback(highs, highs_sys::kHighsCallbackIpmInterrupt) == 0
    };
    debug_assert!(ok, "HiGHS accepts the interrupt callback");
}

/// `Error::Interrupted` when a stop was asked for (HiGHS gave up because of it, or its
/// answer is no longer wanted), else the solver error `what`.
fn interrupted_or(what: String) -> Error {
    match cancel::check() {
        Err(e) => e,
        Ok(()) => Error::Solver(what),
    }
}

/// The row bounds of a row of sense `sense` and right-hand side `rhs`.
fn row_bounds(sense: Sense, rhs: f64) -> (f64, f64) {
    match sense {
        Sense::Le => (f64::NEG_INFINITY, rhs),
        Sense::Ge => (rhs, f64::INFINITY),
        Sense::Eq => (rhs, rhs),
    }
}

/// Whether a finished HiGHS run reached an optimum (or had nothing to solve); else the
/// error to report: [`Error::Interrupted`] when a stop was asked for, else
/// [`Error::Solver`] naming the model status. Reads HiGHS's raw status constant: the
/// `highs` crate's `HighsModelStatus` has no value for an interrupted run (status 17) and
/// panics on it. O(1).
fn check_optimal(solved: &SolvedModel) -> Result<()> {
    // SAFETY: the pointer is the live HiGHS instance owned by `solved`.
    let status = unsafe { highs_sys::Highs_getModelStatus(solved.as_ptr()) };
    if status == highs_sys::kHighsModelStatusOptimal
        || status == highs_sys::kHighsModelStatusModelEmpty
    {
        return Ok(());
    }
    let what = match status {
        highs_sys::kHighsModelStatusInterrupt => "interrupted".to_string(),
        other => match HighsModelStatus::try_from(other) {
            Ok(known) => format!("{known:?}"),
            Err(_) => format!("model status {other}"),
        },
    };
    Err(interrupted_or(format!("highs: {what}")))
}

/// Maps a finished HiGHS run to its model, or to the error of [`check_optimal`].
fn optimal(solved: SolvedModel) -> Result<SolvedModel> {
    check_optimal(&solved).map(|()| solved)
}

/// Solves `lp` (already scaled) with HiGHS's dual simplex from scratch. Row prices are
/// HiGHS's row duals; the price of a finite upper bound is the column's dual when the
/// column sits at that bound (nearer to it than to its lower bound), else 0.
/// O(one simplex solve).
fn solve_cold(lp: &Lp) -> Result<LpSolution> {
    let mut pb = ColProblem::new();
    let rows: Vec<highs::Row> = lp
        .rows
        .iter()
        .map(|r| {
            let (lo, hi) = row_bounds(r.sense, r.rhs);
            pb.add_row(lo..=hi)
        })
        .collect();
    let mut cols: Vec<Vec<(highs::Row, f64)>> = vec![Vec::new(); lp.num_vars()];
    for (i, r) in lp.rows.iter().enumerate() {
        for &(j, a) in &r.coeffs {
            cols[j].push((rows[i], a));
        }
    }
    for (j, entries) in cols.iter().enumerate() {
        pb.add_column(lp.objective[j], lp.lower[j]..=lp.upper[j], entries);
    }
    let sense = if lp.maximise {
        highs::Sense::Maximise
    } else {
        highs::Sense::Minimise
    };
    let mut model =
        Model::try_new(pb).map_err(|e| Error::Solver(format!("highs: invalid model ({e:?})")))?;
    model.set_sense(sense);
    configure(&mut model);
    let solved = model
        .try_solve()
        .map_err(|e| interrupted_or(format!("highs: {e:?}")))?;
    let solved = optimal(solved)?;
    let sol = solved.get_solution();
    let x = sol.columns().to_vec();
    let upper_duals = x
        .iter()
        .zip(sol.dual_columns())
        .enumerate()
        .map(|(j, (&v, &d))| {
            let (lo, hi) = (lp.lower[j], lp.upper[j]);
            let at_upper = hi.is_finite() && (hi - v).abs() <= (v - lo).abs();
            if at_upper { d } else { 0.0 }
        })
        .collect();
    let objective = lp.objective.iter().zip(&x).map(|(c, v)| c * v).sum();
    Ok(LpSolution {
        x,
        duals: sol.dual_rows().to_vec(),
        upper_duals,
        objective,
    })
}

impl Backend for Highs {
    fn name(&self) -> &'static str {
        "highs"
    }

    fn solve(&self, lp: &Lp) -> Result<LpSolution> {
        scaled(lp, solve_cold)
    }
}

/// The state of a [`WarmLp`]'s HiGHS instance: being edited, or solved (its solution read
/// out). Editing a solved model converts it back without losing its basis.
enum State {
    Editing(Model),
    Solved(SolvedModel),
    /// Only while a conversion is in progress.
    Gone,
}

/// A maximisation `max c·x` over `≤` rows and column bounds, kept in one HiGHS instance
/// and re-solved from its last basis after rows and columns are added (the API of the
/// walk engine's warm master: rows first with their right-hand side, columns with their
/// entries). The values and duals are those of the last [`WarmLp::solve`].
pub struct WarmLp {
    state: State,
    rows: Vec<highs::Row>,
    rhs: Vec<f64>,
    cols: usize,
    obj: Vec<f64>,
    x: Vec<f64>,
    y: Vec<f64>,
}

impl Default for WarmLp {
    fn default() -> Self {
        WarmLp::new()
    }
}

impl WarmLp {
    /// An empty maximisation.
    pub fn new() -> WarmLp {
        let mut model = Model::new(ColProblem::new());
        model.set_sense(highs::Sense::Maximise);
        configure(&mut model);
        // A warm re-solve starts from the basis; presolve would discard it.
        model.set_option("presolve", "off");
        WarmLp {
            state: State::Editing(model),
            rows: Vec::new(),
            rhs: Vec::new(),
            cols: 0,
            obj: Vec::new(),
            x: Vec::new(),
            y: Vec::new(),
        }
    }

    pub fn rows(&self) -> usize {
        self.rows.len()
    }

    pub fn cols(&self) -> usize {
        self.cols
    }

    /// The model, ready for an edit (a solved model keeps its basis through the
    /// conversion).
    fn model(&mut self) -> &mut Model {
        if let State::Solved(_) = self.state {
            let State::Solved(s) = std::mem::replace(&mut self.state, State::Gone) else {
                unreachable!("matched above")
            };
            self.state = State::Editing(Model::from(s));
        }
        match &mut self.state {
            State::Editing(m) => m,
            _ => unreachable!("a WarmLp is always editing or solved"),
        }
    }

    /// Adds the empty row `0 ≤ rhs` (its coefficients come with the columns added after
    /// it; `entries` must be empty, the argument keeps [`crate::solve::simplex::Simplex`]'s
    /// signature); returns its index. O(1).
    pub fn add_row(&mut self, rhs: f64, entries: &[(usize, f64)]) -> usize {
        debug_assert!(entries.is_empty(), "WarmLp rows are added empty");
        let i = self.rows.len();
        let row = self
            .model()
            .add_row(f64::NEG_INFINITY..=rhs, std::iter::empty());
        self.rows.push(row);
        self.rhs.push(rhs);
        self.y.push(0.0);
        i
    }

    /// Adds column `c` with entries (row, coefficient). HiGHS places it nonbasic at a
    /// bound; `c.value` is its value until the next solve. Returns its index. O(entries).
    pub fn add_col(&mut self, c: Column, entries: Vec<(usize, f64)>) -> usize {
        let rows: Vec<(highs::Row, f64)> =
            entries.iter().map(|&(i, a)| (self.rows[i], a)).collect();
        self.model().add_col(c.obj, c.lower..=c.upper, rows);
        self.cols += 1;
        self.obj.push(c.obj);
        self.x.push(c.value);
        self.cols - 1
    }

    /// Moves the right-hand side of row `i` by `delta`. O(1) here; the next solve
    /// repairs primal feasibility from the kept basis.
    pub fn shift_rhs(&mut self, i: usize, delta: f64) {
        self.rhs[i] += delta;
        let rhs = self.rhs[i];
        let model = self.model();
        // SAFETY: the pointer is the live HiGHS instance owned by `model`; row `i` exists.
        let status = unsafe {
            highs_sys::Highs_changeRowBounds(
                model.as_mut_ptr(),
                i as highs_sys::HighsInt,
                f64::NEG_INFINITY,
                rhs,
            )
        };
        debug_assert_eq!(status, 0, "Highs_changeRowBounds");
    }

    /// Re-optimises from the last basis (dual simplex; primal simplex when only new
    /// columns price out, as HiGHS chooses). Errors when HiGHS does not report an optimum
    /// ([`Error::Interrupted`] when Ctrl-C stopped it between two iterations).
    /// `_max_pivots` is accepted for the warm simplex's interface; HiGHS runs to its end.
    pub fn solve(&mut self, _max_pivots: usize) -> Result<()> {
        self.model();
        let State::Editing(model) = std::mem::replace(&mut self.state, State::Gone) else {
            unreachable!("model() leaves it editing")
        };
        let solved = model
            .try_solve()
            .map_err(|e| interrupted_or(format!("highs: {e:?}")))?;
        if let Err(e) = check_optimal(&solved) {
            self.state = State::Solved(solved);
            return Err(e);
        }
        let sol = solved.get_solution();
        self.state = State::Solved(solved);
        self.x = sol.columns().to_vec();
        self.y = sol.dual_rows().to_vec();
        Ok(())
    }

    super::simplex::point_accessors!();
}

#[cfg(test)]
mod tests {
    use super::*;

    /// max 3x + 2y, x + y ≤ 4, x + 3y ≤ 9, x ≤ 3 (hand calculation: the vertices are
    /// (0,0), (3,0), (3,1), (1.5,2.5), (0,3); the objective is largest at (3,1), value 11).
    /// Row 1 binds with price 2 (one more unit of it is one more unit of y), row 2 is slack
    /// (price 0), the bound x ≤ 3 has price 3 − 2 = 1.
    #[test]
    fn maximise_le_rows_and_bound() {
        let mut lp = Lp::new(true);
        let x = lp.add_var(0.0, 3.0, 3.0);
        let y = lp.add_var(0.0, f64::INFINITY, 2.0);
        let r1 = lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Le, 4.0);
        let r2 = lp.add_row(vec![(x, 1.0), (y, 3.0)], Sense::Le, 9.0);
        let s = HIGHS.solve(&lp).unwrap();
        assert!((s.objective - 11.0).abs() < 1e-9, "{}", s.objective);
        assert!((s.x[x] - 3.0).abs() < 1e-9 && (s.x[y] - 1.0).abs() < 1e-9);
        assert!((s.duals[r1] - 2.0).abs() < 1e-9, "{:?}", s.duals);
        assert!(s.duals[r2].abs() < 1e-9, "{:?}", s.duals);
        assert!((s.upper_duals[x] - 1.0).abs() < 1e-9, "{:?}", s.upper_duals);
        // Strong duality: 4·2 + 9·0 + 3·1 = 11.
        assert!((lp.dual_objective(&s) - 11.0).abs() < 1e-9);
    }

    /// min 2x + 5y, x + y ≥ 7 (hand calculation: all 7 units on the cheaper x, value 14;
    /// one more unit of the rhs costs 2).
    #[test]
    fn minimise_ge_row() {
        let mut lp = Lp::new(false);
        let x = lp.add_var(0.0, f64::INFINITY, 2.0);
        let y = lp.add_var(0.0, f64::INFINITY, 5.0);
        let r = lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Ge, 7.0);
        let s = HIGHS.solve(&lp).unwrap();
        assert!((s.objective - 14.0).abs() < 1e-9);
        assert!((s.x[x] - 7.0).abs() < 1e-9 && s.x[y].abs() < 1e-9);
        assert!((s.duals[r] - 2.0).abs() < 1e-9, "{:?}", s.duals);
    }

    /// min x + 4y, x + y = 5, x ≤ 3 (hand calculation: x takes the cheaper units up to its
    /// bound, x = 3, y = 2, value 11; one more unit of the equality costs 4, one more unit
    /// of x's bound saves 4 − 1 = 3, so its price is −3).
    #[test]
    fn minimise_equality_and_bound() {
        let mut lp = Lp::new(false);
        let x = lp.add_var(0.0, 3.0, 1.0);
        let y = lp.add_var(0.0, f64::INFINITY, 4.0);
        let r = lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Eq, 5.0);
        let s = HIGHS.solve(&lp).unwrap();
        assert!((s.objective - 11.0).abs() < 1e-9, "{}", s.objective);
        assert!((s.duals[r] - 4.0).abs() < 1e-9, "{:?}", s.duals);
        assert!((s.upper_duals[x] + 3.0).abs() < 1e-9, "{:?}", s.upper_duals);
    }

    /// max x + y, x + y ≤ 1, x + y ≥ 2: infeasible (hand check: no point meets both), so
    /// the backend reports an error instead of an answer.
    #[test]
    fn infeasible_is_an_error() {
        let mut lp = Lp::new(true);
        let x = lp.add_var(0.0, f64::INFINITY, 1.0);
        let y = lp.add_var(0.0, f64::INFINITY, 1.0);
        lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Le, 1.0);
        lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Ge, 2.0);
        assert!(HIGHS.solve(&lp).is_err());
    }

    /// A warm master grown in three steps (hand calculation at each step):
    /// 1. max a, a ≤ 4 (row 0): a = 4, value 4, price 1.
    /// 2. add b with entries in row 0 and a new row 1 (b ≤ 1), objective 2: the best is
    ///    b = 1, a = 3, value 5; row 0's price is 1 (one more unit goes to a), row 1's is
    ///    2 − 1 = 1.
    /// 3. raise row 0 by 2 (shift_rhs): a = 5, b = 1, value 7, prices unchanged.
    #[test]
    fn warm_lp_grows_and_resolves() {
        let mut w = WarmLp::new();
        let col = |obj: f64| Column::new(obj, 0.0, f64::INFINITY, 0.0);
        let r0 = w.add_row(4.0, &[]);
        let a = w.add_col(col(1.0), vec![(r0, 1.0)]);
        w.solve(100).unwrap();
        assert!((w.objective() - 4.0).abs() < 1e-9 && (w.dual(r0) - 1.0).abs() < 1e-9);
        let r1 = w.add_row(1.0, &[]);
        let b = w.add_col(col(2.0), vec![(r0, 1.0), (r1, 1.0)]);
        w.solve(100).unwrap();
        assert!((w.objective() - 5.0).abs() < 1e-9, "{}", w.objective());
        assert!((w.value(a) - 3.0).abs() < 1e-9 && (w.value(b) - 1.0).abs() < 1e-9);
        assert!((w.dual(r0) - 1.0).abs() < 1e-9 && (w.dual(r1) - 1.0).abs() < 1e-9);
        w.shift_rhs(r0, 2.0);
        w.solve(100).unwrap();
        assert!((w.objective() - 7.0).abs() < 1e-9, "{}", w.objective());
        assert!((w.value(a) - 5.0).abs() < 1e-9);
        assert_eq!((w.rows(), w.cols()), (2, 2));
    }
}
