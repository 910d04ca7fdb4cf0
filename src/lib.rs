//! termvel: a terminal tool for the engineers who run vehicles at very high
//! speed. It reads live telemetry, replays recorded runs and rehearses run
//! plans, and derives what the engineer decides on: road-load power, battery
//! state of power and boost time left, projected peak speed and the braking
//! point.
//!
//! The pipeline (docs/ARCHITECTURE.md in the repository): [`sources`] produce [`event::Event`]s;
//! [`decode`] turns them into samples; the [`engine`] derives everything
//! and publishes snapshots; the [`record`]er keeps every event; [`stream`]
//! runs a stream through all of them (paced or live); screens, reports and
//! the headless printer read the snapshots.
//!
//! termvel is advisory. It is not a safety system and not a braking cue of
//! record; the run director, track officials and local rules decide.

/// Prints a line to stderr, ignoring a closed stderr (`2>&1 | head`): a
/// message that cannot be shown must not stop a session that records.
#[macro_export]
macro_rules! say {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr(), $($t)*);
    }};
}

/// Prints a line to stdout, ignoring a closed stdout (`| head`); any other
/// failure (a full disk) is kept for the exit code ([`stdout_error`]).
#[macro_export]
macro_rules! out {
    ($($t:tt)*) => {{
        use std::io::Write as _;
        let mut o = std::io::stdout().lock();
        if let Err(e) = writeln!(o, $($t)*).and_then(|()| o.flush()) {
            $crate::note_stdout_error(e);
        }
    }};
}

/// The first failure to write standard output, other than a reader that
/// went away.
static STDOUT_ERROR: std::sync::OnceLock<String> = std::sync::OnceLock::new();

/// Keeps `e` as standard output's failure, unless it is a broken pipe (the
/// reader's choice, not a failure).
pub fn note_stdout_error(e: std::io::Error) {
    if e.kind() != std::io::ErrorKind::BrokenPipe {
        let _ = STDOUT_ERROR.set(e.to_string());
    }
}

/// Standard output's first write failure, if any (the commands turn it
/// into exit code 1).
pub fn stdout_error() -> Option<&'static str> {
    STDOUT_ERROR.get().map(String::as_str)
}

pub mod channel;
pub mod civil_time;
pub mod cli;
pub mod cmd;
pub mod config;
pub mod decode;
pub mod engine;
pub mod envelope;
pub mod event;
pub mod headless;
pub mod output_file;
pub mod planner;
pub mod printable;
pub mod record;
pub mod report;
pub mod share;
pub mod sim;
pub mod sources;
pub mod stream;
pub mod ui;
pub mod units;

/// The one-line caution every screen and report carries.
/// It fits an 80-column screen with its warning sign; the longer text (not a
/// safety system, not a braking cue of record) is on the help screen and in
/// the README.
pub const CAUTION: &str = "Advisory only: the run director, track officials and local rules decide.";
