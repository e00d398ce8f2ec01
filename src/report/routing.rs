//! Output for the deployed routings (`--routing nearest|steered`): the comparison with the
//! best re-route, utilisation under the offered load, and where failures move traffic.

use std::fmt::Write as _;

use comfy_table::Cell;

use super::model::Model;
use super::screen;
use super::text::first_k;
use serde::Serialize;

use super::{file_num, num, percent, ratio_percent};
use crate::model::Network;
use crate::routing::{self, Mode, Offered, RoutedAudit};
use crate::solve::Evaluation;

/// How many items a table cell lists before `(+N more)`.
const CELL_ITEMS: usize = 2;

/// A utilisation for people: a percentage, never clamped (offered load above capacity
/// shows as `250.0%`), or `inf` for load on capacity 0 ([`ratio_percent`]).
pub fn util_text(u: f64) -> String {
    ratio_percent(u)
}

/// A utilisation for files: a number ([`file_num`]), or the string `"inf"`.
pub fn util_json(u: f64) -> serde_json::Value {
    if u.is_infinite() {
        serde_json::Value::String("inf".into())
    } else {
        serde_json::json!(file_num(u))
    }
}

/// `link:ID` / `site:ID` names of the overloaded resources, sorted.
pub fn overloaded_names(net: &Network, o: &Offered) -> Vec<String> {
    let mut v: Vec<String> = o
        .overloaded_links
        .iter()
        .map(|&l| format!("link:{}", net.links[l].id))
        .chain(
            o.overloaded_sites
                .iter()
                .map(|&s| format!("site:{}", net.sites[s].id)),
        )
        .collect();
    v.sort();
    v
}

fn describe(mode: Mode) -> &'static str {
    match mode {
        Mode::Nearest => {
            "shortest paths on the link metrics, split equally per hop over equal-cost next \
             hops, each demand processed at its nearest processing site(s)"
        }
        Mode::Steered => {
            "shortest paths on the link metrics, split equally per hop over equal-cost next \
             hops, each demand steered to its processing sites in the best proportions"
        }
    }
}

/// The routing section of the audit report: baseline (one line per traffic matrix when the
/// file has `matrices`), per-scenario comparison with the best re-route (each scenario
/// once, under its worst matrix, with several matrices), overloads under the offered load,
/// traffic moved by each failure (against its own matrix's baseline), and the failures that
/// hurt only under the deployed routing. O(S log S) for S scenarios.
pub fn routing_report(model: &Model<'_>, ra: &RoutedAudit) -> String {
    let (net, top) = (model.net, model.top);
    let u = &net.unit;
    let m = ra.mode.name();
    let audit = &ra.audit;
    let mut out = String::new();
    let _ = writeln!(out, "Routing as deployed ({m}): {}.", describe(ra.mode));
    let several = model.several_matrices();
    for b in &ra.baselines {
        let under = if several {
            format!(" under matrix {}", net.matrix_id(b.matrix))
        } else {
            String::new()
        };
        let (e, o) = (&b.routed.eval, &b.routed.offered);
        let _ = writeln!(
            out,
            "Baseline{under}: {m} serves {} of {} {u} required ({}); the best re-route serves \
             {}. Offered load (every demand's required on the nearest routes): largest link \
             utilisation {}, largest site utilisation {}; overloaded: {}.",
            num(e.served_required),
            num(e.surviving_required),
            percent(e.served_required, e.surviving_required),
            num(b.best.served_required),
            util_text(o.max_link_util),
            util_text(o.max_site_util),
            first_k(overloaded_names(net, o).into_iter(), CELL_ITEMS),
        );
    }
    let order = &model.order;
    // With several matrices each scenario is listed once, under its worst matrix (the first
    // of its pairs in the worst-first order), as in the audit's own table.
    let mut seen: std::collections::HashSet<&[String]> = Default::default();
    let rows: Vec<crate::scenario::ScenarioId> = order
        .iter()
        .copied()
        .filter(|&i| !several || seen.insert(&audit.scenarios[i].failed[..]))
        .collect();
    // Worst first, without a rank column: the width goes to the names.
    let mut header = vec!["failed".to_string()];
    header.extend([
        format!("served, {m} ({u})"),
        format!("served, best re-route ({u})"),
        format!("win-back ({u})"),
        "max link util.".to_string(),
        "max site util.".to_string(),
        "overloaded".to_string(),
        "traffic moved onto".to_string(),
    ]);
    let mut t = screen::table(&header);
    for &i in rows.iter().take(top) {
        let k = audit.outage_of[i];
        let e = &audit.evaluations[k];
        let o = &ra.offered[k];
        let base = &ra.baseline_under(audit.scenarios[i].matrix).routed.offered;
        let moved: Vec<String> = routing::moved_onto(base, o, e.surviving_required)
            .iter()
            .map(|&(a, d)| {
                let arc = &net.arcs[a];
                format!(
                    "{} (→{}) +{}",
                    net.links[arc.link].id,
                    net.sites[arc.to].id,
                    num(d)
                )
            })
            .collect();
        // With several matrices the name says which: "site:x under matrix evening-peak".
        let mut row = vec![Cell::new(audit.scenarios[i].display_name())];
        row.extend([
            Cell::new(num(e.served_required)),
            Cell::new(num(ra.best[k].served_required)),
            Cell::new(num(ra.recoverable(k.0))),
            Cell::new(util_text(o.max_link_util)),
            Cell::new(util_text(o.max_site_util)),
            Cell::new(first_k(overloaded_names(net, o).into_iter(), CELL_ITEMS)),
            Cell::new(first_k(moved.into_iter(), CELL_ITEMS)),
        ]);
        t.add_row(row);
    }
    screen::right(&mut t, &[1, 2, 3, 4, 5]);
    // A name that carries its matrix wraps at its spaces (between the scenario and its
    // matrix); without matrices the names stay on one line, as before.
    let t = if several {
        screen::render(&mut t, &[0, 6, 7])
    } else {
        screen::render(&mut t, &[6, 7])
    };
    let _ = writeln!(
        out,
        "\nWorst {} of {} under {m} routing, beside the best re-route \
         (win-back = what steering or re-optimisation would recover{}):\n{t}",
        top.min(rows.len()),
        super::count(order.len(), "scenario"),
        if several {
            "; each scenario once, under its worst matrix"
        } else {
            ""
        }
    );
    let only: Vec<String> = order
        .iter()
        .filter(|&&i| {
            let k = audit.outage_of[i];
            audit.evaluations[k].shortfall > 0.0 && ra.best[k].shortfall <= 0.0
        })
        .map(|&i| audit.scenarios[i].display_name())
        .collect();
    if only.is_empty() {
        let _ = writeln!(
            out,
            "No scenario is short under {m} routing while the best re-route serves it fully."
        );
    } else {
        let _ = writeln!(
            out,
            "Short under {m} routing but fully served by a re-route ({}): {}",
            only.len(),
            first_k(only.into_iter(), top)
        );
    }
    screen::finish(&out)
}

/// The line a `plan --routing steered` report starts with.
pub fn plan_header(mode: Mode) -> String {
    format!(
        "Routing as deployed ({}): {}; processing bought for this model (routes stay the \
         shortest paths).\n",
        mode.name(),
        describe(mode)
    )
}

/// The routing fields a scenario's JSON object gains under nearest/steered.
#[derive(Serialize)]
pub struct RoutedScenarioJson {
    pub max_link_utilisation: serde_json::Value,
    pub max_site_utilisation: serde_json::Value,
    pub overloaded: Vec<String>,
    /// served_required of the best re-route of the same outage, and the difference.
    pub best_served_required: f64,
    pub recoverable: f64,
    /// Link directions whose offered load rose against the baseline, largest first.
    pub traffic_moved_onto: Vec<MovedJson>,
}

#[derive(Serialize)]
pub struct MovedJson {
    pub link: String,
    pub from: String,
    pub to: String,
    pub increase: f64,
}

fn routed_fields(
    net: &Network,
    base: &Offered,
    o: &Offered,
    e: &Evaluation,
    best: &Evaluation,
) -> RoutedScenarioJson {
    RoutedScenarioJson {
        max_link_utilisation: util_json(o.max_link_util),
        max_site_utilisation: util_json(o.max_site_util),
        overloaded: overloaded_names(net, o),
        best_served_required: file_num(best.served_required),
        recoverable: file_num(routing::win_back(best, e)),
        traffic_moved_onto: routing::moved_onto(base, o, e.surviving_required)
            .into_iter()
            .map(|(a, d)| {
                let arc = &net.arcs[a];
                MovedJson {
                    link: net.links[arc.link].id.clone(),
                    from: net.sites[arc.from].id.clone(),
                    to: net.sites[arc.to].id.clone(),
                    increase: file_num(d),
                }
            })
            .collect(),
    }
}

/// The audit document under a deployed routing: the same document as the best re-route
/// (values under the chosen routing), with `routing` set and each scenario carrying
/// [`RoutedScenarioJson`].
pub fn audit_json<'a>(
    model: &Model<'a>,
    ra: &'a RoutedAudit,
    closing: Option<&'a [serde_json::Value]>,
) -> super::json::AuditJson<'a> {
    let (net, audit) = (model.net, &ra.audit);
    let mut doc = super::json::audit_json_with(model, closing);
    doc.routing = ra.mode.name();
    let first = ra.baseline_under(audit.baseline_matrix());
    doc.baseline.routed = Some(routed_fields(
        net,
        &first.routed.offered,
        &first.routed.offered,
        &first.routed.eval,
        &first.best,
    ));
    doc.scenarios.patch(Box::new(move |i, s| {
        let k = audit.outage_of[i];
        s.routed = Some(routed_fields(
            net,
            &ra.baseline_under(audit.scenarios[i].matrix).routed.offered,
            &ra.offered[k],
            &audit.evaluations[k],
            &ra.best[k],
        ));
    }));
    doc
}
