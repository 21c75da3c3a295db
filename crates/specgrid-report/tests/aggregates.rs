//! Aggregates on a small grid against values worked out by hand (the arithmetic is in the
//! comments). Quantiles follow Hyndman & Fan (1996) definition 7, numpy's default.

mod common;

use approx::assert_relative_eq;
use specgrid_report::{summarize, Report, ReportError};

#[test]
fn counts_baseline_and_rank() {
    let s = summarize(&common::small_grid()).unwrap();
    assert_eq!(
        (s.models.planned, s.models.estimated, s.models.failed),
        (5, 4, 1)
    );
    // m1 takes the first option on both decisions.
    assert_eq!(s.baseline.model_id.as_deref(), Some("m1"));
    assert_eq!(s.baseline.chosen_as, "first option on every decision");
    // Sorted estimates −1 (m3), 1 (m1), 2 (m2), 3 (m4): the baseline is 2nd lowest.
    assert_eq!(s.by_errors[0].baseline_rank, Some(2));
    assert_eq!(s.by_errors[0].baseline_estimate, Some(1.0));
    assert_eq!(s.by_errors[1].baseline_std_error, Some(0.8));
}

#[test]
fn named_baseline_wins() {
    let mut input = common::small_grid();
    input.baseline_model_id = Some("m4".into());
    let s = summarize(&input).unwrap();
    assert_eq!(s.baseline.model_id.as_deref(), Some("m4"));
    assert_eq!(s.baseline.chosen_as, "named by the study");
    assert_eq!(s.by_errors[0].baseline_rank, Some(4));
    // A named model that failed falls back to the all-first-options model.
    input.baseline_model_id = Some("m5".into());
    assert_eq!(
        summarize(&input).unwrap().baseline.model_id.as_deref(),
        Some("m1")
    );
}

#[test]
fn shares_quantiles_and_extremes() {
    let s = summarize(&common::small_grid()).unwrap();
    let c = &s.by_errors[0];
    assert_eq!(c.models, 4);
    // Three of four estimates are positive like the baseline.
    assert_eq!(c.share_baseline_sign, Some(0.75));
    // Classical t = 4, 4, −4, 3 with 100 df: all significant at 5%.
    assert_eq!(c.share_significant_positive, Some(0.75));
    assert_eq!(c.share_significant_negative, Some(0.25));
    // Definition 7: median h = 1.5 → 1 + 0.5·(2 − 1) = 1.5; Q1 h = 0.75 → −1 + 0.75·2 = 0.5;
    // Q3 h = 2.25 → 2 + 0.25·1 = 2.25; numpy.percentile([-1, 1, 2, 3], [25, 50, 75]) gives
    // [0.5, 1.5, 2.25] (run with numpy from the reference venv).
    assert_relative_eq!(c.median.unwrap(), 1.5);
    assert_relative_eq!(c.quartile_1.unwrap(), 0.5);
    assert_relative_eq!(c.quartile_3.unwrap(), 2.25);
    assert_relative_eq!(c.interquartile_range.unwrap(), 1.75);
    assert_eq!(c.min.as_ref().unwrap().model_id, "m3");
    assert_eq!(c.max.as_ref().unwrap().value, 3.0);
    // hc1 t = 1.25, 4, −1, 1.5: only m2 is significant.
    let h = &s.by_errors[1];
    assert_eq!(h.share_significant_positive, Some(0.25));
    assert_eq!(h.share_significant_negative, Some(0.0));
}

#[test]
fn leamer_extreme_bounds() {
    // Leamer (1983, AER 73:31): lowest b − 2·se and highest b + 2·se over the models.
    let s = summarize(&common::small_grid()).unwrap();
    // classical: b − 2se = 0.5, 1, −1.5, 1 → −1.5 (m3); b + 2se = 1.5, 3, −0.5, 5 → 5 (m4).
    let b = s.by_errors[0].extreme_bounds.as_ref().unwrap();
    assert_eq!((b.lower.value, b.lower.model_id.as_str()), (-1.5, "m3"));
    assert_eq!((b.upper.value, b.upper.model_id.as_str()), (5.0, "m4"));
    assert!(!b.same_sign);
    // hc1: −0.6, 1, −3, −1 → −3 (m3); 2.6, 3, 1, 7 → 7 (m4).
    let b = s.by_errors[1].extreme_bounds.as_ref().unwrap();
    assert_relative_eq!(b.lower.value, -3.0);
    assert_relative_eq!(b.upper.value, 7.0);
}

#[test]
fn sala_i_martin_cdf_zero() {
    // Sala-i-Martin (1997, AER 87:178): Σ wⱼ Φ(−bⱼ/seⱼ) / Σ wⱼ with likelihood weights; here
    // w = (1, 0.5, 1, 1). Classical: (Φ(−4) + 0.5Φ(−4) + Φ(4) + Φ(−3)) / 3.5, evaluated by hand
    // with Python's math.erfc (Φ(x) = erfc(−x/√2)/2).
    let s = summarize(&common::small_grid()).unwrap();
    let c = s.by_errors[0].cdf_zero.as_ref().unwrap();
    assert_eq!(c.weights, "likelihood");
    assert_relative_eq!(c.below_zero, 0.286104495329299, max_relative = 1e-9);
    assert_relative_eq!(c.larger_side, 1.0 - 0.286104495329299, max_relative = 1e-9);
    // hc1: (Φ(−1.25) + 0.5Φ(−4) + Φ(1) + Φ(−1.5)) / 3.5.
    let h = s.by_errors[1].cdf_zero.as_ref().unwrap();
    assert_relative_eq!(h.below_zero, 0.28966215903576364, max_relative = 1e-9);
}

#[test]
fn cdf_zero_falls_back_to_equal_weights_across_outcome_forms() {
    let mut input = common::small_grid();
    common::edit_models(&mut input, |m| m[1].outcome_label = "log(y)".into());
    let s = summarize(&input).unwrap();
    let c = s.by_errors[0].cdf_zero.as_ref().unwrap();
    assert!(c.weights.starts_with("equal"));
    // Equal weights: (2Φ(−4) + Φ(4) + Φ(−3)) / 4, by hand with math.erfc.
    let phi = |x: f64| statrs::function::erf::erfc(-x / 2f64.sqrt()) / 2.0;
    let expected = (2.0 * phi(-4.0) + phi(4.0) + phi(-3.0)) / 4.0;
    assert_relative_eq!(c.below_zero, expected, max_relative = 1e-12);
    assert_relative_eq!(expected, 0.2503453923183658, max_relative = 1e-9);
}

#[test]
fn decision_influence_by_hand() {
    let s = summarize(&common::small_grid()).unwrap();
    // Estimates 1 (a0,b0), 2 (a1,b0), −1 (a0,b1), 3 (a1,b1); grand mean 1.25; total SS 8.75.
    // A: option means 0 and 2.5 → between SS 2·1.25² + 2·1.25² = 6.25 → 6.25/8.75.
    // B: option means 1.5 and 1 → between SS 4·0.25² = 0.25 → 0.25/8.75.
    assert_eq!(s.decisions[0].dimension, "A");
    assert_eq!(s.decisions[0].rank, 1);
    assert_relative_eq!(s.decisions[0].variance_share, 6.25 / 8.75);
    assert_eq!(s.decisions[1].dimension, "B");
    assert_relative_eq!(s.decisions[1].variance_share, 0.25 / 8.75);
    let a1 = &s.decisions[0].options[1];
    assert_eq!((a1.option.as_str(), a1.models), ("a1", 2));
    assert_relative_eq!(a1.mean.unwrap(), 2.5);
    assert_relative_eq!(a1.median.unwrap(), 2.5);
    // Twins: m2 − m1 = 1, m4 − m3 = 4 → mean shift 2.5 over 2 pairs.
    assert_relative_eq!(a1.shift_vs_reference.unwrap(), 2.5);
    assert_eq!(a1.shift_pairs, 2);
    // m2 and m4 significant under classical; only m2 under hc1.
    assert_eq!(a1.share_significant, vec![Some(1.0), Some(0.5)]);
    let b1 = &s.decisions[1].options[1];
    // m3 − m1 = −2, m4 − m2 = 1 → −0.5.
    assert_relative_eq!(b1.shift_vs_reference.unwrap(), -0.5);
    assert_eq!(s.decisions[1].options[0].shift_vs_reference, None);
}

#[test]
fn diagnostics_by_hand() {
    let s = summarize(&common::small_grid()).unwrap();
    // BP p-values 0.01, 0.2, 0.03 among the estimated models: 2 of 3 reject at 5%.
    assert_eq!(s.diagnostics.het_tested_models, 3);
    assert_relative_eq!(s.diagnostics.het_share_rejecting.unwrap(), 2.0 / 3.0);
    // hc1/classical SE: 3.2, 1, 4, 2 → sorted 1, 2, 3.2, 4; median 2.6.
    let r = &s.diagnostics.se_ratios[0];
    assert_eq!((r.errors.as_str(), r.models), ("hc1", 4));
    assert_relative_eq!(r.median.unwrap(), 2.6);
    assert_eq!((r.min, r.max), (Some(1.0), Some(4.0)));
}

#[test]
fn missing_std_errors_are_reported_not_invented() {
    let mut input = common::small_grid();
    common::edit_models(&mut input, |m| {
        for e in m[3].effects.iter_mut().flatten() {
            e.std_error = None;
        }
    });
    let s = summarize(&input).unwrap();
    let c = &s.by_errors[0];
    assert_eq!(c.models_with_std_error, 3);
    // m4 no longer counts as significant.
    assert_eq!(c.share_significant_positive, Some(0.5));
    // Upper bound now from m2: 2 + 2·0.5 = 3.
    assert_relative_eq!(c.extreme_bounds.as_ref().unwrap().upper.value, 3.0);
    assert!(s
        .cautions
        .iter()
        .any(|c| c.contains("no delta-method standard error")));
}

#[test]
fn summary_json_is_stable_and_ordered() {
    let report = Report::build(common::small_grid()).unwrap();
    let json = report.summary_json();
    assert_eq!(
        json,
        Report::build(common::small_grid()).unwrap().summary_json()
    );
    let keys = [
        "\"format\"",
        "\"title\"",
        "\"scale\"",
        "\"models\"",
        "\"baseline\"",
        "\"by_errors\"",
        "\"decisions\"",
        "\"diagnostics\"",
        "\"cautions\"",
    ];
    let positions: Vec<usize> = keys.iter().map(|k| json.find(k).unwrap()).collect();
    assert!(
        positions.windows(2).all(|w| w[0] < w[1]),
        "key order changed: {positions:?}"
    );
    let parsed: serde_json::Value = serde_json::from_str(&json).unwrap();
    assert_eq!(parsed["by_errors"][0]["median"], 1.5);
    assert_eq!(parsed["format"], "specgrid-summary-v1");
}

#[test]
fn inconsistent_input_is_refused_with_the_model_named() {
    let mut input = common::small_grid();
    common::edit_models(&mut input, |m| m[2].choices = vec![0, 5]);
    match summarize(&input) {
        Err(ReportError::Input(msg)) => assert!(msg.contains("m3") && msg.contains("`B`"), "{msg}"),
        other => panic!("expected an input error, got {other:?}"),
    }
}

#[test]
fn terminal_summary_has_the_headline_figures() {
    let text = Report::build(common::small_grid()).unwrap().terminal();
    assert!(text.contains("Baseline model m1"), "{text}");
    // Classical row: 4 models, baseline 1.000, rank 2/4, median 1.500, same sign 75.0%.
    let row = text.lines().find(|l| l.starts_with("classical")).unwrap();
    for part in ["1.000", "2/4", "1.500", "[0.5000, 2.250]", "75.0%", "25.0%"] {
        assert!(row.contains(part), "missing {part} in {row}");
    }
    assert!(
        text.contains("extreme bounds [-1.500, 5.000] (cross zero)"),
        "{text}"
    );
    assert!(text.contains("1. A"), "{text}");
    assert!(text.contains("not a causal effect"));
}
