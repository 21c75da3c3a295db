//! Column values as the data layer keeps them after reading: numbers or text, each cell possibly
//! missing, plus the helpers that view them as numbers, as text labels or as sorted levels.

use std::cmp::Ordering;
use std::collections::BTreeMap;

/// Cell texts that count as missing besides an empty cell (trimmed, case-sensitive).
pub const MISSING_MARKERS: [&str; 1] = ["NA"];

/// The values of one column, one entry per data row; `None` is a missing cell.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnValues {
    /// Every present cell is a number (NaN cells are stored as missing).
    Number(Vec<Option<f64>>),
    /// At least one present cell is text that is not a number.
    Text(Vec<Option<String>>),
}

/// One column read from the data file.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadedColumn {
    /// Column name as in the file.
    pub name: String,
    /// Its values.
    pub values: ColumnValues,
}

impl LoadedColumn {
    /// Number of rows.
    pub fn len(&self) -> usize {
        match &self.values {
            ColumnValues::Number(v) => v.len(),
            ColumnValues::Text(v) => v.len(),
        }
    }

    /// Whether the column has no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Whether the cell at `row` is present.
    pub fn is_present(&self, row: usize) -> bool {
        match &self.values {
            ColumnValues::Number(v) => v[row].is_some(),
            ColumnValues::Text(v) => v[row].is_some(),
        }
    }

    /// The text label of the cell at `row` (numbers in their shortest form, `1.0` → `1`).
    pub fn label(&self, row: usize) -> Option<String> {
        match &self.values {
            ColumnValues::Number(v) => v[row].map(number_label),
            ColumnValues::Text(v) => v[row].clone(),
        }
    }

    /// Sorted distinct levels and, for each row, the index of its level (`None` when missing).
    /// Numbers sort numerically, text by its characters.
    pub fn levels(&self) -> Levels {
        match &self.values {
            ColumnValues::Number(v) => {
                let mut distinct: Vec<f64> = v.iter().flatten().copied().collect();
                distinct.sort_by(|a, b| a.partial_cmp(b).unwrap_or(Ordering::Equal));
                distinct.dedup();
                let codes = v
                    .iter()
                    .map(|x| {
                        x.and_then(|x| {
                            distinct
                                .binary_search_by(|d| d.partial_cmp(&x).unwrap_or(Ordering::Equal))
                                .ok()
                                .map(|i| i as u32)
                        })
                    })
                    .collect();
                Levels {
                    labels: distinct.into_iter().map(number_label).collect(),
                    codes,
                }
            }
            ColumnValues::Text(v) => {
                let mut index: BTreeMap<&str, u32> = BTreeMap::new();
                for s in v.iter().flatten() {
                    index.insert(s.as_str(), 0);
                }
                for (i, code) in index.values_mut().enumerate() {
                    *code = i as u32;
                }
                let codes = v.iter().map(|s| s.as_deref().map(|s| index[s])).collect();
                Levels {
                    labels: index.keys().map(|s| s.to_string()).collect(),
                    codes,
                }
            }
        }
    }
}

/// Sorted levels of a column and each row's level index.
#[derive(Debug, Clone, PartialEq)]
pub struct Levels {
    /// Level labels in sorted order.
    pub labels: Vec<String>,
    /// Per row: index into `labels`, or `None` when the cell is missing.
    pub codes: Vec<Option<u32>>,
}

/// The shortest text of a number that reads back to it; integral values print without a
/// fractional part.
pub fn number_label(x: f64) -> String {
    if x == x.trunc() && x.abs() < 1e15 {
        format!("{}", x as i64)
    } else {
        format!("{x}")
    }
}

/// Parses a trimmed cell as a number. Accepts the forms Rust's `f64` parser accepts
/// (`12`, `-3.5`, `1e-3`, `inf`); returns `None` for anything else.
pub fn parse_number(cell: &str) -> Option<f64> {
    cell.parse::<f64>().ok()
}

/// Whether a trimmed cell counts as missing.
pub fn is_missing_marker(cell: &str) -> bool {
    cell.is_empty() || MISSING_MARKERS.contains(&cell)
}

/// Turns text cells into column values: numbers when every present cell parses as one
/// (NaN counts as missing), text otherwise. Cells are trimmed; missing markers become `None`.
pub fn from_text_cells<'a, I>(cells: I) -> ColumnValues
where
    I: IntoIterator<Item = Option<&'a str>>,
{
    let text: Vec<Option<String>> = cells
        .into_iter()
        .map(|c| {
            c.map(str::trim)
                .filter(|c| !is_missing_marker(c))
                .map(str::to_string)
        })
        .collect();
    let mut numbers = Vec::with_capacity(text.len());
    for cell in &text {
        match cell {
            None => numbers.push(None),
            Some(s) => match parse_number(s) {
                Some(x) if x.is_nan() => numbers.push(None),
                Some(x) => numbers.push(Some(x)),
                None => return ColumnValues::Text(text),
            },
        }
    }
    ColumnValues::Number(numbers)
}
