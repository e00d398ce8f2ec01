//! The restricted master of the layered walk engine on the warm simplex: walks as
//! columns, rows created as columns need them, inactive demands held at fixed flows, and
//! the rounds of master solve, pricing and activation until the dual bound meets the
//! master's value.

use std::collections::BTreeMap;

use super::hash::WordSet;

use super::rows::{Coefs, RowKey, Rows};
use super::{ChainWalk, GAP_TOL, MAX_ROUNDS, MAX_WAKE, NONE, Solved, WARM_ROWS};
use crate::error::Result;
use crate::model::FunctionIdx;
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;

use crate::solve::colgen::{Stats, round};
use crate::solve::simplex::Simplex;

/// The restricted master on the warm simplex: rows created as columns need them. Only
/// *active* demands have columns; the walks of an inactive demand stay at their start flow
/// outside the LP, and each row holds what those fixed walks leave (`rhs − fixed load`). A
/// demand is activated when its share of the duality gap, `Σ_w f_w · price(w) +
/// b_d · max(0, 1 − π_d) − Σ_w f_w`, is positive: its walks become columns at their flows
/// and the rows get their load back, which leaves every basic value unchanged (the scheme
/// of the base engine's warm master). The bound of [`Rows::price`] is valid for any
/// prices, so when it meets the master's value plus the fixed flow, the whole allocation
/// is optimal.
pub(super) struct Master<'r, 'a> {
    pub(super) rows: &'r Rows<'a>,
    pub(super) lp: Simplex,
    /// Per dense row index ([`Rows::index`]): its LP row (`NONE`: not created yet).
    pub(super) row: Vec<usize>,
    /// The LP's columns, in column order.
    pub(super) walks: Vec<ChainWalk>,
    /// Per column: its walk's coefficients.
    pub(super) col_coefs: Vec<Coefs>,
    pub(super) seen: WordSet<ChainWalk>,
    pub(super) active: Vec<bool>,
    /// Per inactive demand: its fixed walks (with their coefficients) and flows.
    pub(super) fixed: Vec<Vec<((ChainWalk, Coefs), f64)>>,
    /// Per dense row index: the load of the fixed walks.
    pub(super) fixed_load: Vec<f64>,
}

impl<'r, 'a> Master<'r, 'a> {
    /// An empty master whose active demands are `active`.
    pub(super) fn new(rows: &'r Rows<'a>, active: Vec<bool>) -> Self {
        Master {
            rows,
            lp: Simplex::new(),
            row: vec![NONE; rows.len()],
            walks: Vec::new(),
            col_coefs: Vec::new(),
            seen: WordSet::default(),
            fixed: vec![Vec::new(); active.len()],
            active,
            fixed_load: vec![0.0; rows.len()],
        }
    }

    /// Adds walk `w` at flow `f` (skipped when already present): a column when its demand
    /// is active, else a fixed walk; `cs`: its coefficients when known (computed
    /// otherwise). The caller keeps the point feasible and adds fixed walks before columns.
    /// O(rows · walk length) for the basis update.
    pub(super) fn add(&mut self, w: ChainWalk, f: f64, cs: Option<Coefs>) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        let cs = cs.unwrap_or_else(|| self.rows.coefs(&w));
        if !self.active[w.demand] {
            for &(key, c) in cs.iter() {
                self.fixed_load[self.rows.index(key)] += c * f;
            }
            self.fixed[w.demand].push(((w, cs), f));
            return;
        }
        self.column(w, f, cs);
    }

    /// The column of walk `w` (active demand, coefficients `cs`) at flow `f`, with the rows
    /// it needs (each created holding what the fixed walks leave).
    pub(super) fn column(&mut self, w: ChainWalk, f: f64, cs: Coefs) {
        let mut entries = Vec::new();
        for &(key, c) in cs.iter() {
            let i = self.rows.index(key);
            if self.row[i] == NONE {
                let fixed = self.fixed_load[i];
                self.row[i] = self.lp.add_row((self.rows.rhs(key) - fixed).max(0.0), &[]);
            }
            entries.push((self.row[i], c));
        }
        self.lp.add_col(1.0, 0.0, f64::INFINITY, f, entries);
        self.walks.push(w);
        self.col_coefs.push(cs);
    }

    /// Makes demand `d` active: its fixed walks become columns at their flows, each
    /// existing row first getting the walk's load back (no basic value moves).
    pub(super) fn activate(&mut self, d: usize) {
        self.active[d] = true;
        for ((w, cs), f) in std::mem::take(&mut self.fixed[d]) {
            for &(key, c) in cs.iter() {
                let i = self.rows.index(key);
                self.fixed_load[i] -= c * f;
                if self.row[i] != NONE {
                    self.lp.shift_rhs(self.row[i], c * f);
                }
            }
            self.column(w, f, cs);
        }
    }

    pub(super) fn dual(&self, key: RowKey) -> f64 {
        match self.row[self.rows.index(key)] {
            NONE => 0.0,
            r => self.lp.dual(r).max(0.0),
        }
    }

    /// Rounds of master solve, pricing and activation until the dual bound meets the
    /// master's value plus the fixed flow within [`GAP_TOL`]; `None` when the simplex
    /// fails, the master outgrows [`WARM_ROWS`], nothing enters while the gap is open, or
    /// after [`MAX_ROUNDS`].
    pub(super) fn run(mut self, stats: &mut Stats) -> Result<Option<Solved>> {
        let net = self.rows.net;
        let layered = self.rows.layered;
        for _ in 0..MAX_ROUNDS {
            let (rows, cols) = (self.lp.rows(), self.lp.cols());
            let solved = round::solve_round(rows, WARM_ROWS, cols > 0, |pivots| {
                stats.lp_solves += 1;
                stats.max_columns = stats.max_columns.max(self.walks.len());
                self.lp.solve(pivots)
            })?;
            if !solved {
                return Ok(None);
            }
            let y: Vec<f64> = (0..net.arcs.len())
                .map(|a| self.dual(RowKey::Arc(a)))
                .collect();
            let z: BTreeMap<(SiteIdx, FunctionIdx), f64> = layered
                .function_cap
                .keys()
                .map(|&(v, f)| ((v, f), self.dual(RowKey::Function(v, f))))
                .collect();
            let (u, value) = round::held_prices(
                &self.active,
                |d| self.dual(RowKey::Demand(d)),
                self.lp.objective(),
                &self.fixed,
            );
            stats.rounds += 1;
            let p = self.rows.price(&y, &z, Some(&u));
            if p.bound - value <= GAP_TOL * self.rows.scale {
                stats.generated += 1;
                let lp = &self.lp;
                // Columns first, then the fixed walks in order, as `with_held` lists them.
                let mut coefs = self.col_coefs;
                let fixed: Vec<Vec<(ChainWalk, f64)>> = (self.fixed.into_iter())
                    .map(|held| {
                        (held.into_iter())
                            .map(|((w, cs), f)| {
                                coefs.push(cs);
                                (w, f)
                            })
                            .collect()
                    })
                    .collect();
                let held = round::with_held(self.walks, |j| lp.value(j), fixed);
                return Ok(Some(Solved::with(held, y, z, Some(coefs))));
            }
            // Inactive demands whose share of the gap is positive, and the new walks.
            let price_of = |(_, cs): &(ChainWalk, Coefs)| -> f64 {
                cs.iter()
                    .map(|&(key, c)| {
                        c * match key {
                            RowKey::Arc(a) => y[a],
                            RowKey::Function(v, f) => z.get(&(v, f)).copied().unwrap_or(0.0),
                            RowKey::Demand(_) => 0.0,
                        }
                    })
                    .sum()
            };
            let (active, group_of) = (&self.active, &self.rows.group_of);
            let Some((wake, fresh)) = round::next_round(
                |d| (!active[d] && group_of[d] != NONE).then(|| layered.bound[d]),
                &self.fixed,
                price_of,
                &p.cost,
                p.walks,
                &self.seen,
                Some(MAX_WAKE),
            ) else {
                return Ok(None);
            };
            for d in wake {
                self.activate(d);
            }
            for w in fresh {
                self.add(w, 0.0, None);
            }
        }
        Ok(None)
    }
}
