//! Writing recordings: append-only, flushed at least every 100 ms of stream
//! time and on every operator mark.
//!
//! The writer formats into a reused buffer and hands whole lines to the
//! underlying writer, so a crash can only tear the last line. The owner
//! (the pipeline) also calls [`RecordingWriter::flush`] on a wall-clock timer
//! so a quiet stream is flushed too.

use std::io::{self, Write};

use super::{Header, MAGIC, VERSION, escape_into};
use crate::decode::candump;
use crate::event::{Event, NS_PER_S, Payload, SourceTable, TimeNs};

/// Stream time between flushes, ns.
pub const FLUSH_INTERVAL_NS: TimeNs = NS_PER_S / 10;

/// Appends events to a recording.
pub struct RecordingWriter<W: Write> {
    out: W,
    line: Vec<u8>,
    pending: Vec<u8>,
    /// Sources already declared in the file.
    declared: Vec<bool>,
    last_flush_ns: Option<TimeNs>,
    events: u64,
    /// Events whose lines are in `pending` (not yet known to be on disk).
    pending_events: u64,
    /// Bytes known to be in the file as whole lines: the header and every
    /// flush that completed. A failed flush may have left part of
    /// `pending` after them; the owner truncates back to this length before
    /// the next attempt writes `pending` again, so no line is torn or
    /// written twice.
    committed_bytes: u64,
}

impl<W: Write> RecordingWriter<W> {
    /// Writes the header (format version, creation time, sources, configs).
    pub fn new(mut out: W, header: &Header) -> io::Result<RecordingWriter<W>> {
        let mut h = Vec::new();
        writeln!(h, "{MAGIC} {VERSION}")?;
        if let Some(c) = &header.created {
            writeln!(h, "%created {c}")?;
        }
        writeln!(h, "%program termvel {}", env!("CARGO_PKG_VERSION"))?;
        let mut declared = Vec::new();
        for (id, s) in header.sources.iter() {
            writeln!(h, "%source {} {}", s.name, s.kind.as_str())?;
            declared.resize(id.0 as usize + 1, false);
            declared[id.0 as usize] = true;
        }
        for c in &header.configs {
            let lines: Vec<&str> = c.text.lines().collect();
            writeln!(h, "%config {} {} {}", c.kind.as_str(), lines.len(), c.origin)?;
            for l in lines {
                h.extend_from_slice(b"%|");
                h.extend_from_slice(l.as_bytes());
                h.push(b'\n');
            }
        }
        writeln!(h, "%end-header")?;
        out.write_all(&h)?;
        out.flush()?;
        Ok(RecordingWriter {
            out,
            line: Vec::with_capacity(256),
            pending: Vec::with_capacity(64 * 1024),
            declared,
            last_flush_ns: None,
            events: 0,
            pending_events: 0,
            committed_bytes: h.len() as u64,
        })
    }

    /// Events accepted so far (on disk, or pending: see
    /// [`RecordingWriter::pending_events`]).
    pub fn events(&self) -> u64 {
        self.events
    }

    /// Events accepted but not yet flushed to the file whole.
    pub fn pending_events(&self) -> u64 {
        self.pending_events
    }

    /// Length of the file's whole lines known to be written (see the field).
    pub fn committed_bytes(&self) -> u64 {
        self.committed_bytes
    }

    /// Forgets the pending lines (the owner gave up on writing them and
    /// counts them as lost), so dropping the writer does not try again;
    /// how many events they held.
    pub fn discard_pending(&mut self) -> u64 {
        self.pending.clear();
        std::mem::take(&mut self.pending_events)
    }

    /// The underlying writer (to truncate a file back to its whole lines
    /// after a failed flush).
    pub fn get_mut(&mut self) -> &mut W {
        &mut self.out
    }

    /// Appends one event. Flushes when a mark arrives or 100 ms of stream
    /// time have passed since the last flush.
    pub fn write_event(&mut self, ev: &Event, sources: &SourceTable) -> io::Result<()> {
        self.line.clear();
        let idx = ev.source.0 as usize;
        if !self.declared.get(idx).copied().unwrap_or(false) {
            if let Some(info) = sources.get(ev.source) {
                self.pending.extend_from_slice(format!("%source {} {}\n", info.name, info.kind.as_str()).as_bytes());
            }
            if self.declared.len() <= idx {
                self.declared.resize(idx + 1, false);
            }
            self.declared[idx] = true;
        }
        format_event(&mut self.line, ev, sources.name(ev.source));
        self.pending.extend_from_slice(&self.line);
        self.events += 1;
        self.pending_events += 1;
        let due = match self.last_flush_ns {
            None => true,
            Some(t) => ev.t_ns - t >= FLUSH_INTERVAL_NS || ev.t_ns < t,
        };
        if matches!(ev.payload, Payload::Mark(_)) || due || self.pending.len() > 60 * 1024 {
            self.flush_at(ev.t_ns)?;
        }
        Ok(())
    }

    fn flush_at(&mut self, t_ns: TimeNs) -> io::Result<()> {
        self.flush()?;
        self.last_flush_ns = Some(t_ns);
        Ok(())
    }

    /// Writes everything pending through to the file. On an error the
    /// pending lines are kept (a retry writes them all again, after the
    /// owner truncated the file to [`RecordingWriter::committed_bytes`]).
    pub fn flush(&mut self) -> io::Result<()> {
        if !self.pending.is_empty() {
            self.out.write_all(&self.pending)?;
            self.out.flush()?;
            self.committed_bytes += self.pending.len() as u64;
            self.pending.clear();
            self.pending_events = 0;
        }
        self.out.flush()
    }
}

impl<W: Write> Drop for RecordingWriter<W> {
    fn drop(&mut self) {
        let _ = self.flush();
    }
}

/// Formats one event as a recording line, newline included.
pub fn format_event(out: &mut Vec<u8>, ev: &Event, source_name: &str) {
    if let Payload::Can(frame) = &ev.payload {
        candump::write_line(out, ev.t_ns, source_name, frame);
        return;
    }
    candump::write_time(out, ev.t_ns);
    let n = out.len();
    // `[time]` for everything that is not a CAN frame.
    out[n - 1] = b']';
    let open = out.iter().rposition(|b| *b == b'(').expect("write_time opens with (");
    out[open] = b'[';
    out.push(b' ');
    out.extend_from_slice(source_name.as_bytes());
    match &ev.payload {
        Payload::Can(_) => unreachable!("handled above"),
        // A bad line is recorded as the line it was: a replay finds its
        // error again.
        Payload::Line(bytes) | Payload::BadLine { line: bytes, .. } => {
            out.extend_from_slice(b" line ");
            escape_into(out, bytes);
        }
        Payload::Mark(text) => {
            out.extend_from_slice(b" mark ");
            escape_into(out, text.as_bytes());
        }
        Payload::Ack(key) => {
            out.extend_from_slice(b" ack ");
            escape_into(out, key.as_bytes());
        }
        Payload::Link(state, reason) => {
            out.extend_from_slice(b" link ");
            out.extend_from_slice(state.as_str().as_bytes());
            out.push(b' ');
            escape_into(out, reason.as_bytes());
        }
        Payload::Tick => out.extend_from_slice(b" tick"),
        Payload::Lost(n) => {
            out.extend_from_slice(b" lost ");
            out.extend_from_slice(n.to_string().as_bytes());
        }
        Payload::Note(text) => {
            out.extend_from_slice(b" note ");
            escape_into(out, text.as_bytes());
        }
    }
    out.push(b'\n');
}
