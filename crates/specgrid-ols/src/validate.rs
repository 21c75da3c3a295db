//! Input checks: every malformed design or request becomes a typed error, never a panic.

use crate::api::{ClusterIds, Covariance, Design, EngineError, FitOptions, ModelError, ModelSpec};

/// Checks shapes, names, cluster codes and finiteness of a design.
pub(crate) fn check_design(design: &Design) -> Result<(), EngineError> {
    check_design_shape(design)?;
    for (j, name) in design.x_names.iter().enumerate() {
        check_finite(design.x.col(j).iter(), name)?;
    }
    for (j, name) in design.y_names.iter().enumerate() {
        check_finite(design.y.col(j).iter(), name)?;
    }
    Ok(())
}

/// Finiteness of the given regressor columns and outcome only (indices already checked).
pub(crate) fn check_used_columns(
    design: &Design,
    columns: &[usize],
    outcome: usize,
) -> Result<(), EngineError> {
    for &j in columns {
        check_finite(design.x.col(j).iter(), &design.x_names[j])?;
    }
    check_finite(design.y.col(outcome).iter(), &design.y_names[outcome])
}

/// Checks shapes, names and cluster codes (not the values).
pub(crate) fn check_design_shape(design: &Design) -> Result<(), EngineError> {
    let n = design.x.nrows();
    let (p, m) = (design.x.ncols(), design.y.ncols());
    if design.y.nrows() != n {
        return Err(EngineError::Shape(format!(
            "regressors have {n} rows but outcomes have {}",
            design.y.nrows()
        )));
    }
    if design.x_names.len() != p || design.y_names.len() != m {
        return Err(EngineError::Shape(format!(
            "{} regressor names for {p} columns, {} outcome names for {m} columns",
            design.x_names.len(),
            design.y_names.len()
        )));
    }
    if n == 0 {
        return Err(EngineError::Empty);
    }
    if m == 0 {
        return Err(EngineError::Shape(
            "the design has no outcome column".into(),
        ));
    }
    for c in &design.clusters {
        check_codes(c, n, "cluster", "clusters").map_err(EngineError::Shape)?;
    }
    Ok(())
}

/// Checks that a code vector (a clustering or an absorbed effect, named `what`; its levels are
/// called `levels`) has one code per row, each below its declared count.
pub(crate) fn check_codes(
    c: &ClusterIds,
    n: usize,
    what: &str,
    levels: &str,
) -> Result<(), String> {
    if c.codes.len() != n {
        return Err(format!(
            "{what} `{}` has {} codes for {n} rows",
            c.name,
            c.codes.len()
        ));
    }
    if let Some(row) = c.codes.iter().position(|&g| g as usize >= c.count) {
        return Err(format!(
            "{what} `{}` has code {} at row {row}, but declares only {} {levels}",
            c.name, c.codes[row], c.count
        ));
    }
    Ok(())
}

fn check_finite<'a>(values: impl Iterator<Item = &'a f64>, name: &str) -> Result<(), EngineError> {
    for (row, v) in values.enumerate() {
        if !v.is_finite() {
            return Err(EngineError::NonFinite {
                column: name.to_string(),
                row,
            });
        }
    }
    Ok(())
}

/// Checks options shared by all models of a call.
pub(crate) fn check_options(opts: &FitOptions, design: &Design) -> Result<(), ModelError> {
    let level = opts.confidence_level;
    if !(level > 0.0 && level < 1.0) {
        return Err(ModelError::InvalidRequest(format!(
            "confidence level must lie strictly between 0 and 1, got {level}"
        )));
    }
    let tol = opts.collinearity_tolerance;
    if !(tol.is_finite() && (0.0..1.0).contains(&tol)) {
        return Err(ModelError::InvalidRequest(format!(
            "collinearity tolerance must be finite and in [0, 1), got {tol}"
        )));
    }
    if opts.condition_limit.is_nan() || opts.condition_limit <= 1.0 {
        return Err(ModelError::InvalidRequest(format!(
            "condition limit must exceed 1, got {}",
            opts.condition_limit
        )));
    }
    let dims = design.clusters.len();
    for cov in &opts.covariances {
        match *cov {
            Covariance::Cluster { dim } if dim >= dims => {
                return Err(ModelError::InvalidRequest(format!(
                    "cluster dimension {dim} requested, but the design has {dims}"
                )))
            }
            Covariance::TwoWayCluster { first, second } => {
                if first >= dims || second >= dims {
                    return Err(ModelError::InvalidRequest(format!(
                        "two-way clustering on dimensions {first} and {second}, but the design has {dims}"
                    )));
                }
                if first == second {
                    return Err(ModelError::InvalidRequest(format!(
                        "two-way clustering needs two different dimensions, got {first} twice"
                    )));
                }
            }
            _ => {}
        }
    }
    Ok(())
}

/// Checks one model request against the design's sizes.
pub(crate) fn check_model(
    model: &ModelSpec,
    p: usize,
    m: usize,
    n: usize,
) -> Result<(), ModelError> {
    if model.columns.len() > n {
        return Err(ModelError::NoResidualDf {
            n,
            k: model.columns.len(),
        });
    }
    if model.columns.is_empty() {
        return Err(ModelError::InvalidRequest(
            "the model has no regressor columns".into(),
        ));
    }
    if model.outcome >= m {
        return Err(ModelError::InvalidRequest(format!(
            "outcome index {} out of range (the design has {m} outcomes)",
            model.outcome
        )));
    }
    let mut seen = vec![false; p];
    for &c in &model.columns {
        if c >= p {
            return Err(ModelError::InvalidRequest(format!(
                "column index {c} out of range (the design has {p} regressor columns)"
            )));
        }
        if std::mem::replace(&mut seen[c], true) {
            return Err(ModelError::InvalidRequest(format!(
                "column index {c} appears twice in the model"
            )));
        }
    }
    let mut tracked_seen = vec![false; p];
    for &t in &model.tracked {
        if t >= p || !seen[t] {
            return Err(ModelError::InvalidRequest(format!(
                "tracked column {t} is not one of the model's columns"
            )));
        }
        if std::mem::replace(&mut tracked_seen[t], true) {
            return Err(ModelError::InvalidRequest(format!(
                "tracked column {t} is listed twice"
            )));
        }
    }
    Ok(())
}
