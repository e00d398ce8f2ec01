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
    let view = memo.view;
    let n = net.sites.len();
    let k = chain.len();
    let mut seen = vec![false; (k + 1) * n];
    let mut start: Vec<SiteIdx> = vec![origin];
    for j in 0..=k {
        let r = &mut seen[j * n..(j + 1) * n];
        memo.union(&start, true, r);
        if j < k {
            start = (0..n)
                .filter(|&v| r[v] && runs(ch, view, v, chain[j]))
                .collect();
        }
    }
    seen
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
    let view = memo.view;
    let n = net.sites.len();
    let k = chain.len();
    let mut seen = vec![false; (k + 1) * n];
    let mut end: Vec<SiteIdx> = dests.to_vec();
    for j in (0..=k).rev() {
        let r = &mut seen[j * n..(j + 1) * n];
        memo.union(&end, false, r);
        if j > 0 {
            end = (0..n)
                .filter(|&v| r[v] && runs(ch, view, v, chain[j - 1]))
                .collect();
        }
    }
    seen
}
