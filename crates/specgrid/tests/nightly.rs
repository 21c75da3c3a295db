//! Unattended reruns: byte-identical results whatever the thread count, skipping unchanged
//! inputs, comparing with an earlier run, the verdict exit code, and interrupted runs that leave
//! the earlier results intact.

mod common;

use std::collections::BTreeSet;
use std::fs;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{floats, read_parquet, run_study as run, specgrid, strings, text};

/// Exit code of a failed verdict (docs/cli.md).
const VERDICT_FAILED: i32 = 7;

/// 80 rows: y = 1 + slope·x + 0.5·z + a fixed wobble, in 8 clusters. Values from formulas, not
/// from a random generator, so the file is the same on every machine.
fn write_data(dir: &Path, slope: f64) -> PathBuf {
    let mut csv = String::from("y,x,z,cluster\n");
    for i in 0..80 {
        let x = 1.0 + (i % 9) as f64 + 0.3 * (i as f64 * 0.7).sin();
        let z = ((i * 7) % 13) as f64 / 4.0;
        let wobble = 0.6 * (i as f64 * 2.3).cos();
        let y = 1.0 + slope * x + 0.5 * z + wobble;
        csv.push_str(&format!("{y},{x},{z},k{}\n", i % 8));
    }
    let path = dir.join("plots.csv");
    fs::write(&path, csv).unwrap();
    path
}

/// Outcome level/log1p × focus level/log1p × one optional block = 8 models, three covariance
/// choices, and a verdict.
const STUDY: &str = r#"[study]
title = "nightly"
data = "plots.csv"
seed = 11

[outcome]
column = "y"
forms = ["level", "asinh"]

[focus]
column = "x"
forms = ["level", "log1p"]

[[controls]]
name = "soil"
role = "optional"
terms = ["z"]

[errors]
choices = ["classical", "hc1", { cluster = "cluster" }]

[verdict]
errors = "hc1"
min_share_baseline_sign = 0.9
baseline_significant = true
max_sign_flips = 0
"#;

fn setup(slope: f64) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    write_data(dir.path(), slope);
    let study = dir.path().join("study.toml");
    fs::write(&study, STUDY).unwrap();
    (dir, study)
}

fn files(dir: &Path) -> BTreeSet<String> {
    fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect()
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&fs::read_to_string(path).unwrap()).unwrap()
}

/// SHA-256 by coreutils' sha256sum (an implementation outside the project).
fn sha256sum(path: &Path) -> String {
    let out = Command::new("sha256sum").arg(path).output().unwrap();
    String::from_utf8(out.stdout).unwrap()[..64].to_string()
}

#[test]
fn one_and_two_threads_give_identical_files_apart_from_the_manifest() {
    let (dir, study) = setup(0.8);
    let (one, two) = (dir.path().join("one"), dir.path().join("two"));
    for (out, threads) in [(&one, "1"), (&two, "2")] {
        let o = run(&study, out, &["--threads", threads, "--all-terms"]);
        assert!(o.status.success(), "{}", text(&o));
    }
    let names = files(&one);
    assert_eq!(names, files(&two));
    for expected in [
        "manifest.json",
        "models.parquet",
        "models.csv",
        "terms.csv",
        "summary.json",
        "report.html",
        "run.json",
        "verdict.json",
    ] {
        assert!(
            names.contains(expected),
            "{expected} missing from {names:?}"
        );
    }
    for name in names.iter().filter(|n| *n != "manifest.json") {
        assert_eq!(
            fs::read(one.join(name)).unwrap(),
            fs::read(two.join(name)).unwrap(),
            "{name} differs between 1 and 2 threads"
        );
    }
    let (m1, m2) = (
        json(&one.join("manifest.json")),
        json(&two.join("manifest.json")),
    );
    assert_eq!(m1["threads"], 1);
    assert_eq!(m2["threads"], 2);
    assert_eq!(m1["study_sha256"], sha256sum(&study).as_str());
    assert_eq!(
        m1["data_sha256"],
        sha256sum(&dir.path().join("plots.csv")).as_str()
    );
    assert_eq!(m1["seed"], 11);
    // 80 data rows, all complete and valid for every form: read = used (common practice).
    assert_eq!(m1["rows_read"], 80);
    assert_eq!(m1["samples"][0]["rows_used"], 80);
    assert_eq!(m1["samples"][0]["models"], 8);
    assert_eq!(m1["specgrid_version"], env!("CARGO_PKG_VERSION"));
    assert!(m1["started"].as_str().unwrap().ends_with('Z'));
    let command: Vec<&str> = m1["command_line"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    assert!(
        command.ends_with(&["--threads", "1", "--all-terms"]),
        "{command:?}"
    );
}

#[test]
fn a_rerun_on_unchanged_inputs_is_skipped_unless_forced() {
    let (dir, study) = setup(0.8);
    let out = dir.path().join("res");
    assert!(run(&study, &out, &[]).status.success());
    let manifest = fs::read(out.join("manifest.json")).unwrap();

    let again = run(&study, &out, &[]);
    assert!(again.status.success(), "{}", text(&again));
    assert!(
        String::from_utf8_lossy(&again.stdout).contains("skipped"),
        "{}",
        text(&again)
    );
    assert_eq!(
        fs::read(out.join("manifest.json")).unwrap(),
        manifest,
        "folder untouched"
    );

    // A damaged folder is never taken for an up-to-date one.
    fs::remove_file(out.join("summary.json")).unwrap();
    let repaired = run(&study, &out, &[]);
    assert!(repaired.status.success(), "{}", text(&repaired));
    assert!(text(&repaired).contains("summary.json is missing or changed"));
    assert!(out.join("summary.json").exists());

    let forced = run(&study, &out, &["--force", "--threads", "1"]);
    assert!(forced.status.success(), "{}", text(&forced));
    assert!(!String::from_utf8_lossy(&forced.stdout).contains("skipped"));
    assert_eq!(json(&out.join("manifest.json"))["threads"], 1);

    // New data: estimated again without --force.
    write_data(dir.path(), 0.9);
    let refreshed = run(&study, &out, &[]);
    assert!(refreshed.status.success(), "{}", text(&refreshed));
    assert!(!String::from_utf8_lossy(&refreshed.stdout).contains("skipped"));
}

/// Ids of the models with the level outcome and level focus, and their hc1 estimates.
fn level_level(dir: &Path) -> Vec<(String, f64)> {
    let frame = read_parquet(&dir.join("models.parquet"));
    let (ids, outcome, focus, errors) = (
        strings(&frame, "model_id"),
        strings(&frame, "outcome"),
        strings(&frame, "focus"),
        strings(&frame, "errors"),
    );
    let estimate = floats(&frame, "estimate");
    (0..frame.height())
        .filter(|&i| outcome[i] == "level" && focus[i] == "level" && errors[i] == "hc1")
        .map(|i| (ids[i].clone(), estimate[i]))
        .collect()
}

#[test]
fn compare_on_perturbed_data_reports_the_flips_and_exits_with_the_verdict_code() {
    let (dir, study) = setup(0.8);
    let old = dir.path().join("old");
    let first = run(&study, &old, &[]);
    assert!(first.status.success(), "{}", text(&first));
    assert_eq!(json(&old.join("verdict.json"))["holds"], true);

    // Deliberate perturbation: y − 1.6·x. OLS is linear in y and x lies in its own column
    // space, so every level-outcome, level-focus estimate drops by exactly 1.6 (handbook
    // algebra of least squares, e.g. Greene, Econometric Analysis, ch. 3): 0.8 → about −0.8.
    write_data(dir.path(), -0.8);
    let new = dir.path().join("new");
    let second = run(&study, &new, &[]);
    // Without --against the flip rule is not checked, but the sign and significance rules
    // still hold on the new data alone (every model is negative and significant).
    assert!(second.status.success(), "{}", text(&second));

    let old_level = level_level(&old);
    let new_level = level_level(&new);
    assert_eq!(old_level.len(), 2, "soil in and out");
    for ((id_old, b_old), (id_new, b_new)) in old_level.iter().zip(&new_level) {
        assert_eq!(id_old, id_new, "model ids are stable across data refreshes");
        assert!((b_new - (b_old - 1.6)).abs() < 1e-9, "{b_old} → {b_new}");
    }

    let compared = specgrid(
        &["compare", old.to_str().unwrap(), new.to_str().unwrap()],
        dir.path(),
    );
    assert_eq!(
        compared.status.code(),
        Some(VERDICT_FAILED),
        "{}",
        text(&compared)
    );
    let stderr = String::from_utf8_lossy(&compared.stderr);
    assert!(
        stderr.contains("sign flips against the earlier run"),
        "{stderr}"
    );
    let c = json(&new.join("comparison.json"));
    assert_eq!(c["errors"], "hc1");
    assert_eq!(c["matched"], 8);
    let flipped: BTreeSet<&str> = c["sign_flips"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m["model_id"].as_str().unwrap())
        .collect();
    for (id, _) in &old_level {
        assert!(flipped.contains(id.as_str()), "{id} not among {flipped:?}");
    }
    assert!(c["added"].as_array().unwrap().is_empty());
    assert!(c["aggregates"].as_array().unwrap().len() > 10);
    assert_eq!(json(&new.join("verdict.json"))["holds"], false);
    assert!(fs::read_to_string(new.join("comparison.html"))
        .unwrap()
        .contains("Sign flips"));

    // The same through `run --against`, replacing the earlier folder in one go: the comparison
    // is made before the folder is replaced and lands in the report.
    let rerun = run(&study, &old, &["--against", old.to_str().unwrap()]);
    assert_eq!(
        rerun.status.code(),
        Some(VERDICT_FAILED),
        "{}",
        text(&rerun)
    );
    let c = json(&old.join("comparison.json"));
    assert_eq!(c["sign_flips"].as_array().unwrap().len(), flipped.len());
    let html = fs::read_to_string(old.join("report.html")).unwrap();
    assert!(html.contains("Compared with the earlier run") && html.contains("FAILS"));
    // Unchanged inputs are skipped, and the failed verdict still fails.
    let skipped = run(&study, &old, &["--against", old.to_str().unwrap()]);
    assert_eq!(
        skipped.status.code(),
        Some(VERDICT_FAILED),
        "{}",
        text(&skipped)
    );
    assert!(String::from_utf8_lossy(&skipped.stdout).contains("skipped"));
}

fn partial_folders(parent: &Path) -> Vec<String> {
    files(parent)
        .into_iter()
        .filter(|n| n.contains(".partial-"))
        .collect()
}

/// Starts a forced run that pauses with its complete staging folder in place, and returns it
/// once that folder exists. The caller waits for it (the lint cannot see that).
#[allow(clippy::zombie_processes)]
fn start_paused_run(study: &Path, out: &Path) -> std::process::Child {
    let mut child = Command::new(env!("CARGO_BIN_EXE_specgrid"))
        .args([
            "run",
            study.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
            "--force",
        ])
        .env("SPECGRID_PAUSE_BEFORE_COMMIT_MS", "20000")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let parent = out.parent().unwrap();
    let deadline = Instant::now() + Duration::from_secs(60);
    loop {
        let ready = partial_folders(parent)
            .iter()
            .any(|p| parent.join(p).join("manifest.json").exists());
        if ready {
            return child;
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            let _ = child.wait();
            panic!("the staging folder never appeared");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

fn snapshot(dir: &Path) -> Vec<(String, Vec<u8>)> {
    files(dir)
        .into_iter()
        .map(|n| (n.clone(), fs::read(dir.join(&n)).unwrap()))
        .collect()
}

#[test]
fn a_run_interrupted_by_sigterm_or_ctrl_c_removes_its_staging_and_keeps_the_old_folder() {
    let (dir, study) = setup(0.8);
    let out = dir.path().join("res");
    assert!(run(&study, &out, &[]).status.success());
    let before = snapshot(&out);
    write_data(dir.path(), 0.5);
    // 128 + signal number, as shells report it (common practice): SIGTERM 15, SIGINT 2.
    for (signal, code) in [("-TERM", 143), ("-INT", 130)] {
        let mut child = start_paused_run(&study, &out);
        let status = Command::new("kill")
            .args([signal, &child.id().to_string()])
            .status()
            .unwrap();
        assert!(status.success());
        let exit = child.wait().unwrap();
        assert_eq!(exit.code(), Some(code), "{signal}");
        assert!(
            partial_folders(dir.path()).is_empty(),
            "{signal} left a staging folder"
        );
        assert_eq!(snapshot(&out), before, "{signal} touched the old results");
    }
}

#[test]
fn a_run_killed_outright_keeps_the_old_folder_and_the_next_run_cleans_up() {
    let (dir, study) = setup(0.8);
    let out = dir.path().join("res");
    assert!(run(&study, &out, &[]).status.success());
    let before = snapshot(&out);
    let mut child = start_paused_run(&study, &out);
    child.kill().unwrap(); // SIGKILL: no handler runs
    child.wait().unwrap();
    assert_eq!(snapshot(&out), before);
    assert_eq!(
        partial_folders(dir.path()).len(),
        1,
        "SIGKILL cannot clean up"
    );
    // The next run removes the abandoned staging folder of the dead process.
    let next = run(&study, &out, &["--force"]);
    assert!(next.status.success(), "{}", text(&next));
    assert!(partial_folders(dir.path()).is_empty());
}

#[test]
fn a_grid_whose_results_would_not_fit_is_refused_up_front_with_the_estimate() {
    let (dir, study) = setup(0.8);
    let out = dir.path().join("res");
    let o = run(&study, &out, &["--max-memory", "0"]);
    assert_eq!(o.status.code(), Some(3), "{}", text(&o));
    let all = text(&o);
    for needle in [
        "study.toml",
        "would need about",
        "8 models",
        "24 result rows",
        "--max-memory",
    ] {
        assert!(all.contains(needle), "`{needle}` missing: {all}");
    }
    assert!(!out.exists());
    assert!(run(&study, &out, &["--max-memory", "64"]).status.success());
}

#[test]
fn comparing_with_something_that_is_not_a_results_folder() {
    let (dir, study) = setup(0.8);
    let out = dir.path().join("res");
    assert!(run(&study, &out, &[]).status.success());
    let empty = dir.path().join("empty");
    fs::create_dir(&empty).unwrap();
    // `compare` refuses, naming the folder, with the data exit code.
    let o = specgrid(
        &["compare", empty.to_str().unwrap(), out.to_str().unwrap()],
        dir.path(),
    );
    assert_eq!(o.status.code(), Some(4), "{}", text(&o));
    assert!(
        text(&o).contains("a specgrid results folder"),
        "{}",
        text(&o)
    );
    // `run --against` keeps its new results and says why there is no comparison; the flip
    // rule is then not checked, the other rules hold.
    let o = run(
        &study,
        &out,
        &["--force", "--against", empty.to_str().unwrap()],
    );
    assert!(o.status.success(), "{}", text(&o));
    assert!(text(&o).contains("nothing to compare with"), "{}", text(&o));
    let verdict = json(&out.join("verdict.json"));
    assert_eq!(verdict["holds"], true);
    assert_eq!(verdict["not_checked"].as_array().unwrap().len(), 1);
    assert!(!out.join("comparison.json").exists());
}

#[test]
fn old_results_moved_aside_by_a_run_killed_mid_commit_are_put_back() {
    let (dir, study) = setup(0.8);
    let out = dir.path().join("res");
    assert!(run(&study, &out, &[]).status.success());
    let before = snapshot(&out);
    // What a run killed between its two renames leaves: the old results moved aside under the
    // name of a process that no longer exists (pid_max on Linux is at most 2^22, common
    // practice), and no folder at --out.
    let aside = dir.path().join(".res.partial-4194999.previous");
    fs::rename(&out, &aside).unwrap();
    // The next run fails on broken data, yet the old results are back in place.
    fs::write(dir.path().join("plots.csv"), "y,x\n1,2\n").unwrap();
    let o = run(&study, &out, &[]);
    assert_eq!(o.status.code(), Some(4), "{}", text(&o));
    assert_eq!(snapshot(&out), before);
    assert!(!aside.exists());
}
