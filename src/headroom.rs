//! Growth headroom of an audit (`--headroom`; `network-format.md`, "Growth headroom"): how
//! far required demand can grow, every surviving demand alike, before a scenario is short.
//!
//! Per distinct outage the factor λ comes from [`crate::solve::concurrent::headroom`]
//! (best re-route: the maximum concurrent flow of the two-layer model; for a file with
//! `functions`, [`crate::solve::chainwalk::headroom`] on the layered model) or, under
//! `--routing nearest|steered`, from [`crate::routing::headroom`] (routes fixed). Each is
//! solved once per distinct outage, in parallel ([`audit::par_map`]), after the audit's
//! evaluations; under the best re-route each outage starts from its matrix's baseline
//! answer (the walk engines' columns). The results depend only on the network, the
//! outage and the baseline, so the thread count changes nothing.
//!
//! The headroom of the audit is the least λ over its scenarios ([`Least`]); ties go to the
//! scenario first in the audit's worst-first order ([`rank::worst_first`]). A scenario with
//! no surviving required demand has no value and does not take part; an audit where no
//! scenario has a value has none. An unproven λ is its proven lower bound, so headroom is
//! never overstated.

use crate::audit::{self, Audit, RunOptions, ScenarioId};
use crate::error::Result;
use crate::model::Network;
use crate::numbers::{displayed, file_num, num};
use crate::rank;
use crate::routing;
use crate::scenario::{Outage, Scenario};
use crate::solve::Surviving;
use crate::solve::concurrent;
pub use crate::solve::concurrent::Headroom;

/// The headroom of one outage: under the best re-route when `routing` is `None`, else
/// under that routing model with its routes fixed. Cost: one verified LP (best re-route,
/// steered) or one pass over the nearest routes.
pub fn of_outage(
    net: &Network,
    outage: &Outage,
    routing: Option<&routing::Model>,
) -> Result<Headroom> {
    match routing {
        None if net.chains.is_some() => crate::solve::chainwalk::headroom::headroom(net, outage),
        None => crate::solve::concurrent::headroom(net, outage),
        Some(model) => routing::headroom::of_outage(model, net, outage),
    }
}

/// The least headroom over an audit's scenarios, with the scenario that sets it.
#[derive(Debug, Clone, PartialEq)]
pub struct Least {
    /// The least λ (its proven lower bound when unproven); `None` when no scenario has
    /// surviving required demand.
    pub value: Option<f64>,
    /// The scenario (index into `audit.scenarios`) that sets it: the first in worst-first
    /// order among those with the least value as written to files ([`file_num`]).
    pub scenario: Option<usize>,
    /// Whether that scenario's λ is proven (true when there is no value).
    pub proven: bool,
}

/// Everything `--headroom` adds to an audit.
#[derive(Debug, Clone)]
pub struct AuditHeadroom {
    /// Per outage of the audit (index with `audit.outage_of[i]`).
    pub per_outage: Vec<Headroom>,
    /// The baseline's (the `--down` state, else the intact network); not a scenario, so
    /// not in [`AuditHeadroom::least`].
    pub baseline: Headroom,
    /// The audit's headroom.
    pub least: Least,
}

impl AuditHeadroom {
    /// Scenario `i`'s headroom (a [`ScenarioId`] or a plain index). O(1).
    pub fn of(&self, audit: &Audit, i: impl Into<ScenarioId>) -> &Headroom {
        &self.per_outage[audit.outage_of[i.into()]]
    }
}

/// Computes the headroom of every distinct outage of `audit` in parallel (interruptible
/// like every batch), the baseline's (reused when the baseline is one of the outages) and
/// the least. Cost: one [`of_outage`] per outage, plus the worst-first sort
/// (O(S log S) for S scenarios).
pub fn of_audit(
    net: &Network,
    audit: &Audit,
    routing: Option<&routing::Model>,
    opts: RunOptions,
) -> Result<AuditHeadroom> {
    let down = audit.scenarios.first().map_or(&[][..], |s| &s.down[..]);
    // With several traffic matrices, each matrix has its own baseline; the audit's
    // baseline headroom is the least over the matrices the run evaluates.
    let mut matrices: Vec<usize> = Vec::new();
    for s in &audit.scenarios {
        if !matrices.contains(&s.matrix) {
            matrices.push(s.matrix);
        }
    }
    if matrices.is_empty() {
        matrices.push(0);
    }
    let bases: Vec<Outage> = matrices
        .iter()
        .map(|&m| Scenario::baseline().with_down(down).under(m).outage(net))
        .collect();
    let (per_base, per_outage) = match routing {
        // Routes fixed: each outage cold.
        Some(_) => {
            let per_outage = audit::par_map(&audit.outages, opts, "headroom", |o| {
                of_outage(net, o, routing)
            })?;
            let mut per_base = Vec::with_capacity(bases.len());
            for base in &bases {
                per_base.push(match audit.outages.iter().position(|o| o == base) {
                    Some(k) => per_outage[k].clone(),
                    None => of_outage(net, base, routing)?,
                });
            }
            (per_base, per_outage)
        }
        // Service chains: the layered walk engine, from each baseline's optimum.
        None if net.chains.is_some() => warm(net, audit, &bases, opts, |n, view, parent| {
            let (h, cols, _) = crate::solve::chainwalk::headroom::headroom_walks(n, view, parent)?;
            Ok((h, cols))
        })?,
        None => warm(net, audit, &bases, opts, |n, view, parent| {
            let (h, cols, _) = concurrent::headroom_walks(n, view, parent)?;
            Ok((h, cols))
        })?,
    };
    let mut baseline: Option<Headroom> = None;
    for h in per_base {
        let lower = match (&baseline, h.value) {
            (None, _) => true,
            (Some(b), Some(v)) => b.value.is_none_or(|bv| v.total_cmp(&bv).is_lt()),
            (Some(_), None) => false,
        };
        if lower {
            baseline = Some(h);
        }
    }
    let baseline = baseline.expect("at least one matrix");
    let least = least(audit, &per_outage, &rank::worst_first(audit));
    Ok(AuditHeadroom {
        per_outage,
        baseline,
        least,
    })
}

/// The headroom of each matrix's baseline in `bases` (cold), then of every outage of
/// `audit` in parallel, each started from its matrix's baseline answer: `solve(net, view,
/// parent)` gives an outage's headroom and, when proven by walks, the columns that start
/// its children (the walk engine of files without `functions`, or the layered one of
/// service chains). Returns (per baseline, per outage). Cost: one `solve` per baseline and
/// per outage; the result does not depend on the thread count (each outage depends only on
/// the network, itself and its baseline).
fn warm<C: Sync + Send>(
    net: &Network,
    audit: &Audit,
    bases: &[Outage],
    opts: RunOptions,
    solve: impl Fn(&Network, &Surviving, Option<&C>) -> Result<(Headroom, Option<C>)> + Sync + Send,
) -> Result<(Vec<Headroom>, Vec<Headroom>)> {
    // Each matrix's baseline first: its columns start every outage of that matrix.
    let mut per_base = Vec::with_capacity(bases.len());
    let mut columns = Vec::with_capacity(bases.len());
    for base in bases {
        let view_net = net.view(base.matrix);
        let view = Surviving::new(view_net, base, None);
        let (h, cols) = solve(view_net, &view, None)?;
        per_base.push(h);
        columns.push(cols);
    }
    let per_outage = audit::par_map(&audit.outages, opts, "headroom", |o| {
        let k = bases
            .iter()
            .position(|b| b.matrix == o.matrix)
            .expect("every outage's matrix has a baseline");
        if *o == bases[k] {
            return Ok(per_base[k].clone());
        }
        let view_net = net.view(o.matrix);
        let view = Surviving::new(view_net, o, None);
        Ok(solve(view_net, &view, columns[k].as_ref())?.0)
    })?;
    Ok((per_base, per_outage))
}

/// The least headroom over the scenarios of `audit`, visiting them in `order` (worst
/// first) so that, among scenarios whose values are equal as written ([`file_num`]), the
/// first in that order sets it. O(S).
pub fn least(audit: &Audit, per_outage: &[Headroom], order: &[ScenarioId]) -> Least {
    let mut best: Option<(usize, f64)> = None;
    for &i in order {
        let Some(v) = per_outage[audit.outage_of[i]].value else {
            continue;
        };
        let v = file_num(v);
        if best.is_none_or(|(_, b)| v.total_cmp(&b).is_lt()) {
            best = Some((i.0, v));
        }
    }
    match best {
        Some((i, _)) => {
            let h = &per_outage[audit.outage_of[i]];
            Least {
                value: h.value,
                scenario: Some(i),
                proven: h.proven,
            }
        }
        None => Least {
            value: None,
            scenario: None,
            proven: true,
        },
    }
}

/// λ as a reader sees it: its percentage of required demand as [`num`] prints it, read
/// back as a factor (`1.24` for "124%"). Where the printed percentage would cross 100%
/// (λ just below 1 printing "100%"), the text shows "<100%" or ">100%" and this is λ
/// itself, so a value below 1 never reads as 1. O(1).
pub fn shown(lambda: f64) -> f64 {
    let p = crate::gate::displayed_fraction(lambda);
    if lambda.total_cmp(&1.0) == p.total_cmp(&1.0) {
        p
    } else {
        lambda
    }
}

/// λ as a percentage of required demand for people: `124%`, `83.5%`, `0%`; `<100%` or
/// `>100%` where rounding to [`num`]'s digits would print exactly 100% for a λ that is
/// not 1. O(1).
pub fn percent(lambda: f64) -> String {
    let text = num(100.0 * lambda);
    if text == "100" && lambda < 1.0 {
        "<100%".into()
    } else if text == "100" && lambda > 1.0 {
        ">100%".into()
    } else {
        format!("{text}%")
    }
}

/// One matched scenario whose headroom changed (as printed) between two audits.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    pub failed: Vec<String>,
    pub before: f64,
    pub after: f64,
    /// `shown(after) − shown(before)` in percentage points, as printed.
    pub delta_points: f64,
}

/// The headroom part of a comparison (`compare --headroom`).
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// Each side's audit headroom and the failed list of the scenario that sets it.
    pub before: (Option<f64>, Option<Vec<String>>, bool),
    pub after: (Option<f64>, Option<Vec<String>>, bool),
    /// Matched scenarios whose headroom fell, most lost first (then by name).
    pub lost: Vec<Change>,
    /// Matched scenarios whose headroom rose, most gained first (then by name).
    pub gained: Vec<Change>,
    /// `--min-headroom`: the gate on the AFTER side's headroom.
    pub gate: Option<crate::gate::GateResult>,
}

impl Comparison {
    /// Whether the `--min-headroom` gate (if any) passed; lost headroom alone is reported,
    /// not failed.
    pub fn passed(&self) -> bool {
        self.gate.is_none_or(|g| g.passed)
    }
}

/// The headroom changes of the scenarios both audits hold (matched by their failed
/// lists), compared as printed ([`shown`], in percentage points of required): a scenario
/// with no value on either side is not compared. O(S log S).
pub fn compare(
    before: (&Audit, &AuditHeadroom),
    after: (&Audit, &AuditHeadroom),
    gate: Option<crate::gate::GateResult>,
) -> Comparison {
    let (ab, hb) = before;
    let (aa, ha) = after;
    let index: std::collections::HashMap<&[String], usize> = ab
        .scenarios
        .iter()
        .enumerate()
        .map(|(i, s)| (&s.failed[..], i))
        .collect();
    let (mut lost, mut gained) = (Vec::new(), Vec::new());
    for (j, s) in aa.scenarios.iter().enumerate() {
        let Some(&i) = index.get(&s.failed[..]) else {
            continue;
        };
        let (Some(b), Some(a)) = (hb.of(ab, i).value, ha.of(aa, j).value) else {
            continue;
        };
        let delta_points = displayed(100.0 * shown(a) - 100.0 * shown(b));
        let c = Change {
            failed: s.failed.clone(),
            before: b,
            after: a,
            delta_points,
        };
        if delta_points < 0.0 {
            lost.push(c);
        } else if delta_points > 0.0 {
            gained.push(c);
        }
    }
    lost.sort_by(|x, y| {
        x.delta_points
            .total_cmp(&y.delta_points)
            .then_with(|| x.failed.cmp(&y.failed))
    });
    gained.sort_by(|x, y| {
        y.delta_points
            .total_cmp(&x.delta_points)
            .then_with(|| x.failed.cmp(&y.failed))
    });
    let side = |a: &Audit, h: &AuditHeadroom| {
        (
            h.least.value,
            h.least.scenario.map(|i| a.scenarios[i].failed.clone()),
            h.least.proven,
        )
    };
    Comparison {
        before: side(ab, hb),
        after: side(aa, ha),
        lost,
        gained,
        gate,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked printing: 1.24 prints 124% and reads back as 1.24; 0.99999999 would
    /// print 100% and is shown as <100% (read back as itself, so still below 1);
    /// 1.00000001 likewise as >100%; exactly 1 is 100%.
    #[test]
    fn percentages_never_cross_one() {
        assert_eq!(percent(1.24), "124%");
        assert_eq!(shown(1.24), 1.24);
        assert_eq!(percent(0.835), "83.5%");
        assert_eq!(percent(0.99999999), "<100%");
        assert!(shown(0.99999999) < 1.0);
        assert_eq!(percent(1.00000001), ">100%");
        assert!(shown(1.00000001) > 1.0);
        assert_eq!(percent(1.0), "100%");
        assert_eq!(shown(1.0), 1.0);
        assert_eq!(percent(0.0), "0%");
    }
}
