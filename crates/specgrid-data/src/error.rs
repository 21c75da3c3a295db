//! Errors and warnings of the data layer. Every message names the data file, the column, the
//! number of rows concerned and what the user can do about it.

use std::fmt;
use std::path::PathBuf;

/// Formats a count with thousands separators (`2345` → `2,345`) so large row counts read easily.
pub fn fmt_count(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(ch);
    }
    out
}

/// A row count with its noun: `1 row`, `2,345 rows`.
pub fn fmt_rows(n: usize) -> String {
    if n == 1 {
        "1 row".to_string()
    } else {
        format!("{} rows", fmt_count(n))
    }
}

/// Where a row sits in the file, for messages: data rows are counted from 1; for CSV the file
/// line is also given (the header is line 1; quoted fields with line breaks shift it).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RowPosition {
    /// Zero-based data row.
    pub row: usize,
    /// Whether the file is CSV (so a file line can be given).
    pub csv: bool,
}

impl fmt::Display for RowPosition {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.csv {
            write!(f, "data row {} (line {})", self.row + 1, self.row + 2)
        } else {
            write!(f, "data row {}", self.row + 1)
        }
    }
}

/// Why the data could not be loaded or assembled.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum DataError {
    /// The file extension names no supported format.
    #[error("{}: unsupported data file type; use a `.csv` or `.parquet` file", path.display())]
    UnsupportedFormat {
        /// The data file.
        path: PathBuf,
    },
    /// The file could not be opened, or its contents could not be parsed.
    #[error("{}: cannot read the data file: {detail}; check that the file exists and is a well-formed {format} file", path.display())]
    Unreadable {
        /// The data file.
        path: PathBuf,
        /// Expected format (`CSV` or `Parquet`).
        format: &'static str,
        /// What went wrong, as reported by the reader.
        detail: String,
    },
    /// The study names a column the file does not have.
    #[error("{}: no column named `{column}` (the file has {n_columns} columns{hint}); fix the name in the study file", path.display())]
    UnknownColumn {
        /// The data file.
        path: PathBuf,
        /// The missing column.
        column: String,
        /// Number of columns in the file.
        n_columns: usize,
        /// "; did you mean …" or the list of available columns.
        hint: String,
    },
    /// A column the file stores in a type the data layer does not handle.
    #[error("{}: column `{column}` has type {dtype}, which specgrid cannot use ({}); store it as numbers or text", path.display(), fmt_rows(*rows))]
    UnsupportedType {
        /// The data file.
        path: PathBuf,
        /// Column name.
        column: String,
        /// The stored type.
        dtype: String,
        /// Rows in the file.
        rows: usize,
    },
    /// A column used as a number holds cells that are not numbers.
    #[error("{}: column `{column}` is used as a number but holds text that is not a number in {}, first at {first} (`{value}`); fix or blank out those cells (blank and `NA` count as missing)", path.display(), fmt_rows(*rows))]
    NonNumeric {
        /// The data file.
        path: PathBuf,
        /// Column name.
        column: String,
        /// Number of offending rows.
        rows: usize,
        /// First offending row.
        first: RowPosition,
        /// Its cell text.
        value: String,
    },
    /// A column used as a number holds infinite values.
    #[error("{}: column `{column}` holds infinite values in {}, first at {first}; replace them with finite numbers or blank cells", path.display(), fmt_rows(*rows))]
    Infinite {
        /// The data file.
        path: PathBuf,
        /// Column name.
        column: String,
        /// Number of offending rows.
        rows: usize,
        /// First offending row.
        first: RowPosition,
    },
    /// A sample condition that cannot be evaluated as written.
    #[error("{}: sample `{sample}`: {detail}", path.display())]
    InvalidCondition {
        /// The data file.
        path: PathBuf,
        /// Sample option name.
        sample: String,
        /// What is wrong and what to do.
        detail: String,
    },
    /// A sample keeps no rows.
    #[error("{}: sample `{sample}` keeps 0 of {} rows ({reason}); loosen its conditions or check the columns they use", path.display(), fmt_count(*rows_read))]
    EmptySample {
        /// The data file.
        path: PathBuf,
        /// Sample option name.
        sample: String,
        /// Rows in the file.
        rows_read: usize,
        /// Which step removed the last rows, with the columns involved.
        reason: String,
    },
    /// An outcome form is constant over the rows of a sample.
    #[error("{}: outcome `{outcome}` (column `{column}`) has no variance over the {} of sample `{sample}` (every value is {value}); choose another outcome or sample", path.display(), fmt_rows(*rows))]
    NoOutcomeVariance {
        /// The data file.
        path: PathBuf,
        /// Outcome label, e.g. `log(yield_t)`.
        outcome: String,
        /// Source column.
        column: String,
        /// Sample option name.
        sample: String,
        /// Rows of the design.
        rows: usize,
        /// The single value.
        value: f64,
    },
    /// A standardized term is constant over the rows of a sample, so it cannot be scaled.
    #[error("{}: `{term}` cannot be standardized: column `{column}` is constant over the {} of sample `{sample}`; use the plain level or another sample", path.display(), fmt_rows(*rows))]
    NoVarianceToStandardize {
        /// The data file.
        path: PathBuf,
        /// Term label.
        term: String,
        /// Source column.
        column: String,
        /// Sample option name.
        sample: String,
        /// Rows of the design.
        rows: usize,
    },
    /// A transform produced an infinite value (e.g. a large power overflowing).
    #[error("{}: `{term}` (column `{column}`) gives a non-finite value in {} of sample `{sample}`, first at {first}; use a smaller power or rescale the column", path.display(), fmt_rows(*rows))]
    NonFiniteResult {
        /// The data file.
        path: PathBuf,
        /// Term label.
        term: String,
        /// Source column.
        column: String,
        /// Sample option name.
        sample: String,
        /// Offending rows.
        rows: usize,
        /// First offending row.
        first: RowPosition,
    },
    /// A categorical's named reference level is not one of its levels in the sample.
    #[error("{}: reference level `{level}` of column `{column}` does not occur in the {} of sample `{sample}`; levels there: {levels}", path.display(), fmt_rows(*rows))]
    UnknownReference {
        /// The data file.
        path: PathBuf,
        /// Column name.
        column: String,
        /// The reference asked for.
        level: String,
        /// Sample option name.
        sample: String,
        /// Rows of the design.
        rows: usize,
        /// The levels present, comma separated.
        levels: String,
    },
    /// A tracked (focus) categorical has a single level in the sample, so it has no coefficient.
    #[error("{}: the focus column `{column}` has the single level `{level}` in all {} of sample `{sample}`, so its effect cannot be estimated; choose another sample or focus", path.display(), fmt_rows(*rows))]
    SingleLevelFocus {
        /// The data file.
        path: PathBuf,
        /// Column name.
        column: String,
        /// The one level.
        level: String,
        /// Sample option name.
        sample: String,
        /// Rows of the design.
        rows: usize,
    },
    /// Fewer rows than the largest model has coefficients.
    #[error("{}: sample `{sample}` keeps {} but its largest model has {columns} coefficients (columns {names}); use fewer controls or a wider sample", path.display(), fmt_rows(*rows))]
    TooFewRows {
        /// The data file.
        path: PathBuf,
        /// Sample option name.
        sample: String,
        /// Rows of the design.
        rows: usize,
        /// Coefficients of the largest model.
        columns: usize,
        /// Leading column names of that model, for orientation.
        names: String,
    },
    /// The plan given to `assemble` does not match the one given to `load`, or is malformed.
    #[error("{}: inconsistent plan: {detail}", path.display())]
    PlanMismatch {
        /// The data file.
        path: PathBuf,
        /// What is inconsistent.
        detail: String,
    },
    /// Absorbing fixed effects or applying weights failed (bad weights, nothing left, no
    /// convergence); `detail` says why and what to do.
    #[error("{}: sample `{sample}`: {detail}", path.display())]
    Preparation {
        /// The data file.
        path: PathBuf,
        /// Sample option name.
        sample: String,
        /// The engine's explanation.
        detail: String,
    },
}

/// Something the user should know that does not stop the run.
#[derive(Debug, Clone, PartialEq)]
pub enum DataWarning {
    /// A transform is undefined for some rows, which are therefore dropped.
    TransformDropsRows {
        /// Sample option name.
        sample: String,
        /// Term label, e.g. `log(visits)`.
        term: String,
        /// Source column.
        column: String,
        /// Rows dropped for this reason (among the sample's rows with the column present).
        rows: usize,
        /// The rule, e.g. `visits ≤ 0`.
        rule: String,
        /// Suggested alternatives.
        suggestion: &'static str,
    },
    /// Rows dropped because a needed column is missing there.
    MissingValues {
        /// Sample option name.
        sample: String,
        /// Column name.
        column: String,
        /// Rows of the sample with the cell missing.
        rows: usize,
    },
    /// A categorical with a single level in the rows gives no columns.
    SingleLevel {
        /// Sample option name.
        sample: String,
        /// Column name.
        column: String,
        /// The one level.
        level: String,
        /// Rows of the design.
        rows: usize,
    },
}

impl fmt::Display for DataWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DataWarning::TransformDropsRows {
                sample,
                term,
                rows,
                rule,
                suggestion,
                ..
            } => write!(
                f,
                "sample `{sample}`: {term} is undefined for {} with {rule}; those rows are dropped; consider {suggestion}",
                fmt_rows(*rows)
            ),
            DataWarning::MissingValues {
                sample,
                column,
                rows,
            } => write!(
                f,
                "sample `{sample}`: column `{column}` is missing in {}; those rows are dropped",
                fmt_rows(*rows)
            ),
            DataWarning::SingleLevel {
                sample,
                column,
                level,
                rows,
            } => write!(
                f,
                "sample `{sample}`: categorical column `{column}` has the single level `{level}` in all {}; it adds no columns there",
                fmt_rows(*rows)
            ),
        }
    }
}
