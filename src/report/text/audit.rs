//! The audit screen: the verdict, the header, the worst scenarios (folded), element
//! criticality and the verification summary, and the `audit --shard` line.

use super::check::baseline_misses;
#[allow(unused_imports)]
use super::*;
use crate::report::export::{Exporter, Text};
use crate::report::model::Model;
use crate::solve::Verification;

/// What the columns of the scenario table mean, in words.
pub(super) fn column_legend(base_short: bool) -> String {
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
pub fn verdict(m: &Model<'_>) -> String {
    let (net, audit, gates) = (m.net, m.audit, m.gates);
    let u = &net.unit;
    let n = audit.scenarios.len();
    let short = m.short;
    let scenarios = match m.worst() {
        Some(i) if short > 0 => {
            let e = audit.eval(i);
            format!(
                "{short} of {n} scenario{} short; worst {}{} (shortfall {}, stranded {})",
                plural(n),
                audit.scenarios[i].display_name(),
                "",
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

/// ` under matrix ID` for scenario `i` of a file with `matrices`; empty otherwise.
pub fn under_matrix(m: &Model<'_>, i: usize) -> String {
    if m.several_matrices() {
        format!(
            " under matrix {}",
            m.net.matrix_id(m.audit.scenarios[i].matrix)
        )
    } else {
        String::new()
    }
}

/// The audit report: header, worst scenarios, element criticality (the caller ends the
/// report with [`crate::report::caution_for`]).
pub fn audit_report(m: &Model<'_>) -> String {
    let (net, audit, baseline, top) = (m.net, m.audit, m.baseline, m.top);
    let u = &net.unit;
    let mut out = String::new();
    let pairs = if m.several_matrices() {
        let mut ms: Vec<usize> = audit.scenarios.iter().map(|s| s.matrix).collect();
        ms.sort_unstable();
        ms.dedup();
        let n = audit.scenarios.len() / ms.len().max(1);
        if let [one] = ms[..] {
            format!(" under matrix {}", net.matrix_id(one))
        } else {
            format!(" ({n} scenario{} × {} matrices)", plural(n), ms.len())
        }
    } else {
        String::new()
    };
    let _ = writeln!(
        out,
        "{} — {} scenario{}{pairs} ({} distinct outage{}), {} site{}, {} link{}, {} demand{}",
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
        amount(net.view(audit.baseline_matrix()).total_volume(), u),
        small(baseline.certified_gap())
    );
    if let Some(line) = delivered_line(net.view(audit.baseline_matrix()), baseline) {
        let _ = writeln!(out, "{line}");
    }
    if m.several_matrices() {
        let _ = writeln!(out, "{}", matrices_line(m));
    }
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
                baseline_misses(net.view(audit.baseline_matrix()), &baseline.cut_off)
            );
        }
    }
    let folding = &m.folding;
    let cands = &m.candidates;
    let all = m.order.len();
    let order = &m.shown;
    let shown = top.min(order.len());
    let several = m.several_matrices();
    let mut header: Vec<&str> = vec!["#", "failed"];
    if several {
        header.push("worst matrix");
    }
    header.push("shortfall");
    if base_short {
        header.push("beyond baseline");
    }
    header.extend(["% of surviving required", "stranded", "throughput loss"]);
    let with_headroom = m.headroom.is_some();
    if with_headroom {
        header.push("headroom");
    }
    header.push("main bottleneck (one more unit helps at)");
    let mut t = table(&header);
    let mut widest_name = 0;
    for (rank_no, &i) in order.iter().take(shown).enumerate() {
        let e = audit.eval(i);
        let (net, baseline) = (m.net_of(i), m.baseline_of(i));
        let mut row = vec![
            Cell::new(rank_no + 1),
            Cell::new({
                let name = match folding.equivalents[i] {
                    0 => audit.scenarios[i].failed_name(),
                    n => format!("{} (+{n} equivalent)", audit.scenarios[i].failed_name()),
                };
                widest_name = widest_name.max(name.chars().count());
                name
            }),
        ];
        if several {
            row.push(Cell::new(m.net.matrix_id(audit.scenarios[i].matrix)));
        }
        row.push(Cell::new(num(e.shortfall)));
        if base_short {
            row.push(Cell::new(num(
                file_diff(e.shortfall, baseline.shortfall).max(0.0)
            )));
        }
        row.extend([
            Cell::new(percent(e.shortfall, e.surviving_required)),
            Cell::new(num(e.stranded)),
            Cell::new(num(file_diff(baseline.throughput, e.throughput).max(0.0))),
        ]);
        if with_headroom {
            row.push(Cell::new(crate::report::headroom::table_cell(m, i)));
        }
        let helps = if net.chains.is_some() {
            marginal_functions(net, e, 2)
        } else {
            marginal_sites(net, cands, e, 2)
        };
        row.extend([Cell::new(match helps {
            m if m == "none" || m == "—" => main_bottleneck(net, e),
            m => format!("{} (one more unit helps at {m})", main_bottleneck(net, e)),
        })]);
        t.add_row(row);
    }
    // Every column but the name and the bottleneck is a number; the bottleneck is last.
    let last = header.len() - 1;
    let first_number = if several { 3 } else { 2 };
    let numeric: Vec<usize> = std::iter::once(0).chain(first_number..last).collect();
    let free = vec![last];
    // A long scenario name (depth 2 and more) wraps at its spaces, between whole element
    // names; a short one stays on one line.
    let free: Vec<usize> = if widest_name > NAME_ON_ONE_LINE {
        std::iter::once(1).chain(free).collect()
    } else {
        free
    };
    right(&mut t, &numeric);
    let short = m.short;
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
    if with_headroom {
        let _ = writeln!(
            out,
            "headroom = the largest share of its required demand every surviving demand can \
             be sent at once in that scenario (above 100%: room to grow; below: short now; \
             ≥: unproven, the proven lower bound; —: no surviving required demand)."
        );
    }
    if short > 0 && net.chains.is_some() {
        let _ = writeln!(
            out,
            "\"one more unit helps at F at S (+Y)\": one more unit of function F bought at site \
             S (where the file lets it be bought) serves up to Y more in that scenario (its \
             shadow price); when it is not shown, one more unit of a function that can be \
             bought would not serve more (links, cut-off paths or functions that cannot be \
             bought limit it)."
        );
    } else if short > 0 {
        let _ = writeln!(
            out,
            "\"one more unit helps at X (+Y)\": one more unit of processing bought at X (an \
             expandable site) serves up to Y more in that scenario (its shadow price); when it \
             is not shown, one more unit at an expandable site would not serve more (links, \
             cut-off paths or processing at sites that cannot be expanded limit it)."
        );
    }

    let crit: &[Criticality] = &m.criticality;
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
    if let Some(sc) = m.screen {
        let _ = writeln!(out, "{}", screen_line(sc));
    }
    out.push_str(&crate::report::headroom::verification_lines(m));
    for (k, e) in audit.evaluations.iter().enumerate() {
        let name = || audit.first_scenario(OutageId(k)).display_name();
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

/// `--exact-top N`: how many outages the walk engine solved exactly (those that could be
/// among the N worst or decide a gate and were not exact already), how many the
/// approximate engine closed itself, and that the rest are proven intervals. O(outages).
pub fn screen_line(sc: &crate::screening::Screen) -> String {
    let closed = match sc.closed() {
        0 => String::new(),
        c => format!(
            "{} exact already (the approximate interval closed) and ",
            crate::report::count(c, "outage")
        ),
    };
    let rest = match sc.certified() {
        0 => "every other outage is exact too.".to_string(),
        1 => "the other 1 is a proven interval from --engine approx, ranked at its proven \
              served amount."
            .to_string(),
        m => format!(
            "the other {m} are proven intervals from --engine approx, ranked at their proven \
             served amount."
        ),
    };
    format!(
        "Screened (--exact-top {}): {closed}{} solved exactly with the walk engine (every \
         other one that could be among the {} worst or decide a gate), so the {} worst are \
         exact; {rest}",
        sc.top,
        crate::report::count(sc.solved_exactly(), "outage"),
        sc.top,
        sc.top,
    )
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
            unproven_summary(audit, n - proven)
        } else {
            String::new()
        }
    )
}

/// The tail of [`verification_summary`] for the `open` outages not proven optimal: how
/// many are "approximate within E" (every quantity proven or, from `--engine approx`, an
/// interval at most E × its scale wide) and how many stay UNPROVEN. Without an approximate
/// result it is the exact engines' wording. O(outages).
fn unproven_summary(audit: &Audit, open: usize) -> String {
    let ok = |v: &Verification, scale: f64| {
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
    match (approx, open - approx) {
        (0, open) => format!("; {open} UNPROVEN, listed below"),
        (a, 0) => {
            format!("; {a} approximate within {eps} of required (--engine approx), listed below")
        }
        (a, open) => format!(
            "; {a} approximate within {eps} of required (--engine approx) and {open} \
             UNPROVEN, listed below"
        ),
    }
}

/// The ε of a result of the approximate engine (its backend reads `approx (epsilon E)`),
/// as written there; `None` for the exact engines. O(length of the backend name).
fn approximate(v: &Verification) -> Option<&str> {
    v.backend
        .strip_prefix("approx (epsilon ")
        .and_then(|r| r.strip_suffix(')'))
}

/// Whether the interval of `v` is at most `eps` (as written) × `required` wide: what
/// "approximate within E" claims (with a relative slack of 1e-9 for the rounding of the
/// bounds). O(length of `eps`).
fn within(v: &Verification, eps: &str, required: f64) -> bool {
    eps.parse::<f64>()
        .is_ok_and(|e| v.upper - v.lower <= e * required * (1.0 + 1e-9))
}

/// What the throughput interval `t` of `e` is judged against: the surviving required
/// demand, or the interval's upper end when larger (never above the surviving volume, so
/// the claim is never looser than ε × volume). O(1).
fn volume_scale(e: &Evaluation, t: &Verification) -> f64 {
    e.surviving_required.max(t.upper)
}

/// The audit text: the verdict, the routed comparison (under `--routing`), the header and
/// worst scenarios, the explanation of one scenario (`--why`, or `--fail`), where one more
/// unit helps, the closings (with `--close`), the risk figures (when probabilities are
/// given), one line per gate, and the caution, in that order. Each section is wrapped to
/// the screen ([`screen::finish`], line by line) and written as soon as it is formatted.
impl Exporter<Model<'_>> for Text {
    fn write(&self, m: &Model<'_>, w: &mut dyn Write) -> io::Result<()> {
        let mut section = |s: &str| w.write_all(screen::finish(s).as_bytes());
        section(&format!("{}\n", verdict(m)))?;
        if let Some(h) = crate::report::headroom::sentence(m) {
            section(&format!("{h}\n"))?;
        }
        if let Some(ra) = m.routed {
            section(&format!(
                "{}\n",
                crate::report::routing::routing_report(m, ra)
            ))?;
        }
        section(&audit_report(m))?;
        if let Some(y) = &m.why {
            section(&why_report(m.net, m.audit, y))?;
        }
        section(&relief_report(m))?;
        if m.closings.is_some() {
            section(&closing_report(m))?;
        }
        if let Some(r) = m.risk {
            section(&risk_report(m.net, m.audit, r))?;
        }
        if !m.gates.is_empty() {
            let mut s = String::from("\n");
            for g in m.gates {
                let _ = writeln!(s, "{}", gate_line(m.net, m.audit, g));
            }
            section(&s)?;
        }
        section(&format!("{}\n", super::super::caution_for(m.net)))
    }
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
        crate::report::count(outages, "outage"),
        printable(&part.display().to_string())
    )
}

/// The line naming the run's traffic matrices: each with its demand count and required
/// total, and how the table shows them. O(matrices · demands).
fn matrices_line(m: &Model<'_>) -> String {
    let u = &m.net.unit;
    let mut ms: Vec<usize> = Vec::new();
    for s in &m.audit.scenarios {
        if !ms.contains(&s.matrix) {
            ms.push(s.matrix);
        }
    }
    let each: Vec<String> = ms
        .iter()
        .map(|&k| {
            let v = m.net.view(k);
            format!(
                "{} ({} demand{}, {} required)",
                m.net.matrix_id(k),
                v.demands.len(),
                plural(v.demands.len()),
                amount(v.total_required(), u)
            )
        })
        .collect();
    format!(
        "Traffic matrices: {}. Every scenario is solved under each; the table shows each \
         scenario once, under its worst matrix.",
        each.join(", ")
    )
}
