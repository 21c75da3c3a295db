//! The `[verdict]` table: what "the finding holds" means for unattended reruns. The study crate
//! only reads and checks the rules; the binary applies them to the report's aggregates.

use serde::Serialize;

/// The rules a run (and its comparison with the previous run) must meet for the finding to hold.
/// Every rule is optional; a rule that is absent is not checked.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Verdict {
    /// Covariance choice label the rules are judged under (e.g. `hc1`, `cluster:village`);
    /// `None` = the first choice of `[errors]`.
    pub errors: Option<String>,
    /// Smallest share of estimated models whose effect has the baseline's sign.
    pub min_share_baseline_sign: Option<f64>,
    /// Smallest share of estimated models significant with the baseline's sign.
    pub min_share_significant: Option<f64>,
    /// Whether the baseline model must be significant.
    pub baseline_significant: bool,
    /// Largest number of models whose sign may flip against the previous run.
    pub max_sign_flips: Option<u64>,
}

/// Keys of the `[verdict]` table.
pub const VERDICT_KEYS: &[&str] = &[
    "errors",
    "min_share_baseline_sign",
    "min_share_significant",
    "baseline_significant",
    "max_sign_flips",
];
