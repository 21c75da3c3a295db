//! Exit codes and the error type every command returns. The codes are part of the interface
//! (docs/cli.md): schedulers branch on them.

use std::fmt;
use std::process::ExitCode;

/// What went wrong, grouped by what the user has to fix.
#[derive(Debug)]
pub enum Failure {
    /// The study file is invalid (syntax, types, unknown keys, impossible grid).
    Study(String),
    /// The data file cannot be read or does not fit the study.
    Data(String),
    /// Estimation failed for the whole run (not one model: single-model problems are reported in
    /// the results with their reason).
    Estimation(String),
    /// Results could not be written.
    Output(String),
}

impl Failure {
    /// The documented process exit code.
    pub fn code(&self) -> u8 {
        match self {
            Failure::Study(_) => 3,
            Failure::Data(_) => 4,
            Failure::Estimation(_) => 5,
            Failure::Output(_) => 6,
        }
    }

    /// Converts into the process exit code.
    pub fn exit_code(&self) -> ExitCode {
        ExitCode::from(self.code())
    }
}

impl fmt::Display for Failure {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Failure::Study(m) => write!(f, "invalid study: {m}"),
            Failure::Data(m) => write!(f, "data problem: {m}"),
            Failure::Estimation(m) => write!(f, "estimation failed: {m}"),
            Failure::Output(m) => write!(f, "cannot write results: {m}"),
        }
    }
}
