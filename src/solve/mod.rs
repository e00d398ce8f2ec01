//! Solving one outage exactly: the two-layer LP ([`flow`]), the backend ([`lp`]) and an
//! independent optimality certificate ([`certify`]).
//!
//! [`evaluate`] is the unit of work the audit runs in parallel; it is a pure function of
//! the network and the outage, so results do not depend on thread count or order.

pub mod certify;
pub mod colgen;
pub mod flow;
pub mod lp;

use crate::error::Result;
use crate::model::{LinkIdx, Network, SiteIdx};
use crate::scenario::Outage;
use flow::Cap;

/// Relative tolerance used to call a resource saturated and to snap values that differ
/// from a bound by solver noise only (the backend solves to 1e-9).
pub const TOL: f64 = 1e-7;

/// A saturated resource of an optimal allocation with its shadow price (served units per
/// added unit of capacity).
#[derive(Debug, Clone, PartialEq)]
pub struct Bottleneck {
    pub resource: Resource,
    pub price: f64,
    /// Load over capacity in the allocation (1.0 when saturated).
    pub utilisation: f64,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Resource {
    /// A link direction: the arc index in `Network::arcs`.
    Arc(usize),
    /// A site's processing.
    Site(SiteIdx),
}

/// Everything the tool reports for one outage.
#[derive(Debug, Clone, PartialEq)]
pub struct Evaluation {
    /// Largest Σ f_d over surviving demands with f_d <= required_d.
    pub served_required: f64,
    /// Σ surviving required − served_required.
    pub shortfall: f64,
    /// Σ required of demands with a failed endpoint site.
    pub stranded: f64,
    /// Σ volume of those demands.
    pub stranded_volume: f64,
    /// Indices of the stranded demands.
    pub stranded_demands: Vec<usize>,
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
    /// Per arc: shadow price of its capacity row (0 when absent).
    pub arc_price: Vec<f64>,
    /// Saturated resources, highest shadow price first (ties by resource order).
    pub bottlenecks: Vec<Bottleneck>,
    /// Certified upper bound on served_required ([`certify::dual_bound`]).
    pub upper_bound: f64,
    /// Largest relative row violation of the returned allocation.
    pub max_violation: f64,
    /// Surviving demands with required > 0 that no walk through a processing site can
    /// serve at all (cut off by the outage).
    pub cut_off: Vec<usize>,
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

    /// Relative gap between the certified upper bound and served_required.
    pub fn certified_gap(&self) -> f64 {
        let denom = self
            .served_required
            .max(1e-9 * self.surviving_required)
            .max(f64::MIN_POSITIVE);
        (self.upper_bound - self.served_required).max(0.0) / denom
    }
}

/// Snaps `x` to `target` when within [`TOL`] relative to `scale`; otherwise rounds it to
/// a grid of 1e-9·scale, below the backend's accuracy, so solver noise does not show in
/// large units (bit/s) and equal results print equal.
fn snap(x: f64, target: f64, scale: f64) -> f64 {
    if scale.is_nan() || scale <= 0.0 {
        return if x.abs() < 1e-12 { target } else { x };
    }
    if (x - target).abs() <= TOL * scale {
        target
    } else {
        let grid = 1e-9 * scale;
        let q = (x / grid).round() * grid;
        if q.is_finite() { q } else { x }
    }
}

/// Solves the served_required LP of `net` under `outage` and returns it with its flow
/// index. The building block of [`evaluate`] and of the expansion models.
pub fn solve_flow(
    net: &Network,
    outage: &Outage,
    cap: Cap,
) -> Result<(lp::Lp, flow::FlowIndex, lp::LpSolution)> {
    let mut model = lp::Lp::new(true);
    let index = flow::build(&mut model, net, outage, cap, 1.0, None);
    let sol = if model.num_vars() == 0 {
        lp::LpSolution {
            x: Vec::new(),
            duals: vec![0.0; model.rows.len()],
            upper_duals: Vec::new(),
            objective: 0.0,
        }
    } else {
        lp::solve(&model)?
    };
    Ok((model, index, sol))
}

/// Solves one outage: served_required, shortfall, stranded, throughput (a second LP only
/// when some surviving demand's volume exceeds its required part), one optimal allocation,
/// its bottlenecks and the shadow prices, and the certified upper bound.
///
/// Cost: one or two LP solves of the size given in [`flow::build`].
pub fn evaluate(net: &Network, outage: &Outage) -> Result<Evaluation> {
    let (model, index, sol) = solve_flow(net, outage, Cap::Required)?;
    let arc_load = index.arc_loads(&sol.x);
    let site_load = index.site_loads(&sol.x);
    let allocation = Allocation {
        served: index.served(&sol.x),
        demand_flow: index.demand_flows(&sol.x),
        arc_price: index
            .arc_row
            .iter()
            .map(|r| r.map_or(0.0, |r| sol.duals[r]))
            .collect(),
        site_price: index
            .site_row
            .iter()
            .map(|r| r.map(|r| sol.duals[r]))
            .collect(),
        arc_has_row: index.arc_row.iter().map(Option::is_some).collect(),
        servable: index.demand_var.iter().map(Option::is_some).collect(),
        max_violation: if model.num_vars() == 0 {
            0.0
        } else {
            model.max_violation(&sol.x)
        },
        arc_load,
        site_load,
    };
    let throughput = if needs_volume_lp(net, outage) {
        let (_, vindex, vsol) = solve_flow(net, outage, Cap::Volume)?;
        Some(vindex.served(&vsol.x))
    } else {
        None
    };
    Ok(assemble(net, outage, allocation, throughput))
}

/// Whether some surviving demand offers more than its required part, so that throughput
/// needs its own LP (with volume caps). O(demands).
pub fn needs_volume_lp(net: &Network, outage: &Outage) -> bool {
    let site_alive = outage.site_alive(net);
    net.demands
        .iter()
        .any(|d| site_alive[d.from] && site_alive[d.to] && d.volume > d.required)
}

/// One optimal allocation of the served_required LP with its shadow prices, as an engine
/// (the edge LP here, the walk engine in [`colgen`]) hands it to [`assemble`]. Values are
/// raw solver output; [`assemble`] clamps and snaps them.
#[derive(Debug, Clone)]
pub struct Allocation {
    /// Σ f_d.
    pub served: f64,
    /// Per demand: its flow.
    pub demand_flow: Vec<f64>,
    /// Per arc: its load.
    pub arc_load: Vec<f64>,
    /// Per site: processing used.
    pub site_load: Vec<f64>,
    /// Per arc: shadow price of its capacity row (0 when it has none).
    pub arc_price: Vec<f64>,
    /// Per site: shadow price of its processing row, `None` when it has none (see
    /// [`Evaluation::site_price`]).
    pub site_price: Vec<Option<f64>>,
    /// Per arc: whether the model has a capacity row for it.
    pub arc_has_row: Vec<bool>,
    /// Per demand: whether some walk through a processing site can serve it.
    pub servable: Vec<bool>,
    /// Largest relative row violation of the allocation.
    pub max_violation: f64,
}

/// Turns an engine's [`Allocation`] (and the raw throughput optimum, when a volume LP was
/// solved) into the reported [`Evaluation`]: stranded totals, snapping to bounds,
/// bottlenecks, and the certified upper bound ([`certify::dual_bound`]).
///
/// Cost: O(demands + arcs + sites) plus the certificate's Dijkstras.
pub fn assemble(
    net: &Network,
    outage: &Outage,
    alloc: Allocation,
    raw_throughput: Option<f64>,
) -> Evaluation {
    let site_alive = outage.site_alive(net);
    let mut stranded = 0.0;
    let mut stranded_volume = 0.0;
    let mut stranded_demands = Vec::new();
    let mut surviving_required = 0.0;
    let mut surviving_volume = 0.0;
    for (d, dem) in net.demands.iter().enumerate() {
        if site_alive[dem.from] && site_alive[dem.to] {
            surviving_required += dem.required;
            surviving_volume += dem.volume;
        } else {
            stranded += dem.required;
            stranded_volume += dem.volume;
            stranded_demands.push(d);
        }
    }

    let scale = surviving_required;
    let mut served_required = alloc.served.clamp(0.0, surviving_required);
    served_required = snap(snap(served_required, surviving_required, scale), 0.0, scale);
    let shortfall = snap((surviving_required - served_required).max(0.0), 0.0, scale);

    let demand_flow: Vec<f64> = alloc
        .demand_flow
        .iter()
        .zip(&net.demands)
        .map(|(&f, dem)| {
            snap(
                snap(f.max(0.0).min(dem.required), dem.required, scale),
                0.0,
                scale,
            )
        })
        .collect();
    let demand_shortfall: Vec<f64> = net
        .demands
        .iter()
        .zip(&demand_flow)
        .map(|(dem, &f)| {
            if site_alive[dem.from] && site_alive[dem.to] {
                snap(dem.required - f, 0.0, scale)
            } else {
                0.0
            }
        })
        .collect();

    let arc_load = alloc.arc_load;
    let site_load = alloc.site_load;
    let arc_price: Vec<f64> = alloc.arc_price.iter().map(|p| p.max(0.0)).collect();
    let site_price: Vec<Option<f64>> = alloc
        .site_price
        .iter()
        .map(|p| p.map(|p| snap(p.max(0.0), 0.0, 1.0)))
        .collect();

    let mut bottlenecks = Vec::new();
    for (a, arc) in net.arcs.iter().enumerate() {
        if alloc.arc_has_row[a] && arc_load[a] >= arc.capacity * (1.0 - 1e-6) - 1e-9 {
            bottlenecks.push(Bottleneck {
                resource: Resource::Arc(a),
                price: snap(arc_price[a], 0.0, 1.0),
                utilisation: arc_load[a] / arc.capacity,
            });
        }
    }
    for (v, site) in net.sites.iter().enumerate() {
        if site_price[v].is_some() && site_load[v] >= site.processing * (1.0 - 1e-6) - 1e-9 {
            bottlenecks.push(Bottleneck {
                resource: Resource::Site(v),
                price: site_price[v].unwrap_or(0.0),
                utilisation: site_load[v] / site.processing,
            });
        }
    }
    bottlenecks.sort_by(|a, b| {
        b.price
            .total_cmp(&a.price)
            .then(a.resource.cmp(&b.resource))
    });

    let bounds: Vec<f64> = net.demands.iter().map(|d| d.required).collect();
    let capacity: Vec<f64> = net.sites.iter().map(|s| s.processing).collect();
    let site_price_dense: Vec<f64> = site_price.iter().map(|p| p.unwrap_or(0.0)).collect();
    let upper_bound = certify::dual_bound(
        net,
        outage,
        &bounds,
        &capacity,
        &arc_price,
        &site_price_dense,
    )
    .min(surviving_required);

    let throughput = match raw_throughput {
        Some(t) => {
            let t = t.clamp(served_required, surviving_volume);
            snap(t, surviving_volume, surviving_volume).max(served_required)
        }
        None => served_required,
    };

    let cut_off: Vec<usize> = (0..net.demands.len())
        .filter(|&d| {
            let dem = &net.demands[d];
            site_alive[dem.from] && site_alive[dem.to] && dem.required > 0.0 && !alloc.servable[d]
        })
        .collect();
    Evaluation {
        cut_off,
        served_required,
        shortfall,
        stranded,
        stranded_volume,
        stranded_demands,
        surviving_required,
        throughput,
        demand_flow,
        demand_shortfall,
        arc_load,
        site_load,
        site_price,
        arc_price,
        bottlenecks,
        upper_bound,
        max_violation: alloc.max_violation,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn net(json: &str) -> Network {
        Network::from_json(json).unwrap()
    }

    /// Arc reuse (common practice, no source: it is how a walk that revisits an arc
    /// consumes it). One-way ring s→m→t→p→m, processing only at p, demand s→t: the walk
    /// s→m→t→p→m→t crosses arc m→t (capacity 10) twice, once unprocessed and once
    /// processed, so only 5 units get through. With processing at the origin it is
    /// crossed once and carries all 10.
    #[test]
    fn walk_reusing_an_arc_halves_it() {
        let n = net(
            r#"{"sites":[{"id":"s"},{"id":"m"},{"id":"t"},{"id":"p","processing":100}],
            "links":[{"id":"sm","from":"s","to":"m","capacity":100,"one_way":true},
                     {"id":"mt","from":"m","to":"t","capacity":10,"one_way":true},
                     {"id":"tp","from":"t","to":"p","capacity":100,"one_way":true},
                     {"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}],
            "demands":[{"from":"s","to":"t","volume":50}]}"#,
        );
        let e = evaluate(&n, &Outage::default()).unwrap();
        assert!(
            (e.served_required - 5.0).abs() < 1e-6,
            "{}",
            e.served_required
        );
        // With processing at the origin, the arc is crossed once and carries all of it.
        let n2 = net(
            r#"{"sites":[{"id":"s","processing":100},{"id":"m"},{"id":"t"},{"id":"p"}],
            "links":[{"id":"sm","from":"s","to":"m","capacity":100,"one_way":true},
                     {"id":"mt","from":"m","to":"t","capacity":10,"one_way":true},
                     {"id":"tp","from":"t","to":"p","capacity":100,"one_way":true},
                     {"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}],
            "demands":[{"from":"s","to":"t","volume":50}]}"#,
        );
        let e2 = evaluate(&n2, &Outage::default()).unwrap();
        assert!((e2.served_required - 10.0).abs() < 1e-6);
        assert!(e2.certified_gap() < 1e-6, "{e2:?}");
    }

    #[test]
    fn shadow_price_of_binding_processing() {
        let n = net(r#"{"sites":[{"id":"a","processing":3},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":100}],
            "demands":[{"from":"a","to":"b","volume":10,"required":8}]}"#);
        let e = evaluate(&n, &Outage::default()).unwrap();
        assert!((e.served_required - 3.0).abs() < 1e-6);
        assert!((e.shortfall - 5.0).abs() < 1e-6);
        assert!((e.throughput - 3.0).abs() < 1e-6);
        assert!((e.site_price[0].unwrap() - 1.0).abs() < 1e-6);
        assert_eq!(e.bottlenecks[0].resource, Resource::Site(0));
        assert!(e.certified_gap() < 1e-6);
    }
}
