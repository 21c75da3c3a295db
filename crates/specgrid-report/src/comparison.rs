//! Comparing two reports of the same study (an earlier run and a rerun on refreshed data):
//! models added and removed, sign flips, changes of significance, estimates that moved by more
//! than a tolerance, and the change of every aggregate of `summary.json`. The result is what
//! `comparison.json` holds; [`crate::comparison_html`] renders it.

use std::collections::BTreeMap;

use serde::Serialize;
use serde_json::Value;

use crate::aggregate::significance;
use crate::effect::Effect;
use crate::Report;

/// Format tag of `comparison.json`.
pub const COMPARISON_FORMAT: &str = "specgrid-comparison-1";

/// When a model's estimate counts as moved: the change must exceed both the relative and the
/// standard-error tolerance, so a large relative change of an estimate near zero that is well
/// within its uncertainty is not flagged, nor is a small change of a very precise estimate.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Tolerance {
    /// Largest |new − old| / |old| that is not a move.
    pub relative: f64,
    /// Largest |new − old| / old standard error that is not a move.
    pub std_errors: f64,
}

impl Default for Tolerance {
    /// 10 % and half a standard error (a choice of this project, documented in docs/nightly.md).
    fn default() -> Self {
        Tolerance {
            relative: 0.10,
            std_errors: 0.5,
        }
    }
}

/// One model present in both runs, with its old and new effect.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelChange {
    /// Stable model id.
    pub model_id: String,
    /// Effect in the earlier run.
    pub old_estimate: f64,
    /// Effect in the new run.
    pub new_estimate: f64,
    /// Standard error in the earlier run.
    pub old_std_error: Option<f64>,
    /// Standard error in the new run.
    pub new_std_error: Option<f64>,
    /// Significant in the earlier run (`None` without a standard error).
    pub old_significant: Option<bool>,
    /// Significant in the new run.
    pub new_significant: Option<bool>,
    /// (new − old) / |old|; `None` when old is 0.
    pub relative_change: Option<f64>,
    /// (new − old) / old standard error; `None` without one.
    pub change_in_std_errors: Option<f64>,
}

/// One aggregate of `summary.json` in both runs. `path` names it as in the file, with list
/// entries named by their label (e.g. `by_errors[hc1].median`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AggregateChange {
    /// Where the aggregate sits in `summary.json`.
    pub path: String,
    /// Value in the earlier run (`null` when absent).
    pub old: Value,
    /// Value in the new run.
    pub new: Value,
    /// new − old, for numbers present in both.
    pub change: Option<f64>,
}

/// Everything `comparison.json` holds.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// Format tag ([`COMPARISON_FORMAT`]).
    pub format: &'static str,
    /// Covariance choice the model-level changes are judged under.
    pub errors: String,
    /// Significance level used (the new run's).
    pub significance_level: f64,
    /// Tolerances for "moved".
    pub tolerance: Tolerance,
    /// Models in the earlier run.
    pub old_models: usize,
    /// Models in the new run.
    pub new_models: usize,
    /// Models with an effect in both runs under `errors`.
    pub matched: usize,
    /// Ids only in the new run.
    pub added: Vec<String>,
    /// Ids only in the earlier run.
    pub removed: Vec<String>,
    /// Models whose effect changed sign (a zero counts as its own sign).
    pub sign_flips: Vec<ModelChange>,
    /// Models significant in one run and not in the other.
    pub significance_changes: Vec<ModelChange>,
    /// Models whose effect moved by more than the tolerance.
    pub moved: Vec<ModelChange>,
    /// Every aggregate of `summary.json`, in file order, changed or not.
    pub aggregates: Vec<AggregateChange>,
}

impl Comparison {
    /// Aggregates whose value differs between the runs.
    pub fn changed_aggregates(&self) -> impl Iterator<Item = &AggregateChange> {
        self.aggregates.iter().filter(|a| a.old != a.new)
    }

    /// `comparison.json`: pretty-printed, fixed key order, ending in a newline.
    pub fn to_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(self)
            .unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"));
        s.push('\n');
        s
    }
}

/// Compares `new` with `old` under the covariance choice labelled `errors` (`None`: the new
/// run's first choice). Fails when a run lacks that choice.
pub fn compare(
    old: &Report,
    new: &Report,
    errors: Option<&str>,
    tolerance: Tolerance,
) -> Result<Comparison, String> {
    let label = match errors {
        Some(l) => l.to_string(),
        None => new
            .input
            .error_labels
            .first()
            .cloned()
            .ok_or("the new run has no covariance choice")?,
    };
    let position = |report: &Report, which: &str| {
        report
            .input
            .error_labels
            .iter()
            .position(|l| *l == label)
            .ok_or(format!(
                "the {which} run has no `{label}` covariance choice (it has {})",
                report.input.error_labels.join(", ")
            ))
    };
    let (old_e, new_e) = (position(old, "earlier")?, position(new, "new")?);
    let alpha = new.input.significance_level;
    let old_effects = effects_by_id(old, old_e);
    let new_effects = effects_by_id(new, new_e);
    let ids = |r: &Report| -> Vec<String> {
        let mut v: Vec<String> = r.input.models.iter().map(|m| m.id().to_string()).collect();
        v.sort();
        v.dedup();
        v
    };
    let (old_ids, new_ids) = (ids(old), ids(new));
    let added = new_ids
        .iter()
        .filter(|id| old_ids.binary_search(id).is_err())
        .cloned()
        .collect();
    let removed = old_ids
        .iter()
        .filter(|id| new_ids.binary_search(id).is_err())
        .cloned()
        .collect();
    let mut matched = 0;
    let (mut sign_flips, mut significance_changes, mut moved) = (vec![], vec![], vec![]);
    for (id, o) in &old_effects {
        let Some(n) = new_effects.get(id) else {
            continue;
        };
        matched += 1;
        let change = model_change(id, o, n, alpha);
        if o.estimate.signum() != n.estimate.signum() || (o.estimate == 0.0) != (n.estimate == 0.0)
        {
            sign_flips.push(change.clone());
        }
        if change.old_significant != change.new_significant {
            significance_changes.push(change.clone());
        }
        if is_move(&change, tolerance) {
            moved.push(change);
        }
    }
    Ok(Comparison {
        format: COMPARISON_FORMAT,
        errors: label,
        significance_level: alpha,
        tolerance,
        old_models: old.input.models.len(),
        new_models: new.input.models.len(),
        matched,
        added,
        removed,
        sign_flips,
        significance_changes,
        moved,
        aggregates: aggregate_changes(old, new),
    })
}

/// Finite effects under one covariance choice, by model id (sorted, so output order is fixed).
fn effects_by_id(report: &Report, e: usize) -> BTreeMap<String, Effect> {
    report
        .input
        .models
        .iter()
        .filter_map(|m| {
            let f = m.effect(e)?;
            f.estimate.is_finite().then(|| (m.id().to_string(), f))
        })
        .collect()
}

fn model_change(id: &str, old: &Effect, new: &Effect, alpha: f64) -> ModelChange {
    let delta = new.estimate - old.estimate;
    ModelChange {
        model_id: id.to_string(),
        old_estimate: old.estimate,
        new_estimate: new.estimate,
        old_std_error: old.std_error,
        new_std_error: new.std_error,
        old_significant: significance(old, alpha),
        new_significant: significance(new, alpha),
        relative_change: (old.estimate != 0.0).then(|| delta / old.estimate.abs()),
        change_in_std_errors: old
            .std_error
            .filter(|s| *s > 0.0 && s.is_finite())
            .map(|s| delta / s),
    }
}

/// Moved when the change exceeds both tolerances; a tolerance that cannot be judged (old
/// estimate 0, or no SE) counts as exceeded, so the other one decides.
fn is_move(change: &ModelChange, tolerance: Tolerance) -> bool {
    if change.new_estimate == change.old_estimate {
        return false;
    }
    let relative = change
        .relative_change
        .is_none_or(|r| r.abs() > tolerance.relative);
    let in_se = change
        .change_in_std_errors
        .is_none_or(|c| c.abs() > tolerance.std_errors);
    relative && in_se
}

/// Every leaf of both `summary.json` documents, matched by path.
fn aggregate_changes(old: &Report, new: &Report) -> Vec<AggregateChange> {
    let as_value = |r: &Report| serde_json::to_value(&r.summary).unwrap_or(Value::Null);
    let (mut old_leaves, mut new_leaves) = (Vec::new(), Vec::new());
    leaves(&as_value(old), String::new(), &mut old_leaves);
    leaves(&as_value(new), String::new(), &mut new_leaves);
    let old_map: BTreeMap<&str, &Value> = old_leaves.iter().map(|(p, v)| (p.as_str(), v)).collect();
    let mut out: Vec<AggregateChange> = Vec::new();
    let mut seen = std::collections::BTreeSet::new();
    let mut push = |path: &str, o: Value, n: Value| {
        let change = match (o.as_f64(), n.as_f64()) {
            (Some(a), Some(b)) => Some(b - a),
            _ => None,
        };
        out.push(AggregateChange {
            path: path.to_string(),
            old: o,
            new: n,
            change,
        });
    };
    for (path, value) in &new_leaves {
        seen.insert(path.as_str());
        let o = old_map
            .get(path.as_str())
            .map_or(Value::Null, |v| (*v).clone());
        push(path, o, value.clone());
    }
    for (path, value) in &old_leaves {
        if !seen.contains(path.as_str()) {
            push(path, value.clone(), Value::Null);
        }
    }
    out
}

/// Flattens JSON to (path, leaf). Lists of objects are keyed by their naming field when they
/// have one, so entries match across runs even when their order changes.
fn leaves(value: &Value, path: String, out: &mut Vec<(String, Value)>) {
    const NAME_FIELDS: [&str; 4] = ["errors", "dimension", "option", "model_id"];
    match value {
        Value::Object(map) => {
            for (key, v) in map {
                if key == "format" || key == "cautions" {
                    continue;
                }
                let p = if path.is_empty() {
                    key.clone()
                } else {
                    format!("{path}.{key}")
                };
                leaves(v, p, out);
            }
        }
        Value::Array(items) => {
            for (i, item) in items.iter().enumerate() {
                let name = item.as_object().and_then(|m| {
                    NAME_FIELDS
                        .iter()
                        .find_map(|f| m.get(*f).and_then(Value::as_str))
                });
                let key = name.map_or(i.to_string(), str::to_string);
                leaves(item, format!("{path}[{key}]"), out);
            }
        }
        leaf => out.push((path, leaf.clone())),
    }
}
