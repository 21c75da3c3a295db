//! Reading the needed columns of a CSV or Parquet file with polars (lazy scan, projection of only
//! the needed columns) into [`LoadedColumn`]s.

use std::path::Path;

use polars::prelude::*;

use crate::column::{from_text_cells, ColumnValues, LoadedColumn};
use crate::error::{fmt_count, DataError};

/// Supported data file formats, chosen by file extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FileFormat {
    /// Comma-separated text with a header line (`.csv`).
    Csv,
    /// Apache Parquet (`.parquet`, `.pq`).
    Parquet,
}

impl FileFormat {
    /// The format for a path, from its extension (case-insensitive).
    pub fn from_path(path: &Path) -> Result<FileFormat, DataError> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        match ext.as_deref() {
            Some("csv") => Ok(FileFormat::Csv),
            Some("parquet") | Some("pq") => Ok(FileFormat::Parquet),
            _ => Err(DataError::UnsupportedFormat {
                path: path.to_path_buf(),
            }),
        }
    }

    fn name(self) -> &'static str {
        match self {
            FileFormat::Csv => "CSV",
            FileFormat::Parquet => "Parquet",
        }
    }
}

/// Reads the named columns. Returns the row count and the columns in the order asked.
pub fn read_columns(
    path: &Path,
    format: FileFormat,
    names: &[String],
) -> Result<(usize, Vec<LoadedColumn>), DataError> {
    let unreadable = |detail: String| DataError::Unreadable {
        path: path.to_path_buf(),
        format: format.name(),
        detail,
    };
    if !path.is_file() {
        return Err(unreadable("no such file".into()));
    }
    let pl_path = PlRefPath::try_from_path(path).map_err(|e| unreadable(e.to_string()))?;
    let mut lazy = match format {
        FileFormat::Csv => LazyCsvReader::new(pl_path)
            .with_glob(false)
            .with_has_header(true)
            // Read every cell as text; the data layer decides number vs text over the whole
            // column, so a late non-number is reported with its row instead of failing the scan.
            .with_infer_schema_length(Some(0))
            .finish(),
        FileFormat::Parquet => {
            let args = ScanArgsParquet {
                glob: false,
                // A plain file: no partition columns read from `key=value` folder names.
                hive_options: HiveOptions::new_disabled(),
                ..Default::default()
            };
            LazyFrame::scan_parquet(pl_path, args)
        }
    }
    .map_err(|e| unreadable(e.to_string()))?;
    let schema = lazy
        .collect_schema()
        .map_err(|e| unreadable(e.to_string()))?;
    let available: Vec<String> = schema.iter_names().map(|n| n.to_string()).collect();
    for name in names {
        if !available.iter().any(|a| a == name) {
            return Err(DataError::UnknownColumn {
                path: path.to_path_buf(),
                column: name.clone(),
                n_columns: available.len(),
                hint: column_hint(name, &available),
            });
        }
    }
    let exprs: Vec<Expr> = names.iter().map(|n| col(n.as_str())).collect();
    let frame = lazy
        .select(exprs)
        .collect()
        .map_err(|e| unreadable(e.to_string()))?;
    let rows = frame.height();
    let mut columns = Vec::with_capacity(names.len());
    for name in names {
        let column = frame.column(name).map_err(|e| unreadable(e.to_string()))?;
        let values = convert(column).map_err(|dtype| DataError::UnsupportedType {
            path: path.to_path_buf(),
            column: name.clone(),
            dtype,
            rows,
        })?;
        columns.push(LoadedColumn {
            name: name.clone(),
            values,
        });
    }
    Ok((rows, columns))
}

/// Converts a polars column; `Err` carries the unsupported type's name.
fn convert(column: &Column) -> Result<ColumnValues, String> {
    let dtype = column.dtype().clone();
    if dtype.is_string() {
        let ca = column.str().map_err(|_| dtype.to_string())?;
        return Ok(from_text_cells(ca.iter()));
    }
    if dtype.is_categorical() || dtype.is_enum() {
        let text = column
            .cast(&DataType::String)
            .map_err(|_| dtype.to_string())?;
        let ca = text.str().map_err(|_| dtype.to_string())?;
        return Ok(from_text_cells(ca.iter()));
    }
    if dtype.is_primitive_numeric() || dtype.is_bool() || dtype.is_null() {
        let floats = column
            .cast(&DataType::Float64)
            .map_err(|_| dtype.to_string())?;
        let ca = floats.f64().map_err(|_| dtype.to_string())?;
        return Ok(ColumnValues::Number(
            ca.iter().map(|x| x.filter(|x| !x.is_nan())).collect(),
        ));
    }
    Err(dtype.to_string())
}

/// "did you mean …" from close names (normalised Levenshtein similarity), otherwise the list of
/// columns (shortened when long).
fn column_hint(name: &str, available: &[String]) -> String {
    let wanted = name.to_lowercase();
    let mut close: Vec<(f64, &String)> = available
        .iter()
        .map(|a| {
            (
                strsim::normalized_levenshtein(&wanted, &a.to_lowercase()),
                a,
            )
        })
        .filter(|(score, _)| *score >= 0.5)
        .collect();
    close.sort_by(|a, b| b.0.total_cmp(&a.0));
    if !close.is_empty() {
        let names: Vec<String> = close
            .iter()
            .take(3)
            .map(|(_, a)| format!("`{a}`"))
            .collect();
        return format!("; did you mean {}?", names.join(" or "));
    }
    const SHOWN: usize = 12;
    let mut listed: Vec<String> = available
        .iter()
        .take(SHOWN)
        .map(|a| format!("`{a}`"))
        .collect();
    if available.len() > SHOWN {
        listed.push(format!("and {} more", fmt_count(available.len() - SHOWN)));
    }
    format!(": {}", listed.join(", "))
}
