//! A validated study: every choice of the study file, checked and in plain Rust types.
//! [`crate::load_study`] builds it; [`crate::plan`] expands it into models.

use std::path::PathBuf;

use crate::plan::{
    ErrorChoice, InferenceSettings, OutcomeForm, ReportSettings, RowPolicy, Sample, Term,
};
use crate::problem::Source;
use crate::verdict::Verdict;

/// A validated study file.
#[derive(Debug, Clone, PartialEq)]
pub struct Study {
    /// The study file it was read from.
    pub source_path: PathBuf,
    /// Study title.
    pub title: String,
    /// Data file, resolved against the study file's folder.
    pub data_path: PathBuf,
    /// Seed for grid sampling and anything random downstream.
    pub seed: u64,
    /// Which rows each model uses.
    pub row_policy: RowPolicy,
    /// Whether every model has an intercept.
    pub intercept: bool,
    /// The outcome column and its candidate forms.
    pub outcome: OutcomeChoices,
    /// The tracked regressor and its candidate forms.
    pub focus: FocusChoices,
    /// Control blocks in the order the file lists them.
    pub controls: Vec<ControlBlock>,
    /// Row sets; at least one (a study with none gets a single "all rows").
    pub samples: Vec<Sample>,
    /// Covariance choices reported for every model.
    pub errors: Vec<ErrorChoice>,
    /// Confidence level of intervals.
    pub confidence_level: f64,
    /// Significance level used by summaries.
    pub significance_level: f64,
    /// How the grid is built.
    pub grid: GridSettings,
    /// When the finding holds, for unattended reruns (`[verdict]`); `None` when absent.
    pub verdict: Option<Verdict>,
    /// What the report shows (effect scale, evaluation values, baseline).
    pub report: ReportSettings,
    /// Inference across the grid (`[inference]`).
    pub inference: InferenceSettings,
    /// The file text, to place problems found while planning.
    pub(crate) source: Source,
    /// Byte offsets of a few places that planning problems point at.
    pub(crate) spots: Spots,
}

/// Byte offsets in the study file that planning problems point at.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub(crate) struct Spots {
    /// The `[grid]` table, or the start of the file when it is absent.
    pub grid: usize,
    /// The `limit` key, or `grid`.
    pub limit: usize,
    /// The `sample` key of `[grid]`, or `grid`.
    pub sample: usize,
}

/// A named option of one decision.
#[derive(Debug, Clone, PartialEq)]
pub struct NamedTerms {
    /// Option name shown in results.
    pub name: String,
    /// Terms the option adds to a model.
    pub terms: Vec<Term>,
}

/// The outcome decision.
#[derive(Debug, Clone, PartialEq)]
pub struct OutcomeChoices {
    /// Source column.
    pub column: String,
    /// Candidate forms with their option names, in file order.
    pub forms: Vec<(String, OutcomeForm)>,
}

/// The focus decision.
#[derive(Debug, Clone, PartialEq)]
pub struct FocusChoices {
    /// Source column.
    pub column: String,
    /// Candidate forms; each option's terms are all tracked.
    pub forms: Vec<NamedTerms>,
    /// Extra terms tracked whenever a model contains them (e.g. an interaction with the focus).
    pub also_track: Vec<Term>,
}

/// A named block of control terms.
#[derive(Debug, Clone, PartialEq)]
pub struct ControlBlock {
    /// Block name; also the dimension name when the block is a decision.
    pub name: String,
    /// How the block enters models.
    pub role: ControlRole,
}

/// How a control block enters models.
#[derive(Debug, Clone, PartialEq)]
pub enum ControlRole {
    /// In every model; not a decision.
    Always(Vec<Term>),
    /// In or out: a decision with options `out` and `in`.
    Optional(Vec<Term>),
    /// Exactly one of several term sets (or none of them, when `include_none`).
    Alternatives {
        /// The term sets, in file order.
        options: Vec<NamedTerms>,
        /// Whether "none" is also an option (listed first).
        include_none: bool,
    },
    /// Every set of the given sizes drawn from the block's terms: one decision whose options
    /// are the sets (see [`crate::picks`] for their order and names).
    Pick {
        /// The candidate terms, in file order; a set keeps this order.
        terms: Vec<Term>,
        /// Set sizes, ascending and distinct, each between 1 and the number of terms.
        sizes: Vec<usize>,
        /// Whether the empty set is also an option (`none`, listed first).
        include_none: bool,
    },
}

/// How the decisions combine.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum GridMode {
    /// Every combination of every decision.
    Full,
    /// Optional control blocks enter cumulatively in file order (one `controls` decision);
    /// everything else is crossed as in `Full`.
    Nested,
}

/// Grid settings.
#[derive(Debug, Clone, PartialEq)]
pub struct GridSettings {
    /// Expansion mode.
    pub mode: GridMode,
    /// Largest number of models the run accepts without `sample`.
    pub limit: u128,
    /// Draw this many models uniformly at random (with the seed) instead of the whole grid.
    pub sample: Option<u64>,
    /// Skip rules: a model matching every pair of one rule is left out.
    pub skip: Vec<SkipRule>,
}

/// One skip rule: for each named dimension, the option names it matches. A model matching on
/// every listed dimension is skipped.
#[derive(Debug, Clone, PartialEq)]
pub struct SkipRule {
    /// (dimension name, option names) pairs.
    pub matches: Vec<(String, Vec<String>)>,
    /// Byte offset of the rule in the file.
    pub(crate) offset: usize,
}

/// Default largest grid the run accepts without random sampling.
pub const DEFAULT_LIMIT: u128 = 100_000;
