//! Shared-factorisation OLS engine: many related least-squares models on one union design,
//! from one Householder QR. See docs/methods.md for the algebra and its sources.
#![warn(missing_docs)]
pub mod absorb;
pub mod api;
mod dense;
mod finish;
mod independent;
pub mod inference;
mod lockstep;
mod model_core;
mod moments;
mod plan;
mod refine;
mod row_pass;
mod shared;
mod small_qr;
mod student;
mod validate;

pub use absorb::{
    absorb, AbsorbError, AbsorbInfo, AbsorbOptions, AbsorbedDesign, RowWeights, WeightKind,
};
pub use api::*;
pub use independent::fit_independent;
pub use moments::{CovarianceRoute, MomentStats};
pub use row_pass::RowProducts;
pub use shared::SharedFactor;
