//! Grid sizes in full and nested mode, skip rules, and the size limit.
//! Expected counts follow the product rule of counting and inclusion–exclusion (common
//! practice, elementary combinatorics); where a count is large the test also compares the
//! planner's closed-form count with a brute-force walk done here.

mod common;

use common::{optional_blocks, study, HEADER};
use specgrid_study::{count_grid, plan, DimensionKind};

fn text(body: &str) -> String {
    format!("{HEADER}{body}")
}

const DECISIONS: &str = r#"
[outcome]
column = "y"
forms = ["level", "log", "asinh"]
[focus]
column = "x"
forms = ["level", "quadratic"]
[[controls]]
name = "always"
role = "always"
terms = ["a"]
[[controls]]
name = "size"
role = "optional"
terms = [{ column = "s", form = "log" }]
[[controls]]
name = "group"
role = "alternatives"
include_none = true
options = [{ name = "g1", terms = [{ categorical = "g1" }] }, { name = "g2", terms = [{ categorical = "g2" }] }]
[[controls]]
name = "soil"
role = "optional"
terms = ["ph"]
[[samples]]
name = "all"
[[samples]]
name = "flat"
keep = [{ column = "slope", at_most = 10 }]
"#;

#[test]
fn full_mode_is_the_product_of_option_counts() {
    // Product rule: 3 outcomes × 2 focus × 2 (size) × 3 (group: none, g1, g2) × 2 (soil) × 2 samples.
    let s = study(&text(DECISIONS));
    let p = plan(&s).unwrap();
    assert_eq!(p.size_before_exclusions, 3 * 2 * 2 * 3 * 2 * 2);
    assert_eq!(p.size_after_exclusions, 144);
    assert_eq!(p.models.len(), 144);
    let names: Vec<&str> = p.dimensions.iter().map(|d| d.name.as_str()).collect();
    assert_eq!(
        names,
        ["outcome", "focus", "size", "group", "soil", "sample"]
    );
    assert_eq!(p.dimensions[3].options, ["none", "g1", "g2"]);
    assert_eq!(p.dimensions[2].options, ["out", "in"]);
    // Every choice vector appears exactly once.
    let mut seen: Vec<Vec<usize>> = p.models.iter().map(|m| m.choices.clone()).collect();
    seen.sort();
    seen.dedup();
    assert_eq!(seen.len(), 144);
    // Baseline: the first option everywhere, i.e. the first model of the grid.
    assert_eq!(p.baseline, Some(0));
    assert!(p.models[0].choices.iter().all(|&c| c == 0));
}

#[test]
fn model_terms_follow_choices_focus_first_without_duplicates() {
    let s = study(&text(DECISIONS));
    let p = plan(&s).unwrap();
    // outcome=log, focus=quadratic, size=in, group=g2, soil=out, sample=flat
    let m = p
        .models
        .iter()
        .find(|m| m.choices == [1, 1, 1, 2, 0, 1])
        .unwrap();
    let labels: Vec<String> = m.terms.iter().map(|&t| p.terms[t].label()).collect();
    assert_eq!(labels, ["x", "x^2", "a", "log(s)", "g2[ref first]"]);
    let tracked: Vec<String> = m.tracked.iter().map(|&t| p.terms[t].label()).collect();
    assert_eq!(tracked, ["x", "x^2"]);
    assert_eq!(p.outcomes[m.outcome].column, "y");
    assert_eq!(p.samples[m.sample].name, "flat");
    assert_eq!(
        p.model_columns(m),
        ["y", "x", "a", "s", "g2"],
        "source columns in first-use order"
    );
}

#[test]
fn shared_factorisations_count_models_of_one_sample_and_term_set() {
    // Under shared rows the 3 outcome forms share one factorisation: 144 / 3 = 48 groups.
    let s = study(&text(DECISIONS));
    assert_eq!(plan(&s).unwrap().factorisations, 48);
    // Under per-model rows, level and asinh keep the same rows, log may drop some: 2 × 48.
    let per_model = text(DECISIONS).replace("seed = 7", "seed = 7\nrows = \"per-model\"");
    assert_eq!(plan(&study(&per_model)).unwrap().factorisations, 96);
}

#[test]
fn nested_mode_adds_optional_blocks_cumulatively() {
    let body = DECISIONS.to_string() + "[grid]\nmode = \"nested\"\n";
    let p = plan(&study(&text(&body))).unwrap();
    // Two optional blocks give three cumulative steps; alternatives stay their own decision:
    // 3 × 2 × 3 (steps) × 3 (group) × 2 samples.
    assert_eq!(p.size_before_exclusions, 3 * 2 * 3 * 3 * 2);
    assert_eq!(p.models.len(), 108);
    let controls = p.dimensions.iter().find(|d| d.name == "controls").unwrap();
    assert_eq!(controls.kind, DimensionKind::NestedControls);
    assert_eq!(controls.options, ["none", "size", "size + soil"]);
    // Step 1 includes size but not soil; step 2 both.
    let pos = p
        .dimensions
        .iter()
        .position(|d| d.name == "controls")
        .unwrap();
    for m in &p.models {
        let labels: Vec<String> = m.terms.iter().map(|&t| p.terms[t].label()).collect();
        let has = |l: &str| labels.iter().any(|x| x == l);
        assert_eq!(has("log(s)"), m.choices[pos] >= 1);
        assert_eq!(has("ph"), m.choices[pos] >= 2);
    }
}

#[test]
fn skip_rules_remove_exactly_the_matching_models() {
    // Expected by inclusion–exclusion, worked by hand.
    // Rule A: outcome=log & focus=quadratic → 1·1·2·3·2·2 = 24 models.
    // Rule B: group∈{g1,g2} & sample=flat → 3·2·2·2·2·1 = 48 models.
    // A∩B → 1·1·2·2·2·1 = 8. Union = 24 + 48 − 8 = 64; kept = 144 − 64 = 80.
    let body = DECISIONS.to_string()
        + "[grid]\nskip = [{ outcome = \"log\", focus = \"quadratic\" }, { group = [\"g1\", \"g2\"], sample = \"flat\" }]\n";
    let s = study(&text(&body));
    let p = plan(&s).unwrap();
    assert_eq!(p.size_before_exclusions, 144);
    assert_eq!(p.size_after_exclusions, 80);
    assert_eq!(p.models.len(), 80);
    let name = |m: &specgrid_study::PlannedModel, d: &str| {
        p.choice_names(m)
            .into_iter()
            .find(|(n, _)| *n == d)
            .unwrap()
            .1
            .to_string()
    };
    for m in &p.models {
        assert!(!(name(m, "outcome") == "log" && name(m, "focus") == "quadratic"));
        assert!(!(name(m, "group") != "none" && name(m, "sample") == "flat"));
    }
}

#[test]
fn many_overlapping_skip_rules_match_a_brute_force_count() {
    // Twelve optional blocks (4096 models) and overlapping rules; the closed-form count must
    // equal a direct walk over every choice vector done in this test.
    let body = "[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n".to_string()
        + &optional_blocks(12)
        + "[grid]\nskip = [\n"
        + "{ b0 = \"in\", b1 = \"in\" },\n{ b1 = \"in\", b2 = \"out\" },\n{ b3 = \"in\" , b0 = \"in\"},\n"
        + "{ b5 = \"out\", b6 = \"out\", b7 = \"in\" },\n{ b2 = [\"in\", \"out\"], b11 = \"in\" },\n{ b4 = \"in\", b9 = \"out\" },\n]\n";
    let s = study(&text(&body));
    let count = count_grid(&s).unwrap();
    assert_eq!(count.before_exclusions, 4096);
    let rules: [&[(usize, usize)]; 6] = [
        &[(0, 1), (1, 1)],
        &[(1, 1), (2, 0)],
        &[(3, 1), (0, 1)],
        &[(5, 0), (6, 0), (7, 1)],
        &[(11, 1)],
        &[(4, 1), (9, 0)],
    ];
    let mut kept = 0u128;
    for bits in 0u32..4096 {
        let block = |b: usize| ((bits >> b) & 1) as usize;
        if !rules.iter().any(|r| r.iter().all(|&(b, v)| block(b) == v)) {
            kept += 1;
        }
    }
    assert_eq!(count.after_exclusions, kept);
    assert_eq!(plan(&s).unwrap().models.len() as u128, kept);
}

#[test]
fn a_two_to_the_sixty_grid_is_refused_with_its_count() {
    // 60 optional blocks: 2^60 = 1152921504606846976 models (product rule). Counting is a
    // product, so this returns at once instead of enumerating.
    let s = study(&text(
        &("[outcome]\ncolumn = \"y\"\n[focus]\ncolumn = \"x\"\n".to_string()
            + &optional_blocks(60)),
    ));
    let count = count_grid(&s).unwrap();
    assert_eq!(count.before_exclusions, 1u128 << 60);
    let problems = plan(&s).unwrap_err();
    assert_eq!(problems.len(), 1);
    let message = problems[0].to_string();
    assert!(message.contains("1152921504606846976"), "{message}");
    assert!(message.contains("limit of 100000"), "{message}");
    assert!(problems[0].hint.as_deref().unwrap().contains("sample"));
}

#[test]
fn the_limit_is_enforced_and_points_at_the_limit_key() {
    let body = DECISIONS.to_string() + "[grid]\nlimit = 100\n";
    let problems = plan(&study(&text(&body))).unwrap_err();
    let p = &problems[0];
    assert!(p.message.contains("144 models"), "{p}");
    // HEADER has 4 lines, DECISIONS starts with an empty line: `limit` is on line 4 + 36 + 1.
    let line = text(&body)
        .lines()
        .position(|l| l.starts_with("limit"))
        .unwrap()
        + 1;
    assert_eq!((p.line, p.column), (line, 9));
}

#[test]
fn skip_rules_that_leave_nothing_are_refused() {
    let body = DECISIONS.to_string() + "[grid]\nskip = [{ sample = [\"all\", \"flat\"] }]\n";
    let problems = plan(&study(&text(&body))).unwrap_err();
    assert!(
        problems[0].message.contains("leave none of the 144"),
        "{}",
        problems[0]
    );
}

#[test]
fn nested_mode_steps_can_be_skipped_by_name() {
    // Skip the last step with the log outcome: 1 outcome × 2 focus × 1 step × 3 group × 2
    // samples = 12 of the 108 nested models.
    let body = DECISIONS.to_string()
        + "[grid]\nmode = \"nested\"\nskip = [{ controls = \"size + soil\", outcome = \"log\" }]\n";
    let p = plan(&study(&text(&body))).unwrap();
    assert_eq!(p.size_after_exclusions, 108 - 12);
    assert_eq!(p.models.len(), 96);
}

#[test]
fn nested_mode_without_optional_blocks_has_no_controls_decision() {
    let body = DECISIONS.replace("role = \"optional\"", "role = \"always\"")
        + "[grid]\nmode = \"nested\"\n";
    let p = plan(&study(&text(&body))).unwrap();
    assert!(p.dimensions.iter().all(|d| d.name != "controls"));
    // 3 × 2 × 3 (group) × 2 samples.
    assert_eq!(p.models.len(), 36);
}
