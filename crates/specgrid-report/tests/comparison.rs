//! Comparing two runs: the expected flips, significance changes, moves and aggregate changes on
//! a hand-made pair of grids, worked out by hand below.

mod common;

use specgrid_report::{compare, Effect, Report, Tolerance};

fn set(input: &mut specgrid_report::ReportInput, id: &str, estimate: f64) {
    common::edit_models(input, |models| {
        let m = models.iter_mut().find(|m| m.model_id == id).unwrap();
        for e in m.effects.iter_mut().flatten() {
            *e = Effect::coefficient(estimate, e.std_error, e.df);
        }
    });
}

#[test]
fn a_perturbed_rerun_reports_the_changes_worked_out_by_hand() {
    let old = common::small_grid();
    let mut new = common::small_grid();
    set(&mut new, "m1", -0.2); // flips sign; t = −0.8 under classical (was 4): loses significance
    set(&mut new, "m2", 2.1); // +5 % and +0.2 SE: below both tolerances, not moved
    set(&mut new, "m4", 4.0); // +33 % and +1 SE: moved; t = 4 (was 3): stays significant
    common::edit_models(&mut new, |models| {
        models.retain(|m| m.model_id != "m3");
        let mut added = models[0].clone();
        added.model_id = "m6".into();
        added.choices = vec![0, 1];
        models.push(added);
    });
    set(&mut new, "m6", 0.5);

    let old = Report::build(old).unwrap();
    let new = Report::build(new).unwrap();
    let c = compare(&old, &new, None, Tolerance::default()).unwrap();
    assert_eq!(c.errors, "classical");
    assert_eq!(c.added, ["m6"]);
    assert_eq!(c.removed, ["m3"]);
    // m1, m2, m4 have effects in both; m5 failed in both.
    assert_eq!(c.matched, 3);
    let ids = |v: &[specgrid_report::ModelChange]| -> Vec<String> {
        v.iter().map(|m| m.model_id.clone()).collect()
    };
    assert_eq!(ids(&c.sign_flips), ["m1"]);
    // Two-sided t test with 100 df: |t| > 1.984 is significant at 0.05 (t table, from memory).
    assert_eq!(ids(&c.significance_changes), ["m1"]);
    assert_eq!(c.significance_changes[0].old_significant, Some(true));
    assert_eq!(c.significance_changes[0].new_significant, Some(false));
    assert_eq!(ids(&c.moved), ["m1", "m4"]);
    let m4 = &c.moved[1];
    assert!((m4.relative_change.unwrap() - 1.0 / 3.0).abs() < 1e-12);
    assert!((m4.change_in_std_errors.unwrap() - 1.0).abs() < 1e-12);

    // Median of four estimates = mean of the middle two (common practice):
    // old {−1, 1, 2, 3} → 1.5; new {−0.2, 0.5, 2.1, 4} → 1.3.
    let median = c
        .aggregates
        .iter()
        .find(|a| a.path == "by_errors[classical].median")
        .expect("median compared");
    assert_eq!(median.old.as_f64(), Some(1.5));
    assert!((median.new.as_f64().unwrap() - 1.3).abs() < 1e-12);
    assert!((median.change.unwrap() + 0.2).abs() < 1e-12);
    // Every aggregate is listed, changed or not; the model counts did not change.
    let planned = c
        .aggregates
        .iter()
        .find(|a| a.path == "models.planned")
        .unwrap();
    assert_eq!(planned.change, Some(0.0));
    assert!(c.changed_aggregates().all(|a| a.old != a.new));

    // The HTML section names the counts and the flipped model.
    let html = specgrid_report::comparison_section(&c, &[]);
    assert!(html.contains("<section id=\"comparison\">"));
    assert!(html.contains("<code>m1</code>"));
    let page = specgrid_report::insert_comparison_section(&new.html(), &html);
    assert!(page.contains("Compared with the earlier run"));
    assert!(page.find("comparison").unwrap() < page.find("</body>").unwrap());
}

#[test]
fn identical_runs_compare_clean_and_a_missing_choice_is_an_error() {
    let old = Report::build(common::small_grid()).unwrap();
    let new = Report::build(common::small_grid()).unwrap();
    let c = compare(&old, &new, Some("hc1"), Tolerance::default()).unwrap();
    assert!(c.sign_flips.is_empty() && c.significance_changes.is_empty() && c.moved.is_empty());
    assert!(c.added.is_empty() && c.removed.is_empty());
    assert_eq!(c.changed_aggregates().count(), 0);
    let err = compare(&old, &new, Some("hc3"), Tolerance::default()).unwrap_err();
    assert!(err.contains("hc3"), "{err}");
}
