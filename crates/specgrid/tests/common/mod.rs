//! Helpers shared by the command-line tests: run the built binary, read result files.
#![allow(dead_code)]

use std::fs::File;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use polars::prelude::*;

/// The repository root (two levels above this crate).
pub fn repo_root() -> PathBuf {
    PathBuf::from(
        std::env::var("CARGO_MANIFEST_DIR")
            .unwrap_or_else(|_| env!("CARGO_MANIFEST_DIR").to_string()),
    )
    .join("../..")
}

/// Runs the `specgrid` binary with `args` from `cwd` and returns its output.
pub fn specgrid(args: &[&str], cwd: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_specgrid"))
        .args(args)
        .current_dir(cwd)
        .output()
        .expect("the specgrid binary runs")
}

/// `specgrid run STUDY --out OUT --quiet EXTRA…`, from the study's folder.
pub fn run_study(study: &Path, out: &Path, extra: &[&str]) -> Output {
    let mut args = vec![
        "run",
        study.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ];
    args.extend_from_slice(extra);
    specgrid(&args, study.parent().unwrap())
}

/// Stdout and stderr as text, for assertion messages.
pub fn text(output: &Output) -> String {
    format!(
        "status {:?}\n--- stdout\n{}\n--- stderr\n{}",
        output.status.code(),
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    )
}

/// Reads a Parquet file into a frame.
pub fn read_parquet(path: &Path) -> DataFrame {
    let file = File::open(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    ParquetReader::new(file).finish().expect("parquet reads")
}

/// Reads a CSV results file (header, inferred types) into a frame.
pub fn read_csv(path: &Path) -> DataFrame {
    CsvReadOptions::default()
        .with_has_header(true)
        .with_infer_schema_length(None)
        .try_into_reader_with_file_path(Some(path.to_path_buf()))
        .expect("csv opens")
        .finish()
        .expect("csv reads")
}

/// A text column as owned strings (nulls as empty).
pub fn strings(frame: &DataFrame, name: &str) -> Vec<String> {
    let column = frame.column(name).unwrap_or_else(|e| panic!("{name}: {e}"));
    let column = column.cast(&DataType::String).expect("casts to text");
    column
        .str()
        .expect("text column")
        .iter()
        .map(|v| v.unwrap_or("").to_string())
        .collect()
}

/// A numeric column as f64 (nulls as NaN).
pub fn floats(frame: &DataFrame, name: &str) -> Vec<f64> {
    let column = frame.column(name).unwrap_or_else(|e| panic!("{name}: {e}"));
    let column = column.cast(&DataType::Float64).expect("casts to f64");
    column
        .f64()
        .expect("f64 column")
        .iter()
        .map(|v| v.unwrap_or(f64::NAN))
        .collect()
}

/// Log relative error (McCullough 1998, The American Statistician 52:358): the number of correct
/// significant digits; absolute error is used where the certified value is 0.
pub fn lre(estimate: f64, certified: f64) -> f64 {
    let err = if certified == 0.0 {
        (estimate - certified).abs()
    } else {
        ((estimate - certified) / certified).abs()
    };
    if err == 0.0 {
        16.0
    } else {
        -err.log10()
    }
}

/// The study of the effects fixture's grid (tests/reference/statsmodels/effects), on `scale`.
pub fn effects_study(data: &Path, scale: &str) -> String {
    format!(
        r#"[study]
title = "effects reference"
data = "{}"
allow_data_outside_folder = true
seed = 1

[outcome]
column = "y"
forms = ["level", "log"]

[focus]
column = "x"
forms = ["level", "log1p", "quadratic"]
also_track = [{{ product = ["x", "d"] }}]

[[controls]]
name = "w"
role = "always"
terms = ["w"]

[[controls]]
name = "moderation"
role = "alternatives"
include_none = true
options = [{{ name = "moderated", terms = ["d", {{ product = ["x", "d"] }}] }}]

[errors]
choices = ["classical", "hc1", {{ cluster = "grp" }}]

[report]
scale = "{scale}"
"#,
        data.display()
    )
}
