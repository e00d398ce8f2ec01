//! The Markdown twin of the HTML report ([`super::html`]): the same [`Report`], with the
//! charts as tables.

use std::fmt;
use std::io::{self, Write};

use super::export::streamed;
use super::html::Report;

/// A cell's text made safe for a Markdown table (pipes escaped, no line breaks).
fn cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

/// A Markdown table onto `out`, then a blank line. O(cells).
fn table_md(out: &mut dyn fmt::Write, head: &[String], rows: &[Vec<String>]) -> fmt::Result {
    writeln!(
        out,
        "| {} |",
        head.iter().map(|h| cell(h)).collect::<Vec<_>>().join(" | ")
    )?;
    writeln!(out, "|{}", "---|".repeat(head.len()))?;
    for r in rows {
        writeln!(
            out,
            "| {} |",
            r.iter().map(|c| cell(c)).collect::<Vec<_>>().join(" | ")
        )?;
    }
    out.write_char('\n')
}

/// The Markdown report onto `o`, section by section. O(scenarios listed + elements).
pub fn markdown(o: &mut dyn fmt::Write, r: &Report<'_>) -> fmt::Result {
    let u = &r.net.unit;
    writeln!(o, "# Failure audit: {}\n", cell(&r.net.name))?;
    writeln!(o, "> {}\n", super::caution_for(r.net))?;
    writeln!(o, "**{}**\n", r.verdict())?;
    for g in r.gate_lines() {
        writeln!(o, "- `{g}`")?;
    }
    o.write_str("\n## Network\n\n")?;
    let facts: Vec<Vec<String>> = r.summary().into_iter().map(|(k, v)| vec![k, v]).collect();
    table_md(o, &["fact".into(), "value".into()], &facts)?;
    o.write_str("## Assumptions of the model\n\n")?;
    for a in super::chains::assumptions(r.net) {
        writeln!(o, "- {a}")?;
    }
    o.write_str("\n## All scenarios\n\n")?;
    let (head, rows) = super::table::all_scenarios(r);
    if rows.len() < r.audit.scenarios.len() {
        writeln!(
            o,
            "The first {} of {} scenarios, worst first (the --json and --csv files hold all).\n",
            rows.len(),
            r.audit.scenarios.len()
        )?;
    }
    let head: Vec<String> = head.into_iter().map(|(h, _)| h).collect();
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|row| row.cells.iter().map(|(t, _)| t.clone()).collect())
        .collect();
    table_md(o, &head, &cells)?;
    o.write_str("## Element criticality\n\n")?;
    let crit: Vec<Vec<String>> = r
        .criticality()
        .into_iter()
        .map(|(n, v)| vec![n, super::num(v)])
        .collect();
    table_md(
        o,
        &["element".into(), format!("worst shortfall ({u})")],
        &crit,
    )?;
    o.write_str("## Shortfall over the scenarios\n\n")?;
    let hist: Vec<Vec<String>> = r
        .histogram()
        .into_iter()
        .map(|(b, c)| vec![b, c.to_string()])
        .collect();
    table_md(o, &[format!("shortfall ({u})"), "scenarios".into()], &hist)?;
    o.write_str("## Topology\n\n")?;
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
            writeln!(
                o,
                "Worst scenario {}: failed links {}; failed sites {}; saturated links {}.\n",
                r.audit.scenarios[i].display_name(),
                names(&lf, &link),
                names(&sf, &site),
                names(&sat, &link)
            )?;
        }
        None => o.write_str("No scenario is short.\n\n")?,
    }
    if let Some((title, head, rows)) = super::chains::worst_functions(r) {
        writeln!(o, "## {title}\n")?;
        table_md(o, &head, &rows)?;
    }
    if let Some((head, rows)) = r.closing_table() {
        o.write_str("## Closing the gaps\n\n")?;
        table_md(o, &head, &rows)?;
    }
    if let Some((facts, head, rows)) = r.risk_table() {
        o.write_str("## Risk\n\n")?;
        for f in facts {
            writeln!(o, "- {f}")?;
        }
        o.write_char('\n')?;
        table_md(o, &head, &rows)?;
    }
    writeln!(o, "> {}", super::caution_for(r.net))
}

/// The Markdown exporter: [`markdown`] streamed to `w`.
pub fn write(w: &mut dyn Write, r: &Report<'_>) -> io::Result<()> {
    streamed(w, |o| markdown(o, r))
}

impl super::export::Exporter<Report<'_>> for super::export::Markdown {
    fn write(&self, r: &Report<'_>, w: &mut dyn Write) -> io::Result<()> {
        write(w, r)
    }
}
