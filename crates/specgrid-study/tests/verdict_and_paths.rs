//! The `[verdict]` table and the rule that data paths stay inside the study's folder.

mod common;

use common::{problems, study, HEADER};

const DECISIONS: &str = "[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n[errors]\nchoices = [\"classical\", \"hc1\"]\n";

#[test]
fn verdict_rules_are_read() {
    let s = study(&format!(
        "{HEADER}{DECISIONS}[verdict]\nerrors = \"hc1\"\nmin_share_baseline_sign = 0.9\nmin_share_significant = 0.5\nbaseline_significant = true\nmax_sign_flips = 3\n"
    ));
    let v = s.verdict.expect("verdict read");
    assert_eq!(v.errors.as_deref(), Some("hc1"));
    assert_eq!(v.min_share_baseline_sign, Some(0.9));
    assert_eq!(v.min_share_significant, Some(0.5));
    assert!(v.baseline_significant);
    assert_eq!(v.max_sign_flips, Some(3));
}

#[test]
fn a_study_without_verdict_has_none() {
    assert!(study(&format!("{HEADER}{DECISIONS}")).verdict.is_none());
}

#[test]
fn verdict_problems_are_positioned_with_hints() {
    // Line numbers: HEADER has 4 lines, DECISIONS 6, so [verdict] is line 11.
    let all = problems(&format!(
        "{HEADER}{DECISIONS}[verdict]\nmin_share_baseline_sgn = 0.9\nmin_share_significant = 90\nerrors = \"hc2\"\nmax_sign_flips = -1\nbaseline_significant = \"yes\"\n"
    ));
    let text: Vec<String> = all.iter().map(|p| p.to_string()).collect();
    let find = |needle: &str| {
        all.iter()
            .find(|p| p.message.contains(needle))
            .unwrap_or_else(|| panic!("no `{needle}` in {text:#?}"))
    };
    let unknown = find("unknown key `min_share_baseline_sgn`");
    assert_eq!((unknown.line, unknown.column), (12, 1));
    assert!(unknown
        .hint
        .as_deref()
        .unwrap()
        .contains("did you mean `min_share_baseline_sign`"));
    let share = find("`min_share_significant` in [verdict] must be between 0 and 1");
    assert_eq!(share.line, 13);
    assert!(share.hint.as_deref().unwrap().contains("0.9"));
    let errors = find("names `hc2`");
    assert_eq!(errors.line, 14);
    let flips = find("`max_sign_flips` in [verdict] must be between 0");
    assert_eq!(flips.line, 15);
    let wrong_type = find("`baseline_significant` in [verdict] must be true or false");
    assert_eq!(wrong_type.line, 16);
}

#[test]
fn data_outside_the_study_folder_needs_the_explicit_key() {
    for outside in [
        "../elsewhere/plots.csv",
        "/tmp/plots.csv",
        "a/../../plots.csv",
    ] {
        let text = format!("[study]\ntitle = \"t\"\ndata = \"{outside}\"\n{DECISIONS}");
        let all = problems(&text);
        assert_eq!(all.len(), 1, "{all:?}");
        assert_eq!((all[0].line, all[0].column), (3, 8), "{outside}");
        assert!(all[0].message.contains("outside the study file's folder"));
        assert!(all[0]
            .hint
            .as_deref()
            .unwrap()
            .contains("allow_data_outside_folder = true"));
        let allowed = study(&format!(
            "[study]\ntitle = \"t\"\ndata = \"{outside}\"\nallow_data_outside_folder = true\n{DECISIONS}"
        ));
        assert!(allowed.data_path.ends_with("plots.csv"));
    }
    // Paths that stay inside need nothing, even with `..` steps that come back.
    for inside in [
        "plots.csv",
        "./data/plots.csv",
        "data/../plots.csv",
        "données été/parcelles.csv",
    ] {
        study(&format!(
            "[study]\ntitle = \"t\"\ndata = \"{inside}\"\n{DECISIONS}"
        ));
    }
}
