//! Pre-change check (`redoubt compare BEFORE AFTER`): the comparison of two audits of the
//! same scenarios on two versions of a network, matched by the names of their failed
//! elements. This is the model only (what got worse, better, newly short); the command that
//! loads, solves and writes both sides is `app::compare`.
//!
//! A scenario present on both sides *got worse* when its shortfall or its stranded
//! demand, each as printed ([`crate::numbers::displayed`]), rose by more than the
//! tolerance; *better* when either fell by more than it and neither rose. A scenario that
//! names an element only one side has is an *added risk* (only after) or a *removed risk*
//! (only before). A scenario on both sides is *newly short* when its shortfall as printed
//! is 0 before and above 0 after: the change made it a point of failure that it was not
//! (a new single point of failure at depth 1), whatever the tolerance. The command exits 1
//! when any scenario got worse or is newly short (`--allow-new-short` lets the newly short
//! ones pass, still listed). Both files must state the same traffic `unit`: amounts in
//! different units are not comparable, so such a pair is refused (exit 2).

use std::collections::HashMap;

use crate::audit::Audit;
use crate::error::{Error, Result};
use crate::model::Network;
use crate::numbers::displayed;
use crate::scenario::{self, Kinds};
use crate::solve::Evaluation;

/// The four contract values of one scenario on one side.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Values {
    pub served_required: f64,
    pub shortfall: f64,
    pub stranded: f64,
    pub throughput: f64,
}

impl Values {
    pub fn of(e: &Evaluation) -> Values {
        Values {
            served_required: e.served_required,
            shortfall: e.shortfall,
            stranded: e.stranded,
            throughput: e.throughput,
        }
    }
}

/// One scenario on both sides.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    pub failed: Vec<String>,
    /// The traffic matrix's id, for files with `matrices` (`None` without).
    pub matrix: Option<String>,
    pub before: Values,
    pub after: Values,
    /// Printed shortfall after − printed shortfall before.
    pub delta_shortfall: f64,
    /// Printed stranded after − printed stranded before.
    pub delta_stranded: f64,
}

impl Change {
    /// Scenario `failed` (under `matrix`) with its values on both sides and their
    /// printed differences.
    pub fn new(
        failed: Vec<String>,
        matrix: Option<String>,
        before: Values,
        after: Values,
    ) -> Change {
        // Differences of printed values, printed again: 14.334 − 14.333 is 0.001, not
        // 0.00099999…, so a tolerance of 0.001 compares as a reader would.
        let delta = |a: f64, b: f64| displayed(displayed(a) - displayed(b));
        Change {
            delta_shortfall: delta(after.shortfall, before.shortfall),
            delta_stranded: delta(after.stranded, before.stranded),
            failed,
            matrix,
            before,
            after,
        }
    }
}

/// A scenario only one side has.
#[derive(Debug, Clone, PartialEq)]
pub struct OneSided {
    pub failed: Vec<String>,
    /// The traffic matrix's id, for files with `matrices`.
    pub matrix: Option<String>,
    pub values: Values,
}

/// The whole comparison.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    pub before_name: String,
    pub after_name: String,
    pub unit: String,
    pub tolerance: f64,
    pub down: Vec<String>,
    /// Scenarios on both sides.
    pub matched: usize,
    /// Worst increase first (shortfall, then stranded, then name).
    pub worse: Vec<Change>,
    /// Largest decrease first.
    pub better: Vec<Change>,
    /// Matched scenarios short after (as printed) and not before, largest shortfall after
    /// first, then by name. They may also be in `worse`.
    pub new_short: Vec<Change>,
    /// Newly short scenarios do not fail the comparison (`--allow-new-short`).
    pub allow_new_short: bool,
    /// Only after (they name an element the change adds), worst shortfall first.
    pub added_risks: Vec<OneSided>,
    /// Only before (they name an element the change removes), worst shortfall first.
    pub removed_risks: Vec<OneSided>,
    /// Element names (`link:X`, `site:Y`, `group:Z`) only after / only before, sorted.
    pub elements_added: Vec<String>,
    pub elements_removed: Vec<String>,
    /// What the change does to the file, field by field ([`crate::model::diff::edits`]).
    pub file_changes: Vec<crate::model::diff::Edit>,
    /// `--headroom`: headroom lost and gained per matched scenario, both sides' headroom
    /// and the `--min-headroom` gate on AFTER (set by the command; `None` from
    /// [`compare`]).
    pub headroom: Option<crate::headroom::Comparison>,
    /// Either file lists `functions` (service chains): the reports carry the chain model's
    /// caution.
    pub chains: bool,
}

impl Comparison {
    /// Whether the change passes: no scenario got worse beyond the tolerance, none is
    /// newly short (unless those are allowed), and AFTER's headroom meets `--min-headroom`
    /// when given (headroom lost is reported, it does not fail the change by itself).
    pub fn passed(&self) -> bool {
        self.worse.is_empty()
            && (self.allow_new_short || self.new_short.is_empty())
            && self
                .headroom
                .as_ref()
                .is_none_or(crate::headroom::Comparison::passed)
    }
}

fn element_names(net: &Network) -> Vec<String> {
    let mut v: Vec<String> = scenario::elements(net, Kinds::ALL)
        .iter()
        .map(|e| e.name(net))
        .collect();
    v.sort();
    v
}

fn one_sided(audit: &Audit, only: &[usize]) -> Vec<OneSided> {
    let mut v: Vec<OneSided> = only
        .iter()
        .map(|&i| OneSided {
            failed: audit.scenarios[i].failed.clone(),
            matrix: audit.scenarios[i]
                .matrix_name
                .as_deref()
                .map(str::to_string),
            values: Values::of(audit.eval(i)),
        })
        .collect();
    v.sort_by(|a, b| {
        b.values
            .shortfall
            .total_cmp(&a.values.shortfall)
            .then(b.values.stranded.total_cmp(&a.values.stranded))
            .then(a.failed.len().cmp(&b.failed.len()))
            .then_with(|| a.failed.cmp(&b.failed))
            .then_with(|| a.matrix.cmp(&b.matrix))
    });
    v
}

/// The matrix a scenario is matched by in [`compare`]: its id, `base` without matrices.
fn matrix_key(s: &crate::scenario::Scenario) -> &str {
    s.matrix_name
        .as_deref()
        .unwrap_or(crate::model::BASE_MATRIX)
}

/// Compares two audited sides. Scenarios are matched by their sorted `failed` lists
/// (hash map, O(n) expected), then sorted: O(n log n) for n scenarios. Deterministic:
/// every order ends on the scenario's names. `allow_new_short` is carried into the result
/// ([`Comparison::passed`]).
pub fn compare(
    before: (&Network, &Audit),
    after: (&Network, &Audit),
    tolerance: f64,
    down: Vec<String>,
    allow_new_short: bool,
) -> Comparison {
    let (nb, ab) = before;
    let (na, aa) = after;
    // Scenarios are matched by their failed names and their traffic matrix (`base` for a
    // file without `matrices`, so a file that gains or loses matrices still matches its
    // base pairs; a matrix one side lacks gives added or removed pairs).
    let index: HashMap<(&[String], &str), usize> = ab
        .scenarios
        .iter()
        .enumerate()
        .map(|(i, s)| ((&s.failed[..], matrix_key(s)), i))
        .collect();
    let mut seen_before = vec![false; ab.scenarios.len()];
    let mut only_after = Vec::new();
    let (mut worse, mut better, mut new_short) = (Vec::new(), Vec::new(), Vec::new());
    let mut matched = 0;
    for (j, s) in aa.scenarios.iter().enumerate() {
        let Some(&i) = index.get(&(&s.failed[..], matrix_key(s))) else {
            only_after.push(j);
            continue;
        };
        seen_before[i] = true;
        matched += 1;
        let c = Change::new(
            s.failed.clone(),
            s.matrix_name
                .as_deref()
                .or(ab.scenarios[i].matrix_name.as_deref())
                .map(str::to_string),
            Values::of(ab.eval(i)),
            Values::of(aa.eval(j)),
        );
        if displayed(c.before.shortfall) == 0.0 && displayed(c.after.shortfall) > 0.0 {
            new_short.push(c.clone());
        }
        if c.delta_shortfall > tolerance || c.delta_stranded > tolerance {
            worse.push(c);
        } else if c.delta_shortfall < -tolerance || c.delta_stranded < -tolerance {
            better.push(c);
        }
    }
    let only_before: Vec<usize> = (0..ab.scenarios.len())
        .filter(|&i| !seen_before[i])
        .collect();
    worse.sort_by(|a, b| {
        b.delta_shortfall
            .total_cmp(&a.delta_shortfall)
            .then(b.delta_stranded.total_cmp(&a.delta_stranded))
            .then_with(|| a.failed.cmp(&b.failed))
            .then_with(|| a.matrix.cmp(&b.matrix))
    });
    better.sort_by(|a, b| {
        a.delta_shortfall
            .total_cmp(&b.delta_shortfall)
            .then(a.delta_stranded.total_cmp(&b.delta_stranded))
            .then_with(|| a.failed.cmp(&b.failed))
            .then_with(|| a.matrix.cmp(&b.matrix))
    });
    new_short.sort_by(|a: &Change, b: &Change| {
        b.after
            .shortfall
            .total_cmp(&a.after.shortfall)
            .then(a.failed.len().cmp(&b.failed.len()))
            .then_with(|| a.failed.cmp(&b.failed))
            .then_with(|| a.matrix.cmp(&b.matrix))
    });
    let (eb, ea) = (element_names(nb), element_names(na));
    Comparison {
        chains: nb.chains.is_some() || na.chains.is_some(),
        before_name: nb.name.clone(),
        after_name: na.name.clone(),
        unit: na.unit.clone(),
        tolerance,
        down,
        matched,
        worse,
        better,
        new_short,
        allow_new_short,
        added_risks: one_sided(aa, &only_after),
        removed_risks: one_sided(ab, &only_before),
        elements_added: ea
            .iter()
            .filter(|n| eb.binary_search(n).is_err())
            .cloned()
            .collect(),
        elements_removed: eb
            .iter()
            .filter(|n| ea.binary_search(n).is_err())
            .cloned()
            .collect(),
        file_changes: crate::model::diff::edits(nb, na),
        headroom: None,
    }
}

/// Refuses two sides whose amounts are in different traffic units (the file's `unit`
/// label, compared exactly; a file without one is in `units`).
pub fn same_unit(before: &Network, after: &Network) -> Result<()> {
    if before.unit == after.unit {
        return Ok(());
    }
    Err(Error::Usage(format!(
        "BEFORE is in {:?} and AFTER in {:?}: amounts in different units cannot be compared; \
         convert one file (every capacity, processing, volume and required amount) and give \
         both the same `unit`",
        before.unit, after.unit
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn values(shortfall: f64, stranded: f64) -> Values {
        Values {
            served_required: 0.0,
            shortfall,
            stranded,
            throughput: 0.0,
        }
    }

    /// Hand check (common practice, no source) of "compared at the printed precision":
    /// 14.3331 and 14.3334 both print 14.333 (3 decimals), so no change; 14.333 → 14.334
    /// is a change of exactly 0.001, which a tolerance of 0.001 allows and 0 does not.
    #[test]
    fn deltas_are_taken_as_printed() {
        let c = Change::new(vec![], None, values(14.3331, 0.0), values(14.3334, 0.0));
        assert_eq!(c.delta_shortfall, 0.0);
        let c = Change::new(vec![], None, values(14.333, 2.0), values(14.334, 1.0));
        assert_eq!(c.delta_shortfall, 0.001);
        assert_eq!(c.delta_stranded, -1.0);
        assert!(c.delta_shortfall > 0.0);
        assert!(c.delta_shortfall <= 0.001);
    }
}
