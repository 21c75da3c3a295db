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
    /// Fixed effects of a categorical column, absorbed (the design is demeaned within its
    /// levels) instead of expanded to indicators: any number of levels, no design columns.
    Absorbed {
        /// Source column whose levels are the groups.
        column: String,
    },
    /// Regression weights from a numeric column; no design columns. At most one per model.
    Weights {
        /// Source column.
        column: String,
        /// How the weights are read.
        kind: WeightKind,
    },
}

/// How a weights column is read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum WeightKind {
    /// Inverse-variance weights: weighted least squares, n = rows.
    Analytic,
    /// Each row stands for this many identical observations (whole numbers), n = Σ weights.
    Frequency,
}

impl WeightKind {
    /// The study file's word.
    pub fn word(self) -> &'static str {
        match self {
            WeightKind::Analytic => "analytic",
            WeightKind::Frequency => "frequency",
        }
    }
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
    /// One-way cluster-robust errors whose p-value and confidence interval come from the wild
    /// cluster bootstrap-t with the null imposed (for few clusters).
    WildCluster {
        /// Column holding cluster identifiers.
        column: String,
        /// Distribution of the bootstrap multipliers.
        weights: BootstrapDraws,
        /// Number of bootstrap draws (all sign patterns are used instead when there are fewer).
        draws: usize,
    },
}

/// Distribution of wild-bootstrap multipliers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BootstrapDraws {
    /// ±1 with equal probability.
    #[default]
    Rademacher,
    /// Webb's six-point distribution, for very few clusters.
    Webb,
}

impl BootstrapDraws {
    /// Every distribution with the word the study file uses for it.
    pub const WORDS: [(&'static str, BootstrapDraws); 2] = [
        ("rademacher", BootstrapDraws::Rademacher),
        ("webb", BootstrapDraws::Webb),
    ];
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
            ErrorChoice::WildCluster {
                column, weights, ..
            } => match weights {
                BootstrapDraws::Rademacher => format!("wild:{column}"),
                BootstrapDraws::Webb => format!("wild-webb:{column}"),
            },
        }
    }

    /// The clustering columns the choice reads.
    pub fn cluster_columns(&self) -> Vec<&str> {
        match self {
            ErrorChoice::Cluster { column } | ErrorChoice::WildCluster { column, .. } => {
                vec![column.as_str()]
            }
            ErrorChoice::TwoWayCluster { first, second } => vec![first.as_str(), second.as_str()],
            _ => Vec::new(),
        }
    }
}

/// What the study's `[inference]` table asks for beyond each model's own standard errors.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct InferenceSettings {
    /// Control blocks (by name) whose terms stay in the short model of every model, next to the
    /// focus terms, the intercept and the model's absorbed effects and weights.
    pub short_model: Vec<String>,
    /// The joint test over the whole curve, when asked for.
    pub joint_test: Option<JointTestSettings>,
    /// Coefficient-stability bounds per model, when asked for.
    pub stability: Option<StabilitySettings>,
    /// The decomposition of the focus movement over control blocks, when asked for.
    pub decomposition: Option<DecompositionSettings>,
}

/// Settings of the joint test over the whole curve.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct JointTestSettings {
    /// Bootstrap draws.
    pub draws: usize,
    /// Draw one multiplier per level of this column (rows of one level move together).
    pub cluster: Option<String>,
    /// Distribution of the multipliers.
    pub weights: BootstrapDraws,
}

/// Settings of the coefficient-stability bounds.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct StabilitySettings {
    /// R_max as a multiple of each long model's R² (capped at 1).
    pub r_max_factor: f64,
}

/// Settings of the decomposition.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DecompositionSettings {
    /// The long model as an option index per dimension (parallel to [`Plan::dimensions`]).
    pub long_model: Vec<usize>,
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

/// What kind of decision a [`Dimension`] is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DimensionKind {
    /// The outcome form.
    Outcome,
    /// The focus form.
    Focus,
    /// An optional control block: options `out`, `in`.
    OptionalBlock,
    /// A block of alternative term sets (with `none` first when the study allows it).
    Alternatives,
    /// Nested mode: optional blocks added cumulatively; options `none`, then one per step.
    NestedControls,
    /// The row set.
    Sample,
}

/// One decision dimension of the grid and its options.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Dimension {
    /// Dimension name; also the results column name (e.g. `outcome`, `focus`, `sample`, or a
    /// control block's name).
    pub name: String,
    /// What kind of decision this is.
    pub kind: DimensionKind,
    /// Option names, in the order the study lists them. The first is the dimension's reference
    /// option for influence comparisons.
    pub options: Vec<String>,
    /// For a pick block, the labels of its candidate terms in study order (each option is a
    /// set of them, named by their labels joined with " + "); empty for every other decision.
    /// The report summarizes a pick decision per candidate, not per set.
    pub candidates: Vec<String>,
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
    /// Whether the model has an intercept (never when it absorbs fixed effects: the effects
    /// span it).
    pub intercept: bool,
}

impl Term {
    /// Whether the term makes no design columns but changes how the design is prepared
    /// (absorbed fixed effects or weights).
    pub fn is_design_setting(&self) -> bool {
        matches!(self, Term::Absorbed { .. } | Term::Weights { .. })
    }
}

/// The common scale on which the report puts every model's tracked effect, so that models
/// with a log outcome and models with a level outcome can share one curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum EffectScale {
    /// The raw coefficient of the first focus term (comparable only across models that share
    /// outcome and focus forms).
    #[default]
    Coefficient,
    /// Per-cent change of the outcome per per-cent change of the focus.
    Elasticity,
    /// Proportional change of the outcome per unit of the focus.
    SemiElasticity,
    /// Change of the outcome, in outcome units, per unit of the focus.
    MarginalEffect,
}

impl EffectScale {
    /// Every scale with the word the study file uses for it.
    pub const WORDS: [(&'static str, EffectScale); 4] = [
        ("coefficient", EffectScale::Coefficient),
        ("elasticity", EffectScale::Elasticity),
        ("semi-elasticity", EffectScale::SemiElasticity),
        ("marginal effect", EffectScale::MarginalEffect),
    ];

    /// The word the study file uses.
    pub fn word(self) -> &'static str {
        Self::WORDS
            .iter()
            .find(|(_, s)| *s == self)
            .map(|(w, _)| *w)
            .unwrap_or("coefficient")
    }
}

/// Values, in raw units, at which effects are evaluated; each one left out means "the mean
/// over the model's rows".
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct EvaluationValues {
    /// Focus value.
    pub focus: Option<f64>,
    /// Outcome value.
    pub outcome: Option<f64>,
    /// Value of the moderator in an interaction with the focus.
    pub moderator: Option<f64>,
}

/// What the study's `[report]` table asks of the report.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct ReportSettings {
    /// Scale of the tracked effect.
    pub scale: EffectScale,
    /// Where effects are evaluated.
    pub evaluate_at: EvaluationValues,
    /// The baseline model as an option index per dimension (parallel to
    /// [`Plan::dimensions`]), when the study names one; otherwise the first option everywhere.
    pub baseline: Option<Vec<usize>>,
}

/// The expanded grid.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Plan {
    /// Study title.
    pub title: String,
    /// The focus (tracked regressor) source column.
    pub focus_column: String,
    /// Report settings from the study's `[report]` table.
    pub report: ReportSettings,
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
    /// Number of models drawn at random, when the study asked for a random sample of the grid.
    pub random_sample: Option<u64>,
    /// Index into `models` of the baseline model (the one the study names in `[report]`, else
    /// the first option on every dimension), if it was planned (it may not be drawn).
    pub baseline: Option<usize>,
    /// Number of distinct least-squares factorisations the models need: models of one sample
    /// with the same term set share one (under per-model rows, also the same outcome
    /// validity: `level`/`asinh` vs `log` vs `log1p`).
    pub factorisations: usize,
    /// The models to estimate, in a deterministic order.
    pub models: Vec<PlannedModel>,
    /// Inference across the grid asked for by `[inference]`.
    pub inference: InferenceSettings,
}

impl Transform {
    /// Short text used in labels: `log`, `pow3`, `winsor(0.01,0.99)`, …
    fn tag(&self) -> String {
        match self {
            Transform::Level => "level".into(),
            Transform::Log => "log".into(),
            Transform::Log1p => "log1p".into(),
            Transform::Asinh => "asinh".into(),
            Transform::Power(p) => format!("pow{p}"),
            Transform::Standardize => "z".into(),
            Transform::Winsorize { lower, upper } => format!("winsor({lower:?},{upper:?})"),
        }
    }
}

impl Term {
    /// Source columns the term reads.
    pub fn columns(&self) -> Vec<&str> {
        match self {
            Term::Numeric { column, .. }
            | Term::Categorical { column, .. }
            | Term::Absorbed { column }
            | Term::Weights { column, .. } => {
                vec![column.as_str()]
            }
            Term::Product(a, b) => {
                let mut cols = a.columns();
                for c in b.columns() {
                    if !cols.contains(&c) {
                        cols.push(c);
                    }
                }
                cols
            }
        }
    }

    /// A readable label: `visits`, `log(area_ha)`, `visits^2`, `z(visits)`,
    /// `district[ref kestrel]`, `visits × irrigated`.
    pub fn label(&self) -> String {
        match self {
            Term::Numeric { column, transform } => match transform {
                Transform::Level => column.clone(),
                Transform::Power(p) => format!("{column}^{p}"),
                other => format!("{}({column})", other.tag()),
            },
            Term::Categorical { column, reference } => match reference {
                Some(r) => format!("{column}[ref {r}]"),
                None => format!("{column}[ref first]"),
            },
            Term::Product(a, b) => format!("{} × {}", a.label(), b.label()),
            Term::Absorbed { column } => format!("{column} effects (absorbed)"),
            Term::Weights { column, kind } => format!("{} weights {column}", kind.word()),
        }
    }

    /// Canonical text: equal for terms that make the same design columns (product sides are
    /// put in a fixed order). Used for deduplication and for stable model ids.
    pub fn canonical(&self) -> String {
        match self {
            Term::Numeric { column, transform } => format!("num({column:?},{})", transform.tag()),
            Term::Categorical { column, reference } => match reference {
                Some(r) => format!("cat({column:?},ref={r:?})"),
                None => format!("cat({column:?},ref=first)"),
            },
            Term::Product(a, b) => {
                let (mut x, mut y) = (a.canonical(), b.canonical());
                if y < x {
                    std::mem::swap(&mut x, &mut y);
                }
                format!("prod({x},{y})")
            }
            Term::Absorbed { column } => format!("absorb({column:?})"),
            Term::Weights { column, kind } => format!("weights({column:?},{})", kind.word()),
        }
    }
}

impl Condition {
    /// Source column the condition reads.
    pub fn column(&self) -> &str {
        match self {
            Condition::Compare { column, .. }
            | Condition::InSet { column, .. }
            | Condition::NotInSet { column, .. }
            | Condition::DropAboveQuantile { column, .. }
            | Condition::DropBelowQuantile { column, .. } => column,
        }
    }
}

impl Plan {
    /// Source columns one model reads for its outcome and terms (not sample conditions or
    /// clustering), without duplicates, in first-use order.
    pub fn model_columns(&self, model: &PlannedModel) -> Vec<&str> {
        let mut cols: Vec<&str> = vec![self.outcomes[model.outcome].column.as_str()];
        for &t in &model.terms {
            for c in self.terms[t].columns() {
                if !cols.contains(&c) {
                    cols.push(c);
                }
            }
        }
        cols
    }

    /// The model's terms that absorb effects or give weights, sorted: models with equal sets
    /// share one prepared design per sample.
    pub fn design_settings(&self, model: &PlannedModel) -> Vec<usize> {
        let mut settings: Vec<usize> = model
            .terms
            .iter()
            .copied()
            .filter(|&t| self.terms[t].is_design_setting())
            .collect();
        settings.sort_unstable();
        settings
    }

    /// Source columns used for clustering by any error choice.
    pub fn cluster_columns(&self) -> Vec<&str> {
        let mut cols: Vec<&str> = Vec::new();
        for e in &self.errors {
            let named: Vec<&str> = match e {
                ErrorChoice::Cluster { column } => vec![column],
                ErrorChoice::TwoWayCluster { first, second } => vec![first, second],
                _ => vec![],
            };
            for c in named {
                if !cols.contains(&c) {
                    cols.push(c);
                }
            }
        }
        cols
    }

    /// The option name a model took on each dimension, as (dimension, option) pairs.
    pub fn choice_names<'a>(&'a self, model: &PlannedModel) -> Vec<(&'a str, &'a str)> {
        self.dimensions
            .iter()
            .zip(&model.choices)
            .map(|(d, &c)| (d.name.as_str(), d.options[c].as_str()))
            .collect()
    }
}
