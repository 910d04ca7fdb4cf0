//! The real-time driver: events from every live source, merged in arrival
//! order, through the pipeline (engine and recorder); snapshots to the
//! screens or the headless printer. It adds a clock tick every 100 ms
//! (recorded, so a replay judges staleness exactly as the live run did),
//! measures how long each event waited between arrival and being applied,
//! and writes every event to the recording: nothing that reached the
//! stream is dropped.
//!
//! Time never goes back in what it applies and records. Sources stamp on
//! arrival and the clock ticks are stamped here, so a tick taken while
//! events still wait in the channel, or two sources that stamp and send in
//! the opposite order, would otherwise record a reversal. Each batch is
//! applied in stamp order, and an event or tick stamped before the last
//! one applied is applied at that last time (it cannot have been applied
//! earlier); the latency histogram still measures from its arrival.

use std::fs::File;
use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

use tokio::sync::{mpsc, watch};

use super::control::Control;
use super::latency::{LatencyHistogram, record_latency};
use super::pipeline::{Pass, Pipeline, RecordingOutcome};
use super::sink::{SnapshotSink, StreamStatus};
use crate::engine::{Engine, Snapshot};
use crate::event::{Event, OPERATOR, Payload, SESSION, SourceTable, TimeNs};
use crate::record::RecordingWriter;
use crate::sources::link::SessionClock;

/// Interval of the clock ticks and of the recorder's wall-clock flush.
pub const TICK: Duration = Duration::from_millis(100);
/// Events taken from the input at a time.
pub const BATCH: usize = 1024;

/// What a live session ends with.
pub struct LiveOutcome {
    pub engine: Engine,
    pub events: u64,
    /// The recording written, how many events went into it, and what its
    /// file failed to take (held, dropped, unwritten).
    pub recording: RecordingOutcome,
    /// Why it ended.
    pub reason: &'static str,
}

/// Settings of a live session.
pub struct LiveOptions {
    pub engine: Engine,
    pub sources: SourceTable,
    pub clock: SessionClock,
    pub recorder: Option<(RecordingWriter<File>, PathBuf)>,
    pub latency: Option<LatencyHistogram>,
    /// Stop after this long (for scripts and tests).
    pub duration: Option<Duration>,
}

struct State<'k, K> {
    pipe: Pipeline,
    sources: SourceTable,
    clock: SessionClock,
    latency: Option<LatencyHistogram>,
    events: u64,
    sink: &'k mut K,
    snaps: Vec<Snapshot>,
    /// Stamp of the last event applied: none is applied before it.
    last_applied_ns: TimeNs,
    /// A followed run's source table as its input grows it (a CAN
    /// interface met in an event line); `None` live, where it is fixed.
    grow: Option<watch::Receiver<SourceTable>>,
}

impl<K: SnapshotSink> State<'_, K> {
    fn handle(&mut self, mut ev: Event) {
        if let Payload::Note(text) = ev.payload {
            // No source sends notes: a followed run's input puts its own
            // (batches lost, a late start) where they belong.
            let t = ev.t_ns.max(self.last_applied_ns);
            self.pipe.annotate(t, text, &self.sources);
            return;
        }
        self.events += 1;
        self.pipe.status.start_ns.get_or_insert(ev.t_ns);
        if ev.source.0 as usize >= self.sources.len()
            && let Some(g) = &self.grow
        {
            // The input adds a source to its table before it sends the first event of it.
            self.sources = g.borrow().clone();
        }
        let arrival = ev.t_ns;
        ev.t_ns = ev.t_ns.max(self.last_applied_ns);
        self.last_applied_ns = ev.t_ns;
        self.pipe.step(&ev, &self.sources, Pass::First, &mut self.snaps);
        self.sink.event(&ev, &self.sources);
        if ev.source != SESSION
            && ev.source != OPERATOR
            && let Some(h) = &self.latency
        {
            record_latency(h, ((self.clock.now_ns() - arrival) / 1000).max(1) as u64);
        }
        let status = &mut self.pipe.status;
        status.position_ns = Some(ev.t_ns.max(status.position_ns.unwrap_or(ev.t_ns)));
        status.events_fed = self.events;
        self.emit();
    }

    fn emit(&mut self) {
        for s in self.snaps.drain(..) {
            self.pipe.status.snapshots += 1;
            self.sink.snapshot(Arc::new(s), &self.pipe.status);
        }
    }
}

/// Runs until `controls` says quit (or closes), the duration passes, or
/// every source has ended. `stop` tells the sources to end; the events they
/// had already sent are drained and recorded before this returns.
pub async fn run<K: SnapshotSink>(
    opts: LiveOptions,
    input: mpsc::Receiver<Event>,
    controls: mpsc::Receiver<Control>,
    stop: watch::Sender<bool>,
    sink: &mut K,
) -> LiveOutcome {
    drive(opts, input, controls, stop, sink, None).await
}

/// As [`run`], for a run followed from a broker (`termvel follow`): the
/// input is the publisher's own events, its clock ticks among them, so no
/// tick is added here (the follower's engine sees what the reading
/// station's saw); the stream's start is its first event; notes in the
/// input are this session's own, recorded where they stand. `opts.clock`
/// only times the recorder's flushes; `sources` is the table as the input
/// grows it (updated before the first event of a new source is sent).
pub async fn follow<K: SnapshotSink>(
    opts: LiveOptions,
    input: mpsc::Receiver<Event>,
    sources: watch::Receiver<SourceTable>,
    controls: mpsc::Receiver<Control>,
    stop: watch::Sender<bool>,
    sink: &mut K,
) -> LiveOutcome {
    drive(opts, input, controls, stop, sink, Some(sources)).await
}

/// `grow`: a followed run's growing source table; also says that the input
/// brings its own clock ticks.
async fn drive<K: SnapshotSink>(
    opts: LiveOptions,
    mut input: mpsc::Receiver<Event>,
    mut controls: mpsc::Receiver<Control>,
    stop: watch::Sender<bool>,
    sink: &mut K,
    grow: Option<watch::Receiver<SourceTable>>,
) -> LiveOutcome {
    let ticks = grow.is_none();
    let start_ns = if ticks { Some(opts.clock.start_ns()) } else { None };
    let status = StreamStatus { start_ns, ..StreamStatus::default() };
    let mut st = State {
        pipe: Pipeline::new(opts.engine, opts.recorder, status),
        sources: opts.sources,
        clock: opts.clock,
        latency: opts.latency,
        events: 0,
        sink,
        snaps: Vec::new(),
        last_applied_ns: TimeNs::MIN,
        grow,
    };
    let mut tick = tokio::time::interval(TICK);
    tick.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    let deadline = opts.duration.map(|d| tokio::time::Instant::now() + d);
    let mut batch = Vec::with_capacity(BATCH);
    let mut controls_open = true;
    let reason = loop {
        tokio::select! {
            n = input.recv_many(&mut batch, BATCH) => {
                if n == 0 {
                    break "every source ended";
                }
                // Sources stamp before they send, so two of them can arrive
                // out of stamp order; a stable sort keeps each one's order.
                batch.sort_by_key(|e| e.t_ns);
                for ev in batch.drain(..) {
                    st.handle(ev);
                }
            }
            _ = tick.tick() => {
                if ticks {
                    let t = st.clock.now_ns();
                    st.handle(Event::new(t, SESSION, Payload::Tick));
                }
                st.pipe.flush(&st.sources);
            }
            c = controls.recv(), if controls_open => match c {
                Some(Control::Operator(action)) => {
                    let t = st.clock.now_ns();
                    st.handle(action.event(t));
                }
                Some(Control::Quit) => break "quit",
                // A live run cannot pause, seek or change pace: its status,
                // unchanged, is the answer the screens show.
                Some(Control::Playback(_)) => st.sink.status(&st.pipe.status),
                None => controls_open = false,
            },
            _ = async { tokio::time::sleep_until(deadline.expect("guarded")).await }, if deadline.is_some() => break "the duration passed",
        }
    };
    // Tell the sources to stop, then record what they had already sent.
    let _ = stop.send(true);
    let drain_until = tokio::time::Instant::now() + Duration::from_secs(2);
    loop {
        tokio::select! {
            n = input.recv_many(&mut batch, BATCH) => {
                if n == 0 {
                    break;
                }
                batch.sort_by_key(|e| e.t_ns);
                for ev in batch.drain(..) {
                    st.handle(ev);
                }
            }
            _ = tokio::time::sleep_until(drain_until) => break,
        }
    }
    // End as a replay of the recording ends, so the two print the same.
    st.pipe.end_of_stream(&st.sources, &mut st.snaps);
    st.emit();
    let events = st.events;
    let (engine, recording) = st.pipe.close(&st.sources);
    LiveOutcome { engine, events, recording, reason }
}

/// The figures a live session ends with, for the headless summary line:
/// events taken and recorded, the arrival-to-applied latency (µs: p50, p99,
/// max, from the histogram the feed screen shows) and the processor time
/// the whole process used (user + system, seconds).
pub fn figures(out: &LiveOutcome, latency: &LatencyHistogram) -> serde_json::Value {
    let lat = match latency.lock() {
        Ok(h) if !h.is_empty() => serde_json::json!({
            "count": h.len(),
            "p50": h.value_at_quantile(0.50),
            "p99": h.value_at_quantile(0.99),
            "max": h.max(),
        }),
        _ => serde_json::Value::Null,
    };
    serde_json::json!({
        "events": out.events,
        "recorded_events": out.recording.events,
        "latency_us": lat,
        "cpu_s": cpu_seconds(),
        "ended": out.reason,
    })
}

/// Processor time used by this process so far (user + system), seconds.
pub fn cpu_seconds() -> f64 {
    // SAFETY: getrusage fills the struct it is given.
    let mut ru: libc::rusage = unsafe { std::mem::zeroed() };
    if unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut ru) } != 0 {
        return f64::NAN;
    }
    let tv = |t: libc::timeval| t.tv_sec as f64 + t.tv_usec as f64 * 1e-6;
    tv(ru.ru_utime) + tv(ru.ru_stime)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::config::ConfigSet;
    use crate::engine::EngineOptions;
    use crate::event::SourceKind;
    use crate::record::RecordingReader;
    use crate::stream::control::{Operator, Playback};

    /// Keeps what a live run shows: statuses without a snapshot.
    #[derive(Default)]
    struct Shown {
        statuses: Vec<StreamStatus>,
    }

    impl SnapshotSink for Shown {
        fn snapshot(&mut self, _snap: Arc<Snapshot>, _status: &StreamStatus) {}
        fn status(&mut self, status: &StreamStatus) {
            self.statuses.push(status.clone());
        }
    }

    // Issue 13, item 8: a tick stamped at processing time went into the
    // recording before events that had arrived (and been stamped) earlier,
    // and a batch was applied in channel order, not stamp order: a busy live
    // recording went back in time.
    #[tokio::test]
    async fn a_live_recording_never_goes_back_in_time() {
        let config = Arc::new(ConfigSet::embedded());
        let mut sources = SourceTable::default();
        let (a, b) = (sources.intern("a", SourceKind::Lines), sources.intern("b", SourceKind::Lines));
        let dir = tempfile::tempdir().unwrap();
        let rec = crate::record::create_recording(dir.path(), "live", &config, &sources).unwrap();
        let path = rec.1.clone();
        let clock = SessionClock::start();
        let opts = LiveOptions {
            engine: Engine::new(config, EngineOptions::default()),
            sources,
            clock,
            recorder: Some(rec),
            latency: None,
            duration: Some(Duration::from_millis(600)),
        };
        let (tx, input) = mpsc::channel(1 << 14);
        let (_ctl, controls) = mpsc::channel(4);
        let (stop, _stopped) = watch::channel(false);
        // Events stamped now but sent after a few ticks have been stamped
        // (a busy pipeline), and two sources that send in the opposite
        // order of their stamps.
        let line = |t, src| Event::new(t, src, Payload::Line(b"x=1 #00".to_vec()));
        let early = clock.now_ns();
        tokio::spawn(async move {
            tokio::time::sleep(Duration::from_millis(250)).await;
            for k in 0..2000 {
                tx.send(line(early + 10 * k + 5, a)).await.unwrap();
                tx.send(line(early + 10 * k, b)).await.unwrap();
            }
        });
        let mut shown = Shown::default();
        let out = run(opts, input, controls, stop, &mut shown).await;
        let mut r = RecordingReader::open(&path).unwrap();
        let times: Vec<TimeNs> = std::iter::from_fn(|| r.next_event()).map(|e| e.t_ns).collect();
        // Every event taken, and the engine's notes beside them.
        assert!(times.len() as u64 >= out.events, "{} < {}", times.len(), out.events);
        assert!(times.len() > 4000, "the events and at least two ticks: {}", times.len());
        let back = times.windows(2).filter(|w| w[1] < w[0]).count();
        assert_eq!(back, 0, "the recording goes back in time {back} times");
    }

    #[tokio::test(start_paused = true)]
    async fn live_records_marks_and_answers_playback_with_its_status() {
        let config = Arc::new(ConfigSet::embedded());
        let sources = SourceTable::default();
        let dir = tempfile::tempdir().unwrap();
        let rec = crate::record::create_recording(dir.path(), "live", &config, &sources).unwrap();
        let path = rec.1.clone();
        let opts = LiveOptions {
            engine: Engine::new(config, EngineOptions::default()),
            sources,
            clock: SessionClock::start(),
            recorder: Some(rec),
            latency: None,
            duration: None,
        };
        // The input stays open (a source that is quiet), so only the controls end the run.
        let (_input_tx, input) = mpsc::channel(4);
        let (ctl, controls) = mpsc::channel(4);
        let (stop, stopped) = watch::channel(false);
        for c in [
            Control::Playback(Playback::TogglePause),
            Control::Operator(Operator::Mark("boost on".into())),
            Control::Playback(Playback::SeekBy(-5 * crate::event::NS_PER_S)),
            Control::Quit,
        ] {
            ctl.send(c).await.unwrap();
        }
        let mut shown = Shown::default();
        let out = run(opts, input, controls, stop, &mut shown).await;
        assert_eq!(out.reason, "quit");
        assert!(*stopped.borrow(), "the sources were told to stop");
        assert_eq!(shown.statuses.len(), 2, "each playback control is answered");
        for s in &shown.statuses {
            assert!(!s.paused && s.speed == 1.0 && !s.finished, "unchanged: {s:?}");
            assert_eq!(s.recording.as_deref(), Some(path.as_path()));
        }
        assert_eq!((out.recording.failures, out.recording.path.as_deref()), (0, Some(path.as_path())));
        let mut r = RecordingReader::open(&path).unwrap();
        let marks: Vec<Payload> = std::iter::from_fn(|| r.next_event())
            .map(|e| e.payload)
            .filter(|p| matches!(p, Payload::Mark(_)))
            .collect();
        assert_eq!(marks, vec![Payload::Mark("boost on".into())]);
        assert_eq!(out.recording.events, out.events, "every event taken is recorded");
    }

    // Issue 16, item 3: a followed run is fed the publisher's own events:
    // no tick of this station's is added, its notes (batches lost between
    // two times) are recorded where they stand, a source the input adds
    // later is known to the recording, and the stream starts at its first
    // event.
    #[tokio::test(start_paused = true)]
    async fn a_followed_run_records_its_gap_notes_and_adds_no_ticks() {
        let config = Arc::new(ConfigSet::embedded());
        let mut sources = SourceTable::default();
        let gnss = sources.intern("gnss0", SourceKind::Nmea);
        let dir = tempfile::tempdir().unwrap();
        let rec = crate::record::create_recording(dir.path(), "follow", &config, &sources).unwrap();
        let path = rec.1.clone();
        let opts = LiveOptions {
            engine: Engine::new(config, EngineOptions::default()),
            sources: sources.clone(),
            clock: SessionClock::start(),
            recorder: Some(rec),
            latency: None,
            duration: None,
        };
        let (tx, input) = mpsc::channel(64);
        let (grow_tx, grow) = watch::channel(sources.clone());
        let (_ctl, controls) = mpsc::channel(4);
        let (stop, _stopped) = watch::channel(false);
        let s = 1_000_000_000;
        let line = |t, src| Event::new(t, src, Payload::Line(b"$GPRMC,x*00".to_vec()));
        let note = "share: 2 event batches lost between 5.100 s and 5.400 s (7 events)".to_string();
        let mut grown = sources.clone();
        let can1 = grown.intern("can1", SourceKind::Can);
        let frame = crate::event::CanFrame::Data(
            crate::event::DataFrame::new(crate::event::CanId::standard(0x10).unwrap(), &[1]).unwrap(),
        );
        let feed = tokio::spawn(async move {
            tx.send(line(5 * s, gnss)).await.unwrap();
            tx.send(Event::new(5 * s + 100_000_000, SESSION, Payload::Tick)).await.unwrap();
            // A second of wall time: a live run would add ten ticks here.
            tokio::time::sleep(Duration::from_secs(1)).await;
            tx.send(Event::new(5 * s + 400_000_000, SESSION, Payload::Note(note))).await.unwrap();
            grow_tx.send_replace(grown);
            tx.send(Event::new(5 * s + 400_000_000, can1, Payload::Can(frame))).await.unwrap();
            tx.send(line(5 * s + 500_000_000, gnss)).await.unwrap();
        });
        let mut last_status = None;
        let mut sink = |_s: Arc<Snapshot>, st: &StreamStatus| last_status = Some(st.clone());
        let out = follow(opts, input, grow, controls, stop, &mut sink).await;
        feed.await.unwrap();
        assert_eq!(out.reason, "every source ended");
        assert_eq!(last_status.and_then(|st| st.start_ns), Some(5 * s), "the stream starts at its first event");
        let mut r = RecordingReader::open(&path).unwrap();
        let read: Vec<Event> = std::iter::from_fn(|| r.next_event())
            .filter(|e| !matches!(&e.payload, Payload::Note(n) if !n.starts_with("share: ")))
            .collect();
        let events: Vec<(TimeNs, String, Payload)> =
            read.into_iter().map(|e| (e.t_ns, r.header.sources.name(e.source).to_string(), e.payload)).collect();
        let kinds: Vec<(TimeNs, &str, &str)> = events
            .iter()
            .map(|(t, n, p)| {
                let k = match p {
                    Payload::Tick => "tick",
                    Payload::Note(_) => "note",
                    Payload::Line(_) => "line",
                    Payload::Can(_) => "can",
                    _ => "other",
                };
                (*t, n.as_str(), k)
            })
            .collect();
        assert_eq!(
            kinds,
            vec![
                (5 * s, "gnss0", "line"),
                (5 * s + 100_000_000, "session", "tick"),
                (5 * s + 400_000_000, "session", "note"),
                (5 * s + 400_000_000, "can1", "can"),
                (5 * s + 500_000_000, "gnss0", "line"),
            ],
            "the publisher's tick only, the gap's note where the gap is"
        );
        assert_eq!(out.events, 4, "the note is not an input event");
    }
}
