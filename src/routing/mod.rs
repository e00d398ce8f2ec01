//! Routing as deployed: what the network carries when traffic follows the shortest paths
//! of its interior routing protocol (equal-cost multipath, split equally per hop) instead
//! of the best re-route of [`crate::solve`].
//!
//! Semantics (`network-format.md`, "Routing as deployed"): a unit of demand `o → t`
//! processed at site `v` travels `o → v` and then `v → t`, each leg on the shortest-path
//! DAG of the surviving network ([`spt`]). Candidate sites are the surviving sites with
//! processing > 0 that both legs reach. [`Mode::Nearest`] processes each demand at the
//! candidates with least `dist(o,v) + dist(v,t)`, ties split equally; [`Mode::Steered`]
//! lets each demand split among all its candidates in any proportion. [`fixed`] holds the
//! LP of what is served under those fixed routes; [`offered`] the load when every demand
//! sends its full `required` on the nearest routes; [`expand`] the steered plan.
//!
//! Each mode is a [`Model`], an [`Evaluator`] like the exact engines: the audit's batch
//! drives it, its fixed-route LPs are verified into [`solve::Verified`] results
//! (`verify_fixed`) and end in [`solve::finish_with`], and closings and plans buy
//! processing on [`Evaluator::add_processing`].
//!
//! Invariants: routed served_required ≤ best re-route (every fixed route is a walk); under
//! the same outage steered ≥ nearest (nearest's shares are one steered choice). Every
//! function here is a pure function of its inputs, so results do not depend on threads.

pub mod chain;
pub mod expand;
pub mod fixed;
pub mod headroom;
pub mod spt;

use std::collections::HashMap;
use std::sync::Arc as Shared;

use crate::audit::{self, Audit, RunOptions};
use crate::error::{Error, Result};
use crate::model::{LinkIdx, Network, SiteIdx};
use crate::scenario::{Outage, Scenario};
use crate::solve::evaluator::{AddModel, Evaluated, Evaluator, Warm};
use crate::solve::{self, Evaluation, lp};
use spt::{Trees, UNREACHABLE};

/// How processing sites are chosen on the deployed routes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// The candidate sites with least `dist(o,v) + dist(v,t)`, ties split equally.
    Nearest,
    /// Any proportion among the candidate sites.
    Steered,
}

impl Mode {
    pub fn name(self) -> &'static str {
        match self {
            Mode::Nearest => "nearest",
            Mode::Steered => "steered",
        }
    }
}

/// Relative tolerance above capacity before a resource counts as overloaded (defined in
/// [`crate::tol`]).
pub use crate::tol::OVERLOAD_TOL;

/// Per-unit load on arcs: `(arc index, fraction)` pairs sorted by arc.
pub type ArcLoad = Vec<(usize, f64)>;

/// One site at which a demand may be processed, with its fixed routes.
#[derive(Debug, Clone, PartialEq)]
pub struct Choice {
    /// The processing site (a file with `functions`: the demand's origin; its sites are
    /// in `processing`).
    pub site: SiteIdx,
    /// `dist(o, site) + dist(site, t)` (with `functions`: the total metric of the legs).
    pub length: u64,
    /// Per unit of the demand: load on each arc of both legs (sorted by arc; an arc on both
    /// legs carries the sum).
    pub arcs: ArcLoad,
    /// Per unit of the demand: load on each processing resource ([`fixed::Resources`]),
    /// sorted: `(site, 1)` without `functions`; with them `(site · functions + function,
    /// cumulative gain entering it)` for each step of the chain.
    pub processing: ArcLoad,
}

/// The routes of one surviving demand.
#[derive(Debug, Clone, PartialEq)]
pub struct DemandRoutes {
    /// Candidate sites in site order.
    pub candidates: Vec<Choice>,
    /// Indices into `candidates` of the nearest ones (empty only when there is none).
    pub nearest: Vec<usize>,
}

/// `a + w·b` for two arc-sorted sparse vectors. O(|a| + |b|).
pub fn merge(a: &[(usize, f64)], b: &[(usize, f64)], w: f64) -> Vec<(usize, f64)> {
    let mut out = Vec::with_capacity(a.len() + b.len());
    let (mut i, mut j) = (0, 0);
    while i < a.len() || j < b.len() {
        if j == b.len() || (i < a.len() && a[i].0 < b[j].0) {
            out.push(a[i]);
            i += 1;
        } else if i == a.len() || b[j].0 < a[i].0 {
            out.push((b[j].0, w * b[j].1));
            j += 1;
        } else {
            out.push((a[i].0, a[i].1 + w * b[j].1));
            i += 1;
            j += 1;
        }
    }
    out
}

/// The routes of every demand under the trees of one outage: `None` for a stranded demand
/// (failed endpoint), otherwise its candidates among the sites with `eligible[v]` (which
/// must exclude failed sites). Legs are computed once per (origin, destination) pair.
/// O(demands · candidates · (n + m)) in the worst case, far less with shared legs.
pub fn routes(net: &Network, trees: &Trees, eligible: &[bool]) -> Vec<Option<DemandRoutes>> {
    let mut legs: HashMap<(SiteIdx, SiteIdx), Shared<ArcLoad>> = HashMap::new();
    let mut leg = |o: SiteIdx, t: SiteIdx| {
        Shared::clone(
            legs.entry((o, t))
                .or_insert_with(|| Shared::new(trees.leg(o, t))),
        )
    };
    net.demands
        .iter()
        .map(|dem| {
            trees.trees[dem.from].as_ref()?;
            trees.trees[dem.to].as_ref()?;
            let mut candidates = Vec::new();
            for v in (0..net.sites.len()).filter(|&v| eligible[v]).map(SiteIdx) {
                let (d1, d2) = (trees.dist(dem.from, v), trees.dist(v, dem.to));
                if d1 == UNREACHABLE || d2 == UNREACHABLE {
                    continue;
                }
                let arcs = merge(&leg(dem.from, v), &leg(v, dem.to), 1.0);
                candidates.push(Choice {
                    site: v,
                    length: d1.saturating_add(d2),
                    arcs,
                    processing: vec![(v.0, 1.0)],
                });
            }
            let best = candidates.iter().map(|c| c.length).min();
            let nearest = (0..candidates.len())
                .filter(|&c| Some(candidates[c].length) == best)
                .collect();
            Some(DemandRoutes {
                candidates,
                nearest,
            })
        })
        .collect()
}

/// Per site: surviving with processing > 0 (the candidate rule of the contract).
pub fn processing_sites(net: &Network, outage: &Outage) -> Vec<bool> {
    let alive = outage.site_alive(net);
    net.sites
        .iter()
        .zip(alive)
        .map(|(s, a)| a && s.processing > 0.0)
        .collect()
}

/// The offered load of one outage: every surviving demand sends its full `required` on
/// its nearest routes (demands without a candidate send nothing: they are cut off).
#[derive(Debug, Clone, PartialEq)]
pub struct Offered {
    pub arc_load: Vec<f64>,
    pub site_load: Vec<f64>,
    /// Per arc / site: load / capacity; `INFINITY` for a positive load on capacity 0.
    pub arc_util: Vec<f64>,
    pub site_util: Vec<f64>,
    /// Largest utilisation of any link direction / site (0 when nothing is loaded).
    pub max_link_util: f64,
    pub max_site_util: f64,
    /// Links with a direction above capacity (link order) and sites above capacity.
    pub overloaded_links: Vec<LinkIdx>,
    pub overloaded_sites: Vec<SiteIdx>,
    /// With `functions`: per site, per function, the offered load entering it and its
    /// utilisation (then `site_load` is each site's sum over its functions, `site_util`
    /// its largest function utilisation, and a site is overloaded when one of its
    /// functions is). Empty without `functions`.
    pub function_load: Vec<Vec<f64>>,
    pub function_util: Vec<Vec<f64>>,
}

/// Load over capacity; 0 without load, `INFINITY` for a load on capacity 0. Offered loads
/// are sums of nonnegative shares (no cancellation), so any positive load is real, however
/// small (a file in units of 1e-13 has utilisations too).
fn utilisation(load: f64, cap: f64) -> f64 {
    if load <= 0.0 {
        0.0
    } else if cap <= 0.0 {
        f64::INFINITY
    } else {
        load / cap
    }
}

fn overloaded(load: f64, cap: f64) -> bool {
    load > 0.0 && load > cap * (1.0 + OVERLOAD_TOL)
}

/// The offered load of `routes` (required, nearest shares). O(Σ nearest routes' arcs).
pub fn offered(net: &Network, routes: &[Option<DemandRoutes>]) -> Offered {
    let caps: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    offered_on(net, routes, &caps, 1)
}

/// [`offered`] over the processing resources of capacities `caps` (`per_site` resources
/// per site, in site order: the sites themselves when 1, else each site's functions).
/// O(Σ nearest routes' arcs + arcs + resources).
pub(crate) fn offered_on(
    net: &Network,
    routes: &[Option<DemandRoutes>],
    caps: &[f64],
    per_site: usize,
) -> Offered {
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut res_load = vec![0.0; caps.len()];
    for (dem, r) in net.demands.iter().zip(routes) {
        let Some(r) = r else { continue };
        if r.nearest.is_empty() {
            continue;
        }
        let w = dem.required / r.nearest.len() as f64;
        for &c in &r.nearest {
            let ch = &r.candidates[c];
            for &(v, f) in &ch.processing {
                res_load[v] += w * f;
            }
            for &(a, f) in &ch.arcs {
                arc_load[a] += w * f;
            }
        }
    }
    let arc_util: Vec<f64> = arc_load
        .iter()
        .zip(&net.arcs)
        .map(|(&l, a)| utilisation(l, a.capacity))
        .collect();
    let res_util: Vec<f64> = res_load
        .iter()
        .zip(caps)
        .map(|(&l, &c)| utilisation(l, c))
        .collect();
    let mut overloaded_links: Vec<LinkIdx> = arc_load
        .iter()
        .zip(&net.arcs)
        .filter(|(l, a)| overloaded(**l, a.capacity))
        .map(|(_, a)| a.link)
        .collect();
    overloaded_links.dedup();
    let max = |u: &[f64]| u.iter().copied().fold(0.0, f64::max);
    let n = net.sites.len();
    let rows = |x: &[f64]| -> Vec<Vec<f64>> {
        (0..n)
            .map(|v| x[v * per_site..(v + 1) * per_site].to_vec())
            .collect()
    };
    let (site_load, site_util, function_load, function_util) = if per_site == 1 {
        (res_load.clone(), res_util.clone(), Vec::new(), Vec::new())
    } else {
        let (fl, fu) = (rows(&res_load), rows(&res_util));
        (
            fl.iter().map(|r| r.iter().sum()).collect(),
            fu.iter().map(|r| max(r)).collect(),
            fl,
            fu,
        )
    };
    let overloaded_sites = (0..n)
        .filter(|&v| {
            let r = v * per_site..(v + 1) * per_site;
            res_load[r.clone()]
                .iter()
                .zip(&caps[r])
                .any(|(&l, &c)| overloaded(l, c))
        })
        .map(SiteIdx)
        .collect();
    Offered {
        max_link_util: max(&arc_util),
        max_site_util: max(&res_util),
        arc_load,
        site_load,
        arc_util,
        site_util,
        overloaded_links,
        overloaded_sites,
        function_load,
        function_util,
    }
}

/// Solves and verifies a fixed-route model (a packing LP) with each backend of
/// `ladder` in turn until the result is proven: the scaled-down allocation of
/// [`solve::verify::packing_lower`] is the proven lower bound (loads and flows reported are
/// its own, so feasible), the weak-duality bound of the prices
/// ([`fixed::weak_dual_bound`]) the upper bound. The best bounds of all attempts are kept
/// (proven when they meet within [`crate::tol::PROOF_GAP_TOL`] of `at_stake` and the allocation's
/// residual, [`solve::verify::residual`], is within [`solve::RESIDUAL_TOL`]); the ladder
/// ends with the simplex, whose vertex and explicit dual close the bounds where the
/// interior point's prices leave them open. The result is a [`solve::Verified`] like any
/// engine's, with the prices of the best upper bound (0 on rows the presolve lowered), for
/// [`solve::finish_with`]. Fails only when every backend fails.
///
/// Cost: one LP solve per attempt plus O(nonzeros) for the residual, repair and bound.
fn verify_fixed(
    net: &Network,
    model: &lp::Lp,
    index: &fixed::FixedIndex,
    at_stake: f64,
    ladder: &[&dyn lp::Backend],
) -> Result<solve::Verified> {
    let sites = net.sites.len();
    verify_fixed_with(
        net,
        model,
        index,
        at_stake,
        ladder,
        sites,
        &fixed::weak_dual_bound,
    )
}

/// The upper bound of a fixed-route model from one backend's solution (valid for any row
/// prices).
pub(crate) type UpperBound<'a> = dyn Fn(&lp::Lp, &lp::LpSolution) -> f64 + 'a;

/// [`verify_fixed`] over `n_sites` processing resources ([`fixed::Resources`]) with the
/// upper bound `upper` (a model holding only some of the routes, as column generation
/// does, needs a bound that prices every route, not only the model's). The site vectors
/// of the result are per resource.
pub(crate) fn verify_fixed_with(
    net: &Network,
    model: &lp::Lp,
    index: &fixed::FixedIndex,
    at_stake: f64,
    ladder: &[&dyn lp::Backend],
    n_sites: usize,
    upper: &UpperBound<'_>,
) -> Result<solve::Verified> {
    let n_arcs = net.arcs.len();
    let allocation_of = |x: &[f64], served: f64| {
        let (arc_load, site_load) = index.loads(x, n_arcs, n_sites);
        solve::verify::Repaired {
            served,
            demand_flow: index.demand_flows(x),
            arc_load,
            site_load,
            walks: 0,
            paths: Vec::new(),
        }
    };
    let mut best: Option<solve::Verified> = None;
    let mut best_upper = f64::INFINITY;
    let mut best_duals = vec![0.0; model.rows.len()];
    let mut errors = Vec::new();
    if model.num_vars() == 0 {
        best = Some(solve::Verified {
            allocation: allocation_of(&[], 0.0),
            lp_value: 0.0,
            verification: solve::Verification::nothing_to_route(),
            arc_price: Vec::new(),
            site_price: Vec::new(),
            arc_has_row: Vec::new(),
            site_has_row: Vec::new(),
            bound_price: (Vec::new(), Vec::new()),
            functions: Vec::new(),
        });
        best_upper = 0.0;
    }
    let row_floor = vec![0.0; model.rows.len()];
    let var_floor = &model.upper;
    for (attempt, backend) in ladder.iter().enumerate() {
        if model.num_vars() == 0 {
            break;
        }
        solve::cancel::check()?;
        let sol = match backend.solve(model) {
            Ok(s) => s,
            Err(e @ Error::Interrupted(_)) => return Err(e),
            Err(e) => {
                errors.push(format!("{}: {e}", backend.name()));
                continue;
            }
        };
        let residual = solve::verify::residual(model, &sol.x, &row_floor, var_floor);
        // The fixed-route model is a packing LP by construction; were it not, nothing is
        // proven and the lower bound is 0.
        let (lower, x) = solve::verify::packing_lower(model, &sol.x)
            .unwrap_or_else(|| (0.0, vec![0.0; sol.x.len()]));
        let lower = lower.min(at_stake);
        let upper = upper(model, &sol).min(at_stake).max(0.0);
        if upper < best_upper {
            best_upper = upper;
            best_duals = sol.duals;
        }
        let feasible = residual <= solve::RESIDUAL_TOL;
        let better = best.as_ref().is_none_or(|b| {
            let b_feasible = b.verification.residual <= solve::RESIDUAL_TOL;
            (feasible && !b_feasible) || (feasible == b_feasible && lower > b.verification.lower)
        });
        if better {
            best = Some(solve::Verified {
                allocation: allocation_of(&x, lower),
                lp_value: index.served(&sol.x),
                verification: solve::Verification {
                    proven: false,
                    lower,
                    upper: f64::INFINITY,
                    residual,
                    attempts: attempt + 1,
                    backend: backend.name().into(),
                },
                arc_price: Vec::new(),
                site_price: Vec::new(),
                arc_has_row: Vec::new(),
                site_has_row: Vec::new(),
                functions: Vec::new(),
                bound_price: (Vec::new(), Vec::new()),
            });
        }
        let Some(b) = best.as_mut() else { continue };
        let v = &mut b.verification;
        v.attempts = attempt + 1;
        v.upper = best_upper;
        v.proven = solve::meets(v.residual, v.lower, best_upper, at_stake);
        if v.proven {
            break;
        }
    }
    let mut out = best.ok_or_else(|| crate::error::Error::Solver(errors.join("; ")))?;
    // Prices of the real capacities: a row the presolve lowered does not bind at the real
    // capacity, so its price is 0.
    let price = |row: &Option<usize>, lowered: bool| match row {
        Some(r) if !lowered => best_duals[*r].max(0.0),
        _ => 0.0,
    };
    out.arc_price = (0..n_arcs)
        .map(|a| price(&index.arc_row[a], index.arc_lowered[a]))
        .collect();
    out.site_price = (0..n_sites)
        .map(|v| price(&index.site_row[v], index.site_lowered[v]))
        .collect();
    out.arc_has_row = index.arc_row.iter().map(Option::is_some).collect();
    out.site_has_row = index.site_row.iter().map(Option::is_some).collect();
    out.bound_price = (out.arc_price.clone(), out.site_price.clone());
    Ok(out)
}

/// Builds the fixed-route LP of `routes` with per-demand caps `cap` and solves it with
/// [`verify_fixed`] on [`solve::ladder`] (`at_stake`: the demand the proof is measured
/// against).
fn solve_fixed(
    net: &Network,
    routes: &[Option<DemandRoutes>],
    mode: Mode,
    cap: &[f64],
    at_stake: f64,
) -> Result<solve::Verified> {
    let mut model = lp::Lp::new(true);
    let index = fixed::build(&mut model, net, routes, mode, cap, 1.0, None, None);
    verify_fixed(net, &model, &index, at_stake, solve::ladder())
}

/// One outage under the deployed routing.
#[derive(Debug, Clone, PartialEq)]
pub struct Routed {
    /// The contract's values under this routing (served_required, shortfall, stranded,
    /// throughput), one optimal allocation of the fixed-route LP, its saturated resources
    /// and shadow prices, and a weak-duality upper bound ([`fixed::weak_dual_bound`]).
    pub eval: Evaluation,
    /// The offered load on the nearest routes.
    pub offered: Offered,
    /// Shortest-path trees recomputed for this outage (the rest shared with the baseline).
    pub trees_recomputed: usize,
}

/// Evaluates `outage` under `mode` (on its traffic matrix's view, [`Network::view`]),
/// reusing the baseline trees `base` where the failure does not touch them (trees depend on
/// the topology and the metrics only, so every matrix shares them). One LP for served_required, a second for throughput only when
/// some surviving demand's volume exceeds its required part; both end in
/// [`solve::finish_with`] like every engine's. Cost: the trees touched by the failure
/// (Dijkstra each), the legs of the demands, and one or two small packing LPs.
pub fn evaluate(net: &Network, base: &Trees, outage: &Outage, mode: Mode) -> Result<Routed> {
    let net = net.view(outage.matrix);
    let trees = base.for_outage(net, outage);
    if net.chains.is_some() {
        let cr = chain::ChainRouting::new(net, &trees, outage);
        return Ok(Routed {
            eval: cr.evaluate(outage, mode)?,
            offered: cr.offered(),
            trees_recomputed: trees.recomputed,
        });
    }
    let routes = routes(net, &trees, &processing_sites(net, outage));
    Ok(Routed {
        eval: evaluate_routes(net, outage, &routes, mode)?,
        offered: offered(net, &routes),
        trees_recomputed: trees.recomputed,
    })
}

/// [`evaluate`] once the routes of `outage` are known (`net` is the outage's matrix view,
/// as [`routes`] was given): the fixed-route LPs verified
/// (`verify_fixed`) and finished by [`solve::finish_with`], with the demands whose
/// routes reach no processing site as cut off. The evaluation carries no proof: a
/// journal's re-check ([`solve::recheck`]) is defined for the best re-route only.
pub fn evaluate_routes(
    net: &Network,
    outage: &Outage,
    routes: &[Option<DemandRoutes>],
    mode: Mode,
) -> Result<Evaluation> {
    let view = solve::Surviving::new(net, outage, None);
    // A demand whose routes reach no processing site: no path at all on the surviving
    // links, or no processing site on its shortest paths.
    let cut_off: Vec<(usize, solve::Unservable)> = (0..net.demands.len())
        .filter(|&d| {
            net.demands[d].required > 0.0
                && routes[d].as_ref().is_some_and(|r| r.candidates.is_empty())
        })
        .map(|d| (d, solve::Unservable::NoProcessing))
        .collect();
    let mut is_cut = vec![false; net.demands.len()];
    for &(d, _) in &cut_off {
        is_cut[d] = true;
    }
    let live = |d: &usize| routes[*d].is_some();
    let servable = |d: &usize| live(d) && !is_cut[*d];
    let stake = |cap: &dyn Fn(usize) -> f64, keep: &dyn Fn(&usize) -> bool| -> f64 {
        (0..net.demands.len()).filter(keep).map(cap).sum()
    };
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let solved = solve_fixed(
        net,
        routes,
        mode,
        &required,
        stake(&|d| required[d], &servable),
    )?;
    let volume = if net
        .demands
        .iter()
        .enumerate()
        .any(|(d, dem)| live(&d) && dem.volume > dem.required)
    {
        let volume: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
        Some(solve_fixed(
            net,
            routes,
            mode,
            &volume,
            stake(&|d| volume[d], &live),
        )?)
    } else {
        None
    };
    let mut eval = solve::finish_with(net, &view, cut_off, solved, volume);
    eval.proof = None;
    Ok(eval)
}

/// A whole audit under a deployed routing, beside the best re-route of the same outages.
#[derive(Debug, Clone)]
pub struct RoutedAudit {
    pub mode: Mode,
    /// The scenarios with their routed evaluations (what ranking and tables read).
    pub audit: Audit,
    /// Per outage of `audit`: the best re-route ([`solve::evaluate`]).
    pub best: Vec<Evaluation>,
    /// Per outage: the offered load on the nearest routes.
    pub offered: Vec<Offered>,
    /// Per traffic matrix the run evaluates, in the order the scenarios first name them
    /// (one entry, matrix 0, for a file without `matrices`): the baseline (the elements
    /// every scenario keeps down, `--down`; else the intact network) under that matrix.
    /// Never empty.
    pub baselines: Vec<RoutedBaseline>,
    /// The routing model the audit was evaluated with (its baseline trees).
    pub model: Model,
}

/// The baseline of one traffic matrix under a deployed routing: routed, best re-route and
/// offered load. The routes are those of the intact (or `--down`) network: they depend on
/// the topology, the metrics and which sites process, never on the matrix; what differs
/// per matrix is the load put on them.
#[derive(Debug, Clone)]
pub struct RoutedBaseline {
    /// The traffic matrix ([`Network::view`]).
    pub matrix: usize,
    pub routed: Routed,
    pub best: Evaluation,
}

impl RoutedAudit {
    /// The baseline of the run's first matrix (the only one without `matrices`): what a
    /// report shows as "the" baseline, as the best re-route's audit does. O(1).
    pub fn baseline(&self) -> &RoutedBaseline {
        &self.baselines[0]
    }

    /// The baseline of matrix `m` (the first matrix's when the run does not evaluate `m`,
    /// which no scenario of the run names). O(matrices).
    pub fn baseline_under(&self, m: usize) -> &RoutedBaseline {
        self.baselines
            .iter()
            .find(|b| b.matrix == m)
            .unwrap_or(&self.baselines[0])
    }

    /// Best re-route served_required minus routed served_required of outage `k` (≥ 0):
    /// what steering or re-optimisation would recover.
    pub fn recoverable(&self, k: usize) -> f64 {
        win_back(&self.best[k], &self.audit.evaluations[k])
    }
}

/// What the best re-route serves beyond the routed evaluation `routed` of the same outage:
/// `best − routed`, and 0 when that is within [`crate::tol::PROOF_GAP_TOL`] of the surviving required
/// demand (both values are proven only to that tolerance, so a smaller difference is
/// solver noise, not a win-back). O(1).
pub fn win_back(best: &Evaluation, routed: &Evaluation) -> f64 {
    let d = best.served_required - routed.served_required;
    if d <= crate::tol::PROOF_GAP_TOL * routed.surviving_required.max(f64::MIN_POSITIVE) {
        0.0
    } else {
        d
    }
}

/// Runs every scenario under `mode` through the audit's [`audit::Batch`] (each distinct
/// outage once, the routing [`Model`] as its evaluator), then the best re-route and the
/// offered load of each outage beside it ([`beside`]). With `with_best` false the best
/// re-route is not solved and `best` repeats the routed evaluations (for callers that only
/// need the routed values).
pub fn run(
    net: &Network,
    scenarios: Vec<Scenario>,
    mode: Mode,
    opts: RunOptions,
    with_best: bool,
) -> Result<RoutedAudit> {
    let model = Model::new(net, mode);
    let audit = audit::Batch::with_evaluator(net, scenarios, Box::new(model.clone()))
        .finish(net, opts, None)?;
    beside(net, model, audit, opts, with_best)
}

/// The routed `audit` (evaluated by `model`) with what the comparison shows beside it:
/// the best re-route of each outage (`with_best`), the offered load on the nearest routes
/// (each outage on its matrix's view), and the baseline of every matrix the run evaluates
/// (what every scenario keeps down, `--down`, as for the best re-route).
/// Cost: one best re-route solve and one route computation per outage, in parallel.
pub fn beside(
    net: &Network,
    model: Model,
    audit: Audit,
    opts: RunOptions,
    with_best: bool,
) -> Result<RoutedAudit> {
    let outages = &audit.outages;
    let best = if with_best {
        audit::par_map(outages, opts, "solving", |o| solve::evaluate(net, o))?
    } else {
        audit.evaluations.clone()
    };
    let offered_of = |o: &Outage| {
        let view = net.view(o.matrix);
        let trees = model.trees.for_outage(view, o);
        if view.chains.is_some() {
            return chain::ChainRouting::new(view, &trees, o).offered();
        }
        offered(view, &routes(view, &trees, &processing_sites(view, o)))
    };
    let offered: Vec<Offered> = audit::par_map(outages, opts, "routing", |o| Ok(offered_of(o)))?;
    let down = audit.scenarios.first().map_or(&[][..], |sc| &sc.down[..]);
    let mut matrices: Vec<usize> = Vec::new();
    for sc in &audit.scenarios {
        if !matrices.contains(&sc.matrix) {
            matrices.push(sc.matrix);
        }
    }
    if matrices.is_empty() {
        matrices.push(0);
    }
    let mut baselines = Vec::with_capacity(matrices.len());
    for m in matrices {
        let base_outage = Scenario::baseline().with_down(down).under(m).outage(net);
        let (routed, best_eval) = match outages.iter().position(|o| *o == base_outage) {
            Some(k) => (
                Routed {
                    eval: audit.evaluations[k].clone(),
                    offered: offered[k].clone(),
                    trees_recomputed: 0,
                },
                best[k].clone(),
            ),
            None => {
                let r = evaluate(net, &model.trees, &base_outage, model.mode)?;
                let b = if with_best {
                    solve::evaluate(net, &base_outage)?
                } else {
                    r.eval.clone()
                };
                (r, b)
            }
        };
        baselines.push(RoutedBaseline {
            matrix: m,
            routed,
            best: best_eval,
        });
    }
    Ok(RoutedAudit {
        mode: model.mode,
        audit,
        best,
        offered,
        baselines,
        model,
    })
}

/// A routing as deployed as an [`Evaluator`]: the fixed-route LP of `mode` on the
/// shortest-path routes of each outage, the baseline trees shared where a failure does
/// not touch them.
#[derive(Debug, Clone)]
pub struct Model {
    pub mode: Mode,
    /// The baseline trees every outage starts from.
    pub trees: Trees,
}

impl Model {
    /// The model of `mode` on `net` (one Dijkstra per destination). O(sites · (arcs +
    /// sites) log sites).
    pub fn new(net: &Network, mode: Mode) -> Model {
        Model {
            mode,
            trees: Trees::baseline(net),
        }
    }
}

impl Evaluator for Model {
    fn name(&self) -> &'static str {
        self.mode.name()
    }

    /// The trees touched by the failure recomputed, the demands' routes, and the
    /// fixed-route LPs verified and finished ([`evaluate_routes`]). No warm start: the
    /// models are small. Cost: as [`evaluate`] without the offered load.
    fn evaluate(&self, net: &Network, outage: &Outage, _: Option<&Warm>) -> Result<Evaluated> {
        let net = net.view(outage.matrix);
        let trees = self.trees.for_outage(net, outage);
        if net.chains.is_some() {
            let cr = chain::ChainRouting::new(net, &trees, outage);
            return Ok(Evaluated::cold(cr.evaluate(outage, self.mode)?));
        }
        let routes = routes(net, &trees, &processing_sites(net, outage));
        Ok(Evaluated::cold(evaluate_routes(
            net, outage, &routes, self.mode,
        )?))
    }

    /// Steered only: the steered model with an expandable surviving site as a candidate
    /// even at processing 0 (its row `Σ y − add_v ≤ 0`); routes do not depend on
    /// processing, so the paths stay the shortest paths. Under [`Mode::Nearest`] a
    /// purchase changes which sites are nearest, so `None`. Cost: the outage's routes and
    /// O(route nonzeros) rows.
    fn add_processing(
        &self,
        model: &mut lp::Lp,
        net: &Network,
        outage: &Outage,
        add: &[Option<usize>],
        obj: f64,
    ) -> Option<AddModel> {
        if self.mode == Mode::Nearest {
            return None;
        }
        let net = net.view(outage.matrix);
        let alive = outage.site_alive(net);
        let eligible: Vec<bool> = (0..net.sites.len())
            .map(|v| alive[v] && (net.sites[v].processing > 0.0 || add[v].is_some()))
            .collect();
        let routes = routes(net, &self.trees.for_outage(net, outage), &eligible);
        let caps: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
        let index = fixed::build(
            model,
            net,
            &routes,
            Mode::Steered,
            &caps,
            obj,
            Some(add),
            None,
        );
        Some(AddModel {
            served: index.demand_vars.iter().flatten().copied().collect(),
            site_rows: (0..net.sites.len())
                .map(|v| index.site_row[v].filter(|_| !index.site_lowered[v]))
                .collect(),
        })
    }
}

/// Relative tolerance (to the surviving required demand) below which a change of offered
/// arc load counts as no change (defined in [`crate::tol`]).
pub use crate::tol::MOVE_TOL;

/// Arcs whose offered load under `now` exceeds the baseline's `base`, with the increase,
/// largest first (ties by arc): where a failure moves traffic. O(arcs log arcs).
pub fn moved_onto(base: &Offered, now: &Offered, scale: f64) -> Vec<(usize, f64)> {
    let tol = MOVE_TOL * scale.max(f64::MIN_POSITIVE);
    let mut v: Vec<(usize, f64)> = now
        .arc_load
        .iter()
        .zip(&base.arc_load)
        .enumerate()
        .map(|(a, (n, b))| (a, n - b))
        .filter(|(_, d)| *d > tol)
        .collect();
    v.sort_by(|x, y| y.1.total_cmp(&x.1).then(x.0.cmp(&y.0)));
    v
}
