//! The `plan --json` document.

use std::collections::BTreeMap;

use serde::Serialize;

use super::*;
use crate::audit::{Audit, OutageId};
use crate::model::Network;
use crate::report::export::{Exporter, Json, PlanReport};
use crate::report::{file_diff, file_num};

#[derive(Serialize)]
pub struct PlanJson {
    pub network: String,
    pub unit: String,
    /// `best` or `steered` (`--routing`).
    pub routing: &'static str,
    pub caution: &'static str,
    pub goal: String,
    pub default_costs: bool,
    pub plan: PlanBody,
    pub rounds: Vec<RoundJson>,
    pub worst_fraction_after: f64,
    /// Present when some site buys in modules (`expand_step`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub modules: Option<serde_json::Value>,
    pub scenarios: Vec<PlanScenarioJson>,
}

#[derive(Serialize)]
pub struct PlanBody {
    pub cost: f64,
    pub add: BTreeMap<String, f64>,
    /// With service chains: per site, per function, the units of function capacity bought
    /// (`add` then holds each site's functions together). Absent for processing purchases.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub add_functions: Option<BTreeMap<String, BTreeMap<String, f64>>>,
    /// Per site: the scenarios that serve less without that site's addition, most first.
    pub drivers: BTreeMap<String, Vec<Vec<String>>>,
}

#[derive(Serialize)]
pub struct RoundJson {
    pub active: usize,
    pub objective: f64,
    pub violated: usize,
}

#[derive(Serialize)]
pub struct PlanScenarioJson {
    pub failed: Vec<String>,
    /// The traffic matrix (absent for a file without `matrices`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
    pub shortfall_before: f64,
    pub shortfall_after: f64,
    pub not_closable: f64,
    pub served_required_after: f64,
    pub best_served_required: f64,
}

/// The `plan --json` exporter: [`plan_json`] (its `routing` the model's name under
/// `--routing`) through [`write()`].
impl Exporter<PlanReport<'_>> for Json {
    fn write(&self, p: &PlanReport<'_>, w: &mut dyn std::io::Write) -> std::io::Result<()> {
        let mut doc = plan_json(p.net, p.audit, p.plan, p.default_costs);
        if let Some(mode) = p.routing {
            doc.routing = mode.name();
        }
        write(w, &doc)
    }
}

/// The `plan --json` document.
pub fn plan_json(
    net: &Network,
    audit: &Audit,
    plan: &crate::expand::Plan,
    default_costs: bool,
) -> PlanJson {
    use crate::expand::Goal;
    let first_scenario = |k: usize| audit.first_scenario(OutageId(k)).failed.clone();
    PlanJson {
        network: net.name.clone(),
        unit: net.unit.clone(),
        routing: "best",
        caution: crate::report::caution_for(net),
        goal: match plan.goal {
            Goal::CloseAll => "close-all".into(),
            Goal::WorstWithin(b) => format!("worst within budget {b}"),
            Goal::TotalWithin(b) => format!("total within budget {b}"),
        },
        default_costs,
        plan: PlanBody {
            cost: file_num(plan.cost),
            add: additions_map(net, &plan.add),
            add_functions: plan
                .functions
                .as_ref()
                .map(|bought| function_additions_map(net, bought)),
            drivers: plan
                .drivers
                .iter()
                .enumerate()
                .filter(|(v, d)| plan.add[*v] > 0.0 && !d.is_empty())
                .map(|(v, d)| {
                    (
                        net.sites[v].id.clone(),
                        d.iter().map(|(k, _)| first_scenario(*k)).collect(),
                    )
                })
                .collect(),
        },
        rounds: plan
            .rounds
            .iter()
            .map(|r| RoundJson {
                active: r.active,
                objective: file_num(r.objective),
                violated: r.violated,
            })
            .collect(),
        worst_fraction_after: file_num(plan.worst_fraction),
        modules: plan.modules.as_ref().map(|m| {
            serde_json::json!({
                "lp_cost": file_num(m.lp_cost),
                "lp_add": additions_map(net, &m.lp_add),
                "gap": file_num(m.gap),
                "repaired_modules": m.repaired,
                "candidates_checked": m.checked,
            })
        }),
        scenarios: audit
            .scenarios
            .iter()
            .enumerate()
            .map(|(i, s)| {
                let k = audit.outage_of[i];
                let before = &audit.evaluations[k];
                PlanScenarioJson {
                    failed: s.failed.clone(),
                    matrix: s.matrix_name.as_deref().map(str::to_string),
                    shortfall_before: file_num(before.shortfall),
                    shortfall_after: file_num(plan.after[k].shortfall),
                    not_closable: file_diff(before.surviving_required, plan.best[k]).max(0.0),
                    served_required_after: file_num(plan.after[k].served_required),
                    best_served_required: file_num(plan.best[k]),
                }
            })
            .collect(),
    }
}
