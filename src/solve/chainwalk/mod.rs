//! The layered walk engine of service chains: column generation over layered walks, with
//! the same optimum as the layered edge LP of [`super::chain`] and the same verification.
//!
//! **Columns.** A column is a *layered walk* of one demand `d` with chain `f1 … fk`: a path
//! from the origin to a site running `f1`, then a path to a site running `f2`, …, then a
//! path from the site of `fk` to the destination, on the surviving arcs (plain traffic,
//! `k = 0`, is one path). Measured in origin units like every variable of the layered
//! model, one unit of the walk puts `G_j = g1 · … · gj` units on each arc crossed in leg `j`
//! (after `j` functions) and `G_j` units on the row of `f_{j+1}` at the site where it is
//! applied (the volume entering it), and 1 on the cap row of `d`. The master maximises
//! `Σ λ_w` under the arc rows, the (site, function) rows and the demand caps. By the
//! decomposition argument of [`super::chain`] (each group's layered flow is a sum of
//! source–sink paths of the layered graph), every edge solution is a combination of such
//! walks, so the two formulations have the same optimum; the row right-hand sides are the
//! edge LP's own (capacities lowered to what can use them, [`chain::Layered`]).
//!
//! **Pricing.** With arc duals `y`, function duals `z` and demand duals `u`, the cheapest
//! layered walk of every demand of one (origin, chain) group is a shortest path in the
//! group's layered graph (`k + 1` copies of the surviving network; arc `a` in layer `j`
//! costs `G_j · y_a`, function `f_{j+1}` at `v` between layers `j` and `j + 1` costs
//! `G_j · z_{v,f}`), found from shortest-path trees rooted at the function sites
//! (module `rooted`). A walk enters when `1 − π_d − u_d` exceeds [`PRICE_TOL`]. The same pass
//! gives the dual bound `Σ cap·y + Σ cap·z + Σ_d b_d · max(0, 1 − π_d)` (weak duality, valid
//! for any nonnegative prices), and column generation stops when it meets the master's
//! value within [`GAP_TOL`].
//!
//! **Master.** The project's warm bounded simplex ([`super::simplex`]), kept between rounds:
//! new walks enter at zero against the current basis, rows are created as columns need
//! them. A scenario starts from the walks of its parent's optimum (the baseline's) that
//! survive it, at their flows scaled into the new rows, with the lost flow re-routed
//! (greedily, then moving other walks aside) when nothing was scaled (a feasible start).
//!
//! **Shortcuts.** When no walk of the parent's optimum that carried flow is lost and the
//! parent's allocation fits the new rows, that allocation with the parent's prices is
//! verified first, with no master solve: a failure that takes nothing the optimum used
//! cannot raise the optimum, and the parent's prices priced on the smaller network give a
//! bound no larger than before. Otherwise the lost flow is re-routed (greedily, then by
//! moving flow of other walks onto walks of their own demand that avoid the rows a walk of
//! the short demand needs, every row kept within its right-hand side); when that
//! serves what the parent served, everything at stake, or the bound of the parent's
//! prices on the new rows (one pricing pass), it is verified with those prices (zero
//! prices when everything is served), again with no master solve. Without a parent, every
//! demand is routed that way from nothing, and zero prices prove it when it serves
//! everything at stake.
//!
//! **Verification** is the layered edge LP's, unchanged: the rows are [`chain::build`]'s
//! (same groups, same lowered capacities, computed without building the LP), the walks'
//! flows are written as edge and demand variables of the layered graph, decomposed and
//! scaled into the real capacities by [`chain::repair`] (the proven lower bound), and the
//! master's prices go through [`chain::dual_bound`] (the proven upper bound); proven when
//! the row residual is within tolerance and the bounds meet within
//! [`crate::tol::PROOF_GAP_TOL`] of the demand at stake, as in
//! [`chain::solve_verified_with`]. An answer that is not proven, a master above
//! [`WARM_ROWS`] rows, a simplex failure or a column generation that does not converge
//! within [`MAX_ROUNDS`] is solved again by the layered edge LP (counted as a fallback).
//!
//! Determinism: Dijkstra breaks ties by hop count and then site index, the chain
//! programme by hop count and then site order, walks enter
//! in group and demand order, and a scenario depends only on the network, the outage and
//! the parent's optimum, never on thread count.

pub mod approx;
mod carried;
mod hash;
pub mod headroom;
mod master;
mod rooted;
mod rows;
mod skeleton;
mod start;
mod verify;

use std::collections::BTreeMap;
use std::sync::OnceLock;

pub use carried::{CarriedWalk, proven_walks};
use master::Master;
use rows::{Coefs, Rows};
use skeleton::{Skeleton, rows_of, skeleton};
use start::{fill, reroute, surviving_start};
use verify::{proven_shortcut, verified, with_walks};

use super::chain::{self, EdgeKind};
use super::colgen::Stats;
use super::evaluator::{Evaluated, Evaluator, Warm};
use super::needs_volume_lp;
use super::surviving::{Surviving, Unservable};
use super::types::{Evaluation, Verified};
use crate::error::Result;
use crate::model::{Chains, FunctionIdx, Network};
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;

use crate::scenario::Outage;

/// The engine's tolerances (defined and explained in [`crate::tol`]): the stopping gap of
/// column generation and the reduced cost a walk needs to enter, the walk engine's own.
pub use crate::tol::{COLGEN_GAP_TOL as GAP_TOL, WALK_PRICE_TOL as PRICE_TOL};
/// Pricing rounds before an LP falls back to the layered edge LP.
pub const MAX_ROUNDS: usize = 200;
/// Largest master (rows) solved by the warm simplex (dense inverse of 8·rows² bytes);
/// larger ones go to the layered edge LP.
pub const WARM_ROWS: usize = super::colgen::WARM_ROWS;
/// Fixed demands freed per master round at most (those with the largest share of the
/// duality gap relative to their size): freeing every demand whose share is positive grows
/// the master to hundreds of demand rows; a few per round keeps it small for a few more
/// rounds. The answer does not depend on it (the bound decides optimality).
const MAX_WAKE: usize = 16;
/// Share of a row a warm start leaves free when it scales a parent's flows into the rows
/// (keeps the start strictly inside them against rounding of the ratio).
const START_MARGIN: f64 = 1e-9;
const NONE: usize = usize::MAX;

/// One layered walk of one demand: its edges in walk order (arcs with the layer they are
/// crossed in, functions with the site and chain position where they are applied).
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct ChainWalk {
    pub demand: usize,
    pub edges: Vec<EdgeKind>,
}

impl ChainWalk {
    /// Every arc usable and every function site able to run its function on `view`.
    /// O(walk length).
    fn survives(&self, ch: &Chains, view: &Surviving) -> bool {
        let chain = &ch.chain[self.demand];
        self.edges.iter().all(|e| match *e {
            EdgeKind::Arc { arc, .. } => view.arc_usable[arc],
            EdgeKind::Function { site, layer } => chain
                .get(layer)
                .is_some_and(|&f| chain::runs(ch, view, site, f)),
        })
    }
}

/// An optimum of the walk formulation for one set of demand caps: its walks and flows,
/// its value and the prices that certified it.
#[derive(Debug, Clone, Default)]
pub struct Solved {
    pub walks: Vec<ChainWalk>,
    pub flow: Vec<f64>,
    pub value: f64,
    /// Per arc of `Network::arcs` (0 without a master row).
    pub arc_price: Vec<f64>,
    /// Per (site, function) row of the master.
    pub fn_price: BTreeMap<(SiteIdx, FunctionIdx), f64>,
    /// Per walk: its column coefficients, set by the engine where it had them and
    /// otherwise computed on first use ([`Solved::coefs`]).
    coefs: OnceLock<Vec<Coefs>>,
    /// Per walk: the index of the first walk equal to it, computed on first use
    /// ([`Solved::firsts`]).
    firsts: OnceLock<Vec<usize>>,
}

impl Solved {
    /// An optimum of walks `walks` at flows `flow` (value: their sum) with prices
    /// `arc_price` and `fn_price`, the walks' coefficients `coefs` when known (aligned
    /// with `walks`). O(walks).
    fn with(
        (walks, flow): (Vec<ChainWalk>, Vec<f64>),
        arc_price: Vec<f64>,
        fn_price: BTreeMap<(SiteIdx, FunctionIdx), f64>,
        coefs: Option<Vec<Coefs>>,
    ) -> Solved {
        debug_assert!(coefs.as_ref().is_none_or(|c| c.len() == walks.len()));
        Solved {
            value: flow.iter().sum(),
            walks,
            flow,
            arc_price,
            fn_price,
            coefs: coefs.map(OnceLock::from).unwrap_or_default(),
            firsts: OnceLock::new(),
        }
    }

    /// The walks with their flows, and their coefficients (the inverse of
    /// [`Solved::with`]). O(walks) once the coefficients are known.
    fn into_walks(self, net: &Network) -> WalksWithCoefs {
        self.coefs(net);
        let coefs = self.coefs.into_inner().unwrap_or_default();
        (self.walks.into_iter().zip(self.flow).collect(), coefs)
    }

    /// Per walk, the index of the first walk equal to it (itself when none before it is),
    /// computed once. O(Σ walk lengths) on first use, O(1) after.
    fn firsts(&self) -> &[usize] {
        self.firsts.get_or_init(|| {
            let mut index: hash::WordMap<&ChainWalk, usize> = Default::default();
            (self.walks.iter().enumerate())
                .map(|(i, w)| *index.entry(w).or_insert(i))
                .collect()
        })
    }

    /// Per walk, its column coefficients ([`rows::coefficients_in`] with its demand's
    /// chain; the same on every outage), computed once. O(Σ walk lengths · log) on first
    /// use, O(1) after.
    fn coefs(&self, net: &Network) -> &[Coefs] {
        self.coefs.get_or_init(|| {
            let ch = net.chains.as_ref().expect("a network with functions");
            self.walks
                .iter()
                .map(|w| {
                    let chain = &ch.chain[w.demand];
                    rows::coefficients_in(net, &ch.cumulative(chain), chain, w).into()
                })
                .collect()
        })
    }
}

/// What a child scenario starts from: the parent's proven optima (required caps, and
/// volume caps when a throughput LP was solved).
#[derive(Debug, Clone, Default)]
pub struct Basis {
    pub required: Option<Solved>,
    pub volume: Option<Solved>,
}
/// Walks with their flows, and per walk its coefficients.
type WalksWithCoefs = (Vec<(ChainWalk, f64)>, Vec<Coefs>);
/// One LP decided: its verified result, the cut-off demands and, when the walks proved
/// it, the optimum (a child's start).
type Decided = (Verified, Vec<(usize, Unservable)>, Option<Solved>);

/// One LP of an outage (caps `caps`, rows from their skeleton `sk`) by the walk engine,
/// verified: when every walk of the
/// parent's optimum `start` that carried flow survives (no flow lost), that allocation
/// with the parent's prices first (no master solve: proven when the bounds meet, as they
/// do when the failure takes nothing the optimum used); otherwise, or when that is not
/// proven, column generation from the surviving walks. The layered edge LP's ladder when
/// the walk answer is missing or not proven (counted in `stats.fallback`). Returns the
/// verified result, the cut-off demands and, when proven by the walks, the optimum (a
/// child's start).
fn solve_caps(
    net: &Network,
    view: &Surviving,
    caps: &[f64],
    sk: &Skeleton,
    start: Option<&Solved>,
    stats: &mut Stats,
) -> Result<Decided> {
    let (mut layered, cut_off) = rows_of(net, sk, caps);
    if !layered.groups.is_empty() {
        let answer = {
            let rows = Rows::new(net, view, &layered);
            let mut kept = start.map(|s| surviving_start(&rows, s));
            let mut answer = None;
            if let (Some(s), Some(k)) = (start, &mut kept)
                && k.intact()
            {
                stats.rounds += 1;
                // The start's walks move into the answer (back below when not proven).
                answer = Some(Solved::with(
                    std::mem::take(&mut k.walks).into_iter().unzip(),
                    s.arc_price.clone(),
                    s.fn_price.clone(),
                    Some(std::mem::take(&mut k.coefs)),
                ));
            }
            (answer, kept, rows.group_of.clone())
        };
        let (shortcut, mut kept, group_of) = answer;
        if let Some(s) = shortcut {
            if let Some(v) = proven_shortcut(net, view, &mut layered, &group_of, &s) {
                stats.no_flow += 1;
                return Ok((v, cut_off, Some(s)));
            }
            if let Some(k) = &mut kept {
                (k.walks, k.coefs) = s.into_walks(net);
            }
        }
        // Fill: without a parent, every demand is routed as a repair re-routes (`fill`);
        // when that serves everything at stake, zero prices prove it without a master.
        // Otherwise the master starts empty (a greedy start there measured slower).
        if kept.is_none() {
            let rows = Rows::new(net, view, &layered);
            let mut walks = Vec::new();
            let coefs = fill(&rows, &layered.bound, &mut walks, Some(Vec::new()), true);
            let value: f64 = walks.iter().map(|(_, f)| f).sum();
            if value >= rows.scale * (1.0 - GAP_TOL) {
                stats.rounds += 1;
                let s = Solved::with(
                    walks.into_iter().unzip(),
                    vec![0.0; net.arcs.len()],
                    BTreeMap::new(),
                    Some(coefs),
                );
                if let Some(v) = proven_shortcut(net, view, &mut layered, &group_of, &s) {
                    stats.repaired += 1;
                    return Ok((v, cut_off, Some(s)));
                }
            }
        }
        // Repair: the lost flow re-routed (`reroute`, moving other walks aside). When that
        // reaches what the parent served (a child never serves more) or everything at
        // stake, the parent's prices (or zero prices when everything is served) may prove
        // it without a master; below that, the parent's prices still may, when their bound
        // on this outage's rows (one pricing pass, before any verification) meets the
        // value. The surviving walks with the re-routed flow: the master's start when the
        // repair does not decide the LP (a feasible point of the new rows).
        let mut rerouted: Option<WalksWithCoefs> = None;
        if let (Some(p), Some(k)) = (start, &mut kept)
            && !k.scaled
            && !k.intact()
        {
            let repaired = {
                let rows = Rows::new(net, view, &layered);
                // The start's walks move into the re-routing (the master starts from its
                // walks, not the start's).
                let mut walks = std::mem::take(&mut k.walks);
                // Moving other walks aside only when the parent served at least everything
                // at stake here (the target is then to serve it all): measured, below that
                // the rows are full around the failure and the rip-ups rarely decide the LP.
                let slack = p.value >= rows.scale * (1.0 - GAP_TOL);
                let coefs = reroute(
                    &rows,
                    p,
                    &mut walks,
                    Some(std::mem::take(&mut k.coefs)),
                    slack,
                );
                let value: f64 = walks.iter().map(|(_, f)| f).sum();
                let all = rows.scale;
                let tol = GAP_TOL * rows.scale;
                let reached = value >= p.value.min(all) - tol;
                let priced = !reached && {
                    stats.rounds += 1;
                    rows.price(&p.arc_price, &p.fn_price, None).bound - value <= tol
                };
                if reached || priced {
                    let zero = value >= all - tol;
                    let (arc_price, fn_price) = if zero {
                        (vec![0.0; net.arcs.len()], BTreeMap::new())
                    } else {
                        (p.arc_price.clone(), p.fn_price.clone())
                    };
                    let unzipped = walks.into_iter().unzip();
                    Ok(Solved::with(unzipped, arc_price, fn_price, Some(coefs)))
                } else {
                    Err((walks, coefs))
                }
            };
            rerouted = Some(match repaired {
                Ok(s) => {
                    stats.rounds += 1;
                    if let Some(v) = proven_shortcut(net, view, &mut layered, &group_of, &s) {
                        stats.repaired += 1;
                        return Ok((v, cut_off, Some(s)));
                    }
                    s.into_walks(net)
                }
                Err(walks) => walks,
            });
        }
        let solved = {
            let rows = Rows::new(net, view, &layered);
            // Only the demands that lost flow (or had it scaled down) are free at first (all
            // of them without a parent); the others keep their walks.
            let active: Vec<bool> = match &kept {
                Some(k) => k.lost.clone(),
                None => vec![true; net.demands.len()],
            };
            let mut master = Master::new(&rows, active);
            let (walks, coefs) = rerouted
                .map(|(walks, coefs)| merged(walks, coefs))
                .or_else(|| kept.map(|k| (k.walks, k.coefs)))
                .unwrap_or_default();
            let (free, fixed): (Vec<_>, Vec<_>) = walks
                .into_iter()
                .zip(coefs)
                .partition(|((w, _), _)| master.active[w.demand]);
            for ((w, f), cs) in fixed.into_iter().chain(free) {
                master.add(w, f, Some(cs));
            }
            master.run(stats)?
        };
        if let Some(s) = solved {
            let x = with_walks(net, &mut layered, &group_of, &s);
            let rows = Rows::new(net, view, &layered);
            let v = verified(&rows, &layered, &x, &s);
            if v.verification.proven {
                return Ok((v, cut_off, Some(s)));
            }
        }
        stats.fallback += 1;
    }
    let (v, cut_off) = chain::solve_verified(net, view, caps)?;
    Ok((v, cut_off, None))
}

/// `walks` with equal walks merged into the first (flows summed), in first-seen order,
/// with their coefficients `coefs` (aligned with `walks`). O(walks · walk length).
fn merged(walks: Vec<(ChainWalk, f64)>, coefs: Vec<Coefs>) -> WalksWithCoefs {
    let mut index: hash::WordMap<ChainWalk, usize> = Default::default();
    let mut out: Vec<(ChainWalk, f64)> = Vec::with_capacity(walks.len());
    let mut out_coefs: Vec<Coefs> = Vec::with_capacity(walks.len());
    for ((w, f), cs) in walks.into_iter().zip(coefs) {
        match index.get(&w) {
            Some(&i) => out[i].1 += f,
            None => {
                index.insert(w.clone(), out.len());
                out.push((w, f));
                out_coefs.push(cs);
            }
        }
    }
    (out, out_coefs)
}

/// The walk engine's answer for one outage of a network with `functions`.
pub struct Walked {
    pub evaluation: Evaluation,
    /// Start for child scenarios.
    pub basis: Basis,
    pub stats: Stats,
}

/// Evaluates one outage of a network with `functions` with the layered walk engine: the
/// same [`Evaluation`] as [`chain::evaluate`] (same optimum, verified by the same checks;
/// where the optimal allocation or prices are not unique, possibly another optimal one),
/// plus the basis for child scenarios and the work done. `parent`: the optimum of a
/// scenario whose failed set is a subset of this one's (normally the baseline).
///
/// Cost: per LP (required, and volume when some surviving demand offers more) a few
/// rounds of one warm simplex solve and one pricing pass (two Dijkstras per
/// function site and a small programme per (origin, chain) group), then one verification (the layered LP built, not solved).
pub fn evaluate_walks(net: &Network, outage: &Outage, parent: Option<&Basis>) -> Result<Walked> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let mut stats = Stats::default();
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let sk = skeleton(net, &view, &required);
    let (req_v, cut_off, req_s) = solve_caps(
        net,
        &view,
        &required,
        &sk,
        parent.and_then(|b| b.required.as_ref()),
        &mut stats,
    )?;
    let (vol_v, vol_s) = if needs_volume_lp(net, outage) {
        let caps: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
        // From the parent's volume optimum, else from this outage's required one (feasible
        // for volume caps, which are never smaller).
        let start = parent.and_then(|b| b.volume.as_ref()).or(req_s.as_ref());
        // The required LP's skeleton when the same demands have a positive cap.
        let vsk;
        let sk = if sk.fits(&caps) {
            &sk
        } else {
            vsk = skeleton(net, &view, &caps);
            &vsk
        };
        let (v, _, s) = solve_caps(net, &view, &caps, sk, start, &mut stats)?;
        (Some(v), s)
    } else {
        (None, None)
    };
    Ok(Walked {
        evaluation: super::finish_with(net, &view, cut_off, req_v, vol_v),
        basis: Basis {
            required: req_s,
            volume: vol_s,
        },
        stats,
    })
}

/// The evaluator of a network with `functions` by the layered walk engine, warm-started
/// from the parent's optimum. Purchases are not defined yet (`add_processing` gives
/// `None`), as for [`chain::ChainEdge`].
pub struct ChainWalks;

impl Evaluator for ChainWalks {
    fn name(&self) -> &'static str {
        "chain walks"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, warm: Option<&Warm>) -> Result<Evaluated> {
        Evaluated::warm_from(warm, |parent| {
            let w = evaluate_walks(net, outage, parent)?;
            Ok((w.evaluation, w.basis, w.stats))
        })
    }

    fn warm_starts(&self) -> bool {
        true
    }

    fn buys_processing(&self) -> bool {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::rows::RowKey;
    use super::skeleton::layered_rows;
    use super::*;
    use crate::scenario::{Element, Scenario};

    /// Path a — b — c — d, `fw` (gain 1) at b (capacity 8), `scrub` (gain 0.5) at c; ab and
    /// bc 10, cd 3; a spare link d — e off the path; one demand a→d, volume 10, chain
    /// fw > scrub. Hand-worked (common practice, no source: the contract's arithmetic):
    /// F origin units put F on ab, bc, fw and scrub and 0.5·F on cd, so F <= min(10, 10,
    /// 8, 100, 3/0.5) = 6, delivered 0.5 · 6 = 3.
    fn path() -> Network {
        Network::from_json(
            r#"{"functions":[{"id":"fw","gain":1},{"id":"scrub","gain":0.5}],
            "sites":[{"id":"a"},{"id":"b","functions":{"fw":8}},
                     {"id":"c","functions":{"scrub":100}},{"id":"d"},{"id":"e"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":10},
                     {"id":"bc","from":"b","to":"c","capacity":10},
                     {"id":"cd","from":"c","to":"d","capacity":3},
                     {"id":"de","from":"d","to":"e","capacity":5}],
            "demands":[{"from":"a","to":"d","volume":10,"chain":["fw","scrub"]}]}"#,
        )
        .unwrap()
    }

    #[test]
    fn gain_halves_what_later_legs_use() {
        let net = path();
        let w = evaluate_walks(&net, &Outage::default(), None).unwrap();
        let e = &w.evaluation;
        assert!((e.served_required - 6.0).abs() < 1e-6, "{e:?}");
        assert!((e.delivered.unwrap() - 3.0).abs() < 1e-6, "{e:?}");
        assert!(e.certified_gap() < 1e-6, "{e:?}");
        assert_eq!(w.stats.fallback, 0, "{:?}", w.stats);
        assert!(w.stats.generated >= 1, "{:?}", w.stats);
        // The layered edge LP (the product's other formulation) agrees.
        let edge = chain::evaluate(&net, &Outage::default()).unwrap();
        assert!((edge.served_required - e.served_required).abs() < 1e-6);
    }

    /// Failing the spare link d — e takes nothing the optimum uses: the baseline's walks
    /// and prices are proven again without a master solve (same 6). Failing cd cuts the
    /// demand off (served 0).
    #[test]
    fn a_failure_off_the_optimum_needs_no_master() {
        let net = path();
        let base = evaluate_walks(&net, &Outage::default(), None).unwrap();
        let spare = Scenario::new(&net, &[Element::Link(3.into())]).outage(&net);
        let w = evaluate_walks(&net, &spare, Some(&base.basis)).unwrap();
        assert!((w.evaluation.served_required - 6.0).abs() < 1e-6);
        assert_eq!(
            (w.stats.no_flow, w.stats.lp_solves, w.stats.fallback),
            (1, 0, 0)
        );
        let cd = Scenario::new(&net, &[Element::Link(2.into())]).outage(&net);
        let w = evaluate_walks(&net, &cd, Some(&base.basis)).unwrap();
        assert!(
            w.evaluation.served_required.abs() < 1e-9,
            "{:?}",
            w.evaluation
        );
        assert_eq!(w.evaluation.cut_off.len(), 1);
    }

    /// Demand X a→d (10, chain `fw`, `fw` at a) and plain demand Y c→d (10) on a–d (10),
    /// a–b (10), b–d (10), c–d (5), one-way c→b (10), c–e (5), e–d (5). Hand-worked: the
    /// baseline serves both (X on a–d; Y 5 on c–d and, of its two-hop walks, first c→b→d).
    /// Failing a–d leaves X only a→b→d, where Y holds 5 of b–d: the cut into d is 10 (b–d)
    /// plus 5 (c–d) plus 5 (e–d) = 20, so serving all 20 needs Y's 5 moved onto c–e–d. The
    /// re-routing moves it (no master solve), and the layered edge LP (the product's other
    /// formulation) agrees on 20.
    #[test]
    fn a_repair_moves_another_demand_aside() {
        let net = Network::from_json(
            r#"{"functions":[{"id":"fw","gain":1}],
            "sites":[{"id":"a","functions":{"fw":100}},{"id":"b"},{"id":"c"},{"id":"d"},
                     {"id":"e"}],
            "links":[{"id":"ad","from":"a","to":"d","capacity":10},
                     {"id":"ab","from":"a","to":"b","capacity":10},
                     {"id":"bd","from":"b","to":"d","capacity":10},
                     {"id":"cd","from":"c","to":"d","capacity":5},
                     {"id":"cb","from":"c","to":"b","capacity":10,"one_way":true},
                     {"id":"ce","from":"c","to":"e","capacity":5},
                     {"id":"ed","from":"e","to":"d","capacity":5}],
            "demands":[{"from":"a","to":"d","volume":10,"chain":["fw"]},
                       {"from":"c","to":"d","volume":10}]}"#,
        )
        .unwrap();
        let base = evaluate_walks(&net, &Outage::default(), None).unwrap();
        assert!((base.evaluation.served_required - 20.0).abs() < 1e-9);
        let ad = Scenario::new(&net, &[Element::Link(0.into())]).outage(&net);
        let w = evaluate_walks(&net, &ad, Some(&base.basis)).unwrap();
        let e = &w.evaluation;
        assert!((e.served_required - 20.0).abs() < 1e-9, "{e:?}");
        assert!(e.certified_gap() < 1e-9, "{e:?}");
        assert_eq!(
            (w.stats.repaired, w.stats.lp_solves, w.stats.fallback),
            (1, 0, 0),
            "{:?}",
            w.stats
        );
        let edge = chain::evaluate(&net, &ad).unwrap();
        assert!((edge.served_required - 20.0).abs() < 1e-6, "{edge:?}");
    }

    /// One-way a→m (100), m→t (8), t→p (100), p→m (100), `f` (gain 0.5) only at p, demand
    /// a→t of 50 with chain [f]. Hand-worked: the only walk a→m→t→p (f) →m→t crosses m→t
    /// before f (F) and after it (0.5·F): 1.5·F <= 8, F = 16/3. The walk's column carries
    /// the summed coefficient 1.5 on m→t.
    #[test]
    fn a_link_crossed_before_and_after_a_function() {
        let net = Network::from_json(
            r#"{"functions":[{"id":"f","gain":0.5}],
            "sites":[{"id":"a"},{"id":"m"},{"id":"t"},{"id":"p","functions":{"f":100}}],
            "links":[{"id":"am","from":"a","to":"m","capacity":100,"one_way":true},
                     {"id":"mt","from":"m","to":"t","capacity":8,"one_way":true},
                     {"id":"tp","from":"t","to":"p","capacity":100,"one_way":true},
                     {"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}],
            "demands":[{"from":"a","to":"t","volume":50,"chain":["f"]}]}"#,
        )
        .unwrap();
        let w = evaluate_walks(&net, &Outage::default(), None).unwrap();
        let e = &w.evaluation;
        assert!((e.served_required - 16.0 / 3.0).abs() < 1e-6, "{e:?}");
        assert!(e.certified_gap() < 1e-6);
        assert_eq!(w.stats.fallback, 0);
        let walk = &w.basis.required.as_ref().unwrap().walks[0];
        let view = Surviving::new(&net, &Outage::default(), None);
        let (layered, _) = layered_rows(&net, &view, &[50.0]);
        let rows = Rows::new(&net, &view, &layered);
        let mt = rows
            .coefficients(walk)
            .into_iter()
            .find(|(k, _)| *k == RowKey::Arc(1))
            .map(|(_, c)| c);
        assert_eq!(mt, Some(1.5), "{walk:?}");
    }
}
