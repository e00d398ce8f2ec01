//! Where a scenario's layered walk master starts from the parent's optimum: the parent's
//! walks that survive the outage ([`surviving_start`], scaled into the new rows when they
//! do not fit) and a re-routing of the flow the outage took ([`reroute`]: greedy, then by
//! moving other walks' flow off the rows a walk of the short demand needs).

use super::rows::{Coefs, RowKey, Rows};
use super::{ChainWalk, NONE, START_MARGIN, Solved};
use crate::solve::chain::{self, EdgeKind};

/// Where a master starts from a parent's optimum.
pub(super) struct Start {
    /// The parent's walks that survive this outage and belong to a demand of the LP,
    /// merged when equal, at their flows (a walk through a row that could not hold its
    /// surviving load scaled by that row's factor, the least one when several).
    pub(super) walks: Vec<(ChainWalk, f64)>,
    /// Per walk of `walks`: its column coefficients (the parent's).
    pub(super) coefs: Vec<Coefs>,
    /// Per demand: some walk of it that carried flow was lost or scaled down.
    pub(super) lost: Vec<bool>,
    /// Some row could not hold the surviving flows: walks were scaled down by more than
    /// rounding.
    pub(super) scaled: bool,
}

impl Start {
    /// The parent's whole allocation survives as it was (no flow lost, no scaling).
    pub(super) fn intact(&self) -> bool {
        !self.scaled && !self.lost.iter().any(|&l| l)
    }
}

/// The [`Start`] of this outage's master from the parent's optimum `start`: a feasible
/// point of the new rows (each row's load at most its right-hand side). The walks'
/// coefficients are the parent's ([`Solved::coefs`]). O(Σ walk lengths).
pub(super) fn surviving_start(rows: &Rows, start: &Solved) -> Start {
    let parent_coefs = start.coefs(rows.net);
    let mut lost = vec![false; rows.net.demands.len()];
    let alive: Vec<bool> = start
        .walks
        .iter()
        .zip(&start.flow)
        .map(|(w, &f)| {
            let ok = rows.group_of[w.demand] != NONE && w.survives(rows.ch, rows.view);
            lost[w.demand] |= !ok && f > 0.0;
            ok
        })
        .collect();
    // Walks that carried nothing are kept only for demands that lost flow (columns their
    // master may use again); held at zero they would change nothing.
    // Equal walks merged into the first kept one: per class of equal walks (named by its
    // first walk, `Solved::firsts`), its position in `kept`.
    let firsts = start.firsts();
    let mut at = vec![NONE; start.walks.len()];
    let mut kept: Vec<(ChainWalk, f64)> = Vec::new();
    let mut coefficients: Vec<Coefs> = Vec::new();
    for (i, (((w, &f), ok), cs)) in (start.walks.iter())
        .zip(&start.flow)
        .zip(alive)
        .zip(parent_coefs)
        .enumerate()
    {
        if !ok || (f <= 0.0 && !lost[w.demand]) {
            continue;
        }
        match at[firsts[i]] {
            NONE => {
                at[firsts[i]] = kept.len();
                kept.push((w.clone(), f.max(0.0)));
                coefficients.push(cs.clone());
            }
            j => kept[j].1 += f.max(0.0),
        }
    }
    let mut load = vec![0.0; rows.len()];
    for ((_, f), cs) in kept.iter().zip(&coefficients) {
        for &(key, c) in cs.iter() {
            load[rows.index(key)] += c * f;
        }
    }
    // Each row over its new right-hand side gets a factor that brings its load inside it;
    // each walk is scaled by the least factor of its rows (every row's load then fits, and
    // walks through no over-full row keep their flow). Rows the parent filled exactly may
    // be over by rounding: those scale by about START_MARGIN, which is not a change of
    // the allocation (neither `scaled` nor `lost`).
    let mut factor = vec![1.0_f64; rows.len()];
    for cs in &coefficients {
        for &(key, _) in cs.iter() {
            let i = rows.index(key);
            let (l, rhs) = (load[i], rows.rhs(key));
            if l > rhs * (1.0 - START_MARGIN) {
                factor[i] = (rhs * (1.0 - START_MARGIN) / l).max(0.0);
            }
        }
    }
    let mut scaled = false;
    let walks = kept
        .into_iter()
        .zip(&coefficients)
        .map(|((w, f), cs)| {
            let phi = cs
                .iter()
                .map(|&(key, _)| factor[rows.index(key)])
                .fold(1.0_f64, f64::min);
            if phi < 1.0 - 2.0 * START_MARGIN && f > 0.0 {
                scaled = true;
                lost[w.demand] = true;
            }
            (w, f * phi)
        })
        .collect();
    Start {
        walks,
        coefs: coefficients,
        lost,
        scaled,
    }
}

/// Rip-up attempts per demand still short after the greedy re-routing of [`reroute`]
/// (each: one fewest-blocked walk, room made on its full rows, one push).
const RIP_UP_TRIES: usize = 2;
/// Walks a demand's rip-up tries to move out of the way at most (one search each).
const RIP_UP_MOVES: usize = 12;

/// What a re-routing works on: the rows' residual room, the walks with their flows and
/// their row coefficients (kept together, one entry per walk).
struct Routing<'r, 'a> {
    rows: &'r Rows<'a>,
    /// Per dense row index: what is left of its right-hand side.
    res: Vec<f64>,
    walks: &'r mut Vec<(ChainWalk, f64)>,
    coefs: Vec<Coefs>,
    /// Per dense row index: the walks through it, ascending (kept for rip-ups only: empty
    /// without them).
    through: Vec<Vec<usize>>,
    eps: f64,
    /// Buffers of [`Routing::search`]: per layered node its predecessor (node, and the arc
    /// crossed or `NONE` for the function applied; node `NONE`: none) and distance, and
    /// the queue.
    scratch: Scratch,
}

type Scratch = (
    Vec<(usize, usize)>,
    Vec<usize>,
    std::collections::VecDeque<usize>,
);

impl Routing<'_, '_> {
    fn room(&self, key: RowKey) -> f64 {
        self.res[self.rows.index(key)]
    }

    /// Moves `f` units onto walk `i`'s rows (negative: off them). O(walk length).
    fn load(&mut self, i: usize, f: f64) {
        for &(key, c) in self.coefs[i].iter() {
            self.res[self.rows.index(key)] -= c * f;
        }
        self.walks[i].1 += f;
    }

    /// Removes the last walk (added by [`Routing::add`], still at flow 0). O(1).
    fn drop_last(&mut self) {
        self.walks.pop();
        for &(key, _) in self.coefs.pop().iter().flat_map(|cs| cs.iter()) {
            if let Some(t) = self.through.get_mut(self.rows.index(key)) {
                t.pop();
            }
        }
    }

    /// Appends walk `w` at flow 0 and returns its index. O(walk length · log).
    fn add(&mut self, w: ChainWalk) -> usize {
        let cs = self.rows.coefs(&w);
        for &(key, _) in cs.iter() {
            if let Some(t) = self.through.get_mut(self.rows.index(key)) {
                t.push(self.walks.len());
            }
        }
        self.coefs.push(cs);
        self.walks.push((w, 0.0));
        self.walks.len() - 1
    }

    /// The most walk `i` can take on top of its flow within the rows' room, at most `most`
    /// (its demand's cap row left out when `same_demand`: flow moved within its demand).
    fn most(&self, i: usize, most: f64, same_demand: bool) -> f64 {
        self.coefs[i]
            .iter()
            .filter(|(key, _)| !(same_demand && matches!(key, RowKey::Demand(_))))
            .map(|&(key, c)| self.room(key) / c)
            .fold(most, f64::min)
    }

    /// A layered walk of demand `d` over the rows of the model, edges whose dense row index
    /// is `blocked` left out. When `strict`, over the edges whose row has more than `eps`
    /// of room, the fewest hops (BFS, function edge before arcs, arcs in site order);
    /// otherwise the fewest full rows crossed (0-1 BFS: a full row costs 1). O((k + 1) ·
    /// (sites + arcs)); the strict search stops once it reaches the target.
    fn search(&mut self, d: usize, strict: bool, blocked: &[bool]) -> Option<ChainWalk> {
        let (rows, eps) = (self.rows, self.eps);
        let (net, layered) = (rows.net, rows.layered);
        let n = net.sites.len();
        let group = &layered.groups[rows.group_of[d]];
        let k = group.chain.len();
        let target = k * n + net.demands[d].to.0;
        let (pred, dist, queue) = &mut self.scratch;
        pred.clear();
        pred.resize((k + 1) * n, (NONE, NONE));
        dist.clear();
        dist.resize((k + 1) * n, usize::MAX);
        queue.clear();
        dist[group.origin] = 0;
        queue.push_back(group.origin);
        let res = &self.res;
        // The cost of crossing dense row `i` (`None`: not allowed).
        let cost = |i: usize| -> Option<usize> {
            match (blocked[i], res[i] > eps) {
                (true, _) => None,
                (false, true) => Some(usize::from(strict)),
                (false, false) => (!strict).then_some(1),
            }
        };
        while let Some(node) = queue.pop_front() {
            if node == target && strict {
                break;
            }
            let (j, v) = (node / n, node % n);
            let here = dist[node];
            let mut relax = |next: usize, c: usize, arc: usize| {
                if here + c < dist[next] {
                    dist[next] = here + c;
                    pred[next] = (node, arc);
                    if c == 0 && !strict {
                        queue.push_front(next);
                    } else {
                        queue.push_back(next);
                    }
                }
            };
            if j < k
                && let Some(i) = rows.function_index(v, group.chain[j])
                && chain::runs(rows.ch, rows.view, v, group.chain[j])
                && let Some(c) = cost(i)
            {
                relax((j + 1) * n + v, c, NONE);
            }
            for &a in &rows.out[v] {
                if layered.arc_row[a].is_some()
                    && let Some(c) = cost(rows.index(RowKey::Arc(a)))
                {
                    relax(j * n + net.arcs[a].to.0, c, a);
                }
            }
            // Unit steps in first-in first-out order: a node's first distance and
            // predecessor are final, so the target's walk is known once it is reached.
            if strict && dist[target] != usize::MAX {
                break;
            }
        }
        if dist[target] == usize::MAX {
            return None;
        }
        let mut edges = Vec::new();
        let mut at = target;
        loop {
            let (prev, arc) = pred[at];
            if prev == NONE {
                break;
            }
            let layer = prev / n;
            edges.push(match arc {
                NONE => EdgeKind::Function {
                    site: prev % n,
                    layer,
                },
                arc => EdgeKind::Arc { arc, layer },
            });
            at = prev;
        }
        edges.reverse();
        Some(ChainWalk { demand: d, edges })
    }
}

/// Greedy re-routing of the flow `start` lost, per demand, through the residual capacity
/// its surviving walks leave in the rows: shortest-hop layered walks (BFS over the layered
/// graph of the demand's group, using only edges whose row has room), each pushed as far as
/// its tightest row allows (a row used twice by one walk counts twice). With `rip_up`, a
/// demand still short then tries [`RIP_UP_TRIES`] times the walk crossing the fewest full
/// rows, first moving flow of other walks through those rows onto walks of their own
/// demand that avoid every row of that walk. Every move keeps each row's load within its
/// right-hand side. Appends the walks it uses to `walks` (and lowers the flows of those it
/// moves flow from); `coefs`, when given, are the coefficients of `walks` (computed
/// otherwise), and the coefficients of the walks after are returned. O(augmentations ·
/// (k + 1) · (sites + arcs) + rip-ups · walks · (k + 1) · (sites + arcs)).
pub(super) fn reroute(
    rows: &Rows,
    start: &Solved,
    walks: &mut Vec<(ChainWalk, f64)>,
    coefs: Option<Vec<Coefs>>,
    rip_up: bool,
) -> Vec<Coefs> {
    let mut lost = vec![0.0; rows.net.demands.len()];
    for (w, &f) in start.walks.iter().zip(&start.flow) {
        if rows.group_of[w.demand] != NONE && f > 0.0 && !w.survives(rows.ch, rows.view) {
            lost[w.demand] += f;
        }
    }
    fill(rows, &lost, walks, coefs, rip_up)
}

/// What [`reroute`] does with the flow lost per demand, for any amounts `wanted` (per
/// demand in the LP: origin units to add to what `walks` carry, capped by the room of its
/// cap row): greedy shortest-hop walks through the room the rows have left, then, with
/// `rip_up`, walks crossing the fewest full rows after moving other walks aside. `walks`
/// must fit the rows; they still do after. `coefs` and the result: the walks'
/// coefficients before and after, as in [`reroute`]. Cost as [`reroute`].
pub(super) fn fill(
    rows: &Rows,
    wanted: &[f64],
    walks: &mut Vec<(ChainWalk, f64)>,
    coefs: Option<Vec<Coefs>>,
    rip_up: bool,
) -> Vec<Coefs> {
    let (net, layered) = (rows.net, rows.layered);
    let eps = crate::tol::WALK_FLOW_EPS * rows.scale;
    let lost = wanted;
    let coefs: Vec<Coefs> =
        coefs.unwrap_or_else(|| walks.iter().map(|(w, _)| rows.coefs(w)).collect());
    debug_assert_eq!(coefs.len(), walks.len());
    if lost.iter().all(|&l| l <= eps) {
        return coefs;
    }
    let mut res = vec![0.0; rows.len()];
    for (a, &cap) in layered.arc_cap.iter().enumerate() {
        res[rows.index(RowKey::Arc(a))] = cap;
    }
    for (&(v, f), &cap) in &layered.function_cap {
        res[rows.index(RowKey::Function(v, f))] = cap;
    }
    for d in 0..net.demands.len() {
        res[rows.index(RowKey::Demand(d))] = layered.bound[d];
    }
    let mut through: Vec<Vec<usize>> = Vec::new();
    if rip_up {
        // Each row's list sized once for the walks there now (and a few re-routed ones).
        let mut count = vec![0usize; rows.len()];
        for cs in &coefs {
            for &(key, _) in cs.iter() {
                count[rows.index(key)] += 1;
            }
        }
        through = count
            .into_iter()
            .map(|c| Vec::with_capacity(c + 4))
            .collect();
    }
    for (j, (cs, (_, f))) in coefs.iter().zip(walks.iter()).enumerate() {
        for &(key, c) in cs.iter() {
            res[rows.index(key)] -= c * f;
            if let Some(t) = through.get_mut(rows.index(key)) {
                t.push(j);
            }
        }
    }
    let mut r = Routing {
        rows,
        res,
        walks,
        coefs,
        through,
        eps,
        scratch: Scratch::default(),
    };
    let none = vec![false; rows.len()];
    for (d, &amount) in lost.iter().enumerate() {
        if amount <= eps || rows.group_of[d] == NONE {
            continue;
        }
        let mut remaining = amount.min(r.room(RowKey::Demand(d)));
        let mut budget = 2 * (net.arcs.len() + net.sites.len()) + 2;
        while remaining > eps && budget > 0 {
            budget -= 1;
            let Some(w) = r.search(d, true, &none) else {
                break;
            };
            let i = r.add(w);
            let push = r.most(i, remaining, false);
            if push <= eps {
                r.drop_last();
                break;
            }
            r.load(i, push);
            remaining -= push;
        }
        let mut moves = RIP_UP_MOVES;
        for _ in 0..if rip_up { RIP_UP_TRIES } else { 0 } {
            if remaining <= eps {
                break;
            }
            let Some(w) = r.search(d, false, &none) else {
                break;
            };
            let i = r.add(w);
            // Every row of the new walk is closed to the walks moved out of the way.
            let mut closed = vec![false; rows.len()];
            for &(key, _) in r.coefs[i].iter() {
                if !matches!(key, RowKey::Demand(_)) {
                    closed[rows.index(key)] = true;
                }
            }
            let want = remaining.min(r.room(RowKey::Demand(d)));
            // Demands with no walk around the closed rows that has room (this try).
            let mut stuck = vec![false; net.demands.len()];
            for t in 0..r.coefs[i].len() {
                let (key, c) = r.coefs[i][t];
                let row = rows.index(key);
                let mut need = want * c - r.res[row];
                // The walks through the full row (those there now), in walk order.
                let mut at = 0;
                while need > eps * c && at < r.through[row].len() {
                    let j = r.through[row][at];
                    at += 1;
                    let (e, f) = (r.walks[j].0.demand, r.walks[j].1);
                    if j == i || f <= eps || stuck[e] {
                        continue;
                    }
                    if moves == 0 {
                        break;
                    }
                    moves -= 1;
                    let Some(alt) = r.search(e, true, &closed) else {
                        stuck[e] = true;
                        continue;
                    };
                    let cj = r.coefs[j]
                        .iter()
                        .find(|(k2, _)| *k2 == key)
                        .map_or(1.0, |&(_, c2)| c2);
                    let a = r.add(alt);
                    let m = r.most(a, f.min(need / cj), true);
                    if m > eps {
                        r.load(j, -m);
                        r.load(a, m);
                        need -= m * cj;
                    } else {
                        r.drop_last();
                        stuck[e] = true;
                    }
                }
            }
            let push = r.most(i, remaining, false);
            if push <= eps {
                // The walk is not the last one when others were moved: it stays at 0.
                if i + 1 == r.walks.len() {
                    r.drop_last();
                }
                break;
            }
            r.load(i, push);
            remaining -= push;
        }
    }
    r.coefs
}
