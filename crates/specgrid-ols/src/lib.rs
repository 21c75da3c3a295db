//! Shared-factorisation OLS engine. See docs/methods.md.
pub mod api;
pub use api::*;
