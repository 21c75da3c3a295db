//! The planned grid: what the planner hands to the data layer and the engine.
//!
//! This is the contract between `specgrid-study` (which builds a [`Plan`] from a study file) and
//! `specgrid-data` (which turns each [`Term`] into design columns) and the binary (which fits each
//! [`PlannedModel`]). It holds no data values: only names, choices and indices.

use std::path::PathBuf;

/// A numeric transform applied to one source column before it enters a model.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Transform {
    /// The column as it is.
    Level,
    /// Natural log; rows with values ≤ 0 become invalid (and are reported).
    Log,
    /// ln(1 + x); rows with values ≤ −1 become invalid.
    Log1p,
    /// Inverse hyperbolic sine, defined everywhere.
    Asinh,
    /// x raised to this power (2 for the square term of a quadratic; up to 10).
    Power(u32),
    /// (x − mean) / sd over the rows of the sample the model uses.
    Standardize,
    /// Values below the `lower` quantile and above the `upper` quantile (computed over the rows
    /// of the sample) are set to those quantiles.
    Winsorize {
        /// Lower quantile in [0, 0.5).
        lower: f64,
        /// Upper quantile in (0.5, 1].
        upper: f64,
    },
}

/// One regressor term. A term may expand to several design columns (a categorical gives one
/// indicator per non-reference level; a product of a categorical with anything gives one column
/// per level).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Term {
    /// A numeric source column under a transform: exactly one design column.
    Numeric {
        /// Source column name in the data file.
        column: String,
        /// Transform applied.
        transform: Transform,
    },
    /// A categorical source column expanded to indicators, one per level except the reference.
    Categorical {
        /// Source column name in the data file.
        column: String,
        /// The level left out; `None` means the first level in sorted order.
        reference: Option<String>,
    },
    /// The elementwise product of two terms (an interaction). If either side expands to several
    /// columns, the product has one column per pair.
    Product(Box<Term>, Box<Term>),
}

/// One candidate form of the outcome.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct OutcomeForm {
    /// Source column name.
    pub column: String,
    /// Transform applied (only `Level`, `Log`, `Log1p`, `Asinh` are allowed for outcomes).
    pub transform: Transform,
}

/// A literal in a sample condition.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(untagged)]
pub enum Value {
    /// A number, compared numerically.
    Number(f64),
    /// Text, compared with the cell's text (for categorical columns).
    Text(String),
}

/// A comparison used by [`Condition::Compare`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Comparison {
    /// `==`
    Equal,
    /// `!=`
    NotEqual,
    /// `<`
    Below,
    /// `<=` ("at most")
    AtMost,
    /// `>`
    Above,
    /// `>=` ("at least")
    AtLeast,
}

/// One structured row condition. A sample keeps the rows that meet all its conditions.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Condition {
    /// Keep rows where `column <comparison> value`.
    Compare {
        /// Source column.
        column: String,
        /// How to compare.
        comparison: Comparison,
        /// The literal compared against.
        value: Value,
    },
    /// Keep rows whose `column` value is one of `levels` (compared as text).
    InSet {
        /// Source column.
        column: String,
        /// Accepted levels.
        levels: Vec<String>,
    },
    /// Keep rows whose `column` value is none of `levels`.
    NotInSet {
        /// Source column.
        column: String,
        /// Rejected levels.
        levels: Vec<String>,
    },
    /// Drop rows whose `column` is above its `quantile` (computed over all rows of the data file
    /// where the column is present, before any other condition).
    DropAboveQuantile {
        /// Source column.
        column: String,
        /// Quantile in (0, 1).
        quantile: f64,
    },
    /// Drop rows whose `column` is below its `quantile` (computed as for `DropAboveQuantile`).
    DropBelowQuantile {
        /// Source column.
        column: String,
        /// Quantile in (0, 1).
        quantile: f64,
    },
}

/// A named row set.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Sample {
    /// The option name shown in results.
    pub name: String,
    /// Conditions, all of which a kept row meets. Empty keeps every row.
    pub conditions: Vec<Condition>,
}

/// One covariance choice for the standard errors.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ErrorChoice {
    /// σ²(X'X)⁻¹.
    Classical,
    /// White (1980), no small-sample factor.
    Hc0,
    /// HC0 × n/(n − k).
    Hc1,
    /// Leverage-adjusted, eᵢ²/(1 − hᵢ).
    Hc2,
    /// Leverage-adjusted, eᵢ²/(1 − hᵢ)².
    Hc3,
    /// One-way cluster-robust on a source column.
    Cluster {
        /// Column holding cluster identifiers.
        column: String,
    },
    /// Two-way cluster-robust on two source columns.
    TwoWayCluster {
        /// First clustering column.
        first: String,
        /// Second clustering column.
        second: String,
    },
}

impl ErrorChoice {
    /// The short name used in result files: `classical`, `hc0`…`hc3`, `cluster:COL`,
    /// `cluster:COL1+COL2`.
    pub fn label(&self) -> String {
        match self {
            ErrorChoice::Classical => "classical".into(),
            ErrorChoice::Hc0 => "hc0".into(),
            ErrorChoice::Hc1 => "hc1".into(),
            ErrorChoice::Hc2 => "hc2".into(),
            ErrorChoice::Hc3 => "hc3".into(),
            ErrorChoice::Cluster { column } => format!("cluster:{column}"),
            ErrorChoice::TwoWayCluster { first, second } => format!("cluster:{first}+{second}"),
        }
    }
}

/// Which rows a model uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RowPolicy {
    /// Every model of one sample uses the same rows: those where every column any model of the
    /// grid needs is present and every transform is defined.
    #[default]
    SharedRows,
    /// Each model uses all rows valid for its own columns.
    PerModel,
}

/// One decision dimension of the grid and its options.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Dimension {
    /// Dimension name; also the results column name (e.g. `outcome`, `focus`, `sample`, or a
    /// control block's name).
    pub name: String,
    /// Option names, in the order the study lists them. The first is the dimension's reference
    /// option for influence comparisons.
    pub options: Vec<String>,
}

/// One model of the grid.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PlannedModel {
    /// Stable identifier derived from the model's choices (same choices → same id on any run or
    /// machine): 12 lowercase hex digits of a SHA-256 over the canonical choice description.
    pub id: String,
    /// Chosen option index per dimension, parallel to [`Plan::dimensions`].
    pub choices: Vec<usize>,
    /// Index into [`Plan::outcomes`].
    pub outcome: usize,
    /// Index into [`Plan::samples`].
    pub sample: usize,
    /// Indices into [`Plan::terms`], in model order (focus terms first, then controls in block
    /// order). No duplicates.
    pub terms: Vec<usize>,
    /// The subset of `terms` whose coefficients the study tracks (the focus form's terms plus any
    /// extra tracked terms present in this model).
    pub tracked: Vec<usize>,
    /// Whether the model has an intercept.
    pub intercept: bool,
}

/// The expanded grid.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Plan {
    /// Study title.
    pub title: String,
    /// Data file, resolved against the study file's folder.
    pub data_path: PathBuf,
    /// Seed used for sampling the grid and anything random downstream.
    pub seed: u64,
    /// Decision dimensions, in a fixed order.
    pub dimensions: Vec<Dimension>,
    /// Union of every regressor term any model uses, deduplicated, in first-use order.
    pub terms: Vec<Term>,
    /// Every outcome form any model uses.
    pub outcomes: Vec<OutcomeForm>,
    /// Every sample option.
    pub samples: Vec<Sample>,
    /// Covariance choices reported for every model (they never add estimation work).
    pub errors: Vec<ErrorChoice>,
    /// Confidence level for intervals, e.g. 0.95.
    pub confidence_level: f64,
    /// Significance level used by summaries, 1 − confidence_level unless the study says otherwise.
    pub significance_level: f64,
    /// Row policy.
    pub row_policy: RowPolicy,
    /// Grid size of the full expansion before exclusions.
    pub size_before_exclusions: u128,
    /// Grid size after exclusions (before random sampling).
    pub size_after_exclusions: u128,
    /// The models to estimate, in a deterministic order.
    pub models: Vec<PlannedModel>,
}
