//! What the report is built from: the grid's decisions and, per model, the tracked effect under
//! every covariance choice. The binary fills these from the engine's fits (with effect
//! conversions) or, when re-rendering a results folder, from the rows of `models.csv`
//! (see [`crate::rows`]).

use crate::effect::{Effect, Scale};
use crate::models::Models;

/// One decision dimension of the grid.
#[derive(Debug, Clone, PartialEq)]
pub struct DimensionInfo {
    /// Dimension name as in the results (`outcome`, `focus`, a control block's name, `sample`).
    pub name: String,
    /// Option names in study order; the first is the reference for influence comparisons.
    pub options: Vec<String>,
    /// For a pick block (every set of some of its candidate terms is an option), the candidate
    /// terms' labels; each option is named by its members' labels joined with " + " (or is
    /// `none`). The report then shows one row per candidate instead of one per set. Empty for
    /// every other decision.
    pub candidates: Vec<String>,
}

impl DimensionInfo {
    /// An ordinary decision: one report row per option.
    pub fn new(name: impl Into<String>, options: Vec<String>) -> DimensionInfo {
        DimensionInfo {
            name: name.into(),
            options,
            candidates: Vec::new(),
        }
    }

    /// The rows the report shows for this decision: one per option, or for a pick block one
    /// per candidate term with each option's members.
    pub(crate) fn panel(&self) -> Panel<'_> {
        match candidate_sets(self) {
            Some(members) => Panel {
                labels: &self.candidates,
                members,
                per_candidate: true,
            },
            None => Panel {
                labels: &self.options,
                members: (0..self.options.len() as u32).map(|o| vec![o]).collect(),
                per_candidate: false,
            },
        }
    }
}

/// How the report lays out one decision (see [`DimensionInfo::panel`]).
pub(crate) struct Panel<'a> {
    /// Row labels: the options, or the candidate terms of a pick block.
    pub labels: &'a [String],
    /// Per option, the rows a model taking it marks (indices into `labels`): the option's own
    /// row, or a pick block's candidate terms in the set.
    pub members: Vec<Vec<u32>>,
    /// Whether rows are candidate terms (a pick block) rather than options.
    pub per_candidate: bool,
}

impl Panel<'_> {
    /// The rows a model taking `option` marks, as indices into `labels`.
    pub fn row_indices(&self, option: usize) -> impl Iterator<Item = usize> + '_ {
        self.members[option].iter().map(|&r| r as usize)
    }
}

/// Each option's candidate terms, read back from the option names; `None` when the decision is
/// not a pick block or a name does not split into its candidates (a label that itself contains
/// " + "), in which case the report falls back to one row per option.
fn candidate_sets(dim: &DimensionInfo) -> Option<Vec<Vec<u32>>> {
    if dim.candidates.is_empty() {
        return None;
    }
    let index: std::collections::HashMap<&str, u32> = dim
        .candidates
        .iter()
        .enumerate()
        .map(|(i, c)| (c.as_str(), i as u32))
        .collect();
    dim.options
        .iter()
        .map(|name| {
            if name == "none" && !index.contains_key("none") {
                return Some(Vec::new());
            }
            name.split(" + ")
                .map(|part| index.get(part).copied())
                .collect()
        })
        .collect()
}

/// Whether a model produced numbers.
#[derive(Debug, Clone, PartialEq)]
pub enum ModelStatus {
    /// Estimated.
    Ok,
    /// Not estimated; the message says why.
    Failed(String),
}

/// One model of the grid as an owned record: what tests and small tables build a [`Models`]
/// table from ([`Models::from_entries`]) and what [`crate::ModelRef::to_entry`] gives back.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelEntry {
    /// Stable model id.
    pub model_id: String,
    /// Option index per dimension, parallel to [`ReportInput::dimensions`].
    pub choices: Vec<usize>,
    /// Estimated or failed.
    pub status: ModelStatus,
    /// The tracked effect under each covariance choice, parallel to
    /// [`ReportInput::error_labels`]; `None` where there is no number.
    pub effects: Vec<Option<Effect>>,
    /// Rows used.
    pub n_obs: Option<u64>,
    /// Coefficients estimated.
    pub n_params: Option<u64>,
    /// R² of the fit.
    pub r_squared: Option<f64>,
    /// Residual standard deviation, √(RSS / (n − k)).
    pub resid_sd: Option<f64>,
    /// p-value of the studentized Breusch–Pagan test, when the engine computed it.
    pub het_p_value: Option<f64>,
    /// Label of the outcome form (e.g. `log(yield_t_ha)`); used to decide whether likelihoods
    /// of different models are comparable.
    pub outcome_label: String,
}

/// Everything the aggregates and renderers need.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportInput {
    /// Study title.
    pub title: String,
    /// Scale the effects are expressed on.
    pub scale: Scale,
    /// Short description of the tracked effect, e.g. `visits` or `log1p(visits)`.
    pub effect_label: String,
    /// Decision dimensions in grid order.
    pub dimensions: Vec<DimensionInfo>,
    /// Covariance choice labels (`classical`, `hc1`, `cluster:village`, …); the first one is
    /// the one drawn in the specification curve.
    pub error_labels: Vec<String>,
    /// Significance level for the shares, e.g. 0.05.
    pub significance_level: f64,
    /// Confidence level of the bands drawn in the curve, e.g. 0.95.
    pub confidence_level: f64,
    /// Baseline model chosen by the study, if it named one.
    pub baseline_model_id: Option<String>,
    /// Every planned model, failed ones included.
    pub models: Models,
    /// Text of the study file, shown verbatim in the HTML report.
    pub study_text: String,
    /// Data fingerprint (e.g. the SHA-256 of the data file).
    pub data_fingerprint: String,
    /// (fitted, residual) pairs of the baseline model, for the residual scatter.
    pub baseline_residuals: Option<Vec<(f64, f64)>>,
    /// Inference across the grid, when the study asked for it.
    pub across_grid: Option<crate::AcrossGrid>,
}
