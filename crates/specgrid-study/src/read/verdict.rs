//! Reading the optional `[verdict]` table.

use super::values::{Reader, Val};
use crate::plan::ErrorChoice;
use crate::problem::suggestion;
use crate::verdict::{Verdict, VERDICT_KEYS};

/// The verdict rules, `Some(None)` when the table is absent, `None` after a problem.
pub(crate) fn read_verdict(
    r: &mut Reader<'_>,
    value: Option<&Val<'_>>,
    errors: Option<&[ErrorChoice]>,
) -> Option<Option<Verdict>> {
    let Some(value) = value else {
        return Some(None);
    };
    let t = r.table(value, "[verdict]")?;
    r.check_keys(t, VERDICT_KEYS, "[verdict]");
    let before = r.problem_count();
    let share = |r: &mut Reader<'_>, key: &str| -> Option<f64> {
        let v = t.get(key)?;
        let what = format!("`{key}` in [verdict]");
        let x = r.number(v, &what)?;
        if !(0.0..=1.0).contains(&x) {
            let hint = if x > 1.0 && x <= 100.0 {
                format!("write a fraction, not a per cent: {}", x / 100.0)
            } else {
                "a share between 0 and 1, e.g. 0.9".to_string()
            };
            r.report(
                v.span().start,
                format!("{what} must be between 0 and 1, found {x}"),
                Some(hint),
            );
            return None;
        }
        Some(x)
    };
    let min_share_baseline_sign = share(r, "min_share_baseline_sign");
    let min_share_significant = share(r, "min_share_significant");
    let baseline_significant = match t.get("baseline_significant") {
        Some(v) => r
            .boolean(v, "`baseline_significant` in [verdict]")
            .unwrap_or(false),
        None => false,
    };
    let max_sign_flips = t.get("max_sign_flips").and_then(|v| {
        r.integer_in(v, "`max_sign_flips` in [verdict]", 0, u64::MAX as i128)
            .map(|n| n as u64)
    });
    let errors_label = t.get("errors").and_then(|v| {
        let label = r.name(v, "`errors` in [verdict]")?;
        check_errors_label(r, v, &label, errors?)?;
        Some(label)
    });
    if r.problem_count() != before {
        return None;
    }
    Some(Some(Verdict {
        errors: errors_label,
        min_share_baseline_sign,
        min_share_significant,
        baseline_significant,
        max_sign_flips,
    }))
}

/// The label must name one of the study's covariance choices.
fn check_errors_label(
    r: &mut Reader<'_>,
    v: &Val<'_>,
    label: &str,
    errors: &[ErrorChoice],
) -> Option<()> {
    let labels: Vec<String> = errors.iter().map(ErrorChoice::label).collect();
    if labels.iter().any(|l| l == label) {
        return Some(());
    }
    let allowed: Vec<&str> = labels.iter().map(String::as_str).collect();
    r.report(
        v.span().start,
        format!("`errors` in [verdict] names `{label}`, which is not a choice of [errors]"),
        Some(suggestion(label, &allowed)),
    );
    None
}
