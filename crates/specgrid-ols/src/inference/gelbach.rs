//! Where the movement comes from: Gelbach's (2016, Journal of Labor Economics 34:509) exact
//! decomposition of the change in the focus coefficient between a base model (focus and base
//! controls, X₁) and the full model (X₁ plus every control block X₂ = [X₂₁ … X₂_B]).
//!
//! With Γ = (X₁'X₁)⁻¹X₁'X₂ (each added column regressed on the base columns) and β̂₂ the full
//! model's coefficients on X₂: b_base − b_full = Γ_f·β̂₂ exactly (the omitted-variable formula;
//! X₁'ê = 0 because X₁ is in the full model), and block g contributes δ_g = Γ_{f,g}·β̂₂g.
//! Standard errors treat Γ as fixed (conditional on the regressors, as in Gelbach's
//! derivation): Var(δ_g) = Γ_{f,g}·V̂(β̂₂g)·Γ_{f,g}' with V̂ the full model's covariance under the
//! chosen covariance choice.

use faer::Mat;

use crate::api::{Covariance, FitOptions, ModelSpec};
use crate::shared::SharedFactor;

use super::refit::OutcomeRefit;
use super::InferenceError;

/// One named block of control columns added between the base and the full model.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ControlBlock {
    /// Name shown in reports.
    pub name: String,
    /// Union columns of the block.
    pub columns: Vec<usize>,
}

/// The part of the total change attributed to one block.
#[derive(Debug, Clone, PartialEq)]
pub struct BlockContribution {
    /// Block name.
    pub name: String,
    /// δ_g: how much of b_base − b_full this block accounts for.
    pub contribution: f64,
    /// Its standard error (Γ fixed, full-model covariance).
    pub std_error: f64,
}

/// Gelbach's decomposition for one base/full pair.
#[derive(Debug, Clone, PartialEq)]
pub struct GelbachDecomposition {
    /// Focus estimate in the base model.
    pub base_estimate: f64,
    /// Focus estimate in the full model.
    pub full_estimate: f64,
    /// Σ_g δ_g, which equals `base_estimate − full_estimate` up to rounding.
    pub total_change: f64,
    /// Standard error of the total change (same convention as the blocks).
    pub total_std_error: f64,
    /// One entry per block, in request order.
    pub blocks: Vec<BlockContribution>,
    /// Covariance choice of the standard errors.
    pub covariance: Covariance,
}

/// Decomposes the movement of `focus` between `base` and the full model (`base` plus every
/// block, same outcome). `factor` must come from [`SharedFactor::new_for_refits`].
pub fn gelbach(
    factor: &SharedFactor<'_>,
    base: &ModelSpec,
    focus: usize,
    blocks: &[ControlBlock],
    covariance: Covariance,
    opts: &FitOptions,
) -> Result<GelbachDecomposition, InferenceError> {
    let added: Vec<usize> = blocks.iter().flat_map(|b| b.columns.clone()).collect();
    check_request(base, focus, blocks, &added)?;
    let fit_opts = FitOptions {
        covariances: vec![covariance],
        ..opts.clone()
    };
    let full = ModelSpec {
        columns: base.columns.iter().chain(&added).copied().collect(),
        outcome: base.outcome,
        tracked: std::iter::once(focus)
            .chain(added.iter().copied())
            .collect(),
    };
    let model_err = |label: &str| {
        let label = label.to_string();
        move |source| InferenceError::Model { label, source }
    };
    let full_fit = factor.fit(&full, &fit_opts).map_err(model_err("full"))?;
    let base_spec = ModelSpec {
        tracked: vec![focus],
        ..base.clone()
    };
    let base_fit = factor
        .fit(&base_spec, &fit_opts)
        .map_err(model_err("base"))?;
    // Γ_f: the focus coefficient of each added column regressed on the base columns.
    let refit = OutcomeRefit::new(factor, std::slice::from_ref(&base_spec), opts)?;
    let x = &factor.design().x;
    let targets = Mat::from_fn(x.nrows(), added.len(), |i, j| x[(i, added[j])]);
    let batch = refit
        .fit_outcomes(targets.as_ref())
        .pop()
        .expect("one model")
        .map_err(model_err("base"))?;
    let qf = batch
        .kept
        .iter()
        .position(|&c| c == focus)
        .expect("focus kept in the base model");
    let gamma: Vec<f64> = (0..added.len()).map(|j| batch.coef[(qf, j)]).collect();
    // Full-model coefficients and covariance over [focus, added…] (tracked order).
    let t = full_fit.coefficients.len();
    let beta2: Vec<f64> = full_fit.coefficients[1..]
        .iter()
        .map(|c| c.estimate)
        .collect();
    let cov = &full_fit.tracked_covariance[0];
    let v = |a: usize, b: usize| cov[(a + 1) * t + (b + 1)];
    let quad = |idx: &[usize]| -> f64 {
        idx.iter()
            .map(|&a| {
                idx.iter()
                    .map(|&b| gamma[a] * v(a, b) * gamma[b])
                    .sum::<f64>()
            })
            .sum()
    };
    let mut start = 0;
    let mut out = Vec::with_capacity(blocks.len());
    for block in blocks {
        let idx: Vec<usize> = (start..start + block.columns.len()).collect();
        start += block.columns.len();
        out.push(BlockContribution {
            name: block.name.clone(),
            contribution: idx.iter().map(|&j| gamma[j] * beta2[j]).sum(),
            std_error: quad(&idx).max(0.0).sqrt(),
        });
    }
    let all: Vec<usize> = (0..added.len()).collect();
    Ok(GelbachDecomposition {
        base_estimate: base_fit.coefficients[0].estimate,
        full_estimate: full_fit.coefficients[0].estimate,
        total_change: out.iter().map(|b| b.contribution).sum(),
        total_std_error: quad(&all).max(0.0).sqrt(),
        blocks: out,
        covariance,
    })
}

fn check_request(
    base: &ModelSpec,
    focus: usize,
    blocks: &[ControlBlock],
    added: &[usize],
) -> Result<(), InferenceError> {
    if !base.columns.contains(&focus) {
        return Err(InferenceError::Invalid(format!(
            "the focus column {focus} is not in the base model"
        )));
    }
    if blocks.is_empty() || blocks.iter().any(|b| b.columns.is_empty()) {
        return Err(InferenceError::Invalid(
            "the decomposition needs at least one control block, each with at least one column"
                .into(),
        ));
    }
    let mut seen = base.columns.clone();
    for &c in added {
        if seen.contains(&c) {
            return Err(InferenceError::Invalid(format!(
                "column {c} appears twice among the base model and the control blocks; each column belongs to one place"
            )));
        }
        seen.push(c);
    }
    Ok(())
}
