//! The surviving network of one outage: the single view that the flow LP
//! ([`super::flow`]), the dual certificate ([`super::certify`]) and the verifier
//! ([`super::verify`]) all read, so they can never disagree on what is left standing.
//!
//! Rules (the contract's semantics): a failed site takes its processing and every incident
//! link; a failed link (or a member of a failed risk group) carries nothing; an arc whose
//! capacity is 0 carries nothing either, so it is *not usable* here — for flow, for the
//! certificate's shortest walks, and for reachability. A site can process when it survives
//! and has processing capacity (or an added-processing variable in an expansion model).
//!
//! Building the view is O(sites + links + demands).

use std::collections::VecDeque;
use std::sync::OnceLock;

use crate::model::Network;
use crate::scenario::Outage;

/// Why a surviving demand cannot be served at all.
#[derive(
    Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, serde::Serialize, serde::Deserialize,
)]
pub enum Unservable {
    /// No usable walk joins its origin to its destination.
    NoPath,
    /// Walks exist, but none passes through a site that can process.
    NoProcessing,
}

/// What is left of a network under one outage.
#[derive(Debug, Clone)]
pub struct Surviving {
    /// Per site: survives the outage.
    pub site_alive: Vec<bool>,
    /// Per arc (index into `Network::arcs`): the link survives and the capacity is > 0.
    pub arc_usable: Vec<bool>,
    /// The usable arcs, in arc order.
    pub arcs: Vec<usize>,
    /// Per site: survives and may process (capacity > 0, or an added-processing option).
    pub can_process: Vec<bool>,
    /// Per site: out-neighbours over usable arcs (with repeats for parallel arcs).
    pub fwd: Vec<Vec<usize>>,
    /// Per site: in-neighbours over usable arcs.
    pub back: Vec<Vec<usize>>,
    /// The part of the first standing site when it is closed both ways (computed on first
    /// use; see [`Self::closed_part`]).
    closed: OnceLock<Option<Vec<bool>>>,
}

impl Surviving {
    /// The view of `net` under `outage`. `expandable[v]`, when given, lets site `v` process
    /// even with capacity 0 (an expansion model's added-processing variable).
    pub fn new(net: &Network, outage: &Outage, expandable: Option<&[bool]>) -> Surviving {
        // `net` is the outage's matrix view (callers resolve `Network::view` first): the
        // demands read beside this view must be the matrix's.
        debug_assert!(
            outage.matrix == 0 || net.matrices.is_empty(),
            "an outage under matrix {} read against the base network",
            outage.matrix
        );
        let n = net.sites.len();
        let site_alive = outage.site_alive(net);
        let link_alive = outage.link_alive(net);
        let arc_usable: Vec<bool> = net
            .arcs
            .iter()
            .map(|a| link_alive[a.link] && a.capacity > 0.0)
            .collect();
        let arcs: Vec<usize> = (0..net.arcs.len()).filter(|&a| arc_usable[a]).collect();
        let can_process = (0..n)
            .map(|v| {
                site_alive[v]
                    && (net.sites[v].processing > 0.0
                        || expandable.is_some_and(|e| e.get(v).copied().unwrap_or(false)))
            })
            .collect();
        let mut fwd = vec![Vec::new(); n];
        let mut back = vec![Vec::new(); n];
        for &a in &arcs {
            fwd[net.arcs[a].from].push(net.arcs[a].to.0);
            back[net.arcs[a].to].push(net.arcs[a].from.0);
        }
        Surviving {
            site_alive,
            arc_usable,
            arcs,
            can_process,
            fwd,
            back,
            closed: OnceLock::new(),
        }
    }

    /// Whether demand `d` has both endpoint sites standing.
    pub fn demand_alive(&self, net: &Network, d: usize) -> bool {
        let dem = &net.demands[d];
        self.site_alive[dem.from] && self.site_alive[dem.to]
    }

    /// The sites reachable from the first standing site, when exactly those sites also
    /// reach it: then they are one strongly connected part that no usable arc leaves or
    /// enters, so from any nonempty set of starts inside it the sites reachable (forward or
    /// backward) are the part itself. That is the usual case (a network that stays
    /// connected after the outage), where [`Self::reach_from`] and [`Self::reach_to`]
    /// answer without a search. Two searches, O(sites + arcs), on first use; `None` when
    /// no site stands or the condition fails.
    fn closed_part(&self) -> Option<&[bool]> {
        self.closed
            .get_or_init(|| {
                let x = self.site_alive.iter().position(|&a| a)?;
                let from = reach(&self.fwd, [x]);
                (from == reach(&self.back, [x])).then_some(from)
            })
            .as_deref()
    }

    /// Sites reachable from `starts` over usable arcs (forward). O(sites + arcs); O(sites)
    /// when every start lies in the first standing site's strongly connected part and
    /// that part is closed both ways (no usable arc leaves or enters it: the usual case of
    /// a network that stays connected), the part found by two searches on first use.
    pub fn reach_from(&self, starts: impl IntoIterator<Item = usize>) -> Vec<bool> {
        self.reach_over(&self.fwd, starts)
    }

    /// Sites from which one of `targets` is reachable over usable arcs. O(sites + arcs);
    /// O(sites) when every target lies in the closed part.
    pub fn reach_to(&self, targets: impl IntoIterator<Item = usize>) -> Vec<bool> {
        self.reach_over(&self.back, targets)
    }

    /// [`reach`] over `adj` (this view's forward or backward lists), answered by the closed
    /// part when every start lies in it.
    fn reach_over(&self, adj: &[Vec<usize>], starts: impl IntoIterator<Item = usize>) -> Vec<bool> {
        let starts: Vec<usize> = starts.into_iter().collect();
        if let Some(part) = self.closed_part()
            && !starts.is_empty()
            && starts.iter().all(|&s| part[s])
        {
            return part.to_vec();
        }
        reach(adj, starts)
    }

    /// Per demand: `Some(reason)` when the demand survives, has something to serve
    /// (`bound[d] > 0`) and no walk through a processing site can serve it; `None`
    /// otherwise. A demand is served through processing site `v` when its origin reaches
    /// `v` and `v` reaches its destination: two searches per processing site decide every
    /// demand, and only the unservable ones need a search from their origin (no path, or
    /// no processing reachable). O((processing sites + unservable origins) · (sites +
    /// arcs) + demands · processing sites).
    pub fn unservable(&self, net: &Network, bound: &[f64]) -> Vec<Option<Unservable>> {
        let n = net.sites.len();
        let procs: Vec<usize> = (0..n).filter(|&v| self.can_process[v]).collect();
        let into: Vec<Vec<bool>> = procs.iter().map(|&v| self.reach_to([v])).collect();
        let out: Vec<Vec<bool>> = procs.iter().map(|&v| self.reach_from([v])).collect();
        let mut from_cache: Vec<Option<Vec<bool>>> = vec![None; n];
        (0..net.demands.len())
            .map(|d| {
                let dem = &net.demands[d];
                if !self.demand_alive(net, d) || bound[d] <= 0.0 {
                    return None;
                }
                if (0..procs.len()).any(|i| into[i][dem.from] && out[i][dem.to]) {
                    return None;
                }
                let from =
                    from_cache[dem.from].get_or_insert_with(|| self.reach_from([dem.from.0]));
                Some(if from[dem.to] {
                    Unservable::NoProcessing
                } else {
                    Unservable::NoPath
                })
            })
            .collect()
    }

    /// [`Self::unservable`] by one search from each origin and to each destination: the
    /// definition, kept as the check of the faster one. O(sources · (sites + arcs)).
    pub fn unservable_by_ends(&self, net: &Network, bound: &[f64]) -> Vec<Option<Unservable>> {
        let n = net.sites.len();
        let mut from_cache: Vec<Option<Vec<bool>>> = vec![None; n];
        let mut to_cache: Vec<Option<Vec<bool>>> = vec![None; n];
        (0..net.demands.len())
            .map(|d| {
                let dem = &net.demands[d];
                if !self.demand_alive(net, d) || bound[d] <= 0.0 {
                    return None;
                }
                let from =
                    from_cache[dem.from].get_or_insert_with(|| self.reach_from([dem.from.0]));
                if !from[dem.to] {
                    return Some(Unservable::NoPath);
                }
                let from = from.clone();
                let to = to_cache[dem.to].get_or_insert_with(|| self.reach_to([dem.to.0]));
                let processed = (0..n).any(|v| self.can_process[v] && from[v] && to[v]);
                (!processed).then_some(Unservable::NoProcessing)
            })
            .collect()
    }
}

/// Breadth-first reachability over `adj` from all `starts`. O(nodes + arcs).
pub fn reach(adj: &[Vec<usize>], starts: impl IntoIterator<Item = usize>) -> Vec<bool> {
    let mut seen = vec![false; adj.len()];
    let mut queue = VecDeque::new();
    for s in starts {
        if !seen[s] {
            seen[s] = true;
            queue.push_back(s);
        }
    }
    while let Some(u) = queue.pop_front() {
        for &v in &adj[u] {
            if !seen[v] {
                seen[v] = true;
                queue.push_back(v);
            }
        }
    }
    seen
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::test_net;
    use crate::scenario::{Element, Scenario};

    /// The closed-part shortcut answers exactly as the plain search ([`reach`], the
    /// definition): on a hand-built 8-site network with a one-way spur (so some outages
    /// leave a part that others cannot reach back) and a link of capacity 0, for every
    /// outage of at most two links or sites, every single start and a pair of starts,
    /// forward and backward. Both kinds of outage occur: ones whose standing sites stay
    /// one closed part and ones where they do not.
    #[test]
    fn shortcut_agrees_with_the_plain_search() {
        let n = test_net(
            r#"{"sites":[{"id":"a","processing":5},{"id":"b"},{"id":"c"},{"id":"d"},
                         {"id":"e","processing":5},{"id":"f"},{"id":"g"},{"id":"h"}],
                "links":[{"id":"ab","from":"a","to":"b","capacity":4},
                         {"id":"bc","from":"b","to":"c","capacity":4},
                         {"id":"cd","from":"c","to":"d","capacity":4},
                         {"id":"da","from":"d","to":"a","capacity":4},
                         {"id":"ac","from":"a","to":"c","capacity":4},
                         {"id":"de","from":"d","to":"e","capacity":4},
                         {"id":"ef","from":"e","to":"f","capacity":4},
                         {"id":"fd","from":"f","to":"d","capacity":4},
                         {"id":"fg","from":"f","to":"g","capacity":4,"one_way":true},
                         {"id":"gh","from":"g","to":"h","capacity":0}],
                "demands":[{"from":"a","to":"e","volume":1}]}"#,
        );
        let elements: Vec<Element> = (0..n.links.len())
            .map(|l| Element::Link(l.into()))
            .chain((0..n.sites.len()).map(|v| Element::Site(v.into())))
            .collect();
        let mut outages = vec![Vec::new()];
        for (i, &x) in elements.iter().enumerate() {
            outages.push(vec![x]);
            for &y in &elements[i + 1..] {
                outages.push(vec![x, y]);
            }
        }
        let (mut closed, mut open) = (0, 0);
        for els in outages {
            let view = Surviving::new(&n, &Scenario::new(&n, &els).outage(&n), None);
            match view.closed_part() {
                Some(_) => closed += 1,
                None => open += 1,
            }
            let sites = n.sites.len();
            let mut starts: Vec<Vec<usize>> = (0..sites).map(|v| vec![v]).collect();
            starts.push(vec![0, 4]);
            starts.push(vec![6, 7]);
            for s in starts {
                assert_eq!(
                    view.reach_from(s.iter().copied()),
                    reach(&view.fwd, s.iter().copied()),
                    "{els:?} from {s:?}"
                );
                assert_eq!(
                    view.reach_to(s.iter().copied()),
                    reach(&view.back, s.iter().copied()),
                    "{els:?} to {s:?}"
                );
            }
        }
        assert!(closed > 0 && open > 0, "closed {closed}, open {open}");
    }
}
