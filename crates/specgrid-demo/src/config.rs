//! Size and seed of a generated data set, with checks that reject shapes the generator
//! cannot fill sensibly.

use crate::names::DISTRICT_NAMES;

/// Largest number of districts: one per invented district name.
pub const MAX_DISTRICTS: usize = DISTRICT_NAMES.len();

/// Shape and seed of one generated data set. Rows = `plots × seasons`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OrchardConfig {
    /// Number of plots; each plot is observed once per season.
    pub plots: usize,
    /// Number of seasons, labelled 2024, 2025, ...
    pub seasons: usize,
    /// Number of villages; plots are dealt to villages in turn, so sizes differ by at most one.
    pub villages: usize,
    /// Number of districts (1 to 8); villages are split into contiguous, near-equal runs.
    pub districts: usize,
    /// Seed of the ChaCha8 stream; the same seed gives the same bytes.
    pub seed: u64,
}

impl Default for OrchardConfig {
    /// The committed demo set: 3,000 plots × 2 seasons = 6,000 rows, 150 villages, 8 districts.
    fn default() -> Self {
        OrchardConfig {
            plots: 3_000,
            seasons: 2,
            villages: 150,
            districts: 8,
            seed: 20_240_601,
        }
    }
}

/// Why a configuration was rejected; each message says what to change.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum ConfigError {
    /// A count that must be at least one was zero.
    #[error("{what} is 0; give at least 1")]
    Zero {
        /// Name of the offending setting.
        what: &'static str,
    },
    /// More districts than invented district names.
    #[error("districts is {0}; the demo has {MAX_DISTRICTS} invented districts, give 1 to {MAX_DISTRICTS}")]
    TooManyDistricts(usize),
    /// Fewer villages than districts would leave a district empty.
    #[error("villages ({villages}) is below districts ({districts}); give at least one village per district")]
    TooFewVillages {
        /// Requested villages.
        villages: usize,
        /// Requested districts.
        districts: usize,
    },
    /// Fewer plots than villages would leave a village empty.
    #[error("plots ({plots}) is below villages ({villages}); give at least one plot per village")]
    TooFewPlots {
        /// Requested plots.
        plots: usize,
        /// Requested villages.
        villages: usize,
    },
    /// plots × seasons does not fit in memory-addressable row counts or in the i64 plot ids.
    #[error("plots × seasons ({plots} × {seasons}) is too large; lower one of them")]
    TooManyRows {
        /// Requested plots.
        plots: usize,
        /// Requested seasons.
        seasons: usize,
    },
}

impl OrchardConfig {
    /// Checks the shape; [`crate::generate`] calls this first.
    pub fn validate(&self) -> Result<(), ConfigError> {
        for (what, n) in [
            ("plots", self.plots),
            ("seasons", self.seasons),
            ("villages", self.villages),
            ("districts", self.districts),
        ] {
            if n == 0 {
                return Err(ConfigError::Zero { what });
            }
        }
        if self.districts > MAX_DISTRICTS {
            return Err(ConfigError::TooManyDistricts(self.districts));
        }
        if self.villages < self.districts {
            return Err(ConfigError::TooFewVillages {
                villages: self.villages,
                districts: self.districts,
            });
        }
        if self.plots < self.villages {
            return Err(ConfigError::TooFewPlots {
                plots: self.plots,
                villages: self.villages,
            });
        }
        // Seasons are labelled from 2024 as u32, and row counts must stay sane for i64 ids.
        let rows = self.plots.checked_mul(self.seasons);
        if rows.is_none_or(|r| r > i64::MAX as usize / 2) || self.seasons > 10_000 {
            return Err(ConfigError::TooManyRows {
                plots: self.plots,
                seasons: self.seasons,
            });
        }
        Ok(())
    }

    /// Number of rows the generated table will have (`plots × seasons`).
    pub fn rows(&self) -> usize {
        self.plots.saturating_mul(self.seasons)
    }
}
