//! Cut prices: a second candidate for the certificate's prices, read off a feasible
//! allocation, beside the scheme's scaled lengths.
//!
//! **The bound.** Price a set `R` of rows (arcs, processing sites) at 1 and every other
//! row at 0. A walk that crosses a row of `R` then costs at least 1, one that avoids `R`
//! costs 0, so the certificate ([`crate::solve::certify::dual_bound`], weak duality, valid
//! for any nonnegative prices) is
//!
//! `Σ_{r ∈ R} cap_r + Σ { b_d : demand d has a processing walk avoiding every row of R }`,
//!
//! the multicommodity form of a cut bound (for one commodity, max-flow min-cut). LP
//! complementary slackness puts an optimal dual's weight on saturated rows only, so `R`
//! starts as the rows the allocation saturates (load ≥ [`SATURATED`]·capacity) and is
//! pruned greedily: a row leaves `R` when the demands its removal reconnects are worth
//! less than its capacity. When processing is what runs out (every site full, links with
//! room), `R` ends as the full sites and the bound is their total: the optimum, found at
//! once, where the scheme's lengths would need thousands of phases to price the sites
//! evenly.
//!
//! **Cost.** One graph search per origin on the two-layer graph, O(origins·(sites +
//! arcs)); each pruning trial searches only from the removed row's far end in the origins
//! that reach its near end, over nodes not yet reached, and stops as soon as the demands
//! it reconnects are worth the row's capacity (the row then stays), so all trials
//! together cost at most O(|R|·origins·(sites + arcs)) and usually far less. Memory: one
//! reached flag per (origin, node) and one cap total per (origin, destination site).
//!
//! **What is trusted.** Nothing: the value computed here only steers the run's stopping
//! test; the reported bound is the certificate's, computed by `certify` with these prices.

use std::collections::HashMap;

use super::{Layers, Row};
use crate::model::Network;
use crate::solve::{SATURATED, verify};

/// 0/1 prices on a set of rows and the bound they give.
pub(super) struct Cut {
    /// Per arc (indexed like `Network::arcs`): 1 on the rows of the cut, else 0.
    pub arc_price: Vec<f64>,
    /// Per site: 1 on the processing rows of the cut, else 0.
    pub site_price: Vec<f64>,
    /// The bound of the module documentation, with the presolved capacities.
    pub value: f64,
}

/// What the cut is computed from: the two-layer graph, the active demands per origin
/// and their caps, the presolved capacities (per arc, per site).
pub(super) struct CutInputs<'a> {
    pub layers: &'a Layers,
    pub by_origin: &'a [Vec<usize>],
    pub bound: &'a [f64],
    pub arc_cap: &'a [f64],
    pub site_cap: &'a [f64],
}

/// One origin's search state: which nodes its walks reach while avoiding the cut, and
/// per destination site `t` (reached as node `2t + 1`, processed) the caps of its
/// demands ending there.
struct Origin {
    node: usize,
    reached: Vec<bool>,
    dest: Vec<f64>,
}

/// The pruned cut of the module documentation for `alloc` (any allocation whose loads
/// are at most the capacities). Deterministic: rows are tried by capacity, largest first,
/// ties arcs before sites by index.
///
/// Cost: see the module documentation.
pub(super) fn cut(net: &Network, x: &CutInputs, alloc: &verify::Repaired) -> Cut {
    let layers = x.layers;
    let nodes = layers.start.len() - 1;
    // Where each row's edges start and end: arcs in both layers, sites from layer 0 to 1.
    // The rows present are its keys.
    let mut ends: HashMap<(bool, usize), Vec<(usize, usize)>> = HashMap::new();
    for u in 0..nodes {
        for e in layers.start[u]..layers.start[u + 1] {
            let key = match layers.row[e] {
                Row::Arc(a) => (true, a),
                Row::Site(v) => (false, v),
            };
            ends.entry(key).or_default().push((u, layers.to[e]));
        }
    }
    // The cut starts as the saturated rows present, with their capacities.
    let saturated = |load: f64, cap: f64| load >= cap * SATURATED;
    let mut arc_cut: Vec<bool> = (0..net.arcs.len())
        .map(|a| ends.contains_key(&(true, a)) && saturated(alloc.arc_load[a], x.arc_cap[a]))
        .collect();
    let mut site_cut: Vec<bool> = (0..net.sites.len())
        .map(|v| ends.contains_key(&(false, v)) && saturated(alloc.site_load[v], x.site_cap[v]))
        .collect();
    let mut rows: Vec<(Row, f64)> = (0..net.arcs.len())
        .filter(|&a| arc_cut[a])
        .map(|a| (Row::Arc(a), x.arc_cap[a]))
        .chain(
            (0..net.sites.len())
                .filter(|&v| site_cut[v])
                .map(|v| (Row::Site(v), x.site_cap[v])),
        )
        .collect();
    let mut origins: Vec<Origin> = x
        .by_origin
        .iter()
        .enumerate()
        .filter(|(_, ds)| !ds.is_empty())
        .map(|(s, ds)| {
            let mut dest = vec![0.0; net.sites.len()];
            for &d in ds {
                dest[net.demands[d].to.0] += x.bound[d];
            }
            Origin {
                node: 2 * s,
                reached: vec![false; nodes],
                dest,
            }
        })
        .collect();
    let open = |r: Row, arc_cut: &[bool], site_cut: &[bool]| match r {
        Row::Arc(a) => !arc_cut[a],
        Row::Site(v) => !site_cut[v],
    };
    let mut value: f64 = rows.iter().map(|r| r.1).sum();
    let mut stack = Vec::new();
    for o in &mut origins {
        let mut fresh = Vec::new();
        let root = o.node;
        value += search(
            layers,
            o,
            root,
            f64::INFINITY,
            &mut stack,
            &mut fresh,
            |r| open(r, &arc_cut, &site_cut),
        );
    }
    // Pruning, largest capacity first.
    rows.sort_by(|p, q| {
        q.1.total_cmp(&p.1).then_with(|| match (p.0, q.0) {
            (Row::Arc(a), Row::Arc(b)) | (Row::Site(a), Row::Site(b)) => a.cmp(&b),
            (Row::Arc(_), Row::Site(_)) => std::cmp::Ordering::Less,
            (Row::Site(_), Row::Arc(_)) => std::cmp::Ordering::Greater,
        })
    });
    for &(r, cap) in &rows {
        let key = match r {
            Row::Arc(a) => {
                arc_cut[a] = false;
                (true, a)
            }
            Row::Site(v) => {
                site_cut[v] = false;
                (false, v)
            }
        };
        let edges = ends.get(&key).map(Vec::as_slice).unwrap_or(&[]);
        let mut gained = 0.0;
        let mut visited: Vec<(usize, Vec<usize>)> = Vec::new();
        'origins: for (k, o) in origins.iter_mut().enumerate() {
            let mut fresh = Vec::new();
            for &(tail, head) in edges {
                if o.reached[tail] && !o.reached[head] {
                    gained += search(layers, o, head, cap - gained, &mut stack, &mut fresh, |r| {
                        open(r, &arc_cut, &site_cut)
                    });
                }
                if gained >= cap {
                    // The row stays in the cut whatever the other origins reach.
                    visited.push((k, fresh));
                    break 'origins;
                }
            }
            if !fresh.is_empty() {
                visited.push((k, fresh));
            }
        }
        if gained < cap {
            value -= cap - gained;
        } else {
            // Put the row back: the nodes it opened are reached no more.
            match r {
                Row::Arc(a) => arc_cut[a] = true,
                Row::Site(v) => site_cut[v] = true,
            }
            for (k, fresh) in visited {
                for u in fresh {
                    origins[k].reached[u] = false;
                }
            }
        }
    }
    let price = |cut: &[bool]| cut.iter().map(|&c| if c { 1.0 } else { 0.0 }).collect();
    Cut {
        arc_price: price(&arc_cut),
        site_price: price(&site_cut),
        value,
    }
}

/// Marks every node reachable from `from` (not yet reached) over edges whose row is
/// `open` as reached for `o`, appends them to `fresh`, and returns the caps of the
/// demands of `o` whose destination it newly reaches. Stops early, with part of the
/// nodes marked (all of them in `fresh`), once those caps reach `limit`: the caller then
/// undoes the marks. O(nodes + edges) over the nodes newly reached.
fn search(
    layers: &Layers,
    o: &mut Origin,
    from: usize,
    limit: f64,
    stack: &mut Vec<usize>,
    fresh: &mut Vec<usize>,
    open: impl Fn(Row) -> bool,
) -> f64 {
    if o.reached[from] {
        return 0.0;
    }
    let mut gained = 0.0;
    o.reached[from] = true;
    fresh.push(from);
    stack.clear();
    stack.push(from);
    while let Some(u) = stack.pop() {
        if u % 2 == 1 {
            gained += o.dest[u / 2];
            if gained >= limit {
                break;
            }
        }
        for e in layers.start[u]..layers.start[u + 1] {
            let w = layers.to[e];
            if !o.reached[w] && open(layers.row[e]) {
                o.reached[w] = true;
                fresh.push(w);
                stack.push(w);
            }
        }
    }
    stack.clear();
    gained
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::test_net as net;
    use crate::scenario::Outage;
    use crate::solve::approx::{Setup, State};
    use crate::solve::certify;
    use crate::solve::flow::Cap;
    use crate::solve::surviving::Surviving;

    /// The cut of `alloc` on `view` (setup `s`) and `certify::dual_bound` at its prices.
    fn cut_and_certificate(
        n: &Network,
        view: &Surviving,
        s: &Setup,
        alloc: &verify::Repaired,
    ) -> (Cut, f64) {
        let st = State::new(n, view, &s.bound, 0.01);
        let inputs = CutInputs {
            layers: &st.layers,
            by_origin: &s.by_origin,
            bound: &s.bound,
            arc_cap: &s.arc_cap,
            site_cap: &s.site_cap,
        };
        let c = cut(n, &inputs, alloc);
        let certified = certify::dual_bound(
            n,
            view,
            &s.all,
            &s.arc_cap,
            &s.site_cap,
            &c.arc_price,
            &c.site_price,
        );
        (c, certified)
    }

    /// Hand case (computed here): path s–a–t, link s–a of capacity 5, link a–t of
    /// capacity 10, processing 5 at a only, one demand s→t of 8. Every walk crosses s→a
    /// and is processed at a, so 5 is the optimum and the walk s→a→t carrying 5 saturates
    /// both the arc s→a and the site a. Pricing both at 1 bounds by 10; one of them alone
    /// already cuts every walk, so the pruned cut bounds by 5, the optimum, and the
    /// certificate with its prices agrees.
    #[test]
    fn pruning_drops_a_row_that_another_already_cuts() {
        let n = net(r#"{
            "sites":[{"id":"s"},{"id":"a","processing":5},{"id":"t"}],
            "links":[{"id":"sa","from":"s","to":"a","capacity":5},
                     {"id":"at","from":"a","to":"t","capacity":10}],
            "demands":[{"from":"s","to":"t","volume":8}]}"#);
        let o = Outage::default();
        let view = Surviving::new(&n, &o, None);
        let s = Setup::new(&n, &view, Cap::Required, 0.01);
        let arc = |from: &str, to: &str| {
            let (f, t) = (n.site(from).unwrap().0, n.site(to).unwrap().0);
            (0..n.arcs.len())
                .find(|&a| n.arcs[a].from.0 == f && n.arcs[a].to.0 == t)
                .unwrap()
        };
        let walk = verify::Walk {
            sink: verify::Sink::Demand(0),
            arcs: vec![arc("s", "a"), arc("a", "t")],
            site: n.site("a").unwrap().0,
            amount: 5.0,
        };
        let caps: Vec<f64> = n.arcs.iter().map(|a| a.capacity).collect();
        let procs: Vec<f64> = n.sites.iter().map(|v| v.processing).collect();
        let alloc = verify::repair_walks(&n, &[walk], &caps, &procs, &s.bound);
        assert!((alloc.served - 5.0).abs() < 1e-12, "{}", alloc.served);
        let (c, certified) = cut_and_certificate(&n, &view, &s, &alloc);
        assert_eq!(c.value, 5.0);
        let priced = c
            .arc_price
            .iter()
            .chain(&c.site_price)
            .filter(|&&p| p > 0.0);
        assert_eq!(priced.count(), 1, "one row is enough to cut every walk");
        assert_eq!(certified, 5.0);
    }

    /// The cut's own value (graph searches, pruning with early stops) is the certificate's
    /// bound at its prices, computed independently by `certify::dual_bound` (shortest
    /// walks by petgraph's Dijkstra), on generated networks (a ring with chords, random
    /// capacities, processing at two or three sites, random demands) and the allocations
    /// the approximate engine finds on them and on each single-link failure; and it is at
    /// least what the allocation serves (weak duality).
    #[test]
    fn value_is_the_certificates_bound_at_its_prices() {
        let mut x: u64 = 0x2545_f491_4f6c_dd1d;
        let mut next = |m: u64| {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x % m
        };
        for _ in 0..12 {
            let n = 6 + next(5) as usize;
            let sites: Vec<String> = (0..n)
                .map(|i| {
                    let p = if i % 3 == 0 { 2 + next(9) } else { 0 };
                    format!(r#"{{"id":"v{i}","processing":{p}}}"#)
                })
                .collect();
            let mut links: Vec<String> = (0..n)
                .map(|i| {
                    format!(
                        r#"{{"id":"r{i}","from":"v{i}","to":"v{}","capacity":{}}}"#,
                        (i + 1) % n,
                        1 + next(8)
                    )
                })
                .collect();
            for k in 0..n / 2 {
                let (a, b) = (next(n as u64), next(n as u64));
                if a != b {
                    links.push(format!(
                        r#"{{"id":"c{k}","from":"v{a}","to":"v{b}","capacity":{}}}"#,
                        1 + next(8)
                    ));
                }
            }
            let demands: Vec<String> = (0..2 * n)
                .filter_map(|_| {
                    let (a, b) = (next(n as u64), next(n as u64));
                    (a != b).then(|| {
                        format!(r#"{{"from":"v{a}","to":"v{b}","volume":{}}}"#, 1 + next(6))
                    })
                })
                .collect();
            let net = net(&format!(
                r#"{{"sites":[{}],"links":[{}],"demands":[{}]}}"#,
                sites.join(","),
                links.join(","),
                demands.join(",")
            ));
            let outages = std::iter::once(Outage::default()).chain((0..net.links.len()).map(|l| {
                crate::scenario::Scenario::new(&net, &[crate::scenario::Element::Link(l.into())])
                    .outage(&net)
            }));
            for o in outages {
                let view = Surviving::new(&net, &o, None);
                let s = Setup::new(&net, &view, Cap::Required, 0.05);
                let v =
                    crate::solve::approx::solve_approx(&net, &view, Cap::Required, 0.05).unwrap();
                let (c, certified) = cut_and_certificate(&net, &view, &s, &v.allocation);
                assert!(
                    (c.value - certified).abs() <= 1e-9 * certified.max(1.0),
                    "{} vs {certified}",
                    c.value
                );
                assert!(
                    c.value >= v.allocation.served - 1e-9,
                    "{} < {}",
                    c.value,
                    v.allocation.served
                );
            }
        }
    }
}
