//! The commands: each turns parsed arguments into settings, runs, and maps
//! the outcome to an exit code.
//!
//! One exit-code rule for every command (the README says the same):
//!
//! - **0**: everything asked was done, and every output is complete (the
//!   recording holds every event, every file and standard output were
//!   written whole). A reader that went away (`| head`) is not a failure.
//! - **1** ([`EXIT_FAILED`]): it failed while running: an output could not
//!   be written (standard output, an exported file, a plot, the recording
//!   missing events), or the run itself failed. The message names the path
//!   and what failed.
//! - **2** ([`EXIT_UNUSABLE`]): unusable input: a config, a file or an
//!   argument that cannot be used (an output that is the input or cannot
//!   be created, a plots directory that is a file); nothing was run or
//!   written. Command-line
//!   syntax errors are 2 as well.

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
pub mod shell_files;

use std::fs::File;
use std::path::PathBuf;
use std::process::ExitCode;

use crate::cli::{Cli, Command, RunOpts};
use crate::config::ConfigSet;
use crate::event::SourceTable;
use crate::record::{self, RecordingWriter};

/// Exit status for a failure while running (an output not written whole).
pub const EXIT_FAILED: u8 = 1;
/// Exit status for unusable input (bad config, unreadable file, an output
/// path that cannot be used).
pub const EXIT_UNUSABLE: u8 = 2;

/// Runs the command line.
pub fn dispatch(cli: Cli) -> ExitCode {
    let result = match cli.command {
        None => rehearse::run(crate::cli::RehearseArgs::default()),
        Some(Command::Check(a)) => check::run(&a),
        Some(Command::ShellFiles(a)) => shell_files::run(&a),
        Some(Command::Replay(a)) => replay::run(a),
        Some(Command::Rehearse(a)) => rehearse::run(a),
        Some(Command::Live(a)) => live::run(a),
        Some(Command::Report(a)) => report::run(a),
        Some(Command::Export(a)) => export::run(a),
        Some(Command::Plan(a)) => plan::run(a),
        Some(Command::Envelope(a)) => envelope::run(a),
        Some(Command::Follow(a)) => follow::run(a),
    };
    let code = match result {
        Ok(code) => code,
        Err(e) => {
            crate::say!("termvel: {e:#}");
            return ExitCode::from(EXIT_FAILED);
        }
    };
    // Whatever the command, output it could not print is a failure.
    if let Some(e) = crate::stdout_error() {
        crate::say!("termvel: cannot write to standard output: {e}");
        if code == ExitCode::SUCCESS {
            return ExitCode::from(EXIT_FAILED);
        }
    }
    code
}

/// Prints a one-line reason and returns the unusable-input exit code.
pub fn unusable(reason: impl std::fmt::Display) -> anyhow::Result<ExitCode> {
    crate::say!("termvel: {reason}");
    Ok(ExitCode::from(EXIT_UNUSABLE))
}

/// Prints a one-line reason and returns the failed-while-running exit code.
pub fn failed(reason: impl std::fmt::Display) -> anyhow::Result<ExitCode> {
    crate::say!("termvel: {reason}");
    Ok(ExitCode::from(EXIT_FAILED))
}

/// 0 when `ok`, else [`EXIT_FAILED`].
pub fn code(ok: bool) -> ExitCode {
    if ok { ExitCode::SUCCESS } else { ExitCode::from(EXIT_FAILED) }
}

/// Writes `text` to standard output and flushes it; a reader that went away
/// (a broken pipe) is not an error, anything else is, named.
pub fn write_stdout(text: &str) -> Result<(), String> {
    use std::io::Write as _;
    let mut out = std::io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => Err(stdout_error(&e)),
        _ => Ok(()),
    }
}

/// The message for a failed write to standard output.
pub fn stdout_error(e: &std::io::Error) -> String {
    format!("cannot write to standard output: {e}")
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

/// How the screens kept up: a developer's figure, so into the log, and on
/// stderr only with `--verbose` (the soak test reads it there).
pub(crate) fn draw_stats(stats: &crate::ui::DrawStats, verbose: bool) {
    tracing::info!("{}", stats.line());
    if verbose {
        crate::say!("{}", stats.line());
    }
}

/// Says on stderr where the session's recording went, and what its file
/// failed to take; true when every event is in it.
pub(crate) fn report_recording(rec: &crate::stream::RecordingOutcome) -> bool {
    let Some(p) = &rec.path else { return true };
    crate::say!("termvel: recorded {} events to {}", rec.events, p.display());
    if rec.failures > 0 {
        crate::say!(
            "termvel: the recording's file stopped taking writes {} time(s) (first: {}); {} events waited in memory, then were written",
            rec.failures,
            rec.error.as_deref().unwrap_or("a write failed"),
            rec.held_then_written
        );
    }
    if rec.dropped > 0 {
        crate::say!(
            "termvel: {} events were dropped (the recorder's memory of {} MiB was full); the recording counts them in a `lost` line",
            rec.dropped,
            crate::stream::BACKLOG_BYTES >> 20
        );
    }
    if rec.unwritten > 0 {
        crate::say!(
            "termvel: {} events could not be written before the end and are not in {}",
            rec.unwritten,
            p.display()
        );
    }
    rec.is_complete()
}

/// The recorder's figures for the closing JSON summary.
pub(crate) fn recording_summary(rec: &crate::stream::RecordingOutcome) -> Option<crate::headless::RecordingSummary> {
    let p = rec.path.as_ref()?;
    Some(crate::headless::RecordingSummary {
        path: p.display().to_string(),
        recorded_events: rec.events,
        failures: rec.failures,
        held_then_written: rec.held_then_written,
        dropped_events: rec.dropped,
        unwritten_events: rec.unwritten,
        complete: rec.is_complete(),
        error: rec.error.clone(),
    })
}
