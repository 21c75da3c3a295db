//! Joint test over the whole curve (Simonsohn, Simmons & Nelson 2020, Nature Human Behaviour
//! 4:1208): is the curve as a whole more than chance?
//!
//! The null is imposed per model as in the paper (each model's outcome minus its own estimated
//! focus effect), and the data are resampled by an outcome-only wild bootstrap so that the
//! shared factorisation is reused: per outcome, y* = ŷ_U + ê_U∘v with ŷ_U, ê_U the projection of
//! y on all union columns and its residual, and v seeded Rademacher (or Webb) weights per row
//! or per cluster. Refitting model s on y* and subtracting its observed estimate b̂_s gives
//! exactly the estimate model s would get on (y − b̂_s·x_f)-based bootstrap data: the shift
//! moves only the focus coefficient (x_f is in the model) and leaves residuals, hence standard
//! errors, unchanged; and P_s·ŷ_U = b̂_s because ê_U is orthogonal to every model's columns.
//! See docs/methods.md for how this relates to the paper's row resampling.

use faer::Mat;
use rayon::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal};

use crate::api::{Covariance, FitOptions, ModelError, ModelFit, ModelSpec};
use crate::shared::SharedFactor;
use crate::student::two_sided_p;

use super::refit::{OutcomeRefit, Projected};
use super::weights::BootstrapWeights;
use super::InferenceError;

/// Draws per batch of refits: fixed, so the batches (and the numbers) do not depend on threads.
const DRAW_BATCH: usize = 50;

/// One model of the curve and the coefficient the curve tracks.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CurveModel {
    /// The model.
    pub spec: ModelSpec,
    /// Union column of the focus coefficient (must be one of `spec.columns`).
    pub focus: usize,
}

/// Settings of the joint test.
#[derive(Debug, Clone, PartialEq)]
pub struct JointOptions {
    /// Number of bootstrap draws (the paper's default is 500).
    pub draws: usize,
    /// Seed of the ChaCha20 weight streams.
    pub seed: u64,
    /// Two-sided level at which an estimate counts as significant.
    pub alpha: f64,
    /// Weight distribution.
    pub weights: BootstrapWeights,
    /// Draw one weight per cluster of this design clustering dimension (rows of one cluster
    /// move together) instead of one per row.
    pub cluster_dim: Option<usize>,
}

impl CurveModel {
    /// A curve model on `columns` and `outcome` whose tracked coefficient is `focus`.
    pub fn tracking(columns: Vec<usize>, outcome: usize, focus: usize) -> CurveModel {
        CurveModel {
            spec: ModelSpec {
                columns,
                outcome,
                tracked: vec![focus],
            },
            focus,
        }
    }
}

impl Default for JointOptions {
    fn default() -> Self {
        JointOptions {
            draws: 500,
            seed: 20_201_208,
            alpha: 0.05,
            weights: BootstrapWeights::Rademacher,
            cluster_dim: None,
        }
    }
}

/// The three curve-level statistics of one data set (observed or drawn).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurveStats {
    /// Median focus estimate over the models.
    pub median: f64,
    /// Share of models whose estimate is significant (two-sided p < alpha) with the dominant
    /// sign, the sign of this data set's own median.
    pub share_significant: f64,
    /// Stouffer's aggregate Σ z_s / √S of the models' signed z-values, z_s = sign(t_s) ·
    /// Φ⁻¹(1 − p_s/2) with p_s the Student-t two-sided p-value (classical errors).
    pub stouffer_z: f64,
}

/// Result of the joint test.
#[derive(Debug, Clone, PartialEq)]
pub struct JointTest {
    /// Bootstrap draws used.
    pub draws: usize,
    /// Models entering the statistics.
    pub models_used: usize,
    /// Indices (into the request) of models left out: not fitted, or their focus column was
    /// dropped as collinear.
    pub models_left_out: Vec<usize>,
    /// +1 or −1: the sign of the observed median (+1 when it is 0).
    pub dominant_sign: f64,
    /// Observed statistics.
    pub observed: CurveStats,
    /// (1 + #{draws with |median| ≥ observed |median|}) / (1 + draws).
    pub p_median: f64,
    /// As `p_median`, for the share of significant estimates in each data set's own dominant
    /// direction (draws with a share at least the observed one).
    pub p_share: f64,
    /// As `p_median`, for |Stouffer's aggregate z|.
    pub p_stouffer: f64,
    /// 2.5% quantile of each statistic over the null draws (Hyndman & Fan 1996, definition 7).
    pub null_low: CurveStats,
    /// 97.5% quantile of each statistic over the null draws: with `null_low`, the range a curve
    /// without any effect covers in 95% of draws.
    pub null_high: CurveStats,
}

/// Per-model statistics of one draw (or of the observed data).
#[derive(Clone, Copy)]
struct ModelStats {
    estimate: f64,
    p: f64,
    z: f64,
}

/// Runs the joint test on the curve `models` of one design. `factor` must come from
/// [`SharedFactor::new_for_refits`]; the t-statistics use classical standard errors (see
/// docs/methods.md: the bootstrap, not the formula, carries the dependence). Fits the models
/// once first; with the grid's fits at hand use [`joint_curve_test_from_fits`].
pub fn joint_curve_test(
    factor: &SharedFactor<'_>,
    models: &[CurveModel],
    fit_opts: &FitOptions,
    opts: &JointOptions,
) -> Result<JointTest, InferenceError> {
    let specs: Vec<ModelSpec> = models.iter().map(|m| m.spec.clone()).collect();
    let classical = FitOptions {
        covariances: vec![Covariance::Classical],
        ..fit_opts.clone()
    };
    joint_curve_test_from_fits(factor, models, &factor.fit_many(&specs, &classical), opts)
}

/// As [`joint_curve_test`], with the models' fits on `factor` given (one per model, e.g. the
/// grid's own results under any covariance choice): only their kept columns and refusals are
/// used.
pub fn joint_curve_test_from_fits(
    factor: &SharedFactor<'_>,
    models: &[CurveModel],
    fits: &[Result<ModelFit, ModelError>],
    opts: &JointOptions,
) -> Result<JointTest, InferenceError> {
    let design = factor.design();
    let (keys, key_count): (Vec<u32>, usize) = match opts.cluster_dim {
        None => ((0..design.x.nrows() as u32).collect(), design.x.nrows()),
        Some(d) => {
            let c = design.clusters.get(d).ok_or_else(|| {
                InferenceError::Invalid(format!("no clustering dimension {d} in the design"))
            })?;
            (c.codes.clone(), c.count)
        }
    };
    let part = CurvePart {
        factor,
        models,
        fits,
        keys: &keys,
        scales: &[],
    };
    joint_curve_test_across(std::slice::from_ref(&part), key_count, opts)
}

/// The models of one design that enter a curve spanning several designs.
#[derive(Debug, Clone, Copy)]
pub struct CurvePart<'p, 'f> {
    /// The design's factor, from [`SharedFactor::new_for_refits`].
    pub factor: &'p SharedFactor<'f>,
    /// The design's curve models.
    pub models: &'p [CurveModel],
    /// Their fits on `factor`, one per model.
    pub fits: &'p [Result<ModelFit, ModelError>],
    /// The weight key of each design row, below the `key_count` of the call: rows with the same
    /// key get the same multiplier in a draw, in every part. Data-file row numbers give
    /// independent rows that stay paired across samples; cluster labels numbered over the whole
    /// data file give clustered draws.
    pub keys: &'p [u32],
    /// Optional factor per model (same length as `models`, or empty for 1) that puts its focus
    /// coefficient on a common scale before the curve statistics are taken, e.g. 1/ȳ for a
    /// proportional effect of a level-outcome model; a negative factor flips the model's sign.
    pub scales: &'p [f64],
}

/// The joint test over a curve whose models live on several designs (e.g. one per sample):
/// each draw uses one weight vector over the keys, shared by all parts, and the curve
/// statistics of a draw pool every part's models. With one part whose keys are its row
/// numbers (or cluster codes) this is [`joint_curve_test_from_fits`]. `JointOptions::cluster_dim`
/// is not read here: the keys carry the clustering. `models_left_out` indexes the parts' models
/// laid end to end.
pub fn joint_curve_test_across(
    parts: &[CurvePart<'_, '_>],
    key_count: usize,
    opts: &JointOptions,
) -> Result<JointTest, InferenceError> {
    if opts.draws == 0 || !(opts.alpha > 0.0 && opts.alpha < 1.0) {
        return Err(InferenceError::Invalid(
            "the joint test needs at least one draw and a level alpha in (0, 1)".into(),
        ));
    }
    let prepared = parts
        .iter()
        .map(|p| PreparedPart::new(p, key_count))
        .collect::<Result<Vec<_>, _>>()?;
    let mut models_left_out = Vec::new();
    let mut offset = 0;
    for (part, prep) in parts.iter().zip(&prepared) {
        models_left_out.extend(
            (0..part.models.len())
                .filter(|i| !prep.used.contains(i))
                .map(|i| i + offset),
        );
        offset += part.models.len();
    }
    let used_count: usize = prepared.iter().map(|p| p.used.len()).sum();
    if used_count == 0 {
        return Err(InferenceError::Invalid(
            "no model of the curve could be fitted with its focus column".into(),
        ));
    }
    let normal = Normal::standard();
    let observed_models: Vec<ModelStats> = parts
        .iter()
        .zip(&prepared)
        .flat_map(|(part, p)| {
            p.used
                .iter()
                .zip(&p.observed)
                .map(|(&i, &s)| scaled(s, part.scale(i)))
        })
        .map(|s| with_z(s, &normal))
        .collect();
    let observed = summarise(&observed_models, opts.alpha);
    // Draws, in fixed batches; per batch and part each outcome is projected once for all its
    // models. One weight vector per draw serves every part.
    let batches: Vec<(usize, usize)> = (0..opts.draws)
        .step_by(DRAW_BATCH)
        .map(|s| (s, (s + DRAW_BATCH).min(opts.draws)))
        .collect();
    let draws: Vec<CurveStats> = batches
        .par_iter()
        .flat_map_iter(|&(start, end)| {
            let weights = draw_weights(key_count, opts, start, end);
            let mut per_draw: Vec<Vec<ModelStats>> = (start..end)
                .map(|_| Vec::with_capacity(used_count))
                .collect();
            for (part, prep) in parts.iter().zip(&prepared) {
                let proj: Vec<Projected> = bootstrap_outcomes(&prep.fitted, part.keys, &weights)
                    .iter()
                    .map(|y| prep.refit.project(y.as_ref()))
                    .collect();
                for (u, &i) in prep.used.iter().enumerate() {
                    let stats = model_stats(
                        &prep.refit,
                        &part.models[i],
                        i,
                        &proj[prep.outcome_of[i]],
                        prep.observed[u].estimate,
                    );
                    for (d, s) in stats.into_iter().enumerate() {
                        per_draw[d].push(with_z(scaled(s, part.scale(i)), &normal));
                    }
                }
            }
            per_draw
                .into_iter()
                .map(|draw| summarise(&draw, opts.alpha))
                .collect::<Vec<_>>()
                .into_iter()
        })
        .collect();
    let p_of = |extreme: &dyn Fn(&CurveStats) -> bool| {
        (1 + draws.iter().filter(|s| extreme(s)).count()) as f64 / (1 + draws.len()) as f64
    };
    Ok(JointTest {
        draws: draws.len(),
        models_used: used_count,
        models_left_out,
        dominant_sign: dominant(observed.median),
        observed,
        p_median: p_of(&|s| s.median.abs() >= observed.median.abs()),
        p_share: p_of(&|s| s.share_significant >= observed.share_significant),
        p_stouffer: p_of(&|s| s.stouffer_z.abs() >= observed.stouffer_z.abs()),
        null_low: null_quantile(&draws, 0.025),
        null_high: null_quantile(&draws, 0.975),
    })
}

impl CurvePart<'_, '_> {
    fn scale(&self, i: usize) -> f64 {
        self.scales.get(i).copied().unwrap_or(1.0)
    }
}

/// A model's statistics with its estimate on the common scale (the p-value is unchanged; the
/// sign kept in `z` follows the scaled estimate).
fn scaled(mut s: ModelStats, factor: f64) -> ModelStats {
    s.estimate *= factor;
    if factor < 0.0 {
        s.z = -s.z;
    }
    s
}

/// What one part needs for every draw: its refit, the models in use, the union fit of each
/// outcome, and the observed statistics.
struct PreparedPart<'p> {
    refit: OutcomeRefit<'p>,
    /// Indices into the part's models that enter the curve.
    used: Vec<usize>,
    /// Per model: position of its outcome among the outcomes in use.
    outcome_of: Vec<usize>,
    fitted: UnionFit,
    /// Observed statistics of the used models (z not yet applied), in `used` order.
    observed: Vec<ModelStats>,
}

impl<'p> PreparedPart<'p> {
    fn new(part: &CurvePart<'p, '_>, key_count: usize) -> Result<Self, InferenceError> {
        let design = part.factor.design();
        check_request(part.models, part.fits)?;
        if part.keys.len() != design.x.nrows() {
            return Err(InferenceError::Invalid(format!(
                "{} weight keys given for a design of {} rows",
                part.keys.len(),
                design.x.nrows()
            )));
        }
        if !part.scales.is_empty() && part.scales.len() != part.models.len() {
            return Err(InferenceError::Invalid(format!(
                "{} scale factors given for {} curve models",
                part.scales.len(),
                part.models.len()
            )));
        }
        if let Some(&k) = part.keys.iter().find(|&&k| k as usize >= key_count) {
            return Err(InferenceError::Invalid(format!(
                "weight key {k} is not below the key count {key_count}"
            )));
        }
        let refit = OutcomeRefit::from_fits(part.factor, part.fits)?;
        // A model enters when it was fitted and kept its focus column (an untracked focus can be
        // dropped as collinear without refusing the model).
        let used: Vec<usize> = (0..part.models.len())
            .filter(|&i| {
                refit
                    .kept(i)
                    .is_some_and(|k| k.contains(&part.models[i].focus))
            })
            .collect();
        // Outcomes in use, and per outcome its projection on the union span and residual.
        let mut outcomes: Vec<usize> = used.iter().map(|&i| part.models[i].spec.outcome).collect();
        outcomes.sort_unstable();
        outcomes.dedup();
        let n = design.x.nrows();
        let ys = Mat::from_fn(n, outcomes.len(), |i, j| design.y[(i, outcomes[j])]);
        let observed_proj: Vec<Projected> = (0..outcomes.len())
            .map(|o| refit.project(ys.subcols(o, 1)))
            .collect();
        let fitted = union_fit(&refit, ys.as_ref());
        let outcome_of: Vec<usize> = part
            .models
            .iter()
            .map(|m| {
                outcomes
                    .iter()
                    .position(|&o| o == m.spec.outcome)
                    .unwrap_or(0)
            })
            .collect();
        let observed = used
            .iter()
            .map(|&i| {
                model_stats(
                    &refit,
                    &part.models[i],
                    i,
                    &observed_proj[outcome_of[i]],
                    0.0,
                )[0]
            })
            .collect();
        Ok(PreparedPart {
            refit,
            used,
            outcome_of,
            fitted,
            observed,
        })
    }
}

/// Validates one part's request.
fn check_request(
    models: &[CurveModel],
    fits: &[Result<ModelFit, ModelError>],
) -> Result<(), InferenceError> {
    if fits.len() != models.len() {
        return Err(InferenceError::Invalid(format!(
            "{} fits given for {} curve models",
            fits.len(),
            models.len()
        )));
    }
    for (i, m) in models.iter().enumerate() {
        if !m.spec.columns.contains(&m.focus) {
            return Err(InferenceError::Invalid(format!(
                "curve model {i}: focus column {} is not among the model's columns",
                m.focus
            )));
        }
    }
    Ok(())
}

/// Per outcome: (fitted values on the union span, residuals).
struct UnionFit {
    fitted: Vec<Vec<f64>>,
    resid: Vec<Vec<f64>>,
}

fn union_fit(refit: &OutcomeRefit<'_>, ys: faer::MatRef<'_, f64>) -> UnionFit {
    let fitted_mat = refit.union_fitted(ys);
    let (mut fitted, mut resid) = (Vec::new(), Vec::new());
    for j in 0..ys.ncols() {
        let f: Vec<f64> = fitted_mat.col(j).iter().copied().collect();
        resid.push(ys.col(j).iter().zip(&f).map(|(y, f)| y - f).collect());
        fitted.push(f);
    }
    UnionFit { fitted, resid }
}

/// The multipliers of draws `start..end`, one vector over the keys per draw.
fn draw_weights(key_count: usize, opts: &JointOptions, start: usize, end: usize) -> Vec<Vec<f64>> {
    (start..end)
        .map(|d| {
            let mut v = vec![0.0; key_count];
            opts.weights.seeded(opts.seed, d as u64, &mut v);
            v
        })
        .collect()
}

/// y* = ŷ_U + ê_U∘v for each draw's weights `v` (row i takes `v[keys[i]]`), one
/// n × draws matrix per outcome.
fn bootstrap_outcomes(fit: &UnionFit, keys: &[u32], weights: &[Vec<f64>]) -> Vec<Mat<f64>> {
    let n = fit.fitted.first().map_or(0, Vec::len);
    fit.fitted
        .iter()
        .zip(&fit.resid)
        .map(|(f, e)| {
            Mat::from_fn(n, weights.len(), |i, d| {
                f[i] + e[i] * weights[d][keys[i] as usize]
            })
        })
        .collect()
}

/// Model i refitted on each projected outcome vector: focus estimate minus `null_shift`, and
/// its classical two-sided p-value (for the estimate minus the shift; the sign goes into `z`).
fn model_stats(
    refit: &OutcomeRefit<'_>,
    model: &CurveModel,
    i: usize,
    proj: &Projected,
    null_shift: f64,
) -> Vec<ModelStats> {
    let batch = refit
        .fit_projected(i, proj)
        .expect("only fitted models are used");
    let q = batch
        .kept
        .iter()
        .position(|&c| c == model.focus)
        .expect("only models that kept their focus are used");
    (0..batch.rss.len())
        .map(|d| {
            let estimate = batch.coef[(q, d)] - null_shift;
            let t = estimate / batch.classical_se(q, d);
            ModelStats {
                estimate,
                p: two_sided_p(t, batch.df_resid as f64),
                z: t.signum(),
            }
        })
        .collect()
}

/// Turns the sign kept in `z` into the signed z-value of the p-value.
fn with_z(mut s: ModelStats, normal: &Normal) -> ModelStats {
    // Φ⁻¹(p/2) is accurate for tiny p, where Φ⁻¹(1 − p/2) would round to infinity.
    let magnitude = -normal.inverse_cdf((s.p / 2.0).max(f64::MIN_POSITIVE));
    s.z *= magnitude;
    s
}

/// The curve statistics of one set of model results; the share counts significant estimates
/// with the sign of this set's own median (its dominant direction).
fn summarise(models: &[ModelStats], alpha: f64) -> CurveStats {
    let s = models.len() as f64;
    let median = median(models.iter().map(|m| m.estimate).collect());
    let sign = dominant(median);
    CurveStats {
        median,
        share_significant: models
            .iter()
            .filter(|m| m.p < alpha && m.estimate * sign > 0.0)
            .count() as f64
            / s,
        stouffer_z: models.iter().map(|m| m.z).sum::<f64>() / s.sqrt(),
    }
}

/// +1 or −1: the sign of a median (+1 for 0).
fn dominant(median: f64) -> f64 {
    if median < 0.0 {
        -1.0
    } else {
        1.0
    }
}

/// Quantile `q` of each statistic over the draws.
fn null_quantile(draws: &[CurveStats], q: f64) -> CurveStats {
    let of = |f: fn(&CurveStats) -> f64| quantile(draws.iter().map(f).collect(), q);
    CurveStats {
        median: of(|s| s.median),
        share_significant: of(|s| s.share_significant),
        stouffer_z: of(|s| s.stouffer_z),
    }
}

/// Quantile by linear interpolation between order statistics (Hyndman & Fan 1996,
/// definition 7, the report's convention).
fn quantile(mut v: Vec<f64>, q: f64) -> f64 {
    v.sort_by(f64::total_cmp);
    if v.is_empty() {
        return f64::NAN;
    }
    let h = (v.len() - 1) as f64 * q;
    let (lo, frac) = (h.floor() as usize, h - h.floor());
    let hi = (lo + 1).min(v.len() - 1);
    v[lo] + frac * (v[hi] - v[lo])
}

/// Median: the 50% quantile (mean of the two middle values for an even count).
fn median(v: Vec<f64>) -> f64 {
    quantile(v, 0.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantiles_follow_definition_7() {
        // numpy.quantile's default (linear) gives 1.75 and 3.25 for [1, 2, 3, 4] at 0.25 and
        // 0.75 (Hyndman & Fan 1996, definition 7; values by hand: h = 3q).
        assert_eq!(quantile(vec![4.0, 1.0, 3.0, 2.0], 0.25), 1.75);
        assert_eq!(quantile(vec![4.0, 1.0, 3.0, 2.0], 0.75), 3.25);
        assert_eq!(median(vec![5.0, 1.0, 3.0]), 3.0);
        assert_eq!(median(vec![1.0, 2.0, 4.0, 8.0]), 3.0);
        assert!(median(Vec::new()).is_nan());
    }
}
