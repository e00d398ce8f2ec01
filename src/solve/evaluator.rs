//! The evaluator seam: one trait through which the audit ([`crate::audit::Batch`]) and
//! everything built on it (closings, plans, compare, shards, resume) drive an engine or a
//! routing model, so that none of them knows which one it runs.
//!
//! Implemented by the edge LP ([`Edge`]), the walk engine ([`Walks`]) and each routing as
//! deployed ([`crate::routing::Model`]). Every implementation ends in
//! [`super::finish_with`] (directly or through [`super::finish::finish`]), so stranded totals,
//! snapping, prices and bottlenecks are computed once for all of them.

use std::any::Any;

use super::colgen::{self, Stats};
use super::flow::{self, Cap};
use super::lp::Lp;
use super::{Evaluation, Surviving, finish, needs_volume_lp, solve_verified};
use crate::error::Result;
use crate::model::Network;
use crate::scenario::Outage;

/// An engine's optimum kept to start a child outage from (the walk engine's
/// [`colgen::Basis`]); opaque to the batch, which only hands it back to the evaluator that
/// made it.
pub type Warm = Box<dyn Any + Send + Sync>;

/// One outage evaluated: the verified [`Evaluation`], what a child may start from, and the
/// work done.
pub struct Evaluated {
    pub evaluation: Evaluation,
    /// `Some` only from an evaluator whose [`Evaluator::warm_starts`] is true.
    pub warm: Option<Warm>,
    /// Work counted by the walk engine (zero for the others).
    pub stats: Stats,
}

impl Evaluated {
    /// A result without warm start or counted work.
    pub fn cold(evaluation: Evaluation) -> Evaluated {
        Evaluated {
            evaluation,
            warm: None,
            stats: Stats::default(),
        }
    }

    /// The result of a warm-starting engine: `run` evaluates the outage from the start in
    /// `warm` when that start is a `B` (the start a parent evaluation of the same engine
    /// kept; `None` without one, or for a start of another type), and gives its
    /// evaluation, the start it keeps for children, and its counted work. O(1) beyond `run`.
    pub fn warm_from<B: Any + Send + Sync>(
        warm: Option<&Warm>,
        run: impl FnOnce(Option<&B>) -> Result<(Evaluation, B, Stats)>,
    ) -> Result<Evaluated> {
        let (evaluation, basis, stats) = run(warm.and_then(|w| w.downcast_ref::<B>()))?;
        Ok(Evaluated {
            evaluation,
            warm: Some(Box::new(basis)),
            stats,
        })
    }
}

/// The served model of one outage with added-processing variables, as built into a
/// caller's [`Lp`] by [`Evaluator::add_processing`].
pub struct AddModel {
    /// The variables whose sum is the outage's served_required.
    pub served: Vec<usize>,
    /// Per site: its processing row when that row can bind at the real capacity (`None`
    /// without a row or when the presolve lowered it); the plans read its price.
    pub site_rows: Vec<Option<usize>>,
}

/// Evaluates one outage on the network left standing: the seam every engine and routing
/// model plugs into.
///
/// What it computes: [`Evaluator::evaluate`] returns the outage's verified
/// [`Evaluation`] (served_required and throughput proven or reported unproven with their
/// bounds, one feasible allocation, prices, bottlenecks), ending in
/// [`super::finish_with`]; [`Evaluator::add_processing`] builds the same served model with
/// added-processing variables for closings and plans (`None` when purchases are not
/// defined for the model).
///
/// Invariants an implementation keeps: `evaluate` is a pure function of (network, outage,
/// warm), so results do not depend on threads, shards or what a resume restored; a warm
/// start changes the work, never the verified values beyond the tolerances of
/// [`crate::tol::PROOF_GAP_TOL`]; the reported values come only from verified bounds (a lower bound
/// from a feasible allocation, an upper bound valid for any prices); more processing never
/// lowers served_required (what [`crate::expand`] relies on).
///
/// Adding an engine: implement this trait, end `evaluate` in [`super::finish_with`] with
/// the engine's own [`super::Verified`] results and the demands its model cannot serve at
/// all, and map it in [`crate::audit::evaluator`]. A (1 − ε)-approximate engine plugs in
/// the same way: its `Verified` carries its proven lower and upper bounds, and results
/// outside [`crate::tol::PROOF_GAP_TOL`] are reported unproven with those bounds, never as exact.
/// A service-chain model (an ordered list of processing kinds per demand) plugs in as a
/// routing model does: its own LP, verified into a `Verified`, and `add_processing` with
/// one row per chained site.
pub trait Evaluator: Send + Sync {
    /// A short name (`edge`, `walks`, `nearest`, `steered`).
    fn name(&self) -> &'static str;

    /// The verified evaluation of `outage`; `warm`, when given, is the [`Evaluated::warm`]
    /// this evaluator returned for an outage whose failed set is a subset of this one's.
    fn evaluate(&self, net: &Network, outage: &Outage, warm: Option<&Warm>) -> Result<Evaluated>;

    /// Whether [`Evaluator::evaluate`] starts from a parent's optimum: the batch then
    /// solves the baseline first and children in families from their parent.
    fn warm_starts(&self) -> bool {
        false
    }

    /// Whether [`Evaluator::closing_model`] generates walk columns (the walk engine)
    /// instead of building the edge model with additions. Default `false`.
    fn closes_with_walks(&self) -> bool {
        false
    }

    /// Whether this model buys single-step processing through
    /// [`Evaluator::add_processing`]'s default. `false` for the service-chain evaluators:
    /// they buy function capacity ([`crate::expand::chain_buy`]), not through this trait.
    /// Default `true`.
    fn buys_processing(&self) -> bool {
        true
    }

    /// Builds the served_required model of `outage` into `model` with the additions
    /// `add` (per site: its `add_v` variable) in the processing rows, each served unit
    /// weighted `obj` in the objective. `None` when buying processing is not defined for
    /// this model (it would change the routes, or [`Evaluator::buys_processing`] is
    /// `false`). The default is the two-layer model of [`flow::build`] with the additions:
    /// what every engine routing on any walk (edge LP, walks, approx) buys against.
    fn add_processing(
        &self,
        model: &mut Lp,
        net: &Network,
        outage: &Outage,
        add: &[Option<usize>],
        obj: f64,
    ) -> Option<AddModel> {
        self.buys_processing()
            .then(|| two_layer_with(model, net, outage, add, obj))
    }

    /// Builds into `model` (holding the additions `add` with their costs as objective) the
    /// cost model of a closing: the served_required model of `outage` with the additions
    /// in the processing rows and `Σ served ≥ target`. `None` when purchases are not
    /// defined for this model. An engine that [`Evaluator::closes_with_walks`] gets the
    /// walk master of [`colgen::buy::cost_master`] (same optimum) when that gives a start;
    /// otherwise, and for every other engine, [`Evaluator::add_processing`] (served
    /// weighted 0) plus that row.
    fn closing_model<'a>(
        &self,
        model: &mut Lp,
        net: &'a Network,
        outage: &Outage,
        add: &[Option<usize>],
        target: f64,
    ) -> Result<Option<ClosingModel<'a>>> {
        if self.closes_with_walks()
            && let Some((m, walks)) = colgen::buy::cost_master(net, outage, model, add, target)?
        {
            return Ok(Some(ClosingModel {
                add: m,
                walks: Some(walks),
            }));
        }
        Ok(self.add_processing(model, net, outage, add, 0.0).map(|m| {
            served_at_least(model, &m.served, target);
            ClosingModel {
                add: m,
                walks: None,
            }
        }))
    }
}

/// A closing's cost model as built by [`Evaluator::closing_model`].
pub struct ClosingModel<'a> {
    pub add: AddModel,
    /// The walk master when the model is one: its re-solves price new walks
    /// ([`colgen::buy::WalkCloser::solve`]); `None` for a model complete as built.
    pub walks: Option<colgen::buy::WalkCloser<'a>>,
}

impl ClosingModel<'_> {
    /// The optimum of `lp` (the built model, bounds possibly changed) over the whole
    /// model: [`colgen::buy::WalkCloser::solve`] for a walk master, else one
    /// [`super::lp::solve`].
    pub fn solve(&self, lp: &Lp) -> Result<super::lp::LpSolution> {
        match &self.walks {
            Some(w) => w.solve(lp),
            None => super::lp::solve(lp),
        }
    }
}

/// Adds `Σ served ≥ target`; returns the row. O(|served|).
pub fn served_at_least(model: &mut Lp, served: &[usize], target: f64) -> usize {
    model.add_row(
        served.iter().map(|&f| (f, 1.0)).collect(),
        super::lp::Sense::Ge,
        target,
    )
}

/// The edge LP: one two-layer flow LP per quantity ([`super::solve_verified`] climbing
/// [`super::ladder`]), cold. Cost: one or two verified LP solves of the size given in
/// [`flow::build`].
pub struct Edge;

impl Evaluator for Edge {
    fn name(&self) -> &'static str {
        "edge"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, _: Option<&Warm>) -> Result<Evaluated> {
        let net = net.view(outage.matrix);
        let view = Surviving::new(net, outage, None);
        let required = solve_verified(net, &view, Cap::Required)?;
        let volume = if needs_volume_lp(net, outage) {
            Some(solve_verified(net, &view, Cap::Volume)?)
        } else {
            None
        };
        Ok(Evaluated::cold(finish(net, &view, required, volume)))
    }
}

/// The two-layer model with additions: what every any-walk engine buys against.
fn two_layer_with(
    model: &mut Lp,
    net: &Network,
    outage: &Outage,
    add: &[Option<usize>],
    obj: f64,
) -> AddModel {
    let index = flow::build(model, net, outage, Cap::Required, obj, Some(add));
    AddModel {
        served: index.demand_var.iter().flatten().copied().collect(),
        site_rows: index.site_row.clone(),
    }
}

/// The walk engine ([`colgen::evaluate_walks`]): column generation over processing walks,
/// started from a parent's [`colgen::Basis`]; an answer it cannot prove falls back to the
/// edge LP. Cost: see [`colgen::evaluate_walks`]; memory independent of sources × arcs.
pub struct Walks;

impl Evaluator for Walks {
    fn name(&self) -> &'static str {
        "walks"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, warm: Option<&Warm>) -> Result<Evaluated> {
        Evaluated::warm_from(warm, |parent| {
            let w = colgen::evaluate_walks(net, outage, parent)?;
            Ok((w.evaluation, w.basis, w.stats))
        })
    }

    fn warm_starts(&self) -> bool {
        true
    }

    /// Closings generate walk columns ([`colgen::buy::cost_master`]); the edge model
    /// with additions when the walk engine gives no start.
    fn closes_with_walks(&self) -> bool {
        true
    }
}

/// The approximate engine ([`super::approx::evaluate_from`]): per outage, first the interval
/// of its parent's walks (repaired, topped up) and certificate prices, kept when it is
/// within ε of the surviving required demand; otherwise Garg–Könemann packing, cold. The
/// interval is proven by the verifier (lower bound from repaired walks, upper bound from
/// the certificate) and reported unproven with those bounds unless they meet within
/// [`super::GAP_TOL`]. Cost: see [`super::approx`]; memory O(sites + arcs + demands) plus
/// the walks carrying flow (the parent's too).
pub struct Approx {
    /// The aimed width of each interval, as a fraction of the surviving required demand;
    /// satisfies [`super::approx::epsilon_ok`] (checked where the command line is lowered,
    /// and again by [`super::approx::solve_approx`]).
    pub epsilon: f64,
}

impl Evaluator for Approx {
    fn name(&self) -> &'static str {
        "approx"
    }

    fn evaluate(&self, net: &Network, outage: &Outage, warm: Option<&Warm>) -> Result<Evaluated> {
        Evaluated::warm_from(warm, |parent| {
            let (e, start) = super::approx::evaluate_from(net, outage, self.epsilon, parent)?;
            Ok((e, start, Stats::default()))
        })
    }

    fn warm_starts(&self) -> bool {
        true
    }
}
