//! Command-line interface definition (clap derive).

use std::path::PathBuf;

use clap::{Parser, Subcommand};

/// specgrid: estimate a whole grid of alternative regression specifications from one study file
/// and report how the tracked coefficients move.
#[derive(Debug, Parser)]
#[command(name = "specgrid", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Validate a study file and its data; list every problem at once.
    Check {
        /// The study file (TOML).
        study: PathBuf,
    },
    /// Show the decision dimensions, grid size and models of a study, without estimating.
    Plan {
        /// The study file (TOML).
        study: PathBuf,
        /// Print every planned model instead of the first ones.
        #[arg(long)]
        list: bool,
    },
    /// Estimate every model of the grid and write the results folder.
    Run {
        /// The study file (TOML).
        study: PathBuf,
        /// Results folder (replaced atomically when the run succeeds).
        #[arg(long, default_value = "results")]
        out: PathBuf,
        /// Also write terms.csv with every coefficient of every model.
        #[arg(long)]
        all_terms: bool,
        /// Worker threads (default: all cores).
        #[arg(long)]
        threads: Option<usize>,
        /// Hide the progress bar.
        #[arg(long)]
        quiet: bool,
        /// Estimate even when the results folder already holds a run of the same data and study.
        #[arg(long)]
        force: bool,
        /// Compare with this earlier results folder (it may be --out itself: the comparison is
        /// made before the folder is replaced) and judge the `[verdict]` flip rule.
        #[arg(long, value_name = "OLD_DIR")]
        against: Option<PathBuf>,
        #[command(flatten)]
        tolerance: ToleranceArgs,
        /// Refuse the run up front if its results would need more memory than this (MiB;
        /// default: half the memory the system reports available).
        #[arg(long, value_name = "MIB")]
        max_memory: Option<u64>,
        /// Fit and write the results this many models at a time, so only one chunk of result
        /// rows is in memory (default: the whole grid at once).
        #[arg(long, value_name = "MODELS", value_parser = clap::value_parser!(u64).range(1..))]
        chunk: Option<u64>,
        /// Print seconds spent per phase (plan, load, factor, fit, write, report) to stderr.
        #[arg(long)]
        timings: bool,
        /// Write the results table only as models.parquet, without models.csv (for grids of
        /// millions of models, whose CSV runs to gigabytes; `report` and `compare` read the
        /// Parquet file).
        #[arg(long)]
        no_csv: bool,
    },
    /// Compare two results folders of the same study: models added and removed, sign flips,
    /// changes of significance, moved estimates, every aggregate; judge the `[verdict]`.
    Compare {
        /// The earlier results folder.
        old: PathBuf,
        /// The newer results folder; comparison.json, comparison.html and verdict.json are
        /// written into it.
        new: PathBuf,
        /// Covariance choice to judge under (default: the verdict's, else the first).
        #[arg(long)]
        errors: Option<String>,
        #[command(flatten)]
        tolerance: ToleranceArgs,
    },
    /// Re-render the report files of a results folder without re-estimating.
    Report {
        /// A results folder written by `specgrid run`.
        dir: PathBuf,
    },
    /// Write the invented orchard-advisers demo data at any scale (CSV or Parquet by extension).
    DemoData {
        /// Number of plots (each observed in every season).
        #[arg(long, default_value_t = 3000)]
        plots: usize,
        /// Number of seasons.
        #[arg(long, default_value_t = 2)]
        seasons: usize,
        /// Number of villages (default: one per 20 plots, at least 8).
        #[arg(long)]
        villages: Option<usize>,
        /// Random seed (default: the demo's fixed seed).
        #[arg(long)]
        seed: Option<u64>,
        /// Output file, .csv or .parquet.
        #[arg(long)]
        out: PathBuf,
    },
}

/// When an estimate counts as moved between two runs: both tolerances must be exceeded.
#[derive(Debug, Clone, Copy, clap::Args)]
pub struct ToleranceArgs {
    /// Relative change |new − old| / |old| above which an estimate may count as moved.
    #[arg(long, default_value_t = 0.10, value_name = "SHARE")]
    pub relative_tolerance: f64,
    /// Change in units of the earlier standard error above which an estimate may count as moved.
    #[arg(long, default_value_t = 0.5, value_name = "SES")]
    pub se_tolerance: f64,
}
