//! Sample conditions, the shared and per-model row policies, drop accounting and cluster codes.

mod common;

use common::*;
use specgrid_data::{assemble, load, DataWarning, DropReason};
use specgrid_study::{Comparison, Condition, ErrorChoice, RowPolicy, Transform, Value};

// Row 3 has visits = 0 (log undefined), row 5 misses area_ha.
const CSV: &str = "yield_t,area_ha,visits,region,adviser\n\
3.1,1.5,2,north,a\n\
4.2,2.0,3,south,b\n\
2.7,0.8,0,north,a\n\
5.9,3.2,7,east,c\n\
4.4,,2,south,b\n\
3.8,1.1,4,east,c\n\
6.3,4.0,9,north,a\n\
2.2,0.6,5,south,d\n";

fn rows_of(plan: &specgrid_study::Plan) -> Vec<Vec<usize>> {
    let a = assemble(plan, &load(plan).unwrap()).unwrap();
    a.designs.iter().map(|d| d.rows.clone()).collect()
}

#[test]
fn numeric_comparisons() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let cases = [
        (Comparison::Below, 4.0, vec![0, 1, 2, 4]),
        (Comparison::AtMost, 4.0, vec![0, 1, 2, 4, 5]),
        (Comparison::Above, 4.0, vec![3, 6, 7]),
        (Comparison::AtLeast, 4.0, vec![3, 5, 6, 7]),
        (Comparison::Equal, 2.0, vec![0, 4]),
        (Comparison::NotEqual, 2.0, vec![1, 2, 3, 5, 6, 7]),
    ];
    for (comparison, v, want) in cases {
        // Intercept-only model, so two kept rows are enough.
        let mut plan = simple_plan(&path, "yield_t", Vec::new());
        plan.samples[0].conditions = vec![Condition::Compare {
            column: "visits".into(),
            comparison,
            value: Value::Number(v),
        }];
        assert_eq!(rows_of(&plan), vec![want], "{comparison:?} {v}");
    }
}

#[test]
fn text_conditions_and_sets() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("visits", Transform::Level)]);
    plan.samples = vec![
        sample(
            "north",
            vec![Condition::Compare {
                column: "region".into(),
                comparison: Comparison::Equal,
                value: Value::Text("north".into()),
            }],
        ),
        sample(
            "not north",
            vec![Condition::Compare {
                column: "region".into(),
                comparison: Comparison::NotEqual,
                value: Value::Text("north".into()),
            }],
        ),
        sample(
            "east or south",
            vec![Condition::InSet {
                column: "region".into(),
                levels: vec!["east".into(), "south".into()],
            }],
        ),
        sample(
            "not a or b",
            vec![Condition::NotInSet {
                column: "adviser".into(),
                levels: vec!["a".into(), "b".into()],
            }],
        ),
    ];
    plan.models = (0..4).map(|s| model(0, s, vec![0])).collect();
    assert_eq!(
        rows_of(&plan),
        vec![
            vec![0, 2, 6],
            vec![1, 3, 4, 5, 7],
            vec![1, 3, 4, 5, 7],
            vec![3, 5, 7]
        ]
    );
}

#[test]
fn quantile_drops_use_all_present_rows() {
    // visits over all 8 rows sorted: 0 2 2 3 4 5 7 9. Type-7 (Hyndman & Fan 1996) quantile at
    // p = 0.75: h = 7·0.75 = 5.25 → 5 + 0.25·(7 − 5) = 5.5, so rows with visits > 5.5 go.
    // At p = 0.25: h = 1.75 → 2 + 0.75·(2 − 2) = 2, so rows with visits < 2 go.
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("visits", Transform::Level)]);
    plan.samples[0].conditions = vec![Condition::DropAboveQuantile {
        column: "visits".into(),
        quantile: 0.75,
    }];
    assert_eq!(rows_of(&plan), vec![vec![0, 1, 2, 4, 5, 7]]);
    plan.samples[0].conditions = vec![Condition::DropBelowQuantile {
        column: "visits".into(),
        quantile: 0.25,
    }];
    assert_eq!(rows_of(&plan), vec![vec![0, 1, 3, 4, 5, 6, 7]]);
}

/// Two models: one with log(visits), one with area_ha. Shared rows drop row 2 (log of 0) and
/// row 4 (area missing) for both; per-model rows let each keep what it can use.
fn two_model_plan(path: &std::path::Path, policy: RowPolicy) -> specgrid_study::Plan {
    let mut plan = plan(
        path,
        vec![outcome("yield_t", Transform::Level)],
        vec![
            num("visits", Transform::Log),
            num("area_ha", Transform::Level),
        ],
        vec![sample("all", Vec::new())],
        vec![model(0, 0, vec![0]), model(0, 0, vec![1])],
    );
    plan.row_policy = policy;
    plan
}

#[test]
fn shared_rows_use_one_row_set() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let plan = two_model_plan(&path, RowPolicy::SharedRows);
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    assert_eq!(a.designs.len(), 1);
    let d = &a.designs[0];
    assert_eq!(d.rows, vec![0, 1, 3, 5, 6, 7]);
    assert_eq!(d.models, vec![0, 1]);
    assert_eq!(d.account.rows_read, 8);
    assert_eq!(d.account.rows_in_sample, 8);
    assert_eq!(d.account.rows_kept, 6);
    assert!(d.account.dropped.iter().any(|c| c.rows == 1
        && c.reason
            == DropReason::Missing {
                column: "area_ha".into()
            }));
    assert!(d.account.dropped.iter().any(|c| c.rows == 1
        && matches!(&c.reason, DropReason::Undefined { term, .. } if term == "log(visits)")));
    let text: Vec<String> = a.warnings.iter().map(|w| w.to_string()).collect();
    assert!(
        text.iter().any(|t| t.contains(
            "log(visits) is undefined for 1 row with visits ≤ 0; those rows are dropped; consider log1p or asinh"
        )),
        "{text:?}"
    );
    assert!(a.warnings.contains(&DataWarning::MissingValues {
        sample: "all".into(),
        column: "area_ha".into(),
        rows: 1
    }));
}

#[test]
fn per_model_rows_group_models_by_row_set() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = two_model_plan(&path, RowPolicy::PerModel);
    // A third model with the same rows as the first shares its design.
    plan.models.push(model(0, 0, vec![0]));
    plan.models[2].id = "third".into();
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    assert_eq!(a.designs.len(), 2);
    let log_design = &a.designs[0];
    assert_eq!(log_design.models, vec![0, 2]);
    assert_eq!(log_design.rows, vec![0, 1, 3, 4, 5, 6, 7]);
    assert_eq!(
        log_design.design.x_names,
        vec!["(intercept)", "log(visits)"]
    );
    assert_eq!(log_design.term_columns, vec![Some(1..2), None]);
    let area_design = &a.designs[1];
    assert_eq!(area_design.models, vec![1]);
    assert_eq!(area_design.rows, vec![0, 1, 2, 3, 5, 6, 7]);
    assert!(area_design.model_spec(&plan.models[0]).is_err());
    assert_eq!(a.design_for_model(1).unwrap().rows.len(), 7);
}

#[test]
fn cluster_codes_follow_error_choices() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("visits", Transform::Level)]);
    plan.errors = vec![
        ErrorChoice::Hc1,
        ErrorChoice::Cluster {
            column: "region".into(),
        },
        ErrorChoice::TwoWayCluster {
            first: "adviser".into(),
            second: "region".into(),
        },
    ];
    plan.samples[0].conditions = vec![Condition::NotInSet {
        column: "adviser".into(),
        levels: vec!["b".into()],
    }];
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    assert_eq!(a.cluster_columns, vec!["region", "adviser"]);
    let c = &a.designs[0].design.clusters;
    // Rows kept: 0 2 3 5 6 7 with regions north north east east north south → east=0 north=1 south=2.
    assert_eq!(c[0].name, "region");
    assert_eq!(c[0].codes, vec![1, 1, 0, 0, 1, 2]);
    assert_eq!(c[0].count, 3);
    // Advisers a a c c a d; b is not in the rows, so codes stay dense: a=0 c=1 d=2.
    assert_eq!(c[1].codes, vec![0, 0, 1, 1, 0, 2]);
    assert_eq!(c[1].count, 3);
    assert_eq!(
        a.covariance(&plan.errors[2]),
        Some(specgrid_ols::Covariance::TwoWayCluster {
            first: 1,
            second: 0
        })
    );
}

#[test]
fn per_model_merges_different_columns_with_equal_rows() {
    // log(area_ha) and area_ha are valid on the same rows (area is positive where present), so
    // their models share one design even though their columns differ.
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = plan(
        &path,
        vec![outcome("yield_t", Transform::Level)],
        vec![
            num("area_ha", Transform::Log),
            num("area_ha", Transform::Level),
        ],
        vec![sample("all", Vec::new())],
        vec![model(0, 0, vec![0]), model(0, 0, vec![1])],
    );
    plan.row_policy = RowPolicy::PerModel;
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    assert_eq!(a.designs.len(), 1);
    assert_eq!(a.designs[0].models, vec![0, 1]);
    assert_eq!(
        a.designs[0].design.x_names,
        vec!["(intercept)", "log(area_ha)", "area_ha"]
    );
    assert_eq!(a.designs[0].rows, vec![0, 1, 2, 3, 5, 6, 7]);
}
