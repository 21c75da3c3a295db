//! The results table: one row per model, covariance choice and tracked term, built column by
//! column and written as CSV and Parquet with polars.

use std::fs::File;
use std::path::Path;

use polars::prelude::*;

use crate::exit::Failure;

/// Fixed columns that come after `model_id` and the dimension columns. Dimension names must not
/// collide with these (checked when the table is created).
pub const FIXED_COLUMNS: [&str; 25] = [
    "model_id",
    "errors",
    "term",
    "estimate",
    "std_error",
    "t_stat",
    "p_value",
    "ci_low",
    "ci_high",
    "df",
    "n_obs",
    "n_params",
    "r_squared",
    "adj_r_squared",
    "resid_sd",
    "condition_number",
    "het_test_stat",
    "het_test_p_value",
    "within_r_squared",
    "absorbed",
    "weights",
    "dropped",
    "outcome_term",
    "status",
    "message",
];

/// Statistics shared by every row of one model.
#[derive(Debug, Clone, Default)]
pub struct ModelStats {
    /// Rows used.
    pub n_obs: Option<u64>,
    /// Coefficients estimated.
    pub n_params: Option<u64>,
    /// R².
    pub r_squared: Option<f64>,
    /// Adjusted R².
    pub adj_r_squared: Option<f64>,
    /// Residual standard deviation.
    pub resid_sd: Option<f64>,
    /// Condition number estimate.
    pub condition_number: Option<f64>,
    /// Koenker–Breusch–Pagan statistic.
    pub het_test_stat: Option<f64>,
    /// Its p-value.
    pub het_test_p_value: Option<f64>,
    /// R² within the absorbed effects' levels (only when the model absorbs effects).
    pub within_r_squared: Option<f64>,
    /// Absorbed fixed effects, source columns joined by "; " (empty when none).
    pub absorbed: String,
    /// Weights as `kind:column` (empty when unweighted).
    pub weights: String,
    /// Names of the columns dropped as collinear, joined by "; ".
    pub dropped: String,
    /// The outcome form's label.
    pub outcome: String,
}

/// Estimate and inference of one term under one covariance choice.
#[derive(Debug, Clone, Copy, Default)]
pub struct TermValues {
    /// Coefficient.
    pub estimate: Option<f64>,
    /// Standard error.
    pub std_error: Option<f64>,
    /// t statistic.
    pub t_stat: Option<f64>,
    /// Two-sided p-value.
    pub p_value: Option<f64>,
    /// Confidence interval, low end.
    pub ci_low: Option<f64>,
    /// Confidence interval, high end.
    pub ci_high: Option<f64>,
    /// Reference degrees of freedom.
    pub df: Option<f64>,
}

/// Column-wise builder of the results table.
pub struct ResultsTable {
    dimension_names: Vec<String>,
    model_id: Vec<String>,
    dimensions: Vec<Vec<String>>,
    errors: Vec<String>,
    term: Vec<String>,
    values: Vec<TermValues>,
    stats: Vec<ModelStats>,
    status: Vec<String>,
    message: Vec<String>,
}

impl ResultsTable {
    /// An empty table with one column per decision dimension.
    pub fn new(dimension_names: &[String]) -> Result<ResultsTable, Failure> {
        for name in dimension_names {
            if FIXED_COLUMNS.contains(&name.as_str()) {
                return Err(Failure::Study(format!(
                    "the decision dimension `{name}` has the same name as a results column; rename that control block"
                )));
            }
        }
        Ok(ResultsTable {
            dimension_names: dimension_names.to_vec(),
            model_id: Vec::new(),
            dimensions: vec![Vec::new(); dimension_names.len()],
            errors: Vec::new(),
            term: Vec::new(),
            values: Vec::new(),
            stats: Vec::new(),
            status: Vec::new(),
            message: Vec::new(),
        })
    }

    /// Number of rows so far.
    #[allow(clippy::len_without_is_empty)]
    pub fn len(&self) -> usize {
        self.model_id.len()
    }

    /// Appends one row.
    #[allow(clippy::too_many_arguments)]
    pub fn push(
        &mut self,
        model_id: &str,
        choices: &[String],
        errors: &str,
        term: &str,
        values: TermValues,
        stats: &ModelStats,
        status: &str,
        message: &str,
    ) {
        self.model_id.push(model_id.to_string());
        for (column, choice) in self.dimensions.iter_mut().zip(choices) {
            column.push(choice.clone());
        }
        self.errors.push(errors.to_string());
        self.term.push(term.to_string());
        self.values.push(values);
        self.stats.push(stats.clone());
        self.status.push(status.to_string());
        self.message.push(message.to_string());
    }

    /// Builds the polars frame (column order: model_id, dimensions, then the fixed columns).
    pub fn to_frame(&self) -> Result<DataFrame, Failure> {
        let text = |name: &str, v: &[String]| Column::new(name.into(), v);
        let float = |name: &str, f: &dyn Fn(usize) -> Option<f64>| {
            let v: Vec<Option<f64>> = (0..self.len()).map(f).collect();
            Column::new(name.into(), v)
        };
        let int = |name: &str, f: &dyn Fn(usize) -> Option<u64>| {
            let v: Vec<Option<u64>> = (0..self.len()).map(f).collect();
            Column::new(name.into(), v)
        };
        let mut columns = vec![text("model_id", &self.model_id)];
        for (name, values) in self.dimension_names.iter().zip(&self.dimensions) {
            columns.push(text(name, values));
        }
        let v = &self.values;
        let s = &self.stats;
        columns.extend([
            text("errors", &self.errors),
            text("term", &self.term),
            float("estimate", &|i| v[i].estimate),
            float("std_error", &|i| v[i].std_error),
            float("t_stat", &|i| v[i].t_stat),
            float("p_value", &|i| v[i].p_value),
            float("ci_low", &|i| v[i].ci_low),
            float("ci_high", &|i| v[i].ci_high),
            float("df", &|i| v[i].df),
            int("n_obs", &|i| s[i].n_obs),
            int("n_params", &|i| s[i].n_params),
            float("r_squared", &|i| s[i].r_squared),
            float("adj_r_squared", &|i| s[i].adj_r_squared),
            float("resid_sd", &|i| s[i].resid_sd),
            float("condition_number", &|i| s[i].condition_number),
            float("het_test_stat", &|i| s[i].het_test_stat),
            float("het_test_p_value", &|i| s[i].het_test_p_value),
            float("within_r_squared", &|i| s[i].within_r_squared),
            Column::new(
                "absorbed".into(),
                s.iter().map(|m| m.absorbed.as_str()).collect::<Vec<_>>(),
            ),
            Column::new(
                "weights".into(),
                s.iter().map(|m| m.weights.as_str()).collect::<Vec<_>>(),
            ),
            Column::new(
                "dropped".into(),
                s.iter().map(|m| m.dropped.as_str()).collect::<Vec<_>>(),
            ),
            Column::new(
                "outcome_term".into(),
                s.iter().map(|m| m.outcome.as_str()).collect::<Vec<_>>(),
            ),
            text("status", &self.status),
            text("message", &self.message),
        ]);
        DataFrame::new(self.len(), columns)
            .map_err(|e| Failure::Output(format!("cannot assemble the results table: {e}")))
    }
}

impl ResultsTable {
    /// The rows as the report crate reads them.
    pub fn report_rows(&self) -> Vec<specgrid_report::ResultRow> {
        (0..self.len())
            .map(|i| specgrid_report::ResultRow {
                model_id: self.model_id[i].clone(),
                choices: self.dimensions.iter().map(|d| d[i].clone()).collect(),
                errors: self.errors[i].clone(),
                term: self.term[i].clone(),
                estimate: self.values[i].estimate,
                std_error: self.values[i].std_error,
                df: self.values[i].df,
                p_value: self.values[i].p_value,
                n_obs: self.stats[i].n_obs,
                n_params: self.stats[i].n_params,
                r_squared: self.stats[i].r_squared,
                resid_sd: self.stats[i].resid_sd,
                het_test_p_value: self.stats[i].het_test_p_value,
                outcome: self.stats[i].outcome.clone(),
                status: self.status[i].clone(),
                message: self.message[i].clone(),
            })
            .collect()
    }
}

/// Writes a frame as CSV (UTF-8, header, full float precision).
pub fn write_csv(frame: &mut DataFrame, path: &Path) -> Result<(), Failure> {
    let mut file =
        File::create(path).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))?;
    CsvWriter::new(&mut file)
        .include_header(true)
        .finish(frame)
        .map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}

/// Writes a frame as Parquet.
pub fn write_parquet(frame: &mut DataFrame, path: &Path) -> Result<(), Failure> {
    let file =
        File::create(path).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))?;
    ParquetWriter::new(file)
        .finish(frame)
        .map(|_| ())
        .map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}
