//! The (1−ε) engine on files with `functions` (`audit --engine approx --epsilon E`),
//! through the binary: on random small networks with random chains of 0 to 3 functions and
//! random gains, every scenario at depth 1 (baseline, every single link and every single
//! site failure) reports an interval `[served_required, upper_bound]` (and its throughput
//! interval `[throughput, …]`) that holds the exact optimum of a per-demand layered LP
//! written from the input contract and solved by microlp (`tests/common/chain_reference.rs`:
//! a second formulation on a second solver; the engine works on layered walks with
//! multiplicative lengths and shares no solver with it), and is at most `E × required`
//! wide.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{REL, failed_element, random_net, reference_served};
use common::json::{audit_json, failed_of, num, scenarios};
use common::{TempPath, redoubt};
use rand::prelude::*;

/// `want` lies in `[lower, upper]` (within the reference's relative tolerance [`REL`]).
fn assert_within(lower: f64, upper: f64, want: f64, what: &str) {
    let slack = REL * want.abs().max(1.0);
    assert!(
        lower <= want + slack && want <= upper + slack,
        "{what}: exact {want} outside [{lower}, {upper}]"
    );
}

#[test]
fn intervals_hold_the_reference_optimum_and_are_epsilon_wide() {
    let mut rng = StdRng::seed_from_u64(0xA99_C4A1);
    let mut scenarios_seen = 0;
    let mut open = 0;
    for instance in 0..12 {
        let t = random_net(&mut rng);
        let file = TempPath::with_text("chains-approx", &t.to_json().to_string());
        for eps in [0.1, 0.02] {
            let e = eps.to_string();
            let (_, doc) = audit_json(
                file.path(),
                &["--depth", "1", "--engine", "approx", "--epsilon", &e],
            );
            let list = scenarios(&doc);
            assert_eq!(
                list.len(),
                1 + t.capacity.len() + t.links.len(),
                "baseline and every single link and site failure"
            );
            for sc in list {
                let (site, link) = failed_element(sc);
                let what = format!("instance {instance}, ε {eps}, failed {:?}", failed_of(sc));
                let served = num(sc, "served_required");
                let upper = num(sc, "upper_bound");
                let required = num(sc, "required");
                let want = reference_served(&t, site, link, false);
                assert_within(served, upper, want, &what);
                assert!(
                    upper - served <= eps * required + 1e-9 * required.max(1.0),
                    "{what}: [{served}, {upper}] wider than {eps} × {required}"
                );
                // The throughput is the proven lower bound of the volume LP: never above
                // the exact throughput.
                let want_tp = reference_served(&t, site, link, true);
                let tp = num(sc, "throughput");
                assert!(
                    tp <= want_tp + REL * want_tp.max(1.0),
                    "{what}: throughput {tp} above the exact {want_tp}"
                );
                scenarios_seen += 1;
                if sc["verification"]["status"] != "proven" {
                    open += 1;
                }
            }
        }
    }
    assert!(scenarios_seen > 150, "only {scenarios_seen} scenarios");
    println!("{scenarios_seen} scenarios, {open} left as open intervals");
}

/// Hand case (common practice, no source: the input contract's arithmetic), the path of
/// the walk engine's unit tests: a — b — c — d, `fw` (gain 1) at b (capacity 8), `scrub`
/// (gain 0.5) at c (100); ab and bc 10, cd 3; one demand a→d of 10 with chain fw > scrub.
/// F origin units put F on ab, bc, fw and scrub and 0.5·F on cd, so F ≤ min(10, 10, 8,
/// 100, 3 / 0.5) = 6. At ε = 0.05 the interval holds 6 and is at most 0.05 × 10 wide, and
/// the note names the engine.
#[test]
fn hand_path_holds_six() {
    let file = TempPath::with_text(
        "chains-approx-path",
        r#"{"functions":[{"id":"fw","gain":1},{"id":"scrub","gain":0.5}],
        "sites":[{"id":"a"},{"id":"b","functions":{"fw":8}},
                 {"id":"c","functions":{"scrub":100}},{"id":"d"}],
        "links":[{"id":"ab","from":"a","to":"b","capacity":10},
                 {"id":"bc","from":"b","to":"c","capacity":10},
                 {"id":"cd","from":"c","to":"d","capacity":3}],
        "demands":[{"from":"a","to":"d","volume":10,"chain":["fw","scrub"]}]}"#,
    );
    let out = TempPath::new("chains-approx-path", "json");
    let run = redoubt(&[
        "audit",
        file.path(),
        "--engine",
        "approx",
        "--epsilon",
        "0.05",
        "--json",
        out.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stderr.contains("(1−ε) engine"),
        "the note names the engine: {}",
        run.stderr
    );
    let doc = out.read_json();
    let base = &scenarios(&doc)[0];
    let (served, upper) = (num(base, "served_required"), num(base, "upper_bound"));
    assert_within(served, upper, 6.0, "hand path");
    assert!(upper - served <= 0.05 * 10.0 + 1e-9, "[{served}, {upper}]");
}
