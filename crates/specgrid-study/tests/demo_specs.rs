//! The shipped study files load, plan to the documented sizes, and match the documentation.

use std::path::PathBuf;

use specgrid_study::{load_study, plan, Condition, ErrorChoice, RowPolicy, Term, Transform};

fn repo(path: &str) -> PathBuf {
    PathBuf::from(
        std::env::var("CARGO_MANIFEST_DIR")
            .unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").to_string()),
    )
    .join("../..")
    .join(path)
}

#[test]
fn the_orchard_study_plans_to_its_documented_size() {
    let study = load_study(&repo("specs/orchards.toml")).unwrap();
    assert_eq!(
        study.data_path,
        repo("specs").join("../demo-data/orchards.csv")
    );
    let p = plan(&study).unwrap();
    // Product rule: 2 outcome × 6 focus × 3 plot size × 3 irrigation × 2 soil × 4 grouping × 3 samples.
    assert_eq!(p.size_before_exclusions, 2 * 6 * 3 * 3 * 2 * 4 * 3);
    // The skip rule fixes focus, grouping and sample: 2 × 3 × 3 × 2 = 36 models skipped.
    assert_eq!(p.size_after_exclusions, 2592 - 36);
    assert_eq!(p.models.len(), 2556);
    // Shared rows: the two outcome forms share each factorisation.
    assert_eq!(p.row_policy, RowPolicy::SharedRows);
    assert_eq!(p.factorisations, 2556 / 2);
    assert_eq!(p.baseline, Some(0));
    assert_eq!(p.errors.len(), 5);
    assert!(p.errors.contains(&ErrorChoice::TwoWayCluster {
        first: "village".into(),
        second: "variety".into()
    }));
    assert_eq!(p.cluster_columns(), ["village", "variety"]);
    // The interaction is tracked in the models that include it, and only there.
    let interaction = p
        .terms
        .iter()
        .position(|t| matches!(t, Term::Product(..)) && t.columns().contains(&"visits"))
        .unwrap();
    for m in &p.models {
        assert_eq!(
            m.terms.contains(&interaction),
            m.tracked.contains(&interaction)
        );
    }
    assert!(p.samples[1]
        .conditions
        .iter()
        .any(|c| matches!(c, Condition::DropAboveQuantile { column, quantile } if column == "area_ha" && *quantile == 0.99)));
}

#[test]
fn the_wampler1_study_is_one_degree_five_model() {
    let p = plan(&load_study(&repo("specs/nist-wampler1.toml")).unwrap()).unwrap();
    assert_eq!(p.models.len(), 1);
    let m = &p.models[0];
    let powers: Vec<Transform> = m
        .terms
        .iter()
        .map(|&t| match &p.terms[t] {
            Term::Numeric { transform, .. } => transform.clone(),
            other => panic!("unexpected term {other:?}"),
        })
        .collect();
    assert_eq!(
        powers,
        [
            Transform::Level,
            Transform::Power(2),
            Transform::Power(3),
            Transform::Power(4),
            Transform::Power(5)
        ]
    );
    assert_eq!(m.tracked, m.terms);
    assert!(m.intercept);
}

#[test]
fn the_documentation_shows_the_demo_study_verbatim() {
    let docs = std::fs::read_to_string(repo("docs/study-file.md")).unwrap();
    let spec = std::fs::read_to_string(repo("specs/orchards.toml")).unwrap();
    assert!(
        docs.contains(&spec),
        "update the example in docs/study-file.md"
    );
}
