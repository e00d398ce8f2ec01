//! Hand-worked checks of the (1−ε) engine (each computation in its comment).

use super::*;
use crate::model::test_net as net;

/// Hand case (computed here): path s–v–t, both links capacity 10, processing 4 at v
/// only, one demand s→t requiring 6. Every walk is processed at v, so at most 4 is
/// served; the walk s→v→t carries 4 within the links' 10. Optimum 4, certified by the
/// price 1 on v's processing: 4·1 + 6·max(0, 1 − 1) = 4.
#[test]
fn path_with_processing_in_the_middle() {
    let n = net(r#"{
        "sites":[{"id":"s"},{"id":"v","processing":4},{"id":"t"}],
        "links":[{"id":"sv","from":"s","to":"v","capacity":10},
                 {"id":"vt","from":"v","to":"t","capacity":10}],
        "demands":[{"from":"s","to":"t","volume":6}]}"#);
    for eps in [0.01, 0.1, 0.5] {
        let e = evaluate_approx(&n, &Outage::default(), eps).unwrap();
        let v = &e.verification;
        assert!(v.lower <= 4.0 + 1e-9 && v.upper >= 4.0 - 1e-9, "{v:?}");
        assert!(v.upper - v.lower <= eps * 6.0, "{v:?}");
        assert!(e.served_required <= 4.0 + 1e-9);
    }
}

/// Hand-worked: `4θ + 6·max(0, 1 − θ)` is least at θ = 1, value 4; with no demand
/// term left to gain the best scale is 0 (value 0).
#[test]
fn best_scale_of_a_hand_case() {
    let (v, th) = best_scale(4.0, &[(6.0, 1.0)]);
    assert!(
        (v - 4.0).abs() < 1e-12 && (th - 1.0).abs() < 1e-12,
        "{v} {th}"
    );
    assert_eq!(best_scale(3.0, &[]), (0.0, 0.0));
    // Two demands (hand-worked): 2θ + 5·max(0,1−θ) + 1·max(0,1−θ/2): slope −4 on
    // [0,1), +1.5 after θ = 1, so the least is at θ = 1: 2 + 0 + 0.5 = 2.5.
    let (v, th) = best_scale(2.0, &[(5.0, 1.0), (1.0, 0.5)]);
    assert!(
        (v - 2.5).abs() < 1e-12 && (th - 1.0).abs() < 1e-12,
        "{v} {th}"
    );
}

/// ε outside (0, 0.5] is refused, never run.
#[test]
fn epsilon_range() {
    assert!(epsilon_ok(0.01) && epsilon_ok(0.5));
    assert!(!epsilon_ok(0.0) && !epsilon_ok(0.51) && !epsilon_ok(f64::NAN));
    let n = net(r#"{"sites":[{"id":"a","processing":1},{"id":"b"}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":1}],
        "demands":[{"from":"a","to":"b","volume":1}]}"#);
    assert!(evaluate_approx(&n, &Outage::default(), 0.0).is_err());
}

/// The walk-reuse case of the edge LP's tests (hand-computed there): one-way ring
/// s→m→t→p→m with processing only at p; the walk crosses m→t (capacity 10) twice, so 5
/// is the optimum. The approximate interval holds 5 and is at most ε·50 wide.
#[test]
fn arc_crossed_twice() {
    let n = crate::solve::tests::reuse_ring("p");
    let e = evaluate_approx(&n, &Outage::default(), 0.05).unwrap();
    let v = &e.verification;
    assert!(v.lower <= 5.0 + 1e-9 && v.upper >= 5.0 - 1e-9, "{v:?}");
    assert!(v.upper - v.lower <= 0.05 * 50.0, "{v:?}");
    // The stored proof passes the re-check of journaled results.
    super::super::recheck::recheck(&n, &Outage::default(), &e).unwrap();
}

/// Processing is what runs out (hand-built): a 12-site ring with links of capacity 1,000
/// in both directions and processing 3 at sites 0, 4 and 8 (9 in all), eleven demands
/// of 2 from site 1 to every other site (22 in all). Links carry far more than any walk
/// needs, so the three sites fill: the optimum is 9, certified by the price 1 on each
/// site (`9·1 + Σ b·max(0, 1 − 1) = 9`). The interval must close at 9 and be proven:
/// the scaled lengths alone stop anywhere within ε·22 of it.
#[test]
fn processing_bound_network_closes_exactly() {
    let sites: Vec<String> = (0..12)
        .map(|i| {
            let p = if i % 4 == 0 { 3 } else { 0 };
            format!(r#"{{"id":"v{i}","processing":{p}}}"#)
        })
        .collect();
    let links: Vec<String> = (0..12)
        .map(|i| {
            format!(
                r#"{{"id":"l{i}","from":"v{i}","to":"v{}","capacity":1000}}"#,
                (i + 1) % 12
            )
        })
        .collect();
    let demands: Vec<String> = (0..12)
        .filter(|&j| j != 1)
        .map(|j| format!(r#"{{"from":"v1","to":"v{j}","volume":2}}"#))
        .collect();
    let n = net(&format!(
        r#"{{"sites":[{}],"links":[{}],"demands":[{}]}}"#,
        sites.join(","),
        links.join(","),
        demands.join(",")
    ));
    for eps in [0.01, 0.1] {
        let e = evaluate_approx(&n, &Outage::default(), eps).unwrap();
        let v = &e.verification;
        assert!(v.proven, "{v:?}");
        assert!(
            (v.lower - 9.0).abs() < 1e-9 && (v.upper - 9.0).abs() < 1e-9,
            "{v:?}"
        );
    }
}
