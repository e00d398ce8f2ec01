//! The fixed-route LP: how much of each demand the network serves when every unit follows
//! the shortest-path routes of [`super::spt`] and is processed at a site chosen by the
//! routing mode.
//!
//! Variables: under [`Mode::Nearest`] one `F_d` per demand, spread over its nearest sites
//! in equal shares; under [`Mode::Steered`] one `y_{d,v}` per demand and candidate site,
//! with `Σ_v y_{d,v} <= cap_d`. Rows: per arc `Σ load-per-unit · var <= capacity`, per
//! site `Σ share · var (− add_v) <= processing`. Every row is `<=` with non-negative
//! coefficients, and every variable lies in `[0, cap_d]`; [`weak_dual_bound`] relies on it.
//!
//! Presolve: a capacity that cannot bind is lowered to what can cross it, `Σ_d cap_d ·
//! max_{var of d} coefficient` (the most the demands can put on that row, since a demand's
//! variables sum to at most `cap_d`). The lowered row is implied by the variable bounds, so
//! the feasible set, the optimum and every weak-duality bound are unchanged; it keeps a link
//! of 1e12 beside demands of 1e4 from setting the model's scale. Site rows offset by
//! added processing are not lowered. Each variable carries its demand's cap as magnitude
//! hint, so [`crate::solve::lp::Scaling`] expresses it as a fraction of its demand.

use super::{DemandRoutes, Mode};
use crate::model::Network;
use crate::solve::lp::{Lp, LpSolution, Sense};

/// Where the fixed-route model's pieces sit in the LP.
#[derive(Debug, Clone)]
pub struct FixedIndex {
    /// Per demand: its variables (one under nearest, one per candidate under steered).
    pub demand_vars: Vec<Vec<usize>>,
    /// Per variable: its per-unit load on arcs (sorted by arc) and on sites.
    pub var_arcs: Vec<Vec<(usize, f64)>>,
    pub var_sites: Vec<Vec<(usize, f64)>>,
    /// Offset of the first variable of this model in the LP.
    pub first_var: usize,
    /// Per arc: its capacity row, when some variable loads it.
    pub arc_row: Vec<Option<usize>>,
    /// Per processing resource (site, or (site, function) with chains): its row, when
    /// some variable is processed there.
    pub site_row: Vec<Option<usize>>,
    /// Per arc / site: the presolve lowered its row below the real capacity (the real
    /// capacity cannot bind, so a price on that row is no price of the capacity).
    pub arc_lowered: Vec<bool>,
    pub site_lowered: Vec<bool>,
}

impl FixedIndex {
    /// Σ over the demands of their served amount.
    pub fn served(&self, x: &[f64]) -> f64 {
        self.demand_vars
            .iter()
            .flatten()
            .map(|&v| x[v].max(0.0))
            .sum()
    }

    /// Per demand: Σ of its variables.
    pub fn demand_flows(&self, x: &[f64]) -> Vec<f64> {
        self.demand_vars
            .iter()
            .map(|vs| vs.iter().map(|&v| x[v].max(0.0)).sum())
            .collect()
    }

    /// `Σ rhs · price` over the arc and processing rows of `lp` (the model this index was
    /// built into), with `arc_price` per arc and `res_price` per resource: the capacity
    /// term of a dual bound. O(arcs + resources).
    pub fn priced_rows(&self, lp: &Lp, arc_price: &[f64], res_price: &[f64]) -> f64 {
        self.arc_row
            .iter()
            .zip(arc_price)
            .chain(self.site_row.iter().zip(res_price))
            .filter_map(|(r, &y)| r.map(|r| lp.rows[r].rhs * y))
            .sum()
    }

    /// Per-arc and per-site load of a solution.
    pub fn loads(&self, x: &[f64], arcs: usize, sites: usize) -> (Vec<f64>, Vec<f64>) {
        let mut arc = vec![0.0; arcs];
        let mut site = vec![0.0; sites];
        for (j, (pa, ps)) in self.var_arcs.iter().zip(&self.var_sites).enumerate() {
            let v = x[self.first_var + j].max(0.0);
            for &(a, c) in pa {
                arc[a] += c * v;
            }
            for &(s, c) in ps {
                site[s] += c * v;
            }
        }
        (arc, site)
    }
}

/// The processing resources a fixed-route model's processing rows stand for: the sites
/// (their `processing`) for a file without `functions`, each (site, function) for service
/// chains ([`super::chain`]); a [`super::Choice`]'s `processing` indexes them.
pub struct Resources<'a> {
    /// Per resource: its capacity.
    pub capacity: &'a [f64],
    /// Per arc and per resource: what every route the model could ever hold (not only the
    /// routes given) can put on the row, when the routes given are a subset of them
    /// (column generation). Rows are then lowered to these ceilings instead of to what the
    /// given routes reach, so the lowered rows stay implied for every route.
    pub ceilings: Option<(&'a [f64], &'a [f64])>,
}

/// Adds the fixed-route model of `routes` to `lp`: variables capped by `cap` per demand,
/// objective coefficient `obj` on each; one processing row per resource of `res` some route
/// loads (default: the sites and their `processing`), of capacity `res.capacity` (offset by
/// the `add[r]` variable when given). O(Σ candidates · (legs' arcs + processing entries)).
#[allow(clippy::too_many_arguments)]
pub fn build(
    lp: &mut Lp,
    net: &Network,
    routes: &[Option<DemandRoutes>],
    mode: Mode,
    cap: &[f64],
    obj: f64,
    add: Option<&[Option<usize>]>,
    res: Option<&Resources<'_>>,
) -> FixedIndex {
    let processing: Vec<f64>;
    let sites;
    let res = match res {
        Some(res) => res,
        None => {
            processing = net.sites.iter().map(|s| s.processing).collect();
            sites = Resources {
                capacity: &processing,
                ceilings: None,
            };
            &sites
        }
    };
    let n_res = res.capacity.len();
    let first_var = lp.num_vars();
    let mut demand_vars = vec![Vec::new(); net.demands.len()];
    let mut var_arcs = Vec::new();
    let mut var_sites = Vec::new();
    let mut var_demand = Vec::new();
    for (d, r) in routes.iter().enumerate() {
        let Some(r) = r else { continue };
        if r.candidates.is_empty() {
            continue;
        }
        match mode {
            Mode::Nearest => {
                let w = 1.0 / r.nearest.len() as f64;
                let mut arcs: Vec<(usize, f64)> = Vec::new();
                let mut sites: Vec<(usize, f64)> = Vec::new();
                for &c in &r.nearest {
                    let ch = &r.candidates[c];
                    arcs = super::merge(&arcs, &ch.arcs, w);
                    sites = super::merge(&sites, &ch.processing, w);
                }
                demand_vars[d].push(lp.add_var(0.0, cap[d], obj));
                var_arcs.push(arcs);
                var_sites.push(sites);
                var_demand.push(d);
            }
            Mode::Steered => {
                for ch in &r.candidates {
                    demand_vars[d].push(lp.add_var(0.0, cap[d], obj));
                    var_arcs.push(ch.arcs.clone());
                    var_sites.push(ch.processing.clone());
                    var_demand.push(d);
                }
                if demand_vars[d].len() > 1 {
                    let coeffs = demand_vars[d].iter().map(|&v| (v, 1.0)).collect();
                    lp.add_row(coeffs, Sense::Le, cap[d]);
                }
            }
        }
    }
    let mut arc_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); net.arcs.len()];
    let mut site_terms: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n_res];
    for (j, (pa, ps)) in var_arcs.iter().zip(&var_sites).enumerate() {
        for &(a, c) in pa {
            arc_terms[a].push((first_var + j, c));
        }
        for &(s, c) in ps {
            site_terms[s].push((first_var + j, c));
        }
    }
    for (j, &d) in var_demand.iter().enumerate() {
        lp.magnitude[first_var + j] = cap[d];
    }
    // What can cross a row: per demand its largest coefficient there times its cap.
    let reach = |terms: &[(usize, f64)]| -> f64 {
        let mut per: Vec<(usize, f64)> = terms
            .iter()
            .map(|&(v, c)| (var_demand[v - first_var], c))
            .collect();
        per.sort_by(|a, b| a.0.cmp(&b.0).then(b.1.total_cmp(&a.1)));
        per.dedup_by_key(|p| p.0);
        per.iter().map(|&(d, c)| c * cap[d]).sum()
    };
    let mut arc_lowered = vec![false; net.arcs.len()];
    let arc_row = arc_terms
        .into_iter()
        .zip(&net.arcs)
        .enumerate()
        .map(|(a, (t, arc))| {
            if t.is_empty() {
                return None;
            }
            let most = res.ceilings.map_or_else(|| reach(&t), |(arcs, _)| arcs[a]);
            let rhs = if most < arc.capacity {
                arc_lowered[a] = true;
                most
            } else {
                arc.capacity
            };
            Some(lp.add_row(t, Sense::Le, rhs))
        })
        .collect();
    let mut site_lowered = vec![false; n_res];
    let site_row = site_terms
        .into_iter()
        .enumerate()
        .map(|(s, mut t)| {
            if t.is_empty() {
                return None;
            }
            let mut rhs = res.capacity[s];
            if let Some(a) = add.and_then(|a| a[s]) {
                t.push((a, -1.0));
            } else {
                let most = res.ceilings.map_or_else(|| reach(&t), |(_, r)| r[s]);
                if most < rhs {
                    site_lowered[s] = true;
                    rhs = most;
                }
            }
            Some(lp.add_row(t, Sense::Le, rhs))
        })
        .collect();
    FixedIndex {
        demand_vars,
        var_arcs,
        var_sites,
        first_var,
        arc_row,
        site_row,
        arc_lowered,
        site_lowered,
    }
}

/// An upper bound on `max c·x` over `lp` valid for any non-negative row prices (weak
/// duality for `A x <= b`, `0 <= x <= u`, `A >= 0`): `Σ b·y + Σ_j u_j · max(0, c_j − (Aᵀy)_j)`,
/// with `y` the solution's shadow prices clipped at 0. It does not trust the solver: wrong
/// prices only make it looser. Assumes the model of [`build`] (every row `<=`, every lower
/// bound 0, a maximisation). O(nonzeros).
pub fn weak_dual_bound(lp: &Lp, sol: &LpSolution) -> f64 {
    let mut reduced = lp.objective.clone();
    let mut bound = 0.0;
    for (r, &y) in lp.rows.iter().zip(&sol.duals) {
        let y = y.max(0.0);
        if y == 0.0 {
            continue;
        }
        bound += r.rhs * y;
        for &(j, a) in &r.coeffs {
            reduced[j] -= a * y;
        }
    }
    for (j, &c) in reduced.iter().enumerate() {
        if c > 0.0 {
            bound += lp.upper[j] * c;
        }
    }
    bound
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::routing::{processing_sites, routes, spt::Trees};
    use crate::scenario::Outage;

    /// Presolve, hand-worked: a–b–c, processing 100 at b, demands a→c of 10 and c→a of 5.
    /// Link ab (1e12) carries at most 10 a→b and 5 b→a: its rows drop to 10 and 5. Link bc
    /// of capacity 1 can bind: kept at 1. Site b can take 15 of its 100: row lowered to 15.
    /// The optimum is unchanged: 1 + 1 (each demand crosses bc once; nearest = steered here).
    #[test]
    fn presolve_lowers_only_rows_that_cannot_bind() {
        let net = Network::from_bytes(
            br#"{"sites":[{"id":"a"},{"id":"b","processing":100},{"id":"c"}],
                "links":[{"id":"ab","from":"a","to":"b","capacity":1e12},
                         {"id":"bc","from":"b","to":"c","capacity":1}],
                "demands":[{"from":"a","to":"c","volume":10},{"from":"c","to":"a","volume":5}]}"#,
        )
        .unwrap();
        let r = routes(
            &net,
            &Trees::baseline(&net),
            &processing_sites(&net, &Outage::default()),
        );
        let mut lp = Lp::new(true);
        let idx = build(
            &mut lp,
            &net,
            &r,
            Mode::Nearest,
            &[10.0, 5.0],
            1.0,
            None,
            None,
        );
        let rhs = |row: Option<usize>| lp.rows[row.unwrap()].rhs;
        let mut ab: Vec<f64> = (0..net.arcs.len())
            .filter(|&a| net.links[net.arcs[a].link].id == "ab")
            .map(|a| rhs(idx.arc_row[a]))
            .collect();
        ab.sort_by(f64::total_cmp);
        assert_eq!(ab, vec![5.0, 10.0]);
        for a in 0..net.arcs.len() {
            let bc = net.links[net.arcs[a].link].id == "bc";
            assert_eq!(idx.arc_lowered[a], !bc, "arc {a}");
            if bc {
                assert_eq!(rhs(idx.arc_row[a]), 1.0);
            }
        }
        assert_eq!(rhs(idx.site_row[1]), 15.0);
        assert!(idx.site_lowered[1]);
        let sol = crate::solve::lp::solve(&lp).unwrap();
        assert!((idx.served(&sol.x) - 2.0).abs() < 1e-7, "{:?}", sol.x);
    }

    /// max x + y with x, y in [0, 3] and x + y <= 4 (hand-worked: optimum 4). With the
    /// row price 1 the bound is 4·1 + 3·max(0, 1 − 1)·2 = 4 (tight); with price 0 it is
    /// 3 + 3 = 6; with price 2 it is 8: every price gives a bound ≥ the optimum.
    #[test]
    fn weak_dual_bound_is_valid_for_any_price() {
        let mut lp = Lp::new(true);
        let x = lp.add_var(0.0, 3.0, 1.0);
        let y = lp.add_var(0.0, 3.0, 1.0);
        lp.add_row(vec![(x, 1.0), (y, 1.0)], Sense::Le, 4.0);
        for (price, want) in [(1.0, 4.0), (0.0, 6.0), (2.0, 8.0), (-5.0, 6.0)] {
            let sol = LpSolution {
                x: vec![2.0, 2.0],
                duals: vec![price],
                upper_duals: vec![0.0, 0.0],
                objective: 4.0,
            };
            assert_eq!(weak_dual_bound(&lp, &sol), want, "price {price}");
        }
    }
}
