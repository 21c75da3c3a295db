//! Every data error: a clear message naming the file, the column and the row count, never a
//! panic.

mod common;

use common::*;
use specgrid_data::{assemble, load, DataError};
use specgrid_study::{Comparison, Condition, Transform, Value};

const CSV: &str = "yield_t,area_ha,visits,variety\n\
3.1,1.5,2,nimbus\n\
4.2,2.0,3,cirrus\n\
2.7,0.8,1,nimbus\n\
5.9,3.2,7,cirrus\n";

fn message(err: DataError) -> String {
    err.to_string()
}

#[test]
fn unknown_column_suggests_close_names() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let plan = simple_plan(
        &path,
        "yield_t",
        vec![num("area_hectares", Transform::Level)],
    );
    let err = load(&plan).unwrap_err();
    assert!(matches!(&err, DataError::UnknownColumn { column, .. } if column == "area_hectares"));
    let m = message(err);
    assert!(m.contains("orchards.csv"), "{m}");
    assert!(m.contains("no column named `area_hectares`"), "{m}");
    assert!(m.contains("did you mean `area_ha`"), "{m}");
    assert!(m.contains("4 columns"), "{m}");
}

#[test]
fn unknown_column_lists_columns_when_nothing_is_close() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let plan = simple_plan(&path, "yield_t", vec![num("zzzz", Transform::Level)]);
    let m = message(load(&plan).unwrap_err());
    assert!(
        m.contains("`yield_t`, `area_ha`, `visits`, `variety`"),
        "{m}"
    );
}

#[test]
fn non_numeric_cells_are_counted_with_first_row() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "yield_t,area_ha\n3.1,1.5\n4.2,two\n2.7,\n5.9,NA\n1.0,3\n2.0,n/a\n";
    let path = write(dir.path(), "orchards.csv", csv);
    let plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    let err = load(&plan).unwrap_err();
    let m = message(err.clone());
    match err {
        DataError::NonNumeric {
            column,
            rows,
            first,
            value,
            ..
        } => {
            assert_eq!(column, "area_ha");
            assert_eq!(rows, 2, "`two` and `n/a`; blank and NA are missing");
            assert_eq!(first.row, 1);
            assert_eq!(value, "two");
        }
        other => panic!("unexpected {other:?}"),
    }
    assert!(m.contains("2 rows"), "{m}");
    assert!(m.contains("data row 2 (line 3)"), "{m}");
}

#[test]
fn infinite_values_are_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "yield_t,area_ha\n3.1,1.5\n4.2,inf\n2.7,1\n5.9,-inf\n";
    let path = write(dir.path(), "orchards.csv", csv);
    let plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    let err = load(&plan).unwrap_err();
    assert!(matches!(&err, DataError::Infinite { column, rows: 2, .. } if column == "area_ha"));
    let m = message(err);
    assert!(
        m.contains("`area_ha`") && m.contains("2 rows") && m.contains("data row 2"),
        "{m}"
    );
}

#[test]
fn outcome_without_variance() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "yield_t,area_ha\n3,1.5\n3,2\n3,1\n3,4\n";
    let path = write(dir.path(), "orchards.csv", csv);
    let plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    let err = assemble(&plan, &load(&plan).unwrap()).unwrap_err();
    let m = message(err.clone());
    assert!(matches!(err, DataError::NoOutcomeVariance { rows: 4, .. }));
    assert!(
        m.contains("`yield_t`") && m.contains("4 rows") && m.contains("sample `all`"),
        "{m}"
    );
}

#[test]
fn sample_keeping_no_rows() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    plan.samples[0].conditions.push(Condition::Compare {
        column: "visits".into(),
        comparison: Comparison::Above,
        value: Value::Number(100.0),
    });
    let err = assemble(&plan, &load(&plan).unwrap()).unwrap_err();
    let m = message(err.clone());
    assert!(matches!(err, DataError::EmptySample { rows_read: 4, .. }));
    assert!(
        m.contains("keeps 0 of 4 rows") && m.contains("`visits`"),
        "{m}"
    );
}

#[test]
fn all_rows_undefined_names_the_transform() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "yield_t,visits\n3,0\n4,0\n5,-1\n";
    let path = write(dir.path(), "orchards.csv", csv);
    let plan = simple_plan(&path, "yield_t", vec![num("visits", Transform::Log)]);
    let m = message(assemble(&plan, &load(&plan).unwrap()).unwrap_err());
    assert!(
        m.contains("log(visits) undefined in 3 rows with visits ≤ 0"),
        "{m}"
    );
}

#[test]
fn too_few_rows_for_the_largest_model() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    // intercept + area + visits + variety=nimbus = 4 coefficients on 4 rows.
    let plan = simple_plan(
        &path,
        "yield_t",
        vec![
            num("area_ha", Transform::Level),
            num("visits", Transform::Level),
            cat("variety", None),
        ],
    );
    let err = assemble(&plan, &load(&plan).unwrap()).unwrap_err();
    let m = message(err.clone());
    assert!(
        matches!(
            err,
            DataError::TooFewRows {
                rows: 4,
                columns: 4,
                ..
            }
        ),
        "{m}"
    );
    assert!(
        m.contains("keeps 4 rows") && m.contains("4 coefficients"),
        "{m}"
    );
}

#[test]
fn single_level_focus_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![cat("variety", None)]);
    plan.samples[0].conditions.push(Condition::InSet {
        column: "variety".into(),
        levels: vec!["nimbus".into()],
    });
    let err = assemble(&plan, &load(&plan).unwrap()).unwrap_err();
    let m = message(err.clone());
    assert!(
        matches!(err, DataError::SingleLevelFocus { rows: 2, .. }),
        "{m}"
    );
    assert!(
        m.contains("`variety`") && m.contains("`nimbus`") && m.contains("2 rows"),
        "{m}"
    );
}

#[test]
fn unknown_reference_level() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let plan = simple_plan(&path, "yield_t", vec![cat("variety", Some("stratus"))]);
    let m = message(assemble(&plan, &load(&plan).unwrap()).unwrap_err());
    assert!(
        m.contains("`stratus`") && m.contains("`variety`") && m.contains("`cirrus`, `nimbus`"),
        "{m}"
    );
}

#[test]
fn constant_column_cannot_be_standardized() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "yield_t,visits\n3,2\n4,2\n5,2\n6,2\n";
    let path = write(dir.path(), "orchards.csv", csv);
    let plan = simple_plan(
        &path,
        "yield_t",
        vec![num("visits", Transform::Standardize)],
    );
    let m = message(assemble(&plan, &load(&plan).unwrap()).unwrap_err());
    assert!(
        m.contains("standardized(visits)") && m.contains("4 rows"),
        "{m}"
    );
}

#[test]
fn overflowing_power_is_an_error_not_a_nan() {
    let dir = tempfile::tempdir().unwrap();
    let csv = "yield_t,visits\n3,1e300\n4,2\n5,3\n6,4\n";
    let path = write(dir.path(), "orchards.csv", csv);
    let plan = simple_plan(&path, "yield_t", vec![num("visits", Transform::Power(2))]);
    let err = assemble(&plan, &load(&plan).unwrap()).unwrap_err();
    let m = message(err.clone());
    assert!(
        matches!(err, DataError::NonFiniteResult { rows: 1, .. }),
        "{m}"
    );
    assert!(m.contains("visits^2") && m.contains("data row 1"), "{m}");
}

#[test]
fn ordering_against_text_is_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    plan.samples[0].conditions.push(Condition::Compare {
        column: "variety".into(),
        comparison: Comparison::Below,
        value: Value::Text("m".into()),
    });
    let m = message(assemble(&plan, &load(&plan).unwrap()).unwrap_err());
    assert!(
        m.contains("`variety`") && m.contains("only equal / not-equal"),
        "{m}"
    );
}

#[test]
fn numeric_condition_on_text_column() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.csv", CSV);
    let mut plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    plan.samples[0].conditions.push(Condition::Compare {
        column: "variety".into(),
        comparison: Comparison::Below,
        value: Value::Number(3.0),
    });
    let m = message(load(&plan).unwrap_err());
    assert!(
        m.contains("`variety`") && m.contains("4 rows") && m.contains("`nimbus`"),
        "{m}"
    );
}

#[test]
fn unsupported_extension_and_missing_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "orchards.xlsx", CSV);
    let plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    let m = message(load(&plan).unwrap_err());
    assert!(
        m.contains("orchards.xlsx") && m.contains(".csv") && m.contains(".parquet"),
        "{m}"
    );

    let plan = simple_plan(&dir.path().join("gone.csv"), "yield_t", vec![]);
    let m = message(load(&plan).unwrap_err());
    assert!(m.contains("gone.csv") && m.contains("no such file"), "{m}");
}

#[test]
fn malformed_files_are_errors() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "broken.parquet", "this is not parquet");
    let plan = simple_plan(&path, "yield_t", vec![]);
    let err = load(&plan).unwrap_err();
    assert!(matches!(err, DataError::Unreadable { .. }), "{err:?}");
    assert!(err.to_string().contains("broken.parquet"));

    let path = write(dir.path(), "ragged.csv", "yield_t,area_ha\n1,2\n3,4,5,6\n");
    let plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    let err = load(&plan).unwrap_err();
    assert!(matches!(err, DataError::Unreadable { .. }), "{err:?}");
    let m = err.to_string();
    assert!(m.contains("ragged.csv") && m.contains("CSV"), "{m}");
}

#[test]
fn empty_file_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "empty.csv", "yield_t,area_ha\n");
    let plan = simple_plan(&path, "yield_t", vec![num("area_ha", Transform::Level)]);
    let m = message(assemble(&plan, &load(&plan).unwrap()).unwrap_err());
    assert!(
        m.contains("keeps 0 of 0 rows") && m.contains("no data rows"),
        "{m}"
    );
}

#[test]
fn counts_read_with_thousands_separators() {
    use specgrid_data::error::{fmt_count, fmt_rows};
    assert_eq!(fmt_count(0), "0");
    assert_eq!(fmt_count(999), "999");
    assert_eq!(fmt_count(2345), "2,345");
    assert_eq!(fmt_count(1234567), "1,234,567");
    assert_eq!(fmt_rows(1), "1 row");
    assert_eq!(fmt_rows(2345), "2,345 rows");
}
