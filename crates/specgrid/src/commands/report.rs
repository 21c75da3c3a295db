//! The robustness report: built after `run`, and re-rendered from a results folder by
//! `specgrid report DIR` without re-estimating. What the folder must hold to re-render is in
//! `run.json` (written by `run`) and `models.parquet`.

use std::fs;
use std::path::Path;

use polars::prelude::*;
use serde::{Deserialize, Serialize};
use specgrid_report::{
    DimensionInfo, Models, Report, ReportHeader, ReportInput, ResultRow, Scale, StoredEffects,
};

use crate::exit::Failure;
use crate::results::FIXED_COLUMNS;

/// What a results folder records about its run, for re-rendering the report.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct RunRecord {
    /// Study title.
    pub title: String,
    /// Significance level of the summaries.
    pub significance_level: f64,
    /// Confidence level of the intervals.
    pub confidence_level: f64,
    /// The baseline model's id, when the grid contains it.
    pub baseline_model_id: Option<String>,
    /// SHA-256 of the data file.
    pub data_fingerprint: String,
    /// Decision dimensions with their options, in study order.
    pub dimensions: Vec<(String, Vec<String>)>,
    /// Candidate term labels of each pick block, by dimension name (the report shows a pick
    /// decision per candidate); absent when the study has none.
    #[serde(default, skip_serializing_if = "std::collections::BTreeMap::is_empty")]
    pub candidates: std::collections::BTreeMap<String, Vec<String>>,
    /// The effect scale the study asked for (`[report] scale`); effects on any scale other than
    /// `coefficient` are re-read from `effects.csv` when re-rendering.
    #[serde(default = "coefficient_word")]
    pub scale: String,
    /// What the effect is of (the focus column), shown in the report.
    #[serde(default)]
    pub effect_label: String,
}

fn coefficient_word() -> String {
    "coefficient".into()
}

/// What a report needs beyond the rows of `models.csv`.
#[derive(Debug, Default)]
pub struct Extras {
    /// Effects on the study's scale (model id → covariance label → effect); `None` keeps the
    /// coefficient of each model's first tracked term.
    pub effects: Option<StoredEffects>,
    /// (fitted, residual) pairs of the baseline model.
    pub baseline_residuals: Option<Vec<(f64, f64)>>,
    /// Inference across the grid, when the study asked for it.
    pub across_grid: Option<specgrid_report::AcrossGrid>,
}

/// Name of the file holding the inference across the grid (for re-rendering).
pub const ACROSS_GRID_FILE: &str = "inference.json";
/// Name of the file holding the per-model stability bounds.
pub const STABILITY_FILE: &str = "stability.csv";

/// Writes `inference.json` and, when computed, `stability.csv` into the staging folder.
pub fn write_across_grid(
    staging: &crate::output::Staging,
    out: &crate::across_grid::AcrossGridOutput,
) -> Result<(), Failure> {
    let json = serde_json::to_string_pretty(&out.summary)
        .map_err(|e| Failure::Output(format!("{ACROSS_GRID_FILE}: {e}")))?;
    let path = staging.file(ACROSS_GRID_FILE);
    fs::write(&path, json + "\n")
        .map_err(|e| Failure::Output(format!("{}: {e}", path.display())))?;
    if out.summary.stability.is_some() {
        let mut text = String::from(
            "model_id,short_estimate,long_estimate,short_r_squared,long_r_squared,r_max,delta_for_zero,beta_star\n",
        );
        for r in &out.stability_rows {
            text.push_str(&format!(
                "{},{:?},{:?},{:?},{:?},{:?},{:?},{:?}\n",
                r.model_id,
                r.short_estimate,
                r.long_estimate,
                r.short_r2,
                r.long_r2,
                r.r_max,
                r.delta_for_zero,
                r.beta_star
            ));
        }
        let path = staging.file(STABILITY_FILE);
        fs::write(&path, text).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))?;
    }
    Ok(())
}

/// Name of the file holding the baseline model's (fitted, residual) pairs.
pub const RESIDUALS_FILE: &str = "baseline_residuals.csv";

/// Builds the report from result rows, writes its files into `dir` and returns the terminal
/// summary.
pub fn render(
    record: &RunRecord,
    study_text: String,
    rows: &[ResultRow],
    extras: Extras,
    dir: &Path,
) -> Result<String, Failure> {
    let report = build(record, study_text, rows, extras)?;
    report
        .write_all(dir)
        .map_err(|e| Failure::Output(e.to_string()))?;
    let terminal = report.terminal();
    // Only `run` calls this, near the end of the process: the system takes the report's memory
    // back at exit at once, where the destructors of millions of entries took tenths of a second.
    std::mem::forget(report);
    Ok(terminal)
}

/// Builds the report from the run's models (as [`crate::commands::run`] makes them from the
/// fits, without going through result rows), writes its files into `dir` and returns the
/// terminal summary. Gives the same report as re-rendering the folder's `models.parquet`.
pub fn render_models(
    record: &RunRecord,
    study_text: String,
    error_labels: Vec<String>,
    models: Models,
    effect_label: String,
    extras: Extras,
    dir: &Path,
) -> Result<String, Failure> {
    let (header, dimensions) = header_and_dimensions(record, study_text);
    let input = ReportInput::from_entries(header, dimensions, error_labels, models, effect_label);
    let report = finish(record, input, extras)?;
    report
        .write_all(dir)
        .map_err(|e| Failure::Output(e.to_string()))?;
    Ok(report.terminal())
}

/// The report header and decisions a run recorded in run.json.
fn header_and_dimensions(
    record: &RunRecord,
    study_text: String,
) -> (ReportHeader, Vec<DimensionInfo>) {
    let header = ReportHeader {
        title: record.title.clone(),
        significance_level: record.significance_level,
        confidence_level: record.confidence_level,
        baseline_model_id: record.baseline_model_id.clone(),
        study_text,
        data_fingerprint: record.data_fingerprint.clone(),
    };
    let dimensions = record
        .dimensions
        .iter()
        .map(|(name, options)| DimensionInfo {
            name: name.clone(),
            options: options.clone(),
            candidates: record.candidates.get(name).cloned().unwrap_or_default(),
        })
        .collect();
    (header, dimensions)
}

/// Builds the report from result rows and the extras.
fn build(
    record: &RunRecord,
    study_text: String,
    rows: &[ResultRow],
    extras: Extras,
) -> Result<Report, Failure> {
    let (header, dimensions) = header_and_dimensions(record, study_text);
    let input = ReportInput::from_rows(header, dimensions, rows)
        .map_err(|e| Failure::Output(format!("cannot build the report: {e}")))?;
    finish(record, input, extras)
}

/// Puts the effects on the study's scale, adds the extras and computes the aggregates.
fn finish(record: &RunRecord, mut input: ReportInput, extras: Extras) -> Result<Report, Failure> {
    if let Some(effects) = &extras.effects {
        let scale = Scale::parse(&record.scale).ok_or_else(|| {
            Failure::Data(format!(
                "run.json names the effect scale `{}`, which this version does not know",
                record.scale
            ))
        })?;
        input.set_effects(scale, record.effect_label.clone(), effects);
    }
    input.baseline_residuals = extras.baseline_residuals;
    input.across_grid = extras.across_grid;
    Report::build(input).map_err(|e| Failure::Output(format!("cannot build the report: {e}")))
}

/// `specgrid report DIR`: re-render the report files of a results folder in place.
pub fn run(dir: &Path) -> Result<(), Failure> {
    let (record, study_text, rows, extras) = read_folder(dir)?;
    print!("{}", render(&record, study_text, &rows, extras, dir)?);
    Ok(())
}

/// The report of a results folder, rebuilt from its files (for comparing two runs).
pub(crate) fn load(dir: &Path) -> Result<Report, Failure> {
    let (record, study_text, rows, extras) = read_folder(dir)?;
    build(&record, study_text, &rows, extras)
}

/// What re-rendering needs from a results folder: `run.json`, `study.toml`, `models.parquet`,
/// and `effects.csv` and the baseline residuals when the run wrote them.
fn read_folder(dir: &Path) -> Result<(RunRecord, String, Vec<ResultRow>, Extras), Failure> {
    let record_path = dir.join("run.json");
    let record: RunRecord =
        serde_json::from_str(&fs::read_to_string(&record_path).map_err(|e| {
            Failure::Data(format!(
                "{}: {e}; is {} a specgrid results folder?",
                record_path.display(),
                dir.display()
            ))
        })?)
        .map_err(|e| Failure::Data(format!("{}: {e}", record_path.display())))?;
    let study_text = fs::read_to_string(dir.join("study.toml")).unwrap_or_default();
    let rows = read_rows(&dir.join("models.parquet"), &record)?;
    let effects = if record.scale == coefficient_word() {
        None
    } else {
        let path = dir.join("effects.csv");
        let text = fs::read_to_string(&path).map_err(|e| {
            Failure::Data(format!(
                "{}: {e}; the run used the `{}` scale, whose effects live in this file; re-run the study",
                path.display(),
                record.scale
            ))
        })?;
        Some(
            specgrid_report::parse_effects_csv(&text)
                .map_err(|e| Failure::Data(format!("{}: {e}", path.display())))?,
        )
    };
    let extras = Extras {
        effects,
        baseline_residuals: read_residuals(&dir.join(RESIDUALS_FILE))?,
        across_grid: read_across_grid(&dir.join(ACROSS_GRID_FILE))?,
    };
    Ok((record, study_text, rows, extras))
}

/// Reads `inference.json` back; a folder without it (no `[inference]`) has none.
fn read_across_grid(path: &Path) -> Result<Option<specgrid_report::AcrossGrid>, Failure> {
    let Ok(text) = fs::read_to_string(path) else {
        return Ok(None);
    };
    serde_json::from_str(&text).map(Some).map_err(|e| {
        Failure::Data(format!(
            "{}: {e}; the file is damaged, re-run the study",
            path.display()
        ))
    })
}

/// Writes the baseline model's (fitted, residual) pairs, shortest round-trip decimals.
pub fn write_residuals(path: &Path, pairs: &[(f64, f64)]) -> Result<(), Failure> {
    let mut text = String::from("fitted,residual\n");
    for (f, r) in pairs {
        text.push_str(&format!("{f:?},{r:?}\n"));
    }
    fs::write(path, text).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}

/// Reads the pairs back; a folder without the file (e.g. the baseline failed) has none.
fn read_residuals(path: &Path) -> Result<Option<Vec<(f64, f64)>>, Failure> {
    let Ok(text) = fs::read_to_string(path) else {
        return Ok(None);
    };
    let bad = |line: usize| {
        Failure::Data(format!(
            "{} line {line}: expected two numbers `fitted,residual`; the file is damaged, re-run the study",
            path.display()
        ))
    };
    let mut pairs = Vec::new();
    for (i, line) in text.lines().enumerate().skip(1) {
        let (f, r) = line.split_once(',').ok_or_else(|| bad(i + 1))?;
        let f: f64 = f.parse().map_err(|_| bad(i + 1))?;
        let r: f64 = r.parse().map_err(|_| bad(i + 1))?;
        pairs.push((f, r));
    }
    Ok(Some(pairs))
}

/// Reads `models.parquet` back into report rows.
fn read_rows(path: &Path, record: &RunRecord) -> Result<Vec<ResultRow>, Failure> {
    let bad = |e: String| Failure::Data(format!("{}: {e}", path.display()));
    let file = fs::File::open(path).map_err(|e| bad(e.to_string()))?;
    let frame = ParquetReader::new(file)
        .finish()
        .map_err(|e| bad(e.to_string()))?;
    let text = |name: &str| -> Result<Vec<String>, Failure> {
        let c = frame.column(name).map_err(|e| bad(e.to_string()))?;
        let c = c.cast(&DataType::String).map_err(|e| bad(e.to_string()))?;
        Ok(c.str()
            .map_err(|e| bad(e.to_string()))?
            .iter()
            .map(|v| v.unwrap_or("").to_string())
            .collect())
    };
    let float = |name: &str| -> Result<Vec<Option<f64>>, Failure> {
        let c = frame.column(name).map_err(|e| bad(e.to_string()))?;
        let c = c.cast(&DataType::Float64).map_err(|e| bad(e.to_string()))?;
        Ok(c.f64().map_err(|e| bad(e.to_string()))?.iter().collect())
    };
    let count = |name: &str| -> Result<Vec<Option<u64>>, Failure> {
        let c = frame.column(name).map_err(|e| bad(e.to_string()))?;
        let c = c.cast(&DataType::UInt64).map_err(|e| bad(e.to_string()))?;
        Ok(c.u64().map_err(|e| bad(e.to_string()))?.iter().collect())
    };
    for (name, _) in &record.dimensions {
        if FIXED_COLUMNS.contains(&name.as_str()) {
            return Err(bad(format!(
                "dimension `{name}` clashes with a results column"
            )));
        }
    }
    let choices: Vec<Vec<String>> = record
        .dimensions
        .iter()
        .map(|(name, _)| text(name))
        .collect::<Result<_, _>>()?;
    let (ids, errors, terms) = (text("model_id")?, text("errors")?, text("term")?);
    let (estimate, std_error, df) = (float("estimate")?, float("std_error")?, float("df")?);
    let p_value = float("p_value")?;
    let (n_obs, n_params) = (count("n_obs")?, count("n_params")?);
    let (r2, resid_sd, het) = (
        float("r_squared")?,
        float("resid_sd")?,
        float("het_test_p_value")?,
    );
    let (outcome, status, message) = (text("outcome_term")?, text("status")?, text("message")?);
    Ok((0..frame.height())
        .map(|i| ResultRow {
            model_id: ids[i].clone(),
            choices: choices.iter().map(|c| c[i].clone()).collect(),
            errors: errors[i].clone(),
            term: terms[i].clone(),
            estimate: estimate[i],
            std_error: std_error[i],
            df: df[i],
            p_value: p_value[i],
            n_obs: n_obs[i],
            n_params: n_params[i],
            r_squared: r2[i],
            resid_sd: resid_sd[i],
            het_test_p_value: het[i],
            outcome: outcome[i].clone(),
            status: status[i].clone(),
            message: message[i].clone(),
        })
        .collect())
}
