//! The service-chain parts of the HTML and Markdown reports (a network whose file lists
//! `functions`): the delivered volume in the network facts and each function's load,
//! capacity, utilisation and shadow price per site in the worst scenario. The terminal's
//! lines are in [`super::text::delivered_line`] and [`super::text::functions_section`].
//! Nothing here is written for a network without functions.

use std::fmt;

use super::html::{Report, esc, table_html};
use super::{amount, num, percent};
use crate::model::Network;
use crate::solve::Evaluation;

/// The header and rows of a scenario's function table: function, site, load, capacity,
/// use (load over capacity) and price (`—` where no demand can reach it), in (site,
/// function) order. Empty rows without functions. O(sites · functions).
pub fn function_table(net: &Network, e: &Evaluation) -> (Vec<String>, Vec<Vec<String>>) {
    let u = &net.unit;
    let head = vec![
        "function".to_string(),
        "site".into(),
        format!("load ({u})"),
        format!("capacity ({u})"),
        "use".into(),
        format!("served per added {u} (price)"),
    ];
    let Some(ch) = net.chains.as_ref() else {
        return (head, Vec::new());
    };
    let rows = e
        .functions
        .iter()
        .map(|f| {
            let cap = ch.capacity[f.site][f.function];
            vec![
                ch.functions[f.function].id.clone(),
                net.sites[f.site].id.clone(),
                num(f.load),
                num(cap),
                percent(f.load, cap),
                f.price.map_or("—".to_string(), num),
            ]
        })
        .collect();
    (head, rows)
}

/// The network facts a report adds for a network with functions: the baseline's delivered
/// volume, with the range other optimal allocations may deliver when it is not unique.
/// Empty without functions. O(demands · chain).
pub fn summary_rows(net: &Network, baseline: &Evaluation) -> Vec<(String, String)> {
    let Some(d) = baseline.delivered else {
        return Vec::new();
    };
    let range = match baseline.delivered_range(net) {
        Some((least, most)) => format!(
            "; another optimal allocation may deliver between {} and {}",
            num(least),
            num(most)
        ),
        None => "; every optimal allocation delivers the same".into(),
    };
    vec![(
        "baseline delivered".into(),
        format!(
            "{} at the destinations (each chain's gain applied){range}",
            amount(d, &net.unit)
        ),
    )]
}

/// The HTML "where one more unit helps" section of a network with functions: the worst
/// scenario's function table. O(sites · functions).
pub fn functions_html(o: &mut dyn fmt::Write, net: &Network, e: &Evaluation) -> fmt::Result {
    let u = &net.unit;
    o.write_str("<h2>Where one more unit helps</h2>\n")?;
    writeln!(
        o,
        "<p>{}</p>",
        esc(&format!(
            "In the worst scenario, each function at each site: the traffic entering it, its \
             capacity, and how much more one more {u} of it there serves (its shadow price; \
             — where no demand can reach it)."
        ))
    )?;
    let (head, rows) = function_table(net, e);
    table_html(o, &head, &rows, &[2, 3, 4, 5])
}

/// The title, header and rows of the worst scenario's function table, when the file lists
/// functions and a scenario is short (the Markdown report's section). O(sites · functions).
pub fn worst_functions(r: &Report<'_>) -> Option<(String, Vec<String>, Vec<Vec<String>>)> {
    let i = r.worst_short()?;
    r.net.chains.as_ref()?;
    let net = r.net.view(r.audit.scenarios[i].matrix);
    let (head, rows) = function_table(net, r.audit.eval(i));
    Some((
        format!(
            "Functions in the worst scenario ({})",
            r.audit.scenarios[i].display_name()
        ),
        head,
        rows,
    ))
}

/// The second assumption of a network with functions, in place of "every unit is
/// processed once".
const CHAIN_ASSUMPTION: &str = "Every unit passes its demand's chain of functions in order, \
each at a site that runs it, within that function's capacity there; each function scales the \
volume by its constant gain (plain traffic passes none).";

/// The assumptions a report on `net` lists: [`super::html::ASSUMPTIONS`], with the chain
/// model's in place of single processing when the file lists functions. O(1).
pub fn assumptions(net: &Network) -> [&'static str; 5] {
    let mut a = super::html::ASSUMPTIONS;
    if net.chains.is_some() {
        a[1] = CHAIN_ASSUMPTION;
    }
    a
}
