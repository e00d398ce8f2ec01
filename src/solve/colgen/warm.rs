//! The warm restricted master: column generation whose master LP is kept between rounds
//! (`WarmMaster`), the project's bounded primal simplex or, with the `highs` feature and
//! above [`WARM_ROWS`], one HiGHS instance re-solved from its basis (`MasterLp`); new walks
//! enter at zero against the current duals.

use super::*;
use std::collections::HashSet;

use crate::error::Result;
use crate::solve::gub::Gub;
use crate::solve::simplex::{Column, Simplex};

/// The LP a [`WarmMaster`] keeps between rounds: a maximisation over `≤` rows (added empty,
/// their coefficients come with the columns) and bounded columns, re-solved from where the
/// last solve stopped.
pub(super) trait MasterLp {
    /// Rows above which the master is abandoned (to the cold interior-point master).
    fn row_limit(&self) -> usize;
    fn rows(&self) -> usize;
    fn cols(&self) -> usize;
    /// Adds the empty row `0 ≤ rhs`; returns its index.
    fn add_row(&mut self, rhs: f64) -> usize;
    /// Adds the empty row `0 ≤ rhs` of a set: every column that will have an entry in it
    /// has coefficient 1 there and in no other set row (a demand's cap row). An LP that
    /// exploits the structure ([`Gub`]) keeps it apart; the others add a plain row.
    fn add_set_row(&mut self, rhs: f64) -> usize {
        self.add_row(rhs)
    }
    /// Adds column `c` (objective, bounds, value it starts from) with `entries`; returns
    /// its index.
    fn add_col(&mut self, c: Column, entries: Vec<(usize, f64)>) -> usize;
    fn shift_rhs(&mut self, i: usize, delta: f64);
    fn solve(&mut self, max_pivots: usize) -> Result<()>;
    fn value(&self, j: usize) -> f64;
    fn dual(&self, i: usize) -> f64;
    fn objective(&self) -> f64;
}

/// Implements [`MasterLp`] for `$t` by delegation to its inherent methods of the same
/// names, with the row limit `$limit`; `$add` adds the [`Column`] `$c` with entries `$e`
/// to `$s` (the one method whose inherent signature differs between the two LPs).
macro_rules! master_lp {
    ($t:ty, $limit:expr, |$s:ident, $c:ident, $e:ident| $add:expr) => {
        impl MasterLp for $t {
            fn row_limit(&self) -> usize {
                $limit
            }
            fn rows(&self) -> usize {
                <$t>::rows(self)
            }
            fn cols(&self) -> usize {
                <$t>::cols(self)
            }
            fn add_row(&mut self, rhs: f64) -> usize {
                <$t>::add_row(self, rhs, &[])
            }
            fn add_col(&mut self, $c: Column, $e: Vec<(usize, f64)>) -> usize {
                let $s = self;
                $add
            }
            fn shift_rhs(&mut self, i: usize, delta: f64) {
                <$t>::shift_rhs(self, i, delta)
            }
            fn solve(&mut self, max_pivots: usize) -> Result<()> {
                <$t>::solve(self, max_pivots)
            }
            fn value(&self, j: usize) -> f64 {
                <$t>::value(self, j)
            }
            fn dual(&self, i: usize) -> f64 {
                <$t>::dual(self, i)
            }
            fn objective(&self) -> f64 {
                <$t>::objective(self)
            }
        }
    };
}

master_lp!(Simplex, WARM_ROWS, |s, c, e| s
    .add_col(c.obj, c.lower, c.upper, c.value, e));

// The GUB simplex's dense inverse grows with the coupling rows only; it refuses a solve
// past `gub::COUPLING_ROWS` of them, so the master has no limit of its own.
impl MasterLp for Gub {
    fn row_limit(&self) -> usize {
        usize::MAX
    }
    fn rows(&self) -> usize {
        Gub::rows(self)
    }
    fn cols(&self) -> usize {
        Gub::cols(self)
    }
    fn add_row(&mut self, rhs: f64) -> usize {
        Gub::add_row(self, rhs)
    }
    fn add_set_row(&mut self, rhs: f64) -> usize {
        Gub::add_set_row(self, rhs)
    }
    fn add_col(&mut self, c: Column, e: Vec<(usize, f64)>) -> usize {
        Gub::add_col(self, c.obj, c.lower, c.upper, c.value, e)
    }
    fn shift_rhs(&mut self, i: usize, delta: f64) {
        Gub::shift_rhs(self, i, delta)
    }
    fn solve(&mut self, max_pivots: usize) -> Result<()> {
        Gub::solve(self, max_pivots)
    }
    fn value(&self, j: usize) -> f64 {
        Gub::value(self, j)
    }
    fn dual(&self, i: usize) -> f64 {
        Gub::dual(self, i)
    }
    fn objective(&self) -> f64 {
        Gub::objective(self)
    }
}

// HiGHS keeps a sparse factorisation, so the master has no size limit.
#[cfg(feature = "highs")]
master_lp!(crate::solve::highs::WarmLp, usize::MAX, |s, c, e| s
    .add_col(c, e));

/// The master LP for a master above [`WARM_ROWS`] rows: HiGHS's `highs::WarmLp`
/// when the `highs` feature is built and HiGHS is enabled, else `None` (the caller goes
/// cold). O(1).
pub(super) fn large_master_lp() -> Option<Box<dyn MasterLp>> {
    #[cfg(feature = "highs")]
    if crate::solve::highs::enabled() {
        return Some(Box::new(crate::solve::highs::WarmLp::new()));
    }
    None
}

/// How a warm column generation ended.
pub(super) enum Warm {
    Done(Solved),
    Stalled,
    /// The master LP gave up or outgrew its row limit: its walks so far.
    Abandon(Vec<Walk>),
}

/// The restricted master kept by the warm simplex across rounds. Only *active* demands
/// have columns (and a cap row); the walks of an inactive demand stay at their start flow
/// outside the LP, and the arc and site rows (created as columns need them) hold what
/// those fixed walks leave: `cap − fixed load`. A demand is activated when its share of
/// the duality gap, `Σ_w f_w · price(w) + b_d·max(0, 1 − c_d) − Σ_w f_w`, is positive: its
/// walks become columns at their flow and the rows get their load back, which leaves the
/// basis and every basic value unchanged. The bound of [`price`] is the master's own dual
/// value plus these shares, so when no demand has a share and no column prices out, the
/// gap is closed.
pub(super) struct WarmMaster<'a, 'g, L: MasterLp = Simplex> {
    pub(super) g: &'g Graph<'a>,
    pub(super) caps: &'g [f64],
    pub(super) arc_cap: Vec<f64>,
    pub(super) site_cap: Vec<f64>,
    pub(super) lp: L,
    pub(super) arc_row: Vec<usize>,
    pub(super) site_row: Vec<usize>,
    pub(super) dem_row: Vec<usize>,
    /// The LP's columns, in column order.
    pub(super) walks: Vec<Walk>,
    /// Per inactive demand: its fixed walks and flows.
    pub(super) fixed: Vec<Vec<(Walk, f64)>>,
    pub(super) fixed_arc: Vec<f64>,
    pub(super) fixed_site: Vec<f64>,
    pub(super) active: Vec<bool>,
    pub(super) seen: HashSet<Walk>,
}

pub(super) const NO_ROW: usize = usize::MAX;

impl<'a, 'g, L: MasterLp> WarmMaster<'a, 'g, L> {
    /// An empty master on the LP `lp` (empty too).
    pub(super) fn new(g: &'g Graph<'a>, caps: &'g [f64], active: Vec<bool>, lp: L) -> Self {
        let net = g.net;
        let (arc_cap, site_cap) = g.effective(caps);
        WarmMaster {
            g,
            caps,
            arc_cap,
            site_cap,
            lp,
            arc_row: vec![NO_ROW; net.arcs.len()],
            site_row: vec![NO_ROW; net.sites.len()],
            dem_row: vec![NO_ROW; net.demands.len()],
            walks: Vec::new(),
            fixed: vec![Vec::new(); net.demands.len()],
            fixed_arc: vec![0.0; net.arcs.len()],
            fixed_site: vec![0.0; net.sites.len()],
            active,
            seen: HashSet::new(),
        }
    }

    /// Adds walk `w` at flow `f`: a column when its demand is active, else a fixed walk.
    /// Walks already present are skipped.
    pub(super) fn add(&mut self, w: Walk, f: f64) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        let d = w.demand;
        if !self.active[d] {
            for &(a, k) in &w.arcs {
                self.fixed_arc[a] += f64::from(k) * f;
            }
            self.fixed_site[w.site] += f;
            self.fixed[d].push((w, f));
            return;
        }
        self.column(w, f);
    }

    /// Adds the column of walk `w` (active demand) at flow `f`, creating the rows it
    /// needs (arc and site rows hold the capacity the fixed walks leave).
    pub(super) fn column(&mut self, w: Walk, f: f64) {
        let d = w.demand;
        if self.dem_row[d] == NO_ROW {
            self.dem_row[d] = self.lp.add_set_row(self.caps[d]);
        }
        let mut entries = Vec::with_capacity(w.arcs.len() + 2);
        for &(a, k) in &w.arcs {
            if self.arc_row[a] == NO_ROW {
                let rhs = (self.arc_cap[a] - self.fixed_arc[a]).max(0.0);
                self.arc_row[a] = self.lp.add_row(rhs);
            }
            entries.push((self.arc_row[a], f64::from(k)));
        }
        if self.site_row[w.site] == NO_ROW {
            let rhs = (self.site_cap[w.site] - self.fixed_site[w.site]).max(0.0);
            self.site_row[w.site] = self.lp.add_row(rhs);
        }
        entries.push((self.site_row[w.site], 1.0));
        entries.push((self.dem_row[d], 1.0));
        self.lp
            .add_col(Column::new(1.0, 0.0, f64::INFINITY, f), entries);
        self.walks.push(w);
    }

    /// Makes demand `d` active: its cap row, and its fixed walks as columns at their flow
    /// (each existing row first gets the walk's load back, so no basic value moves).
    pub(super) fn activate(&mut self, d: usize) {
        self.active[d] = true;
        self.dem_row[d] = self.lp.add_set_row(self.caps[d]);
        for (w, f) in std::mem::take(&mut self.fixed[d]) {
            for &(a, k) in &w.arcs {
                let load = f64::from(k) * f;
                self.fixed_arc[a] -= load;
                if self.arc_row[a] != NO_ROW {
                    self.lp.shift_rhs(self.arc_row[a], load);
                }
            }
            self.fixed_site[w.site] -= f;
            if self.site_row[w.site] != NO_ROW {
                self.lp.shift_rhs(self.site_row[w.site], f);
            }
            self.column(w, f);
        }
    }

    pub(super) fn dual(&self, row: usize) -> f64 {
        if row == NO_ROW {
            0.0
        } else {
            self.lp.dual(row).max(0.0)
        }
    }

    /// All walks (columns, then fixed walks) and their flows.
    pub(super) fn into_solution(self) -> (Vec<Walk>, Vec<f64>) {
        let lp = &self.lp;
        round::with_held(self.walks, |j| lp.value(j), self.fixed)
    }

    /// Rounds of master solve, pricing and activation until the dual bound meets the
    /// master's value.
    pub(super) fn run(mut self, stats: &mut Stats) -> Result<Warm> {
        let mut scale: Option<f64> = None;
        loop {
            let (rows, limit, cols) = (self.lp.rows(), self.lp.row_limit(), self.lp.cols());
            let solved = round::solve_round(rows, limit, cols > 0, |pivots| {
                stats.lp_solves += 1;
                stats.max_columns = stats.max_columns.max(self.walks.len());
                self.lp.solve(pivots)
            })?;
            if !solved {
                // Too large, or the solve failed: the master goes cold.
                return Ok(Warm::Abandon(self.into_solution().0));
            }
            let y: Vec<f64> = self.arc_row.iter().map(|&r| self.dual(r)).collect();
            let z: Vec<f64> = self.site_row.iter().map(|&r| self.dual(r)).collect();
            let (u, value) = round::held_prices(
                &self.active,
                |d| self.dual(self.dem_row[d]),
                self.lp.objective(),
                &self.fixed,
            );
            stats.rounds += 1;
            let p = price(self.g, self.caps, &y, &z, Some(&u));
            let s = *scale.get_or_insert_with(|| servable_total(self.caps, &p.cost).max(1.0));
            if p.bound - value <= GAP_TOL * s {
                stats.generated += 1;
                let (walks, flow) = self.into_solution();
                let value = flow.iter().sum();
                return Ok(Warm::Done(Solved {
                    walks,
                    flow,
                    value,
                    arc_price: y,
                    site_price: z,
                }));
            }
            if stats.rounds >= MAX_ROUNDS {
                return Ok(Warm::Stalled);
            }
            // Inactive demands whose share of the gap is positive, and the new walks.
            let (active, caps) = (&self.active, self.caps);
            let Some((wake, fresh)) = round::next_round(
                |d| (!active[d] && caps[d] > 0.0).then(|| caps[d]),
                &self.fixed,
                |w: &Walk| {
                    w.arcs
                        .iter()
                        .map(|&(a, k)| f64::from(k) * y[a])
                        .sum::<f64>()
                        + z[w.site]
                },
                &p.cost,
                p.walks,
                &self.seen,
                None,
            ) else {
                return Ok(Warm::Stalled);
            };
            for d in wake {
                self.activate(d);
            }
            for w in fresh {
                self.add(w, 0.0);
            }
        }
    }
}
