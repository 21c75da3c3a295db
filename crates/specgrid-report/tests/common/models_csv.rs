//! Reads `models.csv` of a results folder into [`ResultRow`]s (shared by the
//! `render_results` example and the demo test). Uses the csv crate: option names may contain
//! commas and quotes.
#![allow(dead_code)]

use std::path::Path;

use specgrid_report::ResultRow;

/// The decision names (columns between `model_id` and `errors`) and the rows of the models
/// taking every `keep` option.
pub fn read_models_csv(
    results: &Path,
    keep: &[(String, String)],
) -> Result<(Vec<String>, Vec<ResultRow>), String> {
    let path = results.join("models.csv");
    let mut reader =
        csv::Reader::from_path(&path).map_err(|e| format!("{}: {e}", path.display()))?;
    let headers = reader.headers().map_err(|e| e.to_string())?.clone();
    let col = |name: &str| {
        headers
            .iter()
            .position(|h| h == name)
            .ok_or(format!("{}: no column `{name}`", path.display()))
    };
    let errors_col = col("errors")?;
    let dim_names: Vec<String> = headers
        .iter()
        .skip(1)
        .take(errors_col - 1)
        .map(String::from)
        .collect();
    let idx = |n: &str| col(n);
    let (term, est, se, df) = (
        idx("term")?,
        idx("estimate")?,
        idx("std_error")?,
        idx("df")?,
    );
    let (n_obs, n_params, r2, sd) = (
        idx("n_obs")?,
        idx("n_params")?,
        idx("r_squared")?,
        idx("resid_sd")?,
    );
    let (het, outcome, status, message) = (
        idx("het_test_p_value")?,
        idx("outcome_term")?,
        idx("status")?,
        idx("message")?,
    );
    let mut rows = Vec::new();
    for (i, record) in reader.records().enumerate() {
        let r = record.map_err(|e| format!("{}: row {}: {e}", path.display(), i + 1))?;
        let f = |c: usize| r.get(c).and_then(|v| v.parse::<f64>().ok());
        let u = |c: usize| r.get(c).and_then(|v| v.parse::<u64>().ok());
        let s = |c: usize| r.get(c).unwrap_or("").to_string();
        let choices: Vec<String> = (1..errors_col).map(s).collect();
        let kept = keep.iter().all(|(d, o)| {
            dim_names
                .iter()
                .position(|n| n == d)
                .is_none_or(|k| &choices[k] == o)
        });
        if !kept {
            continue;
        }
        rows.push(ResultRow {
            model_id: s(0),
            choices,
            errors: s(errors_col),
            term: s(term),
            estimate: f(est),
            std_error: f(se),
            df: f(df),
            n_obs: u(n_obs),
            n_params: u(n_params),
            r_squared: f(r2),
            resid_sd: f(sd),
            het_test_p_value: f(het),
            // The report's t test decides significance, as the reference scripts do.
            p_value: None,
            outcome: s(outcome),
            status: s(status),
            message: s(message),
        });
    }
    Ok((dim_names, rows))
}
