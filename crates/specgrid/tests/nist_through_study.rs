//! The NIST StRD linear regression sets driven through a study file and `specgrid run`: the
//! whole path (study → planner → data layer → engine → results file) must keep the engine's
//! accuracy. Certified values: NIST/ITL Statistical Reference Datasets, Linear Least Squares
//! Regression (public domain), copied with their source in tests/reference/nist/.

mod common;

use std::fs;
use std::path::Path;

use common::{floats, lre, read_csv, repo_root, specgrid, strings, text};

/// Writes a one-model study for a NIST set and runs it with `--all-terms`.
fn run_set(set: &str, focus: &str, always: &[&str], dir: &Path) -> polars::prelude::DataFrame {
    let data = repo_root()
        .join("tests/reference/nist")
        .join(format!("{set}.csv"));
    let controls = if always.is_empty() {
        String::new()
    } else {
        let terms: Vec<String> = always.iter().map(|t| format!("\"{t}\"")).collect();
        format!(
            "[[controls]]\nname = \"others\"\nrole = \"always\"\nterms = [{}]\n",
            terms.join(", ")
        )
    };
    let study = format!(
        "[study]\ntitle = \"NIST {set}\"\ndata = \"{}\"\nallow_data_outside_folder = true\n\n[outcome]\ncolumn = \"y\"\n\n[focus]\ncolumn = \"x{}\"\nforms = [{focus}]\n\n{controls}\n[errors]\nchoices = [\"classical\"]\n",
        data.display(),
        if always.is_empty() { "" } else { "1" },
    );
    let study_path = dir.join(format!("{set}.toml"));
    fs::write(&study_path, study).unwrap();
    let out = dir.join(format!("{set}-results"));
    let output = specgrid(
        &[
            "run",
            study_path.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--all-terms",
            "--quiet",
        ],
        dir,
    );
    assert!(output.status.success(), "{}", text(&output));
    read_csv(&out.join("terms.csv"))
}

/// Certified values of one set from tests/reference/nist/certified.json.
struct Certified {
    beta: Vec<f64>,
    sd: Vec<f64>,
    residual_sd: f64,
    r_squared: f64,
}

fn certified(name: &str) -> Certified {
    let path = repo_root().join("tests/reference/nist/certified.json");
    let all: serde_json::Value = serde_json::from_str(&fs::read_to_string(path).unwrap()).unwrap();
    let set = &all[name];
    let numbers = |key: &str| -> Vec<f64> {
        set[key]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect()
    };
    Certified {
        beta: numbers("beta"),
        sd: numbers("sd"),
        residual_sd: set["residual_sd"].as_f64().unwrap(),
        r_squared: set["r_squared"].as_f64().unwrap(),
    }
}

/// Checks every coefficient, its classical SE, the residual SD and R² against NIST at LRE ≥ 9
/// (absolute error ≤ 1e-9 × data scale where NIST certifies 0).
fn check(
    set: &str,
    name: &str,
    term_names: &[&str],
    frame: &polars::prelude::DataFrame,
    y_scale: f64,
) {
    let cert = certified(name);
    let terms = strings(frame, "term");
    let estimates = floats(frame, "estimate");
    let ses = floats(frame, "std_error");
    assert_eq!(
        terms.len(),
        term_names.len(),
        "{set}: one row per coefficient: {terms:?}"
    );
    for (j, want) in term_names.iter().enumerate() {
        let row = terms
            .iter()
            .position(|t| t == want)
            .unwrap_or_else(|| panic!("{set}: no term `{want}` in {terms:?}"));
        let b = lre(estimates[row], cert.beta[j]);
        let s = lre(ses[row], cert.sd[j]);
        assert!(b >= 9.0, "{set} {want}: coefficient LRE {b:.1} < 9");
        if cert.sd[j] == 0.0 {
            assert!(
                ses[row].abs() <= 1e-9 * y_scale,
                "{set} {want}: SE {} not 0",
                ses[row]
            );
        } else {
            assert!(s >= 9.0, "{set} {want}: SE LRE {s:.1} < 9");
        }
    }
    let resid_sd = floats(frame, "resid_sd")[0];
    let r2 = floats(frame, "r_squared")[0];
    if cert.residual_sd == 0.0 {
        assert!(
            resid_sd.abs() <= 1e-9 * y_scale,
            "{set}: residual SD {resid_sd} not 0"
        );
    } else {
        assert!(
            lre(resid_sd, cert.residual_sd) >= 9.0,
            "{set}: residual SD {resid_sd}"
        );
    }
    assert!(lre(r2, cert.r_squared) >= 9.0, "{set}: R² {r2}");
}

fn max_abs_y(set: &str) -> f64 {
    let text = fs::read_to_string(
        repo_root()
            .join("tests/reference/nist")
            .join(format!("{set}.csv")),
    )
    .unwrap();
    text.lines()
        .skip(1)
        .filter_map(|l| l.split(',').next()?.parse::<f64>().ok())
        .fold(0.0, |m: f64, y| m.max(y.abs()))
}

const POLY5: [&str; 6] = ["(intercept)", "x", "x^2", "x^3", "x^4", "x^5"];

#[test]
fn norris_linear() {
    let dir = tempfile::tempdir().unwrap();
    let frame = run_set("norris", "\"level\"", &[], dir.path());
    check(
        "norris",
        "Norris",
        &["(intercept)", "x"],
        &frame,
        max_abs_y("norris"),
    );
}

#[test]
fn pontius_quadratic() {
    let dir = tempfile::tempdir().unwrap();
    let frame = run_set("pontius", "\"quadratic\"", &[], dir.path());
    check(
        "pontius",
        "Pontius",
        &["(intercept)", "x", "x^2"],
        &frame,
        max_abs_y("pontius"),
    );
}

#[test]
fn longley_six_regressors() {
    let dir = tempfile::tempdir().unwrap();
    let frame = run_set(
        "longley",
        "\"level\"",
        &["x2", "x3", "x4", "x5", "x6"],
        dir.path(),
    );
    check(
        "longley",
        "Longley",
        &["(intercept)", "x1", "x2", "x3", "x4", "x5", "x6"],
        &frame,
        max_abs_y("longley"),
    );
}

#[test]
fn wampler_polynomials() {
    for (set, name) in [
        ("wampler1", "Wampler1"),
        ("wampler2", "Wampler2"),
        ("wampler3", "Wampler3"),
    ] {
        let dir = tempfile::tempdir().unwrap();
        let frame = run_set(set, "{ polynomial = 5 }", &[], dir.path());
        check(set, name, &POLY5, &frame, max_abs_y(set));
    }
}
