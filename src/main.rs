//! The `kimech` binary: parse the command line, run, map errors to exit codes.

use std::process::ExitCode;

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
