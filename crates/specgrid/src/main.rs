//! The `specgrid` binary: study file → planner → data → shared-matrix OLS → results.

mod across_grid;
mod cli;
mod commands;
mod data_guard;
mod effects;
mod exit;
mod interrupt;
mod manifest;
mod memory;
mod output;
mod results;
mod results_stream;
mod timings;
mod verdict;
mod wild;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = cli::Cli::parse();
    interrupt::install();
    data_guard::install_panic_hook();
    match commands::dispatch(cli.command) {
        Ok(()) => ExitCode::SUCCESS,
        Err(failure) => {
            eprintln!("error: {failure}");
            failure.exit_code()
        }
    }
}
