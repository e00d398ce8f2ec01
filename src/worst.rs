//! The N worst failure sets of at most K elements, found exactly without solving every
//! set: best-first branch and bound over sets, pruned by a bound that every solved set
//! gives its supersets.
//!
//! # The bound
//!
//! Let `A` be a solved set and `Φ` the verifier's repaired allocation of its
//! served_required LP (`Evaluation::demand_flow`, `arc_load`): feasible against the
//! file's real capacities by construction, delivering `L = verification.lower`. For a
//! larger set `C = A ∪ T`, drop every walk of `Φ` that touches an element of `T` (a link:
//! one of its arcs; a site: any arc incident to it, which every walk through, from, to or
//! processing at the site crosses, since a demand's ends differ; a group: an arc of a
//! member). What is left uses only arcs and sites that survive `C`, within the same
//! capacities, and no demand gets more than before: it is feasible for `C`. The dropped
//! flow `D` is at most `Σ_{e∈T} flow(e)`, where `flow(e)` is the load `Φ` puts on `e`'s
//! arcs (a walk crossing an arc twice counts twice, a walk touching two elements of `T`
//! counts in both: overcounts, so the bound stays an upper bound). Hence
//! `served*(C) ≥ L − D`.
//!
//! With service chains (a file with `functions`) the same argument runs on the layered
//! model: `Φ` is the repaired allocation's layered walks (origin → the site of each
//! function → destination), every quantity in origin units, and a walk touches a site
//! where it applies a function (a failed site loses its functions) through the arcs it
//! uses there. A link's load is not the walks' origin units there (a leg after a function
//! of gain 0.5 loads it with half of them), so `flow(e)` is the origin units of the walks
//! that touch `e`, each walk once ([`element_flows`], from
//! [`crate::solve::chainwalk::proven_walks`]); where the layered edge LP decided an outage
//! (no walks kept), the loads divided by the least cumulative gain of any chain. With `R(X)` the surviving required demand and `N` the demands
//! that `T` strands (an end site fails; every walk of theirs touches that site, so their
//! flow is inside `D`, and their required leaves the surviving total):
//!
//! ```text
//! shortfall*(C) = R(C) − served*(C) ≤ R(A) − Σ_N required − L + D
//!              = shortfall_L(A) + D − Σ_N required ≤ shortfall_L(A) + Σ_{e∈T} flow(e)
//! lost*(C)      = shortfall*(C) + stranded(A) + Σ_N required ≤ lost_L(A) + Σ_{e∈T} flow(e)
//! ```
//!
//! where `shortfall_L(A) = R(A) − L` is the shortfall of the *proven lower bound's*
//! allocation (never the reported value, which may sit anywhere in the proven interval).
//! A demand that becomes stranded therefore only lowers the shortfall bound (its required
//! is subtracted; [`Options::by`] `Shortfall` uses the subtraction, which is also valid for
//! every superset since the stranded set only grows). Every solved ancestor `A ⊆ C` gives
//! such a bound; the search keeps each node's ancestors' bounds and uses their minimum.
//!
//! A reported value is the plainest number inside the proven interval, so it can exceed
//! the optimum's value by the proof's gap, at most `GAP_TOL · Σ required`; rounding of
//! loads adds less. [`Proof::tolerance`] is twice that, and a set is pruned only when its
//! bound plus the tolerance, as printed ([`key`]), is below the N-th worst's printed value
//! (strictly: a tie could still win on fewer elements or name order). A set is listed only
//! when its value as printed exceeds [`Proof::floor`] (twice the tolerance): below it a
//! value is the verifier's noise, and a search for "no loss" could prune nothing.
//!
//! # The search
//!
//! Sets are nodes of the usual enumeration tree over the pool ([`scenario::elements`]
//! order): a child adds one element of larger index, so each set has one parent and the
//! subtree of `C` is every `C ∪ T` with `T` above `max C`, `|C ∪ T| ≤ K`. A node's
//! priority is its subtree bound: its own bound plus the `K − |C|` largest flows above
//! `max C` (per ancestor, precomputed as suffix top-m sums, O(1) per lookup). Nodes are
//! popped best first; a node whose own bound cannot beat the current N-th worst is not
//! solved (*bounded*) but its children are still considered; a child whose subtree bound
//! cannot beat it is never pushed (*pruned*, with every set below it). The search stops
//! when the best remaining priority cannot beat the N-th worst: then every set not solved
//! has a value at most [`Proof::bound`] plus the tolerance, below the N-th worst.
//!
//! Invariant: every set of 1..=K pool elements is exactly one of solved (its value known,
//! by an LP or from a set with the same outage), bounded, pruned or below the last popped
//! priority; the counts in [`Proof`] add up to [`Proof::sets_total`] (tested).
//!
//! Solves run in parallel batches of [`BATCH`] nodes (rayon), each outage once (cached by
//! outage), through the audit's evaluator seam ([`audit::evaluator_for`] with the walk
//! engine: the walk engine, or the layered walk engine for a file with `functions`, so
//! both models share this search); a set is solved from the basis of the single failure of
//! its first element when that was solved, else from the baseline's (as the audit does),
//! so only K-independent memory is kept for bases. Batches are formed and consumed in a
//! fixed order, so results and counts are the same whatever the thread count.
//!
//! Complexity: one walk-engine solve per solved outage (the dominant cost), plus
//! O(pool · (K + anchors)) per expanded node and O(log queue) per push or pop. Memory:
//! the queue (≤ expanded nodes × pool), and per live anchor O(pool · K) numbers.

use std::cmp::Ordering;
use std::collections::{BinaryHeap, HashMap};
use std::sync::{Arc, Weak};

use rayon::prelude::*;

use crate::audit;
use crate::error::{Error, Result};
use crate::model::{Network, SiteIdx};
use crate::report::file_num;
use crate::scenario::{self, Element, Kinds, Outage, Scenario};
use crate::solve::evaluator::{Evaluated, Warm};
use crate::solve::{Engine, Evaluation, colgen};

mod flows;
pub use flows::element_flows;

/// Nodes solved together in one parallel batch. Fixed (never the thread count), so the
/// search is the same on any machine.
pub const BATCH: usize = 32;

/// What ranks a set.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum By {
    /// The shortfall (surviving required demand not served).
    Shortfall,
    /// Shortfall plus stranded required demand.
    Lost,
}

/// What to search for.
#[derive(Debug, Clone, Copy)]
pub struct Options {
    /// Largest number of elements failed together (at least 1).
    pub k: usize,
    /// Kinds of element that fail.
    pub kinds: Kinds,
    /// How many sets to list (at least 1).
    pub top: usize,
    pub by: By,
    /// Worker threads (`None`: rayon's default). Results do not depend on it.
    pub threads: Option<usize>,
}

/// One of the worst sets. Serialized (without `elements` and `matrix`) as the fields of
/// a `worst --json` list entry.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct WorstSet {
    /// Its elements, sorted by name.
    #[serde(skip)]
    pub elements: Vec<Element>,
    /// Their contract names, sorted (as the audit writes them).
    pub failed: Vec<String>,
    pub shortfall: f64,
    pub stranded: f64,
    /// shortfall + stranded.
    pub lost: f64,
    pub served_required: f64,
    /// The served_required LP was proven optimal.
    pub proven: bool,
    /// The traffic matrix it was solved under (0: `base`).
    #[serde(skip)]
    pub matrix: usize,
}

/// Why no set outside the list is worse. Serialized (without `stats`) as the figures of
/// the `worst --json` proof object.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Proof {
    /// Every set that was not solved has a value at most `bound + tolerance`, and that is
    /// below `threshold` as printed; `None` when every set was solved.
    pub bound: Option<f64>,
    /// The value as printed a set must beat to enter the list: the N-th worst's when the
    /// list is full, else [`Proof::floor`].
    pub threshold: f64,
    /// Values as printed at or below this are not losses (twice the tolerance).
    pub floor: f64,
    /// How far a reported value may exceed the optimum's (2 · `GAP_TOL` · Σ required).
    pub tolerance: f64,
    /// Sets of 1..=K elements of the pool.
    pub sets_total: u128,
    /// Sets whose value is known (solved, or with the outage of a solved set).
    pub sets_solved: u128,
    /// Distinct outages solved (LPs run, the baseline excluded).
    pub outages_solved: usize,
    /// Sets not solved whose own bound could not beat the threshold (supersets searched).
    pub sets_bounded: u128,
    /// Sets never visited: inside a subtree whose bound could not beat the threshold.
    pub sets_pruned: u128,
    /// Solved outages whose result is unproven (reported at its proven lower bound).
    pub unproven: usize,
    /// Elements in the pool.
    pub pool: usize,
    /// Work done by the walk engine.
    #[serde(skip)]
    pub stats: colgen::Stats,
}

/// The answer: the worst sets, worst first, and the proof.
#[derive(Debug, Clone)]
pub struct Worst {
    pub sets: Vec<WorstSet>,
    pub proof: Proof,
    pub options: Options,
    /// The intact network's evaluation.
    pub baseline: Evaluation,
}

/// A value as printed in files ([`file_num`], 12 significant digits): what the ranking
/// and the pruning compare, so near-equal values tie stably. Monotone. O(1).
pub fn key(x: f64) -> f64 {
    file_num(x)
}

/// The N worst (set, matrix) pairs from each matrix's own [`search`] (`each`: matrix
/// index and its answer, each on that matrix's view). Exact: a pair outside matrix `m`'s
/// list is at most `m`'s N-th worst (or its floor), and the merged N-th worst is at least
/// that, since the union holds `m`'s N. Ties as in each list (value as printed, fewer
/// elements, names), then the matrix index. The proof's counts are summed, its bound the
/// largest, its threshold the merged N-th's (else the largest floor). O(M·N log(M·N)).
pub fn merge(each: Vec<(usize, Worst)>, opts: Options) -> Worst {
    let mut sets: Vec<WorstSet> = Vec::new();
    let mut proof: Option<Proof> = None;
    let mut baseline: Option<Evaluation> = None;
    for (m, w) in each {
        sets.extend(w.sets.into_iter().map(|mut s| {
            s.matrix = m;
            s
        }));
        let p = w.proof;
        proof = Some(match proof {
            None => p,
            Some(mut q) => {
                q.bound = match (q.bound, p.bound) {
                    (Some(a), Some(b)) => Some(a.max(b)),
                    (a, b) => a.or(b),
                };
                q.floor = q.floor.max(p.floor);
                q.tolerance = q.tolerance.max(p.tolerance);
                crate::solve::add_counts([
                    (&mut q.sets_total, p.sets_total),
                    (&mut q.sets_solved, p.sets_solved),
                    (&mut q.sets_bounded, p.sets_bounded),
                    (&mut q.sets_pruned, p.sets_pruned),
                ]);
                crate::solve::add_counts([
                    (&mut q.outages_solved, p.outages_solved),
                    (&mut q.unproven, p.unproven),
                ]);
                q.stats.add(&p.stats);
                q
            }
        });
        baseline.get_or_insert(w.baseline);
    }
    sets.sort_by(|a, b| {
        key(value_of(b, opts.by))
            .total_cmp(&key(value_of(a, opts.by)))
            .then(a.failed.len().cmp(&b.failed.len()))
            .then_with(|| a.failed.cmp(&b.failed))
            .then(a.matrix.cmp(&b.matrix))
    });
    sets.truncate(opts.top);
    let mut proof = proof.expect("at least one matrix");
    if sets.len() >= opts.top
        && let Some(last) = sets.last()
    {
        proof.threshold = key(value_of(last, opts.by));
    } else {
        proof.threshold = proof.floor;
    }
    Worst {
        sets,
        proof,
        options: opts,
        baseline: baseline.expect("at least one matrix"),
    }
}

/// A listed set's ranking value. O(1).
fn value_of(s: &WorstSet, by: By) -> f64 {
    match by {
        By::Shortfall => s.shortfall,
        By::Lost => s.lost,
    }
}

/// The reported value of `e` that ranks sets.
pub fn value(e: &Evaluation, by: By) -> f64 {
    match by {
        By::Shortfall => e.shortfall,
        By::Lost => e.shortfall + e.stranded,
    }
}

/// The value of `e`'s proven lower bound's allocation: [`value`] with served_required
/// replaced by the repaired allocation's delivered flow (`verification.lower`). Never
/// below [`value`]. O(1).
pub fn lower_value(e: &Evaluation, by: By) -> f64 {
    value(e, by) + (e.served_required - e.verification.lower).max(0.0)
}

/// What a solved outage leaves for the bounds of its supersets.
struct Anchor {
    /// Per pool element: the flow through it.
    flows: Vec<f64>,
    /// `top[i * (k + 1) + m]`: Σ of the `m` largest `flows[j]`, `j ≥ i` (`i ≤ pool`).
    top: Vec<f64>,
    /// [`lower_value`] of the outage.
    lower: f64,
}

impl Anchor {
    fn new(flows: Vec<f64>, lower: f64, k: usize) -> Anchor {
        let n = flows.len();
        let mut top = vec![0.0; (n + 1) * (k + 1)];
        let mut best: Vec<f64> = Vec::with_capacity(k + 1);
        for i in (0..n).rev() {
            let pos = best
                .iter()
                .position(|b| flows[i].total_cmp(b) == Ordering::Greater)
                .unwrap_or(best.len());
            best.insert(pos, flows[i]);
            best.truncate(k);
            let mut sum = 0.0;
            for m in 1..=k {
                if let Some(b) = best.get(m - 1) {
                    sum += b;
                }
                top[i * (k + 1) + m] = sum;
            }
        }
        Anchor { flows, top, lower }
    }

    fn top(&self, from: usize, m: usize, k: usize) -> f64 {
        self.top[from * (k + 1) + m]
    }
}

/// One solved outage.
struct Solved {
    shortfall: f64,
    stranded: f64,
    served_required: f64,
    proven: bool,
    /// Kept while some queued node still bounds by it.
    anchor: Weak<Anchor>,
    /// The walk engine's optimum, kept for single failures only.
    basis: Option<Arc<Warm>>,
}

/// A set in the queue: its pool indices (ascending) and the bounds its solved ancestors
/// give it (`(anchor, bound on its value)`).
struct Node {
    set: Vec<usize>,
    anchors: Vec<(Arc<Anchor>, f64)>,
    /// Subtree bound: the largest value any set of its subtree (itself included) can have.
    priority: f64,
}

impl Node {
    /// Its own bound (the best of its ancestors').
    fn own(&self) -> f64 {
        self.anchors
            .iter()
            .map(|a| a.1)
            .min_by(f64::total_cmp)
            .unwrap_or(f64::INFINITY)
    }
}

impl PartialEq for Node {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}
impl Eq for Node {}
impl PartialOrd for Node {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for Node {
    /// Max-heap order: higher priority first, then fewer elements, then lower indices.
    fn cmp(&self, other: &Self) -> Ordering {
        self.priority
            .total_cmp(&other.priority)
            .then(other.set.len().cmp(&self.set.len()))
            .then_with(|| other.set.cmp(&self.set))
    }
}

/// A listed candidate, in rank order (worst first).
#[derive(Debug, Clone, PartialEq)]
struct Ranked {
    key: f64,
    failed: Vec<String>,
    set: Vec<usize>,
    outage: usize,
}

impl Ranked {
    fn order(&self, other: &Ranked) -> Ordering {
        other
            .key
            .total_cmp(&self.key)
            .then(self.failed.len().cmp(&other.failed.len()))
            .then_with(|| self.failed.cmp(&other.failed))
    }
}

/// Σ_{j ≤ m} C(p, j): the sets a subtree holds (its root included) with `p` elements
/// above the root and room for `m` more. Saturating.
fn subtree_size(p: usize, m: usize) -> u128 {
    let mut total: u128 = 1;
    let mut c: u128 = 1;
    for j in 1..=m.min(p) {
        c = c.saturating_mul((p - j + 1) as u128) / j as u128;
        total = total.saturating_add(c);
    }
    total
}

/// The search state.
struct Search<'a> {
    net: &'a Network,
    opts: Options,
    pool: Vec<Element>,
    names: Vec<String>,
    /// Per site: (other end, required) of its demands.
    site_demands: Vec<Vec<(usize, f64)>>,
    tolerance: f64,
    floor: f64,
    outages: HashMap<Outage, usize>,
    solved: Vec<Solved>,
    /// Per outage with a listable value: its best-ranked set.
    rep: HashMap<usize, Ranked>,
    /// Listable outages in rank order (kept sorted; the N-th sets the threshold).
    list: Vec<Ranked>,
    queue: BinaryHeap<Node>,
    base_basis: Option<Arc<Warm>>,
    proof: Proof,
    max_unsolved: Option<f64>,
}

impl<'a> Search<'a> {
    /// The value as printed that a set must beat, and whether the list is full.
    fn threshold(&self) -> f64 {
        if self.list.len() >= self.opts.top {
            self.list[self.opts.top - 1].key
        } else {
            self.floor
        }
    }

    /// Whether a set whose optimum value is at most `bound` could enter the list: its
    /// reported value is at most `bound + tolerance`, so as printed at most
    /// `key(bound + tolerance)`; it must exceed the floor, and reach the N-th worst's
    /// value when the list is full (a tie may still win on the tie-breaks).
    fn can_beat(&self, bound: f64) -> bool {
        let reported = key(bound + self.tolerance);
        if reported <= self.floor {
            return false;
        }
        self.list.len() < self.opts.top || reported >= self.threshold()
    }

    fn note_unsolved(&mut self, bound: f64) {
        self.max_unsolved = Some(self.max_unsolved.map_or(bound, |m| m.max(bound)));
    }

    /// Stranded required demand added by failing pool element `e` on top of `set`.
    fn stranded_added(&self, set: &[usize], e: usize) -> f64 {
        let Element::Site(s) = self.pool[e] else {
            return 0.0;
        };
        let failed = |v: SiteIdx| {
            set.iter()
                .any(|&i| matches!(self.pool[i], Element::Site(x) if x == v))
        };
        if failed(s) {
            return 0.0;
        }
        self.site_demands[s]
            .iter()
            .filter(|(other, _)| !failed(SiteIdx(*other)))
            .map(|d| d.1)
            .sum()
    }

    /// Considers every child of `node` (solved or not): pushes those whose subtree can
    /// beat the threshold, counts the others as pruned.
    fn expand(&mut self, node: &Node) {
        let k = self.opts.k;
        if node.set.len() >= k {
            return;
        }
        let n = self.pool.len();
        let from = node.set.last().map_or(0, |&l| l + 1);
        let m = k - node.set.len() - 1;
        for e in from..n {
            let added = self.stranded_added(&node.set, e);
            let drop = if self.opts.by == By::Shortfall {
                added
            } else {
                0.0
            };
            let anchors: Vec<(Arc<Anchor>, f64)> = node
                .anchors
                .iter()
                .map(|(a, b)| (a.clone(), b + a.flows[e] - drop))
                .collect();
            let priority = anchors
                .iter()
                .map(|(a, b)| b + a.top(e + 1, m, k))
                .min_by(f64::total_cmp)
                .unwrap_or(f64::INFINITY);
            if !self.can_beat(priority) {
                self.proof.sets_pruned += subtree_size(n - 1 - e, m);
                self.note_unsolved(priority);
                continue;
            }
            let mut set = node.set.clone();
            set.push(e);
            self.queue.push(Node {
                set,
                anchors,
                priority,
            });
        }
    }

    /// Records a set whose outage `o` is solved: its rank entry, and the node's children
    /// with the outage as a further anchor.
    fn settle(&mut self, mut node: Node, o: usize) {
        self.proof.sets_solved += 1;
        let s = &self.solved[o];
        let v = match self.opts.by {
            By::Shortfall => s.shortfall,
            By::Lost => s.shortfall + s.stranded,
        };
        let kv = key(v);
        if kv > self.floor {
            let mut failed: Vec<String> = node.set.iter().map(|&i| self.names[i].clone()).collect();
            failed.sort();
            let cand = Ranked {
                key: kv,
                failed,
                set: node.set.clone(),
                outage: o,
            };
            let replace = match self.rep.get(&o) {
                None => true,
                Some(old) => cand.order(old) == Ordering::Less,
            };
            if replace {
                if let Some(old) = self.rep.insert(o, cand.clone())
                    && let Some(p) = self.list.iter().position(|r| *r == old)
                {
                    self.list.remove(p);
                }
                let p = self
                    .list
                    .partition_point(|r| r.order(&cand) == Ordering::Less);
                self.list.insert(p, cand);
                // Entries below the N-th worst's value can never return to the list
                // (values only join); ties with it stay, a tie-break may still move them.
                if self.list.len() > self.opts.top {
                    let t = self.list[self.opts.top - 1].key;
                    while self.list.last().is_some_and(|r| r.key < t) {
                        let gone = self.list.pop().expect("not empty");
                        self.rep.remove(&gone.outage);
                    }
                }
            }
        }
        if node.set.len() < self.opts.k
            && let Some(a) = self.solved[o].anchor.upgrade()
        {
            let own = a.lower;
            node.anchors.push((a, own));
        }
        self.expand(&node);
    }

    /// The basis a set starts from: its first element's single failure, else the baseline.
    fn start_for(&self, set: &[usize]) -> Option<Arc<Warm>> {
        if set.len() >= 2 {
            let o = Scenario::new(self.net, &[self.pool[set[0]]]).outage(self.net);
            if let Some(&i) = self.outages.get(&o)
                && let Some(b) = &self.solved[i].basis
            {
                return Some(b.clone());
            }
        }
        self.base_basis.clone()
    }

    /// Stores a fresh solve of outage `o` (of `set`); returns its index and, when the set
    /// still has children, the anchor to keep alive.
    fn store(&mut self, o: Outage, set: &[usize], w: Evaluated) -> (usize, Option<Arc<Anchor>>) {
        let e = &w.evaluation;
        self.proof.outages_solved += 1;
        if !e.verification.proven {
            self.proof.unproven += 1;
        }
        let anchor = (set.len() < self.opts.k).then(|| {
            Arc::new(Anchor::new(
                element_flows(self.net, &o, &w, &self.pool),
                lower_value(e, self.opts.by),
                self.opts.k,
            ))
        });
        let i = self.solved.len();
        self.solved.push(Solved {
            shortfall: e.shortfall,
            stranded: e.stranded,
            served_required: e.served_required,
            proven: e.verification.proven,
            anchor: anchor.as_ref().map_or_else(Weak::new, Arc::downgrade),
            basis: (set.len() == 1).then_some(w.warm).flatten().map(Arc::new),
        });
        self.outages.insert(o, i);
        (i, anchor)
    }
}

/// Finds the `opts.top` worst sets of 1..=`opts.k` elements of `opts.kinds` (distinct
/// outages, each under its best-ranked set) by [`By`], with the proof that no other set
/// is worse (see the module comment). Stops with [`Error::Interrupted`] on SIGINT,
/// SIGTERM or SIGHUP (checked between batches).
pub fn search(net: &Network, opts: Options) -> Result<Worst> {
    if opts.k == 0 {
        return Err(Error::Usage("--k must be at least 1".into()));
    }
    if opts.top == 0 {
        return Err(Error::Usage("--top must be at least 1".into()));
    }
    let pool = scenario::elements(net, opts.kinds);
    let names: Vec<String> = pool.iter().map(|e| e.name(net)).collect();
    let mut site_demands = vec![Vec::new(); net.sites.len()];
    for d in &net.demands {
        site_demands[d.from].push((d.to.0, d.required));
        site_demands[d.to].push((d.from.0, d.required));
    }
    let required: f64 = net.demands.iter().map(|d| d.required).sum();
    let tolerance = 2.0 * crate::tol::PROOF_GAP_TOL * required;
    let floor = key(2.0 * tolerance);
    let engine = audit::evaluator_for(net, Engine::Walks);
    let engine = engine.as_ref();
    let base = audit::in_pool(opts.threads, || {
        engine.evaluate(net, &Outage::default(), None)
    })??;
    let sets_total = scenario::count(pool.len(), opts.k) - 1;
    let root_flows = element_flows(net, &Outage::default(), &base, &pool);
    let mut s = Search {
        net,
        opts,
        site_demands,
        tolerance,
        floor,
        outages: HashMap::new(),
        solved: Vec::new(),
        rep: HashMap::new(),
        list: Vec::new(),
        queue: BinaryHeap::new(),
        base_basis: base.warm.map(Arc::new),
        proof: Proof {
            bound: None,
            threshold: floor,
            floor,
            tolerance,
            sets_total,
            sets_solved: 0,
            outages_solved: 0,
            sets_bounded: 0,
            sets_pruned: 0,
            unproven: 0,
            pool: pool.len(),
            stats: base.stats,
        },
        max_unsolved: None,
        pool,
        names,
    };
    let e = &base.evaluation;
    let root_anchor = Arc::new(Anchor::new(root_flows, lower_value(e, opts.by), opts.k));
    let root = Node {
        set: Vec::new(),
        anchors: vec![(root_anchor.clone(), root_anchor.lower)],
        priority: f64::INFINITY,
    };
    s.expand(&root);
    drop(root);
    drop(root_anchor);
    loop {
        if audit::interrupted() {
            return Err(Error::Interrupted("worst-set search stopped".into()));
        }
        // Form one batch: pop best first; bounded nodes expand at once, nodes whose
        // outage is known settle at once, the rest are solved together.
        let mut batch: Vec<(Node, Outage)> = Vec::new();
        let mut in_batch: HashMap<Outage, usize> = HashMap::new();
        let mut later: Vec<(Node, usize)> = Vec::new();
        let mut done = false;
        while batch.len() < BATCH {
            let Some(node) = s.queue.pop() else {
                // Done unless this batch's solves push children.
                done = batch.is_empty() && later.is_empty();
                break;
            };
            if !s.can_beat(node.priority) {
                if !batch.is_empty() {
                    // The batch's results may raise the threshold or add children.
                    s.queue.push(node);
                    break;
                }
                s.note_unsolved(node.priority);
                let n = s.pool.len();
                let last = *node.set.last().expect("queued sets are not empty");
                s.proof.sets_pruned += subtree_size(n - 1 - last, opts.k - node.set.len());
                // Everything still queued is bounded by this priority or less.
                while let Some(rest) = s.queue.pop() {
                    let last = *rest.set.last().expect("queued sets are not empty");
                    s.proof.sets_pruned += subtree_size(n - 1 - last, opts.k - rest.set.len());
                }
                done = true;
                break;
            }
            let own = node.own();
            if !s.can_beat(own) {
                s.proof.sets_bounded += 1;
                s.note_unsolved(own);
                s.expand(&node);
                continue;
            }
            let els: Vec<Element> = node.set.iter().map(|&i| s.pool[i]).collect();
            let o = Scenario::new(net, &els).outage(net);
            if let Some(&i) = s.outages.get(&o) {
                s.settle(node, i);
                continue;
            }
            if let Some(&b) = in_batch.get(&o) {
                later.push((node, b));
                continue;
            }
            in_batch.insert(o.clone(), batch.len());
            batch.push((node, o));
        }
        if !batch.is_empty() {
            let starts: Vec<Option<Arc<Warm>>> =
                batch.iter().map(|(n, _)| s.start_for(&n.set)).collect();
            let solved: Vec<Result<Evaluated>> = audit::in_pool(opts.threads, || {
                batch
                    .par_iter()
                    .zip(&starts)
                    .map(|((_, o), b)| engine.evaluate(net, o, b.as_deref()))
                    .collect()
            })?;
            drop(starts);
            let mut index = Vec::with_capacity(batch.len());
            let mut keep = Vec::new();
            for ((node, o), w) in batch.into_iter().zip(solved) {
                let w = w?;
                s.proof.stats.add(&w.stats);
                let (i, anchor) = s.store(o, &node.set, w);
                keep.push(anchor);
                index.push(i);
                s.settle(node, i);
            }
            for (node, b) in later {
                s.settle(node, index[b]);
            }
            drop(keep);
        }
        if done {
            break;
        }
    }
    s.proof.threshold = s.threshold();
    s.proof.bound = s.max_unsolved;
    let sets = s
        .list
        .iter()
        .take(opts.top)
        .map(|r| {
            let o = &s.solved[r.outage];
            let mut elements: Vec<Element> = r.set.iter().map(|&i| s.pool[i]).collect();
            elements = Scenario::new(net, &elements).elements;
            WorstSet {
                elements,
                failed: r.failed.clone(),
                shortfall: o.shortfall,
                stranded: o.stranded,
                lost: o.shortfall + o.stranded,
                served_required: o.served_required,
                proven: o.proven,
                matrix: 0,
            }
        })
        .collect();
    Ok(Worst {
        sets,
        proof: s.proof,
        options: opts,
        baseline: base.evaluation,
    })
}
