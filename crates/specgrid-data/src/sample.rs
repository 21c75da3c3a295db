//! Sample conditions: which rows of the file a sample option keeps.

use specgrid_study::{Comparison, Condition, Sample, Value};

use crate::column::{number_label, ColumnValues, LoadedColumn};
use crate::error::DataError;
use crate::loaded::LoadedData;
use crate::transform::quantile_type7;

/// The rows a sample keeps (one flag per data row). A row whose condition column is missing
/// fails that condition. Quantile thresholds use every row of the file where the column is
/// present (type-7 quantile), before any other condition.
pub fn sample_mask(data: &LoadedData, sample: &Sample) -> Result<Vec<bool>, DataError> {
    let mut keep = vec![true; data.n_rows];
    for condition in &sample.conditions {
        let (column, passes) = condition_flags(data, sample, condition)?;
        for (k, p) in keep.iter_mut().zip(passes) {
            *k &= p;
        }
        if data.n_rows > 0 && !keep.iter().any(|k| *k) {
            return Err(DataError::EmptySample {
                path: data.path.clone(),
                sample: sample.name.clone(),
                rows_read: data.n_rows,
                reason: format!(
                    "no row left after the condition on column `{column}`: {}",
                    describe(condition)
                ),
            });
        }
    }
    if data.n_rows == 0 {
        return Err(DataError::EmptySample {
            path: data.path.clone(),
            sample: sample.name.clone(),
            rows_read: 0,
            reason: "the file has no data rows".into(),
        });
    }
    Ok(keep)
}

fn condition_flags<'a>(
    data: &LoadedData,
    sample: &Sample,
    condition: &'a Condition,
) -> Result<(&'a str, Vec<bool>), DataError> {
    Ok(match condition {
        Condition::Compare {
            column,
            comparison,
            value: Value::Number(v),
        } => {
            let x = data.numbers(column)?;
            let flags = x
                .iter()
                .map(|x| x.is_some_and(|x| compare(x, *comparison, *v)))
                .collect();
            (column, flags)
        }
        Condition::Compare {
            column,
            comparison,
            value: Value::Text(t),
        } => {
            let want_equal = match comparison {
                Comparison::Equal => true,
                Comparison::NotEqual => false,
                _ => {
                    return Err(DataError::InvalidCondition {
                        path: data.path.clone(),
                        sample: sample.name.clone(),
                        detail: format!(
                            "the condition on column `{column}` orders against the text `{t}`; \
                             only equal / not-equal work with text, so write the value as a number"
                        ),
                    })
                }
            };
            let c = data.column(column)?;
            let flags = (0..data.n_rows)
                .map(|r| {
                    matches_label(c, r, t)
                        .map(|eq| eq == want_equal)
                        .unwrap_or(false)
                })
                .collect();
            (column, flags)
        }
        Condition::InSet { column, levels } | Condition::NotInSet { column, levels } => {
            let inside = matches!(condition, Condition::InSet { .. });
            let c = data.column(column)?;
            let flags = (0..data.n_rows)
                .map(|r| {
                    let hit = levels.iter().map(|l| matches_label(c, r, l));
                    let mut any = false;
                    for h in hit {
                        match h {
                            None => return false,
                            Some(true) => any = true,
                            Some(false) => {}
                        }
                    }
                    any == inside
                })
                .collect();
            (column, flags)
        }
        Condition::DropAboveQuantile { column, quantile }
        | Condition::DropBelowQuantile { column, quantile } => {
            let x = data.numbers(column)?;
            let mut present: Vec<f64> = x.iter().flatten().copied().collect();
            present.sort_by(f64::total_cmp);
            let above = matches!(condition, Condition::DropAboveQuantile { .. });
            let flags = if present.is_empty() {
                vec![false; x.len()]
            } else {
                let cut = quantile_type7(&present, *quantile);
                x.iter()
                    .map(|x| x.is_some_and(|x| if above { x <= cut } else { x >= cut }))
                    .collect()
            };
            (column, flags)
        }
    })
}

/// Whether the cell's text label equals `text`; `None` when the cell is missing.
fn matches_label(column: &LoadedColumn, row: usize, text: &str) -> Option<bool> {
    match &column.values {
        ColumnValues::Text(v) => v[row].as_deref().map(|s| s == text),
        ColumnValues::Number(v) => v[row].map(|x| number_label(x) == text.trim()),
    }
}

fn compare(x: f64, comparison: Comparison, v: f64) -> bool {
    match comparison {
        Comparison::Equal => x == v,
        Comparison::NotEqual => x != v,
        Comparison::Below => x < v,
        Comparison::AtMost => x <= v,
        Comparison::Above => x > v,
        Comparison::AtLeast => x >= v,
    }
}

/// The condition in words, for messages.
pub fn describe(condition: &Condition) -> String {
    let value_text = |v: &Value| match v {
        Value::Number(x) => number_label(*x),
        Value::Text(t) => format!("`{t}`"),
    };
    match condition {
        Condition::Compare {
            column,
            comparison,
            value,
        } => {
            let op = match comparison {
                Comparison::Equal => "equals",
                Comparison::NotEqual => "differs from",
                Comparison::Below => "is below",
                Comparison::AtMost => "is at most",
                Comparison::Above => "is above",
                Comparison::AtLeast => "is at least",
            };
            format!("`{column}` {op} {}", value_text(value))
        }
        Condition::InSet { column, levels } => {
            format!("`{column}` is one of {}", levels.join(", "))
        }
        Condition::NotInSet { column, levels } => {
            format!("`{column}` is none of {}", levels.join(", "))
        }
        Condition::DropAboveQuantile { column, quantile } => {
            format!("`{column}` at most its {quantile} quantile")
        }
        Condition::DropBelowQuantile { column, quantile } => {
            format!("`{column}` at least its {quantile} quantile")
        }
    }
}
