//! Closing the gaps: the cheapest added processing that lets a scenario reach the best
//! served_required any expansion can reach ([`close`]), and one expansion for a whole set
//! of scenarios ([`plan`]): least cost closing every closable gap, or the best use of a
//! budget, found by constraint generation.
//!
//! Both use the two-layer model with one extra variable `add_v >= 0` per candidate site in
//! that site's processing row: the plan's master in the edge flow model of
//! [`crate::solve::flow`] ([`Master::Edge`], `plan --master edge`), or in walk form
//! ([`crate::solve::colgen::plan`], [`Master::Walks`], the default).
//!
//! | file | what |
//! |---|---|
//! | `candidates.rs` | where processing may be added, the `add_v` variables |
//! | `close.rs` | per-scenario closing, best reachable served |
//! | `master.rs` | the master problem and its lexicographic phases |
//! | `generate.rs` | the constraint-generation loop, re-verification, comparing plans |
//! | `modules.rs` | whole modules: rounding neighbourhood and local search |
//! | `tidy.rs` | trim and drop additions that serve nothing, the drivers of each purchase |
//!
//! Invariant: adding processing never lowers served_required (the LP only gains columns
//! of capacity), so a scenario without shortfall needs nothing, an outage whose best
//! reachable value equals its served value is unchanged by any plan, and a plan is
//! verified for a scenario by solving that scenario with the plan applied.

mod candidates;
pub mod chain_buy;
mod close;
mod generate;
mod master;
mod modules;
mod tidy;

pub use candidates::Candidates;
pub(crate) use candidates::{add_vars, values};
pub use close::{Closing, binding, close, close_with, links_of};
pub(crate) use close::{best_reachable, target};
pub(crate) use generate::{TOP_UP_ROUNDS, cheapest_raise, reaches};
pub use master::TOTAL_MAX_VARS;
pub(crate) use tidy::snap_up;

use crate::audit::{self, Audit, RunOptions};
use crate::error::Result;
use crate::model::{Network, SiteIdx};
use crate::solve::evaluator::Walks;
use crate::solve::{Evaluation, TOL};
use crate::tol::PRICE_BINDS;
use generate::{Generation, generate, verify};

/// What a plan optimises. Every goal ends with the least cost that keeps its optimum,
/// then a tie-break toward sites earlier in the file (see `master.rs`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Goal {
    /// Least cost such that every scenario reaches its best reachable served_required.
    CloseAll,
    /// Within budget, maximise the worst scenario's served fraction of required; with it
    /// held, minimise the total shortfall over the scenarios; with both held, the cost.
    WorstWithin(f64),
    /// Within budget, minimise the total shortfall over the scenarios (an outage shared by
    /// several scenarios counts once per scenario); with it held, the cost.
    TotalWithin(f64),
}

/// The formulation of a plan's master problem.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Master {
    /// Column generation over processing walks, one block of rows per outage
    /// ([`crate::solve::colgen::plan`]): what `redoubt plan` uses. Its rounds and
    /// lexicographic phases are solved by the warm GUB simplex (a vertex, rows met to
    /// rounding, so its plans are the edge master's; demand rows kept out of its inverse);
    /// a master past the simplex's size limit ([`crate::solve::gub::COUPLING_ROWS`] rows
    /// besides the demand rows, e.g. thousands of outages at once) goes to the
    /// interior-point backend instead, whose rows hold only to about
    /// 1e-7 of their magnitude (as the edge master's).
    Walks,
    /// One edge flow-model copy (sources × arcs variables) per outage, solved by the
    /// interior-point backend: the hidden `plan --master edge`, the cross-check of the walk
    /// master; refused past [`TOTAL_MAX_VARS`] variables.
    Edge,
}

/// One round of constraint generation.
#[derive(Debug, Clone, PartialEq)]
pub struct Round {
    /// Scenarios (distinct outages) in the master problem this round.
    pub active: usize,
    /// Master's primary objective: the plan's cost ([`Goal::CloseAll`]), the worst served
    /// fraction ([`Goal::WorstWithin`]), or the total shortfall over the scenarios of the
    /// outages in the master ([`Goal::TotalWithin`]).
    pub objective: f64,
    /// Outages found violated by the master's plan (and added for the next round).
    pub violated: usize,
}

/// The LP solves of a plan's walk master over all rounds of constraint generation.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct MasterStats {
    /// Restricted-master LP solves (one per column-generation round).
    pub solves: usize,
    /// Of them, cold interior-point solves: the master outgrew the exact warm simplex
    /// ([`crate::solve::gub::COUPLING_ROWS`] rows besides its demand rows), so its rows
    /// hold only to about 1e-7 of
    /// its magnitude (the plan is verified on every scenario all the same).
    pub interior_point_solves: usize,
}

/// A plan and how it does in every scenario.
#[derive(Debug, Clone)]
pub struct Plan {
    pub goal: Goal,
    /// Units added per site.
    pub add: Vec<f64>,
    pub cost: f64,
    pub rounds: Vec<Round>,
    /// The master's LP solves (all zero for plans not found by the walk master).
    pub master: MasterStats,
    /// Per outage of the audit: the best reachable served_required.
    pub best: Vec<f64>,
    /// Per outage: the evaluation with the plan applied (every outage with a shortfall
    /// re-solved).
    pub after: Vec<Evaluation>,
    /// Per site: the outages that serve less when that site's addition is removed (the
    /// other additions kept), with the units they lose, most first. Non-empty for every
    /// site the plan buys at.
    pub drivers: Vec<Vec<(usize, f64)>>,
    /// The worst served fraction of required after the plan.
    pub worst_fraction: f64,
    /// Additions the LP proposed that the drop pass removed (they served nothing).
    pub dropped: usize,
    /// When some site buys in modules (`expand_step`): the LP plan before rounding, its
    /// cost, and the gap of the module plan to it.
    pub modules: Option<ModuleRounding>,
    /// With service chains: each function bought, per site, with its drivers
    /// ([`chain_buy::plan`]); `add` then holds the units per site, all functions together.
    /// `None` for processing purchases.
    pub functions: Option<Vec<chain_buy::FunctionPurchase>>,
}

/// How a continuous plan became a plan in whole modules.
#[derive(Debug, Clone, PartialEq)]
pub struct ModuleRounding {
    pub lp_add: Vec<f64>,
    /// The continuous plan's cost (for close-all, a lower bound on any module plan).
    pub lp_cost: f64,
    /// Module plan cost − LP cost (≥ 0).
    pub gap: f64,
    /// Modules the local search removed from the best rounding.
    pub repaired: usize,
    /// Whole-module plans checked (each verified by re-solving the outages).
    pub checked: usize,
}

/// One plan for all outages of `audit`:
///
/// 1. best reachable served_required per outage (one LP each, in parallel); outages where
///    it is above the served value are *gainable*, the rest are fixed by any plan;
/// 2. constraint generation over the gainable outages (`generate.rs`), whose master is
///    solved in lexicographic phases ending with the least cost (`master.rs`);
/// 3. whole modules where sites buy by `expand_step` (`modules.rs`);
/// 4. trim and drop additions that serve nothing, and find what drives each (`tidy.rs`);
/// 5. every outage with a shortfall re-solved with the final plan.
///
/// Cost: dominated by the master solves (per round, two to four column generations over
/// one block of walk rows per active outage, [`Master::Walks`]; at most |gainable|
/// rounds) and by one [`crate::solve::evaluate`] per gainable outage per verification.
pub fn plan(net: &Network, audit: &Audit, goal: Goal, opts: RunOptions) -> Result<Plan> {
    plan_with(net, audit, goal, opts, Master::Walks)
}

/// [`plan`] with the master problem in formulation `master`.
pub fn plan_with(
    net: &Network,
    audit: &Audit,
    goal: Goal,
    opts: RunOptions,
    master: Master,
) -> Result<Plan> {
    let cands = Candidates::of(net);
    let n_out = audit.outages.len();
    let bests: Vec<f64> = audit::par_map(
        &(0..n_out).collect::<Vec<_>>(),
        opts,
        "best reachable",
        |&k| {
            let e = &audit.evaluations[k];
            if e.shortfall <= 0.0 {
                return Ok(e.served_required);
            }
            let warm = audit.baseline.as_deref();
            let o = &audit.outages[k];
            Ok(close::best_reachable_from(&Walks, net, o, &cands, e, warm)?.0)
        },
    )?;
    let eval = |k: usize| &audit.evaluations[k];
    let gain = |k: usize| bests[k] - eval(k).served_required;
    let mut gainable: Vec<usize> = (0..n_out)
        .filter(|&k| gain(k) > TOL * eval(k).surviving_required.max(1.0))
        .collect();
    // Start from the outages that gain most (close-all) or are worst (budgets).
    gainable.sort_by(|&a, &b| {
        match goal {
            Goal::CloseAll => gain(b).total_cmp(&gain(a)),
            _ => eval(a)
                .served_fraction()
                .total_cmp(&eval(b).served_fraction()),
        }
        .then(a.cmp(&b))
    });
    let t_cap = (0..n_out)
        .filter(|k| !gainable.contains(k))
        .map(|k| eval(k).served_fraction())
        .fold(1.0, f64::min);
    let mut multiplicity = vec![0usize; n_out];
    for &k in &audit.outage_of {
        multiplicity[k] += 1;
    }
    let data = Generation {
        bests: &bests,
        gainable: &gainable,
        multiplicity: &multiplicity,
        t_cap,
        master,
    };
    let g = generate(net, audit, &cands, &data, goal, opts)?;
    let (add, after, mut modules) = if cands.any_modular() {
        let (add, after, m) = modules::round_to_modules(net, audit, &cands, &data, goal, &g, opts)?;
        (add, after, Some(m))
    } else {
        (g.add.clone(), g.after.clone(), None)
    };
    let budget = match goal {
        Goal::CloseAll => None,
        Goal::WorstWithin(b) | Goal::TotalWithin(b) => Some(b),
    };
    let tidied = tidy::tidy(net, audit, &cands, &data, budget, (add, after), opts)?;
    let short: Vec<usize> = (0..n_out).filter(|&k| eval(k).shortfall > 0.0).collect();
    let after = verify(&net.with_added_processing(&tidied.add), audit, &short, opts)?;
    let cost = cands.cost_of(&tidied.add);
    if let Some(m) = &mut modules {
        m.gap = (cost - m.lp_cost).max(0.0);
    }
    Ok(Plan {
        goal,
        cost,
        add: tidied.add,
        rounds: g.rounds,
        master: g.stats,
        best: bests,
        worst_fraction: worst_fraction(&after),
        after,
        drivers: tidied.drivers,
        dropped: tidied.dropped,
        modules,
        functions: None,
    })
}

/// The lowest served fraction over `after` (1 when empty): a plan's
/// [`Plan::worst_fraction`]. O(outages).
pub(crate) fn worst_fraction(after: &[Evaluation]) -> f64 {
    after
        .iter()
        .map(Evaluation::served_fraction)
        .fold(1.0, f64::min)
}

/// Per expandable site (a candidate of `cands` with room to add): how many outages (with a
/// shortfall) would serve more with one more unit there, and the largest such gain; from
/// each outage's shadow prices. Sites without a processing row in an outage (no
/// capacity) are not priced there; sites that cannot be expanded are left out, since no
/// unit can be bought there.
pub fn relief(audit: &Audit, cands: &Candidates) -> Vec<(SiteIdx, usize, f64)> {
    let n_sites = cands.cost.len();
    let mut out: Vec<(SiteIdx, usize, f64)> = (0..n_sites).map(|v| (SiteIdx(v), 0, 0.0)).collect();
    for e in &audit.evaluations {
        if e.shortfall <= 0.0 {
            continue;
        }
        for (v, p) in e.site_price.iter().enumerate() {
            if let Some(p) = p
                && *p > PRICE_BINDS
            {
                out[v].1 += 1;
                out[v].2 = f64::max(out[v].2, *p);
            }
        }
    }
    out.retain(|r| r.1 > 0 && cands.expandable(r.0.0));
    out.sort_by(|a, b| b.1.cmp(&a.1).then(b.2.total_cmp(&a.2)).then(a.0.cmp(&b.0)));
    out
}

#[cfg(test)]
mod tests;
