//! The one step every driver takes with an event: feed the engine, then
//! write the engine's notes and the event to the recording. Replay,
//! rehearsal and live all record through here, so a failed write is
//! handled one way ([`super::recorder`]: held in memory and retried, never
//! a torn line), raised as the `recording` alert at once, and shown in the
//! [`StreamStatus`] and the [`RecordingOutcome`].

use std::fs::File;
use std::path::PathBuf;

pub use super::recorder::RecordingOutcome;
use super::recorder::{RecordFile, Recorder};
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

/// The engine, the recorder and the status of a running stream.
pub struct Pipeline<W: RecordFile = File> {
    pub engine: Engine,
    pub status: StreamStatus,
    /// `None` when not recording.
    recorder: Option<Recorder<W>>,
}

impl<W: RecordFile> Pipeline<W> {
    /// A pipeline around `engine`, recording to `recorder` if given;
    /// `status.recording` is set from it.
    pub fn new(engine: Engine, recorder: Option<(RecordingWriter<W>, PathBuf)>, status: StreamStatus) -> Self {
        Self::with_recorder(engine, recorder.map(|(w, p)| Recorder::new(w, p)), status)
    }

    /// As [`Pipeline::new`], with a recorder already made.
    pub fn with_recorder(engine: Engine, recorder: Option<Recorder<W>>, mut status: StreamStatus) -> Self {
        status.recording = recorder.as_ref().map(|r| r.path().to_path_buf());
        status.record_failures = 0;
        status.record_error = None;
        Pipeline { engine, status, recorder }
    }

    /// Feeds `ev` to the engine (its snapshots onto `out`); on a
    /// [`Pass::First`], writes the engine's notes about it (this session's
    /// own annotations, before the event that caused them) and then the
    /// event itself, unless it is an old note (a replayed recording's
    /// annotations are the old run's: this session writes its own).
    pub fn step(&mut self, ev: &Event, sources: &SourceTable, pass: Pass, out: &mut Vec<Snapshot>) {
        self.engine.feed(ev, sources, &mut |s| out.push(s));
        let notes = self.engine.take_notes();
        if pass == Pass::Again {
            return;
        }
        let Some(r) = self.recorder.as_mut() else { return };
        for (t, n) in notes {
            r.write(&Event::new(t, SESSION, Payload::Note(n)), sources);
        }
        if ev.is_input() {
            r.write(ev, sources);
        }
        self.sync_status();
    }

    /// Records a note of this session's own that did not come from the
    /// engine (a follower's "batches lost here"), in stream order with the
    /// events; the engine does not take notes, so nothing derived changes.
    pub fn annotate(&mut self, t_ns: crate::event::TimeNs, text: String, sources: &SourceTable) {
        if let Some(r) = self.recorder.as_mut() {
            r.write(&Event::new(t_ns, SESSION, Payload::Note(text)), sources);
            self.sync_status();
        }
    }

    /// The stream ended: the engine's last snapshots onto `out`.
    pub fn end_of_stream(&mut self, sources: &SourceTable, out: &mut Vec<Snapshot>) {
        self.status.finished = true;
        self.engine.finish(sources, &mut |s| out.push(s));
    }

    /// Writes what is pending through to the file, or retries a file that
    /// failed (on a wall-clock timer, so a quiet stream is on disk too).
    pub fn flush(&mut self, sources: &SourceTable) {
        if let Some(r) = self.recorder.as_mut() {
            r.flush(sources);
            self.sync_status();
        }
    }

    /// Flushes the recording (a failing file gets a last try) and closes
    /// it: the engine and what the recorder did.
    pub fn close(mut self, sources: &SourceTable) -> (Engine, RecordingOutcome) {
        let outcome = self.recorder.take().map(|r| r.close(sources)).unwrap_or_default();
        (self.engine, outcome)
    }

    /// Brings the status and the `recording` alert up to date with the
    /// recorder: the alert is raised when the file stops taking writes and
    /// cleared when it takes them again.
    fn sync_status(&mut self) {
        let Some(r) = &self.recorder else { return };
        let o = r.outcome();
        self.status.record_failures = o.failures;
        self.status.record_dropped = o.dropped;
        self.status.record_held = r.held();
        let failing = r.failing().is_some();
        // The alert is raised again on an engine made afresh (a seek back)
        // while the file still fails.
        if failing != self.status.record_error.is_some() || (failing && !self.engine.alerts.is_active("recording")) {
            self.status.record_error = r.failing().map(str::to_string);
            let t = self.engine.now_ns().unwrap_or(0);
            crate::engine::alerts::health::recording(&mut self.engine.alerts, t, r.failing());
        }
    }
}

#[cfg(test)]
mod tests {
    use std::io::{self, Write};
    use std::sync::atomic::{AtomicUsize, Ordering};
    use std::sync::{Arc, Mutex};
    use std::time::Duration;

    use super::*;
    use crate::config::ConfigSet;
    use crate::engine::EngineOptions;
    use crate::event::OPERATOR;
    use crate::record::{Header, RecordingReader};

    /// Keeps what is written, up to a capacity that a test changes (a disk
    /// that fills and is freed); a write that does not fit writes what fits
    /// first, as a file system does.
    #[derive(Clone)]
    struct Disk {
        bytes: Arc<Mutex<Vec<u8>>>,
        capacity: Arc<AtomicUsize>,
    }

    impl Disk {
        fn set_capacity(&self, c: usize) {
            self.capacity.store(c, Ordering::Relaxed);
        }
        fn fill(&self) {
            self.set_capacity(self.bytes.lock().unwrap().len());
        }
        fn free(&self) {
            self.set_capacity(usize::MAX);
        }
        fn contents(&self) -> Vec<u8> {
            self.bytes.lock().unwrap().clone()
        }
    }

    impl Default for Disk {
        fn default() -> Disk {
            Disk { bytes: Arc::default(), capacity: Arc::new(AtomicUsize::new(usize::MAX)) }
        }
    }

    impl Write for Disk {
        fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
            let mut b = self.bytes.lock().unwrap();
            let room = self.capacity.load(Ordering::Relaxed).saturating_sub(b.len());
            if room == 0 {
                return Err(io::Error::new(io::ErrorKind::StorageFull, "no space left on device"));
            }
            let n = room.min(buf.len());
            b.extend_from_slice(&buf[..n]);
            Ok(n)
        }

        fn flush(&mut self) -> io::Result<()> {
            Ok(())
        }
    }

    impl RecordFile for Disk {
        fn truncate_to(&mut self, len: u64) -> io::Result<()> {
            self.bytes.lock().unwrap().truncate(len as usize);
            Ok(())
        }
    }

    fn pipeline_with(limit_bytes: usize) -> (Pipeline<Disk>, SourceTable, Disk) {
        let sources = SourceTable::default();
        let disk = Disk::default();
        let header = Header { version: 1, is_termvel: true, sources: sources.clone(), ..Header::default() };
        let w = RecordingWriter::new(disk.clone(), &header).unwrap();
        let engine = Engine::new(Arc::new(ConfigSet::embedded()), EngineOptions::default());
        // Retries on every event: the test decides when the disk has room.
        let r = Recorder::with_limits(w, PathBuf::from("r.tvrec"), limit_bytes, Duration::ZERO);
        let p = Pipeline::with_recorder(engine, Some(r), StreamStatus::default());
        (p, sources, disk)
    }

    fn pipeline() -> (Pipeline<Disk>, SourceTable, Disk) {
        pipeline_with(crate::stream::BACKLOG_BYTES)
    }

    fn mark(i: i64) -> Event {
        Event::new(1_000_000_000 * i, OPERATOR, Payload::Mark(format!("mark {i}")))
    }

    /// The events of a recording's bytes, with whether its last line is whole.
    fn read_back(bytes: &[u8]) -> (Vec<Payload>, bool) {
        let mut r = RecordingReader::new(bytes, "r").unwrap();
        let events = std::iter::from_fn(|| r.next_event()).map(|e| e.payload).collect();
        (events, bytes.ends_with(b"\n"))
    }

    fn marks(from: i64, to: i64) -> Vec<Payload> {
        (from..=to).map(|i| Payload::Mark(format!("mark {i}"))).collect()
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
        let (_, rec) = p.close(&sources);
        assert_eq!((rec.events, rec.failures, rec.error), (2, 0, None));
        let (events, _) = read_back(&disk.contents());
        assert_eq!(events, vec![Payload::Mark("mark 1".into()), Payload::Mark("mark 3".into())]);
    }

    // Issue 13, item 1: a full disk stopped the recording for good at the
    // first failed write (events lost, a torn last line, no alert).
    #[test]
    fn a_full_disk_holds_events_and_writes_every_one_in_order_when_space_returns() {
        let (mut p, sources, disk) = pipeline();
        let mut out = Vec::new();
        p.step(&mark(1), &sources, Pass::First, &mut out);
        // Room for part of the next line only: the write tears it.
        disk.set_capacity(disk.contents().len() + 5);
        for i in 2..=40 {
            p.step(&mark(i), &sources, Pass::First, &mut out);
        }
        let (events, whole) = read_back(&disk.contents());
        assert!(whole, "the file was cut back to its last whole line");
        assert_eq!(events, marks(1, 1));
        assert!(p.status.record_error.as_deref().is_some_and(|e| e.contains("r.tvrec") && e.contains("no space")));
        // Mark 2 waits in the writer; 3 to 40 and the alert's note in memory.
        assert_eq!((p.status.record_failures, p.status.record_held), (1, 39));
        assert!(p.engine.alerts.is_active("recording"), "raised at once");
        disk.free();
        p.step(&mark(41), &sources, Pass::First, &mut out);
        assert_eq!(p.status.record_error, None);
        assert!(!p.engine.alerts.is_active("recording"), "cleared when the file takes writes");
        let (_, rec) = p.close(&sources);
        let (events, whole) = read_back(&disk.contents());
        let got: Vec<Payload> = events.into_iter().filter(|e| matches!(e, Payload::Mark(_))).collect();
        assert!(whole);
        assert_eq!(got, marks(1, 41), "nothing lost, nothing twice, in order");
        assert_eq!((rec.failures, rec.held_then_written, rec.dropped, rec.unwritten), (1, 39, 0, 0));
        assert!(rec.is_complete());
    }

    // Issue 13, item 1: when the memory bound is reached the newest events
    // are dropped, counted, and the count is written where they were.
    #[test]
    fn a_full_buffer_drops_the_newest_and_writes_their_count_when_it_can() {
        let per_event = std::mem::size_of::<Event>() + "mark 10".len();
        let (mut p, sources, disk) = pipeline_with(3 * per_event);
        let mut out = Vec::new();
        p.step(&mark(1), &sources, Pass::First, &mut out);
        disk.fill();
        for i in 2..=10 {
            p.step(&mark(i), &sources, Pass::First, &mut out);
        }
        assert!(p.status.record_dropped > 0 && p.status.record_held > 0, "{:?}", p.status);
        disk.free();
        p.step(&mark(11), &sources, Pass::First, &mut out);
        let (_, rec) = p.close(&sources);
        let (events, whole) = read_back(&disk.contents());
        let got: Vec<Payload> =
            events.into_iter().filter(|e| matches!(e, Payload::Mark(_) | Payload::Lost(_))).collect();
        // The marks that were held, then the count of the dropped ones
        // (some of which were the alert's notes), then the rest.
        let kept = got.iter().take_while(|e| matches!(e, Payload::Mark(_))).count() as i64;
        assert!(whole);
        assert!(kept >= 2, "{got:?}");
        let mut want = marks(1, kept);
        want.push(Payload::Lost(rec.dropped));
        want.push(Payload::Mark("mark 11".into()));
        assert_eq!(got, want);
        assert!(rec.dropped >= (10 - kept) as u64 && rec.unwritten == 0, "{rec:?}");
        assert!(!rec.is_complete());
    }

    // Issue 13, item 1: a disk that stays full to the end leaves whole
    // lines only, and the outcome counts what is in the file and what not.
    #[test]
    fn a_disk_full_to_the_end_leaves_whole_lines_and_counts_the_unwritten() {
        let (mut p, sources, disk) = pipeline();
        let mut out = Vec::new();
        p.step(&mark(1), &sources, Pass::First, &mut out);
        disk.set_capacity(disk.contents().len() + 7);
        for i in 2..=4 {
            p.step(&mark(i), &sources, Pass::First, &mut out);
        }
        let (_, rec) = p.close(&sources);
        let (events, whole) = read_back(&disk.contents());
        assert!(whole, "{:?}", String::from_utf8_lossy(&disk.contents()));
        assert_eq!(events, marks(1, 1));
        // Marks 2 to 4 and the note of the alert's raise.
        assert_eq!((rec.events, rec.unwritten, rec.failures), (1, 4, 1));
        assert!(rec.error.as_deref().is_some_and(|e| e.contains("no space")), "{:?}", rec.error);
    }
}
