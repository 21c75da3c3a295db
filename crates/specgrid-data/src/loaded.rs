//! [`LoadedData`]: the needed columns of the data file, checked for their roles.

use std::path::PathBuf;

use specgrid_study::Plan;

use crate::column::{parse_number, ColumnValues, LoadedColumn};
use crate::error::{DataError, RowPosition};
use crate::needs::column_needs;
use crate::read::{read_columns, FileFormat};

/// The columns a plan needs, read from its data file.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadedData {
    /// The data file.
    pub path: PathBuf,
    /// Its format.
    pub format: FileFormat,
    /// Number of data rows in the file.
    pub n_rows: usize,
    /// The needed columns, in first-use order (outcomes, terms, conditions, clusters).
    pub columns: Vec<LoadedColumn>,
}

/// Reads every column the plan needs (outcomes, terms, sample conditions, cluster columns) and
/// checks that columns used as numbers hold only finite numbers or missing cells.
pub fn load(plan: &Plan) -> Result<LoadedData, DataError> {
    let path = plan.data_path.clone();
    let format = FileFormat::from_path(&path)?;
    let needs = column_needs(plan);
    let names: Vec<String> = needs.iter().map(|n| n.name.clone()).collect();
    let (n_rows, columns) = read_columns(&path, format, &names)?;
    let data = LoadedData {
        path,
        format,
        n_rows,
        columns,
    };
    for need in needs.iter().filter(|n| n.numeric) {
        data.numbers(&need.name)?;
    }
    Ok(data)
}

impl LoadedData {
    /// The loaded column of this name.
    pub fn column(&self, name: &str) -> Result<&LoadedColumn, DataError> {
        self.columns
            .iter()
            .find(|c| c.name == name)
            .ok_or_else(|| DataError::PlanMismatch {
                path: self.path.clone(),
                detail: format!(
                    "column `{name}` was not loaded; call `load` with the same plan as `assemble`"
                ),
            })
    }

    /// The column as numbers: an error names the column, counts the rows with text that is not
    /// a number or with infinite values, and gives the first such row.
    pub fn numbers(&self, name: &str) -> Result<&[Option<f64>], DataError> {
        let column = self.column(name)?;
        match &column.values {
            ColumnValues::Number(values) => {
                let mut bad = values
                    .iter()
                    .enumerate()
                    .filter(|(_, x)| x.is_some_and(|x| x.is_infinite()));
                if let Some((first, _)) = bad.next() {
                    return Err(DataError::Infinite {
                        path: self.path.clone(),
                        column: name.to_string(),
                        rows: 1 + bad.count(),
                        first: self.position(first),
                    });
                }
                Ok(values)
            }
            ColumnValues::Text(cells) => {
                let mut bad = cells.iter().enumerate().filter_map(|(i, c)| {
                    c.as_deref()
                        .filter(|c| parse_number(c).is_none())
                        .map(|c| (i, c))
                });
                let (first, value) = bad.next().unwrap_or((0, ""));
                Err(DataError::NonNumeric {
                    path: self.path.clone(),
                    column: name.to_string(),
                    rows: 1 + bad.count(),
                    first: self.position(first),
                    value: value.to_string(),
                })
            }
        }
    }

    /// The position of a zero-based data row, for messages.
    pub fn position(&self, row: usize) -> RowPosition {
        RowPosition {
            row,
            csv: self.format == FileFormat::Csv,
        }
    }
}
