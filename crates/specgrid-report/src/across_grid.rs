//! Inference across the grid, as the report shows it: the joint test over the whole curve,
//! coefficient-stability bounds and the decomposition of the focus movement. The binary
//! computes these (specgrid-ols `inference`); this module holds the results, one plain sentence
//! on what each means, its caution, and the renderers' sections.

use serde::{Deserialize, Serialize};

use crate::text::{count, html_escape, md_escape, num, pct};

/// Everything `[inference]` asked for, as computed.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct AcrossGrid {
    /// The joint test over the whole curve.
    pub joint_test: Option<JointTestResult>,
    /// Coefficient-stability bounds summarised over the grid.
    pub stability: Option<StabilityResult>,
    /// The decomposition of one long model's focus movement.
    pub decomposition: Option<DecompositionResult>,
}

/// The joint test (Simonsohn, Simmons & Nelson 2020).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct JointTestResult {
    /// Bootstrap draws.
    pub draws: usize,
    /// `rademacher` or `webb`.
    pub weights: String,
    /// Column whose levels share a multiplier; `None` = one per data row.
    pub cluster: Option<String>,
    /// Scale of the median (the report's effect scale).
    pub scale: String,
    /// Models in the test.
    pub models_used: usize,
    /// Models left out (failed, focus dropped, or a focus of several terms).
    pub models_left_out: usize,
    /// Observed median effect.
    pub median: f64,
    /// Observed share of models significant in the dominant direction.
    pub share_significant: f64,
    /// Observed aggregate z (Stouffer).
    pub aggregate_z: f64,
    /// p-value of the median.
    pub p_median: f64,
    /// p-value of the share.
    pub p_share: f64,
    /// p-value of the aggregate z.
    pub p_aggregate_z: f64,
    /// 2.5% and 97.5% quantiles of the median over the null draws.
    pub null_median: [f64; 2],
    /// 97.5% quantile of the share over the null draws.
    pub null_share_high: f64,
    /// 2.5% and 97.5% quantiles of the aggregate z over the null draws.
    pub null_aggregate_z: [f64; 2],
}

/// Oster's (2019) bounds summarised over the grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StabilityResult {
    /// R_max as a multiple of each long model's R².
    pub r_max_factor: f64,
    /// Control blocks kept in the short model (besides the focus, intercept, absorbed effects
    /// and weights).
    pub short_model: Vec<String>,
    /// Models with bounds.
    pub models: usize,
    /// Models without (failed, several focus terms, or no movement to extrapolate from).
    pub models_left_out: usize,
    /// Median δ for β = 0.
    pub median_delta: f64,
    /// Share of models with |δ| ≥ 1.
    pub share_delta_at_least_1: f64,
    /// Share of models whose bias-adjusted β* (δ = 1) has the sign of their estimate.
    pub share_beta_star_same_sign: f64,
    /// Median β* (coefficient scale).
    pub median_beta_star: f64,
}

/// Gelbach's (2016) decomposition for one long model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DecompositionResult {
    /// Id of the long model.
    pub long_model_id: String,
    /// Covariance choice of the standard errors.
    pub errors: String,
    /// Focus coefficient in the short model.
    pub short_estimate: f64,
    /// Focus coefficient in the long model.
    pub long_estimate: f64,
    /// short − long, the sum of the blocks' contributions.
    pub total_change: f64,
    /// Its standard error.
    pub total_std_error: f64,
    /// Per block, in study order.
    pub blocks: Vec<BlockPart>,
}

/// One block's part of the change.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BlockPart {
    /// Block name.
    pub name: String,
    /// Its contribution to short − long.
    pub contribution: f64,
    /// Standard error.
    pub std_error: f64,
}

const JOINT_MEANING: &str = "A small p-value says that a curve this far from zero would rarely arise if the focus had no effect in any of the specifications; it does not say which specification is right.";
const JOINT_CAUTION: &str = "The draws keep the regressors fixed and resample the residuals of the largest model of each sample with random signs; dependence the multipliers do not follow (e.g. within clusters when drawing per row) makes the p-values too small.";
const STABILITY_MEANING: &str = "δ says how strongly unobserved confounders would have to be related to the focus, relative to the controls in the model, to explain the whole estimate away; |δ| ≥ 1 is the paper's benchmark. β* is the estimate corrected for confounding as strong as the controls (δ = 1).";
const STABILITY_CAUTION: &str = "The bounds rest on the assumption that unobservables relate to the focus in proportion to the observables and on a judgement about R_max; the formulas were written from memory of the paper and checked against population moments (docs/methods.md).";
const DECOMPOSITION_MEANING: &str = "Each block's part is how much of the focus movement between the short and the long model its terms account for, given the other blocks; unlike adding blocks one at a time, the order does not matter.";
const DECOMPOSITION_CAUTION: &str = "The decomposition describes the sample: it does not make the long model's estimate causal, and its standard errors treat the auxiliary regressions of the controls on the short model as fixed.";

fn drawn_per(j: &JointTestResult) -> String {
    match &j.cluster {
        Some(c) => format!("one multiplier per level of `{c}`"),
        None => "one multiplier per data row".into(),
    }
}

fn joint_lines(j: &JointTestResult) -> Vec<String> {
    vec![
        format!(
            "Median effect ({} scale) {}: p = {}; without any effect, 95% of curves have their median in [{}, {}].",
            j.scale,
            num(Some(j.median), 4),
            num(Some(j.p_median), 3),
            num(Some(j.null_median[0]), 4),
            num(Some(j.null_median[1]), 4)
        ),
        format!(
            "Share significant in the dominant direction {}: p = {}; without any effect, 97.5% of curves stay at or below {}.",
            pct(Some(j.share_significant)),
            num(Some(j.p_share), 3),
            pct(Some(j.null_share_high))
        ),
        format!(
            "Aggregate z (Stouffer) {}: p = {}; without any effect, 95% of curves fall in [{}, {}].",
            num(Some(j.aggregate_z), 4),
            num(Some(j.p_aggregate_z), 3),
            num(Some(j.null_aggregate_z[0]), 3),
            num(Some(j.null_aggregate_z[1]), 3)
        ),
    ]
}

fn joint_heading(j: &JointTestResult) -> String {
    format!(
        "Joint test over the whole curve (Simonsohn, Simmons & Nelson 2020): {} models ({} left out), {} draws with the null of no effect imposed in every model, {} weights, {}.",
        count(j.models_used),
        count(j.models_left_out),
        count(j.draws),
        j.weights,
        drawn_per(j)
    )
}

fn stability_lines(s: &StabilityResult) -> (String, Vec<String>) {
    let short = if s.short_model.is_empty() {
        "the focus alone".to_string()
    } else {
        format!("the focus with {}", s.short_model.join(", "))
    };
    (
        format!(
            "Coefficient stability (Oster 2019): each model against its short model ({short}, with the same sample, absorbed effects and weights), R_max = {} × the model's R²; {} models ({} left out).",
            s.r_max_factor,
            count(s.models),
            count(s.models_left_out)
        ),
        vec![
            format!("Median δ for an effect of zero: {}.", num(Some(s.median_delta), 3)),
            format!("Models with |δ| ≥ 1: {}.", pct(Some(s.share_delta_at_least_1))),
            format!(
                "Models whose bias-adjusted β* keeps the sign of the estimate: {} (median β* {}, coefficient scale).",
                pct(Some(s.share_beta_star_same_sign)),
                num(Some(s.median_beta_star), 4)
            ),
        ],
    )
}

fn decomposition_lines(d: &DecompositionResult) -> (String, Vec<String>) {
    let heading = format!(
        "Where the movement comes from (Gelbach 2016), long model {}: the focus coefficient moves from {} in the short model to {}, a change of {} (SE {}, {} errors).",
        d.long_model_id,
        num(Some(d.short_estimate), 4),
        num(Some(d.long_estimate), 4),
        num(Some(d.total_change), 4),
        num(Some(d.total_std_error), 3),
        d.errors
    );
    let lines = d
        .blocks
        .iter()
        .map(|b| {
            let share = (d.total_change != 0.0).then(|| b.contribution / d.total_change);
            format!(
                "{}: {} (SE {}), {} of the change.",
                b.name,
                num(Some(b.contribution), 4),
                num(Some(b.std_error), 3),
                pct(share)
            )
        })
        .collect();
    (heading, lines)
}

/// Each result asked for as (heading, lines, meaning, caution), in report order.
fn parts(a: &AcrossGrid) -> Vec<(String, Vec<String>, &'static str, &'static str)> {
    let mut out = Vec::new();
    if let Some(j) = &a.joint_test {
        out.push((
            joint_heading(j),
            joint_lines(j),
            JOINT_MEANING,
            JOINT_CAUTION,
        ));
    }
    if let Some(s) = &a.stability {
        let (heading, lines) = stability_lines(s);
        out.push((heading, lines, STABILITY_MEANING, STABILITY_CAUTION));
    }
    if let Some(d) = &a.decomposition {
        let (heading, lines) = decomposition_lines(d);
        out.push((heading, lines, DECOMPOSITION_MEANING, DECOMPOSITION_CAUTION));
    }
    out
}

/// The HTML section (empty when nothing was asked for).
pub fn html_section(a: Option<&AcrossGrid>) -> String {
    let Some(a) = a else {
        return String::new();
    };
    let mut h = String::from("<h2>Inference across the grid</h2>\n");
    for (heading, lines, meaning, caution) in parts(a) {
        h.push_str(&format!("<p>{}</p>\n<ul>\n", html_escape(&heading)));
        for l in lines {
            h.push_str(&format!("<li>{}</li>\n", html_escape(&l)));
        }
        h.push_str(&format!(
            "</ul>\n<p>{}</p>\n<div class=\"cautions\"><p>{}</p></div>\n",
            html_escape(meaning),
            html_escape(caution)
        ));
    }
    h
}

/// The Markdown section (empty when nothing was asked for).
pub fn markdown_section(a: Option<&AcrossGrid>) -> String {
    let Some(a) = a else {
        return String::new();
    };
    let mut m = String::from("## Inference across the grid\n\n");
    for (heading, lines, meaning, caution) in parts(a) {
        m.push_str(&format!("{}\n\n", md_escape(&heading)));
        for l in lines {
            m.push_str(&format!("- {}\n", md_escape(&l)));
        }
        m.push_str(&format!(
            "\n{}\n\n> {}\n\n",
            md_escape(meaning),
            md_escape(caution)
        ));
    }
    m
}

/// The terminal lines (empty when nothing was asked for).
pub fn terminal_section(a: Option<&AcrossGrid>) -> String {
    let Some(a) = a else {
        return String::new();
    };
    let mut out = String::new();
    if let Some(j) = &a.joint_test {
        out.push_str(&format!(
            "Joint test over the curve ({} draws): p = {} (median), {} (share significant), {} (aggregate z).\n",
            count(j.draws),
            num(Some(j.p_median), 3),
            num(Some(j.p_share), 3),
            num(Some(j.p_aggregate_z), 3)
        ));
    }
    if let Some(s) = &a.stability {
        out.push_str(&format!(
            "Coefficient stability: median δ {}, |δ| ≥ 1 in {} of {} models.\n",
            num(Some(s.median_delta), 3),
            pct(Some(s.share_delta_at_least_1)),
            count(s.models)
        ));
    }
    if let Some(d) = &a.decomposition {
        out.push_str(&format!(
            "Decomposition of {}: change {} = {}.\n",
            d.long_model_id,
            num(Some(d.total_change), 4),
            d.blocks
                .iter()
                .map(|b| format!("{} {}", b.name, num(Some(b.contribution), 4)))
                .collect::<Vec<_>>()
                .join(" + ")
        ));
    }
    out
}
