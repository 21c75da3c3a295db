//! Expanding plan terms into named design columns over one design's rows.

use std::collections::HashMap;

use specgrid_study::Term;

use crate::column::Levels;
use crate::error::{DataError, DataWarning};
use crate::loaded::LoadedData;
use crate::transform::{apply, label, TransformIssue};

/// One design column over the design's rows.
#[derive(Debug, Clone, PartialEq)]
pub struct NamedColumn {
    /// Readable name, e.g. `log(area_ha)`, `variety=nimbus`, `visits × irrigated=1`.
    pub name: String,
    /// The source columns it is computed from (for messages).
    pub sources: Vec<String>,
    /// Values, one per design row.
    pub values: Vec<f64>,
}

/// What expansion needs besides the term: the data, the design's rows and cached levels.
pub struct Expander<'a> {
    /// The loaded data.
    pub data: &'a LoadedData,
    /// Zero-based data rows of the design.
    pub rows: &'a [usize],
    /// Sample option name (for messages).
    pub sample: &'a str,
    /// Sorted levels per categorical column.
    pub levels: &'a HashMap<String, Levels>,
    /// Warnings collected along the way.
    pub warnings: &'a mut Vec<DataWarning>,
}

impl Expander<'_> {
    /// The design columns of `term`. `tracked` turns a single-level categorical from a warning
    /// (no columns) into an error, since a tracked term must have a coefficient.
    pub fn expand(&mut self, term: &Term, tracked: bool) -> Result<Vec<NamedColumn>, DataError> {
        match term {
            Term::Numeric { column, transform } => {
                let x = self.data.numbers(column)?;
                let mut raw = Vec::with_capacity(self.rows.len());
                for &r in self.rows {
                    raw.push(x[r].ok_or_else(|| self.mismatch(column))?);
                }
                let name = label(column, transform);
                let values = apply(transform, &raw).map_err(|issue| match issue {
                    TransformIssue::NoVariance => DataError::NoVarianceToStandardize {
                        path: self.data.path.clone(),
                        term: name.clone(),
                        column: column.clone(),
                        sample: self.sample.to_string(),
                        rows: self.rows.len(),
                    },
                })?;
                Ok(vec![NamedColumn {
                    name,
                    sources: vec![column.clone()],
                    values,
                }])
            }
            // Absorbed effects and weights change how the design is prepared, not its columns.
            Term::Absorbed { .. } | Term::Weights { .. } => Ok(Vec::new()),
            Term::Categorical { column, reference } => {
                self.indicators(column, reference.as_deref(), tracked)
            }
            Term::Product(a, b) => {
                let left = self.expand(a, tracked)?;
                let right = self.expand(b, tracked)?;
                let mut out = Vec::with_capacity(left.len() * right.len());
                for l in &left {
                    for r in &right {
                        let mut sources = l.sources.clone();
                        for s in &r.sources {
                            if !sources.contains(s) {
                                sources.push(s.clone());
                            }
                        }
                        out.push(NamedColumn {
                            name: format!("{} × {}", l.name, r.name),
                            sources,
                            values: l.values.iter().zip(&r.values).map(|(x, y)| x * y).collect(),
                        });
                    }
                }
                Ok(out)
            }
        }
    }

    fn indicators(
        &mut self,
        column: &str,
        reference: Option<&str>,
        tracked: bool,
    ) -> Result<Vec<NamedColumn>, DataError> {
        let levels = self
            .levels
            .get(column)
            .ok_or_else(|| self.mismatch(column))?;
        let mut codes = Vec::with_capacity(self.rows.len());
        let mut present = vec![false; levels.labels.len()];
        for &r in self.rows {
            let code = levels.codes[r].ok_or_else(|| self.mismatch(column))? as usize;
            present[code] = true;
            codes.push(code);
        }
        let occurring: Vec<usize> = (0..present.len()).filter(|&i| present[i]).collect();
        if occurring.len() < 2 {
            let level = occurring
                .first()
                .map(|&i| levels.labels[i].clone())
                .unwrap_or_default();
            if tracked {
                return Err(DataError::SingleLevelFocus {
                    path: self.data.path.clone(),
                    column: column.to_string(),
                    level,
                    sample: self.sample.to_string(),
                    rows: self.rows.len(),
                });
            }
            let warning = DataWarning::SingleLevel {
                sample: self.sample.to_string(),
                column: column.to_string(),
                level,
                rows: self.rows.len(),
            };
            if !self.warnings.contains(&warning) {
                self.warnings.push(warning);
            }
            return Ok(Vec::new());
        }
        let reference = match reference {
            None => occurring[0],
            Some(want) => *occurring
                .iter()
                .find(|&&i| levels.labels[i] == want)
                .ok_or_else(|| DataError::UnknownReference {
                    path: self.data.path.clone(),
                    column: column.to_string(),
                    level: want.to_string(),
                    sample: self.sample.to_string(),
                    rows: self.rows.len(),
                    levels: occurring
                        .iter()
                        .map(|&i| format!("`{}`", levels.labels[i]))
                        .collect::<Vec<_>>()
                        .join(", "),
                })?,
        };
        Ok(occurring
            .into_iter()
            .filter(|&i| i != reference)
            .map(|i| NamedColumn {
                name: format!("{column}={}", levels.labels[i]),
                sources: vec![column.to_string()],
                values: codes
                    .iter()
                    .map(|&c| if c == i { 1.0 } else { 0.0 })
                    .collect(),
            })
            .collect())
    }

    fn mismatch(&self, column: &str) -> DataError {
        DataError::PlanMismatch {
            path: self.data.path.clone(),
            detail: format!(
                "column `{column}` has a missing or undefined value in a row the design keeps"
            ),
        }
    }
}
