//! Files with service chains (`functions`) through the commands beyond a plain audit:
//! several traffic matrices, shards and `merge`, `--resume`, `compare`. Outside references:
//! the per-demand layered LP on microlp of `tests/common/chain_reference.rs` (a second
//! formulation on a second solver, written from the input contract), the contract's own
//! statements ("every scenario is evaluated under every matrix"; a file holding one matrix
//! as its `demands` is that matrix), and hand calculations written out beside each check.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{RNet, assert_close, failed_element, random_net, reference_served};
use common::json::{alone, audit_bytes, audit_json, compare_json, failed_of, num, pair, scenarios};
use common::{TempPath, redoubt};
use rand::prelude::*;
use serde_json::{Value, json};

/// A second traffic matrix for `t`: every demand at 1.6 times its volume and required
/// (a busy hour), the last one dropped and a new plain demand between the first two sites.
fn busy_hour(t: &RNet) -> RNet {
    let mut demands: Vec<_> = t
        .demands
        .iter()
        .map(|(a, b, v, r, c)| (*a, *b, v * 1.6, r * 1.6, c.clone()))
        .collect();
    demands.pop();
    demands.push((0, 1, 7.5, 5.0, Vec::new()));
    RNet {
        gains: t.gains.clone(),
        capacity: t.capacity.clone(),
        links: t.links.clone(),
        demands,
    }
}

/// `t`'s file with `peak` as a second matrix named `busy`.
fn with_matrix(t: &RNet, peak: &RNet) -> String {
    let mut v = t.to_json();
    let busy = peak.to_json()["demands"].clone();
    v["matrices"] = json!([{"id": "busy", "demands": busy}]);
    v.to_string()
}

/// Every scenario at depth 1 under every matrix of a chain file with `matrices`: the
/// per-demand microlp reference on that matrix's demands gives its served_required and
/// throughput, and the audit of a file holding that matrix alone as its `demands` gives the
/// same scenario objects' values; `--matrix busy` lists exactly the busy pairs. Both chain
/// engines.
#[test]
fn every_scenario_under_every_matrix_equals_the_matrix_alone() {
    let mut rng = StdRng::seed_from_u64(0x0C4A_13A7);
    for instance in 0..6 {
        let t = random_net(&mut rng);
        let peak = busy_hour(&t);
        let text = with_matrix(&t, &peak);
        let file = TempPath::with_text("chain-mx", &text);
        for engine in ["walks", "edge"] {
            let args = ["--threads", "1", "--depth", "1", "--engine", engine];
            let (_, doc) = audit_json(file.path(), &args);
            let per = 1 + t.capacity.len() + t.links.len();
            assert_eq!(
                scenarios(&doc).len(),
                2 * per,
                "each scenario under each matrix"
            );
            for (m, net) in [("base", &t), ("busy", &peak)] {
                let one = TempPath::with_text("chain-mx-alone", &alone(&text, m));
                let (_, lone) = audit_json(one.path(), &args);
                for sc in scenarios(&lone) {
                    let names = failed_of(sc);
                    let names: Vec<&str> = names.iter().map(String::as_str).collect();
                    let got = pair(&doc, &names, m);
                    let what = format!("instance {instance}, {engine}, {names:?} under {m}");
                    assert_eq!(got["verification"]["status"], "proven", "{what}");
                    let (site, link) = failed_element(sc);
                    for (field, by_volume) in [("served_required", false), ("throughput", true)] {
                        let want = reference_served(net, site, link, by_volume);
                        assert_close(num(got, field), want, &format!("{what}: {field}"));
                        assert_close(num(sc, field), want, &format!("{what}: {field} alone"));
                    }
                    // The engines may stop at another point of the proven interval (a
                    // matrix other than `base` starts cold in the file with matrices).
                    assert_close(num(got, "shortfall"), num(sc, "shortfall"), &what);
                }
            }
            let mut sel = args.to_vec();
            sel.extend(["--matrix", "busy"]);
            let (_, busy) = audit_json(file.path(), &sel);
            assert_eq!(scenarios(&busy).len(), per);
            assert!(scenarios(&busy).iter().all(|sc| sc["matrix"] == "busy"));
        }
    }
}

/// Hand-worked file with two matrices: a path a → b → c (links 20 each), firewall `fw`
/// (gain 1) only at b with capacity 10. Base: a→c 8 through fw (fits). Evening: a→c 14
/// through fw, so 4 short at b's firewall whatever else fails; the closing buys 4 of fw at b
/// (the only slot, cost 2 per unit: 8). A plan over both matrices covers the evening
/// baseline (every failure of a, b, ab or bc cuts a→c off, which no purchase mends): the
/// same 4 units, cost 8; with the plan applied, both baselines serve all.
#[test]
fn closings_and_plans_cover_every_matrix() {
    let text = json!({
        "functions": [{"id": "fw", "gain": 1}],
        "sites": [{"id": "a"}, {"id": "b", "functions": {"fw": 10},
                   "expand": {"fw": {"cost": 2, "max": 50}}}, {"id": "c"}],
        "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 20},
                  {"id": "bc", "from": "b", "to": "c", "capacity": 20}],
        "demands": [{"from": "a", "to": "c", "volume": 8, "chain": ["fw"]}],
        "matrices": [{"id": "evening", "demands": [
            {"from": "a", "to": "c", "volume": 14, "chain": ["fw"]}]}]
    })
    .to_string();
    let file = TempPath::with_text("chain-mx-hand", &text);
    let (_, doc) = audit_json(file.path(), &["--depth", "1", "--close"]);
    let evening = pair(&doc, &[], "evening");
    assert_eq!(
        num(evening, "shortfall"),
        4.0,
        "14 through a firewall of 10"
    );
    assert_eq!(num(&evening["closing"], "cost"), 8.0, "4 units at 2 each");
    assert_eq!(evening["closing"]["add_functions"]["b"]["fw"], 4.0);
    assert_eq!(
        num(pair(&doc, &[], "base"), "shortfall"),
        0.0,
        "8 fits in 10"
    );
    let bought = TempPath::new("chain-mx-plan", "json");
    let out = TempPath::new("chain-mx-plan-doc", "json");
    let run = redoubt(&[
        "plan",
        file.path(),
        "--depth",
        "1",
        "--json",
        out.path(),
        "--apply",
        bought.path(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let plan = out.read_json();
    assert_eq!(num(&plan["plan"], "cost"), 8.0, "{plan}");
    let (_, after) = audit_json(bought.path(), &["--depth", "1"]);
    for m in ["base", "evening"] {
        assert_eq!(num(pair(&after, &[], m), "shortfall"), 0.0, "{after}");
        // Failing site c (the destination) leaves no demand; nothing else changes that.
        assert_eq!(num(pair(&after, &["site:c"], m), "shortfall"), 0.0);
    }
}

/// A chain network big enough to interrupt: a ring of 10 sites (capacity 20 + 7·v mod
/// 41) with 6 chords, functions `fw` (gain 1), `dpi` (0.8), `tc` (0.5) at a few sites
/// each, 12 demands with chains of 0 to 2 functions, and a second matrix `busy` of 14.
/// Invented; every number is a fixed formula of the indices.
fn chain_ring() -> String {
    let n = 10;
    let fns = ["fw", "dpi", "tc"];
    let sites: Vec<Value> = (0..n)
        .map(|v| {
            let mut m = serde_json::Map::new();
            for (f, id) in fns.iter().enumerate() {
                if (v + 2 * f) % 3 == 0 {
                    m.insert(id.to_string(), json!(8 + (v * 5 + f * 3) % 25));
                }
            }
            json!({"id": format!("s{v}"), "functions": m})
        })
        .collect();
    let mut links: Vec<Value> = (0..n)
        .map(|v| {
            json!({"id": format!("r{v}"), "from": format!("s{v}"),
                   "to": format!("s{}", (v + 1) % n), "capacity": 20 + (7 * v) % 41})
        })
        .collect();
    for c in 0..6 {
        links.push(json!({"id": format!("c{c}"), "from": format!("s{c}"),
                          "to": format!("s{}", (c + 4) % n), "capacity": 10 + 5 * c}));
    }
    let demands = |k: usize, shift: usize| -> Vec<Value> {
        (0..k)
            .map(|i| {
                let a = (i * 3 + shift) % n;
                let b = (a + 1 + (i * 7) % (n - 1)) % n;
                let chain: Vec<&str> = (0..i % 3).map(|j| fns[(i + j) % 3]).collect();
                json!({"from": format!("s{a}"), "to": format!("s{b}"),
                       "volume": 3 + (i * 5) % 13, "chain": chain})
            })
            .collect()
    };
    json!({"name": "chain-ring", "unit": "Gbit/s",
           "functions": [{"id": "fw", "gain": 1}, {"id": "dpi", "gain": 0.8},
                         {"id": "tc", "gain": 0.5}],
           "sites": sites, "links": links, "demands": demands(12, 0),
           "matrices": [{"id": "busy", "demands": demands(14, 1)}]})
    .to_string()
}

/// 64-bit FNV-1a over `bytes` from the published offset basis 0xcbf29ce484222325 with
/// prime 0x100000001b3 (constants written from memory): the line check of journals and
/// parts, recomputed here so that an edited line passes it as a hostile editor's would.
fn reseal(line: &str) -> String {
    let rest = &line[28..]; // after `{"check":"<16 hex>",`
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in rest.as_bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    format!("{{\"check\":\"{h:016x}\",{rest}")
}

/// Halves the first `"served_required":X` of a journal or part line (a short scenario
/// made to look shorter) with the shortfall moved to match, resealed.
fn halved(line: &str) -> String {
    let v: Value = serde_json::from_str(line).unwrap();
    let e = &v["evaluation"];
    let (served, short) = (num(e, "served_required"), num(e, "shortfall"));
    let edited = line
        .replacen(
            &format!("\"served_required\":{}", e["served_required"]),
            &format!("\"served_required\":{}", served / 2.0),
            1,
        )
        .replacen(
            &format!("\"shortfall\":{}", e["shortfall"]),
            &format!("\"shortfall\":{}", short + served / 2.0),
            1,
        );
    assert_ne!(edited, line, "the edit applies");
    reseal(&edited)
}

/// Edits the journal or part file at `path` in place: the first scenario line after the
/// header with a positive shortfall is [`halved`]. Returns that line's index (0-based).
fn halve_a_short_line(path: &std::path::Path) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let k = (1..lines.len())
        .find(|&k| {
            lines[k].contains("\"served_required\"") && !lines[k].contains("\"shortfall\":0.0")
        })
        .expect("a short scenario line");
    lines[k] = halved(&lines[k]);
    std::fs::write(path, lines.join("\n") + "\n").unwrap();
    k
}

/// `audit --shard I/3` of a chain file with two matrices at depth 2, merged: the JSON, the
/// CSV and the text equal the one-process run's byte for byte (the contract: a merged run
/// is the unsharded run). A part whose line is edited (served value halved, shortfall
/// moved to match, line check recomputed) is refused naming the part and the line.
#[test]
fn shards_of_a_chain_file_merge_to_the_one_process_run() {
    let file = TempPath::with_text("chain-ring", &chain_ring());
    let dir = common::TempDir::new("chain-shards");
    let (json, csv) = (dir.join("one.json"), dir.join("one.csv"));
    let one = redoubt(&[
        "audit",
        file.path(),
        "--depth",
        "2",
        "--json",
        common::s(&json),
        "--csv",
        common::s(&csv),
    ]);
    assert_eq!(one.code, 0, "{}", one.stderr);
    let parts = common::shard_parts(&dir, &["audit", file.path(), "--depth", "2"], 3);
    let (mjson, mcsv) = (dir.join("merged.json"), dir.join("merged.csv"));
    let mut args = vec!["merge"];
    args.extend(parts.iter().map(|p| common::s(p)));
    args.extend(["--json", common::s(&mjson), "--csv", common::s(&mcsv)]);
    let merged = redoubt(&args);
    assert_eq!(merged.code, 0, "{}", merged.stderr);
    assert!(
        std::fs::read(&json).unwrap() == std::fs::read(&mjson).unwrap(),
        "JSON"
    );
    assert!(
        std::fs::read(&csv).unwrap() == std::fs::read(&mcsv).unwrap(),
        "CSV"
    );
    assert_eq!(one.stdout, merged.stdout);
    // With `--why` too: the explanation of the worst scenario (its demands, its functions,
    // what would fix it) is the same from the merged parts as from the one-process run,
    // and it is there.
    let one_why = redoubt(&["audit", file.path(), "--depth", "2", "--why"]);
    let mut args = vec!["merge"];
    args.extend(parts.iter().map(|p| common::s(p)));
    args.push("--why");
    let merged_why = redoubt(&args);
    assert_eq!(one_why.code, 0, "{}", one_why.stderr);
    assert_eq!(merged_why.code, 0, "{}", merged_why.stderr);
    assert!(one_why.stdout.contains("\nWhy "), "{}", one_why.stdout);
    assert!(one_why.stdout.contains("Functions ("), "{}", one_why.stdout);
    assert_eq!(one_why.stdout, merged_why.stdout);

    // One short scenario's line edited in part 2.
    let k = halve_a_short_line(&parts[1]);
    let bad = dir.join("bad.json");
    let mut args = vec!["merge"];
    args.extend(parts.iter().map(|p| common::s(p)));
    args.extend(["--json", common::s(&bad)]);
    let r = redoubt(&args);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains("part-2.jsonl") && r.stderr.contains(&format!("line {}", k + 1)),
        "{}",
        r.stderr
    );
    assert!(!bad.exists());
}

/// An interrupted audit of a chain file resumes to the uninterrupted run's JSON byte for
/// byte; a journal line edited as above is solved again (said on stderr) and the result is
/// still the uninterrupted run's.
#[test]
fn an_interrupted_chain_audit_resumes_to_identical_files() {
    let file = TempPath::with_text("chain-ring", &chain_ring());
    let want = audit_bytes(file.path(), &["--depth", "2"]);
    let dir = common::TempDir::new("chain-resume");
    let json = dir.join("audit.json");
    let journal = dir.join("audit.json.journal");
    let args = [
        "audit",
        file.path(),
        "--depth",
        "2",
        "--quiet",
        "--json",
        common::s(&json),
    ];
    let first = common::interrupt_at(&args, &journal, 30);
    assert_eq!(first.code, 130, "{}", first.stderr);
    let kept = std::fs::read_to_string(&journal).unwrap();
    let resume: Vec<&str> = args.iter().copied().chain(["--resume"]).collect();
    let r = redoubt(&resume);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(std::fs::read(&json).unwrap() == want, "resumed JSON");

    // The kept journal with one short scenario's line edited.
    std::fs::remove_file(&json).unwrap();
    std::fs::write(&journal, kept).unwrap();
    let k = halve_a_short_line(&journal);
    let r = redoubt(&resume);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stderr.contains(&format!("line {}", k + 1)),
        "{}",
        r.stderr
    );
    assert!(
        std::fs::read(&json).unwrap() == want,
        "resumed JSON after an edited line"
    );
}

/// `compare` of a random chain file with itself after one function capacity changed (the
/// first site running function 0 loses half of it, or gains 10): every scenario the
/// comparison lists as worse or better carries before and after served values equal to
/// the per-demand microlp reference on each side, and the scenarios it lists are exactly
/// those whose reference shortfall moved (tolerance 0, as printed: more than 1e-6 here).
/// Also between the chain file and itself: nothing changes, exit 0.
#[test]
fn compare_of_chain_files_against_the_reference() {
    let mut rng = StdRng::seed_from_u64(0x0C03_FA2E);
    let mut listed_any = 0;
    for instance in 0..5 {
        let before = random_net(&mut rng);
        let mut after = RNet {
            gains: before.gains.clone(),
            capacity: before.capacity.clone(),
            links: before.links.clone(),
            demands: before.demands.clone(),
        };
        let v = (0..after.capacity.len())
            .find(|&v| after.capacity[v][0] > 0.0)
            .expect("every function runs somewhere");
        after.capacity[v][0] = if instance % 2 == 0 {
            after.capacity[v][0] / 2.0
        } else {
            after.capacity[v][0] + 10.0
        };
        let fb = TempPath::with_text("chain-cmp-b", &before.to_json().to_string());
        let fa = TempPath::with_text("chain-cmp-a", &after.to_json().to_string());
        let out = TempPath::new("chain-cmp", "json");
        let r = redoubt(&[
            "compare",
            fb.path(),
            fa.path(),
            "--depth",
            "1",
            "--threads",
            "1",
            "--json",
            out.path(),
        ]);
        assert!(r.code == 0 || r.code == 1, "{}", r.stderr);
        let doc = out.read_json();
        let surviving = |t: &RNet, site: Option<usize>| -> f64 {
            t.demands
                .iter()
                .filter(|d| site != Some(d.0) && site != Some(d.1))
                .map(|d| d.3)
                .sum()
        };
        let mut listed = std::collections::BTreeSet::new();
        for row in doc["worse"]
            .as_array()
            .unwrap()
            .iter()
            .chain(doc["better"].as_array().unwrap())
        {
            let (site, link) = failed_element(row);
            let what = format!("instance {instance}, {:?}", failed_of(row));
            let (b, a) = (
                reference_served(&before, site, link, false),
                reference_served(&after, site, link, false),
            );
            assert_close(num(&row["before"], "served_required"), b, &what);
            assert_close(num(&row["after"], "served_required"), a, &what);
            listed.insert(failed_of(row));
        }
        // Every scenario whose reference shortfall moved is listed.
        let n = before.capacity.len();
        let elements = (0..n)
            .map(|s| (Some(s), None))
            .chain((0..before.links.len()).map(|l| (None, Some(l))))
            .chain([(None, None)]);
        for (site, link) in elements {
            let (b, a) = (
                reference_served(&before, site, link, false),
                reference_served(&after, site, link, false),
            );
            let moved = (surviving(&before, site) - b - (surviving(&after, site) - a)).abs() > 1e-6;
            let name = match (site, link) {
                (Some(s), _) => vec![format!("site:s{s}")],
                (_, Some(l)) => vec![format!("link:l{l}")],
                _ => vec![],
            };
            if name.is_empty() {
                continue; // the baseline is its own object, not a row
            }
            assert_eq!(
                listed.contains(&name),
                moved,
                "instance {instance}, {name:?}"
            );
        }
        listed_any += listed.len();
        let same = redoubt(&["compare", fb.path(), fb.path(), "--depth", "1"]);
        assert_eq!(same.code, 0, "{}", same.stderr);
        assert!(same.stdout.starts_with("PASS"), "{}", same.stdout);
    }
    assert!(listed_any > 0, "some change was listed");
}

/// `compare` lists a demand whose chain changed among the file changes, as it lists a
/// changed volume: on the chains demo, the first demand's chain `firewall, dpi` cut to
/// `dpi` and the plain fourth demand given `scrub`. The rows are written out by hand from
/// the edit: demands are named by their label (`FROM→TO #N`, N counted from 1 in file
/// order, as `compare` names a demand without an id), a chain as its function ids in
/// order joined with `,`, plain traffic as the empty chain (shown `none`); no other field
/// changed, so nothing else is listed.
#[test]
fn compare_lists_a_changed_chain() {
    let before = common::fixture("demo-quillhaven-chains.json");
    let mut doc: Value = serde_json::from_str(&std::fs::read_to_string(&before).unwrap()).unwrap();
    doc["demands"][0]["chain"] = json!(["dpi"]);
    doc["demands"][3]["chain"] = json!(["scrub"]);
    let after = TempPath::with_text("chains-chain-after", &doc.to_string());
    let (run, cmp) = compare_json(common::s(&before), after.path());
    let flat = run.stdout.split_whitespace().collect::<Vec<_>>().join(" ");
    for needle in [
        "demand:ambermoor→orrin-gate #1 chain firewall,dpi dpi",
        "demand:ambermoor→tessaly #4 chain none scrub",
    ] {
        assert!(flat.contains(needle), "{needle:?} in {}", run.stdout);
    }
    let rows: Vec<[String; 4]> = cmp["file_changes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| ["element", "field", "before", "after"].map(|k| c[k].as_str().unwrap().into()))
        .collect();
    let row = |e: &str, b: &str, a: &str| [e, "chain", b, a].map(String::from);
    assert_eq!(
        rows,
        vec![
            row("demand:ambermoor→orrin-gate #1", "firewall,dpi", "dpi"),
            row("demand:ambermoor→tessaly #4", "", "scrub"),
        ]
    );
}
