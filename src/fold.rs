//! Folding equivalent scenarios: at depth ≥ 2 many scenarios take out exactly the same
//! network as a smaller one (`group:west + link:ab` with `ab` in `west` is `group:west`).
//! They share one computation already ([`crate::scenario::dedup`]); the reports list
//! them once, under the smallest, with a count of the equivalents folded into it.

use crate::audit::{Audit, ScenarioId};

/// What folding does to an audit's scenario list.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Folding {
    /// Per scenario: `Some(r)` when it is folded into scenario `r`, the first (in list
    /// order) of the scenarios with the fewest elements among those with the same outage;
    /// only scenarios with strictly more elements than `r` are folded.
    pub into: Vec<Option<ScenarioId>>,
    /// Per scenario (index with a [`ScenarioId`]): how many scenarios are folded into it.
    pub equivalents: Vec<usize>,
}

impl Folding {
    /// Folds `audit`'s scenarios. O(n) for n scenarios.
    ///
    /// Invariant: a scenario `r` that others fold into is never folded itself, and shares
    /// their outage, so every number reported for `r` holds for each of them.
    pub fn of(audit: &Audit) -> Folding {
        // Per outage: its smallest scenario so far.
        let mut smallest: Vec<Option<ScenarioId>> = vec![None; audit.outages.len()];
        for (i, s) in audit.scenarios.iter().enumerate() {
            let (i, k) = (ScenarioId(i), audit.outage_of[i]);
            match smallest[k] {
                Some(r) if audit.scenarios[r].elements.len() <= s.elements.len() => {}
                _ => smallest[k] = Some(i),
            }
        }
        let mut into = vec![None; audit.scenarios.len()];
        let mut equivalents = vec![0; audit.scenarios.len()];
        for (i, s) in audit.scenarios.iter().enumerate() {
            let i = ScenarioId(i);
            let r = smallest[audit.outage_of[i]].expect("every outage has a scenario");
            if audit.scenarios[r].elements.len() < s.elements.len() {
                into[i] = Some(r);
                equivalents[r] += 1;
            }
        }
        Folding { into, equivalents }
    }

    /// Number of folded scenarios.
    pub fn folded(&self) -> usize {
        self.into.iter().filter(|r| r.is_some()).count()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::Network;
    use crate::scenario::{self, Kinds};

    /// Hand check (common practice, no source): path a – b – c, links ab and bc, group g =
    /// {ab}. At depth 2 over links and groups the scenarios are: baseline, ab, bc, g,
    /// ab+bc, ab+g, bc+g. `group:g` has the outage of `link:ab` but the same size, so it is
    /// not folded; `ab+g` equals `ab` (folded into it); `bc+g` equals `ab+bc` (same size 2,
    /// not folded).
    #[test]
    fn folds_into_strictly_smaller() {
        let n = Network::from_json(
            r#"{"sites":[{"id":"a"},{"id":"b"},{"id":"c"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1,"risk_groups":["g"]},
                     {"id":"bc","from":"b","to":"c","capacity":1}],"demands":[]}"#,
        )
        .unwrap();
        let kinds = Kinds::parse("links,groups").unwrap();
        let audit =
            crate::audit::run(&n, scenario::enumerate(&n, kinds, 2), Default::default()).unwrap();
        let names: Vec<String> = audit.scenarios.iter().map(|s| s.display_name()).collect();
        let f = Folding::of(&audit);
        let at = |name: &str| ScenarioId(names.iter().position(|n| n == name).unwrap());
        assert_eq!(f.into[at("group:g + link:ab")], Some(at("link:ab")));
        assert_eq!(f.into[at("group:g")], None);
        assert_eq!(f.into[at("group:g + link:bc")], None);
        assert_eq!(f.equivalents[at("link:ab")], 1);
        assert_eq!(f.folded(), 1);
    }
}
