//! The optional `[report]` table: the scale of the tracked effect, where it is evaluated, and
//! which model is the baseline.

use toml::de::{DeTable, DeValue};

use super::values::{Reader, Val};
use crate::plan::{EffectScale, EvaluationValues, ReportSettings};
use crate::problem::suggestion;
use crate::study::Study;

const KEYS: &[&str] = &["scale", "evaluate_at", "baseline"];
const AT_KEYS: &[&str] = &["focus", "outcome", "moderator"];

/// `[report]` as written: settings plus the baseline's (dimension, offset, option, offset)
/// pairs, checked against the grid's decisions once they are known.
pub(crate) struct RawReport {
    scale: EffectScale,
    evaluate_at: EvaluationValues,
    baseline: Option<Vec<(String, usize, String, usize)>>,
}

/// Reads `[report]`; an absent table means the defaults (coefficient scale, means, first
/// options).
pub(crate) fn read_report(r: &mut Reader<'_>, value: Option<&Val<'_>>) -> Option<RawReport> {
    let mut raw = RawReport {
        scale: EffectScale::default(),
        evaluate_at: EvaluationValues::default(),
        baseline: None,
    };
    let Some(value) = value else {
        return Some(raw);
    };
    let t = r.table(value, "[report]")?;
    r.check_keys(t, KEYS, "[report]");
    let before = r.problem_count();
    if let Some(v) = t.get("scale") {
        if let Some(word) = r.string(v, "`scale` in [report]") {
            let words: Vec<&str> = EffectScale::WORDS.iter().map(|(w, _)| *w).collect();
            match EffectScale::WORDS.iter().find(|(w, _)| *w == word) {
                Some((_, s)) => raw.scale = *s,
                None => r.report(
                    v.span().start,
                    format!("unknown effect scale `{word}` in [report]"),
                    Some(suggestion(&word.to_ascii_lowercase(), &words)),
                ),
            }
        }
    }
    if let Some(v) = t.get("evaluate_at") {
        if let Some(at) = r.table(v, "`evaluate_at` in [report]") {
            raw.evaluate_at = read_at(r, at);
        }
    }
    if let Some(v) = t.get("baseline") {
        if let Some(b) = r.table(v, "`baseline` in [report]") {
            raw.baseline = Some(read_option_pairs(
                r,
                b,
                "`baseline` in [report]",
                "baseline = { focus = \"level\", sample = \"all plots\" }",
            ));
        }
    }
    (r.problem_count() == before).then_some(raw)
}

fn read_at(r: &mut Reader<'_>, t: &DeTable<'_>) -> EvaluationValues {
    r.check_keys(t, AT_KEYS, "`evaluate_at` in [report]");
    let mut number = |key: &str| {
        t.get(key).and_then(|v| {
            let x = r.number(v, &format!("`{key}` of `evaluate_at` in [report]"))?;
            if !x.is_finite() {
                r.report(
                    v.span().start,
                    format!("`{key}` of `evaluate_at` must be a finite number, found {x}"),
                    None,
                );
                return None;
            }
            Some(x)
        })
    };
    EvaluationValues {
        focus: number("focus"),
        outcome: number("outcome"),
        moderator: number("moderator"),
    }
}

/// `decision = "option"` pairs as written, with the offsets of both names.
pub(crate) type OptionPairs = Vec<(String, usize, String, usize)>;

/// Reads a table of `decision = "option"` pairs (`place` names the table in messages,
/// `example` shows a correct one); a value that is not text is a positioned problem.
pub(crate) fn read_option_pairs(
    r: &mut Reader<'_>,
    t: &DeTable<'_>,
    place: &str,
    example: &str,
) -> OptionPairs {
    let mut pairs = Vec::new();
    for (key, value) in t.iter() {
        let at = format!("`{}` of {place}", key.get_ref());
        if let DeValue::String(_) = value.get_ref() {
            if let Some(option) = r.string(value, &at) {
                pairs.push((
                    key.get_ref().to_string(),
                    key.span().start,
                    option,
                    value.span().start,
                ));
            }
        } else {
            r.report(
                value.span().start,
                format!("{at} must name one option, as text"),
                Some(format!("e.g. {example}")),
            );
        }
    }
    pairs
}

/// Sets `choices[d]` to the named option of each named decision; unknown decisions and
/// options are positioned problems with suggestions (`who` names the table in messages).
pub(crate) fn apply_option_pairs(
    r: &mut Reader<'_>,
    dimensions: &[crate::plan::Dimension],
    pairs: OptionPairs,
    who: &str,
    choices: &mut [usize],
) {
    let dim_names: Vec<&str> = dimensions.iter().map(|d| d.name.as_str()).collect();
    for (dim, dim_at, option, option_at) in pairs {
        let Some(d) = dimensions.iter().position(|d| d.name == dim) else {
            super::settings::unknown_decision(r, dim_at, who, &dim, &dim_names);
            continue;
        };
        let options: Vec<&str> = dimensions[d].options.iter().map(String::as_str).collect();
        match options.iter().position(|o| *o == option) {
            Some(o) => choices[d] = o,
            None => r.report(
                option_at,
                format!("`{option}` is not an option of decision `{dim}`"),
                Some(super::settings::option_hint(&option, &dim, &options)),
            ),
        }
    }
}

/// Turns the baseline's names into an option index per decision (unnamed decisions take their
/// first option); unknown names are positioned problems with suggestions.
pub(crate) fn check_report(
    r: &mut Reader<'_>,
    study: &Study,
    raw: RawReport,
) -> Option<ReportSettings> {
    let mut settings = ReportSettings {
        scale: raw.scale,
        evaluate_at: raw.evaluate_at,
        baseline: None,
    };
    let Some(pairs) = raw.baseline else {
        return Some(settings);
    };
    let dimensions = crate::grid::Layout::new(study).dimensions;
    let before = r.problem_count();
    let mut choices = vec![0; dimensions.len()];
    apply_option_pairs(r, &dimensions, pairs, "the baseline", &mut choices);
    if r.problem_count() != before {
        return None;
    }
    settings.baseline = Some(choices);
    Some(settings)
}
