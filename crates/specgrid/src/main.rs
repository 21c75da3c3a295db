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

/// A run of millions of small models allocates and frees tens of millions of small vectors,
/// many of them on a thread other than the one that made them (fits are made on the rayon
/// threads and written on the results writer's); mimalloc does both without the contention the
/// system allocator showed (docs/performance.md, "Allocator").
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

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
