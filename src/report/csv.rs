//! `--csv FILE`: one row per scenario, for spreadsheets.
//!
//! Layout: a header row first (what spreadsheet and data-frame readers take as the column
//! names with their default options), then one row per scenario in the order of the JSON
//! document's `scenarios`. The last column, `caution`, holds [`super::CAUTION`] in the
//! first data row and is empty below it, so the caution travels with the data without a
//! comment line that plain RFC 4180 readers would take for the header. The
//! `failed` column is the scenario's elements joined with `,` (a `--fail` list; empty for
//! the baseline); a file with `matrices` adds a `matrix` column after it (one row per
//! scenario and matrix). Numbers are the JSON document's (rounded with [`super::file_num`]), so the
//! two files agree exactly. Fields are quoted as RFC 4180 asks (a comma, a quote or a line
//! break inside; quotes doubled). A file with `functions` adds `delivered`, `top_function`
//! (`FUNCTION@SITE` with the highest shadow price) and `top_function_price` before
//! `caution`.

use std::io::{self, Write};

use super::export::{Csv, Exporter};
use super::model::Model;
use super::{file_num, prob};
use crate::scenario::Scenario;

/// One CSV field, quoted when it holds a comma, a quote or a line break. O(len).
pub fn field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// A number as the JSON file holds it: [`file_num`] (12 significant digits), shortest
/// round-trip digits in plain decimal form.
fn number(x: f64) -> String {
    format!("{}", file_num(x))
}

fn failed_list(s: &Scenario) -> String {
    field(&s.failed.join(","))
}

/// The `audit --csv` exporter: header, one row per scenario, the caution in the last
/// column of the first row; the `closing_cost` and `not_closable` columns appear when
/// the model holds closings (per outage), `probability` when it holds risk figures,
/// `headroom` (before `caution`; empty when the scenario has none) with `--headroom`; ranks
/// and `same_as` are the model's. O(scenarios · elements per scenario).
impl Exporter<Model<'_>> for Csv {
    fn write(&self, m: &Model<'_>, w: &mut dyn Write) -> io::Result<()> {
        write_rows(w, m)
    }
}

fn write_rows(w: &mut dyn Write, m: &Model<'_>) -> io::Result<()> {
    let (audit, closings, risk) = (m.audit, m.closings, m.risk);
    let several = m.several_matrices();
    let mut header = vec!["failed"];
    if several {
        header.push("matrix");
    }
    header.extend([
        "rank",
        "required",
        "served_required",
        "shortfall",
        "stranded",
        "throughput",
    ]);
    if closings.is_some() {
        header.extend(["closing_cost", "not_closable"]);
    }
    if risk.is_some() {
        header.push("probability");
    }
    header.push("same_as");
    if m.headroom.is_some() {
        header.push("headroom");
    }
    let chains = m.net.chains.is_some();
    if chains {
        header.extend(["delivered", "top_function", "top_function_price"]);
    }
    header.push("caution");
    writeln!(w, "{}", header.join(","))?;
    let (rank_of, folding) = (&m.rank_of, &m.folding);
    for (i, s) in audit.scenarios.iter().enumerate() {
        let e = audit.eval(i);
        let mut row = vec![failed_list(s)];
        if several {
            row.push(field(m.net.matrix_id(s.matrix)));
        }
        row.extend([
            rank_of[i].to_string(),
            number(e.surviving_required),
            number(e.served_required),
            number(e.shortfall),
            number(e.stranded),
            number(e.throughput),
        ]);
        if let Some(c) = closings {
            match &c[audit.outage_of[i]] {
                Some(c) => row.extend([number(c.cost), number(c.not_closable)]),
                None => row.extend([String::new(), String::new()]),
            }
        }
        if let Some(r) = risk {
            row.push(format!("{}", prob(r.probability[i])));
        }
        row.push(
            folding.into[i]
                .map(|r| failed_list(&audit.scenarios[r]))
                .unwrap_or_default(),
        );
        if m.headroom.is_some() {
            row.push(super::headroom::csv_cell(m, i));
        }
        if chains {
            row.extend(chain_cells(m.net.view(s.matrix), e));
        }
        row.push(if i == 0 {
            field(super::caution_for(m.net))
        } else {
            String::new()
        });
        writeln!(w, "{}", row.join(","))?;
    }
    Ok(())
}

/// The service-chain cells of a scenario's row: the delivered volume, the function at a
/// site with the highest shadow price (`FUNCTION@SITE`, empty when none binds) and that
/// price. O(sites · functions).
fn chain_cells(net: &crate::model::Network, e: &crate::solve::Evaluation) -> [String; 3] {
    let top = super::text::priced_functions(net, e, false)
        .into_iter()
        .next();
    let ch = net.chains.as_ref();
    [
        e.delivered.map(number).unwrap_or_default(),
        match (top, ch) {
            (Some((s, f, _)), Some(ch)) => {
                field(&format!("{}@{}", ch.functions[f].id, net.sites[s].id))
            }
            _ => String::new(),
        },
        top.map(|t| number(t.2)).unwrap_or_default(),
    ]
}

#[cfg(test)]
mod tests {
    use super::field;

    /// RFC 4180, section 2 (rules 5–7): fields with commas, quotes or line breaks are
    /// enclosed in quotes and inner quotes doubled.
    #[test]
    fn quoting_follows_rfc_4180() {
        assert_eq!(field("link:a"), "link:a");
        assert_eq!(field("link:a,site:b"), "\"link:a,site:b\"");
        assert_eq!(field("say \"hi\""), "\"say \"\"hi\"\"\"");
        assert_eq!(field("two\nlines"), "\"two\nlines\"");
    }
}
