//! The parts of `specgrid run` that serve unattended reruns: skipping a run whose inputs did
//! not change, the manifest, the comparison with an earlier run and the verdict.

use std::path::{Path, PathBuf};

use specgrid_data::Assembly;
use specgrid_report::Tolerance;
use specgrid_study::{Plan, Study};

use super::compare;
use crate::exit::Failure;
use crate::manifest::{
    hash_files, now_text, sha256_hex, Manifest, SampleRows, MANIFEST_FILE, MANIFEST_FORMAT,
};
use crate::output::Staging;
use crate::verdict::{Outcome, VERDICT_FILE};

/// What `run` was asked to do for reruns.
pub struct RerunOptions {
    /// Estimate even when the inputs did not change.
    pub force: bool,
    /// Earlier results folder to compare with.
    pub against: Option<PathBuf>,
    /// When an estimate counts as moved.
    pub tolerance: Tolerance,
    /// Memory bound in MiB.
    pub max_memory: Option<u64>,
}

/// Content hashes of a run's inputs, computed before anything is estimated.
pub struct Inputs {
    /// SHA-256 of the study file.
    pub study_sha256: String,
    /// SHA-256 of the data file.
    pub data_sha256: String,
    /// When the run started.
    pub started: String,
}

impl Inputs {
    /// Hashes the study text and the data file.
    pub fn hash(study_text: &str, plan: &Plan) -> Result<Inputs, Failure> {
        Ok(Inputs {
            study_sha256: sha256_hex(study_text.as_bytes()),
            data_sha256: specgrid_data::fingerprint(&plan.data_path)
                .map_err(|e| Failure::Data(e.to_string()))?,
            started: now_text(),
        })
    }
}

/// Recovers what a killed run left at `out` (see [`crate::output::recover`]), then:
/// `Some(result)` when `out` already holds a run of the same study and data and `--force` is
/// not given: the run is skipped, and exits as that run's verdict did.
pub fn skip_unchanged(out: &Path, inputs: &Inputs, force: bool) -> Option<Result<(), Failure>> {
    // First put back results a killed run left aside, so they are compared and kept.
    crate::output::recover(out);
    if force {
        return None;
    }
    let previous = Manifest::read(out)?;
    if previous.study_sha256 != inputs.study_sha256 || previous.data_sha256 != inputs.data_sha256 {
        return None;
    }
    if let Some(name) = previous.first_changed_file(out) {
        eprintln!(
            "note: {} is missing or changed since that run; estimating again",
            out.join(name).display()
        );
        return None;
    }
    println!(
        "skipped: {} already holds results for this study (sha256 {}…) and data (sha256 {}…), finished {}; pass --force to estimate again",
        out.display(),
        &inputs.study_sha256[..12],
        &inputs.data_sha256[..12],
        previous.finished
    );
    // A finding that failed its verdict keeps failing until the inputs change.
    let failed = std::fs::read_to_string(out.join(VERDICT_FILE))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
        .and_then(|v| v.get("holds").and_then(serde_json::Value::as_bool))
        == Some(false);
    Some(if failed {
        Err(Failure::Verdict(format!(
            "unchanged since the run whose verdict failed; see {}",
            out.join(VERDICT_FILE).display()
        )))
    } else {
        Ok(())
    })
}

/// After the results are staged: compares with the earlier run, judges the verdict, and writes
/// comparison.json, verdict.json (and the report's comparison section) into the staging folder.
/// Returns the terminal text and the verdict.
pub fn compare_and_judge(
    staging: &Staging,
    study: &Study,
    options: &RerunOptions,
) -> Result<(String, Option<Outcome>), Failure> {
    let against = options.against.as_deref().filter(|dir| {
        // The first run of a schedule has nothing to compare with; say so and go on.
        let exists = dir.join("run.json").exists();
        if !exists {
            eprintln!(
                "note: no earlier results at {}; nothing to compare with this time",
                dir.display()
            );
        }
        exists
    });
    if against.is_none() && study.verdict.is_none() {
        return Ok((String::new(), None));
    }
    compare::compare_folders(
        against,
        staging.dir(),
        study.verdict.as_ref(),
        None,
        options.tolerance,
        true,
    )
}

/// Writes manifest.json, the last file of the folder.
pub fn write_manifest(
    staging: &Staging,
    plan: &Plan,
    assembly: &Assembly,
    rows_read: usize,
    inputs: &Inputs,
    covariance_sums: &[specgrid_ols::MomentStats],
) -> Result<(), Failure> {
    let manifest = Manifest {
        format: MANIFEST_FORMAT.into(),
        specgrid_version: env!("CARGO_PKG_VERSION").into(),
        study_sha256: inputs.study_sha256.clone(),
        data_sha256: inputs.data_sha256.clone(),
        data_file: plan.data_path.display().to_string(),
        rows_read,
        samples: assembly
            .designs
            .iter()
            .enumerate()
            .map(|(i, d)| SampleRows {
                sample: d.sample_name.clone(),
                rows_in_sample: d.account.rows_in_sample,
                rows_used: d.account.rows_kept,
                models: d.models.len(),
                absorption: crate::manifest::Absorption::of(d, plan),
                covariance_sums: covariance_sums
                    .get(i)
                    .map(|s| crate::manifest::CovarianceSums {
                        from_moments: s.by_moments,
                        row_pass_fallbacks: s.fallbacks,
                    }),
            })
            .collect(),
        seed: plan.seed,
        threads: rayon::current_num_threads(),
        started: inputs.started.clone(),
        finished: now_text(),
        command_line: std::env::args().collect(),
        files: hash_files(staging.dir())?,
    };
    let path = staging.file(MANIFEST_FILE);
    std::fs::write(&path, manifest.to_json()?)
        .map_err(|e| Failure::Output(format!("{}: {e}", path.display())))
}

/// Test hook: with `SPECGRID_PAUSE_BEFORE_COMMIT_MS` set, waits that long with the complete
/// staging folder in place, so tests can interrupt a run at its most delicate moment
/// (DEVELOPERS.md). Never set it in production.
pub fn pause_for_tests() {
    if let Some(ms) = std::env::var("SPECGRID_PAUSE_BEFORE_COMMIT_MS")
        .ok()
        .and_then(|v| v.parse::<u64>().ok())
    {
        std::thread::sleep(std::time::Duration::from_millis(ms));
    }
}
