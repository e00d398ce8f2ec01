//! The `compare --json` document.

use serde::Serialize;

use crate::report::file_num;
use crate::solve::Evaluation;

/// The four contract values of one side of a comparison.
#[derive(Serialize)]
pub struct ValuesJson {
    pub served_required: f64,
    pub shortfall: f64,
    pub stranded: f64,
    pub throughput: f64,
}

impl ValuesJson {
    fn of(v: &crate::compare::Values) -> ValuesJson {
        ValuesJson {
            served_required: file_num(v.served_required),
            shortfall: file_num(v.shortfall),
            stranded: file_num(v.stranded),
            throughput: file_num(v.throughput),
        }
    }
}

#[derive(Serialize)]
pub struct ChangeJson {
    pub failed: Vec<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
    pub before: ValuesJson,
    pub after: ValuesJson,
    pub delta_shortfall: f64,
    pub delta_stranded: f64,
}

#[derive(Serialize)]
pub struct OneSidedJson {
    pub failed: Vec<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matrix: Option<String>,
    #[serde(flatten)]
    pub values: ValuesJson,
}

#[derive(Serialize)]
pub struct CompareJson {
    pub caution: &'static str,
    pub before: String,
    pub after: String,
    pub unit: String,
    pub tolerance: f64,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub down: Vec<String>,
    /// No scenario got worse by more than the tolerance, and none is newly short (unless
    /// `--allow-new-short`).
    pub passed: bool,
    pub baseline: ChangeJson,
    pub matched_scenarios: usize,
    pub worse: Vec<ChangeJson>,
    pub better: Vec<ChangeJson>,
    /// Scenarios short after the change and not before (shortfall as printed).
    pub new_short: Vec<ChangeJson>,
    /// Newly short scenarios were allowed to pass (`--allow-new-short`).
    pub allow_new_short: bool,
    pub added_risks: Vec<OneSidedJson>,
    pub removed_risks: Vec<OneSidedJson>,
    pub elements_added: Vec<String>,
    pub elements_removed: Vec<String>,
    /// What the change does to the file: `{element, field, before, after}` per changed
    /// field (`field` is `added` or `removed` for an element only one side has; a side
    /// without the field or the element is `null`).
    pub file_changes: Vec<FileChangeJson>,
    /// `compare --headroom`: both sides' headroom, the scenarios that lost and gained it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub headroom: Option<crate::report::headroom::CompareJson>,
}

/// One field that changed between the two files of `compare`.
#[derive(Serialize)]
pub struct FileChangeJson {
    pub element: String,
    pub field: &'static str,
    pub before: Option<serde_json::Value>,
    pub after: Option<serde_json::Value>,
}

fn file_change_json(e: &crate::model::diff::Edit) -> FileChangeJson {
    use crate::model::diff::Value;
    let value = |v: &Option<Value>| {
        v.as_ref().map(|v| match v {
            Value::Number(x) => serde_json::json!(x),
            Value::Text(t) => serde_json::json!(t),
        })
    };
    FileChangeJson {
        element: e.element.clone(),
        field: e.field,
        before: value(&e.before),
        after: value(&e.after),
    }
}

fn change_json(c: &crate::compare::Change) -> ChangeJson {
    ChangeJson {
        failed: c.failed.clone(),
        matrix: c.matrix.clone(),
        before: ValuesJson::of(&c.before),
        after: ValuesJson::of(&c.after),
        delta_shortfall: file_num(c.delta_shortfall),
        delta_stranded: file_num(c.delta_stranded),
    }
}

fn one_sided_json(v: &[crate::compare::OneSided]) -> Vec<OneSidedJson> {
    v.iter()
        .map(|o| OneSidedJson {
            failed: o.failed.clone(),
            matrix: o.matrix.clone(),
            values: ValuesJson::of(&o.values),
        })
        .collect()
}

/// The `compare --json` document; `before`/`after` are the two baselines.
pub fn compare_json(
    c: &crate::compare::Comparison,
    before: &Evaluation,
    after: &Evaluation,
) -> CompareJson {
    use crate::compare::{Change, Values};
    let base = Change::new(Vec::new(), None, Values::of(before), Values::of(after));
    CompareJson {
        caution: crate::report::caution_of(c.chains),
        before: c.before_name.clone(),
        after: c.after_name.clone(),
        unit: c.unit.clone(),
        tolerance: c.tolerance,
        down: c.down.clone(),
        passed: c.passed(),
        baseline: change_json(&base),
        matched_scenarios: c.matched,
        worse: c.worse.iter().map(change_json).collect(),
        better: c.better.iter().map(change_json).collect(),
        new_short: c.new_short.iter().map(change_json).collect(),
        allow_new_short: c.allow_new_short,
        added_risks: one_sided_json(&c.added_risks),
        removed_risks: one_sided_json(&c.removed_risks),
        elements_added: c.elements_added.clone(),
        elements_removed: c.elements_removed.clone(),
        file_changes: c.file_changes.iter().map(file_change_json).collect(),
        headroom: c
            .headroom
            .as_ref()
            .map(crate::report::headroom::compare_json),
    }
}
