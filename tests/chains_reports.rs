//! What the reports say about service chains (a network whose file lists `functions`),
//! through the binary:
//!
//! - each function's shadow price per site (`functions[].price` of a `--json` scenario)
//!   against finite differences of a second formulation: the per-demand layered LP of
//!   `tests/common/chain_reference.rs`, solved by microlp (a simplex method, through
//!   good_lp), with that function's capacity at that site raised and lowered by δ. The
//!   optimum is a concave piecewise-linear function of one capacity, and every optimal
//!   dual price of its row lies between the right and the left derivative (LP
//!   sensitivity, e.g. Bertsimas & Tsitsiklis, *Introduction to Linear Optimization*,
//!   §5.2, from memory); where the two derivatives agree the price is unique and must
//!   equal them. Random networks with random chains and gains, every single failure, both
//!   engines;
//! - hand-worked cases of loads, prices and the delivered volume and its range, each with
//!   its calculation in a comment (common practice, no source: the contract's definitions
//!   applied by hand);
//! - the text, CSV, HTML and Markdown reports showing the same numbers as the JSON.

#[path = "common/chain_reference.rs"]
mod chain_reference;
mod common;

use chain_reference::{RNet, random_net, reference_served};
use common::json::{audit_json, failed_of, num, scenario, scenarios};
use common::{TempDir, TempPath, redoubt};
use rand::prelude::*;
use serde_json::{Value, json};

/// Absolute tolerance of a price or a load against its reference.
const TOL: f64 = 1e-6;

/// Capacity step of the finite differences: far below the 0.1 grid of the random
/// capacities, far above microlp's rounding.
const DELTA: f64 = 1e-3;

/// `text` with every run of white space (line breaks of wrapped tables and sentences
/// included) made one space.
fn flat(text: &str) -> String {
    text.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// The (site, link) a depth-1 scenario of a random network fails (ids `sN`, `lN`).
fn failure(sc: &Value) -> (Option<usize>, Option<usize>) {
    let failed = failed_of(sc);
    assert!(failed.len() <= 1, "depth 1 only: {failed:?}");
    let index = |kind: &str| {
        failed
            .iter()
            .find_map(|e| e.strip_prefix(kind))
            .map(|id| id[1..].parse().unwrap())
    };
    (index("site:"), index("link:"))
}

/// The reference optimum with the capacity of function `f` at site `v` set to `cap`.
fn served_with(
    t: &RNet,
    v: usize,
    f: usize,
    cap: f64,
    fail: (Option<usize>, Option<usize>),
) -> f64 {
    let mut t2 = RNet {
        gains: t.gains.clone(),
        capacity: t.capacity.clone(),
        links: t.links.clone(),
        demands: t.demands.clone(),
    };
    t2.capacity[v][f] = cap;
    reference_served(&t2, fail.0, fail.1, false)
}

#[test]
fn function_prices_lie_between_the_one_sided_derivatives_of_a_second_formulation() {
    let mut rng = StdRng::seed_from_u64(0xF0C5);
    let (mut unique_binding, mut checked) = (0, 0);
    for instance in 0..8 {
        let t = random_net(&mut rng);
        let file = TempPath::with_text("chain-prices", &t.to_json().to_string());
        for engine in [&[][..], &["--engine", "edge"][..]] {
            let mut args = vec!["--threads", "1"];
            args.extend_from_slice(engine);
            let (_, doc) = audit_json(file.path(), &args);
            for sc in scenarios(&doc) {
                let fail = failure(sc);
                let what = format!(
                    "instance {instance}, {engine:?}, failed {:?}",
                    failed_of(sc)
                );
                assert_eq!(sc["verification"]["status"], "proven", "{what}");
                let list = sc["functions"].as_array().cloned().unwrap_or_default();
                // Every function with capacity at a surviving site is listed.
                let want_rows = (0..t.capacity.len())
                    .filter(|&v| fail.0 != Some(v))
                    .map(|v| t.capacity[v].iter().filter(|c| **c > 0.0).count())
                    .sum::<usize>();
                assert_eq!(list.len(), want_rows, "{what}: {list:?}");
                let base = reference_served(&t, fail.0, fail.1, false);
                for row in &list {
                    let v: usize = row["site"].as_str().unwrap()[1..].parse().unwrap();
                    let f: usize = row["function"].as_str().unwrap()[1..].parse().unwrap();
                    let cap = t.capacity[v][f];
                    assert!((num(row, "capacity") - cap).abs() <= TOL, "{what}: {row}");
                    assert!(
                        num(row, "load") <= cap + TOL,
                        "{what}: load within capacity {row}"
                    );
                    let right = (served_with(&t, v, f, cap + DELTA, fail) - base) / DELTA;
                    let left = (base - served_with(&t, v, f, cap - DELTA, fail)) / DELTA;
                    let price = row["price"].as_f64().unwrap_or(0.0);
                    assert!(
                        price >= right - TOL && price <= left + TOL,
                        "{what}: price {price} of f{f} at s{v} outside [{right}, {left}]"
                    );
                    if (left - right).abs() <= TOL && right > TOL {
                        unique_binding += 1;
                    }
                    checked += 1;
                }
            }
        }
    }
    eprintln!("{checked} prices checked, {unique_binding} unique and positive");
    // The check must have met binding functions with a unique price, not only zeros.
    assert!(checked > 100, "{checked} prices checked");
    assert!(
        unique_binding >= 5,
        "{unique_binding} unique positive prices"
    );
}

/// A path a — b — c (links of capacity 100) and a spare site d (link cd); `fw` (gain 0.5)
/// at b with capacity 6, `dpi` (gain 1) at c with capacity 20; one demand a→c of volume
/// and required 10 with chain fw > dpi.
fn fw_dpi_path() -> Value {
    json!({
        "name": "fw-dpi-path",
        "unit": "Gbit/s",
        "functions": [{"id": "fw", "gain": 0.5}, {"id": "dpi", "gain": 1}],
        "sites": [
            {"id": "a"},
            {"id": "b", "functions": {"fw": 6}, "expand": {"fw": {"cost": 1, "max": 10}}},
            {"id": "c", "functions": {"dpi": 20}},
            {"id": "d"}
        ],
        "links": [
            {"id": "ab", "from": "a", "to": "b", "capacity": 100},
            {"id": "bc", "from": "b", "to": "c", "capacity": 100},
            {"id": "cd", "from": "c", "to": "d", "capacity": 100}
        ],
        "demands": [{"from": "a", "to": "c", "volume": 10, "required": 10, "chain": ["fw", "dpi"]}]
    })
}

#[test]
fn a_function_that_binds_has_its_load_price_and_sentence() {
    // Served F (origin units) enters fw at b as F <= 6, so F = 6 of the 10 required (short
    // 4). It leaves fw as 0.5 · 6 = 3, which enters dpi at c: load 3 of 20. Delivered
    // 3 · 1 = 3. One more unit of fw at b serves one more origin unit (the demand wants 4
    // more and nothing else binds): price 1; dpi does not bind: price 0. A single demand
    // has a single total gain, so every optimum delivers 3.
    let file = TempPath::with_text("fw-dpi", &fw_dpi_path().to_string());
    let (_, doc) = audit_json(file.path(), &["--threads", "1"]);
    let base = scenario(&doc, &[]);
    assert_eq!(num(base, "served_required"), 6.0);
    assert_eq!(num(base, "delivered"), 3.0);
    assert!(base.get("delivered_range").is_none(), "{base}");
    assert_eq!(
        base["functions"],
        json!([
            {"site": "b", "function": "fw", "load": 6.0, "capacity": 6.0, "price": 1.0},
            {"site": "c", "function": "dpi", "load": 3.0, "capacity": 20.0, "price": 0.0}
        ])
    );
    let run = redoubt(&["audit", file.path(), "--fail", "link:cd", "--threads", "1"]);
    for needle in [
        "Delivered at the destinations: 3 Gbit/s (served 6 in origin units",
        "every optimal allocation delivers the same",
        "One more unit of fw at b serves up to 1 more.",
        "saturated fw at b",
        "fw at b (+1)",
    ] {
        assert!(
            flat(&run.stdout).contains(needle),
            "{needle:?} in {}",
            run.stdout
        );
    }
    // Files without functions print none of it.
    let plain = redoubt(&[
        "audit",
        common::s(&common::fixture("small-ring.json")),
        "-q",
    ]);
    assert!(!plain.stdout.contains("Delivered"), "{}", plain.stdout);
}

/// Sites o, a, b; link oa of capacity 10, ab of 100; `scrub` (gain 0.5) at a with
/// capacity 100; two demands o→b of required 8: plain traffic and one through scrub.
fn two_gains() -> Value {
    json!({
        "name": "two-gains",
        "unit": "Gbit/s",
        "functions": [{"id": "scrub", "gain": 0.5}],
        "sites": [{"id": "o"}, {"id": "a", "functions": {"scrub": 100}}, {"id": "b"}],
        "links": [
            {"id": "oa", "from": "o", "to": "a", "capacity": 10},
            {"id": "ab", "from": "a", "to": "b", "capacity": 100}
        ],
        "demands": [
            {"from": "o", "to": "b", "volume": 8, "required": 8},
            {"from": "o", "to": "b", "volume": 8, "required": 8, "chain": ["scrub"]}
        ]
    })
}

#[test]
fn the_delivered_range_when_optima_deliver_different_amounts() {
    // Both demands cross oa (10) in origin units before any function, so served = 10 in
    // every optimum, split any way with each part at most 8. Plain 8 + scrubbed 2: ab
    // carries 8 + 0.5·2 = 9 <= 100, delivered 9 (the most). Plain 2 + scrubbed 8: ab
    // carries 2 + 4 = 6, delivered 6 (the least). Every split between is optimal too.
    let file = TempPath::with_text("two-gains", &two_gains().to_string());
    let (_, doc) = audit_json(file.path(), &["--threads", "1"]);
    let base = scenario(&doc, &[]);
    assert_eq!(num(base, "served_required"), 10.0);
    let d = num(base, "delivered");
    assert!((6.0 - TOL..=9.0 + TOL).contains(&d), "delivered {d}");
    assert_eq!(num(&base["delivered_range"], "least"), 6.0, "{base}");
    assert_eq!(num(&base["delivered_range"], "most"), 9.0, "{base}");
    let run = redoubt(&["audit", file.path(), "-q", "--threads", "1"]);
    assert!(
        flat(&run.stdout).contains("another optimal one may deliver between 6 and 9"),
        "{}",
        run.stdout
    );
}

#[test]
fn csv_html_and_markdown_show_the_json_figures() {
    let demo = common::fixture("demo-quillhaven-chains.json");
    let dir = TempDir::new("chain-reports");
    let (csv, json) = (dir.join("a.csv"), dir.join("a.json"));
    let report = dir.join("report");
    let run = redoubt(&[
        "audit",
        common::s(&demo),
        "-q",
        "--threads",
        "1",
        "--json",
        common::s(&json),
        "--csv",
        common::s(&csv),
        "--report",
        common::s(&report),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let text = std::fs::read_to_string(&csv).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    for line in text.lines().skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        let failed: Vec<&str> = if cells[0].is_empty() {
            vec![]
        } else {
            vec![cells[0]]
        };
        let sc = scenario(&doc, &failed);
        assert_eq!(
            cells[col("delivered")].parse::<f64>().unwrap(),
            num(sc, "delivered")
        );
        // The top function is the JSON's highest positive price.
        let top = sc["functions"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|f| f["price"].as_f64().unwrap_or(0.0) > 1e-6)
            .max_by(|a, b| num(a, "price").total_cmp(&num(b, "price")));
        match top {
            Some(f) => {
                assert_eq!(
                    cells[col("top_function")],
                    format!(
                        "{}@{}",
                        f["function"].as_str().unwrap(),
                        f["site"].as_str().unwrap()
                    )
                );
                assert_eq!(
                    cells[col("top_function_price")].parse::<f64>().unwrap(),
                    num(f, "price")
                );
            }
            None => assert_eq!(cells[col("top_function")], ""),
        }
    }
    let md = std::fs::read_to_string(report.join("report.md")).unwrap();
    let html = std::fs::read_to_string(report.join("report.html")).unwrap();
    let base = scenario(&doc, &[]);
    let delivered = format!("{} Gbit/s at the destinations", num(base, "delivered"));
    assert!(md.contains(&delivered), "{md}");
    assert!(html.contains(&delivered));
    assert!(
        md.contains("## Functions in the worst scenario (site:quillhaven)"),
        "{md}"
    );
    let worst = scenario(&doc, &["site:quillhaven"]);
    for f in worst["functions"].as_array().unwrap() {
        let row = format!(
            "| {} | {} | {} |",
            f["function"].as_str().unwrap(),
            f["site"].as_str().unwrap(),
            num(f, "load")
        );
        assert!(md.contains(&row), "{row} in {md}");
        assert!(html.contains(&format!(
            "<td class=\"k\">{}</td>",
            f["function"].as_str().unwrap()
        )));
    }
    assert!(md.contains("- Every unit passes its demand's chain of functions in order"));
    assert!(!md.contains("Every unit is processed once"), "{md}");
    assert!(md.contains("Caution: a planning aid"));
    assert!(html.contains("Caution: a planning aid"));
}

/// A CSV field of `v` (numbers as JSON writes them, lists `;`-joined, absent empty).
fn cell(v: Option<&Value>) -> String {
    match v {
        None | Some(Value::Null) => String::new(),
        Some(Value::String(s)) => s.clone(),
        Some(Value::Array(a)) => a
            .iter()
            .map(|x| cell(Some(x)))
            .collect::<Vec<_>>()
            .join(";"),
        Some(other) => other.to_string(),
    }
}

/// `redoubt import csv` of the sites, links, demands and functions files into `out`.
fn import_csv(
    files: [&std::path::Path; 4],
    out: &std::path::Path,
    name: Option<&str>,
) -> common::Run {
    let mut args = vec!["import", "csv"];
    for (flag, f) in ["--sites", "--links", "--demands", "--functions"]
        .iter()
        .zip(files)
    {
        args.extend([*flag, common::s(f)]);
    }
    args.extend(["--json", common::s(out)]);
    if let Some(n) = name {
        args.extend(["--name", n]);
    }
    redoubt(&args)
}

#[test]
fn csv_import_with_functions_gives_the_fixture_audit() {
    // The CSV files are written here from the fixture's JSON, column by column, so the
    // import must rebuild the same network: the same audit, number for number.
    let demo = common::fixture("demo-quillhaven-chains.json");
    let fx: Value = serde_json::from_str(&std::fs::read_to_string(&demo).unwrap()).unwrap();
    let dir = TempDir::new("chain-import");
    let write = |name: &str, text: String| {
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    };
    let rows = |list: &Value, cols: &[&str]| {
        let mut t = cols.join(",") + "\n";
        for x in list.as_array().unwrap() {
            let cells: Vec<String> = cols.iter().map(|c| cell(x.get(*c))).collect();
            t += &(cells.join(",") + "\n");
        }
        t
    };
    let sites = write("sites.csv", rows(&fx["sites"], &["id"]));
    let links = write(
        "links.csv",
        rows(&fx["links"], &["id", "from", "to", "capacity"]),
    );
    let demands = write(
        "demands.csv",
        rows(&fx["demands"], &["from", "to", "volume", "chain"]),
    );
    // Functions: one declaring row each (with its gain), then one row per site and function.
    let mut f = "function,gain,site,capacity,expand_cost,expand_max\n".to_string();
    for func in fx["functions"].as_array().unwrap() {
        f += &format!("{},{},,,,\n", cell(func.get("id")), cell(func.get("gain")));
    }
    for s in fx["sites"].as_array().unwrap() {
        for (id, cap) in s["functions"].as_object().into_iter().flatten() {
            let buy = &s["expand"][id];
            f += &format!(
                ",,{},{},{},{}\n",
                cell(s.get("id")),
                cap,
                cell(buy.get("cost")),
                cell(buy.get("max"))
            )
            .replacen(",,", &format!("{id},,"), 1);
        }
    }
    let functions = write("functions.csv", f);
    let net = dir.join("net.json");
    let name = fx["name"].as_str().unwrap();
    let run = import_csv([&sites, &links, &demands, &functions], &net, Some(name));
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(run.stdout.contains("functions (4)"), "{}", run.stdout);
    let (_, want) = audit_json(common::s(&demo), &["--threads", "1"]);
    let (_, got) = audit_json(common::s(&net), &["--threads", "1"]);
    for key in ["baseline", "scenarios", "criticality", "caution"] {
        assert_eq!(got[key], want[key], "{key}");
    }
    assert!(!scenarios(&got).is_empty());
}

#[test]
fn the_functions_csv_is_refused_where_it_is_unclear() {
    let dir = TempDir::new("chain-import-bad");
    let write = |name: &str, text: &str| {
        let p = dir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    };
    let sites = write("s.csv", "id\na\nb\n");
    let links = write("l.csv", "id,from,to,capacity\nab,a,b,10\n");
    let demands = write("d.csv", "from,to,volume,chain\na,b,5,fw\n");
    for (text, needle) in [
        (
            "function,gain,site,capacity\nfw,1,a,5\nfw,0.5,b,5\n",
            "has gain 0.5 here and 1",
        ),
        (
            "function,site,capacity\nfw,a,5\n",
            "has no `gain` on any row",
        ),
        (
            "function,gain,site,capacity\nfw,1,z,5\n",
            "site \"z\" is not in the sites CSV",
        ),
        (
            "function,gain,site,capacity\nfw,1,a,5\nfw,,a,6\n",
            "is given twice",
        ),
        (
            "function,gain,site\nfw,1,a\n",
            "without a `capacity` or an `expand_cost`",
        ),
    ] {
        let functions = write("f.csv", text);
        let run = import_csv(
            [&sites, &links, &demands, &functions],
            &dir.join("net.json"),
            None,
        );
        assert_eq!(run.code, 2, "{text}: {}", run.stdout);
        assert!(run.stderr.contains(needle), "{needle:?} in {}", run.stderr);
    }
}

#[test]
fn check_says_what_each_function_takes_at_full_service() {
    // Demo (fixtures/demo-quillhaven-chains.json), by hand: firewall > dpi 40, scrub 30,
    // transcode > dpi 24, plain 20. firewall takes 40; dpi takes 40 · 1 (after firewall,
    // gain 1) + 24 · 0.5 (after transcode) = 52; scrub 30; transcode 24. Delivered
    // 20 + 40 + 30 · 0.9 + 24 · 0.5 · 1 = 99.
    let demo = common::fixture("demo-quillhaven-chains.json");
    let run = redoubt(&["check", common::s(&demo)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let text = flat(&run.stdout);
    for needle in [
        "delivered when every demand's required part is served: 99 Gbit/s",
        "firewall — gain 1; capacity 60: ambermoor 60; needed 40",
        "(cost 2/unit, up to 40); needed 52",
        "(cost 3/unit, up to 20); needed 30",
        "(cost 1/unit, up to 30); needed 24",
    ] {
        assert!(text.contains(needle), "{needle:?} in {}", run.stdout);
    }
    // The fw–dpi path with a third function nobody uses: fw takes the 10 required (more
    // than its 6), dpi takes 10 · 0.5 = 5.
    let mut net = fw_dpi_path();
    net["functions"]
        .as_array_mut()
        .unwrap()
        .push(json!({"id": "nat", "gain": 1}));
    let file = TempPath::with_text("fw-dpi-check", &net.to_string());
    let run = redoubt(&["check", file.path()]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let text = flat(&run.stdout);
    for needle in [
        "needed 10 (more than its capacity)",
        "dpi — gain 1; capacity 20: c 20; needed 5",
        "nat — gain 1; capacity 0: none; in no demand's chain",
        "delivered when every demand's required part is served: 5 Gbit/s",
    ] {
        assert!(text.contains(needle), "{needle:?} in {}", run.stdout);
    }
}
