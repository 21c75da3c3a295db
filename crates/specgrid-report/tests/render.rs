//! Renderers against reviewed golden files (tests/golden/), plus structural checks that hold for
//! any input: self-contained HTML, thinned marks for big grids, deterministic bytes.
//!
//! To regenerate a golden file after an intended change: SPECGRID_UPDATE_GOLDEN=1 cargo test
//! -p specgrid-report --test render, then read the diff before committing it.

mod common;

use std::path::PathBuf;

use specgrid_report::Report;

fn golden(name: &str, actual: &str) {
    let path = PathBuf::from(
        std::env::var("CARGO_MANIFEST_DIR")
            .unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").to_string()),
    )
    .join("tests/golden")
    .join(name);
    if std::env::var_os("SPECGRID_UPDATE_GOLDEN").is_some() {
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&path).unwrap_or_else(|e| {
        panic!(
            "cannot read {}: {e}; run with SPECGRID_UPDATE_GOLDEN=1 once and review it",
            path.display()
        )
    });
    if expected != actual {
        let line = expected
            .lines()
            .zip(actual.lines())
            .position(|(a, b)| a != b)
            .map_or(expected.lines().count().min(actual.lines().count()), |i| i);
        panic!(
            "{name} differs from the golden file at line {}:\n  golden: {:?}\n  actual: {:?}",
            line + 1,
            expected.lines().nth(line),
            actual.lines().nth(line)
        );
    }
}

#[test]
fn small_grid_outputs_match_golden_files() {
    let report = Report::build(common::small_grid()).unwrap();
    golden("small.summary.json", &report.summary_json());
    golden("small.effects.csv", &report.effects_csv());
    golden("small.terminal.txt", &report.terminal());
    golden("small.report.html", &report.html());
    golden("small.report.md", &report.markdown());
    golden("small.appendix.tex", &report.latex());
}

#[test]
fn html_is_self_contained() {
    let html = Report::build(common::big_grid(4)).unwrap().html();
    assert!(
        !html.contains("<script"),
        "the report must read without scripts"
    );
    for needle in ["https:", "src=\"http", "href=\"http", "@import", "url("] {
        assert!(
            !html.contains(needle),
            "external reference {needle} in the report"
        );
    }
    // The only http text allowed is the SVG namespace identifier, which is never fetched.
    let others = html.matches("http").count() - html.matches("http://www.w3.org/2000/svg").count();
    assert_eq!(others, 0);
    for part in [
        "Specification curve",
        "Which decisions move the estimate",
        "Aggregates by covariance choice",
        "residuals against fitted values",
        "Cautions",
        "Data fingerprint",
        "not a causal effect",
        "pre-registration",
    ] {
        assert!(html.contains(part), "missing section: {part}");
    }
}

#[test]
fn small_grids_draw_one_mark_per_model_and_large_ones_are_thinned() {
    // 4⁵ = 1,024 models: grouped into at most 500 marks.
    let small = Report::build(common::small_grid()).unwrap().html();
    let marks = |h: &str| {
        h.matches("<circle class=\"sig\"").count()
            + h.matches("<circle class=\"nonsig\"").count()
            + h.matches("<circle class=\"unknown\"").count()
    };
    assert_eq!(marks(&small), 4);
    let grouped = Report::build(common::big_grid(4)).unwrap().html();
    assert_eq!(marks(&grouped), 500);
    assert!(grouped.contains("each column is a group of about 2 models"));
}

#[test]
fn one_hundred_thousand_models_render_compactly_and_deterministically() {
    // 10⁵ = 100,000 models.
    let input = common::big_grid(10);
    assert_eq!(input.models.len(), 100_000);
    let report = Report::build(input).unwrap();
    let html = report.html();
    assert!(
        html.len() < 2_000_000,
        "report.html is {} bytes",
        html.len()
    );
    let again = Report::build(common::big_grid(10)).unwrap();
    assert_eq!(html, again.html());
    assert_eq!(report.latex(), again.latex());
    // The residual scatter shows at most 4,000 of the 10,000 points.
    assert!(html.contains("(3334 of 10000 points)") || html.contains("of 10000 points)"));
}

#[test]
fn write_all_writes_every_file_and_no_partials() {
    let dir = tempfile::tempdir().unwrap();
    let report = Report::build(common::small_grid()).unwrap();
    report.write_all(dir.path()).unwrap();
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(
        names,
        [
            "appendix.tex",
            "effects.csv",
            "report.html",
            "report.md",
            "summary.json"
        ]
    );
    assert_eq!(
        std::fs::read_to_string(dir.path().join("summary.json")).unwrap(),
        report.summary_json()
    );
}

#[test]
fn write_into_a_missing_folder_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("no-such-folder");
    let err = Report::build(common::small_grid())
        .unwrap()
        .write_all(&missing)
        .unwrap_err();
    let text = err.to_string();
    assert!(
        text.contains("summary.json") && text.contains("writable"),
        "{text}"
    );
}

#[test]
fn effects_csv_carries_turning_points_per_model() {
    use specgrid_report::{effect, EffectInputs, EvaluationPoint, FocusForm, OutcomeForm, Scale};
    // Wooldridge Example 6.2 numbers (see tests/effects.rs): turning point 24.42622950819672.
    let cov = vec![vec![4e-4, -1e-6], vec![-1e-6, 1e-8]];
    let quadratic = effect(
        &EffectInputs {
            outcome: OutcomeForm::Level,
            focus: FocusForm::Polynomial(2),
            coefficients: &[0.298, -0.0061],
            interaction: None,
            std_errors: &[0.02, 1e-4],
            covariance: Some(&cov),
            at: EvaluationPoint {
                focus: 10.0,
                outcome: 6.0,
                focus_sd: None,
                moderator: None,
            },
            df: 523.0,
        },
        Scale::MarginalEffect,
    )
    .unwrap();
    let mut input = common::small_grid();
    common::edit_models(&mut input, |m| m[0].effects[0] = Some(quadratic));
    let csv = Report::build(input).unwrap().effects_csv();
    let first = csv.lines().nth(1).unwrap();
    let cells: Vec<&str> = first.split(',').collect();
    assert_eq!(cells[0], "m1");
    assert_eq!(cells[1], "classical");
    assert_eq!(cells[2].parse::<f64>().unwrap(), 0.176);
    assert_eq!(cells[10].parse::<f64>().unwrap(), 24.42622950819672);
    assert!((cells[11].parse::<f64>().unwrap() - 1.4803213093883163).abs() < 1e-9);
    // No proportional change for a level outcome.
    assert_eq!(cells[8], "");
    // Failed model m5 has no rows; 4 models × 2 choices + header.
    assert_eq!(csv.lines().count(), 9);
}
