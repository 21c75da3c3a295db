//! A small hand-made grid whose aggregates are worked out by hand in tests/aggregates.rs.
#![allow(dead_code)]

use specgrid_report::{DimensionInfo, Effect, ModelEntry, ModelStatus, Models, ReportInput, Scale};

/// Edits an input's models as owned records (the report keeps them as columns).
pub fn edit_models(input: &mut ReportInput, edit: impl FnOnce(&mut Vec<ModelEntry>)) {
    let mut entries = input.models.to_entries();
    edit(&mut entries);
    input.models = Models::from_entries(entries).unwrap();
}

/// One estimated model: id, choices, estimate, (classical SE, hc1 SE), residual sd, BP p-value.
fn model(
    id: &str,
    choices: [usize; 2],
    estimate: f64,
    se: (f64, f64),
    resid_sd: f64,
    het_p: Option<f64>,
) -> ModelEntry {
    ModelEntry {
        model_id: id.into(),
        choices: choices.to_vec(),
        status: ModelStatus::Ok,
        effects: vec![
            Some(Effect::coefficient(estimate, Some(se.0), 100.0)),
            Some(Effect::coefficient(estimate, Some(se.1), 100.0)),
        ],
        n_obs: Some(10),
        n_params: Some(2),
        r_squared: Some(0.5),
        resid_sd: Some(resid_sd),
        het_p_value: het_p,
        outcome_label: "y".into(),
    }
}

/// Two decisions (A: a0/a1, B: b0/b1), four estimated models and one failed one; covariance
/// choices `classical` and `hc1`. Model m2's residual sd is 2^0.1, so with n = 10, k = 2 its
/// likelihood is half the others' (L ∝ RSS^(−n/2) = s^(−10)).
pub fn small_grid() -> ReportInput {
    let m2_sd = 2f64.powf(0.1);
    ReportInput {
        title: "Small grid".into(),
        scale: Scale::Coefficient,
        effect_label: "x".into(),
        dimensions: vec![
            DimensionInfo::new("A", vec!["a0".into(), "a1".into()]),
            DimensionInfo::new("B", vec!["b0".into(), "b1".into()]),
        ],
        error_labels: vec!["classical".into(), "hc1".into()],
        significance_level: 0.05,
        confidence_level: 0.95,
        baseline_model_id: None,
        models: Models::from_entries(vec![
            model("m1", [0, 0], 1.0, (0.25, 0.8), 1.0, Some(0.01)),
            model("m2", [1, 0], 2.0, (0.5, 0.5), m2_sd, Some(0.2)),
            model("m3", [0, 1], -1.0, (0.25, 1.0), 1.0, Some(0.03)),
            model("m4", [1, 1], 3.0, (1.0, 2.0), 1.0, None),
            ModelEntry {
                model_id: "m5".into(),
                choices: vec![1, 1],
                status: ModelStatus::Failed("the tracked column was collinear".into()),
                effects: vec![None, None],
                n_obs: None,
                n_params: None,
                r_squared: None,
                resid_sd: None,
                het_p_value: None,
                outcome_label: "y".into(),
            },
        ])
        .unwrap(),
        study_text: "[study]\ntitle = \"Small grid\"\n".into(),
        data_fingerprint: "0123abcd".into(),
        baseline_residuals: Some(vec![(1.0, 0.5), (2.0, -0.25), (3.0, 0.1)]),
        across_grid: None,
    }
}

/// A full grid over five decisions with `per_dim` options each (per_dim⁵ models). The effect is
/// 0.03 plus a shift per option plus a small deterministic wobble; SEs vary so that some
/// models are significant and some are not.
pub fn big_grid(per_dim: usize) -> ReportInput {
    let names = ["outcome", "focus", "plot size", "irrigation", "sample"];
    let dimensions: Vec<DimensionInfo> = names
        .iter()
        .map(|n| {
            DimensionInfo::new(
                *n,
                (0..per_dim).map(|o| format!("{n} option {o}")).collect(),
            )
        })
        .collect();
    let total = per_dim.pow(5);
    let models = (0..total)
        .map(|i| {
            let mut rest = i;
            let choices: Vec<usize> = (0..5)
                .map(|_| {
                    let c = rest % per_dim;
                    rest /= per_dim;
                    c
                })
                .rev()
                .collect();
            let estimate = 0.03 + 0.01 * choices[2] as f64 - 0.004 * choices[3] as f64
                + 0.002 * (i as f64 * 0.7).sin();
            let se = 0.004 + 0.003 * choices[4] as f64;
            ModelEntry {
                model_id: format!("{i:012x}"),
                choices,
                status: ModelStatus::Ok,
                effects: vec![
                    Some(Effect::coefficient(estimate, Some(se), 500.0)),
                    Some(Effect::coefficient(estimate, Some(1.5 * se), 149.0)),
                ],
                n_obs: Some(600),
                n_params: Some(12),
                r_squared: Some(0.4),
                resid_sd: Some(0.3 + 0.001 * (i % 7) as f64),
                het_p_value: Some(((i * 37) % 100) as f64 / 100.0),
                outcome_label: "log(y)".into(),
            }
        })
        .collect();
    ReportInput {
        title: "Synthetic grid".into(),
        scale: Scale::SemiElasticity,
        effect_label: "visits".into(),
        dimensions,
        error_labels: vec!["classical".into(), "cluster:village".into()],
        significance_level: 0.05,
        confidence_level: 0.95,
        baseline_model_id: None,
        models: Models::from_entries(models).unwrap(),
        study_text: "[study]\ntitle = \"Synthetic grid\"\n".into(),
        data_fingerprint: "feedface".into(),
        baseline_residuals: Some(
            (0..10_000)
                .map(|i| (i as f64 / 100.0, ((i * 13) % 17) as f64 / 17.0 - 0.5))
                .collect(),
        ),
        across_grid: None,
    }
}
