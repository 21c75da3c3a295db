//! Re-rendering from models.csv rows: the first tracked term of each model becomes its effect,
//! failed models stay counted, and bad rows name their row number.

use specgrid_report::{
    dimensions_from_rows, Report, ReportError, ReportHeader, ReportInput, ResultRow, Scale,
};

fn row(id: &str, choice: &str, errors: &str, term: &str, est: f64, se: f64) -> ResultRow {
    ResultRow {
        model_id: id.into(),
        choices: vec![choice.into()],
        errors: errors.into(),
        term: term.into(),
        estimate: Some(est),
        std_error: Some(se),
        df: Some(40.0),
        n_obs: Some(42),
        n_params: Some(3),
        r_squared: Some(0.3),
        resid_sd: Some(1.0),
        het_test_p_value: Some(0.5),
        p_value: None,
        outcome: "y".into(),
        status: "ok".into(),
        message: String::new(),
    }
}

fn header() -> ReportHeader {
    ReportHeader {
        title: "Rows".into(),
        significance_level: 0.05,
        confidence_level: 0.95,
        baseline_model_id: None,
        study_text: String::new(),
        data_fingerprint: "ab".into(),
    }
}

fn rows() -> Vec<ResultRow> {
    let mut failed = row("c", "quadratic", "classical", "x", 0.0, 0.0);
    failed.estimate = None;
    failed.std_error = None;
    failed.status = "failed".into();
    failed.message = "collinear".into();
    vec![
        row("a", "level", "classical", "x", 0.5, 0.1),
        row("a", "level", "hc1", "x", 0.5, 0.2),
        row("b", "quadratic", "classical", "x", 0.9, 0.3),
        // The second tracked term of model b is not its effect.
        row("b", "quadratic", "classical", "x^2", -0.01, 0.001),
        row("b", "quadratic", "hc1", "x", 0.9, 0.4),
        row("b", "quadratic", "hc1", "x^2", -0.01, 0.002),
        failed,
    ]
}

#[test]
fn rows_become_coefficient_scale_models() {
    let rows = rows();
    let dims = dimensions_from_rows(&["focus".to_string()], &rows);
    assert_eq!(dims[0].options, ["level", "quadratic"]);
    let input = ReportInput::from_rows(header(), dims, &rows).unwrap();
    assert_eq!(input.scale, Scale::Coefficient);
    assert_eq!(input.error_labels, ["classical", "hc1"]);
    assert_eq!(input.effect_label, "x");
    assert_eq!(input.models.len(), 3);
    let b = input.models.get(1);
    assert_eq!(b.choices(), [1]);
    assert_eq!(b.effect(0).unwrap().estimate, 0.9);
    assert_eq!(b.effect(1).unwrap().std_error, Some(0.4));
    assert_eq!(input.models.get(2).failure(), Some("collinear"));
    let report = Report::build(input).unwrap();
    assert_eq!(report.summary.models.failed, 1);
    assert_eq!(report.summary.by_errors[0].models, 2);
    // Mixed focus forms on the coefficient scale carry a warning.
    assert!(report
        .summary
        .cautions
        .iter()
        .any(|c| c.contains("not on one scale")));
}

#[test]
fn an_unknown_option_names_the_row() {
    let mut rows = rows();
    let dims = dimensions_from_rows(&["focus".to_string()], &rows[..2]);
    rows[2].choices = vec!["cubic".into()];
    match ReportInput::from_rows(header(), dims, &rows) {
        Err(e @ ReportError::Row { row: 3, .. }) => {
            assert!(e.to_string().contains("`cubic`"), "{e}")
        }
        other => panic!("expected a row error, got {other:?}"),
    }
}

#[test]
fn an_ok_row_without_estimate_is_refused() {
    let mut rows = rows();
    rows[0].estimate = None;
    let dims = dimensions_from_rows(&["focus".to_string()], &rows);
    let err = ReportInput::from_rows(header(), dims, &rows).unwrap_err();
    assert!(err.to_string().starts_with("models.csv row 1:"), "{err}");
}
