//! Categorical indicators (reference dropped), product columns, and names with spaces and
//! Unicode. Expected columns are written out by hand from the definition of a dummy (indicator)
//! coding: one 0/1 column per level other than the reference (common practice).

mod common;

use common::*;
use specgrid_data::{assemble, load, DataWarning};
use specgrid_study::{Condition, Term, Transform, Value};

const CSV: &str = "yield_t,variety,irrigated,visits,block\n\
3.1,nimbus,1,2,10\n\
4.2,cirrus,0,3,2\n\
2.7,nimbus,0,1,2\n\
5.9,stratus,1,7,10\n\
4.4,cirrus,1,2,2\n\
3.8,stratus,0,4,10\n\
6.3,nimbus,1,9,2\n";

#[test]
fn text_categorical_drops_first_sorted_level() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let plan = simple_plan(&path, "yield_t", vec![cat("variety", None)]);
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    // Levels sorted: cirrus (reference), nimbus, stratus.
    assert_eq!(
        d.x_names,
        vec!["(intercept)", "variety=nimbus", "variety=stratus"]
    );
    assert_eq!(x_col(d, 0), vec![1.0; 7]);
    assert_eq!(x_col(d, 1), vec![1., 0., 1., 0., 0., 0., 1.]);
    assert_eq!(x_col(d, 2), vec![0., 0., 0., 1., 0., 1., 0.]);
    assert_eq!(a.designs[0].term_columns, vec![Some(1..3)]);
}

#[test]
fn named_reference_and_numeric_codes_sort_numerically() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let plan = simple_plan(
        &path,
        "yield_t",
        vec![cat("variety", Some("stratus")), cat("block", None)],
    );
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    // block codes 2 and 10: numeric order puts 2 first (text order would put "10" first).
    assert_eq!(
        d.x_names,
        vec![
            "(intercept)",
            "variety=cirrus",
            "variety=nimbus",
            "block=10"
        ]
    );
    assert_eq!(x_col(d, 3), vec![1., 0., 0., 1., 0., 1., 0.]);
}

#[test]
fn levels_absent_from_sample_give_no_column() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![cat("variety", None)]);
    plan.samples[0].conditions.push(Condition::NotInSet {
        column: "variety".into(),
        levels: vec!["stratus".into()],
    });
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    assert_eq!(d.x_names, vec!["(intercept)", "variety=nimbus"]);
    assert_eq!(a.designs[0].account.rows_kept, 5);
}

#[test]
fn product_of_numeric_and_categorical() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let product = Term::Product(
        Box::new(num("visits", Transform::Level)),
        Box::new(cat("irrigated", None)),
    );
    let plan = simple_plan(&path, "yield_t", vec![product]);
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    assert_eq!(d.x_names, vec!["(intercept)", "visits × irrigated=1"]);
    // visits · 1{irrigated = 1}
    assert_eq!(x_col(d, 1), vec![2., 0., 0., 7., 2., 0., 9.]);
}

#[test]
fn product_of_two_categoricals_has_one_column_per_pair() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let product = Term::Product(
        Box::new(cat("variety", None)),
        Box::new(cat("irrigated", None)),
    );
    let plan = simple_plan(&path, "yield_t", vec![product]);
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    assert_eq!(
        d.x_names,
        vec![
            "(intercept)",
            "variety=nimbus × irrigated=1",
            "variety=stratus × irrigated=1"
        ]
    );
    assert_eq!(x_col(d, 1), vec![1., 0., 0., 0., 0., 0., 1.]);
    assert_eq!(x_col(d, 2), vec![0., 0., 0., 1., 0., 0., 0.]);
}

#[test]
fn product_of_numerics_is_elementwise() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let product = Term::Product(
        Box::new(num("visits", Transform::Power(2))),
        Box::new(num("block", Transform::Level)),
    );
    let plan = simple_plan(&path, "yield_t", vec![product]);
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    assert_eq!(d.x_names[1], "visits^2 × block");
    assert_eq!(x_col(d, 1), vec![40., 18., 2., 490., 8., 160., 162.]);
}

#[test]
fn single_level_categorical_warns_and_adds_no_columns() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = simple_plan(
        &path,
        "yield_t",
        vec![num("visits", Transform::Level), cat("variety", None)],
    );
    plan.samples[0].conditions.push(Condition::Compare {
        column: "variety".into(),
        comparison: specgrid_study::Comparison::Equal,
        value: Value::Text("nimbus".into()),
    });
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0];
    assert_eq!(d.design.x_names, vec!["(intercept)", "visits"]);
    assert_eq!(d.term_columns, vec![Some(1..2), Some(2..2)]);
    assert!(a.warnings.contains(&DataWarning::SingleLevel {
        sample: "all".into(),
        column: "variety".into(),
        level: "nimbus".into(),
        rows: 3,
    }));
    let text = a
        .warnings
        .iter()
        .map(|w| w.to_string())
        .collect::<Vec<_>>()
        .join("\n");
    assert!(
        text.contains("`variety` has the single level `nimbus` in all 3 rows"),
        "{text}"
    );
}

#[test]
fn unicode_and_spaces_in_column_names() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "Ertrag (t/ha),Fläche in ha,sorte ✓\n\
               3.0,1.0,äpfel\n\
               4.5,2.0,birnen\n\
               2.5,0.5,äpfel\n\
               5.0,3.0,birnen\n";
    let path = write(dir.path(), "obstgärten daten.csv", csv);
    let plan = simple_plan(
        &path,
        "Ertrag (t/ha)",
        vec![num("Fläche in ha", Transform::Log), cat("sorte ✓", None)],
    );
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0].design;
    // Text order by code point: "birnen" < "äpfel", so "birnen" is the reference.
    assert_eq!(
        d.x_names,
        vec!["(intercept)", "log(Fläche in ha)", "sorte ✓=äpfel"]
    );
    assert_eq!(d.y_names, vec!["Ertrag (t/ha)"]);
    assert_eq!(x_col(d, 2), vec![1., 0., 1., 0.]);
}

#[test]
fn model_spec_maps_terms_to_union_columns() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "o.csv", CSV);
    let mut plan = simple_plan(
        &path,
        "yield_t",
        vec![num("visits", Transform::Level), cat("variety", None)],
    );
    // A second model with only the categorical term, tracked.
    let mut second = model(0, 0, vec![1]);
    second.intercept = false;
    plan.models.push(second);
    let a = assemble(&plan, &load(&plan).unwrap()).unwrap();
    let d = &a.designs[0];
    assert_eq!(d.models, vec![0, 1]);
    let spec = d.model_spec(&plan.models[0]).unwrap();
    assert_eq!(spec.columns, vec![0, 1, 2, 3]);
    assert_eq!(spec.tracked, vec![1]);
    assert_eq!(spec.outcome, 0);
    let spec = d.model_spec(&plan.models[1]).unwrap();
    assert_eq!(spec.columns, vec![2, 3]);
    assert_eq!(spec.tracked, vec![2, 3]);
}
