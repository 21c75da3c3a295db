//! Seeded generator of the invented demo data set: a fruit growers' cooperative asks whether
//! visits from its field advisers raise orchard yields.
//!
//! Everything here is made up: district, village and variety names, and every number. The
//! true parameters of the data-generating process live in [`truth`] and are documented in
//! `demo-data/README.md`. The same [`OrchardConfig`] (including its seed) always gives the same
//! table and the same CSV bytes, because the only randomness is a seeded ChaCha8 stream and the
//! crate versions of `rand`, `rand_chacha` and `rand_distr` are pinned in the workspace.
//!
//! ```
//! let table = specgrid_demo::generate(&specgrid_demo::OrchardConfig::default()).unwrap();
//! assert_eq!(table.len(), 6_000);
//! let mut csv = Vec::new();
//! table.write_csv(&mut csv).unwrap();
//! ```

#![warn(missing_docs)]

mod config;
mod generate;
mod names;
mod table;
pub mod truth;

pub use config::{ConfigError, OrchardConfig, MAX_DISTRICTS};
pub use generate::{generate, DemoError};
pub use names::{DISTRICT_NAMES, FIRST_SEASON, VARIETY_NAMES};
pub use table::{Coded, Column, ColumnValues, OrchardTable, COLUMN_NAMES};
