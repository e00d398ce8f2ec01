//! Verifying a stored result again, without solving: what makes a journal line or a part
//! file's line *data* rather than trust.
//!
//! Every [`Evaluation`] carries a [`Proof`]: per LP (served_required, and throughput when
//! it has its own LP) the feasible allocation as walks with their flows, and the prices
//! of its dual bound. [`recheck`] reads it against the network and the outage:
//!
//! - each walk's arcs must be usable in the surviving network ([`Surviving`]) and form
//!   a walk from its demand's origin to its destination through a site that can
//!   process; the walks are scaled to
//!   fit the real capacities by [`verify::repair_walks`], so their delivered total is a
//!   proven lower bound `L`;
//! - the prices give the certificate's dual bound ([`certify::dual_bound`], with the
//!   presolved capacities of [`flow::presolved_caps`]), a proven upper bound `U`;
//! - a value labelled proven needs `U − L` within [`PROOF_GAP_TOL`] of the demand at stake and
//!   must lie in `[L, U]` (within that tolerance); an unproven value must not exceed `L`;
//!   the stored bounds must not claim more than `L` and `U` prove;
//! - everything else the reports read is either recomputed exactly as
//!   [`super::finish::finish`] computes it (stranded and surviving totals, cut-off demands,
//!   shortfalls, the value from its bounds) or checked against the walks' allocation
//!   (per-demand flows and loads) and the certificate's prices (shadow prices,
//!   bottlenecks), and every index is checked to be in range.
//!
//! So a line that passes can be reported, and one that fails is either solved again
//! (journal) or refused (merge). Cost: the certificate's Dijkstras, one reachability
//! pass per source and per processing site, and one pass over the walks per LP; far
//! cheaper than a solve.

mod chain;

use serde::{Deserialize, Serialize};

use super::finish::{Servable, cut_off_on, reported_flow, reported_shortfall, saturated, snap};
use super::flow::{self, Cap};
use super::surviving::Surviving;
use super::verify::{self, Repaired, Sink, Walk};
use super::{
    Evaluation, NOISE, RESIDUAL_TOL, Resource, TOL, Verification, Verified, certify,
    needs_volume_lp, reported_in, shortfall_of,
};
use crate::model::Network;
use crate::scenario::Outage;
use crate::tol::{PROOF_GAP_TOL, RECHECK_LOAD_TOL, RECHECK_SLACK};

/// One walk of a stored allocation: the demand it serves, the site where it is
/// processed, the arcs it crosses (in walk order, or any order: the walk engine keeps a
/// walk's arcs sorted; an arc crossed twice is listed twice) and the flow it carries.
/// Written as the array `[demand, site, flow, [arcs…]]` (a proof holds thousands).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(from = "WalkRow", into = "WalkRow")]
pub struct CertWalk {
    pub demand: usize,
    pub site: usize,
    pub arcs: Vec<usize>,
    pub flow: f64,
}

/// [`CertWalk`] as written.
type WalkRow = (usize, usize, f64, Vec<usize>);

impl From<WalkRow> for CertWalk {
    fn from((demand, site, flow, arcs): WalkRow) -> CertWalk {
        CertWalk {
            demand,
            site,
            arcs,
            flow,
        }
    }
}

impl From<CertWalk> for WalkRow {
    fn from(w: CertWalk) -> WalkRow {
        (w.demand, w.site, w.flow, w.arcs)
    }
}

/// What verifies one LP result again: its feasible allocation as walks and the positive
/// prices of its dual bound (`(arc, price)` and `(site, price)`, in index order).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Certificate {
    pub walks: Vec<CertWalk>,
    pub arc_prices: Vec<(usize, f64)>,
    pub site_prices: Vec<(usize, f64)>,
}

impl Certificate {
    /// The certificate of a verified result: its repaired allocation's walks and the
    /// prices its upper bound was computed with. O(walk lengths + arcs + sites).
    pub fn of(v: &Verified) -> Certificate {
        let positive = |p: &[f64]| -> Vec<(usize, f64)> {
            p.iter()
                .enumerate()
                .filter(|(_, p)| **p > 0.0)
                .map(|(i, &p)| (i, p))
                .collect()
        };
        Certificate {
            walks: v
                .allocation
                .paths
                .iter()
                .filter_map(|w| match w.sink {
                    Sink::Demand(d) => Some(CertWalk {
                        demand: d,
                        site: w.site,
                        arcs: w.arcs.clone(),
                        flow: w.amount,
                    }),
                    Sink::Group { .. } => None,
                })
                .collect(),
            arc_prices: positive(&v.bound_price.0),
            site_prices: positive(&v.bound_price.1),
        }
    }
}

/// The certificates of one outage's evaluation: served_required's LP, and the throughput
/// LP's when it was solved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Proof {
    pub required: Certificate,
    pub volume: Option<Certificate>,
}

/// What a certificate proves on the surviving network.
struct Proven {
    /// The walks' allocation after scaling to the real capacities (`served` = `L`).
    allocation: Repaired,
    /// The dual bound `U`, capped by the demand at stake.
    upper: f64,
    /// The demand at stake (Σ caps of the servable surviving demands).
    at_stake: f64,
    /// Dense prices of the certificate (per arc, per site).
    arc_price: Vec<f64>,
    site_price: Vec<f64>,
}

/// Whether the arcs `arcs` (a multiset, in any order, every index valid) can be crossed,
/// each as often as listed, by one walk from `from` to `to` that passes `site`: every
/// site's out-degree minus in-degree is 1 at `from`, −1 at `to` and 0 elsewhere (all 0
/// when `from == to`), every arc's tail is reachable from `from` over these arcs, and
/// `site` is `from` or the head of one of them. These are the conditions for an Euler
/// trail from `from` to `to` (directed graphs), and such a trail visits every site it
/// touches. O(arcs · log arcs).
fn is_trail(net: &Network, arcs: &[usize], from: usize, to: usize, site: usize) -> bool {
    use std::collections::BTreeMap;
    let mut balance: BTreeMap<usize, i64> = BTreeMap::new();
    let mut out: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for &a in arcs {
        let arc = &net.arcs[a];
        *balance.entry(arc.from.0).or_default() += 1;
        *balance.entry(arc.to.0).or_default() -= 1;
        out.entry(arc.from.0).or_default().push(arc.to.0);
    }
    *balance.entry(from).or_default() -= 1;
    *balance.entry(to).or_default() += 1;
    if balance.values().any(|&b| b != 0) {
        return false;
    }
    let mut seen = std::collections::BTreeSet::from([from]);
    let mut stack = vec![from];
    while let Some(u) = stack.pop() {
        for &v in out.get(&u).map_or(&[][..], Vec::as_slice) {
            if seen.insert(v) {
                stack.push(v);
            }
        }
    }
    arcs.iter().all(|&a| seen.contains(&net.arcs[a].from.0)) && seen.contains(&site)
}

/// Checks the walks and prices of `c` on `view` under demand caps `cap` and returns the
/// bounds they prove (see the module documentation). O(walk lengths + certificate).
fn prove(net: &Network, view: &Surviving, cap: Cap, c: &Certificate) -> Result<Proven, String> {
    let bound = super::caps_of(net, cap);
    let mut walks = Vec::with_capacity(c.walks.len());
    for (i, w) in c.walks.iter().enumerate() {
        let bad = |why: &str| Err(format!("walk {} of the certificate {why}", i + 1));
        let Some(dem) = net.demands.get(w.demand) else {
            return bad("names a demand out of range");
        };
        if !view.demand_alive(net, w.demand) || bound[w.demand] <= 0.0 {
            return bad("serves a demand that has nothing at stake in this outage");
        }
        if !view.can_process.get(w.site).copied().unwrap_or(false) {
            return bad("is processed at a site that cannot process in this outage");
        }
        if !(w.flow.is_finite() && w.flow >= 0.0) {
            return bad("carries a flow that is negative or not finite");
        }
        if w.arcs
            .iter()
            .any(|&a| !view.arc_usable.get(a).copied().unwrap_or(false))
        {
            return bad("crosses a link direction that is not usable in this outage");
        }
        if !is_trail(net, &w.arcs, dem.from.0, dem.to.0, w.site) {
            return bad("does not join its demand's ends through its processing site");
        }
        walks.push(Walk {
            sink: Sink::Demand(w.demand),
            arcs: w.arcs.clone(),
            site: w.site,
            amount: w.flow,
        });
    }
    let dense = |len: usize, prices: &[(usize, f64)], what: &str| {
        let mut out = vec![0.0; len];
        for &(i, p) in prices {
            if i >= len || !(p.is_finite() && p >= 0.0) {
                return Err(format!(
                    "the certificate has a {what} price out of range or not finite"
                ));
            }
            out[i] = p;
        }
        Ok(out)
    };
    let arc_price = dense(net.arcs.len(), &c.arc_prices, "link")?;
    let site_price = dense(net.sites.len(), &c.site_prices, "site")?;
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    let allocation = verify::repair_walks(net, &walks, &arc_capacity, &site_capacity, &bound);
    let (arc_cap, site_cap) = flow::presolved_caps(net, view, cap);
    let at_stake = super::at_stake(net, view, &bound);
    let upper = certify::dual_bound(
        net,
        view,
        &bound,
        &arc_cap,
        &site_cap,
        &arc_price,
        &site_price,
    )
    .min(at_stake);
    Ok(Proven {
        allocation,
        upper,
        at_stake,
        arc_price,
        site_price,
    })
}

/// Checks a stored verification against what its certificate proves and returns the
/// value [`super::finish::finish`] reports for it (`total`: the surviving demand under the LP's
/// caps). See the module documentation for the rules.
fn value_of(v: &Verification, total: f64, p: &Proven, what: &str) -> Result<f64, String> {
    let bad = |why: &str| Err(format!("{what}: {why}"));
    if !(v.lower.is_finite() && v.upper.is_finite() && v.residual.is_finite()) || v.residual < 0.0 {
        return bad("a bound or the residual is negative or not finite");
    }
    let lower = p.allocation.served;
    // The tolerance of a proven result, with room for the rounding of the sums.
    let tol = PROOF_GAP_TOL * p.at_stake.max(f64::MIN_POSITIVE) * (1.0 + RECHECK_SLACK);
    let value = if v.proven {
        reported_in(v.lower, v.upper, total)
    } else {
        v.lower.clamp(0.0, total)
    };
    if v.lower > lower + tol {
        return bad(&format!(
            "the stored lower bound {} exceeds what the stored walks deliver ({lower})",
            v.lower
        ));
    }
    if v.upper < p.upper - tol {
        return bad(&format!(
            "the stored upper bound {} is below the certificate's dual bound ({})",
            v.upper, p.upper
        ));
    }
    if v.proven {
        let gap = p.upper - lower;
        if v.residual > RESIDUAL_TOL || gap > tol || gap < -tol {
            return bad(&format!(
                "labelled proven, but the certificate proves only [{lower}, {}]",
                p.upper
            ));
        }
        if value < lower - tol || value > p.upper + tol {
            return bad(&format!(
                "the value {value} lies outside the proven interval [{lower}, {}]",
                p.upper
            ));
        }
    } else if value > lower + tol {
        return bad(&format!(
            "unproven, but the value {value} exceeds the proven lower bound {lower}"
        ));
    }
    Ok(value)
}

/// The network's demand, arc and site counts, when every per-demand, per-arc and per-site
/// list of `e` has that length; otherwise which list does not. O(1).
fn lengths(net: &Network, e: &Evaluation) -> Result<(usize, usize, usize), String> {
    let (nd, na, ns) = (net.demands.len(), net.arcs.len(), net.sites.len());
    if e.demand_flow.len() != nd || e.demand_shortfall.len() != nd {
        return Err(format!("its per-demand lists do not have {nd} entries"));
    }
    if e.arc_load.len() != na || e.arc_price.len() != na {
        return Err(format!(
            "its per-link-direction lists do not have {na} entries"
        ));
    }
    if e.site_load.len() != ns || e.site_price.len() != ns {
        return Err(format!("its per-site lists do not have {ns} entries"));
    }
    Ok((nd, na, ns))
}

/// Verifies the stored evaluation `e` of `outage` on `net` again from its [`Proof`],
/// without solving (see the module documentation). `Err` says what does not hold. A
/// network with `functions` is verified by solving the outage again in layers instead
/// (the private module `recheck::chain`).
///
/// Cost: for each LP, the certificate's dual bound (2 · min(processing sites, demand
/// ends) Dijkstras), the presolved capacities and the demand at stake (reachability per
/// source and per processing site), and one pass over the walks; plus O(demands + arcs +
/// sites) comparisons.
pub fn recheck(net: &Network, outage: &Outage, e: &Evaluation) -> Result<(), String> {
    if net.chains.is_some() {
        return chain::recheck(net, outage, e);
    }
    let net = net.view(outage.matrix);
    let proof = e
        .proof
        .as_deref()
        .ok_or("no certificate to verify it with")?;
    let (nd, na, ns) = lengths(net, e)?;
    let view = Surviving::new(net, outage, None);

    // What does not depend on the LP: recomputed exactly as `finish` does.
    let super::DemandSplit {
        stranded,
        stranded_volume,
        stranded_demands,
        surviving_required,
        surviving_volume,
    } = super::DemandSplit::of(net, &view);
    if e.stranded != stranded
        || e.stranded_volume != stranded_volume
        || e.stranded_demands != stranded_demands
        || e.surviving_required != surviving_required
    {
        return Err("its stranded or surviving demand does not match the network".into());
    }
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let cut_off = cut_off_on(net, &view);
    if !e
        .cut_off
        .iter()
        .map(|&(d, r)| (d.0, r))
        .eq(cut_off.iter().copied())
    {
        return Err("its cut-off demands do not match the network".into());
    }
    // As `finish`: the cut-off demands summed apart from the servable ones (what the LP
    // holds), each flow snapped at its origin's servable demand.
    let Servable {
        servable,
        cut_off_required,
        servable_required,
        scales,
    } = Servable::of(net, &view, surviving_required, &cut_off);

    // served_required: the certificate's bounds, then the value from the stored bounds.
    let req = prove(net, &view, Cap::Required, &proof.required)?;
    let served = value_of(&e.verification, servable_required, &req, "served")?;
    if e.served_required != served
        || e.shortfall != shortfall_of(cut_off_required, servable_required, served)
        || e.upper_bound != e.verification.upper
        || e.max_violation != e.verification.residual
        || (e.verification.proven && e.upper_bound < served)
    {
        return Err("its served value, shortfall or bounds do not agree with each other".into());
    }

    // Throughput: its own LP exactly when some surviving demand offers more than required.
    let throughput = match (
        needs_volume_lp(net, outage),
        &e.throughput_verification,
        &proof.volume,
    ) {
        (true, Some(tv), Some(c)) => {
            let vol = prove(net, &view, Cap::Volume, c)?;
            value_of(tv, surviving_volume, &vol, "throughput")?
                .max(served)
                .min(surviving_volume)
        }
        (false, None, None) => served,
        _ => return Err("its throughput verification does not match the network".into()),
    };
    if e.throughput != throughput {
        return Err("its throughput does not agree with its bounds".into());
    }

    // Per demand, link direction and site: against the walks' allocation.
    let scale = surviving_required.max(f64::MIN_POSITIVE);
    let alloc = &req.allocation;
    let near = |stored: f64, proven: f64, tol: f64| (stored - proven).abs() <= tol;
    for d in 0..nd {
        let f = e.demand_flow[d];
        // As `finish` reports the walks' flow (snapped to the demand or to 0).
        let (req_d, sc) = (required[d], scales[d]);
        let walked = reported_flow(alloc.demand_flow[d], req_d, servable[d], sc);
        if !near(f, walked, (TOL + 2.0 * NOISE) * scale) {
            return Err(format!(
                "demand {}: its flow {f} is not the stored walks' ({walked})",
                net.demands[d].label
            ));
        }
        let short = reported_shortfall(view.demand_alive(net, d), servable[d], req_d, f, sc);
        if e.demand_shortfall[d] != short {
            return Err(format!(
                "demand {}: its shortfall does not agree with its flow",
                net.demands[d].label
            ));
        }
    }
    for a in 0..na {
        if !near(e.arc_load[a], alloc.arc_load[a], RECHECK_LOAD_TOL * scale) {
            return Err(format!(
                "a link direction of {}: its load {} is not the stored walks' ({})",
                net.links[net.arcs[a].link].id, e.arc_load[a], alloc.arc_load[a]
            ));
        }
    }
    for v in 0..ns {
        if !near(e.site_load[v], alloc.site_load[v], RECHECK_LOAD_TOL * scale) {
            return Err(format!(
                "site {}: its processing used {} is not the stored walks' ({})",
                net.sites[v].id, e.site_load[v], alloc.site_load[v]
            ));
        }
    }

    // Shadow prices: the certificate's (snapped as reported), or 0 where the presolve
    // lowered the row.
    let price_ok = |p: f64, cert: f64| p == 0.0 || p == snap(cert.max(0.0), 0.0, 1.0);
    if (0..na).any(|a| !price_ok(e.arc_price[a], req.arc_price[a]))
        || (0..ns).any(|v| e.site_price[v].is_some_and(|p| !price_ok(p, req.site_price[v])))
    {
        return Err("its shadow prices are not its certificate's".into());
    }

    // Bottlenecks: saturated resources with their reported price, in report order.
    for b in &e.bottlenecks {
        let (load, cap, price) = match b.resource {
            Resource::Arc(a) if a.0 < na => (e.arc_load[a], net.arcs[a].capacity, e.arc_price[a]),
            Resource::Site(v) if v.0 < ns && e.site_price[v].is_some() => (
                e.site_load[v],
                net.sites[v].processing,
                e.site_price[v].unwrap_or(0.0),
            ),
            _ => return Err("a bottleneck names a resource out of range".into()),
        };
        if saturated(b.resource, load, cap, price).as_ref() != Some(b) {
            return Err("a bottleneck is not saturated or not priced as its resource".into());
        }
    }
    in_report_order(e)
}

/// `Ok` when `e`'s bottlenecks are in report order: highest price first, ties by
/// resource, no resource twice. O(bottlenecks).
fn in_report_order(e: &Evaluation) -> Result<(), String> {
    let ordered = e.bottlenecks.windows(2).all(|w| {
        w[1].price
            .total_cmp(&w[0].price)
            .then(w[0].resource.cmp(&w[1].resource))
            .is_lt()
    });
    if !ordered {
        return Err("its bottlenecks are not in report order".into());
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{Element, Scenario};

    fn net() -> Network {
        crate::model::test_ring()
    }

    /// Source: the verifier's own contract — every evaluation either engine produces
    /// passes [`recheck`] on its own outage (nothing honest is refused), checked on each
    /// single failure of a small hand-made network.
    #[test]
    fn honest_evaluations_pass_on_both_engines() {
        let n = net();
        let mut outages = vec![Outage::default()];
        for l in 0..n.links.len() {
            outages.push(Scenario::new(&n, &[Element::Link(l.into())]).outage(&n));
        }
        for s in 0..n.sites.len() {
            outages.push(Scenario::new(&n, &[Element::Site(s.into())]).outage(&n));
        }
        for o in &outages {
            let edge = crate::solve::evaluate(&n, o).unwrap();
            recheck(&n, o, &edge).unwrap_or_else(|e| panic!("edge {o:?}: {e}"));
            let walks = crate::solve::evaluate_cold_walks(&n, o).unwrap();
            recheck(&n, o, &walks).unwrap_or_else(|e| panic!("walks {o:?}: {e}"));
        }
    }

    /// Hand computation: in the baseline, demand a→c (required 1.5) is served within a's
    /// processing (3) over a→b→c (capacities 2 and 5), and b→a (1) over b→c→a (c
    /// processes 1), so served is 2.5. A stored value of 0 labelled proven is refused;
    /// so are walks whose flows no longer give the stored loads, and a thin evaluation.
    #[test]
    fn edited_values_are_refused() {
        let n = net();
        let o = Outage::default();
        let e = crate::solve::evaluate(&n, &o).unwrap();
        assert!(
            (e.served_required - 2.5).abs() < 1e-9,
            "{}",
            e.served_required
        );
        let mut zero = e.clone();
        zero.served_required = 0.0;
        zero.shortfall = zero.surviving_required;
        assert!(recheck(&n, &o, &zero).is_err());
        let mut lowered = e.clone();
        lowered.verification.lower = 0.0;
        lowered.verification.upper = 0.0;
        lowered.upper_bound = 0.0;
        lowered.served_required = 0.0;
        lowered.shortfall = lowered.surviving_required;
        assert!(recheck(&n, &o, &lowered).is_err());
        let mut more = e.clone();
        if let Some(p) = more.proof.as_mut() {
            p.required.walks[0].flow *= 10.0;
        }
        assert!(recheck(&n, &o, &more).is_err());
        let mut thin = e.clone().thin();
        thin.proof = e.proof.clone();
        assert!(recheck(&n, &o, &thin).is_err());
        // On another outage (link bc failed) the baseline's walks are not walks.
        let failed = Scenario::new(&n, &[Element::Link(1.into())]).outage(&n);
        assert!(recheck(&n, &failed, &e).is_err());
    }
}
