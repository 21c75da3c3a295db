//! The specgrid study file, its validation and the planner.
//!
//! [`load_study`] reads and checks a study file, reporting every problem with its line and
//! column; [`plan`] expands the study into the models to estimate; [`count_grid`] gives the grid
//! sizes without building models (for huge grids).

mod blocks;
mod grid;
mod ids;
mod kept;
mod picks;
pub mod plan;
mod planner;
mod problem;
mod read;
mod study;
mod verdict;

pub use blocks::{BlockResolver, BlockTerms};
pub use plan::*;
pub use planner::{count_grid, plan, GridCount};
pub use problem::StudyProblem;
pub use read::{load_study, parse_study};
pub use study::{
    ControlBlock, ControlRole, FocusChoices, GridMode, GridSettings, NamedTerms, OutcomeChoices,
    SkipRule, Study, DEFAULT_LIMIT,
};
pub use verdict::{Verdict, VERDICT_KEYS};
