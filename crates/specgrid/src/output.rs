//! Atomic results folders: everything is written into a hidden staging folder beside the target
//! and renamed into place at the end, so a failed or interrupted run never leaves half a folder
//! and never damages the previous results.

use std::fs;
use std::path::{Path, PathBuf};

use crate::exit::Failure;

/// A results folder being written. Dropping it without [`Staging::commit`] removes the staging
/// folder.
pub struct Staging {
    target: PathBuf,
    staging: PathBuf,
    committed: bool,
}

impl Staging {
    /// Creates a fresh staging folder beside `target` (same parent, so the final rename stays on
    /// one file system).
    pub fn begin(target: &Path) -> Result<Staging, Failure> {
        let parent = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        fs::create_dir_all(&parent).map_err(|e| {
            Failure::Output(format!(
                "cannot create the folder {}: {e}",
                parent.display()
            ))
        })?;
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "results".into());
        let staging = parent.join(format!(".{name}.partial-{}", std::process::id()));
        if staging.exists() {
            fs::remove_dir_all(&staging).map_err(|e| io_failure(&staging, e))?;
        }
        fs::create_dir(&staging).map_err(|e| io_failure(&staging, e))?;
        Ok(Staging {
            target: target.to_path_buf(),
            staging,
            committed: false,
        })
    }

    /// The staging folder itself.
    pub fn dir(&self) -> &Path {
        &self.staging
    }

    /// Path of a file inside the staging folder.
    pub fn file(&self, name: &str) -> PathBuf {
        self.staging.join(name)
    }

    /// Moves the finished folder into place. An existing folder at the target is replaced only
    /// after the new one is complete: it is first renamed aside, then removed.
    pub fn commit(mut self) -> Result<PathBuf, Failure> {
        let aside = self.staging.with_extension("previous");
        let had_previous = self.target.exists();
        if had_previous {
            if !self.target.is_dir() {
                return Err(Failure::Output(format!(
                    "{} exists and is not a folder; choose another --out",
                    self.target.display()
                )));
            }
            fs::rename(&self.target, &aside).map_err(|e| io_failure(&self.target, e))?;
        }
        if let Err(e) = fs::rename(&self.staging, &self.target) {
            if had_previous {
                // Put the old results back so a failed rename loses nothing.
                let _ = fs::rename(&aside, &self.target);
            }
            return Err(io_failure(&self.target, e));
        }
        self.committed = true;
        if had_previous {
            fs::remove_dir_all(&aside).map_err(|e| io_failure(&aside, e))?;
        }
        Ok(self.target.clone())
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if !self.committed {
            let _ = fs::remove_dir_all(&self.staging);
        }
    }
}

fn io_failure(path: &Path, e: std::io::Error) -> Failure {
    Failure::Output(format!("{}: {e}", path.display()))
}
