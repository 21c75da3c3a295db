//! Inference across the grid from the study file through `specgrid run`, checked against the
//! reference values of tests/reference/inference/make_fixtures.py (numpy and statsmodels,
//! written independently of the Rust code):
//! - the wild cluster bootstrap as an `[errors]` choice: the p-value of H₀: β = 0 by full
//!   enumeration of the 2^G Rademacher and 6^G Webb weight vectors, refitting row by row
//!   (Cameron, Gelbach & Miller 2008; Webb 2023), and the CR1 error from statsmodels;
//! - `[inference] stability`: Oster's (2019) δ for β = 0 and β* for δ = 1 from raw-data moments
//!   (the closed form written from memory on both sides, as the script says);
//! - `[inference] decomposition`: Gelbach's (2016) block contributions and their standard errors
//!   (statsmodels covariances, textbook formulas).
//!
//! The joint test is checked by its own definitions (the observed statistics of the curve, and
//! p-values of the form (1 + count)/(1 + draws)); its null distribution is tested in the engine.

mod common;

use std::path::Path;

use common::{floats, read_csv, specgrid, strings, text};
use serde_json::Value;

fn fixtures() -> Value {
    let path = common::repo_root().join("tests/reference/inference/fixtures/inference.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// Writes a CSV with columns y, x1…x(p−1) (the fixture's column 0 is the constant) and, when
/// given, the cluster code g; shortest round-trip decimals, so the values read back exactly.
fn write_data(dir: &Path, case: &Value, codes: Option<&Value>) {
    let x: Vec<Vec<f64>> = case["x"].as_array().unwrap().iter().map(numbers).collect();
    let y = numbers(&case["y"]);
    let g: Option<Vec<f64>> = codes.map(numbers);
    let mut text = String::from("y");
    for j in 1..x.len() {
        text.push_str(&format!(",x{j}"));
    }
    if g.is_some() {
        text.push_str(",g");
    }
    text.push('\n');
    for i in 0..y.len() {
        text.push_str(&format!("{:?}", y[i]));
        for col in x.iter().skip(1) {
            text.push_str(&format!(",{:?}", col[i]));
        }
        if let Some(g) = &g {
            text.push_str(&format!(",{}", g[i]));
        }
        text.push('\n');
    }
    std::fs::write(dir.join("data.csv"), text).unwrap();
}

fn study(controls: &str, errors: &str, inference: &str) -> String {
    format!(
        r#"[study]
title = "across the grid"
data = "data.csv"
seed = 7

[outcome]
column = "y"

[focus]
column = "x1"

{controls}

[errors]
choices = {errors}

{inference}
"#
    )
}

fn run(dir: &Path, study_text: &str) {
    std::fs::write(dir.join("study.toml"), study_text).unwrap();
    let out = specgrid(&["run", "study.toml", "--out", "results", "--quiet"], dir);
    assert!(out.status.success(), "{}", text(&out));
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol * b.abs().max(1e-300)
}

#[test]
fn wild_bootstrap_choice_matches_full_enumeration() {
    for case in fixtures()["wild_cluster"].as_array().unwrap() {
        let work = tempfile::tempdir().unwrap();
        write_data(work.path(), case, Some(&case["codes"]));
        let weights = case["weights"].as_str().unwrap();
        // Focus x1 and the other column x2 always in; CR1 first, then the bootstrap.
        run(
            work.path(),
            &study(
                "[[controls]]\nname = \"other\"\nrole = \"always\"\nterms = [\"x2\"]",
                &format!(
                    "[{{ cluster = \"g\" }}, {{ wild_bootstrap = \"g\", weights = \"{weights}\" }}]"
                ),
                "",
            ),
        );
        let frame = read_csv(&work.path().join("results/models.csv"));
        let (errors, terms) = (strings(&frame, "errors"), strings(&frame, "term"));
        let (est, se, p) = (
            floats(&frame, "estimate"),
            floats(&frame, "std_error"),
            floats(&frame, "p_value"),
        );
        let label = if weights == "webb" {
            "wild-webb:g"
        } else {
            "wild:g"
        };
        let i = (0..errors.len())
            .find(|&i| errors[i] == label && terms[i] == "x1")
            .expect("a wild-bootstrap row for x1");
        let at_zero = &case["tests"][0];
        assert_eq!(at_zero["null_value"].as_f64().unwrap(), 0.0);
        // Enumeration leaves no simulation error: the p-value is a count over 2^G or 6^G
        // weight vectors, so it must agree to rounding.
        let expected = at_zero["p_value"].as_f64().unwrap();
        assert!(
            close(p[i], expected, 1e-12),
            "{}: p {} vs {expected}",
            case["case"],
            p[i]
        );
        assert!(close(est[i], case["estimate"].as_f64().unwrap(), 1e-9));
        // The slot's standard error is the CR1 one (statsmodels cluster, default correction).
        assert!(close(
            se[i],
            case["cr1_std_error_statsmodels"].as_f64().unwrap(),
            1e-8
        ));
        // The bootstrap interval contains the estimate, and the CR1 row keeps the t p-value.
        let (lo, hi) = (floats(&frame, "ci_low")[i], floats(&frame, "ci_high")[i]);
        assert!(lo < est[i] && est[i] < hi, "{lo} {} {hi}", est[i]);
        let cr1 = (0..errors.len())
            .find(|&k| errors[k] == "cluster:g" && terms[k] == "x1")
            .unwrap();
        assert!(p[cr1] != p[i]);
    }
}

#[test]
fn stability_bounds_match_the_moment_formulas() {
    let fx = fixtures();
    let case = &fx["oster"];
    let work = tempfile::tempdir().unwrap();
    write_data(work.path(), case, None);
    // Short model: intercept and x1 (the fixture's columns 0, 1); long: with x2 and x3.
    run(
        work.path(),
        &study(
            "[[controls]]\nname = \"more\"\nrole = \"optional\"\nterms = [\"x2\", \"x3\"]",
            "[\"classical\"]",
            "[inference]\nstability = true",
        ),
    );
    let rows = std::fs::read_to_string(work.path().join("results/stability.csv")).unwrap();
    let lines: Vec<&str> = rows.lines().collect();
    // The model without `more` equals its short model: no movement, so it is left out.
    assert_eq!(lines.len(), 2, "{rows}");
    let cells: Vec<f64> = lines[1]
        .split(',')
        .skip(1)
        .map(|c| c.parse().unwrap())
        .collect();
    let [short_b, long_b, short_r2, long_r2, r_max, delta, beta_star] = cells[..] else {
        panic!("{rows}")
    };
    let want = |k: &str| case[k].as_f64().unwrap();
    assert!(close(short_b, want("short_estimate"), 1e-10));
    assert!(close(long_b, want("long_estimate"), 1e-10));
    assert!(close(short_r2, want("short_r2"), 1e-10));
    assert!(close(long_r2, want("long_r2"), 1e-10));
    assert!(close(r_max, want("r_max"), 1e-10));
    assert!(close(delta, want("delta_for_zero"), 1e-8), "δ {delta}");
    // β* is the root closest to the long estimate.
    let roots = numbers(&case["beta_star_roots"]);
    let nearest = roots
        .iter()
        .copied()
        .min_by(|a, b| (a - long_b).abs().total_cmp(&(b - long_b).abs()))
        .unwrap();
    assert!(
        close(beta_star, nearest, 1e-8),
        "β* {beta_star} vs {nearest}"
    );
    let summary: Value = serde_json::from_str(
        &std::fs::read_to_string(work.path().join("results/summary.json")).unwrap(),
    )
    .unwrap();
    let s = &summary["across_grid"]["stability"];
    assert_eq!(s["models"], 1);
    assert_eq!(s["models_left_out"], 1);
    assert!(close(s["median_delta"].as_f64().unwrap(), delta, 1e-15));
}

#[test]
fn decomposition_matches_the_reference_blocks() {
    let fx = fixtures();
    let case = &fx["gelbach"];
    // Base: intercept, x1 (focus), x2; blocks: block_a = x3, x4 and block_b = x5.
    assert_eq!(numbers(&case["base"]), vec![0.0, 1.0, 2.0]);
    for (errors, key) in [
        ("[\"classical\"]", "classical"),
        ("[\"hc1\"]", "hc1"),
        ("[{ cluster = \"g\" }]", "cluster"),
    ] {
        let work = tempfile::tempdir().unwrap();
        write_data(work.path(), case, Some(&case["codes"]));
        let controls = "[[controls]]\nname = \"base\"\nrole = \"always\"\nterms = [\"x2\"]\n\n\
                        [[controls]]\nname = \"block_a\"\nrole = \"optional\"\nterms = [\"x3\", \"x4\"]\n\n\
                        [[controls]]\nname = \"block_b\"\nrole = \"optional\"\nterms = [\"x5\"]";
        run(
            work.path(),
            &study(
                controls,
                errors,
                "[inference]\nshort_model = [\"base\"]\ndecomposition = true",
            ),
        );
        let summary: Value = serde_json::from_str(
            &std::fs::read_to_string(work.path().join("results/summary.json")).unwrap(),
        )
        .unwrap();
        let d = &summary["across_grid"]["decomposition"];
        let want = &case["covariances"][key];
        assert!(close(
            d["short_estimate"].as_f64().unwrap(),
            case["base_estimate"].as_f64().unwrap(),
            1e-10
        ));
        assert!(close(
            d["long_estimate"].as_f64().unwrap(),
            case["full_estimate"].as_f64().unwrap(),
            1e-10
        ));
        assert!(close(
            d["total_std_error"].as_f64().unwrap(),
            want["total_std_error"].as_f64().unwrap(),
            1e-8
        ));
        let blocks = d["blocks"].as_array().unwrap();
        assert_eq!(blocks.len(), 2);
        let mut sum = 0.0;
        for (got, expected) in blocks.iter().zip(want["blocks"].as_array().unwrap()) {
            let c = got["contribution"].as_f64().unwrap();
            sum += c;
            assert!(close(c, expected["contribution"].as_f64().unwrap(), 1e-9));
            assert!(close(
                got["std_error"].as_f64().unwrap(),
                expected["std_error"].as_f64().unwrap(),
                1e-8
            ));
        }
        // Gelbach's identity: the blocks add up to the whole movement.
        assert!((sum - d["total_change"].as_f64().unwrap()).abs() < 1e-10);
        assert!(close(
            d["total_change"].as_f64().unwrap(),
            case["total_change"].as_f64().unwrap(),
            1e-9
        ));
    }
}

#[test]
fn joint_test_reports_the_observed_curve_and_count_based_p_values() {
    // The Gelbach fixture's data: a strong focus effect, so every curve model is significant
    // with the same sign and no null draw reaches the observed median (p = 1/(1 + draws)).
    let fx = fixtures();
    let case = &fx["gelbach"];
    let work = tempfile::tempdir().unwrap();
    write_data(work.path(), case, Some(&case["codes"]));
    let controls =
        "[[controls]]\nname = \"block_a\"\nrole = \"optional\"\nterms = [\"x3\", \"x4\"]\n\n\
                    [[controls]]\nname = \"block_b\"\nrole = \"optional\"\nterms = [\"x5\"]";
    let draws = 99;
    run(
        work.path(),
        &study(
            controls,
            "[\"classical\"]",
            &format!("[inference]\njoint_test = {{ draws = {draws}, cluster = \"g\" }}"),
        ),
    );
    let frame = read_csv(&work.path().join("results/models.csv"));
    let terms = strings(&frame, "term");
    let mut est: Vec<f64> = floats(&frame, "estimate")
        .into_iter()
        .zip(&terms)
        .filter(|(_, t)| *t == "x1")
        .map(|(e, _)| e)
        .collect();
    est.sort_by(f64::total_cmp);
    assert_eq!(est.len(), 4);
    let summary: Value = serde_json::from_str(
        &std::fs::read_to_string(work.path().join("results/summary.json")).unwrap(),
    )
    .unwrap();
    let j = &summary["across_grid"]["joint_test"];
    assert_eq!(j["draws"], draws);
    assert_eq!(j["models_used"], 4);
    // The observed median of four estimates is the mean of the middle two (the report's rule).
    assert!(close(
        j["median"].as_f64().unwrap(),
        0.5 * (est[1] + est[2]),
        1e-12
    ));
    // Every p-value is (1 + count)/(1 + draws) for a whole count.
    for key in ["p_median", "p_share", "p_aggregate_z"] {
        let p = j[key].as_f64().unwrap();
        let count = p * (draws as f64 + 1.0) - 1.0;
        assert!((count - count.round()).abs() < 1e-9, "{key} = {p}");
    }
    assert!(close(
        j["p_median"].as_f64().unwrap(),
        1.0 / (draws as f64 + 1.0),
        1e-12
    ));
    // The same seed gives the same draws: a second run repeats every number.
    let again = tempfile::tempdir().unwrap();
    for f in ["data.csv", "study.toml"] {
        std::fs::copy(work.path().join(f), again.path().join(f)).unwrap();
    }
    let out = specgrid(
        &["run", "study.toml", "--out", "results", "--quiet"],
        again.path(),
    );
    assert!(out.status.success());
    let repeat: Value = serde_json::from_str(
        &std::fs::read_to_string(again.path().join("results/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(repeat["across_grid"], summary["across_grid"]);
    // The report says what the test means and its caution.
    let html = std::fs::read_to_string(work.path().join("results/report.html")).unwrap();
    assert!(html.contains("Inference across the grid"));
    assert!(html.contains("does not say which specification is right"));
}
