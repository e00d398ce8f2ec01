//! Helpers shared by `tests/reference.rs`, `tests/reference_walks.rs` and
//! `tests/highs_backend.rs`: a test-side
//! network description written to JSON in the contract's shape, the product's evaluation
//! through its scenario → outage path, and the per-demand reference LP solved by microlp
//! (a second formulation, written from the input contract, with a different solver).
//! Included by those files only (`#[path]`), so other test crates do not compile it.
#![allow(dead_code)] // each test crate that includes it uses part of it

use good_lp::{Expression, ProblemVariables, Solution, SolverModel, Variable, microlp, variable};
use rand::prelude::*;
use redoubt::model::Network;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::{Evaluation, evaluate};
use serde_json::json;

/// Relative tolerance of every comparison in the reference tests: |got − want| <= REL · max(1, |want|).
pub const REL: f64 = 1e-6;

pub fn close(got: f64, want: f64) -> bool {
    (got - want).abs() <= REL * want.abs().max(1.0)
}

pub fn assert_close(got: f64, want: f64, what: &str) {
    assert!(
        close(got, want),
        "{what}: got {got}, want {want} (relative tolerance {REL})"
    );
}

// ---------------------------------------------------------------------------------------
// A test-side description of a network, written to JSON in the contract's shape.
// ---------------------------------------------------------------------------------------

#[derive(Debug, Clone)]
pub struct TLink {
    pub from: usize,
    pub to: usize,
    pub capacity: f64,
    pub one_way: bool,
}

#[derive(Debug, Clone)]
pub struct TDemand {
    pub from: usize,
    pub to: usize,
    pub volume: f64,
    /// `None`: the field is left out (the contract's default is the volume).
    pub required: Option<f64>,
}

#[derive(Debug, Clone, Default)]
pub struct TNet {
    pub processing: Vec<f64>,
    pub links: Vec<TLink>,
    pub demands: Vec<TDemand>,
}

pub fn site_id(v: usize) -> String {
    format!("s{v}")
}

pub fn link_id(l: usize) -> String {
    format!("l{l}")
}

impl TNet {
    pub fn to_json(&self) -> String {
        let sites: Vec<_> = self
            .processing
            .iter()
            .enumerate()
            .map(|(v, &p)| json!({"id": site_id(v), "processing": p}))
            .collect();
        let links: Vec<_> = self
            .links
            .iter()
            .enumerate()
            .map(|(l, k)| {
                json!({"id": link_id(l), "from": site_id(k.from), "to": site_id(k.to),
                       "capacity": k.capacity, "one_way": k.one_way})
            })
            .collect();
        let demands: Vec<_> = self
            .demands
            .iter()
            .map(|d| {
                let mut o = json!({"from": site_id(d.from), "to": site_id(d.to),
                                   "volume": d.volume});
                if let Some(r) = d.required {
                    o["required"] = json!(r);
                }
                o
            })
            .collect();
        json!({"name": "reference", "sites": sites, "links": links, "demands": demands}).to_string()
    }

    pub fn network(&self) -> Network {
        let text = self.to_json();
        Network::from_json(&text).unwrap_or_else(|e| panic!("valid test network refused: {e}"))
    }
}

/// The product's evaluation of `t` with the named sites and links failed, going through the
/// product's own scenario → outage path (as the command line does).
pub fn product_eval(t: &TNet, failed_sites: &[usize], failed_links: &[usize]) -> Evaluation {
    let net = t.network();
    let outage = outage_of(&net, failed_sites, failed_links);
    evaluate(&net, &outage).expect("product evaluation")
}

/// The product's outage of `net` (a [`TNet::network`]) with the sites `s{v}` and links
/// `l{l}` named failed, through its scenario → outage path (as the command line goes).
pub fn outage_of(net: &Network, failed_sites: &[usize], failed_links: &[usize]) -> Outage {
    let mut elements = Vec::new();
    for &v in failed_sites {
        elements.push(Element::Site(net.site(&site_id(v)).expect("site exists")));
    }
    for &l in failed_links {
        elements.push(Element::Link(net.link(&link_id(l)).expect("link exists")));
    }
    if elements.is_empty() {
        Outage::default()
    } else {
        Scenario::new(net, &elements).outage(net)
    }
}

/// What the reference computes for one outage.
#[derive(Debug)]
pub struct RefResult {
    pub served_required: f64,
    pub throughput: f64,
    pub stranded: f64,
    pub surviving_required: f64,
}

/// The route-and-process LP written directly from the input contract, one commodity per
/// demand (not per source as the product does), solved with microlp (simplex).
///
/// Per surviving demand d: a flow f_d in [0, cap_d]; per arc a of a surviving link an
/// unprocessed flow x0[d][a] and a processed flow x1[d][a]; per surviving site v with
/// processing a processing flow p[d][v]. Conservation per site and layer:
///   layer 0: out0 − in0 + p = f_d·[v = from_d]
///   layer 1: out1 − in1 − p = −f_d·[v = to_d]
/// Shared rows: Σ_d (x0 + x1) <= capacity per arc (each direction of a duplex link has the
/// full capacity; a one-way link only from→to); Σ_d p <= processing per site.
///
/// Failures are applied here from the contract, independently of the product: a failed
/// site loses its processing and every incident link; a demand with a failed endpoint is
/// stranded and gets no variable.
pub fn reference_lp(
    t: &TNet,
    failed_sites: &[usize],
    failed_links: &[usize],
    by_volume: bool,
) -> f64 {
    let (site_up, arcs) = surviving(t, failed_sites, failed_links);
    let live: Vec<&TDemand> = t
        .demands
        .iter()
        .filter(|d| site_up[d.from] && site_up[d.to])
        .collect();
    if live.is_empty() {
        return 0.0;
    }
    let mut lp = TwoLayer::new(t, &site_up, arcs);
    let mut objective = Expression::from(0.0);
    for d in &live {
        let cap = if by_volume {
            d.volume
        } else {
            d.required.unwrap_or(d.volume)
        };
        let f: Variable = lp.pv.add(variable().min(0.0).max(cap));
        objective += f;
        lp.commodity(d.from, d.to, Expression::from(f));
    }
    lp.maximise(objective.clone()).eval(&objective)
}

/// The sites standing (`!failed_sites`) and the arcs `(from, to, capacity)` of the links
/// standing (not failed, both ends up), both directions of a duplex link, as the contract
/// reads failures. O(links · failed).
pub fn surviving(
    t: &TNet,
    failed_sites: &[usize],
    failed_links: &[usize],
) -> (Vec<bool>, Vec<(usize, usize, f64)>) {
    let n = t.processing.len();
    let site_up: Vec<bool> = (0..n).map(|v| !failed_sites.contains(&v)).collect();
    let mut arcs: Vec<(usize, usize, f64)> = Vec::new();
    for (l, k) in t.links.iter().enumerate() {
        if failed_links.contains(&l) || !site_up[k.from] || !site_up[k.to] {
            continue;
        }
        arcs.push((k.from, k.to, k.capacity));
        if !k.one_way {
            arcs.push((k.to, k.from, k.capacity));
        }
    }
    (site_up, arcs)
}

/// The two-layer route-and-process LP under construction, one commodity at a time: per
/// commodity an unprocessed flow x0 and a processed flow x1 on every arc and a processing
/// flow p at every standing site with processing, with conservation
///   layer 0: out0 − in0 + p = amount·[v = from]
///   layer 1: out1 − in1 − p = −amount·[v = to]
/// and the shared rows Σ (x0 + x1) <= capacity per arc, Σ p <= processing per site.
pub struct TwoLayer<'a> {
    pub pv: ProblemVariables,
    t: &'a TNet,
    site_up: &'a [bool],
    arcs: Vec<(usize, usize, f64)>,
    arc_use: Vec<Expression>,
    site_use: Vec<Expression>,
    /// Conservation expressions, each must equal 0.
    balance: Vec<Expression>,
}

impl<'a> TwoLayer<'a> {
    pub fn new(t: &'a TNet, site_up: &'a [bool], arcs: Vec<(usize, usize, f64)>) -> Self {
        let n = t.processing.len();
        TwoLayer {
            pv: ProblemVariables::new(),
            t,
            site_up,
            arc_use: vec![Expression::from(0.0); arcs.len()],
            site_use: vec![Expression::from(0.0); n],
            arcs,
            balance: Vec::new(),
        }
    }

    /// Adds one commodity delivering `amount` from `from` to `to` through processing.
    pub fn commodity(&mut self, from: usize, to: usize, amount: Expression) {
        let n = self.t.processing.len();
        let pv = &mut self.pv;
        let x0: Vec<Variable> = self
            .arcs
            .iter()
            .map(|_| pv.add(variable().min(0.0)))
            .collect();
        let x1: Vec<Variable> = self
            .arcs
            .iter()
            .map(|_| pv.add(variable().min(0.0)))
            .collect();
        let mut layer0: Vec<Expression> = vec![Expression::from(0.0); n];
        let mut layer1: Vec<Expression> = vec![Expression::from(0.0); n];
        for (a, &(u, w, _)) in self.arcs.iter().enumerate() {
            layer0[u] += x0[a];
            layer0[w] -= x0[a];
            layer1[u] += x1[a];
            layer1[w] -= x1[a];
            self.arc_use[a] += x0[a];
            self.arc_use[a] += x1[a];
        }
        for v in 0..n {
            if self.site_up[v] && self.t.processing[v] > 0.0 {
                let p = pv.add(variable().min(0.0));
                layer0[v] += p;
                layer1[v] -= p;
                self.site_use[v] += p;
            }
        }
        layer0[from] -= amount.clone();
        layer1[to] += amount;
        self.balance.extend(layer0);
        self.balance.extend(layer1);
    }

    /// Maximises `objective` over the commodities added, with microlp (simplex).
    pub fn maximise(self, objective: Expression) -> impl Solution {
        let mut model = self.pv.maximise(objective).using(microlp);
        for e in self.balance {
            model.add_constraint(e.eq(0.0));
        }
        for (a, e) in self.arc_use.into_iter().enumerate() {
            model.add_constraint(e.leq(self.arcs[a].2));
        }
        for (v, e) in self.site_use.into_iter().enumerate() {
            if self.site_up[v] && self.t.processing[v] > 0.0 {
                model.add_constraint(e.leq(self.t.processing[v]));
            }
        }
        model.solve().expect("microlp solves the reference LP")
    }
}

pub fn reference(t: &TNet, failed_sites: &[usize], failed_links: &[usize]) -> RefResult {
    let mut stranded = 0.0;
    let mut surviving_required = 0.0;
    for d in &t.demands {
        let r = d.required.unwrap_or(d.volume);
        if failed_sites.contains(&d.from) || failed_sites.contains(&d.to) {
            stranded += r;
        } else {
            surviving_required += r;
        }
    }
    RefResult {
        served_required: reference_lp(t, failed_sites, failed_links, false),
        throughput: reference_lp(t, failed_sites, failed_links, true),
        stranded,
        surviving_required,
    }
}

/// 5–8 sites, each with processing (one decimal, 0.5–40) at probability 0.45, at least one
/// (12.5 at a random site when none drew any); no link, no demand yet.
pub fn random_sites(rng: &mut StdRng) -> (usize, TNet) {
    let n = rng.random_range(5..=8);
    let mut t = TNet {
        processing: (0..n)
            .map(|_| {
                if rng.random_bool(0.45) {
                    rng.random_range(5..=400) as f64 / 10.0
                } else {
                    0.0
                }
            })
            .collect(),
        ..TNet::default()
    };
    if t.processing.iter().all(|&p| p == 0.0) {
        t.processing[rng.random_range(0..n)] = 12.5;
    }
    (n, t)
}

/// A random small instance: 5–8 sites, 8–14 links (some one-way), 3–8 demands (some
/// sharing an origin, some without `required`), processing at some sites. Numbers carry
/// one decimal so the optimum is not always a whole number.
pub fn random_instance(rng: &mut StdRng) -> TNet {
    let (n, mut t) = random_sites(rng);
    let m = rng.random_range(8..=14);
    // A ring first, so most instances are connected, then random chords.
    for l in 0..m {
        let (from, to) = if l < n {
            (l, (l + 1) % n)
        } else {
            let from = rng.random_range(0..n);
            let mut to = rng.random_range(0..n - 1);
            if to >= from {
                to += 1;
            }
            (from, to)
        };
        t.links.push(TLink {
            from,
            to,
            capacity: rng.random_range(10..=300) as f64 / 10.0,
            one_way: rng.random_bool(0.3),
        });
    }
    let k = rng.random_range(3..=8);
    for i in 0..k {
        // Every third demand reuses the previous demand's origin.
        let from = if i % 3 == 2 {
            t.demands[i - 1].from
        } else {
            rng.random_range(0..n)
        };
        let mut to = rng.random_range(0..n - 1);
        if to >= from {
            to += 1;
        }
        let volume = rng.random_range(10..=250) as f64 / 10.0;
        let required = match rng.random_range(0..3) {
            0 => None,
            1 => Some(volume),
            _ => {
                // A tenth-multiple share of the volume, rounded to one decimal.
                let share = rng.random_range(0..=10) as f64 / 10.0;
                Some(((volume * share * 10.0).round() / 10.0).min(volume))
            }
        };
        t.demands.push(TDemand {
            from,
            to,
            volume,
            required,
        });
    }
    t
}

/// One-way links a→m (100), m→t (8), t→p (100), p→m (100); demand a→t of volume 50.
pub fn reuse_net(proc_a: f64, proc_t: f64, proc_p: f64) -> TNet {
    // a = 0, m = 1, t = 2, p = 3.
    let link = |from, to, capacity| TLink {
        from,
        to,
        capacity,
        one_way: true,
    };
    TNet {
        processing: vec![proc_a, 0.0, proc_t, proc_p],
        links: vec![
            link(0, 1, 100.0),
            link(1, 2, 8.0),
            link(2, 3, 100.0),
            link(3, 1, 100.0),
        ],
        demands: vec![TDemand {
            from: 0,
            to: 2,
            volume: 50.0,
            required: None,
        }],
    }
}
