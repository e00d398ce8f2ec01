//! What a solved outage's proven allocation sends through each element of the pool, in
//! origin units: the per-element figure of the worst-set bound (see [`super`]), one
//! function for the two-layer model and the layered model of service chains.

use crate::model::{LinkIdx, Network};
use crate::scenario::{Element, Outage};
use crate::solve::chainwalk::{self, CarriedWalk};
use crate::solve::evaluator::Evaluated;

/// Per element of `pool`: an upper bound on the flow, in origin units, of the walks of
/// `ev`'s proven allocation that the element's failure breaks (`ev`: the evaluation of
/// `outage` on `net` by the search's evaluator, not thin).
///
/// - Without `functions`: the load the allocation puts on the element's arcs (a link: its
///   arcs; a site: the arcs of its incident links; a group: its member links' arcs). A
///   walk crossing an arc twice counts twice, a walk through a site counts on both links
///   it uses there: overcounts, so still an upper bound.
/// - With `functions`, when the layered walk engine decided the LP: the walks of the
///   proven allocation ([`chainwalk::proven_walks`]), each counted once, at its origin
///   units, for every element it touches (a link whose arc it crosses in any layer; a site
///   at an end of such an arc, which covers a site where it applies a function, since
///   a walk between two different sites reaches every site it visits over an arc; a group
///   with such a member link).
/// - With `functions` otherwise (the layered edge LP decided it): the loads as above,
///   each divided by the least cumulative gain `g1 · … · gj` (1 before any function) of any
///   demand's chain: a walk crossing an arc after its `j`-th function puts `G_j` times its
///   origin units there, at least that least gain times them.
///
/// O(arcs + links + Σ group sizes + pool) for loads; O(Σ walk lengths · groups per link +
/// pool) plus one repair ([`chainwalk::proven_walks`]) for walks.
pub fn element_flows(net: &Network, outage: &Outage, ev: &Evaluated, pool: &[Element]) -> Vec<f64> {
    if net.chains.is_none() {
        return by_loads(net, &ev.evaluation.arc_load, 1.0, pool);
    }
    let walks = ev
        .warm
        .as_ref()
        .and_then(|w| w.downcast_ref::<chainwalk::Basis>())
        .and_then(|b| chainwalk::proven_walks(net, outage, b));
    match walks {
        Some(walks) => by_walks(net, &walks, pool),
        None => {
            let net = net.view(outage.matrix);
            let least = (0..net.demands.len())
                .flat_map(|d| ch_cumulative(net, d))
                .fold(1.0, f64::min);
            by_loads(net, &ev.evaluation.arc_load, least, pool)
        }
    }
}

/// The cumulative gains `G_0 = 1, G_1, …, G_k` of demand `d`'s chain on `net`.
fn ch_cumulative(net: &Network, d: usize) -> Vec<f64> {
    let ch = net.chains.as_ref().expect("a network with functions");
    ch.cumulative(&ch.chain[d])
}

/// Per pool element, the load of `arc_load` on its arcs divided by `least` (1 for the
/// two-layer model), in one pass over the arcs. O(arcs + links + Σ group sizes + pool).
fn by_loads(net: &Network, arc_load: &[f64], least: f64, pool: &[Element]) -> Vec<f64> {
    let mut link = vec![0.0; net.links.len()];
    for (a, arc) in net.arcs.iter().enumerate() {
        link[arc.link] += arc_load[a];
    }
    let mut site = vec![0.0; net.sites.len()];
    for (i, l) in net.links.iter().enumerate() {
        site[l.from] += link[i];
        site[l.to] += link[i];
    }
    pool.iter()
        .map(|&el| {
            let f: f64 = match el {
                Element::Link(l) => link[l],
                Element::Site(s) => site[s],
                Element::Group(g) => net.groups[g].links.iter().map(|&l| link[l]).sum(),
            };
            if least == 1.0 { f } else { f / least }
        })
        .collect()
}

/// Per pool element, the summed flow of the walks that touch it, each walk once per
/// element. O(Σ walk lengths · groups per link + pool).
fn by_walks(net: &Network, walks: &[CarriedWalk], pool: &[Element]) -> Vec<f64> {
    let mut link = vec![0.0; net.links.len()];
    let mut site = vec![0.0; net.sites.len()];
    let mut group = vec![0.0; net.groups.len()];
    let mut links: Vec<usize> = Vec::new();
    let mut sites: Vec<usize> = Vec::new();
    let mut groups: Vec<usize> = Vec::new();
    for w in walks {
        links.clear();
        links.extend(w.arcs.iter().map(|&a| net.arcs[a].link.0));
        links.sort_unstable();
        links.dedup();
        sites.clear();
        groups.clear();
        for &l in &links {
            let ln = &net.links[LinkIdx(l)];
            sites.extend([ln.from.0, ln.to.0]);
            groups.extend(ln.groups.iter().copied());
            link[l] += w.flow;
        }
        for v in [&mut sites, &mut groups] {
            v.sort_unstable();
            v.dedup();
        }
        for &s in &sites {
            site[s] += w.flow;
        }
        for &g in &groups {
            group[g] += w.flow;
        }
    }
    pool.iter()
        .map(|&el| match el {
            Element::Link(l) => link[l],
            Element::Site(s) => site[s],
            Element::Group(g) => group[g],
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::solve::chain::ChainEdge;
    use crate::solve::chainwalk::ChainWalks;
    use crate::solve::evaluator::Evaluator;

    /// One-way a→b 10, b→d 3, a→c 10, c→d 10; `fw` (gain 0.5) at b (10) and c (4); a→d 12
    /// with chain [fw], a→b 2 plain. Hand-worked: the optimum is unique, 6 through b (b→d
    /// takes 0.5 · 6 = 3), 4 through c (fw at c), 2 on a→b: loads ab 8, bd 3, ac 4, cd 2.
    fn hand() -> Network {
        Network::from_json(
            r#"{"functions":[{"id":"fw","gain":0.5}],
            "sites":[{"id":"a"},{"id":"b","functions":{"fw":10}},
                     {"id":"c","functions":{"fw":4}},{"id":"d"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":10,"one_way":true},
                     {"id":"bd","from":"b","to":"d","capacity":3,"one_way":true},
                     {"id":"ac","from":"a","to":"c","capacity":10,"one_way":true},
                     {"id":"cd","from":"c","to":"d","capacity":10,"one_way":true}],
            "demands":[{"from":"a","to":"d","volume":12,"chain":["fw"]},
                       {"from":"a","to":"b","volume":2}]}"#,
        )
        .unwrap()
    }

    fn rounded(v: Vec<f64>) -> Vec<f64> {
        v.into_iter().map(|f| (f * 1e6).round() / 1e6).collect()
    }

    /// The walks, each once, in origin units: ab 8, bd 6, ac 4, cd 4; sites a 12 (every
    /// walk), b 8, c 4, d 10.
    #[test]
    fn walks_give_origin_units() {
        let net = hand();
        let o = Outage::default();
        let ev = ChainWalks.evaluate(&net, &o, None).unwrap();
        let pool = crate::scenario::elements(&net, crate::scenario::Kinds::ALL);
        let got = rounded(element_flows(&net, &o, &ev, &pool));
        assert_eq!(got, vec![8.0, 6.0, 4.0, 4.0, 12.0, 8.0, 4.0, 10.0]);
    }

    /// Without walks (the layered edge LP): loads over the least cumulative gain 0.5:
    /// ab 16, bd 6, ac 8, cd 4; sites a 24, b 22, c 12, d 10 (each at least the walks'
    /// figure above).
    #[test]
    fn edge_answers_divide_loads_by_the_least_gain() {
        let net = hand();
        let o = Outage::default();
        let ev = ChainEdge.evaluate(&net, &o, None).unwrap();
        assert!(ev.warm.is_none());
        let pool = crate::scenario::elements(&net, crate::scenario::Kinds::ALL);
        let got = rounded(element_flows(&net, &o, &ev, &pool));
        assert_eq!(got, vec![16.0, 6.0, 8.0, 4.0, 24.0, 22.0, 12.0, 10.0]);
    }
}
