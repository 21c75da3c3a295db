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
pub struct ModelStats<'a> {
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
    pub outcome: &'a str,
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

/// What every row of one model shares: its id, its options, its statistics and status.
/// Strings are borrowed from the plan and the designs, which outlive the table, so a row costs
/// no allocation (at two million models the owned copies were a fifth of the run).
#[derive(Debug, Clone)]
pub struct ModelRows<'a> {
    /// Model id.
    pub model_id: &'a str,
    /// Option number per decision dimension (the model's, borrowed from the plan); the table
    /// turns them into option names only when it builds its columns.
    pub choices: &'a [usize],
    /// Statistics of the fit (empty for a failed model).
    pub stats: ModelStats<'a>,
    /// `ok` or `failed`.
    pub status: &'static str,
    /// Why the model failed (empty when it did not).
    pub message: String,
}

/// Column-wise builder of the results table: one entry per model and, per row, the model it
/// belongs to, the covariance choice, the term and its numbers.
pub struct ResultsTable<'a> {
    dimension_names: Vec<String>,
    /// Option names per dimension.
    options: Vec<&'a [String]>,
    models: Vec<ModelRows<'a>>,
    model: Vec<u32>,
    errors: Vec<&'a str>,
    term: Vec<&'a str>,
    values: Vec<TermValues>,
}

impl<'a> ResultsTable<'a> {
    /// An empty table with one column per decision dimension.
    pub fn new(dimensions: &'a [specgrid_study::Dimension]) -> Result<ResultsTable<'a>, Failure> {
        let dimension_names: Vec<String> = dimensions.iter().map(|d| d.name.clone()).collect();
        for name in &dimension_names {
            if FIXED_COLUMNS.contains(&name.as_str()) {
                return Err(Failure::Study(format!(
                    "the decision dimension `{name}` has the same name as a results column; rename that control block"
                )));
            }
        }
        Ok(ResultsTable {
            dimension_names,
            options: dimensions.iter().map(|d| d.options.as_slice()).collect(),
            models: Vec::new(),
            model: Vec::new(),
            errors: Vec::new(),
            term: Vec::new(),
            values: Vec::new(),
        })
    }

    /// Makes room for `models` more models and `rows` more rows, so that a chunk's columns are
    /// allocated once rather than grown by doubling (each doubling copies into fresh memory).
    pub fn reserve(&mut self, models: usize, rows: usize) {
        self.models.reserve(models);
        self.model.reserve(rows);
        self.errors.reserve(rows);
        self.term.reserve(rows);
        self.values.reserve(rows);
    }

    /// Empties the table, keeping its columns' memory for the next chunk.
    pub fn clear(&mut self) {
        self.models.clear();
        self.model.clear();
        self.errors.clear();
        self.term.clear();
        self.values.clear();
    }

    /// Number of rows so far.
    #[allow(clippy::len_without_is_empty)]
    pub fn len(&self) -> usize {
        self.model.len()
    }

    /// Starts a model: the rows pushed next belong to it.
    pub fn begin_model(&mut self, model: ModelRows<'a>) {
        self.models.push(model);
    }

    /// Appends one row of the model begun last.
    pub fn push(&mut self, errors: &'a str, term: &'a str, values: TermValues) {
        debug_assert!(!self.models.is_empty(), "push before begin_model");
        self.model.push(self.models.len() as u32 - 1);
        self.errors.push(errors);
        self.term.push(term);
        self.values.push(values);
    }

    /// Builds the polars frame (column order: model_id, dimensions, then the fixed columns).
    pub fn to_frame(&self) -> Result<DataFrame, Failure> {
        let owner = |i: usize| &self.models[self.model[i] as usize];
        let n = self.len();
        // The per-row getters are generic (not `&dyn Fn`), so each column's loop is compiled
        // with its getter inlined: 13 numeric columns of millions of rows each.
        // Text the models own (not borrowed for 'a), gathered by the caller.
        let owned_text = |name: &str, v: Vec<&str>| Column::new(name.into(), v);
        let rows = 0..n;
        let mut columns = vec![text_column("model_id", n, |i| owner(i).model_id)];
        for (d, name) in self.dimension_names.iter().enumerate() {
            let options = self.options[d];
            columns.push(text_column(name, n, |i| {
                options[owner(i).choices[d]].as_str()
            }));
        }
        let v = &self.values;
        let s = |i: usize| &owner(i).stats;
        columns.extend([
            text_column("errors", n, |i| self.errors[i]),
            text_column("term", n, |i| self.term[i]),
            float_column("estimate", n, |i| v[i].estimate),
            float_column("std_error", n, |i| v[i].std_error),
            float_column("t_stat", n, |i| v[i].t_stat),
            float_column("p_value", n, |i| v[i].p_value),
            float_column("ci_low", n, |i| v[i].ci_low),
            float_column("ci_high", n, |i| v[i].ci_high),
            float_column("df", n, |i| v[i].df),
            count_column("n_obs", n, |i| s(i).n_obs),
            count_column("n_params", n, |i| s(i).n_params),
            float_column("r_squared", n, |i| s(i).r_squared),
            float_column("adj_r_squared", n, |i| s(i).adj_r_squared),
            float_column("resid_sd", n, |i| s(i).resid_sd),
            float_column("condition_number", n, |i| s(i).condition_number),
            float_column("het_test_stat", n, |i| s(i).het_test_stat),
            float_column("het_test_p_value", n, |i| s(i).het_test_p_value),
            float_column("within_r_squared", n, |i| s(i).within_r_squared),
            owned_text(
                "absorbed",
                rows.clone().map(|i| s(i).absorbed.as_str()).collect(),
            ),
            owned_text(
                "weights",
                rows.clone().map(|i| s(i).weights.as_str()).collect(),
            ),
            owned_text(
                "dropped",
                rows.clone().map(|i| s(i).dropped.as_str()).collect(),
            ),
            text_column("outcome_term", n, |i| s(i).outcome),
            text_column("status", n, |i| owner(i).status),
            owned_text(
                "message",
                rows.clone().map(|i| owner(i).message.as_str()).collect(),
            ),
        ]);
        DataFrame::new(self.len(), columns)
            .map_err(|e| Failure::Output(format!("cannot assemble the results table: {e}")))
    }
}

/// A text column of `n` rows from a getter per row.
fn text_column<'s>(name: &str, n: usize, f: impl Fn(usize) -> &'s str) -> Column {
    let v: Vec<&str> = (0..n).map(f).collect();
    Column::new(name.into(), v)
}

/// A float column of `n` rows, straight into polars' builder (what `Column::new` of a vector
/// of options does after the vector is made: the vector was a few megabytes per column and
/// chunk).
fn float_column(name: &str, n: usize, f: impl Fn(usize) -> Option<f64>) -> Column {
    Float64Chunked::from_iter_options(name.into(), (0..n).map(f)).into_column()
}

/// A count column of `n` rows, like [`float_column`].
fn count_column(name: &str, n: usize, f: impl Fn(usize) -> Option<u64>) -> Column {
    UInt64Chunked::from_iter_options(name.into(), (0..n).map(f)).into_column()
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

/// zstd level of the results' Parquet files. Level 1 rather than the writer's default (3): on
/// the 2,048,200-model grid it compressed in about half the time (zstd's share of a run's
/// samples 102 → 58) into a file no larger (269.8 MB against 270.8 MB; the columns are mostly
/// dictionary codes and repeated numbers, where the faster level loses nothing).
const PARQUET_ZSTD_LEVEL: i32 = 1;

/// The compression every results Parquet file is written with (zstd at
/// [`PARQUET_ZSTD_LEVEL`]; the writer's default level should that level ever be refused).
pub fn parquet_compression() -> ParquetCompression {
    ParquetCompression::Zstd(polars_parquet::write::ZstdLevel::try_new(PARQUET_ZSTD_LEVEL).ok())
}

/// Writes a frame as Parquet.
pub fn write_parquet(frame: &mut DataFrame, path: &Path) -> Result<(), Failure> {
    let file =
        File::create(path).map_err(|e| Failure::Output(format!("{}: {e}", path.display())))?;
    ParquetWriter::new(file)
        .with_compression(parquet_compression())
        .finish(frame)
        .map(|_| ())
        .map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}
