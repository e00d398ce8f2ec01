//! The walks of a verified layered walk answer's proven allocation: what a failure of
//! further elements can break (the worst-set search bounds supersets of a solved set with
//! them, [`crate::worst`]).

use super::rows::Rows;
use super::skeleton::layered_rows;
use super::verify::with_walks;
use super::{Basis, Solved};
use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::chain;
use crate::solve::chain::EdgeKind;
use crate::solve::surviving::Surviving;

/// One walk of a proven allocation: the arcs it crosses (indices into `Network::arcs`,
/// ascending, each once however often it is crossed and in whatever layer) and the origin
/// units it carries.
#[derive(Debug, Clone, PartialEq)]
pub struct CarriedWalk {
    pub arcs: Vec<usize>,
    pub flow: f64,
}

/// The walks of the allocation whose served total is the proven lower bound
/// (`verification.lower`) of the served_required LP of `outage`, as [`super::evaluate_walks`]
/// verified it from `basis` (the basis it returned for that outage): the walk answer written
/// as layered edge flows and repaired by [`chain::repair`], exactly as the verifier does
/// (same rows, same order, so the same walks and flows). Walks that carry nothing are left
/// out. `None` when the walk engine did not decide the LP (no walk answer: the layered edge
/// LP decided it, or nothing could be routed). Every walk is feasible together with the
/// others against the real capacities of the outage, and the demands' delivered flow sums
/// to at most their total flow. O(rows + Σ walk lengths · log).
pub fn proven_walks(net: &Network, outage: &Outage, basis: &Basis) -> Option<Vec<CarriedWalk>> {
    let s: &Solved = basis.required.as_ref()?;
    let net = net.view(outage.matrix);
    let view = Surviving::new(net, outage, None);
    let required: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let (mut layered, _) = layered_rows(net, &view, &required);
    if layered.groups.is_empty() {
        return None;
    }
    let group_of = Rows::new(net, &view, &layered).group_of;
    let x = with_walks(net, &mut layered, &group_of, s);
    let (_, walks) = chain::repair(net, &layered, &x);
    Some(
        walks
            .into_iter()
            .filter(|w| w.flow > 0.0)
            .map(|w| {
                let mut arcs: Vec<usize> = w
                    .edges
                    .iter()
                    .filter_map(|e| match *e {
                        EdgeKind::Arc { arc, .. } => Some(arc),
                        EdgeKind::Function { .. } => None,
                    })
                    .collect();
                arcs.sort_unstable();
                arcs.dedup();
                CarriedWalk { arcs, flow: w.flow }
            })
            .collect(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{Element, Scenario};
    use crate::solve::chainwalk::evaluate_walks;

    /// Two-way links a–m (100), m–t (8), t–p (100); `f` (gain 0.5) only at p; demand a→t
    /// of 50 with chain [f]. Hand-worked: the only walk goes a→m→t, on to p for `f`, and
    /// back p→t: it crosses link t–p in both directions (F there, then 0.5·F back) and
    /// m–t once (F <= 8), so F = 8.
    const THERE_AND_BACK: &str = r#"{"functions":[{"id":"f","gain":0.5}],
        "sites":[{"id":"a"},{"id":"m"},{"id":"t"},{"id":"p","functions":{"f":100}}],
        "links":[{"id":"am","from":"a","to":"m","capacity":100},
                 {"id":"mt","from":"m","to":"t","capacity":8},
                 {"id":"tp","from":"t","to":"p","capacity":100}],
        "demands":[{"from":"a","to":"t","volume":50,"chain":["f"]}]}"#;

    /// On [`THERE_AND_BACK`] the carried walk names four distinct arcs, the two of t–p
    /// among them, with its 8 origin units, and its flow is the proven lower bound.
    #[test]
    fn a_walk_there_and_back_names_each_arc_once() {
        let net = Network::from_json(THERE_AND_BACK).unwrap();
        let o = Outage::default();
        let w = evaluate_walks(&net, &o, None).unwrap();
        let walks = proven_walks(&net, &o, &w.basis).unwrap();
        assert_eq!(walks.len(), 1, "{walks:?}");
        let links: Vec<usize> = walks[0].arcs.iter().map(|&a| net.arcs[a].link.0).collect();
        assert_eq!(links, vec![0, 1, 2, 2], "{walks:?}");
        assert!((walks[0].flow - 8.0).abs() < 1e-9, "{walks:?}");
        assert_eq!(walks[0].flow, w.evaluation.verification.lower);
        // Failing link t–p leaves no walk: nothing is routed, nothing carried.
        let tp = Scenario::new(&net, &[Element::Link(2.into())]).outage(&net);
        let w = evaluate_walks(&net, &tp, Some(&w.basis)).unwrap();
        assert!(proven_walks(&net, &tp, &w.basis).is_none_or(|v| v.is_empty()));
    }
}
