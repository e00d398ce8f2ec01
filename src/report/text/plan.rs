//! Purchases on the terminal: `--close` (closings per scenario), "where one more unit
//! helps" (relief) and the `plan` screen.

#[allow(unused_imports)]
use super::*;
use crate::report::export::{Exporter, PlanReport, Text};
use crate::report::model::Model;

/// The `--close` section: per scenario with a shortfall, the cheapest expansion.
pub fn closing_report(m: &Model<'_>) -> String {
    let (net, audit, top) = (m.net, m.audit, m.top);
    let default_costs = m.default_costs();
    let Some(closings) = m.closings else {
        return String::new();
    };
    let u = &net.unit;
    let mut out = String::new();
    let order: Vec<ScenarioId> = m
        .order
        .iter()
        .copied()
        .filter(|&i| closings[audit.outage_of[i]].is_some())
        .collect();
    let chains = net.chains.is_some();
    let _ = writeln!(
        out,
        "\nClosing the gaps: cheapest added {} per scenario ({} with a shortfall){}",
        if chains {
            "function capacity (site and function)"
        } else {
            "processing"
        },
        order.len(),
        match (default_costs, chains) {
            (false, _) => ".",
            (true, false) =>
                ". No site has expand_cost: every site is a candidate at cost 1 per unit.",
            (true, true) => {
                ". No site has `expand`: every function at every site is a candidate at cost 1 \
                 per unit."
            }
        }
    );
    if order.is_empty() {
        return out;
    }
    let mut t = table(&[
        "failed",
        "shortfall",
        "cost",
        "add at",
        "not closable",
        "what limits the rest",
    ]);
    for &i in order.iter().take(top) {
        let c = closings[audit.outage_of[i]].as_ref().expect("filtered");
        t.add_row(vec![
            Cell::new(audit.scenarios[i].display_name()),
            Cell::new(num(audit.eval(i).shortfall)),
            Cell::new(num(c.cost)),
            Cell::new(closing_additions(net, c, 3)),
            Cell::new(num(c.not_closable)),
            Cell::new(if c.not_closable <= 0.0 {
                "—".into()
            } else if c.binding_links.is_empty() {
                match audit.eval(i).cut_off.len() {
                    0 if chains => {
                        "expansion limits (expand max, sites offering the function)".into()
                    }
                    0 => "expansion limits (expand_max, candidate sites)".into(),
                    1 => "no path (or no candidate site) for 1 demand".into(),
                    n => format!("no path (or no candidate site) for {n} demands"),
                }
            } else {
                link_list(net, &c.binding_links, 3)
            }),
        ]);
    }
    right(&mut t, &[1, 2, 4]);
    let _ = writeln!(out, "Amounts in {u}.\n{}", render(&mut t, &[3, 5]));
    let checked = order
        .iter()
        .filter(|&&i| {
            closings[audit.outage_of[i]]
                .as_ref()
                .is_some_and(|c| c.verified)
        })
        .count();
    let _ = writeln!(
        out,
        "Each closing re-solved with its additions applied: {checked} of {} reach their best \
         reachable value, proven.",
        order.len()
    );
    let stopped = order
        .iter()
        .filter(|&&i| {
            closings[audit.outage_of[i]]
                .as_ref()
                .is_some_and(|c| !c.modules_exhaustive)
        })
        .count();
    if stopped > 0 {
        let _ = writeln!(
            out,
            "Whole modules: for {stopped} closing(s) the search over module counts stopped at its \
             limit of LP solves; each shows the cheapest whole-module purchase found, which may \
             not be the cheapest there is."
        );
    }
    for &i in &order {
        let c = closings[audit.outage_of[i]].as_ref().expect("filtered");
        if !c.verified {
            let _ = writeln!(
                out,
                "UNVERIFIED closing: {}: with the additions it serves {} of the best reachable {}.",
                audit.scenarios[i].display_name(),
                num(c.served_after),
                amount(c.best, u)
            );
        }
    }
    out
}

/// "Where one more unit helps": sites whose added unit relieves the most scenarios.
pub fn relief_report(m: &Model<'_>) -> String {
    let (net, top, rows) = (m.net, m.top, &m.relief);
    let mut out = String::new();
    if rows.is_empty() {
        return out;
    }
    let mut t = table(&[
        "site",
        "scenarios helped",
        &format!("most served per added unit ({})", net.unit),
    ]);
    for (v, count, price) in rows.iter().take(top) {
        t.add_row(vec![
            Cell::new(&net.sites[*v].id),
            Cell::new(count),
            Cell::new(num(*price)),
        ]);
    }
    right(&mut t, &[1, 2]);
    let t = render(&mut t, &[]);
    let _ = writeln!(
        out,
        "\nWhere one more unit of processing helps (expandable sites; shadow prices of \
         processing, over the outages with a shortfall):\n{t}"
    );
    out
}

/// The `plan` report: the purchase, the rounds, the drivers, and what remains.
pub fn plan_report(
    net: &Network,
    audit: &Audit,
    plan: &crate::expand::Plan,
    default_costs: bool,
    top: usize,
) -> String {
    use crate::expand::Goal;
    let u = &net.unit;
    let mut out = String::new();
    let goal = match plan.goal {
        Goal::CloseAll => "least cost with which every scenario reaches its best reachable \
                           served demand"
            .to_string(),
        Goal::WorstWithin(b) => format!(
            "within budget {}, the highest worst-case served fraction of required, then the \
             least total shortfall, then the least cost",
            num(b)
        ),
        Goal::TotalWithin(b) => {
            format!(
                "within budget {}, the least total shortfall over the scenarios, then the \
                 least cost",
                num(b)
            )
        }
    };
    let _ = writeln!(
        out,
        "{} — purchase plan over {} ({}): {goal}.",
        net.name,
        crate::report::count(audit.scenarios.len(), "scenario"),
        crate::report::count(audit.outages.len(), "distinct outage")
    );
    match (&plan.functions, default_costs) {
        (Some(_), true) => {
            let _ = writeln!(
                out,
                "No site has `expand`: every function at every site is a candidate at cost 1 \
                 per unit, so the plan minimises the total added function capacity; ties go to \
                 sites earlier in the file, and any purchase that serves nothing is dropped."
            );
        }
        (None, true) => {
            let _ = writeln!(
                out,
                "No site has expand_cost: every site is a candidate at cost 1 per unit, so the plan \
                 minimises the total added processing; among plans with that total it concentrates \
                 the addition (ties go to sites earlier in the file) and drops any site whose \
                 addition serves nothing."
            );
        }
        _ => {}
    }
    match &plan.functions {
        Some(bought) => function_purchase_table(&mut out, net, audit, plan, bought),
        None => site_purchase_table(&mut out, net, audit, plan),
    }
    if let Some(m) = &plan.modules {
        let search = format!(
            "{} whole-module plan{} checked (each site's count rounded down and up near the \
             continuous plan, then one module more or less at a time), each re-solved on every \
             scenario; the LP backend has no integer variables, so this is a search, not an \
             exact integer optimum",
            m.checked,
            if m.checked == 1 { "" } else { "s" }
        );
        if matches!(plan.goal, Goal::CloseAll) {
            let _ = writeln!(
                out,
                "Modules: the continuous plan costs {} (a lower bound for any plan); in whole \
                 modules ({} module{} removed by the local search) it costs {}, gap {} to that \
                 bound. {search}.",
                num(m.lp_cost),
                m.repaired,
                if m.repaired == 1 { "" } else { "s" },
                num(plan.cost),
                num(m.gap)
            );
        } else {
            let _ = writeln!(
                out,
                "Modules: the continuous plan spends {}; in whole modules (any sites bought by \
                 the unit re-optimised with the modules fixed) the plan spends {}. {search}.",
                num(m.lp_cost),
                num(plan.cost)
            );
        }
    }
    // The search in plain words: how many scenarios the purchase was worked out on, how
    // many passes it took to check it against all the others.
    let set_by = plan.rounds.last().map_or(0, |r| r.active);
    let added: usize = plan.rounds.iter().map(|r| r.violated).sum();
    let _ = writeln!(
        out,
        "How it was found: worked out on {set_by} scenario{} ({} of them pulled in after a check \
         found them still short), in {} pass{}; then every scenario was solved again with the \
         purchase applied.",
        if set_by == 1 { "" } else { "s" },
        added,
        plan.rounds.len(),
        if plan.rounds.len() == 1 { "" } else { "es" },
    );
    let mut order: Vec<usize> = (0..audit.scenarios.len()).collect();
    let after = |i: usize| plan.after[audit.outage_of[i]].shortfall;
    order.sort_by(|&a, &b| {
        after(b)
            .total_cmp(&after(a))
            .then(audit.eval(b).shortfall.total_cmp(&audit.eval(a).shortfall))
            .then(audit.scenarios[a].failed.cmp(&audit.scenarios[b].failed))
    });
    let mut s = table(&[
        "failed",
        &format!("shortfall before ({u})"),
        &format!("after ({u})"),
        &format!("not closable ({u})"),
    ]);
    let mut shown = 0;
    for &i in &order {
        if shown == top || (audit.eval(i).shortfall <= 0.0 && after(i) <= 0.0) {
            continue;
        }
        shown += 1;
        let k = audit.outage_of[i];
        s.add_row(vec![
            Cell::new(audit.scenarios[i].display_name()),
            Cell::new(num(audit.eval(i).shortfall)),
            Cell::new(num(plan.after[k].shortfall)),
            Cell::new(num(file_diff(
                audit.evaluations[k].surviving_required,
                plan.best[k],
            )
            .max(0.0))),
        ]);
    }
    right(&mut s, &[1, 2, 3]);
    if shown > 0 {
        let _ = writeln!(
            out,
            "\nScenarios with a shortfall, before and after the plan (top {shown}):\n{}",
            render(&mut s, &[])
        );
        let left: f64 = order.iter().map(|&i| after(i)).fold(0.0, f64::max);
        if left > 0.0 {
            let _ = writeln!(
                out,
                "Worst shortfall after the plan: {}; what remains is limited by links or \
                 connectivity, not by {}{}.",
                amount(left, u),
                if plan.functions.is_some() {
                    "function capacity where it can be bought"
                } else {
                    "processing"
                },
                if matches!(plan.goal, Goal::CloseAll) {
                    ""
                } else {
                    " or by the budget"
                }
            );
        } else {
            let _ = writeln!(
                out,
                "After the plan every scenario serves all its required demand."
            );
        }
    } else {
        let _ = writeln!(out, "\nNo scenario has a shortfall.");
    }
    let _ = writeln!(out, "{}", crate::report::caution_for(net));
    out
}

/// The plan's purchase of processing per site: the table, or that nothing is bought.
fn site_purchase_table(out: &mut String, net: &Network, audit: &Audit, plan: &crate::expand::Plan) {
    let u = &net.unit;
    let mut t = table(&["site", &format!("add ({u})"), "cost", "driven by"]);
    for (v, a) in plan.add.iter().enumerate() {
        if *a <= 0.0 {
            continue;
        }
        let cost = a * net.sites[v].expansion.as_ref().map_or(1.0, |e| e.cost);
        let drivers: Vec<String> = plan.drivers[v]
            .iter()
            .take(3)
            .map(|(k, _)| audit.first_scenario(OutageId(*k)).display_name())
            .collect();
        t.add_row(vec![
            Cell::new(&net.sites[v].id),
            Cell::new(num(*a)),
            Cell::new(num(cost)),
            Cell::new(if drivers.is_empty() {
                "—".into()
            } else {
                drivers.join("; ")
            }),
        ]);
    }
    right(&mut t, &[1, 2]);
    if plan.add.iter().all(|a| *a <= 0.0) {
        let _ = writeln!(
            out,
            "\nNo purchase: added processing would not serve more in any scenario."
        );
    } else {
        let _ = writeln!(
            out,
            "\nBuy (total cost {}):\n{}",
            num(plan.cost),
            render(&mut t, &[3])
        );
        let _ = writeln!(
            out,
            "Driven by: the scenarios that serve less without that site's addition (the \
             others kept), most first.{}",
            match plan.dropped {
                0 => String::new(),
                1 => " One addition the LP proposed served nothing and was dropped.".into(),
                d => format!(" {d} additions the LP proposed served nothing and were dropped."),
            }
        );
    }
}

/// The plan's purchase of function capacity (service chains): one row per site and
/// function, or that nothing is bought.
fn function_purchase_table(
    out: &mut String,
    net: &Network,
    audit: &Audit,
    plan: &crate::expand::Plan,
    bought: &[crate::expand::chain_buy::FunctionPurchase],
) {
    let Some(ch) = &net.chains else {
        return;
    };
    if bought.is_empty() {
        let _ = writeln!(
            out,
            "\nNo purchase: added function capacity would not serve more in any scenario."
        );
        return;
    }
    let mut t = table(&[
        "site",
        "function",
        &format!("add ({})", net.unit),
        "cost",
        "driven by",
    ]);
    for p in bought {
        let drivers: Vec<String> = p
            .drivers
            .iter()
            .take(3)
            .map(|(k, _)| audit.first_scenario(OutageId(*k)).display_name())
            .collect();
        t.add_row(vec![
            Cell::new(&net.sites[p.site].id),
            Cell::new(&ch.functions[p.function].id),
            Cell::new(num(p.units)),
            Cell::new(num(p.cost)),
            Cell::new(if drivers.is_empty() {
                "—".into()
            } else {
                drivers.join("; ")
            }),
        ]);
    }
    right(&mut t, &[2, 3]);
    let _ = writeln!(
        out,
        "\nBuy function capacity (total cost {}; units measured where traffic enters the \
         function):\n{}",
        num(plan.cost),
        render(&mut t, &[4])
    );
    let _ = writeln!(
        out,
        "Driven by: the scenarios that serve less without that purchase (the others kept), \
         most first.{}",
        match plan.dropped {
            0 => String::new(),
            1 => " One purchase the LP proposed served nothing and was dropped.".into(),
            d => format!(" {d} purchases the LP proposed served nothing and were dropped."),
        }
    );
}

/// The `plan` exporter: under `--routing`, the routing's header
/// ([`crate::report::routing::plan_header`]), then [`plan_report`].
impl Exporter<PlanReport<'_>> for Text {
    fn write(&self, p: &PlanReport<'_>, w: &mut dyn Write) -> io::Result<()> {
        if let Some(mode) = p.routing {
            w.write_all(crate::report::routing::plan_header(mode).as_bytes())?;
        }
        write_plan(w, p.net, p.audit, p.plan, p.default_costs, p.top)
    }
}

/// [`plan_report`] to `w`.
pub fn write_plan(
    w: &mut dyn Write,
    net: &Network,
    audit: &Audit,
    plan: &crate::expand::Plan,
    default_costs: bool,
    top: usize,
) -> io::Result<()> {
    w.write_all(screen::finish(&plan_report(net, audit, plan, default_costs, top)).as_bytes())
}
