//! Growth headroom (`redoubt::solve::concurrent::headroom`) against references outside the
//! product:
//!
//! - a per-demand maximum concurrent flow LP written here from the input contract
//!   (`shared/network-format.md`, section "Growth headroom"), one two-layer commodity per
//!   demand rather than per source, solved by microlp (a simplex method, through good_lp)
//!   rather than the product's interior-point backend;
//! - hand-computed cases, each worked in its comment (common practice, no source).
//!
//! Every comparison of floats uses an explicit relative tolerance.

use good_lp::{Expression, Solution, Variable, variable};
use rand::prelude::*;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::Surviving;
use redoubt::solve::concurrent::{Headroom, headroom, headroom_lp, headroom_walks};
use redoubt::solve::evaluate;

#[path = "common/reference.rs"]
mod reference;
use reference::{TDemand, TLink, TNet, TwoLayer, assert_close, outage_of, random_sites, surviving};

/// A demand of `required` units that offers exactly that (volume = required).
fn demand(from: usize, to: usize, required: f64) -> TDemand {
    TDemand {
        from,
        to,
        volume: required,
        required: Some(required),
    }
}

/// The product's headroom of `t` with the named sites and links failed, through the
/// product's scenario → outage path, and the product's shortfall there.
fn product(t: &TNet, failed_sites: &[usize], failed_links: &[usize]) -> (Headroom, f64) {
    let net = t.network();
    let outage = outage_of(&net, failed_sites, failed_links);
    let h = headroom(&net, &outage).expect("headroom");
    let shortfall = evaluate(&net, &outage).expect("evaluation").shortfall;
    (h, shortfall)
}

/// The reference: per demand `d` with a surviving endpoint pair and required `r_d > 0`, a
/// two-layer commodity (x0, x1 on every surviving arc, p at every surviving processing
/// site) delivering exactly `λ·r_d`; shared capacity rows; maximise λ. `None` when no
/// demand survives. Failures applied from the contract: a failed site loses its
/// processing and its links; a demand with a failed endpoint is left out.
fn reference(t: &TNet, failed_sites: &[usize], failed_links: &[usize]) -> Option<f64> {
    let (up, arcs) = surviving(t, failed_sites, failed_links);
    let live: Vec<(usize, usize, f64)> = t
        .demands
        .iter()
        .map(|d| (d.from, d.to, d.required.unwrap_or(d.volume)))
        .filter(|&(from, to, r)| up[from] && up[to] && r > 0.0)
        .collect();
    if live.is_empty() {
        return None;
    }
    let mut lp = TwoLayer::new(t, &up, arcs);
    let lambda: Variable = lp.pv.add(variable().min(0.0));
    for (from, to, r) in live {
        // out − in + p = λ·r at the origin (layer 0); out − in − p = −λ·r at the destination.
        lp.commodity(from, to, r * lambda);
    }
    let sol = lp.maximise(Expression::from(lambda));
    Some(sol.value(lambda))
}

/// 5–8 sites on a ring plus chords (some one-way), 2–7 demands, processing at some sites;
/// one-decimal numbers.
fn random_instance(rng: &mut StdRng) -> TNet {
    let (n, mut t) = random_sites(rng);
    for l in 0..rng.random_range(n..=n + 6) {
        let (from, to) = if l < n {
            (l, (l + 1) % n)
        } else {
            let from = rng.random_range(0..n);
            let to = (from + rng.random_range(1..n)) % n;
            (from, to)
        };
        t.links.push(TLink {
            from,
            to,
            capacity: rng.random_range(10..=300) as f64 / 10.0,
            one_way: rng.random_bool(0.3),
        });
    }
    for _ in 0..rng.random_range(2..=7) {
        let from = rng.random_range(0..n);
        let to = (from + rng.random_range(1..n)) % n;
        t.demands
            .push(demand(from, to, rng.random_range(5..=150) as f64 / 10.0));
    }
    t
}

fn path(processing: &[f64], capacities: &[f64], demands: &[(usize, usize, f64)]) -> TNet {
    TNet {
        processing: processing.to_vec(),
        links: capacities
            .iter()
            .enumerate()
            .map(|(i, &c)| TLink {
                from: i,
                to: i + 1,
                capacity: c,
                one_way: false,
            })
            .collect(),
        demands: demands
            .iter()
            .map(|&(from, to, required)| demand(from, to, required))
            .collect(),
    }
}

/// Hand case: s0 — s1 capacity 10, processing 100 at s0, required 4 from s0 to s1:
/// the link carries 10 = λ·4, so λ = 2.5.
#[test]
fn one_link_of_ten_and_four_required_gives_two_and_a_half() {
    let (h, _) = product(&path(&[100.0, 0.0], &[10.0], &[(0, 1, 4.0)]), &[], &[]);
    assert!(h.proven);
    assert_eq!(h.value, Some(2.5));
}

/// Hand case: the same, processing 6 at s0 only: λ·4 ≤ 6, λ = 1.5 (processing binds
/// before the link's 10).
#[test]
fn processing_binds_before_the_link() {
    let (h, _) = product(&path(&[6.0, 0.0], &[10.0], &[(0, 1, 4.0)]), &[], &[]);
    assert!(h.proven);
    assert_eq!(h.value, Some(1.5));
}

/// Hand case where λ differs from served / required: path s0 — s1 — s2, links of 10,
/// processing 100 at s1. Demands s0→s1 of 2 and s0→s2 of 8 share link s0–s1:
/// λ·(2 + 8) ≤ 10, so λ = 1 (both fit exactly). Served/required is 1 too, so add a third
/// demand s1→s2 of 10: link s1–s2 carries λ·(8 + 10) ≤ 10, λ = 10/18 = 0.5555…, while the
/// max-sum LP serves all 2 of s0→s1 and 10 of the 18 over s1–s2: 12 of 20 (0.6).
#[test]
fn headroom_is_not_served_over_required() {
    let t = path(
        &[0.0, 100.0, 0.0],
        &[10.0, 10.0],
        &[(0, 1, 2.0), (0, 2, 8.0), (1, 2, 10.0)],
    );
    let (h, shortfall) = product(&t, &[], &[]);
    assert!(h.proven);
    assert_close(h.value.unwrap(), 10.0 / 18.0, "λ");
    assert_close(shortfall, 8.0, "shortfall of the max-sum LP (20 − 12)");
}

/// A failed endpoint leaves its demands out; none left: no value, never infinity.
#[test]
fn no_surviving_required_demand_has_no_headroom() {
    let t = path(&[0.0, 100.0], &[10.0], &[(0, 1, 4.0)]);
    let (h, _) = product(&t, &[0], &[]);
    assert_eq!(h.value, None);
}

/// A surviving demand that no processing walk can serve: λ = 0.
#[test]
fn cut_off_demand_gives_zero() {
    let t = path(
        &[0.0, 100.0, 0.0],
        &[10.0, 10.0],
        &[(0, 1, 4.0), (2, 1, 1.0)],
    );
    let (h, _) = product(&t, &[], &[1]);
    assert_eq!(h.value, Some(0.0));
}

/// Random networks, no failure and every single failure: the product's λ equals the
/// per-demand reference within REL, and λ ≥ 1 exactly when the audit's shortfall is 0.
#[test]
fn matches_per_demand_concurrent_lp_on_random_networks() {
    let mut rng = StdRng::seed_from_u64(0x6865_6164);
    let mut checked = 0;
    for _ in 0..12 {
        let t = random_instance(&mut rng);
        let n = t.processing.len();
        let mut cases: Vec<(Vec<usize>, Vec<usize>)> = vec![(vec![], vec![])];
        cases.extend((0..n).map(|v| (vec![v], vec![])));
        cases.extend((0..t.links.len()).map(|l| (vec![], vec![l])));
        for (sites, links) in cases {
            let want = reference(&t, &sites, &links);
            let (got, shortfall) = product(&t, &sites, &links);
            let label = format!("{t:?} failing sites {sites:?} links {links:?}");
            match (want, got.value) {
                (None, None) => {}
                (Some(w), Some(g)) => {
                    assert!(got.proven, "{label}: unproven {got:?}");
                    assert_close(g, w, &label);
                    assert_eq!(
                        g >= 1.0,
                        shortfall == 0.0,
                        "{label}: λ {g}, shortfall {shortfall}"
                    );
                    checked += 1;
                }
                (w, g) => panic!("{label}: reference {w:?}, product {g:?}"),
            }
        }
    }
    assert!(checked > 100, "only {checked} comparisons");
}

/// The walk engine's headroom (column generation from the baseline's columns, as
/// `audit --headroom` runs it) against the edge λ-LP (`headroom_lp`: the source-aggregated
/// edge model solved by the interior-point backend, a second formulation and solver) on
/// random networks, no failure and every single site and link failure: equal within REL,
/// both proven; most outages are decided by the walk engine itself (a fallback would hide
/// behind the λ-LP and make this comparison vacuous).
#[test]
fn walk_engine_matches_the_edge_lambda_lp_on_random_networks() {
    let mut rng = StdRng::seed_from_u64(0x7761_6c6b);
    let (mut checked, mut fallbacks, mut inherited) = (0, 0, 0);
    for _ in 0..12 {
        let t = random_instance(&mut rng);
        let net = t.network();
        let base = Surviving::new(&net, &Outage::default(), None);
        let (_, columns, _) = headroom_walks(&net, &base, None).expect("baseline");
        let mut outages = vec![Outage::default()];
        outages.extend(
            (0..net.sites.len())
                .map(|v| Scenario::new(&net, &[Element::Site(v.into())]).outage(&net)),
        );
        outages.extend(
            (0..net.links.len())
                .map(|l| Scenario::new(&net, &[Element::Link(l.into())]).outage(&net)),
        );
        for o in outages {
            let view = Surviving::new(&net, &o, None);
            let (got, _, work) = headroom_walks(&net, &view, columns.as_ref()).expect("walks");
            let want = headroom_lp(&net, &view).expect("λ-LP");
            let label = format!("{t:?} outage {o:?}");
            match (want.value, got.value) {
                (None, None) => {}
                (Some(w), Some(g)) => {
                    assert!(got.proven && want.proven, "{label}: {got:?} vs {want:?}");
                    assert_close(g, w, &label);
                    checked += 1;
                    fallbacks += usize::from(work.fallback);
                    inherited += usize::from(work.walks.inherited);
                }
                (w, g) => panic!("{label}: λ-LP {w:?}, walk engine {g:?}"),
            }
        }
    }
    assert!(checked > 100, "only {checked} comparisons");
    assert!(
        fallbacks * 10 <= checked,
        "{fallbacks} of {checked} outages fell back to the λ-LP"
    );
    assert!(
        inherited > 0,
        "no outage was decided by the baseline's columns"
    );
}

/// The shortcuts that decide an outage without a master, each against the per-demand
/// microlp reference (a second formulation and solver): outages where the failure touches
/// no flow-carrying walk of the baseline's optimum (inherited: the baseline's λ, or the
/// baseline's allocation proving more when demands left) and outages whose cut flow the
/// greedy re-route puts back (repaired). Random networks, every single site and link
/// failure; both shortcuts must occur, so the comparison is not vacuous.
#[test]
fn shortcut_outages_match_the_per_demand_reference() {
    let mut rng = StdRng::seed_from_u64(0x7265_7061);
    let (mut inherited, mut repaired) = (0, 0);
    for _ in 0..16 {
        let t = random_instance(&mut rng);
        let net = t.network();
        let base = Surviving::new(&net, &Outage::default(), None);
        let (_, columns, _) = headroom_walks(&net, &base, None).expect("baseline");
        let mut cases: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
        cases.extend((0..t.processing.len()).map(|v| (vec![v], vec![])));
        cases.extend((0..t.links.len()).map(|l| (vec![], vec![l])));
        for (sites, links) in cases {
            let mut elements: Vec<Element> =
                sites.iter().map(|&v| Element::Site(v.into())).collect();
            elements.extend(links.iter().map(|&l| Element::Link(l.into())));
            let o = Scenario::new(&net, &elements).outage(&net);
            let view = Surviving::new(&net, &o, None);
            let (got, _, work) = headroom_walks(&net, &view, columns.as_ref()).expect("walks");
            if !(work.walks.inherited || work.walks.repaired) {
                continue;
            }
            let label = format!("{t:?} failing sites {sites:?} links {links:?} ({work:?})");
            let want = reference(&t, &sites, &links).expect("a decided outage has demand");
            assert!(got.proven, "{label}: unproven {got:?}");
            assert_close(got.value.expect("a value"), want, &label);
            inherited += usize::from(work.walks.inherited);
            repaired += usize::from(work.walks.repaired);
        }
    }
    assert!(
        inherited > 0,
        "no outage was decided by the baseline's columns"
    );
    assert!(repaired > 0, "no outage was decided by the re-route");
}

/// Outages solved by column generation with the demands the failure left whole held in
/// one bundle (the first master has a demand row only for the touched demands), and
/// outages decided without a master by re-routing every demand to the bound the
/// baseline's prices give there, each against the per-demand microlp reference (a second
/// formulation and solver): outages where the bundle held to the end, outages where
/// bundled demands had to be freed and the master built again, and outages the lowered
/// re-route decided (where it cannot decide, the outage goes on to a master and is among
/// the first two kinds). Random networks, every single site and link failure and
/// every pair of a site and a link; both kinds must occur, so the comparison is not
/// vacuous.
#[test]
fn bundled_and_lowered_outages_match_the_per_demand_reference() {
    let mut rng = StdRng::seed_from_u64(0x6275_6e64);
    let (mut held, mut freed, mut lowered) = (0, 0, 0);
    for _ in 0..40 {
        let t = random_instance(&mut rng);
        let net = t.network();
        let base = Surviving::new(&net, &Outage::default(), None);
        let (_, columns, _) = headroom_walks(&net, &base, None).expect("baseline");
        let mut cases: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
        cases.extend((0..t.processing.len()).map(|v| (vec![v], vec![])));
        cases.extend((0..t.links.len()).map(|l| (vec![], vec![l])));
        for v in 0..t.processing.len() {
            cases.extend((0..t.links.len()).map(|l| (vec![v], vec![l])));
        }
        for (sites, links) in cases {
            let mut elements: Vec<Element> =
                sites.iter().map(|&v| Element::Site(v.into())).collect();
            elements.extend(links.iter().map(|&l| Element::Link(l.into())));
            let o = Scenario::new(&net, &elements).outage(&net);
            let view = Surviving::new(&net, &o, None);
            let (got, _, work) = headroom_walks(&net, &view, columns.as_ref()).expect("walks");
            let bundled = work.walks.bundled > 0 && work.walks.lp_solves > 0;
            if work.fallback || !(bundled || work.walks.lowered) {
                continue;
            }
            let label = format!("{t:?} failing sites {sites:?} links {links:?} ({work:?})");
            let want = reference(&t, &sites, &links).expect("a solved outage has demand");
            assert!(got.proven, "{label}: unproven {got:?}");
            assert_close(got.value.expect("a value"), want, &label);
            if work.walks.lowered {
                lowered += 1;
            } else if work.walks.freed == 0 {
                held += 1;
            } else {
                freed += 1;
            }
        }
    }
    assert!(held > 0, "no bundle held to the end");
    assert!(freed > 0, "no bundled demand was freed");
    assert!(
        lowered > 0,
        "no outage was decided at the bound of the parent's prices"
    );
}
