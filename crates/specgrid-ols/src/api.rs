//! Public types of the engine: what goes in (a union design and model requests) and what comes
//! out (one [`ModelFit`] per model). This file is the contract the data layer, the binary and the
//! reference tests build against; change it only together with them.

/// Identifiers of one clustering dimension, as dense codes `0..count`.
#[derive(Debug, Clone, PartialEq)]
pub struct ClusterIds {
    /// Name shown in errors and reports (the source column).
    pub name: String,
    /// One code per row of the design, each `< count`.
    pub codes: Vec<u32>,
    /// Number of distinct clusters.
    pub count: usize,
}

/// The union design: every candidate regressor column and every candidate outcome over the same
/// n rows. Models pick columns from it by index.
#[derive(Debug, Clone)]
pub struct Design {
    /// n × p regressor columns (an intercept is just a column of ones, if any model uses one).
    pub x: faer::Mat<f64>,
    /// n × m outcome columns.
    pub y: faer::Mat<f64>,
    /// Names of the p regressor columns (for errors and reports).
    pub x_names: Vec<String>,
    /// Names of the m outcome columns.
    pub y_names: Vec<String>,
    /// Zero, one or more clustering dimensions, each with one code per row.
    pub clusters: Vec<ClusterIds>,
}

/// A covariance choice for the standard errors.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Covariance {
    /// σ²·(X'X)⁻¹.
    Classical,
    /// White (1980) heteroskedasticity-robust, no small-sample factor.
    Hc0,
    /// HC0 × n/(n − k).
    Hc1,
    /// MacKinnon & White (1985): eᵢ²/(1 − hᵢ).
    Hc2,
    /// MacKinnon & White (1985): eᵢ²/(1 − hᵢ)².
    Hc3,
    /// One-way cluster-robust (CR1) on `Design::clusters[dim]`.
    Cluster {
        /// Index into [`Design::clusters`].
        dim: usize,
    },
    /// Two-way cluster-robust (Cameron, Gelbach & Miller 2011) on two clustering dimensions.
    TwoWayCluster {
        /// Index of the first dimension in [`Design::clusters`].
        first: usize,
        /// Index of the second dimension in [`Design::clusters`].
        second: usize,
    },
}

/// One model to fit on a [`Design`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ModelSpec {
    /// Union column indices, in the model's own order. Duplicates are an error.
    pub columns: Vec<usize>,
    /// Outcome column index.
    pub outcome: usize,
    /// Union column indices whose coefficients are reported with standard errors; each must be
    /// in `columns`. Empty means every column of the model.
    pub tracked: Vec<usize>,
}

/// Options shared by every model of one fitting call.
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    /// Covariance choices to compute for each reported coefficient.
    pub covariances: Vec<Covariance>,
    /// Confidence level of the intervals, in (0, 1).
    pub confidence_level: f64,
    /// Relative tolerance for exact collinearity (see docs/methods.md).
    pub collinearity_tolerance: f64,
    /// A model whose estimated condition number (after column scaling) exceeds this is refused
    /// with [`ModelError::IllConditioned`] rather than given a number of doubtful accuracy.
    pub condition_limit: f64,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            covariances: vec![Covariance::Classical],
            confidence_level: 0.95,
            collinearity_tolerance: 1e-10,
            condition_limit: 1e13,
        }
    }
}

/// Inference for one coefficient under one covariance choice.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Inference {
    /// The covariance choice.
    pub covariance: Covariance,
    /// Standard error.
    pub std_error: f64,
    /// estimate / std_error.
    pub t_stat: f64,
    /// Degrees of freedom of the reference Student t (n − k, or G − 1 when clustered; for two-way,
    /// min(G₁, G₂) − 1).
    pub df: f64,
    /// Two-sided p-value from Student t with `df`.
    pub p_value: f64,
    /// Lower end of the confidence interval.
    pub ci_low: f64,
    /// Upper end of the confidence interval.
    pub ci_high: f64,
}

/// One reported coefficient.
#[derive(Debug, Clone, PartialEq)]
pub struct Coefficient {
    /// Union column index.
    pub column: usize,
    /// Estimate.
    pub estimate: f64,
    /// One entry per requested covariance choice, in the order of [`FitOptions::covariances`].
    pub inference: Vec<Inference>,
}

/// Koenker's studentized Breusch–Pagan test of the squared residuals on the model's regressors.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BreuschPagan {
    /// LM = n·R² of the auxiliary regression.
    pub statistic: f64,
    /// Degrees of freedom: the model's non-constant regressors.
    pub df: f64,
    /// Upper-tail chi-square p-value.
    pub p_value: f64,
}

/// The result of one model.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelFit {
    /// Rows used (under frequency weights: the observations they stand for, Σ w).
    pub n_obs: usize,
    /// Coefficients estimated (after dropping collinear columns).
    pub n_params: usize,
    /// n − k (− absorbed parameters).
    pub df_resid: usize,
    /// sqrt(RSS / (n − k)).
    pub resid_sd: f64,
    /// R² (centred when the model has a constant column, uncentred otherwise).
    pub r_squared: f64,
    /// Adjusted R².
    pub adj_r_squared: f64,
    /// Within R² (the demeaned regression's), when fixed effects were absorbed; `r_squared` is
    /// then the overall R².
    pub within_r_squared: Option<f64>,
    /// Absorbed fixed-effect parameters counted in `df_resid` (0 when none).
    pub absorbed_params: usize,
    /// Estimated 2-norm condition number of the model's column-scaled design.
    pub condition_number: f64,
    /// Union columns dropped as exactly collinear, in union order.
    pub dropped: Vec<usize>,
    /// Every estimated coefficient in model order (kept columns), estimate only.
    pub all_estimates: Vec<(usize, f64)>,
    /// Reported coefficients with inference, in the order of [`ModelSpec::tracked`] (or model
    /// order when that is empty).
    pub coefficients: Vec<Coefficient>,
    /// Covariance among the reported coefficients: one entry per requested covariance choice (in
    /// the order of [`FitOptions::covariances`]), each a row-major t × t matrix over
    /// [`ModelFit::coefficients`] in their order (t = number of reported coefficients). The
    /// diagonal equals the squared standard errors; off-diagonals feed delta-method errors of
    /// effects that combine coefficients.
    pub tracked_covariance: Vec<Vec<f64>>,
    /// Heteroskedasticity diagnostic.
    pub breusch_pagan: Option<BreuschPagan>,
}

/// Why one model could not be given numbers. Other models of the same call are unaffected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ModelError {
    /// A tracked column was dropped as collinear with earlier columns.
    #[error("tracked column `{name}` is exactly collinear with earlier columns of the model and was dropped; no estimate exists")]
    TrackedDropped {
        /// Column name.
        name: String,
    },
    /// The model's design is too ill-conditioned to give trustworthy digits.
    #[error("the model is too ill-conditioned (condition number ≈ {condition:.3e} after scaling, limit {limit:.1e}); rescale or centre the regressors, or drop near-duplicate columns")]
    IllConditioned {
        /// Estimated condition number.
        condition: f64,
        /// The limit in force.
        limit: f64,
    },
    /// No residual degrees of freedom are left.
    #[error("the model has {k} coefficients but only {n} rows; no residual degrees of freedom")]
    NoResidualDf {
        /// Rows.
        n: usize,
        /// Coefficients.
        k: usize,
    },
    /// Too few clusters for cluster-robust errors.
    #[error("cluster-robust errors on `{name}` need at least 2 clusters, found {count}")]
    TooFewClusters {
        /// Clustering dimension name.
        name: String,
        /// Clusters found.
        count: usize,
    },
    /// The request itself is malformed (bad index, duplicate column, tracked column not in model).
    #[error("invalid model request: {0}")]
    InvalidRequest(String),
}

/// Why a design could not be factorised at all.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum EngineError {
    /// Shapes disagree (rows of x, y and cluster codes).
    #[error("design shapes disagree: {0}")]
    Shape(String),
    /// A value is NaN or infinite.
    #[error("column `{column}` holds a non-finite value at row {row}")]
    NonFinite {
        /// Column name.
        column: String,
        /// Zero-based row.
        row: usize,
    },
    /// The design has no rows.
    #[error("the design has no rows")]
    Empty,
}
