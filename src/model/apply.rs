//! `plan --apply`: the input file with a purchase added, edited in place. Only the bought
//! sites' `processing` (and their finite `expand_max`) change; every other byte of the file
//! (key order, number text such as `43` or a 20-digit `x-` integer, spacing, line breaks,
//! notes) stays as it was, so a `diff` of the two files shows the purchase and nothing
//! else.
//!
//! How: a small scanner of our own walks the JSON text and records the byte spans of the
//! `sites` entries and of their members; the new numbers are written over the old values'
//! spans (or, for a site without `processing`, inserted as a new member beside its `id`,
//! with the separators the object already uses). The result is then read back and must
//! equal the intended network, and parsed as plain JSON it must equal the original
//! document with only those values changed.

use std::ops::Range;

use serde_json::Value;

use super::Network;
use crate::error::{Error, Result};

const BOM: &str = "\u{FEFF}";

/// The network file's JSON `text` (already read into `net`, so valid) with `add[v]` units
/// of processing added at each site `v`: `processing` becomes `processing + add[v]`
/// (exactly the sum [`Network::with_added_processing`] solves), and a finite numeric
/// `expand_max` shrinks by what was bought (never below 0), so the headroom stays what the
/// file allowed. Sites are matched by position and checked by id. Every other byte is
/// kept. The result is checked: it reads back ([`Network::from_json`]) as exactly the
/// intended network, and as JSON it equals the input with only the edited values
/// changed. Linear in the size of the document.
pub fn with_purchase(text: &str, net: &Network, add: &[f64]) -> Result<String> {
    let (bom, body, entries) = site_entries(text)?;
    let mut edits: Vec<(Range<usize>, String)> = Vec::new();
    let mut intended = net.clone();
    for (v, (&a, site)) in add.iter().zip(&net.sites).enumerate() {
        if a <= 0.0 {
            continue;
        }
        let (obj, id) = site_object(body, &entries, v, &site.id)?;
        let processing = site.processing + a;
        intended.sites[v].processing = processing;
        match obj.member(body, "processing") {
            Some(m) => edits.push((m.value.clone(), number_text(processing))),
            None => edits.push((
                id.value.end..id.value.end,
                obj.new_member(body, &id, "processing", processing),
            )),
        }
        if let Some(m) = obj.member(body, "expand_max")
            && let Ok(max) = body[m.value.clone()].trim().parse::<f64>()
            && max.is_finite()
        {
            let left = (max - a).max(0.0) + 0.0; // + 0.0: never -0
            edits.push((m.value.clone(), number_text(left)));
            if let Some(e) = intended.sites[v].expansion.as_mut() {
                e.max = left;
            }
        }
    }
    // Each traffic matrix's view shares the sites, so it holds the purchase too.
    let sites = intended.sites.clone();
    for m in &mut intended.matrices {
        let mut v = (*m.view).clone();
        v.sites = sites.clone();
        m.view = std::sync::Arc::new(v);
    }
    let out = splice(bom, body, edits);
    let bought = |v: usize| add.get(v).is_some_and(|&a| a > 0.0);
    check(
        body,
        &out[bom.len()..],
        &intended,
        bought,
        ["processing", "expand_max"],
        "amounts",
    )?;
    Ok(out)
}

/// The input split after its byte-order mark (kept apart, written back unchanged), and the
/// byte spans of its `sites` entries. O(len).
fn site_entries(text: &str) -> Result<(&'static str, &str, Vec<Range<usize>>)> {
    let (bom, body) = match text.strip_prefix(BOM) {
        Some(rest) => (BOM, rest),
        None => ("", text),
    };
    let top = Scanner::at(body, 0).object()?;
    let sites_span = top
        .get(body, "sites")
        .ok_or_else(|| Error::Input("--apply: the input has no `sites` list".into()))?;
    let entries = Scanner::at(body, sites_span.start).array()?;
    Ok((bom, body, entries))
}

/// The scanned object of `sites[v]` and its `id` member, checked to name `id`. O(entry).
fn site_object(
    body: &str,
    entries: &[Range<usize>],
    v: usize,
    id: &str,
) -> Result<(Object, Member)> {
    let not_site = || {
        Error::Input(format!(
            "--apply: the input has no sites[{v}] with id \"{id}\""
        ))
    };
    let span = entries.get(v).ok_or_else(not_site)?;
    let obj = Scanner::at(body, span.start).object()?;
    let member = obj.member(body, "id").ok_or_else(not_site)?.clone();
    if serde_json::from_str::<String>(&body[member.value.clone()])
        .ok()
        .as_deref()
        != Some(id)
    {
        return Err(not_site());
    }
    Ok((obj, member))
}

/// `body` with each span of `edits` replaced by its text (spans disjoint), after `bom`.
/// O(len + edits · log edits).
fn splice(bom: &str, body: &str, mut edits: Vec<(Range<usize>, String)>) -> String {
    edits.sort_by_key(|(r, _)| r.start);
    let mut out = String::with_capacity(bom.len() + body.len() + 64);
    out.push_str(bom);
    let mut at = 0;
    for (r, new) in &edits {
        out.push_str(&body[at..r.start]);
        out.push_str(new);
        at = r.end;
    }
    out.push_str(&body[at..]);
    out
}

/// The edited text reads back as `intended`, and as plain JSON equals `before` with only
/// the members `keys` of the bought sites (`bought(v)`) replaced; `what` names those
/// members in the message otherwise. O(len).
fn check(
    before: &str,
    after: &str,
    intended: &Network,
    bought: impl Fn(usize) -> bool,
    keys: [&str; 2],
    what: &str,
) -> Result<()> {
    let wrong = |why: String| Error::Internal(format!("--apply: the edited file {why}"));
    let back = Network::from_json(after).map_err(|e| wrong(format!("does not read back: {e}")))?;
    if &back != intended {
        return Err(wrong(
            "does not read back as the network with the purchase".into(),
        ));
    }
    let parse = |t: &str| serde_json::from_str::<Value>(t).map_err(|e| wrong(e.to_string()));
    let (mut old, new) = (parse(before)?, parse(after)?);
    let n = old["sites"].as_array().map_or(0, Vec::len);
    for v in (0..n).filter(|&v| bought(v)) {
        for key in keys {
            if let (Some(o), Some(n)) = (
                old["sites"][v].as_object_mut(),
                new["sites"][v].get(key).cloned(),
            ) {
                o.insert(key.into(), n);
            }
        }
    }
    if old != new {
        return Err(wrong(format!("changed more than the bought sites' {what}")));
    }
    Ok(())
}

/// `s` as a JSON string literal (quoted, escaped). O(len).
fn json_string(s: &str) -> String {
    serde_json::to_string(s).expect("a string always serialises")
}

/// The network file's JSON `text` (already read into `net`, a network with service
/// chains) with `add[v][f]` units of function `f` bought at site `v`: the site's
/// `functions.F` becomes its capacity + `add[v][f]` (exactly what
/// [`Network::with_added_functions`] solves; the member is inserted when the site had
/// none of the function, and a `functions` object beside `id` when the site had none),
/// and a finite `expand.F.max` shrinks by what was bought (never below 0). Every other
/// byte is kept. Checked as [`with_purchase`] is: the result reads back as exactly the
/// intended network, and as JSON equals the input with only the bought sites'
/// `functions` and `expand` changed. Linear in the size of the document.
pub fn with_function_purchase(text: &str, net: &Network, add: &[Vec<f64>]) -> Result<String> {
    let ch = net
        .chains
        .as_ref()
        .ok_or_else(|| Error::Internal("--apply: function purchase without `functions`".into()))?;
    let (bom, body, entries) = site_entries(text)?;
    let mut edits: Vec<(Range<usize>, String)> = Vec::new();
    let mut intended = net.clone();
    let ic = intended.chains.as_mut().expect("cloned with chains");
    for (v, (more, site)) in add.iter().zip(&net.sites).enumerate() {
        let bought: Vec<(usize, f64)> = more
            .iter()
            .copied()
            .enumerate()
            .filter(|&(_, a)| a > 0.0)
            .collect();
        if bought.is_empty() {
            continue;
        }
        let (obj, id) = site_object(body, &entries, v, &site.id)?;
        for &(f, a) in &bought {
            ic.capacity[v][f] = ch.capacity[v][f] + a;
        }
        let name = |f: usize| ch.functions[f].id.as_str();
        match obj.member(body, "functions") {
            Some(m) => {
                let fobj = Scanner::at(body, m.value.start).object()?;
                let mut inserted = String::new();
                for &(f, _) in &bought {
                    let new = ic.capacity[v][f];
                    match (fobj.member(body, name(f)), fobj.members.last()) {
                        (Some(fm), _) => edits.push((fm.value.clone(), number_text(new))),
                        (None, Some(last)) => {
                            inserted.push_str(&fobj.new_member(body, last, name(f), new))
                        }
                        (None, None) => {
                            if !inserted.is_empty() {
                                inserted.push_str(", ");
                            }
                            inserted.push_str(&format!(
                                "{}: {}",
                                json_string(name(f)),
                                number_text(new)
                            ));
                        }
                    }
                }
                if !inserted.is_empty() {
                    match fobj.members.last() {
                        Some(last) => edits.push((last.value.end..last.value.end, inserted)),
                        None => edits.push((m.value.clone(), format!("{{{inserted}}}"))),
                    }
                }
            }
            None => {
                let members: Vec<String> = bought
                    .iter()
                    .map(|&(f, _)| {
                        format!(
                            "{}: {}",
                            json_string(name(f)),
                            number_text(ic.capacity[v][f])
                        )
                    })
                    .collect();
                let value = format!("{{{}}}", members.join(", "));
                edits.push((
                    id.value.end..id.value.end,
                    obj.new_member_text(body, &id, "functions", &value),
                ));
            }
        }
        if let Some(e) = obj.member(body, "expand") {
            let eobj = Scanner::at(body, e.value.start).object()?;
            for &(f, a) in &bought {
                let Some(fm) = eobj.member(body, name(f)) else {
                    continue;
                };
                let inner = Scanner::at(body, fm.value.start).object()?;
                if let Some(mm) = inner.member(body, "max")
                    && let Ok(max) = body[mm.value.clone()].trim().parse::<f64>()
                    && max.is_finite()
                {
                    let left = (max - a).max(0.0) + 0.0; // + 0.0: never -0
                    edits.push((mm.value.clone(), number_text(left)));
                    if let Some(x) = ic.expand[v][f].as_mut() {
                        x.max = left;
                    }
                }
            }
        }
    }
    let chains = intended.chains.clone();
    for m in &mut intended.matrices {
        let mut v = (*m.view).clone();
        if v.chains.is_some() {
            v.chains = chains.clone();
        }
        m.view = std::sync::Arc::new(v);
    }
    let out = splice(bom, body, edits);
    let bought = |v: usize| add.get(v).is_some_and(|more| more.iter().any(|&a| a > 0.0));
    check(
        body,
        &out[bom.len()..],
        &intended,
        bought,
        ["functions", "expand"],
        "functions",
    )?;
    Ok(out)
}

/// A number as JSON text that reads back as exactly `x` (finite): the shortest round-trip
/// digits, without an exponent (`43`, `6.5`) unless that would be longer than 21
/// characters (`1e300`, `1.5e-20`). O(1).
pub fn number_text(x: f64) -> String {
    let plain = format!("{x}");
    if plain.len() <= 21 {
        plain
    } else {
        format!("{x:e}")
    }
}

/// One member of a scanned object: the byte spans of its key (with the quotes) and value.
#[derive(Debug, Clone, PartialEq)]
struct Member {
    key: Range<usize>,
    value: Range<usize>,
}

/// The members of one scanned object, in file order.
#[derive(Debug, Clone, PartialEq)]
struct Object {
    members: Vec<Member>,
}

impl Object {
    /// The member whose key (unescaped) is `name`. O(members).
    fn member(&self, text: &str, name: &str) -> Option<&Member> {
        self.members.iter().find(|m| {
            serde_json::from_str::<String>(&text[m.key.clone()])
                .ok()
                .as_deref()
                == Some(name)
        })
    }

    /// The value span of the member `name`.
    fn get(&self, text: &str, name: &str) -> Option<Range<usize>> {
        self.member(text, name).map(|m| m.value.clone())
    }

    /// The text to insert right after `beside`'s value to add the member `name: x`, with
    /// the separators this object already uses (the gap between two of its members, and
    /// `beside`'s own `": "`), so a pretty-printed object stays pretty.
    fn new_member(&self, text: &str, beside: &Member, name: &str, x: f64) -> String {
        self.new_member_text(text, beside, name, &number_text(x))
    }

    /// [`Object::new_member`] with the value given as JSON text `value`; the key is
    /// written as a JSON string (escaped).
    fn new_member_text(&self, text: &str, beside: &Member, name: &str, value: &str) -> String {
        let k = self
            .members
            .iter()
            .position(|m| m == beside)
            .unwrap_or_default();
        let gap = match (self.members.get(k + 1), k.checked_sub(1)) {
            (Some(next), _) => &text[beside.value.end..next.key.start],
            (None, Some(p)) => &text[self.members[p].value.end..beside.key.start],
            (None, None) => ", ",
        };
        let colon = &text[beside.key.end..beside.value.start];
        format!("{gap}{}{colon}{value}", json_string(name))
    }
}

/// A forward scanner over JSON text that records byte spans. It expects valid JSON (the
/// file was read before) but never panics: anything unexpected is an input error. The
/// nesting depth is bounded by the reader's limit (serde_json: 128), so recursion is too.
struct Scanner<'a> {
    b: &'a [u8],
    i: usize,
}

impl<'a> Scanner<'a> {
    fn at(text: &'a str, i: usize) -> Scanner<'a> {
        Scanner {
            b: text.as_bytes(),
            i,
        }
    }

    fn fail(&self, what: &str) -> Error {
        Error::Input(format!(
            "--apply: the input could not be scanned: {what} at byte {}",
            self.i
        ))
    }

    fn ws(&mut self) {
        while matches!(self.b.get(self.i), Some(b' ' | b'\t' | b'\n' | b'\r')) {
            self.i += 1;
        }
    }

    fn expect(&mut self, c: u8) -> Result<()> {
        self.ws();
        if self.b.get(self.i) == Some(&c) {
            self.i += 1;
            Ok(())
        } else {
            Err(self.fail(&format!("expected `{}`", c as char)))
        }
    }

    /// A string at the cursor (after spaces); its span includes the quotes.
    fn string(&mut self) -> Result<Range<usize>> {
        self.expect(b'"')?;
        let start = self.i - 1;
        loop {
            match self.b.get(self.i) {
                Some(b'"') => {
                    self.i += 1;
                    return Ok(start..self.i);
                }
                Some(b'\\') => self.i += 2,
                Some(_) => self.i += 1,
                None => return Err(self.fail("unterminated string")),
            }
        }
    }

    /// Any value at the cursor (after spaces); returns its span.
    fn value(&mut self) -> Result<Range<usize>> {
        self.ws();
        let start = self.i;
        match self.b.get(self.i) {
            Some(b'{') => {
                self.object()?;
            }
            Some(b'[') => {
                self.array()?;
            }
            Some(b'"') => {
                self.string()?;
            }
            Some(_) => {
                while matches!(self.b.get(self.i), Some(c) if c.is_ascii_alphanumeric() || matches!(c, b'+' | b'-' | b'.'))
                {
                    self.i += 1;
                }
                if self.i == start {
                    return Err(self.fail("expected a value"));
                }
            }
            None => return Err(self.fail("unexpected end")),
        }
        Ok(start..self.i)
    }

    /// An object at the cursor: its members' spans.
    fn object(&mut self) -> Result<Object> {
        self.expect(b'{')?;
        let mut members = Vec::new();
        self.ws();
        if self.b.get(self.i) == Some(&b'}') {
            self.i += 1;
            return Ok(Object { members });
        }
        loop {
            let key = self.string()?;
            self.expect(b':')?;
            let value = self.value()?;
            members.push(Member { key, value });
            self.ws();
            match self.b.get(self.i) {
                Some(b',') => self.i += 1,
                Some(b'}') => {
                    self.i += 1;
                    return Ok(Object { members });
                }
                _ => return Err(self.fail("expected `,` or `}`")),
            }
        }
    }

    /// An array at the cursor: its elements' spans.
    fn array(&mut self) -> Result<Vec<Range<usize>>> {
        self.expect(b'[')?;
        let mut items = Vec::new();
        self.ws();
        if self.b.get(self.i) == Some(&b']') {
            self.i += 1;
            return Ok(items);
        }
        loop {
            items.push(self.value()?);
            self.ws();
            match self.b.get(self.i) {
                Some(b',') => self.i += 1,
                Some(b']') => {
                    self.i += 1;
                    return Ok(items);
                }
                _ => return Err(self.fail("expected `,` or `]`")),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand check (common practice, no source): 4 + 2.5 = 6.5 at site a; expand_max
    /// 10 − 2.5 = 7.5; b gets nothing; the note and the `x-` field stay, and so does every
    /// other byte: the expected text is written out by hand.
    #[test]
    fn edits_only_the_bought_values() {
        let text = r#"{"notes":"keep me","sites":[
            {"id":"a","processing":4,"expand_cost":1,"expand_max":10,"x-rack":"r1"},
            {"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":5}],"demands":[]}"#;
        let net = Network::from_json(text).unwrap();
        let out = with_purchase(text, &net, &[2.5, 0.0]).unwrap();
        let want = r#"{"notes":"keep me","sites":[
            {"id":"a","processing":6.5,"expand_cost":1,"expand_max":7.5,"x-rack":"r1"},
            {"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":5}],"demands":[]}"#;
        assert_eq!(out, want);
    }

    /// A site without `processing` gets one beside its `id`, with the object's own
    /// separators (pretty-printed and compact); escaped keys and strings holding braces,
    /// quotes and commas do not confuse the scanner. Expected texts written by hand.
    #[test]
    fn inserts_a_missing_processing_member_in_the_files_layout() {
        let text = "\u{FEFF}{\n  \"sites\": [\n    {\n      \"id\": \"a\",\n      \"notes\": \"}{,\\\"]\"\n    },\n    {\"id\":\"b\"},\n    {\"x-n\": 12345678901234567890, \"\\u0069d\": \"c\"}\n  ],\n  \"links\": [],\n  \"demands\": []\n}\n";
        let net = Network::from_json(text).unwrap();
        let out = with_purchase(text, &net, &[3.0, 1.0, 2.0]).unwrap();
        let want = "\u{FEFF}{\n  \"sites\": [\n    {\n      \"id\": \"a\",\n      \"processing\": 3,\n      \"notes\": \"}{,\\\"]\"\n    },\n    {\"id\":\"b\", \"processing\":1},\n    {\"x-n\": 12345678901234567890, \"\\u0069d\": \"c\", \"processing\": 2}\n  ],\n  \"links\": [],\n  \"demands\": []\n}\n";
        assert_eq!(out, want);
    }

    /// Function purchases (service chains): an existing member is raised, a missing one is
    /// added to the site's `functions` (after its last member, or into an empty `{}`), a
    /// site without `functions` gets the object beside its `id` (with the separator the
    /// object uses between its members, here `,`), and a finite
    /// `expand.F.max` shrinks; every other byte is kept. Expected text written by hand:
    /// x buys fw 2 (4 → 6, max 5 → 3) and dpi 1.5 (new), y buys dpi 1 into `{}`, z buys
    /// fw 0.25 (no `functions`; its `expand` has no max).
    #[test]
    fn function_purchases_edit_sites_functions() {
        let text = r#"{"functions":[{"id":"fw","gain":1},{"id":"dpi","gain":1}],"sites":[
            {"id":"x", "functions": {"fw": 4}, "expand": {"fw": {"cost": 1, "max": 5}, "dpi": {"cost": 2}}},
            {"id":"y","functions":{},"expand":{"dpi":{"cost":1,"max":9}}},
            {"id":"z","expand":{"fw":{"cost":3}}}],
            "links":[{"id":"xy","from":"x","to":"y","capacity":5}],"demands":[]}"#;
        let net = Network::from_json(text).unwrap();
        let add = vec![vec![2.0, 1.5], vec![0.0, 1.0], vec![0.25, 0.0]];
        let out = with_function_purchase(text, &net, &add).unwrap();
        let want = r#"{"functions":[{"id":"fw","gain":1},{"id":"dpi","gain":1}],"sites":[
            {"id":"x", "functions": {"fw": 6, "dpi": 1.5}, "expand": {"fw": {"cost": 1, "max": 3}, "dpi": {"cost": 2}}},
            {"id":"y","functions":{"dpi": 1},"expand":{"dpi":{"cost":1,"max":8}}},
            {"id":"z","functions":{"fw": 0.25},"expand":{"fw":{"cost":3}}}],
            "links":[{"id":"xy","from":"x","to":"y","capacity":5}],"demands":[]}"#;
        assert_eq!(out, want);
    }

    /// Rust's float formatting gives the shortest digits that read back exactly (its
    /// documented contract); the exponent form is used only for very long numbers.
    #[test]
    fn numbers_read_back_exactly() {
        for x in [43.0, 6.5, 0.1 + 0.2, 1e300, 1.5e-20, 12345678.25, 0.0] {
            let t = number_text(x);
            assert_eq!(t.parse::<f64>().unwrap(), x, "{t}");
        }
        assert_eq!(number_text(43.0), "43");
        assert_eq!(number_text(1e300), "1e300");
    }
}
