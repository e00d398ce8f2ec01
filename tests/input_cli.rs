//! Input refused or accepted through the binary: `check`, malformed and unparseable files, bad usage, negative numbers, amounts at and beyond the limits.
//!
//! Outside references: the input contract `shared/network-format.md` (field names, exit
//! statuses, error-message content, the definitions of served_required, shortfall, stranded
//! and throughput), the fixture files themselves (counted here with serde_json, not by the
//! product), and small networks whose results are computed by hand in the comments.

mod common;

use common::json::*;
use common::*;

/// Source: the fixture file itself, counted here with serde_json.
#[test]
fn check_demo_prints_counts() {
    let fx = read_fixture(&demo());
    let sites = fx["sites"].as_array().unwrap().len();
    let links = fx["links"].as_array().unwrap().len();
    let demands = fx["demands"].as_array().unwrap().len();
    let run = redoubt(&["check", s(&demo())]);
    assert_eq!(run.code, 0, "check failed:\n{}", run.stderr);
    for (word, n) in [("sites", sites), ("links", links), ("demands", demands)] {
        assert!(
            run.stdout.contains(&format!("{word} {n}")),
            "check output lacks `{word} {n}`:\n{}",
            run.stdout
        );
    }
}

const SITES: &str = r#""sites": [{"id": "kestrel", "processing": 5}, {"id": "plover"}]"#;

fn with_links(links: &str) -> String {
    format!(r#"{{{SITES}, "links": [{links}], "demands": []}}"#)
}

fn with_demands(demands: &str) -> String {
    format!(r#"{{{SITES}, "links": [], "demands": [{demands}]}}"#)
}

/// One malformed file: the message must contain one of `element` (index or id form), the
/// `field` name and the offending `value` (each skipped when empty).
struct Bad {
    case: &'static str,
    text: String,
    element: &'static [&'static str],
    field: &'static str,
    value: &'static str,
}

fn assert_refused(b: &Bad) {
    let f = TempPath::with_text(b.case, &b.text);
    let run = redoubt(&["check", f.path()]);
    // Source: contract, "Invalid input ... is refused ... and exit status 2".
    assert_eq!(run.code, 2, "{}: exit status\n{}", b.case, run.stderr);
    let msg = &run.stderr;
    // Source: contract, "with a message that names the element, the field and the value".
    if !b.element.is_empty() {
        assert!(
            b.element.iter().any(|e| msg.contains(e)),
            "{}: message names none of {:?}: {msg}",
            b.case,
            b.element
        );
    }
    assert!(
        msg.contains(b.field),
        "{}: message lacks field {:?}: {msg}",
        b.case,
        b.field
    );
    assert!(
        msg.contains(b.value),
        "{}: message lacks value {:?}: {msg}",
        b.case,
        b.value
    );
}

/// Source: the contract's list of invalid input (shared/network-format.md, "Invalid input").
#[test]
fn malformed_files_are_refused_with_element_field_and_value() {
    let link = |extra: &str| {
        with_links(&format!(
            r#"{{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 10{extra}}}"#
        ))
    };
    let cases = vec![
        Bad {
            case: "unknown-link-from",
            text: with_links(r#"{"id": "ln-7", "from": "gannet", "to": "plover", "capacity": 1}"#),
            element: &["links[0]", "ln-7"],
            field: "from",
            value: "gannet",
        },
        Bad {
            case: "unknown-demand-to",
            text: with_demands(r#"{"from": "kestrel", "to": "gannet", "volume": 3}"#),
            element: &["demands[0]"],
            field: "to",
            value: "gannet",
        },
        Bad {
            case: "duplicate-site",
            text: r#"{"sites": [{"id": "kestrel"}, {"id": "plover"}, {"id": "kestrel"}]}"#.into(),
            element: &["sites[2]"],
            field: "id",
            value: "kestrel",
        },
        Bad {
            case: "duplicate-link",
            text: with_links(
                r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 1},
                   {"id": "ln-7", "from": "plover", "to": "kestrel", "capacity": 2}"#,
            ),
            element: &["links[1]"],
            field: "id",
            value: "ln-7",
        },
        Bad {
            case: "negative-capacity",
            text: with_links(
                r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": -7.5}"#,
            ),
            element: &["links[0]", "ln-7"],
            field: "capacity",
            value: "-7.5",
        },
        Bad {
            case: "negative-processing",
            text: r#"{"sites": [{"id": "kestrel", "processing": -3.25}, {"id": "plover"}]}"#.into(),
            element: &["sites[0]", "kestrel"],
            field: "processing",
            value: "-3.25",
        },
        Bad {
            case: "negative-volume",
            text: with_demands(r#"{"from": "kestrel", "to": "plover", "volume": -4}"#),
            element: &["demands[0]"],
            field: "volume",
            value: "-4",
        },
        Bad {
            case: "required-over-volume",
            text: with_demands(
                r#"{"from": "kestrel", "to": "plover", "volume": 3, "required": 4.5}"#,
            ),
            element: &["demands[0]"],
            field: "required",
            value: "4.5",
        },
        Bad {
            case: "link-same-ends",
            text: with_links(
                r#"{"id": "loop-1", "from": "plover", "to": "plover", "capacity": 1}"#,
            ),
            element: &["links[0]", "loop-1"],
            field: "from",
            value: "plover",
        },
        Bad {
            case: "demand-same-ends",
            text: with_demands(r#"{"from": "kestrel", "to": "kestrel", "volume": 3}"#),
            element: &["demands[0]"],
            field: "to",
            value: "kestrel",
        },
        Bad {
            case: "capacity-wrong-type",
            text: with_links(
                r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": "ten"}"#,
            ),
            element: &["links[0]", "ln-7"],
            field: "capacity",
            value: "ten",
        },
        Bad {
            case: "one-way-wrong-type",
            text: link(r#", "one_way": "yes""#),
            element: &["links[0]", "ln-7"],
            field: "one_way",
            value: "yes",
        },
        Bad {
            case: "risk-groups-wrong-type",
            text: link(r#", "risk_groups": "north""#),
            element: &["links[0]", "ln-7"],
            field: "risk_groups",
            value: "north",
        },
        Bad {
            case: "missing-capacity",
            text: with_links(r#"{"id": "ln-7", "from": "kestrel", "to": "plover"}"#),
            element: &["links[0]", "ln-7"],
            field: "capacity",
            value: "",
        },
        Bad {
            case: "missing-volume",
            text: with_demands(r#"{"from": "kestrel", "to": "plover"}"#),
            element: &["demands[0]"],
            field: "volume",
            value: "",
        },
        Bad {
            case: "empty-sites",
            text: r#"{"sites": [], "links": [], "demands": []}"#.into(),
            element: &[],
            field: "sites",
            value: "",
        },
        Bad {
            case: "no-sites-field",
            text: r#"{"links": [], "demands": []}"#.into(),
            element: &[],
            field: "sites",
            value: "",
        },
    ];
    for b in &cases {
        assert_refused(b);
    }
}

/// Source: contract ("Invalid input ... exit status 2. Never a panic."). Files that are not
/// a network JSON object at all: exit 2, and the message says where (line) or what.
#[test]
fn unparseable_files_exit_2_without_panic() {
    let full = with_links(r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 10}"#);
    let truncated = &full[..full.len() / 2];
    let cases: Vec<(&str, String, &str)> = vec![
        ("truncated", truncated.to_string(), "line"),
        ("empty-file", String::new(), "line"),
        ("top-level-array", "[1, 2, 3]".into(), ""),
        ("top-level-number", "42".into(), ""),
    ];
    for (case, text, needle) in cases {
        let f = TempPath::with_text(case, &text);
        let run = redoubt(&["check", f.path()]);
        assert_eq!(run.code, 2, "{case}: exit status\n{}", run.stderr);
        assert!(!run.stderr.trim().is_empty(), "{case}: no message");
        assert!(
            run.stderr.contains(needle),
            "{case}: message lacks {needle:?}: {}",
            run.stderr
        );
    }
}

/// Source: JSON syntax (RFC 8259: a JSON text is one value) and the contract ("The tool
/// reads one JSON object"). Regression guard: this suite found anything after the first
/// object ignored (a stray brace or a second, concatenated network accepted with exit 0).
#[test]
fn trailing_content_after_the_object_is_refused() {
    let full = with_links(r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 10}"#);
    for (case, text) in [
        ("trailing-brace", format!("{full} }}")),
        ("two-objects", format!("{full}\n{full}")),
    ] {
        let f = TempPath::with_text(case, &text);
        let run = redoubt(&["check", f.path()]);
        assert_eq!(run.code, 2, "{case}: accepted:\n{}", run.stdout);
    }
}

/// Source: contract ("negative or non-finite number ... exit status 2"). 1e999 overflows
/// f64: refused with exit 2, without a panic. (That the message names the element, field
/// and value is checked in `number_too_big_names_element_field_value`.)
#[test]
fn number_too_big_exits_2() {
    let f = TempPath::with_text(
        "too-big",
        &with_links(r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 1e999}"#),
    );
    let run = redoubt(&["check", f.path()]);
    assert_eq!(run.code, 2, "exit status\n{}", run.stderr);
}

/// Source: contract (message "names the element, the field and the value"). Regression
/// guard: this suite found the message to be only "number out of range at line 1 column N".
#[test]
fn number_too_big_names_element_field_value() {
    assert_refused(&Bad {
        case: "too-big-named",
        text: with_links(r#"{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 1e999}"#),
        element: &["links[0]", "ln-7"],
        field: "capacity",
        value: "1e999",
    });
}

/// Source: contract ("The tool reads one JSON object"; "wrong JSON types" are refused).
/// Regression guard: this suite found a top-level array of the fields in declaration
/// order, or a site written as an array, accepted as a valid network.
#[test]
fn arrays_in_place_of_objects_are_refused() {
    let cases = [
        (
            "positional-top-level",
            r#"["n", "u", [{"id": "kestrel", "processing": 5}, {"id": "plover"}], [], []]"#,
        ),
        (
            "positional-site",
            r#"{"sites": [["kestrel", 5], ["plover"]]}"#,
        ),
    ];
    for (case, text) in cases {
        let f = TempPath::with_text(case, text);
        let run = redoubt(&["check", f.path()]);
        assert_eq!(run.code, 2, "{case}: accepted:\n{}", run.stdout);
    }
}

/// Source: contract (exit status 2 for input that cannot be read); the message names the path.
#[test]
fn missing_file_exits_2_and_names_it() {
    let missing = temp_root().join("no-such-network.json");
    let run = redoubt(&["check", s(&missing)]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains("no-such-network.json"),
        "{}",
        run.stderr
    );
    let run = redoubt(&["audit", s(&missing), "--quiet"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
}

/// Source: the README's exit statuses (2 for bad usage).
#[test]
fn bad_usage_exits_2() {
    let ring = fixture("small-ring.json");
    let ring = s(&ring);
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["audit", ring, "-q", "--kinds", "bogus"], "bogus"),
        (vec!["audit", ring, "-q", "--kinds", ""], "kinds"),
        (vec!["audit", ring, "-q", "--fail", "link:nosuch"], "nosuch"),
        (vec!["audit", ring, "-q", "--fail", "router:ab"], "router"),
        (vec!["audit", ring, "-q", "--fail", "ab"], "ab"),
        (vec!["audit", ring, "-q", "--threads", "0"], "threads"),
        (
            vec!["audit", ring, "-q", "--max-shortfall=-1"],
            "max-shortfall",
        ),
        (
            vec!["audit", ring, "-q", "--max-shortfall", "NaN"],
            "max-shortfall",
        ),
        (vec!["audit", ring, "-q", "--depth", "-1"], ""),
        (vec!["audit"], ""),
        (vec!["frobnicate", ring], ""),
    ];
    for (args, needle) in cases {
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}: exit status\n{}", run.stderr);
        assert!(
            run.stderr.contains(needle),
            "{args:?}: message lacks {needle:?}: {}",
            run.stderr
        );
    }
}

/// Source: the README (2 for bad usage). A depth whose scenario count is beyond any run on a
/// big network is refused at once, before solving (the test would time out otherwise).
#[test]
fn huge_depth_on_big_network_exits_2() {
    let grid = fixture("grid-50.json");
    let start = std::time::Instant::now();
    let run = redoubt(&["audit", s(&grid), "--depth", "6", "--quiet"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(run.stderr.contains("depth"), "{}", run.stderr);
    assert!(
        start.elapsed().as_secs() < 20,
        "refusal took {:?}",
        start.elapsed()
    );
}

/// Source: the README (2 for bad usage, never a panic). Regression guard: this suite found
/// the scenario count overflowing u128 in `scenario::count` (a panic in a debug build, a
/// wrapped count in a release build).
#[test]
fn depth_100_on_big_network_exits_2() {
    let grid = fixture("grid-50.json");
    let run = redoubt(&["audit", s(&grid), "--depth", "100", "--quiet"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
}

/// Source: the README (negative numbers reach our own clear message, not clap's
/// "unexpected argument").
#[test]
fn negative_numbers_get_a_clear_message() {
    let f = TempPath::with_text("neg", PATH_NET);
    for (args, says) in [
        (
            vec!["audit", f.path(), "--max-shortfall", "-1"],
            "--max-shortfall must be",
        ),
        (
            vec!["audit", f.path(), "--max-stranded", "-2"],
            "--max-stranded must be",
        ),
        (
            vec!["audit", f.path(), "--min-served-fraction", "-0.5"],
            "--min-served-fraction must be",
        ),
        (
            vec!["audit", f.path(), "--max-minutes", "-1"],
            "--max-minutes must be",
        ),
        (vec!["plan", f.path(), "--budget", "-1"], "--budget must be"),
    ] {
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}:\n{}", run.stderr);
        assert!(run.stderr.contains(says), "{args:?}:\n{}", run.stderr);
        assert!(run.stderr.contains("-"), "{}", run.stderr);
        assert!(
            !run.stderr.contains("unexpected argument"),
            "{}",
            run.stderr
        );
    }
}

/// Source: the README (`--depth`/`--kinds` with `--fail` are refused, exit 2).
#[test]
fn fail_with_depth_or_kinds_is_refused() {
    let f = TempPath::with_text("fail-depth", PATH_NET);
    for extra in [["--depth", "2"], ["--kinds", "links"]] {
        let mut args = vec!["audit", f.path(), "--fail", "site:b"];
        args.extend_from_slice(&extra);
        let run = redoubt(&args);
        assert_eq!(run.code, 2, "{args:?}:\n{}", run.stderr);
        assert!(run.stderr.contains(extra[0]), "{}", run.stderr);
        assert!(run.stdout.is_empty());
    }
}

/// Source: contract ("non-finite number ... is refused ... exit status 2"), the format
/// doc's limits (each amount and each total at most 1e300) and hand computation. Amounts
/// of 1e308, whose Σ required (2e308) overflows f64, are refused with exit 2 naming the
/// limit. At the limit the answer is right: two demands a→b of 5e299 (Σ required 1e300,
/// at the limit), a link of 6e299 and processing 1e300 at a serve 6e299 (the link binds),
/// shortfall 1e300 − 6e299 = 4e299, by hand.
#[test]
fn overflowing_totals_are_refused_or_right() {
    let over = r#"{"sites": [{"id": "a", "processing": 1e308}, {"id": "b", "processing": 1e308}],
      "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 1e308}],
      "demands": [{"from": "a", "to": "b", "volume": 1e308},
                  {"from": "a", "to": "b", "volume": 1e308}]}"#;
    let f = TempPath::with_text("overflow", over);
    let run = redoubt(&["check", f.path()]);
    assert_eq!(run.code, 2, "1e308 amounts accepted:\n{}", run.stdout);
    assert!(run.stderr.contains("1e300"), "{}", run.stderr);

    let at_limit = r#"{"sites": [{"id": "a", "processing": 1e300}, {"id": "b"}],
      "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 6e299}],
      "demands": [{"from": "a", "to": "b", "volume": 5e299},
                  {"from": "a", "to": "b", "volume": 5e299}]}"#;
    let f = TempPath::with_text("at-limit", at_limit);
    let out = TempPath::new("at-limit-out", "json");
    let run = redoubt(&["audit", f.path(), "--quiet", "--json", out.path()]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc = out.read_json();
    let base = scenario(&doc, &[]);
    for (field, want) in [("served_required", 6e299), ("shortfall", 4e299)] {
        let x = base[field]
            .as_f64()
            .unwrap_or_else(|| panic!("{field} is {} in the JSON", base[field]));
        assert!(
            (x - want).abs() <= 1e-6 * want,
            "{field} = {x}, want {want:e}"
        );
    }
}
