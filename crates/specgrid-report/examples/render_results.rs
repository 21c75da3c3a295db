//! Renders the report of an existing results folder (a stand-in for `specgrid report DIR`
//! until the binary wires it in; also how docs/report-screenshot.png is made).
//!
//! cargo run -p specgrid-report --release --example render_results -- RESULTS_DIR OUT_DIR \
//!     --title TITLE --study STUDY_FILE --fingerprint SHA256 [--keep DECISION=OPTION]...
//!
//! `--keep` restricts the report to the models taking that option (e.g. `outcome=log` and
//! `focus=level`, so that raw coefficients share one scale).

use std::path::PathBuf;
use std::process::ExitCode;

use specgrid_report::{dimensions_from_rows, Report, ReportHeader, ReportInput, ResultRow};

fn main() -> ExitCode {
    match run() {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("render_results: {e}");
            ExitCode::FAILURE
        }
    }
}

fn run() -> Result<(), String> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args.len() < 2 {
        return Err("usage: render_results RESULTS_DIR OUT_DIR [--title T] [--study FILE] [--fingerprint SHA] [--keep DECISION=OPTION]...".into());
    }
    let (results, out) = (PathBuf::from(&args[0]), PathBuf::from(&args[1]));
    let mut title = "specgrid report".to_string();
    let mut study_text = String::new();
    let mut fingerprint = String::from("not given");
    let mut keep: Vec<(String, String)> = Vec::new();
    let mut rest = args[2..].iter();
    while let Some(flag) = rest.next() {
        let value = rest.next().ok_or(format!("{flag} needs a value"))?;
        match flag.as_str() {
            "--title" => title = value.clone(),
            "--study" => {
                study_text = std::fs::read_to_string(value).map_err(|e| format!("{value}: {e}"))?
            }
            "--fingerprint" => fingerprint = value.clone(),
            "--keep" => {
                let (d, o) = value
                    .split_once('=')
                    .ok_or("--keep takes DECISION=OPTION")?;
                keep.push((d.to_string(), o.to_string()));
            }
            other => return Err(format!("unknown option {other}")),
        }
    }
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
        idx("outcome")?,
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
            outcome: s(outcome),
            status: s(status),
            message: s(message),
        });
    }
    let dims = dimensions_from_rows(&dim_names, &rows);
    let header = ReportHeader {
        title,
        significance_level: 0.05,
        confidence_level: 0.95,
        baseline_model_id: None,
        study_text,
        data_fingerprint: fingerprint,
    };
    let input = ReportInput::from_rows(header, dims, &rows).map_err(|e| e.to_string())?;
    let report = Report::build(input).map_err(|e| e.to_string())?;
    std::fs::create_dir_all(&out).map_err(|e| e.to_string())?;
    report.write_all(&out).map_err(|e| e.to_string())?;
    print!("{}", report.terminal());
    Ok(())
}
