//! The commands: each turns parsed arguments into settings, runs, and maps
//! the outcome to an exit code (0 success, 1 failure while running, 2
//! unusable input).

pub mod check;
pub mod envelope;
pub mod export;
pub mod live;
pub mod plan;
pub mod rehearse;
pub mod replay;
pub mod report;
pub mod session;

use std::process::ExitCode;

use crate::cli::{Cli, Command};

/// Exit status for unusable input (bad config, unreadable file).
pub const EXIT_UNUSABLE: u8 = 2;

/// Runs the command line.
pub fn dispatch(cli: Cli) -> ExitCode {
    let result = match cli.command {
        None => rehearse::run(crate::cli::RehearseArgs::default()),
        Some(Command::Check(a)) => check::run(&a),
        Some(Command::Replay(a)) => replay::run(a),
        Some(Command::Rehearse(a)) => rehearse::run(a),
        Some(Command::Live(a)) => live::run(a),
        Some(Command::Report(a)) => report::run(a),
        Some(Command::Export(a)) => export::run(a),
        Some(Command::Plan(a)) => plan::run(a),
        Some(Command::Envelope(a)) => envelope::run(a),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            crate::say!("termvel: {e:#}");
            ExitCode::from(1)
        }
    }
}

/// Prints a one-line reason and returns the unusable-input exit code.
pub fn unusable(reason: impl std::fmt::Display) -> anyhow::Result<ExitCode> {
    crate::say!("termvel: {reason}");
    Ok(ExitCode::from(EXIT_UNUSABLE))
}
