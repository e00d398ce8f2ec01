//! The report model: what every audit exporter reads, computed once per run.
//!
//! [`Model::build`] ranks the scenarios ([`rank::worst_first`]), folds equal outages
//! ([`Folding`]), computes element criticality ([`rank::criticality`]) and where one more
//! unit of processing helps ([`crate::expand::relief`]); it is the only caller of the
//! ranking in the report layer. The exporters ([`super::export`]: text, JSON, CSV, HTML,
//! Markdown) then only format what the model holds, so they cannot disagree on the order,
//! the ranks or the worst scenario.
//!
//! The model keeps every scenario's row (not only the `top` shown), the closings per
//! outage with their prices, the risk figures and the gates, so a fuller HTML report (a
//! table of all scenarios, the plan, the closings) reads what it needs from here without
//! solving or ranking again.

use crate::audit::{Audit, ScenarioId};
use crate::expand::{Candidates, Closing};
use crate::fold::Folding;
use crate::gate::GateResult;
use crate::headroom::AuditHeadroom;
use crate::model::Network;
use crate::rank::{self, Criticality};
use crate::risk::Risk;
use crate::routing::RoutedAudit;
use crate::screening::Screen;
use crate::solve::Evaluation;

use super::json::{Detail, Full};
use super::text::WhyPart;

/// What a run hands to [`Model::build`]: the solved audit and the optional parts computed
/// beside it. Every field is given by name, so adding a part does not reorder arguments.
pub struct Parts<'a> {
    pub net: &'a Network,
    pub audit: &'a Audit,
    /// The baseline's full evaluation (also when the audit keeps thin evaluations).
    pub baseline: &'a Evaluation,
    /// Outage `k`'s full evaluation while a file is written (thin audits read it back).
    pub full: Full<'a>,
    /// `--close`: the cheapest closing per outage (`None` where nothing is short).
    pub closings: Option<&'a [Option<Closing>]>,
    /// When given, the risk figures under independent failures.
    pub risk: Option<&'a Risk>,
    /// One verdict per gate, in the order given on the command line.
    pub gates: &'a [GateResult],
    /// The scenario `--why` explains, with its closing.
    pub why: Option<WhyPart<'a>>,
    /// `--routing nearest|steered`: the routed audit (its `audit` is `audit` above).
    pub routed: Option<&'a RoutedAudit>,
    /// How many scenarios (and elements) the tables show.
    pub top: usize,
    /// `--headroom`: per outage, the baseline's and the audit's least.
    pub headroom: Option<&'a AuditHeadroom>,
    /// Which scenarios of the `--json` document carry the per-demand lists.
    pub detail: Detail,
    /// `--exact-top`: which outages were solved exactly (the rest are approximate
    /// intervals).
    pub screen: Option<&'a Screen>,
}

/// The report model of one audit run. Indices are into `audit.scenarios` unless said.
pub struct Model<'a> {
    pub net: &'a Network,
    pub audit: &'a Audit,
    /// The baseline's full evaluation.
    pub baseline: &'a Evaluation,
    /// Reads outage `k`'s full evaluation back (thin audits) while a file is written.
    pub full: Full<'a>,
    /// Every scenario, worst first ([`rank::worst_first`]: shortfall, stranded,
    /// throughput, fewer elements, names), folded ones included.
    pub order: Vec<ScenarioId>,
    /// `rank_of[i]` (index with a [`ScenarioId`]): scenario `i`'s 1-based position in `order` (the JSON and CSV rank).
    pub rank_of: Vec<usize>,
    /// `order` without the scenarios folded into a smaller one (what the tables list).
    pub shown: Vec<ScenarioId>,
    /// Which scenarios are the same outage as a smaller one, and how many each stands for.
    pub folding: Folding,
    /// Every element that appears in a scenario, most critical first.
    pub criticality: Vec<Criticality>,
    /// How many scenarios have a shortfall above 0.
    pub short: usize,
    /// Expansion candidates (cost, limits, modules) per site; `default_costs` says that no
    /// site has a cost, so every site is a candidate at cost 1.
    pub candidates: Candidates,
    /// `--close`: the cheapest closing per outage (index with `audit.outage_of[i]`); each
    /// holds its cost, additions per site, what is not closable and the binding links.
    pub closings: Option<&'a [Option<Closing>]>,
    /// "Where one more unit helps": (site, scenarios helped, most served per added unit),
    /// best first ([`crate::expand::relief`]).
    pub relief: Vec<(crate::model::SiteIdx, usize, f64)>,
    /// The risk figures, when probabilities are given.
    pub risk: Option<&'a Risk>,
    /// One verdict per gate.
    pub gates: &'a [GateResult],
    /// The explained scenario (`--why`, `--fail`).
    pub why: Option<WhyPart<'a>>,
    /// The routed audit, under `--routing nearest|steered`.
    pub routed: Option<&'a RoutedAudit>,
    /// How many rows the tables show.
    pub top: usize,
    /// The topology map's geometry (layout and label places), computed once when a
    /// report is written ([`Model::drawn`]); `None` otherwise.
    pub drawing: Option<super::map::Drawing>,
    /// `--headroom`: per outage (index with `audit.outage_of[i]`), the baseline's, and the
    /// audit's least with the scenario that sets it.
    pub headroom: Option<&'a AuditHeadroom>,
    /// Which scenarios of the `--json` document carry the per-demand lists.
    pub detail: Detail,
    /// Per traffic matrix: its baseline's evaluation when the run holds it (a file with
    /// `matrices`); empty otherwise, and then every scenario reads `baseline`.
    pub matrix_baselines: Vec<Option<&'a Evaluation>>,
    /// `--exact-top`: which outages were solved exactly.
    pub screen: Option<&'a Screen>,
}

impl<'a> Model<'a> {
    /// Builds the model from a run's parts: O(S log S · E) for S scenarios of at most E
    /// elements (the ranking, the criticality pass, the folding's hash of outages) plus the
    /// relief scan over the outages' shadow prices. Deterministic: the order is total
    /// ([`rank`]), so thread count and evaluation order do not change it.
    pub fn build(p: Parts<'a>) -> Model<'a> {
        let audit = p.audit;
        let order = rank::worst_first(audit);
        let mut rank_of = vec![0; order.len()];
        for (r, &i) in order.iter().enumerate() {
            rank_of[i] = r + 1;
        }
        let folding = Folding::of(audit);
        // With several matrices the tables show each scenario once, under its worst matrix
        // (the first of its pairs in the worst-first order).
        let several = p.net.matrix_count() > 1;
        let mut seen: std::collections::HashSet<&[String]> = Default::default();
        let shown = order
            .iter()
            .copied()
            .filter(|&i| folding.into[i].is_none())
            .filter(|&i| !several || seen.insert(&audit.scenarios[i].failed[..]))
            .collect();
        let matrix_baselines = if several {
            (0..p.net.matrix_count())
                .map(|m| audit.baseline_under(m))
                .collect()
        } else {
            Vec::new()
        };
        let short = (0..audit.scenarios.len())
            .filter(|&i| audit.eval(ScenarioId(i)).shortfall > 0.0)
            .count();
        let candidates = Candidates::of(p.net);
        let relief = crate::expand::relief(audit, &candidates);
        Model {
            net: p.net,
            audit,
            baseline: p.baseline,
            full: p.full,
            criticality: rank::criticality_in(audit, &order),
            order,
            rank_of,
            shown,
            folding,
            short,
            candidates,
            closings: p.closings,
            relief,
            risk: p.risk,
            gates: p.gates,
            why: p.why,
            routed: p.routed,
            top: p.top,
            drawing: None,
            headroom: p.headroom,
            detail: p.detail,
            matrix_baselines,
            screen: p.screen,
        }
    }

    /// Whether the file has several traffic matrices (the reports then name them).
    pub fn several_matrices(&self) -> bool {
        self.net.matrix_count() > 1
    }

    /// The baseline scenario `i` is compared with: its matrix's baseline when the run
    /// holds it, else the run's baseline. O(1).
    pub fn baseline_of(&self, i: ScenarioId) -> &'a Evaluation {
        let m = self.audit.scenarios[i].matrix;
        self.matrix_baselines
            .get(m)
            .copied()
            .flatten()
            .unwrap_or(self.baseline)
    }

    /// Scenario `i`'s matrix view of the network (its demands), for demand names. O(1).
    pub fn net_of(&self, i: ScenarioId) -> &'a Network {
        self.net.view(self.audit.scenarios[i].matrix)
    }

    /// The model with the map's geometry computed ([`super::map::Drawing::of`]: the
    /// layout when the file gives no positions, and the label places), for the report
    /// files. Once per run; deterministic.
    pub fn drawn(mut self) -> Self {
        self.drawing = Some(super::map::Drawing::of(self.net));
        self
    }

    /// The worst scenario of the run (first in `order`), if there is any scenario.
    pub fn worst(&self) -> Option<ScenarioId> {
        self.order.first().copied()
    }

    /// Whether `--close` costs defaulted (no site has `expand_cost`).
    pub fn default_costs(&self) -> bool {
        self.candidates.default_costs
    }
}
