//! The `--json` files. Field names of the contract (`scenarios[].failed`,
//! `served_required`, `shortfall`, `stranded`, `throughput`) never change; everything else
//! is added for users. Numbers are rounded with [`super::file_num`].
//!
//! Size: the per-demand lists of a scenario ([`DETAIL_FIELDS`]: stranded, short and
//! cut-off demands) are written only for the scenarios [`Detail`] selects (the baseline
//! always), and the document says which (`detail` at the top, `detail` per scenario); a
//! report document is pretty-printed only when it is small ([`PRETTY_LIMIT`]), so a
//! carrier-scale audit is written compactly.

use super::export::{Exporter, Json};
use super::model::{Model, Parts};
use std::collections::BTreeMap;
use std::io::{self, Write};

use serde::Serialize;

use super::{file_diff, file_num, prob};
use crate::audit::{Audit, OutageId};
use crate::model::Network;
use crate::solve::{Evaluation, Resource};

mod chains;
mod compare;
mod plan;

pub use compare::*;
pub use plan::*;

#[derive(Serialize)]
pub struct AuditJson<'a> {
    pub network: String,
    pub unit: String,
    /// `best`, `nearest` or `steered` (`--routing`).
    pub routing: &'static str,
    pub caution: &'static str,
    /// Elements kept down in every scenario (`--down`); absent without it.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub down: Vec<String>,
    /// Which scenario objects carry the per-demand lists ([`DETAIL_FIELDS`]).
    pub detail: DetailJson,
    pub baseline: ScenarioJson,
    pub scenarios: LazyScenarios<'a>,
    pub criticality: Vec<CriticalityJson>,
    /// Risk figures under independent failures, when some pool element has a probability.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub risk: Option<RiskJson>,
    /// The gates asked for (absent when none).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub gates: Vec<GateJson>,
    /// `--headroom`: the least headroom over the scenarios and the scenario that sets it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub headroom: Option<super::headroom::HeadroomJson>,
    /// `--exact-top`: what was solved exactly.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub screen: Option<ScreenJson>,
}

/// The per-demand lists of a scenario object: their size grows with the demands of each
/// scenario, so a large audit writes them only where asked ([`Detail`]).
pub const DETAIL_FIELDS: [&str; 4] = [
    "stranded_demands",
    "demand_shortfall",
    "cut_off_demands",
    "cut_off_reasons",
];

/// Which scenarios of an audit document carry the per-demand lists ([`DETAIL_FIELDS`]);
/// the baseline always does.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Detail {
    /// Every scenario (`--detail`).
    All,
    /// The `n` worst scenarios the text's table lists (worst first, folded equivalents
    /// skipped) and the scenarios folded into them (`--detail-top N`, default `--top`).
    Worst(usize),
}

impl Detail {
    /// Per scenario of `m`: whether its object carries the per-demand lists. O(scenarios).
    /// Depends only on the model's order and folding, so a merged or resumed run selects
    /// the same scenarios as the run it stands for.
    pub fn selected(self, m: &Model<'_>) -> Vec<bool> {
        let n = m.audit.scenarios.len();
        match self {
            Detail::All => vec![true; n],
            Detail::Worst(top) => {
                let mut chosen = vec![false; n];
                for &i in m.shown.iter().take(top) {
                    chosen[i] = true;
                }
                for i in 0..n {
                    if let Some(r) = m.folding.into[i] {
                        chosen[i] = chosen[r];
                    }
                }
                chosen
            }
        }
    }
}

/// The top-level `detail` object: which scenario objects carry [`DETAIL_FIELDS`].
#[derive(Serialize)]
pub struct DetailJson {
    /// `all` (`--detail`) or `worst`.
    pub scenarios: &'static str,
    /// With `worst`: how many of the worst distinct scenarios carry them (with the
    /// scenarios folded into those); absent with `all`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub worst: Option<usize>,
    /// How many scenario objects carry them (each says so in its own `detail`).
    pub with_detail: usize,
    pub fields: [&'static str; 4],
    pub note: &'static str,
}

impl DetailJson {
    fn of(d: Detail, chosen: &[bool]) -> DetailJson {
        DetailJson {
            scenarios: match d {
                Detail::All => "all",
                Detail::Worst(_) => "worst",
            },
            worst: match d {
                Detail::All => None,
                Detail::Worst(n) => Some(n),
            },
            with_detail: chosen.iter().filter(|&&c| c).count(),
            fields: DETAIL_FIELDS,
            note: "the listed fields are present only in scenario objects whose `detail` is \
                   true (and in the baseline); `--detail` writes them for every scenario, \
                   `--detail-top N` for the N worst",
        }
    }
}

#[derive(Serialize)]
pub struct GateJson {
    /// `max_shortfall`, `max_stranded` or `min_served_fraction`.
    pub gate: &'static str,
    pub limit: f64,
    /// The worst value; `null` only for `min_headroom` when no scenario has surviving
    /// required demand.
    pub worst: Option<f64>,
    pub worst_scenario: Option<Vec<String>>,
    /// The traffic matrix of `worst_scenario`; absent for a file without `matrices`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
    pub passed: bool,
}

/// The `gates` array of an audit document.
pub fn gates_json(
    net: &Network,
    audit: &Audit,
    gates: &[crate::gate::GateResult],
) -> Vec<GateJson> {
    use crate::gate::GateKind;
    gates
        .iter()
        .map(|g| GateJson {
            gate: match g.kind {
                GateKind::MaxShortfall => "max_shortfall",
                GateKind::MaxStranded => "max_stranded",
                GateKind::MinServedFraction => "min_served_fraction",
                GateKind::MinHeadroom => "min_headroom",
            },
            limit: g.limit,
            worst: g.value.is_finite().then(|| file_num(g.value)),
            worst_scenario: g.scenario.map(|i| audit.scenarios[i].failed.clone()),
            matrix: g
                .scenario
                .filter(|_| net.matrix_count() > 1)
                .map(|i| net.matrix_id(audit.scenarios[i].matrix).to_string()),
            passed: g.passed,
        })
        .collect()
}

#[derive(Serialize)]
pub struct ScenarioJson {
    pub failed: Vec<String>,
    /// The traffic matrix (`base`: the file's `demands`); absent for a file without
    /// `matrices`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
    pub served_required: f64,
    pub shortfall: f64,
    pub stranded: f64,
    pub throughput: f64,
    /// With service chains: the volume reaching the destinations in the reported
    /// served_required allocation (origin units times each chain's gain).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub delivered: Option<f64>,
    /// With service chains, when another optimal allocation may deliver another amount:
    /// the range every optimal allocation's delivered volume lies in.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub delivered_range: Option<chains::DeliveredRangeJson>,
    /// With service chains: each function's load, capacity and price at each surviving
    /// site that runs it.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub functions: Vec<chains::FunctionJson>,
    /// Σ required of the surviving demands.
    pub required: f64,
    pub stranded_volume: f64,
    pub throughput_loss: f64,
    /// Shortfall beyond what the baseline already misses (0 for the baseline).
    pub shortfall_beyond_baseline: f64,
    /// Position in the worst-first ranking, from 1.
    pub rank: usize,
    /// Certified upper bound on served_required and the relative gap to it.
    pub upper_bound: f64,
    pub certified_gap: f64,
    /// Largest relative row violation of the allocation (primal feasibility check).
    pub max_violation: f64,
    /// Whether this object carries the per-demand lists ([`DETAIL_FIELDS`]); the
    /// document's top-level `detail` says which scenarios do.
    pub detail: bool,
    /// Demands whose own end site failed (a per-demand list: only with `detail`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub stranded_demands: Option<Vec<String>>,
    /// Demands short in one optimal allocation (only those with shortfall > 0; a
    /// per-demand list: only with `detail`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub demand_shortfall: Option<Vec<DemandShortJson>>,
    pub saturated_links: Vec<String>,
    pub saturated_sites: Vec<String>,
    pub bottlenecks: Vec<BottleneckJson>,
    /// Surviving demands no walk through a processing site can serve (a per-demand list:
    /// only with `detail`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cut_off_demands: Option<Vec<String>>,
    /// Why each cut-off demand cannot be served: `no path` or `no processing reachable`
    /// (only with `detail`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub cut_off_reasons: Option<BTreeMap<String, &'static str>>,
    /// How served_required was verified (bounds, residual, backend).
    pub verification: VerificationJson,
    /// How throughput was verified, when it needed its own LP.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub throughput_verification: Option<VerificationJson>,
    /// Shadow price of each site's processing row: served units per added unit.
    pub site_prices: BTreeMap<String, f64>,
    /// The scenario's closing, present when requested (`null` when the scenario has no shortfall).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub closing: Option<serde_json::Value>,
    /// Under `--routing nearest|steered`: utilisation, overloads, the best re-route.
    #[serde(flatten)]
    pub routed: Option<super::routing::RoutedScenarioJson>,
    /// Probability that exactly this scenario's elements fail (with `risk`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub probability: Option<f64>,
    /// The failed list of the smallest scenario with the same outage, when this one is
    /// folded into it (tables list it there as an equivalent).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub same_as: Option<Vec<String>>,
    /// `--headroom`: the largest factor of required demand every surviving demand can
    /// send at once (`null` without surviving required demand).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub headroom: Option<Option<f64>>,
    /// `--headroom`: how that factor was verified (absent when it is `null`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub headroom_verification: Option<super::headroom::HeadroomVerificationJson>,
    /// `--exact-top`: `true` when this scenario's values are exact (the walk engine solved
    /// it, or the approximate engine's interval closed), `false` when they are the
    /// approximate engine's open proven interval (`served_required` the lower end,
    /// `upper_bound` the upper end).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub exact: Option<bool>,
}

/// `--exact-top`: the top-level `screen` object of an audit document.
#[derive(Serialize)]
pub struct ScreenJson {
    /// The N asked for: the N worst scenarios are exactly the exact engines' N worst.
    pub top: usize,
    /// Distinct outages solved exactly by the walk engine.
    pub solved_exactly: usize,
    /// Distinct outages exact without it: their approximate interval closed (both
    /// quantities proven).
    pub closed: usize,
    /// Distinct outages left as open proven intervals.
    pub certified: usize,
}

/// The `risk` object of an audit document (see [`crate::risk`]).
#[derive(Serialize)]
pub struct RiskJson {
    pub expected_shortfall: f64,
    /// Upper bound on the expectation over every state (unexamined ones short by all).
    pub expected_shortfall_bound: f64,
    pub p_any_shortfall: f64,
    pub covered_probability: f64,
    pub uncovered_probability: f64,
    /// Pool elements without a probability: treated as never failing for these sums.
    pub never_failing: Vec<String>,
    pub most_likely_short: Vec<LikelyJson>,
    pub assumption: &'static str,
}

#[derive(Serialize)]
pub struct LikelyJson {
    pub failed: Vec<String>,
    pub probability: f64,
    pub shortfall: f64,
}

/// The risk object; also sets each scenario's `probability`.
pub fn attach_risk(doc: &mut AuditJson<'_>, net: &Network, audit: &Audit, r: &crate::risk::Risk) {
    let probability: Vec<f64> = r.probability.iter().map(|&p| prob(p)).collect();
    doc.scenarios
        .patch(Box::new(move |i, sc| sc.probability = Some(probability[i])));
    doc.risk = Some(RiskJson {
        expected_shortfall: prob(r.expected_shortfall),
        expected_shortfall_bound: prob(r.expected_shortfall_bound),
        p_any_shortfall: prob(r.p_any_shortfall),
        covered_probability: prob(r.covered_probability),
        uncovered_probability: prob(r.uncovered_probability),
        never_failing: r.without_probability.iter().map(|e| e.name(net)).collect(),
        most_likely_short: r
            .most_likely_short
            .iter()
            .map(|&i| LikelyJson {
                failed: audit.scenarios[i].failed.clone(),
                probability: prob(r.probability[i]),
                shortfall: file_num(audit.eval(i).shortfall),
            })
            .collect(),
        assumption: crate::risk::ASSUMPTION,
    });
}

/// The verifier's account of one LP result.
#[derive(Serialize)]
pub struct VerificationJson {
    /// `proven` (the bounds meet) or `unproven` (served is the proven lower bound).
    pub status: &'static str,
    pub lower_bound: f64,
    pub upper_bound: f64,
    /// Largest relative row residual of the kept allocation.
    pub residual: f64,
    pub backend: String,
    pub attempts: usize,
}

impl VerificationJson {
    pub fn of(v: &crate::solve::Verification) -> VerificationJson {
        VerificationJson {
            status: if v.proven { "proven" } else { "unproven" },
            lower_bound: file_num(v.lower),
            upper_bound: file_num(v.upper),
            residual: v.residual,
            backend: v.backend.clone(),
            attempts: v.attempts,
        }
    }
}

#[derive(Serialize)]
pub struct DemandShortJson {
    pub demand: String,
    pub from: String,
    pub to: String,
    pub required: f64,
    pub served: f64,
    pub shortfall: f64,
}

#[derive(Serialize)]
pub struct BottleneckJson {
    pub kind: &'static str,
    pub id: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub from: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub to: Option<String>,
    pub price: f64,
}

#[derive(Serialize)]
pub struct CriticalityJson {
    pub element: String,
    pub worst_shortfall: f64,
    pub worst_stranded: f64,
    pub scenarios_short: usize,
    pub worst_scenario: Vec<String>,
}

/// One scenario's JSON object (without `closing`), with the per-demand lists when
/// `detail`. O(demands + arcs + sites) with them, O(arcs + sites + bottlenecks) without.
pub fn scenario_json(
    net: &Network,
    failed: &[String],
    e: &Evaluation,
    baseline: &Evaluation,
    rank: usize,
    detail: bool,
) -> ScenarioJson {
    ScenarioJson {
        failed: failed.to_vec(),
        matrix: None,
        served_required: file_num(e.served_required),
        shortfall: file_num(e.shortfall),
        stranded: file_num(e.stranded),
        throughput: file_num(e.throughput),
        delivered: e.delivered.map(file_num),
        delivered_range: chains::delivered_range_json(net, e),
        functions: chains::functions_json(net, e),
        required: file_num(e.surviving_required),
        stranded_volume: file_num(e.stranded_volume),
        throughput_loss: file_diff(baseline.throughput, e.throughput).max(0.0),
        shortfall_beyond_baseline: file_diff(e.shortfall, baseline.shortfall).max(0.0),
        rank,
        upper_bound: file_num(e.upper_bound),
        certified_gap: e.certified_gap(),
        max_violation: e.max_violation,
        detail,
        stranded_demands: detail.then(|| {
            e.stranded_demands
                .iter()
                .map(|&d| net.demands[d].label.clone())
                .collect()
        }),
        demand_shortfall: detail.then(|| {
            net.demands
                .iter()
                .enumerate()
                .filter(|(d, _)| e.demand_shortfall[*d] > 0.0)
                .map(|(d, dem)| DemandShortJson {
                    demand: dem.label.clone(),
                    from: net.sites[dem.from].id.clone(),
                    to: net.sites[dem.to].id.clone(),
                    required: file_num(dem.required),
                    served: file_num(e.demand_flow[d]),
                    shortfall: file_num(e.demand_shortfall[d]),
                })
                .collect()
        }),
        saturated_links: e
            .saturated_links(net)
            .iter()
            .map(|&l| net.links[l].id.clone())
            .collect(),
        saturated_sites: e
            .saturated_sites()
            .iter()
            .map(|&s| net.sites[s].id.clone())
            .collect(),
        bottlenecks: e
            .bottlenecks
            .iter()
            .map(|b| match b.resource {
                Resource::Arc(a) => BottleneckJson {
                    kind: "link",
                    id: net.links[net.arcs[a].link].id.clone(),
                    from: Some(net.sites[net.arcs[a].from].id.clone()),
                    to: Some(net.sites[net.arcs[a].to].id.clone()),
                    price: file_num(b.price),
                },
                Resource::Site(v) => BottleneckJson {
                    kind: "site",
                    id: net.sites[v].id.clone(),
                    from: None,
                    to: None,
                    price: file_num(b.price),
                },
            })
            .collect(),
        cut_off_demands: detail.then(|| {
            e.cut_off
                .iter()
                .map(|&(d, _)| net.demands[d].label.clone())
                .collect()
        }),
        cut_off_reasons: detail.then(|| {
            e.cut_off
                .iter()
                .map(|&(d, r)| {
                    (
                        net.demands[d].label.clone(),
                        match r {
                            crate::solve::Unservable::NoPath => "no path",
                            crate::solve::Unservable::NoProcessing => "no processing reachable",
                        },
                    )
                })
                .collect()
        }),
        verification: VerificationJson::of(&e.verification),
        throughput_verification: e.throughput_verification.as_ref().map(VerificationJson::of),
        site_prices: net
            .sites
            .iter()
            .zip(&e.site_price)
            .filter_map(|(s, p)| p.map(|p| (s.id.clone(), file_num(p))))
            .collect(),
        closing: None,
        routed: None,
        probability: None,
        same_as: None,
        headroom: None,
        headroom_verification: None,
        exact: None,
    }
}

/// Outage `k`'s full evaluation, for documents built from thin audits.
pub type Full<'a> = &'a (dyn Fn(OutageId) -> crate::error::Result<Evaluation> + Sync);

/// The `scenarios` array of an audit document, built one scenario at a time while it is
/// written (so a document of any length needs memory for one scenario): serialises exactly
/// like the `Vec<ScenarioJson>` it stands for.
pub struct LazyScenarios<'a> {
    net: &'a Network,
    audit: &'a Audit,
    baseline: &'a Evaluation,
    closing: Option<&'a [serde_json::Value]>,
    rank_of: Vec<usize>,
    /// Per scenario: whether its object carries the per-demand lists.
    detail: Vec<bool>,
    full: Full<'a>,
    /// Per scenario: the failed list of the smallest equivalent scenario, when folded.
    same_as: Vec<Option<Vec<String>>>,
    /// Per matrix: its baseline when the run holds it (empty for a file without
    /// `matrices`: every scenario then reads `baseline` and carries no `matrix`).
    baselines: Vec<Option<&'a Evaluation>>,
    /// Additions of other parts of the report (risk, routed fields), applied to every
    /// scenario object as it is written.
    patches: Vec<Patch<'a>>,
}

/// Adds fields to scenario `i`'s object as it is written.
pub type Patch<'a> = Box<dyn Fn(usize, &mut ScenarioJson) + 'a>;

impl<'a> LazyScenarios<'a> {
    /// Applies `patch` to every scenario object as it is written.
    pub fn patch(&mut self, patch: Patch<'a>) {
        self.patches.push(patch);
    }
}

impl LazyScenarios<'_> {
    /// Scenario `i`'s object. O(demands + sites + its lists).
    pub fn get(&self, i: usize) -> crate::error::Result<ScenarioJson> {
        let k = self.audit.outage_of[i];
        let held = self.audit.eval(i);
        let fetched;
        // Thin against its own matrix's demands (a matrix may hold more or fewer demands
        // than `base`).
        let e = if held.is_thin(self.net.view(self.audit.scenarios[i].matrix)) {
            fetched = (self.full)(k)?;
            &fetched
        } else {
            held
        };
        let sc = &self.audit.scenarios[i];
        let baseline = self
            .baselines
            .get(sc.matrix)
            .copied()
            .flatten()
            .unwrap_or(self.baseline);
        let mut j = scenario_json(
            self.net.view(sc.matrix),
            &sc.failed,
            e,
            baseline,
            self.rank_of[i],
            self.detail[i],
        );
        if !self.baselines.is_empty() {
            j.matrix = Some(self.net.matrix_id(sc.matrix).to_string());
        }
        j.closing = self.closing.map(|c| c[i].clone());
        j.same_as = self.same_as[i].clone();
        for p in &self.patches {
            p(i, &mut j);
        }
        Ok(j)
    }
}

impl Serialize for LazyScenarios<'_> {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::{Error as _, SerializeSeq};
        let n = self.audit.scenarios.len();
        let mut seq = ser.serialize_seq(Some(n))?;
        for i in 0..n {
            let j = self.get(i).map_err(S::Error::custom)?;
            seq.serialize_element(&j)?;
        }
        seq.end()
    }
}

/// The whole audit document; `closing[i]`, when given, is attached to scenario `i`.
/// Every evaluation must be full ([`audit_json_with`] reads thin ones back). Builds the
/// run's [`Model`] (no gates, risk or closings) for it.
pub fn audit_json<'a>(
    net: &'a Network,
    audit: &'a Audit,
    baseline: &'a Evaluation,
    closing: Option<&'a [serde_json::Value]>,
) -> AuditJson<'a> {
    let model = Model::build(Parts {
        net,
        audit,
        baseline,
        full: &all_full,
        closings: None,
        risk: None,
        gates: &[],
        why: None,
        routed: None,
        top: 0,
        headroom: None,
        detail: Detail::All,
        screen: None,
    });
    audit_json_with(&model, closing)
}

/// The [`Full`] of an audit whose evaluations are all full: asking for one is an error.
pub fn all_full(k: OutageId) -> crate::error::Result<Evaluation> {
    Err(crate::error::Error::Usage(format!(
        "internal: outage {k} has no full evaluation"
    )))
}

/// The audit document of `m` (thin evaluations read back through `m.full`, the baseline
/// full) with `closing[i]` attached to scenario `i` when given; its ranks, folding and
/// criticality are the model's. O(scenarios + elements); the scenarios are built as
/// written.
pub fn audit_json_with<'a>(
    m: &Model<'a>,
    closing: Option<&'a [serde_json::Value]>,
) -> AuditJson<'a> {
    let (net, audit, baseline) = (m.net, m.audit, m.baseline);
    let folding = &m.folding;
    let same_as = (0..audit.scenarios.len())
        .map(|i| folding.into[i].map(|r| audit.scenarios[r].failed.clone()))
        .collect();
    let detail = m.detail.selected(m);
    let detail_json = DetailJson::of(m.detail, &detail);
    let scenarios = LazyScenarios {
        net,
        audit,
        baseline,
        closing,
        rank_of: m.rank_of.clone(),
        detail,
        full: m.full,
        same_as,
        baselines: m.matrix_baselines.clone(),
        patches: Vec::new(),
    };
    AuditJson {
        network: net.name.clone(),
        unit: net.unit.clone(),
        routing: "best",
        caution: super::caution_for(net),
        down: audit
            .scenarios
            .first()
            .map(|s| s.down.iter().map(|e| e.name(net)).collect())
            .unwrap_or_default(),
        risk: None,
        detail: detail_json,
        baseline: {
            let mx = audit.baseline_matrix();
            let mut b = scenario_json(net.view(mx), &[], baseline, baseline, 0, true);
            if m.several_matrices() {
                b.matrix = Some(net.matrix_id(mx).to_string());
            }
            b
        },
        scenarios,
        criticality: m
            .criticality
            .iter()
            .map(|c| CriticalityJson {
                element: c.element.name(net),
                worst_shortfall: file_num(c.worst_shortfall),
                worst_stranded: file_num(c.worst_stranded),
                scenarios_short: c.scenarios_short,
                worst_scenario: audit.scenarios[c.worst_scenario].failed.clone(),
            })
            .collect(),
        gates: Vec::new(),
        headroom: None,
        screen: None,
    }
}

/// The `--json` document of an audit: the routed document under `--routing`, the
/// closings (with `--close`), one object per gate, the risk fields; streamed to `w`.
impl Exporter<Model<'_>> for Json {
    fn write(&self, m: &Model<'_>, w: &mut dyn Write) -> io::Result<()> {
        let closing_json = m.closings.map(|c| {
            m.audit
                .outage_of
                .iter()
                .map(|&k| closing_json(m.net, c[k].as_ref(), m.default_costs()))
                .collect::<Vec<_>>()
        });
        let mut doc = match m.routed {
            Some(ra) => super::routing::audit_json(m, ra, closing_json.as_deref()),
            None => audit_json_with(m, closing_json.as_deref()),
        };
        doc.gates = gates_json(m.net, m.audit, m.gates);
        if let Some(r) = m.risk {
            attach_risk(&mut doc, m.net, m.audit, r);
        }
        super::headroom::attach(&mut doc, m);
        if let Some(sc) = m.screen {
            let (exact, outage_of) = (&sc.exact, &m.audit.outage_of);
            doc.scenarios
                .patch(Box::new(move |i, j| j.exact = Some(exact[outage_of[i]])));
            doc.screen = Some(ScreenJson {
                top: sc.top,
                solved_exactly: sc.solved_exactly(),
                closed: sc.closed(),
                certified: sc.certified(),
            });
        }
        write(w, &doc)
    }
}

/// A report document whose compact form is at most this many bytes is pretty-printed
/// (indented, one field a line: at most a few MB to read in an editor); a larger one is
/// written compactly (one line), which is several times smaller and what tools read.
pub const PRETTY_LIMIT: u64 = 1 << 20;

/// The JSON exporter: any report document with a trailing newline, to `w`, streamed:
/// pretty when its compact form is at most [`PRETTY_LIMIT`] bytes, else compact. The
/// choice is a function of the document alone, so a resumed or merged run writes the
/// same bytes. Cost: a first compact pass that stops after [`PRETTY_LIMIT`] bytes.
pub fn write<T: Serialize>(w: &mut dyn Write, doc: &T) -> io::Result<()> {
    if compact_within(doc, PRETTY_LIMIT) {
        write_pretty(w, doc)
    } else {
        serde_json::to_writer(&mut *w, doc).map_err(io::Error::other)?;
        w.write_all(b"\n")
    }
}

/// Whether `doc`'s compact form is at most `limit` bytes: serialised into a counter that
/// stops the serialisation once past `limit`. O(min(size, limit)). A document that fails
/// to serialise within the limit counts as small (the real write reports the error).
fn compact_within<T: Serialize>(doc: &T, limit: u64) -> bool {
    struct Counter {
        bytes: u64,
        limit: u64,
    }
    impl Write for Counter {
        fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
            self.bytes += buf.len() as u64;
            if self.bytes > self.limit {
                return Err(io::Error::other("over the limit"));
            }
            Ok(buf.len())
        }
        fn flush(&mut self) -> io::Result<()> {
            Ok(())
        }
    }
    let mut c = Counter { bytes: 0, limit };
    let _ = serde_json::to_writer(&mut c, doc);
    c.bytes <= limit
}

/// Any document as pretty JSON with a trailing newline, to `w`, streamed (byte-identical
/// to [`to_string`]); network files (`import`) are always written so.
pub fn write_pretty<T: Serialize>(w: &mut dyn Write, doc: &T) -> io::Result<()> {
    serde_json::to_writer_pretty(&mut *w, doc).map_err(io::Error::other)?;
    w.write_all(b"\n")
}

/// Serialises any document as pretty JSON with a trailing newline.
pub fn to_string<T: Serialize>(doc: &T) -> String {
    let mut s = serde_json::to_string_pretty(doc).expect("report types always serialise");
    s.push('\n');
    s
}

/// The `closing` object of one scenario: `{"cost","add","not_closable"}` plus details.
pub fn closing_json(
    net: &Network,
    c: Option<&crate::expand::Closing>,
    default_costs: bool,
) -> serde_json::Value {
    match c {
        None => serde_json::Value::Null,
        Some(c) => {
            let mut j = serde_json::json!({
            "cost": file_num(c.cost),
            "add": additions_map(net, &c.add),
            "not_closable": file_num(c.not_closable),
            "best_served_required": file_num(c.best),
            "binding_links": c.binding_links.iter().map(|&l| net.links[l].id.clone()).collect::<Vec<_>>(),
            "dual_bound": file_num(c.dual_bound),
            "served_after": file_num(c.served_after),
            "verified": c.verified,
            "modules_exhaustive": c.modules_exhaustive,
            "default_costs": default_costs,
            });
            if let (Some(bought), Some(o)) = (&c.functions, j.as_object_mut()) {
                o.insert(
                    "add_functions".into(),
                    serde_json::json!(function_additions_map(net, bought)),
                );
            }
            j
        }
    }
}

/// Per site, per function: the units bought (service chains), sites and functions by id.
fn function_additions_map(
    net: &Network,
    bought: &[crate::expand::chain_buy::FunctionPurchase],
) -> BTreeMap<String, BTreeMap<String, f64>> {
    let mut out: BTreeMap<String, BTreeMap<String, f64>> = BTreeMap::new();
    if let Some(ch) = &net.chains {
        for p in bought.iter().filter(|p| p.units > 0.0) {
            out.entry(net.sites[p.site].id.clone())
                .or_default()
                .insert(ch.functions[p.function].id.clone(), file_num(p.units));
        }
    }
    out
}

fn additions_map(net: &Network, add: &[f64]) -> BTreeMap<String, f64> {
    add.iter()
        .enumerate()
        .filter(|(_, a)| **a > 0.0)
        .map(|(v, a)| (net.sites[v].id.clone(), file_num(*a)))
        .collect()
}
