//! The make-orchards binary: writes the same bytes as the library, and refuses bad input with
//! a message and exit code 2 without leaving a file behind.

use std::process::Command;

fn make_orchards() -> Command {
    Command::new(env!("CARGO_BIN_EXE_make-orchards"))
}

#[test]
fn writes_the_library_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("small.csv");
    let status = make_orchards()
        .args(["--plots", "40", "--villages", "10", "--seed", "7", "--out"])
        .arg(&out)
        .status()
        .unwrap();
    assert!(status.success());
    let cfg = specgrid_demo::OrchardConfig {
        plots: 40,
        villages: 10,
        seed: 7,
        ..Default::default()
    };
    let mut expected = Vec::new();
    specgrid_demo::generate(&cfg)
        .unwrap()
        .write_csv(&mut expected)
        .unwrap();
    assert_eq!(std::fs::read(&out).unwrap(), expected);
    // Header plus 40 plots × 2 seasons.
    assert_eq!(expected.iter().filter(|&&b| b == b'\n').count(), 81);
}

#[test]
fn bad_input_names_the_problem_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("bad.csv");
    for (args, expected) in [
        (
            vec!["--plots", "abc"],
            "--plots abc: expected a whole number",
        ),
        (vec!["--districts", "12"], "give 1 to 8"),
        (vec!["--colour", "red"], "unknown option --colour"),
        (vec!["--plots"], "--plots needs a value"),
    ] {
        let result = make_orchards()
            .args(&args)
            .arg("--out")
            .arg(&out)
            .output()
            .unwrap();
        assert_eq!(result.status.code(), Some(2), "{args:?}");
        let stderr = String::from_utf8_lossy(&result.stderr);
        assert!(stderr.contains(expected), "{args:?}: {stderr}");
        assert!(!out.exists());
    }
    let missing_out = make_orchards().output().unwrap();
    assert_eq!(missing_out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&missing_out.stderr).contains("--out PATH is required"));
}
