//! Outcome-only refits: the grid's models fitted again on NEW outcome vectors over the same rows
//! and regressors, without factoring X again.
//!
//! With X̃ = X·D⁻¹ (unit-norm columns) = Q_X·R_X from the shared factor, a model on kept columns
//! S has R_X[:, S] = Q₂·T (a small QR, once per model), so X̃_S = Q_X·Q₂·T and for any outcome y*:
//! b̃ = T⁻¹·Q₂'·(Q_X'y*), b = D_S⁻¹·b̃, and the residual sum of squares splits exactly into the
//! part outside the union span, ‖y* − Q_X·Q_X'y*‖², and the part inside it,
//! ‖c − Q₂·Q₂'c‖² with c = Q_X'y*. Per batch of outcomes Q_X'Y* is one matrix product
//! (n × p' times n × d); per model the work is O(p·k·d), independent of n.

use faer::linalg::matmul::matmul;
use faer::{Accum, Mat, MatRef, Par};
use rayon::prelude::*;

use crate::api::{Covariance, FitOptions, ModelError, ModelFit, ModelSpec};
use crate::dense::{seq_product, thin_qr};
use crate::shared::SharedFactor;
use crate::small_qr::upper_inverse;

use super::InferenceError;

/// A union column (unit norm) whose part outside the span of the earlier ones is at most this
/// is collinear with them; the engine's default collinearity tolerance.
const COLLINEAR_PIVOT: f64 = 1e-10;

/// Per-model factors kept for refits.
#[derive(Debug, Clone)]
struct RefitModel {
    /// Kept union columns in model order (the shared fit's choice of collinear drops).
    kept: Vec<usize>,
    /// Thin Q₂ (p' × k) of R_X[:, kept].
    q2: Mat<f64>,
    /// T⁻¹ (k × k, upper).
    tinv: Mat<f64>,
    /// ‖row q of T⁻¹‖ / s_q: the classical standard error of coefficient q is σ times this.
    se_factor: Vec<f64>,
    /// Column scales s_q of the kept columns.
    scales: Vec<f64>,
}

/// The grid's models prepared for fitting on new outcome vectors (see the module docs).
#[derive(Debug)]
pub struct OutcomeRefit<'f> {
    basis: MatRef<'f, f64>,
    /// Orthonormal basis, in the coordinates of `basis`, of the span of the union columns.
    /// At a union column that is collinear with earlier ones the Householder reflector is
    /// built from rounding noise, so `basis` then reaches beyond the union span (in one case
    /// seen, exactly along an outcome's residual). The models' refits stay exact (each model's
    /// columns lie in the span of `basis`), but the union's fitted values must use the span of
    /// the columns themselves: the thin Q of R_X over the columns whose pivot is not
    /// negligible (the others are combinations of earlier ones), see [`union_span`].
    span: Mat<f64>,
    n: usize,
    models: Vec<Result<RefitModel, ModelError>>,
}

/// One model refitted on a batch of d outcome vectors.
#[derive(Debug, Clone)]
pub struct RefitBatch {
    /// Kept union columns, model order.
    pub kept: Vec<usize>,
    /// Coefficients in data units, k × d (row q = kept column q, column = outcome vector).
    pub coef: Mat<f64>,
    /// Residual sum of squares per outcome vector.
    pub rss: Vec<f64>,
    /// Residual degrees of freedom n − k.
    pub df_resid: usize,
    /// Classical standard error of coefficient q is sqrt(rss / df_resid) · `se_factor[q]`.
    pub se_factor: Vec<f64>,
}

impl RefitBatch {
    /// Classical standard error of kept coefficient `q` for outcome vector `d`.
    pub fn classical_se(&self, q: usize, d: usize) -> f64 {
        (self.rss[d] / self.df_resid as f64).sqrt() * self.se_factor[q]
    }
}

impl<'f> OutcomeRefit<'f> {
    /// Prepares `models` on `factor` (which must come from [`SharedFactor::new_for_refits`]).
    /// Each model is first fitted normally (classical errors) so that the same columns are
    /// dropped as collinear and the same models are refused as in the grid itself; those
    /// models carry their error here too. When the grid's fits are at hand already, use
    /// [`OutcomeRefit::from_fits`] and skip that pass.
    pub fn new(
        factor: &'f SharedFactor<'_>,
        models: &[ModelSpec],
        opts: &FitOptions,
    ) -> Result<OutcomeRefit<'f>, InferenceError> {
        let classical = FitOptions {
            covariances: vec![Covariance::Classical],
            ..opts.clone()
        };
        Self::from_fits(factor, &factor.fit_many(models, &classical))
    }

    /// Prepares the models whose fits on `factor` are `fits` (one per model, as returned by
    /// [`SharedFactor::fit_many`]): the kept columns are read from each fit, and a refused
    /// model stays refused.
    pub fn from_fits(
        factor: &'f SharedFactor<'_>,
        fits: &[Result<ModelFit, ModelError>],
    ) -> Result<OutcomeRefit<'f>, InferenceError> {
        let basis = factor.x_basis().ok_or(InferenceError::NoBasis)?;
        let r = factor.union_r();
        let rows = basis.ncols();
        let scales = factor.x_scales();
        let prepared = fits
            .par_iter()
            .map(|fit| {
                let fit = fit.as_ref().map_err(Clone::clone)?;
                let kept: Vec<usize> = fit.all_estimates.iter().map(|&(c, _)| c).collect();
                Ok(prepare(r, rows, &kept, scales))
            })
            .collect();
        let span = union_span(r.subcols(0, scales.len()), rows);
        Ok(OutcomeRefit {
            basis,
            span,
            n: factor.design().x.nrows(),
            models: prepared,
        })
    }

    /// Number of prepared models (including refused ones).
    pub fn len(&self) -> usize {
        self.models.len()
    }

    /// Whether no model was given.
    pub fn is_empty(&self) -> bool {
        self.models.is_empty()
    }

    /// Why model `i` cannot be refitted, if it cannot.
    pub fn model_error(&self, i: usize) -> Option<&ModelError> {
        self.models[i].as_ref().err()
    }

    /// Kept union columns of model `i` (model order), if it can be refitted.
    pub fn kept(&self, i: usize) -> Option<&[usize]> {
        self.models[i].as_ref().ok().map(|m| m.kept.as_slice())
    }

    /// Projects a batch of outcome vectors (n × d, data units) onto the union basis:
    /// c = Q_X'y* (p' × d) and the out-of-span residual sums of squares ‖y* − Q_X·c‖².
    pub fn project(&self, ys: MatRef<'_, f64>) -> Projected {
        let d = ys.ncols();
        let c = seq_product(self.basis.transpose(), ys);
        let mut outside = ys.to_owned();
        matmul(
            outside.as_mut(),
            Accum::Add,
            self.basis,
            c.as_ref(),
            -1.0,
            Par::Seq,
        );
        let out_rss = (0..d).map(|j| outside.col(j).squared_norm_l2()).collect();
        Projected { c, out_rss }
    }

    /// Fitted values on the union span, Q_X·c (n × d), of projected outcomes. With a
    /// rank-deficient union use [`OutcomeRefit::union_fitted`]: the full basis then reaches
    /// beyond the union span.
    pub fn fitted(&self, proj: &Projected) -> Mat<f64> {
        seq_product(self.basis, proj.c.as_ref())
    }

    /// The projection of outcomes `ys` (n × d) on the span of the union columns, also when
    /// some union columns are collinear with others (see the `span` field).
    pub fn union_fitted(&self, ys: MatRef<'_, f64>) -> Mat<f64> {
        let c = seq_product(self.basis.transpose(), ys);
        let inner = seq_product(self.span.transpose(), c.as_ref());
        let within = seq_product(self.span.as_ref(), inner.as_ref());
        seq_product(self.basis, within.as_ref())
    }

    /// Refits model `i` on projected outcomes; `Err` if the model was refused.
    pub fn fit_projected(&self, i: usize, proj: &Projected) -> Result<RefitBatch, ModelError> {
        let m = self.models[i].as_ref().map_err(Clone::clone)?;
        let d = proj.c.ncols();
        let k = m.kept.len();
        let inner = seq_product(m.q2.transpose(), proj.c.as_ref());
        let mut coef = seq_product(m.tinv.as_ref(), inner.as_ref());
        for q in 0..k {
            let s = m.scales[q];
            coef.row_mut(q).iter_mut().for_each(|b| *b /= s);
        }
        let mut within = proj.c.clone();
        matmul(
            within.as_mut(),
            Accum::Add,
            m.q2.as_ref(),
            inner.as_ref(),
            -1.0,
            Par::Seq,
        );
        let rss = (0..d)
            .map(|j| proj.out_rss[j] + within.col(j).squared_norm_l2())
            .collect();
        Ok(RefitBatch {
            kept: m.kept.clone(),
            coef,
            rss,
            df_resid: self.n - k,
            se_factor: m.se_factor.clone(),
        })
    }

    /// Refits every model on the outcome vectors `ys` (n × d, data units). The numbers do not
    /// depend on the number of threads.
    pub fn fit_outcomes(&self, ys: MatRef<'_, f64>) -> Vec<Result<RefitBatch, ModelError>> {
        let proj = self.project(ys);
        (0..self.models.len())
            .into_par_iter()
            .map(|i| self.fit_projected(i, &proj))
            .collect()
    }
}

/// Outcome vectors projected on the union basis (see [`OutcomeRefit::project`]).
#[derive(Debug, Clone)]
pub struct Projected {
    c: Mat<f64>,
    out_rss: Vec<f64>,
}

/// Orthonormal basis (in the coordinates of the union basis, `rows` × r) of the span of the
/// union columns R_X[:, j] (unit norm each), by Gram–Schmidt in column order with one
/// re-orthogonalisation ("twice is enough", Giraud et al. 2005): a column whose part outside the
/// span of the earlier kept ones is at most the engine's collinearity tolerance is left out.
/// The pivots R[j, j] alone cannot tell: after a collinear column the Householder sequence may
/// move a later column's new direction onto the noise reflector, leaving its own pivot at 0.
fn union_span(r_x: MatRef<'_, f64>, rows: usize) -> Mat<f64> {
    let mut kept: Vec<Vec<f64>> = Vec::new();
    for j in 0..r_x.ncols() {
        let mut v: Vec<f64> = (0..rows).map(|i| r_x[(i, j)]).collect();
        for _ in 0..2 {
            for q in &kept {
                let d: f64 = q.iter().zip(&v).map(|(a, b)| a * b).sum();
                v.iter_mut().zip(q).for_each(|(x, a)| *x -= d * a);
            }
        }
        let norm = v.iter().map(|x| x * x).sum::<f64>().sqrt();
        if norm > COLLINEAR_PIVOT {
            v.iter_mut().for_each(|x| *x /= norm);
            kept.push(v);
        }
    }
    Mat::from_fn(rows, kept.len(), |i, q| kept[q][i])
}

/// Small QR of R_X[:, kept] and the pieces a refit needs.
fn prepare(r: MatRef<'_, f64>, rows: usize, kept: &[usize], scales: &[f64]) -> RefitModel {
    let k = kept.len();
    let (q2, t) = thin_qr(Mat::from_fn(rows, k, |i, q| r[(i, kept[q])]).as_ref());
    let mut tinv_flat = vec![0.0; k * k];
    upper_inverse(&t, k, &mut tinv_flat);
    let tinv = Mat::from_fn(k, k, |i, j| tinv_flat[i + j * k]);
    let kept_scales: Vec<f64> = kept.iter().map(|&c| scales[c]).collect();
    let se_factor = (0..k)
        .map(|q| tinv.row(q).squared_norm_l2().sqrt() / kept_scales[q])
        .collect();
    RefitModel {
        kept: kept.to_vec(),
        q2,
        tinv,
        se_factor,
        scales: kept_scales,
    }
}
