//! The paced driver: runs a finite event stream (a recording, a candump
//! log, the rehearsal simulator) through the pipeline at a chosen pace,
//! with the controls an engineer uses after a run: pause, resume, speed
//! x0.1 to x64 or as fast as possible, seek to a time or by an amount,
//! single-step, and operator marks and acknowledgements that go into the
//! recording.
//!
//! Pacing is the only thing here that reads a clock (tokio's, so tests run
//! it on paused time). The engine sees the same events in the same order
//! whatever the pace, so its snapshots are identical paced or not. Seeking
//! backwards restarts the stream and the engine and feeds them forward
//! quickly to the target, so derived values after a seek are exactly those
//! of a straight run.

use std::fs::File;
use std::path::PathBuf;
use std::sync::Arc;
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
use crate::sources::{EventSource, RewindError};

/// Why a paced run stopped short.
#[derive(Debug, thiserror::Error)]
pub enum PlayerError {
    /// Seeking back needs the stream from its first event, and the source
    /// could not start again.
    #[error("cannot seek back: the stream could not start again")]
    Rewind(#[source] RewindError),
}

/// What a player run ends with.
#[derive(Clone, Debug)]
pub struct PlayerOutcome {
    pub engine: Engine,
    pub sources: SourceTable,
    pub read_stats: ReadStats,
    pub snapshots: u64,
    /// The recording written, how many events went into it, and whether it
    /// stopped on a failed write.
    pub recording: RecordingOutcome,
}

/// Settings of a player run.
pub struct PlayerOptions {
    /// Initial speed; `f64::INFINITY` for as fast as possible.
    pub speed: f64,
    pub start_paused: bool,
    /// Keep running (paused at the end) until told to quit, for screens;
    /// headless runs end with the stream.
    pub hold_at_end: bool,
    pub recorder: Option<(RecordingWriter<File>, PathBuf)>,
    /// Where to record, while paced, how late each event is applied after
    /// it was due (µs): the feed screen's histogram.
    pub latency: Option<LatencyHistogram>,
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
) -> Result<PlayerOutcome, PlayerError> {
    let status = StreamStatus { speed: opts.speed, paused: opts.start_paused, ..StreamStatus::default() };
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
        sink,
        last_hidden: None,
        out: Vec::new(),
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
            p.emit_all(&mut out);
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
        if show {
            self.emit_all(&mut out);
        } else if let Some(s) = out.pop() {
            self.last_hidden = Some(s);
        }
        out.clear();
        self.out = out;
    }

    fn emit(&mut self, s: Snapshot) {
        self.snapshots += 1;
        self.sink.snapshot(Arc::new(s), &self.pipe.status);
    }

    fn emit_all(&mut self, out: &mut Vec<Snapshot>) {
        for s in out.drain(..) {
            self.emit(s);
        }
    }

    fn end_of_stream(&mut self) {
        if !self.pipe.status.finished {
            let mut out = std::mem::take(&mut self.out);
            self.pipe.end_of_stream(self.src.sources(), &mut out);
            self.emit_all(&mut out);
            self.out = out;
        }
    }

    /// Applies a control; true to quit.
    fn apply(&mut self, c: Control) -> Result<bool, PlayerError> {
        match c {
            Control::Quit => return Ok(true),
            Control::Operator(action) => self.operator(action),
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
                let from = status.position_ns.unwrap_or(0);
                self.step_until = Some((from.div_euclid(every) + 1) * every);
                status.paused = true;
            }
        }
        Ok(false)
    }

    /// A mark or acknowledgement at the current stream time: fed to the
    /// engine and recorded at once.
    fn operator(&mut self, action: Operator) {
        let Some(now) = self.pipe.engine.now_ns() else { return };
        let ev = action.event(now);
        let mut out = std::mem::take(&mut self.out);
        self.pipe.step(&ev, self.src.sources(), Pass::First, &mut out);
        self.sink.event(&ev, self.src.sources());
        self.operator_events.push((self.seq, ev));
        self.emit_all(&mut out);
        self.out = out;
    }

    fn seek(&mut self, target: TimeNs) -> Result<(), PlayerError> {
        if self.pipe.status.position_ns.is_some_and(|p| target < p) {
            self.src.rewind().map_err(PlayerError::Rewind)?;
            self.pipe.engine = (self.make_engine)();
            self.seq = 0;
            self.pending = None;
            self.pipe.status.finished = false;
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
            None => self.sink.status(&self.pipe.status),
        }
        Ok(())
    }

    fn finish(self) -> PlayerOutcome {
        let read_stats = self.src.read_stats();
        let sources = self.src.sources().clone();
        let (engine, recording) = self.pipe.close();
        PlayerOutcome { recording, read_stats, sources, engine, snapshots: self.snapshots }
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
        let opts = PlayerOptions {
            speed: f64::INFINITY,
            start_paused: false,
            hold_at_end: false,
            recorder: Some(rec),
            latency: None,
        };
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
}
