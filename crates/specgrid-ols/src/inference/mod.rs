//! Inference across the grid (docs/methods.md, "Inference across the grid"):
//! outcome-only refits on the shared factor, the joint test over the whole curve
//! (Simonsohn, Simmons & Nelson 2020), the wild cluster bootstrap-t for few clusters
//! (Cameron, Gelbach & Miller 2008; Webb 2023), Oster's (2019) coefficient-stability bounds and
//! Gelbach's (2016) decomposition of a coefficient's movement over control blocks.

mod gelbach;
mod joint;
mod oster;
mod refit;
mod weights;
mod wild_cluster;

pub use gelbach::{gelbach, BlockContribution, ControlBlock, GelbachDecomposition};
pub use joint::{
    joint_curve_test, joint_curve_test_across, joint_curve_test_from_fits, CurveModel, CurvePart,
    CurveStats, JointOptions, JointTest,
};
pub use oster::{oster, OsterInputs, OsterResult};
pub use refit::{OutcomeRefit, Projected, RefitBatch};
pub use weights::BootstrapWeights;
pub use wild_cluster::{wild_cluster_test, WildClusterOptions, WildClusterResult};

use crate::api::ModelError;

/// Why an inference method could not give a result.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum InferenceError {
    /// Refits need the union basis that only [`crate::SharedFactor::new_for_refits`] keeps.
    #[error("outcome-only refits need a factor built with SharedFactor::new_for_refits")]
    NoBasis,
    /// A model the method needs could not be fitted.
    #[error("model `{label}` could not be fitted: {source}")]
    Model {
        /// Which model (e.g. "short", "long", "curve model 12").
        label: String,
        /// The engine's reason.
        source: ModelError,
    },
    /// The request is malformed or the data cannot support the method.
    #[error("{0}")]
    Invalid(String),
}
