//! `[[samples]]`: named row sets built from structured conditions.

use std::collections::HashSet;

use toml::de::{DeTable, DeValue};

use super::values::{Reader, Val};
use crate::plan::{Comparison, Condition, Sample, Value};

/// The comparison words of a `keep` condition.
const COMPARISONS: &[&str] = &[
    "equals",
    "not_equals",
    "above",
    "below",
    "at_least",
    "at_most",
    "one_of",
    "none_of",
];

/// Name of the one sample a study without `[[samples]]` gets.
pub(crate) const ALL_ROWS: &str = "all rows";

pub(crate) fn read_samples(r: &mut Reader<'_>, value: Option<&Val<'_>>) -> Option<Vec<Sample>> {
    let Some(value) = value else {
        return Some(vec![Sample {
            name: ALL_ROWS.into(),
            conditions: Vec::new(),
        }]);
    };
    let items = r.table_array(value, "samples")?;
    if items.is_empty() {
        r.report(
            value.span().start,
            "[[samples]] is empty",
            Some("leave it out to use all rows".into()),
        );
        return None;
    }
    let before = r.problem_count();
    let mut samples: Vec<Sample> = Vec::new();
    let mut names = HashSet::new();
    for (i, item) in items.iter().enumerate() {
        let place = format!("sample {}", i + 1);
        let Some(table) = r.table(item, &place) else {
            continue;
        };
        if let Some(sample) = read_sample(r, table, item.span().start, &place) {
            if !names.insert(sample.name.clone()) {
                r.report(
                    item.span().start,
                    format!("sample name `{}` is used twice", sample.name),
                    Some("every sample needs its own name".into()),
                );
            }
            samples.push(sample);
        }
    }
    (r.problem_count() == before).then_some(samples)
}

fn read_sample(r: &mut Reader<'_>, t: &DeTable<'_>, at: usize, place: &str) -> Option<Sample> {
    r.check_keys(
        t,
        &["name", "keep", "drop_above_quantile", "drop_below_quantile"],
        place,
    );
    let name = r
        .required(t, "name", at, place)
        .and_then(|v| r.name(v, &format!("`name` of {place}")));
    let place = match &name {
        Some(n) => format!("sample `{n}`"),
        None => place.to_string(),
    };
    let before = r.problem_count();
    let mut conditions = Vec::new();
    if let Some(v) = t.get("keep") {
        let what = format!("`keep` of {place}");
        if let Some(items) = r.array(v, &what) {
            for (i, item) in items.iter().enumerate() {
                let cond_place = format!("condition {} of {what}", i + 1);
                if let Some(c) = r
                    .table(item, &cond_place)
                    .and_then(|c| keep_condition(r, c, item, &cond_place))
                {
                    conditions.push(c);
                }
            }
        }
    }
    for (key, above) in [
        ("drop_above_quantile", true),
        ("drop_below_quantile", false),
    ] {
        if let Some(v) = t.get(key) {
            let what = format!("`{key}` of {place}");
            if let Some(items) = r.array(v, &what) {
                for (i, item) in items.iter().enumerate() {
                    let cond_place = format!("entry {} of {what}", i + 1);
                    if let Some(c) = r
                        .table(item, &cond_place)
                        .and_then(|c| quantile_condition(r, c, item, &cond_place, above))
                    {
                        conditions.push(c);
                    }
                }
            }
        }
    }
    if r.problem_count() != before {
        return None;
    }
    Some(Sample {
        name: name?,
        conditions,
    })
}

fn keep_condition(
    r: &mut Reader<'_>,
    t: &DeTable<'_>,
    item: &Val<'_>,
    place: &str,
) -> Option<Condition> {
    let mut allowed = vec!["column"];
    allowed.extend_from_slice(COMPARISONS);
    r.check_keys(t, &allowed, place);
    let column = r
        .required(t, "column", item.span().start, place)
        .and_then(|v| r.name(v, &format!("`column` of {place}")));
    let present: Vec<&str> = COMPARISONS
        .iter()
        .copied()
        .filter(|k| t.contains_key(*k))
        .collect();
    if present.len() != 1 {
        r.report(
            item.span().start,
            format!(
                "{place} must have exactly one comparison, found {}",
                present.len()
            ),
            Some(format!(
                "use one of: {}",
                crate::problem::quoted_list(COMPARISONS)
            )),
        );
        return None;
    }
    let key = present[0];
    let v = &t[key];
    let what = format!("`{key}` of {place}");
    let condition = match key {
        "one_of" | "none_of" => {
            let levels = level_list(r, v, &what)?;
            let column = column?;
            if key == "one_of" {
                Condition::InSet { column, levels }
            } else {
                Condition::NotInSet { column, levels }
            }
        }
        "equals" | "not_equals" => {
            let value = match v.get_ref() {
                DeValue::String(_) => Value::Text(r.string(v, &what)?),
                _ => Value::Number(r.number(v, &what)?),
            };
            let comparison = if key == "equals" {
                Comparison::Equal
            } else {
                Comparison::NotEqual
            };
            Condition::Compare {
                column: column?,
                comparison,
                value,
            }
        }
        _ => {
            let x = r.number(v, &what)?;
            let comparison = match key {
                "above" => Comparison::Above,
                "below" => Comparison::Below,
                "at_least" => Comparison::AtLeast,
                _ => Comparison::AtMost,
            };
            Condition::Compare {
                column: column?,
                comparison,
                value: Value::Number(x),
            }
        }
    };
    Some(condition)
}

/// Levels as text; integers are accepted and written in decimal.
fn level_list(r: &mut Reader<'_>, v: &Val<'_>, what: &str) -> Option<Vec<String>> {
    let items = r.non_empty_array(v, what, "list at least one level")?;
    let mut levels = Vec::new();
    for item in items {
        let level = match item.get_ref() {
            DeValue::Integer(_) => r.integer(item, what).map(|n| n.to_string()),
            _ => r.string(item, &format!("a level in {what}")),
        }?;
        levels.push(level);
    }
    Some(levels)
}

fn quantile_condition(
    r: &mut Reader<'_>,
    t: &DeTable<'_>,
    item: &Val<'_>,
    place: &str,
    above: bool,
) -> Option<Condition> {
    r.check_keys(t, &["column", "quantile"], place);
    let column = r
        .required(t, "column", item.span().start, place)
        .and_then(|v| r.name(v, &format!("`column` of {place}")));
    let qv = r.required(t, "quantile", item.span().start, place)?;
    let quantile = r.number(qv, &format!("`quantile` of {place}"))?;
    if !(quantile > 0.0 && quantile < 1.0) {
        r.report(
            qv.span().start,
            format!("`quantile` of {place} must be strictly between 0 and 1, found {quantile}"),
            Some("e.g. 0.99 for the 99th percentile".into()),
        );
        return None;
    }
    let column = column?;
    Some(if above {
        Condition::DropAboveQuantile { column, quantile }
    } else {
        Condition::DropBelowQuantile { column, quantile }
    })
}
