//! The `[report]` table: effect scale, evaluation values and a named baseline, with positioned
//! problems for every mistake.

mod common;

use common::{problems, study, HEADER};
use specgrid_study::{plan, EffectScale, EvaluationValues};

const GRID: &str = "[outcome]\ncolumn = \"y\"\nforms = [\"level\", \"log\"]\n[focus]\ncolumn = \"x\"\nforms = [\"level\", \"quadratic\"]\n";

#[test]
fn absent_table_means_coefficient_scale_means_and_first_options() {
    let s = study(&format!("{HEADER}{GRID}"));
    assert_eq!(s.report.scale, EffectScale::Coefficient);
    assert_eq!(s.report.evaluate_at, EvaluationValues::default());
    let p = plan(&s).unwrap();
    assert_eq!(p.baseline, Some(0));
    assert_eq!(p.models[0].choices, vec![0, 0, 0], "outcome, focus, sample");
    assert_eq!(p.focus_column, "x");
}

#[test]
fn every_scale_word_is_read() {
    for (word, scale) in EffectScale::WORDS {
        let s = study(&format!("{HEADER}{GRID}[report]\nscale = \"{word}\"\n"));
        assert_eq!(s.report.scale, scale);
        assert_eq!(scale.word(), word);
    }
}

#[test]
fn evaluation_values_are_read() {
    let s = study(&format!(
        "{HEADER}{GRID}[report]\nevaluate_at = {{ focus = 2, outcome = 7.5, moderator = 1 }}\n"
    ));
    assert_eq!(
        s.report.evaluate_at,
        EvaluationValues {
            focus: Some(2.0),
            outcome: Some(7.5),
            moderator: Some(1.0)
        }
    );
}

#[test]
fn a_named_baseline_is_found_in_the_grid() {
    let s = study(&format!(
        "{HEADER}{GRID}[report]\nbaseline = {{ focus = \"quadratic\" }}\n"
    ));
    assert_eq!(s.report.baseline, Some(vec![0, 1, 0]));
    let p = plan(&s).unwrap();
    let b = p.baseline.expect("planned");
    assert_eq!(
        p.models[b].choices,
        vec![0, 1, 0],
        "outcome level, focus quadratic"
    );
}

#[test]
fn a_baseline_excluded_by_a_skip_rule_is_a_problem() {
    let s = study(&format!(
        "{HEADER}{GRID}[grid]\nskip = [{{ focus = \"quadratic\", outcome = \"log\" }}]\n[report]\nbaseline = {{ outcome = \"log\", focus = \"quadratic\" }}\n"
    ));
    let problems = plan(&s).unwrap_err();
    assert!(
        problems[0].message.contains("baseline named in [report]"),
        "{problems:?}"
    );
}

#[test]
fn mistakes_are_positioned_with_suggestions() {
    // Line numbers: HEADER has 4 lines, GRID 6, so [report] is line 11.
    let all = problems(&format!(
        "{HEADER}{GRID}[report]\nscale = \"semi elasticity\"\nbaseline = {{ focs = \"level\", outcome = \"logg\" }}\nevaluate_at = {{ focus = \"high\", modrator = 1 }}\nscael = 1\n"
    ));
    let find = |needle: &str| {
        all.iter()
            .find(|p| p.message.contains(needle))
            .unwrap_or_else(|| panic!("no problem mentioning {needle:?} in {all:?}"))
    };
    let scale = find("unknown effect scale `semi elasticity`");
    assert_eq!((scale.line, scale.column), (12, 9));
    assert!(scale.hint.as_deref().unwrap().contains("`semi-elasticity`"));
    let focus_value = find("`focus` of `evaluate_at`");
    assert_eq!((focus_value.line, focus_value.column), (14, 25));
    let moderator = find("unknown key `modrator`");
    assert!(
        moderator.to_string().contains("did you mean `moderator`?"),
        "{moderator}"
    );
    let key = find("unknown key `scael`");
    assert_eq!(key.line, 15);
    // Baseline names are checked only once the rest is valid; check them on their own.
    let all = problems(&format!(
        "{HEADER}{GRID}[report]\nbaseline = {{ focs = \"level\", outcome = \"logg\" }}\n"
    ));
    let dim = all
        .iter()
        .find(|p| p.message.contains("`focs`"))
        .expect("focs");
    assert_eq!((dim.line, dim.column), (12, 14));
    assert!(dim
        .hint
        .as_deref()
        .unwrap()
        .contains("did you mean `focus`?"));
    let option = all
        .iter()
        .find(|p| p.message.contains("`logg` is not an option"))
        .expect("logg");
    assert_eq!((option.line, option.column), (12, 40));
    assert!(option
        .hint
        .as_deref()
        .unwrap()
        .contains("did you mean `log`?"));
}
