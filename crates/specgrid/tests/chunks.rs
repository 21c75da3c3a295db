//! `run --chunk N`: the grid is fitted and written N models at a time, and the results are the
//! same as a run that holds everything at once: rows in plan order, identical text cells, and
//! numbers equal to rounding (the engine batches the residual pass by the models it is given,
//! so the last bits of sums such as the Breusch–Pagan statistic can differ; relative 1e-12).

mod common;

use common::{effects_study, read_parquet, repo_root, run_study, text};

#[test]
fn chunked_runs_write_the_same_results() {
    let work = tempfile::tempdir().unwrap();
    // The effects study: 12 models, three covariance choices, semi-elasticities.
    let data = repo_root()
        .join("tests/reference/statsmodels/effects/data.csv")
        .canonicalize()
        .unwrap();
    let study = work.path().join("study.toml");
    std::fs::write(&study, effects_study(&data, "semi-elasticity")).unwrap();
    let whole = work.path().join("whole");
    let o = run_study(&study, &whole, &["--all-terms"]);
    assert!(o.status.success(), "{}", text(&o));
    for chunk in ["1", "5", "12", "100"] {
        let out = work.path().join(format!("chunk{chunk}"));
        let o = run_study(&study, &out, &["--all-terms", "--chunk", chunk]);
        assert!(o.status.success(), "{}", text(&o));
        for file in [
            "models.csv",
            "terms.csv",
            "effects.csv",
            "baseline_residuals.csv",
        ] {
            same_table(
                &whole.join(file),
                &out.join(file),
                &format!("{file}, --chunk {chunk}"),
            );
        }
        let (a, b) = (
            read_parquet(&whole.join("models.parquet")),
            read_parquet(&out.join("models.parquet")),
        );
        assert_eq!(
            a.shape(),
            b.shape(),
            "models.parquet shape, --chunk {chunk}"
        );
        assert_eq!(a.get_column_names(), b.get_column_names());
    }
    // Zero is refused by the command line.
    let o = run_study(&study, &work.path().join("zero"), &["--chunk", "0"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
}

/// Two CSV files with the same cells: text equal, numbers equal to relative 1e-12.
fn same_table(a: &std::path::Path, b: &std::path::Path, what: &str) {
    let (a, b) = (
        std::fs::read_to_string(a).unwrap(),
        std::fs::read_to_string(b).unwrap(),
    );
    assert_eq!(a.lines().count(), b.lines().count(), "{what}: row count");
    for (n, (la, lb)) in a.lines().zip(b.lines()).enumerate() {
        let (ca, cb): (Vec<&str>, Vec<&str>) = (la.split(',').collect(), lb.split(',').collect());
        assert_eq!(ca.len(), cb.len(), "{what} line {}", n + 1);
        for (x, y) in ca.iter().zip(&cb) {
            match (x.parse::<f64>(), y.parse::<f64>()) {
                (Ok(u), Ok(v)) => assert!(
                    (u - v).abs() <= 1e-12 * u.abs().max(v.abs()),
                    "{what} line {}: {u:e} vs {v:e}",
                    n + 1
                ),
                _ => assert_eq!(x, y, "{what} line {}", n + 1),
            }
        }
    }
}
