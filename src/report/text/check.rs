//! The `check` screen: sizes, totals, processing and expandable sites, risk groups, and
//! the demands no walk can serve with nothing failed.

#[allow(unused_imports)]
use super::*;
use crate::model::DemandIdx;
use crate::report::export::{CheckReport, Exporter, Text};

/// The `check` summary: sizes, totals, processing sites and risk groups, and the demands
/// that no walk through a processing site can serve even with nothing failed
/// (`baseline_cut_off`, from [`crate::solve::baseline_cut_off`]).
pub fn check_summary(net: &Network, baseline_cut_off: &[(DemandIdx, Unservable)]) -> String {
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
    if let Some(ch) = &net.chains {
        let _ = writeln!(
            out,
            "  volume {}  required {}  (origin units)",
            amount(net.total_volume(), u),
            amount(net.total_required(), u),
        );
        chains_summary(&mut out, net, ch);
        if !baseline_cut_off.is_empty() {
            let _ = writeln!(out, "  {}", baseline_misses(net, baseline_cut_off));
        }
        groups_summary(&mut out, net);
        return out;
    }
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
            s.expansion
                .as_ref()
                .map(|e| purchase_terms(&s.id, e.cost, e.max, e.step))
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
    if !net.matrices.is_empty() {
        let _ = writeln!(
            out,
            "  traffic matrices ({}; every scenario is evaluated under each):",
            net.matrix_count()
        );
        for m in 0..net.matrix_count() {
            let v = net.view(m);
            let _ = writeln!(
                out,
                "    {} — {} demand{}, volume {}, required {}{}",
                net.matrix_id(m),
                v.demands.len(),
                if v.demands.len() == 1 { "" } else { "s" },
                amount(v.total_volume(), u),
                amount(v.total_required(), u),
                if m == 0 {
                    " (the top-level demands)"
                } else {
                    ""
                }
            );
            if m > 0 {
                let cut = crate::solve::baseline_cut_off(v);
                if !cut.is_empty() {
                    let _ = writeln!(out, "      {}", baseline_misses(v, &cut));
                }
            }
        }
    }
    groups_summary(&mut out, net);
    out
}

/// The functions with their gains, capacities and purchases, and the chains with the
/// number of demands and the required volume each carries, and their total gain.
fn chains_summary(out: &mut String, net: &Network, ch: &crate::model::Chains) {
    // What each function takes when every demand is served in full (Σ required times the
    // gain of the functions before it in the demand's chain, once per position).
    let mut needed = vec![0.0; ch.functions.len()];
    let mut delivered = 0.0;
    for (d, dem) in net.demands.iter().enumerate() {
        let cumulative = ch.cumulative(&ch.chain[d]);
        for (j, &f) in ch.chain[d].iter().enumerate() {
            needed[f] += dem.required * cumulative[j];
        }
        delivered += dem.required * cumulative[ch.chain[d].len()];
    }
    let _ = writeln!(
        out,
        "  delivered when every demand's required part is served: {} (each chain's gain applied)",
        amount(delivered, &net.unit)
    );
    let _ = writeln!(
        out,
        "  functions ({}) (needed: what each takes when every required part is served):",
        ch.functions.len()
    );
    for (f, func) in ch.functions.iter().enumerate() {
        let at: Vec<String> = net
            .sites
            .iter()
            .enumerate()
            .filter(|&(v, _)| ch.capacity[v][f] > 0.0)
            .map(|(v, s)| format!("{} {}", s.id, num(ch.capacity[v][f])))
            .collect();
        let buy: Vec<String> = net
            .sites
            .iter()
            .enumerate()
            .filter_map(|(v, s)| {
                ch.expand[v][f]
                    .as_ref()
                    .map(|e| purchase_terms(&s.id, e.cost, e.max, None))
            })
            .collect();
        let total: f64 = (0..net.sites.len()).map(|v| ch.capacity[v][f]).sum();
        let _ = writeln!(
            out,
            "    {} — gain {}; capacity {}: {}{}; {}",
            func.id,
            num(func.gain),
            num(total),
            if at.is_empty() {
                "none".into()
            } else {
                at.join(", ")
            },
            if buy.is_empty() {
                String::new()
            } else {
                format!("; expandable: {}", buy.join(", "))
            },
            if needed[f] > 0.0 {
                format!(
                    "needed {}{}",
                    num(needed[f]),
                    if needed[f] > total {
                        " (more than its capacity)"
                    } else {
                        ""
                    }
                )
            } else {
                "in no demand's chain".to_string()
            }
        );
    }
    let mut chains: std::collections::BTreeMap<Vec<usize>, (usize, f64)> =
        std::collections::BTreeMap::new();
    for (d, dem) in net.demands.iter().enumerate() {
        let e = chains.entry(ch.chain[d].clone()).or_default();
        e.0 += 1;
        e.1 += dem.required;
    }
    let _ = writeln!(out, "  chains ({}):", chains.len());
    for (chain, (count, required)) in chains {
        let gain: f64 = chain.iter().map(|&f| ch.functions[f].gain).product();
        let name = if chain.is_empty() {
            "plain traffic (no function)".to_string()
        } else {
            chain
                .iter()
                .map(|&f| ch.functions[f].id.as_str())
                .collect::<Vec<_>>()
                .join(" > ")
        };
        let _ = writeln!(
            out,
            "    {name} — {count} demand{}, required {}, total gain {}",
            if count == 1 { "" } else { "s" },
            num(required),
            num(gain)
        );
    }
}

/// The risk groups with their sizes.
fn groups_summary(out: &mut String, net: &Network) {
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
}

/// "already short with nothing failed: N demands (X units required): d (why), ...".
pub(super) fn baseline_misses(net: &Network, cut_off: &[(DemandIdx, Unservable)]) -> String {
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

/// The `check` exporter: [`check_summary`] to `w`.
impl Exporter<CheckReport<'_>> for Text {
    fn write(&self, c: &CheckReport<'_>, w: &mut dyn Write) -> io::Result<()> {
        write_check(w, c.net, c.cut_off)
    }
}

/// [`check_summary`] to `w`.
pub fn write_check(
    w: &mut dyn Write,
    net: &Network,
    baseline_cut_off: &[(DemandIdx, Unservable)],
) -> io::Result<()> {
    w.write_all(screen::finish(&check_summary(net, baseline_cut_off)).as_bytes())
}

/// How one purchase option reads in `check`: `SITE (cost C/unit, up to M[, modules of S])`,
/// `no limit` for an unbounded `max`.
fn purchase_terms(site: &str, cost: f64, max: f64, step: Option<f64>) -> String {
    format!(
        "{site} (cost {}/unit, {}{})",
        num(cost),
        if max.is_finite() {
            format!("up to {}", num(max))
        } else {
            "no limit".into()
        },
        step.map(|st| format!(", modules of {}", num(st)))
            .unwrap_or_default()
    )
}
