//! `run --chunk N`: the grid is fitted and written N models at a time, and the results are the
//! same as a run that holds everything at once: rows in plan order, identical text cells, and
//! numbers equal to rounding (the engine batches the residual pass by the models it is given,
//! so the last bits of sums such as the Breusch–Pagan statistic can differ; relative 1e-12).

mod common;

use common::{effects_study, floats, read_parquet, repo_root, run_study, strings, text};

#[test]
fn chunked_runs_write_the_same_results() {
    let (work, study) = effects_study_in_temp();
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

/// The effects study (12 models, three covariance choices, semi-elasticities) written into a
/// new temporary folder, on the statsmodels effects reference data.
fn effects_study_in_temp() -> (tempfile::TempDir, std::path::PathBuf) {
    let work = tempfile::tempdir().unwrap();
    let data = repo_root()
        .join("tests/reference/statsmodels/effects/data.csv")
        .canonicalize()
        .unwrap();
    let study = work.path().join("study.toml");
    std::fs::write(&study, effects_study(&data, "semi-elasticity")).unwrap();
    (work, study)
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

/// `run --no-csv` writes the results table as models.parquet only: no models.csv, the same
/// Parquet rows as a run that writes both, and a folder that `report` re-renders to the same
/// report files.
#[test]
fn parquet_only_runs_write_the_same_parquet_and_re_render() {
    let (work, study) = effects_study_in_temp();
    let both = work.path().join("both");
    let o = run_study(&study, &both, &[]);
    assert!(o.status.success(), "{}", text(&o));
    for chunk in [None, Some("5")] {
        let out = work.path().join(format!("parquet-only-{chunk:?}"));
        let mut args = vec!["--no-csv"];
        args.extend(chunk.iter().flat_map(|c| ["--chunk", c]));
        let o = run_study(&study, &out, &args);
        assert!(o.status.success(), "{}", text(&o));
        assert!(
            !out.join("models.csv").exists(),
            "--no-csv wrote models.csv"
        );
        let (a, b) = (
            read_parquet(&both.join("models.parquet")),
            read_parquet(&out.join("models.parquet")),
        );
        assert_eq!(a.shape(), b.shape(), "models.parquet shape, {chunk:?}");
        for name in ["model_id", "errors", "term"] {
            assert_eq!(strings(&a, name), strings(&b, name), "{name}, {chunk:?}");
        }
        for name in ["estimate", "std_error", "p_value"] {
            for (u, v) in floats(&a, name).iter().zip(floats(&b, name)) {
                assert!(
                    (u - v).abs() <= 1e-12 * u.abs().max(v.abs()),
                    "{name}: {u} vs {v}"
                );
            }
        }
        let before = std::fs::read_to_string(out.join("summary.json")).unwrap();
        let o = common::specgrid(&["report", out.to_str().unwrap()], work.path());
        assert!(o.status.success(), "{}", text(&o));
        let after = std::fs::read_to_string(out.join("summary.json")).unwrap();
        assert_eq!(before, after, "re-rendered summary.json differs");
    }
}
