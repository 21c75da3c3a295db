//! Aggregation over the grid: shares, quantiles, bounds, baseline rank, decision influence and
//! diagnostics. Formulas and sources: docs/methods.md (part 2).

use std::collections::HashMap;

use rayon::prelude::*;

use crate::effect::{Effect, Scale};
use crate::input::ReportInput;
use crate::models::ModelRef;
use crate::stats::{
    mean, median, median_in_place, quantile_sorted, standard_normal_cdf, two_sided_p,
};
use crate::summary::*;
use crate::ReportError;

/// Tag written as `format` in summary.json.
pub const SUMMARY_FORMAT: &str = "specgrid-summary-v1";

/// The cautions every report carries.
pub const CAUTIONS: [&str; 3] = [
    "A coefficient that survives many specifications is still not a causal effect.",
    "The curve is for transparency, not for picking the most favourable model.",
    "Follow the study's pre-registration and the norms of its field.",
];

/// Checks the input's shape, naming the first inconsistency.
pub fn validate(input: &ReportInput) -> Result<(), ReportError> {
    if input.error_labels.is_empty() {
        return Err(ReportError::Input(
            "no covariance choices: pass at least one error label".into(),
        ));
    }
    if !(input.significance_level > 0.0 && input.significance_level < 1.0) {
        return Err(ReportError::Input(format!(
            "significance level {} is outside (0, 1)",
            input.significance_level
        )));
    }
    let models = &input.models;
    if models.is_empty() {
        return Ok(());
    }
    if models.dims() != input.dimensions.len() {
        return Err(ReportError::Input(format!(
            "the models have {} choices each for {} decisions",
            models.dims(),
            input.dimensions.len()
        )));
    }
    if models.errors() != input.error_labels.len() {
        return Err(ReportError::Input(format!(
            "the models have effects for {} covariance choices each, the report has {}",
            models.errors(),
            input.error_labels.len()
        )));
    }
    for m in models.iter() {
        for (&c, d) in m.choices().iter().zip(&input.dimensions) {
            if c as usize >= d.options.len() {
                return Err(ReportError::Input(format!(
                    "model {} takes option {} on `{}`, which has {} options",
                    m.id(),
                    c,
                    d.name,
                    d.options.len()
                )));
            }
        }
    }
    Ok(())
}

/// Computes every aggregate of the report.
pub fn summarize(input: &ReportInput) -> Result<Summary, ReportError> {
    summarize_with_order(input).map(|(summary, _)| summary)
}

/// [`summarize`], and the models of the first covariance choice sorted by estimate (ties by
/// id) as (estimate, model index): the order the specification curve draws them in, sorted
/// here anyway for the summary.
pub(crate) fn summarize_with_order(
    input: &ReportInput,
) -> Result<(Summary, Vec<(f64, usize)>), ReportError> {
    validate(input)?;
    let baseline_index = baseline_index(input);
    let estimated = input.models.iter().filter(|m| m.has_any_effect()).count();
    // The aggregates read the same models independently; at millions of models each is a few
    // seconds, so they run side by side on the rayon threads (the result does not depend on it).
    let (with_orders, (decisions, diagnostics)) = rayon::join(
        || {
            (0..input.error_labels.len())
                .into_par_iter()
                .map(|e| error_summary(input, e, baseline_index.map(|(i, _)| i)))
                .collect::<Vec<_>>()
        },
        || rayon::join(|| decision_influence(input), || diagnostics(input)),
    );
    let mut first_order = Vec::new();
    let mut by_errors = Vec::with_capacity(with_orders.len());
    for (e, (summary, order)) in with_orders.into_iter().enumerate() {
        if e == 0 {
            first_order = order;
        }
        by_errors.push(summary);
    }
    let summary = Summary {
        format: SUMMARY_FORMAT,
        title: input.title.clone(),
        scale: input.scale.label(),
        effect_label: input.effect_label.clone(),
        significance_level: input.significance_level,
        confidence_level: input.confidence_level,
        models: ModelCounts {
            planned: input.models.len(),
            estimated,
            failed: input.models.failed(),
        },
        baseline: baseline_info(input, baseline_index),
        by_errors,
        decisions,
        diagnostics,
        cautions: cautions(input),
        across_grid: input.across_grid.clone(),
    };
    Ok((summary, first_order))
}

/// Index of the baseline model and how it was chosen: the study's named model if it has an
/// estimate, else the model taking the first option everywhere, else the first estimated model.
pub fn baseline_index(input: &ReportInput) -> Option<(usize, &'static str)> {
    // The models' own shape, not the labels': this is public and may see unvalidated input.
    if input.models.errors() == 0 {
        return None;
    }
    let has = |m: &ModelRef<'_>| input.models.estimate(m.index(), 0).is_some();
    if let Some(id) = &input.baseline_model_id {
        if let Some(i) = input
            .models
            .iter()
            .position(|m| m.id() == id.as_str() && has(&m))
        {
            return Some((i, "named by the study"));
        }
    }
    if let Some(i) = input
        .models
        .iter()
        .position(|m| has(&m) && m.choices().iter().all(|&c| c == 0))
    {
        return Some((i, "first option on every decision"));
    }
    input
        .models
        .iter()
        .position(|m| has(&m))
        .map(|i| (i, "first model"))
}

fn baseline_info(input: &ReportInput, index: Option<(usize, &'static str)>) -> Baseline {
    match index {
        Some((i, how)) => {
            let m = input.models.get(i);
            Baseline {
                model_id: Some(m.id().to_string()),
                chosen_as: how,
                choices: choices_of(input, &m),
            }
        }
        None => Baseline {
            model_id: None,
            chosen_as: "no model has an estimate",
            choices: vec![],
        },
    }
}

/// The (dimension, option) names of a model's choices.
pub fn choices_of(input: &ReportInput, m: &ModelRef<'_>) -> Vec<Choice> {
    input
        .dimensions
        .iter()
        .zip(m.choices())
        .map(|(d, &c)| Choice {
            dimension: d.name.clone(),
            option: d.options[c as usize].clone(),
        })
        .collect()
}

/// Whether an effect is significant at `alpha` (two-sided t test of zero); `None` without SE.
pub fn significance(effect: &Effect, alpha: f64) -> Option<bool> {
    if let Some(p) = effect.p_value.filter(|p| p.is_finite()) {
        return Some(p < alpha);
    }
    let se = effect.std_error?;
    if se > 0.0 && se.is_finite() {
        Some(two_sided_p(effect.estimate / se, effect.df) < alpha)
    } else {
        None
    }
}

fn error_summary(
    input: &ReportInput,
    e: usize,
    baseline: Option<usize>,
) -> (ErrorSummary, Vec<(f64, usize)>) {
    let alpha = input.significance_level;
    // (estimate, model index), sorted by estimate then id for deterministic ties.
    let models = &input.models;
    let mut sorted: Vec<(f64, usize)> = (0..models.len())
        .filter_map(|i| models.estimate(i, e).map(|v| (v, i)))
        .filter(|(v, _)| v.is_finite())
        .collect();
    sorted.sort_by(|a, b| {
        a.0.total_cmp(&b.0)
            .then_with(|| models.id(a.1).cmp(models.id(b.1)))
    });
    let n = sorted.len();
    let values: Vec<f64> = sorted.iter().map(|p| p.0).collect();
    let share = |k: usize| (n > 0).then(|| k as f64 / n as f64);
    let at = |p: &(f64, usize)| ValueAt {
        value: p.0,
        model_id: models.id(p.1).to_string(),
    };

    let base = baseline.and_then(|b| models.effect(b, e).map(|f| (b, f)));
    let baseline_rank = base.and_then(|(b, _)| sorted.iter().position(|p| p.1 == b).map(|r| r + 1));
    let base_sign = base.map(|(_, f)| sign(f.estimate));
    let same_sign = base_sign.map(|s| values.iter().filter(|v| sign(**v) == s).count());

    // One pass over the models in sorted order gathers everything the shares, the extreme
    // bounds and the CDF at zero need (copying the effects out first was hundreds of megabytes
    // of fresh memory at millions of models; reading them once per statistic, three times the
    // cache misses).
    let mut sig_pos = 0;
    let mut sig_neg = 0;
    let mut with_se = 0;
    let mut lower: Option<(f64, usize)> = None;
    let mut upper: Option<(f64, usize)> = None;
    // (P(N(0,1) < −b/se), model index) of the models with a usable standard error.
    let mut usable: Vec<(f64, usize)> = Vec::new();
    for &(_, i) in &sorted {
        let f = models.effect(i, e).unwrap_or_else(unreachable_effect);
        match significance(&f, alpha) {
            Some(true) if f.estimate > 0.0 => sig_pos += 1,
            Some(true) => sig_neg += 1,
            _ => {}
        }
        if f.std_error.is_some_and(|s| s.is_finite() && s > 0.0) {
            with_se += 1;
        }
        let Some(se) = usable_se(&f) else { continue };
        let (lo, hi) = (f.estimate - 2.0 * se, f.estimate + 2.0 * se);
        if lower.is_none_or(|(v, _)| lo < v) {
            lower = Some((lo, i));
        }
        if upper.is_none_or(|(v, _)| hi > v) {
            upper = Some((hi, i));
        }
        usable.push((standard_normal_cdf(-f.estimate / se), i));
    }
    let q1 = quantile_sorted(&values, 0.25);
    let q3 = quantile_sorted(&values, 0.75);
    let summary = ErrorSummary {
        errors: input.error_labels[e].clone(),
        models: n,
        models_with_std_error: with_se,
        baseline_estimate: base.map(|(_, f)| f.estimate),
        baseline_std_error: base.and_then(|(_, f)| f.std_error),
        baseline_rank,
        share_baseline_sign: same_sign.and_then(share),
        share_significant_positive: share(sig_pos),
        share_significant_negative: share(sig_neg),
        median: quantile_sorted(&values, 0.5),
        quartile_1: q1,
        quartile_3: q3,
        interquartile_range: q1.zip(q3).map(|(a, b)| b - a),
        min: sorted.first().map(at),
        max: sorted.last().map(at),
        extreme_bounds: extreme_bounds(input, lower, upper),
        cdf_zero: cdf_zero(input, usable),
    };
    (summary, sorted)
}

fn unreachable_effect() -> Effect {
    // Only indices with an effect are sorted above; this keeps the code panic-free anyway.
    Effect::coefficient(f64::NAN, None, f64::NAN)
}

fn sign(v: f64) -> i8 {
    if v > 0.0 {
        1
    } else if v < 0.0 {
        -1
    } else {
        0
    }
}

fn usable_se(f: &Effect) -> Option<f64> {
    f.std_error.filter(|s| s.is_finite() && *s > 0.0)
}

/// The lowest b − 2·se and highest b + 2·se over the models, as [`error_summary`] found them.
fn extreme_bounds(
    input: &ReportInput,
    lower: Option<(f64, usize)>,
    upper: Option<(f64, usize)>,
) -> Option<ExtremeBounds> {
    let (lo, hi) = (lower?, upper?);
    Some(ExtremeBounds {
        lower: ValueAt {
            value: lo.0,
            model_id: input.models.id(lo.1).to_string(),
        },
        upper: ValueAt {
            value: hi.0,
            model_id: input.models.id(hi.1).to_string(),
        },
        same_sign: (lo.0 > 0.0 && hi.0 > 0.0) || (lo.0 < 0.0 && hi.0 < 0.0),
    })
}

/// Gaussian log-likelihood at the OLS fit: −n/2 · (ln(2π·RSS/n) + 1), with RSS = s²·(n − k).
fn log_likelihood(m: &ModelRef<'_>) -> Option<f64> {
    let n = m.n_obs()? as f64;
    let k = m.n_params()? as f64;
    let s = m.resid_sd()?;
    let rss = s * s * (n - k);
    (rss > 0.0 && n > 0.0).then(|| -0.5 * n * ((2.0 * std::f64::consts::PI * rss / n).ln() + 1.0))
}

/// The (likelihood-)weighted share of the models' normal CDFs below zero, from `usable`:
/// (P(N(0,1) < −b/se), model index) in sorted order.
fn cdf_zero(input: &ReportInput, usable: Vec<(f64, usize)>) -> Option<CdfZero> {
    if usable.is_empty() {
        return None;
    }
    let models: Vec<ModelRef<'_>> = usable.iter().map(|(_, i)| input.models.get(*i)).collect();
    let logl: Option<Vec<f64>> = models.iter().map(log_likelihood).collect();
    let comparable = models
        .windows(2)
        .all(|w| w[0].outcome_index() == w[1].outcome_index() && w[0].n_obs() == w[1].n_obs());
    let (weights, how) = match (logl, comparable) {
        (Some(l), true) => {
            // Normalise in logs so huge likelihoods do not overflow.
            let top = l.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            let w: Vec<f64> = l.iter().map(|v| (v - top).exp()).collect();
            (w, "likelihood".to_string())
        }
        (None, _) => (
            vec![1.0; usable.len()],
            "equal (fit statistics missing for some models)".to_string(),
        ),
        (Some(_), false) => (
            vec![1.0; usable.len()],
            "equal (models differ in outcome form or rows, so their likelihoods are not comparable)"
                .to_string(),
        ),
    };
    let total: f64 = weights.iter().sum();
    let below = usable
        .iter()
        .zip(&weights)
        .map(|((c, _), w)| c * w)
        .sum::<f64>()
        / total;
    Some(CdfZero {
        below_zero: below,
        larger_side: below.max(1.0 - below),
        weights: how,
    })
}

fn decision_influence(input: &ReportInput) -> Vec<DecisionInfluence> {
    // Estimates do not depend on the covariance choice; take them from the first.
    let models = &input.models;
    let est: Vec<Option<f64>> = (0..models.len())
        .map(|i| models.estimate(i, 0).filter(|v| v.is_finite()))
        .collect();
    let all: Vec<f64> = est.iter().flatten().copied().collect();
    let grand = mean(&all).unwrap_or(0.0);
    let total_ss: f64 = all.iter().map(|v| (v - grand).powi(2)).sum();
    let twins = Twins::new(input, &est);

    // Decisions, and the options within one, are independent: at millions of models the twin
    // look-ups take seconds, so both run on the rayon threads (order is kept by `collect`).
    let mut out: Vec<DecisionInfluence> = input
        .dimensions
        .par_iter()
        .enumerate()
        .map(|(d, dim)| {
            // Members of every option in one pass over the models.
            let mut by_option: Vec<Vec<usize>> = vec![Vec::new(); dim.options.len()];
            for (i, e) in est.iter().enumerate() {
                if e.is_some() {
                    by_option[models.choices(i)[d] as usize].push(i);
                }
            }
            // Between-option sum of squares; for a pick block it still compares the sets,
            // while the rows are per candidate.
            let between: f64 = by_option
                .iter()
                .map(|members| {
                    let vals: Vec<f64> = members.iter().filter_map(|&i| est[i]).collect();
                    mean(&vals).map_or(0.0, |mu| vals.len() as f64 * (mu - grand).powi(2))
                })
                .fold(0.0, |sum, part| sum + part);
            let panel = dim.panel();
            if panel.per_candidate {
                return DecisionInfluence {
                    dimension: dim.name.clone(),
                    variance_share: share_of(between, total_ss),
                    rank: 0,
                    per_candidate: true,
                    options: candidate_influence(input, d, &panel, &est),
                };
            }
            let options = dim
                .options
                .par_iter()
                .zip(by_option)
                .enumerate()
                .map(|(o, (name, members))| {
                    let vals: Vec<f64> = members.iter().filter_map(|&i| est[i]).collect();
                    let mut shifts = Vec::new();
                    if o > 0 {
                        for &i in &members {
                            if let (Some(v), Some(t)) =
                                (est[i], twins.reference(models.choices(i), d))
                            {
                                shifts.push(v - t);
                            }
                        }
                    }
                    OptionInfluence {
                        option: name.clone(),
                        models: vals.len(),
                        mean: mean(&vals),
                        median: median(&vals),
                        share_significant: (0..input.error_labels.len())
                            .map(|e| {
                                let n = members.len();
                                let k = members
                                    .iter()
                                    .filter(|&&i| {
                                        models.effect(i, e).is_some_and(|f| {
                                            significance(&f, input.significance_level) == Some(true)
                                        })
                                    })
                                    .count();
                                (n > 0).then(|| k as f64 / n as f64)
                            })
                            .collect(),
                        shift_vs_reference: mean(&shifts),
                        shift_pairs: shifts.len(),
                    }
                })
                .collect();
            DecisionInfluence {
                dimension: dim.name.clone(),
                variance_share: share_of(between, total_ss),
                rank: 0,
                per_candidate: false,
                options,
            }
        })
        .collect();
    let mut order: Vec<usize> = (0..out.len()).collect();
    order.sort_by(|&a, &b| {
        out[b]
            .variance_share
            .total_cmp(&out[a].variance_share)
            .then(a.cmp(&b))
    });
    let mut ranked = Vec::with_capacity(out.len());
    for (r, &i) in order.iter().enumerate() {
        out[i].rank = r + 1;
    }
    for i in order {
        ranked.push(out[i].clone());
    }
    ranked
}

/// Every estimated model's estimate by its options, to find a model's twin: the model with the
/// same options except the reference (first) option on one decision. Where two models take
/// the same options the later one is kept.
enum Twins<'a> {
    /// By the options' mixed-radix code in a dense table (NaN where no model has those
    /// options; estimates here are finite), when the space of option combinations is at most a
    /// few times the number of models, as in a full grid. At two million models the look-ups
    /// by hash of the options were most of the decision influence (docs/performance.md).
    Dense { strides: Vec<u64>, values: Vec<f64> },
    /// By the same code through a hash table, when the space is larger (exclusions, sampling).
    Coded {
        strides: Vec<u64>,
        values: HashMap<u64, f64, rustc_hash::FxBuildHasher>,
    },
    /// By the options themselves, when their codes would not fit in 64 bits.
    Options(HashMap<&'a [u32], f64, rustc_hash::FxBuildHasher>),
}

/// Option combinations per model up to which [`Twins::Dense`] is used.
const DENSE_TWINS_PER_MODEL: u64 = 4;

impl<'a> Twins<'a> {
    fn new(input: &'a ReportInput, est: &[Option<f64>]) -> Twins<'a> {
        let models = &input.models;
        let estimated = || {
            est.iter()
                .enumerate()
                .filter_map(|(i, e)| e.map(|v| (models.choices(i), v)))
        };
        // Last decision varies fastest; None when the product overflows.
        let mut strides = vec![0u64; input.dimensions.len()];
        let mut space = Some(1u64);
        for (stride, dim) in strides.iter_mut().zip(&input.dimensions).rev() {
            if let Some(s) = space {
                *stride = s;
                space = s.checked_mul(dim.options.len().max(1) as u64);
            }
        }
        let Some(space) = space else {
            let mut values =
                HashMap::with_capacity_and_hasher(models.len(), rustc_hash::FxBuildHasher);
            values.extend(estimated());
            return Twins::Options(values);
        };
        let code = |choices: &[u32]| -> u64 {
            choices
                .iter()
                .zip(&strides)
                .map(|(&c, &s)| c as u64 * s)
                .sum()
        };
        if space
            <= DENSE_TWINS_PER_MODEL
                .saturating_mul(models.len() as u64)
                .max(1024)
        {
            let mut values = vec![f64::NAN; space as usize];
            for (choices, v) in estimated() {
                values[code(choices) as usize] = v;
            }
            return Twins::Dense { strides, values };
        }
        let mut values = HashMap::with_capacity_and_hasher(models.len(), rustc_hash::FxBuildHasher);
        values.extend(estimated().map(|(choices, v)| (code(choices), v)));
        Twins::Coded { strides, values }
    }

    /// The estimate of the model taking `choices` except option 0 on decision `d`.
    fn reference(&self, choices: &[u32], d: usize) -> Option<f64> {
        let twin_code = |strides: &[u64]| -> u64 {
            choices
                .iter()
                .zip(strides)
                .enumerate()
                .map(|(j, (&c, &s))| if j == d { 0 } else { c as u64 * s })
                .sum()
        };
        match self {
            Twins::Dense { strides, values } => {
                let v = values[twin_code(strides) as usize];
                (!v.is_nan()).then_some(v)
            }
            Twins::Coded { strides, values } => values.get(&twin_code(strides)).copied(),
            Twins::Options(values) => {
                let mut twin = choices.to_vec();
                twin[d] = 0;
                values.get(twin.as_slice()).copied()
            }
        }
    }
}

/// Between-option over total sum of squares; 0 when the estimates do not vary.
fn share_of(between: f64, total_ss: f64) -> f64 {
    if total_ss > 0.0 {
        between / total_ss
    } else {
        0.0
    }
}

/// Per candidate term of a pick block: the models whose set contains it against those whose
/// set does not (a difference in means; with every set in the grid each candidate is in the
/// same share of sets, so the comparison is balanced over the other decisions).
fn candidate_influence(
    input: &ReportInput,
    d: usize,
    panel: &crate::input::Panel<'_>,
    est: &[Option<f64>],
) -> Vec<OptionInfluence> {
    let rows = panel.labels.len();
    let mut with: Vec<Vec<f64>> = vec![Vec::new(); rows];
    let mut significant = vec![vec![0usize; input.error_labels.len()]; rows];
    let mut members = vec![0usize; rows];
    let (mut total_sum, mut total_n) = (0.0, 0usize);
    let mut model_significant = vec![false; input.error_labels.len()];
    for (i, m) in input.models.iter().enumerate() {
        let Some(v) = est[i] else { continue };
        total_sum += v;
        total_n += 1;
        // Judged once per model, then counted for each candidate in its set.
        for (flag, f) in model_significant.iter_mut().zip(m.effects()) {
            *flag = f.is_some_and(|f| significance(&f, input.significance_level) == Some(true));
        }
        for row in panel.row_indices(m.choice(d)) {
            with[row].push(v);
            members[row] += 1;
            for (count, &flag) in significant[row].iter_mut().zip(&model_significant) {
                *count += usize::from(flag);
            }
        }
    }
    with.into_iter()
        .enumerate()
        .map(|(row, mut vals)| {
            let n = vals.len();
            let sum: f64 = vals.iter().sum();
            let without = total_n - n;
            let shift =
                (n > 0 && without > 0).then(|| sum / n as f64 - (total_sum - sum) / without as f64);
            let mean_with = (n > 0).then(|| sum / n as f64);
            OptionInfluence {
                option: panel.labels[row].clone(),
                models: n,
                mean: mean_with,
                median: median_in_place(&mut vals),
                share_significant: significant[row]
                    .iter()
                    .map(|&k| (members[row] > 0).then(|| k as f64 / members[row] as f64))
                    .collect(),
                shift_vs_reference: shift,
                shift_pairs: without,
            }
        })
        .collect()
}

fn diagnostics(input: &ReportInput) -> Diagnostics {
    let tested: Vec<f64> = input
        .models
        .iter()
        .filter(|m| m.has_any_effect())
        .filter_map(|m| m.het_p_value())
        .collect();
    let rejecting = tested
        .iter()
        .filter(|p| **p < input.significance_level)
        .count();
    let classical = input.error_labels.iter().position(|l| l == "classical");
    let se_ratios = match classical {
        None => vec![],
        Some(c) => (0..input.error_labels.len())
            .filter(|&e| e != c)
            .map(|e| {
                let models = &input.models;
                let mut ratios: Vec<f64> = (0..models.len())
                    .filter_map(|i| {
                        let robust = usable_se(&models.effect(i, e)?)?;
                        let plain = usable_se(&models.effect(i, c)?)?;
                        Some(robust / plain)
                    })
                    .collect();
                ratios.sort_by(f64::total_cmp);
                SeRatio {
                    errors: input.error_labels[e].clone(),
                    models: ratios.len(),
                    median: quantile_sorted(&ratios, 0.5),
                    min: ratios.first().copied(),
                    max: ratios.last().copied(),
                }
            })
            .collect(),
    };
    Diagnostics {
        het_tested_models: tested.len(),
        het_share_rejecting: (!tested.is_empty()).then(|| rejecting as f64 / tested.len() as f64),
        se_ratios,
    }
}

fn cautions(input: &ReportInput) -> Vec<String> {
    let mut out: Vec<String> = CAUTIONS.iter().map(|s| s.to_string()).collect();
    if input.scale == Scale::Coefficient {
        let mixed = ["outcome", "focus"].iter().any(|name| {
            input
                .dimensions
                .iter()
                .find(|d| d.name == *name)
                .is_some_and(|d| d.options.len() > 1)
        });
        if mixed {
            out.push("These are raw coefficients of models with different outcome or focus forms; they are not on one scale. Choose a common scale (elasticity, semi-elasticity or marginal effect) before comparing them.".into());
        }
    }
    let failed = input.models.failed();
    if failed > 0 {
        out.push(format!(
            "{failed} model(s) failed and are left out of every figure; see `status` and `message` in models.csv."
        ));
    }
    let no_se = input
        .models
        .iter()
        .any(|m| m.effects().flatten().any(|f| f.std_error.is_none()));
    if no_se {
        out.push("Some effects have no delta-method standard error (the covariance between their coefficients is unavailable); they count as not significant and are left out of the bounds.".into());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::input::{DimensionInfo, ModelEntry, ModelStatus};
    use crate::models::Models;

    /// An input whose decisions have `options` options each and whose models take the given
    /// option numbers, model i's estimate being i (the last of two equal models kept).
    fn input(options: &[usize], models: &[Vec<usize>]) -> ReportInput {
        let entries = models
            .iter()
            .enumerate()
            .map(|(i, choices)| ModelEntry {
                model_id: format!("{i:04}"),
                choices: choices.clone(),
                status: ModelStatus::Ok,
                effects: vec![Some(Effect::coefficient(i as f64, Some(1.0), 10.0))],
                n_obs: Some(20),
                n_params: Some(3),
                r_squared: Some(0.5),
                resid_sd: Some(1.0),
                het_p_value: None,
                outcome_label: "y".into(),
            })
            .collect();
        ReportInput {
            title: String::new(),
            scale: Scale::Coefficient,
            effect_label: "x".into(),
            dimensions: options
                .iter()
                .enumerate()
                .map(|(d, &n)| {
                    DimensionInfo::new(format!("d{d}"), (0..n).map(|o| o.to_string()).collect())
                })
                .collect(),
            error_labels: vec!["classical".into()],
            significance_level: 0.05,
            confidence_level: 0.95,
            baseline_model_id: None,
            models: Models::from_entries(entries).unwrap(),
            study_text: String::new(),
            data_fingerprint: String::new(),
            baseline_residuals: None,
            across_grid: None,
        }
    }

    /// Every look-up against a search over all models (the last match kept, as in the table).
    fn check_against_search(input: &ReportInput) -> &'static str {
        let models = &input.models;
        let est: Vec<Option<f64>> = (0..models.len()).map(|i| models.estimate(i, 0)).collect();
        let twins = Twins::new(input, &est);
        for i in 0..models.len() {
            for d in 0..input.dimensions.len() {
                let mut want = models.choices(i).to_vec();
                want[d] = 0;
                let expected = (0..models.len())
                    .rev()
                    .find(|&j| models.choices(j) == want.as_slice())
                    .map(|j| j as f64);
                assert_eq!(
                    twins.reference(models.choices(i), d),
                    expected,
                    "model {i}, d {d}"
                );
            }
        }
        match twins {
            Twins::Dense { .. } => "dense",
            Twins::Coded { .. } => "coded",
            Twins::Options(_) => "options",
        }
    }

    #[test]
    fn twins_are_found_whichever_table_holds_them() {
        // A full 3 × 2 × 4 grid with one duplicate: the dense table.
        let mut full: Vec<Vec<usize>> = (0..24).map(|k| vec![k / 8, (k / 4) % 2, k % 4]).collect();
        full.push(vec![0, 1, 0]);
        assert_eq!(check_against_search(&input(&[3, 2, 4], &full)), "dense");
        // A few models in a space of 10⁹ combinations: the coded hash table.
        let sparse = vec![
            vec![0, 0, 0],
            vec![7, 0, 0],
            vec![7, 999, 0],
            vec![0, 999, 5],
            vec![7, 999, 5],
        ];
        assert_eq!(
            check_against_search(&input(&[1000, 1000, 1000], &sparse)),
            "coded"
        );
        // A space beyond 64 bits (five decisions of 10⁴ options): the options themselves.
        let wide = vec![
            vec![0; 5],
            vec![3, 0, 0, 0, 9_999],
            vec![3, 0, 0, 0, 0],
            vec![0, 0, 0, 0, 9_999],
        ];
        assert_eq!(check_against_search(&input(&[10_000; 5], &wide)), "options");
    }
}
