//! A pick decision (every set of some candidate terms) is reported per candidate term, not per
//! set. The figures are the definitions of docs/report.md worked out by hand here: for a
//! candidate, the mean effect of the models whose set contains it, and that mean minus the
//! mean of the models whose set does not (a difference in means; common practice for
//! "does including this control move the estimate").

use specgrid_report::{
    DimensionInfo, Effect, ModelEntry, ModelStatus, Models, Report, ReportInput, Scale,
};

/// Every set of 2 of the candidates a, b, c, d (6 sets), one model per set; the effect is the
/// sum of a per-candidate contribution, so each candidate's with/without difference is known.
fn pick_grid() -> ReportInput {
    let candidates = ["a", "b", "c", "d"];
    let contribution = [0.4, -0.2, 0.1, 0.0];
    let mut options = Vec::new();
    let mut models = Vec::new();
    for i in 0..4 {
        for j in i + 1..4 {
            options.push(format!("{} + {}", candidates[i], candidates[j]));
            let estimate = 1.0 + contribution[i] + contribution[j];
            models.push(ModelEntry {
                model_id: format!("m{i}{j}"),
                choices: vec![options.len() - 1],
                status: ModelStatus::Ok,
                // SE 0.1 everywhere: every model is significant.
                effects: vec![Some(Effect::coefficient(estimate, Some(0.1), 50.0))],
                n_obs: Some(60),
                n_params: Some(4),
                r_squared: Some(0.3),
                resid_sd: Some(1.0),
                het_p_value: None,
                outcome_label: "y".into(),
            });
        }
    }
    ReportInput {
        title: "Pick grid".into(),
        scale: Scale::Coefficient,
        effect_label: "x".into(),
        dimensions: vec![DimensionInfo {
            name: "controls".into(),
            options,
            candidates: candidates.iter().map(|c| c.to_string()).collect(),
        }],
        error_labels: vec!["classical".into()],
        significance_level: 0.05,
        confidence_level: 0.95,
        baseline_model_id: None,
        models: Models::from_entries(models).unwrap(),
        study_text: String::new(),
        data_fingerprint: String::new(),
        baseline_residuals: None,
        across_grid: None,
    }
}

#[test]
fn a_pick_decision_is_summarized_per_candidate_term() {
    let report = Report::build(pick_grid()).unwrap();
    let decision = &report.summary.decisions[0];
    assert!(decision.per_candidate);
    let names: Vec<&str> = decision.options.iter().map(|o| o.option.as_str()).collect();
    assert_eq!(names, ["a", "b", "c", "d"]);
    // By hand: effects of the six sets are ab 1.2, ac 1.5, ad 1.4, bc 0.9, bd 0.8, cd 1.1.
    // With a: (1.2 + 1.5 + 1.4)/3 = 4.1/3; without a: (0.9 + 0.8 + 1.1)/3 = 2.8/3.
    let a = &decision.options[0];
    assert_eq!(a.models, 3);
    assert!((a.mean.unwrap() - 4.1 / 3.0).abs() < 1e-12);
    assert!((a.shift_vs_reference.unwrap() - (4.1 - 2.8) / 3.0).abs() < 1e-12);
    assert_eq!(a.shift_pairs, 3);
    // Median with a: {1.2, 1.4, 1.5} → 1.4.
    assert!((a.median.unwrap() - 1.4).abs() < 1e-12);
    assert_eq!(a.share_significant, vec![Some(1.0)]);
    // With d: ad 1.4, bd 0.8, cd 1.1 (mean 3.3/3); without: ab, ac, bc (mean 3.6/3).
    let d = &decision.options[3];
    assert!((d.shift_vs_reference.unwrap() - (3.3 - 3.6) / 3.0).abs() < 1e-12);
    // The variance share still compares the six sets: each set is its own group, so the
    // decision explains all of the variance.
    assert!((decision.variance_share - 1.0).abs() < 1e-12);
}

#[test]
fn the_panels_and_tables_list_candidates_not_sets() {
    let report = Report::build(pick_grid()).unwrap();
    let html = report.html();
    assert!(html.contains("one row per candidate term"));
    // Only the baseline's own set could be named (in its description); the panel and the
    // table list candidates.
    assert!(
        !html.contains("c + d"),
        "a set name leaked into the HTML report"
    );
    let terminal = report.terminal();
    assert!(terminal.contains("with vs without each term"));
    let json = report.summary_json();
    assert!(json.contains("\"per_candidate\": true"));
    let tex = report.latex();
    assert!(tex.contains("controls (candidate terms)"));
}

#[test]
fn an_option_name_that_does_not_split_into_candidates_falls_back_to_sets() {
    let mut input = pick_grid();
    input.dimensions[0].options[0] = "a + unknown".into();
    let report = Report::build(input).unwrap();
    let decision = &report.summary.decisions[0];
    assert!(!decision.per_candidate);
    assert_eq!(decision.options.len(), 6);
}
