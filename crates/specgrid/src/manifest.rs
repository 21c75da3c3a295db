//! `manifest.json`: what a results folder was made from and how. It is the only file of the
//! folder that may differ between two runs on the same inputs (times, thread count, command
//! line); every other file is byte-identical whatever the thread count or machine.

use std::path::Path;

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::exit::Failure;

/// Format tag of `manifest.json`.
pub const MANIFEST_FORMAT: &str = "specgrid-manifest-1";

/// File name of the manifest inside a results folder.
pub const MANIFEST_FILE: &str = "manifest.json";

/// Rows read and used by one design (one per sample, or more under per-model rows).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SampleRows {
    /// Sample option name.
    pub sample: String,
    /// Rows meeting the sample's conditions.
    pub rows_in_sample: usize,
    /// Rows the models of this design use.
    pub rows_used: usize,
    /// Models estimated on these rows.
    pub models: usize,
    /// What absorbing fixed effects and applying weights did, for designs that do either.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub absorption: Option<Absorption>,
    /// How the engine computed the residual-based covariance sums (docs/methods.md,
    /// "Covariances from moments").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub covariance_sums: Option<CovarianceSums>,
}

/// Models of one design whose HC/BP/cluster sums came from the union's moments, and models the
/// rounding bound sent back to the row pass (the rest used the row pass from the start).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CovarianceSums {
    /// Models served by the moments.
    pub from_moments: usize,
    /// Models whose bound was too loose, recomputed by the row pass.
    pub row_pass_fallbacks: usize,
}

/// The record of one absorption pass (docs/methods.md, "Fixed effects and weights").
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Absorption {
    /// Absorbed columns.
    pub effects: Vec<String>,
    /// Levels of each, after dropping singletons.
    pub levels: Vec<usize>,
    /// Parameters the effects absorb (counted in the degrees of freedom).
    pub absorbed_params: usize,
    /// Sweeps of the alternating projections (1 for one effect).
    pub sweeps: usize,
    /// Largest relative change of the last sweep.
    pub final_change: f64,
    /// Rows dropped as alone in a level.
    pub singletons_dropped: usize,
    /// Rows dropped for a zero weight.
    pub zero_weight_dropped: usize,
    /// Weights as `kind:column`, if any.
    pub weights: Option<String>,
}

impl Absorption {
    /// The record of a prepared design, if it was prepared.
    pub fn of(
        design: &specgrid_data::SampleDesign,
        plan: &specgrid_study::Plan,
    ) -> Option<Absorption> {
        let info = &design.absorbed.as_ref()?.info;
        Some(Absorption {
            effects: info.effects.clone(),
            levels: info.levels.clone(),
            absorbed_params: info.absorbed_params,
            sweeps: info.sweeps,
            final_change: info.final_change,
            singletons_dropped: info.singletons_dropped,
            zero_weight_dropped: info.zero_weight_dropped,
            weights: design.weights_label(plan),
        })
    }

    /// One line for the terminal.
    pub fn summary(&self, sample: &str) -> String {
        let effects = if self.effects.is_empty() {
            "no effects".to_string()
        } else {
            format!(
                "{} ({} parameters)",
                self.effects.join(" + "),
                self.absorbed_params
            )
        };
        format!(
            "note: sample `{sample}`: absorbed {effects} in {} sweep(s), last change {:.1e}; {} singleton and {} zero-weight row(s) dropped{}",
            self.sweeps,
            self.final_change,
            self.singletons_dropped,
            self.zero_weight_dropped,
            self.weights
                .as_ref()
                .map(|w| format!("; weights {w}"))
                .unwrap_or_default()
        )
    }
}

/// The manifest of one run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Format tag ([`MANIFEST_FORMAT`]).
    pub format: String,
    /// specgrid version that wrote the folder.
    pub specgrid_version: String,
    /// SHA-256 of the study file's bytes.
    pub study_sha256: String,
    /// SHA-256 of the data file's bytes.
    pub data_sha256: String,
    /// The data file as the study resolved it.
    pub data_file: String,
    /// Rows in the data file.
    pub rows_read: usize,
    /// Rows per design.
    pub samples: Vec<SampleRows>,
    /// The study's seed.
    pub seed: u64,
    /// Worker threads used for estimation.
    pub threads: usize,
    /// Start of the run, UTC, RFC 3339.
    pub started: String,
    /// End of the run, UTC, RFC 3339.
    pub finished: String,
    /// The command line, one argument per entry.
    pub command_line: Vec<String>,
    /// SHA-256 of every other file of the folder, by name (sorted), so a damaged or edited
    /// folder is never taken for an up-to-date one.
    #[serde(default)]
    pub files: std::collections::BTreeMap<String, String>,
}

impl Manifest {
    /// Reads the manifest of a results folder; `None` when there is none or it cannot be read
    /// (a folder from an older version, or damaged: then nothing is skipped).
    pub fn read(dir: &Path) -> Option<Manifest> {
        let text = std::fs::read_to_string(dir.join(MANIFEST_FILE)).ok()?;
        serde_json::from_str(&text).ok()
    }

    /// The first file of `dir` that is missing or differs from its recorded hash, if any.
    pub fn first_changed_file(&self, dir: &Path) -> Option<String> {
        self.files
            .iter()
            .find(|(name, hash)| {
                file_sha256_hex(&dir.join(name.as_str())).map_or(true, |h| h != **hash)
            })
            .map(|(name, _)| name.clone())
    }

    /// Pretty JSON ending in a newline.
    pub fn to_json(&self) -> Result<String, Failure> {
        serde_json::to_string_pretty(self)
            .map(|s| s + "\n")
            .map_err(|e| Failure::Output(format!("{MANIFEST_FILE}: {e}")))
    }
}

/// SHA-256 of a byte string as 64 lowercase hex digits.
pub fn sha256_hex(bytes: &[u8]) -> String {
    lower_hex(&Sha256::digest(bytes))
}

/// Bytes as lowercase hex digits, two per byte.
fn lower_hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// SHA-256 of a file's bytes as 64 lowercase hex digits, read through a fixed buffer (result
/// files reach hundreds of megabytes).
pub fn file_sha256_hex(path: &Path) -> std::io::Result<String> {
    let mut hasher = Sha256::new();
    std::io::copy(&mut std::fs::File::open(path)?, &mut hasher)?;
    Ok(lower_hex(&hasher.finalize()))
}

/// The current time, UTC, RFC 3339 with seconds.
pub fn now_text() -> String {
    humantime::format_rfc3339_seconds(std::time::SystemTime::now()).to_string()
}

/// Files `specgrid compare` may write into a folder after its run; they are not hashed.
const WRITTEN_BY_COMPARE: [&str; 3] = ["comparison.json", "comparison.html", "verdict.json"];

/// SHA-256 of every file directly in `dir` except the manifest and the files `compare` may
/// rewrite, by name.
pub fn hash_files(dir: &Path) -> Result<std::collections::BTreeMap<String, String>, Failure> {
    use rayon::prelude::*;
    let fail = |e: std::io::Error| Failure::Output(format!("{}: {e}", dir.display()));
    let mut names = Vec::new();
    for entry in std::fs::read_dir(dir).map_err(fail)? {
        let entry = entry.map_err(fail)?;
        let name = entry.file_name().to_string_lossy().into_owned();
        if name == MANIFEST_FILE
            || WRITTEN_BY_COMPARE.contains(&name.as_str())
            || !entry.path().is_file()
        {
            continue;
        }
        names.push(name);
    }
    // The two large tables hash side by side.
    names
        .into_par_iter()
        .map(|name| {
            let hash = file_sha256_hex(&dir.join(&name)).map_err(fail)?;
            Ok((name, hash))
        })
        .collect()
}
