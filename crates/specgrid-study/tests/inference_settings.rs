//! `[inference]` and the wild-bootstrap error choice: defaults, every setting read, the long
//! model filled in from the decisions' kinds, the blocks each model brings, and positioned
//! problems with hints for every mistake.

mod common;

use common::{problems, study, HEADER};
use specgrid_study::{plan, BlockResolver, BootstrapDraws, ErrorChoice};

const GRID: &str = r#"[outcome]
column = "y"
[focus]
column = "x"
forms = ["level", "quadratic"]

[[controls]]
name = "basics"
role = "always"
terms = ["age"]

[[controls]]
name = "size"
role = "optional"
terms = ["area"]

[[controls]]
name = "grouping"
role = "alternatives"
include_none = true
options = [
  { name = "district", terms = [{ categorical = "district" }] },
  { name = "village", terms = [{ absorb = "village" }] },
]
"#;

#[test]
fn absent_table_asks_for_nothing() {
    let s = study(&format!("{HEADER}{GRID}"));
    assert_eq!(s.inference, Default::default());
}

#[test]
fn every_setting_is_read_and_the_long_model_is_filled_in() {
    let s = study(&format!(
        "{HEADER}{GRID}[inference]\nshort_model = [\"basics\"]\njoint_test = {{ draws = 99, cluster = \"village\", weights = \"webb\" }}\nstability = {{ r_max_factor = 1.5 }}\ndecomposition = {{ long_model = {{ focus = \"quadratic\" }} }}\n"
    ));
    let inf = &s.inference;
    assert_eq!(inf.short_model, vec!["basics".to_string()]);
    let j = inf.joint_test.as_ref().unwrap();
    assert_eq!(
        (j.draws, j.cluster.as_deref(), j.weights),
        (99, Some("village"), BootstrapDraws::Webb)
    );
    assert_eq!(inf.stability.unwrap().r_max_factor, 1.5);
    // Decisions: outcome, focus, size, grouping, sample. Named focus = quadratic; the optional
    // block in; the alternatives at their first option after `none`; outcome, sample baseline.
    assert_eq!(
        inf.decomposition.as_ref().unwrap().long_model,
        vec![0, 1, 1, 1, 0]
    );
    // `true` means the defaults.
    let d = study(&format!(
        "{HEADER}{GRID}[inference]\njoint_test = true\nstability = true\ndecomposition = true\n"
    ));
    assert_eq!(d.inference.joint_test.as_ref().unwrap().draws, 500);
    assert_eq!(d.inference.stability.unwrap().r_max_factor, 1.3);
    assert!(d.inference.short_model.is_empty());
}

#[test]
fn blocks_say_which_terms_each_block_brings() {
    let s = study(&format!("{HEADER}{GRID}"));
    let p = plan(&s).unwrap();
    let resolver = BlockResolver::new(&s, &p);
    // The model with size in and the district grouping.
    let m = p
        .models
        .iter()
        .find(|m| m.choices[2] == 1 && m.choices[3] == 1 && m.choices[1] == 0)
        .unwrap();
    let blocks = resolver.blocks(m);
    let names: Vec<&str> = blocks.iter().map(|b| b.name.as_str()).collect();
    assert_eq!(names, ["basics", "size", "grouping"]);
    let label = |t: usize| p.terms[t].label();
    assert_eq!(
        blocks[0]
            .terms
            .iter()
            .map(|&t| label(t))
            .collect::<Vec<_>>(),
        ["age"]
    );
    assert_eq!(
        blocks[1]
            .terms
            .iter()
            .map(|&t| label(t))
            .collect::<Vec<_>>(),
        ["area"]
    );
    assert_eq!(
        blocks[2]
            .terms
            .iter()
            .map(|&t| label(t))
            .collect::<Vec<_>>(),
        ["district[ref first]"]
    );
    assert_eq!(
        resolver
            .focus_terms(m)
            .iter()
            .map(|&t| label(t))
            .collect::<Vec<_>>(),
        ["x"]
    );
    // Every term of the model is the focus's or one block's, in model order.
    let mut all = resolver.focus_terms(m);
    all.extend(blocks.iter().flat_map(|b| b.terms.clone()));
    assert_eq!(all, m.terms);
}

#[test]
fn wild_bootstrap_choice_is_read_with_defaults() {
    let s = study(&format!(
        "{HEADER}{GRID}[errors]\nchoices = [{{ wild_bootstrap = \"district\" }}, {{ wild_bootstrap = \"district\", weights = \"webb\", draws = 999 }}]\n"
    ));
    assert_eq!(
        s.errors,
        vec![
            ErrorChoice::WildCluster {
                column: "district".into(),
                weights: BootstrapDraws::Rademacher,
                draws: 9_999
            },
            ErrorChoice::WildCluster {
                column: "district".into(),
                weights: BootstrapDraws::Webb,
                draws: 999
            },
        ]
    );
    assert_eq!(s.errors[0].label(), "wild:district");
    assert_eq!(s.errors[1].label(), "wild-webb:district");
}

/// (line, message, hint) of every problem.
fn issues(text: &str) -> Vec<(usize, String, String)> {
    problems(text)
        .into_iter()
        .map(|p| (p.line, p.message, p.hint.unwrap_or_default()))
        .collect()
}

#[test]
fn mistakes_are_positioned_with_hints() {
    let base = format!("{HEADER}{GRID}");
    let line_of = |extra: &str| base.lines().count() + extra.lines().count();
    let cases: [(&str, &str, &str); 8] = [
        (
            "[inference]\nshort_model = [\"basic\"]\n",
            "`short_model` names `basic`, which is not a control block",
            "basics",
        ),
        (
            "[inference]\ndecomposition = { long_model = { sizes = \"in\" } }\n",
            "names `sizes`, which is not a decision",
            "size",
        ),
        (
            "[inference]\ndecomposition = { long_model = { size = \"inn\" } }\n",
            "`inn` is not an option of decision `size`",
            "in",
        ),
        (
            "[inference]\njoint_test = { draws = 5 }\n",
            "must be between 19 and 1000000",
            "",
        ),
        (
            "[inference]\njoint_test = \"yes\"\n",
            "must be true, false or a table",
            "",
        ),
        (
            "[inference]\nstability = { r_max_factor = 0.9 }\n",
            "must be a number above 1",
            "1.3",
        ),
        (
            "[inference]\njoint_test = { weights = \"web\" }\n",
            "unknown bootstrap weights `web`",
            "webb",
        ),
        (
            "[errors]\nchoices = [{ wild_bootstrap = \"district\", draw = 99 }]\n",
            "unknown key `draw`",
            "draws",
        ),
    ];
    for (extra, message, hint) in cases {
        let found = issues(&format!("{base}{extra}"));
        assert!(
            found.iter().any(|(line, m, h)| *line == line_of(extra)
                && m.contains(message)
                && h.contains(hint)),
            "{extra}: {found:?}"
        );
    }
}
