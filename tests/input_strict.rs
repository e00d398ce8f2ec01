//! Input that used to be silently misread, through the real binary: `null` in an optional
//! field, non-finite numbers in imported CSV cells, networkx capacity attributes that fell
//! back to a default without a word, and ids holding invisible format characters.
//!
//! Outside references, named beside each check:
//! - the input contract `shared/network-format.md`: its defaults table (processing 0,
//!   required = volume, expand_max unlimited...), "wrong JSON types" are refused with exit
//!   status 2, naming the element, the field and the value;
//! - RFC 8259 (JSON) section 3: `null` is a value of its own, not the absence of a member;
//! - IEEE 754 binary64: the largest finite double is about 1.797e308, so `1e999` has no
//!   finite value, and NaN and the infinities are not amounts;
//! - the Unicode Character Database through the `unicode-properties` crate 0.1.5 (Unicode
//!   18.0.0): general category Cf ("Format");
//! - the Internet Topology Zoo's Abilene as packaged by topohub 1.5.1 (`fixtures/open/`):
//!   its own edge attributes and `graph.stats` (14 links, average link length 1006.17).

mod common;

use common::{TempPath, fixture, redoubt, s};
use serde_json::{Value, json};

/// A valid network in which every optional field of every element is present.
fn full() -> Value {
    json!({
        "name": "downs", "unit": "Gbit/s", "notes": "draft",
        "sites": [
            {"id": "harrow", "processing": 6, "expand_cost": 1, "expand_max": 4,
             "expand_step": 2, "failure_probability": 0.01, "x": 0, "y": 1, "notes": "s"},
            {"id": "wembley"}
        ],
        "links": [
            {"id": "hw", "from": "harrow", "to": "wembley", "capacity": 10, "one_way": false,
             "risk_groups": ["duct"], "metric": 5, "failure_probability": 0.02, "notes": "l"}
        ],
        "demands": [
            {"id": "video", "from": "harrow", "to": "wembley", "volume": 5, "required": 4,
             "notes": "d"}
        ],
        "risk_groups": [{"id": "duct", "failure_probability": 0.001, "notes": "r"}]
    })
}

/// `redoubt check` on `doc`.
fn check(doc: &Value) -> common::Run {
    let f = TempPath::with_text("strict", &doc.to_string());
    redoubt(&["check", f.path()])
}

/// Asserts exit 2 and every needle in the message; returns the message.
fn assert_refused(case: &str, run: &common::Run, needles: &[&str]) -> String {
    assert_eq!(
        run.code, 2,
        "{case}: not refused (exit {}):\n{}{}",
        run.code, run.stdout, run.stderr
    );
    for n in needles {
        assert!(
            run.stderr.contains(n),
            "{case}: message lacks {n:?}:\n{}",
            run.stderr
        );
    }
    run.stderr.clone()
}

// ---------------------------------------------------------------------------------------
// null in optional fields
// ---------------------------------------------------------------------------------------

/// Source: the contract ("wrong JSON types" are refused, naming element and field) and
/// RFC 8259 section 3 (`null` is a value, not an absent member). Reproduced: `"processing":
/// null` read as 0, `"required": null` as the volume, `"expand_max": null` as unlimited.
/// Every optional field of sites, links, demands, risk groups and the document is tried;
/// leaving the same field out is accepted (the control: the null alone is refused).
#[test]
fn null_in_any_optional_field_is_refused_naming_element_and_field() {
    let site = "sites[0] (id \"harrow\")";
    let link = "links[0] (id \"hw\")";
    let demand = "demands[0] (id \"video\", harrow→wembley)";
    let group = "risk_groups[0] (id \"duct\")";
    let top = "the network";
    let number = "null is not a number";
    let string = "null is not a string";
    // (list or "" for the document, field, element named, what the message says)
    let cases: &[(&str, &str, &str, &str)] = &[
        ("sites", "processing", site, number),
        ("sites", "expand_cost", site, number),
        ("sites", "expand_max", site, number),
        ("sites", "expand_step", site, number),
        ("sites", "failure_probability", site, number),
        ("sites", "x", site, number),
        ("sites", "y", site, number),
        ("sites", "notes", site, string),
        ("links", "one_way", link, "null is not true or false"),
        ("links", "risk_groups", link, "null is not a list of names"),
        ("links", "metric", link, number),
        ("links", "failure_probability", link, number),
        ("links", "notes", link, string),
        // With its id null, the demand is named by its ends.
        ("demands", "id", "demands[0] (harrow→wembley)", string),
        ("demands", "required", demand, number),
        ("demands", "notes", demand, string),
        ("risk_groups", "notes", group, string),
        ("", "name", top, string),
        ("", "unit", top, string),
        ("", "notes", top, string),
        ("", "risk_groups", top, "null is not a list"),
        ("", "demands", top, "null is not a list"),
    ];
    for &(list, field, element, what) in cases {
        let mut doc = full();
        let mut absent = full();
        if list.is_empty() {
            doc[field] = Value::Null;
            absent.as_object_mut().unwrap().remove(field);
        } else {
            doc[list][0][field] = Value::Null;
            absent[list][0].as_object_mut().unwrap().remove(field);
        }
        if list == "links" && field == "risk_groups" {
            // Without the link's group the top-level entry would name no group.
            absent.as_object_mut().unwrap().remove("risk_groups");
        }
        let case = format!("{list}.{field}");
        let m = assert_refused(&case, &check(&doc), &[element, &format!("`{field}`"), what]);
        assert!(m.contains("leave the field out"), "{case}: {m}");
        let run = check(&absent);
        assert_eq!(run.code, 0, "{case} left out: {}", run.stderr);
    }
    // A list that must be there says so; `links: null` is refused like the others.
    let mut doc = full();
    doc["sites"] = Value::Null;
    assert_refused("sites", &check(&doc), &["`sites`", "null is not a list"]);
    let mut doc = full();
    doc["links"] = Value::Null;
    assert_refused("links", &check(&doc), &["`links`", "null is not a list"]);
}

/// Source: the contract's defaults table (required defaults to the volume, processing to
/// 0). The reproduced cases, as the user wrote them: each is refused, and the field left
/// out still takes the contract's default (hand: volume 5, so required 5; processing 0
/// at harrow, so the only processing is none).
#[test]
fn the_reproduced_nulls_are_refused_and_absence_keeps_the_default() {
    let mut doc = full();
    doc["sites"][0]["processing"] = Value::Null;
    let m = assert_refused(
        "processing",
        &check(&doc),
        &["harrow", "`processing`", "null is not a number"],
    );
    assert!(m.contains("leave the field out for the default"), "{m}");
    let mut doc = full();
    doc["demands"][0]["required"] = Value::Null;
    assert_refused(
        "required",
        &check(&doc),
        &["demands[0]", "`required`", "null is not a number"],
    );
    let mut doc = full();
    doc["sites"][0]["expand_max"] = Value::Null;
    assert_refused(
        "expand_max",
        &check(&doc),
        &["harrow", "`expand_max`", "null is not a number"],
    );

    let mut absent = full();
    absent["demands"][0]
        .as_object_mut()
        .unwrap()
        .remove("required");
    absent["sites"][0]
        .as_object_mut()
        .unwrap()
        .remove("processing");
    let run = check(&absent);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("required 5 Gbit/s"),
        "required = volume 5:\n{}",
        run.stdout
    );
    assert!(
        run.stdout.contains("processing 0 Gbit/s"),
        "processing 0:\n{}",
        run.stdout
    );
}

// ---------------------------------------------------------------------------------------
// CSV import: non-finite numbers
// ---------------------------------------------------------------------------------------

/// Three CSV files and the output path; each file holds `text`.
struct Csv {
    sites: TempPath,
    links: TempPath,
    demands: TempPath,
    out: TempPath,
}

impl Csv {
    fn new(sites: &str, links: &str, demands: &str) -> Csv {
        let write = |stem: &str, text: &str| {
            let p = TempPath::new(stem, "csv");
            std::fs::write(&p.0, text).expect("write csv");
            p
        };
        Csv {
            sites: write("sites", sites),
            links: write("links", links),
            demands: write("demands", demands),
            out: TempPath::new("imported", "json"),
        }
    }

    fn import(&self) -> common::Run {
        redoubt(&[
            "import",
            "csv",
            "--sites",
            self.sites.path(),
            "--links",
            self.links.path(),
            "--demands",
            self.demands.path(),
            "--json",
            self.out.path(),
        ])
    }
}

const SITES: &str = "id,processing,expand_cost,expand_max,x\nharrow,6,1,4,0\nwembley,,,,\n";
const LINKS: &str = "id,from,to,capacity,metric,failure_probability\nhw,harrow,wembley,10,5,\n";
const DEMANDS: &str = "id,from,to,volume,required\nvideo,harrow,wembley,5,\n";

/// Source: IEEE 754 binary64 (no finite double for `1e999`; NaN and the infinities are
/// not amounts) and the contract (refused, naming what is wrong, exit 2). Reproduced:
/// `NaN`, `inf`, `1e999` in an optional column became `null`, then the default, and the
/// import said "valid". Each is refused naming the file, line, row, column and value, and
/// no network is written.
#[test]
fn non_finite_csv_numbers_are_refused_with_file_row_column_and_value() {
    for bad in ["NaN", "nan", "inf", "-inf", "infinity", "1e999", "-1e999"] {
        // (which file, the cell's text, the same with the bad value at `BAD`, column, row);
        // the header is line 1, so row r is line r + 1.
        let cases = [
            ("sites", "harrow,6,", "harrow,BAD,", "processing", 1),
            ("sites", "wembley,,,,", "wembley,,,BAD,", "expand_max", 2),
            ("links", ",5,\n", ",5,BAD\n", "failure_probability", 1),
            ("demands", ",5,\n", ",5,BAD\n", "required", 1),
            ("links", ",10,", ",BAD,", "capacity", 1),
        ];
        for (file, cell, bad_cell, column, row) in cases {
            let base = match file {
                "sites" => SITES,
                "links" => LINKS,
                _ => DEMANDS,
            };
            let text = base.replace(cell, &bad_cell.replace("BAD", bad));
            let line = row + 1;
            let csv = match file {
                "sites" => Csv::new(&text, LINKS, DEMANDS),
                "links" => Csv::new(SITES, &text, DEMANDS),
                _ => Csv::new(SITES, LINKS, &text),
            };
            let path = match file {
                "sites" => csv.sites.path(),
                "links" => csv.links.path(),
                _ => csv.demands.path(),
            };
            let case = format!("{bad} in {file}.{column}");
            let run = csv.import();
            assert_refused(
                &case,
                &run,
                &[
                    path,
                    &format!("line {line}"),
                    &format!("row {row}"),
                    &format!("\"{column}\""),
                    &format!("\"{bad}\""),
                    "not a finite number",
                ],
            );
            assert!(!csv.out.0.exists(), "{case}: a network was written");
        }
    }
}

/// Source: the contract's defaults table (processing 0, required = volume, expand absent,
/// metric 1). Empty cells keep taking the default: the written network leaves those fields
/// out, and `check` reports required = volume (hand: 5) and processing 6 (harrow's only).
/// A finite number in exponent form is read as written (2.5e1 = 25, by hand).
#[test]
fn empty_csv_cells_still_take_the_default() {
    let csv = Csv::new(SITES, &LINKS.replace(",10,", ",2.5e1,"), DEMANDS);
    let run = csv.import();
    assert_eq!(run.code, 0, "{}", run.stderr);
    let net = csv.out.read_json();
    let wembley = &net["sites"][1];
    for field in ["processing", "expand_cost", "expand_max", "x"] {
        assert!(wembley.get(field).is_none(), "{field}: {wembley}");
    }
    assert!(net["demands"][0].get("required").is_none(), "{net}");
    assert!(
        net["links"][0].get("failure_probability").is_none(),
        "{net}"
    );
    assert_eq!(net["links"][0]["capacity"], json!(25.0));
    assert!(run.stdout.contains("required 5 units"), "{}", run.stdout);
    assert!(run.stdout.contains("processing 6 units"), "{}", run.stdout);
}

// ---------------------------------------------------------------------------------------
// networkx import: capacity attributes, links and edges
// ---------------------------------------------------------------------------------------

/// `import networkx FILE --json OUT ARGS...`.
fn networkx(graph: &Value, out: &TempPath, args: &[&str]) -> common::Run {
    let g = TempPath::with_text("graph", &graph.to_string());
    let mut all = vec!["import", "networkx", g.path(), "--json", out.path()];
    all.extend_from_slice(args);
    redoubt(&all)
}

fn three_nodes(edges: Value) -> Value {
    json!({"nodes": [{"id": 1}, {"id": 2}, {"id": 3}], "links": edges})
}

/// Source: the contract (wrong types refused, naming the element) and the node-link
/// format's plain JSON numbers. Reproduced: a capacity attribute written as text ("10",
/// "10G") silently became the default capacity. Refused, naming each edge, the value and
/// how many edges are affected, with or without `--capacity`.
#[test]
fn capacity_attributes_that_are_not_numbers_are_refused() {
    let graph = three_nodes(json!([
        {"source": 1, "target": 2, "bw": "10"},
        {"source": 2, "target": 3, "bw": "10G"},
        {"source": 1, "target": 3, "bw": 40}
    ]));
    for extra in [&[][..], &["--capacity", "7"][..]] {
        let out = TempPath::new("never", "json");
        let mut args = vec!["--capacity-attr", "bw"];
        args.extend_from_slice(extra);
        let run = networkx(&graph, &out, &args);
        assert_refused(
            "text capacity",
            &run,
            &[
                "2 of 3 links",
                "links[0] (1–2) \"10\"",
                "links[1] (2–3) \"10G\"",
                "not a JSON number",
            ],
        );
        assert!(!out.0.exists());
    }
}

/// Source: the dataset's own edges (fixtures/open/abilene-topozoo.json: attributes
/// `dist`, `ecmp_fwd`, `ecmp_bwd`; `graph.stats.links` = 14). Reproduced: an attribute no
/// edge has gave every link the default capacity. Refused, with the count and the
/// attributes the edges do have, even when `--capacity` is given (the name is wrong).
#[test]
fn a_capacity_attribute_that_no_edge_has_is_refused() {
    let abilene = fixture("open/abilene-topozoo.json");
    for extra in [&[][..], &["--capacity", "40"][..]] {
        let out = TempPath::new("never", "json");
        let mut args = vec![
            "import",
            "networkx",
            s(&abilene),
            "--json",
            out.path(),
            "--capacity-attr",
            "capacity",
        ];
        args.extend_from_slice(extra);
        let run = redoubt(&args);
        assert_refused(
            "no such attribute",
            &run,
            &["no edge has", "14 edges", "dist", "ecmp_fwd"],
        );
        assert!(!out.0.exists());
    }
}

/// Source: the dataset's own `dist` per edge and `graph.stats.avg_link_len` (1006.17, two
/// decimals, over its 14 links). A numeric attribute present on every edge becomes each
/// link's capacity, read as the file has it.
#[test]
fn a_numeric_capacity_attribute_is_read_on_every_edge() {
    let abilene = fixture("open/abilene-topozoo.json");
    let data: Value = serde_json::from_str(&std::fs::read_to_string(&abilene).unwrap()).unwrap();
    let out = TempPath::new("abilene-dist", "json");
    let run = redoubt(&[
        "import",
        "networkx",
        s(&abilene),
        "--json",
        out.path(),
        "--capacity-attr",
        "dist",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(!run.stderr.contains("take --capacity"), "{}", run.stderr);
    let net = out.read_json();
    let links = net["links"].as_array().unwrap();
    let edges = data["edges"].as_array().unwrap();
    assert_eq!(links.len(), 14);
    for (l, e) in links.iter().zip(edges) {
        assert_eq!(l["capacity"], e["dist"], "{l}");
    }
    let total: f64 = links.iter().map(|l| l["capacity"].as_f64().unwrap()).sum();
    let avg = data["graph"]["stats"]["avg_link_len"].as_f64().unwrap();
    assert!((total / 14.0 - avg).abs() <= 0.005, "{total} / 14 vs {avg}");
}

/// Source: the contract (no silent default; a fallback only when asked for). An edge
/// without the attribute is refused, naming it and the count, unless `--capacity` is
/// given; then those links take it (hand: 10 from the attribute, 7 from the flag) and a
/// note on stderr counts them.
#[test]
fn edges_without_the_attribute_need_an_explicit_capacity() {
    let graph = three_nodes(json!([
        {"source": 1, "target": 2, "speed": 10},
        {"source": 2, "target": 3}
    ]));
    let out = TempPath::new("never", "json");
    let run = networkx(&graph, &out, &["--capacity-attr", "speed"]);
    assert_refused(
        "missing attribute",
        &run,
        &["missing on 1 of 2 links", "links[1] (2–3)", "--capacity"],
    );
    assert!(!out.0.exists());

    let out = TempPath::new("fallback", "json");
    let run = networkx(
        &graph,
        &out,
        &["--capacity-attr", "speed", "--capacity", "7"],
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stderr
            .contains("1 of 2 links have no `speed` and take --capacity 7"),
        "{}",
        run.stderr
    );
    let caps: Vec<f64> = out.read_json()["links"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| l["capacity"].as_f64().unwrap())
        .collect();
    assert_eq!(caps, vec![10.0, 7.0]);
}

/// Source: networkx's node-link format keeps the edges under one key (`links`, or `edges`
/// in newer releases; from memory). Reproduced: a file with both silently ignored
/// `edges`. Refused with both counts; nothing written.
#[test]
fn a_graph_with_both_links_and_edges_is_refused() {
    let graph = json!({
        "nodes": [{"id": "a"}, {"id": "b"}, {"id": "c"}],
        "links": [{"source": "a", "target": "b"}],
        "edges": [{"source": "b", "target": "c"}, {"source": "a", "target": "c"}]
    });
    let out = TempPath::new("never", "json");
    let run = networkx(&graph, &out, &[]);
    assert_refused("both", &run, &["`links` (1)", "`edges` (2)"]);
    assert!(!out.0.exists());
    // Either one alone is read: 2 edges give 2 links (hand).
    let mut edges_only = graph.clone();
    edges_only.as_object_mut().unwrap().remove("links");
    let out = TempPath::new("edges-only", "json");
    let run = networkx(&edges_only, &out, &[]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_eq!(out.read_json()["links"].as_array().unwrap().len(), 2);
}

// ---------------------------------------------------------------------------------------
// Ids with format characters
// ---------------------------------------------------------------------------------------

/// Puts an id into a document, where a case needs it.
type Put = Box<dyn Fn(&mut Value, &str)>;

/// Source: Unicode general category Cf (U+200B ZERO WIDTH SPACE, U+061C ARABIC LETTER
/// MARK, U+202E RIGHT-TO-LEFT OVERRIDE, U+FEFF ZERO WIDTH NO-BREAK SPACE, U+2060 WORD
/// JOINER, U+00AD SOFT HYPHEN, U+E0041 TAG LATIN CAPITAL LETTER A; checked against the
/// `unicode-properties` crate below). Reproduced: such ids were accepted and printed like
/// another id (`har\u{200b}row` beside `harrow`). Each is refused in every kind of id,
/// naming the element, the field and the code point, and no raw format character reaches
/// the message.
#[test]
fn ids_with_format_characters_are_refused_with_the_code_point() {
    let with = |c: char| format!("har{c}row");
    let cases: Vec<(char, &str, Put, &str, &str)> = vec![
        (
            '\u{200B}',
            "U+200B",
            Box::new(|d: &mut Value, id: &str| {
                d["sites"].as_array_mut().unwrap().push(json!({"id": id}));
            }),
            "sites[2]",
            "`id`",
        ),
        (
            '\u{061C}',
            "U+061C",
            Box::new(|d: &mut Value, id: &str| d["links"][0]["id"] = json!(id)),
            "links[0]",
            "`id`",
        ),
        (
            '\u{202E}',
            "U+202E",
            Box::new(|d: &mut Value, id: &str| d["demands"][0]["id"] = json!(id)),
            "demands[0]",
            "`id`",
        ),
        (
            '\u{FEFF}',
            "U+FEFF",
            Box::new(|d: &mut Value, id: &str| {
                d["links"][0]["risk_groups"] = json!([id]);
                d["risk_groups"][0]["id"] = json!(id);
            }),
            "links[0]",
            "`risk_groups`",
        ),
        (
            '\u{2060}',
            "U+2060",
            Box::new(|d: &mut Value, id: &str| d["risk_groups"][0]["id"] = json!(id)),
            "risk_groups[0]",
            "`id`",
        ),
        (
            '\u{00AD}',
            "U+00AD",
            Box::new(|d: &mut Value, id: &str| d["sites"][1]["id"] = json!(id)),
            "sites[1]",
            "`id`",
        ),
        (
            '\u{E0041}',
            "U+E0041",
            Box::new(|d: &mut Value, id: &str| d["demands"][0]["id"] = json!(id)),
            "demands[0]",
            "`id`",
        ),
    ];
    for (c, code, put, element, field) in cases {
        let mut doc = full();
        put(&mut doc, &with(c));
        let run = check(&doc);
        let m = assert_refused(code, &run, &[element, field, code]);
        assert!(
            !m.chars().any(redoubt::model::strict::is_format_char),
            "{code}: a format character reached the message: {m:?}"
        );
    }
    // Control: letters of other scripts, spaces inside and `:` are fine in ids.
    let mut doc = full();
    doc["sites"]
        .as_array_mut()
        .unwrap()
        .push(json!({"id": "Zürich 1"}));
    doc["sites"]
        .as_array_mut()
        .unwrap()
        .push(json!({"id": "حلب:2"}));
    doc["demands"][0]["id"] = json!("東京 video");
    let run = check(&doc);
    assert_eq!(run.code, 0, "{}", run.stderr);
}

/// Source: UAX #9 lists U+061C ARABIC LETTER MARK among the directional marks (the
/// `Bidi_Control` property; from memory). The `name` and `unit` labels refuse it like the
/// other bidirectional controls, with the code point.
#[test]
fn the_arabic_letter_mark_is_refused_in_labels() {
    let mut doc = full();
    doc["name"] = json!("downs\u{061C}");
    assert_refused("alm-name", &check(&doc), &["`name`", "U+061C"]);
}

/// Source: the `unicode-properties` crate 0.1.5 (Unicode 18.0.0, its `UNICODE_VERSION`):
/// our embedded Cf ranges agree with its general category on every code point, and hold
/// the 170 code points of Cf.
#[test]
fn format_characters_match_the_unicode_database() {
    use unicode_properties::general_category::{GeneralCategory, UnicodeGeneralCategory};
    assert_eq!(unicode_properties::UNICODE_VERSION, (18, 0, 0));
    let mut count = 0;
    for c in (0..=0x10FFFFu32).filter_map(char::from_u32) {
        let reference = c.general_category() == GeneralCategory::Format;
        assert_eq!(
            redoubt::model::strict::is_format_char(c),
            reference,
            "U+{:04X}",
            c as u32
        );
        count += usize::from(reference);
    }
    assert_eq!(count, 170);
}
