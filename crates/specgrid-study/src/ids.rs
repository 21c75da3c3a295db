//! Stable model identifiers: a hash of the model's content, not of its position in the grid.

use sha2::{Digest, Sha256};

use crate::grid::{ModelContent, TermTable};
use crate::plan::{Condition, OutcomeForm, Sample, Term, Value};

/// Hex digits kept from the SHA-256.
const ID_DIGITS: usize = 12;

/// The canonical text of a model: outcome, its term set and tracked set (sorted, so block
/// order does not matter), the sample's name and conditions, and the intercept.
pub(crate) fn canonical_text(
    table: &TermTable,
    content: &ModelContent,
    outcome: &OutcomeForm,
    sample: &str,
    intercept: bool,
) -> String {
    let sorted_keys = |list: &[usize]| {
        let mut ordered = list.to_vec();
        ordered.sort_by_key(|&t| table.rank[t]);
        ordered
            .iter()
            .map(|&t| table.keys[t].as_str())
            .collect::<Vec<_>>()
            .join(";")
    };
    let outcome = Term::Numeric {
        column: outcome.column.clone(),
        transform: outcome.transform.clone(),
    }
    .canonical();
    format!(
        "specgrid-model-v1\noutcome={outcome}\nterms={}\ntracked={}\nsample={sample}\nintercept={intercept}\n",
        sorted_keys(&content.terms),
        sorted_keys(&content.tracked),
    )
}

/// The sample part of the canonical text: `"name":condition;condition`.
pub(crate) fn sample_text(sample: &Sample) -> String {
    let conditions: Vec<String> = sample.conditions.iter().map(condition_text).collect();
    format!("{:?}:{}", sample.name, conditions.join(";"))
}

fn condition_text(c: &Condition) -> String {
    let value = |v: &Value| match v {
        Value::Number(x) => format!("{x:?}"),
        Value::Text(s) => format!("{s:?}"),
    };
    match c {
        Condition::Compare {
            column,
            comparison,
            value: v,
        } => format!("{column:?} {comparison:?} {}", value(v)),
        Condition::InSet { column, levels } => format!("{column:?} in {levels:?}"),
        Condition::NotInSet { column, levels } => format!("{column:?} not in {levels:?}"),
        Condition::DropAboveQuantile { column, quantile } => {
            format!("{column:?} drop above q{quantile:?}")
        }
        Condition::DropBelowQuantile { column, quantile } => {
            format!("{column:?} drop below q{quantile:?}")
        }
    }
}

/// First 12 lowercase hex digits of the SHA-256 of `text`.
pub(crate) fn model_id(text: &str) -> String {
    let digest = Sha256::digest(text.as_bytes());
    let hex: String = digest.iter().map(|b| format!("{b:02x}")).collect();
    hex[..ID_DIGITS].to_string()
}
