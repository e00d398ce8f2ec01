//! A stored evaluation of a network with `functions` (service chains) verified again *in
//! layers*: the outage is solved again, cold, by the layered walk engine
//! ([`crate::solve::chainwalk::evaluate_walks`], which falls back to the layered edge LP
//! when it does not prove its answer) and verified by the layered repaired lower bound and
//! dual upper bound, and the stored line must agree with that fresh, verified answer.
//!
//! A chain evaluation's [`super::Proof`] holds no walks (a layered walk does not fit a
//! [`super::CertWalk`]) and no function prices, so the certificate check of [`super::recheck`]
//! cannot read it; this check costs one cold solve per line instead, which is what a
//! resumed or merged chain run pays on read (a merge of a depth-2 run of a 10-site chain
//! network took about 1.25 times the one-process run's CPU time, debug build, under load).
//!
//! Checked: every list has the network's length and every index is in range; the
//! stranded and surviving totals, the stranded and cut-off demands equal the fresh ones
//! exactly; the stored bounds never claim more than the fresh bounds prove (stored lower ≤
//! fresh upper, stored upper ≥ fresh lower, within [`PROOF_GAP_TOL`] of the demand at
//! stake); a served value (and throughput) labelled proven lies within that tolerance of
//! the fresh proven value, an unproven one not above the fresh upper bound; the shortfall
//! is what the served value leaves; per demand the flow is within `[0, required]`, zero
//! when stranded or cut off, their sum the served value and each shortfall required minus
//! flow; loads within the real capacities; prices finite and ≥ 0; `delivered` is the
//! stored flows times their chains' gains; the bottlenecks in range and in report order.

use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::{Evaluation, Resource, Verification, chain};
use crate::tol::{NOISE, PROOF_GAP_TOL};

/// Verifies `e`, a stored evaluation of `outage` on `net` (a network with `functions`),
/// against a fresh layered solve; `Err` says what does not hold. Cost: one cold
/// [`crate::solve::chainwalk::evaluate_walks`] plus O(demands + arcs + sites).
pub fn recheck(net: &Network, outage: &Outage, e: &Evaluation) -> Result<(), String> {
    let net = net.view(outage.matrix);
    let ch = net
        .chains
        .as_ref()
        .ok_or("the network lists no functions")?;
    let (nd, na, ns) = super::lengths(net, e)?;
    let fresh = crate::solve::chainwalk::evaluate_walks(net, outage, None)
        .map(|w| w.evaluation)
        .map_err(|err| format!("its outage could not be solved again in layers: {err}"))?;
    if e.stranded != fresh.stranded
        || e.stranded_volume != fresh.stranded_volume
        || e.stranded_demands != fresh.stranded_demands
        || e.surviving_required != fresh.surviving_required
    {
        return Err("its stranded or surviving demand does not match the network".into());
    }
    if e.cut_off != fresh.cut_off {
        return Err("its cut-off demands do not match the network".into());
    }
    if e.upper_bound != e.verification.upper || e.max_violation != e.verification.residual {
        return Err("its bounds do not agree with its verification".into());
    }
    let scale = e.surviving_required.max(1.0);
    let tol = PROOF_GAP_TOL * scale;
    agrees(
        e.served_required,
        &e.verification,
        &fresh.verification,
        tol,
        "served",
    )?;
    let short = fresh.shortfall + (fresh.served_required - e.served_required);
    if (e.shortfall - short).abs() > tol {
        return Err("its shortfall is not what its served value leaves".into());
    }
    match (&e.throughput_verification, &fresh.throughput_verification) {
        (Some(tv), Some(fv)) => agrees(e.throughput, tv, fv, tol, "throughput")?,
        (None, None) if e.throughput == e.served_required => {}
        _ => return Err("its throughput verification does not match the network".into()),
    }

    // Per demand, link direction and site: a feasible-looking allocation of the stored value.
    let stranded: std::collections::BTreeSet<usize> =
        e.stranded_demands.iter().map(|d| d.0).collect();
    let cut: std::collections::BTreeSet<usize> = e.cut_off.iter().map(|&(d, _)| d.0).collect();
    let mut sum = 0.0;
    for d in 0..nd {
        let (f, req) = (e.demand_flow[d], net.demands[d].required);
        let off = stranded.contains(&d) || cut.contains(&d);
        if !(f.is_finite() && f >= 0.0 && f <= req + tol) || (off && f != 0.0) {
            return Err(format!(
                "demand {}: its flow {f} is not within what it may carry",
                net.demands[d].label
            ));
        }
        let want = if stranded.contains(&d) { 0.0 } else { req - f };
        if (e.demand_shortfall[d] - want).abs() > tol {
            return Err(format!(
                "demand {}: its shortfall does not agree with its flow",
                net.demands[d].label
            ));
        }
        sum += f;
    }
    if (sum - e.served_required).abs() > tol {
        return Err("its per-demand flows do not add up to its served value".into());
    }
    let load_ok = |load: f64, cap: f64| load.is_finite() && load >= 0.0 && load <= cap + tol;
    if (0..na).any(|a| !load_ok(e.arc_load[a], net.arcs[a].capacity)) {
        return Err("a link direction carries more than its capacity".into());
    }
    let site_cap = |v: usize| ch.capacity[v].iter().sum::<f64>();
    if (0..ns).any(|v| !load_ok(e.site_load[v], site_cap(v))) {
        return Err("a site runs more than its functions' capacity".into());
    }
    let price_ok = |p: f64| p.is_finite() && p >= 0.0;
    if !e.arc_price.iter().all(|&p| price_ok(p))
        || !e.site_price.iter().flatten().all(|&p| price_ok(p))
    {
        return Err("its shadow prices are not finite and nonnegative".into());
    }
    // As `finish_with` shows it: the plainest number within NOISE of the delivered
    // volume at stake (Σ required · gain over the demands that are not stranded).
    let delivered = chain::delivered(net, &e.demand_flow);
    let at_stake: f64 = (0..nd)
        .filter(|d| !stranded.contains(d))
        .map(|d| net.demands[d].required * ch.total_gain(d))
        .sum();
    match e.delivered {
        Some(x) if (x - delivered).abs() <= 2.0 * NOISE * at_stake + f64::MIN_POSITIVE => {}
        _ => return Err("its delivered volume is not its flows through their chains".into()),
    }
    for b in &e.bottlenecks {
        let in_range = match b.resource {
            Resource::Arc(a) => a.0 < na,
            Resource::Site(v) => v.0 < ns,
        };
        if !in_range || !price_ok(b.price) {
            return Err("a bottleneck names a resource out of range".into());
        }
    }
    super::in_report_order(e)
}

/// Whether a stored `value` with its verification `stored` agrees with the fresh
/// verification `fresh` of the same LP, within `tol`.
fn agrees(
    value: f64,
    stored: &Verification,
    fresh: &Verification,
    tol: f64,
    what: &str,
) -> Result<(), String> {
    let claims_too_much = stored.lower > fresh.upper + tol || stored.upper < fresh.lower - tol;
    let outside = if stored.proven && fresh.proven {
        value < fresh.lower - tol || value > fresh.upper + tol
    } else {
        value > fresh.upper + tol
    };
    if claims_too_much || outside || value > stored.upper.max(stored.lower) + tol {
        return Err(format!(
            "its {what} value {value} is not what solving its outage again in layers proves \
             ([{}, {}])",
            fresh.lower, fresh.upper
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{Element, Scenario};

    /// A path a → b → c (capacities 10 and 6), `fw` (gain 1) at b (capacity 8), `tc`
    /// (gain 0.5) at c (capacity 4); a→c through fw then tc (required 6), b→c plain (2).
    fn net() -> Network {
        Network::from_json(
            r#"{"functions":[{"id":"fw","gain":1},{"id":"tc","gain":0.5}],
            "sites":[{"id":"a"},{"id":"b","functions":{"fw":8}},{"id":"c","functions":{"tc":4}}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":10},
                     {"id":"bc","from":"b","to":"c","capacity":6}],
            "demands":[{"from":"a","to":"c","volume":6,"chain":["fw","tc"]},
                       {"from":"b","to":"c","volume":3,"required":2}]}"#,
        )
        .unwrap()
    }

    fn outages(n: &Network) -> Vec<Outage> {
        let mut out = vec![Outage::default()];
        for l in 0..n.links.len() {
            out.push(Scenario::new(n, &[Element::Link(l.into())]).outage(n));
        }
        for s in 0..n.sites.len() {
            out.push(Scenario::new(n, &[Element::Site(s.into())]).outage(n));
        }
        out
    }

    /// Source: the verifier's own contract — what both chain engines produce passes on
    /// its own outage (nothing honest is refused), on every single failure.
    #[test]
    fn honest_chain_evaluations_pass_on_both_engines() {
        let n = net();
        for o in &outages(&n) {
            let edge = chain::evaluate(&n, o).unwrap();
            recheck(&n, o, &edge).unwrap_or_else(|e| panic!("edge {o:?}: {e}"));
            let walks = crate::solve::chainwalk::evaluate_walks(&n, o, None)
                .unwrap()
                .evaluation;
            recheck(&n, o, &walks).unwrap_or_else(|e| panic!("walks {o:?}: {e}"));
        }
    }

    /// Hand computation: in the baseline, a→c needs 6 on ab, 6 at fw, 6 on bc and 6 at
    /// tc (capacity 4): at most 4 served; b→c then has 6 − 4 = 2 left on bc: 2 served.
    /// Served is 6 of 8. A stored 8 (or 6 moved onto another demand's flow, or the
    /// baseline read on the outage where bc failed) is refused.
    #[test]
    fn edited_chain_values_are_refused() {
        let n = net();
        let o = Outage::default();
        let e = chain::evaluate(&n, &o).unwrap();
        assert!(
            (e.served_required - 6.0).abs() < 1e-9,
            "{}",
            e.served_required
        );
        let mut all = e.clone();
        all.served_required = 8.0;
        all.shortfall = 0.0;
        all.verification.lower = 8.0;
        all.verification.upper = 8.0;
        all.upper_bound = 8.0;
        assert!(recheck(&n, &o, &all).is_err());
        let mut moved = e.clone();
        moved.demand_flow.swap(0, 1);
        moved.demand_shortfall = vec![6.0 - moved.demand_flow[0], 2.0 - moved.demand_flow[1]];
        assert!(recheck(&n, &o, &moved).is_err());
        let failed = Scenario::new(&n, &[Element::Link(1.into())]).outage(&n);
        assert!(recheck(&n, &failed, &e).is_err());
    }
}
