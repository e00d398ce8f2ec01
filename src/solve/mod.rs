//! Solving one outage exactly: the two-layer LP ([`flow`]), the backends ([`lp`]), an
//! independent optimality certificate ([`certify`]) and a verifier ([`verify`]), all on one
//! view of the surviving network ([`surviving`]).
//!
//! [`evaluate`] is the unit of work the audit runs in parallel; it is a pure function of
//! the network and the outage, so results do not depend on thread count or order.
//!
//! **Nothing is reported that is not verified.** Every LP answer is checked in the file's
//! units: its row residuals ([`verify::residual`]), a feasible allocation rebuilt from it
//! by flow decomposition ([`verify::repair`], a proven lower bound) and the dual bound of
//! its shadow prices ([`certify::dual_bound`], a proven upper bound). A result is
//! *proven* when the residual is within [`RESIDUAL_TOL`] and the two bounds meet within
//! [`GAP_TOL`] of the demand at stake. Otherwise the LP is solved again by the next
//! backend of [`LADDER`] (tighter interior point, then simplex with an explicit dual), the
//! best bounds of all attempts are kept, and a result still open is reported as
//! *unproven* with its bounds: its served value is then the proven lower bound, so a
//! shortfall is never understated.

pub mod approx;
pub mod certify;
pub mod colgen;
pub mod flow;
pub mod lp;
pub mod recheck;
pub mod simplex;
pub mod surviving;
pub mod verify;

use crate::error::{Error, Result};
use crate::model::{LinkIdx, Network, SiteIdx};
use crate::scenario::Outage;
use flow::Cap;
use lp::Backend;
pub use surviving::{Surviving, Unservable};

/// Relative tolerance used to call a resource saturated and to snap values that differ
/// from a bound by solver noise only (the backends solve to 1e-9).
pub const TOL: f64 = 1e-7;

/// Largest relative row residual ([`verify::residual`]) of an allocation that counts as
/// feasible.
pub const RESIDUAL_TOL: f64 = 1e-7;

/// Largest gap between the proven upper and lower bounds, relative to the surviving demand
/// at stake (Σ of the LP's demand caps), for a result to count as proven optimal.
pub const GAP_TOL: f64 = 1e-7;

/// A load at least this fraction of its capacity counts as saturated.
pub const SATURATED: f64 = 1.0 - 1e-6;

/// The backends tried in turn until a result is proven.
pub static LADDER: [&dyn Backend; 3] = [&lp::CLARABEL, &lp::CLARABEL_TIGHT, &lp::Simplex];

/// A saturated resource of an optimal allocation with its shadow price (served units per
/// added unit of capacity).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Bottleneck {
    pub resource: Resource,
    pub price: f64,
    /// Load over capacity in the allocation (1.0 when saturated).
    pub utilisation: f64,
}

#[derive(
    Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize, serde::Deserialize,
)]
pub enum Resource {
    /// A link direction: the arc index in `Network::arcs`.
    Arc(usize),
    /// A site's processing.
    Site(SiteIdx),
}

/// How one LP result was verified.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Verification {
    /// The bounds meet within [`GAP_TOL`] and the allocation is feasible.
    pub proven: bool,
    /// Proven lower bound: delivered flow of the repaired, feasible allocation.
    pub lower: f64,
    /// Proven upper bound: the dual bound, capped by the demand at stake.
    pub upper: f64,
    /// Largest relative row residual of the backend's allocation that was kept.
    pub residual: f64,
    /// Backends tried (1 when the first one was proven).
    pub attempts: usize,
    /// The backend whose allocation was kept.
    pub backend: String,
}

/// Everything the tool reports for one outage.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Evaluation {
    /// Largest Σ f_d over surviving demands with f_d <= required_d (the proven lower bound
    /// when the result is unproven).
    pub served_required: f64,
    /// Σ surviving required − served_required, summed as the cut-off demands' required
    /// plus what the servable ones miss ([`shortfall_of`]), so a small cut-off demand beside
    /// large served ones is not lost to rounding.
    pub shortfall: f64,
    /// Σ required of demands with a failed endpoint site.
    pub stranded: f64,
    /// Σ volume of those demands.
    pub stranded_volume: f64,
    /// Indices of the stranded demands.
    pub stranded_demands: Vec<usize>,
    /// Σ required of the surviving demands.
    pub surviving_required: f64,
    /// Largest Σ f_d with f_d <= volume_d over surviving demands.
    pub throughput: f64,
    /// Per demand: flow in one optimal allocation of the served_required LP.
    pub demand_flow: Vec<f64>,
    /// Per demand: required − flow (0 for stranded demands).
    pub demand_shortfall: Vec<f64>,
    /// Per arc: load in that allocation.
    pub arc_load: Vec<f64>,
    /// Per site: processing used in that allocation.
    pub site_load: Vec<f64>,
    /// Per site: shadow price of its processing row (`None` when the site has no row:
    /// no capacity, failed, or unreachable by any demand).
    pub site_price: Vec<Option<f64>>,
    /// Per arc: shadow price of its capacity (0 when absent, or when the presolve lowered
    /// the row below the real capacity: the real capacity does not bind then).
    pub arc_price: Vec<f64>,
    /// Saturated resources, highest shadow price first (ties by resource order).
    pub bottlenecks: Vec<Bottleneck>,
    /// Certified upper bound on served_required ([`certify::dual_bound`]).
    pub upper_bound: f64,
    /// Largest relative row violation of the returned allocation.
    pub max_violation: f64,
    /// Surviving demands with required > 0 that no walk through a processing site can
    /// serve at all (cut off by the outage), with the reason.
    pub cut_off: Vec<(usize, Unservable)>,
    /// How served_required was verified.
    pub verification: Verification,
    /// How throughput was verified (`None` when it equals served_required by definition:
    /// no surviving demand offers more than its required part).
    pub throughput_verification: Option<Verification>,
    /// What a journal or part file keeps so that the result can be verified again without
    /// solving ([`recheck::recheck`]); `None` in thin evaluations and where nothing reads
    /// it back. Never shown in a report.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub proof: Option<Box<recheck::Proof>>,
}

impl Evaluation {
    /// Saturated links (each once, in link order).
    pub fn saturated_links(&self, net: &Network) -> Vec<LinkIdx> {
        let mut v: Vec<LinkIdx> = self
            .bottlenecks
            .iter()
            .filter_map(|b| match b.resource {
                Resource::Arc(a) => Some(net.arcs[a].link),
                Resource::Site(_) => None,
            })
            .collect();
        v.sort_unstable();
        v.dedup();
        v
    }

    /// Saturated sites, in site order.
    pub fn saturated_sites(&self) -> Vec<SiteIdx> {
        let mut v: Vec<SiteIdx> = self
            .bottlenecks
            .iter()
            .filter_map(|b| match b.resource {
                Resource::Site(s) => Some(s),
                Resource::Arc(_) => None,
            })
            .collect();
        v.sort_unstable();
        v
    }

    /// served_required / surviving required (1 when nothing is required).
    pub fn served_fraction(&self) -> f64 {
        if self.surviving_required > 0.0 {
            self.served_required / self.surviving_required
        } else {
            1.0
        }
    }

    /// (upper bound − served_required) / surviving required: how far the reported value
    /// may be below the optimum, relative to the demand at stake. Never clamped: a
    /// negative value would mean the bounds cross (and the result is then unproven).
    pub fn certified_gap(&self) -> f64 {
        relative_gap(
            self.upper_bound,
            self.served_required,
            self.surviving_required,
        )
    }

    /// Both LPs of this outage were proven optimal.
    pub fn proven(&self) -> bool {
        self.verification.proven
            && self
                .throughput_verification
                .as_ref()
                .is_none_or(|v| v.proven)
    }

    /// The evaluation without its per-demand, per-arc and per-site vectors (`demand_flow`,
    /// `demand_shortfall`, `arc_load`, `site_load`, `arc_price` emptied, and `site_price`
    /// unless the outage has a shortfall): what ranking, gates, criticality, the relief
    /// table and the verification summary read, in a few hundred bytes instead of
    /// O(demands + arcs + sites). O(1) beyond freeing. Invariant:
    /// every scalar, `bottlenecks`, `cut_off`, `stranded_demands` and both verifications
    /// are unchanged; a report that shows the dropped vectors asks for the full evaluation
    /// again ([`Evaluation::is_thin`]).
    pub fn thin(mut self) -> Evaluation {
        for v in [
            &mut self.demand_flow,
            &mut self.demand_shortfall,
            &mut self.arc_load,
            &mut self.site_load,
            &mut self.arc_price,
        ] {
            *v = Vec::new();
        }
        if self.shortfall <= 0.0 {
            self.site_price = Vec::new();
        }
        self.proof = None;
        self.bottlenecks.shrink_to_fit();
        self.cut_off.shrink_to_fit();
        self.stranded_demands.shrink_to_fit();
        self
    }

    /// Whether this is a [`thin`](Evaluation::thin) evaluation of `net` (its per-demand
    /// vectors are missing; a full one has one entry per demand).
    pub fn is_thin(&self, net: &Network) -> bool {
        self.demand_flow.len() != net.demands.len()
    }

    /// Surviving required demand cut off for `reason` (Σ required of those demands).
    pub fn cut_off_required(&self, net: &Network, reason: Unservable) -> f64 {
        self.cut_off
            .iter()
            .filter(|(_, r)| *r == reason)
            .map(|&(d, _)| net.demands[d].required)
            .sum()
    }
}

/// `(upper − value) / scale`, with `scale` floored so an empty scenario gives 0.
fn relative_gap(upper: f64, value: f64, scale: f64) -> f64 {
    let gap = upper - value;
    if gap == 0.0 {
        0.0
    } else {
        gap / scale.max(f64::MIN_POSITIVE)
    }
}

/// Below this fraction of the scenario's demand, differences are solver noise: a value is
/// shown as the plainest number within it (see [`simplest_in`]).
pub const NOISE: f64 = 1e-9;

/// Snaps `x` to `target` when within [`TOL`] relative to `scale`; otherwise the plainest
/// number within [`NOISE`]·`scale` of `x`, so solver noise does not show in large units
/// (bit/s) and equal results print equal. `scale` is the amount at stake for `x` (for a
/// demand's flow, its origin's servable demand: [`flow_scales`]), never a scenario or file
/// total.
fn snap(x: f64, target: f64, scale: f64) -> f64 {
    if scale.is_nan() || scale <= 0.0 {
        return if x.abs() < 1e-12 { target } else { x };
    }
    if (x - target).abs() <= TOL * scale {
        target
    } else {
        plain(x, scale)
    }
}

/// The plainest number within [`NOISE`]·`scale` of `x` ([`simplest_in`]).
fn plain(x: f64, scale: f64) -> f64 {
    let eps = NOISE * scale;
    simplest_in(x - eps, x + eps, x.round())
}

/// The number with the fewest significant digits (at most 15) in `[lo, hi]`, preferring
/// `prefer` when it lies inside; `lo` when the interval is empty or not finite. Any value
/// in the proven interval is as true as any other, so reports show the plainest one
/// (105, not 104.999999979). O(1).
pub fn simplest_in(lo: f64, hi: f64, prefer: f64) -> f64 {
    if !(lo.is_finite() && hi.is_finite()) || lo > hi {
        return lo;
    }
    if (lo..=hi).contains(&prefer) {
        return prefer;
    }
    if lo <= 0.0 && hi >= 0.0 {
        return 0.0;
    }
    let mid = 0.5 * lo + 0.5 * hi;
    if !mid.is_normal() {
        // Subnormal ends (the midpoint may even underflow to 0): no digits to drop.
        return if (lo..=hi).contains(&mid) { mid } else { lo };
    }
    let exp = mid.abs().log10().floor() as i32;
    for digits in 1..=15 {
        let unit = 10f64.powi(exp + 1 - digits);
        let candidate = (mid / unit).round() * unit;
        if (lo..=hi).contains(&candidate) {
            return candidate;
        }
    }
    mid
}

/// The value reported for an amount proven to lie in `[lo, hi]` that can never exceed
/// `offered` (the required demand or the volume at stake): `offered` itself when the
/// interval reaches it, else the plainest number in the interval cut at `offered`
/// ([`simplest_in`]). Never above `offered`, so a report never serves more than is
/// offered (`150`, not `150.00000001`). O(1).
pub fn reported_in(lo: f64, hi: f64, offered: f64) -> f64 {
    if lo <= offered && offered <= hi {
        return offered;
    }
    simplest_in(lo.min(offered), hi.min(offered), offered).min(offered)
}

/// A scenario's shortfall: the required demand of its cut-off demands (`cut_off`, which no
/// walk can serve) plus what the servable ones (`servable` required in all) miss of it
/// (`served` is their proven total). Summed this way, a cut-off demand of 2.5e-6 units
/// beside 7e11 served units is not lost to the rounding of `7e11 + 2.5e-6 − 7e11`. O(1).
pub fn shortfall_of(cut_off: f64, servable: f64, served: f64) -> f64 {
    cut_off + (servable - served).max(0.0)
}

/// Per demand, the amount its flow is judged against when it is snapped (`snap`): the
/// required demand of the servable demands (`servable[d]`) that share its origin, which is
/// the LP block it is solved in (flows are scaled and repaired per origin, so that is the
/// precision a flow has); a demand that is not servable keeps its own required part.
/// Never a scenario or file total. O(demands + sites).
pub fn flow_scales(net: &Network, servable: &[bool]) -> Vec<f64> {
    let mut by_origin = vec![0.0; net.sites.len()];
    for (d, dem) in net.demands.iter().enumerate() {
        if servable[d] {
            by_origin[dem.from] += dem.required;
        }
    }
    net.demands
        .iter()
        .enumerate()
        .map(|(d, dem)| {
            if servable[d] {
                by_origin[dem.from]
            } else {
                dem.required
            }
        })
        .collect()
}

/// Solves the served_required LP of `net` under `outage` and returns it with its flow
/// index, with the default backend and no verification. The building block of the
/// expansion models; [`evaluate`] verifies.
pub fn solve_flow(
    net: &Network,
    outage: &Outage,
    cap: Cap,
) -> Result<(lp::Lp, flow::FlowIndex, lp::LpSolution)> {
    let mut model = lp::Lp::new(true);
    let index = flow::build(&mut model, net, outage, cap, 1.0, None);
    let sol = if model.num_vars() == 0 {
        empty_solution(&model)
    } else {
        lp::solve(&model)?
    };
    Ok((model, index, sol))
}

fn empty_solution(model: &lp::Lp) -> lp::LpSolution {
    lp::LpSolution {
        x: Vec::new(),
        duals: vec![0.0; model.rows.len()],
        upper_duals: Vec::new(),
        objective: 0.0,
    }
}

/// One verified LP result, whatever engine produced it: the feasible allocation, the
/// bounds, and the shadow prices of the real capacities.
#[derive(Debug, Clone)]
pub struct Verified {
    /// The repaired, feasible allocation (its `served` is the proven lower bound).
    pub allocation: verify::Repaired,
    /// The engine's own objective value (Σ f_d of its allocation).
    pub lp_value: f64,
    pub verification: Verification,
    /// Per arc: shadow price of its real capacity (0 when the model had no row for it, or
    /// when the presolve lowered the row below the real capacity: it does not bind then).
    pub arc_price: Vec<f64>,
    /// Per site: the same for processing.
    pub site_price: Vec<f64>,
    /// Per arc: the model has a capacity row for it (some flow could use it).
    pub arc_has_row: Vec<bool>,
    /// Per site: the model has a processing row for it.
    pub site_has_row: Vec<bool>,
    /// Per arc and per site: the prices that gave the upper bound (as the certificate
    /// read them, before rows lowered by the presolve were zeroed above).
    pub bound_price: (Vec<f64>, Vec<f64>),
}

/// Whether `proven`: residual within [`RESIDUAL_TOL`] and the bounds within [`GAP_TOL`]
/// of `at_stake` of each other (in either direction: crossing bounds are a defect).
pub fn meets(residual: f64, lower: f64, upper: f64, at_stake: f64) -> bool {
    let gap = upper - lower;
    let tol = GAP_TOL * at_stake.max(f64::MIN_POSITIVE);
    residual <= RESIDUAL_TOL && gap <= tol && gap >= -tol
}

/// Σ of the demand caps of the demands that some walk through a processing site can
/// serve on `view`: what is at stake in the LP. O(demands + reachability).
pub fn at_stake(net: &Network, view: &Surviving, bound: &[f64]) -> f64 {
    view.unservable(net, bound)
        .iter()
        .enumerate()
        .filter(|(d, r)| r.is_none() && view.demand_alive(net, *d) && bound[*d] > 0.0)
        .map(|(d, _)| bound[d])
        .sum()
}

/// The demand caps of `cap`, per demand.
pub fn caps_of(net: &Network, cap: Cap) -> Vec<f64> {
    net.demands
        .iter()
        .map(|d| match cap {
            Cap::Required => d.required,
            Cap::Volume => d.volume,
        })
        .collect()
}

/// Builds the flow LP of `view` with demand caps `cap`, solves it with each backend of
/// [`LADDER`] in turn until the result is proven, and keeps the best proven bounds of all
/// attempts. Fails only when every backend fails.
///
/// Cost: one LP solve when the first backend is proven (the common case), plus the
/// certificate (O(sites · arcs · log sites)) and the repair per attempt.
pub fn solve_verified(net: &Network, view: &Surviving, cap: Cap) -> Result<Verified> {
    solve_verified_with(net, view, cap, &LADDER)
}

/// [`solve_verified`] with another ladder of backends (tests use it to check that a
/// backend's wrong answer is caught).
pub fn solve_verified_with(
    net: &Network,
    view: &Surviving,
    cap: Cap,
    ladder: &[&dyn Backend],
) -> Result<Verified> {
    let mut model = lp::Lp::new(true);
    let index = flow::build_on(&mut model, net, view, cap, 1.0, None);
    let bound = caps_of(net, cap);
    let at_stake: f64 = index
        .demand_var
        .iter()
        .enumerate()
        .filter(|(_, v)| v.is_some())
        .map(|(d, _)| bound[d])
        .sum();
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    if model.num_vars() == 0 {
        let solution = empty_solution(&model);
        let allocation = verify::repair(
            net,
            &index,
            &solution.x,
            &arc_capacity,
            &site_capacity,
            &bound,
        );
        return Ok(Verified {
            allocation,
            lp_value: 0.0,
            verification: Verification {
                proven: true,
                lower: 0.0,
                upper: 0.0,
                residual: 0.0,
                attempts: 0,
                backend: "none (nothing to route)".into(),
            },
            arc_price: vec![0.0; net.arcs.len()],
            site_price: vec![0.0; net.sites.len()],
            arc_has_row: vec![false; net.arcs.len()],
            site_has_row: vec![false; net.sites.len()],
            bound_price: (Vec::new(), Vec::new()),
        });
    }
    let scale = at_stake.max(f64::MIN_POSITIVE);
    let (row_floor, var_floor) = index.magnitudes(&model, f64::MIN_POSITIVE);
    let mut best: Option<Verified> = None;
    let mut best_upper = f64::INFINITY;
    let mut best_prices: (Vec<f64>, Vec<f64>) = (Vec::new(), Vec::new());
    let mut errors = Vec::new();
    for (attempt, backend) in ladder.iter().enumerate() {
        let solution = match backend.solve(&model, None) {
            Ok(s) => s,
            Err(e) => {
                errors.push(format!("{}: {e}", backend.name()));
                continue;
            }
        };
        let residual = verify::residual(&model, &solution.x, &row_floor, &var_floor);
        let allocation = verify::repair(
            net,
            &index,
            &solution.x,
            &arc_capacity,
            &site_capacity,
            &bound,
        );
        let arc_price: Vec<f64> = index
            .arc_row
            .iter()
            .map(|r| r.map_or(0.0, |r| solution.duals[r].max(0.0)))
            .collect();
        let site_price: Vec<f64> = index
            .site_row
            .iter()
            .map(|r| r.map_or(0.0, |r| solution.duals[r].max(0.0)))
            .collect();
        let upper = certify::dual_bound(
            net,
            view,
            &bound,
            &index.arc_cap,
            &index.site_cap,
            &arc_price,
            &site_price,
        )
        .min(at_stake);
        if upper < best_upper {
            best_upper = upper;
            best_prices = (arc_price, site_price);
        }
        let lp_value = index.served(&solution.x);
        // Prefer an allocation that passes the residual check, then the larger lower bound.
        let feasible = residual <= RESIDUAL_TOL;
        let better = best.as_ref().is_none_or(|b| {
            let b_feasible = b.verification.residual <= RESIDUAL_TOL;
            (feasible && !b_feasible)
                || (feasible == b_feasible && allocation.served > b.allocation.served)
        });
        if better {
            best = Some(Verified {
                lp_value,
                verification: Verification {
                    proven: false,
                    lower: allocation.served,
                    upper: f64::INFINITY,
                    residual,
                    attempts: attempt + 1,
                    backend: backend.name().into(),
                },
                allocation,
                arc_price: Vec::new(),
                site_price: Vec::new(),
                arc_has_row: index.arc_row.iter().map(Option::is_some).collect(),
                site_has_row: index.site_row.iter().map(Option::is_some).collect(),
                bound_price: (Vec::new(), Vec::new()),
            });
        }
        let b = best.as_mut().expect("set above");
        b.verification.attempts = attempt + 1;
        b.verification.upper = best_upper;
        b.verification.proven = meets(
            b.verification.residual,
            b.verification.lower,
            best_upper,
            scale,
        );
        if b.verification.proven {
            break;
        }
    }
    let mut out = best.ok_or_else(|| Error::Solver(errors.join("; ")))?;
    // The presolve lowers rows that cannot bind; a price on such a row is not a price of
    // the real capacity.
    out.arc_price = (0..net.arcs.len())
        .map(|a| {
            if index.arc_cap[a] < net.arcs[a].capacity {
                0.0
            } else {
                best_prices.0[a]
            }
        })
        .collect();
    out.site_price = (0..net.sites.len())
        .map(|v| {
            if index.site_cap[v] < net.sites[v].processing {
                0.0
            } else {
                best_prices.1[v]
            }
        })
        .collect();
    out.bound_price = best_prices;
    Ok(out)
}

/// Demands with required > 0 that no walk through a processing site can serve even with
/// nothing failed, with the reason (structural: reachability only, no LP).
/// O(sources · (sites + arcs)).
pub fn baseline_cut_off(net: &Network) -> Vec<(usize, Unservable)> {
    let view = Surviving::new(net, &Outage::default(), None);
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    view.unservable(net, &required)
        .into_iter()
        .enumerate()
        .filter_map(|(d, r)| r.map(|r| (d, r)))
        .collect()
}

/// Solves one outage: served_required, shortfall, stranded, throughput (a second LP only
/// when some surviving demand's volume exceeds its required part), one optimal allocation,
/// its bottlenecks and the shadow prices, and the proven bounds (see the module
/// documentation).
///
/// Cost: one or two verified LP solves of the size given in [`flow::build`].
pub fn evaluate(net: &Network, outage: &Outage) -> Result<Evaluation> {
    let view = Surviving::new(net, outage, None);
    let required = solve_verified(net, &view, Cap::Required)?;
    let volume = if needs_volume_lp(net, outage) {
        Some(solve_verified(net, &view, Cap::Volume)?)
    } else {
        None
    };
    Ok(finish(net, &view, required, volume))
}

/// [`evaluate`] by the walk engine started cold ([`colgen::evaluate_walks`]): the same
/// verified result (an unproven walk answer falls back to the edge LP's ladder), usually
/// faster on networks of tens of sites. What the expansion layer re-solves with.
pub fn evaluate_cold_walks(net: &Network, outage: &Outage) -> Result<Evaluation> {
    Ok(colgen::evaluate_walks(net, outage, None)?.evaluation)
}

/// Whether some surviving demand offers more than its required part, so that throughput
/// needs its own LP (with volume caps). O(demands).
pub fn needs_volume_lp(net: &Network, outage: &Outage) -> bool {
    let site_alive = outage.site_alive(net);
    net.demands
        .iter()
        .any(|d| site_alive[d.from] && site_alive[d.to] && d.volume > d.required)
}

/// The demands of one outage split by [`Surviving::demand_alive`]: the stranded ones
/// (an end failed or no path: their required and volume totals and indices, in demand
/// order) and the totals of the surviving ones. What [`finish`] reports and what a
/// re-check of a restored result compares against. O(demands).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct DemandSplit {
    pub stranded: f64,
    pub stranded_volume: f64,
    pub stranded_demands: Vec<usize>,
    pub surviving_required: f64,
    pub surviving_volume: f64,
}

impl DemandSplit {
    pub(crate) fn of(net: &Network, view: &Surviving) -> DemandSplit {
        let mut split = DemandSplit {
            stranded: 0.0,
            stranded_volume: 0.0,
            stranded_demands: Vec::new(),
            surviving_required: 0.0,
            surviving_volume: 0.0,
        };
        for (d, dem) in net.demands.iter().enumerate() {
            if view.demand_alive(net, d) {
                split.surviving_required += dem.required;
                split.surviving_volume += dem.volume;
            } else {
                split.stranded += dem.required;
                split.stranded_volume += dem.volume;
                split.stranded_demands.push(d);
            }
        }
        split
    }
}

/// Turns verified results (served_required LP, and the throughput LP when one was
/// solved) into the reported [`Evaluation`]: stranded totals, the plainest value inside
/// each proven interval (or the proven lower bound when unproven), per-demand flows,
/// bottlenecks, prices and cut-off demands. Any engine's results go through here.
///
/// Cost: O(demands + arcs + sites) plus one reachability pass per source.
pub fn finish(
    net: &Network,
    view: &Surviving,
    solved: Verified,
    volume: Option<Verified>,
) -> Evaluation {
    let DemandSplit {
        stranded,
        stranded_volume,
        stranded_demands,
        surviving_required,
        surviving_volume,
    } = DemandSplit::of(net, view);

    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let cut_off: Vec<(usize, Unservable)> = view
        .unservable(net, &required)
        .into_iter()
        .enumerate()
        .filter_map(|(d, r)| r.map(|r| (d, r)))
        .collect();
    // Σ required of the cut-off demands, and of the surviving ones some walk can serve
    // (what the LP holds), each summed on its own so neither is lost in the other.
    let cut_off_required: f64 = cut_off.iter().map(|&(d, _)| required[d]).sum();
    let mut servable: Vec<bool> = (0..net.demands.len())
        .map(|d| view.demand_alive(net, d))
        .collect();
    for &(d, _) in &cut_off {
        servable[d] = false;
    }
    let servable_required: f64 = if cut_off.is_empty() {
        surviving_required
    } else {
        (0..net.demands.len())
            .filter(|&d| servable[d])
            .map(|d| required[d])
            .sum()
    };

    let v = &solved.verification;
    let served_required = if v.proven {
        reported_in(v.lower, v.upper, servable_required)
    } else {
        v.lower.clamp(0.0, servable_required)
    };
    let shortfall = shortfall_of(cut_off_required, servable_required, served_required);

    // A cut-off demand serves exactly nothing; any other flow is judged against its LP
    // block (its origin's servable demand), never against a larger total.
    let alloc = &solved.allocation;
    let scales = flow_scales(net, &servable);
    let demand_flow: Vec<f64> = (0..net.demands.len())
        .map(|d| {
            let (f, r, scale) = (alloc.demand_flow[d], required[d], scales[d]);
            if servable[d] {
                snap(snap(f.min(r), r, scale), 0.0, scale)
            } else {
                0.0
            }
        })
        .collect();
    let demand_shortfall: Vec<f64> = (0..net.demands.len())
        .map(|d| {
            if !view.demand_alive(net, d) {
                0.0
            } else if servable[d] {
                snap(required[d] - demand_flow[d], 0.0, scales[d])
            } else {
                required[d]
            }
        })
        .collect();

    let arc_load = alloc.arc_load.clone();
    let site_load = alloc.site_load.clone();
    let arc_price: Vec<f64> = solved
        .arc_price
        .iter()
        .map(|&p| snap(p.max(0.0), 0.0, 1.0))
        .collect();
    let site_price: Vec<Option<f64>> = (0..net.sites.len())
        .map(|v| solved.site_has_row[v].then(|| snap(solved.site_price[v].max(0.0), 0.0, 1.0)))
        .collect();

    let mut bottlenecks = Vec::new();
    for (a, arc) in net.arcs.iter().enumerate() {
        if solved.arc_has_row[a] && arc_load[a] >= arc.capacity * SATURATED {
            bottlenecks.push(Bottleneck {
                resource: Resource::Arc(a),
                price: arc_price[a],
                utilisation: arc_load[a] / arc.capacity,
            });
        }
    }
    for (v, site) in net.sites.iter().enumerate() {
        if solved.site_has_row[v] && site_load[v] >= site.processing * SATURATED {
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

    let proof = Some(Box::new(recheck::Proof {
        required: recheck::Certificate::of(&solved),
        volume: volume.as_ref().map(recheck::Certificate::of),
    }));
    let mut verification = solved.verification.clone();
    let upper_bound = if verification.proven {
        verification.upper.max(served_required)
    } else {
        verification.upper
    };
    verification.upper = upper_bound;

    let (throughput, throughput_verification) = if let Some(t) = volume {
        let tv = &t.verification;
        let value = if tv.proven {
            reported_in(tv.lower, tv.upper, surviving_volume)
        } else {
            tv.lower.clamp(0.0, surviving_volume)
        };
        (
            value.max(served_required).min(surviving_volume),
            Some(t.verification),
        )
    } else {
        (served_required, None)
    };

    Evaluation {
        cut_off,
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
        max_violation: verification.residual,
        verification,
        throughput_verification,
        proof,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// IEEE 754 subnormals (common practice, no source): the midpoint of the smallest
    /// positive doubles underflows to 0, which has no power of ten; the interval's own
    /// ends are returned instead of a panic.
    #[test]
    fn simplest_in_subnormal_intervals() {
        let tiny = f64::from_bits(1);
        assert_eq!(simplest_in(tiny, tiny, 1.0), tiny);
        let x = simplest_in(tiny, 8.0 * tiny, 1.0);
        assert!((tiny..=8.0 * tiny).contains(&x), "{x:e}");
        assert_eq!(simplest_in(104.99999997, 105.00000002, 0.0), 105.0);
    }

    fn net(json: &str) -> Network {
        Network::from_json(json).unwrap()
    }

    /// Arc reuse (common practice, no source: it is how a walk that revisits an arc
    /// consumes it). One-way ring s→m→t→p→m, processing only at p, demand s→t: the walk
    /// s→m→t→p→m→t crosses arc m→t (capacity 10) twice, once unprocessed and once
    /// processed, so only 5 units get through. With processing at the origin it is
    /// crossed once and carries all 10.
    #[test]
    fn walk_reusing_an_arc_halves_it() {
        let n = net(
            r#"{"sites":[{"id":"s"},{"id":"m"},{"id":"t"},{"id":"p","processing":100}],
            "links":[{"id":"sm","from":"s","to":"m","capacity":100,"one_way":true},
                     {"id":"mt","from":"m","to":"t","capacity":10,"one_way":true},
                     {"id":"tp","from":"t","to":"p","capacity":100,"one_way":true},
                     {"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}],
            "demands":[{"from":"s","to":"t","volume":50}]}"#,
        );
        let e = evaluate(&n, &Outage::default()).unwrap();
        assert!(
            (e.served_required - 5.0).abs() < 1e-6,
            "{}",
            e.served_required
        );
        // With processing at the origin, the arc is crossed once and carries all of it.
        let n2 = net(
            r#"{"sites":[{"id":"s","processing":100},{"id":"m"},{"id":"t"},{"id":"p"}],
            "links":[{"id":"sm","from":"s","to":"m","capacity":100,"one_way":true},
                     {"id":"mt","from":"m","to":"t","capacity":10,"one_way":true},
                     {"id":"tp","from":"t","to":"p","capacity":100,"one_way":true},
                     {"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}],
            "demands":[{"from":"s","to":"t","volume":50}]}"#,
        );
        let e2 = evaluate(&n2, &Outage::default()).unwrap();
        assert!((e2.served_required - 10.0).abs() < 1e-6);
        assert!(e2.certified_gap() < 1e-6, "{e2:?}");
    }

    /// Hand-worked: the reported value of a proven interval never exceeds what is offered,
    /// and is the offered amount itself whenever the interval reaches it.
    #[test]
    fn reported_values_stay_within_the_offer() {
        assert_eq!(reported_in(149.99999999, 150.00000002, 150.0), 150.0);
        assert_eq!(reported_in(150.00000001, 150.00000002, 150.0), 150.0);
        assert_eq!(reported_in(104.999999979, 105.00000001, 150.0), 105.0);
        assert_eq!(reported_in(89.99999, 90.00001, 150.0), 90.0);
        let odd = 0.1 + 0.2 + 149.7;
        assert!(reported_in(odd - 1e-9, odd + 1e-9, odd) <= odd);
        // Crossing bounds above the offer (solver noise) still report the offer.
        assert_eq!(reported_in(150.2, 150.1, 150.0), 150.0);
    }

    /// Hand-worked: 7e11 + 2.5e-6 − 7e11 is 0 in floating point; summed apart it is not.
    #[test]
    fn a_small_cut_off_part_is_not_lost() {
        let surviving = 7e11 + 2.5e-6;
        assert_eq!(surviving - 7e11, 0.0);
        assert_eq!(shortfall_of(2.5e-6, 7e11, 7e11), 2.5e-6);
        assert_eq!(shortfall_of(0.0, 20.0, 8.0), 12.0);
    }

    /// Hand-worked: demands from the same origin share its scale, others keep their own.
    #[test]
    fn flow_scales_are_per_origin() {
        let n = net(
            r#"{"sites":[{"id":"a","processing":10},{"id":"b"},{"id":"c"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1}],
            "demands":[{"from":"a","to":"b","volume":7},{"from":"a","to":"c","volume":0.5},
                       {"from":"b","to":"a","volume":2}]}"#,
        );
        assert_eq!(flow_scales(&n, &[true, true, true]), vec![7.5, 7.5, 2.0]);
        assert_eq!(flow_scales(&n, &[true, false, true]), vec![7.0, 0.5, 2.0]);
    }

    #[test]
    fn shadow_price_of_binding_processing() {
        let n = net(r#"{"sites":[{"id":"a","processing":3},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":100}],
            "demands":[{"from":"a","to":"b","volume":10,"required":8}]}"#);
        let e = evaluate(&n, &Outage::default()).unwrap();
        assert!((e.served_required - 3.0).abs() < 1e-6);
        assert!((e.shortfall - 5.0).abs() < 1e-6);
        assert!((e.throughput - 3.0).abs() < 1e-6);
        assert!((e.site_price[0].unwrap() - 1.0).abs() < 1e-6);
        assert_eq!(e.bottlenecks[0].resource, Resource::Site(0));
        assert!(e.certified_gap() < 1e-6);
    }
}
