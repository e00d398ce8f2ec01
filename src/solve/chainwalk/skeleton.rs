//! The rows of the layered model of one outage, computed without building the layered
//! edge LP: [`skeleton`] (the (origin, chain) groups and, per group, the live arcs and
//! function sites of its layered graph, the cut-off demands) and [`rows_of`] (the
//! lowered right-hand sides for one set of caps). Exactly what [`chain::build`] and
//! [`chain::cut_off`] decide, from site reach sets held as bit sets: a layer's reach is
//! the union of its start sites' single-site reach sets, one word per 64 sites.

use std::collections::BTreeMap;

use crate::model::{Chains, FunctionIdx, Network};
use crate::solve::chain::{self, Layered};
use crate::solve::surviving::{Surviving, Unservable};

/// A site number inside this engine's layered graph: [`crate::model::SiteIdx`]`.0`.
type SiteIdx = usize;
/// An (origin, chain) group's key.
type GroupKey = (SiteIdx, Vec<FunctionIdx>);

const NONE: usize = usize::MAX;

/// Bit `i` of a bit set. O(1).
fn bit(bits: &[u64], i: usize) -> bool {
    (bits[i >> 6] >> (i & 63)) & 1 == 1
}

/// The members of bit set `bits`, ascending. O(words + members).
fn members(bits: &[u64]) -> impl Iterator<Item = usize> + '_ {
    bits.iter().enumerate().flat_map(|(i, &w)| {
        let mut w = w;
        std::iter::from_fn(move || {
            (w != 0).then(|| {
                let b = w.trailing_zeros() as usize;
                w &= w - 1;
                i * 64 + b
            })
        })
    })
}

/// Per site of one view, the sites it reaches and the sites that reach it over usable
/// arcs (itself included), as bit sets, each computed on first use by one search
/// ([`Surviving::reach_from`], [`Surviving::reach_to`]). O(sites + arcs) per first use.
struct Reach<'v> {
    view: &'v Surviving,
    /// Words per bit set of sites.
    words: usize,
    from: Vec<Option<Vec<u64>>>,
    to: Vec<Option<Vec<u64>>>,
}

impl<'v> Reach<'v> {
    fn new(view: &'v Surviving) -> Self {
        let n = view.site_alive.len();
        Reach {
            view,
            words: n.div_ceil(64),
            from: vec![None; n],
            to: vec![None; n],
        }
    }

    /// The reach set of `v` (forward: the sites it reaches; else: those reaching it).
    fn of(&mut self, v: SiteIdx, forward: bool) -> &[u64] {
        let (view, words) = (self.view, self.words);
        let slot = if forward {
            &mut self.from[v]
        } else {
            &mut self.to[v]
        };
        slot.get_or_insert_with(|| {
            let seen = if forward {
                view.reach_from([v])
            } else {
                view.reach_to([v])
            };
            let mut bits = vec![0u64; words];
            for (s, _) in seen.iter().enumerate().filter(|(_, r)| **r) {
                bits[s >> 6] |= 1 << (s & 63);
            }
            bits
        })
    }

    /// The layered reach of `ends` (in layer 0 when `forward`, else in layer `k`) for
    /// `chain`, `runs[f]` the sites running `f`: layer by layer away from the ends, the
    /// union of the current starts' reach sets, then the sites of that layer running the
    /// function between it and the next as the next layer's starts. Layer `j` is the
    /// words `j · words .. (j + 1) · words`. O((k + 1) · sites · starts / 64).
    fn layered(
        &mut self,
        ends: &[SiteIdx],
        chain: &[FunctionIdx],
        runs: &[Vec<u64>],
        forward: bool,
    ) -> Vec<u64> {
        let (w, k) = (self.words, chain.len());
        let mut seen = vec![0u64; (k + 1) * w];
        let mut start: Vec<SiteIdx> = ends.to_vec();
        for step in 0..=k {
            let j = if forward { step } else { k - step };
            for &v in &start {
                let r = self.of(v, forward);
                for (o, &x) in seen[j * w..(j + 1) * w].iter_mut().zip(r) {
                    *o |= x;
                }
            }
            if step < k {
                let f = if forward { chain[j] } else { chain[j - 1] };
                let layer = &seen[j * w..(j + 1) * w];
                let next: Vec<u64> = layer.iter().zip(&runs[f]).map(|(a, b)| a & b).collect();
                start = members(&next).collect();
            }
        }
        seen
    }
}

/// An (origin, chain) of [`skeleton`]: origin, chain, forward layered reach, servable
/// demands.
type Key<'c> = (SiteIdx, &'c [FunctionIdx], Vec<u64>, Vec<usize>);

/// The part of the layered rows that depends on the caps only through which of them are
/// positive: the (origin, chain) groups with, per group, the arcs and function sites of
/// its layered graph that lie on some walk from the origin to a destination, and the
/// cut-off demands. The required and the volume LP of one outage share it when the same
/// demands have a positive cap.
pub(super) struct Skeleton {
    pub(super) positive: Vec<bool>,
    pub(super) groups: Vec<(GroupKey, Vec<usize>)>,
    /// Per group: its chain's cumulative gains ([`Chains::cumulative`]).
    cumulative: Vec<Vec<f64>>,
    /// Per group: (layer, arc) of its live arcs, layer by layer in `view.arcs` order.
    pub(super) live_arcs: Vec<Vec<(usize, usize)>>,
    /// Per group: (layer, site) where it may apply the function of that layer.
    pub(super) live_fns: Vec<Vec<(usize, SiteIdx)>>,
    pub(super) cut_off: Vec<(usize, Unservable)>,
}

impl Skeleton {
    /// The caps `bound` are positive for exactly the demands this skeleton was made for.
    /// O(demands).
    pub(super) fn fits(&self, bound: &[f64]) -> bool {
        self.positive
            .iter()
            .zip(bound)
            .all(|(&p, &b)| p == (b > 0.0))
    }
}

/// The layered rows of `view` with demand caps `bound`, exactly as [`chain::build`] makes
/// them (same (origin, chain) groups in the same order, same arcs and (site, function)
/// pairs with a row, same right-hand sides: capacities lowered to what the groups that can
/// use them could put there), without building the LP: no edges and no demand variables
/// yet (`verify::with_walks` adds those of an answer). Also returns the cut-off demands
/// with their reason. O(groups · (k + 1) · (sites + arcs)).
pub(super) fn layered_rows(
    net: &Network,
    view: &Surviving,
    bound: &[f64],
) -> (Layered, Vec<(usize, Unservable)>) {
    rows_of(net, &skeleton(net, view, bound), bound)
}

/// The [`Skeleton`] of `view` for caps `bound`: the demands [`chain::cut_off`] keeps,
/// grouped as [`chain::demand_groups`] groups them (by (origin, chain) in key order,
/// demands ascending), each group's layered nodes live when reached from its origin in
/// layer 0 and reaching one of its destinations in layer `k`. One forward layered reach
/// per (origin, chain) with a surviving demand, one backward per group, at most two
/// searches per site. O(sites · (sites + arcs) + groups · (k + 1) · (arcs + sites²/64)).
pub(super) fn skeleton(net: &Network, view: &Surviving, bound: &[f64]) -> Skeleton {
    let ch = net.chains.as_ref().expect("a network with functions");
    let n = net.sites.len();
    let mut reach = Reach::new(view);
    let w = reach.words;
    let runs: Vec<Vec<u64>> = (0..ch.functions.len())
        .map(|f| {
            let mut bits = vec![0u64; w];
            for v in (0..n).filter(|&v| chain::runs(ch, view, v, f)) {
                bits[v >> 6] |= 1 << (v & 63);
            }
            bits
        })
        .collect();
    // The distinct chains, numbered; per (origin, chain number) its key slot.
    let mut chain_no: BTreeMap<&[FunctionIdx], usize> = BTreeMap::new();
    let mut slot_of: Vec<usize> = Vec::new();
    // Per key slot: origin, chain, forward reach, servable demands.
    let mut keys: Vec<Key> = Vec::new();
    let mut cut_off = Vec::new();
    for (d, dem) in net.demands.iter().enumerate() {
        if !view.demand_alive(net, d) || bound[d] <= 0.0 {
            continue;
        }
        let chain_fns = &ch.chain[d][..];
        let next = chain_no.len();
        let c = *chain_no.entry(chain_fns).or_insert(next);
        if slot_of.len() < chain_no.len() * n {
            slot_of.resize(chain_no.len() * n, NONE);
        }
        let origin = dem.from.0;
        let slot = &mut slot_of[c * n + origin];
        if *slot == NONE {
            *slot = keys.len();
            let fwd = reach.layered(&[origin], chain_fns, &runs, true);
            keys.push((origin, chain_fns, fwd, Vec::new()));
        }
        let key = &mut keys[*slot];
        let k = chain_fns.len();
        if bit(&key.2[k * w..], dem.to.0) {
            key.3.push(d);
        } else if dem.required > 0.0 {
            let why = if bit(reach.of(origin, true), dem.to.0) {
                Unservable::NoProcessing
            } else {
                Unservable::NoPath
            };
            cut_off.push((d, why));
        }
    }
    keys.retain(|key| !key.3.is_empty());
    keys.sort_by(|a, b| (a.0, a.1).cmp(&(b.0, b.1)));
    let mut sk = Skeleton {
        positive: bound.iter().map(|&b| b > 0.0).collect(),
        groups: Vec::with_capacity(keys.len()),
        cumulative: Vec::with_capacity(keys.len()),
        live_arcs: Vec::with_capacity(keys.len()),
        live_fns: Vec::with_capacity(keys.len()),
        cut_off,
    };
    // The usable arcs with their end sites, in `view.arcs` order.
    let ends: Vec<(usize, SiteIdx, SiteIdx)> = (view.arcs.iter())
        .map(|&a| (a, net.arcs[a].from.0, net.arcs[a].to.0))
        .collect();
    for (origin, chain_fns, fwd, demands) in keys {
        let k = chain_fns.len();
        let dests: Vec<SiteIdx> = demands.iter().map(|&d| net.demands[d].to.0).collect();
        let back = reach.layered(&dests, chain_fns, &runs, false);
        let live: Vec<u64> = fwd.iter().zip(&back).map(|(a, b)| a & b).collect();
        let (mut arcs, mut fns) = (Vec::with_capacity((k + 1) * view.arcs.len()), Vec::new());
        for j in 0..=k {
            let layer = &live[j * w..(j + 1) * w];
            for &(a, from, to) in &ends {
                if bit(layer, from) && bit(layer, to) {
                    arcs.push((j, a));
                }
            }
            if let Some(&f) = chain_fns.get(j) {
                let next = &live[(j + 1) * w..(j + 2) * w];
                let both: Vec<u64> = (0..w).map(|i| layer[i] & next[i] & runs[f][i]).collect();
                fns.extend(members(&both).map(|v| (j, v)));
            }
        }
        sk.cumulative.push(ch.cumulative(chain_fns));
        sk.groups.push(((origin, chain_fns.to_vec()), demands));
        sk.live_arcs.push(arcs);
        sk.live_fns.push(fns);
    }
    sk
}

/// The layered rows from their [`Skeleton`] `sk` (made for caps with the same positive
/// entries as `bound`). O(Σ live arcs and function sites of the groups + sites ·
/// functions).
pub(super) fn rows_of(
    net: &Network,
    sk: &Skeleton,
    bound: &[f64],
) -> (Layered, Vec<(usize, Unservable)>) {
    let ch: &Chains = net.chains.as_ref().expect("a network with functions");
    let nf = ch.functions.len();
    let mut arc_need: Vec<Option<f64>> = vec![None; net.arcs.len()];
    // Per `site · functions + function`: what the groups could put there (dense; the
    // same sums, in group order, as a map keyed by (site, function)).
    let mut fn_need: Vec<Option<f64>> = vec![None; net.sites.len() * nf];
    let mut groups = Vec::with_capacity(sk.groups.len());
    for (g, ((origin, chain_fns), demands)) in sk.groups.iter().enumerate() {
        let cumulative = &sk.cumulative[g];
        let total: f64 = demands.iter().map(|&d| bound[d]).sum();
        for &(j, a) in &sk.live_arcs[g] {
            *arc_need[a].get_or_insert(0.0) += cumulative[j] * total;
        }
        for &(j, v) in &sk.live_fns[g] {
            *fn_need[v * nf + chain_fns[j]].get_or_insert(0.0) += cumulative[j] * total;
        }
        groups.push(chain::Group {
            origin: *origin,
            chain: chain_fns.clone(),
            cumulative: cumulative.clone(),
            demands: demands.clone(),
        });
    }
    let arc_row: Vec<Option<usize>> = arc_need
        .iter()
        .enumerate()
        .map(|(a, need)| need.map(|_| a))
        .collect();
    let arc_cap: Vec<f64> = arc_need
        .iter()
        .enumerate()
        .map(|(a, need)| need.map_or(0.0, |need| net.arcs[a].capacity.min(need)))
        .collect();
    // Dense order `site · functions + function` is the key order of (site, function).
    let function_cap: BTreeMap<(SiteIdx, FunctionIdx), f64> = fn_need
        .iter()
        .enumerate()
        .filter_map(|(i, need)| {
            need.map(|need| {
                let (v, f) = (i / nf, i % nf);
                ((v, f), ch.capacity[v][f].min(need))
            })
        })
        .collect();
    let function_row = function_cap
        .keys()
        .enumerate()
        .map(|(i, &k)| (k, i))
        .collect();
    let layered = Layered {
        edges: vec![Vec::new(); groups.len()],
        groups,
        demand_var: vec![None; net.demands.len()],
        arc_row,
        function_row,
        arc_cap,
        function_cap,
        bound: bound.to_vec(),
    };
    (layered, sk.cut_off.clone())
}
