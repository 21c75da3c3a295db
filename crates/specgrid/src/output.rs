//! Atomic results folders: everything is written into a hidden staging folder beside the target
//! and renamed into place at the end, so a failed or interrupted run never leaves half a folder
//! and never damages the previous results.

use std::fs;
use std::path::{Path, PathBuf};

use crate::exit::Failure;
use crate::interrupt;

/// A results folder being written. Dropping it without [`Staging::commit`] removes the staging
/// folder; so does Ctrl-C or SIGTERM (see `interrupt.rs`).
pub struct Staging {
    target: PathBuf,
    staging: PathBuf,
    committed: bool,
}

impl Staging {
    /// Creates a fresh staging folder beside `target` (same parent, so the final rename stays on
    /// one file system), after removing staging folders left by runs that were killed outright.
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
        recover(target);
        let staging = parent.join(format!(".{name}.partial-{}", std::process::id()));
        let mut registry = interrupt::lock();
        if staging.exists() {
            fs::remove_dir_all(&staging).map_err(|e| io_failure(&staging, e))?;
        }
        fs::create_dir(&staging).map_err(|e| io_failure(&staging, e))?;
        *registry = Some(staging.clone());
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
    /// after the new one is complete: it is first renamed aside, then removed. A signal arriving
    /// meanwhile waits until the renames are done.
    pub fn commit(mut self) -> Result<PathBuf, Failure> {
        let mut registry = interrupt::lock();
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
        *registry = None;
        if had_previous {
            fs::remove_dir_all(&aside).map_err(|e| io_failure(&aside, e))?;
        }
        Ok(self.target.clone())
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if !self.committed {
            let mut registry = interrupt::lock();
            let _ = fs::remove_dir_all(&self.staging);
            *registry = None;
        }
    }
}

/// Cleans up after runs that were killed outright (SIGKILL, a power cut), which no handler can
/// do: removes their `.NAME.partial-PID` staging folders, and when such a run died between
/// moving the old results aside and moving the new ones in, puts the old results
/// (`.NAME.partial-PID.previous`) back (or removes them when the new ones are in place).
/// Only on systems with /proc, where "is that process
/// alive" has a cheap answer.
pub fn recover(target: &Path) {
    if !Path::new("/proc/self").exists() {
        return;
    }
    let parent = match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let Some(name) = target.file_name().map(|n| n.to_string_lossy().into_owned()) else {
        return;
    };
    let prefix = format!(".{name}.partial-");
    let Ok(entries) = fs::read_dir(parent) else {
        return;
    };
    for entry in entries.flatten() {
        let file_name = entry.file_name().to_string_lossy().into_owned();
        let Some(rest) = file_name.strip_prefix(&prefix) else {
            continue;
        };
        let previous = rest.ends_with(".previous");
        let alive = rest
            .trim_end_matches(".previous")
            .parse::<u32>()
            .is_ok_and(|pid| {
                pid == std::process::id() || Path::new(&format!("/proc/{pid}")).exists()
            });
        if alive {
            continue;
        }
        if previous && !target.exists() {
            let _ = fs::rename(entry.path(), target);
        } else {
            // A staging folder, or old results the new ones already replaced.
            let _ = fs::remove_dir_all(entry.path());
        }
    }
}

fn io_failure(path: &Path, e: std::io::Error) -> Failure {
    Failure::Output(format!("{}: {e}", path.display()))
}
