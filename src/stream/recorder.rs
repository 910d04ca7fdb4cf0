//! The recorder of a running stream: the recording writer, and what it does
//! when the file cannot be written (a full disk, an I/O error).
//!
//! A failed write never stops the recording and never leaves a torn line.
//! The file is cut back to its last whole line, the lines the writer had
//! pending stay with it, and every event after that is held in memory, in
//! order, up to [`BACKLOG_BYTES`]. Every [`RETRY_EVERY`] (on the next event
//! or flush tick after it) the recorder tries again; once the file takes
//! writes, it writes the pending lines and the held events in their order,
//! so a disk that is freed in time loses nothing. When the memory is full
//! the newest events are dropped and counted (a buffer that is full drops
//! the newest, and says so); the count goes into the recording, where it
//! was, as a `lost N` line of the session source once the file takes writes.

use std::collections::VecDeque;
use std::fs::File;
use std::io::{self, Seek, SeekFrom, Write};
use std::path::PathBuf;
use std::time::{Duration, Instant};

use crate::event::{Event, Payload, SESSION, SourceTable, TimeNs};
use crate::record::RecordingWriter;

/// Memory the recorder may hold while the file cannot be written, bytes
/// (about a million CAN events, several minutes of a busy bus).
pub const BACKLOG_BYTES: usize = 64 << 20;

/// Time between two attempts to write to a file that failed.
pub const RETRY_EVERY: Duration = Duration::from_millis(100);

/// A file a recording goes to: written, and cut back to its whole lines
/// after a failed write.
pub trait RecordFile: Write {
    /// Cuts the file to `len` bytes; the next write goes at `len`.
    fn truncate_to(&mut self, len: u64) -> io::Result<()>;
}

impl RecordFile for File {
    fn truncate_to(&mut self, len: u64) -> io::Result<()> {
        self.set_len(len)?;
        self.seek(SeekFrom::Start(len))?;
        Ok(())
    }
}

/// What the recorder did over a stream's run.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RecordingOutcome {
    /// The file, when the stream was recorded.
    pub path: Option<PathBuf>,
    /// Events in the file, whole, at the end.
    pub events: u64,
    /// Times the file stopped taking writes (each lasted until a retry
    /// succeeded, or to the end).
    pub failures: u64,
    /// The first error, with what failed, for the user.
    pub error: Option<String>,
    /// Events held in memory while the file failed, then written.
    pub held_then_written: u64,
    /// Events dropped because the memory buffer was full (their count is
    /// in the file as a `lost` line, when the file took writes again).
    pub dropped: u64,
    /// Events still unwritten when the stream ended (the file never took
    /// writes again): not in the file.
    pub unwritten: u64,
}

impl RecordingOutcome {
    /// Whether every event of the stream is in the file.
    pub fn is_complete(&self) -> bool {
        self.dropped == 0 && self.unwritten == 0
    }
}

/// An event held while the file fails, or a run of dropped ones.
enum Held {
    Event(Event),
    /// `n` events dropped, the last at `last_t_ns`.
    Dropped {
        n: u64,
        last_t_ns: TimeNs,
    },
}

/// The recording writer, with a memory backlog for when the file fails.
pub struct Recorder<W: RecordFile = File> {
    writer: RecordingWriter<W>,
    path: PathBuf,
    backlog: VecDeque<Held>,
    backlog_bytes: usize,
    /// Events in `backlog` (runs of dropped ones aside).
    held_events: u64,
    limit_bytes: usize,
    retry_every: Duration,
    /// The error of the failing file; `None` while it takes writes.
    failing: Option<String>,
    last_attempt: Option<Instant>,
    outcome: RecordingOutcome,
}

impl<W: RecordFile> Recorder<W> {
    /// A recorder on `writer` (its header written) to the file at `path`.
    pub fn new(writer: RecordingWriter<W>, path: PathBuf) -> Recorder<W> {
        Recorder::with_limits(writer, path, BACKLOG_BYTES, RETRY_EVERY)
    }

    /// As [`Recorder::new`], with the memory bound and retry interval given
    /// (tests use small ones).
    pub fn with_limits(writer: RecordingWriter<W>, path: PathBuf, limit_bytes: usize, retry_every: Duration) -> Self {
        let outcome = RecordingOutcome { path: Some(path.clone()), ..RecordingOutcome::default() };
        Recorder {
            writer,
            path,
            backlog: VecDeque::new(),
            backlog_bytes: 0,
            held_events: 0,
            limit_bytes,
            retry_every,
            failing: None,
            last_attempt: None,
            outcome,
        }
    }

    /// The file.
    pub fn path(&self) -> &std::path::Path {
        &self.path
    }

    /// The error of the file while it does not take writes.
    pub fn failing(&self) -> Option<&str> {
        self.failing.as_deref()
    }

    /// Events held in memory now.
    pub fn held(&self) -> u64 {
        self.held_events
    }

    /// What it did so far.
    pub fn outcome(&self) -> &RecordingOutcome {
        &self.outcome
    }

    /// Writes `ev` (or holds it while the file fails, retrying when due).
    pub fn write(&mut self, ev: &Event, sources: &SourceTable) {
        if self.failing.is_some() && self.retry_due() {
            self.retry(sources);
        }
        if self.failing.is_some() {
            self.hold(ev);
            return;
        }
        if let Err(e) = self.writer.write_event(ev, sources) {
            // The event is in the writer's pending lines: kept for the retry.
            self.fail(e, "write");
        }
    }

    /// The wall-clock flush: writes what is pending through to the file, or
    /// retries a failing file when due.
    pub fn flush(&mut self, sources: &SourceTable) {
        if self.failing.is_some() {
            if self.retry_due() {
                self.retry(sources);
            }
        } else if let Err(e) = self.writer.flush() {
            self.fail(e, "write");
        }
    }

    /// Flushes, tries a failing file one last time, and closes: what the
    /// recorder did. A file that still fails is left with its whole lines;
    /// what could not be written is counted as unwritten.
    pub fn close(mut self, sources: &SourceTable) -> RecordingOutcome {
        self.last_attempt = None;
        self.flush(sources);
        self.outcome.events = self.writer.events() - self.writer.pending_events();
        if self.failing.is_some() {
            let in_writer = self.writer.discard_pending();
            let held = self.held_events;
            self.outcome.unwritten = in_writer + held;
            // Events written from the backlog into lines that never reached
            // the file were not written after all.
            self.outcome.held_then_written = self.outcome.held_then_written.saturating_sub(in_writer);
            self.backlog.clear();
        }
        self.outcome.clone()
    }

    fn retry_due(&self) -> bool {
        self.last_attempt.is_none_or(|t| t.elapsed() >= self.retry_every)
    }

    /// Tries the file again: the pending lines, then the held events in
    /// order (a run of dropped ones as a `lost` line of the session).
    fn retry(&mut self, sources: &SourceTable) {
        self.last_attempt = Some(Instant::now());
        if let Err(e) = self.writer.flush() {
            self.fail(e, "retry");
            return;
        }
        while let Some(h) = self.backlog.pop_front() {
            let ev = match h {
                Held::Event(ev) => {
                    self.backlog_bytes -= held_bytes(&ev);
                    self.held_events -= 1;
                    self.outcome.held_then_written += 1;
                    ev
                }
                Held::Dropped { n, last_t_ns } => Event::new(last_t_ns, SESSION, Payload::Lost(n)),
            };
            if let Err(e) = self.writer.write_event(&ev, sources) {
                self.fail(e, "retry");
                return;
            }
        }
        if let Err(e) = self.writer.flush() {
            self.fail(e, "retry");
            return;
        }
        tracing::warn!("{}: the recording takes writes again", self.path.display());
        self.failing = None;
    }

    /// Keeps `ev` in memory, or counts it dropped when the memory is full.
    fn hold(&mut self, ev: &Event) {
        let bytes = held_bytes(ev);
        if self.backlog_bytes + bytes <= self.limit_bytes {
            self.backlog_bytes += bytes;
            self.held_events += 1;
            self.backlog.push_back(Held::Event(ev.clone()));
            return;
        }
        self.outcome.dropped += 1;
        match self.backlog.back_mut() {
            Some(Held::Dropped { n, last_t_ns }) => {
                *n += 1;
                *last_t_ns = ev.t_ns;
            }
            _ => self.backlog.push_back(Held::Dropped { n: 1, last_t_ns: ev.t_ns }),
        }
    }

    /// A write failed: cut the file back to its whole lines (the writer
    /// keeps the lines it could not write) and hold events from now on.
    fn fail(&mut self, e: io::Error, what: &str) {
        let mut message = format!("{}: {what} failed: {e}", self.path.display());
        let committed = self.writer.committed_bytes();
        if let Err(te) = self.writer.get_mut().truncate_to(committed) {
            message.push_str(&format!(" (and cutting it back to its last whole line failed: {te})"));
        }
        if self.failing.is_none() {
            self.outcome.failures += 1;
            tracing::error!("{message}; holding events in memory (up to {} MiB)", self.limit_bytes >> 20);
        }
        self.outcome.error.get_or_insert_with(|| message.clone());
        self.failing = Some(message);
        self.last_attempt = Some(Instant::now());
    }
}

/// What holding `ev` costs in memory, bytes (the event and its text).
fn held_bytes(ev: &Event) -> usize {
    let text = match &ev.payload {
        Payload::Line(b) => b.len(),
        Payload::BadLine { line, error } => line.len() + error.len(),
        Payload::Mark(s) | Payload::Ack(s) | Payload::Note(s) => s.len(),
        Payload::Link(_, reason) => reason.len(),
        Payload::Can(_) | Payload::Tick | Payload::Lost(_) => 0,
    };
    std::mem::size_of::<Event>() + text
}
