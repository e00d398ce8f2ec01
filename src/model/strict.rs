//! Strict reading of the document before serde maps it onto the file types: every
//! object key is read (duplicates included, which `serde_json::Value` would drop), every
//! field is one the format knows, and every id can be printed and named on the command
//! line.
//!
//! - [`parse_document`]: JSON text → `serde_json::Value`, refusing duplicate keys at any
//!   depth (naming the key and where it is).
//! - [`check_fields`]: refuses unknown fields of the document, of each site, link, demand
//!   and risk-group entry, with a "did you mean" for near misses ([`osa_distance`]).
//!   Each of them may also carry `notes` and any field whose name starts with [`USER_PREFIX`].
//! - [`check_id`], [`check_label`]: the character rules for ids (no control and no format
//!   character, [`is_format_char`]) and for the `name`/`unit` labels (no control
//!   character).

use serde::de::{self, Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};
use serde_json::Value;

use crate::error::{Error, Result};

/// Fields whose name starts with this are the user's own annotations: accepted anywhere an
/// element's fields are checked, and ignored.
pub const USER_PREFIX: &str = "x-";

/// Free text for the user, allowed in the document and in every element; never printed.
pub const NOTES: &str = "notes";

/// Fields of the document itself.
pub const TOP_FIELDS: &[&str] = &[
    "name",
    "unit",
    "sites",
    "links",
    "demands",
    "risk_groups",
    "matrices",
    "functions",
];
/// Fields of a `sites[]` entry.
pub const SITE_FIELDS: &[&str] = &[
    "id",
    "processing",
    "expand_cost",
    "expand_max",
    "expand_step",
    "functions",
    "expand",
    "failure_probability",
    "x",
    "y",
];
/// Fields of a `links[]` entry.
pub const LINK_FIELDS: &[&str] = &[
    "id",
    "from",
    "to",
    "capacity",
    "one_way",
    "risk_groups",
    "metric",
    "failure_probability",
];
/// Fields of a top-level `matrices[]` entry.
pub const MATRIX_FIELDS: &[&str] = &["id", "demands"];
/// Fields of a `demands[]` entry.
pub const DEMAND_FIELDS: &[&str] = &["id", "from", "to", "volume", "required", "chain"];
/// Fields of a top-level `functions[]` entry.
pub const FUNCTION_FIELDS: &[&str] = &["id", "gain"];
/// Fields of a top-level `risk_groups[]` entry.
pub const RISK_GROUP_FIELDS: &[&str] = &["id", "failure_probability"];

/// The lists of the document, each with the fields of its entries.
pub const LISTS: &[(&str, &[&str])] = &[
    ("sites", SITE_FIELDS),
    ("links", LINK_FIELDS),
    ("demands", DEMAND_FIELDS),
    ("risk_groups", RISK_GROUP_FIELDS),
    ("matrices", MATRIX_FIELDS),
    ("functions", FUNCTION_FIELDS),
];

/// Largest edit distance ([`osa_distance`]) at which an unknown field is offered as a near
/// miss of a known one; one edit for names of up to 3 characters. Common practice for
/// "did you mean" hints, no source.
pub const NEAR_MISS_EDITS: usize = 2;

/// A JSON value that keeps every object member in document order, duplicates included.
#[derive(Debug, Clone, PartialEq)]
enum Doc {
    Null,
    Bool(bool),
    Number(serde_json::Number),
    String(String),
    Array(Vec<Doc>),
    Object(Vec<(String, Doc)>),
}

impl<'de> Deserialize<'de> for Doc {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> std::result::Result<Doc, D::Error> {
        deserializer.deserialize_any(DocVisitor)
    }
}

struct DocVisitor;

impl<'de> Visitor<'de> for DocVisitor {
    type Value = Doc;

    fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
        f.write_str("any JSON value")
    }
    fn visit_unit<E>(self) -> std::result::Result<Doc, E> {
        Ok(Doc::Null)
    }
    fn visit_none<E>(self) -> std::result::Result<Doc, E> {
        Ok(Doc::Null)
    }
    fn visit_bool<E>(self, v: bool) -> std::result::Result<Doc, E> {
        Ok(Doc::Bool(v))
    }
    fn visit_u64<E>(self, v: u64) -> std::result::Result<Doc, E> {
        Ok(Doc::Number(v.into()))
    }
    fn visit_i64<E>(self, v: i64) -> std::result::Result<Doc, E> {
        Ok(Doc::Number(v.into()))
    }
    fn visit_f64<E: de::Error>(self, v: f64) -> std::result::Result<Doc, E> {
        serde_json::Number::from_f64(v)
            .map(Doc::Number)
            .ok_or_else(|| E::custom(format!("number {v} is not finite")))
    }
    fn visit_str<E>(self, v: &str) -> std::result::Result<Doc, E> {
        Ok(Doc::String(v.to_owned()))
    }
    fn visit_string<E>(self, v: String) -> std::result::Result<Doc, E> {
        Ok(Doc::String(v))
    }
    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> std::result::Result<Doc, A::Error> {
        let mut items = Vec::new();
        while let Some(item) = seq.next_element()? {
            items.push(item);
        }
        Ok(Doc::Array(items))
    }
    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> std::result::Result<Doc, A::Error> {
        let mut members = Vec::new();
        while let Some((k, v)) = map.next_entry::<String, Doc>()? {
            members.push((k, v));
        }
        Ok(Doc::Object(members))
    }
}

impl Doc {
    /// The plain value; only called once duplicates are refused, so nothing is lost.
    fn into_value(self) -> Value {
        match self {
            Doc::Null => Value::Null,
            Doc::Bool(b) => Value::Bool(b),
            Doc::Number(n) => Value::Number(n),
            Doc::String(s) => Value::String(s),
            Doc::Array(items) => Value::Array(items.into_iter().map(Doc::into_value).collect()),
            Doc::Object(members) => Value::Object(
                members
                    .into_iter()
                    .map(|(k, v)| (k, v.into_value()))
                    .collect(),
            ),
        }
    }

    /// The `id` member of an object, when it is a string.
    fn id(&self) -> Option<&str> {
        match self {
            Doc::Object(members) => members.iter().find_map(|(k, v)| match (k.as_str(), v) {
                ("id", Doc::String(s)) => Some(s.as_str()),
                _ => None,
            }),
            _ => None,
        }
    }
}

/// `text` with every control, bidirectional or format character shown as its escape
/// (`\u{200b}`) and the rest as Rust's `escape_debug`, so a name read from the file can be
/// printed inside a message and every invisible character in it is seen.
pub fn printable(text: &str) -> String {
    text.chars()
        .map(|c| {
            if is_unsafe_char(c) || is_format_char(c) {
                c.escape_unicode().to_string()
            } else {
                c.escape_debug().to_string()
            }
        })
        .collect()
}

/// `sites[2] (id "x")`, or `sites[2]` when the entry has no string id.
fn element_at(list: &str, idx: usize, item: Option<&str>) -> String {
    match item {
        Some(id) => format!("{list}[{idx}] (id \"{}\")", printable(id)),
        None => format!("{list}[{idx}]"),
    }
}

/// Parses JSON text into a plain value, refusing any object that repeats a key. The error
/// of a text that is not JSON is serde_json's, returned as is for the caller to describe.
/// Linear in the size of the text; the depth is bounded by serde_json's recursion limit.
pub fn parse_document(text: &str) -> std::result::Result<Result<Value>, serde_json::Error> {
    let doc: Doc = serde_json::from_str(text)?;
    Ok(match first_duplicate(&doc, "") {
        Some((place, key)) => Err(Error::Input(format!(
            "{place}: key `{}` appears more than once (JSON readers disagree on which one \
             counts; keep one)",
            printable(&key)
        ))),
        None => Ok(doc.into_value()),
    })
}

/// The first repeated key in document order, with where it is: `the network`,
/// `sites[0] (id "a")`, or a dotted path below an element. Depth-first; linear in the
/// number of members (one hash set per object).
fn first_duplicate(doc: &Doc, place: &str) -> Option<(String, String)> {
    let here = if place.is_empty() {
        "the network".to_string()
    } else {
        place.to_string()
    };
    match doc {
        Doc::Object(members) => {
            let mut seen = std::collections::HashSet::new();
            for (k, _) in members {
                if !seen.insert(k.as_str()) {
                    return Some((here, k.clone()));
                }
            }
            members.iter().find_map(|(k, v)| {
                let below = match (place.is_empty(), v) {
                    (true, Doc::Array(items)) => {
                        return items.iter().enumerate().find_map(|(i, item)| {
                            first_duplicate(item, &element_at(k, i, item.id()))
                        });
                    }
                    (true, _) => format!("field `{}`", printable(k)),
                    (false, _) => format!("{place}.{}", printable(k)),
                };
                first_duplicate(v, &below)
            })
        }
        Doc::Array(items) => items
            .iter()
            .enumerate()
            .find_map(|(i, item)| first_duplicate(item, &format!("{here}[{i}]"))),
        _ => None,
    }
}

/// Optimal-string-alignment edit distance between `a` and `b` (insertions, deletions,
/// substitutions and swaps of two adjacent characters, each costing 1; no substring is
/// edited twice). O(|a|·|b|) time, O(|b|) memory over three rolling rows.
pub fn osa_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut before: Vec<usize> = vec![0; b.len() + 1];
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur: Vec<usize> = vec![0; b.len() + 1];
    for i in 1..=a.len() {
        cur[0] = i;
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut d = (prev[j] + 1).min(cur[j - 1] + 1).min(prev[j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                d = d.min(before[j - 2] + 1);
            }
            cur[j] = d;
        }
        std::mem::swap(&mut before, &mut prev);
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// The known name nearest to `unknown` (compared without case), when it is within
/// [`NEAR_MISS_EDITS`] edits (one for names of up to 3 characters) and shorter than the name
/// itself in edits; the first such name in `known` order on ties. O(Σ |known| · |unknown|).
pub fn near_miss<'a>(unknown: &str, known: &[&'a str]) -> Option<&'a str> {
    let lower = unknown.to_lowercase();
    known
        .iter()
        .map(|&k| (osa_distance(&lower, k), k))
        .filter(|&(d, k)| {
            let limit = if k.chars().count() <= 3 {
                1
            } else {
                NEAR_MISS_EDITS
            };
            d <= limit && d < k.chars().count()
        })
        .min_by_key(|&(d, _)| d)
        .map(|(_, k)| k)
}

/// Refuses a field of `element` that is neither in `known` nor `notes` nor an `x-` field.
fn check_object(
    element: &str,
    what: &str,
    obj: &serde_json::Map<String, Value>,
    known: &[&str],
) -> Result<()> {
    for key in obj.keys() {
        if known.contains(&key.as_str()) || key == NOTES || key.starts_with(USER_PREFIX) {
            continue;
        }
        let hint = match near_miss(key, known) {
            Some(k) => format!("; did you mean `{k}`?"),
            None => String::new(),
        };
        return Err(Error::Input(format!(
            "{element}: unknown field `{}`{hint} ({what} has the fields {}; annotations of \
             your own go in `{NOTES}` or in fields starting with `{USER_PREFIX}`)",
            printable(key),
            known.join(", ")
        )));
    }
    Ok(())
}

/// Refuses unknown fields in the document and in each entry of its lists. The document
/// must already be an object whose lists hold objects (see `check_shape`); other shapes
/// are left to it. Linear in the number of fields.
pub fn check_fields(value: &Value) -> Result<()> {
    let Some(top) = value.as_object() else {
        return Ok(());
    };
    check_object("the network", "the document", top, TOP_FIELDS)?;
    for &(list, fields) in LISTS {
        let what = match list {
            "sites" => "a site",
            "links" => "a link",
            "demands" => "a demand",
            "matrices" => "a traffic matrix",
            "functions" => "a function",
            _ => "a risk group entry",
        };
        let Some(items) = top.get(list).and_then(Value::as_array) else {
            continue;
        };
        for (i, item) in items.iter().enumerate() {
            if let Some(obj) = item.as_object() {
                let id = obj.get("id").and_then(Value::as_str);
                let at = element_at(list, i, id);
                check_object(&at, what, obj, fields)?;
                // A matrix's demands are checked like the top-level ones.
                if let Some(demands) = obj.get("demands").and_then(Value::as_array) {
                    for (j, d) in demands.iter().enumerate() {
                        if let Some(dobj) = d.as_object() {
                            let did = dobj.get("id").and_then(Value::as_str);
                            let inner = format!("{at}: {}", element_at("demands", j, did));
                            check_object(&inner, "a demand", dobj, DEMAND_FIELDS)?;
                        }
                    }
                }
            }
        }
    }
    Ok(())
}

/// A character that must not reach a terminal from the file: any `char::is_control`
/// (C0, DEL, C1: ESC, BEL, NUL, the OSC introducer...) and the Unicode bidirectional
/// control characters (the `Bidi_Control` property of the UCD's PropList.txt: U+061C,
/// U+200E, U+200F, U+202A–U+202E, U+2066–U+2069; from memory), which reorder what a
/// terminal shows (Unicode UAX #9). The rule for the `name` and `unit` labels.
pub fn is_unsafe_char(c: char) -> bool {
    c.is_control()
        || matches!(
            c,
            '\u{061C}' | '\u{200E}' | '\u{200F}' | '\u{202A}'..='\u{202E}' | '\u{2066}'..='\u{2069}'
        )
}

/// The code points of Unicode general category Cf ("Format": soft hyphen, zero-width
/// space and joiners, the bidirectional marks, embeddings, overrides and isolates, the
/// byte-order mark, invisible operators, tags...), as inclusive ranges in ascending order.
///
/// Source: Unicode 18.0.0, `General_Category=Cf` of the UCD file
/// `extracted/DerivedGeneralCategory.txt` (170 code points). The ranges were taken from
/// the tables of the `unicode-properties` crate 0.1.5 (generated from that UCD version,
/// its `UNICODE_VERSION`), not read from the UCD file itself; the total of 170 matches
/// that file's count for Cf as we remember it (from memory). The test
/// `format_characters_match_the_unicode_database` (tests/input_strict.rs) compares every
/// code point with that crate. Python's `unicodedata` (UCD 14.0.0) agrees except for
/// U+13439–U+1343F, added in Unicode 15.0.
pub const FORMAT_RANGES: &[(char, char)] = &[
    ('\u{00AD}', '\u{00AD}'),
    ('\u{0600}', '\u{0605}'),
    ('\u{061C}', '\u{061C}'),
    ('\u{06DD}', '\u{06DD}'),
    ('\u{070F}', '\u{070F}'),
    ('\u{0890}', '\u{0891}'),
    ('\u{08E2}', '\u{08E2}'),
    ('\u{180E}', '\u{180E}'),
    ('\u{200B}', '\u{200F}'),
    ('\u{202A}', '\u{202E}'),
    ('\u{2060}', '\u{2064}'),
    ('\u{2066}', '\u{206F}'),
    ('\u{FEFF}', '\u{FEFF}'),
    ('\u{FFF9}', '\u{FFFB}'),
    ('\u{110BD}', '\u{110BD}'),
    ('\u{110CD}', '\u{110CD}'),
    ('\u{13430}', '\u{1343F}'),
    ('\u{1BCA0}', '\u{1BCA3}'),
    ('\u{1D173}', '\u{1D17A}'),
    ('\u{E0001}', '\u{E0001}'),
    ('\u{E0020}', '\u{E007F}'),
];

/// Whether `c` is a format character (general category Cf, [`FORMAT_RANGES`]): invisible
/// in print, so an id holding one looks like another id. Binary search, O(log ranges).
pub fn is_format_char(c: char) -> bool {
    FORMAT_RANGES
        .binary_search_by(|&(lo, hi)| {
            if hi < c {
                std::cmp::Ordering::Less
            } else if lo > c {
                std::cmp::Ordering::Greater
            } else {
                std::cmp::Ordering::Equal
            }
        })
        .is_ok()
}

/// The separator of `--fail` lists; never part of an id.
pub const FAIL_SEPARATOR: char = ',';

/// Checks an id named on the command line (site, link, risk group): not empty, no
/// control character ([`is_unsafe_char`]), no format character ([`is_format_char`]:
/// zero-width, bidirectional and other invisible characters, which make an id print like
/// another one), no [`FAIL_SEPARATOR`], no leading or trailing whitespace. With
/// `named_on_cli` false (demand ids) only the two character rules apply. Linear in the
/// id's length.
pub fn check_id(element: &str, field: &str, id: &str, named_on_cli: bool) -> Result<()> {
    if let Some((pos, c)) = id.chars().enumerate().find(|&(_, c)| is_unsafe_char(c)) {
        return Err(Error::Input(format!(
            "{element}: field `{field}` value \"{}\" holds the {} U+{:04X} at character {}; \
             ids are printed in reports and must not carry control characters",
            printable(id),
            control_kind(c),
            c as u32,
            pos + 1
        )));
    }
    if let Some((pos, c)) = id.chars().enumerate().find(|&(_, c)| is_format_char(c)) {
        return Err(Error::Input(format!(
            "{element}: field `{field}` value \"{}\" holds the invisible format character \
             U+{:04X} at character {}; ids must not carry format characters (Unicode \
             category Cf: zero-width, bidirectional and other invisible characters), which \
             make one id print like another; remove it",
            printable(id),
            c as u32,
            pos + 1
        )));
    }
    if !named_on_cli {
        return Ok(());
    }
    if id.is_empty() {
        return Err(Error::Input(format!(
            "{element}: field `{field}` must not be empty"
        )));
    }
    if id.contains(FAIL_SEPARATOR) {
        return Err(Error::Input(format!(
            "{element}: field `{field}` value \"{}\" contains `{FAIL_SEPARATOR}`, the separator \
             of `--fail` lists, so it could not be named there",
            printable(id)
        )));
    }
    if id.trim() != id {
        return Err(Error::Input(format!(
            "{element}: field `{field}` value \"{}\" begins or ends with whitespace, which \
             `--fail` would not match; remove it",
            printable(id)
        )));
    }
    Ok(())
}

/// `control character` (category Cc) or `bidirectional control character`, for messages
/// about a character of [`is_unsafe_char`].
fn control_kind(c: char) -> &'static str {
    if c.is_control() {
        "control character"
    } else {
        "bidirectional control character"
    }
}

/// Checks a label printed in reports (`name`, `unit`): no character from
/// [`is_unsafe_char`]. Linear in its length.
pub fn check_label(field: &str, text: &str) -> Result<()> {
    match text.chars().enumerate().find(|&(_, c)| is_unsafe_char(c)) {
        Some((pos, c)) => Err(Error::Input(format!(
            "the network: field `{field}` value \"{}\" holds the {} U+{:04X} at character {}; \
             labels are printed in reports and must not carry control characters",
            printable(text),
            control_kind(c),
            c as u32,
            pos + 1
        ))),
        None => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input_err(r: Result<Value>) -> String {
        match r {
            Err(Error::Input(m)) => m,
            other => panic!("expected an input error, got {other:?}"),
        }
    }

    #[test]
    fn duplicates_are_found_at_any_depth() {
        let m = input_err(
            parse_document(r#"{"sites":[{"id":"a","processing":5,"processing":50}]}"#).unwrap(),
        );
        assert!(
            m.contains("sites[0] (id \"a\")") && m.contains("`processing`"),
            "{m}"
        );
        let m = input_err(parse_document(r#"{"sites":[],"sites":[]}"#).unwrap());
        assert!(m.contains("the network") && m.contains("`sites`"), "{m}");
        let m =
            input_err(parse_document(r#"{"sites":[{"id":"a","x-tag":{"k":1,"k":2}}]}"#).unwrap());
        assert!(
            m.contains("sites[0] (id \"a\").x-tag") && m.contains("`k`"),
            "{m}"
        );
        // The same key in two different objects is no duplicate.
        assert!(
            parse_document(r#"{"sites":[{"id":"a"},{"id":"b"}]}"#)
                .unwrap()
                .is_ok()
        );
    }

    #[test]
    fn osa_distance_by_hand() {
        // Hand-computed: one swap, one deletion, one insertion, identical, empty.
        assert_eq!(osa_distance("requried", "required"), 1);
        assert_eq!(osa_distance("procesing", "processing"), 1);
        assert_eq!(osa_distance("riskgroups", "risk_groups"), 1);
        assert_eq!(osa_distance("id", "id"), 0);
        assert_eq!(osa_distance("", "abc"), 3);
        // OSA, not Damerau: "ca" → "abc" is 3 (a substring is not edited twice).
        assert_eq!(osa_distance("ca", "abc"), 3);
    }

    #[test]
    fn near_misses() {
        assert_eq!(near_miss("oneway", LINK_FIELDS), Some("one_way"));
        assert_eq!(near_miss("Capacity", LINK_FIELDS), Some("capacity"));
        assert_eq!(near_miss("bandwidth", LINK_FIELDS), None);
        assert_eq!(near_miss("z", SITE_FIELDS), None);
    }
}
