//! End-to-end tests of the command line on the demo and on small hand-made files: grid counts,
//! stable ids, indicator expansion, agreement with the engine called directly, and bad input.

mod common;

use std::collections::{BTreeMap, BTreeSet};
use std::fs;
use std::path::Path;

use common::{floats, read_parquet, repo_root, run_study, specgrid, strings, text};

/// A small deterministic data set: 60 rows, a numeric focus, two controls, a 3-level category
/// and a cluster column. Values come from fixed formulas, not from a random generator.
fn small_csv(dir: &Path) -> std::path::PathBuf {
    let mut csv = String::from("y,x,z,w,group,cluster\n");
    for i in 0..60 {
        let x = (i % 7) as f64 + 0.5 * (i as f64 / 10.0).sin();
        let z = ((i * 13) % 11) as f64 / 3.0;
        let w = 1.0 + (i % 5) as f64;
        let group = ["a", "b", "c"][i % 3];
        let effect = [0.0, 1.5, -0.7][i % 3];
        let y = 2.0 + 0.8 * x - 0.3 * z + 0.1 * w + effect + (i as f64 * 1.7).cos();
        csv.push_str(&format!("{y},{x},{z},{w},{group},c{}\n", i % 6));
    }
    let path = dir.join("small.csv");
    fs::write(&path, csv).unwrap();
    path
}

/// Overwrites one cell (0-based `column`) in each of the given file lines (line 0 is the header).
fn set_cells(csv_path: &Path, lines_to_edit: &[usize], column: usize, value: &str) {
    let mut lines: Vec<String> = fs::read_to_string(csv_path)
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect();
    for &line in lines_to_edit {
        let mut cells: Vec<String> = lines[line].split(',').map(str::to_string).collect();
        cells[column] = value.to_string();
        lines[line] = cells.join(",");
    }
    fs::write(csv_path, lines.join("\n") + "\n").unwrap();
}

/// A study on `small.csv`: `extra` is appended verbatim.
fn small_study(dir: &Path, extra: &str) -> std::path::PathBuf {
    small_csv(dir);
    let study = format!(
        r#"[study]
title = "small"
data = "small.csv"
seed = 7

[outcome]
column = "y"
forms = ["level", "asinh"]

[focus]
column = "x"
forms = ["level", "quadratic", "standardized"]

[[controls]]
name = "first"
role = "optional"
terms = ["z"]

[[controls]]
name = "second"
role = "optional"
terms = ["w"]

[errors]
choices = ["classical", "hc1", {{ cluster = "cluster" }}]
{extra}"#
    );
    let path = dir.join("small.toml");
    fs::write(&path, study).unwrap();
    path
}

fn plan_output(study: &Path, extra_args: &[&str]) -> String {
    let mut args = vec!["plan", study.to_str().unwrap()];
    args.extend_from_slice(extra_args);
    let output = specgrid(&args, study.parent().unwrap());
    assert!(output.status.success(), "{}", text(&output));
    String::from_utf8(output.stdout).unwrap()
}

fn line_value(output: &str, label: &str) -> String {
    output
        .lines()
        .find(|l| l.starts_with(label))
        .unwrap_or_else(|| panic!("no `{label}` line in\n{output}"))
        .trim_start_matches(label)
        .trim()
        .to_string()
}

// Grid counts follow the product rule (common practice): 2 outcome forms × 3 focus forms ×
// 2 × 2 optional blocks = 24 models in full mode; nested mode replaces the two optional blocks
// by one decision with 3 steps (none, first, first + second): 2 × 3 × 3 = 18.
#[test]
fn grid_counts_full_nested_skip_and_sample() {
    let dir = tempfile::tempdir().unwrap();
    let full = plan_output(&small_study(dir.path(), ""), &[]);
    assert_eq!(line_value(&full, "grid size before exclusions:"), "24");
    assert_eq!(line_value(&full, "models to estimate:"), "24");

    let dir = tempfile::tempdir().unwrap();
    let nested = plan_output(&small_study(dir.path(), "[grid]\nmode = \"nested\"\n"), &[]);
    assert_eq!(line_value(&nested, "models to estimate:"), "18");

    // Skipping asinh × quadratic removes 1 × 1 × 4 = 4 models.
    let dir = tempfile::tempdir().unwrap();
    let skipped = plan_output(
        &small_study(
            dir.path(),
            "[grid]\nskip = [{ outcome = \"asinh\", focus = \"quadratic\" }]\n",
        ),
        &[],
    );
    assert_eq!(line_value(&skipped, "grid size after exclusions:"), "20");
    assert_eq!(line_value(&skipped, "models to estimate:"), "20");

    let dir = tempfile::tempdir().unwrap();
    let sampled = plan_output(&small_study(dir.path(), "[grid]\nsample = 5\n"), &[]);
    assert_eq!(line_value(&sampled, "models to estimate:"), "5");
}

fn model_ids(listing: &str) -> BTreeSet<String> {
    listing
        .lines()
        .filter(|l| l.starts_with("  ") && !l.starts_with("   "))
        .filter_map(|l| l.split_whitespace().next())
        .filter(|w| w.len() == 12 && w.chars().all(|c| c.is_ascii_hexdigit()))
        .map(str::to_string)
        .collect()
}

#[test]
fn model_ids_are_stable_across_runs_and_block_order() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "");
    let first = model_ids(&plan_output(&study, &["--list"]));
    let second = model_ids(&plan_output(&study, &["--list"]));
    assert_eq!(first.len(), 24);
    assert_eq!(first, second);
    // The same study with the two control blocks swapped plans the same models.
    let text = fs::read_to_string(&study).unwrap();
    let swapped = text
        .replace(
            "name = \"first\"\nrole = \"optional\"\nterms = [\"z\"]",
            "TMP",
        )
        .replace(
            "name = \"second\"\nrole = \"optional\"\nterms = [\"w\"]",
            "name = \"first\"\nrole = \"optional\"\nterms = [\"z\"]",
        )
        .replace(
            "TMP",
            "name = \"second\"\nrole = \"optional\"\nterms = [\"w\"]",
        );
    assert_ne!(swapped, text);
    let other = dir.path().join("swapped.toml");
    fs::write(&other, swapped).unwrap();
    assert_eq!(model_ids(&plan_output(&other, &["--list"])), first);
}

#[test]
fn categorical_control_expands_to_indicators_without_the_reference() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(
        dir.path(),
        "\n[[controls]]\nname = \"groups\"\nrole = \"always\"\nterms = [{ categorical = \"group\" }]\n",
    );
    let out = dir.path().join("res");
    let output = run_study(&study, &out, &["--all-terms"]);
    assert!(output.status.success(), "{}", text(&output));
    let terms = read_parquet(&out.join("models.parquet"));
    assert!(terms.height() > 0);
    let all = common::read_csv(&out.join("terms.csv"));
    let names: BTreeSet<String> = strings(&all, "term").into_iter().collect();
    // The first level in sorted order (`a`) is the default reference and gets no column.
    assert!(
        names.iter().any(|n| n.contains("group") && n.contains('b')),
        "{names:?}"
    );
    assert!(
        names.iter().any(|n| n.contains("group") && n.contains('c')),
        "{names:?}"
    );
    assert!(
        !names
            .iter()
            .any(|n| n.contains("group") && n.ends_with('a')),
        "{names:?}"
    );
    // With the intercept, the indicator set is never collinear: nothing dropped.
    assert!(strings(&all, "dropped").iter().all(|d| d.is_empty()));
}

/// The model `y ~ intercept + x + z` fitted through the study path equals the engine called
/// directly on the same numbers (the engine itself is checked against NIST and statsmodels).
#[test]
fn study_path_matches_the_engine_called_directly() {
    use specgrid_ols::{ClusterIds, Covariance, Design, FitOptions, ModelSpec, SharedFactor};
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "");
    let out = dir.path().join("res");
    let output = run_study(&study, &out, &[]);
    assert!(output.status.success(), "{}", text(&output));
    let frame = read_parquet(&out.join("models.parquet"));

    // Same data, read independently.
    let csv = fs::read_to_string(dir.path().join("small.csv")).unwrap();
    let rows: Vec<Vec<String>> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    let n = rows.len();
    let num = |j: usize| -> Vec<f64> { rows.iter().map(|r| r[j].parse().unwrap()).collect() };
    let (y, x, z) = (num(0), num(1), num(2));
    let clusters: Vec<u32> = rows.iter().map(|r| r[5][1..].parse().unwrap()).collect();
    let design = Design {
        x: faer::Mat::from_fn(n, 3, |i, j| [1.0, x[i], z[i]][j]),
        y: faer::Mat::from_fn(n, 1, |i, _| y[i]),
        x_names: vec!["(intercept)".into(), "x".into(), "z".into()],
        y_names: vec!["y".into()],
        clusters: vec![ClusterIds {
            name: "cluster".into(),
            codes: clusters,
            count: 6,
        }],
    };
    let options = FitOptions {
        covariances: vec![
            Covariance::Classical,
            Covariance::Hc1,
            Covariance::Cluster { dim: 0 },
        ],
        ..FitOptions::default()
    };
    let factor = SharedFactor::new(&design).unwrap();
    let fit = factor
        .fit(
            &ModelSpec {
                columns: vec![0, 1, 2],
                outcome: 0,
                tracked: vec![1],
            },
            &options,
        )
        .unwrap();

    let pick = |col: &str| -> Vec<String> { strings(&frame, col) };
    let (outcome, focus, first, second, errors) = (
        pick("outcome"),
        pick("focus"),
        pick("first"),
        pick("second"),
        pick("errors"),
    );
    let (estimate, se, r2) = (
        floats(&frame, "estimate"),
        floats(&frame, "std_error"),
        floats(&frame, "r_squared"),
    );
    let labels = ["classical", "hc1", "cluster:cluster"];
    let mut found = 0;
    for i in 0..frame.height() {
        if outcome[i] == "level" && focus[i] == "level" && first[i] == "in" && second[i] == "out" {
            let k = labels
                .iter()
                .position(|l| *l == errors[i])
                .expect("known label");
            let want = &fit.coefficients[0];
            assert!((estimate[i] - want.estimate).abs() <= 1e-12 * want.estimate.abs());
            let want_se = want.inference[k].std_error;
            assert!(
                (se[i] - want_se).abs() <= 1e-12 * want_se,
                "{}: {} vs {}",
                errors[i],
                se[i],
                want_se
            );
            assert!((r2[i] - fit.r_squared).abs() <= 1e-12);
            found += 1;
        }
    }
    assert_eq!(found, 3, "one row per covariance choice for that model");
}

#[test]
fn demo_study_runs_end_to_end() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("orchards");
    let study = repo_root().join("specs/orchards.toml");
    let output = specgrid(
        &[
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ],
        dir.path(),
    );
    assert!(output.status.success(), "{}", text(&output));
    let frame = read_parquet(&out.join("models.parquet"));
    let ids: BTreeSet<String> = strings(&frame, "model_id").into_iter().collect();
    // specs/orchards.toml: 2 × 6 × 3 × 3 × 2 × 4 × 3 = 2,592 combinations, less the skip rule's
    // 2 outcomes × 3 × 3 × 2 = 36 (product rule; common practice).
    assert_eq!(ids.len(), 2556);
    for column in [
        "outcome",
        "focus",
        "plot size",
        "irrigation",
        "soil",
        "grouping",
        "sample",
    ] {
        assert!(frame.column(column).is_ok(), "dimension column `{column}`");
    }
    // Every model reports all five covariance choices for each tracked term.
    let mut per_model: BTreeMap<String, usize> = BTreeMap::new();
    for id in strings(&frame, "model_id") {
        *per_model.entry(id).or_default() += 1;
    }
    assert!(per_model.values().all(|&n| n % 5 == 0));
    // Nothing but the results folder was left beside it.
    let leftovers: Vec<_> = fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(leftovers.len(), 1, "{leftovers:?}");
    let csv = common::read_csv(&out.join("models.csv"));
    assert_eq!(csv.height(), frame.height());
}

// ---- bad input: a clear message, the documented exit code, and no results folder ----

fn assert_refused(output: &std::process::Output, code: i32, needles: &[&str], out: &Path) {
    let all = text(output);
    assert_eq!(output.status.code(), Some(code), "{all}");
    for needle in needles {
        assert!(all.contains(needle), "message lacks `{needle}`:\n{all}");
    }
    assert!(!out.exists(), "a results folder was left behind");
    let parent = out.parent().unwrap();
    let partial = fs::read_dir(parent)
        .unwrap()
        .filter_map(|e| e.ok())
        .any(|e| e.file_name().to_string_lossy().contains("partial"));
    assert!(!partial, "a staging folder was left behind");
}

#[test]
fn unknown_key_is_refused_with_its_position() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "[grid]\nlimt = 10\n");
    let out = dir.path().join("res");
    let output = run_study(&study, &out, &[]);
    let line = fs::read_to_string(&study)
        .unwrap()
        .lines()
        .position(|l| l.starts_with("limt"))
        .unwrap()
        + 1;
    assert_refused(
        &output,
        3,
        &[
            &format!("small.toml:{line}:1"),
            "limt",
            "did you mean `limit`",
        ],
        &out,
    );
}

#[test]
fn unknown_column_is_refused_naming_it() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "");
    let text_study = fs::read_to_string(&study)
        .unwrap()
        .replace("terms = [\"w\"]", "terms = [\"weight\"]");
    fs::write(&study, text_study).unwrap();
    let out = dir.path().join("res");
    assert_refused(
        &run_study(&study, &out, &[]),
        4,
        &["weight", "small.csv"],
        &out,
    );
}

#[test]
fn non_numeric_and_infinite_cells_are_refused_with_counts() {
    for (bad, needle) in [("oops", "not a number"), ("inf", "infinite")] {
        let dir = tempfile::tempdir().unwrap();
        let study = small_study(dir.path(), "");
        set_cells(&dir.path().join("small.csv"), &[3, 9], 2, bad);
        let out = dir.path().join("res");
        assert_refused(
            &run_study(&study, &out, &[]),
            4,
            &["`z`", "2 rows", needle],
            &out,
        );
    }
}

#[test]
fn outcome_without_variance_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "");
    let csv_path = dir.path().join("small.csv");
    let fixed: Vec<String> = fs::read_to_string(&csv_path)
        .unwrap()
        .lines()
        .enumerate()
        .map(|(i, l)| {
            if i == 0 {
                l.to_string()
            } else {
                format!("5{}", &l[l.find(',').unwrap()..])
            }
        })
        .collect();
    fs::write(&csv_path, fixed.join("\n") + "\n").unwrap();
    let out = dir.path().join("res");
    assert_refused(
        &run_study(&study, &out, &[]),
        4,
        &["no variance", "`y`"],
        &out,
    );
}

#[test]
fn failed_run_keeps_previous_results() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "");
    let out = dir.path().join("res");
    assert!(run_study(&study, &out, &[]).status.success());
    let before = fs::read(out.join("models.csv")).unwrap();
    // Break the data, run again into the same folder: refused, old results untouched.
    fs::write(dir.path().join("small.csv"), "y,x\n1,2\n").unwrap();
    let output = run_study(&study, &out, &[]);
    assert_eq!(output.status.code(), Some(4), "{}", text(&output));
    assert_eq!(fs::read(out.join("models.csv")).unwrap(), before);
}

#[test]
fn missing_values_are_reported_as_a_warning_with_the_count() {
    let dir = tempfile::tempdir().unwrap();
    let study = small_study(dir.path(), "");
    set_cells(&dir.path().join("small.csv"), &[2, 5, 8], 3, "");
    let out = dir.path().join("res");
    let output = run_study(&study, &out, &[]);
    assert!(output.status.success(), "{}", text(&output));
    let all = text(&output);
    assert!(
        all.contains("warning") && all.contains("`w`") && all.contains('3'),
        "{all}"
    );
    // Shared rows: every model uses the 57 complete rows.
    let frame = read_parquet(&out.join("models.parquet"));
    assert!(floats(&frame, "n_obs").iter().all(|&n| n == 57.0));
}
