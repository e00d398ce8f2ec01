//! What a change does to the file: the element-by-element difference of two validated
//! networks (`compare BEFORE AFTER` lists it above the scenarios, so a reviewer sees
//! "link l3 capacity 100 → 10" beside what that does to the failure scenarios).
//!
//! Elements are matched by id (sites, links, shared-risk groups) and demands by label
//! (the file's `id`, else `FROM→TO #N`); an element only one side has is *added* or
//! *removed*. Fields compared: a site's processing, expansion cost, limit and module, and
//! failure probability; a link's endpoints, direction, capacity, metric, groups and
//! failure probability; a group's members and failure probability; a demand's endpoints,
//! volume and required amount (and, with service chains, its chain); with service chains,
//! a function's gain (or the function added or removed) and each site's capacity of each
//! function. Drawing positions are not compared (they change no result).

use std::collections::{BTreeSet, HashMap};

use super::Network;

/// One side's value of a changed field.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// An amount in the file's unit, a probability, a metric or a cost.
    Number(f64),
    /// An endpoint pair, a member list, a yes/no.
    Text(String),
}

/// One change between the two files.
#[derive(Debug, Clone, PartialEq)]
pub struct Edit {
    /// `site:ID`, `link:ID`, `group:ID` or `demand:LABEL`.
    pub element: String,
    /// The field that changed, or `added` / `removed` for an element only one side has.
    pub field: &'static str,
    /// The field before the change (`None` for an added element or a field it lacked).
    pub before: Option<Value>,
    /// The field after the change (`None` for a removed element or a field it lacks).
    pub after: Option<Value>,
}

/// Every difference between `before` and `after`, in this order: sites, links, groups,
/// demands, further traffic matrices, service-chain functions; within each kind, by the
/// element's position in `after` and then the removed ones in their order in `before`;
/// within an element, fields in the order of the module comment.
///
/// Complexity: O(S + L·g + G·m + D) for S sites, L links in g groups each, G groups of m
/// links and D demands (hash maps by id; no pairwise search). Deterministic: it depends
/// only on the two files' contents and their order.
pub fn edits(before: &Network, after: &Network) -> Vec<Edit> {
    let mut out = Vec::new();
    sites(before, after, &mut out);
    links(before, after, &mut out);
    groups(before, after, &mut out);
    demands(before, after, "", &mut out);
    matrices(before, after, &mut out);
    functions(before, after, &mut out);
    out
}

/// Service chains: a function added or removed (`function:ID`, with its gain) or whose
/// gain changed, then per site both files have, each function whose capacity there
/// changed (`site:ID function:F`, field `capacity`; a function a site does not run counts
/// as capacity 0). Nothing when neither file lists `functions`. O(sites · functions).
fn functions(before: &Network, after: &Network, out: &mut Vec<Edit>) {
    let empty = super::Chains {
        functions: Vec::new(),
        capacity: Vec::new(),
        expand: Vec::new(),
        chain: Vec::new(),
    };
    if before.chains.is_none() && after.chains.is_none() {
        return;
    }
    let (cb, ca) = (
        before.chains.as_ref().unwrap_or(&empty),
        after.chains.as_ref().unwrap_or(&empty),
    );
    let gain = |c: &super::Chains, id: &str| c.functions.iter().position(|f| f.id == id);
    let gain_text = |g: f64| Value::Text(format!("gain {}", crate::numbers::num(g)));
    for f in &ca.functions {
        let element = format!("function:{}", f.id);
        match gain(cb, &f.id) {
            None => out.push(Edit {
                element,
                field: "added",
                before: None,
                after: Some(gain_text(f.gain)),
            }),
            Some(i) if cb.functions[i].gain != f.gain => out.push(Edit {
                element,
                field: "gain",
                before: num(cb.functions[i].gain),
                after: num(f.gain),
            }),
            Some(_) => {}
        }
    }
    for f in cb.functions.iter().filter(|f| gain(ca, &f.id).is_none()) {
        out.push(Edit {
            element: format!("function:{}", f.id),
            field: "removed",
            before: Some(gain_text(f.gain)),
            after: None,
        });
    }
    let capacity = |c: &super::Chains, v: usize, id: &str| {
        gain(c, id).map_or(0.0, |f| c.capacity.get(v).map_or(0.0, |row| row[f]))
    };
    let mut ids: Vec<&str> = ca.functions.iter().map(|f| f.id.as_str()).collect();
    ids.extend(
        cb.functions
            .iter()
            .map(|f| f.id.as_str())
            .filter(|id| gain(ca, id).is_none()),
    );
    let at: HashMap<&str, usize> = before
        .sites
        .iter()
        .enumerate()
        .map(|(v, s)| (s.id.as_str(), v))
        .collect();
    for (va, site) in after.sites.iter().enumerate() {
        let Some(&vb) = at.get(site.id.as_str()) else {
            continue;
        };
        for id in &ids {
            let (b, a) = (capacity(cb, vb, id), capacity(ca, va, id));
            if b != a {
                out.push(Edit {
                    element: format!("site:{} function:{id}", site.id),
                    field: "capacity",
                    before: num(b),
                    after: num(a),
                });
            }
        }
    }
}

/// The further traffic matrices: one added or removed (`matrix:ID`, with its demand count
/// and required total), and for a matrix both files have, its demand edits named
/// `demand:LABEL (matrix ID)`.
fn matrices(before: &Network, after: &Network, out: &mut Vec<Edit>) {
    let summary = |net: &Network, m: usize| {
        let v = net.view(m);
        Value::Text(format!(
            "{} demands, required {}",
            v.demands.len(),
            crate::numbers::num(v.total_required())
        ))
    };
    for m in 1..after.matrix_count() {
        let id = after.matrix_id(m);
        match before.matrix_index(id) {
            None => out.push(Edit {
                element: format!("matrix:{id}"),
                field: "added",
                before: None,
                after: Some(summary(after, m)),
            }),
            Some(mb) => demands(
                before.view(mb),
                after.view(m),
                &format!(" (matrix {id})"),
                out,
            ),
        }
    }
    for m in 1..before.matrix_count() {
        let id = before.matrix_id(m);
        if after.matrix_index(id).is_none() {
            out.push(Edit {
                element: format!("matrix:{id}"),
                field: "removed",
                before: Some(summary(before, m)),
                after: None,
            });
        }
    }
}

/// Pushes the edits of one kind: elements matched by `key`, fields compared by `fields`
/// (a list of `(field, value)` per element; `None` when the element lacks the field),
/// `summary` describing an element added or removed.
fn kind<T>(
    (prefix, suffix): (&str, &str),
    before: &[T],
    after: &[T],
    key: impl Fn(&T) -> &str,
    fields: impl Fn(&T) -> Vec<(&'static str, Option<Value>)>,
    summary: impl Fn(&T) -> String,
    out: &mut Vec<Edit>,
) {
    let old: HashMap<&str, &T> = before.iter().map(|e| (key(e), e)).collect();
    let new: BTreeSet<&str> = after.iter().map(&key).collect();
    for a in after {
        let element = format!("{prefix}:{}{suffix}", key(a));
        match old.get(key(a)) {
            None => out.push(Edit {
                element,
                field: "added",
                before: None,
                after: Some(Value::Text(summary(a))),
            }),
            Some(b) => {
                for ((field, vb), (_, va)) in fields(b).into_iter().zip(fields(a)) {
                    if vb != va {
                        out.push(Edit {
                            element: element.clone(),
                            field,
                            before: vb,
                            after: va,
                        });
                    }
                }
            }
        }
    }
    for b in before.iter().filter(|b| !new.contains(key(b))) {
        out.push(Edit {
            element: format!("{prefix}:{}{suffix}", key(b)),
            field: "removed",
            before: Some(Value::Text(summary(b))),
            after: None,
        });
    }
}

fn num(x: f64) -> Option<Value> {
    Some(Value::Number(x))
}

fn opt(x: Option<f64>) -> Option<Value> {
    x.map(Value::Number)
}

fn sites(before: &Network, after: &Network, out: &mut Vec<Edit>) {
    kind(
        ("site", ""),
        &before.sites,
        &after.sites,
        |s| s.id.as_str(),
        |s| {
            let e = s.expansion.as_ref();
            vec![
                ("processing", num(s.processing)),
                ("expand_cost", opt(e.map(|e| e.cost))),
                (
                    "expand_max",
                    opt(e.map(|e| e.max).filter(|m| m.is_finite())),
                ),
                ("expand_step", opt(e.and_then(|e| e.step))),
                ("failure_probability", opt(s.failure_probability)),
            ]
        },
        |s| format!("processing {}", crate::numbers::num(s.processing)),
        out,
    );
}

/// A link as compared: id, ends (`a–b`, or `a→b` one way), capacity, metric, its groups
/// sorted and joined, failure probability. Ends are site ids, not indices, since the two
/// sides number their sites independently.
type LinkRow = (String, String, f64, u32, String, Option<f64>);

fn link_rows(net: &Network) -> Vec<LinkRow> {
    net.links
        .iter()
        .map(|l| {
            let arrow = if l.one_way { "→" } else { "–" };
            let ends = format!("{}{arrow}{}", net.sites[l.from].id, net.sites[l.to].id);
            let mut groups: Vec<&str> = l
                .groups
                .iter()
                .map(|&g| net.groups[g].name.as_str())
                .collect();
            groups.sort_unstable();
            (
                l.id.clone(),
                ends,
                l.capacity,
                l.metric,
                groups.join(", "),
                l.failure_probability,
            )
        })
        .collect()
}

fn links(before: &Network, after: &Network, out: &mut Vec<Edit>) {
    kind(
        ("link", ""),
        &link_rows(before),
        &link_rows(after),
        |l| l.0.as_str(),
        |l| {
            vec![
                ("ends", Some(Value::Text(l.1.clone()))),
                ("capacity", num(l.2)),
                ("metric", num(f64::from(l.3))),
                ("groups", Some(Value::Text(l.4.clone()))),
                ("failure_probability", opt(l.5)),
            ]
        },
        |l| format!("{}, capacity {}", l.1, crate::numbers::num(l.2)),
        out,
    );
}

fn groups(before: &Network, after: &Network, out: &mut Vec<Edit>) {
    let members = |net: &Network, g: &super::RiskGroup| {
        let mut names: Vec<&str> = g.links.iter().map(|&l| net.links[l].id.as_str()).collect();
        names.sort_unstable();
        names.join(", ")
    };
    let b: Vec<(String, String, Option<f64>)> = before
        .groups
        .iter()
        .map(|g| (g.name.clone(), members(before, g), g.failure_probability))
        .collect();
    let a: Vec<(String, String, Option<f64>)> = after
        .groups
        .iter()
        .map(|g| (g.name.clone(), members(after, g), g.failure_probability))
        .collect();
    kind(
        ("group", ""),
        &b,
        &a,
        |g| g.0.as_str(),
        |g| {
            vec![
                ("links", Some(Value::Text(g.1.clone()))),
                ("failure_probability", opt(g.2)),
            ]
        },
        |g| format!("links {}", g.1),
        out,
    );
}

/// The demand edits of `before` and `after` (two views of one matrix), each element named
/// `demand:LABEL` followed by `suffix`.
fn demands(before: &Network, after: &Network, suffix: &str, out: &mut Vec<Edit>) {
    // A demand's chain as its function ids joined with `,` (empty: plain traffic); `None`
    // in a file without `functions`.
    let chain = |net: &Network, i: usize| -> Option<String> {
        let c = net.chains.as_ref()?;
        let ids: Vec<&str> = c
            .chain
            .get(i)?
            .iter()
            .map(|&f| c.functions[f].id.as_str())
            .collect();
        Some(ids.join(","))
    };
    let flat = |net: &Network| -> Vec<(String, String, f64, f64, Option<String>)> {
        net.demands
            .iter()
            .enumerate()
            .map(|(i, d)| {
                let ends = format!("{}→{}", net.sites[d.from].id, net.sites[d.to].id);
                (d.label.clone(), ends, d.volume, d.required, chain(net, i))
            })
            .collect()
    };
    kind(
        ("demand", suffix),
        &flat(before),
        &flat(after),
        |d| d.0.as_str(),
        |d| {
            vec![
                ("ends", Some(Value::Text(d.1.clone()))),
                ("volume", num(d.2)),
                ("required", num(d.3)),
                ("chain", d.4.clone().map(Value::Text)),
            ]
        },
        |d| {
            format!(
                "{}, volume {}, required {}",
                d.1,
                crate::numbers::num(d.2),
                crate::numbers::num(d.3)
            )
        },
        out,
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::test_net as net;

    /// Hand-made pair: one capacity lowered, one link added, one removed, one site's
    /// processing raised, one demand's required raised, one demand added. Each edit is
    /// written out here from the two files by hand.
    #[test]
    fn each_kind_of_change_is_listed_once_in_file_order() {
        let before = net(
            r#"{"sites":[{"id":"a","processing":10},{"id":"b"},{"id":"c"}],
            "links":[{"id":"l1","from":"a","to":"b","capacity":100},
                     {"id":"l2","from":"b","to":"c","capacity":50}],
            "demands":[{"id":"d1","from":"a","to":"c","volume":5,"required":4}]}"#,
        );
        let after = net(
            r#"{"sites":[{"id":"a","processing":20},{"id":"b"},{"id":"c"}],
            "links":[{"id":"l1","from":"a","to":"b","capacity":10},
                     {"id":"l3","from":"a","to":"c","capacity":30}],
            "demands":[{"id":"d1","from":"a","to":"c","volume":5,"required":5},
                       {"id":"d2","from":"c","to":"a","volume":1,"required":1}]}"#,
        );
        let got: Vec<(String, &str, Option<Value>, Option<Value>)> = edits(&before, &after)
            .into_iter()
            .map(|e| (e.element, e.field, e.before, e.after))
            .collect();
        let n = |x: f64| Some(Value::Number(x));
        let t = |s: &str| Some(Value::Text(s.into()));
        assert_eq!(
            got,
            vec![
                ("site:a".into(), "processing", n(10.0), n(20.0)),
                ("link:l1".into(), "capacity", n(100.0), n(10.0)),
                ("link:l3".into(), "added", None, t("a–c, capacity 30")),
                ("link:l2".into(), "removed", t("b–c, capacity 50"), None),
                ("demand:d1".into(), "required", n(4.0), n(5.0)),
                (
                    "demand:d2".into(),
                    "added",
                    None,
                    t("c→a, volume 1, required 1")
                ),
            ]
        );
    }

    /// Matrices: `evening` kept with one demand's volume raised (5 → 7), `night` removed,
    /// `forecast` added; each edit written out by hand from the two files.
    #[test]
    fn matrices_added_removed_and_changed() {
        let body = r#""sites":[{"id":"a","processing":10},{"id":"b"}],
            "links":[{"id":"l1","from":"a","to":"b","capacity":100}],
            "demands":[{"id":"d","from":"a","to":"b","volume":5}]"#;
        let before = net(&format!(
            r#"{{{body},"matrices":[
                {{"id":"evening","demands":[{{"id":"d","from":"a","to":"b","volume":5}}]}},
                {{"id":"night","demands":[{{"id":"d","from":"a","to":"b","volume":1}}]}}]}}"#
        ));
        let after = net(&format!(
            r#"{{{body},"matrices":[
                {{"id":"evening","demands":[{{"id":"d","from":"a","to":"b","volume":7}}]}},
                {{"id":"forecast","demands":[{{"id":"d","from":"a","to":"b","volume":6}}]}}]}}"#
        ));
        let got: Vec<(String, &str)> = edits(&before, &after)
            .into_iter()
            .map(|e| (e.element, e.field))
            .collect();
        assert_eq!(
            got,
            vec![
                ("demand:d (matrix evening)".into(), "volume"),
                ("demand:d (matrix evening)".into(), "required"),
                ("matrix:forecast".into(), "added"),
                ("matrix:night".into(), "removed"),
            ]
        );
    }

    #[test]
    fn a_file_compared_with_itself_has_no_edits() {
        let text = r#"{"sites":[{"id":"a","processing":10},{"id":"b"}],
            "links":[{"id":"l1","from":"a","to":"b","capacity":100}],
            "demands":[{"from":"a","to":"b","volume":5}]}"#;
        assert!(edits(&net(text), &net(text)).is_empty());
    }
}
