//! Terminal output: the `check` summary and the audit tables (comfy-table).

use std::fmt::Write as _;

use comfy_table::{Cell, CellAlignment, ContentArrangement, Table, presets::UTF8_FULL_CONDENSED};

use super::{CAUTION, num, percent};
use crate::audit::Audit;
use crate::model::Network;
use crate::rank::{self, Criticality};
use crate::solve::{Evaluation, Resource};

fn table(header: &[&str]) -> Table {
    let mut t = Table::new();
    t.load_style(UTF8_FULL_CONDENSED)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_header(header.iter().map(|h| Cell::new(h)));
    t
}

fn right(t: &mut Table, cols: &[usize]) {
    for &c in cols {
        if let Some(col) = t.column_mut(c) {
            col.set_cell_alignment(CellAlignment::Right);
        }
    }
}

/// The `check` summary: sizes, totals, processing sites and risk groups.
pub fn check_summary(net: &Network) -> String {
    let mut out = String::new();
    let u = &net.unit;
    let one_way = net.links.iter().filter(|l| l.one_way).count();
    let _ = writeln!(out, "{}: valid", net.name);
    let _ = writeln!(
        out,
        "  sites {}  links {} ({} one-way, {} directions)  demands {}",
        net.sites.len(),
        net.links.len(),
        one_way,
        net.arcs.len(),
        net.demands.len()
    );
    let _ = writeln!(
        out,
        "  volume {} {u}  required {} {u}  processing {} {u}",
        num(net.total_volume()),
        num(net.total_required()),
        num(net.total_processing())
    );
    let procs: Vec<String> = net
        .sites
        .iter()
        .filter(|s| s.processing > 0.0)
        .map(|s| format!("{} {}", s.id, num(s.processing)))
        .collect();
    let _ = writeln!(
        out,
        "  processing sites ({}): {}",
        procs.len(),
        if procs.is_empty() {
            "none".into()
        } else {
            procs.join(", ")
        }
    );
    let expandable: Vec<String> = net
        .sites
        .iter()
        .filter_map(|s| {
            s.expansion.as_ref().map(|e| {
                format!(
                    "{} (cost {}/unit, up to {}{})",
                    s.id,
                    num(e.cost),
                    num(e.max),
                    e.step
                        .map(|st| format!(", modules of {}", num(st)))
                        .unwrap_or_default()
                )
            })
        })
        .collect();
    let _ = writeln!(
        out,
        "  expandable sites ({}): {}",
        expandable.len(),
        if expandable.is_empty() {
            "none".into()
        } else {
            expandable.join(", ")
        }
    );
    if net.groups.is_empty() {
        let _ = writeln!(out, "  risk groups: none");
    } else {
        let _ = writeln!(out, "  risk groups ({}):", net.groups.len());
        for g in &net.groups {
            let _ = writeln!(
                out,
                "    {} — {} link{}",
                g.name,
                g.links.len(),
                if g.links.len() == 1 { "" } else { "s" }
            );
        }
    }
    out
}

/// Names the main bottleneck of a scenario with a shortfall: the saturated resource with
/// the highest shadow price.
pub fn main_bottleneck(net: &Network, e: &Evaluation) -> String {
    if e.shortfall <= 0.0 {
        return "—".into();
    }
    match e.bottlenecks.first() {
        None => "no route".into(),
        Some(b) => resource_name(net, b.resource),
    }
}

/// `link ID (A→B)` or `site ID processing`.
pub fn resource_name(net: &Network, r: Resource) -> String {
    match r {
        Resource::Arc(a) => {
            let arc = &net.arcs[a];
            format!(
                "link {} ({}→{})",
                net.links[arc.link].id, net.sites[arc.from].id, net.sites[arc.to].id
            )
        }
        Resource::Site(v) => format!("site {} processing", net.sites[v].id),
    }
}

/// The audit report: header, worst scenarios, element criticality and the caution.
pub fn audit_report(net: &Network, audit: &Audit, baseline: &Evaluation, top: usize) -> String {
    let u = &net.unit;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} — {} scenarios ({} distinct outages), {} sites, {} links, {} demands",
        net.name,
        audit.scenarios.len(),
        audit.outages.len(),
        net.sites.len(),
        net.links.len(),
        net.demands.len()
    );
    let _ = writeln!(
        out,
        "Baseline: serves {} of {} {u} required ({}), throughput {} of {} {u} offered; \
         certified gap {:.1e}.",
        num(baseline.served_required),
        num(baseline.surviving_required),
        percent(baseline.served_required, baseline.surviving_required),
        num(baseline.throughput),
        num(net.total_volume()),
        baseline.certified_gap()
    );
    let order = rank::worst_first(audit);
    let shown = top.min(order.len());
    let mut t = table(&[
        "#",
        "failed",
        &format!("shortfall ({u})"),
        "% of required",
        &format!("stranded ({u})"),
        &format!("throughput loss ({u})"),
        "main bottleneck",
    ]);
    for (rank_no, &i) in order.iter().take(shown).enumerate() {
        let e = audit.eval(i);
        t.add_row(vec![
            Cell::new(rank_no + 1),
            Cell::new(audit.scenarios[i].display_name()),
            Cell::new(num(e.shortfall)),
            Cell::new(percent(e.shortfall, e.surviving_required)),
            Cell::new(num(e.stranded)),
            Cell::new(num((baseline.throughput - e.throughput).max(0.0))),
            Cell::new(main_bottleneck(net, e)),
        ]);
    }
    right(&mut t, &[0, 2, 3, 4, 5]);
    let short = (0..audit.scenarios.len())
        .filter(|&i| audit.eval(i).shortfall > 0.0)
        .count();
    let _ = writeln!(
        out,
        "\nWorst {shown} of {} scenarios ({short} with a shortfall against required demand):",
        order.len()
    );
    let _ = writeln!(out, "{t}");

    let crit: Vec<Criticality> = rank::criticality(audit);
    if !crit.is_empty() {
        let mut c = table(&[
            "element",
            &format!("worst shortfall ({u})"),
            &format!("worst stranded ({u})"),
            "scenarios short",
            "worst scenario",
        ]);
        for cr in crit.iter().take(top) {
            c.add_row(vec![
                Cell::new(cr.element.name(net)),
                Cell::new(num(cr.worst_shortfall)),
                Cell::new(num(cr.worst_stranded)),
                Cell::new(cr.scenarios_short),
                Cell::new(audit.scenarios[cr.worst_scenario].display_name()),
            ]);
        }
        right(&mut c, &[1, 2, 3]);
        let _ = writeln!(
            out,
            "\nElement criticality (worst scenario containing each element; top {} of {}):",
            top.min(crit.len()),
            crit.len()
        );
        let _ = writeln!(out, "{c}");
    }
    let worst_gap = audit
        .evaluations
        .iter()
        .map(Evaluation::certified_gap)
        .fold(0.0, f64::max);
    let _ = writeln!(
        out,
        "\nEvery outage solved to optimality; largest certified gap between the allocation and \
         its dual bound: {worst_gap:.1e} (relative)."
    );
    let _ = writeln!(out, "{CAUTION}");
    out
}
