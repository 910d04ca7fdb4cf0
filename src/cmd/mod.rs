//! The commands: each turns parsed arguments into settings, runs, and maps
//! the outcome to an exit code (0 success, 1 failure while running, 2
//! unusable input or a command not built yet).

pub mod check;
pub mod live;
pub mod plan;
pub mod rehearse;
pub mod replay;
pub mod session;

use std::process::ExitCode;

use crate::cli::{Cli, Command};

/// Exit status for unusable input (bad config, unreadable file) and for
/// commands not built yet.
pub const EXIT_UNUSABLE: u8 = 2;

/// Runs the command line.
pub fn dispatch(cli: Cli) -> ExitCode {
    let result = match cli.command {
        None => rehearse::run(crate::cli::RehearseArgs::default()),
        Some(Command::Check(a)) => check::run(&a),
        Some(Command::Replay(a)) => replay::run(a),
        Some(Command::Rehearse(a)) => rehearse::run(a),
        Some(Command::Live(a)) => live::run(a),
        Some(Command::Report(_)) => not_built("report"),
        Some(Command::Export(_)) => not_built("export"),
        Some(Command::Plan(a)) => plan::run(a),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            eprintln!("termvel: {e:#}");
            ExitCode::from(1)
        }
    }
}

fn not_built(what: &str) -> anyhow::Result<ExitCode> {
    eprintln!("termvel: `{what}` is not built yet in this version; see the open issues.");
    Ok(ExitCode::from(EXIT_UNUSABLE))
}

/// Prints a one-line reason and returns the unusable-input exit code.
pub fn unusable(reason: impl std::fmt::Display) -> anyhow::Result<ExitCode> {
    eprintln!("termvel: {reason}");
    Ok(ExitCode::from(EXIT_UNUSABLE))
}
