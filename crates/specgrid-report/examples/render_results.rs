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

use specgrid_report::{dimensions_from_rows, Report, ReportHeader, ReportInput};

#[path = "../tests/common/models_csv.rs"]
mod models_csv;

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
    let (dim_names, rows) = models_csv::read_models_csv(&results, &keep)?;
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
