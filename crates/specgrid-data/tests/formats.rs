//! CSV and Parquet hold the same table → identical designs; the file fingerprint.

mod common;

use common::*;
use polars::prelude::*;
use specgrid_data::{assemble, fingerprint, load};
use specgrid_study::{Condition, ErrorChoice, Term, Transform, Value};

fn orchard_frame() -> DataFrame {
    df!(
        "yield t" => [3.1, 4.2, 2.7, 5.9, 4.4, 3.8, 6.3, 2.2, 5.0, 4.9],
        "area_ha" => [Some(1.5), Some(2.0), Some(0.8), Some(3.2), None, Some(1.1), Some(4.0), Some(0.6), Some(2.9), Some(3.5)],
        "visits" => [0i64, 3, 1, 7, 2, 4, 9, 5, 6, 8],
        "variety" => ["nimbus", "cirrus", "nimbus", "stratus", "cirrus", "stratus", "nimbus", "cirrus", "stratus", "nimbus"],
        "adviser" => [1i64, 2, 1, 3, 2, 3, 1, 4, 4, 2]
    )
    .unwrap()
}

fn study(path: &std::path::Path) -> specgrid_study::Plan {
    let mut plan = simple_plan(
        path,
        "yield t",
        vec![
            num("visits", Transform::Log1p),
            num("area_ha", Transform::Standardize),
            cat("variety", None),
            Term::Product(
                Box::new(num("visits", Transform::Level)),
                Box::new(cat("variety", Some("nimbus"))),
            ),
        ],
    );
    plan.outcomes.push(outcome("yield t", Transform::Log));
    plan.errors = vec![ErrorChoice::Cluster {
        column: "adviser".into(),
    }];
    plan.samples[0].conditions = vec![Condition::Compare {
        column: "visits".into(),
        comparison: specgrid_study::Comparison::Below,
        value: Value::Number(9.0),
    }];
    plan
}

#[test]
fn csv_and_parquet_give_identical_designs() {
    let dir = tempfile::tempdir().unwrap();
    let csv_path = dir.path().join("orchards.csv");
    let parquet_path = dir.path().join("orchards.parquet");
    let mut frame = orchard_frame();
    CsvWriter::new(std::fs::File::create(&csv_path).unwrap())
        .finish(&mut frame)
        .unwrap();
    ParquetWriter::new(std::fs::File::create(&parquet_path).unwrap())
        .finish(&mut frame)
        .unwrap();

    let from_csv = {
        let plan = study(&csv_path);
        assemble(&plan, &load(&plan).unwrap()).unwrap()
    };
    let from_parquet = {
        let plan = study(&parquet_path);
        assemble(&plan, &load(&plan).unwrap()).unwrap()
    };
    let (a, b) = (&from_csv.designs[0], &from_parquet.designs[0]);
    assert_eq!(a.rows, b.rows);
    // Row 4 lacks area_ha, row 6 has visits = 9 (outside the sample).
    assert_eq!(a.rows, vec![0, 1, 2, 3, 5, 7, 8, 9]);
    assert_eq!(a.design.x_names, b.design.x_names);
    assert_eq!(a.design.y_names, b.design.y_names);
    assert_eq!(a.design.x, b.design.x);
    assert_eq!(a.design.y, b.design.y);
    assert_eq!(a.design.clusters, b.design.clusters);
    assert_eq!(a.account, b.account);
    assert_eq!(from_csv.warnings, from_parquet.warnings);
    assert_eq!(
        a.design.x_names,
        vec![
            "(intercept)",
            "log1p(visits)",
            "standardized(area_ha)",
            "variety=nimbus",
            "variety=stratus",
            "visits × variety=cirrus",
            "visits × variety=stratus",
        ]
    );
    assert_eq!(a.design.clusters[0].count, 4);
}

#[test]
fn fingerprint_is_sha256_of_bytes() {
    // FIPS 180-2, appendix B.1: SHA-256("abc").
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "abc.csv", "abc");
    assert_eq!(
        fingerprint(&path).unwrap(),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    let m = fingerprint(&dir.path().join("missing.csv"))
        .unwrap_err()
        .to_string();
    assert!(m.contains("missing.csv"), "{m}");
}
