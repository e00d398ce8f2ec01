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
//! sends its full `required` on the nearest routes; [`expand`] the steered purchase models.
//!
//! Invariants: routed served_required ≤ best re-route (every fixed route is a walk); under
//! the same outage steered ≥ nearest (nearest's shares are one steered choice). Every
//! function here is a pure function of its inputs, so results do not depend on threads.

pub mod expand;
pub mod fixed;
pub mod spt;

use std::collections::HashMap;
use std::sync::Arc as Shared;

use crate::audit::{self, Audit, RunOptions};
use crate::error::Result;
use crate::model::{Network, SiteIdx};
use crate::scenario::{self, Outage, Scenario};
use crate::solve::{self, Bottleneck, Evaluation, Resource, TOL, lp};
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

/// Relative tolerance above capacity before a resource counts as overloaded.
pub const OVERLOAD_TOL: f64 = 1e-9;

/// Per-unit load on arcs: `(arc index, fraction)` pairs sorted by arc.
pub type ArcLoad = Vec<(usize, f64)>;

/// One site at which a demand may be processed, with its fixed routes.
#[derive(Debug, Clone, PartialEq)]
pub struct Choice {
    pub site: SiteIdx,
    /// `dist(o, site) + dist(site, t)`.
    pub length: u64,
    /// Per unit of the demand: load on each arc of both legs (sorted by arc; an arc on both
    /// legs carries the sum).
    pub arcs: ArcLoad,
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
            for v in (0..net.sites.len()).filter(|&v| eligible[v]) {
                let (d1, d2) = (trees.dist(dem.from, v), trees.dist(v, dem.to));
                if d1 == UNREACHABLE || d2 == UNREACHABLE {
                    continue;
                }
                let arcs = merge(&leg(dem.from, v), &leg(v, dem.to), 1.0);
                candidates.push(Choice {
                    site: v,
                    length: d1.saturating_add(d2),
                    arcs,
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
    pub overloaded_links: Vec<usize>,
    pub overloaded_sites: Vec<SiteIdx>,
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
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut site_load = vec![0.0; net.sites.len()];
    for (dem, r) in net.demands.iter().zip(routes) {
        let Some(r) = r else { continue };
        if r.nearest.is_empty() {
            continue;
        }
        let w = dem.required / r.nearest.len() as f64;
        for &c in &r.nearest {
            let ch = &r.candidates[c];
            site_load[ch.site] += w;
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
    let site_util: Vec<f64> = site_load
        .iter()
        .zip(&net.sites)
        .map(|(&l, s)| utilisation(l, s.processing))
        .collect();
    let mut overloaded_links: Vec<usize> = arc_load
        .iter()
        .zip(&net.arcs)
        .filter(|(l, a)| overloaded(**l, a.capacity))
        .map(|(_, a)| a.link)
        .collect();
    overloaded_links.dedup();
    let overloaded_sites = (0..net.sites.len())
        .filter(|&v| overloaded(site_load[v], net.sites[v].processing))
        .collect();
    let max = |u: &[f64]| u.iter().copied().fold(0.0, f64::max);
    Offered {
        max_link_util: max(&arc_util),
        max_site_util: max(&site_util),
        arc_load,
        site_load,
        arc_util,
        site_util,
        overloaded_links,
        overloaded_sites,
    }
}

/// Snaps `x` to `target` within [`TOL`] relative to `scale`, else rounds to a 1e-9·scale
/// grid (the same rule as the best re-route's results, so equal values print equal).
fn snap(x: f64, target: f64, scale: f64) -> f64 {
    if scale.is_nan() || scale <= 0.0 {
        return if x.abs() < 1e-12 { target } else { x };
    }
    if (x - target).abs() <= TOL * scale {
        target
    } else {
        let grid = 1e-9 * scale;
        let q = (x / grid).round() * grid;
        if q.is_finite() { q } else { x }
    }
}

/// A fixed-route result checked like every other: the value reported, how, the feasible
/// allocation kept and the row prices of the best upper bound.
struct Checked {
    value: f64,
    verification: solve::Verification,
    /// The scaled-down, feasible allocation ([`solve::verify::packing_lower`]).
    x: Vec<f64>,
    /// Row prices of the attempt with the least upper bound (clipped at 0 by readers).
    duals: Vec<f64>,
}

/// Solves and verifies a fixed-route model (a packing LP) with each backend of
/// `ladder` in turn until the result is proven: the scaled-down allocation of
/// [`solve::verify::packing_lower`] is the proven lower bound (loads and flows reported are
/// its own, so feasible), the weak-duality bound of the prices
/// ([`fixed::weak_dual_bound`]) the upper bound. The best bounds of all attempts are kept;
/// the value is the plainest number between them when they meet within
/// [`solve::GAP_TOL`] of `at_stake` and the allocation's residual ([`solve::verify::residual`],
/// each row against what its demands can put on it) is within [`solve::RESIDUAL_TOL`],
/// else the lower bound. The ladder ends with the simplex, whose vertex and explicit dual
/// close the bounds where the interior point's prices leave them open. Fails only when
/// every backend fails.
fn verify_fixed(model: &lp::Lp, at_stake: f64, ladder: &[&dyn lp::Backend]) -> Result<Checked> {
    if model.num_vars() == 0 {
        return Ok(Checked {
            value: 0.0,
            verification: solve::Verification {
                proven: true,
                lower: 0.0,
                upper: 0.0,
                residual: 0.0,
                attempts: 0,
                backend: "none (nothing to route)".into(),
            },
            x: Vec::new(),
            duals: vec![0.0; model.rows.len()],
        });
    }
    let row_floor = vec![0.0; model.rows.len()];
    let var_floor = &model.upper;
    let mut best: Option<Checked> = None;
    let mut best_upper = f64::INFINITY;
    let mut best_duals = vec![0.0; model.rows.len()];
    let mut errors = Vec::new();
    for (attempt, backend) in ladder.iter().enumerate() {
        let sol = match backend.solve(model, None) {
            Ok(s) => s,
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
        let upper = fixed::weak_dual_bound(model, &sol).min(at_stake).max(0.0);
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
            best = Some(Checked {
                value: lower,
                verification: solve::Verification {
                    proven: false,
                    lower,
                    upper: f64::INFINITY,
                    residual,
                    attempts: attempt + 1,
                    backend: backend.name().into(),
                },
                x,
                duals: Vec::new(),
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
    out.duals = best_duals;
    let v = &out.verification;
    out.value = if v.proven {
        solve::reported_in(v.lower, v.upper.max(v.lower), at_stake)
    } else {
        v.lower
    };
    Ok(out)
}

/// Builds the fixed-route LP of `routes` with per-demand caps `cap` and solves it with
/// [`verify_fixed`] on [`solve::LADDER`] (`at_stake`: the demand the proof is measured
/// against); returns the model's index and the checked result.
fn solve_fixed(
    net: &Network,
    routes: &[Option<DemandRoutes>],
    mode: Mode,
    cap: &[f64],
    at_stake: f64,
) -> Result<(fixed::FixedIndex, Checked)> {
    let mut model = lp::Lp::new(true);
    let index = fixed::build(&mut model, net, routes, mode, cap, 1.0, None);
    let checked = verify_fixed(&model, at_stake, &solve::LADDER)?;
    Ok((index, checked))
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

/// Evaluates `outage` under `mode`, reusing the baseline trees `base` where the failure
/// does not touch them. One LP for served_required, a second for throughput only when
/// some surviving demand's volume exceeds its required part.
pub fn evaluate(net: &Network, base: &Trees, outage: &Outage, mode: Mode) -> Result<Routed> {
    let trees = base.for_outage(net, outage);
    let routes = routes(net, &trees, &processing_sites(net, outage));
    evaluate_routes(net, &routes, mode, trees.recomputed)
}

/// [`evaluate`] once the routes are known.
pub fn evaluate_routes(
    net: &Network,
    routes: &[Option<DemandRoutes>],
    mode: Mode,
    trees_recomputed: usize,
) -> Result<Routed> {
    let mut stranded = 0.0;
    let mut stranded_volume = 0.0;
    let mut stranded_demands = Vec::new();
    let mut surviving_required = 0.0;
    let mut surviving_volume = 0.0;
    let mut needs_volume_lp = false;
    for (d, (dem, r)) in net.demands.iter().zip(routes).enumerate() {
        if r.is_some() {
            surviving_required += dem.required;
            surviving_volume += dem.volume;
            needs_volume_lp |= dem.volume > dem.required;
        } else {
            stranded += dem.required;
            stranded_volume += dem.volume;
            stranded_demands.push(d);
        }
    }
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    // Demands whose routes reach no processing site serve nothing: their required part
    // is summed apart from the rest, so neither total is lost in the other.
    let cut_off_of = |d: usize| routes[d].as_ref().is_some_and(|r| r.candidates.is_empty());
    let cut_off_required: f64 = (0..net.demands.len())
        .filter(|&d| cut_off_of(d))
        .map(|d| net.demands[d].required)
        .sum();
    let servable_required: f64 = if cut_off_required > 0.0 {
        (0..net.demands.len())
            .filter(|&d| routes[d].is_some() && !cut_off_of(d))
            .map(|d| net.demands[d].required)
            .sum()
    } else {
        surviving_required
    };
    let (index, sol) = solve_fixed(net, routes, mode, &required, servable_required)?;
    let served_required = sol.value;
    let verification = sol.verification.clone();
    let shortfall = solve::shortfall_of(cut_off_required, servable_required, served_required);
    // A cut-off demand serves exactly nothing; any other flow is judged against the
    // servable demand of its origin, never against a larger total.
    let servable: Vec<bool> = (0..net.demands.len())
        .map(|d| routes[d].is_some() && !cut_off_of(d))
        .collect();
    let scales = solve::flow_scales(net, &servable);
    let flows = index.demand_flows(&sol.x);
    let demand_flow: Vec<f64> = (0..net.demands.len())
        .map(|d| {
            let (r, scale) = (net.demands[d].required, scales[d]);
            if servable[d] {
                snap(snap(flows[d].min(r), r, scale), 0.0, scale)
            } else {
                0.0
            }
        })
        .collect();
    let demand_shortfall: Vec<f64> = (0..net.demands.len())
        .map(|d| {
            let r = net.demands[d].required;
            if routes[d].is_none() {
                0.0
            } else if servable[d] {
                snap(r - demand_flow[d], 0.0, scales[d])
            } else {
                r
            }
        })
        .collect();
    let (arc_load, site_load) = index.loads(&sol.x, net.arcs.len(), net.sites.len());
    let arc_price: Vec<f64> = index
        .arc_row
        .iter()
        .zip(&index.arc_lowered)
        .map(|(r, &low)| match r {
            Some(r) if !low => snap(sol.duals[*r].max(0.0), 0.0, 1.0),
            _ => 0.0,
        })
        .collect();
    let site_price: Vec<Option<f64>> = index
        .site_row
        .iter()
        .zip(&index.site_lowered)
        .map(|(r, &low)| {
            r.map(|r| {
                if low {
                    0.0
                } else {
                    snap(sol.duals[r].max(0.0), 0.0, 1.0)
                }
            })
        })
        .collect();
    let mut bottlenecks = Vec::new();
    for (a, arc) in net.arcs.iter().enumerate() {
        if index.arc_row[a].is_none() {
            continue;
        }
        let saturated = if arc.capacity > 0.0 {
            arc_load[a] >= arc.capacity * (1.0 - 1e-6) - 1e-9
        } else {
            arc_price[a] > 0.0
        };
        if saturated {
            bottlenecks.push(Bottleneck {
                resource: Resource::Arc(a),
                price: arc_price[a],
                utilisation: if arc.capacity > 0.0 {
                    arc_load[a] / arc.capacity
                } else {
                    1.0
                },
            });
        }
    }
    for (v, site) in net.sites.iter().enumerate() {
        if index.site_row[v].is_some()
            && site.processing > 0.0
            && site_load[v] >= site.processing * (1.0 - 1e-6) - 1e-9
        {
            bottlenecks.push(Bottleneck {
                resource: Resource::Site(v),
                price: site_price[v].unwrap_or(0.0),
                utilisation: site_load[v] / site.processing,
            });
        }
    }
    bottlenecks.sort_by(|a, b| {
        b.price
            .total_cmp(&a.price)
            .then(a.resource.cmp(&b.resource))
    });
    let upper_bound = verification.upper;
    let max_violation = verification.residual;
    let (throughput, throughput_verification) = if needs_volume_lp {
        let volume: Vec<f64> = net.demands.iter().map(|d| d.volume).collect();
        let (_, t) = solve_fixed(net, routes, mode, &volume, surviving_volume)?;
        (
            t.value.max(served_required).min(surviving_volume),
            Some(t.verification),
        )
    } else {
        (served_required, None)
    };
    // A demand whose routes reach no processing site: no path at all on the surviving
    // links, or no processing site on its shortest paths.
    let cut_off = (0..net.demands.len())
        .filter(|&d| {
            net.demands[d].required > 0.0
                && routes[d].as_ref().is_some_and(|r| r.candidates.is_empty())
        })
        .map(|d| (d, solve::Unservable::NoProcessing))
        .collect();
    Ok(Routed {
        eval: Evaluation {
            served_required,
            shortfall,
            stranded,
            stranded_volume,
            stranded_demands,
            surviving_required,
            throughput,
            demand_flow,
            demand_shortfall,
            arc_load,
            site_load,
            site_price,
            arc_price,
            bottlenecks,
            upper_bound,
            max_violation,
            cut_off,
            verification,
            throughput_verification,
            proof: None,
        },
        offered: offered(net, routes),
        trees_recomputed,
    })
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
    /// The baseline (the elements every scenario keeps down, `--down`; else the intact
    /// network): routed, best re-route and offered load.
    pub baseline: Routed,
    pub baseline_best: Evaluation,
    /// The baseline trees every outage starts from.
    pub trees: Trees,
}

impl RoutedAudit {
    /// Best re-route served_required minus routed served_required of outage `k` (≥ 0):
    /// what steering or re-optimisation would recover.
    pub fn recoverable(&self, k: usize) -> f64 {
        win_back(&self.best[k], &self.audit.evaluations[k])
    }
}

/// What the best re-route serves beyond the routed evaluation `routed` of the same outage:
/// `best − routed`, and 0 when that is within [`solve::GAP_TOL`] of the surviving required
/// demand (both values are proven only to that tolerance, so a smaller difference is
/// solver noise, not a win-back). O(1).
pub fn win_back(best: &Evaluation, routed: &Evaluation) -> f64 {
    let d = best.served_required - routed.served_required;
    if d <= solve::GAP_TOL * routed.surviving_required.max(f64::MIN_POSITIVE) {
        0.0
    } else {
        d
    }
}

/// Runs every scenario under `mode` and under the best re-route (both in parallel, each
/// distinct outage once). With `with_best` false the best re-route is not solved and
/// `best` repeats the routed evaluations (for callers that only need the routed values).
pub fn run(
    net: &Network,
    scenarios: Vec<Scenario>,
    mode: Mode,
    opts: RunOptions,
    with_best: bool,
) -> Result<RoutedAudit> {
    let trees = Trees::baseline(net);
    let (outages, outage_of) = scenario::dedup(net, &scenarios);
    let routed = audit::par_map(&outages, opts, "routing", |o| {
        evaluate(net, &trees, o, mode)
    })?;
    let best = if with_best {
        audit::par_map(&outages, opts, "solving", |o| solve::evaluate(net, o))?
    } else {
        routed.iter().map(|r| r.eval.clone()).collect()
    };
    // The baseline is what every scenario keeps down (`--down`), as for the best re-route.
    let down = scenarios.first().map_or(&[][..], |sc| &sc.down[..]);
    let base_outage = Scenario::baseline().with_down(down).outage(net);
    let base_k = outages.iter().position(|o| *o == base_outage);
    let (baseline, baseline_best) = match base_k {
        Some(k) => (routed[k].clone(), best[k].clone()),
        None => {
            let r = evaluate(net, &trees, &base_outage, mode)?;
            let b = if with_best {
                solve::evaluate(net, &base_outage)?
            } else {
                r.eval.clone()
            };
            (r, b)
        }
    };
    let mut evaluations = Vec::with_capacity(routed.len());
    let mut offered = Vec::with_capacity(routed.len());
    for r in routed {
        evaluations.push(r.eval);
        offered.push(r.offered);
    }
    Ok(RoutedAudit {
        mode,
        audit: Audit {
            scenarios,
            outage_of,
            outages,
            evaluations,
            stats: Default::default(),
        },
        best,
        offered,
        baseline,
        baseline_best,
        trees,
    })
}

/// Relative tolerance (to the surviving required demand) below which a change of offered
/// arc load counts as no change.
pub const MOVE_TOL: f64 = 1e-9;

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
