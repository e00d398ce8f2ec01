//! The two ends of the (1−ε) engine's interval: the lower bound from the run's walks
//! (repaired by the verifier, topped up over residual capacity) and the upper bound from
//! the certificate at the better of two price candidates (the scaled lengths, the
//! allocation's cut), while the run is in progress ([`estimate`]) and for its answer
//! ([`verified`]); see the parent module's documentation for why each is valid.

use std::collections::HashMap;

use super::{State, TOP_UP_WALKS, best_scale, cut};
use crate::model::Network;
use crate::solve::surviving::Surviving;
use crate::solve::{Verified, certify, verify};

/// The best ends a run has seen: the allocation that delivers the most and the cut with
/// the least value. Both stay valid while the run goes on (an allocation stays feasible,
/// prices stay nonnegative prices of the same network), so the interval a run reports
/// only narrows from one check to the next, although the repaired walks and the cut of
/// any one check may be worse than an earlier one's.
#[derive(Default)]
pub(super) struct Best {
    alloc: Option<verify::Repaired>,
    cut: Option<cut::Cut>,
}

impl Best {
    /// Keeps `alloc` if it delivers more than the best so far, `cut` if its value is
    /// smaller. O(1) (moves).
    fn offer(&mut self, alloc: verify::Repaired, cut: cut::Cut) {
        if self.alloc.as_ref().is_none_or(|b| alloc.served > b.served) {
            self.alloc = Some(alloc);
        }
        if self.cut.as_ref().is_none_or(|b| cut.value < b.value) {
            self.cut = Some(cut);
        }
    }
}

/// The interval of a run in progress: the verifier's repair of the walks (raw and scaled
/// by their largest overload, the better kept), or the best allocation seen before if it
/// delivers more, and the smaller of two bounds: the certificate with each demand's last
/// computed walk length (a lower bound on its current one, so never below the true
/// certificate) at the best scale, and the value of the least pruned cut seen
/// ([`cut::cut`] of this allocation or an earlier one, exact for 0/1 prices). Updates
/// `best`. O(Σ walk lengths + demands·log demands) plus the cut's searches.
#[allow(clippy::too_many_arguments)]
pub(super) fn estimate(
    st: &mut State,
    by_origin: &[Vec<usize>],
    active: &[usize],
    walk_len: &[f64],
    arc_cap: &[f64],
    site_cap: &[f64],
    best: &mut Best,
) -> (f64, f64) {
    check(st, by_origin, arc_cap, site_cap, best);
    let (a, terms) = priced(st, active, walk_len, arc_cap, site_cap);
    let lower = best.alloc.as_ref().map_or(0.0, |b| b.served);
    let cut = best.cut.as_ref().map_or(f64::INFINITY, |c| c.value);
    (lower, best_scale(a, &terms).0.min(cut))
}

/// The allocation of the run's current walks and its cut, offered to `best`.
fn check(
    st: &mut State,
    by_origin: &[Vec<usize>],
    arc_cap: &[f64],
    site_cap: &[f64],
    best: &mut Best,
) {
    let alloc = repaired(st, by_origin);
    let inputs = cut::CutInputs {
        layers: &st.layers,
        by_origin,
        bound: st.bound,
        arc_cap,
        site_cap,
    };
    let cut = cut::cut(st.net, &inputs, &alloc);
    best.offer(alloc, cut);
}

/// The verifier's repair ([`verify::repair_walks`]) of the run's walks, raw and scaled by
/// their largest overload; the one that delivers more. Feasible by construction.
fn repaired(st: &mut State, by_origin: &[Vec<usize>]) -> verify::Repaired {
    let net = st.net;
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    let raw = verify::repair_walks(
        net,
        &st.verify_walks(1.0),
        &arc_capacity,
        &site_capacity,
        st.bound,
    );
    let scaled = verify::repair_walks(
        net,
        &st.verify_walks(1.0 / st.overload()),
        &arc_capacity,
        &site_capacity,
        st.bound,
    );
    let best = if scaled.served >= raw.served {
        scaled
    } else {
        raw
    };
    top_up(
        st,
        by_origin,
        best,
        (&arc_capacity, &site_capacity),
        TOP_UP_WALKS,
    )
}

/// Fills what a feasible allocation leaves: per origin (site order) and demand (file
/// order) still short of its cap, up to `rounds` cheapest walks (current lengths)
/// over the rows with residual capacity, each carrying what its tightest row leaves
/// (an arc crossed twice counts twice). The extended walk list is repaired again, so the
/// result is feasible by construction whatever this adds. O(origins · rounds ·
/// Dijkstra + Σ walk lengths).
pub(super) fn top_up(
    st: &mut State,
    by_origin: &[Vec<usize>],
    alloc: verify::Repaired,
    (arc_capacity, site_capacity): (&[f64], &[f64]),
    rounds: usize,
) -> verify::Repaired {
    let net = st.net;
    let mut ra: Vec<f64> = (0..net.arcs.len())
        .map(|a| arc_capacity[a] - alloc.arc_load[a])
        .collect();
    let mut rs: Vec<f64> = (0..net.sites.len())
        .map(|v| site_capacity[v] - alloc.site_load[v])
        .collect();
    let mut short: Vec<f64> = (0..net.demands.len())
        .map(|d| st.bound[d] - alloc.demand_flow[d])
        .collect();
    let mut walks = alloc.paths.clone();
    let before = walks.len();
    for (s, demands) in by_origin.iter().enumerate() {
        for _ in 0..rounds {
            if !demands.iter().any(|&d| short[d] > 1e-9 * st.bound[d]) {
                break;
            }
            st.dijkstra_within(s, Some((&ra, &rs)));
            let mut added = false;
            for &d in demands {
                let t = net.demands[d].to.0;
                if short[d] <= 1e-9 * st.bound[d] || !st.dist[2 * t + 1].is_finite() {
                    continue;
                }
                let (arcs, site) = st.walk_to(t);
                let mut mult: HashMap<usize, f64> = HashMap::new();
                for &a in &arcs {
                    *mult.entry(a).or_insert(0.0) += 1.0;
                }
                let mut amount = short[d].min(rs[site]);
                for (&a, &m) in &mult {
                    amount = amount.min(ra[a] / m);
                }
                if amount <= 0.0 {
                    continue;
                }
                for (&a, &m) in &mult {
                    ra[a] -= amount * m;
                }
                rs[site] -= amount;
                short[d] -= amount;
                added = true;
                walks.push(verify::Walk {
                    sink: verify::Sink::Demand(d),
                    arcs,
                    site,
                    amount,
                });
            }
            if !added {
                break;
            }
        }
    }
    if walks.len() == before {
        return alloc;
    }
    let topped = verify::repair_walks(net, &walks, arc_capacity, site_capacity, st.bound);
    if topped.served >= alloc.served {
        topped
    } else {
        alloc
    }
}

/// `Σ cap·l` over arcs and sites (stored units, presolved capacities) and the demands'
/// `(b_d, c_d)`.
fn priced(
    st: &State,
    active: &[usize],
    walk_len: &[f64],
    arc_cap: &[f64],
    site_cap: &[f64],
) -> (f64, Vec<(f64, f64)>) {
    let a: f64 = arc_cap
        .iter()
        .zip(&st.arc_len)
        .map(|(c, l)| c * l)
        .chain(site_cap.iter().zip(&st.site_len).map(|(c, l)| c * l))
        .sum();
    let terms = active.iter().map(|&d| (st.bound[d], walk_len[d])).collect();
    (a, terms)
}

/// The verified result of a finished run (see [`solve_approx`]): the best allocation and
/// cut the run has seen (`best`; when `fresh` is false the run's current walks are
/// checked first, as the run moved on since its last check).
#[allow(clippy::too_many_arguments)]
pub(super) fn verified(
    net: &Network,
    view: &Surviving,
    st: &mut State,
    by_origin: &[Vec<usize>],
    all: &[f64],
    active: &[usize],
    walk_len: &[f64],
    arc_cap: &[f64],
    site_cap: &[f64],
    at_stake: f64,
    eps: f64,
    (mut best, fresh): (Best, bool),
) -> Verified {
    let arc_capacity: Vec<f64> = net.arcs.iter().map(|a| a.capacity).collect();
    let site_capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    let u = st.overload();
    if !fresh {
        check(st, by_origin, arc_cap, site_cap, &mut best);
    }
    let (Some(allocation), Some(cut)) = (best.alloc, best.cut) else {
        unreachable!("check fills both")
    };
    // The residual of the scheme's own answer (the flow scaled by its largest overload).
    let over = |load: f64, cap: f64| {
        let load = load / u;
        if load > cap {
            (load - cap) / load.max(cap).max(f64::MIN_POSITIVE)
        } else {
            0.0
        }
    };
    let mut residual: f64 = 0.0;
    for (a, &x) in st.arc_load.iter().enumerate() {
        residual = residual.max(over(x, arc_capacity[a]));
    }
    for (v, &x) in st.site_load.iter().enumerate() {
        residual = residual.max(over(x, site_capacity[v]));
    }
    for &d in active {
        residual = residual.max(over(st.dem_load[d], st.bound[d]));
    }
    // Prices: the final lengths at the scale that minimises the certificate, each capped
    // at 1. A row priced at 1 or more already prices every walk through it at 1 or more,
    // so its demands' terms `b·max(0, 1 − price)` are 0 either way: capping only lowers
    // the bound's capacity term, and keeps it valid (one more unit of any row serves at
    // most one more unit of demand).
    let (a, terms) = priced(st, active, walk_len, arc_cap, site_cap);
    let (_, theta) = best_scale(a, &terms);
    let arc_price: Vec<f64> = st.arc_len.iter().map(|l| (theta * l).min(1.0)).collect();
    let site_price: Vec<f64> = (0..net.sites.len())
        .map(|v| {
            if view.can_process[v] {
                (theta * st.site_len[v]).min(1.0)
            } else {
                0.0
            }
        })
        .collect();
    let certified = |arc_price: &[f64], site_price: &[f64]| {
        certify::dual_bound(net, view, all, arc_cap, site_cap, arc_price, site_price)
    };
    let scaled = certified(&arc_price, &site_price);
    // The least cut seen ([`cut::cut`]): the better prices of the two are reported.
    let cut_bound = certified(&cut.arc_price, &cut.site_price);
    let (upper, arc_price, site_price) = if cut_bound < scaled {
        (cut_bound, cut.arc_price, cut.site_price)
    } else {
        (scaled, arc_price, site_price)
    };
    let upper = upper.min(at_stake);
    let lp_value = st.flow.iter().sum::<f64>() / u;
    let verification = crate::solve::one_attempt(
        residual,
        allocation.served,
        upper,
        at_stake,
        format!("approx (epsilon {eps})"),
    );
    with_prices(
        net,
        view,
        (arc_cap, site_cap),
        allocation,
        lp_value,
        verification,
        (arc_price, site_price),
    )
}

/// The [`Verified`] of a feasible `allocation` whose interval is `verification`, with the
/// certificate's prices `bound_price` (per arc, per site) reported as shadow prices except
/// on rows the presolve lowered below their real capacity (`caps`: the presolved arc and
/// site capacities), which do not bind. O(sites + arcs).
pub(super) fn with_prices(
    net: &Network,
    view: &Surviving,
    caps: (&[f64], &[f64]),
    allocation: verify::Repaired,
    lp_value: f64,
    verification: crate::solve::Verification,
    bound_price: (Vec<f64>, Vec<f64>),
) -> Verified {
    let (arc_cap, site_cap) = caps;
    let (arc_price, site_price) = certify::shadow_prices(net, caps, &bound_price.0, &bound_price.1);
    Verified {
        lp_value,
        verification,
        allocation,
        arc_price,
        site_price,
        arc_has_row: (0..net.arcs.len())
            .map(|a| view.arc_usable[a] && arc_cap[a] > 0.0)
            .collect(),
        site_has_row: (0..net.sites.len())
            .map(|v| view.can_process[v] && site_cap[v] > 0.0)
            .collect(),
        bound_price,
        functions: Vec::new(),
    }
}
