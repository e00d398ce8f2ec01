//! Terminal output, one file per screen: `check`, `audit`, `why`, `plan` (closings,
//! relief, plans), `risk`, `compare`, `gates`; the helpers several screens share
//! live here. Notes for stderr are in [`super::notes`].

use std::fmt::Write as _;

use comfy_table::Cell;

use std::io::{self, Write};

use super::{amount, file_diff, given, num, percent, shift_point, small, unit_one};
use crate::audit::{Audit, OutageId, ScenarioId};
use crate::gate::{GateKind, GateResult};
use crate::model::strict::printable;
use crate::model::{LinkIdx, Network};
use crate::rank::Criticality;
use crate::solve::{Evaluation, Resource, Unservable};

use super::screen::{self, render, right, table};

mod audit;
mod chains;
mod check;
mod compare;
mod gates;
mod plan;
mod risk;
mod why;

pub use audit::{audit_report, under_matrix, verdict, verification_summary, write_shard};
pub use chains::{delivered_line, functions_section, marginal_functions, priced_functions};
pub use check::{check_summary, write_check};
pub use compare::write_compare;
pub(crate) use compare::{
    CHANGE_COLUMNS, change_words, edit_value, scenario_words, signed, verdict_line,
};
pub use gates::gate_line;
pub use plan::{closing_report, plan_report, relief_report, write_plan};
pub use risk::risk_report;
pub use why::{WhyPart, why_report};
// The notes kept at their old path for callers.
pub use super::notes::{
    estimate_refused, note_applied, note_applied_functions, note_capacity_fallback, note_estimate,
    note_journal_failed, note_journal_line, note_resume, note_threads_capped, refuse_with_shard,
};

/// `""` for one, `"s"` otherwise.
fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

/// Why a demand cannot be served, in words.
fn unservable_words(r: Unservable) -> &'static str {
    match r {
        Unservable::NoPath => "no path",
        Unservable::NoProcessing => "no processing site on any walk",
    }
}

/// Names the cause of a scenario's shortfall in words: demands with no path, demands
/// with no processing reachable, or the saturated resource with the highest shadow price
/// (a link direction, a site's processing or, with service chains, a function at a site).
/// Cut-off demands are named when they make up
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
    // With service chains a function's row may price higher than every link.
    if let Some((s, f, p)) = chains::priced_functions(net, e, false).into_iter().next()
        && saturated.is_none_or(|b| p >= b.price)
    {
        return format!("saturated {}", chains::function_name(net, s, f));
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
    top_priced(
        e.site_price
            .iter()
            .enumerate()
            .filter(|&(s, _)| cands.expandable(s))
            .filter_map(|(s, p)| {
                p.filter(|p| *p > crate::tol::PRICE_BINDS)
                    .map(|p| (net.sites[s].id.clone(), p))
            })
            .collect(),
        k,
    )
}

/// The `k` highest-priced `(name, price)` items as `name (+price)`, highest first (ties in
/// the given order); `none` when there is none. O(n log n).
fn top_priced(mut v: Vec<(String, f64)>, k: usize) -> String {
    v.sort_by(|a, b| b.1.total_cmp(&a.1));
    if v.is_empty() {
        return "none".into();
    }
    v.iter()
        .take(k)
        .map(|(s, p)| format!("{s} (+{})", num(*p)))
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

/// The first `k` items joined with commas, `(+N more)` for the rest, `—` when empty.
pub(crate) fn first_k(items: impl ExactSizeIterator<Item = String>, k: usize) -> String {
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

/// The `k` largest function purchases as `SITE FUNCTION +UNITS`, most first, then by site
/// and function; the rest counted. O(p log p).
pub fn function_additions(
    net: &Network,
    bought: &[crate::expand::chain_buy::FunctionPurchase],
    k: usize,
) -> String {
    let Some(ch) = &net.chains else {
        return String::new();
    };
    let mut v: Vec<&crate::expand::chain_buy::FunctionPurchase> = bought.iter().collect();
    v.sort_by(|a, b| {
        b.units
            .total_cmp(&a.units)
            .then(a.site.cmp(&b.site))
            .then(a.function.cmp(&b.function))
    });
    first_k(
        v.iter().map(|p| {
            format!(
                "{} {} +{}",
                net.sites[p.site].id,
                ch.functions[p.function].id,
                num(p.units)
            )
        }),
        k,
    )
}

/// What a closing buys, as its table cell and sentences write it: the function purchases
/// (`SITE FUNCTION +UNITS`) of a service-chain closing, else the processing per site; the
/// `k` largest, the rest counted.
pub fn closing_additions(net: &Network, c: &crate::expand::Closing, k: usize) -> String {
    match &c.functions {
        Some(bought) => function_additions(net, bought, k),
        None => additions(net, &c.add, k),
    }
}

fn link_list(net: &Network, links: &[LinkIdx], k: usize) -> String {
    first_k(links.iter().map(|&l| net.links[l].id.clone()), k)
}
