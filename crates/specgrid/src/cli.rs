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
        /// Print seconds spent per phase (plan, load, factor, fit, write, report) to stderr.
        #[arg(long)]
        timings: bool,
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
