//! `compare --report DIR`: the comparison as a self-contained HTML page and its Markdown
//! twin. The page model ([`Page`]) is computed once from the [`Comparison`]: the verdict,
//! the two baselines, what changed in the file, then every scenario that is newly short,
//! got worse or better, and the added and removed risks (all rows, not the text's top N),
//! the headroom when compared; each exporter only lays it out.

use std::fmt;
use std::io::{self, Write};

use super::export::streamed;
use super::html::{esc, page_opening, table_html};
use super::text::{change_words, edit_value, signed, verdict_line};
use crate::compare::{Change, Comparison, OneSided};
use crate::numbers::num;
use crate::solve::Evaluation;

/// One table of the page: a heading, a sentence under it, the column names, the rows and
/// which columns are numbers (right-aligned in HTML).
struct Section {
    title: String,
    note: String,
    head: Vec<String>,
    rows: Vec<Vec<String>>,
    numeric: Vec<usize>,
}

/// The page as computed once: everything both formats show.
pub struct Page {
    title: String,
    passed: bool,
    verdict: String,
    baselines: String,
    sections: Vec<Section>,
    /// The caution line (the chain model's when either file lists `functions`).
    caution: &'static str,
}

fn changes(title: &str, note: &str, list: &[Change], unit: &str) -> Section {
    Section {
        title: format!("{title} ({})", list.len()),
        note: format!("{note} Amounts in {unit}."),
        head: super::text::CHANGE_COLUMNS.map(String::from).to_vec(),
        rows: list
            .iter()
            .map(|c| {
                vec![
                    change_words(&c.failed, c.matrix.as_deref()),
                    num(c.before.shortfall),
                    num(c.after.shortfall),
                    signed(c.delta_shortfall),
                    num(c.before.stranded),
                    num(c.after.stranded),
                ]
            })
            .collect(),
        numeric: vec![1, 2, 3, 4, 5],
    }
}

fn sided(title: &str, note: &str, list: &[OneSided], unit: &str) -> Section {
    Section {
        title: format!("{title} ({})", list.len()),
        note: format!("{note} Amounts in {unit}."),
        head: ["failed", "shortfall", "stranded"]
            .map(String::from)
            .to_vec(),
        rows: list
            .iter()
            .map(|o| {
                vec![
                    change_words(&o.failed, o.matrix.as_deref()),
                    num(o.values.shortfall),
                    num(o.values.stranded),
                ]
            })
            .collect(),
        numeric: vec![1, 2],
    }
}

impl Page {
    /// The page of comparison `c`, whose baselines (with `--down`, the down states) are
    /// `before` and `after`. O(rows of the comparison + file changes).
    pub fn new(c: &Comparison, before: &Evaluation, after: &Evaluation) -> Page {
        let u = &c.unit;
        let mut sections = vec![Section {
            title: format!("What changed in the file ({})", c.file_changes.len()),
            note: format!(
                "Field by field, elements matched by id (demands by label). Amounts in {u}."
            ),
            head: ["element", "field", "before", "after"]
                .map(String::from)
                .to_vec(),
            rows: c
                .file_changes
                .iter()
                .map(|e| {
                    vec![
                        e.element.clone(),
                        e.field.to_string(),
                        edit_value(&e.before),
                        edit_value(&e.after),
                    ]
                })
                .collect(),
            numeric: vec![],
        }];
        sections.push(changes(
            "Newly short",
            "Short after the change and not before: a new point of failure.",
            &c.new_short,
            u,
        ));
        sections.push(changes(
            "Got worse",
            "Shortfall or stranded demand, as printed, rose by more than the tolerance.",
            &c.worse,
            u,
        ));
        sections.push(changes(
            "Got better",
            "Shortfall or stranded demand fell and neither rose.",
            &c.better,
            u,
        ));
        sections.push(sided(
            "Added risks",
            "Scenarios that name an element only the new network has.",
            &c.added_risks,
            u,
        ));
        sections.push(sided(
            "Removed risks",
            "Scenarios that name an element the new network no longer has.",
            &c.removed_risks,
            u,
        ));
        if let Some(h) = &c.headroom {
            let text = super::headroom::compare_text(h, usize::MAX);
            sections.push(Section {
                title: "Growth headroom".into(),
                note: text.trim().to_string(),
                head: vec![],
                rows: vec![],
                numeric: vec![],
            });
        }
        Page {
            caution: super::caution_of(c.chains),
            title: format!("Change check: {} → {}", c.before_name, c.after_name),
            passed: c.passed(),
            verdict: verdict_line(c),
            baselines: format!(
                "Baseline shortfall {} → {}, stranded {} → {}, throughput {} → {} ({u}).",
                num(before.shortfall),
                num(after.shortfall),
                num(before.stranded),
                num(after.stranded),
                num(before.throughput),
                num(after.throughput),
            ),
            sections,
        }
    }

    /// The HTML page onto `o`: one self-contained file (inline styles, no script, nothing fetched).
    pub fn html(&self, o: &mut dyn fmt::Write) -> fmt::Result {
        page_opening(
            o,
            &format!("redoubt compare — {}", self.title),
            &self.title,
            &self.verdict,
            self.passed,
            self.caution,
        )?;
        writeln!(o, "<p>{}</p>", esc(&self.baselines))?;
        for s in &self.sections {
            writeln!(o, "<h2>{}</h2>", esc(&s.title))?;
            writeln!(o, "<p>{}</p>", esc(&s.note))?;
            if !s.rows.is_empty() {
                table_html(o, &s.head, &s.rows, &s.numeric)?;
            }
        }
        writeln!(o, "<p class=\"caution\">{}</p>", esc(self.caution))?;
        o.write_str("</main></body></html>\n")
    }

    /// The Markdown twin of [`Page::html`] onto `o`.
    pub fn markdown(&self, o: &mut dyn fmt::Write) -> fmt::Result {
        let cell = |s: &str| s.replace('|', "\\|").replace('\n', " ");
        writeln!(o, "# {}\n", self.title)?;
        writeln!(o, "> {}\n", self.caution)?;
        writeln!(o, "**{}**\n", self.verdict)?;
        writeln!(o, "{}\n", self.baselines)?;
        for s in &self.sections {
            writeln!(o, "## {}\n\n{}\n", s.title, s.note)?;
            if s.rows.is_empty() {
                continue;
            }
            let head: Vec<String> = s.head.iter().map(|h| cell(h)).collect();
            writeln!(o, "| {} |", head.join(" | "))?;
            writeln!(o, "|{}", "---|".repeat(s.head.len()))?;
            for r in &s.rows {
                let row: Vec<String> = r.iter().map(|c| cell(c)).collect();
                writeln!(o, "| {} |", row.join(" | "))?;
            }
            o.write_char('\n')?;
        }
        writeln!(o, "> {}", self.caution)
    }

    /// [`Page::html`] streamed to `w`.
    pub fn write_html(&self, w: &mut dyn Write) -> io::Result<()> {
        streamed(w, |o| self.html(o))
    }

    /// [`Page::markdown`] streamed to `w`.
    pub fn write_markdown(&self, w: &mut dyn Write) -> io::Result<()> {
        streamed(w, |o| self.markdown(o))
    }
}
