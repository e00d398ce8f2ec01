//! The `--why` explanation of one scenario: per-demand amounts, saturated links, cut-off
//! demands, what processing can fix and what holds the rest back.

#[allow(unused_imports)]
use super::*;

/// The scenario `--why` (and `audit --fail` by default) explains, with its closing when
/// one was computed (`None` when nothing is short).
pub struct WhyPart<'a> {
    /// Index into `audit.scenarios`.
    pub scenario: crate::audit::ScenarioId,
    pub closing: Option<&'a crate::expand::Closing>,
}

/// Why one scenario is short: per-demand served and short amounts (one of possibly several
/// optimal splits), saturated link directions and processing sites, cut-off demands, what
/// added processing can and cannot fix, and the links whose growth would serve more (their
/// shadow prices).
pub fn why_report(net: &Network, audit: &Audit, why: &WhyPart<'_>) -> String {
    let i = why.scenario;
    // The explained scenario's demands are its traffic matrix's.
    let net = net.view(audit.scenarios[i].matrix);
    let u = &net.unit;
    let e = audit.eval(i);
    let name = audit.scenarios[i].display_name();
    let mut out = String::new();
    let _ = writeln!(
        out,
        "\nWhy {name}: serves {} of {} surviving required ({} short, {} of surviving \
         required); {} stranded.",
        num(e.served_required),
        amount(e.surviving_required, u),
        num(e.shortfall),
        percent(e.shortfall, e.surviving_required),
        amount(e.stranded, u)
    );
    if let Some(line) = delivered_line(net, e) {
        let _ = writeln!(out, "{line}");
    }
    let mut t = table(&[
        "demand",
        "from → to",
        "required",
        "served",
        "short",
        "status",
    ]);
    for (d, dem) in net.demands.iter().enumerate() {
        if dem.required <= 0.0 {
            continue;
        }
        let stranded = e.stranded_demands.contains(&d.into());
        let cut = e.cut_off.iter().find(|(c, _)| c.0 == d).map(|(_, r)| *r);
        let short = e.demand_shortfall.get(d).copied().unwrap_or(0.0);
        let status = if stranded {
            "stranded: an end site failed".to_string()
        } else if let Some(r) = cut {
            format!("cut off: {}", unservable_words(r))
        } else if short > 0.0 {
            "short".to_string()
        } else {
            "served".to_string()
        };
        t.add_row(vec![
            Cell::new(&dem.label),
            Cell::new(format!(
                "{} → {}",
                net.sites[dem.from].id, net.sites[dem.to].id
            )),
            Cell::new(num(dem.required)),
            Cell::new(num(if stranded {
                0.0
            } else {
                e.demand_flow.get(d).copied().unwrap_or(0.0)
            })),
            Cell::new(num(if stranded { dem.required } else { short })),
            Cell::new(status),
        ]);
    }
    right(&mut t, &[2, 3, 4]);
    let _ = writeln!(
        out,
        "Per demand (amounts in {u}; required part only; a stranded demand's required counts \
         as short here but not in the shortfall):\n{}",
        render(&mut t, &[5])
    );
    let _ = writeln!(
        out,
        "The total served is exact; this split among demands is one of several optimal ones \
         when the network could serve the same total another way."
    );
    let arcs: Vec<&crate::solve::Bottleneck> = e
        .bottlenecks
        .iter()
        .filter(|b| matches!(b.resource, Resource::Arc(_)))
        .collect();
    if arcs.is_empty() {
        let _ = writeln!(out, "Saturated link directions: none.");
    } else {
        let _ = writeln!(
            out,
            "Saturated link direction{} (full in this allocation): {}.",
            plural(arcs.len()),
            first_k(
                arcs.iter().map(|b| resource_name(net, b.resource)),
                arcs.len()
            )
        );
    }
    let sites: Vec<String> = e
        .bottlenecks
        .iter()
        .filter_map(|b| match b.resource {
            Resource::Site(v) => Some(net.sites[v].id.clone()),
            Resource::Arc(_) => None,
        })
        .collect();
    if net.chains.is_some() {
        out.push_str(&functions_section(net, e));
    } else {
        let _ = writeln!(
            out,
            "Saturated processing: {}.",
            if sites.is_empty() {
                "none".to_string()
            } else {
                sites.join(", ")
            }
        );
    }
    if e.cut_off.is_empty() {
        let _ = writeln!(out, "Cut-off demands: none.");
    } else {
        let _ = writeln!(
            out,
            "Cut-off demand{} (no walk through a surviving processing site): {}.",
            plural(e.cut_off.len()),
            first_k(
                e.cut_off.iter().map(|&(d, r)| format!(
                    "{} ({})",
                    net.demands[d].label,
                    unservable_words(r)
                )),
                e.cut_off.len()
            )
        );
    }
    if e.shortfall <= 0.0 {
        let _ = writeln!(out, "Nothing is short, so nothing needs fixing.");
        return out;
    }
    // One explanation: what processing fixes (bought only at expandable sites, the
    // closing's), then what holds the rest back, judged in the same state as the links
    // that must grow: every expandable site at its limit. Without a closing, the
    // scenario's own shadow prices are all there is.
    let grow: Vec<(usize, f64)> = match why.closing {
        Some(c) => {
            let fixed = (c.best - e.served_required).max(0.0);
            let held = held_back(net, e, c);
            if fixed > 0.0 {
                let _ = writeln!(
                    out,
                    "{} can fix {} of the {} short: add {} (cost {}).",
                    if c.functions.is_some() {
                        "Function capacity"
                    } else {
                        "Processing"
                    },
                    amount(fixed, u),
                    amount(e.shortfall, u),
                    closing_additions(net, c, usize::MAX),
                    num(c.cost)
                );
                if c.not_closable > 0.0 {
                    let _ = writeln!(
                        out,
                        "It cannot fix the other {}: {held}.",
                        amount(c.not_closable, u)
                    );
                }
            } else {
                let _ = writeln!(
                    out,
                    "Processing cannot fix any of the {} short: {held}.",
                    amount(e.shortfall, u)
                );
            }
            c.binding_arcs.clone()
        }
        None => {
            let _ = writeln!(out, "What processing can fix was not computed.");
            crate::expand::binding(e.arc_price.iter().copied().enumerate())
        }
    };
    let state = if why.closing.is_some() {
        "with processing added as far as allowed at the expandable sites"
    } else {
        "in this scenario as it is"
    };
    if grow.is_empty() {
        let _ = writeln!(
            out,
            "Links that would have to grow: none ({state}, no link direction's capacity limits \
             what is served)."
        );
    } else {
        let _ = writeln!(
            out,
            "Links that would have to grow ({state}; one more {} of capacity serves up to this \
             much more, its shadow price): {}.",
            unit_one(u),
            first_k(
                grow.iter().map(|&(a, p)| format!(
                    "{} +{}",
                    resource_name(net, Resource::Arc(a.into())),
                    num(p)
                )),
                grow.len()
            )
        );
    }
    out
}

/// What holds back the part of a shortfall that processing cannot fix, in the state of
/// the closing's best reachable value (every expandable site at its limit): link capacity
/// (the links are named once, in the sentence that follows), demands cut off from every
/// surviving processing site, or the expansion limits.
pub(super) fn held_back(net: &Network, e: &Evaluation, c: &crate::expand::Closing) -> String {
    let cut: f64 = e
        .cut_off
        .iter()
        .map(|&(d, _)| net.demands[d].required)
        .sum();
    if !c.binding_arcs.is_empty() {
        "link capacity holds it back even with every expandable site at its limit (the \
         links below)"
            .into()
    } else if cut > 0.0 && crate::report::displayed(cut) >= crate::report::displayed(c.not_closable)
    {
        "the cut-off demands above have no walk through a surviving processing site".into()
    } else if cut > 0.0 {
        format!(
            "{} of it is cut-off demand (no walk through a surviving processing site); the \
             expansion limits (expand_max, candidate sites) hold back the rest",
            num(cut)
        )
    } else {
        "the expansion limits (expand_max, candidate sites) hold it back".into()
    }
}
