//! Stable model identifiers: a hash of the model's content, not of its position in the grid.

use sha2::{Digest, Sha256};

use crate::grid::{ModelContent, TermTable};
use crate::plan::{Condition, OutcomeForm, Sample, Term, Value};

/// Hex digits kept from the SHA-256.
const ID_DIGITS: usize = 12;

/// The canonical text of a model: outcome, its term set and tracked set (sorted, so block
/// order does not matter), the sample's name and conditions, and the intercept. Written into
/// `out` (cleared first) so that planning millions of models reuses one buffer.
pub(crate) fn canonical_text(
    table: &TermTable,
    content: &ModelContent,
    outcome: &str,
    sample: &str,
    intercept: bool,
    out: &mut String,
) {
    let mut ordered: Vec<usize> = Vec::with_capacity(content.terms.len());
    let mut sorted_keys = |list: &[usize], out: &mut String| {
        ordered.clear();
        ordered.extend_from_slice(list);
        ordered.sort_unstable_by_key(|&t| table.rank[t]);
        for (i, &t) in ordered.iter().enumerate() {
            if i > 0 {
                out.push(';');
            }
            out.push_str(&table.keys[t]);
        }
    };
    out.clear();
    out.push_str("specgrid-model-v1\noutcome=");
    out.push_str(outcome);
    out.push_str("\nterms=");
    sorted_keys(&content.terms, out);
    out.push_str("\ntracked=");
    sorted_keys(&content.tracked, out);
    out.push_str("\nsample=");
    out.push_str(sample);
    out.push_str(if intercept {
        "\nintercept=true\n"
    } else {
        "\nintercept=false\n"
    });
}

/// The canonical text of an outcome form, as it appears on the `outcome=` line.
pub(crate) fn outcome_text(outcome: &OutcomeForm) -> String {
    Term::Numeric {
        column: outcome.column.clone(),
        transform: outcome.transform.clone(),
    }
    .canonical()
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
    const HEX: &[u8; 16] = b"0123456789abcdef";
    digest[..ID_DIGITS / 2]
        .iter()
        .flat_map(|b| {
            [
                HEX[usize::from(b >> 4)] as char,
                HEX[usize::from(b & 15)] as char,
            ]
        })
        .collect()
}

/// The 48 bits an id's 12 hex digits stand for (to find repeated ids without hashing strings).
pub(crate) fn id_bits(id: &str) -> u64 {
    u64::from_str_radix(id, 16).unwrap_or(u64::MAX)
}
