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

/// mimalloc's `purge_delay` option: its number in mimalloc 2 and 3 alike (mimalloc.h), the one
/// before `use_numa_nodes`; the Rust bindings do not name it.
const PURGE_DELAY_OPTION: libmimalloc_sys::mi_option_t = 15;
const _: () = assert!(PURGE_DELAY_OPTION + 1 == libmimalloc_sys::mi_option_use_numa_nodes);

/// Keeps freed memory in the process for reuse instead of handing it back to the system after
/// a delay. A run frees and re-makes a chunk's worth of rows every second or two; handed back,
/// every chunk touched fresh pages again, and first touches of fresh (transparent huge) pages
/// cost a fifth of a two-million-model run on the reference machine (docs/performance.md,
/// "Fresh memory"). The peak resident set is what the run needs at its largest either way.
fn keep_freed_memory() {
    // SAFETY: sets a plain integer option of the allocator, which mimalloc allows at any time.
    unsafe { libmimalloc_sys::mi_option_set(PURGE_DELAY_OPTION, -1) };
}

fn main() -> ExitCode {
    keep_freed_memory();
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
