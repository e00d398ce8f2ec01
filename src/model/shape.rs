//! The file's shape that serde alone does not check, and the wording of parse errors
//! (syntax errors with line, column and the text around them; serde's errors rewritten to
//! name the element, the field and the value a person wrote).

use super::strict::printable;
use crate::error::{Error, Result};

/// The contract's shape that serde alone does not enforce: the document is an object,
/// each of its lists is an array (`null` is not taken as an empty list) and every `sites`,
/// `links`, `demands` and `risk_groups` entry is an object (serde would accept an array of
/// the fields in declaration order).
pub(super) fn check_shape(value: &serde_json::Value) -> Result<()> {
    let Some(obj) = value.as_object() else {
        return Err(Error::Input(format!(
            "the network must be one JSON object, got {}",
            kind_of(value)
        )));
    };
    for list in super::strict::LISTS.iter().map(|&(list, _)| list) {
        match obj.get(list) {
            None => {}
            Some(serde_json::Value::Null) => {
                let instead = if list == "sites" {
                    "list at least one site"
                } else {
                    "leave the field out for none"
                };
                return Err(Error::Input(format!(
                    "the network: field `{list}`: null is not a list; {instead}"
                )));
            }
            Some(serde_json::Value::Array(items)) => {
                for (i, item) in items.iter().enumerate() {
                    if !item.is_object() {
                        return Err(Error::Input(format!(
                            "{list}[{i}]: must be an object with named fields, got {}: {}",
                            kind_of(item),
                            short(item)
                        )));
                    }
                    if list == "matrices"
                        && let Some(serde_json::Value::Array(ds)) = item.get("demands")
                    {
                        for (j, d) in ds.iter().enumerate() {
                            if !d.is_object() {
                                return Err(Error::Input(format!(
                                    "matrices[{i}].demands[{j}]: must be an object with \
                                     named fields, got {}: {}",
                                    kind_of(d),
                                    short(d)
                                )));
                            }
                        }
                    }
                }
            }
            Some(other) => {
                return Err(Error::Input(format!(
                    "field `{list}` must be an array of objects, got {}: {}",
                    kind_of(other),
                    short(other)
                )));
            }
        }
    }
    Ok(())
}

pub(super) fn kind_of(v: &serde_json::Value) -> &'static str {
    match v {
        serde_json::Value::Null => "null",
        serde_json::Value::Bool(_) => "a boolean",
        serde_json::Value::Number(_) => "a number",
        serde_json::Value::String(_) => "a string",
        serde_json::Value::Array(_) => "an array",
        serde_json::Value::Object(_) => "an object",
    }
}

pub(super) fn short(v: &serde_json::Value) -> String {
    let s = v.to_string();
    if s.chars().count() > 60 {
        format!("{}…", s.chars().take(60).collect::<String>())
    } else {
        s
    }
}

/// `sites[2] (id "x")` for a path's first two segments, when the element has an id; a
/// demand also shows its ends when they are strings (`demands[0] (a→b)`), as
/// `demand_label` does.
pub(super) fn element_name(value: &serde_json::Value, list: &str, idx: usize) -> String {
    let el = value.get(list).and_then(|l| l.get(idx));
    let text = |field: &str| el.and_then(|el| el.get(field)).and_then(|v| v.as_str());
    let ends = match (list, text("from"), text("to")) {
        ("demands", Some(from), Some(to)) => Some(format!("{}→{}", printable(from), printable(to))),
        _ => None,
    };
    match (text("id"), ends) {
        (Some(id), Some(ends)) => format!("{list}[{idx}] (id \"{}\", {ends})", printable(id)),
        (Some(id), None) => format!("{list}[{idx}] (id \"{}\")", printable(id)),
        (None, Some(ends)) => format!("{list}[{idx}] ({ends})"),
        (None, None) => format!("{list}[{idx}]"),
    }
}

/// Names the element and field of a plain-JSON error. A number too large for f64 is
/// found by replacing its token with a marker string and locating the marker in the
/// re-parsed document.
pub(super) fn describe_syntax_error(text: &str, e: &serde_json::Error) -> String {
    const MARK: &str = "redoubt: out-of-range number marker";
    if e.classify() == serde_json::error::Category::Data || e.to_string().contains("out of range") {
        // Byte offset of the error position (line and column are 1-based).
        let offset: usize = text
            .split_inclusive('\n')
            .take(e.line().saturating_sub(1))
            .map(str::len)
            .sum::<usize>()
            + e.column().saturating_sub(1);
        let bytes = text.as_bytes();
        let is_num = |b: u8| b.is_ascii_digit() || matches!(b, b'e' | b'E' | b'+' | b'-' | b'.');
        let mut start = offset.min(bytes.len());
        while start > 0 && is_num(bytes[start - 1]) {
            start -= 1;
        }
        let mut end = offset.min(bytes.len());
        while end < bytes.len() && is_num(bytes[end]) {
            end += 1;
        }
        if start < end && text.is_char_boundary(start) && text.is_char_boundary(end) {
            let token = &text[start..end];
            let patched = format!("{}\"{MARK}\"{}", &text[..start], &text[end..]);
            if let Ok(v) = serde_json::from_str::<serde_json::Value>(&patched)
                && let Some(path) = find_marker(&v, MARK)
            {
                let (element, field) = match path.as_slice() {
                    [list, idx, field, ..] => match idx.parse::<usize>() {
                        Ok(i) => (element_name(&v, list, i), field.clone()),
                        Err(_) => (list.clone(), idx.clone()),
                    },
                    [field] => ("the network".to_string(), field.clone()),
                    other => ("the network".to_string(), other.join(".")),
                };
                return format!(
                    "{element}: field `{field}` must be a finite number >= 0, got {token} \
                     (out of range; line {} column {})",
                    e.line(),
                    e.column()
                );
            }
        }
    }
    format!("not a valid network JSON object: {e}")
}

/// The path (keys and indices) of the string `mark` in `v`, if present.
pub(super) fn find_marker(v: &serde_json::Value, mark: &str) -> Option<Vec<String>> {
    match v {
        serde_json::Value::String(s) if s == mark => Some(Vec::new()),
        serde_json::Value::Array(items) => items.iter().enumerate().find_map(|(i, x)| {
            find_marker(x, mark).map(|mut p| {
                p.insert(0, i.to_string());
                p
            })
        }),
        serde_json::Value::Object(map) => map.iter().find_map(|(k, x)| {
            find_marker(x, mark).map(|mut p| {
                p.insert(0, k.clone());
                p
            })
        }),
        _ => None,
    }
}

/// Turns a serde error into a message that names the element (by index and, where the
/// file has one, its id), the field and the offending value: `sites[0] (id "a"): field
/// `processing`: null is not a number; ...`, or `the network: field `name`: ...`.
pub(super) fn describe_parse_error(
    value: &serde_json::Value,
    e: &serde_path_to_error::Error<serde_json::Error>,
) -> String {
    let path = e.path().to_string();
    let inner = e.inner();
    if path == "." || path.is_empty() {
        return format!("the network: {inner}");
    }
    let (first, rest) = match path.split_once('.') {
        Some((first, rest)) => (first, Some(rest)),
        None => (path.as_str(), None),
    };
    if let Some((list, idx)) = first.split_once('[')
        && let Ok(idx) = idx.trim_end_matches(']').parse::<usize>()
    {
        let element = element_name(value, list, idx);
        return match rest {
            Some(field) => format!("{element}: field `{field}`: {inner}"),
            None => format!("{element}: {inner}"),
        };
    }
    format!("the network: field `{path}`: {inner}")
}
