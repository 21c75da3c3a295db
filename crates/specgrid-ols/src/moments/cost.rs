//! Which route computes a call's covariance sums: the batched pass over rows, or the moments of
//! the centred union (docs/performance.md, "Choosing the covariance route"). The constants are
//! seconds per unit of work measured by `benches/moments.rs` on the project machines.

/// Seconds per row and per unit of model width (kept columns + 2 + influence columns × (1 +
/// groupings)) in the batched row pass. Measured by `benches/moments.rs` (2 threads, shared
/// machine): 7.6e-10 at 10⁵ rows and 1.4e-9 at 10⁶ rows (23.5 ms per model of mean width 16.5).
const ROW_UNIT: f64 = 1.0e-9;
/// Seconds per unit of the one-off moment build (n·(q⁴/24 + q²/2) for the fourth moments,
/// n·q² + G·(q(q+1)/2)² per clustering). Measured 1.1–1.9e-10 (12.8–20.4 s at 10⁶ rows, q = 41,
/// depending on the machine's load); the higher value leans the choice towards the row pass.
const BUILD_UNIT: f64 = 1.8e-10;
/// Seconds per unit of a model's contraction ((k(k+1)/2)² per influence column and clustering,
/// k⁴/2 for the fourth moments). Measured about 4.6e-9 (0.16 ms per model at k ≈ 14.5, including
/// the model's small QR, which both routes pay).
const CONTRACT_UNIT: f64 = 4.0e-9;

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
        let pairs = q * (q + 1.0) / 2.0;
        let active_pairs = na * (na + 1.0) / 2.0;
        // Per clustering: the S_g (n·q²) and K = Σ_g σ_gσ_g' (G·P²); per model K·u per
        // influence column.
        let mut build = self.groupings as f64 * n * q * q + self.total_range as f64 * pairs * pairs;
        let mut per_model = self.groupings as f64 * self.mean_w * active_pairs * active_pairs;
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
