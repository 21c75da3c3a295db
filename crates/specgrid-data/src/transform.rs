//! Numeric transforms: their readable labels, where they are defined, and their values over the
//! rows of one design.

use specgrid_study::Transform;

/// Readable label of a transformed column, e.g. `log(area_ha)`, `visits^2`.
pub fn label(column: &str, transform: &Transform) -> String {
    match transform {
        Transform::Level => column.to_string(),
        Transform::Log => format!("log({column})"),
        Transform::Log1p => format!("log1p({column})"),
        Transform::Asinh => format!("asinh({column})"),
        Transform::Power(d) => format!("{column}^{d}"),
        Transform::Standardize => format!("standardized({column})"),
        Transform::Winsorize { lower, upper } => {
            format!("winsorized({column}, {lower}–{upper})")
        }
    }
}

/// Whether the transform is defined at `x` (a present, finite value).
pub fn is_defined(transform: &Transform, x: f64) -> bool {
    match transform {
        Transform::Log => x > 0.0,
        Transform::Log1p => x > -1.0,
        _ => true,
    }
}

/// For transforms that are undefined somewhere: the rule in words (e.g. `visits ≤ 0`) and the
/// alternatives to suggest.
pub fn undefined_rule(column: &str, transform: &Transform) -> Option<(String, &'static str)> {
    match transform {
        Transform::Log => Some((format!("{column} ≤ 0"), "log1p or asinh")),
        Transform::Log1p => Some((format!("{column} ≤ −1"), "asinh")),
        _ => None,
    }
}

/// Sample quantile with linear interpolation between order statistics: definition 7 of
/// Hyndman & Fan (1996), Q(p) = x₍ⱼ₎ + (h − j)(x₍ⱼ₊₁₎ − x₍ⱼ₎) with h = (n − 1)p (0-based j = ⌊h⌋).
/// `sorted` must be ascending and non-empty.
pub fn quantile_type7(sorted: &[f64], p: f64) -> f64 {
    let n = sorted.len();
    let h = (n - 1) as f64 * p.clamp(0.0, 1.0);
    let j = h.floor() as usize;
    if j + 1 >= n {
        return sorted[n - 1];
    }
    sorted[j] + (h - j as f64) * (sorted[j + 1] - sorted[j])
}

/// Why a transform could not be applied over a design's rows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TransformIssue {
    /// Standardizing a column with zero (or undefined) standard deviation.
    NoVariance,
}

/// Applies the transform to the values of one design's rows (all present and defined).
/// Standardize uses the mean and the sample standard deviation (n − 1 denominator) of these
/// values; Winsorize clamps at their type-7 quantiles.
pub fn apply(transform: &Transform, values: &[f64]) -> Result<Vec<f64>, TransformIssue> {
    Ok(match transform {
        Transform::Level => values.to_vec(),
        Transform::Log => values.iter().map(|x| x.ln()).collect(),
        Transform::Log1p => values.iter().map(|x| x.ln_1p()).collect(),
        Transform::Asinh => values.iter().map(|x| x.asinh()).collect(),
        Transform::Power(d) => values.iter().map(|x| x.powi(*d as i32)).collect(),
        Transform::Standardize => {
            let n = values.len();
            if n < 2 {
                return Err(TransformIssue::NoVariance);
            }
            let mean = values.iter().sum::<f64>() / n as f64;
            let ss: f64 = values.iter().map(|x| (x - mean) * (x - mean)).sum();
            let sd = (ss / (n - 1) as f64).sqrt();
            if !sd.is_finite() || sd <= 0.0 {
                return Err(TransformIssue::NoVariance);
            }
            values.iter().map(|x| (x - mean) / sd).collect()
        }
        Transform::Winsorize { lower, upper } => {
            if values.is_empty() {
                return Ok(Vec::new());
            }
            let mut sorted = values.to_vec();
            sorted.sort_by(f64::total_cmp);
            let lo = quantile_type7(&sorted, *lower);
            let hi = quantile_type7(&sorted, *upper);
            values.iter().map(|x| x.clamp(lo, hi)).collect()
        }
    })
}
