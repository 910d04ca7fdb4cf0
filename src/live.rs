//! The live pipeline: events from every source, merged in arrival order,
//! through the engine and the recorder; snapshots to the screens or the
//! headless printer. It adds a clock tick every 100 ms (recorded, so a
//! replay judges staleness exactly as the live run did), measures how long
//! each event waited between arrival and being applied, and writes every
//! event to the recording: nothing that reached the pipeline is dropped.

use std::path::PathBuf;
use std::sync::Arc;
use std::time::Duration;

use tokio::sync::{mpsc, watch};

use crate::engine::Engine;
use crate::event::{Event, OPERATOR, Payload, SESSION, SourceTable};
use crate::player::{Control, PlayerStatus, SnapshotSink};
use crate::record::RecordingWriter;
use crate::sources::live::SessionClock;
use crate::ui::LatencyHistogram;

/// Interval of the clock ticks and of the recorder's wall-clock flush.
pub const TICK: Duration = Duration::from_millis(100);
/// Events taken from the input at a time.
pub const BATCH: usize = 1024;

/// What a live session ends with.
pub struct LiveOutcome {
    pub engine: Engine,
    pub events: u64,
    pub recording: Option<PathBuf>,
    pub recorded_events: u64,
    /// Why it ended.
    pub reason: &'static str,
}

/// Settings of the pipeline.
pub struct Pipeline {
    pub engine: Engine,
    pub sources: SourceTable,
    pub clock: SessionClock,
    pub recorder: Option<(RecordingWriter<std::fs::File>, PathBuf)>,
    pub latency: Option<LatencyHistogram>,
    /// Stop after this long (for scripts and tests).
    pub duration: Option<Duration>,
}

struct State<'k, K> {
    engine: Engine,
    sources: SourceTable,
    clock: SessionClock,
    recorder: Option<RecordingWriter<std::fs::File>>,
    status: PlayerStatus,
    latency: Option<LatencyHistogram>,
    events: u64,
    sink: &'k mut K,
    snaps: Vec<crate::engine::Snapshot>,
}

impl<K: SnapshotSink> State<'_, K> {
    fn handle(&mut self, ev: Event) {
        self.events += 1;
        let arrival = ev.t_ns;
        self.engine.feed(&ev, &self.sources, &mut |s| self.snaps.push(s));
        let notes = self.engine.take_notes();
        if let Some(r) = self.recorder.as_mut() {
            let mut ok = true;
            for (t, n) in notes {
                ok &= r.write_event(&Event::new(t, SESSION, Payload::Note(n)), &self.sources).is_ok();
            }
            ok &= r.write_event(&ev, &self.sources).is_ok();
            if !ok {
                tracing::error!("the recording failed; recording stopped");
                self.recorder = None;
                self.status.recording = None;
            }
        }
        if ev.source != SESSION
            && ev.source != OPERATOR
            && let Some(h) = &self.latency
            && let Ok(mut h) = h.lock()
        {
            let waited_us = ((self.clock.now_ns() - arrival) / 1000).max(1) as u64;
            h.saturating_record(waited_us);
        }
        self.status.position_ns = Some(ev.t_ns.max(self.status.position_ns.unwrap_or(ev.t_ns)));
        self.status.events_fed = self.events;
        for s in self.snaps.drain(..) {
            self.sink.snapshot(Arc::new(s), &self.status);
        }
    }
}

/// Runs until `controls` says quit (or closes), the duration passes, or
/// every source has ended. `stop` tells the sources to end; the events they
/// had already sent are drained and recorded before this returns.
pub async fn run<K: SnapshotSink>(
    p: Pipeline,
    mut input: mpsc::Receiver<Event>,
    mut controls: mpsc::Receiver<Control>,
    stop: watch::Sender<bool>,
    sink: &mut K,
) -> LiveOutcome {
    let rec_path = p.recorder.as_ref().map(|r| r.1.clone());
    let mut st = State {
        engine: p.engine,
        sources: p.sources,
        clock: p.clock,
        recorder: p.recorder.map(|r| r.0),
        status: PlayerStatus {
            start_ns: Some(p.clock.start_ns()),
            position_ns: None,
            speed: 1.0,
            paused: false,
            finished: false,
            recording: rec_path.clone(),
            events_fed: 0,
        },
        latency: p.latency,
        events: 0,
        sink,
        snaps: Vec::new(),
    };
    let mut tick = tokio::time::interval(TICK);
    tick.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    let deadline = p.duration.map(|d| tokio::time::Instant::now() + d);
    let mut batch = Vec::with_capacity(BATCH);
    let mut controls_open = true;
    let reason = loop {
        tokio::select! {
            n = input.recv_many(&mut batch, BATCH) => {
                if n == 0 {
                    break "every source ended";
                }
                for ev in batch.drain(..) {
                    st.handle(ev);
                }
            }
            _ = tick.tick() => {
                let t = st.clock.now_ns();
                st.handle(Event::new(t, SESSION, Payload::Tick));
                if let Some(r) = st.recorder.as_mut() {
                    let _ = r.flush();
                }
            }
            c = controls.recv(), if controls_open => match c {
                Some(Control::Mark(text)) => {
                    let t = st.clock.now_ns();
                    st.handle(Event::new(t, OPERATOR, Payload::Mark(text)));
                }
                Some(Control::Ack(key)) => {
                    let t = st.clock.now_ns();
                    st.handle(Event::new(t, OPERATOR, Payload::Ack(key)));
                }
                Some(Control::Quit) => break "quit",
                // A live run cannot pause, seek or change pace.
                Some(_) => st.sink.status(&st.status),
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
                for ev in batch.drain(..) {
                    st.handle(ev);
                }
            }
            _ = tokio::time::sleep_until(drain_until) => break,
        }
    }
    // End as a replay of the recording ends, so the two print the same.
    st.engine.finish(&st.sources, &mut |s| st.snaps.push(s));
    st.status.finished = true;
    for s in st.snaps.drain(..) {
        st.sink.snapshot(Arc::new(s), &st.status);
    }
    let recorded_events = st.recorder.as_ref().map_or(0, |r| r.events());
    if let Some(r) = st.recorder.as_mut()
        && let Err(e) = r.flush()
    {
        tracing::error!("the recording could not be flushed: {e}");
    }
    LiveOutcome { engine: st.engine, events: st.events, recording: rec_path, recorded_events, reason }
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
        "recorded_events": out.recorded_events,
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
