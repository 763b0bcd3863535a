//! The `heldout` command: parse arguments, run, map errors to exit codes.

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    let cli = heldout::cli::Cli::parse();
    match heldout::commands::dispatch(cli.command) {
        Ok(()) => ExitCode::from(heldout::error::exit::OK),
        Err(error) => {
            eprintln!("error: {error:#}");
            ExitCode::from(heldout::error::exit_code_for(&error))
        }
    }
}
