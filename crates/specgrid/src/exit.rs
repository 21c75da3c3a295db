//! Exit codes and the error type every command returns. The codes are part of the interface
//! (docs/cli.md): schedulers branch on them.

use std::fmt;
use std::process::ExitCode;

/// Exit code when the `[verdict]` rules fail (docs/cli.md, docs/nightly.md).
pub const VERDICT_FAILED: u8 = 7;

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
    /// Everything ran, but the study's `[verdict]` rules fail: the finding does not hold.
    /// Distinct from every error so a scheduler can alert on it.
    Verdict(String),
}

impl Failure {
    /// The documented process exit code.
    pub fn code(&self) -> u8 {
        match self {
            Failure::Study(_) => 3,
            Failure::Data(_) => 4,
            Failure::Estimation(_) => 5,
            Failure::Output(_) => 6,
            Failure::Verdict(_) => VERDICT_FAILED,
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
            Failure::Verdict(m) => write!(f, "the finding does not hold: {m}"),
        }
    }
}
