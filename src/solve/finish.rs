//! The one ending of every engine and routing model: verified results become the
//! reported [`Evaluation`] ([`finish_with`]): stranded totals, the plainest value inside
//! each proven interval, per-demand flows snapped against their LP block, prices and
//! saturated resources. Also the number rules the re-check of stored results reuses
//! ([`reported_in`], [`shortfall_of`], [`flow_scales`], `DemandSplit`).

use super::surviving::{Surviving, Unservable};
use super::types::{Bottleneck, Evaluation, FunctionUse, Resource, Verified};
use super::{SATURATED, TOL, recheck};
use crate::model::{ArcIdx, Chains, DemandIdx, Network, SiteIdx};
use crate::tol::SNAP_WITHOUT_SCALE;

/// Below this fraction of the scenario's demand, differences are solver noise: a value is
/// shown as the plainest number within it (see [`simplest_in`]); defined in [`crate::tol`].
pub use crate::tol::NOISE;

/// Snaps `x` to `target` when within [`TOL`] relative to `scale`; otherwise the plainest
/// number within [`NOISE`]·`scale` of `x`, so solver noise does not show in large units
/// (bit/s) and equal results print equal. `scale` is the amount at stake for `x` (for a
/// demand's flow, its origin's servable demand: [`flow_scales`]), never a scenario or file
/// total.
pub(crate) fn snap(x: f64, target: f64, scale: f64) -> f64 {
    if scale.is_nan() || scale <= 0.0 {
        return if x.abs() < SNAP_WITHOUT_SCALE {
            target
        } else {
            x
        };
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

/// The surviving demands with required > 0 that no walk through a processing site can
/// serve on `view` ([`Surviving::unservable`]), with the reason, in demand order: the
/// best re-route's cut-off list. O(processing sites · (sites + arcs) + demands).
pub(crate) fn cut_off_on(net: &Network, view: &Surviving) -> Vec<(usize, Unservable)> {
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    view.unservable(net, &required)
        .into_iter()
        .enumerate()
        .filter_map(|(d, r)| r.map(|r| (d, r)))
        .collect()
}

/// What an outage's model can serve, given its cut-off demands: per demand whether it is
/// servable (surviving and not cut off), the cut-off and servable required totals (each
/// summed on its own so neither is lost in the other) and each flow's snapping scale
/// ([`flow_scales`]). What [`finish_with`] reports from and a re-check recomputes.
/// O(demands + sites).
pub(crate) struct Servable {
    pub servable: Vec<bool>,
    pub cut_off_required: f64,
    pub servable_required: f64,
    pub scales: Vec<f64>,
}

impl Servable {
    pub(crate) fn of(
        net: &Network,
        view: &Surviving,
        surviving_required: f64,
        cut_off: &[(usize, Unservable)],
    ) -> Servable {
        let required = |d: usize| net.demands[d].required;
        let cut_off_required: f64 = cut_off.iter().map(|&(d, _)| required(d)).sum();
        let mut servable: Vec<bool> = (0..net.demands.len())
            .map(|d| view.demand_alive(net, d))
            .collect();
        for &(d, _) in cut_off {
            servable[d] = false;
        }
        let servable_required: f64 = if cut_off.is_empty() {
            surviving_required
        } else {
            (0..net.demands.len())
                .filter(|&d| servable[d])
                .map(required)
                .sum()
        };
        let scales = flow_scales(net, &servable);
        Servable {
            servable,
            cut_off_required,
            servable_required,
            scales,
        }
    }
}

/// A demand's reported flow from its allocation's flow `f`: 0 when not servable, else
/// `f` capped at `required` and snapped to `required` or 0 within [`TOL`]·`scale`. O(1).
pub(crate) fn reported_flow(f: f64, required: f64, servable: bool, scale: f64) -> f64 {
    if servable {
        snap(snap(f.min(required), required, scale), 0.0, scale)
    } else {
        0.0
    }
}

/// A demand's reported shortfall from its reported flow: 0 when stranded (`!alive`), its
/// whole required part when cut off, else `required − flow` snapped to 0. O(1).
pub(crate) fn reported_shortfall(
    alive: bool,
    servable: bool,
    required: f64,
    flow: f64,
    scale: f64,
) -> f64 {
    if !alive {
        0.0
    } else if servable {
        snap(required - flow, 0.0, scale)
    } else {
        required
    }
}

/// `resource` as a bottleneck when saturated: load ≥ [`SATURATED`]·`capacity`, or, for a
/// row of capacity 0 (a routing model routes over capacity-0 links), a positive price
/// (utilisation 1 then). O(1).
pub(crate) fn saturated(
    resource: Resource,
    load: f64,
    capacity: f64,
    price: f64,
) -> Option<Bottleneck> {
    let (hit, utilisation) = if capacity > 0.0 {
        (load >= capacity * SATURATED, load / capacity)
    } else {
        (price > 0.0, 1.0)
    };
    hit.then_some(Bottleneck {
        resource,
        price,
        utilisation,
    })
}

/// The demands of one outage split by [`Surviving::demand_alive`]: the stranded ones
/// (an end failed or no path: their required and volume totals and indices, in demand
/// order) and the totals of the surviving ones. What [`finish_with`] reports and what a
/// re-check of a restored result compares against. O(demands).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct DemandSplit {
    pub stranded: f64,
    pub stranded_volume: f64,
    pub stranded_demands: Vec<DemandIdx>,
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
                split.stranded_demands.push(DemandIdx(d));
            }
        }
        split
    }
}

/// Turns verified results (served_required LP, and the throughput LP when one was
/// solved) into the reported [`Evaluation`], with the cut-off demands of the best re-route
/// (no walk through a processing site on `view`, [`Surviving::unservable`]). What the edge
/// LP and the walk engine end in; see [`finish_with`].
///
/// Cost: O(demands + arcs + sites) plus one reachability pass per processing site.
pub fn finish(
    net: &Network,
    view: &Surviving,
    solved: Verified,
    volume: Option<Verified>,
) -> Evaluation {
    let cut_off = cut_off_on(net, view);
    finish_with(net, view, cut_off, solved, volume)
}

/// The one ending of every engine and routing model ([`super::evaluator::Evaluator`]): verified
/// results (served_required, and throughput when that LP was solved) and the demands the
/// model cannot serve at all (`cut_off`, surviving demands with required > 0, in demand
/// order) become the reported [`Evaluation`]: stranded totals, the plainest value inside
/// each proven interval (or the proven lower bound when unproven), per-demand flows
/// snapped against their origin's servable demand ([`flow_scales`]), shadow prices,
/// saturated resources (load ≥ [`SATURATED`]·capacity; a resource of capacity 0 that has
/// a row is saturated when its price is positive) and the proof a journal keeps; on a
/// network with `functions`, also the delivered volume and the per-function loads and
/// prices (`chain_figures`).
///
/// Invariant: `solved` and `volume` are results of models of `view`'s outage whose
/// demand variables exclude `cut_off`. Cost: O(demands + arcs + sites + bottlenecks ·
/// log bottlenecks).
pub fn finish_with(
    net: &Network,
    view: &Surviving,
    cut_off: Vec<(usize, Unservable)>,
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
    let Servable {
        servable,
        cut_off_required,
        servable_required,
        scales,
    } = Servable::of(net, view, surviving_required, &cut_off);

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
    let demand_flow: Vec<f64> = (0..net.demands.len())
        .map(|d| reported_flow(alloc.demand_flow[d], required[d], servable[d], scales[d]))
        .collect();
    let demand_shortfall: Vec<f64> = (0..net.demands.len())
        .map(|d| {
            let alive = view.demand_alive(net, d);
            reported_shortfall(alive, servable[d], required[d], demand_flow[d], scales[d])
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
        if solved.arc_has_row[a] {
            bottlenecks.extend(saturated(
                Resource::Arc(ArcIdx(a)),
                arc_load[a],
                arc.capacity,
                arc_price[a],
            ));
        }
    }
    for (v, site) in net.sites.iter().enumerate() {
        if solved.site_has_row[v] {
            let price = site_price[v].unwrap_or(0.0);
            bottlenecks.extend(saturated(
                Resource::Site(SiteIdx(v)),
                site_load[v],
                site.processing,
                price,
            ));
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

    let functions = solved.functions;
    let mut e = Evaluation {
        cut_off: cut_off
            .into_iter()
            .map(|(d, r)| (DemandIdx(d), r))
            .collect(),
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
        // Copies of `verification.upper` and `.residual` (see `Evaluation::upper_bound`).
        upper_bound,
        max_violation: verification.residual,
        verification,
        throughput_verification,
        proof,
        delivered: None,
        functions: Vec::new(),
    };
    if let Some(ch) = &net.chains {
        chain_figures(&mut e, net, view, ch, functions);
    }
    e
}

/// The figures only a network with `functions` ([`Chains`]) has, set on its evaluation
/// `e`: `delivered` from the reported flows ([`super::chain::delivered`]), shown as the
/// plainest number within solver noise of the delivered volume at stake (Σ required ·
/// gain over the surviving demands), as every reported amount is; and the per-function
/// `functions` with their loads shown as the plainest number within solver noise of the
/// required demand at stake and their prices snapped to 0 within solver noise, as the
/// arc prices are. O(demands · chain + functions).
fn chain_figures(
    e: &mut Evaluation,
    net: &Network,
    view: &Surviving,
    ch: &Chains,
    functions: Vec<FunctionUse>,
) {
    let at_stake: f64 = (0..net.demands.len())
        .filter(|&d| view.demand_alive(net, d))
        .map(|d| net.demands[d].required * ch.total_gain(d))
        .sum();
    let x = super::chain::delivered(net, &e.demand_flow);
    let eps = crate::tol::NOISE * at_stake;
    e.delivered = Some(simplest_in(x - eps, x + eps, x.round()).max(0.0));
    let load_eps = crate::tol::NOISE * e.surviving_required;
    e.functions = functions
        .into_iter()
        .map(|u| FunctionUse {
            load: simplest_in(u.load - load_eps, u.load + load_eps, u.load.round()).max(0.0),
            price: u.price.map(|p| snap(p, 0.0, 1.0)),
            ..u
        })
        .collect();
}
