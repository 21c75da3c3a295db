//! Absorbed fixed effects and regression weights from the study file through `specgrid run`:
//! - Frisch–Waugh–Lovell: absorbing a categorical column gives the same coefficient and the
//!   same classical, HC1 and HC3 errors as its explicit indicator columns (Frisch & Waugh 1933;
//!   Lovell 1963), and the cluster-robust error differs only by the documented small-sample
//!   factor: effects nested in the clustering column do not count in k (Cameron & Miller 2015,
//!   J. Human Resources 50:317).
//! - Frequency weights give the same fit as the data with each row repeated w times (the
//!   definition of frequency weights; common practice).
//!
//! The data are the seeded set of the effects fixture (tests/reference/statsmodels/effects).

mod common;

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use common::{floats, read_csv, repo_root, specgrid, strings, text};

fn data_path() -> PathBuf {
    repo_root()
        .join("tests/reference/statsmodels/effects/data.csv")
        .canonicalize()
        .unwrap()
}

/// (estimate, std_error, n_obs, n_params, df) of the focus row, by (grouping option, errors).
type Rows = HashMap<(String, String), (f64, f64, f64, f64, f64)>;

/// Runs `study` (TOML text) in a temporary folder and returns its focus rows of models.csv.
fn run(study: &str, key_column: &str) -> Rows {
    let work = tempfile::tempdir().unwrap();
    std::fs::write(work.path().join("study.toml"), study).unwrap();
    let out = specgrid(
        &["run", "study.toml", "--out", "results", "--quiet"],
        work.path(),
    );
    assert!(out.status.success(), "{}", text(&out));
    let frame = read_csv(&work.path().join("results/models.csv"));
    let (keys, errors, terms) = (
        strings(&frame, key_column),
        strings(&frame, "errors"),
        strings(&frame, "term"),
    );
    let (est, se, n, k, df) = (
        floats(&frame, "estimate"),
        floats(&frame, "std_error"),
        floats(&frame, "n_obs"),
        floats(&frame, "n_params"),
        floats(&frame, "df"),
    );
    (0..keys.len())
        .filter(|&i| terms[i] == "x")
        .map(|i| {
            (
                (keys[i].clone(), errors[i].clone()),
                (est[i], se[i], n[i], k[i], df[i]),
            )
        })
        .collect()
}

fn study(data: &Path, grouping_options: &str, errors: &str) -> String {
    format!(
        r#"[study]
title = "fixed effects"
data = "{}"
allow_data_outside_folder = true
seed = 1

[outcome]
column = "y"
forms = ["log"]

[focus]
column = "x"

[[controls]]
name = "always"
role = "always"
terms = ["w", "d"]

[[controls]]
name = "grouping"
role = "alternatives"
include_none = true
options = [{grouping_options}]

[errors]
choices = [{errors}]
"#,
        data.display()
    )
}

/// Runs the study with these grouping options and classical errors into `r` in a fresh folder.
fn run_grouping(options: &str) -> (tempfile::TempDir, std::process::Output) {
    let work = tempfile::tempdir().unwrap();
    std::fs::write(
        work.path().join("study.toml"),
        study(&data_path(), options, r#""classical""#),
    )
    .unwrap();
    let out = specgrid(&["run", "study.toml", "--out", "r", "--quiet"], work.path());
    (work, out)
}

fn close(a: f64, b: f64, what: &str) {
    assert!(
        (a - b).abs() <= 1e-9 * b.abs().max(1e-300),
        "{what}: {a:e} vs {b:e} (relative {:.2e})",
        (a - b).abs() / b.abs()
    );
}

#[test]
fn absorbed_effects_equal_explicit_indicators() {
    let rows = run(
        &study(
            &data_path(),
            r#"{ name = "indicators", terms = [{ categorical = "grp" }] }, { name = "absorbed", terms = [{ absorb = "grp" }] }"#,
            r#""classical", "hc1", "hc3", { cluster = "grp" }"#,
        ),
        "grouping",
    );
    for errors in ["classical", "hc1", "hc3"] {
        let e = &rows[&("indicators".to_string(), errors.to_string())];
        let a = &rows[&("absorbed".to_string(), errors.to_string())];
        close(a.0, e.0, &format!("{errors} estimate"));
        close(a.1, e.1, &format!("{errors} SE"));
        assert_eq!(a.4, e.4, "{errors} df counts the absorbed levels exactly");
    }
    // Cluster-robust: the 12 group effects are nested in the 12 clusters, so the absorbed model
    // leaves them out of k in G/(G−1)·(n−1)/(n−k): SE_abs / SE_expl = √((n−k_expl)/(n−k_abs)).
    let e = &rows[&("indicators".to_string(), "cluster:grp".to_string())];
    let a = &rows[&("absorbed".to_string(), "cluster:grp".to_string())];
    close(a.0, e.0, "cluster estimate");
    let n = e.2;
    let k_expl = e.3; // intercept + x + w + d + 11 indicators
    let k_abs = a.3; // x + w + d
    assert_eq!((k_expl, k_abs), (15.0, 3.0));
    close(
        a.1,
        e.1 * ((n - k_expl) / (n - k_abs)).sqrt(),
        "cluster SE after the nesting rule",
    );
}

#[test]
fn frequency_weights_equal_repeated_rows() {
    let work = tempfile::tempdir().unwrap();
    let text_in = std::fs::read_to_string(data_path()).unwrap();
    let mut lines = text_in.lines();
    let header = lines.next().unwrap();
    let mut repeated = format!("{header},one\n");
    for line in lines {
        let x: usize = line.split(',').nth(1).unwrap().parse().unwrap();
        for _ in 0..x {
            repeated.push_str(line);
            repeated.push_str(",1\n");
        }
    }
    let repeated_path = work.path().join("repeated.csv");
    std::fs::write(&repeated_path, repeated).unwrap();
    let errors = r#""classical", "hc1", "hc2", { cluster = "grp" }"#;
    let weighted = run(
        &study(
            &data_path(),
            r#"{ name = "weighted", terms = [{ weights = "x", kind = "frequency" }] }"#,
            errors,
        ),
        "grouping",
    );
    let expanded = run(
        &study(
            &repeated_path,
            r#"{ name = "weighted", terms = [{ weights = "one", kind = "frequency" }] }"#,
            errors,
        ),
        "grouping",
    );
    let weighted: Vec<_> = weighted.iter().filter(|(k, _)| k.0 == "weighted").collect();
    assert_eq!(weighted.len(), 4);
    for (key, w) in weighted {
        let r = &expanded[key];
        close(w.0, r.0, &format!("{key:?} estimate"));
        close(w.1, r.1, &format!("{key:?} SE"));
        assert_eq!(w.2, r.2, "{key:?}: n is the sum of the frequency weights");
    }
}

#[test]
fn bad_weights_and_misplaced_absorption_are_clear_errors() {
    // `w` has negative values: an error naming the column and the row count, exit code 4.
    let (work, out) = run_grouping(r#"{ name = "weighted", terms = [{ weights = "w" }] }"#);
    assert_eq!(out.status.code(), Some(4), "{}", text(&out));
    assert!(
        text(&out).contains("weights `w` are negative in"),
        "{}",
        text(&out)
    );
    assert!(
        !work.path().join("r").exists(),
        "no results folder on failure"
    );
    // An absorbed effect inside a product is a study error with a position.
    let s = study(
        &data_path(),
        r#"{ name = "bad", terms = [{ product = ["x", { absorb = "grp" }] }] }"#,
        r#""classical""#,
    );
    std::fs::write(work.path().join("study.toml"), s).unwrap();
    let out = specgrid(&["check", "study.toml"], work.path());
    assert_eq!(out.status.code(), Some(3), "{}", text(&out));
    assert!(
        text(&out).contains("cannot enter a product"),
        "{}",
        text(&out)
    );
}

#[test]
fn the_absorption_pass_is_reported_on_the_terminal_and_in_the_manifest() {
    let (work, out) = run_grouping(r#"{ name = "absorbed", terms = [{ absorb = "grp" }] }"#);
    assert!(out.status.success(), "{}", text(&out));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("absorbed grp (12 parameters) in 1 sweep(s)"),
        "{stderr}"
    );
    let manifest: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(work.path().join("r/manifest.json")).unwrap(),
    )
    .unwrap();
    let samples = manifest["samples"].as_array().unwrap();
    // One plain design (the `none` option) and one absorbed design, both of sample `all rows`.
    let absorbed: Vec<_> = samples.iter().filter_map(|s| s.get("absorption")).collect();
    assert_eq!(absorbed.len(), 1, "{samples:?}");
    assert_eq!(absorbed[0]["effects"], serde_json::json!(["grp"]));
    assert_eq!(absorbed[0]["levels"], serde_json::json!([12]));
    assert_eq!(absorbed[0]["absorbed_params"], 12);
    assert_eq!(absorbed[0]["singletons_dropped"], 0);
}
