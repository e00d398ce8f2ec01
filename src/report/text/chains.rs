//! The service-chain lines of the terminal report (a network whose file lists `functions`):
//! the volume delivered at the destinations beside the volume served, each function's
//! utilisation and shadow price per site, and what one more unit of a function serves.
//! Nothing here is written for a network without functions.

use super::*;

/// `Delivered at the destinations: X UNIT (served S in origin units, each chain's gain
/// applied)`, with the range other optimal allocations may deliver when it is not unique
/// ([`Evaluation::delivered_range`]); `None` without functions. O(demands · chain).
pub fn delivered_line(net: &Network, e: &Evaluation) -> Option<String> {
    let d = e.delivered?;
    let u = &net.unit;
    let mut line = format!(
        "Delivered at the destinations: {} (served {} in origin units, each chain's gain \
         applied)",
        amount(d, u),
        num(e.served_required)
    );
    match e.delivered_range(net) {
        Some((least, most)) => {
            let _ = write!(
                line,
                "; this is the reported optimal allocation's value: another optimal one may \
                 deliver between {} and {} (bounds from the gains alone).",
                num(least),
                num(most)
            );
        }
        None => line.push_str("; every optimal allocation delivers the same."),
    }
    Some(line)
}

/// `FUNCTION at SITE`.
pub fn function_name(net: &Network, site: usize, function: usize) -> String {
    let id = net
        .chains
        .as_ref()
        .map_or("", |ch| ch.functions[function].id.as_str());
    format!("{id} at {}", net.sites[site].id)
}

/// The priced functions of a scenario with a shortfall, highest shadow price first (ties in
/// (site, function) order), only those that can be bought when `expandable`: `(site,
/// function, price)`. O(sites · functions · log).
pub fn priced_functions(
    net: &Network,
    e: &Evaluation,
    expandable: bool,
) -> Vec<(usize, usize, f64)> {
    let Some(ch) = net.chains.as_ref() else {
        return Vec::new();
    };
    let mut v: Vec<(usize, usize, f64)> = e
        .functions
        .iter()
        .filter(|u| !expandable || ch.expand[u.site][u.function].is_some())
        .filter_map(|u| {
            u.price
                .filter(|p| *p > crate::tol::PRICE_BINDS)
                .map(|p| (u.site.0, u.function, p))
        })
        .collect();
    v.sort_by(|a, b| b.2.total_cmp(&a.2).then((a.0, a.1).cmp(&(b.0, b.1))));
    v
}

/// The `k` expandable functions with the highest shadow price in a scenario with a
/// shortfall, as `FUNCTION at SITE (+price)`; `—` without a shortfall, `none` when no
/// expandable function binds. O(sites · functions · log).
pub fn marginal_functions(net: &Network, e: &Evaluation, k: usize) -> String {
    if e.shortfall <= 0.0 {
        return "—".into();
    }
    top_priced(
        priced_functions(net, e, true)
            .into_iter()
            .map(|(s, f, p)| (function_name(net, s, f), p))
            .collect(),
        k,
    )
}

/// The functions section of a scenario's explanation: a table of each function's load,
/// capacity, utilisation and shadow price per surviving site, then one sentence per priced
/// function ("one more unit of F at S serves up to P more"). Empty without functions.
/// O(sites · functions).
pub fn functions_section(net: &Network, e: &Evaluation) -> String {
    let Some(ch) = net.chains.as_ref() else {
        return String::new();
    };
    let mut out = String::new();
    let (head, rows) = crate::report::chains::function_table(net, e);
    let mut t = table(&head);
    for row in rows {
        t.add_row(row);
    }
    right(&mut t, &[2, 3, 4, 5]);
    let _ = writeln!(
        out,
        "Functions (measured where traffic enters each function; price: its shadow price; — \
         where no demand can reach it):\n{}",
        render(&mut t, &[])
    );
    let priced = priced_functions(net, e, false);
    if priced.is_empty() {
        let _ = writeln!(
            out,
            "One more unit of any function would not serve more in this allocation's prices."
        );
    }
    for (s, f, p) in priced {
        let _ = writeln!(
            out,
            "One more unit of {} at {} serves up to {} more{}.",
            ch.functions[f].id,
            net.sites[s].id,
            num(p),
            if ch.expand[s][f].is_some() {
                ""
            } else {
                " (it cannot be bought there)"
            }
        );
    }
    out
}
