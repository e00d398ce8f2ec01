//! `plan --apply`: the input document with a purchase added, every other field (notes,
//! `x-` fields, layout of the lists) kept as the file has it.

use serde_json::Value;

use super::Network;
use crate::error::{Error, Result};

/// The network file's JSON `text` (already read into `net`, so valid) with `add[v]` units
/// of processing added at each site `v`: `processing` becomes `processing + add[v]`
/// (exactly the sum [`Network::with_added_processing`] solves), and a finite
/// `expand_max` shrinks by what was bought (never below 0), so the headroom stays what the
/// file allowed. Sites are matched by position and checked by id. Nothing else changes
/// (object keys come back sorted: the value is a map without insertion order). The result
/// reads back as a valid network ([`Network::from_json`] is run on it). Linear in the size
/// of the document.
pub fn with_purchase(text: &str, net: &Network, add: &[f64]) -> Result<Value> {
    let text = text.strip_prefix('\u{FEFF}').unwrap_or(text);
    let mut doc: Value = serde_json::from_str(text)
        .map_err(|e| Error::Input(format!("--apply: the input no longer parses: {e}")))?;
    let sites = doc
        .get_mut("sites")
        .and_then(Value::as_array_mut)
        .ok_or_else(|| Error::Input("--apply: the input has no `sites` list".into()))?;
    for (v, (&a, site)) in add.iter().zip(&net.sites).enumerate() {
        if a <= 0.0 {
            continue;
        }
        let obj = sites
            .get_mut(v)
            .and_then(Value::as_object_mut)
            .filter(|o| o.get("id").and_then(Value::as_str) == Some(site.id.as_str()))
            .ok_or_else(|| {
                Error::Input(format!("--apply: sites[{v}] is not site \"{}\"", site.id))
            })?;
        obj.insert("processing".into(), Value::from(site.processing + a));
        if let Some(max) = obj.get("expand_max").and_then(Value::as_f64) {
            obj.insert("expand_max".into(), Value::from((max - a).max(0.0)));
        }
    }
    Network::from_json(&doc.to_string())?;
    Ok(doc)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand check (common practice, no source): 4 + 2.5 = 6.5 at site a; expand_max
    /// 10 − 2.5 = 7.5; b gets nothing; the note and the `x-` field stay.
    #[test]
    fn adds_processing_and_keeps_user_fields() {
        let text = r#"{"notes":"keep me","sites":[
            {"id":"a","processing":4,"expand_cost":1,"expand_max":10,"x-rack":"r1"},
            {"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":5}],"demands":[]}"#;
        let net = Network::from_json(text).unwrap();
        let doc = with_purchase(text, &net, &[2.5, 0.0]).unwrap();
        assert_eq!(doc["sites"][0]["processing"], 6.5);
        assert_eq!(doc["sites"][0]["expand_max"], 7.5);
        assert_eq!(doc["sites"][0]["x-rack"], "r1");
        assert_eq!(doc["notes"], "keep me");
        assert!(doc["sites"][1].get("processing").is_none());
        let back = Network::from_json(&doc.to_string()).unwrap();
        assert_eq!(back.sites[0].processing, 6.5);
    }
}
