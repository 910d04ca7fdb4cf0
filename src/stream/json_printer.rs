//! The headless sink: every snapshot as one JSON line on a writer
//! (stdout), then the closing summary line (`crate::headless` makes the
//! objects).

use std::io::Write;
use std::sync::Arc;

use super::sink::{SnapshotSink, StreamStatus};
use crate::engine::Snapshot;
use crate::headless::snapshot_json;

/// Prints each snapshot as a JSON line, whole and at once.
pub struct JsonPrinter<W: Write> {
    out: W,
    /// The reader went away (`| head`): stop printing, keep running.
    broken: bool,
}

impl<W: Write> JsonPrinter<W> {
    pub fn new(out: W) -> JsonPrinter<W> {
        JsonPrinter { out, broken: false }
    }

    /// Prints the closing summary line.
    pub fn finish_json(&mut self, summary: &serde_json::Value) {
        if !self.broken {
            let _ = writeln!(self.out, "{summary}");
            let _ = self.out.flush();
        }
    }
}

impl<W: Write> SnapshotSink for JsonPrinter<W> {
    fn snapshot(&mut self, snap: Arc<Snapshot>, _status: &StreamStatus) {
        if self.broken {
            return;
        }
        // Each line goes out whole and at once: a reader following a live
        // session sees every snapshot when it is made, not a buffer later.
        if serde_json::to_writer(&mut self.out, &snapshot_json(&snap)).is_err()
            || self.out.write_all(b"\n").is_err()
            || self.out.flush().is_err()
        {
            self.broken = true;
        }
    }
}
