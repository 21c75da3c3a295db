//! A small hand-made grid whose aggregates are worked out by hand in tests/aggregates.rs.
#![allow(dead_code)]

use specgrid_report::{DimensionInfo, Effect, ModelEntry, ModelStatus, ReportInput, Scale};

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
            DimensionInfo {
                name: "A".into(),
                options: vec!["a0".into(), "a1".into()],
            },
            DimensionInfo {
                name: "B".into(),
                options: vec!["b0".into(), "b1".into()],
            },
        ],
        error_labels: vec!["classical".into(), "hc1".into()],
        significance_level: 0.05,
        confidence_level: 0.95,
        baseline_model_id: None,
        models: vec![
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
        ],
        study_text: "[study]\ntitle = \"Small grid\"\n".into(),
        data_fingerprint: "0123abcd".into(),
        baseline_residuals: Some(vec![(1.0, 0.5), (2.0, -0.25), (3.0, 0.1)]),
    }
}
