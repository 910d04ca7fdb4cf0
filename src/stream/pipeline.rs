//! The one step every driver takes with an event: feed the engine, then
//! write the engine's notes and the event to the recording. Replay,
//! rehearsal and live all record through here, so a failed write is
//! handled one way: logged, counted, the recording stopped (the stream
//! itself runs on), and both shown in the [`StreamStatus`] and the
//! [`RecordingOutcome`].

use std::fs::File;
use std::io::{self, Write};
use std::path::PathBuf;

use super::sink::StreamStatus;
use crate::engine::{Engine, Snapshot};
use crate::event::{Event, Payload, SESSION, SourceTable};
use crate::record::RecordingWriter;

/// Whether a step is the first time this event goes through (recorded) or
/// a pass again over events already recorded (a finite stream fed forward
/// after a rewind: nothing is written, the engine's notes are dropped).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pass {
    First,
    Again,
}

/// What the recorder did over a stream's run.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RecordingOutcome {
    /// The file, when the stream was recorded (also after it stopped).
    pub path: Option<PathBuf>,
    /// Events written to it.
    pub events: u64,
    /// Writes (and flushes) that failed; recording stops at the first.
    pub failures: u64,
    /// The first failure, for the user.
    pub error: Option<String>,
}

/// The engine, the recorder and the status of a running stream.
pub struct Pipeline<W: Write = File> {
    pub engine: Engine,
    pub status: StreamStatus,
    /// The recording while it works; `None` when not recording or stopped.
    writer: Option<RecordingWriter<W>>,
    recording: RecordingOutcome,
}

impl<W: Write> Pipeline<W> {
    /// A pipeline around `engine`, recording to `recorder` if given;
    /// `status.recording` is set from it.
    pub fn new(engine: Engine, recorder: Option<(RecordingWriter<W>, PathBuf)>, mut status: StreamStatus) -> Self {
        let (writer, path) = match recorder {
            Some((w, p)) => (Some(w), Some(p)),
            None => (None, None),
        };
        status.recording = path.clone();
        status.record_failures = 0;
        Pipeline { engine, status, writer, recording: RecordingOutcome { path, ..RecordingOutcome::default() } }
    }

    /// Feeds `ev` to the engine (its snapshots onto `out`); on a
    /// [`Pass::First`], writes the engine's notes about it (this session's
    /// own annotations, before the event that caused them) and then the
    /// event itself, unless it is an old note (a replayed recording's
    /// annotations are the old run's: this session writes its own).
    pub fn step(&mut self, ev: &Event, sources: &SourceTable, pass: Pass, out: &mut Vec<Snapshot>) {
        self.engine.feed(ev, sources, &mut |s| out.push(s));
        let notes = self.engine.take_notes();
        if pass == Pass::Again || self.writer.is_none() {
            return;
        }
        for (t, n) in notes {
            if !self.write(&Event::new(t, SESSION, Payload::Note(n)), sources) {
                return;
            }
        }
        if ev.is_input() {
            self.write(ev, sources);
        }
    }

    /// The stream ended: the engine's last snapshots onto `out`.
    pub fn end_of_stream(&mut self, sources: &SourceTable, out: &mut Vec<Snapshot>) {
        self.status.finished = true;
        self.engine.finish(sources, &mut |s| out.push(s));
    }

    /// Writes what is pending through to the file (on a wall-clock timer,
    /// so a quiet stream is on disk too).
    pub fn flush(&mut self) {
        if let Some(w) = self.writer.as_mut()
            && let Err(e) = w.flush()
        {
            self.failed(e);
        }
    }

    /// Flushes the recording and closes it: the engine and what the
    /// recorder did.
    pub fn close(mut self) -> (Engine, RecordingOutcome) {
        self.flush();
        if let Some(w) = self.writer.take() {
            self.recording.events = w.events();
        }
        (self.engine, self.recording)
    }

    /// Writes one event; false when the recording has stopped.
    fn write(&mut self, ev: &Event, sources: &SourceTable) -> bool {
        let Some(w) = self.writer.as_mut() else { return false };
        match w.write_event(ev, sources) {
            Ok(()) => true,
            Err(e) => {
                self.failed(e);
                false
            }
        }
    }

    /// A write failed: count it, stop recording (the stream runs on), and
    /// say so in the log and the status.
    fn failed(&mut self, e: io::Error) {
        tracing::error!("recording stopped: {e}");
        self.recording.failures += 1;
        self.recording.error.get_or_insert_with(|| e.to_string());
        if let Some(w) = self.writer.take() {
            self.recording.events = w.events();
        }
        self.status.recording = None;
        self.status.record_failures = self.recording.failures;
    }
}

#[cfg(test)]
mod tests {
    use std::sync::Arc;

    use super::*;
    use crate::config::ConfigSet;
    use crate::engine::EngineOptions;
    use crate::event::OPERATOR;
    use crate::record::{Header, RecordingReader};

    /// Keeps what is written, until told the disk is full.
    #[derive(Clone, Default)]
    struct Disk {
        bytes: Arc<std::sync::Mutex<Vec<u8>>>,
        full: Arc<std::sync::atomic::AtomicBool>,
    }

    impl Write for Disk {
        fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
            if self.full.load(std::sync::atomic::Ordering::Relaxed) {
                return Err(io::Error::new(io::ErrorKind::StorageFull, "no space left on device"));
            }
            self.bytes.lock().unwrap().extend_from_slice(buf);
            Ok(buf.len())
        }

        fn flush(&mut self) -> io::Result<()> {
            Ok(())
        }
    }

    fn pipeline() -> (Pipeline<Disk>, SourceTable, Disk) {
        let sources = SourceTable::default();
        let disk = Disk::default();
        let header = Header { version: 1, is_termvel: true, sources: sources.clone(), ..Header::default() };
        let w = RecordingWriter::new(disk.clone(), &header).unwrap();
        let engine = Engine::new(Arc::new(ConfigSet::embedded()), EngineOptions::default());
        let p = Pipeline::new(engine, Some((w, PathBuf::from("r.tvrec"))), StreamStatus::default());
        (p, sources, disk)
    }

    fn mark(i: i64) -> Event {
        Event::new(1_000_000_000 * i, OPERATOR, Payload::Mark(format!("mark {i}")))
    }

    #[test]
    fn first_passes_are_recorded_and_passes_again_are_not() {
        let (mut p, sources, disk) = pipeline();
        assert_eq!(p.status.recording.as_deref(), Some(std::path::Path::new("r.tvrec")));
        let mut out = Vec::new();
        p.step(&mark(1), &sources, Pass::First, &mut out);
        p.step(&mark(1), &sources, Pass::Again, &mut out);
        p.step(
            &Event::new(2_000_000_000, SESSION, Payload::Note("an old run's".into())),
            &sources,
            Pass::First,
            &mut out,
        );
        p.step(&mark(3), &sources, Pass::First, &mut out);
        let (_, rec) = p.close();
        assert_eq!((rec.events, rec.failures, rec.error), (2, 0, None));
        let bytes = disk.bytes.lock().unwrap().clone();
        let mut r = RecordingReader::new(&bytes[..], "r").unwrap();
        let marks: Vec<Payload> = std::iter::from_fn(|| r.next_event()).map(|e| e.payload).collect();
        assert_eq!(marks, vec![Payload::Mark("mark 1".into()), Payload::Mark("mark 3".into())]);
    }

    #[test]
    fn a_failed_write_stops_the_recording_is_counted_and_shows_in_the_status() {
        let (mut p, sources, disk) = pipeline();
        disk.full.store(true, std::sync::atomic::Ordering::Relaxed);
        let mut out = Vec::new();
        for i in 1..=3 {
            // Marks flush at once, so each would reach the file.
            p.step(&mark(i), &sources, Pass::First, &mut out);
        }
        assert_eq!(p.status.recording, None, "marked stopped");
        assert_eq!(p.status.record_failures, 1, "one failure: nothing is written after it");
        p.flush();
        let (_, rec) = p.close();
        assert_eq!(rec.path.as_deref(), Some(std::path::Path::new("r.tvrec")), "the file is still named");
        assert_eq!(rec.failures, 1);
        assert!(rec.error.as_deref().is_some_and(|e| e.contains("no space")), "{:?}", rec.error);
    }
}
