//! The paced driver: runs a finite event stream (a recording, a candump
//! log, the rehearsal simulator) through the pipeline at a chosen pace,
//! with the controls an engineer uses after a run: pause, resume, speed
//! x0.1 to x64 or as fast as possible, seek to a time or by an amount,
//! single-step, and operator marks and acknowledgements that go into the
//! recording.
//!
//! Pacing is the only thing here that reads a clock (tokio's, so tests run
//! it on paused time). The engine sees the same events in the same order
//! whatever the pace, so its snapshots are identical paced or not.
//!
//! Seeking lands exactly where a straight run would be: the player keeps
//! checkpoints as it plays (a clone of the engine, the source's position
//! and where the chart history stands, one every [`CHECKPOINT_EVERY_NS`]
//! of stream time, at most [`MAX_CHECKPOINTS`] of them), goes back to the latest one at or
//! before the target and feeds forward from there without showing. A
//! source that cannot resume at a position (the simulator) starts again
//! from its first event instead.
//!
//! What the screens draw over time (the speed trace, the derating points)
//! and the count of snapshots are kept here too, from every snapshot the
//! stream produces, shown or not, so after any seek they are those of a
//! straight run to the same place ([`ChartHistory`]).

use std::fs::File;
use std::path::PathBuf;
use std::sync::{Arc, Mutex};
use std::time::Duration;

use tokio::sync::mpsc;
use tokio::time::Instant;

use super::control::{Control, Operator, Playback, clamp_speed, step_speed};
use super::latency::{LatencyHistogram, record_latency};
use super::pipeline::{Pass, Pipeline, RecordingOutcome};
use super::sink::{SnapshotSink, StreamStatus};
use crate::engine::{Engine, Snapshot};
use crate::event::{Event, NS_PER_S, SourceTable, TimeNs};
use crate::record::{ReadStats, RecordingWriter};
use crate::sources::{EventSource, RewindError, SourcePosition};

/// Stream time between two checkpoints at first. Feeding forward runs at
/// about 2.6 million events a second (release build), so from a
/// checkpoint at most 10 s back on a saturated bus (about 8 400 events a
/// second) a seek feeds at most 84 000 events: about 35 ms.
pub const CHECKPOINT_EVERY_NS: TimeNs = 10 * NS_PER_S;
/// Most checkpoints kept. When full, every other one is dropped and the
/// spacing doubles, so memory stays bounded whatever the stream's length.
/// Each holds a clone of the engine, the latest snapshot and the reader's
/// position: about 52 KB with the demo's signal map (measured on the
/// saturated-bus recording of `benches/seek.rs`), so at most about 27 MB.
/// A one-hour stream keeps 360, 10 s apart; a two-hour one 360, 20 s apart.
pub const MAX_CHECKPOINTS: usize = 512;

/// Why a paced run stopped short.
#[derive(Debug, thiserror::Error)]
pub enum PlayerError {
    /// Seeking back needs the stream from its first event (or a
    /// checkpoint), and the source could not start again there.
    #[error("cannot seek back: the stream could not start again")]
    Rewind(#[source] RewindError),
}

/// What a player run ends with.
#[derive(Clone, Debug)]
pub struct PlayerOutcome {
    pub engine: Engine,
    pub sources: SourceTable,
    pub read_stats: ReadStats,
    /// Snapshots passed to the sink.
    pub snapshots: u64,
    /// The recording written, how many events went into it, and what its
    /// file failed to take (held, dropped, unwritten).
    pub recording: RecordingOutcome,
    /// Checkpoints held at the end (at most [`MAX_CHECKPOINTS`]).
    pub checkpoints: usize,
    /// Marks and acknowledgements made behind the end of the recording
    /// (after a seek back): applied on the screens but not written, since
    /// the recording is in time order and had already passed them.
    pub unrecorded: Vec<Event>,
}

/// Settings of a player run.
pub struct PlayerOptions {
    /// Initial speed; `f64::INFINITY` for as fast as possible.
    pub speed: f64,
    /// Start paused on the first snapshot.
    pub start_paused: bool,
    /// Keep running (paused at the end) until told to quit, for screens;
    /// headless runs end with the stream.
    pub hold_at_end: bool,
    /// Keep engine checkpoints for fast seeks (screens); a run that cannot
    /// seek (headless) keeps none, so its memory stays flat.
    pub keep_checkpoints: bool,
    pub recorder: Option<(RecordingWriter<File>, PathBuf)>,
    /// Where to record, while paced, how late each event is applied after
    /// it was due (µs): the feed screen's histogram. Cleared by a seek.
    pub latency: Option<LatencyHistogram>,
    /// Where to keep the chart history for the screens (a fresh one is
    /// kept if `None`).
    pub history: Option<SharedHistory>,
}

impl PlayerOptions {
    /// A run as fast as possible that seeks (checkpoints kept), with no
    /// recorder, latency histogram or shared history: what tests and
    /// benchmarks start from, changing a field or two.
    pub fn as_fast_as_possible() -> PlayerOptions {
        PlayerOptions {
            speed: f64::INFINITY,
            start_paused: false,
            hold_at_end: false,
            keep_checkpoints: true,
            recorder: None,
            latency: None,
            history: None,
        }
    }
}

/// The chart history, written by the player and read by the screens.
pub type SharedHistory = Arc<Mutex<ChartHistory>>;

/// What the charts draw over time, from every snapshot of the stream in
/// order: the same whatever was shown, skipped or sought over.
///
/// It is a straight run's history as far as the stream has been played.
/// Since the engine is deterministic, that never changes: after a seek
/// back the points ahead stay, and feeding forward again walks over them
/// ([`ChartHistory::push`] at `at`) rather than adding them twice. A reader
/// takes the points up to the time of the snapshot it shows.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ChartHistory {
    /// (stream time, distance m, speed m/s): a point every 5 m, or sooner
    /// when the speed moved more than 2 m/s.
    pub trace: Vec<(TimeNs, f64, f64)>,
    /// (stream time, time in boost s, deliverable/rated power) while
    /// boosting, every 0.25 s of boost.
    pub derating: Vec<(TimeNs, f64, f64)>,
    /// Where in `derating` each boost starts.
    pub boost_starts: Vec<usize>,
    /// How much of the history the stream's position has reached.
    at: HistoryMark,
}

/// Lengths of a [`ChartHistory`]'s parts at a place of the stream.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
struct HistoryMark {
    trace: usize,
    derating: usize,
    boost_starts: usize,
}

/// Appends `x` at `*at`, or walks over it when the history already holds
/// it (fed again after a seek back: the same value, the engine being
/// deterministic).
fn put<T: PartialEq + std::fmt::Debug>(v: &mut Vec<T>, at: &mut usize, x: T) {
    if *at == v.len() {
        v.push(x);
    } else {
        debug_assert_eq!(v[*at], x, "a stream fed again gives the same history");
    }
    *at += 1;
}

impl ChartHistory {
    /// Adds what the charts take from the next snapshot of the stream.
    pub fn push(&mut self, s: &Snapshot) {
        let d = &s.derived;
        if let Some(v) = d.speed_mps {
            let x = d.distance_m;
            if self.trace[..self.at.trace].last().is_none_or(|p| x - p.1 >= 5.0 || (v - p.2).abs() > 2.0) {
                put(&mut self.trace, &mut self.at.trace, (s.t_ns, x, v));
            }
        }
        let b = &d.battery;
        if b.boosting
            && let Some(r) = b.derating_ratio
        {
            let start = self.boost_starts[..self.at.boost_starts].last().copied();
            let last = start.and_then(|i| self.derating[i..self.at.derating].last().copied());
            if last.is_none() || last.is_some_and(|p| b.time_in_boost_s < p.1 - 0.5) {
                // A new boost (time in boost went back).
                put(&mut self.boost_starts, &mut self.at.boost_starts, self.at.derating);
                put(&mut self.derating, &mut self.at.derating, (s.t_ns, b.time_in_boost_s, r));
            } else if last.is_some_and(|p| b.time_in_boost_s - p.1 >= 0.25) {
                put(&mut self.derating, &mut self.at.derating, (s.t_ns, b.time_in_boost_s, r));
            }
        }
    }

    /// The speed trace up to stream time `t_ns`: (distance m, speed m/s).
    pub fn trace_until(&self, t_ns: TimeNs) -> impl Iterator<Item = (f64, f64)> + '_ {
        self.trace.iter().take_while(move |p| p.0 <= t_ns).map(|p| (p.1, p.2))
    }

    /// The points of the latest boost up to stream time `t_ns`: (time in
    /// boost s, deliverable/rated).
    pub fn derating_until(&self, t_ns: TimeNs) -> Vec<(f64, f64)> {
        let end = self.derating.partition_point(|p| p.0 <= t_ns);
        let start = self.boost_starts.iter().rev().find(|&&i| i < end).copied().unwrap_or(end);
        self.derating[start..end].iter().map(|p| (p.1, p.2)).collect()
    }
}

/// The player's state at one place of the stream, to go on from there.
struct Checkpoint {
    /// Which slot of the checkpoint spacing it fills.
    slot: i64,
    /// Stream time of the last event fed before it.
    t_ns: TimeNs,
    /// Stream events fed before it.
    seq: u64,
    /// Operator events of the session known when it was taken.
    ops: usize,
    engine: Engine,
    source: SourcePosition,
    snapshots: u64,
    last_snapshot: Option<Arc<Snapshot>>,
    history: HistoryMark,
}

/// Plays `src` through a fresh engine from `make_engine` (called again to
/// seek backwards when the source cannot resume at a checkpoint). Returns
/// when the stream ends, or on `Quit` when holding at the end.
pub async fn play<S: EventSource, K: SnapshotSink>(
    src: S,
    make_engine: impl Fn() -> Engine,
    opts: PlayerOptions,
    mut controls: mpsc::Receiver<Control>,
    sink: &mut K,
) -> Result<PlayerOutcome, PlayerError> {
    let status =
        StreamStatus { speed: opts.speed, paused: opts.start_paused, end_ns: src.end_ns(), ..StreamStatus::default() };
    let mut p = Player {
        pipe: Pipeline::new(make_engine(), opts.recorder, status),
        make_engine,
        src,
        anchor: None,
        seq: 0,
        recorded_upto: 0,
        snapshots: 0,
        pending: None,
        step_until: None,
        operator_events: Vec::new(),
        unrecorded: Vec::new(),
        sink,
        last_snapshot: None,
        history: opts.history.unwrap_or_default(),
        checkpoints: Vec::new(),
        checkpoint_every_ns: CHECKPOINT_EVERY_NS,
        keep_checkpoints: opts.keep_checkpoints,
        latency: opts.latency.clone(),
        out: Vec::new(),
    };
    if opts.start_paused {
        p.show_first();
    }
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
        if p.pipe.status.paused && !stepping {
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
                p.pipe.status.paused = true;
                p.step_until = None;
                p.sink.status(&p.pipe.status);
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
            p.pipe.status.position_ns = Some(limit);
            let mut out = std::mem::take(&mut p.out);
            p.pipe.engine.advance(limit + 1, p.src.sources(), &mut |s| out.push(s));
            if out.is_empty() {
                p.sink.status(&p.pipe.status);
            }
            p.produced(&mut out, true);
            p.out = out;
            continue;
        }
        let mut due_at = None;
        if p.pipe.status.speed.is_finite() && !stepping {
            let anchor = *p.anchor.get_or_insert((Instant::now(), ev.t_ns));
            let due_s = (ev.t_ns - anchor.1) as f64 * 1e-9 / p.pipe.status.speed;
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
        } else if !p.pipe.status.speed.is_finite() && p.seq.is_multiple_of(1024) {
            // As fast as possible, but let other tasks (the screen) run.
            tokio::task::yield_now().await;
        }
        p.feed_stream_event(ev, true);
        if let (Some(due), Some(h)) = (due_at, &opts.latency) {
            record_latency(h, Instant::now().saturating_duration_since(due).as_micros() as u64);
        }
    }
}

struct Player<'k, S, K, M> {
    src: S,
    make_engine: M,
    pipe: Pipeline,
    /// Wall instant and stream time that correspond while paced.
    anchor: Option<(Instant, TimeNs)>,
    /// Stream events fed since the start (as a straight run counts them).
    seq: u64,
    /// Stream events already written to the recording.
    recorded_upto: u64,
    /// Snapshots passed to the sink.
    snapshots: u64,
    pending: Option<Event>,
    step_until: Option<TimeNs>,
    /// Marks and acknowledgements of this session, each after the stream
    /// event it followed, so a seek back feeds them again in the same place.
    operator_events: Vec<(u64, Event)>,
    /// Those made behind the end of the recording, not written.
    unrecorded: Vec<Event>,
    sink: &'k mut K,
    /// The stream's latest snapshot, shown or not: where a seek lands.
    last_snapshot: Option<Arc<Snapshot>>,
    history: SharedHistory,
    /// In stream order, one per slot of `checkpoint_every_ns`.
    checkpoints: Vec<Checkpoint>,
    checkpoint_every_ns: TimeNs,
    /// Whether checkpoints are kept at all ([`PlayerOptions::keep_checkpoints`]).
    keep_checkpoints: bool,
    latency: Option<LatencyHistogram>,
    /// Snapshots of the current step, reused.
    out: Vec<Snapshot>,
}

impl<S: EventSource, K: SnapshotSink, M: Fn() -> Engine> Player<'_, S, K, M> {
    /// Feeds one stream event (and the operator events that followed it in
    /// this session); records it the first time; passes snapshots on when
    /// `show` (a seek shows only where it lands).
    fn feed_stream_event(&mut self, ev: Event, show: bool) {
        self.seq += 1;
        let status = &mut self.pipe.status;
        status.events_fed = self.seq;
        status.start_ns.get_or_insert(ev.t_ns);
        status.position_ns = Some(ev.t_ns);
        let pass = if self.seq > self.recorded_upto {
            self.recorded_upto = self.seq;
            status.recorded_to_ns = Some(ev.t_ns);
            Pass::First
        } else {
            Pass::Again
        };
        let mut out = std::mem::take(&mut self.out);
        self.pipe.step(&ev, self.src.sources(), pass, &mut out);
        if pass == Pass::First {
            self.sink.event(&ev, self.src.sources());
        }
        let seq = self.seq;
        for (_, op) in self.operator_events.iter().filter(|(s, _)| *s == seq) {
            self.pipe.step(op, self.src.sources(), Pass::Again, &mut out);
        }
        self.produced(&mut out, show);
        self.out = out;
        self.maybe_checkpoint(ev.t_ns);
    }

    /// Takes snapshots the stream produced: counted, added to the chart
    /// history, kept as the latest, and passed to the sink when `show`.
    fn produced(&mut self, out: &mut Vec<Snapshot>, show: bool) {
        if out.is_empty() {
            return;
        }
        {
            let mut h = self.history.lock().unwrap_or_else(|e| e.into_inner());
            for s in out.iter() {
                h.push(s);
            }
        }
        for s in out.drain(..) {
            let s = Arc::new(s);
            self.pipe.status.snapshots += 1;
            self.last_snapshot = Some(s.clone());
            if show {
                self.show(s);
            }
        }
    }

    fn show(&mut self, s: Arc<Snapshot>) {
        self.snapshots += 1;
        self.sink.snapshot(s, &self.pipe.status);
    }

    /// Shows the engine as it is now (after a key while paused changed it
    /// without a new snapshot: an acknowledgement, a mark, a seek that
    /// landed before the first snapshot). Not one of the stream's
    /// snapshots: not counted, not in the history.
    fn show_now(&mut self) {
        match self.pipe.engine.now_ns() {
            Some(now) => {
                let s = Arc::new(self.pipe.engine.snapshot_at(now, self.src.sources()));
                self.show(s);
            }
            None => self.sink.status(&self.pipe.status),
        }
    }

    /// Starting paused: plays up to the first snapshot and shows it, so
    /// the screens have something to show and every key a place to start.
    fn show_first(&mut self) {
        while self.pipe.status.snapshots == 0 {
            let Some(ev) = self.src.next_event() else { break };
            self.feed_stream_event(ev, true);
        }
        if self.pipe.status.snapshots == 0 {
            self.show_now();
        }
    }

    /// A checkpoint after the event at `t_ns` if its slot has none.
    fn maybe_checkpoint(&mut self, t_ns: TimeNs) {
        if !self.keep_checkpoints {
            return;
        }
        let slot = t_ns.div_euclid(self.checkpoint_every_ns);
        let i = self.checkpoints.partition_point(|c| c.slot < slot);
        if self.checkpoints.get(i).is_some_and(|c| c.slot == slot) {
            return;
        }
        // Checkpoints stay in stream order; a stream whose time goes back
        // (a file's reversal) gets none there.
        if self.checkpoints.get(i).is_some_and(|c| c.seq <= self.seq)
            || i > 0 && self.checkpoints[i - 1].seq >= self.seq
        {
            return;
        }
        let Some(source) = self.src.position() else { return };
        let history = self.history.lock().unwrap_or_else(|e| e.into_inner()).at;
        self.checkpoints.insert(
            i,
            Checkpoint {
                slot,
                t_ns,
                seq: self.seq,
                ops: self.operator_events.len(),
                engine: self.pipe.engine.clone(),
                source,
                snapshots: self.pipe.status.snapshots,
                last_snapshot: self.last_snapshot.clone(),
                history,
            },
        );
        if self.checkpoints.len() > MAX_CHECKPOINTS {
            // Full: twice the spacing, one checkpoint per new slot.
            self.checkpoint_every_ns *= 2;
            let every = self.checkpoint_every_ns;
            let mut last_slot = None;
            self.checkpoints.retain_mut(|c| {
                c.slot = c.t_ns.div_euclid(every);
                let keep = last_slot != Some(c.slot);
                last_slot = Some(c.slot);
                keep
            });
        }
    }

    fn end_of_stream(&mut self) {
        if !self.pipe.status.finished {
            let mut out = std::mem::take(&mut self.out);
            self.pipe.end_of_stream(self.src.sources(), &mut out);
            self.produced(&mut out, true);
            self.out = out;
        }
    }

    /// Applies a control; true to quit.
    fn apply(&mut self, c: Control) -> Result<bool, PlayerError> {
        match c {
            Control::Quit => return Ok(true),
            Control::Operator(action) => {
                self.operator(action);
                if self.pipe.status.paused {
                    // Paused, no snapshot would come to show it.
                    self.show_now();
                    return Ok(false);
                }
            }
            Control::Playback(p) => {
                if self.playback(p)? {
                    return Ok(false);
                }
            }
        }
        self.sink.status(&self.pipe.status);
        Ok(false)
    }

    /// Applies a playback control; true when it has shown its outcome
    /// itself (a seek shows where it landed).
    fn playback(&mut self, p: Playback) -> Result<bool, PlayerError> {
        let status = &mut self.pipe.status;
        match p {
            Playback::TogglePause => {
                status.paused = !status.paused;
                self.anchor = None;
            }
            Playback::SetSpeed(s) => {
                status.speed = clamp_speed(s);
                self.anchor = None;
            }
            Playback::Faster | Playback::Slower => {
                status.speed = step_speed(status.speed, p == Playback::Faster);
                self.anchor = None;
            }
            Playback::SeekBy(d) => {
                if let Some(pos) = status.position_ns {
                    let start = status.start_ns.unwrap_or(pos);
                    self.seek((pos + d).max(start))?;
                    return Ok(true);
                }
            }
            Playback::SeekTo(t) => {
                self.seek(t)?;
                return Ok(true);
            }
            Playback::Step => {
                let every = NS_PER_S / 10;
                // From the snapshot on the screen (the position may be an
                // event already past the next one's time), or from where a
                // step under way ends: two quick steps are two steps.
                let shown = self.last_snapshot.as_ref().map(|s| s.t_ns);
                let from = self.step_until.or(shown).or(status.position_ns).unwrap_or(0);
                self.step_until = Some((from.div_euclid(every) + 1) * every);
                status.paused = true;
            }
        }
        Ok(false)
    }

    /// A mark or acknowledgement at the current stream time: fed to the
    /// engine and recorded at once. After a seek back the recording is
    /// already past this place, and a file in time order cannot take it
    /// here: a mark is then written where the recording has reached, its
    /// text saying where it was made; an acknowledgement (which would
    /// acknowledge other alerts there) is not written, and is said at the
    /// end ([`PlayerOutcome::unrecorded`]).
    fn operator(&mut self, action: Operator) {
        let Some(now) = self.pipe.engine.now_ns() else { return };
        let ev = action.event(now);
        let behind = self.seq < self.recorded_upto;
        let pass = if behind { Pass::Again } else { Pass::First };
        let mut out = std::mem::take(&mut self.out);
        self.pipe.step(&ev, self.src.sources(), pass, &mut out);
        if behind && self.pipe.status.recording.is_some() {
            self.record_behind(&ev);
        }
        if !behind {
            self.sink.event(&ev, self.src.sources());
        }
        // Checkpoints further on were taken without this event.
        let seq = self.seq;
        self.checkpoints.retain(|c| c.seq <= seq);
        self.operator_events.push((self.seq, ev));
        self.produced(&mut out, true);
        self.out = out;
    }

    /// Records an operator event made behind the end of the recording.
    fn record_behind(&mut self, ev: &Event) {
        let crate::event::Payload::Mark(text) = &ev.payload else {
            self.unrecorded.push(ev.clone());
            return;
        };
        let status = &self.pipe.status;
        let at_ns = status.recorded_to_ns.unwrap_or(ev.t_ns).max(ev.t_ns);
        let since_s = (ev.t_ns - status.start_ns.unwrap_or(ev.t_ns)) as f64 * 1e-9;
        let stamped = Event::new(
            at_ns,
            ev.source,
            crate::event::Payload::Mark(format!(
                "{text} (made at {}:{:04.1} after a seek back)",
                (since_s / 60.0).floor(),
                since_s % 60.0
            )),
        );
        // Written through the one step, with a scratch engine so the
        // session's engine sees the mark once, at its own place.
        let engine = std::mem::replace(&mut self.pipe.engine, (self.make_engine)());
        let mut scratch = Vec::new();
        self.pipe.step(&stamped, self.src.sources(), Pass::First, &mut scratch);
        self.pipe.engine = engine;
    }

    /// Goes to stream time `target`: from the latest checkpoint at or
    /// before it (or the start) when that is behind the target and ahead
    /// of where the stream is or the target is behind; then fed forward,
    /// unshown, to the last event at or before the target; then shows the
    /// stream's latest snapshot there.
    fn seek(&mut self, target: TimeNs) -> Result<(), PlayerError> {
        let pos = self.pipe.status.position_ns;
        let back = pos.is_some_and(|p| target < p);
        let cp = self.checkpoints.iter().rposition(|c| c.t_ns <= target && c.seq > 0);
        match cp {
            Some(i) if back || self.checkpoints[i].seq > self.seq => self.restore(i)?,
            None if back => self.restart()?,
            _ => {}
        }
        self.step_until = None;
        while let Some(ev) = self.pending.take().or_else(|| self.src.next_event()) {
            if ev.t_ns > target {
                self.pending = Some(ev);
                break;
            }
            self.feed_stream_event(ev, false);
        }
        self.anchor = None;
        if let Some(h) = &self.latency
            && let Ok(mut h) = h.lock()
        {
            // Lateness measured before the seek belongs to another stretch.
            h.reset();
        }
        match self.last_snapshot.clone() {
            Some(s) => self.show(s),
            None => self.show_now(),
        }
        Ok(())
    }

    /// Goes back to checkpoint `i`.
    fn restore(&mut self, i: usize) -> Result<(), PlayerError> {
        let c = &self.checkpoints[i];
        self.src.resume(&c.source).map_err(PlayerError::Rewind)?;
        self.pipe.engine = c.engine.clone();
        self.seq = c.seq;
        self.last_snapshot = c.last_snapshot.clone();
        self.history.lock().unwrap_or_else(|e| e.into_inner()).at = c.history;
        let status = &mut self.pipe.status;
        status.events_fed = c.seq;
        status.snapshots = c.snapshots;
        status.position_ns = Some(c.t_ns);
        status.finished = false;
        self.pending = None;
        // Marks made after the checkpoint was taken, at its very place.
        let (seq, ops) = (c.seq, c.ops);
        let mut out = std::mem::take(&mut self.out);
        for (_, op) in self.operator_events[ops..].iter().filter(|(s, _)| *s == seq) {
            self.pipe.step(op, self.src.sources(), Pass::Again, &mut out);
        }
        self.produced(&mut out, false);
        self.out = out;
        Ok(())
    }

    /// Starts the stream and the engine again from the first event.
    fn restart(&mut self) -> Result<(), PlayerError> {
        self.src.rewind().map_err(PlayerError::Rewind)?;
        self.pipe.engine = (self.make_engine)();
        self.seq = 0;
        self.pending = None;
        self.last_snapshot = None;
        self.history.lock().unwrap_or_else(|e| e.into_inner()).at = HistoryMark::default();
        let status = &mut self.pipe.status;
        status.snapshots = 0;
        status.events_fed = 0;
        status.finished = false;
        Ok(())
    }

    fn finish(self) -> PlayerOutcome {
        let read_stats = self.src.read_stats();
        let sources = self.src.sources().clone();
        let (engine, recording) = self.pipe.close(&sources);
        PlayerOutcome {
            recording,
            read_stats,
            sources,
            engine,
            snapshots: self.snapshots,
            checkpoints: self.checkpoints.len(),
            unrecorded: self.unrecorded,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::EngineOptions;
    use crate::record::RecordingReader;
    use crate::sources::FileSource;

    fn demo() -> std::path::PathBuf {
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("replays/demo.tvrec")
    }

    /// The demo played as fast as possible with `controls` queued first,
    /// recorded; the recording's lines.
    fn recorded(controls: Vec<Control>) -> Vec<String> {
        let src = FileSource::open(&demo()).unwrap();
        let cfg = Arc::new(src.header().config_set(&[], &demo()).unwrap().0);
        let dir = tempfile::tempdir().unwrap();
        let rec = crate::record::create_recording(dir.path(), "test", &cfg, src.sources()).unwrap();
        let path = rec.1.clone();
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
        let (tx, rx) = mpsc::channel(16);
        for c in controls {
            tx.try_send(c).unwrap();
        }
        drop(tx);
        let opts = PlayerOptions { recorder: Some(rec), ..PlayerOptions::as_fast_as_possible() };
        let make = move || Engine::new(cfg.clone(), EngineOptions::default());
        let out = rt.block_on(play(src, make, opts, rx, &mut |_: Arc<Snapshot>, _: &StreamStatus| {})).unwrap();
        assert_eq!(out.recording.failures, 0);
        let mut r = RecordingReader::open(&path).unwrap();
        let mut lines = Vec::new();
        while let Some(ev) = r.next_event() {
            let mut l = Vec::new();
            crate::record::writer::format_event(&mut l, &ev, r.header.sources.name(ev.source));
            lines.push(String::from_utf8(l).unwrap());
        }
        lines
    }

    #[test]
    fn an_acknowledgement_is_recorded_once_though_a_seek_back_plays_it_again() {
        let t0 = FileSource::open(&demo()).unwrap().next_event().unwrap().t_ns;
        let lines = recorded(vec![
            Control::Playback(Playback::SeekTo(t0 + 60 * NS_PER_S)),
            Control::Operator(Operator::Ack("*".into())),
            Control::Playback(Playback::SeekTo(t0 + 20 * NS_PER_S)),
        ]);
        let count = |what: &str| lines.iter().filter(|l| l.contains(what)).count();
        assert_eq!(count(" op ack *"), 1);
        // Three alerts were active at 60 s: each acknowledged, once.
        for key in ["boost-low", "target", "derating"] {
            assert_eq!(count(&format!(" session note alert ack {key}\n")), 1, "{key}");
        }
        // And every stream event once, as a straight run records it.
        let straight = recorded(vec![]);
        let events = |ls: &[String]| ls.iter().filter(|l| !l.contains(" op ") && !l.contains(" session note ")).count();
        assert_eq!(events(&lines), events(&straight));
    }

    /// The demo played with `controls` queued first, starting paused or
    /// not, not recorded: what the sink got, in order (snapshot time, its
    /// acknowledged alerts, marks, the status's position and pause).
    fn shown(start_paused: bool, controls: Vec<Control>) -> Vec<(TimeNs, usize, usize, Option<TimeNs>, bool)> {
        let src = FileSource::open(&demo()).unwrap();
        let cfg = Arc::new(src.header().config_set(&[], &demo()).unwrap().0);
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
        let (tx, rx) = mpsc::channel(16);
        for c in controls {
            tx.try_send(c).unwrap();
        }
        drop(tx);
        let opts = PlayerOptions { speed: 1.0, start_paused, ..PlayerOptions::as_fast_as_possible() };
        let make = move || Engine::new(cfg.clone(), EngineOptions::default());
        let mut got = Vec::new();
        let mut sink = |s: Arc<Snapshot>, st: &StreamStatus| {
            got.push((s.t_ns, s.alerts.iter().filter(|a| a.acked).count(), s.marks, st.position_ns, st.paused))
        };
        rt.block_on(play(src, make, opts, rx, &mut sink)).unwrap();
        got
    }

    // Issue 15, item 3: `--paused` waited at "waiting for the first
    // snapshot" and the seek and step keys did nothing until Space.
    // Issue 15, item 2: while paused, an acknowledgement or a mark showed
    // nothing until the next step, and a seek landing on the start left
    // the old frame.
    #[test]
    fn starting_paused_shows_the_first_snapshot_and_every_paused_key_shows_its_outcome() {
        let t0 = FileSource::open(&demo()).unwrap().next_event().unwrap().t_ns;
        let got = shown(
            true,
            vec![
                Control::Playback(Playback::SeekBy(60 * NS_PER_S)),
                Control::Operator(Operator::Ack("*".into())),
                Control::Operator(Operator::Mark("here".into())),
                Control::Playback(Playback::SeekBy(-90 * NS_PER_S)),
                Control::Playback(Playback::Step),
                Control::Playback(Playback::Step),
            ],
        );
        // The first snapshot, at once, paused.
        let first = got[0];
        assert!(first.0 <= t0 + NS_PER_S / 10 + NS_PER_S / 10, "{} after the start", first.0 - t0);
        assert!(first.4, "paused");
        let n0 = got.len();
        assert_eq!(n0, 6 + 1, "one frame per key: {got:?}");
        // The seek forward from the first snapshot landed near 60 s in.
        assert!(got[1].3.unwrap() - t0 >= 59 * NS_PER_S, "{:?}", got[1]);
        let acks_before = got[1].1;
        // The acknowledgement shows at once; so does the mark.
        assert!(got[2].1 > acks_before, "acknowledged at once: {got:?}");
        assert_eq!(got[3].2, got[2].2 + 1, "the mark shows at once");
        // Back to the start: the frame is at the start, not at 60 s.
        assert_eq!(got[4].3, Some(t0), "{got:?}");
        assert!(got[4].0 - t0 < NS_PER_S);
        // Steps move on a tenth of a second each.
        assert!(got[5].0 > got[4].0 && got[6].0 == got[5].0 + NS_PER_S / 10, "{got:?}");
        assert!(got.iter().all(|g| g.4), "still paused");
    }

    // Issue 15, item 19: a mark made after a seek back went into the
    // replay's copy behind later events, out of time order. It goes in
    // where the copy has reached, saying where it was made; an
    // acknowledgement there is listed as not recorded.
    #[test]
    fn a_mark_behind_the_recording_keeps_the_copy_in_time_order() {
        let t0 = FileSource::open(&demo()).unwrap().next_event().unwrap().t_ns;
        let src = FileSource::open(&demo()).unwrap();
        let cfg = Arc::new(src.header().config_set(&[], &demo()).unwrap().0);
        let dir = tempfile::tempdir().unwrap();
        let rec = crate::record::create_recording(dir.path(), "test", &cfg, src.sources()).unwrap();
        let path = rec.1.clone();
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
        let (tx, rx) = mpsc::channel(16);
        for c in [
            Control::Playback(Playback::SeekTo(t0 + 60 * NS_PER_S)),
            Control::Operator(Operator::Mark("at 60".into())),
            Control::Playback(Playback::SeekTo(t0 + 20 * NS_PER_S)),
            Control::Operator(Operator::Mark("at 20".into())),
            Control::Operator(Operator::Ack("*".into())),
        ] {
            tx.try_send(c).unwrap();
        }
        drop(tx);
        let opts = PlayerOptions { recorder: Some(rec), ..PlayerOptions::as_fast_as_possible() };
        let make = move || Engine::new(cfg.clone(), EngineOptions::default());
        let out = rt.block_on(play(src, make, opts, rx, &mut |_: Arc<Snapshot>, _: &StreamStatus| {})).unwrap();
        assert_eq!(out.unrecorded.len(), 1, "the acknowledgement behind the recording");
        assert_eq!(out.unrecorded[0].payload, crate::event::Payload::Ack("*".into()));
        let marks = out.engine.marks();
        assert_eq!(marks.len(), 2, "both marks were applied in the session, each at its place");
        assert!(marks[0].1 == "at 20" && marks[1].1 == "at 60" && marks[0].0 < marks[1].0, "{marks:?}");
        let mut r = RecordingReader::open(&path).unwrap();
        let marks: Vec<_> = std::iter::from_fn(|| r.next_event())
            .filter_map(|e| match e.payload {
                crate::event::Payload::Mark(m) => Some((e.t_ns, m)),
                _ => None,
            })
            .collect();
        assert_eq!(marks.len(), 2);
        assert_eq!(marks[0].1, "at 60");
        assert_eq!(marks[1].1, "at 20 (made at 0:20.0 after a seek back)");
        assert!(marks[1].0 >= marks[0].0);
        assert_eq!(r.stats.time.time_reversals, 0, "the copy is in time order");
    }

    // Issue 15, item 23: the checkpoints' memory is bounded whatever the
    // stream's length: past MAX_CHECKPOINTS they thin out.
    #[test]
    fn checkpoints_stay_bounded_in_a_long_stream() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("long.log");
        // Three hours, a frame every 5 s: 1 080 slots of 10 s.
        let text: String = (0..2160).map(|i| format!("({}.000000) can0 123#00\n", 1_000 + i * 5)).collect();
        std::fs::write(&path, text).unwrap();
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
        let (_tx, rx) = mpsc::channel(1);
        let opts = PlayerOptions::as_fast_as_possible();
        let make = || Engine::new(Arc::new(crate::config::ConfigSet::embedded()), EngineOptions::default());
        let src = FileSource::open(&path).unwrap();
        let out = rt.block_on(play(src, make, opts, rx, &mut |_: Arc<Snapshot>, _: &StreamStatus| {})).unwrap();
        assert!(out.checkpoints <= MAX_CHECKPOINTS && out.checkpoints > MAX_CHECKPOINTS / 4, "{}", out.checkpoints);
    }

    // Issue 15, item 11: the feed screen's latency count ran on across
    // seeks (32 807 measured against 29 303 events). A seek starts it again.
    #[test]
    fn a_seek_starts_the_latency_count_again() {
        let t0 = FileSource::open(&demo()).unwrap().next_event().unwrap().t_ns;
        let src = FileSource::open(&demo()).unwrap();
        let cfg = Arc::new(src.header().config_set(&[], &demo()).unwrap().0);
        let rt = tokio::runtime::Builder::new_current_thread().enable_time().start_paused(true).build().unwrap();
        let (tx, rx) = mpsc::channel(4);
        let latency = crate::stream::latency_histogram();
        let opts =
            PlayerOptions { speed: 64.0, latency: Some(latency.clone()), ..PlayerOptions::as_fast_as_possible() };
        let make = move || Engine::new(cfg.clone(), EngineOptions::default());
        // After a second at x64 (about 64 s of stream), back to 10 s in.
        let mut landed_fed = None;
        let mut prev = None;
        let mut sink = |_: Arc<Snapshot>, st: &StreamStatus| {
            if prev.is_some_and(|p| st.position_ns < Some(p)) {
                landed_fed.get_or_insert(st.events_fed);
            }
            prev = st.position_ns;
        };
        let out = rt
            .block_on(async {
                tokio::spawn(async move {
                    tokio::time::sleep(Duration::from_secs(1)).await;
                    tx.send(Control::Playback(Playback::SeekTo(t0 + 10 * NS_PER_S))).await.unwrap();
                });
                play(src, make, opts, rx, &mut sink).await
            })
            .unwrap();
        let measured = latency.lock().unwrap().len();
        let landed_fed = landed_fed.expect("the seek back happened");
        assert!(landed_fed < out.read_stats.events / 4, "{landed_fed}");
        assert_eq!(measured, out.read_stats.events - landed_fed, "only the events paced after the seek");
    }
}
