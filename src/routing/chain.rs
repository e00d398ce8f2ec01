//! Routing as deployed on a network with `functions` (service chains and gains): each leg
//! of a chain follows the shortest paths with the per-hop equal split of [`super::spt`].
//!
//! Semantics (`network-format.md`, "Routing as deployed" and "Service chains"): a unit of a
//! demand `o → t` with chain `f1 … fk` is processed at a *sequence* of sites `v1 … vk`,
//! `vj` a surviving site with capacity > 0 for `fj` (consecutive steps may share a site),
//! and travels the legs `o → v1`, `v1 → v2`, …, `vk → t`, each on its shortest-path DAG.
//! A leg after `j` functions carries `G_j = g1 · … · gj` units per origin unit on each of
//! its arcs (times the arc's ECMP fraction); function `fj` at `vj` takes `G_{j−1}` units.
//! Plain traffic (an empty chain) is the one leg `o → t`. A sequence's *length* is the
//! total metric of its legs.
//!
//! - [`Mode::Nearest`]: each demand is spread equally over its sequences of least length.
//!   They are never enumerated: a layered shortest path (layer 0 the origin, layer `j` the
//!   sites running `fj`, layer `k + 1` the destination; an edge between consecutive layers
//!   costs the metric distance of its leg) gives the least length from both ends, and a
//!   count of tied partial sequences from both ends gives each leg's and each step's share
//!   of the tied sequences (`count_from(u) · count_to(v) / count`). O(k · S² + Σ legs' arcs)
//!   per demand for `S` sites per layer; the result is one fixed route per demand, so the
//!   fixed-route LP of [`super::fixed`] and its weak-duality bound apply unchanged.
//! - [`Mode::Steered`]: any split among every sequence. Column generation over sequences:
//!   the fixed-route LP over the sequences found so far (starting from one least-length
//!   sequence per demand), priced by the cheapest sequence under the LP's arc and function
//!   prices (the same layered shortest path with an edge costing `G_j ·` the priced leg and
//!   a step costing `G_{j−1} ·` the function's price), a sequence entering when it is
//!   cheaper than 1 and than every column of its demand. Each round is one LP plus
//!   O(Σ_d k · S²) pricing (leg prices cached per round); the number of rounds is bounded by
//!   the number of sequences but is small in practice ([`MAX_ROUNDS`] at most). The upper
//!   bound prices *every* sequence: `Σ rows b·y + Σ_d cap_d · max(0, 1 − cheapest_d)`
//!   (weak duality for the LP over all sequences), so a column generation stopped early is
//!   reported unproven, never overstated. Rows are lowered only to ceilings valid for every
//!   sequence (an arc: `Σ_d cap_d · Σ_j G_j`; a function at a site: `Σ_d cap_d · Σ_{j: fj =
//!   f} G_{j−1}`).
//!
//! Invariants: the LP's resources are the arcs and each (site, function) (resource index
//! `site · functions + function`, [`super::fixed::Resources`]); every result ends in
//! `solve::finish_with` like the chain engines', with `delivered` and the
//! per-function use. Pure functions of their inputs: results do not depend on threads.

use std::cell::RefCell;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::sync::Arc as Shared;

use super::fixed::{self, FixedIndex, Resources};
use super::spt::{Trees, UNREACHABLE};
use super::{ArcLoad, Choice, DemandRoutes, Mode, Offered, merge};
use crate::error::Result;
use crate::expand::chain_buy::{BuyAt, ChainModel};
use crate::model::{Chains, Network, SiteIdx};
use crate::scenario::Outage;
use crate::solve::concurrent::Headroom;
use crate::solve::lp::{self, Lp, LpSolution};
use crate::solve::{self, Evaluation, FunctionUse, Surviving, Unservable, Verified};
use crate::tol::WALK_PRICE_TOL;

/// The most column-generation rounds per LP; a steered answer not closed by then is
/// verified (and reported unproven if its bounds stay apart).
pub const MAX_ROUNDS: usize = 200;

/// Legs `u → v` of one outage, computed once each. Interior mutability so a bound closure
/// can share it.
struct Legs<'a> {
    trees: &'a Trees,
    cache: RefCell<HashMap<(usize, usize), Shared<ArcLoad>>>,
}

impl Legs<'_> {
    fn dist(&self, u: usize, v: usize) -> u64 {
        self.trees.dist(SiteIdx(u), SiteIdx(v))
    }

    fn get(&self, u: usize, v: usize) -> Shared<ArcLoad> {
        let mut c = self.cache.borrow_mut();
        Shared::clone(
            c.entry((u, v))
                .or_insert_with(|| Shared::new(self.trees.leg(SiteIdx(u), SiteIdx(v)))),
        )
    }
}

/// One outage of a chain file under the deployed routing: per demand its layers and its
/// nearest route, and the processing resources.
pub struct ChainRouting<'a> {
    net: &'a Network,
    ch: &'a Chains,
    legs: Legs<'a>,
    /// Per (site · functions + function): capacity at a surviving site, else 0.
    caps: Vec<f64>,
    /// Per demand: its layers (origin, the sites of each step, destination); `None` for a
    /// stranded demand (failed endpoint).
    layers: Vec<Option<Vec<Vec<usize>>>>,
    /// Per demand: the nearest route (one composite [`Choice`], `nearest == [0]`), no
    /// candidate when no sequence exists; `None` when stranded.
    pub routes: Vec<Option<DemandRoutes>>,
}

impl<'a> ChainRouting<'a> {
    /// The layers and nearest routes of every demand of `net` (the outage's matrix view)
    /// under `trees` (the outage's). O(demands · (k · S² + Σ legs' arcs)).
    pub fn new(net: &'a Network, trees: &'a Trees, outage: &Outage) -> ChainRouting<'a> {
        ChainRouting::with_buyable(net, trees, outage, None)
    }

    /// [`ChainRouting::new`] with the resources `buyable[r]` (surviving sites where
    /// capacity may be bought) in the layers too, at their real capacity (0 or more).
    fn with_buyable(
        net: &'a Network,
        trees: &'a Trees,
        outage: &Outage,
        buyable: Option<&[bool]>,
    ) -> ChainRouting<'a> {
        let ch = net.chains.as_ref().expect("a network with functions");
        let nf = ch.functions.len();
        let alive = outage.site_alive(net);
        let mut caps = vec![0.0; net.sites.len() * nf];
        let mut runs: Vec<Vec<usize>> = vec![Vec::new(); nf];
        for v in 0..net.sites.len() {
            for f in 0..nf {
                let bought = buyable.is_some_and(|b| b[v * nf + f]);
                if alive[v] && (ch.capacity[v][f] > 0.0 || bought) {
                    caps[v * nf + f] = ch.capacity[v][f];
                    runs[f].push(v);
                }
            }
        }
        let legs = Legs {
            trees,
            cache: RefCell::new(HashMap::new()),
        };
        let layers: Vec<Option<Vec<Vec<usize>>>> = net
            .demands
            .iter()
            .enumerate()
            .map(|(d, dem)| {
                trees.trees[dem.from].as_ref()?;
                trees.trees[dem.to].as_ref()?;
                let mut l = vec![vec![dem.from.0]];
                l.extend(ch.chain[d].iter().map(|&f| runs[f].clone()));
                l.push(vec![dem.to.0]);
                Some(l)
            })
            .collect();
        let mut out = ChainRouting {
            net,
            ch,
            legs,
            caps,
            layers,
            routes: Vec::new(),
        };
        out.routes = (0..net.demands.len())
            .map(|d| {
                let layers = out.layers[d].as_ref()?;
                let candidates: Vec<Choice> = out.nearest(d, layers).into_iter().collect();
                let nearest = if candidates.is_empty() {
                    vec![]
                } else {
                    vec![0]
                };
                Some(DemandRoutes {
                    candidates,
                    nearest,
                })
            })
            .collect();
        out
    }

    fn nf(&self) -> usize {
        self.ch.functions.len()
    }

    /// The fixed-route LP of `mode` over the routes `cols` (demand caps `cap`, objective
    /// `obj` per unit) with every (site, function) as a resource, its rows lowered to
    /// `ceilings` when given ([`Self::ceilings`]: valid for every sequence, not only
    /// `cols`). O(Σ routes · (legs' arcs + steps)).
    fn fixed_lp(
        &self,
        cols: &[Option<DemandRoutes>],
        mode: Mode,
        cap: &[f64],
        obj: f64,
        ceilings: Option<(&[f64], &[f64])>,
    ) -> (Lp, FixedIndex) {
        let res = Resources {
            capacity: &self.caps,
            ceilings,
        };
        let mut model = Lp::new(true);
        let index = fixed::build(&mut model, self.net, cols, mode, cap, obj, None, Some(&res));
        (model, index)
    }

    /// Demand `d`'s nearest sequences as one route: each leg and step weighted by the
    /// share of the tied least-length sequences using it (see the module documentation).
    /// `None` when no sequence exists. O(k · S² + Σ legs' arcs).
    fn nearest(&self, d: usize, layers: &[Vec<usize>]) -> Option<Choice> {
        let cum = self.ch.cumulative(&self.ch.chain[d]);
        let chain = &self.ch.chain[d];
        let last = layers.len() - 1;
        // Least distance and number of tied partial sequences, from the origin and to the
        // destination.
        let mut from: Vec<Vec<(u64, f64)>> = layers
            .iter()
            .map(|l| vec![(UNREACHABLE, 0.0); l.len()])
            .collect();
        let mut to = from.clone();
        from[0][0] = (0, 1.0);
        to[last][0] = (0, 1.0);
        for j in 1..=last {
            for (i, &v) in layers[j].iter().enumerate() {
                from[j][i] = tally(
                    layers[j - 1]
                        .iter()
                        .enumerate()
                        .map(|(p, &u)| (from[j - 1][p], self.legs.dist(u, v))),
                );
            }
        }
        for j in (0..last).rev() {
            for (i, &u) in layers[j].iter().enumerate() {
                to[j][i] = tally(
                    layers[j + 1]
                        .iter()
                        .enumerate()
                        .map(|(p, &v)| (to[j + 1][p], self.legs.dist(u, v))),
                );
            }
        }
        let (best, count) = from[last][0];
        if best == UNREACHABLE || count <= 0.0 {
            return None;
        }
        let nf = self.nf();
        let mut arcs: ArcLoad = Vec::new();
        let mut processing: BTreeMap<usize, f64> = BTreeMap::new();
        for j in 0..last {
            for (p, &u) in layers[j].iter().enumerate() {
                let (du, cu) = from[j][p];
                if du == UNREACHABLE {
                    continue;
                }
                for (i, &v) in layers[j + 1].iter().enumerate() {
                    let (dv, cv) = to[j + 1][i];
                    let leg = self.legs.dist(u, v);
                    if dv == UNREACHABLE || leg == UNREACHABLE {
                        continue;
                    }
                    if du.saturating_add(leg).saturating_add(dv) != best {
                        continue;
                    }
                    let share = cu * cv / count;
                    arcs = merge(&arcs, &self.legs.get(u, v), share * cum[j]);
                    if j + 1 < last {
                        *processing.entry(v * nf + chain[j]).or_default() += share * cum[j];
                    }
                }
            }
        }
        Some(Choice {
            site: SiteIdx(layers[0][0]),
            length: best,
            arcs,
            processing: processing.into_iter().collect(),
        })
    }

    /// The route of one sequence `seq` (origin, one site per step, destination) of demand
    /// `d`. O(k + Σ its legs' arcs).
    fn column(&self, d: usize, seq: &[usize]) -> Choice {
        let cum = self.ch.cumulative(&self.ch.chain[d]);
        let nf = self.nf();
        let mut arcs: ArcLoad = Vec::new();
        let mut processing: Vec<(usize, f64)> = Vec::new();
        let mut length = 0u64;
        for j in 0..seq.len() - 1 {
            arcs = merge(&arcs, &self.legs.get(seq[j], seq[j + 1]), cum[j]);
            length = length.saturating_add(self.legs.dist(seq[j], seq[j + 1]));
            if j + 2 < seq.len() {
                let r = seq[j + 1] * nf + self.ch.chain[d][j];
                processing = merge(&processing, &[(r, cum[j])], 1.0);
            }
        }
        Choice {
            site: SiteIdx(seq[0]),
            length,
            arcs,
            processing,
        }
    }

    /// Demand `d`'s cheapest sequence when an arc costs `arc_price` and a (site, function)
    /// `res_price` per unit of its load: its price per origin unit and the sequence.
    /// `None` when no sequence exists. O(k · S² + leg prices not yet in `leg_price`).
    fn cheapest(
        &self,
        d: usize,
        arc_price: &[f64],
        res_price: &[f64],
        leg_price: &mut HashMap<(usize, usize), f64>,
    ) -> Option<(f64, Vec<usize>)> {
        let layers = self.layers[d].as_ref()?;
        let cum = self.ch.cumulative(&self.ch.chain[d]);
        let nf = self.nf();
        let last = layers.len() - 1;
        let mut best: Vec<Vec<(f64, usize)>> = layers
            .iter()
            .map(|l| vec![(f64::INFINITY, 0); l.len()])
            .collect();
        best[0][0] = (0.0, 0);
        for j in 1..=last {
            for (i, &v) in layers[j].iter().enumerate() {
                let step = if j < last {
                    cum[j - 1] * res_price[v * nf + self.ch.chain[d][j - 1]]
                } else {
                    0.0
                };
                for (p, &u) in layers[j - 1].iter().enumerate() {
                    let at = best[j - 1][p].0;
                    if !at.is_finite() || self.legs.dist(u, v) == UNREACHABLE {
                        continue;
                    }
                    let leg = *leg_price.entry((u, v)).or_insert_with(|| {
                        self.legs
                            .get(u, v)
                            .iter()
                            .map(|&(a, f)| f * arc_price[a])
                            .sum()
                    });
                    let c = at + cum[j - 1] * leg + step;
                    if c < best[j][i].0 {
                        best[j][i] = (c, p);
                    }
                }
            }
        }
        let (price, _) = best[last][0];
        price.is_finite().then(|| (price, trace(layers, &best)))
    }

    /// The demand `d`'s least-length sequence (the first by site order among ties), to
    /// start column generation from.
    fn shortest(&self, d: usize) -> Option<Vec<usize>> {
        let layers = self.layers[d].as_ref()?;
        let mut best: Vec<Vec<(u64, usize)>> = layers
            .iter()
            .map(|l| vec![(UNREACHABLE, 0); l.len()])
            .collect();
        best[0][0] = (0, 0);
        for j in 1..layers.len() {
            for (i, &v) in layers[j].iter().enumerate() {
                for (p, &u) in layers[j - 1].iter().enumerate() {
                    let (at, leg) = (best[j - 1][p].0, self.legs.dist(u, v));
                    if at == UNREACHABLE || leg == UNREACHABLE {
                        continue;
                    }
                    if at.saturating_add(leg) < best[j][i].0 {
                        best[j][i] = (at.saturating_add(leg), p);
                    }
                }
            }
        }
        let last = layers.len() - 1;
        (best[last][0].0 != UNREACHABLE).then(|| trace(layers, &best))
    }

    /// Ceilings valid for every sequence (see the module documentation): per arc and per
    /// resource. O(Σ chain lengths + arcs + resources).
    fn ceilings(&self, cap: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let nf = self.nf();
        let mut any_arc = 0.0;
        let mut per_fn = vec![0.0; nf];
        for ((layers, chain), &c) in self.layers.iter().zip(&self.ch.chain).zip(cap) {
            if layers.is_none() {
                continue;
            }
            let cum = self.ch.cumulative(chain);
            any_arc += c * cum.iter().sum::<f64>();
            for (j, &f) in chain.iter().enumerate() {
                per_fn[f] += c * cum[j];
            }
        }
        let res = (0..self.caps.len())
            .map(|r| per_fn[r % nf.max(1)])
            .collect();
        (vec![any_arc; self.net.arcs.len()], res)
    }

    /// The fixed-route LP of `mode` with demand caps `cap`, verified (nearest: the model of
    /// the nearest routes and its weak-duality bound; steered: column generation, then the
    /// bound over every sequence), its per-resource results turned into per-function use.
    fn solve(&self, view: &Surviving, mode: Mode, cap: &[f64], at_stake: f64) -> Result<Verified> {
        let ladder = solve::ladder();
        let verified = match mode {
            Mode::Nearest => {
                let (model, index) = self.fixed_lp(&self.routes, mode, cap, 1.0, None);
                self.verify(&model, &index, at_stake, ladder, &fixed::weak_dual_bound)?
            }
            Mode::Steered => self.steered(cap, at_stake, ladder)?,
        };
        Ok(self.with_functions(view, verified))
    }

    /// Steered: column generation over sequences, then the ladder with the bound over every
    /// sequence. See the module documentation for the cost.
    fn steered(&self, cap: &[f64], at_stake: f64, ladder: &[&dyn lp::Backend]) -> Result<Verified> {
        let mut cols = self.first_columns();
        let (arc_ceiling, res_ceiling) = self.ceilings(cap);
        let build = |cols: &[Option<DemandRoutes>]| {
            let ceilings = Some((&arc_ceiling[..], &res_ceiling[..]));
            self.fixed_lp(cols, Mode::Steered, cap, 1.0, ceilings)
        };
        let live: Vec<usize> = (0..self.net.demands.len())
            .filter(|&d| cap[d] > 0.0)
            .collect();
        for _ in 0..MAX_ROUNDS {
            let (model, index) = build(&cols.0);
            if model.num_vars() == 0 {
                break;
            }
            let Ok(sol) = lp::solve(&model) else { break };
            if !self.price_in(&mut cols, &index, &sol, &live) {
                break;
            }
        }
        let (model, index) = build(&cols.0);
        let upper = |lp: &Lp, sol: &LpSolution| self.bound(lp, &index, sol, cap);
        self.verify(&model, &index, at_stake, ladder, &upper)
    }

    /// [`super::verify_fixed_with`] over this outage's resources.
    fn verify(
        &self,
        model: &Lp,
        index: &fixed::FixedIndex,
        at_stake: f64,
        ladder: &[&dyn lp::Backend],
        upper: &super::UpperBound<'_>,
    ) -> Result<Verified> {
        let n = self.caps.len();
        super::verify_fixed_with(self.net, model, index, at_stake, ladder, n, upper)
    }

    /// The clipped prices of a solution's arc and resource rows. O(arcs + resources).
    fn prices(&self, index: &fixed::FixedIndex, sol: &LpSolution) -> (Vec<f64>, Vec<f64>) {
        let price = |row: &Option<usize>| row.map_or(0.0, |r| sol.duals[r].max(0.0));
        (
            index.arc_row.iter().map(price).collect(),
            index.site_row.iter().map(price).collect(),
        )
    }

    /// An upper bound on the steered LP over *every* sequence from `sol`'s row prices:
    /// `Σ_rows rhs · y + Σ_d cap_d · max(0, 1 − cheapest_d)` (weak duality: a sequence of
    /// `x` origin units uses exactly its coefficients times `x` of each row, and a demand's
    /// sequences sum to at most `cap_d`). Valid for any nonnegative prices. O(Σ_d k · S²
    /// + Σ legs' arcs).
    fn bound(&self, lp: &Lp, index: &fixed::FixedIndex, sol: &LpSolution, cap: &[f64]) -> f64 {
        let (arc_price, res_price) = self.prices(index, sol);
        let rows = index.priced_rows(lp, &arc_price, &res_price);
        let mut leg_price = HashMap::new();
        let demands: f64 = (0..self.net.demands.len())
            .filter_map(|d| {
                let (p, _) = self.cheapest(d, &arc_price, &res_price, &mut leg_price)?;
                Some(cap[d] * (1.0 - p).max(0.0))
            })
            .sum();
        rows + demands
    }

    /// `v` (a verification over resources) with its per-resource load and prices turned
    /// into per-(site, function) [`FunctionUse`] rows, as the chain engines report them,
    /// and no site rows. O(sites · functions).
    fn with_functions(&self, view: &Surviving, mut v: Verified) -> Verified {
        let nf = self.nf();
        let n = self.net.sites.len();
        let mut functions = Vec::new();
        for s in 0..n {
            for f in 0..nf {
                let r = s * nf + f;
                if !(view.site_alive[s] && self.ch.capacity[s][f] > 0.0) {
                    continue;
                }
                functions.push(FunctionUse {
                    site: SiteIdx(s),
                    function: f,
                    load: v.allocation.site_load.get(r).copied().unwrap_or(0.0),
                    price: v
                        .site_has_row
                        .get(r)
                        .copied()
                        .unwrap_or(false)
                        .then(|| v.site_price[r]),
                });
            }
        }
        v.functions = functions;
        v.allocation.site_load = vec![0.0; n];
        v.site_price = vec![0.0; n];
        v.site_has_row = vec![false; n];
        v.bound_price = (v.arc_price.clone(), Vec::new());
        v
    }

    /// The offered load: every surviving demand's required on its nearest sequences, per
    /// arc and per (site, function). O(Σ routes' arcs + arcs + sites · functions).
    pub fn offered(&self) -> Offered {
        super::offered_on(self.net, &self.routes, &self.caps, self.nf())
    }

    /// Growth headroom under `mode` (the largest λ with every surviving demand of
    /// `required > 0` sending `λ · required` at once on its fixed routes): no value without
    /// such a demand, 0 when one has no sequence. Nearest: `min capacity / load` over the
    /// arcs and (site, function) pairs of the offered load (loads are linear in λ), exact.
    /// Steered: column generation as for the served LP with each demand's columns tied to
    /// `λ · required_d` (a sequence enters when cheaper than the demand's columns), then the
    /// ladder: lower bound the allocation scaled into the real capacities, upper bound the
    /// priced quotient `Σ rows rhs·y / Σ_d required_d · cheapest_d` over every sequence.
    /// The a-priori ceiling Λ: per function, its surviving capacity over what the demands
    /// put through it per unit of λ; and every unit crosses some arc, so `Σ arc capacity /
    /// Σ_d required_d · min_j G_j`. Cost: as [`ChainRouting::evaluate`].
    pub fn headroom(&self, mode: Mode) -> Result<Headroom> {
        let net = self.net;
        let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
        let active: Vec<usize> = (0..net.demands.len())
            .filter(|&d| self.routes[d].is_some() && required[d] > 0.0)
            .collect();
        if active.is_empty() {
            return Ok(Headroom::absent());
        }
        if active.iter().any(|&d| {
            self.routes[d]
                .as_ref()
                .is_some_and(|r| r.candidates.is_empty())
        }) {
            return Ok(Headroom::zero());
        }
        if mode == Mode::Nearest {
            let o = self.offered();
            let worst = o.max_link_util.max(o.max_site_util);
            let lambda = if worst > 0.0 { 1.0 / worst } else { 0.0 };
            return Ok(Headroom {
                value: Some(lambda),
                lower: lambda,
                upper: lambda,
                proven: true,
            });
        }
        let ceiling = self.ceiling(&active, &required);
        if ceiling.is_nan() || ceiling <= 0.0 {
            return Ok(Headroom::zero());
        }
        let caps = super::headroom::lambda_caps(net.demands.len(), &active, &required, ceiling);
        let (arc_ceiling, res_ceiling) = self.ceilings(&caps);
        let build = |cols: &[Option<DemandRoutes>]| {
            let ceilings = Some((&arc_ceiling[..], &res_ceiling[..]));
            let (mut model, index) = self.fixed_lp(cols, Mode::Steered, &caps, 0.0, ceilings);
            let row_floor = super::headroom::tie_to_lambda(
                &mut model, &index, &active, &required, &caps, ceiling,
            );
            (model, index, row_floor)
        };
        let mut cols = self.first_columns();
        for _ in 0..MAX_ROUNDS {
            let (model, index, _) = build(&cols.0);
            let Ok(sol) = lp::solve(&model) else { break };
            if !self.price_in(&mut cols, &index, &sol, &active) {
                break;
            }
        }
        let (model, index, row_floor) = build(&cols.0);
        let real_arc: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
        super::headroom::climb(&model, &row_floor, ceiling, &mut |sol, x| {
            let lower = super::headroom::scaled_factor(
                &index, x, &active, &required, &real_arc, &self.caps,
            );
            let (arc_price, res_price) = self.prices(&index, sol);
            let worth = index.priced_rows(&model, &arc_price, &res_price);
            let mut leg_price = HashMap::new();
            let priced: f64 = active
                .iter()
                .filter_map(|&d| {
                    let (p, _) = self.cheapest(d, &arc_price, &res_price, &mut leg_price)?;
                    Some(required[d] * p)
                })
                .sum();
            (lower, solve::concurrent::quotient(worth, priced))
        })
    }

    /// The a-priori ceiling of [`ChainRouting::headroom`]. O(Σ chain lengths + arcs +
    /// resources).
    fn ceiling(&self, active: &[usize], required: &[f64]) -> f64 {
        let nf = self.nf();
        let mut need = vec![0.0; nf];
        let mut crossing = 0.0;
        for &d in active {
            let cum = self.ch.cumulative(&self.ch.chain[d]);
            crossing += required[d] * cum.iter().copied().fold(f64::INFINITY, f64::min);
            for (j, &f) in self.ch.chain[d].iter().enumerate() {
                need[f] += required[d] * cum[j];
            }
        }
        let arcs: f64 = self.net.arcs.iter().map(|a| a.capacity).sum();
        let mut ceiling = arcs / crossing;
        for (f, &n) in need.iter().enumerate() {
            if n > 0.0 {
                let cap: f64 = (0..self.net.sites.len())
                    .map(|v| self.caps[v * nf + f])
                    .sum();
                ceiling = ceiling.min(cap / n);
            }
        }
        ceiling
    }

    /// One least-length sequence per demand that has one (the columns column generation
    /// starts from), with the sequences already in, per demand.
    fn first_columns(&self) -> (Vec<Option<DemandRoutes>>, Vec<HashSet<Vec<usize>>>) {
        let n = self.net.demands.len();
        let mut seen: Vec<HashSet<Vec<usize>>> = vec![HashSet::new(); n];
        let cols = (0..n)
            .map(|d| {
                self.layers[d].as_ref()?;
                let candidates = match self.shortest(d) {
                    Some(seq) => {
                        let c = self.column(d, &seq);
                        seen[d].insert(seq);
                        vec![c]
                    }
                    None => Vec::new(),
                };
                Some(DemandRoutes {
                    candidates,
                    nearest: Vec::new(),
                })
            })
            .collect();
        (cols, seen)
    }

    /// One pricing round: for each demand of `which`, its cheapest sequence at `sol`'s
    /// prices joins its columns when cheaper (by [`WALK_PRICE_TOL`]) than 1 and than every
    /// column it has. Whether one joined. O(Σ_d k · S² + Σ columns' nonzeros).
    fn price_in(
        &self,
        cols: &mut (Vec<Option<DemandRoutes>>, Vec<HashSet<Vec<usize>>>),
        index: &fixed::FixedIndex,
        sol: &LpSolution,
        which: &[usize],
    ) -> bool {
        let (arc_price, res_price) = self.prices(index, sol);
        let mut leg_price = HashMap::new();
        let mut added = false;
        for &d in which {
            let Some(r) = cols.0[d].as_mut() else {
                continue;
            };
            if r.candidates.is_empty() {
                continue;
            }
            let present = r
                .candidates
                .iter()
                .map(|c| price_of(c, &arc_price, &res_price))
                .fold(1.0, f64::min);
            let Some((p, seq)) = self.cheapest(d, &arc_price, &res_price, &mut leg_price) else {
                continue;
            };
            if p < present - WALK_PRICE_TOL && !cols.1[d].contains(&seq) {
                r.candidates.push(self.column(d, &seq));
                cols.1[d].insert(seq);
                added = true;
            }
        }
        added
    }

    /// One outage evaluated under `mode`: cut-off demands (no sequence: no path at all, or
    /// no sequence of sites running the chain on the shortest paths), the fixed-route LP
    /// for served_required and, when some surviving demand offers more, for throughput,
    /// ended in `solve::finish_with`. The evaluation carries no proof (a
    /// journal's re-check is defined for the best re-route only).
    pub fn evaluate(&self, outage: &Outage, mode: Mode) -> Result<Evaluation> {
        let net = self.net;
        let view = Surviving::new(net, outage, None);
        let cut_off: Vec<(usize, Unservable)> = (0..net.demands.len())
            .filter(|&d| {
                net.demands[d].required > 0.0
                    && self.routes[d]
                        .as_ref()
                        .is_some_and(|r| r.candidates.is_empty())
            })
            .map(|d| {
                let dem = &net.demands[d];
                let why = if self.legs.dist(dem.from.0, dem.to.0) == UNREACHABLE {
                    Unservable::NoPath
                } else {
                    Unservable::NoProcessing
                };
                (d, why)
            })
            .collect();
        let live = |d: usize| self.routes[d].is_some();
        let servable = |d: usize| {
            self.routes[d]
                .as_ref()
                .is_some_and(|r| !r.candidates.is_empty())
        };
        let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
        let stake = |caps: &[f64]| -> f64 {
            (0..net.demands.len())
                .filter(|&d| servable(d))
                .map(|d| caps[d])
                .sum()
        };
        let solved = self.solve(&view, mode, &required, stake(&required))?;
        let volume = if (0..net.demands.len())
            .any(|d| live(d) && net.demands[d].volume > net.demands[d].required)
        {
            let volume: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
            Some(self.solve(&view, mode, &volume, stake(&volume))?)
        } else {
            None
        };
        let mut eval = solve::finish_with(net, &view, cut_off, solved, volume);
        eval.proof = None;
        Ok(eval)
    }
}

/// The least distance over `(from, leg)` pairs (`from`: least distance and count of tied
/// partial sequences up to the previous node) and the number of tied sequences reaching
/// it: `(UNREACHABLE, 0)` when none. O(pairs).
fn tally(pairs: impl Iterator<Item = ((u64, f64), u64)>) -> (u64, f64) {
    let mut best = (UNREACHABLE, 0.0);
    for ((d, c), leg) in pairs {
        if d == UNREACHABLE || leg == UNREACHABLE {
            continue;
        }
        let at = d.saturating_add(leg);
        if at < best.0 {
            best = (at, c);
        } else if at == best.0 {
            best.1 += c;
        }
    }
    best
}

/// The sequence a layered pass chose: from the destination back along each node's
/// predecessor (`back[j][i].1`, an index into layer `j − 1`). O(layers).
fn trace<T>(layers: &[Vec<usize>], back: &[Vec<(T, usize)>]) -> Vec<usize> {
    let mut seq = vec![0; layers.len()];
    let mut p = 0;
    for j in (0..layers.len()).rev() {
        seq[j] = layers[j][p];
        p = back[j][p].1;
    }
    seq
}

/// The price of one route per origin unit. O(its arcs + steps).
fn price_of(c: &Choice, arc_price: &[f64], res_price: &[f64]) -> f64 {
    let arcs: f64 = c.arcs.iter().map(|&(a, f)| f * arc_price[a]).sum();
    let steps: f64 = c.processing.iter().map(|&(r, f)| f * res_price[r]).sum();
    arcs + steps
}

/// The steered routing of service chains as the model purchases of function capacity are
/// made for ([`crate::expand::chain_buy::close_for`], [`crate::expand::chain_buy::plan_for`]).
pub struct Steered<'a> {
    /// The baseline trees (routes do not depend on capacities, so a purchase keeps them).
    pub trees: &'a Trees,
}

impl ChainModel for Steered<'_> {
    /// [`ChainRouting::evaluate`] under [`Mode::Steered`] on `outage`'s matrix view.
    fn evaluate(&self, net: &Network, outage: &Outage) -> Result<Evaluation> {
        let net = net.view(outage.matrix);
        let trees = self.trees.for_outage(net, outage);
        ChainRouting::new(net, &trees, outage).evaluate(outage, Mode::Steered)
    }

    /// The steered model as a layered flow between the sites of consecutive steps (no
    /// column generation, so the purchase LP is one solve): per demand `d` and pair of
    /// consecutive layers, `z ≥ 0` per pair of sites `(u, v)` whose leg exists, carrying
    /// `G_j ·` the leg's per-hop split on the arc rows and `G_j` on the row of the next
    /// step's function at `v`; flow conserved at every step's site, `F_d ≤ required_d`
    /// leaving the origin and reaching the destination. Any such flow decomposes into
    /// sequences with the same loads, and every split among sequences is such a flow, so
    /// the optimum is the steered one. A surviving slot's site is in its step's layer even
    /// at capacity 0; its row is `Σ ≤ capacity + b_s`. Size O(Σ_d k · S² · leg arcs).
    fn served_model(&self, model: &mut Lp, at: &BuyAt<'_>) -> Vec<usize> {
        let BuyAt {
            net,
            outage,
            offer,
            buy,
        } = *at;
        let net = net.view(outage.matrix);
        let ch = net.chains.as_ref().expect("a network with functions");
        let nf = ch.functions.len();
        let trees = self.trees.for_outage(net, outage);
        let alive = outage.site_alive(net);
        let mut slot_var = vec![None; net.sites.len() * nf];
        for (s, &(v, f)) in offer.slots.iter().enumerate() {
            if alive[v] && offer.cands.max[s] > 0.0 && offer.need[f] > 0.0 {
                slot_var[v.0 * nf + f] = Some(buy[s]);
            }
        }
        let buyable: Vec<bool> = slot_var.iter().map(Option::is_some).collect();
        let cr = ChainRouting::with_buyable(net, &trees, outage, Some(&buyable));
        let mut arc_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.arcs.len()];
        let mut res_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); cr.caps.len()];
        let mut served = Vec::new();
        for (d, dem) in net.demands.iter().enumerate() {
            let Some(layers) = cr.layers[d].as_ref() else {
                continue;
            };
            let cum = ch.cumulative(&ch.chain[d]);
            let flow = model.add_var(0.0, dem.required, 0.0);
            model.magnitude[flow] = dem.required;
            served.push(flow);
            let last = layers.len() - 1;
            // Per layer and site: Σ in − Σ out.
            let mut balance: Vec<Vec<Vec<(usize, f64)>>> =
                layers.iter().map(|l| vec![Vec::new(); l.len()]).collect();
            balance[0][0].push((flow, 1.0));
            balance[last][0].push((flow, -1.0));
            for j in 0..last {
                for (p, &u) in layers[j].iter().enumerate() {
                    for (i, &v) in layers[j + 1].iter().enumerate() {
                        if cr.legs.dist(u, v) == UNREACHABLE {
                            continue;
                        }
                        let z = model.add_var(0.0, f64::INFINITY, 0.0);
                        model.magnitude[z] = dem.required;
                        balance[j][p].push((z, -1.0));
                        balance[j + 1][i].push((z, 1.0));
                        for &(a, fr) in cr.legs.get(u, v).iter() {
                            arc_terms[a].push((z, cum[j] * fr));
                        }
                        if j + 1 < last {
                            res_terms[v * nf + ch.chain[d][j]].push((z, cum[j]));
                        }
                    }
                }
            }
            for row in balance.into_iter().flatten() {
                model.add_row(row, lp::Sense::Eq, 0.0);
            }
        }
        for (a, t) in arc_terms.into_iter().enumerate() {
            if !t.is_empty() {
                model.add_row(t, lp::Sense::Le, net.arcs[a].capacity);
            }
        }
        for (r, mut t) in res_terms.into_iter().enumerate() {
            if t.is_empty() {
                continue;
            }
            t.extend(slot_var[r].map(|b| (b, -1.0)));
            model.add_row(t, lp::Sense::Le, cr.caps[r]);
        }
        served
    }
}
