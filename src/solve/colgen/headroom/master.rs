//! The restricted λ master of the walk-engine headroom, with the demands an outage leaves
//! whole held together in one **bundle**; generic over the walks and their pricing
//! ([`Pricing`]), so the same master serves the two-layer walks of files without
//! `functions` and the layered walks of service chains
//! ([`crate::solve::chainwalk::headroom`]).
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
//! **Freeing members.** With row prices `y` and member `d`'s cheapest walk `c_d`, its
//! share of the gap is `Σ_w unit_w·price(w) − required_d·c_d ≥ 0` (what its bundled walks
//! cost per unit of θ beyond its cheapest walk). When no walk of a free demand prices out
//! and the bound is still open, the gap lies in the members' shares (θ basic: the bundle's
//! price equals the row dual of `λ − θ ≤ 0`, so zero shares close the bound); members
//! with a share above [`PRICE_TOL`] per unit of `required_d` are freed: the master is
//! built again with their bundled walks as columns at their current flows, from the
//! current point (λ, θ and every column kept, so the start is feasible). When the shares
//! are spread thinner than the tolerance, every member is freed (the full master). Each
//! rebuild frees at least one demand, so there are at most as many as active demands;
//! [`MAX_ROUNDS`] bounds the pricing rounds in all.

use std::collections::HashSet;
use std::hash::Hash;

use super::super::warm::{MasterLp, large_master_lp};
use super::super::{GAP_TOL, MAX_ROUNDS, PRICE_TOL, WARM_ROWS};
use super::Work;
use crate::error::Result;
use crate::solve::concurrent::{Setup, quotient};
use crate::solve::simplex::{Column, Simplex};

const NO_ROW: usize = usize::MAX;

/// The walks of one engine as the λ master sees them: each walk belongs to one demand and
/// puts fixed amounts per unit of flow on capacity rows numbered `0 .. slots()` (created in
/// the master when a column first needs them); pricing finds every demand's cheapest walk.
pub(crate) trait Pricing {
    /// One walk (a column of the master).
    type Walk: Clone + Eq + Hash;
    /// The demand `w` serves. O(1).
    fn demand(w: &Self::Walk) -> usize;
    /// Whether `w` survives the outage (every element it uses is up). O(walk length).
    fn survives(&self, w: &Self::Walk) -> bool;
    /// How many capacity rows (slots) there are.
    fn slots(&self) -> usize;
    /// How many slots a master may use at most (the usable ones).
    fn usable_slots(&self) -> usize;
    /// The presolved capacity of slot `s` (no allocation at λ ≤ Λ exceeds it).
    fn cap(&self, s: usize) -> f64;
    /// The amounts one unit of `w` puts on its slots, one entry per slot. O(walk length).
    fn entries(&self, w: &Self::Walk) -> Vec<(usize, f64)>;
    /// At slot prices `y` (per slot, `≥ 0`) and pricing duals `u` (a walk of `d` enters
    /// when `1 − c_d − u_d > PRICE_TOL`; `+∞` prices none of `d`): every demand's cheapest
    /// walk cost `c_d` (`+∞` when it has none) and the walks that enter, in a deterministic
    /// order.
    fn price(&self, y: &[f64], u: &[f64]) -> (Vec<f64>, Vec<Self::Walk>);
}

/// Walks with their flows.
pub(crate) type Flows<W> = Vec<(W, f64)>;

/// The walks of the member demands with their flow per unit of θ, and θ's start value.
pub(crate) struct Bundle<W> {
    /// Per demand: its walks are in the bundle (it has no demand row of its own).
    pub(crate) member: Vec<bool>,
    /// Each walk with its flow per unit of θ: member `d`'s add up to `required_d`.
    walks: Vec<(W, f64)>,
    /// θ's start value.
    theta: f64,
}

impl<W> Bundle<W> {
    /// No member (every active demand has its own row).
    pub(crate) fn empty(demands: usize) -> Bundle<W> {
        Bundle {
            member: vec![false; demands],
            walks: Vec::new(),
            theta: 0.0,
        }
    }

    /// How many demands are held in the bundle. O(demands).
    pub(crate) fn members(&self) -> usize {
        self.member.iter().filter(|&&m| m).count()
    }
}

/// The parent's factor over the outage's active demands: `min_d had_d / required_d`,
/// where `had_d` is the flow of `d`'s parent walks (`flow_of` per demand, summed by the
/// caller). O(active).
pub(crate) fn parent_factor(setup: &Setup, had: &[f64]) -> f64 {
    setup
        .active
        .iter()
        .map(|&d| had[d] / setup.required[d])
        .fold(f64::INFINITY, f64::min)
}

/// The factor a re-route of the parent's cut flow aims at: the [`parent_factor`] when
/// `lower` is `None`, else `lower` when it is below that; `None` when `lower` is not below
/// it or the target is not finite and positive. O(active).
pub(crate) fn reroute_target(setup: &Setup, had: &[f64], lower: Option<f64>) -> Option<f64> {
    let parent = parent_factor(setup, had);
    let target = match lower {
        None => parent,
        Some(l) if l < parent => l,
        Some(_) => return None,
    };
    (target.is_finite() && target > 0.0).then_some(target)
}

/// Splits the feasible start `start` into the columns of the demands the outage touched
/// and the [`Bundle`] of the others. `parent` holds the parent's walks with their flows.
/// An active demand is a member when every parent walk of it with flow survives the
/// outage ([`Pricing::survives`]); its walks in `start` are then scaled to exactly
/// `θ₀·required_d`, `θ₀` the [`parent_factor`], which only lowers loads. No bundle when
/// `θ₀` is not positive. O(Σ walks + demands).
pub(crate) fn bundle_of<P: Pricing>(
    p: &P,
    setup: &Setup,
    parent: (&[P::Walk], &[f64]),
    start: Vec<(P::Walk, f64)>,
) -> (Flows<P::Walk>, Bundle<P::Walk>) {
    let n = setup.required.len();
    let demand = P::demand;
    let mut active = vec![false; n];
    for &d in &setup.active {
        active[d] = true;
    }
    let mut had = vec![0.0; n];
    let mut cut = vec![false; n];
    for (w, &f) in parent.0.iter().zip(parent.1) {
        let d = demand(w);
        if f > 0.0 && active[d] {
            had[d] += f;
            cut[d] |= !p.survives(w);
        }
    }
    let theta = parent_factor(setup, &had);
    if !(theta.is_finite() && theta > 0.0) {
        return (start, Bundle::empty(n));
    }
    let mut member = vec![false; n];
    for &d in &setup.active {
        member[d] = !cut[d] && had[d] > 0.0;
    }
    let mut kept = vec![0.0; n];
    for (w, f) in &start {
        if member[demand(w)] {
            kept[demand(w)] += f;
        }
    }
    // A member whose walks carry nothing in `start` (cannot happen for walks that all
    // survive, but the start is what counts) has a row of its own.
    for &d in &setup.active {
        if member[d] && kept[d] <= 0.0 {
            member[d] = false;
        }
    }
    let (inside, cols): (Flows<P::Walk>, Flows<P::Walk>) =
        start.into_iter().partition(|(w, _)| member[demand(w)]);
    let walks = inside
        .into_iter()
        .map(|(w, f)| {
            let d = demand(&w);
            let unit = f * setup.required[d] / kept[d];
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

/// One column generation of the λ master: the engine's walks and pricing, and the active
/// demands.
pub(crate) struct Generation<'g, P: Pricing> {
    pub(crate) p: &'g P,
    pub(crate) setup: &'g Setup,
}

/// How one master ended.
enum End<W> {
    /// The bound met λ: every walk with its flow, and the slot prices.
    Done(Vec<W>, Vec<f64>, Vec<f64>),
    /// Members to free: the master's walks at their flows, λ and θ.
    Free(Vec<usize>, Vec<(W, f64)>, f64, f64),
    /// No convergence (stalled, too many rounds, too large, or the LP failed).
    Stalled,
}

/// The walks and flows, and the slot prices (scaled like the pricing's) of a λ optimum.
pub(crate) type Optimum<W> = (Vec<W>, Vec<f64>, Vec<f64>);

impl<P: Pricing> Generation<'_, P> {
    /// Column generation from the feasible start `cols` (start flows, possibly 0) and
    /// `bundle`, freeing members as the module documentation says. `None` when it does not
    /// converge. Cost: per master, one build (rows and columns added, O(m · nonzeros)),
    /// then per round one warm simplex re-optimisation and one pricing pass.
    pub(crate) fn run(
        &self,
        mut cols: Vec<(P::Walk, f64)>,
        mut bundle: Bundle<P::Walk>,
        work: &mut Work,
    ) -> Result<Option<Optimum<P::Walk>>> {
        let mut lambda: Option<f64> = None;
        loop {
            let Some(mut m) = self.master(&cols, &bundle, lambda) else {
                return Ok(None);
            };
            match m.run(self, &bundle, work)? {
                End::Done(w, f, y) => return Ok(Some((w, f, y))),
                End::Stalled => return Ok(None),
                End::Free(wake, kept, l, theta) => {
                    work.freed += 1;
                    cols = kept;
                    let mut inside = Vec::new();
                    for (w, unit) in std::mem::take(&mut bundle.walks) {
                        if wake.binary_search(&P::demand(&w)).is_ok() {
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
        cols: &[(P::Walk, f64)],
        bundle: &Bundle<P::Walk>,
        lambda: Option<f64>,
    ) -> Option<Master<P::Walk>> {
        let p = self.p;
        let setup = self.setup;
        let n = setup.required.len();
        let free = setup.active.iter().filter(|&&d| !bundle.member[d]).count();
        let rows = p.usable_slots() + free + 1;
        let lp: Box<dyn MasterLp> = if rows <= WARM_ROWS {
            Box::new(Simplex::new())
        } else {
            large_master_lp()?
        };
        // The start's loads, then one factor that fits them into the capacities.
        let mut load = vec![0.0; p.slots()];
        let mut served = vec![0.0; n];
        let bundled = bundle.walks.iter().map(|(w, u)| (w, u * bundle.theta));
        for (w, f) in cols.iter().map(|(w, f)| (w, *f)).chain(bundled) {
            served[P::demand(w)] += f;
            for (s, c) in p.entries(w) {
                load[s] += c * f;
            }
        }
        let mut factor: f64 = 1.0;
        for (s, &l) in load.iter().enumerate() {
            let cap = p.cap(s);
            if l > cap {
                factor = factor.min(cap / l);
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
            lp,
            row: vec![NO_ROW; p.slots()],
            dem_row: vec![NO_ROW; n],
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
            let mut unit = vec![0.0; p.slots()];
            for (w, u) in &bundle.walks {
                for (s, c) in p.entries(w) {
                    unit[s] += c * u;
                }
            }
            let mut entries = vec![(m.bundle_row, -1.0)];
            for (s, &u) in unit.iter().enumerate() {
                if u > 0.0 {
                    entries.push((m.slot_row(p, s), u));
                }
            }
            m.theta_col =
                m.lp.add_col(Column::new(0.0, 0.0, f64::INFINITY, theta), entries);
        }
        for (w, f) in cols {
            m.column(p, w.clone(), f * factor);
        }
        Some(m)
    }
}

/// The restricted master kept by a warm LP (the bounded simplex, or HiGHS above
/// [`WARM_ROWS`] rows with the `highs` feature): a demand row for every free active demand,
/// the bundle's row and θ, slot rows created when a column first needs them, λ as
/// column 0.
struct Master<W> {
    lp: Box<dyn MasterLp>,
    row: Vec<usize>,
    dem_row: Vec<usize>,
    bundle_row: usize,
    theta_col: usize,
    /// The LP column of `walks[j]`.
    col: Vec<usize>,
    walks: Vec<W>,
    seen: HashSet<W>,
}

impl<W: Clone + Eq + Hash> Master<W> {
    fn slot_row<P: Pricing<Walk = W>>(&mut self, p: &P, s: usize) -> usize {
        if self.row[s] == NO_ROW {
            self.row[s] = self.lp.add_row(p.cap(s));
        }
        self.row[s]
    }

    /// Adds walk `w` (of a free demand) as a column at flow `f` (rows created as needed);
    /// a walk already present is skipped.
    fn column<P: Pricing<Walk = W>>(&mut self, p: &P, w: W, f: f64) {
        if !self.seen.insert(w.clone()) {
            return;
        }
        let slots = p.entries(&w);
        let mut entries = Vec::with_capacity(slots.len() + 1);
        for (s, c) in slots {
            entries.push((self.slot_row(p, s), c));
        }
        entries.push((self.dem_row[P::demand(&w)], -1.0));
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
    fn run<P: Pricing<Walk = W>>(
        &mut self,
        cg: &Generation<P>,
        bundle: &Bundle<W>,
        work: &mut Work,
    ) -> Result<End<W>> {
        let (p, setup) = (cg.p, cg.setup);
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
            let y: Vec<f64> = self.row.iter().map(|&r| scale * self.dual(r)).collect();
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
            let (cost, walks) = p.price(&y, &u);
            let worth: f64 = y.iter().enumerate().map(|(s, &y)| p.cap(s) * y).sum();
            let priced: f64 = setup
                .active
                .iter()
                .map(|&d| setup.required[d] * cost[d])
                .sum();
            let bound = quotient(worth, priced).min(setup.ceiling);
            if bound - lambda <= GAP_TOL * bound.max(f64::MIN_POSITIVE) {
                let theta = self.theta();
                let mut walks = std::mem::take(&mut self.walks);
                let mut flow = self.flows();
                for (w, unit) in &bundle.walks {
                    walks.push(w.clone());
                    flow.push(unit * theta);
                }
                return Ok(End::Done(walks, flow, y));
            }
            if work.rounds >= MAX_ROUNDS {
                return Ok(End::Stalled);
            }
            let fresh: Vec<W> = walks
                .into_iter()
                .filter(|w| !self.seen.contains(w))
                .collect();
            if fresh.is_empty() {
                // The gap is in the members' shares: free those above the tolerance,
                // else every member; none left: stalled.
                let mut share = vec![0.0; cost.len()];
                for (w, unit) in &bundle.walks {
                    let price: f64 = p.entries(w).iter().map(|&(s, c)| c * y[s]).sum();
                    share[P::demand(w)] += unit * price;
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
                        share[d] - r * cost[d] > PRICE_TOL * r
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
                self.column(p, w, 0.0);
            }
        }
    }
}
