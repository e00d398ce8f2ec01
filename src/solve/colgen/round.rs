//! The steps of one round of a warm master, shared by the base walk engine
//! ([`super::warm`]), its headroom master ([`super::headroom`]) and the layered walk engine
//! of service chains ([`crate::solve::chainwalk`]): the master re-solved from where it
//! stopped ([`solve_round`]), and, for a master that holds the walks of inactive demands at
//! fixed flows, which inactive demands to free and which priced walks to add
//! ([`next_round`]).

use std::collections::HashSet;
use std::hash::{BuildHasher, Hash};

use super::pivot_budget;
use crate::error::Result;
use crate::solve::cancel;
use crate::tol::WALK_PRICE_TOL as PRICE_TOL;

/// The master solve of one round: checks for an interrupt, then, when the master has
/// `rows <= limit` rows and `needed` (it has columns), calls `solve` with the pivot budget
/// [`pivot_budget`]`(rows)`. `Ok(false)`: the master is abandoned (too many
/// rows, or the solve failed without an interrupt); `Err` on an interrupt.
/// Cost: that of `solve`.
pub(crate) fn solve_round(
    rows: usize,
    limit: usize,
    needed: bool,
    solve: impl FnOnce(usize) -> Result<()>,
) -> Result<bool> {
    cancel::check()?;
    if rows > limit {
        return Ok(false);
    }
    if needed && solve(pivot_budget(rows)).is_err() {
        // An interrupt ends the scenario; any other failure abandons the master.
        cancel::check()?;
        return Ok(false);
    }
    Ok(true)
}

/// The inactive demands whose share of the duality gap exceeds the tolerance (the rule of
/// [`next_round`]), each with its share relative to `max(cap(d), Σ_w f_w)`, in index
/// order. Used alone by a master that must not free every demand when nothing else moves
/// (the plan master, whose stop is "nothing new"). Cost: O(Σ fixed walks · cost of
/// `price` + demands).
pub(crate) fn gap_shares<W>(
    inactive_cap: impl Fn(usize) -> Option<f64>,
    fixed: &[Vec<(W, f64)>],
    price: impl Fn(&W) -> f64,
    cost: &[f64],
) -> Vec<(f64, usize)> {
    let mut wake: Vec<(f64, usize)> = Vec::new();
    for (d, walks) in fixed.iter().enumerate() {
        let Some(cap) = inactive_cap(d) else {
            continue;
        };
        let (mut share, mut f_d) = (0.0, 0.0);
        for (w, f) in walks {
            share += f * price(w);
            f_d += f;
        }
        if cost[d].is_finite() {
            share += cap * (1.0 - cost[d]).max(0.0);
        }
        share -= f_d;
        let scale = cap.max(f_d);
        if share > PRICE_TOL * scale {
            wake.push((share / scale, d));
        }
    }
    wake
}

/// The inactive demands to free after one pricing pass, and the priced walks not yet in
/// the master (`seen`), in the order they came.
///
/// Demand `d` (with `inactive_cap(d) = Some(cap(d))`: inactive and in the LP, with its
/// cap) is freed when its share of the duality gap,
/// `Σ_w f_w · price(w) + cap(d) · max(0, 1 − cost[d]) − Σ_w f_w` over its
/// fixed walks `fixed[d]` (`cost[d]`: its cheapest walk at the round's prices, infinite
/// when unreachable), exceeds [`PRICE_TOL`]` · max(cap(d), Σ_w f_w)`. When nothing is
/// freed and no walk is new, the rest of the gap is spread thinner than the tolerance and
/// every inactive demand is freed; `None` when there is none (the master is stalled). With `most`, at most that many
/// demands are freed (the largest shares relative to `max(cap(d), Σ_w f_w)`, ties by
/// index), in index order.
///
/// Invariant: each freed demand's share is computed at the same prices as `cost`.
/// Cost: O(Σ fixed walks · cost of `price` + demands + priced walks).
pub(crate) fn next_round<W: Eq + Hash, F, S: BuildHasher>(
    inactive_cap: impl Fn(usize) -> Option<f64>,
    fixed: &[Vec<(F, f64)>],
    price: impl Fn(&F) -> f64,
    cost: &[f64],
    priced: Vec<W>,
    seen: &HashSet<W, S>,
    most: Option<usize>,
) -> Option<(Vec<usize>, Vec<W>)> {
    let mut wake = gap_shares(&inactive_cap, fixed, price, cost);
    if let Some(most) = most
        && wake.len() > most
    {
        // The largest shares relative to the demand's size, ties by index; freed in index
        // order.
        wake.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        wake.truncate(most);
        wake.sort_by_key(|&(_, d)| d);
    }
    let mut wake: Vec<usize> = wake.into_iter().map(|(_, d)| d).collect();
    let fresh: Vec<W> = priced.into_iter().filter(|w| !seen.contains(w)).collect();
    if fresh.is_empty() && wake.is_empty() {
        wake = (0..fixed.len())
            .filter(|&d| inactive_cap(d).is_some())
            .collect();
        if wake.is_empty() {
            return None;
        }
    }
    Some((wake, fresh))
}

/// The demand prices and the value of one round of a master that holds the walks of
/// inactive demands at fixed flows: per demand `d`, `dual(d)` (its cap row's price) when
/// `active[d]`, else `+∞` (a held demand cannot take more flow, so pricing offers it
/// nothing); and the master's `objective` plus every fixed flow. O(demands + fixed walks).
pub(crate) fn held_prices<W>(
    active: &[bool],
    dual: impl Fn(usize) -> f64,
    objective: f64,
    fixed: &[Vec<(W, f64)>],
) -> (Vec<f64>, f64) {
    let u: Vec<f64> = (0..active.len())
        .map(|d| if active[d] { dual(d) } else { f64::INFINITY })
        .collect();
    let fixed_total: f64 = fixed.iter().flatten().map(|(_, f)| f).sum();
    (u, objective + fixed_total)
}

/// Every walk of such a master with its flow: the columns `walks` at `value(j)` (cut at 0),
/// then the fixed walks at their flows. O(walks).
pub(crate) fn with_held<W>(
    mut walks: Vec<W>,
    value: impl Fn(usize) -> f64,
    fixed: Vec<Vec<(W, f64)>>,
) -> (Vec<W>, Vec<f64>) {
    let mut flow: Vec<f64> = (0..walks.len()).map(|j| value(j).max(0.0)).collect();
    for (w, f) in fixed.into_iter().flatten() {
        walks.push(w);
        flow.push(f);
    }
    (walks, flow)
}
