//! The `specgrid` binary: study file → planner → data → shared-matrix OLS → results.

mod cli;
mod commands;
mod effects;
mod exit;
mod output;
mod results;
mod timings;

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = cli::Cli::parse();
    match commands::dispatch(cli.command) {
        Ok(()) => ExitCode::SUCCESS,
        Err(failure) => {
            eprintln!("error: {failure}");
            failure.exit_code()
        }
    }
}
