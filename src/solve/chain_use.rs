//! The per-(site, function) use of an allocation of the layered model of service chains
//! ([`super::chain`]): what each function at each site takes and its shadow price, as
//! [`super::types::FunctionUse`] rows, for both chain engines (the layered edge LP and the
//! layered walk engine) to hand to [`super::finish_with`].

use std::collections::BTreeMap;

use super::chain::{EdgeKind, Layered, LayeredWalk, runs};
use super::surviving::Surviving;
use super::types::FunctionUse;
use crate::model::{FunctionIdx, Network};

/// Plain site positions inside the layered solver's loops (the model's typed index at the
/// boundary, in [`FunctionUse::site`]).
type SiteIdx = usize;

/// Every (site, function) with capacity at a site of `view` that runs it, in (site,
/// function) order: the traffic `walks` put into it (in the units its capacity counts) and
/// its price from `fn_price` (`None` without a row in `layered`; 0 where the row was
/// lowered below the real capacity, which then does not bind). O(Σ walk lengths + sites ·
/// functions · log).
pub(crate) fn function_use(
    net: &Network,
    view: &Surviving,
    layered: &Layered,
    walks: &[LayeredWalk],
    fn_price: &BTreeMap<(SiteIdx, FunctionIdx), f64>,
) -> Vec<FunctionUse> {
    let ch = net.chains.as_ref().expect("a network with functions");
    let nf = ch.functions.len();
    // Per `site · functions + function` (dense; the same sums in walk order).
    let mut load = vec![0.0; net.sites.len() * nf];
    for w in walks {
        let group = &layered.groups[w.group];
        for e in &w.edges {
            if let EdgeKind::Function { site, layer } = *e {
                load[site * nf + group.chain[layer]] += w.flow * group.cumulative[layer];
            }
        }
    }
    let mut out = Vec::new();
    for v in 0..net.sites.len() {
        for f in 0..ch.functions.len() {
            if ch.capacity[v][f] <= 0.0 || !runs(ch, view, v, f) {
                continue;
            }
            let key = (v, f);
            let price = layered.function_row.get(&key).map(|_| {
                if layered.function_cap[&key] < ch.capacity[v][f] {
                    0.0
                } else {
                    fn_price.get(&key).copied().unwrap_or(0.0).max(0.0)
                }
            });
            out.push(FunctionUse {
                site: v.into(),
                function: f,
                load: load[v * nf + f],
                price,
            });
        }
    }
    out
}
