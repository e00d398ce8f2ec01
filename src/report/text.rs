//! Terminal output: the `check` summary and the audit tables (comfy-table).

use std::fmt::Write as _;

use comfy_table::Cell;

use std::io::{self, Write};

use super::{CAUTION, amount, file_diff, given, num, percent, shift_point, small, unit_one};
use crate::audit::Audit;
use crate::gate::{GateKind, GateResult};
use crate::model::Network;
use crate::model::strict::printable;
use crate::rank::{self, Criticality};
use crate::solve::{Evaluation, Resource, Unservable};

use super::screen::{self, render, right, table};

/// `""` for one, `"s"` otherwise.
fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

/// The `check` summary: sizes, totals, processing sites and risk groups, and the demands
/// that no walk through a processing site can serve even with nothing failed
/// (`baseline_cut_off`, from [`crate::solve::baseline_cut_off`]).
pub fn check_summary(net: &Network, baseline_cut_off: &[(usize, Unservable)]) -> String {
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
        "  volume {}  required {}  processing {}",
        amount(net.total_volume(), u),
        amount(net.total_required(), u),
        amount(net.total_processing(), u)
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
                    "{} (cost {}/unit, {}{})",
                    s.id,
                    num(e.cost),
                    if e.max.is_finite() {
                        format!("up to {}", num(e.max))
                    } else {
                        "no limit".into()
                    },
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
    if !baseline_cut_off.is_empty() {
        let _ = writeln!(out, "  {}", baseline_misses(net, baseline_cut_off));
    }
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

/// Why a demand cannot be served, in words.
fn unservable_words(r: Unservable) -> &'static str {
    match r {
        Unservable::NoPath => "no path",
        Unservable::NoProcessing => "no processing site on any walk",
    }
}

/// "already short with nothing failed: N demands (X units required): d (why), ...".
fn baseline_misses(net: &Network, cut_off: &[(usize, Unservable)]) -> String {
    let total: f64 = cut_off.iter().map(|&(d, _)| net.demands[d].required).sum();
    let list = first_k(
        cut_off
            .iter()
            .map(|&(d, r)| format!("{} ({})", net.demands[d].label, unservable_words(r))),
        5,
    );
    format!(
        "already short with nothing failed: {} demand{} ({} {} required) cannot be served: {list}",
        cut_off.len(),
        if cut_off.len() == 1 { "" } else { "s" },
        num(total),
        net.unit
    )
}

/// Names the cause of a scenario's shortfall in words: demands with no path, demands
/// with no processing reachable, or the saturated resource with the highest shadow price
/// (a link direction or a site's processing). Cut-off demands are named when they make up
/// at least half of the shortfall.
pub fn main_bottleneck(net: &Network, e: &Evaluation) -> String {
    if e.shortfall <= 0.0 {
        return "—".into();
    }
    let count = |reason| e.cut_off.iter().filter(|(_, r)| *r == reason).count();
    let no_path = e.cut_off_required(net, Unservable::NoPath);
    let no_proc = e.cut_off_required(net, Unservable::NoProcessing);
    let demands = |n: usize| format!("{n} demand{}", if n == 1 { "" } else { "s" });
    let saturated = e.bottlenecks.iter().find(|b| b.price > 0.0);
    if no_path + no_proc >= e.shortfall / 2.0 && no_path + no_proc > 0.0 {
        return if no_proc > no_path {
            format!(
                "no processing reachable: {}",
                demands(count(Unservable::NoProcessing))
            )
        } else {
            format!("no path: {} cut off", demands(count(Unservable::NoPath)))
        };
    }
    match saturated {
        Some(b) => match b.resource {
            Resource::Arc(_) => format!("saturated {}", resource_name(net, b.resource)),
            Resource::Site(v) => format!("saturated processing at {}", net.sites[v].id),
        },
        None => "—".into(),
    }
}

/// The `k` expandable sites (where processing can be bought) with the highest shadow price
/// of processing in a scenario with a shortfall, as `site (+price)`: one more unit there
/// serves up to `price` more.
pub fn marginal_sites(
    net: &Network,
    cands: &crate::expand::Candidates,
    e: &Evaluation,
    k: usize,
) -> String {
    if e.shortfall <= 0.0 {
        return "—".into();
    }
    let mut v: Vec<(usize, f64)> = e
        .site_price
        .iter()
        .enumerate()
        .filter(|&(s, _)| cands.expandable(s))
        .filter_map(|(s, p)| p.filter(|p| *p > 1e-6).map(|p| (s, p)))
        .collect();
    v.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    if v.is_empty() {
        return "none".into();
    }
    v.iter()
        .take(k)
        .map(|(s, p)| format!("{} (+{})", net.sites[*s].id, num(*p)))
        .collect::<Vec<_>>()
        .join(", ")
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

/// Scenario names up to this many characters stay on one line in the scenario table.
const NAME_ON_ONE_LINE: usize = 32;

/// What the columns of the scenario table mean, in words.
fn column_legend(base_short: bool) -> String {
    format!(
        "Columns: shortfall = required demand of the surviving demands that is not routed and \
         processed (stranded demand is not in it); % of surviving required = that shortfall over \
         the required demand whose end sites survive; {}stranded = required demand of demands \
         whose own end site failed (no network can serve it); throughput loss = offered volume \
         (required and beyond) that the baseline carries and the scenario does not.",
        if base_short {
            "beyond baseline = the shortfall the failure adds to the baseline's own; "
        } else {
            ""
        }
    )
}

/// The one-line verdict that opens the audit text: how many scenarios are short and the
/// worst with its shortfall and stranded demand, after `PASS`/`FAIL` and how many gates
/// failed when there are gates.
pub fn verdict(net: &Network, audit: &Audit, gates: &[GateResult]) -> String {
    let u = &net.unit;
    let n = audit.scenarios.len();
    let short = (0..n).filter(|&i| audit.eval(i).shortfall > 0.0).count();
    let worst = rank::worst_first(audit).first().copied();
    let scenarios = match worst {
        Some(i) if short > 0 => {
            let e = audit.eval(i);
            format!(
                "{short} of {n} scenario{} short; worst {} (shortfall {}, stranded {})",
                plural(n),
                audit.scenarios[i].display_name(),
                amount(e.shortfall, u),
                amount(e.stranded, u)
            )
        }
        _ => format!("none of {n} scenario{} short", plural(n)),
    };
    if gates.is_empty() {
        return format!("Verdict: {scenarios}.");
    }
    let failed = gates.iter().filter(|g| !g.passed).count();
    if failed == 0 {
        format!(
            "Verdict: PASS ({} gate{} met); {scenarios}.",
            gates.len(),
            plural(gates.len())
        )
    } else {
        format!(
            "Verdict: FAIL ({failed} of {} gate{} failed); {scenarios}.",
            gates.len(),
            plural(gates.len())
        )
    }
}

/// The audit report: header, worst scenarios, element criticality (the caller ends the
/// report with [`caution`]).
pub fn audit_report(net: &Network, audit: &Audit, baseline: &Evaluation, top: usize) -> String {
    let u = &net.unit;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "{} — {} scenario{} ({} distinct outage{}), {} site{}, {} link{}, {} demand{}",
        net.name,
        audit.scenarios.len(),
        plural(audit.scenarios.len()),
        audit.outages.len(),
        plural(audit.outages.len()),
        net.sites.len(),
        plural(net.sites.len()),
        net.links.len(),
        plural(net.links.len()),
        net.demands.len(),
        plural(net.demands.len())
    );
    let _ = writeln!(
        out,
        "Baseline: serves {} of {} required ({}), throughput {} of {} offered; \
         certified gap {}.",
        num(baseline.served_required),
        amount(baseline.surviving_required, u),
        percent(baseline.served_required, baseline.surviving_required),
        num(baseline.throughput),
        amount(net.total_volume(), u),
        small(baseline.certified_gap())
    );
    let down: Vec<String> = audit
        .scenarios
        .first()
        .map(|s| s.down.iter().map(|e| e.name(net)).collect())
        .unwrap_or_default();
    if !down.is_empty() {
        let _ = writeln!(
            out,
            "Maintenance window: {} kept down in every scenario; the baseline is that state and \
             each scenario names only the further failures.",
            down.join(", ")
        );
    }
    let base_short = baseline.shortfall > 0.0;
    if base_short {
        let _ = writeln!(
            out,
            "The baseline is already {} short; every scenario's shortfall includes what the \
             baseline misses, and the column \"beyond baseline\" shows what the failure adds.",
            amount(baseline.shortfall, u)
        );
        if !baseline.cut_off.is_empty() {
            let _ = writeln!(
                out,
                "Baseline: {}.",
                baseline_misses(net, &baseline.cut_off)
            );
        }
    }
    let folding = crate::fold::Folding::of(audit);
    let cands = crate::expand::Candidates::of(net);
    let all = rank::worst_first(audit).len();
    let order: Vec<usize> = rank::worst_first(audit)
        .into_iter()
        .filter(|&i| folding.into[i].is_none())
        .collect();
    let shown = top.min(order.len());
    let mut header: Vec<&str> = vec!["#", "failed", "shortfall"];
    if base_short {
        header.push("beyond baseline");
    }
    header.extend([
        "% of surviving required",
        "stranded",
        "throughput loss",
        "main bottleneck (one more unit helps at)",
    ]);
    let mut t = table(&header);
    let mut widest_name = 0;
    for (rank_no, &i) in order.iter().take(shown).enumerate() {
        let e = audit.eval(i);
        let mut row = vec![
            Cell::new(rank_no + 1),
            Cell::new({
                let name = match folding.equivalents[i] {
                    0 => audit.scenarios[i].display_name(),
                    n => format!("{} (+{n} equivalent)", audit.scenarios[i].display_name()),
                };
                widest_name = widest_name.max(name.chars().count());
                name
            }),
            Cell::new(num(e.shortfall)),
        ];
        if base_short {
            row.push(Cell::new(num(
                file_diff(e.shortfall, baseline.shortfall).max(0.0)
            )));
        }
        row.extend([
            Cell::new(percent(e.shortfall, e.surviving_required)),
            Cell::new(num(e.stranded)),
            Cell::new(num(file_diff(baseline.throughput, e.throughput).max(0.0))),
            Cell::new(match marginal_sites(net, &cands, e, 2) {
                m if m == "none" || m == "—" => main_bottleneck(net, e),
                m => format!("{} (one more unit helps at {m})", main_bottleneck(net, e)),
            }),
        ]);
        t.add_row(row);
    }
    let (numeric, free): (Vec<usize>, Vec<usize>) = if base_short {
        (vec![0, 2, 3, 4, 5, 6], vec![7])
    } else {
        (vec![0, 2, 3, 4, 5], vec![6])
    };
    // A long scenario name (depth 2 and more) wraps at its spaces, between whole element
    // names; a short one stays on one line.
    let free: Vec<usize> = if widest_name > NAME_ON_ONE_LINE {
        std::iter::once(1).chain(free).collect()
    } else {
        free
    };
    right(&mut t, &numeric);
    let short = (0..audit.scenarios.len())
        .filter(|&i| audit.eval(i).shortfall > 0.0)
        .count();
    let folded = folding.folded();
    let _ = writeln!(
        out,
        "\nWorst {shown} of {all} scenario{} ({short} with a shortfall against required demand; \
         amounts in {u}{}):",
        plural(all),
        match folded {
            0 => String::new(),
            1 => "; 1 scenario is the same outage as a smaller one and is folded into it".into(),
            f => format!(
                "; {f} scenarios are the same outage as a smaller one and are folded into it"
            ),
        }
    );
    let _ = writeln!(out, "{}", render(&mut t, &free));
    let _ = writeln!(out, "{}", column_legend(base_short));
    if short > 0 {
        let _ = writeln!(
            out,
            "\"one more unit helps at X (+Y)\": one more unit of processing bought at X (an \
             expandable site) serves up to Y more in that scenario (its shadow price); when it \
             is not shown, one more unit at an expandable site would not serve more (links, \
             cut-off paths or processing at sites that cannot be expanded limit it)."
        );
    }

    let crit: Vec<Criticality> = rank::criticality(audit);
    if !crit.is_empty() {
        let mut c = table(&[
            "element",
            "worst shortfall",
            "worst stranded",
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
            "\nElement criticality (worst scenario containing each element; top {} of {}; \
             amounts in {u}):",
            top.min(crit.len()),
            crit.len()
        );
        let _ = writeln!(out, "{}", render(&mut c, &[4]));
    }
    let _ = writeln!(out, "\n{}", verification_summary(audit));
    for (k, e) in audit.evaluations.iter().enumerate() {
        let name = || audit.first_scenario(k).display_name();
        if let Some(eps) = approximate(&e.verification)
            .filter(|_| !e.verification.proven)
            .filter(|eps| within(&e.verification, eps, e.surviving_required))
        {
            let _ = writeln!(
                out,
                "APPROXIMATE: {}: served_required between {} and {} (approximate within {eps} \
                 of required; reported at the lower bound, so its shortfall is not \
                 understated).",
                name(),
                num(e.verification.lower),
                amount(e.verification.upper, u)
            );
        } else if !e.verification.proven {
            let _ = writeln!(
                out,
                "UNPROVEN: {}: served_required between {} and {} (reported at the lower \
                 bound, so its shortfall is not understated).",
                name(),
                num(e.verification.lower),
                amount(e.verification.upper, u)
            );
        }
        if let Some(t) = e.throughput_verification.as_ref().filter(|t| !t.proven) {
            let _ = writeln!(
                out,
                "{}: {}: throughput between {} and {} {u} (reported at the lower bound, \
                 so its loss is not understated).",
                if approximate(t).is_some_and(|eps| within(t, eps, volume_scale(e, t))) {
                    "APPROXIMATE"
                } else {
                    "UNPROVEN"
                },
                name(),
                num(t.lower),
                num(t.upper)
            );
        }
    }
    out
}

/// The risk section: expected shortfall (with its bound), the probability of any
/// shortfall, the most likely short scenarios and the probability left unexamined, under
/// [`crate::risk::ASSUMPTION`].
pub fn risk_report(net: &Network, audit: &Audit, r: &crate::risk::Risk) -> String {
    let u = &net.unit;
    let mut out = String::new();
    let _ = writeln!(out, "\nRisk (assumption: {}):", crate::risk::ASSUMPTION);
    let _ = writeln!(
        out,
        "  expected shortfall {} {u} over the scenarios examined (at most {} {u} counting the \
         unexamined states as short by all required demand)",
        super::sig(r.expected_shortfall),
        super::sig(r.expected_shortfall_bound)
    );
    let _ = writeln!(
        out,
        "  probability of any shortfall {} (examined scenarios)",
        super::probability(r.p_any_shortfall)
    );
    let _ = writeln!(
        out,
        "  probability the chosen depth left unexamined {}",
        super::probability(r.uncovered_probability)
    );
    if !r.without_probability.is_empty() {
        let n = r.without_probability.len();
        let _ = writeln!(
            out,
            "  {n} element{} without failure_probability, treated as never failing: {}",
            if n == 1 { "" } else { "s" },
            first_k(r.without_probability.iter().map(|e| e.name(net)), 5)
        );
    }
    if r.most_likely_short.is_empty() {
        let _ = writeln!(
            out,
            "  no examined scenario with a shortfall has a positive probability"
        );
        return out;
    }
    let mut t = table(&[
        "most likely short",
        "probability",
        &format!("shortfall ({u})"),
        &format!("share of expected ({u})"),
    ]);

    for &i in &r.most_likely_short {
        let e = audit.eval(i);
        t.add_row(vec![
            Cell::new(audit.scenarios[i].display_name()),
            Cell::new(super::probability(r.probability[i])),
            Cell::new(num(e.shortfall)),
            Cell::new(super::sig(r.probability[i] * e.shortfall)),
        ]);
    }
    right(&mut t, &[1, 2, 3]);
    let _ = writeln!(out, "{}", render(&mut t, &[]));
    out
}

/// One line on how the results were verified: how many outages were proven optimal (both
/// LPs), and when some are not, how many per quantity (served_required; throughput, which
/// is served_required itself when no demand offers more than its required part), the worst
/// relative residual of an allocation and the worst certified gap.
pub fn verification_summary(audit: &Audit) -> String {
    let n = audit.evaluations.len();
    let proven = audit.evaluations.iter().filter(|e| e.proven()).count();
    let served_proven = audit
        .evaluations
        .iter()
        .filter(|e| e.verification.proven)
        .count();
    let throughput_proven = audit
        .evaluations
        .iter()
        .filter(|e| {
            e.throughput_verification
                .as_ref()
                .map_or(e.verification.proven, |t| t.proven)
        })
        .count();
    let per_quantity = if proven < n {
        format!("served_required {served_proven}, throughput {throughput_proven}; ")
    } else {
        String::new()
    };
    let residual = audit
        .evaluations
        .iter()
        .map(|e| e.max_violation)
        .fold(0.0, f64::max);
    let gap = audit
        .evaluations
        .iter()
        .map(Evaluation::certified_gap)
        .fold(0.0, f64::max);
    let fallbacks = audit
        .evaluations
        .iter()
        .filter(|e| e.verification.attempts > 1)
        .count();
    format!(
        "Verified: {proven} of {n} outage{} proven optimal by independent bounds \
         ({per_quantity}worst relative residual {}, worst certified gap {}){}{}.",
        if n == 1 { "" } else { "s" },
        small(residual),
        small(gap),
        if fallbacks > 0 {
            format!("; {fallbacks} needed a second backend")
        } else {
            String::new()
        },
        if proven < n {
            let ok = |v: &crate::solve::Verification, scale: f64| {
                v.proven || approximate(v).is_some_and(|eps| within(v, eps, scale))
            };
            let close = |e: &Evaluation| {
                !e.proven()
                    && ok(&e.verification, e.surviving_required)
                    && e.throughput_verification
                        .as_ref()
                        .is_none_or(|t| ok(t, volume_scale(e, t)))
            };
            let approx = audit.evaluations.iter().filter(|e| close(e)).count();
            let eps = audit
                .evaluations
                .iter()
                .find_map(|e| approximate(&e.verification))
                .unwrap_or_default();
            match (approx, n - proven - approx) {
                (0, open) => format!("; {open} UNPROVEN, listed below"),
                (a, 0) => format!(
                    "; {a} approximate within {eps} of required (--engine approx), listed below"
                ),
                (a, open) => format!(
                    "; {a} approximate within {eps} of required (--engine approx) and {open} \
                     UNPROVEN, listed below"
                ),
            }
        } else {
            String::new()
        }
    )
}

/// The ε of a result of the approximate engine (its backend reads `approx (epsilon E)`),
/// as written there; `None` for the exact engines.
fn approximate(v: &crate::solve::Verification) -> Option<&str> {
    v.backend
        .strip_prefix("approx (epsilon ")
        .and_then(|r| r.strip_suffix(')'))
}

/// Whether the interval of `v` is at most `eps` (as written) × `required` wide: what
/// "approximate within E" claims.
fn within(v: &crate::solve::Verification, eps: &str, required: f64) -> bool {
    eps.parse::<f64>()
        .is_ok_and(|e| v.upper - v.lower <= e * required * (1.0 + 1e-9))
}

/// What the throughput interval `t` of `e` is judged against: the surviving required
/// demand, or the interval's upper end when larger (never above the surviving volume, so
/// the claim is never looser than ε × volume).
fn volume_scale(e: &Evaluation, t: &crate::solve::Verification) -> f64 {
    e.surviving_required.max(t.upper)
}

/// The caution line every report ends with.
pub fn caution() -> String {
    format!("{CAUTION}\n")
}

/// The first `k` items joined with commas, `(+N more)` for the rest, `—` when empty.
fn first_k(items: impl ExactSizeIterator<Item = String>, k: usize) -> String {
    let total = items.len();
    let mut parts: Vec<String> = items.take(k).collect();
    if total > k {
        parts.push(format!("(+{} more)", total - k));
    }
    if parts.is_empty() {
        "—".into()
    } else {
        parts.join(", ")
    }
}

/// `site +units` for the largest additions of an expansion, at most `k` of them.
pub fn additions(net: &Network, add: &[f64], k: usize) -> String {
    let mut v: Vec<(usize, f64)> = add
        .iter()
        .enumerate()
        .filter(|(_, a)| **a > 0.0)
        .map(|(i, a)| (i, *a))
        .collect();
    v.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    first_k(
        v.iter()
            .map(|(i, a)| format!("{} +{}", net.sites[*i].id, num(*a))),
        k,
    )
}

fn link_list(net: &Network, links: &[usize], k: usize) -> String {
    first_k(links.iter().map(|&l| net.links[l].id.clone()), k)
}

/// The `--close` section: per scenario with a shortfall, the cheapest expansion.
pub fn closing_report(
    net: &Network,
    audit: &Audit,
    closings: &[Option<crate::expand::Closing>],
    default_costs: bool,
    top: usize,
) -> String {
    let u = &net.unit;
    let mut out = String::new();
    let order: Vec<usize> = rank::worst_first(audit)
        .into_iter()
        .filter(|&i| closings[audit.outage_of[i]].is_some())
        .collect();
    let _ = writeln!(
        out,
        "\nClosing the gaps: cheapest added processing per scenario ({} with a shortfall){}",
        order.len(),
        if default_costs {
            ". No site has expand_cost: every site is a candidate at cost 1 per unit."
        } else {
            "."
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
            Cell::new(additions(net, &c.add, 3)),
            Cell::new(num(c.not_closable)),
            Cell::new(if c.not_closable <= 0.0 {
                "—".into()
            } else if c.binding_links.is_empty() {
                match audit.eval(i).cut_off.len() {
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
pub fn relief_report(net: &Network, audit: &Audit, top: usize) -> String {
    let rows = crate::expand::relief(audit, &crate::expand::Candidates::of(net));
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
        super::count(audit.scenarios.len(), "scenario"),
        super::count(audit.outages.len(), "distinct outage")
    );
    if default_costs {
        let _ = writeln!(
            out,
            "No site has expand_cost: every site is a candidate at cost 1 per unit, so the plan \
             minimises the total added processing; among plans with that total it concentrates \
             the addition (ties go to sites earlier in the file) and drops any site whose \
             addition serves nothing."
        );
    }
    let mut t = table(&["site", &format!("add ({u})"), "cost", "driven by"]);
    for (v, a) in plan.add.iter().enumerate() {
        if *a <= 0.0 {
            continue;
        }
        let cost = a * net.sites[v].expansion.as_ref().map_or(1.0, |e| e.cost);
        let drivers: Vec<String> = plan.drivers[v]
            .iter()
            .take(3)
            .map(|(k, _)| audit.first_scenario(*k).display_name())
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
                 connectivity, not by processing{}.",
                amount(left, u),
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
    let _ = writeln!(out, "{CAUTION}");
    out
}

/// The `check` exporter: [`check_summary`] to `w`.
pub fn write_check(
    w: &mut dyn Write,
    net: &Network,
    baseline_cut_off: &[(usize, Unservable)],
) -> io::Result<()> {
    w.write_all(screen::finish(&check_summary(net, baseline_cut_off)).as_bytes())
}

/// The `--close` part of an audit: the closings per outage and whether costs defaulted.
pub struct ClosingPart<'a> {
    pub closings: &'a [Option<crate::expand::Closing>],
    pub default_costs: bool,
}

/// The `audit` exporter: the verdict, header and worst scenarios, the explanation of one
/// scenario (`why`: `--why`, or `--fail`), where one more unit helps, the
/// closings (with `--close`), the risk figures (when probabilities are given), one line
/// per gate, and the caution, in that order.
#[allow(clippy::too_many_arguments)] // each part is optional and independent
pub fn write_audit(
    w: &mut dyn Write,
    net: &Network,
    audit: &Audit,
    baseline: &Evaluation,
    closing: Option<ClosingPart<'_>>,
    risk: Option<&crate::risk::Risk>,
    gates: &[GateResult],
    top: usize,
    why: Option<WhyPart<'_>>,
) -> io::Result<()> {
    let mut s = format!("{}\n", verdict(net, audit, gates));
    s.push_str(&audit_sections(
        net, audit, baseline, closing, risk, gates, top, why,
    ));
    w.write_all(screen::finish(&s).as_bytes())
}

/// Everything [`write_audit`] writes after the verdict line (for reports that put their
/// own section between the verdict and the audit).
#[allow(clippy::too_many_arguments)] // each part is optional and independent
pub fn audit_sections(
    net: &Network,
    audit: &Audit,
    baseline: &Evaluation,
    closing: Option<ClosingPart<'_>>,
    risk: Option<&crate::risk::Risk>,
    gates: &[GateResult],
    top: usize,
    why: Option<WhyPart<'_>>,
) -> String {
    let mut s = audit_report(net, audit, baseline, top);
    if let Some(y) = &why {
        s.push_str(&why_report(net, audit, y));
    }
    s.push_str(&relief_report(net, audit, top));
    if let Some(c) = closing {
        s.push_str(&closing_report(
            net,
            audit,
            c.closings,
            c.default_costs,
            top,
        ));
    }
    if let Some(r) = risk {
        s.push_str(&risk_report(net, audit, r));
    }
    if !gates.is_empty() {
        s.push('\n');
        for g in gates {
            let _ = writeln!(s, "{}", gate_line(net, audit, g));
        }
    }
    s.push_str(&caution());
    s
}

/// The `plan` exporter: [`plan_report`] to `w`.
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

/// One gate's verdict: `PASS` or `FAIL`, the flag and limit, the worst value and the
/// scenario it comes from, e.g. `FAIL --max-shortfall 5: worst shortfall 14 Gbit/s
/// (site:millbrook) exceeds the limit 5 Gbit/s`.
pub fn gate_line(net: &Network, audit: &Audit, g: &GateResult) -> String {
    let u = &net.unit;
    let verdict = if g.passed { "PASS" } else { "FAIL" };
    let scenario = g.scenario.map_or_else(
        || "no scenario".to_string(),
        |i| audit.scenarios[i].display_name(),
    );
    let amount = |flag, what| {
        (
            flag,
            what,
            super::amount(g.value, u),
            format!(
                "{} {}",
                given(g.limit),
                if given(g.limit) == "1" {
                    super::unit_one(u)
                } else {
                    u
                }
            ),
            if g.passed { "within" } else { "exceeds" },
        )
    };
    let (flag, what, value, limit, verb) = match g.kind {
        GateKind::MaxShortfall => amount("--max-shortfall", "shortfall"),
        GateKind::MaxStranded => amount("--max-stranded", "stranded"),
        GateKind::MinServedFraction => (
            "--min-served-fraction",
            "served fraction",
            format!("{}%", num(100.0 * g.value)),
            format!("{}%", shift_point(g.limit, 2)),
            if g.passed { "meets" } else { "is below" },
        ),
    };
    // Compared raw (--gate-tolerance), a failing value may print like its limit: show it
    // in full then.
    let value = if !g.passed && value == limit {
        match g.kind {
            GateKind::MinServedFraction => format!("{}%", 100.0 * g.value),
            _ => format!("{} {u}", g.value),
        }
    } else {
        value
    };
    format!("{verdict} {flag}: worst {what} {value} ({scenario}) {verb} the limit {limit}")
}

/// A note on stderr: `--threads` was above the core count and is capped.
pub fn note_threads_capped(w: &mut dyn Write, asked: usize, cores: usize) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: --threads {asked} is above the {cores} cores of this machine; using \
         {cores} (results do not depend on it)"
    )
}

/// A note on stderr: the estimated time of the run before it starts (`scenarios` counted,
/// not yet enumerated; `first_solve` is one sample failure).
pub fn note_estimate(
    w: &mut dyn Write,
    scenarios: usize,
    first_solve: std::time::Duration,
    threads: usize,
    minutes: f64,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: {} to solve; one took {}, so about {} on {}",
        super::count(scenarios, "scenario"),
        super::duration(first_solve.as_secs_f64()),
        super::duration(60.0 * minutes),
        super::count(threads, "thread")
    )
}

/// The refusal of a run estimated beyond its time limit (both in minutes), in durations
/// a person reads at a glance ([`super::duration`]: seconds under two minutes).
pub fn estimate_refused(minutes: f64, scenarios: usize, one_took: f64, limit: f64) -> String {
    format!(
        "the run is estimated at {} ({}, one took {}), above the limit of {} \
         (--max-minutes {limit}); pass --yes to run it anyway, raise --max-minutes, or lower \
         --depth / narrow --kinds",
        super::duration(60.0 * minutes),
        super::count(scenarios, "scenario"),
        super::duration(one_took),
        super::duration(60.0 * limit),
    )
}

/// `audit --shard` writes a part file and nothing else: `--csv`, `--report` and `--why`
/// (flags given as `csv`, `report`, `why`) are refused with a pointer to `merge`, which
/// writes them for the whole run.
pub fn refuse_with_shard(csv: bool, report: bool, why: bool) -> crate::error::Result<()> {
    let given: Vec<&str> = [(csv, "--csv"), (report, "--report"), (why, "--why")]
        .into_iter()
        .filter_map(|(on, flag)| on.then_some(flag))
        .collect();
    if given.is_empty() {
        return Ok(());
    }
    Err(crate::error::Error::Usage(format!(
        "--shard writes only a part file, so {} would describe one shard; give {} to \
         `redoubt merge PART… --json FILE`, which writes {} for the whole run",
        given.join(", "),
        if given.len() == 1 { "it" } else { "them" },
        if given.len() == 1 { "it" } else { "them" }
    )))
}

/// What `audit --shard I/N` prints: the shard, its outages and where its part is.
pub fn write_shard(
    w: &mut dyn Write,
    shard: usize,
    shards: usize,
    outages: usize,
    part: &std::path::Path,
) -> io::Result<()> {
    writeln!(
        w,
        "shard {shard}/{shards}: {} solved; part written to {} (combine the \
         parts with `redoubt merge PART… --json FILE`)",
        super::count(outages, "outage"),
        printable(&part.display().to_string())
    )
}

/// A note on stderr: what `--resume` found in the journal.
pub fn note_resume(
    w: &mut dyn Write,
    journal: &std::path::Path,
    opened: super::journal::Opened,
    outages: usize,
) -> io::Result<()> {
    match opened {
        super::journal::Opened::Fresh => Ok(()),
        super::journal::Opened::NothingToResume => writeln!(
            w,
            "redoubt: note: no journal at {}; starting from the beginning",
            journal.display()
        ),
        super::journal::Opened::Resumed(n) => writeln!(
            w,
            "redoubt: resuming: {n} of {} restored from {}",
            super::count(outages, "outage"),
            journal.display()
        ),
    }
}

/// A note on stderr: a line of the journal was ignored on `--resume` (damaged, or its
/// evaluation does not verify against the network); what it held is solved again.
pub fn note_journal_line(
    w: &mut dyn Write,
    journal: &std::path::Path,
    line: usize,
    why: &str,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: {} line {line} ignored: {why}; what it held is solved again",
        journal.display()
    )
}

/// A note on stderr: the journal could not be written (the run went on without it).
pub fn note_journal_failed(w: &mut dyn Write, why: &str) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: journaling stopped ({why}); an interrupted run would resume from \
         what was saved before"
    )
}

/// `baseline` for an empty failed list, else the names joined with ` + `.
fn scenario_words(failed: &[String]) -> String {
    if failed.is_empty() {
        "baseline".into()
    } else {
        failed.join(" + ")
    }
}

/// A signed change as printed: `+2`, `-1.5`, `0`.
fn signed(x: f64) -> String {
    if x > 0.0 {
        format!("+{}", num(x))
    } else {
        num(x)
    }
}

/// The `compare` exporter: the verdict first, the baselines, the scenarios that got worse
/// and better, the added and removed risks, the elements added and removed, the caution.
/// `before`/`after` are the two baselines (with `--down`, the down states).
pub fn write_compare(
    w: &mut dyn Write,
    c: &crate::compare::Comparison,
    before: &Evaluation,
    after: &Evaluation,
    top: usize,
) -> io::Result<()> {
    let mut buf = Vec::new();
    compare_lines(&mut buf, c, before, after, top)?;
    w.write_all(super::screen::finish(&String::from_utf8_lossy(&buf)).as_bytes())
}

/// The lines of [`write_compare`] before they are wrapped to the screen width.
fn compare_lines(
    w: &mut dyn Write,
    c: &crate::compare::Comparison,
    before: &Evaluation,
    after: &Evaluation,
    top: usize,
) -> io::Result<()> {
    let u = &c.unit;
    let plural = |n: usize| if n == 1 { "" } else { "s" };
    let verdict = if c.passed() { "PASS" } else { "FAIL" };
    writeln!(
        w,
        "{verdict} compare: {} of {} matched scenario{} got worse by more than {} \
         (shortfall or stranded, as printed); {} newly short{}; {} better; {} added risk{}, \
         {} removed.",
        c.worse.len(),
        c.matched,
        plural(c.matched),
        amount(c.tolerance, u),
        c.new_short.len(),
        if c.allow_new_short && !c.new_short.is_empty() {
            " (allowed)"
        } else {
            ""
        },
        c.better.len(),
        c.added_risks.len(),
        plural(c.added_risks.len()),
        c.removed_risks.len()
    )?;
    writeln!(
        w,
        "Before: {}; after: {}.{}",
        c.before_name,
        c.after_name,
        if c.down.is_empty() {
            String::new()
        } else {
            format!(" Kept down on both sides: {}.", c.down.join(", "))
        }
    )?;
    writeln!(
        w,
        "Baseline shortfall {} → {}, stranded {} → {}, throughput {} → {}.",
        num(before.shortfall),
        amount(after.shortfall, u),
        num(before.stranded),
        amount(after.stranded, u),
        num(before.throughput),
        amount(after.throughput, u)
    )?;
    let changes = |title: &str, list: &[crate::compare::Change]| -> String {
        let mut t = table(&[
            "failed",
            "shortfall before",
            "after",
            "change",
            "stranded before",
            "after",
        ]);
        for ch in list.iter().take(top) {
            t.add_row(vec![
                Cell::new(scenario_words(&ch.failed)),
                Cell::new(num(ch.before.shortfall)),
                Cell::new(num(ch.after.shortfall)),
                Cell::new(signed(ch.delta_shortfall)),
                Cell::new(num(ch.before.stranded)),
                Cell::new(num(ch.after.stranded)),
            ]);
        }
        right(&mut t, &[1, 2, 3, 4, 5]);
        format!(
            "\n{title} ({} scenario{}, top {}; amounts in {u}):\n{}\n",
            list.len(),
            plural(list.len()),
            top.min(list.len()),
            render(&mut t, &[])
        )
    };
    if !c.new_short.is_empty() {
        let title = format!(
            "Newly short: short after the change and not before, a new point of failure \
             that {}",
            if c.allow_new_short {
                "--allow-new-short lets pass"
            } else {
                "fails the compare unless --allow-new-short"
            }
        );
        w.write_all(changes(&title, &c.new_short).as_bytes())?;
    }
    if !c.worse.is_empty() {
        w.write_all(changes("Got worse", &c.worse).as_bytes())?;
    }
    if !c.better.is_empty() {
        w.write_all(changes("Got better", &c.better).as_bytes())?;
    }
    let sided = |title: &str, list: &[crate::compare::OneSided]| -> String {
        let mut t = table(&[
            "failed",
            &format!("shortfall ({u})"),
            &format!("stranded ({u})"),
        ]);
        for o in list.iter().take(top) {
            t.add_row(vec![
                Cell::new(scenario_words(&o.failed)),
                Cell::new(num(o.values.shortfall)),
                Cell::new(num(o.values.stranded)),
            ]);
        }
        right(&mut t, &[1, 2]);
        format!(
            "\n{title} ({} scenario{}, top {}):\n{}\n",
            list.len(),
            plural(list.len()),
            top.min(list.len()),
            render(&mut t, &[])
        )
    };
    if !c.added_risks.is_empty() {
        w.write_all(
            sided(
                "Added risks: scenarios that name an element only the new network has",
                &c.added_risks,
            )
            .as_bytes(),
        )?;
    }
    if !c.removed_risks.is_empty() {
        w.write_all(
            sided(
                "Removed risks: scenarios that name an element the new network no longer has",
                &c.removed_risks,
            )
            .as_bytes(),
        )?;
    }
    writeln!(
        w,
        "\nElements added: {}.\nElements removed: {}.",
        first_k(c.elements_added.iter().cloned(), 10),
        first_k(c.elements_removed.iter().cloned(), 10)
    )?;
    w.write_all(caution().as_bytes())
}

/// A note on stderr: `import networkx --capacity-attr ATTR --capacity C` gave `n` of `of`
/// links the capacity `C` because their edge has no `ATTR`.
pub fn note_capacity_fallback(
    w: &mut dyn Write,
    n: usize,
    of: usize,
    attr: &str,
    capacity: f64,
) -> io::Result<()> {
    writeln!(
        w,
        "redoubt: note: {n} of {of} links have no `{}` and take --capacity {}",
        printable(attr),
        num(capacity)
    )
}

/// A note on stderr: `plan --apply` wrote the network with the purchase added.
pub fn note_applied(w: &mut dyn Write, path: &std::path::Path, add: &[f64]) -> io::Result<()> {
    let sites = add.iter().filter(|a| **a > 0.0).count();
    writeln!(
        w,
        "redoubt: wrote {} with the purchase added ({sites} site{} with more processing); \
         audit it to review the change",
        path.display(),
        if sites == 1 { "" } else { "s" }
    )
}

/// The scenario `--why` (and `audit --fail` by default) explains, with its closing when
/// one was computed (`None` when nothing is short).
pub struct WhyPart<'a> {
    /// Index into `audit.scenarios`.
    pub scenario: usize,
    pub closing: Option<&'a crate::expand::Closing>,
}

/// Why one scenario is short: per-demand served and short amounts (one of possibly several
/// optimal splits), saturated link directions and processing sites, cut-off demands, what
/// added processing can and cannot fix, and the links whose growth would serve more (their
/// shadow prices).
pub fn why_report(net: &Network, audit: &Audit, why: &WhyPart<'_>) -> String {
    let u = &net.unit;
    let i = why.scenario;
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
        let stranded = e.stranded_demands.contains(&d);
        let cut = e.cut_off.iter().find(|(c, _)| *c == d).map(|(_, r)| *r);
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
    let _ = writeln!(
        out,
        "Saturated processing: {}.",
        if sites.is_empty() {
            "none".to_string()
        } else {
            sites.join(", ")
        }
    );
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
                    "Processing can fix {} of the {} short: add {} (cost {}).",
                    amount(fixed, u),
                    amount(e.shortfall, u),
                    additions(net, &c.add, net.sites.len()),
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
                    resource_name(net, Resource::Arc(a)),
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
fn held_back(net: &Network, e: &Evaluation, c: &crate::expand::Closing) -> String {
    let cut: f64 = e
        .cut_off
        .iter()
        .map(|&(d, _)| net.demands[d].required)
        .sum();
    if !c.binding_arcs.is_empty() {
        "link capacity holds it back even with every expandable site at its limit (the \
         links below)"
            .into()
    } else if cut > 0.0 && super::displayed(cut) >= super::displayed(c.not_closable) {
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
