//! Risk in numbers: scenario probabilities under independent element failures, the
//! expected shortfall over the enumerated scenarios, the probability of any shortfall and
//! the probability the chosen depth left unexamined.
//!
//! Model (the contract, "Failure probabilities"): every element of the enumerated pool is
//! down independently with its `failure_probability` p_e. The scenario that fails exactly
//! the set S of the pool has probability Π_{e∈S} p_e · Π_{e∉S} (1 − p_e). These events are
//! disjoint, so sums over scenarios are probabilities of unions. Elements without a
//! probability never fail for these sums (every scenario naming one has probability 0);
//! the report says which.

use crate::audit::Audit;
use crate::model::Network;
use crate::scenario::Element;

/// The model behind the figures, in words, for every report that shows them.
pub const ASSUMPTION: &str = "elements of the enumerated pool fail independently, each with \
its failure_probability; elements without one are treated as never failing";

/// How many of the most likely short scenarios the reports list.
pub const MOST_LIKELY_SHOWN: usize = 5;

/// The failure probability an element carries in the file, if any.
pub fn element_probability(net: &Network, e: Element) -> Option<f64> {
    match e {
        Element::Link(l) => net.links[l].failure_probability,
        Element::Site(s) => net.sites[s].failure_probability,
        Element::Group(g) => net.groups[g].failure_probability,
    }
}

/// The risk figures of one audit.
#[derive(Debug, Clone, PartialEq)]
pub struct Risk {
    /// Per scenario (audit order): the probability that exactly its elements fail.
    pub probability: Vec<f64>,
    /// Σ probability × shortfall over the enumerated scenarios (a lower bound on the
    /// expectation over all states: unexamined states only add).
    pub expected_shortfall: f64,
    /// `expected_shortfall + uncovered_probability × Σ required`: no state outside the
    /// enumeration can be short by more than all required demand.
    pub expected_shortfall_bound: f64,
    /// Σ probability over the scenarios with a shortfall.
    pub p_any_shortfall: f64,
    /// Σ probability over the enumerated scenarios.
    pub covered_probability: f64,
    /// 1 − covered, clamped to [0, 1]: the states the chosen depth did not look at.
    pub uncovered_probability: f64,
    /// Pool elements without a probability (treated as never failing).
    pub without_probability: Vec<Element>,
    /// Scenarios with a shortfall and a positive probability, most likely first (ties in
    /// audit order), at most [`MOST_LIKELY_SHOWN`].
    pub most_likely_short: Vec<usize>,
}

/// The risk of `audit`, whose scenarios are the baseline and sets of elements of `pool`
/// (their names never hold an element outside it). `None` when no pool element has a
/// probability: there is nothing to weigh.
///
/// Probabilities are computed in log space, ln P(S) = Σ_{pool} ln(1 − p) +
/// Σ_{S} (ln p − ln(1 − p)), so a large pool does not underflow the common factor before
/// the scenario's own factors are applied. O(|pool| + Σ |S| + n log n) for n scenarios;
/// sums run in audit order, so the result is deterministic.
pub fn assess(net: &Network, pool: &[Element], audit: &Audit) -> Option<Risk> {
    let p: Vec<Option<f64>> = pool.iter().map(|&e| element_probability(net, e)).collect();
    if p.iter().all(Option::is_none) {
        return None;
    }
    let ln_none: f64 = p.iter().flatten().map(|&q| (-q).ln_1p()).sum();
    let probability: Vec<f64> = audit
        .scenarios
        .iter()
        .map(|s| {
            let mut ln = ln_none;
            for e in &s.elements {
                match element_probability(net, *e) {
                    Some(q) if q > 0.0 => ln += q.ln() - (-q).ln_1p(),
                    _ => return 0.0,
                }
            }
            ln.exp()
        })
        .collect();
    // With several traffic matrices a scenario is listed once per matrix: the sums count
    // it once, at its worst matrix (largest shortfall, the first on ties), so the figures
    // are those of the worst hour. Without matrices every scenario counts.
    let mut worst_of: std::collections::HashMap<&[String], usize> = Default::default();
    for (i, s) in audit.scenarios.iter().enumerate() {
        let k = worst_of.entry(&s.failed[..]).or_insert(i);
        if audit.eval(i).shortfall > audit.eval(*k).shortfall {
            *k = i;
        }
    }
    let counted: Vec<bool> = audit
        .scenarios
        .iter()
        .enumerate()
        .map(|(i, s)| worst_of[&s.failed[..]] == i)
        .collect();
    let mut expected_shortfall = 0.0;
    let mut p_any_shortfall = 0.0;
    let mut covered = 0.0;
    for (i, &q) in probability.iter().enumerate() {
        if !counted[i] {
            continue;
        }
        let short = audit.eval(i).shortfall;
        covered += q;
        expected_shortfall += q * short;
        if short > 0.0 {
            p_any_shortfall += q;
        }
    }
    let uncovered = (1.0 - covered).clamp(0.0, 1.0);
    let mut most_likely_short: Vec<usize> = (0..probability.len())
        .filter(|&i| counted[i] && audit.eval(i).shortfall > 0.0 && probability[i] > 0.0)
        .collect();
    most_likely_short.sort_by(|&a, &b| probability[b].total_cmp(&probability[a]).then(a.cmp(&b)));
    most_likely_short.truncate(MOST_LIKELY_SHOWN);
    Some(Risk {
        expected_shortfall,
        expected_shortfall_bound: expected_shortfall + uncovered * net.total_required(),
        p_any_shortfall: p_any_shortfall.min(1.0),
        covered_probability: covered.min(1.0),
        uncovered_probability: uncovered,
        without_probability: pool
            .iter()
            .zip(&p)
            .filter(|(_, q)| q.is_none())
            .map(|(e, _)| *e)
            .collect(),
        most_likely_short,
        probability,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scenario::{self, Kinds};

    /// A path a – b – c – d; ab and bc carry probabilities, cd none; one demand a→b of 1
    /// unit, processed at a.
    fn net() -> Network {
        Network::from_json(
            r#"{"sites":[{"id":"a","processing":5},{"id":"b"},{"id":"c"},{"id":"d"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":5,"failure_probability":0.1},
                     {"id":"bc","from":"b","to":"c","capacity":5,"failure_probability":0.2},
                     {"id":"cd","from":"c","to":"d","capacity":5}],
            "demands":[{"from":"a","to":"b","volume":1}]}"#,
        )
        .unwrap()
    }

    /// Hand computation (common practice, no source): pool {ab 0.1, bc 0.2, cd none}.
    /// P(baseline) = 0.9 · 0.8 = 0.72; P(ab only) = 0.1 · 0.8 = 0.08; P(bc only) =
    /// 0.9 · 0.2 = 0.18; P(cd only) = 0 (no probability); at depth 1 the covered mass is
    /// 0.98 and the unexamined 0.02 (= P(ab and bc)). Only link:ab cuts a→b (1 unit short),
    /// so the expected shortfall and the probability of any shortfall are both 0.08; the
    /// bound adds 0.02 × Σ required (1).
    #[test]
    fn probabilities_by_hand() {
        let n = net();
        let pool = scenario::elements(&n, Kinds::parse("links").unwrap());
        let scenarios = scenario::enumerate(&n, Kinds::parse("links").unwrap(), 1);
        let audit = crate::audit::run(&n, scenarios, Default::default()).unwrap();
        let r = assess(&n, &pool, &audit).unwrap();
        let want = [0.72, 0.08, 0.18, 0.0];
        for (got, want) in r.probability.iter().zip(want) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        assert!((r.uncovered_probability - 0.02).abs() < 1e-12);
        assert_eq!(r.without_probability, vec![Element::Link(2.into())]);
        assert!((r.p_any_shortfall - 0.08).abs() < 1e-9);
        assert!((r.expected_shortfall - 0.08).abs() < 1e-9);
        assert!((r.expected_shortfall_bound - 0.10).abs() < 1e-9);
        assert_eq!(r.most_likely_short, vec![1]);
    }

    #[test]
    fn no_probabilities_no_risk() {
        let n = Network::from_json(
            r#"{"sites":[{"id":"a","processing":1},{"id":"b"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1}],"demands":[]}"#,
        )
        .unwrap();
        let pool = scenario::elements(&n, Kinds::ALL);
        let audit = crate::audit::run(
            &n,
            scenario::enumerate(&n, Kinds::ALL, 1),
            Default::default(),
        )
        .unwrap();
        assert!(assess(&n, &pool, &audit).is_none());
    }
}
