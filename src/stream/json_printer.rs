//! The headless sink: every snapshot as one JSON line on a writer
//! (stdout), then the closing summary line (`crate::headless` makes the
//! objects).

use std::io::{self, Write};
use std::sync::Arc;

use super::sink::{SnapshotSink, StreamStatus};
use crate::engine::Snapshot;
use crate::headless::snapshot_json;

/// Prints each snapshot as a JSON line, whole and at once; says on stderr
/// when the recording's file stops (and starts again) taking writes.
pub struct JsonPrinter<W: Write> {
    out: W,
    /// The output failed or the reader went away (`| head`): stop
    /// printing, keep running.
    broken: bool,
    /// Why the output failed, unless the reader went away (a broken pipe
    /// is the reader's choice, not a failure).
    error: Option<io::Error>,
    /// Snapshots received (printed, or not once broken).
    snapshots: u64,
    /// Whether the recording's failure has been said on stderr.
    said_record_error: bool,
}

impl<W: Write> JsonPrinter<W> {
    pub fn new(out: W) -> JsonPrinter<W> {
        JsonPrinter { out, broken: false, error: None, snapshots: 0, said_record_error: false }
    }

    /// Prints the closing summary line.
    pub fn finish_json(&mut self, summary: &serde_json::Value) {
        if !self.broken {
            let r = writeln!(self.out, "{summary}").and_then(|()| self.out.flush());
            self.check(r);
        }
    }

    /// Snapshots the stream produced.
    pub fn snapshots(&self) -> u64 {
        self.snapshots
    }

    /// The error that stopped the output (not a reader that went away).
    pub fn take_error(&mut self) -> Option<io::Error> {
        self.error.take()
    }

    fn check(&mut self, r: io::Result<()>) {
        if let Err(e) = r {
            self.broken = true;
            if e.kind() != io::ErrorKind::BrokenPipe {
                self.error.get_or_insert(e);
            }
        }
    }

    /// Says on stderr, once each, that the recording's file stopped taking
    /// writes and that it takes them again.
    fn recording_news(&mut self, status: &StreamStatus) {
        match (&status.record_error, self.said_record_error) {
            (Some(e), false) => {
                self.said_record_error = true;
                crate::say!(
                    "termvel: recording failing: {e}; holding events in memory (up to {} MiB) and retrying",
                    crate::stream::BACKLOG_BYTES >> 20
                );
            }
            (None, true) => {
                self.said_record_error = false;
                crate::say!("termvel: the recording takes writes again; the events held were written in order");
            }
            _ => {}
        }
    }
}

impl<W: Write> SnapshotSink for JsonPrinter<W> {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &StreamStatus) {
        self.snapshots += 1;
        self.recording_news(status);
        if self.broken {
            return;
        }
        // Each line goes out whole and at once: a reader following a live
        // session sees every snapshot when it is made, not a buffer later.
        let r = serde_json::to_writer(&mut self.out, &snapshot_json(&snap))
            .map_err(io::Error::from)
            .and_then(|()| self.out.write_all(b"\n"))
            .and_then(|()| self.out.flush());
        self.check(r);
    }

    fn status(&mut self, status: &StreamStatus) {
        self.recording_news(status);
    }
}
