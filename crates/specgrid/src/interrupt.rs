//! Ctrl-C and SIGTERM: remove the results folder being written, then exit with the documented
//! code (130 for SIGINT, 143 for SIGTERM: 128 + the signal number, as shells report it).
//! `signal-hook` runs the handling on an ordinary thread, so it may take locks and touch files,
//! which a raw signal handler may not (docs/nightly.md says why we use it).

use std::path::PathBuf;
use std::sync::{Mutex, MutexGuard};

use signal_hook::consts::{SIGINT, SIGTERM};
use signal_hook::iterator::Signals;

/// The staging folder to remove if a signal arrives; `None` when nothing is being written.
static STAGING: Mutex<Option<PathBuf>> = Mutex::new(None);

/// Starts the thread that waits for SIGINT and SIGTERM. Without it the default action would kill
/// the process and leave the staging folder behind.
pub fn install() {
    let Ok(mut signals) = Signals::new([SIGINT, SIGTERM]) else {
        eprintln!("warning: cannot watch for Ctrl-C; an interrupted run may leave a hidden .partial folder");
        return;
    };
    std::thread::spawn(move || {
        if let Some(signal) = signals.forever().next() {
            // Waits for a commit in progress, so the rename into place is never cut in half.
            let mut staging = lock();
            if let Some(path) = staging.take() {
                let _ = std::fs::remove_dir_all(&path);
            }
            eprintln!(
                "interrupted: nothing was written; the previous results (if any) are untouched"
            );
            std::process::exit(128 + signal);
        }
    });
}

/// Locks the registry; held by the commit so that a signal waits for the renames to finish.
pub fn lock() -> MutexGuard<'static, Option<PathBuf>> {
    STAGING
        .lock()
        .unwrap_or_else(|poisoned| poisoned.into_inner())
}
