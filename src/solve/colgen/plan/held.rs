//! Which demands a block of the plan master holds at the baseline's walks (see the
//! module comment of [`super`], **Held demands**).

use super::{Graph, Solved, Walk};
use crate::tol::PLAN_FEASIBLE_TOL;

/// What [`hold`] returns: per demand whether it is active, per demand its held walks
/// with their flows (empty when active), the held load per arc and per site.
pub(super) type Holding = (Vec<bool>, Vec<Vec<(Walk, f64)>>, Vec<f64>, Vec<f64>);

/// Which demands a block holds, for an outage with graph `g`, demand caps `caps` and
/// effective arc and site capacities `cap`, given the baseline's optimum `baseline`:
/// returns per demand whether it is active, per held demand its walks lifted to `g`'s
/// class arcs (equal walks merged) with their flows, and the held load per arc and per
/// site. A demand with a positive cap is held when every baseline walk carrying its flow
/// survives the failure at a processing site of `g` and its flow is at most its cap (the
/// failure does not touch it); then, while a held load exceeds an arc's or site's
/// capacity (a class that lost a parallel link), every held demand crossing it is made
/// active. Everything is active without a baseline.
///
/// Invariant: the held walks fit within `cap` together, so the block with every column
/// at zero meets its arc and site rows, and the block is a restriction of the full one.
/// O(baseline walks' lengths · (1 + overloaded rows)).
pub(super) fn hold(
    g: &Graph<'_>,
    caps: &[f64],
    cap: (&[f64], &[f64]),
    baseline: Option<&Solved>,
) -> Holding {
    let net = g.net;
    let (arc_cap, site_cap) = cap;
    let mut active = vec![true; net.demands.len()];
    let mut held: Vec<Vec<(Walk, f64)>> = vec![Vec::new(); net.demands.len()];
    let mut arc_load = vec![0.0; net.arcs.len()];
    let mut site_load = vec![0.0; net.sites.len()];
    let Some(base) = baseline else {
        return (active, held, arc_load, site_load);
    };
    let mut proc = vec![false; net.sites.len()];
    for &v in &g.procs {
        proc[v] = true;
    }
    let mut touched = vec![false; net.demands.len()];
    let mut per: Vec<Vec<(Walk, f64)>> = vec![Vec::new(); net.demands.len()];
    for (w, &f) in base.walks.iter().zip(&base.flow) {
        if f <= 0.0 || touched[w.demand] {
            continue;
        }
        match g.lift(w).filter(|l| proc[l.site]) {
            Some(l) => match per[w.demand].iter_mut().find(|(x, _)| *x == l) {
                Some((_, g)) => *g += f,
                None => per[w.demand].push((l, f)),
            },
            None => touched[w.demand] = true,
        }
    }
    for (d, walks) in per.into_iter().enumerate() {
        let flow: f64 = walks.iter().map(|(_, f)| f).sum();
        if caps[d] <= 0.0 || touched[d] || flow > caps[d] {
            continue;
        }
        active[d] = false;
        held[d] = walks;
    }
    loop {
        arc_load.iter_mut().for_each(|l| *l = 0.0);
        site_load.iter_mut().for_each(|l| *l = 0.0);
        for (w, f) in held.iter().flatten() {
            for &(a, m) in &w.arcs {
                arc_load[a] += f64::from(m) * f;
            }
            site_load[w.site] += f;
        }
        let over = |load: f64, c: f64| load > c + PLAN_FEASIBLE_TOL * c.max(1.0);
        let mut freed = false;
        for d in 0..held.len() {
            let crosses = held[d].iter().any(|(w, _)| {
                over(site_load[w.site], site_cap[w.site])
                    || w.arcs.iter().any(|&(a, _)| over(arc_load[a], arc_cap[a]))
            });
            if crosses {
                held[d].clear();
                active[d] = true;
                freed = true;
            }
        }
        if !freed {
            return (active, held, arc_load, site_load);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::*;
    use crate::model::index::{LinkIdx, SiteIdx};

    /// The arc from site `u` to site `v`.
    fn arc(net: &Network, u: usize, v: usize) -> usize {
        net.arcs
            .iter()
            .position(|a| a.from == SiteIdx(u) && a.to == SiteIdx(v))
            .expect("an arc")
    }

    /// A held demand must come back into its block. Hand calculation (common practice,
    /// no source): sites a, r (processing 4), p (processing 4), b, q (processing 4), t;
    /// links a–r 10, a–p 10, p–t 10, b–p 4, b–q 10; demands A a→t 4 and B b→t 4. The
    /// baseline given to the master processes A at r (a→r→a→p→t) and B at p (b→p→t).
    /// When a–r fails, A's walk is lost (A is active) and B's survives (B is held). With
    /// B held at p, p's processing and the arc b→p are full, and every walk of A is
    /// processed at p or crosses b→p (q hangs off b): the restricted block serves 4.
    /// The full block serves 8 = Σ required, the upper bound: A at p (a→p→t) and B at q
    /// (b→q→b→p→t: b→p carries 4 ≤ 4, p→t 8 ≤ 10). So 8 is reached only if the pricing
    /// check brings B back.
    #[test]
    fn a_held_demand_comes_back_when_the_failure_needs_its_room() {
        let net = Network::from_json(
            r#"{"sites":[{"id":"a"},{"id":"r","processing":4},{"id":"p","processing":4},
                {"id":"b"},{"id":"q","processing":4},{"id":"t"}],
              "links":[{"id":"ar","from":"a","to":"r","capacity":10},
                {"id":"ap","from":"a","to":"p","capacity":10},
                {"id":"pt","from":"p","to":"t","capacity":10},
                {"id":"bp","from":"b","to":"p","capacity":4},
                {"id":"bq","from":"b","to":"q","capacity":10}],
              "demands":[{"from":"a","to":"t","volume":4},{"from":"b","to":"t","volume":4}]}"#,
        )
        .unwrap();
        let (a, r, p, b, t) = (0, 1, 2, 3, 5);
        let walk_a = Walk::from_legs(
            0,
            r,
            [
                arc(&net, a, r),
                arc(&net, r, a),
                arc(&net, a, p),
                arc(&net, p, t),
            ],
        );
        let walk_b = Walk::from_legs(1, p, [arc(&net, b, p), arc(&net, p, t)]);
        let mut pm = PlanMaster::new(&net, Lp::new(true), vec![None; net.sites.len()]);
        pm.baselines.insert(
            0,
            Some(Solved {
                walks: vec![walk_a, walk_b],
                flow: vec![4.0, 4.0],
                value: 8.0,
                arc_price: vec![0.0; net.arcs.len()],
                site_price: vec![0.0; net.sites.len()],
            }),
        );
        let outage = Outage {
            sites: Vec::new(),
            links: vec![LinkIdx(0)],
            matrix: 0,
        };
        let s = pm.add_outage(&outage).unwrap();
        assert!(!pm.blocks[0].active[1], "B starts held");
        assert!(pm.blocks[0].active[0], "A starts active");
        let sol = pm.solve(&[], &[(s, 1.0)], true).unwrap();
        assert!((sol.x[s] - 8.0).abs() < 1e-9, "served {}", sol.x[s]);
        assert!(pm.activated >= 1, "B was brought back");
        assert_eq!(pm.interior_point_solves, 0);
    }
}
