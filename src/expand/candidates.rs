//! Where processing may be added, at what unit cost and up to how much, and the `add_v`
//! variables that carry an addition into an LP.

use crate::model::Network;
use crate::scenario::Outage;
use crate::solve::TOL;
use crate::solve::lp::Lp;

/// Where processing may be added, at what unit cost and up to how much.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidates {
    /// Per site: unit cost, `None` when the site cannot be expanded.
    pub cost: Vec<Option<f64>>,
    /// Per site: most units that may be added (`INFINITY` when unlimited).
    pub max: Vec<f64>,
    /// Per site: the module size when the site buys in whole modules (`expand_step`).
    pub step: Vec<Option<f64>>,
    /// True when the file gives no `expand_cost` anywhere and every site is a candidate
    /// at cost 1 per unit (a plan then minimises the total added processing).
    pub default_costs: bool,
}

impl Candidates {
    /// The file's candidates, or every site at cost 1 when no site has `expand_cost`.
    /// O(sites).
    pub fn of(net: &Network) -> Candidates {
        if let Some(ch) = &net.chains {
            // Service chains buy function capacity ([`super::chain_buy::Offer`]), never
            // processing: no site is a processing candidate; `default_costs` says whether
            // the file's sites offer no function purchase at all.
            let n = net.sites.len();
            return Candidates {
                cost: vec![None; n],
                max: vec![0.0; n],
                step: vec![None; n],
                default_costs: ch.expand.iter().flatten().all(Option::is_none),
            };
        }
        if net.sites.iter().all(|s| s.expansion.is_none()) {
            return Candidates {
                cost: vec![Some(1.0); net.sites.len()],
                max: vec![f64::INFINITY; net.sites.len()],
                step: vec![None; net.sites.len()],
                default_costs: true,
            };
        }
        Candidates {
            cost: net
                .sites
                .iter()
                .map(|s| s.expansion.as_ref().map(|e| e.cost))
                .collect(),
            max: net
                .sites
                .iter()
                .map(|s| s.expansion.as_ref().map_or(0.0, |e| e.max))
                .collect(),
            step: net
                .sites
                .iter()
                .map(|s| s.expansion.as_ref().and_then(|e| e.step))
                .collect(),
            default_costs: false,
        }
    }

    /// Whether processing can be bought at site `v`: a candidate with room to add.
    pub fn expandable(&self, v: usize) -> bool {
        self.cost.get(v).is_some_and(Option::is_some) && self.max.get(v).is_some_and(|m| *m > 0.0)
    }

    /// Cost of an addition vector: Σ cost_v · add_v. O(sites).
    pub fn cost_of(&self, add: &[f64]) -> f64 {
        add.iter()
            .zip(&self.cost)
            .map(|(a, c)| a * c.unwrap_or(0.0))
            .sum()
    }

    /// The module size at `v` when `v` is a candidate that buys in whole modules.
    pub fn module(&self, v: usize) -> Option<f64> {
        self.cost[v].and(self.step[v]).filter(|s| *s > 0.0)
    }

    /// The addition of `count` modules at `v`: `count · step`, capped at `expand_max` (the
    /// last module is partial when `expand_max` is not a multiple of the step). `count` is
    /// taken as is at a site bought by the unit. O(1).
    pub fn modules_to_units(&self, v: usize, count: f64) -> f64 {
        match self.module(v) {
            Some(step) => (count * step).min(self.max[v].max(0.0)),
            None => count,
        }
    }

    /// Most modules at `v`: `⌈expand_max / step⌉` (the last one partial when `expand_max` is
    /// not a multiple), within `MODULE_TOL` (1e-9); infinite when unlimited. O(1).
    pub fn max_modules(&self, v: usize) -> f64 {
        match self.module(v) {
            Some(step) => (self.max[v].max(0.0) / step - MODULE_TOL).ceil().max(0.0),
            None => self.max[v],
        }
    }

    /// The least allowed addition at `v` that is at least `a` (less `MODULE_TOL`, 1e-9, of a
    /// module: floating-point noise): at a modular site the next whole module
    /// count, capped at `expand_max`; `a` itself at a site bought by the unit. Never below
    /// `a` (but for that noise) unless `a` exceeds `expand_max`. O(1).
    pub fn round_up(&self, v: usize, a: f64) -> f64 {
        match self.module(v) {
            Some(step) if a > 0.0 => {
                self.modules_to_units(v, (a / step - MODULE_TOL).ceil().max(0.0))
            }
            Some(_) => 0.0,
            None => a,
        }
    }

    /// True when some candidate site buys in whole modules.
    pub fn any_modular(&self) -> bool {
        self.cost
            .iter()
            .zip(&self.step)
            .any(|(c, s)| c.is_some() && s.is_some_and(|s| s > 0.0))
    }
}

/// Relative tolerance (of a module) within which an amount just above a whole number of
/// modules counts as that number (defined in [`crate::tol`]).
pub use crate::tol::MODULE_TOL;

/// Adds one `add_v` variable per candidate site that survives `outage` (all candidates
/// when `outage` is `None`), bounded by `min(expand_max, cap)` and with objective
/// coefficient `cost_v * cost_weight`. O(sites).
pub(crate) fn add_vars(
    lp: &mut Lp,
    net: &Network,
    cands: &Candidates,
    outage: Option<&Outage>,
    cap: f64,
    cost_weight: f64,
) -> Vec<Option<usize>> {
    let alive = outage.map(|o| o.site_alive(net));
    (0..net.sites.len())
        .map(|v| {
            let c = cands.cost[v]?;
            if alive.as_ref().is_some_and(|a| !a[v]) || cands.max[v] <= 0.0 {
                return None;
            }
            let bound = cands.max[v].min(cap);
            let j = lp.add_var(0.0, bound, c * cost_weight);
            if bound.is_finite() {
                lp.magnitude[j] = bound;
            }
            Some(j)
        })
        .collect()
}

/// The additions of a solution `x`, with values within [`TOL`]·`scale` of 0 snapped to 0
/// (solver noise, not a purchase). O(sites).
pub(crate) fn values(add: &[Option<usize>], x: &[f64], scale: f64) -> Vec<f64> {
    add.iter()
        .map(|v| {
            v.map_or(0.0, |v| {
                let a = x[v].max(0.0);
                if a <= TOL * scale { 0.0 } else { a }
            })
        })
        .collect()
}
