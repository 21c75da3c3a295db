//! Effects on a common scale, end to end: `specgrid run` on a study with `[report] scale`, then
//! `effects.csv` against statsmodels' estimates and covariances converted by the textbook
//! formulas (tests/reference/statsmodels/make_effect_fixtures.py, which names its sources;
//! fixture in tests/reference/statsmodels/effects/). Also: `specgrid report DIR` re-renders the
//! same effects from the folder without re-estimating.

mod common;

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use common::{effects_study, read_csv, repo_root, specgrid, strings, text};
use serde_json::Value;

/// Relative agreement required with the reference (both sides are double-precision QR/pinv
/// computations of well-conditioned designs).
const RTOL: f64 = 1e-8;

fn fixture_dir() -> PathBuf {
    repo_root().join("tests/reference/statsmodels/effects")
}

fn close(got: f64, want: f64, what: &str) {
    let scale = want.abs().max(1e-300);
    assert!(
        (got - want).abs() <= RTOL * scale,
        "{what}: specgrid {got:e}, reference {want:e} (relative {:.2e})",
        (got - want).abs() / scale
    );
}

/// effects.csv as (model id, errors) → column → text.
fn effects_table(dir: &Path) -> HashMap<(String, String), HashMap<String, String>> {
    let text = std::fs::read_to_string(dir.join("effects.csv")).expect("effects.csv exists");
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().expect("header").split(',').collect();
    lines
        .map(|line| {
            let cells: HashMap<String, String> = header
                .iter()
                .zip(line.split(','))
                .map(|(h, c)| (h.to_string(), c.to_string()))
                .collect();
            ((cells["model_id"].clone(), cells["errors"].clone()), cells)
        })
        .collect()
}

fn number(cells: &HashMap<String, String>, column: &str) -> f64 {
    cells[column]
        .parse()
        .unwrap_or_else(|_| panic!("`{column}` holds `{}`", cells[column]))
}

/// Model id for each (outcome, focus, moderation) combination, from models.csv.
fn model_ids(dir: &Path) -> HashMap<(String, String, String), String> {
    let frame = read_csv(&dir.join("models.csv"));
    let ids = strings(&frame, "model_id");
    let (o, f, m) = (
        strings(&frame, "outcome"),
        strings(&frame, "focus"),
        strings(&frame, "moderation"),
    );
    (0..ids.len())
        .map(|i| ((o[i].clone(), f[i].clone(), m[i].clone()), ids[i].clone()))
        .collect()
}

fn check_folder(dir: &Path, scale: &str, fixture: &Value) {
    let ids = model_ids(dir);
    let effects = effects_table(dir);
    let models = fixture["models"].as_array().expect("models");
    assert_eq!(ids.len(), models.len(), "one model per fixture entry");
    for m in models {
        let key = (
            m["outcome"].as_str().unwrap().to_string(),
            m["focus"].as_str().unwrap().to_string(),
            m["moderation"].as_str().unwrap().to_string(),
        );
        let id = &ids[&key];
        for (errors, want) in m["errors"].as_object().unwrap() {
            let cells = &effects[&(id.clone(), errors.clone())];
            let what = format!("{key:?} {errors} {scale}");
            let want_scale = &want["scales"][scale];
            close(
                number(cells, "estimate"),
                want_scale["estimate"].as_f64().unwrap(),
                &format!("{what} estimate"),
            );
            close(
                number(cells, "std_error"),
                want_scale["std_error"].as_f64().unwrap(),
                &format!("{what} std_error"),
            );
            assert_eq!(
                number(cells, "df"),
                want["df"].as_f64().unwrap(),
                "{what} df"
            );
            for derived in ["proportional_change", "turning_point"] {
                match want.get(derived) {
                    Some(d) => {
                        close(
                            number(cells, derived),
                            d["value"].as_f64().unwrap(),
                            &format!("{what} {derived}"),
                        );
                        close(
                            number(cells, &format!("{derived}_se")),
                            d["std_error"].as_f64().unwrap(),
                            &format!("{what} {derived} SE"),
                        );
                    }
                    None => assert_eq!(cells[derived], "", "{what}: no {derived} expected"),
                }
            }
        }
    }
}

#[test]
fn every_scale_matches_statsmodels_with_textbook_conversions() {
    let fixture: Value = serde_json::from_str(
        &std::fs::read_to_string(fixture_dir().join("expected.json")).expect("fixture exists"),
    )
    .expect("fixture parses");
    let data = fixture_dir().join("data.csv").canonicalize().unwrap();
    for scale in ["marginal effect", "semi-elasticity", "elasticity"] {
        let work = tempfile::tempdir().unwrap();
        let study = work.path().join("study.toml");
        std::fs::write(&study, effects_study(&data, scale)).unwrap();
        let out = work.path().join("results");
        let run = specgrid(
            &["run", "study.toml", "--out", "results", "--quiet"],
            work.path(),
        );
        assert!(run.status.success(), "{}", text(&run));
        check_folder(&out, scale, &fixture);

        // Re-rendering needs the effects from the folder (it never silently falls back to raw
        // coefficients), and reading them back gives the same numbers and the same summary.
        std::fs::remove_file(out.join("effects.csv")).unwrap();
        let again = specgrid(&["report", "results"], work.path());
        assert!(
            !again.status.success(),
            "re-rendering without effects.csv must fail with a clear message: {}",
            text(&again)
        );
        assert!(text(&again).contains("effects.csv"), "{}", text(&again));
        let rerun = specgrid(
            &["run", "study.toml", "--out", "results", "--quiet"],
            work.path(),
        );
        assert!(rerun.status.success(), "{}", text(&rerun));
        let summary_before = std::fs::read_to_string(out.join("summary.json")).unwrap();
        let again = specgrid(&["report", "results"], work.path());
        assert!(again.status.success(), "{}", text(&again));
        check_folder(&out, scale, &fixture);
        let summary_after = std::fs::read_to_string(out.join("summary.json")).unwrap();
        assert_eq!(summary_before, summary_after, "re-rendered summary differs");
        assert!(
            summary_after.contains(&format!("\"{scale}\"")),
            "scale named in summary"
        );
    }
}
