//! The results every engine produces and every report reads: [`Verified`] (one LP answer
//! with its proven bounds and prices, whatever engine made it) and [`Evaluation`] (one
//! outage as reported). Shared by the engines ([`super::edge`], [`super::colgen`], the
//! routing models) and the common ending ([`super::finish::finish_with`]) without any of them
//! importing another.

use super::surviving::Unservable;
use super::{recheck, verify};
use crate::model::{ArcIdx, DemandIdx, FunctionIdx, LinkIdx, Network, SiteIdx};

/// A saturated resource of an optimal allocation with its shadow price (served units per
/// added unit of capacity).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Bottleneck {
    pub resource: Resource,
    pub price: f64,
    /// Load over capacity in the allocation (1.0 when saturated).
    pub utilisation: f64,
}

#[derive(
    Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, serde::Serialize, serde::Deserialize,
)]
pub enum Resource {
    /// A link direction: the arc index in `Network::arcs`.
    Arc(ArcIdx),
    /// A site's processing.
    Site(SiteIdx),
}

/// One function at one site of a network with `functions` in one allocation: the
/// traffic entering it and the shadow price of its capacity.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FunctionUse {
    pub site: SiteIdx,
    pub function: FunctionIdx,
    /// Traffic entering the function at this site (origin units times the gain of the
    /// functions before it in each chain), in the reported allocation.
    pub load: f64,
    /// Served origin units per added unit of this function's capacity at this site (its
    /// shadow price); `None` when the LP had no row for it (no demand could reach it), 0
    /// when the presolve lowered the row below the capacity (it does not bind then).
    pub price: Option<f64>,
}

/// How one LP result was verified.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Verification {
    /// The bounds meet within [`crate::tol::PROOF_GAP_TOL`] and the allocation is feasible.
    pub proven: bool,
    /// Proven lower bound: delivered flow of the repaired, feasible allocation.
    pub lower: f64,
    /// Proven upper bound: the dual bound, capped by the demand at stake.
    pub upper: f64,
    /// Largest relative row residual of the backend's allocation that was kept.
    pub residual: f64,
    /// Backends tried (1 when the first one was proven).
    pub attempts: usize,
    /// The backend whose allocation was kept.
    pub backend: String,
}

impl Verification {
    /// The verification of an LP with no variable (no surviving demand can be routed):
    /// proven, both bounds 0, nothing solved.
    pub fn nothing_to_route() -> Verification {
        Verification {
            proven: true,
            lower: 0.0,
            upper: 0.0,
            residual: 0.0,
            attempts: 0,
            backend: "none (nothing to route)".into(),
        }
    }

    /// A backend attempt's verification before its upper bound is known: `lower` (the
    /// repaired allocation's value), the allocation's `residual`, `attempts` so far and
    /// the backend's name; not proven, upper bound infinite (the caller closes it).
    pub fn open(lower: f64, residual: f64, attempts: usize, backend: &str) -> Verification {
        Verification {
            proven: false,
            lower,
            upper: f64::INFINITY,
            residual,
            attempts,
            backend: backend.into(),
        }
    }
}

/// Everything the tool reports for one outage.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Evaluation {
    /// Largest Σ f_d over surviving demands with f_d <= required_d (the proven lower bound
    /// when the result is unproven).
    pub served_required: f64,
    /// Σ surviving required − served_required, summed as the cut-off demands' required
    /// plus what the servable ones miss ([`super::shortfall_of`]), so a small cut-off demand beside
    /// large served ones is not lost to rounding.
    pub shortfall: f64,
    /// Σ required of demands with a failed endpoint site.
    pub stranded: f64,
    /// Σ volume of those demands.
    pub stranded_volume: f64,
    /// Indices of the stranded demands.
    pub stranded_demands: Vec<DemandIdx>,
    /// Σ required of the surviving demands.
    pub surviving_required: f64,
    /// Largest Σ f_d with f_d <= volume_d over surviving demands.
    pub throughput: f64,
    /// Per demand: flow in one optimal allocation of the served_required LP.
    pub demand_flow: Vec<f64>,
    /// Per demand: required − flow (0 for stranded demands).
    pub demand_shortfall: Vec<f64>,
    /// Per arc: load in that allocation.
    pub arc_load: Vec<f64>,
    /// Per site: processing used in that allocation.
    pub site_load: Vec<f64>,
    /// Per site: shadow price of its processing row (`None` when the site has no row:
    /// no capacity, failed, or unreachable by any demand).
    pub site_price: Vec<Option<f64>>,
    /// Per arc: shadow price of its capacity (0 when absent, or when the presolve lowered
    /// the row below the real capacity: the real capacity does not bind then).
    pub arc_price: Vec<f64>,
    /// Saturated resources, highest shadow price first (ties by resource order).
    pub bottlenecks: Vec<Bottleneck>,
    /// Certified upper bound on served_required ([`super::certify::dual_bound`]). A copy
    /// of `verification.upper`, which is the source of truth: both are set once, together,
    /// by [`super::finish::finish_with`], and [`recheck::recheck`] refuses a stored line
    /// where they differ. The copy stays because it is a field of every journal and part
    /// line (serde of this struct) and the JSON's `upper_bound` is written from it.
    pub upper_bound: f64,
    /// Largest relative row violation of the returned allocation. A copy of
    /// `verification.residual` (the source of truth), kept and checked like `upper_bound`.
    pub max_violation: f64,
    /// Surviving demands with required > 0 that no walk through a processing site can
    /// serve at all (cut off by the outage), with the reason.
    pub cut_off: Vec<(DemandIdx, Unservable)>,
    /// How served_required was verified.
    pub verification: Verification,
    /// How throughput was verified (`None` when it equals served_required by definition:
    /// no surviving demand offers more than its required part).
    pub throughput_verification: Option<Verification>,
    /// What a journal or part file keeps so that the result can be verified again without
    /// solving ([`recheck::recheck`]); `None` in thin evaluations and where nothing reads
    /// it back. Never shown in a report.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub proof: Option<Box<recheck::Proof>>,
    /// With service chains ([`crate::model::Chains`]): Σ over demands of the reported
    /// flow times its chain's gain, the volume reaching the destinations in the reported
    /// served_required allocation (one optimum; another optimum may deliver another
    /// amount). `None` for a network without `functions`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub delivered: Option<f64>,
    /// With service chains: every (site, function) with capacity at a surviving site, in
    /// (site, function) order, with its load and price in the served_required allocation.
    /// Empty (and absent from journals and part files) for a network without `functions`.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub functions: Vec<FunctionUse>,
}

impl Evaluation {
    /// Saturated links (each once, in link order).
    pub fn saturated_links(&self, net: &Network) -> Vec<LinkIdx> {
        let mut v: Vec<LinkIdx> = self
            .bottlenecks
            .iter()
            .filter_map(|b| match b.resource {
                Resource::Arc(a) => Some(net.arcs[a].link),
                Resource::Site(_) => None,
            })
            .collect();
        v.sort_unstable();
        v.dedup();
        v
    }

    /// Saturated sites, in site order.
    pub fn saturated_sites(&self) -> Vec<SiteIdx> {
        let mut v: Vec<SiteIdx> = self
            .bottlenecks
            .iter()
            .filter_map(|b| match b.resource {
                Resource::Site(s) => Some(s),
                Resource::Arc(_) => None,
            })
            .collect();
        v.sort_unstable();
        v
    }

    /// served_required / surviving required (1 when nothing is required).
    pub fn served_fraction(&self) -> f64 {
        if self.surviving_required > 0.0 {
            self.served_required / self.surviving_required
        } else {
            1.0
        }
    }

    /// (upper bound − served_required) / surviving required: how far the reported value
    /// may be below the optimum, relative to the demand at stake. Never clamped: a
    /// negative value would mean the bounds cross (and the result is then unproven).
    pub fn certified_gap(&self) -> f64 {
        relative_gap(
            self.upper_bound,
            self.served_required,
            self.surviving_required,
        )
    }

    /// Both LPs of this outage were proven optimal.
    pub fn proven(&self) -> bool {
        self.verification.proven
            && self
                .throughput_verification
                .as_ref()
                .is_none_or(|v| v.proven)
    }

    /// The evaluation without its per-demand, per-arc and per-site vectors (`demand_flow`,
    /// `demand_shortfall`, `arc_load`, `site_load`, `arc_price` emptied, and `site_price`
    /// unless the outage has a shortfall): what ranking, gates, criticality, the relief
    /// table and the verification summary read, in a few hundred bytes instead of
    /// O(demands + arcs + sites). O(1) beyond freeing. Invariant:
    /// every scalar, `bottlenecks`, `cut_off`, `stranded_demands` and both verifications
    /// are unchanged; a report that shows the dropped vectors asks for the full evaluation
    /// again ([`Evaluation::is_thin`]).
    pub fn thin(mut self) -> Evaluation {
        for v in [
            &mut self.demand_flow,
            &mut self.demand_shortfall,
            &mut self.arc_load,
            &mut self.site_load,
            &mut self.arc_price,
        ] {
            *v = Vec::new();
        }
        if self.shortfall <= 0.0 {
            self.site_price = Vec::new();
        }
        self.proof = None;
        self.bottlenecks.shrink_to_fit();
        self.cut_off.shrink_to_fit();
        self.stranded_demands.shrink_to_fit();
        self
    }

    /// Whether this is a [`thin`](Evaluation::thin) evaluation of `net` (its per-demand
    /// vectors are missing; a full one has one entry per demand).
    pub fn is_thin(&self, net: &Network) -> bool {
        self.demand_flow.len() != net.demands.len()
    }

    /// With service chains, when the delivered volume may differ between optimal
    /// allocations: the range `(least, most)` it lies in for every allocation serving
    /// `served_required` within the caps (each surviving, not cut-off demand at most its
    /// required), from the chains' gains alone: the most fills the demands with the
    /// highest total gain first, the least those with the lowest. The network may narrow
    /// it; the reported `delivered` is inside it. `None` without functions, or when the
    /// two ends meet within [`crate::tol::RELATIVE_TOL`] of the volume at stake (every
    /// optimum delivers the same: one gain among the demands that could trade volume, or
    /// every one of them served in full). O(demands · (chain + log demands)).
    pub fn delivered_range(&self, net: &Network) -> Option<(f64, f64)> {
        let ch = net.chains.as_ref()?;
        let stranded: std::collections::BTreeSet<usize> =
            self.stranded_demands.iter().map(|d| d.0).collect();
        let cut: std::collections::BTreeSet<usize> = self.cut_off.iter().map(|c| c.0.0).collect();
        let mut caps: Vec<(f64, f64)> = (0..net.demands.len())
            .filter(|d| !stranded.contains(d) && !cut.contains(d))
            .map(|d| (ch.total_gain(d), net.demands[d].required))
            .filter(|&(_, r)| r > 0.0)
            .collect();
        caps.sort_by(|a, b| a.0.total_cmp(&b.0));
        let fill = |order: &mut dyn Iterator<Item = &(f64, f64)>| {
            let (mut left, mut out) = (self.served_required, 0.0);
            for &(g, r) in order {
                let f = r.min(left).max(0.0);
                out += g * f;
                left -= f;
            }
            out
        };
        let least = fill(&mut caps.iter());
        let most = fill(&mut caps.iter().rev());
        let at_stake: f64 = caps.iter().map(|&(g, r)| g * r).sum();
        (most - least > crate::tol::RELATIVE_TOL * at_stake).then_some((least, most))
    }

    /// Surviving required demand cut off for `reason` (Σ required of those demands).
    pub fn cut_off_required(&self, net: &Network, reason: Unservable) -> f64 {
        self.cut_off
            .iter()
            .filter(|(_, r)| *r == reason)
            .map(|&(d, _)| net.demands[d].required)
            .sum()
    }
}

/// `(upper − value) / scale`, with `scale` floored so an empty scenario gives 0.
fn relative_gap(upper: f64, value: f64, scale: f64) -> f64 {
    let gap = upper - value;
    if gap == 0.0 {
        0.0
    } else {
        gap / scale.max(f64::MIN_POSITIVE)
    }
}

/// One verified LP result, whatever engine produced it: the feasible allocation, the
/// bounds, and the shadow prices of the real capacities.
#[derive(Debug, Clone)]
pub struct Verified {
    /// The repaired, feasible allocation (its `served` is the proven lower bound).
    pub allocation: verify::Repaired,
    /// The engine's own objective value (Σ f_d of its allocation).
    pub lp_value: f64,
    pub verification: Verification,
    /// Per arc: shadow price of its real capacity (0 when the model had no row for it, or
    /// when the presolve lowered the row below the real capacity: it does not bind then).
    pub arc_price: Vec<f64>,
    /// Per site: the same for processing.
    pub site_price: Vec<f64>,
    /// Per arc: the model has a capacity row for it (some flow could use it).
    pub arc_has_row: Vec<bool>,
    /// Per site: the model has a processing row for it.
    pub site_has_row: Vec<bool>,
    /// Per arc and per site: the prices that gave the upper bound (as the certificate
    /// read them, before rows lowered by the presolve were zeroed above).
    pub bound_price: (Vec<f64>, Vec<f64>),
    /// With service chains: per (site, function) with capacity at a surviving site, its
    /// load in `allocation` and its shadow price ([`FunctionUse`]); empty otherwise.
    pub functions: Vec<FunctionUse>,
}
