//! Importers: other people's topology files written as our network format.
//!
//! - [`from_node_link`]: networkx node-link JSON (`nodes`, and `links` or `edges` with
//!   `source`/`target`), as open topology collections ship it. A topology has no
//!   processing and no demands, so the caller chooses a capacity rule (one capacity for
//!   every link, or a numeric edge attribute), a processing placement (the `k` sites of
//!   highest degree, ties in file order) and a demand (one per ordered pair of sites, with
//!   a required fraction).
//! - [`from_csv`]: three CSV files with header rows (sites, links, demands) for spreadsheet
//!   users, and a fourth (functions, with their gains and per-site capacities) for service
//!   chains; columns are named like the JSON fields.
//!
//! Both return a JSON document in the contract's shape; the caller validates it with
//! [`super::Network::from_json`] like any file, so every rule of the format applies.

use std::collections::BTreeMap;

use serde::Serialize;
use serde_json::{Map, Value, json};

use super::Network;
use super::file::{DemandFile, LinkFile, NetworkFile, SiteFile};
use crate::error::{Error, Result};

/// Capacity of every imported link when neither `--capacity` nor `--capacity-attr` is
/// given (documented in `--help`).
pub const DEFAULT_CAPACITY: f64 = 100.0;

/// How many offending edges a message lists before "and N more".
const LISTED: usize = 5;

/// How an imported topology gets capacities, processing and demands.
#[derive(Debug, Clone)]
pub struct Rules {
    /// Capacity of every link (without `capacity_attr`; [`DEFAULT_CAPACITY`] when `None`),
    /// or, with `capacity_attr`, the capacity of the edges that lack the attribute (`None`:
    /// such edges are refused).
    pub capacity: Option<f64>,
    /// A numeric edge attribute to read the capacity from.
    pub capacity_attr: Option<String>,
    /// How many sites get processing: the highest-degree ones (ties in file order).
    pub processing_sites: usize,
    /// Processing capacity of each of those sites.
    pub processing: f64,
    /// Volume of the demand between every ordered pair of sites (0: no demands).
    pub demand: f64,
    /// Required part of each demand, as a fraction of its volume (0..=1).
    pub required_fraction: f64,
}

fn input(msg: String) -> Error {
    Error::Input(msg)
}

/// A node or endpoint id as text (networkx writes numbers or strings).
fn id_text(v: &Value, what: &str) -> Result<String> {
    match v {
        Value::String(s) => Ok(s.clone()),
        Value::Number(n) => Ok(n.to_string()),
        other => Err(input(format!(
            "{what}: id must be a string or a number, got {other}"
        ))),
    }
}

/// An id the format accepts: commas (the `--fail` separator) become `_`, control
/// characters are dropped, edge spaces trimmed.
fn clean_id(s: &str) -> String {
    s.chars()
        .filter(|c| !c.is_control())
        .map(|c| if c == ',' { '_' } else { c })
        .collect::<String>()
        .trim()
        .to_string()
}

/// One site of an imported topology, as written (keys in the order a sorted JSON object
/// would have them, which the earlier writer produced).
#[derive(Debug, Clone, Serialize)]
struct SiteOut {
    id: String,
    processing: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    x: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    y: Option<f64>,
}

impl SiteOut {
    /// The site as the file contract's entry. O(id).
    fn file(&self) -> SiteFile {
        SiteFile {
            id: self.id.clone(),
            processing: Some(self.processing),
            x: self.x,
            y: self.y,
            ..SiteFile::default()
        }
    }
}

/// One link of an imported topology, as written (keys sorted).
#[derive(Debug, Clone, Serialize)]
struct LinkOut {
    capacity: f64,
    from: String,
    id: String,
    one_way: bool,
    to: String,
}

impl LinkOut {
    /// The link as the file contract's entry. O(ids).
    fn file(&self) -> LinkFile {
        LinkFile {
            id: self.id.clone(),
            from: self.from.clone(),
            to: self.to.clone(),
            capacity: self.capacity,
            one_way: Some(self.one_way),
            ..LinkFile::default()
        }
    }
}

/// One demand as written (keys sorted); borrowed, made while it is written.
#[derive(Serialize)]
struct DemandOut<'a> {
    from: &'a str,
    required: f64,
    to: &'a str,
    volume: f64,
}

/// The demands of an import: `volume` (and `required`) between every ordered pair of
/// distinct sites, in row order (`from` = 0, 1, …; `to` ascending, skipping `from`). Never
/// materialised: serialised and lowered pair by pair.
#[derive(Debug, Clone)]
struct AllPairs {
    ids: Vec<String>,
    /// `(volume, required)`, or `None` for no demands.
    each: Option<(f64, f64)>,
}

impl AllPairs {
    /// The ordered pairs `(from, to)` of site indices, with an exact length (pair `k` is
    /// row `k / (n − 1)`, and the `k mod (n − 1)`-th other site). O(1) memory.
    fn pairs(&self) -> impl ExactSizeIterator<Item = (usize, usize)> + '_ {
        let others = self.ids.len().saturating_sub(1);
        (0..self.len()).map(move |k| {
            let (a, j) = (k / others, k % others);
            (a, if j < a { j } else { j + 1 })
        })
    }

    /// The number of demands: n·(n − 1), or 0.
    fn len(&self) -> usize {
        match self.each {
            Some(_) => self.ids.len() * self.ids.len().saturating_sub(1),
            None => 0,
        }
    }
}

impl Serialize for AllPairs {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> std::result::Result<S::Ok, S::Error> {
        use serde::ser::SerializeSeq;
        let (volume, required) = self.each.unwrap_or((0.0, 0.0));
        let mut seq = ser.serialize_seq(Some(self.len()))?;
        for (a, b) in self.pairs() {
            seq.serialize_element(&DemandOut {
                from: &self.ids[a],
                required,
                to: &self.ids[b],
                volume,
            })?;
        }
        seq.end()
    }
}

/// An imported topology in the network format, ready to validate ([`NodeLink::network`])
/// and to write (it serialises as the network file, streaming the demands). Memory is
/// O(sites + links): the demand between every ordered pair of sites is generated while it is
/// written or lowered, never held as a list (1,000 sites have 999,000 of them).
#[derive(Debug, Clone, Serialize)]
pub struct NodeLink {
    demands: AllPairs,
    links: Vec<LinkOut>,
    name: String,
    sites: Vec<SiteOut>,
}

impl NodeLink {
    /// The validated network the written file describes, lowered by
    /// [`Network::from_file_and`], the same validation any network file goes through after
    /// parsing (the field and shape checks of strict reading concern only parsed text: this
    /// document has exactly the contract's fields). The demands are handed over one at a
    /// time, so memory is the network's own. O(sites + links + demands).
    pub fn network(&self) -> Result<Network> {
        let file = NetworkFile {
            name: Some(self.name.clone()),
            sites: self.sites.iter().map(SiteOut::file).collect(),
            links: self.links.iter().map(LinkOut::file).collect(),
            ..NetworkFile::default()
        };
        let (volume, required) = self.demands.each.unwrap_or((0.0, 0.0));
        let ids = &self.demands.ids;
        Network::from_file_and(
            file,
            self.demands.pairs().map(|(a, b)| DemandFile {
                from: ids[a].clone(),
                to: ids[b].clone(),
                volume,
                required: Some(required),
                ..DemandFile::default()
            }),
        )
    }
}

/// What [`from_node_link`] made: the network document, and how many links took the
/// explicit `--capacity` because their edge lacks `--capacity-attr` (for a note).
#[derive(Debug, Clone)]
pub struct Imported {
    /// The network, in the contract's shape (its demands streamed when written).
    pub doc: NodeLink,
    /// Links whose capacity is the `--capacity` fallback, and the links in all.
    pub fallback: Option<(usize, usize)>,
}

/// `edges[3] (a–b)` for the first [`LISTED`] of `edges`, then `and N more`.
fn listed(edges: &[String]) -> String {
    let mut text = edges
        .iter()
        .take(LISTED)
        .cloned()
        .collect::<Vec<_>>()
        .join(", ");
    if edges.len() > LISTED {
        text.push_str(&format!(" and {} more", edges.len() - LISTED));
    }
    text
}

/// Converts networkx node-link JSON `text` with `rules`. Self-loops are dropped (a link
/// joins two distinct sites); a directed graph gives one-way links; a node's `pos`
/// (`[x, y]`) becomes its drawing position; a node's `name` becomes its site id when every
/// node has a distinct one, else its `id` does. Link ids are `FROM-TO` (with `#N` for
/// parallel links). Nothing is guessed: a file with both `links` and `edges`, a
/// `directed` that is not a boolean, a `--capacity-attr` that no edge has, or that holds
/// anything but a JSON number, and (without an explicit `--capacity`) an edge that lacks
/// it are refused, naming the edges and how many. O(nodes + edges) time and memory: the
/// nodes² demands are generated when the result is written or lowered, not here.
pub fn from_node_link(text: &str, name: &str, rules: &Rules) -> Result<Imported> {
    if !(rules.required_fraction.is_finite() && (0.0..=1.0).contains(&rules.required_fraction)) {
        return Err(Error::Usage(format!(
            "--required-fraction must be between 0 and 1, got {}",
            rules.required_fraction
        )));
    }
    for (flag, v) in [
        ("--capacity", rules.capacity.unwrap_or(DEFAULT_CAPACITY)),
        ("--processing", rules.processing),
        ("--demand", rules.demand),
    ] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(Error::Usage(format!(
                "{flag} must be a finite number >= 0, got {v}"
            )));
        }
    }
    let doc: Value = serde_json::from_str(text.trim_start_matches('\u{feff}'))
        .map_err(|e| input(format!("not node-link JSON: {e}")))?;
    let nodes = doc
        .get("nodes")
        .and_then(Value::as_array)
        .ok_or_else(|| input("node-link JSON needs a `nodes` array".into()))?;
    let key = match (doc.get("links"), doc.get("edges")) {
        (Some(l), Some(e)) => {
            let count = |v: &Value| {
                v.as_array()
                    .map_or(String::new(), |a| format!(" ({})", a.len()))
            };
            return Err(input(format!(
                "node-link JSON has both `links`{} and `edges`{}; networkx writes one of them \
                 and only one would be read: keep the one that holds the topology",
                count(l),
                count(e)
            )));
        }
        (None, Some(_)) => "edges",
        _ => "links",
    };
    let edges = doc
        .get(key)
        .and_then(Value::as_array)
        .ok_or_else(|| input("node-link JSON needs a `links` (or `edges`) array".into()))?;
    let directed = match doc.get("directed") {
        None => false,
        Some(Value::Bool(b)) => *b,
        Some(other) => {
            return Err(input(format!(
                "node-link JSON: `directed` must be true or false, got {other}"
            )));
        }
    };
    let mut ids = Vec::with_capacity(nodes.len());
    let mut index = BTreeMap::new();
    let mut pos = Vec::with_capacity(nodes.len());
    for (i, n) in nodes.iter().enumerate() {
        let raw = id_text(
            n.get("id")
                .ok_or_else(|| input(format!("nodes[{i}]: no `id`")))?,
            &format!("nodes[{i}]"),
        )?;
        let id = clean_id(&raw);
        if id.is_empty() || index.insert(raw.clone(), i).is_some() {
            return Err(input(format!(
                "nodes[{i}]: id {raw:?} is empty or repeated"
            )));
        }
        ids.push(id);
        pos.push(
            n.get("pos")
                .and_then(Value::as_array)
                .and_then(|p| Some((p.first()?.as_f64()?, p.get(1)?.as_f64()?))),
        );
    }
    // Readable names when every node has a distinct one (open collections keep city
    // names there and numbers in `id`).
    let names: Vec<Option<String>> = nodes
        .iter()
        .map(|n| n.get("name").and_then(Value::as_str).map(clean_id))
        .collect();
    let distinct: std::collections::BTreeSet<&String> = names.iter().flatten().collect();
    if names
        .iter()
        .all(|n| n.as_ref().is_some_and(|n| !n.is_empty()))
        && distinct.len() == names.len()
    {
        ids = names.into_iter().flatten().collect();
    }
    let mut degree = vec![0usize; nodes.len()];
    let mut links = Vec::new();
    let mut seen: BTreeMap<(usize, usize), usize> = BTreeMap::new();
    // With --capacity-attr: the edges that lack it and those whose value is no number.
    let mut missing: Vec<String> = Vec::new();
    let mut not_number: Vec<String> = Vec::new();
    let mut attributes: std::collections::BTreeSet<&str> = std::collections::BTreeSet::new();
    for (k, e) in edges.iter().enumerate() {
        let end = |end_key: &str| -> Result<(usize, String)> {
            let raw = id_text(
                e.get(end_key)
                    .ok_or_else(|| input(format!("{key}[{k}]: no `{end_key}`")))?,
                &format!("{key}[{k}].{end_key}"),
            )?;
            match index.get(&raw) {
                Some(&i) => Ok((i, raw)),
                None => Err(input(format!(
                    "{key}[{k}]: `{end_key}` names unknown node {raw:?}"
                ))),
            }
        };
        let ((a, raw_a), (b, raw_b)) = (end("source")?, end("target")?);
        if a == b {
            continue;
        }
        // The edge as the file names it (source and target node ids).
        let shown = || format!("{key}[{k}] ({raw_a}–{raw_b})");
        let capacity = match &rules.capacity_attr {
            Some(attr) => {
                if let Some(obj) = e.as_object() {
                    attributes.extend(
                        obj.keys()
                            .map(String::as_str)
                            .filter(|k| !matches!(*k, "source" | "target" | "key")),
                    );
                }
                match e.get(attr) {
                    Some(v) if v.is_number() && v.as_f64().is_some() => {
                        v.as_f64().unwrap_or_default()
                    }
                    Some(other) => {
                        let mut text = other.to_string();
                        if text.chars().count() > 40 {
                            text = format!("{}…", text.chars().take(40).collect::<String>());
                        }
                        not_number.push(format!("{} {text}", shown()));
                        continue;
                    }
                    None => {
                        missing.push(shown());
                        // Without an explicit --capacity these edges are refused below.
                        rules.capacity.unwrap_or_default()
                    }
                }
            }
            None => rules.capacity.unwrap_or(DEFAULT_CAPACITY),
        };
        degree[a] += 1;
        degree[b] += 1;
        let n = seen.entry((a.min(b), a.max(b))).or_insert(0);
        *n += 1;
        let id = if *n == 1 {
            format!("{}-{}", ids[a], ids[b])
        } else {
            format!("{}-{}#{n}", ids[a], ids[b])
        };
        links.push(LinkOut {
            capacity,
            from: ids[a].clone(),
            id,
            one_way: directed,
            to: ids[b].clone(),
        });
    }
    let mut fallback = None;
    if let Some(attr) = &rules.capacity_attr {
        let total = links.len() + not_number.len();
        if !not_number.is_empty() {
            return Err(input(format!(
                "--capacity-attr {attr:?}: the value is not a JSON number on {} of {total} \
                 {key}: {}; write capacities as plain numbers (in the network's traffic unit)",
                not_number.len(),
                listed(&not_number)
            )));
        }
        if total > 0 && missing.len() == total {
            let known = attributes.iter().copied().collect::<Vec<_>>().join(", ");
            return Err(input(format!(
                "--capacity-attr {attr:?}: no edge has this attribute ({total} {key}); the \
                 edges' attributes are: {}",
                if known.is_empty() { "none" } else { &known }
            )));
        }
        if !missing.is_empty() {
            match rules.capacity {
                Some(_) => fallback = Some((missing.len(), total)),
                None => {
                    return Err(input(format!(
                        "--capacity-attr {attr:?}: the attribute is missing on {} of {total} \
                         {key}: {}; give --capacity C to use C for them",
                        missing.len(),
                        listed(&missing)
                    )));
                }
            }
        }
    }
    let mut by_degree: Vec<usize> = (0..nodes.len()).collect();
    by_degree.sort_by(|&x, &y| degree[y].cmp(&degree[x]).then(x.cmp(&y)));
    let processing: Vec<bool> = {
        let mut p = vec![false; nodes.len()];
        for &v in by_degree.iter().take(rules.processing_sites) {
            p[v] = true;
        }
        p
    };
    let sites: Vec<SiteOut> = (0..nodes.len())
        .map(|v| SiteOut {
            id: ids[v].clone(),
            processing: if processing[v] { rules.processing } else { 0.0 },
            x: pos[v].map(|p| p.0),
            y: pos[v].map(|p| p.1),
        })
        .collect();
    let each =
        (rules.demand > 0.0).then_some((rules.demand, rules.demand * rules.required_fraction));
    Ok(Imported {
        doc: NodeLink {
            demands: AllPairs { ids, each },
            links,
            name: name.to_string(),
            sites,
        },
        fallback,
    })
}

/// Splits one CSV line into fields (RFC 4180: commas, fields in double quotes with `""`
/// for a quote). O(line length).
fn csv_fields(line: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            ('"', _) => quoted = !quoted,
            (',', false) => out.push(std::mem::take(&mut cur)),
            _ => cur.push(c),
        }
    }
    out.push(cur);
    out
}

/// Which columns a CSV file may have, and whether each is a number, a boolean, a list
/// (`;`-separated) or text.
#[derive(Clone, Copy)]
enum Kind {
    Text,
    Number,
    Bool,
    List,
}

/// One CSV file to import: its path as shown in messages, and its text.
#[derive(Debug, Clone, Copy)]
pub struct CsvFile<'a> {
    /// The file's path, as messages name it.
    pub path: &'a str,
    /// The file's contents.
    pub text: &'a str,
}

/// Reads one CSV file (`what`: `sites`, `links`, `demands`) into JSON objects. Blank
/// lines and lines starting with `#` are skipped; empty cells are left out (the format's
/// default applies). A number cell must hold a finite number: `NaN`, `inf` and values
/// beyond f64 (`1e999`) are refused, naming the file, the line, the data row, the column
/// and the cell (serde_json would write them as `null`). O(size).
fn csv_objects(file: CsvFile, what: &str, columns: &[(&str, Kind)]) -> Result<Vec<Value>> {
    let path = file.path;
    let mut lines = file
        .text
        .trim_start_matches('\u{feff}')
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty() && !l.starts_with('#'));
    let Some((_, header)) = lines.next() else {
        return Ok(Vec::new());
    };
    let header: Vec<String> = csv_fields(header)
        .iter()
        .map(|h| h.trim().to_string())
        .collect();
    let mut kinds = Vec::with_capacity(header.len());
    for h in &header {
        match columns.iter().find(|(c, _)| c == h) {
            Some(&(_, k)) => kinds.push(k),
            None => {
                let known: Vec<&str> = columns.iter().map(|c| c.0).collect();
                return Err(input(format!(
                    "{path} ({what} CSV): unknown column {h:?} (columns: {})",
                    known.join(", ")
                )));
            }
        }
    }
    let mut out = Vec::new();
    for (row, (n, line)) in lines.enumerate() {
        let at = format!("{path} ({what} CSV) line {}, row {}", n + 1, row + 1);
        let cells = csv_fields(line);
        if cells.len() != header.len() {
            return Err(input(format!(
                "{at}: {} fields, the header has {}",
                cells.len(),
                header.len()
            )));
        }
        let mut obj = Map::new();
        for ((h, k), cell) in header.iter().zip(&kinds).zip(cells) {
            let cell = cell.trim();
            if cell.is_empty() {
                continue;
            }
            let v = match k {
                Kind::Text => json!(cell),
                Kind::Number => match cell.parse::<f64>() {
                    Ok(x) if x.is_finite() => json!(x),
                    Ok(_) => {
                        return Err(input(format!(
                            "{at}, column {h:?}: {cell:?} is not a finite number (NaN, \
                             infinities and values beyond ±1.8e308 are refused; leave the cell \
                             empty for the field's default)"
                        )));
                    }
                    Err(_) => {
                        return Err(input(format!(
                            "{at}, column {h:?}: must be a number, got {cell:?}"
                        )));
                    }
                },
                Kind::Bool => match cell.to_ascii_lowercase().as_str() {
                    "true" | "yes" | "1" => json!(true),
                    "false" | "no" | "0" => json!(false),
                    _ => {
                        return Err(input(format!(
                            "{at}, column {h:?}: must be true or false, got {cell:?}"
                        )));
                    }
                },
                Kind::List => json!(
                    cell.split(';')
                        .map(str::trim)
                        .filter(|s| !s.is_empty())
                        .collect::<Vec<_>>()
                ),
            };
            obj.insert(h.clone(), v);
        }
        out.push(Value::Object(obj));
    }
    Ok(out)
}

/// Converts three CSV files (sites, links, demands; header rows with the JSON field names;
/// `risk_groups` and a demand's `chain` as `;`-separated lists) and, for service chains,
/// a fourth (functions with their gains and per-site capacities, `functions_csv`) into
/// the network format. O(total size).
pub fn from_csv(
    name: &str,
    sites: CsvFile,
    links: CsvFile,
    demands: CsvFile,
    functions: Option<CsvFile>,
) -> Result<Value> {
    use Kind::*;
    let mut sites = csv_objects(
        sites,
        "sites",
        &[
            ("id", Text),
            ("processing", Number),
            ("expand_cost", Number),
            ("expand_max", Number),
            ("expand_step", Number),
            ("failure_probability", Number),
            ("x", Number),
            ("y", Number),
            ("notes", Text),
        ],
    )?;
    let links = csv_objects(
        links,
        "links",
        &[
            ("id", Text),
            ("from", Text),
            ("to", Text),
            ("capacity", Number),
            ("one_way", Bool),
            ("risk_groups", List),
            ("metric", Number),
            ("failure_probability", Number),
            ("notes", Text),
        ],
    )?;
    let demands = csv_objects(
        demands,
        "demands",
        &[
            ("id", Text),
            ("from", Text),
            ("to", Text),
            ("volume", Number),
            ("required", Number),
            ("chain", List),
            ("notes", Text),
        ],
    )?;
    let mut doc = json!({"name": name});
    if let Some(file) = functions {
        doc["functions"] = functions_csv(file, &mut sites)?;
    }
    doc["sites"] = Value::Array(sites);
    doc["links"] = Value::Array(links);
    doc["demands"] = Value::Array(demands);
    Ok(doc)
}

/// Reads the functions CSV of a network with service chains: one row per function and
/// site (`function`, `gain`, `site`, `capacity`, `expand_cost`, `expand_max`, `notes`).
/// A row's `capacity` and `expand_cost`/`expand_max` go into that site's `functions` and
/// `expand` (in `sites`, the sites CSV's objects); a row without `site` only declares the
/// function. Each function's `gain` is given on at least one of its rows and is the same
/// wherever it is repeated. Returns the top-level `functions` list, in order of first
/// appearance. Refuses, naming the row: no `function`, a site not in the sites CSV, the
/// same function twice at one site, a gain missing or given twice differently, a site
/// column without a capacity or a purchase. O(rows · log + sites).
fn functions_csv(file: CsvFile, sites: &mut [Value]) -> Result<Value> {
    use Kind::*;
    let path = file.path;
    let rows = csv_objects(
        file,
        "functions",
        &[
            ("function", Text),
            ("gain", Number),
            ("site", Text),
            ("capacity", Number),
            ("expand_cost", Number),
            ("expand_max", Number),
            ("notes", Text),
        ],
    )?;
    let index: BTreeMap<String, usize> = sites
        .iter()
        .enumerate()
        .filter_map(|(i, s)| Some((s.get("id")?.as_str()?.to_string(), i)))
        .collect();
    // Per function in order of first appearance: its gain (once known) and notes.
    let mut order: Vec<(String, Option<f64>, Option<Value>)> = Vec::new();
    for (r, row) in rows.iter().enumerate() {
        let at = format!("{path} (functions CSV) row {}", r + 1);
        let Some(f) = row.get("function").and_then(Value::as_str) else {
            return Err(input(format!("{at}: no `function`")));
        };
        let k = match order.iter().position(|(id, _, _)| id == f) {
            Some(k) => k,
            None => {
                order.push((f.to_string(), None, None));
                order.len() - 1
            }
        };
        if let Some(g) = row.get("gain").and_then(Value::as_f64) {
            match order[k].1 {
                Some(had) if had != g => {
                    return Err(input(format!(
                        "{at}: function {f:?} has gain {g} here and {had} on an earlier row"
                    )));
                }
                _ => order[k].1 = Some(g),
            }
        }
        let Some(site) = row.get("site").and_then(Value::as_str) else {
            if let Some(n) = row.get("notes") {
                order[k].2 = Some(n.clone());
            }
            continue;
        };
        let Some(&i) = index.get(site) else {
            return Err(input(format!(
                "{at}: site {site:?} is not in the sites CSV"
            )));
        };
        let obj = sites[i].as_object_mut().expect("a CSV row is an object");
        let mut placed = false;
        if let Some(c) = row.get("capacity") {
            let caps = obj.entry("functions").or_insert_with(|| json!({}));
            if caps.get(f).is_some() {
                return Err(input(format!(
                    "{at}: function {f:?} at site {site:?} is given twice"
                )));
            }
            caps[f] = c.clone();
            placed = true;
        }
        if let Some(cost) = row.get("expand_cost") {
            let mut buy = json!({"cost": cost});
            if let Some(max) = row.get("expand_max") {
                buy["max"] = max.clone();
            }
            obj.entry("expand").or_insert_with(|| json!({}))[f] = buy;
            placed = true;
        } else if row.get("expand_max").is_some() {
            return Err(input(format!(
                "{at}: `expand_max` without `expand_cost` (a purchase needs its cost)"
            )));
        }
        if !placed {
            return Err(input(format!(
                "{at}: site {site:?} is named without a `capacity` or an `expand_cost`"
            )));
        }
    }
    order
        .into_iter()
        .map(|(id, gain, notes)| {
            let gain = gain.ok_or_else(|| {
                input(format!(
                    "{path} (functions CSV): function {id:?} has no `gain` on any row"
                ))
            })?;
            let mut f = json!({"id": id, "gain": gain});
            if let Some(n) = notes {
                f["notes"] = n;
            }
            Ok(f)
        })
        .collect::<Result<Vec<Value>>>()
        .map(Value::Array)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Source: the definition (every ordered pair of distinct sites, row by row), written
    /// out by hand for three sites.
    #[test]
    fn all_pairs_in_row_order() {
        let p = AllPairs {
            ids: vec!["a".into(), "b".into(), "c".into()],
            each: Some((1.0, 0.5)),
        };
        let got: Vec<_> = p.pairs().collect();
        assert_eq!(got, [(0, 1), (0, 2), (1, 0), (1, 2), (2, 0), (2, 1)]);
        assert_eq!(p.pairs().len(), 6);
        let none = AllPairs { each: None, ..p };
        assert_eq!(none.pairs().count(), 0);
    }

    /// RFC 4180 quoting (common practice for CSV, RFC 4180 section 2).
    #[test]
    fn csv_quotes_and_commas() {
        assert_eq!(
            csv_fields(r#"a,"b,c","d""e",f"#),
            vec!["a", "b,c", "d\"e", "f"]
        );
        assert_eq!(csv_fields("x,,y"), vec!["x", "", "y"]);
    }
}
