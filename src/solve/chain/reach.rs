//! Layered reachability of the chain model: which layered nodes of an (origin, chain)
//! group lie on some walk, from single-site reach sets shared by every group of an outage.

use super::{SiteIdx, runs};
use crate::model::{Chains, FunctionIdx, Network};
use crate::solve::surviving::Surviving;

/// Per site of one view, the sites it reaches and the sites that reach it over usable
/// arcs, each computed on first use (one search each). The reach of a set of sites is the
/// union of its members' (a site is reached from the set exactly when some member reaches
/// it), so the layered searches of every (origin, chain) group of an outage share these
/// at most `2 · sites` searches. O(sites + arcs) per first use, O(sites) per member of a
/// union.
pub(crate) struct ReachMemo<'v> {
    pub(super) view: &'v Surviving,
    from: Vec<Option<Vec<bool>>>,
    to: Vec<Option<Vec<bool>>>,
}

impl<'v> ReachMemo<'v> {
    /// An empty memo of `view`.
    pub(crate) fn new(view: &'v Surviving) -> Self {
        let n = view.site_alive.len();
        ReachMemo {
            view,
            from: vec![None; n],
            to: vec![None; n],
        }
    }

    /// The sites `v` reaches (itself included): [`Surviving::reach_from`] of `[v]`.
    pub(super) fn from(&mut self, v: SiteIdx) -> &[bool] {
        let view = self.view;
        self.from[v].get_or_insert_with(|| view.reach_from([v]))
    }

    /// The sites that reach `v` (itself included): [`Surviving::reach_to`] of `[v]`.
    fn to(&mut self, v: SiteIdx) -> &[bool] {
        let view = self.view;
        self.to[v].get_or_insert_with(|| view.reach_to([v]))
    }

    /// Written into `out` (one entry per site): the sites some member of `sites` reaches
    /// (`forward`) or that reach some member of `sites` (otherwise).
    fn union(&mut self, sites: &[SiteIdx], forward: bool, out: &mut [bool]) {
        out.iter_mut().for_each(|x| *x = false);
        for &v in sites {
            let r = if forward { self.from(v) } else { self.to(v) };
            for (o, &x) in out.iter_mut().zip(r) {
                *o |= x;
            }
        }
    }
}

/// Layered nodes reachable from `(origin, 0)` on `memo`'s view, from its single-site
/// reach sets. O((k + 1) · sites · starts) once the memo holds them.
pub(crate) fn forward_with(
    net: &Network,
    ch: &Chains,
    memo: &mut ReachMemo,
    origin: SiteIdx,
    chain: &[FunctionIdx],
) -> Vec<bool> {
    layered(net, ch, memo, &[origin], chain, true)
}

/// Layered nodes from which some destination in `dests` is reachable in layer `k` on
/// `memo`'s view, from its single-site reach sets. O((k + 1) · sites · ends) once the
/// memo holds them.
pub(crate) fn backward_with(
    net: &Network,
    ch: &Chains,
    memo: &mut ReachMemo,
    dests: &[SiteIdx],
    chain: &[FunctionIdx],
) -> Vec<bool> {
    layered(net, ch, memo, dests, chain, false)
}

/// The layered reach of `ends` (in layer 0 when `forward`, else in layer `k`): layer by
/// layer away from them, the single-site reach sets of the current ends, then the sites of
/// that layer running the function between it and the next as the next layer's ends.
/// Indexed `layer · sites + site`. O((k + 1) · sites · ends).
fn layered(
    net: &Network,
    ch: &Chains,
    memo: &mut ReachMemo,
    ends: &[SiteIdx],
    chain: &[FunctionIdx],
    forward: bool,
) -> Vec<bool> {
    let view = memo.view;
    let n = net.sites.len();
    let k = chain.len();
    let mut seen = vec![false; (k + 1) * n];
    let mut start: Vec<SiteIdx> = ends.to_vec();
    for step in 0..=k {
        let j = if forward { step } else { k - step };
        let r = &mut seen[j * n..(j + 1) * n];
        memo.union(&start, forward, r);
        if step < k {
            // The function between layer j and the next one away from the ends.
            let f = if forward { chain[j] } else { chain[j - 1] };
            start = (0..n).filter(|&v| r[v] && runs(ch, view, v, f)).collect();
        }
    }
    seen
}
