//! The rows of the layered walk master in one outage and the pricing of layered walks:
//! [`Rows::coefficients`] gives a walk's column (on the rows of
//! [`super::skeleton::layered_rows`]), and [`Rows::price`] the
//! cheapest layered walk of every demand (shortest-path trees rooted at the function sites,
//! [`super::rooted`]) with the dual bound at the given prices.

use std::collections::BTreeMap;

use super::rooted::{Tree, finish, path_from, programme, tree, walk};

use super::{ChainWalk, NONE, PRICE_TOL};
use crate::model::{Chains, FunctionIdx, Network};
/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;

use crate::solve::chain::{self, EdgeKind, Layered};
use crate::solve::surviving::Surviving;

/// The rows of the layered model in one outage, and the pricing graph.
pub(super) struct Rows<'a> {
    pub(super) net: &'a Network,
    pub(super) ch: &'a Chains,
    pub(super) view: &'a Surviving,
    pub(super) layered: &'a Layered,
    /// Per site: the usable arcs leaving it.
    pub(super) out: Vec<Vec<usize>>,
    /// Per site: the usable arcs entering it.
    pub(super) inc: Vec<Vec<usize>>,
    /// Per demand: its group in `layered` (`NONE`: not in the LP).
    pub(super) group_of: Vec<usize>,
    /// Σ caps of the demands in the LP (at least 1): the scale of the tolerances.
    pub(super) scale: f64,
    /// Per `site · functions + function`: the rank of its row among the (site, function)
    /// rows (`NONE`: no row), for [`Rows::index`].
    fn_slot: Vec<usize>,
    /// Number of (site, function) rows.
    n_fn: usize,
}

/// A row of the master.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub(super) enum RowKey {
    Arc(usize),
    Function(SiteIdx, FunctionIdx),
    Demand(usize),
}

impl<'a> Rows<'a> {
    pub(super) fn new(net: &'a Network, view: &'a Surviving, layered: &'a Layered) -> Rows<'a> {
        let ch = net.chains.as_ref().expect("a network with functions");
        let mut out = vec![Vec::new(); net.sites.len()];
        let mut inc = vec![Vec::new(); net.sites.len()];
        for &a in &view.arcs {
            out[net.arcs[a].from].push(a);
            inc[net.arcs[a].to].push(a);
        }
        let mut group_of = vec![NONE; net.demands.len()];
        let mut total = 0.0;
        for (g, group) in layered.groups.iter().enumerate() {
            for &d in &group.demands {
                group_of[d] = g;
                total += layered.bound[d];
            }
        }
        let nf = ch.functions.len();
        let mut fn_slot = vec![NONE; net.sites.len() * nf];
        for (i, &(v, f)) in layered.function_cap.keys().enumerate() {
            fn_slot[v * nf + f] = i;
        }
        Rows {
            net,
            ch,
            view,
            layered,
            out,
            inc,
            group_of,
            scale: f64::max(total, 1.0),
            fn_slot,
            n_fn: layered.function_cap.len(),
        }
    }

    /// A dense index of row `key` in `0..self.len()`: arcs first, then (site, function)
    /// rows in key order, then demand caps. `key` must be a row of the model (a function
    /// row without a capacity entry panics). O(1).
    pub(super) fn index(&self, key: RowKey) -> usize {
        let arcs = self.net.arcs.len();
        match key {
            RowKey::Arc(a) => a,
            RowKey::Function(v, f) => {
                let i = self.fn_slot[v * self.ch.functions.len() + f];
                assert!(i != NONE, "a (site, function) pair without a row");
                arcs + i
            }
            RowKey::Demand(d) => arcs + self.n_fn + d,
        }
    }

    /// The dense index of the row of function `f` at site `v`, `None` when the model has
    /// no such row. O(1).
    pub(super) fn function_index(&self, v: SiteIdx, f: FunctionIdx) -> Option<usize> {
        match self.fn_slot[v * self.ch.functions.len() + f] {
            NONE => None,
            i => Some(self.net.arcs.len() + i),
        }
    }

    /// The number of dense row indices ([`Rows::index`]). O(1).
    pub(super) fn len(&self) -> usize {
        self.net.arcs.len() + self.n_fn + self.net.demands.len()
    }

    /// The coefficients of walk `w` in the master's rows (arcs and functions weighted by
    /// the cumulative gain of their layer, summed when a row is used twice; 1 on the
    /// demand's cap row), in row-key order: [`coefficients_in`] with its group's chain.
    /// O(walk length · log).
    pub(super) fn coefficients(&self, w: &ChainWalk) -> Vec<(RowKey, f64)> {
        let group = &self.layered.groups[self.group_of[w.demand]];
        coefficients_in(self.net, &group.cumulative, &group.chain, w)
    }

    /// [`Rows::coefficients`] as a shared [`Coefs`]. O(walk length · log).
    pub(super) fn coefs(&self, w: &ChainWalk) -> Coefs {
        self.coefficients(w).into()
    }

    /// The right-hand side of a row: the edge LP's (lowered) capacity, or the cap.
    pub(super) fn rhs(&self, key: RowKey) -> f64 {
        match key {
            RowKey::Arc(a) => self.layered.arc_cap[a],
            RowKey::Function(v, f) => self.layered.function_cap[&(v, f)],
            RowKey::Demand(d) => self.layered.bound[d],
        }
    }

    /// Prices every demand of the LP at arc prices `y` and function prices `z` (missing:
    /// 0); with demand duals `u`, also returns the walks whose reduced cost
    /// `1 − π_d − u_d` exceeds [`PRICE_TOL`], in group and demand order. Two Dijkstras per
    /// site running a function (one per origin of plain traffic), then per group a
    /// programme over its chain's sites ([`super::rooted`]): O(function sites · arcs · log
    /// + groups · k · sites² + demands · sites).
    pub(super) fn price(
        &self,
        y: &[f64],
        z: &BTreeMap<(SiteIdx, FunctionIdx), f64>,
        u: Option<&[f64]>,
    ) -> Priced {
        let n = self.net.sites.len();
        let layered = self.layered;
        let mut bound = 0.0;
        for (a, &cap) in layered.arc_cap.iter().enumerate() {
            if layered.arc_row[a].is_some() {
                bound += cap * y[a].max(0.0);
            }
        }
        for (key, &cap) in &layered.function_cap {
            bound += cap * z.get(key).copied().unwrap_or(0.0).max(0.0);
        }
        let mut cost = vec![f64::INFINITY; self.net.demands.len()];
        let mut walks = Vec::new();
        let arcs = &self.net.arcs;
        let nf = self.ch.functions.len();
        // The sites running each function used by some group, and the trees of those sites
        // (and of the origins of plain traffic).
        let mut used = vec![false; nf];
        for group in &layered.groups {
            for &f in &group.chain {
                used[f] = true;
            }
        }
        let sites: Vec<Vec<usize>> = (0..nf)
            .map(|f| {
                if used[f] {
                    (0..n)
                        .filter(|&v| chain::runs(self.ch, self.view, v, f))
                        .collect()
                } else {
                    Vec::new()
                }
            })
            .collect();
        let mut to_site: Vec<Option<Tree>> = (0..n).map(|_| None).collect();
        let mut from_site: Vec<Option<Tree>> = (0..n).map(|_| None).collect();
        for &v in sites.iter().flatten() {
            if from_site[v].is_none() {
                from_site[v] = Some(tree(arcs, &self.out, v, y, true));
                to_site[v] = Some(tree(arcs, &self.inc, v, y, false));
            }
        }
        let zp = |v: usize, f: usize| z.get(&(v, f)).copied().unwrap_or(0.0).max(0.0);
        for group in &layered.groups {
            let k = group.chain.len();
            // Per demand: its walk's cost and, when it prices out, the walk.
            let mut take = |d: usize, pi: f64, make: &dyn Fn() -> ChainWalk| {
                cost[d] = pi;
                bound += layered.bound[d] * (1.0 - pi).max(0.0);
                if let Some(u) = u
                    && 1.0 - pi - u[d] > PRICE_TOL
                {
                    walks.push(make());
                }
            };
            if k == 0 {
                if from_site[group.origin].is_none() {
                    from_site[group.origin] = Some(tree(arcs, &self.out, group.origin, y, true));
                }
                let t = from_site[group.origin].as_ref().expect("a tree");
                for &d in &group.demands {
                    let to = self.net.demands[d].to.0;
                    if t.dist[to].is_finite() {
                        take(d, t.dist[to], &|| {
                            let mut edges = Vec::new();
                            path_from(arcs, t, to, 0, &mut edges);
                            ChainWalk { demand: d, edges }
                        });
                    }
                }
                continue;
            }
            let layers = programme(group, &sites, &to_site, &from_site, zp);
            for &d in &group.demands {
                let to = self.net.demands[d].to.0;
                if let Some((end, pi)) = finish(group, &layers, &from_site, to) {
                    take(d, pi, &|| {
                        walk(arcs, group, &layers, (&to_site, &from_site), (d, to), end)
                    });
                }
            }
        }
        Priced { cost, walks, bound }
    }
}

/// A walk's column coefficients ([`Rows::coefficients`]), shared by the lists that hold
/// the walk. They depend on the walk and its demand's chain only, never on the outage
/// (the right-hand sides do), so a parent's walks keep theirs for every child scenario.
pub(super) type Coefs = std::sync::Arc<[(RowKey, f64)]>;

/// The coefficients of walk `w` of a demand with chain `chain` (cumulative gains
/// `cumulative`, [`Chains::cumulative`]): arcs and functions weighted by the cumulative
/// gain of their layer, summed when a row is used twice (in walk order), 1 on the
/// demand's cap row, in row-key order. O(walk length · log).
pub(super) fn coefficients_in(
    net: &Network,
    cumulative: &[f64],
    chain: &[FunctionIdx],
    w: &ChainWalk,
) -> Vec<(RowKey, f64)> {
    let ch = net.chains.as_ref().expect("a network with functions");
    let (arcs, nf) = (net.arcs.len(), ch.functions.len());
    // Each term keyed by its row as one integer in `RowKey` order (arcs, then (site,
    // function) pairs by site and function), then its position in the walk: sorting
    // the keys (distinct) orders the rows as `RowKey` does and a row used twice in walk
    // order, which its terms are summed in (into the first).
    let mut terms: Vec<(u64, f64)> = w
        .edges
        .iter()
        .enumerate()
        .map(|(pos, e)| {
            let (row, layer) = match *e {
                EdgeKind::Arc { arc, layer } => (arc, layer),
                EdgeKind::Function { site, layer } => (arcs + site * nf + chain[layer], layer),
            };
            (((row as u64) << 24) | pos as u64, cumulative[layer])
        })
        .collect();
    terms.sort_unstable_by_key(|t| t.0);
    terms.dedup_by(|later, first| {
        let same = later.0 >> 24 == first.0 >> 24;
        if same {
            first.1 += later.1;
        }
        same
    });
    let mut out: Vec<(RowKey, f64)> = Vec::with_capacity(terms.len() + 1);
    out.extend(terms.into_iter().map(|(key, c)| {
        let row = (key >> 24) as usize;
        let key = if row < arcs {
            RowKey::Arc(row)
        } else {
            RowKey::Function((row - arcs) / nf, (row - arcs) % nf)
        };
        (key, c)
    }));
    out.push((RowKey::Demand(w.demand), 1.0));
    out
}

/// The outcome of one pricing pass.
pub(super) struct Priced {
    /// Per demand: its cheapest layered walk (infinite when not in the LP or unreachable).
    pub(super) cost: Vec<f64>,
    /// Walks that price out (only when demand duals were given).
    pub(super) walks: Vec<ChainWalk>,
    /// The dual bound at these prices.
    pub(super) bound: f64,
}
