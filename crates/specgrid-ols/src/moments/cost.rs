//! Which route computes a call's covariance sums: the batched pass over rows, or the moments of
//! the centred union (docs/performance.md, "Choosing the covariance route"). The constants are
//! seconds per unit of work measured by `benches/moments.rs` on the project machines.

/// Seconds per row and per unit of model width in the batched row pass (residual, influence
/// and cluster/HC sums per row; measured, see docs/performance.md).
const ROW_UNIT: f64 = 1.0e-9;
/// Seconds per multiply-add of the one-off moment build (blocked matrix products).
const BUILD_UNIT: f64 = 1.0e-10;
/// Seconds per multiply-add of a model's contraction (indexed, not blocked).
const CONTRACT_UNIT: f64 = 1.0e-9;

/// What a call needs, averaged over its models.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Workload {
    /// Rows.
    pub n: usize,
    /// Coordinates of the centred union.
    pub q: usize,
    /// Models expected on this factor (all chunks together).
    pub models: usize,
    /// Mean kept columns per model.
    pub mean_k: f64,
    /// Mean influence (w) columns per model.
    pub mean_w: f64,
    /// Cluster groupings and their total code range.
    pub groupings: usize,
    /// Σ code ranges over the groupings.
    pub total_range: usize,
    /// Whether the fourth moments are needed (HC0/HC1 or Breusch–Pagan).
    pub fourth: bool,
}

impl Workload {
    /// Estimated seconds of the row pass for all models.
    pub fn direct_seconds(&self) -> f64 {
        let width = self.mean_k + 2.0 + self.mean_w * (1.0 + self.groupings as f64);
        self.models as f64 * self.n as f64 * width * ROW_UNIT
    }

    /// Estimated seconds of the moment route: one build plus a contraction per model.
    pub fn moment_seconds(&self) -> f64 {
        let (n, q) = (self.n as f64, self.q as f64);
        let na = self.mean_k + 2.0;
        let mut build = self.groupings as f64 * n * q * q;
        let mut per_model = self.total_range as f64 * na * na * (1.0 + self.mean_w);
        if self.fourth {
            build += n * q.powi(4) / 24.0 + n * q * q / 2.0;
            per_model += na.powi(4) / 2.0;
        }
        build * BUILD_UNIT + self.models as f64 * per_model * CONTRACT_UNIT
    }

    /// Whether the moment route is expected to be faster.
    pub fn prefers_moments(&self) -> bool {
        self.moment_seconds() < self.direct_seconds()
    }
}
