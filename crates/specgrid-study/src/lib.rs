//! The specgrid study file, its validation and the planner.
pub mod plan;
pub use plan::*;
