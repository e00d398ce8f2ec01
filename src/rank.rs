//! Ranking: the worst scenarios first, and each element's criticality.
//!
//! The order is total and independent of evaluation order: shortfall (descending), then
//! stranded required demand, then throughput, then fewer failed elements, then the
//! scenario's sorted names. Float comparisons use `total_cmp` on values already snapped by
//! the solver layer, so equal results tie exactly.

use std::cmp::Ordering;

use crate::audit::{Audit, ScenarioId};
use crate::scenario::Element;

/// Scenario indices of `audit`, worst first.
pub fn worst_first(audit: &Audit) -> Vec<ScenarioId> {
    let mut idx: Vec<ScenarioId> = (0..audit.scenarios.len()).map(ScenarioId).collect();
    idx.sort_by(|&a, &b| compare(audit, a, b));
    idx
}

fn compare(audit: &Audit, a: ScenarioId, b: ScenarioId) -> Ordering {
    let (ea, eb) = (audit.eval(a), audit.eval(b));
    eb.shortfall
        .total_cmp(&ea.shortfall)
        .then(eb.stranded.total_cmp(&ea.stranded))
        .then(ea.throughput.total_cmp(&eb.throughput))
        .then(
            audit.scenarios[a]
                .elements
                .len()
                .cmp(&audit.scenarios[b].elements.len()),
        )
        .then_with(|| audit.scenarios[a].failed.cmp(&audit.scenarios[b].failed))
}

/// How much an element matters: the worst scenario that contains it.
#[derive(Debug, Clone, PartialEq)]
pub struct Criticality {
    pub element: Element,
    /// Worst shortfall of any scenario containing the element.
    pub worst_shortfall: f64,
    /// Worst stranded required demand of any scenario containing it.
    pub worst_stranded: f64,
    /// The scenario index that attains `worst_shortfall` (first in rank order).
    pub worst_scenario: ScenarioId,
    /// Number of scenarios containing the element with shortfall above 0.
    pub scenarios_short: usize,
}

/// Criticality of every element that appears in some scenario, most critical first (by
/// worst shortfall, then worst stranded, then element order). O(S log S + Σ scenario
/// sizes).
pub fn criticality(audit: &Audit) -> Vec<Criticality> {
    criticality_in(audit, &worst_first(audit))
}

/// [`criticality`] from an order already computed (`order` must be [`worst_first`] of
/// `audit`: each element's `worst_scenario` is the first in it). O(Σ scenario sizes + k log
/// k) for k elements.
pub fn criticality_in(audit: &Audit, order: &[ScenarioId]) -> Vec<Criticality> {
    let mut out: Vec<Criticality> = Vec::new();
    let mut pos: std::collections::HashMap<Element, usize> = std::collections::HashMap::new();
    for &i in order {
        let e = audit.eval(i);
        for &el in &audit.scenarios[i].elements {
            let k = *pos.entry(el).or_insert_with(|| {
                out.push(Criticality {
                    element: el,
                    worst_shortfall: e.shortfall,
                    worst_stranded: e.stranded,
                    worst_scenario: i,
                    scenarios_short: 0,
                });
                out.len() - 1
            });
            let c = &mut out[k];
            c.worst_stranded = c.worst_stranded.max(e.stranded);
            if e.shortfall > 0.0 {
                c.scenarios_short += 1;
            }
        }
    }
    out.sort_by(|a, b| {
        b.worst_shortfall
            .total_cmp(&a.worst_shortfall)
            .then(b.worst_stranded.total_cmp(&a.worst_stranded))
            .then(a.element.cmp(&b.element))
    });
    out
}
