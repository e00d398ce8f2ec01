//! The walk engine (column generation, `redoubt::solve::colgen`) checked against the
//! product's edge LP and the per-demand reference LP solved by microlp (a second
//! formulation written from the input contract, a different solver), and against
//! hand-computed arc-reuse cases (common practice, no source). The shared reference
//! helpers live in `tests/common/reference.rs`.
//!
//! Every comparison of floats uses an explicit relative tolerance.

use rand::prelude::*;
use redoubt::scenario::{Element, Outage, Scenario};
use redoubt::solve::Evaluation;

#[path = "common/reference.rs"]
mod reference_common;
use reference_common::*;

// ---------------------------------------------------------------------------------------
// The walk engine (column generation, `redoubt::solve::colgen`) against the edge LP and
// the microlp per-demand reference.
// ---------------------------------------------------------------------------------------

/// The walk engine's evaluation of `t` under the failures, cold (`parent` false) or started
/// from the baseline's optimal walks (`parent` true, which exercises the repair shortcuts).
fn walk_eval(
    t: &TNet,
    failed_sites: &[usize],
    failed_links: &[usize],
    parent: bool,
) -> redoubt::solve::colgen::Walked {
    use redoubt::solve::colgen::evaluate_walks;
    let net = t.network();
    let mut elements = Vec::new();
    for &v in failed_sites {
        elements.push(Element::Site(net.site(&site_id(v)).expect("site exists")));
    }
    for &l in failed_links {
        elements.push(Element::Link(net.link(&link_id(l)).expect("link exists")));
    }
    let outage = if elements.is_empty() {
        Outage::default()
    } else {
        Scenario::new(&net, &elements).outage(&net)
    };
    let base = parent.then(|| evaluate_walks(&net, &Outage::default(), None).expect("baseline"));
    evaluate_walks(&net, &outage, base.as_ref().map(|b| &b.basis)).expect("walk engine")
}

/// Checks one walk-engine evaluation against the edge LP's and the microlp reference.
fn compare_walks(got: &Evaluation, edge: &Evaluation, want: &RefResult, label: &str) {
    // Source: the per-demand formulation solved by microlp (simplex).
    assert_close(
        got.served_required,
        want.served_required,
        &format!("{label}: walks served_required vs microlp per-demand LP"),
    );
    assert_close(
        got.throughput,
        want.throughput,
        &format!("{label}: walks throughput vs microlp per-demand LP"),
    );
    // Source: the product's edge LP (clarabel), an independent formulation.
    assert_close(
        got.shortfall,
        edge.shortfall,
        &format!("{label}: walks shortfall vs edge LP"),
    );
    assert_close(got.stranded, edge.stranded, &format!("{label}: stranded"));
    assert_eq!(got.cut_off, edge.cut_off, "{label}: cut-off demands");
    // Source: the microlp per-demand optimum again: the walk engine's upper bound (weak
    // duality on its prices) must meet the reference's optimum, not merely its own value.
    assert_close(
        got.upper_bound,
        want.served_required,
        &format!("{label}: walks upper bound vs microlp per-demand LP"),
    );
    assert!(
        got.max_violation < REL,
        "{label}: violation {}",
        got.max_violation
    );
    // Per-demand flows are one optimal allocation: they must sum to the microlp optimum.
    let sum: f64 = got.demand_flow.iter().sum();
    assert_close(
        sum,
        want.served_required,
        &format!("{label}: Σ demand flows vs microlp per-demand LP"),
    );
}

/// Source: the microlp per-demand reference and the edge LP, on seeded random networks
/// with random link and site failures, the walk engine both cold and started from the
/// baseline's walks. The instances must cover processing-bound, link-bound and cut-off
/// cases, and the shortcuts must decide some of them, or the comparison would be idle.
#[test]
fn walk_engine_matches_edge_lp_and_reference_under_failures() {
    let (mut proc_bound, mut link_bound, mut cut_off, mut shortcut) = (0, 0, 0, 0);
    for seed in 0..40u64 {
        let mut rng = StdRng::seed_from_u64(0xc01_0000 + seed);
        let t = random_instance(&mut rng);
        let n = t.processing.len();
        let m = t.links.len();
        let mut failed_links: Vec<usize> = Vec::new();
        for _ in 0..rng.random_range(0..=2) {
            let l = rng.random_range(0..m);
            if !failed_links.contains(&l) {
                failed_links.push(l);
            }
        }
        let failed_sites: Vec<usize> = if rng.random_bool(0.3) {
            vec![rng.random_range(0..n)]
        } else {
            Vec::new()
        };
        let want = reference(&t, &failed_sites, &failed_links);
        let edge = product_eval(&t, &failed_sites, &failed_links);
        for parent in [false, true] {
            let w = walk_eval(&t, &failed_sites, &failed_links, parent);
            let label = format!(
                "seed {seed}, parent {parent}, sites {failed_sites:?} links {failed_links:?}"
            );
            compare_walks(&w.evaluation, &edge, &want, &label);
            assert_eq!(w.stats.fallback, 0, "{label}: fell back to the edge LP");
            if parent {
                shortcut += w.stats.no_flow + w.stats.repaired;
            }
        }
        if edge.shortfall > 1e-6 {
            proc_bound += usize::from(!edge.saturated_sites().is_empty());
            link_bound +=
                usize::from(edge.bottlenecks.iter().any(|b| {
                    matches!(b.resource, redoubt::solve::Resource::Arc(_)) && b.price > 1e-6
                }));
        }
        cut_off += usize::from(!edge.cut_off.is_empty());
    }
    assert!(proc_bound >= 3, "only {proc_bound} processing-bound cases");
    assert!(link_bound >= 3, "only {link_bound} link-bound cases");
    assert!(cut_off >= 2, "only {cut_off} cases with cut-off demands");
    assert!(shortcut >= 5, "shortcuts decided only {shortcut} LPs");
}

/// Hand-computed (common practice, no source), as in `arc_reuse_halves_the_arc`: the walk
/// engine prices a walk that crosses m→t before and after processing at twice the arc's
/// price, so it serves 4, 8, 8 and 5 units in the four cases; the microlp reference agrees.
#[test]
fn walk_engine_arc_reuse() {
    for (procs, want) in [
        ((0.0, 0.0, 100.0), 4.0),
        ((100.0, 0.0, 0.0), 8.0),
        ((0.0, 100.0, 0.0), 8.0),
        ((2.0, 0.0, 100.0), 5.0),
    ] {
        let t = reuse_net(procs.0, procs.1, procs.2);
        let w = walk_eval(&t, &[], &[], false).evaluation;
        assert_close(
            w.served_required,
            want,
            &format!("walks, processing {procs:?}"),
        );
        assert_close(
            reference(&t, &[], &[]).served_required,
            want,
            &format!("microlp reference, processing {procs:?}"),
        );
        // The upper bound against the hand value, not against the product's own served.
        assert_close(
            w.upper_bound,
            want,
            &format!("walks upper bound, processing {procs:?}"),
        );
    }
}
