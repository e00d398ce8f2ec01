//! Warm intervals of the (1−ε) engine: an outage decided from its parent's answer before
//! any phase is run.
//!
//! **Why it is valid.** A failure only removes arcs, processing sites and demands. The
//! parent's repaired walks that avoid everything removed are a feasible flow of the child
//! up to the caps (the verifier's repair, [`verify::repair_walks`], scales any walk that
//! would overload a row, so feasibility holds by construction whatever the parent was);
//! short demands are then topped up along the residual network ([`super::top_up`]). That
//! is the lower bound. The parent's certificate prices are nonnegative prices for the
//! child's rows too, so the certificate ([`certify::dual_bound`], weak duality) computed
//! on the child's surviving network with them is a valid upper bound; when it is too
//! loose, the cut of the child's own allocation ([`super::cut`]) is tried too. When the two are
//! within `ε × at_stake`, that interval is the answer, as proven as a cold run's (both
//! ends checked by the verifier's own code). Otherwise the cold scheme of
//! [`super::solve_approx`] runs as before.
//!
//! **When it pays.** In a network that serves everything, a failure that cuts little flow
//! is rerouted in full by the top-up, and the interval closes at the surviving required
//! demand: no Dijkstra phase, no length update. A failure that leaves the network short
//! usually needs the phases (the parent's prices do not bound the child tightly).
//!
//! **Cost.** One repair of the surviving walks (O(Σ walk lengths)), the top-up (a few
//! residual Dijkstras per origin with a short demand), one certificate (see
//! [`certify::dual_bound`]). Memory: the parent's walks and prices, one set per family in
//! flight ([`crate::audit::Batch`] keeps one parent per thread).

use super::{Setup, State, solve_approx, top_up, with_prices};
use crate::error::Result;
use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::flow::Cap;
use crate::solve::surviving::Surviving;
use crate::solve::{Evaluation, Verified, certify, finish, needs_volume_lp, one_attempt, verify};

/// What an approximate answer keeps for its children: per quantity, its repaired walks
/// and the prices of its certificate.
pub struct Start {
    required: Kept,
    /// `None` when the outage needed no volume (throughput) run.
    volume: Option<Kept>,
}

/// One quantity's repaired walks (each delivering to one demand) and certificate prices
/// (per arc, per site, indexed like the network's).
struct Kept {
    walks: Vec<verify::Walk>,
    arc_price: Vec<f64>,
    site_price: Vec<f64>,
}

impl Kept {
    /// The walks and prices of a verified answer. O(Σ walk lengths + arcs + sites).
    fn of(v: &Verified) -> Kept {
        Kept {
            walks: v.allocation.paths.clone(),
            arc_price: v.bound_price.0.clone(),
            site_price: v.bound_price.1.clone(),
        }
    }
}

/// Evaluates `outage` like [`super::evaluate_approx`], each quantity first from the
/// parent's answer (`parent`: the same engine's [`Start`] of an outage whose failed
/// elements are a subset of this one's, under the same traffic matrix) as the module
/// documentation describes, cold when that interval is wider than `eps × at_stake` or
/// without a parent. Returns the evaluation and what this outage keeps for its own
/// children. Deterministic: a function of (network, outage, parent, ε).
///
/// Cost: per quantity the warm check of the module documentation, plus a cold run of
/// [`solve_approx`] when the check does not decide.
pub fn evaluate_from(
    net: &Network,
    outage: &Outage,
    eps: f64,
    parent: Option<&Start>,
) -> Result<(Evaluation, Start)> {
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let required = solve(net, &view, Cap::Required, eps, parent.map(|p| &p.required))?;
    let volume = if needs_volume_lp(net, outage) {
        Some(solve(
            net,
            &view,
            Cap::Volume,
            eps,
            parent.and_then(|p| p.volume.as_ref()),
        )?)
    } else {
        None
    };
    let start = Start {
        required: Kept::of(&required),
        volume: volume.as_ref().map(Kept::of),
    };
    Ok((finish(net, &view, required, volume), start))
}

/// One quantity: the warm interval when it is narrow enough, else the cold run.
fn solve(
    net: &Network,
    view: &Surviving,
    cap: Cap,
    eps: f64,
    kept: Option<&Kept>,
) -> Result<Verified> {
    if super::epsilon_ok(eps)
        && let Some(k) = kept
        && let Some(v) = from_parent(net, view, cap, eps, k)
    {
        return Ok(v);
    }
    solve_approx(net, view, cap, eps)
}

/// The warm interval of the module documentation, `Some` only when its width is at most
/// `eps × at_stake`. Invariant relied on: `kept` holds walks over this network's arcs and
/// sites and demands of the same traffic matrix (any walks would do: the repair makes
/// them feasible, and any nonnegative prices give a valid certificate).
fn from_parent(
    net: &Network,
    view: &Surviving,
    cap: Cap,
    eps: f64,
    kept: &Kept,
) -> Option<Verified> {
    let s = Setup::new(net, view, cap, eps);
    let surviving: Vec<verify::Walk> = kept
        .walks
        .iter()
        .filter(|w| {
            matches!(w.sink, verify::Sink::Demand(d) if s.bound.get(d).is_some_and(|&b| b > 0.0))
                && view.can_process.get(w.site).copied().unwrap_or(false)
                && w.arcs
                    .iter()
                    .all(|&a| view.arc_usable.get(a).copied().unwrap_or(false))
        })
        .cloned()
        .collect();
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|v| v.processing).collect();
    let kept_flow = verify::repair_walks(net, &surviving, &arc_capacity, &site_capacity, &s.bound);
    let mut st = State::new(net, view, &s.bound, eps);
    let allocation = top_up(
        &mut st,
        &s.by_origin,
        kept_flow,
        (&arc_capacity, &site_capacity),
        super::WARM_TOP_UP_WALKS,
    );
    // The certificate on this network at the given prices (arc, site).
    let certified = |arc_price: &[f64], site_price: &[f64]| {
        certify::dual_bound(
            net,
            view,
            &s.all,
            &s.arc_cap,
            &s.site_cap,
            arc_price,
            site_price,
        )
        .min(s.at_stake)
    };
    let mut upper = certified(&kept.arc_price, &kept.site_price);
    let mut own_cut = None;
    if upper - allocation.served > s.target {
        // The parent's prices do not bound this network tightly: try the child's own
        // allocation's cut ([`super::cut`]) before giving up.
        let inputs = super::cut::CutInputs {
            layers: &st.layers,
            by_origin: &s.by_origin,
            bound: &s.bound,
            arc_cap: &s.arc_cap,
            site_cap: &s.site_cap,
        };
        let cut = super::cut::cut(net, &inputs, &allocation);
        if cut.value - allocation.served > s.target {
            return None;
        }
        upper = certified(&cut.arc_price, &cut.site_price);
        if upper - allocation.served > s.target {
            return None;
        }
        own_cut = Some((cut.arc_price, cut.site_price));
    }
    let prices = own_cut.unwrap_or_else(|| (kept.arc_price.clone(), kept.site_price.clone()));
    let verification = one_attempt(
        0.0,
        allocation.served,
        upper,
        s.at_stake,
        // The backend reads as a cold run's: reports parse ε from this exact wording.
        format!("approx (epsilon {eps})"),
    );
    let lp_value = allocation.served;
    Some(with_prices(
        net,
        view,
        (&s.arc_cap, &s.site_cap),
        allocation,
        lp_value,
        verification,
        prices,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::test_net as net;
    use crate::scenario::{Element, Scenario};

    /// Hand case (computed here): two routes s–a–t and s–b–t of capacity 10 per link,
    /// processing 20 at s, one demand s→t requiring 12, and a spur t–x that no walk
    /// needs. Intact: 12 served (at least 2 on each route, since each carries at most 10).
    fn two_routes() -> Network {
        net(r#"{
            "sites":[{"id":"s","processing":20},{"id":"a"},{"id":"b"},{"id":"t"},{"id":"x"}],
            "links":[{"id":"sa","from":"s","to":"a","capacity":10},
                     {"id":"at","from":"a","to":"t","capacity":10},
                     {"id":"sb","from":"s","to":"b","capacity":10},
                     {"id":"bt","from":"b","to":"t","capacity":10},
                     {"id":"tx","from":"t","to":"x","capacity":10}],
            "demands":[{"from":"s","to":"t","volume":12}]}"#)
    }

    fn link(n: &Network, id: &str) -> Outage {
        let l = n.links.iter().position(|l| l.id == id).unwrap();
        Scenario::new(n, &[Element::Link(l.into())]).outage(n)
    }

    /// Losing the spur moves no flow: the parent's walks survive whole and serve all 12,
    /// which is also every surviving demand's cap, so the warm interval is [12, 12].
    #[test]
    fn a_failure_that_cuts_no_flow_is_decided_from_the_parent() {
        let n = two_routes();
        let eps = 0.01;
        let (_, start) = evaluate_from(&n, &Outage::default(), eps, None).unwrap();
        let o = link(&n, "tx");
        let view = Surviving::new(&n, &o, None);
        let v = from_parent(&n, &view, Cap::Required, eps, &start.required)
            .expect("the interval closes from the parent");
        assert!((v.allocation.served - 12.0).abs() < 1e-9, "{v:?}");
        assert!(v.verification.proven, "{:?}", v.verification);
    }

    /// Losing s–a leaves the route through b alone: 10 can be served (link capacity),
    /// hand optimum 10. Whether the warm check decides it or the cold run does, the
    /// interval holds 10 and is at most ε·12 wide; the parent's walks through a are
    /// dropped, so the warm lower bound never counts them.
    #[test]
    fn a_failure_that_cuts_flow_holds_the_hand_optimum() {
        let n = two_routes();
        for eps in [0.01, 0.2] {
            let (_, start) = evaluate_from(&n, &Outage::default(), eps, None).unwrap();
            let o = link(&n, "sa");
            let (e, _) = evaluate_from(&n, &o, eps, Some(&start)).unwrap();
            let v = &e.verification;
            assert!(v.lower <= 10.0 + 1e-9 && v.upper >= 10.0 - 1e-9, "{v:?}");
            assert!(v.upper - v.lower <= eps * 12.0 + 1e-9, "{v:?}");
            let view = Surviving::new(&n, &o, None);
            if let Some(w) = from_parent(&n, &view, Cap::Required, eps, &start.required) {
                assert!(w.allocation.served <= 10.0 + 1e-9, "{:?}", w.verification);
            }
        }
    }
}
