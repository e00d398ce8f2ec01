//! The (1−ε) engine on the layered model of service chains: the multiplicative-weights
//! packing scheme of [`crate::solve::approx`] (Garg–Könemann, with Fleischer's phases)
//! whose columns are the layered walks of [`super::ChainWalk`], priced by the walk
//! engine's own layered Dijkstra (`Rows::price`). Its answer is an *interval* proven by
//! the layered verifier, never a trusted value.
//!
//! **Packing LP.** Maximise `Σ λ_w` over layered walks `w` (origin → site of `f1` → … →
//! site of `fk` → destination) under the rows of the layered edge LP (`layered_rows`:
//! one per usable arc, per (site, function) that can run, per demand cap, with the edge
//! LP's lowered right-hand sides). One unit of `w` puts `G_j = g1 · … · gj` on every arc
//! crossed in leg `j` and on the row of `f_{j+1}` where it is applied (the volume entering
//! it), summed when a row is used twice, and 1 on its demand's row
//! (`Rows::coefficients`).
//!
//! **Method.** Every row `r` has a length `l_r`, initially `1 / rhs_r` (the scheme's
//! `δ / rhs_r` up to a common factor, which changes no choice the run makes; the stopping
//! rule here is the certified interval, not the analysis' `D(l) >= 1`). A walk's length is
//! `Σ c_r(w) · l_r`; one pricing pass (one layered Dijkstra per (origin, chain) group)
//! gives every demand's cheapest walk at the arc and function lengths, to which its
//! demand row's length is added. A phase keeps a lower bound `α` on the least walk length;
//! a round routes every demand whose cheapest walk is shorter than `(1+ε)·α`, each the
//! bottleneck amount of its walk, all scaled together so that no row receives more than
//! its right-hand side, and multiplies each row's length by `1 + ε · added / rhs`. When no
//! walk is short, `α` rises to the least length (a new phase).
//!
//! **Bounds.** Lower: the walks' flows scaled by their largest overload (feasible), plus
//! a few top-up passes that route each short demand's cheapest walk over the rows with
//! room left into that room, then [`chain::repair`] through the walk engine's
//! verification (`verified`): decomposed, each walk scaled into the real capacities, so
//! feasible by construction whatever the run did. Upper: every
//! round's lengths `l` scaled by the `θ >= 0` that minimises the certificate
//! `θ · Σ rhs·l + Σ_d b_d · max(0, 1 − θ · π_d)` ([`best_scale`]; `π_d` the cheapest
//! layered walk at `l`, known from the round's pricing), the best prices of all rounds
//! kept; [`chain::dual_bound`] recomputes that bound from the prices alone (weak duality,
//! valid for any nonnegative prices). The run stops when the verified interval is within
//! `ε ×` the demand at stake (the caps of the demands in the LP), or after [`MAX_ROUNDS`]
//! rounds with whatever interval it has (reported unproven, with its width). The result
//! is `proven` only when the bounds meet within [`crate::tol::PROOF_GAP_TOL`].
//!
//! **Invariant.** Lengths only grow, so `α` stays a lower bound on every walk's length
//! within a phase; lengths are renormalised (divided by `RENORM`) when one grows past
//! it, which rescales `α` with them and changes no choice.
//!
//! **Complexity.** A round is one pricing pass, `O(groups · (k + 1) · (arcs + sites) ·
//! log)`, plus `O(Σ walk lengths · log)` for routing; a verification is one
//! [`chain::repair`] and one [`chain::dual_bound`]. Memory: the distinct walks with flow
//! and `O(arcs + function rows + demands)`.
//!
//! Determinism: the pricing breaks ties by hop count and layered node index, walks are
//! routed in group and demand order, so the result depends only on the network, the
//! outage and ε.

use std::collections::{BTreeMap, HashMap};

use super::rows::{RowKey, Rows};
use super::skeleton::layered_rows;
use super::verify::{verified, with_walks};
use super::{ChainWalk, Solved};
use crate::error::{Error, Result};
use crate::model::{FunctionIdx, Network};
use crate::scenario::Outage;
use crate::solve::approx::{MAX_EPSILON, best_scale, epsilon_ok};
use crate::solve::chain::{self, Layered};
use crate::solve::evaluator::{Evaluated, Evaluator, Warm};
use crate::solve::surviving::{Surviving, Unservable};
use crate::solve::types::{Evaluation, Verified};
use crate::solve::{cancel, needs_volume_lp};

/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;

/// Rounds (one pricing pass each) before a run stops with the interval it has.
pub const MAX_ROUNDS: usize = 4000;
/// Stored lengths are renormalised when one exceeds this.
const RENORM: f64 = 1e150;
/// Pricing passes that fill the room the scaled flows leave, per verification.
const TOP_UP_PASSES: usize = 4;

/// One number per row of the packing LP (a length or a load).
#[derive(Debug, Clone)]
struct PerRow {
    /// Per arc of `Network::arcs` (0 for an arc without a row).
    arc: Vec<f64>,
    /// Per (site, function) row.
    function: BTreeMap<(SiteIdx, FunctionIdx), f64>,
    /// Per demand (0 for a demand outside the LP).
    demand: Vec<f64>,
}

impl PerRow {
    /// `value(rhs)` on every row of `layered`, 0 elsewhere. O(arcs + rows + demands).
    fn new(layered: &Layered, value: impl Fn(f64) -> f64) -> PerRow {
        let mut demand = vec![0.0; layered.bound.len()];
        for &d in layered.groups.iter().flat_map(|g| &g.demands) {
            demand[d] = value(layered.bound[d]);
        }
        PerRow {
            arc: (0..layered.arc_cap.len())
                .map(|a| {
                    if layered.arc_row[a].is_some() {
                        value(layered.arc_cap[a])
                    } else {
                        0.0
                    }
                })
                .collect(),
            function: layered
                .function_cap
                .iter()
                .map(|(&k, &cap)| (k, value(cap)))
                .collect(),
            demand,
        }
    }

    /// The entry of row `key` (which exists). O(log function rows).
    fn at(&mut self, key: RowKey) -> &mut f64 {
        match key {
            RowKey::Arc(a) => &mut self.arc[a],
            RowKey::Function(v, f) => self
                .function
                .get_mut(&(v, f))
                .expect("a walk uses only function rows of the LP"),
            RowKey::Demand(d) => &mut self.demand[d],
        }
    }

    /// Every entry, in no particular order.
    fn values(&self) -> impl Iterator<Item = f64> + '_ {
        self.arc
            .iter()
            .chain(self.function.values())
            .chain(&self.demand)
            .copied()
    }
}

/// A run in progress: lengths, raw loads and the distinct walks with their raw flows.
struct Run<'r, 'a> {
    rows: &'r Rows<'a>,
    eps: f64,
    len: PerRow,
    load: PerRow,
    walks: Vec<ChainWalk>,
    flow: Vec<f64>,
    index: HashMap<ChainWalk, usize>,
}

impl Run<'_, '_> {
    /// Routes each walk of `picked` its bottleneck amount, all scaled together so that no
    /// row receives more than its right-hand side, and grows the lengths of the rows they
    /// use. O(Σ walk lengths · log).
    fn route(&mut self, picked: Vec<ChainWalk>) {
        let rows = self.rows;
        let mut added: BTreeMap<RowKey, f64> = BTreeMap::new();
        let mut amounts = Vec::with_capacity(picked.len());
        for w in &picked {
            let coefficients = rows.coefficients(w);
            let amount = coefficients
                .iter()
                .map(|&(key, c)| rows.rhs(key) / c)
                .fold(f64::INFINITY, f64::min);
            for &(key, c) in &coefficients {
                *added.entry(key).or_default() += amount * c;
            }
            amounts.push(amount);
        }
        let sigma = added
            .iter()
            .map(|(&key, &x)| x / rows.rhs(key))
            .fold(1.0, f64::max);
        for (key, x) in added {
            let x = x / sigma;
            *self.load.at(key) += x;
            *self.len.at(key) *= 1.0 + self.eps * x / rows.rhs(key);
        }
        for (w, amount) in picked.into_iter().zip(amounts) {
            let next = self.flow.len();
            let k = *self.index.entry(w.clone()).or_insert(next);
            if k == next {
                self.walks.push(w);
                self.flow.push(0.0);
            }
            self.flow[k] += amount / sigma;
        }
    }

    /// The largest raw overload `load / rhs` of any row, at least 1. O(rows).
    fn overload(&self) -> f64 {
        let rows = self.rows;
        let layered = rows.layered;
        let arcs = self
            .load
            .arc
            .iter()
            .zip(&layered.arc_cap)
            .filter(|(x, _)| **x > 0.0)
            .map(|(x, c)| x / c);
        let functions = self
            .load
            .function
            .iter()
            .map(|(k, x)| x / layered.function_cap[k]);
        let demands = self
            .load
            .demand
            .iter()
            .zip(&layered.bound)
            .filter(|(x, _)| **x > 0.0)
            .map(|(x, b)| x / b);
        arcs.chain(functions).chain(demands).fold(1.0, f64::max)
    }

    /// Divides every length by `RENORM` when one has grown past it; returns the factor
    /// (1 when nothing changed). O(rows).
    fn renormalise(&mut self) -> f64 {
        if self.len.values().fold(0.0, f64::max) <= RENORM {
            return 1.0;
        }
        self.len.arc.iter_mut().for_each(|l| *l /= RENORM);
        self.len.function.values_mut().for_each(|l| *l /= RENORM);
        self.len.demand.iter_mut().for_each(|l| *l /= RENORM);
        RENORM
    }

    /// The run's answer so far, with the prices `prices`, as the walk engine's
    /// verification reads one: the walks with their flows scaled by the largest overload
    /// (feasible), then up to `TOP_UP_PASSES` passes that fill what the rows leave: one
    /// pricing pass at the current lengths over the rows with room left (a full row's
    /// price infinite), and each demand in group order takes on its cheapest walk what the
    /// walk's tightest row leaves (room updated walk by walk, so the whole stays within
    /// every row). O(Σ walk lengths · log + `TOP_UP_PASSES` pricing passes).
    fn answer(&self, prices: &Prices) -> Solved {
        let rows = self.rows;
        let u = self.overload();
        let mut walks = self.walks.clone();
        let mut flow: Vec<f64> = self.flow.iter().map(|f| f / u).collect();
        let mut room = PerRow::new(rows.layered, |rhs| rhs);
        for (w, &f) in walks.iter().zip(&flow) {
            for (key, c) in rows.coefficients(w) {
                *room.at(key) -= c * f;
            }
        }
        let every = vec![f64::NEG_INFINITY; rows.net.demands.len()];
        let open = |room: f64, len: f64| if room > 0.0 { len } else { f64::INFINITY };
        for _ in 0..TOP_UP_PASSES {
            let y: Vec<f64> = room
                .arc
                .iter()
                .zip(&self.len.arc)
                .map(|(&r, &l)| open(r, l))
                .collect();
            let z: BTreeMap<(SiteIdx, FunctionIdx), f64> = room
                .function
                .iter()
                .map(|(k, &r)| (*k, open(r, self.len.function[k])))
                .collect();
            let mut added = false;
            for w in rows.price(&y, &z, Some(&every)).walks {
                let coefficients = rows.coefficients(&w);
                let amount = coefficients
                    .iter()
                    .map(|&(key, c)| *room.at(key) / c)
                    .fold(f64::INFINITY, f64::min);
                if amount > 0.0 {
                    for &(key, c) in &coefficients {
                        *room.at(key) -= c * amount;
                    }
                    walks.push(w);
                    flow.push(amount);
                    added = true;
                }
            }
            if !added {
                break;
            }
        }
        Solved {
            value: flow.iter().sum(),
            walks,
            flow,
            arc_price: prices.arc.clone(),
            fn_price: prices.function.clone(),
            ..Default::default()
        }
    }
}

/// Prices of the certificate: the lengths of one round scaled by its best `θ`.
#[derive(Debug, Clone, Default)]
struct Prices {
    arc: Vec<f64>,
    function: BTreeMap<(SiteIdx, FunctionIdx), f64>,
}

/// The certificate at lengths `len` with cheapest walk costs `cost` (per demand, at the
/// arc and function lengths): its least value over `θ >= 0` ([`best_scale`]) and the
/// prices `θ · len`. O(rows + demands · log demands).
fn certificate(layered: &Layered, len: &PerRow, cost: &[f64]) -> (f64, Prices) {
    let a: f64 = layered
        .arc_cap
        .iter()
        .zip(&len.arc)
        .map(|(c, l)| c * l)
        .chain(
            layered
                .function_cap
                .iter()
                .map(|(k, c)| c * len.function[k]),
        )
        .sum();
    let terms: Vec<(f64, f64)> = layered
        .groups
        .iter()
        .flat_map(|g| &g.demands)
        .map(|&d| (layered.bound[d], cost[d].min(f64::MAX)))
        .collect();
    let (value, theta) = best_scale(a, &terms);
    let prices = Prices {
        arc: len.arc.iter().map(|l| theta * l).collect(),
        function: len.function.iter().map(|(&k, l)| (k, theta * l)).collect(),
    };
    (value, prices)
}

/// One LP of an outage (caps `caps`) by the scheme of the module documentation, verified
/// by the walk engine's checks (`verified`: row residual, [`chain::repair`] lower bound,
/// [`chain::dual_bound`] upper bound), with the demands it cuts off. `eps` satisfies
/// [`epsilon_ok`]. Cost: see the module documentation.
pub fn solve_caps(
    net: &Network,
    view: &Surviving,
    caps: &[f64],
    eps: f64,
) -> Result<(Verified, Vec<(usize, Unservable)>)> {
    let (layered, cut_off) = layered_rows(net, view, caps);
    if layered.groups.is_empty() {
        // Nothing in the LP: the layered edge LP's answer (empty) with its verification.
        return chain::solve_verified(net, view, caps);
    }
    // A second copy of the same rows, into which each check writes the walks' edges.
    let (mut scratch, _) = layered_rows(net, view, caps);
    let rows = Rows::new(net, view, &layered);
    let at_stake: f64 = (0..net.demands.len())
        .filter(|&d| rows.group_of[d] != super::NONE)
        .map(|d| caps[d])
        .sum();
    let target = eps * at_stake;
    let check = |run: &Run, prices: &Prices, scratch: &mut Layered| -> Verified {
        let s = run.answer(prices);
        let x = with_walks(net, scratch, &rows.group_of, &s);
        let mut v = verified(&rows, scratch, &x, &s);
        v.verification.backend = format!("approx (epsilon {eps})");
        v
    };
    let mut run = Run {
        rows: &rows,
        eps,
        len: PerRow::new(&layered, |rhs| 1.0 / rhs),
        load: PerRow::new(&layered, |_| 0.0),
        walks: Vec::new(),
        flow: Vec::new(),
        index: HashMap::new(),
    };
    // Every walk priced: a demand dual of −∞ makes every reduced cost positive.
    let every = vec![f64::NEG_INFINITY; net.demands.len()];
    // Zero prices bound the value by the demand at stake.
    let mut best = (at_stake, Prices::default());
    best.1.arc = vec![0.0; net.arcs.len()];
    let mut alpha: Option<f64> = None;
    let mut next_check = 1;
    for round in 1..=MAX_ROUNDS {
        cancel::check()?;
        let priced = rows.price(&run.len.arc, &run.len.function, Some(&every));
        let (upper, prices) = certificate(&layered, &run.len, &priced.cost);
        if upper < best.0 {
            best = (upper, prices);
        }
        let lengths: Vec<f64> = priced
            .walks
            .iter()
            .map(|w| priced.cost[w.demand] + run.len.demand[w.demand])
            .collect();
        let least = lengths.iter().copied().fold(f64::INFINITY, f64::min);
        if !least.is_finite() {
            break;
        }
        let a = alpha.get_or_insert(least);
        if least >= (1.0 + eps) * *a {
            *a = least;
        }
        let limit = (1.0 + eps) * *a;
        let picked: Vec<ChainWalk> = priced
            .walks
            .into_iter()
            .zip(&lengths)
            .filter(|(_, l)| **l < limit)
            .map(|(w, _)| w)
            .collect();
        run.route(picked);
        let k = run.renormalise();
        if let Some(a) = alpha.as_mut() {
            *a /= k;
        }
        if round >= next_check {
            let v = check(&run, &best.1, &mut scratch);
            if v.verification.upper - v.verification.lower <= target {
                return Ok((v, cut_off));
            }
            next_check = round + round.div_ceil(2);
        }
    }
    Ok((check(&run, &best.1, &mut scratch), cut_off))
}

/// Evaluates one outage of a network with `functions` with the (1−ε) engine:
/// [`solve_caps`] for served_required (and for throughput when some surviving demand
/// offers more than it requires), turned into an [`Evaluation`] by
/// [`crate::solve::finish_with`] like the other chain engines' results. `served_required` is
/// the proven lower bound unless the interval closes, `upper_bound` the certificate's.
/// Cost: one or two runs of [`solve_caps`].
pub fn evaluate_approx(net: &Network, outage: &Outage, eps: f64) -> Result<Evaluation> {
    if !epsilon_ok(eps) {
        return Err(Error::Usage(format!(
            "--epsilon must be > 0 and at most {MAX_EPSILON}, got {eps}"
        )));
    }
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let (req_v, cut_off) = solve_caps(net, &view, &required, eps)?;
    let vol_v = if needs_volume_lp(net, outage) {
        let caps: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
        Some(solve_caps(net, &view, &caps, eps)?.0)
    } else {
        None
    };
    Ok(super::super::finish_with(net, &view, cut_off, req_v, vol_v))
}

/// The evaluator of a network with `functions` by the (1−ε) engine (`--engine approx
/// --epsilon E`): cold (no warm start), no purchases, as [`super::ChainWalks`].
pub struct ChainApprox {
    /// The aimed width of each interval, as a fraction of the demand at stake; satisfies
    /// [`epsilon_ok`].
    pub epsilon: f64,
}

impl Evaluator for ChainApprox {
    fn name(&self) -> &'static str {
        "chain approx"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, _: Option<&Warm>) -> Result<Evaluated> {
        Ok(Evaluated::cold(evaluate_approx(net, outage, self.epsilon)?))
    }

    fn buys_processing(&self) -> bool {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::test_net;

    /// Plain traffic beside a chain that doubles its volume: path a — b — c, ab 10, bc 6,
    /// `x2` (gain 2) at b (capacity 100); a→c demands of 20, one with chain [x2], one plain.
    /// Hand-worked (common practice, no source: the input contract's arithmetic): F chain
    /// units and P plain units use F + P of ab and 2F + P of bc, so max F + P under
    /// F + P ≤ 10 and 2F + P ≤ 6 is F = 0, P = 6: value 6. The interval holds 6, is at
    /// most ε × 40 wide, and the stored evaluation passes the re-check a resumed run
    /// applies to journaled chain results.
    #[test]
    fn plain_traffic_beside_a_doubling_chain() {
        let net = test_net(
            r#"{"functions":[{"id":"x2","gain":2}],
            "sites":[{"id":"a"},{"id":"b","functions":{"x2":100}},{"id":"c"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":10},
                     {"id":"bc","from":"b","to":"c","capacity":6}],
            "demands":[{"from":"a","to":"c","volume":20,"chain":["x2"]},
                       {"from":"a","to":"c","volume":20}]}"#,
        );
        for eps in [0.01, 0.1, 0.5] {
            let e = evaluate_approx(&net, &Outage::default(), eps).unwrap();
            let v = &e.verification;
            assert!(v.lower <= 6.0 + 1e-9 && v.upper >= 6.0 - 1e-9, "{v:?}");
            assert!(v.upper - v.lower <= eps * 40.0, "{v:?}");
            assert!(e.served_required <= 6.0 + 1e-9, "{e:?}");
            crate::solve::recheck::recheck(&net, &Outage::default(), &e).unwrap();
        }
    }

    /// ε outside (0, 0.5] is refused, never run.
    #[test]
    fn epsilon_out_of_range_is_refused() {
        let net = test_net(
            r#"{"functions":[{"id":"f","gain":1}],
            "sites":[{"id":"a","functions":{"f":1}},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1}],
            "demands":[{"from":"a","to":"b","volume":1,"chain":["f"]}]}"#,
        );
        for eps in [0.0, 0.51, f64::NAN] {
            assert!(evaluate_approx(&net, &Outage::default(), eps).is_err());
        }
    }
}
