//! Solving one outage exactly: the two-layer LP ([`flow`]), the backends ([`lp`]), an
//! independent optimality certificate ([`certify`]) and a verifier ([`verify`]), all on one
//! view of the surviving network ([`surviving`]).
//!
//! [`evaluate`] is the unit of work the audit runs in parallel; it is a pure function of
//! the network and the outage, so results do not depend on thread count or order.
//!
//! **Nothing is reported that is not verified.** Every LP answer is checked in the file's
//! units: its row residuals ([`verify::residual`]), a feasible allocation rebuilt from it
//! by flow decomposition ([`verify::repair`], a proven lower bound) and the dual bound of
//! its shadow prices ([`certify::dual_bound`], a proven upper bound). A result is
//! *proven* when the residual is within [`RESIDUAL_TOL`] and the two bounds meet within
//! [`GAP_TOL`] of the demand at stake. Otherwise the LP is solved again by the next
//! backend of [`LADDER`] (tighter interior point, then simplex with an explicit dual), the
//! best bounds of all attempts are kept, and a result still open is reported as
//! *unproven* with its bounds: its served value is then the proven lower bound, so a
//! shortfall is never understated.

pub mod approx;
pub mod cancel;
pub mod certify;
pub mod chain;
mod chain_use;
pub mod chainwalk;
pub mod colgen;
pub mod concurrent;
pub mod edge;
pub mod engine;
pub mod evaluator;
pub mod finish;
pub mod flow;
pub mod gub;
#[cfg(feature = "highs")]
pub mod highs;
pub mod lp;
mod pivoting;
pub mod recheck;
pub mod simplex;
pub mod surviving;
pub mod types;
pub mod verify;

use crate::error::Result;
use crate::model::Network;
use crate::scenario::Outage;
pub use edge::{
    at_stake, baseline_cut_off, caps_of, meets, needs_volume_lp, solve_flow, solve_verified,
    solve_verified_with,
};
pub use engine::Engine;
use evaluator::Evaluator;
pub(crate) use finish::DemandSplit;
pub use finish::{NOISE, finish, finish_with, flow_scales, reported_in, shortfall_of, simplest_in};
use lp::Backend;
pub use surviving::{Surviving, Unservable};
pub use types::{Bottleneck, Evaluation, FunctionUse, Resource, Verification, Verified};

/// The tolerances of verification, under the names callers use (defined and explained in
/// [`crate::tol`]): `TOL` is [`crate::tol::RELATIVE_TOL`], `GAP_TOL` the proof gap
/// [`crate::tol::PROOF_GAP_TOL`] (not the walk engine's stopping gap `colgen::GAP_TOL`).
pub use crate::tol::{PROOF_GAP_TOL as GAP_TOL, RELATIVE_TOL as TOL, RESIDUAL_TOL, SATURATED};

/// The pure-Rust backends, tried in turn until a result is proven: the whole ladder of the
/// default build, and the rungs after HiGHS with the `highs` feature.
pub static LADDER: [&dyn Backend; 3] = [&lp::CLARABEL, &lp::CLARABEL_TIGHT, &lp::Simplex];

/// With the `highs` feature: HiGHS's dual simplex first (a vertex with exact basis duals,
/// usually proven at once and faster than the interior point on carrier-sized edge LPs),
/// then [`LADDER`].
#[cfg(feature = "highs")]
pub static HIGHS_LADDER: [&dyn Backend; 4] = [
    &highs::HIGHS,
    &lp::CLARABEL,
    &lp::CLARABEL_TIGHT,
    &lp::Simplex,
];

/// The backends every verified solve climbs: `HIGHS_LADDER` when the `highs` feature is
/// built and HiGHS is enabled (`highs::set_enabled`), else [`LADDER`]. O(1).
pub fn ladder() -> &'static [&'static dyn Backend] {
    #[cfg(feature = "highs")]
    if highs::enabled() {
        return &HIGHS_LADDER;
    }
    &LADDER
}

/// Solves one outage: served_required, shortfall, stranded, throughput (a second LP only
/// when some surviving demand's volume exceeds its required part), one optimal allocation,
/// its bottlenecks and the shadow prices, and the proven bounds (see the module
/// documentation).
///
/// Cost: one or two verified LP solves of the size given in [`flow::build`].
///
/// A network with `functions` is solved by the layered LP of service chains
/// ([`chain::evaluate`]).
pub fn evaluate(net: &Network, outage: &Outage) -> Result<Evaluation> {
    if net.chains.is_some() {
        return chain::evaluate(net, outage);
    }
    Ok(evaluator::Edge.evaluate(net, outage, None)?.evaluation)
}

/// [`evaluate`] by the walk engine started cold ([`evaluator::Walks`]): the same verified
/// result (an unproven walk answer falls back to the edge LP's ladder), usually faster on
/// networks of tens of sites.
///
/// A network with `functions` is solved by the layered walk engine of service chains
/// started cold ([`chainwalk::evaluate_walks`]).
pub fn evaluate_cold_walks(net: &Network, outage: &Outage) -> Result<Evaluation> {
    if net.chains.is_some() {
        return Ok(chainwalk::evaluate_walks(net, outage, None)?.evaluation);
    }
    Ok(evaluator::Walks.evaluate(net, outage, None)?.evaluation)
}

/// Adds each count to its total (`*total += count` for every pair): how the work counts
/// of several runs are merged. O(pairs).
pub fn add_counts<T: std::ops::AddAssign + Copy, const N: usize>(pairs: [(&mut T, T); N]) {
    for (total, count) in pairs {
        *total += count;
    }
}

/// The verification of a result checked in one attempt: the served lower bound `lower`
/// of a feasible allocation, the certified `upper`, the solution's `residual`; proven when
/// [`meets`] holds relative to `at_stake`. O(1).
pub(crate) fn one_attempt(
    residual: f64,
    lower: f64,
    upper: f64,
    at_stake: f64,
    backend: String,
) -> Verification {
    Verification {
        proven: meets(residual, lower, upper, at_stake),
        lower,
        upper,
        residual,
        attempts: 1,
        backend,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::test_net as net;

    /// IEEE 754 subnormals (common practice, no source): the midpoint of the smallest
    /// positive doubles underflows to 0, which has no power of ten; the interval's own
    /// ends are returned instead of a panic.
    #[test]
    fn simplest_in_subnormal_intervals() {
        let tiny = f64::from_bits(1);
        assert_eq!(simplest_in(tiny, tiny, 1.0), tiny);
        let x = simplest_in(tiny, 8.0 * tiny, 1.0);
        assert!((tiny..=8.0 * tiny).contains(&x), "{x:e}");
        assert_eq!(simplest_in(104.99999997, 105.00000002, 0.0), 105.0);
    }

    /// The one-way ring s→m→t→p→m (capacities 100 but m→t at 10) with processing 100 at
    /// the site `at` only and one demand s→t of volume 50 (the arc-reuse case below).
    pub(super) fn reuse_ring(at: &str) -> Network {
        let sites: Vec<String> = ["s", "m", "t", "p"]
            .iter()
            .map(|&v| {
                if v == at {
                    format!(r#"{{"id":"{v}","processing":100}}"#)
                } else {
                    format!(r#"{{"id":"{v}"}}"#)
                }
            })
            .collect();
        net(&format!(
            r#"{{"sites":[{}],
            "links":[{{"id":"sm","from":"s","to":"m","capacity":100,"one_way":true}},
                     {{"id":"mt","from":"m","to":"t","capacity":10,"one_way":true}},
                     {{"id":"tp","from":"t","to":"p","capacity":100,"one_way":true}},
                     {{"id":"pm","from":"p","to":"m","capacity":100,"one_way":true}}],
            "demands":[{{"from":"s","to":"t","volume":50}}]}}"#,
            sites.join(",")
        ))
    }

    /// Arc reuse (common practice, no source: it is how a walk that revisits an arc
    /// consumes it). One-way ring s→m→t→p→m, processing only at p, demand s→t: the walk
    /// s→m→t→p→m→t crosses arc m→t (capacity 10) twice, once unprocessed and once
    /// processed, so only 5 units get through. With processing at the origin it is
    /// crossed once and carries all 10.
    #[test]
    fn walk_reusing_an_arc_halves_it() {
        let n = reuse_ring("p");
        let e = evaluate(&n, &Outage::default()).unwrap();
        assert!(
            (e.served_required - 5.0).abs() < 1e-6,
            "{}",
            e.served_required
        );
        // With processing at the origin, the arc is crossed once and carries all of it.
        let n2 = reuse_ring("s");
        let e2 = evaluate(&n2, &Outage::default()).unwrap();
        assert!((e2.served_required - 10.0).abs() < 1e-6);
        assert!(e2.certified_gap() < 1e-6, "{e2:?}");
    }

    /// Hand-worked: the reported value of a proven interval never exceeds what is offered,
    /// and is the offered amount itself whenever the interval reaches it.
    #[test]
    fn reported_values_stay_within_the_offer() {
        assert_eq!(reported_in(149.99999999, 150.00000002, 150.0), 150.0);
        assert_eq!(reported_in(150.00000001, 150.00000002, 150.0), 150.0);
        assert_eq!(reported_in(104.999999979, 105.00000001, 150.0), 105.0);
        assert_eq!(reported_in(89.99999, 90.00001, 150.0), 90.0);
        let odd = 0.1 + 0.2 + 149.7;
        assert!(reported_in(odd - 1e-9, odd + 1e-9, odd) <= odd);
        // Crossing bounds above the offer (solver noise) still report the offer.
        assert_eq!(reported_in(150.2, 150.1, 150.0), 150.0);
    }

    /// Hand-worked: 7e11 + 2.5e-6 − 7e11 is 0 in floating point; summed apart it is not.
    #[test]
    fn a_small_cut_off_part_is_not_lost() {
        let surviving = 7e11 + 2.5e-6;
        assert_eq!(surviving - 7e11, 0.0);
        assert_eq!(shortfall_of(2.5e-6, 7e11, 7e11), 2.5e-6);
        assert_eq!(shortfall_of(0.0, 20.0, 8.0), 12.0);
    }

    /// Hand-worked: demands from the same origin share its scale, others keep their own.
    #[test]
    fn flow_scales_are_per_origin() {
        let n = net(
            r#"{"sites":[{"id":"a","processing":10},{"id":"b"},{"id":"c"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1}],
            "demands":[{"from":"a","to":"b","volume":7},{"from":"a","to":"c","volume":0.5},
                       {"from":"b","to":"a","volume":2}]}"#,
        );
        assert_eq!(flow_scales(&n, &[true, true, true]), vec![7.5, 7.5, 2.0]);
        assert_eq!(flow_scales(&n, &[true, false, true]), vec![7.0, 0.5, 2.0]);
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
        assert_eq!(e.bottlenecks[0].resource, Resource::Site(0.into()));
        assert!(e.certified_gap() < 1e-6);
    }
}
