//! The commands: each turns parsed arguments into settings, runs, and maps
//! the outcome to an exit code (0 success, 1 failure while running, 2
//! unusable input).

pub mod check;
pub mod envelope;
pub mod export;
pub mod follow;
pub mod live;
pub mod plan;
pub mod play;
pub mod rehearse;
pub mod replay;
pub mod report;
pub mod sharing;

use std::fs::File;
use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::{Cli, Command, RunOpts};
use crate::config::ConfigSet;
use crate::event::SourceTable;
use crate::record::{self, RecordingWriter};

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
        Some(Command::Follow(a)) => follow::run(a),
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

/// The session's recording as `--no-record` and `--record-dir` ask (`None`
/// when not recording), its path said on stderr; `Err` is the one-line
/// reason when the file cannot be made. `command` is the word in its name.
pub fn start_recording(
    run: &RunOpts,
    command: &str,
    config: &ConfigSet,
    sources: &SourceTable,
) -> Result<Option<(RecordingWriter<File>, PathBuf)>, String> {
    if run.no_record {
        return Ok(None);
    }
    let dir = run.record_dir.clone().unwrap_or_else(record::default_record_dir);
    match record::create_recording(&dir, command, config, sources) {
        Ok((w, p)) => {
            crate::say!("termvel: recording to {}", p.display());
            Ok(Some((w, p)))
        }
        Err(e) => Err(format!("cannot create a recording in {}: {e} (use --no-record or --record-dir)", dir.display())),
    }
}

/// Tracing to a file in the data directory (never to the screen).
pub(crate) fn init_log_file() -> Option<tracing_appender::non_blocking::WorkerGuard> {
    let dir = record::default_record_dir().parent()?.join("logs");
    std::fs::create_dir_all(&dir).ok()?;
    let appender = tracing_appender::rolling::never(dir, "termvel.log");
    let (writer, guard) = tracing_appender::non_blocking(appender);
    let _ = tracing_subscriber::fmt().with_writer(writer).with_ansi(false).try_init();
    Some(guard)
}

/// Says on stderr where the session's recording went, and whether it
/// stopped early on a failed write.
pub(crate) fn report_recording(rec: &crate::stream::RecordingOutcome) {
    if let Some(p) = &rec.path {
        crate::say!("termvel: recorded {} events to {}", rec.events, p.display());
        if rec.failures > 0 {
            crate::say!(
                "termvel: the recording stopped early: {} (the session ran on unrecorded)",
                rec.error.as_deref().unwrap_or("a write failed")
            );
        }
    }
}
