//! The aggregate figures of the report, as written to `summary.json`. Field order here is the
//! key order of the JSON file.

use serde::Serialize;

/// Every aggregate of one report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// Format tag of this file.
    pub format: &'static str,
    /// Study title.
    pub title: String,
    /// Scale of every effect below.
    pub scale: &'static str,
    /// What the effect is of.
    pub effect_label: String,
    /// Significance level used for the shares.
    pub significance_level: f64,
    /// Confidence level of the bands.
    pub confidence_level: f64,
    /// Model counts.
    pub models: ModelCounts,
    /// The baseline model.
    pub baseline: Baseline,
    /// Aggregates per covariance choice, in study order.
    pub by_errors: Vec<ErrorSummary>,
    /// Influence of each decision, ranked by the share of variance of the estimates it explains.
    pub decisions: Vec<DecisionInfluence>,
    /// Diagnostics beside the estimates.
    pub diagnostics: Diagnostics,
    /// Cautions printed with every report.
    pub cautions: Vec<String>,
    /// Inference across the grid (`[inference]` in the study), absent when not asked for.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub across_grid: Option<crate::AcrossGrid>,
}

/// How many models the grid had and how many gave numbers.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModelCounts {
    /// Models planned.
    pub planned: usize,
    /// Models with an estimate.
    pub estimated: usize,
    /// Models that failed.
    pub failed: usize,
}

/// One (dimension, option) pair.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Choice {
    /// Dimension name.
    pub dimension: String,
    /// Option name.
    pub option: String,
}

/// The baseline model and how it was picked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Baseline {
    /// Its id; `None` when no model has an estimate.
    pub model_id: Option<String>,
    /// `named by the study`, `first option on every decision` or `first model`.
    pub chosen_as: &'static str,
    /// Its choices.
    pub choices: Vec<Choice>,
}

/// A value with the model it comes from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ValueAt {
    /// The value.
    pub value: f64,
    /// The model.
    pub model_id: String,
}

/// Aggregates over the models under one covariance choice.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ErrorSummary {
    /// Covariance choice label.
    pub errors: String,
    /// Models with an estimate.
    pub models: usize,
    /// Of those, models with a standard error (the rest count as not significant and are left
    /// out of the bounds).
    pub models_with_std_error: usize,
    /// Baseline effect.
    pub baseline_estimate: Option<f64>,
    /// Baseline standard error.
    pub baseline_std_error: Option<f64>,
    /// Rank of the baseline among the estimates, 1 = lowest.
    pub baseline_rank: Option<usize>,
    /// Share of estimates with the baseline's sign.
    pub share_baseline_sign: Option<f64>,
    /// Share significantly above zero at the significance level (two-sided test).
    pub share_significant_positive: Option<f64>,
    /// Share significantly below zero.
    pub share_significant_negative: Option<f64>,
    /// Median effect.
    pub median: Option<f64>,
    /// First quartile.
    pub quartile_1: Option<f64>,
    /// Third quartile.
    pub quartile_3: Option<f64>,
    /// Interquartile range.
    pub interquartile_range: Option<f64>,
    /// Smallest estimate.
    pub min: Option<ValueAt>,
    /// Largest estimate.
    pub max: Option<ValueAt>,
    /// Leamer's extreme bounds.
    pub extreme_bounds: Option<ExtremeBounds>,
    /// Sala-i-Martin's CDF(0).
    pub cdf_zero: Option<CdfZero>,
}

/// Leamer (1983) extreme bounds: lowest estimate − 2 SE and highest estimate + 2 SE.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExtremeBounds {
    /// Lower bound and its model.
    pub lower: ValueAt,
    /// Upper bound and its model.
    pub upper: ValueAt,
    /// Both bounds on the same side of zero ("robust" in Leamer's sense).
    pub same_sign: bool,
}

/// Sala-i-Martin (1997) CDF(0): weighted mean over models of Φ(−b/se), the normal mass below 0.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CdfZero {
    /// Weighted mass below zero.
    pub below_zero: f64,
    /// The larger of the masses below and above zero (Sala-i-Martin's reported figure).
    pub larger_side: f64,
    /// `likelihood` or `equal` (with the reason).
    pub weights: String,
}

/// Influence of one decision.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DecisionInfluence {
    /// Dimension name.
    pub dimension: String,
    /// Share of the variance of the estimates explained by this decision alone
    /// (between-option sum of squares over total sum of squares).
    pub variance_share: f64,
    /// Rank by `variance_share`, 1 = most influential.
    pub rank: usize,
    /// True for a pick block: `options` then lists its candidate terms, not its sets (written
    /// only when true).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub per_candidate: bool,
    /// Per option, in study order (the first is the reference); for a pick block, per
    /// candidate term in study order.
    pub options: Vec<OptionInfluence>,
}

/// Figures for one option of a decision. For a pick block's candidate term, the models are
/// those whose set contains the term, `shift_vs_reference` is their mean effect minus the mean
/// of the models whose set does not, and `shift_pairs` counts the latter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OptionInfluence {
    /// Option name.
    pub option: String,
    /// Models with an estimate taking this option.
    pub models: usize,
    /// Mean effect.
    pub mean: Option<f64>,
    /// Median effect.
    pub median: Option<f64>,
    /// Share significant (either direction), per covariance choice in study order.
    pub share_significant: Vec<Option<f64>>,
    /// Mean of (effect − effect of the twin model taking the reference option, all else equal).
    pub shift_vs_reference: Option<f64>,
    /// Number of twin pairs behind the shift.
    pub shift_pairs: usize,
}

/// Diagnostics beside the estimates.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostics {
    /// Models with a Breusch–Pagan p-value.
    pub het_tested_models: usize,
    /// Share of those where the test rejects at the significance level.
    pub het_share_rejecting: Option<f64>,
    /// Robust (or clustered) SE over classical SE, per non-classical covariance choice; empty
    /// when the study has no `classical` choice.
    pub se_ratios: Vec<SeRatio>,
}

/// Distribution over models of one covariance choice's SE divided by the classical SE.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SeRatio {
    /// Covariance choice.
    pub errors: String,
    /// Models with both SEs.
    pub models: usize,
    /// Median ratio.
    pub median: Option<f64>,
    /// Smallest ratio.
    pub min: Option<f64>,
    /// Largest ratio.
    pub max: Option<f64>,
}
