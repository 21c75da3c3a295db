//! Hostile or broken input never crashes or hangs the tool: each case ends within a deadline
//! with the documented exit code, a message naming the file (and line or position), no panic
//! and no results folder.

mod common;

use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use common::{read_parquet, strings};

/// Runs the binary, killing it if it takes longer than a minute (a hang is a failure).
fn run_bounded(args: &[&str], cwd: &Path) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_specgrid"))
        .args(args)
        .current_dir(cwd)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let deadline = Instant::now() + Duration::from_secs(60);
    while child.try_wait().unwrap().is_none() {
        if Instant::now() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!("specgrid {args:?} hung");
        }
        std::thread::sleep(Duration::from_millis(10));
    }
    child.wait_with_output().unwrap()
}

/// A study on `data` (file name relative to the study) with outcome `y` and focus `x`.
fn study(dir: &Path, data: &str, outcome: &str, focus: &str, extra: &str) -> PathBuf {
    let text = format!(
        "[study]\ntitle = \"hostile\"\ndata = \"{data}\"\n{extra}\n[outcome]\ncolumn = \"{outcome}\"\n\n[focus]\ncolumn = \"{focus}\"\n\n[errors]\nchoices = [\"hc1\"]\n"
    );
    let path = dir.join("study.toml");
    fs::write(&path, text).unwrap();
    path
}

/// 30 rows of y = 2 + 0.5·x + wobble, with a text column and a trailing newline.
fn good_csv() -> String {
    let mut csv = String::from("y,x,label\n");
    for i in 0..30 {
        let x = (i % 6) as f64 + 0.1 * i as f64;
        csv.push_str(&format!(
            "{},{x},plot {i}\n",
            2.0 + 0.5 * x + (i as f64).sin()
        ));
    }
    csv
}

/// Runs `study` and checks the refusal: exit `code`, every needle in stderr, no panic, and no
/// results or staging folder.
fn refused(study: &Path, code: i32, needles: &[&str]) {
    let dir = study.parent().unwrap();
    let out = dir.join("res");
    let o = run_bounded(
        &[
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ],
        dir,
    );
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(code), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    for needle in needles {
        assert!(stderr.contains(needle), "`{needle}` missing from: {stderr}");
    }
    assert!(!out.exists());
    let leftovers = fs::read_dir(dir)
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .contains("partial")
        })
        .count();
    assert_eq!(leftovers, 0);
}

#[test]
fn broken_csv_files_are_refused_with_the_line() {
    let good = good_csv();
    let lines: Vec<&str> = good.lines().collect();
    let cases: Vec<(&str, String, Vec<&str>)> = vec![
        // Cut short mid-line by a failed copy: no final line end, too few fields.
        (
            "cut",
            good[..good.len() - 9].to_string(),
            vec!["line 31", "cut short"],
        ),
        // A stray separator on line 5.
        (
            "stray",
            good.replacen(lines[4], &format!("{},extra", lines[4]), 1),
            vec!["line 5", "3", "4 fields", "stray separator"],
        ),
        // A quote opened and never closed on line 3.
        (
            "quote",
            good.replacen("plot 1\n", "\"plot 1\n", 1),
            vec!["line 3", "never closed"],
        ),
        // Missing cells on line 8 (not the end of the file).
        (
            "short",
            good.replacen(lines[7], lines[7].split(',').next().unwrap(), 1),
            vec!["line 8", "1 fields", "missing cells"],
        ),
        ("empty", String::new(), vec!["data.csv"]),
        (
            "binary",
            "\u{0}\u{1}\u{2}PAR1\u{ff}".repeat(40),
            vec!["data.csv"],
        ),
    ];
    for (name, content, needles) in cases {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("data.csv"), content).unwrap();
        let s = study(dir.path(), "data.csv", "y", "x", "");
        let mut all = needles.clone();
        all.push("data.csv");
        eprintln!("case {name}");
        refused(&s, 4, &all);
    }
}

#[test]
fn broken_parquet_files_are_refused_naming_the_file() {
    // A real Parquet file whose metadata bytes were damaged; the polars reader used to panic
    // on it (found by byte-flipping a demo file).
    let damaged =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/damaged-metadata.parquet");
    let bytes = fs::read(&damaged).unwrap();
    let cases: Vec<(&str, Vec<u8>)> = vec![
        ("damaged", bytes.clone()),
        ("truncated", bytes[..bytes.len() / 2].to_vec()),
        ("tiny", b"PAR1".to_vec()),
        ("empty", Vec::new()),
    ];
    for (name, content) in cases {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("data.parquet"), content).unwrap();
        let s = study(dir.path(), "data.parquet", "yield_t_ha", "visits", "");
        eprintln!("case {name}");
        refused(&s, 4, &["data.parquet"]);
    }
}

#[test]
fn column_and_file_names_with_spaces_and_unicode_work_end_to_end() {
    let dir = tempfile::tempdir().unwrap();
    let csv = good_csv().replacen("y,x,label", "rendement (t/ha),visites été,étiquette", 1);
    fs::create_dir(dir.path().join("données")).unwrap();
    fs::write(dir.path().join("données/parcelles 2026.csv"), csv).unwrap();
    let s = study(
        dir.path(),
        "données/parcelles 2026.csv",
        "rendement (t/ha)",
        "visites été",
        "",
    );
    let out = dir.path().join("résultats");
    let o = run_bounded(
        &[
            "run",
            s.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ],
        dir.path(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let frame = read_parquet(&out.join("models.parquet"));
    assert_eq!(strings(&frame, "term"), ["visites été"]);
    assert_eq!(strings(&frame, "outcome_term"), ["rendement (t/ha)"]);
    // A misspelt Unicode column is named in the refusal.
    let s = study(
        dir.path(),
        "données/parcelles 2026.csv",
        "rendement (t/ha)",
        "visites ete",
        "",
    );
    refused(&s, 4, &["visites ete", "parcelles 2026.csv"]);
}

#[test]
fn hostile_study_files_are_refused_with_positions() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("data.csv"), good_csv()).unwrap();
    // Wrong types and an unknown key, all reported at once with line:column.
    let s = study(
        dir.path(),
        "data.csv",
        "y",
        "x",
        "seed = \"seven\"\nintercep = true\n",
    );
    refused(
        &s,
        3,
        &[
            "study.toml:4:8: `seed` in [study] must be an integer, found a string",
            "study.toml:5:1: unknown key `intercep`",
            "did you mean `intercept`",
        ],
    );
    // Data outside the study's folder needs the explicit key.
    let s = study(dir.path(), "../data.csv", "y", "x", "");
    refused(
        &s,
        3,
        &[
            "study.toml:3:8",
            "outside the study file's folder",
            "allow_data_outside_folder",
        ],
    );
    // A grid of 2^60 models is counted, never built, and refused at once.
    let blocks: String = (0..60)
        .map(|i| format!("[[controls]]\nname = \"b{i}\"\nrole = \"optional\"\nterms = [\"x\"]\n"))
        .collect();
    let text = fs::read_to_string(&s)
        .unwrap()
        .replace("\"../data.csv\"", "\"data.csv\"")
        + &blocks;
    fs::write(&s, text).unwrap();
    refused(&s, 3, &["study.toml", "1152921504606846976", "sample"]);
}
