//! The `kimech` binary: parse the command line, run, map errors to exit codes.

use std::process::ExitCode;

/// The allocator of the binary (see Cargo.toml): fewer instructions per small
/// allocation than the system's, and per-thread free lists for ic50's pipeline.
#[global_allocator]
static ALLOCATOR: kimech::allocator::Allocator = kimech::allocator::Allocator;

fn main() -> ExitCode {
    // Temporary files (the output's sibling, ic50's stdin spool) go on SIGINT/SIGTERM/SIGHUP too.
    kimech::io::cleanup::on_signal();
    match kimech::cli::run(std::env::args_os()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e @ kimech::Error::Partial { .. }) => {
            eprintln!("kimech: {e}");
            ExitCode::from(3)
        }
        Err(kimech::Error::Usage(message)) => {
            eprintln!("{message}");
            ExitCode::from(2)
        }
        Err(e) => {
            eprintln!("kimech: {e}");
            ExitCode::from(2)
        }
    }
}
