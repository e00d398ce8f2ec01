//! Failure scenarios: which elements fail, what that takes out of the network, and the
//! enumeration of every scenario up to a depth.
//!
//! A scenario is named by its failed elements (`link:ID`, `site:ID`, `group:NAME`). What
//! the solver sees is its [`Outage`]: the failed sites and the failed links, where a
//! failed site takes every incident link with it and a failed group every member link.
//! Scenarios with equal outages share one computation ([`dedup`]) but stay listed under
//! their own names.

use std::collections::HashMap;
use std::fmt;

use itertools::Itertools;

use crate::error::{Error, Result};
use crate::model::index::index_type;
use crate::model::strict::{FAIL_SEPARATOR, printable};
use crate::model::{LinkIdx, Network, SiteIdx};

index_type!(
    /// Index of a distinct outage of an audit: into [`crate::audit::Audit::outages`] and
    /// [`crate::audit::Audit::evaluations`], the journal's and the part files' line numbers. A plain
    /// `usize` in memory and in JSON (`#[repr(transparent)]`, `#[serde(transparent)]`).
    OutageId
);
index_type!(
    /// Index of a scenario of an audit: into [`crate::audit::Audit::scenarios`] and
    /// [`crate::audit::Audit::outage_of`]
    /// (several scenarios may share one [`OutageId`]). A plain `usize` in memory and in JSON.
    ScenarioId
);

/// One element that can fail.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Element {
    Link(LinkIdx),
    Site(SiteIdx),
    Group(usize),
}

impl Element {
    /// The contract name: `link:ID`, `site:ID` or `group:NAME`.
    pub fn name(&self, net: &Network) -> String {
        match *self {
            Element::Link(l) => format!("link:{}", net.links[l].id),
            Element::Site(s) => format!("site:{}", net.sites[s].id),
            Element::Group(g) => format!("group:{}", net.groups[g].name),
        }
    }

    /// Parses `link:ID`, `site:ID` or `group:NAME` against the network, exactly as
    /// written: nothing is trimmed (ids never begin or end with whitespace, see
    /// [`crate::model::strict::check_id`]). O(1) expected (hash lookup).
    pub fn parse(text: &str, net: &Network) -> Result<Element> {
        let shown = printable(text);
        let (kind, id) = text.split_once(':').ok_or_else(|| {
            Error::Usage(format!(
                "failed element \"{shown}\" must be written kind:id with kind link, site or group"
            ))
        })?;
        let found = match kind {
            "link" => net.link(id).map(Element::Link),
            "site" => net.site(id).map(Element::Site),
            "group" => net.group(id).map(Element::Group),
            _ => {
                return Err(Error::Usage(format!(
                    "failed element \"{shown}\": unknown kind \"{}\" (use link, site or group{})",
                    printable(kind),
                    space_hint(kind)
                )));
            }
        };
        found.ok_or_else(|| {
            Error::Usage(format!(
                "failed element \"{shown}\": no {kind} \"{}\"{}",
                printable(id),
                space_hint(id)
            ))
        })
    }

    /// Parses a `--fail` list: elements separated by [`FAIL_SEPARATOR`], each as
    /// [`Element::parse`] reads it. An empty element (two separators in a row, one at
    /// either end, an empty list) and an element named twice are refused: either would
    /// otherwise run a scenario other than the one written. Returns the elements in the
    /// order written. O(n) expected for n elements.
    pub fn parse_list(list: &str, net: &Network) -> Result<Vec<Element>> {
        Element::parse_list_for("--fail", list, net)
    }

    /// [`Element::parse_list`] with messages that name `flag` (`--fail`, `--down`).
    pub fn parse_list_for(flag: &str, list: &str, net: &Network) -> Result<Vec<Element>> {
        let mut elements: Vec<Element> = Vec::new();
        let mut seen: HashMap<Element, usize> = HashMap::new();
        for (i, part) in list.split(FAIL_SEPARATOR).enumerate() {
            if part.is_empty() {
                return Err(Error::Usage(format!(
                    "{flag}: element {} of \"{}\" is empty (write kind:id, separated by \
                     `{FAIL_SEPARATOR}` with nothing around it)",
                    i + 1,
                    printable(list)
                )));
            }
            let e = Element::parse(part, net).map_err(|e| match e {
                Error::Usage(m) if flag != "--fail" => Error::Usage(format!("{flag}: {m}")),
                other => other,
            })?;
            if let Some(first) = seen.insert(e, i) {
                return Err(Error::Usage(format!(
                    "{flag}: element {} \"{}\" repeats element {}; name each element once",
                    i + 1,
                    printable(part),
                    first + 1
                )));
            }
            elements.push(e);
        }
        Ok(elements)
    }
}

/// A hint for a name that begins or ends with whitespace, which no id does.
fn space_hint(name: &str) -> &'static str {
    if name.trim() != name {
        "; nothing is trimmed, and no id begins or ends with whitespace"
    } else {
        ""
    }
}

/// Which kinds of element a run fails.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Kinds {
    pub links: bool,
    pub sites: bool,
    pub groups: bool,
}

impl Kinds {
    pub const ALL: Kinds = Kinds {
        links: true,
        sites: true,
        groups: true,
    };

    /// Parses a comma-separated list such as `links,sites,groups`.
    pub fn parse(text: &str) -> Result<Kinds> {
        let mut k = Kinds {
            links: false,
            sites: false,
            groups: false,
        };
        for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            match part {
                "links" | "link" => k.links = true,
                "sites" | "site" => k.sites = true,
                "groups" | "group" => k.groups = true,
                other => {
                    return Err(Error::Usage(format!(
                        "--kinds: unknown kind {other:?} (use links, sites, groups)"
                    )));
                }
            }
        }
        if !(k.links || k.sites || k.groups) {
            return Err(Error::Usage("--kinds: name at least one kind".into()));
        }
        Ok(k)
    }
}

/// A named failure scenario: its elements sorted by their contract names.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Scenario {
    pub elements: Vec<Element>,
    /// Contract names of `elements`, sorted; empty for the baseline.
    pub failed: Vec<String>,
    /// Elements kept down in every scenario of the run (`--down`, a maintenance window):
    /// part of the outage, never of the name. Empty without `--down`.
    pub down: Vec<Element>,
    /// The traffic matrix the scenario is evaluated under (0: the file's `demands`,
    /// `base`; `m` ≥ 1: `matrices[m - 1]`). Part of the outage, never of the name.
    pub matrix: usize,
    /// The matrix's id when the run evaluates a file with `matrices` (then every shown
    /// name says which matrix: ` under matrix ID`); `None` otherwise.
    pub matrix_name: Option<std::sync::Arc<str>>,
}

impl Scenario {
    /// Builds a scenario from distinct elements; names are sorted lexicographically.
    pub fn new(net: &Network, elements: &[Element]) -> Scenario {
        let mut pairs: Vec<(String, Element)> =
            elements.iter().map(|e| (e.name(net), *e)).collect();
        pairs.sort();
        pairs.dedup();
        Scenario {
            failed: pairs.iter().map(|p| p.0.clone()).collect(),
            elements: pairs.into_iter().map(|p| p.1).collect(),
            down: Vec::new(),
            matrix: 0,
            matrix_name: None,
        }
    }

    pub fn baseline() -> Scenario {
        Scenario {
            elements: Vec::new(),
            failed: Vec::new(),
            down: Vec::new(),
            matrix: 0,
            matrix_name: None,
        }
    }

    /// The same scenario under traffic matrix `m` (see [`Scenario::matrix`]). O(1).
    pub fn under(mut self, m: usize) -> Scenario {
        self.matrix = m;
        self
    }

    /// The same scenario under matrix `m` of `net`, named by it when `net` has
    /// `matrices` ([`Scenario::display_name`] then says ` under matrix ID`). O(1).
    pub fn under_named(self, net: &Network, m: usize) -> Scenario {
        let mut s = self.under(m);
        if net.matrix_count() > 1 {
            s.matrix_name = Some(net.matrix_id(m).into());
        }
        s
    }

    /// The same scenario with `down` kept down as well (a maintenance window): the
    /// outage grows, the name does not. O(|down|).
    pub fn with_down(mut self, down: &[Element]) -> Scenario {
        self.down = down.to_vec();
        self
    }

    pub fn is_baseline(&self) -> bool {
        self.elements.is_empty()
    }

    /// What the scenario takes out of the network.
    pub fn outage(&self, net: &Network) -> Outage {
        let mut sites = Vec::new();
        let mut links = Vec::new();
        for e in self.elements.iter().chain(&self.down) {
            match *e {
                Element::Link(l) => links.push(l),
                Element::Site(s) => sites.push(s),
                Element::Group(g) => links.extend(&net.groups[g].links),
            }
        }
        sites.sort_unstable();
        sites.dedup();
        for (li, l) in net.links.iter().enumerate() {
            if sites.binary_search(&l.from).is_ok() || sites.binary_search(&l.to).is_ok() {
                links.push(LinkIdx(li));
            }
        }
        links.sort_unstable();
        links.dedup();
        Outage {
            sites,
            links,
            matrix: self.matrix,
        }
    }

    /// `failed` joined for display; `baseline` for the empty scenario; followed by
    /// ` under matrix ID` when the run names matrices.
    pub fn display_name(&self) -> String {
        match &self.matrix_name {
            Some(m) => format!("{} under matrix {m}", self.failed_name()),
            None => self.failed_name(),
        }
    }

    /// `failed` joined for display; `baseline` for the empty scenario (never the
    /// matrix).
    pub fn failed_name(&self) -> String {
        if self.failed.is_empty() {
            "baseline".into()
        } else {
            self.failed.join(" + ")
        }
    }
}

impl fmt::Display for Scenario {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.display_name())
    }
}

/// The failed sites and links of a scenario, both sorted and without repeats. A failed
/// site's incident links are always in `links`: two outages are equal exactly when the
/// network left standing is the same.
#[derive(Debug, Clone, PartialEq, Eq, Hash, Default)]
pub struct Outage {
    pub sites: Vec<SiteIdx>,
    pub links: Vec<LinkIdx>,
    /// The traffic matrix the outage is evaluated under ([`Network::view`]); 0 for the
    /// file's `demands`. Two outages under different matrices are different work.
    pub matrix: usize,
}

impl Outage {
    /// Nothing fails (the baseline).
    pub fn is_empty(&self) -> bool {
        self.sites.is_empty() && self.links.is_empty()
    }

    /// Per-site `true` when the site survives.
    pub fn site_alive(&self, net: &Network) -> Vec<bool> {
        let mut alive = vec![true; net.sites.len()];
        for &s in &self.sites {
            alive[s] = false;
        }
        alive
    }

    /// Per-link `true` when the link survives.
    pub fn link_alive(&self, net: &Network) -> Vec<bool> {
        let mut alive = vec![true; net.links.len()];
        for &l in &self.links {
            alive[l] = false;
        }
        alive
    }
}

/// The candidate elements of the chosen kinds, in file order: links, then sites, then
/// risk groups.
pub fn elements(net: &Network, kinds: Kinds) -> Vec<Element> {
    let mut out = Vec::new();
    if kinds.links {
        out.extend((0..net.links.len()).map(|l| Element::Link(LinkIdx(l))));
    }
    if kinds.sites {
        out.extend((0..net.sites.len()).map(|s| Element::Site(SiteIdx(s))));
    }
    if kinds.groups {
        out.extend((0..net.groups.len()).map(Element::Group));
    }
    out
}

/// Number of scenarios [`enumerate`] yields: 1 + Σ_{k=1..depth} C(n, k), saturating at
/// `u128::MAX` (callers only compare it with a limit).
pub fn count(n: usize, depth: usize) -> u128 {
    let mut total: u128 = 1;
    let mut c: u128 = 1;
    for k in 1..=depth.min(n) {
        // C(n, k) = C(n, k-1) · (n-k+1) / k, exact in integers; saturate on overflow.
        c = match c.checked_mul((n - k + 1) as u128) {
            Some(p) => p / k as u128,
            None => return u128::MAX,
        };
        total = total.saturating_add(c);
    }
    total
}

/// The baseline, then every set of 1..=depth distinct elements of the chosen kinds, by
/// size and then in [`elements`] order. Deterministic; O(count · depth).
pub fn enumerate(net: &Network, kinds: Kinds, depth: usize) -> Vec<Scenario> {
    enumerate_pool(net, &elements(net, kinds), depth, &[])
}

/// The pool of a run with `down` kept down: [`elements`] of the chosen kinds without the
/// elements already down (failing them again would change nothing). O(pool · |down|).
pub fn pool_without(net: &Network, kinds: Kinds, down: &[Element]) -> Vec<Element> {
    elements(net, kinds)
        .into_iter()
        .filter(|e| !down.contains(e))
        .collect()
}

/// The (down-state) baseline, then every set of 1..=depth distinct elements of `pool`, by
/// size and then in pool order, each with `down` kept down ([`Scenario::with_down`]).
/// Deterministic; O(count · (depth + |down|)).
pub fn enumerate_pool(
    net: &Network,
    pool: &[Element],
    depth: usize,
    down: &[Element],
) -> Vec<Scenario> {
    lazy_pool(net, pool.to_vec(), depth, down.to_vec()).collect()
}

/// [`enumerate`] as an iterator: yields the same scenarios in the same order, one at a
/// time, holding only the element pool and one combination (memory O(pool + depth),
/// whatever the count). Each item costs O(depth · log depth) plus its names.
pub fn lazy(net: &Network, kinds: Kinds, depth: usize) -> impl Iterator<Item = Scenario> + '_ {
    lazy_pool(net, elements(net, kinds), depth, Vec::new())
}

/// [`enumerate_pool`] as an iterator (see [`lazy`]).
pub fn lazy_pool(
    net: &Network,
    pool: Vec<Element>,
    depth: usize,
    down: Vec<Element>,
) -> impl Iterator<Item = Scenario> + '_ {
    let top = depth.min(pool.len());
    let first = Scenario::baseline().with_down(&down);
    std::iter::once(first).chain((1..=top).flat_map(move |k| {
        let down = down.clone();
        pool.clone()
            .into_iter()
            .combinations(k)
            .map(move |combo| Scenario::new(net, &combo).with_down(&down))
    }))
}

/// Groups scenarios by outage: returns the distinct outages (in first-seen order) and,
/// for each scenario, the index of its outage. Linear in the total scenario size.
pub fn dedup(net: &Network, scenarios: &[Scenario]) -> (Vec<Outage>, Vec<usize>) {
    let mut index: HashMap<Outage, usize> = HashMap::new();
    let mut outages = Vec::new();
    let mut of = Vec::with_capacity(scenarios.len());
    for s in scenarios {
        let o = s.outage(net);
        let next = outages.len();
        let i = *index.entry(o.clone()).or_insert(next);
        if i == next {
            outages.push(o);
        }
        of.push(i);
    }
    (outages, of)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn net() -> Network {
        Network::from_json(
            r#"{"sites":[{"id":"a"},{"id":"b"},{"id":"c"}],
            "links":[{"id":"ab","from":"a","to":"b","capacity":1,"risk_groups":["g"]},
                     {"id":"bc","from":"b","to":"c","capacity":1,"risk_groups":["g"]}],
            "demands":[]}"#,
        )
        .unwrap()
    }

    #[test]
    fn count_matches_enumeration() {
        let n = net();
        for depth in 0..4 {
            let all = enumerate(&n, Kinds::ALL, depth);
            assert_eq!(all.len() as u128, count(6, depth));
        }
        assert_eq!(count(142, 100), u128::MAX);
    }

    #[test]
    fn group_outage_equals_member_links() {
        let n = net();
        let g = Scenario::new(&n, &[Element::Group(0)]);
        let l = Scenario::new(&n, &[Element::Link(LinkIdx(1)), Element::Link(LinkIdx(0))]);
        assert_eq!(g.outage(&n), l.outage(&n));
        assert_eq!(l.failed, vec!["link:ab", "link:bc"]);
        let (outages, of) = dedup(&n, &[g, l, Scenario::baseline()]);
        assert_eq!(outages.len(), 2);
        assert_eq!(of, vec![0, 0, 1]);
    }

    #[test]
    fn site_takes_incident_links() {
        let n = net();
        let o = Scenario::new(&n, &[Element::Site(SiteIdx(1))]).outage(&n);
        assert_eq!(o.links, vec![LinkIdx(0), LinkIdx(1)]);
        assert_eq!(o.sites, vec![SiteIdx(1)]);
    }

    #[test]
    fn parse_names() {
        let n = net();
        assert_eq!(Element::parse("group:g", &n).unwrap(), Element::Group(0));
        assert!(Element::parse("link:zz", &n).is_err());
        assert!(Element::parse("ab", &n).is_err());
        assert!(Kinds::parse("links,bogus").is_err());
    }

    #[test]
    fn fail_lists_are_strict() {
        let n = net();
        assert_eq!(
            Element::parse_list("link:ab,site:c", &n).unwrap(),
            vec![Element::Link(LinkIdx(0)), Element::Site(SiteIdx(2))]
        );
        for bad in [
            "",
            ",",
            "link:ab,",
            ",link:ab",
            "link:ab,,site:c",
            "link:ab, site:c",
        ] {
            assert!(Element::parse_list(bad, &n).is_err(), "{bad:?} accepted");
        }
        let m = match Element::parse_list("site:c,link:ab,site:c", &n) {
            Err(Error::Usage(m)) => m,
            other => panic!("repeat accepted: {other:?}"),
        };
        assert!(m.contains("element 3") && m.contains("element 1"), "{m}");
    }
}
