//! The termvel binary: parse the command line, dispatch, exit.

use std::process::ExitCode;

use clap::Parser;

fn main() -> ExitCode {
    termvel::cmd::dispatch(termvel::cli::Cli::parse())
}
