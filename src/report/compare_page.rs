//! `compare --report DIR`: the comparison as a self-contained HTML page and its Markdown
//! twin. The page model ([`Page`]) is computed once from the [`Comparison`]: the verdict,
//! the two baselines, what changed in the file, then every scenario that is newly short,
//! got worse or better, and the added and removed risks (all rows, not the text's top N),
//! the headroom when compared; each exporter only lays it out.

use std::fmt::Write as _;
use std::io::{self, Write};

use super::CAUTION;
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
}

fn changes(title: &str, note: &str, list: &[Change], unit: &str) -> Section {
    Section {
        title: format!("{title} ({})", list.len()),
        note: format!("{note} Amounts in {unit}."),
        head: [
            "failed",
            "shortfall before",
            "after",
            "change",
            "stranded before",
            "after",
        ]
        .map(String::from)
        .to_vec(),
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

    /// The HTML page: one self-contained file (inline styles, no script, nothing fetched).
    pub fn html(&self) -> String {
        let mut o = String::new();
        page_opening(
            &mut o,
            &format!("redoubt compare — {}", self.title),
            &self.title,
            &self.verdict,
            self.passed,
        );
        let _ = writeln!(o, "<p>{}</p>", esc(&self.baselines));
        for s in &self.sections {
            let _ = writeln!(o, "<h2>{}</h2>", esc(&s.title));
            let _ = writeln!(o, "<p>{}</p>", esc(&s.note));
            if !s.rows.is_empty() {
                table_html(&mut o, &s.head, &s.rows, &s.numeric);
            }
        }
        let _ = writeln!(o, "<p class=\"caution\">{}</p>", esc(CAUTION));
        o.push_str("</main></body></html>\n");
        o
    }

    /// The Markdown twin of [`Page::html`].
    pub fn markdown(&self) -> String {
        let cell = |s: &str| s.replace('|', "\\|").replace('\n', " ");
        let mut o = String::new();
        let _ = writeln!(o, "# {}\n", self.title);
        let _ = writeln!(o, "> {}\n", CAUTION);
        let _ = writeln!(o, "**{}**\n", self.verdict);
        let _ = writeln!(o, "{}\n", self.baselines);
        for s in &self.sections {
            let _ = writeln!(o, "## {}\n\n{}\n", s.title, s.note);
            if s.rows.is_empty() {
                continue;
            }
            let head: Vec<String> = s.head.iter().map(|h| cell(h)).collect();
            let _ = writeln!(o, "| {} |", head.join(" | "));
            let _ = writeln!(o, "|{}", "---|".repeat(s.head.len()));
            for r in &s.rows {
                let row: Vec<String> = r.iter().map(|c| cell(c)).collect();
                let _ = writeln!(o, "| {} |", row.join(" | "));
            }
            o.push('\n');
        }
        let _ = writeln!(o, "> {}", CAUTION);
        o
    }

    /// [`Page::html`] to `w`.
    pub fn write_html(&self, w: &mut dyn Write) -> io::Result<()> {
        w.write_all(self.html().as_bytes())
    }

    /// [`Page::markdown`] to `w`.
    pub fn write_markdown(&self, w: &mut dyn Write) -> io::Result<()> {
        w.write_all(self.markdown().as_bytes())
    }
}
