//! The player: drives a finite event stream (a recording, a candump log,
//! the rehearsal simulator) through the engine at a chosen pace, with the
//! controls an engineer uses after a run: pause, resume, speed x0.1 to x64
//! or as fast as possible, seek to a time or by an amount, single-step, and
//! operator marks and acknowledgements that go into the recording.
//!
//! Pacing is the only thing here that reads a clock (tokio's, so tests run
//! it on paused time). The engine sees the same events in the same order
//! whatever the pace, so its snapshots are identical paced or not. Seeking
//! backwards restarts the stream and the engine and feeds them forward
//! quickly to the target, so derived values after a seek are exactly those
//! of a straight run.

use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

use tokio::sync::mpsc;
use tokio::time::Instant;

use crate::engine::{Engine, Snapshot};
use crate::event::{Event, NS_PER_S, OPERATOR, Payload, SESSION, SourceTable, TimeNs};
use crate::record::{ReadStats, RecordingWriter};

/// A finite, restartable stream of events in stream order.
pub trait EventSource: Send {
    /// The next event; `None` at the end.
    fn next_event(&mut self) -> Option<Event>;
    /// The sources seen so far (may grow as the stream is read).
    fn sources(&self) -> &SourceTable;
    /// Starts again from the first event.
    fn rewind(&mut self) -> Result<(), String>;
    /// Reading statistics (malformed lines, torn tail), if the source reads a file.
    fn read_stats(&self) -> ReadStats {
        ReadStats::default()
    }
}

/// Slowest and fastest paced speeds.
pub const MIN_SPEED: f64 = 0.1;
pub const MAX_SPEED: f64 = 64.0;
/// The speed steps the faster/slower keys move through.
pub const SPEED_STEPS: [f64; 11] = [0.1, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0, f64::INFINITY];

/// A control sent to a running player. The sender is the UI (or a test);
/// the player holds the receiver and stops reading it when it ends.
#[derive(Clone, Debug, PartialEq)]
pub enum Control {
    TogglePause,
    /// Paced at this factor of real time; `f64::INFINITY` for as fast as possible.
    SetSpeed(f64),
    /// One step up or down [`SPEED_STEPS`].
    Faster,
    Slower,
    /// Seek by a signed amount of stream time.
    SeekBy(TimeNs),
    /// Seek to an absolute stream time.
    SeekTo(TimeNs),
    /// While paused: advance one snapshot interval.
    Step,
    /// Operator mark with its text, at the current stream time.
    Mark(String),
    /// Acknowledge an alert (its key) or all (`*`).
    Ack(String),
    Quit,
}

/// Where the player is.
#[derive(Clone, Debug, PartialEq)]
pub struct PlayerStatus {
    /// Stream time of the first event.
    pub start_ns: Option<TimeNs>,
    /// Stream time of the latest event fed.
    pub position_ns: Option<TimeNs>,
    pub speed: f64,
    pub paused: bool,
    pub finished: bool,
    pub recording: Option<PathBuf>,
    pub events_fed: u64,
}

/// What a player run ends with.
#[derive(Clone, Debug)]
pub struct PlayerOutcome {
    pub engine: Engine,
    pub sources: SourceTable,
    pub read_stats: ReadStats,
    pub snapshots: u64,
    /// The recording written, and how many events went into it.
    pub recording: Option<PathBuf>,
    pub recorded_events: u64,
}

/// Settings of a player run.
pub struct PlayerOptions {
    /// Initial speed; `f64::INFINITY` for as fast as possible.
    pub speed: f64,
    pub start_paused: bool,
    /// Keep running (paused at the end) until told to quit, for screens;
    /// headless runs end with the stream.
    pub hold_at_end: bool,
    pub recorder: Option<(RecordingWriter<std::fs::File>, PathBuf)>,
    /// Where to record, while paced, how late each event is applied after
    /// it was due (µs): the feed screen's histogram.
    pub latency: Option<crate::ui::LatencyHistogram>,
}

/// Something that receives every snapshot with the player's status. The
/// headless printer takes every one; a screen keeps only the latest.
pub trait SnapshotSink {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &PlayerStatus);
    /// Status changed without a new snapshot (pause, speed).
    fn status(&mut self, _status: &PlayerStatus) {}
}

impl<F: FnMut(Arc<Snapshot>, &PlayerStatus)> SnapshotSink for F {
    fn snapshot(&mut self, snap: Arc<Snapshot>, status: &PlayerStatus) {
        self(snap, status)
    }
}

/// Plays `src` through a fresh engine from `make_engine` (called again to
/// seek backwards). Returns when the stream ends, or on `Quit` when holding
/// at the end.
pub async fn play<S: EventSource, K: SnapshotSink>(
    src: S,
    make_engine: impl Fn() -> Engine,
    opts: PlayerOptions,
    mut controls: mpsc::Receiver<Control>,
    sink: &mut K,
) -> Result<PlayerOutcome, String> {
    let (recorder, rec_path) = match opts.recorder {
        Some((w, p)) => (Some(w), Some(p)),
        None => (None, None),
    };
    let mut p = Player {
        engine: make_engine(),
        make_engine,
        src,
        recorder,
        status: PlayerStatus {
            start_ns: None,
            position_ns: None,
            speed: opts.speed,
            paused: opts.start_paused,
            finished: false,
            recording: rec_path,
            events_fed: 0,
        },
        anchor: None,
        seq: 0,
        recorded_upto: 0,
        snapshots: 0,
        pending: None,
        step_until: None,
        operator_events: Vec::new(),
        sink,
        last_hidden: None,
    };
    let mut controls_open = true;
    loop {
        while controls_open {
            match controls.try_recv() {
                Ok(c) => {
                    if p.apply(c)? {
                        return Ok(p.finish());
                    }
                }
                Err(mpsc::error::TryRecvError::Empty) => break,
                Err(mpsc::error::TryRecvError::Disconnected) => controls_open = false,
            }
        }
        let stepping = p.step_until.is_some();
        if p.status.paused && !stepping {
            if !controls_open {
                return Ok(p.finish());
            }
            match controls.recv().await {
                Some(c) => {
                    if p.apply(c)? {
                        return Ok(p.finish());
                    }
                }
                None => controls_open = false,
            }
            continue;
        }
        let Some(ev) = p.pending.take().or_else(|| p.src.next_event()) else {
            p.end_of_stream();
            if opts.hold_at_end && controls_open {
                p.status.paused = true;
                p.sink.status(&p.status);
                continue;
            }
            return Ok(p.finish());
        };
        if let Some(limit) = p.step_until
            && ev.t_ns > limit
        {
            // The step ends on the snapshot at `limit`: show it now.
            p.step_until = None;
            p.pending = Some(ev);
            p.status.position_ns = Some(limit);
            let mut out = Vec::new();
            p.engine.advance(limit + 1, p.src.sources(), &mut |s| out.push(s));
            if out.is_empty() {
                p.sink.status(&p.status);
            }
            for s in out {
                p.emit(s);
            }
            continue;
        }
        let mut due_at = None;
        if p.status.speed.is_finite() && !stepping {
            let anchor = *p.anchor.get_or_insert((Instant::now(), ev.t_ns));
            let due_s = (ev.t_ns - anchor.1) as f64 * 1e-9 / p.status.speed;
            let due = anchor.0 + Duration::from_secs_f64(due_s.max(0.0));
            due_at = Some(due);
            if due > Instant::now() {
                tokio::select! {
                    _ = tokio::time::sleep_until(due) => {}
                    c = controls.recv(), if controls_open => {
                        p.pending = Some(ev);
                        match c {
                            Some(c) => {
                                if p.apply(c)? {
                                    return Ok(p.finish());
                                }
                            }
                            None => controls_open = false,
                        }
                        continue;
                    }
                }
            }
        } else if !p.status.speed.is_finite() && p.seq.is_multiple_of(1024) {
            // As fast as possible, but let other tasks (the screen) run.
            tokio::task::yield_now().await;
        }
        p.feed_stream_event(ev, true);
        if let (Some(due), Some(h)) = (due_at, &opts.latency)
            && let Ok(mut h) = h.lock()
        {
            h.saturating_record(Instant::now().saturating_duration_since(due).as_micros().max(1) as u64);
        }
    }
}

struct Player<'k, S, K, M> {
    src: S,
    make_engine: M,
    engine: Engine,
    recorder: Option<RecordingWriter<std::fs::File>>,
    status: PlayerStatus,
    /// Wall instant and stream time that correspond while paced.
    anchor: Option<(Instant, TimeNs)>,
    /// Stream events fed since the last rewind.
    seq: u64,
    /// Stream events already written to the recording.
    recorded_upto: u64,
    snapshots: u64,
    pending: Option<Event>,
    step_until: Option<TimeNs>,
    /// Marks and acknowledgements of this session, each after the stream
    /// event it followed, so a rewind feeds them again in the same place.
    operator_events: Vec<(u64, Event)>,
    sink: &'k mut K,
    /// The last snapshot produced while seeking, shown when the seek lands.
    last_hidden: Option<Snapshot>,
}

impl<S: EventSource, K: SnapshotSink, M: Fn() -> Engine> Player<'_, S, K, M> {
    /// Feeds one stream event (and the operator events that followed it in
    /// this session); records it the first time; passes snapshots on when
    /// `show` (a seek shows only where it lands).
    fn feed_stream_event(&mut self, ev: Event, show: bool) {
        self.seq += 1;
        self.status.events_fed = self.seq;
        self.status.start_ns.get_or_insert(ev.t_ns);
        self.status.position_ns = Some(ev.t_ns);
        let mut out = Vec::new();
        self.engine.feed(&ev, self.src.sources(), &mut |s| out.push(s));
        let notes = self.engine.take_notes();
        if self.seq > self.recorded_upto {
            self.recorded_upto = self.seq;
            // Annotations in the source are the old run's; this session's
            // own are written instead, before the event that triggered them.
            let mut lines: Vec<Event> =
                notes.into_iter().map(|(t, n)| Event::new(t, SESSION, Payload::Note(n))).collect();
            if ev.is_input() {
                lines.push(ev.clone());
            }
            if let Some(r) = self.recorder.as_mut() {
                for e in &lines {
                    if let Err(err) = r.write_event(e, self.src.sources()) {
                        tracing_error(&format!("recording stopped: {err}"));
                        self.recorder = None;
                        break;
                    }
                }
            }
        }
        let seq = self.seq;
        for (_, op) in self.operator_events.iter().filter(|(s, _)| *s == seq) {
            self.engine.feed(op, self.src.sources(), &mut |s| out.push(s));
        }
        if show {
            for s in out {
                self.emit(s);
            }
        } else if let Some(s) = out.pop() {
            self.last_hidden = Some(s);
        }
    }

    fn emit(&mut self, s: Snapshot) {
        self.snapshots += 1;
        self.sink.snapshot(Arc::new(s), &self.status);
    }

    fn end_of_stream(&mut self) {
        if !self.status.finished {
            self.status.finished = true;
            let mut out = Vec::new();
            self.engine.finish(self.src.sources(), &mut |s| out.push(s));
            for s in out {
                self.emit(s);
            }
        }
    }

    /// Applies a control; true to quit.
    fn apply(&mut self, c: Control) -> Result<bool, String> {
        match c {
            Control::Quit => return Ok(true),
            Control::TogglePause => {
                self.status.paused = !self.status.paused;
                self.anchor = None;
            }
            Control::SetSpeed(s) => {
                self.status.speed = if s.is_finite() { s.clamp(MIN_SPEED, MAX_SPEED) } else { f64::INFINITY };
                self.anchor = None;
            }
            Control::Faster | Control::Slower => {
                let i = SPEED_STEPS.iter().position(|s| *s >= self.status.speed).unwrap_or(SPEED_STEPS.len() - 1);
                let j = if c == Control::Faster { (i + 1).min(SPEED_STEPS.len() - 1) } else { i.saturating_sub(1) };
                self.status.speed = SPEED_STEPS[j];
                self.anchor = None;
            }
            Control::SeekBy(d) => {
                if let Some(p) = self.status.position_ns {
                    let start = self.status.start_ns.unwrap_or(p);
                    self.seek((p + d).max(start))?;
                    return Ok(false);
                }
            }
            Control::SeekTo(t) => {
                self.seek(t)?;
                return Ok(false);
            }
            Control::Step => {
                let every = NS_PER_S / 10;
                let from = self.status.position_ns.unwrap_or(0);
                self.step_until = Some((from.div_euclid(every) + 1) * every);
                self.status.paused = true;
            }
            Control::Mark(text) => self.operator(Payload::Mark(text)),
            Control::Ack(key) => self.operator(Payload::Ack(key)),
        }
        self.sink.status(&self.status);
        Ok(false)
    }

    /// A mark or acknowledgement at the current stream time: fed to the
    /// engine and recorded at once.
    fn operator(&mut self, payload: Payload) {
        let Some(now) = self.engine.now_ns() else { return };
        let ev = Event::new(now, OPERATOR, payload);
        self.operator_events.push((self.seq, ev.clone()));
        let mut out = Vec::new();
        self.engine.feed(&ev, self.src.sources(), &mut |s| out.push(s));
        let notes = self.engine.take_notes();
        if let Some(r) = self.recorder.as_mut() {
            for (t, n) in notes {
                let _ = r.write_event(&Event::new(t, SESSION, Payload::Note(n)), self.src.sources());
            }
            let _ = r.write_event(&ev, self.src.sources());
        }
        for s in out {
            self.emit(s);
        }
    }

    fn seek(&mut self, target: TimeNs) -> Result<(), String> {
        if self.status.position_ns.is_some_and(|p| target < p) {
            self.src.rewind()?;
            self.engine = (self.make_engine)();
            self.seq = 0;
            self.pending = None;
            self.status.finished = false;
        }
        self.last_hidden = None;
        while let Some(ev) = self.pending.take().or_else(|| self.src.next_event()) {
            if ev.t_ns > target {
                self.pending = Some(ev);
                break;
            }
            self.feed_stream_event(ev, false);
        }
        self.anchor = None;
        match self.last_hidden.take() {
            Some(s) => self.emit(s),
            None => self.sink.status(&self.status),
        }
        Ok(())
    }

    fn finish(mut self) -> PlayerOutcome {
        let recorded_events = self.recorder.as_ref().map_or(0, |r| r.events());
        if let Some(r) = self.recorder.as_mut()
            && let Err(e) = r.flush()
        {
            tracing_error(&format!("the recording could not be flushed: {e}"));
        }
        PlayerOutcome {
            recording: self.status.recording.clone(),
            recorded_events,
            read_stats: self.src.read_stats(),
            sources: self.src.sources().clone(),
            engine: self.engine,
            snapshots: self.snapshots,
        }
    }
}

/// Problems while playing go to the log (the screen may be drawn).
fn tracing_error(msg: &str) {
    tracing::error!("{msg}");
}
