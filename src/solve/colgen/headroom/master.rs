//! The restricted λ master of the walk-engine headroom, with the demands an outage leaves
//! whole held together in one **bundle**.
//!
//! A demand none of whose flow-carrying parent walks the outage cuts keeps those walks. In
//! the master they become one column θ (the bundle): per unit of θ each member demand `d`
//! gets exactly `required_d` through its parent walks scaled, and one row `λ − θ ≤ 0`
//! stands for every member's demand row `λ·required_d − θ·required_d ≤ 0`. The master then
//! has a demand row only for the demands the outage touched, so it is small and its first
//! solve needs few pivots. It is a restriction of the full λ master (members' walks move
//! together), so its λ is achievable; the dual bound is computed over every active demand
//! as always, so the answer is still the full optimum when the bound meets λ.
//!
//! **Freeing members.** With arc prices `y`, site prices `z` and member `d`'s cheapest
//! walk `c_d`, its share of the gap is `Σ_w unit_w·price(w) − required_d·c_d ≥ 0` (what
//! its bundled walks cost per unit of θ beyond its cheapest walk). When no walk of a free
//! demand prices out and the bound is still open, the gap lies in the members' shares
//! (θ basic: the bundle's price equals the row dual of `λ − θ ≤ 0`, so zero shares close
//! the bound); members with a share above [`PRICE_TOL`] per unit of `required_d` are
//! freed: the master is built again with their bundled walks as columns at their current
//! flows, from the current point (λ, θ and every column kept, so the start is feasible).
//! When the shares are spread thinner than the tolerance, every member is freed (the full
//! master). Each rebuild frees at least one demand, so there are at most as many as
//! active demands; [`MAX_ROUNDS`] bounds the pricing rounds in all.

use std::collections::HashSet;

use super::super::warm::{MasterLp, large_master_lp};
use super::super::{GAP_TOL, Graph, MAX_ROUNDS, PRICE_TOL, WARM_ROWS, Walk, price};
use super::Columns;
use super::Work;
use crate::error::Result;
use crate::solve::concurrent::Setup;
use crate::solve::simplex::{Column, Simplex};

const NO_ROW: usize = usize::MAX;

/// The walks of the member demands (class arcs) with their flow per unit of θ, and θ's
/// start value.
pub(super) struct Bundle {
    /// Per demand: its walks are in the bundle (it has no demand row of its own).
    pub(super) member: Vec<bool>,
    /// Each walk with its flow per unit of θ: member `d`'s add up to `required_d`.
    walks: Vec<(Walk, f64)>,
    /// θ's start value.
    theta: f64,
}

impl Bundle {
    /// No member (every active demand has its own row).
    pub(super) fn empty(demands: usize) -> Bundle {
        Bundle {
            member: vec![false; demands],
            walks: Vec::new(),
            theta: 0.0,
        }
    }
}

/// Splits the feasible start `start` (class arcs) into the columns of the demands the
/// outage touched and the [`Bundle`] of the others. An active demand is a member when every
/// parent walk of it with flow survives the outage (`g`); its walks are then scaled to
/// exactly `θ₀·required_d`, `θ₀ = min_d parent flow_d / required_d` over the active
/// demands (the parent's factor), which only lowers loads. No bundle when `θ₀` is not
/// positive. O(Σ walk lengths + demands).
pub(super) fn bundle_of(
    g: &Graph,
    setup: &Setup,
    parent: &Columns,
    start: Vec<(Walk, f64)>,
) -> (Vec<(Walk, f64)>, Bundle) {
    let n = g.net.demands.len();
    let mut active = vec![false; n];
    for &d in &setup.active {
        active[d] = true;
    }
    let mut had = vec![0.0; n];
    let mut cut = vec![false; n];
    for (w, &f) in parent.walks.iter().zip(&parent.flow) {
        if f > 0.0 && active[w.demand] {
            had[w.demand] += f;
            cut[w.demand] |= !w.survives(g);
        }
    }
    let theta = setup
        .active
        .iter()
        .map(|&d| had[d] / setup.required[d])
        .fold(f64::INFINITY, f64::min);
    if !(theta.is_finite() && theta > 0.0) {
        return (start, Bundle::empty(n));
    }
    let mut member = vec![false; n];
    for &d in &setup.active {
        member[d] = !cut[d] && had[d] > 0.0;
    }
    let mut kept = vec![0.0; n];
    for (w, f) in &start {
        if member[w.demand] {
            kept[w.demand] += f;
        }
    }
    // A member whose walks carry nothing in `start` (cannot happen for walks that all
    // survive, but the start is what counts) has a row of its own.
    for &d in &setup.active {
        if member[d] && kept[d] <= 0.0 {
            member[d] = false;
        }
    }
    type Flows = Vec<(Walk, f64)>;
    let (inside, cols): (Flows, Flows) = start.into_iter().partition(|(w, _)| member[w.demand]);
    let walks = inside
        .into_iter()
        .map(|(w, f)| {
            let unit = f * setup.required[w.demand] / kept[w.demand];
            (w, unit)
        })
        .collect();
    (
        cols,
        Bundle {
            member,
            walks,
            theta,
        },
    )
}

/// One column generation of the λ master: its graph, the active demands, the presolved
/// class-arc and site capacities and the pricing's demand caps.
pub(super) struct Generation<'a, 'g> {
    pub(super) g: &'g Graph<'a>,
    pub(super) setup: &'g Setup,
    pub(super) arc_cap: Vec<f64>,
    pub(super) site_cap: Vec<f64>,
    pub(super) caps: &'g [f64],
}

/// How one master ended.
enum End {
    /// The bound met λ: every walk (class arcs) with its flow, and the prices.
    Done(Vec<Walk>, Vec<f64>, Vec<f64>, Vec<f64>),
    /// Members to free: the master's walks at their flows, λ and θ.
    Free(Vec<usize>, Vec<(Walk, f64)>, f64, f64),
    /// No convergence (stalled, too many rounds, too large, or the LP failed).
    Stalled,
}

/// The walks and flows, arc and site prices of a λ optimum.
type Optimum = (Vec<Walk>, Vec<f64>, Vec<f64>, Vec<f64>);

impl Generation<'_, '_> {
    /// Column generation from the feasible start `cols` (class arcs; start flows, possibly
    /// 0) and `bundle`, freeing members as the module documentation says. `None` when it
    /// does not converge. Cost: per master, one build (rows and columns added, O(m ·
    /// nonzeros)), then per round one warm simplex re-optimisation and one pricing pass.
    pub(super) fn run(
        &self,
        mut cols: Vec<(Walk, f64)>,
        mut bundle: Bundle,
        work: &mut Work,
    ) -> Result<Option<Optimum>> {
        let mut lambda: Option<f64> = None;
        loop {
            let Some(mut m) = self.master(&cols, &bundle, lambda) else {
                return Ok(None);
            };
            match m.run(self, &bundle, work)? {
                End::Done(w, f, y, z) => return Ok(Some((w, f, y, z))),
                End::Stalled => return Ok(None),
                End::Free(wake, kept, l, theta) => {
                    work.freed += 1;
                    cols = kept;
                    let mut inside = Vec::new();
                    for (w, unit) in std::mem::take(&mut bundle.walks) {
                        if wake.binary_search(&w.demand).is_ok() {
                            cols.push((w, unit * theta));
                        } else {
                            inside.push((w, unit));
                        }
                    }
                    for d in wake {
                        bundle.member[d] = false;
                    }
                    bundle.walks = inside;
                    bundle.theta = theta;
                    lambda = Some(l);
                }
            }
        }
    }

    /// The master on the start `cols` and `bundle`, everything scaled into the presolved
    /// capacities if need be, λ at the largest value the start serves (at most `lambda`
    /// when given). `None` when it is too large for the warm LPs.
    fn master(
        &self,
        cols: &[(Walk, f64)],
        bundle: &Bundle,
        lambda: Option<f64>,
    ) -> Option<Master<'_>> {
        let g = self.g;
        let net = g.net;
        let setup = self.setup;
        let free = setup.active.iter().filter(|&&d| !bundle.member[d]).count();
        let rows = g.usable.len() + g.procs.len() + free + 1;
        let lp: Box<dyn MasterLp> = if rows <= WARM_ROWS {
            Box::new(Simplex::new())
        } else {
            large_master_lp()?
        };
        // The start's loads, then one factor that fits them into the capacities.
        let mut arc_load = vec![0.0; net.arcs.len()];
        let mut site_load = vec![0.0; net.sites.len()];
        let mut served = vec![0.0; net.demands.len()];
        let bundled = bundle.walks.iter().map(|(w, u)| (w, u * bundle.theta));
        for (w, f) in cols.iter().map(|(w, f)| (w, *f)).chain(bundled) {
            site_load[w.site] += f;
            served[w.demand] += f;
            for &(a, k) in &w.arcs {
                arc_load[a] += f64::from(k) * f;
            }
        }
        let mut factor: f64 = 1.0;
        for (load, cap) in arc_load
            .iter()
            .zip(&self.arc_cap)
            .chain(site_load.iter().zip(&self.site_cap))
        {
            if *load > *cap {
                factor = factor.min(cap / load);
            }
        }
        // Rounding of the sums above: stay a few ulps inside.
        factor *= 1.0 - 8.0 * f64::EPSILON;
        let theta = bundle.theta * factor;
        // λ: what every free demand and the bundle get, a few ulps inside.
        let mut l = setup
            .active
            .iter()
            .filter(|&&d| !bundle.member[d])
            .map(|&d| served[d] * factor / setup.required[d])
            .fold(setup.ceiling, f64::min);
        if !bundle.walks.is_empty() {
            l = l.min(theta);
        }
        if let Some(cap) = lambda {
            l = l.min(cap);
        }
        l = (l * (1.0 - 8.0 * f64::EPSILON)).max(0.0);
        let mut m = Master {
            g,
            lp,
            arc_row: vec![NO_ROW; net.arcs.len()],
            site_row: vec![NO_ROW; net.sites.len()],
            dem_row: vec![NO_ROW; net.demands.len()],
            bundle_row: NO_ROW,
            theta_col: NO_ROW,
            col: Vec::new(),
            walks: Vec::new(),
            seen: HashSet::new(),
        };
        let mut entries = Vec::with_capacity(free + 1);
        for &d in &setup.active {
            if !bundle.member[d] {
                m.dem_row[d] = m.lp.add_row(0.0);
                entries.push((m.dem_row[d], setup.required[d]));
            }
        }
        if !bundle.walks.is_empty() {
            m.bundle_row = m.lp.add_row(0.0);
            entries.push((m.bundle_row, 1.0));
        }
        m.lp.add_col(Column::new(1.0, 0.0, setup.ceiling, l), entries);
        if !bundle.walks.is_empty() {
            // θ's column: the bundle's load per unit on every row it touches.
            let mut arc_unit = vec![0.0; net.arcs.len()];
            let mut site_unit = vec![0.0; net.sites.len()];
            for (w, u) in &bundle.walks {
                site_unit[w.site] += u;
                for &(a, k) in &w.arcs {
                    arc_unit[a] += f64::from(k) * u;
                }
            }
            let mut entries = vec![(m.bundle_row, -1.0)];
            for (a, &u) in arc_unit.iter().enumerate() {
                if u > 0.0 {
                    entries.push((m.arc_row(self, a), u));
                }
            }
            for (v, &u) in site_unit.iter().enumerate() {
                if u > 0.0 {
                    entries.push((m.site_row(self, v), u));
                }
            }
            m.theta_col =
                m.lp.add_col(Column::new(0.0, 0.0, f64::INFINITY, theta), entries);
        }
        for (w, f) in cols {
            m.column(self, w.clone(), f * factor);
        }
        Some(m)
    }
}

/// The restricted master kept by a warm LP (the bounded simplex, or HiGHS above
/// [`WARM_ROWS`] rows with the `highs` feature): a demand row for every free active demand,
/// the bundle's row and θ, arc and site rows created when a column first needs them, λ as
/// column 0.
struct Master<'g> {
    g: &'g Graph<'g>,
    lp: Box<dyn MasterLp>,
    arc_row: Vec<usize>,
    site_row: Vec<usize>,
    dem_row: Vec<usize>,
    bundle_row: usize,
    theta_col: usize,
    /// The LP column of `walks[j]`.
    col: Vec<usize>,
    walks: Vec<Walk>,
    seen: HashSet<Walk>,
}

impl Master<'_> {
    fn arc_row(&mut self, cg: &Generation, a: usize) -> usize {
        if self.arc_row[a] == NO_ROW {
            self.arc_row[a] = self.lp.add_row(cg.arc_cap[a]);
        }
        self.arc_row[a]
    }

    fn site_row(&mut self, cg: &Generation, v: usize) -> usize {
        if self.site_row[v] == NO_ROW {
            self.site_row[v] = self.lp.add_row(cg.site_cap[v]);
        }
        self.site_row[v]
    }

    /// Adds walk `w` (of a free demand) as a column at flow `f` (rows created as needed);
    /// a walk already present is skipped.
    fn column(&mut self, cg: &Generation, w: Walk, f: f64) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        let mut entries = Vec::with_capacity(w.arcs.len() + 2);
        for &(a, k) in &w.arcs {
            entries.push((self.arc_row(cg, a), f64::from(k)));
        }
        entries.push((self.site_row(cg, w.site), 1.0));
        entries.push((self.dem_row[w.demand], -1.0));
        let c = Column::new(0.0, 0.0, f64::INFINITY, f.max(0.0));
        self.col.push(self.lp.add_col(c, entries));
        self.walks.push(w);
    }

    fn dual(&self, row: usize) -> f64 {
        if row == NO_ROW {
            0.0
        } else {
            self.lp.dual(row).max(0.0)
        }
    }

    fn flows(&self) -> Vec<f64> {
        self.col
            .iter()
            .map(|&j| self.lp.value(j).max(0.0))
            .collect()
    }

    fn theta(&self) -> f64 {
        if self.theta_col == NO_ROW {
            0.0
        } else {
            self.lp.value(self.theta_col).max(0.0)
        }
    }

    /// Rounds of master solve and pricing until the dual bound meets λ (the walks with
    /// their flows, the bundle's at θ), or members to free, or no convergence.
    fn run(&mut self, cg: &Generation, bundle: &Bundle, work: &mut Work) -> Result<End> {
        let setup = cg.setup;
        let scale = setup.total_required;
        loop {
            let (rows, limit) = (self.lp.rows(), self.lp.row_limit());
            let solved = super::super::round::solve_round(rows, limit, true, |pivots| {
                work.lp_solves += 1;
                self.lp.solve(pivots)
            })?;
            if !solved {
                return Ok(End::Stalled);
            }
            let lambda = self.lp.value(0);
            let y: Vec<f64> = self.arc_row.iter().map(|&r| scale * self.dual(r)).collect();
            let z: Vec<f64> = self
                .site_row
                .iter()
                .map(|&r| scale * self.dual(r))
                .collect();
            // Pricing's demand duals: a walk of d improves when u_d − c_d > PRICE_TOL,
            // i.e. 1 − c_d − (1 − u_d) > PRICE_TOL; members are not priced.
            let u: Vec<f64> = self
                .dem_row
                .iter()
                .map(|&r| {
                    if r == NO_ROW {
                        f64::INFINITY
                    } else {
                        1.0 - scale * self.dual(r)
                    }
                })
                .collect();
            work.rounds += 1;
            let p = price(self.g, cg.caps, &y, &z, Some(&u));
            let worth: f64 = self
                .g
                .usable
                .iter()
                .map(|&a| cg.arc_cap[a] * y[a])
                .sum::<f64>()
                + self
                    .g
                    .procs
                    .iter()
                    .map(|&v| cg.site_cap[v] * z[v])
                    .sum::<f64>();
            let priced: f64 = setup
                .active
                .iter()
                .map(|&d| setup.required[d] * p.cost[d])
                .sum();
            let bound = if priced > 0.0 && priced.is_finite() {
                (worth / priced).min(setup.ceiling)
            } else {
                setup.ceiling
            };
            if bound - lambda <= GAP_TOL * bound.max(f64::MIN_POSITIVE) {
                let theta = self.theta();
                let mut walks = std::mem::take(&mut self.walks);
                let mut flow = self.flows();
                for (w, unit) in &bundle.walks {
                    walks.push(w.clone());
                    flow.push(unit * theta);
                }
                return Ok(End::Done(walks, flow, y, z));
            }
            if work.rounds >= MAX_ROUNDS {
                return Ok(End::Stalled);
            }
            let fresh: Vec<Walk> = p
                .walks
                .into_iter()
                .filter(|w| !self.seen.contains(w))
                .collect();
            if fresh.is_empty() {
                // The gap is in the members' shares: free those above the tolerance,
                // else every member; none left: stalled.
                let mut share = vec![0.0; p.cost.len()];
                for (w, unit) in &bundle.walks {
                    let cost: f64 = w
                        .arcs
                        .iter()
                        .map(|&(a, k)| f64::from(k) * y[a])
                        .sum::<f64>()
                        + z[w.site];
                    share[w.demand] += unit * cost;
                }
                let members: Vec<usize> = setup
                    .active
                    .iter()
                    .copied()
                    .filter(|&d| bundle.member[d])
                    .collect();
                if members.is_empty() {
                    return Ok(End::Stalled);
                }
                let mut wake: Vec<usize> = members
                    .iter()
                    .copied()
                    .filter(|&d| {
                        let r = setup.required[d];
                        share[d] - r * p.cost[d] > PRICE_TOL * r
                    })
                    .collect();
                if wake.is_empty() {
                    wake = members;
                }
                let theta = self.theta();
                let flow = self.flows();
                let kept = std::mem::take(&mut self.walks)
                    .into_iter()
                    .zip(flow)
                    .collect();
                return Ok(End::Free(wake, kept, lambda, theta));
            }
            for w in fresh {
                self.column(cg, w, 0.0);
            }
        }
    }
}
