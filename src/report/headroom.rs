//! What `--headroom` adds to the reports ([`crate::headroom`]): the JSON fields (each
//! scenario's `headroom`, the top-level `headroom` object), the planner's sentence beside
//! the verdict, the `UNPROVEN:` lines, the CSV cell, and the headroom part of `compare`.
//! Without `--headroom` nothing here is called, so every output stays as it was.

use std::fmt::Write as _;

use serde::Serialize;

use super::json::AuditJson;
use super::model::Model;
use super::{file_num, num};
use crate::headroom::{self, Headroom, percent};

/// The top-level `headroom` object of an audit document.
#[derive(Serialize)]
pub struct HeadroomJson {
    /// The least headroom over the scenarios (a factor of required demand; its proven
    /// lower bound when unproven); `null` when no scenario has surviving required demand.
    pub value: Option<f64>,
    /// The failed elements of the scenario that sets it (`[]` when `value` is null).
    pub failed: Vec<String>,
    /// The traffic matrix the value is taken under (`base`: the file's `demands`).
    pub matrix: String,
    /// `proven`, `unproven` (then `value` is the proven lower bound) or `none`.
    pub status: &'static str,
}

/// How one scenario's headroom was verified (present beside every non-null `headroom`).
#[derive(Serialize)]
pub struct HeadroomVerificationJson {
    /// `proven` (the bounds meet) or `unproven` (`headroom` is the proven lower bound).
    pub status: &'static str,
    pub lower_bound: f64,
    pub upper_bound: f64,
}

impl HeadroomVerificationJson {
    fn of(h: &Headroom) -> Option<HeadroomVerificationJson> {
        h.value.map(|_| HeadroomVerificationJson {
            status: status(h.proven),
            lower_bound: file_num(h.lower),
            upper_bound: file_num(h.upper),
        })
    }
}

fn status(proven: bool) -> &'static str {
    if proven { "proven" } else { "unproven" }
}

/// Adds the headroom of `m` (when it holds one) to `doc`: the top-level object, the
/// baseline's and each scenario's `headroom` (a number, or `null`) with its verification.
/// O(1) here; each scenario's fields are set as it is written.
pub fn attach<'a>(doc: &mut AuditJson<'a>, m: &Model<'a>) {
    let Some(h) = m.headroom else { return };
    let audit = m.audit;
    let least = &h.least;
    doc.headroom = Some(HeadroomJson {
        value: least.value.map(file_num),
        failed: least
            .scenario
            .filter(|_| least.value.is_some())
            .map(|i| audit.scenarios[i].failed.clone())
            .unwrap_or_default(),
        matrix: m
            .net
            .matrix_id(
                least
                    .scenario
                    .filter(|_| least.value.is_some())
                    .map_or(0, |i| audit.scenarios[i].matrix),
            )
            .to_string(),
        status: match least.value {
            None => "none",
            Some(_) => status(least.proven),
        },
    });
    doc.baseline.headroom = Some(h.baseline.value.map(file_num));
    doc.baseline.headroom_verification = HeadroomVerificationJson::of(&h.baseline);
    doc.scenarios.patch(Box::new(move |i, s| {
        let one = h.of(audit, i);
        s.headroom = Some(one.value.map(file_num));
        s.headroom_verification = HeadroomVerificationJson::of(one);
    }));
}

/// The CSV cell of scenario `i`: its headroom as the JSON writes it, empty when it has
/// none. O(1).
pub fn csv_cell(m: &Model<'_>, i: usize) -> String {
    m.headroom
        .and_then(|h| h.of(m.audit, i).value)
        .map(|v| format!("{}", file_num(v)))
        .unwrap_or_default()
}

/// The table cell of scenario `i`: its headroom as a percentage of required demand
/// (`124%`), `≥118%` when unproven (the proven lower bound), `—` without a value. O(1).
pub fn table_cell(m: &Model<'_>, i: crate::audit::ScenarioId) -> String {
    let Some(h) = m.headroom else {
        return String::new();
    };
    let one = h.of(m.audit, i);
    match one.value {
        None => "—".into(),
        Some(v) if one.proven => percent(v),
        Some(v) => format!("≥{}", percent(v)),
    }
}

/// The planner's sentence that follows the verdict: how far required demand can grow,
/// every demand alike, before any examined scenario is short, and which scenario sets the
/// limit; or, below 1, how much of it fits now. `None` without `--headroom`. O(1).
pub fn sentence(m: &Model<'_>) -> Option<String> {
    let h = m.headroom?;
    let least = &h.least;
    let (Some(v), Some(i)) = (least.value, least.scenario) else {
        return Some(
            "Headroom: no examined scenario has surviving required demand, so there is no \
             growth factor to report."
                .into(),
        );
    };
    let name = m.audit.scenarios[i].display_name();
    let shown = headroom::shown(v);
    let mut s = if shown > 1.0 {
        format!(
            "Headroom: required demand can grow by {} (every demand to {} of its required) \
             before any examined scenario is short; {name} sets the limit.",
            growth(v),
            percent(v)
        )
    } else if shown == 1.0 {
        format!(
            "Headroom: required demand fits with no room to grow; any growth leaves {name} \
             short."
        )
    } else if v > 0.0 {
        format!(
            "Headroom: required demand is short now: only {} of it fits concurrently (every \
             demand scaled alike) under {name}.",
            percent(v)
        )
    } else {
        format!(
            "Headroom: none: under {name} some surviving required demand cannot be served at \
             all, so no common share of required demand fits."
        )
    };
    if !least.proven {
        s.push_str(" UNPROVEN: this is a proven lower bound (listed below).");
    }
    if let Some(b) = h.baseline.value {
        let _ = write!(
            s,
            " With no further failure: {}{}.",
            if h.baseline.proven { "" } else { "at least " },
            percent(b)
        );
    }
    Some(s)
}

/// `λ − 1` as a percentage (`24%` for λ = 1.24); `<0.001%`-style small growth prints in
/// [`num`]'s engineering notation, never as 0. O(1).
fn growth(lambda: f64) -> String {
    format!("{}%", num(100.0 * lambda - 100.0))
}

/// How the headroom values were verified, one line, and an `UNPROVEN:` line per outage
/// whose headroom is open (it is then reported at its proven lower bound). Empty without
/// `--headroom`. O(outages).
pub fn verification_lines(m: &Model<'_>) -> String {
    let Some(h) = m.headroom else {
        return String::new();
    };
    let valued: Vec<usize> = (0..h.per_outage.len())
        .filter(|&k| h.per_outage[k].value.is_some())
        .collect();
    let proven = valued.iter().filter(|&&k| h.per_outage[k].proven).count();
    let mut out = format!(
        "Headroom: {proven} of {} outage{} with surviving required demand proven by \
         independent bounds (a feasible allocation at the factor and a priced bound meet).\n",
        valued.len(),
        if valued.len() == 1 { "" } else { "s" }
    );
    for &k in &valued {
        let one = &h.per_outage[k];
        if !one.proven {
            let _ = writeln!(
                out,
                "UNPROVEN: {}: headroom between {} and {} of required (reported at the lower \
                 bound, so growth room is not overstated).",
                m.audit
                    .first_scenario(crate::audit::OutageId(k))
                    .display_name(),
                percent(one.lower),
                percent(one.upper)
            );
        }
    }
    out
}

/// One side of the `compare` headroom object.
#[derive(Serialize)]
pub struct SideJson {
    pub value: Option<f64>,
    pub failed: Vec<String>,
    pub status: &'static str,
}

/// One matched scenario whose headroom changed.
#[derive(Serialize)]
pub struct ChangeJson {
    pub failed: Vec<String>,
    pub before: f64,
    pub after: f64,
    /// After − before, in percentage points of required demand, as printed.
    pub change_points: f64,
}

/// The `headroom` object of a `compare --json` document.
#[derive(Serialize)]
pub struct CompareJson {
    pub before: SideJson,
    pub after: SideJson,
    pub lost: Vec<ChangeJson>,
    pub gained: Vec<ChangeJson>,
    /// `--min-headroom` on AFTER's headroom (absent without it).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gate: Option<super::json::GateJson>,
}

type Side = (Option<f64>, Option<Vec<String>>, bool);

fn side_json(s: &Side) -> SideJson {
    SideJson {
        value: s.0.map(file_num),
        failed: s.1.clone().unwrap_or_default(),
        status: match s.0 {
            None => "none",
            Some(_) => status(s.2),
        },
    }
}

fn changes_json(v: &[headroom::Change]) -> Vec<ChangeJson> {
    v.iter()
        .map(|c| ChangeJson {
            failed: c.failed.clone(),
            before: file_num(c.before),
            after: file_num(c.after),
            change_points: file_num(c.delta_points),
        })
        .collect()
}

/// The `compare --json` headroom object; `gate_scenario` names the AFTER scenario the
/// gate's value comes from.
pub fn compare_json(c: &headroom::Comparison) -> CompareJson {
    CompareJson {
        before: side_json(&c.before),
        after: side_json(&c.after),
        lost: changes_json(&c.lost),
        gained: changes_json(&c.gained),
        gate: c.gate.map(|g| super::json::GateJson {
            gate: "min_headroom",
            limit: g.limit,
            worst: g.value.is_finite().then(|| file_num(g.value)),
            worst_scenario: c.after.1.clone(),
            matrix: None,
            passed: g.passed,
        }),
    }
}

/// The `compare` screen's headroom section: both sides' headroom, the scenarios that
/// lost and gained headroom (top `top` each), and the `--min-headroom` line.
pub fn compare_text(c: &headroom::Comparison, top: usize) -> String {
    use super::screen::{render, right, table};
    use comfy_table::Cell;
    let side = |s: &Side| match (s.0, &s.1) {
        (Some(v), Some(f)) => format!(
            "{}{} ({})",
            if s.2 { "" } else { "at least " },
            percent(v),
            super::text::scenario_words(f)
        ),
        _ => "none (no surviving required demand)".into(),
    };
    let mut out = format!(
        "\nHeadroom (how far required demand can grow, every demand alike, before a scenario \
         is short; the least over the scenarios): before {}, after {}.\n",
        side(&c.before),
        side(&c.after)
    );
    let list = |title: &str, v: &[headroom::Change]| -> String {
        let mut t = table(&["failed", "headroom before", "after", "change (points)"]);
        for ch in v.iter().take(top) {
            t.add_row(vec![
                Cell::new(super::text::scenario_words(&ch.failed)),
                Cell::new(percent(ch.before)),
                Cell::new(percent(ch.after)),
                Cell::new(super::text::signed(ch.delta_points)),
            ]);
        }
        right(&mut t, &[1, 2, 3]);
        format!(
            "\n{title} ({} scenario{}, top {}; percentages of required demand):\n{}\n",
            v.len(),
            if v.len() == 1 { "" } else { "s" },
            top.min(v.len()),
            render(&mut t, &[])
        )
    };
    if !c.lost.is_empty() {
        out.push_str(&list("Headroom lost", &c.lost));
    }
    if !c.gained.is_empty() {
        out.push_str(&list("Headroom gained", &c.gained));
    }
    if c.lost.is_empty() && c.gained.is_empty() {
        out.push_str("No matched scenario's headroom changed (as printed).\n");
    }
    if let Some(g) = &c.gate {
        let verdict = if g.passed { "PASS" } else { "FAIL" };
        let limit = format!(
            "{} ({}%)",
            super::given(g.limit),
            super::shift_point(g.limit, 2)
        );
        let _ = writeln!(
            out,
            "{verdict} --min-headroom {}: AFTER's headroom {} {} the limit {limit}",
            super::given(g.limit),
            side(&c.after),
            if g.passed { "meets" } else { "is below" }
        );
    }
    out
}
