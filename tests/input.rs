//! Strict reading of network files, end to end: each defect once found in reading
//! files drives the real binary (`redoubt check` / `audit`). The property tests on the
//! library are in `tests/input_properties.rs`.
//!
//! Outside references, named beside each check:
//! - the input contract `shared/network-format.md` (field names, defaults, exit status 2,
//!   "names the element, the field and the value", "Never a panic");
//! - RFC 8259 (JSON): §4 "The names within an object SHOULD be unique" and the behaviour of
//!   readers with duplicates "is unpredictable"; §8.1 a reader MAY ignore a byte-order mark;
//! - the Unicode standard: `char::is_control` is the Cc category (ECMA-48 ESC, the OSC
//!   introducer `ESC ]`, BEL, NUL);
//! - the `strsim` crate's `osa_distance` as a reference for our own edit distance;
//! - f64 limits (`f64::MAX` ≈ 1.8e308) for the overflow rows.

mod common;

use std::path::Path;

use common::{Run, TempPath, redoubt, temp_root};
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use redoubt::model::{MAX_AMOUNT, Network, strict};
use serde_json::{Value, json};

fn check(case: &str, text: &str) -> Run {
    let f = TempPath::with_text(case, text);
    redoubt(&["check", f.path()])
}

/// `check` must refuse `text` with exit 2 and a message holding every one of `needles`.
fn refused(case: &str, text: &str, needles: &[&str]) -> String {
    let run = check(case, text);
    // Source: contract, "Invalid input ... is refused ... and exit status 2".
    assert_eq!(
        run.code, 2,
        "{case}: accepted (exit {}):\n{}",
        run.code, run.stdout
    );
    for n in needles {
        assert!(
            run.stderr.contains(n),
            "{case}: message lacks {n:?}:\n{}",
            run.stderr
        );
    }
    run.stderr
}

fn accepted(case: &str, text: &str) -> Run {
    let run = check(case, text);
    assert_eq!(run.code, 0, "{case}: refused:\n{}", run.stderr);
    run
}

/// Two sites and a link; `site`, `link` and `demand` are spliced into the entries (each
/// starts with a comma when not empty), `top` into the document.
fn net(site: &str, link: &str, demand: &str, top: &str) -> String {
    format!(
        r#"{{"sites": [{{"id": "kestrel", "processing": 5{site}}}, {{"id": "plover"}}],
  "links": [{{"id": "ln-7", "from": "kestrel", "to": "plover", "capacity": 10,
              "risk_groups": ["north-duct"]{link}}}],
  "demands": [{{"from": "kestrel", "to": "plover", "volume": 4, "required": 3{demand}}}]{top}}}"#
    )
}

// ---------------------------------------------------------------------------------------
// Row 5: unknown fields
// ---------------------------------------------------------------------------------------

/// Source: contract (field names; invalid input named by element and field, exit 2).
/// Regression guard: each misspelling below was silently ignored (a risk group vanished,
/// processing became 0). Near misses by one or two edits get a "did you mean".
#[test]
fn misspelled_fields_are_refused_with_a_suggestion() {
    let cases: [(&str, String, &[&str]); 6] = [
        (
            "riskgroups",
            net("", r#", "riskgroups": ["south"]"#, "", ""),
            &[
                "links[0]",
                "ln-7",
                "`riskgroups`",
                "did you mean `risk_groups`?",
            ],
        ),
        (
            "procesing",
            net(r#", "procesing": 50"#, "", "", ""),
            &[
                "sites[0]",
                "kestrel",
                "`procesing`",
                "did you mean `processing`?",
            ],
        ),
        (
            "oneway",
            net("", r#", "oneway": true"#, "", ""),
            &["links[0]", "`oneway`", "did you mean `one_way`?"],
        ),
        (
            "requried",
            net("", "", r#", "requried": 1"#, ""),
            &["demands[0]", "`requried`", "did you mean `required`?"],
        ),
        (
            "top-level",
            net("", "", "", r#", "demand": []"#),
            &["the network", "`demand`", "did you mean `demands`?"],
        ),
        (
            "risk-group-entry",
            net(
                "",
                "",
                "",
                r#", "risk_groups": [{"id": "north-duct", "failure_probabilty": 0.1}]"#,
            ),
            &[
                "risk_groups[0]",
                "`failure_probabilty`",
                "did you mean `failure_probability`?",
            ],
        ),
    ];
    for (case, text, needles) in &cases {
        refused(case, text, needles);
    }
    // A field far from every known name: refused, without a suggestion.
    let m = refused(
        "bandwidth",
        &net("", r#", "bandwidth": 9"#, "", ""),
        &["`bandwidth`"],
    );
    assert!(!m.contains("did you mean"), "{m}");
    // Through `audit` too (exit 2 before any solving).
    let f = TempPath::with_text("audit-procesing", &net(r#", "procesing": 50"#, "", "", ""));
    let run = redoubt(&["audit", f.path(), "--quiet"]);
    assert_eq!(run.code, 2, "{}", run.stderr);
}

/// Source: the format doc (a site, link or demand, and the document, may carry `notes` and `x-`
/// fields) and the contract's optional fields (metric, failure probabilities, risk_groups),
/// plus our own (x, y, expand_step, demand id). Every one of them is accepted.
#[test]
fn notes_annotations_and_every_known_optional_field_are_accepted() {
    let text = net(
        r#", "notes": "rack 4", "x-vendor": {"any": ["json", 1]}, "x": -3.5, "y": 12,
            "expand_cost": 2, "expand_max": 10, "expand_step": 2.5, "failure_probability": 0.01"#,
        r#", "notes": "leased", "x-circuit": "C-77", "metric": 20, "one_way": false,
            "failure_probability": 0.001"#,
        r#", "id": "voice", "notes": "", "x-ticket": 42"#,
        r#", "name": "sandpit", "unit": "Gbit/s", "notes": "drawn by hand", "x-rev": 3,
            "risk_groups": [{"id": "north-duct", "failure_probability": 0.002, "notes": "dug 1998"}]"#,
    );
    let run = accepted("extras", &text);
    assert!(run.stdout.contains("sandpit"), "{}", run.stdout);
    // What was read reached the model (library view of the same file).
    let n = Network::from_json(&text).expect("valid");
    assert_eq!((n.sites[0].x, n.sites[0].y), (Some(-3.5), Some(12.0)));
    assert_eq!(n.groups[0].failure_probability, Some(0.002));
    assert_eq!(n.links[0].metric, 20);
    assert_eq!(n.demands[0].label, "voice");
}

/// Source: contract (`notes` is free text; wrong JSON types are refused) and the format doc
/// ("for free text like notes, never print it"): a note full of escape sequences is
/// accepted and none of it reaches the output; a note that is not a string is refused.
#[test]
fn notes_are_never_printed_and_must_be_strings() {
    let text = net(
        r#", "notes": "\u001b]0;owned\u0007\u001b[2J secret-note""#,
        "",
        "",
        "",
    );
    let run = accepted("escape-note", &text);
    assert!(
        !run.stdout.contains('\x1b') && !run.stderr.contains('\x1b'),
        "an ESC byte reached the output"
    );
    assert!(!run.stdout.contains("secret-note") && !run.stderr.contains("secret-note"));
    let f = TempPath::with_text("escape-note-audit", &text);
    let run = redoubt(&["audit", f.path(), "--quiet"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        !run.stdout.contains('\x1b') && !run.stderr.contains('\x1b'),
        "an ESC byte reached the audit output"
    );
    refused(
        "notes-number",
        &net("", r#", "notes": 5"#, "", ""),
        &["links[0]", "notes"],
    );
}

/// Source: contract ("Failure probabilities": a top-level list of {"id", "failure_probability"},
/// 0 <= p < 1, naming groups that links name) and the format doc (no duplicates).
#[test]
fn top_level_risk_groups_are_validated() {
    let rg = |entries: &str| net("", "", "", &format!(r#", "risk_groups": [{entries}]"#));
    refused(
        "rg-unknown",
        &rg(r#"{"id": "south-duct", "failure_probability": 0.1}"#),
        &["risk_groups[0]", "south-duct"],
    );
    refused(
        "rg-p-one",
        &rg(r#"{"id": "north-duct", "failure_probability": 1}"#),
        &["risk_groups[0]", "failure_probability", "1"],
    );
    refused(
        "rg-p-negative",
        &rg(r#"{"id": "north-duct", "failure_probability": -0.5}"#),
        &["risk_groups[0]", "failure_probability", "-0.5"],
    );
    refused(
        "rg-duplicate",
        &rg(r#"{"id": "north-duct", "failure_probability": 0.1},
               {"id": "north-duct", "failure_probability": 0.2}"#),
        &["risk_groups[1]", "north-duct", "risk_groups[0]"],
    );
    refused(
        "rg-missing-p",
        &rg(r#"{"id": "north-duct"}"#),
        &["risk_groups[0]", "failure_probability"],
    );
    refused(
        "rg-not-object",
        &rg(r#""north-duct""#),
        &["risk_groups[0]", "object"],
    );
    accepted(
        "rg-ok",
        &rg(r#"{"id": "north-duct", "failure_probability": 0.25}"#),
    );
}

/// Source: our format doc (sites[].x, y: finite numbers). JSON has no literal for a
/// non-finite number, so the only ways in are the wrong type and an out-of-range literal.
#[test]
fn drawing_coordinates_must_be_finite_numbers() {
    refused(
        "x-string",
        &net(r#", "x": "3""#, "", "", ""),
        &["sites[0]", "x", "3"],
    );
    refused(
        "y-huge",
        &net(r#", "y": 1e999"#, "", "", ""),
        &["sites[0]", "y", "1e999"],
    );
}

// ---------------------------------------------------------------------------------------
// Row 6: duplicate keys
// ---------------------------------------------------------------------------------------

/// Source: RFC 8259 §4 (duplicate names make reader behaviour unpredictable). Regression
/// guard: the last of two keys won silently.
#[test]
fn duplicate_keys_are_refused_naming_key_and_place() {
    refused(
        "dup-processing",
        &net(r#", "processing": 50"#, "", "", ""),
        &["sites[0]", "kestrel", "`processing`", "more than once"],
    );
    let second_sites = net("", "", "", r#", "sites": [{"id": "tern"}]"#);
    refused(
        "dup-sites",
        &second_sites,
        &["the network", "`sites`", "more than once"],
    );
    refused(
        "dup-in-demand",
        &net("", "", r#", "volume": 40"#, ""),
        &["demands[0]", "`volume`"],
    );
    refused(
        "dup-inside-annotation",
        &net("", r#", "x-tags": {"a": 1, "a": 2}"#, "", ""),
        &["links[0]", "x-tags", "`a`"],
    );
}

// ---------------------------------------------------------------------------------------
// Row 12: byte-order mark
// ---------------------------------------------------------------------------------------

/// Source: RFC 8259 §8.1 (a reader may ignore a leading BOM). Regression guard: "expected
/// value at line 1 column 1". The summary is the same as for the file without it.
#[test]
fn a_leading_byte_order_mark_is_accepted() {
    let text = net("", "", "", "");
    let plain = accepted("no-bom", &text);
    let mut bytes = vec![0xEF, 0xBB, 0xBF];
    bytes.extend_from_slice(text.as_bytes());
    let f = TempPath::with_bytes("bom", &bytes);
    let run = redoubt(&["check", f.path()]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_eq!(run.stdout, plain.stdout);
    let run = redoubt(&["audit", f.path(), "--quiet"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    // A BOM anywhere else is not whitespace in JSON (RFC 8259 §2): refused.
    let inner = text.replacen("\"sites\"", "\u{FEFF}\"sites\"", 1);
    refused("inner-bom", &inner, &["line"]);
}

/// Source: RFC 8259 §8.1 (JSON text is UTF-8). Bytes that are not UTF-8: exit 2 naming
/// the offset, never a panic.
#[test]
fn invalid_utf8_is_refused_with_its_offset() {
    let mut bytes = br#"{"sites": [{"id": "ke"#.to_vec();
    let at = bytes.len();
    bytes.extend_from_slice(b"\xFFstrel\"}]}");
    let f = TempPath::with_bytes("not-utf8", &bytes);
    let run = redoubt(&["check", f.path()]);
    assert_eq!(run.code, 2, "{}", run.stderr);
    assert!(
        run.stderr.contains(&format!("byte offset {at}")),
        "{}",
        run.stderr
    );
}

// ---------------------------------------------------------------------------------------
// Row 7: control characters
// ---------------------------------------------------------------------------------------

/// Source: Unicode Cc category (`char::is_control`: ESC U+001B starts ECMA-48 sequences,
/// `ESC ]` an OSC, BEL U+0007 ends it, NUL U+0000). Regression guard: raw escape sequences
/// from ids reached the terminal. Each is refused with exit 2 and the reason, and the
/// message itself carries no control byte.
#[test]
fn control_characters_in_ids_and_labels_are_refused() {
    let esc_site = r#"{"sites": [{"id": "kes\u001b[31mtrel"}, {"id": "plover"}]}"#.to_string();
    let osc_link = net("", "", "", "").replace("\"ln-7\"", r#""ln\u001b]8;;http://x\u0007-7""#);
    let nul_group = net("", "", "", "").replace("\"north-duct\"", r#""north\u0000""#);
    let demand_id = net("", "", r#", "id": "v\u009boice""#, "");
    let name = net("", "", "", r#", "name": "sand\u001bpit""#);
    let unit = net("", "", "", r#", "unit": "Gbit/s\r""#);
    let bidi = net("", "", "", "").replace("\"kestrel\"", r#""kes\u202etrel""#);
    let cases: [(&str, &str, &[&str]); 7] = [
        (
            "esc-site",
            &esc_site,
            &["sites[0]", "`id`", "U+001B", "control character"],
        ),
        ("osc-link", &osc_link, &["links[0]", "`id`", "U+001B"]),
        (
            "nul-group",
            &nul_group,
            &["links[0]", "`risk_groups`", "U+0000"],
        ),
        (
            "c1-demand-id",
            &demand_id,
            &["demands[0]", "`id`", "U+009B"],
        ),
        ("esc-name", &name, &["`name`", "U+001B"]),
        ("cr-unit", &unit, &["`unit`", "U+000D"]),
        ("bidi-site", &bidi, &["sites[0]", "U+202E"]),
    ];
    for (case, text, needles) in cases {
        refused(case, text, needles);
        let f = TempPath::with_text(case, text);
        let run = redoubt(&["check", f.path()]);
        let bad = run
            .stdout
            .bytes()
            .chain(run.stderr.bytes())
            .any(|b| b < 0x20 && b != b'\n' && b != b'\t');
        assert!(
            !bad,
            "{case}: a control byte reached the output: {:?}",
            run.stderr
        );
        assert!(
            !run.stderr.contains('\u{9b}') && !run.stderr.contains('\u{202e}'),
            "{case}"
        );
    }
}

// ---------------------------------------------------------------------------------------
// Row 8 and row 14 (the repeated element): ids that `--fail` cannot name, strict lists
// ---------------------------------------------------------------------------------------

/// Source: a reproduced defect (ids `x`, `y`, `x,link:y`: the wrong scenario ran with
/// exit 0; `site:a ` failed `a`). The comma is the `--fail` separator, and nothing is
/// trimmed, so such ids are refused when the file is read, with the reason.
#[test]
fn ids_that_fail_lists_cannot_name_are_refused() {
    let comma = r#"{"sites": [{"id": "x"}, {"id": "y"}, {"id": "x,link:y"}],
      "links": [{"id": "y", "from": "x", "to": "y", "capacity": 1}]}"#;
    refused("comma-site", comma, &["sites[2]", "x,link:y", "separator"]);
    let f = TempPath::with_text("comma-audit", comma);
    let run = redoubt(&["audit", f.path(), "--quiet", "--fail", "site:x,link:y"]);
    assert_eq!(run.code, 2, "the wrong scenario ran:\n{}", run.stdout);
    for (case, from, to) in [
        ("trailing-space", "\"kestrel\"", "\"kestrel \""),
        ("leading-space", "\"plover\"", "\" plover\""),
        ("ideographic-space", "\"ln-7\"", "\"ln-7\u{3000}\""),
    ] {
        let text = net("", "", "", "").replace(from, to);
        refused(case, &text, &["whitespace"]);
    }
    let text = net("", "", "", "").replace("\"north-duct\"", "\"north,duct\"");
    refused(
        "comma-group",
        &text,
        &["links[0]", "risk_groups", "separator"],
    );
    // Other punctuation can be named: a colon after the kind is part of the id.
    let text = net("", "", "", "").replace("\"ln-7\"", "\"ln:7 a\"");
    let f = TempPath::with_text("colon-id", &text);
    let run = redoubt(&["audit", f.path(), "--quiet", "--fail", "link:ln:7 a"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
}

/// Source: the `--fail` rules in the README ("no trimming that changes meaning, an empty element is an error, a
/// repeated element is refused with exit 2"); usage errors exit 2 (README, exit statuses).
#[test]
fn fail_lists_are_read_strictly() {
    let f = TempPath::with_text("fail-net", &net("", "", "", ""));
    let bad: [(&str, &str); 8] = [
        ("site:kestrel ", "nothing is trimmed"),
        (" site:kestrel", "nothing is trimmed"),
        ("site:kestrel, link:ln-7", "nothing is trimmed"),
        ("site:kestrel,,link:ln-7", "element 2"),
        ("site:kestrel,", "element 2"),
        ("", "element 1"),
        ("site:kestrel,site:kestrel", "repeats element 1"),
        ("group:north-duct,link:ln-7,group:north-duct", "element 3"),
    ];
    for (list, needle) in bad {
        let run = redoubt(&["audit", f.path(), "--quiet", "--fail", list]);
        assert_eq!(run.code, 2, "--fail {list:?} accepted:\n{}", run.stdout);
        assert!(
            run.stderr.contains(needle),
            "--fail {list:?}: {}",
            run.stderr
        );
    }
    // The same list written correctly runs: exit 0, one scenario with both elements.
    let out = temp_root().join("fail-ok.json");
    let run = redoubt(&[
        "audit",
        f.path(),
        "--quiet",
        "--fail",
        "site:kestrel,link:ln-7",
        "--json",
        out.to_str().unwrap(),
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let doc: Value = serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap();
    let _ = std::fs::remove_file(&out);
    let failed = &doc["scenarios"][0]["failed"];
    assert_eq!(failed, &json!(["link:ln-7", "site:kestrel"]), "{doc}");
}

// ---------------------------------------------------------------------------------------
// Row 11: values whose totals overflow
// ---------------------------------------------------------------------------------------

/// Source: f64 limits (f64::MAX ≈ 1.797e308, so 2 × 1e308 and 100 × 1e308 overflow) and
/// our format doc (each amount and each total at most 1e300). Regression guard: "(inf%)"
/// and 309-digit output for 1e308 values.
#[test]
fn amounts_and_totals_beyond_the_limits_are_refused() {
    assert_eq!(MAX_AMOUNT, 1e300, "the format doc states 1e300");
    refused(
        "processing-1e308",
        &net("", "", "", "").replace("\"processing\": 5", "\"processing\": 1e308"),
        &["sites[0]", "`processing`", "1e308", "1e300"],
    );
    refused(
        "volume-1e301",
        &net("", "", "", "").replace("\"volume\": 4", "\"volume\": 1e301"),
        &["demands[0]", "`volume`", "1e301"],
    );
    // Each amount within the limit, their sum above it.
    let two = r#"{"sites": [{"id": "a", "processing": 6e299}, {"id": "b", "processing": 6e299}]}"#;
    refused("sum-processing", two, &["sites", "sum", "`processing`"]);
    // A plan's cost: dearest expand_cost × Σ volume.
    let cost =
        net(r#", "expand_cost": 1e200"#, "", "", "").replace("\"volume\": 4", "\"volume\": 1e101");
    refused(
        "cost-bound",
        &cost.replace("\"required\": 3", "\"required\": 1"),
        &["expand_cost", "volume"],
    );
    // At the limit: accepted, and the audit prints no "inf".
    let at = r#"{"sites": [{"id": "a", "processing": 1e300}, {"id": "b"}],
      "links": [{"id": "ab", "from": "a", "to": "b", "capacity": 1e300}],
      "demands": [{"from": "a", "to": "b", "volume": 1e300, "required": 5e299}]}"#;
    let f = TempPath::with_text("at-limit", at);
    let run = redoubt(&["audit", f.path(), "--quiet"]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(!run.stdout.contains("inf"), "{}", run.stdout);
}

// ---------------------------------------------------------------------------------------
// Existing messages keep naming element, field and value
// ---------------------------------------------------------------------------------------

/// Source: contract ("names the element, the field and the value"). The strict pass runs
/// first; the existing checks behind it still speak.
#[test]
fn existing_messages_still_name_element_field_and_value() {
    refused(
        "negative-capacity",
        &net("", "", "", "").replace("\"capacity\": 10", "\"capacity\": -7.5"),
        &["links[0]", "ln-7", "capacity", "-7.5"],
    );
    refused(
        "unknown-to",
        &net("", "", "", "").replace(
            "\"to\": \"plover\", \"capacity\"",
            "\"to\": \"gannet\", \"capacity\"",
        ),
        &["links[0]", "`to`", "gannet"],
    );
    refused(
        "metric-zero",
        &net("", r#", "metric": 0"#, "", ""),
        &["links[0]", "metric", "0"],
    );
}

// ---------------------------------------------------------------------------------------
// Edit distance against a reference library
// ---------------------------------------------------------------------------------------

/// Source: `strsim::osa_distance` (strsim 0.11, the optimal-string-alignment distance)
/// on every pair of known field names and their common misspellings, plus random strings
/// over a small alphabet (seeded; 2000 pairs).
#[test]
fn edit_distance_matches_strsim() {
    let mut words: Vec<String> = strict::LISTS
        .iter()
        .flat_map(|(_, f)| f.iter())
        .chain(strict::TOP_FIELDS)
        .map(|s| s.to_string())
        .collect();
    words.extend(
        [
            "riskgroups",
            "procesing",
            "oneway",
            "requried",
            "",
            "ção",
            "ab",
            "ba",
        ]
        .map(String::from),
    );
    for a in &words {
        for b in &words {
            assert_eq!(
                strict::osa_distance(a, b),
                strsim::osa_distance(a, b),
                "{a:?} {b:?}"
            );
        }
    }
    let mut rng = StdRng::seed_from_u64(7);
    let word = |rng: &mut StdRng| -> String {
        let n = rng.random_range(0..8);
        (0..n)
            .map(|_| ['a', 'b', 'c', 'é'][rng.random_range(0..4)])
            .collect()
    };
    for _ in 0..2000 {
        let (a, b) = (word(&mut rng), word(&mut rng));
        assert_eq!(
            strict::osa_distance(&a, &b),
            strsim::osa_distance(&a, &b),
            "{a:?} {b:?}"
        );
    }
}

// ---------------------------------------------------------------------------------------
// The format documentation stays in sync with the reader
// ---------------------------------------------------------------------------------------

fn format_doc() -> String {
    let p = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/network-format.md");
    std::fs::read_to_string(p).expect("docs/network-format.md")
}

/// Source: docs/network-format.md itself. Its example is a valid file, and every field the
/// reader knows is documented there.
#[test]
fn the_format_doc_example_is_valid_and_every_field_is_documented() {
    let doc = format_doc();
    let start = doc.find("```json\n").expect("a json example") + "```json\n".len();
    let end = start + doc[start..].find("```").expect("end of the example");
    let run = accepted("doc-example", &doc[start..end]);
    assert!(run.stdout.contains("valley-metro"), "{}", run.stdout);
    for (_, fields) in strict::LISTS {
        for field in fields.iter().chain(strict::TOP_FIELDS) {
            assert!(
                doc.contains(&format!("`{field}`")),
                "`{field}` is not documented"
            );
        }
    }
    assert!(doc.contains("1e300"), "the amount limit is documented");
}
