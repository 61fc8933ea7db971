//! The `quarry` command line: a thin layer over [`quarry::Pipeline`] that
//! streams CSV or Parquet events in, and result rows out.
//!
//! Subcommands: `reco` (reconstruct), `presets list|show` (built-in
//! hypotheses), `generate` (toy events), `eval` (evaluation on simulation), `merge`
//! (shard outputs of a job array), `columns list|show|template` (column maps
//! for Parquet inputs). Exit codes are listed in
//! `quarry reco --help` and docs/cli.md.

use std::process::ExitCode;

use clap::Parser;

mod cli;

/// The binary's allocator. Events are allocated on the reader thread, freed
/// on the workers, and result rows go the other way: glibc's per-thread
/// arenas turned that into lock traffic and heap trimming (measured with
/// strace: thousands of mprotect calls per 200 k events, and more system
/// time than the second core gained). mimalloc frees cross-thread blocks
/// without a shared lock. It is the `mimalloc` feature (on by default);
/// Rust programs that embed the library can turn it off and keep their own
/// allocator, since only this binary sets it.
#[cfg(feature = "mimalloc")]
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

use cli::args::{Cli, Command};
use cli::Failure;

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // Help and version go to stdout and succeed; every other parse
            // failure is a usage error (exit 1, not clap's default 2, which
            // quarry reserves for input errors).
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { Failure::USAGE } else { 0 });
        }
    };
    let result = match cli.command {
        Command::Reco(args) => cli::reco::run(&args),
        Command::Presets(cmd) => cli::presets::run(&cmd),
        Command::Generate(args) => cli::generate::run(&args),
        Command::Eval(args) => cli::eval::run(&args),
        Command::Merge(args) => cli::merge::run(&args),
        Command::Columns(cmd) => cli::columns::run(&cmd),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(failure) => {
            eprintln!("quarry: error: {}", failure.message());
            ExitCode::from(failure.code())
        }
    }
}
