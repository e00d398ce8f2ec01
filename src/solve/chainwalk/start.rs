//! Where a scenario's layered walk master starts from the parent's optimum: the parent's
//! walks that survive the outage ([`surviving_start`], scaled into the new rows when they
//! do not fit) and a greedy re-routing of the flow the outage took ([`reroute`]).

use super::hash::WordMap;

use super::rows::{RowKey, Rows};
use super::{ChainWalk, NONE, START_MARGIN, Solved};
use crate::solve::chain::{self, EdgeKind};

/// Where a master starts from a parent's optimum.
pub(super) struct Start {
    /// The parent's walks that survive this outage and belong to a demand of the LP,
    /// merged when equal, at their flows (a walk through a row that could not hold its
    /// surviving load scaled by that row's factor, the least one when several).
    pub(super) walks: Vec<(ChainWalk, f64)>,
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
/// point of the new rows (each row's load at most its right-hand side).
/// O(Σ walk lengths · log).
pub(super) fn surviving_start(rows: &Rows, start: &Solved) -> Start {
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
    let mut index: WordMap<&ChainWalk, usize> = WordMap::default();
    let mut kept: Vec<(ChainWalk, f64)> = Vec::new();
    for ((w, &f), ok) in start.walks.iter().zip(&start.flow).zip(alive) {
        if !ok || (f <= 0.0 && !lost[w.demand]) {
            continue;
        }
        match index.get(w) {
            Some(&i) => kept[i].1 += f.max(0.0),
            None => {
                index.insert(w, kept.len());
                kept.push((w.clone(), f.max(0.0)));
            }
        }
    }
    let coefficients: Vec<Vec<(RowKey, f64)>> =
        kept.iter().map(|(w, _)| rows.coefficients(w)).collect();
    let mut load = vec![0.0; rows.len()];
    for ((_, f), cs) in kept.iter().zip(&coefficients) {
        for &(key, c) in cs {
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
        for &(key, _) in cs {
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
        lost,
        scaled,
    }
}

/// Greedy re-routing of the flow `start` lost, per demand, through the residual capacity
/// its surviving walks leave in the rows: shortest-hop layered walks (BFS over the layered
/// graph of the demand's group, using only edges whose row has room), each pushed as far as
/// its tightest row allows (a row used twice by one walk counts twice). Appends the walks
/// it uses to `walks`. O(augmentations · (k + 1) · (sites + arcs)).
pub(super) fn reroute(rows: &Rows, start: &Solved, walks: &mut Vec<(ChainWalk, f64)>) {
    let (net, layered) = (rows.net, rows.layered);
    let n = net.sites.len();
    let eps = crate::tol::WALK_FLOW_EPS * rows.scale;
    let mut lost = vec![0.0; net.demands.len()];
    for (w, &f) in start.walks.iter().zip(&start.flow) {
        if rows.group_of[w.demand] != NONE && f > 0.0 && !w.survives(rows.ch, rows.view) {
            lost[w.demand] += f;
        }
    }
    // Per dense row index: what is left of its right-hand side (NaN: not yet computed).
    let mut res = vec![f64::NAN; rows.len()];
    let room = |res: &mut Vec<f64>, key: RowKey| {
        let i = rows.index(key);
        if res[i].is_nan() {
            res[i] = rows.rhs(key);
        }
        res[i]
    };
    for (w, f) in walks.iter() {
        for (key, c) in rows.coefficients(w) {
            let r = room(&mut res, key);
            res[rows.index(key)] = r - c * f;
        }
    }
    for (d, &amount) in lost.iter().enumerate() {
        if amount <= eps {
            continue;
        }
        let group = &layered.groups[rows.group_of[d]];
        let k = group.chain.len();
        let target = k * n + net.demands[d].to.0;
        let mut remaining = amount.min(room(&mut res, RowKey::Demand(d)));
        let mut budget = 2 * (net.arcs.len() + n) + 2;
        while remaining > eps && budget > 0 {
            budget -= 1;
            let mut pred: Vec<Option<(usize, EdgeKind)>> = vec![None; (k + 1) * n];
            let mut seen = vec![false; (k + 1) * n];
            let mut queue = std::collections::VecDeque::new();
            seen[group.origin] = true;
            queue.push_back(group.origin);
            while let Some(node) = queue.pop_front() {
                if node == target {
                    break;
                }
                let (j, v) = (node / n, node % n);
                if j < k {
                    let f = group.chain[j];
                    let next = (j + 1) * n + v;
                    if !seen[next]
                        && chain::runs(rows.ch, rows.view, v, f)
                        && layered.function_cap.contains_key(&(v, f))
                        && room(&mut res, RowKey::Function(v, f)) > eps
                    {
                        seen[next] = true;
                        pred[next] = Some((node, EdgeKind::Function { site: v, layer: j }));
                        queue.push_back(next);
                    }
                }
                for &a in &rows.out[v] {
                    let next = j * n + net.arcs[a].to.0;
                    if !seen[next]
                        && layered.arc_row[a].is_some()
                        && room(&mut res, RowKey::Arc(a)) > eps
                    {
                        seen[next] = true;
                        pred[next] = Some((node, EdgeKind::Arc { arc: a, layer: j }));
                        queue.push_back(next);
                    }
                }
            }
            if !seen[target] {
                break;
            }
            let mut edges = Vec::new();
            let mut at = target;
            while let Some((prev, kind)) = pred[at] {
                edges.push(kind);
                at = prev;
            }
            edges.reverse();
            let w = ChainWalk { demand: d, edges };
            let coefficients = rows.coefficients(&w);
            let push = coefficients
                .iter()
                .map(|&(key, c)| room(&mut res, key) / c)
                .fold(remaining, f64::min);
            if push <= eps {
                break;
            }
            for &(key, c) in &coefficients {
                let r = room(&mut res, key);
                res[rows.index(key)] = r - c * push;
            }
            remaining -= push;
            walks.push((w, push));
        }
    }
}
