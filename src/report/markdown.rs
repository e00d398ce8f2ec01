//! The Markdown twin of the HTML report ([`super::html`]): the same [`Report`], with the
//! charts as tables.

use std::fmt::Write as _;
use std::io::{self, Write};

use super::CAUTION;
use super::html::{ASSUMPTIONS, Report};

/// A cell's text made safe for a Markdown table (pipes escaped, no line breaks).
fn cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

fn table_md(out: &mut String, head: &[String], rows: &[Vec<String>]) {
    let _ = writeln!(
        out,
        "| {} |",
        head.iter().map(|h| cell(h)).collect::<Vec<_>>().join(" | ")
    );
    let _ = writeln!(out, "|{}", "---|".repeat(head.len()));
    for r in rows {
        let _ = writeln!(
            out,
            "| {} |",
            r.iter().map(|c| cell(c)).collect::<Vec<_>>().join(" | ")
        );
    }
    out.push('\n');
}

/// The Markdown report as one string.
pub fn markdown(r: &Report<'_>) -> String {
    let u = &r.net.unit;
    let mut o = String::new();
    let _ = writeln!(o, "# Failure audit: {}\n", cell(&r.net.name));
    let _ = writeln!(o, "> {CAUTION}\n");
    let _ = writeln!(o, "**{}**\n", r.verdict());
    for g in r.gate_lines() {
        let _ = writeln!(o, "- `{g}`");
    }
    o.push_str("\n## Network\n\n");
    let facts: Vec<Vec<String>> = r.summary().into_iter().map(|(k, v)| vec![k, v]).collect();
    table_md(&mut o, &["fact".into(), "value".into()], &facts);
    o.push_str("## Assumptions of the model\n\n");
    for a in ASSUMPTIONS {
        let _ = writeln!(o, "- {a}");
    }
    o.push_str("\n## All scenarios\n\n");
    let (head, rows) = super::table::all_scenarios(r);
    if rows.len() < r.audit.scenarios.len() {
        let _ = writeln!(
            o,
            "The first {} of {} scenarios, worst first (the --json and --csv files hold all).\n",
            rows.len(),
            r.audit.scenarios.len()
        );
    }
    let head: Vec<String> = head.into_iter().map(|(h, _)| h).collect();
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|row| row.cells.iter().map(|(t, _)| t.clone()).collect())
        .collect();
    table_md(&mut o, &head, &cells);
    o.push_str("## Element criticality\n\n");
    let crit: Vec<Vec<String>> = r
        .criticality()
        .into_iter()
        .map(|(n, v)| vec![n, super::num(v)])
        .collect();
    table_md(
        &mut o,
        &["element".into(), format!("worst shortfall ({u})")],
        &crit,
    );
    o.push_str("## Shortfall over the scenarios\n\n");
    let hist: Vec<Vec<String>> = r
        .histogram()
        .into_iter()
        .map(|(b, c)| vec![b, c.to_string()])
        .collect();
    table_md(
        &mut o,
        &[format!("shortfall ({u})"), "scenarios".into()],
        &hist,
    );
    o.push_str("## Topology\n\n");
    match r.worst_short() {
        Some(i) => {
            let mk = super::map::marks(r, i);
            let (lf, sf, sat) = (mk.link_failed, mk.site_failed, mk.saturated);
            let names = |marks: &[bool], ids: &dyn Fn(usize) -> String| -> String {
                let v: Vec<String> = marks
                    .iter()
                    .enumerate()
                    .filter(|(_, m)| **m)
                    .map(|(k, _)| ids(k))
                    .collect();
                if v.is_empty() {
                    "none".into()
                } else {
                    v.join(", ")
                }
            };
            let link = |l: usize| format!("link:{}", r.net.links[l].id);
            let site = |v: usize| format!("site:{}", r.net.sites[v].id);
            let _ = writeln!(
                o,
                "Worst scenario {}: failed links {}; failed sites {}; saturated links {}.\n",
                r.audit.scenarios[i].display_name(),
                names(&lf, &link),
                names(&sf, &site),
                names(&sat, &link)
            );
        }
        None => o.push_str("No scenario is short.\n\n"),
    }
    if let Some((head, rows)) = r.closing_table() {
        o.push_str("## Closing the gaps\n\n");
        table_md(&mut o, &head, &rows);
    }
    if let Some((facts, head, rows)) = r.risk_table() {
        o.push_str("## Risk\n\n");
        for f in facts {
            let _ = writeln!(o, "- {f}");
        }
        o.push('\n');
        table_md(&mut o, &head, &rows);
    }
    let _ = writeln!(o, "> {CAUTION}");
    o
}

/// The Markdown exporter: [`markdown`] to `w`.
pub fn write(w: &mut dyn Write, r: &Report<'_>) -> io::Result<()> {
    w.write_all(markdown(r).as_bytes())
}

impl super::export::Exporter for super::export::Markdown {
    fn write(&self, r: &Report<'_>, w: &mut dyn Write) -> io::Result<()> {
        write(w, r)
    }
}
