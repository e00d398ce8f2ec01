//! What the two warm bounded primal simplices share ([`super::simplex::Simplex`], a dense
//! basis inverse; [`super::gub::Gub`], generalised upper bounds with a dense inverse of
//! the working basis): the solve loop with its refresh cadence and anti-cycling switch
//! ([`run`] over [`Primal`]), the ratio test's step of one basic variable to its bound
//! ([`step_to_bound`], [`replaces`]), and the explicit inverse's eta update and its
//! re-inversion in product form ([`eta`], [`reinvert`] over [`Product`]).

use super::cancel;
use crate::error::{Error, Result};
use crate::tol::{SIMPLEX_DRIFT_TOL, SIMPLEX_PIVOT_TOL as PIVOT_TOL};

/// Pivots between recomputations of duals and primal values from the inverse.
pub const REFRESH: usize = 100;
/// Degenerate pivots in a row before Bland's rule takes over.
pub const DEGENERATE: usize = 50;

/// A bounded primal simplex as [`run`] drives it.
pub(super) trait Primal {
    type Var: Copy;
    /// Recomputes duals and basic values from the inverse; the largest relative row
    /// residual with the recomputed values.
    fn refresh(&mut self) -> f64;
    /// Rebuilds the inverse for the current basis; an error when it is singular.
    fn reinvert(&mut self) -> Result<()>;
    /// The entering variable and its reduced cost (Bland's rule when `bland`), `None`
    /// when no variable may improve the objective.
    fn entering(&mut self, bland: bool) -> Option<(Self::Var, f64)>;
    /// One pivot (or bound flip) bringing in `q` with reduced cost `d`: ratio test, point
    /// update, basis and dual update. `Ok(true)` when the point moved.
    fn pivot(&mut self, q: Self::Var, d: f64, bland: bool) -> Result<bool>;
    /// Pivots and bound flips done so far.
    fn pivots(&mut self) -> &mut usize;
}

/// Re-optimises `s` from its current basis and point: pivots until no variable enters,
/// confirmed by values and duals recomputed from the inverse (and every [`REFRESH`]
/// pivots; a residual past [`SIMPLEX_DRIFT_TOL`] re-inverts), Bland's rule after
/// [`DEGENERATE`] degenerate pivots in a row until one makes progress. Errors when
/// `max_pivots` is exceeded (named `what`), when a pivot or re-inversion fails, and with
/// [`Error::Interrupted`] when an interrupt is asked for (polled before every pivot).
/// Cost: the pivots', plus O(refresh) per [`REFRESH`] pivots.
pub(super) fn run<S: Primal>(s: &mut S, max_pivots: usize, what: &str) -> Result<()> {
    let start = *s.pivots();
    let mut degenerate = 0usize;
    let mut since_refresh = 0usize;
    let mut refreshed = false;
    loop {
        cancel::check()?;
        if since_refresh >= REFRESH {
            since_refresh = 0;
            confirm(s)?;
        }
        let bland = degenerate >= DEGENERATE;
        let Some((q, d)) = s.entering(bland) else {
            if refreshed {
                return Ok(());
            }
            // Optimal by the running values: confirm with values from the inverse.
            refreshed = true;
            since_refresh = 0;
            confirm(s)?;
            continue;
        };
        refreshed = false;
        if *s.pivots() - start >= max_pivots {
            return Err(Error::Solver(format!("{what}: pivot limit")));
        }
        if s.pivot(q, d, bland)? {
            degenerate = 0;
        } else {
            degenerate += 1;
        }
        *s.pivots() += 1;
        since_refresh += 1;
    }
}

/// Values and duals from the inverse; re-inverts (and recomputes) when they drifted.
fn confirm<S: Primal>(s: &mut S) -> Result<()> {
    if s.refresh() > SIMPLEX_DRIFT_TOL {
        s.reinvert()?;
        s.refresh();
    }
    Ok(())
}

/// How far the entering variable may move (in direction `dir`, ±1) before a basic
/// variable at `x` within `(l, u)`, moving by `−dir·a` per unit, reaches a bound: the
/// step and whether it is the upper bound; `None` when it never does. O(1).
pub(super) fn step_to_bound(x: f64, (l, u): (f64, f64), a: f64, dir: f64) -> Option<(f64, bool)> {
    let delta = -dir * a;
    if delta < 0.0 {
        Some((((x - l) / -delta).max(0.0), false))
    } else if u.is_finite() {
        Some((((u - x) / delta).max(0.0), true))
    } else {
        None
    }
}

/// Whether a basic variable reaching its bound after `t` becomes the leaving variable
/// when the step is `step` so far: a shorter step wins; on a tie it wins over the
/// entering variable's own bound (`first`: no basic variable chosen yet) when the step is
/// finite, and over the chosen basic variable when `tie()` says so. O(1).
pub(super) fn replaces(t: f64, step: f64, first: bool, tie: impl FnOnce() -> bool) -> bool {
    t < step || (t == step && if first { step.is_finite() } else { tie() })
}

/// Replaces the basic variable at position `p` of the explicit inverse `inv`
/// (column-major: `inv[r][p]` is row `p`, column `r`) by the variable whose column times
/// the old inverse is `alpha` (one eta step). O(m · columns with a nonzero at `p`).
pub(super) fn eta(inv: &mut [Vec<f64>], p: usize, alpha: &[f64]) {
    let nz: Vec<usize> = (0..alpha.len())
        .filter(|&i| i != p && alpha[i] != 0.0)
        .collect();
    let ap = alpha[p];
    for col in inv {
        let v = col[p];
        if v == 0.0 {
            continue;
        }
        let f = v / ap;
        for &i in &nz {
            col[i] -= alpha[i] * f;
        }
        col[p] = f;
    }
}

/// A simplex whose basis inverse is explicit and rebuilt in product form by [`reinvert`].
pub(super) trait Product {
    type Var: Copy;
    /// The row of `v` when `v` is that row's own slack, `None` for any other variable.
    fn slack_row(v: Self::Var) -> Option<usize>;
    /// The slack of row `i`.
    fn slack(i: usize) -> Self::Var;
    /// The inverse (column-major, as [`eta`] reads it).
    fn inverse(&mut self) -> &mut Vec<Vec<f64>>;
    /// `v`'s column times the current inverse.
    fn alpha(&self, v: Self::Var) -> Vec<f64>;
}

/// Rebuilds the `m × m` inverse of `s` for the basic variables `vars`: from the identity
/// (every row held by its slack), each variable of `vars` that is not a slack is pivoted
/// in at its largest entry among the positions still free (a slack of `vars` keeps its
/// own row). Returns the variable at each position; an error when the basis is
/// numerically singular (named `what`) or an interrupt is asked for (polled per column).
/// O(m² · non-slack variables).
pub(super) fn reinvert<S: Product>(
    s: &mut S,
    m: usize,
    vars: &[S::Var],
    what: &str,
) -> Result<Vec<S::Var>> {
    *s.inverse() = identity(m);
    let mut taken = vec![false; m];
    for &v in vars {
        if let Some(i) = S::slack_row(v) {
            taken[i] = true;
        }
    }
    let mut at: Vec<S::Var> = (0..m).map(S::slack).collect();
    for &v in vars {
        if S::slack_row(v).is_some() {
            continue;
        }
        // O(m²) per column: a large basis takes long enough to poll.
        cancel::check()?;
        let alpha = s.alpha(v);
        let best = largest_free(&alpha, &taken, what)?;
        taken[best] = true;
        eta(s.inverse(), best, &alpha);
        at[best] = v;
    }
    Ok(at)
}

/// The `m × m` identity, column-major. O(m²).
fn identity(m: usize) -> Vec<Vec<f64>> {
    (0..m)
        .map(|r| {
            let mut c = vec![0.0; m];
            c[r] = 1.0;
            c
        })
        .collect()
}

/// The position not yet `taken` where `alpha` is largest in magnitude: a re-inversion's
/// pivot for one basic column; an error when there is none of at least
/// [`PIVOT_TOL`] (a numerically singular basis, named `what`). O(m).
fn largest_free(alpha: &[f64], taken: &[bool], what: &str) -> Result<usize> {
    let best = (0..alpha.len())
        .filter(|&p| !taken[p])
        .max_by(|&a, &b| alpha[a].abs().total_cmp(&alpha[b].abs()).then(b.cmp(&a)));
    match best {
        Some(p) if alpha[p].abs() >= PIVOT_TOL => Ok(p),
        _ => Err(Error::Solver(format!("{what}: singular basis"))),
    }
}
