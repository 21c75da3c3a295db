//! What one model needs after its triangular factor is known: kept columns, coefficients,
//! R⁻¹ (scaled coordinates), residual sum of squares and the checks that refuse a model.

use crate::api::{FitOptions, ModelError, ModelSpec};
use crate::small_qr::{condition_estimate, condition_scratch, upper_inverse};

/// Per-model results that do not need a pass over the rows.
#[derive(Debug, Clone)]
pub(crate) struct CoreFit {
    /// Rows.
    pub n: usize,
    /// Outcome index.
    pub outcome: usize,
    /// Kept union columns, model order.
    pub kept: Vec<usize>,
    /// Dropped union columns, union order.
    pub dropped: Vec<usize>,
    /// Coefficients in data units, aligned with `kept`.
    pub coef: Vec<f64>,
    /// R⁻¹ of the unit-norm-scaled kept columns, k × k column-major.
    pub rinv: Vec<f64>,
    /// Column scales (2-norms) of the kept columns.
    pub scales: Vec<f64>,
    /// Residual sum of squares in data units.
    pub rss: f64,
    /// Positions (into `kept`) of the reported coefficients, in reporting order.
    pub reported: Vec<usize>,
    /// Whether the kept columns span the constant vector: a constant nonzero column, or e.g. a
    /// full set of indicators (centred R², Breusch–Pagan).
    pub has_constant: bool,
    /// Estimated 2-norm condition number of the scaled kept columns.
    pub condition: f64,
    /// Total sums of squares of the outcome.
    pub tss: ModelTss,
}

/// Centred and uncentred total sums of squares of one outcome.
#[derive(Debug, Clone, Copy)]
pub(crate) struct ModelTss {
    /// Σ(y − ȳ)² (two-pass).
    pub centred: f64,
    /// Σy².
    pub uncentred: f64,
}

impl ModelTss {
    /// Computes both sums for one outcome column.
    pub fn of(y: faer::ColRef<'_, f64>) -> ModelTss {
        let (mut n, mut sum, mut sq) = (0usize, 0.0, 0.0);
        for &v in y.iter() {
            n += 1;
            sum += v;
            sq += v * v;
        }
        let mean = sum / n.max(1) as f64;
        let centred = y.iter().map(|v| (v - mean) * (v - mean)).sum();
        ModelTss {
            centred,
            uncentred: sq,
        }
    }
}

impl CoreFit {
    /// Number of kept coefficients.
    pub fn k(&self) -> usize {
        self.kept.len()
    }

    /// Residual variance σ² = RSS/(n − k).
    pub fn sigma2(&self) -> f64 {
        self.rss / (self.n - self.k()) as f64
    }

    /// Row q of (X'X)⁻¹ in data units, written into `out` (k long):
    /// (X'X)⁻¹ = D⁻¹ R⁻¹R⁻ᵀ D⁻¹ with D the column scales.
    pub fn xtx_inv_row(&self, q: usize, out: &mut [f64]) {
        let k = self.k();
        for (l, o) in out[..k].iter_mut().enumerate() {
            // (R⁻¹R⁻ᵀ)[q, l] = Σ_c R⁻¹[q, c] R⁻¹[l, c]; R⁻¹ is upper, so c ≥ max(q, l).
            let s: f64 = (q.max(l)..k)
                .map(|c| self.rinv[q + c * k] * self.rinv[l + c * k])
                .sum();
            *o = s / (self.scales[q] * self.scales[l]);
        }
    }

    /// Classical variance of coefficient q: σ²·‖row q of R⁻¹‖²/s_q².
    pub fn classical_var(&self, q: usize) -> f64 {
        let k = self.k();
        let row: f64 = (q..k).map(|c| self.rinv[q + c * k].powi(2)).sum();
        self.sigma2() * row / (self.scales[q] * self.scales[q])
    }

    /// Classical covariance of coefficients q and l: σ²·(R⁻¹R⁻ᵀ)[q, l]/(s_q s_l); the diagonal
    /// is [`CoreFit::classical_var`] itself.
    pub fn classical_cov(&self, q: usize, l: usize) -> f64 {
        if q == l {
            return self.classical_var(q);
        }
        let k = self.k();
        let s: f64 = (q.max(l)..k)
            .map(|c| self.rinv[q + c * k] * self.rinv[l + c * k])
            .sum();
        self.sigma2() * s / (self.scales[q] * self.scales[l])
    }
}

/// The triangular factor of one model's scaled columns, from either route.
pub(crate) struct FactorParts<'a> {
    /// Positions into `model.columns` of the kept columns.
    pub kept_pos: &'a [usize],
    /// k × k upper-triangular factor of the kept scaled columns, column-major.
    pub r: &'a [f64],
    /// Q'y (scaled y), k long.
    pub qty: &'a [f64],
    /// ‖y − X b‖ in scaled-y units.
    pub resid_norm: f64,
    /// 2-norm of each model column (model order), 1 for an all-zero column.
    pub col_scales: &'a [f64],
    /// 2-norm of the outcome.
    pub y_scale: f64,
    /// Whether each model column (model order) is constant and nonzero.
    pub col_constant: &'a [bool],
    /// Total sums of squares of the outcome.
    pub tss: ModelTss,
    /// Sum of each model column (model order): X'u for the constant vector u (ones, or √ω
    /// for a weighted design).
    pub col_sums: &'a [f64],
    /// ‖u‖²: n, or Σω for a weighted design.
    pub ones_norm2: f64,
}

/// Relative squared distance of the ones vector from the column space below which the model
/// counts as containing a constant (a full indicator set without an explicit constant column).
const SPAN_TOL: f64 = 1e-10;

/// ‖Q_S'v‖² = ‖R⁻ᵀD⁻¹X_S'v‖² from `xtv` = X_S'v (data units, kept order): the squared length
/// of v's projection on the model's column space.
pub(crate) fn projected_sq_norm(rinv: &[f64], scales: &[f64], xtv: &[f64]) -> f64 {
    let k = scales.len();
    (0..k)
        .map(|c| {
            (0..=c)
                .map(|q| rinv[q + c * k] * xtv[q] / scales[q])
                .sum::<f64>()
                .powi(2)
        })
        .sum()
}

/// Whether the constant vector u lies in the span of the kept columns: ‖Q_S'u‖² equals ‖u‖²
/// then (`norm2`).
fn spans_ones(norm2: f64, rinv: &[f64], scales: &[f64], sums: &[f64]) -> bool {
    projected_sq_norm(rinv, scales, sums) >= norm2 * (1.0 - SPAN_TOL)
}

/// Builds a [`CoreFit`] from a factor, refusing models that cannot be given trustworthy numbers.
/// `scratch` is working space kept by the caller across models (the condition estimate's).
pub(crate) fn core_from_factor(
    n: usize,
    model: &ModelSpec,
    parts: &FactorParts<'_>,
    x_names: &[String],
    opts: &FitOptions,
    scratch: &mut Vec<f64>,
) -> Result<CoreFit, ModelError> {
    let k = parts.kept_pos.len();
    let kept: Vec<usize> = parts.kept_pos.iter().map(|&q| model.columns[q]).collect();
    let mut dropped: Vec<usize> = model
        .columns
        .iter()
        .copied()
        .filter(|c| !kept.contains(c))
        .collect();
    dropped.sort_unstable();
    if let Some(&t) = model.tracked.iter().find(|t| dropped.contains(t)) {
        return Err(ModelError::TrackedDropped {
            name: x_names[t].clone(),
        });
    }
    if k >= n {
        return Err(ModelError::NoResidualDf { n, k });
    }
    let mut rinv = vec![0.0; k * k];
    upper_inverse(parts.r, k, &mut rinv);
    scratch.resize(scratch.len().max(condition_scratch(k)), 0.0);
    let condition = condition_estimate(parts.r, &rinv, k, scratch);
    if condition.is_nan() || condition > opts.condition_limit {
        return Err(ModelError::IllConditioned {
            condition,
            limit: opts.condition_limit,
        });
    }
    let scales: Vec<f64> = parts
        .kept_pos
        .iter()
        .map(|&q| parts.col_scales[q])
        .collect();
    let coef: Vec<f64> = (0..k)
        .map(|q| {
            let b: f64 = (q..k).map(|c| rinv[q + c * k] * parts.qty[c]).sum();
            b * parts.y_scale / scales[q]
        })
        .collect();
    let has_constant = parts.kept_pos.iter().any(|&q| parts.col_constant[q]) || {
        let sums: Vec<f64> = parts.kept_pos.iter().map(|&q| parts.col_sums[q]).collect();
        spans_ones(parts.ones_norm2, &rinv, &scales, &sums)
    };
    let reported = if model.tracked.is_empty() {
        (0..k).collect()
    } else {
        model
            .tracked
            .iter()
            .map(|t| kept.iter().position(|c| c == t).expect("tracked is kept"))
            .collect()
    };
    Ok(CoreFit {
        n,
        outcome: model.outcome,
        kept,
        dropped,
        coef,
        rinv,
        scales,
        rss: (parts.resid_norm * parts.y_scale).powi(2),
        reported,
        has_constant,
        condition,
        tss: parts.tss,
    })
}
