//! `effects.csv`: every model's effect under every covariance choice, with its interval, p-value
//! and the derived quantities (exp(b) − 1, turning point) and their delta-method SEs.

use crate::stats::two_sided_p;
use crate::Report;

/// Column names of `effects.csv`, in order.
pub const EFFECTS_COLUMNS: [&str; 12] = [
    "model_id",
    "errors",
    "estimate",
    "std_error",
    "ci_low",
    "ci_high",
    "p_value",
    "df",
    "proportional_change",
    "proportional_change_se",
    "turning_point",
    "turning_point_se",
];

/// Shortest round-trip text of a finite number; empty for missing or non-finite values.
fn cell(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x}"),
        _ => String::new(),
    }
}

/// Renders `effects.csv` (models in input order, covariance choices in study order; failed
/// models are left out, they are listed in models.csv).
pub fn render(report: &Report) -> String {
    let input = &report.input;
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    let mut rows: Vec<Vec<String>> = vec![EFFECTS_COLUMNS.iter().map(|s| s.to_string()).collect()];
    for m in &input.models {
        for (e, label) in input.error_labels.iter().enumerate() {
            let Some(f) = m.effects[e] else { continue };
            let se = f.std_error.filter(|s| s.is_finite() && *s > 0.0);
            let half = se.map(|s| {
                let q = crate::stats::interval_multiplier(input.confidence_level, f.df);
                q * s
            });
            rows.push(vec![
                m.model_id.clone(),
                label.clone(),
                cell(Some(f.estimate)),
                cell(f.std_error),
                cell(half.map(|h| f.estimate - h)),
                cell(half.map(|h| f.estimate + h)),
                cell(se.map(|s| two_sided_p(f.estimate / s, f.df))),
                cell(Some(f.df)),
                cell(f.proportional_change.map(|d| d.value)),
                cell(f.proportional_change.and_then(|d| d.std_error)),
                cell(f.turning_point.map(|d| d.value)),
                cell(f.turning_point.and_then(|d| d.std_error)),
            ]);
        }
    }
    for r in rows {
        // Writing into memory cannot fail; a failure would only truncate the text.
        if w.write_record(&r).is_err() {
            break;
        }
    }
    w.into_inner()
        .ok()
        .and_then(|b| String::from_utf8(b).ok())
        .unwrap_or_default()
}
