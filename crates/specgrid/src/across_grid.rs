//! `[inference]`: the joint test over the whole curve, coefficient-stability bounds per model
//! and the decomposition of one long model's focus movement, computed after the grid on the
//! same designs (docs/methods.md, "Inference across the grid: how a run uses it").
//!
//! Every method works on the design the engine fitted (demeaned and weighted when the models
//! absorb effects or take weights): by the Frisch–Waugh–Lovell theorem the focus coefficient
//! and its residuals are those of the model with the effects as columns, so absorbed effects
//! and weights count as part of every short model.

use std::collections::HashMap;

use specgrid_data::{LoadedData, SampleDesign};
use specgrid_ols::inference::{
    gelbach, joint_curve_test_across, oster, BootstrapWeights, ControlBlock, CurveModel, CurvePart,
    JointOptions, OsterInputs,
};
use specgrid_ols::{Covariance, FitOptions, ModelError, ModelFit, ModelSpec, SharedFactor};
use specgrid_report::{
    AcrossGrid, BlockPart, DecompositionResult, JointTestResult, StabilityResult, StoredEffects,
};
use specgrid_study::{BlockResolver, BootstrapDraws, Plan, Study};

use crate::exit::Failure;

/// One model's stability bounds (a row of `stability.csv`).
#[derive(Debug, Clone)]
pub struct StabilityRow {
    /// Model id.
    pub model_id: String,
    /// Focus coefficient in the short model.
    pub short_estimate: f64,
    /// Focus coefficient in the model.
    pub long_estimate: f64,
    /// R² of the short model, net of the short model's controls (see docs/methods.md).
    pub short_r2: f64,
    /// R² of the model on the same footing.
    pub long_r2: f64,
    /// R_max used.
    pub r_max: f64,
    /// δ for β = 0.
    pub delta_for_zero: f64,
    /// β* for δ = 1.
    pub beta_star: f64,
}

/// What the phase produces: the report's section and the per-model rows.
pub struct AcrossGridOutput {
    /// For summary.json and the report.
    pub summary: AcrossGrid,
    /// Per-model stability rows, when asked for.
    pub stability_rows: Vec<StabilityRow>,
}

/// One design prepared for refits: its factor and each model's spec and classical fit.
struct Prepared<'a> {
    design: &'a SampleDesign,
    factor: SharedFactor<'a>,
    /// Plan indices of the models, parallel to `specs` and `fits`.
    members: Vec<usize>,
    specs: Vec<ModelSpec>,
    /// Classical fits, parallel to `specs`; empty when only the decomposition was asked for.
    fits: Vec<Result<ModelFit, ModelError>>,
    /// The focus column of each model, when its focus form is one column.
    focus: Vec<Option<usize>>,
}

fn classical(fit_options: &FitOptions) -> FitOptions {
    FitOptions {
        covariances: vec![Covariance::Classical],
        ..fit_options.clone()
    }
}

/// Runs what `[inference]` asks for; `None` when it asks for nothing.
pub fn run(
    study: &Study,
    plan: &Plan,
    data: &LoadedData,
    designs: &[SampleDesign],
    fit_options: &FitOptions,
    effects: Option<&StoredEffects>,
    first_error_label: &str,
) -> Result<Option<AcrossGridOutput>, Failure> {
    let asked = &plan.inference;
    if asked.joint_test.is_none() && asked.stability.is_none() && asked.decomposition.is_none() {
        return Ok(None);
    }
    let resolver = BlockResolver::new(study, plan);
    // The joint test and the stability bounds need every model's classical fit; the
    // decomposition follows one model and fits what it needs itself.
    let curve_wide = asked.joint_test.is_some() || asked.stability.is_some();
    let prepared = designs
        .iter()
        .map(|d| prepare(plan, &resolver, d, fit_options, curve_wide))
        .collect::<Result<Vec<_>, Failure>>()?;
    let mut summary = AcrossGrid::default();
    let mut stability_rows = Vec::new();
    if let Some(settings) = &asked.joint_test {
        summary.joint_test = Some(joint(
            plan,
            data,
            &prepared,
            settings,
            effects,
            first_error_label,
        )?);
    }
    if let Some(settings) = &asked.stability {
        let (result, rows) = stability(
            plan,
            &resolver,
            &prepared,
            settings.r_max_factor,
            fit_options,
        );
        summary.stability = Some(result);
        stability_rows = rows;
    }
    if let Some(settings) = &asked.decomposition {
        summary.decomposition = Some(decomposition(
            plan,
            &resolver,
            &prepared,
            &settings.long_model,
            fit_options,
        )?);
    }
    Ok(Some(AcrossGridOutput {
        summary,
        stability_rows,
    }))
}

fn prepare<'a>(
    plan: &Plan,
    resolver: &BlockResolver,
    design: &'a SampleDesign,
    fit_options: &FitOptions,
    fit_all: bool,
) -> Result<Prepared<'a>, Failure> {
    let factor = SharedFactor::new_for_refits(design.fitted_design())
        .map_err(|e| Failure::Estimation(format!("sample `{}`: {e}", design.sample_name)))?;
    let mut specs = Vec::new();
    let mut focus = Vec::new();
    for &m in &design.models {
        let model = &plan.models[m];
        let mut spec = design
            .model_spec(model)
            .map_err(|e| Failure::Data(e.to_string()))?;
        let cols: Vec<usize> = resolver
            .focus_terms(model)
            .iter()
            .filter_map(|&t| design.term_columns.get(t).cloned().flatten())
            .flatten()
            .collect();
        let single = (cols.len() == 1).then(|| cols[0]);
        spec.tracked = single.into_iter().collect();
        if spec.tracked.is_empty() {
            spec.tracked = spec.columns.first().copied().into_iter().collect();
        }
        focus.push(single);
        specs.push(spec);
    }
    let fits = if fit_all {
        factor.fit_many(&specs, &classical(fit_options))
    } else {
        Vec::new()
    };
    Ok(Prepared {
        design,
        factor,
        members: design.models.clone(),
        specs,
        fits,
        focus,
    })
}

fn joint(
    plan: &Plan,
    data: &LoadedData,
    prepared: &[Prepared<'_>],
    settings: &specgrid_study::JointTestSettings,
    effects: Option<&StoredEffects>,
    first_error_label: &str,
) -> Result<JointTestResult, Failure> {
    // Keys over the whole data file, so that the draws pair rows (or clusters) across samples.
    let (keys_of_row, key_count): (Box<dyn Fn(usize) -> u32>, usize) = match &settings.cluster {
        None => (Box::new(|r| r as u32), data.n_rows),
        Some(column) => {
            let levels = data
                .column(column)
                .map_err(|e| Failure::Data(e.to_string()))?
                .levels();
            let count = levels.labels.len();
            // Rows missing the cluster column get their own key past the labels' range.
            let codes = levels.codes;
            (
                Box::new(move |r| codes[r].unwrap_or(count as u32)),
                count + 1,
            )
        }
    };
    let mut curve: Vec<Vec<CurveModel>> = Vec::new();
    let mut fits: Vec<Vec<Result<ModelFit, ModelError>>> = Vec::new();
    let mut scales: Vec<Vec<f64>> = Vec::new();
    let mut keys: Vec<Vec<u32>> = Vec::new();
    let mut left_out = 0;
    for p in prepared {
        let (mut c, mut f, mut s) = (Vec::new(), Vec::new(), Vec::new());
        for (i, &m) in p.members.iter().enumerate() {
            let (Some(focus), Ok(fit)) = (p.focus[i], &p.fits[i]) else {
                left_out += 1;
                continue;
            };
            // The report's scale: effect / coefficient of this model (1 on the coefficient
            // scale); a model whose effect could not be converted is left out.
            let scale = match effects {
                None => 1.0,
                Some(stored) => {
                    let effect = stored
                        .get(&plan.models[m].id)
                        .and_then(|e| e.get(first_error_label))
                        .map(|e| e.estimate);
                    let coef = fit.coefficients.first().map(|c| c.estimate);
                    match (effect, coef) {
                        (Some(e), Some(b)) if b != 0.0 && (e / b).is_finite() => e / b,
                        _ => {
                            left_out += 1;
                            continue;
                        }
                    }
                }
            };
            c.push(CurveModel {
                spec: p.specs[i].clone(),
                focus,
            });
            f.push(p.fits[i].clone());
            s.push(scale);
        }
        keys.push(p.design.rows.iter().map(|&r| keys_of_row(r)).collect());
        curve.push(c);
        fits.push(f);
        scales.push(s);
    }
    let parts: Vec<CurvePart<'_, '_>> = prepared
        .iter()
        .enumerate()
        .filter(|(d, _)| !curve[*d].is_empty())
        .map(|(d, p)| CurvePart {
            factor: &p.factor,
            models: &curve[d],
            fits: &fits[d],
            keys: &keys[d],
            scales: &scales[d],
        })
        .collect();
    let opts = JointOptions {
        draws: settings.draws,
        seed: plan.seed,
        alpha: plan.significance_level,
        weights: bootstrap_weights(settings.weights),
        cluster_dim: None,
    };
    let test = joint_curve_test_across(&parts, key_count, &opts)
        .map_err(|e| Failure::Estimation(format!("the joint test over the curve: {e}")))?;
    Ok(JointTestResult {
        draws: test.draws,
        weights: word(settings.weights).into(),
        cluster: settings.cluster.clone(),
        scale: plan.report.scale.word().into(),
        models_used: test.models_used,
        models_left_out: left_out + test.models_left_out.len(),
        median: test.observed.median,
        share_significant: test.observed.share_significant,
        aggregate_z: test.observed.stouffer_z,
        p_median: test.p_median,
        p_share: test.p_share,
        p_aggregate_z: test.p_stouffer,
        null_median: [test.null_low.median, test.null_high.median],
        null_share_high: test.null_high.share_significant,
        null_aggregate_z: [test.null_low.stouffer_z, test.null_high.stouffer_z],
    })
}

fn bootstrap_weights(d: BootstrapDraws) -> BootstrapWeights {
    match d {
        BootstrapDraws::Rademacher => BootstrapWeights::Rademacher,
        BootstrapDraws::Webb => BootstrapWeights::Webb,
    }
}

fn word(d: BootstrapDraws) -> &'static str {
    BootstrapDraws::WORDS
        .iter()
        .find(|(_, x)| *x == d)
        .map_or("rademacher", |(w, _)| w)
}

/// The short model of plan model `m` on its design: intercept (if any), focus columns and the
/// columns of the blocks `[inference] short_model` keeps; the control columns it leaves out are
/// grouped by block (for the decomposition).
fn short_model(
    plan: &Plan,
    resolver: &BlockResolver,
    design: &SampleDesign,
    m: usize,
    spec: &ModelSpec,
) -> (ModelSpec, Vec<ControlBlock>) {
    let model = &plan.models[m];
    let columns_of = |terms: &[usize]| -> Vec<usize> {
        terms
            .iter()
            .filter_map(|&t| design.term_columns.get(t).cloned().flatten())
            .flatten()
            .collect()
    };
    let mut columns: Vec<usize> = Vec::new();
    if model.intercept && design.intercept {
        columns.push(0);
    }
    columns.extend(columns_of(&resolver.focus_terms(model)));
    let mut left_out = Vec::new();
    for block in resolver.blocks(model) {
        let cols = columns_of(&block.terms);
        if plan.inference.short_model.contains(&block.name) {
            columns.extend(cols);
        } else if !cols.is_empty() {
            left_out.push(ControlBlock {
                name: block.name,
                columns: cols,
            });
        }
    }
    (
        ModelSpec {
            columns,
            outcome: spec.outcome,
            tracked: spec.tracked.clone(),
        },
        left_out,
    )
}

/// Residual sum of squares of a fit: resid_sd² × df_resid.
fn rss(fit: &ModelFit) -> f64 {
    fit.resid_sd.powi(2) * fit.df_resid as f64
}

/// Σ x̃² of the focus net of the model's other columns, from the classical SE: σ̂²/SE².
fn focus_net_ss(fit: &ModelFit) -> Option<f64> {
    let se = fit.coefficients.first()?.inference.first()?.std_error;
    (se > 0.0).then(|| fit.resid_sd.powi(2) / se.powi(2))
}

fn stability(
    plan: &Plan,
    resolver: &BlockResolver,
    prepared: &[Prepared<'_>],
    r_max_factor: f64,
    fit_options: &FitOptions,
) -> (StabilityResult, Vec<StabilityRow>) {
    let opts = classical(fit_options);
    let mut rows = Vec::new();
    let mut left_out = 0;
    for p in prepared {
        // Short models and the models of the short model's controls alone, fitted once each.
        let mut short_fits: HashMap<(Vec<usize>, usize), Result<ModelFit, ModelError>> =
            HashMap::new();
        let mut base_rss: HashMap<(Vec<usize>, usize), Option<f64>> = HashMap::new();
        for (i, &m) in p.members.iter().enumerate() {
            let (Some(focus), Ok(long)) = (p.focus[i], &p.fits[i]) else {
                left_out += 1;
                continue;
            };
            let (short, _) = short_model(plan, resolver, p.design, m, &p.specs[i]);
            let key = (short.columns.clone(), short.outcome);
            let short_fit = short_fits
                .entry(key.clone())
                .or_insert_with(|| p.factor.fit(&short, &opts));
            // RSS of the outcome on the short model's controls alone (y net of them).
            let controls: Vec<usize> = short
                .columns
                .iter()
                .copied()
                .filter(|&c| c != focus)
                .collect();
            let base = *base_rss.entry(key).or_insert_with(|| {
                if controls.is_empty() {
                    let y = p.design.fitted_design().y.col(short.outcome);
                    Some(y.iter().map(|v| v * v).sum())
                } else {
                    let spec = ModelSpec {
                        tracked: vec![controls[0]],
                        columns: controls.clone(),
                        outcome: short.outcome,
                    };
                    p.factor.fit(&spec, &opts).ok().map(|f| rss(&f))
                }
            });
            let (Ok(short_fit), Some(base)) = (short_fit.as_ref(), base) else {
                left_out += 1;
                continue;
            };
            let (Some(tau_short), Some(tau_long)) = (focus_net_ss(short_fit), focus_net_ss(long))
            else {
                left_out += 1;
                continue;
            };
            let n = long.n_obs as f64;
            let long_r2 = 1.0 - rss(long) / base;
            let inputs = OsterInputs {
                short_estimate: short_fit.coefficients[0].estimate,
                short_r2: 1.0 - rss(short_fit) / base,
                long_estimate: long.coefficients[0].estimate,
                long_r2,
                var_y: base / n,
                var_x: tau_short / n,
                var_x_resid: tau_long / n,
                r_max: Some((r_max_factor * long_r2).min(1.0)),
            };
            match oster(&inputs) {
                Ok(o) => rows.push(StabilityRow {
                    model_id: plan.models[m].id.clone(),
                    short_estimate: inputs.short_estimate,
                    long_estimate: inputs.long_estimate,
                    short_r2: inputs.short_r2,
                    long_r2,
                    r_max: o.r_max,
                    delta_for_zero: o.delta_for_zero,
                    beta_star: o.beta_star,
                }),
                Err(_) => left_out += 1,
            }
        }
    }
    let deltas: Vec<f64> = rows.iter().map(|r| r.delta_for_zero).collect();
    let stars: Vec<f64> = rows
        .iter()
        .map(|r| r.beta_star)
        .filter(|b| b.is_finite())
        .collect();
    let share = |hit: &dyn Fn(&StabilityRow) -> bool| {
        rows.iter().filter(|r| hit(r)).count() as f64 / rows.len().max(1) as f64
    };
    (
        StabilityResult {
            r_max_factor,
            short_model: plan.inference.short_model.clone(),
            models: rows.len(),
            models_left_out: left_out,
            median_delta: median(deltas),
            share_delta_at_least_1: share(&|r| r.delta_for_zero.abs() >= 1.0),
            share_beta_star_same_sign: share(&|r| {
                r.beta_star.is_finite() && r.beta_star * r.long_estimate > 0.0
            }),
            median_beta_star: median(stars),
        },
        rows,
    )
}

/// Median by the report's convention (mean of the two middle values); NaN when empty.
fn median(mut v: Vec<f64>) -> f64 {
    v.retain(|x| !x.is_nan());
    v.sort_by(f64::total_cmp);
    match v.len() {
        0 => f64::NAN,
        n if n % 2 == 1 => v[n / 2],
        n => 0.5 * (v[n / 2 - 1] + v[n / 2]),
    }
}

fn decomposition(
    plan: &Plan,
    resolver: &BlockResolver,
    prepared: &[Prepared<'_>],
    long_model: &[usize],
    fit_options: &FitOptions,
) -> Result<DecompositionResult, Failure> {
    let not_planned = || {
        Failure::Study(format!(
            "the long model of `decomposition` in [inference] ({}) is not among the planned models: a skip rule or [grid] sample leaves it out; name another one with `long_model`",
            plan.dimensions
                .iter()
                .zip(long_model)
                .map(|(d, &o)| format!("{} = {}", d.name, d.options[o]))
                .collect::<Vec<_>>()
                .join(", ")
        ))
    };
    let m = plan
        .models
        .iter()
        .position(|pm| pm.choices == long_model)
        .ok_or_else(not_planned)?;
    let (p, i) = prepared
        .iter()
        .find_map(|p| p.members.iter().position(|&x| x == m).map(|i| (p, i)))
        .ok_or_else(not_planned)?;
    let id = &plan.models[m].id;
    let focus = p.focus[i].ok_or_else(|| {
        Failure::Study(format!(
            "the long model {id} of `decomposition` has a focus of several terms; the decomposition follows one coefficient, so name a long model with a one-term focus form"
        ))
    })?;
    let (short, blocks) = short_model(plan, resolver, p.design, m, &p.specs[i]);
    let covariance = fit_options.covariances[0];
    let d = gelbach(&p.factor, &short, focus, &blocks, covariance, fit_options)
        .map_err(|e| Failure::Estimation(format!("the decomposition of model {id}: {e}")))?;
    Ok(DecompositionResult {
        long_model_id: id.clone(),
        errors: plan.errors[0].label(),
        short_estimate: d.base_estimate,
        long_estimate: d.full_estimate,
        total_change: d.total_change,
        total_std_error: d.total_std_error,
        blocks: d
            .blocks
            .into_iter()
            .map(|b| BlockPart {
                name: b.name,
                contribution: b.contribution,
                std_error: b.std_error,
            })
            .collect(),
    })
}
