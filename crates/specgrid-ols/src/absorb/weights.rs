//! Regression weights: validation and the per-row factor ω each row carries into the fit.

use super::AbsorbError;

/// How a weights column is read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum WeightKind {
    /// Inverse-variance (analytic) weights: weighted least squares, each row one observation.
    Analytic,
    /// Frequency weights: a row of weight w stands for w identical observations (whole numbers).
    Frequency,
}

/// One weights column: a value per row of the design.
#[derive(Debug, Clone, PartialEq)]
pub struct RowWeights {
    /// Source column name (errors and reports).
    pub name: String,
    /// Analytic or frequency.
    pub kind: WeightKind,
    /// One weight per row of the design.
    pub values: Vec<f64>,
}

/// Checks the weights and returns which rows they keep (weight > 0). Negative, missing (NaN)
/// or infinite weights and fractional frequency weights are errors that say how many rows.
pub(super) fn check_weights(w: &RowWeights, n: usize) -> Result<Vec<bool>, AbsorbError> {
    if w.values.len() != n {
        return Err(AbsorbError::Shape(format!(
            "weights `{}` have {} values for {n} rows",
            w.name,
            w.values.len()
        )));
    }
    let count = |bad: &dyn Fn(f64) -> bool| w.values.iter().filter(|&&v| bad(v)).count();
    let missing = count(&|v: f64| !v.is_finite());
    if missing > 0 {
        return Err(AbsorbError::MissingWeights {
            name: w.name.clone(),
            rows: missing,
        });
    }
    let negative = count(&|v: f64| v < 0.0);
    if negative > 0 {
        return Err(AbsorbError::NegativeWeights {
            name: w.name.clone(),
            rows: negative,
        });
    }
    if w.kind == WeightKind::Frequency {
        let fractional = count(&|v: f64| v.fract() != 0.0);
        if fractional > 0 {
            return Err(AbsorbError::FractionalFrequency {
                name: w.name.clone(),
                rows: fractional,
            });
        }
    }
    Ok(w.values.iter().map(|&v| v > 0.0).collect())
}
