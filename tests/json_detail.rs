//! The size of `audit --json`: the per-demand lists (`stranded_demands`,
//! `demand_shortfall`, `cut_off_demands`, `cut_off_reasons`) only in the scenarios asked
//! for (the worst `--detail-top N`, default `--top`; every one with `--detail`), the
//! document saying which; `merge` and `--resume` writing what an unsharded, uninterrupted
//! run writes with the same flags.
//!
//! Outside references: the hand-computed path network of `common::json` (which demands a
//! failure strands or cuts off, computed in the comments below), the README's contract
//! for the detail fields, and the unsharded, uninterrupted run of the same binary as the
//! reference for `merge` and `--resume` (compared byte for byte).

mod common;

use common::json::{PATH_NET, failed_of, num, scenario, scenarios};
use common::*;
use serde_json::Value;

const DETAIL_FIELDS: [&str; 4] = [
    "stranded_demands",
    "demand_shortfall",
    "cut_off_demands",
    "cut_off_reasons",
];

/// Runs `audit NET --quiet --json OUT ARGS` (exit 0 or 1) and returns the document and
/// its bytes.
fn audit_doc(net: &str, args: &[&str]) -> (Value, Vec<u8>) {
    let out = TempPath::new("detail", "json");
    let mut all = vec!["audit", net, "--quiet", "--json", out.path()];
    all.extend_from_slice(args);
    let run = redoubt(&all);
    assert!(run.code == 0 || run.code == 1, "{args:?}:\n{}", run.stderr);
    let bytes = std::fs::read(&out.0).expect("--json written");
    (out.read_json(), bytes)
}

fn has_detail(sc: &Value) -> bool {
    let present = DETAIL_FIELDS
        .iter()
        .filter(|f| sc.get(**f).is_some())
        .count();
    assert!(
        present == 0 || present == DETAIL_FIELDS.len(),
        "all four lists or none: {sc}"
    );
    assert_eq!(
        sc["detail"].as_bool(),
        Some(present > 0),
        "the object's `detail` says whether it carries the lists: {sc}"
    );
    present > 0
}

/// Hand computation on PATH_NET (a – b – c – d, demands a→b, b→c, c→d, a→d, processing
/// at a and c): failing site b strands the two demands with an end at b (a→b, b→c), and
/// cuts a→d off (its only path runs through b: "no path"), so a→d's required 1 is short
/// and served 0. With `--detail-top 0` no scenario object carries the lists (the
/// baseline does); `--detail` restores them with these values; the contract's numbers
/// are the same either way.
#[test]
fn detail_lists_are_written_only_where_asked() {
    let net = TempPath::with_text("hand-path", PATH_NET);
    let (none, _) = audit_doc(net.path(), &["--detail-top", "0"]);
    assert_eq!(none["detail"]["with_detail"], 0);
    assert_eq!(none["detail"]["scenarios"], "worst");
    for sc in scenarios(&none) {
        assert!(!has_detail(sc), "detail leaked into {sc}");
    }
    assert!(
        has_detail(&none["baseline"]),
        "the baseline keeps its lists"
    );

    let (all, _) = audit_doc(net.path(), &["--detail"]);
    assert_eq!(all["detail"]["scenarios"], "all");
    assert_eq!(
        all["detail"]["with_detail"].as_u64(),
        Some(scenarios(&all).len() as u64)
    );
    for sc in scenarios(&all) {
        assert!(has_detail(sc), "--detail: lists missing in {sc}");
    }
    let b = scenario(&all, &["site:b"]);
    let labels = |v: &Value| -> Vec<String> {
        v.as_array()
            .expect("a list")
            .iter()
            .map(|x| x.as_str().expect("a label").to_string())
            .collect()
    };
    assert_eq!(labels(&b["stranded_demands"]), ["a→b #1", "b→c #2"]);
    assert_eq!(labels(&b["cut_off_demands"]), ["a→d #4"]);
    assert_eq!(b["cut_off_reasons"]["a→d #4"], "no path");
    let short = b["demand_shortfall"].as_array().expect("a list");
    assert_eq!(short.len(), 1, "{short:?}");
    assert_eq!(short[0]["demand"], "a→d #4");
    assert_eq!(num(&short[0], "shortfall"), 1.0);
    assert_eq!(num(&short[0], "served"), 0.0);

    // The contract's values do not depend on the detail.
    for (a, n) in scenarios(&all).iter().zip(scenarios(&none)) {
        for f in [
            "served_required",
            "shortfall",
            "stranded",
            "throughput",
            "rank",
        ] {
            assert_eq!(a[f], n[f], "{f} of {:?}", failed_of(a));
        }
    }
}

/// The default on the demo at depth 1: exactly the `--top` worst distinct scenarios (and
/// those folded into them) carry the lists, and no scenario left out is worse by
/// shortfall than one kept (the ranking's first key, read here from the document's own
/// numbers). `--top 4` moves the default; `--detail-top 2` overrides it.
#[test]
fn only_the_worst_scenarios_carry_detail_by_default() {
    let demo = demo();
    for (args, want) in [
        (&[][..], 15usize),
        (&["--top", "4"][..], 4),
        (&["--top", "4", "--detail-top", "2"][..], 2),
    ] {
        let (doc, _) = audit_doc(s(&demo), args);
        assert_eq!(
            doc["detail"]["worst"].as_u64(),
            Some(want as u64),
            "{args:?}"
        );
        let all = scenarios(&doc);
        let kept: Vec<&Value> = all.iter().filter(|sc| has_detail(sc)).collect();
        let distinct = kept.iter().filter(|sc| sc.get("same_as").is_none()).count();
        assert_eq!(distinct, want.min(all.len()), "{args:?}");
        assert_eq!(
            doc["detail"]["with_detail"].as_u64(),
            Some(kept.len() as u64)
        );
        let least_kept = kept
            .iter()
            .map(|sc| num(sc, "shortfall"))
            .fold(f64::INFINITY, f64::min);
        for sc in all.iter().filter(|sc| !has_detail(sc)) {
            assert!(
                num(sc, "shortfall") <= least_kept,
                "{args:?}: {:?} is worse than a scenario with detail",
                failed_of(sc)
            );
        }
    }
}

/// Source: the README (`merge` writes exactly what the unsharded run writes; `--resume`
/// exactly what an uninterrupted run writes), here with non-default detail flags: the
/// demo at depth 2 with `--detail-top 3` in three shards merged, and with `--detail`
/// interrupted by SIGINT and resumed; each compared byte for byte with the plain run.
#[test]
fn merge_and_resume_write_the_plain_runs_detail() {
    let demo = demo();
    let dir = TempDir::new("detail-merge");
    let base = ["audit", s(&demo), "--depth", "2", "--quiet"];
    let whole = dir.0.join("whole.json");
    let run = redoubt(
        &base
            .iter()
            .copied()
            .chain(["--detail-top", "3", "--json", s(&whole)])
            .collect::<Vec<_>>(),
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    let parts: Vec<_> = (1..=3).map(|i| dir.0.join(format!("p{i}.jsonl"))).collect();
    for (i, part) in parts.iter().enumerate() {
        let shard = format!("{}/3", i + 1);
        let args: Vec<&str> = base
            .iter()
            .copied()
            .chain(["--shard", &shard, "--json", s(part)])
            .collect();
        let r = redoubt(&args);
        assert_eq!(r.code, 0, "{}", r.stderr);
    }
    let merged = dir.0.join("merged.json");
    let r = redoubt(&[
        "merge",
        s(&parts[1]),
        s(&parts[2]),
        s(&parts[0]),
        "--detail-top",
        "3",
        "--json",
        s(&merged),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let want = std::fs::read(&whole).unwrap();
    assert!(
        std::fs::read(&merged).unwrap() == want,
        "merged JSON differs"
    );
    let doc: Value = serde_json::from_slice(&want).unwrap();
    assert_eq!(doc["detail"]["worst"], 3);

    // --detail, interrupted and resumed.
    let reference = dir.0.join("reference.json");
    let r = redoubt(
        &base
            .iter()
            .copied()
            .chain(["--detail", "--json", s(&reference)])
            .collect::<Vec<_>>(),
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    let json = dir.0.join("resumed.json");
    let journal = dir.0.join("resumed.json.journal");
    let args: Vec<&str> = base
        .iter()
        .copied()
        .chain(["--detail", "--json", s(&json)])
        .collect();
    let first = interrupt_at(&args, &journal, 40);
    assert_eq!(first.code, 130, "{}", first.stderr);
    let resume: Vec<&str> = args.iter().copied().chain(["--resume"]).collect();
    let last = redoubt(&resume);
    assert_eq!(last.code, 0, "{}", last.stderr);
    let full = std::fs::read(&reference).unwrap();
    assert!(
        std::fs::read(&json).unwrap() == full,
        "resumed JSON differs"
    );
    let doc: Value = serde_json::from_slice(&full).unwrap();
    assert!(scenarios(&doc).iter().all(has_detail));
}

/// A document whose compact form is over 1 MiB is written on one line (compact); a small
/// one pretty-printed. A ring of 120 sites at depth 2 of links: 7,261 scenarios (the
/// baseline, 120 singles, 120 · 119 / 2 doubles), over 1 MiB; the path network at depth 1:
/// a few kilobytes.
#[test]
fn large_documents_are_compact_small_ones_pretty() {
    let net = TempPath::with_text("hand-path", PATH_NET);
    let (_, small) = audit_doc(net.path(), &[]);
    let lines = small.iter().filter(|&&c| c == b'\n').count();
    assert!(
        lines > 50,
        "a small document is pretty-printed ({lines} lines)"
    );
    let ring = TempPath::with_text("ring", &common::json::ring_net(120));
    let (doc, big) = audit_doc(ring.path(), &["--kinds", "links", "--depth", "2"]);
    assert!(big.len() > 1 << 20, "{} bytes", big.len());
    assert_eq!(
        big.iter().filter(|&&c| c == b'\n').count(),
        1,
        "a large document is one line and a newline"
    );
    assert_eq!(scenarios(&doc).len(), 1 + 120 + 120 * 119 / 2);
}
